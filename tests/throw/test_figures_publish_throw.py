"""Throw figures fit to publish: map furniture, a contrasted relief with voids named, legends clear of the data,
names in any script drawn without glyph warnings (synthetic inputs built here)."""

from __future__ import annotations

import io
import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from affine import Affine
from matplotlib.text import Text

from faultmap.figure_kit import save_bounded
from faultmap.throw.figures import system_profiles, throw_map

CRS_NAME = "WGS 84 / UTM zone 37N"


def faults(names=None) -> gpd.GeoDataFrame:
    x = np.array([2000.0, 5000.0, 8000.0])
    geoms = shapely.linestrings(np.stack([np.c_[x, np.full(3, 1000.0)], np.c_[x + 500, np.full(3, 9000.0)]], axis=1))
    return gpd.GeoDataFrame(
        {"fault_id": [1, 2, 3], "max_throw_m": [40.0, 80.0, np.nan], "dip_dir_deg": 90.0,
         "name": names or ["a", "b", "c"]},
        geometry=geoms, crs="EPSG:32637",
    )


def dem():
    yy, xx = np.mgrid[0:100, 0:100]
    z = 300.0 + 40.0 * (xx > 50) + np.sin(yy / 7.0)
    z[10:20, 10:20] = np.nan
    return z, Affine(100.0, 0, 0, 0, -100.0, 10000.0)


def gids(ax) -> set:
    return {a.get_gid() for a in ax.findobj(lambda a: a.get_gid() is not None)}


def all_text(fig) -> str:
    return " ".join(t.get_text() for t in fig.findobj(Text)).replace("\n", " ")


@pytest.fixture(scope="module")
def tmap():
    z, t = dem()
    return throw_map(faults(), elevation=z, transform=t, crs_name=CRS_NAME)


def test_map_has_scale_bar_north_arrow_and_crs(tmap):
    ax = tmap.axes[0]
    assert {"scale_bar", "north_arrow", "crs_note"} <= gids(ax)
    assert CRS_NAME in all_text(tmap) and "grid north" in all_text(tmap)
    # a round length in m or km
    bar = ax.findobj(lambda a: a.get_gid() == "scale_bar")[0]
    label = [t.get_text() for t in bar.findobj(Text)][0]
    value, unit = label.split()
    assert unit in ("m", "km") and float(value) / 10 ** np.floor(np.log10(float(value))) in (1.0, 2.0, 5.0)


def test_relief_contrasted_voids_named_and_legend_matches(tmap):
    ax = tmap.axes[0]
    im = ax.images[0]
    lo, hi = im.get_clim()
    assert hi - lo < 1.0  # stretched to the relief's own range, not the whole 0-1
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "DEM void" in labels
    assert not any("colour" in s for s in labels)  # the colour of the traces is read from the colour bar
    assert "colour of each fault trace" in all_text(tmap)


def test_names_without_glyph_draw_without_warning():
    z, t = dem()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fig = throw_map(faults(["\u65ad\u5c42", "\u0635\u062f\u0639", "fault"]), elevation=z, transform=t,
                        crs_name=CRS_NAME)
        save_bounded(fig, io.BytesIO(), dpi=60)
    assert not [w for w in caught if "missing from font" in str(w.message)]


def test_system_legend_covers_no_peak():
    n_st = 30
    geoms = shapely.linestrings([[(0, 0), (0, 3000)], [(50, 2800), (50, 6000)]])
    f = gpd.GeoDataFrame({"fault_id": [1, 2], "max_throw_m": [100.0, 120.0], "system_id": [1, 1]},
                         geometry=geoms, crs="EPSG:32637")
    rows = []
    for fid, g, peak in ((1, geoms[0], 100.0), (2, geoms[1], 120.0)):
        frac = np.linspace(0.02, 0.98, n_st)
        t = peak * np.sin(np.pi * frac)
        xy = shapely.get_coordinates(shapely.line_interpolate_point(np.repeat(g, n_st), frac, normalized=True))
        rows.append(pd.DataFrame({"fault_id": fid, "dist_m": frac * g.length, "status": "ok", "throw_m": t,
                                  "throw_err_m": 2.0, "throw_smooth_m": t, "throw_smooth_err_m": 2.0,
                                  "outlier": False, "x": xy[:, 0], "y": xy[:, 1]}))
    fig = system_profiles(f, pd.concat(rows, ignore_index=True))
    ax = fig.axes[0]
    fig.canvas.draw()
    box = ax.get_legend().get_window_extent()
    for ln in ax.lines:
        pts = ax.transData.transform(np.c_[ln.get_xdata(), ln.get_ydata()])
        inside = (pts[:, 0] > box.x0) & (pts[:, 0] < box.x1) & (pts[:, 1] > box.y0) & (pts[:, 1] < box.y1)
        assert not inside.any()
