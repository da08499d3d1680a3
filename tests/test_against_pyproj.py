"""ctt.geodesy against pyproj (PROJ), the reference implementation of geodetic
transformations: ECEF <-> geodetic on WGS84 and GRS80, local ENU, and the
geodesic of a baseline."""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import Transformer

from ctt import geodesy as g


def _random_geodetic(n, stream):
    rng = np.random.default_rng(stream)
    lat = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    lon = rng.uniform(-180, 180, n)
    h = rng.uniform(-10_000.0, 30_000_000.0, n)  # below the geoid down to GNSS-orbit heights
    # poles, equator, antimeridian, deep negative height and very high altitude explicitly
    lat = np.concatenate([lat, [90.0, -90.0, 0.0, 0.0, 89.999999, -45.0, 60.0]])
    lon = np.concatenate([lon, [0.0, 123.0, 180.0, -180.0, 10.0, 0.0, 7.0]])
    h = np.concatenate([h, [0.0, 1000.0, -5000.0, 0.0, 36_000_000.0, -6000.0, 100_000_000.0]])
    return lat, lon, h


@pytest.mark.parametrize("ell, crs", [(g.WGS84, "EPSG:4979"), (g.GRS80, "+proj=longlat +ellps=GRS80 +no_defs +type=crs")])
def test_ecef_geodetic_against_pyproj(ell, crs):
    lat, lon, h = _random_geodetic(5000, 7)
    ecef_crs = "EPSG:4978" if ell is g.WGS84 else "+proj=geocent +ellps=GRS80 +no_defs +type=crs"
    fwd = Transformer.from_crs(crs, ecef_crs, always_xy=True)
    x, y, z = fwd.transform(lon, lat, h)
    # forward: pyproj (PROJ) is the reference; 0.1 mm is the brief's bound, far
    # above double rounding at 4e7 m (~1e-8 m)
    xyz = g.geodetic_to_ecef(np.radians(lat), np.radians(lon), h, ell)
    assert np.max(np.abs(xyz - np.stack([x, y, z], -1))) < 1e-4
    # inverse, all heights: PROJ's forward transform is the reference; our inverse
    # must recover the geodetic input PROJ converted, to 0.1 mm and 1e-9 deg
    la, lo, hh = g.ecef_to_geodetic(np.stack([x, y, z], -1), ell)
    assert np.max(np.abs(hh - h)) < 1e-4
    assert np.max(np.abs(np.degrees(la) - lat)) < 1e-9
    dlon = (np.degrees(lo) - lon + 180.0) % 360.0 - 180.0
    away_from_pole = np.abs(lat) < 89.99999  # longitude is arbitrary at the pole itself
    assert np.max(np.abs(dlon[away_from_pole])) < 1e-9
    # inverse against PROJ's own inverse where that is accurate: PROJ's cartesian
    # inverse is a closed-form approximation good to < 0.1 mm only up to ~50 km
    # height (measured here: 8e-7 m below 10 km, 0.16 m at 10 000 km), so this
    # comparison is limited to -10 km .. 50 km
    near = h < 50_000.0
    inv = Transformer.from_crs(ecef_crs, crs, always_xy=True)
    plon, plat, ph = inv.transform(x[near], y[near], z[near])
    assert near.sum() > 10
    assert np.max(np.abs(hh[near] - ph)) < 1e-4
    assert np.max(np.abs(np.degrees(la[near]) - plat)) < 1e-9


def test_inverse_near_surface_against_pyproj_inverse():
    # thousands of points between -10 km and 50 km, poles included; PROJ inverse is the reference
    rng = np.random.default_rng(5)
    n = 5000
    lat = np.concatenate([np.degrees(np.arcsin(rng.uniform(-1, 1, n))), [90.0, -90.0, 89.9999999]])
    lon = np.concatenate([rng.uniform(-180, 180, n), [0.0, 0.0, 45.0]])
    h = np.concatenate([rng.uniform(-10_000.0, 50_000.0, n), [-500.0, 8848.0, 0.0]])
    fwd = Transformer.from_crs("EPSG:4979", "EPSG:4978", always_xy=True)
    x, y, z = fwd.transform(lon, lat, h)
    la, lo, hh = g.ecef_to_geodetic(np.stack([x, y, z], -1))
    plon, plat, ph = Transformer.from_crs("EPSG:4978", "EPSG:4979", always_xy=True).transform(x, y, z)
    assert np.max(np.abs(hh - ph)) < 1e-4
    assert np.max(np.abs(np.degrees(la) - plat)) < 1e-9


def test_enu_against_pyproj_topocentric():
    # PROJ's "topocentric" conversion is the reference for the local ENU frame.
    lat0, lon0, h0 = 46.877, 7.465, 956.0
    origin = g.geodetic_to_ecef(np.radians(lat0), np.radians(lon0), h0)
    rng = np.random.default_rng(3)
    pts = origin + rng.normal(0, 2e7, (500, 3))
    t = Transformer.from_pipeline(
        f"+proj=topocentric +ellps=WGS84 +lat_0={lat0} +lon_0={lon0} +h_0={h0}")
    e, n, u = t.transform(pts[:, 0], pts[:, 1], pts[:, 2])
    enu = g.ecef_to_enu(pts - origin, np.radians(lat0), np.radians(lon0))
    # 0.1 mm at 2e4 km is 5e-12 relative: well above rounding (1e-16 × 2e7 m)
    assert np.max(np.abs(enu - np.stack([e, n, u], -1))) < 1e-4


def test_baseline_geodesic_against_pyproj_geod():
    from pyproj import Geod

    a = g.geodetic_to_ecef(np.radians(46.877), np.radians(7.465), 956.0)
    b = g.geodetic_to_ecef(np.radians(17.6), np.radians(-61.8), -20.0)
    bl = g.baseline(a, b)
    _, _, dist = Geod(ellps="WGS84").inv(7.465, 46.877, -61.8, 17.6)
    # pyproj.Geod (Karney) is the reference; the footprints come from our inverse (< 0.1 mm)
    assert abs(bl.geodesic_m - dist) < 1e-3
    # the chord is the straight line between the two ECEF points: ‖b − a‖ (definition), to the µm;
    # and it is shorter than the geodesic over ~6900 km (chord ≈ 2R sin(s/2R) on a sphere)
    assert bl.chord_m == pytest.approx(float(np.linalg.norm(np.asarray(b) - np.asarray(a))), abs=1e-6)
    r = 6371e3
    assert bl.chord_m < bl.geodesic_m
    assert abs(bl.chord_m - 2 * r * np.sin(dist / (2 * r))) < 25e3  # spherical approximation, ~0.3 %


def test_ionospheric_pierce_point_against_pyproj_geod_on_a_sphere():
    # The pierce point lies at Earth-central angle ψ along the azimuth A from the
    # receiver; on a sphere of radius R that is a geodesic of length R·ψ, which
    # pyproj.Geod (f = 0) computes independently.
    from pyproj import Geod

    from ctt import atmosphere as atm

    R, H = 6371e3, 450e3
    rng = np.random.default_rng(9)
    lat = rng.uniform(-85, 85, 2000)
    lon = rng.uniform(-180, 180, 2000)
    az = rng.uniform(0, 360, 2000)
    el = rng.uniform(5, 90, 2000)
    la, lo, z = atm.pierce_point(np.radians(lat), np.radians(lon), np.radians(az), np.radians(el), H, R)
    # ψ from the geometry of the ray, not from the code's zenith angle: the ray leaves radius R
    # at elevation E and meets the shell R + H after s = −R sin E + √(R² sin²E + (R+H)² − R²);
    # in the plane of the ray the point is (R + s sin E, s cos E), so ψ = atan2(s cos E, R + s sin E)
    e = np.radians(el)
    s_ray = -R * np.sin(e) + np.sqrt((R * np.sin(e)) ** 2 + (R + H) ** 2 - R ** 2)
    psi = np.arctan2(s_ray * np.cos(e), R + s_ray * np.sin(e))
    # the zenith angle at the pierce point then follows as π/2 − E − ψ (plane triangle)
    np.testing.assert_allclose(z, np.pi / 2 - e - psi, atol=1e-12)
    plon, plat, _ = Geod(a=R, f=0.0).fwd(lon, lat, az, R * psi)
    # 1e-9 deg ≈ 0.1 mm on the shell: both are closed forms in double precision
    assert np.max(np.abs(np.degrees(la) - plat)) < 1e-9
    assert np.max(np.abs((np.degrees(lo) - plon + 180) % 360 - 180)) < 1e-9
