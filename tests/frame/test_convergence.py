"""Meridian convergence (faultmap.crs.meridian_convergence_deg) against two outside references.

1. Geometry through pyproj's Transformer: the grid azimuth of a short step due north along the
   meridian is minus the convergence (independent of the factor computation the function uses).
2. The transverse Mercator series for the ellipsoid (Snyder 1987, Map Projections: A Working Manual,
   USGS Professional Paper 1395, transverse Mercator chapter; from memory, equation number not
   checked): gamma = dl sin(phi) [1 + dl^2 cos^2(phi) / 3 (1 + 3 eta^2 + 2 eta^4)
   + dl^4 cos^4(phi) / 15 (2 - tan^2 phi)], dl = lon - lon0 in radians, eta^2 = e'^2 cos^2(phi),
   e'^2 = e^2 / (1 - e^2); positive east of the central meridian in the northern hemisphere
   (true north lies west of grid north there), negative in the southern.
"""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import CRS, Transformer

from faultmap.crs import meridian_convergence_deg, true_to_grid_azimuth

E2_WGS84 = 0.00669437999014  # first eccentricity squared of WGS 84 (NIMA TR8350.2; from memory)

#: (EPSG, lon, lat): away from the central meridian, both hemispheres
POINTS = [
    (32633, 17.5, 45.0),
    (32633, 12.2, 60.0),
    (32733, 17.9, -35.0),
    (32633, 19.5, 10.0),
    (32614, -95.2, 33.0),
]


def _series_deg(dlon_deg, lat_deg):
    dl = np.radians(dlon_deg)
    phi = np.radians(lat_deg)
    ep2 = E2_WGS84 / (1.0 - E2_WGS84)
    eta2 = ep2 * np.cos(phi) ** 2
    c2 = np.cos(phi) ** 2
    g = (
        dl
        * np.sin(phi)
        * (
            1.0
            + dl**2 * c2 / 3.0 * (1.0 + 3.0 * eta2 + 2.0 * eta2**2)
            + dl**4 * c2**2 / 15.0 * (2.0 - np.tan(phi) ** 2)
        )
    )
    return np.degrees(g)


@pytest.mark.parametrize("epsg, lon, lat", POINTS)
def test_convergence_against_the_tm_series_and_geometry(epsg, lon, lat):
    crs = CRS.from_epsg(epsg)
    fwd = Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True)
    x, y = fwd.transform(lon, lat)
    got = float(meridian_convergence_deg(crs, [x], [y])[0])
    lon0 = -183.0 + 6.0 * (epsg % 100)  # UTM zone central meridian
    assert got == pytest.approx(_series_deg(lon - lon0, lat), abs=2e-6)
    # a 1 m step north along the meridian: its grid azimuth is -gamma
    x1, y1 = fwd.transform(lon, lat + 1e-5)
    az = np.degrees(np.arctan2(x1 - x, y1 - y))
    assert got == pytest.approx(-az, abs=1e-5)
    assert np.sign(got) == np.sign((lon - lon0) * lat)


def test_vectorised_and_applied_to_azimuths():
    crs = CRS.from_epsg(32633)
    x = np.array([300_000.0, 500_000.0, 700_000.0])
    y = np.full(3, 5_000_000.0)
    g = meridian_convergence_deg(crs, x, y)
    assert g.shape == (3,) and g[1] == pytest.approx(0.0, abs=1e-9) and g[0] == pytest.approx(-g[2], rel=1e-6)
    # a 10 m geodesic step at true azimuths 0, 90 and 359.9 (pyproj.Geod, reference library), projected:
    # its grid azimuth is what true_to_grid_azimuth gives (a conformal projection keeps angles)
    from pyproj import Geod

    lon, lat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True).transform(x[2], y[2])
    true_az = np.array([0.0, 90.0, 359.9])
    lon2, lat2, _ = Geod(ellps="WGS84").fwd(np.full(3, lon), np.full(3, lat), true_az, np.full(3, 10.0))
    x2, y2 = Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True).transform(lon2, lat2)
    grid_az = np.degrees(np.arctan2(x2 - x[2], y2 - y[2])) % 360.0
    got = true_to_grid_azimuth(true_az, np.full(3, g[2]))
    assert np.allclose(((got - grid_az) + 180.0) % 360.0 - 180.0, 0.0, atol=1e-4)
    assert meridian_convergence_deg(crs, [], []).shape == (0,)
