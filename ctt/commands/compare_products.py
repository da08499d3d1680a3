"""``ctt compare-products --nav NAV --sp3 SP3 [--clk CLK] [--antex ATX] [--json]``.

How far the broadcast orbits and clocks are from a precise product, per
satellite, on the epochs of the SP3 file (where the precise product needs no
interpolation of positions):

* orbit: RMS of the 3D difference broadcast − precise, and of its radial,
  along-track and cross-track components (frame of the precise state:
  radial r/|r|, cross-track along r × v with v the *inertial* velocity
  v_ECEF + ω × r, along-track completing it), metres;
* clock: RMS in ns of (broadcast − precise) after removing, at each epoch and
  for each system, the mean over the satellites usable at that epoch (the
  clock datum: IGS time and GPS time differ by a common offset and drift).

Clock comparison, stated: both sides are compared as "satellite clock
including the periodic relativistic term": broadcast ``clock_s +
relativity_s`` (af polynomial plus F·e·√A·sin E, IS-GPS-200 §20.3.3.3.3.1)
against precise ``clock_s + relativity_s`` (IGS clock plus −2 r·v/c², IGS
conventions / IERS Conventions 2010 §10; the two relativistic terms agree to
≈0.07 ns on 2021-01-01). No group delay enters: the broadcast af0..af2
describe the clock for the iono-free L1 P(Y)/L2 P(Y) combination, since
IS-GPS-200 §20.3.3.3.3.2 has single-frequency L1 P(Y) users apply
(Δt_SV)_L1 = Δt_SV − T_GD (and L2 users Δt_SV − γ·T_GD) while the
dual-frequency user of §20.3.3.3.3.3 forms (PR_L2 − γ PR_L1)/(1 − γ) with no
T_GD (section numbers from memory; the statements checked against
secondary sources: Leick et al., "GPS Satellite Surveying", ch. 5: L1 users
subtract T_GD, L2-only users γ·T_GD; Inside GNSS, "Inter-Signal Correction
Sensitivity Analysis": the broadcast ephemeris and clock are based on the
iono-free L1 P(Y)/L2 P(Y) pseudorange). IGS clocks refer to the same P1/P2
iono-free combination (ESA Navipedia, "Ionosphere-free Combination for Dual
Frequency Receivers": the TGDs cancel in this combination, the satellite
clocks being referred to it).
A constant per-satellite difference of the two P1−P2 bias realisations
remains inside the clock RMS.

Orbit comparison, stated: the broadcast ephemeris gives the antenna phase
centre, SP3 the centre of mass. Without ``--antex`` the difference contains
the satellite phase-centre offset, mostly along the body z axis, i.e. a
radial bias of about 0–1.6 m depending on the block (measured here on
2021-01-01: mean radial −1.0 to −1.6 m for most blocks, ≈0 for the others;
the offsets the control segment uses are not published in the files, so no
nominal value is subtracted). With ``--antex`` the IGS offsets are applied to
the precise positions; the control segment's own offsets may differ from
them at the decimetre level.

JSON (``--json``), exactly: ``satellites`` → {id: {orbit_rms_m, radial_rms_m,
along_rms_m, cross_rms_m, clock_rms_ns}}, ``summary`` → {orbit_rms_m,
clock_rms_ns, n_satellites}, ``systems`` → {letter: {orbit_rms_m, radial_rms_m,
along_rms_m, cross_rms_m, clock_rms_ns, clock_rms_median_ns, n_satellites}} (the
clock datum is per system already; the median of the satellites' clock RMS is
robust to one bad satellite), ``excluded`` → {id: reason}. A value that cannot
be formed (e.g. no clock) is ``null``.

Other systems: the broadcast Galileo clocks are those of the I/NAV message
(E1/E5b) and GLONASS's refer to the GLONASS control segment's own code
convention; a precise product's convention may differ (a constant per
satellite: it stays in the clock RMS, as the P1−P2 realisations do for GPS).
"""

from __future__ import annotations

import json
import math

from ..errors import NoDataError

OMEGA_E = 7.2921151467e-5  # rad/s, IS-GPS-200 (Earth rotation rate of WGS 84)


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "compare-products",
        help="compare broadcast orbits and clocks with a precise SP3 (and clock) product",
        description="Per-satellite RMS of broadcast minus precise orbits (3D, radial, along, cross) "
        "and clocks (after removing the per-epoch mean over satellites), on the SP3 epochs.",
    )
    p.add_argument("--nav", required=True, help="broadcast navigation file (RINEX 2/3/4)")
    p.add_argument("--sp3", required=True, nargs="+", action="extend",
                   help="SP3 file(s); adjacent files are joined (repeatable)")
    p.add_argument("--clk", nargs="+", action="extend",
                   help="RINEX clock file(s) whose satellite clocks replace the SP3 clocks; adjacent files "
                        "are joined (repeatable)")
    p.add_argument("--antex", help="ANTEX file: move the precise positions to the antenna phase centre")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.set_defaults(func=run)


def _rms(x, axis=None):
    import numpy as np

    with np.errstate(invalid="ignore"):
        n = np.sum(np.isfinite(x), axis=axis)
        s = np.nansum(np.square(x), axis=axis)
        return np.where(n > 0, np.sqrt(s / np.maximum(n, 1)), np.nan)


def _num(v):
    v = float(v)
    return None if not math.isfinite(v) else v


def compare_states(broadcast, precise, sats, t_ns):
    """Compare two ``states()`` sources on the grid ``sats`` × ``t_ns`` (GPS ns).

    Returns ``(result, details)``: ``result`` is the JSON structure of the
    module docstring; ``details`` adds per-satellite epoch counts and mean
    radial difference, and the per-epoch clock residuals (ns, satellites ×
    epochs) for plots.
    """
    import numpy as np

    sats = np.asarray(sats, dtype=str)
    t_ns = np.asarray(t_ns, dtype=np.int64)
    ns, ne = len(sats), len(t_ns)
    S = np.repeat(sats, ne)
    T = np.tile(t_ns, ns)
    b = broadcast.states(S, T)
    p = precise.states(S, T)
    b_ok = (np.asarray(b.status) == 0).reshape(ns, ne)
    p_pos_ok = np.isfinite(p.pos_m).all(axis=1).reshape(ns, ne)
    orbit_ok = b_ok & p_pos_ok & np.isfinite(b.pos_m).all(axis=1).reshape(ns, ne)

    d = (b.pos_m - p.pos_m).reshape(ns, ne, 3)
    r = p.pos_m.reshape(ns, ne, 3)
    v_in = (p.vel_mps + np.cross(np.array([0.0, 0.0, OMEGA_E]), p.pos_m)).reshape(ns, ne, 3)
    with np.errstate(invalid="ignore"):
        rhat = r / np.linalg.norm(r, axis=-1, keepdims=True)
        c = np.cross(r, v_in)
        chat = c / np.linalg.norm(c, axis=-1, keepdims=True)
    ahat = np.cross(chat, rhat)
    d = np.where(orbit_ok[..., None], d, np.nan)
    dr = np.einsum("sec,sec->se", d, rhat)
    da = np.einsum("sec,sec->se", d, ahat)
    dc = np.einsum("sec,sec->se", d, chat)
    d3 = np.linalg.norm(d, axis=-1)

    cb = (b.clock_s + b.relativity_s).reshape(ns, ne)
    cp = (p.clock_s + p.relativity_s).reshape(ns, ne)
    dclk = np.where(orbit_ok, cb - cp, np.nan)
    system = np.array([s[:1] for s in sats])
    resid = np.full_like(dclk, np.nan)
    for letter in np.unique(system):          # loop over systems only
        rows = system == letter
        block = dclk[rows]
        n_ok = np.sum(np.isfinite(block), axis=0)
        with np.errstate(invalid="ignore"):
            mean = np.nansum(block, axis=0) / np.maximum(n_ok, 1)
        # a datum from one satellite would leave a residual of exactly zero: not a measurement
        resid[rows] = np.where(n_ok >= 2, block - mean, np.nan)
    resid_ns = resid * 1e9

    result = {"satellites": {}, "summary": {}, "excluded": {}}
    details = {"n_epochs": {}, "radial_mean_m": {}, "clock_epochs": {}, "clock_residual_ns": resid_ns,
               "sats": sats, "t_ns": t_ns}
    b_status = np.asarray(b.status).reshape(ns, ne)
    p_status = np.asarray(p.status).reshape(ns, ne)
    for i, s in enumerate(sats):
        n_orb = int(orbit_ok[i].sum())
        if n_orb == 0:
            if not b_ok[i].any():
                codes, counts = np.unique(b_status[i], return_counts=True)
                result["excluded"][s] = "broadcast: " + str(b.reason(codes[np.argmax(counts)]))
            else:
                codes, counts = np.unique(p_status[i], return_counts=True)
                code = codes[np.argmax(counts)]
                result["excluded"][s] = "precise: " + str(p.reason(code))
            continue
        result["satellites"][s] = {
            "orbit_rms_m": _num(_rms(d3[i])), "radial_rms_m": _num(_rms(dr[i])),
            "along_rms_m": _num(_rms(da[i])), "cross_rms_m": _num(_rms(dc[i])),
            "clock_rms_ns": _num(_rms(resid_ns[i])),
        }
        details["n_epochs"][s] = n_orb
        details["radial_mean_m"][s] = _num(np.nanmean(dr[i]))
        details["clock_epochs"][s] = int(np.isfinite(resid_ns[i]).sum())
    used = np.array([s in result["satellites"] for s in sats], dtype=bool)
    if not used.any():
        raise NoDataError("no satellite has both a usable broadcast and a precise state on the SP3 epochs")
    result["summary"] = {
        "orbit_rms_m": _num(_rms(d3[used])),
        "clock_rms_ns": _num(_rms(resid_ns[used])),
        "n_satellites": int(used.sum()),
    }
    # per system: broadcast accuracies differ by system (and so do their published figures)
    result["systems"] = {}
    for letter in np.unique(system[used]):
        rows = used & (system == letter)
        clk_sat = np.array([result["satellites"][s]["clock_rms_ns"] for s in sats[rows]], dtype=float)
        result["systems"][str(letter)] = {
            "orbit_rms_m": _num(_rms(d3[rows])), "radial_rms_m": _num(_rms(dr[rows])),
            "along_rms_m": _num(_rms(da[rows])), "cross_rms_m": _num(_rms(dc[rows])),
            "clock_rms_ns": _num(_rms(resid_ns[rows])),
            "clock_rms_median_ns": _num(np.nanmedian(clk_sat)) if np.isfinite(clk_sat).any() else None,
            "n_satellites": int(rows.sum()),
        }
    return result, details


def _nav_satellites(nav) -> set:
    out = set()
    for df in getattr(nav, "records", {}).values():
        if "sat" in df.columns:
            out.update(str(s) for s in df["sat"].unique())
    return out


def run_comparison(nav_path, sp3_paths, clk_path=None, antex_path=None):
    """Read the files and compare; returns ``(result, details, precise_orbits)``."""
    import numpy as np

    from ..orbits import BroadcastOrbits
    from ..formats.rinex_nav import read_nav
    from ..formats.sp3 import read_sp3
    from ..orbits import PreciseOrbits

    if isinstance(sp3_paths, (str, bytes)) or not hasattr(sp3_paths, "__iter__"):
        sp3_paths = [sp3_paths]
    sp3 = [read_sp3(pth) for pth in sp3_paths]
    precise = PreciseOrbits(sp3[0] if len(sp3) == 1 else sp3, clk=clk_path, antex=antex_path)
    nav = read_nav(nav_path)
    broadcast = BroadcastOrbits(nav)
    sats = np.array(sorted(str(s) for s in precise.sp3.sats))
    result, details = compare_states(broadcast, precise, sats, precise.sp3.time_ns)
    for s in sorted(_nav_satellites(nav) - set(sats)):
        result["excluded"][s] = "precise: not in the precise product"
    result["excluded"] = dict(sorted(result["excluded"].items()))
    return result, details, precise


def _f(v, fmt="8.3f"):
    return f"{v:{fmt}}" if v is not None else " " * (int(fmt.split(".")[0]) - 1) + "-"


def format_table(result, details, precise, nav_path) -> str:
    from ..timescales import to_iso

    t = details["t_ns"]
    out = [f"broadcast      {nav_path}",
           f"precise        {precise.sp3.path}" + (f" + {precise.clk.path}" if precise.clk is not None else ""),
           f"epochs         {len(t)} from {to_iso(int(t[0]), 0, '')} to {to_iso(int(t[-1]), 0, '')} GPS",
           f"phase centre   {precise.pco_note}",
           "clocks         (broadcast + relativity) - (precise + relativity), per-epoch mean over "
           "satellites removed; no group delay (both iono-free P1/P2)",
           "",
           "sat  epochs   3D rms  radial rms  along rms  cross rms  radial mean  clock rms",
           "                 (m)         (m)        (m)        (m)          (m)       (ns)"]
    for s, v in result["satellites"].items():
        out.append(f"{s}  {details['n_epochs'][s]:6d} {_f(v['orbit_rms_m'])}    {_f(v['radial_rms_m'])}   "
                   f"{_f(v['along_rms_m'])}   {_f(v['cross_rms_m'])}     {_f(details['radial_mean_m'][s])}   "
                   f"{_f(v['clock_rms_ns'])}")
    sm = result["summary"]
    out += [""]
    for letter, v in result.get("systems", {}).items():
        out.append(f"system {letter}       {v['n_satellites']} satellites: orbit 3D rms {_f(v['orbit_rms_m'], '.3f')} m "
                   f"(radial {_f(v['radial_rms_m'], '.3f')}, along {_f(v['along_rms_m'], '.3f')}, cross "
                   f"{_f(v['cross_rms_m'], '.3f')}), clock rms {_f(v['clock_rms_ns'], '.3f')} ns "
                   f"(median over satellites {_f(v['clock_rms_median_ns'], '.3f')} ns)")
    out += [f"constellation  {sm['n_satellites']} satellites: orbit 3D rms {_f(sm['orbit_rms_m'], '.3f')} m, "
            f"clock rms {_f(sm['clock_rms_ns'], '.3f')} ns"]
    if result["excluded"]:
        out.append("excluded:")
        out += [f"  {s}  {why}" for s, why in result["excluded"].items()]
    return "\n".join(out)


def run(args) -> int:
    result, details, precise = run_comparison(args.nav, args.sp3, args.clk, args.antex)
    if args.json:
        print(json.dumps(result, indent=2, sort_keys=False))
    else:
        print(format_table(result, details, precise, args.nav))
    return 0
