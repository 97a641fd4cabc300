"""Per-fault throws given as attributes (fault databases, seismic interpretation), without a DEM.

A fault database holds a maximum throw per fault, or a displacement along the dip, often as a range;
:func:`throws_from_attributes` turns them into the same per-fault fields the DEM route writes
(``max_throw_m``, ``max_throw_err_m``, ``mean_throw_m``, ``heave_integral_m2``, ...) with
``throw_source = 'attributes'``. Pure function, no I/O.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely

__all__ = ["ASSUMED_PROFILE", "MEAN_OVER_MAX", "throws_from_attributes"]

#: Along-strike profile assumed where only a maximum throw is known (named in the outputs).
ASSUMED_PROFILE = "parabola"

#: Mean over maximum throw of that profile, T(x) = Tmax (1 - r^2): the integral of 1 - r^2 over
#: [-1, 1] is 4/3, over a length of 2 (analytic).
MEAN_OVER_MAX = 2.0 / 3.0


def _col(df, name: str) -> np.ndarray:
    if name in df.columns:
        return np.asarray(df[name], dtype=float)
    return np.full(len(df), np.nan)


def throws_from_attributes(faults: gpd.GeoDataFrame) -> tuple[gpd.GeoDataFrame, list[str]]:
    """Per-fault throw fields from the given maximum throw or dip-slip displacement.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        The prepared ``faults`` layer with ``fault_id``, ``dip_deg``, LineString geometry and any of
        ``given_max_throw_m`` / ``given_max_throw_err_m`` (vertical component, m) and
        ``given_displacement_m`` / ``given_displacement_err_m`` (along the dip, m), as
        :func:`faultmap.traces.conditioning.condition_traces` reads them.

    Returns
    -------
    faults : geopandas.GeoDataFrame
        A copy with ``max_throw_m``, ``max_throw_err_m`` (NaN where no error or range was given),
        ``max_throw_dist_m`` (NaN: the position of the maximum is not known), ``mean_throw_m`` and
        ``heave_integral_m2`` from the assumed profile, ``tip_gradient_max`` / ``_min`` (NaN),
        ``n_stations`` and ``n_stations_ok`` (0), ``throw_source`` (``attributes`` or ``none``)
        and ``throw_profile`` (``parabola`` where the profile is assumed).
    warnings : list of str

    Notes
    -----
    A maximum throw given as such wins; otherwise throw = displacement x sin(dip) (geometry of a
    dip-slip fault). Without a measured profile the along-strike shape is assumed to be a parabola
    T(x) = Tmax (1 - r^2) (our rule, the same profile the transect tool falls back on), so the mean
    throw is 2/3 Tmax and the heave integral mean throw x length / tan(dip).
    """
    f = faults.copy()
    dip = np.radians(_col(f, "dip_deg"))
    t_given = _col(f, "given_max_throw_m")
    e_given = _col(f, "given_max_throw_err_m")
    d_given = _col(f, "given_displacement_m")
    de_given = _col(f, "given_displacement_err_m")
    use_t = np.isfinite(t_given)
    use_d = ~use_t & np.isfinite(d_given)
    T = np.where(use_t, t_given, np.where(use_d, d_given * np.sin(dip), np.nan))
    err = np.where(use_t, e_given, np.where(use_d, de_given * np.sin(dip), np.nan))
    has = np.isfinite(T)
    length = shapely.length(f.geometry.to_numpy())
    mean_t = np.where(has, MEAN_OVER_MAX * T, np.nan)
    f["max_throw_m"] = T
    f["max_throw_err_m"] = err
    f["max_throw_dist_m"] = np.nan
    f["mean_throw_m"] = mean_t
    f["heave_integral_m2"] = mean_t * length / np.tan(dip)
    f["tip_gradient_max"] = np.nan
    f["tip_gradient_min"] = np.nan
    f["n_stations"] = np.zeros(len(f), dtype=np.int64)
    f["n_stations_ok"] = np.zeros(len(f), dtype=np.int64)
    f["throw_source"] = np.where(has, "attributes", "none").astype(object)
    f["throw_profile"] = np.where(has, ASSUMED_PROFILE, "").astype(object)
    warns = []
    if (~has).any():
        ids = f["fault_id"].to_numpy()[~has]
        shown = ", ".join(map(str, ids[:10])) + (f" and {ids.size - 10} more" if ids.size > 10 else "")
        warns.append(
            f"{int((~has).sum())} fault(s) have no max_throw_m or displacement_m attribute (fault ids {shown}): no throw."
        )
    return f, warns
