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
