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
    # check value worked by hand from the copied coefficients: 30 km -> 6.7934
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
    # above the break the 4/3 slope applies (H&B02): one decade of area adds 4/3 magnitude units
    assert magnitude("hb02", 10_000.0) - magnitude("hb02", 1_000.0) == pytest.approx(4 / 3, abs=1e-9)
    assert magnitude("hb02", 100.0) - magnitude("hb02", 10.0) == pytest.approx(1.0, abs=1e-9)


# Well-studied normal-fault earthquakes (all values from memory; Wells & Coppersmith 1994 Table 1
# and the studies named): surface rupture length (km), moment magnitude.
#   Borah Peak, Idaho, 1983: SRL 34-36 km (Crone et al. 1987), Mw 6.9 (M0 ~3e19 N m).
#   Irpinia, Italy, 1980: SRL 38 km (Pantosti & Valensise 1990), Mw 6.9.
#   Hebgen Lake, Montana, 1959: SRL 26 km, Mw 7.3 (Doser 1985); a known high-magnitude outlier.
#   Norcia, Italy, 2016: SRL about 22 km (Civico et al. 2018), Mw 6.5 (INGV; USGS 6.6).
EVENTS_SRL_MW = [(34.0, 6.9), (38.0, 6.9), (26.0, 7.3), (22.0, 6.5)]


def test_wc94_srl_normal_against_observed_normal_fault_earthquakes():
    # The published relation (sigma 0.34) must predict these observed events within 2 sigma
    # each and without a mean bias larger than 0.2 (tolerance for values from memory). A
    # mistyped intercept or slope by about 0.15 magnitude units fails it.
    srl = np.array([e[0] for e in EVENTS_SRL_MW])
    mw = np.array([e[1] for e in EVENTS_SRL_MW])
    resid = mw - magnitude("srl_wc94", srl)
    assert np.all(np.abs(resid) < 2 * 0.34), resid
    assert abs(resid.mean()) < 0.2, resid


def test_area_relations_against_observed_normal_fault_earthquakes():
    # Rupture areas from fault models (from memory): Borah Peak 1983 about 34 km x 22 km
    # (dip ~45 deg to ~16 km depth; Doser & Smith 1985), Mw 6.9; L'Aquila 2009 about 18 km x
    # 14 km (Walters et al. 2009; Cirella et al. 2009), Mw 6.3 (GCMT M0 3.4e18 N m).
    area = np.array([34.0 * 22.0, 18.0 * 14.0])
    mw = np.array([6.9, 6.3])
    for key in ("ra_wc94", "ra_all_wc94", "hb02"):
        resid = mw - magnitude(key, area)
        assert np.all(np.abs(resid) < 0.25), (key, resid)  # one sigma of the area relations


def test_single_event_displacement_relations_against_observed_events():
    # Surface displacement in one event (from memory): Borah Peak 1983 maximum 2.7 m, average
    # about 0.8 m (Crone et al. 1987), Mw 6.9; Hebgen Lake 1959 maximum 6.1 m (the largest
    # normal-fault MD in Wells & Coppersmith 1994), Mw 7.3 (Doser 1985).
    assert magnitude("md_wc94", 2.7) == pytest.approx(6.9, abs=0.34)
    assert magnitude("md_wc94", 6.1) == pytest.approx(7.3, abs=0.34)
    assert magnitude("ad_wc94", 0.8) == pytest.approx(6.9, abs=0.33)
    # and the reverse regression gives Borah Peak's average displacement within its scatter
    # (0.33 log10 units)
    assert abs(math.log10(displacement_from_magnitude(6.9)) - math.log10(0.8)) < 0.33


def test_seismic_moment_and_mw_check_value():
    # M0 = mu A D (Aki 1966) with mu 3e10 Pa (common practice): 30 x 15 km, 1 m -> 1.35e19 N m.
    m0 = seismic_moment(30e3 * 15e3, 1.0, shear_modulus_pa=3e10)
    assert m0 == pytest.approx(1.35e19, rel=1e-12)


@pytest.mark.parametrize(
    ("m0_nm", "mw"),
    [
        # Global CMT catalogue moments and the Mw they are published with (from memory):
        (3.4e18, 6.3),  # L'Aquila 2009 (normal)
        (3.1e19, 6.9),  # Borah Peak 1983 (normal)
        (4.0e22, 9.0),  # Sumatra-Andaman 2004
        (5.3e22, 9.1),  # Tohoku 2011
    ],
)
def test_moment_magnitude_against_catalogue_events(m0_nm, mw):
    # Catalogue Mw are rounded to 0.1; IASPEI (2013) form of Hanks & Kanamori (1979).
    assert moment_magnitude(m0_nm) == pytest.approx(mw, abs=0.05 + 1e-9)


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
        assert r.sigma_kind in ("residual", "adopted")  # a scatter either way, never an intercept s.e.
        assert r.sigma_kind == "residual" or "Adopted rule" in r.note
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


def test_displacement_regressions_obey_the_least_squares_identity():
    # For one data set, the OLS slopes of M on X and of X on M multiply to r**2 < 1, so neither
    # regression is the inverse of the other (Wells & Coppersmith 1994: one-directional).
    # W&C94 Table 2B correlation coefficients (from memory): AD normal r = 0.64, AD all r = 0.75.
    for m_on_x, x_on_m, r in (("ad_wc94", "ad_on_m_wc94", 0.64), ("ad_all_wc94", "ad_on_m_all_wc94", 0.75)):
        prod = get_relation(m_on_x).b * get_relation(x_on_m).b
        assert 0 < prod < 1
        assert math.sqrt(prod) == pytest.approx(r, abs=0.02)
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
    m, s = preferred_magnitude(tab, rule="area_mean")
    # the documented rule (docs/methods/hazard.md) by a different route: the generalised-least-
    # squares estimate of one common magnitude from the two area estimates, (1' C^-1 1)^-1 1' C^-1 y
    # with C = diag(sigma**2), solved by numpy; its sigma with fully correlated errors,
    # sqrt(w' (s s') w)
    for i in range(2):
        y = tab.loc[i, ["mag_ra_wc94", "mag_hb02"]].to_numpy(float)
        sd = tab.loc[i, ["mag_ra_wc94_sigma", "mag_hb02_sigma"]].to_numpy(float)
        ci = np.linalg.inv(np.diag(sd**2))
        x = np.ones((2, 1))
        mu = np.linalg.solve(x.T @ ci @ x, x.T @ ci @ y)[0]
        w = (ci @ x / (x.T @ ci @ x)).ravel()
        assert m[i] == pytest.approx(mu, abs=1e-12)
        assert s[i] == pytest.approx(math.sqrt(w @ np.outer(sd, sd) @ w), abs=1e-12)
    # comparable sigmas: every column is a single-event scatter, 0.24-0.40 (W&C94; H&B02 adopted)
    sig = tab[[c for c in tab.columns if c.endswith("_sigma")]].to_numpy(float)
    assert np.all((sig[np.isfinite(sig)] >= 0.24) & (sig[np.isfinite(sig)] <= 0.40))
    assert 0.24 <= s.min() and s.max() <= 0.25
    # above 537 km2 the strike-slip-based upper branch of H&B02 has weight 0: the preferred
    # magnitude is W&C94 RA-normal alone, 3.93 + 1.02 * 3 = 6.99 at 1000 km2 (Table 2A)
    big, _ = magnitude_table(length_km=[50.0], area_km2=[1000.0])
    mb, sb = preferred_magnitude(big, rule="area_mean")
    assert mb[0] == pytest.approx(6.99, abs=1e-9) and sb[0] == pytest.approx(0.25)
    assert big["mag_hb02"].iloc[0] > mb[0] + 0.05  # the branch it leaves out is larger
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
