"""Benchmark: one pair-day from files to offset.csv (see bench_measure.py for one station).

Target (DESIGN.md performance budget, 2-core machine): one pair-day, files to
offset series <= 3 s, against that target only (no other library does this work). Uses
the demo scenario (GPS + Galileo, 24 h at 30 s) and, when present, the real pair
ZIMM-CN00 of ../shared/data/real-2021-001 (GPS). Prints the first call (cold) and the
median of 3 calls after it (warm).
"""

from __future__ import annotations

import pathlib
import sys
import tempfile

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "scripts"))

from bench_measure import timed  # noqa: E402  (same folder)
from ctt.config import load_station  # noqa: E402
from ctt.pipeline import PairInputs, PairOptions, pair_day_from_config, run_pair, write_pair_outputs  # noqa: E402


def main() -> None:
    inputs, a, b, opts = pair_day_from_config(ROOT / "data_demo" / "aldr-brkw.toml", "2021-01-01")
    with tempfile.TemporaryDirectory() as tmp:
        for mode in ("tracks", "epochs"):
            import dataclasses

            o = dataclasses.replace(opts, mode=mode)
            how, _, _ = timed(lambda: write_pair_outputs(run_pair(inputs, a, b, o), tmp))
            print(f"pair-day, demo, files -> offset.csv ({mode}): {how} (target <= 3 s)")
        real = ROOT.parent / "shared" / "data" / "real-2021-001"
        if real.is_dir():
            st = ROOT / "tests" / "data" / "stations"
            ri = PairInputs(obs_a=str(real / "zimm0010.21o.gz"), obs_b=str(real / "cn000010.21o.gz"),
                            nav=str(real / "brdc0010.21n"))
            sa, sb = load_station(st / "zimm.toml"), load_station(st / "cn00.toml")
            for mode in ("tracks", "epochs"):
                how, _, _ = timed(lambda: write_pair_outputs(run_pair(ri, sa, sb, PairOptions(mode=mode)), tmp))
                print(f"pair-day, real ZIMM-CN00, files -> offset.csv ({mode}): {how} (target <= 3 s)")


if __name__ == "__main__":
    main()
