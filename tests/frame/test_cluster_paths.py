"""Cluster runs whose workers run in another folder (issue 20): relative inputs, inputs the workers cannot read.

A Dask cluster of one worker process is started on this machine (loopback only) and its worker is
moved to another folder (``os.chdir`` on the worker), as when a scheduler and workers are started
by hand elsewhere; faultmap connects to it by its scheduler address. The scene is the Orvanquil
Steps of ``tests/scenes.py`` (four plateau faults on a synthetic surface). The reference is the
same run in-process: the layers must agree to floating-point tolerance (1e-9; the engines may cut
the DEM into different tiles, docs/cluster.md).
"""

from __future__ import annotations

import os

import pandas as pd
import pytest
import rasterio
import shapely
from scenes import close_faults_scene, read_layers

import faultmap.runner as runner
from faultmap.engine import make_engine
from faultmap.errors import InputFileError
from faultmap.project import run_project
from faultmap.runner import run_tools

pytest.importorskip("distributed")


def _quiet(_msg: str) -> None:
    """Swallow the runner's messages."""


@pytest.fixture(scope="module")
def cluster(tmp_path_factory):
    """A one-worker local cluster whose worker runs in an empty folder of its own."""
    elsewhere = tmp_path_factory.mktemp("worker_home") / "deeper" / "still"
    elsewhere.mkdir(parents=True)
    eng = make_engine(workers=1)
    eng.client.run(os.chdir, str(elsewhere))
    assert set(eng.client.run(os.getcwd).values()) == {str(elsewhere)}
    yield eng, elsewhere
    eng.close()


@pytest.fixture(scope="module")
def scene(tmp_path_factory):
    """The scene and its in-process throw result."""
    sc = close_faults_scene(tmp_path_factory.mktemp("orvanquil"))
    res = run_tools(
        ["throw"],
        inputs={"faults": sc.faults, "dem": sc.dem},
        out=sc.folder / "inproc.gpkg",
        quiet=True,
        report=False,
        echo=_quiet,
    )
    return sc, read_layers(res.gpkg)


def _same(a: dict, b: dict) -> None:
    for name in ("faults", "throw_stations"):
        x, y = a[name], b[name]
        assert shapely.equals_exact(x.geometry.values, y.geometry.values, tolerance=1e-6).all(), name
        pd.testing.assert_frame_equal(
            pd.DataFrame(x.drop(columns="geometry")),
            pd.DataFrame(y.drop(columns="geometry")),
            rtol=1e-9,
            atol=1e-9,
            obj=name,
        )
    assert (a["throw_stations"]["status"] == "ok").sum() > 10  # measured stations, not an all-void comparison


def test_relative_inputs_in_a_project_file_reach_workers_in_another_folder(cluster, scene, tmp_path):
    eng, elsewhere = cluster
    sc, ref = scene
    rel = os.path.relpath(sc.folder, tmp_path)
    proj = tmp_path / "project.toml"
    proj.write_text(
        'steps = ["throw"]\n'
        f'[inputs]\nfaults = "{rel}/faults.gpkg"\ndem = "{rel}/dem.tif"\n'
        '[output]\ngpkg = "project.gpkg"\nreport = false\n'
        f'[engine]\nscheduler = "{eng.client.scheduler.address}"\n'
    )
    assert not (elsewhere / rel / "dem.tif").exists()  # the relative path means nothing where the worker is
    res = run_project(proj, quiet=True, echo=_quiet)
    got = read_layers(res.gpkg)
    info = dict(zip(got["run_info"]["key"], got["run_info"]["value"], strict=True))
    assert (
        info["engine"].startswith("Dask scheduler at") and int(info["throw.n_batches"]) >= 1
    )  # read on the worker
    _same(ref, got)


def test_relative_paths_given_on_the_client_are_sent_absolute(cluster, scene, tmp_path, monkeypatch):
    eng, _ = cluster
    sc, ref = scene
    monkeypatch.chdir(sc.folder)  # as `faultmap throw --dem dem.tif ...` typed in the data folder
    sched = make_engine(scheduler=eng.client.scheduler.address)
    try:
        res = run_tools(
            ["throw"],
            inputs={"faults": "faults.gpkg", "dem": "dem.tif"},
            out=tmp_path / "rel.gpkg",
            quiet=True,
            report=False,
            echo=_quiet,
            engine=sched,
        )
    finally:
        sched.close()
    _same(ref, read_layers(res.gpkg))


def test_a_dem_only_the_client_sees_stops_before_any_batch(cluster, scene, tmp_path, monkeypatch):
    eng, _ = cluster
    sc, _ = scene

    def _never(*_a, **_k):
        raise AssertionError("inputs were read: the worker check came too late")

    monkeypatch.setattr(runner, "_load_inputs", _never)
    # GDAL's in-memory file system (/vsimem/) lives in one process: the client opens it, a worker cannot
    with rasterio.MemoryFile(sc.dem.read_bytes(), filename="dem.tif") as mem:
        with pytest.raises(InputFileError) as err:
            run_tools(
                ["throw"],
                inputs={"faults": sc.faults, "dem": mem.name},
                out=tmp_path / "x.gpkg",
                quiet=True,
                engine=eng,
            )
    msg = str(err.value)
    assert "\n" not in msg
    assert msg.startswith(f"workers cannot read {mem.name} (input 'dem'; on worker tcp://127.0.0.1:")
    assert msg.endswith("give a path on storage the workers share, or a URL.")
    assert not (tmp_path / "x.gpkg").exists()
