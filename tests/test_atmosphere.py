"""Troposphere (Saastamoinen, Niell) and ionosphere helpers of ctt.atmosphere."""

from __future__ import annotations

import math

import numpy as np
import pytest

from ctt import atmosphere as atm
from ctt.formats.ionex import read_ionex


def test_saastamoinen_zhd_sea_level_45deg():
    # Saastamoinen (1972) in the form of Davis et al. (1985): at 1013.25 hPa,
    # φ = 45° (cos 2φ = 0), h = 0: 0.0022768 × 1013.25 = 2.3070 m
    # ("about 2.3 m at sea level" is common practice)
    zhd, _ = atm.zenith_delays(1013.25, 15.0, 0.0, math.radians(45.0), 0.0)
    assert zhd == pytest.approx(2.3070, abs=1e-4)
    assert zhd == pytest.approx(0.0022768 * 1013.25, rel=1e-15)


def test_saastamoinen_zhd_latitude_and_height_terms():
    # IERS Conventions (2010) §9.2, eq. 9.11 (Saastamoinen 1972 as given by Davis et al. 1985;
    # equation number from memory): ZHD = 0.0022768 P / (1 − 0.00266 cos 2φ − 0.28e-6 H),
    # H in metres. At φ = 0 and 60° (cos 2φ = +1, −0.5) and H = 2000 m both terms
    # matter: the latitude term moves ZHD by 6 mm (φ = 0) and the height term by 1 mm.
    # Expected values by hand from those published coefficients (P = 800 hPa):
    #   φ = 0:   0.0022768·800 / (1 − 0.00266 − 0.00056) = 1.82144 / 0.99678
    #   φ = 60°: 0.0022768·800 / (1 + 0.00133 − 0.00056) = 1.82144 / 1.00077
    for lat_deg, denom in ((0.0, 0.99678), (60.0, 1.00077)):
        zhd, _ = atm.zenith_delays(800.0, 0.0, 0.0, math.radians(lat_deg), 2000.0)
        # float rounding of cos(2·60°) ~1e-16: 1e-9 m is far below the 1 mm terms tested
        assert zhd == pytest.approx(1.82144 / denom, abs=1e-9)
    # each term on its own, against the same published coefficients (to 1e-9 m)
    z0, _ = atm.zenith_delays(800.0, 0.0, 0.0, math.radians(45.0), 0.0)
    zh, _ = atm.zenith_delays(800.0, 0.0, 0.0, math.radians(45.0), 5000.0)
    assert zh - z0 == pytest.approx(1.82144 / (1 - 0.28e-6 * 5000.0) - 1.82144, abs=1e-9)  # +2.55 mm
    zl, _ = atm.zenith_delays(800.0, 0.0, 0.0, math.radians(10.0), 0.0)
    assert zl - z0 == pytest.approx(1.82144 / (1 - 0.00266 * math.cos(math.radians(20.0))) - 1.82144,
                                    abs=1e-9)  # +4.56 mm


def test_saastamoinen_zwd_and_vapour_pressure():
    # Tetens/Murray: e_s(0 °C) = 6.1078 hPa by construction of the formula
    assert atm.water_vapour_pressure_hpa(0.0, 100.0) == pytest.approx(6.1078, rel=1e-12)
    # saturation at 20 °C is 23.39 hPa (WMO-No. 8 table value, from memory); Magnus
    # form agrees to ~0.1 %
    assert atm.water_vapour_pressure_hpa(20.0, 100.0) == pytest.approx(23.39, rel=2e-3)
    # standard atmosphere sea level: 15 °C, 50 % -> e ≈ 8.5 hPa, ZWD ≈ 0.08 m
    # (Saastamoinen ZWD: 0.002277 (1255/T + 0.05) e)
    _, zwd = atm.zenith_delays(1013.25, 15.0, 50.0, 0.5, 0.0)
    e = atm.water_vapour_pressure_hpa(15.0, 50.0)
    assert zwd == pytest.approx(0.002277 * (1255 / 288.15 + 0.05) * e, rel=1e-14)
    assert 0.05 < zwd < 0.12  # common practice: wet zenith delay 5-30 cm at mid-latitudes


def test_standard_atmosphere():
    p, t, rh = atm.standard_atmosphere(np.array([0.0, 1000.0]))
    # common practice (Berg 1948): 1013.25 hPa, 15 °C at 0 m; ~898.8 hPa, 8.5 °C at 1000 m
    assert p[0] == pytest.approx(1013.25) and t[0] == pytest.approx(15.0) and rh[0] == 50.0
    assert p[1] == pytest.approx(898.8, abs=0.2) and t[1] == pytest.approx(8.5)


def test_niell_unity_at_zenith():
    # Niell (1996): the Marini fraction is normalised to 1 at 90°, and the height
    # correction 1/sin E − m_ht vanishes there, so m = 1 up to rounding (1e-12 is
    # ~1e4 ulp, margin for the continued fraction)
    for lat in (-80, -30, 0, 20, 45, 70):
        for doy in (1, 100, 200, 300):
            mh, mw = atm.niell_mapping(math.pi / 2, math.radians(lat), 1500.0, doy)
            assert mh == pytest.approx(1.0, abs=1e-12)
            assert mw == pytest.approx(1.0, abs=1e-12)


def test_niell_against_cosecant_at_high_elevation():
    # At high elevation a mapping function tends to 1/sin E; for a thin shell of
    # scale height H over an Earth of radius R the leading curvature term is
    # m ≈ csc E · (1 − (H/R) cot² E) (common practice). With H ≤ 8.6 km for the
    # hydrostatic part (and less for the wet), (H/R) ≤ 1.35e-3.
    el = np.radians(np.arange(30.0, 90.0, 1.0))
    mh, mw = atm.niell_mapping(el, math.radians(45.0), 0.0, 180)
    csc = 1 / np.sin(el)
    for m in (mh, mw):
        deficit = (csc - m) / csc
        assert np.all(deficit >= -1e-12)  # never above the flat-Earth cosecant
        assert np.all(deficit <= 1.35e-3 / np.tan(el) ** 2 + 1e-12)
        assert np.all(deficit <= 5e-3)


def _exponential_atmosphere_mapping(el, scale_height_m, radius_m=6371e3):
    """Straight-ray path integral through an exponential refractivity profile over a
    spherical Earth, divided by its zenith integral (independent physics model)."""
    s = np.linspace(0.0, 2.0e6, 400_001)
    h = np.sqrt(radius_m**2 + s**2 + 2 * radius_m * s * np.sin(el)) - radius_m
    return np.trapezoid(np.exp(-h / scale_height_m), s) / scale_height_m


def test_niell_hydrostatic_low_elevation_against_exponential_atmosphere():
    # Niell's published values at low elevation were not available here, so the
    # hydrostatic function is compared with an exponential atmosphere of scale
    # height 8 km (the hydrostatic scale height R_d T/g ≈ 8 km: common practice),
    # straight rays. Ray bending and the real profile differ from that model by a
    # few tenths of a percent at 5° (Niell's own fits are to ~0.1 %), hence 0.5 %.
    for el_deg in (5.0, 7.0, 10.0, 15.0, 20.0, 30.0):
        el = math.radians(el_deg)
        mh, mw = atm.niell_mapping(el, math.radians(45.0), 0.0, 180)
        ref = _exponential_atmosphere_mapping(el, 8000.0)
        assert mh == pytest.approx(ref, rel=5e-3)
        # the wet layer is thinner, so its mapping is larger (closer to csc E)
        assert mh < mw < 1 / math.sin(el)



def test_gmf_hydrostatic_against_exponential_atmosphere_worldwide():
    # GMF at random places and dates against the same exponential-atmosphere model:
    # the hydrostatic scale height R_d T/g spans 7.4-8.8 km for T = 253-300 K (common
    # practice), which moves the 5° mapping by about ±1 % around the 8 km value;
    # with the 0.5 % allowed above for bending and profile shape: 1.5 % at 5°.
    rng = np.random.default_rng(8)
    lat = np.radians(rng.uniform(-80, 80, 200))
    lon = np.radians(rng.uniform(-180, 180, 200))
    mjd = rng.uniform(55000, 60000, 200)
    for el_deg, tol in ((5.0, 0.015), (10.0, 0.006), (30.0, 0.001)):
        mh, mw = atm.gmf_mapping(math.radians(el_deg), lat, lon, 0.0, mjd)
        ref = _exponential_atmosphere_mapping(math.radians(el_deg), 8000.0)
        assert np.max(np.abs(mh / ref - 1)) < tol
        assert np.all(mw > mh)
    # unity at the zenith (normalised continued fraction; height term vanishes)
    mh, mw = atm.gmf_mapping(math.pi / 2, lat, lon, 1200.0, mjd)
    assert np.allclose(mh, 1.0, atol=1e-12) and np.allclose(mw, 1.0, atol=1e-12)


def test_slant_troposphere_gmf_option():
    el = np.radians(np.array([[10.0, 30.0], [15.0, 90.0]]))
    g = atm.slant_troposphere(el, 0.8, 950.0, 1, mapping="gmf", lon_rad=0.13, mjd=np.array([[59215.0], [59215.5]]))
    n = atm.slant_troposphere(el, 0.8, 950.0, 1)
    assert g.slant_m.shape == (2, 2)
    assert g.slant_m[1, 1] == pytest.approx(n.slant_m[1, 1], rel=1e-12)  # same zenith delays at 90°
    assert np.allclose(g.slant_m, n.slant_m, rtol=0.01)
    with pytest.raises(ValueError, match="lon_rad"):
        atm.slant_troposphere(el, 0.8, 950.0, 1, mapping="gmf")


def test_niell_seasonal_and_hemisphere_symmetry():
    el = math.radians(7.0)
    # Niell (1996) eq. 5: southern hemisphere = northern shifted by half a year
    n = atm.niell_mapping(el, math.radians(50.0), 0.0, 28.0)
    s = atm.niell_mapping(el, math.radians(-50.0), 0.0, 28.0 - 365.25 / 2)
    assert n[0] == pytest.approx(s[0], rel=1e-14)
    # no seasonal term at 15° and below (amplitude 0 in the table)
    a = atm.niell_mapping(el, math.radians(10.0), 0.0, 28.0)[0]
    b = atm.niell_mapping(el, math.radians(10.0), 0.0, 210.0)[0]
    assert a == b
    # height correction raises the hydrostatic mapping (Niell 1996: +~0.1 % per km at 5°)
    hi = atm.niell_mapping(math.radians(5.0), math.radians(45.0), 2000.0, 28.0)[0]
    lo = atm.niell_mapping(math.radians(5.0), math.radians(45.0), 0.0, 28.0)[0]
    assert 0.0 < (hi - lo) / lo < 0.01


def test_slant_troposphere_shapes_and_sources():
    el = np.radians(np.array([[10.0, 30.0, 60.0], [15.0, 45.0, 90.0]]))
    std = atm.slant_troposphere(el, math.radians(46.9), 950.0, 1)
    assert std.met_source == "standard atmosphere" and std.slant_m.shape == (2, 3)
    met = atm.slant_troposphere(el, math.radians(46.9), 950.0, 1,
                                p_hpa=np.array([[900.2], [903.3]]), t_c=np.array([[-4.6], [-5.2]]),
                                rh_pct=np.array([[70.0], [70.0]]))
    assert met.met_source == "met" and met.slant_m.shape == (2, 3)
    # at zenith the slant is the zenith total
    assert met.slant_m[1, 2] == pytest.approx(met.zhd_m[1, 0] + met.zwd_m[1, 0], rel=1e-12)
    with pytest.raises(ValueError):
        atm.slant_troposphere(el, 0.8, 950.0, 1, p_hpa=900.0)


# ---------------------------------------------------------------- ionosphere

import dataclasses  # noqa: E402

from ctt import timescales as ts  # noqa: E402
from ctt.errors import OutOfSpanError, ProductFormatError  # noqa: E402


def test_tec_to_delay_constant():
    # K = e²/(8π² ε0 m_e) = 40.308 m³/s² (CODATA 2018; "40.3" is common practice);
    # 1 TECU on L1 ≈ 0.1624 m (common practice)
    assert atm.IONO_K == pytest.approx(40.308, abs=1e-3)
    assert atm.tec_to_delay_m(1.0, 1575.42e6) == pytest.approx(0.1624, abs=1e-4)


def test_single_layer_mapping_geometry():
    R, H = 6371e3, 450e3
    el = np.radians([90.0, 60.0, 30.0, 10.0, 0.0])
    m = atm.single_layer_mapping(el, H, R)
    assert m[0] == pytest.approx(1.0, abs=1e-15)
    # independent geometry: length of the ray inside a thin shell H ± 1 m, divided by 2 m
    d = 1.0
    for e, mm in zip(el, m):
        def reach(r):  # distance from the ground point to the sphere of radius r along elevation e
            return -R * np.sin(e) + np.sqrt((R * np.sin(e)) ** 2 + r**2 - R**2)
        assert (reach(R + H + d) - reach(R + H - d)) / (2 * d) == pytest.approx(mm, rel=1e-6)


def test_read_hand_written_ionex(test_data):
    m = read_ionex(test_data / "atmosphere" / "hand0010.21i")
    assert m.tec_tecu.shape == (3, 4, 17) and m.rms_tecu.shape == (3, 4, 17)
    assert m.height_m == 450e3 and m.base_radius_m == 6371e3 and m.mapping_function == "COSZ"
    # file epochs are UT (IONEX 1.0), stored on GPS time: + 18 s in 2021 (IERS Bulletin C)
    assert m.epochs_ns[0] == ts.civil_to_ns(2021, 1, 1) + 18 * 10**9
    lat = m.lat_deg[:, None]
    lon = m.lon_deg[None, :]
    for k in range(3):  # the file's own definition (its COMMENT): 10 + 0.2 lat + 0.1 lon + k TECU
        expect = 10 + 0.2 * lat + 0.1 * lon + k
        got = m.tec_tecu[k]
        ok = np.isfinite(got)
        assert np.allclose(got[ok], expect[ok], atol=1e-12)
    assert np.isnan(m.tec_tecu[0, 3, 16])  # 9999 = no value (IONEX 1.0)
    assert np.isfinite(m.tec_tecu[0]).sum() == 4 * 17 - 1
    assert np.allclose(m.rms_tecu[:, 0, 0], [2.0, 2.1, 2.2])


def test_ionex_interpolation(test_data):
    m = read_ionex(test_data / "atmosphere" / "hand0010.21i")
    T0, T1 = m.epochs_ns[0], m.epochs_ns[1]
    # bilinear at a map epoch, off the grid: exact for the file's linear field (IONEX 1.0 eq. 2)
    v = atm.ionex_vtec_tecu(m, T1, np.radians(47.3), np.radians(3.7))
    assert v == pytest.approx(10 + 0.2 * 47.3 + 0.1 * 3.7 + 1, abs=1e-12)
    # map 3 uses its own EXPONENT -2
    assert atm.ionex_vtec_tecu(m, m.epochs_ns[2], np.radians(40.0), 0.0) == pytest.approx(20.0, abs=1e-12)
    # rotated-map time interpolation (IONEX 1.0 eq. 3) against a hand evaluation on a
    # field with structure in longitude: 20 min after T0 the Earth has turned 5° (one
    # grid step) relative to the Sun, and 100 min before T1 it is 25° (five steps)
    rng = np.random.default_rng(4)
    tec = rng.uniform(5, 50, m.tec_tecu.shape)
    mr = dataclasses.replace(m, tec_tecu=tec)
    t = T0 + 20 * 60 * 10**9
    w = 20 / 120
    j40 = 2  # latitude 40° is row 2 (60, 50, 40, 30)
    j0 = 8  # longitude 0° is column 8 (-40 .. 40 by 5)
    got = atm.ionex_vtec_tecu(mr, t, np.radians(40.0), 0.0)
    assert got == pytest.approx((1 - w) * tec[0, j40, j0 + 1] + w * tec[1, j40, j0 - 5], rel=1e-12)
    plain = atm.ionex_vtec_tecu(mr, t, np.radians(40.0), 0.0, rotate=False)
    assert plain == pytest.approx((1 - w) * tec[0, j40, j0] + w * tec[1, j40, j0], rel=1e-12)
    # RMS maps interpolate the same way
    assert atm.ionex_vtec_tecu(m, T0, np.radians(45.0), 0.0, rms=True) == pytest.approx(2.0)
    # within one map interval before the first map (UT maps, GPS-time day files start 18 s
    # earlier): the first map holds; farther out NaN, or an error naming the file when strict
    assert atm.ionex_vtec_tecu(m, T0 - 18 * 10**9, 0.8, 0.0) == pytest.approx(atm.ionex_vtec_tecu(m, T0, 0.8, 0.0))
    assert np.isnan(atm.ionex_vtec_tecu(m, T0 - 3 * 3600 * 10**9, 0.8, 0.0))
    with pytest.raises(OutOfSpanError, match="hand0010.21i"):
        atm.ionex_vtec_tecu(m, T0 - 3 * 3600 * 10**9, 0.8, 0.0, strict=True)
    # outside a regional grid: NaN, not an extrapolated number
    assert np.isnan(atm.ionex_vtec_tecu(m, T1, np.radians(45.0), np.radians(60.0)))
    # vectorised over epochs × satellites
    tt = T0 + np.arange(10)[:, None] * 600 * 10**9
    vv = atm.ionex_vtec_tecu(m, tt, np.radians(np.full((1, 5), 45.0)), np.radians(np.linspace(-10, 10, 5))[None, :])
    assert vv.shape == (10, 5) and np.all(np.isfinite(vv))


def test_ionex_global_grid_wraps_in_longitude(test_data):
    m = read_ionex(test_data / "atmosphere" / "hand0010.21i")
    for lon_grid in (np.arange(-180.0, 180.1, 5.0), np.arange(0.0, 356.0, 5.0)):
        # a field periodic in longitude with its steepest slope at the ±180° seam: 10 + sin(lon);
        # linear interpolation between nodes h = 5° apart is off the curve by at most
        # h²·max|f''|/8 = 0.0873²/8 = 9.5e-4 (interpolation error bound), so 1e-3 holds, while a
        # seam placed 0.36° wrong would be off by ~6e-3
        tec = np.broadcast_to(10 + np.sin(np.radians(lon_grid))[None, None, :], (3, 4, lon_grid.size)).copy()
        g = dataclasses.replace(m, lon_deg=lon_grid, tec_tecu=tec)
        for lon_q in (-179.0, 178.0, 358.0, -2.5, 182.5):
            v = atm.ionex_vtec_tecu(g, m.epochs_ns[1], np.radians(45.0), np.radians(lon_q))
            assert v == pytest.approx(10 + np.sin(np.radians(lon_q)), abs=1e-3)


def test_ionex_slant_delay(test_data):
    m = read_ionex(test_data / "atmosphere" / "hand0010.21i")
    t = m.epochs_ns[1]
    lat, lon = np.radians(45.0), np.radians(2.0)
    d, stec = atm.ionex_slant_delay_m(m, t, lat, lon, 0.0, np.pi / 2, 1575.42e6)
    vtec = 10 + 0.2 * 45 + 0.1 * 2 + 1
    assert stec == pytest.approx(vtec, rel=1e-9)
    assert d == pytest.approx(atm.IONO_K * vtec * 1e16 / 1575.42e6**2, rel=1e-9)
    assert m.slant_delay_m(t, lat, lon, 0.0, np.pi / 2, 1575.42e6) == d  # method form used by measure
    assert m.vtec_tecu(t, lat, lon) == pytest.approx(vtec, rel=1e-12)
    d30, s30 = atm.ionex_slant_delay_m(m, t, lat, lon, np.radians(180.0), np.radians(30.0), 1227.60e6)
    lat_i, lon_i, z = atm.pierce_point(lat, lon, np.radians(180.0), np.radians(30.0), 450e3, 6371e3)
    # the defaults are IONEX 1.0's: base radius 6371 km, and a 450 km shell (common practice)
    assert atm.pierce_point(lat, lon, np.radians(180.0), np.radians(30.0)) == (lat_i, lon_i, z)
    # sin z' = R/(R+H) cos E (single-layer model, IONEX 1.0 mapping), R and H as written there
    assert np.sin(z) == pytest.approx(6371.0 / (6371.0 + 450.0) * np.cos(np.radians(30.0)), rel=1e-14, abs=0)
    assert np.degrees(lat_i) < 45.0 and lon_i == pytest.approx(lon, abs=1e-12)  # due south
    v_ipp = 10 + 0.2 * np.degrees(lat_i) + 0.1 * 2 + 1
    assert s30 == pytest.approx(v_ipp * atm.single_layer_mapping(np.radians(30.0)), rel=1e-9)


def test_ionex_format_errors(tmp_path, test_data):
    text = (test_data / "atmosphere" / "hand0010.21i").read_text()
    p = tmp_path / "bad.21i"
    p.write_text(text.replace("  180  185  190", "  180  18x  190", 1))
    with pytest.raises(ProductFormatError, match=r"bad.21i:22: expected integer values"):
        read_ionex(p)
    p.write_text(text.replace("     3                                                      # OF MAPS",
                              "     4                                                      # OF MAPS"))
    with pytest.raises(ProductFormatError, match="4 TEC maps"):
        read_ionex(p)
    p.write_text(text.replace("     2                                                      MAP DIMENSION",
                              "     3                                                      MAP DIMENSION"))
    with pytest.raises(ProductFormatError, match="MAP DIMENSION 2"):
        read_ionex(p)
    p.write_text(text.replace("    50.0 -40.0", "    55.0 -40.0", 1))
    with pytest.raises(ProductFormatError, match="latitude of the grid"):
        read_ionex(p)


def test_slant_delay_is_the_mapped_sum_of_the_zenith_delays():
    # IERS Conventions (2010) eq. 9.11: slant delay = m_h(e) ZHD + m_w(e) ZWD, each zenith part
    # mapped with its own function (the wet one differs by several % at low elevation, common
    # practice). Checked at 7 deg and 30 deg with measured meteorology, where the wet part matters.
    el = np.radians(np.array([7.0, 30.0]))
    d = atm.slant_troposphere(el, math.radians(47.0), 900.0, 120, 910.0, 18.0, 70.0)
    mh, mw = atm.niell_mapping(el, math.radians(47.0), 900.0, 120)
    assert float(d.zwd_m) > 0.1                     # humid: the wet zenith delay is over 10 cm
    assert np.all(np.abs(mw - mh) > 0.001)          # the two mappings differ
    np.testing.assert_allclose(d.slant_m, float(d.zhd_m) * mh + float(d.zwd_m) * mw, rtol=1e-14)
