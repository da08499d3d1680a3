"""``ctt ppp``: one station's clock against a precise product's time scale (carrier-phase PPP)."""

from __future__ import annotations

import logging

from ..errors import UsageError
from ._common import check_input_files, checked, out_dir

log = logging.getLogger("ctt")


def register(sub) -> None:
    p = sub.add_parser("ppp", help="carrier-phase precise point positioning: a station's clock against the "
                                   "time scale of precise orbits and clocks",
                       description="Estimate, every epoch, the station's local reference clock minus the "
                                   "precise product's time scale from iono-free code and carrier phase "
                                   "(float ambiguities, estimated troposphere and position). Writes "
                                   "clock.csv, residuals.csv and summary.json into --out.")
    p.add_argument("obs", help="RINEX observation file (any compression)")
    p.add_argument("--station", required=True, help="station TOML file")
    p.add_argument("--sp3", action="append", required=True, metavar="FILE",
                   help="precise orbits (SP3); repeat for the previous and next day")
    p.add_argument("--clk", action="append", default=[], metavar="FILE",
                   help="precise satellite clocks (RINEX clock); repeatable")
    p.add_argument("--antex", help="ANTEX file (satellite and receiver antennas)")
    p.add_argument("--bias", help="code-bias file (Bias-SINEX) mapping C1C onto C1W where P1 is absent")
    p.add_argument("--met", help="RINEX meteorological file of the station")
    p.add_argument("--erp", action="append", default=[], metavar="FILE",
                   help="IGS ERP file (pole coordinates) for the solid Earth pole tide (IERS 2010); its "
                        "epochs must cover the day: repeat for the neighbouring week's file (merged)")
    p.add_argument("--out", type=out_dir, required=True, help="output folder")
    p.add_argument("--force-inputs", action="store_true",
                   help="process an observation file whose marker name or position does not match the "
                        "station file (a warning is recorded in summary.json)")
    g = p.add_argument_group("estimation")
    g.add_argument("--systems", default=None, help="satellite systems, e.g. G or GE (default G)")
    g.add_argument("--elevation-mask", type=float, default=None, metavar="DEG",
                   help="elevation mask in degrees (default 7)")
    g.add_argument("--position", choices=("estimate", "fixed", "constrained"), default=None,
                   help="static position: estimated (default), held at the station file's, or constrained "
                        "to it with --position-sigma (default: the station file's sigma)")
    g.add_argument("--position-sigma", type=float, default=None, metavar="M",
                   help="sigma of the position constraint per ECEF axis, metres")
    g.add_argument("--mapping", choices=("gmf", "niell"), default=None, help="troposphere mapping (default gmf)")
    g.add_argument("--ztd-interval", type=float, default=None, metavar="SECONDS",
                   help="spacing of the estimated zenith wet delay nodes (default 3600)")
    g.add_argument("--code-sigma", type=float, default=None, metavar="M",
                   help="code sigma of one signal at the zenith (default 0.3 m)")
    g.add_argument("--phase-sigma", type=float, default=None, metavar="M",
                   help="carrier sigma of one signal at the zenith (default 0.003 m)")
    g.add_argument("--outlier-k", type=float, default=None, help="residual screening at k x robust sigma (default 5)")
    p.set_defaults(func=run)


def options_from_args(args):
    from ..ppp import PPPOptions

    kw = {}
    if args.systems:
        kw["systems"] = checked("--systems", tuple(args.systems.replace(",", "").replace(" ", "").upper()))
    for name, key in (("elevation_mask", "elevation_mask_deg"), ("position", "position"),
                      ("position_sigma", "position_sigma_m"), ("mapping", "mapping"),
                      ("ztd_interval", "ztd_interval_s"), ("code_sigma", "code_sigma_m"),
                      ("phase_sigma", "phase_sigma_m"), ("outlier_k", "outlier_k")):
        v = getattr(args, name)
        if v is not None:
            kw[key] = checked("--elevation-mask", v) if name == "elevation_mask" else v
    try:
        return PPPOptions(**kw)
    except ValueError as e:
        raise UsageError(str(e)) from None


def run(args) -> int:
    from ..pipeline import ppp_files

    opts = options_from_args(args)
    check_input_files(args, ("obs", "sp3", "clk", "antex", "bias", "met", "erp"))
    result, paths = ppp_files(args.obs, args.station, sp3=args.sp3, clk=args.clk, antex=args.antex,
                              bias=args.bias, met=args.met, erp=args.erp, options=opts, out_dir=args.out,
                              force_inputs=args.force_inputs)
    print("\n".join(result.summary_lines()))
    for p in paths.values():
        log.info("wrote %s", p)
    return 0
