"""The compiled diffusion fit gives the numbers of the array code it replaces.

The array code (faultmap.scarps.diffusion.fit_diffusion_profiles with ``use_jit=False``) is the
reference: test_diffusion.py checks it against the error-function solution of a diffused step (Nash 1980;
Hanks, Bucknam, Lajoie & Wallace 1984, J. Geophys. Res. 89) and a finite-difference solution of the
diffusion equation. The kernel (faultmap.scarps.diffusion_jit.fit_rows) fits each row on its own and sums
sample by sample (numpy sums pairwise), so it agrees to rounding, not bit for bit: kappa t within 1e-6
relative, the other fields within 1e-6 of their scale, the same flags. The profiles here are erf
scarps (scipy.special.erf) with noise, gullies, voids, unresolved (sharper than the sampling) and broad
scarps, flat ground, at several sample spacings, with one and three events.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import erf

import faultmap.scarps.profile_degradation as pdeg
from faultmap.numerics import jit
from faultmap.scarps.diffusion import fit_diffusion_profiles
from faultmap.scarps.diffusion_jit import _U_FLAT

pytestmark = pytest.mark.skipif(not jit.ENABLED, reason="numba kernels disabled (FAULTMAP_NO_JIT)")


def _profiles(rng, m, step, half_n):
    """Erf scarps of every kind on a grid of ``half_n`` samples a side, ``step`` m apart (no sample at 0)."""
    x = np.r_[-half_n:0, 1 : half_n + 1].astype(float) * step
    L = half_n * step
    # diffusion lengths from unresolved (under the sampling) to broader than the window
    sqrt_kt = np.exp(rng.uniform(np.log(0.05 * step), np.log(0.6 * L), m))
    A = rng.uniform(0.3, 4.0, m) * rng.choice([-1.0, 1.0], m)
    A[: m // 10] = 0.0  # flat ground: no scarp
    b = rng.uniform(-0.2, 0.2, m)
    x0 = rng.uniform(-1.5, 1.5, m) * step
    Z = 300.0 + b[:, None] * x + A[:, None] * erf((x - x0[:, None]) / (2.0 * sqrt_kt[:, None]))
    Z += rng.normal(0.0, 1.0, (m, 1)) * rng.uniform(0.01, 0.3, (m, 1)) * rng.normal(0.0, 1.0, Z.shape)
    gully = rng.random(m) < 0.3  # a gully 1-3 m deep across 2-6 samples somewhere on the profile
    for i in np.flatnonzero(gully):
        j = rng.integers(0, x.size - 6)
        Z[i, j : j + rng.integers(2, 7)] -= rng.uniform(1.0, 3.0)
    Z[rng.random(Z.shape) < 0.04] = np.nan  # voids
    Z[rng.random(m) < 0.02, half_n:] = np.nan  # a whole side missing
    return x, Z


def _compare(ref, fast, *, rtol=1e-6):
    # kappa t where the fit determines it (ln kappa t known within a factor e): a scarp sharper than the
    # sampling leaves the misfit flat in the width, and there both only say it is undetermined
    det = ref["log_kt_se"] < 1.0
    assert det.mean() > 0.3
    np.testing.assert_array_equal(fast["log_kt_se"] < 1.0, det)
    np.testing.assert_allclose(fast["kappa_t_m2"][det], ref["kappa_t_m2"][det], rtol=rtol)
    np.testing.assert_allclose(fast["log_kt_se"][det], ref["log_kt_se"][det], rtol=1e-5)
    for k in ("offset_m", "x0_m", "slope", "rmse_m"):
        scale = np.nanmax(np.abs(ref[k])) + 1e-12
        np.testing.assert_allclose(fast[k][det], ref[k][det], rtol=rtol, atol=rtol * scale, err_msg=k)
        # elsewhere too, but for the mid-point of an undetermined width (anywhere between samples)
        if k != "x0_m":
            np.testing.assert_allclose(fast[k], ref[k], rtol=1e-3, atol=1e-3 * scale, err_msg=k)
    np.testing.assert_array_equal(fast["n_used"], ref["n_used"])
    # standard errors where the scarp is significant (flat ground leaves the width undetermined; there the
    # regularised inverse is ~1e12 and agrees only to its conditioning)
    good = det & (np.abs(ref["offset_m"]) > 3.0 * ref["offset_se_m"])
    for k in ("kappa_t_se_m2", "offset_se_m"):
        np.testing.assert_allclose(fast[k][good], ref[k][good], rtol=1e-5, err_msg=k)


@pytest.mark.parametrize(
    ("step", "half_n", "n_events"), [(0.5, 60, 1), (2.0, 30, 1), (5.0, 25, 1), (10.0, 12, 3)]
)
def test_kernel_matches_array_code(step, half_n, n_events):
    rng = np.random.default_rng(int(step * 10) + n_events)
    m = 600
    x, Z = _profiles(rng, m, step, half_n)
    s0 = np.maximum(rng.uniform(0.5, 8.0, m) * step, step)
    kw = dict(s0_m=s0, n_events=n_events)
    ref = fit_diffusion_profiles(x, Z, use_jit=False, **kw)
    fast = fit_diffusion_profiles(x, Z, use_jit=True, **kw)
    _compare(ref, fast)
    assert np.isfinite(fast["kappa_t_m2"]).all()


def test_kernel_options_match_array_code():
    # a separate x per row, a given mid-point limit, no robust weights, another tuning and width limits
    rng = np.random.default_rng(11)
    m = 300
    x, Z = _profiles(rng, m, 1.0, 40)
    X = x[None, :] * rng.uniform(0.8, 1.25, (m, 1))
    for kw in (
        dict(robust=False),
        dict(x0_max_m=rng.uniform(0.5, 4.0, m), tuning=3.0, iterations=9),
        dict(s_bounds_m=(0.5, 20.0)),
    ):
        ref = fit_diffusion_profiles(X, Z, s0_m=np.full(m, 4.0), use_jit=False, **kw)
        fast = fit_diffusion_profiles(X, Z, s0_m=np.full(m, 4.0), use_jit=True, **kw)
        _compare(ref, fast)


def test_empty_rows():
    # rows with no sample at all: both give the same (a width of the start, NaN misfit, no samples used)
    x = np.r_[-10:0, 1:11].astype(float)
    Z = np.full((3, x.size), np.nan)
    Z[1] = 0.1 * x + erf(x / 4.0)
    ref = fit_diffusion_profiles(x, Z, s0_m=np.full(3, 2.0), use_jit=False)
    fast = fit_diffusion_profiles(x, Z, s0_m=np.full(3, 2.0), use_jit=True)
    for k in ref:
        np.testing.assert_allclose(fast[k], ref[k], rtol=1e-6, atol=1e-9, equal_nan=True, err_msg=k)


def test_flat_tail_is_exact():
    # the kernel takes erf(u) = +-1 and dF = 0 from |u| = 6 on: erf rounds to 1 exactly there in float64
    # (scipy.special.erf and math.erf, the references; it does from about 5.9216 on, erfc(6) = 2.15e-17 being
    # under half an ulp of 1), and the derivative 2 / sqrt(pi) exp(-u^2) is under 3e-16 of its peak
    u = np.linspace(_U_FLAT, 30.0, 20001)
    assert (erf(u) == 1.0).all() and (erf(-u) == -1.0).all()
    assert all(math.erf(v) == 1.0 for v in u[::100])
    assert 2.0 / math.sqrt(math.pi) * math.exp(-(_U_FLAT**2)) < 3e-16


@pytest.mark.parametrize("pixel", [1.0, 10.0])
def test_station_codes_match(monkeypatch, pixel):
    # the whole per-station step (windows, interpolation correction, resolution rule) on a throw-step matrix
    rng = np.random.default_rng(int(pixel))
    m, K, step = 400, 40, 0.5 * pixel
    x, Zfull = _profiles(rng, m, step, K)
    Z = np.concatenate([Zfull[:, :K][:, ::-1], Zfull[:, K:]])  # row i the - side, row m + i the + side
    fits = dict(
        w=rng.uniform(2.0, 12.0, 2 * m),
        hi=rng.uniform(8.0, K, 2 * m),
        rms=rng.uniform(0.02, 0.3, 2 * m),
    )
    fast = pdeg.station_degradation(Z, fits, step_m=step, pixel_size_m=pixel)
    ref_fit = pdeg.fit_diffusion_profiles
    monkeypatch.setattr(pdeg, "fit_diffusion_profiles", lambda *a, **k: ref_fit(*a, use_jit=False, **k))
    ref = pdeg.station_degradation(Z, fits, step_m=step, pixel_size_m=pixel)
    np.testing.assert_array_equal(fast["kt_code"], ref["kt_code"])
    assert len(np.unique(ref["kt_code"][np.isfinite(ref["kt_code"])])) >= 3  # several codes were exercised
    np.testing.assert_allclose(fast["kt_m2"], ref["kt_m2"], rtol=1e-6, atol=1e-9 * pixel**2, equal_nan=True)
    np.testing.assert_allclose(fast["kt_rmse_m"], ref["kt_rmse_m"], rtol=1e-6, atol=1e-9, equal_nan=True)
