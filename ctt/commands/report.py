"""``ctt report DIR_OR_ARCHIVE [--from ..] [--to ..] --out report.html``: one self-contained HTML report.

DIR is a run folder written by ``ctt pair`` (offset.csv, satellites.csv,
summary.json) or a folder of such day folders (concatenated; ``--from``/``--to``
select the range). An archive (SQLite file written by :mod:`ctt.archive`) needs
``--pair`` only when it holds several pairs. Prints where it wrote. The report (inline CSS, figures as embedded PNG, no scripts, no
network) and ``report.json`` with the same numbers are written side by side.
"""

from __future__ import annotations

import pathlib

import json

from ..errors import NoDataError, UsageError
from .stability import load_change_log


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "report", help="self-contained HTML report (and report.json) of a run folder or archive",
        description="Write one self-contained HTML report (figures embedded, no scripts, no network) "
        "and a JSON file with the same numbers, for a run folder, a folder of day folders, or an archive.")
    p.add_argument("source", help="run folder, folder of day folders, or SQLite archive")
    p.add_argument("--from", dest="time_from", metavar="DATE", help="first date or date-time (UTC)")
    p.add_argument("--to", dest="time_to", metavar="DATE", help="last date (whole day) or date-time (UTC)")
    p.add_argument("--out", required=True, metavar="report.html")
    p.add_argument("--pair", help="pair name (archive input; needed only when the archive holds several pairs)")
    p.add_argument("--column", default="offset_ns")
    p.add_argument("--title")
    p.add_argument("--log-a", metavar="STATION.toml", help="station A file whose [[changes]] to match")
    p.add_argument("--log-b", metavar="STATION.toml", help="station B file whose [[changes]] to match")
    p.set_defaults(func=run)


def _is_sqlite(path: pathlib.Path) -> bool:
    try:
        with open(path, "rb") as fh:
            return fh.read(16) == b"SQLite format 3\x00"
    except OSError:
        return False


def _archive_provenance(runs, dates) -> dict:
    """Inputs (with hashes) and versions of the good runs behind the reported days."""
    inputs, versions = [], set()
    if len(runs):
        ok = runs[(runs["status"] == "ok") & runs["date"].isin(dates)]
        ok = ok.sort_values("run_id").groupby("date").tail(1)
        for _, r in ok.iterrows():
            versions.add(str(r.get("version")))
            try:
                ins = json.loads(r.get("inputs_json") or "{}")
            except json.JSONDecodeError:
                ins = {}
            for name, v in (ins.items() if isinstance(ins, dict) else []):
                v = v if isinstance(v, dict) else {"path": v}
                inputs.append({"name": f"{r['date']} {name}", "path": v.get("path"), "sha256": v.get("sha256")})
    return {"inputs": inputs, "version": ", ".join(sorted(versions)) or None, "days": len(dates)}


def run(args) -> int:
    from ..report import build_report, day_range_ns, read_run_dir

    src = pathlib.Path(args.source)
    try:
        lo, hi = day_range_ns(args.time_from, args.time_to)
    except ValueError as exc:
        raise UsageError(f"--from/--to: {exc}") from None
    log = load_change_log(args.log_a, args.log_b)
    if src.is_file() and _is_sqlite(src):
        from ..archive import Archive
        with Archive(src) as ar:
            if not args.pair:
                pairs = ar.pairs()
                if len(pairs) != 1:
                    raise UsageError(f"{src}: the archive holds {len(pairs)} pairs"
                                     + (f" ({', '.join(pairs)}); choose one with --pair" if pairs else ""))
                args.pair = pairs[0]
            off = ar.load_offsets(args.pair, args.time_from[:10] if args.time_from else None,
                                  args.time_to[:10] if args.time_to else None)
            if len(off) == 0:
                raise NoDataError(f"{src}: no offsets stored for pair {args.pair!r} in the range")
            summary = _archive_provenance(ar.runs(args.pair), set(off["date"]))
        build_report(off, None, summary, log, args.out, lo, hi, args.title or f"Pair {args.pair}",
                     args.column, str(src))
        _wrote(args.out)
        return 0
    if src.is_file():
        raise UsageError(f"{src}: expected a run folder, a folder of day folders, or a SQLite archive")
    run_data = read_run_dir(src)
    off = run_data.offsets
    build_report(off, run_data.satellites, run_data.summary, log, args.out, lo, hi, args.title,
                 args.column, str(src))
    _wrote(args.out)
    return 0


def _wrote(out) -> None:
    out = pathlib.Path(out)
    print(f"wrote {out} and {out.with_suffix('.json')}")
