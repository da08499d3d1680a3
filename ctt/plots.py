"""Figures of an offset series and its diagnostics (matplotlib, Agg backend).

Every function takes plain data (numpy arrays, pandas frames, the dataclasses of
:mod:`ctt.stability`) and an output path *stem*, writes ``stem.png`` and
``stem.svg`` and returns the two paths. Figures are meant to be readable when
printed in grey: series differ by marker and line style as well as colour
(colours from the Okabe–Ito colour-blind-safe set). Time axes are UTC with the
MJD on a secondary axis at the top; every axis says its unit.
"""

from __future__ import annotations

import math
import pathlib

import matplotlib

matplotlib.use("Agg")
import matplotlib.dates as mdates  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

from . import timescales  # noqa: E402

# Okabe & Ito colour-blind-safe colours, paired with distinct markers/lines.
INK = "#000000"
BLUE = "#0072B2"
VERMILION = "#D55E00"
GREEN = "#009E73"
PURPLE = "#CC79A7"
ORANGE = "#E69F00"
SKY = "#56B4E9"
GREY = "#777777"

SYSTEM_STYLE = {  # RINEX system letter: (label, colour, marker)
    "G": ("GPS", BLUE, "o"),
    "E": ("Galileo", VERMILION, "s"),
    "C": ("BeiDou", GREEN, "^"),
    "R": ("GLONASS", PURPLE, "D"),
    "J": ("QZSS", ORANGE, "v"),
    "I": ("NavIC", SKY, "P"),
    "S": ("SBAS", GREY, "x"),
}

DEV_STYLE = {  # kind: (label, colour, marker, linestyle)
    "oadev": ("ADEV (overlapping)", BLUE, "o", "-"),
    "adev": ("ADEV", BLUE, "o", "-"),
    "mdev": ("MDEV", VERMILION, "s", "--"),
    "ohdev": ("HDEV (overlapping)", GREEN, "^", ":"),
    "hdev": ("HDEV", GREEN, "^", ":"),
    "tdev": ("TDEV", INK, "D", "-"),
}

# σ_y(τ) slopes by noise type (NIST SP 1065 noise-type table); flicker PM is −1 too
# (it differs from white PM only by a log factor in ADEV; MDEV separates them: −3/2).
ADEV_SLOPES = [("white/flicker PM", -1.0), ("white FM", -0.5), ("flicker FM", 0.0), ("random walk FM", 0.5)]
MDEV_SLOPES = [("white PM", -1.5), ("flicker PM", -1.0), ("white FM", -0.5), ("flicker FM", 0.0),
               ("random walk FM", 0.5)]
# TDEV = τ·MDEV/√3: slopes shifted by +1.
TDEV_SLOPES = [(n, s + 1.0) for n, s in MDEV_SLOPES]

_RC = {
    "font.size": 9, "axes.titlesize": 10, "axes.labelsize": 9, "legend.fontsize": 8,
    "xtick.labelsize": 8, "ytick.labelsize": 8, "axes.grid": True, "grid.alpha": 0.35,
    "grid.linewidth": 0.5, "savefig.dpi": 120, "figure.dpi": 120, "svg.fonttype": "none",
}


#: formats written by default: PNG for screens and the HTML report, SVG for documents
FORMATS = ("png", "svg")


def _save(fig, stem, formats=FORMATS) -> list[pathlib.Path]:
    stem = pathlib.Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    paths = [stem.with_suffix("." + f) for f in formats]
    for p in paths:
        fig.savefig(p, bbox_inches="tight", metadata={"Date": None} if p.suffix == ".svg" else None)
    plt.close(fig)
    return paths


def _dt(time_ns):
    """UTC calendar-count ns to matplotlib datetimes (numpy datetime64)."""
    return timescales.to_datetime64(np.asarray(time_ns, dtype=np.int64))


# matplotlib's date numbers are days since 1970-01-01 = MJD 40587.
def _num_to_mjd(v):
    return np.asarray(v) + 40587.0


def _mjd_to_num(v):
    return np.asarray(v) - 40587.0


def _time_axis(ax, top=True):
    loc = mdates.AutoDateLocator(minticks=4, maxticks=9)
    ax.xaxis.set_major_locator(loc)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(loc))
    ax.set_xlabel("UTC")
    if top:
        sec = ax.secondary_xaxis("top", functions=(_num_to_mjd, _mjd_to_num))
        sec.set_xlabel("MJD")
        sec.xaxis.set_major_formatter(matplotlib.ticker.FormatStrFormatter("%.6g"))
        sec.tick_params(labelsize=8)
    return ax


def _change_fields(c):
    if isinstance(c, dict):
        t = c.get("time_ns", c.get("time_utc_ns"))
        return int(t), c.get("kind", "logged change"), c.get("expected", False), c.get("what")
    return int(c.time_ns), c.kind, c.expected, c.what


def _mark_changes(ax, changes, log):
    """Detected changes as vertical lines (solid: expected, dashed: unexpected); the log as ticks."""
    handles = {}
    for c in changes or []:
        t, kind, expected, _ = _change_fields(c)
        style = "-" if expected else "--"
        col = GREEN if expected else VERMILION
        lab = f"{'expected' if expected else 'unexpected'} {kind}"
        h = ax.axvline(_dt(t), color=col, ls=style, lw=1.2, zorder=1)
        handles.setdefault(lab, h)
    for e in log or []:
        t = int(e["time_utc_ns"])
        h = ax.axvline(_dt(t), color=INK, ls=(0, (1, 2)), lw=1.0, zorder=1)
        handles.setdefault("hardware log entry", h)
    return handles


# ------------------------------------------------------------------ figures

def plot_offset(time_ns, offset_ns, stem, u_ns=None, changes=None, log=None, fit_ns=None,
                title="A − B", ylabel="clock A − clock B / ns", formats=FORMATS, daily_values=None):
    """Offset series with its ±u band, the drift model, changes marked, and the daily values
    (``[{date, daily_value}]``, drawn at their epochs with their total u)."""
    with plt.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(8.0, 3.6))
        t = _dt(time_ns)
        x = np.asarray(offset_ns, dtype=float)
        if u_ns is not None:
            u = np.asarray(u_ns, dtype=float)
            ax.fill_between(t, x - u, x + u, color=SKY, alpha=0.45, lw=0, label="±u (standard uncertainty)",
                            step=None)
        n = len(x)
        ms = 2.5 if n < 3000 else 1.0
        ax.plot(t, x, ls="none", marker="o", ms=ms, color=BLUE, label="offset", rasterized=n > 5000)
        if fit_ns is not None:
            ax.plot(t, fit_ns, color=INK, lw=1.2, ls="-", label="drift model")
        for k, d in enumerate(daily_values or []):
            dv = d["daily_value"]
            te = timescales.parse_iso(str(dv["epoch_utc"]))
            ax.errorbar(_dt(np.array([te])), [dv["offset_ns"]], yerr=[dv["u_ns"]], color=VERMILION, marker="s",
                        ms=6, mfc="white", capsize=3, lw=1.2, label="daily value ± u" if k == 0 else None)
        handles = _mark_changes(ax, changes, log)
        h0, l0 = ax.get_legend_handles_labels()
        ax.legend(h0 + list(handles.values()), l0 + list(handles), loc="upper left",
                  bbox_to_anchor=(1.01, 1.0), frameon=False)
        ax.set_ylabel(ylabel)
        ax.set_title(title)
        _time_axis(ax)
        return _save(fig, stem, formats)


def plot_residuals(time_ns, residual_ns, stem, u_ns=None, title="Residuals after the drift fit",
                   note=None, formats=FORMATS):
    """Residuals (ns) with their ±u band and the residual rms in the title."""
    with plt.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(8.0, 3.0))
        t = _dt(time_ns)
        r = np.asarray(residual_ns, dtype=float)
        if u_ns is not None:
            u = np.asarray(u_ns, dtype=float)
            ax.fill_between(t, -u, u, color=SKY, alpha=0.45, lw=0, label="±u")
        ax.plot(t, r, ls="none", marker=".", ms=2.0 if len(r) < 3000 else 1.0, color=INK,
                label="residual", rasterized=len(r) > 5000)
        ax.axhline(0, color=GREY, lw=0.8)
        rms = float(np.sqrt(np.nanmean(r ** 2))) if np.isfinite(r).any() else math.nan
        ax.set_title(f"{title} (rms {rms:.3g} ns)" + (f"; {note}" if note else ""))
        ax.set_ylabel("residual / ns")
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
        _time_axis(ax)
        return _save(fig, stem, formats)


def _dev_arrays(d, scale=1.0):
    if isinstance(d, list):  # JSON records
        tau = np.array([r["tau_s"] for r in d], dtype=float)
        g = lambda k: np.array([np.nan if r[k] is None else r[k] for r in d], dtype=float) * scale  # noqa: E731
        return tau, g("dev"), g("ci_low"), g("ci_high"), [r["noise"] for r in d]
    return (np.asarray(d.tau_s), np.asarray(d.dev) * scale, np.asarray(d.ci_low) * scale,
            np.asarray(d.ci_high) * scale, list(d.noise))


def _errorbar(ax, tau, dev, lo, hi, label, col, mk, ls, mfc=None):
    ok = np.isfinite(dev)
    yerr = np.vstack([dev - lo, hi - dev])[:, ok]
    yerr = np.where(np.isfinite(yerr), yerr, 0.0)
    ax.errorbar(tau[ok], dev[ok], yerr=yerr, color=col, marker=mk, ls=ls, lw=1.1, ms=4.5,
                capsize=2.5, elinewidth=0.8, label=label, mfc=mfc or col)


def _frac(v):
    """Slope as a fraction for mathtext: -0.5 -> '-1/2'."""
    if float(v).is_integer():
        return f"{int(v):+d}" if v else "0"
    return f"{'+' if v > 0 else '-'}{int(round(abs(v) * 2))}/2"


def _emptiest_corner(ax, tau, dev, size=0.36):
    """Axes-fraction origin of the corner box holding the fewest data points."""
    ok = np.isfinite(dev) & (dev > 0)
    pts = ax.transAxes.inverted().transform(ax.transData.transform(np.column_stack([tau[ok], dev[ok]])))
    best = None
    for x0, y0 in ((0.02, 0.13), (0.63, 0.13), (0.02, 0.60), (0.63, 0.60)):
        inside = np.sum((pts[:, 0] > x0 - 0.02) & (pts[:, 0] < x0 + size) &
                        (pts[:, 1] > y0 - 0.02) & (pts[:, 1] < y0 + size))
        if best is None or inside < best[0]:
            best = (inside, x0, y0)
    return best[1], best[2]


def _slopes(ax, slopes, tau, dev, title="reference slopes"):
    """A key of reference slopes (τ^μ, labelled by noise type) in the emptiest corner."""
    ok = np.isfinite(dev) & (dev > 0)
    if ok.sum() < 2:
        return
    ax.get_xlim(), ax.get_ylim()  # settle the autoscaled limits before placing the key
    x0, y0 = _emptiest_corner(ax, tau, dev)
    key = ax.inset_axes([x0, y0, 0.35, 0.27])
    key.set_xscale("log")
    key.set_yscale("log")
    tt = np.array([1.0, 10.0])
    lo = min(s for _, s in slopes)
    hi = max(s for _, s in slopes)
    for name, sl in slopes:
        key.plot(tt, 10.0 ** (sl * np.log10(tt)), color=GREY, lw=0.9, ls=(0, (4, 2)))
        key.annotate(f"{name} $\\tau^{{{_frac(sl)}}}$", (10.0, 10.0 ** sl), fontsize=6.5, color=INK,
                     xytext=(2, 0), textcoords="offset points", va="center")
    key.set_xlim(0.7, 2000.0)
    key.set_ylim(10.0 ** (lo - 0.35), 10.0 ** (hi + 0.35))
    key.set_xticks([])
    key.set_yticks([])
    key.minorticks_off()
    key.set_facecolor((1, 1, 1, 0.9))
    key.grid(False)
    key.set_title(title, fontsize=6.5, pad=2)
    for sp in key.spines.values():
        sp.set_color(GREY)
        sp.set_linewidth(0.6)


def _noise_strip(ax, tau, dev, noise):
    """Noise type at each τ, written vertically along the bottom of the axes.

    ``noise`` holds one label or None per τ (:func:`ctt.stability.noise_labels`:
    None where the type was not identified at that τ or would contradict the
    plotted slope); None is left blank."""
    ok = np.isfinite(dev)
    short = {"white PM": "WPM", "flicker PM": "FPM", "white FM": "WFM", "flicker FM": "FFM",
             "random walk FM": "RWFM"}
    last = None
    for tt, nn in zip(tau[ok], np.array(noise, dtype=object)[ok]):
        if last is not None and tt < last * 1.4:      # an extra τ (1 h, 1 d) next to an octave one
            continue
        last = tt
        if not nn:
            continue
        nn = str(nn).replace(" (lag-1 ACF)", "")
        ax.annotate(short.get(nn, nn), (tt, 0.0), xycoords=("data", "axes fraction"), fontsize=6,
                    xytext=(0, 3), textcoords="offset points", ha="center", va="bottom", color=BLUE,
                    rotation=90)


def _labels(d):
    """Noise labels of a Deviation (or JSON records) that never contradict its slope."""
    if isinstance(d, list):
        return [r.get("noise_label") for r in d]
    from .stability import noise_labels

    return noise_labels(d)


def plot_deviations(devs: dict, stem, title="Frequency and time stability", tdev_scale=1e9,
                    formats=FORMATS):
    """ADEV/MDEV(/HDEV) on the left (dimensionless), TDEV (ns) on the right, log-log, 1σ CI bars.

    ``devs`` maps kind -> :class:`ctt.stability.Deviation` (TDEV in s, scaled by
    ``tdev_scale`` to ns) or JSON record lists (TDEV already in ns: pass ``tdev_scale=1``).
    Reference slopes are drawn and labelled by noise type; the noise type found at
    each τ for ADEV is written under the points.
    """
    with plt.rc_context(_RC):
        fig, (a1, a2) = plt.subplots(1, 2, figsize=(10.0, 4.2))
        first = None
        for kind in ("oadev", "adev", "mdev", "ohdev", "hdev"):
            if kind not in devs:
                continue
            tau, dev, lo, hi, noise = _dev_arrays(devs[kind])
            lab, col, mk, ls = DEV_STYLE[kind]
            _errorbar(a1, tau, dev, lo, hi, lab, col, mk, ls, mfc="white" if kind == "mdev" else None)
            if first is None:
                first = (tau, dev, _labels(devs[kind]))
        a1.set_xscale("log")
        a1.set_yscale("log")
        a1.set_xlabel("averaging time τ / s")
        a1.set_ylabel("fractional frequency deviation σ(τ) (dimensionless)")
        a1.set_title("Allan-type deviations (1σ CI)")
        a1.set_xlabel("averaging time τ / s\n(blue: noise type of the phase by lag-1 ACF, "
                      "where it fits the ADEV slope)")
        if first is not None:
            _pad_log(a1)
            _noise_strip(a1, *first)
            _tau_ticks(a1)
            _slopes(a1, ADEV_SLOPES, first[0], first[1], "ADEV slopes")
        a1.legend(loc="best", frameon=True, framealpha=0.9)
        if "tdev" in devs:
            tau, dev, lo, hi, noise = _dev_arrays(devs["tdev"], tdev_scale)
            noise = _labels(devs["tdev"])
            _errorbar(a2, tau, dev, lo, hi, "TDEV", INK, "D", "-")
            a2.set_xscale("log")
            a2.set_yscale("log")
            a2.set_xlabel("averaging time τ / s")
            a2.set_ylabel("time deviation TDEV(τ) / ns")
            a2.set_title("Time deviation (1σ CI)")
            a2.set_xlabel("averaging time τ / s\n(blue: noise type of the phase by lag-1 ACF, "
                          "where it fits the TDEV slope)")
            _pad_log(a2)
            _noise_strip(a2, tau, dev, noise)
            _tau_ticks(a2)
            fmt = matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:g}")
            a2.yaxis.set_major_locator(matplotlib.ticker.LogLocator(subs=(1.0, 2.0, 5.0)))
            a2.yaxis.set_major_formatter(fmt)
            a2.yaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
            _slopes(a2, TDEV_SLOPES, tau, dev, "TDEV slopes")
            a2.legend(loc="best", frameon=True, framealpha=0.9)
        else:
            a2.set_visible(False)
        fig.suptitle(title)
        fig.tight_layout()
        return _save(fig, stem, formats)


def _pad_log(ax, bottom=0.45, top=0.25):
    """Room (in decades) below the data for the noise strip and above for labels."""
    lo, hi = ax.get_ylim()
    ax.set_ylim(lo / 10 ** bottom, hi * 10 ** top)


def _tau_ticks(ax):
    """Secondary labels at 1 h and 1 d where they fall inside the τ range."""
    lo, hi = ax.get_xlim()
    for v, lab in ((3600.0, "1 h"), (86400.0, "1 d"), (7 * 86400.0, "1 wk")):
        if lo < v < hi:
            ax.axvline(v, color=GREY, lw=0.6, ls=":")
            ax.annotate(lab, (v, 1.0), xycoords=("data", "axes fraction"), fontsize=7, color=GREY,
                        xytext=(-2, -3), textcoords="offset points", ha="right", va="top")


def plot_satellite_differences(time_ns, sat, diff_ns, stem, elevation_deg=None, flag=None,
                               title="Per-satellite differences about the epoch median",
                               formats=FORMATS):
    """Per-satellite differences minus the epoch median (ns) vs time, and vs elevation.

    Systems differ by marker and colour; rejected rows (``flag`` not 'ok') are grey crosses.
    """
    t = np.asarray(time_ns, dtype=np.int64)
    d = np.asarray(diff_ns, dtype=float)
    sat = np.asarray(sat).astype(str)
    ok = np.ones(len(d), bool) if flag is None else (np.asarray(flag).astype(str) == "ok")
    # epoch median of the accepted differences (pandas groupby: vectorised)
    uniq, inv = np.unique(t, return_inverse=True)
    med = pd.Series(np.where(ok, d, np.nan)).groupby(inv).median().reindex(range(len(uniq))).to_numpy()
    res = d - med[inv]
    with plt.rc_context(_RC):
        ncol = 2 if elevation_deg is not None else 1
        fig, axes = plt.subplots(1, ncol, figsize=(10.5 if ncol == 2 else 8.0, 3.8),
                                 gridspec_kw={"width_ratios": [2, 1]} if ncol == 2 else None,
                                 squeeze=False)
        ax = axes[0, 0]
        systems = sorted({s[0] for s in sat})
        for sysl in systems:
            lab, col, mk = SYSTEM_STYLE.get(sysl, (sysl, GREY, "o"))
            m = ok & (np.char.startswith(sat, sysl))
            ax.plot(_dt(t[m]), res[m], ls="none", marker=mk, ms=2.5, mfc="none", mew=0.7, color=col,
                    label=f"{lab} ({len(set(sat[m]))} satellites)")
            if ncol == 2:
                axes[0, 1].plot(np.asarray(elevation_deg)[m], res[m], ls="none", marker=mk, ms=2.5,
                                mfc="none", mew=0.7, color=col)
        if (~ok).any():
            ax.plot(_dt(t[~ok]), res[~ok], ls="none", marker="x", ms=3, color=GREY,
                    label=f"rejected ({int((~ok).sum())})")
            if ncol == 2:
                axes[0, 1].plot(np.asarray(elevation_deg)[~ok], res[~ok], ls="none", marker="x", ms=3,
                                color=GREY)
        ax.set_ylabel("difference − epoch median / ns")
        ax.set_title(title)
        ax.legend(loc="upper left", bbox_to_anchor=(0.0, -0.22), ncol=4, frameon=False)
        _time_axis(ax)
        if ncol == 2:
            a2 = axes[0, 1]
            a2.set_xlabel("elevation / deg (lower of the two stations)")
            a2.set_ylabel("difference − epoch median / ns")
            a2.set_title("vs elevation")
            a2.set_xlim(0, 90)
        fin = res[ok & np.isfinite(res)]
        if len(fin) > 20:
            lim = np.percentile(np.abs(fin), 99.5) * 1.3
            for a in axes[0]:
                a.set_ylim(-lim, lim)
        fig.tight_layout()
        return _save(fig, stem, formats)


def plot_common_satellites(time_ns, n_sat, stem, title="Number of common-view satellites",
                           formats=FORMATS):
    """Number of satellites in common view per epoch (step plot)."""
    with plt.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(8.0, 2.6))
        n = np.asarray(n_sat, dtype=float)
        ax.step(_dt(time_ns), n, where="mid", color=INK, lw=0.9)
        ax.fill_between(_dt(time_ns), 0, n, step="mid", color=SKY, alpha=0.4, lw=0)
        ax.set_ylim(0, max(1.0, np.nanmax(n) * 1.15) if np.isfinite(n).any() else 1.0)
        ax.yaxis.set_major_locator(matplotlib.ticker.MaxNLocator(integer=True))
        ax.set_ylabel("satellites")
        ok = np.isfinite(n)
        ax.set_title(f"{title} (median {np.median(n[ok]):.0f}, min {np.min(n[ok]):.0f})" if ok.any() else title)
        _time_axis(ax)
        return _save(fig, stem, formats)


def plot_sky(sat, azimuth_a_deg, elevation_a_deg, stem, azimuth_b_deg=None, elevation_b_deg=None,
             flag=None, names=("station A", "station B"), title="Sky view of common-view satellites",
             formats=FORMATS):
    """Polar az/el of the common-view satellites seen from each station (north up, clockwise)."""
    sat = np.asarray(sat).astype(str)
    ok = np.ones(len(sat), bool) if flag is None else (np.asarray(flag).astype(str) == "ok")
    views = [(azimuth_a_deg, elevation_a_deg)]
    if azimuth_b_deg is not None and elevation_b_deg is not None:
        views.append((azimuth_b_deg, elevation_b_deg))
    with plt.rc_context(_RC):
        fig = plt.figure(figsize=(4.6 * len(views) + 1.8, 4.8))
        handles = {}
        for k, (az, el) in enumerate(views):
            ax = fig.add_subplot(1, len(views), k + 1, projection="polar")
            ax.set_theta_zero_location("N")
            ax.set_theta_direction(-1)
            az = np.radians(np.asarray(az, dtype=float))
            r = 90.0 - np.asarray(el, dtype=float)
            for sysl in sorted({s[0] for s in sat}):
                lab, col, mk = SYSTEM_STYLE.get(sysl, (sysl, GREY, "o"))
                m = ok & np.char.startswith(sat, sysl)
                h, = ax.plot(az[m], r[m], ls="none", marker=mk, ms=1.8, color=col, alpha=0.8)
                handles.setdefault(lab, h)
            if (~ok).any():
                h, = ax.plot(az[~ok], r[~ok], ls="none", marker="x", ms=2.5, color=GREY)
                handles.setdefault("rejected", h)
            ax.set_rlim(0, 90)
            ax.grid(True, alpha=0.7, lw=0.6)
            ax.set_rticks([0, 30, 60, 90])
            ax.set_yticklabels(["90°", "60°", "30°", "0°"], fontsize=7,
                               bbox={"boxstyle": "round,pad=0.1", "fc": "white", "ec": "none", "alpha": 0.8})
            ax.set_rlabel_position(135)
            ax.set_xticks(np.radians([0, 90, 180, 270]))
            ax.set_xticklabels(["N", "E", "S", "W"])
            ax.set_title(f"{names[k]} (elevation rings, azimuth clockwise from N)", fontsize=9, pad=14)
        fig.legend(list(handles.values()), list(handles), loc="center right", frameon=False,
                   markerscale=3)
        fig.suptitle(title)
        fig.subplots_adjust(right=0.82, wspace=0.35)
        return _save(fig, stem, formats)


def plot_before_after(comparison, stem, labels=("before", "after"), title="Before / after comparison",
                      formats=FORMATS, step=None):
    """ADEV and TDEV of two periods overlaid (1σ CIs); ``step`` ({value, u}: the one estimate of
    the change, ns) is stated in the title when given."""
    b, a = comparison.before, comparison.after
    with plt.rc_context(_RC):
        fig, (a1, a2) = plt.subplots(1, 2, figsize=(10.0, 4.2))
        styles = [(BLUE, "o", "-", None), (VERMILION, "s", "--", "white")]
        for per, lab, (col, mk, ls, mfc) in zip((b, a), labels, styles):
            rng = f"{timescales.to_iso(per.start_ns)[:16]} – {timescales.to_iso(per.end_ns)[:16]}"
            tau, dev, lo, hi, _ = _dev_arrays(per.adev)
            _errorbar(a1, tau, dev, lo, hi, f"{lab}: {rng}", col, mk, ls, mfc)
            tau, dev, lo, hi, _ = _dev_arrays(per.tdev, 1e9)
            _errorbar(a2, tau, dev, lo, hi, f"{lab}: {per.n} points", col, mk, ls, mfc)
        for ax in (a1, a2):
            ax.set_xscale("log")
            ax.set_yscale("log")
            ax.set_xlabel("averaging time τ / s")
            ax.legend(loc="best", frameon=True, framealpha=0.9)
            _tau_ticks(ax)
        sig = [r["tau_s"] for r in comparison.adev_ratio if r["significant"]]
        a1.set_ylabel(r"overlapping ADEV $\sigma_y(\tau)$ (dimensionless)")
        a1.set_title("ADEV" + (f" (differs at {len(sig)} τ, F test {comparison.level:g})" if sig
                                else " (no significant difference)"))
        a2.set_ylabel("TDEV / ns")
        a2.set_title("TDEV")
        a2.yaxis.set_major_locator(matplotlib.ticker.LogLocator(subs=(1.0, 2.0, 5.0)))
        a2.yaxis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:g}"))
        a2.yaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        if step:
            line2 = f"step at the change {step['value']:+.3f} ± {step['u']:.3f} ns (the one estimate of the change)"
        else:
            line2 = "step at the change: not estimated (too few points on a side)"
        fig.suptitle(f"{title}\n{line2}", fontsize=9.5)
        fig.tight_layout()
        return _save(fig, stem, formats)
