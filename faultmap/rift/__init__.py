"""Rift geometry and mode (the ``width`` tool).

Rift geometry: axis, along/across-axis frame, widths, heave concentration, narrow/wide
classification, DEM swath profiles, subsidence from stretching, the ``width`` tool and its figures.

Rift axis, width along the axis and narrow/wide classification.

Everything here works in the projected, metric working CRS of the ``faults``
GeoDataFrame (see ``DEVELOPERS.md``). Azimuths are degrees clockwise from
grid north. The rift axis is oriented along the mean strike (0-180 deg); the
across-axis coordinate is positive to the right of the axis direction
(towards azimuth axis + 90 deg).

The narrow/wide rule is ours (no published single-number criterion exists);
it is stated in :func:`classify_rift`, in ``docs/methods/width.md`` and in the
``reasons`` field of every result.

The work is split by what it computes; the public names below are imported
lazily from:

* :mod:`faultmap.rift.heave`: heave per fault and trace piece, heave concentration;
* :mod:`faultmap.rift.axis_frame`: along/across coordinates in a curved axis frame;
* :mod:`faultmap.rift.axis`: the axis, fitted or given;
* :mod:`faultmap.rift.widths`: sections and widths along the axis;
* :mod:`faultmap.rift.classification`: the narrow/wide classification.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "BUCK_MODES": "classification",
    "axial_mean_deg": "axis",
    "fault_heave_m2": "heave",
    "axis_coordinates": "axis_frame",
    "axis_point_direction": "axis_frame",
    "fit_rift_axis": "axis",
    "rift_axis": "axis",
    "rift_sections": "widths",
    "heave_concentration": "heave",
    "classify_rift": "classification",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
