"""Hazard figures stay bounded and readable from a few to thousands of faults (synthetic inputs built here)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from matplotlib.text import Text

from faultmap.figure_kit import MAX_SIDE_PX
from faultmap.hazard.figures import hazard_map, magnitude_by_relation

CRS = "EPSG:32637"


def population(n: int, seed: int = 0):
    """``n`` straight faults, two in three screened, with magnitudes, zones (buffers) and scenarios."""
    rng = np.random.default_rng(seed)
    side = 3000.0 * np.sqrt(n)
    x0, y0 = rng.uniform(0, side, n), rng.uniform(0, side, n)
    length = rng.uniform(1000.0, 15000.0, n)
    az = np.radians(rng.uniform(-25, 25, n))
    dx, dy = 0.5 * length * np.sin(az), 0.5 * length * np.cos(az)
    geoms = shapely.linestrings(np.stack([np.c_[x0 - dx, y0 - dy], np.c_[x0 + dx, y0 + dy]], axis=1))
    screened = np.arange(n) % 3 != 2
    mag = np.where(screened, 5.0 + 1.1 * np.log10(length / 1000.0), np.nan)
    faults = gpd.GeoDataFrame(
        {"fault_id": np.arange(1, n + 1), "hazard_screened": screened, "mag_preferred": mag},
        geometry=geoms, crs=CRS,
    )
    zones = gpd.GeoDataFrame({"fault_id": faults["fault_id"][screened].to_numpy()},
                             geometry=shapely.buffer(geoms[screened], 200.0), crs=CRS)
    k = int(screened.sum())
    sc = {"kind": "segment", "fault_ids": faults["fault_id"][screened].astype(str).to_numpy(),
          "n_faults": 1, "length_km": length[screened] / 1000.0, "mag_preferred": mag[screened]}
    for key in ("srl_wc94", "srl_all_wc94", "ra_wc94"):
        sc[f"mag_{key}"] = mag[screened] + rng.normal(0, 0.1, k)
        sc[f"mag_{key}_sigma"] = 0.3
    return faults, zones, pd.DataFrame(sc)


def n_artists(fig) -> int:
    return sum(len(ax.lines) + len(ax.collections) + len(ax.patches) + len(ax.texts) + len(ax.containers)
               for ax in fig.axes) + len(fig.texts)


def all_text(fig) -> str:
    return " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")


@pytest.fixture(scope="module")
def figures():
    out = {}
    for n in (30, 4500):
        f, z, sc = population(n)
        out[n] = {"map": hazard_map(f, z), "mags": magnitude_by_relation(sc)}
    return out


@pytest.mark.parametrize("name", ["map", "mags"])
def test_bounded_and_artists_do_not_grow(figures, name):
    for n in figures:
        px = figures[n][name].get_size_inches() * figures[n][name].dpi
        assert (px <= MAX_SIDE_PX).all()
    assert n_artists(figures[4500][name]) <= n_artists(figures[30][name]) + 16


def test_left_out_is_said(figures):
    assert "labelled: " in all_text(figures[4500]["map"])
    assert "of 3 000 screened faults" in all_text(figures[4500]["map"])
    assert "25 of 3 000 rupture scenarios shown" in all_text(figures[4500]["mags"])
    assert "all 20 rupture scenarios shown" in all_text(figures[30]["mags"])


@pytest.mark.parametrize("n", [30, 4500])
def test_map_labels_do_not_overlap_and_stay_inside(figures, n):
    fig = figures[n]["map"]
    ax = fig.axes[0]
    fig.canvas.draw()
    labels = [t for t in ax.texts if t.get_text().startswith("F")]
    assert 1 <= len(labels) <= 15
    boxes = [t.get_bbox_patch().get_window_extent() for t in labels]
    frame = ax.get_window_extent()
    legend = ax.get_legend().get_window_extent()
    for i, a in enumerate(boxes):
        assert frame.x0 - 1 <= a.x0 and a.x1 <= frame.x1 + 1 and frame.y0 - 1 <= a.y0 and a.y1 <= frame.y1 + 1
        assert not a.overlaps(legend)
        for b in boxes[i + 1:]:
            assert not a.overlaps(b)
    # the largest magnitude is labelled first
    f, _, _ = population(n)
    top = f.loc[f["mag_preferred"].idxmax(), "fault_id"]
    assert labels[0].get_text().startswith(f"F{top} ")


def test_map_draws_traces_and_zones_as_few_collections(figures):
    ax = figures[4500]["map"].axes[0]
    assert not ax.lines
    assert len(ax.collections) <= 3 and not ax.patches
    assert sum(len(c.get_segments()) for c in ax.collections if hasattr(c, "get_segments")) == 4500


def test_no_labels_asked():
    f, z, _ = population(40)
    fig = hazard_map(f, z, n_labels=0)
    assert not [t for t in fig.axes[0].texts if t.get_text().startswith("F")]
