"""Carrier-phase model terms against outside numbers: Shapiro delay, phase wind-up, eclipses, pole tide.

Sources are named beside each check: IERS Conventions (2010) (IERS Technical
Note 36) eq. 11.17 and §7.1.4; Wu et al. (1993) for wind-up; the geometry of
a circular GPS orbit for eclipse durations; the IGS ERP file igs16577.erp of
../shared/data/real-2011-283 for the pole coordinates.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from ctt import geodesy, orbits, signals
from ctt.measure import shapiro_delay_m

R_GPS = 26_560e3   # GPS orbit radius, m (common practice)


def test_shapiro_against_iers_eq_11_17_with_astropy_constants():
    const = pytest.importorskip("astropy.constants")
    rx = np.array([6_371e3, 0.0, 0.0])
    zen = np.array([R_GPS, 0.0, 0.0])
    hor = np.array([6_371e3, math.sqrt(R_GPS**2 - 6_371e3**2), 0.0])
    gm, c = 3.986004418e14, const.c.value   # IERS 2010 Table 1.1 GM; c from astropy (SI)
    for sat in (zen, hor):
        rs, rr, rho = np.linalg.norm(sat), np.linalg.norm(rx), np.linalg.norm(sat - rx)
        want = 2 * gm / c**2 * math.log((rs + rr + rho) / (rs + rr - rho))     # IERS 2010 eq. 11.17
        assert shapiro_delay_m(sat, rx) == pytest.approx(want, rel=1e-12)
    # about 13 mm at the zenith and 19 mm at the horizon for GPS (common practice)
    assert shapiro_delay_m(zen, rx) == pytest.approx(0.0127, abs=0.0003)
    assert shapiro_delay_m(hor, rx) == pytest.approx(0.0187, abs=0.0003)
    got = shapiro_delay_m(np.stack([zen, hor]), rx)       # vectorised
    assert got.shape == (2,)


def test_windup_follows_the_satellite_yaw_rotation():
    """Wu et al. (1993): for circularly polarised signals a rotation of the transmitting dipoles by
    α about the line of sight changes the carrier phase by α/2π cycles. A satellite straight above
    the receiver, whose yaw (set by the Sun direction) turns in steps of 30°, must wind up by 1/12
    cycle per step, in one direction, 11/12 cycle over the 330°."""
    rx = np.array([6_378_137.0, 0.0, 0.0])             # on the equator at 0° longitude
    sat = np.array([R_GPS, 0.0, 0.0])
    ang = np.radians(np.arange(0, 360, 30))
    # the Sun far away in directions turning about the radial axis (all perpendicular to it)
    sun = 1.496e11 * np.stack([np.full_like(ang, 0.2), np.cos(ang), np.sin(ang)], axis=-1)
    w = signals.phase_windup_cycles(np.broadcast_to(sat, sun.shape), rx, sun)
    steps = np.diff(w)
    assert np.allclose(np.abs(steps), 1.0 / 12.0, atol=1e-3)
    assert np.all(np.sign(steps) == np.sign(steps[0]))
    assert abs(w[-1] - w[0]) == pytest.approx(11.0 / 12.0, abs=1e-3)


def test_windup_at_a_low_satellite_by_the_formula():
    """Wu et al. (1993) as written in Kouba (2009, §2.3; from memory), evaluated here step by step
    for satellites far from the zenith (where the line of sight has all three components): unit k
    from satellite to receiver, D' = x_s − k(k·x_s) − k × y_s, D = x_r − k(k·x_r) + k × y_r with
    the receiver's north and west axes, Δφ = sign(k·(D' × D))·arccos(D'·D/|D'||D|)/2π; satellite
    axes of the nominal yaw-steering frame (z to the Earth's centre, y = z × Sun direction)."""
    lat, lon = math.radians(46.9), math.radians(7.5)
    rx = geodesy.geodetic_to_ecef(lat, lon, 950.0)
    north = np.array([-math.sin(lat) * math.cos(lon), -math.sin(lat) * math.sin(lon), math.cos(lat)])
    east = np.array([-math.sin(lon), math.cos(lon), 0.0])
    sats = np.array([[15_000e3, 20_000e3, 5_000e3], [5_000e3, -10_000e3, 23_000e3], [24_000e3, 3_000e3, -9_000e3]])
    sun = np.array([1.2e11, -8.0e10, 3.0e10])
    want = []
    for s in sats:
        z = -s / np.linalg.norm(s)
        e = (sun - s) / np.linalg.norm(sun - s)
        y = np.cross(z, e) / np.linalg.norm(np.cross(z, e))
        x = np.cross(y, z)
        k = (rx - s) / np.linalg.norm(rx - s)
        d_sat = x - k * (k @ x) - np.cross(k, y)
        d_rx = north - k * (k @ north) + np.cross(k, -east)
        c = d_sat @ d_rx / (np.linalg.norm(d_sat) * np.linalg.norm(d_rx))
        want.append(np.sign(k @ np.cross(d_sat, d_rx)) * math.acos(c) / (2 * math.pi))
    got = signals.phase_windup_cycles(sats, rx, np.broadcast_to(sun, sats.shape))
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)


def test_eclipse_duration_of_a_circular_gps_orbit():
    """A circular orbit of radius r in the Sun's plane (β = 0) spends 2·asin(R_E/r)/2π of its period
    in a cylindrical shadow: 55.4 min for GPS (geometry; "up to about 55 min", common practice)."""
    period = 2 * math.pi * math.sqrt(R_GPS**3 / orbits.GM_GPS)
    t_s = np.arange(0.0, period, 10.0)
    u = 2 * math.pi * t_s / period
    pos = R_GPS * np.stack([np.cos(u), np.sin(u), np.zeros_like(u)], axis=-1)
    sun = np.array([1.496e11, 0.0, 0.0])
    t_ns = (t_s * 1e9).astype(np.int64)
    shadow, flagged = orbits.eclipse_flags(np.full(len(t_s), "G01"), t_ns, pos, sun)
    want_min = 2 * math.asin(orbits.R_EARTH_M / R_GPS) / (2 * math.pi) * period / 60.0
    assert want_min == pytest.approx(55.4, abs=0.2)
    assert shadow.sum() * 10 / 60 == pytest.approx(want_min, abs=0.2)
    # flagged during the eclipse and 30 min after it (attitude not nominal), nothing before
    assert (flagged.sum() - shadow.sum()) * 10 / 60 == pytest.approx(30.0, abs=0.2)
    first = np.flatnonzero(shadow)[0]
    assert not flagged[:first].any()
    # several satellites in one flat call, rows in any order
    rng = np.random.default_rng(3)
    idx = rng.permutation(2 * len(t_s))
    sats = np.r_[np.full(len(t_s), "G01"), np.full(len(t_s), "G02")][idx]
    pos2 = np.r_[pos, -pos][idx]
    sh2, fl2 = orbits.eclipse_flags(sats, np.r_[t_ns, t_ns][idx], pos2, sun)
    assert sh2.sum() == 2 * shadow.sum() and fl2.sum() == 2 * flagged.sum()


def test_pole_tide_coefficients_from_iers_love_numbers():
    """IERS 2010 §7.1.4: the pole tide follows from the centrifugal potential with h = 0.6207,
    l = 0.0836: S_r = h·Ω²a²/(2g)·sin2θ·(...) per radian; per arcsecond that is the −33 mm of
    eq. 7.26 (and 9 mm = l·Ω²a²/g·... for the horizontal terms)."""
    omega, a, g = 7.292115e-5, 6378136.6, 9.7803278     # IERS 2010 Table 1.1 (Ω, a_E, g_e)
    arcsec = math.radians(1 / 3600)
    radial = 0.6207 * omega**2 * a**2 / (2 * g) * arcsec * 1e3
    horiz = 0.0836 * omega**2 * a**2 / g * arcsec * 1e3
    assert radial == pytest.approx(33.0, abs=0.4) and horiz == pytest.approx(9.0, abs=0.1)
    # at 45° latitude, 0° longitude, m1 = 1": up = −33·sin(90°)·1 mm, north = −(−9·cos 90°) = 0
    enu = geodesy.pole_tide_displacement_enu(math.radians(45), 0.0, 1.0 + geodesy.iers2010_mean_pole_arcsec(2011.0)[0],
                                             geodesy.iers2010_mean_pole_arcsec(2011.0)[1], 2011.0)
    assert enu == pytest.approx([0.0, 0.0, -0.033], abs=1e-9)


def test_pole_tide_at_an_east_longitude_by_hand():
    """IERS 2010 eq. 7.26 evaluated by hand where both pole coordinates and both longitude terms
    matter: θ = 40° colatitude (50° N), λ = 60° E, m1 = 0.2", m2 = −0.3" (xp, yp of the day minus the
    Table 7.7 mean pole of 2011.0): S_r = −33 sin2θ (m1 cosλ + m2 sinλ), S_θ = −9 cos2θ (m1 cosλ +
    m2 sinλ), S_λ = 9 cosθ (m1 sinλ − m2 cosλ), in mm; east = S_λ, north = −S_θ, up = S_r."""
    xbar, ybar = geodesy.iers2010_mean_pole_arcsec(2011.0)
    m1, m2 = 0.2, -0.3
    th, lam = math.radians(40.0), math.radians(60.0)
    a = m1 * math.cos(lam) + m2 * math.sin(lam)
    expected = [9.0 * math.cos(th) * (m1 * math.sin(lam) - m2 * math.cos(lam)),
                9.0 * math.cos(2 * th) * a, -33.0 * math.sin(2 * th) * a]
    enu = geodesy.pole_tide_displacement_enu(math.radians(50.0), lam, xbar + m1, ybar - m2, 2011.0)
    assert np.asarray(enu) * 1e3 == pytest.approx(expected, rel=0, abs=1e-9)
    assert abs(expected[2]) > 5.0          # every term matters here (mm)


def test_mean_pole_pieces_meet_at_2010():
    """IERS 2010 Table 7.7: the cubic (before 2010.0) and linear (after) mean-pole models are
    continuous at 2010.0 (99.654 mas, 352.605 / 352.604 mas: the rounded published coefficients
    leave 1 µas); a mistyped digit in any coefficient would break that."""
    x0, y0 = geodesy.iers2010_mean_pole_arcsec(2010.0 - 1e-9)
    x1, y1 = geodesy.iers2010_mean_pole_arcsec(2010.0)
    assert x0 == pytest.approx(0.099654, abs=1e-6) and x1 == pytest.approx(0.099654, abs=1e-6)
    assert y0 == pytest.approx(y1, abs=2e-6) and y1 == pytest.approx(0.352604, abs=1e-6)


def test_pole_tide_at_brus_with_the_igs_erp(shared_set):
    from ctt.formats.erp import read_erp

    erp = read_erp(shared_set("real-2011-283") / "igs16577.erp")
    # line 5 of igs16577.erp: 55844.50 186349 361993 -3327076 13730 (1e-6", 1e-6", 0.1 us, 0.1 us/d)
    i = int(np.flatnonzero(erp.mjd == 55844.5)[0])
    assert (erp.xp_arcsec[i], erp.yp_arcsec[i]) == pytest.approx((0.186349, 0.361993), abs=1e-12)
    assert erp.ut1_utc_s[i] == pytest.approx(-0.3327076, abs=1e-12)
    xp, yp = erp.pole_arcsec(np.array([55844.0, 55800.0]))
    assert xp[0] == pytest.approx(0.5 * (0.186143 + 0.186349), abs=1e-12) and np.isnan(xp[1])
    lat, lon = math.radians(50.7980), math.radians(4.3587)     # BRUS (SINEX SITE/ID, rounded)
    enu = geodesy.pole_tide_displacement_enu(lat, lon, xp[0], yp[0], 2011.773)
    # bounded by the IERS 2010 §7.1.4 maxima: about 25 mm up and 7 mm horizontally
    assert abs(enu[2]) < 0.025 and np.hypot(enu[0], enu[1]) < 0.007
    assert abs(enu[2]) > 0.001          # m ≈ 0.07" this day: a few mm, not nothing
