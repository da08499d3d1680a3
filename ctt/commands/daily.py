"""``ctt daily`` and ``ctt backfill``: unattended processing into the archive."""

from __future__ import annotations

import logging
import sys

from ..errors import EXIT_OK, UsageError, worst_exit_code
from ._common import date_arg, seconds_arg

log = logging.getLogger("ctt")


def register(sub) -> None:
    p = sub.add_parser("daily", help="process one day of a pair file into its archive (cron)",
                       description="Find the day's files from the pair file, process them, write the run "
                                   "folder, store the day in the archive and refresh the report. Safe to "
                                   "re-run; a second run waits for the first.")
    p.add_argument("--config", required=True, help="pair TOML file")
    p.add_argument("--date", type=date_arg, help="UTC date YYYY-MM-DD (default: yesterday, UTC)")
    p.add_argument("--force", action="store_true", help="reprocess even if done with the same inputs")
    p.add_argument("--lock-timeout", type=seconds_arg, default=600.0, metavar="SECONDS",
                   help="how long to wait for another run holding the archive (default 600)")
    p.add_argument("--no-report", action="store_true", help="do not refresh the HTML report")
    p.add_argument("--force-inputs", action="store_true",
                   help="process files whose marker name or position does not match their station file (a warning instead of a refusal)")
    p.set_defaults(func=run_daily)

    b = sub.add_parser("backfill", help="process a range of days (resumable, parallel)",
                       description="Process every day of a range. Days already archived with the same input "
                                   "files and the same configuration for that date are skipped; days whose "
                                   "calibration or coordinates changed are reprocessed and listed.")
    b.add_argument("--config", required=True, help="pair TOML file")
    b.add_argument("--from", dest="date_from", type=date_arg, required=True, help="first UTC date YYYY-MM-DD")
    b.add_argument("--to", dest="date_to", type=date_arg, required=True, help="last UTC date YYYY-MM-DD")
    b.add_argument("--force", action="store_true", help="reprocess every day")
    b.add_argument("--jobs", type=int, default=1, help="local worker processes (default 1)")
    b.add_argument("--scheduler", metavar="ADDRESS",
                   help="run the day jobs on an existing Dask cluster (dask.distributed scheduler address)")
    b.add_argument("--check", action="store_true",
                   help="only list the days that need (re)processing and why; change nothing")
    b.add_argument("--lock-timeout", type=seconds_arg, default=600.0, metavar="SECONDS")
    b.add_argument("--no-report", action="store_true")
    b.add_argument("--force-inputs", action="store_true",
                   help="process files whose marker name or position does not match their station file (a warning instead of a refusal)")
    b.set_defaults(func=run_backfill)

    r = sub.add_parser("rebuild-archive", help="rebuild a lost or damaged archive from the run folders",
                       description="Store every run folder <output dir>/<pair>/<YYYY-MM-DD>/ of the pair file "
                                   "into a new archive (the configured one, which must not exist: move a "
                                   "damaged one aside first, or give --archive). Failed attempts are not in "
                                   "run folders and do not come back.")
    r.add_argument("--config", required=True, help="pair TOML file")
    r.add_argument("--archive", metavar="FILE", help="write this new archive instead of the configured one")
    r.add_argument("--lock-timeout", type=seconds_arg, default=600.0, metavar="SECONDS")
    r.set_defaults(func=run_rebuild)


def _open(pc, timeout):
    from ..archive import Archive

    return Archive(pc.archive_path, timeout_s=timeout)


def run_daily(args) -> int:
    from ..config import load_pair
    from ..operations import compute_day, refresh_report, store_outcome, yesterday_utc

    pc = load_pair(args.config)
    date = args.date or yesterday_utc()
    with _open(pc, args.lock_timeout) as arc, arc.run_lock():
        known = arc.days_done(pc.name).get(date)
        outcome = compute_day(str(pc.path), date, known, force=args.force, force_inputs=args.force_inputs)
        store_outcome(arc, pc.name, outcome)
        if outcome.status == "ok" and not args.no_report:
            rep = refresh_report(pc, arc, summary=outcome.summary, satellites=outcome.satellites)
            if rep:
                log.info("report refreshed: %s", rep)
    if outcome.status == "skipped":
        print(f"{pc.name} {date}: already done with the same inputs and configuration (use --force)")
        return EXIT_OK
    if outcome.status == "failed":
        print(f"ctt: error: {pc.name} {date}: {outcome.reason}", file=sys.stderr)
        return outcome.exit_code
    s = outcome.summary
    from ..pipeline import format_daily_value

    print(f"{pc.name} {date}: {s['counts']['points_ok']} points ok; run folder {outcome.out_dir}; "
          f"archive {pc.archive_path}")
    if s.get("daily_value") is not None:
        print(format_daily_value(s["daily_value"], s["station_a"], s["station_b"]))
    else:
        print("  " + str((s.get("daily_value_detail") or {}).get("reason", "no daily value")))
    for w in s.get("warnings", []):
        print(f"  warning: {w}")
    for f in s.get("day_flags", []):
        print(f"  DAY FLAGGED: {f}")
    return EXIT_OK


def run_backfill(args) -> int:
    from tqdm import tqdm

    from ..config import load_pair
    from ..operations import dates_between, needs_reprocessing, refresh_report, store_outcome

    pc = load_pair(args.config)
    try:
        dates = dates_between(args.date_from, args.date_to)
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    if args.jobs < 1:
        raise UsageError("--jobs must be at least 1")
    with _open(pc, args.lock_timeout) as arc:
        todo = {d: "forced" for d in dates} if args.force else needs_reprocessing(pc, arc, dates)
        changed = {} if args.force else {d: r for d, r in todo.items() if r != "not processed yet"}
        if changed:
            print(f"{len(changed)} archived day(s) need reprocessing:")
            for d, r in changed.items():
                print(f"  {d}: {r}")
        if args.check:
            new = [d for d, r in sorted(todo.items()) if r == "not processed yet"]
            if new:
                print(f"{len(new)} day(s) not processed yet: {_ranges(new)}")
            print(f"{len(todo)} of {len(dates)} day(s) to process"
                  + (f" ({len(dates) - len(todo)} already done with the same inputs and configuration)"
                     if len(todo) < len(dates) else ""))
            return EXIT_OK
        if not todo:
            print(f"all {len(dates)} day(s) already done with the same inputs and configuration")
            return EXIT_OK
        counts = {"ok": 0, "failed": 0, "skipped": len(dates) - len(todo)}
        failures = []
        with arc.run_lock():
            work = sorted(todo)
            for outcome in tqdm(_outcomes(str(pc.path), work, args), total=len(work), unit="day",
                                desc=pc.name, file=sys.stderr, disable=None):
                store_outcome(arc, pc.name, outcome)
                counts[outcome.status] = counts.get(outcome.status, 0) + 1
                if outcome.status == "failed":
                    failures.append(outcome)
            if counts["ok"] and not args.no_report:
                refresh_report(pc, arc)
    print(f"{pc.name}: {counts['ok']} day(s) processed, {counts['failed']} failed, "
          f"{counts['skipped']} already done")
    code = worst_exit_code(o.exit_code for o in failures)
    if failures:
        # at the end, where a cron log's reader looks: every failed day with its reason and class
        print(f"ctt: error: {len(failures)} day(s) failed (exit {code}, the worst day's):", file=sys.stderr)
        for o in sorted(failures, key=lambda o: o.date):
            print(f"  {o.date} [exit {o.exit_code}]: {o.reason}", file=sys.stderr)
    return code


def run_rebuild(args) -> int:
    import pathlib

    from ..archive import Archive
    from ..config import load_pair
    from ..errors import NoDataError
    from ..operations import rebuild_archive

    pc = load_pair(args.config)
    runs = pathlib.Path(pc.output_dir) / pc.name
    if not runs.is_dir():
        raise NoDataError(f"{runs}: no run folders of {pc.name} to rebuild the archive from")
    target = pathlib.Path(args.archive) if args.archive else pathlib.Path(pc.archive_path)
    if target.exists() and target.stat().st_size > 0:
        raise UsageError(f"{target}: exists; move it aside first (it is kept for inspection) or give "
                         "--archive NEW.sqlite")
    with Archive(target, timeout_s=args.lock_timeout) as arc, arc.run_lock():
        stored, problems = rebuild_archive(pc, arc)
    for line in problems:
        print(f"ctt: warning: {line}", file=sys.stderr)
    if not stored:
        raise NoDataError(f"{pc.output_dir}/{pc.name}: no run folders to rebuild {target} from")
    print(f"{pc.name}: {len(stored)} day(s) stored into {target} from the run folders "
          f"({stored[0]} .. {stored[-1]}); {len(problems)} folder(s) skipped")
    return EXIT_OK


def _ranges(dates: list[str]) -> str:
    """'2021-01-01..2021-01-05, 2021-01-09': consecutive dates as ranges."""
    import datetime as _dt

    out, start, prev = [], None, None
    for d in sorted(dates):
        day = _dt.date.fromisoformat(d)
        if prev is not None and day - prev == _dt.timedelta(days=1):
            prev = day
            continue
        if start is not None:
            out.append(str(start) if start == prev else f"{start}..{prev}")
        start = prev = day
    if start is not None:
        out.append(str(start) if start == prev else f"{start}..{prev}")
    return ", ".join(out)


def _outcomes(pair_path, dates, args):
    """Yield DayOutcomes as they complete: in this process, local processes or a Dask cluster."""
    from ..operations import compute_day

    if args.scheduler:
        from dask.distributed import Client, as_completed

        with Client(args.scheduler) as client:
            futures = [client.submit(compute_day, pair_path, d, None, True, args.force_inputs, pure=False) for d in dates]
            for fut in as_completed(futures):
                yield fut.result()
        return
    if args.jobs == 1:
        for d in dates:
            yield compute_day(pair_path, d, None, True, args.force_inputs)
        return
    from concurrent.futures import ProcessPoolExecutor, as_completed as done

    with ProcessPoolExecutor(max_workers=args.jobs) as pool:
        futs = [pool.submit(compute_day, pair_path, d, None, True, args.force_inputs) for d in dates]
        for f in done(futs):
            yield f.result()
