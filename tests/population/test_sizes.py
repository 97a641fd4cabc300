"""Tests of faultmap.population.sizes (power-law size distributions) and the CCDF figure.

Sources: Clauset, Shalizi & Newman (2009, SIAM Review 51) for the method and
check values; the PyPI package ``powerlaw`` (Alstott, Bullmore & Plenz 2014)
as a reference library. ``powerlaw`` is a test dependency only.
"""

from __future__ import annotations

import pathlib
import warnings

import matplotlib
import numpy as np
import pandas as pd
import pytest

matplotlib.use("Agg")

from faultmap.errors import InputError, ParameterError  # noqa: E402
from faultmap.population.alternatives import compare_alternatives, vuong_test
from faultmap.population.detection import detection_effects
from faultmap.population.powerlaw_fit import power_law_mle, scan_x_min
from faultmap.population.powerlaw_gof import power_law_gof
from faultmap.population.sizes import analyse_sizes, ccdf, fit_power_law


def _power_law_sample(rng, n, alpha, x_min):
    """Inverse-CDF sampling: x = x_min (1 - u)^(-1 / (alpha - 1)) (Clauset et al. 2009, eq. D.4)."""
    return x_min * (1.0 - rng.random(n)) ** (-1.0 / (alpha - 1.0))


def _mixed_sample(seed, n_tail=250, n_body=80, alpha=2.2, x_min=5.0):
    """Power-law tail above x_min plus a log-uniform body below it."""
    rng = np.random.default_rng(seed)
    return np.concatenate(
        [_power_law_sample(rng, n_tail, alpha, x_min), 10 ** rng.uniform(0.0, np.log10(x_min), n_body)]
    )


def _powerlaw_fit(x, **kw):
    import powerlaw

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return powerlaw.Fit(x, parameter_ranges={"alpha": [1, 10]}, verbose=False, **kw)


# ------------------------------------------------------------- check values
def test_clauset_check_values():
    # Clauset, Shalizi & Newman (2009, SIAM Review 51) eqs. 3.1-3.2; check values
    # x = [1.7, 3.2, 5.4, 2.1, 1.5, 2.8], x_min 1.5 (verified): alpha 2.92036, SE 0.78398.
    alpha, se, n = power_law_mle([1.7, 3.2, 5.4, 2.1, 1.5, 2.8], 1.5)
    assert alpha == pytest.approx(2.92036, abs=5e-6)
    assert se == pytest.approx(0.78398, abs=5e-6)
    assert n == 6


@pytest.mark.parametrize("alpha_true", [1.8, 2.5, 3.5])
def test_alpha_recovered_from_power_law_samples(alpha_true):
    # Inverse-CDF samples of a known power law (Clauset et al. 2009, app. D):
    # the MLE lies within 3 standard errors (their eq. 3.2) of the truth, and
    # its SE matches the spread over repeated samples.
    rng = np.random.default_rng(int(alpha_true * 10))
    est = []
    for _ in range(40):
        x = _power_law_sample(rng, 400, alpha_true, 2.0)
        a, se, _ = power_law_mle(x, 2.0)
        est.append(a)
    est = np.asarray(est)
    se_theory = (alpha_true - 1) / np.sqrt(400)
    assert abs(est.mean() - alpha_true) < 3 * se_theory / np.sqrt(40) + (alpha_true - 1) / 400
    assert np.std(est, ddof=1) == pytest.approx(se_theory, rel=0.3)


def test_scan_recovers_alpha_and_x_min_of_mixed_sample():
    # Power-law tail above 5 with a different body below (Clauset et al.
    # 2009, sec. 3.3): the KS scan finds x_min near 5 and alpha near 2.2.
    x = _mixed_sample(7, n_tail=600, n_body=200)
    f = fit_power_law(x, gof_n=0, compare=False)
    assert abs(f.alpha - 2.2) < 3 * f.se
    assert 3.0 < f.x_min < 8.0


def _scipy_alpha_ks(x, x_min):
    """Reference by scipy, not faultmap: alpha of the continuous power-law tail x >= x_min by
    scipy.stats.pareto.fit with loc 0 and scale x_min fixed (shape b = alpha - 1), and the
    two-sided KS distance of the tail from that law by scipy.stats.kstest."""
    from scipy import stats

    tail = np.asarray(x, float)
    tail = tail[tail >= x_min]
    b, _, _ = stats.pareto.fit(tail, floc=0.0, fscale=x_min)
    d = stats.kstest(tail, stats.pareto(b, scale=x_min).cdf).statistic
    return b + 1.0, d


def test_scan_equals_brute_force_loop():
    # Definition (Clauset et al. 2009 sec. 3.3): try each distinct value as x_min, MLE alpha,
    # KS distance; keep the smallest. Reference loop with scipy's Pareto fit and KS test.
    x = _mixed_sample(3, n_tail=120, n_body=40)
    xs = np.unique(x)
    best = (np.inf, None, None)
    for xm in xs[:-4]:  # tails of at least 5 values (min_tail=5)
        a, d = _scipy_alpha_ks(x, xm)
        if d < best[0]:
            best = (d, xm, a)
    xm, a, d, nt = scan_x_min(x, min_tail=5, max_candidates=None)
    assert xm == best[1]
    assert a == pytest.approx(best[2], rel=1e-9)
    assert d == pytest.approx(best[0], rel=1e-9)
    assert nt == int(np.sum(x >= xm))


# ---------------------------------------------------- reference library powerlaw
@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_alpha_and_x_min_agree_with_powerlaw_package(seed):
    # Reference library: powerlaw 2.0.0 (Alstott et al. 2014), alpha range
    # widened to [1, 10] (its default caps alpha at 3; verified on powerlaw 2.0.0).
    x = _mixed_sample(seed)
    ours = fit_power_law(x, gof_n=0, compare=False, min_tail=2, max_candidates=None)
    ref = _powerlaw_fit(x)
    # x_min selection: powerlaw's KS uses the left limits of the empirical
    # CDF only, ours the two-sided supremum, so x_min may move a little.
    assert ours.x_min == pytest.approx(ref.xmin, rel=0.15)
    assert abs(ours.alpha - ref.alpha) < 0.5 * ref.sigma
    # at the same x_min the MLE and its SE are identical
    fixed = _powerlaw_fit(x, xmin=ours.x_min)
    a, se, _ = power_law_mle(x, ours.x_min)
    assert a == pytest.approx(fixed.power_law.alpha, rel=1e-10)
    assert se == pytest.approx(fixed.power_law.standard_err, rel=1e-10)


def test_likelihood_ratio_signs_agree_with_powerlaw_package():
    # Reference library: powerlaw's distribution_compare (Vuong test,
    # normalised ratio); positive favours the power law (Clauset et al. 2009
    # sec. 5). Log-normal data: log-normal preferred; power-law data:
    # power law preferred to the exponential.
    rng = np.random.default_rng(5)
    logn = rng.lognormal(mean=1.0, sigma=0.6, size=1500)
    pl = _power_law_sample(rng, 800, 2.4, 1.0)
    for data, alt, sign in [(logn, "lognormal", -1), (pl, "exponential", +1)]:
        ref = _powerlaw_fit(data)
        R_ref, p_ref = ref.distribution_compare("power_law", alt, normalized_ratio=True)
        ours = compare_alternatives(data, ref.xmin, ref.alpha)
        assert np.sign(ours[f"lr_{alt}"]) == np.sign(R_ref) == sign
        assert ours[f"p_{alt}"] < 0.1
    # exponential: MLE closed form, so the whole ratio must agree
    ref = _powerlaw_fit(pl)
    R_ref, p_ref = ref.distribution_compare("power_law", "exponential", normalized_ratio=True)
    ours = compare_alternatives(pl, ref.xmin, ref.alpha)
    assert ours["lr_exponential"] == pytest.approx(R_ref, rel=1e-3)
    assert ours["p_exponential"] == pytest.approx(p_ref, rel=1e-2, abs=1e-12)


def test_vuong_test_against_powerlaw_package():
    # Vuong (1989); Clauset et al. (2009) eq. 5.4. Reference library: powerlaw's
    # loglikelihood_ratio (Alstott et al. 2014), raw and normalised ratio and the p-value.
    import powerlaw

    rng = np.random.default_rng(6)
    l1 = rng.normal(0.1, 1.0, 200)
    l2 = rng.normal(0.0, 1.0, 200)
    z, p, R = vuong_test(l1, l2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        R_ref, _ = powerlaw.loglikelihood_ratio(l1, l2, normalized_ratio=False)
        z_ref, p_ref = powerlaw.loglikelihood_ratio(l1, l2, normalized_ratio=True)
    assert R == pytest.approx(R_ref, rel=1e-12)
    assert z == pytest.approx(z_ref, rel=1e-9)
    assert p == pytest.approx(p_ref, rel=1e-9)


def test_faultmap_does_not_import_powerlaw():
    # Packaging rule of this project: powerlaw is a test dependency only.
    # The whole package is checked: any module could be the one that slips.
    import faultmap

    root = pathlib.Path(faultmap.__file__).resolve().parent
    modules = sorted(root.rglob("*.py"))
    assert len(modules) > 40 and (root / "population" / "sizes.py") in modules
    for path in modules:
        src = path.read_text()
        assert "import powerlaw" not in src and "from powerlaw" not in src, path


# ------------------------------------------------------------- goodness of fit
def test_gof_p_value_accepts_true_model_and_rejects_wrong_one():
    # Clauset et al. (2009) sec. 4.1: p = fraction of synthetic KS distances
    # >= observed. The true law is plausible (p > 0.1); a wrong alpha gives a
    # KS distance no synthetic set reaches (p = 0).
    rng = np.random.default_rng(8)
    x = _power_law_sample(rng, 300, 2.5, 1.0)
    a, _, _ = power_law_mle(x, 1.0)
    p_good, ks = power_law_gof(x, 1.0, a, gof_n=60, seed=1, max_candidates=50)
    assert p_good > 0.1 and ks.shape == (60,)
    p_bad, _ = power_law_gof(x, 1.0, 3.5, gof_n=60, seed=1, max_candidates=50)
    assert p_bad == 0.0


def test_gof_p_values_are_roughly_uniform_under_the_null():
    # Clauset et al. (2009) sec. 4.1: for data drawn from the fitted family the
    # p-value is ~ uniform; the mean of 12 p-values lies within ~3 sd of 0.5.
    ps = []
    for seed in range(12):
        rng = np.random.default_rng(100 + seed)
        x = _power_law_sample(rng, 150, 2.3, 1.0)
        f = fit_power_law(x, gof_n=40, seed=seed, max_candidates=40, compare=False)
        ps.append(f.gof_p)
    assert 0.25 < np.mean(ps) < 0.75


def test_gof_is_seeded():
    x = _mixed_sample(9, n_tail=100, n_body=30)
    a = fit_power_law(x, gof_n=30, seed=2, compare=False)
    b = fit_power_law(x, gof_n=30, seed=2, compare=False)
    assert a.gof_p == b.gof_p and a.gof_n == 30


# ----------------------------------------------------------- detection, censoring
def test_detection_effects_counts():
    # Counting (definition): 3 values below a 2 m detection limit; x_min 4 m
    # is 2x the limit.
    x = np.array([0.5, 1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 8.0, 13.0, 21.0])
    f = fit_power_law(x, x_min=4.0, gof_n=0, compare=False)
    eff = detection_effects(x, f, detection_limit=2.0)
    assert eff["n_below_detection"] == 3
    assert eff["frac_below_detection"] == pytest.approx(0.3)
    assert eff["x_min_over_detection"] == pytest.approx(2.0)
    assert eff["n_between_detection_and_x_min"] == 2
    eff2 = detection_effects(x, f, detection_limit=3.0)
    assert "caution" in eff2["detection_note"]
    assert detection_effects(x, f, detection_limit=None)["detection_note"]


def test_analyse_sizes_excludes_censored_and_reports_both():
    # Shared methods: censored lengths are lower bounds; the table reports the
    # fit without them and the alpha with them.
    x = _mixed_sample(10, n_tail=150, n_body=50)
    rng = np.random.default_rng(10)
    cens = rng.random(x.size) < 0.1
    pop = pd.DataFrame({"length_m": x * 100.0, "max_throw_m": x, "censored": cens})
    res = analyse_sizes(pop, gof_n=20, detection_limits={"max_throw_m": 1.5})
    t = res.table.set_index("variable")
    assert t.loc["length_m", "n_faults"] == int((~cens).sum())
    assert t.loc["length_m", "n_censored"] == int(cens.sum())
    assert np.isfinite(t.loc["length_m", "alpha_incl_censored"])
    assert t.loc["length_m", "alpha_excl_censored"] == t.loc["length_m", "alpha"]
    # scale invariance of the power law (Clauset et al. 2009): lengths = 100 x
    # throws give the same alpha and x_min x 100
    assert t.loc["length_m", "alpha"] == pytest.approx(t.loc["max_throw_m", "alpha"], rel=1e-9)
    assert t.loc["length_m", "x_min"] == pytest.approx(100 * t.loc["max_throw_m", "x_min"])
    assert t.loc["max_throw_m", "n_below_detection"] == int(np.sum(x[~cens] < 1.5))
    for c in [
        "alpha",
        "x_min",
        "se",
        "gof_p",
        "lr_exponential",
        "p_exponential",
        "lr_lognormal",
        "p_lognormal",
    ]:
        assert c in res.table.columns


# ------------------------------------------------------------- degenerate input
def test_degenerate_inputs_are_not_fitted():
    f = fit_power_law([3.0, 4.0], gof_n=10)
    assert not f.fitted and "at least" in f.reason
    f = fit_power_law([2.0] * 20, gof_n=10)
    assert not f.fitted and "identical" in f.reason
    f = fit_power_law([0.0, np.nan, -1.0, 2.0], gof_n=10)
    assert not f.fitted and f.n == 1
    with pytest.raises(ParameterError):
        power_law_mle([1.0, 2.0], 0.0)
    with pytest.raises(InputError):
        scan_x_min([1.0, 0.0, 3.0])
    with pytest.raises(InputError, match="throw tool"):
        analyse_sizes(pd.DataFrame({"length_m": [1.0, 2.0]}))


def test_ccdf_definition():
    # P(X >= x) of the empirical distribution (definition).
    xs, p = ccdf([3.0, 1.0, 2.0, 4.0])
    assert list(xs) == [1.0, 2.0, 3.0, 4.0]
    assert list(p) == [1.0, 0.75, 0.5, 0.25]


# --------------------------------------------------------------------- figure
def test_size_figure(tmp_path):
    from matplotlib.figure import Figure

    from faultmap.population.figures import size_figure

    x = _mixed_sample(11, n_tail=120, n_body=40)
    pop = pd.DataFrame({"length_m": 100 * x, "max_throw_m": x, "censored": False})
    res = analyse_sizes(pop, gof_n=10)
    fig = size_figure(res.fits, detection_limits={"max_throw_m": 1.2})
    assert isinstance(fig, Figure) and len(fig.axes) == 2
    ax = fig.axes[1]
    assert ax.get_xscale() == "log" and "(m)" in ax.get_xlabel()
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("power law" in s for s in labels)
    assert any("log-normal" in s for s in labels) and any("exponential" in s for s in labels)
    assert any("detection limit" in s for s in labels)
    # the fitted power law joins the data at x_min with the tail fraction
    f = res.fits["max_throw_m"]
    assert f.ccdf_model([f.x_min])[0] == pytest.approx(f.n_tail / f.n)
    out = tmp_path / "sizes.png"
    fig.savefig(out, dpi=150)
    assert out.stat().st_size > 10_000


# ------------------------------------------- replicate counts and Monte Carlo precision
def test_gof_p_value_reports_its_binomial_standard_error():
    # Clauset, Shalizi & Newman (2009) sec. 4.1: p is a fraction of B
    # independent synthetic sets, so its Monte Carlo standard error is
    # sqrt(p (1 - p) / B), at most 1 / (2 sqrt(B)) (p = 0.5).
    from faultmap.population.powerlaw_gof import gof_p_se

    x = _mixed_sample(21, n_tail=120, n_body=40)
    f = fit_power_law(x, gof_n=64, seed=4, compare=False)
    assert f.gof_n == 64 and f.gof_rule == "given"
    from scipy import stats

    # reference: standard deviation of a binomial count (scipy.stats.binom) divided by B
    assert f.gof_p_se == pytest.approx(stats.binom(64, f.gof_p).std() / 64, rel=1e-12)
    assert gof_p_se(0.5, 100) == pytest.approx(stats.binom(100, 0.5).std() / 100)
    assert np.isnan(gof_p_se(np.nan, 100)) and np.isnan(gof_p_se(0.3, 0))
    # the table carries the count asked for, the count used and the error
    pop = pd.DataFrame({"length_m": x, "max_throw_m": 0.03 * x})
    row = analyse_sizes(pop, gof_n=64, seed=4).table.iloc[0]
    assert row.gof_n == 64 and row.gof_n_used == 64 and row.gof_n_rule == "given"
    assert row.gof_p_se == pytest.approx(stats.binom(64, row.gof_p).std() / 64, rel=1e-12)


def test_gof_replicate_rule_keeps_small_samples_and_bounds_large_ones():
    # Our rule: min(1000, max(100, 1e8 // (n C))), C the x_min candidates
    # (200 by default); the floor B = 100 = 1 / (4 eps^2) for eps = 0.05
    # (Clauset et al. 2009, sec. 4.1). A given gof_n is used exactly.
    from faultmap.population.powerlaw_gof import gof_replicates

    assert gof_replicates(300) == 1000
    assert gof_replicates(500) == 1000
    assert gof_replicates(2000) == 250
    assert gof_replicates(20_000) == 100
    assert gof_replicates(20_000, gof_n=37) == 37
    assert gof_replicates(50, gof_n=0) == 0
    # few candidates: more sets fit in the budget, up to the cap
    assert gof_replicates(2000, max_candidates=50) == 1000
    # small samples: the automatic rule gives the former default, same numbers
    x = _mixed_sample(22, n_tail=150, n_body=50)
    a = fit_power_law(x, seed=5, compare=False)
    b = fit_power_law(x, gof_n=1000, seed=5, compare=False)
    assert a.gof_n == b.gof_n == 1000 and a.gof_rule == "auto"
    assert a.gof_p == b.gof_p


def test_large_population_uses_the_replicate_rule():
    # 20 000 values: the automatic rule gives 100 synthetic sets (the floor,
    # Clauset et al. 2009 sec. 4.1: p to about +-0.05); the count, not the
    # time, is checked. The fit itself still recovers alpha (eq. 3.1).
    rng = np.random.default_rng(23)
    x = _power_law_sample(rng, 20_000, 2.5, 1.0)
    f = fit_power_law(x, seed=1)
    assert f.gof_n == 100 and f.gof_rule == "auto"
    assert 0.0 <= f.gof_p <= 1.0
    from scipy import stats

    assert f.gof_p_se == pytest.approx(stats.binom(100, f.gof_p).std() / 100, abs=1e-15)
    assert abs(f.alpha - 2.5) < 4 * f.se


def test_ks_scan_of_many_rows_equals_a_loop_over_rows(monkeypatch):
    # Definition (Clauset et al. 2009 sec. 3.3): for every row, MLE alpha and
    # KS distance at each candidate, keep the smallest distance. The batched
    # scan (candidate groups on their own tails, small blocks forced here)
    # must give the numbers of a plain per-row loop with scipy's Pareto fit and KS test.
    from faultmap.population import powerlaw_fit as plf

    monkeypatch.setattr(plf, "_CHUNK_ELEMS", 997)
    monkeypatch.setattr(plf, "_CAND_GROUP", 3)
    rng = np.random.default_rng(24)
    X = np.sort(
        np.vstack([_mixed_sample(s, n_tail=90, n_body=30) for s in range(5)] + [rng.random(120) + 1]), axis=1
    )
    pos = plf._candidate_positions(X.shape[1], 5, 40)
    xm, a, d, nt = plf._scan_sorted(X, pos)
    for r in range(X.shape[0]):
        best = (np.inf, np.nan, np.nan)
        for p in pos:
            if p > 0 and X[r, p] == X[r, p - 1]:
                continue
            ar, dr = _scipy_alpha_ks(X[r], X[r, p])
            if dr < best[0]:
                best = (dr, X[r, p], ar)
        assert xm[r] == best[1]
        assert a[r] == pytest.approx(best[2], rel=1e-9)
        assert d[r] == pytest.approx(best[0], rel=1e-9)
        assert nt[r] == int(np.sum(X[r] >= xm[r]))
