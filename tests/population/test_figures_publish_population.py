"""The displacement-length figure is fit to publish: one quantity named, like compared with like, a compact legend."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from matplotlib.text import Text

from faultmap.population.figures import dl_figure
from faultmap.population.references import REFERENCE_RANGES
from faultmap.population.scaling import analyse_scaling


def population(n: int = 40, seed: int = 3, dip: float = 50.0) -> gpd.GeoDataFrame:
    rng = np.random.default_rng(seed)
    L = 10 ** rng.uniform(2.5, 4.0, n)
    T = 0.02 * L * 10 ** rng.normal(0, 0.1, n)
    start = np.c_[rng.uniform(0, 1e5, n), rng.uniform(0, 1e5, n)]
    geoms = shapely.linestrings(np.stack([start, start + np.c_[np.zeros(n), L]], axis=1))
    return gpd.GeoDataFrame(
        {"fault_id": np.arange(1, n + 1), "length_m": L, "strike_deg": 0.0, "max_throw_m": T,
         "max_throw_err_m": 0.1 * T, "dip_deg": dip, "censored": False, "system_id": np.arange(1, n + 1)},
        geometry=geoms, crs="EPSG:32637",
    )


@pytest.fixture(scope="module")
def figs():
    g = population()
    return {d: dl_figure(analyse_scaling(g, bootstrap_n=20, displacement=d)) for d in ("throw", "dip_slip")}


@pytest.mark.parametrize("disp, word", [("throw", "throw"), ("dip_slip", "displacement")])
def test_title_and_axis_name_the_same_quantity(figs, disp, word):
    ax = figs[disp].axes[0]
    other = "displacement" if word == "throw" else "throw"
    assert word in ax.get_title().lower() and word in ax.get_ylabel().lower()
    assert other not in ax.get_title().lower() and other not in ax.get_ylabel().lower()


def test_reference_lines_converted_to_throw_and_said(figs):
    sin = np.sin(np.radians(50.0))
    ref = next(r for r in REFERENCE_RANGES if r.quantity == "d_l_ratio" and r.lo == r.hi)
    for disp, factor in (("throw", sin), ("dip_slip", 1.0)):
        ax = figs[disp].axes[0]
        line = next(ln for ln in ax.lines if ln.get_label().startswith(f"D/L = {ref.lo:g}"))
        x, y = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
        assert np.allclose(y / x, ref.lo * factor)
    notes = " ".join(t.get_text() for t in figs["throw"].axes[0].texts)
    assert "sin(50" in notes


def test_legend_compact_inside_and_without_memory_notes(figs):
    for fig in figs.values():
        ax = fig.axes[0]
        leg = ax.get_legend()
        texts = [t.get_text() for t in leg.get_texts()]
        assert texts and not any("from memory" in t for t in texts)
        fig.canvas.draw()
        lb, ab = leg.get_window_extent(), ax.get_window_extent()
        assert ab.x0 - 1 <= lb.x0 and lb.x1 <= ab.x1 + 1 and ab.y0 - 1 <= lb.y0 and lb.y1 <= ab.y1 + 1
        fb = fig.bbox
        assert lb.width * lb.height < 0.2 * fb.width * fb.height


def test_log_axes_have_plain_tick_labels(figs):
    fig = figs["throw"]
    fig.canvas.draw()
    ax = fig.axes[0]
    for axis in (ax.xaxis, ax.yaxis):
        labels = [t.get_text() for t in axis.get_ticklabels(which="both") if t.get_text()]
        assert labels
        for s in labels:
            float(s)  # plain numbers, no mathtext powers
    assert not [t for t in fig.findobj(Text) if "$" in t.get_text()]
