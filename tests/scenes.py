"""Unseen synthetic scenes for end-to-end validation of faultmap.

Every scene here is invented (fictional places, not real data) and is built
the same physical way as the demo area: :func:`faultmap.synthetic.builder.build_dem`
moves each fault's hanging wall down by the throw and away by the heave
(h = T / tan(dip)) on a pre-fault surface with a regional slope and gentle
random relief, and a nodata patch is cut out. The scenes differ from the
demo (Drovessin Graben: axis 20 deg, EPSG:32753, 22 faults, 25-83 m pixels,
seed 532107) in seed, geometry, orientation, fault count, pixel size and
CRS:

* :func:`narrow_rift_scene` -- the Skervolin Trough: a graben with its axis at
  35 deg in EPSG:32633, two border faults and eight intrabasinal faults in a
  faulted zone about 35 km across, three transects (one oblique), three
  active faults with surface ages.
* :func:`scaling_scene` -- the Plessovar Fault Field: a random population built
  with D = gamma L (n = 1), axis 140 deg, in a custom transverse Mercator
  CRS on GRS80; some traces digitised against the right-hand rule and some
  without a dip direction (the down-thrown side must come from the DEM).
* :func:`wide_rift_scene` -- the Sundravelk Rift Province: a wide rift about
  300 km across, axis 75 deg, EPSG:32614, faults 20-80 km long with throws
  of hundreds of metres to about 2 km on coarse pixels.

Each builder writes ``faults.gpkg`` (layer ``traces``, as a user would hand
it in: ``name``, ``dip``, ``dip_dir``, ``active``, ``surface_age_ka``),
``dem.tif`` and, when the scene has them, ``transects.gpkg`` (layer
``transects``) into a folder and returns a :class:`Scene` with the paths
and the truth. The truth helpers (:func:`transect_truth`,
:func:`heave_moment_truth`, :func:`across_axis_extent_km`) compute, from the
build parameters alone, what the tools should find. Scenes take a
``pixel_size_m`` so the benchmark can build bigger versions of the same
geometry.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import CRS
from shapely.geometry import LineString, Polygon

from faultmap.synthetic import SceneTruth, build_dem, fault_population, grid_spec

__all__ = [
    "Scene",
    "unit_vector",
    "uv_to_xy",
    "narrow_rift_scene",
    "scaling_scene",
    "wide_rift_scene",
    "write_scene",
    "transect_truth",
    "heave_moment_truth",
    "across_axis_extent_km",
    "principal",
    "close_faults_scene",
    "read_layers",
    "match_truth",
    "throw_errors",
    "strain_sum",
    "axial_diff_deg",
    "NODATA",
]

#: Nodata value written to every scene DEM.
NODATA = -32768.0


@dataclass
class Scene:
    """A written scene: file paths and the truth it was built from.

    Attributes
    ----------
    name : str
        Fictional scene name.
    folder : pathlib.Path
    faults, dem : pathlib.Path
        ``faults.gpkg`` (layer ``traces``) and ``dem.tif``.
    transects : pathlib.Path or None
        ``transects.gpkg`` (layer ``transects``) if the scene has transects.
    truth : faultmap.synthetic.builder.SceneTruth
        From :func:`faultmap.synthetic.builder.build_dem` (traces along the
        right-hand-rule strike).
    table : geopandas.GeoDataFrame
        One row per fault: ``fault_id`` (build id), ``name``, ``length_m``,
        ``max_throw_m``, ``dip_deg``, ``dip_dir_deg``, ``max_heave_m``,
        ``active``, ``surface_age_ka``, ``censored_truth`` (a tip lies in or
        next to the nodata patch or outside the DEM), ``gamma``.
    transect_table : geopandas.GeoDataFrame or None
        The transects as written (``transect_id``, ``name``).
    axis_azimuth_deg : float
        Azimuth of the rift axis, degrees.
    crs : pyproj.CRS
    pixel_size_m : float
    shape : (nrows, ncols)
    nodata : list of shapely Polygon
    gamma : float or None
        D = gamma L prefactor the scene was built with (throw, m/m), if any.
    """

    name: str
    folder: Path
    faults: Path
    dem: Path
    transects: Path | None
    truth: SceneTruth
    table: gpd.GeoDataFrame
    transect_table: gpd.GeoDataFrame | None
    axis_azimuth_deg: float
    crs: CRS
    pixel_size_m: float
    shape: tuple[int, int]
    nodata: list = field(default_factory=list)
    gamma: float | None = None

    def inputs(self) -> dict[str, str]:
        """Inputs for :func:`faultmap.runner.run_tools`."""
        out = {"faults": str(self.faults), "faults_layer": "traces", "dem": str(self.dem)}
        if self.transects is not None:
            out["transects"] = str(self.transects)
            out["transects_layer"] = "transects"
        return out


# ---------------------------------------------------------------------------
# Frames
# ---------------------------------------------------------------------------
def unit_vector(azimuth_deg: float) -> np.ndarray:
    """(east, north) unit vector of an azimuth (degrees clockwise from north)."""
    a = math.radians(azimuth_deg)
    return np.array([math.sin(a), math.cos(a)])


def uv_to_xy(u_m, v_m, *, centre_xy, axis_azimuth_deg: float) -> np.ndarray:
    """Axis frame (u along the axis, v across it, to the right) to map x, y (m)."""
    u = np.asarray(u_m, dtype=float)[..., None]
    v = np.asarray(v_m, dtype=float)[..., None]
    return (np.asarray(centre_xy, dtype=float) + u * unit_vector(axis_azimuth_deg)
            + v * unit_vector(axis_azimuth_deg + 90.0))


def _rotate_population(pop: gpd.GeoDataFrame, *, centre_xy, axis_azimuth_deg: float, crs) -> gpd.GeoDataFrame:
    """Move a population built in a local frame (axis = grid north, origin 0, 0) to the map."""
    out = pop.copy()
    geoms = []
    for g in pop.geometry:
        xy = np.asarray(g.coords)
        geoms.append(LineString(uv_to_xy(xy[:, 1], xy[:, 0], centre_xy=centre_xy,
                                         axis_azimuth_deg=axis_azimuth_deg)))
    out["dip_dir_deg"] = (pop["dip_dir_deg"] + axis_azimuth_deg) % 360.0
    out["strike_deg"] = (pop["strike_deg"] + axis_azimuth_deg) % 360.0
    return gpd.GeoDataFrame(out.drop(columns="geometry"), geometry=geoms, crs=crs)


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------
def write_scene(folder, *, name: str, faults: gpd.GeoDataFrame, grid: dict, build: dict,
                nodata: list, axis_azimuth_deg: float, crs, transects: gpd.GeoDataFrame | None = None,
                reversed_ids=(), no_dip_dir_ids=(), gamma: float | None = None) -> Scene:
    """Build the DEM of ``faults`` and write the scene files into ``folder``.

    Parameters
    ----------
    folder : path
        Created if missing.
    faults : GeoDataFrame
        Build table: ``fault_id``, ``name``, ``dip_deg``, ``dip_dir_deg``,
        ``max_throw_m``, ``profile_shape`` (optional ``peak_pos``,
        ``plateau_frac``, ``hw_extent_m``, ``active``, ``surface_age_ka``),
        traces along the right-hand-rule strike.
    grid : dict
        ``origin_xy``, ``pixel_size_m``, ``shape`` for :func:`build_dem`.
    build : dict
        Other keyword arguments of :func:`build_dem` (slope, relief, seed...).
    nodata : list of Polygon
        Nodata patches.
    reversed_ids, no_dip_dir_ids : iterables of int
        Faults digitised against the right-hand rule; faults written without
        a dip direction.

    Returns
    -------
    Scene
    """
    import rasterio

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    crs = CRS.from_user_input(crs)
    faults = faults.set_crs(crs, allow_override=True)
    dem, transform, truth = build_dem(faults, **grid, **build, nodata_polygons=nodata, crs=crs)

    # user layer
    geoms = []
    for r in faults.itertuples(index=False):
        xy = np.asarray(r.geometry.coords)
        geoms.append(LineString(xy[::-1] if r.fault_id in set(reversed_ids) else xy))
    active = faults["active"].to_numpy(bool) if "active" in faults else np.zeros(len(faults), bool)
    ages = faults["surface_age_ka"].to_numpy(float) if "surface_age_ka" in faults else np.full(len(faults), np.nan)
    user = gpd.GeoDataFrame({
        "name": faults["name"].astype(str).to_numpy(),
        "dip": faults["dip_deg"].to_numpy(float),
        "dip_dir": np.where(np.isin(faults["fault_id"], list(no_dip_dir_ids)), np.nan,
                            faults["dip_dir_deg"].to_numpy(float)),
        "active": active.astype(np.int32),
        "surface_age_ka": np.where(active, ages, np.nan),
    }, geometry=geoms, crs=crs)
    paths = {"faults": folder / "faults.gpkg", "dem": folder / "dem.tif"}
    user.to_file(paths["faults"], layer="traces", driver="GPKG", engine="pyogrio")
    tpath = None
    if transects is not None:
        tpath = folder / "transects.gpkg"
        transects.set_crs(crs, allow_override=True).to_file(tpath, layer="transects", driver="GPKG",
                                                            engine="pyogrio")
    data = np.where(np.isnan(dem), np.float32(NODATA), dem).astype(np.float32)
    profile = {"driver": "GTiff", "dtype": "float32", "count": 1, "width": dem.shape[1],
               "height": dem.shape[0], "crs": crs, "transform": transform, "nodata": NODATA,
               "tiled": True, "blockxsize": 256, "blockysize": 256, "compress": "deflate"}
    with rasterio.open(paths["dem"], "w", **profile) as dst:
        dst.write(data, 1)

    # truth table
    tf = truth.faults.copy()
    tf["active"] = active
    tf["surface_age_ka"] = np.where(active, ages, np.nan)
    tf["gamma"] = tf["max_throw_m"] / tf["length_m"]
    px = float(grid["pixel_size_m"])
    (x0, y0), (nr, nc) = grid["origin_xy"], grid["shape"]
    inner = shapely.box(x0 + 2 * px, y0 - nr * px + 2 * px, x0 + nc * px - 2 * px, y0 - 2 * px)
    voids = shapely.union_all([p.buffer(3 * px) for p in nodata]) if nodata else Polygon()
    cens = []
    for g in tf.geometry:
        tips = [shapely.Point(g.coords[0]), shapely.Point(g.coords[-1])]
        cens.append(any((not inner.contains(t)) or voids.contains(t) for t in tips))
    tf["censored_truth"] = cens
    return Scene(name=name, folder=folder, faults=paths["faults"], dem=paths["dem"], transects=tpath,
                 truth=truth, table=tf, transect_table=transects, axis_azimuth_deg=float(axis_azimuth_deg),
                 crs=crs, pixel_size_m=px, shape=(int(nr), int(nc)), nodata=list(nodata), gamma=gamma)


# ---------------------------------------------------------------------------
# Scene 1: the Skervolin Trough (narrow rift, transects, active faults)
# ---------------------------------------------------------------------------
_SKERVOLIN_CENTRE = (520_000.0, 2_990_000.0)  # EPSG:32633, about 27 N 15.2 E: no rift there
_SKERVOLIN_AXIS = 35.0
# name, u0, u1 (km along the axis), v (km across), polarity (+1 dips to +v), dip, throw (m),
# shape, plateau_frac, bow (km), active, surface age (ka)
_SKERVOLIN = (
    ("West Scarp Fault", -11.0, 11.0, -17.0, +1, 55.0, 640.0, "plateau", 0.4, -0.5, False, np.nan),
    ("East Scarp Fault", -10.0, 10.5, 17.0, -1, 60.0, 520.0, "plateau", 0.3, 0.4, False, np.nan),
    ("Abrunel Fault", -9.5, 1.5, -11.0, +1, 62.0, 260.0, "elliptical", 0.0, 0.2, False, np.nan),
    ("Bestivar Fault", 1.0, 11.0, -9.0, +1, 58.0, 230.0, "elliptical", 0.0, 0.0, False, np.nan),
    ("Corrumak Fault", -7.5, 7.5, -3.5, -1, 65.0, 300.0, "plateau", 0.2, -0.3, True, 180.0),
    ("Dezzaloun Fault", -11.0, -1.0, 3.0, +1, 60.0, 190.0, "elliptical", 0.0, 0.0, True, 90.0),
    ("Esquavin Fault", 0.5, 10.5, 5.5, -1, 57.0, 240.0, "elliptical", 0.0, 0.25, True, 300.0),
    ("Fornelquo Fault", -5.0, 5.5, 10.5, +1, 63.0, 210.0, "plateau", 0.3, 0.0, False, np.nan),
    ("Gastivvor Fault", 6.5, 11.0, 11.5, -1, 60.0, 120.0, "elliptical", 0.0, 0.0, False, np.nan),
    ("Hurrolet Fault", -11.0, -6.0, 11.5, -1, 61.0, 130.0, "elliptical", 0.0, 0.0, False, np.nan),
)
_SKERVOLIN_TRANSECTS = (  # name, u at v = 0 (km), azimuth offset from the across-axis direction (deg)
    ("Section North", 4.0, 0.0),
    ("Section South", -5.0, 0.0),
    ("Section Oblique", -1.0, 15.0),
)


def _axis_faults(specs, *, centre_xy, axis_azimuth_deg, crs, n_vertices=9, hw_extent_factor=1.0,
                 hw_extent_min_m=4000.0) -> gpd.GeoDataFrame:
    rows = []
    for k, (name, u0, u1, v, pol, dip, throw, shape, plat, bow, active, age) in enumerate(specs):
        t = np.linspace(0.0, 1.0, n_vertices)
        u = (u0 + (u1 - u0) * t) * 1000.0
        vv = (v + bow * np.sin(np.pi * t)) * 1000.0
        if pol < 0:
            u, vv = u[::-1], vv[::-1]
        xy = uv_to_xy(u, vv, centre_xy=centre_xy, axis_azimuth_deg=axis_azimuth_deg)
        line = LineString(xy)
        dip_dir = (axis_azimuth_deg + (90.0 if pol > 0 else -90.0)) % 360.0
        rows.append({"fault_id": k + 1, "name": name, "dip_deg": dip, "dip_dir_deg": dip_dir,
                     "max_throw_m": throw, "profile_shape": shape, "plateau_frac": plat,
                     "peak_pos": 0.5, "hw_extent_m": max(hw_extent_factor * line.length, hw_extent_min_m),
                     "active": bool(active), "surface_age_ka": age, "geometry": line})
    return gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)


def narrow_rift_scene(folder, *, pixel_size_m: float = 100.0, hw_extent_factor: float = 1.0) -> Scene:
    """Write the Skervolin Trough, a narrow graben (axis 35 deg, EPSG:32633).

    Parameters
    ----------
    folder : path
    pixel_size_m : float
        DEM pixel size, m (100 m: 500 x 500 pixels over 50 km; the scarps are
        4 pixels wide, at least 200 m).
    hw_extent_factor : float
        Each hanging wall moves rigidly to this many trace lengths (at least
        4 km) from its trace, then tapers to zero at twice that (raised
        cosine). With 0.5 the tapers bend the surface next to neighbouring
        traces enough to bias line fits by up to ~20 % (see the benchmark).

    Returns
    -------
    Scene
        Ten faults (two border faults 20-22 km long with 520-640 m throw,
        eight intrabasinal faults 4.5-15 km long with 120-300 m throw, dips
        55-65 deg) in a faulted zone about 35 km across, three transects
        (two across the axis, one 15 deg oblique), three active faults with
        surface ages 90-300 ka, a nodata patch over the NE tip of the Gastivvor
        Fault.
    """
    crs = CRS.from_epsg(32633)
    px = float(pixel_size_m)
    faults = _axis_faults(_SKERVOLIN, centre_xy=_SKERVOLIN_CENTRE, axis_azimuth_deg=_SKERVOLIN_AXIS, crs=crs,
                          hw_extent_factor=hw_extent_factor)
    half = 25_000.0
    c = _SKERVOLIN_CENTRE
    grid = grid_spec((c[0] - half, c[1] - half, c[0] + half, c[1] + half), pixel_size_m=px)
    nodata = [Polygon(uv_to_xy(np.array([9.8, 12.2, 12.4, 10.0]) * 1000.0,
                               np.array([10.4, 10.6, 12.6, 12.4]) * 1000.0,
                               centre_xy=c, axis_azimuth_deg=_SKERVOLIN_AXIS))]
    rows = []
    across = _SKERVOLIN_AXIS + 90.0
    for k, (name, u, off) in enumerate(_SKERVOLIN_TRANSECTS):
        az = across + off
        d = unit_vector(az)
        # transect through (u, 0) long enough to reach v = +-20.5 km
        half_len = 20_500.0 / math.cos(math.radians(off))
        p = uv_to_xy(u * 1000.0, 0.0, centre_xy=c, axis_azimuth_deg=_SKERVOLIN_AXIS)
        rows.append({"transect_id": k + 1, "name": name,
                     "geometry": LineString([p - half_len * d, p + half_len * d])})
    transects = gpd.GeoDataFrame(rows, geometry="geometry", crs=crs)
    build = dict(base_elevation_m=420.0, regional_slope_deg=0.35, regional_slope_azimuth_deg=300.0,
                 relief_m=3.0, relief_wavelength_m=max(5000.0, 40.0 * px),
                 scarp_width_m=max(200.0, 4.0 * px), seed=7_350_211, hanging_wall_smoothing=0.3)
    return write_scene(folder, name="Skervolin Trough", faults=faults, grid=grid, build=build, nodata=nodata,
                       axis_azimuth_deg=_SKERVOLIN_AXIS, crs=crs, transects=transects, reversed_ids=(2, 6, 9))


# ---------------------------------------------------------------------------
# Scene 2: the Plessovar Fault Field (D = gamma L, n = 1)
# ---------------------------------------------------------------------------
_PLESSOVAR_CRS = ("+proj=tmerc +lat_0=-5 +lon_0=-61.5 +k=1 +x_0=200000 +y_0=300000 "
               "+ellps=GRS80 +units=m +no_defs")
_PLESSOVAR_CENTRE = (200_000.0, 300_000.0)
_PLESSOVAR_AXIS = 140.0
PLESSOVAR_GAMMA = 0.025


def scaling_scene(folder, *, pixel_size_m: float = 70.0, n_faults: int = 22,
                  half_extent_m: float = 11_000.0, length_range_m=(2800.0, 12_000.0),
                  seed: int = 4_401, hw_extent_factor: float = 1.0, profile_shape: str = "elliptical") -> Scene:
    """Write the Plessovar Fault Field: faults with max throw = gamma L exactly (n = 1).

    Parameters
    ----------
    folder : path
    pixel_size_m : float
        DEM pixel size, m (70 m: 446 x 446 pixels).
    n_faults : int
        Number of faults (lengths log-uniform on ``length_range_m``).
    half_extent_m : float
        Half-side of the square (in the axis frame) the traces lie in, m.
    seed : int
        Seed of the population and of the relief.
    hw_extent_factor : float
        Hanging walls move rigidly to this many trace lengths, then taper.
    profile_shape : str
        Along-strike throw profile of every fault (elliptical, or the peaked
        triangular profile, Manighetti et al. 2001, from memory).

    Returns
    -------
    Scene
        ``gamma`` = :data:`PLESSOVAR_GAMMA` (max throw / length, no scatter),
        strikes within ~6 deg of the 140 deg axis, both dip directions, dips
        50-70 deg, elliptical profiles; faults 3, 8 and 13 digitised against
        the right-hand rule, faults 5, 11 and 17 without a dip direction; a
        nodata patch in one corner.
    """
    crs = CRS.from_user_input(_PLESSOVAR_CRS)
    px = float(pixel_size_m)
    h = float(half_extent_m)
    pop = fault_population(n_faults, gamma=PLESSOVAR_GAMMA, exponent=1.0, length_range_m=length_range_m,
                           extent=(-h, -h, h, h), strike_deg=0.0, strike_scatter_deg=4.0,
                           dip_deg=(50.0, 70.0), min_spacing_m=max(1200.0, 15 * px), edge_margin_m=500.0,
                           profile_shape=profile_shape, seed=seed)
    pop = pop.drop(columns=["length_m"])
    pop["hw_extent_m"] = np.maximum(hw_extent_factor * pop.geometry.length, 1500.0)
    faults = _rotate_population(pop, centre_xy=_PLESSOVAR_CENTRE, axis_azimuth_deg=_PLESSOVAR_AXIS, crs=crs)
    reach = h * math.sqrt(2.0) + 1500.0
    c = _PLESSOVAR_CENTRE
    grid = grid_spec((c[0] - reach, c[1] - reach, c[0] + reach, c[1] + reach), pixel_size_m=px)
    # nodata patch in the (empty) west corner of the map square
    nodata = [shapely.Point(c[0] - reach + 2500.0, c[1]).buffer(1800.0)]
    build = dict(base_elevation_m=1150.0, regional_slope_deg=0.5, regional_slope_azimuth_deg=75.0,
                 relief_m=2.0, relief_wavelength_m=max(3000.0, 40.0 * px),
                 scarp_width_m=max(150.0, 4.0 * px), seed=seed + 17, hanging_wall_smoothing=0.3)
    n = len(faults)
    rev = [i for i in (3, 8, 13) if i <= n]
    nodir = [i for i in (5, 11, 17) if i <= n]
    return write_scene(folder, name="Plessovar Fault Field", faults=faults, grid=grid, build=build, nodata=nodata,
                       axis_azimuth_deg=_PLESSOVAR_AXIS, crs=crs, reversed_ids=rev, no_dip_dir_ids=nodir,
                       gamma=PLESSOVAR_GAMMA)


# ---------------------------------------------------------------------------
# Scene 3: the Sundravelk Rift Province (wide rift)
# ---------------------------------------------------------------------------
_SUNDRAVELK_CENTRE = (450_000.0, 3_650_000.0)  # EPSG:32614, about 33 N 99.5 W: no rift there
_SUNDRAVELK_AXIS = 75.0


def wide_rift_scene(folder, *, pixel_size_m: float = 800.0, n_faults: int = 34,
                    across_km: float = 300.0, along_km: float = 170.0, seed: int = 90_613,
                    hw_extent_factor: float = 1.0) -> Scene:
    """Write the Sundravelk Rift Province, a wide rift (axis 75 deg, EPSG:32614).

    Parameters
    ----------
    folder : path
    pixel_size_m : float
        DEM pixel size, m (800 m: 441 x 345 pixels; scarps 3.2 km, 4 pixels wide).
    n_faults : int
        Faults placed at random (20-80 km long, D = 0.02 L: throws 0.4-1.6 km,
        log-normal scatter 0.15), all striking within ~5 deg of the axis.
    across_km, along_km : float
        Size of the faulted province across and along the axis, km.

    Returns
    -------
    Scene
        The faulted zone spans about ``across_km`` across the axis (the
        random placement leaves it a little narrower); a nodata patch lies
        outside the province.
    """
    crs = CRS.from_epsg(32614)
    px = float(pixel_size_m)
    hv, hu = 500.0 * across_km, 500.0 * along_km
    # local frame for fault_population: x = across (v), y = along (u), strike 0 = along the axis
    pop = fault_population(n_faults, gamma=0.02, exponent=1.0, length_range_m=(20_000.0, 80_000.0),
                           scatter_sigma=0.15, extent=(-hv, -hu, hv, hu), strike_deg=0.0, strike_scatter_deg=3.0,
                           dip_deg=(50.0, 65.0), min_spacing_m=10_000.0, profile_shape="elliptical", seed=seed)
    pop = pop.drop(columns=["length_m"])
    pop["hw_extent_m"] = np.maximum(hw_extent_factor * pop.geometry.length, 8000.0)
    faults = _rotate_population(pop, centre_xy=_SUNDRAVELK_CENTRE, axis_azimuth_deg=_SUNDRAVELK_AXIS, crs=crs)
    allxy = np.vstack([np.asarray(g.coords) for g in faults.geometry])
    margin = 25_000.0
    xmin, ymin = allxy.min(axis=0) - margin
    xmax, ymax = allxy.max(axis=0) + margin
    grid = grid_spec((xmin, ymin, xmax, ymax), pixel_size_m=px)
    # nodata patch: a lake-sized void in a corner outside the traces
    nodata = [shapely.Point(xmin + 12_000.0, ymin + 12_000.0).buffer(9000.0)]
    build = dict(base_elevation_m=1300.0, regional_slope_deg=0.15, regional_slope_azimuth_deg=230.0,
                 relief_m=15.0, relief_wavelength_m=max(40_000.0, 40.0 * px),
                 scarp_width_m=max(3200.0, 4.0 * px), seed=seed + 3, hanging_wall_smoothing=0.25)
    return write_scene(folder, name="Sundravelk Rift Province", faults=faults, grid=grid, build=build,
                       nodata=nodata, axis_azimuth_deg=_SUNDRAVELK_AXIS, crs=crs, reversed_ids=(4, 9, 21))


# ---------------------------------------------------------------------------
# Truth helpers
# ---------------------------------------------------------------------------
def transect_truth(scene: Scene) -> pd.DataFrame:
    """True heave sums along the scene's transects.

    For every crossing of a transect with a trace, the true heave
    h = T / tan(dip) at that point of the trace (from the build), and its
    projection on the transect, h |cos(dip direction - transect azimuth)|
    (geometry, dip slip assumed; see docs/methods/extension.md).

    Returns
    -------
    pandas.DataFrame
        ``transect_id``, ``n_crossings``, ``sum_heave_m``, ``sum_heave_along_m``,
        ``min_s_norm`` (closest crossing to a tip, as a fraction of the length).
    """
    rows = []
    tf = scene.table
    for t in scene.transect_table.itertuples(index=False):
        txy = np.asarray(t.geometry.coords)
        taz = math.degrees(math.atan2(*(txy[-1] - txy[0]))) % 360.0
        n = 0
        sh = sha = 0.0
        smin = 1.0
        for r in tf.itertuples(index=False):
            hit = t.geometry.intersection(r.geometry)
            if hit.is_empty:
                continue
            for pt in shapely.get_parts(hit):
                dist = r.geometry.project(pt)
                h = float(scene.truth.heave_at(r.fault_id, dist))
                n += 1
                sh += h
                sha += h * abs(math.cos(math.radians(r.dip_dir_deg - taz)))
                s = dist / r.length_m
                smin = min(smin, s, 1.0 - s)
        rows.append({"transect_id": int(t.transect_id), "n_crossings": n, "sum_heave_m": sh,
                     "sum_heave_along_m": sha, "min_s_norm": smin})
    return pd.DataFrame(rows)


def heave_moment_truth(scene: Scene, *, step_m: float = 25.0) -> np.ndarray:
    """Sum over faults of the along-strike integral of true heave times the dip-direction dyad.

    M = sum_k (integral of h_k ds) m_k m_k^T, m_k = (sin dd, cos dd) in
    (east, north), m^2. Divided by an area it is the Kostrov (1974) strain
    of that area in map view (derived form; see docs/methods/extension.md).

    Returns
    -------
    numpy.ndarray
        2 x 2 tensor (E, N), m^2.
    """
    m_tot = np.zeros((2, 2))
    for r in scene.table.itertuples(index=False):
        n = max(int(math.ceil(r.length_m / step_m)), 2)
        s = np.linspace(0.0, r.length_m, n + 1)
        integral = float(np.trapezoid(scene.truth.heave_at(r.fault_id, s), s))
        m = unit_vector(r.dip_dir_deg)
        m_tot += integral * np.outer(m, m)
    return m_tot


def principal(t: np.ndarray) -> tuple[float, float, float]:
    """Largest and smallest eigenvalue of a symmetric 2 x 2 (E, N) tensor and the azimuth of the largest (0-180)."""
    w, v = np.linalg.eigh(np.asarray(t, dtype=float))
    e1, e2 = float(w[1]), float(w[0])
    az = math.degrees(math.atan2(v[0, 1], v[1, 1])) % 180.0
    return e1, e2, az


def across_axis_extent_km(scene: Scene, *, min_throw_frac: float = 0.0) -> float:
    """Across-axis extent of the faulted zone (km): spread of all trace vertices normal to the axis.

    ``min_throw_frac`` > 0 counts only faults whose true maximum throw is at
    least that fraction of the largest.
    """
    tf = scene.table
    keep = tf["max_throw_m"] >= min_throw_frac * tf["max_throw_m"].max()
    xy = np.vstack([np.asarray(g.coords) for g in tf.loc[keep, "geometry"]])
    v = xy @ unit_vector(scene.axis_azimuth_deg + 90.0)
    return float(v.max() - v.min()) / 1000.0


# ---------------------------------------------------------------------------
# Scene 4: the Orvanquil Steps (close parallel faults far from the DEM edge)
# ---------------------------------------------------------------------------
def close_faults_scene(folder, *, pixel_size_m: float = 50.0, spacing_m: float = 650.0,
                       isolated: bool = True) -> Scene:
    """Write the Orvanquil Steps: three parallel faults closer than a profile needs, far from the DEM edge.

    Every profile across the three faults meets a neighbouring trace within
    ``spacing_m``; with 50 m pixels and the default ten samples per side
    beyond the scarp zone, the profiles are cut short by the neighbours while
    the DEM edge is more than 3 km away. Axis 160 deg, EPSG:32631.

    Parameters
    ----------
    isolated : bool
        Add a fourth fault 4 km away from the others, which can be measured
        (without it no station of the scene can be ok).

    Returns
    -------
    Scene
    """
    from faultmap.synthetic import parallel_faults

    crs = CRS.from_epsg(32631)
    px = float(pixel_size_m)
    centre = (610_000.0, 5_120_000.0)
    faults = parallel_faults(3, spacing_m=spacing_m, length_m=5000.0, throw_m=[40.0, 55.0, 45.0], dip_deg=60.0,
                             dip_dir_deg=250.0, centre_xy=centre, profile_shape="plateau", crs=crs)
    if isolated:
        lone = parallel_faults(1, spacing_m=1.0, length_m=4000.0, throw_m=35.0, dip_deg=60.0, dip_dir_deg=250.0,
                               centre_xy=tuple(np.asarray(centre) - 4000.0 * unit_vector(250.0)),
                               profile_shape="plateau", crs=crs)
        lone["fault_id"] = 4
        lone["name"] = "F4"
        faults = gpd.GeoDataFrame(pd.concat([faults, lone], ignore_index=True), crs=crs)
    faults["hw_extent_m"] = 4000.0
    half = 8000.0
    grid = grid_spec((centre[0] - half, centre[1] - half, centre[0] + half, centre[1] + half), pixel_size_m=px)
    nodata = [shapely.Point(centre[0] + 6000.0, centre[1] + 6000.0).buffer(600.0)]
    build = dict(base_elevation_m=80.0, regional_slope_deg=0.2, regional_slope_azimuth_deg=20.0, relief_m=0.5,
                 relief_wavelength_m=2000.0, scarp_width_m=4.0 * px, seed=16_021)
    return write_scene(folder, name="Orvanquil Steps", faults=faults, grid=grid, build=build, nodata=nodata,
                       axis_azimuth_deg=160.0, crs=crs)


# ---------------------------------------------------------------------------
# Comparing tool outputs with the truth (shared by the tests and the benchmark)
# ---------------------------------------------------------------------------
def read_layers(gpkg) -> dict[str, pd.DataFrame]:
    """Every layer of a written GeoPackage, read back with pyogrio."""
    import pyogrio

    return {name: pyogrio.read_dataframe(gpkg, layer=name) for name, _ in pyogrio.list_layers(gpkg)}


def match_truth(scene: Scene, faults: pd.DataFrame) -> pd.DataFrame:
    """Tool ``faults`` joined to the scene truth by name; truth columns get the suffix ``_true``."""
    truth = scene.table.drop(columns="geometry").rename(columns=lambda c: c if c == "name" else f"{c}_true")
    return faults.merge(truth, on="name", how="inner")


def throw_errors(scene: Scene, faults: pd.DataFrame, *, min_ok: int = 6, min_ok_frac: float = 0.6) -> pd.DataFrame:
    """Relative max-throw errors (``rel_err``) of uncensored faults with enough ok stations.

    A fault counts when neither the tool nor the truth calls it censored and
    it has at least ``min_ok`` ok stations and ``min_ok_frac`` of its stations ok.
    """
    m = match_truth(scene, faults)
    keep = (~m["censored"].astype(bool) & ~m["censored_truth_true"].astype(bool)
            & (m["n_stations_ok"] >= min_ok) & (m["n_stations_ok"] >= min_ok_frac * m["n_stations"]))
    m = m.loc[keep].copy()
    m["rel_err"] = m["max_throw_m"] / m["max_throw_m_true"] - 1.0
    return m


def strain_sum(cells: pd.DataFrame) -> np.ndarray:
    """Area-weighted sum of the cell strain tensors, sum(eps_cell * area_cell) (m^2), 2 x 2 (E, N)."""
    w = cells["area_m2"].to_numpy(float)
    exx = float(np.sum(cells["exx"].to_numpy(float) * w))
    eyy = float(np.sum(cells["eyy"].to_numpy(float) * w))
    exy = float(np.sum(cells["exy"].to_numpy(float) * w))
    return np.array([[exx, exy], [exy, eyy]])


def axial_diff_deg(a: float, b: float) -> float:
    """Smallest difference between two axial directions (mod 180), degrees."""
    return abs((float(a) - float(b) + 90.0) % 180.0 - 90.0)
