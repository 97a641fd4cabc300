"""Running tools: load inputs once, run a chain of tools, write outputs atomically.

The command line, project files and the Python API all end here, in
:func:`run_tools`.
"""

from __future__ import annotations

import os
import shutil
import sys
import time
import warnings as _warnings
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import geopandas as gpd
import pandas as pd

from faultmap.errors import CRSError, FaultmapWarning, InputError, NotAvailableError, OutputError
from faultmap.registry import INPUT_KINDS, BrokenTool, load_tools, resolve_order

__all__ = ["RunContext", "RunResult", "run_tools", "INPUT_KEYS"]

#: Keys accepted in the ``inputs`` mapping (and the ``[inputs]`` table).
INPUT_KEYS = {
    "faults": str,
    "faults_layer": str,
    "dem": str,
    "dem_nodata": float,
    "dem_metres_per_unit": float,
    "transects": str,
    "transects_layer": str,
    "study_area": str,
    "study_area_layer": str,
    "throw_points": str,
    "throw_points_layer": str,
    "crs": str,
}

#: Input keys that name files (or layers' sources), in the order they are shown.
_FILE_INPUTS = ("faults", "dem", "transects", "study_area", "throw_points")


def _echo(msg: str) -> None:
    print(msg, file=sys.stderr)


@dataclass
class RunContext:
    """What a tool sees while it runs.

    Attributes
    ----------
    crs : pyproj.CRS
        Working CRS (projected, metric).
    raw_faults : geopandas.GeoDataFrame or None
        Traces as read, reprojected to the working CRS (before ``prepare``).
    dem : faultmap.io.dem.Dem or None
        Lazy DEM.
    transects, study_area, throw_points : geopandas.GeoDataFrame or None
        Optional layers in the working CRS.
    layers : dict
        Output layers by name; ``faults`` is also ``ctx.faults``.
    results : dict
        In-memory results tools leave for later tools.
    fields : dict
        Input field-name mapping (``[fields]``).
    """

    crs: Any = None
    raw_faults: gpd.GeoDataFrame | None = None
    dem: Any = None
    transects: gpd.GeoDataFrame | None = None
    study_area: gpd.GeoDataFrame | None = None
    throw_points: gpd.GeoDataFrame | None = None
    layers: dict = field(default_factory=dict)
    results: dict = field(default_factory=dict)
    fields: dict = field(default_factory=dict)
    inputs: dict = field(default_factory=dict)
    quiet: bool = False
    warnings: list = field(default_factory=list)
    notices: list = field(default_factory=list)
    records: dict = field(default_factory=dict)
    engine: Any = None
    current_tool: str = ""
    _figures: dict = field(default_factory=dict)
    _stage: Path | None = None
    echo: Any = _echo

    @property
    def faults(self) -> gpd.GeoDataFrame | None:
        """The ``faults`` layer (after ``prepare``)."""
        return self.layers.get("faults")

    @faults.setter
    def faults(self, value) -> None:
        self.layers["faults"] = value

    def warn(self, msg: str) -> None:
        """Record a warning for ``run_info`` and print it."""
        text = f"{self.current_tool}: {msg}" if self.current_tool else msg
        self.warnings.append(text)
        self.echo(f"warning: {text}")

    def info(self, msg: str) -> None:
        """Record a notice for ``run_info`` and print it unless quiet."""
        text = f"{self.current_tool}: {msg}" if self.current_tool else msg
        self.notices.append(text)
        if not self.quiet:
            self.echo(text)

    def record(self, key: str, value: Any) -> None:
        """Add a ``run_info`` entry (value stored as text)."""
        prefix = f"{self.current_tool}." if self.current_tool and not key.startswith(self.current_tool + ".") else ""
        self.records[prefix + key] = value

    def progress(self, iterable: Iterable, *, total: int | None = None, desc: str = ""):
        """Wrap ``iterable`` in a progress bar on stderr (off with ``quiet``)."""
        from tqdm.auto import tqdm

        return tqdm(
            iterable,
            total=total,
            desc=desc or self.current_tool,
            disable=True if self.quiet else None,
            file=sys.stderr,
            leave=False,
        )

    def save_figure(self, fig, name: str, *, dpi: int = 170) -> None:
        """Stage a matplotlib figure; it is moved into place after the GeoPackage is written.

        Saved cropped to its content and at most :data:`faultmap.figure_kit.MAX_SIDE_PX` pixels a side.
        """
        if self._stage is None:
            return
        from faultmap.figure_kit import save_bounded

        tmp = self._stage / name
        tmp.parent.mkdir(parents=True, exist_ok=True)
        save_bounded(fig, tmp, dpi=dpi)
        self._figures[name] = tmp

    @property
    def figures_enabled(self) -> bool:
        """Whether figures are being written."""
        return self._stage is not None


@dataclass
class RunResult:
    """Outcome of :func:`run_tools`."""

    gpkg: Path
    layers: dict
    figures: list[Path]
    warnings: list[str]
    run_info: pd.DataFrame
    results: dict
    #: Wall time in seconds of loading the inputs (``load``), of each tool's run, and of writing the
    #: GeoPackage with ``run_info`` and input checksums (``write``), in run order. Not in ``run_info``:
    #: outputs record what was computed, and stay comparable between runs.
    time_s: dict = field(default_factory=dict)
    #: The self-contained HTML report written beside the GeoPackage (None with ``report=False``).
    report: Path | None = None
    #: One OGC SLD 1.1 style file per spatial layer, in ``NAME_styles/`` beside the GeoPackage.
    styles: list[Path] = field(default_factory=list)


def _check_inputs(inputs: dict, engine=None) -> dict:
    """Check the ``inputs`` mapping before anything is read or computed.

    Values are checked for type; every input of a kind in :data:`faultmap.registry.INPUT_KINDS`
    must exist (local path) or open with GDAL (URL or virtual path), else the run stops with one
    line naming it and what GDAL answered. On a Dask engine, one worker is asked to open the inputs
    workers read themselves (the rasters, :data:`faultmap.io.locations.RASTER_KINDS`) at the
    absolute path they will be sent (:meth:`faultmap.engine.Engine.check_worker_access`).
    """
    from faultmap.io.locations import RASTER_KINDS, absolute, check_readable

    unknown = sorted(set(inputs) - set(INPUT_KEYS))
    if unknown:
        raise InputError(f"unknown input '{unknown[0]}'; valid: {', '.join(INPUT_KEYS)}.")
    out = {}
    for k, v in inputs.items():
        if v is None:
            continue
        if INPUT_KEYS[k] is float:
            try:
                v = float(v)
            except (TypeError, ValueError):
                raise InputError(f"input '{k}' must be a number, got {v!r}.") from None
        elif isinstance(v, os.PathLike):
            v = str(v)
        elif not isinstance(v, str):
            raise InputError(f"input '{k}' must be text (a path or name), got {v!r}.")
        out[k] = v
    for k in INPUT_KINDS:
        if k in out:
            check_readable(k, out[k])
    check_workers = getattr(engine, "check_worker_access", None)  # faultmap's engines; in-process: a no-op
    if check_workers is not None:
        check_workers({k: absolute(out[k]) for k in INPUT_KINDS if k in out and k in RASTER_KINDS})
    return out


def _load_inputs(ctx: RunContext, inputs: dict, needed: set[str]) -> None:
    from pyproj import CRS

    from faultmap.crs import check_metric, local_metric_crs
    from faultmap.io.dem import open_dem
    from faultmap.io.vector import read_layer

    for kind in sorted(needed):
        if kind not in inputs:
            raise InputError(f"input '{kind}' is required by the tools asked for; give --{kind.replace('_', '-')} or [inputs] {kind}.")
    crs_override = inputs.get("crs")
    if "dem" in inputs:
        ctx.dem = open_dem(inputs["dem"], nodata=inputs.get("dem_nodata"), metres_per_unit=inputs.get("dem_metres_per_unit", 1.0))
        check_metric(ctx.dem.crs, where=str(inputs["dem"]))
        ctx.crs = ctx.dem.crs
    if "faults" in inputs:
        raw = read_layer(inputs["faults"], layer=inputs.get("faults_layer"), what="faults", crs=crs_override)
        src = raw.attrs.get("source", inputs["faults"])
        if ctx.crs is None:
            if raw.crs.is_geographic:
                c = raw.geometry.union_all().centroid
                ctx.crs = local_metric_crs(c.x, c.y)
                ctx.info(f"{src} is in geographic coordinates; working CRS set to {ctx.crs.name} ({ctx.crs.to_string()}).")
            else:
                check_metric(raw.crs, where=src)
                ctx.crs = CRS.from_user_input(raw.crs)
        if not raw.crs.equals(ctx.crs):
            ctx.info(f"{src} reprojected from {raw.crs.name} to the working CRS {ctx.crs.name}.")
            raw = raw.to_crs(ctx.crs)
        ctx.raw_faults = raw
    for kind in ("transects", "study_area", "throw_points"):
        if kind in inputs:
            g = read_layer(inputs[kind], layer=inputs.get(f"{kind}_layer"), what=kind, crs=crs_override)
            if ctx.crs is None:
                raise CRSError(f"{inputs[kind]}: cannot set a working CRS without faults or a DEM.")
            if not g.crs.equals(ctx.crs):
                ctx.info(f"{g.attrs.get('source', inputs[kind])} reprojected to the working CRS {ctx.crs.name}.")
                attrs = dict(g.attrs)
                g = g.to_crs(ctx.crs)
                g.attrs.update(attrs)
            setattr(ctx, kind, g)
    if ctx.crs is not None and ctx.crs.is_geographic:  # pragma: no cover - guarded above
        raise CRSError("working CRS is geographic; this is a bug.")


def run_tools(
    names: Iterable[str],
    *,
    inputs: dict,
    out,
    params: dict | None = None,
    figures=None,
    overwrite: bool = False,
    fields: dict | None = None,
    quiet: bool = False,
    skip_unavailable: bool = False,
    engine=None,
    tools: dict | None = None,
    echo=None,
    report: bool = True,
) -> RunResult:
    """Run tools (and the tools they require) and write one GeoPackage.

    Parameters
    ----------
    names : iterable of str
        Tools asked for; their requirements run first, with defaults unless
        ``params`` names them.
    inputs : dict
        Input paths and options (keys of :data:`INPUT_KEYS`).
    out : path
        Output ``.gpkg``.
    params : dict, optional
        ``{tool: {param: value}}``.
    figures : path, optional
        Folder for figures (created if missing); ``None`` writes none.
    overwrite : bool
        Replace an existing output.
    fields : dict, optional
        Field-name mapping for the traces.
    quiet : bool
        No progress bars or notices (warnings still print).
    skip_unavailable : bool
        Skip tools that are not built or lack inputs (``faultmap run``
        without ``steps``) instead of failing.
    report : bool
        Write ``NAME_report.html`` beside the GeoPackage (a self-contained page).

    Notes
    -----
    Outputs (GeoPackage, figures, report, one style file per spatial layer in ``NAME_styles/``) are
    staged under hidden names and placed together by :func:`faultmap.io.outputs.commit_outputs`:
    a failed or killed run leaves the earlier outputs as they were, and figures always belong to the
    GeoPackage beside them.

    Returns
    -------
    RunResult
    """
    from faultmap.io.gpkg import check_target, stage_gpkg
    from faultmap.io.outputs import commit_outputs, staged_name, temporary_name

    registry = load_tools() if tools is None else tools
    params = {k: dict(v or {}) for k, v in (params or {}).items()}
    inputs = _check_inputs(dict(inputs), engine=engine)
    sources = [inputs[k] for k in _FILE_INPUTS if inputs.get(k)]
    folders = [figures] if figures is not None else []
    out = check_target(out, overwrite=overwrite, inputs=sources, folders=folders)
    if engine is None:
        from faultmap.engine import Engine

        engine = Engine()  # in-process, one thread per core: nothing to close
    ctx = RunContext(quiet=quiet, fields=dict(fields or {}), inputs=inputs, engine=engine)
    if echo is not None:
        ctx.echo = echo
    names = list(names)
    unknown_params = sorted(set(params) - set(registry))
    if unknown_params:
        raise InputError(f"parameters given for unknown tool '{unknown_params[0]}'; tools: {', '.join(registry)}.")
    order = resolve_order(names, registry)
    order, skipped = _runnable_by_inputs(order, names, registry, inputs, skip_unavailable=skip_unavailable)
    for n in order:
        t = registry[n]
        if isinstance(t, BrokenTool):
            raise NotAvailableError(f"tool '{n}' failed to load ({t.error}).")
        if not t.available:
            raise NotAvailableError(f"tool '{n}' is not available yet in this version of faultmap.")
    resolved = {n: registry[n].resolve_params(params.get(n), where=f"[{n}]") for n in order}
    needed = set().union(*(set(registry[n].inputs) for n in order)) if order else set()
    stage = None
    fig_dir = Path(figures) if figures is not None else None
    if fig_dir is not None:
        if fig_dir.exists() and not fig_dir.is_dir():
            raise OutputError(f"{fig_dir}: exists and is not a folder; name a folder for figures.")
        if not fig_dir.parent.exists():
            raise OutputError(f"{fig_dir}: parent folder {fig_dir.parent} does not exist; create it first.")
        stage = temporary_name(out, "figures", "")
    staged: dict[Path, Path] = {}
    try:
        if stage is not None:
            stage.mkdir()
        ctx._stage = stage
        import matplotlib

        matplotlib.use("Agg")
        t0 = time.perf_counter()
        _load_inputs(ctx, inputs, needed)
        time_s: dict[str, float] = {"load": time.perf_counter() - t0}
        for s in skipped:
            ctx.info(f"skipped {s}.")
        order = _runnable_on_data(ctx, order, names, registry, resolved, skip_unavailable=skip_unavailable)
        resolved = {n: resolved[n] for n in order}
        implicit = [n for n in order if n not in names and n not in params]
        if implicit:
            ctx.info(f"also ran {', '.join(implicit)} with default parameters (required by the tools asked for).")
        for n in order:
            ctx.current_tool = n
            t0 = time.perf_counter()
            with _warnings.catch_warnings(record=True) as caught:
                _warnings.simplefilter("always", FaultmapWarning)
                registry[n].run(ctx, resolved[n])
            time_s[n] = time.perf_counter() - t0
            numeric = 0
            for w in caught:
                if issubclass(w.category, FaultmapWarning):
                    ctx.warn(str(w.message))
                elif issubclass(w.category, RuntimeWarning):
                    numeric += 1  # numpy/shapely arithmetic on voids and empty slices: handled, not news
                else:
                    _warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
            if numeric:
                ctx.records[f"{n}.numeric_warnings_silenced"] = numeric
        ctx.current_tool = ""
        if ctx.crs is None:
            raise InputError("no input gave a CRS: give faults or a DEM.")
        t0 = time.perf_counter()
        from faultmap import __version__
        from faultmap.io.provenance import run_info_table

        run_info = run_info_table(ctx, order, resolved, inputs, out, version=__version__, file_inputs=_FILE_INPUTS)
        layers = {k: v for k, v in ctx.layers.items() if v is not None}
        layers["run_info"] = run_info
        staged[out] = stage_gpkg(out, layers, crs=ctx.crs)
        written: list[Path] = []
        if stage is not None and ctx._figures:
            for name, tmp in ctx._figures.items():
                dest = fig_dir / name
                dest.parent.mkdir(parents=True, exist_ok=True)
                staged[dest] = staged_name(out, dest)
                shutil.move(tmp, staged[dest])  # into the figures folder (may be another file system)
                written.append(dest)
        report_path, styles = _stage_report_and_styles(out, layers, run_info, staged, written, report)
        commit_outputs(out, staged)
        time_s["write"] = time.perf_counter() - t0
    finally:
        if stage is not None and stage.exists():
            shutil.rmtree(stage, ignore_errors=True)
        for tmp in staged.values():  # left only when the run failed before its outputs were placed
            if tmp.exists():
                tmp.unlink()
    return RunResult(
        gpkg=out,
        layers=layers,
        figures=written,
        warnings=list(ctx.warnings),
        run_info=run_info,
        results=ctx.results,
        time_s=time_s,
        report=report_path,
        styles=styles,
    )


def _runnable_by_inputs(order: list[str], names, registry: dict, inputs: dict, *, skip_unavailable: bool):
    """Leave out, before reading anything, the tools that lack an input or a hard requirement.

    A tool the user asked for by name is never left out here (unless ``skip_unavailable``): it fails
    later with a message naming the missing input. A tool only pulled in by another's ``requires`` or
    ``uses`` is left out, and the reason is returned.
    """
    runnable: list[str] = []
    skipped: list[str] = []
    for n in order:
        t = registry[n]
        optional = skip_unavailable or n not in names
        if isinstance(t, BrokenTool) or not t.available:
            if skip_unavailable:
                skipped.append(f"{n} (not available yet)")
                continue
            runnable.append(n)  # refused below with its own message
            continue
        need = set(getattr(t, "inputs", ()))
        missing = [r for r in t.requires if r not in runnable]
        if optional and missing:
            skipped.append(f"{n} (needs {', '.join(missing)})")
        elif optional and not need <= set(inputs):
            skipped.append(f"{n} (needs input {', '.join(sorted(need - set(inputs)))})")
        else:
            runnable.append(n)
    return runnable, skipped


def _runnable_on_data(ctx: RunContext, order: list[str], names, registry: dict, resolved: dict, *,
                      skip_unavailable: bool) -> list[str]:
    """Leave out, once the inputs are read, the tools whose ``check`` says they cannot run on them.

    A tool whose hard requirement (``requires``) was left out is left out too; one that only ``uses``
    it runs and says itself which parts it left out (the reasons are in ``ctx.results['left_out']``).
    A tool asked for by name that cannot run is an error naming the reason. Every reason goes to
    ``run_info`` (``left_out.TOOL``).
    """
    left_out: dict[str, str] = ctx.results.setdefault("left_out", {})
    kept: list[str] = []
    for n in order:
        t = registry[n]
        reason = None
        gone = [r for r in getattr(t, "requires", ()) if r in left_out]
        if gone:
            reason = f"needs {gone[0]}, which was left out ({left_out[gone[0]]})"
        elif getattr(t, "check", None) is not None:
            reason = t.check(ctx, resolved[n])
        if reason is None:
            kept.append(n)
            continue
        if n in names and not skip_unavailable:
            raise InputError(f"{n}: {reason}.")
        left_out[n] = reason
        ctx.records[f"left_out.{n}"] = reason
        ctx.info(f"left out {n}: {reason}.")
    return kept


def _stage_report_and_styles(out: Path, layers: dict, run_info, staged: dict, figures: list[Path], report: bool):
    """Render the report and the layer styles into hidden files beside ``out`` (added to ``staged``)."""
    from faultmap.io.outputs import staged_name
    from faultmap.report import render_report, sld_for_layers

    report_path = None
    if report:
        report_path = out.parent / f"{out.stem}_report.html"
        html = render_report(layers, run_info, {p.name: staged[p] for p in figures}, title=f"faultmap: {out.stem}")
        staged[report_path] = staged_name(out, report_path)
        staged[report_path].write_text(html, encoding="utf-8")
    styles = []
    slds = sld_for_layers(layers)
    if slds:
        folder = out.parent / f"{out.stem}_styles"
        folder.mkdir(exist_ok=True)
        for name, sld in slds.items():
            dest = folder / f"{name}.sld"
            staged[dest] = staged_name(out, dest)
            staged[dest].write_text(sld, encoding="utf-8")
            styles.append(dest)
    return report_path, styles

