"""The day's clock A − clock B, defined once (issue 12): the demo pair run once, its
daily value read back from every output, its type A against the simulator's truth,
the logged cable step estimated at its epoch.

The simulator's truth (``data_demo/truth.csv``, ``truth_steps.csv``) is invented
data, the only kind this project uses as a reference for simulation checks.
"""

import contextlib
import io
import json
import math
import re

import numpy as np
import pandas as pd
import pytest

from ctt import timescales as ts
from ctt.archive import Archive
from ctt.cli import main
from ctt.commands.demo import truth_daily_value

KEYS = ("epoch_utc", "offset_ns", "u_a_ns", "u_b_ns", "u_ns", "definition")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(["-q", "demo", "--out", str(out)]) == 0
    pair = out / "scenario" / "aldr-brkw.toml"
    for fmt in ("csv", "json"):
        assert main(["-q", "export", "--config", str(pair), "--from", "2021-01-01", "--to", "2021-01-01",
                     "--daily", "--format", fmt, "--out", str(out / f"daily.{fmt}")]) == 0
    run = next((out / "runs").glob("*/2021-01-01"))
    return {"out": out, "run": run, "printed": buf.getvalue(),
            "summary": json.loads((run / "summary.json").read_text()),
            "report": json.loads((out / "report.json").read_text()),
            "html": (out / "report.html").read_text(), "pair": pair}


@pytest.mark.slow
def test_the_daily_value_is_the_same_in_every_output(demo):
    dv = demo["summary"]["daily_value"]
    assert set(dv) == set(KEYS)
    # the object is rounded once (0.001 ns) and u combines its two parts (GUM, independent)
    assert dv["u_ns"] == pytest.approx(math.hypot(dv["u_a_ns"], dv["u_b_ns"]), abs=1.5e-3)
    for k in ("offset_ns", "u_a_ns", "u_b_ns", "u_ns"):
        assert dv[k] == round(dv[k], 3)
    # printed summary
    m = re.search(r"daily value, clock A - clock B \(ALDR - BRKW\) at (\S+): ([-\d.]+) ns, u ([\d.]+) ns "
                  r"\(type A ([\d.]+), type B ([\d.]+)", demo["printed"])
    assert m, demo["printed"]
    assert m.group(1) == dv["epoch_utc"]
    assert [float(v) for v in m.groups()[1:]] == [dv["offset_ns"], dv["u_ns"], dv["u_a_ns"], dv["u_b_ns"]]
    # report.json and report.html
    assert demo["report"]["daily_value"] == dv
    assert f"{dv['offset_ns']:.3f} ns at {dv['epoch_utc']}, u {dv['u_ns']:.3f} ns" in demo["html"]
    # the archive
    with Archive(demo["out"] / "archive.sqlite") as arc:
        row = arc.load_daily_values("aldr-brkw").iloc[0].to_dict()
    assert {k: row[k] for k in KEYS} == dv
    # export --daily, CSV and JSON
    csv = pd.read_csv(demo["out"] / "daily.csv").iloc[0].to_dict()
    assert {k: csv[k] for k in KEYS} == dv and csv["date"] == "2021-01-01"
    js = json.loads((demo["out"] / "daily.json").read_text())
    assert js["daily_values"][0]["daily_value"] == dv and js["sign"] == "offset_ns = clock ALDR - clock BRKW"
    # and no other "mean ± u" of the day anywhere
    assert "mean_offset_ns" not in demo["summary"] and "mean_offset_ns" not in demo["report"]
    assert "Mean offset" not in demo["html"] and "offset_ns" not in demo["report"]["drift"]
    assert " mean " not in demo["printed"].split("against the simulated truth")[0]


@pytest.mark.slow
def test_type_a_against_the_simulated_truth(demo):
    dv = demo["summary"]["daily_value"]
    off = pd.read_csv(demo["run"] / "offset.csv")
    truth = pd.read_csv(demo["out"] / "scenario" / "truth.csv")
    est, at_epoch = truth_daily_value(dv, off[off["flag"] == "ok"], truth, "ALDR-BRKW_apparent_ns",
                                      demo["out"] / "scenario" / "truth_steps.csv")
    err = dv["offset_ns"] - est
    print(f"daily value {dv['offset_ns']:.3f} ns, same estimator on the truth {est:.3f} ns: error {err:+.3f} ns; "
          f"type A u {dv['u_a_ns']:.3f} ns; truth at the epoch {at_epoch:.3f} ns")
    # type A describes the measurement's error: the actual error lies within 3 u_a (normal, 99.7 %) ...
    assert abs(err) <= 3 * dv["u_a_ns"]
    # ... and u_a is at most a few times the actual error (before issue 12: 8.1 ns, 30-80 times):
    # bounded by 5 |err| or, should the error be small by chance, by 5 times the white-noise
    # standard error of the day (σ of one point/√N from the points' own scatter about the truth)
    e = off.loc[off["flag"] == "ok", "offset_ns"].to_numpy() - np.interp(
        ts.convert(off.loc[off["flag"] == "ok", "time_gps_ns"].to_numpy(np.int64), "GPS", "UTC").astype(float),
        ts.parse_iso_array(truth["time_utc"].str.rstrip("Z")).astype(float), truth["ALDR-BRKW_apparent_ns"])
    se = np.std(e, ddof=1) / math.sqrt(len(e))
    assert dv["u_a_ns"] <= 5 * max(abs(err), se)
    # the clocks' wander is not in u_a: the true value at the epoch may differ by more
    detail = demo["summary"]["daily_value_detail"]
    assert detail["clock_wander_tdev"]["1 h"]["tau_s"] == 3840.0   # nearest octave τ of 960-s tracks


@pytest.mark.slow
def test_the_cable_step_is_estimated_once_at_its_logged_epoch(demo):
    # data_demo/scenario.toml: +5.0 ns cable change at ALDR at 15:00 UTC, logged, not in the delays
    rep = demo["report"]
    steps = [c for c in rep["changes"] if c["kind"] == "phase step"]
    assert len(steps) == 1
    c = steps[0]
    print(f"cable step {c['size']:+.3f} ± {c['u_size']:.3f} ns at {c['time_utc']} (found at {c['found_time_utc']}, "
          f"window {c['window_s']:.0f} s each side)")
    assert c["time_utc"] == "2021-01-01T15:00:00Z" and c["expected"]
    assert abs(c["size"] - 5.0) <= 0.6                        # the requirement
    assert c["agrees_with_log"] is (abs(c["size"] - 5.0) <= 2 * c["u_size"])
    # the same estimate in the before/after table, the drift model and the daily value's steps
    ba = rep["before_after"][0]["step_at_change_ns"]
    assert (ba["value"], ba["u"]) == (c["size"], c["u_size"])
    assert rep["drift"]["steps_ns"][-1]["value"] == c["size"] and rep["drift"]["fixed_steps"] == 1
    day_steps = demo["summary"]["daily_value_detail"]["steps"]
    assert len(day_steps) == 1 and day_steps[0]["size_ns"] == pytest.approx(c["size"], abs=1e-12)
    assert "+5.16 +- 0.62" in demo["printed"] or f"{c['size']:+.2f} +- {c['u_size']:.2f}" in demo["printed"]
