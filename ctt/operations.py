"""Unattended operation: one pair-day into the archive, backfills, reprocessing after calibration.

``process_day`` is what ``ctt daily`` runs from cron: resolve the day's files
from the pair file, process them (:func:`ctt.pipeline.run_pair`), write the
run folder ``<output dir>/<pair>/<YYYY-MM-DD>/`` and store the day in the
archive in one transaction. A failure (missing or corrupt input, no common
data) is recorded in the archive with its reason; the previous good results
of that day, and every other day, are untouched.

Work is split so that only the parent process ever writes the archive:
:func:`compute_day` (pure: files in, tables out) runs in worker processes or on
a Dask cluster, :func:`store_outcome` writes. A whole run holds the archive's
run lock (a lock file with PID and host; a dead holder's lock is taken over),
so two cron runs never interleave; the second waits up to the timeout, then
exits with code 4.

Reprocessing
------------
Each stored day carries two fingerprints: the SHA-256 of its input files and a
*day configuration hash* (:func:`day_config_hash`) made of the processing
options, both stations' coordinates and uncertainties, and the delay sets that
cover that date. Editing a delay set therefore marks exactly the days inside
its validity interval as needing reprocessing (``ctt backfill --check`` lists
them with the reason; ``ctt backfill`` redoes them), while days outside it
stay as they are.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import hashlib
import json
import logging
import pathlib
import time
import traceback

import numpy as np

from . import __version__
from . import timescales as ts
from .errors import CttError, describe, exit_code_for, is_user_error

log = logging.getLogger(__name__)


@dataclasses.dataclass
class DayOutcome:
    """What :func:`compute_day` returns (picklable, for worker processes)."""

    date: str
    status: str                       #: 'ok', 'failed' or 'skipped'
    reason: str = ""
    exit_code: int = 0                #: a failure's documented exit code (ctt.errors.exit_code_for)
    offsets: object = None            #: DataFrame (offset.csv rows) when ok
    satellites: object = None
    summary: dict | None = None
    inputs: dict | None = None        #: name -> {path, sha256}
    inputs_hash: str = ""
    config_hash: str = ""
    out_dir: str = ""
    started: str = ""
    finished: str = ""
    wall_s: float = 0.0               #: this day's computation in its worker: elapsed time
    cpu_s: float = 0.0                #: ... and CPU time of that process (time.process_time)


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def dates_between(d1, d2) -> list[str]:
    a = _dt.date.fromisoformat(str(d1))
    b = _dt.date.fromisoformat(str(d2))
    if b < a:
        raise ValueError(f"--to {b} is before --from {a}")
    return [(a + _dt.timedelta(days=k)).isoformat() for k in range((b - a).days + 1)]


def yesterday_utc() -> str:
    return (_dt.datetime.now(_dt.timezone.utc).date() - _dt.timedelta(days=1)).isoformat()


def day_config_hash(pc, date) -> str:
    """Fingerprint of everything in the configuration that can change one day's result."""
    # the daily file runs on GPS time, 18 s ahead of the UTC day (and receivers write a few
    # epochs either side): a minute of margin so every delay set the day's data use is included
    t0 = ts.date_to_ns(date) - 60 * ts.NS_PER_S
    t1 = t0 + ts.NS_PER_DAY + 120 * ts.NS_PER_S

    def station(st):
        try:
            sets = st.delay_sets_between(t0, t1)
        except CttError:
            sets = ()
        return {
            "id": st.id, "position_m": [round(float(v), 6) for v in st.position_m],
            "sigma_m": [round(float(v), 6) for v in st.position_sigma_m],
            "arp_m": [round(float(v), 6) for v in st.arp_m], "mask": st.elevation_mask_deg,
            "delays": [{"from": d.valid_from_ns, "until": d.valid_until_ns, "receiver": dict(d.receiver_ns),
                        "u_receiver": dict(d.u_receiver_ns), "cable": d.cable_ns, "u_cable": d.u_cable_ns,
                        "receiver_correlation": d.receiver_correlation,
                        "combined": {"+".join(sorted(k)): list(v) for k, v in d.combined_ns.items()},
                        "reference": d.reference_ns, "u_reference": d.u_reference_ns} for d in sets],
        }

    proc = dataclasses.asdict(pc.processing)
    if "R" not in proc.get("systems", ()):
        proc.pop("glonass_ifb", None)   # no effect without GLONASS: existing days keep their hash
    blob = {"processing": proc, "a": station(pc.station_a),
            "b": station(pc.station_b), "version": __version__.split(".")[0]}
    text = json.dumps(blob, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def day_fingerprints(pc, date) -> tuple[dict, str, str]:
    """(inputs record, inputs hash, day configuration hash); MissingInputError if files are missing."""
    from .archive import inputs_hash, inputs_record

    rec = {k: v for k, v in inputs_record(pc.resolve_inputs(date)).items() if v is not None}
    return rec, inputs_hash(rec), day_config_hash(pc, date)


def run_folder(pc, date) -> pathlib.Path:
    return pathlib.Path(pc.output_dir) / pc.name / str(date)


def compute_day(pair_path: str, date: str, known: tuple | None = None, force: bool = False,
                force_inputs: bool = False) -> DayOutcome:
    """Process one day of a pair file; never raises for bad data (status 'failed' with the reason).

    ``known`` is the (inputs hash, config hash) already archived for the day;
    when both match and ``force`` is false the day is skipped. ``force_inputs``
    processes observation files that do not match their station files
    (:func:`ctt.pipeline.check_obs_file`) with a warning instead of failing the day.
    """
    from .config import load_pair

    started = _now()
    t0, c0 = time.perf_counter(), time.process_time()
    out = DayOutcome(date=str(date), status="failed", started=started)
    try:
        pc = load_pair(pair_path)
        rec, ih, ch = day_fingerprints(pc, date)
        out.inputs, out.inputs_hash, out.config_hash = rec, ih, ch
        if known is not None and tuple(known) == (ih, ch) and not force:
            out.status, out.reason = "skipped", "already done with the same inputs and configuration"
            out.wall_s, out.cpu_s = time.perf_counter() - t0, time.process_time() - c0
            return out
        from .pipeline import add_day_boundary, offset_table, pair_day_from_config, run_pair, write_pair_outputs

        inputs, sta, stb, options = pair_day_from_config(pc, date)
        result = run_pair(inputs, sta, stb, options, force_inputs=force_inputs)
        _check_day(result, inputs, date)
        add_day_boundary(result, pc, date)
        folder = run_folder(pc, date)
        result.summary["config_hash"] = ch
        result.summary["inputs_hash"] = ih
        write_pair_outputs(result, folder)
        out.offsets = offset_table(result.offset_by_system)
        out.satellites = result.satellites
        out.summary = result.summary
        out.out_dir = str(folder)
        out.status = "ok"
    except Exception as exc:  # a bad day, or even a bug, must not stop a backfill: record it
        out.reason = describe(exc)
        out.exit_code = exit_code_for(exc)
        if not is_user_error(exc):
            log.debug("day %s failed:\n%s", date, traceback.format_exc())
    out.finished = _now()
    out.wall_s, out.cpu_s = time.perf_counter() - t0, time.process_time() - c0
    return out


def _check_day(result, inputs, date) -> None:
    """The files a pattern found must hold the requested day (a misnamed file is refused)."""
    from .errors import ProcessingError

    t = ts.convert(result.offset["time"].to_numpy(np.int64), "GPS", "UTC")
    day0 = ts.date_to_ns(date)
    inside = (t >= day0 - 3600 * ts.NS_PER_S) & (t < day0 + ts.NS_PER_DAY + 3600 * ts.NS_PER_S)
    if inside.mean() < 0.5:
        first = str(ts.to_iso(int(np.median(t))))[:10]
        raise ProcessingError(f"{inputs.obs_a} / {inputs.obs_b}: the files found for {date} hold data of "
                              f"{first}; check the file-name patterns")


def store_outcome(archive, pair_name: str, outcome: DayOutcome) -> None:
    """Write a computed day (or its failure) into the archive, in one transaction."""
    info = {"inputs": outcome.inputs or {}, "inputs_hash": outcome.inputs_hash,
            "config_hash": outcome.config_hash, "version": __version__,
            "started": outcome.started, "finished": outcome.finished}
    if outcome.status == "ok":
        sat = outcome.satellites
        if sat is not None and "time" in sat.columns:
            # named by scale, as satellites.csv: time_gps_ns and time_utc_ns (ns since 1980-01-06)
            sat = sat.rename(columns={"time": "time_gps_ns"})
        if sat is not None and "time_gps_ns" in sat.columns and "time_utc_ns" not in sat.columns:
            sat = sat.assign(time_utc_ns=ts.convert(sat["time_gps_ns"].to_numpy(np.int64), "GPS", "UTC"))
        # the day's warnings and flags (inputs forced, coordinates off) stay with its results
        info["messages"] = [*(outcome.summary or {}).get("warnings", []),
                            *(f"DAY FLAGGED: {f}" for f in (outcome.summary or {}).get("day_flags", []))]
        summ = outcome.summary or {}
        archive.store_day(pair_name, outcome.date, outcome.offsets, sat, info, daily_value=summ.get("daily_value"),
                          stations=summ.get("pair"))
    elif outcome.status == "failed":
        info["messages"] = [outcome.reason]
        archive.record_failure(pair_name, outcome.date, outcome.reason, info)


def read_run_folder(folder, date: str) -> DayOutcome:
    """A stored day rebuilt from its run folder (offset tables, satellites.csv, summary.json).

    The run folder holds everything the archive keeps of a good day: the offsets
    of every system (``offset_by_system.csv``, else ``offset.csv``), the
    per-satellite rows, and in ``summary.json`` the inputs with their SHA-256, the
    input and configuration fingerprints and the software version. Values come
    back as the CSV files hold them (0.1 ps, far below any uncertainty).
    """
    import pandas as pd

    from .errors import FileFormatError, MissingInputError

    folder = pathlib.Path(folder)
    summary_path = folder / "summary.json"
    if not summary_path.is_file():
        raise MissingInputError(f"{summary_path}: run folder without summary.json")
    try:
        summary = json.loads(summary_path.read_text())
    except (ValueError, UnicodeDecodeError) as exc:
        raise FileFormatError(summary_path, None, "a JSON summary written by ctt", str(exc)) from None
    off_path = folder / "offset_by_system.csv"
    if not off_path.is_file():
        off_path = folder / "offset.csv"
    try:
        offsets = pd.read_csv(off_path, keep_default_na=False, na_values=[""])
        sat_path = folder / "satellites.csv"
        satellites = pd.read_csv(sat_path, keep_default_na=False, na_values=[""]) if sat_path.is_file() else None
    except FileNotFoundError as exc:
        raise MissingInputError(f"{exc.filename}: run folder file not found") from None
    except (ValueError, pd.errors.ParserError) as exc:
        raise FileFormatError(off_path, None, "a CSV table written by ctt", str(exc)) from None
    if "system" in offsets.columns:
        offsets["system"] = offsets["system"].fillna("").astype(str)
    return DayOutcome(date=date, status="ok", offsets=offsets, satellites=satellites, summary=summary,
                      inputs={k: v for k, v in (summary.get("inputs") or {}).items() if v is not None},
                      inputs_hash=summary.get("inputs_hash", ""), config_hash=summary.get("config_hash", ""),
                      out_dir=str(folder), started="", finished=_now())


def rebuild_archive(pc, archive) -> tuple[list[str], list[str]]:
    """Store every run folder of the pair (``<output dir>/<pair>/<YYYY-MM-DD>/``) into ``archive``.

    Returns (dates stored, problems). A folder that is not a date, or whose files
    cannot be read, is listed as a problem and skipped; the others are stored.
    """
    from .errors import CttError

    base = pathlib.Path(pc.output_dir) / pc.name
    stored, problems = [], []
    folders = sorted(p for p in base.iterdir() if p.is_dir()) if base.is_dir() else []
    for folder in folders:
        try:
            date = _dt.date.fromisoformat(folder.name).isoformat()
        except ValueError:
            problems.append(f"{folder}: not a day folder (YYYY-MM-DD); skipped")
            continue
        try:
            outcome = read_run_folder(folder, date)
            store_outcome(archive, pc.name, outcome)
        except CttError as exc:
            problems.append(f"{folder}: {exc}")
            continue
        stored.append(date)
    return stored, problems


def refresh_report(pc, archive, days: int = 30, summary: dict | None = None, satellites=None,
                   figures_dir=None):
    """Rebuild the pair's HTML report from the last ``days`` days of the archive.

    ``summary`` (the latest day's summary.json) and ``satellites`` (its
    satellites.csv table) add the provenance and the per-satellite figures.
    Returns the report path, or None when it could not be made (logged)."""
    from .report import build_report

    window = report_window(archive, pc.name, days)
    if window is None:
        return None
    off, t_from = window
    changes = hardware_changes(pc)
    summary = dict(summary or {})
    # a daily value is shown from a day before the window on (ctt.report._daily_values); its
    # epoch lies in its own date, so two dates of margin hold every one shown
    dv_from = (_dt.date.fromisoformat(str(ts.to_iso(t_from))[:10]) - _dt.timedelta(days=2)).isoformat()
    summary["daily_values"] = archive.load_daily_values(pc.name, dv_from).to_dict(orient="records")
    summary.setdefault("station_a", pc.station_a.id)
    summary.setdefault("station_b", pc.station_b.id)
    bounds = _day_boundaries(pc, off, t_from)
    off = off[off["time_utc_ns"].to_numpy(np.int64) >= t_from]  # flag counts are the window's too
    # one series already (a system per date): without the column, series_from_frame would keep
    # only 'ALL' rows when some dates are GPS only, and drop those dates from the report
    off = off.drop(columns="system")
    if bounds:
        summary = dict(summary or {}, day_boundaries=bounds)
    try:
        build_report(off, satellites, summary, changes, out_html=pc.report_path, time_from_ns=t_from,
                     title=f"{pc.name}: clock {pc.station_a.id} − clock {pc.station_b.id}",
                     source=str(archive.path), figures_dir=figures_dir)
    except CttError as exc:
        log.warning("report not refreshed: %s", exc)
        return None
    return pathlib.Path(pc.report_path)


def report_window(archive, pair: str, days: int = 30):
    """(offsets, start ns) of the last ``days`` days of ``pair``'s main series (one system per
    date, :func:`ctt.commonview.main_series`), loaded by date range, not the whole archive, so
    a report costs the same at a month's archive as at a year's. The window ends at the last
    point; the frame holds whole dates (each date's system choice needs all its rows) from two
    days before the window's first on. None when the archive holds no offsets of the pair."""
    from .commonview import main_series

    last = archive.last_date(pair)
    if last is None:
        return None
    first = (_dt.date.fromisoformat(last) - _dt.timedelta(days=int(days) + 2)).isoformat()
    off = main_series(archive.load_offsets(pair, first))
    t_from = int(off["time_utc_ns"].max()) - int(days) * ts.NS_PER_DAY
    if archive.offsets_dated_before(pair, first, t_from):
        # a day stored under a date far from its data: the window is not a date range; read all
        off = main_series(archive.load_offsets(pair))
        t_from = int(off["time_utc_ns"].max()) - int(days) * ts.NS_PER_DAY
    return off, t_from


def _day_boundaries(pc, off, t_from) -> list[dict]:
    """The day-boundary jumps (mode ppp) recorded in the run folders of the days in the report."""
    if "date" not in off.columns:
        return []
    days = sorted(set(off["date"].astype(str)))
    if t_from is not None:
        first = str(ts.to_iso(int(t_from)))[:10]
        days = [d for d in days if d >= first]
    out = []
    for d in days:
        p = run_folder(pc, d) / "summary.json"
        try:
            b = json.loads(p.read_text()).get("day_boundary") if p.is_file() else None
        except (OSError, ValueError):
            b = None
        if isinstance(b, dict):
            out.append(b)
    return out


def hardware_changes(pc) -> list[dict]:
    """Both stations' change logs as the expected steps of A − B (ctt.pipeline.pair_changes)."""
    from .pipeline import pair_changes

    return pair_changes(pc.station_a, pc.station_b)


def needs_reprocessing(pc, archive, dates) -> dict:
    """{date: reason} for days whose archived fingerprints differ from the current ones."""
    done = archive.days_done(pc.name)
    stale = archive.stale_days(pc.name)
    out = {}
    for d in dates:
        if d in stale:
            out[d] = f"marked stale: {stale[d]}"
            continue
        if d not in done:
            out[d] = "not processed yet"
            continue
        try:
            _, ih, ch = day_fingerprints(pc, d)
        except CttError as exc:
            out[d] = f"inputs not available now ({exc})"
            continue
        if done[d][1] != ch:
            out[d] = "configuration changed (processing options, coordinates or a delay set covering the day)"
        elif done[d][0] != ih:
            out[d] = "input files changed"
    return out
