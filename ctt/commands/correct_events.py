"""``ctt correct-events``: event timestamps of one site's clock in the other site's time scale.

``ctt correct-events --config PAIR.toml --events EVENTS.csv --site B --out CORRECTED.csv
[--from-dir RUN_DIR] [--type-b-ns U] [--system S] [--max-gap-s G]``

The offsets (clock A minus clock B) come from the pair's archive, or with
``--from-dir`` from a run folder's ``offset.csv``; the type-B uncertainty from
``--type-b-ns``, else from the run folder's ``summary.json`` (``budget.type_b_ns``)
when present (from the archive: the daily run folders
``<output dir>/<pair>/<date>/summary.json`` of the days spanned, the largest
value), else 0 with a warning. TDEV is measured on the series itself.
See :mod:`ctt.exports` for the formulas. ``--baseline`` prints the chord
between the two antenna reference points with its uncertainty and the light
time (and may be used without ``--events``).

Warnings (logged, and in the output's ``warning`` column of each event concerned):

* the archive's days (or the run folder) were computed with a station or pair
  configuration different from the current one (day configuration hash of
  :func:`ctt.operations.day_config_hash`): re-process them (``ctt backfill``);
* an event after a change logged in a station file (``[[changes]]``) that no
  delay set starts at (within a day): the series carries that change's delay
  step until a new delay set is entered and the days are re-processed;
* an event after a phase step or frequency change that the series shows and
  neither change log explains (:func:`ctt.stability.detect_changes`).
"""

from __future__ import annotations

import datetime as _dt
import json
import logging
import pathlib

from ..errors import FileFormatError, MissingInputError, NoDataError, UsageError

log = logging.getLogger("ctt.events")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "correct-events",
        help="convert event timestamps of one site into the other site's time scale",
        description="For events stamped with site B's clock, give the same instants in site A's time "
        "scale (t_A = t_B + (A - B)), or the inverse for site A, with per-event uncertainty.",
    )
    p.add_argument("--config", required=True, help="pair TOML file")
    p.add_argument("--events", help="events CSV with time_utc (ISO 8601, up to 9 digits) or mjd_utc")
    p.add_argument("--site", choices=("A", "B", "a", "b"), required=True,
                   help="clock that stamped the events (A or B of the pair; no default, to avoid a silent sign error)")
    p.add_argument("--out", help="corrected events CSV (default: stdout)")
    p.add_argument("--from-dir", help="run folder with offset.csv (and summary.json) instead of the archive")
    p.add_argument("--type-b-ns", type=float, help="type-B standard uncertainty (ns) to combine")
    p.add_argument("--system", help="system series to use (default ALL, or the only one)")
    p.add_argument("--max-gap-s", type=float, help="refuse events in gaps longer than this (default: pair file)")
    p.add_argument("--baseline", action="store_true", help="print the baseline chord and light time")
    p.set_defaults(func=run)


def baseline_text(pair) -> str:
    import numpy as np
    from ..exports import C_MPS

    a, b = pair.station_a, pair.station_b
    pa, pb = a.arp_m, b.arp_m
    try:
        from ..geodesy import baseline as _baseline
        bl = _baseline(pa, pb, sigma_a_m=a.position_sigma_m, sigma_b_m=b.position_sigma_m)
        chord, sig, geod = bl.chord_m, bl.chord_sigma_m, getattr(bl, "geodesic_m", float("nan"))
    except ImportError:  # geodesy not available: first-order propagation here
        d = pb - pa
        chord = float(np.linalg.norm(d))
        u = d / chord
        sig = float(np.sqrt(np.sum(u ** 2 * (a.position_sigma_m ** 2 + b.position_sigma_m ** 2))))
        geod = float("nan")
    lines = [f"baseline {a.id} -> {b.id} (antenna reference points)",
             f"  chord        {chord:.4f} m  +- {sig:.4f} m (1 sigma)",
             f"  light time   {chord / C_MPS * 1e9:.4f} ns  +- {sig / C_MPS * 1e9:.4f} ns"]
    if np.isfinite(geod):
        lines.append(f"  geodesic     {geod:.3f} m (on the ellipsoid)")
    return "\n".join(lines)


def _archive_config_changed(pair, done: dict, dates) -> list[str]:
    """Archived dates whose stored configuration hash differs from the current one."""
    from ..operations import day_config_hash

    return [d for d in dates if d in done and done[d][1] and done[d][1] != day_config_hash(pair, d)]


def _run_dir_config_changed(pair, run_dir: pathlib.Path) -> list[str]:
    p = run_dir / "summary.json"
    try:
        s = json.loads(p.read_text()) if p.is_file() else {}
    except ValueError:
        return []
    from ..operations import day_config_hash

    d, h = s.get("date_utc"), s.get("config_hash")
    if not d or not h:
        return []  # a run folder of ``ctt pair`` without a pair file: nothing to compare
    return [d] if h != day_config_hash(pair, d) else []


def _series_warnings(pair, offsets, args, config_changed) -> list[tuple]:
    """(from UTC ns, until UTC ns or None, text) of everything that makes corrections after an instant doubtful."""
    import numpy as np

    from ..operations import hardware_changes
    from ..timescales import NS_PER_DAY, to_iso

    out = []
    if config_changed:
        from ..timescales import date_to_ns

        for d in config_changed:
            t0 = int(date_to_ns(d))
            out.append((t0, t0 + NS_PER_DAY,
                        f"the series of {d} was computed with a station or pair "
                    f"configuration different from the current one ({pair.path} and its station files); "
                        "re-process that day (ctt backfill) before trusting these corrections"))
    for st in (pair.station_a, pair.station_b):
        starts = [ds.valid_from_ns for ds in st.delay_sets]
        for c in st.changes:
            if not any(abs(s - c.time_utc_ns) <= NS_PER_DAY for s in starts):
                out.append((c.time_utc_ns, None,
                            f"after the change logged at {st.id} at {to_iso(c.time_utc_ns)} ({c.what}), which no "
                            f"delay set of {st.path} starts at: the series carries that change's delay step "
                            "until a new delay set is entered and the days re-processed"))
    ok = offsets["flag"].astype(str) == "ok" if "flag" in offsets.columns else np.ones(len(offsets), bool)
    if args.system and "system" in offsets.columns:
        ok &= offsets["system"].astype(str) == args.system
    elif "system" in offsets.columns:
        from ..commonview import main_series

        keep = main_series(offsets).index
        ok &= offsets.index.isin(keep)
    t = offsets.loc[ok, "time_utc_ns"].to_numpy(np.int64)
    x = offsets.loc[ok, "offset_ns"].to_numpy(float)
    if len(t) >= 20:
        from .. import stability

        try:
            rep = stability.detect_changes(t, x, changes=hardware_changes(pair))
        except (ValueError, RuntimeError) as exc:
            log.debug("change detection for the event warnings failed: %s", exc)
            rep = None
        for c in (rep.changes if rep is not None else []):
            if not c.expected:
                unit = " ns" if c.kind == "phase step" else ""
                out.append((int(c.time_ns), None, f"after an unexpected {c.kind} of {c.size:+.3g}{unit} at "
                                            f"{to_iso(int(c.time_ns))} that neither station's change log "
                                            "explains: check the stations and re-process"))
    return sorted(out, key=lambda n: n[0])


def _concerned(t_events, note):
    t0, t1, _ = note
    return (t_events >= t0) & (True if t1 is None else t_events < t1)


def _event_warnings(t_events, notes):
    import numpy as np

    w = np.full(len(t_events), "", dtype=object)
    for note in notes:
        text = note[2]
        hit = _concerned(t_events, note)
        w[hit] = np.where(w[hit] == "", text, w[hit] + "; " + text)
    return w


def _type_b_from_summary(run_dir: pathlib.Path):
    p = run_dir / "summary.json"
    if not p.exists():
        return None
    try:
        s = json.loads(p.read_text())
    except ValueError as exc:
        raise FileFormatError(p, None, "a JSON summary", str(exc)) from None
    b = s.get("budget", {}) if isinstance(s, dict) else {}
    v = b.get("type_b_ns", s.get("type_b_ns") if isinstance(s, dict) else None)
    return None if v is None else float(v)


def run(args) -> int:
    import numpy as np
    from ..archive import Archive
    from ..config import load_pair
    from ..exports import correct_events, read_events, read_offsets_csv
    from ..timescales import NS_PER_DAY, to_iso

    pair = load_pair(args.config)
    if args.baseline:
        print(baseline_text(pair))
        if not args.events:
            return 0
    if not args.events:
        raise UsageError("--events is required (unless only --baseline is asked)")
    ev = read_events(args.events)
    if ev.empty:
        raise NoDataError(f"{args.events}: no events")
    type_b = args.type_b_ns
    config_changed: list[str] = []   # dates computed with another configuration than the current one
    if args.from_dir:
        run_dir = pathlib.Path(args.from_dir)
        by_sys = run_dir / "offset_by_system.csv"
        # offset.csv holds the main series only; another system's is in offset_by_system.csv
        offsets = read_offsets_csv(by_sys if args.system and by_sys.is_file() else run_dir / "offset.csv")
        if type_b is None:
            type_b = _type_b_from_summary(run_dir)
        config_changed = _run_dir_config_changed(pair, run_dir)
    else:
        if not pair.archive_path.exists():
            raise MissingInputError(f"{pair.archive_path}: archive not found (configured in {pair.path})")
        t = ev["event_time_utc_ns"].to_numpy(np.int64)
        d0 = _dt.date.fromisoformat(to_iso(int(t.min()) - NS_PER_DAY)[:10])
        d1 = _dt.date.fromisoformat(to_iso(int(t.max()) + NS_PER_DAY)[:10])
        with Archive(pair.archive_path) as arch:
            offsets = arch.load_offsets(pair.name, d0, d1, extras=False)
            done = arch.days_done(pair.name)
        config_changed = _archive_config_changed(pair, done, sorted(set(offsets.get("date", []))))
        if offsets.empty:
            raise NoDataError(f"{pair.archive_path}: no archived offsets of {pair.name} from {d0} to {d1}")
        if type_b is None:
            # the daily runs' folders (<output dir>/<pair>/<date>/summary.json): the largest
            # type-B value of the days spanned (conservative when a calibration changed)
            found = [_type_b_from_summary(pathlib.Path(pair.output_dir) / pair.name / str(d))
                     for d in sorted(set(offsets["date"]))] if "date" in offsets.columns else []
            found = [v for v in found if v is not None]
            if found:
                type_b = max(found)
    if type_b is None:
        log.warning("no type-B uncertainty given (--type-b-ns) or found (summary.json): "
                    "event uncertainties exclude calibration")
        type_b = 0.0
    max_gap = args.max_gap_s if args.max_gap_s is not None else pair.max_gap_s
    out = correct_events(ev, offsets, site=args.site.upper(), budget_type_b_ns=type_b, max_gap_s=max_gap,
                         system=args.system)
    notes = _series_warnings(pair, offsets, args, config_changed)
    out["warning"] = _event_warnings(out["event_time_utc_ns"].to_numpy(np.int64), notes)
    for n in notes:
        hit = int(np.count_nonzero(_concerned(out["event_time_utc_ns"].to_numpy(np.int64), n)
                                   & (out["status"] == "ok").to_numpy()))
        if hit:
            log.warning("%s (%d event(s) concerned)", n[2], hit)
    n_bad = int((out["status"] != "ok").sum())
    text = out.to_csv(index=False, lineterminator="\n")
    if args.out:
        p = pathlib.Path(args.out)
        tmp = p.with_name(p.name + ".part")
        tmp.write_text(text)
        tmp.replace(p)
        log.info("wrote %d events to %s (%d refused)", len(out), p, n_bad)
    else:
        print(text, end="")
    if n_bad:
        log.warning("%d of %d events refused (outside the series or in gaps); see the reason column",
                    n_bad, len(out))
    return 0
