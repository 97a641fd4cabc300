"""The tool registry: one declaration per tool, discovered through entry points.

Each tool declares its name, summary, inputs, parameters and outputs once, as
a :class:`Tool`. The command line, the project-file keys, ``faultmap tools``
and the parameter reference in ``docs/`` are all generated from these
declarations.

Built-in and third-party tools are found the same way: through the
entry-point group ``faultmap.tools`` (see :data:`ENTRY_POINT_GROUP`). A tool
that fails to import is listed as broken with its error; the others keep
working.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from importlib.metadata import entry_points
from typing import Any

from faultmap.errors import NotAvailableError, ParameterError

__all__ = [
    "ENTRY_POINT_GROUP",
    "INPUT_KINDS",
    "DEFAULT_FIELDS",
    "Param",
    "Tool",
    "BrokenTool",
    "load_tools",
    "get_tool",
    "resolve_order",
    "not_available",
]

#: Entry-point group through which tools are discovered.
ENTRY_POINT_GROUP = "faultmap.tools"

#: Input kinds a tool may require, with their help text.
INPUT_KINDS = {
    "faults": "Fault traces: any vector source GDAL reads (GeoPackage, Shapefile, GeoJSON, FlatGeobuf...).",
    "dem": "Digital elevation model: any raster GDAL reads, in a projected metric CRS.",
    "transects": "Transect lines (optional): any vector source GDAL reads.",
    "study_area": "Study-area polygon(s) (optional): traces ending near its boundary are censored.",
    "throw_points": "Throw measurements (optional): a point layer with throw_m (and throw_err_m), e.g. field or "
    "seismic throws, snapped to the nearest trace.",
}

#: Attribute fields the tools read from the fault traces (and, for ``throw_m`` / ``throw_err_m``, from the
#: throw points): our name -> default column name (remapped with ``--field NAME=COLUMN`` or a project
#: file's ``[fields]`` table). Numbers may be written as ranges ``50-70`` or triples ``(50,60,70)``
#: (see :mod:`faultmap.traces.attributes`).
DEFAULT_FIELDS = {
    "name": "name",
    "dip": "dip",
    "dip_dir": "dip_dir",
    "active": "active",
    "surface_age_ka": "surface_age_ka",
    "max_throw_m": "max_throw_m",
    "max_throw_err_m": "max_throw_err_m",
    "displacement_m": "displacement_m",
    "slip_rate_mm_yr": "slip_rate_mm_yr",
    "throw_m": "throw_m",
    "throw_err_m": "throw_err_m",
}

_TYPE_NAMES = {float: "number", int: "integer", bool: "true/false", str: "text"}


@dataclass(frozen=True)
class Param:
    """One parameter of a tool.

    Parameters
    ----------
    name : str
        Snake-case name with its unit suffix (``station_spacing_m``); the same
        name is the CLI option (``--station-spacing-m``), the project-file key
        and the Python keyword.
    type : type
        ``float``, ``int``, ``bool`` or ``str``.
    default : object
        Default value; ``None`` for a nullable parameter means "adapted from
        the data" (the tool records the value it used in ``run_info``).
    help : str
        One-sentence help.
    unit : str
        Unit shown in docs and help (``m``, ``deg``, ``ka``...).
    min, max : float, optional
        Allowed range (inclusive unless ``min_exclusive`` / ``max_exclusive``).
    choices : tuple of str, optional
        Allowed values of a text parameter.
    nullable : bool
        Whether ``None`` (unset, adapted) is allowed.
    """

    name: str
    type: type
    default: Any
    help: str
    unit: str = ""
    min: float | None = None
    max: float | None = None
    min_exclusive: bool = False
    max_exclusive: bool = False
    choices: tuple[str, ...] | None = None
    nullable: bool = False

    @property
    def option(self) -> str:
        """The command-line option name."""
        return "--" + self.name.replace("_", "-")

    def describe_range(self) -> str:
        """Human description of the allowed values."""
        if self.choices:
            return "one of " + ", ".join(repr(c) for c in self.choices)
        parts = []
        if self.min is not None:
            parts.append(("> " if self.min_exclusive else ">= ") + f"{self.min:g}")
        if self.max is not None:
            parts.append(("< " if self.max_exclusive else "<= ") + f"{self.max:g}")
        return " and ".join(parts) if parts else "any " + _TYPE_NAMES.get(self.type, self.type.__name__)

    def validate(self, value: Any, *, where: str = "") -> Any:
        """Coerce ``value`` to the parameter's type and check its range.

        Raises
        ------
        ParameterError
            Naming the parameter, the bad value and the allowed values.
        """
        prefix = f"{where}: " if where else ""
        if value is None:
            if self.nullable or self.default is None:
                return None
            raise ParameterError(f"{prefix}parameter '{self.name}' needs a value ({self.describe_range()}).")
        t = self.type
        bad = ParameterError(
            f"{prefix}parameter '{self.name}' must be {_TYPE_NAMES.get(t, t.__name__)} "
            f"({self.describe_range()}), got {value!r}."
        )
        if t is bool:
            if isinstance(value, bool):
                v = value
            elif isinstance(value, str) and value.lower() in ("true", "yes", "1", "false", "no", "0"):
                v = value.lower() in ("true", "yes", "1")
            else:
                raise bad
        elif t is int:
            if isinstance(value, bool):
                raise bad
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            if isinstance(value, str):
                try:
                    value = int(value)
                except ValueError:
                    raise bad from None
            if not isinstance(value, int):
                raise bad
            v = value
        elif t is float:
            if isinstance(value, bool):
                raise bad
            try:
                v = float(value)
            except (TypeError, ValueError):
                raise bad from None
            if not math.isfinite(v):
                raise bad
        elif t is str:
            if not isinstance(value, str):
                raise bad
            v = value
        else:  # pragma: no cover - declaration error
            raise TypeError(f"unsupported parameter type {t!r} for {self.name}")
        if self.choices is not None and v not in self.choices:
            raise bad
        if self.min is not None and (v < self.min or (self.min_exclusive and v == self.min)):
            raise bad
        if self.max is not None and (v > self.max or (self.max_exclusive and v == self.max)):
            raise bad
        return v


@dataclass(frozen=True)
class Tool:
    """Declaration of one faultmap tool.

    Parameters
    ----------
    name : str
        Command name (``throw``).
    summary : str
        One line for ``faultmap tools``.
    run : callable
        ``run(ctx, params)``: reads from and writes to the run context.
    requires : tuple of str
        Tools that must run before this one: without them this tool cannot run at all.
    uses : tuple of str
        Tools that run before this one when they can (asked for, or their inputs are there); without
        them the tool runs the parts it can and says which parts it left out and why.
    check : callable, optional
        ``check(ctx, params) -> str | None``, called once the inputs are loaded: why the tool cannot
        run on them (``None``: it can). A tool the user did not ask for is then left out with that reason.
    inputs, optional_inputs : tuple of str
        Input kinds from :data:`INPUT_KINDS`.
    params : tuple of Param
        The tool's parameters.
    layers, figures : tuple of str
        GeoPackage layers written or updated, and figure file names.
    available : bool
        False for a declared tool that is not built yet.
    description : str
        Longer text for the parameter reference (methods, sources).
    """

    name: str
    summary: str
    run: Callable[..., None]
    requires: tuple[str, ...] = ()
    uses: tuple[str, ...] = ()
    check: Callable[..., str | None] | None = field(default=None, compare=False)
    inputs: tuple[str, ...] = ("faults",)
    optional_inputs: tuple[str, ...] = ()
    params: tuple[Param, ...] = ()
    layers: tuple[str, ...] = ()
    figures: tuple[str, ...] = ()
    available: bool = True
    description: str = ""
    source: str = field(default="", compare=False)

    def param(self, name: str) -> Param:
        """Return the parameter called ``name``."""
        for p in self.params:
            if p.name == name:
                return p
        raise ParameterError(
            f"tool '{self.name}' has no parameter '{name}'; valid: {', '.join(self.param_names) or '(none)'}."
        )

    @property
    def param_names(self) -> list[str]:
        """Parameter names in declaration order."""
        return [p.name for p in self.params]

    def resolve_params(self, given: dict | None = None, *, where: str = "") -> dict:
        """Return validated parameter values: defaults overlaid with ``given``.

        Raises
        ------
        ParameterError
            For an unknown name (listing the valid ones) or a bad value.
        """
        given = dict(given or {})
        where = where or f"tool '{self.name}'"
        unknown = sorted(set(given) - set(self.param_names))
        if unknown:
            raise ParameterError(
                f"{where}: unknown parameter '{unknown[0]}'; valid: {', '.join(self.param_names) or '(none)'}."
            )
        return {p.name: p.validate(given.get(p.name, p.default), where=where) for p in self.params}


@dataclass(frozen=True)
class BrokenTool:
    """A tool whose entry point failed to load."""

    name: str
    error: str
    source: str = ""
    available: bool = False
    summary: str = "BROKEN: failed to load"


def not_available(name: str) -> Callable[..., None]:
    """Return a run function for a declared tool that is not built yet."""

    def _run(ctx, params):  # noqa: ARG001
        raise NotAvailableError(f"tool '{name}' is not available yet in this version of faultmap.")

    return _run


def load_tools(*, group: str = ENTRY_POINT_GROUP) -> dict[str, Tool | BrokenTool]:
    """Discover tools through the entry-point group.

    Returns
    -------
    dict
        Name -> :class:`Tool`, or :class:`BrokenTool` when the entry point
        failed to load or did not yield a :class:`Tool`. Sorted in a stable
        order: built-in pipeline order first, then third-party tools by name.
    """
    found: dict[str, Tool | BrokenTool] = {}
    for ep in entry_points(group=group):
        src = getattr(ep, "value", "")
        try:
            obj = ep.load()
            if callable(obj) and not isinstance(obj, Tool):
                obj = obj()
            if not isinstance(obj, Tool):
                raise TypeError(f"entry point gave {type(obj).__name__}, expected faultmap.registry.Tool")
            if obj.name != ep.name:
                raise ValueError(f"entry point '{ep.name}' declares a tool named '{obj.name}'")
            found[ep.name] = obj
        except Exception as exc:  # a broken plugin must not break the rest
            found[ep.name] = BrokenTool(ep.name, f"{type(exc).__name__}: {exc}", src)
    order = {n: i for i, n in enumerate(BUILTIN_ORDER)}
    return dict(sorted(found.items(), key=lambda kv: (order.get(kv[0], len(order)), kv[0])))


#: Pipeline order of the built-in tools (used for stable listings).
BUILTIN_ORDER = ("prepare", "throw", "scaling", "transect", "strain", "width", "hazard")


def get_tool(name: str, tools: dict | None = None) -> Tool:
    """Look up one tool by name; error lists the valid names."""
    tools = load_tools() if tools is None else tools
    if name not in tools:
        raise ParameterError(f"unknown tool '{name}'; valid: {', '.join(tools)}.")
    t = tools[name]
    if isinstance(t, BrokenTool):
        raise NotAvailableError(f"tool '{name}' failed to load ({t.error}); reinstall or remove the plugin.")
    return t


def resolve_order(names: Sequence[str], tools: dict) -> list[str]:
    """Tools to run for ``names``, with their requirements (``requires`` and ``uses``), in dependency order.

    Raises
    ------
    ParameterError
        Unknown tool name or a dependency cycle.
    """
    result: list[str] = []
    visiting: set[str] = set()

    def visit(n: str, chain: tuple[str, ...]) -> None:
        if n in result:
            return
        if n not in tools:
            raise ParameterError(f"unknown tool '{n}'; valid: {', '.join(tools)}.")
        if n in visiting:
            raise ParameterError(f"tool dependency cycle: {' -> '.join(chain + (n,))}.")
        visiting.add(n)
        t = tools[n]
        for r in tuple(getattr(t, "requires", ())) + tuple(getattr(t, "uses", ())):
            visit(r, chain + (n,))
        visiting.discard(n)
        result.append(n)

    for n in names:
        visit(n, ())
    return result
