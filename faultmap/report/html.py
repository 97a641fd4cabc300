"""The run report: one self-contained HTML page from what a run produced.

:func:`render_report` takes the layers, the ``run_info`` table and the figures of a run and returns
the page as text: what was run on which inputs, a summary per tool with the key numbers and their
uncertainties, every warning, the figures and the provenance (version, parameters, checksums). The
page is rendered from the Jinja2 template ``templates/report.html.j2`` with autoescaping on; figures
are embedded as ``data:image/png;base64`` addresses and the styles are inline, so the page opens
offline and refers to nothing outside itself.
"""

from __future__ import annotations

import base64
import os
from collections.abc import Iterable, Mapping
from pathlib import Path

from faultmap.report.formatting import TextCleaner, file_name, fmt_num, is_missing
from faultmap.report.sections import TOOL_LAYERS, TOOL_ORDER, build_section, table

__all__ = ["render_report", "run_info_records", "tools_run", "embed_figures", "PNG_SIGNATURE"]

#: The first eight bytes of every PNG file.
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

#: Input kinds that are files (shown by file name, with size and checksum).
_FILE_INPUTS = ("faults", "dem", "transects", "study_area")


def run_info_records(run_info) -> dict[str, str]:
    """Return the ``run_info`` table as an ordered ``{key: value}`` dict of text.

    Parameters
    ----------
    run_info : pandas.DataFrame or mapping or None
        A table with columns ``key`` and ``value`` (as :func:`faultmap.runner.run_tools` writes it),
        or a mapping of key to value.

    Returns
    -------
    dict of str to str
        Missing values become empty text.
    """
    if run_info is None:
        return {}
    if isinstance(run_info, Mapping):
        items = run_info.items()
    else:
        if len(run_info) == 0 or "key" not in run_info.columns or "value" not in run_info.columns:
            return {}
        items = zip(run_info["key"], run_info["value"], strict=True)
    return {str(k): ("" if is_missing(v) else str(v)) for k, v in items if not is_missing(k)}


def tools_run(info: Mapping[str, str], layers: Mapping) -> list[str]:
    """Tools that ran: the ``tools`` entry of ``run_info`` or, without it, those whose layers are present.

    Parameters
    ----------
    info : mapping of str to str
        ``run_info`` records (:func:`run_info_records`).
    layers : mapping of str to DataFrame
        The run's layers.

    Returns
    -------
    list of str
        In run order.
    """
    listed = [t.strip() for t in info.get("tools", "").split(",") if t.strip()]
    if listed:
        return listed
    present = [t for t in TOOL_ORDER if any(layers.get(n) is not None for n in TOOL_LAYERS.get(t, ()))
               or any(k.startswith(t + ".") for k in info)]
    if "prepare" not in present and layers.get("faults") is not None:
        present.insert(0, "prepare")
    return present


def _figure_items(figures) -> list[tuple[str, object]]:
    if figures is None:
        return []
    if isinstance(figures, Mapping):
        return [(str(k), v) for k, v in figures.items()]
    if isinstance(figures, (str, os.PathLike)):
        figures = [figures]
    return [(Path(p).name, p) for p in figures]


def embed_figures(figures) -> tuple[list[dict], list[tuple[str, str]]]:
    """Read figures into ``data:image/png;base64`` addresses.

    Parameters
    ----------
    figures : mapping of str to (bytes or path), or iterable of paths, or None
        Figure name (as written in the figures folder, e.g. ``throw_map.png``) to the PNG bytes or
        the path of the PNG file. A list of paths is named by the file names.

    Returns
    -------
    embedded : list of dict
        ``name``, ``caption`` and ``uri`` of each PNG figure, in the order given.
    skipped : list of (str, str)
        Name and reason of each figure left out (not a PNG, or not readable).
    """
    from markupsafe import Markup

    embedded, skipped = [], []
    for name, src in _figure_items(figures):
        if isinstance(src, (bytes, bytearray, memoryview)):
            data = bytes(src)
        else:
            try:
                data = Path(src).read_bytes()
            except OSError as exc:
                skipped.append((name, f"not readable ({exc.strerror or type(exc).__name__})"))
                continue
        if not data.startswith(PNG_SIGNATURE):
            skipped.append((name, "not a PNG image"))
            continue
        uri = Markup("data:image/png;base64," + base64.b64encode(data).decode("ascii"))
        stem = file_name(name).rsplit(".", 1)[0]
        embedded.append({"name": name, "caption": stem.replace("_", " "), "uri": uri})
    return embedded, skipped


def _figure_tool(name: str, tools: Iterable[str]) -> str | None:
    base = file_name(name)
    for t in sorted(tools, key=len, reverse=True):
        if base.startswith((t + "_", t + ".")) or name.replace("\\", "/").startswith(t + "/"):
            return t
    return None


def _size_text(value: str) -> str:
    try:
        n = float(value)
    except ValueError:
        return value or ""
    for unit, scale in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= scale:
            return f"{fmt_num(n / scale)} {unit}"
    return f"{fmt_num(int(n))} B"


def _inputs(info: Mapping[str, str]) -> tuple[dict, list[tuple[str, str]]]:
    kinds = [k[len("input."):] for k in info if k.startswith("input.") and k.count(".") == 1]
    files = [k for k in kinds if k in _FILE_INPUTS or f"input.{k}.checksum" in info]
    rows = []
    for k in files:
        rows.append([k, file_name(info[f"input.{k}"]), info.get(f"input.{k}_layer", "") or "\u2013",
                     _size_text(info.get(f"input.{k}.size_bytes", "")) or "\u2013",
                     info.get(f"input.{k}.checksum", "") or "\u2013"])
    options = [(k, info[f"input.{k}"]) for k in kinds
               if k not in files and not (k.endswith("_layer") and k[: -len("_layer")] in files)]
    return table("Inputs", ["input", "file", "layer", "size", "checksum"], rows, align="lllrl"), options


def _provenance(info: Mapping[str, str], tools: list[str]) -> dict:
    params = []
    for k, v in info.items():
        if k.startswith("param."):
            tool, _, name = k[len("param."):].partition(".")
            params.append([tool, name, v if v != "" else "auto (from the data)"])
    fields = [[k[len("field."):], v] for k, v in info.items() if k.startswith("field.")]
    facts = [(label, info[key]) for key, label in (
        ("faultmap_version", "faultmap version"), ("version", "version"), ("run_utc", "run at (UTC)"),
        ("engine", "engine"), ("working_crs_name", "working CRS"))
        if info.get(key)]
    if info.get("output"):
        facts.append(("output GeoPackage", file_name(info["output"])))
    known = ("faultmap_version", "version", "run_utc", "engine", "working_crs_name", "working_crs_wkt",
             "output", "tools")
    prefixes = ("param.", "field.", "input.", "notice.", "warning.") + tuple(t + "." for t in tools)
    other = [[k, v] for k, v in info.items() if k not in known and not k.startswith(prefixes)]
    return {
        "facts": facts,
        "wkt": info.get("working_crs_wkt", ""),
        "params": table("Parameters (as resolved for the run)", ["tool", "parameter", "value"], params) if params else None,
        "fields": table("Field names of the traces", ["field", "column"], fields) if fields else None,
        "other": table("Other entries", ["key", "value"], other) if other else None,
    }


def _numbered(info: Mapping[str, str], prefix: str) -> list[str]:
    def order(k: str):
        tail = k[len(prefix):]
        return (0, int(tail), "") if tail.isdigit() else (1, 0, tail)

    return [info[k] for k in sorted((k for k in info if k.startswith(prefix)), key=order)]


def _template_env(cleaner: TextCleaner):
    import jinja2
    from markupsafe import Markup

    def finalize(value):
        if isinstance(value, Markup) or not isinstance(value, str):
            return value
        return cleaner(value)

    return jinja2.Environment(
        loader=jinja2.PackageLoader("faultmap.report", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        finalize=finalize,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def render_report(layers: Mapping, run_info, figures=None, *, title: str) -> str:
    """Render the run report: one self-contained HTML page.

    Parameters
    ----------
    layers : mapping of str to DataFrame or GeoDataFrame
        The run's layers by name (``RunResult.layers``). Layers of tools that did not run are simply
        absent; ``run_info`` among them is ignored (pass it as ``run_info``).
    run_info : pandas.DataFrame or mapping or None
        The ``run_info`` table (columns ``key`` and ``value``), or a mapping of key to value.
        ``None`` takes the ``run_info`` layer of ``layers`` if there is one.
    figures : mapping of str to (bytes or path), or iterable of paths, optional
        The run's figures, by name as written in the figures folder (``throw_map.png``): PNG bytes or
        the path of the PNG file. A figure is shown in the section of the tool its name starts with
        (``throw_``, ``scaling_``, ...), else under "Other figures". Files that are not PNG images
        are listed, not embedded.
    title : str
        Title of the page.

    Returns
    -------
    str
        The page (UTF-8 text). It loads nothing from outside: figures are ``data:`` addresses,
        styles are inline, there are no scripts, fonts or links other than anchors within the page.
        Paths of the run's inputs and output appear as file names only, and any address such as
        ``https://...`` quoted in a message is broken with a zero-width space so that it is not a URL.
    """
    layers = dict(layers or {})
    if run_info is None:
        run_info = layers.get("run_info")
    layers.pop("run_info", None)
    info = run_info_records(run_info)
    tools = tools_run(info, layers)
    cleaner = TextCleaner([v for k, v in info.items() if k.startswith("input.") or k == "output"])

    sections = []
    for t in tools:
        records = {k[len(t) + 1:]: v for k, v in info.items() if k.startswith(t + ".")}
        sections.append(build_section(t, layers, records))
    by_tool = {s["tool"]: s for s in sections}

    warnings = []
    for text in _numbered(info, "warning."):
        tool = text.split(":", 1)[0].strip() if ":" in text else ""
        anchor = by_tool[tool]["id"] if tool in by_tool else ""
        warnings.append({"tool": tool if tool in by_tool else "", "text": text, "anchor": anchor})
        if tool in by_tool:
            by_tool[tool]["warnings"].append(text)

    embedded, skipped = embed_figures(figures)
    other_figures = []
    for fig in embedded:
        tool = _figure_tool(fig["name"], by_tool)
        (by_tool[tool]["figures"] if tool else other_figures).append(fig)

    inputs, input_options = _inputs(info)
    glance = []
    for s in sections:
        glance.append({"tool": s["tool"], "title": s["title"], "anchor": s["id"],
                       "summary": "; ".join(f"{label}: {value}" for label, value in s["facts"][:2]),
                       "n_warnings": len(s["warnings"])})
    context = {
        "title": title,
        "tools": tools,
        "glance": glance,
        "inputs": inputs if inputs["rows"] else None,
        "input_options": input_options,
        "warnings": warnings,
        "sections": sections,
        "other_figures": other_figures,
        "skipped_figures": skipped,
        "notices": _numbered(info, "notice."),
        "provenance": _provenance(info, tools),
        "run_utc": info.get("run_utc", ""),
        "version": info.get("faultmap_version", info.get("version", "")),
    }
    return _template_env(cleaner).get_template("report.html.j2").render(**context)
