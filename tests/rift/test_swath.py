"""Swath profiles on analytic DEMs (invented test surfaces built here).

Expected values are the analytic surfaces' own geometry: a symmetric valley
whose floor, crests, crest-to-crest width and relief are known exactly, and a
plane whose bilinear interpolation is exact.
"""

from __future__ import annotations

import math

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest

from faultmap.errors import FaultmapWarning, InputError
from faultmap.rift.swath import profile_stats, sample_bilinear, swath_features, swath_grid, swath_profiles

PX = 100.0
X0, Y0 = 400000.0, 3000000.0
NROW, NCOL = 700, 800
T = (PX, 0.0, X0, 0.0, -PX, Y0)  # affine (a, b, c, d, e, f), north-up


def pixel_centres():
    i, j = np.mgrid[0:NROW, 0:NCOL]
    return X0 + (j + 0.5) * PX, Y0 - (i + 0.5) * PX


def valley_dem(centre, axis_az_deg, *, crest_m, depth_m, base_m=500.0, wobble_m=0.0, wobble_wavelength_m=8e3):
    """Symmetric valley: floor at the axis, crests at +-crest_m, gentle back-slopes.

    z = base + depth (1 - cos(pi n / crest)) / 2 for |n| <= crest (floor base,
    crest base + depth), then falls at 2 % beyond; plus an along-axis
    sinusoid of amplitude wobble_m (so min and max envelopes differ by 2 x wobble).
    """
    x, y = pixel_centres()
    az = math.radians(axis_az_deg)
    t = np.array([math.sin(az), math.cos(az)])  # along-axis unit vector
    r = np.array([t[1], -t[0]])  # across, to the right
    dx, dy = x - centre[0], y - centre[1]
    n = dx * r[0] + dy * r[1]
    s = dx * t[0] + dy * t[1]
    an = np.abs(n)
    z = np.where(an <= crest_m, 0.5 * depth_m * (1.0 - np.cos(np.pi * an / crest_m)), depth_m - 0.02 * (an - crest_m))
    return base_m + z + wobble_m * np.sin(2.0 * np.pi * s / wobble_wavelength_m)


def test_bilinear_sampling_is_exact_on_a_plane_and_nan_outside():
    # Bilinear interpolation reproduces a plane exactly (analytic), with the
    # pixel-centre convention x0 + (j + 0.5) px, y0 - (i + 0.5) px.
    x, y = pixel_centres()
    dem = 10.0 + 0.003 * (x - X0) - 0.002 * (Y0 - y)
    rng = np.random.default_rng(0)
    px = X0 + rng.uniform(PX, (NCOL - 1) * PX, 500)
    py = Y0 - rng.uniform(PX, (NROW - 1) * PX, 500)
    z = sample_bilinear(dem, T, px, py)
    assert np.allclose(z, 10.0 + 0.003 * (px - X0) - 0.002 * (Y0 - py), atol=1e-9)
    # exactly on a pixel centre: that pixel's value
    assert sample_bilinear(dem, T, np.array([X0 + 3.5 * PX]), np.array([Y0 - 7.5 * PX]))[0] == pytest.approx(dem[7, 3])
    # outside the raster: NaN, never 0
    out = sample_bilinear(dem, T, np.array([X0 - 5 * PX, X0 + 5 * PX]), np.array([Y0 - 50 * PX, Y0 + 5 * PX]))
    assert np.all(np.isnan(out))
    with pytest.raises(InputError):
        sample_bilinear(dem, (0.0, 0, X0, 0, 0, Y0), px, py)


@pytest.mark.parametrize("axis_az", [0.0, 30.0, 125.0])
def test_valley_crests_floor_width_relief_recovered(axis_az):
    centre = (X0 + 40e3, Y0 - 35e3)
    crest, depth, wobble = 12e3, 900.0, 40.0
    dem = valley_dem(centre, axis_az, crest_m=crest, depth_m=depth, wobble_m=wobble)
    # a nodata patch on the flank must not break the statistics
    dem[300:310, 300:310] = np.nan
    bin_m = 250.0
    prof = swath_profiles(
        dem, T, centres_xy=np.array([centre]), azimuths_deg=np.array([axis_az + 90.0]),
        half_length_m=25e3, half_width_m=8e3, bin_m=bin_m,
    )
    feat = swath_features(prof).iloc[0]
    # analytic: floor at the axis, crests at -+12 km, width 24 km
    assert abs(feat["floor_across_m"]) <= bin_m
    assert feat["crest_left_across_m"] == pytest.approx(-crest, abs=bin_m)
    assert feat["crest_right_across_m"] == pytest.approx(crest, abs=bin_m)
    assert feat["topo_width_km"] == pytest.approx(2 * crest / 1000.0, abs=2 * bin_m / 1000.0)
    # floor of the mean profile = base (the along-axis sinusoid averages out over
    # two full wavelengths); crest of the max profile = base + depth + wobble
    assert feat["floor_z_m"] == pytest.approx(500.0, abs=5.0)
    assert feat["relief_m"] == pytest.approx(depth + wobble, abs=6.0)
    assert not feat["crest_at_edge"]
    # envelopes: max - min = 2 x wobble everywhere (analytic)
    spread = (prof["z_max_m"] - prof["z_min_m"]).to_numpy()
    assert np.median(spread) == pytest.approx(2 * wobble, rel=0.05)


def test_many_swaths_vectorised_and_short_profile_flagged():
    centre = (X0 + 40e3, Y0 - 35e3)
    dem = valley_dem(centre, 0.0, crest_m=12e3, depth_m=900.0)
    centres = np.array([[centre[0], centre[1] + d] for d in (-15e3, 0.0, 15e3)])
    prof = swath_profiles(dem, T, centres_xy=centres, azimuths_deg=np.full(3, 90.0),
                          half_length_m=20e3, half_width_m=5e3, bin_m=500.0, section_ids=[4, 5, 6])
    feat = swath_features(prof)
    assert list(feat["section_id"]) == [4, 5, 6]
    assert np.allclose(feat["topo_width_km"], 24.0, atol=1.0)
    # a profile shorter than the crests: the crest sits at the profile end and is flagged
    with pytest.warns(FaultmapWarning, match="lengthen"):
        short = swath_features(swath_profiles(dem, T, centres_xy=centres[:1], azimuths_deg=[90.0],
                                              half_length_m=8e3, half_width_m=5e3, bin_m=500.0))
    assert bool(short["crest_at_edge"].iloc[0])


def test_grid_geometry_and_stats_shapes():
    # swath frame: across samples lie along the profile azimuth, along samples
    # perpendicular to it (analytic geometry)
    x, y, across = swath_grid(np.array([[0.0, 0.0]]), np.array([90.0]), half_length_m=1000.0,
                              half_width_m=200.0, bin_m=100.0, oversample=2)
    assert x.shape == (1, 8, 40) and across.shape == (20,)
    assert np.allclose(across, np.arange(-950.0, 1000.0, 100.0))
    assert np.allclose(x[0, 0], np.arange(-975.0, 1000.0, 50.0))  # profile points east
    assert np.allclose(y[0, :, 0], np.arange(-175.0, 200.0, 50.0))  # along the axis (north)
    z = np.full(x.shape, np.nan)
    z[0, :, :2] = [[1.0, 2.0]] * 8
    st = profile_stats(z, across, oversample=2)
    assert st["z_min_m"].iloc[0] == 1.0 and st["z_max_m"].iloc[0] == 2.0 and st["z_mean_m"].iloc[0] == 1.5
    assert st["n_valid"].iloc[0] == 16 and np.isnan(st["z_mean_m"].iloc[1]) and st["n_valid"].iloc[1] == 0


def test_swath_figure(tmp_path):
    from faultmap.rift.figures import swath_figure

    centre = (X0 + 40e3, Y0 - 35e3)
    dem = valley_dem(centre, 0.0, crest_m=12e3, depth_m=900.0, wobble_m=30.0)
    prof = swath_profiles(dem, T, centres_xy=np.array([centre]), azimuths_deg=[90.0],
                          half_length_m=20e3, half_width_m=5e3, bin_m=500.0)
    sections = pd.DataFrame({"section_id": [1], "across_min_m": [-10e3], "across_max_m": [10e3]})
    fig = swath_figure(prof, features=swath_features(prof), sections=sections)
    ax = fig.axes[0]
    assert "Elevation" in ax.get_ylabel() and "km" in fig.axes[-1].get_xlabel()
    assert fig.legends or ax.get_legend() is not None
    fig.savefig(tmp_path / "swath.png", dpi=150)
    assert (tmp_path / "swath.png").stat().st_size > 10_000
