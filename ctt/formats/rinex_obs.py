"""RINEX observation reader: versions 2.00-2.11, 3.00-3.05 and 4.00-4.02.

``read_obs(path)`` returns an :class:`ObsData` with the header
(:class:`ObsHeader`), epochs as int64 calendar-count nanoseconds of the file's
time system (``header.time_system``; see :mod:`ctt.timescales`), satellites,
and for every observation code a float64 array ``(n_epoch, n_sat)`` with NaN
where the file has no value, plus loss-of-lock (LLI) and signal-strength (SSI)
indicators as int8 (-1 where blank).

How the data section is read
----------------------------
The text is turned into one ``uint8`` buffer. In the common case (data
epochs only) the epoch records are found in bulk: by their leading ``>`` in
RINEX 3/4, by their fixed layout in RINEX 2, and accepted when every record's
satellite count chains exactly to the next one. Otherwise (events, or a
problem to locate) a Python walk visits the *epoch records only*, one step
per epoch. Everything per satellite and per value is done in bulk with
numpy: every satellite record is cut from
the buffer into a fixed-width character matrix (RINEX 2 records spanning
several 80-column lines are laid side by side), and all observation fields are
decoded at once. Values are decoded exactly: an ``F14.3`` field is read as an
integer count of thousandths and divided by 1000, which gives the same double
as ``float(text)`` (one correctly rounded division of exact integers).
Epoch seconds (``F11.7``) are read digit by digit into int64 nanoseconds, with
no floating point. Values in another right-aligned decimal layout are read
with ``float`` one field at a time (slow, but exact).

Bad input raises :class:`ctt.errors.RinexFormatError` with the file, the
1-based line and what the format expects there (the earliest problem in the
file); ``on_error="skip"`` drops the bad epochs instead, lists them in
``ObsData.dropped`` and warns once with their count.

Epoch flags (RINEX 2.11 and 3.05, "EPOCH/SAT" record)
-----------------------------------------------------
* 0 OK, 1 power failure since the previous epoch: observation data.
* 2 antenna moved, 3 new site occupation, 4 header information, 5 external
  event: the count field gives the number of header records that follow.
  They are recorded in ``events`` (with the header labels parsed into
  ``changes``). New observation-type records (flag 3/4) are *applied*: the
  epochs after them are decoded with the new types.
* 6 cycle-slip records: same layout as observation records, recorded in
  ``events`` and never mixed into the data.

RINEX 2 observation codes
-------------------------
RINEX 2 two-letter codes are mapped to RINEX 3 three-character codes
(band + tracking attribute: RINEX 3.04 section 5.1 "Observation codes",
Tables 4-10 per system; 3.05 keeps them). RINEX 2 does not say how a signal
was tracked, so the choice per system is the one that fits what receivers
of the RINEX 2 era delivered; the table is :data:`V2_TO_V3`:

========  ========================================================================
system    mapping
========  ========================================================================
GPS       C1->C1C  P1->C1W  L1->L1C  D1->D1C  S1->S1C
          C2->C2X  P2->C2W  L2->L2W  D2->D2W  S2->S2W
          C5->C5X  L5->L5X  D5->D5X  S5->S5X
GLONASS   C1->C1C  P1->C1P  L1->L1C  D1->D1C  S1->S1C
          C2->C2C  P2->C2P  L2->L2P  D2->D2P  S2->S2P
Galileo   C1->C1X  L1->L1X  (E1 B+C), C5/L5->C5X/L5X (E5a I+Q),
          C7->C7X (E5b), C8->C8X (E5a+b), C6->C6X (E6 B+C); D, S likewise
SBAS      C1->C1C  L1->L1C  D1->D1C S1->S1C, C5->C5I L5->L5I ...
QZSS      C1->C1C  L1->L1C  C2->C2X  L2->L2X  C5->C5X  L5->L5X
BeiDou    C1/C2->C2I (B1I; RINEX 3.02+ band 2), C7->C7I, C6->C6I
IRNSS     C5->C5A  C9->C9A
========  ========================================================================

A two-letter code with no equivalent for a system (``P1`` of a Galileo
satellite, say) keeps its two-letter name as the key of ``obs``.

Choices where the RINEX 2 code leaves the tracking open: GPS ``P1``/``P2``
under anti-spoofing are Z-tracking, attribute ``W`` (3.05 "Z-tracking and
similar (AS on)"); GPS ``L2``/``D2``/``S2`` go with ``P2`` (``W``) because
RINEX 2.11 defines L2 as the phase of the P(Y)-code signal; GPS ``C2`` is
the L2C code, whose M/L split RINEX 2 does not record, hence ``X`` (M+L);
GPS ``L1`` goes with the C/A code (``C``). The original two-letter codes are
kept in ``header.obs_types_v2`` and ``header.v2_to_v3``.
"""

from __future__ import annotations

import dataclasses
import logging
import math
import re
import warnings
from dataclasses import dataclass, field

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from ..errors import RinexFormatError
from ..timescales import NS_PER_S, civil_to_ns, normalise_scale, to_datetime64, to_iso
from .compression import display_name, read_bytes

log = logging.getLogger(__name__)

__all__ = ["ObsHeader", "ObsData", "read_obs", "read_obs_header", "V2_TO_V3", "SUPPORTED_VERSIONS"]

SYSTEMS = "GRECJSI"
SYSTEM_NAMES = {"G": "GPS", "R": "GLONASS", "E": "Galileo", "C": "BeiDou", "J": "QZSS",
                "S": "SBAS", "I": "IRNSS/NavIC", "M": "mixed"}
#: Versions that exist and are read. RINEX 2.00-2.02 (from memory: 2.00 the
#: original version 2, 2.01/2.02 adding GLONASS and GEO satellites) share the
#: 2.10 record layout that is read here; the differences (2.10 added the S/D
#: types' signal-strength convention and the receiver clock offset flag, 2.11
#: the C2/L5 codes; 2.12, a draft adding Galileo, found in some archives) are in
#: which observation types appear, and the RINEX 2 -> 3 code table covers them all. Some archive tools write the
#: version as a bare integer ("     2", no decimals): that is version 2.00.
SUPPORTED_VERSIONS = (2.00, 2.01, 2.02, 2.10, 2.11, 2.12, 3.00, 3.01, 3.02, 3.03, 3.04, 3.05, 4.00, 4.01, 4.02)

# Default time system when TIME OF FIRST OBS leaves it blank (RINEX 3.05, TIME OF
# FIRST OBS: "GPS for pure GPS files, GLO for pure GLONASS files, GAL for pure
# Galileo files", and so on; mixed files must state it, GPS is assumed).
_DEFAULT_TIME_SYSTEM = {"G": "GPS", "R": "GLO", "E": "GST", "C": "BDT", "J": "QZS", "I": "IRN",
                        "S": "GPS", "M": "GPS"}


def _map(pairs: str) -> dict[str, str]:
    return dict(p.split(">") for p in pairs.split())


#: RINEX 2 -> RINEX 3 observation codes per system (see the module docstring).
V2_TO_V3: dict[str, dict[str, str]] = {
    "G": _map("C1>C1C P1>C1W L1>L1C D1>D1C S1>S1C C2>C2X P2>C2W L2>L2W D2>D2W S2>S2W "
              "C5>C5X L5>L5X D5>D5X S5>S5X"),
    "R": _map("C1>C1C P1>C1P L1>L1C D1>D1C S1>S1C C2>C2C P2>C2P L2>L2P D2>D2P S2>S2P"),
    "E": _map("C1>C1X L1>L1X D1>D1X S1>S1X C5>C5X L5>L5X D5>D5X S5>S5X C7>C7X L7>L7X D7>D7X "
              "S7>S7X C8>C8X L8>L8X D8>D8X S8>S8X C6>C6X L6>L6X D6>D6X S6>S6X"),
    "S": _map("C1>C1C L1>L1C D1>D1C S1>S1C C5>C5I L5>L5I D5>D5I S5>S5I"),
    "J": _map("C1>C1C L1>L1C D1>D1C S1>S1C C2>C2X L2>L2X D2>D2X S2>S2X C5>C5X L5>L5X D5>D5X "
              "S5>S5X C6>C6X L6>L6X D6>D6X S6>S6X"),
    "C": _map("C1>C2I L1>L2I D1>D2I S1>S2I C2>C2I L2>L2I D2>D2I S2>S2I C7>C7I L7>L7I D7>D7I "
              "S7>S7I C6>C6I L6>L6I D6>D6I S6>S6I"),
    "I": _map("C5>C5A L5>L5A D5>D5A S5>S5A C9>C9A L9>L9A D9>D9A S9>S9A"),
}


# ============================================================== data classes

@dataclass
class ObsHeader:
    """Header of a RINEX observation file (fields absent from the file are None/NaN/empty)."""

    version: float
    file_type: str = "O"
    system: str = "G"  #: file satellite system: G R E C J S I or M (mixed)
    program: str = ""
    run_by: str = ""
    date: str = ""
    marker_name: str = ""
    marker_number: str = ""
    marker_type: str = ""
    observer: str = ""
    agency: str = ""
    receiver_serial: str = ""
    receiver_type: str = ""
    receiver_version: str = ""
    antenna_serial: str = ""
    antenna_type: str = ""
    approx_position_m: np.ndarray = field(default_factory=lambda: np.full(3, np.nan))
    antenna_delta_hen_m: np.ndarray = field(default_factory=lambda: np.zeros(3))
    #: RINEX 3 codes per system, in file order (for RINEX 2: mapped, see V2_TO_V3).
    obs_types: dict = field(default_factory=dict)
    #: RINEX 2 only: the original two-letter codes (same list for every system).
    obs_types_v2: list = field(default_factory=list)
    #: RINEX 2 only: per system, two-letter code -> RINEX 3 code.
    v2_to_v3: dict = field(default_factory=dict)
    interval_s: float = math.nan
    time_first_ns: int | None = None
    time_last_ns: int | None = None
    time_system: str = "GPS"
    leap_seconds: int | None = None
    rcv_clock_offset_applied: int | None = None
    glonass_slots: dict = field(default_factory=dict)  #: 'R01' -> frequency number k
    glonass_code_phase_bias: dict = field(default_factory=dict)  #: 'C1C' -> metres
    phase_shifts: list = field(default_factory=list)  #: dicts: system, code, shift_cycles, sats
    scale_factors: dict = field(default_factory=dict)  #: (system, code) -> factor
    signal_strength_unit: str = ""
    wavelength_factors: tuple | None = None  #: RINEX 2: (L1, L2) default factors
    n_satellites: int | None = None
    comments: list = field(default_factory=list)
    n_lines: int = 0  #: number of header lines (the data start on the next line)

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["approx_position_m"] = [float(v) for v in self.approx_position_m]
        d["antenna_delta_hen_m"] = [float(v) for v in self.antenna_delta_hen_m]
        d["scale_factors"] = {f"{s} {c}": v for (s, c), v in self.scale_factors.items()}
        return d


@dataclass
class ObsData:
    """Observations of one RINEX file; see the module docstring."""

    path: str
    header: ObsHeader
    time_ns: np.ndarray  #: int64 (n_epoch,), calendar-count ns of header.time_system
    sats: np.ndarray  #: str (n_sat,), sorted, e.g. 'G07'
    obs: dict  #: code -> float64 (n_epoch, n_sat), NaN where absent
    lli: dict  #: code -> int8 (n_epoch, n_sat), -1 where blank
    ssi: dict  #: code -> int8 (n_epoch, n_sat), -1 where blank
    epoch_flag: np.ndarray  #: int8 (n_epoch,): 0 or 1
    clock_offset_s: np.ndarray  #: float64 (n_epoch,), NaN when the file gives none
    #: epoch-flag events 2-6, dicts: ``time_ns`` (None when the record leaves it blank),
    #: ``flag``, ``line`` (1-based), ``records`` (the raw lines that follow), ``changes``
    #: (header label -> texts), ``applied`` (decoded marker, antenna delta, position...;
    #: observation-type changes are applied to the epochs after them); RINEX 2 slip
    #: records (flag 6) also carry ``sats``, their satellite list.
    events: list = field(default_factory=list)
    dropped: list = field(default_factory=list)  #: (line number, reason) of skipped epochs

    @property
    def time_system(self) -> str:
        return self.header.time_system

    @property
    def codes(self) -> list:
        return list(self.obs)

    def __repr__(self) -> str:
        return (f"ObsData({self.path!r}, {len(self.time_ns)} epochs, {len(self.sats)} satellites, "
                f"codes {' '.join(self.obs)})")

    def to_xarray(self, indicators: bool = False):
        """xarray Dataset with dims ``time`` (datetime64[ns], same calendar), ``sv``.

        With ``indicators`` each code also gets ``<code>lli`` and ``<code>ssi``
        variables (float, NaN where blank).
        """
        import xarray

        coords = {"time": to_datetime64(self.time_ns), "sv": self.sats.astype(str)}
        data = {}
        for code, arr in self.obs.items():
            data[code] = (("time", "sv"), arr)
            if indicators:
                for suffix, src in (("lli", self.lli), ("ssi", self.ssi)):
                    ind = src[code].astype(np.float64)
                    ind[src[code] < 0] = np.nan
                    data[code + suffix] = (("time", "sv"), ind)
        ds = xarray.Dataset(data, coords=coords)
        ds.attrs.update(version=self.header.version, interval=self.header.interval_s,
                        time_system=self.header.time_system, rinextype="obs",
                        position=[float(v) for v in self.header.approx_position_m],
                        marker_name=self.header.marker_name, filename=self.path)
        return ds

    def to_dataframe(self):
        """Long table: one row per present value (time_ns, sv, code, value, lli, ssi)."""
        import pandas as pd

        parts = []
        for code, arr in self.obs.items():
            ie, js = np.nonzero(~np.isnan(arr))
            parts.append(pd.DataFrame({
                "time_ns": self.time_ns[ie], "sv": self.sats[js], "code": code,
                "value": arr[ie, js], "lli": self.lli[code][ie, js], "ssi": self.ssi[code][ie, js]}))
        if not parts:
            return pd.DataFrame(columns=["time_ns", "sv", "code", "value", "lli", "ssi"])
        df = pd.concat(parts, ignore_index=True)
        return df.sort_values(["time_ns", "sv", "code"], kind="stable").reset_index(drop=True)

    def interval(self) -> float:
        """Sampling interval (s): the header INTERVAL, else the median epoch spacing."""
        if np.isfinite(self.header.interval_s) and self.header.interval_s > 0:
            return float(self.header.interval_s)
        if len(self.time_ns) > 1:
            return float(np.median(np.diff(self.time_ns))) / NS_PER_S
        return math.nan

    def gaps(self) -> dict:
        """Missing epochs relative to the interval: count, longest gap (s) and where it starts."""
        iv = self.interval()
        out = {"missing_epochs": 0, "longest_gap_s": 0.0, "longest_gap_after": None, "n_gaps": 0}
        if len(self.time_ns) < 2 or not np.isfinite(iv):
            return out
        step = int(round(iv * NS_PER_S))
        d = np.diff(self.time_ns)
        missing = np.maximum(np.rint(d / step).astype(np.int64) - 1, 0)
        out["missing_epochs"] = int(missing.sum())
        out["n_gaps"] = int(np.count_nonzero(missing))
        if out["n_gaps"]:
            k = int(np.argmax(d))
            out["longest_gap_s"] = float(d[k] - step) / NS_PER_S
            out["longest_gap_after"] = str(to_iso(self.time_ns[k], 7, ""))
        return out

    def summary(self) -> dict:
        """Plain-data overview (used by ``ctt info``)."""
        h = self.header
        systems = sorted({s[0] for s in self.sats}, key=SYSTEMS.index)
        counts = {c: int(np.count_nonzero(~np.isnan(a))) for c, a in self.obs.items()}
        per_sys_counts = {}
        for s in systems:
            cols = np.char.startswith(self.sats.astype(str), s)
            per_sys_counts[s] = {c: int(np.count_nonzero(~np.isnan(self.obs[c][:, cols])))
                                 for c in h.obs_types.get(s, []) if c in self.obs}
        flags = {}
        for ev in self.events:
            flags[str(ev["flag"])] = flags.get(str(ev["flag"]), 0) + 1
        n_power = int(np.count_nonzero(self.epoch_flag == 1))
        if n_power:
            flags["1"] = n_power
        return {
            "path": self.path,
            "version": h.version,
            "file_system": h.system,
            "marker_name": h.marker_name,
            "marker_number": h.marker_number,
            "receiver": {"type": h.receiver_type, "serial": h.receiver_serial, "version": h.receiver_version},
            "antenna": {"type": h.antenna_type, "serial": h.antenna_serial,
                        "delta_hen_m": [float(v) for v in h.antenna_delta_hen_m]},
            "approx_position_m": [float(v) for v in h.approx_position_m],
            "time_system": h.time_system,
            "first_epoch": str(to_iso(self.time_ns[0], 7, "")) if len(self.time_ns) else None,
            "last_epoch": str(to_iso(self.time_ns[-1], 7, "")) if len(self.time_ns) else None,
            "interval_s": self.interval(),
            "n_epochs": int(len(self.time_ns)),
            "systems": systems,
            "n_satellites": int(len(self.sats)),
            "satellites": [str(s) for s in self.sats],
            "obs_types": {s: list(h.obs_types.get(s, [])) for s in systems} if systems else dict(h.obs_types),
            "obs_types_v2": list(h.obs_types_v2),
            "counts": counts,
            "counts_per_system": per_sys_counts,
            "gaps": self.gaps(),
            "epoch_flags": flags,
            "events": [{"time": (str(to_iso(e["time_ns"], 7, "")) if e["time_ns"] is not None else None),
                        "flag": e["flag"], "line": e["line"], "n_records": len(e["records"])}
                       for e in self.events],
            "clock_offsets": int(np.count_nonzero(~np.isnan(self.clock_offset_s))),
            "dropped": [list(d) for d in self.dropped],
        }


# ============================================================== small parsers

class _Source:
    """The file's text as a byte buffer with line offsets (1-based line numbers in messages)."""

    def __init__(self, path, raw: bytes):
        self.path = display_name(path)
        self.raw = raw
        self.buf = np.frombuffer(raw, dtype=np.uint8)
        nl = np.flatnonzero(self.buf == 10)
        starts = np.concatenate(([0], nl + 1))
        ends = np.concatenate((nl, [len(raw)]))
        if starts[-1] == len(raw):  # text ends with a newline: no empty last line
            starts, ends = starts[:-1], ends[:-1]
        # drop a carriage return before the newline
        has_cr = (ends > starts) & (self.buf[np.maximum(ends - 1, 0)] == 13)
        ends = ends - has_cr
        self.starts = starts.astype(np.int64)
        self.ends = ends.astype(np.int64)
        self.n = len(starts)
        self._pad = None

    def line(self, i: int) -> str:
        return self.raw[self.starts[i]:self.ends[i]].decode("latin-1")

    def error(self, i, expected, found=None):
        """RinexFormatError at 0-based line index i (None: no line)."""
        if found is None and i is not None and 0 <= i < self.n:
            found = self.line(i)
        return RinexFormatError(self.path, None if i is None else i + 1, expected, found)

    def matrix(self, idx: np.ndarray, width: int, offset: int = 0) -> np.ndarray:
        """Characters [offset, offset+width) of lines ``idx`` as uint8 (n, width), blank-padded.

        Rows are copied whole from a sliding-window view of the buffer (one
        memory copy per row, no per-character index), then the columns past
        each line's end are blanked.
        """
        if self._pad is None or len(self._pad) < len(self.buf) + width + offset + 1:
            self._pad = np.concatenate((self.buf, np.full(width + offset + 4096, 32, np.uint8)))
        idx = np.asarray(idx, dtype=np.int64)
        s = self.starts[idx] + offset
        ln = np.clip(self.ends[idx] - s, 0, width)
        m = sliding_window_view(self._pad, width)[s]
        small = np.int16 if width < 32000 else np.int64
        np.putmask(m, np.arange(width, dtype=small) >= ln.astype(small)[:, None], np.uint8(32))
        return m


_DIGIT_LUT = np.full(256, -1, np.int8)
_DIGIT_LUT[48:58] = np.arange(10)


def _int_fields(m: np.ndarray, allow_blank=False):
    """Right-aligned unsigned integers in a uint8 matrix (n, w) -> (int64 values, ok mask)."""
    d = _DIGIT_LUT[m]
    isdig = d >= 0
    blank = m == 32
    started = np.maximum.accumulate(~blank, axis=1)
    ok = np.all(isdig | (blank & ~started), axis=1)
    allblank = ~started[:, -1]
    ok &= allow_blank | ~allblank
    w = 10 ** np.arange(m.shape[1] - 1, -1, -1, dtype=np.int64)
    val = (np.where(isdig, d, 0).astype(np.int64) * w).sum(axis=1)
    return val, ok


_U64 = np.uint64
_BLANK8 = _U64(0x2020202020202020)
_LOW6 = _U64(0x0000FFFFFFFFFFFF)  # bytes 0-5 of a little-endian word
# What each of the 16 columns of an observation field (F14.3, I1, I1) may hold
_COL = np.arange(16)
_MAY_DIGIT = np.ones(16, bool)
_MAY_DIGIT[10] = False
_MAY_BLANK = (_COL < 9) | (_COL >= 14)
_MAY_MINUS = _COL < 9
_MAY_POINT = _COL == 10
_HEAD_1_9 = (_COL >= 1) & (_COL <= 9)


def _byte_masks(cols: np.ndarray):
    """16 column flags -> two little-endian words with byte 0x01 where the flag is set."""
    b = cols.astype(np.uint8)
    return (_U64(int.from_bytes(b[:8].tobytes(), "little")), _U64(int.from_bytes(b[8:].tobytes(), "little")))


_ONES8 = _U64(0x0101010101010101)
_MASKS = {"digit": _byte_masks(_MAY_DIGIT), "blank": _byte_masks(_MAY_BLANK),
          "minus": _byte_masks(_MAY_MINUS), "point": _byte_masks(_MAY_POINT),
          "head": _byte_masks(_HEAD_1_9)}


def _swar8(x):
    """Eight digit values (0-9, one per byte; first byte most significant, words
    little-endian) -> the integer they spell (SWAR digit folding, common practice)."""
    x = (x * _U64(10) + (x >> _U64(8))) & _U64(0x00FF00FF00FF00FF)
    x = (x * _U64(100) + (x >> _U64(16))) & _U64(0x0000FFFF0000FFFF)
    x = (x * _U64(10000) + (x >> _U64(32))) & _U64(0x00000000FFFFFFFF)
    return x


def _num_fields(f: np.ndarray):
    """Decode observation fields: uint8 (M, 16) C-contiguous, each F14.3 + LLI I1 + SSI I1.

    Returns (values float64 with NaN for a blank value, bad bool, lli int8, ssi
    int8 with -1 for blank). The fast path accepts the layout the standard
    prescribes (point in column 11, three decimals, leading blanks, optional
    minus sign right before the digits): the ten integer and three decimal
    digits are folded eight bytes at a time into an exact integer count of
    thousandths, and one division by 1000 gives the same double as float(text).
    Other non-blank text that is still a right-aligned decimal number is
    decoded one field at a time with float(); anything else is ``bad``.
    """
    m = f.shape[0]
    f = np.ascontiguousarray(f)
    d = f - np.uint8(48)
    dig = d < 10
    blank = f == 32
    minus = f == 45
    digits = (d * dig).view(np.uint64).reshape(m, 2)
    hi = _swar8(digits[:, 0].copy())                       # columns 1-8
    lo = _swar8(digits[:, 1] & _LOW6) // _U64(100)          # columns 9,10,'.',12-14 -> ab0cde
    thou = hi * _U64(100000) + (lo // _U64(10000)) * _U64(1000) + lo % _U64(10000)
    fw = f.view(np.uint64).reshape(m, 2)
    allblank = (fw[:, 0] == _BLANK8) & ((fw[:, 1] & _LOW6) == (_BLANK8 & _LOW6))
    # character classes checked eight columns at a time: each bool byte is 0 or 1
    dw = dig.view(np.uint64).reshape(m, 2)
    bw = blank.view(np.uint64).reshape(m, 2)
    mw = minus.view(np.uint64).reshape(m, 2)
    pw = (f == 46).view(np.uint64).reshape(m, 2)
    # order within columns 1-10: no blank after a sign or digit, a sign only first
    rank = dig.view(np.uint8) * np.uint8(2) + minus.view(np.uint8)
    rf, bf, mf = rank.ravel(), blank.ravel(), minus.ravel()
    order = np.zeros(m * 16, bool)
    order[1:] = (rf[1:] < rf[:-1]) | (mf[1:] & ~bf[:-1])
    ow = order.view(np.uint64).reshape(m, 2)
    bad_w = []
    for j in (0, 1):
        ok = ((dw[:, j] & _MASKS["digit"][j]) | (bw[:, j] & _MASKS["blank"][j])
              | (mw[:, j] & _MASKS["minus"][j]) | (pw[:, j] & _MASKS["point"][j]))
        bad_w.append((ok ^ _ONES8) | (ow[:, j] & _MASKS["head"][j]))
    bad_val = ((bad_w[0] | (bad_w[1] & _LOW6)) != 0) & ~allblank
    bad_ind = (bad_w[1] & ~_LOW6) != 0
    neg = (mw[:, 0] | mw[:, 1]) != 0
    val = thou.astype(np.float64)
    np.negative(val, out=val, where=neg)
    val /= 1000.0
    val[allblank] = np.nan
    if bad_val.any():
        for k in np.flatnonzero(bad_val):
            text = f[k, :14].tobytes().decode("latin-1")
            if _PLAIN_NUMBER.match(text):
                val[k] = float(text)
                bad_val[k] = False
    lli = np.where(dig[:, 14], d[:, 14], 255).astype(np.uint8).view(np.int8)
    ssi = np.where(dig[:, 15], d[:, 15], 255).astype(np.uint8).view(np.int8)
    return val, bad_val | bad_ind, lli, ssi


# Right-aligned decimals with another number of decimals than three (seen from
# some writers). A field that stops early (a cut line: "20000105.") or trails
# blanks is refused, since its value would be silently wrong.
_PLAIN_NUMBER = re.compile(r"^ *-?\d*\.\d+$")


def _float_or(text: str, default=math.nan, *, src=None, line=None, what="a number"):
    t = text.strip()
    if not t:
        return default
    try:
        return float(t.replace("D", "E").replace("d", "e"))
    except ValueError:
        if src is None:
            raise
        raise src.error(line, what, text) from None


def _int_or(text: str, default=None, *, src=None, line=None, what="an integer"):
    t = text.strip()
    if not t:
        return default
    try:
        return int(t)
    except ValueError:
        if src is None:
            raise
        raise src.error(line, what, text) from None


def _seconds_to_ns(text: str) -> int:
    """Decimal seconds text to exact integer ns (no floating point)."""
    t = text.strip()
    if not re.fullmatch(r"\d+(\.\d*)?", t):
        raise ValueError(t)
    whole, _, frac = t.partition(".")
    frac = (frac + "000000000")[:9]
    return int(whole) * NS_PER_S + int(frac)


def _header_time(text: str, src, i) -> int:
    """TIME OF FIRST/LAST OBS fields (5I6, F13.7) to calendar-count ns."""
    try:
        y, mo, d, h, mi = (int(text[k:k + 6]) for k in range(0, 30, 6))
        ns = _seconds_to_ns(text[30:43])
    except ValueError:
        raise src.error(i, "a time as 5I6,F13.7 (year month day hour minute seconds)") from None
    return int(civil_to_ns(y, mo, d, h, mi, 0, ns))


def _changes_from_records(records: list[str]) -> dict:
    """Header labels inside an event (flags 2-5) -> their text (first 60 columns)."""
    out: dict = {}
    for rec in records:
        label = rec[60:80].strip()
        if label:
            out.setdefault(label, []).append(rec[:60].rstrip())
    return out


def _applied_from_changes(changes: dict) -> dict:
    """The station facts an event changes, decoded: marker name/number, antenna
    delta H/E/N and approximate position (m), antenna and receiver types."""
    out: dict = {}
    try:
        if "MARKER NAME" in changes:
            out["marker_name"] = changes["MARKER NAME"][-1].strip()
        if "MARKER NUMBER" in changes:
            out["marker_number"] = changes["MARKER NUMBER"][-1][:20].strip()
        if "ANTENNA: DELTA H/E/N" in changes:
            t = changes["ANTENNA: DELTA H/E/N"][-1].ljust(42)
            out["antenna_delta_hen_m"] = np.array([float(t[k:k + 14] or 0) for k in (0, 14, 28)])
        if "APPROX POSITION XYZ" in changes:
            t = changes["APPROX POSITION XYZ"][-1].ljust(42)
            out["approx_position_m"] = np.array([float(t[k:k + 14]) for k in (0, 14, 28)])
        if "ANT # / TYPE" in changes:
            t = changes["ANT # / TYPE"][-1].ljust(40)
            out["antenna_serial"], out["antenna_type"] = t[:20].strip(), t[20:40].strip()
        if "REC # / TYPE / VERS" in changes:
            t = changes["REC # / TYPE / VERS"][-1].ljust(60)
            out["receiver_serial"], out["receiver_type"], out["receiver_version"] = (
                t[:20].strip(), t[20:40].strip(), t[40:60].strip())
    except ValueError:
        out["unreadable"] = True
    return out


# ============================================================== header

def _parse_header(src: _Source) -> ObsHeader:
    if src.n == 0:
        raise src.error(None, "a RINEX observation file", "an empty file")
    first = src.line(0)
    if first[60:80].strip() != "RINEX VERSION / TYPE":
        raise src.error(0, "'RINEX VERSION / TYPE' in columns 61-80 of the first line")
    try:
        version = float(first[:9])
    except ValueError:
        raise src.error(0, "a version number (F9.2) in columns 1-9") from None
    if round(version, 2) not in SUPPORTED_VERSIONS:
        raise src.error(0, "RINEX version 2.00-2.02, 2.10-2.12, 3.00-3.05 or 4.00-4.02", first[:9].strip())
    version = round(version, 2)
    ftype = first[20:21].upper()
    if ftype != "O":
        raise src.error(0, "file type 'O' (observation data) in column 21", first[20:21])
    system = first[40:41].upper() or " "
    if system == " ":
        system = "G"  # RINEX 2.11: blank means GPS
    if system not in SYSTEMS + "M":
        raise src.error(0, f"a satellite system ({' '.join(SYSTEMS)} or M) in column 41", first[40:41])
    h = ObsHeader(version=version, file_type=ftype, system=system)
    v2 = version < 3
    v2_types: list[str] = []
    v2_count = None
    pending = None  # (kind, system, remaining count) for continuation lines
    first_time_sys = ""
    i = 1
    end = None
    while i < src.n:
        ln = src.line(i)
        label = ln[60:80].strip()
        body = ln[:60]
        if label == "END OF HEADER":
            end = i
            break
        if not label and ((not v2 and ln.startswith(">")) or (v2 and _looks_like_v2_epoch(ln))):
            break  # data before END OF HEADER
        if pending is not None and label in ("# / TYPES OF OBSERV", "SYS / # / OBS TYPES") \
                and body[:6].strip() == "" and (not body[:1].strip()):
            kind, s, remaining = pending
            codes = body[6:60].split()
            if kind == "v2":
                v2_types += codes
                remaining -= len(codes)
            else:
                h.obs_types[s] += codes
                remaining -= len(codes)
            pending = (kind, s, remaining) if remaining > 0 else None
            i += 1
            continue
        if label == "PGM / RUN BY / DATE":
            h.program, h.run_by, h.date = body[:20].strip(), body[20:40].strip(), body[40:60].strip()
        elif label == "COMMENT":
            h.comments.append(body.rstrip())
        elif label == "MARKER NAME":
            h.marker_name = body.strip()
        elif label == "MARKER NUMBER":
            h.marker_number = body[:20].strip()
        elif label == "MARKER TYPE":
            h.marker_type = body[:20].strip()
        elif label == "OBSERVER / AGENCY":
            h.observer, h.agency = body[:20].strip(), body[20:60].strip()
        elif label == "REC # / TYPE / VERS":
            h.receiver_serial, h.receiver_type, h.receiver_version = (
                body[:20].strip(), body[20:40].strip(), body[40:60].strip())
        elif label == "ANT # / TYPE":
            h.antenna_serial, h.antenna_type = body[:20].strip(), body[20:40].strip()
        elif label == "APPROX POSITION XYZ":
            h.approx_position_m = np.array([_float_or(body[k:k + 14], src=src, line=i,
                                                      what="three coordinates as 3F14.4")
                                            for k in (0, 14, 28)])
        elif label == "ANTENNA: DELTA H/E/N":
            h.antenna_delta_hen_m = np.array([_float_or(body[k:k + 14], 0.0, src=src, line=i,
                                                        what="three offsets as 3F14.4")
                                              for k in (0, 14, 28)])
        elif label == "# / TYPES OF OBSERV" and v2:
            n = _int_or(body[:6], src=src, line=i, what="the number of observation types (I6)")
            if n is None:
                raise src.error(i, "the number of observation types (I6) in columns 1-6")
            v2_count = n
            v2_types = body[6:60].split()
            pending = ("v2", None, n - len(v2_types)) if n > len(v2_types) else None
        elif label == "SYS / # / OBS TYPES" and not v2:
            s = body[0:1]
            n = _int_or(body[3:6], src=src, line=i, what="the number of observation types (I3)")
            if s not in SYSTEMS or n is None:
                raise src.error(i, "a system letter (col 1) and a number of types (cols 4-6)")
            h.obs_types[s] = body[6:60].split()
            pending = ("v3", s, n - len(h.obs_types[s])) if n > len(h.obs_types[s]) else None
            h._declared = getattr(h, "_declared", {})
            h._declared[s] = (n, i)
        elif label == "INTERVAL":
            h.interval_s = _float_or(body[:10], src=src, line=i, what="the interval in seconds (F10.3)")
        elif label == "TIME OF FIRST OBS":
            h.time_first_ns = _header_time(body, src, i)
            first_time_sys = body[48:51].strip()
        elif label == "TIME OF LAST OBS":
            h.time_last_ns = _header_time(body, src, i)
        elif label == "LEAP SECONDS":
            h.leap_seconds = _int_or(body[:6], src=src, line=i, what="leap seconds (I6)")
        elif label == "RCV CLOCK OFFS APPL":
            h.rcv_clock_offset_applied = _int_or(body[:6], src=src, line=i, what="0 or 1 (I6)")
        elif label == "# OF SATELLITES":
            h.n_satellites = _int_or(body[:6], src=src, line=i, what="a number of satellites (I6)")
        elif label == "SIGNAL STRENGTH UNIT":
            h.signal_strength_unit = body[:20].strip()
        elif label == "WAVELENGTH FACT L1/2":
            if h.wavelength_factors is None:
                h.wavelength_factors = (_int_or(body[:6], src=src, line=i), _int_or(body[6:12], src=src, line=i))
        elif label == "GLONASS SLOT / FRQ #":
            toks = body[4:60].split()
            for k in range(0, len(toks) - 1, 2):
                sat = toks[k]
                if len(sat) == 3 and sat[0] == "R":
                    try:
                        h.glonass_slots[sat] = int(toks[k + 1])
                    except ValueError:
                        raise src.error(i, "pairs of GLONASS slot and frequency number") from None
        elif label == "GLONASS COD/PHS/BIS":
            toks = body.split()
            for k in range(0, len(toks) - 1, 2):
                h.glonass_code_phase_bias[toks[k]] = _float_or(toks[k + 1], src=src, line=i)
        elif label == "SYS / PHASE SHIFT":
            s = body[0:1].strip()
            if s:
                code = body[2:5].strip()
                shift = _float_or(body[6:14], 0.0, src=src, line=i, what="a phase shift (F8.5)")
                nsat = _int_or(body[16:18], 0, src=src, line=i) or 0
                sats = body[19:60].split()
                h.phase_shifts.append({"system": s, "code": code, "shift_cycles": shift,
                                       "sats": sats, "_n": nsat})
            elif h.phase_shifts:  # continuation line of satellites
                h.phase_shifts[-1]["sats"] += body[19:60].split()
        elif label == "SYS / SCALE FACTOR":
            s = body[0:1].strip()
            if s:
                factor = _int_or(body[2:6], 1, src=src, line=i, what="a scale factor (I4)")
                nc = _int_or(body[8:10], 0, src=src, line=i) or 0
                codes = body[10:60].split()
                for c in (codes if nc else h.obs_types.get(s, [])):
                    h.scale_factors[(s, c)] = factor
                h._last_scale = (s, factor)
            elif getattr(h, "_last_scale", None):
                s, factor = h._last_scale
                for c in body[10:60].split():
                    h.scale_factors[(s, c)] = factor
        i += 1
    if end is None:
        where = i if i < src.n else src.n - 1
        raise src.error(where, "an 'END OF HEADER' record before the data")
    h.n_lines = end + 1
    for ps in h.phase_shifts:
        ps.pop("_n", None)
    if v2:
        if v2_count is None:
            raise src.error(end, "a '# / TYPES OF OBSERV' record in the header", "END OF HEADER")
        if len(v2_types) != v2_count:
            raise src.error(end, f"{v2_count} observation types as declared", f"{len(v2_types)} types")
        bad = [c for c in v2_types if not re.fullmatch(r"[CPLDS][1-9]", c)]
        if bad:
            raise src.error(None, "RINEX 2 observation codes such as C1 P2 L1 D1 S1", " ".join(bad))
        h.obs_types_v2 = list(v2_types)
        if h.system != "M":  # mixed files: filled by read_obs for the systems present
            h.v2_to_v3 = {h.system: _v2_map_for(h, h.system)}
            h.obs_types = {h.system: [h.v2_to_v3[h.system][c] for c in v2_types]}
    else:
        for s, (n, li) in getattr(h, "_declared", {}).items():
            if len(h.obs_types[s]) != n:
                raise src.error(li, f"{n} observation types for system {s} as declared",
                                f"{len(h.obs_types[s])} types")
            bad = [c for c in h.obs_types[s] if not re.fullmatch(r"[CLDSX][0-9][A-Z]", c)]
            if bad:
                raise src.error(li, "RINEX 3 observation codes such as C1C L2W", " ".join(bad))
        if not h.obs_types:
            raise src.error(end, "at least one 'SYS / # / OBS TYPES' record", "END OF HEADER")
    for attr in ("_declared", "_last_scale"):
        if hasattr(h, attr):
            delattr(h, attr)
    ts = first_time_sys or _DEFAULT_TIME_SYSTEM[h.system]
    try:
        h.time_system = normalise_scale(ts)
    except Exception:
        raise src.error(None, "a time system GPS GLO GAL BDT QZS IRN in TIME OF FIRST OBS", ts) from None
    return h


def _v2_map_for(h: ObsHeader, s: str) -> dict:
    """Two-letter -> three-character map of this file's types for system ``s``."""
    table = V2_TO_V3.get(s, {})
    out = {}
    for c in h.obs_types_v2:
        v3 = table.get(c)
        if v3 is None or v3 in out.values():
            # no RINEX 3 equivalent for this system (e.g. P1 for Galileo), or a second
            # code on the same signal: keep the two-letter name rather than invent one
            v3 = c
        out[c] = v3
    return out


# ============================================================== data walk

class _Walk:
    """What the epoch walk found: data epochs and their satellite-record lines."""

    def __init__(self):
        self.ep_line = []      # 0-based line index of each data epoch record
        self.ep_flag = []
        self.ep_seg = []       # segment (layout) number
        self.ep_nsat = []
        self.rec_first = []    # per data epoch: line index of the first satellite record
        self.sat_text = []     # RINEX 2: the satellite list of each data epoch (3 chars each)
        self.events = []
        self.errors = []       # (line number, RinexFormatError)


def _bad(src, walk, on_error, i, expected, found=None):
    """Record a bad epoch; in "raise" mode the earliest one is raised once the walk is done."""
    walk.errors.append((int(i) + 1, src.error(i, expected, found)))


def _walk_v3(src: _Source, h: ObsHeader, on_error: str, seg_types: list) -> _Walk:
    walk = _Walk()
    n = src.n
    i = h.n_lines
    raw = src.raw
    first_char = src.buf[np.minimum(src.starts, len(raw) - 1)] if len(raw) else np.zeros(0, np.uint8)
    is_epoch = (first_char == 62) & (src.ends > src.starts)
    if _fast_walk_v3(src, h, is_epoch, walk):
        return walk
    starts, ends = src.starts.tolist(), src.ends.tolist()
    seg = 0
    while i < n:
        s0, e0 = starts[i], ends[i]
        if e0 == s0 or not raw[s0:e0].strip():
            i += 1
            continue
        ln = raw[s0:e0].decode("latin-1")
        if ln[0] != ">":
            _bad(src, walk, on_error, i, "an epoch record starting with '>'")
            i = _next_epoch_v3(is_epoch, i + 1)
            continue
        flag_c = ln[31:32]
        cnt = ln[32:35].strip()
        if flag_c not in "0123456" or not flag_c.strip() or not cnt.isdigit():
            _bad(src, walk, on_error, i, "an epoch flag 0-6 (col 32) and a record count (cols 33-35)")
            i = _next_epoch_v3(is_epoch, i + 1)
            continue
        flag, k = int(flag_c), int(cnt)
        if i + k >= n:
            _bad(src, walk, on_error, i, f"{k} records after this epoch record (the file ends after "
                                         f"line {n})")
            break
        nxt = i + 1 + k
        # the count must agree with the lines: no epoch record inside, one right after
        inside = is_epoch[i + 1:nxt]
        if flag in (0, 1, 6) and inside.any():
            j = i + 1 + int(np.argmax(inside))
            _bad(src, walk, on_error, j, f"{k} satellite records after the epoch record at line {i + 1} "
                                         "(its satellite count disagrees with the lines)")
            i = j
            continue
        if nxt < n and not is_epoch[nxt] and raw[starts[nxt]:ends[nxt]].strip() and flag in (0, 1, 6):
            _bad(src, walk, on_error, nxt, f"an epoch record after the {k} satellite records of the "
                                           f"epoch at line {i + 1} (its satellite count disagrees with the lines)")
            i = _next_epoch_v3(is_epoch, nxt)
            continue
        if flag in (0, 1):
            walk.ep_line.append(i)
            walk.ep_flag.append(flag)
            walk.ep_seg.append(seg)
            walk.ep_nsat.append(k)
            walk.rec_first.append(i + 1)
        else:
            records = [raw[starts[j]:ends[j]].decode("latin-1") for j in range(i + 1, nxt)]
            ev = {"time_ns": None, "flag": flag, "line": i + 1, "records": records,
                  "changes": {} if flag == 6 else _changes_from_records(records), "_epoch": ln}
            ev["applied"] = _applied_from_changes(ev["changes"])
            walk.events.append(ev)
            if flag in (3, 4) and "SYS / # / OBS TYPES" in ev["changes"]:
                new = _types_from_event_v3(src, h, i, records, seg_types[-1])
                seg_types.append(new)
                seg += 1
        i = nxt
    return walk


def _fast_walk_v3(src: _Source, h: ObsHeader, is_epoch: np.ndarray, walk: _Walk) -> bool:
    """The common case in bulk: only data epochs (flags 0/1) whose counts chain exactly
    from one '>' record to the next. Returns False (nothing filled) otherwise, and the
    epoch-by-epoch walk then finds and reports what differs."""
    n0, n = h.n_lines, src.n
    ep = np.flatnonzero(is_epoch[n0:]) + n0
    if len(ep) == 0:
        return False
    m = src.matrix(ep, 35)
    flag = m[:, 31] - np.uint8(48)
    cnt, ok = _int_fields(m[:, 32:35])
    nxt = ep + 1 + cnt
    empty = src.ends == src.starts
    if not (ok.all() and (flag <= 1).all() and np.array_equal(nxt[:-1], ep[1:]) and nxt[-1] <= n
            and empty[n0:ep[0]].all() and empty[nxt[-1]:].all()):
        return False
    walk.ep_line = ep
    walk.ep_flag = flag.astype(np.int8)
    walk.ep_seg = np.zeros(len(ep), np.int64)
    walk.ep_nsat = cnt
    walk.rec_first = ep + 1
    return True


def _next_epoch_v3(is_epoch, i):
    nz = np.flatnonzero(is_epoch[i:])
    return i + int(nz[0]) if len(nz) else len(is_epoch)


def _types_from_event_v3(src, h, i, records, current):
    new = dict(current)
    pend = None
    for rec in records:
        if rec[60:80].strip() != "SYS / # / OBS TYPES":
            continue
        if rec[0:1].strip():
            s = rec[0]
            new[s] = rec[6:60].split()
            pend = s
        elif pend:
            new[pend] = new[pend] + rec[6:60].split()
    return new


_V2_EPOCH_RE = re.compile(r"^ [ \d]\d [ \d]\d [ \d]\d [ \d]\d [ \d]\d [ \d]\d\.\d{7}  [0-6][ \d]{2}\d")


def _looks_like_v2_epoch(text: str) -> bool:
    return bool(_V2_EPOCH_RE.match(text))


def _fast_walk_v2(src: _Source, h: ObsHeader, nl_sv: int, walk: _Walk) -> bool:
    """Bulk walk of a RINEX 2 data section holding only data epochs (flags 0/1).

    Candidate epoch records are found by their fixed layout (blanks between the
    date fields, the seconds point in column 19, flag in column 29); they are
    accepted only if every record's satellite count chains exactly to the next
    candidate (continuation lines of the satellite list, then ``nl_sv`` lines per
    satellite). Returns False otherwise, and the epoch-by-epoch walk takes over.
    """
    n0, n = h.n_lines, src.n
    if n <= n0:
        return False
    lines = np.arange(n0, n)
    m = src.matrix(lines, 32)
    dig = (m - np.uint8(48)) < 10
    cand = ((m[:, 0] == 32) & (m[:, 3] == 32) & (m[:, 6] == 32) & (m[:, 9] == 32) & (m[:, 12] == 32)
            & (m[:, 18] == 46) & dig[:, 17] & dig[:, 19:26].all(axis=1) & (m[:, 26] == 32)
            & (m[:, 27] == 32) & dig[:, 31] & (m[:, 28] >= 48) & (m[:, 28] <= 54))
    ep = lines[cand]
    if len(ep) == 0:
        return False
    me = m[cand]
    flag = me[:, 28] - np.uint8(48)
    cnt, ok = _int_fields(me[:, 29:32])
    n_cont = np.maximum(-(-cnt // 12) - 1, 0)
    nxt = ep + 1 + n_cont + cnt * nl_sv
    empty = src.ends == src.starts
    if not (ok.all() and (flag <= 1).all() and np.array_equal(nxt[:-1], ep[1:]) and nxt[-1] <= n
            and empty[n0:ep[0]].all() and empty[nxt[-1]:].all()):
        return False
    # satellite lists: columns 33-68 of the epoch record and of its continuation lines
    total = int(n_cont.sum())
    if total:
        first_cont = np.repeat(ep + 1, n_cont) + (np.arange(total) - np.repeat(np.cumsum(n_cont) - n_cont, n_cont))
        cont_text = src.matrix(first_cont, 36, offset=32)
    sat_rows = src.matrix(ep, 36, offset=32)
    texts = []
    ci = 0
    for k, (c, nc) in enumerate(zip(cnt.tolist(), n_cont.tolist())):
        row = sat_rows[k].tobytes()
        if nc:
            row += cont_text[ci:ci + nc].tobytes()
            ci += nc
        texts.append(row[:3 * c].decode("latin-1"))
    walk.ep_line = ep
    walk.ep_flag = flag.astype(np.int8)
    walk.ep_seg = np.zeros(len(ep), np.int64)
    walk.ep_nsat = cnt
    walk.rec_first = ep + 1 + n_cont
    walk.sat_text = texts
    return True


def _walk_v2(src: _Source, h: ObsHeader, on_error: str, seg_types: list) -> _Walk:
    walk = _Walk()
    if _fast_walk_v2(src, h, -(-len(seg_types[0]) // 5), walk):
        return walk
    n = src.n
    i = h.n_lines
    raw = src.raw
    starts, ends = src.starts.tolist(), src.ends.tolist()
    seg = 0
    nl_sv = -(-len(seg_types[0]) // 5)
    while i < n:
        s0, e0 = starts[i], ends[i]
        if e0 == s0 or not raw[s0:e0].strip():
            i += 1
            continue
        ln = raw[s0:e0].decode("latin-1")
        flag_c = ln[28:29]
        cnt = ln[29:32].strip()
        if not flag_c.strip() or flag_c not in "0123456" or not cnt.isdigit() \
                or (flag_c in "016" and not _looks_like_v2_epoch(ln)):
            _bad(src, walk, on_error, i, "an epoch record (yy mm dd hh mm ss.sssssss, flag in col 29, "
                                         "satellite count in cols 30-32)")
            i = _resync_v2(src, i + 1)
            continue
        flag, k = int(flag_c), int(cnt)
        if flag in (2, 3, 4, 5):
            nxt = i + 1 + k
            if nxt > n:
                _bad(src, walk, on_error, i, f"{k} header records after this event record "
                                             f"(the file ends after line {n})")
                break
            records = [raw[starts[j]:ends[j]].decode("latin-1") for j in range(i + 1, nxt)]
            ev = {"time_ns": None, "flag": flag, "line": i + 1, "records": records,
                  "changes": _changes_from_records(records), "_epoch": ln}
            ev["applied"] = _applied_from_changes(ev["changes"])
            walk.events.append(ev)
            if flag in (3, 4) and "# / TYPES OF OBSERV" in ev["changes"]:
                types = []
                for rec in records:
                    if rec[60:80].strip() == "# / TYPES OF OBSERV":
                        types += rec[6:60].split()
                seg_types.append(types)
                seg += 1
                nl_sv = -(-len(types) // 5)
            i = nxt
            continue
        n_cont = max(-(-k // 12) - 1, 0)
        sat_text = ln[32:68]
        for c in range(1, n_cont + 1):
            if i + c >= n:
                break
            sat_text += src.line(i + c)[32:68]
        sat_text = sat_text[:3 * k]
        first = i + 1 + n_cont
        nxt = first + k * nl_sv
        if len(sat_text.rstrip()) < 3 * k - 2 or nxt > n:
            what = (f"{k} satellites in the epoch record" if nxt <= n
                    else f"{k} satellite records of {nl_sv} lines after this epoch record "
                         f"(the file ends after line {n})")
            _bad(src, walk, on_error, i, what)
            if nxt > n:
                break
            i = _resync_v2(src, i + 1)
            continue
        if flag == 6:
            records = [raw[starts[j]:ends[j]].decode("latin-1") for j in range(i + 1, nxt)]
            walk.events.append({"time_ns": None, "flag": 6, "line": i + 1, "records": records,
                                "changes": {}, "applied": {}, "sats": sat_text, "_epoch": ln})
        else:
            walk.ep_line.append(i)
            walk.ep_flag.append(flag)
            walk.ep_seg.append(seg)
            walk.ep_nsat.append(k)
            walk.rec_first.append(first)
            walk.sat_text.append(sat_text.ljust(3 * k))
        i = nxt
    return walk


def _resync_v2(src, i):
    while i < src.n and not _looks_like_v2_epoch(src.line(i)):
        i += 1
    return i


# ============================================================== epochs

def _epoch_times(src: _Source, lines: np.ndarray, v2: bool):
    """Vectorised epoch-record times -> (int64 ns, ok mask)."""
    if len(lines) == 0:
        return np.zeros(0, np.int64), np.zeros(0, bool)
    if v2:
        m = src.matrix(lines, 26)
        fields = [(1, 3), (4, 6), (7, 9), (10, 12), (13, 15), (15, 18)]
        point, frac = 18, (19, 26)
    else:
        m = src.matrix(lines, 29)
        fields = [(2, 6), (7, 9), (10, 12), (13, 15), (16, 18), (18, 21)]
        point, frac = 21, (22, 29)
    vals = []
    ok = np.ones(len(lines), bool)
    for a, b in fields:
        v, o = _int_fields(m[:, a:b])
        vals.append(v)
        ok &= o
    fm = m[:, frac[0]:frac[1]]
    fv, fo = _int_fields(fm)
    ok &= fo & (m[:, point] == 46) & ((fm - np.uint8(48)) < 10).all(axis=1)  # all seven decimals
    y, mo, d, hh, mi, ss = vals
    if v2:
        y = np.where(y < 80, y + 2000, y + 1900)
    ok &= (mo >= 1) & (mo <= 12) & (d >= 1) & (d <= 31) & (hh <= 23) & (mi <= 59) & (ss <= 60)
    ns = civil_to_ns(y, np.where(ok, mo, 1), np.where(ok, d, 1), hh, mi, ss, fv * 100)
    return np.asarray(ns, np.int64), ok


def _event_time(src, ev, v2):
    """Epoch of an event record, or None where the time fields are blank (allowed for flags 2-4)."""
    ln = ev["_epoch"]
    text = ln[1:26] if v2 else ln[2:29]
    if not text.strip():
        return None
    t, ok = _epoch_times(src, np.array([ev["line"] - 1]), v2)
    if not ok[0]:
        return None
    return int(t[0])


# ============================================================== records

_SYS_OK = np.zeros(256, bool)
_SYS_OK[np.frombuffer(SYSTEMS.encode(), np.uint8)] = True


def _sat_ids(m3: np.ndarray, blank_is_gps: bool):
    """uint8 (n, 3) satellite ids -> (int codes letter*100+number, ok mask).

    In RINEX 2 a blank system letter means GPS (RINEX 2.11 section 5.1); RINEX 3
    requires the letter. A blank tens digit is a zero ('G 7' is G07). Integer
    codes sort like the 'G07' strings.
    """
    letter = np.where(m3[:, 0] == 32, np.uint8(ord("G")), m3[:, 0]) if blank_is_gps else m3[:, 0]
    tens = np.where(m3[:, 1] == 32, np.uint8(48), m3[:, 1]) - np.uint8(48)
    ones = m3[:, 2] - np.uint8(48)
    ok = _SYS_OK[letter] & (tens < 10) & (ones < 10)
    code = letter.astype(np.int64) * 100 + tens.astype(np.int64) * 10 + ones
    return code, ok


def _sat_names(codes: np.ndarray) -> np.ndarray:
    """Integer satellite codes -> 'G07' strings."""
    return np.array([f"{chr(c // 100)}{c % 100:02d}" for c in codes.tolist()], dtype="U3")


_CHUNK_FIELDS = 2_000_000  # observation fields decoded per block (32 MB of characters)


def _decode(src: _Source, walk: _Walk, h: ObsHeader, seg_types: list, v2: bool):
    """Bulk-decode all satellite records.

    Returns a list of segments (seg, rec_ep, sat codes, system letters as uint8,
    values (n_rec, n_types), lli, ssi) and the per-epoch "bad" mask with reasons.
    """
    n_ep = len(walk.ep_line)
    nsat = np.asarray(walk.ep_nsat, np.int64)
    rec_ep = np.repeat(np.arange(n_ep), nsat)
    first = np.asarray(walk.rec_first, np.int64)
    within = np.arange(len(rec_ep)) - np.repeat(np.cumsum(nsat) - nsat, nsat)
    seg_of_ep = np.asarray(walk.ep_seg, np.int64)
    ep_line = np.asarray(walk.ep_line, np.int64)
    out = []
    bad_ep = np.zeros(n_ep, bool)
    bad_reason: dict = {}
    sat_all = None
    if v2 and len(rec_ep):
        sat_all = np.frombuffer("".join(walk.sat_text).encode("latin-1"), np.uint8).reshape(-1, 3)
    for seg, types in enumerate(seg_types):
        sel = seg_of_ep[rec_ep] == seg if len(seg_types) > 1 else slice(None)
        r_ep = rec_ep[sel]
        if len(r_ep) == 0:
            continue
        r_in = within[sel]
        if v2:
            nf = len(types)
            nl_sv = -(-nf // 5)
            line0 = first[r_ep] + r_in * nl_sv
            ids, idok = _sat_ids(sat_all[sel], True)
            ntypes = None
        else:
            nl_sv = 1
            line0 = first[r_ep] + r_in
            nf = max(len(v) for v in types.values())
            ids, idok = _sat_ids(src.matrix(line0, 3), False)
            sysb = (ids // 100).astype(np.uint8)
            ntypes = np.full(len(ids), -1, np.int64)
            for sname, v in types.items():
                ntypes[sysb == ord(sname)] = len(v)
            for r in np.flatnonzero((ntypes < 0) & idok)[:1000]:
                _mark(bad_ep, bad_reason, r_ep[r], line0[r],
                      "a satellite of a system with observation types in the header "
                      f"({' '.join(sorted(types))})", src.line(int(line0[r]))[:3])
        for r in np.flatnonzero(~idok)[:1000]:
            li = ep_line[r_ep[r]] if v2 else line0[r]
            _mark(bad_ep, bad_reason, r_ep[r], li,
                  "satellite ids like G07 (system letter G R E C J S I and two digits)")
        n_rec = len(ids)
        vals = np.empty((n_rec, nf))
        badf = np.empty((n_rec, nf), bool)
        lli = np.empty((n_rec, nf), np.int8)
        ssi = np.empty((n_rec, nf), np.int8)
        step = max(1, _CHUNK_FIELDS // nf)  # bounded temporaries for large (1 Hz) files
        for a in range(0, n_rec, step):
            b = min(n_rec, a + step)
            if v2:
                parts = [src.matrix(line0[a:b] + k, 80) for k in range(nl_sv)]
                m = parts[0] if nl_sv == 1 else np.concatenate(parts, axis=1)
                fields = np.ascontiguousarray(m[:, :16 * nf]).reshape(-1, 16)
                # a record line that is really an epoch record: the satellite count disagrees
                for k, mm in enumerate(parts):
                    looks = ((mm[:, 18] == 46) & (mm[:, 3] == 32) & (mm[:, 6] == 32) & (mm[:, 9] == 32)
                             & (mm[:, 12] == 32) & (mm[:, 15] == 32) & (mm[:, 19] - np.uint8(48) < 10)
                             & (mm[:, 28] >= 48) & (mm[:, 28] <= 54))
                    for r in (np.flatnonzero(looks) + a).tolist():
                        ep = r_ep[r]
                        _mark(bad_ep, bad_reason, ep, line0[r] + k,
                              f"{walk.ep_nsat[ep]} satellite records of {nl_sv} line(s) after the epoch "
                              f"record at line {ep_line[ep] + 1} (its satellite count disagrees with "
                              "the lines)")
            else:
                fields = src.matrix(line0[a:b], 16 * nf, offset=3).reshape(-1, 16)
            v, bd, li, si = _num_fields(fields)
            vals[a:b], badf[a:b] = v.reshape(-1, nf), bd.reshape(-1, nf)
            lli[a:b], ssi[a:b] = li.reshape(-1, nf), si.reshape(-1, nf)
        if ntypes is not None and (ntypes < nf).any():
            # columns past a system's own types are checked by line length below
            badf &= np.arange(nf)[None, :] < ntypes[:, None]
        # text past the last declared field: the header and the data disagree
        if v2:
            checks = [(line0 + k, 16 * min(5, nf - 5 * k)) for k in range(nl_sv)]
        else:
            checks = [(line0, 3 + 16 * np.maximum(ntypes, 0))]
        for lines_k, limit in checks:
            long = np.flatnonzero(src.ends[lines_k] - src.starts[lines_k] > limit)
            if len(long):
                lim = np.broadcast_to(limit, lines_k.shape)[long]
                width = int((src.ends[lines_k[long]] - src.starts[lines_k[long]]).max())
                tail = src.matrix(lines_k[long], width)
                beyond = (tail != 32) & (np.arange(width)[None, :] >= lim[:, None])
                for j in np.flatnonzero(beyond.any(axis=1))[:1000].tolist():
                    r = long[j]
                    _mark(bad_ep, bad_reason, r_ep[r], lines_k[r],
                          f"nothing after column {int(lim[j])} (the header declares "
                          f"{nf if v2 else int(ntypes[r])} observation types)",
                          tail[j, lim[j]:].tobytes().decode("latin-1"))
        if badf.any():
            rr, kk = np.nonzero(badf)
            for r, k in zip(rr[:1000].tolist(), kk[:1000].tolist()):
                line = line0[r] + (k // 5 if v2 else 0)
                what = "an observation as F14.3 with loss-of-lock and signal-strength digits (I1, I1)"
                col = 16 * (k % 5) if v2 else 3 + 16 * k
                text = src.matrix(np.array([line]), 16, offset=col)[0].tobytes().decode("latin-1")
                _mark(bad_ep, bad_reason, r_ep[r], line, what, text)
        out.append((seg, r_ep, ids, (ids // 100).astype(np.uint8), vals, lli, ssi))
    return out, bad_ep, bad_reason


def _mark(bad_ep, bad_reason, ep, line, expected, found=None):
    ep = int(ep)
    bad_ep[ep] = True
    if ep not in bad_reason:
        bad_reason[ep] = (int(line), expected, found)


# ============================================================== entry points

def _clock_offsets(src, walk, ep_lines, v2, on_error):
    """Receiver clock offsets (s) of the data epochs: RINEX 2 F12.9 in columns 69-80,
    RINEX 3/4 F15.12 in columns 42-56 (RINEX 2.11 Table A2; RINEX 3.05 observation
    data record description)."""
    clock = np.full(len(ep_lines), np.nan)
    if not len(ep_lines):
        return clock
    a, w = (68, 12) if v2 else (41, 15)
    m = src.matrix(ep_lines, w, offset=a)
    present = np.flatnonzero((m != 32).any(axis=1))
    for e in present.tolist():
        txt = m[e].tobytes().decode("latin-1")
        try:
            clock[e] = float(txt)
        except ValueError:
            _bad(src, walk, on_error, int(ep_lines[e]), "a receiver clock offset in seconds "
                 f"({'F12.9, columns 69-80' if v2 else 'F15.12, columns 42-56'})", txt)
    return clock


def read_obs_header(path) -> ObsHeader:
    """Only the header of a RINEX observation file."""
    src = _Source(path, read_bytes(path))
    return _parse_header(src)


def read_obs(path, *, on_error: str = "raise", systems=None, codes=None) -> ObsData:
    """Read a RINEX 2.10/2.11, 3.00-3.05 or 4.00-4.02 observation file (any compression).

    ``on_error``: ``"raise"`` (default) raises :class:`ctt.errors.RinexFormatError`
    naming the file, line and what was expected at the first bad record;
    ``"skip"`` drops each bad epoch, warns once with the count and lists the
    dropped epochs in ``ObsData.dropped`` as ``(line number, reason)``.
    ``systems``: letters to keep (e.g. ``"GE"``); ``codes``: observation codes
    to keep (RINEX 3 codes, or for RINEX 2 files their two-letter codes too).
    """
    if on_error not in ("raise", "skip"):
        raise ValueError("on_error must be 'raise' or 'skip'")
    src = _Source(path, read_bytes(path))
    h = _parse_header(src)
    v2 = h.version < 3
    if v2:
        seg_types = [list(h.obs_types_v2)]
        walk = _walk_v2(src, h, on_error, seg_types)
    else:
        seg_types = [dict(h.obs_types)]
        walk = _walk_v3(src, h, on_error, seg_types)

    ep_lines = np.asarray(walk.ep_line, np.int64)
    t_ns, t_ok = _epoch_times(src, ep_lines, v2)
    bad_time = ~t_ok
    for e in np.flatnonzero(bad_time):
        _bad(src, walk, on_error, int(ep_lines[e]), "an epoch time (year month day hour minute "
                                                    "seconds as in the format's EPOCH record)")
    clock_all = _clock_offsets(src, walk, ep_lines, v2, on_error)
    recs, bad_ep, bad_reason = _decode(src, walk, h, seg_types, v2)
    for ep in sorted(bad_reason):
        line, expected, found = bad_reason[ep]
        _bad(src, walk, on_error, line, expected, found)
    keep = ~(bad_time | bad_ep | np.isin(ep_lines, [ln - 1 for ln, _ in walk.errors]))
    # epochs must increase: a repeated or earlier epoch is an error (common practice:
    # RINEX data epochs are in time order); only data epochs (flags 0, 1) are ordered
    # An epoch not later than the latest one before it is dropped; dropping it never
    # changes that running maximum, so one cumulative maximum finds them all.
    kept = np.flatnonzero(keep)
    if len(kept) > 1:
        tk = t_ns[kept]
        run_max = np.maximum.accumulate(tk)
        back = np.flatnonzero(tk[1:] <= run_max[:-1]) + 1
        if len(back):
            pos = np.arange(len(tk))
            arg_max = np.maximum.accumulate(np.where(tk == run_max, pos, 0))
            for b in back.tolist():
                e_prev, e_bad = kept[arg_max[b - 1]], kept[b]
                what = "repeated" if t_ns[e_bad] == t_ns[e_prev] else "earlier"
                _bad(src, walk, on_error, int(ep_lines[e_bad]),
                     f"an epoch later than {to_iso(t_ns[e_prev], 7, '')} (line {ep_lines[e_prev] + 1})",
                     f"the {what} epoch {to_iso(t_ns[e_bad], 7, '')}")
            keep[kept[back]] = False
    if walk.errors and on_error == "raise":
        raise min(walk.errors, key=lambda x: x[0])[1]

    # satellites and codes
    if isinstance(systems, str):
        sys_filter = set(systems.upper())
    else:
        sys_filter = {str(x).upper() for x in systems} if systems else None
    want = set(codes) if codes is not None else None
    n_e = int(keep.sum())
    new_index = np.full(len(t_ns), -1, np.int64)
    new_index[keep] = np.arange(n_e)
    masks = []
    for seg, r_ep, ids, sysb, *_ in recs:
        msk = keep[r_ep]
        if sys_filter is not None:
            msk &= np.isin(sysb, np.frombuffer("".join(sorted(sys_filter)).encode(), np.uint8))
        masks.append(msk)
    all_codes = [r[2][msk] for r, msk in zip(recs, masks)]
    sat_codes = np.unique(np.concatenate(all_codes)) if all_codes else np.zeros(0, np.int64)
    sats = _sat_names(sat_codes)
    n_s = len(sats)

    present_sys = sorted({x[0] for x in sats.tolist()}, key=SYSTEMS.index)
    if v2:
        sys_for_types = present_sys or ([h.system] if h.system != "M" else [])
        h.v2_to_v3 = {x: _v2_map_for(h, x) for x in sys_for_types}
        h.obs_types = {x: [h.v2_to_v3[x][c] for c in h.obs_types_v2] for x in sys_for_types}
    obs, lli, ssi = {}, {}, {}

    def _slot(code):
        if code not in obs:
            obs[code] = np.full((n_e, n_s), np.nan)
            lli[code] = np.full((n_e, n_s), -1, np.int8)
            ssi[code] = np.full((n_e, n_s), -1, np.int8)

    for (seg, r_ep, ids, sysb, vals, lli_r, ssi_r), msk in zip(recs, masks):
        if not msk.any():
            continue
        all_in = bool(msk.all())
        rows = new_index[r_ep] if all_in else new_index[r_ep[msk]]
        cols = np.searchsorted(sat_codes, ids if all_in else ids[msk])
        flat = rows * max(n_s, 1) + cols
        seen = np.bincount(flat, minlength=n_e * max(n_s, 1))
        if seen.max(initial=0) > 1:
            dup = int(np.argmax(seen > 1))
            ep_orig = np.flatnonzero(keep)[dup // max(n_s, 1)]
            raise src.error(int(ep_lines[ep_orig]), "each satellite at most once per epoch",
                            f"{sats[dup % max(n_s, 1)]} twice")
        if not all_in:
            sysb, vals, lli_r, ssi_r = sysb[msk], vals[msk], lli_r[msk], ssi_r[msk]
        types = seg_types[seg]
        for sb in np.unique(sysb).tolist():
            x = chr(sb)
            rs = sysb == sb
            single = bool(rs.all())
            if v2:
                cmap = _v2_map_for(h, x)
                if any(c not in cmap for c in types):   # a system letter no RINEX 2 file has (damage)
                    first = int(np.flatnonzero(keep)[int((flat if single else flat[rs])[0]) // max(n_s, 1)])
                    raise src.error(int(ep_lines[first]), "a satellite system letter G, R, E, S or J",
                                    repr(x))
                clist = [cmap[c] for c in types]
                orig = list(types)
            else:
                clist = list(types.get(x, []))
                orig = clist
            fr = flat if single else flat[rs]
            vs, ls, ss = (vals, lli_r, ssi_r) if single else (vals[rs], lli_r[rs], ssi_r[rs])
            for k, code in enumerate(clist):
                if want is not None and code not in want and orig[k] not in want:
                    continue
                _slot(code)
                col = vs[:, k]
                factor = h.scale_factors.get((x, code))
                if factor and factor != 1:
                    col = col / factor
                obs[code].ravel()[fr] = col
                lli[code].ravel()[fr] = ls[:, k]
                ssi[code].ravel()[fr] = ss[:, k]

    clock = clock_all[keep]

    events = []
    for ev in walk.events:
        ev["time_ns"] = _event_time(src, ev, v2)
        ev.pop("_epoch", None)
        events.append(ev)

    dropped = sorted((line, str(err)) for line, err in walk.errors)
    if dropped:
        msg = (f"{src.path}: skipped {len(dropped)} bad epoch record(s); first at line "
               f"{dropped[0][0]}: {dropped[0][1]}")
        warnings.warn(msg, stacklevel=2)
        log.warning(msg)

    return ObsData(path=src.path, header=h, time_ns=t_ns[keep].astype(np.int64), sats=sats, obs=obs,
                   lli=lli, ssi=ssi, epoch_flag=np.asarray(walk.ep_flag, np.int8)[keep] if n_e else
                   np.zeros(0, np.int8), clock_offset_s=clock, events=events, dropped=dropped)
