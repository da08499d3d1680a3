"""Benchmark: reprocessing throughput over a simulated month, and the archive at a year's size.

Target (DESIGN.md performance budget, 2-core machine): reprocess one pair-year
<= 15 min. What is timed, and how (wall clock, one run each; shared machine, noisy):

1. ``ctt backfill --force`` over ``--days`` simulated days of the demo pair (default 30:
   a real month, not a few days multiplied), with ``--jobs`` local worker processes. The
   simulation itself is timed apart and excluded.
2. The report refresh that backfill does once at its end, timed apart on the month's
   archive, so the per-day figure is (backfill − refresh) / days and the year is
   365 × per-day + one refresh, not the refresh multiplied.
3. The archive at a year's size: the month's stored days copied under 365 dates (times
   shifted; per-satellite rows for the last 30 only, which is all the timed operations read)
   into a fresh archive, then the operations a daily run and a report do on it:
   storing one more day, reading the whole year's offsets, the list of days done, and the
   report refresh (last 30 days) from the year archive.

    python scripts/bench_backfill.py [--days 30] [--jobs 2]
"""

from __future__ import annotations

import argparse
import datetime as dt
import pathlib
import re
import sys
import tempfile
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ctt import timescales as ts  # noqa: E402
from ctt.archive import Archive  # noqa: E402
from ctt.cli import main as ctt  # noqa: E402
from ctt.config import load_pair  # noqa: E402
from ctt.operations import refresh_report  # noqa: E402
from ctt.simulate import run_scenario  # noqa: E402

START = dt.date(2021, 1, 1)


def _wall(fn):
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def _shifted(off, shift_ns):
    """A stored day's offsets moved by ``shift_ns`` (time, MJD); the text columns are rebuilt on storing."""
    off = off.drop(columns=["time_utc", "date"], errors="ignore")
    off["time_utc_ns"] = off["time_utc_ns"].astype("int64") + shift_ns
    off["mjd_utc"] = off["mjd_utc"].astype(float) + shift_ns / ts.NS_PER_DAY
    return off


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--days", type=int, default=30, help="simulated days to backfill (default 30)")
    ap.add_argument("--jobs", type=int, default=2, help="local worker processes (default 2)")
    a = ap.parse_args(argv)
    n = a.days
    with tempfile.TemporaryDirectory() as tmp:
        tmp = pathlib.Path(tmp)
        text = (ROOT / "data_demo" / "scenario.toml").read_text()
        text = re.sub(r"duration_h = [0-9.]+", f"duration_h = {24.0 * n}", text, count=1)
        scn = tmp / "scenario.toml"
        scn.write_text(text)
        t_sim, _ = _wall(lambda: run_scenario(scn, tmp / "data"))
        print(f"simulated {n} days of the demo pair in {t_sim:.1f} s (not counted below)")
        pair = tmp / "data" / "aldr-brkw.toml"
        last = START + dt.timedelta(days=n - 1)
        t_bf, rc = _wall(lambda: ctt(["-q", "backfill", "--config", str(pair), "--from", START.isoformat(),
                                      "--to", last.isoformat(), "--force", "--jobs", str(a.jobs)]))
        pc = load_pair(pair)
        arc = Archive(pc.archive_path)
        t_rep, _ = _wall(lambda: refresh_report(pc, arc))
        per_day = (t_bf - t_rep) / n
        year = per_day * 365 + t_rep
        print(f"1. backfill --jobs {a.jobs}: {n} pair-days in {t_bf:.1f} s wall (exit {rc}), one run")
        print(f"2. of which the report refresh at the end: {t_rep:.2f} s (timed apart, once)")
        print(f"   per pair-day {per_day:.2f} s -> one pair-year = 365 x {per_day:.2f} s + {t_rep:.1f} s "
              f"= {year / 60:.1f} min (target <= 15 min: {'met' if year <= 900 else 'NOT met'})")

        # 3. the archive at a year's size
        done = sorted(arc.days_done(pc.name))
        year_arc = Archive(tmp / "year.sqlite")
        t0 = time.perf_counter()
        for k in range(365):
            src = done[k % len(done)]
            shift = (k - done.index(src)) * ts.NS_PER_DAY  # move the copied day to its new date
            off = _shifted(arc.load_offsets(pc.name, src, src), shift)
            sat = None
            if k >= 365 - 30:  # per-satellite rows for the last 30 days only: the timed operations
                sat = arc.load_satellites(pc.name, src)  # never read older ones, and they dominate the copy
                if "time_utc_ns" in sat.columns:
                    sat["time_utc_ns"] = sat["time_utc_ns"].astype("int64") + shift
            year_arc.store_day(pc.name, START + dt.timedelta(days=k), off, sat, {"messages": []})
        t_fill = time.perf_counter() - t0
        size_mb = (tmp / "year.sqlite").stat().st_size / 1e6
        print(f"3. archive at a year's size: 365 days copied in {t_fill:.1f} s, {size_mb:.1f} MB")
        extra = START + dt.timedelta(days=365)
        off = _shifted(year_arc.load_offsets(pc.name, START + dt.timedelta(days=364),
                                             START + dt.timedelta(days=364)), ts.NS_PER_DAY)
        t_store, _ = _wall(lambda: year_arc.store_day(pc.name, extra, off, None, {"messages": []}))
        t_load, allo = _wall(lambda: year_arc.load_offsets(pc.name))
        t_done, dd = _wall(lambda: year_arc.days_done(pc.name))
        t_rep_y, _ = _wall(lambda: refresh_report(pc, year_arc))
        print(f"   store one more day {t_store * 1e3:.0f} ms; load the whole year's offsets ({len(allo)} rows) "
              f"{t_load:.2f} s; days done ({len(dd)}) {t_done * 1e3:.0f} ms; report refresh (last 30 days) "
              f"from the year archive {t_rep_y:.2f} s vs {t_rep:.2f} s from the month's")


if __name__ == "__main__":
    main()
