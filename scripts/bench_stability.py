"""Benchmark: ADEV + MDEV + TDEV with CIs and noise type, one year of 30 s data.

Series: 1 051 200 phase points (365 d at 30 s), reproducible white FM plus flicker FM (fixed generator state)
from allantools' Kasdin generator (plus a little white PM). Prints the time of
ctt.stability (deviations, EDF, CIs, noise identification at every octave τ up to
a third of the span) and of allantools alone for the three bare deviations, and
the ratio. Timings on a shared machine are noisy: the best of ``--repeat`` runs
is printed, with the median beside it.

    python scripts/bench_stability.py [--repeat 3]
"""

from __future__ import annotations

import argparse

import allantools
import numpy as np
from allantools.noise_kasdin import Noise

from ctt import stability
from benchtools import timed  # this folder


def make_series(n: int, tau0: float = 30.0, draw: int = 2024) -> np.ndarray:
    np.random.set_state(np.random.RandomState(draw).get_state())
    pts = 1 << int(np.ceil(np.log2(n)))
    wfm = Noise(pts, (1e-12 * np.sqrt(tau0)) ** 2, -2)        # white FM
    wfm.generateNoise()
    ffm = Noise(pts, (3e-15 * tau0) ** 2, -3)                  # flicker FM
    ffm.generateNoise()
    x = wfm.time_series[:n] + ffm.time_series[:n]
    x += np.random.default_rng(draw).normal(scale=0.3e-9, size=n)   # white PM, 0.3 ns
    return x


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--days", type=float, default=365.0)
    args = ap.parse_args()
    tau0 = 30.0
    n = int(args.days * 86400 / tau0)
    x = make_series(n, tau0)
    rate = 1.0 / tau0
    taus = stability.octave_taus(n, tau0)
    print(f"series: {n} points at {tau0:g} s ({args.days:g} d), {len(taus)} octave taus "
          f"{taus[0]:g} .. {taus[-1]:g} s")

    def ours():
        return stability.stability_set(x, rate, taus=taus, kinds=("oadev", "mdev", "tdev"))

    def bare():
        allantools.oadev(x, rate, "phase", taus)
        allantools.mdev(x, rate, "phase", taus)
        allantools.tdev(x, rate, "phase", taus)

    r = timed(ours, args.repeat)
    t_ours, m_ours, res = r.best, r.median, r.result
    r = timed(bare, args.repeat)
    t_bare, m_bare = r.best, r.median
    r = timed(lambda: stability._noise_ids(x, stability._ms(taus, rate, n), 2), args.repeat)
    t_nid, m_nid = r.best, r.median
    print(f"ctt.stability ADEV+MDEV+TDEV with CIs and noise type: best {t_ours:.3f} s (median {m_ours:.3f} s)")
    print(f"  of which noise identification at all taus:          best {t_nid:.3f} s (median {m_nid:.3f} s)")
    print(f"allantools alone oadev+mdev+tdev (no CIs, no noise id): best {t_bare:.3f} s (median {m_bare:.3f} s)")
    print(f"ratio ctt/allantools: {t_ours / t_bare:.2f} (best), {m_ours / m_bare:.2f} (median)")
    print(f"target <= 3 s: {'met' if t_ours <= 3.0 else 'NOT met'} (best run)")
    d = res["oadev"]
    print("tau_s      ADEV       ci_low     ci_high    edf      noise")
    for i in range(0, len(d.tau_s), 3):
        print(f"{d.tau_s[i]:<10g} {d.dev[i]:.3e}  {d.ci_low[i]:.3e}  {d.ci_high[i]:.3e}  "
              f"{d.edf[i]:<8.1f} {d.noise[i]}")


if __name__ == "__main__":
    main()
