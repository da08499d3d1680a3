"""``ctt tracks``: one station's standard 13-minute tracks in the open CV exchange format (CGGTTS 2E)."""

from __future__ import annotations

import logging
import pathlib

from ._common import add_model_arguments, add_station_day_arguments, measure_station_day, out_file

log = logging.getLogger("ctt")


def register(sub) -> None:
    p = sub.add_parser("tracks", help="a station's standard tracks as a CGGTTS 2E file (exchange with partners)",
                       description="Measure one station-day and write its per-track results in the time "
                                   "community's open common-view exchange format (CGGTTS version 2E), so it "
                                   "can be differenced with a partner's published track files "
                                   "(ctt pair --tracks-b FILE).")
    add_station_day_arguments(p)
    p.add_argument("--lab", help="laboratory code for the LAB line (default: the station id)")
    p.add_argument("--out", type=out_file, required=True, help="output file, e.g. LABA59215.cggtts")
    add_model_arguments(p)
    p.set_defaults(func=run)


def run(args) -> int:
    import numpy as np

    from .. import timescales as ts
    from ..exports import receiver_line, station_revision_date, station_tracks_to_cggtts
    from ..formats.cggtts import CggttsHeader, write_cggtts
    from ..formats.rinex_obs import read_obs_header

    station, day, opts = measure_station_day(args)
    reference = day.reference
    tracks = station_tracks_to_cggtts(day.table)
    t_mid = int(np.median(day.table["time"].to_numpy(np.int64)))
    t_mid_utc = int(ts.convert(t_mid, "GPS", "UTC"))
    ds = station.delays_at(t_mid_utc)  # the set in force mid-day
    names = {"G": "GPS", "E": "GAL", "C": "BDS", "R": "GLO", "J": "QZS"}
    codes = sorted({(names.get(sat[0], sat[0]), c) for sat, lab in day.info["codes"].items()
                    for c in lab.split("+") if c})
    rcvr = receiver_line(read_obs_header(args.obs), station, t_mid_utc)
    header = CggttsHeader(
        rev_date=station_revision_date(station, t_mid_utc),
        rcvr=rcvr, ch=0,
        # IMS: the ionosphere measurement system, or 99999 when the ionosphere is modelled
        # (version-01 header documentation, see ctt.formats.cggtts): the receiver itself when
        # dual-frequency codes measure it
        ims=rcvr if opts.signals == "iono-free" else "99999",
        lab=args.lab or station.id, x_m=float(station.arp_m[0]), y_m=float(station.arp_m[1]),
        z_m=float(station.arp_m[2]), frame=station.frame,
        comments=f"ctt; clock reference {reference}; {opts.signals}",
        delay_kind="INT", delays=[(ds.receiver_ns[c], f"{sysname} {c}") for sysname, c in codes if c in ds.receiver_ns],
        cal_id=(ds.note or "NA")[:20].replace(",", " "), cab_dly_ns=ds.cable_ns, ref_dly_ns=ds.reference_ns,
        ref=station.id)
    out = pathlib.Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    write_cggtts(out, tracks, header)
    print(f"{station.id}: {len(tracks)} tracks written to {out} (REFSYS = local clock - system time, "
          f"delays applied)")
    for col, n in tracks.attrs.get("unavailable", {}).items():
        log.warning("%s: %d tracks have %s too large for its field; written as not available (9s)",
                    out, n, col)
    return 0
