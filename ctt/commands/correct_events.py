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
    p.add_argument("--site", choices=("A", "B", "a", "b"), default="B", help="clock that stamped the events")
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
    if args.from_dir:
        run_dir = pathlib.Path(args.from_dir)
        by_sys = run_dir / "offset_by_system.csv"
        # offset.csv holds the main series only; another system's is in offset_by_system.csv
        offsets = read_offsets_csv(by_sys if args.system and by_sys.is_file() else run_dir / "offset.csv")
        if type_b is None:
            type_b = _type_b_from_summary(run_dir)
    else:
        if not pair.archive_path.exists():
            raise MissingInputError(f"{pair.archive_path}: archive not found (configured in {pair.path})")
        t = ev["event_time_utc_ns"].to_numpy(np.int64)
        d0 = _dt.date.fromisoformat(to_iso(int(t.min()) - NS_PER_DAY)[:10])
        d1 = _dt.date.fromisoformat(to_iso(int(t.max()) + NS_PER_DAY)[:10])
        with Archive(pair.archive_path) as arch:
            offsets = arch.load_offsets(pair.name, d0, d1, extras=False)
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
