"""``ctt simulate --scenario SCENARIO.toml --out DIR``: write a synthetic scenario.

Writes RINEX 3.04 observation files, a RINEX 3.04 navigation file, RINEX 2.11
meteorological files, station and pair TOML files and the truth tables
(``truth.csv``, ``truth_steps.csv``) into DIR. The scenario format is
described in :mod:`ctt.simulate`.
"""

from __future__ import annotations

import logging
import time

log = logging.getLogger("ctt.simulate")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "simulate",
        help="write RINEX files and truth tables of a synthetic scenario",
        description="Simulate the stations of a scenario file (clocks, satellites, propagation, "
        "receivers) and write RINEX observation/navigation/met files, station and pair files, "
        "truth.csv and truth_steps.csv.",
    )
    p.add_argument("--scenario", required=True, help="scenario TOML file (format: see ctt.simulate)")
    p.add_argument("--out", required=True, help="output folder (created if absent)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..simulate import run_scenario

    t0 = time.perf_counter()
    res = run_scenario(args.scenario, args.out)
    n = sum(len(v) for v in res.files.values())
    log.info("scenario %s: %d stations, %d epochs, %d files written to %s in %.1f s",
             res.scenario.name, len(res.stations), res.scenario.n_epochs, n, args.out,
             time.perf_counter() - t0)
    for kind, paths in res.files.items():
        for p in paths:
            print(f"{kind:8s} {p}")
    return 0
