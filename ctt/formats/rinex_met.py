"""RINEX meteorological files (versions 2.x and 3.x/4.x), and interpolation to epochs.

Layout (RINEX 2.11 Table A9/A10 and RINEX 3.05 Tables A20/A21):

* header labels in columns 61–80; ``# / TYPES OF OBSERV``: I6 then 9(4X,A2)
  (continued on further lines for more than nine types); ``SENSOR POS XYZ/H``:
  3F14.4, F14.4, 1X, A2 (the sensor height is the one the pressure refers to);
* data records, one per epoch: RINEX 2 ``1X,I2,5(1X,I2),mF7.1`` (two-digit
  year: 80–99 -> 19xx, 00–79 -> 20xx), RINEX 3 ``1X,I4,5(1X,I2),mF7.1``;
  more than eight values continue on following lines as ``4X,10F7.1``.

Epochs are GPS time (the standard's time system for met files) as int64
nanoseconds (:mod:`ctt.timescales` convention). A blank field is a missing
value (NaN). Observation types are kept as two-letter codes: PR pressure
(hPa), TD dry temperature (°C), HR relative humidity (%), ZW/ZD/ZT zenith
wet/dry/total delay (mm), WD/WS/RI/HI wind and rain.

The parser splits the text into fixed-width columns with numpy over all
records at once (no Python loop per value).
"""

from __future__ import annotations

import pathlib
from dataclasses import dataclass, field

import numpy as np

from ..errors import OutOfSpanError, RinexFormatError
from .. import timescales as ts
from .compression import read_text


@dataclass(frozen=True)
class MetData:
    """A meteorological file's content."""

    path: str
    version: float
    marker: str
    obs_types: tuple  #: e.g. ("PR", "TD", "HR")
    time_ns: np.ndarray  #: int64 GPS ns, one per record
    values: dict  #: type -> float64 array (NaN where missing)
    sensor_pos: dict = field(default_factory=dict)  #: type -> (x, y, z, h) metres (SENSOR POS XYZ/H)
    sensor_type: dict = field(default_factory=dict)  #: type -> (model, type, accuracy)

    def interval_s(self) -> float:
        """Nominal sampling interval (median spacing, s); NaN with fewer than 2 records."""
        if self.time_ns.size < 2:
            return float("nan")
        return float(np.median(np.diff(self.time_ns))) / 1e9


def _header(lines, path):
    if not lines:
        raise RinexFormatError(path, 1, "a RINEX meteorological header", "an empty file")
    first = lines[0]
    if first[60:80].strip() != "RINEX VERSION / TYPE" or first[20:21] != "M":
        raise RinexFormatError(path, 1, "'RINEX VERSION / TYPE' with file type 'M' in column 21", first)
    try:
        version = float(first[:9])
    except ValueError:
        raise RinexFormatError(path, 1, "the format version (F9.2) in columns 1-9", first) from None
    types: list[str] = []
    n_types = None
    marker = ""
    sensor_pos: dict = {}
    sensor_type: dict = {}
    end = None
    for i, line in enumerate(lines[1:], start=2):
        label = line[60:80].strip()
        if label == "# / TYPES OF OBSERV":
            if n_types is None:
                try:
                    n_types = int(line[:6])
                except ValueError:
                    raise RinexFormatError(path, i, "the number of observation types (I6)", line) from None
            for k in range(9):
                t = line[6 + 6 * k + 4: 6 + 6 * k + 6].strip()
                if t:
                    types.append(t)
        elif label == "MARKER NAME":
            marker = line[:60].strip()
        elif label == "SENSOR POS XYZ/H":
            try:
                vals = tuple(float(line[14 * k:14 * (k + 1)]) for k in range(4))
            except ValueError:
                raise RinexFormatError(path, i, "SENSOR POS XYZ/H as 3F14.4,F14.4", line) from None
            sensor_pos[line[57:59].strip()] = vals
        elif label == "SENSOR MOD/TYPE/ACC":
            sensor_type[line[57:59].strip()] = (line[:20].strip(), line[20:40].strip(), line[46:53].strip())
        elif label == "END OF HEADER":
            end = i
            break
    if end is None:
        raise RinexFormatError(path, len(lines), "'END OF HEADER'", "end of file")
    if n_types is None or n_types != len(types):
        raise RinexFormatError(path, end, f"{n_types} observation types in '# / TYPES OF OBSERV'",
                               f"{len(types)} types {types}")
    return version, marker, tuple(types), sensor_pos, sensor_type, end


def _fields(chars, start, width):
    """Fixed-width field of every row of a uint8 character matrix, as bytes strings."""
    return np.ascontiguousarray(chars[:, start:start + width]).view(f"S{width}").ravel()


def _column_floats(chars, start, width, path, lineno_of_row):
    """Float values of a fixed-width column of a character matrix; NaN for blanks."""
    text = np.char.strip(_fields(chars, start, width))
    out = np.full(text.shape, np.nan)
    filled = text != b""
    try:
        out[filled] = text[filled].astype(float)
    except ValueError:
        bad = next(i for i, t in enumerate(text) if t and not _is_float(t))
        raise RinexFormatError(path, int(lineno_of_row[bad]), f"a value F{width}.1 in columns "
                               f"{start + 1}-{start + width}", text[bad].decode("latin-1")) from None
    return out


def _is_float(text):
    try:
        float(text)
        return True
    except ValueError:
        return False


def read_met(path) -> MetData:
    """Read a RINEX 2.x or 3.x meteorological file (plain or compressed)."""
    path = pathlib.Path(path)
    lines = read_text(path).splitlines()
    version, marker, types, sensor_pos, sensor_type, end = _header(lines, path)
    body = lines[end:]
    body_lineno = np.arange(end + 1, end + 1 + len(body))
    keep = np.array([bool(line.strip()) for line in body], dtype=bool) if body else np.zeros(0, bool)
    body = [line for line, k in zip(body, keep) if k]
    body_lineno = body_lineno[keep] if keep.size else body_lineno
    n = len(types)
    per_rec = 1 + (max(0, n - 8) + 9) // 10
    if len(body) % per_rec:
        raise RinexFormatError(path, int(body_lineno[-1]) if len(body) else end,
                               f"{per_rec} line(s) per record for {n} observation types", "a truncated record")
    rinex3 = version >= 3.0
    ep_w = 18 if not rinex3 else 20  # epoch field width
    width = max(ep_w + 7 * min(n, 8), 4 + 70) + 1
    buf = "".join(line.ljust(width)[:width] for line in body).encode("latin-1")
    chars = np.frombuffer(buf, dtype=np.uint8).reshape(-1, width)
    first = chars[0::per_rec]
    first_no = body_lineno[0::per_rec]
    # epoch fields
    if rinex3:
        spans = [(1, 4), (6, 2), (9, 2), (12, 2), (15, 2), (18, 2)]
    else:
        spans = [(1, 2), (4, 2), (7, 2), (10, 2), (13, 2), (16, 2)]
    fields = []
    for s, w in spans:
        col = np.char.strip(_fields(first, s, w))
        ok = np.char.isdigit(col)
        if not ok.all():
            bad = int(np.argmin(ok))
            raise RinexFormatError(path, int(first_no[bad]),
                                   "an epoch 'yy mm dd hh mm ss' (RINEX 2) or 'yyyy mm dd hh mm ss' (RINEX 3)",
                                   body[bad * per_rec])
        fields.append(col.astype(np.int64))
    year, month, day, hour, minute, second = fields
    if not rinex3:
        year = np.where(year >= 80, 1900 + year, 2000 + year)
    bad = (month < 1) | (month > 12) | (day < 1) | (day > 31) | (hour > 23) | (minute > 59) | (second > 60)
    if bad.any():
        i = int(np.argmax(bad))
        raise RinexFormatError(path, int(first_no[i]), "a valid calendar epoch", body[i * per_rec])
    t = ts.civil_to_ns(year, month, day, hour, minute, second)
    values = {}
    for k, typ in enumerate(types):
        if k < 8:
            rows, rows_no, start = first, first_no, ep_w + 7 * k
        else:
            line_i = 1 + (k - 8) // 10
            rows, rows_no = chars[line_i::per_rec], body_lineno[line_i::per_rec]
            start = 4 + 7 * ((k - 8) % 10)
        values[typ] = _column_floats(rows, start, 7, path, rows_no)
    if t.size > 1 and np.any(np.diff(t) <= 0):
        i = int(np.argmax(np.diff(t) <= 0)) + 1
        raise RinexFormatError(path, int(first_no[i]), "epochs in increasing order", body[i * per_rec])
    return MetData(path=str(path), version=version, marker=marker, obs_types=types, time_ns=t,
                   values=values, sensor_pos=sensor_pos, sensor_type=sensor_type)


def interpolate_met(met: MetData, t_ns, types=("PR", "TD", "HR"), *, max_gap_s=None):
    """Linear interpolation of met values to epochs ``t_ns`` (int64 GPS ns).

    Returns ``{type: float64 array}``. Epochs before the first or after the
    last sample are accepted only within one sampling interval (they take the
    nearest sample's value); farther out, or across an internal gap longer
    than ``max_gap_s`` (default: four sampling intervals), raises
    :class:`~ctt.errors.OutOfSpanError` naming the file and the epoch.
    Missing (NaN) samples of a type are left out of that type's interpolation.
    """
    t = np.atleast_1d(np.asarray(t_ns, dtype=np.int64))
    interval = met.interval_s()
    out = {}
    for typ in types:
        if typ not in met.values:
            raise OutOfSpanError(f"{met.path}: no {typ} observations (types {list(met.obs_types)})")
        v = met.values[typ]
        ok = np.isfinite(v)
        tt, vv = met.time_ns[ok], v[ok]
        if tt.size == 0:
            raise OutOfSpanError(f"{met.path}: no valid {typ} values")
        step = interval if np.isfinite(interval) else 0.0
        tol_ns = int(step * 1e9)
        early = t < tt[0] - tol_ns
        late = t > tt[-1] + tol_ns
        if early.any() or late.any():
            i = int(np.argmax(early | late))
            raise OutOfSpanError(f"{met.path}: {typ} requested at {ts.to_iso(t[i])} GPS, outside the file's span "
                                 f"{ts.to_iso(tt[0])}..{ts.to_iso(tt[-1])} by more than one interval "
                                 f"({step:.0f} s)")
        gap = (4.0 * step if max_gap_s is None else float(max_gap_s)) * 1e9
        idx = np.searchsorted(tt, t, side="right")
        inside = (idx > 0) & (idx < tt.size)
        if tt.size > 1 and inside.any():
            span = np.zeros(t.shape)
            span[inside] = (tt[idx[inside]] - tt[idx[inside] - 1]).astype(float)
            over = span > gap
            if over.any():
                i = int(np.argmax(over))
                raise OutOfSpanError(f"{met.path}: {typ} requested at {ts.to_iso(t[i])} GPS inside a gap of "
                                     f"{span[i] / 1e9:.0f} s (longer than {gap / 1e9:.0f} s)")
        # interpolate on (t − t0) in seconds as float (exact enough: < 1e-6 s over a day)
        x = (t - tt[0]).astype(float) / 1e9
        xp = (tt - tt[0]).astype(float) / 1e9
        out[typ] = np.interp(x, xp, vv)
    return out
