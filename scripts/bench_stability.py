"""Benchmark: OADEV + MDEV + TDEV with CIs and noise type, one year of 30 s data, like for like.

Series: 1 051 200 phase points (365 d at 30 s), reproducible white FM plus flicker FM (fixed
generator state) from allantools' Kasdin generator (plus a little white PM). Three
comparisons, each printed with what was timed and against what:

1. bare deviations, the same work on both sides: ctt's estimator path
   (``stability._raw``: OADEV and MDEV, TDEV derived from MDEV as ctt does) against
   allantools.oadev + allantools.mdev with TDEV = τ·MDEV/√3 derived the same way;
2. the full set with CIs and noise type: ``ctt.stability.stability_set`` against the same
   work assembled from allantools' own functions (oadev, mdev, TDEV derived,
   ``autocorr_noise_id`` at every τ, ``edf_greenhall`` and ``confidence_interval`` at every τ
   for OADEV and MDEV);
3. the gap-aware path (ctt's own estimators, which skip every difference touching a gap) on
   the same series with 0.1 % of the points missing in scattered gaps, against ctt on the
   gapless series (allantools has no gap-aware estimator: it propagates NaN).

Each figure is the median of ``--repeat`` warm runs (min beside it); one untimed warm-up
call precedes them. Shared machine: figures are noisy.

    python scripts/bench_stability.py [--repeat 3] [--days 365]
"""

from __future__ import annotations

import argparse
import contextlib
import io
import math

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


def _warm(fn, repeat):
    fn()  # warm-up, untimed
    return timed(fn, repeat)


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
    m = stability._ms(taus, rate, n)
    print(f"series: {n} points at {tau0:g} s ({args.days:g} d), {len(taus)} octave taus "
          f"{taus[0]:g} .. {taus[-1]:g} s; median of {args.repeat} warm runs each")

    # 1. bare deviations, same work
    def ctt_bare():
        stability._raw("oadev", x, rate, m)
        d, _ = stability._raw("mdev", x, rate, m)
        return d * (m / rate) / math.sqrt(3.0)

    def at_bare():
        allantools.oadev(x, rate, "phase", m / rate)
        t, d, _, _ = allantools.mdev(x, rate, "phase", m / rate)
        return d * np.asarray(t) / math.sqrt(3.0)

    a, b = _warm(ctt_bare, args.repeat), _warm(at_bare, args.repeat)
    print(f"1. OADEV+MDEV, TDEV derived, no CIs: ctt {a.median:.3f} s (min {a.best:.3f}) vs allantools "
          f"{b.median:.3f} s (min {b.best:.3f}): ratio ctt/allantools {a.median / b.median:.2f}")

    # 2. the full set
    def ctt_full():
        return stability.stability_set(x, rate, taus=taus, kinds=("oadev", "mdev", "tdev"))

    def at_full():
        with contextlib.redirect_stdout(io.StringIO()):  # allantools prints when it falls back
            return _at_full()

    def _at_full():
        out = {}
        for name, fn, mod in (("oadev", allantools.oadev, False), ("mdev", allantools.mdev, True)):
            t, d, _, _ = fn(x, rate, "phase", m / rate)
            lo, hi, alpha = [], [], 0.0
            for ti, di in zip(t, d):
                mi = int(round(ti * rate))
                try:  # too few decimated points at the longest τ: keep the previous τ's type (as ctt)
                    alpha = allantools.autocorr_noise_id(x, af=mi, data_type="phase", dmin=0, dmax=2)[0]
                except NotImplementedError:
                    pass
                try:
                    edf = allantools.edf_greenhall(alpha=int(round(alpha)), d=2, m=mi, N=n, overlapping=True,
                                                   modified=mod)
                except (NotImplementedError, AssertionError, ZeroDivisionError, ValueError):
                    edf = allantools.edf_simple(n, mi, int(round(alpha)))
                lo_i, hi_i = allantools.confidence_interval(di, edf, stability.ONE_SIGMA_CI)
                lo.append(lo_i)
                hi.append(hi_i)
            out[name] = (t, d, lo, hi)
        t, d, lo, hi = out["mdev"]
        f = np.asarray(t) / math.sqrt(3.0)
        out["tdev"] = (t, d * f, np.asarray(lo) * f, np.asarray(hi) * f)
        return out

    a, b = _warm(ctt_full, args.repeat), _warm(at_full, args.repeat)
    res = a.result
    print(f"2. OADEV+MDEV+TDEV with noise type, EDF and CIs at every tau: ctt.stability_set {a.median:.3f} s "
          f"(min {a.best:.3f}) vs the same from allantools functions {b.median:.3f} s (min {b.best:.3f}): "
          f"ratio ctt/allantools {a.median / b.median:.2f}")
    print(f"   target <= 3 s for ctt: {'met' if a.median <= 3.0 else 'NOT met'} (median)")

    # 3. gap-aware path on gappy data
    rng = np.random.default_rng(7)
    xg = x.copy()
    starts = rng.choice(n - 10, size=max(1, n // 1000 // 5), replace=False)
    for s0 in starts:
        xg[s0:s0 + 5] = np.nan  # 0.1 % of the points, in 5-point gaps
    frac = np.isnan(xg).mean()

    def ctt_gappy():
        return stability.stability_set(xg, rate, taus=taus, kinds=("oadev", "mdev", "tdev"))

    g = _warm(ctt_gappy, args.repeat)
    print(f"3. gap-aware path, {100 * frac:.2f} % missing in {starts.size} gaps: ctt.stability_set {g.median:.3f} s "
          f"(min {g.best:.3f}) vs ctt on the gapless series {a.median:.3f} s: ratio {g.median / a.median:.2f} "
          f"(allantools: no gap-aware estimator, NaN propagates)")

    d = res["oadev"]
    print("tau_s      OADEV      ci_low     ci_high    edf      noise")
    for i in range(0, len(d.tau_s), 3):
        print(f"{d.tau_s[i]:<10g} {d.dev[i]:.3e}  {d.ci_low[i]:.3e}  {d.ci_high[i]:.3e}  "
              f"{d.edf[i]:<8.1f} {d.noise[i]}")


if __name__ == "__main__":
    main()
