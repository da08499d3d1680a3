"""Carrier-phase PPP against the simulator's truth (issue: simulated PPP truth).

The simulator (ctt.simulate) writes, independently of ctt.measure and
ctt.ppp, RINEX observations with carrier phase (integer ambiguities per arc,
wind-up after Wu et al. 1993, Shapiro delay, cycle slips at configured
epochs, a free-running receiver reset by whole milliseconds) and precise
products (SP3-c, RINEX clock) of its true orbits and clocks. Targets of the
PPP issue: after the first hour the clock follows the truth to ≤ 0.02 ns RMS,
the position is within 1 cm 3-D, and every slip and clock jump inserted is
found (truth_events.csv).
"""

from __future__ import annotations

import datetime as _dt

import numpy as np
import pandas as pd
import pytest

from ctt import timescales as ts
from ctt.ppp import PPPOptions, run_ppp  # noqa: F401  (the estimator under test)



def _utc(text):
    return _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))


def scenario(hours=6.0):
    """Two invented stations ~600 km apart, GPS P1/P2, products of the truth at 5 min / 30 s."""
    delays = {"receiver_ns": {"C1W": 21.0, "C2W": 23.5}, "cable_ns": 80.0, "reference_ns": 6.0}
    met = {"pressure_hpa": 960.0, "temperature_c": 10.0, "humidity_pct": 60.0}
    return {
        "scenario": {"name": "ppp-truth", "start_gps": _dt.datetime(2021, 1, 1), "duration_h": hours,
                     "interval_s": 30.0, "random_state": 20211011, "systems": ["G"]},
        "satellites": {"source": "synthetic", "gps_count": 31},
        "propagation": {"wet_random_walk_mm_per_sqrt_h": 2.0},
        "output": {"gzip": False, "products": True, "sp3_interval_s": 300.0, "clk_interval_s": 30.0},
        "stations": [
            {"id": "LABA", "lat_deg": 46.9, "lon_deg": 7.5, "height_m": 950.0, "antenna_delta_hen_m": [0.35, 0, 0],
             "signals": {"G": ["C1W", "C2W"]}, "code_noise_m": 0.3, "phase_noise_m": 0.002,
             "delays": dict(delays), "met": met,
             # a receiver on its own oscillator (the CAGZ case of the shared data: −3.1e-7, +1 ms resets)
             "clock": {"offset_ns": 200.0, "frequency_offset": -3.1e-7, "ms_jump_threshold_us": 500.0,
                       "noise": [{"type": "white_fm", "adev_1s": 1e-11}]},
             "slips": [{"time": _utc("2021-01-01T01:30:00Z"), "cycles": {"1": 5, "2": 3}},
                       {"time": _utc("2021-01-01T02:45:00Z"), "cycles": {"1": 1, "2": 0}},
                       {"time": _utc("2021-01-01T04:10:00Z"), "cycles": {"1": -7, "2": -9}, "lli": True}]},
            {"id": "LABB", "lat_deg": 41.5, "lon_deg": 9.0, "height_m": 40.0,
             "signals": {"G": ["C1W", "C2W"]}, "code_noise_m": 0.3, "phase_noise_m": 0.002,
             "delays": {"receiver_ns": {"C1W": 30.2, "C2W": 31.0}, "cable_ns": 120.0, "reference_ns": 10.0},
             "met": met,
             "clock": {"offset_ns": -80.0, "frequency_offset": 2e-14,
                       "noise": [{"type": "white_fm", "adev_1s": 1e-13}]},
             "slips": [{"time": _utc("2021-01-01T03:20:00Z"), "cycles": {"1": 2, "2": 2}}]},
        ],
    }


@pytest.fixture(scope="module")
def sim(tmp_path_factory):
    from ctt.config import load_station
    from ctt.formats.rinex_clock import read_clock
    from ctt.formats.rinex_met import read_met
    from ctt.formats.rinex_obs import read_obs
    from ctt.formats.sp3 import read_sp3
    from ctt.orbits import PreciseOrbits
    from ctt.ppp import PPPOptions, run_ppp
    from ctt.simulate import scenario_from_dict, simulate, write_outputs

    out = tmp_path_factory.mktemp("ppp-sim")
    res = simulate(scenario_from_dict(scenario()))
    write_outputs(res, out)
    files = res.files
    sp3 = next(p for p in files["products"] if p.name.endswith(".sp3"))
    clk = next(p for p in files["products"] if p.name.endswith(".clk"))
    orbits = PreciseOrbits(read_sp3(sp3), clk=read_clock(clk))
    ppp = {}
    for sid in ("LABA", "LABB"):
        obs = next(p for p in files["obs"] if p.name.startswith(sid))
        met = next(p for p in files["met"] if p.name.startswith(sid.lower()))
        station = load_station(out / f"{sid.lower()}.toml")
        ppp[sid] = run_ppp(read_obs(obs), orbits, station, PPPOptions(), met=read_met(met))
    truth = pd.read_csv(files["truth"][0])
    truth["time_gps_ns"] = np.array([ts.parse_iso(v) for v in truth["time_gps"]], dtype=np.int64)
    events = pd.read_csv(files["truth"][2])
    return res, out, ppp, truth.set_index("time_gps_ns"), events


def _after_first_hour(clock, truth, col):
    c = clock[clock["flag"] == "ok"]
    c = c[c["time_gps_ns"] >= clock["time_gps_ns"].min() + 3600 * ts.NS_PER_S]
    err = c["clock_ns"].to_numpy() - truth.loc[c["time_gps_ns"], col].to_numpy()
    return err, float(c["u_ns"].median())


@pytest.mark.slow
@pytest.mark.parametrize("sid", ["LABA", "LABB"])
def test_clock_follows_the_truth_after_the_first_hour(sim, sid):
    """PPP issue target: ≤ 0.02 ns RMS about a constant after the first hour.

    The constant (the mean error) is the code's share of the clock datum: float ambiguities
    leave the clock's level to the iono-free code (σ ≈ 0.9 m/sin el per observation), which
    the estimator's formal u_ns carries (0.07-0.11 ns here; measured mean errors −0.10 to
    +0.10 ns over four noise realisations): |mean| ≤ 4·u (error propagation).
    Epochs: the estimator flags epochs with fewer than 4 satellites in usable arcs; its
    slip detector also breaks arcs on phase noise at low elevation (2 mm/sin el here), and
    short arcs are dropped, so about 85-90 % of the epochs after the first hour are 'ok'
    (measured 88 % and 84 %): at least 75 % is required, the rest is flagged, not used."""
    _, _, ppp, truth, _ = sim
    err, u = _after_first_hour(ppp[sid].clock, truth, f"{sid}_ns")
    rms = float(np.sqrt(np.mean((err - err.mean()) ** 2)))
    print(f"{sid}: {err.size} of 600 epochs after the first hour, clock − truth mean {err.mean():+.4f} ns "
          f"(formal u {u:.3f} ns), RMS about it {rms:.4f} ns")
    assert err.size >= 0.75 * 600
    assert rms <= 0.02
    assert abs(err.mean()) <= 4 * u


@pytest.mark.slow
@pytest.mark.parametrize("sid", ["LABA", "LABB"])
def test_position_within_a_centimetre(sim, sid):
    """PPP issue target: estimated position within 1 cm 3-D of the truth (the station file holds the true
    marker and antenna height, so the E/N/U difference to it is the error)."""
    _, _, ppp, _, _ = sim
    d = np.asarray(ppp[sid].summary["enu_difference_m"])
    print(f"{sid}: position error E {d[0]*1000:+.1f} mm, N {d[1]*1000:+.1f} mm, U {d[2]*1000:+.1f} mm, "
          f"3-D {np.linalg.norm(d)*1000:.1f} mm")
    assert np.linalg.norm(d) <= 0.01


@pytest.mark.slow
def test_every_inserted_slip_and_jump_is_found(sim):
    """Every cycle slip of truth_events.csv starts a new arc of that satellite at that epoch, and every
    receiver clock jump is listed with its size (PPP issue: every slip and jump inserted is found)."""
    _, _, ppp, _, events = sim
    slips = events[events["kind"] == "cycle_slip"].drop_duplicates(["station", "time_gps_ns", "sat"])
    assert len(slips) == 4
    for _, e in slips.iterrows():
        r = ppp[e["station"]].residuals
        here = r[(r["sat"] == e["sat"]) & (r["time_gps_ns"] == e["time_gps_ns"])]
        before = r[(r["sat"] == e["sat"]) & (r["time_gps_ns"] < e["time_gps_ns"])].tail(1)
        assert len(here) == 1 and len(before) == 1, (e["station"], e["sat"], e["time_utc"])
        assert bool(here["slip"].iloc[0]) or here["arc"].iloc[0] != before["arc"].iloc[0], \
            f"slip of {e['sat']} at {e['time_utc']} ({e['station']}) not found"
    for sid in ("LABA", "LABB"):
        found = {(j["time_gps_ns"], j["size_ms"]) for j in ppp[sid].summary["clock_jumps"]}
        jumps = events[(events["kind"] == "clock_jump") & (events["station"] == sid)]
        inserted = {(int(t), int(m)) for t, m in zip(jumps["time_gps_ns"], jumps["jump_ms"])}
        print(f"{sid}: {len(inserted)} clock jumps inserted, {len(found)} found; "
              f"{ppp[sid].summary['n_slips']} slips detected")
        assert found == inserted
    assert (events["kind"] == "clock_jump").sum() >= 6  # −3.1e-7 over 6 h: a reset every ~54 min


@pytest.mark.slow
def test_pair_ppp_follows_the_true_difference(sim):
    """`ctt pair --mode ppp` on the simulated pair: A − B against truth.csv's LABA-LABB column after the first
    hour: RMS about a constant ≤ √2 × 0.02 ns (two independent station errors, each at its 0.02 ns target),
    mean within 4 × the point's formal u (error propagation, as for one station)."""
    from ctt.config import load_station
    from ctt.pipeline import PairInputs, PairOptions, run_pair, write_pair_outputs

    res, out, _, truth, _ = sim
    f = res.files
    inputs = PairInputs(obs_a=str(next(p for p in f["obs"] if p.name.startswith("LABA"))),
                        obs_b=str(next(p for p in f["obs"] if p.name.startswith("LABB"))),
                        sp3=str(next(p for p in f["products"] if p.name.endswith(".sp3"))),
                        clk=str(next(p for p in f["products"] if p.name.endswith(".clk"))),
                        met_a=str(f["met"][0]), met_b=str(f["met"][1]))
    pr = run_pair(inputs, load_station(out / "laba.toml"), load_station(out / "labb.toml"), PairOptions(mode="ppp"))
    paths = write_pair_outputs(pr, out / "pair")
    o = pr.offset[pr.offset["flag"] == "ok"]
    o = o[o["time"] >= o["time"].min() + 3600 * ts.NS_PER_S]
    err = o["offset_ns"].to_numpy() - truth.loc[o["time"], "LABA-LABB_ns"].to_numpy()
    rms = float(np.sqrt(np.mean((err - err.mean()) ** 2)))
    print(f"pair: {err.size} points, A − B − truth mean {err.mean():+.4f} ns, RMS about it {rms:.4f} ns; "
          f"budget total {pr.budget['total_ns']:.3f} ns")
    assert rms <= np.sqrt(2) * 0.02 and abs(err.mean()) <= 4 * float(o["u_ns"].median())
    s = pd.read_json(paths["summary"], typ="series")
    assert s["mode"] == "ppp" and "satellite clocks" in " ".join(s["budget"]["cancels"])
    sat = pd.read_csv(paths["satellites"])
    assert set(sat["station"]) == {"LABA", "LABB"}


@pytest.mark.slow
def test_day_boundary_of_consecutive_days(tmp_path):
    """Two simulated days through `ctt backfill` in mode ppp: the second day's summary records the jump from
    the first (the true A − B is continuous, so the jump is the two days' independent datum errors,
    within 4 × its uncertainty; LABA's free-running clock, −9.3 µs per 30 s, must not count as a jump)."""
    import json

    from ctt.cli import main
    from ctt.simulate import scenario_from_dict, simulate, write_outputs

    d = scenario(hours=26.0)
    for st in d["stations"]:
        st["slips"] = []
    res = simulate(scenario_from_dict(d))
    write_outputs(res, tmp_path)
    pair = tmp_path / "laba-labb.toml"
    pair.write_text(pair.read_text().replace("[processing]\n", "[processing]\nmode = \"ppp\"\n"))
    assert main(["backfill", "--config", str(pair), "--from", "2021-01-01", "--to", "2021-01-02",
                 "--no-report"]) == 0
    s1 = json.loads((tmp_path / "out" / "laba-labb" / "2021-01-01" / "summary.json").read_text())
    s2 = json.loads((tmp_path / "out" / "laba-labb" / "2021-01-02" / "summary.json").read_text())
    b = s2["day_boundary"]
    print(f"day boundary at {b['at_utc']}: jump {b['jump_ns']:+.3f} ± {b['u_jump_ns']:.3f} ns")
    assert "day_boundary" not in s1 and b["previous_date"] == "2021-01-01"
    assert abs(b["jump_ns"]) <= 4 * b["u_jump_ns"] and b["u_jump_ns"] < 0.5
