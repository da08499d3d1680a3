"""Carrier phase of the scenario simulator: ambiguities, wind-up, slips, clock jumps, products.

External references named beside the checks: Wu et al. (1993), "Effects of
antenna orientation on GPS carrier phase", manuscripta geodaetica 18, 91-98
(the wind-up formula); the RINEX 3.04 format (0.001 field resolution); the
SP3-c and RINEX clock 3.00 formats (read back with the project's readers);
IS-GPS-200 (carrier frequencies); IERS Conventions 2010 eq. 11.17 (Shapiro).
"""

from __future__ import annotations

import copy
import datetime as _dt
import math

import numpy as np
import pandas as pd
import pytest

from ctt.errors import ConfigError
from ctt.simulate import C_MPS, phase_windup_cycles, scenario_from_dict, simulate, write_outputs

F1, F2 = 1575.42e6, 1227.60e6  # IS-GPS-200
LAM1, LAM2 = C_MPS / F1, C_MPS / F2


def _utc(text):
    return _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))


def _scenario(hours=2.0):
    return {
        "scenario": {"name": "phase", "start_gps": _dt.datetime(2021, 1, 1), "duration_h": hours,
                     "interval_s": 30.0, "random_state": 11, "systems": ["G"]},
        # no dispersive or unmodelled term: code and phase differ only by ambiguity, wind-up, group delay
        "propagation": {"ionosphere": False},
        "output": {"gzip": False, "products": True},
        "stations": [{
            "id": "LABP", "lat_deg": 47.0, "lon_deg": 9.0, "height_m": 600.0,
            "signals": {"G": ["C1W", "C2W"]}, "code_noise_m": 0.0, "phase_noise_m": 0.0,
            "delays": {"receiver_ns": {"C1W": 0.0, "C2W": 0.0}},
            "cycle_slips_per_h": 0.1,
            # a free-running receiver oscillator kept within 0.5 ms of GPS time (about 27 min per reset)
            "clock": {"offset_ns": 1000.0, "frequency_offset": -3.1e-7, "ms_jump_threshold_us": 500.0},
            "clock_jumps": [{"time": _utc("2021-01-01T01:40:00Z"), "ms": 2}],
            "slips": [{"time": _utc("2021-01-01T00:20:00Z"), "cycles": {"1": 3, "2": -2}},
                      {"time": _utc("2021-01-01T01:10:00Z"), "cycles": {"1": 1}, "lli": True}],
        }],
    }


@pytest.fixture(scope="module")
def sim(tmp_path_factory):
    res = simulate(scenario_from_dict(_scenario()))
    out = tmp_path_factory.mktemp("phase")
    write_outputs(res, out)
    return res, out


def _ambiguity(r, band):
    """L − (P − group delay)/λ − wind-up: the integer ambiguity plus slips (cycles)."""
    lam = LAM1 if band == "1" else LAM2
    code = f"C{band}W"
    gd = r.parts[("G", code)]["gd"]
    return r.obs[f"L{band}W"] - (r.obs[code] - gd) / lam - r.windup_cycles


def test_phases_read_back_exactly(sim):
    """The RINEX 3.04 file holds the simulated phases to its 0.001-cycle resolution (RINEX 3.04 F14.3)."""
    from ctt.formats.rinex_obs import read_obs

    res, _ = sim
    r = res.stations["LABP"]
    o = read_obs(res.files["obs"][0])
    cols = [r.sats.index(s) for s in o.sats]
    for k in ("L1W", "L2W", "C1W"):
        np.testing.assert_array_equal(o.obs[k], r.obs[k][:, cols])
    # LLI bit 0 on the configured slip that asks for it (RINEX 3.04 §5.3: loss of lock)
    ev = pd.read_csv(res.files["truth"][2])
    row = ev[(ev["kind"] == "cycle_slip") & (ev["source"] == "configured") & ev["lli"]].iloc[0]
    k = int(np.searchsorted(r.time_ns, row["time_gps_ns"]))
    assert o.lli["L1W"][k, list(o.sats).index(row["sat"])] & 1


def test_ambiguities_are_integers_and_change_only_at_events(sim):
    """Code and phase share every non-dispersive term, so L − P/λ − wind-up is an integer per arc.

    Rounding of both fields to 0.001 (RINEX 3.04) leaves ≤ 0.0005/λ + 0.0005 ≈ 0.003 cycles."""
    res, _ = sim
    r = res.stations["LABP"]
    ev = pd.read_csv(res.files["truth"][2])
    for band in ("1", "2"):
        n = _ambiguity(r, band)
        ok = np.isfinite(n)
        assert ok.sum() > 2000
        np.testing.assert_allclose(n[ok], np.round(n[ok]), rtol=0, atol=0.005)
        # epoch-to-epoch changes of N inside tracked stretches happen exactly at the listed slips
        d = np.round(np.diff(n, axis=0))
        k, j = np.nonzero(np.isfinite(d) & (d != 0))
        found = {(int(r.time_ns[kk + 1]), r.sats[jj], int(d[kk, jj])) for kk, jj in zip(k, j)}
        slips = ev[(ev["kind"] == "cycle_slip") & (ev["obs"] == f"L{band}W") & (ev["cycles"] != 0)]
        listed = {(int(t), s, int(c)) for t, s, c in zip(slips["time_gps_ns"], slips["sat"], slips["cycles"])}
        assert found == listed
    conf = ev[(ev["kind"] == "cycle_slip") & (ev["source"] == "configured")]
    assert sorted(conf["cycles"].astype(int).tolist()) == [-2, 1, 3]


def test_clock_jumps_whole_ms_and_code_and_phase_follow(sim):
    """Receiver clock steps of whole ms keep |x| ≤ 0.5 ms; code and phase both jump by c·Δ (no new N)."""
    res, _ = sim
    r = res.stations["LABP"]
    ev = pd.read_csv(res.files["truth"][2])
    jumps = ev[ev["kind"] == "clock_jump"]
    # x = 1 µs − 3.1e-7·t reaches −0.5 ms at t0 = 501e-6/3.1e-7 s, then every 1 ms/3.1e-7 s (arithmetic)
    t_end = (r.time_ns[-1] - r.time_ns[0]) / 1e9
    expected = 1 + math.floor((t_end - 501e-6 / 3.1e-7) / (1e-3 / 3.1e-7))
    assert expected == 2 and (jumps["source"] == "threshold").sum() == expected
    assert jumps.loc[jumps["source"] == "configured", "jump_ms"].tolist() == [2.0]
    dx = np.diff(r.clock_s)
    k = np.flatnonzero(np.abs(dx) > 1e-4) + 1
    assert set(r.time_ns[k].tolist()) == set(jumps["time_gps_ns"].tolist())
    step_ms = (dx[k - 1] - np.median(dx)) * 1e3  # less the oscillator's own 30-s change (−9.3 µs)
    np.testing.assert_allclose(step_ms, np.round(step_ms), rtol=0, atol=1e-9)
    assert sorted(np.round(step_ms).tolist()) == sorted(jumps["jump_ms"].tolist())
    free = np.abs(r.clock_s) <= 0.5e-3 + 1e-12
    assert free.mean() > 0.6  # outside the configured +2 ms stretch the receiver stays within 0.5 ms
    for kk in k:
        p = r.obs["C1W"][kk] - r.obs["C1W"][kk - 1]
        l1 = (r.obs["L1W"][kk] - r.obs["L1W"][kk - 1]) * LAM1
        ok = np.isfinite(p) & np.isfinite(l1)
        # code and phase move together (by the jump plus 30 s of geometry) to the 0.001 fields
        assert np.nanmax(np.abs(p - l1)[ok]) < 0.5 * LAM1
        # at least c·1 ms less 30 s of range rate (under 900 m/s for GPS seen from the ground, common practice)
        assert np.nanmin(np.abs(p[ok])) > C_MPS * 1e-3 - 30 * 900.0


def test_windup_closed_form_overhead():
    """Satellite at the zenith of an equatorial receiver, Sun at angle ψ from north in the sky plane.

    With k̂ along both antennas' z axes, Wu et al.'s dipoles reduce to D' = 2x̂', D = 2x̂ (north), so
    the wind-up is the signed angle between the satellite's x axis (towards the Sun) and north:
    φ = −ψ/2π cycles (ψ measured from north towards east), a closed form independent of the code.
    """
    rx = np.array([6378137.0, 0.0, 0.0])
    sat = np.array([26_560_000.0, 0.0, 0.0])
    psi = np.radians(np.array([-150.0, -90.0, -30.0, 0.0, 10.0, 45.0, 90.0, 170.0]))
    # Sun far away in the plane perpendicular to the line of sight, direction (0, sin ψ, cos ψ) (east, north)
    sun = sat + 1.496e11 * np.stack([np.zeros_like(psi), np.sin(psi), np.cos(psi)], axis=-1)
    phi = phase_windup_cycles(sat[None, :], rx[None, :], sun)
    np.testing.assert_allclose(phi, -psi / (2 * math.pi), rtol=0, atol=1e-9)


def test_windup_full_turn_of_the_satellite_is_one_cycle():
    """Turning the satellite once about the line of sight adds exactly one cycle (Wu et al. 1993)."""
    rx = np.array([4_300_000.0, 800_000.0, 4_600_000.0])
    sat = np.array([15_000_000.0, 5_000_000.0, 20_000_000.0])
    ang = np.linspace(0.0, 2 * math.pi, 721)
    # the Sun direction (seen from the satellite) swept through a full turn about the satellite's z axis
    z = -sat / np.linalg.norm(sat)
    a = np.cross(z, [0.0, 0.0, 1.0])
    a /= np.linalg.norm(a)
    b = np.cross(z, a)
    sun = sat + 1.496e11 * (np.cos(ang)[:, None] * a + np.sin(ang)[:, None] * b)
    phi = np.unwrap(phase_windup_cycles(sat[None, :], rx[None, :], sun) * 2 * math.pi) / (2 * math.pi)
    assert abs(abs(phi[-1] - phi[0]) - 1.0) < 1e-9


def test_windup_in_data_is_continuous_and_of_the_expected_size(sim):
    res, _ = sim
    w = res.stations["LABP"].windup_cycles
    step = np.abs(np.diff(w, axis=0))
    # nominal yaw turns slowly except near noon/midnight; 30 s steps stay well under half a cycle
    assert np.nanmax(step) < 0.25
    assert 0.05 < np.nanmax(np.ptp(w, axis=0)) < 5.0  # a pass winds up by a fraction of a cycle to a few


def test_shapiro_delay_size():
    """Shapiro delay for GPS: 2GM/c²·ln(...) between ~12.7 mm (zenith) and ~19 mm (horizon) (IERS 2010 eq. 11.17)."""
    base = _scenario(hours=0.5)
    base["stations"][0].update(cycle_slips_per_h=0.0, slips=[], clock_jumps=[],
                               clock={"offset_ns": 0.0})
    a = simulate(scenario_from_dict(copy.deepcopy(base)))
    base["propagation"]["shapiro"] = False
    b = simulate(scenario_from_dict(base))
    d = a.stations["LABP"].obs["C1W"] - b.stations["LABP"].obs["C1W"]
    ok = np.isfinite(d)
    assert 0.0115 < np.min(d[ok]) and np.max(d[ok]) < 0.0195


def test_products_reproduce_the_truth(sim):
    """SP3-c and RINEX clock files of the truth, read and interpolated by ctt.orbits.PreciseOrbits,
    give the true positions to ≤ 1 mm (SP3 F14.6 km: 0.5 mm rounding) and the true clock with the
    periodic relativistic term added back (−2 r·v/c²) to ≤ 1 ps (RINEX clock 12 mantissa digits)."""
    from ctt.formats.rinex_clock import read_clock
    from ctt.formats.sp3 import read_sp3
    from ctt.orbits import PreciseOrbits

    res, _ = sim
    sp3_path = next(p for p in res.files["products"] if p.name.endswith(".sp3"))
    clk_path = next(p for p in res.files["products"] if p.name.endswith(".clk"))
    po = PreciseOrbits(read_sp3(sp3_path), clk=read_clock(clk_path))
    r = res.stations["LABP"]
    t = r.time_ns[::7]
    S = np.tile(np.array(r.sats), t.size)
    T = np.repeat(t, len(r.sats))
    got = po.states(S, T, -0.072)
    true = res.model.states(S, T, -0.072)
    assert np.max(np.abs(got.pos_m - true.pos_m)) < 1e-3
    clk_err = (got.clock_s + got.relativity_s) - (true.clock_s + true.relativity_s)
    assert np.max(np.abs(clk_err)) < 1e-12


def test_slip_outside_an_arc_is_refused():
    bad = _scenario(hours=0.5)
    bad["stations"][0]["slips"] = [{"time": _utc("2021-01-01T00:10:00Z"), "sat": "G99", "cycles": {"1": 1}}]
    with pytest.raises(ConfigError, match=r"slips\[1\]\.sat"):
        simulate(scenario_from_dict(bad))
    bad["stations"][0]["slips"] = [{"time": _utc("2021-01-01T00:10:00Z"), "cycles": {"5": 1}}]
    with pytest.raises(ConfigError, match=r"slips\[1\]\.cycles"):
        scenario_from_dict(bad)
