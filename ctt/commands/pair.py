"""``ctt pair``: clock A minus clock B for one day, from the two stations' files or a pair file."""

from __future__ import annotations

import dataclasses
import logging
import pathlib

from ..errors import UsageError
from ._common import (add_model_arguments, add_product_arguments, check_input_files, check_options, checked,
                      date_arg, measure_options, out_dir, warn_unused_codes)

log = logging.getLogger("ctt")


def register(sub) -> None:
    p = sub.add_parser("pair", help="clock A minus clock B for one day (common view or all-in-view)",
                       description="Process one day of a station pair: per-satellite clocks at both "
                                   "stations, common-view (or all-in-view) differences, the offset series "
                                   "clock A - clock B with uncertainties and its budget. Writes offset.csv, "
                                   "satellites.csv and summary.json into --out.")
    src = p.add_argument_group("inputs (files)")
    src.add_argument("--obs-a", help="observation file of station A")
    src.add_argument("--obs-b", help="observation file of station B")
    src.add_argument("--tracks-a", help="a partner's CGGTTS 2E track file in place of --obs-a (tracks mode)")
    src.add_argument("--tracks-b", help="a partner's CGGTTS 2E track file in place of --obs-b (tracks mode)")
    add_product_arguments(src)
    src.add_argument("--met-a", help="meteorological file of station A")
    src.add_argument("--met-b", help="meteorological file of station B")
    src.add_argument("--erp", action="append", default=[], metavar="FILE",
                     help="IGS ERP file for the solid Earth pole tide of --mode ppp (repeatable, merged; "
                          "its epochs must cover the day); the code modes ignore it with a warning")
    src.add_argument("--station-a", help="station TOML file of A")
    src.add_argument("--station-b", help="station TOML file of B")
    cfg = p.add_argument_group("inputs (pair file)")
    cfg.add_argument("--config", help="pair TOML file (instead of the file arguments)")
    cfg.add_argument("--date", type=date_arg, help="UTC date YYYY-MM-DD to process with --config")
    proc = p.add_argument_group("processing")
    proc.add_argument("--mode", choices=("tracks", "epochs", "all-in-view", "ppp"), default=None,
                      help="standard 13-minute tracks (default), every epoch/bin, all-in-view "
                           "(needs precise clocks), or ppp: carrier-phase PPP clocks of both stations "
                           "differenced (needs --sp3, and --clk where the product has it; any baseline)")
    proc.add_argument("--bin", type=float, default=None, metavar="SECONDS",
                      help="epoch/all-in-view bin length (default: every epoch)")
    proc.add_argument("--orbits", choices=("auto", "broadcast", "precise"), default=None,
                      help="auto: precise when --sp3 is given")
    proc.add_argument("--weights", choices=("sin2el", "equal", "sigma"), default=None,
                      help="weights of the satellite differences (default: the pair file's, else sin2el)")
    proc.add_argument("--mad-k", type=float, default=None, help="outlier rejection at k x MAD (default 3.5)")
    proc.add_argument("--min-common", type=int, default=None,
                      help="fewest common satellites for a point to be flagged ok (default 2)")
    proc.add_argument("--isb-a", action="append", default=[], metavar="SYS=NS",
                      help="configured inter-system bias of station A, e.g. E=12.5 (Galileo minus GPS, ns); "
                           "repeatable; systems not given are estimated from the day")
    proc.add_argument("--isb-b", action="append", default=[], metavar="SYS=NS", help="the same for station B")
    proc.add_argument("--glonass-ifb", choices=("estimate", "none"), default=None,
                      help="GLONASS per-channel code biases: fit one per channel and remove it (estimate, the "
                           "default) or leave the values as measured (none)")
    add_model_arguments(p)
    p.add_argument("--force-inputs", action="store_true",
                   help="process files whose marker name or position does not match their station file (a warning instead of exit 2)")
    p.add_argument("--out", type=out_dir, required=True, help="output folder")
    p.set_defaults(func=run)


def options_from_args(args, base=None):
    from ..pipeline import PairOptions

    base = base or PairOptions()
    kw = {"measure": measure_options(args, base.measure)}
    if args.mode:
        kw["mode"] = args.mode
    if args.bin is not None:
        kw["bin_s"] = checked("--bin", args.bin)
    if args.orbits:
        kw["orbits"] = args.orbits
    if args.weights:
        kw["weights"] = args.weights
    if args.mad_k is not None:
        kw["mad_k"] = checked("--mad-k", args.mad_k)
    if args.min_common is not None:
        kw["min_common"] = checked("--min-common", args.min_common)
    isb = {}
    for who, items in (("A", args.isb_a), ("B", args.isb_b)):
        for item in items:
            sys_letter, _, value = item.partition("=")
            try:
                isb.setdefault(who, {})[sys_letter.strip().upper()] = float(value)
            except ValueError:
                raise UsageError(f"--isb-{who.lower()} {item!r}: expected SYS=NS, e.g. E=12.5") from None
    if isb:
        kw["isb_ns"] = isb
    if getattr(args, "glonass_ifb", None):
        kw["glonass_ifb"] = args.glonass_ifb
    return dataclasses.replace(base, **kw)


def run(args) -> int:
    from ..config import load_pair, load_station

    # option values and input files first: a mistake is reported before the processing modules load
    check_options(args)
    check_input_files(args, ("obs_a", "obs_b", "tracks_a", "tracks_b", "nav", "sp3", "clk", "ionex", "antex",
                             "met_a", "met_b", "bias", "erp"))
    if args.config:
        if not args.date:
            raise UsageError("--config needs --date YYYY-MM-DD")
        given = [n for n in ("obs_a", "obs_b", "tracks_a", "tracks_b", "nav", "sp3", "clk", "ionex", "antex",
                             "met_a", "met_b", "erp", "station_a", "station_b") if getattr(args, n)]
        if given:
            raise UsageError("with --config the files come from the pair file; drop "
                             + ", ".join("--" + g.replace("_", "-") for g in given))
        pc = load_pair(args.config)
        if args.mode in ("all-in-view", "ppp") and not pc.patterns.get("sp3"):
            raise UsageError(f"--mode {args.mode} needs precise orbits and clocks: {args.config} has no "
                             "[inputs] sp3 pattern for them")
        from ..pipeline import pair_day_from_config

        inputs, sta, stb, base = pair_day_from_config(pc, args.date)
        options = options_from_args(args, base)
    else:
        missing = [n for n in ("station_a", "station_b") if not getattr(args, n)]
        missing += [f"obs_{w} (or --tracks-{w})" for w in "ab"
                    if not getattr(args, f"obs_{w}") and not getattr(args, f"tracks_{w}")]
        if missing:
            raise UsageError("give " + ", ".join("--" + m.replace("_", "-") for m in missing)
                             + " (or --config PAIR.toml --date YYYY-MM-DD)")
        if not args.nav and not args.sp3 and not (args.tracks_a and args.tracks_b):
            raise UsageError("give --nav (broadcast) and/or --sp3 (precise orbits)")
        if args.mode == "all-in-view" and not args.sp3:
            raise UsageError("--mode all-in-view needs precise orbits and clocks: give --sp3 (and --clk)")
        from ..pipeline import PairInputs

        inputs = PairInputs(obs_a=args.obs_a, obs_b=args.obs_b, nav=args.nav, sp3=args.sp3, clk=args.clk,
                            ionex=args.ionex, met_a=args.met_a, met_b=args.met_b, antex=args.antex,
                            tracks_a=args.tracks_a, tracks_b=args.tracks_b, erp=args.erp)
        sta, stb = load_station(args.station_a), load_station(args.station_b)
        options = options_from_args(args)
    from ..pipeline import run_pair, write_pair_outputs

    result = run_pair(inputs, sta, stb, options, force_inputs=args.force_inputs)
    for day in (result.station_a, result.station_b):
        warn_unused_codes(day, args.codes)
    if args.config:
        from ..pipeline import add_day_boundary

        add_day_boundary(result, pc, args.date)
    paths = write_pair_outputs(result, pathlib.Path(args.out))
    print("\n".join(result.summary_lines()))
    print("wrote " + ", ".join(str(p) for p in paths.values()))
    return 0
