"""The hazard map is fit to publish: furniture, and a zoom where the rupture-zone widths show (synthetic inputs)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import shapely
from matplotlib.text import Text

from faultmap.hazard.figures import hazard_map

CRS_NAME = "WGS 84 / UTM zone 37N"


def scene(n: int = 12):
    rng = np.random.default_rng(2)
    x0, y0 = rng.uniform(0, 60e3, n), rng.uniform(0, 60e3, n)
    length = rng.uniform(5e3, 25e3, n)
    geoms = shapely.linestrings(np.stack([np.c_[x0, y0], np.c_[x0 + 0.3 * length, y0 + length]], axis=1))
    screened = np.arange(n) % 2 == 0
    mag = np.where(screened, 5.0 + 1.1 * np.log10(length / 1000.0), np.nan)
    faults = gpd.GeoDataFrame({"fault_id": np.arange(1, n + 1), "hazard_screened": screened, "mag_preferred": mag},
                              geometry=geoms, crs="EPSG:32637")
    # 150 m on the hanging wall, 75 m on the footwall: about 225 m wide
    zones = gpd.GeoDataFrame({"fault_id": faults["fault_id"][screened].to_numpy()},
                             geometry=shapely.buffer(geoms[screened], 112.5), crs="EPSG:32637")
    return faults, zones, int(faults.loc[np.nanargmax(mag), "fault_id"])


def test_map_and_zoom_have_furniture_and_the_zoom_shows_zone_widths():
    faults, zones, top = scene()
    fig = hazard_map(faults, zones, crs_name=CRS_NAME)
    main, zoom = fig.axes[0], fig.axes[1]
    for ax in (main, zoom):
        gids = {a.get_gid() for a in ax.findobj(lambda a: a.get_gid() is not None)}
        assert {"scale_bar", "north_arrow", "crs_note"} <= gids
    text = " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")
    assert CRS_NAME in text and "grid north" in text
    x0, x1 = zoom.get_xlim()
    assert 0 < x1 - x0 < 4000.0  # a few km: the 225 m zone is a visible band
    assert (main.get_xlim()[1] - main.get_xlim()[0]) > 10 * (x1 - x0)
    assert f"F{top}" in zoom.get_title()
    assert "zoomed" in text and f"F{top}" in text  # the caption says so
    # the zoom window is centred on the largest fault's trace
    mid = shapely.line_interpolate_point(faults.geometry[faults["fault_id"] == top].iloc[0], 0.5, normalized=True)
    assert abs(0.5 * (x0 + x1) - mid.x) < 1.0


def test_no_zoom_when_asked():
    faults, zones, _ = scene()
    assert len(hazard_map(faults, zones, zoom=False).axes) == 1
