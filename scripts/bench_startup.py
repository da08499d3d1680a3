"""Start-up time of the command line (prints measured figures, asserts nothing).

``ctt --version`` and ``ctt --help`` must answer in at most 0.3 s (median of
5 runs, issue target): the command modules import numpy, pandas, matplotlib
and the processing modules only inside the functions that run a command.
Each run is a fresh process; the bare interpreter start (``python -c pass``)
is timed too, as the floor nothing in ctt can remove. The machine is shared,
so figures are noisy; the script reports what it saw.

    python scripts/bench_startup.py [--runs 5]
"""

from __future__ import annotations

import argparse
import os
import pathlib
import shutil
import subprocess
import sys

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
from benchtools import timed  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
TARGET_S = 0.3


def _command() -> list[str]:
    """The installed ``ctt`` script beside this interpreter, else ``python -m ctt``."""
    script = pathlib.Path(sys.executable).with_name("ctt")
    if script.is_file():
        return [str(script)]
    found = shutil.which("ctt")
    return [found] if found else [sys.executable, "-m", "ctt"]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5)
    args = ap.parse_args()
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    cmd = _command()

    def run(argv):
        return lambda: subprocess.run(argv, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                      check=True)

    floor = timed(run([sys.executable, "-c", "pass"]), args.runs)
    print(f"command: {' '.join(cmd)}; each run a fresh process (cold), median of {args.runs}; "
          f"against the {TARGET_S} s target and the bare interpreter")
    print(f"python -c pass     median {floor.median:.3f} s (best {floor.best:.3f} s)  [interpreter floor]")
    for extra in (["--version"], ["--help"]):
        t = timed(run(cmd + extra), args.runs)
        verdict = "meets" if t.median <= TARGET_S else "MISSES"
        print(f"ctt {extra[0]:<14} median {t.median:.3f} s (best {t.best:.3f} s); "
              f"{t.median / floor.median:.1f} x the floor; {verdict} the {TARGET_S} s target")


if __name__ == "__main__":
    main()
