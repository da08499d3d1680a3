"""``ctt stability`` and ``ctt compare-periods``: stability, drift and changes of an offset series.

``ctt stability SERIES.csv [--column offset_ns] [--out DIR] [--json]`` computes the
overlapping ADEV, MDEV, TDEV and overlapping HDEV at octave τ with 1σ confidence
intervals and the noise type at each τ, the drift fit and the phase steps and
frequency changes found (see :mod:`ctt.stability`). ``--json`` prints one object
(``adev``/``mdev``/``hdev`` dimensionless, ``tdev`` in ns: see its ``units`` key);
``--out DIR`` writes ``stability.json`` and the figures there.

``ctt compare-periods SERIES.csv --before FROM..TO --after FROM..TO [--json]``
compares two date ranges: ADEV/TDEV of each with CIs, the mean offset change with
its uncertainty, and whether the change and the ADEV ratios are significant.

The hardware change logs of the two stations can be given with ``--log-a`` and
``--log-b`` (station TOML files, ``[[changes]]``). A delay that grows by d ns at
station A (and is not yet in its delay sets) raises A − B by d; at station B it
lowers A − B by d: that is the expected step used for matching.
"""

from __future__ import annotations

import json
import pathlib
import sys

from ..errors import UsageError


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "stability", help="ADEV/MDEV/TDEV/HDEV with CIs, noise type, drift and changes of a series",
        description="Stability (overlapping ADEV, MDEV, TDEV, overlapping HDEV with 1-sigma CIs and the "
        "noise type at each tau), drift fit and change detection of an offset series CSV.")
    p.add_argument("series", help="offset.csv or a CSV with time_utc (ISO) or mjd/mjd_utc and a value column")
    p.add_argument("--column", default="offset_ns", help="value column in ns (default offset_ns)")
    p.add_argument("--out", metavar="DIR", help="write stability.json and figures (PNG+SVG) here")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--remove-steps", action="store_true",
                   help="subtract the phase steps found before computing the deviations (listed in the output)")
    _log_args(p)
    p.set_defaults(func=run_stability)

    q = subparsers.add_parser(
        "compare-periods", help="compare the stability and mean offset of two date ranges",
        description="Compare two date ranges of an offset series: ADEV/TDEV of each with CIs, mean "
        "offset change with uncertainty, significance (normal test on the mean, F test on ADEV).")
    q.add_argument("series", help="offset.csv or a two-column CSV")
    q.add_argument("--column", default="offset_ns")
    q.add_argument("--before", required=True, metavar="FROM..TO", help="ISO dates or date-times, UTC")
    q.add_argument("--after", required=True, metavar="FROM..TO")
    q.add_argument("--out", metavar="DIR", help="write compare.json and the overlay figure here")
    q.add_argument("--json", action="store_true")
    q.set_defaults(func=run_compare)


def _log_args(p):
    p.add_argument("--log-a", metavar="STATION.toml", help="station A file whose [[changes]] to match")
    p.add_argument("--log-b", metavar="STATION.toml", help="station B file whose [[changes]] to match")


def load_change_log(log_a=None, log_b=None) -> list[dict]:
    """The two stations' [[changes]] as ``[{time_utc_ns, what, expected_ns}]`` (sign for A − B)."""
    out = []
    if not (log_a or log_b):
        return out
    from ..config import load_station  # only when asked: stability works without config files
    for path, sign, who in ((log_a, 1.0, "A"), (log_b, -1.0, "B")):
        if not path:
            continue
        st = load_station(path)
        for c in st.changes:
            exp = c.expected_delay_change_ns
            out.append({"time_utc_ns": int(c.time_utc_ns), "what": f"{st.id} ({who}): {c.what}",
                        "expected_ns": None if exp is None else sign * float(exp)})
    return out


def _dump(obj) -> str:
    import numpy as np

    return json.dumps(obj, indent=1, default=lambda o: o.item() if isinstance(o, np.generic) else str(o))


def run_stability(args) -> int:
    from .. import plots
    from ..report import analyse_series, read_series

    s = read_series(args.series, column=args.column)
    log = load_change_log(getattr(args, "log_a", None), getattr(args, "log_b", None))
    res, devs, fit, ch, g = analyse_series(s.time_ns, s.value, s.u_ns, log, remove_steps=args.remove_steps,
                                           source=str(args.series))
    res["source"] = str(args.series)
    res["column"] = args.column
    res["n_flagged"] = s.n_flagged
    if args.out:
        out = pathlib.Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        (out / "stability.json").write_text(_dump(res) + "\n")
        plots.plot_deviations({k: devs[k] for k in ("oadev", "mdev", "ohdev", "tdev")}, out / "stability")
        plots.plot_offset(g.time_ns, g.value, out / "offset", u_ns=g.u, changes=ch.changes, log=log,
                          fit_ns=fit.model_ns, ylabel=f"{args.column} / ns")
        plots.plot_residuals(g.time_ns, fit.residual_ns, out / "residuals", u_ns=g.u)
    if args.json:
        print(_dump(res))
    else:
        print(_text(res))
    return 0


def _text(res) -> str:
    lines = [f"series   {res['source']} ({res['column']}), {res['start']} .. {res['end']}, "
             f"tau0 {res['tau0_s']:g} s, {res['n_samples']} samples, {res['n_missing']} missing, "
             f"{res['n_flagged']} flagged"]
    d = res["drift"]
    lines.append(f"model    offset + frequency + drift about {d['t_ref']}, {len(d['steps_ns'])} phase step(s) "
                 f"held at their one estimate (a day's value: the daily_value of its summary.json)")
    lines.append(f"freq     {d['frequency']['value']:.4g} ± {d['frequency']['u']:.2g}")
    lines.append(f"drift    {d['drift_per_day']['value']:.4g} ± {d['drift_per_day']['u']:.2g} /day")
    lines.append("tau_s        ADEV       [1σ CI]               MDEV       TDEV/ns    noise of the phase (lag-1 ACF)")
    td = {r["tau_s"]: r for r in res["tdev"]}
    md = {r["tau_s"]: r for r in res["mdev"]}
    for a in res["adev"]:
        if a["dev"] is None:
            continue
        lines.append(f"{a['tau_s']:<12g} {a['dev']:.3e}  [{a['ci_low'] or 0:.3e} {a['ci_high'] or 0:.3e}]  "
                     f"{md[a['tau_s']]['dev'] or 0:.3e}  {td[a['tau_s']]['dev'] or 0:.3e}  "
                     f"{(a.get('noise_label') or '—').replace(' (lag-1 ACF)', '')}")
    for c in res["changes"]:
        agree = c.get("agrees_with_log")
        lines.append(f"change   {c['time_utc']} {c['kind']} {c['size']:+.4g} ± {c['u_size']:.2g} "
                     f"{'expected: ' + str(c['what']) if c['expected'] else 'UNEXPECTED'}"
                     + ("" if agree is None else f" (log {c['expected_ns']:+g} ns: "
                        f"{'agrees' if agree else 'does NOT agree'} within 2σ)"))
    for e in res["logged_changes_not_detected"]:
        lines.append(f"logged   {e['time_utc']} {e['what']}: not detected (step at the logged epoch "
                     f"{e['fitted_step_ns'] if e['fitted_step_ns'] is not None else '?'} ± "
                     f"{e['u_fitted_step_ns'] if e['u_fitted_step_ns'] is not None else '?'} ns)")
    return "\n".join(lines)


def _range(text, name):
    from ..report import day_range_ns

    if ".." not in text:
        raise UsageError(f"--{name} expects FROM..TO (ISO dates or date-times), got {text!r}")
    a, b = text.split("..", 1)
    try:
        lo, hi = day_range_ns(a.strip(), b.strip())
    except ValueError as exc:
        raise UsageError(f"--{name}: {exc}") from None
    if lo is None or hi is None or hi < lo:
        raise UsageError(f"--{name}: need FROM..TO with FROM before TO, got {text!r}")
    return lo, hi


def run_compare(args) -> int:
    from .. import plots, stability
    from ..report import read_series
    from ..timescales import to_iso

    s = read_series(args.series, column=args.column)
    before = _range(args.before, "before")
    after = _range(args.after, "after")
    try:
        c = stability.compare_periods(s.time_ns, s.value, before, after)
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    res = {
        "source": str(args.series), "column": args.column,
        "before": _period(c.before), "after": _period(c.after),
        "delta_mean_ns": {"value": c.delta_mean_ns, "u": c.u_delta_mean_ns},
        "z": c.z, "significant": c.significant,
        "step_at_boundary_ns": {"value": c.step_at_boundary_ns, "u": c.u_step_at_boundary_ns,
                                "at": to_iso(c.boundary_ns), "z": c.z_step,
                                "significant": c.step_significant},
        "test": "mean and step: |delta|/u > z(1 - level/2), normal; ADEV: two-sided F test on the "
                "variance ratio with the EDFs as degrees of freedom",
        "level": c.level, "adev_ratio_after_over_before": c.adev_ratio,
        "units": {"adev": "1", "tdev": "ns", "mean_ns": "ns"},
    }
    if args.out:
        out = pathlib.Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        (out / "compare.json").write_text(_dump(res) + "\n")
        plots.plot_before_after(c, out / "before_after")
    if args.json:
        print(_dump(res))
    else:
        v = "significant" if c.significant else "not significant"
        print(f"before  {res['before']['start']} .. {res['before']['end']}: mean {c.before.mean_ns:.4f} ± "
              f"{c.before.u_mean_ns:.2g} ns")
        print(f"after   {res['after']['start']} .. {res['after']['end']}: mean {c.after.mean_ns:.4f} ± "
              f"{c.after.u_mean_ns:.2g} ns")
        print(f"change  {c.delta_mean_ns:+.4f} ± {c.u_delta_mean_ns:.2g} ns (z = {c.z:.2f}, {v} at {c.level:g})")
        v2 = "significant" if c.step_significant else "not significant"
        print(f"step    {c.step_at_boundary_ns:+.4f} ± {c.u_step_at_boundary_ns:.2g} ns at {to_iso(c.boundary_ns)} "
              f"(lines fitted either side; z = {c.z_step:.2f}, {v2})")
        for r in c.adev_ratio:
            print(f"tau {r['tau_s']:<10g} ADEV after/before {r['ratio']:.3f}  p = {r['p_value']:.3g}"
                  f"{'  significant' if r['significant'] else ''}")
    return 0


def _period(p):
    from ..timescales import to_iso

    return {"start": to_iso(p.start_ns), "end": to_iso(p.end_ns), "n": p.n,
            "mean_ns": {"value": p.mean_ns, "u": p.u_mean_ns},
            "adev": p.adev.records(), "tdev": p.tdev.records(1e9)}


if __name__ == "__main__":  # pragma: no cover
    sys.exit("use: ctt stability ...")
