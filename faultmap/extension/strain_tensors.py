"""Strain tensors from moment sums: principal strains and whole-area tensors.

Pure functions on arrays; nothing here touches files. The map-view Kostrov
(1974) sum of the faults' moments divided by an area gives the horizontal
strain tensor (derived in ``docs/methods/extension.md``).

Main entry points
-----------------
:func:`principal_strains`
    Principal values and azimuth of 2-D symmetric tensors.
:func:`fault_moment_sum`
    The moment sum from the faults' along-strike heave integrals (the check
    route: area-weighted cell tensors must add up to it).
:func:`whole_area_strain`
    Strain tensor and principal values of a moment sum spread over an area.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np

from faultmap.errors import InputError, ParameterError
from faultmap.extension.fault_inputs import _check_rake, _ids, _rake_factor

__all__ = ["principal_strains", "fault_moment_sum", "whole_area_strain"]


_TENSOR_COLS = ("exx", "eyy", "exy", "e1", "e2", "e1_azimuth_deg", "ezz")


def principal_strains(
    exx: np.ndarray, eyy: np.ndarray, exy: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Principal values, azimuth of the most extensional axis, and vertical strain.

    Parameters
    ----------
    exx, eyy, exy : array_like
        Components of symmetric horizontal strain tensors in (E, N)
        coordinates, extension positive (dimensionless).

    Returns
    -------
    e1, e2 : numpy.ndarray
        Most and least extensional principal strains (e1 >= e2).
    e1_azimuth_deg : numpy.ndarray
        Azimuth of the e1 axis, degrees clockwise from grid north, [0, 180);
        NaN where the tensor is isotropic (e1 == e2).
    ezz : numpy.ndarray
        Vertical strain from volume conservation, -(exx + eyy).

    Notes
    -----
    Eigenvalues of a 2x2 symmetric tensor: mean +- sqrt(((exx - eyy)/2)^2 +
    exy^2); the e1 axis makes the angle 0.5 atan2(2 exy, exx - eyy) with
    east, counter-clockwise (standard linear algebra). Azimuth = 90 deg
    minus that angle.
    """
    exx, eyy, exy = (np.asarray(a, dtype=float) for a in (exx, eyy, exy))
    mean = 0.5 * (exx + eyy)
    rad = np.hypot(0.5 * (exx - eyy), exy)
    e1, e2 = mean + rad, mean - rad
    theta = 0.5 * np.arctan2(2.0 * exy, exx - eyy)
    az = (90.0 - np.degrees(theta)) % 180.0
    scale = np.maximum(np.abs(e1), np.abs(e2))
    az = np.where(rad > 1e-12 * np.where(scale > 0, scale, 1.0), az, np.nan)
    return e1, e2, az, -(exx + eyy)


def _tensor_frame(mxx: np.ndarray, myy: np.ndarray, mxy: np.ndarray, area: np.ndarray) -> dict[str, np.ndarray]:
    with np.errstate(divide="ignore", invalid="ignore"):
        exx, eyy, exy = mxx / area, myy / area, mxy / area
    e1, e2, az, ezz = principal_strains(exx, eyy, exy)
    return {"exx": exx, "eyy": eyy, "exy": exy, "e1": e1, "e2": e2, "e1_azimuth_deg": az, "ezz": ezz}


def fault_moment_sum(faults: gpd.GeoDataFrame, *, rake_deg: float | None = None) -> np.ndarray:
    """Sum over faults of the along-strike heave integral times the dip-direction dyad.

    Parameters
    ----------
    faults : geopandas.GeoDataFrame
        With ``heave_integral_m2`` (integral of heave along strike, m^2),
        ``dip_dir_deg`` and ``dip_deg``; optional ``rake_deg``.
    rake_deg : float, optional
        Rake for all faults (default: column, else -90).

    Returns
    -------
    numpy.ndarray
        2x2 moment tensor (E, N), m^2: sum_f I_f (m_f m_f) (+ strike-slip
        part). Dividing by an area gives the Kostrov strain of that area.

    Raises
    ------
    InputError
        If ``heave_integral_m2`` is missing or a fault with a heave has no
        dip direction.

    Notes
    -----
    The second route of the Kostrov (1974) sum: for dip slip the strain of
    an area holding whole faults is (1/A) sum_f I_f (m_f m_f), I_f the
    along-strike integral of heave. The strike-slip part uses
    I_ss = I_h cos(rake) / (|sin(rake)| cos(dip)), since ss / h =
    cos(rake) / (|sin(rake)| cos(dip)).
    """
    for col in ("heave_integral_m2", "dip_dir_deg", "dip_deg"):
        if col not in faults.columns:
            raise InputError(f"faults layer has no '{col}' column; run the throw tool first.")
    integ = faults["heave_integral_m2"].to_numpy(dtype=float)
    dd = faults["dip_dir_deg"].to_numpy(dtype=float)
    dip = faults["dip_deg"].to_numpy(dtype=float)
    use = np.isfinite(integ) & (integ != 0)
    if (use & ~np.isfinite(dd)).any():
        raise InputError(
            f"fault {_ids(faults['fault_id'].to_numpy()[use & ~np.isfinite(dd)])}: no dip direction; "
            "the fault-sum route needs dip_dir_deg."
        )
    rake = (
        faults["rake_deg"].to_numpy(dtype=float) if (rake_deg is None and "rake_deg" in faults.columns)
        else np.full(len(faults), np.nan if rake_deg is None else float(rake_deg))
    )
    _check_rake(rake, "rake_deg")
    rake = np.where(np.isfinite(rake), rake, -90.0)
    integ, dd, dip, rake = integ[use], dd[use], dip[use], rake[use]
    mr = np.radians(dd)
    m = np.stack([np.sin(mr), np.cos(mr)], axis=1)
    s = np.stack([-np.cos(mr), np.sin(mr)], axis=1)
    iss = integ * _rake_factor(rake) / np.cos(np.radians(dip))
    mm = np.einsum("k,ki,kj->ij", integ, m, m)
    ms = np.einsum("k,ki,kj->ij", iss, m, s)
    return mm + 0.5 * (ms + ms.T)


def whole_area_strain(moment_m2: np.ndarray, area_m2: float) -> dict[str, float]:
    """Strain tensor and principal values of a 2x2 moment sum spread over an area.

    Parameters
    ----------
    moment_m2 : numpy.ndarray
        2x2 symmetric moment tensor (E, N), m^2 (e.g. from
        :func:`fault_moment_sum`).
    area_m2 : float
        Map area, m^2 (> 0).

    Returns
    -------
    dict
        ``exx``, ``eyy``, ``exy``, ``e1``, ``e2``, ``e1_azimuth_deg``, ``ezz``.

    Notes
    -----
    eps = M / A (Kostrov 1974, map-view form; see
    :func:`~faultmap.extension.kostrov_sums.kostrov_grid`).
    """
    if not np.isfinite(area_m2) or area_m2 <= 0:
        raise ParameterError(f"area_m2 must be positive, got {area_m2!r}.")
    mm = np.asarray(moment_m2, dtype=float)
    t = _tensor_frame(np.array([mm[0, 0]]), np.array([mm[1, 1]]), np.array([0.5 * (mm[0, 1] + mm[1, 0])]), np.array([area_m2]))
    return {k: float(v[0]) for k, v in t.items()}
