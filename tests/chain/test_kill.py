"""kill -9 at any moment never damages a result (reliability issue).

A run of the throw tool with figures is killed (SIGKILL) at several moments, each time over an earlier
good result; then a rerun succeeds. Checked after every kill: the earlier GeoPackage is either intact or
fully replaced by a new one whose figures are beside it (never a mix), and after the rerun no hidden
temporary file is left.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import pyogrio
import pytest

from tests.conftest import tilted_dem, write_dem


def _cmd(faults, dem, out, figs):
    return [sys.executable, "-m", "faultmap", "throw", "--faults", str(faults), "--dem", str(dem), "--out",
            str(out), "--figures", str(figs), "--overwrite", "-q", "--threads", "1"]


def _run_id(gpkg):
    info = pyogrio.read_dataframe(gpkg, layer="run_info")
    return dict(zip(info["key"], info["value"], strict=True))["run_utc"]


@pytest.mark.parametrize("delay_s", [0.5, 1.5, 2.5, 3.5])
def test_kill_minus_9_then_rerun(scene, tmp_path, delay_s):
    dem = write_dem(tmp_path / "dem.tif", tilted_dem())
    out, figs = tmp_path / "res.gpkg", tmp_path / "figs"
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    subprocess.run(_cmd(scene["faults"], dem, out, figs), check=True, env=env, capture_output=True)
    first = _run_id(out)
    manifest = json.loads((tmp_path / ".res.manifest.json").read_text())
    assert any(f.startswith("figs/") for f in manifest["files"])
    time.sleep(1.1)  # run_utc has whole seconds: a new result must differ from the earlier one
    proc = subprocess.Popen(_cmd(scene["faults"], dem, out, figs), env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    time.sleep(delay_s)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    # the result is readable and one of the two runs'
    assert _run_id(out) is not None
    # rerun: recovers any half-done commit, clears the left-overs, writes a new result
    subprocess.run(_cmd(scene["faults"], dem, out, figs), check=True, env=env, capture_output=True)
    assert _run_id(out) != first
    hidden = sorted(p.name for p in tmp_path.rglob(".*"))
    assert hidden == [".res.manifest.json"], hidden
    written = json.loads((tmp_path / ".res.manifest.json").read_text())["files"]
    assert all((tmp_path / f).exists() for f in written)
    assert sorted(p.name for p in figs.iterdir()) == sorted(f.split("/")[-1] for f in written if f.startswith("figs/"))
