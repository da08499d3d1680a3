"""``ctt measure``: one station's per-satellite clock table with every correction itemised."""

from __future__ import annotations

import logging
import pathlib

from ..errors import UsageError
from ._common import add_model_arguments, add_product_arguments, measure_options

log = logging.getLogger("ctt")


def register(sub) -> None:
    p = sub.add_parser("measure", help="per-satellite local clock minus GNSS time for one station-day",
                       description="Compute, for each epoch and satellite, the station's local reference clock "
                                   "minus the GNSS system time, with every correction as its own column.")
    p.add_argument("obs", help="RINEX observation file (any compression)")
    add_product_arguments(p)
    p.add_argument("--met", help="RINEX meteorological file of the station")
    p.add_argument("--station", required=True, help="station TOML file")
    p.add_argument("--out", help="write the table to FILE.csv or FILE.parquet")
    add_model_arguments(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from ..config import load_station
    from ..pipeline import PairInputs, load_orbits, measure_file

    if not args.nav and not args.sp3:
        raise UsageError("give --nav (broadcast) or --sp3 (precise orbits)")
    opts = measure_options(args)
    station = load_station(args.station)
    inputs = PairInputs(obs_a=args.obs, obs_b=args.obs, nav=args.nav, sp3=args.sp3, clk=args.clk,
                        ionex=args.ionex, met_a=args.met, antex=args.antex)
    galileo_source = "fnav" if "E" in opts.systems and opts.signals == "iono-free" else "inav"
    orbits, nav_header, reference, _ = load_orbits(inputs, "auto", galileo_source)
    ionex = None
    if args.ionex:
        from ..atmosphere import read_ionex

        ionex = read_ionex(args.ionex)
    day = measure_file(args.obs, station, orbits, nav_header, opts, met_path=args.met, ionex=ionex,
                       reference=reference)
    if args.out:
        out = pathlib.Path(args.out)
        out.parent.mkdir(parents=True, exist_ok=True)
        if out.suffix == ".parquet":
            day.table.to_parquet(out, index=False)
        else:
            day.table.to_csv(out, index=False, float_format="%.4f")
        log.info("wrote %s (%d rows)", out, len(day.table))
    print("\n".join(day.summary_lines()))
    return 0
