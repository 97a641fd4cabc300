"""Project (TOML) files: which inputs go through which tools, with which parameters.

A project file looks like::

    steps = ["prepare", "throw"]      # optional; default: every available tool

    [inputs]
    faults = "faults.gpkg"
    faults_layer = "traces"
    dem = "dem.tif"

    [output]
    gpkg = "results.gpkg"
    figures = "figures/"

    [fields]
    dip = "DIP"

    [throw]
    station_spacing_m = 50.0

Relative paths resolve against the project file's folder; an input may also
be a URL (``https://...``, ``s3://...``) or a GDAL virtual path
(``/vsicurl/...``), which is kept as it is (see :mod:`faultmap.io.locations`).
Unknown keys and wrong types are errors that name the key and list the valid
ones.
"""

from __future__ import annotations

import sys
from pathlib import Path

from faultmap.errors import ProjectFileError
from faultmap.io.locations import absolute, location_kind
from faultmap.registry import DEFAULT_FIELDS, INPUT_KINDS, BrokenTool, load_tools
from faultmap.runner import INPUT_KEYS, RunResult, run_tools

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = ["read_project", "run_project", "OUTPUT_KEYS", "ENGINE_KEYS"]

OUTPUT_KEYS = {"gpkg": str, "figures": str, "overwrite": bool, "report": bool}
ENGINE_KEYS = {"workers": int, "scheduler": str, "threads": int, "timeout_s": float}
#: Input keys that name a file, URL or GDAL virtual path: every input kind.
_PATH_KEYS = set(INPUT_KINDS)


def _check_table(table, allowed: dict, where: str, path: Path) -> dict:
    if not isinstance(table, dict):
        raise ProjectFileError(f"{path}: '{where}' must be a table ([{where}]).")
    for k, v in table.items():
        if k not in allowed:
            raise ProjectFileError(f"{path}: unknown key '{k}' in [{where}]; valid: {', '.join(allowed)}.")
        t = allowed[k]
        ok = isinstance(v, t) and not (t is int and isinstance(v, bool))
        if t is float:
            ok = isinstance(v, (int, float)) and not isinstance(v, bool)
        if not ok:
            names = {str: "text", float: "a number", int: "an integer", bool: "true or false"}
            raise ProjectFileError(f"{path}: [{where}] {k} must be {names[t]}, got {v!r}.")
    return dict(table)


def read_project(path, *, tools: dict | None = None) -> dict:
    """Parse and check a project file.

    Returns
    -------
    dict
        ``steps``, ``inputs``, ``output``, ``fields``, ``engine``,
        ``params`` (``{tool: {param: value}}``) with paths made absolute.

    Raises
    ------
    ProjectFileError
        Bad TOML, unknown keys, wrong types, missing required keys.
    """
    path = Path(path)
    if not path.is_file():
        raise ProjectFileError(f"{path}: project file not found.")
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ProjectFileError(f"{path}: not valid TOML ({exc}).") from exc
    registry = load_tools() if tools is None else tools
    base = path.parent.resolve()
    valid_top = ["steps", "inputs", "output", "fields", "engine", *registry]
    for k in data:
        if k not in valid_top:
            raise ProjectFileError(f"{path}: unknown key '{k}'; valid: {', '.join(valid_top)}.")
    inputs = _check_table(data.get("inputs", {}), INPUT_KEYS | {"dem_nodata": float, "dem_metres_per_unit": float}, "inputs", path)
    for k in _PATH_KEYS & set(inputs):
        inputs[k] = absolute(inputs[k], base)  # a URL stays as it is
    if "faults" not in inputs:
        raise ProjectFileError(f"{path}: [inputs] needs 'faults' (the fault traces).")
    for k in sorted(_PATH_KEYS & set(inputs)):
        if location_kind(inputs[k]) == "local" and not Path(inputs[k]).exists():
            raise ProjectFileError(f"{path}: [inputs] {k} = {inputs[k]!r} does not exist; fix the path.")
    output = _check_table(data.get("output", {}), OUTPUT_KEYS, "output", path)
    if "gpkg" not in output:
        raise ProjectFileError(f"{path}: [output] needs 'gpkg' (the result GeoPackage).")
    output["gpkg"] = str(base / output["gpkg"])
    if "figures" in output:
        output["figures"] = str(base / output["figures"])
    fields = _check_table(data.get("fields", {}), {k: str for k in DEFAULT_FIELDS}, "fields", path)
    engine = _check_table(data.get("engine", {}), ENGINE_KEYS, "engine", path)
    steps = data.get("steps")
    if steps is not None:
        if not isinstance(steps, list) or not all(isinstance(s, str) for s in steps):
            raise ProjectFileError(f"{path}: 'steps' must be a list of tool names, e.g. [\"prepare\", \"throw\"].")
        for s in steps:
            if s not in registry:
                raise ProjectFileError(f"{path}: unknown tool '{s}' in steps; valid: {', '.join(registry)}.")
    params: dict[str, dict] = {}
    for name, tool in registry.items():
        if name not in data:
            continue
        table = data[name]
        if not isinstance(table, dict):
            raise ProjectFileError(f"{path}: '{name}' must be a table ([{name}]).")
        if isinstance(tool, BrokenTool):
            raise ProjectFileError(f"{path}: [{name}] names a tool that failed to load ({tool.error}).")
        valid = tool.param_names
        for k in table:
            if k not in valid:
                raise ProjectFileError(f"{path}: unknown key '{k}' in [{name}]; valid: {', '.join(valid) or '(none)'}.")
        try:
            tool.resolve_params(table, where=f"{path}: [{name}]")
        except Exception as exc:
            raise ProjectFileError(str(exc)) from exc
        params[name] = dict(table)
    return {"steps": steps, "inputs": inputs, "output": output, "fields": fields, "engine": engine, "params": params}


def run_project(
    path, *, overwrite: bool | None = None, quiet: bool = False, tools: dict | None = None, echo=None,
    engine_options: dict | None = None,
) -> RunResult:
    """Run a project file: its steps (or every available tool) in dependency order.

    Parameters
    ----------
    path : str or pathlib.Path
        The ``.toml`` project file.
    overwrite : bool, optional
        Overrides ``[output] overwrite``.
    quiet : bool
        No progress output.
    engine_options : dict, optional
        ``workers``, ``scheduler`` or ``threads``: override the project's ``[engine]`` table (the
        command line's ``--workers``, ``--scheduler``, ``--threads``).

    Returns
    -------
    faultmap.runner.RunResult
    """
    registry = load_tools() if tools is None else tools
    proj = read_project(path, tools=registry)
    steps = proj["steps"]
    ow = proj["output"].get("overwrite", False) if overwrite is None else overwrite
    engine = None
    chosen = {k: v for k, v in (engine_options or {}).items() if v is not None} or proj["engine"]
    if chosen:
        from faultmap.engine import make_engine

        engine = make_engine(**chosen)
    try:
        return run_tools(
            steps if steps is not None else list(registry),
            inputs=proj["inputs"],
            out=proj["output"]["gpkg"],
            params=proj["params"],
            figures=proj["output"].get("figures"),
            overwrite=ow,
            report=proj["output"].get("report", True),
            fields=proj["fields"],
            quiet=quiet,
            skip_unavailable=steps is None,
            engine=engine,
            tools=registry,
            echo=echo,
        )
    finally:
        if engine is not None:
            engine.close()
