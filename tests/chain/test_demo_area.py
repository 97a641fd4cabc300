"""Tests of the fictional Drovessin Graben demo area (demo_area/).

The demo is written once at scale 0.3 (360 x 360 pixels, same faults) and
its files are checked against each other and against analytic geometry:
heave = throw / tan(dip); vertical separation of a planar surface equals the
throw when the surface has no slope across strike (Caskey 1995, derived);
extension e = sum(h) / (L1 - sum(h)) (definition, e.g. McKenzie 1978); D = gamma L with gamma
about 0.01-0.03 (Schlische et al. 1996: D ~ 0.03 L; Cowie & Scholz 1992:
gamma 1e-3 to 1e-1, from memory).
"""

from __future__ import annotations

import math

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import rasterio
import shapely
import tomllib
from pyproj import CRS
from scipy import ndimage

import demo_area
from demo_area.scenario import (
    NODATA,
    build_demo_scene,
    demo_faults,
    demo_grid,
    demo_transects,
    write_demo_area,
)
from faultmap.errors import ParameterError

SCALE = 0.3


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("drovessin")
    paths = write_demo_area(folder, scale=SCALE)
    return folder, paths


@pytest.fixture(scope="module")
def truth(demo):
    return pd.read_csv(demo[1]["truth"])


@pytest.fixture(scope="module")
def stations(demo):
    return pd.read_csv(demo[1]["truth_stations"])


@pytest.fixture(scope="module")
def user_faults(demo):
    return gpd.read_file(demo[1]["faults"], layer="traces")


def _merged(geom):
    return shapely.line_merge(geom) if geom.geom_type == "MultiLineString" else geom


def test_package_exports_and_fictional_name():
    assert demo_area.write_demo_area is write_demo_area
    assert demo_area.SCENARIO_NAME == "Drovessin Graben"
    assert demo_area.CRS_EPSG == 32753


def test_declared_grid_at_scale_one_and_bad_scale():
    g1 = demo_grid(1.0)
    assert g1["shape"][0] >= 1000 and g1["shape"][1] >= 1000
    assert 20.0 <= g1["pixel_size_m"] <= 25.0
    g3 = demo_grid(SCALE)
    # Same area at every scale, only the pixel count changes.
    assert g3["origin_xy"] == g1["origin_xy"]
    assert g3["shape"][0] * g3["pixel_size_m"] == pytest.approx(g1["shape"][0] * g1["pixel_size_m"])
    for bad in (0.0, -1.0, 3.0, float("nan")):
        with pytest.raises(ParameterError):
            demo_grid(bad)


def test_files_written_atomically(demo):
    folder, paths = demo
    assert set(paths) == {"faults", "dem", "transects", "truth", "truth_stations", "project",
                          "field_throws", "fault_database", "project_without_dem"}
    assert all(p.exists() and p.parent == folder for p in paths.values())
    # the six files and the marker that lets a later demo replace them (nothing else: no temporaries left)
    assert sorted(p.name for p in folder.iterdir()) == sorted([*(p.name for p in paths.values()), ".faultmap_demo"])


def test_dem_file(demo):
    with rasterio.open(demo[1]["dem"]) as src:
        assert CRS.from_user_input(src.crs.to_wkt()).equals(CRS.from_epsg(32753))
        assert src.dtypes[0] == "float32"
        assert src.nodata == NODATA
        assert src.block_shapes[0] == (256, 256)
        assert src.compression is not None and src.compression.value.lower() == "deflate"
        g = demo_grid(SCALE)
        assert src.shape == g["shape"]
        assert (src.transform.c, src.transform.f) == pytest.approx(g["origin_xy"])
        data = src.read(1)
    nodata = data == NODATA
    assert 0.002 < nodata.mean() < 0.05  # one patch of about 2 km2 in 900 km2
    assert np.isfinite(data).all()
    assert 0.0 < float(data[~nodata].min()) < float(data[~nodata].max()) < 1500.0


def test_fault_layer_looks_like_a_users(user_faults, truth):
    f = user_faults
    assert CRS.from_user_input(f.crs).equals(CRS.from_epsg(32753))
    assert len(f) >= 20 and len(f) == len(truth)
    assert {"name", "dip", "dip_dir", "active", "surface_age_ka"} <= set(f.columns)
    assert f["dip"].isna().sum() >= 2 and f["dip"].notna().sum() >= 10
    assert f["dip_dir"].isna().sum() >= 2
    active = f["active"].astype(bool)
    assert 3 <= active.sum() <= 5
    assert f.loc[active, "surface_age_ka"].between(10.0, 130.0).all()
    assert f.loc[~active, "surface_age_ka"].isna().all()
    nparts = shapely.get_num_geometries(np.asarray(f.geometry))
    assert (nparts >= 2).sum() >= 1
    assert list(f["name"]) == list(truth["name"])
    # Digitising direction: against the right-hand rule for some traces, with
    # it for others (dip direction 90 deg clockwise of the trace azimuth).
    rel = []
    for g, ddir in zip(f.geometry, truth["dip_dir_deg"], strict=False):
        xy = np.asarray(_merged(g).coords)
        az = math.degrees(math.atan2(*(xy[-1] - xy[0]))) % 360.0
        rel.append(round(((ddir - az) % 360.0) / 90.0))
    assert set(rel) == {1, 3}
    assert list(np.array(rel) == 3) == list(truth["digitised_reversed"])


def test_scenario_is_a_graben_with_scaled_faults(truth, user_faults):
    t = truth
    # Lengths from a few km to about 15 km; written traces match the truth.
    lengths = np.array([_merged(g).length for g in user_faults.geometry])
    np.testing.assert_allclose(lengths, t["length_m"], rtol=1e-9)
    assert t["length_m"].min() < 4000.0 and 12000.0 < t["length_m"].max() <= 16000.0
    # D = gamma L, gamma 0.01-0.03 (Schlische et al. 1996; Cowie & Scholz 1992).
    gamma = t["max_throw_m"] / t["length_m"]
    assert gamma.between(0.01, 0.03).all()
    n_fit, _ = np.polyfit(np.log10(t["length_m"]), np.log10(t["max_throw_m"]), 1)
    assert n_fit == pytest.approx(1.0, abs=0.25)
    assert t["dip_deg"].between(45.0, 70.0).all()
    # heave = T / tan(dip) (geometry)
    np.testing.assert_allclose(t["max_heave_m"], t["max_throw_m"] / np.tan(np.radians(t["dip_deg"])))
    # Two border faults dipping towards each other, at the two sides of the rift.
    b = t[t["border"]]
    assert len(b) == 2
    assert abs(((b["dip_dir_deg"].iloc[0] - b["dip_dir_deg"].iloc[1]) % 360.0) - 180.0) < 10.0
    assert b["length_m"].min() == pytest.approx(np.sort(t["length_m"])[-2])
    # Both dip directions among the intrabasinal faults.
    inner = t[~t["border"]]
    assert (np.cos(np.radians(inner["dip_dir_deg"] - 110.0)) > 0).sum() >= 5
    assert (np.cos(np.radians(inner["dip_dir_deg"] - 110.0)) < 0).sum() >= 5
    # At least one linked system of 2-3 en-echelon segments with close tips.
    sizes = t.groupby("system_id").size()
    linked = sizes[(sizes >= 2) & (sizes <= 3)].index
    assert len(linked) >= 1
    for sid in linked:
        geoms = [_merged(g) for g, s in zip(user_faults.geometry, t["system_id"], strict=False) if s == sid]
        for a, c in zip(geoms[:-1], geoms[1:], strict=False):
            tips = [shapely.Point(a.coords[0]), shapely.Point(a.coords[-1])]
            assert min(c.distance(p) for p in tips) < 1000.0
    # Unlinked faults are further apart than the relay step-overs.
    g = [_merged(x) for x in user_faults.geometry]
    for i in range(len(g)):
        for j in range(i + 1, len(g)):
            if t["system_id"].iloc[i] != t["system_id"].iloc[j]:
                assert g[i].distance(g[j]) > 700.0
    # Active faults: throw rate = max throw / age (m/ka = mm/yr).
    act = t[t["active"]]
    np.testing.assert_allclose(act["throw_rate_mm_yr"], act["max_throw_m"] / act["surface_age_ka"])


def test_stations_lie_on_the_written_traces(stations, truth, user_faults):
    for fid, grp in stations.groupby("fault_id"):
        row = truth[truth["fault_id"] == fid].iloc[0]
        line = _merged(user_faults.geometry.iloc[int(fid) - 1])
        pts = shapely.line_interpolate_point(line, grp["dist_m"].to_numpy())
        np.testing.assert_allclose(shapely.get_x(pts), grp["x"], atol=0.01)
        np.testing.assert_allclose(shapely.get_y(pts), grp["y"], atol=0.01)
        assert np.diff(np.sort(grp["dist_m"])).max() <= 100.0 + 1e-6
        assert grp["throw_m"].iloc[0] == 0.0 and grp["throw_m"].iloc[-1] == 0.0
        assert grp["throw_m"].max() <= row["max_throw_m"] + 1e-6
        assert grp["throw_m"].max() >= 0.9 * row["max_throw_m"]
        k = int(np.argmin(np.abs(grp["dist_m"] - row["max_throw_dist_m"])))
        assert grp["throw_m"].iloc[k] >= 0.9 * row["max_throw_m"]
        np.testing.assert_allclose(grp["dist_m"] + grp["dist_rhr_m"] if row["digitised_reversed"]
                                   else grp["dist_m"] - grp["dist_rhr_m"],
                                   row["length_m"] if row["digitised_reversed"] else 0.0, atol=1e-6)
        np.testing.assert_allclose(grp["heave_m"], grp["throw_m"] / math.tan(math.radians(row["dip_deg"])),
                                   atol=1e-9)


def test_dem_shows_the_true_throw(demo, truth, stations):
    # Fit lines to footwall and hanging-wall samples of profiles across each
    # trace (scarp-profile practice, McCalpin 1987, from memory) and compare
    # their separation at the trace with the true throw. The regional slope
    # runs along the rift axis, so across strike VS = T (Caskey 1995 with
    # theta ~ 0); relief and neighbouring faults add a few metres of noise.
    with rasterio.open(demo[1]["dem"]) as src:
        z = src.read(1).astype(float)
        tr = src.transform
    z[z == NODATA] = np.nan
    px = tr.a
    w = max(60.0, 2.0 * px)
    off = np.arange(-w - 500.0, w + 500.0 + 1.0, px / 2.0)
    fw, hw = off < -w, off > w
    inv = ~tr
    meas, true = [], []
    for r in truth.itertuples():
        s = stations[(stations["fault_id"] == r.fault_id)
                     & stations["dist_rhr_m"].between(0.2 * r.length_m, 0.8 * r.length_m)]
        u = np.array([math.sin(math.radians(r.dip_dir_deg)), math.cos(math.radians(r.dip_dir_deg))])
        X = s["x"].to_numpy()[:, None] + off[None, :] * u[0]
        Y = s["y"].to_numpy()[:, None] + off[None, :] * u[1]
        col, row = inv @ (X, Y)
        zz = ndimage.map_coordinates(z, [row - 0.5, col - 0.5], order=1, cval=np.nan)
        ok = np.isfinite(zz).all(axis=1)
        assert ok.sum() >= 5
        vs = np.array([np.polyval(np.polyfit(off[fw], p[fw], 1), 0.0)
                       - np.polyval(np.polyfit(off[hw], p[hw], 1), 0.0) for p in zz[ok]])
        err = vs - s["throw_m"].to_numpy()[ok]
        assert abs(float(np.median(err))) <= 5.0 + 0.05 * r.max_throw_m, r.name
        meas.append(vs)
        true.append(s["throw_m"].to_numpy()[ok])
    meas, true = np.concatenate(meas), np.concatenate(true)
    slope = float(np.sum(meas * true) / np.sum(true * true))
    assert slope == pytest.approx(1.0, abs=0.03)
    assert np.corrcoef(meas, true)[0, 1] > 0.98


def test_transect_truth_recomputed_from_stations(demo, truth, stations, user_faults):
    transects = gpd.read_file(demo[1]["transects"], layer="transects")
    assert CRS.from_user_input(transects.crs).equals(CRS.from_epsg(32753))
    assert len(transects) >= 2
    lines = [_merged(g) for g in user_faults.geometry]
    for t in transects.itertuples():
        tid = int(t.transect_id)
        txy = np.asarray(t.geometry.coords)
        taz = math.degrees(math.atan2(*(txy[-1] - txy[0]))) % 360.0
        total, total_along, n, pos = 0.0, 0.0, 0, []
        for k, line in enumerate(lines):
            hit = line.intersection(t.geometry)
            if hit.is_empty:
                continue
            n += 1
            d = line.project(hit)
            st = stations[stations["fault_id"] == k + 1].sort_values("dist_m")
            throw = np.interp(d, st["dist_m"], st["throw_m"])
            row = truth.iloc[k]
            h = throw / math.tan(math.radians(row["dip_deg"]))  # heave = T / tan(dip)
            total += h
            total_along += h * abs(math.cos(math.radians(row["dip_dir_deg"] - taz)))
            pos.append(t.geometry.project(hit))
        first = truth.iloc[0]
        assert n >= 5
        assert first[f"transect_{tid}_n_crossings"] == n
        # Linear interpolation between 100 m stations: within 1 %.
        assert first[f"transect_{tid}_sum_heave_m"] == pytest.approx(total, rel=0.01)
        sh = first[f"transect_{tid}_sum_heave_along_m"]
        assert sh == pytest.approx(total_along, rel=0.01)
        L1 = t.geometry.length
        # e = (L1 - L0) / L0 with L0 = L1 - sum(h) (definition; check L1 100 km, sum(h) 5 km -> e 0.05263)
        assert first[f"transect_{tid}_extension"] == pytest.approx(sh / (L1 - sh), rel=1e-6)
        assert first[f"transect_{tid}_beta"] == pytest.approx(L1 / (L1 - sh), rel=1e-6)
        assert first[f"transect_{tid}_width_km"] == pytest.approx((max(pos) - min(pos)) / 1000.0, rel=1e-6)
        # Both border faults cross every transect.
        for k in np.flatnonzero(truth["border"]):
            assert lines[k].intersects(t.geometry)
    assert 12.0 < truth["rift_width_km"].iloc[0] < 20.0


def test_project_file_points_at_the_files(demo):
    folder, paths = demo
    cfg = tomllib.loads(paths["project"].read_text(encoding="utf-8"))
    inp = cfg["inputs"]
    assert (folder / inp["faults"]).resolve() == paths["faults"].resolve()
    assert (folder / inp["dem"]).resolve() == paths["dem"].resolve()
    assert (folder / inp["transects"]).resolve() == paths["transects"].resolve()
    assert inp["faults_layer"] in [n for n, _ in pyogrio.list_layers(paths["faults"])]
    assert inp["transects_layer"] in [n for n, _ in pyogrio.list_layers(paths["transects"])]
    assert cfg["output"] == {"gpkg": "results/demo_results.gpkg", "figures": "results/figures/"}


def test_deterministic_and_scale_keeps_the_scenario(tmp_path, demo):
    a = write_demo_area(tmp_path / "a", scale=0.15)
    b = write_demo_area(tmp_path / "b", scale=0.15)
    with rasterio.open(a["dem"]) as s1, rasterio.open(b["dem"]) as s2:
        np.testing.assert_array_equal(s1.read(1), s2.read(1))
    assert a["truth"].read_bytes() == b["truth"].read_bytes()
    assert a["truth_stations"].read_bytes() == b["truth_stations"].read_bytes()
    # The truth does not depend on the pixel count.
    assert a["truth"].read_bytes() == demo[1]["truth"].read_bytes()
    # Rewriting into the same folder replaces the files (nine and the demo marker).
    write_demo_area(tmp_path / "a", scale=0.15)
    assert len(list((tmp_path / "a").iterdir())) == 10


def test_scene_in_memory_matches_scenario():
    dem, tr, truth = build_demo_scene(0.12)
    f = demo_faults()
    assert dem.dtype == np.float32 and np.isnan(dem).any()
    assert list(truth.faults["name"]) == list(f["name"])
    np.testing.assert_allclose(truth.faults["max_throw_m"], f["max_throw_m"])
    assert len(demo_transects()) >= 2


def test_demo_never_overwrites_a_users_files(tmp_path):
    # Failure reported by a user: `faultmap demo DIR` into a folder holding their own faults.gpkg and
    # project.toml overwrote them. Now refused before anything is written; the files stay byte-identical.
    from click.testing import CliRunner

    from faultmap.cli import build_cli

    mine = {"faults.gpkg": b"my own traces", "project.toml": b"[inputs]\nfaults = 'x.gpkg'\n"}
    for name, data in mine.items():
        (tmp_path / name).write_bytes(data)
    res = CliRunner().invoke(build_cli(), ["demo", str(tmp_path), "--scale", "0.2"])
    assert res.exit_code == 2
    assert "choose a new or empty folder" in res.output and "faults.gpkg" in res.output
    assert len(res.output.strip().splitlines()) == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(mine)
    for name, data in mine.items():
        assert (tmp_path / name).read_bytes() == data


def test_demo_folder_is_marked_and_may_be_written_again(demo):
    from demo_area.scenario import DEMO_MARKER, _check_demo_folder

    folder, _paths = demo
    assert (folder / DEMO_MARKER).is_file()
    _check_demo_folder(folder)  # an earlier demo's folder is accepted (its files are replaced)
