"""Benchmark of broadcast satellite states (prints measured figures, asserts nothing).

32 GPS satellites x 2880 epochs (24 h at 30 s), flattened to N = 92 160 rows,
positions + velocities + clocks from the real merged broadcast file
``../shared/data/real-2021-001/brdc0010.21n`` through
``BroadcastOrbits.states``, which includes the per-row ephemeris selection.
Also times the same for a transmission-time offset array (dt_s), as the
measurement model calls it, and the reader on that file.

Target (DESIGN.md performance budget): <= 0.2 s for the 92 160 rows.
The machine is shared, so figures are noisy; the script reports the median
and the minimum of the runs.

    python scripts/bench_orbits.py [--runs 7] [--nav PATH]
"""

from __future__ import annotations

import argparse
import pathlib
import statistics
import sys
import time

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ctt.orbits import STATUS_NAMES, BroadcastOrbits  # noqa: E402
from ctt.rinex.nav import read_nav  # noqa: E402
from ctt.timescales import civil_to_ns  # noqa: E402

DEFAULT_NAV = ROOT.parent / "shared" / "data" / "real-2021-001" / "brdc0010.21n"


def _time(fn, runs):
    out = []
    for _ in range(runs):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return statistics.median(out), min(out)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=7)
    ap.add_argument("--nav", type=pathlib.Path, default=DEFAULT_NAV)
    args = ap.parse_args(argv)
    if not args.nav.is_file():
        print(f"skipped: {args.nav} not found (the real open data set lives in ../shared/data)")
        return 0
    med, best = _time(lambda: read_nav(args.nav), args.runs)
    print(f"read_nav {args.nav.name}: median {med * 1e3:.1f} ms, min {best * 1e3:.1f} ms")
    nav = read_nav(args.nav)
    orb = BroadcastOrbits(nav)
    sats = np.array([f"G{p:02d}" for p in range(1, 33)])
    epochs = civil_to_ns(2021, 1, 1) + np.arange(2880, dtype=np.int64) * 30 * 10**9
    s = np.tile(sats, len(epochs))
    t = np.repeat(epochs, len(sats))
    dt = np.full(len(t), -0.075)  # a typical signal travel time, as measure passes it
    n = len(s)
    med, best = _time(lambda: orb.states(s, t), args.runs)
    print(f"states, {len(sats)} sats x {len(epochs)} epochs = {n} rows: median {med * 1e3:.1f} ms, "
          f"min {best * 1e3:.1f} ms (target <= 200 ms; {200 / (med * 1e3):.1f}x margin at the median)")
    med2, best2 = _time(lambda: orb.states(s, t, dt), args.runs)
    print(f"states with dt_s array: median {med2 * 1e3:.1f} ms, min {best2 * 1e3:.1f} ms")
    st = orb.states(s, t, dt)
    names, counts = np.unique(st.status, return_counts=True)
    print("status:", ", ".join(f"{STATUS_NAMES[k]} {c}" for k, c in zip(names, counts)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
