"""run_info: relative paths, library versions, no float noise, nothing twice (reliability issue).

Failures reported: absolute paths leaked a user's folder layout when results were shared; no library
versions; float noise such as ``1250.0000000000623``; the hazard caution written twice.
"""

from __future__ import annotations

import re

import pyogrio

from faultmap.io.provenance import library_versions
from faultmap.io.provenance import value_text as _value_text


def test_value_text_drops_float_noise():
    assert _value_text(1250.0000000000623) == "1250.0"
    assert _value_text(65.0) == "65.0" and _value_text(3) == "3" and _value_text("text") == "text"
    assert float(_value_text(0.1 + 0.2)) == 0.3  # 12 significant digits


def test_run_info_paths_versions_and_no_repeats(cli, scene, tmp_path):
    out = tmp_path / "results" / "res.gpkg"
    out.parent.mkdir()
    res = cli(["prepare", "--faults", str(scene["faults"]), "--out", str(out), "-q"])
    assert res.exit_code == 0, res.output
    info = pyogrio.read_dataframe(out, layer="run_info")
    assert info["key"].is_unique
    kv = dict(zip(info["key"], info["value"], strict=True))
    assert kv["input.faults"] == "../faults.gpkg" and kv["output"] == "res.gpkg"
    assert not any(str(tmp_path) in v for v in info["value"])  # no absolute path anywhere (warnings included)
    for lib in ("numpy", "scipy", "shapely", "pyproj", "gdal", "proj"):
        assert kv[f"library.{lib}"] == library_versions()[lib] and re.match(r"\d+\.\d+", kv[f"library.{lib}"])
    assert not [v for v in info["value"] if re.fullmatch(r"-?\d+\.\d{13,}", v)]


def test_numeric_runtime_warnings_do_not_reach_the_terminal(scene, tmp_path, recwarn):
    # Failure reported: numpy and shapely runtime warnings leaked onto the terminal. They are counted in
    # run_info instead; other warnings still pass.
    import warnings

    import numpy as np

    from faultmap.registry import Tool, load_tools
    from faultmap.runner import run_tools

    def noisy(ctx, p):
        np.nanmean(np.array([np.nan]))  # "Mean of empty slice"
        np.array([1.0]) / np.array([0.0])  # divide by zero
        warnings.warn("a deprecation a user may want to see", DeprecationWarning, stacklevel=1)

    tools = dict(load_tools())
    tools["noisy"] = Tool("noisy", "Emits warnings.", run=noisy, requires=("prepare",))
    res = run_tools(["noisy"], inputs={"faults": str(scene["faults"])}, out=tmp_path / "n.gpkg", tools=tools,
                    quiet=True, echo=lambda m: None)
    info = dict(zip(res.run_info["key"], res.run_info["value"], strict=True))
    assert int(info["noisy.numeric_warnings_silenced"]) >= 2
    assert not [w for w in recwarn if issubclass(w.category, RuntimeWarning)]
    assert [w for w in recwarn if issubclass(w.category, DeprecationWarning) and "a user may" in str(w.message)]
