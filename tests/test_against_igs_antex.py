"""Receiver and satellite antenna calibrations of the IGS ANTEX file igs08_1648.atx.gz.

Source: ../shared/data/real-2011-283/igs08_1648.atx.gz (IGS, CC BY 4.0), ANTEX
1.4. Expected numbers are read from the file's text; the line numbers are
those of the decompressed file. Definitions from the ANTEX 1.4 format
document (Rothacher & Schmid 2010, section 3): mean phase centre = ARP + PCO
(north, east, up); observed range = range to it + PCV(azimuth, zenith).
"""

from __future__ import annotations

import math
import pathlib

import numpy as np
import pytest

from ctt import geodesy, signals
from ctt.formats import antex as ATX
from ctt.timescales import civil_to_ns

DAY = int(civil_to_ns(2011, 10, 10))
A1 = 1575.42**2 / (1575.42**2 - 1227.60**2)     # iono-free coefficients, IS-GPS-200 frequencies
A2 = -1227.60**2 / (1575.42**2 - 1227.60**2)


@pytest.fixture(scope="module")
def atx(shared_set):
    return ATX.read_antex(shared_set("real-2011-283") / "igs08_1648.atx.gz")


def test_receiver_antenna_blocks_read(atx):
    assert atx.n_receiver_antennas == len(atx.receivers) + len(atx.receivers_by_serial) > 200
    # line 8159: 'ASH701945B_M    NONE' (BRUS's antenna, SINEX SITE/ANTENNA) - type calibration
    b = atx.receiver("ASH701945B_M    NONE")
    assert b is atx.receiver("ASH701945B_M", None) is atx.receiver(ATX.antenna_name("ASH701945B_M", "NONE"))
    # lines 8160-8163: DAZI 5.0, ZEN1/ZEN2/DZEN 0.0 90.0 5.0, 2 frequencies
    assert list(b["zen_deg"]) == list(np.arange(0.0, 90.1, 5.0))
    assert list(b["azi_deg"]) == list(np.arange(0.0, 360.1, 5.0))
    # line 8167 (G01) and 8244 (G02) NORTH / EAST / UP in mm
    assert b["pco_m"]["G01"] == pytest.approx((0.58e-3, -0.37e-3, 91.85e-3), abs=1e-9)
    assert b["pco_m"]["G02"] == pytest.approx((-0.08e-3, -0.59e-3, 120.35e-3), abs=1e-9)
    # line 8168: NOAZI of G01 starts 0.00 -0.23 -0.90 -1.93 and ends 14.23 (zenith 90)
    g1 = b["pcv_m"]["G01"]
    assert g1["noazi"][:4] == pytest.approx([0.0, -0.23e-3, -0.90e-3, -1.93e-3], abs=1e-9)
    assert g1["noazi"][-1] == pytest.approx(14.23e-3, abs=1e-9)
    # line 8169: azimuth 0.0 row ... ends 13.67; the 90.0 row (line 8187) has -7.89 at zenith 45
    assert g1["grid"].shape == (73, 19)
    assert g1["grid"][0, -1] == pytest.approx(13.67e-3, abs=1e-9)
    assert g1["grid"][18, 9] == pytest.approx(-7.89e-3, abs=1e-9)
    # line 12650: CAGZ's JPSREGANT_DD_E NONE, G01 PCO 0.14 -0.27 100.81 (line 12657)
    assert atx.receiver("JPSREGANT_DD_E  NONE")["pco_m"]["G01"] == pytest.approx((0.14e-3, -0.27e-3, 100.81e-3))


def test_receiver_correction_at_reference_directions(atx):
    b = atx.receiver("ASH701945B_M    NONE")
    az = np.radians([0.0, 0.0, 90.0, 92.5])
    el = np.radians([90.0, 0.0, 45.0, 42.5])
    got = signals.receiver_antenna_range_m(b, "G01", az, el)
    c45 = math.cos(math.radians(45.0))
    c425, s425 = math.cos(math.radians(42.5)), math.sin(math.radians(42.5))
    want = [
        -91.85e-3 + 0.0,                                   # zenith: −U + PCV(zen 0) (lines 8167, 8169)
        -0.58e-3 + 13.67e-3,                               # north horizon: −N + PCV(az 0, zen 90)
        -(-0.37e-3 * c45 + 91.85e-3 * c45) - 7.89e-3,      # az 90, el 45: −(E cos el + U sin el) + PCV
        # az 92.5, zen 47.5: bilinear between rows 90 and 95 (lines 8187-8188: -7.89/-7.73 and -7.89/-7.73)
        -(-0.37e-3 * c425 * math.sin(az[3]) + 0.58e-3 * c425 * math.cos(az[3]) + 91.85e-3 * s425)
        - 0.5 * (7.89e-3 + 7.73e-3),
    ]
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-9)
    # the last azimuth sector wraps onto the 360.0 row: az 357.5, zen 87.5 is the mean of zenith
    # 85/90 of rows 355.0 (line 8240: 8.65, 13.64) and 360.0 (line 8241: 8.68, 13.67)
    pcv = signals.antenna_pcv_m(b, "G01", 87.5, 357.5)
    assert pcv == pytest.approx(0.25 * (8.65 + 13.64 + 8.68 + 13.67) * 1e-3, rel=0, abs=1e-9)


def test_iono_free_receiver_correction(atx):
    b = atx.receiver("ASH701945B_M    NONE")
    # at the zenith both PCV are 0 (lines 8168/8245 start 0.00): IF = −(a1·U1 + a2·U2)
    want_up = A1 * 91.85e-3 + A2 * 120.35e-3          # = 47.8 mm (iono-free PCO, common practice)
    assert want_up == pytest.approx(47.80e-3, abs=0.01e-3)
    got = signals.iono_free_antenna_range_m(b, "G01", "G02", np.array([0.0]), np.radians([90.0]))
    assert got[0] == pytest.approx(-want_up, abs=1e-9)
    pco_if = signals.iono_free_offset_m(b["pco_m"], "G01", "G02")
    assert pco_if[2] == pytest.approx(want_up, abs=1e-9)
    # a Galileo frequency the IGS08 type calibration lacks takes the GPS value (documented fallback)
    assert signals.receiver_antenna_range_m(b, "E01", 0.0, math.pi / 2) == pytest.approx(-91.85e-3)
    with pytest.raises(KeyError):
        signals.receiver_antenna_range_m(b, "E05", 0.0, math.pi / 2, fallback_gps=False)


def test_noazi_used_without_azimuth_grid_and_never_extrapolated(atx):
    b = atx.receiver("ASH701945B_M    NONE")
    # NOAZI at zenith 7.5: half-way between -0.23 and -0.90 (line 8168)
    assert signals.antenna_pcv_m(b, "G01", 7.5) == pytest.approx(-0.565e-3, abs=1e-9)
    assert np.isnan(signals.antenna_pcv_m(b, "G01", 100.0))


def test_satellite_pcv_nadir(atx, shared_set):
    blk = atx.offset("G05", DAY)
    # line 390: BLOCK IIR-M G05 (SVN G050) valid from 2009-08-17; G01 PCO 0 0 822.60 mm, NOAZI over
    # nadir 0..14 by 1: 10.70 10.10 8.00 4.60 0.50 -3.80 ... 12.10
    assert blk["svn"] == "G050" and blk["pco_m"]["G01"] == pytest.approx((0.0, 0.0, 0.8226))
    assert list(blk["zen_deg"]) == list(np.arange(0.0, 14.1, 1.0))
    nad = np.radians([0.0, 2.5, 14.0])
    np.testing.assert_allclose(signals.satellite_antenna_pcv_m(blk, "G01", nad),
                               [10.70e-3, 0.5 * (8.00e-3 + 4.60e-3), 12.10e-3], atol=1e-9)
    # equal L1/L2 values ("set to the iono-free results", header comment): IF = the same value
    assert signals.iono_free_satellite_pcv_m(blk, "G01", "G02", nad[:1])[0] == pytest.approx(10.70e-3)
    # nadir of a GPS satellite seen from the ground stays below about 14 deg (geometry, common practice)
    sat = np.array([26.56e6, 0.0, 0.0])
    rx = np.array([6.371e6 * math.cos(math.radians(70.0)), 6.371e6 * math.sin(math.radians(70.0)), 0.0])
    assert 0.0 < math.degrees(geodesy.nadir_angle_rad(sat, rx)) < 14.0


def test_antenna_names_from_station_keys(tmp_path):
    from ctt.config import load_station

    station = pathlib.Path(__file__).parent / "data" / "stations" / "brus.toml"
    txt = station.read_text()
    st = load_station(station)
    assert st.antenna.antex_name == "ASH701945B_M    NONE" and st.antenna.radome == "NONE"
    p = tmp_path / "s.toml"
    p.write_text(txt.replace('type = "ASH701945B_M    NONE"', 'type = "ASH701945E_M"\nradome = "SCIS"'))
    assert load_station(p).antenna.antex_name == "ASH701945E_M    SCIS"
    p.write_text(txt.replace('type = "ASH701945B_M    NONE"', 'type = "ASH701945B_M    NONE"\nradome = "SCIS"'))
    from ctt.errors import ConfigError

    with pytest.raises(ConfigError, match="station.antenna.radome"):
        load_station(p)
