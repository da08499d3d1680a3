"""``ctt check-config PAIR.toml [--date D [--to D2]]``: validate a pair file and everything it names.

Checks both station files and the pair file (every problem, one line each),
that the two stations are distinct and their coordinates sane, that the
input files resolve for the date(s) (default: the latest date for which both
stations' observation files exist, searched back 400 days from today), that a
delay set covers every instant of those dates and has the configured codes.
Prints ``ok`` lines for what passed and one line per problem; exit code 2 if
anything is wrong.
"""

from __future__ import annotations

import datetime as _dt
import os
import sys

from ..errors import EXIT_OK, EXIT_USAGE, ConfigError, MissingInputError, UsageError


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "check-config",
        help="validate a pair file, its station files and the inputs for a date",
        description="Validate a pair configuration: station files, coordinates, delay sets covering the "
        "dates, input files present inside the data root. One line per problem; exit 2 if any.",
    )
    p.add_argument("pair", help="pair TOML file")
    p.add_argument("--date", help="UTC date YYYY-MM-DD to check inputs for (default: latest available)")
    p.add_argument("--to", help="last date of a range starting at --date")
    p.set_defaults(func=run)


def _dates(args):
    if not args.date:
        if args.to:
            raise UsageError("--to needs --date")
        return None
    try:
        d0 = _dt.date.fromisoformat(args.date)
        d1 = _dt.date.fromisoformat(args.to) if args.to else d0
    except ValueError as exc:
        raise UsageError(f"expected dates as YYYY-MM-DD: {exc}") from None
    if d1 < d0:
        raise UsageError("--to is before --date")
    return [d0 + _dt.timedelta(days=k) for k in range((d1 - d0).days + 1)]


def latest_available(pair, today=None, days_back: int = 400):
    """Latest UTC date (not after today) with observation files of both stations, or None."""
    today = today or _dt.datetime.now(_dt.timezone.utc).date()
    for k in range(days_back + 1):
        d = today - _dt.timedelta(days=k)
        try:
            a, _ = pair.resolve_one("obs", d, "a")
            b, _ = pair.resolve_one("obs", d, "b")
        except ConfigError:
            continue
        if a is not None and b is not None:
            return d
    return None


def check(pair_path, dates=None, today=None) -> tuple[list[str], list[str]]:
    """Return (problems, ok_lines) for a pair file; never raises for a config problem."""
    from ..config import load_pair
    from ..timescales import NS_PER_DAY, date_to_ns

    problems: list[str] = []
    oks: list[str] = []
    try:
        pair = load_pair(pair_path)
    except ConfigError as exc:
        return [str(e) for e in getattr(exc, "problems", [exc])], oks
    a, b = pair.station_a, pair.station_b
    oks.append(f"ok: pair {pair.name}: A = {a.id} ({a.path}), B = {b.id} ({b.path}); config hash {pair.config_hash[:12]}")
    if dates is None:
        d = latest_available(pair, today)
        if d is None:
            problems.append(f"{pair.path}: [inputs.obs]: no date in the last 400 days has observation files "
                            f"of both stations under {pair.data_root}")
            dates = []
        else:
            dates = [d]
            oks.append(f"ok: latest date with both observation files: {d}")
    for d in dates:
        try:
            got = pair.resolve_inputs(d)
            found = ", ".join(f"{k}={v.name}" for k, v in got.items() if v is not None)
            oks.append(f"ok: {d}: inputs {found}")
        except (MissingInputError, ConfigError) as exc:
            problems.append(str(exc))
        t0 = date_to_ns(d)
        for st in (a, b):
            try:
                sets = st.delay_sets_between(t0, t0 + NS_PER_DAY)
            except ConfigError as exc:
                problems.append(f"{exc} (needed for {d})")
                continue
            for code in pair.processing.codes:
                for ds in sets:
                    if code not in ds.receiver_ns:
                        problems.append(f"{st.path}: [delays[{ds.index}].receiver_ns]: no delay for {code} "
                                        f"(listed in {pair.path} [processing.codes]), needed for {d}")
            for ch in st.changes_between(t0, t0 + NS_PER_DAY):
                oks.append(f"note: {st.id} {d}: hardware change logged: {ch.what}")
    out_parent = pair.archive_path.parent
    probe = out_parent
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    if not os.access(probe, os.W_OK):
        problems.append(f"{pair.path}: [output.archive]: expected a writable location, found {pair.archive_path} "
                        f"({probe} is not writable)")
    return problems, oks


def run(args) -> int:
    problems, oks = check(args.pair, _dates(args))
    for line in oks:
        print(line)
    for line in problems:
        print(f"problem: {line}")
    if problems:
        print(f"{len(problems)} problem(s) found", file=sys.stderr)
        return EXIT_USAGE
    return EXIT_OK
