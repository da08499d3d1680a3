"""Benchmark: ``ctt.ppp.run_ppp`` on one real station-day (30 s, GPS).

Reads BRUS 2011-10-10 (real-2011-283, ../shared/data) with the IGS final orbits of three days
and the day's 5-min clocks, then times the PPP itself (model, slips, batch estimation with
screening) and the whole job including reading the files. Target (issue 11): one
station-day <= 5 s on 2 cores. Then the pair-day BRUS − CAGZ of `ctt pair --mode ppp`
(target <= 10 s). Against those targets only (no baseline library). Each figure: the
first call (cold) apart, then the median of the warm calls after it, with the process's
CPU time per warm call beside the wall time.

    python scripts/bench_ppp.py [--runs 2]
"""

from __future__ import annotations

import pathlib
import sys
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))

from benchtools import timed  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
DATA = ROOT.parent / "shared" / "data" / "real-2011-283"

STATION = """[station]
id = "BRUS"
name = "BRUS (real open data)"
elevation_mask_deg = 7.0
[station.position]
x_m = 4027894.0130
y_m = 307045.5980
z_m = 4919474.9120
sigma_m = 1.0
frame = "RINEX header approximate position"
epoch = 2011.8
is_marker = true
[station.antenna]
type = "ASH701945B_M    NONE"
delta_h_m = 3.9702
delta_e_m = 0.0
delta_n_m = 0.0
[[delays]]
valid_from = 2010-01-01T00:00:00Z
receiver_ns = { C1W = 0.0, C2W = 0.0 }
u_receiver_ns = 1.0
cable_ns = 0.0
u_cable_ns = 1.0
reference_ns = 0.0
u_reference_ns = 1.0
"""


def _cold_warm_cpu(fn, runs):
    """(cold first call s, Timing of ``runs`` warm calls, CPU s per warm call) of ``fn``."""
    t0 = time.perf_counter()
    fn()
    cold = time.perf_counter() - t0
    c0 = time.process_time()
    warm = timed(fn, runs)
    return cold, warm, (time.process_time() - c0) / runs


def main(argv=None) -> int:
    import argparse
    import tempfile

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=2, help="warm calls after the cold one (median)")
    runs = max(1, ap.parse_args(argv).runs)

    from ctt.config import load_station
    from ctt.formats.rinex_obs import read_obs
    from ctt.pipeline import PairInputs, load_orbits, ppp_files
    from ctt.ppp import PPPOptions, run_ppp

    if not DATA.is_dir():
        print(f"no data at {DATA}")
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        st_path = pathlib.Path(tmp) / "brus.toml"
        st_path.write_text(STATION)
        station = load_station(st_path)
        sp3 = [DATA / f"igs1657{d}.sp3" for d in (0, 1, 2)]
        clk = [DATA / "igs16571.clk"]
        obs = read_obs(DATA / "brus2830.11o.gz", systems=("G",))
        orbits = load_orbits(PairInputs(obs_a=None, obs_b=None, sp3=tuple(map(str, sp3)), clk=tuple(map(str, clk)),
                                        antex=str(DATA / "igs08_1648.atx.gz")), "precise")[0]
        cold_core, core, cpu_core = _cold_warm_cpu(lambda: run_ppp(obs, orbits, station, PPPOptions()), runs)
        cold_whole, whole, cpu_whole = _cold_warm_cpu(
            lambda: ppp_files(DATA / "brus2830.11o.gz", station, sp3=sp3, clk=clk,
                              antex=DATA / "igs08_1648.atx.gz", out_dir=pathlib.Path(tmp) / "out"), runs)
    n_obs = int(core.result.summary["n_code_used"] + core.result.summary["n_phase_used"])
    print(f"run_ppp, one station-day (2880 epochs, {n_obs} code+phase values): cold first call {cold_core:.2f} s; "
          f"warm median of {runs} {core.median:.2f} s, best {core.best:.2f} s (CPU {cpu_core:.2f} s per call)")
    print(f"whole job (read obs, products, PPP, write outputs): cold {cold_whole:.2f} s; warm median of {runs} "
          f"{whole.median:.2f} s, best {whole.best:.2f} s (CPU {cpu_whole:.2f} s); target 5 s -> ratio "
          f"{whole.median / 5.0:.2f} warm")
    print("(wall times on a shared machine include waiting for the CPU; the CPU time is the process's own)")
    pair_day(runs)
    return 0


def pair_day(runs: int = 2) -> None:
    """`ctt pair --mode ppp` BRUS − CAGZ, the whole pair-day: read both observation files and the
    products (three SP3 days, the clock file, ANTEX), both PPPs, the difference, the budget and the
    three output files. Target (issue 11): a pair-day <= 10 s on 2 cores."""
    import tempfile

    from ctt.config import load_station
    from ctt.pipeline import PairInputs, PairOptions, run_pair, write_pair_outputs

    cagz = (STATION.replace("BRUS", "CAGZ").replace("4027894.0130", "4893378.7999")
            .replace("307045.5980", "772650.4734").replace("4919474.9120", "4004179.0402")
            .replace("ASH701945B_M    NONE", "JPSREGANT_DD_E  NONE").replace("3.9702", "0.0945"))
    with tempfile.TemporaryDirectory() as tmp:
        tmp = pathlib.Path(tmp)
        (tmp / "brus.toml").write_text(STATION)
        (tmp / "cagz.toml").write_text(cagz)
        a, b = load_station(tmp / "brus.toml"), load_station(tmp / "cagz.toml")
        inputs = PairInputs(obs_a=str(DATA / "brus2830.11o.gz"), obs_b=str(DATA / "cagz2830.11d"),
                            sp3=tuple(str(DATA / f"igs1657{d}.sp3") for d in (0, 1, 2)),
                            clk=str(DATA / "igs16571.clk"), antex=str(DATA / "igs08_1648.atx.gz"))

        def job():
            res = run_pair(inputs, a, b, PairOptions(mode="ppp"))
            write_pair_outputs(res, tmp / "out")
            return res

        cold, t, cpu = _cold_warm_cpu(job, runs)
    print(f"pair-day BRUS-CAGZ, mode ppp (read both files and the products, two PPPs, A - B, budget, "
          f"outputs; {len(t.result.offset)} points): cold first call {cold:.2f} s; warm median of {runs} "
          f"{t.median:.2f} s, best {t.best:.2f} s; target 10 s -> ratio {t.median / 10.0:.2f} warm; CPU time "
          f"of this process per warm run {cpu:.2f} s (the wall figure on a loaded machine)")


if __name__ == "__main__":
    raise SystemExit(main())
