"""Precise point positioning (PPP) on iono-free code and carrier phase: a station's clock
against the time scale of a precise orbit/clock product.

Observation model (metres; one row per epoch *i* and satellite *s*)::

    P_IF = ρ + sagnac − c(δt_s + δt_rel) + shapiro + T_h + T_w(apriori) + m_w·ΔZWD(t)
           + tide + antenna_rx + satellite_pcv + c·hw + c·δt_r(i) [+ ISB_sys]
    L_IF = ρ + sagnac − c(δt_s + δt_rel) + shapiro + T_h + T_w(apriori) + m_w·ΔZWD(t)
           + tide + antenna_rx + satellite_pcv + windup + c·δt_r(i) + A(arc)

``ρ + sagnac`` is ctt.measure's light-time geometry (:func:`ctt.measure.receive_geometry`, the
same code the code-only measurement uses: receive instant = time tag − a pseudorange
receiver clock, so a receiver clock a millisecond off does not move the satellites by
800 m/s × 1 ms); ``δt_s`` and ``δt_rel`` the product's satellite clock and the periodic
relativistic term −2 r·v/c² (IGS convention; :class:`ctt.orbits.PreciseOrbits`, which also
moves the satellite to its iono-free antenna phase centre with ANTEX); ``shapiro`` the
gravitational delay 2GM/c² ln((r_s + r_r + ρ)/(r_s + r_r − ρ)) (IERS Conventions 2010 §11,
eq. 11.17); ``T_h``, ``T_w`` the a-priori hydrostatic and wet delays (Saastamoinen zenith
delays from the met file or the standard atmosphere, mapped with GMF or Niell:
:mod:`ctt.atmosphere`); ``ΔZWD(t)`` the estimated zenith wet delay correction, piecewise
linear in time between nodes ``ztd_interval_s`` apart with a random-walk constraint
between nodes; ``tide`` the solid Earth tide (IERS 2010 §7.1.1, :mod:`ctt.geodesy`), the
same term as ctt.measure; ``antenna_rx`` the receiver antenna's iono-free phase-centre
offset and variation along the line of sight and ``satellite_pcv`` the satellite antenna's
nadir-dependent variation (ANTEX 1.4, through ctt.signals, when the ANTEX reader has the
station's antenna; otherwise 0 and said so in the summary); ``tide`` also carries the
solid Earth pole tide (IERS 2010 §7.1.4, eq. 7.26, :func:`ctt.geodesy.pole_tide_displacement_enu`)
when an IGS ERP file is given (``erp``): the pole (xp, yp) interpolated linearly at each
epoch's UTC MJD, the displacement rotated from E/N/U to ECEF and added to the solid tide's
(its own column ``pole_tide_m`` too; :func:`ctt.geodesy.pole_tide_ecef`). A few mm, nearly constant
over a day: with the position estimated it goes into the position, with the position held
fixed into the clock (≈ ΔU·sin(el)/c, a few ps to tens of ps). Without an ERP file the
summary says "not applied (no ERP file given)"; an ERP file that does not cover every epoch
of the day is refused (``MissingInputError``), never extrapolated nor skipped, so a day's
clock never silently depends on which ERP file happened to be at hand (a day-to-day step
of tens of ps in a fixed-position series); ``windup`` the carrier phase wind-up
(Wu et al. 1993) with the nominal yaw-steering attitude; ``hw`` the station file's
hardware delays of the codes used, applied exactly as in ctt.measure (so ``δt_r`` is
*local reference clock minus the product's time scale*); ``A`` a float ambiguity (metres)
per continuous arc; ``ISB`` a code inter-system bias per system other than the first.

Every term is its own column of :attr:`PPPResult.residuals`.

Weights: σ = σ0 · f_IF / sin(el), with σ0 = ``code_sigma_m`` (0.3 m) and ``phase_sigma_m``
(3 mm) for one signal at the zenith and f_IF ≈ 2.98 the noise amplification of the GPS
L1/L2 iono-free combination (ctt.signals). Values are uncorrelated.

Estimator: one batch weighted least squares over the whole observation span. Global
parameters (position, zenith wet delay nodes, inter-system biases, arc ambiguities) and
one receiver clock per epoch; the epoch clocks are eliminated from the sparse normal
equations (Schur complement: the clock block is diagonal), the reduced system is solved
by Cholesky, and the clocks are recovered by back-substitution with their full variance
(``1/N_cc + N_cc⁻² n_cgᵀ Q_gg n_cg``). Every epoch therefore uses the whole day's position,
troposphere and ambiguities: the first hour is as good as the rest. Parameters are
named (epoch instants, arc ids), so a multi-day solution is the same call on
concatenated rows (``_Design`` does not know about days).

Cycle slips (per satellite, on the epoch grid): a new arc starts at a loss-of-lock
indicator, a gap longer than ``max_gap_s``, a Melbourne–Wübbena jump larger than
``mw_k`` (5) × the arc's running standard deviation, at least ``mw_min_cycles`` (2) wide-lane
cycles (Melbourne 1985, Wübbena 1985), or a geometry-free jump (λ1L1 − λ2L2 against its
linear prediction from the arc's previous two epochs) larger than ``gf_threshold_m``
(3.5 cm) or 4 × 2.5 mm/sin(el) (:func:`detect_slips`). Slips with λ1n1 − λ2n2 ≈ 0 and
n1 − n2 = 1 (e.g. 5, 4 cycles: 2.5 cm and one wide-lane cycle) stay below both tests.
Arcs shorter than ``min_arc_s`` are not used (``short_arc``).

Receiver clock jumps: receivers on free oscillators reset their clock by whole
milliseconds. A jump is the epoch-to-epoch change of the pseudorange receiver clock
rounded to whole milliseconds (non-zero). When the phases follow (every satellite's
L − P unchanged across the jump), nothing is to be done: the epoch clock absorbs it and
the arcs stay continuous; when they do not, c·k·1 ms is added to every phase from the
jump on, so the arcs still continue. Jumps are listed in the summary.

Screening: after each solution, code and phase residuals normalised by their a-priori σ
are compared with ``outlier_k`` × the robust scale (1.4826·MAD) of all normalised
residuals of that type; the worst values are removed (``code_outlier``,
``phase_outlier``) and the solution repeated until none remains (at most
``max_iterations``).

Eclipses: a satellite in the Earth's cylindrical shadow (Sun from ctt.geodesy) and for
``eclipse_margin_s`` (30 min) after leaving it is flagged ``eclipse`` and not used: its
attitude is not the nominal yaw steering then (Kouba 2009, "A guide to using IGS products").
"""

from __future__ import annotations

import dataclasses
import logging
import pathlib
import warnings

import numpy as np
import pandas as pd
import scipy.linalg
import scipy.sparse as sp

from . import atmosphere, geodesy, measure, signals
from . import timescales as ts
from .errors import NoDataError
from .orbits import in_earth_shadow, sun_position_ecef

log = logging.getLogger(__name__)

C_MPS = measure.C_MPS
NS = 1_000_000_000

#: Codes tried, in order, for the signals the precise clocks refer to: GPS P1/P2 (C1W/C2W),
#: else C1C (with a code-bias file mapping it onto C1W); Galileo E1/E5a (the IGS/MGEX
#: convention of Galileo clocks, common practice).
PPP_CODES = ("C1W", "C1P", "C1C", "C2W", "C2P", "C2L", "C2X", "C1X", "C5Q", "C5X")


@dataclasses.dataclass(frozen=True)
class PPPOptions:
    """Processing choices of :func:`run_ppp` (defaults: a geodetic/timing receiver, 30-s data)."""

    elevation_mask_deg: float | None = 7.0   #: None: the station file's mask
    systems: tuple = ("G",)                  #: RINEX system letters; the first is the clock reference
    code_sigma_m: float = 0.3                #: one code at the zenith (σ = σ0·f_IF/sin el)
    phase_sigma_m: float = 0.003             #: one carrier at the zenith
    mapping: str = "gmf"                     #: wet (and hydrostatic) mapping: 'gmf' or 'niell'
    ztd_interval_s: float = 3600.0           #: spacing of the piecewise-linear ZWD nodes
    ztd_random_walk_m: float = 0.01          #: σ of the ZWD change per √hour between nodes
    zwd_apriori_sigma_m: float = 0.5         #: σ of the first node about the a-priori wet delay
    position: str = "estimate"               #: 'estimate' | 'fixed' | 'constrained'
    position_sigma_m: float | None = None    #: constrained: σ per ECEF axis (None: station file's)
    mw_k: float = 5.0                        #: MW slip at mw_k × running σ of the arc ...
    mw_min_cycles: float = 2.0               #: ... but never below this many wide-lane cycles
    gf_threshold_m: float = 0.035            #: geometry-free jump (30-s sampling), at least ...
    gf_noise_m: float = 0.0025               #: ... 4 × this / sin(el) (σ of the GF 2nd difference)
    max_gap_s: float = 300.0                 #: a longer data gap starts a new arc
    min_arc_s: float = 600.0                 #: shorter arcs are not used
    outlier_k: float = 5.0                   #: residual screening at k × robust σ
    max_iterations: int = 8
    eclipse_margin_s: float = 1800.0         #: flagged after leaving the shadow
    windup: bool = True
    shapiro: bool = True
    tide: bool = True
    min_sats: int = 4                        #: epochs with fewer satellites are flagged
    clock_interpolation_sigma: bool = True   #: weight values between clock nodes down (see below)

    def __post_init__(self):
        if self.position not in ("estimate", "fixed", "constrained"):
            raise ValueError(f"position must be 'estimate', 'fixed' or 'constrained', not {self.position!r}")
        if self.mapping not in ("gmf", "niell"):
            raise ValueError(f"mapping must be 'gmf' or 'niell', not {self.mapping!r}")
        if not self.systems:
            raise ValueError("give at least one satellite system")


@dataclasses.dataclass
class PPPResult:
    """Result of :func:`run_ppp`."""

    clock: pd.DataFrame       #: per epoch: time_gps_ns, time_utc, clock_ns, u_ns, n_sat, flag, ztd_m
    residuals: pd.DataFrame   #: per epoch and satellite: residuals, elevation, arc, flag, model terms
    summary: dict             #: position, E/N/U difference, RMS, arcs, slips, jumps, rejections, product
    options: PPPOptions = None

    def summary_lines(self) -> list[str]:
        s = self.summary
        d = s.get("enu_difference_m") or [np.nan] * 3
        lines = [f"station {s['station']}: {s['n_epochs_ok']} of {s['n_epochs']} epochs ok, "
                 f"{s['n_satellites']} satellites, {s['n_arcs']} arcs, {s['n_slips']} slips, "
                 f"{s['n_clock_jumps']} receiver clock jumps",
                 f"  clock reference: {s['time_scale']} ({s['satellite_clock_convention']})",
                 f"  residual RMS: code {s['code_rms_m']:.3f} m, phase {s['phase_rms_m'] * 1000:.1f} mm",
                 f"  position ({s['position_mode']}): dE {d[0]:+.4f} m, dN {d[1]:+.4f} m, dU {d[2]:+.4f} m "
                 "from the station file"]
        pt = s.get("pole_tide")
        lines.append(f"  pole tide: {pt['model']}, mean up {pt['mean_enu_mm'][2]:+.1f} mm" if pt else
                     f"  pole tide: {s.get('models', {}).get('pole_tide', 'not applied')}")
        for k, v in sorted(s["rejected"].items(), key=lambda kv: -kv[1]):
            lines.append(f"  not used, {k}: {v}")
        return lines


# ------------------------------------------------------------------ model terms

def _unwrap_columns(grid_cycles):
    """Unwrap each column of a (n_ep, n_sat) grid in cycles, over its finite values."""
    out = np.full_like(grid_cycles, np.nan)
    for j in range(grid_cycles.shape[1]):  # a loop over satellites (tens), vectorised over epochs
        ok = np.isfinite(grid_cycles[:, j])
        if ok.any():
            out[ok, j] = np.unwrap(grid_cycles[ok, j], period=1.0)
    return out


def clock_interpolation_sigma_m(orbits, sats, t_ns):
    """σ (m) of the linearly interpolated satellite clock at GPS instants ``t_ns`` per row.

    Between two clock nodes T apart the interpolation error behaves like a Brownian bridge:
    σ(u) = σ_mid · 2·√(u(1 − u)), u the fraction of T elapsed, 0 at the nodes. σ_mid per
    satellite comes from the product itself: leave-one-out over 2T
    (:func:`ctt.orbits.clock_interpolation_error`) gives the bridge's mid-point error over 2T,
    and a bridge's variance scales with its length, so σ_mid(T) = RMS_LOO / √2. Measured on
    BRUS with the IGS 5-min clocks, the phase residual RMS grows from 1.4 cm at the nodes to
    3.4 cm mid-way, as this form predicts; with 30-s clocks and 30-s data the term is ~0.
    Returns (sigma_m, note).
    """
    from .formats.rinex_clock import ClockSeries
    from .orbits import clock_interpolation_error

    clk = getattr(orbits, "clk", None)
    if clk is not None:
        series = clk.satellites
    elif getattr(orbits, "sp3", None) is not None:
        sp3 = orbits.sp3
        series = ClockSeries(names=np.asarray(sp3.sats).astype(str), time_ns=sp3.time_ns, bias_s=sp3.clock_s,
                             sigma_s=np.full(sp3.clock_s.shape, np.nan))
    else:
        return np.zeros(len(sats)), "none"
    t = series.time_ns
    if len(t) < 3:
        return np.zeros(len(sats)), "none"
    err, _ = clock_interpolation_error(series, 2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        mid = np.sqrt(np.nanmean(err**2, axis=0)) / np.sqrt(2.0)
    typical = float(np.nanmedian(mid)) if np.isfinite(mid).any() else 0.0
    mid = np.where(np.isfinite(mid), mid, typical)
    step = int(np.median(np.diff(t)))
    names = np.asarray(series.names).astype(str)
    order = np.argsort(names)
    pos = np.clip(np.searchsorted(names[order], sats), 0, len(names) - 1)
    col = np.where(names[order][pos] == sats, order[pos], -1)
    u = ((np.asarray(t_ns, dtype=np.int64) - int(t[0])) % step) / step
    sig = np.where(col >= 0, mid[np.maximum(col, 0)], typical) * 2.0 * np.sqrt(u * (1.0 - u)) * C_MPS
    return sig, f"interpolation over {step / 1e9:.0f} s, median mid-interval {typical * 1e12:.0f} ps"


# ------------------------------------------------------------------ slips and jumps

def detect_clock_jumps(t_ns, rx_clock_s, oc_phase_minus_code, *, tol_ms=0.1):
    """Millisecond resets of the receiver clock.

    ``rx_clock_s`` per epoch (pseudorange receiver clock, NaN where unknown);
    ``oc_phase_minus_code`` (n_ep, n_sat) the phase minus code of each satellite (m).
    Returns a list of dicts (epoch index, time, size in ms, whether the phases followed)
    and the phase correction grid (m) to add so the phases follow the code.
    """
    n_ep, n_sat = oc_phase_minus_code.shape
    corr = np.zeros(n_ep)
    jumps = []
    idx = np.flatnonzero(np.isfinite(rx_clock_s))
    if len(idx) < 2:
        return jumps, corr
    d = np.diff(rx_clock_s[idx])
    k = np.rint(d / 1e-3)
    is_jump = (k != 0) & (np.abs(d - k * 1e-3) < tol_ms * 1e-3)
    for m in np.flatnonzero(is_jump):
        i0, i1 = idx[m], idx[m + 1]
        dlp = oc_phase_minus_code[i1] - oc_phase_minus_code[i0]
        med = np.nanmedian(dlp) if np.isfinite(dlp).any() else 0.0
        step_m = k[m] * 1e-3 * C_MPS
        followed = not (abs(med + step_m) < 0.1 * abs(step_m))
        if not followed:
            corr[i1:] += step_m
        jumps.append({"epoch": int(i1), "time_gps_ns": int(t_ns[i1]), "size_ms": int(k[m]),
                      "phases_followed": bool(followed)})
    return jumps, corr


def detect_slips(t_ns, mw_cycles, gf_m, lli, usable, options: PPPOptions, el_deg=None):
    """Arc numbering on the (n_ep, n_sat) grid: a new arc at LLI, gap, MW or GF jump.

    Returns ``(arc_start, slip)``: boolean grids, ``arc_start`` True at the first epoch of
    every arc and ``slip`` True where the arc was broken by a detected slip (not by a gap or
    the first observation). Loops over epochs (vectorised over satellites): the running
    MW mean and variance of each arc are a recursion.

    The GF test predicts each value linearly from the arc's previous two (the ionosphere's
    trend) and needs both: at an arc's second epoch only MW tests (a first difference carries
    the ionospheric rate, which at low elevation exceeds the threshold and would cut every
    following epoch into a new arc). Its threshold is ``max(gf_threshold_m, 4·gf_noise_m/sin el)``
    when ``el_deg`` (grid, degrees) is given: the 30-s second difference of GF measured on BRUS
    and CAGZ (2011-10-10) has a robust σ of 1.3-2.4 mm above 45° and 9-12 mm at 5-15°, about
    2.5 mm/sin el. A (1, 1) slip (5.4 cm) is therefore found above about 14° elevation.
    """
    n_ep, n_sat = mw_cycles.shape
    arc_start = np.zeros((n_ep, n_sat), dtype=bool)
    slip = np.zeros((n_ep, n_sat), dtype=bool)
    # per-satellite state of the current arc: count, MW mean and sum of squares (Welford),
    # time and GF of the last two epochs (NaN/0 at an arc start)
    n = np.zeros(n_sat)
    mean = np.zeros(n_sat)
    m2 = np.zeros(n_sat)
    last_t = np.full(n_sat, -1e30)
    gf1 = np.full(n_sat, np.nan)
    gf2 = np.full(n_sat, np.nan)
    t1 = np.zeros(n_sat)
    t2 = np.zeros(n_sat)
    tsec = (np.asarray(t_ns, dtype=np.int64) - int(t_ns[0])) / 1e9
    mw_all = np.where(usable, mw_cycles, np.nan)
    gf_thr_grid = None
    if el_deg is not None:
        with np.errstate(invalid="ignore", divide="ignore"):
            sin_el = np.sin(np.radians(np.clip(np.asarray(el_deg, dtype=float), 1.0, 90.0)))
        gf_thr_grid = np.maximum(options.gf_threshold_m, 4.0 * options.gf_noise_m / sin_el)
        gf_thr_grid = np.where(np.isfinite(gf_thr_grid), gf_thr_grid, options.gf_threshold_m)
    gf_all = np.where(usable, gf_m, np.nan)
    max_gap, k_mw, floor_mw, gf_thr = options.max_gap_s, options.mw_k, options.mw_min_cycles, options.gf_threshold_m
    rows = np.flatnonzero(usable.any(axis=1))
    old = np.seterr(invalid="ignore", divide="ignore")
    try:
        for i in rows:
            u = usable[i]
            t = tsec[i]
            mwi = mw_all[i]
            g = gf_all[i]
            new_arc = u & ((n == 0) | ((t - last_t) > max_gap))
            sd = np.where(n >= 3, np.sqrt(m2 / np.maximum(n - 1.0, 1.0)), 0.5)
            jump = np.abs(mwi - mean) > np.maximum(k_mw * sd, floor_mw)
            # GF predicted linearly from the arc's last two epochs (not tested with fewer)
            pred = gf1 + (gf1 - gf2) / (t1 - t2) * (t - t1)
            jump |= np.abs(g - pred) > (gf_thr if gf_thr_grid is None else gf_thr_grid[i])
            brk = u & ~new_arc & (jump | lli[i])
            start = new_arc | brk
            arc_start[i] = start
            slip[i] = brk
            keep = ~start
            n = n * keep + u
            delta = np.where(u, mwi - mean * keep, 0.0)
            mean = mean * keep + delta / np.maximum(n, 1.0)
            m2 = np.where(start, 0.0, m2) + np.where(u, delta * (mwi - mean), 0.0)
            gf2 = np.where(u, np.where(start, np.nan, gf1), gf2)
            t2 = np.where(u, t1, t2)
            gf1 = np.where(u, g, gf1)
            t1 = np.where(u, t, t1)
            last_t = np.where(u, t, last_t)
    finally:
        np.seterr(**old)
    return arc_start, slip


# ------------------------------------------------------------------ estimator

class _Design:
    """Rows of the linearised observation equations and their solution.

    Each row has an epoch index (its clock), a weight, an observed-minus-computed value
    and up to a few global parameters (column, coefficient). The epoch clocks are
    eliminated from the normal equations (they form a diagonal block), the global
    system is solved, and the clocks recovered.
    """

    def __init__(self, n_epoch, n_global):
        self.n_epoch = n_epoch
        self.n_global = n_global

    def solve(self, epoch, y, w, A, prior_diag=None, constraints=None):
        """``A``: sparse (n_rows, n_global); ``prior_diag``: (n_global,) weights of zero priors;
        ``constraints``: list of (sparse row matrix G, weights) pseudo-observations G·x = 0."""
        ne = self.n_epoch
        Aw = A.multiply(w[:, None]).tocsr()
        E = sp.csr_matrix((np.ones(len(epoch)), (np.arange(len(epoch)), epoch)), shape=(len(epoch), ne))
        Ncc = np.bincount(epoch, weights=w, minlength=ne)
        bc = np.bincount(epoch, weights=w * y, minlength=ne)
        Ngg = (A.T @ Aw).toarray()
        Ngc = (Aw.T @ E).tocsr()                          # (n_g, n_e)
        bg = Aw.T @ y
        have = Ncc > 0
        inv = np.where(have, 1.0 / np.where(have, Ncc, 1.0), 0.0)
        Ngc_s = Ngc.multiply(inv[None, :]).tocsr()
        M = Ngg - (Ngc_s @ Ngc.T).toarray()
        r = bg - Ngc_s @ bc
        if prior_diag is not None:
            M[np.diag_indices_from(M)] += prior_diag
        for G, gw in constraints or ():
            M += (G.T @ G.multiply(gw[:, None])).toarray()
        try:
            cf = scipy.linalg.cho_factor(M, lower=True, check_finite=False)
            x = scipy.linalg.cho_solve(cf, r, check_finite=False)
            Q = scipy.linalg.cho_solve(cf, np.eye(M.shape[0]), check_finite=False)
        except np.linalg.LinAlgError:
            x, *_ = np.linalg.lstsq(M, r, rcond=None)
            Q = np.linalg.pinv(M)
        clk = np.where(have, (bc - Ngc.T @ x) * inv, np.nan)
        B = Ngc.T.tocsr()                                  # (n_e, n_g)
        BQ = B @ Q
        var_c = inv + inv**2 * np.asarray(B.multiply(BQ).sum(axis=1)).ravel()
        var_c[~have] = np.nan
        v = y - A @ x - np.where(have, clk, 0.0)[epoch]
        return x, Q, clk, var_c, v


# ------------------------------------------------------------------ main

def _time_scale(orbits):
    clk = getattr(orbits, "clk", None)
    if clk is None:
        return "GPS time (SP3 clocks)"
    comments = " ".join((clk.header or {}).get("comments", []))
    if "IGST" in comments.upper() or "IGS TIME" in comments.upper():
        return f"IGS time (IGST), time system {clk.time_system}"
    ac = (clk.header or {}).get("analysis_center", "")
    return f"{clk.time_system} time of the {ac or 'product'} clocks".strip()


def _clock_convention(orbits, systems):
    parts = []
    if "G" in systems:
        parts.append("GPS clocks refer to the iono-free P1/P2 (C1W/C2W) combination")
    if "E" in systems:
        parts.append("Galileo clocks to E1/E5a")
    parts.append("periodic relativistic term excluded (added here as -2r.v/c^2)")
    parts.append(getattr(orbits, "pco_note", ""))
    return "; ".join(p for p in parts if p)


def _antenna_terms(antex, station, sats, el, az, sat_pos, rx, t_ns):
    """Receiver antenna PCO+PCV and satellite antenna nadir PCV along each line of sight (m,
    to add to the range), iono-free on the ANTEX frequencies of :data:`ctt.orbits.IF_FREQUENCIES`,
    with the ANTEX reader's receiver blocks and ctt.signals' combinations (ANTEX 1.4 §3).
    Returns (receiver_m, satellite_pcv_m, notes); zeros with the reason where not available."""
    from . import signals
    from .orbits import IF_FREQUENCIES

    n = len(sats)
    rx_m, sat_m = np.zeros(n), np.zeros(n)
    if antex is None:
        return rx_m, sat_m, {"receiver_antenna": "not applied (no ANTEX file)",
                             "satellite_pcv": "not applied (no ANTEX file)"}
    notes = {}
    letters = np.array([s[0] for s in sats])
    ant = getattr(station, "antenna", None)
    name = getattr(ant, "antex_name", None) or getattr(ant, "type", "") or ""
    block = antex.receiver(name) if hasattr(antex, "receiver") and name else None
    if block is None or not hasattr(signals, "iono_free_antenna_range_m"):
        notes["receiver_antenna"] = (f"not applied ({name.strip() or 'no antenna type'} not in {antex.path})"
                                     if hasattr(antex, "receiver") else
                                     "not applied (the ANTEX reader has no receiver antennas)")
    else:
        done = []
        for letter in np.unique(letters):
            f1, f2 = IF_FREQUENCIES.get(letter, (None, None))
            rows = letters == letter
            try:
                rx_m[rows] = signals.iono_free_antenna_range_m(block, f1, f2, az[rows], el[rows])
                done.append(letter)
            except (KeyError, ValueError, TypeError):
                continue
        rx_m = np.where(np.isfinite(rx_m), rx_m, 0.0)
        notes["receiver_antenna"] = f"{name} ({', '.join(done)}) from {antex.path}"
    if hasattr(signals, "iono_free_satellite_pcv_m"):
        rs = np.linalg.norm(sat_pos, axis=1)
        nadir = np.arcsin(np.clip(np.linalg.norm(rx) / rs * np.cos(el), -1.0, 1.0))
        t_mid = int(np.median(t_ns)) if len(t_ns) else 0
        missing = []
        for sat in np.unique(sats):
            rows = sats == sat
            blk = antex.offset(str(sat), t_mid)
            f1, f2 = IF_FREQUENCIES.get(str(sat)[0], (None, None))
            try:
                sat_m[rows] = signals.iono_free_satellite_pcv_m(blk, f1, f2, nadir[rows])
            except (KeyError, ValueError, TypeError):
                missing.append(str(sat))
        sat_m = np.where(np.isfinite(sat_m), sat_m, 0.0)
        notes["satellite_pcv"] = (f"nadir PCV from {antex.path}"
                                  + (f"; none for {', '.join(missing)}" if missing else ""))
    else:
        notes["satellite_pcv"] = "not applied (the ANTEX reader has no satellite PCV)"
    return rx_m, sat_m, notes


def _pole_tide_summary(erp, enu, xp, yp, t_ns) -> dict:
    name = " + ".join(pathlib.Path(p).name for p in str(erp.path).split("+"))
    held = geodesy.pole_hold_epochs(erp, t_ns)
    return {"model": f"IERS 2010 §7.1.4 with {name}", "erp": str(erp.path),
            "epochs_with_pole_held": held,     # outside the file's epochs, nearest epoch's pole
            "xp_arcsec": float(np.mean(xp)), "yp_arcsec": float(np.mean(yp)),
            "mean_enu_mm": [float(v) * 1e3 for v in np.mean(enu, axis=0)],
            "max_abs_up_mm": float(np.max(np.abs(enu[:, 2])) * 1e3),
            "max_abs_horizontal_mm": float(np.max(np.hypot(enu[:, 0], enu[:, 1])) * 1e3)}


def run_ppp(obs, orbits, station, options: PPPOptions = PPPOptions(), *, met=None, biases=None,
            antex=None, erp=None) -> PPPResult:
    """PPP of one station's observation file against a precise product (module docstring).

    ``obs``: :class:`ctt.formats.rinex_obs.ObsData`; ``orbits``: :class:`ctt.orbits.PreciseOrbits`
    (with its RINEX clock file and ANTEX); ``station``: :class:`ctt.config.StationConfig`;
    ``met``: RINEX met data or None (standard atmosphere); ``biases``: a code-bias set
    (ctt.signals) mapping C1C onto C1W where P1 is absent; ``antex``: ANTEX data for the
    receiver antenna (defaults to the one the orbits carry); ``erp``:
    :class:`ctt.formats.erp.ErpData` (:func:`ctt.formats.erp.read_erp`, several files joined by
    :func:`ctt.formats.erp.merge_erp`) for the pole tide (with ``options.tide``), or None.
    """
    opt = options
    if antex is None:
        antex = getattr(orbits, "antex", None)
    t_tag, sats_all, use_sys = measure.observation_epochs_and_satellites(obs, opt.systems)
    n_ep = len(t_tag)
    mopt = measure.MeasureOptions(signals="iono-free", systems=tuple(opt.systems), codes=PPP_CODES,
                                  biases=biases, elevation_mask_deg=opt.elevation_mask_deg)
    sel = measure.select_signals(obs, sats_all, mopt)
    if sel.phase_m is None:
        raise NoDataError(f"{obs.path}: no carrier phase of the selected signals")
    P = np.where(use_sys[None, :], sel.pseudorange_m, np.nan)
    L = np.where(use_sys[None, :], sel.phase_m, np.nan)
    f1, f2 = sel.f1_hz, sel.f2_hz

    # --- rows: every (epoch, satellite) with the iono-free code
    have_code = np.isfinite(P)
    ie, js = np.nonzero(have_code)
    if len(ie) == 0:
        raise NoDataError(f"{obs.path}: no iono-free pseudoranges of the systems {','.join(opt.systems)}")
    sats = sats_all[js]
    t_rx = t_tag[ie]
    rx0 = np.asarray(station.arp_m, dtype=float)
    lat, lon, h = (float(v) for v in geodesy.ecef_to_geodetic(rx0))

    geo = measure.receive_geometry(orbits, sats, t_rx, P[ie, js], ie, n_ep, rx0, sagnac=True)
    st = geo.states
    el, az = geo.el_rad, geo.az_rad
    flag = measure._status_flags(st, orbits)
    rx_clock_ep = np.full(n_ep, np.nan)
    rx_clock_ep[ie] = geo.rx_clock_s
    rx_clock_ep[~np.isin(np.arange(n_ep), ie)] = np.nan

    # --- model terms (each its own column)
    sat_clock_m = st.clock_s * C_MPS
    relativity_m = st.relativity_s * C_MPS
    shap = measure.shapiro_delay_m(geo.sat_rotated_m, rx0) if opt.shapiro else np.zeros(len(ie))
    doy = ts.day_of_year(t_rx)
    if met is not None:
        p_ep, t_ep, rh_ep, n_std = measure._met_at_epochs(met, t_tag, h)
        p_hpa, t_c, rh = p_ep[ie], t_ep[ie], rh_ep[ie]
    else:
        p_hpa = t_c = rh = None
        n_std = 0
    mjd = ts.to_mjd_float(t_rx)
    trop = atmosphere.slant_troposphere(el, lat, h, doy, p_hpa, t_c, rh, mapping=opt.mapping,
                                        lon_rad=lon, mjd=mjd)
    hydro_m = np.broadcast_to(trop.zhd_m, el.shape) * trop.mh
    wet_m = np.broadcast_to(trop.zwd_m, el.shape) * trop.mw
    mw_map = np.asarray(trop.mw, dtype=float)
    pole_m = np.zeros(len(ie))
    pole_note = "off" if not opt.tide else "not applied (no ERP file given)"
    if opt.tide:
        disp_ep = np.asarray(geodesy.solid_tide_displacement(rx0, t_tag, time_scale="GPS"))
        if erp is not None:
            pole_ecef, pole_enu, xp, yp = geodesy.pole_tide_ecef(erp, rx0, t_tag)
            pole_m = -np.einsum("ij,ij->i", geo.los, pole_ecef[ie])
            disp_ep = disp_ep + pole_ecef
            pole_note = _pole_tide_summary(erp, pole_enu, xp, yp, t_tag)
        tide_m = -np.einsum("ij,ij->i", geo.los, disp_ep[ie])   # solid tide + pole tide
    else:
        tide_m = np.zeros(len(ie))
    ant_m, sat_pcv_m, ant_notes = _antenna_terms(antex, station, sats, el, az, geo.sat_rotated_m, rx0, t_rx)
    sun = sun_position_ecef(t_rx)
    if opt.windup:
        wu = np.full((n_ep, len(sats_all)), np.nan)
        okpos = np.isfinite(geo.sat_rotated_m).all(axis=1)
        vals = np.full(len(ie), np.nan)
        # rows as one 'epoch' (leading axis of length 1): no unwrapping across satellites here;
        # each satellite's arc is unwrapped below over its finite values
        vals[okpos] = signals.phase_windup_cycles(geo.sat_rotated_m[okpos][None], rx0, sun[okpos][None])[0]
        wu[ie, js] = vals
        wu = _unwrap_columns(wu)
        windup_m = wu[ie, js] * (C_MPS / (f1[js] + f2[js]))
        windup_m = np.where(np.isfinite(windup_m), windup_m, 0.0)
    else:
        windup_m = np.zeros(len(ie))
    t_utc = ts.convert(t_tag, "GPS", "UTC")
    hw_ns, u_hw = measure._hardware_ns(station, t_utc, sel, ie, js)

    # --- eclipse: in the shadow and eclipse_margin_s after
    okpos = np.isfinite(geo.sat_rotated_m).all(axis=1)
    shadow = np.zeros(len(ie), dtype=bool)
    shadow[okpos] = in_earth_shadow(geo.sat_rotated_m[okpos], sun[okpos])  # ctt.orbits
    sgrid = np.full((n_ep, len(sats_all)), np.iinfo(np.int64).min // 2, dtype=np.int64)
    sgrid[ie[shadow], js[shadow]] = t_rx[shadow]
    last_shadow = np.maximum.accumulate(sgrid, axis=0)[ie, js]
    eclipse = (t_rx - last_shadow) <= int(opt.eclipse_margin_s * NS)

    common_m = (geo.geometry_m + geo.sagnac_m - sat_clock_m - relativity_m + shap + hydro_m + wet_m
                + tide_m + ant_m + sat_pcv_m)
    code_model = common_m + hw_ns * 1e-9 * C_MPS
    phase_model = common_m + windup_m
    oc_code = P[ie, js] - code_model
    Lrow = L[ie, js]

    # --- receiver clock jumps (millisecond resets): phases made to follow the code if needed
    lmp = np.full((n_ep, len(sats_all)), np.nan)
    lmp[ie, js] = Lrow - P[ie, js]
    jumps, phase_corr = detect_clock_jumps(t_tag, rx_clock_ep, lmp)
    Lrow = Lrow + phase_corr[ie]
    oc_phase = Lrow - phase_model

    # --- flags before the estimation
    mask = station.elevation_mask_deg if opt.elevation_mask_deg is None else opt.elevation_mask_deg
    el_deg = np.degrees(el)
    ok = flag == "ok"
    flag[ok & ~np.isfinite(Lrow)] = "missing_phase"
    ok = flag == "ok"
    flag[ok & (el_deg < mask)] = "low_elevation"
    ok = flag == "ok"
    flag[ok & eclipse] = "eclipse"
    ok = flag == "ok"
    flag[ok & ~np.isfinite(hw_ns)] = "no_delay_set"
    ok = flag == "ok"
    if sel.no_bias is not None and sel.no_bias.any():
        flag[ok & sel.no_bias[js]] = "no_code_bias"
    ok = flag == "ok"
    flag[ok & ~(np.isfinite(oc_code) & np.isfinite(oc_phase))] = "no_value"
    ok = flag == "ok"

    # --- cycle slips on the grid of usable values
    n_sat = len(sats_all)
    usable = np.zeros((n_ep, n_sat), dtype=bool)
    usable[ie[ok], js[ok]] = True
    with np.errstate(invalid="ignore", divide="ignore"):
        lam_wl = C_MPS / (f1 - f2)
        mw = ((f1 * sel.phase1_m - f2 * sel.phase2_m) / (f1 - f2)
              - (f1 * sel.code1_m + f2 * sel.code2_m) / (f1 + f2)) / lam_wl
        gf = sel.phase1_m - sel.phase2_m
    usable &= np.isfinite(mw) & np.isfinite(gf)
    lli = sel.slip_flags if sel.slip_flags is not None else np.zeros((n_ep, n_sat), dtype=bool)
    el_grid = np.full((n_ep, n_sat), np.nan)
    el_grid[ie, js] = el_deg
    arc_start, slip = detect_slips(t_tag, mw, gf, lli, usable, opt, el_deg=el_grid)
    arc_grid = np.full((n_ep, n_sat), -1, dtype=np.int64)
    arc_id = np.cumsum(arc_start.T.ravel()).reshape(n_sat, n_ep).T - 1   # numbered satellite by satellite
    arc_grid[usable] = arc_id[usable]
    arc = arc_grid[ie, js]
    flag[ok & (arc < 0)] = "missing_signal"
    ok = flag == "ok"
    n_arc_all = int(arc_start.sum())

    # --- short arcs
    def drop_short(ok_rows):
        a = arc[ok_rows]
        tt = t_rx[ok_rows]
        if not len(a):
            return ok_rows
        first = pd.Series(tt).groupby(a).transform("min").to_numpy()
        last = pd.Series(tt).groupby(a).transform("max").to_numpy()
        short = (last - first) < int(opt.min_arc_s * NS)
        out = ok_rows.copy()
        idx = np.flatnonzero(ok_rows)
        out[idx[short]] = False
        return out, idx[short]
    ok2, short_rows = drop_short(ok)
    flag[short_rows] = "short_arc"
    ok = ok2

    # --- weights
    sin_el = np.clip(np.sin(el), 0.05, 1.0)
    amp = sel.noise_factor[js]
    sig_c = opt.code_sigma_m * amp / sin_el
    sig_p = opt.phase_sigma_m * amp / sin_el
    if opt.clock_interpolation_sigma:
        t_tx = t_rx - np.rint((geo.rx_clock_s + geo.tau_s) * 1e9).astype(np.int64)
        sig_ci, ci_note = clock_interpolation_sigma_m(orbits, sats, t_tx)
        sig_c = np.sqrt(sig_c**2 + sig_ci**2)
        sig_p = np.sqrt(sig_p**2 + sig_ci**2)
    else:
        ci_note = "off"

    # --- ZWD nodes
    t0, t1 = int(t_tag[0]), int(t_tag[-1])
    step = int(opt.ztd_interval_s * NS)
    n_node = max(2, int(np.ceil((t1 - t0) / step)) + 1)
    u = (t_rx - t0) / step
    k0 = np.clip(np.floor(u).astype(np.int64), 0, n_node - 2)
    frac = u - k0

    # ambiguity a priori: the mean phase-minus-code of each arc (keeps the unknowns small)
    sys_row = np.array([s[0] for s in sats])
    systems_present = [s for s in opt.systems if np.any(sys_row[ok] == s)]
    if not systems_present:
        raise NoDataError(f"{obs.path}: no usable code and phase of the systems {','.join(opt.systems)}")
    ref_sys = systems_present[0]
    other_sys = systems_present[1:]

    code_rej = np.zeros(len(ie), dtype=bool)
    phase_rej = np.zeros(len(ie), dtype=bool)
    est_pos = opt.position in ("estimate", "constrained")
    n_pos = 3 if est_pos else 0
    it = 0
    while True:
        it += 1
        rc = ok & ~code_rej
        rp = ok & ~phase_rej
        arcs_used, arc_col = np.unique(arc[rp], return_inverse=True)
        amb0 = pd.Series(oc_phase[rp] - oc_code[rp]).groupby(arc_col).mean().to_numpy() \
            if rp.any() else np.zeros(0)
        n_amb = len(arcs_used)
        c_z = n_pos
        c_isb = c_z + n_node
        c_amb = c_isb + len(other_sys)
        n_g = c_amb + n_amb
        rows_c = np.flatnonzero(rc)
        rows_p = np.flatnonzero(rp)
        nr = len(rows_c) + len(rows_p)
        rid = np.concatenate([rows_c, rows_p])
        is_phase = np.concatenate([np.zeros(len(rows_c), bool), np.ones(len(rows_p), bool)])
        y = np.concatenate([oc_code[rows_c], oc_phase[rows_p] - amb0[arc_col]])
        sig = np.concatenate([sig_c[rows_c], sig_p[rows_p]])
        w = 1.0 / sig**2
        ri, ci, vv = [], [], []
        r_all = np.arange(nr)
        if est_pos:
            for a in range(3):
                ri.append(r_all); ci.append(np.full(nr, a)); vv.append(-geo.los[rid, a])
        ri.append(r_all); ci.append(c_z + k0[rid]); vv.append(mw_map[rid] * (1 - frac[rid]))
        ri.append(r_all); ci.append(c_z + k0[rid] + 1); vv.append(mw_map[rid] * frac[rid])
        for q, s in enumerate(other_sys):
            m = (~is_phase) & (sys_row[rid] == s)
            ri.append(r_all[m]); ci.append(np.full(int(m.sum()), c_isb + q)); vv.append(np.ones(int(m.sum())))
        pr_rows = r_all[is_phase]
        ri.append(pr_rows); ci.append(c_amb + arc_col); vv.append(np.ones(len(pr_rows)))
        A = sp.csr_matrix((np.concatenate(vv), (np.concatenate(ri), np.concatenate(ci))), shape=(nr, n_g))
        prior = np.zeros(n_g)
        if opt.position == "constrained":
            ps = opt.position_sigma_m if opt.position_sigma_m is not None else station.position_sigma_m
            prior[:3] = 1.0 / np.broadcast_to(np.asarray(ps, float), (3,)) ** 2
        elif est_pos:
            prior[:3] = 1.0 / 100.0**2    # 100 m: only keeps the system regular
        prior[c_z] = 1.0 / opt.zwd_apriori_sigma_m**2
        rw_sig = opt.ztd_random_walk_m * np.sqrt(opt.ztd_interval_s / 3600.0)
        G = sp.csr_matrix((np.concatenate([np.ones(n_node - 1), -np.ones(n_node - 1)]),
                           (np.concatenate([np.arange(n_node - 1)] * 2),
                            np.concatenate([c_z + np.arange(1, n_node), c_z + np.arange(n_node - 1)]))),
                          shape=(n_node - 1, n_g))
        design = _Design(n_ep, n_g)
        x, Q, clk, var_c, v = design.solve(ie[rid], y, w, A, prior_diag=prior,
                                           constraints=[(G, np.full(n_node - 1, 1.0 / rw_sig**2))])
        nv = v / sig
        vc, vp = nv[~is_phase], nv[is_phase]
        sc = 1.4826 * np.median(np.abs(vc)) if len(vc) else 1.0
        sp_ = 1.4826 * np.median(np.abs(vp)) if len(vp) else 1.0
        bad_c = np.abs(vc) > opt.outlier_k * max(sc, 1e-9)
        bad_p = np.abs(vp) > opt.outlier_k * max(sp_, 1e-9)
        if (not bad_c.any() and not bad_p.any()) or it >= opt.max_iterations:
            break
        # remove the worst per epoch only (one bad value inflates its epoch's other residuals)
        for bad, rows, rej, nvals in ((bad_c, rows_c, code_rej, vc), (bad_p, rows_p, phase_rej, vp)):
            if not bad.any():
                continue
            cand = np.flatnonzero(bad)
            ep = ie[rows[cand]]
            order = np.lexsort((-np.abs(nvals[cand]), ep))
            first = np.ones(len(order), dtype=bool)
            first[1:] = ep[order][1:] != ep[order][:-1]
            rej[rows[cand[order[first]]]] = True

    n_used = len(rid)
    dof = max(n_used - n_g - int(np.isfinite(clk).sum()), 1)
    s0sq = float(np.sum(w * v**2) / dof)
    # --- residual table
    code_res = np.full(len(ie), np.nan)
    phase_res = np.full(len(ie), np.nan)
    code_res[rows_c] = v[~is_phase]
    phase_res[rows_p] = v[is_phase]
    # residuals of rejected values too (against the final solution), for inspection
    pos_corr = x[:3] if est_pos else np.zeros(3)
    zw = x[c_z + k0] * (1 - frac) + x[c_z + k0 + 1] * frac
    isb = np.zeros(len(ie))
    for q, s in enumerate(other_sys):
        isb[sys_row == s] = x[c_isb + q]
    clk_row = np.where(np.isfinite(clk), clk, np.nan)[ie]
    pred_common = -geo.los @ pos_corr + mw_map * zw + clk_row
    rej_c = ok & code_rej
    code_res[rej_c] = (oc_code - pred_common - isb)[rej_c]
    amb_full = np.full(len(ie), np.nan)
    amb_map = dict(zip(arcs_used, amb0 + x[c_amb:c_amb + n_amb]))
    rej_p = ok & phase_rej
    if rej_p.any():
        amb_full[rej_p] = [amb_map.get(a, np.nan) for a in arc[rej_p]]
        phase_res[rej_p] = (oc_phase - pred_common - amb_full)[rej_p]
    flag_out = flag.copy()
    flag_out[rej_c] = "code_outlier"
    flag_out[rej_p & ~rej_c] = "phase_outlier"
    arc_out = np.where(ok | np.isin(flag, ["short_arc"]), arc, -1)
    res = pd.DataFrame({
        "time_gps_ns": t_rx.astype(np.int64), "sat": sats, "code_res_m": code_res, "phase_res_m": phase_res,
        "el_deg": el_deg, "az_deg": np.degrees(az), "arc": arc_out, "flag": flag_out.astype(str),
        "sigma_code_m": sig_c, "sigma_phase_m": sig_p,
        "geometry_m": geo.geometry_m, "sagnac_m": geo.sagnac_m, "sat_clock_m": sat_clock_m,
        "relativity_m": relativity_m, "shapiro_m": shap, "tropo_hydro_m": hydro_m,
        "tropo_wet_apriori_m": wet_m, "tropo_wet_est_m": mw_map * zw, "tide_m": tide_m, "pole_tide_m": pole_m,
        "antenna_rx_m": ant_m, "satellite_pcv_m": sat_pcv_m, "windup_m": windup_m, "hardware_ns": hw_ns,
        "eclipse": eclipse, "slip": slip[ie, js],
    })

    # --- epoch table
    n_sat_ep = np.bincount(ie[rows_p], minlength=n_ep)
    t_ok = np.isfinite(clk)
    u_ns = np.sqrt(var_c * s0sq) / C_MPS * 1e9
    node_t = t0 + np.arange(n_node) * step
    zwd_ep = np.interp(t_tag, node_t, x[c_z:c_z + n_node])
    zhd0, zwd0 = atmosphere.zenith_delays(*(atmosphere.standard_atmosphere(h) if met is None else
                                            measure._met_at_epochs(met, t_tag, h)[:3]), lat, h)
    ztd = np.broadcast_to(zhd0, t_tag.shape) + np.broadcast_to(zwd0, t_tag.shape) + zwd_ep
    eflag = np.where(~t_ok, "no_data", np.where(n_sat_ep < opt.min_sats, "few_satellites", "ok")).astype(object)
    clock = pd.DataFrame({
        "time_gps_ns": t_tag.astype(np.int64),
        "clock_ns": clk / C_MPS * 1e9, "u_ns": u_ns, "n_sat": n_sat_ep, "flag": eflag.astype(str),
        "ztd_m": np.where(t_ok, ztd, np.nan),
    })

    # --- summary
    arp = rx0 + pos_corr
    enu = geodesy.ecef_to_enu(pos_corr, lat, lon)
    sig_pos = np.sqrt(np.diag(Q)[:3] * s0sq) if est_pos else np.zeros(3)
    rejected = pd.Series(flag_out[flag_out != "ok"]).value_counts().to_dict()
    used_arcs = set(arc[ok].tolist())
    summary = {
        "station": station.id,
        "n_epochs": int(n_ep), "n_epochs_ok": int((eflag == "ok").sum()),
        "n_satellites": int(len(np.unique(sats[ok]))),
        "position_mode": opt.position,
        "position_arp_m": [float(v) for v in arp],
        "position_sigma_m": [float(v) for v in sig_pos],
        "apriori_arp_m": [float(v) for v in rx0],
        "enu_difference_m": [float(v) for v in np.asarray(enu).ravel()],
        "code_rms_m": float(np.sqrt(np.mean(v[~is_phase] ** 2))) if (~is_phase).any() else float("nan"),
        "phase_rms_m": float(np.sqrt(np.mean(v[is_phase] ** 2))) if is_phase.any() else float("nan"),
        "sigma0": float(np.sqrt(s0sq)),
        "n_arcs": int(len(used_arcs)), "n_arcs_detected": n_arc_all,
        "n_slips": int(slip.sum()),
        "n_clock_jumps": len(jumps),
        "clock_jumps": [{**j, "time_utc": ts.to_iso(int(ts.convert(np.array([j["time_gps_ns"]]), "GPS", "UTC")[0]))}
                        for j in jumps],
        "rejected": {str(k): int(v) for k, v in rejected.items()},
        "n_code_used": int((~is_phase).sum()), "n_phase_used": int(is_phase.sum()),
        "isb_m": {s: float(x[c_isb + q]) for q, s in enumerate(other_sys)},
        "reference_system": ref_sys,
        "time_scale": _time_scale(orbits),
        "satellite_clock_convention": _clock_convention(orbits, opt.systems),
        "signals": {str(s): str(sel.label[k]) for k, s in enumerate(sats_all) if use_sys[k] and sel.label[k]},
        "models": {
            "troposphere": f"Saastamoinen zenith delays ({'met file' if met is not None else 'standard atmosphere'}"
                           f"{f', standard atmosphere at {n_std} epochs' if n_std else ''}), {opt.mapping.upper()} "
                           f"mapping, ZWD piecewise linear every {opt.ztd_interval_s:.0f} s",
            **ant_notes,
            "windup": "Wu et al. 1993, nominal yaw" if opt.windup else "off",
            "shapiro": "IERS 2010 eq. 11.17" if opt.shapiro else "off",
            "solid_tide": "IERS 2010 §7.1.1" if opt.tide else "off",
            "pole_tide": pole_note["model"] if isinstance(pole_note, dict) else pole_note,
            "eclipse": f"cylindrical shadow + {opt.eclipse_margin_s:.0f} s flagged",
            "code_biases": "bias file" if biases is not None else "none",
            "satellite_clock_interpolation_sigma": ci_note,
        },
        "u_hardware_ns": float(u_hw),
        "iterations": it,
    }
    okc = clock["flag"].to_numpy() == "ok"
    summary["receiver_clock"] = measure.receiver_clock_character(clock["time_gps_ns"].to_numpy(np.int64)[okc],
                                                                 clock["clock_ns"].to_numpy(float)[okc])
    if isinstance(pole_note, dict):
        summary["pole_tide"] = pole_note
    return PPPResult(clock=clock, residuals=res, summary=summary, options=opt)
