"""A run's outputs are placed together or not at all (reliability issue).

Failures reported: figures were moved in one by one after the GeoPackage, so a kill could pair new
layers with old figures; a rerun with fewer steps left older figures beside a GeoPackage that no longer
had their layers. The commit is journaled; these tests interrupt it after every possible move and check
that the next run's recovery gives exactly the earlier outputs or exactly the new ones.
"""

from __future__ import annotations

import os

import pytest

import faultmap.io.outputs as outputs
from faultmap.io.gpkg import check_target
from faultmap.io.outputs import commit_outputs, previous_outputs, recover_outputs, staged_name


def _stage(target, contents):
    staged = {}
    for dest, text in contents.items():
        dest.parent.mkdir(parents=True, exist_ok=True)
        staged[dest] = staged_name(target, dest)
        staged[dest].write_text(text)
    return staged


def _state(folder):
    return {str(p.relative_to(folder)): p.read_text() for p in sorted(folder.rglob("*")) if p.is_file()
            and not p.name.startswith(".")}


def _first_run(tmp_path):
    target = tmp_path / "res.gpkg"
    figs = tmp_path / "figs"
    commit_outputs(target, _stage(target, {target: "gpkg 1", figs / "a.png": "a 1", figs / "b.png": "b 1",
                                            tmp_path / "res_report.html": "report 1"}))
    (figs / "mine.txt").write_text("the user's own notes")  # shares the folder: never touched
    return target, figs


def _second(tmp_path, target, figs):
    # fewer steps: no b.png any more
    return {target: "gpkg 2", figs / "a.png": "a 2", tmp_path / "res_report.html": "report 2"}


def test_rerun_with_fewer_figures_removes_only_its_own_older_ones(tmp_path):
    target, figs = _first_run(tmp_path)
    gone = commit_outputs(target, _stage(target, _second(tmp_path, target, figs)))
    assert [p.name for p in gone] == ["b.png"]
    assert _state(tmp_path) == {"res.gpkg": "gpkg 2", "figs/a.png": "a 2", "figs/mine.txt": "the user's own notes",
                                "res_report.html": "report 2"}
    assert {p.name for p in previous_outputs(target)} == {"a.png", "res_report.html"}
    assert not [p for p in tmp_path.rglob(".*") if "manifest" not in p.name]


@pytest.mark.parametrize("crash_after", range(7))
def test_a_kill_at_any_point_leaves_old_or_new_outputs_never_a_mix(tmp_path, monkeypatch, crash_after):
    target, figs = _first_run(tmp_path)
    old = _state(tmp_path)
    staged = _stage(target, _second(tmp_path, target, figs))
    real = os.replace
    count = {"n": 0}

    def dying_replace(src, dst):
        if count["n"] == crash_after:
            raise KeyboardInterrupt  # the process is killed here
        count["n"] += 1
        return real(src, dst)

    monkeypatch.setattr(outputs.os, "replace", dying_replace)
    try:
        commit_outputs(target, staged)
        finished = True
    except KeyboardInterrupt:
        finished = False
    monkeypatch.setattr(outputs.os, "replace", real)
    import faultmap.io.gpkg as gpkg

    monkeypatch.setattr(gpkg, "_pid_alive", lambda pid: False)  # the killed writer's process is gone
    check_target(target, overwrite=True, folders=[figs])  # the next run's preflight recovers and cleans
    new = {"res.gpkg": "gpkg 2", "figs/a.png": "a 2", "figs/mine.txt": "the user's own notes",
           "res_report.html": "report 2"}
    assert _state(tmp_path) in (old, new)
    if finished:
        assert _state(tmp_path) == new
    # nothing hidden is left but the manifest of the outputs in place
    assert [p.name for p in tmp_path.rglob(".*")] == [".res.manifest.json"]
    assert recover_outputs(target) == ""


def test_output_journal_cut_short_is_ignored(tmp_path):
    target, _figs = _first_run(tmp_path)
    (tmp_path / ".res.journal.json").write_text('{"committed": fal')
    assert recover_outputs(target) == "rolled back"
    assert not (tmp_path / ".res.journal.json").exists()
