"""Common view and all-in-view: matching, differencing, weighting, robust rejection, budget.

Inputs are two per-satellite tables from :mod:`ctt.tracks` (``fit_tracks`` or
``bin_epochs``), station A first. The pair series is *clock A − clock B* (ns).

Matching (``mode='cv'``)
    Rows are matched on (``mid_time``, ``sat``): for tracks the same satellite
    in the same standard track, for epochs the same satellite at the same
    epoch/bin. Each table may hold one row per (``mid_time``, ``sat``) only
    (select one signal per satellite upstream). When the two epoch tables have
    different sampling (``attrs['window_s']``), the finer one is first
    resampled onto the coarser one's instants: every fine row is assigned to the
    nearest coarse instant within half a coarse interval (``−Δ/2 ≤ dt < Δ/2``)
    and the usable rows of each (instant, satellite) are averaged (value, a-priori
    u as ``√Σu²/n``, elevation, azimuth through sine/cosine); (instant,
    satellite) cells without a usable row are dropped.

Weights (``weights=``)
    ``'sin2el'`` (default): σ ∝ 1/sin(el) at each end, so a difference has
    variance ∝ 1/sin²el_A + 1/sin²el_B and weight ``1/(1/sin²el_A + 1/sin²el_B)``
    (in all-in-view, ``sin²el``); ``'equal'``; ``'sigma'``: inverse variance
    ``1/(u_A² + u_B²)`` (all-in-view ``1/u²``).

Robust rejection (per bin, iterated to a fixed point, at most ``max_iter``)
    median m of the bin's accepted values and normalised deviations
    ``eᵢ = |dᵢ − m|·nᵢ`` with ``nᵢ = σ̃/σᵢ`` when the a-priori σᵢ is known (σ̃ the
    bin's median σ), else ``nᵢ = √(wᵢ/w̃)`` (w̃ the median weight; the weight
    model says σᵢ ∝ 1/√wᵢ), so a low satellite is judged against its own
    expected noise whatever the weighting; a value is rejected when
    ``eᵢ > mad_k · s`` with ``s = max(1.4826·MAD(e), median of σᵢnᵢ,
    scale_floor_ns)`` (the a-priori floor stops three satellites that agree by
    chance from rejecting a fourth; ``scale_floor_ns`` = 0.01 ns keeps
    rounding noise of exact data from counting as scatter, and a bin is only
    'high_scatter' if its scatter exceeds it too); no rejection in bins with
    fewer than 3 usable values. Rejected rows are flagged ``'outlier'``; a
    satellite with at least 3 usable bins of which half or more are outliers is
    reported as ``suspect`` in ``sat_summary``.

Bin value and uncertainty
    weighted mean ``m = Σwᵢdᵢ/Σwᵢ`` of the accepted values.

    * a-priori: ``u_apriori = √(Σwᵢ²σᵢ²)/Σwᵢ`` (error propagation; equals
      ``1/√Σ(1/σᵢ²)`` for inverse-variance weights), NaN if any σᵢ is unknown.
    * scatter (n ≥ 3): ``u_scatter = √(Σwᵢrᵢ² / ((n−1)Σwᵢ))`` (rᵢ = dᵢ − m), the
      variance of a weighted mean when the weights are inverse variances up to a
      common unknown factor, that factor estimated from the residuals.
    * reference ``u_ref``: ``u_apriori`` if known, else ``√(c_day/Σwᵢ)`` with
      ``c_day`` the day's pooled factor ``Σ(n−1)c_bin/Σ(n−1)`` of the same
      system.
    * ``u_ns`` = ``max(u_scatter, u_ref·√(χ²₀.₀₅(n−1)/(n−1)))`` for n ≥ 3
      (the floor is the 5 % lower quantile of what the scatter would give if
      ``u_ref`` were right: it bites only on bins whose satellites agree
      implausibly well), and ``u_ref`` for n < 3.
    * ``chi2`` = Σrᵢ²/σᵢ² (a-priori σ; NaN if unknown); for two values
      (d₁ − d₂)²/(σ₁² + σ₂²), their difference against √(σ₁² + σ₂²), whatever
      the weights; ``dof`` = n − 1, ``scatter_ns`` = √(Σwᵢrᵢ²/Σwᵢ).

Bin flags: ``'no_data'`` (no usable value, offset NaN), ``'few_satellites'``
(fewer than ``min_common`` values: the offset is still given, with the flag;
users keep ``flag == 'ok'``), ``'high_scatter'`` (n ≥ 2: χ² above its 99 %
quantile, χ²₀.₉₉(1) = 6.63 for two values, or without a-priori σ ``c_bin``
above ``c_day·χ²₀.₉₉(n−1)/(n−1)``), ``'ok'``. So ``ok`` guarantees: n = 1
(only with ``min_common`` 1) nothing beyond the value's own a-priori u; n = 2
that the two agree within their a-priori σ at 99 % (which one is wrong cannot
be told, nothing is rejected); n ≥ 3 that outliers were rejected (MAD rule)
and the rest agree with their a-priori σ at 99 %.

Multi-GNSS
    Each system is solved alone (``system`` = its letter). With more than one
    system, a combined solution (``system='ALL'``) is formed after removing the
    inter-system bias of each system relative to the reference system (GPS if
    present, else the first letter). In CV only the *difference* of the two
    stations' biases matters: it is taken from ``isb_ns`` (``{'A': {'E': ns},
    'B': {'E': ns}}``, bias = value of system S − value of the reference system
    at that station) or estimated as the robust weighted mean over the day of
    (offset_S − offset_ref) on bins where both are ``'ok'``. In all-in-view each
    station's bias is configured or estimated on that station's solutions. The
    biases used are reported in ``CommonViewResult.isb``; a system whose bias
    cannot be determined is left out of 'ALL' (and reported with NaN). The
    estimate's ``u_ns`` is its formal weighted-mean uncertainty (white noise
    over the bins); :func:`uncertainty_budget` carries it into the budget of
    'ALL'.

GLONASS inter-frequency biases (``glonass_ifb='estimate'``, the default)
    A receiver's GLONASS code delay depends on the FDMA channel k of the
    satellite (up to tens of ns across the band, different from one receiver
    type, firmware or antenna to another). In CV the difference of satellite i
    holds ``b_A(k_i) − b_B(k_i)``, which does not cancel between two different
    receivers, so the GLONASS mean moves as satellites of other channels rise
    and set. Model of the GLONASS rows: ``d = c(t) + β_k + noise`` with one
    constant β per channel over the day (satellites without a known channel:
    one per satellite), fitted by :func:`ctt.measure.estimate_code_biases` on
    the rows usable at both stations (weights 1/σ², uncertainty from hourly
    batch means) and subtracted (``sat_df['channel_bias_ns']``, estimates in
    ``CommonViewResult.channel_biases``). Only differences between channels
    are observable: a part common to all channels cannot be told from c(t),
    so the β are constrained to zero mean over the channels seen and that
    common part, ``mean_k (b_A(k) − b_B(k))`` plus the GLONASS−GPS
    inter-system bias difference of the receivers, stays in the GLONASS
    series. GLONASS alone cannot separate it from the clock difference (it
    needs a calibration of both receivers' GLONASS delays, e.g. ``isb_ns``);
    in 'ALL' it is estimated as the inter-system bias against GPS, i.e. the
    GLONASS delays are tied to the GPS calibration. In all-in-view the same
    fit runs on each station's rows (``station`` 'A' / 'B'); there the β also
    absorb what is constant per channel in the product's GLONASS clocks.
    ``glonass_ifb='none'`` leaves the values as measured.

All-in-view (``mode='all-in-view'``, both tables ``attrs['reference'] ==
'precise'``)
    each station's values of a bin are combined, with the same weighting and
    rejection, into a station solution (no common satellite needed); the pair
    value is ``m_A − m_B`` with ``u = √(u_A² + u_B²)``; ``n_sat`` is the smaller of
    ``n_sat_a`` and ``n_sat_b``. ``sat_df`` then holds one row per station and
    satellite with a ``station`` column ('A'/'B') and the residual from its
    station solution.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

from .errors import NoDataError, ProcessingError
from .timescales import convert, to_iso, to_mjd_float

SPEED_OF_LIGHT_MPS = 299_792_458.0  # SI
MAD_TO_SIGMA = 1.4826  # 1/Φ⁻¹(3/4): MAD of a normal sample → σ (common practice)
#: Smallest uncertainty used as a weight 1/u² (1 fs): exact simulated data give u = 0.
U_MIN_NS = 1e-6

CHANNEL_BIAS_COLUMNS = ["station", "system", "channel", "label", "sats", "bias_ns", "u_ns", "n_points",
                        "n_blocks"]

OFFSET_COLUMNS = ["time", "time_utc", "mjd_utc", "system", "offset_ns", "u_ns", "u_apriori_ns",
                  "n_sat", "n_rejected", "scatter_ns", "chi2", "dof", "flag"]


@dataclass
class CommonViewResult:
    """What :func:`common_view` returns.

    ``offset_df`` per bin (and system), ``sat_df`` per satellite difference (CV)
    or per station and satellite (all-in-view), ``isb`` the inter-system biases
    used (columns station, system, reference_system, value_ns, u_ns, n_bins,
    source), ``sat_summary`` per satellite (n_used, n_outlier, median_residual_ns,
    suspect), ``channel_biases`` the GLONASS per-channel biases removed
    (:func:`glonass_channel_biases`; empty without GLONASS).
    """

    offset_df: pd.DataFrame
    sat_df: pd.DataFrame
    isb: pd.DataFrame
    sat_summary: pd.DataFrame
    mode: str
    attrs: dict = field(default_factory=dict)
    channel_biases: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=CHANNEL_BIAS_COLUMNS))


# ---------------------------------------------------------------- group statistics

def _order(g, v):
    """Row order sorted by group, then value (NaN last within a group)."""
    return np.lexsort((v, g))


def _median_sorted(order, g, v, mask, ng):
    """Group medians of ``v[mask]`` using a precomputed ``_order(g, v)`` (O(n))."""
    o = order[mask[order]]
    out = np.full(ng, np.nan)
    if o.size == 0:
        return out
    gs, vs = g[o], v[o]
    cnt = np.bincount(gs, minlength=ng)
    start = np.concatenate(([0], np.cumsum(cnt)[:-1]))
    has = cnt > 0
    lo = start[has] + (cnt[has] - 1) // 2
    hi = start[has] + cnt[has] // 2
    out[has] = 0.5 * (vs[lo] + vs[hi])
    return out


def group_median(g, v, ng):
    """Median of ``v`` per group code ``g`` (0..ng−1), NaN for empty groups. Vectorised by sorting."""
    g = np.asarray(g, dtype=np.int64)
    v = np.asarray(v, dtype=np.float64)
    return _median_sorted(_order(g, v), g, v, np.ones(g.size, dtype=bool), ng)


def robust_weighted_mean(g, ng, d, w, sigma=None, *, family=None, mad_k=3.5, max_iter=10,
                         scale_floor_ns=0.01):
    """Robust weighted mean of ``d`` per group (bin), with the rules of the module docstring.

    ``g``: group code per value; ``w``: weights (non-finite or ≤ 0: unusable);
    ``sigma``: a-priori 1-σ per value (NaN unknown); ``family``: code per *group*
    for pooling the scatter factor (e.g. the system). Returns ``(per_group dict,
    accepted mask, residuals)``.
    """
    g = np.asarray(g, dtype=np.int64)
    d = np.asarray(d, dtype=np.float64)
    w = np.asarray(w, dtype=np.float64)
    sig = np.full(d.size, np.nan) if sigma is None else np.asarray(sigma, dtype=np.float64)
    fam = np.zeros(ng, dtype=np.int64) if family is None else np.asarray(family, dtype=np.int64)
    usable = np.isfinite(d) & np.isfinite(w) & (w > 0)
    acc = usable.copy()
    sig_floor_row = np.where(np.isfinite(sig), sig, np.nan)
    # deviations normalised by the weight model (σᵢ ∝ 1/√wᵢ): √(wᵢ/w̃), w̃ the bin's median weight
    wmed = _median_sorted(_order(g, w), g, w, usable, ng)
    has_sig = usable & np.isfinite(sig) & (sig > 0)
    smed = _median_sorted(_order(g, sig), g, sig, has_sig, ng)
    with np.errstate(invalid="ignore", divide="ignore"):
        norm = np.where(has_sig, smed[g] / sig, np.sqrt(w / wmed[g]))
        norm = np.where(usable, norm, np.nan)
    sig_n = sig_floor_row * norm
    order_d = _order(g, d)
    order_s = _order(g, sig_n)
    fin_s = np.isfinite(sig_n)
    # "fewer than 3 values" counts the bin's usable values, not those still accepted: counting
    # the accepted ones made a 3-value bin oscillate (reject one -> 2 left -> accept all) and
    # end with its outlier kept
    cnt = np.bincount(g[usable], minlength=ng)
    for _ in range(max_iter):
        med = _median_sorted(order_d, g, d, acc, ng)
        absdev = np.abs(d - med[g]) * norm
        mad = _median_sorted(_order(g, absdev), g, absdev, acc, ng)
        sfloor = _median_sorted(order_s, g, sig_n, acc & fin_s, ng)
        scale = np.fmax(np.fmax(MAD_TO_SIGMA * mad, np.nan_to_num(sfloor)), scale_floor_ns)
        keep = (cnt[g] < 3) | (absdev <= mad_k * scale[g])
        new = usable & np.where(np.isfinite(med[g]), keep, True)
        if np.array_equal(new, acc):
            break
        acc = new
    a = acc.astype(np.float64)
    n = np.bincount(g, a, ng)
    W = np.bincount(g, np.where(acc, w, 0.0), ng)  # not a * w: 0 * NaN (unusable rows) is NaN
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.bincount(g, np.where(acc, w * d, 0.0), ng) / W
        r = d - m[g]
        sig_missing = np.bincount(g, acc & ~np.isfinite(sig), ng) > 0
        s0 = np.where(acc & np.isfinite(sig), sig, 0.0)
        u_prior = np.sqrt(np.bincount(g, np.where(acc, w * w, 0.0) * s0 * s0, ng)) / W
        u_prior = np.where(sig_missing | (n == 0), np.nan, u_prior)
        chi2 = np.bincount(g, np.where(acc & (s0 > 0), r * r / np.where(s0 > 0, s0 * s0, 1.0), 0.0), ng)
        chi2 = np.where(sig_missing | (n == 0), np.nan, chi2)
        wr2 = np.bincount(g, np.where(acc, w * r * r, 0.0), ng)
        dof = n - 1
        c_bin = np.where(dof > 0, wr2 / np.where(dof > 0, dof, 1), np.nan)
        scatter = np.where(n >= 2, np.sqrt(wr2 / W), np.nan)
        u_sc = np.where(n >= 3, np.sqrt(c_bin / W), np.nan)
        # pooled scatter factor per family over bins with n >= 3
        big = (n >= 3) & np.isfinite(c_bin)
        num = np.bincount(fam[big], (dof * c_bin)[big], minlength=fam.max() + 1 if fam.size else 1)
        den = np.bincount(fam[big], dof[big], minlength=fam.max() + 1 if fam.size else 1)
        c_day_f = np.where(den > 0, num / np.where(den > 0, den, 1), np.nan)
        c_day = c_day_f[fam] if fam.size else np.zeros(0)
        u_ref = np.where(np.isfinite(u_prior), u_prior, np.sqrt(c_day / W))
        nu = np.maximum(dof, 1)
        floor = u_ref * np.sqrt(stats.chi2.ppf(0.05, nu) / nu)
        u = np.where(n >= 3, np.fmax(u_sc, floor), u_ref)
        # two values: their difference against √(σ₁² + σ₂²), i.e. χ² = (d₁ − d₂)²/(σ₁² + σ₂²)
        # with one degree of freedom, whatever the weights ((d₁−d₂)² = 2Σr² − (Σr)², r = d − m)
        sr = np.bincount(g, np.where(acc, r, 0.0), ng)
        sr2 = np.bincount(g, np.where(acc, r * r, 0.0), ng)
        ss2 = np.bincount(g, np.where(acc, s0 * s0, 0.0), ng)
        chi2_pair = np.where(ss2 > 0, (2.0 * sr2 - sr * sr) / np.where(ss2 > 0, ss2, 1.0), np.nan)
        chi2 = np.where((n == 2) & np.isfinite(chi2), chi2_pair, chi2)
        q99 = stats.chi2.ppf(0.99, nu)
        high = (n >= 2) & np.where(np.isfinite(u_prior), chi2 > q99,
                                   np.isfinite(c_day) & (c_bin > c_day * q99 / nu))
        high &= scatter > scale_floor_ns
    m = np.where(n > 0, m, np.nan)
    per = {"offset_ns": m, "u_ns": u, "u_apriori_ns": u_prior, "n_sat": n.astype(np.int64),
           "n_rejected": (np.bincount(g, usable, ng) - n).astype(np.int64), "scatter_ns": scatter,
           "chi2": chi2, "dof": np.maximum(dof, 0).astype(np.int64), "high_scatter": high}
    return per, acc, np.where(usable, r, np.nan)


def _bin_flags(per, min_common):
    n = per["n_sat"]
    flag = np.where(n == 0, "no_data",
                    np.where(n < min_common, "few_satellites",
                             np.where(per["high_scatter"], "high_scatter", "ok")))
    return flag.astype(object)


def _time_columns(time_gps):
    t = np.asarray(time_gps, dtype=np.int64)
    utc = convert(t, "GPS", "UTC")
    return {"time": t, "time_utc": np.asarray(to_iso(utc), dtype=object) if t.size else np.zeros(0, dtype=object),
            "mjd_utc": to_mjd_float(utc)}


def _weighted_robust_scalar(e, u, mad_k):
    """Robust weighted mean of one series (for the inter-system bias): value, u, n."""
    e = np.asarray(e, dtype=np.float64)
    u = np.asarray(u, dtype=np.float64)
    u = np.fmax(u, U_MIN_NS)
    good = np.isfinite(e) & np.isfinite(u)
    if good.sum() == 0:
        return np.nan, np.nan, 0
    g = np.zeros(int(good.sum()), dtype=np.int64)
    per, acc, _ = robust_weighted_mean(g, 1, e[good], 1.0 / u[good] ** 2, u[good], mad_k=mad_k)
    return float(per["offset_ns"][0]), float(per["u_ns"][0]), int(per["n_sat"][0])


def _systems_order(systems):
    s = sorted(set(systems))
    if "G" in s:
        s.remove("G")
        s.insert(0, "G")
    return s


def _isb_config(isb_ns, station, system):
    if not isb_ns:
        return None
    for k, v in isb_ns.items():
        if str(k).upper() == station and v is not None and system in v:
            return float(v[system])
    return None


def glonass_channel_biases(time, sat, system, value, sigma, usable, channels=None, *, station="A-B"):
    """Per-channel constants of the GLONASS rows (module docstring, "GLONASS inter-frequency biases").

    ``value``/``sigma`` (ns) per row, ``usable`` rows to fit on, ``channels`` ``{sat: k}``.
    Returns ``(correction_ns per row, table)``: the correction is the fitted β of the row's
    channel (0 outside GLONASS and for channels not fitted); the table has one row per channel
    (``CHANNEL_BIAS_COLUMNS``; ``u_ns`` the batch-means uncertainty, NaN under two hours of data).
    """
    from .measure import estimate_code_biases

    sat = np.asarray(sat).astype(str)
    is_r = np.asarray(system).astype(str) == "R"
    corr = np.zeros(sat.size)
    ch = channels or {}
    kk = np.array([ch.get(s, np.nan) if r else np.nan for s, r in zip(sat, is_r)], dtype=float)
    label = np.where(np.isfinite(kk), np.array([f"k={int(k):+d}" if np.isfinite(k) else "" for k in kk]), sat)
    value = np.asarray(value, dtype=float)
    sigma = np.asarray(sigma, dtype=float)
    use = is_r & usable & np.isfinite(value) & np.isfinite(sigma) & (sigma > 0)
    if not use.any():
        return corr, pd.DataFrame(columns=CHANNEL_BIAS_COLUMNS)
    tab = pd.DataFrame({"time": np.asarray(time, dtype=np.int64)[use], "sat": label[use], "system": "R",
                        "clock_ns": value[use], "sigma_ns": sigma[use], "flag": "ok"})
    est = estimate_code_biases(tab)
    b = dict(zip(est["sat"].astype(str), est["bias_ns"].to_numpy(float)))
    corr[is_r] = [b.get(lab, 0.0) for lab in label[is_r]]
    members = pd.Series(sat[use]).groupby(label[use]).agg(lambda v: ",".join(sorted(set(v))))
    labels = est["sat"].astype(str)
    out = pd.DataFrame({
        "station": station, "system": "R",
        "channel": [int(x[2:]) if x.startswith("k=") else np.nan for x in labels],
        "label": labels.to_numpy(), "sats": members.reindex(labels).to_numpy(),
        "bias_ns": est["bias_ns"].to_numpy(float), "u_ns": est["u_ns"].to_numpy(float),
        "n_points": est["n_points"].to_numpy(), "n_blocks": est["n_blocks"].to_numpy()})
    return corr, out[CHANNEL_BIAS_COLUMNS]


# ---------------------------------------------------------------- sampling

def _step_s(df):
    ws = df.attrs.get("window_s")
    if ws:
        return float(ws)
    u = np.unique(df["mid_time"].to_numpy(np.int64))
    return float(np.median(np.diff(u))) / 1e9 if u.size > 1 else 0.0


def resample_to(fine: pd.DataFrame, coarse_times, coarse_step_s: float) -> pd.DataFrame:
    """Average a finer per-satellite table onto coarser instants (rules in the module docstring)."""
    ct = np.unique(np.asarray(coarse_times, dtype=np.int64))
    t = fine["mid_time"].to_numpy(np.int64)
    ok = (fine["flag"].astype(str).to_numpy(dtype=object) == "ok") & np.isfinite(fine["value_ns"].to_numpy(float))
    half = int(round(coarse_step_s * 5e8))
    j = np.clip(np.searchsorted(ct, t + half, side="right") - 1, 0, max(ct.size - 1, 0))
    dt = t - ct[j] if ct.size else np.zeros_like(t)
    inside = ok & (dt >= -half) & (dt < half) if ct.size else np.zeros(t.size, bool)
    sub = fine.loc[inside, ["sat", "system", "signal", "value_ns", "u_ns", "elevation_deg",
                            "azimuth_deg", "n_points", "troposphere_m", "ionosphere_m"]].copy()
    sub["mid_time"] = ct[j[inside]]
    az = np.deg2rad(sub["azimuth_deg"].to_numpy(float))
    sub["_c"], sub["_s"] = np.cos(az), np.sin(az)
    u2 = sub["u_ns"].to_numpy(float) ** 2
    sub["_u2"] = np.nan_to_num(u2)
    sub["_nan"] = ~np.isfinite(u2)
    grp = sub.groupby(["mid_time", "sat"], sort=True)
    agg = grp.agg(system=("system", "first"), signal=("signal", "first"), value_ns=("value_ns", "mean"),
                  _u2=("_u2", "sum"), _nan=("_nan", "sum"),
                  n=("value_ns", "size"), n_points=("n_points", "sum"),
                  elevation_deg=("elevation_deg", "mean"), _c=("_c", "mean"), _s=("_s", "mean"),
                  troposphere_m=("troposphere_m", "mean"), ionosphere_m=("ionosphere_m", "mean"))
    agg = agg.reset_index()
    agg["u_ns"] = np.where(agg["_nan"] > 0, np.nan, np.sqrt(agg["_u2"]) / agg["n"])
    agg["azimuth_deg"] = np.mod(np.rad2deg(np.arctan2(agg["_s"], agg["_c"])), 360.0)
    agg["flag"] = "ok"
    out = agg.drop(columns=["_u2", "_nan", "_c", "_s", "n"])
    out.attrs.update(fine.attrs)
    out.attrs["window_s"] = float(coarse_step_s)
    return out


def _align(a, b):
    ma, mb = a.attrs.get("mode"), b.attrs.get("mode")
    if ma and mb and ma != mb:
        raise ProcessingError(f"cannot match a {ma} table with a {mb} table; process both stations alike")
    if ma == "track" or mb == "track":
        return a, b, _step_s(a)
    sa, sb = _step_s(a), _step_s(b)
    if abs(sa - sb) < 1e-6 or min(sa, sb) <= 0:
        return a, b, max(sa, sb)
    if sa < sb:
        return resample_to(a, b["mid_time"].to_numpy(np.int64), sb), b, sb
    return a, resample_to(b, a["mid_time"].to_numpy(np.int64), sa), sa


def _check_table(df, name):
    need = ["mid_time", "sat", "value_ns", "u_ns", "elevation_deg", "azimuth_deg", "flag"]
    miss = [c for c in need if c not in df.columns]
    if miss:
        raise ProcessingError(f"station {name} table lacks column(s) {', '.join(miss)}")
    df = df.copy()
    if "system" not in df.columns:
        df["system"] = df["sat"].astype(str).str[0]
    if "signal" not in df.columns:
        df["signal"] = ""
    if df.duplicated(["mid_time", "sat"]).any():
        raise ProcessingError(f"station {name} has several rows for one (time, satellite); "
                              "select one signal per satellite before common view")
    return df


def _weights(kind, el_a, el_b=None, u_a=None, u_b=None):
    if kind == "sin2el":
        sa2 = np.sin(np.deg2rad(el_a)) ** 2
        if el_b is None:
            return sa2
        sb2 = np.sin(np.deg2rad(el_b)) ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            return 1.0 / (1.0 / sa2 + 1.0 / sb2)
    if kind == "equal":
        return np.ones(np.shape(el_a))
    if kind == "sigma":
        v = u_a ** 2 if u_b is None else u_a ** 2 + u_b ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            return 1.0 / v
    raise ProcessingError(f"unknown weighting {kind!r}; expected 'sin2el', 'equal' or 'sigma'")


# ---------------------------------------------------------------- solving

def _solve_systems(time, system, d, w, sig, *, mad_k, max_iter, scale_floor_ns, min_common,
                   isb_for, isb_label, want_all):
    """Per-system solutions, then (several systems) the ISB-corrected combined one.

    ``isb_for(S, per_sys_tables) -> (value, u, n, source)``. Returns (list of
    per-bin DataFrames, flags per row per-system, flags per row combined or None,
    residuals, isb rows).
    """
    tcodes, tuniq = pd.factorize(time, sort=True)
    systems = _systems_order(system)
    scode = pd.Index(systems).get_indexer(system)
    ns = len(systems)
    g = tcodes.astype(np.int64) * ns + scode
    ng = len(tuniq) * ns
    fam = np.tile(np.arange(ns), len(tuniq))
    per, acc, resid = robust_weighted_mean(g, ng, d, w, sig, family=fam, mad_k=mad_k, max_iter=max_iter,
                                           scale_floor_ns=scale_floor_ns)
    present = np.bincount(g, minlength=ng) > 0
    tables = {}
    for k, s in enumerate(systems):
        idx = np.flatnonzero(present & (fam == k))
        tab = pd.DataFrame({"time": tuniq[idx // ns], "system": s,
                            **{c: per[c][idx] for c in per if c != "high_scatter"}})
        tab["flag"] = _bin_flags({c: per[c][idx] for c in per}, min_common)
        tables[s] = tab
    row_flag = np.where(acc, "ok", "outlier").astype(object)
    isb_rows = []
    acc_all = None
    out = [tables[s] for s in systems]
    if want_all and ns > 1:
        ref = systems[0]
        shift = np.zeros(ns)
        use = np.ones(ns, dtype=bool)
        for k, s in enumerate(systems[1:], start=1):
            val, u, n, src = isb_for(s, ref, tables)
            isb_rows.append({"station": isb_label, "system": s, "reference_system": ref, "value_ns": val,
                             "u_ns": u, "n_bins": n, "source": src})
            if np.isfinite(val):
                shift[k] = val
            else:
                use[k] = False
        d2 = d - shift[scode]
        w2 = np.where(use[scode], w, np.nan)
        g2 = tcodes.astype(np.int64)
        per2, acc_all, _ = robust_weighted_mean(g2, len(tuniq), d2, w2, sig, mad_k=mad_k, max_iter=max_iter,
                                                scale_floor_ns=scale_floor_ns)
        pres2 = np.bincount(g2, np.isfinite(w2), len(tuniq)) > 0
        idx = np.flatnonzero(pres2)
        tab = pd.DataFrame({"time": tuniq[idx], "system": "ALL",
                            **{c: per2[c][idx] for c in per2 if c != "high_scatter"}})
        tab["flag"] = _bin_flags({c: per2[c][idx] for c in per2}, min_common)
        out.append(tab)
        tables["ALL"] = tab
    return tables, out, row_flag, acc_all, resid, isb_rows


def _estimate_isb(s, ref, tables, mad_k):
    a, r = tables[s], tables[ref]
    j = a.merge(r, on="time", suffixes=("", "_ref"))
    j = j[(j["flag"] == "ok") & (j["flag_ref"] == "ok")]
    if j.empty:
        return np.nan, np.nan, 0, "estimated (no common bins)"
    e = j["offset_ns"].to_numpy(float) - j["offset_ns_ref"].to_numpy(float)
    u = np.hypot(j["u_ns"].to_numpy(float), j["u_ns_ref"].to_numpy(float))
    val, uu, n = _weighted_robust_scalar(e, u, mad_k)
    return val, uu, n, "estimated"


def _finish_offsets(out):
    df = pd.concat(out, ignore_index=True) if out else pd.DataFrame(columns=OFFSET_COLUMNS)
    tc = _time_columns(df["time"].to_numpy(np.int64))
    df["time_utc"], df["mjd_utc"] = tc["time_utc"], tc["mjd_utc"]
    df = df[OFFSET_COLUMNS].sort_values(["system", "time"], kind="stable").reset_index(drop=True)
    return df


def _sat_summary(sat_df, flag_col="flag", resid_col="residual_ns", by=("sat",)):
    usable = sat_df[flag_col].isin(["ok", "outlier"])
    s = sat_df[usable]
    if s.empty:
        return pd.DataFrame(columns=[*by, "n_used", "n_outlier", "median_residual_ns", "suspect"])
    s = s.assign(_out=(s[flag_col] == "outlier").astype(np.int64))
    grp = s.groupby(list(by))
    summ = pd.DataFrame({
        "n_used": grp[flag_col].size(),
        "n_outlier": grp["_out"].sum(),
        "median_residual_ns": grp[resid_col].median(),
    }).reset_index()
    summ["suspect"] = (summ["n_used"] >= 3) & (summ["n_outlier"] >= 0.5 * summ["n_used"])
    return summ


def common_view(a_df: pd.DataFrame, b_df: pd.DataFrame, *, weights: str = "sin2el", mad_k: float = 3.5,
                min_common: int = 1, mode: str = "cv", per_system: bool = True, isb_ns: dict | None = None,
                max_iter: int = 10, scale_floor_ns: float = 0.01, glonass_ifb: str = "estimate",
                glonass_channels: dict | None = None) -> CommonViewResult:
    """Clock A − clock B per bin from two stations' track or epoch tables (see module docstring).

    ``glonass_ifb``: 'estimate' (GLONASS per-channel biases fitted and removed) or 'none';
    ``glonass_channels``: ``{sat: k}`` (without it, one constant per GLONASS satellite).

    Raises :class:`NoDataError` when nothing can be matched (no common
    satellite in CV mode, or no common bin in all-in-view).
    """
    mode = {"cv": "cv", "common-view": "cv", "all-in-view": "all-in-view", "aiv": "all-in-view",
            "all_in_view": "all-in-view"}.get(str(mode).lower())
    if mode is None:
        raise ProcessingError("mode must be 'cv' or 'all-in-view'")
    if glonass_ifb not in ("estimate", "none"):
        raise ProcessingError(f"glonass_ifb must be 'estimate' or 'none', not {glonass_ifb!r}")
    ifb = {"estimate": glonass_ifb == "estimate", "channels": glonass_channels}
    a = _check_table(a_df, "A")
    b = _check_table(b_df, "B")
    a, b, step = _align(a, b)
    if mode == "all-in-view":
        refs = (a_df.attrs.get("reference"), b_df.attrs.get("reference"))
        if refs != ("precise", "precise"):
            raise ProcessingError(f"all-in-view needs both stations referred to a precise product "
                                  f"(reference 'precise'); got A {refs[0]!r}, B {refs[1]!r}")
        return _all_in_view(a, b, weights=weights, mad_k=mad_k, min_common=min_common,
                            per_system=per_system, isb_ns=isb_ns, max_iter=max_iter,
                            scale_floor_ns=scale_floor_ns, step=step, ifb=ifb)
    refs = (a_df.attrs.get("reference", "broadcast"), b_df.attrs.get("reference", "broadcast"))
    if refs[0] != refs[1]:
        raise ProcessingError(f"station A is referred to {refs[0]!r} and B to {refs[1]!r}: their "
                              "differences would not cancel the satellite clocks; use one reference")
    cols = ["mid_time", "sat", "system", "signal", "value_ns", "u_ns", "elevation_deg", "azimuth_deg", "flag"]
    j = a[cols].merge(b[cols].drop(columns=["system"]), on=["mid_time", "sat"], suffixes=("_a", "_b"))
    if j.empty:
        raise NoDataError("no common satellite and time between the two stations")
    el_a, el_b = j["elevation_deg_a"].to_numpy(float), j["elevation_deg_b"].to_numpy(float)
    u_a, u_b = j["u_ns_a"].to_numpy(float), j["u_ns_b"].to_numpy(float)
    va, vb = j["value_ns_a"].to_numpy(float), j["value_ns_b"].to_numpy(float)
    fa, fb = j["flag_a"].astype(str).to_numpy(dtype=object), j["flag_b"].astype(str).to_numpy(dtype=object)
    both = (fa == "ok") & (fb == "ok")
    w = _weights(weights, el_a, el_b, u_a, u_b)
    w = np.where(both, w, np.nan)
    diff = va - vb
    sig = np.hypot(u_a, u_b)
    time = j["mid_time"].to_numpy(np.int64)
    system = j["system"].astype(str).to_numpy(dtype=object)
    channel_bias, ch_tab = np.zeros(diff.size), pd.DataFrame(columns=CHANNEL_BIAS_COLUMNS)
    if ifb["estimate"]:
        channel_bias, ch_tab = glonass_channel_biases(time, j["sat"].to_numpy(), system, diff, sig,
                                                      both & np.isfinite(w), ifb["channels"])
    diff_used = diff - channel_bias

    def isb_for(s, ref, tables):
        ca, cb = _isb_config(isb_ns, "A", s), _isb_config(isb_ns, "B", s)
        ra, rb = _isb_config(isb_ns, "A", ref), _isb_config(isb_ns, "B", ref)
        if ca is not None and cb is not None:
            return ca - (ra or 0.0) - (cb - (rb or 0.0)), 0.0, 0, "configured"
        return _estimate_isb(s, ref, tables, mad_k)

    tables, out, row_flag, acc_all, resid, isb_rows = _solve_systems(
        time, system, diff_used, w, sig, mad_k=mad_k, max_iter=max_iter, scale_floor_ns=scale_floor_ns,
        min_common=min_common, isb_for=isb_for, isb_label="A-B", want_all=True)
    if not per_system and "ALL" in tables:
        out = [tables["ALL"]]
    offset_df = _finish_offsets(out)
    flag = np.where(both, row_flag, np.where(fa != "ok", "a_" + fa.astype(str), "b_" + fb.astype(str))).astype(object)
    flag = np.where(both & ~np.isfinite(w), "no_weight", flag)
    sat_df = pd.DataFrame({
        "time": time, "sat": j["sat"].to_numpy(dtype=object), "system": system,
        "elevation_a_deg": el_a, "elevation_b_deg": el_b,
        "azimuth_a_deg": j["azimuth_deg_a"].to_numpy(float), "azimuth_b_deg": j["azimuth_deg_b"].to_numpy(float),
        "value_a_ns": va, "value_b_ns": vb, "u_a_ns": u_a, "u_b_ns": u_b,
        "diff_ns": diff, "channel_bias_ns": channel_bias, "residual_ns": resid, "weight": w, "flag": flag,
    })
    if acc_all is not None:
        sat_df["flag_all"] = np.where(both & np.isfinite(w), np.where(acc_all, "ok", "outlier"),
                                      flag).astype(object)
        no_isb = [r["system"] for r in isb_rows if not np.isfinite(r["value_ns"])]
        sat_df.loc[both & np.isfinite(w) & np.isin(system, no_isb), "flag_all"] = "no_isb"
    sat_df = sat_df.sort_values(["time", "sat"], kind="stable").reset_index(drop=True)
    isb = pd.DataFrame(isb_rows, columns=["station", "system", "reference_system", "value_ns", "u_ns",
                                          "n_bins", "source"])
    summary = _sat_summary(sat_df)
    attrs = {"weights": weights, "mad_k": mad_k, "min_common": min_common, "window_s": step,
             "n_unmatched_a": int(len(a) - len(j)), "n_unmatched_b": int(len(b) - len(j)),
             "reference": a_df.attrs.get("reference"), "table_mode": a_df.attrs.get("mode")}
    offset_df.attrs.update(attrs)
    return CommonViewResult(offset_df, sat_df, isb, summary, "cv", attrs, ch_tab)


def _all_in_view(a, b, *, weights, mad_k, min_common, per_system, isb_ns, max_iter, scale_floor_ns, step, ifb):
    sols, rows, isb_all, ch_tabs = {}, [], [], []
    for name, df in (("A", a), ("B", b)):
        ok = df["flag"].astype(str).to_numpy(dtype=object) == "ok"
        el = df["elevation_deg"].to_numpy(float)
        u = df["u_ns"].to_numpy(float)
        w = np.where(ok, _weights(weights, el, None, u, None), np.nan)
        v = df["value_ns"].to_numpy(float)
        time = df["mid_time"].to_numpy(np.int64)
        system = df["system"].astype(str).to_numpy(dtype=object)
        if not ok.any():
            raise NoDataError(f"station {name} has no usable value for all-in-view")
        channel_bias = np.zeros(v.size)
        if ifb["estimate"]:
            channel_bias, tab = glonass_channel_biases(time, df["sat"].to_numpy(), system, v, u, ok & np.isfinite(w),
                                                       ifb["channels"], station=name)
            ch_tabs.append(tab)

        def isb_for(s, ref, tables, name=name):
            c, cr = _isb_config(isb_ns, name, s), _isb_config(isb_ns, name, ref)
            if c is not None:
                return c - (cr or 0.0), 0.0, 0, "configured"
            return _estimate_isb(s, ref, tables, mad_k)

        tables, _, row_flag, acc_all, resid, isb_rows = _solve_systems(
            time, system, v - channel_bias, w, u, mad_k=mad_k, max_iter=max_iter, scale_floor_ns=scale_floor_ns,
            min_common=1, isb_for=isb_for, isb_label=name, want_all=True)
        sols[name] = tables
        isb_all += isb_rows
        flag = np.where(ok, row_flag, df["flag"].astype(str).to_numpy(dtype=object)).astype(object)
        flag = np.where(ok & ~np.isfinite(w), "no_weight", flag).astype(object)
        r = pd.DataFrame({"time": time, "station": name, "sat": df["sat"].to_numpy(dtype=object),
                          "system": system, "elevation_deg": el, "azimuth_deg": df["azimuth_deg"].to_numpy(float),
                          "value_ns": v, "channel_bias_ns": channel_bias, "u_ns": u, "residual_ns": resid,
                          "weight": w, "flag": flag})
        if acc_all is not None:
            r["flag_all"] = np.where(ok & np.isfinite(w), np.where(acc_all, "ok", "outlier"), flag).astype(object)
            no_isb = [x["system"] for x in isb_rows if not np.isfinite(x["value_ns"])]
            r.loc[ok & np.isfinite(w) & np.isin(system, no_isb), "flag_all"] = "no_isb"
        rows.append(r)
    out = []
    keys = [k for k in sols["A"] if k in sols["B"]]
    if not per_system and "ALL" in keys:
        keys = ["ALL"]
    for k in keys:
        j = sols["A"][k].merge(sols["B"][k], on=["time", "system"], suffixes=("_a", "_b"))
        if j.empty:
            continue
        na, nb = j["n_sat_a"].to_numpy(), j["n_sat_b"].to_numpy()
        n = np.minimum(na, nb)
        fa, fb = j["flag_a"].to_numpy(dtype=object), j["flag_b"].to_numpy(dtype=object)
        flag = np.where(n == 0, "no_data", np.where(n < min_common, "few_satellites",
                        np.where((fa == "high_scatter") | (fb == "high_scatter"), "high_scatter", "ok")))
        out.append(pd.DataFrame({
            "time": j["time"].to_numpy(np.int64), "system": k,
            "offset_ns": j["offset_ns_a"] - j["offset_ns_b"],
            "u_ns": np.hypot(j["u_ns_a"], j["u_ns_b"]),
            "u_apriori_ns": np.hypot(j["u_apriori_ns_a"], j["u_apriori_ns_b"]),
            "n_sat": n, "n_sat_a": na, "n_sat_b": nb,
            "n_rejected": j["n_rejected_a"] + j["n_rejected_b"],
            "scatter_ns": np.hypot(j["scatter_ns_a"], j["scatter_ns_b"]),
            "chi2": j["chi2_a"] + j["chi2_b"], "dof": j["dof_a"] + j["dof_b"],
            "flag": flag.astype(object)}))
    if not out:
        raise NoDataError("no common bin between the two stations' all-in-view solutions")
    df = pd.concat(out, ignore_index=True)
    tc = _time_columns(df["time"].to_numpy(np.int64))
    df["time_utc"], df["mjd_utc"] = tc["time_utc"], tc["mjd_utc"]
    df = df[OFFSET_COLUMNS + ["n_sat_a", "n_sat_b"]].sort_values(["system", "time"], kind="stable")
    offset_df = df.reset_index(drop=True)
    sat_df = pd.concat(rows, ignore_index=True).sort_values(["time", "station", "sat"], kind="stable")
    sat_df = sat_df.reset_index(drop=True)
    isb = pd.DataFrame(isb_all, columns=["station", "system", "reference_system", "value_ns", "u_ns",
                                         "n_bins", "source"])
    summary = _sat_summary(sat_df, by=("station", "sat"))
    attrs = {"weights": weights, "mad_k": mad_k, "min_common": min_common, "window_s": step,
             "reference": "precise", "table_mode": a.attrs.get("mode")}
    offset_df.attrs.update(attrs)
    ch = [t for t in ch_tabs if len(t)]
    ch_tab = pd.concat(ch, ignore_index=True) if ch else pd.DataFrame(columns=CHANNEL_BIAS_COLUMNS)
    return CommonViewResult(offset_df, sat_df, isb, summary, "all-in-view", attrs, ch_tab)


# ---------------------------------------------------------------- uncertainty budget

#: Decimals kept of the offset series' values in every output (offset.csv, the archive, exports):
#: 0.001 ns, well below a point's own uncertainty (tenths of a ns at best for code), so rounding
#: adds nothing measurable (its error is uniform, σ = 0.0003 ns) and every output holds the same numbers.
OFFSET_DECIMALS = {"offset_ns": 3, "u_ns": 3, "scatter_ns": 3, "u_apriori_ns": 3}


def round_offsets(df: pd.DataFrame) -> pd.DataFrame:
    """The table with the columns of :data:`OFFSET_DECIMALS` rounded (a copy)."""
    out = df.copy()
    for c, n in OFFSET_DECIMALS.items():
        if c in out.columns:
            out[c] = np.round(out[c].to_numpy(float), n)
    return out


def main_system(systems) -> str | None:
    """The series a user means by "the offset": the combined 'ALL' when several
    systems were solved, else the only system; None when that is ambiguous."""
    systems = sorted({str(s) for s in systems})
    if "ALL" in systems:
        return "ALL"
    return systems[0] if len(systems) == 1 else None


def main_series(df: pd.DataFrame, strict: bool = False) -> pd.DataFrame:
    """The rows of the main series of each day (see :func:`main_system`), for tables that
    hold several systems' series over several days: a day processed with GPS only keeps its
    'G' rows even when other days have 'ALL'. Days are the ``date`` column when present
    (the archive's), else the UTC date of ``time_utc_ns`` / ``time_utc``. A day with several
    systems and no combined series is ambiguous: ValueError with ``strict``, else its first
    system in alphabetical order."""
    if "system" not in df.columns or df["system"].nunique() <= 1:
        return df
    if "date" in df.columns:
        day = df["date"].astype(str)
    elif "time_utc_ns" in df.columns:
        day = pd.Series(np.floor_divide(df["time_utc_ns"].to_numpy(np.int64), 86_400_000_000_000), index=df.index)
    else:
        day = df["time_utc"].astype(str).str[:10]
    keep = np.zeros(len(df), dtype=bool)
    sysv = df["system"].astype(str).to_numpy()
    for _, idx in df.groupby(day.to_numpy()).indices.items():
        s = main_system(sysv[idx])
        if s is None:
            if strict:
                raise ValueError(f"the offsets hold systems {', '.join(sorted(set(sysv[idx])))} and no combined "
                                 "series; choose one")
            s = sorted(set(sysv[idx]))[0]
        keep[idx[sysv[idx] == s]] = True
    return df[keep]


def _pick_system(offset_df, system):
    if system is None:
        system = main_system(offset_df["system"])
        if system is None:
            raise ProcessingError(f"several systems {sorted(set(offset_df['system']))} and no combined "
                                  "solution: say which one")
    return system


def _day_rows(offset_df, system):
    o = offset_df[(offset_df["system"] == system) & (offset_df["flag"] == "ok")]
    o = o[np.isfinite(o["offset_ns"]) & np.isfinite(o["u_ns"])]
    o = o.assign(u_ns=np.fmax(o["u_ns"].to_numpy(float), U_MIN_NS))
    return o.sort_values("time")


def line_of_sight_enu(elevation_deg, azimuth_deg):
    """Unit vector station → satellite in the local East, North, Up frame, shape (N, 3)."""
    el = np.deg2rad(np.asarray(elevation_deg, dtype=np.float64))
    az = np.deg2rad(np.asarray(azimuth_deg, dtype=np.float64))
    return np.stack([np.cos(el) * np.sin(az), np.cos(el) * np.cos(az), np.sin(el)], axis=-1)


def effective_line_of_sight(result: CommonViewResult, station: str, *, system: str | None = None):
    """Weighted mean line of sight (ENU) through which a station position error enters the day's mean.

    A position error δr (assumed − true, ENU metres) changes each value of that
    station by ``ûᵢ·δr / c`` (the modelled range is short by ``ûᵢ·δr``). The
    day's mean is a weighted mean over bins (weights 1/u_b²) of weighted means
    over the bin's accepted satellites (weights wᵢ), so it moves by
    ``ū·δr / c`` with ``ū = Σ_b (W_b/ΣW) Σ_i∈b (wᵢ/Σ_b w) ûᵢ`` (sign + for A,
    − for B in CV). Returns ``(ū, per-bin ū array (n_bins, 3))``.
    """
    station = station.upper()
    o = _day_rows(result.offset_df, _pick_system(result.offset_df, system))
    system = o["system"].iloc[0] if len(o) else system
    s = result.sat_df
    flag_col = "flag_all" if (system == "ALL" and "flag_all" in s.columns) else "flag"
    if result.mode == "all-in-view":
        s = s[s["station"] == station]
        el, az = s["elevation_deg"].to_numpy(float), s["azimuth_deg"].to_numpy(float)
    else:
        sfx = station.lower()
        el, az = s[f"elevation_{sfx}_deg"].to_numpy(float), s[f"azimuth_{sfx}_deg"].to_numpy(float)
    keep = (s[flag_col] == "ok").to_numpy().copy()
    if system != "ALL":
        keep &= (s["system"] == system).to_numpy()
    t = s["time"].to_numpy(np.int64)[keep]
    w = s["weight"].to_numpy(float)[keep]
    u = line_of_sight_enu(el[keep], az[keep])
    bins = o["time"].to_numpy(np.int64)
    if bins.size == 0:
        return np.full(3, np.nan), np.zeros((0, 3))
    j = np.searchsorted(bins, t)
    j = np.clip(j, 0, bins.size - 1)
    inb = bins[j] == t
    j, w, u = j[inb], w[inb], u[inb]
    wsum = np.bincount(j, w, bins.size)
    per_bin = np.stack([np.bincount(j, w * u[:, k], bins.size) for k in range(3)], axis=1) / wsum[:, None]
    W = 1.0 / o["u_ns"].to_numpy(float) ** 2
    good = np.isfinite(per_bin).all(axis=1)
    ubar = (W[good, None] * per_bin[good]).sum(axis=0) / W[good].sum()
    return ubar, per_bin


def coordinate_uncertainty_ns(result: CommonViewResult, station: str, sigma_enu_m, *, system: str | None = None):
    """Standard uncertainty (ns) of the day's mean from a station's position uncertainty.

    ``sigma_enu_m``: 1-σ of the East, North, Up coordinates (m, independent).
    Formula: ``u = √(Σ_k (σ_k ū_k)²) / c`` with ``ū`` from
    :func:`effective_line_of_sight`: a position error is constant over the day,
    so it enters the mean through the *mean* line of sight (horizontal parts
    largely average out over the sky, the vertical part does not). Also
    returns the per-bin figure ``√(mean_b Σ_k (σ_k ū_b,k)²)/c`` (a single bin
    sees its own satellites' mean geometry) as the second element.
    """
    sig = np.asarray(sigma_enu_m, dtype=np.float64).reshape(3)
    ubar, per_bin = effective_line_of_sight(result, station, system=system)
    day = float(np.sqrt(np.sum((sig * ubar) ** 2)) / SPEED_OF_LIGHT_MPS * 1e9)
    pb = float(np.sqrt(np.nanmean(np.sum((sig * per_bin) ** 2, axis=1))) / SPEED_OF_LIGHT_MPS * 1e9) \
        if len(per_bin) else float("nan")
    return day, pb


def _tdev_at_span(x_ns, tau0_s):
    """TDEV (ns) extrapolated to the span: allantools at octave τ, then the log-log slope of
    the last two points (bounded to [−0.5, 1]: −0.5 is white phase noise) carried to τ = span."""
    import allantools

    taus, dev, _, _ = allantools.tdev(np.asarray(x_ns) * 1e-9, rate=1.0 / tau0_s, data_type="phase",
                                      taus="octave")[:4]
    taus, dev = np.asarray(taus), np.asarray(dev) * 1e9
    good = np.isfinite(dev) & (dev > 0)
    taus, dev = taus[good], dev[good]
    if taus.size < 2:
        return float("nan"), float("nan"), float("nan")
    slope = float(np.clip(np.log(dev[-1] / dev[-2]) / np.log(taus[-1] / taus[-2]), -0.5, 1.0))
    span = tau0_s * len(x_ns)
    return float(dev[-1] * (span / taus[-1]) ** slope), float(taus[-1]), slope


def _regular_grid(t_ns, x, max_gap_fraction):
    """(step_s, x on the full grid) when ``t_ns`` sit on a regular grid with few gaps, else None."""
    if t_ns.size < 3:
        return None
    steps = np.diff(t_ns)
    step = int(np.min(steps[steps > 0])) if np.any(steps > 0) else 0
    if step <= 0 or np.any((t_ns - t_ns[0]) % step):
        return None
    k = (t_ns - t_ns[0]) // step
    full = np.arange(k[-1] + 1)
    if 1.0 - k.size / full.size > max_gap_fraction:
        return None
    return step / 1e9, np.interp(full, k, x)


def isb_uncertainty_items(result: CommonViewResult) -> dict:
    """Budget items (ns) from the uncertainty of the estimated inter-system biases in 'ALL'.

    An error δ in the bias of system S shifts every combined bin by δ times the
    weight share of S among the bin's accepted values; over the day that is
    ``u_isb · Σ_S w / Σ w`` (accepted rows of the combined solution; per station
    in all-in-view). Configured biases carry no estimate uncertainty here: put
    their calibration uncertainty into ``type_b_items``.
    """
    s = result.sat_df
    if "flag_all" not in s.columns or result.isb.empty:
        return {}
    items = {}
    for _, row in result.isb.iterrows():
        if row["source"] != "estimated" or not np.isfinite(row["u_ns"]):
            continue
        rows = s[s["flag_all"] == "ok"]
        if "station" in s.columns and row["station"] in ("A", "B"):
            rows = rows[rows["station"] == row["station"]]
        wsum = rows["weight"].sum()
        if wsum <= 0:
            continue
        share = rows.loc[rows["system"] == row["system"], "weight"].sum() / wsum
        items[f"ISB {row['system']}-{row['reference_system']} ({row['station']})"] = float(row["u_ns"] * share)
    return items


def channel_bias_uncertainty_items(result: CommonViewResult, system: str) -> dict:
    """Budget items (ns) from the uncertainty of the GLONASS per-channel biases removed.

    An error ε_k in the bias of channel k shifts the day's mean of ``system`` ('R' or 'ALL') by
    ε_k times channel k's share of the accepted weight; independent errors give
    ``√Σ (share_k · u_k)²`` (the zero-mean constraint correlates them slightly; not modelled).
    One item per station label ('A-B' in CV, 'A' and 'B' in all-in-view)."""
    ch = result.channel_biases
    s = result.sat_df
    if ch is None or ch.empty or system not in ("R", "ALL"):
        return {}
    col = "flag_all" if system == "ALL" and "flag_all" in s.columns else "flag"
    items = {}
    for who, tab in ch.groupby("station"):
        rows = s[s[col] == "ok"]
        if system == "R":
            rows = rows[rows["system"] == "R"]
        if "station" in s.columns and who in ("A", "B"):
            rows = rows[rows["station"] == who]
        wsum = rows["weight"].sum()
        if wsum <= 0:
            continue
        var = 0.0
        for _, c in tab.iterrows():
            sats = str(c["sats"]).split(",")
            share = rows.loc[rows["sat"].isin(sats), "weight"].sum() / wsum
            if np.isfinite(c["u_ns"]):
                var += (share * float(c["u_ns"])) ** 2
        items[f"GLONASS channel biases ({who})"] = float(np.sqrt(var))
    return items


def uncertainty_budget(offset_df: pd.DataFrame, *, type_b_items: dict | None = None,
                       tdev_ns_at_day: float | None = None, result: CommonViewResult | None = None,
                       coordinate_sigma_m: dict | None = None, system: str | None = None,
                       min_tdev_points: int = 32, max_gap_fraction: float = 0.1) -> dict:
    """Calibrated mean offset of the day with type A and type B uncertainties (ns, 1-σ).

    * mean: weighted mean of the ``'ok'`` bins of ``system`` (default 'ALL' if
      present, else the only system), weights 1/u².
    * type A: ``tdev_ns_at_day`` when given; otherwise the largest of
      (i) the standard error from the scatter, ``√(Σw r²/((N−1)Σw))``, inflated
      for lag-1 autocorrelation ρ of the residuals by ``√((1+ρ)/(1−ρ))`` (AR(1)
      effective number of points; ρ < 0 taken as 0), and
      (ii) when the series lies on a regular grid with at most
      ``max_gap_fraction`` of it missing (gaps filled by linear interpolation
      for this figure only) and has at least ``min_tdev_points`` bins, TDEV
      extrapolated to τ = span
      (:func:`_tdev_at_span`; for white phase noise TDEV(τ) = σ/√m equals the
      standard error, for correlated noise it is larger and more honest).
    * type B: ``type_b_items`` (name → ns: delay calibrations of both stations,
      ...) plus, with ``result`` and ``coordinate_sigma_m`` (``{'A': (σE, σN, σU),
      'B': ...}`` in m), one item per station from
      :func:`coordinate_uncertainty_ns`, and for 'ALL' with ``result`` the
      estimated inter-system biases (:func:`isb_uncertainty_items`), and for 'R' and
      'ALL' the GLONASS channel biases (:func:`channel_bias_uncertainty_items`); combined as
      the root sum of squares (independent items).
    * total = √(type_A² + type_B²).

    Returns ``{mean_offset_ns, type_a_ns, type_b_ns, total_ns, items, system,
    n_bins, type_a_method, type_a_detail}``.
    """
    system = _pick_system(offset_df, system)
    o = _day_rows(offset_df, system)
    if o.empty:
        raise NoDataError(f"no 'ok' bin of system {system} for the budget")
    x = o["offset_ns"].to_numpy(float)
    w = 1.0 / o["u_ns"].to_numpy(float) ** 2
    mean = float(np.sum(w * x) / np.sum(w))
    n = x.size
    r = x - mean
    se_formal = float(1.0 / np.sqrt(np.sum(w)))
    se_scatter = float(np.sqrt(np.sum(w * r * r) / ((n - 1) * np.sum(w)))) if n >= 2 else se_formal
    rho = float(np.corrcoef(r[:-1], r[1:])[0, 1]) if n >= 4 and np.std(r) > 0 else 0.0
    rho = min(max(rho if np.isfinite(rho) else 0.0, 0.0), 0.99)
    se_ac = se_scatter * np.sqrt((1 + rho) / (1 - rho))
    detail = {"se_formal_ns": se_formal, "se_scatter_ns": se_scatter, "lag1_autocorrelation": rho,
              "se_autocorrelation_ns": float(se_ac)}
    if tdev_ns_at_day is not None:
        type_a, method = float(tdev_ns_at_day), "tdev (given)"
    else:
        type_a, method = float(se_ac), "standard error, AR(1)"
        grid = _regular_grid(o["time"].to_numpy(np.int64), x, max_gap_fraction)
        if grid is not None and grid[1].size >= min_tdev_points:
            tdev, tau_max, slope = _tdev_at_span(grid[1], grid[0])
            detail.update({"tdev_span_ns": tdev, "tdev_tau_max_s": tau_max, "tdev_slope": slope})
            if np.isfinite(tdev) and tdev > type_a:
                type_a, method = tdev, "TDEV at span"
    items = {str(k): float(v) for k, v in (type_b_items or {}).items()}
    if coordinate_sigma_m:
        if result is None:
            raise ProcessingError("coordinate uncertainties need the common-view result (its geometry)")
        for st, sig in coordinate_sigma_m.items():
            day, _ = coordinate_uncertainty_ns(result, str(st), sig, system=system)
            items[f"coordinates {str(st).upper()}"] = day
    if result is not None and system == "ALL":
        items.update(isb_uncertainty_items(result))
    if result is not None:
        items.update(channel_bias_uncertainty_items(result, system))
    type_b = float(np.sqrt(sum(v * v for v in items.values()))) if items else 0.0
    return {"mean_offset_ns": mean, "type_a_ns": type_a, "type_b_ns": type_b,
            "total_ns": float(np.hypot(type_a, type_b)), "items": items, "system": system,
            "n_bins": int(n), "type_a_method": method, "type_a_detail": detail}


def format_budget(budget: dict) -> str:
    """Plain-text table of an :func:`uncertainty_budget` result (ns, 1-σ)."""
    lines = [f"Uncertainty budget, system {budget['system']}, {budget['n_bins']} bins (ns, 1 sigma)",
             f"  {'value A - B':<32}{budget['mean_offset_ns']:>12.3f}",
             f"  {'type A (' + budget['type_a_method'] + ')':<32}{budget['type_a_ns']:>12.3f}"]
    for k, v in budget["items"].items():
        lines.append(f"  {'type B: ' + k:<32}{v:>12.3f}")
    lines.append(f"  {'type B combined':<32}{budget['type_b_ns']:>12.3f}")
    lines.append(f"  {'total':<32}{budget['total_ns']:>12.3f}")
    return "\n".join(lines)
