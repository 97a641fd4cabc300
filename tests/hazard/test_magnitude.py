"""Tests of faultmap.hazard.magnitudes against published relations and check values.

Sources (published sources; summarised in docs/methods/hazard.md):
* Wells & Coppersmith (1994), BSSA 84, Table 2A-2B ("W&C94").
* Hanks & Bakun (2002), BSSA 92 ("H&B02"), abstract (verified).
* Moment M0 = mu A D (Aki 1966) and Mw = (2/3)(log10 M0 - 9.1) (IASPEI 2013
  form of Hanks & Kanamori 1979).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd
import pytest

from faultmap.errors import InputError, ParameterError
from faultmap.hazard.magnitudes import (
    MAGNITUDE_KEYS,
    RELATIONS,
    displacement_from_magnitude,
    downdip_width_km,
    get_relation,
    magnitude,
    magnitude_sigma,
    magnitude_table,
    moment_from_magnitude,
    moment_magnitude,
    preferred_magnitude,
    range_warnings,
    seismic_moment,
)


def test_wc94_srl_normal_30km():
    # W&C94 Table 2A, normal: M = 4.86 + 1.32 log10(SRL), s 0.34 (verified);
    # check: SRL 30 km -> 6.8098 (verified).
    assert magnitude("srl_wc94", 30.0) == pytest.approx(6.8098, abs=1e-4)
    assert magnitude_sigma("srl_wc94", 30.0) == pytest.approx(0.34)


def test_wc94_all_slip_srl_and_area_coefficients():
    # W&C94 Table 2A, as copied in the OpenSHA magnitude-scaling glossary
    # (a, b verified there): all slip types M = 5.08 + 1.16 log10(SRL);
    # rupture area normal M = 3.93 + 1.02 log10(A), all M = 4.07 + 0.98 log10(A),
    # sigmas 0.25 (normal) and 0.24 (all).
    assert magnitude("srl_all_wc94", 30.0) == pytest.approx(5.08 + 1.16 * math.log10(30.0), abs=1e-12)
    assert magnitude("srl_all_wc94", 30.0) == pytest.approx(6.7934, abs=1e-4)
    assert magnitude("ra_wc94", 100.0) == pytest.approx(5.97, abs=1e-9)
    assert magnitude("ra_all_wc94", 100.0) == pytest.approx(6.03, abs=1e-9)
    assert magnitude_sigma("ra_wc94", 100.0) == pytest.approx(0.25)
    assert magnitude_sigma("ra_all_wc94", 100.0) == pytest.approx(0.24)


def test_hanks_bakun_450_and_continuity_at_537():
    # H&B02 (verified): M = log10 A + 3.98 (A <= 537 km2), 4/3 log10 A + 3.07 above.
    # H&B02 check: 450 km2 -> 6.6332 (verified); the two branches meet at 537 km2 (M 6.71).
    assert magnitude("hb02", 450.0) == pytest.approx(6.6332, abs=1e-4)
    below = magnitude("hb02", 537.0)
    above = magnitude("hb02", 537.0 * (1 + 1e-9))
    assert below == pytest.approx(above, abs=1e-3)
    assert below == pytest.approx(6.71, abs=0.005)
    # above the break the 4/3 slope applies (H&B02)
    assert magnitude("hb02", 5000.0) == pytest.approx(4 / 3 * math.log10(5000.0) + 3.07, abs=1e-12)


def test_seismic_moment_and_mw_check_value():
    # M0 = mu A D with mu 3e10 Pa (common practice), Mw = (2/3)(log10 M0 - 9.1) (IASPEI form):
    # check 30 x 15 km, 1 m -> M0 1.35e19 N m, Mw 6.6869.
    m0 = seismic_moment(30e3 * 15e3, 1.0, shear_modulus_pa=3e10)
    assert m0 == pytest.approx(1.35e19, rel=1e-12)
    assert moment_magnitude(m0) == pytest.approx(6.6869, abs=1e-4)


def test_moment_round_trip_and_dyne_cm_offset():
    # Inverse of the IASPEI form (analytic) ...
    mw = np.array([5.0, 6.3, 7.7])
    assert np.allclose(moment_magnitude(moment_from_magnitude(mw)), mw, atol=1e-12)
    # ... and the Hanks & Kanamori (1979) dyne-cm form 2/3 log10(M0[dyne cm]) - 10.7
    # differs by 0.0333 (the two forms differ by 0.033; we fix the IASPEI form).
    m0 = 1.35e19
    hk79 = 2.0 / 3.0 * math.log10(m0 * 1e7) - 10.7
    assert hk79 - moment_magnitude(m0) == pytest.approx(0.0333, abs=2e-4)


def test_downdip_width_geometry():
    # W = thickness / sin(dip) (geometry): 15 km at 30 deg -> 30 km; vertical -> 15 km.
    assert downdip_width_km(15.0, 30.0) == pytest.approx(30.0)
    assert downdip_width_km(15.0, 90.0) == pytest.approx(15.0)
    with pytest.raises(InputError):
        downdip_width_km(15.0, 0.0)


@pytest.mark.parametrize("key", MAGNITUDE_KEYS)
def test_every_relation_increases_with_size(key):
    # All published M-on-X slopes are positive (W&C94, H&B02): bigger fault, bigger magnitude.
    rel = get_relation(key)
    x = np.geomspace(rel.x_range[0], rel.x_range[1] * 2, 50)
    assert np.all(np.diff(magnitude(key, x)) > 0)


def test_relation_table_is_traceable():
    # One table; every row names its source and how sure we are of it.
    keys = [r.key for r in RELATIONS]
    assert len(keys) == len(set(keys))
    for r in RELATIONS:
        assert r.confidence in ("verified", "from memory")
        assert r.range_confidence in ("verified", "from memory")
        assert "19" in r.source or "20" in r.source
        assert r.sigma > 0 and r.x_range[0] < r.x_range[1] and r.mag_range[0] < r.mag_range[1]
        with pytest.raises(dataclasses.FrozenInstanceError):
            r.a = 0.0  # frozen
    # SRL normal was read in a copy of Table 2A: 2.5-41 km, M 5.2-7.3 (verified)
    srl = get_relation("srl_wc94")
    assert srl.x_range == (2.5, 41.0) and srl.mag_range == (5.2, 7.3) and srl.confidence == "verified"


def test_range_warnings_name_the_input():
    # W&C94 normal SRL data range 2.5-41 km (verified copy of Table 2A).
    assert range_warnings("srl_wc94", [30.0]) == []
    w = range_warnings("srl_wc94", [30.0, 60.0, 1.0], labels=["fault 1", "fault 2", "fault 3"])
    assert len(w) == 1
    assert "fault 2" in w[0] and "fault 3" in w[0] and "fault 1" not in w[0]
    # magnitude range for the X-on-M relation (from memory: M 6.0-7.3)
    assert range_warnings("ad_on_m_wc94", [5.5], labels=["fault 9"])


def test_displacement_regression_is_one_directional():
    # W&C94 Table 2B (from memory): log10(AD) = -4.45 + 0.63 M for normal faults;
    # M 7.0 -> 0.912 m. The M-on-AD regression (6.78 + 0.65 log AD) is NOT its
    # inverse (W&C94: regressions are one-directional).
    d = displacement_from_magnitude(7.0)
    assert d == pytest.approx(10 ** (-4.45 + 0.63 * 7.0), rel=1e-12)
    assert d == pytest.approx(0.912, abs=1e-3)
    assert abs(magnitude("ad_wc94", d) - 7.0) > 0.05
    with pytest.raises(ParameterError):
        displacement_from_magnitude(7.0, key="srl_wc94")
    with pytest.raises(ParameterError):
        magnitude("ad_on_m_wc94", 1.0)


def test_magnitude_table_and_preferred_rule():
    tab, warns = magnitude_table(length_km=[30.0, 10.0], area_km2=[450.0, 150.0], avg_disp_m=[np.nan, 0.5])
    assert isinstance(tab, pd.DataFrame)
    assert tab["mag_srl_wc94"].iloc[0] == pytest.approx(6.8098, abs=1e-4)
    assert tab["mag_hb02"].iloc[0] == pytest.approx(6.6332, abs=1e-4)
    assert np.isnan(tab["mag_ad_wc94"].iloc[0]) and np.isfinite(tab["mag_ad_wc94"].iloc[1])
    assert np.isnan(tab["mag_md_wc94"]).all()
    # documented rule: mean of W&C94 RA-normal and H&B02, sigma of W&C94 RA-normal
    m, s = preferred_magnitude(tab, rule="area_mean")
    assert m[0] == pytest.approx(0.5 * (magnitude("ra_wc94", 450.0) + 6.6332), abs=1e-4)
    assert np.allclose(s, 0.25)
    m2, s2 = preferred_magnitude(tab, rule="srl_wc94")
    assert m2[0] == pytest.approx(6.8098, abs=1e-4) and s2[0] == pytest.approx(0.34)
    with pytest.raises(ParameterError):
        preferred_magnitude(tab, rule="nonsense")


def test_bad_inputs():
    with pytest.raises(InputError):
        magnitude("srl_wc94", [10.0, 0.0])
    with pytest.raises(ParameterError):
        magnitude("no_such_relation", 10.0)
    assert np.isnan(magnitude("srl_wc94", np.nan))
