"""Rift axis, width along the axis and narrow/wide classification.

Everything here works in the projected, metric working CRS of the ``faults``
GeoDataFrame (see ``DEVELOPERS.md``). Azimuths are degrees clockwise from
grid north. The rift axis is oriented along the mean strike (0-180 deg); the
across-axis coordinate is positive to the right of the axis direction
(towards azimuth axis + 90 deg).

The narrow/wide rule is ours (no published single-number criterion exists);
it is stated in :func:`classify_rift`, in ``docs/methods/width.md`` and in the
``reasons`` field of every result.

The work is split by what it computes; this module re-exports every public
name:

* :mod:`faultmap.rift_heave`: heave per fault and trace piece, heave concentration;
* :mod:`faultmap.axis_frame`: along/across coordinates in a curved axis frame;
* :mod:`faultmap.rift_axis`: the axis, fitted or given;
* :mod:`faultmap.rift_widths`: sections and widths along the axis;
* :mod:`faultmap.rift_class`: the narrow/wide classification.
"""

from __future__ import annotations

from faultmap.axis_frame import axis_coordinates, axis_point_direction
from faultmap.rift_axis import axial_mean_deg, fit_rift_axis, rift_axis
from faultmap.rift_class import BUCK_MODES, classify_rift
from faultmap.rift_class import EVIDENCE_WEIGHTS as EVIDENCE_WEIGHTS
from faultmap.rift_heave import fault_heave_m2, heave_concentration
from faultmap.rift_widths import rift_sections

__all__ = [
    "BUCK_MODES",
    "axial_mean_deg",
    "fault_heave_m2",
    "axis_coordinates",
    "axis_point_direction",
    "fit_rift_axis",
    "rift_axis",
    "rift_sections",
    "heave_concentration",
    "classify_rift",
]
