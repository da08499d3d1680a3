"""Exports: offset tables (CSV/Parquet/JSON), the open CV exchange format, event-time correction.

Offset tables
=============

:func:`write_offsets` writes the columns ``time_utc`` (ISO 8601 with ``Z``; 9
fractional digits only when some instant has a sub-second part), ``time_utc_ns``
(integer ns since 1980-01-06T00:00:00 counted on UTC), ``mjd_utc``, ``offset_ns``
(clock A minus clock B), ``u_ns``, ``n_sat``, ``flag`` (and ``system`` when the
table has it), the values rounded as in ``offset.csv`` and the archive
(:data:`ctt.commonview.OFFSET_DECIMALS`: 0.001 ns). With ``metadata`` (the pair,
the sign convention, units, time scale: :func:`offsets_metadata`) every format
carries it:

* CSV: a block of ``# key: value`` comment lines before the header, which
  ``pandas.read_csv(path, comment="#")`` skips;
* JSON: one object ``{"metadata": {...}, "rows": [{...}, ...]}``;
* Parquet: the schema's key-value metadata, key ``ctt`` (JSON text;
  ``pyarrow.parquet.read_schema(path).metadata[b"ctt"]``).

The exchange format (CGGTTS 2E) is read and written by :mod:`ctt.formats.cggtts`;
the conversions between a station's measurement table and track rows live here.

Event-time correction
=====================

The pair series is *offset = clock A - clock B*. A timestamp taken with a
site's clock at a physical instant t is t + clock_site, so

* an event stamped on B's clock, in A's scale: ``t_A = t_B + offset(t)``;
* an event stamped on A's clock, in B's scale: ``t_B = t_A - offset(t)``.

``offset(t)`` is linearly interpolated between the two neighbouring usable
points (flag 'ok', finite value and uncertainty). The per-event standard
uncertainty combines, in quadrature,

* the interpolated point uncertainty ``u_pts = sqrt(w0^2 u0^2 + w1^2 u1^2)``
  (linear weights, points independent),
* the type-B budget ``u_b`` (calibration; common to all events), and
* the interpolation error ``u_interp = sqrt(3) * TDEV(tau = d)``, d the time
  to the nearest point. Justification from the definitions (NIST SP 1065):
  for point samples, the error of linear interpolation midway between two
  points 2d apart is ``-D2x/2`` (D2 the second difference at lag d), so its
  mean square is ``<(D2x)^2>/4 = d^2 AVAR(d)/2``; with ``TVAR = d^2 MVAR/3``
  and ``MVAR = AVAR/2`` for white FM (random-walk phase, the clock noise that
  dominates between points) this is ``3 TVAR(d)``. For flicker and
  random-walk FM MVAR/AVAR > 1/2 (about 0.67 and 0.82 at large m; ratios
  from memory of NIST SP 1065), so the formula is conservative there. The
  measured TDEV also holds the points' white PM noise, which ``u_pts`` already
  counts: another conservative overlap, small where the clocks dominate.
  TDEV is taken from allantools on the longest gap-free stretch of the series,
  interpolated log-log in tau; below the series' own spacing tau0 it scales as
  ``TDEV(tau0) sqrt(d/tau0)`` (white FM; zero at a data point, whose own
  noise is in ``u_pts``); beyond the largest computed tau it is extrapolated
  with the last log-log slope, at least +1/2. With TDEV(tau0) at m = 1 (where
  MVAR = AVAR) the result for white FM is ``D d`` against the true Brownian
  bridge variance ``D d (tau0 - d)/tau0``: at most a factor sqrt(2) high, at
  the midpoint (checked in tests/test_exports.py).

Events before the first point, after the last one, or inside a gap longer than
``max_gap_s`` are refused (``status = 'refused'`` with a ``reason``) rather than
extrapolated.
"""

from __future__ import annotations

import io
import json
import math
import pathlib
import re
import sys

import numpy as np
import pandas as pd

from .errors import FileFormatError, NoDataError, ProcessingError, UsageError
from .formats.cggtts import TRACK_COLUMNS, CggttsHeader
from .timescales import EPOCH_MJD, NS_PER_DAY, parse_iso_array, to_iso, to_mjd_float

__all__ = ["write_offsets", "write_daily_values", "DAILY_COLUMNS", "offsets_metadata", "read_offsets_csv", "read_events", "parse_iso_exact", "parse_mjd_exact", "correct_events",
           "tdev_from_series", "OUT_FORMATS"]

OUT_FORMATS = ("csv", "parquet", "json")
C_MPS = 299_792_458.0  # SI


# ================================================================ offset tables

def _time_text(t_ns: np.ndarray) -> np.ndarray:
    digits = 9 if np.any(t_ns % 1_000_000_000) else 0
    return to_iso(t_ns, digits) if len(t_ns) else np.array([], dtype=str)


def _offsets_frame(df: pd.DataFrame) -> pd.DataFrame:
    if "time_utc_ns" in df.columns:
        t = df["time_utc_ns"].to_numpy(np.int64)
    elif "time_utc" in df.columns:
        t = parse_iso_array(df["time_utc"].astype(str).to_numpy()) if len(df) else np.zeros(0, np.int64)
    else:
        raise ProcessingError("offsets table needs a time_utc or time_utc_ns column")
    out = pd.DataFrame({"time_utc": _time_text(np.asarray(t, dtype=np.int64))})
    out["time_utc_ns"] = np.asarray(t, dtype=np.int64)
    out["mjd_utc"] = df["mjd_utc"].to_numpy(float) if "mjd_utc" in df.columns else to_mjd_float(t)
    for c in ("offset_ns", "u_ns"):
        out[c] = df[c].to_numpy(float) if c in df.columns else np.nan
    out["n_sat"] = df["n_sat"].to_numpy() if "n_sat" in df.columns else pd.NA
    out["flag"] = df["flag"].astype(str).to_numpy() if "flag" in df.columns else "ok"
    if "system" in df.columns:
        out["system"] = df["system"].astype(str).to_numpy()
    return out


def offsets_metadata(pair: str, station_a: str, station_b: str, **extra) -> dict:
    """What an exported offset table says about itself (see the module docstring)."""
    from . import __version__
    from .commonview import OFFSET_DECIMALS

    meta = {
        "pair": pair, "station_a": station_a, "station_b": station_b,
        "sign": f"offset_ns = clock A - clock B = clock {station_a} - clock {station_b}",
        "units": {"offset_ns": "ns", "u_ns": "ns, standard uncertainty (1 sigma) of the point",
                  "mjd_utc": "days (MJD, UTC)", "time_utc_ns": "ns"},
        "time_scale": ("UTC. time_utc: ISO 8601 with Z; time_utc_ns: integer ns since "
                       "1980-01-06T00:00:00 counted on UTC; mjd_utc: Modified Julian Date on UTC"),
        "rounding": {c: f"{10.0 ** -n:g} ns" for c, n in OFFSET_DECIMALS.items() if c in ("offset_ns", "u_ns")},
        "flag": "use rows with flag == ok; other rows are kept with the reason",
        "software": f"ctt {__version__}",
    }
    meta.update({k: v for k, v in extra.items() if v is not None})
    return meta


def write_offsets(df: pd.DataFrame, path_or_stdout=None, format: str = "csv", metadata: dict | None = None) -> None:
    """Write an offsets table as csv, parquet or json to a path, a file object or stdout.

    ``path_or_stdout`` None or '-' means stdout (parquet then goes to the binary stdout).
    ``metadata`` (e.g. :func:`offsets_metadata`) goes into the file as the module
    docstring says; JSON is then an object with ``metadata`` and ``rows``, else a bare
    array of rows.
    """
    if format not in OUT_FORMATS:
        raise UsageError(f"unknown format {format!r}; expected one of {', '.join(OUT_FORMATS)}")
    from .commonview import OFFSET_DECIMALS, round_offsets

    out = round_offsets(_offsets_frame(df))
    to_stdout = path_or_stdout is None or str(path_or_stdout) == "-"
    if format == "csv":
        head = ""
        if metadata:
            head = "".join(f"# {k}: {json.dumps(v) if isinstance(v, (dict, list)) else v}\n"
                           for k, v in metadata.items())
        csv_out = out.copy()
        for c, n in OFFSET_DECIMALS.items():  # the same text as offset.csv
            if c in csv_out.columns:
                csv_out[c] = csv_out[c].map(lambda v, n=n: f"{v:.{n}f}" if np.isfinite(v) else "")
        text = head + csv_out.to_csv(index=False, lineterminator="\n", float_format=None)
        _emit(text.encode(), path_or_stdout, to_stdout)
    elif format == "json":
        # built by hand: pandas' to_json caps float precision; json.dumps keeps repr (round-trip)
        recs = []
        for row in out.itertuples(index=False):
            r = {}
            for k, v in zip(out.columns, row):
                if isinstance(v, (float, np.floating)):
                    v = None if not np.isfinite(v) else float(v)
                elif isinstance(v, (np.integer,)):
                    v = int(v)
                elif v is pd.NA:
                    v = None
                r[k] = v
            recs.append(r)
        doc = {"metadata": metadata, "rows": recs} if metadata else recs
        text = json.dumps(doc, separators=(",", ":")) + "\n"
        _emit(text.encode(), path_or_stdout, to_stdout)
    else:
        import pyarrow as pa
        import pyarrow.parquet as pq

        table = pa.Table.from_pandas(out, preserve_index=False)
        if metadata:
            table = table.replace_schema_metadata({**(table.schema.metadata or {}),
                                                   b"ctt": json.dumps(metadata).encode()})
        buf = io.BytesIO()
        pq.write_table(table, buf)
        _emit(buf.getvalue(), path_or_stdout, to_stdout)


DAILY_COLUMNS = ("date", "epoch_utc", "offset_ns", "u_a_ns", "u_b_ns", "u_ns", "definition")


def write_daily_values(df: pd.DataFrame, path_or_stdout=None, format: str = "csv", *,
                       stations: str | None = None) -> None:
    """Write the archived ``daily_value`` objects (one row per date) as csv, parquet or json.

    The figures are the objects exactly as summary.json and the archive hold them
    (ns, 0.001 ns). CSV: the columns of :data:`DAILY_COLUMNS`; JSON: ``{"stations",
    "sign", "units", "daily_values": [{date, daily_value: {...}}]}``; Parquet: the columns.
    """
    if format not in OUT_FORMATS:
        raise UsageError(f"unknown format {format!r}; expected one of {', '.join(OUT_FORMATS)}")
    out = pd.DataFrame({c: df[c].to_numpy() if c in df.columns else None for c in DAILY_COLUMNS})
    to_stdout = path_or_stdout is None or str(path_or_stdout) == "-"
    if format == "csv":
        _emit(out.to_csv(index=False, lineterminator="\n").encode(), path_or_stdout, to_stdout)
    elif format == "json":
        a, b = (str(stations).split("-", 1) + ["B"])[:2] if stations else ("A", "B")
        rows = []
        for r in out.to_dict(orient="records"):
            dv = {k: (None if isinstance(r[k], float) and not np.isfinite(r[k]) else r[k])
                  for k in DAILY_COLUMNS if k != "date"}
            rows.append({"date": r["date"], "daily_value": dv})
        obj = {"stations": stations, "sign": f"offset_ns = clock {a} - clock {b}",
               "units": {"offset_ns": "ns", "u_a_ns": "ns (type A, 1 sigma)", "u_b_ns": "ns (type B, 1 sigma)",
                         "u_ns": "ns (combined, 1 sigma)", "epoch_utc": "UTC, ISO 8601"},
               "daily_values": rows}
        _emit((json.dumps(obj, indent=1) + "\n").encode(), path_or_stdout, to_stdout)
    else:
        buf = io.BytesIO()
        out.to_parquet(buf, index=False)
        _emit(buf.getvalue(), path_or_stdout, to_stdout)


def _emit(data: bytes, target, to_stdout: bool) -> None:
    if to_stdout:
        sys.stdout.flush()
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()
    elif hasattr(target, "write"):
        try:
            target.write(data)
        except TypeError:
            target.write(data.decode())
    else:
        p = pathlib.Path(target)
        tmp = p.with_name(p.name + ".part")
        tmp.write_bytes(data)
        tmp.replace(p)  # never a half-written file under the final name


def read_offsets_csv(path) -> pd.DataFrame:
    """Read an offset.csv (as written by :func:`write_offsets` or a run folder) with ``time_utc_ns`` added."""
    path = pathlib.Path(path)
    try:
        df = pd.read_csv(path, dtype={"time_utc": str})
    except FileNotFoundError:
        from .errors import MissingInputError
        raise MissingInputError(f"{path}: offsets file not found") from None
    except (pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise FileFormatError(path, None, "a CSV table of offsets", str(exc)) from None
    for c in ("time_utc", "offset_ns", "u_ns"):
        if c not in df.columns:
            raise FileFormatError(path, 1, f"a header with column {c}", ",".join(df.columns))
    df["time_utc_ns"] = _parse_iso_column(df["time_utc"], path, header_lines=1)
    return df


# ================================================================ exact time parsing

_ISO_EXACT = re.compile(
    r"^\s*(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2}):(\d{2})(?:\.(\d{1,9}))?\s*(?:Z|UTC|\+00:?00)?\s*$")


def parse_iso_exact(values) -> np.ndarray:
    """ISO 8601 UTC strings with up to 9 fractional digits -> int64 ns, by integer arithmetic only.

    Raises ``ValueError`` with the 0-based index of the first bad entry as ``.index``.
    """
    s = pd.Series(values, dtype=object).astype(str)
    parts = s.str.extract(_ISO_EXACT)
    bad = parts[0].isna().to_numpy()
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        err = ValueError(f"not an ISO 8601 UTC time: {s.iloc[i]!r}")
        err.index = i
        raise err
    y, mo, d, h, mi, sec = (parts[k].astype(np.int64).to_numpy() for k in range(6))
    frac = parts[6].fillna("").str.ljust(9, "0").replace("", "0").astype(np.int64).to_numpy()
    if ((mo < 1) | (mo > 12) | (d < 1) | (d > 31) | (h > 23) | (mi > 59) | (sec > 60)).any():
        i = int(np.flatnonzero((mo < 1) | (mo > 12) | (d < 1) | (d > 31) | (h > 23) | (mi > 59) | (sec > 60))[0])
        err = ValueError(f"calendar field out of range in {s.iloc[i]!r}")
        err.index = i
        raise err
    from .timescales import civil_to_ns
    return np.asarray(civil_to_ns(y, mo, d, h, mi, sec, frac), dtype=np.int64)


_MJD_EXACT = re.compile(r"^\s*(\d{1,6})(?:\.(\d*))?\s*$")


def parse_mjd_exact(values) -> np.ndarray:
    """MJD text (e.g. '59215.5000000011574') -> int64 UTC ns, rounded to the nearest ns exactly."""
    s = pd.Series(values, dtype=object).astype(str)
    out = np.empty(len(s), dtype=np.int64)
    for i, v in enumerate(s):
        m = _MJD_EXACT.match(v)
        if not m:
            err = ValueError(f"not an MJD number: {v!r}")
            err.index = i
            raise err
        day = int(m.group(1))
        frac = m.group(2) or ""
        num = int(frac) if frac else 0
        den = 10 ** len(frac)
        ns = (num * NS_PER_DAY * 2 + den) // (2 * den)  # round half up
        out[i] = (day - EPOCH_MJD) * NS_PER_DAY + ns
    return out


def _parse_iso_column(col, path, header_lines=1) -> np.ndarray:
    try:
        return parse_iso_exact(col.to_numpy())
    except ValueError as exc:
        i = getattr(exc, "index", None)
        line = None if i is None else i + 1 + header_lines
        raise FileFormatError(path, line, "an ISO 8601 UTC time such as 2021-01-01T12:00:00.123456789Z",
                              col.iloc[i] if i is not None else None) from None


def read_events(path) -> pd.DataFrame:
    """Events CSV with ``time_utc`` (ISO, up to 9 digits) or ``mjd_utc``; other columns carried through.

    Adds ``event_time_utc_ns`` (int64, exact). Bad times -> FileFormatError naming the line.
    """
    path = pathlib.Path(path)
    try:
        df = pd.read_csv(path, dtype=str, keep_default_na=False)
    except FileNotFoundError:
        from .errors import MissingInputError
        raise MissingInputError(f"{path}: events file not found") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise FileFormatError(path, None, "a CSV table with a time_utc or mjd_utc column", str(exc)) from None
    if "time_utc" in df.columns:
        df["event_time_utc_ns"] = _parse_iso_column(df["time_utc"], path)
    elif "mjd_utc" in df.columns:
        try:
            df["event_time_utc_ns"] = parse_mjd_exact(df["mjd_utc"].to_numpy())
        except ValueError as exc:
            i = exc.index
            raise FileFormatError(path, i + 2, "an MJD number such as 59215.5", df["mjd_utc"].iloc[i]) from None
    else:
        raise FileFormatError(path, 1, "a header with a time_utc or mjd_utc column", ",".join(df.columns))
    return df


# ================================================================ event correction

def tdev_from_series(time_ns, offset_ns):
    """TDEV of the series (allantools, longest gap-free stretch at the modal spacing).

    Returns ``(tau_s array, tdev_ns array, tau0_s)``; empty arrays when fewer than 4 points.
    """
    import allantools

    t = np.asarray(time_ns, dtype=np.int64)
    x = np.asarray(offset_ns, dtype=float)
    if len(t) < 4:
        return np.zeros(0), np.zeros(0), float("nan")
    dt = np.diff(t)
    vals, counts = np.unique(dt, return_counts=True)
    tau0_ns = int(vals[np.argmax(counts)])
    breaks = np.flatnonzero(dt != tau0_ns)
    starts = np.concatenate([[0], breaks + 1])
    ends = np.concatenate([breaks + 1, [len(t)]])
    k = int(np.argmax(ends - starts))
    seg = x[starts[k]:ends[k]]
    tau0 = tau0_ns / 1e9
    if len(seg) < 4:
        return np.zeros(0), np.zeros(0), tau0
    m = 2 ** np.arange(0, int(np.log2(max((len(seg) - 1) // 3, 1))) + 1)
    taus, dev, _, _ = allantools.tdev(seg * 1e-9, rate=1.0 / tau0, data_type="phase", taus=m * tau0)
    ok = np.isfinite(dev) & (dev > 0)
    return np.asarray(taus)[ok], np.asarray(dev)[ok] * 1e9, tau0


def _tdev_at(d_s, taus, tdev_ns, tau0):
    """TDEV (ns) at distances d_s, per the rules in the module docstring."""
    d = np.asarray(d_s, dtype=float)
    if len(taus) == 0:
        return np.full(d.shape, np.nan)
    lt, lv = np.log(taus), np.log(tdev_ns)
    out = np.empty_like(d)
    small = d < taus[0]
    out[small] = tdev_ns[0] * np.sqrt(d[small] / taus[0])
    mid = (~small) & (d <= taus[-1])
    out[mid] = np.exp(np.interp(np.log(d[mid]), lt, lv))
    big = d > taus[-1]
    slope = max((lv[-1] - lv[-2]) / (lt[-1] - lt[-2]), 0.5) if len(taus) > 1 else 0.5
    out[big] = tdev_ns[-1] * (d[big] / taus[-1]) ** slope
    return out


def _usable(offsets_df: pd.DataFrame, system: str | None):
    df = offsets_df
    if "system" in df.columns:
        if system is None:
            from .commonview import main_series

            try:
                df = main_series(df, strict=True)  # each day's main series (ALL, or its only system)
            except ValueError as exc:
                raise UsageError(str(exc)) from None
        else:
            df = df[df["system"].astype(str) == system]
    if "time_utc_ns" in df.columns:
        t = df["time_utc_ns"].to_numpy(np.int64)
    else:
        t = parse_iso_exact(df["time_utc"].to_numpy())
    x = df["offset_ns"].to_numpy(float)
    u = df["u_ns"].to_numpy(float) if "u_ns" in df.columns else np.zeros(len(df))
    keep = np.isfinite(x) & np.isfinite(u)
    if "flag" in df.columns:
        keep &= df["flag"].astype(str).to_numpy() == "ok"
    order = np.argsort(t[keep], kind="stable")
    t, x, u = t[keep][order], x[keep][order], u[keep][order]
    if len(t) and np.any(np.diff(t) == 0):
        raise ProcessingError("the offsets series has repeated times")
    return t, x, u, system


def correct_events(events_df: pd.DataFrame, offsets_df: pd.DataFrame, site: str = "B",
                   budget_type_b_ns: float = 0.0, tdev=None, max_gap_s: float = 3600.0,
                   system: str | None = None) -> pd.DataFrame:
    """Convert event timestamps of one site's clock into the other site's time scale.

    ``events_df`` needs ``event_time_utc_ns`` (see :func:`read_events`), or
    ``time_utc`` / ``mjd_utc`` which are parsed exactly. ``site`` is the clock
    that stamped the events ('A' or 'B'). ``tdev`` is None (computed from the
    series), a callable ``tau_s -> TDEV ns``, or a table ``(tau_s, tdev_ns)``.

    Added columns: ``event_time_utc_ns``, ``target_site``, ``offset_ns`` (A - B
    interpolated), ``correction_ns`` (added to the timestamp: +offset for B
    events, -offset for A events), ``corrected_time_utc`` (ISO, 9 digits),
    ``corrected_time_utc_ns`` (int64, rounded to the ns), ``u_points_ns``,
    ``u_interp_ns``, ``u_type_b_ns``, ``u_ns`` (total, 1 sigma),
    ``nearest_point_s``, ``status`` ('ok'/'refused'), ``reason``.
    """
    site = str(site).upper()
    if site not in ("A", "B"):
        raise UsageError(f"site must be A or B, not {site!r}")
    ev = events_df.copy()
    if "event_time_utc_ns" not in ev.columns:
        if "time_utc" in ev.columns:
            ev["event_time_utc_ns"] = parse_iso_exact(ev["time_utc"].to_numpy())
        elif "mjd_utc" in ev.columns:
            ev["event_time_utc_ns"] = parse_mjd_exact(ev["mjd_utc"].astype(str).to_numpy())
        else:
            raise UsageError("events need a time_utc or mjd_utc column")
    te = ev["event_time_utc_ns"].to_numpy(np.int64)
    t, x, u, _ = _usable(offsets_df, system)
    if len(t) < 2:
        raise NoDataError(f"need at least 2 usable offset points to interpolate, found {len(t)}")

    if tdev is None:
        taus, tdv, tau0 = tdev_from_series(t, x)
        tdev_fn = lambda d: _tdev_at(d, taus, tdv, tau0)  # noqa: E731
    elif callable(tdev):
        tdev_fn = tdev
    else:
        taus, tdv = (np.asarray(a, dtype=float) for a in tdev)
        tdev_fn = lambda d: _tdev_at(d, taus, tdv, taus[0])  # noqa: E731

    n = len(te)
    j = np.searchsorted(t, te, side="right")  # t[j-1] <= te < t[j]
    status = np.full(n, "ok", dtype=object)
    reason = np.full(n, "", dtype=object)
    before = te < t[0]
    after = te > t[-1]
    status[before | after] = "refused"
    reason[before] = f"before the first usable offset ({to_iso(int(t[0]))})"
    reason[after] = f"after the last usable offset ({to_iso(int(t[-1]))})"
    inside = ~(before | after)
    i1 = np.clip(j, 1, len(t) - 1)
    i0 = i1 - 1
    at_last = inside & (te == t[-1])
    i0[at_last], i1[at_last] = len(t) - 2, len(t) - 1
    gap_ns = t[i1] - t[i0]
    exact = inside & ((te == t[i0]) | (te == t[i1]))
    gap_bad = inside & ~exact & (gap_ns > max_gap_s * 1e9)
    status[gap_bad] = "refused"
    for k in np.flatnonzero(gap_bad):
        reason[k] = (f"in a gap of {gap_ns[k] / 1e9:.0f} s between {to_iso(int(t[i0[k]]))} and "
                     f"{to_iso(int(t[i1[k]]))} (longer than max_gap_s = {max_gap_s:g} s)")
    good = status == "ok"

    w1 = np.where(good, (te - t[i0]) / np.where(gap_ns > 0, gap_ns, 1), np.nan)
    w0 = 1.0 - w1
    off = np.where(good, w0 * x[i0] + w1 * x[i1], np.nan)
    u_pts = np.where(good, np.sqrt((w0 * u[i0]) ** 2 + (w1 * u[i1]) ** 2), np.nan)
    d_s = np.where(good, np.minimum(te - t[i0], t[i1] - te) / 1e9, np.nan)
    u_int = np.full(n, np.nan)
    if good.any():
        u_int[good] = math.sqrt(3.0) * np.asarray(tdev_fn(d_s[good]), dtype=float)
    u_b = float(budget_type_b_ns or 0.0)
    u_tot = np.sqrt(u_pts ** 2 + np.nan_to_num(u_int, nan=0.0) ** 2 + u_b ** 2)
    u_tot[~good] = np.nan

    corr = off if site == "B" else -off
    corr_i = np.where(good, np.rint(np.nan_to_num(corr)), 0).astype(np.int64)
    new_t = te + corr_i
    ev["target_site"] = "A" if site == "B" else "B"
    ev["offset_ns"] = off
    ev["correction_ns"] = corr
    ev["corrected_time_utc"] = np.where(good, to_iso(new_t, 9), "")
    ev["corrected_time_utc_ns"] = pd.array(np.where(good, new_t, 0), dtype="Int64")
    ev.loc[~good, "corrected_time_utc_ns"] = pd.NA
    ev["u_points_ns"] = u_pts
    ev["u_interp_ns"] = u_int
    ev["u_type_b_ns"] = np.where(good, u_b, np.nan)
    ev["u_ns"] = u_tot
    ev["nearest_point_s"] = d_s
    ev["status"] = status
    ev["reason"] = reason
    return ev


# ---------------------------------------------------------------- CGGTTS <-> ctt track tables

#: Frequency codes of the FRC column for the signals ctt processes (from memory of
#: the 2E document: 'L1C' C/A on L1, 'L3P' iono-free P1/P2; the Galileo ones follow
#: the same pattern, 'E1 ' single E1 and 'L3E' iono-free E1/E5a or E1/E5b).
_FRC = {("G", 1): "L1C", ("G", 2): "L3P", ("E", 1): "E1 ", ("E", 2): "L3E"}


def station_tracks_to_cggtts(meas_table: pd.DataFrame, *, schedule=None) -> pd.DataFrame:
    """Per-track CGGTTS columns from one station's :mod:`ctt.measure` table.

    Each quantity is fitted over the standard track with :func:`ctt.tracks.fit_tracks`
    (value at mid-track and slope): REFSYS from ``clock_ns`` (local clock −
    system time, the station's delays applied), REFSV from ``clock_ns`` minus the
    satellite clock terms (local clock − satellite time), MDTR/SMDT and MDIO/SMDI
    from the modelled delays, MSIO/SMSI from the measured (P2 − P1) ionosphere
    when the processing was dual-frequency; DSG is the residual RMS of the REFSYS
    fit and ISG that of MSIO. The station clock's millisecond resets are removed
    from the REFSYS and REFSV fits (:func:`ctt.tracks.clock_steps_ns`). Only
    tracks flagged ``ok`` are written (the format has no flag column). A slope,
    DSG, ISG or delay too large for its field (a free-running receiver clock
    drifting by µs/s has slopes of 10⁶ ps/s against a 6-character field of
    0.1 ps/s) is written as not available (all 9s); the count per column is in
    ``attrs['unavailable']``. REFSV/REFSYS that do not fit raise ``ValueError``
    in the writer: without them the track is useless.
    """
    from . import tracks as trk
    from .formats.cggtts import representable

    t = meas_table
    steps = trk.clock_steps_ns(t)
    base = trk.fit_tracks(t, schedule, steps_ns=steps)

    def fit(values, with_steps=False):
        tt = t.assign(clock_ns=values)
        return trk.fit_tracks(tt, schedule, steps_ns=steps if with_steps else False).set_index(
            ["track_start_utc_ns", "sat"])

    key = ["track_start_utc_ns", "sat"]
    refsv = fit(t["clock_ns"] - t["sat_clock_ns"] - t["relativity_ns"] - t["group_delay_ns"], True)
    mdtr = fit(t["troposphere_m"] / C_MPS * 1e9)
    mdio = fit(t["ionosphere_m"] / C_MPS * 1e9)
    has_meas = "iono_measured_m" in t and np.isfinite(t["iono_measured_m"]).any()
    msio = fit(t["iono_measured_m"] / C_MPS * 1e9) if has_meas else None
    ok = base[base["flag"] == "ok"].set_index(key)
    if ok.empty:
        return pd.DataFrame(columns=list(TRACK_COLUMNS))
    from .timescales import to_mjd

    start = ok.index.get_level_values(0).to_numpy(np.int64)
    mjd, sod = to_mjd(start)
    sod = np.rint(sod).astype(int)
    sttime = [f"{s // 3600:02d}{s % 3600 // 60:02d}{s % 60:02d}" for s in sod]
    iode = _track_iode(t, schedule) if "iode" in t else None
    n_codes = ok["signal"].astype(str).str.count(r"\+") + 1

    def col(frame, name, scale=1.0):
        if frame is None:
            return np.full(len(ok), np.nan)
        return frame[name].reindex(ok.index).to_numpy(float) * scale

    out = pd.DataFrame({
        "sat": ok.index.get_level_values(1).astype(str),
        "cl": "FF", "mjd": mjd.astype(int), "sttime": sttime, "trkl_s": 780,
        "elv_deg": ok["elevation_deg"].to_numpy(float),
        # azimuth in [0, 360) at the field's 0.1° resolution (359.96° is 000.0, not 360.0)
        "azth_deg": np.mod(np.round(ok["azimuth_deg"].to_numpy(float) * 10.0), 3600.0) / 10.0,
        "refsv_ns": col(refsv, "value_ns"), "srsv_ps_s": col(refsv, "slope_ps_s"),
        "refsys_ns": ok["value_ns"].to_numpy(float), "srsys_ps_s": ok["slope_ps_s"].to_numpy(float),
        # DSG is the RMS of the fit residuals (root mean square: RSS/n), not the n-2 dof standard
        # deviation fit_tracks reports (format column definitions, see ctt.formats.cggtts)
        "dsg_ns": ok["rms_ns"].to_numpy(float) * _rms_factor(ok["n_points"].to_numpy(float)),
        "ioe": (iode.reindex(ok.index).to_numpy(float) if iode is not None else np.nan),
        "mdtr_ns": col(mdtr, "value_ns"), "smdt_ps_s": col(mdtr, "slope_ps_s"),
        "mdio_ns": col(mdio, "value_ns"), "smdi_ps_s": col(mdio, "slope_ps_s"),
        "msio_ns": col(msio, "value_ns"), "smsi_ps_s": col(msio, "slope_ps_s"),
        "isg_ns": col(msio, "rms_ns") * _rms_factor(col(msio, "n_points")), "fr": 0, "hc": 0,
        "frc": [_FRC.get((s[0], int(n)), "L3P") for s, n in zip(ok.index.get_level_values(1), n_codes)],
    })
    ioe = out["ioe"].to_numpy(float)
    out["ioe"] = np.where((ioe >= 0) & (ioe < 999), ioe, np.nan)  # none (precise orbits) or too wide: 999
    unavailable = {}
    for c in ("srsv_ps_s", "srsys_ps_s", "dsg_ns", "mdtr_ns", "smdt_ps_s", "mdio_ns", "smdi_ps_s",
              "msio_ns", "smsi_ps_s", "isg_ns"):
        v = out[c].to_numpy(float)
        bad = np.isfinite(v) & ~representable(c, v)
        if bad.any():
            out.loc[bad, c] = np.nan
            unavailable[c] = int(bad.sum())
    out = out.sort_values(["mjd", "sttime", "sat"], kind="stable").reset_index(drop=True)
    out.attrs["unavailable"] = unavailable
    return out


def _rms_factor(n):
    """sqrt((n - 2)/n): from the residual standard deviation of a line fit (n - 2 dof) to the RMS."""
    n = np.asarray(n, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(n > 2, np.sqrt((n - 2) / n), np.nan)


def _track_iode(t: pd.DataFrame, schedule=None) -> pd.Series:
    """Issue of data of the ephemeris used at mid-track, per (track start UTC ns, sat): the value
    of the usable row nearest the midpoint (an ephemeris change inside a track keeps the one in
    force at the midpoint, the instant the track values refer to)."""
    from . import tracks as trk
    from .timescales import NS_PER_S, convert

    tm = t["time"].to_numpy(np.int64)
    starts = np.sort(np.asarray(schedule if schedule is not None else trk.schedule_for_times(tm), np.int64))
    sg = convert(starts, "UTC", "GPS")
    k = np.searchsorted(sg, tm, side="right") - 1
    length = trk.TRACK_LENGTH_S * NS_PER_S
    inside = (k >= 0) & (tm < sg[np.clip(k, 0, None)] + length) & (t["flag"].astype(str).to_numpy() == "ok")
    d = pd.DataFrame({"start": starts[np.clip(k, 0, None)][inside], "sat": t["sat"].to_numpy()[inside],
                      "dist": np.abs(tm[inside] - (sg[np.clip(k, 0, None)][inside] + length // 2)),
                      "iode": t["iode"].to_numpy()[inside]})
    if d.empty:
        return pd.Series(dtype=float)
    d = d.sort_values("dist", kind="stable").drop_duplicates(["start", "sat"])
    return d.set_index(["start", "sat"])["iode"].astype(float)


def cggtts_to_track_table(header: CggttsHeader, df: pd.DataFrame, *, sampling_s: float = 30.0) -> pd.DataFrame:
    """A partner's CGGTTS tracks as a :func:`ctt.tracks.fit_tracks`-shaped table for common view.

    ``value_ns`` is REFSYS (the partner's local clock − system time, its own delays
    applied as its header states); the track midpoint is the start (MJD, STTIME,
    UTC) plus TRKL/2, in GPS time.

    Uncertainty: the same rule as for our own tracks (:func:`ctt.tracks.fit_tracks`),
    so that a pair of files and the RINEX files they came from are judged alike.
    The file gives DSG (the residual RMS) and ELV at mid-track, not the points,
    so with n = TRKL/``sampling_s`` points (26 for 780 s at 30 s):

    * a-priori ``u_apriori_ns = σ(ELV)/√n``, σ the code-noise model ctt applies to
      its own receivers (:class:`ctt.measure.MeasureOptions` ``sigma0_m`` / sin el,
      times √(a₁² + a₂²) for an iono-free FRC 'L3…'); 1/n is the sum of the
      squared midpoint coefficients of a full, evenly sampled track;
    * from the residuals ``u_fit_ns = s/√n`` with s² = n·DSG²/(n − 2) (DSG is the
      RMS of the residuals, s their standard deviation with n − 2 dof);
    * ``u_ns`` is the a-priori value when n·DSG²/σ² is below the 99 %
      quantile of χ²(n − 2), else ``u_fit_ns``; plus, in quadrature, the
      rounding of REFSYS to 0.1 ns (0.1/√12 ns, uniform).

    Before this rule, DSG/√n alone made partner tracks look 2-3 times more precise
    than the same tracks computed from RINEX (the within-track scatter misses the
    satellite-to-satellite errors the code-noise model covers), and the χ² test of
    common view flagged half the points ``high_scatter``. A track whose DSG is not
    available (all 9s) is flagged ``dsg_unavailable`` and not used.
    """
    from .measure import MeasureOptions
    from .signals import iono_free_coefficients
    from .timescales import NS_PER_S, convert, from_mjd

    if df.empty:
        raise FileFormatError(header.lab, None, "at least one track", "none")
    hh = df["sttime"].str[0:2].astype(int).to_numpy()
    mm = df["sttime"].str[2:4].astype(int).to_numpy()
    ss = df["sttime"].str[4:6].astype(int).to_numpy()
    start_utc = from_mjd(df["mjd"].to_numpy(int), hh * 3600.0 + mm * 60.0 + ss)
    trkl = df["trkl_s"].to_numpy(float)
    mid = convert(start_utc, "UTC", "GPS") + np.rint(trkl / 2 * NS_PER_S).astype(np.int64)
    n = np.maximum(np.floor(trkl / sampling_s + 1e-9), 1.0)
    dsg = df["dsg_ns"].to_numpy(float)
    el = df["elv_deg"].to_numpy(float)
    frc = df["frc"].astype(str).str.strip().to_numpy()
    # noise factor of the combination: iono-free L1/L2 (GPS, 'L3P') or E1/E5a (Galileo, 'L3E')
    f_gps = iono_free_coefficients(1575.42e6, 1227.60e6)       # IS-GPS-200 frequencies
    f_gal = iono_free_coefficients(1575.42e6, 1176.45e6)       # Galileo OS SIS ICD
    amp = np.where(np.char.startswith(frc.astype(str), "L3"),
                   np.where(df["sat"].astype(str).str[0].to_numpy() == "E",
                            math.hypot(*f_gal), math.hypot(*f_gps)), 1.0)
    sigma0_ns = MeasureOptions().sigma0_m / C_MPS * 1e9
    sig = sigma0_ns * amp / np.clip(np.sin(np.deg2rad(el)), 0.05, 1.0)
    u_prior = sig / np.sqrt(n)
    dof = np.maximum(n - 2, 1)
    u_fit = dsg / np.sqrt(dof)            # s/sqrt(n), s^2 = n DSG^2/(n-2)
    from scipy import stats

    compatible = (n * dsg ** 2 / sig ** 2) <= stats.chi2.ppf(0.99, dof)
    u = np.hypot(np.where(compatible, u_prior, u_fit), 0.1 / math.sqrt(12.0))
    flag = np.where(np.isfinite(dsg), "ok", "dsg_unavailable").astype(object)
    out = pd.DataFrame({
        "track_start_utc_ns": start_utc, "mid_time": mid, "sat": df["sat"].astype(str).to_numpy(),
        "system": df["sat"].astype(str).str[0].to_numpy(), "signal": df["frc"].astype(str).to_numpy(),
        "n_points": n.astype(int), "n_flagged": 0, "value_ns": df["refsys_ns"].to_numpy(float),
        "u_ns": u, "u_fit_ns": u_fit, "u_apriori_ns": u_prior,
        "slope_ps_s": df["srsys_ps_s"].to_numpy(float), "rms_ns": dsg,
        "elevation_deg": el, "azimuth_deg": df["azth_deg"].to_numpy(float),
        "troposphere_m": df["mdtr_ns"].to_numpy(float) * C_MPS * 1e-9,
        "ionosphere_m": df["mdio_ns"].to_numpy(float) * C_MPS * 1e-9, "flag": flag,
        "ioe": df["ioe"].to_numpy(float),
    })
    out.attrs.update(reference="broadcast", mode="track", window_s=780.0, station=header.lab)
    return out.sort_values(["mid_time", "sat"], kind="stable").reset_index(drop=True)


def station_revision_date(station, time_utc_ns: int) -> str:
    """REV DATE of a station's track file: the date (YYYY-MM-DD, UTC) of the station file's last
    change in force at ``time_utc_ns``: the start of the delay set in force or the latest
    hardware change logged at or before that instant, whichever is later."""
    from .timescales import to_iso

    t = int(time_utc_ns)
    candidates = [ds.valid_from_ns for ds in station.delay_sets if ds.valid_from_ns <= t]
    candidates += [c.time_utc_ns for c in station.changes if c.time_utc_ns <= t]
    if not candidates:
        candidates = [min(ds.valid_from_ns for ds in station.delay_sets)] if station.delay_sets else [t]
    return str(to_iso(int(max(candidates))))[:10]


def receiver_line(obs_header, station, time_utc_ns: int) -> str:
    """RCVR line text: maker and model, serial number and firmware from the RINEX header
    (``REC # / TYPE / VERS``); when the header has no receiver type, the latest hardware change
    of the station file that names a receiver (at or before ``time_utc_ns``); else 'UNKNOWN'."""
    typ = " ".join(str(getattr(obs_header, "receiver_type", "") or "").split())
    serial = " ".join(str(getattr(obs_header, "receiver_serial", "") or "").split())
    fw = " ".join(str(getattr(obs_header, "receiver_version", "") or "").split())
    if not typ:
        logged = [c for c in station.changes if c.time_utc_ns <= int(time_utc_ns) and "receiver" in c.what.lower()]
        if logged:
            typ = max(logged, key=lambda c: c.time_utc_ns).what
    parts = [typ or "UNKNOWN"]
    if serial:
        parts.append(f"SN {serial}")
    if fw:
        parts.append(f"FW {fw}")
    return " ".join(parts).encode("ascii", "replace").decode()
