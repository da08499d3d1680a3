"""``ctt export --config PAIR.toml --from D1 --to D2 --format csv|parquet|json [--out FILE]``.

Reads the archived offsets of the pair (the archive named in the pair file's
``[output]`` table) for the dates D1..D2 inclusive and writes them to FILE,
or to stdout when no file is given. Columns: time_utc, time_utc_ns, mjd_utc,
offset_ns, u_ns, n_sat, flag, system; the pair, the sign convention, units and
time scale go with the rows (CSV: ``#`` comment lines that ``pandas.read_csv(path,
comment="#")`` skips; JSON: ``{"metadata": ..., "rows": [...]}``; Parquet: schema
metadata ``ctt``), see :mod:`ctt.exports`. By default only the pair's main series is
written, the one ``offset.csv`` holds (the combined 'ALL' series when several
systems were processed, else the single system); ``--system all`` writes every
stored series. ``--daily`` writes the archived daily values instead: one row per
date, the day's ``daily_value`` object exactly as in its summary.json.
"""

from __future__ import annotations

import datetime as _dt
import logging

from ..errors import MissingInputError, NoDataError, UsageError

log = logging.getLogger("ctt.export")

#: the formats of ctt.exports.OUT_FORMATS, written out so that `ctt --help` needs no pandas
#: (tests/test_cli.py checks they agree)
FORMATS = ("csv", "parquet", "json")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "export",
        help="write archived offsets of a pair as CSV, Parquet or JSON",
        description="Write the archived offset series (clock A minus clock B) of a pair for a date range.",
    )
    p.add_argument("--config", required=True, help="pair TOML file (its [output] archive is read)")
    p.add_argument("--from", dest="date_from", required=True, help="first UTC date YYYY-MM-DD")
    p.add_argument("--to", dest="date_to", required=True, help="last UTC date YYYY-MM-DD (inclusive)")
    p.add_argument("--format", choices=FORMATS, default="csv", help="output format (default csv)")
    p.add_argument("--system", help="G, E, ALL ... or 'all' for every stored series "
                                    "(default: the main series, as in offset.csv)")
    p.add_argument("--daily", action="store_true",
                   help="write the archived daily values (one row per date: the daily_value of each day's "
                        "summary.json: epoch_utc, offset_ns, u_a_ns, u_b_ns, u_ns, definition) instead of the points")
    p.add_argument("--out", help="output file (default: stdout)")
    p.set_defaults(func=run)


def _date(text, what):
    try:
        return _dt.date.fromisoformat(text)
    except ValueError:
        raise UsageError(f"{what}: expected a date YYYY-MM-DD, found {text!r}") from None


def run(args) -> int:
    from ..archive import Archive
    from ..config import load_pair

    d0, d1 = _date(args.date_from, "--from"), _date(args.date_to, "--to")
    if d1 < d0:
        raise UsageError("--to is before --from")
    pair = load_pair(args.config)
    if not pair.archive_path.exists():
        raise MissingInputError(f"{pair.archive_path}: archive not found (configured in {pair.path} [output])")
    if args.daily:
        from ..exports import write_daily_values

        with Archive(pair.archive_path) as arch:
            dv = arch.load_daily_values(pair.name, d0, d1)
        if dv.empty:
            raise NoDataError(f"{pair.archive_path}: no archived daily values of {pair.name} from {d0} to {d1}")
        stations = next((s for s in dv["stations"] if s), f"{pair.station_a.id}-{pair.station_b.id}")
        write_daily_values(dv, args.out, args.format, stations=stations)
        return 0
    with Archive(pair.archive_path) as arch:
        system = None if (args.system or "").lower() == "all" else args.system
        df = arch.load_offsets(pair.name, d0, d1, system=system, extras=False)
    if args.system is None:
        from ..commonview import main_series

        df = main_series(df).reset_index(drop=True)  # each day's main series, as its offset.csv
    if df.empty:
        raise NoDataError(f"{pair.archive_path}: no archived offsets of {pair.name} from {d0} to {d1}"
                          + (f" for system {args.system}" if args.system else ""))
    from ..exports import offsets_metadata, write_offsets

    meta = offsets_metadata(pair.name, pair.station_a.id, pair.station_b.id, date_from=str(d0), date_to=str(d1),
                            system=args.system or "main series (as offset.csv)", archive=str(pair.archive_path))
    write_offsets(df, args.out, args.format, metadata=meta)
    if args.out:
        log.info("wrote %d rows to %s", len(df), args.out)
    return 0
