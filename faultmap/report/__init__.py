"""The run report and the layer styles (``faultmap.report``).

A report a person reads, and styles a desktop GIS opens: :func:`render_report` turns what a run
produced (its layers, its ``run_info`` table and its figures) into one self-contained HTML page, and
:func:`sld_for_layer` / :func:`sld_for_layers` give an OGC Styled Layer Descriptor 1.1 document per
spatial layer. Pure functions: they read none of the run's inputs and write no file.

Each public name below is imported from its module on first use, so ``import faultmap.report``
stays light (no pandas, Jinja2, geopandas or matplotlib until a function is called).
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "render_report": "html",
    "run_info_records": "html",
    "tools_run": "html",
    "embed_figures": "html",
    "PNG_SIGNATURE": "html",
    "sld_for_layer": "styles",
    "sld_for_layers": "styles",
    "SLD_NS": "styles",
    "SE_NS": "styles",
    "OGC_NS": "styles",
    "fmt_num": "formatting",
    "fmt_pm": "formatting",
    "fmt_range": "formatting",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
