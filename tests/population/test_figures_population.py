"""Population figures stay bounded and readable from a few to thousands of faults (synthetic traces built here)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from matplotlib.text import Text

from faultmap.figure_kit import MAX_SIDE_PX
from faultmap.population.figures import dl_figure, size_figure
from faultmap.population.scaling import analyse_scaling
from faultmap.population.sizes import analyse_sizes

CRS = "EPSG:32637"


def population(n: int, seed: int = 0) -> gpd.GeoDataFrame:
    """``n`` straight N-S traces, D = 0.02 L with scatter; one in ten ten times under- or over-displaced."""
    rng = np.random.default_rng(seed)
    L = 10 ** rng.uniform(2.3, 4.0, n)
    T = 0.02 * L * 10 ** rng.normal(0, 0.08, n)
    odd = np.arange(n) % 10 == 0
    T[odd] *= np.where(np.arange(odd.sum()) % 2, 10.0, 0.1)
    start = np.c_[rng.uniform(0, 1e6, n), rng.uniform(0, 1e6, n)]
    geoms = shapely.linestrings(np.stack([start, start + np.c_[np.zeros(n), L]], axis=1))
    return gpd.GeoDataFrame(
        {
            "fault_id": np.arange(1, n + 1),
            "length_m": L,
            "strike_deg": 0.0,
            "max_throw_m": T,
            "max_throw_err_m": 0.1 * T,
            "dip_deg": 60.0,
            "censored": False,
            "system_id": np.arange(1, n + 1),
        },
        geometry=geoms,
        crs=CRS,
    )


def n_artists(fig) -> int:
    return sum(len(ax.lines) + len(ax.collections) + len(ax.patches) + len(ax.texts) for ax in fig.axes) + len(
        fig.texts
    )


def all_text(fig) -> str:
    return " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")


@pytest.fixture(scope="module")
def figures():
    out = {}
    for n in (40, 3000):
        g = population(n)
        r = analyse_scaling(g, bootstrap_n=20)
        sizes = analyse_sizes(pd.DataFrame({"length_m": g["length_m"], "max_throw_m": g["max_throw_m"],
                                            "censored": False}), gof_n=0, max_candidates=30)
        out[n] = {"dl": dl_figure(r), "sizes": size_figure(sizes.fits), "result": r}
    return out


@pytest.mark.parametrize("name", ["dl", "sizes"])
def test_bounded_and_artists_do_not_grow(figures, name):
    for n in (40, 3000):
        fig = figures[n][name]
        assert ((fig.get_size_inches() * fig.dpi) <= MAX_SIDE_PX).all()
    assert n_artists(figures[3000][name]) <= n_artists(figures[40][name]) + 14


def test_outlier_labels_bounded_apart_and_counted(figures):
    fig = figures[3000]["dl"]
    ax = fig.axes[0]
    r = figures[3000]["result"]
    n_out = int((r.faults["under_displaced"] | r.faults["over_displaced"]).sum())
    assert n_out > 12
    ids = set(r.population["unit_id"].astype(str))
    labels = [t for t in ax.texts if t.get_text() in ids]
    assert 1 <= len(labels) <= 12
    assert f"of {n_out:,} outliers labelled".replace(",", " ") in all_text(fig)
    fig.canvas.draw()
    boxes = [t.get_window_extent() for t in labels]
    frame = ax.get_window_extent()
    for i, a in enumerate(boxes):
        assert frame.x0 - 1 <= a.x0 and a.x1 <= frame.x1 + 1 and frame.y0 - 1 <= a.y0 and a.y1 <= frame.y1 + 1
        for b in boxes[i + 1:]:
            assert not a.overlaps(b)
    # one scatter call per kind of point, not one per fault
    assert len(ax.collections) <= 12


def test_size_points_thinned_and_said(figures):
    fig = figures[3000]["sizes"]
    ax = fig.axes[0]
    pts = [ln for ln in ax.lines if ln.get_marker() == "o"]
    assert len(pts) == 1 and len(pts[0].get_xdata()) <= 2000
    # the largest values are all kept
    x = np.sort(figures[3000]["result"].population["length_m"].to_numpy())
    assert np.isin(x[-50:], pts[0].get_xdata()).all()
    assert "drawn" in all_text(fig)
    assert "drawn" not in all_text(figures[40]["sizes"])
