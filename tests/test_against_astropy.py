"""Time scales checked against astropy.time (a general-purpose reference library).

astropy has UTC, TAI and GPS scales (its 'gps' format counts SI seconds since
1980-01-06 00:00:00 UTC on the TAI - 19 s scale). astropy has no GST, BDT or
GLONASS scale: those are checked through their published fixed offsets.
"""

import numpy as np
import pytest

astropy_time = pytest.importorskip("astropy.time")
from astropy.time import Time  # noqa: E402

from ctt import timescales as ts  # noqa: E402

# Instants after the leap-second table's validity warn (ours) and astropy warns of
# "dubious years" beyond its own table: both expected for 2027-2035.
pytestmark = [pytest.mark.filterwarnings("ignore:instant after"),
              pytest.mark.filterwarnings("ignore::erfa.ErfaWarning")]

rng = np.random.default_rng(20210101)
# 1200 random UTC instants 1980-2035 with random nanoseconds.
_START = ts.civil_to_ns(1980, 1, 6)
_END = ts.civil_to_ns(2035, 12, 31)
UTC_NS = np.sort(rng.integers(_START, _END, size=1200, dtype=np.int64))


def _astropy_utc(utc_ns):
    """Build astropy UTC times from ISO text with 9 digits (astropy parses it into a
    two-part JD without float loss). Not from MJD fractions: astropy's UTC day
    fraction on a leap-second day is of 86 401 s."""
    return Time(list(ts.to_iso(utc_ns, digits=9, suffix="")), format="isot", scale="utc", precision=9)


def test_gps_minus_utc_matches_astropy():
    t = _astropy_utc(UTC_NS)
    # astropy: GPS seconds since 1980-01-06 00:00:00 UTC (= our GPS count) in SI seconds.
    gps_s_astropy = t.gps
    ours = ts.convert(UTC_NS, "UTC", "GPS")
    # astropy's float seconds (~1e9 s) carry ~1e-7 s rounding: compare the whole-second
    # offset GPS - UTC here; the 1 ns comparisons below use astropy's two-part JD.
    diff_s = gps_s_astropy - UTC_NS / 1e9
    np.testing.assert_array_equal(np.rint(diff_s).astype(np.int64), (ours - UTC_NS) // 1_000_000_000)


def test_tai_agrees_to_1ns():
    t = _astropy_utc(UTC_NS)
    tai = t.tai
    # Our TAI calendar count -> MJD pair; astropy TAI MJD as (jd1, jd2) two-part.
    ours_tai = ts.convert(UTC_NS, "UTC", "TAI")
    mjd, _ = ts.to_mjd(ours_tai)
    frac_ns = ours_tai - ts.from_mjd(mjd, 0.0)
    jd1, jd2 = tai.jd1, tai.jd2
    # difference in days, computed with the big parts cancelling first
    d_days = (jd1 - 2400000.5 - mjd) + jd2 - frac_ns / 86400e9
    assert np.max(np.abs(d_days * 86400e9)) <= 1.0  # <= 1 ns (issue requirement)


def test_gps_scale_agrees_to_1ns_and_back():
    t = _astropy_utc(UTC_NS)
    ours_gps = ts.convert(UTC_NS, "UTC", "GPS")
    # astropy's 'gps' time format is relative to 1980-01-06 00:00:19 TAI.
    # Use its TAI two-part JD minus 19 s, as IS-GPS-200 defines GPS = TAI - 19 s.
    tai = t.tai
    mjd, _ = ts.to_mjd(ours_gps)
    frac_ns = ours_gps - ts.from_mjd(mjd, 0.0)
    d_days = (tai.jd1 - 2400000.5 - mjd) + tai.jd2 - (frac_ns + 19_000_000_000) / 86400e9
    assert np.max(np.abs(d_days * 86400e9)) <= 1.0
    np.testing.assert_array_equal(ts.convert(ours_gps, "GPS", "UTC"), UTC_NS)


def test_utc_calendar_fields_match_astropy_iso():
    sub = UTC_NS[:200]
    t = _astropy_utc(sub)
    # From the GPS side: astropy's TAI - 19 s rendered as UTC calendar text.
    gps = ts.convert(sub, "UTC", "GPS")
    t_back = Time(list(ts.to_iso(gps + 19_000_000_000, digits=9, suffix="")), format="isot",
                  scale="tai", precision=9).utc
    np.testing.assert_array_equal(ts.parse_iso_array(t_back.isot), sub)
    np.testing.assert_array_equal(ts.parse_iso_array(t.isot), sub)


def test_fixed_offset_scales():
    # BDT = GPS - 14 s (BDS-SIS-ICD; BDT epoch 2006-01-01 UTC when TAI-UTC = 33 s).
    g = ts.civil_to_ns(2021, 1, 1)
    assert ts.convert(g, "GPS", "BDT") == g - 14_000_000_000
    # GST = GPS (Galileo OS SIS ICD).
    assert ts.convert(g, "GPS", "GST") == g
    # GLONASS time = UTC(SU) + 3 h (GLONASS ICD); on 2021-01-01 GPS - UTC = 18 s.
    assert ts.convert(g, "GPS", "GLO") == g - 18_000_000_000 + 3 * 3600 * 1_000_000_000


@pytest.mark.parametrize(
    "date, week, dow",
    [
        ((1980, 1, 6), 0, 0),        # GPS epoch = week 0 (IS-GPS-200)
        ((1999, 8, 22), 1024, 0),    # first 10-bit rollover (IS-GPS-200)
        ((2019, 4, 7), 2048, 0),     # second rollover (IS-GPS-200)
        ((2021, 1, 1), 2138, 5),     # data README: GPS week 2138, day 5
    ],
)
def test_gps_weeks(date, week, dow):
    ns = ts.civil_to_ns(*date)
    w, sow = ts.gps_week_sow(ns)
    assert w == week and sow == dow * 86400
    # the week from a 10-bit broadcast value, unwrapped near the date
    assert ts.unwrap_week(week % 1024, ns) == week


def test_mjd_of_data_day_matches_astropy():
    ns = ts.civil_to_ns(2021, 1, 1)
    assert ts.to_mjd(ns)[0] == int(Time("2021-01-01T00:00:00", scale="utc").mjd) == 59215
