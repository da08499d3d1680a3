"""Mode 'ppp' of the pair processing: A − B from two PPP clock series, day boundaries, pair files.

These check the wiring (ctt.pipeline) on series whose difference is known by
construction (arithmetic); the estimator itself is checked against the
simulator's truth in tests/test_against_simulation_ppp.py and against the IGS
station clocks in tests/test_against_igs_station_clocks_pair.py.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ctt import timescales as ts
from ctt.errors import ConfigError
from ctt.pipeline import day_boundary, ppp_difference

T0 = ts.parse_iso("2021-01-01T00:00:00")


def _clock(t, value, u, n, flag="ok"):
    return pd.DataFrame({"time_gps_ns": t, "clock_ns": value, "u_ns": u, "n_sat": n, "flag": flag})


def test_difference_on_common_epochs_with_rss_uncertainty():
    ta = T0 + 30 * ts.NS_PER_S * np.arange(0, 100)
    tb = T0 + 30 * ts.NS_PER_S * np.arange(10, 120)
    a = _clock(ta, 100.0 + 0.01 * np.arange(100), 0.03, 9)
    b = _clock(tb, -50.0 + 0.02 * np.arange(10, 120), 0.04, np.arange(10, 120) % 7 + 5)
    b.loc[b.index[5], "flag"] = "few_satellites"
    off = ppp_difference(a, b)
    assert off["time"].tolist() == ta[10:].tolist()  # common epochs only
    k = np.arange(10, 100)
    np.testing.assert_allclose(off["offset_ns"], 150.0 + 0.01 * k - 0.02 * k, rtol=0, atol=1e-9)  # A − B
    np.testing.assert_allclose(off["u_ns"], 0.05, rtol=0, atol=1e-12)  # √(0.03² + 0.04²)
    assert off["flag"].iloc[5] == "B:few_satellites" and (off["flag"] == "ok").sum() == 89
    assert (off["n_sat"] == np.minimum(9, k % 7 + 5)).all()
    assert off["time_utc"].iloc[0].startswith("2021-01-01T00:04:42")  # 00:05:00 GPS; GPS − UTC = 18 s in 2021


def test_day_boundary_jump_is_the_discontinuity_not_the_rate():
    """A clock running at −3.1e-7 (a free receiver oscillator: −9.3 µs per 30 s) with a 0.4 ns step at
    midnight: the boundary jump is the step (arithmetic: both lines are exact)."""
    rate = -3.1e-7 * 1e9  # ns/s
    tp = T0 - 30 * ts.NS_PER_S * np.arange(12, 0, -1)
    prev = pd.DataFrame({"time_utc_ns": ts.convert(tp, "GPS", "UTC"), "offset_ns": 10.0 + rate * (tp - T0) / 1e9,
                         "u_ns": 0.03, "flag": "ok", "date": "2020-12-31"})
    tt = T0 + 30 * ts.NS_PER_S * np.arange(12)
    today = ppp_difference(_clock(tt, 10.4 + rate * (tt - T0) / 1e9, 0.03, 8), _clock(tt, 0.0, 0.0, 8))
    b = day_boundary(prev, today)
    assert b["jump_ns"] == pytest.approx(0.4, abs=1e-6)
    assert b["gap_s"] == pytest.approx(30.0) and b["previous_date"] == "2020-12-31"
    assert b["points_each_side"] == [10, 10] and 0.0 < b["u_jump_ns"] < 0.05
    assert day_boundary(None, today) is None


def test_pair_file_mode_ppp_needs_products(tmp_path):
    from ctt.config import load_pair

    st = ("[station]\nid = \"{id}\"\n[station.position]\nx_m = {x}\ny_m = 500000.0\nz_m = 4600000.0\n"
          "sigma_m = 0.01\n[[delays]]\nvalid_from = 2020-01-01T00:00:00Z\nreceiver_ns = {{ C1W = 0.0 }}\n"
          "u_receiver_ns = 1.0\ncable_ns = 0.0\nu_cable_ns = 0.1\nreference_ns = 0.0\nu_reference_ns = 0.1\n")
    (tmp_path / "a.toml").write_text(st.format(id="LABA", x=4400000.0))
    (tmp_path / "b.toml").write_text(st.format(id="LABB", x=4400100.0))
    base = ("[pair]\nname = \"ab\"\nstation_a = \"a.toml\"\nstation_b = \"b.toml\"\ndata_root = \".\"\n"
            "[inputs]\nobs = \"{{station}}{{doy:03d}}0.{{yy:02d}}o\"\nnav = \"brdc{{doy:03d}}0.{{yy:02d}}n\"\n{extra}"
            "[processing]\nmode = \"ppp\"\n")
    (tmp_path / "p.toml").write_text(base.format(extra=""))
    with pytest.raises(ConfigError, match=r"inputs\.sp3"):
        load_pair(tmp_path / "p.toml")
    (tmp_path / "p.toml").write_text(base.format(extra="sp3 = \"x.sp3\"\nclk = \"x.clk\"\n"))
    assert load_pair(tmp_path / "p.toml").processing.mode == "ppp"
    # an SP3 file with its own clocks serves alone (5-min clocks: the real-2016-001 products)
    (tmp_path / "p.toml").write_text(base.format(extra="sp3 = \"x.sp3\"\n"))
    assert load_pair(tmp_path / "p.toml").processing.mode == "ppp"


def test_pair_file_erp_key_required_or_optional(shared_set, tmp_path, caplog, capsys):
    """The ``erp`` input (ctt.config, README "Station and pair files"): weekly IGS ERP file names
    (igs<week>7.erp) with the neighbouring weeks' patterns; required unless listed in optional."""
    import shutil

    from ctt.cli import main
    from ctt.config import load_pair
    from ctt.errors import MissingInputError
    from ctt.pipeline import pair_day_from_config

    st = ("[station]\nid = \"{id}\"\n[station.position]\nx_m = {x}\ny_m = 500000.0\nz_m = 4600000.0\n"
          "sigma_m = 0.01\n[[delays]]\nvalid_from = 2010-01-01T00:00:00Z\nreceiver_ns = {{ C1W = 0.0 }}\n"
          "u_receiver_ns = 1.0\ncable_ns = 0.0\nu_cable_ns = 0.1\nreference_ns = 0.0\nu_reference_ns = 0.1\n")
    (tmp_path / "a.toml").write_text(st.format(id="LABA", x=4400000.0))
    (tmp_path / "b.toml").write_text(st.format(id="LABB", x=4400100.0))
    data = tmp_path / "data"
    data.mkdir()
    # the ERP file of GPS week 1657 (2011-10-09..15; real-2011-283); the other files are only
    # looked up here (resolve_inputs checks that they exist), so empty ones serve
    shutil.copy(shared_set("real-2011-283") / "igs16577.erp", data / "igs16577.erp")
    (data / "igs16567.erp").write_text("")     # the previous week's name, only looked up here
    for doy, week_day in ((282, "16570"), (283, "16571"), (288, "16576"), (289, "16580")):
        (data / f"igs{week_day}.sp3").write_text("")
        for sid in ("laba", "labb"):
            (data / f"{sid}{doy}0.11o").write_text("")
    base = ("[pair]\nname = \"ab\"\nstation_a = \"a.toml\"\nstation_b = \"b.toml\"\ndata_root = \"data\"\n"
            "[inputs]\nobs = \"{{station}}{{doy:03d}}0.{{yy:02d}}o\"\nnav = \"brdc{{doy:03d}}0.{{yy:02d}}n\"\n"
            "sp3 = \"igs{{gpsweek}}{{gpsdow}}.sp3\"\n"
            "erp = [\"igs{{gpsweek-1}}7.erp\", \"igs{{gpsweek}}7.erp\", \"igs{{gpsweek+1}}7.erp\"]\n"
            "optional = {optional}\n[processing]\nmode = \"ppp\"\n")
    (tmp_path / "p.toml").write_text(base.format(optional='["met", "nav"]'))
    pc = load_pair(tmp_path / "p.toml")
    erp = (data / "igs16577.erp").resolve()
    # 2011-10-10 (week 1657, day 1): all three patterns name the week's file, used once
    assert pc.resolve_inputs("2011-10-10")["erp"] == erp
    inputs, *_ = pair_day_from_config(pc, "2011-10-10")
    assert inputs.erp == str(erp)
    # 2011-10-09 (Sunday, day 0): the previous week's file too, both in order (merged by ctt.pipeline)
    assert pc.resolve_inputs("2011-10-09")["erp"] == ((data / "igs16567.erp").resolve(), erp)
    # 2011-10-15 (Saturday, day 6): the next week's file is missing: logged, the week's own is used
    # (ctt.ppp then refuses the hours after its last noon epoch: tests/test_ppp.py)
    assert pc.resolve_inputs("2011-10-15")["erp"] == erp
    assert "igs16587.erp" in caplog.text
    # 2011-10-16 (week 1658): its own file is missing: required by default ...
    with pytest.raises(MissingInputError, match=r"no erp file for 2011-10-16.*igs16587\.erp"):
        pc.resolve_inputs("2011-10-16")
    # ... absent, logged and the day processed without the pole tide when listed in optional
    (tmp_path / "p.toml").write_text(base.format(optional='["met", "nav", "erp"]'))
    pc = load_pair(tmp_path / "p.toml")
    caplog.clear()
    inputs, *_ = pair_day_from_config(pc, "2011-10-16")
    assert inputs.erp is None and "pole tide is not applied" in caplog.text
    # a day offset stays reserved to the kinds that merge several files: not ionex
    (tmp_path / "p.toml").write_text(base.format(optional='["met", "nav"]').replace(
        "sp3 = ", "ionex = \"igsg{doy-1:03d}0.{yy:02d}i\"\nsp3 = "))
    with pytest.raises(ConfigError, match=r"inputs\.ionex"):
        load_pair(tmp_path / "p.toml")
    # check-config lists the merged files of a kind (last: ctt.cli sets up its own log handler)
    (tmp_path / "p.toml").write_text(base.format(optional='["met", "nav"]'))
    assert main(["check-config", str(tmp_path / "p.toml"), "--date", "2011-10-09"]) in (0, 2)
    assert "erp=igs16567.erp+igs16577.erp" in capsys.readouterr().out


@pytest.mark.slow
def test_code_modes_record_an_erp_file_but_do_not_use_it(shared_set, tmp_path):
    """``ctt pair --erp`` in a code mode (the demo pair, tracks): the pole tide (a few mm) is
    modelled by mode ppp only; the file is recorded with its SHA-256 and a warning says so."""
    import hashlib
    import json
    import pathlib

    from ctt.cli import main

    demo = pathlib.Path(__file__).resolve().parents[1] / "data_demo"
    erp = shared_set("real-2011-283") / "igs16577.erp"
    rc = main(["pair", "--obs-a", str(demo / "ALDR00XXX_R_20210010000_01D_30S_MO.crx"),
               "--obs-b", str(demo / "BRKW00XXX_R_20210010000_01D_30S_MO.crx"),
               "--nav", str(demo / "BRDC00XXX_R_20210010000_01D_MN.rnx"), "--station-a", str(demo / "aldr.toml"),
               "--station-b", str(demo / "brkw.toml"), "--erp", str(erp), "--out", str(tmp_path / "run")])
    assert rc == 0
    s = json.loads((tmp_path / "run" / "summary.json").read_text())
    assert any(w.startswith("ERP file not used: mode tracks") for w in s["warnings"])
    assert s["inputs"]["erp"]["sha256"] == hashlib.sha256(erp.read_bytes()).hexdigest()
