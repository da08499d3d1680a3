"""Benchmark of broadcast satellite states (prints measured figures, asserts nothing).

32 GPS satellites x 2880 epochs (24 h at 30 s), flattened to N = 92 160 rows,
positions + velocities + clocks from the real merged broadcast file
``../shared/data/real-2021-001/brdc0010.21n`` through
``BroadcastOrbits.states``, which includes the per-row ephemeris selection.
Also times the same for a transmission-time offset array (dt_s), as the
measurement model calls it, the reader on that file, and the GLONASS RK4
integrator alone for 24 satellites x 2880 epochs.

Target (DESIGN.md performance budget): <= 0.2 s for the 92 160 rows; against that
target only (no baseline library). Each figure: the first call timed apart (cold) and
the median and minimum of ``--runs`` calls after it (warm). The machine is shared, so
figures are noisy.

    python scripts/bench_orbits.py [--runs 7] [--nav PATH]
"""

from __future__ import annotations

import argparse
import pathlib
import sys

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ctt.orbits import STATUS_NAMES, BroadcastOrbits, glonass_propagate, glonass_states_from_records  # noqa: E402,E501
from ctt.formats.rinex_nav import read_nav  # noqa: E402
from ctt.timescales import civil_to_ns  # noqa: E402
from benchtools import timed  # noqa: E402  (this folder)

DEFAULT_NAV = ROOT.parent / "shared" / "data" / "real-2021-001" / "brdc0010.21n"


def _time(fn, runs):
    """(cold first call, warm median, warm min) in seconds."""
    first = timed(fn, 1).median
    t = timed(fn, runs)
    return first, t.median, t.best


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=7)
    ap.add_argument("--nav", type=pathlib.Path, default=DEFAULT_NAV)
    args = ap.parse_args(argv)
    if not args.nav.is_file():
        print(f"skipped: {args.nav} not found (the real open data set lives in ../shared/data)")
        return 0
    print(f"cold = the first call, apart; warm = median (min) of the {args.runs} calls after it")
    cold, med, best = _time(lambda: read_nav(args.nav), args.runs)
    print(f"read_nav {args.nav.name}: cold {cold * 1e3:.1f} ms; warm {med * 1e3:.1f} ms (min {best * 1e3:.1f})")
    nav = read_nav(args.nav)
    orb = BroadcastOrbits(nav)
    sats = np.array([f"G{p:02d}" for p in range(1, 33)])
    epochs = civil_to_ns(2021, 1, 1) + np.arange(2880, dtype=np.int64) * 30 * 10**9
    s = np.tile(sats, len(epochs))
    t = np.repeat(epochs, len(sats))
    dt = np.full(len(t), -0.075)  # a typical signal travel time, as measure passes it
    n = len(s)
    cold, med, best = _time(lambda: orb.states(s, t), args.runs)
    print(f"states, {len(sats)} sats x {len(epochs)} epochs = {n} rows: cold {cold * 1e3:.1f} ms; warm "
          f"{med * 1e3:.1f} ms (min {best * 1e3:.1f}) (target <= 200 ms; {200 / (med * 1e3):.1f}x margin warm)")
    cold2, med2, best2 = _time(lambda: orb.states(s, t, dt), args.runs)
    print(f"states with dt_s array: cold {cold2 * 1e3:.1f} ms; warm {med2 * 1e3:.1f} ms (min {best2 * 1e3:.1f})")
    st = orb.states(s, t, dt)
    names, counts = np.unique(st.status, return_counts=True)
    print("status:", ", ".join(f"{STATUS_NAMES[k]} {c}" for k, c in zip(names, counts)))
    # GLONASS: RK4 integration for 24 satellites x 2880 epochs, each row at most 15 min from the
    # t_b of its record (48 records per satellite and day), as states() does it (one integration
    # per record to 60 s nodes, then one step per row), and row by row for comparison
    rng = np.random.default_rng(0)
    m, nrec = 24 * 2880, 24 * 48
    base_r = np.tile([[8450493.65, -18744716.80, 15109795.41]], (nrec, 1))
    base_v = np.tile([[1381.17, -1543.29, -2684.22]], (nrec, 1))
    r0, v0 = glonass_propagate(base_r, base_v, np.zeros((nrec, 3)), rng.uniform(0, 40000, nrec))
    a0 = np.zeros((nrec, 3))
    rec = np.repeat(np.arange(nrec), m // nrec)
    dts = np.tile(np.arange(-900.0, 900.0, 30.0), nrec)
    runs = max(3, args.runs // 2)
    _, med3, best3 = _time(lambda: glonass_states_from_records(rec, r0, v0, a0, dts), runs)
    print(f"GLONASS RK4 via record nodes, {m} rows: warm {med3 * 1e3:.1f} ms (min {best3 * 1e3:.1f}, "
          f"of {runs})")
    _, med4, best4 = _time(lambda: glonass_propagate(r0[rec], v0[rec], a0[rec], dts), runs)
    print(f"GLONASS RK4 row by row (<= 15 steps each), the same rows: warm {med4 * 1e3:.1f} ms "
          f"(min {best4 * 1e3:.1f}, of {runs})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
