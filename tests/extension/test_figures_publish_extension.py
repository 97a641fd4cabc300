"""The strain map is fit to publish: scale bar, grid-north arrow and CRS name (synthetic inputs built here)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely
from matplotlib.text import Text

from faultmap.extension.figures import extension_map_figure

CRS_NAME = "WGS 84 / UTM zone 37N"


def test_map_has_scale_bar_north_arrow_and_crs():
    x = np.linspace(1000, 9000, 5)
    faults = gpd.GeoDataFrame({"fault_id": np.arange(1, 6)},
                              geometry=shapely.linestrings(np.stack([np.c_[x, np.full(5, 0.0)],
                                                                     np.c_[x, np.full(5, 8000.0)]], axis=1)),
                              crs="EPSG:32637")
    gx, gy = np.meshgrid(np.arange(4) * 2500.0, np.arange(4) * 2500.0)
    cells = gpd.GeoDataFrame({"e1": np.linspace(0.001, 0.02, 16), "e1_azimuth_deg": 90.0},
                             geometry=shapely.box(gx.ravel(), gy.ravel(), gx.ravel() + 2500, gy.ravel() + 2500),
                             crs="EPSG:32637")
    fig = extension_map_figure(cells, faults, crs_name=CRS_NAME)
    ax = fig.axes[0]
    gids = {a.get_gid() for a in ax.findobj(lambda a: a.get_gid() is not None)}
    assert {"scale_bar", "north_arrow", "crs_note"} <= gids
    text = " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")
    assert CRS_NAME in text and "grid north" in text
    assert "km" in " ".join(t.get_text() for t in ax.findobj(lambda a: a.get_gid() == "scale_bar")[0].findobj(Text))
