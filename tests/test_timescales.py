"""Behaviour of ctt.timescales: leap-second edges, calendar round trips, text forms."""

import numpy as np
import pytest

from ctt import timescales as ts
from ctt.errors import TimeScaleError


def test_leap_second_edges_2017():
    # IERS Bulletin C: TAI-UTC = 36 s until 2016-12-31 23:59:60, 37 s from 2017-01-01.
    before = ts.civil_to_ns(2016, 12, 31, 23, 59, 59)
    after = ts.civil_to_ns(2017, 1, 1)
    assert ts.tai_minus_utc(before) == 36 and ts.tai_minus_utc(after) == 37
    # GPS - UTC = 18 s since 2017-01-01 (IERS Bulletin C, IS-GPS-200 GPS = TAI - 19 s).
    assert ts.gps_minus_utc(after) == 18
    # Across the leap second, GPS time advances 2 s while UTC's calendar count advances 1 s.
    g0 = ts.convert(before, "UTC", "GPS")
    g1 = ts.convert(after, "UTC", "GPS")
    assert g1 - g0 == 2_000_000_000


def test_gps_to_utc_inverse_everywhere_but_in_the_leap_second():
    rng = np.random.default_rng(7)
    utc = rng.integers(ts.civil_to_ns(1981, 1, 1), ts.civil_to_ns(2026, 1, 1), 5000)
    np.testing.assert_array_equal(ts.convert(ts.convert(utc, "UTC", "GPS"), "GPS", "UTC"), utc)
    np.testing.assert_array_equal(ts.convert(ts.convert(utc, "UTC", "GLO"), "GLO", "UTC"), utc)


def test_utc_before_1972_is_refused():
    with pytest.raises(TimeScaleError):
        ts.tai_minus_utc(ts.civil_to_ns(1971, 12, 31))


def test_unknown_scale_is_refused():
    with pytest.raises(TimeScaleError):
        ts.convert(0, "GPS", "XYZ")
    assert ts.normalise_scale("GAL") == "GST" and ts.normalise_scale("BDS") == "BDT"


def test_civil_round_trip_and_doy():
    rng = np.random.default_rng(3)
    ns = rng.integers(-ts.NS_PER_DAY * 3000, ts.NS_PER_DAY * 30000, 20000)
    y, m, d, hh, mm, ss, nano = ts.ns_to_civil(ns)
    np.testing.assert_array_equal(ts.civil_to_ns(y, m, d, hh, mm, ss, nano), ns)
    # against numpy's own proleptic Gregorian calendar
    dt = ts.to_datetime64(ns).astype("datetime64[D]").astype(str)
    ours = np.char.add(np.char.add(np.char.zfill(y.astype(str), 4), "-"),
                       np.char.add(np.char.add(np.char.zfill(m.astype(str), 2), "-"),
                                   np.char.zfill(d.astype(str), 2)))
    np.testing.assert_array_equal(dt, ours)
    assert ts.day_of_year(ts.civil_to_ns(2020, 12, 31)) == 366  # leap year (calendar rule)
    assert ts.day_of_year(ts.civil_to_ns(2021, 3, 1)) == 60


def test_iso_text_is_exact_to_the_nanosecond():
    ns = ts.parse_iso("2021-01-01T12:34:56.123456789Z")
    assert ns == ts.civil_to_ns(2021, 1, 1, 12, 34, 56, 123456789)
    assert ts.to_iso(ns, digits=9) == "2021-01-01T12:34:56.123456789Z"
    assert ts.to_iso(ns) == "2021-01-01T12:34:56Z"
    with pytest.raises(ValueError):
        ts.parse_iso("2021-01-01T12:00:00+02:00")
    np.testing.assert_array_equal(ts.parse_iso_array(["2021-01-01T00:00:00.5Z"]),
                                  [ts.civil_to_ns(2021, 1, 1, 0, 0, 0, 500_000_000)])


def test_mjd_pairs_keep_precision():
    ns = ts.civil_to_ns(2021, 1, 1, 6, 0, 0, 1)  # 1 ns after 06:00
    mjd, sod = ts.to_mjd(ns)
    assert mjd == 59215 and sod == pytest.approx(21600.000000001, abs=1e-12)
    assert ts.from_mjd(mjd, sod) == ns


def test_week_numbers_of_other_systems():
    # Galileo OS SIS ICD: GST week 0 began 1999-08-22 00:00 (GPS week 1024).
    ns = ts.civil_to_ns(2021, 1, 1)
    assert ts.gps_week_sow(ns, "GST")[0] == 2138 - 1024
    # BDS ICD: BDT week 0 began 2006-01-01 00:00:00 BDT (GPS week 1356, day 0).
    bdt = ts.convert(ns, "GPS", "BDT")
    w, sow = ts.gps_week_sow(bdt, "BDT")
    assert w == 2138 - 1356 and sow == pytest.approx(5 * 86400 - 14)
    assert ts.from_week_sow(w, sow, "BDT") == bdt
