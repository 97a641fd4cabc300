"""Extension figures stay bounded from a few to thousands of faults, cells and transects (synthetic inputs)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

from faultmap.extension.figures import extension_map_figure, transect_extension_figure
from faultmap.figure_kit import MAX_SIDE_PX

CRS = "EPSG:32637"


def scene(n: int, seed: int = 0):
    """``n`` straight faults, a grid of strain cells over them, and ``n // 10`` transects."""
    rng = np.random.default_rng(seed)
    side = 3000.0 * np.sqrt(n)
    x0, y0 = rng.uniform(0, side, n), rng.uniform(0, side, n)
    half = rng.uniform(250.0, 3000.0, n)
    geoms = shapely.linestrings(np.stack([np.c_[x0, y0 - half], np.c_[x0, y0 + half]], axis=1))
    faults = gpd.GeoDataFrame({"fault_id": np.arange(1, n + 1)}, geometry=geoms, crs=CRS)
    k = max(2, int(np.sqrt(n) / 2))
    step = side / k
    gx, gy = np.meshgrid(np.arange(k) * step, np.arange(k) * step)
    cells = gpd.GeoDataFrame(
        {"e1": rng.uniform(0, 0.02, k * k), "e1_azimuth_deg": rng.uniform(80, 100, k * k)},
        geometry=shapely.box(gx.ravel(), gy.ravel(), gx.ravel() + step, gy.ravel() + step),
        crs=CRS,
    )
    m = max(3, n // 10)
    ys = np.linspace(0, side, m)
    transects = gpd.GeoDataFrame(
        {"transect_id": np.arange(1, m + 1)},
        geometry=shapely.linestrings(np.stack([np.c_[np.zeros(m), ys], np.c_[np.full(m, side), ys]], axis=1)),
        crs=CRS,
    )
    e = rng.uniform(0.01, 0.05, m)
    table = pd.DataFrame({
        "transect_id": np.arange(1, m + 1), "position_m": ys, "extension": e, "extension_p16": 0.8 * e,
        "extension_p84": 1.2 * e, "ends_inside": np.arange(m) % 4 == 0, "extension_corrected": 1.5 * e,
    })
    return faults, cells, transects, table


def n_artists(fig) -> int:
    return sum(len(ax.lines) + len(ax.collections) + len(ax.patches) + len(ax.texts) + len(ax.images)
               for ax in fig.axes) + len(fig.texts)


@pytest.fixture(scope="module")
def figures():
    out = {}
    for n in (30, 4000):
        f, c, tr, t = scene(n)
        hs = np.random.default_rng(1).uniform(size=(200, 200))
        b = f.total_bounds
        out[n] = {
            "map": extension_map_figure(c, f, hillshade=hs, hillshade_extent=(b[0], b[2], b[1], b[3]), transects=tr),
            "transects": transect_extension_figure(t),
        }
    return out


@pytest.mark.parametrize("name", ["map", "transects"])
def test_bounded_and_artists_do_not_grow(figures, name):
    for n in figures:
        fig = figures[n][name]
        assert ((fig.get_size_inches() * fig.dpi) <= MAX_SIDE_PX).all()
    assert n_artists(figures[4000][name]) <= n_artists(figures[30][name])


def test_map_in_metres_with_colour_bar_and_one_collection_per_kind(figures):
    fig = figures[4000]["map"]
    ax = fig.axes[0]
    assert ax.get_xlabel() == "Easting (m)" and ax.get_ylabel() == "Northing (m)"
    assert len(fig.axes) == 2 and "e1" in fig.axes[1].get_ylabel()  # the colour bar
    assert not ax.lines and len(ax.collections) == 3  # faults, transects, e1 bars
    assert len(ax.collections[0].get_segments()) == 4000
