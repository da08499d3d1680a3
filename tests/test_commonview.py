"""Common view, all-in-view, weighting, rejection, inter-system bias, budget (ctt.commonview).

External references:
* error propagation of a weighted mean (any metrology text, e.g. the GUM):
  var(Σwᵢdᵢ/Σwᵢ) = Σwᵢ²σᵢ²/(Σwᵢ)², = 1/Σ(1/σᵢ²) for inverse-variance weights;
* median/MAD rejection with 1.4826·MAD as σ for normal data (common practice);
* common view cancels what both stations share, all-in-view needs none
  (Allan & Thomas 1994, common practice);
* simulation truth: the invented tables below (clock offsets, noise, biases).
Tolerances come from the sampling distribution of the estimate (stated at
each check).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ctt import commonview as cv
from ctt import tracks
from ctt.errors import NoDataError, ProcessingError
from ctt.timescales import NS_PER_S, convert, from_mjd

MJD0 = 59215
C = 299_792_458.0


def geometry(n_ep, step_s, sats, phase, t_offset_s=0):
    """Smooth invented sky: elevation 10°..80°, azimuth turning; one row per epoch × satellite."""
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    t = t0 + (t_offset_s + np.arange(n_ep, dtype=np.int64) * step_s) * NS_PER_S
    ns = len(sats)
    T = np.repeat(t, ns)
    k = np.tile(np.arange(ns), n_ep).astype(float)
    ts = (T - t0) / 1e9
    el = 10.0 + 70.0 * 0.5 * (1 + np.sin(2 * np.pi * ts / 43_082.0 + 1.3 * k + phase))
    az = np.mod(37.0 * k + 100 * phase + ts / 240.0, 360.0)
    return T, np.tile(np.array(sats, dtype=object), n_ep), el, az, ts


def station(clock_ns, sats, *, phase=0.0, n_ep=2880, step_s=30, noise0=0.0, rng=None, isb=None,
            common=None, reference="broadcast", t_offset_s=0):
    """Per-satellite table of one station: clock(t) − system time + noise σ0/sin(el) + ISB + common part.

    ``common(T, sat)`` is the part both stations share (satellite clock and
    orbit error seen alike): it must cancel in common view.
    """
    T, S, el, az, ts = geometry(n_ep, step_s, sats, phase, t_offset_s)
    system = np.array([s[0] for s in S], dtype=object)
    v = clock_ns(ts) + (common(T, S) if common is not None else 0.0)
    sig = np.full(T.size, np.nan)
    if noise0 > 0:
        sig = noise0 / np.sin(np.deg2rad(el))
        v = v + rng.normal(0.0, 1.0, T.size) * sig
    if isb:
        for s, b in isb.items():
            v = v + np.where(system == s, b, 0.0)
    df = pd.DataFrame({"time": T, "sat": S, "system": system, "signal": "C1C", "elevation_deg": el,
                       "azimuth_deg": az, "clock_ns": v, "sigma_ns": sig, "troposphere_m": 2.4,
                       "ionosphere_m": 3.0, "flag": "ok"})
    df.attrs["reference"] = reference
    return df


GPS10 = tuple(f"G{i:02d}" for i in range(1, 11))


def sat_clock(T, S):
    """Common-mode part: a different 'satellite clock error' per satellite and epoch (cancels in CV)."""
    code = np.array([int(s[1:]) for s in S])
    return 30.0 * np.sin(T / 1e9 / 3000.0 + code) + 5.0 * code


def truth(ts):
    return 25.0 + 1e-4 * ts  # clock A − clock B: 25 ns and 0.1 ps/s (invented)


# ---------------------------------------------------------------- exact recovery

@pytest.mark.parametrize("kind", ["epoch", "track", "bin300"])
def test_offset_recovered_exactly_without_noise(kind):
    a = station(lambda ts: 1000.0 + truth(ts), GPS10, phase=0.0, common=sat_clock)
    b = station(lambda ts: 1000.0 + 0 * ts, GPS10, phase=0.4, common=sat_clock)
    f = {"epoch": tracks.bin_epochs, "track": tracks.fit_tracks,
         "bin300": lambda d: tracks.bin_epochs(d, 300)}[kind]
    r = cv.common_view(f(a), f(b))
    o = r.offset_df
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    ok = o[o["flag"] == "ok"]
    assert len(ok) > (80 if kind == "track" else 280)
    ts = (ok["time"].to_numpy() - t0) / 1e9
    if kind == "bin300":
        # a bin mean refers to the mean time of its points (30-s grid from 00:00 UTC, bins on the GPS count)
        pts = a["time"].to_numpy()
        mean_t = pd.Series((pts - t0) / 1e9).groupby(pts // (300 * NS_PER_S)).mean()
        ts = mean_t.loc[ok["time"].to_numpy() // (300 * NS_PER_S)].to_numpy()
    np.testing.assert_allclose(ok["offset_ns"], truth(ts), atol=1e-8)
    assert (ok["system"] == "G").all()
    assert (r.sat_df["flag"] == "ok").mean() > 0.97
    assert np.allclose(ok["n_sat"], 10) or kind == "track"


# ---------------------------------------------------------------- honest uncertainties

@pytest.mark.parametrize("weights", ["sin2el", "sigma", "equal"])
def test_bin_uncertainty_matches_simulated_error(weights):
    # White noise σ0/sin(el) at each end; 2880 independent bins.
    # mean(err²) estimates the mean true variance; its relative sampling sd is
    # √(2Σv²)/Σv (normal errors, v the bins' variances, estimated by u²), and
    # mean(u²) is itself an average of ~2880 estimates with 9 dof (sd ≈ √(2/9/N));
    # 4 combined sd allowed.
    rng = np.random.default_rng(424242)
    a = station(lambda ts: truth(ts), GPS10, phase=0.0, noise0=0.7, rng=rng)
    b = station(lambda ts: 0 * ts, GPS10, phase=0.4, noise0=0.7, rng=rng)
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b), weights=weights)
    o = r.offset_df[r.offset_df["flag"].isin(["ok", "high_scatter"])]
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    err = o["offset_ns"].to_numpy() - truth((o["time"].to_numpy() - t0) / 1e9)
    u2 = o["u_ns"].to_numpy() ** 2
    ratio = np.mean(err ** 2) / np.mean(u2)
    sd = np.sqrt(2 * np.sum(u2 ** 2)) / np.sum(u2)
    sd = np.hypot(sd, np.sqrt(2 / 9 / len(u2)))
    assert abs(ratio - 1) < 4 * sd, (ratio, sd)
    # the a-priori propagation is right too (the simulated σ are the true ones)
    ratio_p = np.mean(err ** 2) / np.mean(o["u_apriori_ns"] ** 2)
    assert abs(ratio_p - 1) < 4 * sd
    assert np.mean(o["n_rejected"]) < 0.1  # normal data: rejections are rare


def test_weighted_mean_formula_direct():
    # One epoch, five satellites, invented values: compare with a direct computation.
    d_true = np.array([10.0, 11.0, 9.5, 10.4, 10.2])
    u_a = np.array([0.5, 1.0, 0.8, 0.6, 2.0])
    el_a = np.array([60.0, 20.0, 35.0, 50.0, 12.0])
    el_b = np.array([40.0, 30.0, 70.0, 25.0, 15.0])
    sats = ["G01", "G02", "G03", "G04", "G05"]

    def tab(values, u, el):
        df = pd.DataFrame({"time": np.full(5, 10**18), "sat": sats, "system": "G", "signal": "C1C",
                           "elevation_deg": el, "azimuth_deg": 0.0, "clock_ns": values, "sigma_ns": u,
                           "troposphere_m": 0.0, "ionosphere_m": 0.0, "flag": "ok"})
        df.attrs["reference"] = "broadcast"
        return tracks.bin_epochs(df)

    A, B = tab(d_true + 3.0, u_a, el_a), tab(np.full(5, 3.0), np.full(5, 0.3), el_b)
    sig2 = u_a ** 2 + 0.09
    # inverse-variance weights: mean Σ(d/σ²)/Σ(1/σ²), u = 1/√Σ(1/σ²)  (error propagation)
    o = cv.common_view(A, B, weights="sigma").offset_df.iloc[0]
    w = 1 / sig2
    m = np.sum(w * d_true) / np.sum(w)
    assert o["offset_ns"] == pytest.approx(m, abs=1e-12)
    assert o["u_apriori_ns"] == pytest.approx(1 / np.sqrt(np.sum(w)), rel=1e-12)
    assert o["chi2"] == pytest.approx(np.sum((d_true - m) ** 2 / sig2), rel=1e-12)
    u_sc = np.sqrt(np.sum(w * (d_true - m) ** 2) / (4 * np.sum(w)))
    assert o["u_ns"] == pytest.approx(u_sc, rel=1e-12)  # scatter (n = 5 ≥ 3) above the floor here
    # sin² el weights for a difference: w = 1/(1/sin²el_A + 1/sin²el_B), u = √Σw²σ²/Σw
    o = cv.common_view(A, B, weights="sin2el").offset_df.iloc[0]
    sa, sb = np.sin(np.deg2rad(el_a)) ** 2, np.sin(np.deg2rad(el_b)) ** 2
    w = 1 / (1 / sa + 1 / sb)
    assert o["offset_ns"] == pytest.approx(np.sum(w * d_true) / np.sum(w), abs=1e-12)
    assert o["u_apriori_ns"] == pytest.approx(np.sqrt(np.sum(w ** 2 * sig2)) / np.sum(w), rel=1e-12)
    o = cv.common_view(A, B, weights="equal").offset_df.iloc[0]
    assert o["offset_ns"] == pytest.approx(d_true.mean(), abs=1e-12)
    assert o["u_ns"] == pytest.approx(d_true.std(ddof=1) / np.sqrt(5), rel=1e-12)


def test_small_sample_floor_and_few_satellites():
    # Three satellites agreeing to 1 ps while the a-priori σ is 1 ns: u cannot
    # fall below u_apriori·√(χ²₀.₀₅(2)/2) = u_apriori·0.2265 (χ² table).
    sats = ["G01", "G02", "G03"]

    def tab(values, u):
        df = pd.DataFrame({"time": np.full(3, 10**18), "sat": sats, "system": "G", "signal": "C1C",
                           "elevation_deg": 45.0, "azimuth_deg": 0.0, "clock_ns": values, "sigma_ns": u,
                           "troposphere_m": 0.0, "ionosphere_m": 0.0, "flag": "ok"})
        df.attrs["reference"] = "broadcast"
        return tracks.bin_epochs(df)

    A = tab(np.array([5.0, 5.001, 4.999]), np.full(3, 1.0))
    B = tab(np.zeros(3), np.full(3, 1e-9))
    o = cv.common_view(A, B, weights="sigma").offset_df.iloc[0]
    assert o["u_ns"] == pytest.approx(o["u_apriori_ns"] * np.sqrt(0.10259 / 2), rel=1e-3)
    o = cv.common_view(A, B, min_common=4).offset_df.iloc[0]
    assert o["flag"] == "few_satellites" and o["offset_ns"] == pytest.approx(5.0, abs=1e-3)


# ---------------------------------------------------------------- rejection

def test_mad_rejects_50ns_satellite_and_reports_it():
    rng = np.random.default_rng(5150)
    a = station(lambda ts: truth(ts), GPS10, phase=0.0, noise0=0.7, rng=rng)
    b = station(lambda ts: 0 * ts, GPS10, phase=0.4, noise0=0.7, rng=rng)
    a.loc[a["sat"] == "G05", "clock_ns"] += 50.0  # injected fault at station A
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b))
    s = r.sat_df
    frac = (s.loc[s["sat"] == "G05", "flag"] == "outlier").mean()
    assert frac > 0.99
    assert (s.loc[s["sat"] != "G05", "flag"] == "outlier").mean() < 0.01
    summ = r.sat_summary.set_index("sat")
    assert bool(summ.loc["G05", "suspect"]) and summ["suspect"].sum() == 1
    assert summ.loc["G05", "median_residual_ns"] == pytest.approx(50.0, abs=2.0)
    o = r.offset_df[r.offset_df["flag"] == "ok"]
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    err = o["offset_ns"].to_numpy() - truth((o["time"].to_numpy() - t0) / 1e9)
    # the day's mean error: standard error ≈ RMS(u)/√N; 4 SE allowed
    assert abs(err.mean()) < 4 * np.sqrt(np.mean(o["u_ns"] ** 2) / len(o))
    assert np.max(np.abs(err / o["u_ns"])) < 6


def test_three_satellite_bin_rejects_its_outlier():
    # A quarter of real epoch bins hold exactly 3 satellites (ZIMM-CN00, 2021-001: 601 of
    # 2,880), so the rule must act there. By hand from the documented rule (Hampel's
    # median/MAD identifier, common practice): values 0, 0.1, 30 ns with a-priori σ 1 ns:
    # median 0.1, |e| = 0.1, 0, 29.9, MAD 0.1 -> scale max(1.4826·0.1, median σ = 1) = 1;
    # 29.9 > 3.5·1: rejected; the mean of the other two is 0.05 ns.
    g = np.zeros(3, dtype=np.int64)
    per, acc, _ = cv.robust_weighted_mean(g, 1, np.array([0.0, 0.1, 30.0]), np.ones(3), np.ones(3))
    assert list(acc) == [True, True, False]
    assert per["offset_ns"][0] == pytest.approx(0.05, abs=1e-12)
    assert per["n_sat"][0] == 2 and per["n_rejected"][0] == 1
    # two values: no rejection possible (documented), the mean of both
    per, acc, _ = cv.robust_weighted_mean(g[:2], 1, np.array([0.0, 30.0]), np.ones(2), np.ones(2))
    assert acc.all() and per["offset_ns"][0] == pytest.approx(15.0, abs=1e-12)


# ---------------------------------------------------------------- all-in-view

def test_all_in_view_without_common_satellite():
    a = station(lambda ts: 1000 + truth(ts), GPS10[:5], phase=0.0, reference="precise")
    b = station(lambda ts: 1000 + 0 * ts, GPS10[5:], phase=0.4, reference="precise")
    ta, tb = tracks.bin_epochs(a), tracks.bin_epochs(b)
    with pytest.raises(NoDataError):
        cv.common_view(ta, tb)  # no common satellite: CV impossible
    r = cv.common_view(ta, tb, mode="all-in-view")
    o = r.offset_df
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    np.testing.assert_allclose(o["offset_ns"], truth((o["time"].to_numpy() - t0) / 1e9), atol=1e-8)
    assert (o["n_sat_a"] == 5).all() and (o["n_sat_b"] == 5).all()
    assert set(r.sat_df["station"]) == {"A", "B"}
    bb = tb.copy()
    bb.attrs["reference"] = "broadcast"
    with pytest.raises(ProcessingError, match="precise"):
        cv.common_view(ta, bb, mode="all-in-view")


def test_all_in_view_noise_uncertainty():
    # u = √(u_A² + u_B²) of two independent station solutions; checked as above.
    rng = np.random.default_rng(99)
    a = station(lambda ts: truth(ts), GPS10, phase=0.0, noise0=0.5, rng=rng, reference="precise")
    b = station(lambda ts: 0 * ts, GPS10[2:], phase=0.4, noise0=0.5, rng=rng, reference="precise")
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b), mode="all-in-view")
    o = r.offset_df[r.offset_df["flag"].isin(["ok", "high_scatter"])]
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    err = o["offset_ns"].to_numpy() - truth((o["time"].to_numpy() - t0) / 1e9)
    u2 = o["u_ns"].to_numpy() ** 2
    sd = np.hypot(np.sqrt(2 * np.sum(u2 ** 2)) / np.sum(u2), np.sqrt(2 / 7 / len(u2)))
    assert abs(np.mean(err ** 2) / np.mean(u2) - 1) < 4 * sd


# ---------------------------------------------------------------- multi-GNSS

GE = GPS10[:6] + tuple(f"E{i:02d}" for i in range(1, 7))


def test_isb_difference_estimated_and_applied():
    # Station A: Galileo − GPS bias 7 ns, station B: 2 ns -> CV sees 5 ns.
    rng = np.random.default_rng(31337)
    a = station(lambda ts: truth(ts), GE, phase=0.0, noise0=0.7, rng=rng, isb={"E": 7.0})
    b = station(lambda ts: 0 * ts, GE, phase=0.4, noise0=0.7, rng=rng, isb={"E": 2.0})
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b))
    isb = r.isb.set_index("system").loc["E"]
    assert isb["source"] == "estimated" and isb["reference_system"] == "G"
    # the estimate's u is its formal weighted-mean uncertainty over ~2880 bins
    assert isb["value_ns"] == pytest.approx(5.0, abs=4 * isb["u_ns"])
    o = r.offset_df
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    assert set(o["system"]) == {"G", "E", "ALL"}
    for sysname, expect in (("G", 0.0), ("E", 5.0), ("ALL", 0.0)):
        s = o[(o["system"] == sysname) & (o["flag"] == "ok")]
        err = s["offset_ns"].to_numpy() - truth((s["time"].to_numpy() - t0) / 1e9) - expect
        se = np.sqrt(np.mean(s["u_ns"] ** 2) / len(s))
        assert abs(err.mean()) < 4 * se + (4 * isb["u_ns"] if sysname == "ALL" else 0), sysname
    # combined uses all 12 satellites
    assert o.loc[o["system"] == "ALL", "n_sat"].median() == 12
    # configured biases are applied as given (noise-free: exact)
    a0 = station(lambda ts: truth(ts), GE, isb={"E": 7.0})
    b0 = station(lambda ts: 0 * ts, GE, phase=0.4, isb={"E": 2.0})
    r0 = cv.common_view(tracks.bin_epochs(a0), tracks.bin_epochs(b0), isb_ns={"A": {"E": 7.0}, "B": {"E": 2.0}},
                        per_system=False)
    assert set(r0.offset_df["system"]) == {"ALL"}
    assert r0.isb.iloc[0]["source"] == "configured" and r0.isb.iloc[0]["value_ns"] == 5.0
    oo = r0.offset_df
    np.testing.assert_allclose(oo["offset_ns"], truth((oo["time"].to_numpy() - t0) / 1e9), atol=1e-8)


def test_isb_per_station_in_all_in_view():
    a = station(lambda ts: truth(ts), GE, isb={"E": 7.0}, reference="precise")
    b = station(lambda ts: 0 * ts, GE, phase=0.4, isb={"E": 2.0}, reference="precise")
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b), mode="all-in-view")
    got = r.isb.set_index("station")["value_ns"]
    assert got["A"] == pytest.approx(7.0, abs=1e-9) and got["B"] == pytest.approx(2.0, abs=1e-9)
    o = r.offset_df[r.offset_df["system"] == "ALL"]
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    np.testing.assert_allclose(o["offset_ns"], truth((o["time"].to_numpy() - t0) / 1e9), atol=1e-8)


# ---------------------------------------------------------------- sampling

def test_different_sampling_resampled_to_coarser():
    # A at 10 s, B at 30 s, two hours, noise-free, constant offset (means of a
    # constant are exact): the 10-s values are averaged onto the 30-s epochs.
    a = station(lambda ts: 25.0 + 0 * ts, GPS10, n_ep=720, step_s=10, common=lambda T, S: 0.0)
    b = station(lambda ts: 0 * ts, GPS10, n_ep=240, step_s=30, phase=0.4)
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b))
    o = r.offset_df
    assert len(o) == 240 and r.attrs["window_s"] == 30
    np.testing.assert_allclose(o["offset_ns"], 25.0, atol=1e-9)
    with pytest.raises(ProcessingError):
        cv.common_view(tracks.fit_tracks(a), tracks.bin_epochs(b))


# ---------------------------------------------------------------- budget

def test_coordinate_propagation_is_the_pipeline_linear_map():
    # Fast exact check: a 1-m error along E, N or U at A (B) moves the day's mean by
    # +ū_k/c (−ū_k/c), ū the effective line of sight (linearity of weighted means).
    # Two satellites per bin with a-priori σ: bin u then comes from σ alone and
    # does not move with the values, so the map is exactly linear. The shift is 1 mm
    # (result scaled by 1000): two-value bins are tested against their σ (issue 12), and
    # a 1 m shift would move some of them across the 99 % line, changing the bins used.
    rng = np.random.default_rng(8)
    a = station(lambda ts: truth(ts), GPS10[:2], n_ep=96, step_s=900, noise0=0.5, rng=rng)
    b = station(lambda ts: 0 * ts, GPS10[:2], n_ep=96, step_s=900, phase=0.4, noise0=0.5, rng=rng)
    ta, tb = tracks.bin_epochs(a), tracks.bin_epochs(b)
    r0 = cv.common_view(ta, tb)
    base = cv.uncertainty_budget(r0.offset_df)["mean_offset_ns"]
    for name, tab, sign in (("A", ta, 1.0), ("B", tb, -1.0)):
        ubar, _ = cv.effective_line_of_sight(r0, name)
        los = cv.line_of_sight_enu(tab["elevation_deg"], tab["azimuth_deg"])
        for k in range(3):
            moved = tab.copy()
            moved["value_ns"] = tab["value_ns"] + 1e-3 * los[:, k] / C * 1e9
            pair = (moved, tb) if name == "A" else (ta, moved)
            shift = 1e3 * (cv.uncertainty_budget(cv.common_view(*pair).offset_df)["mean_offset_ns"] - base)
            assert shift == pytest.approx(sign * ubar[k] / C * 1e9, rel=1e-9, abs=1e-9)
    # geometry sanity: the up component of a mean line of sight over a sky above
    # 10° is positive and dominant (horizontal parts partly cancel)
    ubar, per_bin = cv.effective_line_of_sight(r0, "A")
    assert ubar[2] > 0.3 and ubar[2] > np.hypot(ubar[0], ubar[1])
    # independent E, N, U errors combine in quadrature through the line of sight (GUM): the day's
    # figure with the mean line of sight, the per-bin one averaged over the bins' own
    sig = np.array([0.3, 0.2, 0.5])  # m, invented
    day, one_bin = cv.coordinate_uncertainty_ns(r0, "A", sig)
    assert day == pytest.approx(np.sqrt(np.sum((sig * ubar) ** 2)) / C * 1e9, rel=1e-12, abs=0)
    assert one_bin == pytest.approx(np.sqrt(np.mean(np.sum((sig * per_bin) ** 2, axis=1))) / C * 1e9,
                                    rel=1e-12, abs=0)


@pytest.mark.slow
def test_coordinate_propagation_matches_monte_carlo():
    # Position error δr (ENU) at A changes each A value by û·δr/c; Monte Carlo
    # over random δr through the whole CV computation vs the linear formula.
    # The std of 300 draws has relative sampling sd 1/√(2·300) = 4 %; 4 sd allowed.
    rng = np.random.default_rng(2718)
    sig = np.array([0.3, 0.2, 0.5])  # m, invented
    a = station(lambda ts: truth(ts), GPS10[:6], n_ep=96, step_s=900)
    b = station(lambda ts: 0 * ts, GPS10[:6], n_ep=96, step_s=900, phase=0.4)
    ta, tb = tracks.bin_epochs(a), tracks.bin_epochs(b)
    r0 = cv.common_view(ta, tb)
    base = cv.uncertainty_budget(r0.offset_df)["mean_offset_ns"]
    u_formula, u_bin = cv.coordinate_uncertainty_ns(r0, "A", sig)
    los = cv.line_of_sight_enu(ta["elevation_deg"], ta["azimuth_deg"])
    shifts = []
    for _ in range(300):
        dr = rng.normal(0, 1, 3) * sig
        tam = ta.copy()
        tam["value_ns"] = ta["value_ns"] + los @ dr / C * 1e9
        shifts.append(cv.uncertainty_budget(cv.common_view(tam, tb).offset_df)["mean_offset_ns"] - base)
    mc = np.std(shifts, ddof=1)
    assert mc == pytest.approx(u_formula, rel=4 / np.sqrt(600))
    assert u_bin >= u_formula  # a single bin's geometry averages less (Jensen)
    budget = cv.uncertainty_budget(r0.offset_df, type_b_items={"delay A": 1.5, "delay B": 2.0}, result=r0,
                                   coordinate_sigma_m={"A": sig})
    assert budget["items"]["coordinates A"] == pytest.approx(u_formula)
    # independent items add in quadrature (GUM)
    assert budget["type_b_ns"] == pytest.approx(np.sqrt(1.5 ** 2 + 2.0 ** 2 + u_formula ** 2))
    assert budget["total_ns"] == pytest.approx(np.hypot(budget["type_a_ns"], budget["type_b_ns"]))
    text = cv.format_budget(budget)
    assert "coordinates A" in text and "total" in text


def test_budget_ar1_standard_error_against_the_ar1_variance_of_the_mean():
    # AR(1) residuals x_k = ρ x_{k−1} + e_k (simulation truth, ρ = 0.6, σ_e = 1): the variance
    # of the mean of N values is σ²/N·(1+ρ)/(1−ρ) with σ² = σ_e²/(1−ρ²) (time-series
    # textbook result, common practice; the finite-N correction 2ρ/(N(1−ρ)²) is 0.07 % here).
    # One series gives the factor to ~3 % (sd of σ̂ ~2 %, of ρ̂ √((1−ρ²)/N) -> 2.3 %); the mean
    # over K = 40 series is within 4·3 %/√40 = 1.9 % of the truth. Inverting the inflation
    # (factor (1−ρ)/(1+ρ)) would be 4× low.
    rng = np.random.default_rng(2024)
    n, rho, k = 2880, 0.6, 40
    t = 10**18 + np.arange(n, dtype=np.int64) * 30 * NS_PER_S
    se_true = np.sqrt(1 / (1 - rho**2) / n * (1 + rho) / (1 - rho))
    got, means = [], []
    for _ in range(k):
        e = rng.normal(0, 1.0, n)
        x = np.empty(n)
        x[0] = e[0] / np.sqrt(1 - rho**2)  # stationary start
        for i in range(1, n):
            x[i] = rho * x[i - 1] + e[i]
        b = cv.uncertainty_budget(pd.DataFrame({"time": t, "system": "G", "offset_ns": x, "u_ns": 1.0,
                                                "flag": "ok"}))
        got.append(b["type_a_detail"]["se_autocorrelation_ns"])
        means.append(b["mean_offset_ns"])
        assert b["type_a_ns"] >= got[-1]
    assert np.mean(got) == pytest.approx(se_true, rel=0.019)
    # and the real spread of the K day means agrees (sd of an sd from K = 40: 11 %; 3 sd)
    assert np.std(means, ddof=1) == pytest.approx(se_true, rel=0.33)


def test_budget_type_a_white_and_correlated():
    # White noise: type A ≈ the standard error σ/√N. Random-walk noise: the
    # AR(1)/TDEV figure must exceed the white-noise standard error.
    rng = np.random.default_rng(1234)
    n = 2880
    t = 10**18 + np.arange(n, dtype=np.int64) * 30 * NS_PER_S
    white = pd.DataFrame({"time": t, "system": "G", "offset_ns": rng.normal(0, 1.0, n), "u_ns": 1.0,
                          "flag": "ok"})
    bw = cv.uncertainty_budget(white)
    # SE of the mean of N unit normals is 1/√N; the scatter-based SE has relative sd ~1/√(2N)
    assert bw["type_a_ns"] == pytest.approx(1 / np.sqrt(n), rel=0.35)  # TDEV extrapolation may raise it
    # the AR(1) path itself: for white noise ρ̂ ~ 0 (sd 1/√N = 1.9 %, clipped at 0), so the
    # inflated SE is the plain one within 4·1.3 % (sampling) + 4 % (factor at ρ̂ = 2 sd)
    assert bw["type_a_detail"]["se_autocorrelation_ns"] == pytest.approx(1 / np.sqrt(n), rel=0.092)
    assert bw["type_a_ns"] >= bw["type_a_detail"]["se_scatter_ns"]
    walk = white.assign(offset_ns=np.cumsum(rng.normal(0, 0.2, n)))
    bk = cv.uncertainty_budget(walk)
    assert bk["type_a_ns"] > 5 * bk["type_a_detail"]["se_formal_ns"]
    assert bk["type_a_detail"]["lag1_autocorrelation"] > 0.9
    assert cv.uncertainty_budget(white, tdev_ns_at_day=0.123)["type_a_ns"] == 0.123



def test_budget_scatter_error_and_tdev_threshold():
    # Weighted mean and its scatter-based standard error √(Σw r²/((N−1)Σw)) (error propagation of a
    # weighted mean with weights known up to a factor, GUM), evaluated here on 32 invented bins;
    # TDEV at span is considered from min_tdev_points (32) bins on, not below
    rng = np.random.default_rng(8)
    n = 32
    t = 10**18 + np.arange(n, dtype=np.int64) * 300 * NS_PER_S
    x = rng.normal(0.0, 1.0, n)
    u = rng.uniform(0.5, 2.0, n)
    df = pd.DataFrame({"time": t, "system": "G", "offset_ns": x, "u_ns": u, "flag": "ok"})
    b = cv.uncertainty_budget(df)
    w = 1 / u ** 2
    m = np.sum(w * x) / np.sum(w)
    assert b["mean_offset_ns"] == pytest.approx(m, rel=1e-12, abs=0)
    se = np.sqrt(np.sum(w * (x - m) ** 2) / ((n - 1) * np.sum(w)))
    assert b["type_a_detail"]["se_scatter_ns"] == pytest.approx(se, rel=1e-12, abs=0)
    assert "tdev_span_ns" not in cv.uncertainty_budget(df.iloc[:31])["type_a_detail"]
    # two bins are enough for the scatter-based error (N − 1 = 1)
    w2, x2 = w[:2], x[:2]
    m2 = np.sum(w2 * x2) / np.sum(w2)
    se2 = np.sqrt(np.sum(w2 * (x2 - m2) ** 2) / np.sum(w2))
    assert cv.uncertainty_budget(df.iloc[:2])["type_a_detail"]["se_scatter_ns"] == pytest.approx(se2, rel=1e-12)
    # the lag-1 autocorrelation of the residuals is used from 4 bins on (numpy's corrcoef, kept in
    # [0, 0.99]); a drifting series of 4 bins is strongly correlated
    four = df.iloc[:4].assign(offset_ns=[0.0, 1.0, 2.2, 2.9], u_ns=1.0)
    r4 = four["offset_ns"].to_numpy() - four["offset_ns"].mean()
    rho = min(max(np.corrcoef(r4[:-1], r4[1:])[0, 1], 0.0), 0.99)
    assert rho > 0.5
    assert cv.uncertainty_budget(four)["type_a_detail"]["lag1_autocorrelation"] == pytest.approx(rho, rel=1e-12)
    # TDEV at span: allantools' TDEV (reference library) at octave τ, the log-log slope of its last
    # two points (bounded to [−0.5, 1]) carried to τ = span = 32 × 300 s; with a gap the grid is
    # filled by linear interpolation first (bin 7 left out here)
    import allantools

    for keep in (np.arange(n), np.delete(np.arange(n), 7)):
        det = cv.uncertainty_budget(df.iloc[keep])["type_a_detail"]
        xg = np.interp(np.arange(n), keep, x[keep])
        taus, dev = allantools.tdev(xg * 1e-9, rate=1 / 300.0, data_type="phase", taus="octave")[:2]
        slope = np.clip(np.log(dev[-1] / dev[-2]) / np.log(taus[-1] / taus[-2]), -0.5, 1.0)
        assert det["tdev_slope"] == pytest.approx(slope, rel=1e-9, abs=0)
        assert det["tdev_span_ns"] == pytest.approx(dev[-1] * 1e9 * (n * 300.0 / taus[-1]) ** slope, rel=1e-9, abs=0)


# ---------------------------------------------------------------- flags and refusals

def test_bin_flags_no_data_high_scatter_and_refusals():
    rng = np.random.default_rng(77)
    a = station(lambda ts: truth(ts), GPS10, n_ep=200, noise0=0.3, rng=rng)
    b = station(lambda ts: 0 * ts, GPS10, n_ep=200, phase=0.4, noise0=0.3, rng=rng)
    t_all = np.sort(a["time"].unique())
    # epoch 10: every satellite unusable at A -> 'no_data', offset NaN
    a.loc[a["time"] == t_all[10], "flag"] = "unhealthy"
    # epoch 20: scatter 30× the a-priori σ on all satellites -> χ² far above its 99 % quantile
    sel = a["time"] == t_all[20]
    a.loc[sel, "clock_ns"] += rng.normal(0, 1, int(sel.sum())) * 30 * a.loc[sel, "sigma_ns"]
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b))
    o = r.offset_df.set_index("time")
    assert o.loc[t_all[10], "flag"] == "no_data" and np.isnan(o.loc[t_all[10], "offset_ns"])
    assert o.loc[t_all[20], "flag"] == "high_scatter"
    assert (o["flag"] == "ok").mean() > 0.95
    s = r.sat_df
    assert (s.loc[s["time"] == t_all[10], "flag"] == "a_unhealthy").all()
    # 'sigma' weighting with unknown σ: rows are not used and say why
    a2, b2 = tracks.bin_epochs(a), tracks.bin_epochs(b)
    a2.loc[a2["sat"] == "G03", "u_ns"] = np.nan
    r2 = cv.common_view(a2, b2, weights="sigma")
    assert (r2.sat_df.loc[(r2.sat_df["sat"] == "G03") & (r2.sat_df["flag"] != "a_unhealthy"), "flag"]
            == "no_weight").all()
    # mixing a broadcast-referred and a precise-referred station is refused
    b3 = tracks.bin_epochs(b)
    b3.attrs["reference"] = "precise"
    with pytest.raises(ProcessingError, match="reference"):
        cv.common_view(tracks.bin_epochs(a), b3)
    with pytest.raises(ProcessingError, match="weighting"):
        cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b), weights="bogus")


@pytest.mark.slow
def test_track_mode_uncertainty_matches_simulated_error():
    # Track mode over 6 days (534 tracks): variance ratio with relative sampling
    # sd ≈ √(2/534) ≈ 6 % (plus the 9-dof u² average); 4 sd allowed.
    rng = np.random.default_rng(6006)
    n_ep = 2880 * 6
    a = station(lambda ts: truth(ts), GPS10, n_ep=n_ep, noise0=0.7, rng=rng)
    b = station(lambda ts: 0 * ts, GPS10, n_ep=n_ep, phase=0.4, noise0=0.7, rng=rng)
    r = cv.common_view(tracks.fit_tracks(a), tracks.fit_tracks(b))
    o = r.offset_df[r.offset_df["flag"].isin(["ok", "high_scatter"])]
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    err = o["offset_ns"].to_numpy() - truth((o["time"].to_numpy() - t0) / 1e9)
    u2 = o["u_ns"].to_numpy() ** 2
    sd = np.hypot(np.sqrt(2 * np.sum(u2 ** 2)) / np.sum(u2), np.sqrt(2 / 9 / len(u2)))
    assert len(o) > 500
    assert abs(np.mean(err ** 2) / np.mean(u2) - 1) < 4 * sd


def test_budget_carries_isb_uncertainty_into_all():
    # An ISB error δ moves each combined bin by δ × (weight share of that system):
    # the item equals u_isb × share (linear propagation), computed here directly.
    rng = np.random.default_rng(4040)
    a = station(lambda ts: truth(ts), GE, n_ep=400, noise0=0.7, rng=rng, isb={"E": 7.0})
    b = station(lambda ts: 0 * ts, GE, n_ep=400, phase=0.4, noise0=0.7, rng=rng, isb={"E": 2.0})
    r = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b))
    bud = cv.uncertainty_budget(r.offset_df, result=r)
    s = r.sat_df[r.sat_df["flag_all"] == "ok"]
    share = s.loc[s["system"] == "E", "weight"].sum() / s["weight"].sum()
    assert 0.3 < share < 0.7
    assert bud["items"]["ISB E-G (A-B)"] == pytest.approx(r.isb.iloc[0]["u_ns"] * share, rel=1e-12)
    # perturbation check of that linear propagation: configure the biases 0.05 ns
    # off (small against the 1-ns scatter, so the bin weights barely move)
    est = r.isb.iloc[0]["value_ns"]
    means = []
    for delta in (0.0, 0.05):
        rr = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b),
                            isb_ns={"A": {"E": est + delta}, "B": {"E": 0.0}}, per_system=False)
        means.append(cv.uncertainty_budget(rr.offset_df)["mean_offset_ns"])
    assert (means[0] - means[1]) == pytest.approx(0.05 * share, rel=0.05)


def test_main_series_is_chosen_per_day():
    # A day processed with GPS and Galileo has 'G', 'E' and the combined 'ALL' series; a day
    # with GPS only has 'G'. The main series keeps ALL of the first and G of the second
    # (nothing of either day silently lost).
    from ctt.commonview import main_series

    df = pd.DataFrame({"date": ["2021-01-01"] * 3 + ["2021-01-02"],
                       "system": ["G", "E", "ALL", "G"], "offset_ns": [1.0, 2.0, 1.5, 3.0]})
    out = main_series(df)
    assert list(zip(out["date"], out["system"])) == [("2021-01-01", "ALL"), ("2021-01-02", "G")]
    with pytest.raises(ValueError, match="choose one"):
        main_series(pd.DataFrame({"date": ["d", "d"], "system": ["G", "E"], "offset_ns": [1.0, 2.0]}), strict=True)


def test_two_value_points_are_tested_against_their_apriori_sigma():
    # issue 12: a point made of two values is flagged like any other when they disagree:
    # χ² = (d1 − d2)²/(σ1² + σ2²) against χ²(1 dof) at 99 % = 6.635 (chi-square table,
    # e.g. NIST/SEMATECH e-Handbook 1.3.6.7.4), whatever the weights of the mean.
    g = np.array([0, 0, 1, 1, 2, 2, 3, 3])
    s1, s2 = 0.6, 0.8
    lim = np.sqrt(6.635 * (s1 ** 2 + s2 ** 2))          # 2.576 σ of the difference
    d = np.array([10.0, 10.0 + 0.97 * lim, 10.0, 10.0 + 1.03 * lim, 3.0, 3.1, 7.0, 7.0 - 3 * lim])
    sig = np.tile([s1, s2], 4)
    w = np.array([0.9, 0.2] * 4)                       # elevation weights, not 1/σ²
    per, acc, _ = cv.robust_weighted_mean(g, 4, d, w, sig)
    assert per["high_scatter"].tolist() == [False, True, False, True]
    assert acc.all()                                   # two values: nothing rejected, only flagged
    dd = d[1::2] - d[0::2]
    np.testing.assert_allclose(per["chi2"], dd ** 2 / (s1 ** 2 + s2 ** 2), rtol=1e-9)
    flags = cv._bin_flags(per, min_common=2)
    assert flags.tolist() == ["ok", "high_scatter", "ok", "high_scatter"]


def test_three_value_points_are_flagged_by_their_chi_square():
    # A point of three values that disagree evenly (no single outlier: the MAD test keeps all
    # three) is flagged when χ² = Σ r²/σ² exceeds χ²(2 dof) at 99 % = 9.210 (chi-square table,
    # NIST/SEMATECH e-Handbook 1.3.6.7.4); equal σ and weights, so the mean is the plain mean.
    # Values 0, 3σ, 6σ: χ² = 18, flagged; 0, 1σ, 2σ: χ² = 2, ok; 0, 2.1σ, 4.2σ: χ² = 8.82 just
    # below the limit, ok; 0, 2.2σ, 4.4σ: 9.68 just above, flagged.
    s = 0.7
    g = np.repeat(np.arange(4), 3)
    d = np.concatenate([np.array([0.0, 3.0, 6.0]), np.array([0.0, 1.0, 2.0]), np.array([0.0, 2.1, 4.2]),
                        np.array([0.0, 2.2, 4.4])]) * s + 5.0
    sig = np.full(d.size, s)
    per, acc, _ = cv.robust_weighted_mean(g, 4, d, np.ones(d.size), sig)
    assert acc.all()                                   # nothing rejected: the values disagree evenly
    np.testing.assert_allclose(per["chi2"], [18.0, 2.0, 8.82, 9.68], rtol=1e-9)
    assert per["high_scatter"].tolist() == [True, False, False, True]
    assert cv._bin_flags(per, min_common=2).tolist() == ["high_scatter", "ok", "ok", "high_scatter"]


# ---------------------------------------------------------------- resampling, match counts

def test_finer_table_resampled_by_the_documented_rules():
    # Module docstring: each fine row goes to the nearest coarse instant with −Δ/2 ≤ dt < Δ/2; the
    # usable rows of a cell are averaged: value, a-priori u as √Σu²/n (error propagation of a mean
    # of independent values), azimuth through sine/cosine (350°, 10°, 0° average to 0°).
    t0 = int(convert(from_mjd(MJD0), "UTC", "GPS"))
    dt_s = np.array([-150, 0, 120, 150, 60, 60])
    fine = pd.DataFrame({
        "mid_time": t0 + dt_s * NS_PER_S, "sat": ["G01"] * 4 + ["G02", "G03"], "system": "G", "signal": "C1C",
        "value_ns": [1.0, 2.0, 3.0, 50.0, 7.0, 8.0], "u_ns": [2.0, 2.0, 4.0, 1.0, np.nan, 1.0],
        "elevation_deg": [30.0, 40.0, 50.0, 60.0, 20.0, 20.0], "azimuth_deg": [350.0, 10.0, 0.0, 90.0, 5.0, 5.0],
        "n_points": 1, "troposphere_m": 2.4, "ionosphere_m": 3.0,
        "flag": ["ok", "ok", "ok", "ok", "ok", "outlier"]})
    out = cv.resample_to(fine, np.array([t0, t0 + 300 * NS_PER_S]), 300.0)
    g1 = out[(out["sat"] == "G01") & (out["mid_time"] == t0)].iloc[0]
    assert g1["n_points"] == 3 and g1["value_ns"] == pytest.approx(2.0, rel=1e-15, abs=0)
    assert g1["u_ns"] == pytest.approx(np.sqrt(4.0 + 4.0 + 16.0) / 3.0, rel=1e-15, abs=0)
    assert g1["elevation_deg"] == pytest.approx(40.0, rel=1e-15, abs=0)
    assert min(g1["azimuth_deg"], 360.0 - g1["azimuth_deg"]) < 1e-9
    # +150 s belongs to the next instant; a u that is not known makes the cell's u unknown;
    # the only row of G03 is not usable: no cell
    nxt = out[(out["sat"] == "G01") & (out["mid_time"] == t0 + 300 * NS_PER_S)].iloc[0]
    assert nxt["value_ns"] == 50.0 and nxt["u_ns"] == 1.0
    assert np.isnan(out[out["sat"] == "G02"].iloc[0]["u_ns"])
    assert "G03" not in set(out["sat"])


def test_unmatched_rows_are_counted_per_station():
    # A sees G01-G04, B sees G03-G07, 10 epochs each: 20 common rows, 40 − 20 and 50 − 20 unmatched
    a = tracks.bin_epochs(station(lambda ts: 5.0 + 0 * ts, GPS10[:4], n_ep=10))
    b = tracks.bin_epochs(station(lambda ts: 0 * ts, GPS10[2:7], n_ep=10, phase=0.4))
    attrs = cv.common_view(a, b).offset_df.attrs
    assert (attrs["n_unmatched_a"], attrs["n_unmatched_b"]) == (20, 30)


def test_no_uncertainty_without_sigma_or_pooled_scatter():
    # Module docstring: without a-priori σ, u_ref = √(c_day/Σw) with c_day pooled over the bins
    # with n ≥ 3; when no bin has 3 values there is nothing to pool: u is unknown (NaN), never 0
    a = tracks.bin_epochs(station(lambda ts: 5.0 + 0 * ts, GPS10[:2], n_ep=20))
    b = tracks.bin_epochs(station(lambda ts: 0 * ts, GPS10[:2], n_ep=20, phase=0.4))
    o = cv.common_view(a, b).offset_df
    assert (o["n_sat"] == 2).all() and np.allclose(o["offset_ns"], 5.0, rtol=0, atol=1e-12)
    assert o["u_ns"].isna().all() and not (o["flag"] == "high_scatter").any()


def test_two_satellite_bins_take_the_pooled_scatter_factor():
    # Module docstring, without a-priori σ: c_bin = Σwᵢrᵢ²/(n−1) on the bins with n ≥ 3, pooled
    # c_day = Σ(n−1)c_bin/Σ(n−1), and a bin with n < 3 gets u = √(c_day/Σwᵢ) (the variance of a
    # weighted mean whose weights are inverse variances up to the factor c_day). Equal weights:
    # Σwᵢ = n and c_bin = scatter²·n/(n−1). Noise 1 ns per station (invented), σ not given.
    rng = np.random.default_rng(4)
    a = station(lambda ts: 5.0 + 0 * ts, GPS10[:4], n_ep=40, noise0=1.0, rng=rng)
    b = station(lambda ts: 0 * ts, GPS10[:4], n_ep=40, phase=0.4, noise0=1.0, rng=rng)
    for df in (a, b):
        df["sigma_ns"] = np.nan
    two = (a["time"] // (30 * NS_PER_S)) % 2 == 1            # odd epochs: A sees G01, G02 only
    a = a[~(two & a["sat"].isin(GPS10[2:4]))].reset_index(drop=True)
    o = cv.common_view(tracks.bin_epochs(a), tracks.bin_epochs(b), weights="equal").offset_df
    # n_sat counts the values kept after rejection (a 4-value bin may lose one or two)
    big, pair = o[o["n_sat"] >= 3], o[(o["n_sat"] == 2) & (o["n_rejected"] == 0)]
    assert len(big) >= 15 and len(pair) >= 20
    n = big["n_sat"].to_numpy()
    c_day = np.sum(big["scatter_ns"].to_numpy() ** 2 * n) / np.sum(n - 1)
    np.testing.assert_allclose(pair["u_ns"], np.sqrt(c_day / 2.0), rtol=1e-12, atol=0)


def test_step_without_window_attribute_is_the_median_spacing():
    # A table without attrs['window_s'] (not made by ctt.tracks) is matched at its median spacing,
    # which the result reports: 30-s epochs -> 30 s
    a = tracks.bin_epochs(station(lambda ts: 5.0 + 0 * ts, GPS10[:3], n_ep=20))
    b = tracks.bin_epochs(station(lambda ts: 0 * ts, GPS10[:3], n_ep=20, phase=0.4))
    for df in (a, b):
        del df.attrs["window_s"]
    assert cv.common_view(a, b).offset_df.attrs["window_s"] == 30.0


def test_main_series_of_an_ambiguous_day_is_its_first_system():
    # main_series docstring: a day with several systems and no combined series keeps its first
    # system in alphabetical order (ValueError when strict); a day with 'ALL' keeps 'ALL'
    df = pd.DataFrame({"date": ["2021-01-01"] * 2 + ["2021-01-02"] * 3,
                       "system": ["G", "E", "G", "E", "ALL"], "offset_ns": [1.0, 2.0, 3.0, 4.0, 5.0]})
    kept = cv.main_series(df)
    assert list(kept["system"]) == ["E", "ALL"] and list(kept["offset_ns"]) == [2.0, 5.0]
    with pytest.raises(ValueError, match="no combined"):
        cv.main_series(df, strict=True)


def test_suspect_satellite_from_half_of_its_bins_on():
    # Module docstring: a satellite with at least 3 usable bins of which half or more are outliers
    # is suspect. 4 bins with 2 outliers: suspect; with 1: not; 2 bins both outliers: too few
    sat_df = pd.DataFrame({"sat": ["G01"] * 4 + ["G02"] * 4 + ["G03"] * 2,
                           "flag": ["ok", "outlier", "ok", "outlier", "ok", "ok", "outlier", "ok", "outlier", "outlier"],
                           "residual_ns": 0.0})
    summ = cv._sat_summary(sat_df).set_index("sat")
    assert list(summ["suspect"]) == [True, False, False]
    assert list(summ["n_outlier"]) == [2, 1, 2]
