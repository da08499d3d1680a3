"""End-to-end accuracy of ctt pair against the simulator's truth (ctt.simulate).

The simulator writes RINEX files from a known truth with its own forward model
(it shares only the satellite, atmosphere and tide *model functions*, not the
measurement code), so these tests catch errors in time tags, light time,
Earth rotation, relativity, group delays and delay signs. Scenario: two
invented stations ~ 600 km apart (east-west and north-south), a synthetic GPS
constellation, 6 h at 30 s (where the noise is realistic, 24 h, and for
13-minute tracks two such days, so that they number 177 rather than 22). Targets from the
common-view issue where it sets them; the bounds on the bias and the scatter
against the truth come from the standard error of the estimate: the
simulator's configured code noise (simulation truth) propagated through
ctt's own combination, track fit and weights (tests/simulated_budget.py),
with two-sided 99.9 % quantiles (normal for the mean, chi-square for the sum
of squares; scipy.stats).
"""

import copy
import datetime as dt

import numpy as np
import pandas as pd
import pytest

from simulated_budget import point_budget, statistics

from ctt import timescales as ts
from ctt.pipeline import PairOptions, pair_day_from_config, run_pair
from ctt.measure import MeasureOptions
from ctt.simulate import scenario_from_dict, simulate, write_outputs

BASE = {
    "scenario": {"name": "accuracy", "start_gps": dt.datetime(2021, 1, 1, 0, 0, 0), "duration_h": 6.0,
                 "interval_s": 30.0, "random_state": 7, "systems": ["G"]},
    "satellites": {"source": "synthetic", "gps_count": 31,
                   "klobuchar_alpha": [1.1e-8, 1.5e-8, -6.0e-8, -1.2e-7],
                   "klobuchar_beta": [9.0e4, 1.6e4, -2.0e5, 1.2e5], "clock_error_ns": 1.0},
    "propagation": {"earth_rotation": True, "troposphere": True, "wet_random_walk_mm_per_sqrt_h": 0.0,
                    "ionosphere": True, "iono_scale": 1.0, "solid_tide": True},
    "output": {"gzip": True, "rinex2": False, "met_interval_s": 300.0},
    "stations": [],
    "pairs": [{"a": "TSTA", "b": "TSTB"}],
}


def _station(sid, lat, lon, h, sigma0, clock):
    return {"id": sid, "name": f"test station {sid} (invented)", "lat_deg": lat, "lon_deg": lon, "height_m": h,
            "antenna_type": "INVENTED-T1", "antenna_delta_hen_m": [0.05, 0.0, 0.0], "receiver_type": "INVENTED-R",
            "elevation_mask_deg": 10.0, "code_noise_m": sigma0, "phase_noise_m": 0.001,
            "signals": {"G": ["C1C", "C2W"]},
            "delays": {"receiver_ns": {"C1C": 25.0, "C2W": 27.5}, "u_receiver_ns": 1.0, "cable_ns": 140.0,
                       "u_cable_ns": 0.2, "reference_ns": 9.0, "u_reference_ns": 0.3},
            "met": {"pressure_hpa": 1000.0, "temperature_c": 10.0, "humidity_pct": 60.0,
                    "pressure_amplitude_hpa": 1.0, "temperature_amplitude_c": 4.0, "humidity_amplitude_pct": 10.0},
            "clock": clock}


def _scenario(sigma0, iono_scale=1.0, steps=None, state=7, hours=6.0):
    d = copy.deepcopy(BASE)
    d["scenario"]["random_state"] = state
    d["scenario"]["duration_h"] = hours
    d["propagation"]["iono_scale"] = iono_scale
    ca = {"offset_ns": 40.0, "frequency_offset": 2e-13, "drift_per_day": 0.0,
          "noise": [{"type": "white_fm", "adev_1s": 1e-11}]}
    cb = {"offset_ns": -75.0, "frequency_offset": -1e-13, "drift_per_day": 0.0,
          "noise": [{"type": "white_fm", "adev_1s": 1e-12}]}
    if steps:
        ca["steps"] = steps
    d["stations"] = [_station("TSTA", 46.5, 6.5, 500.0, sigma0, ca),
                     _station("TSTB", 43.0, 12.0, 300.0, sigma0, cb)]
    return d


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    """Simulated folders keyed by a name (``get.results[name]``: the simulation's result)."""
    made = {}

    def get(name, **kw):
        if name not in made:
            out = tmp_path_factory.mktemp(name)
            res = simulate(scenario_from_dict(_scenario(**kw)))
            write_outputs(res, out)
            made[name] = out
            get.results[name] = res
        return made[name]

    get.results = {}
    get.budgets = {}  # (name, mode, signals) -> what _against_budget returns, computed once
    return get


def _errors(folder, mode="epochs", signals="iono-free", smoothing_s=0.0):
    pair_file = [p for p in folder.glob("*.toml") if "-" in p.stem][0]
    inputs, a, b, opts = pair_day_from_config(pair_file, "2021-01-01")
    m = MeasureOptions(signals=signals, smoothing_s=smoothing_s)
    r = run_pair(inputs, a, b, PairOptions(mode=mode, orbits="broadcast", measure=m))
    truth = pd.read_csv(folder / "truth.csv")
    tg = ts.parse_iso_array(truth["time_gps"])
    o = r.offset[r.offset["flag"] == "ok"]
    tv = np.interp(o["time"].to_numpy(float), tg.astype(float), truth["TSTA-TSTB_apparent_ns"].to_numpy())
    err = o["offset_ns"].to_numpy() - tv
    return err, o, r


def _against_budget(world, name, mode, signals, **kw):
    """Error against the truth, less the parts the truth explains, and the white noise it should have.

    Returns (r, var): r = ctt − truth − multipath − the track line's miss of the true clocks
    (both computed from the simulation, tests/simulated_budget.py), var = variance of each
    point from the configured code noise propagated through ctt's combination, track fit and
    weights. If ctt's model equals the simulator's, r is N(0, var), independent between points.
    """
    key = (name, mode, signals)
    if key not in world.budgets:
        err, o, r = _errors(world(name, **kw), mode=mode, signals=signals)
        b = point_budget(world.results[name], r.satellites, ("TSTA", "TSTB"), signals, mode)
        b = b.reindex(o["time"].to_numpy())
        assert b.notna().all().all()
        world.budgets[key] = (err - b["mp_ns"].to_numpy() - b["clock_ns"].to_numpy(), b["var_ns2"].to_numpy())
    return world.budgets[key]


def _realistic(world, mode, signals):
    """σ0 = 0.3 m, 24 h; tracks over two independent days (random_state 7 and 8: ~176 tracks)."""
    days = [("day", 7)] + ([("day8", 8)] if mode == "tracks" else [])
    parts = [_against_budget(world, name, mode, signals, sigma0=0.3, hours=24.0, state=state)
             for name, state in days]
    return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


@pytest.mark.parametrize("signals", ["iono-free", "single"])
def test_physics_exactness_nearly_noiseless(world, signals):
    # σ0 = 0.01 m at zenith: any error above ~0.1 ns is a modelling bug (issue target:
    # |mean| <= 0.05 ns, RMS <= 0.15 ns in epoch mode, iono-free and single with Klobuchar).
    err, o, _ = _errors(world("exact", sigma0=0.01), signals=signals)
    print(f"{signals}: {err.size} epochs, mean {err.mean():+.4f} ns, RMS {np.sqrt(np.mean(err**2)):.4f} ns")
    assert err.size > 600
    assert abs(err.mean()) <= 0.05
    assert np.sqrt(np.mean(err**2)) <= 0.15


@pytest.mark.parametrize("mode", ["epochs", "tracks"])
@pytest.mark.parametrize("signals", ["iono-free", "single"])
def test_physics_exactness_within_the_configured_noise(world, signals, mode):
    """Nearly noiseless (σ0 = 0.01 m): what is left against the truth is the configured code noise.

    The issue's targets above allow 0.05 ns of bias; the noise itself resolves far less: over
    720 epochs (iono-free) the standard error of the mean is 2.6 ps, over 22 tracks 3.1 ps (1.1 ps
    single), so a modelling difference of ~0.01 ns between ctt and the simulator shows here.
    Tracks: the line fitted over 13 minutes misses the true clock at the midpoint by 0.08 ns RMS,
    0.22 ns at most (clock A is white FM at 1e-11 over 1 s); that miss is computed from the true clocks and
    taken out (tests/simulated_budget.py), it is not an error of ctt.
    """
    r, var = _against_budget(world, "exact", mode, signals, sigma0=0.01)
    assert r.size >= (700 if mode == "epochs" else 21)
    bound, chi2, lo, hi = statistics(r, var, f"exact {signals} {mode}")
    assert abs(r.mean()) <= bound, "bias against the truth beyond 3.29 standard errors"
    assert lo <= chi2 <= hi, "scatter against the truth outside what the configured noise gives (99.9 %)"


@pytest.mark.slow
@pytest.mark.parametrize("signals, mode, rms_target", [
    ("iono-free", "epochs", 2.5), ("iono-free", "tracks", 0.5),
    ("single", "epochs", 0.9), ("single", "tracks", 0.2),
])
def test_realistic_code_noise(world, signals, mode, rms_target):
    # σ0 = 0.3 m / sin(el), 10° mask, 6 h (issue targets: the floor an ideal weighted mean reaches
    # with this scenario's geometry; the bias and the scatter against the configured noise are
    # checked over a whole day below, where 22 tracks could not resolve them).
    err, o, _ = _errors(world("noisy", sigma0=0.3), mode=mode, signals=signals)
    rms = np.sqrt(np.mean(err**2))
    print(f"{signals} {mode}: {err.size} points, mean {err.mean():+.4f} ns, RMS {rms:.4f} ns")
    assert rms <= rms_target


@pytest.mark.slow
@pytest.mark.parametrize("mode", ["epochs", "tracks"])
@pytest.mark.parametrize("signals", ["iono-free", "single"])
def test_realistic_code_noise_bias(world, signals, mode):
    """σ0 = 0.3 m / sin(el): 2860 epochs of one day, 177 tracks of two independent days. The bias
    against the truth is within 3.29 standard errors of the mean of the configured noise propagated
    (iono-free tracks: SE 0.039 ns, bound 0.127 ns, measured +0.041 ns; single tracks: bound
    0.043 ns, measured +0.012 ns; over the 22 tracks of 6 h the bound was max(0.05, 3 × sample SE)
    = 0.27 ns iono-free for a measured −0.12 ns)."""
    r, var = _realistic(world, mode, signals)
    assert r.size >= (2800 if mode == "epochs" else 170)
    bound, *_ = statistics(r, var, f"realistic {signals} {mode}")
    assert abs(r.mean()) <= bound


@pytest.mark.slow
@pytest.mark.parametrize("signals, mode", [
    pytest.param("iono-free", "epochs", marks=pytest.mark.xfail(strict=True, reason=(
        "measured chi2/n 1.099 over 2855 epochs (RMS 3.18 ns against the propagated 2.85 ns), above "
        "the 99.95 % quantile 1.089. Cause, measured: ctt.measure's response to the injected noise is exact "
        "(to 1e-5 ns), and the injected noise of one epoch is uncorrelated between satellites (0.6 %, "
        "sampling level), but the epoch's MAD rejection (3.5 x scaled MAD of ~8 satellites) flags 1.2 % "
        "of these purely normal satellite-epochs at each station, and the satellites it keeps are those "
        "near the epoch's median: their errors then correlate by 1.3 %, and an epoch's mean varies 10 % "
        "more than independent noise gives. A cost of rejecting normal tails. Tried: a floor of 1.0 "
        "a-priori sigma (ctt.measure.FLOOR_FACTOR, now 0.5) passes here (chi2/n 1.053) and brings BRUS-CAGZ "
        "closer to the IGS station clocks (2.30/0.65/2.58 -> 2.23/0.60/2.26 ns epochs/smoothed/all-in-view), "
        "but moves ZIMM-CN00's all-in-view-vs-CV track scatter 0.956 -> 1.008 ns and the demo's cable step "
        "+5.15 -> +4.25 ns (the step estimate is window-dependent): not changed on this evidence"))),
    ("iono-free", "tracks"), ("single", "epochs"), ("single", "tracks"),
])
def test_realistic_code_noise_scatter(world, signals, mode):
    """The scatter against the truth is the configured code noise propagated, no more, no less:
    Σ r²/var within the 0.05 % and 99.95 % quantiles of chi-square(n) (scipy.stats), i.e.
    for 177 tracks the RMS within 0.83-1.18 times the prediction (0.51 ns iono-free, 0.17 ns
    single over these two days; measured 0.50 / 0.18 ns), for 2860 epochs 0.96-1.04 times it
    (2.85 / 0.97 ns; measured 3.18 / 1.04 ns)."""
    r, var = _realistic(world, mode, signals)
    _, chi2, lo, hi = statistics(r, var, f"realistic {signals} {mode}")
    assert lo <= chi2 <= hi


@pytest.mark.slow
def test_carrier_smoothing_brings_iono_free_epochs_below_half_a_nanosecond(world):
    err, o, _ = _errors(world("noisy", sigma0=0.3), mode="epochs", signals="iono-free", smoothing_s=600.0)
    rms = np.sqrt(np.mean(err**2))
    print(f"smoothed iono-free epochs: mean {err.mean():+.4f} ns, RMS {rms:.4f} ns")
    assert rms < 0.5


@pytest.mark.slow
def test_ionosphere_stronger_than_broadcast(world):
    # The true ionosphere 30 % above Klobuchar. Single frequency then carries
    # 0.3 x the modelled slant delay at each end (first-order ionosphere,
    # IS-GPS-200 model); in common view the error of A - B is the weighted mean
    # over common satellites of 0.3 (I_A - I_B)/c, which we predict from the
    # modelled delays and compare; iono-free removes it.
    folder = world("iono13", sigma0=0.01, iono_scale=1.3)
    e_single, o, r = _errors(folder, signals="single")
    e_if, _, _ = _errors(folder, signals="iono-free")
    sat = r.satellites[r.satellites["flag"] == "ok"]
    ia = r.station_a.table.set_index(["time", "sat"])["ionosphere_m"]
    ib = r.station_b.table.set_index(["time", "sat"])["ionosphere_m"]
    key = pd.MultiIndex.from_arrays([sat["time"], sat["sat"]])
    d = 0.3 * (ia.reindex(key).to_numpy() - ib.reindex(key).to_numpy()) / 299_792_458.0 * 1e9
    w = sat["weight"].to_numpy()
    pred = pd.Series(d * w).groupby(sat["time"].to_numpy()).sum() / pd.Series(w).groupby(sat["time"].to_numpy()).sum()
    pred = pred.reindex(o["time"].to_numpy()).to_numpy()
    resid = e_single - pred
    print(f"iono x1.3: single mean {e_single.mean():+.3f} RMS {np.sqrt(np.mean(e_single**2)):.3f} ns "
          f"(predicted mean {np.nanmean(pred):+.3f}, RMS {np.sqrt(np.nanmean(pred**2)):.3f}); "
          f"iono-free mean {e_if.mean():+.3f} RMS {np.sqrt(np.mean(e_if**2)):.3f} ns")
    assert np.sqrt(np.mean(e_if**2)) <= 0.15 and abs(e_if.mean()) <= 0.05
    # what is left after the predicted ionospheric error is the exactness floor above
    assert np.sqrt(np.nanmean(resid**2)) <= 0.15 and abs(np.nanmean(resid)) <= 0.05
    # ... and, finer, the configured code noise propagated (tests/simulated_budget.py): bias within
    # 3.29 standard errors of the mean (3 ps here), scatter within the chi-square 99.9 % range
    var = point_budget(world.results["iono13"], r.satellites, ("TSTA", "TSTB"), "single", "epochs").reindex(
        o["time"].to_numpy())["var_ns2"].to_numpy()
    assert np.isfinite(resid).all() and np.isfinite(var).all()
    bound, chi2, lo, hi = statistics(resid, var, "iono x1.3 single less the predicted error")
    assert abs(resid.mean()) <= bound and lo <= chi2 <= hi
    r_if, var_if = _against_budget(world, "iono13", "epochs", "iono-free")
    bound, chi2, lo, hi = statistics(r_if, var_if, "iono x1.3 iono-free")
    assert abs(r_if.mean()) <= bound and lo <= chi2 <= hi
    # and the predicted error is really there (it is not zero for this geometry)
    assert np.sqrt(np.nanmean(pred**2)) > 0.02


def test_step_appears_at_the_right_epoch(world):
    step_t = "2021-01-01T03:00:00Z"
    folder = world("step", sigma0=0.01, steps=[{"time": dt.datetime(2021, 1, 1, 3, 0, 0, tzinfo=dt.timezone.utc),
                                                "phase_ns": 8.0, "what": "test step"}])
    err, o, _ = _errors(folder)
    assert np.sqrt(np.mean(err**2)) <= 0.15  # the step itself is followed exactly
    # to within the configured code noise propagated (bias 3.29 SE, scatter chi-square 99.9 %)
    r, var = _against_budget(world, "step", "epochs", "iono-free")
    bound, chi2, lo, hi = statistics(r, var, "step")
    assert abs(r.mean()) <= bound and lo <= chi2 <= hi
    # the first epoch whose offset has risen by more than half the step, +-1 bin
    x = o["offset_ns"].to_numpy()
    t_utc = ts.convert(o["time"].to_numpy(np.int64), "GPS", "UTC")
    jump = np.flatnonzero(np.abs(np.diff(x)) > 4.0)
    assert jump.size == 1
    k = jump[0] + 1
    assert abs(t_utc[k] - ts.parse_iso(step_t)) <= 30 * ts.NS_PER_S


def test_cable_delay_of_b_shifts_the_mean_by_the_documented_sign(world, tmp_path):
    folder = world("exact", sigma0=0.01)
    _, o1, r1 = _errors(folder)
    # copy the folder with B's cable delay 10.0 ns larger in its station file
    import shutil
    work = tmp_path / "more-cable"
    shutil.copytree(folder, work)
    st_b = work / "tstb.toml"
    text = st_b.read_text()
    assert "cable_ns = 140.0" in text
    st_b.write_text(text.replace("cable_ns = 140.0", "cable_ns = 150.0"))
    _, o2, r2 = _errors(work)
    # README "Delays and signs": +10 ns at B lowers clock B by 10 ns, raises A - B by 10 ns.
    assert r2.budget["mean_offset_ns"] - r1.budget["mean_offset_ns"] == pytest.approx(10.0, abs=1e-6)
