"""Atomic GeoPackage output and conformance (faultmap.io.gpkg)."""

from __future__ import annotations

import hashlib
import sqlite3

import geopandas as gpd
import pandas as pd
import pyogrio
import pytest
import shapely
from pyproj import CRS

import faultmap.io.gpkg as gpkg
from faultmap.errors import OutputError
from faultmap.io.gpkg import GPKG_APPLICATION_ID, check_conformance, write_gpkg

UTM = CRS.from_epsg(32753)


def _layers(n=3):
    faults = gpd.GeoDataFrame(
        {"fault_id": range(1, n + 1), "ok": [True] * n, "Name": ["a"] * n},
        geometry=[shapely.LineString([(0, i), (100, i)]) for i in range(n)],
        crs=UTM,
    )
    pts = gpd.GeoDataFrame({"fault_id": [1]}, geometry=[shapely.Point(0, 0)], crs=UTM)
    info = pd.DataFrame({"key": ["a"], "value": ["1"]})
    return {"faults": faults, "throw_stations": pts, "run_info": info}


def _sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_conformance_read_only(tmp_path):
    # OGC GeoPackage 1.2-1.4 requirements checked with plain sqlite3 (pitfalls list).
    out = write_gpkg(tmp_path / "r.gpkg", _layers(), crs=UTM)
    assert check_conformance(out) == []
    con = sqlite3.connect(out)
    assert con.execute("PRAGMA application_id").fetchone()[0] == GPKG_APPLICATION_ID == 0x47504B47
    assert 10200 <= con.execute("PRAGMA user_version").fetchone()[0] <= 10499
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    con.close()
    assert not (tmp_path / "r.gpkg-wal").exists()
    assert pyogrio.read_dataframe(out, layer="faults").columns.tolist()[:3] == ["fault_id", "ok", "name"]


def test_checker_detects_a_broken_file(tmp_path):
    p = tmp_path / "x.gpkg"
    con = sqlite3.connect(p)
    con.execute("create table t(a)")
    con.commit()
    con.close()
    assert check_conformance(p)  # not a GeoPackage: problems reported


def test_failure_on_second_layer_keeps_earlier_result(tmp_path, monkeypatch):
    target = tmp_path / "result.gpkg"
    write_gpkg(target, _layers(2), crs=UTM)
    before = _sha(target)
    calls = {"n": 0}
    real = gpkg._write_one

    def flaky(path, name, df):
        calls["n"] += 1
        if calls["n"] == 2:
            raise RuntimeError("disk full (injected)")
        return real(path, name, df)

    monkeypatch.setattr(gpkg, "_write_one", flaky)
    with pytest.raises(OutputError, match="earlier result is unchanged"):
        write_gpkg(target, _layers(5), crs=UTM, overwrite=True)
    assert _sha(target) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result.gpkg"]


def test_refuses_to_overwrite_and_missing_folder(tmp_path):
    target = tmp_path / "r.gpkg"
    write_gpkg(target, _layers(), crs=UTM)
    with pytest.raises(OutputError, match="--overwrite"):
        write_gpkg(target, _layers(), crs=UTM)
    with pytest.raises(OutputError, match="does not exist"):
        write_gpkg(tmp_path / "nope" / "r.gpkg", _layers(), crs=UTM)
    with pytest.raises(OutputError, match=".gpkg"):
        write_gpkg(tmp_path / "r.shp", _layers(), crs=UTM)


def test_custom_crs_round_trip(tmp_path):
    custom = CRS.from_proj4("+proj=tmerc +lat_0=0 +lon_0=-3.3 +k=0.9996 +x_0=250000 +y_0=0 +ellps=GRS80 +units=m +no_defs")
    layers = _layers()
    layers["faults"] = layers["faults"].set_crs(custom, allow_override=True)
    layers["throw_stations"] = layers["throw_stations"].set_crs(custom, allow_override=True)
    out = write_gpkg(tmp_path / "c.gpkg", layers, crs=custom)
    for layer in ("faults", "throw_stations"):
        assert pyogrio.read_dataframe(out, layer=layer).crs.equals(custom)


def test_crs_change_on_writing_fails_loudly(tmp_path, monkeypatch):
    # Simulate a writer that silently swaps the CRS (the loose-EPSG pitfall).
    real = gpkg._write_one

    def swapping(path, name, df):
        if isinstance(df, gpd.GeoDataFrame):
            df = df.set_crs(4326, allow_override=True)
        return real(path, name, df)

    monkeypatch.setattr(gpkg, "_write_one", swapping)
    with pytest.raises(OutputError, match="CRS changed"):
        write_gpkg(tmp_path / "r.gpkg", _layers(), crs=UTM)
    assert list(tmp_path.iterdir()) == []


def test_field_names_sanitised():
    df = pd.DataFrame({"Max Throw (m)": [1], "select": [2], "max_throw_m": [3], "MAX_THROW_M": [4]})
    out = gpkg.sanitize_columns(df)
    assert list(out.columns) == ["max_throw__m", "select_", "max_throw_m", "max_throw_m_2"]


@pytest.mark.parametrize("ellps,registered", [("GRS80", 25833), ("WGS84", 32633)])
def test_custom_crs_matching_a_registered_one_round_trips_exactly(tmp_path, ellps, registered):
    # Failure reported: traces in a custom transverse Mercator whose parameters match a registered CRS
    # (UTM 33N on GRS80 or WGS84, but with an unnamed datum) failed at the very end with "CRS changed on
    # writing": the writer labels it with the registered code. The working CRS is now written exactly
    # (its WKT under a spatial-reference id of our own) and reads back equal (pyproj CRS.equals).
    custom = CRS.from_proj4(f"+proj=tmerc +lat_0=0 +lon_0=15 +k=0.9996 +x_0=500000 +y_0=0 +ellps={ellps} +units=m")
    assert not custom.equals(CRS.from_epsg(registered)) and custom.to_epsg() == registered  # the trap
    layers = _layers()
    for name in ("faults", "throw_stations"):
        layers[name] = layers[name].set_crs(custom, allow_override=True)
    out = write_gpkg(tmp_path / "c.gpkg", layers, crs=custom)
    for layer in ("faults", "throw_stations"):
        back = pyogrio.read_dataframe(out, layer=layer).crs
        assert back.equals(custom) and back.equals(CRS.from_wkt(custom.to_wkt()))
    assert check_conformance(out) == []
    with sqlite3.connect(out) as con:
        rows = con.execute("SELECT organization, srs_id FROM gpkg_spatial_ref_sys WHERE srs_id >= 100000").fetchall()
    assert rows == [("FAULTMAP", 100000)]
