"""Subsidence predicted from uniform lithospheric stretching (McKenzie 1978).

Instantaneous, uniform (pure-shear) stretching of the lithosphere by a
factor ``beta``: an initial, fault-controlled (syn-rift) subsidence from
isostasy, followed by thermal subsidence as the lithosphere cools back to its
initial temperature profile. Both are water-loaded (the basin is filled with
water only). Sediment loading, which amplifies subsidence (roughly two to
three times for a sediment-filled basin), is **not modelled**.

Units: lengths in m, densities in kg/m3, temperatures in deg C, time since
the end of rifting in Myr (1 Myr = 1e6 Julian years of 365.25 days).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pandas is imported where a table is built (keeps tool listing light)
    import pandas as pd

from faultmap.errors import ParameterError

__all__ = [
    "SECONDS_PER_MYR",
    "mckenzie_constants",
    "initial_subsidence_m",
    "thermal_subsidence_m",
    "subsidence_curve",
]

SECONDS_PER_MYR = 1e6 * 365.25 * 86400.0

#: Default parameters (McKenzie 1978, EPSL 40, verified; see docs/methods/width.md).
LITHOSPHERE_M = 125e3
BASE_TEMPERATURE_C = 1333.0
EXPANSION_PER_C = 3.28e-5
MANTLE_DENSITY = 3330.0
CRUST_DENSITY = 2800.0
WATER_DENSITY = 1000.0
DIFFUSIVITY_M2_S = 8e-7
CRUST_THICKNESS_M = 35e3


def _check_common(lithosphere_m: float, mantle_density_kg_m3: float, water_density_kg_m3: float, expansion_per_c: float, base_temperature_c: float) -> None:
    if not lithosphere_m > 0:
        raise ParameterError("lithosphere_m must be positive")
    if not mantle_density_kg_m3 > water_density_kg_m3 >= 0:
        raise ParameterError("mantle density must exceed water density (kg/m3)")
    if not (expansion_per_c >= 0 and base_temperature_c > 0 and expansion_per_c * base_temperature_c < 1):
        raise ParameterError("need expansion_per_c >= 0, base_temperature_c > 0 and their product < 1")


def _check_beta(beta: np.ndarray) -> np.ndarray:
    b = np.asarray(beta, dtype=float)
    if np.any(~np.isfinite(b)) or np.any(b < 1.0):
        raise ParameterError("beta must be a finite stretching factor >= 1 (1 = no stretching)")
    return b


def mckenzie_constants(
    *,
    lithosphere_m: float = LITHOSPHERE_M,
    base_temperature_c: float = BASE_TEMPERATURE_C,
    expansion_per_c: float = EXPANSION_PER_C,
    mantle_density_kg_m3: float = MANTLE_DENSITY,
    water_density_kg_m3: float = WATER_DENSITY,
    diffusivity_m2_s: float = DIFFUSIVITY_M2_S,
) -> dict[str, float]:
    """Subsidence scale E0 and thermal time constant tau.

    Parameters
    ----------
    lithosphere_m : float
        Thickness of the lithosphere ``a``, m (default 125 km).
    base_temperature_c : float
        Temperature at the base of the lithosphere ``T1``, deg C (1333).
    expansion_per_c : float
        Volumetric thermal expansion coefficient ``alpha``, 1/deg C (3.28e-5).
    mantle_density_kg_m3, water_density_kg_m3 : float
        ``rho_m`` (3330) and ``rho_w`` (1000), kg/m3.
    diffusivity_m2_s : float
        Thermal diffusivity ``kappa``, m2/s (8e-7).

    Returns
    -------
    dict
        ``e0_m`` = 4 a rho_m alpha T1 / (pi^2 (rho_m - rho_w)), m, and
        ``tau_myr`` = a^2 / (pi^2 kappa), Myr.

    Notes
    -----
    McKenzie (1978, EPSL 40, 25-32). With the defaults E0 = 3165.6 m and
    tau = 62.7 Myr.
    """
    _check_common(lithosphere_m, mantle_density_kg_m3, water_density_kg_m3, expansion_per_c, base_temperature_c)
    if not diffusivity_m2_s > 0:
        raise ParameterError("diffusivity_m2_s must be positive")
    a = lithosphere_m
    e0 = 4.0 * a * mantle_density_kg_m3 * expansion_per_c * base_temperature_c / (
        math.pi**2 * (mantle_density_kg_m3 - water_density_kg_m3)
    )
    tau = a * a / (math.pi**2 * diffusivity_m2_s) / SECONDS_PER_MYR
    return {"e0_m": e0, "tau_myr": tau}


def initial_subsidence_m(
    beta: float | np.ndarray,
    *,
    crust_thickness_m: float = CRUST_THICKNESS_M,
    lithosphere_m: float = LITHOSPHERE_M,
    base_temperature_c: float = BASE_TEMPERATURE_C,
    expansion_per_c: float = EXPANSION_PER_C,
    mantle_density_kg_m3: float = MANTLE_DENSITY,
    crust_density_kg_m3: float = CRUST_DENSITY,
    water_density_kg_m3: float = WATER_DENSITY,
) -> float | np.ndarray:
    """Compute the initial (syn-rift, isostatic) water-loaded subsidence, m.

    Parameters
    ----------
    beta : float or array_like
        Stretching factor(s), >= 1.
    crust_thickness_m : float
        Crustal thickness before stretching ``t_c``, m (default 35 km).
    lithosphere_m, base_temperature_c, expansion_per_c, mantle_density_kg_m3, water_density_kg_m3
        See :func:`mckenzie_constants`.
    crust_density_kg_m3 : float
        ``rho_c`` at 0 deg C, kg/m3 (default 2800; McKenzie used 2780).

    Returns
    -------
    float or ndarray
        Subsidence (positive down), m. Negative values mean uplift (thin
        crust: the hot asthenosphere outweighs the thinning of the crust).

    Notes
    -----
    McKenzie (1978, EPSL 40), eq. 2:

    ``S_i = a [(rho_m - rho_c)(t_c/a)(1 - alpha T1 t_c / (2a))
    - alpha T1 rho_m / 2] (1 - 1/beta) / [rho_m (1 - alpha T1) - rho_w]``

    It is the isostatic balance, at the base of the unstretched lithosphere,
    of a column with a linear geotherm before stretching and a column
    thinned by beta (crust, lithosphere and geotherm) over asthenosphere at
    T1 after it, with densities rho (1 - alpha T). Sediment loading is not
    modelled.
    """
    b = _check_beta(beta)
    _check_common(lithosphere_m, mantle_density_kg_m3, water_density_kg_m3, expansion_per_c, base_temperature_c)
    if not 0 < crust_thickness_m < lithosphere_m:
        raise ParameterError("crust_thickness_m must be positive and thinner than lithosphere_m")
    a, tc, at = lithosphere_m, crust_thickness_m, expansion_per_c * base_temperature_c
    rm, rc, rw = mantle_density_kg_m3, crust_density_kg_m3, water_density_kg_m3
    num = a * ((rm - rc) * (tc / a) * (1.0 - at * tc / (2.0 * a)) - at * rm / 2.0)
    out = num * (1.0 - 1.0 / b) / (rm * (1.0 - at) - rw)
    return float(out) if np.ndim(out) == 0 else out


def thermal_subsidence_m(
    beta: float | np.ndarray,
    time_myr: float | np.ndarray,
    *,
    n_terms: int = 1,
    lithosphere_m: float = LITHOSPHERE_M,
    base_temperature_c: float = BASE_TEMPERATURE_C,
    expansion_per_c: float = EXPANSION_PER_C,
    mantle_density_kg_m3: float = MANTLE_DENSITY,
    water_density_kg_m3: float = WATER_DENSITY,
    diffusivity_m2_s: float = DIFFUSIVITY_M2_S,
) -> float | np.ndarray:
    """Thermal (post-rift) water-loaded subsidence after time t, m.

    Parameters
    ----------
    beta : float or array_like
        Stretching factor(s), >= 1 (broadcast against ``time_myr``).
    time_myr : float or array_like
        Time since the end of (instantaneous) rifting, Myr, >= 0; ``inf``
        gives the final value.
    n_terms : int
        Number of odd Fourier terms: 1 (default) is McKenzie's one-term
        form; more terms give the full series solution.
    lithosphere_m, base_temperature_c, expansion_per_c, mantle_density_kg_m3, water_density_kg_m3, diffusivity_m2_s
        See :func:`mckenzie_constants`.

    Returns
    -------
    float or ndarray
        Subsidence (positive down) since the end of rifting, m.

    Notes
    -----
    McKenzie (1978, EPSL 40): one-term form
    ``S(t) = E0 (beta/pi) sin(pi/beta) (1 - exp(-t/tau))``. The series is
    ``S(t) = E0 sum_{n odd} beta/(n^3 pi) sin(n pi/beta) (1 - exp(-n^2 t/tau))``
    (derived from the Fourier solution of the cooling lithosphere with fixed
    surface and basal temperatures); its t -> infinity limit is
    ``rho_m alpha T1 a (1 - 1/beta) / (2 (rho_m - rho_w))``. Sediment loading
    is not modelled.
    """
    b = _check_beta(beta)
    t = np.asarray(time_myr, dtype=float)
    if np.any(np.isnan(t)) or np.any(t < 0):
        raise ParameterError("time_myr must be >= 0 (time since the end of rifting)")
    if int(n_terms) < 1:
        raise ParameterError("n_terms must be >= 1")
    k = mckenzie_constants(
        lithosphere_m=lithosphere_m,
        base_temperature_c=base_temperature_c,
        expansion_per_c=expansion_per_c,
        mantle_density_kg_m3=mantle_density_kg_m3,
        water_density_kg_m3=water_density_kg_m3,
        diffusivity_m2_s=diffusivity_m2_s,
    )
    b, t = np.broadcast_arrays(b, t)
    n = (2 * np.arange(int(n_terms)) + 1).astype(float).reshape((-1,) + (1,) * b.ndim)
    with np.errstate(over="ignore"):
        decay = 1.0 - np.exp(-(n**2) * t[None] / k["tau_myr"])
    terms = b[None] / (n**3 * math.pi) * np.sin(n * math.pi / b[None]) * decay
    out = k["e0_m"] * terms.sum(axis=0)
    return float(out) if np.ndim(out) == 0 else out


def subsidence_curve(
    beta: float,
    *,
    crust_thickness_m: float = CRUST_THICKNESS_M,
    time_myr: np.ndarray | None = None,
    n_terms: int = 1,
    lithosphere_m: float = LITHOSPHERE_M,
    base_temperature_c: float = BASE_TEMPERATURE_C,
    expansion_per_c: float = EXPANSION_PER_C,
    mantle_density_kg_m3: float = MANTLE_DENSITY,
    crust_density_kg_m3: float = CRUST_DENSITY,
    water_density_kg_m3: float = WATER_DENSITY,
    diffusivity_m2_s: float = DIFFUSIVITY_M2_S,
) -> pd.DataFrame:
    """Subsidence-versus-time table for one stretching factor.

    Parameters
    ----------
    beta : float
        Stretching factor, >= 1 (e.g. from transects: 1 + extension).
    crust_thickness_m : float
        Pre-rift crustal thickness, m (default 35 km).
    time_myr : array_like, optional
        Times since the end of rifting, Myr; default 0 to 200 Myr every 2 Myr.
    n_terms : int
        Terms of the thermal series (1 = McKenzie's one-term form).
    lithosphere_m, base_temperature_c, expansion_per_c, mantle_density_kg_m3, crust_density_kg_m3, water_density_kg_m3, diffusivity_m2_s
        See :func:`initial_subsidence_m` and :func:`thermal_subsidence_m`.

    Returns
    -------
    DataFrame
        ``time_myr``, ``beta``, ``crust_thickness_m``, ``initial_m``
        (constant), ``thermal_m``,
        ``total_m`` (initial + thermal), ``loading`` (``water``: sediment
        loading not modelled).

    Notes
    -----
    McKenzie (1978, EPSL 40); see :func:`initial_subsidence_m` and
    :func:`thermal_subsidence_m`. Water-loaded; sediment loading not
    modelled.
    """
    if np.ndim(beta) != 0:
        raise ParameterError("subsidence_curve takes one beta; call it once per stretching factor")
    t = np.arange(0.0, 200.0 + 1e-9, 2.0) if time_myr is None else np.asarray(time_myr, dtype=float).ravel()
    si = initial_subsidence_m(
        beta,
        crust_thickness_m=crust_thickness_m,
        lithosphere_m=lithosphere_m,
        base_temperature_c=base_temperature_c,
        expansion_per_c=expansion_per_c,
        mantle_density_kg_m3=mantle_density_kg_m3,
        crust_density_kg_m3=crust_density_kg_m3,
        water_density_kg_m3=water_density_kg_m3,
    )
    st = thermal_subsidence_m(
        beta,
        t,
        n_terms=n_terms,
        lithosphere_m=lithosphere_m,
        base_temperature_c=base_temperature_c,
        expansion_per_c=expansion_per_c,
        mantle_density_kg_m3=mantle_density_kg_m3,
        water_density_kg_m3=water_density_kg_m3,
        diffusivity_m2_s=diffusivity_m2_s,
    )
    st = np.atleast_1d(st)
    import pandas as pd

    return pd.DataFrame(
        {
            "time_myr": t,
            "beta": float(beta),
            "crust_thickness_m": float(crust_thickness_m),
            "initial_m": float(si),
            "thermal_m": st,
            "total_m": float(si) + st,
            "loading": "water",
        }
    )
