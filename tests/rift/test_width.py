"""Rift axis, widths and narrow/wide classification on synthetic populations.

The fault populations are invented test scenes built here by code (seeded):
faults are placed at known along- and across-axis positions about a known
centreline, so the rift's extent and axis are known exactly. The expected
widths are that construction's own geometry; the classification thresholds
are ours (no published single-number criterion exists; common practice puts
narrow rifts under ~100 km and wide rifts at hundreds of km; Buck 1991 gives
the heat-flow and crustal-thickness values of the modes).
"""

from __future__ import annotations

import math

import geopandas as gpd
import matplotlib

matplotlib.use("Agg")

import numpy as np
import pytest
import shapely

from faultmap.errors import GeometryError, ParameterError
from faultmap.rift import (
    axial_mean_deg,
    axis_coordinates,
    classify_rift,
    heave_concentration,
    rift_axis,
    rift_sections,
)

CRS = "EPSG:32637"
AZ = 20.0  # rift trend (azimuth of the centreline), degrees
ORIGIN = (500e3, 4.0e6)


def centreline(s, n, *, length_m, bend_deg=0.0):
    """(along s, across n) about a two-arm centreline kinked at length/2 -> (x, y).

    Across n is positive to the right of the trend (towards AZ + 90).
    """
    a1, a2 = math.radians(AZ), math.radians(AZ + bend_deg)
    u1 = np.array([math.sin(a1), math.cos(a1)])
    u2 = np.array([math.sin(a2), math.cos(a2)])
    r1, r2 = np.array([u1[1], -u1[0]]), np.array([u2[1], -u2[0]])
    kink = np.asarray(ORIGIN) + 0.5 * length_m * u1
    s = np.asarray(s, float)[..., None]
    n = np.asarray(n, float)[..., None]
    p1 = np.asarray(ORIGIN) + s * u1 + n * r1
    p2 = kink + (s - 0.5 * length_m) * u2 + n * r2
    return np.where(s < 0.5 * length_m, p1, p2)


def population(s_c, n_c, lengths, throws, *, length_m, bend_deg=0.0, system_id=None, dip=60.0):
    """Fault traces at known (along, across) positions, with throw and heave."""
    t = np.linspace(-0.5, 0.5, 31)
    geoms = [
        shapely.LineString(centreline(sc + t * L, np.full_like(t, nc), length_m=length_m, bend_deg=bend_deg))
        for sc, nc, L in zip(s_c, n_c, lengths, strict=True)
    ]
    length = shapely.length(np.asarray(geoms, dtype=object))
    throws = np.asarray(throws, float)
    n = len(geoms)
    return gpd.GeoDataFrame(
        {
            "fault_id": np.arange(1, n + 1),
            "length_m": length,
            "strike_deg": np.full(n, AZ),
            "dip_deg": np.full(n, dip),
            "dip_dir_deg": np.full(n, AZ + 90.0),
            "max_throw_m": throws,
            # elliptical throw profile: mean throw = pi/4 x max; heave = throw / tan(dip)
            "heave_integral_m2": (math.pi / 4.0) * throws / math.tan(math.radians(dip)) * length,
            "system_id": np.arange(1, n + 1) if system_id is None else np.asarray(system_id),
        },
        geometry=geoms,
        crs=CRS,
    )


def stratified(rng, n, width_m):
    """Across positions spread evenly over [-W/2, W/2] (stratified, shuffled)."""
    edges = np.linspace(-0.5 * width_m, 0.5 * width_m, n + 1)
    return rng.permutation(rng.uniform(edges[:-1], edges[1:]))


def narrow_rift(seed=1, width_m=40e3, length_m=300e3):
    """Two segmented border-fault systems at +-W/2 with large throw, small faults between."""
    rng = np.random.default_rng(seed)
    seg = 30e3
    s_b = np.arange(0.5 * seg, length_m, seg)
    s_c = np.concatenate([s_b, s_b + 0.25 * seg])
    n_c = np.concatenate([np.full(s_b.size, -0.5 * width_m), np.full(s_b.size, 0.5 * width_m)])
    L = np.full(s_c.size, seg * 0.95)
    thr = rng.uniform(2000.0, 3000.0, s_c.size)
    sys_id = np.concatenate([np.full(s_b.size, 1), np.full(s_b.size, 2)])
    m = 40
    L_i = rng.uniform(5e3, 15e3, m)
    s_i = rng.uniform(L_i / 2, length_m - L_i / 2)
    n_i = rng.uniform(-0.4 * width_m, 0.4 * width_m, m)
    thr_i = rng.uniform(50.0, 300.0, m)
    keep = s_c + 0.5 * L <= length_m + 0.25 * seg
    return population(
        np.concatenate([s_c[keep], s_i]),
        np.concatenate([n_c[keep], n_i]),
        np.concatenate([L[keep], L_i]),
        np.concatenate([thr[keep], thr_i]),
        length_m=length_m,
        system_id=np.concatenate([sys_id[keep], np.arange(3, 3 + m)]),
    )


def distributed_rift(seed=2, width_m=400e3, length_m=300e3, n=400, big=None, bend_deg=0.0):
    """Many faults spread over the width; optionally `big` = (count, throw) large ones."""
    rng = np.random.default_rng(seed)
    L = rng.uniform(15e3, 35e3, n)
    s = rng.uniform(L / 2, length_m - L / 2)
    nn = stratified(rng, n, width_m)
    thr = 300.0 * np.exp(rng.normal(0.0, 0.25, n))
    if big is not None:
        k, t_big = big
        idx = rng.choice(n, k, replace=False)
        thr[idx] = t_big
    return population(s, nn, L, thr, length_m=length_m, bend_deg=bend_deg)


def off_axis_m(fitted, true):
    """Largest distance of the fitted axis's vertices (ends trimmed 10 %) from the true centreline."""
    xy = np.asarray(fitted.coords)
    k = len(xy) // 10
    return float(np.max(shapely.distance(shapely.points(xy[k:-k]), true)))


def test_axial_mean_wraps_strike():
    # Axial (doubled-angle) mean: 170 and 10 deg average to 0/180, not 90
    # (Mardia & Jupp 2000, axial data).
    assert axial_mean_deg([170.0, 10.0]) == pytest.approx(0.0, abs=1e-9) or axial_mean_deg([170.0, 10.0]) == pytest.approx(180.0, abs=1e-9)
    assert axial_mean_deg([30.0, 210.0, 40.0], [1, 1, 2]) == pytest.approx(35.0, abs=0.3)


def test_narrow_rift_width_axis_and_class():
    f = narrow_rift()
    ax = rift_axis(f)
    line = ax.geometry.iloc[0]
    # axis runs along the trend (analytic: the population is symmetric about the centreline)
    assert ax["mean_strike_deg"].iloc[0] == pytest.approx(AZ, abs=0.5)
    true = shapely.LineString(centreline(np.array([-50e3, 350e3]), np.zeros(2), length_m=300e3))
    assert off_axis_m(line, true) < 3e3
    sec = rift_sections(f, line, spacing_m=25e3)
    inner = sec.iloc[1:-1]
    # width between outermost faults = border-fault separation 40 km (construction), within 10 %
    assert np.median(inner["width_km"]) == pytest.approx(40.0, rel=0.1)
    assert np.all(np.abs(inner["width_km"] - 40.0) < 4.0)
    # border faults carry nearly all heave: the central 90 % of heave spans them
    assert np.median(inner["width_heave90_km"]) == pytest.approx(40.0, rel=0.1)
    # sections perpendicular to the trend: across direction AZ + 90
    assert np.allclose(inner["azimuth_deg"], AZ + 90.0, atol=2.0)
    summ = classify_rift(sec, f)
    assert summ["class"].iloc[0] == "narrow"
    assert summ["score"].iloc[0] <= -1.0 / 3.0
    assert summ["top_share"].iloc[0] > 0.9  # two border systems hold > 90 % of heave (construction)
    assert "narrow" in summ["reasons"].iloc[0] and "100 km" in summ["reasons"].iloc[0]
    assert set(sec["class"].iloc[1:-1]) == {"narrow"}


def test_wide_rift_width_and_class():
    f = distributed_rift()
    ax = rift_axis(f)
    sec = rift_sections(f, ax.geometry.iloc[0], spacing_m=25e3)
    inner = sec.iloc[1:-1]
    # faults spread evenly over 400 km (construction): outermost width ~ 400 km,
    # central 90 % of heave ~ 0.9 x 400 = 360 km; both within 10 %
    assert np.median(inner["width_km"]) == pytest.approx(400.0, rel=0.1)
    assert np.median(inner["width_heave90_km"]) == pytest.approx(360.0, rel=0.1)
    summ = classify_rift(sec, f)
    assert summ["class"].iloc[0] == "wide"
    assert summ["score"].iloc[0] >= 1.0 / 3.0
    assert summ["top_share"].iloc[0] < 0.25
    assert "175 km wide threshold" in summ["reasons"].iloc[0]


def test_ambiguous_rift_is_indeterminate_with_reason():
    # 130 km wide (between the 100 km and 175 km anchors) with a tenth of the
    # faults carrying about a third of the heave (intermediate localisation).
    f = distributed_rift(seed=3, width_m=130e3, n=200, big=(20, 1400.0))
    ax = rift_axis(f)
    sec = rift_sections(f, ax.geometry.iloc[0], spacing_m=25e3)
    assert np.median(sec["width_km"].iloc[1:-1]) == pytest.approx(130.0, rel=0.1)
    summ = classify_rift(sec, f)
    row = summ.iloc[0]
    assert row["class"] == "indeterminate"
    assert abs(row["score"]) < 1.0 / 3.0
    assert 0.25 < row["top_share"] < 0.5
    reasons = row["reasons"]
    assert "between the 100 km narrow limit and the 175 km wide threshold" in reasons
    assert "intermediate localisation" in reasons
    assert "indeterminate" in reasons and "rule:" in reasons
    # Buck (1991) wide/core-complex-mode values move the score towards wide,
    # narrow-mode values towards narrow, and the reasons name the mode.
    hot = classify_rift(sec, f, heat_flow_mw_m2=100.0, crust_thickness_m=50e3).iloc[0]
    cold = classify_rift(sec, f, heat_flow_mw_m2=60.0, crust_thickness_m=30e3).iloc[0]
    assert hot["score"] > row["score"] > cold["score"]
    assert "core-complex mode" in hot["reasons"] and "Buck" in hot["reasons"]
    assert "narrow mode" in cold["reasons"]


def test_bending_rift_followed():
    # Centreline turning by 30 deg half way; 60 km wide, 400 km long.
    length, width, bend = 400e3, 60e3, 30.0
    rng = np.random.default_rng(7)
    n = 400
    L = rng.uniform(10e3, 25e3, n)
    s = rng.uniform(L / 2, length - L / 2)
    nn = stratified(rng, n, width)
    thr = 300.0 * np.exp(rng.normal(0.0, 0.25, n))
    f = population(s, nn, L, thr, length_m=length, bend_deg=bend)
    ax = rift_axis(f)
    line = ax.geometry.iloc[0]
    sec = rift_sections(f, line, spacing_m=20e3)
    kink = centreline(np.array([0.5 * length]), np.zeros(1), length_m=length)[0]
    c = sec[["centre_x_m", "centre_y_m"]].to_numpy()
    d = np.hypot(*(c - kink).T)
    u_mean = np.array([math.sin(math.radians(AZ + bend / 2)), math.cos(math.radians(AZ + bend / 2))])
    second_arm = (c - kink) @ u_mean > 0
    true_across = np.where(second_arm, AZ + bend + 90.0, AZ + 90.0)
    err = (sec["azimuth_deg"].to_numpy() - true_across + 180.0) % 360.0 - 180.0
    far = (d > 80e3) & (sec["n_faults"] > 0).to_numpy()
    assert far.sum() >= 8 and second_arm[far].any() and (~second_arm[far]).any()
    # sections stay perpendicular to the local (true) axis away from the bend
    assert np.all(np.abs(err[far]) < 5.0)
    # and turn through the bend without overshooting
    assert np.all(np.abs(err) < 20.0)
    # the fitted axis stays close to the true centreline
    true = shapely.LineString(centreline(np.linspace(-50e3, length + 50e3, 200), np.zeros(200), length_m=length, bend_deg=bend))
    assert off_axis_m(line, true) < 8e3
    inner = sec.iloc[1:-1]
    assert np.median(inner["width_km"]) == pytest.approx(60.0, rel=0.1)


def test_band_assignment_counts_faults_not_crossed_by_the_section_line():
    # Short faults (4 km) centred 10 km from each section line: none crosses a
    # line, but every one lies in a 25 km band and must be counted.
    length = 200e3
    s_lines = np.arange(12.5e3, length, 25e3)
    s_c = np.concatenate([s_lines - 10e3, s_lines + 10e3])
    n_c = np.concatenate([np.full(s_lines.size, -15e3), np.full(s_lines.size, 15e3)])
    f = population(s_c, n_c, np.full(s_c.size, 4e3), np.full(s_c.size, 200.0), length_m=length)
    user = shapely.LineString(centreline(np.array([0.0, length]), np.zeros(2), length_m=length))
    ax = rift_axis(f, line=user)
    assert ax["source"].iloc[0] == "user"
    sec = rift_sections(f, ax.geometry.iloc[0], spacing_m=25e3)
    crossed = shapely.intersects(np.asarray(f.geometry.values)[:, None], np.asarray(sec.geometry.values)[None, :])
    assert not crossed.any()
    assert (sec["n_faults"] >= 2).sum() >= 6
    # outermost pieces at -15 and +15 km (construction)
    measured = sec[sec["n_faults"] >= 2]
    assert np.allclose(measured["width_km"], 30.0, atol=0.5)
    ids = [set(map(int, s.split(","))) for s in measured["fault_ids"]]
    assert all(len(i) == k for i, k in zip(ids, measured["n_faults"], strict=True))


def test_digitising_direction_does_not_matter():
    f = distributed_rift(seed=5, width_m=120e3, n=120)
    g = f.copy()
    g["geometry"] = shapely.reverse(np.asarray(f.geometry.values))
    a1 = rift_axis(f).geometry.iloc[0]
    a2 = rift_axis(g).geometry.iloc[0]
    assert shapely.hausdorff_distance(a1, a2) < 1.0
    w1 = rift_sections(f, a1, spacing_m=30e3)["width_km"].to_numpy()
    w2 = rift_sections(g, a2, spacing_m=30e3)["width_km"].to_numpy()
    assert np.allclose(w1, w2, equal_nan=True, atol=1e-6)


def test_throw_threshold_excludes_small_outer_faults():
    f = narrow_rift(seed=4)
    line = rift_axis(f).geometry.iloc[0]
    # add tiny-throw faults 60 km out on both sides: below the default threshold
    # (a tenth of the largest throw) they must not widen the rift
    extra = population(np.array([150e3, 150e3]), np.array([-60e3, 60e3]), np.array([20e3, 20e3]), np.array([20.0, 20.0]), length_m=300e3)
    extra["fault_id"] = [900, 901]
    g = gpd.GeoDataFrame(np.concatenate([f.values, extra.values]), columns=f.columns, geometry="geometry", crs=CRS)
    for col in ("max_throw_m", "heave_integral_m2", "length_m", "dip_deg"):
        g[col] = g[col].astype(float)
    sec = rift_sections(g, line, spacing_m=25e3)
    mid = sec.iloc[sec["along_m"].sub(150e3).abs().argmin()]
    assert mid["width_km"] == pytest.approx(40.0, rel=0.1)
    assert mid["n_faults_all"] > mid["n_faults"]
    sec0 = rift_sections(g, line, spacing_m=25e3, min_throw_m=0.0)
    mid0 = sec0.iloc[sec0["along_m"].sub(150e3).abs().argmin()]
    assert mid0["width_km"] == pytest.approx(120.0, rel=0.05)


def test_axis_coordinates_straight_line():
    # analytic: axis along north from (0, 0); point (3, 5) is 5 along, 3 right
    line = shapely.LineString([(0.0, 0.0), (0.0, 10.0)])
    s, n = axis_coordinates(line, np.array([3.0, -2.0, 1.0]), np.array([5.0, 12.0, -4.0]))
    assert np.allclose(s, [5.0, 12.0, -4.0])
    assert np.allclose(n, [3.0, -2.0, 1.0])


def test_heave_concentration_gini_and_shares():
    # Gini of (1, 1, 1, 1) = 0 and of (0, 0, 0, 4) = 0.75 = (n-1)/n (Gini 1912 definition)
    def pop(h):
        g = gpd.GeoDataFrame(
            {"heave_integral_m2": h, "system_id": np.arange(len(h))},
            geometry=[shapely.LineString([(i, 0), (i, 1)]) for i in range(len(h))],
            crs=CRS,
        )
        return g
    assert heave_concentration(pop([1.0, 1, 1, 1]))["gini"] == pytest.approx(0.0, abs=1e-12)
    c = heave_concentration(pop([0.0, 0, 0, 4]), top_fraction=0.25)
    assert c["gini"] == pytest.approx(0.75)
    assert c["top_share"] == pytest.approx(1.0) and c["top_k"] == 1
    # grouping by system: two segments of one system count as one unit
    g = pop([2.0, 2.0, 1.0, 1.0])
    g["system_id"] = [1, 1, 2, 3]
    c = heave_concentration(g, top_fraction=0.3)
    assert c["n_units"] == 3 and c["top_share"] == pytest.approx(4.0 / 6.0)


def test_bad_inputs_raise_project_errors():
    f = narrow_rift()
    line = rift_axis(f).geometry.iloc[0]
    with pytest.raises(ParameterError):
        rift_sections(f, line, spacing_m=-5.0)
    with pytest.raises(ParameterError):
        classify_rift(rift_sections(f, line, spacing_m=50e3), f, narrow_max_km=200, wide_min_km=150)
    with pytest.raises(GeometryError):
        rift_sections(f, shapely.LineString([(0, 0), (0, 0)]), spacing_m=10e3)
    pts = gpd.GeoDataFrame({"fault_id": [1]}, geometry=[shapely.Point(0, 0)], crs=CRS)
    with pytest.raises(GeometryError):
        rift_axis(pts)


def test_figures_map_and_width(tmp_path):
    from faultmap.rift.figures import rift_map_figure, width_along_axis_figure

    f = narrow_rift()
    ax = rift_axis(f)
    sec = rift_sections(f, ax.geometry.iloc[0], spacing_m=25e3)
    summ = classify_rift(sec, f)
    for fig, name in ((rift_map_figure(f, ax, sec, summary=summ), "map.png"),
                      (width_along_axis_figure(sec, summary=summ), "width.png")):
        assert fig.axes[0].get_xlabel() and fig.axes[0].get_ylabel()
        assert fig.axes[0].get_legend() is not None
        fig.savefig(tmp_path / name, dpi=150)
        assert (tmp_path / name).stat().st_size > 10_000


# ----------------------------------------------------------------- tool wrapper


def _small_rift_scene(tmp_path):
    """A 30 km long, 8 km wide rift (border faults at +-4 km) in a valley DEM.

    The DEM is an analytic valley along the same centreline: floor at the
    axis, crests at +-6 km, 500 m relief (invented test surface).
    """
    import rasterio
    from rasterio.transform import from_origin

    length = 30e3
    s_b = np.array([5e3, 15e3, 25e3])
    s_c = np.concatenate([s_b, s_b + 2e3, np.linspace(3e3, 27e3, 12)])
    n_c = np.concatenate([np.full(3, -4e3), np.full(3, 4e3), np.tile([-2.5e3, -1e3, 1e3, 2.5e3], 3)])
    L = np.concatenate([np.full(6, 9.5e3), np.full(12, 3e3)])
    f = population(s_c, n_c, L, np.ones(s_c.size), length_m=length)
    raw = gpd.GeoDataFrame(
        {"name": ["border"] * 6 + ["inner"] * 12, "dip": 60.0, "dip_dir": AZ + 90.0},
        geometry=f.geometry.values, crs=CRS,
    )
    faults = tmp_path / "faults.gpkg"
    raw.to_file(faults, layer="traces")
    px, x0, y0, nx, ny = 100.0, ORIGIN[0] - 15e3, ORIGIN[1] + 45e3, 400, 500
    i, j = np.mgrid[0:ny, 0:nx]
    x, y = x0 + (j + 0.5) * px, y0 - (i + 0.5) * px
    a = math.radians(AZ)
    n = (x - ORIGIN[0]) * math.cos(a) - (y - ORIGIN[1]) * math.sin(a)
    an = np.abs(n)
    z = 800.0 + np.where(an <= 6e3, 250.0 * (1 - np.cos(np.pi * an / 6e3)), 500.0 - 0.02 * (an - 6e3))
    dem = tmp_path / "dem.tif"
    prof = dict(driver="GTiff", width=nx, height=ny, count=1, dtype="float32", crs=CRS,
                transform=from_origin(x0, y0, px, px), nodata=-9999.0)
    with rasterio.open(dem, "w", **prof) as dst:
        dst.write(z.astype("float32"), 1)
    return faults, dem


def _stub_throw(ctx, p):
    """Stand-in for the throw tool: border faults throw 1500 m, inner ones 100 m (synthetic)."""
    f = ctx.faults.copy()
    t = np.where(f["name"] == "border", 1500.0, 100.0)
    f["max_throw_m"] = t
    f["mean_throw_m"] = (math.pi / 4.0) * t
    f["heave_integral_m2"] = f["mean_throw_m"] / np.tan(np.radians(f["dip_deg"])) * f["length_m"]
    ctx.faults = f


def test_width_tool_in_pipeline(tmp_path):
    import pyogrio

    from faultmap.registry import Tool, load_tools
    from faultmap.rift.subsidence import initial_subsidence_m
    from faultmap.rift.tool import TOOL
    from faultmap.runner import run_tools

    faults, dem = _small_rift_scene(tmp_path)
    reg = load_tools()
    tools = {"prepare": reg["prepare"],
             "throw": Tool("throw", "stub", run=_stub_throw, requires=("prepare",), inputs=("faults", "dem")),
             "width": TOOL}
    res = run_tools(["width"], inputs={"faults": str(faults), "dem": str(dem)},
                    params={"width": {"spacing_m": 5000.0, "beta": 1.5}},
                    out=tmp_path / "out.gpkg", figures=tmp_path / "fig", tools=tools, quiet=True,
                    echo=lambda m: None)
    layers = {name for name, _ in pyogrio.list_layers(res.gpkg)}
    assert {"rift_axis", "rift_sections", "rift_summary", "rift_swath", "subsidence", "run_info"} <= layers
    sec = gpd.read_file(res.gpkg, layer="rift_sections")
    inner = sec.iloc[1:-1]
    # border faults 8 km apart (construction); valley crests 12 km apart, relief 500 m (analytic DEM)
    assert np.median(inner["width_km"]) == pytest.approx(8.0, rel=0.1)
    assert np.median(inner["topo_width_km"]) == pytest.approx(12.0, rel=0.1)
    assert np.median(inner["relief_m"]) == pytest.approx(500.0, rel=0.05)
    summ = gpd.read_file(res.gpkg, layer="rift_summary")
    assert summ["class"].iloc[0] == "narrow"
    assert "rule:" in summ["reasons"].iloc[0]
    sub = gpd.read_file(res.gpkg, layer="subsidence")
    # McKenzie (1978) eq. 2 with t_c 35 km (the default, recorded)
    assert sub["initial_m"].iloc[0] == pytest.approx(initial_subsidence_m(1.5, crust_thickness_m=35e3), rel=1e-9)
    info = dict(zip(res.run_info["key"], res.run_info["value"], strict=True))
    assert info["width.beta_source"] == "parameter beta"
    assert info["width.crust_thickness_m_used"] == "35000.0"
    assert "width.swath_bin_m_used" in info and "width.min_throw_m_used" in info
    assert {p.name for p in res.figures} == {"width_map.png", "width_along_axis.png", "width_swath.png",
                                             "width_subsidence.png"}


def test_width_tool_beta_from_transects_and_skip_without_beta():
    import pandas as pd

    from faultmap.rift.tool import TOOL
    from faultmap.runner import RunContext

    f = narrow_rift()
    ctx = RunContext(crs=f.crs, echo=lambda m: None, quiet=True)
    ctx.faults = f
    ctx.current_tool = "width"
    TOOL.run(ctx, TOOL.resolve_params({"spacing_m": 25e3}))
    assert "subsidence" not in ctx.layers
    assert any("subsidence skipped" in w for w in ctx.warnings)
    assert ctx.layers["rift_summary"]["class"].iloc[0] == "narrow"
    # with the transect tool's result: median beta of the 'ok' transects is used
    t = pd.DataFrame({"beta": [1.2, 1.4, 9.0, 1.3], "status": ["ok", "ok", "no_crossings", "ok"]})
    ctx2 = RunContext(crs=f.crs, echo=lambda m: None, quiet=True)
    ctx2.faults = f
    ctx2.current_tool = "width"
    ctx2.results["transect"] = {"transects": t, "crossings": None}
    # the user's beta wins over the transects' (science review: the transect beta is upper-crust
    # brittle extension, not the lithosphere's stretching the McKenzie model needs)
    TOOL.run(ctx2, TOOL.resolve_params({"spacing_m": 25e3, "beta": 3.0}))
    assert ctx2.layers["subsidence"]["beta"].iloc[0] == pytest.approx(3.0)
    assert ctx2.records["width.beta_source"] == "parameter beta"
    # the transects' beta only when asked, with its caveat written out
    ctx2.warnings.clear()
    TOOL.run(ctx2, TOOL.resolve_params({"spacing_m": 25e3, "beta_from_transects": True}))
    sub = ctx2.layers["subsidence"]
    assert sub["beta"].iloc[0] == pytest.approx(1.3)
    assert "transect" in ctx2.records["width.beta_source"]
    assert any("lower bound" in w and "upper-crust" in w for w in ctx2.warnings)
    with pytest.raises(ParameterError):
        TOOL.run(ctx2, TOOL.resolve_params({"axis_wkt": "LINESTRING (0 0"}))


def test_axis_locations_match_shapely_line_locate_point():
    """The indexed nearest-segment projection gives shapely's line_locate_point (reference library)."""
    import shapely
    from shapely.geometry import LineString

    from faultmap.rift.axis_frame import _axis_arrays, _locate_on_polyline

    t = np.linspace(0.0, 1.0, 80)
    axis = LineString(np.c_[t * 90_000.0, 6_000.0 * np.sin(5.0 * t)])  # a curved axis
    rng = np.random.default_rng(3)
    px, py = rng.uniform(-15_000, 105_000, 5_000), rng.uniform(-30_000, 30_000, 5_000)  # also beyond the ends
    xy, tan, _, cum = _axis_arrays(axis)
    got = _locate_on_polyline(xy, tan, cum, px, py)
    want = shapely.line_locate_point(axis, shapely.points(px, py))
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-6)
