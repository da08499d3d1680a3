"""Behaviour of the scenario simulator (ctt.simulate) and its RINEX writers.

External references named beside the checks: IS-GPS-200 (orbit equations,
group delays, ωe), the RINEX 3.04 format (field resolution 0.001), georinex
(an independent RINEX reader), the sign convention of ctt.config.
"""

from __future__ import annotations

import copy
import datetime as _dt
import gzip
import math

import numpy as np
import pandas as pd
import pytest

from ctt import timescales as ts
from ctt.simulate import (C_MPS, OMEGA_E, KeplerEphemerides, light_time, run_scenario, scenario_from_dict,
                          simulate, synthetic_constellation, write_outputs)

DELAYS_A = {"receiver_ns": {"C1C": 25.1, "C2W": 27.0, "C5Q": 24.0, "C7Q": 24.5}, "cable_ns": 152.4,
            "reference_ns": 11.8}
DELAYS_B = {"receiver_ns": {"C1C": 20.3, "C2W": 22.2, "C5Q": 21.0, "C7Q": 21.4}, "cable_ns": 80.0,
            "reference_ns": 9.5}


def _base(hours=2.0, **prop):
    return {
        "scenario": {"name": "unit", "start_gps": _dt.datetime(2021, 1, 1),  # TOML local date-time: GPS
                     "duration_h": hours, "interval_s": 30.0, "random_state": 4242, "systems": ["G", "E"]},
        "propagation": prop,
        "output": {"gzip": True},
        "stations": [
            {"id": "LABA", "name": "Invented Lab A", "lat_deg": 46.2, "lon_deg": 8.1, "height_m": 450.0,
             "antenna_delta_hen_m": [0.1, 0.0, 0.0], "delays": copy.deepcopy(DELAYS_A),
             "met": {"pressure_hpa": 960.0, "temperature_c": 10.0, "humidity_pct": 70.0,
                     "temperature_amplitude_c": 4.0, "pressure_amplitude_hpa": 1.0},
             "clock": {"offset_ns": 250.0, "frequency_offset": 2e-13,
                       "noise": [{"type": "white_fm", "adev_1s": 1e-11}]}},
            {"id": "LABB", "name": "Invented Lab B", "lat_deg": 44.0, "lon_deg": 12.5, "height_m": 120.0,
             "delays": copy.deepcopy(DELAYS_B),
             "clock": {"offset_ns": -40.0, "noise": [{"type": "white_fm", "adev_1s": 1e-13}]}},
        ],
    }


def _quiet(data):
    """No atmosphere, tide, Shapiro delay, phase wind-up, clocks, hardware delays, noise: the pseudorange is geometry + sat clock."""
    data["propagation"].update(troposphere=False, ionosphere=False, solid_tide=False, shapiro=False,
                              phase_windup=False)
    for st in data["stations"]:
        st["clock"] = {}
        st["code_noise_m"] = 0.0
        st["phase_noise_m"] = 0.0
        st["delays"] = {"receiver_ns": {c: 0.0 for c in DELAYS_A["receiver_ns"]}}
    return data


def _utc(text):
    """A TOML offset date-time with Z, as tomllib returns it."""
    return _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    data = _base(hours=2.0, wet_random_walk_mm_per_sqrt_h=3.0, iono_scale=1.3)
    data["output"]["rinex2"] = True
    a = data["stations"][0]
    a["multipath"] = {"amplitude_m": 0.5, "decay_deg": 15.0}
    a["clock"]["steps"] = [{"time": _utc("2021-01-01T00:40:00Z"), "phase_ns": 5.0},
                           {"time": _utc("2021-01-01T01:00:00Z"), "frequency": 1e-12}]
    a["gaps"] = [{"start": _utc("2021-01-01T01:10:00Z"), "end": _utc("2021-01-01T01:15:00Z")}]
    a["resets"] = [{"time": _utc("2021-01-01T01:30:00Z"), "outage_s": 90.0}]
    a["delay_changes"] = [{"time": _utc("2021-01-01T01:20:00Z"), "cable_ns": 5.0, "what": "antenna cable replaced"},
                          {"time": _utc("2021-01-01T01:40:00Z"), "reference_ns": 2.0, "what": "new PPS cable",
                           "in_delays": True}]
    out = tmp_path_factory.mktemp("sim")
    scn = scenario_from_dict(data)
    res = simulate(scn)
    write_outputs(res, out)
    return res, out


# ---------------------------------------------------------------- files and round trip

def test_files_written(written):
    res, out = written
    for kind in ("obs", "nav", "met", "station", "pair", "truth"):
        assert res.files[kind], kind
        for p in res.files[kind]:
            assert p.is_file() and p.stat().st_size > 0
    head = gzip.decompress(res.files["obs"][0].read_bytes()).decode().splitlines()
    # RINEX 3.04 header: labels in columns 61-80
    labels = [ln[60:].strip() for ln in head[:40]]
    for lab in ("RINEX VERSION / TYPE", "APPROX POSITION XYZ", "ANTENNA: DELTA H/E/N", "SYS / # / OBS TYPES",
                "INTERVAL", "TIME OF FIRST OBS", "END OF HEADER"):
        assert lab in labels
    assert head[0][:9].strip() == "3.04"
    apx = next(ln for ln in head if ln[60:].startswith("APPROX POSITION XYZ"))
    np.testing.assert_allclose([float(apx[i:i + 14]) for i in (0, 14, 28)], res.stations["LABA"].spec.marker_m,
                               rtol=0, atol=1e-4)


def test_project_reader_reads_back_exactly(written):
    import ctt.formats.rinex_obs as obs_mod
    res, _ = written
    for sid, path in zip(res.stations, res.files["obs"]):
        r = res.stations[sid]
        o = obs_mod.read_obs(path)
        assert o.header.time_system == "GPS"
        kept = r.time_ns[r.epoch_kept]
        np.testing.assert_array_equal(o.time_ns, kept)  # gaps and outages leave no epoch
        idx = [r.sats.index(s) for s in o.sats]
        n_values = 0
        for code, arr in r.obs.items():
            mine = arr[r.epoch_kept][:, idx]
            got = o.obs[code]
            assert np.array_equal(np.isfinite(got), np.isfinite(mine)), code
            # F14.3 fields: resolution 0.001 (RINEX 3.04); the simulator rounds to it before writing
            np.testing.assert_allclose(got[np.isfinite(got)], mine[np.isfinite(mine)], rtol=0, atol=5e-4)
            n_values += np.isfinite(got).sum()
            if code[0] == "L":
                np.testing.assert_array_equal(np.where(o.lli[code] < 0, 0, o.lli[code]),
                                              r.lli[code][r.epoch_kept][:, idx])
        assert n_values > 10_000
    # the RINEX 2.11 file too (GPS; the reader maps C1/L1/P2/L2 to C1C/L1C/C2W/L2W, RINEX 3.05 §5.1)
    r = res.stations["LABA"]
    o2 = obs_mod.read_obs(res.files["obs2"][0])
    assert o2.header.version == pytest.approx(2.11)
    idx = [r.sats.index(s) for s in o2.sats]
    for code in ("C1C", "L1C", "C2W", "L2W", "S1C"):
        mine = r.obs[code][r.epoch_kept][:, idx]
        got = o2.obs[code]
        assert np.array_equal(np.isfinite(got), np.isfinite(mine)), code
        np.testing.assert_allclose(got[np.isfinite(got)], mine[np.isfinite(mine)], rtol=0, atol=5e-4)


def test_georinex_reads_the_files(written):
    georinex = pytest.importorskip("georinex")
    res, out = written
    r = res.stations["LABB"]
    path = res.files["obs"][1]
    plain = out / "labb_plain.rnx"
    text = gzip.decompress(path.read_bytes()).decode()
    # a short file keeps georinex quick: the header and the first 20 epochs
    lines = text.splitlines(keepends=True)
    end = [i for i, ln in enumerate(lines) if ln.startswith(">")][20]
    plain.write_text("".join(lines[:end]))
    ds = georinex.load(plain)
    t0 = ts.to_datetime64(r.time_ns[:20])
    np.testing.assert_array_equal(ds.time.values, t0)
    for code in ("C1C", "L1C", "C2W", "S1C", "C7Q"):
        for sv in ds.sv.values[:8]:
            sv = str(sv)
            j = r.sats.index(sv)
            mine = r.obs[code][:20, j] if code in r.obs else None
            got = ds[code].sel(sv=sv).values
            ok = np.isfinite(mine)
            np.testing.assert_array_equal(np.isfinite(got), ok)
            np.testing.assert_allclose(got[ok], mine[ok], atol=5e-4, rtol=0)
    # the RINEX 2.11 file (GPS) also reads with georinex
    ds2 = georinex.load(res.files["obs2"][0], tlim=None, use={"G"})
    assert "C1" in ds2 and "P2" in ds2 and "L2" in ds2


def test_nav_file_matches_the_truth_model(written):
    """ctt.orbits on the written nav file gives the simulator's satellites (both IS-GPS-200 Table 20-IV)."""
    import ctt.orbits as orbits
    import ctt.formats.rinex_nav as nav_mod
    res, _ = written
    nav = nav_mod.read_nav(res.files["nav"][0])
    bo = orbits.BroadcastOrbits(nav)
    km = KeplerEphemerides(res.nav_records)
    t = res.scenario.time_ns[::20]
    sats = np.repeat(np.array(km.sats), t.size)
    tt = np.tile(t, len(km.sats))
    a, b = bo.states(sats, tt, -0.07), km.states(sats, tt, -0.07)
    assert np.all(a.status == 0)
    # same equations on the same rounded numbers: agreement far below a millimetre
    np.testing.assert_allclose(a.pos_m, b.pos_m, atol=1e-4, rtol=0)
    np.testing.assert_allclose(a.clock_s + a.relativity_s, b.clock_s + b.relativity_s, atol=1e-15, rtol=0)
    g = np.char.startswith(sats.astype(str), "G")
    np.testing.assert_array_equal(a.tgd_s[g], b.tgd_s[g])
    np.testing.assert_array_equal(a.bgd_e5b_s[~g], b.bgd_e5b_s[~g])
    np.testing.assert_allclose(nav.header.iono["GPSA"], res.iono_alpha, rtol=1e-12)


def test_station_and_pair_files_load_with_config(written):
    import ctt.config as config
    res, out = written
    st = config.load_station(res.files["station"][0])
    spec = res.stations["LABA"].spec
    np.testing.assert_allclose(st.position_m, spec.marker_m, rtol=0, atol=1e-9)
    # the simulated antenna = the station file's ARP (marker + 0.1 m up) + the solid tide (IERS 2010 via geodesy)
    from ctt.geodesy import solid_tide_displacement

    r = res.stations["LABA"]
    tide = solid_tide_displacement(spec.marker_m, r.time_ns, time_scale="GPS")
    np.testing.assert_allclose(r.rx_m - tide, np.broadcast_to(st.arp_m, r.rx_m.shape), rtol=0, atol=1e-8)
    assert 0.01 < np.abs(tide).max() < 0.5
    assert np.linalg.norm(st.arp_m - st.position_m) == pytest.approx(0.1, abs=1e-9)
    assert st.antenna.delta_hen_m[0] == pytest.approx(0.1)
    # one undocumented cable change and one documented reference change
    assert [c.what for c in st.changes] == ["antenna cable replaced", "new PPS cable"]
    assert st.changes[0].expected_delay_change_ns == pytest.approx(5.0)
    assert len(st.delay_sets) == 2
    t_after = ts.parse_iso("2021-01-01T01:45:00Z")
    assert st.delays_at(t_after).reference_ns == pytest.approx(DELAYS_A["reference_ns"] + 2.0)
    assert st.delays_at(t_after).cable_ns == pytest.approx(DELAYS_A["cable_ns"])  # not documented
    pair = config.load_pair(res.files["pair"][0])
    assert pair.station_a.id == "LABA" and pair.station_b.id == "LABB"
    found = pair.resolve_inputs("2021-01-01")
    assert found["obs_a"].name == res.files["obs"][0].name and found["nav"].name == res.files["nav"][0].name
    assert found["met_a"] is not None


# ---------------------------------------------------------------- truth

def test_truth_clock_has_the_configured_level(written):
    """LABB: white FM σ_y(1 s) = 1e-13 only, so σ_y(30 s) = 1e-13/√30 (NIST SP 1065 slope −1/2)."""
    allantools = pytest.importorskip("allantools")
    res, out = written
    x = pd.read_csv(out / "truth.csv")["LABB_ns"].to_numpy() * 1e-9
    _, dev, _, _ = allantools.oadev(x, rate=1 / 30.0, data_type="phase", taus=[30.0])
    edf = allantools.edf_greenhall(alpha=0, d=2, m=1, N=x.size, overlapping=True, modified=False)
    lo, hi = allantools.confidence_interval(dev[0], edf, ci=0.99)
    assert lo <= 1e-13 / math.sqrt(30.0) <= hi


def test_cycle_slips_are_integer_jumps_with_lli():
    data = _quiet(_base(hours=1.0))
    data["stations"][0]["cycle_slips_per_h"] = 2.0
    data["stations"] = data["stations"][:1]
    res = simulate(scenario_from_dict(data))
    r = res.stations["LABA"]
    lam = C_MPS / 1575.42e6
    # quiet scenario: code minus phase on L1 is the ambiguity alone (no ionosphere, no noise)
    gd = np.where(np.array([s[0] == "G" for s in r.sats])[None, :], r.parts[("G", "C1C")]["gd"],
                  r.parts[("E", "C1C")]["gd"])
    amb = (r.obs["C1C"] - gd) / lam - r.obs["L1C"]
    jump = np.diff(amb, axis=0)
    both = np.isfinite(jump)
    slipped = both & (np.abs(jump) > 0.5)
    np.testing.assert_allclose(jump[both], np.round(jump[both]), rtol=0, atol=0.01)
    assert slipped.sum() >= 5
    # every jump between tracked epochs carries LLI bit 0 on the later epoch
    assert np.all(r.lli["L1C"][1:][slipped] == 1)


def test_steps_in_truth_tables(written):
    res, out = written
    truth = pd.read_csv(out / "truth.csv")
    steps = pd.read_csv(out / "truth_steps.csv")
    assert list(truth.columns[:3]) == ["time_utc", "mjd_utc", "time_gps"]
    assert truth["time_utc"].str.endswith("Z").all()
    for c in ("LABA_ns", "LABB_ns", "LABA-LABB_ns", "LABA_apparent_ns", "LABA-LABB_apparent_ns"):
        assert c in truth
    np.testing.assert_allclose(truth["LABA-LABB_ns"], truth["LABA_ns"] - truth["LABB_ns"], rtol=0, atol=2e-6)
    utc = ts.parse_iso_array(truth["time_utc"])
    # GPS - UTC = 18 s in 2021 (IERS Bulletin C)
    np.testing.assert_array_equal(ts.parse_iso_array(truth["time_gps"]) - utc, 18 * ts.NS_PER_S)
    x = truth["LABA_ns"].to_numpy()
    # phase step of +5 ns at 00:40 UTC: the 30-s difference jumps by 5 ns over the white-FM noise
    # (σ of a 30-s phase difference: σ_y(30 s)·30 s = 1e-11/√30·30 s ≈ 0.055 ns)
    d = np.diff(x)
    k = np.searchsorted(utc, ts.parse_iso("2021-01-01T00:40:00Z"))
    assert d[k - 1] == pytest.approx(5.0, abs=0.4)
    assert np.all(np.abs(np.delete(d, k - 1) - np.median(d)) < 0.4 + 30 * 1e-12 * 1e9 * 1.01)
    # frequency step 1e-12 from 01:00: 0.03 ns more per 30 s afterwards
    k2 = np.searchsorted(utc, ts.parse_iso("2021-01-01T01:00:00Z"))
    assert np.mean(d[k2:]) - np.mean(d[:k2][d[:k2] < 1]) == pytest.approx(0.03, abs=0.02)
    # the undocumented +5 ns cable change appears in the apparent clock only
    app = truth["LABA_apparent_ns"].to_numpy() - x
    k3 = np.searchsorted(utc, ts.parse_iso("2021-01-01T01:20:00Z"))
    assert np.all(app[:k3] == pytest.approx(0.0, abs=1e-6)) and np.all(app[k3:] == pytest.approx(5.0, abs=1e-6))
    kinds = dict(zip(steps["what"], steps["kind"]))
    assert kinds["antenna cable replaced"] == "delay" and "clock_phase" in set(steps["kind"])
    row = steps[steps["what"] == "new PPS cable"].iloc[0]
    assert row["phase_ns"] == pytest.approx(-2.0) and row["apparent_step_ns"] == 0.0


# ---------------------------------------------------------------- forward model

def test_light_time_without_earth_rotation_is_the_straight_distance():
    t0 = ts.civil_to_ns(2021, 1, 1)
    recs = synthetic_constellation(t0, t0 + 3600 * ts.NS_PER_S, ("G", "E"), np.random.default_rng(3))
    km = KeplerEphemerides(recs)
    sats = np.array(km.sats)
    rx = np.tile([4_300_000.0, 700_000.0, 4_650_000.0], (sats.size, 1))
    t = np.full(sats.size, t0 + 1800 * ts.NS_PER_S)
    tau, pos, _ = light_time(km, sats, t, np.zeros(sats.size), rx, earth_rotation=False)
    st = km.states(sats, t, -tau)
    np.testing.assert_allclose(tau * C_MPS, np.linalg.norm(st.pos_m - rx, axis=1), rtol=0, atol=1e-6)
    # with rotation: an independent inertial-frame statement of the same equation, frames aligned at t_r:
    # the transmit position turns by +ωe·τ, the receiver stays
    tau_r, _, st_r = light_time(km, sats, t, np.zeros(sats.size), rx, earth_rotation=True)
    th = OMEGA_E * tau_r
    p = st_r.pos_m
    inertial = np.stack([np.cos(th) * p[:, 0] + np.sin(th) * p[:, 1], -np.sin(th) * p[:, 0] + np.cos(th) * p[:, 1],
                         p[:, 2]], axis=1)
    np.testing.assert_allclose(tau_r * C_MPS, np.linalg.norm(inertial - rx, axis=1), rtol=0, atol=1e-6)
    # Sagnac: the difference is ωe/c·(x_s·y_r − y_s·x_r) to first order (common practice), tens of metres at most
    sagnac = OMEGA_E / C_MPS * (p[:, 0] * rx[:, 1] - p[:, 1] * rx[:, 0])
    np.testing.assert_allclose((tau_r - tau) * C_MPS, sagnac, rtol=0, atol=2e-3)
    assert np.max(np.abs(sagnac)) > 1.0


def test_geometric_pseudorange_independent_check():
    """Quiet scenario, Earth rotation off: C1C = |r_sat(t_t) − r_rx| + c·(x − dt_sat) + c·TGD exactly."""
    data = _quiet(_base(hours=0.5, earth_rotation=False))
    res = simulate(scenario_from_dict(data))
    r = res.stations["LABA"]
    km = KeplerEphemerides(res.nav_records)
    P = r.obs["C1C"]
    i, j = np.nonzero(np.isfinite(P))
    sats = np.array(r.sats)[j]
    # independent: transmit instant from the written pseudorange itself, t_t = t_r − (P − c·dt_sat − c·TGD)/c
    st0 = km.states(sats, r.time_ns[i], -0.07)
    gd = np.where(np.char.startswith(sats, "G"), np.nan_to_num(st0.tgd_s), np.nan_to_num(st0.bgd_e5b_s))
    geom = P[i, j] - C_MPS * (gd - (st0.clock_s + st0.relativity_s))
    st = km.states(sats, r.time_ns[i], -geom / C_MPS)
    dist = np.linalg.norm(st.pos_m - r.rx_m[i], axis=1)
    # 0.5 mm: rounding to the 0.001 m of the format; dt_sat taken 70 ms off changes it by < 1e-14 s
    np.testing.assert_allclose(geom, dist, rtol=0, atol=6e-4)
    assert i.size > 500


def test_hardware_delay_signs_and_recovery_with_config():
    """Sign convention of ctt.config: x = raw − (receiver + cable) + reference."""
    import ctt.config as config
    base = _quiet(_base(hours=0.5))
    res0 = simulate(scenario_from_dict(copy.deepcopy(base)))
    d = copy.deepcopy(base)
    d["stations"][0]["delays"] = copy.deepcopy(DELAYS_A)
    d["stations"][0]["clock"] = {"offset_ns": 1234.5}
    res1 = simulate(scenario_from_dict(d))
    r0, r1 = res0.stations["LABA"], res1.stations["LABA"]
    ds = config.DelaySet(0, None, DELAYS_A["receiver_ns"], {c: 1.0 for c in DELAYS_A["receiver_ns"]},
                         DELAYS_A["cable_ns"], 0.2, DELAYS_A["reference_ns"], 0.3)
    for code in ("C1C", "C2W", "C5Q", "C7Q"):
        diff = r1.obs[code] - r0.obs[code]
        ok = np.isfinite(diff)
        assert ok.sum() > 100
        # raw clock minus the hardware delay from config is the true clock (1234.5 ns);
        # 1 mm of format rounding is 3.3 ps; a clock offset of 1.2 µs moves the receive instant by 1.2 µs,
        # i.e. the range by < 1 mm (range rate < 1 km/s)
        recovered_ns = diff[ok] / C_MPS * 1e9 - ds.hardware_ns(code)
        np.testing.assert_allclose(recovered_ns, 1234.5, rtol=0, atol=0.01)
    # phase carries the same clock and hardware terms (cycles × wavelength)
    lam = C_MPS / 1575.42e6
    dl = (r1.obs["L1C"] - r0.obs["L1C"]) * lam
    ok = np.isfinite(dl)
    np.testing.assert_allclose(dl[ok] / C_MPS * 1e9 - ds.hardware_ns("C1C"), 1234.5, rtol=0, atol=0.01)


def test_ionosphere_is_dispersive_and_opposite_on_phase():
    base = _quiet(_base(hours=0.5))
    base["propagation"]["ionosphere"] = True
    base["propagation"]["iono_scale"] = 1.3
    res = simulate(scenario_from_dict(base))
    r = res.stations["LABA"]
    g = np.array([s[0] == "G" for s in r.sats])
    f1, f2 = 1575.42e6, 1227.60e6
    gamma = (f1 / f2) ** 2  # IS-GPS-200
    iono1 = r.parts[("G", "C1C")]["iono"][:, g]
    p1, p2 = r.obs["C1C"][:, g], r.obs["C2W"][:, g]
    ok = np.isfinite(p1) & np.isfinite(p2)
    tgd_term = r.parts[("G", "C2W")]["gd"][:, g] - r.parts[("G", "C1C")]["gd"][:, g]
    np.testing.assert_allclose((p2 - p1 - tgd_term)[ok], ((gamma - 1) * iono1)[ok], rtol=0, atol=1.5e-3)
    # code minus phase on L1 is twice the ionosphere plus a constant per arc (integer ambiguity)
    cmp_ = p1 - r.obs["L1C"][:, g] * C_MPS / f1 - 2 * iono1 - r.parts[("G", "C1C")]["gd"][:, g]
    lam = C_MPS / f1
    amb = (cmp_ / lam)[ok]
    np.testing.assert_allclose(amb, np.round(amb), rtol=0, atol=0.01)
    assert 1.0 < np.nanmax(iono1) < 30.0  # Klobuchar on L1: metres (IS-GPS-200 night floor 5 ns = 1.5 m)


def test_code_noise_follows_sigma0_over_sin_el():
    base = _quiet(_base(hours=1.0))
    res0 = simulate(scenario_from_dict(copy.deepcopy(base)))
    d = copy.deepcopy(base)
    d["stations"][0]["code_noise_m"] = 0.3
    res1 = simulate(scenario_from_dict(d))
    r0, r1 = res0.stations["LABA"], res1.stations["LABA"]
    diff = r1.obs["C1C"] - r0.obs["C1C"]
    ok = np.isfinite(diff)
    z = (diff * np.sin(r1.elevation_rad))[ok]
    # sample standard deviation within 4 standard errors (σ/√(2n)) of 0.3 m
    assert abs(z.std() - 0.3) < 4 * 0.3 / math.sqrt(2 * z.size)
    assert np.all(np.degrees(r1.elevation_rad[ok]) >= 10.0)  # elevation mask


def test_resets_gaps_and_lli(written):
    res, _ = written
    r = res.stations["LABA"]
    utc = ts.convert(r.time_ns, "GPS", "UTC")
    gap = (utc >= ts.parse_iso("2021-01-01T01:10:00Z")) & (utc < ts.parse_iso("2021-01-01T01:15:00Z"))
    outage = (utc >= ts.parse_iso("2021-01-01T01:30:00Z")) & (utc < ts.parse_iso("2021-01-01T01:31:30Z"))
    assert not r.epoch_kept[gap].any() and not r.epoch_kept[outage].any()
    assert r.epoch_kept.sum() == r.time_ns.size - gap.sum() - outage.sum()
    after = np.flatnonzero(~outage & (utc >= ts.parse_iso("2021-01-01T01:30:00Z")))[0]
    tracked = np.isfinite(r.obs["L1C"][after])
    assert tracked.sum() > 4 and np.all(r.lli["L1C"][after][tracked] == 1)  # every arc restarts
    mid = after + 5
    assert np.all(r.lli["L1C"][mid][np.isfinite(r.obs["L1C"][mid])] <= 1)
    # RINEX epoch flag 1 ("power failure between previous and current epoch") on that epoch only
    assert r.epoch_flag[after] == 1 and r.epoch_flag.sum() == 1
    import ctt.formats.rinex_obs as obs_mod
    o = obs_mod.read_obs(res.files["obs"][0])
    k = np.searchsorted(o.time_ns, r.time_ns[after])
    assert o.epoch_flag[k] == 1 and np.sum(o.epoch_flag == 1) == 1


@pytest.mark.slow
def test_multipath_repeats_with_the_sidereal_day():
    """GPS geometry (two revolutions per sidereal day) and so the (az, el) multipath repeat after 86164 s."""
    data = _base(hours=24.5)
    data["scenario"]["systems"] = ["G"]
    data["stations"] = data["stations"][:1]
    data["stations"][0]["multipath"] = {"amplitude_m": 0.5, "decay_deg": 15.0}
    res = simulate(scenario_from_dict(data))
    r = res.stations["LABA"]
    mp = r.parts[("G", "C1C")]["mp"]
    lag = round(86164.0905 / 30.0)  # sidereal day (common practice) in 30-s epochs: 4.1 s short of it
    vis = np.isfinite(r.obs["C1C"])
    both = vis[:-lag] & vis[lag:]
    a, b = mp[:-lag][both], mp[lag:][both]
    # 4 s of satellite motion (≈ 0.03°) and the nodal drift (Ω̇ − Ω̇_nominal, < 0.01°/day) move it a little
    assert np.sqrt(np.mean((a - b) ** 2)) < 0.05 * np.sqrt(np.mean(a ** 2))
    # one solar day later it does not repeat
    lag2 = 2880
    both2 = vis[:-lag2] & vis[lag2:]
    assert np.sqrt(np.mean((mp[:-lag2][both2] - mp[lag2:][both2]) ** 2)) > 0.3 * np.sqrt(np.mean(a ** 2))


def test_reproducible_and_cli(tmp_path):
    from ctt.cli import main

    scn = tmp_path / "s.toml"
    scn.write_text(
        '[scenario]\nname = "cli"\nstart_gps = 2021-01-01T00:00:00\nduration_h = 0.25\ninterval_s = 30.0\n'
        'random_state = 5\nsystems = ["G"]\n\n[[stations]]\nid = "LABA"\n'
        'position_m = [4300000.0, 700000.0, 4650000.0]\n'
        '[stations.delays]\nreceiver_ns = { C1C = 1.0, C2W = 2.0, C5Q = 3.0 }\n'
        '[stations.clock]\noffset_ns = 3.0\n[[stations.clock.noise]]\ntype = "flicker_fm"\nadev_1s = 1e-14\n')
    assert main(["simulate", "--scenario", str(scn), "--out", str(tmp_path / "a")]) == 0
    r2 = run_scenario(scn, tmp_path / "b")
    a = (tmp_path / "a" / r2.files["obs"][0].name).read_bytes()
    assert a == r2.files["obs"][0].read_bytes()  # same random_state, same bytes
    assert (tmp_path / "a" / "truth.csv").read_text() == (tmp_path / "b" / "truth.csv").read_text()


def test_bad_scenario_names_the_key(tmp_path):
    from ctt.errors import ConfigError
    from ctt.simulate import load_scenario

    p = tmp_path / "bad.toml"
    p.write_text('[scenario]\nstart_gps = 2021-01-01T00:00:00\nduration_h = 1.0\nrandom_state = 1\n'
                 '[[stations]]\nid = "LABA"\nposition_m = [1.0, 2.0, 3.0]\n')
    with pytest.raises(ConfigError, match=r"stations\[1\]\.position_m"):
        load_scenario(p)
    p.write_text('[scenario]\nstart_gps = 2021-01-01T00:00:00\nduration_h = 1.0\nrandom_state = 1\ncolour = 3\n')
    with pytest.raises(ConfigError, match="colour"):
        load_scenario(p)


def test_real_nav_file_as_satellite_source(shared_data, tmp_path):
    data = _base(hours=0.5)
    data["scenario"]["systems"] = ["G"]
    data["satellites"] = {"source": "nav", "nav_file": str(shared_data / "brdc0010.21n")}
    res = simulate(scenario_from_dict(data))
    r = res.stations["LABA"]
    assert all(s.startswith("G") for s in r.sats) and len(r.sats) >= 28
    assert np.isfinite(r.obs["C1C"]).sum(axis=1).min() >= 5
    files = write_outputs(res, tmp_path)
    assert (tmp_path / "brdc0010.21n").is_file() and files["obs"]


# ---------------------------------------------------------------- committed demo

DEMO = __import__("pathlib").Path(__file__).resolve().parents[1] / "data_demo"


def test_demo_folder_is_complete_and_small():
    import ctt.config as config
    total = sum(p.stat().st_size for p in DEMO.iterdir() if p.is_file())
    assert total < 5_000_000
    pair = config.load_pair(DEMO / "aldr-brkw.toml")
    found = pair.resolve_inputs("2021-01-01")
    for k in ("obs_a", "obs_b", "nav", "met_a", "met_b"):
        assert found[k] is not None and found[k].is_file(), k
    assert [c.expected_delay_change_ns for c in pair.station_a.changes] == [5.0]
    truth = pd.read_csv(DEMO / "truth.csv")
    assert len(truth) == 2880
    app = truth["ALDR-BRKW_apparent_ns"] - truth["ALDR-BRKW_ns"]
    step_at = truth["time_utc"][np.flatnonzero(np.diff(app.to_numpy()) > 1)[0] + 1]
    # the first epoch at or after 15:00:00 UTC: time tags are whole GPS half-minutes, GPS − UTC = 18 s
    assert step_at == "2021-01-01T15:00:12Z" and app.iloc[-1] == pytest.approx(5.0, abs=1e-5)


@pytest.mark.slow
def test_demo_regenerates_identically(tmp_path):
    """`ctt simulate --scenario data_demo/scenario.toml` reproduces the committed files."""
    res = run_scenario(DEMO / "scenario.toml", tmp_path)
    for kind in ("obs", "nav", "met", "truth"):
        for p in res.files[kind]:
            assert p.read_bytes() == (DEMO / p.name).read_bytes(), p.name


def test_met_file_reads_back_with_the_project_reader(written):
    import ctt.formats.rinex_met as met_mod
    res, _ = written
    r = res.stations["LABA"]
    m = met_mod.read_met(res.files["met"][0])
    step = int(round(res.scenario.output["met_interval_s"] / res.scenario.interval_s))
    np.testing.assert_array_equal(m.time_ns, r.time_ns[::step])
    # F7.1 fields (RINEX 2.11 met): 0.05 of the unit
    for key, typ in (("p", "PR"), ("t", "TD"), ("rh", "HR")):
        np.testing.assert_allclose(m.values[typ], r.met[key][::step], rtol=0, atol=0.05 + 1e-9)
    assert np.ptp(m.values["TD"]) > 0.3  # the daily cycle (4 °C amplitude) moves it even in 2 night hours


def _station_against_truth(tmp_path, systems, signals, code_noise_m=0.3, shapiro=True):
    """One simulated station (1 h) through ctt.measure: clock − true clock per 'ok' satellite-epoch,
    and each value's variance from the configured code noise (tests/simulated_budget.py)."""
    from ctt.config import load_station
    from ctt.measure import MeasureOptions, measure_station
    from ctt.orbits import BroadcastOrbits
    from ctt.formats.rinex_met import read_met
    from ctt.formats.rinex_nav import read_nav
    from ctt.formats.rinex_obs import read_obs
    from simulated_budget import satellite_terms

    data = _base(hours=1.0, shapiro=shapiro)
    data["stations"] = data["stations"][:1]
    data["stations"][0]["code_noise_m"] = code_noise_m
    res = simulate(scenario_from_dict(data))
    files = write_outputs(res, tmp_path)
    nav = read_nav(files["nav"][0])
    day = measure_station(read_obs(files["obs"][0]), BroadcastOrbits(nav), load_station(files["station"][0]),
                          MeasureOptions(systems=systems, signals=signals), nav_header=nav.header,
                          met=read_met(files["met"][0]))
    t = day.table
    ok = (t["flag"] == "ok").to_numpy()
    tt = t["time"].to_numpy(np.int64)[ok]
    r = res.stations["LABA"]
    d = t["clock_ns"].to_numpy()[ok] - r.clock_s[np.searchsorted(r.time_ns, tt)] * 1e9
    var, _, _ = satellite_terms(r, signals, tt, t["sat"].to_numpy(str)[ok], "epochs")
    assert ok.sum() > 500 and np.isfinite(var).all()
    se = math.sqrt(var.sum()) / d.size   # standard error of the mean of independent values
    print(f"{systems} {signals} σ0 {code_noise_m} m shapiro={shapiro}: {d.size} values, mean {d.mean():+.4f} ns, "
          f"SE {se:.4f} ns, mean square / predicted {np.mean(d * d / var):.3f}")
    return d, var, se


@pytest.mark.parametrize("systems, signals", [(("G",), "iono-free"), (("E",), "iono-free"), (("G", "E"), "single")])
def test_measurement_model_recovers_the_truth(tmp_path, systems, signals):
    """End to end: files -> ctt.measure -> local clock − GPS time against the simulator's truth.

    The simulator shares no measurement code with ctt.measure (module docstring of
    ctt.simulate). Broadcast = true satellite clocks, iono_scale = 1 and the met files
    carry the met truth, so only noise is left (σ0 = 0.3 m): the mean over all satellite-epochs
    must agree within 3.29 standard errors of the mean (two-sided 99.9 %, normal; from the
    configured noise: 0.21 ns iono-free, 0.054 ns single) plus 3 ps (met rounding to 0.1 hPa /
    0.1 °C / 0.1 % moves the slant delay by < 1 mm at 10° elevation).
    """
    from simulated_budget import Z999

    d, _, se = _station_against_truth(tmp_path, systems, signals)
    assert abs(d.mean()) <= Z999 * se + 0.003


@pytest.mark.parametrize("systems, signals, shapiro", [
    # the simulator puts the Shapiro delay on every observation (IERS 2010 eq. 11.17, 12-19 mm
    # for GPS); ctt.measure applies it too (column shapiro_m). Before it did, the mean was
    # +0.049 ns against a bound of 0.026 ns (GPS iono-free), which these cases caught; with the
    # simulator's Shapiro delay switched off, ctt's now shows as -0.051 ns the other way
    (("G",), "iono-free", True), (("E",), "iono-free", True), (("G", "E"), "single", True),
])
def test_measurement_model_recovers_the_truth_nearly_noiseless(tmp_path, systems, signals, shapiro):
    """As above with σ0 = 0.01 m, so the bound on the mean is the noise's own standard error.

    The standard error of the mean over the satellite-epochs is √(Σ var)/n with each var from the
    configured noise (simulation truth: (α² + β²)(σ0/sin el)², tests/simulated_budget.py): 7.0 ps
    GPS iono-free, 1.8 ps single. Bound: 3.29 of them (two-sided 99.9 %, normal) plus 3 ps for the
    met files' rounding (above). A troposphere 1 % off (~0.17 ns here) or any modelling difference
    of a few mm between ctt.measure and the simulator fails it (the earlier bound, 4 sample standard
    errors + 0.05 ns, let both through). And the values scatter as the configured noise says:
    Σ d²/var within the chi-square(n) 0.05-99.95 % quantiles (scipy.stats).
    """
    from scipy import stats

    from simulated_budget import Z999

    d, var, se = _station_against_truth(tmp_path, systems, signals, code_noise_m=0.01, shapiro=shapiro)
    assert abs(d.mean()) <= Z999 * se + 0.003
    assert stats.chi2.ppf(0.0005, d.size) <= np.sum(d * d / var) <= stats.chi2.ppf(0.9995, d.size)


def test_multi_day_scenario_writes_daily_files(tmp_path):
    import ctt.config as config
    import ctt.formats.rinex_obs as obs_mod
    data = _base(hours=48.0)
    data["scenario"]["interval_s"] = 300.0  # keeps the test quick
    res = simulate(scenario_from_dict(data))
    files = write_outputs(res, tmp_path)
    assert len(files["obs"]) == 4 and len(files["nav"]) == 2 and len(files["met"]) == 4
    assert {p.name[12:19] for p in files["obs"]} == {"2021001", "2021002"}
    pair = config.load_pair(files["pair"][0])
    for date, doy in (("2021-01-01", "001"), ("2021-01-02", "002")):
        found = pair.resolve_inputs(date)
        assert doy in found["obs_a"].name and doy in found["nav"].name and doy in found["met_b"].name
    second = next(p for p in files["obs"] if p.name.startswith("LABA") and "2021002" in p.name)
    o = obs_mod.read_obs(second)
    assert o.time_ns[0] == ts.civil_to_ns(2021, 1, 2) and o.time_ns.size == 288
    assert len(res.truth) == 576


def test_orbit_error_moves_the_range_by_its_line_of_sight_part():
    base = _quiet(_base(hours=0.5))
    base["stations"] = base["stations"][:1]
    res0 = simulate(scenario_from_dict(copy.deepcopy(base)))
    base["satellites"] = {"orbit_error_m": 1.0}
    res1 = simulate(scenario_from_dict(base))
    d = res1.stations["LABA"].obs["C1C"] - res0.stations["LABA"].obs["C1C"]
    ok = np.isfinite(d)
    # the line-of-sight part of a 3-D error of 1 m rms per axis has an rms near 1 m (0.2..1.5 m allowed)
    # and never exceeds the error's length (5 m bounds it for these draws)
    assert 0.2 < np.sqrt(np.mean(d[ok] ** 2)) < 1.5
    assert np.abs(d[ok]).max() < 5.0
