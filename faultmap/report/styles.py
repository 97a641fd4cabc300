"""Layer styles a desktop GIS opens: OGC Styled Layer Descriptor 1.1 / Symbology Encoding 1.1.

:func:`sld_for_layer` returns one SLD document (text) for one spatial layer of a run, coloured as
the figures colour it: faults by maximum throw in graduated classes, throw stations by status and
throw, transects by extension, strain cells by the largest principal strain, rupture scenarios by
magnitude, rupture zones filled translucent, and a single symbol for the other layers. Graduated
classes are quantiles of the layer's own values. A rule names only fields that exist in the layer;
without the field the layer gets a single-symbol style. Features whose value is empty fall to an
``se:ElseFilter`` rule drawn in grey.

The documents use the SLD 1.1.0 namespace for the outer elements (``StyledLayerDescriptor``,
``NamedLayer``, ``UserStyle``), the Symbology Encoding namespace (``se:``) for names, rules and
symbolizers, and the OGC Filter namespace (``ogc:``) for filters.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from xml.sax.saxutils import escape, quoteattr

from faultmap.report.formatting import fmt_num, is_missing

__all__ = ["SLD_NS", "SE_NS", "OGC_NS", "sld_for_layer", "sld_for_layers", "quantile_breaks"]

#: Namespace of Styled Layer Descriptor 1.1.
SLD_NS = "http://www.opengis.net/sld"
#: Namespace of Symbology Encoding 1.1.
SE_NS = "http://www.opengis.net/se"
#: Namespace of OGC Filter Encoding.
OGC_NS = "http://www.opengis.net/ogc"

# Sequential ramps, light to dark (five classes; fewer classes take evenly spaced colours).
_RAMP_THROW = ("#f6e3a1", "#efb25c", "#dc7440", "#ad3a35", "#5f1a36")
_RAMP_EXTENSION = ("#d6ecef", "#96cbd3", "#539fb4", "#2b6d91", "#173d66")
_RAMP_STRAIN = ("#eeead0", "#c4d8a4", "#86bb8a", "#4b9478", "#1f6460")
_RAMP_MAGNITUDE = ("#efd3e4", "#d69cc2", "#b9629f", "#87307c", "#4f1650")
# Categories (status, class).
_CATEGORIES = ("#2e7d5b", "#c98a2b", "#7d5aa6", "#b64a4a", "#4a76b4", "#7c7c7c", "#3c9aa0", "#a0683c")
_NO_VALUE = "#9a9a9a"
_MAX_CATEGORIES = 12
_N_CLASSES = 5


class _El:
    """A small XML element: tag (with prefix), attributes, text and children."""

    __slots__ = ("tag", "attrs", "text", "children")

    def __init__(self, tag: str, *children: _El, text: str | None = None, **attrs: str):
        self.tag, self.attrs, self.text = tag, attrs, text
        self.children = [c for c in children if c is not None]

    def lines(self, depth: int = 0) -> list[str]:
        pad = "  " * depth
        attrs = "".join(f" {k.replace('__', ':')}={quoteattr(str(v))}" for k, v in self.attrs.items())
        if self.text is not None:
            return [f"{pad}<{self.tag}{attrs}>{escape(self.text)}</{self.tag}>"]
        if not self.children:
            return [f"{pad}<{self.tag}{attrs}/>"]
        out = [f"{pad}<{self.tag}{attrs}>"]
        for c in self.children:
            out.extend(c.lines(depth + 1))
        out.append(f"{pad}</{self.tag}>")
        return out


def _svg(name: str, value) -> _El:
    return _El("se:SvgParameter", text=str(value), name=name)


def _stroke(colour: str, width: float, *, dash: str | None = None, opacity: float | None = None) -> _El:
    params = [_svg("stroke", colour), _svg("stroke-width", _lit(width))]
    if opacity is not None:
        params.append(_svg("stroke-opacity", _lit(opacity)))
    params += [_svg("stroke-linejoin", "round"), _svg("stroke-linecap", "round")]
    if dash:
        params.append(_svg("stroke-dasharray", dash))
    return _El("se:Stroke", *params)


def _line(colour: str, width: float, *, dash: str | None = None) -> _El:
    return _El("se:LineSymbolizer", _stroke(colour, width, dash=dash))


def _polygon(fill: str, opacity: float, stroke: str, width: float = 0.6) -> _El:
    return _El("se:PolygonSymbolizer",
               _El("se:Fill", _svg("fill", fill), _svg("fill-opacity", _lit(opacity))),
               _stroke(stroke, width))


def _point(fill: str, size: float, *, mark: str = "circle", stroke: str = "#2b2b2b",
           stroke_width: float = 0.5) -> _El:
    return _El("se:PointSymbolizer", _El("se:Graphic", _El(
        "se:Mark", _El("se:WellKnownName", text=mark), _El("se:Fill", _svg("fill", fill)),
        _stroke(stroke, stroke_width)), _El("se:Size", text=_lit(size))))


def _lit(x) -> str:
    """Write a number as a plain decimal literal (no exponent), at most 6 significant digits."""
    if isinstance(x, str):
        return x
    v = float(x)
    if v == 0 or not math.isfinite(v):
        return "0"
    digits = max(0, 5 - math.floor(math.log10(abs(v))))
    text = f"{v:.{digits}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def _prop(op: str, field: str, value) -> _El:
    return _El(f"ogc:{op}", _El("ogc:PropertyName", text=field), _El("ogc:Literal", text=_lit(value)))


def _filter(*conds: _El) -> _El:
    conds = [c for c in conds if c is not None]
    return _El("ogc:Filter", conds[0] if len(conds) == 1 else _El("ogc:And", *conds))


def _range(field: str, lo: float | None, hi: float | None) -> list[_El]:
    out = []
    if lo is not None:
        out.append(_prop("PropertyIsGreaterThanOrEqualTo", field, lo))
    if hi is not None:
        out.append(_prop("PropertyIsLessThan", field, hi))
    return out


def _rule(name: str, title: str, symbolizer: _El, *conds: _El, else_rule: bool = False) -> _El:
    flt = _El("se:ElseFilter") if else_rule else (_filter(*conds) if conds else None)
    return _El("se:Rule", _El("se:Name", text=name), _El("se:Description", _El("se:Title", text=title)),
               flt, symbolizer)


def _numbers(layer, field: str) -> list[float]:
    out = []
    for x in layer[field].tolist():
        try:
            v = float(x)
        except (TypeError, ValueError):
            continue
        if math.isfinite(v):
            out.append(v)
    return out


def quantile_breaks(values: Sequence[float], n_classes: int = _N_CLASSES) -> list[float]:
    """Inner class breaks at quantiles of ``values``, rounded to 6 significant digits.

    Parameters
    ----------
    values : sequence of float
        Finite values.
    n_classes : int
        Number of classes wanted; fewer when the values have fewer distinct levels.

    Returns
    -------
    list of float
        Increasing breaks strictly above the smallest value (``k`` breaks make ``k + 1`` classes);
        empty when the values have fewer than two distinct levels.
    """
    vals = sorted(values)
    distinct = len(set(vals))
    if distinct < 2:
        return []
    k = min(n_classes, distinct)
    n = len(vals)
    breaks = []
    for i in range(1, k):
        pos = i / k * (n - 1)  # linear interpolation between order statistics
        lo = math.floor(pos)
        q = vals[lo] + (vals[min(lo + 1, n - 1)] - vals[lo]) * (pos - lo)
        b = float(_lit(q))
        if b > vals[0] and (not breaks or b > breaks[-1]):
            breaks.append(b)
    return breaks


def _ramp(ramp: Sequence[str], k: int) -> list[str]:
    if k == 1:
        return [ramp[len(ramp) // 2]]
    return [ramp[round(i * (len(ramp) - 1) / (k - 1))] for i in range(k)]


def _graduated(layer, field: str, ramp: Sequence[str], make, *, label=fmt_num, unit: str = "", prefix: str = "",
               extra: Sequence[_El] = ()) -> list[_El] | None:
    """Rules of graduated classes of ``field`` (None when the field is absent or has one level)."""
    if field not in layer.columns:
        return None
    vals = _numbers(layer, field)
    breaks = quantile_breaks(vals)
    if not breaks:
        return None
    edges = [None, *breaks, None]
    shown = [min(vals), *breaks, max(vals)]
    colours = _ramp(ramp, len(edges) - 1)
    rules = []
    for i, colour in enumerate(colours):
        title = f"{prefix}{label(shown[i])} \u2013 {label(shown[i + 1])}{unit}"
        rules.append(_rule(f"{field} class {i + 1}", title, make(colour, i, len(colours)), *extra,
                           *_range(field, edges[i], edges[i + 1])))
    return rules


def _categories(layer, field: str) -> list[str] | None:
    if field not in layer.columns:
        return None
    seen = []
    for x in layer[field].tolist():
        if not is_missing(x) and str(x) not in seen:
            seen.append(str(x))
    return seen if 0 < len(seen) <= _MAX_CATEGORIES else None


def _categorical(layer, field: str, make, *, first: Sequence[str] = (), skip: Sequence[str] = ()) -> list[_El] | None:
    cats = _categories(layer, field)
    if cats is None:
        return None
    cats = [c for c in first if c in cats] + [c for c in cats if c not in first]
    colours = dict(zip(cats, _CATEGORIES * 2, strict=False))
    cats = [c for c in cats if c not in skip]
    return [_rule(f"{field} {c}", f"{field}: {c}", make(colours[c], c),
                  _El("ogc:PropertyIsEqualTo", _El("ogc:PropertyName", text=field), _El("ogc:Literal", text=c)))
            for c in cats] or None


def _width(i: int, k: int, lo: float, hi: float) -> float:
    return lo if k <= 1 else lo + (hi - lo) * i / (k - 1)


def _pct(v: float) -> str:
    return fmt_num(100.0 * v)


def _faults(layer) -> tuple[list[_El], str]:
    rules = _graduated(layer, "max_throw_m", _RAMP_THROW, lambda c, i, k: _line(c, _width(i, k, 1.0, 3.2)), unit=" m")
    if rules is None:
        return [_rule("faults", "fault trace", _line("#3a3a3a", 1.2))], "single symbol"
    return rules + [_rule("no throw", "no maximum throw", _line(_NO_VALUE, 0.8, dash="4 3"), else_rule=True)], \
        "graduated by max_throw_m"


def _stations(layer) -> tuple[list[_El], str]:
    has_status = "status" in layer.columns
    rules, how = None, ""
    if "throw_m" in layer.columns:
        ok = [_El("ogc:PropertyIsEqualTo", _El("ogc:PropertyName", text="status"), _El("ogc:Literal", text="ok"))]
        subset = layer[layer["status"].astype(str) == "ok"] if has_status else layer
        rules = _graduated(subset, "throw_m", _RAMP_THROW, lambda c, i, k: _point(c, _width(i, k, 4.0, 8.0)),
                           unit=" m", extra=ok if has_status else ())
        how = "graduated by throw_m" + (" (status ok)" if has_status else "") if rules else ""
    if has_status:
        skip = ("ok",) if rules else ()
        cats = _categorical(layer, "status", lambda c, v: _point(c, 5.0, mark="circle", stroke="#2b2b2b") if v == "ok"
                            else _point(c, 5.0, mark="x", stroke=c, stroke_width=1.0), first=("ok",), skip=skip)
        if cats:
            rules = (rules or []) + cats
            how = f"{how}, other statuses by status" if how else "by status"
    if not rules:
        return [_rule("stations", "throw station", _point("#4a4a4a", 4.0))], "single symbol"
    return rules + [_rule("other stations", "no throw", _point(_NO_VALUE, 3.0), else_rule=True)], how


def _simple(kind: str, colour: str, **kw):
    def build(layer) -> tuple[list[_El], str]:
        sym = {"line": lambda: _line(colour, kw.get("width", 1.2), dash=kw.get("dash")),
               "point": lambda: _point(colour, kw.get("size", 6.0), mark=kw.get("mark", "circle")),
               "polygon": lambda: _polygon(colour, kw.get("opacity", 0.35), kw.get("stroke", colour))}[kind]()
        return [_rule(kw.get("name", "features"), kw.get("title", "feature"), sym)], "single symbol"

    return build


def _graduated_or(field: str, ramp, make, fallback, *, label=fmt_num, unit: str = "", prefix: str = "", else_sym=None):
    def build(layer) -> tuple[list[_El], str]:
        rules = _graduated(layer, field, ramp, make, label=label, unit=unit, prefix=prefix)
        if rules is None:
            return fallback(layer)
        if else_sym is not None:
            rules.append(_rule("no value", f"no {field}", else_sym, else_rule=True))
        return rules, f"graduated by {field}"

    return build


def _sections(layer) -> tuple[list[_El], str]:
    rules = _categorical(layer, "class", lambda c, v: _line(c, 1.0, dash="5 3"))
    if rules is None:
        return _simple("line", "#7f7f7f", width=0.8, dash="5 3", name="sections", title="section across the axis")(layer)
    return rules + [_rule("no class", "no class", _line(_NO_VALUE, 0.6, dash="2 3"), else_rule=True)], "by class"


_BUILDERS = {
    "faults": _faults,
    "throw_stations": _stations,
    "linkage_zones": _simple("point", "#6a3d9a", size=8.0, mark="triangle", name="linkage zones",
                             title="linkage zone (throw deficit)"),
    "transects": _graduated_or(
        "extension", _RAMP_EXTENSION, lambda c, i, k: _line(c, 2.4), _simple("line", "#2b6d91", width=1.6, dash="8 4",
                                                                               name="transects", title="transect"),
        label=_pct, unit=" %", else_sym=_line(_NO_VALUE, 1.2, dash="8 4")),
    "transect_crossings": _simple("point", "#173d66", size=5.0, mark="square", name="crossings",
                                  title="fault crossing a transect"),
    "strain_cells": _graduated_or(
        "e1", _RAMP_STRAIN, lambda c, i, k: _polygon(c, 0.7, "#5a5a5a", 0.3),
        _simple("polygon", "#86bb8a", opacity=0.5, stroke="#5a5a5a", name="cells", title="strain cell"),
        else_sym=_polygon(_NO_VALUE, 0.3, "#5a5a5a", 0.3)),
    "rift_axis": _simple("line", "#a3122f", width=2.6, name="rift axis", title="rift axis"),
    "rift_sections": _sections,
    "rupture_scenarios": _graduated_or(
        "mag_preferred", _RAMP_MAGNITUDE, lambda c, i, k: _line(c, _width(i, k, 2.0, 3.6)),
        _simple("line", "#87307c", width=2.4, name="scenarios", title="rupture scenario"),
        prefix="Mw ", else_sym=_line(_NO_VALUE, 1.6)),
    "rupture_zones": _simple("polygon", "#e07b39", opacity=0.35, stroke="#a33c14", name="rupture zones",
                             title="surface-rupture zone (screening)"),
}

_KIND_BY_NAME = {"faults": "line", "throw_stations": "point", "linkage_zones": "point", "transects": "line",
                 "transect_crossings": "point", "strain_cells": "polygon", "rift_axis": "line",
                 "rift_sections": "line", "rupture_scenarios": "line", "rupture_zones": "polygon"}

_GENERIC = {"point": ("#4a4a4a", {"size": 5.0}), "line": ("#3a3a3a", {"width": 1.2}),
            "polygon": ("#8a8a8a", {"opacity": 0.35, "stroke": "#4a4a4a"})}


def _geometry_kind(name: str, layer) -> str | None:
    try:
        types = layer.geometry.geom_type
    except (AttributeError, KeyError, ValueError):
        return None
    for t in types.tolist():
        if isinstance(t, str):
            t = t.replace("Multi", "").replace("LinearRing", "LineString")
            return {"Point": "point", "LineString": "line", "Polygon": "polygon"}.get(t)
    return _KIND_BY_NAME.get(name)


def sld_for_layer(name: str, layer) -> str | None:
    """Write the SLD 1.1 document that styles one layer of a run.

    Parameters
    ----------
    name : str
        Layer name as written in the GeoPackage (``faults``, ``throw_stations``, ...); it is the
        ``NamedLayer`` name, so a desktop GIS matches the style to the layer. A name faultmap does not
        know gets a single-symbol style for its geometry type.
    layer : geopandas.GeoDataFrame
        The layer; its columns decide which rules are written (a rule names only existing fields)
        and its values set the graduated classes (quantiles).

    Returns
    -------
    str or None
        The document (UTF-8 XML text), or None for a layer without geometry (``run_info``,
        ``scaling``, ...) or with no geometry type to style.
    """
    if layer is None:
        return None
    kind = _geometry_kind(name, layer)
    if kind is None:
        return None
    builder = _BUILDERS.get(name)
    if builder is None or _KIND_BY_NAME.get(name) != kind:
        colour, kw = _GENERIC[kind]
        builder = _simple(kind, colour, name=name, title=name, **kw)
    rules, how = builder(layer)
    doc = _El(
        "StyledLayerDescriptor",
        _El("NamedLayer", _El("se:Name", text=name), _El("UserStyle",
            _El("se:Name", text=f"{name} (faultmap)"),
            _El("se:Description", _El("se:Title", text=f"faultmap {name}"),
                _El("se:Abstract", text=f"{name}: {how}; classes from the layer's own values.")),
            _El("se:FeatureTypeStyle", *rules))),
        version="1.1.0", xmlns=SLD_NS, xmlns__se=SE_NS, xmlns__ogc=OGC_NS,
    )
    return "\n".join(['<?xml version="1.0" encoding="UTF-8"?>', *doc.lines()]) + "\n"


def sld_for_layers(layers: Mapping) -> dict[str, str]:
    """SLD documents of every spatial layer of a run.

    Parameters
    ----------
    layers : mapping of str to DataFrame or GeoDataFrame
        The run's layers by name (``RunResult.layers``); tables without geometry are skipped.

    Returns
    -------
    dict of str to str
        Layer name to SLD text, in the order of ``layers``.
    """
    out = {}
    for name, layer in layers.items():
        doc = sld_for_layer(name, layer)
        if doc is not None:
            out[name] = doc
    return out
