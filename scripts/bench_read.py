"""Benchmark of the RINEX observation reader (prints measured figures, asserts nothing).

Writes a synthetic 24 h, 30 s, RINEX 3.04 file with 22 satellites (12 GPS,
10 Galileo) x 8 observation types (about 8 MB) into a temporary folder,
then times

* ``ctt.formats.rinex_obs.read_obs`` on the whole day: the first call (cold) apart,
  then the median of ``--runs`` warm calls; against the target,
* a 3-hour slice of the same file read by ctt and by ``georinex.load`` (the
  reference reader), both the same way: the cold first call apart (georinex's
  import apart again), then the median of ``--ref-runs`` warm calls each; the ratio
  compares warm with warm and cold with cold.

Targets (DESIGN.md performance budget): day file <= 0.5 s; georinex/ctt >= 200.
The machine is shared, so figures are noisy; the script reports what it saw.

    python scripts/bench_read.py [--runs 5] [--keep DIR] [--no-georinex]
"""

from __future__ import annotations

import argparse
import pathlib
import sys
import tempfile
import time
import warnings

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[1]))

from ctt.formats.rinex_obs import read_obs  # noqa: E402
from benchtools import cold_and_warm  # noqa: E402  (this folder)

GPS_TYPES = "C1C L1C D1C S1C C2W L2W D2W S2W".split()
GAL_TYPES = "C1C L1C D1C S1C C5Q L5Q D5Q S5Q".split()
GPS_SATS = [f"G{p:02d}" for p in (1, 3, 5, 7, 8, 10, 13, 15, 18, 21, 24, 30)]
GAL_SATS = [f"E{p:02d}" for p in (1, 3, 5, 8, 11, 13, 21, 24, 26, 33)]
# wavelengths (m) of L1/E1, L2, E5a: c / f (f from the signal ICDs, common practice)
C = 299_792_458.0
LAM = {"1": C / 1575.42e6, "2": C / 1227.60e6, "5": C / 1176.45e6}


def _hl(body: str, label: str) -> str:
    return f"{body:<60}{label}\n"


def write_rinex3(path: pathlib.Path, *, stream: int = 1, hours: float = 24.0, interval_s: int = 30) -> None:
    """A RINEX 3.04 observation file of plausible (not physical) values.

    The same ``stream`` number of numpy's generator gives the same file."""
    rng = np.random.default_rng(stream)
    n_ep = int(hours * 3600 / interval_s)
    sats = GPS_SATS + GAL_SATS
    types = {"G": GPS_TYPES, "E": GAL_TYPES}
    out = [
        _hl("     3.04           OBSERVATION DATA    M", "RINEX VERSION / TYPE"),
        _hl("bench_read.py       Example Lab         20210101 000000 UTC", "PGM / RUN BY / DATE"),
        _hl("BNCH", "MARKER NAME"),
        _hl("BNCH-0001", "MARKER NUMBER"),
        _hl("GEODETIC", "MARKER TYPE"),
        _hl("Operator            Example Time Lab", "OBSERVER / AGENCY"),
        _hl("RX0001              EXAMPLE RECEIVER    1.0", "REC # / TYPE / VERS"),
        _hl("AN0001              EXAMPLEANT      NONE", "ANT # / TYPE"),
        _hl("  4000000.0000  1000000.0000  4800000.0000", "APPROX POSITION XYZ"),
        _hl("        0.0000        0.0000        0.0000", "ANTENNA: DELTA H/E/N"),
    ]
    for s, t in types.items():
        out.append(_hl(f"{s}  {len(t):3d} " + " ".join(t), "SYS / # / OBS TYPES"))
    out += [
        _hl("DBHZ", "SIGNAL STRENGTH UNIT"),
        _hl(f"{interval_s:10.3f}", "INTERVAL"),
        _hl("  2021     1     1     0     0    0.0000000     GPS", "TIME OF FIRST OBS"),
        _hl("", "END OF HEADER"),
    ]
    n_s = len(sats)
    # ranges drift smoothly; a few values are blank, some LLI set
    rho = rng.uniform(2.0e7, 2.6e7, n_s)[None, :] + np.cumsum(rng.normal(0, 20, (n_ep, n_s)), axis=0)
    lines = []
    for e in range(n_ep):
        sec = e * interval_s
        hh, mm, ss = sec // 3600, (sec // 60) % 60, sec % 60
        lines.append(f"> 2021 01 01 {hh:02d} {mm:02d} {ss:10.7f}  0{n_s:3d}\n")
        noise = rng.normal(0, 1, (n_s, 8))
        blank = rng.random((n_s, 8)) < 0.02
        for j, sv in enumerate(sats):
            r = rho[e, j]
            b2 = "2" if sv[0] == "G" else "5"
            vals = (r + noise[j, 0], r / LAM["1"], noise[j, 1] * 1000, 45 + noise[j, 2] * 3,
                    r + 3 + noise[j, 3], r / LAM[b2], noise[j, 4] * 800, 40 + noise[j, 5] * 3)
            parts = [sv]
            for k, v in enumerate(vals):
                if blank[j, k]:
                    parts.append(" " * 16)
                    continue
                lli = "1" if (k in (1, 5) and noise[j, 6] > 2.5) else " "
                ssi = str(min(9, max(1, int(vals[3 if k < 4 else 7] / 6)))) if k % 4 != 3 else " "
                parts.append(f"{v:14.3f}{lli}{ssi}")
            lines.append("".join(parts).rstrip() + "\n")
    path.write_text("".join(out) + "".join(lines))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5, help="warm calls on the day file (median)")
    ap.add_argument("--ref-runs", type=int, default=2, help="warm calls on the 3 h slice, each reader (median)")
    ap.add_argument("--keep", type=pathlib.Path, help="write the files here and keep them")
    ap.add_argument("--no-georinex", action="store_true", help="skip the reference reader")
    args = ap.parse_args(argv)
    tmp = tempfile.TemporaryDirectory() if args.keep is None else None
    folder = args.keep or pathlib.Path(tmp.name)
    folder.mkdir(parents=True, exist_ok=True)
    day = folder / "BNCH00XXX_R_20210010000_01D_30S_MO.rnx"
    part = folder / "BNCH00XXX_R_20210010000_03H_30S_MO.rnx"
    t0 = time.perf_counter()
    write_rinex3(day, stream=1)
    write_rinex3(part, stream=1, hours=3)
    print(f"wrote {day.name}: {day.stat().st_size / 1e6:.2f} MB, and the 3 h slice "
          f"{part.stat().st_size / 1e6:.2f} MB in {time.perf_counter() - t0:.1f} s")

    d = read_obs(day)
    print(f"ctt day file: {len(d.time_ns)} epochs x {len(d.sats)} satellites, {len(d.obs)} codes")
    cd = cold_and_warm(lambda: read_obs(day), args.runs)
    print(f"ctt read_obs, day file : warm median of {cd.runs} {cd.warm:.3f} s (cold first call "
          f"{cd.cold:.3f} s); target <= 0.5 s")
    cp = cold_and_warm(lambda: read_obs(part), args.ref_runs)
    print(f"ctt read_obs, 3 h slice: warm median of {cp.runs} {cp.warm:.4f} s (cold first call {cp.cold:.4f} s)")
    if not args.no_georinex:
        t0 = time.perf_counter()
        import georinex

        t_imp = time.perf_counter() - t0
        warnings.simplefilter("ignore")
        gr = cold_and_warm(lambda: georinex.load(part), args.ref_runs)
        g = gr.result
        print(f"georinex.load, 3 h slice: warm median of {gr.runs} {gr.warm:.2f} s (cold first call "
              f"{gr.cold:.2f} s, import {t_imp:.2f} s apart; {g.sizes['time']} epochs)")
        ours = cp.result.to_xarray().sel(sv=g.sv.values)
        same = all(np.array_equal(ours[c].values, g[c].values, equal_nan=True) for c in g.data_vars)
        print(f"values identical to georinex on the slice: {same}")
        print(f"ratio georinex / ctt on the 3 h slice: warm {gr.warm / cp.warm:.0f}, cold "
              f"{gr.cold / cp.cold:.0f} (target >= 200)")
        print(f"georinex day file estimate (8 x warm slice): ~{8 * gr.warm:.0f} s")
    if tmp is not None:
        tmp.cleanup()
    return 0


if __name__ == "__main__":
    sys.exit(main())
