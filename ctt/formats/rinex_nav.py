"""Broadcast navigation reader: RINEX 2.10/2.11, 3.0x and 4.0x (multi-GNSS).

``read_nav(path) -> NavData``

Supported
---------
* RINEX 2.10/2.11 GPS (``N``), GLONASS (``G``) and Galileo (``L``/``E``)
  navigation files.
* RINEX 3.0x mixed or single-system files: GPS LNAV, Galileo I/NAV and F/NAV,
  BeiDou D1/D2, QZSS LNAV, GLONASS FDMA (4 orbit lines, or 5 as in 3.05).
* RINEX 4.0x: the ``> EPH`` records of the legacy message types LNAV (GPS,
  QZSS), INAV/FNAV (Galileo), D1/D2 (BeiDou) and FDMA (GLONASS). Every other
  record (``> STO``, ``> EOP``, ``> ION``, CNAV/CNV2/... ephemerides) is
  skipped and counted in ``NavData.skipped`` by kind.
* SBAS and IRNSS/NavIC records are skipped and counted (not modelled by
  :mod:`ctt.orbits`).

Parsing is by fixed columns (the standards' D19.12 fields), so fields that
touch (``-1.234D-05-2.3D+01``) parse, Fortran ``D`` exponents are read, and
blank spare fields become NaN. Field conversion is done in bulk with numpy over
all records of a system at once.

Errors: a field that is required but blank or not a number raises
:class:`ctt.errors.RinexFormatError` naming the file, the 1-based line and the
columns expected. A record with fewer lines than its system needs (e.g. a file
cut short) is dropped and listed in ``NavData.dropped`` as ``(line, reason)``;
so are exact duplicates (common in merged daily files).

Time columns
------------
Every instant is int64 ns on the *calendar count of the record's own time
scale* (see :mod:`ctt.timescales`): GPS time for GPS, GST for Galileo, BDT for
BeiDou, QZSS time (= GPS) for QZSS, and **UTC** for GLONASS (RINEX writes the
GLONASS epoch in UTC, not in GLONASS time = UTC(SU) + 3 h). ``toc_gps_ns`` is
the same instant converted to GPS time, for sorting and display.

Week numbers: the week written in the record is kept as ``week``; the full
week used to build ``toe_ns`` / ``ttm_ns`` is ``week`` unwrapped modulo 1024
around the week of ``toc`` (:func:`ctt.timescales.unwrap_week`), so files that
write a 10-bit GPS week (the standards ask for a continuous one) are read
correctly. Galileo weeks in RINEX are aligned to GPS weeks (RINEX 3 standard),
BeiDou weeks count from 2006-01-01 BDT.

Columns common to all systems: ``sat`` (RINEX 3 id, e.g. ``G05``), ``line``
(1-based line of the record's first line), ``message`` (LNAV, INAV, FNAV, D1,
D2, FDMA), ``toc_ns`` and ``toc_gps_ns`` (see above).

Columns of ``records['G']`` / ``records['J']`` (GPS / QZSS LNAV)
    af0_s, af1_sps, af2_sps2 (clock polynomial, s, s/s, s/s²), iode, crs_m,
    delta_n_radps, m0_rad, cuc_rad, e, cus_rad, sqrt_a_sqrtm, toe_sow_s,
    cic_rad, omega0_rad, cis_rad, i0_rad, crc_m, omega_rad, omega_dot_radps,
    idot_radps, l2_codes, week (as written), l2p_flag, ura_m, health, tgd_s,
    iodc, ttm_sow_s (transmission time of message, s of week), fit_raw (as
    written), fit_h (hours), toe_week (full week), toe_ns, ttm_ns (int64 min
    when the file says unknown, 0.9999E9). GPS ``fit_h``: a value >= 4 is
    hours (RINEX: "fit interval in hours"); blank or 0 is 4 h (IS-GPS-200
    fit-interval flag 0); 1 is read as the flag 1 of IS-GPS-200 §20.3.4.4
    ("more than 4 h") and taken as 6 h. QZSS writes the flag: 0 -> 2 h, 1 ->
    4 h (QZSS IS: flag 1 "more than 2 h"; 4 h assumed).
``records['E']`` (Galileo I/NAV, F/NAV)
    as GPS without l2_codes/l2p_flag/tgd_s/iodc/fit: ``iode`` is IODnav,
    data_source (int bits as written), source ('inav' if bit 0 or 2, 'fnav' if
    bit 1 -- RINEX 3 data-source field), ura_m (SISA, negative = NAPA),
    health (bits), bgd_e5a_s (E5a/E1), bgd_e5b_s (E5b/E1).
``records['C']`` (BeiDou D1/D2)
    as GPS without l2/tgd/iodc/fit: ``iode`` is AODE, aodc, tgd1_s (B1/B3),
    tgd2_s (B2/B3), health (SatH1), week and toe in BDT; message 'D2' for GEO
    PRN 1-5 and 59-63 unless a RINEX 4 record says otherwise.
``records['R']`` (GLONASS FDMA)
    minus_tau_n_s (as written: −τ_n), tau_n_s, gamma_n, tk_s (message frame
    time as written: s of the UTC week in RINEX 3/4, s of day in RINEX 2),
    x_m, vx_mps, ax_mps2, health, y_m, vy_mps, ay_mps2, freq_num, z_m,
    vz_mps, az_mps2, age_days, status_flags, delay_l1l2_s, urai,
    health_flags (NaN when the file has no fifth line), tk_ns (UTC calendar
    count of the frame time). PZ-90 positions, velocities and luni-solar
    accelerations are converted from the file's km, km/s, km/s² to m.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from ..errors import RinexFormatError, TimeScaleError
from ..timescales import NS_PER_S, NS_PER_WEEK, SYSTEM_SCALE, civil_to_ns, convert, unwrap_week, week_sow_ns
from .compression import display_name, read_text
from .rinex_obs import SUPPORTED_VERSIONS

W = 19  # width of a D19.12 field

# Field names per orbit line (line 0 holds the three clock terms after the epoch).
_KEPLER_COMMON = [
    ["af0_s", "af1_sps", "af2_sps2"],
    ["iode", "crs_m", "delta_n_radps", "m0_rad"],
    ["cuc_rad", "e", "cus_rad", "sqrt_a_sqrtm"],
    ["toe_sow_s", "cic_rad", "omega0_rad", "cis_rad"],
    ["i0_rad", "crc_m", "omega_rad", "omega_dot_radps"],
]
_LAYOUT = {
    "G": _KEPLER_COMMON + [
        ["idot_radps", "l2_codes", "week", "l2p_flag"],
        ["ura_m", "health", "tgd_s", "iodc"],
        ["ttm_sow_s", "fit_raw", None, None],
    ],
    "E": _KEPLER_COMMON + [
        ["idot_radps", "data_source", "week", None],
        ["ura_m", "health", "bgd_e5a_s", "bgd_e5b_s"],
        ["ttm_sow_s", None, None, None],
    ],
    "C": _KEPLER_COMMON + [
        ["idot_radps", None, "week", None],
        ["ura_m", "health", "tgd1_s", "tgd2_s"],
        ["ttm_sow_s", "aodc", None, None],
    ],
    "R": [
        ["minus_tau_n_s", "gamma_n", "tk_s"],
        ["x_m", "vx_mps", "ax_mps2", "health"],
        ["y_m", "vy_mps", "ay_mps2", "freq_num"],
        ["z_m", "vz_mps", "az_mps2", "age_days"],
        ["status_flags", "delay_l1l2_s", "urai", "health_flags"],
    ],
}
_LAYOUT["J"] = _LAYOUT["G"]
#: Fields that may be blank (spares and fields some writers leave empty).
_OPTIONAL = {"l2_codes", "l2p_flag", "fit_raw", "aodc", "data_source", "age_days",
             "status_flags", "delay_l1l2_s", "urai", "health_flags"}
#: Lines each system's record needs (GLONASS may carry a fifth, RINEX 3.05/4).
_MIN_LINES = {"G": 8, "J": 8, "E": 8, "C": 8, "R": 4}
_MAX_LINES = {"G": 8, "J": 8, "E": 8, "C": 8, "R": 5}
_KM = {"x_m", "vx_mps", "ax_mps2", "y_m", "vy_mps", "ay_mps2", "z_m", "vz_mps", "az_mps2"}
_INT_COLS = {"iode", "iodc", "week", "health", "data_source", "aodc", "freq_num", "l2_codes"}
#: RINEX 4 message types read (system -> accepted types); others are skipped.
_V4_TYPES = {"G": {"LNAV"}, "J": {"LNAV"}, "E": {"INAV", "FNAV"}, "C": {"D1", "D2"}, "R": {"FDMA"}}
#: BeiDou GEO satellites (BDS ICD; D2 message): PRN 1-5 and 59-63.
BDS_GEO_PRN = frozenset([1, 2, 3, 4, 5, 59, 60, 61, 62, 63])


@dataclasses.dataclass
class NavHeader:
    """Header of a navigation file.

    ``iono``: label -> float64 array, e.g. ``{'GPSA': (4,), 'GPSB': (4,),
    'GAL': (3,), 'BDSA': ..., 'QZSA': ...}`` (RINEX 2 ION ALPHA/BETA are stored
    as GPSA/GPSB). ``time_corrections``: label -> dict(a0_s, a1_sps, t_ref_s,
    week, source) with the RINEX 3 labels (GPUT, GAUT, GAGP, GLUT, GLGP, BDUT,
    QZGP, ...); RINEX 2 DELTA-UTC is stored as GPUT and the GLONASS CORR TO
    SYSTEM TIME (−TauC) as GLUT. ``leap_seconds``: GPS−UTC in s or None.
    """

    version: float
    file_type: str
    system: str
    iono: dict
    time_corrections: dict
    leap_seconds: int | None
    comments: list
    n_lines: int


@dataclasses.dataclass
class NavData:
    """A parsed navigation file: ``header``, ``records`` (system -> DataFrame),
    ``dropped`` [(line, reason)], ``skipped`` {kind: count}, ``path``."""

    header: NavHeader
    records: dict
    dropped: list
    skipped: dict
    path: str

    def systems(self):
        return sorted(self.records)


# ------------------------------------------------------------------ header

def _num(text: str) -> float:
    v = float(text.strip().replace("D", "E").replace("d", "e"))
    if not np.isfinite(v):
        raise ValueError(f"not a finite number: {text!r}")
    return v


def _split_d(text: str, width: int, count: int):
    out = []
    for k in range(count):
        f = text[k * width:(k + 1) * width]
        out.append(float("nan") if not f.strip() else _num(f))
    return np.array(out)


def _parse_header(lines, name):
    if not lines or "RINEX VERSION / TYPE" not in lines[0][60:]:
        raise RinexFormatError(name, 1, "a 'RINEX VERSION / TYPE' first line",
                               lines[0] if lines else "an empty file")
    first = lines[0]
    try:
        version = float(first[:9])
    except ValueError:
        raise RinexFormatError(name, 1, "the format version (F9.2) in columns 1-9", first) from None
    if round(version, 2) not in SUPPORTED_VERSIONS:
        raise RinexFormatError(name, 1, "RINEX version 2.00-2.02, 2.10-2.12, 3.00-3.05 or 4.00-4.02",
                               first[:9].strip())
    version = round(version, 2)
    ftype = first[20:21].upper()
    sysc = first[40:41].upper()
    iono, corr, leap, comments = {}, {}, None, []
    end = None
    for i, line in enumerate(lines[1:], start=1):
        label = line[60:80].strip()
        if label == "END OF HEADER":
            end = i
            break
        try:
            if label == "COMMENT":
                comments.append(line[:60].rstrip())
            elif label == "ION ALPHA":
                iono["GPSA"] = _split_d(line[2:], 12, 4)
            elif label == "ION BETA":
                iono["GPSB"] = _split_d(line[2:], 12, 4)
            elif label == "IONOSPHERIC CORR":
                key = line[:4].strip()
                vals = _split_d(line[5:], 12, 4)
                iono[key] = vals[:3] if key == "GAL" else vals
            elif label == "DELTA-UTC: A0,A1,T,W":
                corr["GPUT"] = dict(a0_s=_num(line[3:22]), a1_sps=_num(line[22:41]),
                                    t_ref_s=int(line[41:50]), week=int(line[50:59]), source="")
            elif label == "CORR TO SYSTEM TIME":
                corr["GLUT"] = dict(a0_s=_num(line[21:40]), a1_sps=0.0, t_ref_s=0, week=0,
                                    source=line[:21].split() and " ".join(line[:21].split()))
            elif label == "TIME SYSTEM CORR":
                rest = line[38:60].split()
                corr[line[:4].strip()] = dict(
                    a0_s=_num(line[5:22]), a1_sps=_num(line[22:38]),
                    t_ref_s=int(rest[0]) if rest else 0, week=int(rest[1]) if len(rest) > 1 else 0,
                    source=" ".join(rest[2:]))
                c = corr[line[:4].strip()]
                if not (0 <= c["week"] <= 9999 and 0 <= c["t_ref_s"] <= 604800
                        and np.isfinite(c["a0_s"]) and np.isfinite(c["a1_sps"])):
                    raise ValueError("out of range")
            elif label == "LEAP SECONDS":
                leap = int(line[:6])
        except (ValueError, IndexError):
            raise RinexFormatError(name, i + 1, f"numeric fields of the {label!r} header line", line) from None
    if end is None:
        raise RinexFormatError(name, len(lines), "an 'END OF HEADER' line", "end of file")
    if version < 3:
        # RINEX 2: the type letter says the system (N GPS, G GLONASS, L/E Galileo).
        system = {"N": "G", "G": "R", "L": "E", "E": "E", "H": "S"}.get(ftype)
        if ftype == "N" and sysc in "RE" and sysc.strip():
            system = sysc
        if system is None:
            raise RinexFormatError(name, 1, "a navigation file type (N, G, L) in column 21", first)
    else:
        if ftype != "N":
            raise RinexFormatError(name, 1, "file type 'N' (navigation) in column 21", first)
        system = sysc if sysc.strip() else "M"
    hdr = NavHeader(version=version, file_type=ftype, system=system, iono=iono,
                    time_corrections=corr, leap_seconds=leap, comments=comments, n_lines=end + 1)
    return hdr, end + 1


# ------------------------------------------------------------------ body

class _Lines(list):
    """The file's lines with blank body lines removed; ``num[i]`` is the 1-based file line of item i."""

    num: np.ndarray


def _lno(lines, i):
    """1-based file line number(s) of list index(es) ``i``."""
    num = getattr(lines, "num", None)
    if num is None:
        return np.asarray(i) + 1 if np.ndim(i) else int(i) + 1
    return num[np.asarray(i)] if np.ndim(i) else int(num[i])


def _split_records(lines, start, hdr, name):
    """Find record starts. Returns per-system lists of (line_index, n_lines) and skips."""
    v = hdr.version
    n = len(lines)
    groups = {}
    dropped, skipped = [], {}
    if v >= 4:
        starts = [i for i in range(start, n) if lines[i][:1] == ">"]
        starts.append(n)
        for a, b in zip(starts[:-1], starts[1:]):
            parts = lines[a][1:].split()
            kind = parts[0] if parts else ""
            if kind != "EPH" or len(parts) < 3:
                skipped[kind or "?"] = skipped.get(kind or "?", 0) + 1
                continue
            sat, msg = parts[1], parts[2]
            s = sat[:1]
            if s not in _V4_TYPES or msg not in _V4_TYPES[s]:
                key = f"EPH {s} {msg}"
                skipped[key] = skipped.get(key, 0) + 1
                continue
            groups.setdefault(s, []).append((a + 1, b - a - 1, msg))
        return groups, dropped, skipped
    if v >= 3:
        starts = [i for i in range(start, n) if lines[i][:1] not in (" ", "") and len(lines[i]) >= 23]
    else:
        starts = [i for i in range(start, n) if lines[i][:2].strip() and lines[i][:2] != "  "]
    # trailing blank lines should not count as record lines
    last = n
    while last > start and not lines[last - 1].strip():
        last -= 1
    starts.append(last)
    for a, b in zip(starts[:-1], starts[1:]):
        if v >= 3:
            s = lines[a][0]
        else:
            s = hdr.system
        if s not in _MIN_LINES:
            skipped[f"system {s}"] = skipped.get(f"system {s}", 0) + 1
            continue
        groups.setdefault(s, []).append((a, b - a, ""))
    return groups, dropped, skipped


def _bulk_floats(lines, recs, nlines, first_off, cont_off, fields, optional, name):
    """Convert the fixed-width fields of ``recs`` (list of first-line indices) to float64.

    Returns (n_rec, n_fields) array; blank optional fields are NaN; blank
    required or non-numeric fields raise RinexFormatError with the line.
    """
    width = max(cont_off + 4 * W, first_off + 3 * W)
    n = len(recs)
    buf = "".join(lines[a + k][:width].ljust(width) for a in recs for k in range(nlines))
    raw = np.frombuffer(buf.encode("latin-1"), dtype=np.uint8).reshape(n, nlines * width)
    cols, names, where = [], [], []
    for k in range(nlines):
        off = first_off if k == 0 else cont_off
        for j, fname in enumerate(fields[k]):
            if fname is None:
                continue
            c0 = k * width + off + j * W
            cols.append(c0)
            names.append(fname)
            where.append((k, off + j * W))
    idx = np.asarray(cols)[:, None] + np.arange(W)[None, :]
    chars = raw[:, idx]  # (n, nf, W)
    chars = np.where((chars == ord("D")) | (chars == ord("d")), np.uint8(ord("E")), chars)
    blank = np.all(chars == ord(" "), axis=2)
    req = np.array([nm not in optional for nm in names])
    bad_blank = blank & req[None, :]
    if bad_blank.any():
        r, f = np.argwhere(bad_blank)[0]
        k, c = where[f]
        raise RinexFormatError(name, _lno(lines, recs[r] + k),
                               f"a number (D19.12) for {names[f]} in columns {c + 1}-{c + W}",
                               lines[recs[r] + k])
    chars[blank] = np.frombuffer(b"nan".ljust(W), dtype=np.uint8)
    strs = np.ascontiguousarray(chars).view(f"S{W}").reshape(n, len(names))
    try:
        vals = strs.astype(np.float64)
    except ValueError:
        for r in range(n):
            for f in range(len(names)):
                try:
                    float(strs[r, f])
                except ValueError:
                    k, c = where[f]
                    raise RinexFormatError(
                        name, _lno(lines, recs[r] + k),
                        f"a number (D19.12) for {names[f]} in columns {c + 1}-{c + W}",
                        lines[recs[r] + k]) from None
        raise
    # 'nan', 'inf' and overflowing exponents parse as floats but are no D19.12 value
    bad = ~np.isfinite(vals) & ~blank
    if bad.any():
        r, f = np.argwhere(bad)[0]
        k, c = where[f]
        raise RinexFormatError(name, _lno(lines, recs[r] + k),
                               f"a finite number (D19.12) for {names[f]} in columns {c + 1}-{c + W}",
                               lines[recs[r] + k])
    return vals, names


#: Plausible ranges of the fields that are integers in the navigation message (ICD
#: field widths: IODE 8-10 bits, IODC 10 bits, health 6 bits or GLONASS/Galileo/BeiDou
#: flags, weeks continuous counts < 10000 for any date this reader supports; BeiDou
#: AODE up to 5 bits, Galileo IODnav 10 bits). Values outside are a broken file.
_INT_RANGE = {"iode": (0, 1023), "iodc": (0, 1023), "week": (0, 9999), "health": (0, 2**31 - 1),
              "freq_num": (-20, 20)}


def _check_integer_fields(s, df, name):
    """Refuse integer fields that are not whole numbers in range (file and record line named)."""
    for col, (lo, hi) in _INT_RANGE.items():
        if col not in df:
            continue
        v = df[col].to_numpy(dtype=float)
        bad = ~np.isfinite(v) | (v < lo) | (v > hi) | (v != np.floor(v))
        if bad.any():
            r = int(np.argmax(bad))
            raise RinexFormatError(name, int(df["line"].iloc[r]),
                                   f"a whole number {lo}..{hi} for {col} in the record starting here",
                                   str(df[col].iloc[r]))
    # No field of any navigation message reaches 1e10 in its RINEX unit (times of week
    # < 604800 s or the 0.9999E9 'unknown' mark, GLONASS positions in km, sqrt(A) about
    # 5e3 m^1/2), and sqrt(A) of a GNSS orbit lies between 1e3 and 1e4 m^1/2.
    for col in df.columns:
        if col in ("line", "sat", "message", "toc_ns"):
            continue
        v = df[col].to_numpy(dtype=float)
        bad = np.isfinite(v) & (np.abs(v) >= 1e10)
        if col == "sqrt_a_sqrtm":
            bad |= np.isfinite(v) & ((v < 1e3) | (v > 1e4))
        if col == "fit_raw":   # hours (GPS/QZSS: a flag or 4..98 h; IS-GPS-200 Table 20-XII)
            bad |= np.isfinite(v) & ((v < 0) | (v > 1000))
        if bad.any():
            r = int(np.argmax(bad))
            raise RinexFormatError(name, int(df["line"].iloc[r]),
                                   f"a value of {col} within the navigation message's range "
                                   "in the record starting here", str(df[col].iloc[r]))


def _parse_epochs(lines, recs, v3, name):
    """Epoch fields of the first record lines -> (prn int array, civil arrays)."""
    if v3:
        spans = [(1, 3), (4, 8), (9, 11), (12, 14), (15, 17), (18, 20), (21, 23)]
    else:
        spans = [(0, 2), (2, 5), (5, 8), (8, 11), (11, 14), (14, 17), (17, 22)]
    width = 23
    buf = "".join(lines[a][:width].ljust(width) for a in recs)
    raw = np.frombuffer(buf.encode("latin-1"), dtype=np.uint8).reshape(len(recs), width)
    out = []
    for a, b in spans:
        s = np.ascontiguousarray(raw[:, a:b]).view(f"S{b - a}").ravel()
        try:
            out.append(s.astype(np.float64))
        except ValueError:
            for r, t in enumerate(s):
                try:
                    float(t)
                except ValueError:
                    raise RinexFormatError(name, _lno(lines, recs[r]),
                                           f"a satellite number and epoch (numbers in columns {a + 1}-{b})",
                                           lines[recs[r]]) from None
            raise
    prn, year, mon, day, hh, mm, ss = out
    if not v3:
        year = np.where(year < 80, year + 2000, year + 1900)
    bad = ~((mon >= 1) & (mon <= 12) & (day >= 1) & (day <= 31) & (hh >= 0) & (hh < 24)
            & (mm >= 0) & (mm < 60) & (ss >= 0) & (ss < 61) & (prn >= 1) & (prn == np.floor(prn)))
    if bad.any():
        r = int(np.argmax(bad))
        raise RinexFormatError(name, _lno(lines, recs[r]),
                               "a valid satellite number and epoch (yyyy mm dd hh mm ss)",
                               lines[recs[r]])
    return prn.astype(np.int64), year, mon, day, hh, mm, ss


def _parse_system(s, lines, entries, hdr, name, dropped):
    v3 = hdr.version >= 3
    min_l, max_l = _MIN_LINES[s], _MAX_LINES[s]
    ok = []
    for a, nl, msg in entries:
        if nl < min_l:
            dropped.append((_lno(lines, a), f"{s} record has {nl} lines, expected {min_l}"))
            continue
        if nl > max_l:
            # more lines than the layout: keep the layout's lines, note the extra ones
            dropped.append((_lno(lines, a + max_l), f"{nl - max_l} unexpected line(s) after a {s} record ignored"))
        ok.append((a, min(nl, max_l), msg))
    if not ok:
        return None
    first_off, cont_off = (23, 4) if v3 else (22, 3)
    frames = []
    for nl in sorted({e[1] for e in ok}):
        sub = [e for e in ok if e[1] == nl]
        recs = [e[0] for e in sub]
        vals, names = _bulk_floats(lines, recs, nl, first_off, cont_off, _LAYOUT[s][:nl], _OPTIONAL, name)
        prn, year, mon, day, hh, mm, ss = _parse_epochs(lines, recs, v3, name)
        df = pd.DataFrame(vals, columns=names)
        for extra in _LAYOUT[s][nl:]:
            for fname in extra:
                if fname is not None:
                    df[fname] = np.nan
        toc = civil_to_ns(year.astype(np.int64), mon.astype(np.int64), day.astype(np.int64),
                          hh.astype(np.int64), mm.astype(np.int64), ss)
        df.insert(0, "toc_ns", toc)
        df.insert(0, "message", [e[2] for e in sub])
        df.insert(0, "line", np.asarray(_lno(lines, np.asarray(recs, dtype=np.int64)), dtype=np.int64))
        df.insert(0, "sat", np.char.add(s, np.char.zfill(prn.astype(str), 2)))
        frames.append(df)
    df = pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]
    return _finish(s, df, name)


def _finish(s, df, name):
    _check_integer_fields(s, df, name)
    scale = SYSTEM_SCALE[s] if s != "R" else "UTC"
    try:
        df["toc_gps_ns"] = convert(df["toc_ns"].to_numpy(), scale, "GPS")
    except TimeScaleError as e:   # e.g. a damaged year before 1972 in a UTC-based record
        bad = int(df["line"].iloc[0])
        raise RinexFormatError(name, bad, "record epochs the time scales can convert", str(e)) from None
    if s == "R":
        for c in _KM:
            df[c] = df[c] * 1000.0
        df["tau_n_s"] = -df["minus_tau_n_s"]
        toc = df["toc_ns"].to_numpy()
        # tk: seconds of the UTC week in RINEX 3/4 (seconds of day in RINEX 2 files,
        # which is < 86400); take the frame time nearest before/around toc.
        tk = df["tk_s"].to_numpy()
        wk, sow = week_sow_ns(toc, "GPS")
        base = wk * NS_PER_WEEK
        tk_ns = base + np.rint(tk * 1e9).astype(np.int64)
        day0 = toc - np.mod(toc, 86400 * NS_PER_S)
        tk_day = day0 + np.rint(np.mod(tk, 86400) * 1e9).astype(np.int64)
        tk_ns = np.where(np.abs(tk_ns - toc) < np.abs(tk_day - toc), tk_ns, tk_day)
        # frame time more than half a day after toc belongs to the previous day/week
        tk_ns = np.where(tk_ns - toc > 43200 * NS_PER_S, tk_ns - 86400 * NS_PER_S, tk_ns)
        df["tk_ns"] = tk_ns
        df["message"] = "FDMA"
        for c in ("health", "freq_num"):
            df[c] = df[c].astype(np.int64)
    else:
        toc = df["toc_ns"].to_numpy()
        wscale = "BDT" if s == "C" else "GPS"
        week = df["week"].to_numpy()
        if np.any(~np.isfinite(week)):
            r = int(np.argmax(~np.isfinite(week)))
            raise RinexFormatError(name, int(df["line"].iloc[r]) + 5, "a week number", "blank")
        full = unwrap_week(week.astype(np.int64), toc, 1024, wscale)
        origin = 1356 * NS_PER_WEEK if s == "C" else 0
        toe_ns = origin + full * NS_PER_WEEK + np.rint(df["toe_sow_s"].to_numpy() * 1e9).astype(np.int64)
        # the toe week can differ from the toc week by one near the week boundary
        toe_ns = np.where(toe_ns - toc > NS_PER_WEEK // 2, toe_ns - NS_PER_WEEK, toe_ns)
        toe_ns = np.where(toc - toe_ns > NS_PER_WEEK // 2, toe_ns + NS_PER_WEEK, toe_ns)
        df["toe_week"] = (toe_ns - origin) // NS_PER_WEEK
        df["toe_ns"] = toe_ns
        ttm = df["ttm_sow_s"].to_numpy()
        tw = (toe_ns - origin) // NS_PER_WEEK
        ttm_ok = np.isfinite(ttm) & (np.abs(ttm) < 9e8)  # 0.9999E9: unknown (RINEX 3)
        ttm_ns = origin + tw * NS_PER_WEEK + np.rint(np.where(ttm_ok, ttm, 0.0) * 1e9).astype(np.int64)
        ttm_ns = np.where(ttm_ns - toe_ns > NS_PER_WEEK // 2, ttm_ns - NS_PER_WEEK, ttm_ns)
        ttm_ns = np.where(toe_ns - ttm_ns > NS_PER_WEEK // 2, ttm_ns + NS_PER_WEEK, ttm_ns)
        df["ttm_ns"] = np.where(ttm_ok, ttm_ns, np.iinfo(np.int64).min)
        for c in ("iode", "week", "health"):
            df[c] = df[c].astype(np.int64)
        if s in ("G", "J"):
            df["iodc"] = df["iodc"].astype(np.int64)
            fr = df["fit_raw"].to_numpy()
            if s == "G":
                fit = np.where(~np.isfinite(fr) | (fr == 0), 4.0, np.where(fr == 1, 6.0, fr))
            else:
                fit = np.where(fr == 1, 4.0, np.where(fr >= 2, fr, 2.0))
            df["fit_h"] = fit
            df["message"] = "LNAV"
        elif s == "E":
            src = np.nan_to_num(df["data_source"].to_numpy()).astype(np.int64)
            df["data_source"] = src
            fnav = (src & 2) != 0
            inav = (src & 5) != 0
            msg = df["message"].to_numpy().astype(object)
            df["source"] = np.where(fnav & ~inav, "fnav", np.where(inav, "inav", ""))
            df["source"] = np.where(msg == "FNAV", "fnav", np.where(msg == "INAV", "inav", df["source"]))
            df["message"] = np.where(df["source"] == "fnav", "FNAV",
                                     np.where(df["source"] == "inav", "INAV", ""))
        elif s == "C":
            df["aodc"] = np.nan_to_num(df["aodc"].to_numpy(), nan=-1).astype(np.int64)
            prn = df["sat"].str[1:].astype(int).to_numpy()
            msg = df["message"].to_numpy().astype(object)
            auto = np.where(np.isin(prn, list(BDS_GEO_PRN)), "D2", "D1")
            df["message"] = np.where(msg == "", auto, msg)
    return df


def read_nav(path) -> NavData:
    """Read a RINEX 2/3/4 navigation file (any compression ctt opens). See the module docstring."""
    name = display_name(path)
    text = read_text(path)
    lines = text.splitlines()
    hdr, body = _parse_header(lines, name)
    if any(not ln.strip() for ln in lines[body:]):
        # blank lines inside the body carry nothing; drop them but keep the file's line numbers
        keep = [i for i in range(body, len(lines)) if lines[i].strip()]
        filtered = _Lines(lines[:body] + [lines[i] for i in keep])
        filtered.num = np.concatenate([np.arange(1, body + 1), np.asarray(keep, dtype=np.int64) + 1])
        lines = filtered
    groups, dropped, skipped = _split_records(lines, body, hdr, name)
    records = {}
    for s, entries in groups.items():
        df = _parse_system(s, lines, entries, hdr, name, dropped)
        if df is None or df.empty:
            continue
        num = [c for c in df.columns if c not in ("line",)]
        dup = df.duplicated(subset=num, keep="first")
        for ln in df.loc[dup, "line"]:
            dropped.append((int(ln), "duplicate of an earlier record"))
        df = df.loc[~dup].sort_values(["sat", "toc_ns", "line"], kind="stable").reset_index(drop=True)
        records[s] = df
    dropped.sort()
    return NavData(header=hdr, records=records, dropped=dropped, skipped=skipped, path=name)


__all__ = ["read_nav", "NavData", "NavHeader", "BDS_GEO_PRN"]
