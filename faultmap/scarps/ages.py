"""Morphologic ages from kappa t: a regional kappa (with range) or one dated scarp to calibrate it.

Age = kappa t / kappa (Hanks et al. 1984): kappa t in m^2, kappa in m^2/kyr,
age in kyr (= ka before present). Monte Carlo over kappa t (log-normal with
the fault's error) and kappa (log-uniform over the given range, or drawn
from the calibration scarp's kappa t and age) gives the median and the 16th
and 84th percentiles. The same kappa draws serve every fault, so the ages
keep the order of their kappa t. Published kappa values are regional:
:data:`PUBLISHED_KAPPA` quotes a few, with their sources.
"""

from __future__ import annotations

import numpy as np

from faultmap.errors import InputError, ParameterError

__all__ = [
    "PUBLISHED_KAPPA",
    "AGE_COLUMNS",
    "kappa_draws",
    "calibrated_kappa_draws",
    "morphologic_ages",
    "fault_ages",
]

#: Published mass diffusivities of scarps in unconsolidated deposits (regional: a value holds for the
#: climate and materials where it was calibrated; all recalled, from memory, to be checked).
PUBLISHED_KAPPA = (
    {
        "region": "Lake Bonneville shoreline scarps, Utah (about 15 ka)",
        "kappa_m2_kyr": 1.1,
        "source": "Hanks, Bucknam, Lajoie & Wallace 1984, J. Geophys. Res. 89 (from memory)",
    },
    {
        "region": "Lake Lahontan shoreline scarps, Nevada",
        "kappa_m2_kyr": 0.4,
        "source": "Hanks & Wallace 1985, Bull. Seismol. Soc. Am. 75 (from memory)",
    },
    {
        "region": "fault scarps on alluvial fans, northern Tibet / Xinjiang",
        "kappa_m2_kyr": 3.3,
        "source": "Avouac 1993, J. Geophys. Res. 98 (from memory)",
    },
)


def kappa_draws(kappa_m2_kyr, kappa_range_m2_kyr=None, *, n_draws: int = 4000, seed: int = 0) -> np.ndarray:
    """Draws of kappa: log-uniform over the range, or the single value.

    Parameters
    ----------
    kappa_m2_kyr : float
        Preferred kappa, m^2/kyr (> 0).
    kappa_range_m2_kyr : (float, float), optional
        Lower and upper kappa, m^2/kyr; kappa is drawn log-uniformly between them.
    n_draws, seed : int

    Returns
    -------
    ndarray, shape (n_draws,)
    """
    k = float(kappa_m2_kyr)
    if not np.isfinite(k) or k <= 0:
        raise ParameterError(f"parameter 'kappa_m2_kyr' must be > 0 (m^2/kyr), got {kappa_m2_kyr!r}.")
    if kappa_range_m2_kyr is None:
        return np.full(int(n_draws), k)
    lo, hi = (float(v) for v in kappa_range_m2_kyr)
    if not (0 < lo <= k <= hi):
        raise ParameterError(
            f"kappa range {lo:g}-{hi:g} m^2/kyr must be positive and contain kappa_m2_kyr {k:g}; fix the range."
        )
    rng = np.random.default_rng(seed)
    return np.exp(rng.uniform(np.log(lo), np.log(hi), int(n_draws)))


def calibrated_kappa_draws(kt_m2, kt_err_m2, age_ka, age_err_ka, *, n_draws: int = 4000, seed: int = 0):
    """Kappa from one dated scarp: kappa t / age, drawn (log-normal kappa t, normal age).

    Parameters
    ----------
    kt_m2, kt_err_m2 : float
        The calibration scarp's kappa t and its 1-sigma error, m^2.
    age_ka, age_err_ka : float
        Its numeric age and 1-sigma error, ka.
    n_draws, seed : int

    Returns
    -------
    ndarray, shape (n_draws,)
        Kappa draws, m^2/kyr (ages drawn below a hundredth of the age are redrawn at that floor).
    """
    kt, ke, a, ae = (float(v) for v in (kt_m2, kt_err_m2, age_ka, age_err_ka))
    if not (np.isfinite(kt) and kt > 0):
        raise InputError(
            f"the calibration scarp has no measured kappa t (got {kt_m2!r}); choose a dated fault whose kappa_t_flag is 'measured'."
        )
    if not (np.isfinite(a) and a > 0):
        raise InputError(
            f"the calibration scarp has no positive surface_age_ka (got {age_ka!r}); give its age in ka."
        )
    rng = np.random.default_rng(seed)
    sl = ke / kt if np.isfinite(ke) and ke > 0 else 0.0
    ktd = kt * np.exp(rng.standard_normal(int(n_draws)) * sl)
    ad = a + (ae if np.isfinite(ae) and ae > 0 else 0.0) * rng.standard_normal(int(n_draws))
    return ktd / np.maximum(ad, 0.01 * a)


def morphologic_ages(kt_m2, kt_err_m2, kappa_draws_m2_kyr, *, bound_m2=None, seed: int = 1) -> dict:
    """Morphologic ages (ka) of many scarps by Monte Carlo.

    Parameters
    ----------
    kt_m2, kt_err_m2 : ndarray, shape (n,)
        Kappa t and its 1-sigma error, m^2 (NaN: no age).
    kappa_draws_m2_kyr : ndarray, shape (d,)
        Kappa draws (:func:`kappa_draws` or :func:`calibrated_kappa_draws`).
    bound_m2 : ndarray, shape (n,), optional
        Upper bounds of kappa t where no value is measured: the age is then
        at most ``bound / kappa`` (84th percentile of the kappa draws' lower side).
    seed : int

    Returns
    -------
    dict of ndarray, shape (n,)
        ``age_ka`` (median), ``age_p16_ka``, ``age_p84_ka``, ``age_err_ka``
        (half the 16-84 range) and ``age_max_ka`` (upper bound from
        ``bound_m2``, NaN otherwise).

    Notes
    -----
    t = kappa t / kappa (Hanks et al. 1984). Kappa t is drawn log-normal
    (sigma of ln = error / value); every fault uses the same kappa draws, so
    a common error in kappa moves all ages together.
    """
    kt = np.asarray(kt_m2, float)
    ke = np.asarray(kt_err_m2, float)
    kap = np.asarray(kappa_draws_m2_kyr, float)
    n, d = kt.size, kap.size
    out = {k: np.full(n, np.nan) for k in ("age_ka", "age_p16_ka", "age_p84_ka", "age_err_ka", "age_max_ka")}
    good = np.isfinite(kt) & (kt > 0)
    if good.any() and d:
        rng = np.random.default_rng(seed)
        sl = np.where(np.isfinite(ke[good]) & (ke[good] > 0), ke[good] / kt[good], 0.0)
        draws = (
            kt[good, None] * np.exp(sl[:, None] * rng.standard_normal((int(good.sum()), d))) / kap[None, :]
        )
        q = np.percentile(draws, [16.0, 50.0, 84.0], axis=1)
        out["age_p16_ka"][good], out["age_ka"][good], out["age_p84_ka"][good] = q
        out["age_err_ka"][good] = 0.5 * (q[2] - q[0])
    if bound_m2 is not None and d:
        b = np.asarray(bound_m2, float)
        hasb = np.isfinite(b) & ~good
        out["age_max_ka"][hasb] = b[hasb] / np.percentile(kap, 16.0)
    return out


#: Columns :func:`fault_ages` adds to the faults.
AGE_COLUMNS = (
    "morph_age_ka",
    "morph_age_p16_ka",
    "morph_age_p84_ka",
    "morph_age_err_ka",
    "morph_age_max_ka",
    "morph_age_basis",
)


def fault_ages(
    faults,
    *,
    kappa_m2_kyr=None,
    kappa_range_m2_kyr=None,
    calibration_fault_id=None,
    n_draws: int = 4000,
    seed: int = 0,
):
    """Morphologic ages of every fault with a kappa t, from a regional kappa or a dated scarp.

    Parameters
    ----------
    faults : pandas.DataFrame
        ``fault_id``, ``kappa_t_m2``, ``kappa_t_err_m2``, ``kappa_t_flag``,
        ``kappa_t_bound_m2`` (:func:`faultmap.scarps.fault_degradation.summarise_degradation`);
        for a calibration, ``surface_age_ka`` (and optionally ``surface_age_err_ka``) of that fault.
    kappa_m2_kyr : float, optional
        Regional kappa, m^2/kyr.
    kappa_range_m2_kyr : (float, float), optional
        Its range (drawn log-uniformly).
    calibration_fault_id : int, optional
        A dated fault whose kappa t and ``surface_age_ka`` calibrate kappa (used when
        ``kappa_m2_kyr`` is not given).
    n_draws, seed : int

    Returns
    -------
    faults : pandas.DataFrame
        A copy with :data:`AGE_COLUMNS` (ka; ``morph_age_basis`` says
        ``morphologic, regional kappa ...`` or ``morphologic, kappa calibrated on fault N``),
        or the input unchanged when neither kappa nor a calibration is given.
    record : dict
        The kappa used (median and 16-84 % range, m^2/kyr) and its basis, for ``run_info``.
    """
    if kappa_m2_kyr is None and calibration_fault_id is None:
        return faults, {}
    f = faults.copy()
    if kappa_m2_kyr is not None:
        kap = kappa_draws(kappa_m2_kyr, kappa_range_m2_kyr, n_draws=n_draws, seed=seed)
        rng = "" if kappa_range_m2_kyr is None else f" ({kappa_range_m2_kyr[0]:g}-{kappa_range_m2_kyr[1]:g})"
        basis = f"morphologic, regional kappa {float(kappa_m2_kyr):g}{rng} m2/kyr"
    else:
        ids = f["fault_id"].to_numpy()
        hit = np.flatnonzero(ids == int(calibration_fault_id))
        if hit.size == 0:
            raise InputError(
                f"faults: kappa_calibration_fault_id {calibration_fault_id} is not a fault_id of the layer; "
                "give the id of a dated fault."
            )
        r = f.iloc[int(hit[0])]
        if str(r.get("kappa_t_flag", "none")) != "measured":
            raise InputError(
                f"faults: fault {calibration_fault_id} (the kappa calibration) has no measured kappa t "
                f"(kappa_t_flag {r.get('kappa_t_flag', 'none')}); choose a dated fault with a resolved scarp."
            )
        age = r.get("surface_age_ka", np.nan)
        aerr = r.get("surface_age_err_ka", np.nan)
        kap = calibrated_kappa_draws(
            r["kappa_t_m2"],
            r["kappa_t_err_m2"],
            np.nan if age is None else float(age),
            np.nan if aerr is None else float(aerr),
            n_draws=n_draws,
            seed=seed,
        )
        basis = f"morphologic, kappa calibrated on fault {int(calibration_fault_id)}"
    measured = f["kappa_t_flag"].to_numpy(dtype=object) == "measured"
    upper = f["kappa_t_flag"].to_numpy(dtype=object) == "upper_bound"
    a = morphologic_ages(
        np.where(measured, f["kappa_t_m2"].to_numpy(dtype=float), np.nan),
        f["kappa_t_err_m2"].to_numpy(dtype=float),
        kap,
        bound_m2=np.where(upper, f["kappa_t_bound_m2"].to_numpy(dtype=float), np.nan),
        seed=seed + 1,
    )
    for k in ("age_ka", "age_p16_ka", "age_p84_ka", "age_err_ka", "age_max_ka"):
        f["morph_" + k] = a[k]
    has = np.isfinite(a["age_ka"]) | np.isfinite(a["age_max_ka"])
    f["morph_age_basis"] = np.where(has, basis, "").astype(object)
    q = np.percentile(kap, [16.0, 50.0, 84.0])
    rec = {"kappa_m2_kyr_used": f"{q[1]:.3g} (16-84 %: {q[0]:.3g}-{q[2]:.3g}); {basis}"}
    return f, rec
