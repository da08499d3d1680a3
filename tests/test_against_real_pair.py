"""ZIMM - CN00 (about 6,900 km, a handful of common satellites) on the real day 2021-01-01.

Common view with broadcast ephemerides against all-in-view with the IGS final
orbits and clocks (igs21385.sp3): the satellite clock errors cancel in CV and
are absent in all-in-view, so what separates the two series is code noise and
orbit error over a very long baseline. ctt against ctt: no external truth exists for
this day (the external truth of a pair is in tests/test_against_igs_station_clocks.py).
Bounds: 2.5 ns scatter per 30-s epoch (code noise 1–2 ns per epoch and station, data
README, common practice), 2 ns mean difference (the C1-P1 biases below), and a
REGRESSION bound for 13-minute tracks (below). The RMS is read as the scatter of the
difference about its mean.

What also separates the two here: both receivers give C1 (C/A) and no P1, so
each satellite carries its C1-P1 code bias (x2.546 in the iono-free code).
It cancels in common view (same satellite, same codes) but not in
all-in-view, where each station averages over its own satellites. With no
bias file in the open data set this leaves a ~1.5 ns mean difference and
~1.1 ns of track-to-track scatter; the track figure is therefore checked
against what is measured today (a regression bound), not the 1.0 ns target.
"""

import dataclasses

import numpy as np
import pandas as pd
import pytest

from ctt.cli import main
from ctt.config import load_station
from ctt.pipeline import PairInputs, PairOptions, run_pair


@pytest.fixture(scope="module")
def pair(shared_data, test_data):
    d = shared_data
    inputs = PairInputs(obs_a=str(d / "zimm0010.21o.gz"), obs_b=str(d / "cn000010.21o.gz"),
                        nav=str(d / "brdc0010.21n"), sp3=str(d / "igs21385.sp3"),
                        met_a=str(d / "zimm0010.21m"))
    st = (load_station(test_data / "stations" / "zimm.toml"), load_station(test_data / "stations" / "cn00.toml"))
    return inputs, st


def _ok(r):
    o = r.offset
    return o[o["flag"] == "ok"].set_index("time")


def test_epoch_cv_agrees_with_all_in_view(pair):
    inputs, (a, b) = pair
    cv = run_pair(inputs, a, b, PairOptions(mode="epochs", orbits="broadcast"))
    aiv = run_pair(inputs, a, b, PairOptions(mode="all-in-view"))
    x, y = _ok(cv), _ok(aiv)
    common = x.index.intersection(y.index)
    d = x.loc[common, "offset_ns"] - y.loc[common, "offset_ns"]
    rms = float(np.sqrt(np.mean(d**2)))
    print(f"epochs: {len(common)} common points, mean {d.mean():.3f} ns, scatter {d.std():.3f} ns, "
          f"RMS {rms:.3f} ns; CV median satellites {x['n_sat'].median()}")
    assert len(common) > 2500
    assert d.std() <= 2.5 and abs(d.mean()) < 2.0
    # a handful of common satellites at a time on this baseline (data README)
    assert 3 <= x["n_sat"].median() <= 6


def test_track_cv_agrees_with_all_in_view(pair):
    inputs, (a, b) = pair
    cv = run_pair(inputs, a, b, PairOptions(mode="tracks", orbits="broadcast"))
    aiv = run_pair(inputs, a, b, PairOptions(mode="all-in-view"))
    x, y = _ok(cv), _ok(aiv)
    # all-in-view epochs averaged over each 780-s track window around its midpoint
    yt = y.index.to_numpy(np.int64)
    vals = []
    for t, v in x["offset_ns"].items():
        w = (yt >= t - 390_000_000_000) & (yt < t + 390_000_000_000)
        if w.sum() >= 20:
            vals.append(v - y["offset_ns"].to_numpy()[w].mean())
    d = np.asarray(vals)
    rms = float(np.sqrt(np.mean(d**2)))
    print(f"tracks: {d.size} tracks, mean {d.mean():.3f} ns, scatter {d.std():.3f} ns, RMS {rms:.3f} ns")
    assert d.size >= 60
    assert abs(d.mean()) < 2.0
    # regression bound (measured 1.07 ns on 2021-01-01; issue target 1.0 ns needs C1-P1 biases)
    assert d.std() <= 1.25


def test_pair_command_writes_the_three_files(pair, tmp_path, capsys):
    inputs, _ = pair
    rc = main(["pair", "--obs-a", inputs.obs_a, "--obs-b", inputs.obs_b, "--nav", inputs.nav,
               "--station-a", str(pair[1][0].path), "--station-b", str(pair[1][1].path),
               "--mode", "epochs", "--out", str(tmp_path)])
    assert rc == 0
    off = pd.read_csv(tmp_path / "offset.csv")  # readable with no options (issue requirement)
    for col in ("time_utc", "mjd_utc", "offset_ns", "u_ns", "n_sat", "flag"):
        assert col in off.columns
    assert off["time_utc"].str.endswith("Z").all()
    sat = pd.read_csv(tmp_path / "satellites.csv")
    assert {"sat", "diff_ns", "elevation_a_deg", "elevation_b_deg"} <= set(sat.columns)
    import json
    s = json.loads((tmp_path / "summary.json").read_text())
    assert len(s["inputs"]["obs_a"]["sha256"]) == 64 and s["software"]["name"] == "ctt"
    assert "budget" in s and s["budget"]["type_b_ns"] > 0
    dv = s["daily_value"]   # the one daily value (issue 12): u from type A and type B
    assert dv["u_ns"] == pytest.approx(np.hypot(dv["u_a_ns"], dv["u_b_ns"]), abs=1.5e-3)  # rounding to 0.001
    assert "clock A - clock B" in capsys.readouterr().out


@pytest.mark.slow
def test_all_in_view_with_estimated_code_biases(pair):
    """Issue 14: ``--bias estimate`` on ZIMM-CN00. Binned all-in-view (960 s) flags high_scatter only
    where the data scatter (at least 80 of 90 bins ok, against 5 of 90 without the biases), and its
    track series agrees with the CV tracks within 1.0 ns RMS about the mean (issue bound; the mean
    keeps its 2 ns bound as above). External check of the estimates themselves: the two stations
    estimate the same satellites' biases independently, from different receivers, antennas and
    sites; both use C1 (RINEX 2 C1, the C/A code) with P2, so both carry each satellite's
    2.546 x (C1 - P1) bias (iono-free factor, IS-GPS-200 frequencies) and must agree within their
    uncertainties."""
    inputs, (a, b) = pair
    est = dataclasses.replace(PairOptions().measure, biases="estimate")
    aiv_bins = run_pair(inputs, a, b, PairOptions(mode="all-in-view", bin_s=960, measure=est))
    o = aiv_bins.offset
    n_ok = int((o["flag"] == "ok").sum())
    aiv = run_pair(inputs, a, b, PairOptions(mode="all-in-view", measure=est))
    cv = run_pair(inputs, a, b, PairOptions(mode="tracks", orbits="broadcast"))
    x, y = _ok(cv), _ok(aiv)
    yt = y.index.to_numpy(np.int64)
    vals = []
    for t, v in x["offset_ns"].items():
        w = (yt >= t - 390_000_000_000) & (yt < t + 390_000_000_000)
        if w.sum() >= 20:
            vals.append(v - y["offset_ns"].to_numpy()[w].mean())
    d = np.asarray(vals)
    ea = pd.DataFrame(aiv.station_a.info["code_bias_estimates"]).set_index("sat")
    eb = pd.DataFrame(aiv.station_b.info["code_bias_estimates"]).set_index("sat")
    j = ea.add_suffix("_a").join(eb.add_suffix("_b"), how="inner")
    z = (j["bias_ns_a"] - j["bias_ns_b"]) / np.hypot(j["u_ns_a"], j["u_ns_b"])
    print(f"\nAIV 960 s with --bias estimate: {n_ok} of {len(o)} bins ok "
          f"({o['flag'].value_counts().to_dict()}); AIV tracks - CV tracks: {d.size} tracks, mean "
          f"{d.mean():.3f} ns, scatter {d.std():.3f} ns, RMS {np.sqrt(np.mean(d ** 2)):.3f} ns; biases "
          f"ZIMM RMS {np.sqrt(np.mean(ea['bias_ns'] ** 2)):.2f} ns, CN00 {np.sqrt(np.mean(eb['bias_ns'] ** 2)):.2f} ns, "
          f"correlation {np.corrcoef(j['bias_ns_a'], j['bias_ns_b'])[0, 1]:.3f}, RMS of normalised "
          f"differences {np.sqrt(np.mean(z ** 2)):.2f}")
    assert n_ok >= 80
    assert d.size >= 60 and abs(d.mean()) < 2.0
    assert d.std() <= 1.0
    assert len(j) >= 25 and np.corrcoef(j["bias_ns_a"], j["bias_ns_b"])[0, 1] > 0.8
    # the estimates' uncertainties cover their differences. Each u is a batch-means SD from ~8
    # one-hour blocks, so a difference normalised by it follows roughly Student's t with 7 dof,
    # RMS sqrt(7/5) = 1.18 if the u are right (t-distribution variance nu/(nu-2)); with ~30
    # satellites the sample RMS scatters by ~15 %: bound 1.5 (measured 1.29; 2.03 with 960-s blocks,
    # which is why the blocks are an hour long)
    assert np.sqrt(np.mean(z ** 2)) < 1.5
