"""``ctt station from-sinex`` / ``ctt station check``: station files from SINEX coordinates.

``ctt station from-sinex SINEX --site BRUS --date 2011-10-10 --out brus.toml [--station OLD.toml]``
writes a station file whose position is the SINEX marker position of that
site propagated to the date with its velocity (when the file has one), with
the antenna type, radome and eccentricity of its SITE/ANTENNA and
SITE/ECCENTRICITY records. With ``--station`` every other key (delays,
changes, met, mask) is kept from that file; without it a new file is written
with an *uncalibrated* placeholder delay set (zero delays, 5 ns
uncertainties) that must be replaced by the station's calibration.

``ctt station check STATION.toml --sinex SINEX [--date D] [--tolerance-m 0.05]``
compares a station file with the SINEX position of the same site (marker
with marker, or the antenna reference point with marker + eccentricity) and
prints the east/north/up difference, and the antenna name and eccentricity
differences. Exit 2 (configuration error) when the position differs by more
than the tolerance or the antenna disagrees; 0 otherwise.
"""

from __future__ import annotations

import datetime as _dt
import sys



def register(subparsers) -> None:
    p = subparsers.add_parser("station", help="station files from SINEX coordinates (write or check)",
                              description="Write a station file from a SINEX solution, or check one against it.")
    sub = p.add_subparsers(dest="station_command", metavar="ACTION")
    w = sub.add_parser("from-sinex", help="write a station file from a SINEX file",
                       description="Station file from a SINEX file: position propagated to --date with the "
                                   "velocities, antenna type/radome and eccentricity.")
    w.add_argument("sinex", help="SINEX file (.snx, .ssc, optionally compressed)")
    w.add_argument("--site", required=True, help="4-character site code, e.g. BRUS")
    w.add_argument("--date", help="UTC date YYYY-MM-DD the position is propagated to (default: the SINEX epoch)")
    w.add_argument("--station", help="existing station file whose other keys (delays, changes, ...) are kept")
    w.add_argument("--id", help="station id for a new file (default: the site code)")
    w.add_argument("--out", required=True, help="station TOML file to write")
    w.set_defaults(func=run_from_sinex)
    c = sub.add_parser("check", help="compare a station file with a SINEX file (E/N/U difference)",
                       description="Compare a station file's position, antenna and eccentricity with a SINEX "
                                   "solution; exit 2 when they disagree beyond the tolerance.")
    c.add_argument("station", help="station TOML file")
    c.add_argument("--sinex", required=True, help="SINEX file")
    c.add_argument("--site", help="site code in the SINEX file (default: the station id's first 4 characters)")
    c.add_argument("--date", help="UTC date YYYY-MM-DD to propagate to (default: the station file's epoch)")
    c.add_argument("--tolerance-m", type=float, default=0.05,
                   help="largest accepted 3-D position difference in metres (default 0.05)")
    c.set_defaults(func=run_check)
    p.set_defaults(func=lambda args: p.print_help() or 2)


def _date_ns(text):
    from ..errors import UsageError
    from ..timescales import civil_to_ns

    try:
        d = _dt.date.fromisoformat(text)
    except (TypeError, ValueError):
        raise UsageError(f"--date: expected YYYY-MM-DD, found {text!r}") from None
    return int(civil_to_ns(d.year, d.month, d.day))


def _decimal_year(t_ns: int) -> float:
    from ..timescales import civil_to_ns, to_iso

    y = int(to_iso(int(t_ns))[:4])
    y0, y1 = int(civil_to_ns(y, 1, 1)), int(civil_to_ns(y + 1, 1, 1))
    return y + (t_ns - y0) / (y1 - y0)


def _from_decimal_year(year: float) -> int:
    from ..timescales import civil_to_ns

    y = int(year)
    y0, y1 = int(civil_to_ns(y, 1, 1)), int(civil_to_ns(y + 1, 1, 1))
    return int(y0 + (year - y) * (y1 - y0))


def _site(args_sinex, code):
    from ..errors import ConfigError
    from ..formats.sinex import read_sinex_stations

    snx = read_sinex_stations(args_sinex)
    try:
        return snx, snx.site(code)
    except KeyError:
        raise ConfigError(args_sinex, "SOLUTION/ESTIMATE", f"expected site {code!r}; the file has "
                          f"{len(snx.codes)} sites ({', '.join(snx.codes[:8])}...)") from None


def run_from_sinex(args) -> int:
    import dataclasses
    import pathlib

    import numpy as np

    from ..config import Antenna, dump_station, load_station

    snx, site = _site(args.sinex, args.site)
    t_ns = _date_ns(args.date) if args.date else site.epoch_ns
    xyz = site.position_at(t_ns)
    sig = site.sigma_m.copy()
    if site.vel_mpy is not None and site.vel_sigma_mpy is not None:
        dt_y = (t_ns - site.epoch_ns) / 1e9 / (365.25 * 86400.0)
        sig = np.sqrt(sig ** 2 + (site.vel_sigma_mpy * dt_y) ** 2)
    une = site.eccentricity_une_m if site.eccentricity_une_m is not None else np.zeros(3)
    ant_type, radome = "", ""
    if site.antenna:
        ant_type, radome = site.antenna[:16].strip(), site.antenna[16:20].strip() or "NONE"
    antenna = Antenna(ant_type, np.array([une[0], une[2], une[1]]), radome)   # UNE -> up, east, north
    frame = snx.frame or "SINEX"
    moved = "propagated with its velocity" if site.vel_mpy is not None else "no velocity in the file: as estimated"
    if args.station:
        base = load_station(args.station)
        new = dataclasses.replace(base, position_m=xyz, position_sigma_m=sig, frame=frame,
                                  epoch=round(_decimal_year(t_ns), 4), is_marker=True, antenna=antenna)
        text = dump_station(new)
    else:
        sid = args.id or site.code
        name = f"{site.code} {site.domes} {site.description}".strip()
        from ..timescales import to_iso

        valid = to_iso(t_ns, 0, "")[:10]
        text = "\n".join([
            f"# written by ctt station from-sinex from {pathlib.Path(args.sinex).name} (site {site.code}, "
            f"solution {site.solution}; {moved})",
            "# The [[delays]] below are an UNCALIBRATED placeholder: enter the station's calibration.",
            "[station]", f'id = "{sid}"', f'name = "{name}"', "",
            "[station.position]", f"x_m = {xyz[0]:.4f}", f"y_m = {xyz[1]:.4f}", f"z_m = {xyz[2]:.4f}",
            f"sigma_x_m = {sig[0]:.4f}", f"sigma_y_m = {sig[1]:.4f}", f"sigma_z_m = {sig[2]:.4f}",
            f'frame = "{frame}"', f"epoch = {_decimal_year(t_ns):.4f}", "is_marker = true", "",
            "[station.antenna]", f'type = "{ant_type}"', f'radome = "{radome or "NONE"}"',
            f"delta_h_m = {une[0]:.4f}", f"delta_e_m = {une[2]:.4f}", f"delta_n_m = {une[1]:.4f}", "",
            "[[delays]]", f"valid_from = {valid}T00:00:00Z",
            "receiver_ns = { C1C = 0.0, C1W = 0.0, C2W = 0.0 }", "u_receiver_ns = 5.0",
            "cable_ns = 0.0", "u_cable_ns = 5.0", "reference_ns = 0.0", "u_reference_ns = 5.0",
            'note = "placeholder: not calibrated"', ""])
        if ant_type == "":
            text = text.replace('type = ""\nradome = "NONE"\n', "")
    out = pathlib.Path(args.out)
    out.write_text(text)
    load_station(out)                        # what we wrote must read back
    print(f"{out}: {site.code} at {xyz[0]:.4f} {xyz[1]:.4f} {xyz[2]:.4f} m ({frame}, "
          f"epoch {_decimal_year(t_ns):.4f}; {moved}); antenna {site.antenna or 'not in the file'}, "
          f"eccentricity U/N/E {une[0]:.4f} {une[1]:.4f} {une[2]:.4f} m")
    return 0


def station_differences(station, site, t_ns):
    """(E, N, U) difference station − SINEX (m) like with like, antenna name and eccentricity differences."""
    import numpy as np

    from ..geodesy import antenna_reference_point, ecef_to_geodetic, ecef_to_enu

    ref = site.position_at(t_ns)
    une = site.eccentricity_une_m if site.eccentricity_une_m is not None else np.zeros(3)
    if not station.is_marker:            # the station file holds the ARP: compare with SINEX marker + eccentricity
        ref = antenna_reference_point(ref, une[0], une[2], une[1])
    lat, lon, _ = ecef_to_geodetic(ref)
    enu = ecef_to_enu(np.asarray(station.position_m, float) - ref, lat, lon)
    ecc = np.asarray(station.antenna.delta_hen_m, float) - np.array([une[0], une[2], une[1]])
    ant_ok = site.antenna is None or station.antenna.antex_name == site.antenna
    return enu, ecc, ant_ok


def run_check(args) -> int:
    import math

    import numpy as np

    from ..config import load_station
    from ..errors import EXIT_OK, EXIT_USAGE

    st = load_station(args.station)
    snx, site = _site(args.sinex, args.site or st.id[:4])
    if args.date:
        t_ns = _date_ns(args.date)
    elif st.epoch is not None and math.isfinite(st.epoch):
        t_ns = _from_decimal_year(st.epoch)
    else:
        t_ns = site.epoch_ns
    enu, ecc, ant_ok = station_differences(st, site, t_ns)
    d3 = float(np.linalg.norm(enu))
    what = "marker" if st.is_marker else "antenna reference point"
    print(f"{args.station} ({what}) - {site.code} of {args.sinex} at {_decimal_year(t_ns):.4f}: "
          f"east {enu[0] * 1e3:+.1f} mm, north {enu[1] * 1e3:+.1f} mm, up {enu[2] * 1e3:+.1f} mm "
          f"(3-D {d3 * 1e3:.1f} mm)")
    print(f"antenna {st.antenna.antex_name!r} vs {site.antenna!r}: {'same' if ant_ok else 'DIFFERENT'}; "
          f"eccentricity (up, east, north) differs by {ecc[0] * 1e3:+.1f} {ecc[1] * 1e3:+.1f} {ecc[2] * 1e3:+.1f} mm")
    bad = d3 > args.tolerance_m or not ant_ok or np.max(np.abs(ecc)) > 1e-3
    if bad:
        print(f"station file disagrees with the SINEX solution (tolerance {args.tolerance_m} m, antenna name, "
              "eccentricity 1 mm)", file=sys.stderr)
    return EXIT_USAGE if bad else EXIT_OK
