"""The width map is fit to publish: scale bar, grid-north arrow and CRS name (synthetic inputs built here)."""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import shapely
from matplotlib.text import Text

from faultmap.rift import classify_rift, rift_axis, rift_sections
from faultmap.rift.figures import rift_map_figure

CRS_NAME = "WGS 84 / UTM zone 37N"


def test_map_has_scale_bar_north_arrow_and_crs():
    rng = np.random.default_rng(0)
    n = 25
    half = rng.uniform(1e3, 8e3, n)
    x = 500e3 + rng.uniform(-30e3, 30e3, n)
    y = 1e6 + rng.uniform(half, 150e3 - half)
    f = gpd.GeoDataFrame(
        {"fault_id": np.arange(1, n + 1), "max_throw_m": rng.uniform(10.0, 800.0, n), "dip_deg": 60.0,
         "dip_dir_deg": np.where(x > 500e3, 270.0, 90.0), "system_id": np.arange(1, n + 1)},
        geometry=shapely.linestrings(np.stack([np.c_[x, y - half], np.c_[x, y + half]], axis=1)), crs="EPSG:32637",
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # no heave given: estimated from throw, as the analysis warns
        axis = rift_axis(f)
        sec = rift_sections(f, axis.geometry.iloc[0], spacing_m=10e3)
        summ = classify_rift(sec, f)
    fig = rift_map_figure(f, axis, sec, summary=summ, crs_name=CRS_NAME)
    ax = fig.axes[0]
    gids = {a.get_gid() for a in ax.findobj(lambda a: a.get_gid() is not None)}
    assert {"scale_bar", "north_arrow", "crs_note"} <= gids
    text = " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")
    assert CRS_NAME in text and "grid north" in text
