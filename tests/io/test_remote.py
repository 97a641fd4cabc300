"""Inputs where they live (issue 20): a DEM served over HTTP, a VRT of tiles, unreachable inputs.

The DEM is a synthetic scene (one plateau fault, :func:`faultmap.synthetic.parallel_faults`, on a
gently sloping surface, written by ``tests/scenes.write_scene``) rewritten as an uncompressed
GeoTIFF in 128 x 128 blocks, served by a small loopback HTTP server (``range_server.py`` beside
this file, in its own process) that honours ``Range`` requests (RFC 7233, byte ranges; the
standard library's ``SimpleHTTPRequestHandler`` does not) and counts the bytes it sends. The reference for every remote or tiled run is the same run on the local
mosaic: GDAL must return the same pixels whatever the storage, so the layers must be identical.
"""

from __future__ import annotations

import pickle
import socket
import subprocess
import sys
import urllib.request
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import rasterio
from rasterio.windows import Window
from scenes import read_layers, write_scene

import faultmap.runner as runner
from faultmap.errors import InputFileError
from faultmap.io.dem import open_dem
from faultmap.io.locations import absolute, gdal_path, is_remote, location_kind, remote_options
from faultmap.runner import run_tools
from faultmap.synthetic import grid_spec, parallel_faults

#: Scene size: 1200 x 1200 pixels of 20 m (24 km square), one 3 km fault near a corner.
N_PX, PX_M, BLOCK = 1200, 20.0, 128
CORNER = (600_000.0, 5_200_000.0)  # top-left, EPSG:32631


def _stats(url: str) -> int:
    """Body bytes of files the server sent since its last reset."""
    with urllib.request.urlopen(f"{url}/__stats__", timeout=10) as r:
        return int(r.read().split()[0])


@pytest.fixture
def server(tmp_path):
    """The loopback Range server of ``range_server.py`` over ``tmp_path/served``, in its own process."""
    root = tmp_path / "served"
    root.mkdir()
    proc = subprocess.Popen(
        [sys.executable, str(Path(__file__).with_name("range_server.py")), str(root)],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        port = int(proc.stdout.readline())
        url = f"http://127.0.0.1:{port}"
        yield {
            "root": root,
            "url": url,
            "served": lambda: _stats(url),
            "reset": lambda: urllib.request.urlopen(f"{url}/__reset__", timeout=10).close(),
        }
    finally:
        proc.stdin.close()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:  # pragma: no cover
            proc.kill()
            proc.wait()


def _scene(folder: Path) -> dict:
    """Write the one-fault scene and its DEM as an uncompressed GeoTIFF in 128-pixel blocks."""
    from pyproj import CRS

    crs = CRS.from_epsg(32631)
    x0, y0 = CORNER
    faults = parallel_faults(
        1,
        spacing_m=1.0,
        length_m=3000.0,
        throw_m=40.0,
        dip_deg=60.0,
        dip_dir_deg=90.0,
        centre_xy=(x0 + 4000.0, y0 - 4000.0),
        profile_shape="plateau",
        crs=crs,
    )
    faults["hw_extent_m"] = 3000.0
    grid = grid_spec((x0, y0 - N_PX * PX_M, x0 + N_PX * PX_M, y0), pixel_size_m=PX_M)
    build = dict(
        base_elevation_m=300.0,
        regional_slope_deg=0.3,
        regional_slope_azimuth_deg=200.0,
        relief_m=0.5,
        relief_wavelength_m=2000.0,
        scarp_width_m=4.0 * PX_M,
        seed=20_20,
    )
    sc = write_scene(
        folder,
        name="Tessomar Bench",
        faults=faults,
        grid=grid,
        build=build,
        nodata=[],
        axis_azimuth_deg=0.0,
        crs=crs,
    )
    with rasterio.open(sc.dem) as src:
        data, profile = src.read(1), src.profile
    profile.update(tiled=True, blockxsize=BLOCK, blockysize=BLOCK, compress=None)
    dem = folder / "dem_blocks.tif"
    with rasterio.open(dem, "w", **profile) as dst:
        dst.write(data, 1)
    return {"faults": folder / "faults.gpkg", "dem": dem}


def _throw(inputs: dict, out: Path) -> dict:
    res = run_tools(["throw"], inputs=inputs, out=out, quiet=True, report=False, echo=lambda _m: None)
    return read_layers(res.gpkg) | {"run_info": res.run_info}


def _same_layers(a: dict, b: dict) -> None:
    for name in ("faults", "throw_stations"):
        pd.testing.assert_frame_equal(a[name], b[name], check_exact=True)


@pytest.fixture
def scene(tmp_path):
    return _scene(tmp_path / "scene")


# ------------------------------------------------------------------ where an input is
def test_locations_are_classified_and_passed_to_gdal_unchanged(tmp_path):
    # GDAL's virtual file system names ("GDAL Virtual File Systems" page of the GDAL documentation)
    assert gdal_path("https://h.example/a/dem.tif") == "/vsicurl/https://h.example/a/dem.tif"
    assert gdal_path("s3://bucket/key/dem.tif") == "/vsis3/bucket/key/dem.tif"
    assert gdal_path("gs://bucket/dem.tif") == "/vsigs/bucket/dem.tif"
    assert gdal_path("/vsicurl/http://h/dem.tif") == "/vsicurl/http://h/dem.tif"  # kept, '//' and all
    assert [location_kind(v) for v in ("dem.tif", "http://h/d.tif", "/vsizip/a.zip/d.tif")] == [
        "local",
        "url",
        "virtual",
    ]
    assert is_remote("/vsizip//vsicurl/http://h/a.zip/d.tif") and not is_remote("/vsizip/a.zip/d.tif")
    assert remote_options("dem.tif") == {} and remote_options("s3://b/k")["GDAL_DISABLE_READDIR_ON_OPEN"]
    # a URL is never made relative to anything; a local archive inside a /vsizip/ path is made absolute
    assert absolute("https://h/dem.tif", tmp_path) == "https://h/dem.tif"
    (tmp_path / "tiles.zip").write_bytes(b"PK")
    assert (
        absolute("/vsizip/tiles.zip/a/dem.tif", tmp_path)
        == f"/vsizip/{tmp_path.resolve()}/tiles.zip/a/dem.tif"
    )
    assert absolute("dem.tif", tmp_path) == str(tmp_path.resolve() / "dem.tif")
    with pytest.raises(InputFileError, match="no 'mailto://'"):
        gdal_path("mailto://x")


def test_project_keeps_a_url_and_resolves_local_paths(tmp_path, scene):
    from faultmap.project import read_project

    proj = tmp_path / "p.toml"
    proj.write_text(
        '[inputs]\nfaults = "scene/faults.gpkg"\ndem = "https://h.example/data/dem.tif"\n'
        '[output]\ngpkg = "o.gpkg"\n',
        encoding="utf-8",
    )
    inputs = read_project(proj)["inputs"]
    assert inputs["dem"] == "https://h.example/data/dem.tif"
    assert inputs["faults"] == str((tmp_path / "scene" / "faults.gpkg").resolve())


# ------------------------------------------------------------------ a served DEM
def test_served_dem_gives_the_local_result_reading_windows_only(tmp_path, scene, server):
    import shutil

    shutil.copy(scene["dem"], server["root"] / "dem.tif")
    shutil.copy(scene["faults"], server["root"] / "faults.gpkg")
    size = (server["root"] / "dem.tif").stat().st_size
    local = _throw({"faults": scene["faults"], "dem": scene["dem"]}, tmp_path / "local.gpkg")
    assert (local["throw_stations"]["status"] == "ok").sum() > 20  # the scene is measured, not all void

    server["reset"]()
    url = f"{server['url']}/run1/dem.tif"
    by_url = _throw({"faults": scene["faults"], "dem": url}, tmp_path / "url.gpkg")
    served = server["served"]()
    _same_layers(by_url, local)
    # one 3 km fault near a corner of a 24 km DEM: only the blocks around it are fetched (windowed
    # reads), far less than the file (measured: 1.0 MB of 6.6 MB); a whole-file download would be >= size
    assert 0 < served < 0.25 * size, (served, size)

    vsi = f"/vsicurl/{server['url']}/run2/dem.tif"
    faults_url = f"{server['url']}/run2/faults.gpkg"  # the traces over HTTP as well
    by_vsi = _throw({"faults": faults_url, "dem": vsi}, tmp_path / "vsi.gpkg")
    _same_layers(by_vsi, local)

    info = dict(zip(by_url["run_info"]["key"], by_url["run_info"]["value"], strict=True))
    assert info["input.dem"] == url  # shown as given, never relative to the output folder
    # remote checksum: what the server reports (size, Last-Modified, ETag), and says it is no hash
    assert info["input.dem.checksum"].startswith("remote (size, last-modified, etag; not a content hash)")
    assert f"size={size}" in info["input.dem.checksum"] and "etag=" in info["input.dem.checksum"]


def test_the_dem_object_carries_the_url_to_workers(scene, server):
    import shutil

    shutil.copy(scene["dem"], server["root"] / "dem.tif")
    url = f"{server['url']}/p/dem.tif"
    dem = pickle.loads(pickle.dumps(open_dem(url)))  # what a Dask worker receives
    assert dem.path == url and dem.gdal_path == "/vsicurl/" + url
    local = open_dem(scene["dem"])
    box = (CORNER[0] + 3000, CORNER[1] - 5000, CORNER[0] + 5000, CORNER[1] - 3000)
    np.testing.assert_array_equal(dem.read_window(box)[0], local.read_window(box)[0])


# ------------------------------------------------------------------ tiles
def test_vrt_of_tiles_gives_the_mosaic_result(tmp_path, scene):
    """Four tiles listed in a hand-written VRT (GDAL's VRT format, "VRT -- GDAL Virtual Format" page)."""
    tiles = tmp_path / "tiles"
    tiles.mkdir()
    with rasterio.open(scene["dem"]) as src:
        profile, transform = src.profile, src.transform
        half = N_PX // 2
        sources = []
        for r0 in (0, half):
            for c0 in (0, half):
                win = Window(c0, r0, half, half)
                name = f"t_{r0}_{c0}.tif"
                p = dict(profile, width=half, height=half, transform=src.window_transform(win))
                with rasterio.open(tiles / name, "w", **p) as dst:
                    dst.write(src.read(1, window=win), 1)
                sources.append(
                    f'<ComplexSource><SourceFilename relativeToVRT="1">{name}</SourceFilename>'
                    f'<SourceBand>1</SourceBand><SrcRect xOff="0" yOff="0" xSize="{half}" ySize="{half}"/>'
                    f'<DstRect xOff="{c0}" yOff="{r0}" xSize="{half}" ySize="{half}"/>'
                    f"<NODATA>{profile['nodata']}</NODATA></ComplexSource>"
                )
        gt = ", ".join(repr(v) for v in transform.to_gdal())
        vrt = (
            f'<VRTDataset rasterXSize="{N_PX}" rasterYSize="{N_PX}"><SRS>{src.crs.to_wkt()}</SRS>'
            f"<GeoTransform>{gt}</GeoTransform>"
            f'<VRTRasterBand dataType="Float32" band="1"><NoDataValue>{profile["nodata"]}</NoDataValue>'
            + "".join(sources)
            + "</VRTRasterBand></VRTDataset>"
        )
    (tiles / "mosaic.vrt").write_text(vrt, encoding="utf-8")
    with rasterio.open(tiles / "mosaic.vrt") as v, rasterio.open(scene["dem"]) as m:
        np.testing.assert_array_equal(v.read(1), m.read(1))  # the VRT is the mosaic, pixel for pixel
    mosaic = _throw({"faults": scene["faults"], "dem": scene["dem"]}, tmp_path / "mosaic.gpkg")
    tiled = _throw({"faults": scene["faults"], "dem": tiles / "mosaic.vrt"}, tmp_path / "tiled.gpkg")
    _same_layers(tiled, mosaic)


# ------------------------------------------------------------------ unreachable inputs
def _closed_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]  # closed when the block ends: nothing listens there


def test_unreachable_inputs_fail_before_any_computing(tmp_path, scene, server, monkeypatch):
    def _never(*_a, **_k):
        raise AssertionError("inputs were read: the check came too late")

    monkeypatch.setattr(runner, "_load_inputs", _never)
    port = _closed_port()
    cases = {
        f"http://127.0.0.1:{port}/dem.tif": "Could not connect",
        f"/vsicurl/{server['url']}/missing/dem.tif": "404",
    }
    for dem, answer in cases.items():
        with pytest.raises(InputFileError) as err:
            run_tools(
                ["throw"], inputs={"faults": scene["faults"], "dem": dem}, out=tmp_path / "x.gpkg", quiet=True
            )
        msg = str(err.value)
        assert "\n" not in msg and dem in msg and "'dem'" in msg and answer in msg, msg
    with pytest.raises(InputFileError, match=r"cannot open the remote input 'faults'.*404"):
        run_tools(
            ["prepare"], inputs={"faults": f"{server['url']}/nope.gpkg"}, out=tmp_path / "y.gpkg", quiet=True
        )
    assert not (tmp_path / "x.gpkg").exists() and not (tmp_path / "y.gpkg").exists()


def test_cli_takes_urls_and_says_what_gdal_answered(tmp_path, scene, server):
    import shutil

    from click.testing import CliRunner

    from faultmap.cli import build_cli

    shutil.copy(scene["dem"], server["root"] / "dem.tif")
    cli = build_cli()
    ok = CliRunner().invoke(
        cli,
        [
            "prepare",
            "--faults",
            str(scene["faults"]),
            "--dem",
            f"{server['url']}/c/dem.tif",
            "--out",
            str(tmp_path / "c.gpkg"),
            "-q",
        ],
    )
    assert ok.exit_code == 0, ok.output
    bad = CliRunner().invoke(
        cli,
        [
            "prepare",
            "--faults",
            str(scene["faults"]),
            "--dem",
            f"{server['url']}/c/none.tif",
            "--out",
            str(tmp_path / "d.gpkg"),
        ],
    )
    assert bad.exit_code == 2
    lines = [ln for ln in bad.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and "none.tif" in lines[0] and "HTTP response code: 404" in lines[0], bad.output


def test_dem_inside_a_zip_is_read_in_place_with_its_archive_made_absolute(tmp_path, scene, monkeypatch):
    import zipfile

    with zipfile.ZipFile(tmp_path / "dem.zip", "w") as z:
        z.write(scene["dem"], "inner/dem.tif")
    monkeypatch.chdir(tmp_path)
    dem = open_dem("/vsizip/dem.zip/inner/dem.tif")
    assert dem.path == f"/vsizip/{tmp_path.resolve()}/dem.zip/inner/dem.tif"  # what a worker elsewhere needs
    box = (CORNER[0] + 3000, CORNER[1] - 5000, CORNER[0] + 5000, CORNER[1] - 3000)
    np.testing.assert_array_equal(dem.read_window(box)[0], open_dem(scene["dem"]).read_window(box)[0])
    (tmp_path / "out").mkdir()
    res = _throw(
        {"faults": scene["faults"], "dem": f"/vsizip/{tmp_path}/dem.zip/inner/dem.tif"},
        tmp_path / "out/z.gpkg",
    )
    info = dict(zip(res["run_info"]["key"], res["run_info"]["value"], strict=True))
    assert (
        info["input.dem"] == "/vsizip/../dem.zip/inner/dem.tif"
    )  # relative to the output's folder, as local files
    assert info["input.dem.checksum"].startswith("virtual (size; not a content hash): size=")
    with pytest.raises(InputFileError, match=r"cannot open the virtual input 'dem' .*path inside it"):
        run_tools(
            ["throw"],
            inputs={"faults": scene["faults"], "dem": "/vsizip/dem.zip/nope.tif"},
            out=tmp_path / "z.gpkg",
            quiet=True,
        )
