"""What a pair series computed from simulated files should scatter by, from the simulator's truth.

Shared by the tests that compare ``ctt pair`` / ``ctt demo`` with the simulator's truth, so
that their bounds on the bias and the RMS against the truth are standard errors of the
estimate, not a factor of what was seen.

Simulation truth (``ctt.simulate``, the lines that make ``P``): every code observation carries
independent white noise N(0, (code_noise_m / sin el)²) per code, satellite and epoch (sin el
clipped at 1°), and, when the station has a ``[multipath]`` table, a term that is a fixed
function of azimuth and elevation, kept per code in ``StationResult.parts[(system, code)]["mp"]``.

ctt's value at a point is a linear function of those codes:

1. per satellite and epoch, the iono-free combination α·P1 + β·P2 with α = f1²/(f1² − f2²),
   β = −f2²/(f1² − f2²) (frequencies written below as published: IS-GPS-200 for GPS L1/L2,
   Galileo OS SIS ICD for E1/E5b), or the first code alone;
2. per satellite and point, the epoch itself, or the ordinary-least-squares line of the track
   at its midpoint, value = Σ c_j y_j with c_j = 1/n − x̄(x_j − x̄)/Sxx (the standard formula for
   the fitted value of a straight line; the docstring of ``ctt.tracks.fit_tracks`` says it fits so);
3. the common-view difference A − B and ctt's weighted mean over the satellites with the weights
   it reports (``weight`` of the satellites table).

With independent inputs the law of propagation of uncertainty for a linear function (GUM,
JCGM 100:2008 §5.1.2) gives the variance of the white part at each point,

    var = Σ_i w_i² (var_A,i + var_B,i) / (Σ w_i)²,   var_X,i = Σ_j c_j² (α² + β²) σ_j²,

and the multipath's contribution is the same linear function of the multipath term. The
epochs fed to a track are those the simulator wrote for the satellite (code present in the
file) inside the track window; ctt may flag a few more, which changes var by a few per cent
at most, far inside the chi-square quantiles the tests use. Not modelled: the selection by
ctt's outlier rejection (the satellites kept at an epoch are those near its median, which
correlates their errors slightly; see the iono-free epoch case in test_against_simulation.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

C_MPS = 299_792_458.0  # SI definition of the metre
#: carrier frequencies (Hz) as published: IS-GPS-200 (GPS L1, L2), Galileo OS SIS ICD (E1, E5a,
#: E5b), GLONASS ICD §3.3.1.4 (G1 = 1602 + 0.5625 k MHz, G2 = 1246 + 0.4375 k MHz: G1/G2 = 9/7 on
#: every channel, so channel k = 0 gives every channel's iono-free coefficients)
FREQ_HZ = {("G", "1"): 1575.42e6, ("G", "2"): 1227.60e6, ("E", "1"): 1575.42e6, ("E", "5"): 1176.45e6,
           ("E", "7"): 1207.14e6, ("R", "1"): 1602.0e6, ("R", "2"): 1246.0e6}
#: standard CV track length (CGGTTS, the time community's open CV standard): 780 s
TRACK_S = 780.0


def _epoch_terms(st, signals):
    """(white variance m², multipath m) per epoch × satellite of the combination ctt forms.

    NaN where the simulator wrote no code for that satellite (not tracked).
    """
    n_ep, n_sat = st.elevation_rad.shape
    sin_el = np.sin(np.clip(st.elevation_rad, np.radians(1.0), None))  # the simulator's clip
    sigma_m = st.spec.code_noise_m / sin_el
    var = np.full((n_ep, n_sat), np.nan)
    mp = np.full((n_ep, n_sat), np.nan)
    sys_of = np.array([s[0] for s in st.sats])
    for system, codes in st.spec.signals.items():
        cols = sys_of == system
        if not cols.any():
            continue
        if signals == "iono-free":
            f1, f2 = FREQ_HZ[(system, codes[0][1])], FREQ_HZ[(system, codes[1][1])]
            coef = {codes[0]: f1 ** 2 / (f1 ** 2 - f2 ** 2), codes[1]: -f2 ** 2 / (f1 ** 2 - f2 ** 2)}
        else:
            coef = {codes[0]: 1.0}
        v = np.zeros((n_ep, cols.sum()))
        m = np.zeros((n_ep, cols.sum()))
        for code, k in coef.items():
            have = np.isfinite(st.obs[code][:, cols])
            v = np.where(have, v + k * k * sigma_m[:, cols] ** 2, np.nan)
            part = st.parts.get((system, code), {}).get("mp")
            m = m + (0.0 if part is None else k * np.asarray(part)[:, cols])
        var[:, cols] = v
        mp[:, cols] = np.where(np.isfinite(v), m, np.nan)
    return var, mp


def satellite_terms(st, signals, time_ns, sat, mode):
    """White variance (ns²), multipath (ns) and the line's miss of the true clock (ns) of one
    station's value for satellite ``sat[i]`` at point ``time_ns[i]`` (the last is 0 for single
    epochs; ``mode`` 'epochs' or 'tracks')."""
    var_e, mp_e = _epoch_terms(st, signals)
    col = {s: j for j, s in enumerate(st.sats)}
    j = np.array([col[s] for s in sat], dtype=np.int64)
    to_ns2, to_ns = (1e9 / C_MPS) ** 2, 1e9 / C_MPS
    if mode == "epochs":
        k = np.searchsorted(st.time_ns, time_ns)
        return var_e[k, j] * to_ns2, mp_e[k, j] * to_ns, np.zeros(len(j))
    clock_ns = st.apparent_s * 1e9  # the station's true clock as its receiver sees it
    half = int(TRACK_S / 2 * 1e9)
    k0 = np.searchsorted(st.time_ns, time_ns - half)
    k1 = np.searchsorted(st.time_ns, time_ns + half)
    var = np.full(len(j), np.nan)
    mp = np.full(len(j), np.nan)
    miss = np.full(len(j), np.nan)
    for i in range(len(j)):  # ~100 points × ~12 satellites: a loop over tracks, not observations
        v = var_e[k0[i]:k1[i], j[i]]
        good = np.isfinite(v)
        x = (st.time_ns[k0[i]:k1[i]][good] - time_ns[i]) / 1e9
        if x.size < 2:
            continue
        xc = x - x.mean()
        c = 1.0 / x.size - x.mean() * xc / np.sum(xc * xc)  # OLS fitted value at x = 0
        var[i] = np.sum(c * c * v[good]) * to_ns2
        mp[i] = np.sum(c * mp_e[k0[i]:k1[i], j[i]][good]) * to_ns
        tk = st.time_ns[k0[i]:k1[i]]
        miss[i] = np.sum(c * clock_ns[k0[i]:k1[i]][good]) - np.interp(
            float(time_ns[i]), tk.astype(float), clock_ns[k0[i]:k1[i]])
    return var, mp, miss


def point_budget(res, satellites: pd.DataFrame, ids, signals: str, mode: str) -> pd.DataFrame:
    """Per point of a pair (index: GPS ns of the point), for ctt's satellites table of it:

    * ``var_ns2``: variance of the white code noise in clock A − clock B;
    * ``mp_ns``: the configured multipath's contribution to it;
    * ``clock_ns``: in tracks, how far the fitted line of the true clocks A − B, taken at the
      midpoint, is from their true value there (a straight line over 13 minutes cannot follow
      the clocks' own noise; computed from the simulated clocks, ``StationResult.apparent_s``).

    ``mp_ns`` and ``clock_ns`` are known from the truth, so ``error − mp_ns − clock_ns`` should
    be zero-mean normal with variance ``var_ns2``, independent between points.
    """
    ok = satellites[satellites["flag"] == "ok"]
    tcol = "time" if "time" in ok else "time_gps_ns"
    t = ok[tcol].to_numpy(np.int64)
    sat = ok["sat"].to_numpy(str)
    (va, ma, ca), (vb, mb, cb) = (satellite_terms(res.stations[sid], signals, t, sat, mode) for sid in ids)
    w = ok["weight"].to_numpy(float)
    d = pd.DataFrame({"t": t, "w": w, "w2v": w * w * (va + vb), "wm": w * (ma - mb), "wc": w * (ca - cb)})
    g = d.groupby("t").sum()
    return pd.DataFrame({"var_ns2": g["w2v"] / g["w"] ** 2, "mp_ns": g["wm"] / g["w"], "clock_ns": g["wc"] / g["w"]})


#: two-sided 99.9 % quantile of the standard normal (scipy.stats): the bound on a mean, in standard errors
Z999 = float(stats.norm.ppf(0.9995))


def statistics(r, var, label):
    """Figures of ``r`` (error less what the truth explains) against its predicted variance ``var``:
    (bound on |mean|, Σ r²/var, and that sum's chi-square(n) 0.05 % and 99.95 % quantiles).

    The bound is 3.29 standard errors of the mean of independent points, √(Σ var)/n; Σ r²/var
    follows chi-square with n degrees of freedom when r is N(0, var) (quantiles from scipy.stats).
    Printed with the measured figures.
    """
    r = np.asarray(r, dtype=float)
    n = r.size
    se = np.sqrt(np.sum(var)) / n
    chi2 = float(np.sum(r * r / var))
    lo, hi = stats.chi2.ppf([0.0005, 0.9995], n)
    print(f"{label}: {n} points, mean {r.mean():+.4f} ns (bound {Z999 * se:.4f} = 3.29 SE), RMS "
          f"{np.sqrt(np.mean(r * r)):.4f} ns, predicted {np.sqrt(np.mean(var)):.4f} ns; chi2/n {chi2 / n:.3f} "
          f"in [{lo / n:.3f}, {hi / n:.3f}]")
    return Z999 * se, chi2, lo, hi
