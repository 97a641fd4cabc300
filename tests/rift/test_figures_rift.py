"""Rift figures stay bounded from a few to thousands of faults and many sections (synthetic inputs built here)."""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from matplotlib.text import Text

from faultmap.figure_kit import MAX_SIDE_PX
from faultmap.rift import classify_rift, rift_axis, rift_sections
from faultmap.rift.figures import rift_map_figure, subsidence_figure, swath_figure, width_along_axis_figure
from faultmap.rift.subsidence import subsidence_curve

CRS = "EPSG:32637"


def rift(n: int, seed: int = 0, length_m: float = 300e3, width_m: float = 60e3) -> gpd.GeoDataFrame:
    """``n`` N-S faults spread over a rift ``width_m`` wide and ``length_m`` long."""
    rng = np.random.default_rng(seed)
    half = rng.uniform(1e3, 8e3, n)
    x = 500e3 + rng.uniform(-width_m / 2, width_m / 2, n)
    y = 1e6 + rng.uniform(half, length_m - half)
    geoms = shapely.linestrings(np.stack([np.c_[x, y - half], np.c_[x, y + half]], axis=1))
    return gpd.GeoDataFrame(
        {"fault_id": np.arange(1, n + 1), "max_throw_m": rng.uniform(10.0, 800.0, n),
         "dip_deg": 60.0, "dip_dir_deg": np.where(x > 500e3, 270.0, 90.0), "system_id": np.arange(1, n + 1)},
        geometry=geoms, crs=CRS,
    )


def swaths(n_sections: int) -> pd.DataFrame:
    a = np.linspace(-30e3, 30e3, 61)
    z = 1000.0 - 600.0 * np.exp(-(a / 10e3) ** 2)
    return pd.DataFrame({
        "section_id": np.repeat(np.arange(1, n_sections + 1), a.size), "across_m": np.tile(a, n_sections),
        "z_min_m": np.tile(z - 50, n_sections), "z_mean_m": np.tile(z, n_sections),
        "z_max_m": np.tile(z + 50, n_sections), "n_valid": 10,
    })


def n_artists(fig) -> int:
    return sum(len(ax.lines) + len(ax.collections) + len(ax.patches) + len(ax.texts) for ax in fig.axes) + len(
        fig.texts
    )


def all_text(fig) -> str:
    return " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")


@pytest.fixture(scope="module")
def figures():
    out = {}
    for n in (25, 3000):
        f = rift(n)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # no heave given: estimated from throw, as the analysis warns
            ax = rift_axis(f)
            sec = rift_sections(f, ax.geometry.iloc[0], spacing_m=10e3)
            summ = classify_rift(sec, f)
        out[n] = {
            "map": rift_map_figure(f, ax, sec, summary=summ),
            "along": width_along_axis_figure(sec, summary=summ),
            "swath": swath_figure(swaths(400 if n > 100 else 8)),
            "subsidence": subsidence_figure(subsidence_curve(2.0)),
        }
    return out


@pytest.mark.parametrize("name", ["map", "along", "swath", "subsidence"])
def test_bounded_and_artists_do_not_grow(figures, name):
    for n in figures:
        fig = figures[n][name]
        assert ((fig.get_size_inches() * fig.dpi) <= MAX_SIDE_PX).all()
    assert n_artists(figures[3000][name]) <= n_artists(figures[25][name]) + 8


def test_map_in_metres_traces_in_one_collection(figures):
    ax = figures[3000]["map"].axes[0]
    assert ax.get_xlabel() == "Easting (m)" and ax.get_ylabel() == "Northing (m)"
    assert not ax.lines
    assert len(ax.collections[0].get_segments()) == 3000
    # metres: the limits cover the traces' coordinates, not kilometres
    assert ax.get_xlim()[1] > 400e3


def test_swath_says_sections_left_out(figures):
    assert "6 of 400 sections shown" in all_text(figures[3000]["swath"])
    assert "all 3 sections shown" in all_text(swath_figure(swaths(3)))
    assert len(swath_figure(swaths(40), max_panels=12).axes) == 12
