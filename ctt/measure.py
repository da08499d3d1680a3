"""Per-satellite *local reference clock minus GNSS system time*, every correction itemised.

For one station and one observation file, each epoch and each satellite::

    clock = (P − ρ − sagnac − shapiro − T − I − tide)/c + Δt_sv + Δt_rel + Δt_gd − hardware

where ``P`` is the pseudorange of the chosen signal (or the iono-free
combination), ``ρ`` the geometric range from the satellite position at the
transmission instant to the station's antenna reference point at the receive
instant, ``sagnac`` the extra range from the Earth's rotation during the
signal flight, ``shapiro`` the relativistic range delay in the Earth's
gravity (IERS 2010 eq. 11.17, 13-19 mm for GPS: it does not cancel for a
station clock against system time; switched with ``relativity``), ``T`` /
``I`` the modelled slant troposphere and ionosphere,
``tide`` the range change from the solid Earth tide displacement of the
station, ``Δt_sv`` the satellite clock (broadcast polynomial or precise
product), ``Δt_rel`` the periodic relativistic correction, ``Δt_gd`` the
satellite group-delay correction of the signals used, and ``hardware`` the
station delays ``receiver + cable − reference`` (ctt.config, "Sign
convention"). Every term is a column of the output table.

Frame and light time
--------------------
Everything is computed in the Earth-fixed frame at the *receive* instant. The
satellite position at the transmission instant ``t_r − τ`` is rotated about
the z axis by ``ω_e·τ`` (the Earth turns while the signal flies); the light
time ``τ`` is iterated from the receive instant until it changes by less than
1 ps (``LIGHT_TIME_TOL_S``). The receive instant is the receiver time tag
minus a first estimate of the receiver clock (from a pseudorange-based
transmission time), so a receiver whose clock is milliseconds off GPS time is
handled as well as a steered one (a 1 µs error in that estimate changes a
range by < 1 mm). ``sagnac_m`` is the difference between the rotated and the
unrotated range; with ``sagnac=False`` the unrotated range is used (for
comparisons only: it is wrong by up to ~40 m).

Flags
-----
Each row has ``flag`` ``ok`` or the reason it is not used: ``no_ephemeris``,
``unhealthy``, ``stale``, ... (from the orbit source), ``low_elevation``,
``missing_signal`` (the second code of an iono-free pair is absent),
``outlier`` (rejected from the epoch's robust mean), ``cycle_slip`` (only when
smoothing: the first epoch after a slip while the filter restarts is still
used, so this flag marks nothing unusable; it is recorded in
``smoothing_reset``). Poor data is counted, never fatal.

For the PPP estimator: :func:`shapiro_delay_m` (IERS 2010 eq. 11.17, to add to
the geometric range), :func:`sagnac_closed_form_m`, :func:`light_time`.
"""

from __future__ import annotations

import dataclasses
import logging

import numpy as np
import pandas as pd

from . import atmosphere, geodesy, signals
from . import timescales as ts
from .errors import NoDataError, ProcessingError

log = logging.getLogger(__name__)

#: Speed of light (SI definition; IS-GPS-200 value).
C_MPS = 299_792_458.0
#: Earth rotation rate (IS-GPS-200; WGS 84).
OMEGA_E = 7.2921151467e-5
#: Light-time iteration stops when τ changes by less than this (s).
LIGHT_TIME_TOL_S = 1e-12

COLUMNS = [
    "time", "sat", "system", "signal", "elevation_deg", "azimuth_deg", "clock_ns", "sigma_ns",
    "pseudorange_m", "geometry_m", "sat_clock_ns", "relativity_ns", "group_delay_ns", "sagnac_m",
    "shapiro_m", "troposphere_m", "ionosphere_m", "tide_m", "hardware_ns", "residual_ns", "flag",
]


@dataclasses.dataclass(frozen=True)
class MeasureOptions:
    """Processing choices of the measurement model (defaults suit a timing receiver)."""

    signals: str = "iono-free"          #: 'iono-free' or 'single'
    systems: tuple = ("G",)             #: RINEX system letters to use
    codes: tuple = ()                   #: explicit codes, overriding the priority lists
    elevation_mask_deg: float | None = None  #: None: the station file's mask
    troposphere: bool = True
    ionosphere: bool = True             #: single-frequency only (iono-free removes it)
    tide: bool = True
    sagnac: bool = True
    relativity: bool = True
    iono_model: str = "klobuchar"       #: 'klobuchar' (nav header) or 'ionex'
    smoothing_s: float = 0.0            #: Hatch filter window (0 = no carrier smoothing)
    mad_k: float = 3.5                  #: epoch outlier rejection at k × 1.4826 × MAD
    sigma0_m: float = 0.3               #: a-priori code noise at zenith (σ = σ0 / sin el)
    biases: object = None               #: ctt.signals.BiasSet (Bias-SINEX) mapping codes onto the clock's
    #: or 'estimate': each satellite's constant bias fitted on the day (apply_code_bias_estimates)

    def __post_init__(self):
        if isinstance(self.biases, str) and self.biases != "estimate":
            raise ValueError(f"biases must be a bias set, None or 'estimate', not {self.biases!r}")
        if self.signals not in ("iono-free", "single"):
            raise ValueError(f"signals must be 'iono-free' or 'single', not {self.signals!r}")
        if self.iono_model not in ("klobuchar", "ionex"):
            raise ValueError(f"iono_model must be 'klobuchar' or 'ionex', not {self.iono_model!r}")


@dataclasses.dataclass
class StationDay:
    """Result of :func:`measure_station`: the per-satellite table and the epoch solution."""

    table: pd.DataFrame      #: one row per epoch × satellite, columns COLUMNS
    epochs: pd.DataFrame     #: per epoch: time, clock_ns, scatter_ns, n_sat, n_rejected
    station_id: str
    reference: str           #: 'broadcast' or 'precise'
    counts: dict             #: rows by flag
    info: dict               #: codes used, models, meteorology source, ...

    def summary_lines(self) -> list[str]:
        """A one-screen human summary."""
        t = self.table
        ok = t["flag"] == "ok"
        lines = [f"station {self.station_id}: {t['sat'].nunique()} satellites, "
                 f"{t['time'].nunique()} epochs, {int(ok.sum())} of {len(t)} values used "
                 f"(clock reference: {self.reference})"]
        for flag, n in sorted(self.counts.items(), key=lambda kv: -kv[1]):
            if flag != "ok":
                lines.append(f"  rejected {flag}: {n}")
        if ok.any():
            r = t.loc[ok, "residual_ns"]
            lines.append(f"  residual RMS against the epoch mean: {np.sqrt(np.mean(r**2)):.2f} ns "
                         f"({np.sqrt(np.mean(r**2)) * C_MPS * 1e-9:.2f} m)")
            for col, unit in (("troposphere_m", "m"), ("ionosphere_m", "m"), ("sagnac_m", "m"), ("shapiro_m", "m"),
                              ("tide_m", "m"), ("relativity_ns", "ns"), ("group_delay_ns", "ns"),
                              ("hardware_ns", "ns")):
                v = t.loc[ok, col].to_numpy()
                if np.any(np.isfinite(v)) and np.nanmax(np.abs(v)) > 0:
                    lines.append(f"  {col:<15} median |{np.nanmedian(np.abs(v)):.3f}| {unit}, "
                                 f"max |{np.nanmax(np.abs(v)):.3f}| {unit}")
            if t.loc[ok, "system"].nunique() > 1:
                for letter, r_s in t.loc[ok].groupby("system")["residual_ns"]:
                    lines.append(f"  system {letter}: {len(r_s)} values, residual RMS "
                                 f"{np.sqrt(np.mean(r_s ** 2)):.2f} ns")
            for letter, b in (self.info.get("inter_system_bias") or {}).items():
                lines.append(f"  inter-system bias {letter}-{b['reference']}: {b['mean_ns']:+.2f} ns "
                             f"(SD over {b['n_epochs']} epochs {b['sd_ns']:.2f} ns; hourly means within "
                             f"{b['hourly_spread_ns']:.2f} ns, SD {b['hourly_sd_ns']:.2f} ns)")
            per_sat = t.loc[ok].groupby("sat")["residual_ns"].mean()
            off = per_sat[np.abs(per_sat) > 3.0].sort_values()
            if len(off):
                lines.append("  satellites with a mean residual over 3 ns (code biases, orbit or clock errors): "
                             + ", ".join(f"{k} {v:+.1f}" for k, v in off.items()))
        est = self.info.get("code_bias_estimates")
        if est:
            b = np.array([e["bias_ns"] for e in est], dtype=float)
            u = np.array([e["u_ns"] for e in est], dtype=float)
            lines.append(f"  code biases estimated for {len(b)} satellites (zero mean; their common part stays "
                         f"in the station clock): RMS {np.sqrt(np.mean(b ** 2)):.2f} ns, "
                         f"median u {np.nanmedian(u) if np.isfinite(u).any() else float('nan'):.2f} ns; "
                         + ", ".join(f"{e['sat']} {e['bias_ns']:+.2f}({e['u_ns']:.2f})" for e in est))
        by_label = {}
        for sat, lab in (self.info.get("codes") or {}).items():
            by_label.setdefault(lab, []).append(sat)
        # 'C1C+': iono-free asked for, the second code never present (those rows: missing_signal)
        lines.append("  signals: " + "; ".join(
            f"{(lab[:-1] + ' without a second code (not used)') if lab.endswith('+') else (lab or 'none')} "
            f"({len(v)} satellites)" for lab, v in sorted(by_label.items())))
        return lines


# ------------------------------------------------------------------ helpers

def inter_system_biases(table: pd.DataFrame, reference_system: str, *, bin_s: float = 3600.0) -> dict:
    """The receiver's inter-system biases from a multi-system measurement table.

    Each system gets its own clock per epoch: the weighted (1/σ²) mean of its rows flagged
    ``ok`` (after any code-bias estimates were removed from ``clock_ns``); the bias of system X
    against ``reference_system`` at an epoch is the difference of the two. It is the receiver's
    hardware delay difference of the two systems' signals plus, with broadcast clocks, the offset
    between the two system times as the broadcast clocks realise them (with a precise product
    all clocks refer to one time scale). It is a constant of the receiver for a day (common
    practice), so its stability is part of the result: per system the mean, the SD of the
    epoch differences, and the spread (max − min) and SD of the ``bin_s`` means (single-epoch
    noise averages out there, a drift or a constellation-dependent error does not: GLONASS
    per-channel code biases move the epoch mean as satellites rise and set unless estimated).
    Returns ``{X: {reference, mean_ns, sd_ns, n_epochs, hourly_spread_ns, hourly_sd_ns,
    hourly_mean_ns}}``; systems with fewer than 2 common epochs are left out.
    """
    ok = table["flag"].to_numpy() == "ok"
    if not ok.any():
        return {}
    t = table.loc[ok, ["time", "system"]].copy()
    w = 1.0 / table.loc[ok, "sigma_ns"].to_numpy(float) ** 2
    t["w"] = w
    t["wx"] = w * table.loc[ok, "clock_ns"].to_numpy(float)
    g = t.groupby(["time", "system"])[["w", "wx"]].sum()
    clk = (g["wx"] / g["w"]).unstack("system")
    if reference_system not in clk.columns:
        return {}
    out = {}
    times = clk.index.to_numpy(dtype=np.int64)
    for letter in [c for c in clk.columns if c != reference_system]:
        d = (clk[letter] - clk[reference_system]).to_numpy(float)
        m = np.isfinite(d)
        if m.sum() < 2:
            continue
        b = (times[m] - times[m].min()) // int(bin_s * 1e9)
        hourly = pd.Series(d[m]).groupby(b).agg(["mean", "size"])
        hourly = hourly.loc[hourly["size"] >= 10, "mean"]   # bins with at least 10 epochs
        out[str(letter)] = {"reference": reference_system, "mean_ns": float(np.mean(d[m])),
                            "sd_ns": float(np.std(d[m], ddof=1)), "n_epochs": int(m.sum()),
                            "hourly_spread_ns": float(np.ptp(hourly)) if len(hourly) else float("nan"),
                            "hourly_sd_ns": float(np.std(hourly, ddof=1)) if len(hourly) > 1 else float("nan"),
                            "hourly_mean_ns": [float(v) for v in hourly]}
    return out


def _rotate_z(pos, angle):
    """Rotate ECEF positions (N,3) about z by ``angle`` (N,) radians (frame rotation R3(angle))."""
    c, s = np.cos(angle), np.sin(angle)
    out = np.empty_like(pos)
    out[:, 0] = c * pos[:, 0] + s * pos[:, 1]
    out[:, 1] = -s * pos[:, 0] + c * pos[:, 1]
    out[:, 2] = pos[:, 2]
    return out


def sagnac_closed_form_m(sat_ecef_m, rx_ecef_m):
    """First-order Earth-rotation range correction ω_e/c·(x_s·y_r − y_s·x_r) (IS-GPS-200, §20.3.3.4.3.3.2)."""
    s = np.asarray(sat_ecef_m, dtype=float)
    r = np.asarray(rx_ecef_m, dtype=float)
    return OMEGA_E / C_MPS * (s[..., 0] * r[..., 1] - s[..., 1] * r[..., 0])


#: GM of the Earth for the Shapiro delay, m³/s² (IERS Conventions 2010, Table 1.1: 3.986004418e14).
GM_EARTH_IERS = 3.986004418e14


def shapiro_delay_m(sat_ecef_m, rx_ecef_m):
    """Relativistic range delay by the Earth's gravity (Shapiro), metres, IERS Conventions (2010) eq. 11.17.

    ``Δ = (2GM/c²) ln((r_s + r_r + ρ)/(r_s + r_r − ρ))`` with r_s, r_r the
    geocentric distances of satellite and receiver and ρ their distance; to
    be *added* to the geometric range. About 13 mm at the zenith and 19 mm
    at the horizon for GPS (eq. 11.17 evaluated). It is common to both code and
    carrier and, for a station clock, does not cancel between stations.
    Vectorised (broadcasting over leading axes).
    """
    s = np.asarray(sat_ecef_m, dtype=float)
    r = np.asarray(rx_ecef_m, dtype=float)
    rs = np.linalg.norm(s, axis=-1)
    rr = np.linalg.norm(r, axis=-1)
    rho = np.linalg.norm(s - r, axis=-1)
    return 2.0 * GM_EARTH_IERS / C_MPS**2 * np.log((rs + rr + rho) / (rs + rr - rho))


def light_time(orbits, sats, t_rx_ns, dt_rx_s, rx_ecef_m, *, sagnac=True, tau0_s=None, max_iter=8):
    """Iterate the light time from receive instants ``t_rx_ns + dt_rx_s`` (GPS).

    Returns ``(tau_s, states, sat_rotated_m)``: light time, satellite states at
    the transmission instant, and the satellite position in the Earth-fixed
    frame of the receive instant. Converges to ``LIGHT_TIME_TOL_S``.
    """
    n = len(sats)
    rx = np.broadcast_to(np.asarray(rx_ecef_m, dtype=float), (n, 3))
    tau = np.full(n, 0.075) if tau0_s is None else np.asarray(tau0_s, dtype=float).copy()
    for _ in range(max_iter):
        st = orbits.states(sats, t_rx_ns, dt_rx_s - tau)
        pos = _rotate_z(st.pos_m, OMEGA_E * tau) if sagnac else st.pos_m
        new = np.linalg.norm(pos - rx, axis=1) / C_MPS
        bad = ~np.isfinite(new)  # no state: keep a nominal value so later calls stay finite
        new[bad] = 0.075
        change = np.max(np.abs(new - tau)[~bad]) if np.any(~bad) else 0.0
        tau = new
        if not np.isfinite(change) or change < LIGHT_TIME_TOL_S:
            break
    st = orbits.states(sats, t_rx_ns, dt_rx_s - tau)
    pos = _rotate_z(st.pos_m, OMEGA_E * tau) if sagnac else st.pos_m
    return tau, st, pos


def _status_flags(states, orbits):
    """Lower-case flag text for each orbit status (OK -> 'ok'), from the source's own table."""
    import sys

    names = getattr(orbits, "STATUS_NAMES", None) or getattr(sys.modules[type(orbits).__module__],
                                                             "STATUS_NAMES", {0: "OK"})
    st = np.asarray(states.status)
    out = np.empty(st.shape, dtype=object)
    for code in np.unique(st):
        out[st == code] = names.get(int(code), f"status_{int(code)}").lower()
    return out


#: Small-sample consistency factors b_n of the MAD for n = 0..9 (Croux & Rousseeuw 1992,
#: from memory; 0-1 unused).
_MAD_SMALL_N = np.array([1.0, 1.0, 1.196, 1.495, 1.363, 1.206, 1.200, 1.140, 1.129, 1.107])
#: The rejection scale is at least this fraction of the epoch's median a-priori σ. Measured on
#: normal samples with the right σ (3-8 satellites): 0 -> 4-7 % of good values rejected, 0.5 ->
#: 1-2 %, 1.0 -> 0.05 %. 0.5 is our choice: it keeps the test useful when the a-priori noise model
#: (σ0 = 0.3 m, a timing-receiver figure) is pessimistic for a receiver, and still removes spikes.
FLOOR_FACTOR = 0.5


def robust_epoch_mean(values, weights, mad_k=3.5, min_sats=1, sigma=None):
    """Per-row robust weighted mean of a 2-D array (n_epoch, n_sat), NaN = absent.

    Median of the row and the deviations ``e = |v − med| / s`` with ``s`` each
    value's a-priori σ relative to the row's median σ (so a low satellite, noisier
    by 1/sin el, is judged against its own noise; all 1 when ``sigma`` is None).
    The scale is ``b_n·1.4826·MAD(e)`` of *all* the row's values, once: b_n is the
    small-sample consistency factor of the MAD (Croux & Rousseeuw 1992; b_n =
    n/(n − 0.8) for n > 9, tabulated below that; from memory), because the MAD of
    the 3-10 satellites of one epoch underestimates σ and an uncorrected, re-shrunk
    scale rejects several per cent of a normal sample; the scale is also at least
    ``FLOOR_FACTOR`` × the row's median a-priori σ (and 0.1 ns). Values with
    ``e > k·scale`` are rejected; the median is then recomputed from what
    is kept and the test repeated with the same scale until nothing changes. No
    rejection in rows with fewer than 3 values. Returns (weighted mean of what is
    kept, scatter (weighted RMS of the kept residuals), n_used, rejected mask).
    """
    import warnings

    v = np.asarray(values, dtype=float)
    w = np.where(np.isfinite(v), np.asarray(weights, dtype=float), 0.0)
    if sigma is None:
        rel = np.ones_like(v)
    else:
        sg = np.where(np.isfinite(v), np.asarray(sigma, dtype=float), np.nan)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            rel = sg / np.nanmedian(sg, axis=1)[:, None]
        rel = np.where(np.isfinite(rel) & (rel > 0), rel, 1.0)
    keep = np.isfinite(v)
    n = np.sum(keep, axis=1)
    few = n < 3
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        med = np.nanmedian(v, axis=1)
        e = np.abs(v - med[:, None]) / rel
        mad = np.nanmedian(e, axis=1)
    b_n = np.where(n > 9, n / np.maximum(n - 0.8, 1.0), _MAD_SMALL_N[np.clip(n, 0, 9)])
    floor = np.full(v.shape[0], 0.1)
    if sigma is not None and FLOOR_FACTOR > 0:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            f = FLOOR_FACTOR * np.nanmedian(sg, axis=1)
        floor = np.where(np.isfinite(f), np.maximum(f, 0.1), 0.1)
    lim = mad_k * np.maximum(1.4826 * b_n * mad, floor)
    for _ in range(5):
        new_keep = np.isfinite(v) & (e <= lim[:, None])
        new_keep[few] = np.isfinite(v[few])
        if np.array_equal(new_keep, keep):
            break
        keep = new_keep
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            med = np.nanmedian(np.where(keep, v, np.nan), axis=1)
            e = np.abs(v - med[:, None]) / rel
    wk = np.where(keep, w, 0.0)
    sw = wk.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(sw > 0, np.nansum(np.where(keep, v, 0.0) * wk, axis=1) / sw, np.nan)
        res = np.where(keep, v - mean[:, None], np.nan)
        scatter = np.sqrt(np.nansum(wk * res**2, axis=1) / sw)
    n_used = keep.sum(axis=1)
    mean[n_used < min_sats] = np.nan
    rejected = np.isfinite(v) & ~keep
    return mean, scatter, n_used, rejected


# ------------------------------------------------------------------ position check

#: Antenna position check (ctt.pipeline reports it): warn above this 3-D difference (m) ...
POSITION_WARN_M = 2.0
#: ... and flag the day above this one (m).
POSITION_FLAG_M = 10.0


def estimate_position(sat_m, pc_m, group, weights, x0_m, *, iterations=6, reject_k=5.0):
    """Least-squares antenna position from corrected code ranges, one clock per group.

    ``pc_m`` (N,) are code ranges with every modelled term removed except the
    geometric range and the receiver clock: ``pc = |sat − x| + c·dt[group]``;
    ``sat_m`` (N,3) the satellite positions in the Earth-fixed frame of the
    receive instant, ``group`` (N,) int the clock each row shares (epoch × system:
    systems have their own time scales), ``weights`` (N,) the row weights, ``x0_m``
    the start. Gauss-Newton: the clocks are eliminated per group (each row minus
    its group's weighted mean, the reduced normal equations of the full problem),
    the 3 × 3 system is solved and the step applied; rows whose residual exceeds
    ``reject_k`` × the robust scale (1.4826·MAD, at least 0.3 m) about their group's
    median are left out once the step is below 100 m. numpy's lstsq does not eliminate thousands of
    nuisance clocks without building the full design matrix, hence this.

    Returns a dict: ``position_m`` (3,), ``sigma_m`` (3,) formal (σ0² (AᵀWA)⁻¹,
    optimistic: errors correlated in time are taken as white), ``rms_m`` of the
    residuals, ``n_used``, ``n_groups``, ``iterations``; None when fewer than
    4 satellites' worth of rows.
    """
    sat = np.asarray(sat_m, dtype=float)
    y0 = np.asarray(pc_m, dtype=float)
    g = np.asarray(group, dtype=np.int64)
    w = np.asarray(weights, dtype=float)
    use = np.isfinite(y0) & np.all(np.isfinite(sat), axis=1) & np.isfinite(w) & (w > 0)
    if use.sum() < 8:
        return None
    sat, y0, w = sat[use], y0[use], w[use]
    _, g = np.unique(g[use], return_inverse=True)
    n_g = int(g.max()) + 1
    keep = np.ones(len(y0), dtype=bool)
    x = np.asarray(x0_m, dtype=float).copy()
    cov = np.full((3, 3), np.nan)
    rms, it = np.nan, 0
    for it in range(1, iterations + 1):
        d = sat - x
        rho = np.linalg.norm(d, axis=1)
        a = -d / rho[:, None]                 # ∂ρ/∂x
        y = y0 - rho
        wk = np.where(keep, w, 0.0)
        sw = np.bincount(g, wk, minlength=n_g)
        ok_g = sw > 0
        inv = np.where(ok_g, 1.0 / np.where(ok_g, sw, 1.0), 0.0)
        yr = y - (np.bincount(g, wk * y, minlength=n_g) * inv)[g]
        ar = a - np.stack([np.bincount(g, wk * a[:, k], minlength=n_g) * inv for k in range(3)], axis=1)[g]
        nmat = (ar * wk[:, None]).T @ ar
        if np.linalg.cond(nmat) > 1e12:
            return None
        dx = np.linalg.solve(nmat, (ar * wk[:, None]).T @ yr)
        x = x + dx
        res = yr - ar @ dx
        n_used = int(keep.sum())
        n_groups = int(np.count_nonzero(np.bincount(g[keep], minlength=n_g) > 0))
        dof = max(n_used - n_groups - 3, 1)
        s0 = float(np.sum(wk * res**2) / dof)
        cov = s0 * np.linalg.inv(nmat)
        rms = float(np.sqrt(np.mean(res[keep] ** 2)))
        scale = max(1.4826 * float(np.median(np.abs(res[keep]))), 0.3)
        # rejection on residuals about each group's median clock (one bad row must not drag
        # its group's other rows out with it, as about a mean it would)
        r_raw = y - a @ dx
        r_med = r_raw - pd.Series(r_raw).groupby(g).transform("median").to_numpy()
        new_keep = np.abs(r_med) <= reject_k * scale
        if np.linalg.norm(dx) < 1e-4 and (it > 1 and np.array_equal(new_keep, keep)):
            break
        if it >= 1 and np.linalg.norm(dx) < 100.0:
            keep = new_keep
    return {"position_m": x, "sigma_m": np.sqrt(np.diag(cov)), "rms_m": rms,
            "n_used": int(keep.sum()), "n_groups": n_groups, "iterations": it}


def position_check(estimate, station_xyz_m) -> dict | None:
    """The estimate against the station file's position: E/N/U difference (estimate minus file), m."""
    if estimate is None:
        return None
    ref = np.asarray(station_xyz_m, dtype=float)
    lat, lon, _ = geodesy.ecef_to_geodetic(ref)
    r = geodesy.enu_matrix(float(lat), float(lon))
    d = r @ (estimate["position_m"] - ref)
    s = np.sqrt(np.diag(r @ np.diag(estimate["sigma_m"] ** 2) @ r.T))
    dist = float(np.linalg.norm(d))
    status = "flagged" if dist > POSITION_FLAG_M else "warning" if dist > POSITION_WARN_M else "ok"
    return {"estimate_m": [float(v) for v in estimate["position_m"]],
            "station_file_m": [float(v) for v in ref],
            "d_east_m": float(d[0]), "d_north_m": float(d[1]), "d_up_m": float(d[2]),
            "distance_m": dist, "sigma_enu_m": [float(v) for v in s], "rms_m": estimate["rms_m"],
            "n_used": estimate["n_used"], "n_epochs": estimate["n_groups"], "status": status,
            "thresholds_m": {"warn": POSITION_WARN_M, "flag": POSITION_FLAG_M}}


@dataclasses.dataclass
class ReceiveGeometry:
    """Per-row geometry at the receive instant (see :func:`receive_geometry`)."""

    tau_s: np.ndarray            #: light time
    states: object               #: satellite states at the transmission instant
    sat_rotated_m: np.ndarray    #: satellite position in the Earth-fixed frame of the receive instant
    geometry_m: np.ndarray       #: range from the unrotated satellite position
    sagnac_m: np.ndarray         #: rotated minus unrotated range (0 with sagnac=False)
    el_rad: np.ndarray
    az_rad: np.ndarray
    los: np.ndarray              #: unit vectors receiver -> satellite (N, 3)
    rx_clock_s: np.ndarray       #: per row, the rough receiver clock used for the receive instant


def receive_geometry(orbits, sats, t_rx, pr_m, ie, n_ep, rx, *, sagnac=True) -> ReceiveGeometry:
    """Light time, satellite states and range of each (epoch, satellite) row.

    ``t_rx`` are the receiver time tags (GPS ns) of the rows, ``pr_m`` their
    pseudoranges (NaN where absent), ``ie`` the epoch index of each row. A first
    pass from the pseudoranges gives a rough receiver clock per epoch (median over
    the satellites); the receive instant is the time tag minus it, so a receiver
    clock milliseconds off (free oscillators with millisecond resets) does not
    shift the satellite positions (~800 m/s range rate x 1 ms = 0.8 m otherwise).
    """
    Pf = np.asarray(pr_m, dtype=float)
    valid = np.isfinite(Pf)
    p_for_tx = np.where(valid, Pf, 0.075 * C_MPS)
    st0 = orbits.states(sats, t_rx, -p_for_tx / C_MPS)
    dtsat0 = st0.clock_s + st0.relativity_s
    dtsat0 = np.where(np.isfinite(dtsat0), dtsat0, 0.0)
    st1 = orbits.states(sats, t_rx, -p_for_tx / C_MPS - dtsat0)
    tau_a = np.linalg.norm(st1.pos_m - rx, axis=1) / C_MPS
    rough = (Pf / C_MPS - tau_a + st1.clock_s)  # receiver clock, s (no delays; µs-level)
    rough_ep = _epoch_median(ie, rough, n_ep)
    rx_clock = np.where(np.isfinite(rough_ep[ie]), rough_ep[ie], 0.0)
    tau, st, sat_rot = light_time(orbits, sats, t_rx, -rx_clock, rx, sagnac=sagnac,
                                  tau0_s=np.where(np.isfinite(tau_a), tau_a, 0.075))
    sat_norot = st.pos_m
    rng_norot = np.linalg.norm(sat_norot - rx, axis=1)
    rng_rot = np.linalg.norm(_rotate_z(sat_norot, OMEGA_E * tau) - rx, axis=1)
    sagnac_m = (rng_rot - rng_norot) if sagnac else np.zeros_like(rng_norot)
    az, el, _ = geodesy.azimuth_elevation(rx, sat_rot)
    los = (sat_rot - rx) / np.linalg.norm(sat_rot - rx, axis=1)[:, None]
    return ReceiveGeometry(tau_s=tau, states=st, sat_rotated_m=sat_rot, geometry_m=rng_norot,
                           sagnac_m=sagnac_m, el_rad=el, az_rad=az, los=los, rx_clock_s=rx_clock)


# ------------------------------------------------------------------ main

#: Size of a receiver clock reset (ns) and how close to a multiple of it a change must be.
RESET_STEP_NS = 1e6
RESET_TOLERANCE_NS = 1e4
#: A receiver clock running faster or slower than system time by more than this (s/s) is not
#: on a laboratory reference: 1e-8 s/s is 0.86 ms a day, what a free crystal oscillator does,
#: while caesium, hydrogen-maser and rubidium references stay below about 1e-10 (common practice).
FREE_RUNNING_RATE = 1e-8


def millisecond_resets(t_ns, clock_ns, *, step_ns: float = RESET_STEP_NS,
                       tolerance_ns: float = RESET_TOLERANCE_NS):
    """Whole-millisecond resets in a receiver clock series (epoch values, time order).

    Many receivers keep their internal clock within ±0.5 ms of system time by resetting it
    in steps of exactly 1 ms (common practice; real-2021-001's DELF drifts by −0.735 µs/s
    and steps by +1 ms every 22.5 min, real-2011-283's CAGZ by −0.31 µs/s). Detection: the
    change between consecutive values minus the series' median rate times the interval,
    when within ``tolerance_ns`` (10 µs: far above the ns-level changes of a drift, far below
    half a step) of a non-zero multiple of ``step_ns``. Returns ``(jump, k, rate)``: for each
    consecutive pair whether it holds a reset and of how many steps, and the median rate in
    ns per second (resets excluded)."""
    t = np.asarray(t_ns, dtype=np.int64)
    c = np.asarray(clock_ns, dtype=float)
    if t.size < 2:
        return np.zeros(0, dtype=bool), np.zeros(0), 0.0
    dt = np.diff(t) / 1e9
    d = np.diff(c)
    rate = float(np.median(d / dt))
    resid = d - rate * dt
    k = np.rint(resid / step_ns)
    jump = (k != 0) & (np.abs(resid - k * step_ns) < tolerance_ns)
    if jump.any() and (~jump).any():
        rate = float(np.median(d[~jump] / dt[~jump]))
    return jump, np.where(jump, k, 0.0), rate


def receiver_clock_character(t_ns, clock_ns) -> dict:
    """What the day says of the receiver clock: its rate against system time (s/s), its
    millisecond resets, and whether it can be a laboratory reference clock at all
    (``continuous``: no reset and ``|rate| <= FREE_RUNNING_RATE``)."""
    t = np.asarray(t_ns, dtype=np.int64)
    c = np.asarray(clock_ns, dtype=float)
    good = np.isfinite(c)
    jump, k, rate = millisecond_resets(t[good], c[good])
    n = int(np.count_nonzero(jump))
    rate_s = rate * 1e-9
    out = {"rate_s_per_s": float(f"{rate_s:.4g}"), "millisecond_resets": n,
           "continuous": bool(n == 0 and abs(rate_s) <= FREE_RUNNING_RATE)}
    if not out["continuous"]:
        out["note"] = (f"receiver clock runs at {rate_s:+.3g} s/s against system time"
                       + (f" with {n} resets of 1 ms" if n else "")
                       + ": a free-running receiver oscillator, not a laboratory reference")
    return out


def observation_epochs_and_satellites(obs, systems):
    """The start of every per-station run (code or carrier phase): the epochs' time tags on
    GPS time (int64 ns), the file's satellite ids, and which of them belong to ``systems``.

    Raises :class:`NoDataError` naming the file when it has no epochs or no satellite of
    those systems."""
    t_tag = ts.convert(obs.time_ns, obs.header.time_system or "GPS", "GPS").astype(np.int64)
    if len(t_tag) == 0:
        raise NoDataError(f"{obs.path}: no observation epochs")
    sats_all = np.asarray(obs.sats).astype(str)
    use_sys = np.isin(np.array([s[0] for s in sats_all]), list(systems))
    if not use_sys.any():
        raise NoDataError(f"{obs.path}: no satellites of the systems {','.join(systems)}")
    return t_tag, sats_all, use_sys


def measure_station(obs, orbits, station, options: MeasureOptions = MeasureOptions(), *,
                    nav_header=None, met=None, ionex=None, reference=None, nav=None) -> StationDay:
    """Per-satellite local clock minus system time for one station-day (see module docstring).

    ``obs``: :class:`ctt.formats.rinex_obs.ObsData`; ``orbits``: a satellite source
    with ``states(sats, t_ns, dt_s)`` (broadcast or precise); ``station``:
    :class:`ctt.config.StationConfig`; ``nav_header``: the navigation header
    for the Klobuchar coefficients; ``met``: a meteorological data object
    (``ctt.formats.rinex_met``) or None for the standard atmosphere; ``ionex``: IONEX
    maps for ``iono_model='ionex'``. ``reference`` ('broadcast'/'precise')
    defaults to what the orbit source says. ``nav``: the navigation data beside a
    precise product, for the GLONASS frequency channels (:func:`_glonass_channels`).
    """
    opt = options
    if reference is None:
        reference = "precise" if type(orbits).__name__.startswith("Precise") else "broadcast"
    t_tag, sats_all, use_sys = observation_epochs_and_satellites(obs, opt.systems)
    n_ep = len(t_tag)

    # --- signals per satellite (only the systems asked for)
    glo_info = {}
    glo_k = _glonass_channels(obs, orbits, nav, glo_info) if "R" in opt.systems else None
    sel = select_signals(obs, sats_all, opt, glonass_k=glo_k)
    if "E" in opt.systems and hasattr(orbits, "galileo_source"):
        # the broadcast records of each Galileo satellite must be those whose clocks refer to its
        # signals: F/NAV for E1/E5a, I/NAV for E1/E5b and E1 alone (OS SIS ICD §5.1.5)
        orbits = GalileoBySignal.wrap(orbits, fnav_sats(sel))
    P = sel.pseudorange_m              # (n_ep, n_sat): combination or single code, NaN where absent
    missing_second = sel.missing_second
    code_label = sel.label             # (n_sat,) e.g. 'C1C+C2W'
    f1 = sel.f1_hz
    P_raw = None
    if opt.smoothing_s and opt.smoothing_s > 0:
        P_raw = P
        P, reset_mask = _hatch_smooth(obs, sel, t_tag, opt.smoothing_s)
    else:
        reset_mask = np.zeros(P.shape, dtype=bool)

    present = np.isfinite(P) & use_sys[None, :]
    flagged_missing = missing_second & use_sys[None, :]
    ie, js = np.nonzero(present | flagged_missing)
    if len(ie) == 0:
        raise NoDataError(f"{obs.path}: no pseudoranges of the selected signals "
                          f"({opt.signals}, systems {','.join(opt.systems)})")
    sats = sats_all[js]
    Pf = P[ie, js]
    t_rx = t_tag[ie]
    valid = np.isfinite(Pf)

    # --- station position: ARP, geodetic
    rx = np.asarray(station.arp_m, dtype=float)
    lat, lon, h = geodesy.ecef_to_geodetic(rx)
    lat, lon, h = float(lat), float(lon), float(h)

    geo = receive_geometry(orbits, sats, t_rx, Pf, ie, n_ep, rx, sagnac=opt.sagnac)
    st, sat_rot = geo.states, geo.sat_rotated_m
    geometry_m, sagnac_m, el, az, los = geo.geometry_m, geo.sagnac_m, geo.el_rad, geo.az_rad, geo.los
    elev_deg = np.degrees(el)
    azim_deg = np.degrees(az)

    # --- satellite clock, relativity, group delay
    sat_clock_s = st.clock_s
    relativity_s = st.relativity_s if opt.relativity else np.zeros_like(st.clock_s)
    gd_s = _group_delay(orbits, sats, st, sel, js, reference)

    # --- troposphere
    if opt.troposphere:
        doy = ts.day_of_year(t_rx)
        if met is not None:
            p_ep, t_ep, rh_ep, n_std = _met_at_epochs(met, t_tag, h)
            p_hpa, t_c, rh = p_ep[ie], t_ep[ie], rh_ep[ie]
        else:
            p_hpa = t_c = rh = None
            n_std = 0
        trop = atmosphere.slant_troposphere(el, lat, h, doy, p_hpa, t_c, rh)
        tropo_m = trop.slant_m
        met_source = trop.met_source
        if n_std:
            met_source += f" (standard atmosphere at {n_std} epochs the file does not cover)"
    else:
        tropo_m = np.zeros_like(el)
        met_source = "off"

    # --- ionosphere (single frequency only)
    iono_m = np.zeros_like(el)
    iono_info = "removed by the iono-free combination" if opt.signals == "iono-free" else "off"
    if opt.signals == "single" and opt.ionosphere:
        f_used = f1[js]
        if opt.iono_model == "ionex":
            if ionex is None:
                raise ProcessingError("iono_model 'ionex' needs an IONEX file (--ionex)")
            iono_m = ionex.slant_delay_m(t_rx, lat, lon, az, el, f_used)
            iono_info = "IONEX"
        else:
            alpha, beta = _klobuchar_coefficients(nav_header)
            _, sow = ts.gps_week_sow(t_rx)
            d_l1 = atmosphere.klobuchar_delay_s(alpha, beta, lat, lon, az, el, sow)
            iono_m = atmosphere.scale_iono_to_frequency(d_l1, f_used) * C_MPS
            iono_info = "Klobuchar (broadcast coefficients)"

    # --- solid Earth tide: range change is −(line of sight · displacement)
    if opt.tide:
        disp_ep = geodesy.solid_tide_displacement(rx, t_tag, time_scale="GPS")
        tide_m = -np.einsum("ij,ij->i", los, np.asarray(disp_ep)[ie])
    else:
        tide_m = np.zeros_like(el)

    # --- station hardware delays by date (delay sets may change inside the day)
    t_utc = ts.convert(t_tag, "GPS", "UTC")
    hw_ep, u_hw = _hardware_ns(station, t_utc, sel, ie, js)

    # --- the clock estimate
    shapiro_m = shapiro_delay_m(sat_rot, rx) if opt.relativity else np.zeros_like(geometry_m)
    range_total = geometry_m + sagnac_m + shapiro_m + tropo_m + iono_m + tide_m
    clock_s = (Pf - range_total) / C_MPS + sat_clock_s + relativity_s + gd_s
    clock_ns = clock_s * 1e9 - hw_ep

    # --- flags
    flag = _status_flags(st, orbits)
    mask_deg = station.elevation_mask_deg if opt.elevation_mask_deg is None else opt.elevation_mask_deg
    ok = flag == "ok"
    flag[ok & ~valid] = "missing_signal"
    ok = flag == "ok"
    flag[ok & (elev_deg < mask_deg)] = "low_elevation"
    ok = flag == "ok"
    flag[ok & ~np.isfinite(gd_s)] = "no_group_delay"
    ok = flag == "ok"
    flag[ok & ~np.isfinite(iono_m)] = "no_ionosphere_model"
    ok = flag == "ok"
    flag[ok & ~np.isfinite(hw_ep)] = "no_delay_set"
    ok = flag == "ok"
    if sel.no_bias is not None and sel.no_bias.any():
        flag[ok & sel.no_bias[js]] = "no_code_bias"
    ok = flag == "ok"
    flag[ok & ~np.isfinite(clock_ns)] = "no_value"
    ok = flag == "ok"

    amp = sel.noise_factor[js]
    sin_el = np.clip(np.sin(el), 0.05, 1.0)
    sigma_ns = opt.sigma0_m * amp / sin_el / C_MPS * 1e9

    # --- epoch solution (robust weighted mean over satellites)
    n_sat = len(sats_all)
    grid = np.full((n_ep, n_sat), np.nan)
    wgrid = np.zeros((n_ep, n_sat))
    sgrid = np.full((n_ep, n_sat), np.nan)
    grid[ie[ok], js[ok]] = clock_ns[ok]
    wgrid[ie[ok], js[ok]] = sin_el[ok] ** 2
    sgrid[ie[ok], js[ok]] = sigma_ns[ok]
    # one solution per system: systems have their own time scales (GST, BDT, GLONASS time)
    # and receivers their inter-system biases, so they are never mixed in one mean
    sys_of_col = np.array([s[0] for s in sats_all])
    mean_sys = {}
    rejected = np.zeros(grid.shape, dtype=bool)
    row_mean = np.full(len(ie), np.nan)
    for letter in [s for s in opt.systems if np.any(sys_of_col == s)]:
        cols = sys_of_col == letter
        m_s, sc_s, n_s, rej_s = robust_epoch_mean(grid[:, cols], wgrid[:, cols], opt.mad_k, sigma=sgrid[:, cols])
        mean_sys[letter] = (m_s, sc_s, n_s, rej_s.sum(axis=1))
        rejected[:, cols] = rej_s
        in_sys = cols[js]
        row_mean[in_sys] = m_s[ie[in_sys]]
    residual = clock_ns - row_mean
    # --- the antenna position from the day's own code data (a check of the station file)
    sys_idx = np.searchsorted(np.array(sorted(set(opt.systems))), np.array([s[0] for s in sats]))
    est = estimate_position(sat_rot[ok], clock_ns[ok] * 1e-9 * C_MPS + (geometry_m + sagnac_m)[ok],
                            ie[ok] * (len(opt.systems) + 1) + sys_idx[ok], sin_el[ok] ** 2, rx)
    pos_check = position_check(est, rx)
    out_rows = rejected[ie, js] & ok
    flag[out_rows] = "outlier"
    residual[~(ok | out_rows)] = np.nan
    smoothing_ratio = {}
    if P_raw is not None:
        # what smoothing bought, measured: σ of the smoothed code scaled by the ratio of the
        # residual RMS of smoothed and raw code on the same rows (smoothing_sigma_ratio)
        kept = ok & ~out_rows
        clock_raw = clock_ns + (P_raw[ie, js] - Pf) / C_MPS * 1e9
        res_raw = clock_raw - _group_weighted_mean(clock_raw, sin_el ** 2, ie * 8 + sys_idx, kept)
        factor, smoothing_ratio = smoothing_sigma_ratio(residual, res_raw, elev_deg, kept)
        sigma_ns = sigma_ns * factor

    table = pd.DataFrame({
        "time": t_rx.astype(np.int64), "sat": sats, "system": np.array([s[0] for s in sats]),
        "signal": code_label[js], "elevation_deg": elev_deg, "azimuth_deg": azim_deg,
        "clock_ns": clock_ns, "sigma_ns": sigma_ns, "pseudorange_m": Pf,
        "geometry_m": geometry_m, "sat_clock_ns": sat_clock_s * 1e9, "relativity_ns": relativity_s * 1e9,
        "group_delay_ns": gd_s * 1e9, "sagnac_m": sagnac_m, "shapiro_m": shapiro_m, "troposphere_m": tropo_m,
        "ionosphere_m": iono_m, "tide_m": tide_m, "hardware_ns": hw_ep, "residual_ns": residual,
        "flag": flag.astype(str),
    })
    table["smoothing_reset"] = reset_mask[ie, js]
    table["iode"] = np.asarray(st.iode, dtype=np.int64)
    table["iono_measured_m"] = (sel.iono_measured_m[ie, js] if sel.iono_measured_m is not None
                                else np.full(len(ie), np.nan))
    table.attrs["reference"] = reference
    table.attrs["station"] = station.id
    ref_sys = next(iter(mean_sys), None)
    ep_cols = {"time": t_tag}
    for letter, (m_s, sc_s, n_s, nr_s) in mean_sys.items():
        suffix = "" if letter == ref_sys else f"_{letter}"
        ep_cols.update({f"clock_ns{suffix}": m_s, f"scatter_ns{suffix}": sc_s, f"n_sat{suffix}": n_s,
                        f"n_rejected{suffix}": nr_s})
    epochs = pd.DataFrame(ep_cols)
    epochs.attrs["reference_system"] = ref_sys
    counts = table["flag"].value_counts().to_dict()
    info = {"codes": {str(s): str(code_label[k]) for k, s in enumerate(sats_all) if use_sys[k]},
            "signals": opt.signals, "troposphere": met_source if opt.troposphere else "off",
            "ionosphere": iono_info, "tide": "IERS 2010 §7.1.1" if opt.tide else "off",
            "sagnac": opt.sagnac, "relativity": opt.relativity, "shapiro": "IERS 2010 eq. 11.17" if opt.relativity else "off",
            "group_delay": ("broadcast TGD/BGD of the signals used" if reference == "broadcast" else
                            "none: precise clocks refer to the iono-free combination"
                            + (" (single-frequency users carry the satellites' code biases; "
                               "apply a bias file)" if opt.signals == "single" else "")), "smoothing_s": opt.smoothing_s,
            "smoothing_sigma_ratio": smoothing_ratio or None,
            "elevation_mask_deg": mask_deg,
            "code_biases": ("bias file: codes mapped onto " + "/".join(sorted(set(CLOCK_REFERENCE_CODES.values())))
                            if opt.biases is not None and not isinstance(opt.biases, str)
                            else "none (C1C users carry each satellite's C1C-C1W bias)"), "u_hardware_ns": u_hw, "reference": reference,
            "position_m": [float(v) for v in rx], "position_check": pos_check,
            "glonass_channels": glo_info or None, "glonass_k": dict(glo_k) if glo_k else None}
    if ref_sys is not None:
        info["receiver_clock"] = receiver_clock_character(t_tag, mean_sys[ref_sys][0])
    day = StationDay(table=table, epochs=epochs, station_id=station.id, reference=reference,
                     counts={str(k): int(v) for k, v in counts.items()}, info=info)
    if isinstance(opt.biases, str) and opt.biases == "estimate":
        day = apply_code_bias_estimates(day)
    if ref_sys is not None and len(mean_sys) > 1:
        day.info["inter_system_bias"] = inter_system_biases(day.table, ref_sys)
    return day


#: Second bands tried, in order, when the default one has no code for a satellite.
SECOND_BAND_FALLBACKS = {"E": ("E5a", "E5b"), "C": ("B3I", "B2I")}


def fnav_sats(sel) -> set:
    """Galileo satellites processed with E5a: their clocks and group delays come from F/NAV
    records (F/NAV clocks refer to E1/E5a); all other Galileo satellites use I/NAV, whose clocks
    refer to E1/E5b and serve E1 single-frequency users (Galileo OS SIS ICD §5.1.5)."""
    return {str(sat) for sat, codes in zip(sel.sats, sel.codes)
            if str(sat).startswith("E") and any(c[1:2] == "5" for c in codes if c)}


class GalileoBySignal:
    """A broadcast source that evaluates each Galileo satellite from the message matching its
    signals (F/NAV for the satellites in ``fnav``, I/NAV otherwise), everything else unchanged.

    Rows are split by satellite and each part goes to a :class:`ctt.orbits.BroadcastOrbits` built
    with the right ``galileo_source`` (health bits and clock parameters of that message), then the
    parts are put back in row order, so one light-time iteration serves a mixed receiver.
    """

    def __init__(self, inav, fnav, fnav_set):
        self.inav, self.fnav, self.fnav_set = inav, fnav, frozenset(fnav_set)
        self.nav = inav.nav
        self.galileo_source = "mixed"
        import sys

        self.STATUS_NAMES = getattr(sys.modules[type(inav).__module__], "STATUS_NAMES", {0: "OK"})

    @classmethod
    def wrap(cls, orbits, fnav_set):
        if isinstance(orbits, cls) or not hasattr(orbits, "galileo_source"):
            return orbits
        kw = {"allow_future": orbits.allow_future}
        if hasattr(orbits, "available_from"):
            kw["available_from"] = orbits.available_from
        if not fnav_set:
            return orbits if orbits.galileo_source == "inav" else type(orbits)(orbits.nav, galileo_source="inav", **kw)
        other = "fnav" if orbits.galileo_source == "inav" else "inav"
        rebuilt = type(orbits)(orbits.nav, galileo_source=other, **kw)
        inav, fnav = (orbits, rebuilt) if other == "fnav" else (rebuilt, orbits)
        return cls(inav, fnav, fnav_set)

    def source_of(self, sats):
        """'fnav' or 'inav' per row (the message each row's states come from)."""
        sats = np.asarray(sats).astype(str)
        return np.where(np.isin(sats, list(self.fnav_set)), "fnav", "inav")

    def states(self, sats, t_ns, dt_s=0.0):
        sats = np.asarray(sats).astype(str)
        n = sats.size
        t_ns = np.broadcast_to(np.asarray(t_ns, dtype=np.int64), (n,))
        dt_s = np.broadcast_to(np.asarray(dt_s, dtype=float), (n,))
        f = np.isin(sats, list(self.fnav_set))
        if not f.any():
            return self.inav.states(sats, t_ns, dt_s)
        if f.all():
            return self.fnav.states(sats, t_ns, dt_s)
        a = self.inav.states(sats[~f], t_ns[~f], dt_s[~f])
        b = self.fnav.states(sats[f], t_ns[f], dt_s[f])
        out = {}
        for fld in dataclasses.fields(a):
            va, vb = getattr(a, fld.name), getattr(b, fld.name)
            if isinstance(va, np.ndarray) and va.shape[:1] == (int((~f).sum()),):
                arr = np.empty((n,) + va.shape[1:], dtype=np.result_type(va, vb))
                arr[~f], arr[f] = va, vb
                out[fld.name] = arr
            else:
                out[fld.name] = va
        return dataclasses.replace(a, **out)


def glonass_channels_from_nav(nav) -> dict:
    """GLONASS frequency numbers k per satellite from broadcast navigation records (the most
    frequent value of the day's records; RINEX 3 GLONASS record, "freq_num"), {} without any."""
    rec = getattr(nav, "records", {}).get("R") if nav is not None else None
    if rec is None or not len(rec) or "freq_num" not in rec.columns:
        return {}
    return {str(sat): int(kk) for sat, kk in
            rec.groupby("sat")["freq_num"].agg(lambda v: v.mode().iloc[0]).items()}


def _glonass_channels(obs, orbits, nav=None, info=None):
    """GLONASS frequency numbers k: the navigation file's (broadcast by the satellites themselves:
    the broadcast source's own records, or ``nav`` given beside a precise product), completed from
    the observation header's GLONASS SLOT / FRQ # (the only source for a precise product without a
    navigation file). A header value that contradicts the navigation file is logged and the
    navigation value used. ``info`` (a dict) receives the source counts."""
    header = {str(s): int(v) for s, v in (getattr(obs.header, "glonass_slots", None) or {}).items()}
    from_nav = glonass_channels_from_nav(nav if nav is not None else getattr(orbits, "nav", None))
    bad = {s: (header[s], v) for s, v in from_nav.items() if s in header and header[s] != v}
    if bad:
        log.warning("%s: GLONASS SLOT / FRQ # disagrees with the navigation file for %s; the navigation "
                    "file's channels are used", getattr(obs, "path", "observation file"),
                    ", ".join(f"{s} (header {a:+d}, navigation {b:+d})" for s, (a, b) in sorted(bad.items())))
    k = dict(header)
    k.update(from_nav)
    if info is not None:
        info.update({"navigation": len(from_nav), "header_only": len(set(header) - set(from_nav)),
                     "disagreeing": sorted(bad)})
    return k or None


@dataclasses.dataclass
class SignalSelection:
    """The signals each satellite is processed with (see :func:`select_signals`)."""

    sats: np.ndarray            #: satellite ids (n_sat,)
    codes: list                 #: per satellite: (code1,) or (code1, code2); () when none
    label: np.ndarray           #: per satellite 'C1C+C2W' / 'C1C' / ''
    coefficients: dict          #: label -> {code: coefficient} (sum 1), for hardware delays
    pseudorange_m: np.ndarray   #: (n_ep, n_sat)
    missing_second: np.ndarray  #: (n_ep, n_sat) first code present, second absent
    f1_hz: np.ndarray
    f2_hz: np.ndarray
    noise_factor: np.ndarray    #: σ(used code)/σ(one code)
    phase_m: np.ndarray | None  #: carrier phase of the same combination, metres
    geometry_free_m: np.ndarray | None
    iono_measured_m: np.ndarray | None  #: first-order ionosphere on the first code from P2 − P1 (dual only)
    slip_flags: np.ndarray | None  #: LLI bit 0 on a phase used
    no_bias: np.ndarray | None = None  #: (n_sat,) a bias file was given but has no entry for a code used
    code1_m: np.ndarray | None = None   #: (n_ep, n_sat) first code as observed (no bias applied)
    code2_m: np.ndarray | None = None   #: second code (dual only)
    phase1_m: np.ndarray | None = None  #: carrier phase of the first band, metres
    phase2_m: np.ndarray | None = None  #: carrier phase of the second band, metres (dual only)


#: Codes the broadcast (and IGS) GPS clocks refer to: a bias file maps the codes used onto these
#: (IS-GPS-200 §20.3.3.3.3.2: the clock is defined for the L1/L2 P(Y) codes).
CLOCK_REFERENCE_CODES = {("G", "1"): "C1W", ("G", "2"): "C2W"}


def _code_biases_m(biases, sats, codes, obs):
    """Per-satellite bias (m) to subtract so each code reads like the clock's reference code.

    GPS codes are mapped onto C1W/C2W with the file's DSB (or two OSBs); codes of
    other systems, and reference codes themselves, get 0. Returns (bias_m, found):
    found is False where the file has no entry for a code that needs one."""
    sats = np.asarray(sats).astype(str)
    codes = np.asarray(codes).astype(str)
    ref = np.array([CLOCK_REFERENCE_CODES.get((s[0], c[1:2]), c) if c else "" for s, c in zip(sats, codes)])
    t0 = int(obs.time_ns[0]) if len(obs.time_ns) else 0
    val, found = signals.code_bias_s(biases, sats, codes, t0, reference=ref)
    found = np.asarray(found) | (codes == ref) | (codes == "")
    return np.where(found, np.asarray(val) * C_MPS, 0.0), found


def select_signals(obs, sats, opt: MeasureOptions, glonass_k=None) -> SignalSelection:
    """Choose codes per satellite of the systems asked for (ctt.signals priorities, or
    ``opt.codes`` for the systems whose header lists them) and form the pseudorange
    (iono-free or single) with the matching carrier phase for smoothing. Satellites of other
    systems, and GLONASS satellites whose frequency number is unknown, get no code."""
    mode = "dual" if opt.signals == "iono-free" else "single"
    priorities = None
    if opt.codes:
        priorities = {}
        for code in opt.codes:
            for sys_letter, bands in signals.BAND_NAME.items():
                band = bands.get(code[1:2])
                if band and code in (obs.header.obs_types.get(sys_letter) or ()):
                    priorities.setdefault(sys_letter, {}).setdefault(band, ())
                    priorities[sys_letter][band] = priorities[sys_letter][band] + (code,)
    sats = np.asarray(sats).astype(str)
    wanted = np.isin(np.array([s[0] for s in sats]), list(opt.systems))
    if "R" in opt.systems:
        known = set((glonass_k or {}).keys())
        wanted &= np.array([s[0] != "R" or s in known for s in sats])
    choice = signals.select_codes(obs.obs, sats, mode, priorities=priorities)
    choice = dataclasses.replace(choice, code1=np.where(wanted, choice.code1, ""),
                                 code2=np.where(wanted, choice.code2, ""))
    if mode == "dual":
        # Second-band fallbacks (Galileo E5a, else E5b; BeiDou B3I, else B2I): a receiver
        # tracking only the other band still gets its iono-free pair.
        for sys_letter, alternatives in SECOND_BAND_FALLBACKS.items():
            col = np.array([s[0] == sys_letter for s in sats])
            if not col.any():
                continue
            for band in alternatives:
                missing = col & (choice.code2 == "") & (choice.code1 != "")
                if not missing.any():
                    break
                bands = {sys_letter: (signals.DEFAULT_BANDS[sys_letter][0], band)}
                alt = signals.select_codes(obs.obs, sats, mode, priorities=priorities, bands=bands)
                take = missing & (alt.code2 != "") & wanted
                if take.any():
                    choice = dataclasses.replace(
                        choice, band2=np.where(take, alt.band2, choice.band2),
                        code2=np.where(take, alt.code2, choice.code2))
    glo_k = glonass_k
    b1 = b2 = None
    no_bias = np.zeros(len(sats), dtype=bool)
    if opt.biases is not None and not isinstance(opt.biases, str):  # 'estimate': after the fit
        b1, f1_found = _code_biases_m(opt.biases, sats, choice.code1, obs)
        b2, f2_found = (_code_biases_m(opt.biases, sats, choice.code2, obs) if mode == "dual"
                        else (None, np.ones(len(sats), bool)))
        no_bias = ~(f1_found & f2_found)
    pr = signals.processing_pseudorange(obs.obs, choice, glonass_k=glo_k, bias_m1=b1, bias_m2=b2)
    n_sat = len(sats)
    codes, labels = [], np.empty(n_sat, dtype=object)
    coefficients = {}
    for j in range(n_sat):
        c1, c2 = str(choice.code1[j]), str(choice.code2[j])
        if mode == "dual" and c1 and c2:
            codes.append((c1, c2))
            labels[j] = f"{c1}+{c2}"
            a1, a2 = signals.iono_free_coefficients(pr.f1_hz[j], pr.f2_hz[j])
            coefficients[labels[j]] = {c1: float(a1), c2: float(a2)}
        elif c1:
            codes.append((c1,) if mode == "single" else (c1, ""))
            labels[j] = c1 if mode == "single" else f"{c1}+"
            coefficients[labels[j]] = {c1: 1.0}
        else:
            codes.append(())
            labels[j] = ""
    p1 = signals.gather(obs.obs, choice.code1)
    if mode == "dual":
        p2 = signals.gather(obs.obs, choice.code2)
        missing_second = np.isfinite(p1) & ~np.isfinite(p2)
        with np.errstate(invalid="ignore", divide="ignore"):
            # P1 = ρ + I1, P2 = ρ + γ·I1 (γ = f1²/f2²): I1 = (P2 − P1)·f2²/(f1² − f2²); carries the DCB
            iono_meas = (p2 - p1) * (pr.f2_hz**2 / (pr.f1_hz**2 - pr.f2_hz**2))[None, :]
    else:
        missing_second = np.zeros(p1.shape, dtype=bool)
        iono_meas = None
    # carrier phases of the same bands, metres
    def phase_of(code_arr):
        ph = np.full(p1.shape, np.nan)
        lli = np.zeros(p1.shape, dtype=bool)
        for j, c in enumerate(code_arr):
            c = str(c)
            if not c:
                continue
            cand = ["L" + c[1:]] + [k for k in obs.obs if k.startswith("L" + c[1])]
            for k in cand:
                if k in obs.obs and np.isfinite(obs.obs[k][:, j]).any():
                    ph[:, j] = obs.obs[k][:, j]
                    if k in obs.lli:
                        lli[:, j] = (obs.lli[k][:, j] >= 0) & ((obs.lli[k][:, j] & 1) == 1)
                    break
        return ph, lli
    l1c, lli1 = phase_of(choice.code1)
    l1 = l1c * (C_MPS / pr.f1_hz)[None, :]
    if mode == "dual":
        l2c, lli2 = phase_of(choice.code2)
        l2 = l2c * (C_MPS / pr.f2_hz)[None, :]
        with np.errstate(invalid="ignore"):
            phase = signals.iono_free(l1, l2, pr.f1_hz[None, :], pr.f2_hz[None, :])
            gf = l1 - l2
        slips = lli1 | lli2
    else:
        phase, gf, slips = l1, None, lli1
        p2 = l2 = None
    return SignalSelection(sats=np.asarray(sats).astype(str), codes=codes, label=labels.astype(str), coefficients=coefficients,
                           pseudorange_m=pr.value_m, missing_second=missing_second,
                           f1_hz=pr.f1_hz, f2_hz=pr.f2_hz, noise_factor=np.asarray(pr.noise_factor, dtype=float),
                           phase_m=phase if np.isfinite(phase).any() else None,
                           geometry_free_m=gf, slip_flags=slips, iono_measured_m=iono_meas,
                           no_bias=no_bias, code1_m=p1, code2_m=p2, phase1_m=l1, phase2_m=l2)


def _met_at_epochs(met, t_gps_ns, h_m):
    """Pressure, temperature, humidity at each epoch from a met file; the standard atmosphere
    (ctt.atmosphere) where the file does not cover an epoch (before/after it by more than one
    sample, or inside a gap longer than four sampling intervals). Returns (p, t, rh, n_standard)."""
    from .formats.rinex_met import interpolate_met

    t = np.asarray(t_gps_ns, dtype=np.int64)
    p_std, t_std, rh_std = (np.broadcast_to(np.asarray(v, float), t.shape).copy()
                            for v in atmosphere.standard_atmosphere(h_m))
    iv = met.interval_s()
    step = int((iv if np.isfinite(iv) else 0.0) * 1e9)
    tt = met.time_ns
    covered = np.zeros(t.shape, dtype=bool)
    if tt.size:
        covered = (t >= tt[0] - step) & (t <= tt[-1] + step)
        if tt.size > 1:
            k = np.clip(np.searchsorted(tt, t, side="right"), 1, tt.size - 1)
            gap = (tt[k] - tt[k - 1]) > 4 * step
            inside = (t > tt[0]) & (t < tt[-1])
            covered &= ~(gap & inside)
    out = [p_std, t_std, rh_std]
    if covered.any():
        mv = interpolate_met(met, t[covered])
        for arr, key in zip(out, ("PR", "TD", "HR")):
            arr[covered] = mv[key]
    return out[0], out[1], out[2], int((~covered).sum())


def _epoch_median(ie, values, n_ep):
    """Median of ``values`` per epoch index (vectorised by sorting)."""
    out = np.full(n_ep, np.nan)
    ok = np.isfinite(values)
    if not ok.any():
        return out
    s = pd.Series(values[ok]).groupby(ie[ok]).median()
    out[s.index.to_numpy()] = s.to_numpy()
    return out


def _klobuchar_coefficients(nav_header):
    iono = getattr(nav_header, "iono", None) or {}
    a, b = iono.get("GPSA"), iono.get("GPSB")
    if a is None or b is None:
        raise ProcessingError("single-frequency processing with the Klobuchar model needs the ionospheric "
                              "coefficients (ION ALPHA/BETA or GPSA/GPSB) in the navigation file header")
    return np.asarray(a, dtype=float), np.asarray(b, dtype=float)


def _group_delay(orbits, sats, st, sel, js, reference):
    """Satellite group-delay correction (s) of the signals used, per row.

    Broadcast clocks: from the broadcast TGD/BGD (ctt.orbits). Precise (IGS)
    clocks refer to the iono-free P1/P2 (GPS) combination, so the iono-free
    correction is 0; for a single code the product's own group delays are
    used when it provides them, else 0 with the fact recorded (a C1 user then
    carries the satellite's P1−P2 bias, ~ns; apply a bias file for better).
    """
    from .orbits import group_delay_correction_s

    out = np.zeros(len(sats)) if reference == "precise" else np.full(len(sats), np.nan)
    # one call per distinct signal choice (a handful), vectorised over rows
    keys = np.asarray(sel.label, dtype=object)[js]
    for key in np.unique(keys):
        if not key or key.endswith("+"):
            continue
        rows = keys == key
        sig = tuple(key.split("+"))
        sig = sig if len(sig) == 2 else sig[0]
        if reference == "precise":
            # precise clocks refer to the iono-free combination: 0 for it; for one code the
            # product carries no group delays (documented above), so 0 with the fact recorded
            continue
        galileo_source = "fnav" if any(c[1] == "5" for c in (sig if isinstance(sig, tuple) else (sig,))) \
            else "inav"
        vals = group_delay_correction_s(sats[rows], _subset(st, rows), sig, galileo_source=galileo_source)
        out[rows] = vals  # NaN where the broadcast message has no delay for this signal
    return out


def _subset(states, rows):
    return dataclasses.replace(states, **{f.name: getattr(states, f.name)[rows]
                                          for f in dataclasses.fields(states)
                                          if isinstance(getattr(states, f.name), np.ndarray)})


def _hardware_ns(station, t_utc_ns, sel, ie, js):
    """Hardware delay (ns) per row and its largest standard uncertainty (ns).

    The delay set valid at each epoch is applied (a set may end inside the day).
    Epochs no set covers get NaN (flagged ``no_delay_set`` by the caller; e.g. the
    18 s of a GPS-time daily file before 00:00 UTC when a set starts then); when no
    epoch at all is covered, ConfigError names the station file.
    """
    t_utc_ns = np.asarray(t_utc_ns, dtype=np.int64)
    out = np.full(len(ie), np.nan)
    u_out = 0.0
    lo_t, hi_t = int(t_utc_ns.min()), int(t_utc_ns.max())
    sets = [ds for ds in station.delay_sets
            if ds.valid_from_ns <= hi_t and (ds.valid_until_ns is None or ds.valid_until_ns > lo_t)]
    if not sets:
        station.delays_at(lo_t)  # raises the ConfigError naming the file and the sets it has
    label = np.asarray(sel.label)[js]
    for ds in sets:
        lo = ds.valid_from_ns
        hi = ds.valid_until_ns if ds.valid_until_ns is not None else np.iinfo(np.int64).max
        ep_in = (t_utc_ns >= lo) & (t_utc_ns < hi)
        rows_in = ep_in[ie]
        for lab in np.unique(label[rows_in]):
            rows = rows_in & (label == lab)
            coef = sel.coefficients[str(lab)]  # code -> coefficient, summing to 1
            out[rows] = ds.hardware_combined_ns(coef)
            u_out = max(u_out, ds.u_hardware_combined_ns(coef))
    return out, u_out


#: Elevation bands (deg) of the smoothed-to-raw residual ratio, and the rows a band needs.
SMOOTHING_BANDS_DEG = (0.0, 15.0, 30.0, 45.0, 60.0, 90.1)
SMOOTHING_MIN_ROWS = 200


def _group_weighted_mean(values, weights, group, use):
    """Per-row weighted mean of ``values`` over the rows of its group that are ``use``d."""
    g = np.where(use, group, -1)
    key, inv = np.unique(g, return_inverse=True)
    w = np.where(use, weights, 0.0)
    sw = np.bincount(inv, w)
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.bincount(inv, np.where(use, values, 0.0) * w) / sw
    out = m[inv]
    out[~use] = np.nan
    return out


def smoothing_sigma_ratio(res_smoothed, res_raw, elevation_deg, use):
    """Per-row factor on the a-priori code σ for carrier-smoothed code, measured on the day.

    The Hatch filter averages the code noise and multipath that code and phase do not
    share; what they share (troposphere and other model errors, satellite clock and orbit
    errors, antenna and receiver code biases) it leaves alone. The white-noise figure
    1/√(2N−1) (0.16 for 600 s of 30-s data) therefore claims far too much, and the
    smoothed code's own arc (code minus carrier) cannot see the shared part either. What
    smoothing bought is measured here directly: per elevation band, the RMS of the
    residuals about the epoch solution of the smoothed code over that of the raw code on the
    same rows (BRUS, 2011-283, 600 s: 0.46 below 20°, 0.40 at 20–40°, 0.57 above 40°). The
    raw code's σ model keeps its calibration; the factor is at most 1, and 1 in a band with
    fewer than ``SMOOTHING_MIN_ROWS`` rows. Returns (factor per row, {band: ratio})."""
    factor = np.ones(len(res_smoothed))
    ratios = {}
    el = np.asarray(elevation_deg, dtype=float)
    for lo, hi in zip(SMOOTHING_BANDS_DEG[:-1], SMOOTHING_BANDS_DEG[1:]):
        band = (el >= lo) & (el < hi)
        rows = band & use & np.isfinite(res_smoothed) & np.isfinite(res_raw)
        if rows.sum() < SMOOTHING_MIN_ROWS:
            continue
        ratio = min(1.0, float(np.sqrt(np.mean(res_smoothed[rows] ** 2) / np.mean(res_raw[rows] ** 2))))
        ratios[f"{lo:g}-{min(hi, 90.0):g}"] = round(ratio, 3)
        factor[band] = ratio
    return factor, ratios


def _hatch_smooth(obs, sel, t_gps_ns, window_s, *, gf_jump_m=0.15, gap_factor=1.5):
    """Carrier-smoothed code (Hatch filter) on the chosen combination, with slip resets.

    P̃_k = P_k / n + (n − 1)/n · (P̃_{k−1} + Φ_k − Φ_{k−1}), n = min(k, N),
    N = window / interval (Hatch 1982). Φ is the carrier phase of the same
    combination in metres (for iono-free: the iono-free phase, so the code and
    phase share the same ionosphere-free geometry and the filter has no
    code–carrier divergence). For single frequency the divergence of twice the
    ionosphere over the window is accepted (documented; keep windows short).
    The filter restarts at: a loss-of-lock indicator (LLI bit 0) on either
    phase, a data gap longer than ``gap_factor`` intervals, a missing phase,
    or a jump of the geometry-free phase λ1Φ1 − λ2Φ2 larger than ``gf_jump_m``
    between consecutive epochs (ionospheric change over 30 s is cm-level;
    common practice). Loops over epochs (vectorised over satellites): the
    recursion has no closed vector form once resets are data-dependent.
    Returns the smoothed code (NaN where the code is NaN) and the reset mask.
    """
    P = sel.pseudorange_m
    L = sel.phase_m
    if L is None:
        log.warning("carrier smoothing asked for but no carrier phase of the chosen signals; not smoothed")
        return P, np.zeros(P.shape, dtype=bool)
    interval = np.median(np.diff(t_gps_ns)) / 1e9 if len(t_gps_ns) > 1 else 30.0
    n_max = max(1, int(round(window_s / interval)))
    n_ep, n_sat = P.shape
    out = np.full_like(P, np.nan)
    resets = np.zeros(P.shape, dtype=bool)
    count = np.zeros(n_sat)
    prev_L = np.full(n_sat, np.nan)
    prev_gf = np.full(n_sat, np.nan)
    prev_t = np.full(n_sat, np.iinfo(np.int64).min, dtype=np.int64)
    state = np.full(n_sat, np.nan)
    gf = sel.geometry_free_m if sel.geometry_free_m is not None else np.full_like(P, np.nan)
    slip = sel.slip_flags if sel.slip_flags is not None else np.zeros(P.shape, dtype=bool)
    gap_ns = gap_factor * interval * 1e9
    for k in range(n_ep):
        p, l, g = P[k], L[k], gf[k]
        have = np.isfinite(p) & np.isfinite(l)
        gap = (t_gps_ns[k] - prev_t) > gap_ns
        jump = np.isfinite(g) & np.isfinite(prev_gf) & (np.abs(g - prev_gf) > gf_jump_m)
        restart = have & (gap | slip[k] | jump | ~np.isfinite(prev_L) | (count == 0))
        count = np.where(restart, 1, np.where(have, np.minimum(count + 1, n_max), 0))
        pred = state + (l - prev_L)
        new = np.where(restart, p, p / np.maximum(count, 1) + (count - 1) / np.maximum(count, 1) * pred)
        state = np.where(have, new, np.nan)
        out[k] = np.where(have, state, np.nan)
        resets[k] = restart
        prev_L = np.where(have, l, np.nan)
        prev_gf = np.where(have, g, np.nan)
        prev_t = np.where(have, t_gps_ns[k], prev_t)
    # code present but no phase: keep the raw code (flagged by the caller through resets)
    raw_only = np.isfinite(P) & ~np.isfinite(L)
    out[raw_only] = P[raw_only]
    resets |= raw_only
    return out, resets


# ---------------------------------------------------------------- satellite code biases from the day

#: Block length (s) of the batch means behind a bias estimate's uncertainty: code multipath is
#: correlated over tens of minutes (common practice); on ZIMM and CN00 (real-2021-001) the
#: batch-means SD grows with the block length up to about an hour (0.34 ns at 960 s, 0.59 ns at
#: 3600 s, 0.72 ns at 7200 s for ZIMM's median satellite), so an hour is the shortest block that
#: is nearly decorrelated while leaving ~8 blocks per satellite.
BIAS_BLOCK_S = 3600.0
#: Block length (s) of the a-posteriori variance factor applied to ``sigma_ns``: the standard track
#: spacing, the scale of the track and bin means that use these values.
FACTOR_BLOCK_S = 960.0


def _block_means(t, scode, ns, values, block_s, extra=None):
    """Per (satellite, block) means of ``values`` (and of ``extra``) -> (key sat, means, counts, extra sums)."""
    blk = np.floor_divide(t, int(round(block_s * 1e9)))
    bkey, _ = pd.factorize(pd.Series(scode).astype(str) + "|" + pd.Series(blk).astype(str), sort=False)
    nb = int(bkey.max()) + 1
    cnt = np.bincount(bkey, minlength=nb)
    mean = np.bincount(bkey, values, nb) / cnt
    bsat = np.zeros(nb, dtype=np.int64)
    bsat[bkey] = scode
    ext = np.bincount(bkey, extra, nb) if extra is not None else None
    return bsat, mean, cnt, ext


def estimate_code_biases(table: pd.DataFrame, *, max_iter: int = 20, tol_ns: float = 1e-4,
                         block_s: float = BIAS_BLOCK_S, factor_block_s: float = FACTOR_BLOCK_S) -> pd.DataFrame:
    """Each satellite's constant code bias over the day, fitted on one station's own residuals.

    Model, on the usable rows (flag 'ok'): ``clock_ns = e(t, system) + b(sat) + noise`` with
    weights 1/σ² (``sigma_ns``), ``e`` one clock per epoch and system, ``b`` one constant per
    satellite. Only differences between satellites are observable: a part common to every
    satellite of a system cannot be told from the station clock (it enters each epoch's value
    alike, like a receiver delay), so the biases are constrained to zero mean over the
    system's satellites and that common part stays in the station clock. Solved by alternating
    weighted least squares (epoch clocks given the biases, biases given the clocks, then the
    constraint) until the biases change by less than ``tol_ns``. What is estimated is the
    satellite's code bias plus whatever else is constant for that satellite over the day at
    this station (the pass-averaged multipath): the uncertainty below covers the latter only
    as far as it varies between blocks. Measured on BRUS (real-2011-283, antenna on a tall
    mast): 2.25 ns RMS of fitted 'biases' with P1/P2, where no code bias is expected, while
    the difference of the C1/P2 and P1/P2 fits follows 2.546 x the published P1-C1 DCBs
    (correlation 0.96, 0.87 ns RMS; tests/test_against_dcb_bias_estimates.py). For
    all-in-view both parts are worth removing; as a DCB estimate a single fit is only as good
    as the station's multipath.

    Uncertainty (``u_ns``): batch means. The residuals ``clock − e`` of a satellite are averaged
    in blocks of ``block_s`` (an hour, see :data:`BIAS_BLOCK_S`) and ``u = SD(block means)/√n_blocks``:
    code multipath is correlated over tens of minutes, so the formal σ/√n of 30-s points would
    be far too small. NaN with fewer than 2 blocks. Returns one row per satellite: ``sat``,
    ``system``, ``bias_ns``, ``u_ns``, ``n_points``, ``n_blocks``, ``rms_ns`` (residual RMS after
    the fit); ``attrs['block_variance_factor']``: the mean over satellites and blocks of
    ``factor_block_s`` (960 s) of (block mean of the fitted residuals)² / (its a-priori variance
    Σσ²/n²), the a-posteriori variance factor at the scale of tracks and bins.
    """
    cols = ["sat", "system", "bias_ns", "u_ns", "n_points", "n_blocks", "rms_ns"]
    y_all = table["clock_ns"].to_numpy(float)
    sg = table["sigma_ns"].to_numpy(float) if "sigma_ns" in table else np.ones(len(table))
    ok = (table["flag"].astype(str).to_numpy(dtype=object) == "ok") & np.isfinite(y_all) & np.isfinite(sg) & (sg > 0)
    if not ok.any():
        return pd.DataFrame(columns=cols)
    t = table["time"].to_numpy(np.int64)[ok]
    sat = table["sat"].astype(str).to_numpy()[ok]
    system = (table["system"].astype(str).to_numpy()[ok] if "system" in table
              else np.array([s[0] for s in sat], dtype=object))
    y, w = y_all[ok], 1.0 / sg[ok] ** 2
    scode, suniq = pd.factorize(sat, sort=True)
    gcode, guniq = pd.factorize(pd.Series(t).astype(str) + "|" + pd.Series(system).astype(str), sort=False)
    ns, ng = len(suniq), len(guniq)
    sat_sys = pd.Series(system).groupby(scode).first().reindex(range(ns)).to_numpy()
    sys_code, sys_uniq = pd.factorize(sat_sys)
    n_sys_sats = np.bincount(sys_code, minlength=len(sys_uniq))
    wg = np.bincount(gcode, w, ng)
    ws = np.bincount(scode, w, ns)
    b = np.zeros(ns)
    for _ in range(max_iter):
        e = np.bincount(gcode, w * (y - b[scode]), ng) / wg
        b_new = np.bincount(scode, w * (y - e[gcode]), ns) / ws
        b_new = b_new - (np.bincount(sys_code, b_new, len(sys_uniq)) / n_sys_sats)[sys_code]
        done = np.max(np.abs(b_new - b)) < tol_ns
        b = b_new
        if done:
            break
    e = np.bincount(gcode, w * (y - b[scode]), ng) / wg
    r = y - e[gcode]                     # residual before the bias: what the bias explains
    res = r - b[scode]
    n = np.bincount(scode, minlength=ns)
    rms = np.sqrt(np.bincount(scode, res * res, ns) / np.maximum(n, 1))
    bsat, bmean, _, _ = _block_means(t, scode, ns, r, block_s)
    nblk = np.bincount(bsat, minlength=ns)
    m1 = np.bincount(bsat, bmean, ns) / np.maximum(nblk, 1)
    var = np.bincount(bsat, (bmean - m1[bsat]) ** 2, ns) / np.maximum(nblk - 1, 1)
    u = np.where(nblk >= 2, np.sqrt(var / np.maximum(nblk, 1)), np.nan)
    _, fmean, fcnt, fvar = _block_means(t, scode, ns, res, factor_block_s, extra=sg[ok] ** 2)
    use = fcnt >= 2
    factor = float(np.mean(fmean[use] ** 2 / (fvar[use] / fcnt[use] ** 2))) if use.any() else float("nan")
    out = pd.DataFrame({"sat": np.asarray(suniq, dtype=object), "system": sat_sys, "bias_ns": b, "u_ns": u,
                        "n_points": n.astype(np.int64), "n_blocks": nblk.astype(np.int64), "rms_ns": rms})
    out.attrs["block_variance_factor"] = factor
    return out


def apply_code_bias_estimates(day: StationDay, **kw) -> StationDay:
    """``day`` with each satellite's estimated code bias (:func:`estimate_code_biases`) removed from
    ``clock_ns`` (column ``code_bias_ns`` added) and the estimates in ``info['code_bias_estimates']``.

    The epoch solution ``day.epochs`` is left as measured (the zero-mean constraint keeps the
    epoch clocks' level; their scatter, not their value, is what the biases change)."""
    est = estimate_code_biases(day.table, **kw)
    t = day.table.copy()
    b = pd.Series(est["bias_ns"].to_numpy(float), index=est["sat"].astype(str)) if len(est) else pd.Series(dtype=float)
    t["code_bias_ns"] = t["sat"].astype(str).map(b).fillna(0.0).to_numpy(float)
    t["clock_ns"] = t["clock_ns"] - t["code_bias_ns"]
    factor = est.attrs.get("block_variance_factor", float("nan"))
    if np.isfinite(factor) and factor > 1.0:
        t["sigma_ns"] = t["sigma_ns"] * np.sqrt(factor)
    t.attrs.update(day.table.attrs)
    info = dict(day.info)
    info["code_biases"] = ("estimated from the day's residuals: one constant per satellite, zero mean over "
                           "each system's satellites (their common part cannot be told from the station clock)")
    info["code_bias_estimates"] = [{k: (v if not isinstance(v, (np.floating, np.integer)) else v.item())
                                    for k, v in r.items()} for r in est.to_dict(orient="records")]
    return dataclasses.replace(day, table=t, info=info)
