"""Geodesy for time transfer: ellipsoids, ECEF <-> geodetic, local frames,
azimuth/elevation, antenna reference point, station baselines, Sun/Moon
positions and the solid Earth tide.

Everything is vectorised with numpy over leading axes: a position is an array
whose last axis has length 3 (x, y, z in metres, Earth-centred Earth-fixed).
Angles are radians unless a name ends in ``_deg``.

Why these are written out here rather than called from pyproj/astropy:
the per-epoch × per-satellite loops of the measurement model need plain numpy
broadcasting over ``(n_epoch, n_sat, 3)`` arrays, with no per-call object
construction, and astropy is a test-only dependency. pyproj and astropy are
the references the tests compare against (``tests/test_against_pyproj.py``,
``tests/test_against_iers_conventions.py``). The one exception is the
ellipsoidal geodesic distance of a baseline, which uses ``pyproj.Geod``
(Karney's algorithm; writing that again would gain nothing).

For the PPP estimator: :func:`pole_tide_displacement_enu` (IERS 2010 §7.1.4,
with :func:`iers2010_mean_pole_arcsec`; pole coordinates from
:func:`ctt.formats.erp.read_erp`) and :func:`pole_tide_ecef` (the same at a station's
instants with an ERP file's pole, in ECEF), :func:`nadir_angle_rad` (argument of the
satellite antenna variations), :func:`solid_tide_displacement`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import timescales as ts
from .errors import MissingInputError

#: Speed of light in vacuum, m/s (SI definition).
C_MPS = 299_792_458.0


@dataclass(frozen=True)
class Ellipsoid:
    """A reference ellipsoid given by its semi-major axis and inverse flattening."""

    name: str
    a: float  #: semi-major axis, m
    inv_f: float  #: inverse flattening

    @property
    def f(self) -> float:
        return 1.0 / self.inv_f

    @property
    def b(self) -> float:
        """Semi-minor axis, m."""
        return self.a * (1.0 - self.f)

    @property
    def e2(self) -> float:
        """First eccentricity squared."""
        return self.f * (2.0 - self.f)

    @property
    def ep2(self) -> float:
        """Second eccentricity squared."""
        return self.e2 / (1.0 - self.e2)


#: WGS 84 (NIMA TR8350.2): a = 6378137 m, 1/f = 298.257223563.
WGS84 = Ellipsoid("WGS84", 6378137.0, 298.257223563)
#: GRS 80 (Moritz, Geodetic Reference System 1980): a = 6378137 m, 1/f = 298.257222101.
GRS80 = Ellipsoid("GRS80", 6378137.0, 298.257222101)

ELLIPSOIDS = {"WGS84": WGS84, "GRS80": GRS80}


def _ellipsoid(ell) -> Ellipsoid:
    if isinstance(ell, Ellipsoid):
        return ell
    return ELLIPSOIDS[str(ell).upper()]


# ---------------------------------------------------------------- ECEF <-> geodetic

def geodetic_to_ecef(lat_rad, lon_rad, h_m, ellipsoid=WGS84):
    """Geodetic latitude, longitude, ellipsoidal height -> ECEF ``(..., 3)`` metres."""
    ell = _ellipsoid(ellipsoid)
    lat = np.asarray(lat_rad, dtype=float)
    lon = np.asarray(lon_rad, dtype=float)
    h = np.asarray(h_m, dtype=float)
    sl, cl = np.sin(lat), np.cos(lat)
    n = ell.a / np.sqrt(1.0 - ell.e2 * sl * sl)
    x = (n + h) * cl * np.cos(lon)
    y = (n + h) * cl * np.sin(lon)
    z = (n * (1.0 - ell.e2) + h) * sl
    return np.stack(np.broadcast_arrays(x, y, z), axis=-1)


def ecef_to_geodetic(xyz_m, ellipsoid=WGS84):
    """ECEF ``(..., 3)`` metres -> ``(lat_rad, lon_rad, h_m)``, each of shape ``(...)``.

    Bowring's (1976) parametric-latitude iteration, three passes from
    Bowring's starting value; the height comes from
    ``h = p cos φ + z sin φ − a √(1 − e² sin² φ)``, which has no singularity at
    the poles. Three passes converge to below 1e-6 mm for points from the
    Earth's centre region out to GNSS orbit heights (checked against pyproj
    in tests); the centre of the Earth itself is undefined and not handled.
    """
    ell = _ellipsoid(ellipsoid)
    xyz = np.asarray(xyz_m, dtype=float)
    x, y, z = xyz[..., 0], xyz[..., 1], xyz[..., 2]
    a, b, e2, ep2 = ell.a, ell.b, ell.e2, ell.ep2
    p = np.hypot(x, y)
    lon = np.arctan2(y, x)
    # starting value: parametric latitude from the geocentric direction
    beta = np.arctan2(z * a, p * b)
    for _ in range(3):
        sb, cb = np.sin(beta), np.cos(beta)
        lat = np.arctan2(z + ep2 * b * sb ** 3, p - e2 * a * cb ** 3)
        beta = np.arctan2((1.0 - ell.f) * np.sin(lat), np.cos(lat))
    sl, cl = np.sin(lat), np.cos(lat)
    h = p * cl + z * sl - a * np.sqrt(1.0 - e2 * sl * sl)
    return lat, lon, h


def geocentric_latitude(xyz_m):
    """Geocentric latitude (rad) of ECEF positions ``(..., 3)``."""
    xyz = np.asarray(xyz_m, dtype=float)
    return np.arctan2(xyz[..., 2], np.hypot(xyz[..., 0], xyz[..., 1]))


# ---------------------------------------------------------------- local frames

def enu_matrix(lat_rad, lon_rad):
    """Rotation ECEF -> local east/north/up at geodetic (lat, lon); shape ``(..., 3, 3)``.

    Rows are the unit vectors east, north and up (ellipsoidal normal) in ECEF,
    so ``enu = R @ d_ecef`` and ``d_ecef = R.T @ enu``.
    """
    lat = np.asarray(lat_rad, dtype=float)
    lon = np.asarray(lon_rad, dtype=float)
    sl, cl = np.sin(lat), np.cos(lat)
    so, co = np.sin(lon), np.cos(lon)
    zero = np.zeros_like(sl * so)
    east = np.stack(np.broadcast_arrays(-so, co, zero), axis=-1)
    north = np.stack(np.broadcast_arrays(-sl * co, -sl * so, cl), axis=-1)
    up = np.stack(np.broadcast_arrays(cl * co, cl * so, sl), axis=-1)
    return np.stack([east, north, up], axis=-2)


def ecef_to_enu(d_ecef_m, lat_rad, lon_rad):
    """Rotate ECEF vectors ``(..., 3)`` into local ENU at (lat, lon) (broadcasting)."""
    r = enu_matrix(lat_rad, lon_rad)
    return np.einsum("...ij,...j->...i", r, np.asarray(d_ecef_m, dtype=float))


def enu_to_ecef(enu_m, lat_rad, lon_rad):
    """Rotate local ENU vectors ``(..., 3)`` at (lat, lon) into ECEF (broadcasting)."""
    r = enu_matrix(lat_rad, lon_rad)
    return np.einsum("...ji,...j->...i", r, np.asarray(enu_m, dtype=float))


def azimuth_elevation(receiver_ecef_m, sat_ecef_m, ellipsoid=WGS84):
    """Azimuth, elevation (rad) and range (m) of satellites seen from receivers.

    ``receiver_ecef_m`` is ``(3,)`` or broadcastable to ``sat_ecef_m``
    (``(N, 3)``, ``(n_epoch, n_sat, 3)``, ...). Azimuth is clockwise from
    geodetic north in [0, 2π); elevation is above the plane normal to the
    ellipsoidal normal (not the geocentric radius). No refraction.
    """
    rx = np.asarray(receiver_ecef_m, dtype=float)
    sat = np.asarray(sat_ecef_m, dtype=float)
    lat, lon, _ = ecef_to_geodetic(rx, ellipsoid)
    d = sat - rx
    enu = ecef_to_enu(d, lat[..., None] if lat.ndim and lat.ndim < d.ndim - 1 else lat,
                      lon[..., None] if lon.ndim and lon.ndim < d.ndim - 1 else lon)
    e, n, u = enu[..., 0], enu[..., 1], enu[..., 2]
    rng = np.sqrt(e * e + n * n + u * u)
    az = np.mod(np.arctan2(e, n), 2.0 * np.pi)
    el = np.arcsin(np.clip(u / rng, -1.0, 1.0))
    return az, el, rng


def nadir_angle_rad(sat_ecef_m, receiver_ecef_m):
    """Nadir angle (rad) at the satellite: between the direction to the Earth's centre and to the receiver.

    The argument of satellite antenna variations (ANTEX 1.4: nadir angle);
    at most about 14° for GPS seen from the ground. Vectorised (broadcasting).
    """
    sat = np.asarray(sat_ecef_m, dtype=float)
    d = np.asarray(receiver_ecef_m, dtype=float) - sat
    c = -np.einsum("...i,...i->...", sat, d) / (np.linalg.norm(sat, axis=-1) * np.linalg.norm(d, axis=-1))
    return np.arccos(np.clip(c, -1.0, 1.0))


def antenna_reference_point(marker_ecef_m, delta_h_m, delta_e_m=0.0, delta_n_m=0.0, ellipsoid=WGS84):
    """ECEF of the antenna reference point from the marker and the RINEX
    ``ANTENNA: DELTA H/E/N`` (height up along the ellipsoidal normal, east,
    north eccentricities in metres, RINEX 2.11/3.x header definition)."""
    marker = np.asarray(marker_ecef_m, dtype=float)
    lat, lon, _ = ecef_to_geodetic(marker, ellipsoid)
    enu = np.stack(np.broadcast_arrays(np.asarray(delta_e_m, float), np.asarray(delta_n_m, float),
                                       np.asarray(delta_h_m, float)), axis=-1)
    return marker + enu_to_ecef(enu, lat, lon)


# ---------------------------------------------------------------- baselines

def _covariance(cov, sigma):
    if cov is not None:
        c = np.asarray(cov, dtype=float)
        if c.shape != (3, 3):
            raise ValueError(f"a coordinate covariance must be 3×3 (m²), got shape {c.shape}")
        return c
    if sigma is None:
        return np.zeros((3, 3))
    s = np.broadcast_to(np.asarray(sigma, dtype=float), (3,))
    return np.diag(s * s)


@dataclass(frozen=True)
class Baseline:
    """Geometry between two stations A and B (B − A)."""

    vector_m: np.ndarray  #: ECEF B − A, m
    chord_m: float  #: straight-line distance |B − A|, m
    chord_sigma_m: float  #: 1-σ of the chord from the coordinate covariances, m
    geodesic_m: float  #: ellipsoidal geodesic distance between the two footprints, m
    azimuth_a_deg: float  #: forward geodesic azimuth at A, degrees from north
    light_time_s: float  #: chord / c, s
    light_time_sigma_s: float  #: chord_sigma / c, s
    height_a_m: float
    height_b_m: float


def baseline(ecef_a_m, ecef_b_m, *, cov_a=None, cov_b=None, sigma_a_m=None, sigma_b_m=None,
             ellipsoid=WGS84) -> Baseline:
    """Chord, geodesic and light time between two stations, with uncertainty.

    The chord uncertainty is first-order propagation: with the unit vector
    ``u = (B − A)/|B − A|``, ``σ² = uᵀ (C_A + C_B) u`` (the two stations'
    coordinate errors taken as independent). Give full 3×3 ECEF covariances
    (m²) or per-axis ECEF sigmas (m); nothing means exact coordinates.
    The geodesic between the two ellipsoidal footprints comes from
    ``pyproj.Geod`` (Karney 2013).
    """
    from pyproj import Geod

    a = np.asarray(ecef_a_m, dtype=float).reshape(3)
    b = np.asarray(ecef_b_m, dtype=float).reshape(3)
    d = b - a
    chord = float(np.linalg.norm(d))
    c = _covariance(cov_a, sigma_a_m) + _covariance(cov_b, sigma_b_m)
    if chord > 0:
        u = d / chord
        var = float(u @ c @ u)
    else:
        var = float(np.trace(c) / 3.0)
    sig = float(np.sqrt(max(var, 0.0)))
    ell = _ellipsoid(ellipsoid)
    lat_a, lon_a, h_a = ecef_to_geodetic(a, ell)
    lat_b, lon_b, h_b = ecef_to_geodetic(b, ell)
    geod = Geod(a=ell.a, rf=ell.inv_f)
    az12, _, dist = geod.inv(np.degrees(lon_a), np.degrees(lat_a), np.degrees(lon_b), np.degrees(lat_b))
    return Baseline(vector_m=d, chord_m=chord, chord_sigma_m=sig, geodesic_m=float(dist),
                    azimuth_a_deg=float(az12) % 360.0, light_time_s=chord / C_MPS,
                    light_time_sigma_s=sig / C_MPS, height_a_m=float(h_a), height_b_m=float(h_b))


# ---------------------------------------------------------------- Sun and Moon

_AU_M = 149_597_870_700.0  # IAU 2012 Resolution B2
_EARTH_RADIUS_AA_M = 6378137.0  # Earth radius in the Moon's horizontal parallax (AA uses 6378.14 km)


def _utc_ns(t_ns, time_scale):
    scale = ts.normalise_scale(time_scale)
    t = np.atleast_1d(np.asarray(t_ns, dtype=np.int64))
    return t if scale == "UTC" else ts.convert(t, scale, "UTC")


def _julian_days_since_j2000(utc_ns):
    """UTC instants -> (days since J2000.0 as UT (UT1 ≈ UTC), days since J2000.0 as TT)."""
    mjd, sod = ts.to_mjd(utc_ns)
    d_ut = (mjd - 51544.5) + sod / 86400.0
    tt_minus_utc = ts.tai_minus_utc(utc_ns) + 32.184  # TT = TAI + 32.184 s
    return d_ut, d_ut + tt_minus_utc / 86400.0


def gmst_rad(utc_ns):
    """Greenwich mean sidereal time (rad) from UTC taken as UT1 (|UT1−UTC| < 0.9 s,
    i.e. < 4e-3° of rotation: negligible here). IAU 1982 expression (Aoki et al. 1982)."""
    d_ut, _ = _julian_days_since_j2000(np.asarray(utc_ns, dtype=np.int64))
    t = d_ut / 36525.0
    g = 280.46061837 + 360.98564736629 * d_ut + 0.000387933 * t * t - t ** 3 / 38710000.0
    return np.radians(np.mod(g, 360.0))


def _ecliptic_to_ecef(lam, beta, r, eps, gmst):
    cb = np.cos(beta)
    xe, ye, ze = r * cb * np.cos(lam), r * cb * np.sin(lam), r * np.sin(beta)
    # ecliptic -> equatorial of date (rotation about x by −ε)
    xq = xe
    yq = ye * np.cos(eps) - ze * np.sin(eps)
    zq = ye * np.sin(eps) + ze * np.cos(eps)
    # equatorial of date -> Earth-fixed (rotation about z by GMST; polar motion neglected)
    cg, sg = np.cos(gmst), np.sin(gmst)
    return np.stack([cg * xq + sg * yq, -sg * xq + cg * yq, zq], axis=-1)


def sun_moon_ecef(t_ns, time_scale="GPS"):
    """Low-precision Sun and Moon positions, ECEF metres, each ``(N, 3)``.

    Formulas of the Astronomical Almanac's low-precision ephemeris ("Sun" on
    p. C5 and "Moon" on p. D22 in recent editions; the coefficients are
    recalled from memory and verified against astropy in the tests). The
    Almanac states accuracies of 0.01° for the Sun (1950–2050) and, for the
    Moon, 0.3° in ecliptic longitude, 0.2° in latitude and 0.003° in
    horizontal parallax (≈ 0.3 % in distance). Positions are of date and are
    turned Earth-fixed with GMST (nutation in right ascension, < 0.005°, and
    polar motion are neglected). For the solid tide these errors give below
    ~3 mm of displacement, well below a picosecond-level timing effect.
    """
    utc = _utc_ns(t_ns, time_scale)
    n_ut, n_tt = _julian_days_since_j2000(utc)
    gmst = gmst_rad(utc)
    rad = np.radians
    # --- Sun (AA low precision)
    n = n_tt
    L = 280.460 + 0.9856474 * n
    g = rad(357.528 + 0.9856003 * n)
    lam = rad(L + 1.915 * np.sin(g) + 0.020 * np.sin(2 * g))
    eps = rad(23.439 - 0.0000004 * n)
    r_sun = (1.00014 - 0.01671 * np.cos(g) - 0.00014 * np.cos(2 * g)) * _AU_M
    sun = _ecliptic_to_ecef(lam, np.zeros_like(lam), r_sun, eps, gmst)
    # --- Moon (AA low precision), T in Julian centuries of TT from J2000
    T = n_tt / 36525.0
    lam_m = (218.32 + 481267.881 * T
             + 6.29 * np.sin(rad(135.0 + 477198.87 * T)) - 1.27 * np.sin(rad(259.3 - 413335.36 * T))
             + 0.66 * np.sin(rad(235.7 + 890534.22 * T)) + 0.21 * np.sin(rad(269.9 + 954397.74 * T))
             - 0.19 * np.sin(rad(357.5 + 35999.05 * T)) - 0.11 * np.sin(rad(186.5 + 966404.03 * T)))
    beta_m = (5.13 * np.sin(rad(93.3 + 483202.02 * T)) + 0.28 * np.sin(rad(228.2 + 960400.89 * T))
              - 0.28 * np.sin(rad(318.3 + 6003.15 * T)) - 0.17 * np.sin(rad(217.6 - 407332.21 * T)))
    par = (0.9508 + 0.0518 * np.cos(rad(135.0 + 477198.87 * T)) + 0.0095 * np.cos(rad(259.3 - 413335.36 * T))
           + 0.0078 * np.cos(rad(235.7 + 890534.22 * T)) + 0.0028 * np.cos(rad(269.9 + 954397.74 * T)))
    r_moon = _EARTH_RADIUS_AA_M / np.sin(rad(par))
    moon = _ecliptic_to_ecef(rad(lam_m), rad(beta_m), r_moon, eps, gmst)
    return sun, moon


# ---------------------------------------------------------------- solid Earth tide

#: Mass ratios and Earth radius of the IERS Conventions (2010) station-displacement model.
MASS_RATIO_SUN = 332946.0482
MASS_RATIO_MOON = 0.0123000371
RE_TIDE_M = 6378136.6
#: Nominal degree-2 and -3 Love and Shida numbers (IERS Conventions 2010, §7.1.1, eq. 7.2).
H20, L20, H3, L3 = 0.6078, 0.0847, 0.292, 0.015

# IERS Conventions (2010) Table 7.3a: frequency dependence, diurnal band (mm).
# Columns: Doodson-argument multipliers of s, h, p, N', ps (τ = 1 for all), then
# ΔR(ip), ΔR(op), ΔT(ip), ΔT(op). Values as coded in the Conventions'
# reference routine (array DATDI of its step-2 diurnal part), which the test
# case of the Conventions checks.
_STEP2_DIURNAL = np.array([
    [-3, 0, 2, 0, 0, -0.01, 0.0, 0.0, 0.0],
    [-3, 2, 0, 0, 0, -0.01, 0.0, 0.0, 0.0],
    [-2, 0, 1, -1, 0, -0.02, 0.0, 0.0, 0.0],
    [-2, 0, 1, 0, 0, -0.08, 0.0, -0.01, 0.01],
    [-2, 2, -1, 0, 0, -0.02, 0.0, 0.0, 0.0],
    [-1, 0, 0, -1, 0, -0.10, 0.0, 0.0, 0.0],
    [-1, 0, 0, 0, 0, -0.51, 0.0, -0.02, 0.03],
    [-1, 2, 0, 0, 0, 0.01, 0.0, 0.0, 0.0],
    [0, -2, 1, 0, 0, 0.01, 0.0, 0.0, 0.0],
    [0, 0, -1, 0, 0, 0.02, 0.0, 0.0, 0.0],
    [0, 0, 1, 0, 0, 0.06, 0.0, 0.0, 0.0],
    [0, 0, 1, 1, 0, 0.01, 0.0, 0.0, 0.0],
    [0, 2, -1, 0, 0, 0.01, 0.0, 0.0, 0.0],
    [1, -3, 0, 0, 1, -0.06, 0.0, 0.0, 0.0],
    [1, -2, 0, -1, 0, 0.01, 0.0, 0.0, 0.0],
    [1, -2, 0, 0, 0, -1.23, -0.07, 0.06, 0.01],
    [1, -1, 0, 0, -1, 0.02, 0.0, 0.0, 0.0],
    [1, -1, 0, 0, 1, 0.04, 0.0, 0.0, 0.0],
    [1, 0, 0, -1, 0, -0.22, 0.01, 0.01, 0.0],
    [1, 0, 0, 0, 0, 12.00, -0.80, -0.67, -0.03],  # 2003 edition printed -0.78; the routine (test case) -0.80
    [1, 0, 0, 1, 0, 1.73, -0.12, -0.10, 0.0],
    [1, 0, 0, 2, 0, -0.04, 0.0, 0.0, 0.0],
    [1, 1, 0, 0, -1, -0.50, -0.01, 0.03, 0.0],
    [1, 1, 0, 0, 1, 0.01, 0.0, 0.0, 0.0],
    [0, 1, 0, 1, -1, -0.01, 0.0, 0.0, 0.0],  # s multiplier as in the reference routine
    [1, 2, -2, 0, 0, -0.01, 0.0, 0.0, 0.0],
    [1, 2, 0, 0, 0, -0.11, 0.01, 0.01, 0.0],
    [2, -2, 1, 0, 0, -0.01, 0.0, 0.0, 0.0],
    [2, 0, -1, 0, 0, -0.02, 0.0, 0.0, 0.0],
    [3, 0, 0, 0, 0, 0.0, 0.0, 0.0, 0.0],
    [3, 0, 0, 1, 0, 0.0, 0.0, 0.0, 0.0],
])

# IERS Conventions (2010) Table 7.3b: frequency dependence, long-period band (mm).
# Columns: multipliers of s, h, p, N', ps, then ΔR(ip), ΔR(op), ΔT(ip), ΔT(op).
_STEP2_LONG = np.array([
    [0, 0, 0, 1, 0, 0.47, 0.16, 0.23, 0.07],
    [0, 2, 0, 0, 0, -0.20, -0.11, -0.12, -0.05],
    [1, 0, -1, 0, 0, -0.11, -0.09, -0.08, -0.04],
    [2, 0, 0, 0, 0, -0.13, -0.15, -0.11, -0.07],
    [2, 0, 0, 1, 0, -0.05, -0.06, -0.05, -0.03],
])


def _fundamental_args_deg(t_tt_cent):
    """Doodson fundamental arguments s, h, p, N', ps (degrees) at TT centuries from
    J2000 — the polynomials of the Conventions' step-2 routine (Simon et al. 1994)."""
    T = t_tt_cent
    s = 218.31664563 + 481267.88194 * T - 0.0014663889 * T**2 + 0.00000185139 * T**3
    pr = 1.396971278 * T + 0.000308889 * T**2 + 0.000000021 * T**3 + 0.000000007 * T**4
    s = s + pr  # general precession in longitude brings s to the equinox of date
    h = 280.46645 + 36000.7697489 * T + 0.00030322222 * T**2 + 0.000000020 * T**3 - 0.00000000654 * T**4
    p = 83.35324312 + 4069.01363525 * T - 0.01032172222 * T**2 - 0.0000124991 * T**3 + 0.00000005263 * T**4
    zns = 234.95544499 + 1934.13626197 * T - 0.00207561111 * T**2 - 0.00000213944 * T**3 + 0.00000001650 * T**4
    ps = 282.93734098 + 1.71945766667 * T + 0.00045688889 * T**2 - 0.00000001778 * T**3 - 0.00000000334 * T**4
    return np.mod(np.stack([s, h, p, zns, ps], axis=-1), 360.0)


def solid_tide_displacement(station_ecef_m, t_ns, sun_ecef=None, moon_ecef=None, *,
                            time_scale="GPS", step2=True, in_phase_only=False):
    """Solid Earth tide displacement of a station, ECEF metres ``(N, 3)``.

    IERS Conventions (2010), §7.1.1 ("conventional tide free": the permanent
    tide is *not* restored, as the Conventions prescribe for ITRF coordinates):

    * step 1, in the time domain: degree-2 in-phase with the latitude
      dependence h2 = 0.6078 − 0.0006 (3 sin²φ − 1)/2,
      l2 = 0.0847 + 0.0002 (3 sin²φ − 1)/2 (eq. 7.2); degree-3 in-phase with
      h3 = 0.292, l3 = 0.015; the out-of-phase diurnal (hI = −0.0025,
      lI = −0.0007) and semidiurnal (hI = −0.0022, lI = −0.0007) terms
      (eqs. 7.10–7.11); the l(1) latitude terms (0.0012 diurnal, 0.0024
      semidiurnal; eqs. 7.8–7.9);
    * step 2 (``step2=True``), in the frequency domain: corrections of
      Table 7.3a (diurnal band, eq. 7.12) and Table 7.3b (long-period band,
      eq. 7.13).
    * ``in_phase_only=True`` keeps only the degree-2/3 in-phase terms (and no
      step 2), the minimum the Conventions name; for comparisons.

    ``station_ecef_m``: ``(3,)`` or ``(N, 3)``. ``t_ns``: int64 ``(N,)`` on
    ``time_scale`` (GPS by default; ``"UTC"`` accepted). Sun and Moon ECEF
    ``(N, 3)`` or ``(3,)`` metres; computed with :func:`sun_moon_ecef` when
    not given. φ and λ are the station's geocentric latitude and longitude,
    as in the Conventions. The displacement has amplitudes up to ~0.4 m
    (≈ 1.3 ns of light time) and is applied to the station coordinate.
    """
    t = np.atleast_1d(np.asarray(t_ns, dtype=np.int64))
    utc = _utc_ns(t, time_scale)
    n = t.shape[0]
    xsta = np.broadcast_to(np.asarray(station_ecef_m, dtype=float), (n, 3))
    if sun_ecef is None or moon_ecef is None:
        s_calc, m_calc = sun_moon_ecef(utc, "UTC")
        sun_ecef = s_calc if sun_ecef is None else sun_ecef
        moon_ecef = m_calc if moon_ecef is None else moon_ecef
    xsun = np.broadcast_to(np.asarray(sun_ecef, dtype=float), (n, 3))
    xmon = np.broadcast_to(np.asarray(moon_ecef, dtype=float), (n, 3))

    rsta = np.linalg.norm(xsta, axis=-1)
    rsun = np.linalg.norm(xsun, axis=-1)
    rmon = np.linalg.norm(xmon, axis=-1)
    rhat = xsta / rsta[:, None]
    sinphi = xsta[:, 2] / rsta
    cosphi = np.hypot(xsta[:, 0], xsta[:, 1]) / rsta
    cosla = xsta[:, 0] / (cosphi * rsta)
    sinla = xsta[:, 1] / (cosphi * rsta)

    fac2sun = MASS_RATIO_SUN * RE_TIDE_M * (RE_TIDE_M / rsun) ** 3
    fac2mon = MASS_RATIO_MOON * RE_TIDE_M * (RE_TIDE_M / rmon) ** 3
    fac3sun = fac2sun * (RE_TIDE_M / rsun)
    fac3mon = fac2mon * (RE_TIDE_M / rmon)

    # --- step 1, in-phase degree 2 and 3 (eqs. 7.5, 7.6 with eq. 7.2's latitude dependence)
    p2lat = (3.0 * sinphi**2 - 1.0) / 2.0
    h2 = H20 - 0.0006 * p2lat
    l2 = L20 + 0.0002 * p2lat
    disp = np.zeros((n, 3))
    for xb, rb, f2, f3 in ((xsun, rsun, fac2sun, fac3sun), (xmon, rmon, fac2mon, fac3mon)):
        bhat = xb / rb[:, None]
        cz = np.einsum("ij,ij->i", rhat, bhat)  # cos of the body's geocentric zenith angle
        p2 = 3.0 * (h2 / 2.0 - l2) * cz**2 - h2 / 2.0
        x2 = 3.0 * l2 * cz
        p3 = 2.5 * (H3 - 3.0 * L3) * cz**3 + 1.5 * (L3 - H3) * cz
        x3 = 1.5 * L3 * (5.0 * cz**2 - 1.0)
        disp += (f2 * x2)[:, None] * bhat + (f2 * p2)[:, None] * rhat
        disp += (f3 * x3)[:, None] * bhat + (f3 * p3)[:, None] * rhat

    if in_phase_only:
        return disp

    def to_ecef(dr, de, dn):
        return np.stack([dr * cosla * cosphi - de * sinla - dn * sinphi * cosla,
                         dr * sinla * cosphi + de * cosla - dn * sinphi * sinla,
                         dr * sinphi + dn * cosphi], axis=-1)

    cos2phi = cosphi**2 - sinphi**2
    cos2la = cosla**2 - sinla**2
    sin2la = 2.0 * cosla * sinla
    dr = np.zeros(n)
    de = np.zeros(n)
    dn = np.zeros(n)
    dn_l1 = np.zeros(n)
    de_l1 = np.zeros(n)
    for xb, rb, f2 in ((xsun, rsun, fac2sun), (xmon, rmon, fac2mon)):
        x, y, z = xb[:, 0], xb[:, 1], xb[:, 2]
        r2 = rb**2
        # out-of-phase, diurnal band (eq. 7.10): hI = -0.0025, lI = -0.0007
        dhi, dli = -0.0025, -0.0007
        c1 = f2 * z * (x * sinla - y * cosla) / r2
        s1 = f2 * z * (x * cosla + y * sinla) / r2
        dr += -3.0 * dhi * sinphi * cosphi * c1
        dn += -3.0 * dli * cos2phi * c1
        de += -3.0 * dli * sinphi * s1
        # out-of-phase, semidiurnal band (eq. 7.11): hI = -0.0022, lI = -0.0007
        dhi, dli = -0.0022, -0.0007
        a2 = f2 * ((x * x - y * y) * sin2la - 2.0 * x * y * cos2la) / r2
        b2 = f2 * ((x * x - y * y) * cos2la + 2.0 * x * y * sin2la) / r2
        dr += -0.75 * dhi * cosphi**2 * a2
        dn += 1.5 * dli * sinphi * cosphi * a2
        de += -1.5 * dli * cosphi * b2
        # latitude dependence l(1) (eqs. 7.8, 7.9): 0.0012 diurnal, 0.0024 semidiurnal
        l1d, l1sd = 0.0012, 0.0024
        dn_l1 += 3.0 * (-l1d * sinphi**2 * s1 - l1sd / 2.0 * sinphi * cosphi * b2)
        de_l1 += 3.0 * (l1d * sinphi * cos2phi * c1 - l1sd / 2.0 * sinphi**2 * cosphi * a2)
    disp += to_ecef(dr, de, dn)
    disp += to_ecef(np.zeros(n), de_l1, dn_l1)

    if step2:
        _, d_tt = _julian_days_since_j2000(utc)
        tcent = d_tt / 36525.0
        _, sod = ts.to_mjd(utc)
        fhr = sod / 3600.0  # UT hours of day
        args = _fundamental_args_deg(tcent)  # (n, 5)
        tau = (fhr * 15.0 + 280.4606184 + 36000.7700536 * tcent + 0.00038793 * tcent**2
               - 0.0000000258 * tcent**3 - (218.31664563 + 481267.88194 * tcent
                                            - 0.0014663889 * tcent**2 + 0.00000185139 * tcent**3))
        zla = np.arctan2(sinla, cosla)
        # diurnal band (eq. 7.12)
        tab = _STEP2_DIURNAL
        theta = np.radians(tau[:, None] + args @ tab[:, :5].T) + zla[:, None]  # (n, 31)
        st, ct = np.sin(theta), np.cos(theta)
        dr2 = 2.0 * sinphi * cosphi * (st @ tab[:, 5] + ct @ tab[:, 6])
        dn2 = cos2phi * (st @ tab[:, 7] + ct @ tab[:, 8])
        de2 = sinphi * (ct @ tab[:, 7] - st @ tab[:, 8])
        disp += 1e-3 * to_ecef(dr2, de2, dn2)
        # long-period band (eq. 7.13)
        tab = _STEP2_LONG
        theta = np.radians(args @ tab[:, :5].T)
        st, ct = np.sin(theta), np.cos(theta)
        dr3 = p2lat * (ct @ tab[:, 5] + st @ tab[:, 6])
        dn3 = 2.0 * cosphi * sinphi * (ct @ tab[:, 7] + st @ tab[:, 8])
        disp += 1e-3 * to_ecef(dr3, np.zeros(n), dn3)

    return disp


# ------------------------------------------------------------------ pole tide (IERS Conventions 2010 §7.1.4)

def iers2010_mean_pole_arcsec(decimal_year):
    """Conventional mean pole (x̄p, ȳp) in arcseconds, IERS Conventions (2010) §7.1.4, Table 7.7.

    Cubic in t = year − 2000.0 until 2010.0, linear after (the 2010
    conventions' model; the two pieces meet at 2010.0)::

        t < 10:  x̄p = 55.974 + 1.8243 t + 0.18413 t² + 0.007024 t³   mas
                 ȳp = 346.346 + 1.7896 t − 0.10729 t² − 0.000908 t³   mas
        t ≥ 10:  x̄p = 23.513 + 7.6141 t,  ȳp = 358.891 − 0.6287 t     mas
    """
    t = np.asarray(decimal_year, dtype=float) - 2000.0
    cubic = t < 10.0
    x = np.where(cubic, 55.974 + 1.8243 * t + 0.18413 * t**2 + 0.007024 * t**3, 23.513 + 7.6141 * t)
    y = np.where(cubic, 346.346 + 1.7896 * t - 0.10729 * t**2 - 0.000908 * t**3, 358.891 - 0.6287 * t)
    return x * 1e-3, y * 1e-3


def pole_tide_displacement_enu(lat_rad, lon_rad, xp_arcsec, yp_arcsec, decimal_year):
    """Solid Earth pole tide displacement (east, north, up) in metres, IERS Conventions (2010) eq. 7.26.

    m1 = xp − x̄p, m2 = −(yp − ȳp) (arcsec, mean pole of
    :func:`iers2010_mean_pole_arcsec`); with θ the colatitude and λ the
    east longitude::

        S_r = −33 sin 2θ (m1 cos λ + m2 sin λ)    mm  (up)
        S_θ =  −9 cos 2θ (m1 cos λ + m2 sin λ)    mm  (south)
        S_λ =   9 cos θ  (m1 sin λ − m2 cos λ)    mm  (east)

    (the coefficients are h2 = 0.6207, l2 = 0.0836 times Ω²a²/(2g) per arcsec;
    checked in tests/test_against_iers_conventions.py). At most about 25 mm
    up and 7 mm horizontally (IERS 2010 §7.1.4). Vectorised; ``xp``/``yp``
    e.g. from :func:`ctt.formats.erp.read_erp` interpolated to the day.
    """
    xbar, ybar = iers2010_mean_pole_arcsec(decimal_year)
    m1 = np.asarray(xp_arcsec, dtype=float) - xbar
    m2 = -(np.asarray(yp_arcsec, dtype=float) - ybar)
    theta = np.pi / 2.0 - np.asarray(lat_rad, dtype=float)
    lam = np.asarray(lon_rad, dtype=float)
    a = m1 * np.cos(lam) + m2 * np.sin(lam)
    s_r = -33.0 * np.sin(2.0 * theta) * a
    s_t = -9.0 * np.cos(2.0 * theta) * a
    s_l = 9.0 * np.cos(theta) * (m1 * np.sin(lam) - m2 * np.cos(lam))
    return np.stack([s_l, -s_t, s_r], axis=-1) * 1e-3


#: Days outside an ERP file's epochs for which its nearest epoch's pole is used (see pole_tide_ecef).
POLE_HOLD_DAYS = 1.0


def pole_hold_epochs(erp, t_gps_ns) -> int:
    """How many of the GPS instants lie outside ``erp``'s epochs (pole held, :func:`pole_tide_ecef`)."""
    mjd = np.asarray(ts.to_mjd_float(ts.convert(np.asarray(t_gps_ns, dtype=np.int64), "GPS", "UTC")), dtype=float)
    return int(np.count_nonzero((mjd < erp.mjd[0]) | (mjd > erp.mjd[-1])))


def pole_tide_ecef(erp, station_ecef_m, t_gps_ns):
    """Solid Earth pole tide displacement of a station at GPS instants, ECEF metres ``(N, 3)``.

    IERS Conventions (2010) §7.1.4, eq. 7.26 (:func:`ctt.geodesy.pole_tide_displacement_enu`,
    mean pole of Table 7.7), with the pole (xp, yp) of ``erp`` (:class:`ctt.formats.erp.ErpData`)
    interpolated linearly at each instant's UTC MJD; latitude and longitude geodetic (the
    geocentric colatitude of eq. 7.26 differs by 0.2° at most: below 0.02 mm here).
    Returns (ecef (N, 3), enu (N, 3), xp_arcsec (N,), yp_arcsec (N,)).
    Instants up to ``POLE_HOLD_DAYS`` outside the file's epochs take the pole of its nearest
    epoch: a weekly final file has one epoch at each noon, so the hours after the week's last
    noon need the next week's file, which a daily run does not have yet; the pole moves a few
    mas a day (common practice), below 0.2 mm of displacement in a day, far under what a
    day's clock can show. Farther out: :class:`MissingInputError` naming the file and the
    day (ERP values are never extrapolated). ``pole_hold_epochs(erp, t)`` counts the held ones.
    """
    t = np.asarray(t_gps_ns, dtype=np.int64)
    utc = ts.convert(t, "GPS", "UTC")
    mjd = np.asarray(ts.to_mjd_float(utc), dtype=float)
    xp, yp = erp.pole_arcsec(mjd)
    near = (mjd >= erp.mjd[0] - POLE_HOLD_DAYS) & (mjd <= erp.mjd[-1] + POLE_HOLD_DAYS)
    held = near & ~(np.isfinite(xp) & np.isfinite(yp))
    xp = np.where(held, np.interp(mjd, erp.mjd, erp.xp_arcsec), xp)   # np.interp holds the end values
    yp = np.where(held, np.interp(mjd, erp.mjd, erp.yp_arcsec), yp)
    out = ~(np.isfinite(xp) & np.isfinite(yp))
    if out.any():
        first, last = ts.to_iso(int(utc[0])), ts.to_iso(int(utc[-1]))
        raise MissingInputError(
            f"{erp.path}: ERP epochs MJD {erp.mjd[0]:.2f}-{erp.mjd[-1]:.2f} do not cover the day "
            f"{first[:10]} ({int(out.sum())} of {len(t)} epochs outside, {first} to {last} UTC is MJD "
            f"{mjd[0]:.4f}-{mjd[-1]:.4f}); the pole tide needs the pole at every epoch and ERP values are "
            f"never extrapolated beyond {POLE_HOLD_DAYS:g} day of a file's epochs: give the ERP file of "
            "that week")
    lat, lon, _ = ecef_to_geodetic(np.asarray(station_ecef_m, dtype=float))
    # Julian years from J2000.0, only for the mean pole (7.6 mas/yr): an error of 1e-3 in these
    # constants moves it by < 0.1 mas, the displacement by < 0.003 mm (below any resolvable effect)
    decimal_year = 2000.0 + (mjd - 51544.5) / 365.25
    enu = pole_tide_displacement_enu(lat, lon, xp, yp, decimal_year)
    return enu_to_ecef(enu, lat, lon), enu, xp, yp
