"""Benchmark of the navigation reader (prints measured figures, asserts nothing).

Writes a synthetic merged daily RINEX 3.04 mixed navigation file of realistic
size into a temporary folder: 32 GPS satellites every 2 h, 24 GLONASS every
30 min, 24 Galileo every 20 min in both I/NAV and F/NAV, 45 BeiDou every hour
(6 072 records, 3.2 MB; merged daily multi-GNSS files hold some thousands). The records are copies of the real ones in
tests/data/nav/mixed_v304.rnx with the satellite and epoch changed, which is
enough for timing (the reader does not check orbits). Then times
``read_nav`` on it (the cold first call apart, then the median of ``--runs`` warm
calls; against the target) and, if present, on the real GPS file
``../shared/data/real-2021-001/brdc0010.21n``, and georinex on the latter for
a ratio: both the same way, the cold first call apart (georinex's import apart
again) and the median of ``--runs`` warm calls after it, warm compared with warm.

Target (issue): the merged mixed daily file loads in <= 2 s. The machine is
shared, so figures are noisy; the script reports what it saw.

    python scripts/bench_nav.py [--runs 5] [--keep DIR] [--no-georinex]
"""

from __future__ import annotations

import argparse
import pathlib
import sys
import tempfile
import time
import warnings

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from ctt.formats.rinex_nav import read_nav  # noqa: E402
from benchtools import cold_and_warm  # noqa: E402  (this folder)

TEMPLATE = ROOT / "tests" / "data" / "nav" / "mixed_v304.rnx"
REAL = ROOT.parent / "shared" / "data" / "real-2021-001" / "brdc0010.21n"


def _templates():
    lines = TEMPLATE.read_text().splitlines()
    end = next(i for i, ln in enumerate(lines) if "END OF HEADER" in ln)
    header, body = lines[: end + 1], lines[end + 1:]
    recs, cur = {}, None
    for ln in body:
        if ln[:1].strip():
            cur = [ln]
            key = ln[0] if ln[0] != "E" else ("EF" if "E24" in ln and not recs.get("EF") else "EI")
            recs.setdefault(key, cur)
        elif cur is not None:
            cur.append(ln)
    return header, recs


def synthetic_file(path: pathlib.Path) -> int:
    header, recs = _templates()
    out = list(header)
    n = 0

    def emit(key, sat, hh, mm):
        nonlocal n
        rec = recs[key]
        first = f"{sat} 2021 01 01 {hh:02d} {mm:02d} 00" + rec[0][23:]
        out.append(first)
        out.extend(rec[1:])
        n += 1

    for hh in range(0, 24, 2):
        for p in range(1, 33):
            emit("G", f"G{p:02d}", hh, 0)
    for k in range(48):
        for p in range(1, 25):
            emit("R", f"R{p:02d}", k // 2, 45 if k % 2 else 15)
    for k in range(72):
        for p in range(1, 25):
            emit("EI", f"E{p:02d}", k // 3, 20 * (k % 3))
            emit("EF", f"E{p:02d}", k // 3, 20 * (k % 3))
    for hh in range(24):
        for p in range(1, 46):
            emit("C", f"C{p:02d}", hh, 0)
    path.write_text("\n".join(out) + "\n")
    return n


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--keep", type=pathlib.Path, default=None, help="write the synthetic file here and keep it")
    ap.add_argument("--no-georinex", action="store_true")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        folder = args.keep or pathlib.Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        path = folder / "SYNT00XXX_R_20210010000_01D_MN.rnx"
        n = synthetic_file(path)
        size = path.stat().st_size / 1e6
        cw = cold_and_warm(lambda: read_nav(path), args.runs)
        nav = cw.result
        counts = {k: len(v) for k, v in nav.records.items()}
        print(f"synthetic mixed RINEX 3.04 nav: {n} records, {size:.2f} MB, per system {counts}, "
              f"dropped {len(nav.dropped)}")
        print(f"read_nav: cold first call {cw.cold:.3f} s; warm median of {cw.runs} {cw.warm:.3f} s "
              f"(target <= 2 s; {2.0 / cw.warm:.0f}x margin warm, {2.0 / cw.cold:.0f}x cold)")
    if REAL.is_file():
        # like for like: each tool's cold first call on this file (for georinex including its
        # import, timed apart) and the median of warm calls after it
        cw = cold_and_warm(lambda: read_nav(REAL), args.runs)
        print(f"read_nav {REAL.name} (real, GPS, {len(cw.result.records['G'])} records): cold first call "
              f"{cw.cold * 1e3:.1f} ms, warm median of {cw.runs} {cw.warm * 1e3:.1f} ms")
        if not args.no_georinex:
            t0 = time.perf_counter()
            try:
                import georinex
            except ImportError:
                print("georinex not installed: no ratio")
            else:
                t_imp = time.perf_counter() - t0
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    gw = cold_and_warm(lambda: georinex.load(REAL), args.runs)  # the same N as ctt's
                print(f"georinex.load {REAL.name}: import {t_imp:.2f} s, cold first call {gw.cold:.2f} s, "
                      f"warm median of {gw.runs} {gw.warm:.2f} s")
                print(f"ratio georinex/ctt: warm medians {gw.warm / cw.warm:.1f}x; cold first calls "
                      f"{gw.cold / cw.cold:.1f}x (import of georinex not included; with it "
                      f"{(gw.cold + t_imp) / cw.cold:.1f}x)")
    else:
        print(f"{REAL} not found: real-file figures skipped")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
