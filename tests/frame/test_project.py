"""Project (TOML) files and the Python API."""

from __future__ import annotations

import pyogrio
import pytest

import faultmap
from faultmap.errors import ProjectFileError


def _write(scene, text, name="p.toml"):
    p = scene["dir"] / name
    p.write_text(text)
    return p


BASE = """
steps = ["prepare"]
[inputs]
faults = "faults.gpkg"
faults_layer = "traces"
dem = "dem.tif"
[output]
gpkg = "res.gpkg"
figures = "figs"
[fields]
dip = "dip"
[prepare]
dip_deg = 65.0
"""


def test_run_project_relative_paths(scene, tmp_path, monkeypatch):
    p = _write(scene, BASE)
    monkeypatch.chdir(tmp_path.parent)  # paths resolve against the project file, not the cwd
    res = faultmap.run_project(p, quiet=True)
    assert res.gpkg == scene["dir"] / "res.gpkg"
    f = pyogrio.read_dataframe(res.gpkg, layer="faults")
    assert sorted(set(f.loc[f["dip_source"] == "default", "dip_deg"])) == [65.0]
    info = pyogrio.read_dataframe(res.gpkg, layer="run_info")
    assert info.loc[info["key"] == "param.prepare.dip_deg", "value"].item() == "65.0"


@pytest.mark.parametrize(
    "change, words",
    [
        (("[prepare]", "[prepare]\nwobble = 3"), ["unknown key 'wobble'", "dip_deg"]),
        (("dip_deg = 65.0", 'dip_deg = "steep"'), ["dip_deg", "number"]),
        (("[inputs]", "colour = 1\n[inputs]"), ["unknown key 'colour'", "steps"]),
        (('faults = "faults.gpkg"', 'faults = "missing.gpkg"'), ["missing.gpkg", "does not exist"]),
        (('gpkg = "res.gpkg"', "gpkg = 3"), ["gpkg", "text"]),
        (('steps = ["prepare"]', 'steps = ["prepare", "fly"]'), ["unknown tool 'fly'"]),
        (("[fields]", "[fields]\ncolour = \"c\""), ["unknown key 'colour'", "dip_dir"]),
        (("[output]", "[output"), ["not valid TOML"]),
    ],
)
def test_project_errors_name_the_key(scene, cli, change, words):
    p = _write(scene, BASE.replace(*change))
    with pytest.raises(ProjectFileError) as err:
        faultmap.run_project(p, quiet=True)
    for w in words:
        assert w in str(err.value)
    res = cli(["run", p])
    assert res.exit_code == 2 and res.stderr.count("error:") == 1
    assert not (scene["dir"] / "res.gpkg").exists()


def test_missing_input_key(scene):
    p = _write(scene, "[inputs]\ndem = 'dem.tif'\n[output]\ngpkg = 'r.gpkg'\n")
    with pytest.raises(ProjectFileError, match="faults"):
        faultmap.run_project(p)


def test_overwrite_from_project(scene):
    p = _write(scene, BASE)
    faultmap.run_project(p, quiet=True)
    with pytest.raises(faultmap.FaultmapError, match="overwrite"):
        faultmap.run_project(p, quiet=True)
    _write(scene, BASE.replace("[output]", "[output]\noverwrite = true"))
    faultmap.run_project(p, quiet=True)


def test_python_api_same_names(scene, tmp_path):
    res = faultmap.run_tools(["prepare"], inputs={"faults": scene["faults"], "dem": scene["dem"]},
                             params={"prepare": {"dip_deg": 65.0}}, out=tmp_path / "api.gpkg")
    assert (res.layers["faults"]["dip_deg"] == 65.0).any()


def test_inputs_are_never_modified(scene, tmp_path):
    import hashlib

    def sha(p):
        return hashlib.sha256(p.read_bytes()).hexdigest()

    before = {p: sha(p) for p in (scene["faults"], scene["dem"])}
    mtimes = {p: p.stat().st_mtime_ns for p in before}
    faultmap.run_tools(["throw"], inputs={"faults": scene["faults"], "dem": scene["dem"]},
                       out=tmp_path / "t.gpkg", figures=tmp_path / "figs", quiet=True)
    assert {p: sha(p) for p in before} == before
    assert {p: p.stat().st_mtime_ns for p in before} == mtimes
    assert not list(scene["dir"].glob("*.aux.xml"))  # no sidecar written beside the DEM
