"""The Drovessin Graben: faultmap's fictional demo rift.

The Drovessin Graben is invented. No such place exists; it is placed in
UTM zone 53S (EPSG:32753) in a stable continental interior where there is no
rift, so that nobody mistakes it for real data. It is a 30 km x 30 km window
on a NNE-trending graben (axis azimuth 20 deg) about 15 km wide:

* two opposite-dipping border faults (the Western Boundary Fault dipping
  ESE and the Eastern Boundary Fault dipping WNW, 14-15.5 km long);
* 20 intrabasinal faults, 2-9 km long, synthetic and antithetic, including
  the Talvenic relay system: three en-echelon segments whose tips overlap
  by 0.6-0.7 km across steps of about 0.6 km;
* maximum throws following D = gamma L with gamma drawn log-normally about
  0.02 and kept in 0.01-0.03 (Schlische et al. 1996 give D ~ 0.03 L for
  small rift normal faults), dips 45-70 deg;
* four faults marked active with the age of the offset surface (40-130 ka).

The DEM is built physically by :func:`faultmap.synthetic.builder.build_dem` (pre-fault
plane sloping 0.6 deg to the SSW with gentle relief, every fault moving its
hanging wall down by the throw and away by the heave), so the truth is known.
The fault layer looks like a real user's: ``name``, ``dip`` and ``dip_dir``
with gaps, ``active`` (0/1) and ``surface_age_ka``; six traces are
digitised against the right-hand rule and one is stored in two parts.

Use :func:`write_demo_area` to write the files; everything is deterministic.
"""

from __future__ import annotations

import math
import os
import pathlib
from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from shapely.geometry import LineString, MultiLineString, Polygon

from faultmap.errors import OutputError, ParameterError
from faultmap.synthetic import SceneTruth, build_dem

__all__ = [
    "SCENARIO_NAME",
    "CRS_EPSG",
    "NODATA",
    "AXIS_AZIMUTH_DEG",
    "demo_grid",
    "demo_faults",
    "demo_transects",
    "demo_nodata_polygons",
    "build_demo_scene",
    "demo_truth_tables",
    "write_demo_area",
]

#: Name of the fictional demo rift.
SCENARIO_NAME = "Drovessin Graben"
#: Working CRS of the demo area: WGS 84 / UTM zone 53S.
CRS_EPSG = 32753
#: Nodata value of the written DEM.
NODATA = -9999.0
#: Azimuth of the rift axis, degrees.
AXIS_AZIMUTH_DEG = 20.0

_CENTRE_XY = (485_000.0, 7_295_000.0)  # about 24.4 S, 134.9 E: no rift there
_EXTENT_M = 30_000.0
_BASE_NPIX = 1200  # at scale 1: 1200 x 1200 pixels of 25 m
_SEED = 53_2107
_TRANSECT_U_KM = (-6.0, 0.0, 6.5)  # along-axis positions of the transects
_TRANSECT_HALF_KM = 10.0

# Axis frame: u along the axis (azimuth 20), v across it (azimuth 110).
_A_HAT = np.array([math.sin(math.radians(AXIS_AZIMUTH_DEG)), math.cos(math.radians(AXIS_AZIMUTH_DEG))])
_C_HAT = np.array([math.sin(math.radians(AXIS_AZIMUTH_DEG + 90)), math.cos(math.radians(AXIS_AZIMUTH_DEG + 90))])


@dataclass(frozen=True)
class _Spec:
    name: str
    u0: float  # km along the axis
    u1: float
    v: float  # km across the axis (positive to the ESE)
    polarity: int  # +1 dips ESE (towards +v), -1 dips WNW
    dip: float
    shape: str = "plateau"
    peak_pos: float = 0.5
    plateau_frac: float = 0.0  # 0 with "plateau" = a cosine bell
    bow: float = 0.0  # km, mid-trace offset across the axis (gentle curvature)
    rot: float = 0.0  # deg, rotation of the trace about its centre
    system: str = ""
    active: bool = False
    age_ka: float = float("nan")
    dip_known: bool = True
    dip_dir_known: bool = True
    reversed: bool = False  # digitised against the right-hand rule
    multipart: bool = False
    border: bool = False


# fmt: off
_SPECS: tuple[_Spec, ...] = (
    _Spec("Western Boundary Fault", -8.0, 7.5, -7.0, +1, 58, "plateau", 0.55, 0.35, bow=-0.4, border=True),
    _Spec("Eastern Boundary Fault", -7.0, 7.0, 7.0, -1, 62, "plateau", 0.5, 0.3, bow=0.35, rot=1.5, border=True, reversed=True),
    _Spec("Talvenic Relay South", -9.0, -3.6, -2.7, +1, 60, "triangular", 0.65, system="Talvenic relay system", dip_known=False),
    _Spec("Talvenic Relay Centre", -4.3, 1.2, -2.05, +1, 60, "triangular", 0.5, system="Talvenic relay system"),
    _Spec("Talvenic Relay North", 0.6, 5.4, -1.45, +1, 60, "triangular", 0.35, system="Talvenic relay system", dip_dir_known=False),
    _Spec("Ombrelu Creek Fault", 2.5, 9.0, -5.0, +1, 55, "plateau", 0.5, 0.4, bow=0.15),
    _Spec("Ketharn Fault", -10.0, -5.0, -5.0, -1, 65, reversed=True),
    _Spec("Vorlesk Hill Fault", -1.8, 1.6, -4.2, -1, 60, "triangular", 0.4, dip_known=False),
    _Spec("Central Fault", -6.5, 1.8, 0.6, -1, 57, "plateau", 0.45, 0.2, bow=-0.2, multipart=True),
    _Spec("Ispravel Fault", 4.2, 9.6, 0.5, +1, 63, rot=-3.0, active=True, age_ka=120.0),
    _Spec("Yselkor Fault", -10.5, -6.6, 1.8, +1, 50, "plateau", 0.5, 0.3, dip_dir_known=False),
    _Spec("Fendrassik Fault", -3.0, 3.2, 2.7, +1, 68, "triangular", 0.45, bow=0.1, reversed=True),
    _Spec("Mavrunel Fault", 4.8, 10.2, 3.6, -1, 52, "triangular", 0.55, dip_known=False),
    _Spec("Quorrith Fault", -7.2, -3.6, 4.3, -1, 60, reversed=True),
    _Spec("Hesparuk Fault", -2.2, 4.6, 5.4, -1, 47, "plateau", 0.6, 0.2, rot=2.5, active=True, age_ka=130.0),
    _Spec("Truvelan Fault", 6.0, 10.6, -3.2, -1, 66, "plateau", 0.5, 0.4, dip_dir_known=False),
    _Spec("Olmquessa Fault", 7.8, 11.0, 6.2, +1, 54, "triangular", 0.5, active=True, age_ka=75.0),
    _Spec("Dravetsi Fault", -11.0, -8.6, -6.3, +1, 61, "triangular", 0.6, dip_known=False),
    _Spec("Pelkiroth Fault", 6.0, 9.0, -0.7, -1, 58, reversed=True, dip_known=False, dip_dir_known=False),
    _Spec("Zuvarne Fault", -10.2, -7.4, 3.2, -1, 56, dip_known=False),
    _Spec("Nimmerov Fault", 2.0, 5.2, -3.4, +1, 64, "triangular", 0.5, rot=-2.0, active=True, age_ka=40.0),
    _Spec("Ulvastro Fault", -4.6, -2.3, -5.6, -1, 59, "plateau", 0.5, 0.3, reversed=True),
)
# fmt: on


def _uv_to_xy(u_km: np.ndarray, v_km: np.ndarray) -> np.ndarray:
    u = np.asarray(u_km, dtype=float)[..., None] * 1000.0
    v = np.asarray(v_km, dtype=float)[..., None] * 1000.0
    return np.asarray(_CENTRE_XY) + u * _A_HAT + v * _C_HAT


def _trace_uv(s: _Spec, n_vertices: int = 12) -> tuple[np.ndarray, np.ndarray]:
    """Vertices in the axis frame (km), ordered along the right-hand-rule strike."""
    t = np.linspace(0.0, 1.0, n_vertices)
    u = s.u0 + (s.u1 - s.u0) * t
    v = s.v + s.bow * np.sin(np.pi * t)
    uc, vc = 0.5 * (s.u0 + s.u1), s.v
    r = math.radians(s.rot)
    du, dv = u - uc, v - vc
    u, v = uc + du * math.cos(r) - dv * math.sin(r), vc + du * math.sin(r) + dv * math.cos(r)
    if s.polarity < 0:  # strike 200: digitise from u1 to u0 so the fault dips to the right
        u, v = u[::-1], v[::-1]
    return u, v


def demo_grid(scale: float = 1.0) -> dict[str, Any]:
    """Grid of the demo DEM at a given scale.

    Parameters
    ----------
    scale : float
        Pixel-count factor, 0 < scale <= 2: ``round(1200 * scale)`` pixels a
        side over the same 30 km square (scale 1: 1200 x 1200 pixels of 25 m).

    Returns
    -------
    dict
        ``origin_xy`` (top-left corner, m), ``pixel_size_m`` and ``shape``.
    """
    scale = float(scale)
    if not (0.0 < scale <= 2.0) or not math.isfinite(scale):
        raise ParameterError(f"scale must be in (0, 2], got {scale}; use e.g. 0.3 for a quick small demo")
    npix = max(int(round(_BASE_NPIX * scale)), 32)
    px = _EXTENT_M / npix
    x0 = _CENTRE_XY[0] - _EXTENT_M / 2.0
    y0 = _CENTRE_XY[1] + _EXTENT_M / 2.0
    return {"origin_xy": (x0, y0), "pixel_size_m": px, "shape": (npix, npix)}


def demo_faults() -> gpd.GeoDataFrame:
    """Return the scenario's faults as built (right-hand-rule traces, true attributes).

    Returns
    -------
    geopandas.GeoDataFrame
        EPSG:32753. One row per fault in scenario order: ``fault_id`` (1..N),
        ``name``, ``dip_deg``, ``dip_dir_deg``, ``max_throw_m``, ``gamma``
        (max throw / length), ``profile_shape``, ``peak_pos``, ``plateau_frac``,
        ``hw_extent_m``, ``system_id``, ``system_name``, ``border``,
        ``active``, ``surface_age_ka``, ``dip_known``, ``dip_dir_known``,
        ``digitised_reversed``, ``multipart``, ``length_m``; geometry the
        trace digitised along its right-hand-rule strike.
    """
    rng = np.random.default_rng(_SEED)
    gammas = np.clip(0.02 * np.exp(0.25 * rng.standard_normal(len(_SPECS))), 0.01, 0.03)
    systems: dict[str, int] = {}
    rows = []
    next_system = 1
    for k, s in enumerate(_SPECS):
        u, v = _trace_uv(s)
        line = LineString(_uv_to_xy(u, v))
        xy = np.asarray(line.coords)
        chord = xy[-1] - xy[0]
        strike = math.degrees(math.atan2(chord[0], chord[1])) % 360.0
        length = float(line.length)
        if s.system:
            if s.system not in systems:
                systems[s.system] = next_system
                next_system += 1
            sid = systems[s.system]
        else:
            sid = next_system
            next_system += 1
        rows.append({
            "fault_id": k + 1, "name": s.name, "dip_deg": float(s.dip),
            "dip_dir_deg": round((strike + 90.0) % 360.0, 3),
            "max_throw_m": round(float(gammas[k]) * length, 2),
            "gamma": float(gammas[k]), "profile_shape": s.shape, "peak_pos": s.peak_pos,
            "plateau_frac": s.plateau_frac,
            "hw_extent_m": max(0.5 * length, 1500.0),
            "system_id": sid, "system_name": s.system, "border": s.border,
            "active": s.active, "surface_age_ka": s.age_ka,
            "dip_known": s.dip_known, "dip_dir_known": s.dip_dir_known,
            "digitised_reversed": s.reversed, "multipart": s.multipart,
            "length_m": length, "geometry": line,
        })
    gdf = gpd.GeoDataFrame(rows, geometry="geometry", crs=f"EPSG:{CRS_EPSG}")
    gdf["gamma"] = gdf["max_throw_m"] / gdf["length_m"]
    return gdf


def demo_transects() -> gpd.GeoDataFrame:
    """Transects across the rift, perpendicular to its axis, digitised WNW to ESE.

    Returns
    -------
    geopandas.GeoDataFrame
        EPSG:32753, columns ``transect_id`` (1..3) and ``name``.
    """
    rows = []
    for k, u in enumerate(_TRANSECT_U_KM):
        xy = _uv_to_xy(np.array([u, u]), np.array([-_TRANSECT_HALF_KM, _TRANSECT_HALF_KM]))
        rows.append({"transect_id": k + 1, "name": f"Section {chr(ord('A') + k)}",
                     "geometry": LineString(xy)})
    return gpd.GeoDataFrame(rows, geometry="geometry", crs=f"EPSG:{CRS_EPSG}")


def demo_nodata_polygons() -> list[Polygon]:
    """Return the nodata patch of the demo DEM (a gap over the NNE tip of the Fendrassik Fault)."""
    u = np.array([2.3, 3.3, 4.3, 4.1, 3.0, 2.2])
    v = np.array([1.9, 1.6, 2.1, 3.2, 3.4, 2.8])
    return [Polygon(_uv_to_xy(u, v))]


def build_demo_scene(scale: float = 1.0) -> tuple[np.ndarray, Any, SceneTruth]:
    """Build the demo DEM in memory.

    Parameters
    ----------
    scale : float
        Pixel-count factor (see :func:`demo_grid`).

    Returns
    -------
    dem, transform, truth
        As :func:`faultmap.synthetic.builder.build_dem`: float32 array (NaN for
        nodata), rasterio Affine, :class:`faultmap.synthetic.builder.SceneTruth`.
    """
    grid = demo_grid(scale)
    faults = demo_faults()
    return build_dem(
        faults, **grid,
        base_elevation_m=900.0,
        regional_slope_deg=0.6, regional_slope_azimuth_deg=200.0,
        relief_m=4.0, relief_wavelength_m=3000.0,
        scarp_width_m=max(60.0, 2.0 * grid["pixel_size_m"]),
        seed=_SEED,
        nodata_polygons=demo_nodata_polygons(),
        hanging_wall_smoothing=0.4,
    )


def _user_layer(faults: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """Return the faults as a user would hand them in."""
    geoms = []
    for r in faults.itertuples(index=False):
        coords = np.asarray(r.geometry.coords)
        if r.digitised_reversed:
            coords = coords[::-1]
        if r.multipart:
            k = len(coords) // 2
            geoms.append(MultiLineString([coords[: k + 1], coords[k:]]))
        else:
            geoms.append(LineString(coords))
    return gpd.GeoDataFrame({
        "name": faults["name"].astype(str),
        "dip": np.where(faults["dip_known"], faults["dip_deg"], np.nan),
        "dip_dir": np.where(faults["dip_dir_known"], faults["dip_dir_deg"], np.nan),
        "active": faults["active"].astype(np.int32),
        "surface_age_ka": np.where(faults["active"], faults["surface_age_ka"], np.nan),
    }, geometry=geoms, crs=faults.crs)


def demo_truth_tables(truth: SceneTruth, faults: gpd.GeoDataFrame | None = None,
                      transects: gpd.GeoDataFrame | None = None,
                      *, station_spacing_m: float = 100.0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Per-fault truth table and true throw at stations along every fault.

    Parameters
    ----------
    truth : SceneTruth
        From :func:`build_demo_scene`.
    faults, transects : GeoDataFrame, optional
        Defaults :func:`demo_faults` and :func:`demo_transects`.
    station_spacing_m : float
        Station spacing, m (at most; tips included).

    Returns
    -------
    truth_df : pandas.DataFrame
        One row per fault (see ``demo_area/README.md`` for the columns).
    stations_df : pandas.DataFrame
        ``fault_id``, ``name``, ``dist_m`` (from the start vertex of the trace
        as written in ``faults.gpkg``), ``dist_rhr_m`` (from the tip the
        right-hand-rule strike starts at), ``x``, ``y``, ``throw_m``,
        ``heave_m``.
    """
    faults = demo_faults() if faults is None else faults
    transects = demo_transects() if transects is None else transects
    tf = truth.faults.set_index("fault_id")
    df = faults.drop(columns="geometry").copy()
    df["length_m"] = tf.loc[df["fault_id"], "length_m"].to_numpy()
    df["strike_deg"] = (df["dip_dir_deg"] - 90.0) % 360.0
    df["max_heave_m"] = tf.loc[df["fault_id"], "max_heave_m"].to_numpy()
    rhr_dist = tf.loc[df["fault_id"], "max_throw_dist_m"].to_numpy()
    df["max_throw_dist_m"] = np.where(df["digitised_reversed"], df["length_m"] - rhr_dist, rhr_dist)
    df["throw_rate_mm_yr"] = np.where(df["active"], df["max_throw_m"] / df["surface_age_ka"], np.nan)
    df["net_slip_m"] = df["max_throw_m"] / np.sin(np.radians(df["dip_deg"]))

    nodata = shapely.union_all(demo_nodata_polygons())
    ends = [(shapely.Point(g.coords[0]), shapely.Point(g.coords[-1])) for g in faults.geometry]
    df["tip_in_nodata"] = [bool(nodata.distance(a) < 250.0 or nodata.distance(b) < 250.0) for a, b in ends]

    # Across-axis extent of the faulted zone.
    allxy = np.vstack([np.asarray(g.coords) for g in faults.geometry])
    across = (allxy - np.asarray(_CENTRE_XY)) @ _C_HAT
    df["rift_axis_azimuth_deg"] = AXIS_AZIMUTH_DEG
    df["rift_width_km"] = (across.max() - across.min()) / 1000.0

    # Crossings with the transects.
    for t in transects.itertuples(index=False):
        tid = int(t.transect_id)
        txy = np.asarray(t.geometry.coords)
        taz = math.degrees(math.atan2(*(txy[-1] - txy[0]))) % 360.0
        heave = np.full(len(df), np.nan)
        heave_along = np.full(len(df), np.nan)
        pos = np.full(len(df), np.nan)
        for k, r in enumerate(faults.itertuples(index=False)):
            hit = t.geometry.intersection(r.geometry)
            if hit.is_empty:
                continue
            pt = hit if hit.geom_type == "Point" else shapely.get_geometry(hit, 0)
            dist = r.geometry.project(pt)
            h = float(truth.heave_at(r.fault_id, dist))
            heave[k] = h
            heave_along[k] = h * abs(math.cos(math.radians(r.dip_dir_deg - taz)))
            pos[k] = t.geometry.project(pt)
        df[f"heave_t{tid}_m"] = heave
        df[f"heave_along_t{tid}_m"] = heave_along
        l1 = float(t.geometry.length)
        sh = float(np.nansum(heave_along))
        df[f"transect_{tid}_length_m"] = l1
        df[f"transect_{tid}_n_crossings"] = int(np.isfinite(heave).sum())
        df[f"transect_{tid}_sum_heave_m"] = float(np.nansum(heave))
        df[f"transect_{tid}_sum_heave_along_m"] = sh
        df[f"transect_{tid}_extension"] = sh / (l1 - sh)
        df[f"transect_{tid}_beta"] = l1 / (l1 - sh)
        df[f"transect_{tid}_width_km"] = (np.nanmax(pos) - np.nanmin(pos)) / 1000.0

    first = ["fault_id", "name", "length_m", "max_throw_m", "dip_deg", "dip_dir_deg", "active",
             "surface_age_ka"]
    df = df[first + [c for c in df.columns if c not in first]]

    st = truth.stations(spacing_m=station_spacing_m)
    rev = df.set_index("fault_id")["digitised_reversed"]
    length = df.set_index("fault_id")["length_m"]
    fid = st["fault_id"].to_numpy()
    dist_rhr = st["dist_m"].to_numpy()
    is_rev = rev.loc[fid].to_numpy()
    stations = pd.DataFrame({
        "fault_id": fid,
        "name": st["name"].to_numpy(),
        "dist_m": np.where(is_rev, length.loc[fid].to_numpy() - dist_rhr, dist_rhr),
        "dist_rhr_m": dist_rhr,
        "x": st.geometry.x.to_numpy(),
        "y": st.geometry.y.to_numpy(),
        "throw_m": st["throw_m"].to_numpy(),
        "heave_m": st["heave_m"].to_numpy(),
    })
    return df, stations


_PROJECT_TOML = """\
# faultmap project file for the {name} demo area (fictional; see README).
# Paths are relative to this file.

[inputs]
faults = "faults.gpkg"
faults_layer = "traces"
dem = "dem.tif"
transects = "transects.gpkg"
transects_layer = "transects"

[output]
gpkg = "results/demo_results.gpkg"
figures = "results/figures/"

[width]
# subsidence from the transects' beta: a lower bound (brittle upper-crust extension only; see run_info)
beta_from_transects = true
"""


def _tmp_path(final: pathlib.Path) -> pathlib.Path:
    tmp = final.with_name(f".{final.stem}.tmp{os.getpid()}{final.suffix}")
    if tmp.exists():
        tmp.unlink()
    return tmp


def _commit(tmp: pathlib.Path, final: pathlib.Path) -> None:
    os.replace(tmp, final)


#: File that marks a folder as written by the demo (so a later demo may replace its files).
DEMO_MARKER = ".faultmap_demo"


def _check_demo_folder(folder: pathlib.Path) -> None:
    """Refuse a folder that holds anything but an earlier demo (nothing is written before this)."""
    if folder.exists() and not folder.is_dir():
        raise OutputError(f"demo folder {folder} is a file; choose a new or empty folder")
    if not folder.is_dir() or (folder / DEMO_MARKER).is_file():
        return
    found = sorted(p.name for p in folder.iterdir())
    if found:
        shown = ", ".join(found[:5]) + (" ..." if len(found) > 5 else "")
        raise OutputError(
            f"demo folder {folder} already holds files that an earlier demo did not write ({shown}); "
            "choose a new or empty folder so that nothing of yours is overwritten"
        )


def write_demo_area(folder: str | os.PathLike[str], *, scale: float = 1.0) -> dict[str, pathlib.Path]:
    """Write the Drovessin Graben demo files into ``folder``.

    Parameters
    ----------
    folder : path
        Output folder: new, empty, or one an earlier demo wrote (it holds the marker file
        ``.faultmap_demo``); that demo's files are replaced. A folder holding other files is refused
        before anything is written, so the demo never overwrites a user's data.
    scale : float
        Pixel-count factor, 0 < scale <= 2 (1: 1200 x 1200 pixels of 25 m;
        0.3: 360 x 360 pixels of 83.3 m over the same area and faults).

    Returns
    -------
    dict of str to pathlib.Path
        Keys ``faults``, ``dem``, ``transects``, ``truth``,
        ``truth_stations``, ``project``, and for the run without a DEM
        ``field_throws``, ``fault_database``, ``project_without_dem``
        (:mod:`demo_area.database`).

    Notes
    -----
    Each file is written under a temporary name in ``folder`` and moved into
    place with :func:`os.replace`, so a reader never sees half a file.
    """
    import rasterio  # local: only this function touches files

    folder = pathlib.Path(folder)
    _check_demo_folder(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
        (folder / DEMO_MARKER).write_text(f"{SCENARIO_NAME}: fictional demo area written by faultmap\n",
                                           encoding="utf-8")
    except OSError as exc:
        raise OutputError(f"cannot create demo folder {folder}: {exc.strerror}; choose a writable folder") from None
    paths = {
        "faults": folder / "faults.gpkg",
        "dem": folder / "dem.tif",
        "transects": folder / "transects.gpkg",
        "truth": folder / "truth.csv",
        "truth_stations": folder / "truth_stations.csv",
        "project": folder / "project.toml",
        "field_throws": folder / "field_throws.gpkg",
        "fault_database": folder / "fault_database.gpkg",
        "project_without_dem": folder / "project_without_dem.toml",
    }

    dem, transform, truth = build_demo_scene(scale)
    faults = demo_faults()
    transects = demo_transects()
    truth_df, stations = demo_truth_tables(truth, faults, transects)

    try:
        tmp = _tmp_path(paths["faults"])
        _user_layer(faults).to_file(tmp, layer="traces", driver="GPKG", engine="pyogrio")
        _commit(tmp, paths["faults"])

        tmp = _tmp_path(paths["transects"])
        transects.to_file(tmp, layer="transects", driver="GPKG", engine="pyogrio")
        _commit(tmp, paths["transects"])

        tmp = _tmp_path(paths["dem"])
        data = np.where(np.isnan(dem), np.float32(NODATA), dem).astype(np.float32)
        profile = {
            "driver": "GTiff", "dtype": "float32", "count": 1,
            "width": dem.shape[1], "height": dem.shape[0],
            "crs": f"EPSG:{CRS_EPSG}", "transform": transform, "nodata": NODATA,
            "tiled": True, "blockxsize": 256, "blockysize": 256,
            "compress": "deflate", "predictor": 3,
        }
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(data, 1)
            dst.update_tags(scenario=SCENARIO_NAME, note="fictional demo area built by faultmap")
        _commit(tmp, paths["dem"])

        for key, table in (("truth", truth_df), ("truth_stations", stations)):
            tmp = _tmp_path(paths[key])
            table.to_csv(tmp, index=False, float_format="%.10g")
            _commit(tmp, paths[key])

        tmp = _tmp_path(paths["project"])
        tmp.write_text(_PROJECT_TOML.format(name=SCENARIO_NAME), encoding="utf-8")
        _commit(tmp, paths["project"])

        # the second, DEM-free run: field throws, a fault-database table and their project file
        from demo_area.database import PROJECT_WITHOUT_DEM_TOML, demo_fault_database, demo_field_throws

        layers = (
            ("field_throws", "throws", demo_field_throws(stations, truth_df, crs=faults.crs)),
            ("fault_database", "faults", demo_fault_database(_user_layer(faults), truth_df)),
        )
        for key, layer, gdf in layers:
            tmp = _tmp_path(paths[key])
            gdf.to_file(tmp, layer=layer, driver="GPKG", engine="pyogrio")
            _commit(tmp, paths[key])
        tmp = _tmp_path(paths["project_without_dem"])
        tmp.write_text(PROJECT_WITHOUT_DEM_TOML.format(name=SCENARIO_NAME), encoding="utf-8")
        _commit(tmp, paths["project_without_dem"])
    except OSError as exc:
        raise OutputError(f"cannot write the demo area into {folder}: {exc}; check space and permissions") from None
    return paths
