"""Subsidence from uniform stretching, McKenzie (1978, EPSL 40).

Check values (see docs/methods/width.md): E0 = 3165.6 m and tau = 62.7-62.8 Myr
(verified against McKenzie 1978), thermal subsidence for beta 2 at t -> inf
= 2015 m (one-term form, verified), initial subsidence for beta 2, t_c 35 km,
rho_c 2800 = 2137 m (McKenzie 1978 eq. 2, from memory: here it is
checked by an independent derivation, a numerical isostatic balance of
density columns, and the full thermal series by a finite-difference solution
of the heat equation).
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pytest

from faultmap.errors import ParameterError
from faultmap.rift.subsidence import (
    SECONDS_PER_MYR,
    initial_subsidence_m,
    mckenzie_constants,
    subsidence_curve,
    thermal_subsidence_m,
)

A, T1, ALPHA, RM, RC, RW, KAPPA = 125e3, 1333.0, 3.28e-5, 3330.0, 2800.0, 1000.0, 8e-7


def test_constants_match_mckenzie_1978():
    # McKenzie (1978, EPSL 40) parameters -> E0 = 3165.6 m, tau 62.7-62.8 Myr (verified)
    k = mckenzie_constants()
    assert k["e0_m"] == pytest.approx(3165.6, abs=0.1)
    assert 62.7 <= k["tau_myr"] <= 62.8


def test_thermal_subsidence_one_term_limit():
    # S(inf) = E0 (beta/pi) sin(pi/beta) = 2015 m for beta 2 (McKenzie 1978, one-term form, verified)
    assert thermal_subsidence_m(2.0, np.inf) == pytest.approx(2015.0, abs=1.0)
    # the one-term form against the heat equation solved by Crank-Nicolson (independent of the
    # series). McKenzie (1978) keeps only the first term because the others decay as
    # exp(-n^2 t / tau) (from memory): once t >= tau the one-term form must exceed the numerical
    # solution by the neglected terms' share of the limit, i.e. by its own limit minus the exact
    # limit rho_m alpha T1 a (1 - 1/beta) / (2 (rho_m - rho_w)) (1953 m, derived from the
    # isostatic balance of the initial and final geotherms).
    k = mckenzie_constants()
    exact_limit = RM * ALPHA * T1 * A * (1.0 - 1.0 / 2.0) / (2.0 * (RM - RW))
    gap = float(thermal_subsidence_m(2.0, np.inf)) - exact_limit
    assert gap == pytest.approx(62.0, abs=2.0)
    for t in (k["tau_myr"], 2 * k["tau_myr"]):
        assert thermal_subsidence_m(2.0, t) - _crank_nicolson_subsidence(2.0, t) == pytest.approx(
            gap, abs=5.0
        )
    # no stretching, no subsidence
    assert thermal_subsidence_m(1.0, np.inf) == pytest.approx(0.0, abs=1e-9)


def _crank_nicolson_subsidence(beta, t_myr, nz=401, nt=600):
    """Water-loaded thermal subsidence (m) after t_myr from a Crank-Nicolson solution of the
    1-D heat equation for the stretched geotherm (surface 0, base T1 at depth A), by the
    isostatic balance S = rho_m alpha / (rho_m - rho_w) * integral of the cooling."""
    from scipy.linalg import solve_banded

    z = np.linspace(0.0, A, nz)
    dz = z[1] - z[0]
    temp0 = T1 * np.minimum(beta * z / A, 1.0)
    temp = temp0.copy()
    dt = t_myr * SECONDS_PER_MYR / nt
    r = KAPPA * dt / dz**2
    m = nz - 2
    ab = np.zeros((3, m))
    ab[0, 1:] = -r / 2
    ab[1, :] = 1 + r
    ab[2, :-1] = -r / 2
    for _ in range(nt):
        rhs = temp[1:-1] * (1 - r) + (r / 2) * (temp[:-2] + temp[2:])
        rhs[-1] += (r / 2) * T1  # fixed base temperature (both levels)
        temp[1:-1] = solve_banded((1, 1), ab, rhs)
    return RM * ALPHA / (RM - RW) * np.trapezoid(temp0 - temp, z)


def _column_mass(depth_top, crust_m, lith_m, z):
    """Mass per area (kg/m2) from depth_top to the bottom of the grid z: crust and
    mantle lithosphere with a linear geotherm 0 -> T1 over lith_m, asthenosphere
    at T1 below; densities rho (1 - alpha T)."""
    zz = z[z >= depth_top]
    d = zz - depth_top
    temp = np.where(d < lith_m, T1 * d / lith_m, T1)
    rho = np.where(d < crust_m, RC, RM) * (1.0 - ALPHA * temp)
    return np.trapezoid(rho, zz)


def test_initial_subsidence_against_numerical_isostasy():
    # Independent derivation: balance the mass of a column down to the base of
    # the unstretched lithosphere before and after thinning crust, lithosphere
    # and geotherm by beta, with water in the basin (McKenzie 1978 set-up).
    # The formula (McKenzie 1978 eq. 2, from memory) must agree with it; its check
    # value is 2137 m for beta 2, t_c 35 km, rho_c 2800.
    tc = 35e3
    z = np.linspace(0.0, A, 250001)
    for beta in (1.3, 2.0, 4.0):
        before = _column_mass(0.0, tc, A, z)

        def after_mass(s, beta=beta):
            zz = np.linspace(s, A, 250001)
            return RW * s + _column_mass(s, tc / beta, A / beta, zz)

        # mass(after) is linear in the water depth s: solve from two evaluations
        m0, m1 = after_mass(0.0), after_mass(1000.0)
        s_num = (before - m0) / ((m1 - m0) / 1000.0)
        assert initial_subsidence_m(beta, crust_thickness_m=tc) == pytest.approx(s_num, rel=2e-3)
    assert initial_subsidence_m(2.0, crust_thickness_m=35e3, crust_density_kg_m3=2800.0) == pytest.approx(
        2137.0, abs=1.0
    )


def _isostatic_subsidence(beta, tc):
    """Initial water-loaded subsidence (m) by the numerical balance of density columns."""
    z = np.linspace(0.0, A, 50001)
    before = _column_mass(0.0, tc, A, z)

    def after_mass(s):
        return RW * s + _column_mass(s, tc / beta, A / beta, np.linspace(s, A, 50001))

    m0, m1 = after_mass(0.0), after_mass(1000.0)
    return (before - m0) / ((m1 - m0) / 1000.0)


def test_thin_crust_gives_initial_uplift():
    # For a thin crust the initial response is uplift (McKenzie 1978, from memory). Where the
    # sign changes is found by an independent route: root of the numerical isostatic balance of
    # density columns (scipy brentq), which the formula's sign change must match.
    from scipy.optimize import brentq

    tc_num = brentq(lambda tc: _isostatic_subsidence(2.0, tc), 10e3, 30e3, xtol=1.0)
    tc_code = brentq(lambda tc: float(initial_subsidence_m(2.0, crust_thickness_m=tc)), 10e3, 30e3, xtol=1.0)
    assert tc_code == pytest.approx(tc_num, abs=150.0)
    assert initial_subsidence_m(2.0, crust_thickness_m=tc_num - 1000.0) < 0.0
    assert initial_subsidence_m(2.0, crust_thickness_m=tc_num + 1000.0) > 0.0


def test_full_series_against_finite_differences_and_its_limit():
    # Derived: with fixed surface (0) and base (T1) temperatures the series
    # solution's t -> inf limit is rho_m alpha T1 a (1 - 1/beta) / (2 (rho_m - rho_w)).
    beta = 2.0
    limit = RM * ALPHA * T1 * A * (1.0 - 1.0 / beta) / (2.0 * (RM - RW))
    assert thermal_subsidence_m(beta, np.inf, n_terms=400) == pytest.approx(limit, rel=1e-4)
    # Crank-Nicolson solution of the heat equation for the stretched geotherm
    # (independent of the Fourier series) at t = 30 Myr.
    assert thermal_subsidence_m(beta, 30.0, n_terms=200) == pytest.approx(
        _crank_nicolson_subsidence(beta, 30.0), rel=5e-3
    )


def test_curve_table_and_validation():
    tab = subsidence_curve(1.8, time_myr=[0.0, 10.0, 100.0, 200.0])
    assert list(tab.columns) == [
        "time_myr",
        "beta",
        "crust_thickness_m",
        "initial_m",
        "thermal_m",
        "total_m",
        "loading",
    ]
    assert tab["thermal_m"].iloc[0] == 0.0
    assert np.all(np.diff(tab["total_m"]) > 0)
    assert np.allclose(tab["total_m"], tab["initial_m"] + tab["thermal_m"])
    assert set(tab["loading"]) == {"water"}
    with pytest.raises(ParameterError):
        subsidence_curve(0.8)
    with pytest.raises(ParameterError):
        thermal_subsidence_m(2.0, -1.0)
    with pytest.raises(ParameterError):
        initial_subsidence_m(2.0, crust_thickness_m=200e3)


def test_subsidence_figure(tmp_path):
    from faultmap.rift.figures import subsidence_figure

    fig = subsidence_figure(subsidence_curve(2.0))
    ax = fig.axes[0]
    assert "Myr" in ax.get_xlabel() and "m" in ax.get_ylabel()
    assert ax.get_legend() is not None
    assert any("sediment loading not modelled" in t.get_text() for t in ax.texts)
    fig.savefig(tmp_path / "subsidence.png", dpi=150)
    assert (tmp_path / "subsidence.png").stat().st_size > 10_000
