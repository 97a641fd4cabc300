"""Tests of the layer styles (faultmap.report.styles): SLD 1.1 / SE 1.1 documents per spatial layer.

Each document is parsed with xml.etree.ElementTree; its filters are evaluated here on the layer's own
features, so every feature must fall in exactly one rule (the ElseFilter rule catches empty values).
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from conftest import CRS, small_layers

from faultmap.report import OGC_NS, SE_NS, SLD_NS, sld_for_layer, sld_for_layers
from faultmap.report.styles import quantile_breaks

SE = f"{{{SE_NS}}}"
OGC = f"{{{OGC_NS}}}"
SLD = f"{{{SLD_NS}}}"
SYMBOLIZER = {"line": "LineSymbolizer", "point": "PointSymbolizer", "polygon": "PolygonSymbolizer"}


def _kind(layer) -> str:
    t = layer.geometry.geom_type.dropna().iloc[0].replace("Multi", "")
    return {"Point": "point", "LineString": "line", "Polygon": "polygon"}[t]


def _evaluate(flt, row) -> bool:
    """Evaluate the subset of OGC Filter the styles use on one feature (a pandas row)."""
    op = flt.tag.removeprefix(OGC)
    if op in ("Filter", "And"):
        return all(_evaluate(c, row) for c in flt)
    name = flt.find(f"{OGC}PropertyName").text
    lit = flt.find(f"{OGC}Literal").text
    value = row[name]
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return False  # comparisons with an empty value are false, as in a GIS
    if op == "PropertyIsEqualTo":
        return str(value) == lit
    if op == "PropertyIsGreaterThanOrEqualTo":
        return float(value) >= float(lit)
    if op == "PropertyIsLessThan":
        return float(value) < float(lit)
    raise AssertionError(f"unexpected filter {op}")


def check_sld(name: str, layer, text: str) -> ET.Element:
    """The checks every style must pass; returns the parsed root."""
    assert text.startswith('<?xml version="1.0" encoding="UTF-8"?>')
    root = ET.fromstring(text)
    assert root.tag == f"{SLD}StyledLayerDescriptor" and root.get("version") == "1.1.0"
    assert f'xmlns:se="{SE_NS}"' in text and f'xmlns:ogc="{OGC_NS}"' in text
    named = root.find(f"{SLD}NamedLayer")
    assert named.find(f"{SE}Name").text == name
    fts = named.find(f"{SLD}UserStyle").find(f"{SE}FeatureTypeStyle")
    rules = fts.findall(f"{SE}Rule")
    assert rules
    for el in root.iter(f"{OGC}PropertyName"):
        assert el.text in layer.columns, (name, el.text)
    kind = _kind(layer)
    for rule in rules:
        assert rule.find(f"{SE}Name").text
        syms = [c for c in rule if c.tag.startswith(SE) and c.tag.endswith("Symbolizer")]
        assert [s.tag.removeprefix(SE) for s in syms] == [SYMBOLIZER[kind]], (name, syms)
    for p in root.iter(f"{SE}SvgParameter"):
        if p.get("name") in ("stroke", "fill"):
            assert re.fullmatch(r"#[0-9a-f]{6}", p.text), p.text
    # every feature in exactly one rule (ElseFilter: features no other rule takes)
    filtered = [r for r in rules if r.find(f"{OGC}Filter") is not None]
    has_else = any(r.find(f"{SE}ElseFilter") is not None for r in rules)
    unfiltered = [r for r in rules if r.find(f"{OGC}Filter") is None and r.find(f"{SE}ElseFilter") is None]
    if filtered:
        assert has_else and not unfiltered
        for _, row in layer.iterrows():
            hits = sum(_evaluate(r.find(f"{OGC}Filter"), row) for r in filtered)
            assert hits <= 1, (name, dict(row.drop("geometry")))
    else:
        assert len(unfiltered) == 1
    return root


def test_demo_layers(demo_run):
    styles = sld_for_layers(demo_run.layers)
    spatial = {n for n, df in demo_run.layers.items() if isinstance(df, gpd.GeoDataFrame) and len(df)}
    assert set(styles) == spatial
    for name in ("faults", "throw_stations", "rupture_zones", "rupture_scenarios", "strain_cells", "transects",
                 "rift_sections", "linkage_zones", "transect_crossings"):
        assert name in styles, name
    for name, text in styles.items():
        check_sld(name, demo_run.layers[name], text)
    for name in ("run_info", "scaling", "rift_summary"):
        assert sld_for_layer(name, demo_run.layers[name]) is None


def _fields(text: str) -> set[str]:
    return {el.text for el in ET.fromstring(text).iter(f"{OGC}PropertyName")}


def test_demo_graduated_by_the_documented_fields(demo_run):
    layers = demo_run.layers
    assert _fields(sld_for_layer("faults", layers["faults"])) == {"max_throw_m"}
    assert _fields(sld_for_layer("strain_cells", layers["strain_cells"])) == {"e1"}
    assert _fields(sld_for_layer("throw_stations", layers["throw_stations"])) == {"status", "throw_m"}
    root = ET.fromstring(sld_for_layer("faults", layers["faults"]))
    classes = [r for r in root.iter(f"{SE}Rule") if r.find(f"{OGC}Filter") is not None]
    assert 2 <= len(classes) <= 5
    # widths and colours change from class to class
    strokes = [r.find(f".//{SE}SvgParameter[@name='stroke']").text for r in classes]
    assert len(set(strokes)) == len(strokes)
    zones = ET.fromstring(sld_for_layer("rupture_zones", layers["rupture_zones"]))
    opacity = float(zones.find(f".//{SE}SvgParameter[@name='fill-opacity']").text)
    assert 0 < opacity < 1


def test_small_layers_and_every_value_classed():
    layers = small_layers()
    for name, layer in layers.items():
        text = sld_for_layer(name, layer)
        if isinstance(layer, gpd.GeoDataFrame):
            check_sld(name, layer, text)
        else:
            assert text is None
    # every finite throw of an ok station is in one class
    st = layers["throw_stations"]
    root = ET.fromstring(sld_for_layer("throw_stations", st))
    rules = [r for r in root.iter(f"{SE}Rule") if r.find(f"{OGC}Filter") is not None]
    for _, row in st.iterrows():
        hits = sum(_evaluate(r.find(f"{OGC}Filter"), row) for r in rules)
        assert hits == (1 if row["status"] != "ok" or np.isfinite(row["throw_m"]) else 0)


def test_missing_field_falls_back_to_single_symbol():
    layers = small_layers()
    faults = layers["faults"].drop(columns=["max_throw_m"])
    text = sld_for_layer("faults", faults)
    check_sld("faults", faults, text)
    assert "PropertyName" not in text
    cells = layers["strain_cells"].drop(columns=["e1"])
    assert "PropertyName" not in sld_for_layer("strain_cells", cells)
    same = layers["faults"].assign(max_throw_m=10.0)  # one value: no classes to draw
    assert "PropertyName" not in sld_for_layer("faults", same)


def test_unknown_and_empty_layers():
    pts = gpd.GeoDataFrame({"v": [1, 2]}, geometry=[shapely.Point(0, 0), shapely.Point(1, 1)], crs=CRS)
    text = sld_for_layer("my_points", pts)
    root = check_sld("my_points", pts, text)
    assert root.find(f".//{SE}PointSymbolizer") is not None
    empty = gpd.GeoDataFrame({"max_throw_m": []}, geometry=gpd.GeoSeries([], crs=CRS), crs=CRS)
    text = sld_for_layer("faults", empty)
    assert text is not None and "LineSymbolizer" in text
    assert sld_for_layer("table", pd.DataFrame({"a": [1]})) is None
    assert sld_for_layer("nothing", None) is None


def test_names_are_escaped():
    layer = gpd.GeoDataFrame({"status": ["ok", "a<b&c"], "throw_m": [1.0, 2.0]},
                             geometry=[shapely.Point(0, 0), shapely.Point(1, 1)], crs=CRS)
    text = sld_for_layer("throw_stations", layer)
    root = check_sld("throw_stations", layer, text)
    assert "a<b&c" in [el.text for el in root.iter(f"{OGC}Literal")]


@pytest.mark.parametrize("values, n", [([1, 2, 3, 4, 5, 6, 7, 8, 9, 10], 4), ([1, 1, 1], 0), ([1, 2], 1),
                                       ([0.001, 0.002, 0.003, 0.5], 3)])
def test_quantile_breaks(values, n):
    b = quantile_breaks(values)
    assert len(b) == n
    assert all(x > min(values) for x in b) and b == sorted(set(b))
