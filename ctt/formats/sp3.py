"""SP3-c and SP3-d precise orbit (and clock) files -> :class:`SP3Data`.

:func:`read_sp3` reads SP3-c and SP3-d (SP3-a/-b headers are accepted too):
positions, clocks, optional velocity records, standard deviations, the
clock-event / clock-prediction / manoeuvre / orbit-prediction flags
(columns 75, 76, 79, 80 of the ``P`` record; a clock event is read as a
discontinuity since the previous epoch, as recalled from the SP3-c
document — from memory), any mix of systems, any compression
:mod:`ctt.formats.compression` opens. Format layout: the SP3-c (Hilla 2010)
and SP3-d (Hilla 2016) format documents. Bad or absent values are flagged
there as ``0.000000`` for a position component and ``999999.999999`` for a
clock; both become NaN here, and :attr:`SP3Data.missing` counts them.
:func:`merge_sp3` joins adjacent files (e.g. the previous, current and next
day) into one span.

Interpolation of the orbits and clocks is a model and lives in
:class:`ctt.orbits.PreciseOrbits`.
"""

from __future__ import annotations

import dataclasses
import logging
from typing import Sequence

import numpy as np

from ..errors import ProductFormatError
from ..timescales import civil_to_ns, convert, normalise_scale
from ._fixed_width import _fields, _line_matrix, _numbers, _sat_ids
from .compression import read_bytes

log = logging.getLogger(__name__)

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
    if n_sat <= 0:
        raise ProductFormatError(path_s, 3, "a positive number of satellites in columns 2-6 of the first '+' line",
                                 str(n_sat))
    hdr_sats = list(_sat_ids(np.array([s.encode("latin-1") for s in hdr_sats_raw], dtype="S3")))
    bad_id = [k for k, s in enumerate(hdr_sats) if not (s[0] in "GRECJSIL" and s[1:].isdigit() and s.isascii())]
    if bad_id:
        raise ProductFormatError(path_s, 3, "satellite ids (system letter and two digits) in the '+' lines",
                                 hdr_sats[bad_id[0]])
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
