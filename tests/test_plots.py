"""ctt.plots: every figure writes a valid, non-blank PNG and an SVG, from plain data."""

import importlib.util
import pathlib

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest

from ctt import plots, stability, timescales

HERE = pathlib.Path(__file__).parent
_spec = importlib.util.spec_from_file_location("synth_run", HERE / "data" / "stability" / "synth_run.py")
synth = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(synth)

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    d = tmp_path_factory.mktemp("run")
    info = synth.write_run(d, days=3.0, step_s=300.0)
    off = pd.read_csv(d / "offset.csv")
    sats = pd.read_csv(d / "satellites.csv")
    return d, info, off, sats


def check_outputs(paths):
    png, svg = paths
    assert png.suffix == ".png" and svg.suffix == ".svg"
    assert png.read_bytes()[:8] == PNG_MAGIC
    assert b"<svg" in svg.read_bytes()[:2000]
    img = mpimg.imread(png)
    grey = img[..., :3].mean(axis=2)
    # not blank: a real figure has ink on a good share of its rows and columns
    assert grey.std() > 0.05
    assert (grey < 0.5).any(axis=1).mean() > 0.3


def test_offset_residual_and_counts(run, tmp_path):
    d, info, off, _ = run
    t = timescales.parse_iso_array(off.time_utc)
    x = off.offset_ns.to_numpy()
    summary, devs, fit, ch, g = stability.analyse(t, x, off.u_ns.to_numpy())
    check_outputs(plots.plot_offset(g.time_ns, g.value, tmp_path / "offset", u_ns=g.u,
                                    changes=ch.changes, fit_ns=fit.model_ns,
                                    log=[{"time_utc_ns": info["step_time_ns"], "what": "cable"}]))
    check_outputs(plots.plot_residuals(g.time_ns, fit.residual_ns, tmp_path / "resid", u_ns=g.u))
    check_outputs(plots.plot_common_satellites(t, off.n_sat, tmp_path / "nsat"))
    check_outputs(plots.plot_deviations(devs, tmp_path / "devs"))
    # the JSON records draw the same figure (TDEV already in ns there)
    check_outputs(plots.plot_deviations({k: summary[k] for k in ("adev", "mdev", "tdev")},
                                        tmp_path / "devs_json", tdev_scale=1.0))


def test_satellites_and_sky(run, tmp_path):
    _, _, _, s = run
    ts = timescales.parse_iso_array(s.time_utc)
    el = np.minimum(s.elevation_a_deg, s.elevation_b_deg)
    check_outputs(plots.plot_satellite_differences(ts, s.sat, s.diff_ns, tmp_path / "sats",
                                                   elevation_deg=el, flag=s.flag))
    check_outputs(plots.plot_sky(s.sat, s.azimuth_a_deg, s.elevation_a_deg, tmp_path / "sky",
                                 s.azimuth_b_deg, s.elevation_b_deg, flag=s.flag))


def test_before_after(run, tmp_path):
    _, info, off, _ = run
    t = timescales.parse_iso_array(off.time_utc)
    c = stability.compare_periods(t, off.offset_ns.to_numpy(), (t[0], info["step_time_ns"] - 1),
                                  (info["step_time_ns"], t[-1]))
    check_outputs(plots.plot_before_after(c, tmp_path / "ba"))


def test_styles_distinguishable_without_colour():
    # grey-scale readability: each deviation and each system has its own marker
    # (and the deviations their own marker+line pair)
    pairs = {(m, ls) for k, (_, _, m, ls) in plots.DEV_STYLE.items() if k in ("oadev", "mdev", "ohdev", "tdev")}
    assert len(pairs) == 4
    markers = [m for _, _, m in plots.SYSTEM_STYLE.values()]
    assert len(set(markers)) == len(markers)


def test_slope_fraction_labels():
    assert plots._frac(-0.5) == "-1/2" and plots._frac(1.5) == "+3/2" and plots._frac(0.0) == "0"


# ------------------------------------------------------------------ the data drawn are the data given

def _drawn_arrays(fig):
    """Every y array a figure draws: line data and scatter offsets, per axes."""
    out = []
    for ax in fig.axes:
        for ln in ax.get_lines():
            out.append(np.asarray(ln.get_ydata(), dtype=float))
        for col in ax.collections:
            off = np.asarray(col.get_offsets(), dtype=float)
            if off.ndim == 2 and off.shape[0] > 1:
                out.append(off[:, 1])
    return out


def _draws(fig, y, rtol=1e-9):
    y = np.asarray(y, dtype=float)
    for a in _drawn_arrays(fig):
        if a.shape == y.shape and np.allclose(a, y, rtol=rtol, atol=0, equal_nan=True):
            return True
        fin = np.isfinite(y)  # a plot may leave out the gaps (NaN) of the series
        if a.shape == (int(fin.sum()),) and np.allclose(a, y[fin], rtol=rtol, atol=0):
            return True
    return False


@pytest.fixture
def captured(monkeypatch):
    figs = []
    real = plots._save

    def keep(fig, stem, *a, **k):
        figs.append(fig)
        return real(fig, stem, *a, **k)

    monkeypatch.setattr(plots, "_save", keep)
    return figs


def test_figures_draw_the_values_given(run, tmp_path, captured):
    # Not only "non-blank": the offsets, residuals, satellite counts and deviations handed to
    # each plot are the arrays its artists hold (the invented series of synth_run.py).
    d, info, off, _ = run
    t = timescales.parse_iso_array(off.time_utc)
    summary, devs, fit, ch, g = stability.analyse(t, off.offset_ns.to_numpy(), off.u_ns.to_numpy())
    plots.plot_offset(g.time_ns, g.value, tmp_path / "offset", u_ns=g.u, fit_ns=fit.model_ns)
    assert _draws(captured[-1], g.value) and _draws(captured[-1], fit.model_ns)
    plots.plot_residuals(g.time_ns, fit.residual_ns, tmp_path / "resid", u_ns=g.u)
    assert _draws(captured[-1], fit.residual_ns)
    plots.plot_common_satellites(t, off.n_sat, tmp_path / "nsat")
    assert _draws(captured[-1], off.n_sat.to_numpy())
    plots.plot_deviations(devs, tmp_path / "devs")
    fig = captured[-1]
    assert _draws(fig, devs["oadev"].dev) and _draws(fig, devs["mdev"].dev)
    assert _draws(fig, devs["tdev"].dev * 1e9)  # TDEV drawn in ns (tdev_scale)
