"""Benchmark of the scenario simulator: the demo scenario (2 stations, 1 day at 30 s, GPS + Galileo).

Prints measured times of the forward model and of the file writing, and the
ratio per station-day: one run each, in a fresh process (cold: the first call, with
its imports). No target in DESIGN.md and no baseline library: figures only, to
watch for regressions. Run: ``python scripts/bench_simulate.py``.
"""

from __future__ import annotations

import pathlib
import tempfile
import time

from ctt.simulate import load_scenario, simulate, write_outputs

ROOT = pathlib.Path(__file__).resolve().parents[1]


def main() -> None:
    scn = load_scenario(ROOT / "data_demo" / "scenario.toml")
    t0 = time.perf_counter()
    res = simulate(scn)
    t1 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        files = write_outputs(res, tmp)
        t2 = time.perf_counter()
        size = sum(p.stat().st_size for v in files.values() for p in v)
    n_st = len(res.stations)
    n_obs = sum(int(sum((v == v).sum() for v in r.obs.values())) for r in res.stations.values())
    print(f"scenario {scn.name}: {n_st} stations x {scn.n_epochs} epochs, {n_obs} observation values")
    print(f"forward model   {t1 - t0:6.2f} s  ({(t1 - t0) / n_st:.2f} s per station-day)")
    print(f"writing files   {t2 - t1:6.2f} s  ({(t2 - t1) / n_st:.2f} s per station-day, {size / 1e6:.2f} MB)")
    print(f"total           {t2 - t0:6.2f} s  (one cold run each; no target or baseline: figures only)")


if __name__ == "__main__":
    main()
