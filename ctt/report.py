"""Self-contained HTML report of an offset series, and the readers of series files.

Inputs
------
* :func:`read_series` reads ctt's own ``offset.csv`` (``time_utc`` ISO 8601 with
  Z, ``mjd_utc``, ``offset_ns``, ``u_ns``, ``n_sat``, ``flag``, any further
  columns ignored) or a plain CSV a user brings: a time column ``time_utc``
  (ISO) or ``mjd_utc``/``mjd`` (fractional MJD, UTC) and the value column
  chosen with ``column`` (default ``offset_ns``). Lines starting with ``#`` are
  comments. Empty value cells are gaps; text that is not a number is an error
  naming the file and line. Rows whose ``flag`` is not ``ok`` are left out of
  the analysis and counted.
* :func:`read_run_dir` reads a run folder (``offset.csv``, optional
  ``satellites.csv`` and ``summary.json``) or a folder of day folders each
  holding an ``offset.csv``; days are concatenated in name order and an
  instant present in two days is kept once (the first).

Output
------
:func:`build_report` writes one HTML file with inline CSS, the figures as
base64 PNG data URIs, no JavaScript and no external references, and a JSON
file with the same numbers next to it (``report.json`` for ``report.html``).
It takes plain frames, so the SQLite archive path can call it with the rows
it loads.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import json
import math
import pathlib
import re
import tempfile
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import __version__, plots, stability
from .errors import FileFormatError, NoDataError, UsageError, require_file
from .timescales import NS_PER_DAY, from_mjd, parse_iso, to_iso

TIME_COLUMNS = ("time_utc", "mjd_utc", "mjd")
_PNG = ("png",)   # the report embeds PNG only
_ISO_FIELDS = re.compile(r"\s*(\d{4})-(\d{2})-(\d{2})(?:[T ](\d{2}):(\d{2})(?::(\d{2}))?)?")


# ------------------------------------------------------------------ reading

@dataclass
class Series:
    """An offset series read from a file: ``time_ns`` UTC calendar-count int64, values in ns."""

    path: str
    time_ns: np.ndarray
    value: np.ndarray
    u_ns: np.ndarray | None
    n_sat: np.ndarray | None
    frame: pd.DataFrame                     # the accepted rows with all their columns
    n_flagged: int = 0
    flagged: dict = field(default_factory=dict)
    column: str = "offset_ns"


def _line(frame, i):
    """File line (1-based) of positional row ``i`` of a frame read by :func:`read_series`."""
    lines = frame.attrs.get("lines")
    k = int(frame.index[i])
    return int(lines[k]) if lines is not None and k < len(lines) else k + 2


def _parse_times(path, col, values, frame=None):
    """ISO 8601 UTC texts to ns; the first bad text raises with its file line."""
    txt = pd.Series(values, dtype="string").str.strip()
    clean = txt.str.replace(r"(Z|UTC|\+00:?00)$", "", regex=True).str.replace(" ", "T", regex=False)
    try:
        arr = np.array(clean.to_numpy(dtype=str), dtype="datetime64[ns]")
        if np.isnat(arr).any():
            raise ValueError
        return (arr - np.datetime64("1980-01-06T00:00:00", "ns")).astype(np.int64)
    except ValueError:
        pass
    out = np.empty(len(txt), dtype=np.int64)
    for i, v in enumerate(txt.to_numpy(dtype=object)):
        try:
            out[i] = parse_iso(str(v))
            f = _ISO_FIELDS.match(str(v))       # parse_iso does not range-check the fields
            _dt.datetime(*(int(g) for g in f.groups(default="0")))
        except (ValueError, TypeError, AttributeError):
            line = _line(frame, i) if frame is not None else i + 2
            raise FileFormatError(path, line, f"an ISO 8601 UTC time in column {col!r}", v) from None
    return out


def _numeric(path, frame, col, what):
    raw = frame[col]
    num = pd.to_numeric(raw, errors="coerce")
    bad = num.isna() & raw.notna() & (raw.astype(str).str.strip() != "")
    if bad.any():
        i = int(np.nonzero(bad.to_numpy())[0][0])
        raise FileFormatError(path, _line(frame, i), f"{what} in column {col!r}", raw.iloc[i])
    return num.to_numpy(dtype=float)


def read_series(path, column: str = "offset_ns", system: str | None = None) -> Series:
    """Read an offset series CSV (see the module docstring). Raises FileFormatError/NoDataError."""
    path = pathlib.Path(require_file(path, "series file"))   # absent: exit 3; a folder or a device: exit 2
    try:
        frame = pd.read_csv(path, comment="#", dtype=str, skipinitialspace=True, keep_default_na=False,
                            na_values=[""])
    except pd.errors.EmptyDataError:
        raise FileFormatError(path, 1, "a header line with a time column and a value column", "") from None
    except pd.errors.ParserError as exc:
        raise FileFormatError(path, None, "comma-separated values with one header line", str(exc)) from None
    # file line of each data row: pandas skips blank and comment lines
    with open(path, encoding="utf-8", errors="replace") as fh:
        data_lines = [i + 1 for i, ln in enumerate(fh) if ln.strip() and not ln.lstrip().startswith("#")]
    frame.attrs["lines"] = np.array(data_lines[1:], dtype=np.int64)
    return series_from_frame(frame, column=column, system=system, path=str(path))


def series_from_frame(frame: pd.DataFrame, column: str = "offset_ns", system: str | None = None,
                      path: str = "<table>") -> Series:
    """The same checks as :func:`read_series` on a DataFrame (e.g. rows from the archive)."""
    attrs = dict(frame.attrs)
    frame = frame.copy()
    frame.attrs.update(attrs)
    frame.columns = [str(c).strip() for c in frame.columns]
    cols = list(frame.columns)
    tcol = next((c for c in ("time_utc_ns",) + TIME_COLUMNS if c in cols), None)
    if tcol is None:
        raise FileFormatError(path, 1, "a time column 'time_utc' (ISO 8601) or 'mjd_utc'/'mjd' (MJD)",
                              ",".join(cols))
    if column not in cols:
        raise FileFormatError(path, 1, f"a value column {column!r} (choose one with --column)", ",".join(cols))
    if "system" in cols:
        if system is not None:
            frame = frame[frame["system"].astype(str) == system]
        elif frame["system"].nunique() > 1:
            # the main series of each day ('ALL' where a day has it, else its one system), so a
            # day processed with GPS only is kept beside days with a combined series
            from .commonview import main_series

            frame = main_series(frame)
    if len(frame) == 0:
        raise NoDataError(f"{path}: no data rows")
    if tcol == "time_utc_ns":
        t = pd.to_numeric(frame[tcol]).to_numpy(dtype=np.int64)
    elif tcol == "time_utc":
        t = _parse_times(path, tcol, frame[tcol], frame)
    else:
        mjd = _numeric(path, frame, tcol, "a fractional MJD")
        if np.isnan(mjd).any():
            i = int(np.nonzero(np.isnan(mjd))[0][0])
            raise FileFormatError(path, _line(frame, i), f"a fractional MJD in column {tcol!r}", "")
        t = from_mjd(mjd)
        # MJD as float64 carries ~1 µs; snap to the nearest millisecond so a regular
        # grid stays regular
        t = (np.rint(t / 1e6) * 1e6).astype(np.int64)
    v = _numeric(path, frame, column, "a number")
    u = _numeric(path, frame, "u_ns", "a number") if "u_ns" in cols and column == "offset_ns" else None
    nsat = _numeric(path, frame, "n_sat", "an integer") if "n_sat" in cols else None
    keep = np.ones(len(frame), bool)
    flagged = {}
    if "flag" in cols:
        fl = frame["flag"].fillna("ok").astype(str).str.strip().to_numpy()
        keep = fl == "ok"
        if (~keep).any():
            vals, cnt = np.unique(fl[~keep], return_counts=True)
            flagged = {str(a): int(b) for a, b in zip(vals, cnt)}
    order = np.argsort(t[keep], kind="stable")
    sel = np.nonzero(keep)[0][order]
    return Series(path, t[sel], v[sel], None if u is None else u[sel], None if nsat is None else nsat[sel],
                  frame.iloc[sel].reset_index(drop=True), int((~keep).sum()), flagged, column)


@dataclass
class RunData:
    offsets: pd.DataFrame
    satellites: pd.DataFrame | None
    summary: dict | None
    sources: list
    summaries: list = field(default_factory=list)


def read_run_dir(folder) -> RunData:
    """A run folder, or a folder of day folders each with ``offset.csv`` (concatenated)."""
    folder = pathlib.Path(folder)
    if not folder.exists():
        raise NoDataError(f"{folder}: not found")
    if not folder.is_dir():
        raise UsageError(f"{folder}: expected a run folder, found a file")
    if (folder / "offset.csv").is_file():
        days = [folder]
    else:
        days = sorted(p for p in folder.iterdir() if (p / "offset.csv").is_file())
        if not days:
            raise NoDataError(f"{folder}: no offset.csv in it or in any folder directly below it")
    offs, sats, sums = [], [], []
    for d in days:
        f = pd.read_csv(d / "offset.csv", comment="#", dtype=str, keep_default_na=False, na_values=[""])
        f["_source"] = str(d / "offset.csv")
        offs.append(f)
        if (d / "satellites.csv").is_file():
            sats.append(pd.read_csv(d / "satellites.csv", comment="#"))
        if (d / "summary.json").is_file():
            try:
                sums.append(json.loads((d / "summary.json").read_text()))
            except json.JSONDecodeError as exc:
                raise FileFormatError(d / "summary.json", exc.lineno, "JSON", exc.msg) from None
    off = pd.concat(offs, ignore_index=True)
    tcol = next((c for c in TIME_COLUMNS if c in off.columns), None)
    if tcol is not None:
        off = off.drop_duplicates(subset=[tcol] + (["system"] if "system" in off.columns else []), keep="first")
    summary = sums[0] if len(sums) == 1 else (_merge_summaries(sums) if sums else None)
    return RunData(off.reset_index(drop=True), pd.concat(sats, ignore_index=True) if sats else None,
                   summary, [str(d) for d in days], sums)


def _merge_summaries(sums):
    """Several day summaries: inputs and counts collected, the last config/version kept."""
    out = {"inputs": [], "config": sums[-1].get("config"), "version": sums[-1].get("version"),
           "days": len(sums), "budget": sums[-1].get("budget"),
           "day_boundaries": [s["day_boundary"] for s in sums if isinstance(s.get("day_boundary"), dict)],
           "station_a": sums[-1].get("station_a"), "station_b": sums[-1].get("station_b"),
           "daily_values": [{"date": s.get("date_utc"), **s["daily_value"]} for s in sums
                            if isinstance(s.get("daily_value"), dict)]}
    for s in sums:
        ins = s.get("inputs", [])
        out["inputs"].extend(ins if isinstance(ins, list) else [{"name": k, **(v if isinstance(v, dict) else
                                                                              {"value": v})}
                                                                 for k, v in ins.items()])
    return out


# ------------------------------------------------------------------ numbers

def _u(v):
    return None if v is None or not math.isfinite(float(v)) else float(v)


def _dev_at(devs_kind: stability.Deviation, tau, nearest: bool = False):
    """The deviation at ``tau``; with ``nearest`` at the computed τ closest to it (log scale)
    within one octave, the τ used given as ``tau_s`` (None when no τ is that close)."""
    tt = np.asarray(devs_kind.tau_s, dtype=float)
    fin = np.isfinite(devs_kind.dev)
    if nearest:
        cand = np.nonzero(fin)[0]
        if len(cand) == 0:
            return None
        i = int(cand[np.argmin(np.abs(np.log(tt[cand] / tau)))])
        if abs(math.log(tt[i] / tau)) > math.log(2.0) + 1e-9:
            return None
    else:
        idx = np.nonzero(np.isclose(tt, tau))[0]
        if len(idx) == 0 or not fin[idx[0]]:
            return None
        i = int(idx[0])
    return {"tau_s": float(tau) if np.isclose(tt[i], tau) else float(tt[i]), "dev": float(devs_kind.dev[i]), "ci_low": _u(devs_kind.ci_low[i]),
            "ci_high": _u(devs_kind.ci_high[i]), "noise": devs_kind.noise[i],
            "noise_label": stability.noise_labels(devs_kind)[i]}


def _taus_with_marks(n, tau0):
    taus = list(stability.octave_taus(n, tau0))
    span = (n - 1) * tau0
    for mark in (3600.0, 86400.0):
        m = mark / tau0
        if abs(m - round(m)) < 1e-9 and mark <= span / 3.0 and mark not in taus:
            taus.append(mark)
    return np.array(sorted(taus))


MIN_SAMPLES = 8  # fewer leave no τ with more than a couple of difference terms


def analyse_series(time_ns, value_ns, u_ns=None, changes=None, remove_steps=False, source="<series>"):
    """stability.analyse with 1 h and 1 d added to the τ list where the span allows.

    Raises NoDataError for fewer than ``MIN_SAMPLES`` usable samples and
    FileFormatError (naming ``source``) for repeated instants. Samples off one
    regular grid (tracks whose schedule shifts daily) are snapped to the nearest
    grid instant, reported under ``grid`` in the result.
    """
    n_ok = int(np.count_nonzero(np.isfinite(np.asarray(value_ns, dtype=float))))
    if n_ok < MIN_SAMPLES:
        raise NoDataError(f"{source}: {n_ok} usable samples; at least {MIN_SAMPLES} are needed")
    try:
        g = stability.grid_series(time_ns, value_ns, u_ns)
    except ValueError as exc:
        raise FileFormatError(source, None, "each instant once",
                              str(exc)) from None
    taus = _taus_with_marks(len(g.value), g.tau0_s)
    return stability.analyse(time_ns, value_ns, u_ns, changes=changes, taus=taus, to_iso=to_iso,
                             remove_steps=remove_steps)


# ------------------------------------------------------------------ HTML

_CSS = """
body{font-family:Helvetica,Arial,sans-serif;margin:24px auto;max-width:1100px;color:#111;line-height:1.4}
h1{font-size:22px;margin-bottom:2px}h2{font-size:17px;margin-top:28px;border-bottom:1px solid #999}
table{border-collapse:collapse;margin:8px 0;font-size:13px}
td,th{border:1px solid #bbb;padding:3px 8px;text-align:left;vertical-align:top}
th{background:#eee}td.num{text-align:right;font-variant-numeric:tabular-nums}
figure{margin:14px 0}figure img{max-width:100%;border:1px solid #ddd}
figcaption{font-size:12px;color:#333}.note{font-size:12px;color:#444}
pre{background:#f4f4f4;padding:8px;font-size:12px;overflow-x:auto}
.warn{color:#a00}
"""


def _e(v):
    return html.escape("" if v is None else str(v))


def _fmt(v, digits=4, unit=""):
    if v is None:
        return "—"
    if isinstance(v, (int, np.integer)):
        return f"{v}{unit}"
    v = float(v)
    if not math.isfinite(v):
        return "—"
    return f"{v:.{digits}g}{unit}"


def _num(v):
    try:
        return _fmt(float(v))
    except (TypeError, ValueError):
        return "—"


def _pm(d, digits=4, scale=1.0, unit=""):
    if not d or d.get("value") is None:
        return "—"
    val = d["value"] * scale
    u = d.get("u")
    ua = d.get("u_ar1")
    s = f"{val:.{digits}g} ± {u * scale:.2g}" if u is not None else f"{val:.{digits}g}"
    if ua is not None:
        s += f" (± {ua * scale:.2g} with lag-1 inflation)"
    return s + unit


def _img(path):
    data = base64.b64encode(pathlib.Path(path).read_bytes()).decode("ascii")
    return f"data:image/png;base64,{data}"


def build_report(offset_df: pd.DataFrame, satellites_df: pd.DataFrame | None = None,
                 summary: dict | None = None, changes: list | None = None, out_html="report.html",
                 time_from_ns: int | None = None, time_to_ns: int | None = None,
                 title: str | None = None, column: str = "offset_ns", source: str = "<table>",
                 figures_dir=None) -> dict:
    """Write ``out_html`` and its ``.json`` twin for one offset series; return the JSON dict.

    ``offset_df`` has the offset.csv columns (``time_utc`` or ``time_utc_ns`` or
    ``mjd_utc``, ``offset_ns``, optionally ``u_ns``, ``n_sat``, ``flag``);
    ``satellites_df`` the satellites.csv columns; ``summary`` the summary.json
    dict(s); ``changes`` the hardware log ``[{"time_utc_ns", "what", "expected_ns"}]``.
    ``figures_dir``: also write every figure there as a PNG file (the HTML embeds them).
    """
    out_html = pathlib.Path(out_html)
    series = series_from_frame(offset_df, column=column, path=source)
    t, x, u = series.time_ns, series.value, series.u_ns
    sel = np.ones(len(t), bool)
    if time_from_ns is not None:
        sel &= t >= time_from_ns
    if time_to_ns is not None:
        sel &= t <= time_to_ns
    if np.count_nonzero(sel & np.isfinite(x)) < 8:
        raise NoDataError(f"{source}: {np.count_nonzero(sel & np.isfinite(x))} usable samples in the "
                          "requested range; need at least 8")
    t, x = t[sel], x[sel]
    u = None if u is None else u[sel]
    nsat = None if series.n_sat is None else series.n_sat[sel]
    log = [c for c in (changes or []) if t[0] <= int(c["time_utc_ns"]) <= t[-1]]
    res, devs, fit, ch, g = analyse_series(t, x, u, log, source=source)

    span_s = (g.time_ns[-1] - g.time_ns[0]) / 1e9
    fin = np.isfinite(g.value)
    noise_tab = {}
    for lab, tau in (("1 h", 3600.0), ("1 d", 86400.0)):
        a = _dev_at(devs["oadev"], tau, nearest=True)
        noise_tab[lab] = {"target_tau_s": tau, "tau_s": a["tau_s"] if a else None, "adev": a,
                          "tdev_ns": _scale_ns(_dev_at(devs["tdev"], tau, nearest=True))}
    summ = summary or {}
    name_a, name_b = _station_names(summ)
    dvs = _daily_values(summ, time_from_ns, time_to_ns)
    drift = {k: v for k, v in res["drift"].items() if k != "offset_ns"}
    drift["note_offset"] = "the value of the series is given once, as the daily value (daily_value)"
    report = {
        "title": title or f"{name_a} − {name_b}",
        "pair": {"a": name_a, "b": name_b, "sign": f"clock {name_a} − clock {name_b}"},
        "generated_utc": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "software": {"ctt": __version__},
        "series": {"source": source, "column": column, "start": to_iso(int(g.time_ns[0])),
                   "end": to_iso(int(g.time_ns[-1])), "span_s": span_s, "tau0_s": g.tau0_s,
                   "n_samples": int(fin.sum()), "n_missing": g.n_missing,
                   "n_flagged": series.n_flagged, "flagged": series.flagged},
        "daily_value": dvs[-1]["daily_value"] if dvs else None,
        "daily_values": dvs,
        "budget": summ.get("budget"),
        # per-day carrier-phase solutions (mode ppp): the jump from the previous day's last point
        "day_boundaries": (summ.get("day_boundaries") or
                           ([summ["day_boundary"]] if isinstance(summ.get("day_boundary"), dict) else [])),
        "drift": drift,
        "stability_at": noise_tab,
        "changes": res["changes"],
        "logged_changes_not_detected": res["logged_changes_not_detected"],
        "change_detection": res["change_detection"],
        "stability": {k: res[k] for k in ("adev", "mdev", "tdev", "hdev")},
        "units": res["units"],
        "provenance": {k: summ.get(k) for k in ("inputs", "config", "version", "counts", "rejected", "days")
                       if k in summ},
        "before_after": [],
        # the antenna positions the day's code data give against the station files, and the
        # day's warnings and flags (ctt.pipeline): the latest day's when from an archive
        "coordinates": summ.get("coordinates"),
        "warnings": summ.get("warnings", []),
        "day_flags": summ.get("day_flags", []),
    }

    with tempfile.TemporaryDirectory(prefix="ctt-report-") as tmp:
        tmp = pathlib.Path(tmp)
        figs = []
        pair_lab = f"{name_a} − {name_b}"
        ylab = f"clock {name_a} − clock {name_b} / ns"
        kind_pt = _point_kind(summ, g.tau0_s)
        p = plots.plot_offset(g.time_ns, g.value, tmp / "offset", u_ns=g.u, changes=ch.changes, log=log,
                              fit_ns=fit.model_ns, title=pair_lab, ylabel=ylab, formats=_PNG,
                              daily_values=dvs)
        figs.append((p[0], f"{pair_lab}: one point per {kind_pt} with its standard uncertainty band, the "
                           "drift model (each detected phase step at its one estimate), the changes found "
                           "(dotted: hardware-log entries) and the daily value with its u (square)."))
        p = plots.plot_residuals(g.time_ns, fit.residual_ns, tmp / "residuals", u_ns=g.u, formats=_PNG,
                                 title=f"{pair_lab}: residuals after the drift model")
        figs.append((p[0], f"{pair_lab}: residuals after the drift model, one per {kind_pt}."))
        p = plots.plot_deviations({k: devs[k] for k in ("oadev", "mdev", "ohdev", "tdev")}, tmp / "stability",
                                 formats=_PNG, title=f"{pair_lab}: frequency and time stability")
        figs.append((p[0], f"{pair_lab}: overlapping ADEV, MDEV, overlapping HDEV and TDEV with 1σ "
                           "confidence intervals (Greenhall–Riley EDF). Noise types from the lag-1 "
                           "autocorrelation of the phase, written only at the τ where they were identified "
                           "and where they agree with the plotted slope; the slope keys show each panel's "
                           "own estimator."))
        if nsat is not None and np.isfinite(nsat).any():
            p = plots.plot_common_satellites(t, nsat, tmp / "nsat", formats=_PNG,
                                             title=f"{pair_lab}: satellites in common view per {kind_pt}")
            figs.append((p[0], f"Number of satellites in common view per {kind_pt}."))
        if satellites_df is not None and len(satellites_df):
            sp = _satellite_figures(satellites_df, tmp, time_from_ns, time_to_ns)
            figs.extend(sp)
        # before/after each logged hardware change (the first three in the range)
        for k, e in enumerate(sorted(log, key=lambda e: int(e["time_utc_ns"]))[:3]):
            te = int(e["time_utc_ns"])
            try:
                c = stability.compare_periods(g.time_ns, g.value, (int(g.time_ns[0]), te - 1),
                                              (te, int(g.time_ns[-1])))
            except ValueError:
                continue
            step = _step_of(res, te)
            report["before_after"].append({
                "change_time_utc": to_iso(te), "what": e.get("what"), "expected_ns": e.get("expected_ns"),
                "step_at_change_ns": step,
                "adev_ratio_after_over_before": c.adev_ratio})
            p = plots.plot_before_after(c, tmp / f"before_after_{k}", formats=_PNG, step=step,
                                        title=f"{pair_lab}: before / after {e.get('what') or 'logged change'}")
            figs.append((p[0], f"{pair_lab}: ADEV and TDEV before and after the logged change at {to_iso(te)} "
                               f"({e.get('what')}); the step is the one estimate of the change (changes "
                               "table)."))
        if figures_dir is not None:
            import shutil

            fd = pathlib.Path(figures_dir)
            fd.mkdir(parents=True, exist_ok=True)
            report["figures"] = []
            for png, _cap in figs:
                shutil.copyfile(png, fd / pathlib.Path(png).name)
                report["figures"].append(str(fd / pathlib.Path(png).name))
        body_figs = "\n".join(
            f'<figure><img alt="{_e(cap)}" src="{_img(png)}"><figcaption>{_e(cap)}</figcaption></figure>'
            for png, cap in figs)
    doc = _html(report, body_figs)
    out_html.parent.mkdir(parents=True, exist_ok=True)
    out_html.write_text(doc, encoding="utf-8")
    out_html.with_suffix(".json").write_text(json.dumps(report, indent=1, default=_json_default) + "\n")
    return report


def _station_names(summ: dict) -> tuple[str, str]:
    """(A, B) station ids of the series: from the summary, else from stored daily values."""
    a, b = summ.get("station_a"), summ.get("station_b")
    if a and b:
        return str(a), str(b)
    for d in reversed(summ.get("daily_values") or []):
        st = d.get("stations") if isinstance(d, dict) else None
        if st and "-" in str(st):
            x, y = str(st).split("-", 1)
            return x, y
    pair = summ.get("pair")
    if pair and "-" in str(pair):
        x, y = str(pair).split("-", 1)
        return x.upper(), y.upper()
    return "A", "B"


_DV_KEYS = ("epoch_utc", "offset_ns", "u_a_ns", "u_b_ns", "u_ns", "definition")


def _daily_values(summ: dict, t0=None, t1=None) -> list:
    """``[{date, daily_value}]`` in the range: the archive's rows (``summary['daily_values']``),
    else the run folders' summaries, else the one summary's ``daily_value``; each object as stored."""
    rows = []
    for d in summ.get("daily_values") or []:
        rows.append({"date": d.get("date") or str(d.get("epoch_utc", ""))[:10],
                     "daily_value": {k: d.get(k) for k in _DV_KEYS}})
    if not rows and isinstance(summ.get("daily_value"), dict):
        dv = summ["daily_value"]
        rows.append({"date": summ.get("date_utc") or str(dv.get("epoch_utc", ""))[:10],
                     "daily_value": {k: dv.get(k) for k in _DV_KEYS}})
    out = []
    for r in rows:
        try:
            te = parse_iso(str(r["daily_value"]["epoch_utc"]))
        except (ValueError, TypeError):
            continue
        if (t0 is None or te >= t0 - NS_PER_DAY) and (t1 is None or te <= t1):
            out.append(r)
    return sorted(out, key=lambda r: r["date"])


def _point_kind(summ: dict, tau0_s: float) -> str:
    mode = (summ.get("config") or {}).get("mode") if isinstance(summ.get("config"), dict) else None
    if mode == "tracks" or (mode is None and abs(tau0_s - 960.0) < 1.0):
        return "13-minute track (every 16 min)"
    return f"epoch ({tau0_s:g} s)"


def _step_of(res: dict, te: int) -> dict | None:
    """The one estimate of the change logged at ``te`` (changes table or logged-not-detected)."""
    for c in res["changes"]:
        if c["kind"] == "phase step" and c.get("log_time_ns") == te:
            return {"value": c["size"], "u": c["u_size"], "detected": True, "window_s": c.get("window_s"),
                    "agrees_with_log": c.get("agrees_with_log")}
    for e in res["logged_changes_not_detected"]:
        if e.get("time_utc_ns") == te and e.get("fitted_step_ns") is not None:
            return {"value": e["fitted_step_ns"], "u": e["u_fitted_step_ns"], "detected": False,
                    "window_s": e.get("window_s"), "agrees_with_log": e.get("agrees_with_log")}
    return None


def _json_default(o):
    if isinstance(o, (np.integer,)):
        return int(o)
    if isinstance(o, (np.floating,)):
        return _u(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    return str(o)


def _scale_ns(d):
    if d is None:
        return None
    return {**d, "dev": d["dev"] * 1e9, "ci_low": _s(d["ci_low"]), "ci_high": _s(d["ci_high"])}


def _s(v):
    return None if v is None else v * 1e9


def _satellite_figures(s, tmp, t0, t1):
    figs = []
    need = {"time_utc", "sat", "diff_ns"}
    if not need <= set(s.columns):
        return figs
    ts = _parse_times("satellites.csv", "time_utc", s["time_utc"].astype(str))
    sel = np.ones(len(ts), bool)
    if t0 is not None:
        sel &= ts >= t0
    if t1 is not None:
        sel &= ts <= t1
    s = s[sel]
    ts = ts[sel]
    if len(s) == 0:
        return figs
    flag = s["flag"] if "flag" in s.columns else None
    el = None
    if {"elevation_a_deg", "elevation_b_deg"} <= set(s.columns):
        el = np.minimum(s["elevation_a_deg"].to_numpy(float), s["elevation_b_deg"].to_numpy(float))
    p = plots.plot_satellite_differences(ts, s["sat"], s["diff_ns"].to_numpy(float), tmp / "satellites",
                                         elevation_deg=el, flag=flag, formats=_PNG)
    figs.append((p[0], "Per-satellite differences (clock A − clock B through each satellite) about the "
                       "epoch median; rejected rows as grey crosses."))
    if {"azimuth_a_deg", "elevation_a_deg"} <= set(s.columns):
        p = plots.plot_sky(s["sat"], s["azimuth_a_deg"], s["elevation_a_deg"], tmp / "sky",
                           s.get("azimuth_b_deg"), s.get("elevation_b_deg"), flag=flag, formats=_PNG)
        figs.append((p[0], "Sky view of the common-view satellites from each station."))
    return figs


def _html(r, figs):
    d = r["drift"]
    rows = [
        ("Span", f"{_e(r['series']['start'])} – {_e(r['series']['end'])} "
                 f"({r['series']['span_s'] / 86400:.3g} d, τ0 = {r['series']['tau0_s']:g} s, "
                 f"{r['series']['n_samples']} samples, {r['series']['n_missing']} missing, "
                 f"{r['series']['n_flagged']} flagged)"),
        ("Fractional frequency", _e(_pm(d["frequency"], 4))),
        ("Frequency drift", _e(_pm(d["drift_per_day"], 4, unit=" /day"))),
        ("Drift fit χ²/ν, lag-1 ACF of residuals", f"{_fmt(d.get('chi2_red'))}, {_fmt(d.get('lag1_acf'), 3)}"),
    ]
    b = r.get("budget")
    if r.get("daily_value"):
        dv, date = r["daily_value"], r["daily_values"][-1]["date"]
        rows.insert(0, (f"Daily value {_e(r['pair']['sign'])}, {_e(date)}", _e(_dv_text(dv))))
    if isinstance(b, dict) and b.get("cancels"):
        rows.append(("Cancels in A − B", _e("; ".join(map(str, b["cancels"])))))
        rows.append(("Does not cancel", _e("; ".join(map(str, b.get("does_not_cancel") or [])))))
    for db in r.get("day_boundaries") or []:
        rows.append((_e(f"Day-boundary jump at {db.get('first_utc')}"),
                     _e(f"{_num(db.get('jump_ns'))} ± {_num(db.get('u_jump_ns'))} ns from the last point of "
                        f"{db.get('previous_date') or 'the day before'} ({_num(db.get('gap_s'))} s earlier); "
                        "per-day carrier-phase solutions")))
    for lab, v in r["stability_at"].items():
        a, td = v["adev"], v["tdev_ns"]
        if a is None:
            rows.append((f"Stability at τ = {lab}", "span too short: no computed τ within a factor 2 "
                                                    "(τ must be ≤ a third of the span)"))
        else:
            near = "" if abs(a["tau_s"] - v["target_tau_s"]) < 1e-6 else \
                f" (at τ = {a['tau_s']:g} s, the nearest the {r['series']['tau0_s']:g} s spacing allows)"
            noise = a.get("noise_label") or "noise type not identified at this τ"
            rows.append((f"Stability at τ = {lab}{near}",
                         _e(f"ADEV {a['dev']:.3g} [{_fmt(a['ci_low'], 3)}, {_fmt(a['ci_high'], 3)}]; "
                            f"TDEV {td['dev']:.3g} ns [{_fmt(td['ci_low'], 3)}, {_fmt(td['ci_high'], 3)}]; "
                            f"{noise}")))
    rows.append(("Changes found", str(len(r["changes"]))))
    summary_tab = "\n".join(f"<tr><th>{k}</th><td>{v}</td></tr>" for k, v in rows)

    def agree(v):
        return "—" if v is None else ("yes" if v else "NO")

    ch_rows = []
    for c in r["changes"]:
        unit = "ns" if c["kind"] == "phase step" else ""
        ch_rows.append("<tr>" + "".join(f"<td>{_e(v)}</td>" for v in (
            c.get("time_utc"), c["kind"], f"{c['size']:+.4g} {unit}", f"{c['u_size']:.2g} {unit}",
            _fmt(c.get("window_s"), 4), "expected" if c["expected"] else "UNEXPECTED", c.get("what") or "",
            _fmt(c.get("expected_ns")), agree(c.get("agrees_with_log")))) + "</tr>")
    for e in r["logged_changes_not_detected"]:
        ch_rows.append("<tr>" + "".join(f"<td>{_e(v)}</td>" for v in (
            e.get("time_utc"), "logged, not detected", _fmt(e.get("fitted_step_ns")) + " ns",
            _fmt(e.get("u_fitted_step_ns"), 2) + " ns", _fmt(e.get("window_s"), 4), "—", e.get("what") or "",
            _fmt(e.get("expected_ns")), agree(e.get("agrees_with_log")))) + "</tr>")
    cd = r["change_detection"]
    changes_tab = ("<table><tr><th>epoch (UTC)</th><th>kind</th><th>size</th><th>u (1σ)</th>"
                   "<th>window each side / s</th><th>log</th><th>logged change</th><th>expected size / ns</th>"
                   "<th>agrees with the log (2σ)</th></tr>"
                   + ("\n".join(ch_rows) or "<tr><td colspan=9>none</td></tr>") + "</table>"
                   + f"<p class=note>Change-point search on the phase (piecewise-linear cost), penalty "
                     f"{_e(cd['penalty'])} with σ = {_fmt(cd['sigma_white_ns'], 3)} ns from the median absolute "
                     f"first difference, candidates kept at ≥ 5σ; log entries matched within "
                     f"{_fmt(cd['match_tolerance_s'], 4)} s. Size: {_e(cd.get('step_estimate', ''))}. The same "
                     f"estimate is used in the drift model and the before/after table.</p>")
    dv_rows = [f"<tr><td>{_e(x['date'])}</td><td>{_e(x['daily_value']['epoch_utc'])}</td>"
               + "".join(f"<td class=num>{_fmt3(x['daily_value'].get(k))}</td>"
                         for k in ("offset_ns", "u_a_ns", "u_b_ns", "u_ns")) + "</tr>"
               for x in r.get("daily_values") or []]
    dv_tab = ""
    if dv_rows:
        dv_tab = (f"<h2>Daily values ({_e(r['pair']['sign'])})</h2><table><tr><th>date</th><th>epoch (UTC)</th>"
                  "<th>value / ns</th><th>u type A / ns</th><th>u type B / ns</th><th>u / ns</th></tr>"
                  + "\n".join(dv_rows) + "</table><p class=note>"
                  + _e(r["daily_value"].get("definition") or "") + "</p>")

    dev_rows = []
    tdev = {row["tau_s"]: row for row in r["stability"]["tdev"]}
    mdev = {row["tau_s"]: row for row in r["stability"]["mdev"]}
    for a in r["stability"]["adev"]:
        m = mdev.get(a["tau_s"], {})
        td = tdev.get(a["tau_s"], {})
        dev_rows.append("<tr>" + "".join(f"<td class=num>{v}</td>" for v in (
            _fmt(a["tau_s"], 6), _fmt(a["dev"], 4), f"{_fmt(a['ci_low'], 3)} – {_fmt(a['ci_high'], 3)}",
            _fmt(m.get("dev"), 4), _fmt(td.get("dev"), 4), _fmt(a["edf"], 4),
            _e(a.get("noise_label") or "—"))) + "</tr>")
    dev_tab = ("<table><tr><th>τ / s</th><th>ADEV</th><th>ADEV 1σ CI</th><th>MDEV</th><th>TDEV / ns</th>"
               "<th>EDF (ADEV)</th><th>noise type of the phase (lag-1 ACF at this τ)</th></tr>"
               + "\n".join(dev_rows) + "</table><p class=note>A noise type is shown only where it was "
               "identified at that τ (at least 30 decimated points) and agrees with the ADEV slope there.</p>")

    prov = r.get("provenance") or {}
    ins = prov.get("inputs")
    in_rows = []
    if isinstance(ins, dict):
        ins = [{"name": k, **(v if isinstance(v, dict) else {"value": v})} for k, v in ins.items()]
    for i in ins or []:
        in_rows.append(f"<tr><td>{_e(i.get('name', ''))}</td><td>{_e(i.get('path', i.get('value', '')))}</td>"
                       f"<td><code>{_e(i.get('sha256', ''))}</code></td></tr>")
    prov_html = ("<table><tr><th>input</th><th>file</th><th>SHA-256</th></tr>" + "\n".join(in_rows)
                 + "</table>") if in_rows else "<p class=note>No summary.json with inputs was given.</p>"
    prov_html += (f"<p>Processing software version: {_e(prov.get('version', '—'))}; report made by ctt "
                  f"{_e(r['software']['ctt'])} at {_e(r['generated_utc'])}.</p>")
    for k in ("config", "counts", "rejected"):
        if prov.get(k) is not None:
            prov_html += f"<h3>{k}</h3><pre>{_e(json.dumps(prov[k], indent=1, default=str))}</pre>"
    items = b.get("items") if isinstance(b, dict) else None
    items = items if isinstance(items, dict) else None
    budget_html = ""
    if items:
        def cell(v):  # a number, or a small table of its own (e.g. {"u_ns": .., "type": "B"})
            if isinstance(v, dict):
                return _e(", ".join(f"{a}: {b}" for a, b in v.items()))
            try:
                return _fmt(float(v))
            except (TypeError, ValueError):
                return _e(v)
        budget_html = ("<table><tr><th>type B item (latest day)</th><th>u / ns</th></tr>" + "".join(
            f"<tr><td>{_e(k)}</td><td class=num>{cell(v)}</td></tr>" for k, v in items.items()) + "</table>")

    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>{_e(r['title'])}</title>
<style>{_CSS}</style></head>
<body>
<h1>{_e(r['title'])}</h1>
<p class=note>Series {_e(r['series']['source'])}, column {_e(r['series']['column'])}. All times UTC.
Uncertainties are standard (1σ). ADEV, MDEV and HDEV are dimensionless fractional frequency; TDEV in ns.</p>
<h2>Summary</h2>
<table>{summary_tab}</table>
{budget_html}
{_coordinates_html(r)}
{dv_tab}
<p class=note>Formal uncertainties of the drift fit come from the weights scaled by χ²/ν and assume white
residuals; the lag-1 figure inflates them by √((1+r1)/(1−r1)) for correlated residuals, which still
understates flicker and random-walk noise.</p>
<h2>Changes</h2>
{changes_tab}
<h2>Figures</h2>
{figs}
<h2>Stability</h2>
{dev_tab}
{_before_after_html(r)}
<h2>Provenance</h2>
{prov_html}
</body></html>
"""


def _coordinates_html(r) -> str:
    """Station positions checked against the day's code data, and the day's warnings/flags."""
    coords = r.get("coordinates") or {}
    out = []
    for f in r.get("day_flags") or []:
        out.append(f"<p class=flag><b>Day flagged:</b> {_e(f)}</p>")
    for w in r.get("warnings") or []:
        out.append(f"<p class=note><b>Warning:</b> {_e(w)}</p>")
    if coords:
        rows = "".join(
            "<tr>" + "".join(f"<td>{v}</td>" for v in (
                _e(f"{c.get('station')} ({who})"), _fmt(c.get("d_east_m"), 3), _fmt(c.get("d_north_m"), 3),
                _fmt(c.get("d_up_m"), 3), _fmt(c.get("distance_m"), 3), _e(c.get("status")))) + "</tr>"
            for who, c in coords.items() if c)
        out.append("<h3>Antenna positions from the day's code data</h3>"
                   "<table><tr><th>station</th><th>ΔE / m</th><th>ΔN / m</th><th>ΔU / m</th><th>distance / m</th>"
                   "<th>status</th></tr>" + rows + "</table>"
                   "<p class=note>Iono-free code least squares of the whole day (a receiver clock per epoch) "
                   "minus the station file's antenna position; a warning above 2 m, the day flagged above "
                   "10 m.</p>")
    return "\n".join(out)


def _before_after_html(r):
    if not r.get("before_after"):
        return ""
    rows = []
    for b in r["before_after"]:
        sig = [x["tau_s"] for x in b["adev_ratio_after_over_before"] if x["significant"]]
        st = b.get("step_at_change_ns")
        step = "—" if not st else f"{st['value']:+.4g} ± {st['u']:.2g}"
        ag = "—" if not st or st.get("agrees_with_log") is None else ("yes" if st["agrees_with_log"] else "NO")
        rows.append("<tr>" + "".join(f"<td>{_e(v)}</td>" for v in (
            b["change_time_utc"], b.get("what") or "", _fmt(b.get("expected_ns")), step, ag,
            ", ".join(f"{t:g}" for t in sig) or "none")) + "</tr>")
    return ("<h3>Before / after logged changes</h3><table><tr><th>change (UTC)</th><th>what</th>"
            "<th>expected / ns</th><th>step at the change / ns (the one estimate, changes table)</th>"
            "<th>agrees with the log (2σ)</th>"
            "<th>τ / s where ADEV differs (F test, 5 %)</th></tr>" + "\n".join(rows) + "</table>")


def _fmt3(v):
    return "—" if v is None else f"{float(v):.3f}"


def _dv_text(dv: dict) -> str:
    """A daily_value object as one line (the figures exactly as stored, 0.001 ns)."""
    return (f"{dv['offset_ns']:.3f} ns at {dv['epoch_utc']}, u {dv['u_ns']:.3f} ns "
            f"(type A {dv['u_a_ns']:.3f}, type B {dv['u_b_ns']:.3f}; 1σ)")


def day_range_ns(text_from: str | None, text_to: str | None):
    """--from/--to texts (ISO date or date-time, UTC) to an inclusive ns range; a bare date
    for --to means the end of that day."""
    lo = parse_iso(text_from) if text_from else None
    hi = None
    if text_to:
        hi = parse_iso(text_to)
        if len(text_to.strip()) == 10:
            hi += NS_PER_DAY - 1
    return lo, hi
