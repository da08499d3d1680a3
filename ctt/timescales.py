"""Time scales of GNSS timing: GPS, Galileo (GST), BeiDou (BDT), GLONASS, UTC, TAI.

Representation
--------------
Every instant is an ``int64`` count of nanoseconds on the *calendar count* of a
scale: the number of nanoseconds since 1980-01-06 00:00:00 read on that
scale's own clock, with every day 86 400 s long. For GPS time this is simply
"nanoseconds since the GPS epoch". int64 nanoseconds cover ±292 years with 1 ns
resolution, so nothing degrades over decades (a float64 of seconds since 1980
would keep only ~0.1 µs... at 1e9 s, 1e-7 s resolution; see DESIGN.md).
Sub-nanosecond quantities (light time, transmission time) travel as an extra
float64 offset in seconds next to the int64 (see :mod:`ctt.measure`).

Offsets between scales (published fixed values):

* GPS = TAI − 19 s (IS-GPS-200; GPS epoch 1980-01-06 00:00:00 UTC).
* GST = GPS (Galileo OS SIS ICD: GST is steered to GPS-like TAI − 19 s; the
  GST week number starts 1999-08-22, i.e. 1024 weeks after the GPS epoch).
* BDT = GPS − 14 s (BDS-SIS-ICD: BDT epoch 2006-01-01 00:00:00 UTC, when
  TAI − UTC was 33 s).
* GLONASS time = UTC(SU) + 3 h (GLONASS ICD); UTC(SU) is taken as UTC.
* UTC = TAI − (TAI − UTC), the leap-second table below (IERS Bulletin C).

The UTC calendar count cannot name the inserted second 23:59:60; an instant
inside a leap second converts to the first second of the next day. UTC
before 1972-01-01 (non-integer offsets) raises :class:`TimeScaleError`.

All functions accept scalars or numpy arrays and are vectorised.
"""

from __future__ import annotations

import re
import warnings

import numpy as np

from .errors import TimeScaleError

NS_PER_S = 1_000_000_000
NS_PER_DAY = 86_400 * NS_PER_S
NS_PER_WEEK = 7 * NS_PER_DAY

#: The GPS epoch as numpy datetime64 (calendar, no leap seconds).
EPOCH_DT64 = np.datetime64("1980-01-06T00:00:00", "ns")
#: MJD of 1980-01-06.
EPOCH_MJD = 44244

SCALES = ("GPS", "GST", "BDT", "GLO", "UTC", "TAI", "QZS", "IRN")

# TAI - UTC (s) from the given UTC date on. IERS Bulletin C; the last entry is
# the leap second of 2016-12-31. Bulletin C has announced none since (the
# table below is checked against the text of the Bulletins through 2026).
_LEAP_TABLE = [
    ("1972-01-01", 10), ("1972-07-01", 11), ("1973-01-01", 12), ("1974-01-01", 13),
    ("1975-01-01", 14), ("1976-01-01", 15), ("1977-01-01", 16), ("1978-01-01", 17),
    ("1979-01-01", 18), ("1980-01-01", 19), ("1981-07-01", 20), ("1982-07-01", 21),
    ("1983-07-01", 22), ("1985-07-01", 23), ("1988-01-01", 24), ("1990-01-01", 25),
    ("1991-01-01", 26), ("1992-07-01", 27), ("1993-07-01", 28), ("1994-07-01", 29),
    ("1996-01-01", 30), ("1997-07-01", 31), ("1999-01-01", 32), ("2006-01-01", 33),
    ("2009-01-01", 34), ("2012-07-01", 35), ("2015-07-01", 36), ("2017-01-01", 37),
]
#: Instants after this UTC date are converted with the last known offset and a
#: warning, since a leap second could have been announced since the table was made.
LEAP_TABLE_VALID_UNTIL = "2027-06-30"

_LEAP_UTC_NS = np.array(
    [(np.datetime64(d, "ns") - EPOCH_DT64).astype(np.int64) for d, _ in _LEAP_TABLE], dtype=np.int64
)
_LEAP_TAI_UTC = np.array([v for _, v in _LEAP_TABLE], dtype=np.int64)
# GPS - UTC in seconds for each table entry.
_LEAP_GPS_UTC = _LEAP_TAI_UTC - 19
# The same boundaries read on the GPS calendar count.
_LEAP_GPS_NS = _LEAP_UTC_NS + _LEAP_GPS_UTC * NS_PER_S
_VALID_UNTIL_NS = int((np.datetime64(LEAP_TABLE_VALID_UNTIL, "ns") - EPOCH_DT64).astype(np.int64))

_warned_expiry = False


def _as_i64(x):
    return np.asarray(x, dtype=np.int64)


def _check_expiry(utc_ns) -> None:
    global _warned_expiry
    if not _warned_expiry and np.any(utc_ns > _VALID_UNTIL_NS):
        _warned_expiry = True
        warnings.warn(
            f"instant after {LEAP_TABLE_VALID_UNTIL}: the leap-second table may be out of date "
            "(check IERS Bulletin C); using TAI-UTC = 37 s",
            stacklevel=3,
        )


def tai_minus_utc(utc_ns):
    """TAI − UTC in whole seconds at the given UTC instants (IERS Bulletin C).

    Raises :class:`TimeScaleError` before 1972-01-01 (no integer offsets then).
    """
    utc_ns = _as_i64(utc_ns)
    idx = np.searchsorted(_LEAP_UTC_NS, utc_ns, side="right") - 1
    if np.any(idx < 0):
        raise TimeScaleError("UTC before 1972-01-01 has no integer TAI-UTC offset; not supported")
    _check_expiry(utc_ns)
    return _LEAP_TAI_UTC[idx]


def gps_minus_utc(utc_ns):
    """GPS − UTC (s) at UTC instants: TAI − UTC − 19 s (18 s since 2017-01-01)."""
    return tai_minus_utc(utc_ns) - 19


def leap_seconds_at_gps(gps_ns):
    """GPS − UTC (s) at instants given in GPS time."""
    gps_ns = _as_i64(gps_ns)
    idx = np.searchsorted(_LEAP_GPS_NS, gps_ns, side="right") - 1
    if np.any(idx < 0):
        raise TimeScaleError("UTC before 1972-01-01 has no integer TAI-UTC offset; not supported")
    return _LEAP_GPS_UTC[idx]


def _to_gps(ns, scale):
    ns = _as_i64(ns)
    if scale in ("GPS", "GST", "QZS", "IRN"):
        return ns
    if scale == "TAI":
        return ns - 19 * NS_PER_S
    if scale == "BDT":
        return ns + 14 * NS_PER_S
    if scale == "UTC":
        return ns + gps_minus_utc(ns) * NS_PER_S
    if scale == "GLO":
        utc = ns - 3 * 3600 * NS_PER_S
        return utc + gps_minus_utc(utc) * NS_PER_S
    raise TimeScaleError(f"unknown time scale {scale!r}; expected one of {', '.join(SCALES)}")


def _from_gps(gps, scale):
    if scale in ("GPS", "GST", "QZS", "IRN"):
        return gps
    if scale == "TAI":
        return gps + 19 * NS_PER_S
    if scale == "BDT":
        return gps - 14 * NS_PER_S
    if scale in ("UTC", "GLO"):
        utc = gps - leap_seconds_at_gps(gps) * NS_PER_S
        _check_expiry(utc)
        return utc + (3 * 3600 * NS_PER_S if scale == "GLO" else 0)
    raise TimeScaleError(f"unknown time scale {scale!r}; expected one of {', '.join(SCALES)}")


def convert(ns, from_scale: str, to_scale: str):
    """Convert calendar-count nanoseconds from one scale to another (int64 in, int64 out)."""
    from_scale = normalise_scale(from_scale)
    to_scale = normalise_scale(to_scale)
    if from_scale == to_scale:
        return _as_i64(ns)
    return _from_gps(_to_gps(ns, from_scale), to_scale)


def normalise_scale(name: str) -> str:
    """Map spellings found in files (``GPS``, ``GAL``, ``BDS``, ``GLONASS``...) to a scale name."""
    key = (name or "GPS").strip().upper()
    aliases = {"GAL": "GST", "GALILEO": "GST", "BDS": "BDT", "BEIDOU": "BDT", "CMP": "BDT",
               "GLONASS": "GLO", "QZSS": "QZS", "IRNSS": "IRN", "NAVIC": "IRN", "": "GPS"}
    key = aliases.get(key, key)
    if key not in SCALES:
        raise TimeScaleError(f"unknown time scale {name!r}; expected one of {', '.join(SCALES)}")
    return key


#: The time scale of each GNSS system letter (RINEX system identifiers).
SYSTEM_SCALE = {"G": "GPS", "E": "GST", "C": "BDT", "R": "GLO", "J": "QZS", "I": "IRN", "S": "GPS"}


# ---------------------------------------------------------------- calendar

def civil_to_ns(year, month, day, hour=0, minute=0, second=0, nanosecond=0):
    """Calendar fields (of any scale) to that scale's calendar-count nanoseconds.

    ``second`` may be an integer or float; fractional seconds are rounded to the
    nanosecond. ``nanosecond`` is added on top (use it for exact input).
    """
    year = np.asarray(year, dtype=np.int64)
    month = np.asarray(month, dtype=np.int64)
    day = np.asarray(day, dtype=np.int64)
    days = _days_from_civil(year, month, day) - _days_from_civil(np.int64(1980), np.int64(1), np.int64(6))
    sec = np.asarray(second)
    if np.issubdtype(sec.dtype, np.floating):
        whole = np.floor(sec)
        sec_ns = whole.astype(np.int64) * NS_PER_S + np.rint((sec - whole) * 1e9).astype(np.int64)
    else:
        sec_ns = sec.astype(np.int64) * NS_PER_S
    out = (days * NS_PER_DAY + np.asarray(hour, dtype=np.int64) * 3600 * NS_PER_S
           + np.asarray(minute, dtype=np.int64) * 60 * NS_PER_S + sec_ns
           + np.asarray(nanosecond, dtype=np.int64))
    return out


def _days_from_civil(y, m, d):
    """Days since 1970-01-01 of a proleptic Gregorian date (H. Hinnant's algorithm)."""
    y = y - (m <= 2)
    era = np.floor_divide(y, 400)
    yoe = y - era * 400
    mp = (m + 9) % 12
    doy = (153 * mp + 2) // 5 + d - 1
    doe = yoe * 365 + yoe // 4 - yoe // 100 + doy
    return era * 146097 + doe - 719468


def ns_to_civil(ns):
    """Calendar-count nanoseconds to (year, month, day, hour, minute, second, nanosecond) arrays."""
    ns = _as_i64(ns)
    days = np.floor_divide(ns, NS_PER_DAY)
    rem = ns - days * NS_PER_DAY
    z = days + 3657 + 719468  # 1980-01-06 is day 3657 after 1970-01-01
    era = np.floor_divide(z, 146097)
    doe = z - era * 146097
    yoe = (doe - doe // 1460 + doe // 36524 - doe // 146096) // 365
    y = yoe + era * 400
    doy = doe - (365 * yoe + yoe // 4 - yoe // 100)
    mp = (5 * doy + 2) // 153
    d = doy - (153 * mp + 2) // 5 + 1
    m = np.where(mp < 10, mp + 3, mp - 9)
    y = y + (m <= 2)
    hour = rem // (3600 * NS_PER_S)
    rem = rem - hour * 3600 * NS_PER_S
    minute = rem // (60 * NS_PER_S)
    rem = rem - minute * 60 * NS_PER_S
    second = rem // NS_PER_S
    nano = rem - second * NS_PER_S
    return y, m, d, hour, minute, second, nano


def to_datetime64(ns):
    """Calendar-count ns to numpy ``datetime64[ns]`` (calendar, same scale)."""
    return EPOCH_DT64 + _as_i64(ns).astype("timedelta64[ns]")


def from_datetime64(dt):
    """numpy ``datetime64`` (or anything numpy converts, e.g. ISO strings) to calendar-count ns."""
    return (np.asarray(dt, dtype="datetime64[ns]") - EPOCH_DT64).astype(np.int64)


def day_of_year(ns):
    """Day of year (1..366) of calendar-count instants."""
    y, m, d, *_ = ns_to_civil(ns)
    return (_days_from_civil(y, m, d) - _days_from_civil(y, np.ones_like(m), np.ones_like(d)) + 1)


def date_to_ns(date) -> int:
    """``datetime.date`` / ``'YYYY-MM-DD'`` to the calendar-count ns of its 00:00."""
    return int(from_datetime64(np.datetime64(str(date), "D")))


# ---------------------------------------------------------------- MJD

def to_mjd(ns):
    """Calendar-count ns to (MJD integer day, seconds of day as float64).

    The pair keeps full precision (seconds of day to ~1e-11 s). Use
    :func:`to_mjd_float` for plotting only.
    """
    ns = _as_i64(ns)
    days = np.floor_divide(ns, NS_PER_DAY)
    sod = (ns - days * NS_PER_DAY) / 1e9
    return days + EPOCH_MJD, sod


def to_mjd_float(ns):
    """Calendar-count ns to fractional MJD (float64: ~1 µs resolution; for tables and plots)."""
    mjd, sod = to_mjd(ns)
    return mjd + sod / 86400.0


def from_mjd(mjd, seconds_of_day=0.0):
    """(MJD, seconds of day) to calendar-count ns. A fractional ``mjd`` is accepted too."""
    mjd = np.asarray(mjd)
    if np.issubdtype(mjd.dtype, np.floating):
        whole = np.floor(mjd)
        seconds_of_day = np.asarray(seconds_of_day) + (mjd - whole) * 86400.0
        mjd = whole
    days = mjd.astype(np.int64) - EPOCH_MJD
    sod = np.asarray(seconds_of_day, dtype=np.float64)
    return days * NS_PER_DAY + np.rint(sod * 1e9).astype(np.int64)


# ---------------------------------------------------------------- GNSS weeks

_WEEK_ORIGIN_NS = {  # offset of each system's week 0 from the GPS epoch, on the GPS count
    "GPS": 0, "QZS": 0, "IRN": 0,
    "GST": 1024 * NS_PER_WEEK,  # Galileo OS SIS ICD: GST week 0 starts 1999-08-22
    "BDT": 1356 * NS_PER_WEEK,  # BDS ICD: BDT week 0 starts 2006-01-01 (GPS week 1356)
}


def gps_week_sow(ns, system_scale: str = "GPS"):
    """Week number and seconds of week (float64 s) of calendar-count ns in ``system_scale``.

    For GPS the week counts continuously from 1980-01-06 (no 1024 wrap); for GST
    from 1999-08-22; for BDT from 2006-01-01 (in BDT). Returns
    ``(week int64, sow float64 seconds)``; use :func:`week_sow_ns` for exact ns.
    """
    week, sow_ns = week_sow_ns(ns, system_scale)
    return week, sow_ns / 1e9


def week_sow_ns(ns, system_scale: str = "GPS"):
    """Like :func:`gps_week_sow` but seconds of week as exact int64 ns."""
    scale = normalise_scale(system_scale)
    origin = _WEEK_ORIGIN_NS.get(scale)
    if origin is None:
        raise TimeScaleError(f"{scale} has no week numbering")
    rel = _as_i64(ns) - origin
    week = np.floor_divide(rel, NS_PER_WEEK)
    return week, rel - week * NS_PER_WEEK


def from_week_sow(week, sow_s, system_scale: str = "GPS"):
    """(week, seconds of week) of ``system_scale`` to that scale's calendar-count ns."""
    scale = normalise_scale(system_scale)
    origin = _WEEK_ORIGIN_NS[scale]
    sow = np.asarray(sow_s, dtype=np.float64)
    whole = np.floor(sow)
    return (origin + np.asarray(week, dtype=np.int64) * NS_PER_WEEK + whole.astype(np.int64) * NS_PER_S
            + np.rint((sow - whole) * 1e9).astype(np.int64))


def unwrap_week(week_mod, near_ns, modulus: int = 1024, system_scale: str = "GPS"):
    """Full week number from a broadcast week that wraps every ``modulus`` weeks.

    The full week is the one closest to the instant ``near_ns`` (for example the
    observation file's first epoch). IS-GPS-200: the legacy 10-bit week rolled
    over on 1999-08-22 (week 1024) and 2019-04-07 (week 2048).
    """
    ref_week, _ = week_sow_ns(near_ns, system_scale)
    week_mod = np.asarray(week_mod, dtype=np.int64) % modulus
    base = ref_week - np.mod(ref_week, modulus)
    cand = base + week_mod
    cand = np.where(cand - ref_week > modulus // 2, cand - modulus, cand)
    cand = np.where(ref_week - cand > modulus // 2, cand + modulus, cand)
    return cand


# ---------------------------------------------------------------- text forms

_ISO_RE = re.compile(
    r"^\s*(\d{4})-(\d{2})-(\d{2})(?:[T ](\d{2}):(\d{2})(?::(\d{2})(?:\.(\d{1,9}))?)?)?\s*(Z|UTC|[+-]00:?00)?\s*$"
)


def parse_iso(text: str) -> int:
    """ISO 8601 ``YYYY-MM-DD[THH:MM[:SS[.fffffffff]]][Z]`` to calendar-count ns (exact to 1 ns).

    Only UTC-designated or undesignated strings are accepted (offsets other than
    zero are refused rather than guessed). Raises ``ValueError`` with the text.
    """
    m = _ISO_RE.match(text)
    if not m:
        raise ValueError(f"not an ISO 8601 UTC time: {text!r}")
    y, mo, d, h, mi, s, frac, _ = m.groups()
    nano = int((frac or "0").ljust(9, "0"))
    return int(civil_to_ns(int(y), int(mo), int(d), int(h or 0), int(mi or 0), int(s or 0), nano))


def parse_iso_array(values) -> np.ndarray:
    """Vectorised :func:`parse_iso` for a sequence of strings (pandas/NumPy parse to ns)."""
    vals = [str(v).strip().rstrip("Z").replace(" ", "T") for v in values]
    try:
        return from_datetime64(np.array(vals, dtype="datetime64[ns]"))
    except ValueError:
        return np.array([parse_iso(v) for v in values], dtype=np.int64)


def to_iso(ns, digits: int = 0, suffix: str = "Z"):
    """Calendar-count ns to ISO 8601 text (``suffix`` 'Z' for UTC; '' for other scales).

    ``digits`` fractional-second digits (0..9); returns a str for a scalar input,
    else a numpy array of str.
    """
    arr = _as_i64(ns)
    unit = {0: "s", 3: "ms", 6: "us", 9: "ns"}
    dt = to_datetime64(arr)
    if digits in unit:
        text = np.datetime_as_string(dt, unit=unit[digits])
    else:
        text = np.datetime_as_string(dt, unit="ns")
        cut = 19 + (digits + 1 if digits else 0)
        text = np.array([t[:cut] for t in np.atleast_1d(text)]).reshape(arr.shape)
    text = np.char.add(text.astype(str), suffix)
    return str(text) if arr.ndim == 0 else text
