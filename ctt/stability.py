"""Stability, drift and change diagnostics of a clock-offset (phase) series.

Small pure functions in the style of allantools: ``(data, rate, data_type,
taus)`` in, plain arrays and dataclasses out. Phase data are time offsets in
**seconds** (a series in ns is multiplied by 1e-9 first), so ADEV, MDEV and
HDEV are dimensionless fractional frequency and TDEV is in seconds.

Estimators (NIST SP 1065, Riley 2008)
-------------------------------------
``adev`` non-overlapping Allan (eq. 7), ``oadev`` overlapping Allan (eq. 11),
``mdev`` modified Allan (eq. 14), ``tdev`` time deviation (eq. 15),
``hdev`` non-overlapping and ``ohdev`` overlapping Hadamard (eqs. 18, 20).
The default τ list is octave spaced, m = 1, 2, 4, ... up to a third of the
span ((N−1)·τ0/3), the last τ at which the estimators still average several
differences.

Gaps. The series is put on its regular grid with NaN where a sample is
missing (:func:`to_grid`); nothing is interpolated. allantools' estimators
propagate NaN: a single NaN makes the whole deviation NaN at every τ (checked
in ``tests/test_stability.py``). So gap-free data go to allantools, and data
with NaN go to the vectorised estimators here, which use the same formulas
but keep only the difference terms whose samples are all present and divide
by the number of such terms. MDEV (and TDEV) average the phase over windows of
m samples; requiring all 3m samples of a term would leave no term at long τ
once a few scattered samples are missing, so a window mean is formed from the
samples present when at most ``MDEV_MAX_MISSING`` (10 %) of them are missing,
and the term is skipped otherwise. That is not interpolation, but for noise
other than white PM the mean of a partly filled window is a slightly different
average, so MDEV with gaps is an approximation. On gap-free data both paths
agree to rounding (tested). With gaps, EDF is computed for the number of
samples present, also an approximation.

Confidence intervals. EDF by Greenhall & Riley's algorithm
(``allantools.edf_greenhall``, SP 1065 §5.3) with the noise type found at
each τ, then chi-square intervals (``allantools.confidence_interval``,
SP 1065 eq. 45), 1σ (68.3 %) by default. TDEV uses the EDF of MDEV (TDEV is
MDEV scaled by τ/√3, SP 1065 §5.2.6), HDEV/OHDEV use d = 3 in the same
algorithm. Where the EDF algorithm has no case (white PM, unmodified
variance, very few terms) the simple SP 1065 §5.3.3 estimate
``allantools.edf_simple`` is used instead.

Noise identification. Lag-1 autocorrelation method of Riley & Greenhall
(2004, "Power law noise identification using the lag 1 autocorrelation",
18th EFTF): phase data decimated by m to τ (frequency data averaged over m),
quadratic (phase) or linear (frequency) trend removed, then differenced until
δ = r1/(1+r1) < 0.25 (at most dmax = 2 times for Allan-type, 3 for Hadamard);
α = −2(δ+d) (+2 for phase data). allantools has the same algorithm
(``autocorr_noise_id``), but its lag-1 ACF is a Python loop over samples
(minutes on a year of 30 s data) and it raises for fewer than 30 points, so
the vectorised version here is used; it agrees with allantools' (tested).
Below 30 decimated points the τ inherits the identification of the
largest τ that had enough points (``noise_tau_s`` says which);
:func:`noise_labels` gives the labels that may be shown beside a curve (only
where identified at that τ and consistent with the curve's slope).

Changes. :func:`detect_changes` searches for change points and estimates each
change once, at the logged epoch when the change is in a station log
(:func:`estimate_step`: offset and slope on each side, window chosen from the
series' noise); the drift model (:func:`fit_drift` with ``fixed_steps``), the
reports and the daily value use that one estimate.

The daily value. :func:`daily_value` is the one definition of a day's clock
A − clock B (:data:`DAILY_VALUE_DEFINITION`): epoch = weighted centre of the
day's ok points; estimator = the day's drift model (offset + frequency,
steps held at their one estimate) evaluated there, the weighted mean when
there is no step; type A = the time-transfer link's white + flicker phase
noise (:func:`link_noise`, fitted to the TDEV at short τ) propagated to the
day, plus the step estimates' leverage; type B = the budget's items; the
clocks' wander is reported as stability, not in the uncertainty.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, asdict

import allantools
import numpy as np

ONE_SIGMA_CI = 0.6826894921370859  # erf(1/sqrt(2)), common practice

#: Integer α (S_y(f) ∝ f^α) to noise name (SP 1065 power-law noise table).
NOISE_NAMES = {2: "white PM", 1: "flicker PM", 0: "white FM", -1: "flicker FM", -2: "random walk FM"}

_KINDS = ("adev", "oadev", "mdev", "tdev", "hdev", "ohdev")
#: MDEV/TDEV with gaps: largest fraction of a window's m samples that may be missing
#: for the window's phase mean to be formed from the samples present.
MDEV_MAX_MISSING = 0.1
_MIN_NOISE_ID_POINTS = 30  # Riley & Greenhall (2004): ≳30 points after decimation


# ------------------------------------------------------------------ results

@dataclass
class Deviation:
    """One deviation at a list of τ, with confidence intervals and noise type.

    ``dev``, ``ci_low``, ``ci_high`` are in the estimator's own unit
    (dimensionless for ADEV/MDEV/HDEV, seconds for TDEV). ``alpha`` is the
    α estimate (float) from the lag-1 ACF, ``alpha_int`` the integer used for
    EDF, ``noise`` its name. ``n`` is the number of difference terms averaged.
    Names cover the five Allan-range types; Hadamard estimators can identify
    α = −3, −4 (flicker walk, random run FM), kept in ``alpha_int`` and named
    'random walk FM'.
    """

    kind: str
    tau_s: np.ndarray
    dev: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    edf: np.ndarray
    n: np.ndarray
    alpha: np.ndarray
    alpha_int: np.ndarray
    noise: list
    noise_tau_s: np.ndarray
    ci: float = ONE_SIGMA_CI

    def records(self, scale: float = 1.0) -> list[dict]:
        """Rows ``{tau_s, dev, ci_low, ci_high, edf, noise, alpha, n}``; ``scale`` multiplies the devs."""
        out = []
        for i in range(len(self.tau_s)):
            out.append({
                "tau_s": float(self.tau_s[i]),
                "dev": _f(self.dev[i] * scale),
                "ci_low": _f(self.ci_low[i] * scale),
                "ci_high": _f(self.ci_high[i] * scale),
                "edf": _f(self.edf[i]),
                "noise": self.noise[i],
                "alpha": _f(self.alpha[i]),
                "n": int(self.n[i]),
            })
        return out


def _f(v):
    v = float(v)
    return v if math.isfinite(v) else None


# ------------------------------------------------------------------ τ lists and input

def octave_taus(n_phase: int, tau0_s: float, max_fraction: float = 1.0 / 3.0) -> np.ndarray:
    """Octave τ list m = 1, 2, 4, ... with m·τ0 ≤ ``max_fraction`` of the span (N−1)·τ0."""
    m_max = max(1, int(math.floor((n_phase - 1) * max_fraction + 1e-9)))
    ms = 2 ** np.arange(int(math.floor(math.log2(m_max))) + 1)
    return ms.astype(float) * tau0_s


def _to_phase(data, rate, data_type):
    data = np.asarray(data, dtype=float)
    if data_type == "phase":
        return data
    if data_type == "freq":
        if np.isnan(data).any():
            raise ValueError("frequency data with gaps cannot be integrated to phase without "
                             "inventing values; give phase data (NaN gaps are handled there)")
        return allantools.frequency2phase(data, rate)
    raise ValueError(f"data_type must be 'phase' or 'freq', not {data_type!r}")


def _ms(taus, rate, n_phase):
    taus = np.atleast_1d(np.asarray(taus, dtype=float))
    m = np.unique(np.round(taus * rate).astype(np.int64))
    return m[(m >= 1) & (m < n_phase)]


# ------------------------------------------------------------------ gap-aware estimators

def _nan_dev(x, m, kind):
    """Variance estimate skipping every difference term that touches a NaN; (dev, n_terms)."""
    if kind in ("adev", "oadev"):
        d = x[2 * m:] - 2 * x[m:-m] + x[:-2 * m]
        if kind == "adev":
            d = d[::m]
        ok = ~np.isnan(d)
        n = int(ok.sum())
        return (math.sqrt(np.sum(d[ok] ** 2) / (2.0 * n)) / m if n else math.nan), n
    if kind in ("hdev", "ohdev"):
        d = x[3 * m:] - 3 * x[2 * m:-m] + 3 * x[m:-2 * m] - x[:-3 * m]
        if kind == "hdev":
            d = d[::m]
        ok = ~np.isnan(d)
        n = int(ok.sum())
        return (math.sqrt(np.sum(d[ok] ** 2) / (6.0 * n)) / m if n else math.nan), n
    if kind == "mdev":
        # phase means over windows of m samples; a window with up to MDEV_MAX_MISSING of
        # its samples missing averages the ones present (see module docstring)
        ok = ~np.isnan(x)
        c = np.concatenate(([0.0], np.cumsum(np.where(ok, x, 0.0))))
        k = np.concatenate(([0], np.cumsum(ok)))
        cnt = k[m:] - k[:-m]
        with np.errstate(invalid="ignore", divide="ignore"):
            xm = np.where(cnt >= (1.0 - MDEV_MAX_MISSING) * m - 1e-9, (c[m:] - c[:-m]) / cnt, np.nan)
        xm[cnt == 0] = np.nan
        d = xm[2 * m:] - 2 * xm[m:-m] + xm[:-2 * m]       # length N-3m+1
        good = ~np.isnan(d)
        n = int(good.sum())
        return (math.sqrt(np.sum(d[good] ** 2) / (2.0 * m ** 2 * n)) if n else math.nan), n
    raise ValueError(kind)


def _raw(kind, x, rate, m):
    """Deviation values and term counts for integer factors m (phase x in s)."""
    base = "mdev" if kind == "tdev" else kind
    taus = m / rate
    out_d = np.full(len(m), np.nan)
    out_n = np.zeros(len(m), dtype=np.int64)
    if not np.isnan(x).any():
        fn = getattr(allantools, base)
        try:
            t, dev, _, n = fn(x, rate=rate, data_type="phase", taus=taus)
        except UserWarning:  # allantools raises it when no τ has more than one term
            t, dev, n = np.zeros(0), np.zeros(0), np.zeros(0, dtype=np.int64)
        # allantools drops τ with a single term (or none); map back onto our list
        idx = np.searchsorted(taus, t)
        out_d[idx] = dev
        out_n[idx] = n
    else:
        for i, mi in enumerate(m):
            d_i, n_i = _nan_dev(x, int(mi), base)
            if n_i > 1:  # a single term is no estimate, as in allantools (above)
                out_d[i], out_n[i] = d_i * rate, n_i  # per-τ0 units -> per second
    if kind == "tdev":
        out_d = out_d * taus / math.sqrt(3.0)
    return out_d, out_n


# ------------------------------------------------------------------ noise identification

def lag1_acf(z) -> float:
    """Lag-1 autocorrelation r1 (Riley & Greenhall 2004, eq. 2), vectorised."""
    z = np.asarray(z, dtype=float)
    z = z - z.mean()
    den = np.dot(z, z)
    return float(np.dot(z[:-1], z[1:]) / den) if den > 0 else 0.0


def _detrend(z, deg):
    t = np.linspace(-1.0, 1.0, len(z))
    coef = np.polynomial.polynomial.polyfit(t, z, deg)
    return z - np.polynomial.polynomial.polyval(t, coef)


def noise_id(data, m: int, data_type: str = "phase", dmin: int = 0, dmax: int = 2):
    """Lag-1 ACF power-law noise identification at averaging factor ``m``.

    Returns ``(alpha_int, alpha, d)`` or ``None`` when fewer than 30 points
    remain after decimation (or averaging). NaN samples are dropped after
    decimation (gaps shorten the series; nothing is interpolated).
    """
    z = np.asarray(data, dtype=float)
    if data_type == "phase":
        z = z[::m]
        z = z[~np.isnan(z)]
        if len(z) < _MIN_NOISE_ID_POINTS:
            return None
        z = _detrend(z, 2)
        add = 2
    elif data_type == "freq":
        k = len(z) // m
        z = z[:k * m].reshape(k, m).mean(axis=1)
        z = z[~np.isnan(z)]
        if len(z) < _MIN_NOISE_ID_POINTS:
            return None
        z = _detrend(z, 1)
        add = 0
    else:
        raise ValueError(f"data_type must be 'phase' or 'freq', not {data_type!r}")
    d = 0
    while True:
        r1 = lag1_acf(z)
        delta = r1 / (1.0 + r1)
        if d >= dmin and (delta < 0.25 or d >= dmax):
            alpha = -2.0 * (delta + d) + add
            return int(round(alpha)), alpha, d
        z = np.diff(z)
        d += 1


def b1_rn_noise_id(x, m: int):
    """Noise type from the B1 and R(n) ratios (SP 1065 §5.5: Barnes' B1 bias function, and
    R(n) = MVAR/AVAR for white vs flicker PM), with allantools' theory boundaries
    (``allantools.ci.b1_boundary``, ``rn_boundary``). Returns the integer α or ``None``
    (fewer than 30 averages, or PM at m < 4 where R(n) cannot separate the two)."""
    from allantools import ci as _ci
    k = (len(x) - 1) // m
    yb = np.diff(x[:k * m + 1:m])                       # frequency averaged over τ (times τ)
    dy = np.diff(yb)
    yb, dy = yb[np.isfinite(yb)], dy[np.isfinite(dy)]
    nn = len(yb)
    if nn < _MIN_NOISE_ID_POINTS or not np.any(dy):
        return None
    b1 = np.var(yb, ddof=1) / (0.5 * np.mean(dy ** 2))
    if b1 > _ci.b1_boundary(-3, nn):
        return -2
    if b1 > _ci.b1_boundary(-2, nn):
        return -1
    if b1 > _ci.b1_boundary(-1, nn):
        return 0
    if m < 4:
        return None
    rn = (_nan_dev(x, m, "mdev")[0] / _nan_dev(x, m, "oadev")[0]) ** 2
    return 1 if rn > _ci.rn_boundary(m, 0) else 2


def _noise_ids(x, m, dmax):
    """Noise type at every m: ``(alpha_int, alpha, src_m)``.

    ``alpha`` is the lag-1 ACF estimate (Riley & Greenhall 2004). Its integer
    is used when the estimate is within 0.25 of an integer. Farther from an
    integer the estimate is ambiguous: decimated flicker PM drifts towards
    white PM (the flicker spectrum above the new Nyquist frequency aliases
    into the band), and flicker FM and random-walk FM averaged over τ ≫ τ0
    read about 0.4 low (seen on Kasdin-generated series in the tests); then the
    B1/R(n) identification of SP 1065 §5.5 decides (:func:`b1_rn_noise_id`).
    Too-short decimations inherit the largest usable τ's result.
    """
    a_int = np.zeros(len(m), dtype=np.int64)
    a = np.full(len(m), np.nan)
    src = np.zeros(len(m), dtype=np.int64)
    last = None
    for i, mi in enumerate(m):
        r = noise_id(x, int(mi), "phase", 0, dmax)
        if r is not None:
            ai = int(round(r[1]))
            if abs(r[1] - ai) > 0.25:
                alt = b1_rn_noise_id(x, int(mi))
                if alt is not None:
                    ai = alt
            last = (ai, r[1], mi)
        if last is None:  # not even m=1 usable (fewer than 30 samples): assume white FM
            last = (0, math.nan, mi)
        a_int[i], a[i], src[i] = last
    lo = -2 if dmax <= 2 else -4
    return np.clip(a_int, lo, 2), a, src


# ------------------------------------------------------------------ EDF

def _edf(kind, alpha, m, n_phase):
    d = 3 if kind in ("hdev", "ohdev") else 2
    overlapping = kind in ("oadev", "mdev", "tdev", "ohdev")
    modified = kind in ("mdev", "tdev")
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            e = float(allantools.edf_greenhall(alpha=int(alpha), d=d, m=int(m), N=int(n_phase),
                                               overlapping=overlapping, modified=modified))
    except (NotImplementedError, AssertionError, ZeroDivisionError, ValueError):
        e = float(allantools.edf_simple(int(n_phase), int(m), int(max(-2, alpha))))
    return e


# ------------------------------------------------------------------ public estimators

def deviation(kind: str, data, rate: float = 1.0, data_type: str = "phase", taus=None,
              ci: float = ONE_SIGMA_CI, noise=None) -> Deviation:
    """Deviation ``kind`` (adev, oadev, mdev, tdev, hdev, ohdev) with CIs and noise type.

    ``taus`` defaults to :func:`octave_taus`. ``noise`` may pass a previously
    computed ``(alpha_int, alpha, src_m)`` triple for these τ (to share the
    identification between estimators).
    """
    if kind not in _KINDS:
        raise ValueError(f"kind must be one of {_KINDS}, not {kind!r}")
    x = _to_phase(data, rate, data_type)
    n_phase = int(np.count_nonzero(~np.isnan(x)))
    if taus is None:
        taus = octave_taus(len(x), 1.0 / rate)
    m = _ms(taus, rate, len(x))
    dev, n = _raw(kind, x, rate, m)
    if noise is None:
        noise = _noise_ids(x, m, 3 if kind in ("hdev", "ohdev") else 2)
    a_int, a, src = noise
    edf = np.array([_edf(kind, a_int[i], m[i], n_phase) if n[i] > 0 else np.nan for i in range(len(m))])
    lo = np.full(len(m), np.nan)
    hi = np.full(len(m), np.nan)
    for i in range(len(m)):
        if np.isfinite(dev[i]) and np.isfinite(edf[i]) and edf[i] > 0:
            lo[i], hi[i] = allantools.confidence_interval(dev[i], edf[i], ci)
    names = [NOISE_NAMES[int(max(-2, v))] for v in a_int]
    return Deviation(kind, m / rate, dev, lo, hi, edf, n, a, a_int, names, src / rate, ci)


def expected_slope(kind: str, alpha_int: int) -> float:
    """Log-log slope of a deviation for power-law noise α (SP 1065 noise table): σ ∝ τ^μ/2 with
    μ = −α − 1, except ADEV/HDEV of white PM (−1, like flicker PM); TDEV one more than MDEV."""
    mu2 = (-alpha_int - 1) / 2.0
    if kind in ("adev", "oadev", "hdev", "ohdev"):
        return max(mu2, -1.0)
    if kind == "tdev":
        return mu2 + 1.0
    return mu2


def noise_labels(dev: "Deviation", tolerance: float = 0.5) -> list:
    """Noise-type label per τ that can be shown beside ``dev``, or None.

    A label is given only where the lag-1 ACF identification was made at that
    very τ (not inherited from a shorter τ because too few points were left),
    and only when the deviation's own log-log slope there (from its neighbours)
    is within ``tolerance`` (one noise type) of the slope that noise type gives
    for this estimator (:func:`expected_slope`): a label never contradicts the
    plotted curve. Text: "<noise> (lag-1 ACF)".
    """
    tau = np.asarray(dev.tau_s, dtype=float)
    d = np.asarray(dev.dev, dtype=float)
    lt, ld = np.log(tau), np.where(np.isfinite(d) & (d > 0), np.log(np.where(d > 0, d, 1.0)), np.nan)
    out = []
    for i in range(len(tau)):
        if not np.isfinite(ld[i]) or not np.isclose(dev.noise_tau_s[i], tau[i]):
            out.append(None)
            continue
        sl = []
        for j in (i - 1, i + 1):
            if 0 <= j < len(tau) and np.isfinite(ld[j]):
                sl.append((ld[j] - ld[i]) / (lt[j] - lt[i]))
        exp = expected_slope(dev.kind, int(max(-2, dev.alpha_int[i])))
        if sl and abs(float(np.mean(sl)) - exp) > tolerance:
            out.append(None)
            continue
        out.append(f"{dev.noise[i]} (lag-1 ACF)")
    return out


def adev(data, rate=1.0, data_type="phase", taus=None, ci=ONE_SIGMA_CI):
    """Non-overlapping Allan deviation (SP 1065 eq. 7) with CIs."""
    return deviation("adev", data, rate, data_type, taus, ci)


def oadev(data, rate=1.0, data_type="phase", taus=None, ci=ONE_SIGMA_CI):
    """Overlapping Allan deviation (SP 1065 eq. 11) with CIs."""
    return deviation("oadev", data, rate, data_type, taus, ci)


def mdev(data, rate=1.0, data_type="phase", taus=None, ci=ONE_SIGMA_CI):
    """Modified Allan deviation (SP 1065 eq. 14) with CIs."""
    return deviation("mdev", data, rate, data_type, taus, ci)


def tdev(data, rate=1.0, data_type="phase", taus=None, ci=ONE_SIGMA_CI):
    """Time deviation (SP 1065 eq. 15) in the unit of the phase data, with CIs (EDF of MDEV)."""
    return deviation("tdev", data, rate, data_type, taus, ci)


def hdev(data, rate=1.0, data_type="phase", taus=None, ci=ONE_SIGMA_CI):
    """Non-overlapping Hadamard deviation (SP 1065 eq. 18) with CIs."""
    return deviation("hdev", data, rate, data_type, taus, ci)


def ohdev(data, rate=1.0, data_type="phase", taus=None, ci=ONE_SIGMA_CI):
    """Overlapping Hadamard deviation (SP 1065 eq. 20) with CIs."""
    return deviation("ohdev", data, rate, data_type, taus, ci)


def stability_set(x_s, rate, taus=None, kinds=("oadev", "mdev", "tdev", "ohdev"), ci=ONE_SIGMA_CI):
    """Several deviations of one phase series (s), sharing the noise identification.

    Allan-type estimators share the dmax = 2 identification, Hadamard ones
    the dmax = 3 one. Returns ``{kind: Deviation}``.
    """
    x = np.asarray(x_s, dtype=float)
    if taus is None:
        taus = octave_taus(len(x), 1.0 / rate)
    m = _ms(taus, rate, len(x))
    ids = {}
    out = {}
    for k in kinds:
        dmax = 3 if k in ("hdev", "ohdev") else 2
        if dmax not in ids:
            ids[dmax] = _noise_ids(x, m, dmax)
        if k == "tdev" and "mdev" in out:
            # TDEV = τ·MDEV/√3 (SP 1065 eq. 15) with the MDEV EDF: no second MDEV pass
            md = out["mdev"]
            f = md.tau_s / math.sqrt(3.0)
            out[k] = Deviation("tdev", md.tau_s, md.dev * f, md.ci_low * f, md.ci_high * f, md.edf, md.n,
                               md.alpha, md.alpha_int, list(md.noise), md.noise_tau_s, md.ci)
            continue
        out[k] = deviation(k, x, rate, "phase", m / rate, ci, noise=ids[dmax])
    return out


# ------------------------------------------------------------------ regular grid

@dataclass
class Grid:
    """A series on its regular grid: ``time_ns`` (int64), ``value`` with NaN in gaps.

    ``n_snapped`` samples were moved to their nearest grid instant, by at most
    ``max_shift_s``; ``n_dropped`` fell on an instant already taken (see :func:`to_grid`).
    """

    time_ns: np.ndarray
    value: np.ndarray
    tau0_s: float
    u: np.ndarray | None = None
    n_missing: int = 0
    n_snapped: int = 0
    max_shift_s: float = 0.0
    n_dropped: int = 0

    def info(self) -> dict:
        return {"tau0_s": self.tau0_s, "n_missing": self.n_missing, "n_snapped": self.n_snapped,
                "max_shift_s": self.max_shift_s, "n_dropped": self.n_dropped}


def to_grid(time_ns, value, u=None, tau0_s: float | None = None, tolerance: float = 0.01,
            snap: bool = False) -> Grid:
    """Place samples on the regular grid t0 + k·τ0, NaN where missing (no interpolation).

    τ0 defaults to the most common spacing. Raises ``ValueError`` for
    duplicate instants or samples more than ``tolerance``·τ0 off the grid,
    unless ``snap``: then every sample goes to its nearest grid instant (the
    first one wins where two land on the same instant; the others are counted
    in ``n_dropped``). Snapping is for schedules that drift against a fixed
    grid, e.g. common-view tracks that start 4 min earlier each day: the value
    is kept, only its epoch moves, by at most τ0/2, which changes the phase by
    |y|·shift (y the fractional frequency offset: 1e-13 × 8 min = 0.05 ns).
    """
    t = np.asarray(time_ns, dtype=np.int64)
    v = np.asarray(value, dtype=float)
    if len(t) < 2:
        raise ValueError("need at least two samples")
    order = np.argsort(t, kind="stable")
    t, v = t[order], v[order]
    uu = None if u is None else np.asarray(u, dtype=float)[order]
    dt = np.diff(t)
    if np.any(dt == 0):
        i = int(np.nonzero(dt == 0)[0][0])
        raise ValueError(f"duplicate instant at sorted row {i + 1}")
    if tau0_s is None:
        vals, counts = np.unique(dt, return_counts=True)
        step = int(vals[np.argmax(counts)])
    else:
        step = int(round(tau0_s * 1e9))
    # nearest grid instant, halves rounded up (integer arithmetic): a schedule shifted
    # by exactly τ0/2 then maps monotonically, without two samples on one instant
    k = (t - t[0] + step // 2) // step
    off = np.abs((t - t[0]) - k * step)
    bad = off > tolerance * step
    if np.any(bad) and not snap:
        i = int(np.nonzero(bad)[0][0])
        raise ValueError(f"sample {i + 1} is {off[i] / 1e9:g} s off the regular {step / 1e9:g} s grid")
    first = np.ones(len(k), bool)
    first[1:] = k[1:] != k[:-1]          # k is non-decreasing: keep the first sample per instant
    n_dropped = int((~first).sum())
    k, v = k[first], v[first]
    uu = None if uu is None else uu[first]
    n = int(k[-1]) + 1
    gv = np.full(n, np.nan)
    gv[k] = v
    gu = None
    if uu is not None:
        gu = np.full(n, np.nan)
        gu[k] = uu
    gt = t[0] + np.arange(n, dtype=np.int64) * step
    return Grid(gt, gv, step / 1e9, gu, int(n - np.count_nonzero(~np.isnan(gv))),
                int(bad.sum()), float(off.max() / 1e9) if bad.any() else 0.0, n_dropped)


def grid_series(time_ns, value, u=None) -> Grid:
    """:func:`to_grid`, snapping only when the samples are not on one grid (see there)."""
    try:
        return to_grid(time_ns, value, u)
    except ValueError as exc:
        if "off the regular" not in str(exc):
            raise
        return to_grid(time_ns, value, u, snap=True)


# ------------------------------------------------------------------ drift fit

@dataclass
class Param:
    value: float
    u: float
    u_ar1: float

    def as_dict(self):
        return {"value": _f(self.value), "u": _f(self.u), "u_ar1": _f(self.u_ar1)}


@dataclass
class DriftFit:
    """x(t) = a + y·t + ½·D·t² (+ Σ s_k·H(t − t_k)) fitted to a phase series in ns.

    ``t_ref_ns`` is the epoch t = 0 (the weighted mean epoch of the data).
    ``offset_ns`` is a at t_ref, ``frequency`` y dimensionless, ``drift_per_day``
    D·86400 s (fractional frequency change per day), ``steps_ns`` one Param per
    known epoch. ``u`` is the formal uncertainty: (AᵀWA)⁻¹ scaled by the
    reduced chi-square χ²/ν (so it is right when the weights are right only
    up to a common factor); it assumes white residuals. ``u_ar1`` inflates it
    by √((1+r1)/(1−r1)), r1 the lag-1 autocorrelation of the residuals (the
    variance factor of the mean of an AR(1) process; an approximation that
    helps for short-memory noise and still understates flicker or random-walk
    noise). ``residual_ns`` are data − model on the input samples.
    """

    t_ref_ns: int
    offset_ns: Param
    frequency: Param
    drift_per_day: Param
    steps_ns: list
    step_epochs_ns: list
    chi2_red: float
    dof: int
    r1: float
    residual_ns: np.ndarray
    model_ns: np.ndarray
    fixed_steps: int = 0   #: the last ``fixed_steps`` entries of steps_ns were estimated locally, not fitted

    def as_dict(self):
        return {"fixed_steps": self.fixed_steps,
                "steps_note": ("steps: the one local estimate of each phase step (ctt.stability."
                               "estimate_step), held fixed in this fit") if self.fixed_steps else "",
            "offset_ns": self.offset_ns.as_dict(), "frequency": self.frequency.as_dict(),
            "drift_per_day": self.drift_per_day.as_dict(),
            "steps_ns": [p.as_dict() for p in self.steps_ns],
            "chi2_red": _f(self.chi2_red), "dof": self.dof, "lag1_acf": _f(self.r1),
            "note": "u: formal, from weights scaled by reduced chi-square (white residuals assumed); "
                    "u_ar1: inflated by sqrt((1+r1)/(1-r1)), r1 = lag-1 autocorrelation of residuals",
        }


def fit_drift(time_ns, offset_ns, u_ns=None, step_epochs_ns=(), quadratic: bool = True,
              fixed_steps=()) -> DriftFit:
    """Weighted least-squares fit of phase + frequency (+ drift) (+ steps at known epochs).

    NaN samples are ignored. ``u_ns`` (standard uncertainties) give weights
    1/u²; without them all weights are equal and the scale comes from the
    residuals alone. ``fixed_steps`` are ``(epoch_ns, Param)`` steps already
    estimated elsewhere (:func:`estimate_step`, the one estimate of each
    change): they are subtracted before the fit, put back into the model, and
    listed after the fitted steps in ``steps_ns`` with their own u
    (``fixed_steps`` in the result counts them).
    """
    t = np.asarray(time_ns, dtype=np.int64)
    x = np.asarray(offset_ns, dtype=float)
    fixed = [(int(te), p) for te, p in fixed_steps]
    fixed_part = np.zeros(len(t))
    for te, p in fixed:
        fixed_part += p.value * (t >= te)
    x = x - fixed_part
    w = np.ones_like(x) if u_ns is None else 1.0 / np.asarray(u_ns, dtype=float) ** 2
    ok = np.isfinite(x) & np.isfinite(w) & (w > 0)
    t_all = t
    t, x, w = t[ok], x[ok], w[ok]
    steps = [int(s) for s in step_epochs_ns]
    npar = 2 + int(quadratic) + len(steps)
    if len(x) <= npar:
        raise ValueError(f"need more than {npar} samples for the fit, have {len(x)}")
    t_ref = int(t[0] + int(np.round(np.sum(w * (t - t[0]) / 1e9) / np.sum(w) * 1e9)))

    def design(tt):
        ts = (tt - t_ref) / 1e9
        cols = [np.ones_like(ts), ts]
        if quadratic:
            cols.append(0.5 * ts ** 2)
        for s in steps:
            cols.append((tt >= s).astype(float))
        return np.column_stack(cols)

    A = design(t)
    sw = np.sqrt(w)
    Aw = A * sw[:, None]
    # scale columns for conditioning
    sc = np.sqrt(np.sum(Aw ** 2, axis=0))
    sc[sc == 0] = 1.0
    Q, R = np.linalg.qr(Aw / sc)
    coef = np.linalg.solve(R, Q.T @ (x * sw)) / sc
    Rinv = np.linalg.inv(R)
    cov = (Rinv @ Rinv.T) / np.outer(sc, sc)
    model = A @ coef
    res = x - model
    dof = len(x) - npar
    chi2_red = float(np.sum(w * res ** 2) / dof)
    cov = cov * chi2_red
    r1 = lag1_acf(res) if len(res) > 2 else 0.0
    infl = math.sqrt((1 + r1) / (1 - r1)) if 0 < r1 < 1 else 1.0
    sd = np.sqrt(np.diag(cov))
    res_all = np.full(len(t_all), np.nan)
    res_all[ok] = res
    mod_all = design(t_all) @ coef + fixed_part

    def p(i, scale=1.0):
        return Param(coef[i] * scale, sd[i] * abs(scale), sd[i] * abs(scale) * infl)

    off = p(0)
    freq = p(1, 1e-9)                                 # ns/s -> dimensionless
    drift = p(2, 1e-9 * 86400.0) if quadratic else Param(0.0, 0.0, 0.0)
    k0 = 2 + int(quadratic)
    return DriftFit(t_ref, off, freq, drift, [p(k0 + i) for i in range(len(steps))] + [q for _, q in fixed],
                    steps + [te for te, _ in fixed], chi2_red, dof, r1, res_all, mod_all, len(fixed))


# ------------------------------------------------------------------ change detection

@dataclass
class Change:
    """A detected change: ``kind`` 'phase step' (size in ns) or 'frequency change'
    (size dimensionless), with its 1σ uncertainty, and its match in the hardware
    change log (``expected`` True/False).

    ``time_ns`` is the epoch the size refers to: the logged epoch for a change
    matched to the log, else the epoch the search gave (``found_time_ns``). The
    size is the one estimate of :func:`estimate_step` at that epoch (``window_s``
    each side, ``n_before``/``n_after`` samples). ``agrees_with_log`` says whether
    a phase step agrees with the log's expected size within 2σ (``z_log`` =
    (size − expected)/u); None when the log gives no size."""

    time_ns: int
    kind: str
    size: float
    u_size: float
    expected: bool
    what: str | None = None
    expected_ns: float | None = None
    log_time_ns: int | None = None
    significance: float = 0.0
    found_time_ns: int | None = None
    window_s: float | None = None
    n_before: int = 0
    n_after: int = 0
    z_log: float | None = None
    agrees_with_log: bool | None = None

    def as_dict(self, to_iso=None):
        d = asdict(self)
        if to_iso is not None:
            d["time_utc"] = to_iso(self.time_ns)
            if self.log_time_ns is not None:
                d["log_time_utc"] = to_iso(self.log_time_ns)
            if self.found_time_ns is not None:
                d["found_time_utc"] = to_iso(self.found_time_ns)
        for k in ("size", "u_size", "expected_ns", "significance", "window_s", "z_log"):
            if d[k] is not None:
                d[k] = _f(d[k])
        return d


@dataclass
class ChangeReport:
    changes: list
    undetected_log: list = field(default_factory=list)   # log entries with the step fitted at their epoch
    sigma_white_ns: float = math.nan
    block: int = 1
    penalty_k: float = 3.0
    tolerance_s: float = 0.0


def robust_sigma_white(x) -> float:
    """White-noise σ from the median absolute deviation of first differences / √2.

    MAD·1.4826 is a robust σ of the differences (common practice); a
    difference of white noise has √2 times the σ of the samples. Steps and
    outliers barely move it.
    """
    d = np.diff(np.asarray(x, dtype=float))
    d = d[np.isfinite(d)]
    if len(d) == 0:
        return math.nan
    return float(1.4826 * np.median(np.abs(d - np.median(d))) / math.sqrt(2.0))


def _local_fit(ts, x, i_lo, i_b, i_hi):
    """Fit a + b·t + s·H + f·t·H on samples i_lo..i_hi-1 with the break at i_b (t relative to it)."""
    tt = ts[i_lo:i_hi] - ts[i_b]
    xx = x[i_lo:i_hi]
    ok = np.isfinite(xx)
    tt, xx = tt[ok], xx[ok]
    h = (tt >= 0).astype(float)
    n_before, n_after = int(np.sum(h == 0)), int(np.sum(h == 1))
    if n_before < 3 or n_after < 3:
        return None
    A = np.column_stack([np.ones_like(tt), tt, h, tt * h])
    scale = np.array([1.0, max(np.ptp(tt), 1.0), 1.0, max(np.ptp(tt), 1.0)])
    coef, *_ = np.linalg.lstsq(A / scale, xx, rcond=None)
    coef = coef / scale
    res = xx - A @ coef
    dof = len(xx) - 4
    if dof <= 0:
        return None
    s2 = float(np.sum(res ** 2) / dof)
    cov = np.linalg.pinv((A / scale).T @ (A / scale)) / np.outer(scale, scale) * s2
    r1 = lag1_acf(res)
    infl = (1 + r1) / (1 - r1) if 0 < r1 < 1 else 1.0
    sd = np.sqrt(np.diag(cov) * infl)
    return coef, sd


#: Candidate windows (samples each side) of :func:`estimate_step`: about √2 apart.
STEP_WINDOWS = (4, 5, 6, 8, 11, 16, 22, 32, 45, 64, 90, 128, 181)
#: Fewest window positions for the scan spread alone to give the step's uncertainty.
_MIN_SCAN_POSITIONS = 20


def _step_fit(rel, x, idx):
    """Least squares of a + b·t + s·H + f·t·H on samples ``idx`` (t = rel, H = t > 0): coef, sd."""
    tt, xx = rel[idx], x[idx]
    h = (tt > 0).astype(float)
    A = np.column_stack([np.ones_like(tt), tt, h, tt * h])
    scale = np.array([1.0, max(np.ptp(tt), 1.0), 1.0, max(np.ptp(tt), 1.0)])
    coef, *_ = np.linalg.lstsq(A / scale, xx, rcond=None)
    coef = coef / scale
    res = xx - A @ coef
    dof = len(xx) - 4
    s2 = float(np.sum(res ** 2) / dof) if dof > 0 else math.nan
    cov = np.linalg.pinv((A / scale).T @ (A / scale)) / np.outer(scale, scale) * s2
    r1 = lag1_acf(res) if dof > 0 else 0.0
    infl = (1 + r1) / (1 - r1) if 0 < r1 < 1 else 1.0
    return coef, np.sqrt(np.diag(cov) * infl)


def estimate_step(t_s, x, epoch_s, step_s, *, x_others_removed=None, lo_s=-math.inf, hi_s=math.inf,
                  max_window: int = 200, found_s=None) -> dict | None:
    """The one estimate of a change at a given epoch: local lines either side.

    Model, on the k samples before and the k samples after ``epoch_s`` (times
    ``t_s`` in s on one scale, samples ``x`` in ns, NaN dropped)::

        x(t) = a + b·(t − t_e) + s·H(t − t_e) + f·(t − t_e)·H(t − t_e)

    i.e. offset and slope on each side, so ``s`` is the phase step *at* t_e and
    ``f`` (ns/s) the change of slope. Samples within half a sampling
    interval ``step_s`` of t_e, bounds included, are left out (their averaging window, e.g. a
    13-minute track, may straddle the change), and so are samples beyond
    ``lo_s``/``hi_s`` (neighbouring changes). When the search put the change at
    ``found_s`` rather than at the logged ``epoch_s``, the samples between the
    two are ambiguous and left out too (the search's epoch itself is kept when it
    is after the logged one: it is the first sample of the new segment).

    Window. k is chosen from the series' own noise: for each candidate of
    :data:`STEP_WINDOWS` (up to ``max_window`` and a quarter of the series) the
    step is estimated, removed from the series (``x_others_removed``: the
    series with the other changes already removed; default ``x``), and the same
    estimator is slid over every position of what is left; the robust spread
    (1.4826·MAD) of its step values (:func:`_scan_null`) is what the estimator
    does under "no change" with this series' noise: short windows suffer from
    the measurement noise, long ones from the clocks' wander. The k with the
    smallest spread is used, and that spread is the step's standard
    uncertainty; with fewer than 20 positions the formal least-squares u
    (residual scatter, lag-1 inflated) is taken if it is larger. Returns
    ``None`` when fewer than 3 samples lie on a side, else ``{size_ns, u_ns,
    freq_change, u_freq_change, window, window_s, n_before, n_after,
    u_formal_ns, u_scan_ns}`` (``freq_change`` dimensionless).
    """
    t_s = np.asarray(t_s, dtype=float)
    x = np.asarray(x, dtype=float)
    xo = x if x_others_removed is None else np.asarray(x_others_removed, dtype=float)
    fin = np.isfinite(x)
    rel = t_s - epoch_s
    if found_s is not None and found_s > epoch_s:
        fin = fin & ~((t_s >= epoch_s) & (t_s < found_s))
    elif found_s is not None and found_s < epoch_s:
        fin = fin & ~((t_s >= found_s - 0.5 * step_s) & (t_s <= epoch_s))
    before = np.nonzero(fin & (rel < -0.5 * step_s) & (t_s >= lo_s))[0]
    after = np.nonzero(fin & (rel > 0.5 * step_s) & (t_s < hi_s))[0]
    if len(before) < 3 or len(after) < 3:
        return None
    n_fin = int(np.count_nonzero(np.isfinite(xo)))
    limit = max(3, min(max_window, n_fin // 4))
    cands = [k for k in STEP_WINDOWS if k <= limit] or [3]
    best = None
    for k in cands:
        nb, na = min(k, len(before)), min(k, len(after))
        if nb < 3 or na < 3:
            continue
        idx = np.concatenate([before[-nb:], after[:na]])
        coef, sd = _step_fit(rel, x, idx)
        if not np.all(np.isfinite(coef)):
            continue
        clean = xo - coef[2] * (rel > 0)     # this step removed (a detected frequency change is in xo)
        clean = clean[np.isfinite(clean)]
        positions = len(clean) - nb - na + 1
        spread_s, spread_f = _scan_null(clean, nb, na)
        if best is None or spread_s < best[0]:
            best = (spread_s, spread_f, nb, na, positions, k, coef, sd, idx)
        if nb < k and na < k:        # both sides exhausted: longer windows change nothing
            break
    if best is None:
        return None
    spread_s, spread_f, nb, na, positions, k, coef, sd, idx = best
    u_s, u_f = spread_s, spread_f / step_s
    if positions < _MIN_SCAN_POSITIONS or not (u_s > 0):
        u_s, u_f = max(u_s, float(sd[2])), max(u_f, float(sd[3]))
    tt = rel[idx]
    return {"size_ns": float(coef[2]), "u_ns": float(u_s), "freq_change": float(coef[3]) * 1e-9,
            "u_freq_change": float(u_f) * 1e-9, "window": int(k),
            "window_s": float(max(-tt[0], tt[-1])), "n_before": int(nb), "n_after": int(na),
            "u_formal_ns": float(sd[2]), "u_scan_ns": float(spread_s)}


STEP_METHOD = ("one estimate per change at its epoch (the logged epoch for a logged change, else the "
               "epoch the search gave): offset and slope fitted on each side over k samples, samples "
               "within half a sampling interval of the epoch left out; k is the candidate "
               "(4, 5, 6, 8, 11, 16, ... samples) whose estimator varies least when slid over the "
               "whole series with the changes removed, and that spread (1.4826 MAD) is the step's u")


def _log_agreement(ch: "Change") -> None:
    if ch.kind == "phase step" and ch.expected_ns is not None and ch.u_size > 0:
        ch.z_log = (ch.size - float(ch.expected_ns)) / ch.u_size
        ch.agrees_with_log = bool(abs(ch.z_log) <= 2.0)


def detect_changes(time_ns, offset_ns, changes=None, *, penalty_k: float = 3.0,
                   max_points: int = 4000, min_sigma: float = 5.0,
                   tolerance_s: float | None = None, window: int = 200,
                   max_candidates: int = 100) -> ChangeReport:
    """Phase steps and frequency changes by change-point search (ruptures), matched to a log.

    Method (documented choices):

    1. The series (ns) is put on its grid and block-averaged to at most
       ``max_points`` points (block = ceil(N/max_points) samples; blocks with
       no data are NaN and are dropped for the search), so the search runs on
       a year of 30 s data in well under a second. A linear trend is removed.
    2. Candidates: ``ruptures.Binseg(model="linear")`` on the detrended phase with
       the covariates [1, t], i.e. a piecewise-linear phase whose breaks can be a
       step, a change of slope (frequency) or both. (An l2 search on the first
       differences was tried for frequency changes: differencing amplifies white
       PM so much that a 2e-13 change over a day of 1 ns noise goes unseen.)
       Penalty BIC-like, ``pen = k·σ²·ln n`` with k = ``penalty_k`` (3: a little
       above the 2 parameters per break, to be conservative) and σ a robust
       white-noise estimate of the phase (MAD of first differences /√2,
       :func:`robust_sigma_white`). Minimum segment 5 blocks.
    3. Each candidate is re-measured by a local least-squares fit of
       a + b·t + s·H(t−t_b) + f·(t−t_b)·H(t−t_b) over ``window`` blocks either
       side (first pass), then the survivors again between their surviving
       neighbours (second pass), the uncertainty scaled by the
       residual scatter and inflated by the lag-1 autocorrelation factor
       (1+r1)/(1−r1), and never taken below the spread of the same estimator
       over all positions of the series (:func:`_scan_null`): for white phase
       noise both agree, for random-walk-like phase only the second is honest.
       A step is reported when |s|/u(s) ≥ ``min_sigma`` and a frequency change
       when |f|/u(f) ≥ ``min_sigma`` (5, a conventional detection threshold); one
       break can give both. At most ``max_candidates`` (100) breaks are examined.
    4. Matching: a change is *expected* when a log entry lies within
       ``tolerance_s`` of it (default: max(1 h, 3 blocks)); the closest entry is
       taken. Log entries with no detected change within tolerance are listed
       in ``undetected_log`` with the step fitted at their epoch.
    5. The one estimate: every change kept is re-estimated by :func:`estimate_step`
       at the logged epoch (matched changes; samples between the logged and the
       found epoch left out) or, for unlogged ones, midway between the last sample
       before the search's break and the first after it (both left out), the other
       changes removed first; ``time_ns`` is that epoch, ``found_time_ns`` the
       search's, and a phase step is compared with the log's expected size
       (``agrees_with_log`` within 2σ).

    ``changes`` is the station log as ``[{"time_utc_ns": int, "what": str,
    "expected_ns": float}]``.
    """
    import ruptures as rpt

    t = np.asarray(time_ns, dtype=np.int64)
    x = np.asarray(offset_ns, dtype=float)
    log = list(changes or [])
    g = grid_series(t, x)
    n = len(g.value)
    block = max(1, int(math.ceil(n / max_points)))
    nb = n // block
    if nb < 20:
        return ChangeReport([], _undetected(log), math.nan, block, penalty_k, 0.0)
    vals = g.value[:nb * block].reshape(nb, block)
    cnt = np.sum(np.isfinite(vals), axis=1)
    with np.errstate(invalid="ignore"):
        xb = np.where(cnt > 0, np.nansum(np.nan_to_num(vals), axis=1) / np.maximum(cnt, 1), np.nan)
    tb = g.time_ns[:nb * block].reshape(nb, block)[:, 0] + (block - 1) * int(g.tau0_s * 1e9) // 2
    keep = np.isfinite(xb)
    xb, tb = xb[keep], tb[keep]
    ts = (tb - tb[0]) / 1e9
    if len(xb) < 20:
        return ChangeReport([], _undetected(log), math.nan, block, penalty_k, 0.0)
    coef = np.polyfit(ts, xb, 1)
    xd = xb - np.polyval(coef, ts)
    block_s = block * g.tau0_s
    tol = tolerance_s if tolerance_s is not None else max(3600.0, 3 * block_s)

    sig_phase = robust_sigma_white(xd)
    bps = []
    if sig_phase > 0:
        design = np.column_stack([xd, np.ones_like(ts), ts / max(ts[-1], 1.0)])
        algo = rpt.Binseg(model="linear", min_size=5, jump=1).fit(design)
        bps = algo.predict(pen=penalty_k * sig_phase ** 2 * math.log(len(xd)))[:-1]
        if len(bps) > max_candidates:
            bps = algo.predict(n_bkps=max_candidates)[:-1]
    w = max(5, min(window, len(xb) // 8))
    step_s = float(np.median(np.diff(ts)))

    def evaluate(xnull):
        """Candidates kept against max(formal u, scan spread of ``xnull``); returns Changes."""
        nulls = {}

        def measure(b, lo, hi):
            r = _local_fit(ts, xb, lo, b, hi)
            if r is None:
                return None
            key = (b - lo, hi - b)
            if key not in nulls:
                nulls[key] = _scan_null(xnull, *key)
            ns_, nf = nulls[key]
            c, sd = r
            return ((c[2], max(sd[2], ns_)), (c[3] * 1e-9, max(sd[3], nf / step_s) * 1e-9))

        # pass 1: every candidate with the same window (w blocks each side, cut at the ends)
        kept = []
        for b in bps:
            m = measure(b, max(0, b - w), min(len(xb), b + w))
            if m is not None and any(abs(v) / u >= min_sigma for v, u in m if u > 0):
                kept.append(b)
        # pass 2: survivors re-measured between their neighbours, so that a nearby
        # change does not leak into the fit
        out = []
        for k, b in enumerate(kept):
            lo = max(kept[k - 1] if k > 0 else 0, b - w)
            hi = min(kept[k + 1] if k + 1 < len(kept) else len(xb), b + w)
            m = measure(b, lo, hi)
            if m is None:
                continue
            for kind, (size, u) in zip(("phase step", "frequency change"), m):
                sig = abs(size) / u if u > 0 else math.inf
                if sig >= min_sigma:
                    out.append((b, Change(int(tb[b]), kind, float(size), float(u), False,
                                          significance=float(sig))))
        return out

    # The scan spread is first taken on the series as it is (real changes inflate it,
    # so only clear changes pass), then on the series with the changes found so far
    # removed, until the set of changes stops changing (at most 4 rounds).
    xnull = xb
    found_b = evaluate(xnull)
    for _ in range(4):
        clean = xb.copy()
        for b, c in found_b:
            dt_ = ts - ts[b]
            clean -= (c.size if c.kind == "phase step" else c.size * 1e9 * dt_) * (dt_ >= 0)
        nxt = evaluate(clean)
        same = [(b, c.kind) for b, c in nxt] == [(b, c.kind) for b, c in found_b]
        found_b = nxt
        if same:
            break
    contrib = {}
    for b, c in found_b:
        dt_ = ts - ts[b]
        contrib[id(c)] = (c.size if c.kind == "phase step" else c.size * 1e9 * dt_) * (dt_ >= 0)
    found = [c for _, c in found_b]
    # one change may be found at neighbouring breaks: keep the most significant
    found = _dedupe(found, tol)
    used = set()
    for ch in found:
        best = None
        for j, e in enumerate(log):
            dtj = abs(int(e["time_utc_ns"]) - ch.time_ns) / 1e9
            if dtj <= tol and (best is None or dtj < best[0]):
                best = (dtj, j)
        if best is not None:
            e = log[best[1]]
            ch.expected = True
            ch.what = e.get("what")
            ch.expected_ns = e.get("expected_ns")
            ch.log_time_ns = int(e["time_utc_ns"])
            used.add(best[1])
    # the one estimate of each change, at the logged epoch when it is in a log (step 5)
    def epoch_of(c):
        # logged: the logged epoch; else the search's break lies between the last sample of the
        # old segment and the first of the new one: the middle of that interval
        if c.expected:
            return int(c.log_time_ns)
        ib = int(np.searchsorted(tb, c.time_ns))
        return int(tb[ib - 1] + (tb[ib] - tb[ib - 1]) // 2) if 0 < ib < len(tb) else int(c.time_ns)

    te_of = {id(c): epoch_of(c) for c in found}
    epochs = sorted(set(te_of.values()))
    for ch in found:
        te = te_of[id(ch)]
        lo = max((e for e in epochs if e < te), default=None)
        hi = min((e for e in epochs if e > te), default=None)
        others = xb - sum((contrib[id(o)] for o in found if id(o) in contrib and te_of[id(o)] != te),
                          np.zeros(len(xb)))
        est = estimate_step(ts, xb, (te - tb[0]) / 1e9, block_s, x_others_removed=others,
                            lo_s=-math.inf if lo is None else (lo - tb[0]) / 1e9,
                            hi_s=math.inf if hi is None else (hi - tb[0]) / 1e9, max_window=window,
                            found_s=(ch.time_ns - tb[0]) / 1e9 if ch.expected else None)
        ch.found_time_ns = int(ch.time_ns)
        if est is not None:
            ch.time_ns = te
            if ch.kind == "phase step":
                ch.size, ch.u_size = est["size_ns"], est["u_ns"]
            else:
                ch.size, ch.u_size = est["freq_change"], est["u_freq_change"]
            ch.window_s, ch.n_before, ch.n_after = est["window_s"], est["n_before"], est["n_after"]
        _log_agreement(ch)
    clean = xb - sum(contrib.values(), np.zeros(len(xb)))
    undetected = _undetected([e for j, e in enumerate(log) if j not in used], tb, xb, found, window,
                             clean, block_s)
    return ChangeReport(found, undetected, sig_phase, block, penalty_k, tol)


def _scan_null(xb, wl, wr=None):
    """Robust spread (1.4826·MAD) of the local step and slope-change estimators taken at
    every position of the block series (window w blocks each side, equal spacing
    assumed). Real changes are few, so this is the spread under "no change" whatever
    the noise is: for white PM it equals the formal u, for random-walk-like phase it
    is much larger, which the formal u (even AR(1)-inflated) is not. ``wl``/``wr``:
    blocks before/after the break."""
    wr = wl if wr is None else wr
    j = np.arange(-wl, wr, dtype=float)
    h = (j >= 0).astype(float)
    W = np.linalg.pinv(np.column_stack([np.ones_like(j), j, h, j * h]))
    out = []
    for row in (W[2], W[3]):
        v = np.correlate(xb, row, "valid")
        out.append(float(1.4826 * np.median(np.abs(v - np.median(v)))) if len(v) else 0.0)
    return out[0], out[1]


def _dedupe(found, tol):
    out = []
    for ch in sorted(found, key=lambda c: (c.time_ns, c.kind != "phase step")):
        dup = [o for o in out if o.kind == ch.kind and abs(o.time_ns - ch.time_ns) / 1e9 <= tol]
        if dup:
            if ch.significance > dup[0].significance:
                out[out.index(dup[0])] = ch
            continue
        out.append(ch)
    return out


def _undetected(entries, tb=None, xb=None, found=(), window=200, xnull=None, block_s=None):
    """Log entries without a detected change, with the step estimated at the logged epoch
    by :func:`estimate_step` (the same estimator as for detections, bounded by the
    detected changes around it)."""
    out = []
    marks = np.array(sorted({c.time_ns for c in found}), dtype=np.int64)
    for e in entries:
        te = int(e["time_utc_ns"])
        rec = {"time_utc_ns": te, "what": e.get("what"), "expected_ns": e.get("expected_ns"),
               "fitted_step_ns": None, "u_fitted_step_ns": None, "window_s": None,
               "z_log": None, "agrees_with_log": None}
        if tb is not None and tb[0] < te <= tb[-1]:
            ts = (tb - tb[0]) / 1e9
            step_s = block_s if block_s else float(np.median(np.diff(ts)))
            prev = marks[marks < te]
            nxt = marks[marks > te]
            est = estimate_step(ts, xb, (te - tb[0]) / 1e9, step_s, x_others_removed=xnull,
                                lo_s=(prev[-1] - tb[0]) / 1e9 if len(prev) else -math.inf,
                                hi_s=(nxt[0] - tb[0]) / 1e9 if len(nxt) else math.inf, max_window=window)
            if est is not None:
                rec["fitted_step_ns"] = _f(est["size_ns"])
                rec["u_fitted_step_ns"] = _f(est["u_ns"])
                rec["window_s"] = _f(est["window_s"])
                if e.get("expected_ns") is not None and est["u_ns"] > 0:
                    z = (est["size_ns"] - float(e["expected_ns"])) / est["u_ns"]
                    rec["z_log"] = _f(z)
                    rec["agrees_with_log"] = bool(abs(z) <= 2.0)
        out.append(rec)
    return out


# ------------------------------------------------------------------ before/after

@dataclass
class PeriodStats:
    start_ns: int
    end_ns: int
    n: int
    mean_ns: float
    u_mean_ns: float
    adev: Deviation
    tdev: Deviation


def _period(t, x, start, end):
    sel = (t >= start) & (t <= end) & np.isfinite(x)
    if np.count_nonzero(sel) < 8:
        raise ValueError(f"period {start}..{end} has {np.count_nonzero(sel)} samples; need at least 8")
    g = grid_series(t[sel], x[sel])
    xs = g.value * 1e-9
    rate = 1.0 / g.tau0_s
    devs = stability_set(xs, rate, kinds=("oadev", "tdev"))
    v = g.value[np.isfinite(g.value)]
    mean = float(np.mean(v))
    # u(mean): white-noise σ/√N inflated by the lag-1 ACF, but never below the
    # TDEV at the longest τ (≈ a third of the period): TDEV(τ) is the rms time
    # error left after averaging over τ, so for correlated (flicker, random
    # walk) noise it bounds how well the mean over the period is known.
    # (the white part from the scatter about a straight line, since a frequency
    # offset is deterministic and not noise of the mean)
    tv = ((g.time_ns - g.time_ns[0]) / 1e9)[np.isfinite(g.value)]
    res = v - np.polyval(np.polyfit(tv, v, 1), tv) if len(v) > 3 else v - v.mean()
    r1 = lag1_acf(res)
    infl = (1 + r1) / (1 - r1) if 0 < r1 < 1 else 1.0
    u_white = float(np.std(res, ddof=2) / math.sqrt(len(v)) * math.sqrt(infl))
    td = devs["tdev"].dev[np.isfinite(devs["tdev"].dev)]
    u_td = float(td[-1] * 1e9) if len(td) else 0.0
    return PeriodStats(int(g.time_ns[0]), int(g.time_ns[-1]), len(v), mean, max(u_white, u_td),
                       devs["oadev"], devs["tdev"])


@dataclass
class Comparison:
    before: PeriodStats
    after: PeriodStats
    delta_mean_ns: float
    u_delta_mean_ns: float
    z: float
    significant: bool
    adev_ratio: list          # per common τ: {tau_s, ratio, p_value, significant}
    level: float = 0.05
    boundary_ns: int = 0                # midway between the end of before and the start of after
    step_at_boundary_ns: float = math.nan
    u_step_at_boundary_ns: float = math.nan
    z_step: float = math.nan
    step_significant: bool = False


def compare_periods(time_ns, offset_ns, before, after, level: float = 0.05) -> Comparison:
    """Compare two date ranges (``(start_ns, end_ns)`` each, inclusive).

    Mean offset change Δ = mean_after − mean_before with u(Δ) = √(u_b² + u_a²)
    (u of each mean as in :class:`PeriodStats`); significant when
    |Δ|/u(Δ) > z at two-sided ``level`` (normal approximation; 1.96 at 5 %).
    ADEV at each common τ: two-sided F test of the variance ratio with the
    two EDFs as degrees of freedom (SP 1065 §5.3: ν·s²/σ² is χ²_ν), at ``level``.

    The mean change contains the frequency offset times the distance between the
    period centres; the change *at* the boundary is also given: phase + frequency
    fitted to each period (:func:`fit_drift`, no drift term) and both lines
    evaluated midway between the periods, u from the lag-1 inflated ``u_ar1`` of
    offset and frequency (uncorrelated at the fit's weighted mean epoch), tested
    like the mean.
    """
    from scipy import stats

    t = np.asarray(time_ns, dtype=np.int64)
    x = np.asarray(offset_ns, dtype=float)
    b = _period(t, x, *before)
    a = _period(t, x, *after)
    d = a.mean_ns - b.mean_ns
    u = math.hypot(a.u_mean_ns, b.u_mean_ns)
    z = d / u if u > 0 else math.inf
    zc = stats.norm.ppf(1 - level / 2)
    rows = []
    for i, tau in enumerate(b.adev.tau_s):
        j = np.nonzero(np.isclose(a.adev.tau_s, tau))[0]
        if len(j) == 0:
            continue
        j = int(j[0])
        va, vb = a.adev.dev[j] ** 2, b.adev.dev[i] ** 2
        ea, eb = a.adev.edf[j], b.adev.edf[i]
        if not (np.isfinite(va) and np.isfinite(vb) and ea > 0 and eb > 0 and vb > 0):
            continue
        f = va / vb
        p = 2 * min(stats.f.cdf(f, ea, eb), stats.f.sf(f, ea, eb))
        rows.append({"tau_s": float(tau), "ratio": float(math.sqrt(f)), "p_value": float(p),
                     "significant": bool(p < level)})
    tb_ = int(b.end_ns + (a.start_ns - b.end_ns) // 2)
    ends = []
    for per in (b, a):
        sel = (t >= per.start_ns) & (t <= per.end_ns) & np.isfinite(x)
        f = fit_drift(t[sel], x[sel], quadratic=False)
        dt_s = (tb_ - f.t_ref_ns) / 1e9
        ends.append((f.offset_ns.value + f.frequency.value * 1e9 * dt_s,
                     math.hypot(f.offset_ns.u_ar1, f.frequency.u_ar1 * 1e9 * dt_s)))
    step = ends[1][0] - ends[0][0]
    u_step = math.hypot(ends[0][1], ends[1][1])
    z_step = step / u_step if u_step > 0 else math.inf
    return Comparison(b, a, d, u, z, bool(abs(z) > zc), rows, level, tb_, step, u_step, z_step,
                      bool(abs(z_step) > zc))


# ------------------------------------------------------------------ the daily value

#: The one definition of the day's clock A − clock B (ctt writes it as ``daily_value``).
DAILY_VALUE_DEFINITION = (
    "clock A - clock B at epoch_utc, the weighted centre (weights 1/u^2) of the day's 'ok' points. "
    "Estimator: the day's drift model (offset + frequency, weighted least squares; every phase step "
    "found in the day held at its one local estimate) evaluated at that epoch; with no step this is "
    "the weighted mean of the points. u_a: time-transfer measurement noise only, modelled as white "
    "plus flicker phase noise, TDEV^2(tau) = s_w^2 tau0/tau + s_f^2, fitted to the TDEV at the "
    "shortest tau (where the link noise dominates) and propagated to the day as "
    "s_w^2/(mean(u^2) sum(1/u^2)) + s_f^2, plus each step estimate's u times its leverage on the "
    "value; the clocks' own wander is not in it (see the stability). u_b: root sum of squares of "
    "the type B items (delays, coordinates, inter-system biases). u = sqrt(u_a^2 + u_b^2); "
    "standard (1 sigma) uncertainties in ns.")


def link_noise(time_ns, offset_ns) -> dict:
    """White and flicker phase-noise levels of the time-transfer link from the short-τ TDEV.

    TDEV at octave τ from τ0 (SP 1065 eq. 15; gaps skipped as in :func:`tdev`);
    the link's noise is what TDEV shows at short τ, before it turns up where the
    clocks' frequency noise takes over, so the fit uses the TDEV values from τ0
    as long as they do not rise. Model: white PM has TDEV = σ_w·√(τ0/τ)
    (TDEV(τ0) = σ of one point), flicker PM a flat TDEV = σ_f (SP 1065 noise
    table), so TDEV² = σ_w²·τ0/τ + σ_f², fitted by non-negative least squares
    on relative residuals (scipy.optimize.nnls). One usable τ gives σ_w alone.
    Fewer than 8 samples: σ_w from the first differences
    (:func:`robust_sigma_white`), σ_f = 0.
    Returns ``{white_ns, flicker_ns, tau0_s, taus_s, tdev_ns, n_used}``.
    """
    from scipy.optimize import nnls

    v = np.asarray(offset_ns, dtype=float)
    out = {"white_ns": math.nan, "flicker_ns": 0.0, "tau0_s": math.nan, "taus_s": [], "tdev_ns": [],
           "n_used": 0}
    if int(np.count_nonzero(np.isfinite(v))) < 8:
        out["white_ns"] = robust_sigma_white(v[np.isfinite(v)])
        return out
    g = grid_series(time_ns, v)
    out["tau0_s"] = g.tau0_s
    rate = 1.0 / g.tau0_s
    m = _ms(octave_taus(len(g.value), g.tau0_s), rate, len(g.value))
    dev, _ = _raw("tdev", g.value * 1e-9, rate, m)
    ok = np.isfinite(dev) & (dev > 0)
    m, td = m[ok], dev[ok] * 1e9
    out["taus_s"] = [float(v) for v in m * g.tau0_s]
    out["tdev_ns"] = [float(v) for v in td]
    if len(td) == 0:
        out["white_ns"] = robust_sigma_white(g.value[np.isfinite(g.value)])
        return out
    k = 1
    while k < len(td) and td[k] <= td[k - 1]:
        k += 1
    out["n_used"] = k
    if k == 1:
        out["white_ns"] = float(td[0])
        return out
    A = np.column_stack([1.0 / m[:k], np.ones(k)]) / td[:k, None] ** 2
    coef, _ = nnls(A, np.ones(k))
    out["white_ns"], out["flicker_ns"] = float(math.sqrt(coef[0])), float(math.sqrt(coef[1]))
    return out


def daily_value(time_ns, offset_ns, u_ns, changes=None, *, u_b_ns: float = 0.0,
                to_iso=None) -> tuple[dict, dict]:
    """The day's clock A − clock B, defined once (:data:`DAILY_VALUE_DEFINITION`).

    ``time_ns``/``offset_ns``/``u_ns`` are the day's 'ok' points (any one time
    scale; ``to_iso`` turns an instant of it into the UTC text of
    ``epoch_utc``); ``changes`` the hardware log as for :func:`detect_changes`;
    ``u_b_ns`` the day's type B. Returns ``(daily_value, detail)``: the object
    ``{epoch_utc, offset_ns, u_a_ns, u_b_ns, u_ns, definition}`` with values
    rounded to 0.001 ns (every output shows this object as it is), and the
    pieces it came from (link-noise model, steps, frequency, clock wander).
    """
    t = np.asarray(time_ns, dtype=np.int64)
    x = np.asarray(offset_ns, dtype=float)
    u = np.asarray(u_ns, dtype=float)
    good = np.isfinite(x) & np.isfinite(u) & (u > 0)
    t, x, u = t[good], x[good], u[good]
    if len(x) == 0:
        raise ValueError("no usable point for the daily value")
    order = np.argsort(t, kind="stable")
    t, x, u = t[order], x[order], u[order]
    w = 1.0 / u ** 2
    tc = int(t[0] + int(np.round(np.sum(w * (t - t[0]) / 1e9) / np.sum(w) * 1e9)))
    steps = []
    report = ChangeReport([])
    if len(x) >= 20:
        g = grid_series(t, x)
        report = detect_changes(g.time_ns, g.value, changes)
        steps = phase_steps(report)
    if len(x) > 2 + len(steps):
        fit = fit_drift(t, x, u, quadratic=False, fixed_steps=steps)
        a = fit.offset_ns.value
        freq = {"value": _f(fit.frequency.value), "u": _f(fit.frequency.u)}
    else:
        xc = x - sum(p.value * (t >= te) for te, p in steps) if steps else x
        a = float(np.sum(w * xc) / np.sum(w))
        freq = None
    value = a + sum(p.value for te, p in steps if tc >= te)
    xc = x - (sum(p.value * (t >= te) for te, p in steps) if steps else 0.0)
    link = link_noise(t, xc)
    sw, sf = link["white_ns"], link["flicker_ns"]
    if len(x) < 8 or not np.isfinite(sw):
        sw = float(np.median(u))      # too few points for the series' own noise: the points' u
    var_white = sw ** 2 / (float(np.mean(u ** 2)) * float(np.sum(w)))
    var_steps = 0.0
    step_rows = []
    for te, p in steps:
        lever = float(tc >= te) - float(np.sum(w[t >= te]) / np.sum(w))
        var_steps += (p.u * lever) ** 2
        step_rows.append({"epoch": (to_iso or int)(te), "size_ns": _f(p.value), "u_ns": _f(p.u),
                          "leverage": lever})
    u_a = math.sqrt(var_white + sf ** 2 + var_steps)
    u_b = float(u_b_ns)
    iso = to_iso or (lambda v: int(v))
    obj = {"epoch_utc": iso(tc), "offset_ns": round(float(value), 3), "u_a_ns": round(u_a, 3),
           "u_b_ns": round(u_b, 3), "u_ns": round(math.hypot(u_a, u_b), 3),
           "definition": DAILY_VALUE_DEFINITION}
    wander = {}
    if len(xc) >= 8:
        g2 = grid_series(t, xc)
        rate = 1.0 / g2.tau0_s
        for lab, tau in (("1 h", 3600.0), ("1 d", 86400.0)):
            ms = _ms(octave_taus(len(g2.value), g2.tau0_s), rate, len(g2.value))
            if len(ms) and tau <= ms[-1] * g2.tau0_s * 1.5:
                mm = np.array([ms[np.argmin(np.abs(np.log(ms * g2.tau0_s / tau)))]])
                dv, _ = _raw("tdev", g2.value * 1e-9, rate, mm)
                wander[lab] = {"tau_s": float(mm[0] * g2.tau0_s), "tdev_ns": _f(dv[0] * 1e9)}
    detail = {"epoch_ns": tc, "n_points": int(len(x)), "frequency": freq,
              "link_noise": {**link, "white_ns": sw,
                             "model": "TDEV^2 = white_ns^2 tau0/tau + flicker_ns^2 (white + flicker PM)"},
              "u_a_parts_ns": {"white": math.sqrt(var_white), "flicker": sf, "steps": math.sqrt(var_steps)},
              "steps": step_rows, "changes": [c.as_dict(to_iso) for c in report.changes],
              "logged_changes_not_detected": report.undetected_log,
              "clock_wander_tdev": wander}
    return obj, detail


# ------------------------------------------------------------------ one call for a series

def phase_steps(report: ChangeReport) -> list:
    """``(epoch_ns, Param)`` of every detected phase step, as estimated once (for :func:`fit_drift`)."""
    return [(int(c.time_ns), Param(float(c.size), float(c.u_size), float(c.u_size)))
            for c in report.changes if c.kind == "phase step"]


def analyse(time_ns, offset_ns, u_ns=None, changes=None, taus=None, to_iso=None,
            remove_steps: bool = False):
    """Everything for one offset series in ns: deviations, drift, changes.

    Returns ``(summary, devs, fit, change_report, grid)``: ``summary`` is the
    JSON-ready dict, the others the objects it was made from (for plots).

    ``dev`` is dimensionless for ADEV/MDEV/HDEV and in ns for TDEV (``units``).
    ``adev`` is the overlapping Allan deviation and ``hdev`` the overlapping
    Hadamard deviation. By default the deviations are of the series as given,
    steps included (a step adds to ADEV at every τ); with ``remove_steps`` the
    phase steps found (the one estimate of each, :func:`estimate_step`) are
    subtracted first, and the summary lists them under ``steps_removed``. The
    drift model holds the same step estimates fixed (:func:`fit_drift`).
    """
    g = grid_series(time_ns, offset_ns, u_ns)
    rate = 1.0 / g.tau0_s
    ch = detect_changes(g.time_ns, g.value, changes)
    # the drift model carries every detected phase step, at its one estimate, so the
    # residuals show what the model misses rather than the steps themselves
    fit = fit_drift(g.time_ns, g.value, g.u, fixed_steps=phase_steps(ch))
    xs = g.value
    removed = []
    if remove_steps and fit.step_epochs_ns:
        xs = g.value.copy()
        for te, p in zip(fit.step_epochs_ns, fit.steps_ns):
            xs[g.time_ns >= te] -= p.value
            removed.append({"time_ns": int(te), "size_ns": _f(p.value), "u_ns": _f(p.u)})
    devs = stability_set(xs * 1e-9, rate, taus=taus)
    iso = to_iso or (lambda ns: int(ns))
    out = {
        "units": {"adev": "1 (fractional frequency)", "mdev": "1 (fractional frequency)",
                  "hdev": "1 (fractional frequency)", "tdev": "ns", "tau_s": "s",
                  "offset_ns": "ns", "frequency": "1 (fractional frequency)",
                  "drift_per_day": "1/day (fractional frequency change per day)"},
        "estimators": {"adev": "overlapping Allan", "mdev": "modified Allan", "tdev": "time deviation",
                       "hdev": "overlapping Hadamard",
                       "ci": "68.3 % chi-square interval, Greenhall-Riley EDF"},
        "tau0_s": g.tau0_s, "n_samples": int(np.count_nonzero(np.isfinite(g.value))), "grid": g.info(),
        "n_missing": g.n_missing, "start": iso(int(g.time_ns[0])), "end": iso(int(g.time_ns[-1])),
        "adev": devs["oadev"].records(), "mdev": devs["mdev"].records(),
        "tdev": devs["tdev"].records(1e9), "hdev": devs["ohdev"].records(),
        "drift": fit.as_dict(),
        "changes": [c.as_dict(to_iso) for c in ch.changes],
        "logged_changes_not_detected": [
            {**e, "time_utc": iso(e["time_utc_ns"])} for e in ch.undetected_log],
        "change_detection": {"sigma_white_ns": _f(ch.sigma_white_ns), "block": ch.block,
                             "penalty": f"{ch.penalty_k:g}*sigma^2*ln(n)",
                             "match_tolerance_s": ch.tolerance_s, "step_estimate": STEP_METHOD},
    }
    for key, kind in (("adev", "oadev"), ("mdev", "mdev"), ("tdev", "tdev"), ("hdev", "ohdev")):
        for rec, lab in zip(out[key], noise_labels(devs[kind])):
            rec["noise_label"] = lab
    out["drift"]["t_ref"] = iso(fit.t_ref_ns)
    out["drift"]["step_epochs"] = [iso(t) for t in fit.step_epochs_ns]
    out["steps_removed"] = [{**r, "time_utc": iso(r["time_ns"])} for r in removed]
    return out, devs, fit, ch, g
