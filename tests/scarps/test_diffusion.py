"""The diffusion scarp model and its batched fit, against analytic and numerical solutions.

Sources: the error-function solution of a vertical step relaxing by linear diffusion, dz/dt = kappa
d2z/dx2 (Nash 1980; Hanks, Bucknam, Lajoie & Wallace 1984, J. Geophys. Res. 89; Andrews & Hanks 1985,
J. Geophys. Res. 90); here built independently by finite differences of the diffusion equation (explicit
scheme, stable for kappa dt / dx^2 <= 1/2; common practice) and by scipy.special.erf.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import erf

from faultmap.scarps.diffusion import fit_diffusion_profiles, interpolation_kappa_t_m2, scarp_shape


def _diffused_step(x, *, kappa_t, offset, slope, events=1, dx=0.05):
    """Profile of a step diffused by explicit finite differences (events equal, ages kt k / n)."""
    xf = np.arange(x.min() - 40.0, x.max() + 40.0 + dx, dx)
    z = slope * xf
    n = events
    ages = [kappa_t * (n - k) / n for k in range(n)]  # oldest first: kt, ..., kt / n
    dt = 0.4 * dx * dx  # kappa = 1: "time" is kappa t
    for k in range(n):
        z = z + (offset / n) * (xf > 0)
        run = ages[k] - (ages[k + 1] if k + 1 < n else 0.0)
        steps = int(round(run / dt))
        h = run / steps if steps else 0.0
        for _ in range(steps):
            lap = np.zeros_like(z)
            lap[1:-1] = z[2:] - 2.0 * z[1:-1] + z[:-2]
            z = z + h / (dx * dx) * lap
            z[0], z[-1] = z[1] - slope * dx, z[-2] + slope * dx  # far-field slope held
    return np.interp(x, xf, z)


def test_erf_profile_recovered_with_noise():
    # analytic solution z = c + b x + A erf((x - x0) / (2 sqrt(kt))) (Hanks et al. 1984), 1 m samples, 5 cm noise
    rng = np.random.default_rng(4)
    m = 400
    x = np.r_[-40:0, 1:41].astype(float)
    kt = rng.uniform(2.0, 30.0, m)  # the far field (3 widths 2 sqrt(kt)) lies inside the 40 m window
    A = rng.uniform(0.8, 3.0, m) * rng.choice([-1.0, 1.0], m)
    b = rng.uniform(-0.15, 0.15, m)
    x0 = rng.uniform(-1.5, 1.5, m)
    Z = 500.0 + b[:, None] * x + A[:, None] * erf((x - x0[:, None]) / (2.0 * np.sqrt(kt[:, None])))
    Z += rng.normal(0.0, 0.05, Z.shape)
    r = fit_diffusion_profiles(x, Z, s0_m=np.full(m, 5.0))
    ratio = r["kappa_t_m2"] / kt
    assert abs(np.median(ratio) - 1.0) < 0.02
    assert np.percentile(np.abs(ratio - 1.0), 90) < 0.25
    # errors about right: 68 % of the misses within 1.5 sigma (the AR(1) inflation only widens them)
    z = np.abs(r["kappa_t_m2"] - kt) / r["kappa_t_se_m2"]
    assert 0.6 < np.mean(z < 1.5) <= 1.0
    rel_off = np.abs(r["offset_m"] / (2 * A) - 1.0)  # the offset trades off against the far-field slope
    assert np.median(rel_off) < 0.02 and np.percentile(rel_off, 90) < 0.1
    assert np.median(np.abs(r["x0_m"] - x0)) < 0.3


@pytest.mark.parametrize("kappa_t", [3.0, 25.0, 120.0])
def test_finite_difference_diffusion_recovered(kappa_t):
    # an independent route to the solution: the heat equation integrated numerically from a vertical step
    x = np.r_[-60:0, 1:61].astype(float)
    z = _diffused_step(x, kappa_t=kappa_t, offset=4.0, slope=0.08)
    r = fit_diffusion_profiles(x, z[None, :], s0_m=np.array([4.0]), robust=False)
    assert r["kappa_t_m2"][0] == pytest.approx(kappa_t, rel=0.03)
    assert r["offset_m"][0] == pytest.approx(4.0, rel=0.01)
    assert r["slope"][0] == pytest.approx(0.08, abs=2e-3)


def test_maximum_slope_relation():
    # Hanks et al. (1984; from memory): tan(theta_max) = b + A / sqrt(pi kappa t) for z = b x + A erf(x / 2 sqrt(kt)).
    # Check value (derived by hand): A = 2 m, b = 0.05, tan(theta_max) = 0.5 -> kappa t = 4 / (pi 0.45^2) = 6.2876 m^2.
    kt = 4.0 / (math.pi * 0.45**2)
    assert kt == pytest.approx(6.2876, abs=1e-4)
    xf = np.linspace(-30, 30, 6001)
    assert np.max(np.gradient(0.05 * xf + 2.0 * erf(xf / (2.0 * math.sqrt(kt))), xf)) == pytest.approx(
        0.5, rel=1e-4
    )
    x = np.linspace(-30, 30, 121)
    z = 0.05 * x + 2.0 * erf(x / (2.0 * math.sqrt(kt)))
    r = fit_diffusion_profiles(x, z[None, :], s0_m=np.array([3.0]), robust=False)
    assert r["kappa_t_m2"][0] == pytest.approx(6.2876, rel=1e-3)


def test_several_events():
    # three equal events at ages kt, 2 kt / 3, kt / 3 diffused numerically; the multi-event form finds the oldest
    # surface's kappa t, the one-event form a younger, biased one (superposition of linear diffusion)
    x = np.r_[-60:0, 1:61].astype(float)
    z = _diffused_step(x, kappa_t=60.0, offset=6.0, slope=0.05, events=3)
    r3 = fit_diffusion_profiles(x, z[None, :], s0_m=np.array([6.0]), n_events=3, robust=False)
    r1 = fit_diffusion_profiles(x, z[None, :], s0_m=np.array([6.0]), n_events=1, robust=False)
    assert r3["kappa_t_m2"][0] == pytest.approx(60.0, rel=0.04)
    assert r1["kappa_t_m2"][0] < 0.85 * 60.0
    assert r3["rmse_m"][0] < r1["rmse_m"][0]


def test_shape_is_erf_and_its_derivative():
    u = np.linspace(-4, 4, 8001)
    F, dF = scarp_shape(u)
    np.testing.assert_allclose(F, erf(u), atol=1e-15)  # scipy reference
    np.testing.assert_allclose(dF[1:-1], np.gradient(erf(u), u)[1:-1], atol=1e-5)
    F3, dF3 = scarp_shape(u, n_events=3)
    np.testing.assert_allclose(dF3[1:-1], np.gradient(F3, u)[1:-1], atol=1e-4)
    assert F3[0] == pytest.approx(-1.0, abs=1e-6) and F3[-1] == pytest.approx(1.0, abs=1e-6)


def test_robust_to_a_gully():
    # a 2 m deep gully cut into the far field on 6 samples must not drag kappa t (Tukey weights)
    x = np.r_[-40:0, 1:41].astype(float)
    z = 0.05 * x + 1.5 * erf(x / (2.0 * math.sqrt(20.0)))
    z2 = z.copy()
    z2[(x > 12) & (x < 19)] -= 2.0
    r = fit_diffusion_profiles(x, np.vstack([z, z2]), s0_m=np.array([4.0, 4.0]))
    assert r["kappa_t_m2"][1] == pytest.approx(20.0, rel=0.05)


def test_interpolation_bias_value():
    # derived: bilinear interpolation between samples p apart adds p^2 / 12 of apparent kappa t
    assert interpolation_kappa_t_m2(6.0) == pytest.approx(3.0)
