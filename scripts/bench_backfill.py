"""Benchmark: reprocessing throughput, days per minute, extrapolated to one pair-year.

Target (DESIGN.md performance budget, 2-core machine): reprocess one pair-year
<= 15 min. Simulates the demo scenario over several days (ctt.simulate), then
runs ``ctt backfill --force`` over them with 1 and 2 local worker processes and
prints the wall time per pair-day and the year it implies (archive writes and
the report refresh included; simulation excluded).
"""

from __future__ import annotations

import pathlib
import re
import sys
import tempfile
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ctt.cli import main as ctt  # noqa: E402
from ctt.simulate import run_scenario  # noqa: E402

N_DAYS = 4


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        tmp = pathlib.Path(tmp)
        text = (ROOT / "data_demo" / "scenario.toml").read_text()
        text = re.sub(r"duration_h = [0-9.]+", f"duration_h = {24.0 * N_DAYS}", text, count=1)
        scn = tmp / "scenario.toml"
        scn.write_text(text)
        t0 = time.perf_counter()
        run_scenario(scn, tmp / "data")
        print(f"simulated {N_DAYS} days of the demo pair in {time.perf_counter() - t0:.1f} s")
        pair = tmp / "data" / "aldr-brkw.toml"
        for jobs in (1, 2):
            t0 = time.perf_counter()
            rc = ctt(["-q", "backfill", "--config", str(pair), "--from", "2021-01-01",
                      "--to", f"2021-01-{N_DAYS:02d}", "--force", "--jobs", str(jobs)])
            dt = time.perf_counter() - t0
            per_day = dt / N_DAYS
            print(f"backfill --jobs {jobs}: {N_DAYS} pair-days in {dt:.1f} s = {per_day:.2f} s/day "
                  f"-> one pair-year ~ {per_day * 365 / 60:.1f} min (target <= 15 min), exit {rc}")


if __name__ == "__main__":
    main()
