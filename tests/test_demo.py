"""`ctt demo` (the README's main-job command) end to end on the invented demo scenario."""

import json
import pathlib

import numpy as np
import pandas as pd
import pytest

from ctt import timescales as ts
from ctt.cli import main
from ctt.simulate import load_scenario, simulate
from simulated_budget import point_budget, statistics

DEMO = pathlib.Path(__file__).resolve().parents[1] / "data_demo"


@pytest.mark.slow
def test_demo_runs_and_recovers_the_truth(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    captured = capsys.readouterr()
    out = captured.out
    # the deliberate refusal (event 3 after the series) and the flag of event 2 (after the cable
    # change the demo's station file does not enter) are information, not warnings
    assert "refused, as the demo intends" in out and "note (intended in the demo)" in out
    assert "events refused" not in captured.err and "no delay set" not in captured.err
    # the report's figures as PNG files beside it
    pngs = sorted((tmp_path / "report_figures").glob("*.png"))
    assert len(pngs) >= 4 and all(p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in pngs)
    assert "against the simulated truth" in out
    run = next((tmp_path / "runs").glob("*/2021-01-01"))
    for name in ("offset.csv", "satellites.csv", "summary.json"):
        assert (run / name).is_file()
    assert (tmp_path / "report.html").stat().st_size > 50_000  # figures embedded
    rep = json.loads((tmp_path / "report.json").read_text())
    # the logged +5 ns cable change at ALDR (data_demo/scenario.toml) is found where it was made
    steps = [c for c in rep["changes"] if c["kind"] == "phase step"]
    assert len(steps) >= 1 and steps[0]["expected"]
    assert steps[0]["time_utc"].startswith("2021-01-01T15:")
    # bias and RMS against the truth, as printed (measured -0.107 ns and 0.511 ns over 86 tracks);
    # their bounds come from the configured noise below
    line = [ln for ln in out.splitlines() if "against the simulated truth" in ln][0]
    bias = float(line.split("bias")[1].split("ns")[0])
    rms = float(line.split("RMS")[1].split("ns")[0])
    off = pd.read_csv(run / "offset.csv")
    ok = off[off["flag"] == "ok"]
    truth = pd.read_csv(tmp_path / "scenario" / "truth.csv")
    tg = ts.parse_iso_array(truth["time_gps"]).astype(float)
    err = ok["offset_ns"].to_numpy() - np.interp(ok["time_gps_ns"].to_numpy(float), tg, truth["ALDR-BRKW_apparent_ns"])
    assert bias == pytest.approx(err.mean(), abs=6e-4) and rms == pytest.approx(np.sqrt(np.mean(err ** 2)), abs=6e-4)
    # What the scenario's configuration says the error should be (simulation truth, data_demo/scenario.toml;
    # tests/simulated_budget.py): the code noise (0.3 m / sin el at both stations) propagated through the
    # iono-free combination, the track fits and ctt's weights gives each track's variance; the multipath
    # tables (0.4 m and 0.3 m) and the line's miss of the true clocks inside each 13-minute track are
    # known from the simulation and taken out (0.09 ns and 0.25 ns RMS). Not in the budget: the
    # wet-delay random walk, the 1-m orbit error and the estimated Galileo-GPS bias; their share is
    # in what is measured (RMS 0.385 ns against the predicted 0.351: ~0.16 ns in quadrature).
    res = simulate(load_scenario(DEMO / "scenario.toml"))  # the demo's files (test_demo_regenerates_identically)
    b = point_budget(res, pd.read_csv(run / "satellites.csv"), ("ALDR", "BRKW"), "iono-free", "tracks")
    b = b.reindex(ok["time_gps_ns"].to_numpy())
    r = err - b["mp_ns"].to_numpy() - b["clock_ns"].to_numpy()
    bound, chi2, lo, hi = statistics(r, b["var_ns2"].to_numpy(), "demo against its truth")
    assert r.size >= 80
    # the bias within 3.29 standard errors of the mean (two-sided 99.9 %, normal; independent
    # tracks): measured -0.082 ns, bound 0.125 ns
    assert abs(r.mean()) <= bound
    # the scatter: Σ r²/var within the chi-square(n) 0.05-99.95 % range; measured 1.27 n in [0.57 n, 1.58 n]
    assert lo <= chi2 <= hi
    ev = pd.read_csv(tmp_path / "events_b_on_a.csv")
    assert list(ev["status"]) == ["ok", "ok", "refused"]
