"""Benchmark: reprocessing throughput over a simulated month, and the archive at a year's size.

Target (DESIGN.md performance budget, 2-core machine): reprocess one pair-year
<= 15 min. Against that target only (no other library does this work). The machine's
cores are shared, so every stage prints the load average (1 min) before and after it and
CPU time beside wall time. What is timed, and how:

1. ``ctt backfill --force`` over ``--days`` simulated days of the demo pair (default 30:
   a real month, not a few days multiplied), with ``--jobs`` local worker processes; one
   run. The simulation is timed apart and excluded. Per day: each day's computation in its
   worker (wall and CPU, ``DayOutcome.wall_s``/``cpu_s``) and its store into the archive in
   the parent, median and 90th percentile over the days; CPU of the whole run = the worker
   processes' (``RUSAGE_CHILDREN``) + the parent's.
2. The report refresh the backfill does once at its end, timed inside that run, so the
   per-day throughput is (backfill - refresh) / days and the year is 365 x that + one refresh
   at a year's archive, not the refresh multiplied.
3. The refresh again on the month's archive: warm, median of ``--runs``.
4. The archive at a year's size: 365 - days earlier days copied from the month's (times
   shifted, no per-satellite rows: no timed operation reads them), then the month's days as
   stored, into a fresh archive, so its report window is the month's. On it: the report
   refresh (median of ``--runs``; against the month's, step 3, like for like: the same
   window, the same hardware change in it), then storing days after it like a daily run
   does (offsets and per-satellite rows, median of ``--runs`` days; against the month's
   per-day store), reading the whole year's offsets, and the list of days done.
   ``--full-load`` also times, at both sizes, the refresh reading every row of the archive
   as it did before it read only its window (once), and that read alone against the
   window's read (warm median of ``--runs``).

    python scripts/bench_backfill.py [--days 30] [--jobs 2] [--runs 3] [--work DIR] [--full-load]
                                     [--mode tracks|epochs]

``--mode`` sets the pair's processing mode (default: the demo pair's, CGGTTS tracks, about 90
points a day per system; ``epochs`` gives 2880, so the archive holds 30 times more offsets).

``--work DIR`` keeps the simulated files and archives there (the simulation is reused when
the folder already holds one of the same length).
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import pathlib
import re
import resource
import sys
import tempfile
import time

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ctt import operations  # noqa: E402
from ctt import timescales as ts  # noqa: E402
from ctt.archive import Archive  # noqa: E402
from ctt.cli import main as ctt  # noqa: E402
from ctt.config import load_pair  # noqa: E402
from ctt.simulate import run_scenario  # noqa: E402

START = dt.date(2021, 1, 1)


def _load() -> str:
    return f"load {os.getloadavg()[0]:.2f}"


def _run(fn):
    """(wall s, CPU s of this process, result) of one call."""
    t0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    return time.perf_counter() - t0, time.process_time() - c0, out


def _median_of(fn, runs):
    """Median wall and CPU of ``runs`` calls, and the load average before and after them."""
    before = _load()
    w, c = zip(*[_run(fn)[:2] for _ in range(max(1, runs))])
    return float(np.median(w)), float(np.median(c)), f"{before} -> {_load()}"


def _children_cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _mp(x) -> str:
    return f"median {np.median(x):.2f} s, p90 {np.percentile(x, 90):.2f} s"


def _shifted(off, shift_ns):
    """A stored day's offsets moved by ``shift_ns`` (time, MJD); the text columns are rebuilt on storing."""
    off = off.drop(columns=["time_utc", "date"], errors="ignore")
    off["time_utc_ns"] = off["time_utc_ns"].astype("int64") + shift_ns
    off["mjd_utc"] = off["mjd_utc"].astype(float) + shift_ns / ts.NS_PER_DAY
    return off


def _day_rows(arc, pair, src, shift_ns, satellites=True):
    off = _shifted(arc.load_offsets(pair, src, src), shift_ns)
    sat = arc.load_satellites(pair, src) if satellites else None
    if sat is not None and "time_utc_ns" in sat.columns:
        sat["time_utc_ns"] = sat["time_utc_ns"].astype("int64") + shift_ns
    return off, sat


def _full_load_window(archive, pair, days=30):
    """The refresh's rows as it read them before the windowed load: every offset of the pair."""
    from ctt.commonview import main_series

    off = main_series(archive.load_offsets(pair))
    return off, int(off["time_utc_ns"].max()) - int(days) * ts.NS_PER_DAY


def _full_load_lines(pc, arc, runs, where):
    """The refresh reading every row (once), and the read alone both ways (warm median of ``runs``)."""
    windowed = operations.report_window
    operations.report_window = _full_load_window
    try:
        w, c, _ = _run(lambda: operations.refresh_report(pc, arc))
    finally:
        operations.report_window = windowed
    print(f"   the same refresh reading the whole {where} archive (as before the windowed read), once: "
          f"{w:.2f} s wall, {c:.2f} s CPU; {_load()}")
    wr, cr, _ = _median_of(lambda: windowed(arc, pc.name), runs)
    wf, cf, ld = _median_of(lambda: _full_load_window(arc, pc.name), runs)
    print(f"   its read alone, warm median of {runs}: the window {wr:.2f} s wall, {cr:.2f} s CPU; the whole archive "
          f"{wf:.2f} s wall, {cf:.2f} s CPU; {ld}")


def _simulate(work: pathlib.Path, n: int) -> None:
    text = (ROOT / "data_demo" / "scenario.toml").read_text()
    text = re.sub(r"duration_h = [0-9.]+", f"duration_h = {24.0 * n}", text, count=1)
    scn = work / "scenario.toml"
    if scn.is_file() and scn.read_text() == text and (work / "data" / "aldr-brkw.toml").is_file():
        print(f"simulated {n} days of the demo pair: reused from {work / 'data'}")
        return
    scn.write_text(text)
    w, c, _ = _run(lambda: run_scenario(scn, work / "data"))
    print(f"simulated {n} days of the demo pair in {w:.0f} s wall, {c:.0f} s CPU (not counted below)")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--days", type=int, default=30, help="simulated days to backfill (default 30)")
    ap.add_argument("--jobs", type=int, default=2, help="local worker processes (default 2)")
    ap.add_argument("--runs", type=int, default=3, help="repeats of the warm timings (default 3)")
    ap.add_argument("--work", help="folder kept for the simulated files and archives (default: a temporary one)")
    ap.add_argument("--mode", choices=("tracks", "epochs"), help="the pair's processing mode (default: as the demo)")
    ap.add_argument("--full-load", action="store_true",
                    help="also time the refresh reading the whole archive (as before the windowed read)")
    a = ap.parse_args(argv)
    if a.work:
        pathlib.Path(a.work).mkdir(parents=True, exist_ok=True)
        _bench(pathlib.Path(a.work), a)
    else:
        with tempfile.TemporaryDirectory() as tmp:
            _bench(pathlib.Path(tmp), a)


def _bench(work: pathlib.Path, a) -> None:
    n = a.days
    print(f"{os.cpu_count()} CPUs (shared with other work), {_load()}; wall and CPU seconds, "
          "against the DESIGN.md target only")
    _simulate(work, n)
    pair = work / "data" / "aldr-brkw.toml"
    if a.mode:
        text = pair.read_text().replace("[processing]", f'[processing]\nmode = "{a.mode}"', 1)
        pair = pair.with_name(f"aldr-brkw-{a.mode}.toml")
        pair.write_text(text)
    pc = load_pair(pair)
    print(f"pair {pc.name}, mode {pc.processing.mode}")
    for p in pathlib.Path(pc.archive_path).parent.glob(pathlib.Path(pc.archive_path).name + "*"):
        p.unlink()                                   # a fresh archive: the backfill stores every day

    # 1-2. the backfill, with each day's worker and store times and the refresh at its end
    days, stores, refresh = [], [], []
    store, refresh_report = operations.store_outcome, operations.refresh_report

    def timed_store(archive, pair_name, outcome):
        days.append(outcome)
        stores.append(_run(lambda: store(archive, pair_name, outcome))[:2])

    def timed_refresh(*args, **kw):
        w, c, out = _run(lambda: refresh_report(*args, **kw))
        refresh.append((w, c))
        return out

    operations.store_outcome, operations.refresh_report = timed_store, timed_refresh
    last = START + dt.timedelta(days=n - 1)
    load0, cpu_ch0 = _load(), _children_cpu()
    try:
        t_bf, c_self, rc = _run(lambda: ctt(["-q", "backfill", "--config", str(pair), "--from", START.isoformat(),
                                             "--to", last.isoformat(), "--force", "--jobs", str(a.jobs)]))
    finally:
        operations.store_outcome, operations.refresh_report = store, refresh_report
    c_bf = _children_cpu() - cpu_ch0 + c_self
    ok = [o for o in days if o.status == "ok"]
    t_rep, c_rep = refresh[0] if refresh else (0.0, 0.0)
    size_mb = sum(p.stat().st_size for p in pathlib.Path(pc.archive_path).parent.glob(
        pathlib.Path(pc.archive_path).name + "*")) / 1e6
    print(f"1. backfill --jobs {a.jobs}, {n} pair-days (exit {rc}, {len(ok)} ok), one run: {t_bf:.1f} s wall, "
          f"{c_bf:.1f} s CPU (workers + parent); {load0} -> {_load()}; archive {size_mb:.1f} MB")
    print(f"   per day, computed in its worker: wall {_mp([o.wall_s for o in ok])}; "
          f"CPU {_mp([o.cpu_s for o in ok])}")
    print(f"   per day, stored into the archive (parent): wall {_mp([w for w, _ in stores])}; "
          f"CPU {_mp([c for _, c in stores])}")
    per_day = (t_bf - t_rep) / n
    cpu_day = (c_bf - c_rep) / n
    print(f"2. the report refresh at the backfill's end: {t_rep:.2f} s wall, {c_rep:.2f} s CPU (timed inside it)")
    print(f"   throughput: (backfill - refresh) / days = {per_day:.2f} s wall, {cpu_day:.2f} s CPU per pair-day")

    arc = Archive(pc.archive_path)
    w_m, c_m, ld = _median_of(lambda: operations.refresh_report(pc, arc), a.runs)
    print(f"3. report refresh (last 30 days) on the month's archive: warm median of {a.runs}: {w_m:.2f} s wall, "
          f"{c_m:.2f} s CPU; {ld}")
    if a.full_load:
        _full_load_lines(pc, arc, a.runs, "month's")

    # 4. the archive at a year's size: 365 - n earlier days copied from the month (times shifted,
    # no per-satellite rows), then the month itself as stored, so the refresh shows the same window
    done = sorted(arc.days_done(pc.name))
    year_path = work / "year.sqlite"
    for p in work.glob("year.sqlite*"):
        p.unlink()
    year_arc = Archive(year_path)
    t0 = time.perf_counter()
    for j in range(n - 365, n):                  # days relative to the month's first
        shift = (j - j % n) * ts.NS_PER_DAY      # copied from the month's day j mod n; 0 for the month
        off, sat = _day_rows(arc, pc.name, done[j % n], shift, satellites=j >= 0)
        year_arc.store_day(pc.name, START + dt.timedelta(days=j), off, sat, {"messages": []})
    t_fill = time.perf_counter() - t0
    size_mb = sum(p.stat().st_size for p in work.glob("year.sqlite*")) / 1e6
    print(f"4. archive at a year's size: {365 - n} earlier days copied from the month, then the month's {n}, "
          f"in {t_fill:.1f} s; {size_mb:.1f} MB")
    w_y, c_y, ld = _median_of(lambda: operations.refresh_report(pc, year_arc), a.runs)
    print(f"   report refresh (last 30 days, the same window as step 3) from the year archive: warm median of "
          f"{a.runs}: {w_y:.2f} s wall, {c_y:.2f} s CPU vs {w_m:.2f} s wall, {c_m:.2f} s CPU from the month's; {ld}")
    if a.full_load:
        _full_load_lines(pc, year_arc, a.runs, "year")
    st = []
    for k in range(max(1, a.runs)):       # the days after: stored as a daily run does, offsets and satellites
        j = n + k
        off, sat = _day_rows(arc, pc.name, done[j % n], (j - j % n) * ts.NS_PER_DAY)
        st.append(_run(lambda: year_arc.store_day(pc.name, START + dt.timedelta(days=j), off, sat,
                                                  {"messages": []}))[:2])
    w_s, c_s = np.median(np.array(st), axis=0)
    print(f"   store one more day (offsets + satellites), median of {len(st)}: {w_s:.2f} s wall, {c_s:.2f} s CPU "
          f"(month's per-day store during the backfill: median {np.median([w for w, _ in stores]):.2f} s wall, "
          f"{np.median([c for _, c in stores]):.2f} s CPU)")
    t_load, c_load, allo = _run(lambda: year_arc.load_offsets(pc.name))
    t_done, _, dd = _run(lambda: year_arc.days_done(pc.name))
    print(f"   load the whole year's offsets ({len(allo)} rows) {t_load:.2f} s wall, {c_load:.2f} s CPU; "
          f"days done ({len(dd)}) {t_done * 1e3:.0f} ms")
    year = per_day * 365 + w_y
    print(f"one pair-year = 365 x {per_day:.2f} s + one refresh at a year's archive {w_y:.1f} s = {year / 60:.1f} min "
          f"wall on {a.jobs} jobs (CPU {(cpu_day * 365 + c_y) / 60:.1f} min); target <= 15 min: "
          f"{'met' if year <= 900 else 'NOT met'}")
    year_arc.close()
    arc.close()


if __name__ == "__main__":
    main()
