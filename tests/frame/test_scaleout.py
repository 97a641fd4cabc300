"""Scale-out (issue 8): the same layers in-process and on a Dask cluster, any batch size, DEMs larger
than the memory budget, and failing workers.

Scenes are synthetic and built by code (the Skervolin Trough of ``tests/scenes.py`` and straight faults
offsetting a planar surface, written here). References: the unpartitioned functions
(:func:`faultmap.extension.kostrov_sums.kostrov_grid`, :func:`faultmap.extension.transect_measure.measure_transects`, themselves checked
against Kostrov 1974 and the heave-summation definitions in test_strain.py / test_transect.py), and for
the large DEM the throws it was built with (a vertical step of T on a planar surface has throw T).
"""

from __future__ import annotations

import hashlib
import tracemalloc

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import rasterio
import shapely
from rasterio.transform import from_origin
from scenes import narrow_rift_scene, read_layers

import faultmap.extension.strain_tool as strain_tool
import faultmap.extension.transect_tool as transect_tool
import faultmap.io.dem as dem_io
from faultmap.engine import make_engine
from faultmap.errors import FaultmapError
from faultmap.runner import run_tools

CRS = "EPSG:32633"
#: Small batches so that every tool really runs several of them.
SMALL = {"TILE_CELLS": 3, "TRANSECTS_PER_BATCH": 1}
PARAMS = {"throw": {"memory_budget_mb": 16.0}, "strain": {"cell_size_m": 2000.0}, "transect": {"n_draws": 200}}
VOLATILE = ("run_utc", "output")  # run_info keys that differ between any two runs
# keys that describe the engine rather than the result (a parallel engine splits the DEM into more
# tiles so that every worker has work)
ENGINE_KEYS = ("engine", "throw.n_batches")
#: Input paths are written relative to the output's folder, so they differ between output folders;
#: the inputs' checksums (compared) say they are the same files.
PATH_KEYS = ("input.faults", "input.dem", "input.transects", "input.study_area")


def _quiet(_msg: str) -> None:
    """Swallow the runner's messages."""


def _run(scene_inputs, out, *, engine=None, tools=("transect", "strain"), params=PARAMS, **kw):
    return run_tools(list(tools), inputs=scene_inputs, out=out, params=params, engine=engine, quiet=True,
                     echo=_quiet, **kw)


def _small_batches(mp):
    mp.setattr(strain_tool, "TILE_CELLS", SMALL["TILE_CELLS"])
    mp.setattr(transect_tool, "TRANSECTS_PER_BATCH", SMALL["TRANSECTS_PER_BATCH"])


def _info(layers) -> dict:
    ri = layers["run_info"]
    return {k: v for k, v in zip(ri["key"], ri["value"], strict=True) if k not in VOLATILE}


def assert_same_layers(a: dict, b: dict, *, exact: bool = False) -> None:
    """Every layer read back from two GeoPackages is the same (run_info up to its volatile keys).

    Layers agree to floating-point tolerance (1e-9; the issue's criterion); ``exact`` asks for bits.
    """
    assert sorted(a) == sorted(b)
    for name in a:
        if name == "run_info":
            ia, ib = _info(a), _info(b)
            for k in ENGINE_KEYS + PATH_KEYS:
                ia.pop(k, None)
                ib.pop(k, None)
            assert ia == ib
            continue
        if exact:
            pd.testing.assert_frame_equal(a[name], b[name], check_exact=True, obj=name)
        else:
            x, y = a[name], b[name]
            if "geometry" in x.columns:
                assert shapely.equals_exact(x.geometry.values, y.geometry.values, tolerance=1e-6).all(), name
                x, y = pd.DataFrame(x.drop(columns="geometry")), pd.DataFrame(y.drop(columns="geometry"))
            pd.testing.assert_frame_equal(x, y, rtol=1e-9, atol=1e-9, obj=name)


@pytest.fixture(scope="module")
def cluster():
    eng = make_engine(workers=2)
    yield eng
    eng.close()


@pytest.fixture(scope="module")
def skervolin(tmp_path_factory):
    """The Skervolin Trough and its in-process result with small batches."""
    scene = narrow_rift_scene(tmp_path_factory.mktemp("skervolin"))
    with pytest.MonkeyPatch.context() as mp:
        _small_batches(mp)
        res = _run(scene.inputs(), scene.folder / "inproc.gpkg")
    return scene, read_layers(res.gpkg)


# --------------------------------------------------------------------------- identical results
def test_local_cluster_gives_identical_layers(skervolin, cluster, monkeypatch):
    scene, ref = skervolin
    _small_batches(monkeypatch)
    res = _run(scene.inputs(), scene.folder / "cluster.gpkg", engine=cluster)
    got = read_layers(res.gpkg)
    info = _info(got)
    # several batches in every partitioned step, else the comparison proves little
    assert int(info["throw.n_batches"]) >= 4
    assert int(info["strain.n_batches"]) >= 10
    assert int(info["transect.n_batches"]) == len(scene.transect_table)
    assert_same_layers(ref, got)


def test_project_engine_table_and_cli_scheduler(skervolin, cluster, monkeypatch, tmp_path):
    from click.testing import CliRunner

    from faultmap.cli import build_cli
    from faultmap.project import run_project

    scene, ref = skervolin
    _small_batches(monkeypatch)
    addr = cluster.client.scheduler.address
    proj = tmp_path / "project.toml"
    proj.write_text(
        'steps = ["transect", "strain"]\n'
        f'[inputs]\nfaults = "{scene.faults}"\nfaults_layer = "traces"\ndem = "{scene.dem}"\n'
        f'transects = "{scene.transects}"\ntransects_layer = "transects"\n'
        '[output]\ngpkg = "project.gpkg"\n'
        f'[engine]\nscheduler = "{addr}"\n'
        '[throw]\nmemory_budget_mb = 16.0\n[strain]\ncell_size_m = 2000.0\n[transect]\nn_draws = 200\n'
    )
    res = run_project(proj, quiet=True, echo=_quiet)
    assert_same_layers(ref, read_layers(res.gpkg))
    # the command line: strain alone (prepare and throw with defaults) on the same scheduler vs in-process
    args = ["-q", "strain", "--faults", scene.faults, "--faults-layer", "traces", "--dem", scene.dem,
            "--cell-size-m", "2000"]
    runner = CliRunner()
    r1 = runner.invoke(build_cli(), [str(a) for a in args + ["--out", tmp_path / "cli_a.gpkg"]])
    r2 = runner.invoke(build_cli(), [str(a) for a in args + ["--out", tmp_path / "cli_b.gpkg", "--scheduler", addr]])
    assert r1.exit_code == 0 and r2.exit_code == 0, r1.output + r2.output
    assert_same_layers(read_layers(tmp_path / "cli_a.gpkg"), read_layers(tmp_path / "cli_b.gpkg"))


def test_strain_tiles_match_the_whole_grid_for_any_tile_size(skervolin):
    from faultmap.extension.kostrov_sums import kostrov_grid
    from faultmap.extension.kostrov_tiles import gather_kostrov_tiles, kostrov_tile, plan_kostrov_tiles

    _, ref = skervolin
    faults = gpd.GeoDataFrame(ref["faults"], geometry="geometry")
    stations = gpd.GeoDataFrame(ref["throw_stations"], geometry="geometry")
    for keep_empty in (False, True):
        cells0, whole0 = kostrov_grid(faults, stations, cell_size_m=1500.0, keep_empty=keep_empty)
        for tile_cells in (1, 4, 1000):
            tiles, grid = plan_kostrov_tiles(faults, stations, cell_size_m=1500.0, tile_cells=tile_cells,
                                             keep_empty=keep_empty)
            cells, whole = gather_kostrov_tiles([kostrov_tile(t) for t in tiles], grid)
            pd.testing.assert_frame_equal(
                pd.DataFrame(cells.drop(columns="geometry")), pd.DataFrame(cells0.drop(columns="geometry")),
                rtol=1e-9, atol=1e-15,
            )
            assert cells.geometry.geom_equals_exact(cells0.geometry, 1e-6).all()
            assert whole.keys() == whole0.keys()
            for k in whole0:
                assert whole[k] == pytest.approx(whole0[k], rel=1e-9, abs=1e-15), k


def test_transect_batches_are_independent_of_batch_size(skervolin):
    from faultmap.extension.transect_batches import (
        gather_transect_batches,
        measure_transect_batch,
        plan_transect_batches,
    )
    from faultmap.extension.transect_measure import measure_transects

    scene, ref = skervolin
    faults = gpd.GeoDataFrame(ref["faults"], geometry="geometry")
    stations = gpd.GeoDataFrame(ref["throw_stations"], geometry="geometry")
    tr = gpd.read_file(scene.transects, layer="transects")
    opts = dict(n_draws=2000, seed=3, detection_throw_m=20.0, exponent_c=1.0)
    runs = []
    for size in (1, 2, 3):
        batches = plan_transect_batches(faults, stations, tr, batch_size=size, **opts)
        runs.append(gather_transect_batches([measure_transect_batch(b) for b in batches]))
    for t, c, msgs in runs[1:]:
        pd.testing.assert_frame_equal(t, runs[0][0], check_exact=True)
        pd.testing.assert_frame_equal(c, runs[0][1], check_exact=True)
        assert msgs == runs[0][2]
    # against one unpartitioned call: the sums are the same numbers (margin and d_max fixed from the
    # whole layer); the Monte Carlo spreads come from other draws of the same distributions
    t1, c1 = measure_transects(faults, stations, tr, **opts)
    t, c, _ = runs[0]
    pd.testing.assert_frame_equal(pd.DataFrame(c.drop(columns="geometry")),
                                  pd.DataFrame(c1.drop(columns="geometry")), rtol=1e-9)
    exact = ["n_crossings", "n_faults", "margin_m", "zone_length_m", "restored_length_m", "sum_heave_m",
             "sum_heave_along_m", "extension", "beta", "ends_inside", "status", "extension_corrected"]
    pd.testing.assert_frame_equal(pd.DataFrame(t[exact]), pd.DataFrame(t1[exact]), rtol=1e-9)
    # 2000 draws: the 16-84 % half-range agrees within ~5 % (sampling error of a percentile, from memory)
    np.testing.assert_allclose(t["sum_heave_along_err_m"], t1["sum_heave_along_err_m"], rtol=0.15)


def test_throw_is_independent_of_the_batch_plan(skervolin, tmp_path):
    scene, ref = skervolin
    params = {"throw": {"memory_budget_mb": 512.0}}
    res = _run(scene.inputs(), tmp_path / "big.gpkg", tools=("throw",), params=params, engine=make_engine(threads=1))
    got = read_layers(res.gpkg)
    assert int(_info(got)["throw.n_batches"]) == 1 < int(_info(ref)["throw.n_batches"])
    for name in ("faults", "throw_stations", "linkage_zones"):
        a, b = got[name], ref[name]
        pd.testing.assert_frame_equal(a.drop(columns="geometry"), b.drop(columns="geometry"), rtol=1e-9,
                                      atol=1e-9, obj=name)
        assert shapely.equals_exact(a.geometry.values, b.geometry.values, tolerance=1e-6).all()


# --------------------------------------------------------------------------- memory budget
def _step_scene(folder, *, n: int, faults_x_m, throws_m, y_range_m, block: int = 256, compress=None):
    """Straight N-S faults (hanging wall east) offsetting a plane dipping gently east, as a tiled GeoTIFF.

    The throw of each fault varies along strike as an ellipse (max ``throws_m`` mid-trace) and the
    scarp is a 30 m wide ramp. Returns (DEM path, faults GeoDataFrame with the true ``max_throw_m``).
    """
    px, x0, y0 = 10.0, 500_000.0, 7_000_000.0 + n * 10.0
    col = (np.arange(n) + 0.5) * px
    north = n * px - (np.arange(n) + 0.5) * px
    z = np.empty((n, n), dtype=np.float32)
    z[:] = (300.0 + 0.002 * col).astype(np.float32)[None, :]
    ya, yb = y_range_m
    for xf, tm in zip(faults_x_m, throws_m, strict=True):
        s = np.clip((north - ya) / (yb - ya), 0.0, 1.0)
        prof = (tm * np.sqrt(np.clip(1.0 - (2.0 * s - 1.0) ** 2, 0.0, 1.0))).astype(np.float32)
        ramp = np.clip((col - xf) / 30.0 + 0.5, 0.0, 1.0).astype(np.float32)
        z -= prof[:, None] * ramp[None, :]
    path = folder / "dem.tif"
    prof_kw = dict(driver="GTiff", width=n, height=n, count=1, dtype="float32", crs=CRS,
                   transform=from_origin(x0, y0, px, px), nodata=-9999.0, tiled=True, blockxsize=block,
                   blockysize=block)
    if compress:
        prof_kw["compress"] = compress
    with rasterio.open(path, "w", **prof_kw) as ds:
        ds.write(z, 1)
    lines = [shapely.LineString([(x0 + x, y0 - n * px + ya), (x0 + x, y0 - n * px + yb)]) for x in faults_x_m]
    faults = gpd.GeoDataFrame(
        {"fault_id": np.arange(1, len(lines) + 1), "dip_deg": 60.0, "dip_dir_deg": 90.0,
         "max_throw_m": np.asarray(throws_m, dtype=float)},
        geometry=lines, crs=CRS,
    )
    return path, faults


def test_dem_larger_than_the_memory_budget_is_read_window_by_window(tmp_path, monkeypatch):
    from faultmap.io.dem import open_dem
    from faultmap.throw.step import measure_throw

    path, truth = _step_scene(tmp_path, n=4000, faults_x_m=(8000.0, 16000.0, 24000.0, 32000.0),
                              throws_m=(40.0, 60.0, 50.0, 30.0), y_range_m=(4000.0, 36000.0))
    dem = open_dem(path)
    budget_mb = 16.0
    assert dem.width * dem.height * 4 >= 4 * budget_mb * 1e6  # the DEM is 4 x the budget as float32, 8 x as float64
    reads = []
    real = dem_io.read_window_array

    def spy(*args, **kw):
        out = real(*args, **kw)
        reads.append(out[0].nbytes)
        return out

    monkeypatch.setattr(dem_io, "read_window_array", spy)
    faults = truth.drop(columns="max_throw_m")
    tracemalloc.start()
    try:
        res = measure_throw(faults, dem, memory_budget_mb=budget_mb)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    # windows: each under 40 % of the budget (the share plan_batches gives the DEM), many of them
    assert len(reads) >= 9 and max(reads) <= 0.4 * budget_mb * 1e6
    # all numpy and Python allocations of the step stay under the budget (loose: the budget is the bound)
    assert peak < budget_mb * 1e6
    # processed: every station measured, and the built throws come back (vertical step of T on a plane)
    assert (res.stations["status"] == "ok").all()
    got = res.faults.set_index("fault_id")["max_throw_m"]
    np.testing.assert_allclose(got.to_numpy(), truth["max_throw_m"].to_numpy(), rtol=0.01)
    # and the same stations as one window holding every trace (budget 512 MB: one batch, one read)
    reads.clear()
    big = measure_throw(faults, dem, memory_budget_mb=512.0)
    assert len(reads) == 1 and reads[0] > 0.4 * budget_mb * 1e6
    np.testing.assert_allclose(big.stations["throw_m"], res.stations["throw_m"], rtol=1e-3, atol=0.05)


# --------------------------------------------------------------------------- failures
def _sha(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _corrupt_blocks(path, *, max_col_px: int) -> int:
    """Overwrite the compressed data of every block left of ``max_col_px`` (the header stays intact)."""
    with rasterio.open(path) as ds:
        bw, bh = ds.block_shapes[0][1], ds.block_shapes[0][0]
        spans = []
        for by in range((ds.height + bh - 1) // bh):
            for bx in range(max_col_px // bw):
                off = int(ds.get_tag_item(f"BLOCK_OFFSET_{bx}_{by}", "TIFF", bidx=1))
                size = int(ds.get_tag_item(f"BLOCK_SIZE_{bx}_{by}", "TIFF", bidx=1))
                spans.append((off, size))
    with open(path, "r+b") as fh:
        for off, size in spans:
            fh.seek(off)
            fh.write(b"\x00" * size)
    return len(spans)


def test_failing_worker_stops_the_run_writes_nothing_and_a_rerun_succeeds(tmp_path, cluster):
    # two 3 km faults at x = 2.5 and 3.5 km: prepare samples only near the traces (x >= 2.46 km), the
    # throw profiles reach about 2.2 km, so only the workers read the blocks west of x = 2.4 km
    path, truth = _step_scene(tmp_path, n=600, faults_x_m=(2500.0, 3500.0), throws_m=(20.0, 25.0),
                              y_range_m=(1500.0, 4500.0), block=32, compress="deflate")
    good = path.read_bytes()
    faults = tmp_path / "faults.gpkg"
    truth.drop(columns=["fault_id", "max_throw_m"]).rename(columns={"dip_deg": "dip", "dip_dir_deg": "dip_dir"}) \
        .to_file(faults, layer="traces")
    inputs = {"faults": str(faults), "faults_layer": "traces", "dem": str(path)}
    out = tmp_path / "results.gpkg"
    _run(inputs, out, tools=("throw",), params={})  # an earlier good result, in-process
    ref = read_layers(out)
    before = _sha(out)
    assert _corrupt_blocks(path, max_col_px=224) > 0
    with rasterio.open(path) as ds:  # opening still works: only the data blocks are damaged
        assert ds.width == 600
    figs = tmp_path / "figures"
    with pytest.raises(FaultmapError) as err:
        _run(inputs, out, engine=cluster, tools=("throw",), params={}, overwrite=True, figures=figs)
    msg = str(err.value)
    assert "cannot read DEM window" in msg and "local Dask cluster" in msg and "nothing was written" in msg
    assert "\n" not in msg.strip()  # one line
    # no partial output: the earlier result is untouched, no figure folder, no temporary files
    assert _sha(out) == before and not figs.exists()
    # (beside the inputs: the earlier result, its report, styles and the manifest of what it wrote)
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        [".results.manifest.json", "dem.tif", "faults.gpkg", "results.gpkg", "results_report.html", "results_styles"]
    )
    # in-process the same damage gives the same kind of one-line error
    with pytest.raises(FaultmapError, match="cannot read DEM window"):
        _run(inputs, tmp_path / "other.gpkg", tools=("throw",), params={})
    assert not (tmp_path / "other.gpkg").exists()
    # a rerun with the intact DEM succeeds and gives the in-process layers
    path.write_bytes(good)
    res = _run(inputs, out, engine=cluster, tools=("throw",), params={}, overwrite=True)
    assert_same_layers(ref, read_layers(res.gpkg))


def test_transect_warnings_merged_across_batches_match_one_call(skervolin):
    """Per-transect warnings, merged, read as those of one unpartitioned call (same ids, same text)."""
    import warnings

    from faultmap.errors import FaultmapWarning
    from faultmap.extension.transect_batches import (
        gather_transect_batches,
        measure_transect_batch,
        plan_transect_batches,
    )
    from faultmap.extension.transect_measure import measure_transects

    scene, ref = skervolin
    faults = gpd.GeoDataFrame(ref["faults"], geometry="geometry")
    stations = gpd.GeoDataFrame(ref["throw_stations"], geometry="geometry")
    # fault 4 loses its throw (no stations, no max_throw_m); two extra transects: one far from every
    # fault, one short one ending inside the population
    faults.loc[faults["fault_id"] == 4, "max_throw_m"] = np.nan
    stations = stations[stations["fault_id"] != 4]
    tr = gpd.read_file(scene.transects, layer="transects")
    g = tr.geometry.iloc[0]
    far = shapely.affinity.translate(g, 200_000.0, 0.0)
    short = shapely.LineString([g.interpolate(0.45, normalized=True), g.interpolate(0.55, normalized=True)])
    extra = gpd.GeoDataFrame({"transect_id": [11, 12], "name": ["far", "short"]}, geometry=[far, short], crs=tr.crs)
    tr = pd.concat([tr, extra], ignore_index=True)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FaultmapWarning)
        t1, _ = measure_transects(faults, stations, tr, n_draws=100)
    one = sorted(str(w.message) for w in caught if issubclass(w.category, FaultmapWarning))
    batches = plan_transect_batches(faults, stations, tr, batch_size=2, n_draws=100)
    t, _, merged = gather_transect_batches([measure_transect_batch(b) for b in batches])
    assert sorted(merged) == one
    assert any(m.startswith("transect 11, 12: crosses no fault") for m in merged)  # one line for both
    assert any(m.startswith("transect 12: ends inside") for m in merged)
    assert any(m.startswith("fault 4: no throw known") for m in merged)
    assert list(t["status"]) == list(t1["status"]) and list(t["ends_inside"]) == list(t1["ends_inside"])
