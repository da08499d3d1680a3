"""``ctt demo``: the whole daily job on the invented demo scenario, offline.

Runs, on ``data_demo/`` (two invented laboratories about 450 km apart, one
simulated day of GPS + Galileo with a cable change in the afternoon): the
daily processing into an archive (as ``ctt daily``), the comparison with the
simulator's truth, the HTML report with the stability, drift and change
analysis, and an event-time correction of a few invented events; then says
where everything is.
"""

from __future__ import annotations

import logging
import pathlib
import shutil
import time


log = logging.getLogger("ctt")


def demo_folder() -> pathlib.Path:
    """The demo scenario shipped beside the package (a source checkout or an editable install)."""
    here = pathlib.Path(__file__).resolve().parents[2] / "data_demo"
    return here


def register(sub) -> None:
    p = sub.add_parser("demo", help="run the whole job on the built-in demo scenario (offline)",
                       description="Process the invented demo pair (two invented laboratories about 450 km "
                                   "apart, one simulated day with a cable change) end to end, offline, and "
                                   "compare the result with the simulator's truth. Writes into --out: "
                                   "scenario/ (a copy of the demo files and pair file), runs/aldr-brkw/2021-01-01/ "
                                   "(offset.csv, satellites.csv, summary.json), archive.sqlite, report.html "
                                   "and report.json, report_figures/*.png (the report's figures), "
                                   "events_b.csv and events_b_on_a.csv (an event-time correction). "
                                   "Replaces scenario/ on every run.")
    p.add_argument("--out", default="ctt-demo-output", help="output folder (default ./ctt-demo-output)")
    p.set_defaults(func=run)


def run(args) -> int:
    import numpy as np

    from .. import operations
    from ..archive import Archive
    from ..config import load_pair
    from ..errors import MissingInputError

    t_start = time.monotonic()
    src = demo_folder()
    if not (src / "aldr-brkw.toml").is_file():
        raise MissingInputError(f"{src}: demo scenario not found (run from a source checkout: pip install -e .)")
    out = pathlib.Path(args.out).resolve()
    work = out / "scenario"
    if work.exists():
        shutil.rmtree(work)
    shutil.copytree(src, work, ignore=shutil.ignore_patterns("out", "*.sqlite*"))
    pair_file = work / "aldr-brkw.toml"
    _point_outputs_to(pair_file, out)
    pc = load_pair(pair_file)
    date = "2021-01-01"

    print(f"ctt demo: invented pair {pc.station_a.id} ({pc.station_a.name}) - "
          f"{pc.station_b.id} ({pc.station_b.name}), {date}")
    with Archive(pc.archive_path) as arc, arc.run_lock():
        outcome = operations.compute_day(str(pair_file), date, None, force=True)
        operations.store_outcome(arc, pc.name, outcome)
        if outcome.status != "ok":
            print(f"ctt demo: the day failed: {outcome.reason}")
            return 1
    run_dir = pathlib.Path(outcome.out_dir)
    s = outcome.summary
    from ..pipeline import format_daily_value

    dv = s["daily_value"]
    print(f"  processed: {s['counts']['points_ok']} of {s['counts']['points']} points ok "
          f"({s['mode']}, {s['signals']}, systems {','.join(s['config']['measure']['systems'])})")
    print(format_daily_value(dv, s["station_a"], s["station_b"]))

    # truth comparison (the simulator's true offset, incl. the cable change as the receiver sees it)
    import pandas as pd

    from .. import timescales as ts

    truth = pd.read_csv(work / "truth.csv")
    col = f"{pc.station_a.id}-{pc.station_b.id}_apparent_ns"
    off = pd.read_csv(run_dir / "offset.csv")
    ok = off["flag"] == "ok"
    tg = ts.parse_iso_array(truth["time_gps"])
    tv = np.interp(off.loc[ok, "time_gps_ns"].to_numpy(float), tg.astype(float), truth[col].to_numpy())
    err = off.loc[ok, "offset_ns"].to_numpy() - tv
    print(f"  against the simulated truth: bias {err.mean():+.3f} ns, RMS {np.sqrt(np.mean(err**2)):.3f} ns "
          f"over {err.size} points")
    est, at_epoch = truth_daily_value(dv, off[ok], truth, col, work / "truth_steps.csv")
    print(f"  daily value against the truth: error {dv['offset_ns'] - est:+.3f} ns (type A u "
          f"{dv['u_a_ns']:.3f} ns) against the same estimator on the true series; the true value at the "
          f"epoch itself differs by {dv['offset_ns'] - at_epoch:+.3f} ns (the clocks' wander about the day's "
          f"line, shown as stability)")

    # the report, as the daily run makes it (archive series, change log, provenance)
    with Archive(pc.archive_path) as arc:
        operations.refresh_report(pc, arc, summary=s, satellites=pd.read_csv(run_dir / "satellites.csv"),
                                  figures_dir=out / "report_figures")
    rep_json = pathlib.Path(pc.report_path).with_suffix(".json")
    import json

    report = json.loads(rep_json.read_text()) if rep_json.is_file() else {}
    for c in report.get("changes", []):
        agree = c.get("agrees_with_log")
        print(f"  change found: {c.get('time_utc')} {c.get('kind')} {c.get('size'):+.2f} "
              f"+- {c.get('u_size'):.2f} ({'expected' if c.get('expected') else 'unexpected'}"
              + ("" if agree is None else f"; log says {c.get('expected_ns'):+.2f}, "
                 f"{'agrees' if agree else 'does not agree'} within 2 sigma") + ")")
    # the time-of-flight hand-off: events stamped on B's clock, expressed on A's time scale
    events = out / "events_b.csv"
    events.write_text("time_utc,event_id\n2021-01-01T06:00:00.123456789Z,1\n"
                      "2021-01-01T15:30:00.000000001Z,2\n2021-01-02T06:00:00Z,3\n")
    corrected = out / "events_b_on_a.csv"
    import argparse

    from . import correct_events as ce

    # the demo's event 3 lies outside the series and event 2 after the cable change that the
    # demo's station file deliberately does not enter as a delay set: both are meant to show how
    # ctt refuses and flags, so they are printed here as information, not logged as warnings
    ev_log = logging.getLogger("ctt.events")
    level = ev_log.level
    ev_log.setLevel(logging.ERROR)
    try:
        ce.run(argparse.Namespace(config=str(pair_file), events=str(events), site="B", out=str(corrected),
                                  from_dir=None, type_b_ns=None, system=None, max_gap_s=None, baseline=False))
    finally:
        ev_log.setLevel(level)
    ev = pd.read_csv(corrected, keep_default_na=False)
    notes = []
    for _, r in ev.iterrows():
        if r.get("status") == "ok":
            print(f"  event {r['event_id']} at {r['time_utc']} on B's clock = {r['corrected_time_utc']} on A's "
                  f"(+{float(r['correction_ns']):.3f} ns, u {float(r['u_ns']):.3f} ns)"
                  + (" [flagged, see below]" if r.get("warning") else ""))
            if r.get("warning") and r["warning"] not in notes:
                notes.append(r["warning"])
        else:
            print(f"  event {r['event_id']} at {r['time_utc']}: refused, as the demo intends ({r['reason']})")
    for n in notes:
        print(f"  note (intended in the demo): {n}")
    print("outputs:")
    print(f"  run folder   {run_dir}  (offset.csv, satellites.csv, summary.json)")
    print(f"  archive      {pc.archive_path}")
    print(f"  report       {pc.report_path}  (and {rep_json.name}; figures as PNG in {out / 'report_figures'})")
    print(f"  events       {corrected}")
    print(f"done in {time.monotonic() - t_start:.1f} s")
    return 0


def truth_daily_value(dv: dict, ok_rows, truth, col: str, steps_csv) -> tuple[float, float]:
    """The simulator's truth for a ``daily_value``: (the same estimator applied to the true
    series at the day's ok points, with the true apparent steps; the true value at the epoch).

    The estimator is ctt.stability's drift model (offset + frequency, weights 1/u², steps
    held fixed) evaluated at the daily value's epoch; with the true steps the difference
    is the measurement's own error, which type A describes."""
    import numpy as np
    import pandas as pd

    from .. import stability
    from .. import timescales as ts

    t = ts.convert(ok_rows["time_gps_ns"].to_numpy(np.int64), "GPS", "UTC")
    tg = ts.parse_iso_array(truth["time_utc"].astype(str).str.rstrip("Z"))
    tv = np.interp(t.astype(float), tg.astype(float), truth[col].to_numpy(float))
    steps = []
    if pathlib.Path(steps_csv).is_file():
        st = pd.read_csv(steps_csv)
        a, b = col.split("_")[0].split("-")
        for _, r in st.iterrows():
            sign = 1.0 if r["station"] == a else -1.0 if r["station"] == b else 0.0
            size = sign * float(r.get("apparent_step_ns", 0.0) or 0.0)
            if size:
                steps.append((int(ts.parse_iso(str(r["time_utc"]).rstrip("Z"))), stability.Param(size, 0.0, 0.0)))
    fit = stability.fit_drift(t, tv, ok_rows["u_ns"].to_numpy(float), quadratic=False, fixed_steps=steps)
    tc = int(ts.parse_iso(str(dv["epoch_utc"]).rstrip("Z")))
    est = fit.offset_ns.value + sum(p.value for te, p in steps if tc >= te)
    return float(est), float(np.interp(float(tc), tg.astype(float), truth[col].to_numpy(float)))


def _point_outputs_to(pair_file: pathlib.Path, out: pathlib.Path) -> None:
    """Rewrite the copied pair file's [output] table so everything lands under ``out``."""
    import tomllib

    text = pair_file.read_text()
    data = tomllib.loads(text)
    lines = [ln for ln in text.splitlines()]
    # drop an existing [output] table and append ours
    keep, skip = [], False
    for ln in lines:
        if ln.strip().startswith("["):
            skip = ln.strip() == "[output]"
        if not skip:
            keep.append(ln)
    keep += ["", "[output]", f'root = "{out.as_posix()}"', 'dir = "runs"', 'archive = "archive.sqlite"',
             'report = "report.html"']
    del data
    pair_file.write_text("\n".join(keep) + "\n")
