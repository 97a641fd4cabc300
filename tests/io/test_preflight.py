"""Checks before any computing: the output can be written, is not an input, and killed runs left nothing.

Each test is named after a failure users met (reliability issue): an output naming the input file
destroyed it with --overwrite; an unwritable folder failed only after the computing; temporaries of a
killed run stayed forever.
"""

from __future__ import annotations

import os
import subprocess
import sys
from collections import namedtuple

import pytest

import faultmap.io.gpkg as gpkg
from faultmap.errors import OutputError
from faultmap.io.gpkg import check_target, remove_stale_temporaries
from faultmap.io.outputs import temporary_name


def test_output_naming_an_input_is_refused_even_with_overwrite(tmp_path):
    src = tmp_path / "faults.gpkg"
    src.write_bytes(b"the user's traces")
    for target in (src, tmp_path / "sub" / ".." / "faults.gpkg"):
        (tmp_path / "sub").mkdir(exist_ok=True)
        with pytest.raises(OutputError, match="is an input of this run"):
            check_target(target, overwrite=True, inputs=[src, tmp_path / "dem.tif"])
    link = tmp_path / "alias.gpkg"
    link.symlink_to(src)
    with pytest.raises(OutputError, match="is an input of this run"):
        check_target(link, overwrite=True, inputs=[src])
    assert src.read_bytes() == b"the user's traces"
    assert check_target(tmp_path / "out.gpkg", overwrite=False, inputs=[src, None, "/vsicurl/http://x/y.tif"])


def test_unwritable_folder_fails_before_computing(tmp_path, monkeypatch):
    # (as root a permission bit does not stop a write, so the folder's refusal is simulated)
    def refuse(*a, **k):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(gpkg.tempfile, "mkstemp", refuse)
    with pytest.raises(OutputError, match=r"cannot write in folder .*Permission denied"):
        check_target(tmp_path / "out.gpkg", overwrite=False)


def test_full_disk_fails_before_computing(tmp_path, monkeypatch):
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(gpkg.shutil, "disk_usage", lambda p: usage(10**9, 10**9 - 10**6, 10**6))
    with pytest.raises(OutputError, match="only 1 MB free"):
        check_target(tmp_path / "out.gpkg", overwrite=False)


def test_leftovers_of_a_killed_run_are_removed_and_a_live_runs_kept(tmp_path):
    target = tmp_path / "res.gpkg"
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                          text=True, check=True).stdout.strip()
    stale = tmp_path / f".res.gpkg.{dead}-abcd1234.tmp.gpkg"
    stale.write_bytes(b"half")
    (tmp_path / (stale.name + "-journal")).write_bytes(b"j")
    stage = tmp_path / f".res.figures.{dead}-abcd1234.tmp"
    stage.mkdir()
    (stage / "throw_map.png").write_bytes(b"png")
    live = temporary_name(target, "gpkg", ".gpkg")  # this process: still running
    live.write_bytes(b"being written")
    old = tmp_path / ".res.1a2b3c4d.tmp.gpkg"  # an older version's name, without a process id
    old.write_bytes(b"old")
    os.utime(old, (0, 0))
    other = tmp_path / ".other.gpkg.1-ffff.tmp.gpkg"  # another target's: not ours to touch
    other.write_bytes(b"x")
    removed = remove_stale_temporaries(target)
    assert sorted(p.name for p in removed) == sorted([stale.name, stage.name, old.name])
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([live.name, other.name])


def test_failed_write_says_nothing_was_written_when_there_was_no_earlier_result(tmp_path, monkeypatch):
    import geopandas as gpd
    import shapely

    def broken(path, name, df):
        raise RuntimeError("disk went away")

    monkeypatch.setattr(gpkg, "_write_one", broken)
    layer = gpd.GeoDataFrame({"a": [1]}, geometry=[shapely.Point(0, 0)], crs="EPSG:32633")
    with pytest.raises(OutputError, match="nothing was written"):
        gpkg.write_gpkg(tmp_path / "new.gpkg", {"faults": layer}, crs=layer.crs)
    assert list(tmp_path.iterdir()) == []
