"""One report section per tool that ran: its key numbers, with their uncertainties, as plain data.

Each builder takes the run's layers (name -> DataFrame or GeoDataFrame) and the ``run_info``
records of its tool (key without the tool prefix -> text) and returns a :func:`section` dict that
the page template lays out. A layer that is missing leaves its table out; nothing here raises for
a tool that did not write everything.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping

from faultmap.report.formatting import DASH, fmt_num, fmt_percent, fmt_pm, fmt_range, is_missing

__all__ = ["TOOL_ORDER", "TOOL_TITLES", "TOOL_LAYERS", "section", "table", "build_section"]

#: The tools of faultmap in run order.
TOOL_ORDER = ("prepare", "throw", "scaling", "transect", "strain", "width", "hazard")

#: Heading of each tool's section.
TOOL_TITLES = {
    "prepare": "Trace preparation",
    "throw": "Throw along the faults",
    "scaling": "Displacement-length scaling and size distributions",
    "transect": "Extension on transects",
    "strain": "Strain from the faults",
    "width": "Rift width and class",
    "hazard": "Hazard screening",
}

#: Layers each tool writes that only it writes (used to tell which tools ran when run_info does not say).
TOOL_LAYERS = {
    "throw": ("throw_stations", "linkage_zones"),
    "scaling": ("scaling",),
    "transect": ("transect_crossings",),
    "strain": ("strain_cells",),
    "width": ("rift_summary", "rift_sections", "rift_axis", "rift_swath", "subsidence"),
    "hazard": ("rupture_scenarios", "rupture_zones"),
}

_TOP_N = 10

#: Most rows a per-item table of the page shows (scenarios, screened faults); the rest are in the
#: GeoPackage layer the note names. Keeps the page readable and its size bounded at any number of faults.
_MAX_TABLE_ROWS = 50


def _largest(df, column: str, layer: str):
    """Return the ``_MAX_TABLE_ROWS`` rows of ``df`` with the largest ``column`` and a note on the rest."""
    if len(df) <= _MAX_TABLE_ROWS:
        return df, ""
    key = _finite(df[column]) if column in df.columns else None
    if key is None:
        top = df.head(_MAX_TABLE_ROWS)
    else:
        top = df.assign(_key=key).sort_values("_key", ascending=False, na_position="last").head(_MAX_TABLE_ROWS)
        top = top.drop(columns="_key")
    note = (f"The {_MAX_TABLE_ROWS} of {len(df)} with the largest {column}; all are in the GeoPackage "
            f"layer '{layer}'.")
    return top, note


def table(caption: str, headers: list[str], rows: list[list[str]], *, align: str = "", note: str = "") -> dict:
    """Make a table for the page.

    Parameters
    ----------
    caption : str
        Title above the table.
    headers : list of str
        Column headers (with units).
    rows : list of list of str
        Cells, already formatted.
    align : str
        One letter per column, ``l`` or ``r`` (numbers); missing letters mean ``l``.
    note : str
        A line under the table.

    Returns
    -------
    dict
    """
    align = (align + "l" * len(headers))[: len(headers)]
    return {"caption": caption, "headers": headers, "rows": rows, "align": list(align), "note": note}


def section(tool: str, title: str) -> dict:
    """Make an empty section: ``facts`` (label, value) pairs, ``paragraphs``, ``tables``, ``figures``, ``records``."""
    return {"id": f"tool-{tool}", "tool": tool, "title": title, "caution": "", "facts": [],
            "paragraphs": [], "tables": [], "figures": [], "records": [], "warnings": []}


def _layer(layers: Mapping, name: str):
    df = layers.get(name)
    return None if df is None or len(df.columns) == 0 else df


def _has(df, *cols: str) -> bool:
    return df is not None and all(c in df.columns for c in cols)


def _v(row, col: str):
    return row[col] if col in row.index else None


def _count_text(values) -> str:
    counts = values.astype(str).value_counts()
    return ", ".join(f"{k} {v}" for k, v in counts.items())


def _finite(series):
    import pandas as pd

    s = pd.to_numeric(series, errors="coerce")
    return s[s.map(lambda x: x == x and math.isfinite(x))]


def _truthy(series):
    return series.map(lambda x: (not is_missing(x)) and str(x).strip().lower() in ("true", "1", "yes"))


def _prepare(s: dict, layers: Mapping, rec: Mapping) -> None:
    faults = _layer(layers, "faults")
    n = rec.get("n_traces") or (len(faults) if faults is not None else None)
    if n is not None:
        s["facts"].append(("traces", fmt_num(int(float(n)))))
    if _has(faults, "censored"):
        s["facts"].append(("traces censored by the map edge or a void", fmt_num(int(_truthy(faults["censored"]).sum()))))
    if _has(faults, "dip_source"):
        s["facts"].append(("traces with the default dip", fmt_num(int((faults["dip_source"].astype(str) == "default").sum()))))
    if _has(faults, "length_m"):
        lengths = _finite(faults["length_m"])
        if len(lengths):
            s["facts"].append(("trace length, median [min, max] (km)",
                               fmt_range(lengths.median() / 1e3, lengths.min() / 1e3, lengths.max() / 1e3)))
    if rec.get("systems_by_size"):
        s["facts"].append(("linked systems by number of segments (segments: systems)", rec["systems_by_size"]))


def _throw(s: dict, layers: Mapping, rec: Mapping) -> None:
    faults = _layer(layers, "faults")
    stations = _layer(layers, "throw_stations")
    links = _layer(layers, "linkage_zones")
    if faults is not None:
        s["facts"].append(("faults", fmt_num(len(faults))))
    if _has(faults, "max_throw_m"):
        s["facts"].append(("faults with a measured maximum throw", fmt_num(int(_finite(faults["max_throw_m"]).size))))
    if stations is not None:
        s["facts"].append(("stations", fmt_num(len(stations))))
        if _has(stations, "status"):
            s["facts"].append(("stations by status", _count_text(stations["status"])))
    elif rec.get("station_status"):
        s["facts"].append(("stations by status", rec["station_status"]))
    if links is not None:
        sig = f" ({int(_truthy(links['significant']).sum())} significant)" if _has(links, "significant") else ""
        s["facts"].append(("linkage zones (throw deficits between segments)", fmt_num(len(links)) + sig))
    if not _has(faults, "max_throw_m"):
        return
    df = faults.assign(_mt=_finite(faults["max_throw_m"])).dropna(subset=["_mt"])
    df = df.sort_values("_mt", ascending=False).head(_TOP_N)
    cols = [("fault_id", "fault", "r", lambda r: fmt_num(_v(r, "fault_id"))),
            ("name", "name", "l", lambda r: fmt_num(_v(r, "name"))),
            ("length_m", "length (km)", "r", lambda r: fmt_num(_v(r, "length_m") / 1e3)),
            ("max_throw_m", "max throw \u00b1 1\u03c3 (m)", "r", lambda r: fmt_pm(r["_mt"], _v(r, "max_throw_err_m"))),
            ("n_stations_ok", "stations ok / all", "r",
             lambda r: f"{fmt_num(_v(r, 'n_stations_ok'))} / {fmt_num(_v(r, 'n_stations'))}"),
            ("system_id", "linked system", "r", lambda r: fmt_num(_v(r, "system_id")))]
    _add_table(s, f"Largest maximum throws ({len(df)} of {len(faults)} faults)", df, cols)
    _degradation(s, faults, rec)


def _degradation(s: dict, faults, rec: Mapping) -> None:
    """Scarp degradation (kappa t, faultmap.scarps): counts, the freshest and most degraded, ages when given."""
    if not _has(faults, "kappa_t_flag", "kappa_t_m2"):
        return
    s["facts"].append(("faults by scarp degradation (kappa t)", _count_text(faults["kappa_t_flag"])))
    s["paragraphs"].append(
        "Scarp degradation: every station's profile is also fitted with the diffusion form of a degraded scarp "
        "(Hanks et al. 1984), giving kappa t (diffusivity \u00d7 age, m\u00b2); rank 1 is the freshest. "
        "'upper_bound' marks scarps narrower than the pixels resolve (fresher than the bound). Ages "
        "(morph_age_ka) are morphologic, only as good as the regional kappa used."
    )
    if rec.get("kappa_m2_kyr_used"):
        s["facts"].append(("kappa used for morphologic ages (m\u00b2/kyr)", rec["kappa_m2_kyr_used"]))
    df = faults.assign(_kt=_finite(faults["kappa_t_m2"])).dropna(subset=["_kt"]).sort_values("_kt")
    if len(df) > _TOP_N:
        df = df.iloc[list(range(_TOP_N // 2)) + list(range(len(df) - _TOP_N // 2, len(df)))]
    cols = [("fault_id", "fault", "r", lambda r: fmt_num(_v(r, "fault_id"))),
            ("kappa_t_rank", "rank (1 = freshest)", "r", lambda r: fmt_num(_v(r, "kappa_t_rank"))),
            ("kappa_t_m2", "\u03bat \u00b1 1\u03c3 (m\u00b2)", "r", lambda r: fmt_pm(r["_kt"], _v(r, "kappa_t_err_m2"))),
            ("kappa_t_n", "stations", "r", lambda r: fmt_num(_v(r, "kappa_t_n"))),
            ("max_throw_m", "max throw (m)", "r", lambda r: fmt_num(_v(r, "max_throw_m"))),
            ("morph_age_ka", "morphologic age [16-84 %] (ka)", "r", lambda r: fmt_range(
                _v(r, "morph_age_ka"), _v(r, "morph_age_p16_ka"), _v(r, "morph_age_p84_ka")))]
    _add_table(s, f"Scarp degradation, freshest and most degraded ({len(df)} faults with a measured kappa t)",
               df, cols)


def _add_table(s: dict, caption: str, df, cols: list[tuple[str, str, str, Callable]], note: str = "") -> None:
    cols = [c for c in cols if c[0] in df.columns]
    if not cols or len(df) == 0:
        return
    rows = [[fn(r) for _, _, _, fn in cols] for _, r in df.iterrows()]
    s["tables"].append(table(caption, [c[1] for c in cols], rows, align="".join(c[2] for c in cols), note=note))


def _scaling(s: dict, layers: Mapping, rec: Mapping) -> None:
    sc = _layer(layers, "scaling")
    if not _has(sc, "model"):
        for key, label in (("exponent_ols", "exponent, OLS"), ("exponent_rma", "exponent, RMA"),
                           ("exponent_york", "exponent, York")):
            if key in rec:
                s["facts"].append((label, rec[key]))
        return
    model = sc["model"].astype(str)
    fits = sc[~model.isin(["power_law", "reference"])]
    level = _finite(sc["ci_level"]) if "ci_level" in sc.columns else []
    ci = f"{fmt_num(100 * level.iloc[0], 2)} %" if len(level) else "CI"
    if _has(fits, "n_faults") and len(fits):
        s["facts"].append(("faults in the displacement-length fits", fmt_num(fits["n_faults"].iloc[0])))
    if _has(fits, "exponent"):
        for _, r in fits.iterrows():
            s["facts"].append((f"exponent n, {_model_name(r['model'])} [{ci}]",
                               fmt_range(r["exponent"], _v(r, "exponent_lo"), _v(r, "exponent_hi"))))
    _add_table(s, "Displacement-length fits, D = \u03b3 L^n", fits, [
        ("model", "model", "l", lambda r: _model_name(r["model"])),
        ("variable", "displacement", "l", lambda r: fmt_num(_v(r, "variable"))),
        ("unit", "unit", "l", lambda r: fmt_num(_v(r, "unit"))),
        ("n_faults", "n", "r", lambda r: fmt_num(_v(r, "n_faults"))),
        ("exponent", f"exponent n [{ci}]", "r",
         lambda r: fmt_range(r["exponent"], _v(r, "exponent_lo"), _v(r, "exponent_hi"))),
        ("gamma", f"\u03b3 [{ci}]", "r", lambda r: fmt_range(r["gamma"], _v(r, "gamma_lo"), _v(r, "gamma_hi"))),
        ("r2", "R\u00b2", "r", lambda r: fmt_num(_v(r, "r2"))),
        ("mswd", "MSWD", "r", lambda r: fmt_num(_v(r, "mswd"))),
        ("reason", "note", "l", lambda r: fmt_num(_v(r, "reason")) if not is_missing(_v(r, "reason")) else ""),
    ], note="D and L in metres; the interval is the bootstrap (or York) interval at the level shown.")
    pl = sc[model == "power_law"]
    _add_table(s, "Size distributions: power-law tails, N(\u2265x) ~ x^(1-\u03b1)", pl, [
        ("variable", "quantity", "l", lambda r: fmt_num(_v(r, "variable"))),
        ("n_faults", "n", "r", lambda r: fmt_num(_v(r, "n_faults"))),
        ("alpha", "\u03b1 \u00b1 1 s.e.", "r", lambda r: fmt_pm(r["alpha"], _v(r, "se"))),
        ("x_min", "x_min (m)", "r", lambda r: fmt_num(_v(r, "x_min"))),
        ("n_tail", "n in tail", "r", lambda r: fmt_num(_v(r, "n_tail"))),
        ("gof_p", "goodness-of-fit p", "r", lambda r: fmt_pm(r["gof_p"], _v(r, "gof_p_se"))),
        ("p_exponential", "p vs exponential", "r", lambda r: fmt_num(_v(r, "p_exponential"))),
        ("p_lognormal", "p vs lognormal", "r", lambda r: fmt_num(_v(r, "p_lognormal"))),
        ("detection_note", "detection", "l", lambda r: fmt_num(_v(r, "detection_note"))),
    ])
    ref = sc[model == "reference"]
    _add_table(s, "Comparison with published ranges", ref, [
        ("variable", "quantity", "l", lambda r: fmt_num(_v(r, "variable"))),
        ("compared", "compared", "l", lambda r: fmt_num(_v(r, "compared"))),
        ("source", "source", "l", lambda r: fmt_num(_v(r, "source"))),
        ("ref_lo", "published range", "r", lambda r: _span(_v(r, "ref_lo"), _v(r, "ref_hi"))),
        ("value", "value [interval]", "r", lambda r: fmt_range(r["value"], _v(r, "value_lo"), _v(r, "value_hi"))),
        ("consistent", "consistent", "l", lambda r: _yes_no(_v(r, "consistent"))),
    ])


def _model_name(name) -> str:
    name = str(name)
    return {"ols": "OLS", "rma": "RMA", "york": "York"}.get(name, name)


def _span(lo, hi) -> str:
    if is_missing(hi) or (not is_missing(lo) and _num(lo) == _num(hi)):
        return fmt_num(lo)
    return f"{fmt_num(lo)}\u2013{fmt_num(hi)}"


def _yes_no(x) -> str:
    if is_missing(x):
        return DASH
    return {"true": "yes", "1": "yes", "false": "no", "0": "no"}.get(str(x).strip().lower(), str(x))


def _transect(s: dict, layers: Mapping, rec: Mapping) -> None:
    tr = _layer(layers, "transects")
    for key, label, f in (("median_extension", "median extension (%)", fmt_percent),
                          ("median_beta", "median stretching factor \u03b2", lambda v: fmt_num(v, 5)),
                          ("fraction_below_detection", "share of the extension below detection (model, %)", fmt_percent),
                          ("median_extension_corrected", "median extension with the sub-resolution correction (%, rough upper estimate)",
                           fmt_percent)):
        if key in rec:
            s["facts"].append((label, f(_num(rec[key]))))
    if not _has(tr, "extension"):
        return
    _add_table(s, "Extension per transect (central value [16th, 84th percentile])", tr, [
        ("transect_id", "transect", "r", lambda r: fmt_num(_v(r, "transect_id"))),
        ("name", "name", "l", lambda r: fmt_num(_v(r, "name"))),
        ("n_faults", "faults", "r", lambda r: fmt_num(_v(r, "n_faults"))),
        ("sum_heave_m", "\u03a3 heave \u00b1 1\u03c3 (m)", "r", lambda r: fmt_pm(r["sum_heave_m"], _v(r, "sum_heave_err_m"))),
        ("extension", "extension (%)", "r", lambda r: fmt_range(*(_pct(_v(r, c)) for c in ("extension", "extension_p16", "extension_p84")))),
        ("beta", "\u03b2", "r", lambda r: fmt_range(_v(r, "beta"), _v(r, "beta_p16"), _v(r, "beta_p84"), sig=5)),
        ("extension_corrected", "corrected extension (%)", "r", lambda r: fmt_percent(_v(r, "extension_corrected"))),
        ("status", "status", "l", lambda r: fmt_num(_v(r, "status"))),
    ], note="The corrected extension adds faults below detection from the size distribution: a rough upper estimate.")


def _num(x):
    try:
        return float(x)
    except (TypeError, ValueError):
        return x


def _pct(x):
    v = _num(x)
    return 100.0 * v if isinstance(v, float) else v


_STRAIN_WHOLE = (
    ("e1", "e1, largest principal strain (extension > 0)", ""),
    ("e2", "e2, smallest principal strain", ""),
    ("e1_azimuth_deg", "azimuth of e1", "deg"),
    ("ezz", "ezz, vertical strain", ""),
    ("exx", "exx (east)", ""),
    ("eyy", "eyy (north)", ""),
    ("exy", "exy", ""),
    ("area_m2", "area", "km\u00b2"),
    ("n_faults", "faults", ""),
)


def _strain(s: dict, layers: Mapping, rec: Mapping) -> None:
    rows = []
    for key, label, unit in _STRAIN_WHOLE:
        val = rec.get(f"whole.{key}")
        if val is None:
            continue
        v = _num(val)
        if key == "area_m2" and isinstance(v, float):
            v = v / 1e6
        rows.append([label, fmt_num(v, 4 if key.startswith("e") and key != "e1_azimuth_deg" else 3), unit or DASH])
    if rows:
        basis = rec.get("whole_area_basis")
        s["tables"].append(table("Whole-area strain (Kostrov sum)", ["quantity", "value", "unit"], rows, align="lrl",
                                 note=f"Area: {basis}." if basis else ""))
    if rec.get("cell_size_m_used"):
        s["facts"].append(("cell size (m)", fmt_num(_num(rec["cell_size_m_used"]))))
    cells = _layer(layers, "strain_cells")
    if cells is not None:
        s["facts"].append(("cells with faults", fmt_num(len(cells))))
        if _has(cells, "e1"):
            e1 = _finite(cells["e1"])
            if len(e1):
                s["facts"].append(("e1 in the cells, median [min, max]", fmt_range(e1.median(), e1.min(), e1.max())))


def _width(s: dict, layers: Mapping, rec: Mapping) -> None:
    summ = _layer(layers, "rift_summary")
    if summ is None or len(summ) == 0:
        for key, label in (("class", "class"), ("score", "score (-1 narrow to +1 wide)"),
                           ("median_width_km", "median width (km)")):
            if key in rec:
                s["facts"].append((label, fmt_num(_num(rec[key]))))
        return
    r = summ.iloc[0]
    for col, label, f in (
        ("class", "class", fmt_num),
        ("score", "score (-1 narrow to +1 wide)", fmt_num),
        ("median_width_km", "median width between the outermost faults (km)", fmt_num),
        ("median_width_heave90_km", "median width of the central 90 % of heave (km)", fmt_num),
        ("median_topo_width_km", "median topographic width, crest to crest (km)", fmt_num),
        ("median_relief_m", "median relief (m)", fmt_num),
        ("top_share", "share of heave on the largest systems (%)", fmt_percent),
        ("gini", "Gini coefficient of heave", fmt_num),
        ("beta", "stretching factor \u03b2 used", lambda v: fmt_num(v, 5)),
        ("beta_source", "\u03b2 from", fmt_num),
    ):
        if col in r.index and not is_missing(r[col]):
            s["facts"].append((label, f(r[col])))
    if "n_sections" in r.index:
        s["facts"].append(("sections measured / all", f"{fmt_num(_v(r, 'n_sections_measured'))} / {fmt_num(r['n_sections'])}"))
    if "reasons" in r.index and not is_missing(r["reasons"]):
        s["paragraphs"].append("Reasons: " + str(r["reasons"]))
    scores = [(c, label) for c, label in (("width_score", "width"), ("localisation_score", "localisation"),
                                          ("heat_flow_score", "heat flow"), ("crust_score", "crust")) if c in r.index]
    if scores:
        s["tables"].append(table("Evidence scores (-1 narrow to +1 wide; a dash: not given)",
                                 [label for _, label in scores], [[fmt_num(r[c]) for c, _ in scores]], align="r" * len(scores)))


def _hazard(s: dict, layers: Mapping, rec: Mapping) -> None:
    from faultmap.hazard.caution import CAUTION

    s["caution"] = CAUTION
    for key, label in (("n_screened", "faults screened"), ("n_scenarios", "rupture scenarios"),
                       ("preferred_rule", "rule of the preferred magnitude"), ("fault_ids_used", "faults chosen by"),
                       ("mapping_uncertainty_m_used", "mapping uncertainty of the traces (m)")):
        if key in rec:
            value = _num(rec[key])
            if key.startswith("n_") and isinstance(value, float) and value.is_integer():
                value = int(value)  # counts print whole
            s["facts"].append((label, fmt_num(value)))
    zones = _layer(layers, "rupture_zones")
    if zones is not None:
        s["facts"].append(("surface-rupture zones", fmt_num(len(zones))))
    sc = _layer(layers, "rupture_scenarios")
    if sc is not None:
        sc, note = _largest(sc, "mag_preferred", "rupture_scenarios")
        _add_table(s, "Magnitude per rupture scenario", sc, note=note, cols=[
            ("scenario_id", "scenario", "r", lambda r: fmt_num(_v(r, "scenario_id"))),
            ("kind", "kind", "l", lambda r: fmt_num(_v(r, "kind"))),
            ("fault_ids", "faults", "l", lambda r: fmt_num(_v(r, "fault_ids"))),
            ("length_km", "length (km)", "r", lambda r: fmt_num(_v(r, "length_km"))),
            ("width_km", "down-dip width (km)", "r", lambda r: fmt_num(_v(r, "width_km"))),
            ("area_km2", "area (km\u00b2)", "r", lambda r: fmt_num(_v(r, "area_km2"))),
            ("mag_preferred", "Mw preferred \u00b1 1\u03c3", "r",
             lambda r: fmt_pm(r["mag_preferred"], _v(r, "mag_preferred_sigma"))),
            ("preferred_rule", "rule", "l", lambda r: fmt_num(_v(r, "preferred_rule"))),
            ("m0_nm", "M0 (N m)", "r", lambda r: fmt_num(_v(r, "m0_nm"))),
        ])
        rel = [c for c in sc.columns if c.startswith("mag_") and not c.endswith("_sigma") and c != "mag_preferred"
               and _finite(sc[c]).size]
        if rel and "scenario_id" in sc.columns:
            rows = [[fmt_num(r["scenario_id"])] + [fmt_pm(r[c], _v(r, c + "_sigma"), sig=3) for c in rel]
                    for _, r in sc.iterrows()]
            s["tables"].append(table("Mw by relation (\u00b1 1\u03c3 of the relation)", ["scenario"] + [c[4:] for c in rel],
                                     rows, align="r" * (len(rel) + 1), note=note))
    faults = _layer(layers, "faults")
    if _has(faults, "hazard_screened"):
        scr, note = _largest(faults[_truthy(faults["hazard_screened"])], "mag_preferred", "faults")
        _add_table(s, "Slip rate and recurrence per screened fault (central value [16th, 84th percentile])", scr,
                   note=note, cols=[
            ("fault_id", "fault", "r", lambda r: fmt_num(_v(r, "fault_id"))),
            ("name", "name", "l", lambda r: fmt_num(_v(r, "name"))),
            ("throw_used_m", "throw used (m)", "r", lambda r: fmt_num(_v(r, "throw_used_m"))),
            ("age_used_ka", "age \u00b1 1\u03c3 (ka)", "r", lambda r: fmt_pm(r["age_used_ka"], _v(r, "age_err_used_ka"))),
            ("slip_rate_vert_mm_yr", "vertical rate (mm/yr)", "r", lambda r: fmt_range(
                r["slip_rate_vert_mm_yr"], _v(r, "slip_rate_vert_p16_mm_yr"), _v(r, "slip_rate_vert_p84_mm_yr"))),
            ("slip_rate_net_mm_yr", "net slip rate (mm/yr)", "r", lambda r: fmt_range(
                r["slip_rate_net_mm_yr"], _v(r, "slip_rate_net_p16_mm_yr"), _v(r, "slip_rate_net_p84_mm_yr"))),
            ("recurrence_yr", "recurrence (yr)", "r", lambda r: fmt_range(
                r["recurrence_yr"], _v(r, "recurrence_p16_yr"), _v(r, "recurrence_p84_yr"))),
            ("mag_preferred", "Mw \u00b1 1\u03c3", "r", lambda r: fmt_pm(r["mag_preferred"], _v(r, "mag_preferred_sigma"))),
            ("rate_flag", "flag", "l", lambda r: fmt_num(_v(r, "rate_flag"))),
        ])


_BUILDERS: dict[str, Callable] = {
    "prepare": _prepare, "throw": _throw, "scaling": _scaling, "transect": _transect,
    "strain": _strain, "width": _width, "hazard": _hazard,
}


def build_section(tool: str, layers: Mapping, records: Mapping[str, str]) -> dict:
    """Build the section of one tool.

    Parameters
    ----------
    tool : str
        Tool name; a tool without a builder gets a section holding its recorded values only.
    layers : mapping of str to DataFrame
        The run's layers.
    records : mapping of str to str
        The tool's ``run_info`` records, keys without the ``<tool>.`` prefix.

    Returns
    -------
    dict
        A :func:`section`.
    """
    s = section(tool, TOOL_TITLES.get(tool, tool))
    builder = _BUILDERS.get(tool)
    if builder is not None:
        builder(s, layers, records)
    s["records"] = [(k, v) for k, v in records.items() if not (tool == "hazard" and k == "caution")]
    return s
