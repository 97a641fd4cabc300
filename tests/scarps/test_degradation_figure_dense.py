"""The degradation figure at regional size: bounded, readable (issue: figures at 20 and at 20 000 faults)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from faultmap.scarps.figures import _ERROR_BARS_MAX, degradation_figure


def _frames(n: int, seed: int = 0):
    rng = np.random.default_rng(seed)
    mt = rng.lognormal(2.5, 0.6, n)
    flag = rng.choice(["measured", "upper_bound", "lower_bound"], n, p=[0.6, 0.3, 0.1])
    kt = rng.lognormal(3.5, 0.5, n)
    faults = pd.DataFrame({"fault_id": np.arange(1, n + 1), "max_throw_m": mt, "kappa_t_flag": flag,
                           "kappa_t_m2": np.where(flag == "measured", kt, np.nan), "kappa_t_err_m2": 0.1 * kt,
                           "kappa_t_bound_m2": np.where(flag == "measured", np.nan, kt)})
    k = min(n, 50)
    fid = np.repeat(faults["fault_id"].to_numpy()[:k], 10)
    stations = pd.DataFrame({"fault_id": fid, "dist_m": np.tile(np.arange(10) * 100.0, k),
                             "kappa_t_flag": "ok", "kappa_t_m2": rng.lognormal(3.5, 0.3, fid.size),
                             "kappa_t_bound_m2": np.nan})
    return faults, stations


def _error_bar_segments(ax) -> int:
    from matplotlib.collections import LineCollection

    return sum(len(c.get_segments()) for c in ax.collections if isinstance(c, LineCollection))


def test_twenty_thousand_faults_draw_error_bars_on_the_largest_only():
    faults, stations = _frames(20_000)
    fig = degradation_figure(faults, stations, pixel_size_m=10.0)
    w, h = fig.get_size_inches() * fig.dpi
    assert max(w, h) <= 4000
    ax2 = fig.axes[1]
    assert _error_bar_segments(ax2) == _ERROR_BARS_MAX
    assert any(f"{_ERROR_BARS_MAX} largest" in t.get_text() for t in ax2.get_legend().get_texts())


def test_twenty_faults_draw_every_error_bar():
    faults, stations = _frames(20, seed=1)
    fig = degradation_figure(faults, stations, pixel_size_m=10.0)
    n_measured = int((faults["kappa_t_flag"] == "measured").sum())
    assert _error_bar_segments(fig.axes[1]) == n_measured
