"""Argument groups shared by the processing sub-commands (measure, pair), and argument types.

Only the standard library at module level: ``ctt --help`` must not import numpy.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import os

SWITCHES = ("troposphere", "ionosphere", "tide", "sagnac", "relativity")


def date_arg(text: str) -> str:
    """argparse type of a UTC date: 'YYYY-MM-DD' that exists on the calendar (exit 2 otherwise)."""
    try:
        if len(text) != 10:
            raise ValueError("not in the form YYYY-MM-DD")
        return _dt.date.fromisoformat(text).isoformat()
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected a UTC date YYYY-MM-DD, found {text!r} ({exc})") from None


def add_product_arguments(g) -> None:
    """Orbit, clock and ionosphere product files (shared by measure and pair)."""
    g.add_argument("--nav", help="broadcast navigation file")
    g.add_argument("--sp3", action="append", metavar="SP3",
                   help="precise orbits (SP3); with it the precise product is the clock reference; repeat "
                        "for the neighbouring days' files (merged, so interpolation is valid across midnight)")
    g.add_argument("--clk", action="append", metavar="CLK",
                   help="precise satellite clocks (RINEX clock); repeatable like --sp3")
    g.add_argument("--antex", help="ANTEX file for the satellite antenna offsets of SP3 orbits")
    g.add_argument("--ionex", help="IONEX ionosphere maps")


def add_model_arguments(p) -> None:
    g = p.add_argument_group("models")
    g.add_argument("--signals", choices=("iono-free", "single"), default=None,
                   help="iono-free code combination (default) or a single code with an ionosphere model")
    g.add_argument("--systems", default=None, help="satellite systems, e.g. G or GE (default G)")
    g.add_argument("--codes", default=None,
                   help="explicit codes instead of the priority lists, e.g. C1W,C2W")
    g.add_argument("--elevation-mask", type=float, default=None, metavar="DEG",
                   help="elevation mask in degrees (default: the station file's)")
    g.add_argument("--smoothing", type=float, default=None, metavar="SECONDS",
                   help="carrier-phase smoothing window of the code (Hatch filter), e.g. 600; 0 = off")
    g.add_argument("--bias", metavar="FILE|estimate",
                   help="code-bias file, Bias-SINEX or a classic monthly DCB file (P1-C1, P1-P2): maps the "
                        "codes used (e.g. C1C) onto the codes the GPS clocks refer to (C1W/C2W); or 'estimate': "
                        "fit each satellite's constant code bias on the day's own residuals (zero mean over the "
                        "satellites; reported with its uncertainty)")
    g.add_argument("--iono-model", choices=("klobuchar", "ionex"), default=None,
                   help="ionosphere for single-frequency processing (default klobuchar; ionex needs --ionex)")
    for name in SWITCHES:
        what = {"relativity": "relativity corrections (satellite clock term and Shapiro delay)"}.get(
            name, f"{name} correction")
        g.add_argument(f"--no-{name}", action="store_true", help=f"switch the {what} off (diagnostics)")


def seconds_arg(text: str) -> float:
    """argparse type of a duration in seconds: a finite number >= 0 (exit 2 otherwise)."""
    try:
        value = float(text)
    except ValueError:
        value = float("nan")
    if not value >= 0.0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"expected a number of seconds >= 0, found {text!r}")
    return value


def _existing_ancestor_problem(path: str) -> str | None:
    """The nearest existing ancestor of ``path`` must be a folder (``file.csv/x.csv`` is refused)."""
    parent = os.path.dirname(os.path.abspath(path))
    while parent and not os.path.exists(parent):
        up = os.path.dirname(parent)
        if up == parent:
            break
        parent = up
    if os.path.exists(parent) and not os.path.isdir(parent):
        return f"{parent} is a file, expected a folder"
    return None


def out_file(text: str) -> str:
    """argparse type of an output file: not a folder, and not below a file (exit 2 otherwise)."""
    if not text:
        raise argparse.ArgumentTypeError("expected a file name, found an empty string")
    if os.path.isdir(text):
        raise argparse.ArgumentTypeError(f"{text!r} is a folder, expected a file name")
    problem = _existing_ancestor_problem(text)
    if problem:
        raise argparse.ArgumentTypeError(f"{text!r}: {problem}")
    return text


def out_dir(text: str) -> str:
    """argparse type of an output folder: not an existing file, not below a file (exit 2 otherwise)."""
    if not text:
        raise argparse.ArgumentTypeError("expected a folder, found an empty string")
    if os.path.exists(text) and not os.path.isdir(text):
        raise argparse.ArgumentTypeError(f"{text!r} is a file, expected a folder")
    problem = _existing_ancestor_problem(text)
    if problem:
        raise argparse.ArgumentTypeError(f"{text!r}: {problem}")
    return text


#: command-line option -> the [processing] field whose validation it shares (ctt.config)
OPTION_FIELDS = {"--systems": "systems", "--codes": "codes", "--elevation-mask": "elevation_mask_deg",
                 "--smoothing": "smoothing_s", "--bin": "bin_s", "--mad-k": "mad_k",
                 "--min-common": "min_common_sats"}


def checked(option: str, value):
    """An option's value through the pair file's validation of the same field (UsageError if bad)."""
    from ..config import check_processing_value
    from ..errors import UsageError

    try:
        return check_processing_value(OPTION_FIELDS[option], value)
    except ValueError as exc:
        raise UsageError(f"{option}: {exc}") from None


def check_options(args) -> None:
    """Every shared processing option given, through its field's validation (UsageError if bad)."""
    for option in OPTION_FIELDS:
        value = getattr(args, option[2:].replace("-", "_"), None)
        if value is None:
            continue
        if option == "--systems":
            value = tuple(value.replace(",", "").replace(" ", "").upper())
        elif option == "--codes":
            value = tuple(c.strip() for c in value.split(",") if c.strip())
        checked(option, value)


def measure_options(args, base=None):
    """MeasureOptions from parsed arguments over ``base`` (e.g. a pair file's processing)."""
    from ..measure import MeasureOptions

    base = base or MeasureOptions()
    kw = {}
    if args.signals:
        kw["signals"] = args.signals
    if args.systems:
        kw["systems"] = checked("--systems", tuple(args.systems.replace(",", "").replace(" ", "").upper()))
    if args.codes is not None:
        kw["codes"] = checked("--codes", tuple(c.strip() for c in args.codes.split(",") if c.strip()))
    if args.elevation_mask is not None:
        kw["elevation_mask_deg"] = checked("--elevation-mask", args.elevation_mask)
    if args.smoothing is not None:
        kw["smoothing_s"] = checked("--smoothing", args.smoothing)
    if args.iono_model:
        kw["iono_model"] = args.iono_model
    if getattr(args, "bias", None) == "estimate":
        kw["biases"] = "estimate"
    elif getattr(args, "bias", None):
        from ..formats.bias_sinex import read_code_biases

        kw["biases"] = read_code_biases(args.bias)
    for name in SWITCHES:
        if getattr(args, f"no_{name}"):
            kw[name] = False
    if not kw:
        return base
    import dataclasses

    return dataclasses.replace(base, **kw)


def add_station_day_arguments(p) -> None:
    """One station-day's inputs: the observation file, the station file, met and products."""
    p.add_argument("obs", help="RINEX observation file (any compression)")
    p.add_argument("--station", required=True, help="station TOML file")
    p.add_argument("--met", help="RINEX meteorological file of the station")
    p.add_argument("--force-inputs", action="store_true",
                   help="process files whose marker name or position does not match their station file (a warning instead of exit 2)")
    add_product_arguments(p)


def warn_unused_codes(day, codes: str | None) -> None:
    """Warn when codes asked for with --codes were not used (absent from the file): the priority
    lists then chose others, and the user must not believe their choice was applied."""
    if not codes or day is None:
        return
    import logging

    wanted = {c.strip() for c in codes.split(",") if c.strip()}
    used = {c for label in (day.info.get("codes") or {}).values() for c in str(label).split("+") if c}
    missing = sorted(wanted - used)
    if missing:
        logging.getLogger("ctt").warning(
            "station %s: --codes %s not used (not in the observation file); used %s", day.station_id,
            ",".join(missing), ",".join(sorted(used)) or "none")


def check_input_files(args, names) -> None:
    """Every input file given on the command line exists and is a regular file, before any work
    (absent: exit 3; a folder or a device: exit 2; ctt.errors.require_file)."""
    from ..errors import require_file

    for name in names:
        value = getattr(args, name, None)
        for item in ([value] if isinstance(value, str) else (value or [])):
            require_file(item, f"--{name.replace('_', '-')}" if name != "obs" else "observation file")


def measure_station_day(args):
    """Run the measurement model for ``add_station_day_arguments``; returns (station, StationDay, options)."""
    from ..config import load_station
    from ..errors import UsageError

    if not args.nav and not args.sp3:
        raise UsageError("give --nav (broadcast) or --sp3 (precise orbits)")
    opts = measure_options(args)
    # '--bias estimate' is a word, not a file
    check_input_files(args, ("obs", "nav", "sp3", "clk", "antex", "ionex", "met")
                      + (() if getattr(args, "bias", None) == "estimate" else ("bias",)))
    station = load_station(args.station)
    from ..pipeline import PairInputs, load_orbits, measure_file

    inputs = PairInputs(obs_a=args.obs, obs_b=None, nav=args.nav, sp3=args.sp3, clk=args.clk,
                        ionex=args.ionex, met_a=args.met, antex=args.antex)
    orbits, nav_header, reference, nav = load_orbits(inputs, "auto")
    ionex = None
    if args.ionex:
        from ..formats.ionex import read_ionex

        ionex = read_ionex(args.ionex)
    day = measure_file(args.obs, station, orbits, nav_header, opts, met_path=args.met, ionex=ionex,
                       reference=reference, force_inputs=getattr(args, "force_inputs", False), nav=nav)
    warn_unused_codes(day, args.codes)
    return station, day, opts
