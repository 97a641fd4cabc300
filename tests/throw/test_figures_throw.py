"""Throw figures stay bounded and readable from a few to thousands of faults (synthetic inputs, no DEM)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from matplotlib.text import Text

from faultmap.figure_kit import MAX_SIDE_PX
from faultmap.throw.figures import system_profiles, throw_map, throw_profiles

CRS = "EPSG:32637"
N_ST = 8  # stations per fault


def population(n: int, seed: int = 0, big_system: int = 0):
    """``n`` straight faults with throws, stations along each, systems of 2-3 segments (and one of ``big_system``)."""
    rng = np.random.default_rng(seed)
    side = 4000.0 * np.sqrt(n)
    x0, y0 = rng.uniform(0, side, n), rng.uniform(0, side, n)
    length = rng.uniform(500.0, 6000.0, n)
    az = np.radians(rng.uniform(-20, 20, n))
    dx, dy = 0.5 * length * np.sin(az), 0.5 * length * np.cos(az)
    geoms = shapely.linestrings(np.stack([np.c_[x0 - dx, y0 - dy], np.c_[x0 + dx, y0 + dy]], axis=1))
    thr = np.exp(rng.normal(2.0, 0.8, n))
    system = np.arange(n) // 3
    system[:big_system] = -1
    faults = gpd.GeoDataFrame(
        {
            "fault_id": np.arange(1, n + 1),
            "max_throw_m": thr,
            "max_throw_err_m": 0.1 * thr,
            "dip_dir_deg": np.degrees(az) + 90.0,
            "dip_dir_source": np.where(np.arange(n) % 2, "dem", "given"),
            "system_id": system,
        },
        geometry=geoms,
        crs=CRS,
    )
    frac = np.tile(np.linspace(0.05, 0.95, N_ST), n)
    fid = np.repeat(faults["fault_id"].to_numpy(), N_ST)
    t = np.repeat(thr, N_ST) * np.sin(np.pi * frac)
    pts = shapely.line_interpolate_point(np.repeat(geoms, N_ST), frac, normalized=True)
    xy = shapely.get_coordinates(pts)
    status = np.where(rng.uniform(size=fid.size) < 0.1, "nodata", "ok")
    stations = pd.DataFrame(
        {
            "fault_id": fid,
            "dist_m": frac * np.repeat(length, N_ST),
            "status": status,
            "throw_m": t,
            "throw_err_m": 0.1 * t + 0.2,
            "throw_smooth_m": t,
            "throw_smooth_err_m": 0.05 * t + 0.1,
            "outlier": False,
            "x": xy[:, 0],
            "y": xy[:, 1],
        }
    )
    zones = pd.DataFrame({"system_id": system[::3], "along_m": 0.0, "throw_min_m": 1.0})
    return faults, stations, zones


def n_artists(fig) -> int:
    return sum(len(ax.lines) + len(ax.collections) + len(ax.patches) + len(ax.texts) + len(ax.images)
               for ax in fig.axes) + len(fig.texts)


def all_text(fig) -> str:
    return " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")


def pixels(fig) -> np.ndarray:
    return fig.get_size_inches() * fig.dpi


def _figures(n: int, **kw):
    faults, stations, zones = population(n, big_system=kw.pop("big_system", 0))
    return {
        "map": throw_map(faults),
        "profiles": throw_profiles(faults, stations, n_largest=kw.get("n_largest", 6)),
        "systems": system_profiles(faults, stations, zones, max_systems=kw.get("max_systems", 6)),
    }


@pytest.fixture(scope="module")
def small_and_large():
    return _figures(30), _figures(4000, big_system=600)


@pytest.mark.parametrize("name", ["map", "profiles", "systems"])
def test_bounded_and_artists_do_not_grow(small_and_large, name):
    small, large = small_and_large
    for fig in (small[name], large[name]):
        assert (pixels(fig) <= MAX_SIDE_PX).all()
    # the number of artists does not grow with the number of faults
    assert n_artists(large[name]) <= n_artists(small[name]) + 12


def test_left_out_is_said(small_and_large):
    _, large = small_and_large
    assert "6 of 4 000 faults shown" in all_text(large["profiles"])
    ids, counts = np.unique(np.r_[np.full(600, -1), np.arange(600, 4000) // 3], return_counts=True)
    n_sys = int((counts > 1).sum())
    assert f"6 of {n_sys:,} linked systems shown".replace(",", " ") in all_text(large["systems"])
    assert "down-thrown ticks" in all_text(large["map"])
    # all of few: said too
    small, _ = small_and_large
    assert "all 30 faults shown" not in all_text(small["profiles"])  # 6 of 30 shown
    assert "6 of 30 faults shown" in all_text(small["profiles"])


def test_big_system_is_one_collection(small_and_large):
    _, large = small_and_large
    fig = large["systems"]
    big = [ax for ax in fig.axes if "600 segments" in ax.get_title()]
    assert big, "the 600-segment system is among the largest"
    ax = big[0]
    # segments: one band collection, one line collection; legend bounded
    assert len(ax.collections) <= 3
    assert len(ax.get_legend().get_texts()) <= 4
    assert any("600 segments (one colour each)" in t.get_text() for t in ax.get_legend().get_texts())


def test_map_traces_in_one_collection_and_labels_apart(small_and_large):
    _, large = small_and_large
    fig = large["map"]
    ax = fig.axes[0]
    assert not ax.lines  # no plot call per fault
    n_segs = sum(len(c.get_segments()) for c in ax.collections if hasattr(c, "get_segments"))
    assert n_segs >= 4000
    assert ax.get_xlabel() == "easting (m)"
    fig.canvas.draw()
    boxes = [t.get_bbox_patch().get_window_extent() for t in ax.texts if t.get_bbox_patch() is not None]
    assert 1 <= len(boxes) <= 8
    frame = ax.get_window_extent()
    for i, a in enumerate(boxes):
        assert frame.x0 - 1 <= a.x0 and a.x1 <= frame.x1 + 1 and frame.y0 - 1 <= a.y0 and a.y1 <= frame.y1 + 1
        for b in boxes[i + 1:]:
            assert not a.overlaps(b)


def test_many_panels_stay_bounded():
    faults, stations, zones = population(300)
    for fig in (throw_profiles(faults, stations, n_largest=24),
                system_profiles(faults, stations, zones, max_systems=24)):
        assert (pixels(fig) <= MAX_SIDE_PX).all()
        assert len([ax for ax in fig.axes if ax.get_visible()]) == 24


def test_saved_image_bounded(tmp_path):
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from PIL import Image

    from faultmap.figure_kit import save_bounded

    fig = Figure(figsize=(6, 4))
    ax = fig.add_subplot(1, 1, 1)
    # an overlong legend hanging far outside the figure cannot stretch the saved image
    ax.legend(handles=[Line2D([], [], label=f"fault {i}") for i in range(300)], loc="upper left",
              bbox_to_anchor=(0, 0))
    save_bounded(fig, tmp_path / "p.png", dpi=400)
    with Image.open(tmp_path / "p.png") as im:
        assert max(im.size) <= MAX_SIDE_PX
