"""Behaviour of ctt.geodesy: shapes, az/el geometry, antenna reference point,
baseline uncertainty propagation."""

from __future__ import annotations

import numpy as np
import pytest

from ctt import geodesy as g


def test_ellipsoid_constants():
    # WGS84 semi-minor axis 6356752.314245 m (NIMA TR8350.2, Table 3.1)
    assert abs(g.WGS84.b - 6356752.314245) < 1e-6
    # GRS80 semi-minor axis 6356752.314140 m (Moritz 1980, Geodetic Reference System 1980)
    assert abs(g.GRS80.b - 6356752.314140) < 1e-6
    # GRS80 first eccentricity squared 0.00669438002290 (Moritz 1980)
    assert abs(g.GRS80.e2 - 0.00669438002290) < 1e-14


def test_zenith_and_horizon_geometry():
    lat, lon, h = np.radians(46.877), np.radians(7.465), 956.0
    rx = g.geodetic_to_ecef(lat, lon, h)
    r = g.enu_matrix(lat, lon)
    sats = np.stack([rx + 2e7 * r[2],  # straight up along the ellipsoidal normal
                     rx + 2e7 * r[1],  # due north on the horizon
                     rx + 2e7 * r[0],  # due east on the horizon
                     rx + 1e7 * (r[2] - r[1])])  # south at 45°
    az, el, rng = g.azimuth_elevation(rx, sats)
    assert abs(np.degrees(el[0]) - 90) < 1e-9
    assert abs(el[1]) < 1e-12 and abs((az[1] + np.pi) % (2 * np.pi) - np.pi) < 1e-12
    assert abs(el[2]) < 1e-12 and abs(np.degrees(az[2]) - 90) < 1e-9
    assert abs(np.degrees(el[3]) - 45) < 1e-9 and abs(np.degrees(az[3]) - 180) < 1e-9
    assert abs(rng[0] - 2e7) < 1e-6


def test_azimuth_elevation_broadcasts_over_epochs_and_satellites():
    rng = np.random.default_rng(2)
    rx = g.geodetic_to_ecef(np.radians(17.6), np.radians(-61.8), 10.0)
    sats = rng.normal(0, 2.6e7, (50, 12, 3))
    az, el, r = g.azimuth_elevation(rx, sats)
    assert az.shape == el.shape == r.shape == (50, 12)
    # same result one by one (elevation = asin(up / range), a different path through the code)
    lat, lon, _ = g.ecef_to_geodetic(rx)
    up = g.enu_matrix(lat, lon)[2]
    d = sats - rx
    assert np.allclose(np.sin(el), d @ up / np.linalg.norm(d, axis=-1), atol=1e-13)
    # per-epoch receivers (n_epoch, 1, 3) broadcast too
    rxs = np.broadcast_to(rx, (50, 1, 3))
    az2, el2, _ = g.azimuth_elevation(rxs, sats)
    assert np.allclose(el2, el, atol=1e-13) and np.allclose(az2, az, atol=1e-12)


def test_antenna_reference_point_height_is_along_the_normal():
    marker = g.geodetic_to_ecef(np.radians(46.877), np.radians(7.465), 956.0)
    arp = g.antenna_reference_point(marker, 0.0780, 0.001, -0.002)
    lat, lon, h = g.ecef_to_geodetic(arp)
    # RINEX ANTENNA: DELTA H/E/N: height along the normal adds directly to h (to 1e-9 m)
    assert abs(h - 956.0 - 0.0780) < 1e-6
    enu = g.ecef_to_enu(arp - marker, np.radians(46.877), np.radians(7.465))
    assert np.allclose(enu, [0.001, -0.002, 0.0780], atol=1e-12)


def test_baseline_chord_light_time_and_uncertainty():
    a = np.array([4331297.0, 567555.0, 4633133.0])
    b = a + np.array([3000.0, 4000.0, 0.0])
    bl = g.baseline(a, b, sigma_a_m=[0.01, 0.02, 0.03], sigma_b_m=[0.01, 0.02, 0.03])
    assert bl.chord_m == pytest.approx(5000.0, abs=1e-9)
    # c = 299 792 458 m/s exactly (SI)
    assert bl.light_time_s == pytest.approx(5000.0 / 299_792_458.0, rel=1e-15)
    # direction (0.6, 0.8, 0): σ² = 2 (0.36·1e-4 + 0.64·4e-4) (first-order propagation)
    expect = np.sqrt(2 * (0.36e-4 + 0.64 * 4e-4))
    assert bl.chord_sigma_m == pytest.approx(expect, rel=1e-12)
    assert bl.light_time_sigma_s == pytest.approx(expect / 299_792_458.0, rel=1e-12, abs=0)
    # full covariances agree with the per-axis form, and correlations matter
    cov = np.diag([1e-4, 4e-4, 9e-4])
    assert g.baseline(a, b, cov_a=cov, cov_b=cov).chord_sigma_m == pytest.approx(expect, rel=1e-12)
    cov_corr = cov.copy()
    cov_corr[0, 1] = cov_corr[1, 0] = 1.5e-4
    s2 = g.baseline(a, b, cov_a=cov_corr).chord_sigma_m
    assert s2 ** 2 == pytest.approx(0.36e-4 + 0.64 * 4e-4 + 2 * 0.48 * 1.5e-4, rel=1e-12)
    # Monte Carlo check of the propagation (5000 draws: 1σ of the σ estimate ≈ 1 %)
    rng = np.random.default_rng(0)
    da = rng.normal(0, [0.01, 0.02, 0.03], (5000, 3))
    db = rng.normal(0, [0.01, 0.02, 0.03], (5000, 3))
    chords = np.linalg.norm((b + db) - (a + da), axis=1)
    assert np.std(chords) == pytest.approx(expect, rel=0.05)
    # coincident stations: no direction; each station isotropic σ = 1 cm gives σ² = 2·(1 cm)² along
    # any direction, which the mean of the three axis variances (trace/3) reproduces
    same = g.baseline(a, a, sigma_a_m=[0.01] * 3, sigma_b_m=[0.01] * 3)
    assert same.chord_m == 0.0 and same.chord_sigma_m == pytest.approx(0.01 * np.sqrt(2.0), rel=1e-12, abs=0)


def test_tide_vectorised_and_magnitude():
    sta = g.geodetic_to_ecef(np.radians(46.877), np.radians(7.465), 956.0)
    t0 = 41 * 365 * 86400 * 10**9
    t = t0 + np.arange(0, 86400, 600, dtype=np.int64) * 10**9
    d = g.solid_tide_displacement(sta, t)
    assert d.shape == (t.size, 3)
    lat, lon, _ = g.ecef_to_geodetic(sta)
    up = g.ecef_to_enu(d, lat, lon)[:, 2]
    # radial tide peak-to-peak at mid-latitude is a few decimetres (common practice: ≤ ~0.4 m)
    assert 0.05 < np.ptp(up) < 0.8
    # each epoch alone gives the same (epochs do not leak into one another in the vectorisation)
    assert np.allclose(g.solid_tide_displacement(sta, t[5:6]), d[5:6], atol=1e-12)


def test_pole_tide_needs_erp_epochs_around_every_epoch(shared_set, tmp_path):
    # igs16577.erp (real-2011-283) has one epoch at 12:00 UTC of each day, MJD 55843.5-55849.5
    # (the file's lines): 2011-10-09 before noon is outside by up to half a day, so the first
    # epoch's pole is held there (ctt.geodesy.POLE_HOLD_DAYS: a weekly file's edge hours);
    # 2011-10-07 is more than a day outside: the day is refused (exit 3, naming the file and
    # the day) rather than skip the term
    from ctt import timescales as ts
    from ctt.errors import MissingInputError, exit_code_for
    from ctt.formats.erp import merge_erp, read_erp
    from ctt.geodesy import pole_tide_ecef

    path = shared_set("real-2011-283") / "igs16577.erp"
    erp = read_erp(path)
    brus = np.array([4027893.658, 307045.945, 4919475.187])      # IGS weekly SINEX igs11P1657, rounded
    day = ts.parse_iso("2011-10-09T00:00:00") + 30 * ts.NS_PER_S * np.arange(2880)
    _, _, xp9, yp9 = pole_tide_ecef(erp, brus, day)
    # GPS - UTC = 15 s in 2011: the epochs up to 12:00:00 GPS (11:59:45 UTC) are before noon UTC
    before_noon = np.arange(2880) <= 1440
    # held at the file's first epoch (line 'MJD 55843.50 ...' of igs16577.erp), then interpolated
    assert np.all(xp9[before_noon] == erp.xp_arcsec[0]) and np.all(yp9[before_noon] == erp.yp_arcsec[0])
    assert g.pole_hold_epochs(erp, day) == 1441
    with pytest.raises(MissingInputError, match=r"igs16577\.erp.*2011-10-07") as e:
        pole_tide_ecef(erp, brus, day - 2 * 86_400 * ts.NS_PER_S)
    assert exit_code_for(e.value) == 3
    assert "2880 of 2880 epochs" in str(e.value)
    ecef, enu, xp, yp = pole_tide_ecef(erp, brus, day + 86_400 * ts.NS_PER_S)    # 2011-10-10: covered
    assert ecef.shape == (2880, 3) and np.isfinite(ecef).all()
    # the rotation to ECEF keeps the length (a rotation, ctt.geodesy.enu_to_ecef)
    np.testing.assert_allclose(np.linalg.norm(ecef, axis=1), np.linalg.norm(enu, axis=1), rtol=1e-12)
    # two parts of the real file (first 3 and last 5 data lines, one epoch in both), merged, give
    # the whole file back: what two consecutive weekly files give around a week's first morning
    lines = path.read_text().splitlines()
    head, data = lines[:4], lines[4:]
    (tmp_path / "a.erp").write_text("\n".join(head + data[:3]) + "\n")
    (tmp_path / "b.erp").write_text("\n".join(head + data[2:]) + "\n")
    merged = merge_erp([read_erp(tmp_path / "a.erp"), read_erp(tmp_path / "b.erp")])
    for name in ("mjd", "xp_arcsec", "yp_arcsec", "ut1_utc_s", "lod_s"):
        np.testing.assert_array_equal(getattr(merged, name), getattr(erp, name))
    assert merged.path.endswith("a.erp+" + str(tmp_path / "b.erp"))
