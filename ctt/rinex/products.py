"""Precise GNSS products: SP3 orbits and clocks, RINEX clock files, ANTEX satellite offsets.

Readers
-------
* :func:`read_sp3` — SP3-c and SP3-d (SP3-a/-b headers are accepted too):
  positions, clocks, optional velocity records, standard deviations, the
  clock-event / clock-prediction / manoeuvre / orbit-prediction flags
  (columns 75, 76, 79, 80 of the ``P`` record; a clock event is read as a
  discontinuity since the previous epoch, as recalled from the SP3-c
  document — from memory), any
  mix of systems, any compression :mod:`ctt.rinex.compression` opens.
  Format layout: the SP3-c (Hilla 2010) and SP3-d (Hilla 2016) format
  documents. Bad or absent values are flagged there as ``0.000000`` for a
  position component and ``999999.999999`` for a clock; both become NaN
  here, and :attr:`SP3Data.missing` counts them.
* :func:`read_clock` — RINEX clock 3.00–3.04 (header labels in columns
  61–80, or 66–85 from 3.04 when the clock name grew from A4 to A9). ``AS``
  (satellite) and ``AR`` (receiver / station) records are kept, each as a
  :class:`ClockSeries`; other record types are counted and skipped.
* :func:`read_antex` — ANTEX 1.4 satellite blocks: phase-centre offset per
  frequency in the satellite body frame, validity dates, block type, SVN.
  Receiver antenna blocks are skipped (counted).

Interpolation (:class:`PreciseOrbits`)
--------------------------------------
Positions: Lagrange polynomial through ``order_points`` (default 10, degree
9) SP3 nodes on a moving window centred on the requested instant (five
nodes each side of the bracketing interval; shifted inwards at the ends of
the span, never beyond them). Velocity is the analytic derivative of the
same polynomial. The interpolation argument is float seconds relative to a
node *near* the instant, computed from int64 nanosecond differences plus the
``dt_s`` offset, so nothing is lost to float seconds since 1980.

Measured accuracy. (1) Leave-one-out (:func:`leave_one_out`) on the IGS
final ``igs21385.sp3`` (15-min nodes, 32 GPS satellites, 2021-01-01):
predicting each interior node from the five nodes on either side, i.e.
across a 30-min hole, gives a 3D error of 2.9 mm RMS, 7.5 mm at the 99th
percentile and 10.1 mm at worst (2752 node predictions). That is
*pessimistic*: in normal use the instant lies inside a 15-min interval with
no node removed. (2) Against an analytic GPS-like orbit (26 560 km, seen
from the rotating Earth, 15-min nodes) the 10-point interpolant is within
0.12 mm for centred windows and 5.8 mm in the first/last interval of the
span, where the window cannot be centred; the velocity within 0.5 µm/s
(centred) and 0.05 mm/s (ends). So the interpolation is sub-cm for GPS at
15 min; ``tests/test_against_igs_products.py`` and ``tests/test_products.py``
re-measure both.

Clocks: linear interpolation between the two bracketing nodes (SP3 clocks,
or the ``AS`` records of a RINEX clock file when one is given, which are
usually denser: 30 s or 5 min). A missing node, nodes further apart than
``max_clock_gap_s`` (default 1.5 × the nominal interval) or an SP3 clock
event flag on the later node stop the interpolation (status ``GAP`` or
``BAD_FLAG``). On 15-min nodes linear interpolation adds tens to hundreds of
picoseconds: leave-one-out on igs21385.sp3 (linear over 30 min) gives
0.17 ns RMS, 0.02 to 0.45 ns per satellite, 1.3 ns at worst; use a 30 s
clock file for sub-100 ps work.

Outside the span of the data, or across a gap, the instant is marked
(``OUT_OF_SPAN``, ``GAP``) and its values are NaN; :meth:`PreciseOrbits.states`
with ``strict=True`` raises :class:`ctt.errors.OutOfSpanError` instead. There
is no extrapolation.

Conventions of the products (state them where they are used)
------------------------------------------------------------
* SP3 positions are of the satellite's centre of mass (IGS convention),
  ECEF in the file's frame (e.g. IGb14). Broadcast ephemerides give the
  antenna phase centre; with an ANTEX file :class:`PreciseOrbits` moves the
  position to the phase centre (:attr:`PreciseOrbits.pco_applied`).
* IGS satellite clocks exclude the periodic relativistic effect; the user
  adds ``−2 r·v / c²`` (IGS conventions; IERS Conventions 2010, §10, eq.
  10.10 as recalled — from memory). It is returned as ``relativity_s``,
  never folded into ``clock_s``.
* IGS GPS clocks refer to the ionosphere-free combination of P1 and P2
  (IGS convention, as are the broadcast af0..af2 per IS-GPS-200
  §20.3.3.3.3.2); ``tgd_s`` is therefore NaN here: a single-frequency user
  needs a differential code bias from elsewhere.
"""

from __future__ import annotations

import dataclasses
import logging
import math
import pathlib
import re
from typing import Sequence

import numpy as np

from ..errors import OutOfSpanError, ProductFormatError
from ..timescales import civil_to_ns, convert, normalise_scale
from ..orbits import SatStates
from .compression import read_bytes

log = logging.getLogger(__name__)

#: Speed of light in vacuum, m/s (SI definition).
C_MPS = 299_792_458.0

# ------------------------------------------------------------------ status codes

# Codes 0-2 share their meaning (and value) with ctt.orbits (OK, NO_EPHEMERIS,
# STALE); GAP and BAD_FLAG follow ctt.orbits' last code (BAD_ID = 8).
STATUS_OK = 0
STATUS_NO_DATA = 1
STATUS_OUT_OF_SPAN = 2
STATUS_GAP = 9
STATUS_BAD_FLAG = 10
#: Short names of the codes (as ctt.orbits.STATUS_NAMES).
STATUS_NAMES = {STATUS_OK: "OK", STATUS_NO_DATA: "NO_DATA", STATUS_OUT_OF_SPAN: "OUT_OF_SPAN",
                STATUS_GAP: "GAP", STATUS_BAD_FLAG: "BAD_FLAG"}

#: Reason text of each status code (for tables and logs).
STATUS_REASON = {
    STATUS_OK: "ok",
    STATUS_NO_DATA: "no data for this satellite in the product",
    STATUS_OUT_OF_SPAN: "instant outside the span of the product (no extrapolation)",
    STATUS_GAP: "missing node or gap in the product around the instant",
    STATUS_BAD_FLAG: "product flags a manoeuvre or clock event around the instant",
}


# ------------------------------------------------------------------ fixed-width helpers

def _line_matrix(lines: Sequence[bytes], width: int) -> np.ndarray:
    """Lines as a (n, width) uint8 matrix, blank padded (NULs become spaces)."""
    if not lines:
        return np.zeros((0, width), dtype=np.uint8)
    arr = np.array(lines, dtype=f"S{width}")
    mat = arr.view(np.uint8).reshape(len(lines), width).copy()
    mat[mat == 0] = 32
    return mat


def _fields(mat: np.ndarray, a: int, b: int) -> np.ndarray:
    """Columns a..b-1 (0-based) of each row as a bytes array."""
    sub = np.ascontiguousarray(mat[:, a:b])
    return sub.view(f"S{b - a}").ravel()


def _numbers(mat, a, b, *, path, line_no, lines, what, dtype=np.float64, blank=np.nan):
    """Parse a fixed-width numeric field of every row; blank fields become ``blank``.

    On a bad value raises :class:`ProductFormatError` naming the first bad line.
    """
    sub = np.ascontiguousarray(mat[:, a:b])
    isblank = (sub == 32).all(axis=1)
    if isblank.any():
        sub[isblank, -1] = ord("0")
    text = sub.view(f"S{b - a}").ravel()
    try:
        out = text.astype(dtype)
    except (ValueError, OverflowError):
        for i, t in enumerate(text):
            try:
                dtype(t.decode("latin-1"))
            except (ValueError, OverflowError):
                raise ProductFormatError(path, int(line_no[i]), what,
                                         lines[i].decode("latin-1")) from None
        raise  # pragma: no cover - astype and the per-value parse disagree
    if isblank.any():
        if np.issubdtype(np.dtype(dtype), np.floating):
            out[isblank] = blank
        else:
            out[isblank] = blank if not (isinstance(blank, float) and math.isnan(blank)) else -1
    return out


def _sat_ids(raw: np.ndarray) -> np.ndarray:
    """3-byte satellite fields to RINEX 3 ids: blank system is GPS, blank digit is 0."""
    mat = raw.view(np.uint8).reshape(-1, 3).copy()
    mat[:, 0] = np.where(mat[:, 0] == 32, ord("G"), mat[:, 0])
    mat[:, 1:] = np.where(mat[:, 1:] == 32, ord("0"), mat[:, 1:])
    return mat.view("S3").ravel().astype(str)


# ------------------------------------------------------------------ SP3

@dataclasses.dataclass
class SP3Header:
    """Header fields of an SP3 file (names after the SP3-c/d documents)."""

    version: str                 # 'a', 'b', 'c' or 'd'
    pos_vel_flag: str            # 'P' positions only, 'V' positions and velocities
    start_ns: int                # first epoch, the file's own time system calendar count
    n_epochs: int                # as announced in line 1
    data_used: str
    coord_system: str            # e.g. 'IGb14'
    orbit_type: str              # e.g. 'HLM', 'FIT' (SP3 header orbit type)
    agency: str
    gps_week: int
    seconds_of_week: float
    interval_s: float
    mjd: int
    fractional_day: float
    sats: list                   # ids as listed in the header
    accuracy_exponent: dict      # id -> exponent (accuracy 2**exp mm; 0 = unknown)
    file_type: str               # 'G', 'M', 'R', 'E', 'C', 'J', 'L', 'I'
    time_system: str             # as written: 'GPS', 'GLO', 'GAL', 'UTC', 'TAI', 'BDT', ...
    pos_vel_base: float          # base of the position/velocity sdev exponents
    clock_base: float            # base of the clock sdev exponents
    comments: list


@dataclasses.dataclass
class SP3Data:
    """An SP3 file in arrays: epochs × satellites.

    ``time_ns`` is GPS time (int64 calendar-count ns) whatever the file's time
    system (``header.time_system``; converted with :func:`ctt.timescales.convert`);
    ``time_file_ns`` keeps the file's own count. Positions in metres, clocks in
    seconds (satellite clock minus the product's time scale), velocities in
    m/s and clock rates in s/s when the file has ``V`` records, else ``None``.
    Missing values are NaN; the standard deviations are NaN where blank.
    Flags are boolean arrays (epochs × satellites).
    """

    path: str
    header: SP3Header
    time_ns: np.ndarray
    time_file_ns: np.ndarray
    sats: np.ndarray
    pos_m: np.ndarray
    clock_s: np.ndarray
    vel_mps: np.ndarray | None
    clock_rate: np.ndarray | None
    pos_sdev_m: np.ndarray
    clock_sdev_s: np.ndarray
    clock_event: np.ndarray
    clock_predicted: np.ndarray
    manoeuvre: np.ndarray
    orbit_predicted: np.ndarray
    missing: dict
    warnings: list

    @property
    def interval_s(self) -> float:
        """Nominal epoch spacing: the median spacing of the data (header value if one epoch)."""
        if len(self.time_ns) < 2:
            return float(self.header.interval_s)
        return float(np.median(np.diff(self.time_ns))) / 1e9

    def sat_index(self, sat: str) -> int:
        return int(np.flatnonzero(self.sats == sat)[0])


_SP3_VERSIONS = {"a", "b", "c", "d"}


def read_sp3(path) -> SP3Data:
    """Read an SP3-a/b/c/d file (any compression) into :class:`SP3Data`.

    Raises :class:`ProductFormatError` with file, line and expectation when
    the file does not follow the layout. Bad values (0.000000 positions,
    999999.999999 clocks) become NaN and are counted in ``missing``.
    """
    path_s = str(path)
    raw = read_bytes(path)
    lines = raw.splitlines()
    if not lines or not lines[0].startswith(b"#") or len(lines[0]) < 3:
        raise ProductFormatError(path_s, 1, "an SP3 first line '#cP' or '#dP'",
                                 lines[0].decode("latin-1") if lines else "an empty file")
    first = lines[0].decode("latin-1")
    version = first[1]
    if version not in _SP3_VERSIONS:
        raise ProductFormatError(path_s, 1, "SP3 version character a, b, c or d in column 2", first)
    pv = first[2]
    if pv not in "PV":
        raise ProductFormatError(path_s, 1, "position/velocity flag 'P' or 'V' in column 3", first)
    try:
        y, mo, d, h, mi = (int(first[3:7]), int(first[8:10]), int(first[11:13]),
                           int(first[14:16]), int(first[17:19]))
        sec = float(first[20:31])
        n_ep_hdr = int(first[32:39])
    except ValueError:
        raise ProductFormatError(path_s, 1, "start epoch (cols 4-31) and number of epochs (cols 33-39)",
                                 first) from None
    if len(lines) < 2 or not lines[1].startswith(b"##"):
        raise ProductFormatError(path_s, 2, "the '##' line (GPS week, seconds, interval, MJD)",
                                 lines[1].decode("latin-1") if len(lines) > 1 else "end of file")
    second = lines[1].decode("latin-1")
    try:
        week, sow, interval = int(second[3:7]), float(second[8:23]), float(second[24:38])
        mjd, fday = int(second[39:44]), float(second[45:60] or 0.0)
    except ValueError:
        raise ProductFormatError(path_s, 2, "GPS week (cols 4-7), seconds (9-23), interval (25-38), "
                                 "MJD (40-44), fraction of day (46-60)", second) from None

    n_sat = None
    sat_fields: list[str] = []
    acc_fields: list[str] = []
    file_type, time_system = "G", "GPS"
    pv_base = clk_base = 0.0
    comments: list[str] = []
    seen_c = seen_f = False
    body_start = None
    for i in range(2, len(lines)):
        text = lines[i].decode("latin-1")
        if text.startswith("* ") or text.startswith("*  "):
            body_start = i
            break
        if text.startswith("++"):
            acc_fields.extend(text[9 + 3 * k: 12 + 3 * k] for k in range(17))
        elif text.startswith("+"):
            if n_sat is None:
                try:
                    n_sat = int(text[1:6])
                except ValueError:
                    raise ProductFormatError(path_s, i + 1, "number of satellites in columns 2-6 of the "
                                             "first '+' line", text) from None
            sat_fields.extend(text[9 + 3 * k: 12 + 3 * k] for k in range(17))
        elif text.startswith("%c") and not seen_c:
            seen_c = True
            file_type = text[3:5].strip() or "G"
            ts = text[9:12].strip()
            time_system = "GPS" if ts in ("", "ccc") else ts
        elif text.startswith("%f") and not seen_f:
            seen_f = True
            try:
                pv_base, clk_base = float(text[3:13]), float(text[14:26])
            except ValueError:
                raise ProductFormatError(path_s, i + 1, "position and clock sdev bases (cols 4-13, 15-26)",
                                         text) from None
        elif text.startswith("/*"):
            comments.append(text[3:].rstrip())
        elif text.startswith(("%c", "%f", "%i")):
            pass
        elif text.startswith("EOF"):
            break
        else:
            raise ProductFormatError(path_s, i + 1, "an SP3 header line ('+', '++', '%c', '%f', '%i', '/*') "
                                     "or the first epoch line '*'", text)
    if n_sat is None:
        raise ProductFormatError(path_s, 3, "the '+' satellite list lines", None)
    hdr_sats_raw = [f for f in sat_fields if f.strip() not in ("0", "00", "")][:n_sat]
    if len(hdr_sats_raw) != n_sat:
        raise ProductFormatError(path_s, 3, f"{n_sat} satellite ids in the '+' lines",
                                 f"{len(hdr_sats_raw)} ids")
    hdr_sats = list(_sat_ids(np.array([s.encode() for s in hdr_sats_raw], dtype="S3")))
    acc = {}
    for s, a in zip(hdr_sats, acc_fields[:n_sat]):
        try:
            acc[s] = int(a)
        except ValueError:
            acc[s] = 0
    try:
        ts_norm = normalise_scale(time_system)
    except Exception:
        raise ProductFormatError(path_s, None, "a known time system in the first '%c' line (cols 10-12)",
                                 time_system) from None
    header = SP3Header(
        version=version, pos_vel_flag=pv, start_ns=int(civil_to_ns(y, mo, d, h, mi, sec)),
        n_epochs=n_ep_hdr, data_used=first[40:45].strip(), coord_system=first[46:51].strip(),
        orbit_type=first[52:55].strip(), agency=first[56:60].strip(), gps_week=week,
        seconds_of_week=sow, interval_s=interval, mjd=mjd, fractional_day=fday, sats=hdr_sats,
        accuracy_exponent=acc, file_type=file_type, time_system=time_system,
        pos_vel_base=pv_base, clock_base=clk_base, comments=comments,
    )
    if body_start is None:
        return _empty_sp3(path_s, header)

    body = lines[body_start:]
    first_chars = np.array([ln[:2] for ln in body], dtype="S2")
    line_no = np.arange(body_start + 1, body_start + 1 + len(body))
    is_epoch = first_chars == b"* "
    is_epoch |= np.char.startswith(first_chars, b"*")
    is_p = np.char.startswith(first_chars, b"P")
    is_v = np.char.startswith(first_chars, b"V")
    is_ok = is_epoch | is_p | is_v | np.isin(first_chars, [b"EP", b"EV", b"EO"])
    is_ok |= np.char.strip(first_chars) == b""
    if not is_ok.all():
        bad = int(np.flatnonzero(~is_ok)[0])
        raise ProductFormatError(path_s, int(line_no[bad]), "an SP3 data line ('*', 'P', 'EP', 'V', 'EV', 'EOF')",
                                 body[bad].decode("latin-1"))

    # epochs
    ep_idx = np.flatnonzero(is_epoch)
    ep_lines = [body[i] for i in ep_idx]
    emat = _line_matrix(ep_lines, 31)
    kw = dict(path=path_s, line_no=line_no[ep_idx], lines=ep_lines)
    ey = _numbers(emat, 3, 7, dtype=np.int64, what="epoch year in cols 4-7", **kw)
    emo = _numbers(emat, 8, 10, dtype=np.int64, what="epoch month in cols 9-10", **kw)
    ed = _numbers(emat, 11, 13, dtype=np.int64, what="epoch day in cols 12-13", **kw)
    eh = _numbers(emat, 14, 16, dtype=np.int64, what="epoch hour in cols 15-16", **kw)
    emi = _numbers(emat, 17, 19, dtype=np.int64, what="epoch minute in cols 18-19", **kw)
    es = _numbers(emat, 20, 31, what="epoch seconds in cols 21-31", **kw)
    if np.isnan(es).any():
        bad = int(np.flatnonzero(np.isnan(es))[0])
        raise ProductFormatError(path_s, int(line_no[ep_idx[bad]]), "epoch seconds in cols 21-31",
                                 ep_lines[bad].decode("latin-1"))
    t_file = civil_to_ns(ey, emo, ed, eh, emi, es).astype(np.int64)
    if len(t_file) > 1 and np.any(np.diff(t_file) <= 0):
        bad = int(np.flatnonzero(np.diff(t_file) <= 0)[0]) + 1
        raise ProductFormatError(path_s, int(line_no[ep_idx[bad]]), "epochs in increasing order",
                                 ep_lines[bad].decode("latin-1"))
    t_gps = convert(t_file, ts_norm, "GPS").astype(np.int64)
    n_ep = len(t_file)
    sats = np.array(hdr_sats)
    order = np.argsort(sats)
    sorted_sats = sats[order]

    def locate(idx, kind):
        recs = [body[i] for i in idx]
        mat = _line_matrix(recs, 80)
        epoch_of = np.searchsorted(ep_idx, idx) - 1
        if np.any(epoch_of < 0):
            bad = int(np.flatnonzero(epoch_of < 0)[0])
            raise ProductFormatError(path_s, int(line_no[idx[bad]]), f"an epoch line '*' before the first "
                                     f"'{kind}' record", recs[bad].decode("latin-1"))
        ids = _sat_ids(_fields(mat, 1, 4))
        pos = np.searchsorted(sorted_sats, ids)
        pos = np.clip(pos, 0, len(sorted_sats) - 1)
        known = sorted_sats[pos] == ids
        if not known.all():
            bad = int(np.flatnonzero(~known)[0])
            raise ProductFormatError(path_s, int(line_no[idx[bad]]), "a satellite listed in the header",
                                     recs[bad].decode("latin-1"))
        col = order[pos]
        flat = epoch_of * len(sats) + col
        if len(np.unique(flat)) != len(flat):
            _, first_i, counts = np.unique(flat, return_index=True, return_counts=True)
            dup = np.setdiff1d(np.arange(len(flat)), first_i)[0]
            raise ProductFormatError(path_s, int(line_no[idx[dup]]), f"one '{kind}' record per satellite "
                                     "and epoch", recs[dup].decode("latin-1"))
        kw = dict(path=path_s, line_no=line_no[idx], lines=recs)
        return mat, epoch_of, col, kw

    shape = (n_ep, len(sats))
    pos_m = np.full(shape + (3,), np.nan)
    clock_s = np.full(shape, np.nan)
    pos_sdev = np.full(shape + (3,), np.nan)
    clk_sdev = np.full(shape, np.nan)
    flags = {k: np.zeros(shape, dtype=bool) for k in ("E", "P", "M", "O")}
    missing = {"position": 0, "clock": 0, "velocity": 0, "clock_rate": 0, "records_absent": 0}
    p_idx = np.flatnonzero(is_p)
    present = np.zeros(shape, dtype=bool)
    if len(p_idx):
        mat, e_of, col, kw = locate(p_idx, "P")
        xyz = np.stack([_numbers(mat, a, a + 14, what=f"{c} coordinate (km) in cols {a + 1}-{a + 14}", **kw)
                        for a, c in ((4, "x"), (18, "y"), (32, "z"))], axis=1)
        clk = _numbers(mat, 46, 60, what="clock (microseconds) in cols 47-60", **kw)
        bad_pos = (xyz == 0.0).all(axis=1) | np.isnan(xyz).any(axis=1)
        bad_clk = (np.abs(clk) >= 999999.0) | np.isnan(clk)
        xyz[bad_pos] = np.nan
        clk[bad_clk] = np.nan
        missing["position"] = int(bad_pos.sum())
        missing["clock"] = int(bad_clk.sum())
        pos_m[e_of, col] = xyz * 1000.0
        clock_s[e_of, col] = clk * 1e-6
        present[e_of, col] = True
        if version in ("c", "d"):
            sd = np.stack([_numbers(mat, a, a + 2, what=f"position sdev exponent in cols {a + 1}-{a + 2}", **kw)
                           for a in (61, 64, 67)], axis=1)
            csd = _numbers(mat, 70, 73, what="clock sdev exponent in cols 71-73", **kw)
            if pv_base > 0:
                pos_sdev[e_of, col] = pv_base ** sd * 1e-3      # mm -> m
            if clk_base > 0:
                clk_sdev[e_of, col] = clk_base ** csd * 1e-12   # ps -> s
            for key, c in (("E", 74), ("P", 75), ("M", 78), ("O", 79)):
                flags[key][e_of, col] = mat[:, c] == ord(key if key != "O" else "P")
    missing["records_absent"] = int((~present).sum())

    vel = rate = None
    v_idx = np.flatnonzero(is_v)
    if len(v_idx):
        mat, e_of, col, kw = locate(v_idx, "V")
        vxyz = np.stack([_numbers(mat, a, a + 14, what=f"{c} velocity (dm/s) in cols {a + 1}-{a + 14}", **kw)
                         for a, c in ((4, "x"), (18, "y"), (32, "z"))], axis=1)
        vr = _numbers(mat, 46, 60, what="clock rate (1e-4 microseconds/s) in cols 47-60", **kw)
        bad_v = (vxyz == 0.0).all(axis=1) | np.isnan(vxyz).any(axis=1)
        bad_r = (np.abs(vr) >= 999999.0) | np.isnan(vr)
        vxyz[bad_v] = np.nan
        vr[bad_r] = np.nan
        vel = np.full(shape + (3,), np.nan)
        rate = np.full(shape, np.nan)
        vel[e_of, col] = vxyz * 0.1            # dm/s -> m/s
        rate[e_of, col] = vr * 1e-10           # 1e-4 us/s -> s/s
        missing["velocity"] = int(bad_v.sum()) + int(vel.shape[0] * vel.shape[1] - len(v_idx))
        missing["clock_rate"] = int(bad_r.sum()) + int(rate.size - len(v_idx))

    warn = []
    if n_ep != n_ep_hdr:
        warn.append(f"{path_s}: header announces {n_ep_hdr} epochs, file holds {n_ep}")
    if n_ep and int(t_file[0]) != header.start_ns:
        warn.append(f"{path_s}: first epoch differs from the start epoch of line 1")
    for w in warn:
        log.warning(w)
    return SP3Data(
        path=path_s, header=header, time_ns=t_gps, time_file_ns=t_file, sats=sats, pos_m=pos_m,
        clock_s=clock_s, vel_mps=vel, clock_rate=rate, pos_sdev_m=pos_sdev, clock_sdev_s=clk_sdev,
        clock_event=flags["E"], clock_predicted=flags["P"], manoeuvre=flags["M"],
        orbit_predicted=flags["O"], missing=missing, warnings=warn,
    )


def _empty_sp3(path_s, header):
    n = len(header.sats)
    z3 = np.zeros((0, n, 3))
    z = np.zeros((0, n))
    zb = np.zeros((0, n), dtype=bool)
    return SP3Data(path_s, header, np.zeros(0, np.int64), np.zeros(0, np.int64), np.array(header.sats),
                   z3, z, None, None, z3.copy(), z.copy(), zb, zb.copy(), zb.copy(), zb.copy(),
                   {"position": 0, "clock": 0, "velocity": 0, "clock_rate": 0, "records_absent": 0},
                   [f"{path_s}: no epochs"])


def merge_sp3(parts: Sequence[SP3Data]) -> SP3Data:
    """Concatenate SP3 data of consecutive files (e.g. adjacent days) into one.

    Satellites are the union; an epoch present in several files keeps the
    values of the first file that has it. The header is the first file's.
    """
    parts = list(parts)
    if len(parts) == 1:
        return parts[0]
    sats = np.array(sorted(set().union(*[set(p.sats) for p in parts])))
    times = np.unique(np.concatenate([p.time_ns for p in parts]))
    shape = (len(times), len(sats))

    def full(attr, extra=(), fill=np.nan, dtype=float):
        out = np.full(shape + extra, fill, dtype=dtype)
        done = np.zeros(len(times), dtype=bool)
        for p in parts:
            val = getattr(p, attr)
            if val is None:
                continue
            ti = np.searchsorted(times, p.time_ns)
            take = ~done[ti]
            si = np.searchsorted(sats, p.sats)
            out[np.ix_(ti[take], si)] = val[take]
            done[ti[take]] = True
        return out

    has_v = all(p.vel_mps is not None for p in parts)
    missing = {k: sum(p.missing[k] for p in parts) for k in parts[0].missing}
    first = parts[0]
    return SP3Data(
        path=";".join(p.path for p in parts), header=first.header, time_ns=times,
        time_file_ns=convert(times, "GPS", normalise_scale(first.header.time_system)).astype(np.int64),
        sats=sats, pos_m=full("pos_m", (3,)), clock_s=full("clock_s"),
        vel_mps=full("vel_mps", (3,)) if has_v else None, clock_rate=full("clock_rate") if has_v else None,
        pos_sdev_m=full("pos_sdev_m", (3,)), clock_sdev_s=full("clock_sdev_s"),
        clock_event=full("clock_event", fill=False, dtype=bool),
        clock_predicted=full("clock_predicted", fill=False, dtype=bool),
        manoeuvre=full("manoeuvre", fill=False, dtype=bool),
        orbit_predicted=full("orbit_predicted", fill=False, dtype=bool),
        missing=missing, warnings=sum((p.warnings for p in parts), []),
    )


# ------------------------------------------------------------------ RINEX clock

@dataclasses.dataclass
class ClockSeries:
    """Clock records of one kind (``AS`` satellites or ``AR`` receivers) on a common epoch grid.

    ``time_ns`` GPS time (int64), ``names`` (satellite ids or station names),
    ``bias_s`` and ``sigma_s`` (epochs × names, NaN where absent).
    """

    names: np.ndarray
    time_ns: np.ndarray
    bias_s: np.ndarray
    sigma_s: np.ndarray

    def column(self, name: str) -> int:
        hit = np.flatnonzero(self.names == name)
        if not len(hit):
            raise KeyError(name)
        return int(hit[0])

    def at(self, names, t_ns, dt_s=0.0, max_gap_s: float | None = None):
        """Linear interpolation at instants; returns ``(bias_s, status)`` (see :data:`STATUS_REASON`)."""
        names = np.asarray(names, dtype=str)
        col = _columns(self.names, names)
        return _interp_linear(self.time_ns, self.bias_s, col, np.asarray(t_ns, np.int64),
                              np.broadcast_to(np.asarray(dt_s, float), names.shape),
                              _max_gap_ns(self.time_ns, max_gap_s), None)


@dataclasses.dataclass
class ClockData:
    """A RINEX clock file: header fields, satellite (``AS``) and station (``AR``) clocks."""

    path: str
    version: float
    time_system: str
    header: dict
    satellites: ClockSeries
    stations: ClockSeries
    skipped: dict          # record type -> count of records not kept (CR, DR, MS)


_CLK_KEEP = ("AS", "AR")
_CLK_LABELS = ("RINEX VERSION / TYPE", "PGM / RUN BY / DATE", "COMMENT", "SYS / # / OBS TYPES",
               "TIME SYSTEM ID", "LEAP SECONDS GNSS", "LEAP SECONDS", "SYS / DCBS APPLIED",
               "SYS / PCVS APPLIED", "# / TYPES OF DATA", "STATION NAME / NUM", "STATION CLK REF",
               "ANALYSIS CENTER", "# OF CLK REF", "ANALYSIS CLK REF", "# OF SOLN STA / TRF",
               "SOLN STA NAME / NUM", "# OF SOLN SATS", "PRN LIST", "END OF HEADER")
_CLK_TYPES = ("AS", "AR", "CR", "DR", "MS")
_D_EXP = re.compile(rb"(\d)[Dd]([+-]?\d)")


def read_clock(path) -> ClockData:  # noqa: C901 - one pass over a flat header
    """Read a RINEX clock file, versions 3.00 to 3.04 (also 2.x layouts with A4 names).

    Keeps ``AS`` and ``AR`` bias and bias-sigma; the rate and acceleration
    values of continuation lines are skipped. Epochs are converted from the
    ``TIME SYSTEM ID`` (GPS if absent) to GPS time.
    """
    import io

    import pandas as pd

    path_s = str(path)
    raw = read_bytes(path)
    lines = raw.splitlines()
    if not lines or b"RINEX VERSION / TYPE" not in lines[0]:
        raise ProductFormatError(path_s, 1, "'RINEX VERSION / TYPE' on the first line",
                                 lines[0].decode("latin-1") if lines else "an empty file")
    first = lines[0].decode("latin-1")
    try:
        version = float(first.split()[0])
    except (ValueError, IndexError):
        raise ProductFormatError(path_s, 1, "the format version in columns 1-9", first) from None
    if first[20:21] != "C" and " C " not in first[:60]:
        raise ProductFormatError(path_s, 1, "file type 'C' (clock data) in column 21", first)
    # header labels: columns 61-80 up to 3.02, 66-85 from 3.04 (the clock name grew to A9);
    # matched by how the line ends so a file that keeps the old columns still reads.
    header: dict = {"comments": [], "satellites": [], "stations": {}}
    time_system = "GPS"
    end = None
    for i, bl in enumerate(lines):
        text = bl.decode("latin-1").rstrip()
        label = next((lb for lb in _CLK_LABELS if text.endswith(lb)), "")
        lab0 = len(text) - len(label)
        if label == "END OF HEADER":
            end = i
            break
        if label == "COMMENT":
            header["comments"].append(text[:lab0].rstrip())
        elif label == "TIME SYSTEM ID":
            time_system = text[3:6].strip() or "GPS"
        elif label == "LEAP SECONDS":
            try:
                header["leap_seconds"] = int(text[:6])
            except ValueError:
                raise ProductFormatError(path_s, i + 1, "leap seconds as I6", text) from None
        elif label == "ANALYSIS CENTER":
            header["analysis_center"] = text[:3].strip()
            header["analysis_center_name"] = text[5:lab0].strip()
        elif label == "# / TYPES OF DATA":
            header["data_types"] = text[6:lab0].split()
        elif label == "PRN LIST":
            header["satellites"].extend(text[:lab0].split())
        elif label == "SOLN STA NAME / NUM":
            tok = text[:lab0].split()
            if tok:
                header["stations"][tok[0]] = text[:lab0].strip()
        elif label == "# OF SOLN SATS":
            header["n_satellites"] = int(text[:6])
        elif label == "# OF SOLN STA / TRF":
            header["n_stations"] = int(text[:6])
            header["trf"] = text[10:lab0].strip()
        elif label == "PGM / RUN BY / DATE":
            header["program"] = text[:20].strip()
    if end is None:
        raise ProductFormatError(path_s, None, "an 'END OF HEADER' line", "end of file")
    try:
        ts_norm = normalise_scale(time_system)
    except Exception:
        raise ProductFormatError(path_s, None, "a known 'TIME SYSTEM ID'", time_system) from None

    body = lines[end + 1:]
    line_no = np.arange(end + 2, end + 2 + len(body))
    heads = np.array([ln[:3] for ln in body], dtype="S3")
    is_rec = np.isin(heads, [t.encode() + b" " for t in _CLK_TYPES])
    keep = np.isin(heads, [t.encode() + b" " for t in _CLK_KEEP])
    skipped = {t: int((heads == t.encode() + b" ").sum()) for t in _CLK_TYPES if t not in _CLK_KEEP}
    # continuation lines must follow a record announcing more than 2 values; check loosely:
    other = ~is_rec & (np.char.strip(heads) != b"")
    lead = np.char.lstrip(heads).astype("S1")
    cont_ok = np.isin(lead, [bytes([c]) for c in b"0123456789-+."])
    if np.any(other & ~cont_ok):
        bad = int(np.flatnonzero(other & ~cont_ok)[0])
        raise ProductFormatError(path_s, int(line_no[bad]), "a clock data record (AS, AR, CR, DR, MS) "
                                 "or a continuation line of values", body[bad].decode("latin-1"))
    idx = np.flatnonzero(keep)
    empty = ClockSeries(np.array([], dtype=str), np.zeros(0, np.int64), np.zeros((0, 0)), np.zeros((0, 0)))
    if not len(idx):
        return ClockData(path_s, version, time_system, header, empty, empty, skipped)
    recs = [body[i] for i in idx]
    text = _D_EXP.sub(rb"\1E\2", b"\n".join(recs))
    cols = ["type", "name", "y", "mo", "d", "h", "mi", "s", "n", "bias", "sigma"]
    try:
        df = pd.read_csv(io.BytesIO(text), sep=r"\s+", header=None, names=cols, engine="c",
                         dtype={"type": str, "name": str}, on_bad_lines="error")
    except Exception:
        df = None
    if df is None or len(df) != len(recs):
        for k, r in enumerate(recs):
            if len(r.split()) < 10 or len(r.split()) > 11:
                raise ProductFormatError(path_s, int(line_no[idx[k]]), "record type, name, epoch "
                                         "(6 fields), number of values and 1-2 values", r.decode("latin-1"))
        raise ProductFormatError(path_s, int(line_no[idx[0]]), "clock records readable as numbers", None)
    num = df[["y", "mo", "d", "h", "mi", "s", "n", "bias", "sigma"]].apply(pd.to_numeric, errors="coerce")
    bad = num[["y", "mo", "d", "h", "mi", "s", "n", "bias"]].isna().any(axis=1).to_numpy()
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        raise ProductFormatError(path_s, int(line_no[idx[k]]), "numeric epoch, number of values and clock "
                                 "bias (seconds)", recs[k].decode("latin-1"))
    n_vals = num["n"].to_numpy()
    if np.any((n_vals < 1) | (n_vals > 6)):
        k = int(np.flatnonzero((n_vals < 1) | (n_vals > 6))[0])
        raise ProductFormatError(path_s, int(line_no[idx[k]]), "number of data values 1 to 6", recs[k].decode())
    sec = num["s"].to_numpy()
    t_file = civil_to_ns(num["y"].to_numpy(np.int64), num["mo"].to_numpy(np.int64), num["d"].to_numpy(np.int64),
                         num["h"].to_numpy(np.int64), num["mi"].to_numpy(np.int64), sec)
    t_gps = convert(t_file, ts_norm, "GPS").astype(np.int64)
    sigma = num["sigma"].to_numpy(float)
    sigma = np.where(n_vals >= 2, sigma, np.nan)
    bias = num["bias"].to_numpy(float)
    kinds = df["type"].to_numpy(str)
    names_all = df["name"].to_numpy(str)

    def series(kind):
        m = kinds == kind
        if not m.any():
            return empty
        names, col = np.unique(names_all[m], return_inverse=True)
        times, row = np.unique(t_gps[m], return_inverse=True)
        b = np.full((len(times), len(names)), np.nan)
        s = np.full_like(b, np.nan)
        b[row, col] = bias[m]
        s[row, col] = sigma[m]
        return ClockSeries(names, times, b, s)

    return ClockData(path_s, version, time_system, header, series("AS"), series("AR"), skipped)


# ------------------------------------------------------------------ ANTEX

@dataclasses.dataclass
class AntexData:
    """Satellite antenna blocks of an ANTEX file.

    ``satellites`` is a list of dicts with ``type`` (e.g. 'BLOCK IIF'), ``prn``
    ('G01'), ``svn``, ``cospar``, ``valid_from_ns`` / ``valid_until_ns`` (GPS
    time; ``None`` = open) and ``pco_m`` {frequency code ('G01', 'E05'...):
    (x, y, z) metres in the satellite body frame}.
    """

    path: str
    version: float
    pcv_type: str
    satellites: list
    n_receiver_antennas: int

    def offset(self, prn: str, t_ns: int):
        """The block of ``prn`` valid at ``t_ns`` (GPS), or ``None``."""
        for blk in self.satellites:
            if blk["prn"] != prn:
                continue
            lo, hi = blk["valid_from_ns"], blk["valid_until_ns"]
            if (lo is None or t_ns >= lo) and (hi is None or t_ns <= hi):
                return blk
        return None


def _antex_epoch(text, path_s, line):
    try:
        f = text[:43].split()
        y, mo, d, h, mi = (int(v) for v in f[:5])
        s = float(f[5])
    except (ValueError, IndexError):
        raise ProductFormatError(path_s, line, "a date as 5I6,F13.7 (year month day hour minute second)",
                                 text) from None
    return int(civil_to_ns(y, mo, d, h, mi, s))


def read_antex(path) -> AntexData:
    """Read the satellite antenna phase-centre offsets of an ANTEX 1.4 file.

    Offsets are read from the ``NORTH / EAST / UP`` line of each frequency of
    a satellite block, which for satellites holds x, y, z in the body frame
    (mm, 3F10.2; ANTEX 1.4 format document). Dates are read as GPS time.
    """
    path_s = str(path)
    lines = read_bytes(path).decode("latin-1").splitlines()
    if not lines or "ANTEX VERSION / SYST" not in lines[0]:
        raise ProductFormatError(path_s, 1, "'ANTEX VERSION / SYST' on the first line",
                                 lines[0] if lines else "an empty file")
    try:
        version = float(lines[0][:8])
    except ValueError:
        raise ProductFormatError(path_s, 1, "the format version as F8.1 in columns 1-8", lines[0]) from None
    pcv_type = ""
    sats: list = []
    n_rx = 0
    block = None
    freq = None
    in_header = True
    for i, text in enumerate(lines, start=1):
        label = text[60:80].strip()
        if in_header:
            if label == "PCV TYPE / REFANT":
                pcv_type = text[:1]
            elif label == "END OF HEADER":
                in_header = False
            continue
        if label == "START OF ANTENNA":
            if block is not None:
                raise ProductFormatError(path_s, i, "'END OF ANTENNA' before the next 'START OF ANTENNA'", text)
            block = {"line": i, "pco_m": {}, "valid_from_ns": None, "valid_until_ns": None}
        elif block is None:
            if text.strip():
                raise ProductFormatError(path_s, i, "'START OF ANTENNA'", text)
        elif label == "TYPE / SERIAL NO":
            block["type"] = text[:20].strip()
            block["prn"] = text[20:40].strip()
            block["svn"] = text[40:50].strip()
            block["cospar"] = text[50:60].strip()
        elif label == "VALID FROM":
            block["valid_from_ns"] = _antex_epoch(text, path_s, i)
        elif label == "VALID UNTIL":
            block["valid_until_ns"] = _antex_epoch(text, path_s, i)
        elif label == "START OF FREQUENCY":
            freq = text[3:6].strip()
            if not re.fullmatch(r"[GRECJSI]\d\d", freq):
                raise ProductFormatError(path_s, i, "a frequency code such as 'G01' in columns 4-6", text)
        elif label == "NORTH / EAST / UP":
            if freq is None:
                raise ProductFormatError(path_s, i, "'START OF FREQUENCY' before 'NORTH / EAST / UP'", text)
            try:
                vals = tuple(float(text[a:a + 10]) * 1e-3 for a in (0, 10, 20))
            except ValueError:
                raise ProductFormatError(path_s, i, "three offsets in mm as 3F10.2", text) from None
            block["pco_m"][freq] = vals
        elif label == "END OF FREQUENCY":
            freq = None
        elif label == "END OF ANTENNA":
            prn = block.get("prn", "")
            if "type" not in block:
                raise ProductFormatError(path_s, block["line"], "a 'TYPE / SERIAL NO' line in the antenna block",
                                         None)
            if re.fullmatch(r"[GRECJSI]\d\d", prn) and block["svn"]:
                del block["line"]
                sats.append(block)
            else:
                n_rx += 1
            block = None
    if in_header:
        raise ProductFormatError(path_s, None, "an 'END OF HEADER' line", "end of file")
    if block is not None:
        raise ProductFormatError(path_s, block["line"], "'END OF ANTENNA' closing the block", "end of file")
    return AntexData(path_s, version, pcv_type, sats, n_rx)


# ------------------------------------------------------------------ Sun



def sun_position_ecef(t_ns, dt_s=0.0) -> np.ndarray:
    """Low-precision Sun position, ECEF metres ``(N, 3)``, at GPS instants ``t_ns + dt_s``.

    The Astronomical Almanac's low-precision formula as implemented in
    :func:`ctt.geodesy.sun_moon_ecef` (about 0.01°; enough for satellite
    attitude, not for astronomy).
    """
    from ..geodesy import sun_moon_ecef

    t = np.atleast_1d(np.asarray(t_ns, dtype=np.int64))
    dt = np.broadcast_to(np.asarray(dt_s, dtype=float), t.shape)
    t = t + np.rint(dt * 1e9).astype(np.int64)
    return sun_moon_ecef(t, time_scale="GPS")[0]


def body_frame(pos_m: np.ndarray, sun_m: np.ndarray):
    """Unit vectors (i, j, k) of the nominal yaw-steering satellite body frame, ECEF.

    k points from the satellite to the Earth's centre, j = k × e / |k × e|
    with e the unit vector from the satellite to the Sun, and i = j × k, so
    that the Sun lies in the +x half of the x-z plane (the IGS/ANTEX frame,
    as in Kouba 2009, "A guide to using IGS products", from memory).
    """
    k = -pos_m / np.linalg.norm(pos_m, axis=-1, keepdims=True)
    e = sun_m - pos_m
    e = e / np.linalg.norm(e, axis=-1, keepdims=True)
    j = np.cross(k, e)
    j = j / np.linalg.norm(j, axis=-1, keepdims=True)
    i = np.cross(j, k)
    return i, j, k


# ------------------------------------------------------------------ interpolation kernels

def _lagrange(u: np.ndarray, nodes: np.ndarray):
    """Lagrange basis values and derivatives at ``u`` (N,) for nodes (N, K), same units.

    Returns ``(w, dw)`` each (N, K): value = Σ w_k y_k, derivative = Σ dw_k y_k.
    Numerators Π_{k≠j}(u − u_k) come from prefix and suffix products (and
    their derivatives by the product rule), so nothing divides by u − u_j
    and the basis is exact at the nodes. Loops run over the K window points
    only (vectorised over N); when every row has the same node pattern (a
    regular grid) the denominators are computed once.
    """
    n, k_pts = nodes.shape
    d = np.ascontiguousarray((u[:, None] - nodes).T)         # (K, N): rows are contiguous
    pre = np.empty((k_pts, n))
    dpre = np.empty((k_pts, n))
    suf = np.empty((k_pts, n))
    dsuf = np.empty((k_pts, n))
    pre[0], dpre[0], suf[-1], dsuf[-1] = 1.0, 0.0, 1.0, 0.0
    for j in range(1, k_pts):
        np.multiply(pre[j - 1], d[j - 1], out=pre[j])
        dpre[j] = dpre[j - 1] * d[j - 1] + pre[j - 1]
        i = k_pts - 1 - j
        np.multiply(suf[i + 1], d[i + 1], out=suf[i])
        dsuf[i] = dsuf[i + 1] * d[i + 1] + suf[i + 1]
    num = (pre * suf).T
    dnum = (dpre * suf + pre * dsuf).T
    regular = n > 0 and bool(np.all(nodes == nodes[:1]))
    base = nodes[:1] if regular else nodes
    diff = base[:, :, None] - base[:, None, :]               # (1 or N, K, K)
    idx = np.arange(k_pts)
    diff[:, idx, idx] = 1.0
    den = diff.prod(axis=2)
    return num / den, dnum / den


def _columns(names: np.ndarray, wanted: np.ndarray) -> np.ndarray:
    """Column of each wanted name in ``names`` (−1 where absent)."""
    if len(names) == 0:
        return np.full(wanted.shape, -1, dtype=np.int64)
    order = np.argsort(names)
    srt = names[order]
    pos = np.clip(np.searchsorted(srt, wanted), 0, len(srt) - 1)
    return np.where(srt[pos] == wanted, order[pos], -1).astype(np.int64)


def _max_gap_ns(times: np.ndarray, max_gap_s) -> int:
    if max_gap_s is not None:
        return int(round(max_gap_s * 1e9))
    if len(times) < 2:
        return 0
    return int(1.5 * float(np.median(np.diff(times))))


def _interp_linear(times, values, col, t_ns, dt_s, max_gap_ns, event, with_rate=False):
    """Linear interpolation of ``values[:, col]`` at ``t_ns + dt_s``; returns (value, status).

    With ``with_rate`` also the slope (units per second) of the interval used.

    ``event`` (epochs × names bool, or None) marks a discontinuity since the
    previous node (SP3 clock event flag): interpolating across it is refused.
    """
    n = len(t_ns)
    out = np.full(n, np.nan)
    rate = np.full(n, np.nan)
    status = np.full(n, STATUS_NO_DATA, dtype=np.int8)
    if len(times) == 0:
        return (out, status, rate) if with_rate else (out, status)
    has = col >= 0
    t_eff = t_ns + np.rint(dt_s * 1e9).astype(np.int64)
    inside = (t_eff >= times[0]) & (t_eff <= times[-1])
    status[has & ~inside] = STATUS_OUT_OF_SPAN
    m = has & inside
    if len(times) == 1:
        hit = m & (t_eff == times[0])
        out[hit] = values[0, col[hit]]
        status[hit] = np.where(np.isnan(out[hit]), STATUS_GAP, STATUS_OK)
        status[m & ~hit] = STATUS_OUT_OF_SPAN
        return (out, status, rate) if with_rate else (out, status)
    i0 = np.clip(np.searchsorted(times, t_eff, side="right") - 1, 0, len(times) - 2)
    i1 = i0 + 1
    c = np.where(m, col, 0)
    v0 = values[i0, c]
    v1 = values[i1, c]
    span = (times[i1] - times[i0]).astype(np.float64) / 1e9
    x = ((t_ns - times[i0]).astype(np.float64) / 1e9 + dt_s) / span
    at0 = x == 0.0
    at1 = x == 1.0
    val = np.where(at0, v0, np.where(at1, v1, v0 + (v1 - v0) * x))
    gap = np.isnan(val) | ((times[i1] - times[i0]) > max_gap_ns) & ~at0 & ~at1
    bad = np.zeros(n, dtype=bool)
    if event is not None:
        bad = event[i1, c] & ~at0
    out[m] = np.where(gap | bad, np.nan, val)[m]
    status[m] = np.where(gap, STATUS_GAP, np.where(bad, STATUS_BAD_FLAG, STATUS_OK))[m]
    if with_rate:
        rate[m] = np.where(gap | bad | np.isnan(v0 + v1), np.nan, (v1 - v0) / span)[m]
        return out, status, rate
    return out, status


# ------------------------------------------------------------------ states

@dataclasses.dataclass
class PreciseStates(SatStates):
    """:class:`ctt.orbits.SatStates` from precise products, plus what only they have.

    Shared fields: ``pos_m`` (N, 3) and ``vel_mps`` (N, 3) ECEF at
    ``t_ns + dt_s`` (GPS time); ``clock_s`` satellite clock minus the
    product's time scale (IGS time, aligned to GPS time, for every system:
    ``system_time_offset_s`` is therefore 0) *without* the periodic
    relativistic term; ``clock_drift_sps`` the slope of the clock interval
    used; ``relativity_s`` = −2 r·v / c² (IGS conventions / IERS Conventions
    2010 §10: add it to ``clock_s`` for the clock as transmitted); group
    delays ``tgd_s`` etc. NaN (IGS clocks refer to the iono-free P1/P2
    combination; a single-frequency user needs a code-bias product);
    ``iode``/``record`` −1 and ``toe_gps_ns`` int64 min (no ephemeris records);
    ``status`` codes of :data:`STATUS_NAMES` (worst of ``pos_status`` and
    ``clock_status``), reasons in :data:`STATUS_REASON`.

    Extra: ``sats``, ``t_ns``, ``dt_s`` echo the query; ``pos_status``,
    ``clock_status``; ``pco_applied`` (bool per row: moved to the phase centre).
    """

    sats: np.ndarray = None
    t_ns: np.ndarray = None
    dt_s: np.ndarray = None
    pos_status: np.ndarray = None
    clock_status: np.ndarray = None
    pco_applied: np.ndarray = None

    def reason(self, status=None):
        """Reason text of each row's status (or of the given codes)."""
        from ..orbits import reason as _orbit_reason

        def one(k):  # codes this module does not use are ctt.orbits' codes
            return STATUS_REASON[k] if k in STATUS_REASON else str(_orbit_reason(k))

        st = np.asarray(self.status if status is None else status)
        if st.ndim == 0:
            return one(int(st))
        return np.array([one(int(k)) for k in st.ravel()], dtype=object).reshape(st.shape)


#: ANTEX frequency pair whose iono-free combination gives the phase centre per system.
IF_FREQUENCIES = {"G": ("G01", "G02"), "E": ("E01", "E05"), "R": ("R01", "R02"),
                  "C": ("C02", "C06"), "J": ("J01", "J02"), "I": ("I05", "I09")}
#: Carrier frequencies (MHz) of the ANTEX frequency codes used above (system ICDs, common practice).
_FREQ_MHZ = {"G01": 1575.42, "G02": 1227.60, "G05": 1176.45, "E01": 1575.42, "E05": 1176.45,
             "E07": 1207.14, "R01": 1602.0, "R02": 1246.0, "C02": 1561.098, "C06": 1268.52,
             "C07": 1207.14, "J01": 1575.42, "J02": 1227.60, "I05": 1176.45, "I09": 2492.028}


class PreciseOrbits:
    """Satellite positions, velocities and clocks from precise products.

    ``sp3``: an :class:`SP3Data`, a path, or a sequence of them (adjacent
    files are merged so the span continues across midnight). ``clk``: a
    :class:`ClockData` or path; its ``AS`` clocks replace the SP3 clocks.
    ``antex``: an :class:`AntexData` or path; when given, positions are moved
    from the centre of mass to the antenna phase centre of the iono-free
    combination (:data:`IF_FREQUENCIES`) in the nominal yaw-steering attitude
    (:func:`body_frame`, Sun from :func:`sun_position_ecef`). The velocity is
    not corrected for the attitude rotation (≤ 1 mm/s). Without ANTEX
    :attr:`pco_applied` is False and :attr:`pco_note` says positions are of
    the centre of mass.
    """

    def __init__(self, sp3, clk=None, antex=None, *, order_points: int = 10,
                 max_clock_gap_s: float | None = None):
        if isinstance(sp3, (str, pathlib.Path)):
            sp3 = read_sp3(sp3)
        elif not isinstance(sp3, SP3Data):
            sp3 = merge_sp3([read_sp3(p) if isinstance(p, (str, pathlib.Path)) else p for p in sp3])
        if isinstance(clk, (str, pathlib.Path)):
            clk = read_clock(clk)
        if isinstance(antex, (str, pathlib.Path)):
            antex = read_antex(antex)
        if order_points < 2:
            raise ValueError("order_points must be at least 2")
        self.sp3 = sp3
        self.clk = clk
        self.antex = antex
        self.order_points = int(order_points)
        self.max_clock_gap_s = max_clock_gap_s
        self._node_gap_ns = int(1.5 * sp3.interval_s * 1e9) if len(sp3.time_ns) > 1 else 0
        self.pco_applied = antex is not None
        self._pco = {}
        if antex is not None:
            mid = int(sp3.time_ns[len(sp3.time_ns) // 2]) if len(sp3.time_ns) else 0
            for s in sp3.sats:
                blk = antex.offset(str(s), mid)
                if blk is None:
                    continue
                pco = _if_offset(str(s)[0], blk["pco_m"])
                if pco is not None:
                    self._pco[str(s)] = pco
            missing = [str(s) for s in sp3.sats if str(s) not in self._pco]
            self.pco_note = ("positions moved to the iono-free antenna phase centre with "
                             f"{antex.path}" + (f"; no offset for {', '.join(missing)}" if missing else ""))
        else:
            self.pco_note = ("no ANTEX file: positions are of the satellite centre of mass "
                             "(broadcast ephemerides give the antenna phase centre)")

    # -- positions
    def _positions(self, col, t_ns, dt_s):
        sp3 = self.sp3
        n = len(t_ns)
        pos = np.full((n, 3), np.nan)
        vel = np.full((n, 3), np.nan)
        status = np.full(n, STATUS_NO_DATA, dtype=np.int8)
        times = sp3.time_ns
        n_ep = len(times)
        has = col >= 0
        if n_ep < 2 or not has.any():
            return pos, vel, status
        has_any = np.zeros(n, dtype=bool)
        valid_col = ~np.isnan(sp3.pos_m[..., 0]).all(axis=0)
        has_any[has] = valid_col[col[has]]
        t_eff = t_ns + np.rint(dt_s * 1e9).astype(np.int64)
        inside = (t_eff >= times[0]) & (t_eff <= times[-1])
        status[has_any & ~inside] = STATUS_OUT_OF_SPAN
        m = has_any & inside
        if not m.any():
            return pos, vel, status
        K = min(self.order_points, n_ep)
        i0 = np.clip(np.searchsorted(times, t_eff[m], side="right") - 1, 0, n_ep - 2)
        start = np.clip(i0 - (K // 2 - 1), 0, n_ep - K)
        win = start[:, None] + np.arange(K)[None, :]          # (M, K) node indices
        c = col[m]
        ref = times[start]
        h = sp3.interval_s
        nodes = (times[win] - ref[:, None]).astype(np.float64) / 1e9 / h
        u = ((t_ns[m] - ref).astype(np.float64) / 1e9 + dt_s[m]) / h
        vals = sp3.pos_m[win, c[:, None]]                    # (M, K, 3)
        w, dw = _lagrange(u, nodes)
        p = np.einsum("mk,mkc->mc", w, vals)
        v = np.einsum("mk,mkc->mc", dw, vals) / h
        gap = np.isnan(vals).any(axis=(1, 2)) | (np.diff(times[win], axis=1) > self._node_gap_ns).any(axis=1)
        flag = sp3.manoeuvre[win, c[:, None]].any(axis=1)
        st = np.where(gap, STATUS_GAP, np.where(flag, STATUS_BAD_FLAG, STATUS_OK)).astype(np.int8)
        p[st != STATUS_OK] = np.nan
        v[st != STATUS_OK] = np.nan
        pos[m], vel[m], status[m] = p, v, st
        return pos, vel, status

    def states(self, sats, t_ns, dt_s=0.0, *, strict: bool = False):
        """States at ``t_ns + dt_s`` (GPS time) for each (satellite, instant) row.

        ``sats`` (N,) ids, ``t_ns`` (N,) int64, ``dt_s`` scalar or (N,)
        float64 seconds. Rows that cannot be served are NaN with a status
        code; with ``strict=True`` any row outside the span or across a gap
        raises :class:`OutOfSpanError` naming the first such row.
        """
        sats = np.asarray(sats, dtype=str).reshape(-1)
        t_ns = np.asarray(t_ns, dtype=np.int64).reshape(-1)
        if t_ns.shape != sats.shape:
            t_ns = np.broadcast_to(t_ns, sats.shape).copy()
        dt_s = np.broadcast_to(np.asarray(dt_s, dtype=np.float64), sats.shape).astype(np.float64)
        col = _columns(self.sp3.sats, sats)
        pos, vel, pst = self._positions(col, t_ns, dt_s)
        if self.clk is not None:
            cs = self.clk.satellites
            ccol = _columns(cs.names, sats)
            clock, cst, drift = _interp_linear(cs.time_ns, cs.bias_s, ccol, t_ns, dt_s,
                                               _max_gap_ns(cs.time_ns, self.max_clock_gap_s), None, True)
        else:
            clock, cst, drift = _interp_linear(self.sp3.time_ns, self.sp3.clock_s, col, t_ns, dt_s,
                                               _max_gap_ns(self.sp3.time_ns, self.max_clock_gap_s),
                                               self.sp3.clock_event, True)
        applied = np.zeros(len(sats), dtype=bool)
        if self._pco:
            off = np.array([self._pco.get(s, (np.nan, np.nan, np.nan)) for s in np.unique(sats)])
            uniq, inv = np.unique(sats, return_inverse=True)
            body = off[inv]
            have = ~np.isnan(body).any(axis=1) & (pst == STATUS_OK)
            if have.any():
                sun = sun_position_ecef(t_ns[have], dt_s[have])
                ex, ey, ez = body_frame(pos[have], sun)
                b = body[have]
                pos[have] = pos[have] + b[:, :1] * ex + b[:, 1:2] * ey + b[:, 2:3] * ez
                applied[have] = True
        rel = -2.0 * np.einsum("nc,nc->n", pos, vel) / C_MPS**2
        status = np.where(pst != STATUS_OK, pst, cst).astype(np.int64)
        if strict:
            bad = np.flatnonzero(np.isin(status, (STATUS_OUT_OF_SPAN, STATUS_GAP)))
            if len(bad):
                k = int(bad[0])
                from ..timescales import to_iso
                raise OutOfSpanError(
                    f"{self.sp3.path}: {sats[k]} at {to_iso(int(t_ns[k]), 3, ' GPS')}: {STATUS_REASON[int(status[k])]}"
                    f" (product spans {to_iso(int(self.sp3.time_ns[0]), 0, '')} to "
                    f"{to_iso(int(self.sp3.time_ns[-1]), 0, '')} GPS; {len(bad)} rows affected)")
        n = len(sats)
        nan = np.full(n, np.nan)
        return PreciseStates(
            pos_m=pos, vel_mps=vel, clock_s=clock, clock_drift_sps=drift, relativity_s=rel,
            tgd_s=nan.copy(), bgd_e5a_s=nan.copy(), bgd_e5b_s=nan.copy(), tgd1_s=nan.copy(), tgd2_s=nan.copy(),
            iode=np.full(n, -1, dtype=np.int64), status=status,
            toe_gps_ns=np.full(n, np.iinfo(np.int64).min, dtype=np.int64), record=np.full(n, -1, dtype=np.int64),
            system=sats.astype("U1"),
            system_time_offset_s=np.zeros(n),
            sats=sats, t_ns=t_ns, dt_s=dt_s, pos_status=pst, clock_status=cst, pco_applied=applied)

    @property
    def span_ns(self):
        """(first, last) instant of the orbit data, GPS ns."""
        return int(self.sp3.time_ns[0]), int(self.sp3.time_ns[-1])


def _if_offset(system: str, pco: dict):
    """Iono-free combination of two frequencies' offsets (body frame, m); one frequency if alone."""
    f1, f2 = IF_FREQUENCIES.get(system, (None, None))
    if f1 in pco and f2 in pco and f1 in _FREQ_MHZ and f2 in _FREQ_MHZ:
        a, b = _FREQ_MHZ[f1] ** 2, _FREQ_MHZ[f2] ** 2
        return tuple((a * np.array(pco[f1]) - b * np.array(pco[f2])) / (a - b))
    for f in (f1, f2):
        if f in pco:
            return tuple(pco[f])
    return None


# ------------------------------------------------------------------ diagnostics

def leave_one_out(sp3: SP3Data, order_points: int = 10):
    """Leave-one-out interpolation errors of an SP3 file's own nodes.

    For each epoch with ``order_points // 2`` nodes on either side, predict
    it from those neighbours (the node itself removed) and compare with the
    file. Returns ``(pos_err_m (E, S, 3), clock_err_s (E, S), epochs)``
    where ``epochs`` are the indices predicted; the clock prediction is
    linear between the two neighbours (a 2 × interval span, pessimistic).
    NaN where a neighbour or the node itself is missing.
    """
    n_ep = len(sp3.time_ns)
    half = order_points // 2
    epochs = np.arange(half, n_ep - half)
    if not len(epochs):
        return np.zeros((0, len(sp3.sats), 3)), np.zeros((0, len(sp3.sats))), epochs
    offs = np.concatenate([np.arange(-half, 0), np.arange(1, half + 1)])
    win = epochs[:, None] + offs[None, :]                                   # (E, K)
    h = sp3.interval_s
    ref = sp3.time_ns[epochs]
    nodes = (sp3.time_ns[win] - ref[:, None]).astype(np.float64) / 1e9 / h
    w, _ = _lagrange(np.zeros(len(epochs)), nodes)                          # (E, K)
    pred = np.einsum("ek,eksc->esc", w, sp3.pos_m[win])
    pos_err = pred - sp3.pos_m[epochs]
    t0, t1 = sp3.time_ns[epochs - 1], sp3.time_ns[epochs + 1]
    x = ((ref - t0) / (t1 - t0)).astype(np.float64)[:, None]
    c_pred = sp3.clock_s[epochs - 1] + (sp3.clock_s[epochs + 1] - sp3.clock_s[epochs - 1]) * x
    return pos_err, c_pred - sp3.clock_s[epochs], epochs


#: Short alias of :func:`read_clock`.
read_clk = read_clock
