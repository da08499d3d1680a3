"""``ctt measure``: one station's per-satellite clock table with every correction itemised."""

from __future__ import annotations

import logging
import pathlib

from ._common import add_model_arguments, add_station_day_arguments, measure_station_day

log = logging.getLogger("ctt")


def register(sub) -> None:
    p = sub.add_parser("measure", help="per-satellite local clock minus GNSS time for one station-day",
                       description="Compute, for each epoch and satellite, the station's local reference clock "
                                   "minus the GNSS system time, with every correction as its own column.")
    add_station_day_arguments(p)
    p.add_argument("--out", help="write the table to FILE.csv or FILE.parquet")
    add_model_arguments(p)
    p.set_defaults(func=run)


def run(args) -> int:
    _, day, _ = measure_station_day(args)
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
