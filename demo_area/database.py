"""The Drovessin Graben without its DEM: field throws and a fault-database table (both fictional).

Two extra layers for the second demo run (``project_without_dem.toml``), which uses no DEM:

* ``field_throws.gpkg`` (layer ``throws``): throw measurements at points along the six longest
  faults, as a field party would log them: 10-40 m off the mapped trace, 5 % noise, with
  ``throw_err_m``;
* ``fault_database.gpkg`` (layer ``faults``): the same traces with attributes spelt the way fault
  databases spell them: dip as a triple ``(min,preferred,max)``, dip direction as compass letters
  measured from true north, ``max_throw_m`` as a range, ``slip_rate_mm_yr`` as a range for the active
  faults.

Everything is derived from the scenario's truth with fixed seeds (deterministic).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

__all__ = ["demo_field_throws", "demo_fault_database", "PROJECT_WITHOUT_DEM_TOML"]

#: Faults with field measurements: the longest ones (a field season does not reach every fault).
N_MEASURED_FAULTS = 6

PROJECT_WITHOUT_DEM_TOML = """\
# faultmap project file for the {name} demo area without its DEM (fictional; see README).
# Throws come from the field points where a fault has them, else from the database's max_throw_m.
# Run it with: faultmap run project_without_dem.toml

[inputs]
faults = "fault_database.gpkg"
faults_layer = "faults"
throw_points = "field_throws.gpkg"
throw_points_layer = "throws"

[output]
gpkg = "demo_without_dem.gpkg"

[scaling]
gof_n = 200

[transect]
n_draws = 200
"""


def demo_field_throws(
    stations: pd.DataFrame, truth: pd.DataFrame, *, crs, seed: int = 11
) -> gpd.GeoDataFrame:
    """Field throw measurements along the longest faults.

    Parameters
    ----------
    stations : pandas.DataFrame
        True throw along every fault (``truth_stations`` of :func:`demo_area.scenario.demo_truth_tables`).
    truth : pandas.DataFrame
        The per-fault truth table (``fault_id``, ``name``, ``length_m``).
    crs
        CRS of the scene.

    Returns
    -------
    geopandas.GeoDataFrame
        Points with ``site`` (a made-up label), ``throw_m``, ``throw_err_m`` (1-sigma, m).
    """
    rng = np.random.default_rng(seed)
    longest = truth.nlargest(N_MEASURED_FAULTS, "length_m")["fault_id"].to_numpy()
    st = stations[stations["fault_id"].isin(longest) & (stations["throw_m"] > 0)]
    # about one site per kilometre along each fault
    step = max(1, int(round(1000.0 / 100.0)))
    st = (
        st.groupby("fault_id", group_keys=False)
        .apply(lambda g: g.iloc[step // 2 :: step])
        .reset_index(drop=True)
    )
    throw = st["throw_m"].to_numpy() * (1.0 + 0.05 * rng.standard_normal(len(st)))
    off = rng.uniform(10.0, 40.0, len(st)) * rng.choice([-1.0, 1.0], len(st))
    ang = rng.uniform(0.0, 2.0 * np.pi, len(st))
    pts = shapely.points(st["x"].to_numpy() + off * np.cos(ang), st["y"].to_numpy() + off * np.sin(ang))
    return gpd.GeoDataFrame(
        {
            "site": [f"DRV-{i + 1:03d}" for i in range(len(st))],
            "throw_m": np.round(throw, 1),
            "throw_err_m": np.round(np.maximum(0.05 * throw, 0.5), 1),
        },
        geometry=pts,
        crs=crs,
    )


def _compass(az: np.ndarray) -> np.ndarray:
    names = np.array(
        ["N", "NNE", "NE", "ENE", "E", "ESE", "SE", "SSE", "S", "SSW", "SW", "WSW", "W", "WNW", "NW", "NNW"]
    )
    return names[np.round((np.asarray(az) % 360.0) / 22.5).astype(int) % 16]


def demo_fault_database(
    user_layer: gpd.GeoDataFrame, truth: pd.DataFrame, *, seed: int = 12
) -> gpd.GeoDataFrame:
    """Return the traces with fault-database attributes (ranges, triples, compass letters from true north).

    Parameters
    ----------
    user_layer : geopandas.GeoDataFrame
        The user's fault layer as written in ``faults.gpkg`` (same order as ``truth``).
    truth : pandas.DataFrame
        Per-fault truth (``max_throw_m``, ``dip_deg``, ``dip_dir_deg`` (grid), ``active``,
        ``surface_age_ka``, ``net_slip_m``).
    """
    from faultmap.crs import meridian_convergence_deg

    rng = np.random.default_rng(seed)
    n = len(truth)
    dip = truth["dip_deg"].to_numpy()
    b = shapely.bounds(user_layer.geometry.to_numpy())
    gamma = meridian_convergence_deg(user_layer.crs, 0.5 * (b[:, 0] + b[:, 2]), 0.5 * (b[:, 1] + b[:, 3]))
    true_dd = truth["dip_dir_deg"].to_numpy() + gamma  # a database measures from true north
    tmax = truth["max_throw_m"].to_numpy() * (1.0 + 0.1 * rng.standard_normal(n))
    rate = truth["net_slip_m"].to_numpy() / truth["surface_age_ka"].to_numpy()  # m/ka = mm/yr
    active = truth["active"].to_numpy(dtype=bool)
    return gpd.GeoDataFrame(
        {
            "name": user_layer["name"].to_numpy(),
            "dip": [f"({d - 10:.0f},{d:.0f},{d + 10:.0f})" for d in dip],
            "dip_dir": _compass(true_dd),
            "max_throw_m": [f"{0.8 * t:.0f}-{1.2 * t:.0f}" for t in tmax],
            "active": active.astype(np.int32),
            "surface_age_ka": np.where(active, truth["surface_age_ka"].to_numpy(), np.nan),
            "slip_rate_mm_yr": [
                f"{0.7 * r:.3f}-{1.3 * r:.3f}" if a else "" for r, a in zip(rate, active, strict=True)
            ],
        },
        geometry=user_layer.geometry.to_numpy(),
        crs=user_layer.crs,
    )
