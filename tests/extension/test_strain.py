"""Tests of the Kostrov modules of faultmap.extension (pieces, sums, tiles, tensors) and the extension figures.

Synthetic scenes are built here; every numeric check names its source.
"""

from __future__ import annotations

import warnings

import geopandas as gpd
import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
import shapely  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from faultmap.errors import CRSError, FaultmapWarning, ParameterError  # noqa: E402
from faultmap.extension.figures import extension_map_figure, transect_extension_figure  # noqa: E402
from faultmap.extension.kostrov_pieces import fault_pieces  # noqa: E402
from faultmap.extension.kostrov_sums import kostrov_grid, kostrov_polygons  # noqa: E402
from faultmap.extension.strain_tensors import fault_moment_sum, principal_strains, whole_area_strain  # noqa: E402
from faultmap.extension.transect_measure import measure_transects  # noqa: E402

CRS = "EPSG:32636"


def make_scene(lines, *, throw_fn, dip=60.0, dip_dir=None, n_st=41, dip_source="attribute"):
    """Faults + stations (throw_fn(k, d, L) analytic) and heave_integral_m2 by the trapezoid rule
    over the stations, which is the exact integral of the piecewise-linear profile."""
    n = len(lines)
    dip = np.broadcast_to(np.asarray(dip, dtype=float), (n,))
    rows, integ = [], []
    for k, ln in enumerate(lines):
        d = np.linspace(0.0, ln.length, n_st)
        t = throw_fn(k, d, ln.length)
        h = t / np.tan(np.radians(dip[k]))
        integ.append(float(np.sum(0.5 * (h[1:] + h[:-1]) * np.diff(d))))
        rows += [
            dict(
                fault_id=k + 1,
                dist_m=dd,
                throw_m=tt,
                throw_err_m=0.0,
                status="ok",
                geometry=ln.interpolate(dd),
            )
            for dd, tt in zip(d, t, strict=True)
        ]
    faults = gpd.GeoDataFrame(
        {
            "fault_id": np.arange(1, n + 1),
            "dip_deg": dip,
            "dip_source": dip_source,
            "dip_dir_deg": np.full(n, np.nan) if dip_dir is None else np.asarray(dip_dir, dtype=float),
            "heave_integral_m2": integ,
            "length_m": [ln.length for ln in lines],
            "system_id": 1,
        },
        geometry=lines,
        crs=CRS,
    )
    stations = gpd.GeoDataFrame(rows, geometry="geometry", crs=CRS)
    faults["max_throw_m"] = stations.groupby("fault_id")["throw_m"].max().to_numpy()
    faults["max_throw_err_m"] = 0.0
    return faults, stations


def rotate_gdf(gdf, theta_deg):
    th = np.radians(theta_deg)
    R = np.array([[np.cos(th), -np.sin(th)], [np.sin(th), np.cos(th)]])
    out = gdf.copy()
    out.geometry = shapely.transform(np.asarray(gdf.geometry.values, dtype=object), lambda c: c @ R.T)
    if "dip_dir_deg" in out.columns:
        out["dip_dir_deg"] = (out["dip_dir_deg"] - theta_deg) % 360.0
    return out, R


def oblique_scene():
    """Six bent faults of varied strike, dip direction and sine-shaped throw profiles."""
    rng = np.random.default_rng(5)
    lines, dds = [], []
    for k in range(6):
        strike = rng.uniform(-30, 40)
        a = np.radians(strike)
        x0, y0 = 2300.0 * k + rng.uniform(-300, 300), rng.uniform(-2000, 2000)
        half = rng.uniform(3000, 8000)
        bend = rng.uniform(-600, 600)
        p0 = (x0 - half * np.sin(a), y0 - half * np.cos(a))
        p2 = (x0 + half * np.sin(a), y0 + half * np.cos(a))
        p1 = (x0 + bend * np.cos(a), y0 - bend * np.sin(a))
        lines.append(shapely.LineString([p0, p1, p2]))
        dds.append((strike + 90.0 + (180.0 if k % 3 == 0 else 0.0)) % 360.0)
    return make_scene(
        lines,
        throw_fn=lambda k, d, L: (40.0 + 7 * k) * np.sin(np.pi * d / L),
        dip=[50, 55, 60, 65, 70, 60],
        dip_dir=dds,
        n_st=61,
    )


# ------------------------------------------------------------ check values (docs/methods/extension.md)
def test_kostrov_worked_example():
    # Map-view Kostrov summation (derived from Kostrov 1974, from memory): L 10 km, h 57.735 m
    # (T 100 m, dip 60), A 400 km^2 -> 1.4434e-3; dip direction 135 deg -> tensor (E, N)
    # [[7.217e-4, -7.217e-4], [-7.217e-4, 7.217e-4]].
    a = np.radians(45.0)  # strike 45 -> dip direction 135
    ln = shapely.LineString([(-5000 * np.sin(a), -5000 * np.cos(a)), (5000 * np.sin(a), 5000 * np.cos(a))])
    faults, stations = make_scene(
        [ln], throw_fn=lambda k, d, L: np.full_like(d, 100.0), dip=60.0, dip_dir=[135.0]
    )
    poly = gpd.GeoDataFrame(
        {"polygon_id": [1]}, geometry=[shapely.box(-10000, -10000, 10000, 10000)], crs=CRS
    )
    cells, whole = kostrov_polygons(faults, stations, poly)
    row = cells.iloc[0]
    assert row["area_m2"] == pytest.approx(4e8)
    assert row["e1"] == pytest.approx(1.4434e-3, abs=5e-8)
    assert np.array([[row["exx"], row["exy"]], [row["exy"], row["eyy"]]]) == pytest.approx(
        np.array([[7.217e-4, -7.217e-4], [-7.217e-4, 7.217e-4]]), abs=5e-8
    )
    assert row["e2"] == pytest.approx(0.0, abs=1e-12)
    assert row["e1_azimuth_deg"] == pytest.approx(135.0, abs=1e-9)
    assert row["ezz"] == pytest.approx(-1.4434e-3, abs=5e-8)  # volume conservation
    assert row["n_faults"] == 1
    assert whole["e1"] == pytest.approx(1.4434e-3, abs=5e-8)


def test_principal_strains_against_numpy_eigh():
    # Reference library: numpy.linalg.eigh on random symmetric tensors.
    rng = np.random.default_rng(0)
    exx, eyy, exy = rng.normal(size=(3, 50))
    e1, e2, az, ezz = principal_strains(exx, eyy, exy)
    T = np.stack([np.stack([exx, exy], -1), np.stack([exy, eyy], -1)], -2)
    w, v = np.linalg.eigh(T)
    assert e1 == pytest.approx(w[:, 1]) and e2 == pytest.approx(w[:, 0])
    az_ref = np.degrees(np.arctan2(v[:, 0, 1], v[:, 1, 1])) % 180.0  # eigenvector (E, N) -> azimuth
    dif = np.abs(az - az_ref) % 180.0
    assert np.minimum(dif, 180.0 - dif) == pytest.approx(np.zeros(50), abs=1e-7)
    assert ezz == pytest.approx(-(exx + eyy))


# ----------------------------------------------------------------------------- agreement of the two routes
def test_parallel_faults_both_routes_give_h_over_S():
    # Analytic check (derived): parallel faults of heave h at spacing S give eps = h / S normal to strike,
    # and transect sums and Kostrov cells agree.
    S, h, dip, n, Lf = 2000.0, 50.0, 60.0, 5, 10000.0
    T = h * np.tan(np.radians(dip))
    lines = [shapely.LineString([(S / 2 + k * S, 0.0), (S / 2 + k * S, Lf)]) for k in range(n)]
    faults, stations = make_scene(
        lines, throw_fn=lambda k, d, L: np.full_like(d, T), dip=dip, dip_dir=np.full(n, 90.0)
    )
    cells, whole = kostrov_grid(faults, stations, cell_size_m=S)
    assert len(cells) == n * int(Lf / S)
    assert cells["exx"].to_numpy() == pytest.approx(np.full(len(cells), h / S), rel=1e-12)
    assert cells["eyy"].to_numpy() == pytest.approx(np.zeros(len(cells)), abs=1e-15)
    assert cells["e1_azimuth_deg"].to_numpy() == pytest.approx(np.full(len(cells), 90.0))
    assert whole["exx"] == pytest.approx(h / S, rel=1e-12)
    tr = gpd.GeoDataFrame(
        {"transect_id": [1, 2]},
        crs=CRS,
        geometry=[shapely.LineString([(-3000, y), (S * n + 3000, y)]) for y in (2500.0, 7000.0)],
    )
    t, _ = measure_transects(faults, stations, tr, n_draws=50)
    assert t["extension_present"].to_numpy() == pytest.approx(np.full(2, h / S), rel=1e-12)
    assert t["extension_present"].to_numpy() == pytest.approx(np.full(2, whole["e1"]), rel=1e-12)
    # e referred to the restored length: (h/S) / (1 - h/S) (analytic)
    assert t["extension"].to_numpy() == pytest.approx(np.full(2, h / (S - h)), rel=1e-12)


@pytest.mark.parametrize("cell", [777.0, 3000.0])
def test_area_weighted_cells_equal_fault_sum(cell):
    # Kostrov (1974) sum, map-view form: sum_c A_c eps_c == sum_f I_f (m_f m_f), I_f the along-strike
    # heave integral (exact: pieces are clipped at cell borders and split at stations).
    faults, stations = oblique_scene()
    cells, whole = kostrov_grid(faults, stations, cell_size_m=cell)
    M = fault_moment_sum(faults)
    A = cells["area_m2"].to_numpy()
    got = np.array(
        [
            [np.sum(A * cells["exx"]), np.sum(A * cells["exy"])],
            [np.sum(A * cells["exy"]), np.sum(A * cells["eyy"])],
        ]
    )
    assert got == pytest.approx(M, rel=1e-9, abs=1e-9 * np.abs(M).max())
    assert whole["moment_xx_m2"] == pytest.approx(M[0, 0], rel=1e-9)
    assert whole["n_faults"] == len(faults)
    # the whole-area tensor is the same moment spread over the area of the cells
    w2 = whole_area_strain(M, float(A.sum()))
    assert w2["e1"] == pytest.approx(whole["e1"], rel=1e-9)
    # grid origin aligned to multiples of the cell size (conventions: shared cells between runs)
    b = shapely.bounds(np.asarray(cells.geometry.values, dtype=object))
    assert np.allclose(np.round(b / cell), b / cell, atol=1e-9)


def test_rake_routes_agree():
    # With a rake, the cell sums and the fault sum add the same symmetric strike-slip part; this checks
    # that the grid clipping keeps it (the rake term itself is checked against an independent 3-D
    # moment-tensor sum in test_kostrov_with_rake_against_a_3d_moment_tensor_sum).
    faults, stations = oblique_scene()
    cells, whole = kostrov_grid(faults, stations, cell_size_m=1500.0, rake_deg=-70.0)
    M = fault_moment_sum(faults, rake_deg=-70.0)
    A = cells["area_m2"].to_numpy()
    assert np.sum(A * cells["exy"]) == pytest.approx(M[0, 1], rel=1e-9)
    assert np.sum(A * cells["exx"]) == pytest.approx(M[0, 0], rel=1e-9)
    # horizontal trace = sum of heave integrals / A: the strike-slip part is traceless (m perpendicular to s)
    assert (M[0, 0] + M[1, 1]) == pytest.approx(faults["heave_integral_m2"].sum(), rel=1e-9)


# ----------------------------------------------------------------------------- invariances
def test_rotation_rotates_the_tensor():
    # A rigid rotation R of the scene turns the tensor into R eps R^T (tensor transformation rule).
    faults, stations = oblique_scene()
    poly = gpd.GeoDataFrame(
        {"polygon_id": [1, 2]},
        crs=CRS,
        geometry=[shapely.box(-20000, -20000, 30000, 20000), shapely.box(-20000, -20000, 5000, 20000)],
    )
    c0, w0 = kostrov_polygons(faults, stations, poly, piece_length_m=100.0)
    for theta in (30.0, 123.0):
        f1, R = rotate_gdf(faults, theta)
        s1, _ = rotate_gdf(stations, theta)
        p1, _ = rotate_gdf(poly, theta)
        c1, w1 = kostrov_polygons(f1, s1, p1, piece_length_m=100.0)
        for i in range(2):
            E0 = np.array([[c0["exx"][i], c0["exy"][i]], [c0["exy"][i], c0["eyy"][i]]])
            E1 = np.array([[c1["exx"][i], c1["exy"][i]], [c1["exy"][i], c1["eyy"][i]]])
            assert E1 == pytest.approx(R @ E0 @ R.T, rel=1e-7, abs=1e-12)
            assert c1["e1"][i] == pytest.approx(c0["e1"][i], rel=1e-7)
            d = (c1["e1_azimuth_deg"][i] - (c0["e1_azimuth_deg"][i] - theta)) % 180.0
            assert min(d, 180.0 - d) == pytest.approx(0.0, abs=1e-6)


def test_reversing_digitising_direction_changes_nothing():
    faults, stations = oblique_scene()
    c0, _ = kostrov_grid(faults, stations, cell_size_m=1000.0)
    rev = faults.copy()
    rev.geometry = shapely.reverse(np.asarray(faults.geometry.values, dtype=object))
    st = stations.copy()
    st["dist_m"] = (
        st["fault_id"].map(dict(zip(faults["fault_id"], faults.geometry.length, strict=True))) - st["dist_m"]
    )
    c1, _ = kostrov_grid(rev, st, cell_size_m=1000.0)
    assert c1["cell_id"].tolist() == c0["cell_id"].tolist()
    for col in ("exx", "eyy", "exy", "e1", "n_faults"):
        assert c1[col].to_numpy() == pytest.approx(c0[col].to_numpy(), rel=1e-9, abs=1e-15), col


def test_unknown_dip_direction_uses_trace_normal():
    # m m is the same for m and -m (derived), so on straight traces the trace normal gives the same tensor
    # as the true dip direction, whichever way the fault dips.
    a = np.radians(20.0)
    lines = [
        shapely.LineString(
            [(x - 4000 * np.sin(a), -4000 * np.cos(a)), (x + 4000 * np.sin(a), 4000 * np.cos(a))]
        )
        for x in (0.0, 3000.0, 6000.0)
    ]
    faults, stations = make_scene(
        lines, throw_fn=lambda k, d, L: 30.0 * np.sin(np.pi * d / L), dip_dir=[110.0, 290.0, 110.0]
    )
    c0, _ = kostrov_grid(faults, stations, cell_size_m=2000.0)
    c1, _ = kostrov_grid(faults.assign(dip_dir_deg=np.nan), stations, cell_size_m=2000.0)
    for col in ("exx", "eyy", "exy"):
        assert c1[col].to_numpy() == pytest.approx(c0[col].to_numpy(), rel=1e-9, abs=1e-15), col
    assert c0["e1_azimuth_deg"].to_numpy() == pytest.approx(np.full(len(c0), 110.0))


# ----------------------------------------------------------------------------- options and bad input
def test_keep_empty_and_n_faults():
    faults, stations = oblique_scene()
    c_occ, _ = kostrov_grid(faults, stations, cell_size_m=2000.0)
    c_all, _ = kostrov_grid(faults, stations, cell_size_m=2000.0, keep_empty=True)
    assert len(c_all) == (c_all["col"].max() + 1) * (c_all["row"].max() + 1)
    assert len(c_all) > len(c_occ)
    empty = c_all["n_faults"] == 0
    assert (c_all.loc[empty, "exx"] == 0).all() and (
        c_all.loc[~empty, "cell_id"].tolist() == c_occ["cell_id"].tolist()
    )
    # n_faults counts distinct faults intersecting each cell (shapely intersection as reference)
    g = np.asarray(c_occ.geometry.values, dtype=object)
    ref = [
        int(np.sum(shapely.length(shapely.intersection(cell, np.asarray(faults.geometry.values))) > 1e-6))
        for cell in g
    ]
    assert c_occ["n_faults"].tolist() == ref


def test_pieces_clipped_to_cells_match_shapely_intersection():
    # Length of trace inside each cell from the pieces equals shapely's intersection length (reference library).
    faults, stations = oblique_scene()
    cell = 1300.0
    cells, _ = kostrov_grid(faults, stations, cell_size_m=cell)
    g = np.asarray(cells.geometry.values, dtype=object)
    x0 = float(shapely.bounds(g)[:, 0].min())
    y0 = float(shapely.bounds(g)[:, 1].min())
    p = fault_pieces(faults, stations, grid_origin=(x0, y0), cell_size_m=cell)
    ix = np.floor((p["x_m"] - x0) / cell).astype(int)
    iy = np.floor((p["y_m"] - y0) / cell).astype(int)
    got = p.groupby([iy, ix])["length_m"].sum()
    ref = {}
    for poly in g:
        bx = shapely.bounds(poly)
        key = (int(round((bx[1] - y0) / cell)), int(round((bx[0] - x0) / cell)))
        ref[key] = float(
            np.sum(shapely.length(shapely.intersection(poly, np.asarray(faults.geometry.values))))
        )
    for key, val in got.items():
        assert val == pytest.approx(ref[key], rel=1e-9, abs=1e-6)


def test_bad_input():
    faults, stations = oblique_scene()
    with pytest.raises(ParameterError):
        kostrov_grid(faults, stations, cell_size_m=-100.0)
    with pytest.raises(ParameterError):
        kostrov_grid(faults, stations, cell_size_m=0.0)
    with pytest.raises(ParameterError):
        kostrov_grid(faults, stations, cell_size_m=1.0, keep_empty=True, max_cells=1000)
    poly = gpd.GeoDataFrame({"polygon_id": [1]}, geometry=[shapely.box(-2e4, -2e4, 3e4, 2e4)], crs=CRS)
    with pytest.raises(CRSError):
        kostrov_polygons(faults, stations, poly.to_crs("EPSG:32637"))
    c, _ = kostrov_polygons(faults, stations, poly.to_crs("EPSG:32637"), reproject=True)
    assert c["n_faults"].iloc[0] == len(faults)
    # a fault without any throw is left out with a warning
    bad = faults.copy()
    bad["max_throw_m"] = np.nan
    with pytest.warns(FaultmapWarning, match="no throw known"):
        kostrov_grid(bad, stations[stations["fault_id"] != 1], cell_size_m=2000.0)


# ----------------------------------------------------------------------------- figures
def test_extension_figures():
    faults, stations = oblique_scene()
    cells, _ = kostrov_grid(faults, stations, cell_size_m=2500.0)
    hs = np.random.default_rng(0).uniform(size=(20, 30))
    b = faults.total_bounds
    fig = extension_map_figure(cells, faults, hillshade=hs, hillshade_extent=(b[0], b[2], b[1], b[3]))
    assert isinstance(fig, Figure)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "Easting (m)" and ax.get_ylabel() == "Northing (m)"
    bars = ax.collections[-1]
    segs = bars.get_segments()
    drawn = cells[(cells["e1"] > 0) & cells["e1_azimuth_deg"].notna()]
    assert len(segs) == len(drawn)
    # each bar is oriented along e1_azimuth and its length is proportional to e1
    v = np.array([s[1] - s[0] for s in segs])
    az = np.degrees(np.arctan2(v[:, 0], v[:, 1])) % 180.0
    dif = np.abs(az - drawn["e1_azimuth_deg"].to_numpy()) % 180.0
    assert np.minimum(dif, 180.0 - dif) == pytest.approx(np.zeros(len(segs)), abs=1e-6)
    ratio = np.hypot(v[:, 0], v[:, 1]) / drawn["e1"].to_numpy()
    assert ratio == pytest.approx(np.full(len(ratio), ratio[0]), rel=1e-9)
    tr = gpd.GeoDataFrame(
        {"transect_id": [1, 2, 3]},
        crs=CRS,
        geometry=[shapely.LineString([(-8000, y), (22000, y)]) for y in (-3000.0, 0.0, 3000.0)],
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FaultmapWarning)
        t, _ = measure_transects(faults, stations, tr, n_draws=100, detection_throw_m=5.0, exponent_c=1.0)
    fig2 = transect_extension_figure(t)
    ax2 = fig2.axes[0]
    assert ax2.get_ylabel() == "Extension (%)"
    labels = [tx.get_text() for tx in ax2.get_legend().get_texts()]
    # the measured panel never shows the extrapolated estimate; the second panel does
    assert not any("below detection" in s for s in labels)
    assert len(fig2.axes) == 2
    labels2 = [tx.get_text() for tx in fig2.axes[1].get_legend().get_texts()]
    assert any("below detection" in s for s in labels2)
    assert len(ax2.lines) >= 1


# ----------------------------------------------------------------------------- tool wrapper (hand-built context)
def test_tool_wrapper_grid_and_study_area():
    from pyproj import CRS as _CRS

    from faultmap.extension.strain_tool import TOOL
    from faultmap.runner import RunContext

    faults, stations = oblique_scene()
    area = gpd.GeoDataFrame({"name": ["all"]}, geometry=[shapely.box(-3e4, -3e4, 4e4, 3e4)], crs=CRS)
    ctx = RunContext(crs=_CRS.from_user_input(faults.crs), study_area=area)
    ctx.layers.update(faults=faults, throw_stations=stations)
    ctx.current_tool = "strain"
    TOOL.run(ctx, TOOL.resolve_params({"cell_size_m": 2000.0}))
    cells = ctx.layers["strain_cells"]
    M = fault_moment_sum(faults)
    assert np.sum(cells["area_m2"] * cells["exx"]) == pytest.approx(M[0, 0], rel=1e-9)
    # whole-area tensor over the study area: M / A (Kostrov 1974, map view)
    assert ctx.records["strain.whole.exx"] == pytest.approx(M[0, 0] / (7e4 * 6e4), rel=1e-6)
    assert ctx.layers["strain_areas"]["n_faults"].iloc[0] == len(faults)


def test_whole_area_strain_does_not_depend_on_the_cell_size():
    # Science review: without a study area the whole-area tensor was averaged over fault-bearing cells,
    # so it changed with the cell size. Its basis is now the convex hull of the traces: eps = M / A_hull
    # (Kostrov 1974, map view), the same for any grid, with the basis named in run_info.
    from pyproj import CRS as _CRS

    from faultmap.extension.strain_tool import TOOL
    from faultmap.runner import RunContext

    faults, stations = oblique_scene()
    hull = shapely.convex_hull(shapely.multilinestrings(faults.geometry.values)).area
    M = fault_moment_sum(faults)
    seen = []
    for cell in (1000.0, 2000.0, 5000.0):
        ctx = RunContext(crs=_CRS.from_user_input(faults.crs))
        ctx.layers.update(faults=faults, throw_stations=stations)
        ctx.current_tool = "strain"
        TOOL.run(ctx, TOOL.resolve_params({"cell_size_m": cell}))
        seen.append(ctx.records["strain.whole.exx"])
        assert ctx.records["strain.whole.area_m2"] == pytest.approx(hull, rel=1e-12)
        assert ctx.records["strain.whole_area_basis"].startswith("convex hull of the fault traces")
    assert seen == pytest.approx([M[0, 0] / hull] * 3, rel=1e-6)


def _aki_richards_moment_ned(strike_deg, dip_deg, rake_deg, m0):
    """Double-couple moment tensor in (North, East, Down) from strike, dip and rake, Aki & Richards
    (1980, Box 4.4; from memory), and by the slip-normal route M0 (u n + n u) of the same book."""
    f, d, r = np.radians([strike_deg, dip_deg, rake_deg])
    sd, cd, s2d, c2d = np.sin(d), np.cos(d), np.sin(2 * d), np.cos(2 * d)
    sr, cr, sf, cf, s2f, c2f = np.sin(r), np.cos(r), np.sin(f), np.cos(f), np.sin(2 * f), np.cos(2 * f)
    mxx = -(sd * cr * s2f + s2d * sr * sf**2)
    mxy = sd * cr * c2f + 0.5 * s2d * sr * s2f
    mxz = -(cd * cr * cf + c2d * sr * sf)
    myy = sd * cr * s2f - s2d * sr * cf**2
    myz = -(cd * cr * sf - c2d * sr * cf)
    mzz = s2d * sr
    box = m0 * np.array([[mxx, mxy, mxz], [mxy, myy, myz], [mxz, myz, mzz]])
    n = np.array([-sd * sf, sd * cf, -cd])  # normal into the hanging wall
    u = np.array([cr * cf + cd * sr * sf, cr * sf - cd * sr * cf, -sr * sd])  # hanging-wall slip
    assert box == pytest.approx(m0 * (np.outer(u, n) + np.outer(n, u)), abs=1e-12 * m0)
    return box, u


@pytest.mark.parametrize(
    ("strike", "dip", "rake"),
    [(30.0, 60.0, -90.0), (30.0, 60.0, -60.0), (200.0, 45.0, -120.0), (110.0, 70.0, -30.0)],
)
def test_kostrov_with_rake_against_a_3d_moment_tensor_sum(strike, dip, rake):
    # Independent route: Kostrov (1974) strain eps = sum M / (2 mu V) from the full 3-D moment tensor
    # of Aki & Richards (1980) for a fault of length L cutting a layer of thickness H (area L H / sin dip,
    # slip s with vertical part s |sin rake| sin dip = T), V = map area x H; its horizontal block,
    # turned from (N, E) to (E, N), must equal the map-view tensor of faultmap.
    mu, H, L, T = 3e10, 10e3, 8000.0, 40.0
    a = np.radians(strike)
    ln = shapely.LineString(
        [(-L / 2 * np.sin(a), -L / 2 * np.cos(a)), (L / 2 * np.sin(a), L / 2 * np.cos(a))]
    )
    faults, stations = make_scene(
        [ln], throw_fn=lambda k, d, L_: np.full_like(d, T), dip=dip, dip_dir=[(strike + 90.0) % 360.0]
    )
    box = shapely.box(-10000, -10000, 10000, 10000)
    poly = gpd.GeoDataFrame({"polygon_id": [1]}, geometry=[box], crs=CRS)
    cells, _ = kostrov_polygons(faults, stations, poly, rake_deg=rake)
    _, u = _aki_richards_moment_ned(strike, dip, rake, 1.0)
    slip = T / abs(u[2])  # the vertical part of the slip is the throw
    m_ned, _ = _aki_richards_moment_ned(strike, dip, rake, mu * (L * H / np.sin(np.radians(dip))) * slip)
    eps_ned = m_ned / (2.0 * mu * box.area * H)
    row = cells.iloc[0]
    assert row["exx"] == pytest.approx(eps_ned[1, 1], rel=1e-9, abs=1e-15)  # E-E
    assert row["eyy"] == pytest.approx(eps_ned[0, 0], rel=1e-9, abs=1e-15)  # N-N
    assert row["exy"] == pytest.approx(eps_ned[0, 1], rel=1e-9, abs=1e-15)  # E-N
    assert row["ezz"] == pytest.approx(eps_ned[2, 2], rel=1e-9, abs=1e-15)  # vertical, volume conserved
