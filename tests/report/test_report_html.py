"""Tests of the run report (faultmap.report.html): one self-contained, offline HTML page.

The page is parsed with the standard library's html.parser; figures must decode to PNG files that
matplotlib reads; the page must refer to nothing outside itself.
"""

from __future__ import annotations

import base64
import io
import subprocess
import sys
from html.parser import HTMLParser
from importlib import resources

import matplotlib.image as mpimg
import numpy as np
import pytest
from conftest import png_bytes, small_layers, small_run_info

from faultmap.hazard.caution import CAUTION
from faultmap.report import PNG_SIGNATURE, render_report
from faultmap.report.formatting import fmt_num, fmt_pm, fmt_range

DATA_PNG = "data:image/png;base64,"
TOOLS = ["prepare", "throw", "scaling", "transect", "strain", "width", "hazard"]


class Page(HTMLParser):
    """Start tags in document order, with the id of the section each lies in, and the text per section."""

    def __init__(self, html: str):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict, str]] = []
        self.ids: set[str] = set()
        self.text: dict[str, list[str]] = {}
        self._sections: list[str] = []
        self.feed(html)
        self.close()

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            self.ids.add(a["id"])
        if tag == "section":
            self._sections.append(a.get("id", ""))
        self.tags.append((tag, a, self._sections[-1] if self._sections else ""))

    def handle_endtag(self, tag):
        if tag == "section" and self._sections:
            self._sections.pop()

    def handle_data(self, data):
        sec = self._sections[-1] if self._sections else ""
        self.text.setdefault(sec, []).append(data)

    def section_text(self, sec: str) -> str:
        return " ".join(" ".join(self.text.get(sec, [])).split())

    def sections(self) -> list[str]:
        return [a.get("id", "") for t, a, _ in self.tags if t == "section"]


def _figures(result) -> dict:
    base = result.figures[0].parent if result.figures else None
    return {str(p.relative_to(base)): p for p in result.figures}


@pytest.fixture(scope="module")
def demo_page(demo_run):
    html = render_report(demo_run.layers, demo_run.run_info, _figures(demo_run), title="Demo area report")
    return html, Page(html)


def _check_offline(html: str, page: Page) -> None:
    assert "http://" not in html and "https://" not in html
    for tag, attrs, _ in page.tags:
        # no element that loads or embeds anything (media elements carry a src, checked below)
        assert tag not in ("script", "link", "iframe", "object", "embed", "base", "frame", "source", "track")
        src = attrs.get("src")
        if src is not None:
            assert tag == "img" and src.startswith(DATA_PNG), src[:60]
        href = attrs.get("href")
        if href is not None:
            assert href.startswith("#") and href[1:] in page.ids, href
        for key in ("srcset", "poster", "action", "formaction", "background", "data"):
            assert key not in attrs
    assert "url(" not in html and "@import" not in html
    assert 'src="' not in html.replace(f'src="{DATA_PNG}', "")


def test_demo_figures_embedded_as_png(demo_run, demo_page):
    html, page = demo_page
    imgs = [a for t, a, _ in page.tags if t == "img"]
    assert demo_run.figures and len(imgs) == len(demo_run.figures)
    for a in imgs:
        assert a["src"].startswith(DATA_PNG)
        data = base64.b64decode(a["src"][len(DATA_PNG):], validate=True)
        assert data.startswith(PNG_SIGNATURE)
        arr = mpimg.imread(io.BytesIO(data), format="png")
        assert arr.ndim == 3 and arr.shape[0] > 10 and arr.shape[1] > 10
        assert a.get("alt")


def test_demo_every_tool_has_its_section(demo_run, demo_page):
    _, page = demo_page
    ran = demo_run.run_info.set_index("key").loc["tools", "value"].split(",")
    assert set(ran) == set(TOOLS)
    for tool in ran:
        assert f"tool-{tool}" in page.sections()
    # figures sit in their tool's section
    for tag, attrs, sec in page.tags:
        if tag == "img":
            tool = sec.removeprefix("tool-")
            assert attrs["alt"].split()[0] in (tool, "rift"), (attrs["alt"], sec)


def test_demo_caution_at_top_of_hazard(demo_page):
    _, page = demo_page
    tags = [(t, a) for t, a, sec in page.tags if sec == "tool-hazard"]
    assert tags[0][0] == "section"
    after_heading = [(t, a) for t, a in tags[1:] if t not in ("h2", "span")]
    tag, attrs = after_heading[0]
    assert tag == "div" and "caution" in attrs.get("class", "")
    text = page.section_text("tool-hazard")
    assert " ".join(CAUTION.split()) in text
    assert text.index(" ".join(CAUTION.split())) < text.index("Magnitude per rupture scenario")


def test_demo_offline_and_no_machine_paths(demo_run, demo_page, tmp_path_factory):
    html, page = demo_page
    _check_offline(html, page)
    folder = str(demo_run.gpkg.parent.parent)
    assert folder not in html
    for name in ("faults.gpkg", "dem.tif", "transects.gpkg"):
        assert name in page.section_text("run")


def test_demo_key_numbers(demo_run, demo_page):
    _, page = demo_page
    faults = demo_run.layers["faults"]
    top = faults.loc[faults["max_throw_m"].idxmax()]
    assert fmt_pm(top["max_throw_m"], top["max_throw_err_m"]) in page.section_text("tool-throw")
    sc = demo_run.layers["scaling"]
    ols = sc[sc["model"] == "ols"].iloc[0]
    assert fmt_range(ols["exponent"], ols["exponent_lo"], ols["exponent_hi"]) in page.section_text("tool-scaling")
    tr = demo_run.layers["transects"].iloc[0]
    assert fmt_range(tr["beta"], tr["beta_p16"], tr["beta_p84"], sig=5) in page.section_text("tool-transect")
    strain = page.section_text("tool-strain")
    e1 = float(demo_run.run_info.set_index("key").loc["strain.whole.e1", "value"])
    assert fmt_num(e1, 4) in strain
    assert demo_run.layers["rift_summary"]["class"].iloc[0] in page.section_text("tool-width")
    hz = page.section_text("tool-hazard")
    s = demo_run.layers["rupture_scenarios"].iloc[0]
    assert fmt_pm(s["mag_preferred"], s["mag_preferred_sigma"]) in hz
    warnings = page.section_text("warnings")
    # run_info lists each warning once (the hazard caution, also a recorded value, is not repeated)
    n_warn = sum(k.startswith("warning.") for k in demo_run.run_info["key"])
    assert n_warn == len(demo_run.warnings) - 1
    assert f"Warnings ({n_warn})" in warnings
    prov = page.section_text("provenance")
    ri = demo_run.run_info.set_index("key")["value"]
    assert ri["faultmap_version"] in prov and ri["input.dem.checksum"] in prov
    assert "station_spacing_m" in prov


def test_small_run_escaped_cleaned_and_ordered():
    html = render_report(small_layers(), small_run_info(), {"throw_map.png": png_bytes()}, title="Test <run> & co")
    page = Page(html)
    _check_offline(html, page)
    assert "<title>Test &lt;run&gt; &amp; co</title>" in html
    assert "North &lt;A&gt; &amp; co" in html and "<A>" not in html
    assert "&lt;details&gt;" in html
    assert "example.org" in html  # the address is kept as text, but not as a URL
    assert "/data/someone" not in html and "C:\\data" not in html
    assert "traces.gpkg" in page.section_text("run") and "dem.tif" in page.section_text("run")
    assert "results.gpkg" in page.section_text("provenance")
    assert "42.0 \u00b1 3.1" in page.section_text("tool-throw")
    assert "ok 3, truncated 1, void 1" in page.section_text("tool-throw")
    assert "0.01230" in page.section_text("tool-strain") and "110" in page.section_text("tool-strain")
    assert "1.20 [1.00, 1.40]" in page.section_text("tool-scaling")
    assert "auto (from the data)" in page.section_text("provenance")
    warn = page.section_text("warnings")
    assert warn.index("default dip used") < warn.index("magnitude outside") < warn.index("tenth warning")
    assert sum(1 for t, _, _ in page.tags if t == "img") == 1


def test_missing_tools_leave_no_section():
    layers = small_layers()
    keep = {k: layers[k] for k in ("faults", "throw_stations")}
    html = render_report(keep, small_run_info("prepare,throw"), {"hazard_map.png": png_bytes()}, title="t")
    page = Page(html)
    assert page.sections()[:2] == ["run", "warnings"]
    assert [s for s in page.sections() if s.startswith("tool-")] == ["tool-prepare", "tool-throw"]
    assert "Caution" not in html
    # a figure of a tool without a section goes to "Other figures"
    assert "other-figures" in page.sections()
    _check_offline(html, page)


def test_without_run_info_tools_come_from_layers():
    layers = small_layers()
    html = render_report({k: layers[k] for k in ("faults", "strain_cells", "rupture_zones")}, None, None, title="t")
    page = Page(html)
    assert [s for s in page.sections() if s.startswith("tool-")] == ["tool-prepare", "tool-strain", "tool-hazard"]
    assert " ".join(CAUTION.split()) in page.section_text("tool-hazard")
    assert "No input files recorded" in html


def test_empty_run():
    html = render_report({}, None, None, title="nothing")
    page = Page(html)
    assert not [s for s in page.sections() if s.startswith("tool-")]
    _check_offline(html, page)


def test_figures_from_paths_and_non_png(tmp_path):
    good = tmp_path / "width_map.png"
    good.write_bytes(png_bytes("tab:red"))
    bad = tmp_path / "throw_map.png"
    bad.write_bytes(b"GIF89a not a png")
    layers = small_layers()
    figs = {"width_map.png": good, "throw_map.png": bad, "scaling_dl.png": tmp_path / "missing.png"}
    html = render_report(layers, small_run_info(), figs, title="t")
    page = Page(html)
    imgs = [(a, sec) for t, a, sec in page.tags if t == "img"]
    assert [sec for _, sec in imgs] == ["tool-width"]
    prov = page.section_text("provenance")
    assert "throw_map.png: not a PNG image" in prov and "scaling_dl.png: not readable" in prov
    # a plain list of paths is accepted too
    html2 = render_report(layers, small_run_info(), [good], title="t")
    assert html2.count(DATA_PNG) == 1


def test_template_is_package_data():
    tpl = resources.files("faultmap.report").joinpath("templates", "report.html.j2")
    assert tpl.is_file() and "<!DOCTYPE html>" in tpl.read_text(encoding="utf-8")


def test_import_is_light():
    code = ("import sys, faultmap.report as r; r.__dir__(); "
            "print(','.join(m for m in ('pandas', 'jinja2', 'matplotlib', 'geopandas', 'numpy') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == ""


@pytest.mark.parametrize("value, sig, text", [
    (14.021, 3, "14.0"), (0.95, 3, "0.950"), (99.96, 3, "100"), (123456.7, 3, "123457"),
    (9.995e17, 3, "1.00e18"), (5.117e-6, 3, "5.12e-6"), (0.0, 3, "0"), (7, 3, "7"), (True, 3, "yes"),
    (float("nan"), 3, "\u2013"), (None, 3, "\u2013"), ("text", 3, "text"),
])
def test_fmt_num(value, sig, text):
    assert fmt_num(value, sig) == text


def test_fmt_pm_and_range():
    assert fmt_pm(336.73, 5.604) == "336.7 \u00b1 5.6"
    assert fmt_pm(159.0, 20.07) == "159 \u00b1 20"
    assert fmt_pm(12.0, float("nan")) == "12.0"
    assert fmt_range(0.8973, 0.5582, 1.1327) == "0.897 [0.558, 1.13]"
    assert fmt_range(2.0, None, None) == "2.00"


def test_counts_print_whole():
    # a count recorded as text ("4") is shown as 4, not 4.00
    from faultmap.report.sections import _hazard

    section = {"facts": []}
    _hazard(section, {}, {"hazard.n_screened": "4", "n_screened": "4", "n_scenarios": "7"})
    facts = dict(section["facts"])
    assert facts["faults screened"] == "4" and facts["rupture scenarios"] == "7"


def test_hazard_tables_show_the_largest_and_say_how_many_were_left_out():
    """At regional size the per-scenario and per-fault tables stay bounded (issue: figures and pages at any size)."""
    import pandas as pd

    from faultmap.report.sections import _MAX_TABLE_ROWS, build_section

    n = _MAX_TABLE_ROWS + 70
    mags = np.linspace(5.0, 7.0, n)[::-1].copy()
    np.random.default_rng(1).shuffle(mags)
    sc = pd.DataFrame({"scenario_id": np.arange(1, n + 1), "kind": "single", "fault_ids": "1",
                       "mag_preferred": mags, "mag_preferred_sigma": 0.3, "mag_wc94_srl_normal": mags,
                       "mag_wc94_srl_normal_sigma": 0.34})
    faults = pd.DataFrame({"fault_id": np.arange(1, n + 1), "name": "F", "hazard_screened": True,
                           "mag_preferred": mags, "slip_rate_vert_mm_yr": 0.1})
    s = build_section("hazard", {"rupture_scenarios": sc, "faults": faults}, {})
    by_caption = {t["caption"]: t for t in s["tables"]}
    per_scenario = by_caption["Magnitude per rupture scenario"]
    assert len(per_scenario["rows"]) == _MAX_TABLE_ROWS
    assert f"of {n}" in per_scenario["note"] and "rupture_scenarios" in per_scenario["note"]
    # the largest magnitudes are the ones shown: the smallest shown is the 50th largest of the input
    shown = sorted(float(r[per_scenario["headers"].index("Mw preferred \u00b1 1\u03c3")].split()[0])
                   for r in per_scenario["rows"])
    assert shown[0] == pytest.approx(np.sort(mags)[-_MAX_TABLE_ROWS], abs=0.01)
    per_fault = [t for c, t in by_caption.items() if c.startswith("Slip rate and recurrence")][0]
    assert len(per_fault["rows"]) == _MAX_TABLE_ROWS and f"of {n}" in per_fault["note"]
