"""Behaviour of ctt.stability: gaps, noise identification, drift fit, changes, periods.

External references: allantools (reference library) for the estimators and for
Kasdin & Walter (1992) power-law noise; NIST SP 1065 (Riley 2008) for the noise
types; Riley & Greenhall (2004) for the lag-1 autocorrelation method.
"""

import math

import allantools
import numpy as np
import pytest
from allantools.noise_kasdin import Noise

from ctt import stability

NS = 1_000_000_000


def kasdin(b, n=2 ** 17, draw=1):
    """Kasdin & Walter (1992) power-law phase noise via allantools (b = α − 2)."""
    np.random.set_state(np.random.RandomState(draw).get_state())
    g = Noise(n, 1e-20, b)
    g.generateNoise()
    return g.time_series


# ------------------------------------------------------------------ gaps

def test_allantools_propagates_nan():
    # allantools (reference library): one NaN makes the deviation NaN at every τ,
    # which is why ctt.stability has its own gap-aware path.
    x = np.cumsum(np.random.default_rng(0).normal(size=200))
    x[50] = np.nan
    assert np.all(np.isnan(allantools.oadev(x, 1.0, "phase", [1, 2, 4])[1]))


@pytest.mark.parametrize("kind", ["adev", "oadev", "mdev", "tdev", "hdev", "ohdev"])
def test_gap_aware_path_matches_allantools_without_gaps(kind, monkeypatch):
    # allantools (reference library) on gap-free data vs our NaN-skipping estimator
    # (forced by a trailing NaN; strict windows so that no term uses it); rounding only: 1e-12.
    monkeypatch.setattr(stability, "MDEV_MAX_MISSING", 0.0)
    x = np.cumsum(np.random.default_rng(1).normal(size=3000)) * 1e-9
    taus = [1, 2, 8, 64, 256]
    ref = getattr(allantools, kind)(x, 0.5, "phase", np.array(taus) / 0.5)[1]
    d = stability.deviation(kind, np.append(x, np.nan), rate=0.5, taus=np.array(taus) / 0.5)
    np.testing.assert_allclose(d.dev, ref, rtol=1e-12)


@pytest.mark.parametrize("kind", ["adev", "hdev"])
def test_a_tau_with_a_single_term_is_no_estimate_on_either_path(kind):
    # 64 phase points, m = 16: the non-overlapping ADEV has 64/16 − 2 = 2 terms, HDEV 64/16 − 3 = 1.
    # allantools (reference library) drops a τ with a single term (remove_small_ns: n > 1 kept)
    # and raises when none is left; the gap-aware path must agree, and neither may stop a run.
    x = np.cumsum(np.random.default_rng(3).normal(size=64)) * 1e-9
    n_terms = {"adev": 2, "hdev": 1}[kind]
    for series in (x, np.append(x, np.nan)):      # allantools path, gap-aware path
        d = stability.deviation(kind, series, 1.0, taus=[16])
        assert d.n[0] == (n_terms if n_terms > 1 else 0)
        assert np.isfinite(d.dev[0]) == (n_terms > 1) and np.isfinite(d.edf[0]) == (n_terms > 1)


def test_gaps_are_skipped_not_interpolated():
    # A gap removes exactly the terms that touch it and leaves the estimate unbiased:
    # white PM of σ has ADEV(τ) = √3·σ/τ (E[(x2 − 2x1 + x0)²] = 6σ², common practice);
    # with 10 % of samples missing the 99.7 % CI (SP 1065 §5.3) still holds it.
    rng = np.random.default_rng(2)
    x = rng.normal(size=20000) * 1e-9
    full = stability.oadev(x, 1.0, taus=[1, 16, 256])
    xg = x.copy()
    xg[rng.choice(len(x), 2000, replace=False)] = np.nan
    gap = stability.oadev(xg, 1.0, taus=[1, 16, 256], ci=0.997)
    truth = math.sqrt(3) * 1e-9 / gap.tau_s
    assert np.all(gap.n < full.n)
    assert np.all((gap.ci_low < truth) & (truth < gap.ci_high))


def test_mdev_survives_scattered_gaps():
    # Six missing samples in 860 would void every MDEV term at m = 256 if whole windows
    # were required; with partly filled windows (≤ 10 % missing) MDEV stays within its
    # 1σ CI (SP 1065 §5.3) of the gap-free value at every τ.
    rng = np.random.default_rng(3)
    x = (rng.normal(size=864) + np.cumsum(rng.normal(scale=0.05, size=864))) * 1e-9
    full = stability.mdev(x, 1 / 300)
    xg = x.copy()
    xg[[50, 200, 333, 480, 610, 790]] = np.nan
    gap = stability.mdev(xg, 1 / 300)
    assert np.all(np.isfinite(gap.dev))
    assert np.all((gap.dev > full.ci_low) & (gap.dev < full.ci_high))


def test_to_grid_places_nan_and_refuses_off_grid():
    t = np.array([0, 30, 60, 120, 150]) * NS
    g = stability.to_grid(t, [1.0, 2.0, 3.0, 5.0, 6.0])
    assert g.tau0_s == 30.0 and g.n_missing == 1
    assert np.isnan(g.value[3]) and g.value[4] == 5.0
    with pytest.raises(ValueError, match="off the regular"):
        stability.to_grid(np.array([0, 30, 60, 95]) * NS, [1, 2, 3, 4])
    with pytest.raises(ValueError, match="duplicate"):
        stability.to_grid(np.array([0, 30, 30, 60]) * NS, [1, 2, 3, 4])


def test_track_schedule_is_snapped_to_a_grid():
    # Common-view tracks every 16 min, the schedule 4 min earlier each day (common
    # practice for the standard track schedule): not one grid over several days.
    day = 86400 * NS
    t = np.concatenate([d * day - d * 240 * NS + 120 * NS + np.arange(89) * 960 * NS for d in range(4)])
    x = np.random.default_rng(21).normal(size=len(t))
    with pytest.raises(ValueError, match="off the regular"):
        stability.to_grid(t, x)
    g = stability.grid_series(t, x)
    assert g.tau0_s == 960 and g.n_dropped == 0
    assert 0 < g.max_shift_s <= 480                          # at most τ0/2
    assert np.count_nonzero(np.isfinite(g.value)) == len(t)  # every value kept, none invented


def test_octave_taus_stop_at_a_third_of_the_span():
    taus = stability.octave_taus(2881, 30.0)          # one day of 30 s phase points
    assert taus[0] == 30.0 and taus[-1] <= 2880 * 30 / 3 and taus[-1] * 2 > 2880 * 30 / 3


# ------------------------------------------------------------------ CIs

def test_confidence_intervals_bracket_and_widen():
    # SP 1065 §5.3: chi-square CIs around the estimate, fewer EDF at longer τ.
    x = kasdin(-2, 2 ** 14)
    d = stability.oadev(x, 1.0)
    ok = np.isfinite(d.dev)
    assert np.all(d.ci_low[ok] < d.dev[ok]) and np.all(d.dev[ok] < d.ci_high[ok])
    assert np.all(np.diff(d.edf[ok]) < 0)


# Greenhall & Riley's EDF case per estimator (SP 1065 §5.3; Greenhall & Riley 2003, "Uncertainty
# of stability variances based on finite differences"): difference order d, overlapping, modified.
# TDEV² = τ²·MDEV²/3 is a fixed multiple of MDEV², so it has MDEV's chi-square and EDF.
EDF_CASE = {"adev": (2, False, False), "oadev": (2, True, False), "mdev": (2, True, True),
            "tdev": (2, True, True), "hdev": (3, False, False), "ohdev": (3, True, False)}


@pytest.mark.parametrize("kind", sorted(EDF_CASE))
@pytest.mark.parametrize("b", [0, -2])  # white PM, white FM
def test_edf_and_ci_against_greenhall_riley_and_chi_square(kind, b):
    # EDF: allantools.edf_greenhall (reference library implementing Greenhall & Riley's
    # algorithm) called with the case written above, not with ctt's own mapping; CI: the
    # chi-square interval of SP 1065 §5.3 (eq. 45) from scipy: σ·√(ν/χ²_{p}(ν)) at
    # p = (1 ± erf(1/√2))/2 for the 1σ (68.27 %) interval.
    from scipy import stats

    x = kasdin(b, 2 ** 12)
    d = stability.deviation(kind, x, 1.0, taus=[4, 16, 64])
    dd, ov, mo = EDF_CASE[kind]
    for i, m in enumerate([4, 16, 64]):
        ref = allantools.edf_greenhall(alpha=int(d.alpha_int[i]), d=dd, m=m, N=2 ** 12, overlapping=ov, modified=mo)
        assert d.edf[i] == pytest.approx(ref, rel=1e-12)
        nu, p = d.edf[i], math.erf(1 / math.sqrt(2)) / 2
        assert d.ci_low[i] == pytest.approx(d.dev[i] * math.sqrt(nu / stats.chi2.ppf(0.5 + p, nu)), rel=1e-9, abs=0)
        assert d.ci_high[i] == pytest.approx(d.dev[i] * math.sqrt(nu / stats.chi2.ppf(0.5 - p, nu)), rel=1e-9, abs=0)
    # TDEV's relative CI is MDEV's (same EDF), in the direct and the shared-pass paths
    if kind == "tdev":
        md = stability.deviation("mdev", x, 1.0, taus=[4, 16, 64])
        np.testing.assert_allclose(d.ci_high / d.dev, md.ci_high / md.dev, rtol=1e-12)
        s = stability.stability_set(x, 1.0, taus=[4, 16, 64], kinds=("mdev", "tdev"))
        np.testing.assert_allclose(s["tdev"].ci_high / s["tdev"].dev, md.ci_high / md.dev, rtol=1e-12)


def test_tdev_edf_matches_the_sampling_spread_of_white_pm():
    # Independent of any EDF formula: over K = 300 white-PM series (simulation truth) the
    # spread of TDEV² gives an empirical EDF 2·mean²/var (chi-square: var = 2σ⁴/ν). With
    # K = 300 the estimate scatters by ~15-25 % (measured over seeds 1-3: 0.76-0.98 of the
    # claimed EDF); bounds 0.6-1.6. The unmodified-variance EDF would be 6.5× and 27× too
    # large at τ = 16 and 64 (white PM), far outside.
    rng = np.random.default_rng(1)
    v, claimed = [], None
    for _ in range(300):
        d = stability.tdev(rng.normal(size=1024), 1.0, taus=[16, 64])
        v.append(d.dev ** 2)
        claimed = d.edf
        assert d.noise == ["white PM", "white PM"]
    v = np.array(v)
    ratio = 2 * v.mean(0) ** 2 / v.var(0) / claimed
    assert np.all((0.6 < ratio) & (ratio < 1.6)), ratio


@pytest.mark.slow
def test_adev_ci_coverage_white_fm():
    # White FM from allantools' Kasdin generator; its theoretical ADEV (allantools
    # Noise.adev, Kasdin & Walter 1992) must fall inside the 68.3 % CI in 68 % ± 10 %
    # of 100 runs (binomial sd 4.7 %; ±10 % is about 2 sd).
    hits = 0
    taus = [16.0]
    for draw in range(100):
        np.random.set_state(np.random.RandomState(draw).get_state())
        g = Noise(2 ** 12, 1.0, -2)
        g.generateNoise()
        d = stability.oadev(g.time_series, 1.0, taus=taus)
        truth = g.adev(1.0, 16.0)
        hits += d.ci_low[0] <= truth <= d.ci_high[0]
    assert 58 <= hits <= 78


# ------------------------------------------------------------------ noise identification

@pytest.mark.parametrize("b,name", [(0, "white PM"), (-1, "flicker PM"), (-2, "white FM"),
                                    (-3, "flicker FM"), (-4, "random walk FM")])
@pytest.mark.parametrize("draw", [1, 2])
def test_noise_type_on_kasdin_series(b, name, draw):
    # Kasdin & Walter (1992) series from allantools, 2^17 ≈ 1.3e5 points; α = b + 2
    # named as in the SP 1065 noise table. τ up to m = 256 keeps ≥ 512 decimated points
    # (Riley & Greenhall 2004 need ≳ 30; more points for a sure decision).
    x = kasdin(b, draw=draw)
    taus = [1, 4, 16, 64, 256]
    for kind in ("oadev", "mdev", "ohdev"):
        d = stability.deviation(kind, x, 1.0, taus=taus)
        assert d.noise == [name] * len(taus), (kind, d.noise, d.alpha)


@pytest.mark.parametrize("b", [0, -1, -2, -3, -4])
def test_lag1_estimate_at_tau0_is_close(b):
    # Riley & Greenhall (2004): at m = 1 the lag-1 ACF estimate of α is unbiased for
    # discrete power-law noise; sd ≈ 2/√N ≈ 0.006 at 1.3e5 points, so 0.1 is a wide margin.
    r = stability.noise_id(kasdin(b), 1)
    assert abs(r[1] - (b + 2)) < 0.1


@pytest.mark.parametrize("b", [0, -1, -2, -3, -4])
def test_lag1_matches_allantools_autocorr_noise_id(b):
    # allantools.autocorr_noise_id (reference library, same algorithm, Python loop)
    x = kasdin(b, 2 ** 12)
    for m in (1, 4):
        ref = allantools.autocorr_noise_id(x, m, data_type="phase", dmin=0, dmax=2)
        ours = stability.noise_id(x, m, "phase", 0, 2)
        assert ours[2] == ref[2]
        assert ours[1] == pytest.approx(ref[1], abs=1e-9)


def test_short_series_inherit_noise_type():
    x = kasdin(-2, 2 ** 8)
    d = stability.oadev(x, 1.0)
    assert d.noise_tau_s[-1] < d.tau_s[-1]          # too few points at the last τ
    assert d.noise[-1] == d.noise[list(d.tau_s).index(d.noise_tau_s[-1])]


# ------------------------------------------------------------------ drift

def simulate_phase(draw, n=400, step_s=900.0, d_per_day=3e-14, y=2e-13, a=5.0, sigma=1.0,
                   steps=()):
    rng = np.random.default_rng(draw)
    t_ns = (np.arange(n) * step_s * NS).astype(np.int64)
    ts = t_ns / 1e9
    tref = ts.mean()
    D = d_per_day / 86400.0
    x = a + y * 1e9 * (ts - tref) + 0.5 * D * 1e9 * (ts - tref) ** 2
    for te, s in steps:
        x = x + s * (t_ns >= te)
    return t_ns, x + rng.normal(scale=sigma, size=n), np.full(n, sigma)


def test_drift_fit_recovers_parameters():
    t, x, u = simulate_phase(0)
    f = stability.fit_drift(t, x, u)
    assert abs(f.drift_per_day.value - 3e-14) < 4 * f.drift_per_day.u
    assert abs(f.frequency.value - 2e-13) < 4 * f.frequency.u
    assert abs(f.offset_ns.value - 5.0) < 4 * f.offset_ns.u
    assert f.chi2_red == pytest.approx(1.0, abs=0.25)        # σ given correctly: χ²/ν ≈ 1 ± √(2/ν)·3


def test_drift_uncertainty_coverage_200_draws():
    # Coverage: white PM residuals, stated u right -> the 1σ interval holds the true D
    # in 68.3 % of cases (normal distribution, common practice); 200 draws have binomial
    # sd 3.3 %, the tolerance ±7 % is about 2 sd.
    hits = 0
    for draw in range(200):
        t, x, u = simulate_phase(draw)
        f = stability.fit_drift(t, x, u)
        hits += abs(f.drift_per_day.value - 3e-14) <= f.drift_per_day.u
    assert 0.61 <= hits / 200 <= 0.75


def test_drift_fit_with_known_steps():
    te = int(200 * 900 * NS)
    t, x, u = simulate_phase(3, steps=[(te, 7.5)])
    f = stability.fit_drift(t, x, u, step_epochs_ns=[te])
    assert abs(f.steps_ns[0].value - 7.5) < 4 * f.steps_ns[0].u
    assert f.steps_ns[0].u < 0.5


def test_ar1_inflation_grows_with_correlated_residuals():
    # Random-walk residuals (white FM) are strongly correlated: r1 near 1, u_ar1 >> u.
    rng = np.random.default_rng(4)
    t = (np.arange(2000) * 30 * NS).astype(np.int64)
    f = stability.fit_drift(t, np.cumsum(rng.normal(size=2000)))
    assert f.r1 > 0.8 and f.offset_ns.u_ar1 > 3 * f.offset_ns.u


# ------------------------------------------------------------------ changes

def test_detects_logged_step_and_unlogged_frequency_change():
    rng = np.random.default_rng(5)
    n = 5760                                   # two days of 30 s
    t = (np.arange(n) * 30 * NS).astype(np.int64)
    x = rng.normal(scale=0.5, size=n)
    i_step, i_freq = 2000, 4000
    x[i_step:] += 4.0                          # 8 σ phase step
    x[i_freq:] += (np.arange(n - i_freq) * 30.0) * 2e-13 * 1e9   # 2e-13 frequency change
    log = [{"time_utc_ns": int(t[i_step] + 600 * NS), "what": "antenna cable replaced",
            "expected_ns": 4.2},
           {"time_utc_ns": int(t[1000]), "what": "receiver firmware", "expected_ns": 0.0}]
    rep = stability.detect_changes(t, x, log)
    steps = [c for c in rep.changes if c.kind == "phase step"]
    freqs = [c for c in rep.changes if c.kind == "frequency change"]
    assert len(steps) == 1 and abs(steps[0].time_ns - t[i_step]) <= 30 * 60 * NS
    assert abs(steps[0].size - 4.0) < 4 * steps[0].u_size and steps[0].expected
    assert steps[0].what == "antenna cable replaced"
    assert len(freqs) == 1 and not freqs[0].expected
    assert abs(freqs[0].size - 2e-13) < 4 * freqs[0].u_size
    assert [e["what"] for e in rep.undetected_log] == ["receiver firmware"]
    assert abs(rep.undetected_log[0]["fitted_step_ns"]) < 1.0


def test_unlogged_step_is_dated_midway_between_the_samples_around_it():
    # Change.time_ns of an unlogged change: the break lies between the last sample of the old
    # segment and the first of the new one; the estimate refers to the middle of that interval.
    # A 20σ step is found at its exact sample (1000 samples: no block averaging).
    rng = np.random.default_rng(12)
    t = (np.arange(1000) * 30 * NS).astype(np.int64)
    x = rng.normal(scale=0.5, size=1000)
    x[600:] += 10.0
    (ch,) = stability.detect_changes(t, x).changes
    assert ch.kind == "phase step" and ch.found_time_ns in (t[599], t[600])
    assert ch.time_ns == t[599] + 15 * NS
    assert abs(ch.size - 10.0) < 4 * ch.u_size


def test_step_window_reaches_max_window_on_white_noise():
    # estimate_step: k goes up to max_window (inclusive, docstring). On white phase noise the
    # two-sided line fit's variance falls as 1/k (least-squares error propagation), so the scan
    # spread is smallest at the largest allowed k: 16 here (11 → 16 is a factor √(16/11) = 1.2,
    # far beyond the MAD's sampling error over ~2000 positions).
    rng = np.random.default_rng(21)
    t_s = np.arange(2000) * 30.0
    x = rng.normal(scale=1.0, size=2000)
    x[1000:] += 5.0
    est = stability.estimate_step(t_s, x, 0.5 * (t_s[999] + t_s[1000]), 30.0, max_window=16)
    assert est["window"] == 16 and est["n_before"] == est["n_after"] == 16
    # ~2000 scan positions (≥ 20): u is the scan spread itself, even where the formal u is larger
    assert est["u_ns"] == est["u_scan_ns"] and est["u_formal_ns"] > est["u_scan_ns"]
    assert abs(est["size_ns"] - 5.0) < 4 * est["u_ns"]


def test_step_window_reaches_a_quarter_of_the_series():
    # ... and up to a quarter of the series (docstring): 256 samples allow k = 64, never more. On
    # white noise the largest k usually has the smallest spread (above); over five draws it is chosen
    wins = []
    for seed in range(5):
        t_s = np.arange(256) * 30.0
        x = np.random.default_rng(seed).normal(size=256)
        x[128:] += 5.0
        wins.append(stability.estimate_step(t_s, x, 0.5 * (t_s[127] + t_s[128]), 30.0)["window"])
    assert max(wins) == 64


def test_step_estimated_with_three_samples_on_a_side():
    # estimate_step returns None only with fewer than 3 samples on a side (docstring): with exactly
    # 3 before the epoch the step is estimated from them (offset and slope fit on 3 points)
    rng = np.random.default_rng(5)
    t_s = np.arange(200) * 30.0
    x = rng.normal(scale=0.1, size=200)
    x[4:] += 5.0
    # epoch midway between samples 3 and 4: those two lie half an interval away and are left out,
    # samples 0-2 remain before it
    est = stability.estimate_step(t_s, x, 0.5 * (t_s[3] + t_s[4]), 30.0)
    assert est is not None and est["n_before"] == 3 and abs(est["size_ns"] - 5.0) < 4 * est["u_ns"]
    # window_s: the farthest sample used, here on the longer (after) side: samples 5, 6, ... lie
    # 45, 75, ... s after the epoch, the last at 15 + 30·n_after
    assert est["window_s"] == 15.0 + 30.0 * est["n_after"] and est["n_after"] > 3
    assert stability.estimate_step(t_s, x, 0.5 * (t_s[2] + t_s[3]), 30.0) is None


def test_step_found_in_a_year_of_data():
    # A year of 30-min points (invented: white PM 0.5 ns, +4 ns at a third): the search's time
    # covariate is scaled to [0, 1]; unscaled (seconds, up to 3e7) the least-squares segments are
    # too ill-conditioned for numpy's lstsq and the step is lost
    n = 365 * 48
    t = (np.arange(n) * 1800 * NS).astype(np.int64)
    x = np.random.default_rng(1).normal(scale=0.5, size=n)
    x[n // 3:] += 4.0
    (ch,) = stability.detect_changes(t, x).changes
    assert ch.kind == "phase step" and abs(ch.size - 4.0) < 4 * ch.u_size
    assert abs(ch.time_ns - t[n // 3]) <= 1800 * NS


def test_step_logged_after_the_search_found_it():
    # estimate_step: when the search put the change at found_s before the logged epoch, the samples
    # from found_s (half an interval before it, bounds included) to the epoch are ambiguous and
    # left out; the first sample of the new segment must not count as a "before" sample
    rng = np.random.default_rng(1)
    t_s = np.arange(400) * 30.0
    x = rng.normal(scale=0.2, size=400)
    x[200:] += 20.0                                  # invented: +20 ns from sample 200 on
    est = stability.estimate_step(t_s, x, t_s[203], 30.0, found_s=t_s[200])
    assert abs(est["size_ns"] - 20.0) < 4 * est["u_ns"]


def test_short_series_noise_type_defaults_to_white_fm():
    # _noise_ids: with fewer than 30 samples not even m = 1 can be identified; white FM (α = 0)
    # is assumed (module docstring), and its EDF used
    x = np.cumsum(np.random.default_rng(2).normal(size=20)) * 1e-9
    d = stability.deviation("oadev", x, 1.0, taus=[1, 2])
    assert list(d.alpha_int) == [0, 0] and np.all(np.isnan(d.alpha))


def test_no_changes_in_pure_white_noise():
    # False alarms: the BIC-like penalty plus the 5σ local test keep white PM clean.
    for draw in range(5):
        rng = np.random.default_rng(100 + draw)
        t = (np.arange(4000) * 30 * NS).astype(np.int64)
        rep = stability.detect_changes(t, rng.normal(size=4000))
        assert rep.changes == []


def test_no_changes_in_random_walk_phase():
    # White FM (random-walk phase) plus white PM: the formal u of a local fit is far
    # too small here; the scan spread keeps false alarms away (5 draws, none expected).
    for draw in range(5):
        rng = np.random.default_rng(200 + draw)
        t = (np.arange(5760) * 30 * NS).astype(np.int64)
        x = np.cumsum(rng.normal(scale=0.05, size=5760)) + rng.normal(scale=0.3, size=5760)
        assert stability.detect_changes(t, x).changes == []


def test_step_in_random_walk_phase_found_with_honest_u():
    rng = np.random.default_rng(300)
    t = (np.arange(5760) * 30 * NS).astype(np.int64)
    x = np.cumsum(rng.normal(scale=0.05, size=5760)) + rng.normal(scale=0.3, size=5760)
    x[3000:] += 6.0
    ch = stability.detect_changes(t, x).changes
    assert len(ch) == 1 and ch[0].kind == "phase step"
    c = ch[0]
    assert abs(c.size - 6.0) < 3 * c.u_size
    # The window is chosen from the noise (stability.estimate_step), so u is no longer that of a
    # fixed 200-sample window; it must still not fall below what the white part alone gives for the
    # window used (error propagation: σ²·[(AᵀA)⁻¹] of the step column, σ = 0.3 ns), and must carry
    # some of the random walk on top of it (the walk adds 0.05 ns per sample).
    k = c.n_before
    tt = np.concatenate([np.arange(-k, 0), np.arange(1, c.n_after + 1)]) * 30.0
    h = (tt > 0).astype(float)
    A = np.column_stack([np.ones_like(tt), tt, h, tt * h])
    u_white = 0.3 * np.sqrt(np.linalg.inv(A.T @ A)[2, 2])
    assert c.u_size > 0.9 * u_white and c.u_size < 3 * u_white


def test_robust_sigma_ignores_steps():
    rng = np.random.default_rng(6)
    x = rng.normal(scale=2.0, size=10000)
    x[5000:] += 50
    assert stability.robust_sigma_white(x) == pytest.approx(2.0, rel=0.05)


# ------------------------------------------------------------------ periods

def _two_days_white(seed):
    """Two days of 30-s white phase noise, σ = 1 ns (invented); the periods are the two days."""
    n = 2880 * 2
    t = (np.arange(n) * 30 * NS).astype(np.int64)
    return t, np.random.default_rng(seed).normal(scale=1.0, size=n), (t[0], t[2879]), (t[2880], t[-1])

def test_compare_periods_finds_step_and_not_noise():
    t, x, day1, day2 = _two_days_white(7)
    same = stability.compare_periods(t, x, day1, day2)
    assert not same.significant
    x[2880:] += 1.0
    moved = stability.compare_periods(t, x, day1, day2)
    assert moved.significant and abs(moved.delta_mean_ns - 1.0) < 3 * moved.u_delta_mean_ns
    assert moved.step_significant and abs(moved.step_at_boundary_ns - 1.0) < 3 * moved.u_step_at_boundary_ns
    assert not same.step_significant
    assert not any(r["significant"] for r in moved.adev_ratio[:3])


def test_compare_periods_uses_the_two_sided_critical_value():
    # level 0.05, two-sided: |z| > 1.95996 (standard normal table; any statistics text). The after
    # period is shifted so that z = 1.6 and then 2.2 (a constant shift leaves each period's u alone).
    t, x, day1, day2 = _two_days_white(7)
    base = stability.compare_periods(t, x, day1, day2)
    for z_want, sig in ((1.6, False), (2.2, True)):
        y = x.copy()
        y[2880:] += z_want * base.u_delta_mean_ns - base.delta_mean_ns
        c = stability.compare_periods(t, y, day1, day2)
        assert c.z == pytest.approx(z_want, rel=1e-9, abs=0) and c.significant is sig


def test_compare_periods_step_at_boundary_ignores_frequency_offset():
    # A pure frequency offset (1e-13, 8.6 ns per day) moves the means of two adjacent days
    # by ~8.6 ns but leaves no step at the boundary.
    rng = np.random.default_rng(17)
    n = 2880 * 2
    t = (np.arange(n) * 30 * NS).astype(np.int64)
    x = rng.normal(scale=1.0, size=n) + 1e-13 * 1e9 * np.arange(n) * 30.0
    c = stability.compare_periods(t, x, (t[0], t[2879]), (t[2880], t[-1]))
    assert c.significant and c.delta_mean_ns == pytest.approx(8.64, abs=0.2)
    assert abs(c.step_at_boundary_ns) < 3 * c.u_step_at_boundary_ns


def test_compare_periods_flags_noisier_after():
    t, x, day1, day2 = _two_days_white(8)
    x[2880:] *= 2.0
    c = stability.compare_periods(t, x, day1, day2)
    assert c.adev_ratio[0]["significant"] and c.adev_ratio[0]["ratio"] == pytest.approx(2.0, rel=0.1)


def test_analyse_json_values():
    t, x, u = simulate_phase(9, n=800, step_s=30.0)
    out, *_ = stability.analyse(t, x, u)
    # every row's deviation is allantools' (reference library) on the same phase series (s):
    # overlapping ADEV, MDEV, TDEV (ns), overlapping HDEV
    ref = {"adev": allantools.oadev, "mdev": allantools.mdev, "tdev": allantools.tdev, "hdev": allantools.ohdev}
    for k, fn in ref.items():
        rows = out[k]
        assert set(rows[0]) >= {"tau_s", "dev", "ci_low", "ci_high", "edf", "noise", "n"}
        taus = [r["tau_s"] for r in rows]
        want = np.asarray(fn(x * 1e-9, 1 / 30.0, "phase", taus)[1]) * (1e9 if k == "tdev" else 1.0)
        np.testing.assert_allclose([r["dev"] for r in rows], want, rtol=1e-9)
        # white PM of σ = 1 ns (simulation truth) is what the noise identification must say
        assert rows[0]["noise"] == "white PM"
        assert all(r["ci_low"] < r["dev"] < r["ci_high"] for r in rows)
    assert out["units"]["tdev"] == "ns"
    # drift fit against the simulation truth (a = 5 ns at the mid-time, y = 2e-13): within 4 u
    off, fr = out["drift"]["offset_ns"], out["drift"]["frequency"]
    assert abs(fr["value"] - 2e-13) < 4 * fr["u"]
    assert math.isfinite(out["drift"]["drift_per_day"]["u"]) and out["drift"]["drift_per_day"]["u"] > 0
    assert math.isfinite(off["value"]) and off["u"] > 0


def test_stability_set_tdev_equals_direct_tdev():
    # allantools.tdev (reference library) vs the TDEV derived from the shared MDEV pass
    x = kasdin(-2, 2 ** 12) * 1e-9
    s = stability.stability_set(x, 1.0, kinds=("mdev", "tdev"))
    ref = allantools.tdev(x, 1.0, "phase", s["tdev"].tau_s)[1]
    np.testing.assert_allclose(s["tdev"].dev, ref, rtol=1e-12)


def test_remove_steps_restores_white_pm_adev():
    # White PM of σ has ADEV(τ) = √3·σ/τ (common practice); a 20 σ step inflates ADEV at
    # long τ; with the detected step removed ADEV is within 3 half-widths of its 1σ CI
    # (SP 1065 §5.3) of the truth.
    rng = np.random.default_rng(12)
    n = 2880
    t = (np.arange(n) * 30 * NS).astype(np.int64)
    x = rng.normal(size=n)
    x[1500:] += 20.0
    raw, *_ = stability.analyse(t, x)
    clean, *_ = stability.analyse(t, x, remove_steps=True)
    assert len(clean["steps_removed"]) == 1 and abs(clean["steps_removed"][0]["size_ns"] - 20) < 0.5
    last = clean["adev"][-1]
    truth = math.sqrt(3) * 1e-9 / last["tau_s"]
    assert raw["adev"][-1]["dev"] > 3 * truth
    assert abs(last["dev"] - truth) < 3 * (last["ci_high"] - last["ci_low"]) / 2


def test_daily_value_is_the_drift_model_at_the_weighted_centre():
    # issue 12: a day of 900-s points, white phase noise σ = 0.4 ns (the link), a frequency
    # offset of 2e-14 and a logged +5 ns step at 16:00 (invented, like the demo's cable change).
    rng = np.random.default_rng(12)
    n, sigma = 96, 0.4
    t = (np.arange(n) * 900 * NS).astype(np.int64) + 10 ** 18
    true = 100.0 + 2e-14 * 1e9 * (t - t[0]) / 1e9
    te = int(t[0] + 16 * 3600 * NS)
    true = true + 5.0 * (t >= te)
    x = true + rng.normal(scale=sigma, size=n)
    u = np.full(n, sigma)
    log = [{"time_utc_ns": te, "what": "cable", "expected_ns": 5.0}]
    dv, det = stability.daily_value(t, x, u, log, u_b_ns=1.2)
    tc = det["epoch_ns"]
    assert tc == int(np.mean(t))                       # equal weights: the middle of the day
    true_c = 100.0 + 2e-14 * 1e9 * (tc - t[0]) / 1e9   # the true model value there (before the step)
    err = dv["offset_ns"] - true_c
    # white PM propagated to the day is σ/√N (equal weights, SP 1065: TDEV(τ0) = σ for white PM);
    # the step estimate adds u_step·|H − f| (its leverage). The error lies within 3 u_a.
    assert det["link_noise"]["white_ns"] == pytest.approx(sigma, rel=0.25)     # TDEV(τ0) from 96 points
    assert abs(err) < 3 * dv["u_a_ns"]
    assert det["u_a_parts_ns"]["white"] == pytest.approx(det["link_noise"]["white_ns"] / np.sqrt(n), rel=1e-9)
    assert dv["u_ns"] == pytest.approx(np.hypot(dv["u_a_ns"], 1.2), abs=1.5e-3)
    # no step: the estimator is the weighted mean (a line evaluated at the weighted centre)
    dv0, _ = stability.daily_value(t, x - 5.0 * (t >= te), u)
    assert dv0["offset_ns"] == pytest.approx(np.mean(x - 5.0 * (t >= te)), abs=1e-3)


def test_logged_change_estimated_at_the_logged_epoch_and_compared_with_the_log():
    # the search finds the break at a sample; the size is estimated once, at the logged epoch,
    # with offset and slope each side, and compared with the log's expected size (2σ)
    rng = np.random.default_rng(21)
    t = (np.arange(2880) * 30 * NS).astype(np.int64)
    x = rng.normal(scale=0.3, size=len(t))
    te = int(t[1500] - 10 * NS)                  # the change 10 s before a sample
    x[t >= te] += 3.0
    rep = stability.detect_changes(t, x, [{"time_utc_ns": te, "what": "cable", "expected_ns": 3.0},
                                          ])
    c = [c for c in rep.changes if c.kind == "phase step"][0]
    assert c.time_ns == te and c.log_time_ns == te and c.expected
    assert abs(c.size - 3.0) < 3 * c.u_size and c.agrees_with_log is True
    assert c.window_s > 0 and c.n_before >= 4 and c.n_after >= 4
    rep2 = stability.detect_changes(t, x, [{"time_utc_ns": te, "what": "cable", "expected_ns": 6.0}])
    c2 = [c for c in rep2.changes if c.kind == "phase step"][0]
    assert c2.agrees_with_log is False and c2.z_log < -2
    # the drift model holds that same estimate
    fit = stability.fit_drift(t, x, fixed_steps=stability.phase_steps(rep))
    assert fit.steps_ns[-1].value == c.size and fit.step_epochs_ns[-1] == te


def test_noise_labels_name_their_estimator_and_never_contradict_the_slope():
    # issue 12: a label is shown only where the lag-1 ACF identified the type at that τ and its
    # slope (NIST SP 1065 noise table: ADEV τ^-1 for white/flicker PM, τ^-1/2 white FM, ...;
    # TDEV = τ·MDEV/√3, one more) agrees with the plotted curve there
    rng = np.random.default_rng(3)
    x = np.cumsum(rng.normal(scale=1e-11, size=200)) * 1e-9 + rng.normal(scale=3e-10, size=200)
    devs = stability.stability_set(x, 1 / 960.0)
    for kind in ("oadev", "mdev", "tdev"):
        d = devs[kind]
        labels = stability.noise_labels(d)
        assert len(labels) == len(d.tau_s)
        lt, ld = np.log(d.tau_s), np.log(d.dev)
        for i, lab in enumerate(labels):
            if not np.isclose(d.noise_tau_s[i], d.tau_s[i]):
                assert lab is None                       # inherited from a shorter τ: not shown
            if lab is None:
                continue
            assert lab.endswith("(lag-1 ACF)") and lab.startswith(d.noise[i])
            nb = [(ld[j] - ld[i]) / (lt[j] - lt[i]) for j in (i - 1, i + 1) if 0 <= j < len(ld)]
            assert abs(np.mean(nb) - stability.expected_slope(kind, int(d.alpha_int[i]))) <= 0.5
    assert stability.expected_slope("oadev", 2) == -1.0 and stability.expected_slope("tdev", 2) == -0.5
    assert stability.expected_slope("mdev", 0) == -0.5 and stability.expected_slope("tdev", -1) == 1.0


def test_daily_value_of_a_day_with_one_or_two_points():
    # a day where only one or two points pass (e.g. forced inputs that do not belong together):
    # the value is the weighted mean and u_a falls back to the points' own u (σ/√N, N = 1, 2)
    t = np.array([10 ** 18, 10 ** 18 + 960 * NS], dtype=np.int64)
    dv, det = stability.daily_value(t[:1], [5.0], [0.4])
    assert dv["offset_ns"] == 5.0 and dv["u_a_ns"] == pytest.approx(0.4, abs=1e-3)
    dv2, _ = stability.daily_value(t, [5.0, 6.0], [0.4, 0.4])
    assert dv2["offset_ns"] == 5.5 and dv2["u_a_ns"] == pytest.approx(0.4 / np.sqrt(2), abs=1e-3)


def test_one_change_found_at_neighbouring_breaks_is_kept_once():
    # ctt.stability.detect_changes: "one change may be found at neighbouring breaks: keep the
    # most significant" -- within the matching tolerance and of the same kind only; a phase
    # step and a frequency change at one epoch are two changes, and two steps farther apart
    # than the tolerance are two steps. (A rule of the change report, checked on invented
    # Change records.)
    from ctt.stability import Change, _dedupe

    h = 3_600_000_000_000
    a = Change(time_ns=10 * h, kind="phase step", size=5.0, u_size=0.5, expected=False, significance=6.0)
    b = Change(time_ns=10 * h + 1_800_000_000_000, kind="phase step", size=4.8, u_size=0.4, expected=False,
               significance=9.0)
    f = Change(time_ns=10 * h, kind="frequency change", size=1e-13, u_size=2e-14, expected=False, significance=5.0)
    c = Change(time_ns=14 * h, kind="phase step", size=-3.0, u_size=0.5, expected=False, significance=4.0)
    out = _dedupe([a, f, b, c], tol=3600.0)
    assert sorted((o.kind, o.time_ns) for o in out) == sorted([("phase step", b.time_ns),
                                                               ("frequency change", f.time_ns),
                                                               ("phase step", c.time_ns)])
    assert [o for o in out if o.kind == "phase step"][0].significance == 9.0   # the more significant kept
    # farther apart than the tolerance: both steps stay
    assert len(_dedupe([a, b], tol=1700.0)) == 2
