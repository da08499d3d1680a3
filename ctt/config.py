"""Station and pair TOML files -> validated, frozen dataclasses.

Every problem found while reading a file is a :class:`ctt.errors.ConfigError`
naming the file and the key path (array-of-tables entries are counted from 1:
``delays[2].cable_ns`` is ``cable_ns`` of the second ``[[delays]]`` table).
A loader collects every problem of a file before raising; the first one is
raised and the whole list is on the exception as ``.problems``.

Station file
============

.. code-block:: toml

    [station]
    id = "LABA"                 # 4-9 letters/digits
    name = "Invented Lab A, roof antenna"
    elevation_mask_deg = 10.0   # optional, default 10
    # optional: names the station's files use besides its id's first four characters
    # (RINEX MARKER NAME, CGGTTS LAB); see check_station_data
    marker_names = ["LABA-16"]
    [station.position]          # antenna reference point or marker, ECEF metres
    x_m = 4000000.0
    y_m = 500000.0
    z_m = 4900000.0
    sigma_m = 0.02              # or sigma_x_m / sigma_y_m / sigma_z_m
    frame = "ITRF2014"
    epoch = 2021.0
    is_marker = true            # true: antenna delta below is added to get the ARP
    [station.antenna]
    type = "INVENTED-ANT1"      # as ANTEX spells it (up to 16 characters), or the
    radome = "NONE"             # 20-character ANTEX name 'TYPE            RDME'; radome optional
    delta_h_m = 0.0
    delta_e_m = 0.0
    delta_n_m = 0.0
    [station.met]               # optional
    pattern = "{station_lower}{doy:03d}0.{yy:02d}m"
    [[delays]]                  # calibration sets with validity intervals (UTC)
    valid_from = 2020-01-01T00:00:00Z    # TOML datetime or date
    valid_until = 2030-01-01T00:00:00Z   # optional, exclusive; absent = open
    receiver_ns = { C1C = 25.1, C1W = 25.3, C2W = 27.0, C5Q = 24.0 }
    u_receiver_ns = 1.0          # or a table per code
    receiver_correlation = 1.0   # optional: correlation of the codes' receiver-delay errors
                                 # (default 1: one calibration campaign against one reference)
    combined_ns = { "C1W+C2W" = 22.4 }   # optional: a calibrated combination's delay (e.g. the
    u_combined_ns = 0.8                  # iono-free P3), used instead of combining the codes
    cable_ns = 152.4
    u_cable_ns = 0.2
    reference_ns = 11.8
    u_reference_ns = 0.3
    note = "calibrated 2020-01 against travelling receiver"
    [[changes]]                 # hardware change log
    time = 2021-03-01T12:00:00Z
    what = "antenna cable replaced"
    expected_delay_change_ns = 3.2   # optional

Sign convention of the delays (all are positive numbers)::

    local clock - GNSS time = raw - (receiver + cable) + reference
                            = raw - hardware_ns,
    hardware_ns = receiver_ns[code] + cable_ns - reference_ns

``receiver_ns`` is the receiver's internal delay for the RINEX 3 code,
``cable_ns`` the antenna cable (and antenna/splitter) delay, ``reference_ns``
the delay from the local reference clock's time point (e.g. the 1PPS
connector of the clock) to the receiver's internal time scale. So adding 10 ns
to station B's ``cable_ns`` lowers clock B by 10 ns and raises A - B by 10 ns.

Unknown keys are refused (a misspelt key must not silently fall back to a
default). Coordinates must have a geocentric radius between 6.35e6 and
6.40e6 m (the WGS 84 ellipsoid runs 6.357e6..6.378e6 m, plus a few km of
terrain; common practice).

Pair file
=========

Paths are relative to the pair file's folder unless absolute. Outputs are
confined to the output root (``[output] root``, else the pair file's folder):
``dir``, ``archive`` and ``report`` resolving outside it, a pair name that is
not a plain folder name, are configuration errors naming the key.

.. code-block:: toml

    [pair]
    name = "laba-labb"               # optional, default "<A>-<B>" (lower case ids)
    station_a = "laba.toml"          # A of "clock A minus clock B"
    station_b = "labb.toml"
    data_root = "data"               # every input must resolve inside it

    [inputs]                         # patterns relative to data_root
    obs = ["{ID}_R_{yyyy}{doy:03d}0000_01D_30S_MO.crx.gz",   # alternatives in order
           "{station}{doy:03d}0.{yy:02d}d.Z",
           "{station}{doy:03d}0.{yy:02d}o"]
    nav = "brdc{doy:03d}0.{yy:02d}n.gz"
    sp3 = "prod/igs{gpsweek}{gpsdow}.sp3.Z"     # optional
    clk = "prod/igs{gpsweek}{gpsdow}.clk.Z"     # optional
    ionex = "prod/igsg{doy:03d}0.{yy:02d}i.Z"   # optional
    met = "{station}{doy:03d}0.{yy:02d}m"       # optional (else each station's met pattern)
    erp = ["prod/igs{gpsweek-1}7.erp", "prod/igs{gpsweek}7.erp",   # optional: IGS ERP files for
           "prod/igs{gpsweek+1}7.erp"]                          # the pole tide (mode ppp)
    optional = ["met"]               # kinds whose absence is not an error (default ["met"])

    [inputs.a]                       # optional per-station overrides: obs, met
    obs = "a/{STATION}{doy:03d}*.rnx"
    [inputs.b]
    obs = "b/{station}{doy:03d}0.{yy:02d}o.gz"

    [processing]
    mode = "tracks"                  # tracks | epochs | all-in-view | ppp (needs sp3, clk advised)
    signals = "iono-free"            # iono-free | single
    systems = ["G"]                  # RINEX system letters
    codes = []                       # optional explicit codes, e.g. ["C1W", "C2W"]
    orbits = "auto"                  # auto (precise when sp3 resolves) | broadcast | precise
    bin_s = 30.0                     # epoch bin (epochs / all-in-view modes)
    elevation_mask_deg = 10.0        # optional; default: the larger station mask
    min_common_sats = 2
    mad_k = 3.5                      # outlier rejection at k x MAD (scaled)
    weights = "sin2el"               # sin2el | equal | sigma
    smoothing_s = 0.0                # code smoothing time constant (0 = none)
    no_troposphere = false
    no_ionosphere = false
    no_tide = false
    no_sagnac = false
    no_relativity = false
    # bias = "estimate"              # optional: satellite code biases fitted on each day's residuals

    [output]
    root = "/srv/ctt/out"            # optional: the output root (default: the pair file's folder)
    dir = "out"                      # run folders go below it
    archive = "out/ctt.sqlite"
    report = "out/report.html"

    [events]
    max_gap_s = 3600.0               # event correction refuses gaps longer than this

Placeholders in patterns (Python format fields, so ``{doy:03d}`` works):
``{station}``/``{station_lower}`` first four id characters in lower case,
``{STATION}`` the same in upper case, ``{id}`` / ``{ID}`` the whole id as
written / upper case, ``{yyyy}`` ``{yy}`` ``{mm}`` ``{dd}`` ``{doy}`` (ints),
``{ddd}`` (day of year as 3-digit text), ``{gpsweek}`` ``{gpsdow}`` (ints),
``{session}`` (``"0"``, the daily-file session character); only these bare
names (no attribute or index access, no ``!r`` conversion) and a format of at
most a ``0``, a two-digit width and ``d``. A pattern whose
result contains ``*`` or ``?`` is matched as a glob inside its folder and the
first match in sorted order is taken. Every resolved path is checked to stay
inside ``data_root`` after ``..`` and symbolic links are resolved.

``erp`` (IGS ERP files, version 2) gives the pole coordinates for the solid Earth
pole tide of mode ``ppp`` (IERS 2010 §7.1.4, :func:`ctt.ppp.run_ppp`); the code modes
do not model the pole tide (a few mm, far below the code noise) and ignore it with a
warning in the summary. Without an ``erp`` pattern the PPP summary says "not applied
(no ERP file given)"; with one, the file is required unless ``erp`` is listed in
``optional``. The ERP epochs must cover every epoch of the day (they are never
extrapolated): a weekly file's epochs are at noon, so the week's first day needs the
previous week's file as well and its last day the next week's, hence the three
patterns above (merged; on the other days all three name the same file).

Neighbouring days (``sp3``, ``clk`` and ``erp``): a date placeholder may carry a
day offset of 1 to 9 days, ``{doy-1}``, ``{gpsweek+1}``, ``{yy-1:02d}``. The
offset moves the *date*, and the field is read from that date: on 2011-01-01,
``{yyyy-1}{doy-1:03d}`` gives ``2010365`` and on a Sunday
``{gpsweek-1}{gpsdow-1}`` the previous week's Saturday. All date placeholders
of one pattern carry the same offset (one pattern names one day's file).
Patterns of the same offset are alternatives as usual; patterns of different
offsets name different files, and every one found is used (merged into one
product, so interpolation is valid across midnight)::

    sp3 = ["prod/igs{gpsweek-1}{gpsdow-1}.sp3", "prod/igs{gpsweek}{gpsdow}.sp3",
           "prod/igs{gpsweek+1}{gpsdow+1}.sp3"]

The day's own file (no offset) is required as before; a missing neighbour
is logged and the product then ends at that day edge, where rows are flagged
out of span.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import glob as _glob
import hashlib
import json
import logging
import math
import pathlib
import re
import string
import tomllib
import types
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from .errors import ConfigError, MissingInputError
from .timescales import civil_to_ns, date_to_ns, gps_week_sow, parse_iso, to_iso

log = logging.getLogger(__name__)

__all__ = [
    "Antenna", "DelaySet", "HardwareChange", "StationConfig", "PairConfig", "Processing",
    "load_station", "dump_station", "load_pair", "format_pattern", "pattern_fields",
    "R_MIN_M", "R_MAX_M", "check_station_data", "check_distinct_stations", "names_match",
    "PROCESSING_FIELDS", "check_processing_value",
]

#: Sanity bounds of the geocentric radius of a station (common practice: ellipsoid +- a few km).
R_MIN_M = 6.35e6
R_MAX_M = 6.40e6

_ID_RE = re.compile(r"^[A-Za-z0-9]{4,9}$")
_CODE_RE = re.compile(r"^[CLDS][1-9][A-Z]$")
NS_PER_DAY = 86_400 * 1_000_000_000

MODES = ("tracks", "epochs", "all-in-view", "ppp")
SIGNALS = ("iono-free", "single")
ORBITS = ("auto", "broadcast", "precise")
INPUT_KINDS = ("obs", "nav", "sp3", "clk", "ionex", "met", "erp")
STATION_INPUT_KINDS = ("obs", "met")


# ---------------------------------------------------------------- problem collection

class _Reader:
    """Collects problems of one file; typed getters return ``None`` after a problem."""

    def __init__(self, path):
        self.path = str(path)
        self.problems: list[ConfigError] = []

    def fail(self, key, problem):
        self.problems.append(ConfigError(self.path, key, problem))
        return None

    def raise_if_any(self):
        if self.problems:
            err = self.problems[0]
            err.problems = list(self.problems)
            raise err

    def table(self, d, name, key, required=True):
        v = d.get(name)
        if v is None:
            if required:
                self.fail(key, "missing table")
            return None
        if not isinstance(v, dict):
            return self.fail(key, f"expected a table, found {v!r}")
        return v

    def unknown(self, d, allowed, key):
        for k in d:
            if k not in allowed:
                self.fail(f"{key}.{k}" if key else k,
                          f"unknown key; expected one of {', '.join(sorted(allowed))}")

    def number(self, d, name, key, what, required=True, default=None, lo=None, hi=None,
               lo_open=False):
        if name not in d:
            if required:
                return self.fail(key, f"missing; expected {what}")
            return default
        v = d[name]
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            return self.fail(key, f"expected {what}, found {v!r}")
        v = float(v)
        if not math.isfinite(v):
            return self.fail(key, f"expected a finite {what}, found {v!r}")
        if lo is not None and (v < lo or (lo_open and v == lo)):
            return self.fail(key, f"expected {what} {'>' if lo_open else '>='} {lo:g}, found {v!r}")
        if hi is not None and v > hi:
            return self.fail(key, f"expected {what} <= {hi:g}, found {v!r}")
        return v

    def integer(self, d, name, key, what, default=None, lo=None):
        if name not in d:
            return default
        v = d[name]
        if isinstance(v, bool) or not isinstance(v, int):
            return self.fail(key, f"expected {what} (an integer), found {v!r}")
        if lo is not None and v < lo:
            return self.fail(key, f"expected {what} >= {lo}, found {v!r}")
        return v

    def text(self, d, name, key, what, required=True, default=None):
        if name not in d:
            if required:
                return self.fail(key, f"missing; expected {what}")
            return default
        v = d[name]
        if not isinstance(v, str):
            return self.fail(key, f"expected {what} (a string), found {v!r}")
        return v

    def boolean(self, d, name, key, default=False):
        if name not in d:
            return default
        v = d[name]
        if not isinstance(v, bool):
            return self.fail(key, f"expected true or false, found {v!r}")
        return v

    def processing(self, d, name):
        """A [processing] value through the validation the command line shares (None if absent/bad)."""
        if name not in d:
            return None
        try:
            return check_processing_value(name, d[name])
        except ValueError as exc:
            return self.fail(f"processing.{name}", str(exc))

    def choice(self, d, name, key, choices, default):
        v = d.get(name, default)
        if v not in choices:
            return self.fail(key, f"expected one of {', '.join(choices)}, found {v!r}")
        return v

    def instant(self, d, name, key, required=True):
        """TOML datetime/date (or ISO text) read as UTC -> UTC calendar-count ns."""
        if name not in d:
            if required:
                return self.fail(key, "missing; expected a TOML datetime or date (UTC)")
            return None
        v = d[name]
        try:
            return _instant_ns(v)
        except (TypeError, ValueError) as exc:
            return self.fail(key, f"expected a TOML datetime or date in UTC, found {v!r} ({exc})")


def _instant_ns(v) -> int:
    if isinstance(v, _dt.datetime):
        if v.tzinfo is not None:
            v = v.astimezone(_dt.timezone.utc).replace(tzinfo=None)
        return int(civil_to_ns(v.year, v.month, v.day, v.hour, v.minute, v.second,
                               v.microsecond * 1000))
    if isinstance(v, _dt.date):
        return int(civil_to_ns(v.year, v.month, v.day))
    if isinstance(v, str):
        return parse_iso(v)
    raise TypeError("not a datetime")


def _read_toml(path, reader: _Reader):
    try:
        raw = pathlib.Path(path).read_bytes()
    except FileNotFoundError:
        raise ConfigError(path, None, "file not found") from None
    except OSError as exc:
        raise ConfigError(path, None, f"cannot read: {exc}") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise ConfigError(path, None, f"expected UTF-8 text ({exc})") from None
    except tomllib.TOMLDecodeError as exc:
        # tomllib's message carries "(at line N, column M)"
        raise ConfigError(path, None, f"expected valid TOML: {exc}") from None
    return raw, data


def _canonical(obj) -> Any:
    """Parsed TOML -> JSON-serialisable form with stable ordering (for hashes)."""
    if isinstance(obj, dict):
        return {k: _canonical(obj[k]) for k in sorted(obj)}
    if isinstance(obj, list):
        return [_canonical(v) for v in obj]
    if isinstance(obj, (_dt.datetime, _dt.date, _dt.time)):
        if isinstance(obj, (_dt.datetime, _dt.date)) and not isinstance(obj, _dt.time):
            try:
                return to_iso(_instant_ns(obj), 9)
            except (TypeError, ValueError):
                pass
        return obj.isoformat()
    if isinstance(obj, float) and obj.is_integer():
        return obj  # json keeps 1.0 as 1.0
    return obj


def _content_sha256(data) -> str:
    text = json.dumps(_canonical(data), sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode()).hexdigest()


# ---------------------------------------------------------------- dataclasses

@dataclass(frozen=True, eq=False)
class Antenna:
    """Antenna type, radome and the marker-to-ARP eccentricity (up, east, north) in metres.

    ``type`` as written in the station file; ``radome`` the 4-character radome
    code ('NONE' when the type is given without one). :attr:`antex_name` is
    the 20-character name under which ANTEX files list the calibration
    (type in columns 1-16, radome in 17-20).
    """

    type: str
    delta_hen_m: np.ndarray  # (3,) up, east, north
    radome: str = ""

    @property
    def antex_name(self) -> str:
        """'TYPE' left-justified to 16 characters + radome (ANTEX 1.4 / IGS antenna names)."""
        if not self.type.strip():
            return ""
        return f"{self.type.split()[0]:<16}{(self.radome or 'NONE'):>4}"


@dataclass(frozen=True)
class DelaySet:
    """One calibration set, valid for ``valid_from_ns <= t < valid_until_ns`` (UTC ns).

    ``hardware_ns(code) = receiver_ns[code] + cable_ns - reference_ns`` is what is
    subtracted from a raw "local clock minus GNSS time" (see the module docstring).
    """

    valid_from_ns: int
    valid_until_ns: int | None
    receiver_ns: Mapping[str, float]
    u_receiver_ns: Mapping[str, float]
    cable_ns: float
    u_cable_ns: float
    reference_ns: float
    u_reference_ns: float
    note: str = ""
    source: str = field(default="", compare=False)  # file it came from (for messages)
    index: int = field(default=0, compare=False)    # 1-based position among the file's [[delays]]
    #: correlation coefficient of the receiver-delay errors of different codes (1: fully
    #: correlated, the default: the codes are calibrated together against one reference)
    receiver_correlation: float = 1.0
    #: calibrated combinations: frozenset of codes -> (delay ns, u ns), e.g. the iono-free P3
    combined_ns: Mapping = field(default_factory=dict)

    def _combined(self, coefficients):
        return self.combined_ns.get(frozenset(coefficients)) if self.combined_ns else None

    def covers(self, time_utc_ns: int) -> bool:
        return self.valid_from_ns <= time_utc_ns and (
            self.valid_until_ns is None or time_utc_ns < self.valid_until_ns)

    def _code(self, code: str) -> float:
        try:
            return self.receiver_ns[code]
        except KeyError:
            raise ConfigError(self.source, f"delays[{self.index}].receiver_ns.{code}",
                              f"no receiver delay for {code}; the set has "
                              f"{', '.join(sorted(self.receiver_ns)) or 'none'}") from None

    def hardware_ns(self, code: str) -> float:
        """receiver(code) + cable - reference, ns (subtract from the raw value)."""
        return self._code(code) + self.cable_ns - self.reference_ns

    def u_hardware_ns(self, code: str) -> float:
        """Standard uncertainty of :meth:`hardware_ns`: the three terms in quadrature (independent)."""
        self._code(code)
        return math.sqrt(self.u_receiver_ns[code] ** 2 + self.u_cable_ns ** 2 + self.u_reference_ns ** 2)

    def hardware_combined_ns(self, coefficients: Mapping[str, float]) -> float:
        """Hardware delay of a linear code combination sum(c_i * P_i) with sum(c_i) = 1.

        E.g. iono-free ``{"C1W": f1²/(f1²-f2²), "C2W": -f2²/(f1²-f2²)}``. The cable and
        reference terms are common to all codes and pass through with weight sum(c_i) = 1.
        """
        s = sum(coefficients.values())
        if abs(s - 1.0) > 1e-9:
            raise ValueError(f"combination coefficients must sum to 1, got {s}")
        comb = self._combined(coefficients)
        if comb is not None:       # the station file gives this combination's calibrated delay
            return comb[0] + self.cable_ns - self.reference_ns
        return sum(c * self._code(k) for k, c in coefficients.items()) + self.cable_ns - self.reference_ns

    def u_hardware_combined_ns(self, coefficients: Mapping[str, float]) -> float:
        """Uncertainty of :meth:`hardware_combined_ns` (GUM law of propagation with correlation).

        A calibrated combination (``combined_ns``) brings its own u. Otherwise the codes'
        receiver terms combine as ``Σᵢ Σⱼ cᵢ cⱼ r_ij uᵢ uⱼ`` with r_ii = 1 and r_ij =
        ``receiver_correlation`` (GUM, JCGM 100:2008 eq. 16). Fully correlated (the default)
        with equal u per code, the iono-free receiver term is u·|Σcᵢ| = u (1.5 ns stays
        1.5 ns); independent (0) it is u·√Σcᵢ² (×2.98 for GPS L1/L2). Cable and reference
        pass through (weight Σcᵢ = 1).
        """
        comb = self._combined(coefficients)
        if comb is not None:
            return math.sqrt(comb[1] ** 2 + self.u_cable_ns ** 2 + self.u_reference_ns ** 2)
        for k in coefficients:
            self._code(k)
        v = np.array([c * self.u_receiver_ns[k] for k, c in coefficients.items()], dtype=float)
        r = np.full((len(v), len(v)), float(self.receiver_correlation))
        np.fill_diagonal(r, 1.0)
        var = float(v @ r @ v)
        return math.sqrt(max(var, 0.0) + self.u_cable_ns ** 2 + self.u_reference_ns ** 2)


@dataclass(frozen=True)
class HardwareChange:
    time_utc_ns: int
    what: str
    expected_delay_change_ns: float | None = None


@dataclass(frozen=True, eq=False)
class StationConfig:
    """A validated station file. ``position_m`` is as written (marker or ARP); see :attr:`arp_m`."""

    id: str
    name: str
    position_m: np.ndarray          # (3,) ECEF metres
    position_sigma_m: np.ndarray    # (3,) 1-sigma per ECEF axis
    frame: str
    epoch: float
    is_marker: bool
    antenna: Antenna
    elevation_mask_deg: float
    met_pattern: str | None
    delay_sets: tuple[DelaySet, ...]
    changes: tuple[HardwareChange, ...]
    path: pathlib.Path | None
    sha256: str                     # SHA-256 of the file's bytes
    content_sha256: str = ""        # SHA-256 of dump_station(self): the normalised content
    marker_names: tuple[str, ...] = ()  # other names the station's data files use for it

    @property
    def arp_m(self) -> np.ndarray:
        """Antenna reference point, ECEF m: position plus the (up, east, north) delta if a marker."""
        if not self.is_marker:
            return self.position_m.copy()
        from .geodesy import antenna_reference_point

        h, e, n = (float(v) for v in self.antenna.delta_hen_m)
        return antenna_reference_point(self.position_m, h, e, n)

    def delays_at(self, time_utc_ns) -> DelaySet:
        """The delay set covering the UTC instant; ConfigError naming the file if none does."""
        t = int(time_utc_ns)
        for ds in self.delay_sets:
            if ds.covers(t):
                return ds
        spans = "; ".join(f"{to_iso(d.valid_from_ns)}..{'open' if d.valid_until_ns is None else to_iso(d.valid_until_ns)}"
                          for d in self.delay_sets)
        raise ConfigError(self.path, "delays",
                          f"no delay set covers {to_iso(t, 3)} (sets: {spans or 'none'})")

    def delay_sets_between(self, t0_ns: int, t1_ns: int) -> tuple[DelaySet, ...]:
        """Sets covering [t0, t1); ConfigError if any instant in it is uncovered."""
        out = []
        t = int(t0_ns)
        while t < t1_ns:
            ds = self.delays_at(t)
            out.append(ds)
            if ds.valid_until_ns is None:
                break
            t = ds.valid_until_ns
        return tuple(out)

    def changes_between(self, t0_ns: int, t1_ns: int) -> tuple[HardwareChange, ...]:
        return tuple(c for c in self.changes if t0_ns <= c.time_utc_ns < t1_ns)


# ---------------------------------------------------------------- data files against station files

#: A data file's approximate position farther than this from its station file's is refused (m) ...
INPUT_POSITION_REFUSE_M = 1000.0
#: ... and farther than this draws a warning (m): RINEX headers are approximate.
INPUT_POSITION_WARN_M = 100.0


def names_match(station: StationConfig, name: str) -> bool:
    """A data file's station name belongs to the station: its first four characters are the
    id's (case-insensitive; RINEX 2 names files and markers by four characters, common
    practice), or it is one of the station file's ``marker_names``."""
    n = (name or "").strip().upper()
    if not n:
        return False
    return n[:4] == station.id[:4].upper() or n in {m.strip().upper() for m in station.marker_names}


def check_station_data(station: StationConfig, data_file, name: str, position_m, *,
                       what: str = "MARKER NAME", force: bool = False) -> list[str]:
    """Check that a data file belongs to a station file: name and approximate position.

    ``name`` is the file's station name (RINEX ``MARKER NAME``, CGGTTS ``LAB``) and
    ``position_m`` its approximate ECEF position (RINEX ``APPROX POSITION XYZ``,
    CGGTTS ``X/Y/Z``; NaN or zero when the file has none). The name must satisfy
    :func:`names_match`; the position must lie within ``INPUT_POSITION_REFUSE_M`` of
    the station file's (a warning above ``INPUT_POSITION_WARN_M``). A mismatch raises
    :class:`ctt.errors.UsageError` naming both files and the two names or the
    distance, unless ``force`` (then it is returned as a warning). Returns the
    warnings (the caller logs and records them)."""
    from .errors import UsageError

    warnings_out, problems = [], []
    shown = (name or "").strip()
    if not shown:
        warnings_out.append(f"{data_file}: no {what}; cannot check that it belongs to {station.id} ({station.path})")
    elif not names_match(station, shown):
        also = f" or any of its marker_names {list(station.marker_names)}" if station.marker_names else ""
        problems.append(f"{data_file}: {what} {shown!r} does not match station {station.id!r} of {station.path}"
                        f"{also}")
    pos = np.asarray(position_m, dtype=float) if position_m is not None else np.full(3, np.nan)
    if pos.shape != (3,) or not np.all(np.isfinite(pos)) or float(np.linalg.norm(pos)) < 1.0:
        warnings_out.append(f"{data_file}: no approximate position; its distance from {station.id} "
                            f"({station.path}) is not checked")
    else:
        d = float(np.linalg.norm(pos - np.asarray(station.position_m, dtype=float)))
        if d > INPUT_POSITION_REFUSE_M:
            problems.append(f"{data_file}: approximate position is {d / 1000:.1f} km from the position of "
                            f"{station.id} in {station.path} (more than {INPUT_POSITION_REFUSE_M / 1000:g} km)")
        elif d > INPUT_POSITION_WARN_M:
            warnings_out.append(f"{data_file}: approximate position is {d:.0f} m from the position of "
                                f"{station.id} in {station.path} (more than {INPUT_POSITION_WARN_M:g} m; headers "
                                "are approximate, but check the coordinates)")
    if problems:
        if not force:
            raise UsageError("; ".join(problems) + " (the files do not belong together; "
                             "--force-inputs processes them anyway)")
        warnings_out.extend(p + " (processed anyway: --force-inputs)" for p in problems)
    return warnings_out


def check_distinct_stations(station_a: StationConfig, station_b: StationConfig) -> None:
    """Refuse the same station as A and B (same id, or the same coordinates within 1 mm)."""
    from .errors import UsageError

    if station_a.id.upper() == station_b.id.upper():
        raise UsageError(f"station A ({station_a.path}) and station B ({station_b.path}) are the same station "
                         f"{station_a.id!r}; a pair needs two stations")
    if float(np.linalg.norm(np.asarray(station_a.position_m) - np.asarray(station_b.position_m))) < 1e-3:
        raise UsageError(f"station A {station_a.id} ({station_a.path}) and station B {station_b.id} "
                         f"({station_b.path}) have the same coordinates; a pair needs two stations")


# ---------------------------------------------------------------- patterns

_PATTERN_FIELDS = ("station", "station_lower", "STATION", "id", "ID", "yyyy", "yy", "mm", "dd",
                   "doy", "ddd", "gpsweek", "gpsdow", "session")
_DATE_FIELDS = ("yyyy", "yy", "mm", "dd", "doy", "ddd", "gpsweek", "gpsdow")


def pattern_fields(station_id: str, date) -> dict:
    """Placeholder values for a station and a UTC date (``datetime.date`` or 'YYYY-MM-DD')."""
    d = _as_date(date)
    ns = date_to_ns(d)
    week, sow = gps_week_sow(ns)
    doy = d.timetuple().tm_yday
    sid = station_id or "XXXX"
    return {
        "station": sid[:4].lower(), "station_lower": sid[:4].lower(), "STATION": sid[:4].upper(),
        "id": sid, "ID": sid.upper(), "yyyy": d.year, "yy": d.year % 100, "mm": d.month,
        "dd": d.day, "doy": doy, "ddd": f"{doy:03d}", "gpsweek": int(week),
        "gpsdow": int(sow // 86400), "session": "0",
    }


#: A placeholder with a day offset: ``{doy-1}``, ``{gpsweek+1}`` (1 to 9 days; see the module docstring).
_DAY_OFFSET_RE = re.compile(r"^(\w+?)([+-][1-9])$")
#: Input kinds whose patterns may carry a day offset (several files merged into one product).
DAY_OFFSET_KINDS = ("sp3", "clk", "erp")


def _split_offset(name: str) -> tuple[str, int]:
    m = _DAY_OFFSET_RE.match(name)
    return (m.group(1), int(m.group(2))) if m else (name, 0)


def pattern_day_offset(pattern: str) -> int:
    """The day offset of a pattern (0 without one); ValueError if its placeholders disagree."""
    fields = [_split_offset(f) for _, f, _, _ in string.Formatter().parse(pattern) if f is not None]
    offs = {off for base, off in fields if base in _DATE_FIELDS}
    if len(offs) > 1:
        raise ValueError(f"its date placeholders carry different day offsets ({sorted(offs)}); "
                         "one pattern names one day's file")
    return offs.pop() if offs else 0


def format_pattern(pattern: str, station_id: str, date) -> str:
    """The file name of ``pattern`` for a station and a UTC date (day offsets applied)."""
    fields = pattern_fields(station_id, date)
    for _, f, _, _ in string.Formatter().parse(pattern):
        if f is None:
            continue
        base, off = _split_offset(f)
        if off and base in fields:
            fields[f] = pattern_fields(station_id, _as_date(date) + _dt.timedelta(days=off))[base]
    return pattern.format(**fields)


#: What may follow a placeholder's ':' in a pattern: an optional '0' fill, a width of at most
#: two digits and an optional 'd' (``{doy:03d}``, ``{yy:02d}``, ``{ddd:3}``); a bounded width
#: keeps a pattern from asking for gigabytes of padding.
_SPEC_RE = re.compile(r"^0?[1-9]?[0-9]?d?$")


def pattern_problem(pattern) -> str | None:
    """Why ``pattern`` is not a valid file-name pattern, or None.

    Only the documented placeholders, by their bare names: no attribute or index
    access (``{station.__class__}``, ``{id[0]}``), no conversion (``{id!r}``), a
    format spec of at most a '0' fill, a two-digit width and 'd'.
    """
    if not isinstance(pattern, str) or not pattern:
        return f"expected a file-name pattern (a non-empty string), found {pattern!r}"
    try:
        fields = [(f, spec, conv) for _, f, spec, conv in string.Formatter().parse(pattern) if f is not None]
    except ValueError as exc:
        return f"expected a valid pattern ({exc}), found {pattern!r}"
    allowed = ", ".join("{" + p + "}" for p in _PATTERN_FIELDS)
    for f, spec, conv in fields:
        base, off = _split_offset(f)
        if off and base in _DATE_FIELDS:
            f = base
        elif off:
            return (f"placeholder {{{f}}}: a day offset applies to date placeholders only "
                    f"({', '.join('{' + p + '}' for p in _DATE_FIELDS)})")
        if f not in _PATTERN_FIELDS:
            return f"unknown placeholder {{{f}}} (only the bare names are allowed); expected one of {allowed}"
        if conv:
            return f"placeholder {{{f}!{conv}}}: conversions are not allowed, found {pattern!r}"
        if not _SPEC_RE.match(spec or ""):
            return (f"placeholder {{{f}:{spec}}}: expected a format such as :03d (a '0', a width up to 99, "
                    f"a 'd'), found {pattern!r}")
    try:
        pattern_day_offset(pattern)
    except ValueError as exc:
        return f"{exc}, found {pattern!r}"
    try:
        format_pattern(pattern, "LABA", "2021-01-01")
    except (ValueError, KeyError, IndexError) as exc:
        return f"pattern cannot be formatted ({exc}), found {pattern!r}"
    return None


def _check_pattern(reader: _Reader, pattern, key) -> bool:
    problem = pattern_problem(pattern)
    if problem:
        reader.fail(key, problem)
        return False
    return True


def _as_date(date) -> _dt.date:
    if isinstance(date, _dt.datetime):
        return date.date()
    if isinstance(date, _dt.date):
        return date
    return _dt.date.fromisoformat(str(date))


# ---------------------------------------------------------------- station files

_STATION_KEYS = {"id", "name", "elevation_mask_deg", "position", "antenna", "met", "marker_names"}
_POSITION_KEYS = {"x_m", "y_m", "z_m", "sigma_m", "sigma_x_m", "sigma_y_m", "sigma_z_m", "frame",
                  "epoch", "is_marker"}
_ANTENNA_KEYS = {"type", "radome", "delta_h_m", "delta_e_m", "delta_n_m"}
_DELAY_KEYS = {"valid_from", "valid_until", "receiver_ns", "u_receiver_ns", "cable_ns", "u_cable_ns",
               "receiver_correlation", "combined_ns", "u_combined_ns",
               "reference_ns", "u_reference_ns", "note"}
_CHANGE_KEYS = {"time", "what", "expected_delay_change_ns"}


def load_station(path) -> StationConfig:
    """Read and validate a station file (schema in the module docstring)."""
    path = pathlib.Path(path)
    r = _Reader(path)
    raw, data = _read_toml(path, r)
    r.unknown(data, {"station", "delays", "changes"}, "")
    st = r.table(data, "station", "station") or {}
    r.unknown(st, _STATION_KEYS, "station")

    sid = r.text(st, "id", "station.id", "a station id of 4-9 letters/digits")
    if sid is not None and not _ID_RE.match(sid):
        r.fail("station.id", f"expected 4-9 letters/digits, found {sid!r}")
    name = r.text(st, "name", "station.name", "a descriptive name", required=False, default="")
    mask = r.number(st, "elevation_mask_deg", "station.elevation_mask_deg", "an angle in degrees",
                    required=False, default=10.0, lo=0.0, hi=90.0)
    marker_names = st.get("marker_names", [])
    if not isinstance(marker_names, list) or any(not isinstance(m, str) or not m.strip() for m in marker_names):
        r.fail("station.marker_names", f"expected a list of names, e.g. [\"DELFT-16\"], found {marker_names!r}")
        marker_names = []

    pos = r.table(st, "position", "station.position") or {}
    r.unknown(pos, _POSITION_KEYS, "station.position")
    xyz = [r.number(pos, k, f"station.position.{k}", "an ECEF coordinate in metres") for k in ("x_m", "y_m", "z_m")]
    position = None
    if all(v is not None for v in xyz):
        position = np.array(xyz, dtype=float)
        rad = float(np.linalg.norm(position))
        if not (R_MIN_M <= rad <= R_MAX_M):
            r.fail("station.position", f"expected a geocentric radius between {R_MIN_M:.3g} and "
                   f"{R_MAX_M:.3g} m (on the Earth's surface), found {rad:.1f} m")
    per_axis = [k for k in ("sigma_x_m", "sigma_y_m", "sigma_z_m") if k in pos]
    sigma = None
    if "sigma_m" in pos and per_axis:
        r.fail("station.position.sigma_m", "give either sigma_m or sigma_x_m/sigma_y_m/sigma_z_m, not both")
    elif "sigma_m" in pos:
        s = r.number(pos, "sigma_m", "station.position.sigma_m", "a 1-sigma uncertainty in metres", lo=0.0)
        sigma = None if s is None else np.full(3, s)
    elif per_axis:
        ss = [r.number(pos, k, f"station.position.{k}", "a 1-sigma uncertainty in metres", lo=0.0)
              for k in ("sigma_x_m", "sigma_y_m", "sigma_z_m")]
        sigma = np.array(ss, dtype=float) if all(v is not None for v in ss) else None
    else:
        r.fail("station.position.sigma_m", "missing; expected sigma_m or sigma_x_m/sigma_y_m/sigma_z_m in metres")
    frame = r.text(pos, "frame", "station.position.frame", "a reference frame name", required=False, default="")
    epoch = r.number(pos, "epoch", "station.position.epoch", "a decimal year", required=False,
                     default=float("nan"), lo=1980.0, hi=2100.0)
    is_marker = r.boolean(pos, "is_marker", "station.position.is_marker", default=False)

    ant = r.table(st, "antenna", "station.antenna", required=False) or {}
    r.unknown(ant, _ANTENNA_KEYS, "station.antenna")
    ant_type = r.text(ant, "type", "station.antenna.type", "an antenna type", required=False, default="")
    hen = [r.number(ant, k, f"station.antenna.{k}", "an eccentricity in metres", required=False,
                    default=0.0, lo=-100.0, hi=100.0) for k in ("delta_h_m", "delta_e_m", "delta_n_m")]
    # the type as ANTEX spells it (up to 16 characters: 'ASH701945B_M'), or type and radome separated by
    # blanks, as in the 20-character ANTEX name ('ASH701945B_M    NONE'); 'radome' may say it apart
    ant_type = ant_type or ""
    radome = r.text(ant, "radome", "station.antenna.radome", "a 4-character radome code such as NONE or SCIS",
                    required=False, default="")
    words = ant_type.split()
    embedded = words[1] if len(words) == 2 else ""
    if len(words) > 2 or (words and len(words[0]) > 16) or (embedded and len(embedded) != 4):
        r.fail("station.antenna.type", "expected an antenna type of up to 16 characters, optionally followed "
               f"by blanks and a 4-character radome (as ANTEX spells them), found {ant_type!r}")
    if radome and (len(radome) != 4 or not radome.isprintable() or " " in radome):
        r.fail("station.antenna.radome", f"expected a 4-character radome code such as NONE, found {radome!r}")
    elif radome and embedded and radome != embedded:
        r.fail("station.antenna.radome", f"expected the radome written in the type ({embedded!r}), found {radome!r}")
    radome = radome or embedded or ("NONE" if ant_type.strip() else "")
    antenna = Antenna(ant_type, np.array([v if v is not None else 0.0 for v in hen]), radome)

    met = r.table(st, "met", "station.met", required=False) or {}
    r.unknown(met, {"pattern"}, "station.met")
    met_pattern = r.text(met, "pattern", "station.met.pattern", "a file-name pattern", required=False)
    if met_pattern is not None:
        _check_pattern(r, met_pattern, "station.met.pattern")

    delay_sets = _read_delays(r, data.get("delays"), path)
    changes = _read_changes(r, data.get("changes"))
    r.raise_if_any()
    for arr in (position, sigma, antenna.delta_hen_m):
        arr.setflags(write=False)  # frozen really frozen: no in-place edits of a loaded station
    cfg = StationConfig(
        id=sid, name=name, position_m=position, position_sigma_m=sigma, frame=frame, epoch=epoch,
        is_marker=is_marker, antenna=antenna, elevation_mask_deg=mask, met_pattern=met_pattern,
        delay_sets=delay_sets, changes=changes, path=path, sha256=hashlib.sha256(raw).hexdigest(),
        marker_names=tuple(m.strip() for m in marker_names))
    # normalised content = the canonical text this module writes (formatting, comments,
    # defaults written or not, date vs midnight datetime: none of them change it)
    return dataclasses.replace(cfg, content_sha256=hashlib.sha256(dump_station(cfg).encode()).hexdigest())


def _read_delays(r: _Reader, items, path) -> tuple[DelaySet, ...]:
    if items is None:
        r.fail("delays", "missing; expected at least one [[delays]] table")
        return ()
    if not isinstance(items, list) or not all(isinstance(x, dict) for x in items):
        r.fail("delays", "expected an array of tables [[delays]]")
        return ()
    if not items:
        r.fail("delays", "expected at least one [[delays]] table")
    out = []
    for i, d in enumerate(items, start=1):
        k = f"delays[{i}]"
        r.unknown(d, _DELAY_KEYS, k)
        t0 = r.instant(d, "valid_from", f"{k}.valid_from")
        t1 = r.instant(d, "valid_until", f"{k}.valid_until", required=False)
        if t0 is not None and t1 is not None and t1 <= t0:
            r.fail(f"{k}.valid_until", f"expected a time after valid_from ({to_iso(t0)}), found {to_iso(t1)}")
        rec_raw = r.table(d, "receiver_ns", f"{k}.receiver_ns")
        rec = {}
        if rec_raw is not None:
            if not rec_raw:
                r.fail(f"{k}.receiver_ns", "expected at least one code, e.g. { C1C = 25.1 }")
            for code, v in rec_raw.items():
                if not _CODE_RE.match(code):
                    r.fail(f"{k}.receiver_ns.{code}", "expected a RINEX 3 observation code such as C1C")
                    continue
                x = r.number(rec_raw, code, f"{k}.receiver_ns.{code}", "a delay in ns")
                if x is not None:
                    rec[code] = x
        urec = {}
        u = d.get("u_receiver_ns")
        if u is None:
            r.fail(f"{k}.u_receiver_ns", "missing; expected an uncertainty in ns (a number or a table per code)")
        elif isinstance(u, dict):
            for code in rec:
                if code not in u:
                    r.fail(f"{k}.u_receiver_ns.{code}", "missing; every code of receiver_ns needs an uncertainty")
                    continue
                x = r.number(u, code, f"{k}.u_receiver_ns.{code}", "an uncertainty in ns", lo=0.0)
                if x is not None:
                    urec[code] = x
            for code in u:
                if code not in rec:
                    r.fail(f"{k}.u_receiver_ns.{code}", "code not in receiver_ns")
        else:
            x = r.number(d, "u_receiver_ns", f"{k}.u_receiver_ns", "an uncertainty in ns", lo=0.0)
            if x is not None:
                urec = {c: x for c in rec}
        vals = {}
        for name, what, lo in (("cable_ns", "a delay in ns", None), ("u_cable_ns", "an uncertainty in ns", 0.0),
                               ("reference_ns", "a delay in ns", None),
                               ("u_reference_ns", "an uncertainty in ns", 0.0)):
            vals[name] = r.number(d, name, f"{k}.{name}", what, lo=lo)
        note = r.text(d, "note", f"{k}.note", "a note", required=False, default="")
        rho = 1.0
        if "receiver_correlation" in d:
            rho = r.number(d, "receiver_correlation", f"{k}.receiver_correlation",
                           "a correlation coefficient from 0 to 1", lo=0.0)
            if rho is not None and rho > 1.0:
                r.fail(f"{k}.receiver_correlation", f"expected a correlation coefficient from 0 to 1, found {rho}")
                rho = None
        combined = {}
        craw = d.get("combined_ns")
        if craw is not None:
            ucomb = d.get("u_combined_ns")
            if not isinstance(craw, dict) or not craw:
                r.fail(f"{k}.combined_ns", 'expected a table such as { "C1W+C2W" = 22.4 }')
            elif ucomb is None:
                r.fail(f"{k}.u_combined_ns", "missing; a calibrated combination needs its uncertainty in ns")
            else:
                for name in craw:
                    codes = [c.strip() for c in str(name).split("+")]
                    if len(codes) < 2 or not all(_CODE_RE.match(c) for c in codes):
                        r.fail(f"{k}.combined_ns.{name}", "expected RINEX 3 codes joined by '+', e.g. C1W+C2W")
                        continue
                    val = r.number(craw, name, f"{k}.combined_ns.{name}", "a delay in ns")
                    if isinstance(ucomb, dict):
                        uu = r.number(ucomb, name, f"{k}.u_combined_ns.{name}", "an uncertainty in ns", lo=0.0)
                    else:
                        uu = r.number(d, "u_combined_ns", f"{k}.u_combined_ns", "an uncertainty in ns", lo=0.0)
                    if val is not None and uu is not None:
                        combined[frozenset(codes)] = (val, uu)
        elif d.get("u_combined_ns") is not None:
            r.fail(f"{k}.u_combined_ns", "given without combined_ns")
        if t0 is None or any(v is None for v in vals.values()) or len(urec) != len(rec) or rho is None:
            continue
        out.append(DelaySet(t0, t1, types.MappingProxyType(rec), types.MappingProxyType(urec),
                            vals["cable_ns"], vals["u_cable_ns"], vals["reference_ns"],
                            vals["u_reference_ns"], note, str(path), i, float(rho),
                            types.MappingProxyType(combined)))
    out.sort(key=lambda s: s.valid_from_ns)
    for a, b in zip(out, out[1:]):
        if a.valid_until_ns is None or a.valid_until_ns > b.valid_from_ns:
            r.fail(f"delays[{b.index}].valid_from",
                   f"delay sets overlap: delays[{a.index}] is valid until "
                   f"{'open end' if a.valid_until_ns is None else to_iso(a.valid_until_ns)}, "
                   f"expected delays[{b.index}] to start at or after that, found {to_iso(b.valid_from_ns)}")
    return tuple(out)


def _read_changes(r: _Reader, items) -> tuple[HardwareChange, ...]:
    if items is None:
        return ()
    if not isinstance(items, list) or not all(isinstance(x, dict) for x in items):
        r.fail("changes", "expected an array of tables [[changes]]")
        return ()
    out = []
    for i, d in enumerate(items, start=1):
        k = f"changes[{i}]"
        r.unknown(d, _CHANGE_KEYS, k)
        t = r.instant(d, "time", f"{k}.time")
        what = r.text(d, "what", f"{k}.what", "a description of the change")
        exp = r.number(d, "expected_delay_change_ns", f"{k}.expected_delay_change_ns", "a delay change in ns",
                       required=False)
        if t is not None and what is not None:
            out.append(HardwareChange(t, what, exp))
    return tuple(sorted(out, key=lambda c: c.time_utc_ns))


# ---------------------------------------------------------------- TOML writing

def _toml_str(s: str) -> str:
    return json.dumps(s, ensure_ascii=False)  # JSON string escapes are valid TOML basic-string escapes


def _toml_float(x: float) -> str:
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"cannot write non-finite number {x!r}")
    return repr(x)


def _toml_time(ns: int) -> str:
    text = to_iso(int(ns), 9)
    head, frac = text[:-1].split(".")
    frac = frac.rstrip("0")
    return f"{head}.{frac}Z" if frac else f"{head}Z"


def _toml_code_table(d: Mapping[str, float]) -> str:
    return "{ " + ", ".join(f"{k} = {_toml_float(v)}" for k, v in d.items()) + " }"


def dump_station(cfg: StationConfig) -> str:
    """TOML text of a station file that :func:`load_station` reads back to the same values."""
    lines = ["[station]", f"id = {_toml_str(cfg.id)}", f"name = {_toml_str(cfg.name)}",
             f"elevation_mask_deg = {_toml_float(cfg.elevation_mask_deg)}"]
    if cfg.marker_names:
        lines.append("marker_names = [" + ", ".join(_toml_str(m) for m in cfg.marker_names) + "]")
    lines += ["", "[station.position]"]
    for k, v in zip(("x_m", "y_m", "z_m"), cfg.position_m):
        lines.append(f"{k} = {_toml_float(v)}")
    sig = np.asarray(cfg.position_sigma_m, dtype=float)
    if np.all(sig == sig[0]):
        lines.append(f"sigma_m = {_toml_float(sig[0])}")
    else:
        for k, v in zip(("sigma_x_m", "sigma_y_m", "sigma_z_m"), sig):
            lines.append(f"{k} = {_toml_float(v)}")
    if cfg.frame:
        lines.append(f"frame = {_toml_str(cfg.frame)}")
    if cfg.epoch is not None and math.isfinite(cfg.epoch):
        lines.append(f"epoch = {_toml_float(cfg.epoch)}")
    lines.append(f"is_marker = {'true' if cfg.is_marker else 'false'}")
    lines += ["", "[station.antenna]", f"type = {_toml_str(cfg.antenna.type)}"]
    if cfg.antenna.radome and len(cfg.antenna.type.split()) == 1:
        lines.append(f"radome = {_toml_str(cfg.antenna.radome)}")
    for k, v in zip(("delta_h_m", "delta_e_m", "delta_n_m"), cfg.antenna.delta_hen_m):
        lines.append(f"{k} = {_toml_float(v)}")
    if cfg.met_pattern is not None:
        lines += ["", "[station.met]", f"pattern = {_toml_str(cfg.met_pattern)}"]
    for ds in cfg.delay_sets:
        lines += ["", "[[delays]]", f"valid_from = {_toml_time(ds.valid_from_ns)}"]
        if ds.valid_until_ns is not None:
            lines.append(f"valid_until = {_toml_time(ds.valid_until_ns)}")
        lines.append(f"receiver_ns = {_toml_code_table(ds.receiver_ns)}")
        u = list(ds.u_receiver_ns.values())
        if u and all(x == u[0] for x in u):
            lines.append(f"u_receiver_ns = {_toml_float(u[0])}")
        else:
            lines.append(f"u_receiver_ns = {_toml_code_table(ds.u_receiver_ns)}")
        if ds.receiver_correlation != 1.0:
            lines.append(f"receiver_correlation = {_toml_float(ds.receiver_correlation)}")
        if ds.combined_ns:
            names = {"+".join(sorted(k)): v for k, v in ds.combined_ns.items()}
            lines.append("combined_ns = { " + ", ".join(f'"{n}" = {_toml_float(v[0])}' for n, v in names.items())
                         + " }")
            lines.append("u_combined_ns = { " + ", ".join(f'"{n}" = {_toml_float(v[1])}'
                                                          for n, v in names.items()) + " }")
        for k in ("cable_ns", "u_cable_ns", "reference_ns", "u_reference_ns"):
            lines.append(f"{k} = {_toml_float(getattr(ds, k))}")
        if ds.note:
            lines.append(f"note = {_toml_str(ds.note)}")
    for ch in cfg.changes:
        lines += ["", "[[changes]]", f"time = {_toml_time(ch.time_utc_ns)}", f"what = {_toml_str(ch.what)}"]
        if ch.expected_delay_change_ns is not None:
            lines.append(f"expected_delay_change_ns = {_toml_float(ch.expected_delay_change_ns)}")
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------- pair files

@dataclass(frozen=True)
class Processing:
    mode: str = "tracks"
    signals: str = "iono-free"
    systems: tuple[str, ...] = ("G",)
    codes: tuple[str, ...] = ()
    orbits: str = "auto"
    bin_s: float = 30.0
    elevation_mask_deg: float | None = None
    min_common_sats: int = 2
    mad_k: float = 3.5
    weights: str = "sin2el"
    smoothing_s: float = 0.0
    no_troposphere: bool = False
    no_ionosphere: bool = False
    no_tide: bool = False
    no_sagnac: bool = False
    no_relativity: bool = False
    bias: str | None = None      #: 'estimate': satellite code biases fitted on each day's residuals
    glonass_ifb: str = "estimate"  #: GLONASS per-channel code biases in CV: 'estimate' or 'none' (ctt.commonview)


_SWITCHES = ("no_troposphere", "no_ionosphere", "no_tide", "no_sagnac", "no_relativity")


@dataclass(frozen=True, eq=False)
class PairConfig:
    """A validated pair file with both station files loaded.

    ``patterns[kind]`` are the shared patterns (tuples of alternatives);
    ``station_patterns['a'|'b'][kind]`` the per-station ones (obs, met),
    falling back to the shared ones and, for met, to the station file's pattern.
    """

    path: pathlib.Path
    name: str
    station_a: StationConfig
    station_b: StationConfig
    data_root: pathlib.Path
    patterns: Mapping[str, tuple[str, ...]]
    station_patterns: Mapping[str, Mapping[str, tuple[str, ...]]]
    optional: frozenset
    processing: Processing
    output_dir: pathlib.Path
    archive_path: pathlib.Path
    report_path: pathlib.Path
    output_root: pathlib.Path   #: every output lies inside it: [output] root, else the pair file's folder
    max_gap_s: float
    config_hash: str   # SHA-256 of the normalised processing options and both stations' content
    sha256: str        # SHA-256 of the pair file's bytes

    def stations(self) -> tuple[StationConfig, StationConfig]:
        return self.station_a, self.station_b

    def elevation_mask_deg(self) -> float:
        if self.processing.elevation_mask_deg is not None:
            return self.processing.elevation_mask_deg
        return max(self.station_a.elevation_mask_deg, self.station_b.elevation_mask_deg)

    def patterns_for(self, kind: str, which: str | None = None) -> tuple[str, ...]:
        if which is not None:
            own = self.station_patterns.get(which, {}).get(kind)
            if own:
                return own
        shared = self.patterns.get(kind, ())
        if shared:
            return shared
        if kind == "met" and which is not None:
            st = self.station_a if which == "a" else self.station_b
            if st.met_pattern:
                return (st.met_pattern,)
        return ()

    def _inside_root(self, p: pathlib.Path, key: str) -> pathlib.Path:
        root = self.data_root.resolve()
        real = p.resolve()
        if not real.is_relative_to(root):
            raise ConfigError(self.path, key, f"expected a path inside data_root {root}, found {p} -> {real}")
        return real

    def resolve_one(self, kind: str, date, which: str | None = None,
                    day_offset: int | None = None) -> tuple[pathlib.Path | None, list]:
        """First existing file among the patterns of ``kind``; (path or None, list of tried paths).

        ``day_offset`` (sp3, clk): only the patterns of that day offset (0 = the day's own file).
        """
        pats = self.patterns_for(kind, which)
        if day_offset is not None:
            pats = tuple(p for p in pats if pattern_day_offset(p) == day_offset)
        st = None if which is None else (self.station_a if which == "a" else self.station_b)
        sid = st.id if st is not None else self.station_a.id
        key = f"inputs.{which}.{kind}" if which and self.station_patterns.get(which, {}).get(kind) else f"inputs.{kind}"
        tried = []
        for pat in pats:
            rel = format_pattern(pat, sid, date)
            cand = self.data_root / rel
            if any(ch in rel for ch in "*?["):
                matches = sorted(_glob.glob(str(pathlib.Path(_glob.escape(str(self.data_root))) / rel)))
                tried.append((pat, str(cand)))
                for m in matches:
                    mp = self._inside_root(pathlib.Path(m), key)
                    if mp.is_file():
                        return mp, tried
                continue
            real = self._inside_root(cand, key)
            tried.append((pat, str(cand)))
            if real.is_file():
                return real, tried
        return None, tried

    def resolve_inputs(self, date) -> dict:
        """Input paths for one UTC date.

        Keys: ``obs_a``, ``obs_b``, ``nav``, ``sp3``, ``clk``, ``ionex``, ``met_a``, ``met_b``, ``erp``;
        values are resolved :class:`pathlib.Path` or ``None`` for kinds that are not
        configured or are listed as optional and absent. A missing required file
        raises :class:`MissingInputError` naming the patterns and the paths tried.
        """
        out = {}
        wanted = [("obs_a", "obs", "a"), ("obs_b", "obs", "b"), ("nav", "nav", None), ("sp3", "sp3", None),
                  ("clk", "clk", None), ("ionex", "ionex", None), ("met_a", "met", "a"), ("met_b", "met", "b"),
                  ("erp", "erp", None)]
        for name, kind, which in wanted:
            pats = self.patterns_for(kind, which)
            if not pats:
                if kind in ("obs", "nav"):
                    raise ConfigError(self.path, f"inputs.{kind}", "missing; expected a file-name pattern")
                out[name] = None
                continue
            found, tried = self.resolve_one(kind, date, which, day_offset=0)
            if found is None and kind not in self.optional:
                detail = "; ".join(f"pattern {p!r} -> {c}" for p, c in tried)
                raise MissingInputError(f"{self.path}: no {name} file for {_as_date(date)}: tried {detail}")
            out[name] = found
            offsets = sorted({pattern_day_offset(p) for p in pats} - {0})
            if found is not None and offsets:
                # neighbouring days' files: used when present; without one the product ends at
                # the day's edge and rows beyond it are flagged out of span (never extrapolated)
                files = {0: found}
                for off in offsets:
                    f_off, tried = self.resolve_one(kind, date, which, day_offset=off)
                    if f_off is None:
                        log.warning("%s: no %s file for day %+d of %s (tried %s): the product ends at "
                                    "that day edge", self.path, kind, off, _as_date(date),
                                    "; ".join(c for _, c in tried))
                    else:
                        files[off] = f_off
                # one file may serve several offsets (a weekly ERP file on most days of its week)
                distinct = tuple(dict.fromkeys(files[k] for k in sorted(files)))
                if len(distinct) > 1:
                    out[name] = distinct
        return out


_PAIR_TOP = {"pair", "inputs", "processing", "output", "events"}
_PAIR_KEYS = {"name", "station_a", "station_b", "data_root"}
WEIGHTS = ("sin2el", "equal", "sigma")
_PROC_KEYS = {"mode", "signals", "systems", "codes", "orbits", "bin_s", "elevation_mask_deg",
              "min_common_sats", "mad_k", "weights", "smoothing_s", "bias", "glonass_ifb", *_SWITCHES}


#: The processing options a pair file's [processing] table and the command line share: one
#: validation per field (:func:`check_processing_value`), so the two routes cannot disagree.
#: key -> (what is expected, kind, bounds); the command line's names are in ctt.commands.
PROCESSING_FIELDS = {
    "systems": ("a list of RINEX system letters (G, R, E, C, J, I, S)", "systems", {}),
    "codes": ("a list of RINEX 3 codes such as C1W", "codes", {}),
    "bin_s": ("a bin length in seconds", "number", {"lo": 0.0, "lo_open": True}),
    "elevation_mask_deg": ("an elevation mask in degrees", "number", {"lo": 0.0, "hi": 90.0}),
    "min_common_sats": ("a number of satellites", "integer", {"lo": 1}),
    "mad_k": ("a rejection threshold in MADs", "number", {"lo": 0.0, "lo_open": True}),
    "smoothing_s": ("a smoothing time in seconds", "number", {"lo": 0.0}),
}


def check_processing_value(key: str, v):
    """The value of a processing option if valid (numbers as float/int, lists as tuples), else
    ValueError saying what was expected and what was found."""
    what, kind, b = PROCESSING_FIELDS[key]
    if kind == "systems":
        if (not isinstance(v, (list, tuple)) or not v
                or any(not isinstance(x, str) or len(x) != 1 or x not in "GRECJIS" for x in v)):
            raise ValueError(f"expected {what}, found {v!r}")
        return tuple(v)
    if kind == "codes":
        if not isinstance(v, (list, tuple)) or any(not isinstance(c, str) or not _CODE_RE.match(c) for c in v):
            raise ValueError(f"expected {what}, found {v!r}")
        return tuple(v)
    if isinstance(v, bool) or not isinstance(v, (int, float)) or (kind == "integer" and not isinstance(v, int)):
        raise ValueError(f"expected {what}{' (an integer)' if kind == 'integer' else ''}, found {v!r}")
    if kind == "number":
        v = float(v)
        if not math.isfinite(v):
            raise ValueError(f"expected a finite {what}, found {v!r}")
    lo, hi = b.get("lo"), b.get("hi")
    if lo is not None and (v < lo or (b.get("lo_open") and v == lo)):
        raise ValueError(f"expected {what} {'>' if b.get('lo_open') else '>='} {lo:g}, found {v!r}")
    if hi is not None and (v > hi or (b.get("hi_open") and v == hi)):
        raise ValueError(f"expected {what} {'<' if b.get('hi_open') else '<='} {hi:g}, found {v!r}")
    return v


def _pattern_list(r: _Reader, v, key) -> tuple[str, ...]:
    items = [v] if isinstance(v, str) else v
    if not isinstance(items, list) or not items:
        r.fail(key, f"expected a pattern or a list of alternative patterns, found {v!r}")
        return ()
    ok = []
    kind = key.rsplit(".", 1)[-1]
    for j, p in enumerate(items, start=1):
        k = key if isinstance(v, str) else f"{key}[{j}]"
        if _check_pattern(r, p, k):
            if kind not in DAY_OFFSET_KINDS and pattern_day_offset(p):
                r.fail(k, f"day offsets such as {{doy-1}} are for the products that merge several days "
                       f"({', '.join(DAY_OFFSET_KINDS)}), found {p!r}")
                continue
            ok.append(p)
    if ok and kind in DAY_OFFSET_KINDS and all(pattern_day_offset(p) for p in ok):
        r.fail(key, "expected a pattern for the day itself besides those with day offsets")
    return tuple(ok)


_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")
_OUTPUT_KEYS = {"root", "dir", "archive", "report"}


def _output_paths(r: _Reader, out: dict, base: pathlib.Path):
    """(root, dir, archive, report) of the [output] table, each confined to the output root.

    The rule (README, "Where outputs go"): the output root is ``[output] root`` when given
    (relative to the pair file's folder, or absolute: a folder the administrator chose),
    else the pair file's folder; ``dir``, ``archive`` and ``report`` are relative to the
    root and must stay inside it after ``..`` and symbolic links are resolved. A file where
    a folder is expected, or the reverse, is refused here rather than when the first day
    is written.
    """
    r.unknown(out, _OUTPUT_KEYS, "output")
    root_text = r.text(out, "root", "output.root", "a folder", required=False)
    root = (base / root_text) if root_text else base
    if root_text is not None:
        if not root_text:
            r.fail("output.root", "expected a folder, found an empty string")
        elif root.exists() and not root.is_dir():
            r.fail("output.root", f"expected a folder, found a file: {root_text!r} -> {root}")
        elif root.resolve() == pathlib.Path(root.resolve().anchor):
            log.warning("%s: [output.root] is the whole file system: outputs are confined to nothing",
                        r.path)
    real_root = root.resolve()

    def one(key, default, want_dir):
        text = r.text(out, key, f"output.{key}", f"a path relative to the output root {real_root}",
                      required=False, default=default)
        if text is None:
            return None
        if not text.strip():
            return r.fail(f"output.{key}", "expected a path, found an empty string")
        p = root / text
        real = p.resolve()
        if (real == real_root and not want_dir) or not real.is_relative_to(real_root):
            return r.fail(f"output.{key}", f"expected a path inside the output root {real_root} (the pair "
                          f"file's folder, or [output] root), found {text!r} -> {real}")
        if want_dir and real.exists() and not real.is_dir():
            return r.fail(f"output.{key}", f"expected a folder, found a file: {text!r} -> {real}")
        if not want_dir and real.is_dir():
            return r.fail(f"output.{key}", f"expected a file path, found a folder: {text!r} -> {real}")
        for parent in real.parents:   # a file in the way of a folder to create
            if parent == real_root or not parent.is_relative_to(real_root):
                break
            if parent.exists() and not parent.is_dir():
                return r.fail(f"output.{key}", f"expected {parent} to be a folder, found a file")
        return p

    out_dir = one("dir", "out", True)
    dir_text = out.get("dir", "out") if isinstance(out.get("dir", "out"), str) else "out"
    archive = one("archive", str(pathlib.PurePath(dir_text) / "ctt.sqlite"), False)
    report = one("report", str(pathlib.PurePath(dir_text) / "report.html"), False)
    return root, out_dir, archive, report


def load_pair(path) -> PairConfig:
    """Read and validate a pair file and both station files it names."""
    path = pathlib.Path(path)
    base = path.parent
    r = _Reader(path)
    raw, data = _read_toml(path, r)
    r.unknown(data, _PAIR_TOP, "")
    pr = r.table(data, "pair", "pair") or {}
    r.unknown(pr, _PAIR_KEYS, "pair")

    stations = {}
    station_hashes = {}
    for which in ("a", "b"):
        k = f"station_{which}"
        rel = r.text(pr, k, f"pair.{k}", "the path of a station file")
        if rel is None:
            continue
        p = (base / rel)
        if not p.is_file():
            r.fail(f"pair.{k}", f"expected an existing station file, found {rel!r} -> {p}")
            continue
        try:
            stations[which] = load_station(p)
            station_hashes[which] = stations[which].content_sha256
        except ConfigError as exc:
            r.problems.extend(getattr(exc, "problems", [exc]))
    if "a" in stations and "b" in stations:
        if stations["a"].id.upper() == stations["b"].id.upper():
            r.fail("pair.station_b", f"expected a station distinct from station_a, found the same id "
                   f"{stations['b'].id!r}")
        elif (stations["a"].position_m is not None and stations["b"].position_m is not None
              and np.linalg.norm(stations["a"].position_m - stations["b"].position_m) < 1e-3):
            r.fail("pair.station_b", "expected a station distinct from station_a, found the same coordinates")

    root_rel = r.text(pr, "data_root", "pair.data_root", "a data folder")
    data_root = None
    if root_rel is not None:
        data_root = (base / root_rel)
        if not data_root.is_dir():
            r.fail("pair.data_root", f"expected an existing folder, found {root_rel!r} -> {data_root}")
        data_root = data_root.resolve()

    inp = r.table(data, "inputs", "inputs") or {}
    r.unknown(inp, {*INPUT_KINDS, "optional", "a", "b"}, "inputs")
    patterns = {}
    for kind in INPUT_KINDS:
        if kind in inp:
            patterns[kind] = _pattern_list(r, inp[kind], f"inputs.{kind}")
    st_pats = {}
    for which in ("a", "b"):
        sub = r.table(inp, which, f"inputs.{which}", required=False) or {}
        r.unknown(sub, set(STATION_INPUT_KINDS), f"inputs.{which}")
        st_pats[which] = types.MappingProxyType(
            {kind: _pattern_list(r, sub[kind], f"inputs.{which}.{kind}") for kind in STATION_INPUT_KINDS if kind in sub})
        if "obs" not in patterns and "obs" not in st_pats[which]:
            r.fail(f"inputs.{which}.obs", "missing; expected an obs pattern in [inputs] or [inputs.a]/[inputs.b]")
    if "nav" not in patterns:
        r.fail("inputs.nav", "missing; expected a broadcast navigation file pattern")
    opt = inp.get("optional", ["met"])
    if not isinstance(opt, list) or any(o not in INPUT_KINDS or o == "obs" for o in opt):
        r.fail("inputs.optional", f"expected a list of input kinds among "
               f"{', '.join(k for k in INPUT_KINDS if k != 'obs')}, found {opt!r}")
        opt = ["met"]

    proc = r.table(data, "processing", "processing", required=False) or {}
    r.unknown(proc, _PROC_KEYS, "processing")
    kw = {}
    kw["mode"] = r.choice(proc, "mode", "processing.mode", MODES, "tracks")
    kw["signals"] = r.choice(proc, "signals", "processing.signals", SIGNALS, "iono-free")
    kw["orbits"] = r.choice(proc, "orbits", "processing.orbits", ORBITS, "auto")
    for key in PROCESSING_FIELDS:
        kw[key] = r.processing(proc, key)
    kw["weights"] = r.choice(proc, "weights", "processing.weights", WEIGHTS, "sin2el")
    for s in _SWITCHES:
        kw[s] = r.boolean(proc, s, f"processing.{s}", default=False)
    bias = proc.get("bias")
    if bias is not None and bias != "estimate":
        r.fail("processing.bias", f"expected \"estimate\" (satellite code biases fitted on the day), found {bias!r}")
    kw["bias"] = "estimate" if bias == "estimate" else None
    kw["glonass_ifb"] = r.choice(proc, "glonass_ifb", "processing.glonass_ifb", ("estimate", "none"), "estimate")
    defaults = Processing()
    kw = {k: (getattr(defaults, k) if v is None and k != "elevation_mask_deg" else v) for k, v in kw.items()}
    kw["systems"], kw["codes"] = tuple(kw["systems"]), tuple(kw["codes"])
    processing = Processing(**kw)
    if processing.mode == "all-in-view" and "sp3" not in patterns:
        r.fail("processing.mode", "all-in-view needs precise orbits and clocks; expected an [inputs] sp3 "
               "pattern (and clk) beside it")
    if processing.mode == "ppp":
        # precise orbits and satellite clocks: the SP3 file's own clocks serve when there is no clock file
        if "sp3" not in patterns:
            r.fail("inputs.sp3", "missing; mode 'ppp' needs precise orbits and clocks (an sp3 pattern, "
                                 "and clk where the product has clock files)")
        elif "sp3" in opt:
            r.fail("inputs.optional", "mode 'ppp' cannot run without sp3; remove it from optional")

    out = r.table(data, "output", "output", required=False) or {}
    out_root, out_dir, archive, report = _output_paths(r, out, base)
    ev = r.table(data, "events", "events", required=False) or {}
    r.unknown(ev, {"max_gap_s"}, "events")
    max_gap = r.number(ev, "max_gap_s", "events.max_gap_s", "a gap length in seconds", required=False,
                       default=3600.0, lo=0.0, lo_open=True)
    r.raise_if_any()

    sa, sb = stations["a"], stations["b"]
    name = pr.get("name") or f"{sa.id.lower()}-{sb.id.lower()}"
    if not isinstance(name, str) or not _NAME_RE.match(name):
        # the name is a folder of the output tree: no '..', no '/', no hidden names
        raise ConfigError(path, "pair.name", "expected letters, digits, '-', '_' or '.' beginning with a "
                          f"letter or digit (at most 64), found {name!r}")
    if data_root is not None and data_root == pathlib.Path(data_root.anchor):
        log.warning("%s: [pair.data_root] is the whole file system (%s): inputs are confined to nothing; "
                    "name the folder that holds the data", path, data_root)
    # config hash: what determines the results, normalised through the dataclasses, so
    # comments, formatting, defaults written out or not, output locations, the data
    # root and file patterns (the input files' own hashes cover which files were
    # used) do not force a reprocessing; the station files enter by their
    # normalised content, A before B.
    norm = {"processing": dataclasses.asdict(processing),
            "station_a": station_hashes["a"], "station_b": station_hashes["b"]}
    h = hashlib.sha256(json.dumps(_canonical(norm), sort_keys=True, separators=(",", ":")).encode())
    return PairConfig(
        path=path, name=name, station_a=sa, station_b=sb, data_root=data_root,
        patterns=types.MappingProxyType(patterns), station_patterns=types.MappingProxyType(st_pats),
        optional=frozenset(opt), processing=processing, output_dir=out_dir, archive_path=archive,
        report_path=report, output_root=out_root, max_gap_s=max_gap, config_hash=h.hexdigest(),
        sha256=hashlib.sha256(raw).hexdigest())
