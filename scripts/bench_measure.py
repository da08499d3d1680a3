"""Benchmark: one 24 h, 30 s station-day through the measurement model.

Target (DESIGN.md performance budget, 2-core machine): <= 2 s. Uses the demo
station ALDR (GPS + Galileo) and, when present, the real ZIMM day of
../shared/data/real-2021-001 (GPS, iono-free and single, broadcast and IGS
precise orbits). Reading the files is timed separately. Each figure: the first call
timed apart (cold) and the median of 3 calls after it (warm); against the target only
(no other library does this work).
"""

from __future__ import annotations

import pathlib
import sys

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ctt.config import load_station  # noqa: E402
from ctt.measure import MeasureOptions, measure_station  # noqa: E402
from ctt.orbits import BroadcastOrbits  # noqa: E402
from ctt.pipeline import pair_day_from_config  # noqa: E402
from ctt.formats.sp3 import read_sp3  # noqa: E402
from ctt.orbits import PreciseOrbits  # noqa: E402
from ctt.formats.rinex_nav import read_nav  # noqa: E402
from ctt.formats.rinex_obs import read_obs  # noqa: E402
from benchtools import cold_and_warm  # noqa: E402  (this folder)


def timed(fn, n=3):
    """(text 'cold X s, warm median of n Y s', warm median s, result) (scripts/benchtools.py)."""
    t = cold_and_warm(fn, n)
    return f"cold {t.cold:.2f} s, warm median of {t.runs} {t.warm:.2f} s", t.warm, t.result


def main() -> None:
    inputs, a, _, opts = pair_day_from_config(ROOT / "data_demo" / "aldr-brkw.toml", "2021-01-01")
    how_read, _, obs = timed(lambda: read_obs(inputs.obs_a))
    nav = read_nav(inputs.nav)
    orb = BroadcastOrbits(nav)
    how, _, day = timed(lambda: measure_station(obs, orb, a, opts.measure, nav_header=nav.header))
    print(f"demo ALDR, GPS+Galileo, iono-free: {len(day.table)} rows; {how} (target <= 2 s); "
          f"reading the file {how_read}")
    real = ROOT.parent / "shared" / "data" / "real-2021-001"
    if not real.is_dir():
        print("real data not present: skipped the ZIMM figures")
        return
    st = load_station(ROOT / "tests" / "data" / "stations" / "zimm.toml")
    obs = read_obs(real / "zimm0010.21o.gz")
    nav = read_nav(real / "brdc0010.21n")
    bo = BroadcastOrbits(nav)
    po = PreciseOrbits(read_sp3(real / "igs21385.sp3"))
    for label, orbits, mo in (("broadcast, iono-free", bo, MeasureOptions()),
                              ("broadcast, single + Klobuchar", bo, MeasureOptions(signals="single")),
                              ("IGS final, iono-free", po, MeasureOptions()),
                              ("IGS final, iono-free, smoothing 600 s", po, MeasureOptions(smoothing_s=600))):
        how, _, day = timed(lambda: measure_station(obs, orbits, st, mo, nav_header=nav.header))
        print(f"real ZIMM, {label}: {len(day.table)} rows; {how} (target <= 2 s)")


if __name__ == "__main__":
    main()
