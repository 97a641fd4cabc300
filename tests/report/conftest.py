"""Shared fixtures of the report tests: the quick demo run once, and a small hand-built run."""

from __future__ import annotations

import io

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

CRS = "EPSG:32753"


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """The fictional demo area at scale 0.2, every tool run once through its project file."""
    from demo_area import write_demo_area
    from faultmap.project import run_project

    paths = write_demo_area(tmp_path_factory.mktemp("report_demo"), scale=0.2)
    (paths["project"].parent / "results").mkdir()  # the project's output folder, as `faultmap demo` makes it
    return run_project(paths["project"], quiet=True)


def png_bytes(colour="tab:blue") -> bytes:
    """A tiny PNG drawn by matplotlib."""
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(1, 1), dpi=20)
    ax.plot([0, 1], [0, 1], color=colour)
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    return buf.getvalue()


def small_layers() -> dict:
    """Layers of a made-up run of three faults (values invented for the tests)."""
    lines = [shapely.LineString([(500000 + 1000 * i, 7000000), (500200 + 1000 * i, 7003000)]) for i in range(3)]
    faults = gpd.GeoDataFrame({
        "fault_id": [1, 2, 3], "name": ["North <A> & co", "South", "East"], "length_m": [3000.0, 3010.0, 2990.0],
        "censored": [False, True, False], "dip_source": ["attribute", "default", "attribute"],
        "max_throw_m": [42.0, 12.5, np.nan], "max_throw_err_m": [3.1, 2.0, np.nan],
        "n_stations": [24, 24, 10], "n_stations_ok": [22, 20, 0], "system_id": [1, 2, 3],
        "hazard_screened": [True, False, False], "mag_preferred": [6.1, np.nan, np.nan],
        "mag_preferred_sigma": [0.25, np.nan, np.nan], "throw_used_m": [42.0, np.nan, np.nan],
        "age_used_ka": [100.0, np.nan, np.nan], "age_err_used_ka": [20.0, np.nan, np.nan],
        "slip_rate_vert_mm_yr": [0.42, np.nan, np.nan], "slip_rate_vert_p16_mm_yr": [0.35, np.nan, np.nan],
        "slip_rate_vert_p84_mm_yr": [0.52, np.nan, np.nan], "recurrence_yr": [700.0, np.nan, np.nan],
        "recurrence_p16_yr": [300.0, np.nan, np.nan], "recurrence_p84_yr": [1500.0, np.nan, np.nan],
        "rate_flag": ["ok", "", ""],
    }, geometry=lines, crs=CRS)
    stations = gpd.GeoDataFrame({
        "fault_id": [1, 1, 1, 2, 2], "throw_m": [10.0, 40.0, 20.0, 5.0, np.nan],
        "throw_err_m": [2.0, 3.0, 2.0, 1.0, np.nan], "status": ["ok", "ok", "ok", "truncated", "void"],
    }, geometry=[shapely.Point(500000 + i * 10, 7000000 + i * 500) for i in range(5)], crs=CRS)
    scaling = pd.DataFrame({
        "model": ["ols", "rma", "power_law", "reference"], "variable": ["max_throw_m", "max_throw_m", "length_m", "d_l_ratio"],
        "exponent": [1.1, 1.2, np.nan, np.nan], "exponent_lo": [0.9, 1.0, np.nan, np.nan],
        "exponent_hi": [1.3, 1.4, np.nan, np.nan], "gamma": [0.02, 0.015, np.nan, np.nan],
        "gamma_lo": [0.01, 0.008, np.nan, np.nan], "gamma_hi": [0.04, 0.03, np.nan, np.nan],
        "n_faults": [2, 2, 3, 2], "ci_level": [0.95, 0.95, np.nan, np.nan], "alpha": [np.nan, np.nan, 2.4, np.nan],
        "se": [np.nan, np.nan, 0.3, np.nan], "source": ["", "", "", "Somebody (2000)"],
        "ref_lo": [np.nan, np.nan, np.nan, 0.01], "ref_hi": [np.nan, np.nan, np.nan, 0.1],
        "value": [np.nan, np.nan, np.nan, 0.012], "consistent": ["", "", "", "True"],
    })
    transects = gpd.GeoDataFrame({
        "transect_id": [1, 2], "name": ["T1", "T2"], "n_faults": [2, 1], "sum_heave_m": [30.0, 8.0],
        "sum_heave_err_m": [3.0, 1.0], "extension": [0.012, 0.004], "extension_p16": [0.010, 0.003],
        "extension_p84": [0.014, 0.005], "beta": [1.012, 1.004], "beta_p16": [1.010, 1.003], "beta_p84": [1.014, 1.005],
        "status": ["ok", "ok"],
    }, geometry=[shapely.LineString([(499000, 7001000 + i * 1000), (504000, 7001000 + i * 1000)]) for i in range(2)],
        crs=CRS)
    cells = gpd.GeoDataFrame({"cell_id": [1, 2, 3], "e1": [0.01, 0.002, 0.03], "e2": [0.0, 0.0, 0.0]},
                             geometry=[shapely.box(500000 + 1000 * i, 7000000, 501000 + 1000 * i, 7001000)
                                       for i in range(3)], crs=CRS)
    summary = pd.DataFrame({"class": ["narrow"], "score": [-1.0], "median_width_km": [3.2], "n_sections": [4],
                            "n_sections_measured": [4], "reasons": ["width 3.2 km is narrow"]})
    scenarios = gpd.GeoDataFrame({
        "scenario_id": [1], "kind": ["segment"], "fault_ids": ["1"], "length_km": [3.0], "width_km": [12.0],
        "area_km2": [36.0], "mag_preferred": [6.1], "mag_preferred_sigma": [0.25], "mag_srl_wc94": [5.6],
        "mag_srl_wc94_sigma": [0.34],
    }, geometry=[lines[0]], crs=CRS)
    zones = gpd.GeoDataFrame({"fault_id": [1], "hw_width_m": [150.0]}, geometry=[lines[0].buffer(100)], crs=CRS)
    return {"faults": faults, "throw_stations": stations, "scaling": scaling, "transects": transects,
            "strain_cells": cells, "rift_summary": summary, "rupture_scenarios": scenarios, "rupture_zones": zones}


def small_run_info(tools="prepare,throw,scaling,transect,strain,width,hazard") -> pd.DataFrame:
    """A run_info table as the runner writes it (paths and values invented)."""
    rows = [
        ("faultmap_version", "0.1.0"), ("run_utc", "2030-01-01T00:00:00Z"), ("tools", tools),
        ("output", "/data/someone/project/out/results.gpkg"), ("engine", "in-process, 1 thread(s)"),
        ("working_crs_name", "WGS 84 / UTM zone 53S"), ("working_crs_wkt", 'PROJCRS["WGS 84 / UTM zone 53S"]'),
        ("input.faults", "/data/someone/project/data/traces.gpkg"), ("input.faults.size_bytes", "12345"),
        ("input.faults.checksum", "sha256:abc123"), ("input.faults_layer", "traces"),
        ("input.dem", "C:\\data\\dem.tif"), ("input.dem.checksum", "sha256:def456"), ("input.dem_nodata", "-9999.0"),
        ("param.throw.station_spacing_m", ""), ("param.throw.robust_loss", "tukey"),
        ("param.hazard.seed", "0"), ("throw.station_status", "ok 3, truncated 1, void 1"),
        ("strain.whole.e1", "0.0123"), ("strain.whole.e2", "1e-06"), ("strain.whole.e1_azimuth_deg", "110.4"),
        ("strain.whole.area_m2", "3000000.0"), ("strain.cell_size_m_used", "1000.0"),
        ("transect.median_extension", "0.008"), ("transect.median_beta", "1.008"),
        ("hazard.n_screened", "1"), ("hazard.caution", "SCREENING ONLY."),
        ("notice.1", "prepare: 3 traces."),
        ("warning.1", "prepare: /data/someone/project/data/traces.gpkg, layer 'traces': default dip used."),
        ("warning.2", "throw: see https://example.org/help for <details>"),
        ("warning.3", "hazard: magnitude outside the data range"),
        ("warning.10", "width: the tenth warning"),
    ]
    return pd.DataFrame(rows, columns=["key", "value"])
