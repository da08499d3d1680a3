"""Standard common-view tracks, per-satellite track fits and epoch bins.

Input: the per-station table of :mod:`ctt.measure` (one row per epoch ×
satellite) with at least the columns ``time`` (int64 GPS ns), ``sat``,
``system``, ``clock_ns`` (local clock − system time), ``sigma_ns`` (a-priori
1-σ, may be NaN), ``elevation_deg``, ``azimuth_deg``, ``troposphere_m``,
``ionosphere_m`` and ``flag`` (``'ok'`` or a reason). ``signal`` is optional.
Rows whose flag is not ``'ok'`` are counted (``n_flagged``) but never used.

Output of both :func:`fit_tracks` and :func:`bin_epochs`: one row per
satellite and window (track or bin) with the columns

=====================  ======================================================
``track_start_utc_ns``  start of the window, UTC calendar-count ns
``mid_time``            instant the value refers to, GPS ns (window midpoint)
``sat``, ``system``, ``signal``
``n_points``            usable ('ok') points in the window
``n_flagged``           rows in the window whose flag is not 'ok'
``value_ns``            clock value at ``mid_time`` (ns)
``u_ns``                its standard uncertainty (see below)
``u_fit_ns``            uncertainty from the residual scatter
``u_apriori_ns``        uncertainty propagated from ``sigma_ns`` (NaN if absent)
``slope_ps_s``          fitted slope (tracks; NaN for means)
``rms_ns``              residual standard deviation (tracks: n−2 dof; bins: n−1)
``elevation_deg``, ``azimuth_deg``, ``troposphere_m``, ``ionosphere_m``
                        at ``mid_time`` (linear fit in tracks, mean in bins;
                        azimuth through its sine and cosine)
``flag``                'ok', 'few_points', 'high_rms', or the input flag
                        (single epochs)
=====================  ======================================================

``df.attrs`` carries ``reference`` (copied from the input), ``mode``
('track' or 'epoch'), ``window_s`` (780, the bin length, or the sampling
interval for single epochs) and ``station`` if the input had one.

Choice of ``u_ns``: the a-priori value when every point has a ``sigma_ns``
and the residual scatter is compatible with it (χ² of the residuals against
the a-priori σ below its 99 % quantile); otherwise the residual-based value
(NaN when there are too few points for a scatter). This keeps the code-noise
model when it is right and refuses to claim it when the data say otherwise.

Track schedule (the time community's open CV standard, CGGTTS; Allan & Thomas
1994): 13-minute tracks (780 s) starting every 16 minutes, the first at
00:02:00 UTC on MJD 50722, the whole schedule moving 4 minutes earlier every
day. The standard uses exactly 4 min/day; the GPS constellation really repeats
one sidereal day later, i.e. about 3 min 56 s earlier each solar day, so the
standard schedule slowly slides against the sky (4 s/day) and the standard
accepts that. See :func:`track_schedule` for how the day boundary is handled.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy import stats

from .errors import ProcessingError
from .timescales import NS_PER_S, convert, from_mjd, to_mjd

#: Open CV standard (CGGTTS) schedule constants.
TRACK_LENGTH_S = 780
TRACK_SPACING_S = 960
REFERENCE_MJD = 50722
REFERENCE_FIRST_START_S = 120
DAILY_SHIFT_S = 240

#: Our default for a usable window: at least this fraction of its nominal
#: points (18 of 26 for a 780-s track at 30 s); a common-practice choice.
MIN_FRACTION = 2.0 / 3.0

REQUIRED_COLUMNS = ("time", "sat", "clock_ns", "flag")

OUTPUT_COLUMNS = [
    "track_start_utc_ns", "mid_time", "sat", "system", "signal", "n_points", "n_flagged",
    "value_ns", "u_ns", "u_fit_ns", "u_apriori_ns", "slope_ps_s", "rms_ns",
    "elevation_deg", "azimuth_deg", "troposphere_m", "ionosphere_m", "flag",
]


# ---------------------------------------------------------------- schedule

def first_track_start_s(mjd, *, spacing_s=TRACK_SPACING_S, reference_mjd=REFERENCE_MJD,
                        reference_first_s=REFERENCE_FIRST_START_S, daily_shift_s=DAILY_SHIFT_S):
    """Seconds after 00:00 UTC of the first standard track of ``mjd`` (scalar or array).

    Definition: the tracks of day D start at
    ``reference_first_s − daily_shift_s·(D − reference_mjd) + k·spacing_s`` s
    after 00:00 UTC of D, for integer k; the first is the smallest one ≥ 0,
    i.e. that expression taken modulo ``spacing_s``. With the standard
    constants it cycles 00:02, 00:14, 00:10, 00:06, 00:02 ... (a track that the
    4-minute shift pushes before 00:00 is replaced by one 16 min later).
    """
    d = np.asarray(mjd, dtype=np.int64) - reference_mjd
    return np.mod(reference_first_s - daily_shift_s * d, spacing_s)


def track_schedule(mjd, *, length_s=TRACK_LENGTH_S, spacing_s=TRACK_SPACING_S,
                   reference_mjd=REFERENCE_MJD, reference_first_s=REFERENCE_FIRST_START_S,
                   daily_shift_s=DAILY_SHIFT_S) -> np.ndarray:
    """Start instants (UTC calendar-count int64 ns, sorted) of the standard tracks of a day.

    ``mjd`` is one MJD or a sequence of them (the result is their union).
    A day holds every track of the definition in :func:`first_track_start_s`
    whose whole window ``[start, start + length_s)`` lies inside
    ``[00:00, 24:00)`` UTC of that day: 90 tracks when the first starts at
    00:02 (every fourth day) and 89 otherwise (its 90th track would end after
    24:00). Days with a leap second are treated as 86 400 s long (the calendar
    count cannot name 23:59:60).
    """
    mjds = np.atleast_1d(np.asarray(mjd, dtype=np.int64))
    out = []
    for day in np.unique(mjds):  # one loop step per day
        first = int(first_track_start_s(day, spacing_s=spacing_s, reference_mjd=reference_mjd,
                                        reference_first_s=reference_first_s,
                                        daily_shift_s=daily_shift_s))
        n = (86_400 - length_s - first) // spacing_s + 1
        sod = first + spacing_s * np.arange(n, dtype=np.int64)
        out.append(int(from_mjd(int(day))) + sod * NS_PER_S)
    return np.concatenate(out) if out else np.zeros(0, dtype=np.int64)


def schedule_for_times(time_gps_ns, **kw) -> np.ndarray:
    """The standard tracks (UTC ns) of every UTC day touched by the given GPS instants."""
    t = np.asarray(time_gps_ns, dtype=np.int64)
    if t.size == 0:
        return np.zeros(0, dtype=np.int64)
    utc = convert(np.array([t.min(), t.max()]), "GPS", "UTC")
    m0, _ = to_mjd(utc[0])
    m1, _ = to_mjd(utc[1])
    return track_schedule(np.arange(int(m0), int(m1) + 1), **kw)


# ---------------------------------------------------------------- helpers

def _check(meas_df: pd.DataFrame) -> None:
    missing = [c for c in REQUIRED_COLUMNS if c not in meas_df.columns]
    if missing:
        raise ProcessingError(f"measurement table lacks column(s) {', '.join(missing)}")


def _col(df, name, dtype=np.float64):
    if name in df.columns:
        return df[name].to_numpy(dtype=dtype, na_value=np.nan) if dtype is np.float64 else df[name].to_numpy()
    return np.full(len(df), np.nan)


def _str_col(df, name, default):
    if name in df.columns:
        return df[name].astype(str).to_numpy(dtype=object)
    if callable(default):
        return default(df)
    return np.full(len(df), default, dtype=object)


def sampling_interval_s(time_ns) -> float:
    """Median positive step between distinct epochs, in seconds (NaN with < 2 epochs)."""
    u = np.unique(np.asarray(time_ns, dtype=np.int64))
    if u.size < 2:
        return float("nan")
    return float(np.median(np.diff(u))) / 1e9


def _attrs(meas_df, mode, window_s):
    attrs = {"reference": meas_df.attrs.get("reference", "broadcast"), "mode": mode,
             "window_s": float(window_s)}
    if "station" in meas_df.attrs:
        attrs["station"] = meas_df.attrs["station"]
    return attrs


def _empty(attrs):
    df = pd.DataFrame({c: pd.Series(dtype=np.float64) for c in OUTPUT_COLUMNS})
    for c in ("track_start_utc_ns", "mid_time", "n_points", "n_flagged"):
        df[c] = df[c].astype(np.int64)
    for c in ("sat", "system", "signal", "flag"):
        df[c] = df[c].astype(object)
    df.attrs.update(attrs)
    return df


def clock_steps_ns(meas_df: pd.DataFrame, *, step_ns: float = 1e6, tolerance_ns: float = 1e4) -> np.ndarray:
    """Cumulative whole-millisecond resets of the station clock, per row (ns; 0 when there are none).

    A track or bin fitted across a receiver's 1-ms clock reset
    (:func:`ctt.measure.millisecond_resets`) is meaningless, so the fits remove the steps and
    add back the one in force at the window's midpoint (that of the last sample at or before
    it: a reset between that sample and the midpoint cannot be placed), so the reported value
    is still the clock at that instant. Detection on the epoch medians of the usable
    ``clock_ns`` over satellites; epochs without a usable value inherit the preceding
    epoch's count.
    """
    from .measure import millisecond_resets

    t = meas_df["time"].to_numpy(np.int64)
    if t.size == 0 or "clock_ns" not in meas_df.columns:
        return np.zeros(t.size)
    y = _col(meas_df, "clock_ns")
    ok = (meas_df["flag"].astype(str).to_numpy(dtype=object) == "ok") & np.isfinite(y)
    if ok.sum() < 2:
        return np.zeros(t.size)
    ep = pd.Series(y[ok]).groupby(t[ok]).median()
    te, ce = ep.index.to_numpy(np.int64), ep.to_numpy(float)
    if te.size < 2:
        return np.zeros(t.size)
    jump, k, _ = millisecond_resets(te, ce, step_ns=step_ns, tolerance_ns=tolerance_ns)
    if not jump.any():
        return np.zeros(t.size)
    cum = np.concatenate(([0.0], np.cumsum(k * step_ns)))
    j = np.clip(np.searchsorted(te, t, side="right") - 1, 0, te.size - 1)
    return cum[j]


def _steps_at(meas_df, steps, instants):
    """The cumulative step (ns) in force at each GPS instant: that of the last row at or before it."""
    t = meas_df["time"].to_numpy(np.int64)
    order = np.argsort(t, kind="stable")
    ts, ss = t[order], np.asarray(steps, dtype=float)[order]
    j = np.searchsorted(ts, np.asarray(instants, dtype=np.int64), side="right") - 1
    return np.where(j >= 0, ss[np.clip(j, 0, None)], ss[0] if ss.size else 0.0)


def _reduce(meas_df, win, start_utc, mid_gps, *, linear, min_points, rms_factor, rms_limit_ns, attrs,
            min_rms_ns=0.01, steps=None):
    """Per (window, satellite, signal) closed-form least squares with np.bincount sums.

    ``win`` is the window index of each row (−1 outside every window); ``steps``
    (ns per row, see :func:`clock_steps_ns`) are removed from ``clock_ns`` before
    the fit and the step in force at each window's midpoint is added back.
    """
    sel = np.flatnonzero(win >= 0)
    if sel.size == 0:
        return _empty(attrs)
    df = meas_df
    t = df["time"].to_numpy(np.int64)[sel]
    w_i = win[sel]
    sat = _str_col(df, "sat", "")[sel]
    signal = _str_col(df, "signal", "")[sel]
    system = _str_col(df, "system", lambda d: d["sat"].astype(str).str[0].to_numpy(dtype=object))[sel]
    key_codes, key_uniq = pd.factorize(pd.Series(sat + "|" + signal), sort=True)
    gkey = w_i.astype(np.int64) * len(key_uniq) + key_codes
    gid, guniq = pd.factorize(gkey, sort=True)
    ng = len(guniq)
    order = np.argsort(gid, kind="stable")
    first = order[np.searchsorted(gid[order], np.arange(ng))]  # first row of each group

    y = _col(df, "clock_ns")[sel]
    step_mid = None
    if steps is not None and np.any(np.asarray(steps) != 0):
        y = y - np.asarray(steps, dtype=float)[sel]
        step_mid = _steps_at(df, steps, mid_gps)
    ok = (df["flag"].astype(str).to_numpy(dtype=object)[sel] == "ok") & np.isfinite(y)
    o = ok.astype(np.float64)
    n = np.bincount(gid, o, ng)
    n_flag = np.bincount(gid, ~ok, ng).astype(np.int64)
    with np.errstate(invalid="ignore", divide="ignore"):
        x = (t - mid_gps[w_i]) / 1e9  # s from the window midpoint (exact int64 difference)
        xbar = np.bincount(gid, o * x, ng) / n
        xc = np.where(ok, x - xbar[gid], 0.0)
        sxx = np.bincount(gid, xc * xc, ng)

        def fit(v, need_linear):
            """Value at the midpoint (and slope) of column v over ok rows; two-pass centred sums."""
            v0 = np.where(ok, v, 0.0)
            vbar = np.bincount(gid, v0, ng) / n
            vc = np.where(ok, v - vbar[gid], 0.0)
            if need_linear:
                b = np.bincount(gid, xc * vc, ng) / sxx
                b = np.where(sxx > 0, b, np.nan)
                a = np.where(np.isfinite(b), vbar - b * xbar, vbar)
                return a, b, vc, vbar
            return vbar, np.full(ng, np.nan), vc, vbar

        a, b, yc, _ = fit(y, linear)
        if linear:
            rss = np.maximum(np.bincount(gid, yc * yc, ng) - b * np.bincount(gid, xc * yc, ng), 0.0)
            dof = n - 2
            lever = 1.0 / n + xbar * xbar / sxx  # var(a) = s² · lever
            coef = np.where(ok, 1.0 / n[gid] - xbar[gid] * xc / sxx[gid], 0.0)  # a = Σ coef·y
        else:
            rss = np.bincount(gid, yc * yc, ng)
            dof = n - 1
            lever = 1.0 / n
            coef = np.where(ok, 1.0 / n[gid], 0.0)
        s2 = np.where(dof > 0, rss / dof, np.nan)
        u_fit = np.sqrt(s2 * lever)
        sig = _col(df, "sigma_ns")[sel]
        sig_missing = np.bincount(gid, ok & ~np.isfinite(sig), ng) > 0
        sig0 = np.where(ok & np.isfinite(sig), sig, 0.0)
        u_prior = np.sqrt(np.bincount(gid, coef * coef * sig0 * sig0, ng))
        u_prior = np.where(sig_missing | (n == 0), np.nan, u_prior)
        # chi² of the residuals against the a-priori sigma (OLS residuals, approximately χ²(dof))
        resid = np.where(ok, yc - np.nan_to_num(b)[gid] * xc, 0.0)
        var0 = np.where(sig0 > 0, sig0 * sig0, 1.0)
        chi2 = np.bincount(gid, np.where(ok & (sig0 > 0), resid * resid / var0, 0.0), ng)
        q99 = np.where(dof > 0, stats.chi2.ppf(0.99, np.maximum(dof, 1)), np.inf)
        compatible = np.isfinite(u_prior) & ((dof <= 0) | (chi2 <= q99))
        u = np.where(compatible, u_prior, u_fit)
        rms = np.sqrt(s2)
        sig_rms = np.sqrt(np.bincount(gid, o * sig0 * sig0, ng) / n)

        el, *_ = fit(_col(df, "elevation_deg")[sel], linear)
        az_rad = np.deg2rad(_col(df, "azimuth_deg")[sel])
        ca, *_ = fit(np.cos(az_rad), linear)
        sa, *_ = fit(np.sin(az_rad), linear)
        az = np.mod(np.rad2deg(np.arctan2(sa, ca)), 360.0)
        tro, *_ = fit(_col(df, "troposphere_m")[sel], linear)
        ion, *_ = fit(_col(df, "ionosphere_m")[sel], linear)

    win_g = (guniq // len(key_uniq)).astype(np.int64)
    if step_mid is not None:
        a = a + step_mid[win_g]
    out = pd.DataFrame({
        "track_start_utc_ns": start_utc[win_g],
        "mid_time": mid_gps[win_g],
        "sat": sat[first],
        "system": system[first],
        "signal": signal[first],
        "n_points": n.astype(np.int64),
        "n_flagged": n_flag,
        "value_ns": np.where(n > 0, a, np.nan),
        "u_ns": u,
        "u_fit_ns": u_fit,
        "u_apriori_ns": u_prior,
        "slope_ps_s": b * 1e3,  # ns/s -> ps/s
        "rms_ns": rms,
        "elevation_deg": el,
        "azimuth_deg": az,
        "troposphere_m": tro,
        "ionosphere_m": ion,
    })
    enough = n >= max(min_points, 2 if linear else 1)
    flag = np.where(enough, "ok", "few_points").astype(object)
    if rms_factor is not None or rms_limit_ns is not None:
        # Normalise the scatter by the noise model so low satellites are not flagged
        # for being low: by the a-priori sigma when known, else by sin(el) (σ ∝ 1/sin el).
        with np.errstate(invalid="ignore", divide="ignore"):
            norm = np.where(np.isfinite(u_prior) & (sig_rms > 0), rms / sig_rms,
                            rms * np.sin(np.deg2rad(np.clip(el, 1.0, 90.0))))
        high = np.zeros(ng, dtype=bool)
        if rms_factor is not None:
            good = enough & np.isfinite(norm)
            if good.any():
                high |= (norm > rms_factor * np.median(norm[good])) & (rms > min_rms_ns)
        if rms_limit_ns is not None:
            high |= rms > rms_limit_ns
        flag = np.where(enough & high, "high_rms", flag)
    out["flag"] = flag
    out = out.sort_values(["mid_time", "sat", "signal"], kind="stable").reset_index(drop=True)
    out.attrs.update(attrs)
    return out


# ---------------------------------------------------------------- public

def fit_tracks(meas_df: pd.DataFrame, schedule=None, *, length_s: float = TRACK_LENGTH_S,
               min_points: int | None = None, min_fraction: float = MIN_FRACTION,
               rms_factor: float | None = 3.0, rms_limit_ns: float | None = None,
               steps_ns=None) -> pd.DataFrame:
    """Fit every satellite's values inside each standard track; one row per track × satellite.

    ``steps_ns``: the station clock's millisecond resets per row (None: detected
    from ``clock_ns`` with :func:`clock_steps_ns`; 0 or False: none); a track
    across a reset is fitted without it and reported with the step in force at
    its midpoint.

    ``schedule``: track starts as UTC int64 ns (default: :func:`schedule_for_times`
    of the data). The points with ``start ≤ time < start + length_s`` (GPS time
    of the point compared with the start converted to GPS) are fitted by a
    straight line in time from the track midpoint ``start + length_s/2``;
    ``value_ns`` is the line at the midpoint and ``slope_ps_s`` its slope.
    The midpoint uncertainty from the residuals is ``s·√(1/n + x̄²/Sxx)``, with
    s² = RSS/(n−2) (ordinary least squares); from ``sigma_ns`` it is
    ``√(Σ cᵢ² σᵢ²)`` where ``cᵢ = 1/n − x̄(xᵢ − x̄)/Sxx`` are the coefficients
    that give the midpoint value from the points.

    Flags (never silently dropped):

    * ``few_points``: fewer than ``min_points`` usable points (default
      ``ceil(min_fraction × length_s / sampling)``: 18 of 26 at 30 s; our
      choice, common practice).
    * ``high_rms``: the residual scatter, normalised by the noise model
      (÷ a-priori σ when every point has one, else × sin el), exceeds
      ``rms_factor`` × the day's median of that figure (and the raw residual
      standard deviation exceeds 0.01 ns, so rounding noise in exact data
      is never flagged); or the raw residual
      standard deviation exceeds ``rms_limit_ns`` when that is given.
    """
    _check(meas_df)
    t = meas_df["time"].to_numpy(np.int64)
    attrs = _attrs(meas_df, "track", length_s)
    if schedule is None:
        schedule = schedule_for_times(t)
    start_utc = np.sort(np.asarray(schedule, dtype=np.int64))
    if start_utc.size == 0 or t.size == 0:
        return _empty(attrs)
    start_gps = convert(start_utc, "UTC", "GPS")
    length_ns = int(round(length_s * NS_PER_S))
    if np.any(np.diff(start_gps) < length_ns):
        raise ProcessingError("track schedule has overlapping tracks")
    mid_gps = start_gps + length_ns // 2
    k = np.searchsorted(start_gps, t, side="right") - 1
    kk = np.clip(k, 0, None)
    win = np.where((k >= 0) & (t < start_gps[kk] + length_ns), k, -1)
    if min_points is None:
        step = sampling_interval_s(t)
        nominal = length_s / step if np.isfinite(step) and step > 0 else 1.0
        min_points = int(math.ceil(min_fraction * math.floor(nominal + 1e-9) - 1e-9))
    steps = clock_steps_ns(meas_df) if steps_ns is None else (
        None if steps_ns is False else np.broadcast_to(np.asarray(steps_ns, dtype=float), t.shape))
    return _reduce(meas_df, win, start_utc, mid_gps, linear=True, min_points=min_points,
                   rms_factor=rms_factor, rms_limit_ns=rms_limit_ns, attrs=attrs, steps=steps)


def bin_epochs(meas_df: pd.DataFrame, bin_s: float | None = None, *, min_points: int | None = None,
               min_fraction: float = MIN_FRACTION, rms_factor: float | None = None,
               rms_limit_ns: float | None = None, steps_ns=None) -> pd.DataFrame:
    """Epoch mode: every epoch as it is (``bin_s=None``), or per-satellite means over bins.

    Single epochs: ``value_ns = clock_ns``, ``u_ns = sigma_ns``, the input flag
    kept, ``mid_time = time``. Bins: windows ``[k·bin_s, (k+1)·bin_s)`` on the
    GPS calendar count (aligned with GPS days when ``bin_s`` divides 86 400 s,
    so two stations' bins coincide); ``value_ns`` is the mean of the usable
    points, referred to the bin midpoint (a drift inside the bin biases it only
    if the points are unevenly spread); uncertainties ``s/√n`` (s with n−1 dof)
    and ``√(Σσᵢ²)/n``; ``few_points`` below ``min_points`` (default 2/3 of the
    nominal count, at least 1); ``high_rms`` only if ``rms_factor`` or
    ``rms_limit_ns`` is given. Millisecond clock resets (``steps_ns``) are
    handled in bins as in :func:`fit_tracks`.
    """
    _check(meas_df)
    t = meas_df["time"].to_numpy(np.int64)
    if bin_s is None:
        step = sampling_interval_s(t)
        attrs = _attrs(meas_df, "epoch", step if np.isfinite(step) else 0.0)
        if t.size == 0:
            return _empty(attrs)
        ok = meas_df["flag"].astype(str).to_numpy(dtype=object) == "ok"
        y = _col(meas_df, "clock_ns")
        sig = _col(meas_df, "sigma_ns")
        out = pd.DataFrame({
            "track_start_utc_ns": convert(t, "GPS", "UTC"),
            "mid_time": t,
            "sat": _str_col(meas_df, "sat", ""),
            "system": _str_col(meas_df, "system", lambda d: d["sat"].astype(str).str[0].to_numpy(dtype=object)),
            "signal": _str_col(meas_df, "signal", ""),
            "n_points": (ok & np.isfinite(y)).astype(np.int64),
            "n_flagged": (~ok).astype(np.int64),
            "value_ns": y,
            "u_ns": sig,
            "u_fit_ns": np.full(t.size, np.nan),
            "u_apriori_ns": sig,
            "slope_ps_s": np.full(t.size, np.nan),
            "rms_ns": np.full(t.size, np.nan),
            "elevation_deg": _col(meas_df, "elevation_deg"),
            "azimuth_deg": _col(meas_df, "azimuth_deg"),
            "troposphere_m": _col(meas_df, "troposphere_m"),
            "ionosphere_m": _col(meas_df, "ionosphere_m"),
        })
        flag = meas_df["flag"].astype(str).to_numpy(dtype=object).copy()
        flag[(flag == "ok") & ~np.isfinite(y)] = "missing_value"
        out["flag"] = flag
        out = out.sort_values(["mid_time", "sat", "signal"], kind="stable").reset_index(drop=True)
        out.attrs.update(attrs)
        return out
    if not bin_s > 0:
        raise ProcessingError(f"bin length must be positive, got {bin_s!r} s")
    bin_ns = int(round(bin_s * NS_PER_S))
    attrs = _attrs(meas_df, "epoch", bin_s)
    if t.size == 0:
        return _empty(attrs)
    k = np.floor_divide(t, bin_ns)
    k0 = k.min()
    win = (k - k0).astype(np.int64)
    nwin = int(win.max()) + 1
    start_gps = (k0 + np.arange(nwin, dtype=np.int64)) * bin_ns
    start_utc = convert(start_gps, "GPS", "UTC")
    mid_gps = start_gps + bin_ns // 2
    if min_points is None:
        step = sampling_interval_s(t)
        nominal = bin_s / step if np.isfinite(step) and step > 0 else 1.0
        min_points = max(1, int(math.ceil(min_fraction * math.floor(nominal + 1e-9) - 1e-9)))
    steps = clock_steps_ns(meas_df) if steps_ns is None else (
        None if steps_ns is False else np.broadcast_to(np.asarray(steps_ns, dtype=float), t.shape))
    return _reduce(meas_df, win, start_utc, mid_gps, linear=False, min_points=min_points,
                   rms_factor=rms_factor, rms_limit_ns=rms_limit_ns, attrs=attrs, steps=steps)


__all__ = [
    "TRACK_LENGTH_S", "TRACK_SPACING_S", "REFERENCE_MJD", "REFERENCE_FIRST_START_S", "DAILY_SHIFT_S",
    "MIN_FRACTION", "OUTPUT_COLUMNS", "first_track_start_s", "track_schedule", "schedule_for_times",
    "sampling_interval_s", "fit_tracks", "bin_epochs", "clock_steps_ns",
]
