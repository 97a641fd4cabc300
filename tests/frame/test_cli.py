"""Command line: bad inputs give one clear line, exit 2 and no output."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely

from tests.conftest import CRS, X0, Y0, tilted_dem, write_dem


def _assert_user_error(res, out, *words):
    assert res.exit_code == 2, res.output + res.stderr
    lines = [ln for ln in res.stderr.splitlines() if ln.startswith("error:")]
    assert len(lines) == 1, res.stderr
    for w in words:
        assert w.lower() in lines[0].lower(), lines[0]
    assert "Traceback" not in res.stderr
    assert not out.exists()
    assert not [p for p in out.parent.iterdir() if ".tmp" in p.name]


def _run(cli, scene, *extra, faults=None, dem=None, out=None):
    out = out or scene["dir"] / "out.gpkg"
    args = ["prepare", "--faults", faults or scene["faults"], "--out", out]
    if dem is not False:
        args += ["--dem", dem or scene["dem"]]
    return cli([*args, *extra]), out


def test_prepare_runs(cli, scene):
    res, out = _run(cli, scene)
    assert res.exit_code == 0, res.stderr
    f = pyogrio.read_dataframe(out, layer="faults")
    assert len(f) == 4 and set(f["dip_source"]) == {"default", "attribute"}
    info = pyogrio.read_dataframe(out, layer="run_info")
    keys = set(info["key"])
    assert {"faultmap_version", "working_crs_wkt", "param.prepare.dip_deg", "input.dem.checksum"} <= keys
    assert any(k.startswith("warning.") for k in keys)


def test_missing_file(cli, scene):
    res, out = _run(cli, scene, faults=scene["dir"] / "nope.gpkg")
    _assert_user_error(res, out, "nope.gpkg", "not found")


def test_corrupt_and_non_spatial_files(cli, scene):
    bad = scene["dir"] / "bad.gpkg"
    bad.write_bytes(b"this is not a geopackage")
    res, out = _run(cli, scene, faults=bad)
    _assert_user_error(res, out, "bad.gpkg")
    csv = scene["dir"] / "table.csv"
    csv.write_text("a,b\n1,2\n")
    res, out = _run(cli, scene, faults=csv)
    _assert_user_error(res, out, "table.csv", "geometry")


def test_layer_not_found(cli, scene):
    res, out = _run(cli, scene, "--faults-layer", "wrong")
    _assert_user_error(res, out, "layer 'wrong' not found", "traces")


def test_no_crs(cli, scene):
    g = scene["gdf"].set_crs(None, allow_override=True)
    p = scene["dir"] / "nocrs.geojson"
    g.to_file(p, driver="GeoJSON")
    # GeoJSON implies WGS84; use a shapefile without .prj instead
    p = scene["dir"] / "nocrs.shp"
    g.to_file(p)
    (scene["dir"] / "nocrs.prj").unlink(missing_ok=True)
    res, out = _run(cli, scene, faults=p)
    _assert_user_error(res, out, "no crs", "--crs")
    res2, out2 = _run(cli, scene, "--crs", CRS, faults=p)
    assert res2.exit_code == 0, res2.stderr


@pytest.mark.parametrize("geom", [shapely.Point(X0 + 10, Y0 - 10), shapely.box(X0, Y0 - 100, X0 + 100, Y0)])
def test_point_or_polygon_layer(cli, scene, geom):
    p = scene["dir"] / "wrong.gpkg"
    gpd.GeoDataFrame({"a": [1]}, geometry=[geom], crs=CRS).to_file(p)
    res, out = _run(cli, scene, faults=p)
    _assert_user_error(res, out, "not lines", "feature")


def test_empty_layer(cli, scene):
    p = scene["dir"] / "empty.gpkg"
    gpd.GeoDataFrame({"a": []}, geometry=gpd.GeoSeries([], crs=CRS)).to_file(p, layer="traces")
    res, out = _run(cli, scene, faults=p)
    _assert_user_error(res, out, "empty")


def test_all_zero_length(cli, scene):
    p = scene["dir"] / "zero.gpkg"
    gpd.GeoDataFrame({"a": [1, 2]}, geometry=[shapely.LineString([(X0 + 5, Y0 - 5)] * 2)] * 2, crs=CRS).to_file(p)
    res, out = _run(cli, scene, faults=p)
    _assert_user_error(res, out, "zero length")


@pytest.mark.parametrize("dip, word", [(0.0, "dip"), (-5.0, "dip"), (91.0, "dip"), ("steep", "not a number")])
def test_bad_dip(cli, scene, dip, word):
    g = scene["gdf"].copy()
    g["dip"] = [dip, 50.0, 50.0] if not isinstance(dip, str) else [dip, "50", "50"]
    p = scene["dir"] / "baddip.gpkg"
    g.to_file(p)
    res, out = _run(cli, scene, faults=p)
    _assert_user_error(res, out, word, "feature 1")


def test_bad_dip_dir(cli, scene):
    g = scene["gdf"].copy()
    g["dip_dir"] = [361.0, 90.0, 90.0]
    p = scene["dir"] / "baddd.gpkg"
    g.to_file(p)
    res, out = _run(cli, scene, faults=p)
    _assert_user_error(res, out, "dip direction", "0-360")


def test_dem_all_nodata(cli, scene):
    dem = write_dem(scene["dir"] / "void.tif", np.full((300, 300), np.nan))
    res, out = _run(cli, scene, dem=dem)
    _assert_user_error(res, out, "nodata")


def test_traces_outside_dem(cli, scene):
    dem = write_dem(scene["dir"] / "far.tif", tilted_dem(), x0=X0 + 50000)
    res, out = _run(cli, scene, dem=dem)
    _assert_user_error(res, out, "no trace overlaps the dem")


def test_output_folder_missing(cli, scene):
    out = scene["dir"] / "missing" / "out.gpkg"
    res, _ = _run(cli, scene, out=out)
    assert res.exit_code == 2 and "does not exist" in res.stderr
    assert not out.parent.exists()


def test_output_exists_without_overwrite(cli, scene):
    res, out = _run(cli, scene)
    assert res.exit_code == 0
    before = out.read_bytes()
    res2, _ = _run(cli, scene)
    assert res2.exit_code == 2 and "--overwrite" in res2.stderr
    assert out.read_bytes() == before
    res3, _ = _run(cli, scene, "--overwrite")
    assert res3.exit_code == 0


def test_bad_parameter_value(cli, scene):
    res, out = _run(cli, scene, "--dip-deg", "95")
    _assert_user_error(res, out, "dip_deg", "<= 90")
    res, out = _run(cli, scene, "--link-distance-m", "far")
    _assert_user_error(res, out, "link_distance_m", "number")


def test_verbose_shows_traceback(cli, scene):
    res = cli(["-v", "prepare", "--faults", scene["dir"] / "nope.gpkg", "--out", scene["dir"] / "o.gpkg"])
    assert res.exit_code == 2 and "Traceback" in res.stderr


def test_tools_lists_seven(cli):
    res = cli(["tools"])
    names = [ln.split()[0] for ln in res.output.splitlines()]
    assert names[:7] == ["prepare", "throw", "scaling", "transect", "strain", "width", "hazard"]
    res = cli(["tools", "prepare"])
    assert "link_distance_m" in res.output and "[m]" in res.output
    res = cli(["tools", "nosuch"])
    assert res.exit_code == 2


def test_python_dash_m(scene):
    import subprocess
    import sys

    r = subprocess.run([sys.executable, "-m", "faultmap", "tools"], capture_output=True, text=True, check=True)
    assert "prepare" in r.stdout


def test_quiet_and_verbose_after_the_tool_name(cli, scene):
    out = scene["dir"] / "q.gpkg"
    res = cli(["prepare", "--faults", scene["faults"], "--dem", scene["dem"], "--out", out, "-q"])
    assert res.exit_code == 0 and "wrote" not in res.stderr and out.exists()
    res = cli(["prepare", "--faults", scene["dir"] / "nope.gpkg", "--out", scene["dir"] / "n.gpkg", "-v"])
    assert res.exit_code == 2 and "Traceback" in res.stderr


def test_listing_tools_imports_no_analysis_dependency():
    # Start-up stays fast (issue: `faultmap --help` answered in 2.4-3.5 s): reading every tool's declaration
    # and building the command line must not import the heavy libraries, which load when a tool runs.
    # A fresh interpreter, so that modules other tests imported do not count.
    import subprocess
    import sys

    code = (
        "import sys, faultmap.cli as c\n"
        "c.build_cli()\n"
        "from faultmap.registry import load_tools\n"
        "assert len(load_tools()) == 7\n"
        "print(','.join(m for m in ('geopandas', 'numba', 'matplotlib', 'scipy', 'pandas', 'rasterio', 'pyogrio')"
        " if m in sys.modules))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == ""


def test_declared_choices_match_the_analysis():
    # The transect tool's declaration spells the zone choices out (so that listing tools stays light);
    # they must be the ones the analysis accepts.
    from faultmap.extension.transect_measure import ZONE_CHOICES
    from faultmap.extension.transect_tool import TOOL

    (zone,) = [p for p in TOOL.params if p.name == "zone"]
    assert tuple(zone.choices) == ZONE_CHOICES


def test_common_options_work_after_the_sub_command(cli, scene, tmp_path):
    # Failure reported: `faultmap run FILE -q` was refused; -q / --threads worked only in some positions.
    proj = tmp_path / "p.toml"
    proj.write_text(
        f'steps = ["prepare"]\n[inputs]\nfaults = "{scene["faults"].name}"\n[output]\ngpkg = "o.gpkg"\n'
    )
    for args in (["run", str(proj), "-q", "--threads", "1"], ["-q", "run", str(proj), "--overwrite", "-v"]):
        res = cli(args)
        assert res.exit_code == 0, res.output
    assert (tmp_path / "o.gpkg").exists()
    res = cli(["prepare", "--faults", str(scene["faults"]), "--out", str(tmp_path / "q.gpkg"), "-q"])
    # quiet: no progress, notices or summary lines (warnings stay: they are about the data)
    assert res.exit_code == 0 and "wrote" not in res.output
    assert all(line.startswith("warning:") for line in res.output.strip().splitlines())


def test_help_names_numbers_and_choices(cli):
    # Failure reported: numeric parameters showed as TEXT in --help.
    text = cli(["throw", "--help"]).output
    assert "--station-spacing-m NUMBER" in text
    assert "--min-samples-per-side INTEGER" in text
    assert "--robust-loss [tukey|huber|none]" in text


def test_output_naming_the_input_file_is_refused_and_the_input_kept(cli, scene):
    # Failure reported: --out naming the input fault file, with --overwrite, destroyed the input layer.
    src = scene["faults"]
    before = src.read_bytes()
    res = cli(["prepare", "--faults", str(src), "--out", str(src), "--overwrite"])
    assert res.exit_code == 2
    assert "is an input of this run" in res.output and len(res.output.strip().splitlines()) == 1
    assert src.read_bytes() == before


def test_a_run_writes_its_report_and_layer_styles_beside_the_output(cli, scene, tmp_path):
    out = tmp_path / "res.gpkg"
    res = cli(["prepare", "--faults", str(scene["faults"]), "--out", str(out), "-q"])
    assert res.exit_code == 0, res.output
    assert (tmp_path / "res_report.html").read_text().lstrip().lower().startswith("<!doctype html")
    assert sorted(p.name for p in (tmp_path / "res_styles").iterdir()) == ["faults.sld"]
    res = cli(["prepare", "--faults", str(scene["faults"]), "--out", str(out), "--overwrite", "--no-report", "-q"])
    assert res.exit_code == 0 and not (tmp_path / "res_report.html").exists()  # the older report went too
