"""Standard track schedule, track fits and epoch bins (ctt.tracks).

External references:
* the open CV standard's track schedule (CGGTTS; Allan & Thomas 1994): 13-minute
  tracks every 16 minutes, the first at 00:02 UTC on MJD 50722, 4 minutes
  earlier each day; checks below recompute it from that definition by a
  different route (day-by-day stepping instead of the modulo);
* ordinary least squares error propagation: var(intercept at x0) =
  σ²(1/n + (x̄−x0)²/Sxx), var(slope) = σ²/Sxx (any regression text);
* simulation truth: invented per-satellite tables built here.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ctt import tracks
from ctt.errors import ProcessingError
from ctt.timescales import NS_PER_S, civil_to_ns, convert, from_mjd

MJD0 = 59215  # 2021-01-01, an arbitrary test day


def first_start_by_stepping(mjd: int) -> int:
    """First track (minutes after 00:00 UTC) found by stepping day by day from the reference date.

    CGGTTS standard: 00:02 on MJD 50722, each day 4 min earlier; a track pushed
    before 00:00 gives way to the one 16 min later. Independent of the modulo
    used by the module.
    """
    s = 2
    step = 1 if mjd >= 50722 else -1
    for _ in range(abs(mjd - 50722)):
        s -= 4 * step
        while s < 0:
            s += 16
        while s >= 16:
            s -= 16
    return s


def test_reference_day_first_track_at_0002():
    # CGGTTS standard: first track at 00:02:00 UTC on MJD 50722; MJD 50722 is
    # 1997-10-01 (from memory: the date the standard schedule took effect).
    assert int(from_mjd(50722)) == int(civil_to_ns(1997, 10, 1))
    s = tracks.track_schedule(50722)
    assert s[0] == civil_to_ns(1997, 10, 1, 0, 2, 0)
    assert s[1] == civil_to_ns(1997, 10, 1, 0, 18, 0)  # 16 min later (standard)


def test_next_day_first_track_at_0014():
    # Derived from the standard: 00:02 − 4 min = 23:58 of the day before, so the
    # first track inside MJD 50723 is 16 min later, 00:14.
    s = tracks.track_schedule(50723)
    assert s[0] == civil_to_ns(1997, 10, 2, 0, 14, 0)


@pytest.mark.parametrize("mjd", [50000, 50721, 51544, 55197, 57754, 59215, 60310, 61000])
def test_first_track_years_away_matches_stepping(mjd):
    # Definition of the standard, computed by stepping (see helper).
    s = tracks.track_schedule(mjd)
    assert (s[0] - int(from_mjd(mjd))) == first_start_by_stepping(mjd) * 60 * NS_PER_S


def test_schedule_moves_exactly_four_minutes_a_day():
    # The standard shifts exactly 4 min/day (the sky repeats ~3 min 56 s earlier
    # each solar day, one sidereal day; the standard rounds that to 4 min).
    # A track of day D+1 starts 4 min (time of day) before one of day D, except
    # the tracks added or dropped at the ends of the day.
    for mjd in range(MJD0, MJD0 + 8):
        tod0 = (tracks.track_schedule(mjd) - int(from_mjd(mjd))) // NS_PER_S
        tod1 = (tracks.track_schedule(mjd + 1) - int(from_mjd(mjd + 1))) // NS_PER_S
        shifted = set((tod0 - 240).tolist())
        common = set(tod1.tolist()) & shifted
        assert len(common) >= 88
        extra = set(tod1.tolist()) - shifted
        assert all(t >= 86_400 - 240 - 960 - 780 or t < 960 for t in extra)
    # over the 4-day cycle the shift accumulates to exactly 16 min: same times of day
    a = tracks.track_schedule(MJD0) - int(from_mjd(MJD0))
    b = tracks.track_schedule(MJD0 + 4) - int(from_mjd(MJD0 + 4))
    assert np.array_equal(a, b)


def test_counts_no_overlap_within_day():
    # Standard: 780-s tracks every 960 s; 90 tracks on the days starting at
    # 00:02, else 89 (the 90th would end after 24:00). Checked over 400 days.
    for mjd in range(MJD0, MJD0 + 400):
        s = tracks.track_schedule(mjd)
        tod = (s - int(from_mjd(mjd))) / 1e9
        first = tod[0]
        assert len(s) == (90 if first == 120 else 89)
        assert np.all(np.diff(s) == 960 * NS_PER_S)
        assert tod[0] >= 0 and tod[-1] + 780 <= 86_400
        assert tod[0] < 960  # no room for an earlier track


# ---------------------------------------------------------------- simulated tables

def station_table(clock, *, n_ep=2880, step_s=30, sats=("G01", "G02", "G03"), noise=None, rng=None,
                  mjd=MJD0, t_offset_s=0):
    """Invented per-satellite table: clock(t_s) in ns, linear elevation, azimuth through 360."""
    t0 = int(convert(from_mjd(mjd), "UTC", "GPS"))
    t = t0 + (t_offset_s + np.arange(n_ep, dtype=np.int64) * step_s) * NS_PER_S
    ns = len(sats)
    T = np.repeat(t, ns)
    k = np.tile(np.arange(ns), n_ep)
    ts = (T - t0) / 1e9
    el = 20.0 + 30.0 * k + 0.001 * ts
    az = np.mod(350.0 + 0.01 * ts + 40.0 * k, 360.0)
    v = clock(ts)
    sig = np.full(T.size, np.nan)
    if noise is not None:
        sig = np.full(T.size, float(noise))
        v = v + rng.normal(0.0, noise, T.size)
    df = pd.DataFrame({"time": T, "sat": np.tile(np.array(sats, dtype=object), n_ep), "system": "G",
                       "signal": "C1C+C2W", "elevation_deg": el, "azimuth_deg": az, "clock_ns": v,
                       "sigma_ns": sig, "troposphere_m": 2.3 + 1e-5 * ts, "ionosphere_m": 0.0, "flag": "ok"})
    df.attrs["reference"] = "broadcast"
    return df


def test_track_fit_recovers_linear_clock_exactly():
    # Simulation truth: clock = 40 + 2e-3 ns/s · t (2 ps/s); noise-free.
    df = station_table(lambda ts: 40.0 + 2e-3 * ts)
    tr = tracks.fit_tracks(df)
    full = tr[tr["n_points"] == 26]
    assert len(full) > 80 * 3
    mid_s = (full["mid_time"].to_numpy() - df["time"].min()) / 1e9
    np.testing.assert_allclose(full["value_ns"], 40.0 + 2e-3 * mid_s, rtol=0, atol=1e-9)
    np.testing.assert_allclose(full["slope_ps_s"], 2.0, atol=1e-9)
    # midpoint = start + 390 s (standard track of 780 s), start on the UTC schedule
    start_gps = convert(full["track_start_utc_ns"].to_numpy(), "UTC", "GPS")
    assert np.all(full["mid_time"].to_numpy() - start_gps == 390 * NS_PER_S)
    assert set(full["track_start_utc_ns"]) <= set(tracks.schedule_for_times(df["time"]).tolist())
    # and every scheduled track that the day's data cover whole is there, the day's first included
    sched = convert(tracks.schedule_for_times(df["time"]), "UTC", "GPS")
    inside = sched[(sched >= df["time"].min()) & (sched + 780 * NS_PER_S <= df["time"].max())]
    assert set(start_gps.tolist()) == set(inside.tolist())
    # linear elevation and troposphere: the fit at the midpoint is exact
    k = full["sat"].map({"G01": 0, "G02": 1, "G03": 2}).to_numpy()
    np.testing.assert_allclose(full["elevation_deg"], 20 + 30 * k + 0.001 * mid_s, atol=1e-9)
    np.testing.assert_allclose(full["troposphere_m"], 2.3 + 1e-5 * mid_s, atol=1e-12)
    az_true = np.mod(350.0 + 0.01 * mid_s + 40 * k, 360.0)
    d = np.mod(full["azimuth_deg"].to_numpy() - az_true + 180, 360) - 180
    assert np.max(np.abs(d)) < 1e-3  # sin/cos fit of a 3.9° arc: chord error ~1e-4°
    assert (full["flag"] == "ok").all()


def test_asymmetric_track_midpoint_exact():
    # Points missing at one end (x̄ ≠ 0): a linear clock is still recovered exactly at the midpoint.
    df = station_table(lambda ts: -7.0 + 5e-4 * ts)
    df = df[(df["time"] - df["time"].min()) / 1e9 % 960 < 600].copy()
    df.attrs["reference"] = "broadcast"
    tr = tracks.fit_tracks(df, min_points=1)
    good = tr[tr["n_points"] >= 3]
    mid_s = (good["mid_time"].to_numpy() - df["time"].min()) / 1e9
    np.testing.assert_allclose(good["value_ns"], -7.0 + 5e-4 * mid_s, atol=1e-9)


def test_track_uncertainty_matches_ols_and_simulation():
    # OLS error propagation: the 26 points sit at x = −390 + 30 j s from the
    # midpoint (the data start on the UTC minute like the tracks), so
    # var(a) = σ²(1/n + x̄²/Sxx) with x̄ = −15 s.
    x = np.arange(26) * 30 - 390.0
    lever = 1 / 26 + x.mean() ** 2 / np.sum((x - x.mean()) ** 2)
    rng = np.random.default_rng(20210101)
    sigma = 2.0
    df = station_table(lambda ts: np.zeros_like(ts), n_ep=2880 * 3, sats=tuple(f"G{i:02d}" for i in range(1, 11)),
                       noise=sigma, rng=rng)
    tr = tracks.fit_tracks(df)
    full = tr[(tr["n_points"] == 26)]
    np.testing.assert_allclose(full["u_apriori_ns"], sigma * np.sqrt(lever), rtol=1e-12)
    err = full["value_ns"].to_numpy()
    n = err.size
    # empirical variance vs σ²/26: the sample variance of n normal errors has
    # relative sd √(2/n); 4 sd allowed.
    ratio = np.mean(err ** 2) / (sigma ** 2 * lever)
    assert abs(ratio - 1) < 4 * np.sqrt(2 / n)
    # residual-based u: s²·lever, s² with 24 dof, unbiased for σ²
    ratio_fit = np.mean(full["u_fit_ns"] ** 2) / (sigma ** 2 * lever)
    assert abs(ratio_fit - 1) < 4 * np.sqrt(2 / (24 * n))
    # and track by track it is numpy's least-squares covariance (np.polyfit, cov=True: scaled by
    # the residual variance with n − 2 dof) of the intercept at the midpoint
    for _, row in full.iloc[:5].iterrows():
        dt = df["time"] - row["mid_time"]
        pts = df[(df["sat"] == row["sat"]) & (dt >= -390 * NS_PER_S) & (dt < 390 * NS_PER_S)]
        assert len(pts) == 26
        _, cov = np.polyfit((pts["time"].to_numpy() - row["mid_time"]) / 1e9, pts["clock_ns"].to_numpy(), 1, cov=True)
        assert row["u_fit_ns"] == pytest.approx(np.sqrt(cov[1, 1]), rel=1e-9, abs=0)
    # slope variance σ²/Sxx, Sxx = Σ(x−x̄)²
    sl = full["slope_ps_s"].to_numpy() / 1e3
    ratio_sl = np.mean(sl ** 2) / (sigma ** 2 / np.sum((x - x.mean()) ** 2))
    assert abs(ratio_sl - 1) < 4 * np.sqrt(2 / n)
    # the a-priori u is kept unless χ² exceeds its 99 % quantile: ~1 % of tracks switch
    assert (full["u_ns"] == full["u_apriori_ns"]).mean() > 0.97


def test_few_points_and_high_rms_flagged_not_dropped():
    rng = np.random.default_rng(7)
    df = station_table(lambda ts: np.zeros_like(ts), sats=tuple(f"G{i:02d}" for i in range(1, 9)),
                       noise=0.5, rng=rng)
    tr0 = tracks.fit_tracks(df)
    target = tr0[(tr0["n_points"] == 26)].iloc[40]
    start = convert(int(target["track_start_utc_ns"]), "UTC", "GPS")
    in_track = (df["time"] >= start) & (df["time"] < start + 780 * NS_PER_S)
    # G01: keep 17 of 26 points in that track (18 needed: our 2/3 rule) -> few_points
    drop = in_track & (df["sat"] == "G01") & (((df["time"] - start) // (30 * NS_PER_S)) >= 17)
    df.loc[drop, "flag"] = "low_elevation"
    df.loc[drop, "clock_ns"] = 1e6  # must never be used
    # G02: ten times the noise in that track -> high_rms
    noisy = in_track & (df["sat"] == "G02")
    df.loc[noisy, "clock_ns"] = rng.normal(0, 5.0, int(noisy.sum()))
    # G03: 18 points -> ok
    drop3 = in_track & (df["sat"] == "G03") & (((df["time"] - start) // (30 * NS_PER_S)) >= 18)
    df.loc[drop3, "flag"] = "outlier"
    df.loc[drop3, "clock_ns"] = -1e6
    tr = tracks.fit_tracks(df)
    row = tr[tr["track_start_utc_ns"] == target["track_start_utc_ns"]].set_index("sat")
    assert row.loc["G01", "flag"] == "few_points" and row.loc["G01", "n_points"] == 17
    assert row.loc["G01", "n_flagged"] == 9
    assert abs(row.loc["G01", "value_ns"]) < 5  # the 1e6 ns rows were not used
    assert row.loc["G02", "flag"] == "high_rms"
    assert row.loc["G03", "flag"] == "ok" and row.loc["G03", "n_points"] == 18
    assert abs(row.loc["G03", "value_ns"]) < 5
    # a 26-point track of normal noise is not flagged (3× median rule)
    assert (tr["flag"] == "ok").mean() > 0.95


def test_bin_epochs_single_and_300s():
    rng = np.random.default_rng(11)
    df = station_table(lambda ts: 3.0 + 1e-4 * ts, n_ep=600, noise=1.0, rng=rng)
    df.loc[5, "flag"] = "cycle_slip"
    e = tracks.bin_epochs(df)
    assert len(e) == len(df)
    assert e["mid_time"].is_monotonic_increasing
    assert e.loc[e["flag"] != "ok", "n_points"].sum() == 0
    assert (e["flag"] == "cycle_slip").sum() == 1
    # without a system column the system is the satellite id's letter (RINEX 3 ids)
    assert set(tracks.bin_epochs(df.drop(columns=["system"]))["system"]) == {"G"}
    # 300-s bins: mean of 10 points, u = σ/√10 (error propagation of a mean)
    b = tracks.bin_epochs(df, 300)
    full = b[b["n_points"] == 10]
    np.testing.assert_allclose(full["u_apriori_ns"], 1 / np.sqrt(10), rtol=1e-12)
    assert np.all((full["mid_time"].to_numpy() % (300 * NS_PER_S)) == 150 * NS_PER_S)
    # noise-free: the mean of a linear clock is its value at the mean time of the
    # bin's points. Bins sit on the GPS count, the data on the UTC minute (18 s
    # apart), so the mean time is a few seconds off the bin midpoint: the truth
    # is computed at the points' mean time, and that offset is bounded below.
    clean = station_table(lambda ts: 3.0 + 1e-4 * ts, n_ep=600)
    bc = tracks.bin_epochs(clean, 300)
    bc = bc[bc["n_points"] == 10]
    mid_s = (bc["mid_time"].to_numpy() - clean["time"].min()) / 1e9
    t_pts = clean["time"].to_numpy()
    k = t_pts // (300 * NS_PER_S)
    mean_t = pd.Series((t_pts - clean["time"].min()) / 1e9).groupby(k).mean()
    truth = 3.0 + 1e-4 * mean_t.loc[bc["mid_time"].to_numpy() // (300 * NS_PER_S)].to_numpy()
    np.testing.assert_allclose(bc["value_ns"], truth, atol=1e-9)
    assert np.all(np.abs(mid_s - mean_t.loc[bc["mid_time"].to_numpy() // (300 * NS_PER_S)].to_numpy()) <= 15)
    # with noise, the empirical variance of bin means matches σ²/10 (√(2/n) CI, 4 sd)
    err = full["value_ns"].to_numpy() - (3.0 + 1e-4 * (full["mid_time"].to_numpy() - df["time"].min()) / 1e9)
    err -= np.mean(err)  # the fixed few-second midpoint offset × drift is tiny; remove the common part
    ratio = np.mean(err ** 2) / 0.1
    assert abs(ratio - 1) < 4 * np.sqrt(2 / err.size)



def test_bin_uncertainty_follows_the_chi_square_test_with_n_minus_1_dof():
    # A bin of n points (σ = 1 ns each) keeps its a-priori u = √Σσ²/n while χ² = Σr²/σ² stays within
    # the 99 % quantile of χ²(n − 1), else it takes the scatter s/√n (s with n − 1 dof). n = 10:
    # χ²₀.₉₉(9) = 21.67 (scipy; statistics tables), so χ² = 23 takes the scatter, χ² = 20 does not
    # (with 11 dof the quantile would be 24.72 and both would keep the a-priori u).
    from scipy import stats

    assert stats.chi2.ppf(0.99, 9) == pytest.approx(21.666, abs=1e-3)
    df = station_table(lambda ts: 0 * ts, n_ep=600, sats=("G01",))
    t = df["time"].to_numpy()
    k = t // (300 * NS_PER_S)
    sign = np.where((t // (30 * NS_PER_S)) % 2 == 0, 1.0, -1.0)
    df["clock_ns"] = sign * np.where(k % 2 == 0, np.sqrt(2.3), np.sqrt(2.0))  # 10 values: Σr² = 23 or 20
    df["sigma_ns"] = 1.0
    b = tracks.bin_epochs(df, 300)
    full = b[b["n_points"] == 10]
    even = (full["mid_time"].to_numpy() // (300 * NS_PER_S)) % 2 == 0
    assert even.sum() > 10 and (~even).sum() > 10
    np.testing.assert_allclose(full["u_ns"][even], np.sqrt(23.0 / 9.0 / 10.0), rtol=1e-12, atol=0)
    np.testing.assert_allclose(full["u_ns"][~even], np.sqrt(10.0) / 10.0, rtol=1e-12, atol=0)
    # two points (1 dof): ±2 ns with σ = 1 give χ² = 8 > χ²₀.₉₉(1) = 6.63, so u = s/√2 = √8/√2 = 2 ns
    pair = df[k == k[100]].iloc[:2].copy()
    pair["clock_ns"] = [2.0, -2.0]
    row = tracks.bin_epochs(pair, 300).iloc[0]
    assert row["n_points"] == 2 and row["u_ns"] == pytest.approx(2.0, rel=1e-12, abs=0)


def test_one_track_schedule():
    # a schedule given as one track start (UTC) gives that track for each satellite
    df = station_table(lambda ts: 40.0 + 2e-3 * ts, n_ep=120)
    start = tracks.schedule_for_times(df["time"])[:1]
    tr = tracks.fit_tracks(df, schedule=start)
    assert len(tr) == 3 and (tr["track_start_utc_ns"] == start[0]).all()


def test_sampling_interval_is_the_median_step_in_seconds():
    # 30-s data with one 5-min gap and a repeated epoch: the median positive step is 30 s exactly
    t = np.concatenate([np.arange(0, 50), np.arange(60, 100), [99]]) * 30 * NS_PER_S
    assert tracks.sampling_interval_s(t) == 30.0
    assert np.isnan(tracks.sampling_interval_s(t[:1]))


def test_bin_few_points_threshold_and_bad_bin_length():
    # bin_epochs docstring: a bin is few_points below 2/3 of the nominal count (at least 1); 300-s
    # bins of 30-s data hold 10 points, so 7 points pass and 6 do not
    df = station_table(lambda ts: 3.0 + 0 * ts, n_ep=600, sats=("G01",))
    k = df["time"].to_numpy() // (300 * NS_PER_S)
    full = [kk for kk in np.unique(k) if np.count_nonzero(k == kk) == 10]
    cut = np.concatenate([np.flatnonzero(k == full[1])[:3], np.flatnonzero(k == full[2])[:4]])
    b = tracks.bin_epochs(df.drop(index=cut), 300).set_index("mid_time")
    mids = [kk * 300 * NS_PER_S + 150 * NS_PER_S for kk in full[1:3]]
    assert list(b.loc[mids, "n_points"]) == [7, 6]
    assert list(b.loc[mids, "flag"]) == ["ok", "few_points"]
    # bins as long as the sampling interval hold one point: 2/3 of 1 rounds up to 1, and "at least 1"
    one = tracks.bin_epochs(df, 30)
    assert (one["n_points"] == 1).all() and (one["flag"] == "ok").all()
    # a table of a single row still gives its bin (its sampling unknown: nominal count 1)
    lone = tracks.bin_epochs(df.iloc[:1], 300)
    assert len(lone) == 1 and lone["n_points"].iloc[0] == 1
    for bad in (0.0, -300.0):
        with pytest.raises(ProcessingError, match="bin length must be positive"):
            tracks.bin_epochs(df, bad)


def test_empty_and_missing_columns():
    df = station_table(lambda ts: ts * 0, n_ep=4)
    assert len(tracks.fit_tracks(df.iloc[0:0])) == 0
    with pytest.raises(ProcessingError, match="clock_ns"):
        tracks.fit_tracks(df.drop(columns=["clock_ns"]))


def _sawtooth_clock(ts):
    """Invented free-running receiver clock: −0.735 µs/s drift kept within ±0.5 ms by +1 ms resets
    (the behaviour of real-2021-001's DELF; simulation truth, not its data)."""
    raw = 4.2e5 - 735.0 * ts                      # ns
    return raw + 1e6 * np.floor((5e5 - raw) / 1e6), raw


def test_millisecond_resets_are_removed_inside_tracks_and_bins():
    # Simulation truth: the clock above; a track or bin across a reset must still give the clock
    # at its midpoint (the reset in force there) and the drift as slope, exactly.
    clock = lambda ts: _sawtooth_clock(ts)[0]   # noqa: E731
    df = station_table(clock)
    steps = tracks.clock_steps_ns(df)
    ts = (df["time"].to_numpy() - df["time"].min()) / 1e9
    true_steps = clock(ts) - _sawtooth_clock(ts)[1]
    np.testing.assert_allclose(steps - steps[0], true_steps - true_steps[0], atol=0)
    assert np.unique(steps).size > 50               # ~63 resets in the day
    tr = tracks.fit_tracks(df)
    full = tr[tr["n_points"] == 26]
    mid_s = (full["mid_time"].to_numpy() - df["time"].min()) / 1e9
    np.testing.assert_allclose(full["value_ns"], clock(mid_s), atol=1e-6)
    np.testing.assert_allclose(full["slope_ps_s"], -735_000.0, atol=1e-3)
    np.testing.assert_allclose(full["rms_ns"], 0.0, atol=1e-6)
    assert (full["flag"] == "ok").all()
    b = tracks.bin_epochs(df, 960)
    mid_b = (b["mid_time"].to_numpy() - df["time"].min()) / 1e9
    # a bin mean of a line is the line at the mean time of its points; the reset added back is the
    # one in force at the last sample at or before the midpoint (a reset between that sample and
    # the midpoint cannot be placed: the midpoint's clock is known modulo 1 ms only there)
    t_mean = pd.Series(ts).groupby(df["time"].to_numpy() // (960 * NS_PER_S)).mean()
    t_mean = t_mean.reindex(b["mid_time"].to_numpy() // (960 * NS_PER_S)).to_numpy()
    s_last = 30.0 * np.floor(mid_b / 30.0)
    lin = _sawtooth_clock(t_mean)[1] + (clock(s_last) - _sawtooth_clock(s_last)[1])
    np.testing.assert_allclose(b["value_ns"], lin, atol=1e-6)
    # without resets nothing changes: no steps detected on a smooth clock
    smooth = station_table(lambda t: 40.0 + 2e-3 * t)
    assert not np.any(tracks.clock_steps_ns(smooth))
