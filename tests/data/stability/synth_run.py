"""Write a synthetic run folder (offset.csv, satellites.csv, summary.json) for tests.

Invented, reproducible data (fixed generator state): two stations "alpha" and "bravo", white PM of 1.2 ns plus a
little white FM, a frequency offset and drift, a logged 5 ns step (an invented cable
change) and per-satellite differences for GPS and Galileo with a simple sky track.
Used by tests/test_plots.py and tests/test_report.py (loaded by path).
"""

from __future__ import annotations

import hashlib
import json
import pathlib

import numpy as np
import pandas as pd

NS = 1_000_000_000
#: 2026-03-01T00:00:00Z on the UTC calendar count (ns since 1980-01-06)
T0_NS = int((np.datetime64("2026-03-01T00:00:00", "ns") - np.datetime64("1980-01-06T00:00:00", "ns"))
            .astype(np.int64))


def make_offset(days=3.0, step_s=300.0, draw=11, step_at_day=1.5, step_ns=5.0):
    rng = np.random.default_rng(draw)
    n = int(days * 86400 / step_s)
    t = T0_NS + (np.arange(n) * step_s * NS).astype(np.int64)
    ts = (t - t[0]) / 1e9
    x = 12.0 + 3e-14 * 1e9 * ts + 0.5 * (2e-14 / 86400) * 1e9 * ts ** 2
    x += np.cumsum(rng.normal(scale=0.05, size=n))          # white FM
    x += rng.normal(scale=1.2, size=n)                      # white PM
    te = T0_NS + int(step_at_day * 86400 * NS)
    x += step_ns * (t >= te)
    u = np.full(n, 1.3)
    nsat = rng.integers(5, 12, size=n)
    flag = np.array(["ok"] * n, dtype=object)
    flag[rng.choice(n, 6, replace=False)] = "few satellites"
    return t, x, u, nsat, flag, te


def iso(ns):
    return np.datetime_as_string(np.datetime64("1980-01-06T00:00:00", "ns")
                                 + np.asarray(ns, dtype=np.int64).astype("timedelta64[ns]"), unit="s")


def write_run(folder, days=3.0, step_s=300.0, draw=11, with_sats=True):
    folder = pathlib.Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    t, x, u, nsat, flag, te = make_offset(days, step_s, draw)
    mjd = 44244 + (t // (86400 * NS)) + (t % (86400 * NS)) / (86400 * NS)
    off = pd.DataFrame({"time_utc": np.char.add(iso(t).astype(str), "Z"), "mjd_utc": np.round(mjd, 8),
                        "offset_ns": np.round(x, 4), "u_ns": u, "n_sat": nsat, "flag": flag,
                        "extra_column": 1})
    off.to_csv(folder / "offset.csv", index=False)
    if with_sats:
        rng = np.random.default_rng(draw + 1)
        rows = []
        sats = [f"G{k:02d}" for k in (3, 7, 12, 19, 25)] + [f"E{k:02d}" for k in (4, 11, 26)]
        every = max(1, len(t) // 150)
        for i in range(0, len(t), every):
            for j, s in enumerate(sats):
                ph = 2 * np.pi * (i / len(t) * 3 + j / len(sats))
                el_a = 15 + 60 * abs(np.sin(ph))
                az_a = (np.degrees(ph) * 1.3 + 40 * j) % 360
                rows.append((iso(t[i]) + "Z", s, el_a, el_a - 5 * np.cos(ph), az_a, (az_a + 12) % 360,
                             x[i] + rng.normal(scale=2.0 + 20 / el_a), 1.0,
                             "ok" if rng.random() > 0.03 else "outlier"))
        pd.DataFrame(rows, columns=["time_utc", "sat", "elevation_a_deg", "elevation_b_deg",
                                    "azimuth_a_deg", "azimuth_b_deg", "diff_ns", "weight", "flag"]
                     ).to_csv(folder / "satellites.csv", index=False)
    summary = {
        "inputs": [{"path": "alpha0600.26o", "sha256": hashlib.sha256(b"alpha").hexdigest()},
                   {"path": "bravo0600.26o", "sha256": hashlib.sha256(b"bravo").hexdigest()}],
        "config": {"pair": "alpha-bravo", "elevation_mask_deg": 15, "mode": "all-in-view"},
        "version": "0.0-test",
        "counts": {"epochs": int(len(t)), "rejected": int((flag != "ok").sum())},
        "mean_offset_ns": float(np.mean(x)),
        "budget": {"type_a_ns": 0.4, "type_b_ns": 2.1, "total_ns": 2.14,
                   "items": {"receiver delay A": 1.5, "receiver delay B": 1.4, "cable": 0.3}},
        "rejected": {"few satellites": 6},
    }
    (folder / "summary.json").write_text(json.dumps(summary, indent=1))
    return {"step_time_ns": te, "step_ns": 5.0}
