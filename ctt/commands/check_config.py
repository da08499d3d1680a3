"""``ctt check-config PAIR.toml [--date D [--to D2]]``: validate a pair file and everything it names.

Checks both station files and the pair file (every problem, one line each),
that the two stations are distinct and their coordinates sane, that the
input files resolve for the date(s) (default: the latest date for which both
stations' observation files exist: searched back 400 days from today, then
among the file names under the data root that the obs patterns match), that a
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
    """Latest UTC date (not after today) with observation files of both stations, or None.

    The last ``days_back`` days are tried first (the operational case); failing that, the
    dates are read from the file names under the data root that station A's obs patterns
    match (an archive of old data, or the shipped demo), newest first."""
    today = today or _dt.datetime.now(_dt.timezone.utc).date()

    def both(d):
        try:
            a, _ = pair.resolve_one("obs", d, "a")
            b, _ = pair.resolve_one("obs", d, "b")
        except ConfigError:
            return False
        return a is not None and b is not None

    for k in range(days_back + 1):
        d = today - _dt.timedelta(days=k)
        if both(d):
            return d
    for d in sorted(dates_in_data_root(pair), reverse=True):
        if d <= today and both(d):
            return d
    return None


_FIELD_RE = {"yyyy": r"\d{4}", "yy": r"\d{2}", "mm": r"\d{2}", "dd": r"\d{2}", "doy": r"\d{3}", "ddd": r"\d{3}",
             "gpsweek": r"\d{3,4}", "gpsdow": r"\d"}


def _pattern_regex(pattern: str, station_id: str):
    """A file-name pattern of the pair file as a regex with named groups for the date fields."""
    import re
    import string

    from ..config import pattern_fields

    fixed = pattern_fields(station_id, "2000-01-01")  # the station fields do not depend on the date
    out, seen = [], set()
    for literal, name, spec, _conv in string.Formatter().parse(pattern):
        out.append(re.escape(literal).replace(r"\*", "[^/]*").replace(r"\?", "[^/]"))
        if name is None:
            continue
        base = name.split(".")[0].split("[")[0]
        if base in _FIELD_RE:
            if base in seen:
                out.append(f"(?P={base})")
            else:
                seen.add(base)
                rx = _FIELD_RE[base] if (spec or base not in ("doy", "mm", "dd")) else r"\d{1,3}"
                out.append(f"(?P<{base}>{rx})")
        else:
            out.append(re.escape(format(fixed[base], spec or "")))
    return re.compile("".join(out))


def dates_in_data_root(pair, max_files: int = 200_000) -> set:
    """UTC dates that file names under the data root give through station A's obs patterns."""
    from ..timescales import NS_PER_DAY as _DAY
    from ..timescales import to_iso

    rxs = [_pattern_regex(p, pair.station_a.id) for p in pair.patterns_for("obs", "a")]
    root = pair.data_root
    found, n = set(), 0
    for dirpath, _dirs, files in os.walk(root):
        for f in files:
            n += 1
            if n > max_files:
                return found
            rel = os.path.relpath(os.path.join(dirpath, f), root).replace(os.sep, "/")
            for rx in rxs:
                m = rx.fullmatch(rel)
                if m is None:
                    continue
                g = m.groupdict()
                try:
                    if "gpsweek" in g and "gpsdow" in g:
                        ns = (int(g["gpsweek"]) * 7 + int(g["gpsdow"])) * _DAY
                        found.add(_dt.date.fromisoformat(to_iso(ns)[:10]))
                        break
                    year = int(g["yyyy"]) if "yyyy" in g else (2000 + int(g["yy"]) if int(g["yy"]) < 80
                                                               else 1900 + int(g["yy"]))
                    if "doy" in g or "ddd" in g:
                        found.add(_dt.date(year, 1, 1) + _dt.timedelta(days=int(g.get("doy") or g["ddd"]) - 1))
                    else:
                        found.add(_dt.date(year, int(g["mm"]), int(g["dd"])))
                    break
                except (KeyError, ValueError):
                    continue
    return found


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
            problems.append(f"{pair.path}: [inputs.obs]: no date has observation files of both stations "
                            f"under {pair.data_root} (the last 400 days tried, and the file names there)")
            dates = []
        else:
            dates = [d]
            oks.append(f"ok: latest date with both observation files: {d}")
    for d in dates:
        try:
            got = pair.resolve_inputs(d)
            # several files of one kind (sp3/clk/erp with neighbouring days) are joined with '+'
            found = ", ".join(f"{k}=" + "+".join(p.name for p in (v if isinstance(v, tuple) else (v,)))
                              for k, v in got.items() if v is not None)
            oks.append(f"ok: {d}: inputs {found}")
            problems += _headers_match(got, a, b, oks, d)
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


def _headers_match(got, a, b, oks, d) -> list[str]:
    """The observation files' MARKER NAME and APPROX POSITION against the station files."""
    from ..config import check_station_data
    from ..errors import CttError
    from ..formats.rinex_obs import read_obs_header

    out = []
    for key, st in (("obs_a", a), ("obs_b", b)):
        path = got.get(key)
        if path is None:
            continue
        try:
            h = read_obs_header(path)
        except CttError as exc:  # processing will say it; here it only keeps the names unchecked
            oks.append(f"note: {d}: {path.name}: header not readable, marker name not checked ({exc})")
            continue
        try:
            for w in check_station_data(st, path, h.marker_name, h.approx_position_m):
                oks.append(f"note: {d}: {w}")
            oks.append(f"ok: {d}: {path.name} belongs to {st.id} (marker name {h.marker_name.strip()!r})")
        except UsageError as exc:
            out.append(str(exc))
    return out


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
