"""Benchmark: one pair-day through tracks/epochs and common view (invented tables).

2 stations × 2880 epochs (30 s) × 10 satellites, white code noise σ0/sin(el).
Prints the time of each stage, warm: the median of ``--repeat`` calls after a first call
timed apart (cold: imports, caches), and the error against the simulated truth. Against
the target only (DESIGN.md budget share: well under 1 s per pair-day); no other library
does this work.

    python scripts/bench_commonview.py [--repeat 5] [--satellites 10]
"""

from __future__ import annotations

import argparse
import pathlib
import sys

import numpy as np
import pandas as pd

from ctt import commonview as cv
from ctt import tracks
from ctt.timescales import NS_PER_S, convert, from_mjd

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
from benchtools import cold_and_warm  # noqa: E402  (this folder)

MJD = 59215


def station(offset_ns, sats, phase, rng, noise0=0.7, n_ep=2880, step_s=30):
    t0 = int(convert(from_mjd(MJD), "UTC", "GPS"))
    t = t0 + np.arange(n_ep, dtype=np.int64) * step_s * NS_PER_S
    ns = len(sats)
    T = np.repeat(t, ns)
    k = np.tile(np.arange(ns), n_ep).astype(float)
    ts = (T - t0) / 1e9
    el = 10.0 + 35.0 * (1 + np.sin(2 * np.pi * ts / 43_082.0 + 1.3 * k + phase))
    az = np.mod(37.0 * k + 100 * phase + ts / 240.0, 360.0)
    sig = noise0 / np.sin(np.deg2rad(el))
    df = pd.DataFrame({"time": T, "sat": np.tile(np.array(sats, dtype=object), n_ep), "system": "G",
                       "signal": "C1C+C2W", "elevation_deg": el, "azimuth_deg": az,
                       "clock_ns": offset_ns + rng.normal(0, 1, T.size) * sig, "sigma_ns": sig,
                       "troposphere_m": 2.4 / np.sin(np.deg2rad(el)), "ionosphere_m": 0.0, "flag": "ok"})
    df.attrs["reference"] = "broadcast"
    return df


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--satellites", type=int, default=10)
    args = ap.parse_args()
    rng = np.random.default_rng(1)
    sats = [f"G{i:02d}" for i in range(1, args.satellites + 1)]
    a = station(25.0, sats, 0.0, rng)
    b = station(0.0, sats, 0.4, rng)
    print(f"pair-day: 2 stations x {a['time'].nunique()} epochs x {len(sats)} satellites "
          f"({len(a) + len(b)} rows)")
    print(f"warm median of {args.repeat} calls per stage (cold first call apart); against the 1 s target")
    total = {}
    for label, prep in (("epoch (30 s)", tracks.bin_epochs), ("tracks (780 s)", tracks.fit_tracks),
                        ("bins (300 s)", lambda d: tracks.bin_epochs(d, 300))):
        p = cold_and_warm(lambda: (prep(a), prep(b)), args.repeat)
        ta, tb = p.result
        c = cold_and_warm(lambda: cv.common_view(ta, tb), args.repeat)
        res = c.result
        u = cold_and_warm(lambda: cv.uncertainty_budget(res.offset_df), args.repeat)
        tp, tc, tb_, bud = p.warm, c.warm, u.warm, u.result
        o = res.offset_df[res.offset_df["flag"] == "ok"]
        err = o["offset_ns"] - 25.0
        total[label] = tp + tc + tb_
        print(f"{label:>15}: (cold {(p.cold + c.cold + u.cold) * 1e3:7.1f} ms) warm: "
              f"prepare {tp * 1e3:7.1f} ms  common view {tc * 1e3:7.1f} ms  "
              f"budget {tb_ * 1e3:6.1f} ms  total {total[label] * 1e3:7.1f} ms | bins {len(o)}  "
              f"bias {err.mean():+.4f} ns  RMS err {np.sqrt((err ** 2).mean()):.3f} ns  "
              f"RMS u {np.sqrt((o['u_ns'] ** 2).mean()):.3f} ns  day mean {bud['mean_offset_ns']:.4f} "
              f"+- {bud['type_a_ns']:.4f} ns")
    worst = max(total.values())
    print(f"slowest mode, warm {worst * 1e3:.1f} ms = {worst:.2f} of the 1 s target")


if __name__ == "__main__":
    main()
