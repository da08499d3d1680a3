"""RINEX clock files (3.00-3.04) -> :class:`ClockData`.

Interpolation between clock epochs is a model: :func:`ctt.orbits.interpolate_clock_series`.

:func:`read_clock` reads header labels in columns 61-80, or 66-85 from 3.04
when the clock name grew from A4 to A9. ``AS`` (satellite) and ``AR``
(receiver / station) records are kept, each as a :class:`ClockSeries`; other
record types are counted and skipped.
"""

from __future__ import annotations

import dataclasses
import logging
import re

import numpy as np

from ..errors import ProductFormatError
from ..timescales import civil_to_ns, convert, normalise_scale
from .compression import read_bytes

log = logging.getLogger(__name__)

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


def _header_int(field, path_s, line, expected, text):
    try:
        return int(field)
    except ValueError:
        raise ProductFormatError(path_s, line, expected, text) from None


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
            header["n_satellites"] = _header_int(text[:6], path_s, i + 1, "number of satellites as I6", text)
        elif label == "# OF SOLN STA / TRF":
            header["n_stations"] = _header_int(text[:6], path_s, i + 1, "number of stations as I6", text)
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



def merge_clock(parts) -> ClockData:
    """Join RINEX clock data of consecutive files (e.g. the days before and after) into one.

    Names are the union; the epochs are the union of every file's epochs. An
    epoch that several files hold (the shared midnight epoch of two daily
    files) keeps the value of the first file in the order given that has a
    value for that clock; each such duplicate is counted in
    ``header['duplicate_epochs']`` and the largest difference between the
    files there in ``header['duplicate_max_diff_s']`` (a day-boundary
    discontinuity of the product shows there). Nothing is filled between
    files: an epoch that no file holds stays absent, so interpolation across
    it is a gap (:func:`ctt.orbits.interpolate_clock_series`). The header is
    the first file's with the paths joined by ';'.
    """
    parts = list(parts)
    if not parts:
        raise ValueError("merge_clock needs at least one ClockData")
    if len(parts) == 1:
        return parts[0]
    dup = {"n": 0, "max": 0.0}

    def join(kind):
        series = [getattr(p, kind) for p in parts]
        names = np.array(sorted(set().union(*[set(map(str, s.names)) for s in series])), dtype=str)
        times = np.unique(np.concatenate([s.time_ns for s in series])) if series else np.zeros(0, np.int64)
        b = np.full((len(times), len(names)), np.nan)
        sg = np.full_like(b, np.nan)
        for s in series:
            if not len(s.names) or not len(s.time_ns):
                continue
            ti = np.searchsorted(times, s.time_ns)
            ci = np.searchsorted(names, s.names.astype(str))
            old = b[np.ix_(ti, ci)]
            new = s.bias_s
            both = ~np.isnan(old) & ~np.isnan(new)
            if both.any():
                dup["n"] += int(both.sum())
                dup["max"] = max(dup["max"], float(np.max(np.abs(old[both] - new[both]))))
            take = np.isnan(old) & ~np.isnan(new)
            b[np.ix_(ti, ci)] = np.where(take, new, old)
            sg[np.ix_(ti, ci)] = np.where(take, s.sigma_s, sg[np.ix_(ti, ci)])
        return ClockSeries(names, times.astype(np.int64), b, sg)

    sats, stas = join("satellites"), join("stations")
    first = parts[0]
    header = dict(first.header)
    header["duplicate_epochs"] = dup["n"]
    header["duplicate_max_diff_s"] = dup["max"]
    skipped = {k: sum(p.skipped.get(k, 0) for p in parts) for k in first.skipped}
    return ClockData(";".join(p.path for p in parts), first.version, first.time_system, header, sats, stas,
                     skipped)


#: Short alias.
read_clk = read_clock
