"""The chain without a DEM: fictional mapped traces in geographic coordinates (EPSG:4326).

Length statistics and hazard magnitudes from traces alone; D-L scaling and every other tool from
throws given as attributes. The magnitudes are checked against the published Wells & Coppersmith
(1994) coefficients for normal faults (Table 2A: M = 4.86 + 1.32 log10 SRL, SRL in km), the lengths
against geodesic lengths on the WGS 84 ellipsoid (pyproj.Geod).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from pyproj import Geod

from faultmap.errors import InputError
from faultmap.runner import run_tools

LON0, LAT0 = 61.35, 30.15  # a fictional province; the traces are invented
N = 24


def _traces(with_throws: bool) -> gpd.GeoDataFrame:
    """N parallel, NNW-trending traces 3-30 km long, 2.5 km apart, in longitude/latitude."""
    rng = np.random.default_rng(7)
    lengths_km = np.geomspace(3.0, 30.0, N)
    rng.shuffle(lengths_km)
    km_lat = 111.2
    km_lon = 111.2 * np.cos(np.radians(LAT0))
    lines = []
    for i, L in enumerate(lengths_km):
        x = 2.5 * i  # km east
        y0 = -0.5 * L
        ys = np.linspace(y0, y0 + L, 6)
        xs = x + 0.05 * np.sin(ys)  # a little wiggle
        lines.append(shapely.LineString(np.c_[LON0 + xs / km_lon, LAT0 + ys / km_lat]))
    dips = ["60", "50-70", "(45,55,65)", "70", "", "65"] * (N // 6)
    dirs = ["E", "ENE", "W", "WSW", "90", "270"] * (N // 6)
    data = {
        "name": [f"Vorak {i}" for i in range(N)],
        "dip": dips,
        "dip_dir": dirs,
        "active": [1] * N,
        "surface_age_ka": ["600-1000"] * N,
        "slip_rate_mm_yr": ["0.2-0.6"] * (N // 2) + ["(0.1,0.3,0.5)"] * (N // 2),
    }
    g = gpd.GeoDataFrame(data, geometry=lines, crs="EPSG:4326")
    if with_throws:
        # D = 0.02 L exactly (gamma 0.02, n = 1): the D-L fit must return them
        g["max_throw_m"] = [f"{0.02 * L * 1000:.6f}" for L in lengths_km]
    return g


@pytest.fixture
def traces_only(tmp_path):
    path = tmp_path / "traces.gpkg"
    _traces(False).to_file(path, layer="traces", driver="GPKG", engine="pyogrio")
    return path


@pytest.fixture
def traces_with_throws(tmp_path):
    path = tmp_path / "traces_throws.gpkg"
    _traces(True).to_file(path, layer="traces", driver="GPKG", engine="pyogrio")
    return path


def _info(res) -> dict:
    return dict(zip(res.run_info["key"], res.run_info["value"], strict=True))


def test_traces_alone_give_length_statistics_and_magnitudes(traces_only, tmp_path):
    res = run_tools(
        ["scaling", "hazard"],
        inputs={"faults": str(traces_only)},
        out=tmp_path / "out.gpkg",
        params={"scaling": {"gof_n": 0}, "hazard": {"n_draws": 200}},
        quiet=True,
        report=False,
    )
    info = _info(res)
    assert info["tools"] == "prepare,scaling,hazard"
    assert "left_out.throw" in info and "no DEM" in info["left_out.throw"]
    assert "D-L scaling" in info["scaling.left_out_parts"]
    f = res.layers["faults"]
    assert len(f) == N
    # lengths in the local UTM zone (41N) against geodesic lengths: the UTM scale factor stays within
    # 0.9996-1.0010 (common practice), so they agree to 0.1 %
    raw = _traces(False)
    geod = Geod(ellps="WGS84")
    true_len = np.array([geod.geometry_length(g) for g in raw.geometry])
    assert np.allclose(np.sort(f["length_m"]), np.sort(true_len), rtol=1e-3)
    # Wells & Coppersmith (1994), Table 2A, normal faults: M = 4.86 + 1.32 log10(SRL / km)
    expected = 4.86 + 1.32 * np.log10(f["length_m"].to_numpy() / 1000.0)
    assert np.allclose(f["mag_srl_wc94"].to_numpy(dtype=float), expected, atol=1e-9)
    # slip rates from the slip_rate_mm_yr field: the median of a triangular (0.1, 0.3, 0.5) is 0.3
    # (symmetric), the net rate's 16-84 % range stays inside the given range
    net = f["slip_rate_net_mm_yr"].to_numpy(dtype=float)
    assert np.isfinite(net).all() and (f["slip_rate_source"] == "field").all()
    assert np.allclose(net[N // 2 :], 0.3, atol=0.03)
    assert (f["slip_rate_net_p16_mm_yr"] >= 0.1).all() and (f["slip_rate_net_p84_mm_yr"] <= 0.6).all()
    # vertical = net x sin(dip) (geometry): below the net rate for every dip under 90
    assert (f["slip_rate_vert_mm_yr"] < f["slip_rate_net_mm_yr"]).all()
    # the length distribution is in the scaling table
    table = res.layers["scaling"]
    assert "length_m" in set(table.get("variable", table.iloc[:, 0]).astype(str))
    # dip directions were given from true north and turned into grid azimuths
    assert "prepare.meridian_convergence_deg" in info


def test_throw_attributes_give_dl_scaling_and_every_tool(traces_with_throws, tmp_path):
    res = run_tools(
        ["scaling", "transect", "strain", "width", "hazard"],
        inputs={"faults": str(traces_with_throws)},
        out=tmp_path / "out.gpkg",
        params={
            "scaling": {"gof_n": 0, "bootstrap_n": 50},
            "hazard": {"n_draws": 200},
            "transect": {"n_draws": 50},
        },
        quiet=True,
        report=False,
    )
    info = _info(res)
    assert info["throw.source_used"] == "attributes"
    f = res.layers["faults"]
    assert (f["throw_source"] == "attributes").all()
    # the OLS line of log T on log L against numpy.polyfit on the written lengths and throws; D = 0.02 L
    # of the nominal lengths, so n ~ 1 and gamma ~ 0.02 (the measured UTM lengths differ slightly)
    dl = res.results["scaling"]["dl"]
    slope, icpt = np.polyfit(np.log10(f["length_m"]), np.log10(f["max_throw_m"]), 1)
    assert dl.fits["ols"].exponent == pytest.approx(slope, rel=1e-9)
    assert dl.fits["ols"].gamma == pytest.approx(10**icpt, rel=1e-9)
    assert dl.fits["ols"].exponent == pytest.approx(1.0, abs=0.01)
    assert dl.fits["ols"].gamma == pytest.approx(0.02, rel=0.1)
    # every tool ran and wrote its layers
    for layer in (
        "scaling",
        "transects",
        "transect_crossings",
        "strain_cells",
        "rift_axis",
        "rupture_scenarios",
    ):
        assert layer in res.layers and len(res.layers[layer]), layer
    cross = res.layers["transect_crossings"]
    assert (cross["fault_throw_source"] == "attributes").all()
    assert (cross["throw_source"] == "max_throw_profile").all()
    assert "transect.assumed_profile" in info
    # slip rates from throw and age where both are given (not from the field)
    assert (f["slip_rate_source"] == "throw_age").all()


def test_run_without_steps_leaves_out_what_cannot_run(traces_only, tmp_path):
    res = run_tools(
        ["prepare", "throw", "scaling", "transect", "strain", "width", "hazard"],
        inputs={"faults": str(traces_only)},
        out=tmp_path / "out.gpkg",
        skip_unavailable=True,
        params={"scaling": {"gof_n": 0}, "hazard": {"n_draws": 200}},
        quiet=True,
        report=False,
    )
    info = _info(res)
    assert info["tools"] == "prepare,scaling,width,hazard"
    for tool in ("throw", "transect", "strain"):
        assert f"left_out.{tool}" in info
    assert "needs throw" in info["left_out.transect"]
    assert "heave" in info["width.left_out_parts"]


def test_asking_for_a_tool_that_cannot_run_names_why(traces_only, tmp_path):
    with pytest.raises(InputError, match=r"transect: needs throw, which was left out \(no DEM"):
        run_tools(
            ["transect"],
            inputs={"faults": str(traces_only)},
            out=tmp_path / "o.gpkg",
            quiet=True,
            report=False,
        )
    with pytest.raises(InputError, match="throw: source 'dem' needs a DEM"):
        run_tools(
            ["throw"],
            inputs={"faults": str(traces_only)},
            out=tmp_path / "o.gpkg",
            quiet=True,
            report=False,
            params={"throw": {"source": "dem"}},
        )


def test_demo_run_without_dem(tmp_path):
    """The demo's second project file: field throws where measured, database throws elsewhere, no DEM."""
    import pandas as pd

    from demo_area import write_demo_area
    from faultmap.project import run_project

    paths = write_demo_area(tmp_path / "demo", scale=0.12)
    res = run_project(paths["project_without_dem"], quiet=True)
    info = _info(res)
    assert info["tools"] == "prepare,throw,scaling,transect,strain,width,hazard"
    assert info["throw.source_used"] == "points"
    f = res.layers["faults"].merge(
        pd.read_csv(paths["truth"])[["name", "max_throw_m"]], on="name", suffixes=("", "_true")
    )
    src = f["throw_source"].value_counts()
    assert src["points"] == 6 and src["attributes"] == 16
    # points every ~1 km with 5 % noise (demo_area.database): maxima within 15 % of the scene's truth
    pts = f[f["throw_source"] == "points"]
    assert (np.abs(pts["max_throw_m"] - pts["max_throw_m_true"]) <= 0.15 * pts["max_throw_m_true"]).all()
    assert (res.layers["throw_stations"]["throw_source"] == "points").all()
