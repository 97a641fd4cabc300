"""The ``faultmap`` command line, generated from the tool registry.

Each registered tool becomes a subcommand whose options are the shared input
and output options plus the tool's own parameters. User mistakes end with one
line on stderr and exit code 2; ``-v`` adds the traceback.
"""

from __future__ import annotations

import sys
import traceback
from pathlib import Path

import click

from faultmap import __version__
from faultmap.errors import FaultmapError
from faultmap.registry import INPUT_KINDS, BrokenTool, Param, Tool, load_tools

__all__ = ["main", "build_cli", "tool_command"]

HAZARD_NOTE = (
    "Hazard outputs are for screening only: not a site-specific fault-rupture investigation; "
    "local codes and licensed professionals decide."
)


class _State:
    verbose = False
    quiet = False


def _fail(exc: BaseException, state: _State) -> None:
    if state.verbose:
        traceback.print_exception(type(exc), exc, exc.__traceback__, file=sys.stderr)
    if isinstance(exc, FaultmapError):
        click.echo(f"error: {exc}", err=True)
        sys.exit(2)
    click.echo(f"internal error ({type(exc).__name__}: {exc}); rerun with -v and report it.", err=True)
    sys.exit(1)


#: Said after each input's help: what an input may be (see docs/data_sources.md).
_WHERE = "A local path, a URL (https://, s3://, gs://...) or a GDAL virtual path (/vsicurl/..., /vsizip/...)."


def _input_key_names() -> list[str]:
    """Input keys the command line passes on: each input kind, each vector kind's layer, DEM and CRS options."""
    keys = []
    for kind in INPUT_KINDS:
        keys.append(kind)
        if kind != "dem":
            keys.append(f"{kind}_layer")
    return keys + ["dem_nodata", "dem_metres_per_unit", "crs"]


def _input_options() -> list[click.Option]:
    """Options shared by every tool command (defined once): one per input kind of the registry.

    Inputs are plain text, never ``click.Path(exists=True)``: a URL or a GDAL virtual path is not a
    local file, and the runner checks every input (existence, or that GDAL opens it) before it runs.
    """
    opts = []
    for kind, text in INPUT_KINDS.items():
        flag = "--" + kind.replace("_", "-")
        opts.append(click.Option([flag, kind], metavar="PATH|URL", help=f"{text} {_WHERE}"))
        if kind == "dem":
            opts += [
                click.Option(["--dem-nodata"], type=float, help="DEM void value when the file declares none."),
                click.Option(["--dem-metres-per-unit"], type=float,
                             help="Metres per DEM elevation unit (0.3048 for a DEM stored in feet)."),
            ]
        else:
            opts.append(click.Option([f"{flag}-layer", f"{kind}_layer"], help=f"Layer of the {kind.replace('_', ' ')} in a multi-layer source."))
    return opts + [
        click.Option(["--crs"], help="CRS for input layers that have none (e.g. EPSG:32633)."),
        click.Option(["--field", "fields"], multiple=True, metavar="NAME=COLUMN",
                     help="Map a conventional field (name, dip, dip_dir, active, surface_age_ka) to a column."),
        click.Option(["--out"], required=True, type=click.Path(dir_okay=False), help="Output GeoPackage (.gpkg)."),
        click.Option(["--figures"], type=click.Path(file_okay=False), help="Folder for figures (optional)."),
        click.Option(["--overwrite"], is_flag=True, help="Replace an existing output."),
        click.Option(["--no-report"], is_flag=True, help="Do not write NAME_report.html beside the output."),
        click.Option(["--workers"], type=int, help="Run on a local Dask cluster with N workers (faultmap[dask])."),
        click.Option(["--scheduler"], help="Run on an existing Dask scheduler at ADDRESS (faultmap[dask])."),
        click.Option(
            ["--threads"],
            type=int,
            help="In-process threads (default: one per core, at most 4; 1 = sequential).",
        ),
        click.Option(["-v", "--verbose", "verbose_"], is_flag=True, help="Show tracebacks for errors."),
        click.Option(["-q", "--quiet", "quiet_"], is_flag=True, help="No progress bars or notices."),
    ]


def _param_help(p: Param) -> str:
    unit = f" [{p.unit}]" if p.unit else ""
    default = "adapted to the data" if p.default is None else repr(p.default)
    return f"{p.help}{unit} Default: {default}. Allowed: {p.describe_range()}."


_METAVARS = {float: "NUMBER", int: "INTEGER", str: "TEXT"}


def _param_option(p: Param) -> click.Option:
    if p.type is bool:
        return click.Option([f"{p.option}/--no-{p.option[2:]}", p.name], default=None, help=_param_help(p))
    # parsed as text so that the registry checks the value and says what is allowed in its own words
    metavar = "[" + "|".join(p.choices) + "]" if p.choices else _METAVARS.get(p.type, "TEXT")
    return click.Option([p.option, p.name], default=None, type=str, metavar=metavar, help=_param_help(p))


def _common_options(f):
    """-v and -q, accepted after a sub-command too (``faultmap run FILE -q``)."""
    f = click.option("-v", "--verbose", "verbose_", is_flag=True, help="Show tracebacks for errors.")(f)
    return click.option("-q", "--quiet", "quiet_", is_flag=True, help="No progress bars or notices.")(f)


def _parse_fields(items) -> dict:
    from faultmap.errors import InputError
    from faultmap.registry import DEFAULT_FIELDS

    out = {}
    for it in items:
        if "=" not in it:
            raise InputError(f"--field {it!r}: use NAME=COLUMN, e.g. --field dip=DIP_DEG.")
        k, v = it.split("=", 1)
        if k not in DEFAULT_FIELDS:
            raise InputError(f"--field {it!r}: unknown field '{k}'; valid: {', '.join(DEFAULT_FIELDS)}.")
        out[k] = v
    return out


def tool_command(tool: Tool | BrokenTool, state: _State) -> click.Command:
    """Build the click command of one tool."""
    if isinstance(tool, BrokenTool):

        def broken(**_):
            click.echo(f"error: tool '{tool.name}' failed to load: {tool.error}", err=True)
            sys.exit(2)

        return click.Command(
            tool.name,
            callback=broken,
            help=f"BROKEN: {tool.error}",
            context_settings={"ignore_unknown_options": True, "allow_extra_args": True},
        )

    def callback(**kw):
        from faultmap.engine import make_engine
        from faultmap.runner import run_tools

        # -v / -q are accepted before or after the tool name
        state.verbose = state.verbose or kw.pop("verbose_")
        state.quiet = state.quiet or kw.pop("quiet_")

        engine = None
        try:
            given = {p.name: kw[p.name] for p in tool.params if kw.get(p.name) is not None}
            inputs = {k: kw[k] for k in _input_key_names() if kw.get(k) is not None}
            if kw["workers"] is not None or kw["scheduler"] is not None or kw["threads"] is not None:
                engine = make_engine(workers=kw["workers"], scheduler=kw["scheduler"], threads=kw["threads"])
            res = run_tools(
                [tool.name],
                inputs=inputs,
                out=kw["out"],
                params={tool.name: given},
                figures=kw["figures"],
                overwrite=kw["overwrite"],
                report=not kw["no_report"],
                fields=_parse_fields(kw["fields"]),
                quiet=state.quiet,
                engine=engine,
            )
        except Exception as exc:  # noqa: BLE001 - turned into one line / traceback
            _fail(exc, state)
        finally:
            if engine is not None:
                engine.close()
        _report(res, state)

    summary = tool.summary + ("" if tool.available else " (not available yet)")
    return click.Command(
        tool.name,
        callback=callback,
        params=_input_options() + [_param_option(p) for p in tool.params],
        help=summary + ("\n\n" + tool.description if tool.description else ""),
        short_help=summary,
    )


def _report(res, state: _State) -> None:
    if state.quiet:
        return
    click.echo(f"wrote {res.gpkg} (layers: {', '.join(res.layers)})", err=True)
    if res.figures:
        click.echo(f"wrote {len(res.figures)} figures in {res.figures[0].parent}", err=True)
    if "rupture_zones" in res.layers or "rupture_scenarios" in res.layers:
        click.echo("caution: " + HAZARD_NOTE, err=True)


def build_cli() -> click.Group:
    """Build the ``faultmap`` group with one subcommand per registered tool."""
    state = _State()

    @click.group(context_settings={"help_option_names": ["-h", "--help"]})
    @click.version_option(__version__, prog_name="faultmap")
    @click.option("-v", "--verbose", is_flag=True, help="Show tracebacks for errors.")
    @click.option("-q", "--quiet", is_flag=True, help="No progress bars or notices.")
    def cli(verbose, quiet):
        """Normal-fault traces + DEM in; throw, scaling, extension, strain, rift width and hazard screening out."""
        state.verbose = verbose
        state.quiet = quiet

    tools = load_tools()

    @cli.command("tools")
    @click.argument("name", required=False)
    def tools_cmd(name):
        """List the registered tools, or show one tool's parameters."""
        if name is None:
            for n, t in tools.items():
                flag = "" if t.available else ("  [BROKEN]" if isinstance(t, BrokenTool) else "  [not available yet]")
                click.echo(f"{n:<10} {t.summary}{flag}")
            return
        if name not in tools:
            click.echo(f"error: unknown tool '{name}'; valid: {', '.join(tools)}.", err=True)
            sys.exit(2)
        from faultmap.docgen import tool_text

        click.echo(tool_text(tools[name]))

    @cli.command("run")
    @click.argument("project", type=click.Path(dir_okay=False))
    @click.option("--overwrite", is_flag=True, default=None, help="Replace an existing output.")
    @click.option("--workers", type=int, help="Run on a local Dask cluster with N workers (faultmap[dask]).")
    @click.option("--scheduler", help="Run on an existing Dask scheduler at ADDRESS (faultmap[dask]).")
    @click.option("--threads", type=int, help="In-process threads (default: one per core, at most 4).")
    @_common_options
    def run_cmd(project, overwrite, workers, scheduler, threads, verbose_, quiet_):
        """Run the tools described in a project (TOML) file."""
        from faultmap.project import run_project

        state.verbose, state.quiet = state.verbose or verbose_, state.quiet or quiet_
        engine = {"workers": workers, "scheduler": scheduler, "threads": threads}
        try:
            res = run_project(project, overwrite=overwrite or None, quiet=state.quiet, tools=tools,
                              engine_options=engine)
        except Exception as exc:  # noqa: BLE001
            _fail(exc, state)
        _report(res, state)

    @cli.command("demo")
    @click.argument("folder", required=False, default="faultmap_demo", type=click.Path(file_okay=False))
    @click.option("--scale", type=float, default=1.0, show_default=True,
                  help="Pixel-count scale of the demo DEM (below 1 for a quicker, coarser run).")
    @_common_options
    def demo_cmd(folder, scale, verbose_, quiet_):
        """Write the fictional demo area into FOLDER and run every available tool on it."""
        from faultmap.project import run_project

        state.verbose, state.quiet = state.verbose or verbose_, state.quiet or quiet_

        try:
            from demo_area import write_demo_area

            folder_p = Path(folder)
            paths = write_demo_area(folder_p, scale=scale)
            from faultmap.project import read_project

            Path(read_project(paths["project"], tools=tools)["output"]["gpkg"]).parent.mkdir(exist_ok=True)
            if not state.quiet:
                click.echo(f"demo area written in {folder_p}", err=True)
            res = run_project(paths["project"], overwrite=True, quiet=state.quiet, tools=tools)
        except Exception as exc:  # noqa: BLE001
            _fail(exc, state)
        click.echo(f"results: {res.gpkg}")
        if res.figures:
            click.echo(f"figures: {res.figures[0].parent}")
        _report(res, state)

    for n, t in tools.items():
        if n in cli.commands:
            continue
        cli.add_command(tool_command(t, state))
    return cli


def main(argv=None) -> None:
    """Console entry point."""
    cli = build_cli()
    cli.main(args=argv, prog_name="faultmap")


if __name__ == "__main__":  # pragma: no cover
    main()
