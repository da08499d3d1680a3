"""``ctt info FILE [--json]``: what a RINEX observation file holds.

Station, receiver, antenna, approximate position, span, interval, epochs,
systems and satellites, observation types per system with the number of
values of each, gaps (missing epochs against the interval) and epoch-flag
events. ``--json`` prints the same as one JSON object for scripts.
"""

from __future__ import annotations

import json
import math


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "info",
        help="summarise a RINEX observation file",
        description="Summarise a RINEX 2/3/4 observation file (any compression): station, "
        "receiver, antenna, span, interval, satellites, observation types and counts, gaps, events.",
    )
    p.add_argument("file", help="RINEX observation file (.rnx/.??o/.crx/.??d, optionally .gz/.Z/.bz2/.zip)")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    p.add_argument("--skip-bad", action="store_true",
                   help="skip malformed epochs (listed under 'dropped') instead of stopping")
    p.set_defaults(func=run)


def _fmt_pos(pos) -> str:
    if not pos or any(not math.isfinite(v) for v in pos):
        return "(not given)"
    return "  ".join(f"{v:.4f}" for v in pos) + " m (ECEF X Y Z)"


def format_summary(s: dict) -> str:
    """Readable text of :meth:`ObsData.summary`."""
    from ..formats.rinex_obs import SYSTEM_NAMES

    out = []
    add = out.append
    add(f"file           {s['path']}")
    add(f"format         RINEX {s['version']:.2f} observation, "
        f"{SYSTEM_NAMES.get(s['file_system'], s['file_system'])} file")
    station = s["marker_name"] or "(no marker name)"
    if s["marker_number"]:
        station += f"  (marker number {s['marker_number']})"
    add(f"station        {station}")
    r = s["receiver"]
    add(f"receiver       {r['type'] or '?'}  serial {r['serial'] or '?'}  firmware {r['version'] or '?'}")
    a = s["antenna"]
    dh = a["delta_hen_m"]
    add(f"antenna        {a['type'] or '?'}  serial {a['serial'] or '?'}  "
        f"offset H/E/N {dh[0]:.4f} {dh[1]:.4f} {dh[2]:.4f} m")
    add(f"position       {_fmt_pos(s['approx_position_m'])}")
    add(f"time system    {s['time_system']}")
    add(f"span           {s['first_epoch'] or '-'}  to  {s['last_epoch'] or '-'}  ({s['time_system']} time)")
    iv = s["interval_s"]
    add(f"interval       {iv:g} s" if math.isfinite(iv) else "interval       (unknown)")
    add(f"epochs         {s['n_epochs']}")
    g = s["gaps"]
    if g["missing_epochs"]:
        add(f"gaps           {g['missing_epochs']} missing epochs in {g['n_gaps']} gap(s); "
            f"longest {g['longest_gap_s']:g} s after {g['longest_gap_after']}")
    else:
        add("gaps           none")
    names = ", ".join(f"{SYSTEM_NAMES.get(x, x)} ({x})" for x in s["systems"]) or "(none)"
    add(f"systems        {names}")
    add(f"satellites     {s['n_satellites']}: {' '.join(s['satellites'])}")
    add("observation types (values per type):")
    for sys_, codes in s["obs_types"].items():
        counts = s["counts_per_system"].get(sys_, {})
        add(f"  {sys_}  {len(codes)} types: " + "  ".join(f"{c} {counts.get(c, 0)}" for c in codes))
    if s["obs_types_v2"]:
        add(f"  (RINEX 2 codes in the file: {' '.join(s['obs_types_v2'])})")
    if s["clock_offsets"]:
        add(f"clock offsets  given at {s['clock_offsets']} epochs")
    if s["epoch_flags"]:
        add("epoch flags    " + ", ".join(f"flag {k}: {v}" for k, v in sorted(s["epoch_flags"].items())))
        for e in s["events"][:20]:
            add(f"  line {e['line']}: flag {e['flag']} at {e['time'] or '(no time)'}, "
                f"{e['n_records']} record(s)")
        if len(s["events"]) > 20:
            add(f"  ... {len(s['events']) - 20} more")
    else:
        add("epoch flags    all 0 (no events)")
    if s["dropped"]:
        add(f"dropped        {len(s['dropped'])} bad epoch(s); first: line {s['dropped'][0][0]}")
    return "\n".join(out)


def run(args) -> int:
    from ..formats.rinex_obs import read_obs

    data = read_obs(args.file, on_error="skip" if args.skip_bad else "raise")
    s = data.summary()
    if args.json:
        print(json.dumps(_no_nan(s), indent=2, allow_nan=False, default=_json_default))
    else:
        print(format_summary(s))
    return 0


def _no_nan(v):
    """NaN (absent position, unknown interval) as JSON null."""
    if isinstance(v, float) and not math.isfinite(v):
        return None
    if isinstance(v, dict):
        return {k: _no_nan(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_no_nan(x) for x in v]
    return v


def _json_default(v):
    try:
        return v.item()
    except AttributeError:
        return str(v)
