"""``ctt measure``: one station's per-satellite clock table with every correction itemised."""

from __future__ import annotations

import logging
import pathlib

from ._common import add_model_arguments, add_station_day_arguments, measure_station_day, out_file

log = logging.getLogger("ctt")


def register(sub) -> None:
    p = sub.add_parser("measure", help="per-satellite local clock minus GNSS time for one station-day",
                       description="Compute, for each epoch and satellite, the station's local reference clock "
                                   "minus the GNSS system time, with every correction as its own column.")
    add_station_day_arguments(p)
    p.add_argument("--out", type=out_file, help="write the table to FILE.csv or FILE.parquet")
    add_model_arguments(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from ..errors import NoDataError

    _, day, _ = measure_station_day(args)
    if args.out:
        out = pathlib.Path(args.out)
        out.parent.mkdir(parents=True, exist_ok=True)
        from ..pipeline import with_named_times

        table = with_named_times(day.table)  # the instant as time_gps_ns (ns since 1980-01-06, GPS time)
        if out.suffix == ".parquet":
            table.to_parquet(out, index=False)
        else:
            table.to_csv(out, index=False, float_format="%.4f")
        log.info("wrote %s (%d rows)", out, len(day.table))
    print("\n".join(day.summary_lines()))
    n_ok = int((day.table["flag"] == "ok").sum()) if len(day.table) else 0
    if n_ok == 0:
        # the table (if asked) and the rejection counts above say why; the exit code says it to cron
        raise NoDataError(f"{args.obs}: no usable data: 0 of {len(day.table)} values used with "
                          f"{args.nav or args.sp3} (is it the same day?)")
    return 0
