"""One day for one pair, end to end: the only module that wires the stages together.

``run_pair(inputs, station_a, station_b, options)`` reads both observation
files and the orbit products, runs the measurement model for each station,
forms tracks or epoch bins, the common-view (or all-in-view) differences and
the uncertainty budget, and returns a :class:`PairResult`;
``write_pair_outputs`` writes ``offset.csv``, ``satellites.csv`` and
``summary.json`` into a folder, each atomically (written to a temporary name
and renamed), so an interrupted run never leaves a half-written file beside
good ones.

Output files
------------
``offset.csv``
    one row per time bin: ``time_utc`` (ISO 8601 with Z), ``mjd_utc``,
    ``offset_ns`` (clock A − clock B), ``u_ns`` (standard uncertainty of the
    point), ``n_sat``, ``flag`` ('ok' or the reason), then ``system``,
    ``scatter_ns``, ``n_rejected``, ``u_apriori_ns``, ``chi2``, ``dof``,
    ``time_gps_ns``. With several systems the combined series ('ALL') is
    written here and every system's own series to ``offset_by_system.csv``.
``satellites.csv``
    the per-satellite differences (or, all-in-view, per-station residuals)
    behind each point, with elevations, azimuths, weights and flags.
``summary.json``
    inputs (paths and SHA-256), configuration, software version, counts,
    ``daily_value`` (the day's clock A − clock B, defined once in
    :data:`ctt.stability.DAILY_VALUE_DEFINITION`: ``epoch_utc``, ``offset_ns``,
    ``u_a_ns``, ``u_b_ns``, ``u_ns``, ``definition``) and ``daily_value_detail``
    (the link-noise model, steps and clock wander behind it), the type B items
    (``budget``), rejected data by reason.

Mode ``ppp`` (carrier-phase time transfer with precise products)
----------------------------------------------------------------
Each station's observation file goes through :func:`ctt.ppp.run_ppp` with the
same precise orbits and clocks (and, when ``PairInputs.erp`` names IGS ERP files,
the solid Earth pole tide; the code modes ignore them with a warning); A − B is
the difference of the two stations' PPP clocks (``clock_ns``: local clock − the product's time scale, delays
applied) on their common epochs (:func:`ppp_difference`): ``u_ns`` is the
root sum of squares of the two formal uncertainties, ``n_sat`` the smaller of
the two stations' satellite counts (``n_sat_a``/``n_sat_b`` give both), and a
point is ``'ok'`` when both stations' epochs are, else it carries the first
bad station's flag prefixed ``A:``/``B:``. ``satellites.csv`` holds both
stations' residuals (column ``station``). The budget
(:func:`ctt.commonview.uncertainty_budget`) says what cancels: the satellite
clocks and orbits and the product's time scale are common to both stations and
cancel in A − B; the receiver-delay calibrations, the stations' coordinates
when held fixed, and the receiver-antenna models do not. When the previous
day of the pair is in the archive, ``summary['day_boundary']`` records the
jump between its last epoch and this day's first (:func:`day_boundary`): the
discontinuity of per-day carrier-phase solutions (each day has its own
ambiguities).
"""

from __future__ import annotations

import dataclasses
import json
import logging
import os
import pathlib
import tempfile
import warnings

import numpy as np
import pandas as pd

from . import __version__
from . import commonview, tracks
from .archive import file_sha256
from . import timescales as ts
from .errors import MissingInputError, NoDataError, require_file
from .measure import MeasureOptions, StationDay, measure_station

log = logging.getLogger(__name__)

MODES = ("tracks", "epochs", "all-in-view", "ppp")


@dataclasses.dataclass(frozen=True)
class PairInputs:
    """Input files of one pair-day (paths; None where not given).

    ``sp3`` and ``clk`` may name several files (a tuple, e.g. the days before
    and after): they are merged into one product so interpolation is valid
    across midnight (:class:`ctt.orbits.PreciseOrbits`). A list is stored as a
    tuple, a one-element list as its path.
    """

    obs_a: str | None
    obs_b: str | None
    nav: str | None = None
    sp3: str | tuple[str, ...] | None = None
    clk: str | tuple[str, ...] | None = None
    ionex: str | None = None
    met_a: str | None = None
    met_b: str | None = None
    antex: str | None = None
    tracks_a: str | None = None   #: a partner's CGGTTS track file in place of obs_a
    tracks_b: str | None = None   #: ... in place of obs_b
    #: IGS ERP file(s) for the pole tide of mode 'ppp' (several: merged); unused by the code modes
    erp: str | tuple[str, ...] | None = None

    def __post_init__(self):
        for name in ("sp3", "clk", "erp"):
            v = getattr(self, name)
            if v is not None and not isinstance(v, (str, pathlib.PurePath)):
                v = tuple(str(p) for p in v)
                object.__setattr__(self, name, None if not v else v[0] if len(v) == 1 else v)

    def files(self) -> dict:
        """{name: path or tuple of paths} of the files given."""
        return {k: v for k, v in dataclasses.asdict(self).items() if v is not None}


def files_record(files: dict) -> dict:
    """{name: {"path", "sha256"}} of :meth:`PairInputs.files`; several files -> a list of such dicts."""
    out = {}
    for k, v in files.items():
        if isinstance(v, (tuple, list)):
            out[k] = [{"path": str(p), "sha256": file_sha256(p)} for p in v]
        else:
            out[k] = {"path": str(v), "sha256": file_sha256(v)}
    return out


@dataclasses.dataclass(frozen=True)
class PairOptions:
    """How a pair-day is processed."""

    mode: str = "tracks"                 #: tracks | epochs | all-in-view
    bin_s: float | None = None           #: epochs/all-in-view bin; None = every epoch
    orbits: str = "auto"                 #: auto | broadcast | precise
    weights: str = "sin2el"
    mad_k: float = 3.5
    min_common: int = 2            #: fewer common satellites: the point is flagged few_satellites
    measure: MeasureOptions = MeasureOptions()
    #: configured inter-system biases {'A': {'E': ns}, 'B': {...}} (system minus GPS at that
    #: station); systems not given are estimated from the day (ctt.commonview)
    isb_ns: dict | None = None
    #: GLONASS per-channel code biases in CV / all-in-view: 'estimate' (fitted per channel, zero
    #: mean; ctt.commonview) or 'none'
    glonass_ifb: str = "estimate"
    #: mode 'ppp': the estimator's options (ctt.ppp.PPPOptions); None = its defaults
    ppp: object | None = None

    def __post_init__(self):
        if self.mode not in MODES:
            raise ValueError(f"mode must be one of {', '.join(MODES)}, not {self.mode!r}")
        if self.orbits not in ("auto", "broadcast", "precise"):
            raise ValueError(f"orbits must be auto, broadcast or precise, not {self.orbits!r}")

    def to_dict(self) -> dict:
        biases = self.measure.biases
        d = dataclasses.asdict(dataclasses.replace(self, measure=dataclasses.replace(self.measure, biases=None),
                                                   ppp=None))
        if self.ppp is not None:
            d["ppp"] = dataclasses.asdict(self.ppp) if dataclasses.is_dataclass(self.ppp) else str(self.ppp)
        d["measure"]["biases"] = biases if isinstance(biases, str) else getattr(biases, "path", None)
        d["measure"]["systems"] = list(self.measure.systems)
        d["measure"]["codes"] = list(self.measure.codes)
        return d


@dataclasses.dataclass
class PairResult:
    offset: pd.DataFrame            #: the series written to offset.csv
    offset_by_system: pd.DataFrame  #: every system's series (and 'ALL')
    satellites: pd.DataFrame
    summary: dict
    station_a: StationDay | None  #: None when A came as a track file
    station_b: StationDay | None
    cv: commonview.CommonViewResult | None   #: None in mode 'ppp'
    budget: dict
    ppp: dict | None = None         #: mode 'ppp': {'A': PPPResult, 'B': PPPResult}

    def summary_lines(self) -> list[str]:
        s = self.summary
        o = self.offset
        ok = o["flag"] == "ok"
        lines = [f"pair {s['pair']} ({s['mode']}, {s['signals']}, {s['reference']} clocks): "
                 f"{int(ok.sum())} of {len(o)} points ok"]
        if s.get("daily_value") is None:
            lines.append("  " + str((s.get("daily_value_detail") or {}).get("reason", "no daily value")))
        if ok.any() and s.get("daily_value") is not None:
            lines.append(format_daily_value(s["daily_value"], s["station_a"], s["station_b"]))
            lines.append(f"  median point u {o.loc[ok, 'u_ns'].median():.3f} ns, "
                         f"median satellites per point {o.loc[ok, 'n_sat'].median():.0f}")
        for k, v in s["rejected"].items():
            lines.append(f"  rejected {k}: {v}")
        for day in (self.station_a, self.station_b):
            est = day.info.get("code_bias_estimates") if day is not None else None
            if est:
                b = np.array([e["bias_ns"] for e in est], dtype=float)
                u = np.array([e["u_ns"] for e in est], dtype=float)
                lines.append(f"  code biases estimated at {day.station_id}: {len(b)} satellites, RMS "
                             f"{np.sqrt(np.mean(b ** 2)):.2f} ns, median u {np.nanmedian(u):.2f} ns (zero mean "
                             f"over the satellites: their common part is in the station clock; per satellite "
                             f"in summary.json)")
        ch = s.get("glonass_channel_biases") or []
        if ch:
            b = np.array([e["bias_ns"] for e in ch], dtype=float)
            lines.append(f"  GLONASS channel biases removed ({', '.join(sorted({e['station'] for e in ch}))}): "
                         f"{len(b)} channels, RMS {np.sqrt(np.mean(b ** 2)):.2f} ns (zero mean: their common "
                         f"part stays in the GLONASS series; per channel in summary.json)")
        for who, c in (s.get("coordinates") or {}).items():
            if c:
                lines.append(f"  antenna position from the day's code data, {c['station']} ({who}): "
                             f"E {c['d_east_m']:+.2f} m, N {c['d_north_m']:+.2f} m, U {c['d_up_m']:+.2f} m "
                             f"from the station file ({c['status']})")
        for w in s.get("warnings", []):
            lines.append(f"  warning: {w}")
        for f in s.get("day_flags", []):
            lines.append(f"  DAY FLAGGED: {f}")
        if "mean_offset_ns" in self.budget:
            lines.append(commonview.format_budget(self.budget))
        return lines


def format_daily_value(dv: dict, name_a: str = "A", name_b: str = "B") -> str:
    """The one printed line of a ``daily_value`` object (the same figures as summary.json)."""
    return (f"  daily value, clock A - clock B ({name_a} - {name_b}) at {dv['epoch_utc']}: {dv['offset_ns']:.3f} ns, "
            f"u {dv['u_ns']:.3f} ns (type A {dv['u_a_ns']:.3f}, type B {dv['u_b_ns']:.3f}; 1 sigma)")


# ------------------------------------------------------------------ inputs

def _need(path, what):
    if path is None:
        raise MissingInputError(f"no {what} given")
    return require_file(path, what)   # absent: exit 3; a folder or a device: exit 2


def _several(v) -> list:
    """A path, a sequence of paths or None -> list of paths."""
    if v is None:
        return []
    if isinstance(v, (str, pathlib.PurePath)):
        return [v]
    return list(v)


def load_erp(paths):
    """IGS ERP file(s) -> one :class:`ctt.formats.erp.ErpData` (several merged), None without any."""
    paths = _several(paths)
    if not paths:
        return None
    from .formats.erp import merge_erp, read_erp

    return merge_erp([read_erp(_need(p, "ERP file")) for p in paths])


#: Why the code modes do not use an ERP file (the pole tide is modelled by mode 'ppp' only).
ERP_UNUSED = ("ERP file not used: mode {mode} (code) does not model the solid Earth pole tide "
              "(a few mm, far below the code noise); only mode ppp applies it")


def load_orbits(inputs: PairInputs, choice: str = "auto", galileo_source: str = "inav"):
    """The satellite source for a day: (orbits, nav header or None, 'broadcast'|'precise')."""
    from .orbits import BroadcastOrbits
    from .formats.rinex_nav import read_nav

    nav = read_nav(_need(inputs.nav, "navigation file")) if inputs.nav else None
    use_precise = choice == "precise" or (choice == "auto" and inputs.sp3 is not None)
    if use_precise:
        from .formats.antex import read_antex
        from .formats.rinex_clock import read_clock
        from .formats.sp3 import read_sp3
        from .orbits import PreciseOrbits

        sp3 = [read_sp3(_need(p, "SP3 orbit file")) for p in _several(inputs.sp3)]
        clk = [read_clock(_need(p, "RINEX clock file")) for p in _several(inputs.clk)] or None
        if len(sp3) == 1:
            sp3 = sp3[0]
        antex = read_antex(_need(inputs.antex, "ANTEX file")) if inputs.antex else None
        orbits = PreciseOrbits(sp3, clk=clk, antex=antex)
        return orbits, (nav.header if nav is not None else None), "precise", nav
    if nav is None:
        raise MissingInputError("broadcast orbits need a navigation file (--nav)")
    return BroadcastOrbits(nav, galileo_source=galileo_source), nav.header, "broadcast", nav


def measure_file(obs_path, station, orbits, nav_header, options: MeasureOptions, *, met_path=None,
                 ionex=None, reference=None, obs=None, force_inputs: bool = False,
                 check_inputs: bool = True, nav=None) -> StationDay:
    """Read one observation file (unless ``obs`` is given), check that it belongs to the
    station file (:func:`check_obs_file`) and run the measurement model. The check's
    warnings are in ``info['input_warnings']``."""
    from .formats.rinex_obs import read_obs

    if obs is None:
        obs = read_obs(_need(obs_path, "observation file"), on_error="skip")
        if obs.dropped:
            log.warning("%s: %d bad epochs skipped (first: line %s, %s)", obs_path, len(obs.dropped),
                        obs.dropped[0][0], obs.dropped[0][1])
    input_warnings = check_obs_file(obs, station, obs_path, force_inputs=force_inputs) if check_inputs else []
    met = None
    if met_path:
        from .formats import rinex_met as metmod

        met = metmod.read_met(_need(met_path, "meteorological file"))
    day = measure_station(obs, orbits, station, options, nav_header=nav_header, met=met,
                          ionex=ionex, reference=reference, nav=nav)
    day.info["input_warnings"] = input_warnings
    return day


def check_obs_file(obs, station, path=None, *, force_inputs: bool = False) -> list[str]:
    """An observation file against its station file: RINEX MARKER NAME and APPROX POSITION
    (:func:`ctt.config.check_station_data`); a mismatch is a UsageError (exit 2) unless
    ``force_inputs``. Logs and returns the warnings. For every command that measures a
    station (measure, tracks, pair, daily, and the carrier-phase one)."""
    from .config import check_station_data

    h = getattr(obs, "header", obs)  # ObsData or ObsHeader
    warns = check_station_data(station, path or getattr(obs, "path", "observation file"), h.marker_name,
                               h.approx_position_m, what="MARKER NAME", force=force_inputs)
    for w in warns:
        log.warning("%s", w)
    return warns


def check_track_file(header, station, path, *, force_inputs: bool = False) -> list[str]:
    """A partner's CGGTTS file against the partner's station file: LAB and X/Y/Z (as
    :func:`check_obs_file`)."""
    from .config import check_station_data

    warns = check_station_data(station, path, header.lab, (header.x_m, header.y_m, header.z_m), what="LAB",
                               force=force_inputs)
    for w in warns:
        log.warning("%s", w)
    return warns


def _reduce(day: StationDay, options: PairOptions) -> pd.DataFrame:
    t = day.table
    if options.mode == "tracks":
        out = tracks.fit_tracks(t)
    else:
        out = tracks.bin_epochs(t, options.bin_s)
    out.attrs["reference"] = day.reference
    out.attrs["station"] = day.station_id
    return out


def _sigma_enu(station):
    """Per-axis ECEF σ -> (σE, σN, σU) at the station (diagonal of R Σ Rᵀ)."""
    from . import geodesy

    lat, lon, _ = geodesy.ecef_to_geodetic(np.asarray(station.position_m, dtype=float))
    r = geodesy.enu_matrix(float(lat), float(lon))
    cov = np.diag(np.asarray(station.position_sigma_m, dtype=float) ** 2)
    return tuple(np.sqrt(np.diag(r @ cov @ r.T)))


def run_pair(inputs: PairInputs, station_a, station_b, options: PairOptions = PairOptions(), *,
             orbits_bundle=None, force_inputs: bool = False) -> PairResult:
    """Process one pair-day (see the module docstring). A is the first station.

    The same station as A and B is refused; each input file must belong to its station
    file (:func:`check_obs_file`, :func:`check_track_file`; ``force_inputs`` turns a
    mismatch into a warning recorded in ``summary['warnings']``)."""
    from .config import check_distinct_stations

    check_distinct_stations(station_a, station_b)
    mopt = options.measure
    if options.mode == "ppp":
        return run_pair_ppp(inputs, station_a, station_b, options, orbits_bundle=orbits_bundle,
                            force_inputs=force_inputs)
    galileo_source = "fnav" if "E" in mopt.systems and mopt.signals == "iono-free" else "inav"
    if orbits_bundle is None and inputs.tracks_a and inputs.tracks_b:
        # two track files carry their own satellite clocks and models: no orbit product needed
        orbits_bundle = (None, None, "broadcast", None)
    if orbits_bundle is None:
        orbits_bundle = load_orbits(inputs, options.orbits, galileo_source)
    orbits, nav_header, reference, _nav = orbits_bundle
    if options.mode == "all-in-view" and reference != "precise":
        raise MissingInputError("all-in-view needs precise orbits and clocks (--sp3, optionally --clk)")
    ionex = None
    if inputs.ionex:
        from .formats.ionex import read_ionex

        ionex = read_ionex(_need(inputs.ionex, "IONEX file"))
    input_warnings = _check_inputs(inputs, station_a, station_b, force_inputs)
    if inputs.erp:
        input_warnings.append(ERP_UNUSED.format(mode=options.mode))
        log.warning("%s", input_warnings[-1])
    days, reduced = [], []
    for obs_path, trk_path, met_path, station in ((inputs.obs_a, inputs.tracks_a, inputs.met_a, station_a),
                                                   (inputs.obs_b, inputs.tracks_b, inputs.met_b, station_b)):
        if trk_path:
            if options.mode != "tracks":
                raise MissingInputError("a CGGTTS track file can only be used in tracks mode (--mode tracks)")
            days.append(None)
            from .exports import cggtts_to_track_table
            from .formats.cggtts import read_cggtts

            header, trk = read_cggtts(_need(trk_path, "CGGTTS track file"))
            reduced.append(cggtts_to_track_table(header, trk))
            continue
        day = measure_file(obs_path, station, orbits, nav_header, mopt, met_path=met_path, ionex=ionex,
                           reference=reference, check_inputs=False, nav=_nav)
        day.info["input_warnings"] = [w for w in input_warnings if w.startswith(str(obs_path))]
        days.append(day)
        reduced.append(_reduce(day, options))
    day_a, day_b = days
    red_a, red_b = reduced
    _check_overlap(inputs, red_a, red_b)
    cv_mode = "all-in-view" if options.mode == "all-in-view" else "cv"
    glo_k = {}
    for day in days:
        glo_k.update((day.info.get("glonass_k") or {}) if day is not None else {})
    cv = commonview.common_view(red_a, red_b, weights=options.weights, mad_k=options.mad_k,
                                min_common=options.min_common, mode=cv_mode, isb_ns=options.isb_ns,
                                glonass_ifb=options.glonass_ifb, glonass_channels=glo_k or None)
    by_sys = cv.offset_df
    main_sys = commonview.main_system(by_sys["system"]) or sorted(set(by_sys["system"]))[0]
    offset = by_sys[by_sys["system"] == main_sys].reset_index(drop=True)
    any_ok = bool((offset["flag"] == "ok").any())
    if not any_ok and not (offset["flag"] == "high_scatter").any():
        raise NoDataError(f"no usable common-view point between {station_a.id} and {station_b.id} "
                          f"({len(offset)} bins, flags: {offset['flag'].value_counts().to_dict()})")

    # type B: hardware delays of both stations (independent), coordinates by geometry
    type_b = {}
    for st, day in ((station_a, day_a), (station_b, day_b)):
        if day is not None:
            type_b[f"delays {st.id}"] = day.info["u_hardware_ns"]
        else:
            red = red_a if st is station_a else red_b
            type_b[f"delays {st.id} (partner file)"] = _partner_delay_u(st, red)
    no_value = None
    free = clock_not_continuous(station_a, station_b,
                                [d.info.get("receiver_clock") if d is not None else None for d in (day_a, day_b)])
    if any_ok and free is None:
        budget = commonview.uncertainty_budget(
            by_sys, type_b_items=type_b, result=cv, system=main_sys,
            coordinate_sigma_m={"A": _sigma_enu(station_a), "B": _sigma_enu(station_b)})
        budget["items"] = {k.replace("coordinates A", f"coordinates {station_a.id}")
                           .replace("coordinates B", f"coordinates {station_b.id}"): v
                           for k, v in budget["items"].items()}
        daily, daily_detail = day_value(offset, station_a, station_b, budget["type_b_ns"])
        budget = {**budget, "mean_offset_ns": daily["offset_ns"], "type_a_ns": daily["u_a_ns"],
                  "total_ns": daily["u_ns"], "type_a_method": "link noise",
                  "type_a_detail": daily_detail["u_a_parts_ns"]}
    else:
        # every point failed its consistency test (e.g. files that do not belong together,
        # forced), or a receiver clock is free-running: the points are written with their
        # flags, but there is no daily value
        no_value = free or (f"no daily value: none of the {len(offset)} points passed the consistency checks "
                            f"(flags: {offset['flag'].value_counts().to_dict()})")
        log.warning("%s", no_value)
        b_var = sum(v * v for v in type_b.values())
        budget = {"type_b_ns": float(np.sqrt(b_var)), "items": dict(type_b), "system": main_sys, "n_bins": 0}
        daily, daily_detail = None, {"reason": no_value}
    summary = _summary(inputs, station_a, station_b, options, day_a, day_b, cv, offset, budget, reference)
    summary["warnings"] = list(input_warnings) + ([no_value] if no_value else [])
    _coordinate_checks(summary, ((station_a, day_a), (station_b, day_b)))
    summary["daily_value"] = daily
    summary["daily_value_detail"] = daily_detail
    return PairResult(offset=offset, offset_by_system=by_sys, satellites=cv.sat_df, summary=summary,
                      station_a=day_a, station_b=day_b, cv=cv, budget=budget)


def _check_inputs(inputs: PairInputs, station_a, station_b, force_inputs: bool) -> list[str]:
    """Both sides' files against their station files before any processing, so one
    message names every mismatch (a UsageError, exit 2); the warnings otherwise."""
    from .errors import UsageError
    from .formats.cggtts import read_cggtts
    from .formats.rinex_obs import read_obs_header

    warns, problems = [], []
    for obs_path, trk_path, station in ((inputs.obs_a, inputs.tracks_a, station_a),
                                        (inputs.obs_b, inputs.tracks_b, station_b)):
        try:
            if trk_path:
                header, _ = read_cggtts(_need(trk_path, "CGGTTS track file"))
                warns += check_track_file(header, station, trk_path, force_inputs=force_inputs)
            elif obs_path:
                header = read_obs_header(_need(obs_path, "observation file"))
                warns += check_obs_file(header, station, obs_path, force_inputs=force_inputs)
        except UsageError as exc:
            problems.append(str(exc).removesuffix(_FORCE_HINT))
    if problems:
        raise UsageError("; ".join(problems) + _FORCE_HINT)
    return warns


_FORCE_HINT = " (the files do not belong together; --force-inputs processes them anyway)"


def _coordinate_checks(summary: dict, stations) -> None:
    """The antenna position each station's code data give (ctt.measure.position_check) against
    its station file: ``summary['coordinates']`` per station (E/N/U, m), a warning above
    ``POSITION_WARN_M``, the day flagged above ``POSITION_FLAG_M`` with the reason
    (``summary['day_flags']``): wrong coordinates bias every satellite's value by up to
    the error's projection on its line of sight, so the common-view differences disagree
    and the points are rejected or biased."""
    from .measure import POSITION_FLAG_M, POSITION_WARN_M

    coords = {}
    for who, (st, day) in zip("AB", stations):
        c = (day.info.get("position_check") if day is not None else None)
        if not c:
            continue
        c = dict(c, station=st.id, station_file=str(st.path) if st.path else None)
        coords[who] = c
        text = (f"{st.id}: the day's code data put the antenna {c['distance_m']:.1f} m from the position in "
                f"{st.path or 'the station file'} (E {c['d_east_m']:+.2f}, N {c['d_north_m']:+.2f}, "
                f"U {c['d_up_m']:+.2f} m)")
        if c["distance_m"] > POSITION_FLAG_M:
            summary.setdefault("day_flags", []).append(
                text + f": more than {POSITION_FLAG_M:g} m, the station coordinates are wrong and every "
                       "point of the day is biased or rejected; correct the station file and reprocess")
            log.warning("%s", summary["day_flags"][-1])
        elif c["distance_m"] > POSITION_WARN_M:
            summary.setdefault("warnings", []).append(
                text + f": more than {POSITION_WARN_M:g} m (a code solution is good to about a metre); "
                       "check the station coordinates")
            log.warning("%s", summary["warnings"][-1])
    summary["coordinates"] = coords


def pair_changes(station_a, station_b) -> list[dict]:
    """Both stations' change logs as the expected steps of A − B (UTC epochs).

    A delay that grows by x ns at a station whose file is not yet updated raises
    that station's raw clock estimate by x: A − B steps by +x for a change at A
    and by −x for a change at B.
    """
    out = []
    for st, sign in ((station_a, 1.0), (station_b, -1.0)):
        for c in getattr(st, "changes", ()) or ():
            exp = None if c.expected_delay_change_ns is None else sign * c.expected_delay_change_ns
            out.append({"time_utc_ns": c.time_utc_ns, "what": f"{st.id}: {c.what}", "expected_ns": exp})
    return sorted(out, key=lambda c: c["time_utc_ns"])


def clock_not_continuous(station_a, station_b, characters) -> str | None:
    """Why the day has no daily value when a station's receiver clock is not a laboratory
    reference (:func:`ctt.measure.receiver_clock_character`), else None.

    A receiver on its own crystal, resetting by 1 ms (or running faster than
    ``FREE_RUNNING_RATE``), makes every point a valid clock A − clock B at its instant, but a
    line through the day, its uncertainty and the stability describe that crystal, not a
    station clock: printing them as a daily value (−23,662 ± 16,177 ns on DELF–WSRA) would
    mislead. ``characters``: the two stations' ``receiver_clock`` dicts (None where unknown,
    e.g. a partner's track file)."""
    bad = [f"{st.id}: {c['note']}" for st, c in zip((station_a, station_b), characters)
           if c is not None and not c.get("continuous", True)]
    if not bad:
        return None
    return ("no daily value: " + "; ".join(bad) + ". Each point is still clock A − clock B at its instant "
            "(offset.csv); a daily value, drift and stability need both receivers on their laboratory "
            "reference (external frequency and time)")


def day_value(offset: pd.DataFrame, station_a, station_b, u_b_ns: float) -> tuple[dict, dict]:
    """The day's ``daily_value`` object (and its detail) from the 'ok' points of the main
    series, with the stations' logged changes (ctt.stability.daily_value, UTC)."""
    from . import stability

    # from the values as written (offset.csv, archive, exports), so a value recomputed from
    # any output is the same number
    offset = commonview.round_offsets(offset)
    ok = offset["flag"] == "ok"
    t_utc = ts.convert(offset.loc[ok, "time"].to_numpy(np.int64), "GPS", "UTC")
    return stability.daily_value(t_utc, offset.loc[ok, "offset_ns"].to_numpy(float),
                                 offset.loc[ok, "u_ns"].to_numpy(float), pair_changes(station_a, station_b),
                                 u_b_ns=u_b_ns, to_iso=lambda v: str(ts.to_iso(int(v))))


def _partner_delay_u(station, tracks: pd.DataFrame) -> float:
    """Delay uncertainty (ns) of a partner whose track file already has its delays applied.

    The combination follows the file's frequency code: iono-free ('L3...') combines the
    station file's L1 and L2 receiver-delay uncertainties like the codes (2.546 and −1.546
    for GPS, ctt.signals), single frequency takes the L1 code's; cable and reference pass
    through (DelaySet.u_hardware_combined_ns)."""
    mid = int(np.median(tracks["mid_time"].to_numpy(np.int64)))
    iono_free = tracks["signal"].astype(str).str.startswith("L3").mean() > 0.5
    return _delay_u_at(station, mid, iono_free)


def _delay_u_at(station, t_gps_ns: int, iono_free: bool) -> float:
    """A station's delay uncertainty (ns) at an instant, for the iono-free GPS pair or the L1 code."""
    ds = station.delays_at(int(ts.convert(t_gps_ns, "GPS", "UTC")))
    l1 = next((c for c in ("C1W", "C1C", "C1P", "C1X") if c in ds.receiver_ns), None)
    l2 = next((c for c in ("C2W", "C2L", "C2X", "C2P", "C5Q", "C5X", "C7Q") if c in ds.receiver_ns), None)
    if l1 is None:
        return max((ds.u_hardware_ns(c) for c in ds.receiver_ns), default=0.0)
    if iono_free and l2 is not None:
        from .signals import frequency_hz, iono_free_coefficients

        f1 = frequency_hz(np.array(["G01"]), l1)[0]
        f2 = frequency_hz(np.array(["G01"]), l2)[0]
        a1, a2 = iono_free_coefficients(f1, f2)
        return ds.u_hardware_combined_ns({l1: float(a1), l2: float(a2)})
    return ds.u_hardware_ns(l1)


# ------------------------------------------------------------------ mode 'ppp'

#: what the difference of two PPP clocks computed with one product removes and what it keeps
PPP_CANCELS = ("satellite clocks and orbits (the same product at both stations)",
               "the product's time scale (the reference of both stations' PPP clocks)")
PPP_REMAINS = ("receiver, cable and reference delay calibrations of both stations",
               "station coordinates when held fixed (estimated: inside the formal uncertainty)",
               "receiver-antenna phase-centre models (must match the products' ANTEX)",
               "the day-boundary discontinuity of per-day solutions (summary 'day_boundary')")


def ppp_difference(clock_a: pd.DataFrame, clock_b: pd.DataFrame, system: str = "G") -> pd.DataFrame:
    """A − B from two PPP clock tables (``time_gps_ns``, ``clock_ns``, ``u_ns``, ``n_sat``, ``flag``) on
    their common epochs, as an offset table of :mod:`ctt.commonview`'s columns (module docstring)."""
    cols = ["time_gps_ns", "clock_ns", "u_ns", "n_sat", "flag"]
    m = pd.merge(clock_a[cols], clock_b[cols], on="time_gps_ns", how="inner", suffixes=("_a", "_b"))
    m = m.sort_values("time_gps_ns").reset_index(drop=True)
    t = m["time_gps_ns"].to_numpy(np.int64)
    utc = ts.convert(t, "GPS", "UTC")
    fa = m["flag_a"].astype(str).to_numpy()
    fb = m["flag_b"].astype(str).to_numpy()
    flag = np.where(fa != "ok", np.char.add("A:", fa.astype(str)),
                    np.where(fb != "ok", np.char.add("B:", fb.astype(str)), "ok")).astype(object)
    off = m["clock_ns_a"].to_numpy(float) - m["clock_ns_b"].to_numpy(float)
    u = np.hypot(m["u_ns_a"].to_numpy(float), m["u_ns_b"].to_numpy(float))
    flag = np.where(np.isfinite(off) | (flag != "ok"), flag, "no_data").astype(object)
    na = m["n_sat_a"].to_numpy()
    nb = m["n_sat_b"].to_numpy()
    return pd.DataFrame({
        "time": t, "time_utc": np.asarray(ts.to_iso(utc), dtype=object) if t.size else np.zeros(0, dtype=object),
        "mjd_utc": ts.to_mjd_float(utc), "system": system, "offset_ns": off, "u_ns": u, "u_apriori_ns": u,
        "n_sat": np.minimum(na, nb), "n_rejected": 0, "scatter_ns": np.nan, "chi2": np.nan, "dof": np.nan,
        "flag": flag, "n_sat_a": na, "n_sat_b": nb,
        "clock_a_ns": m["clock_ns_a"].to_numpy(float), "clock_b_ns": m["clock_ns_b"].to_numpy(float)})


#: points each side of midnight whose straight line carries each day to the boundary (5 min at 30 s)
BOUNDARY_POINTS = 10


def day_boundary(previous: pd.DataFrame | None, offset: pd.DataFrame, n: int = BOUNDARY_POINTS) -> dict | None:
    """The discontinuity between the previous day's series and this day's (None without both).

    ``previous``: the archive's rows of the day before (``time_utc_ns``, ``offset_ns``, ``u_ns``,
    ``flag``); ``offset``: this day's series. A straight line is fitted to the last ``n`` good
    points of the previous day and to the first ``n`` of this day, and both are carried to the
    instant halfway between the two days' facing points: ``jump_ns`` is this day's line minus
    the previous day's there, so the clocks' own rate (e.g. a free-running receiver's −3e-7)
    does not count as a jump. ``u_jump_ns`` is the root sum of squares of the two lines' values'
    standard errors at that instant (from the points' u). With fewer than 2 points on a side the
    facing points themselves are used."""
    if previous is None or not len(previous):
        return None
    p = previous[(previous["flag"] == "ok") & np.isfinite(previous["offset_ns"].to_numpy(float))]
    o = offset[(offset["flag"] == "ok") & np.isfinite(offset["offset_ns"].to_numpy(float))]
    if not len(p) or not len(o):
        return None
    p = p.sort_values("time_utc_ns").tail(n)
    o = o.sort_values("time").head(n)
    tp = p["time_utc_ns"].to_numpy(np.int64)
    to = ts.convert(o["time"].to_numpy(np.int64), "GPS", "UTC").astype(np.int64)
    t_mid = tp[-1] + (to[0] - tp[-1]) // 2

    def at_mid(t, x, u):
        if len(t) < 2:
            return float(x[-1] if t[-1] < t_mid else x[0]), float(u[0])
        s = (t - t_mid) / 1e9
        w = 1.0 / np.fmax(u, 1e-6) ** 2
        a = np.vstack([np.ones_like(s), s]).T
        cov = np.linalg.inv(a.T @ (a * w[:, None]))
        coef = cov @ (a.T @ (w * x))
        return float(coef[0]), float(np.sqrt(cov[0, 0]))

    vp, up = at_mid(tp, p["offset_ns"].to_numpy(float), p["u_ns"].to_numpy(float))
    vo, uo = at_mid(to, o["offset_ns"].to_numpy(float), o["u_ns"].to_numpy(float))
    return {"previous_date": str(p["date"].iloc[-1])[:10] if "date" in p.columns else "",
            "previous_last_utc": str(ts.to_iso(int(tp[-1]))), "first_utc": str(ts.to_iso(int(to[0]))),
            "at_utc": str(ts.to_iso(int(t_mid))), "gap_s": (int(to[0]) - int(tp[-1])) / 1e9,
            "previous_ns": vp, "first_ns": vo, "jump_ns": vo - vp, "u_jump_ns": float(np.hypot(up, uo)),
            "points_each_side": [int(len(tp)), int(len(to))]}


def archived_day_before(archive_path, pair_name: str, date) -> pd.DataFrame | None:
    """The previous UTC day's main series of a pair from its archive (None when absent)."""
    import datetime as _dt

    if archive_path is None or not pathlib.Path(archive_path).is_file():
        return None
    from .archive import Archive

    prev = (_dt.date.fromisoformat(str(date)[:10]) - _dt.timedelta(days=1)).isoformat()
    arc = Archive(archive_path)
    try:
        off = arc.load_offsets(pair_name, prev, prev, extras=False)
    finally:
        close = getattr(arc, "close", None)
        if close is not None:
            close()
    if off is None or not len(off):
        return None
    return commonview.main_series(off)


def add_day_boundary(result: PairResult, pc, date) -> dict | None:
    """Mode 'ppp' of a pair file: record the jump from the archived day before (summary 'day_boundary')."""
    if result.summary.get("mode") != "ppp":
        return None
    b = day_boundary(archived_day_before(getattr(pc, "archive_path", None), pc.name, date), result.offset)
    if b is not None:
        result.summary["day_boundary"] = b
    return b


def _ppp_options(options: PairOptions):
    from .ppp import PPPOptions

    return options.ppp if options.ppp is not None else PPPOptions()


def run_pair_ppp(inputs: PairInputs, station_a, station_b, options: PairOptions, *, orbits_bundle=None,
                 force_inputs: bool = False) -> PairResult:
    """Mode 'ppp': each station by :func:`ctt.ppp.run_ppp`, then A − B on common epochs (module docstring)."""
    from .ppp import run_ppp
    from .formats.rinex_obs import read_obs

    if inputs.obs_a is None or inputs.obs_b is None or inputs.tracks_a or inputs.tracks_b:
        raise MissingInputError("mode ppp needs both stations' observation files (track files cannot be used)")
    erp = load_erp(inputs.erp)     # pole tide (ctt.ppp); a bad file fails here, before the long reads
    if orbits_bundle is None:
        if not inputs.sp3:
            raise MissingInputError("mode ppp needs precise orbits and clocks (--sp3, and --clk where the "
                                    "product has a clock file)")
        orbits_bundle = load_orbits(inputs, "precise")
    orbits, _nav_header, reference, _nav = orbits_bundle
    if reference != "precise":
        raise MissingInputError("mode ppp needs precise orbits and clocks (--sp3, and --clk where the product "
                                "has a clock file)")
    input_warnings = _check_inputs(inputs, station_a, station_b, force_inputs)
    popt = _ppp_options(options)
    # a code-bias set maps C1C onto C1W where P1 is absent; 'estimate' (a code-mode option) does not apply
    biases = options.measure.biases if not isinstance(options.measure.biases, str) else None
    res = {}
    for who, obs_path, met_path, st in (("A", inputs.obs_a, inputs.met_a, station_a),
                                        ("B", inputs.obs_b, inputs.met_b, station_b)):
        obs = read_obs(_need(obs_path, "observation file"), on_error="skip", systems=tuple(popt.systems))
        if obs.dropped:
            log.warning("%s: %d bad epochs skipped (first: line %s, %s)", obs_path, len(obs.dropped),
                        obs.dropped[0][0], obs.dropped[0][1])
        met = None
        if met_path:
            from .formats import rinex_met as metmod

            met = metmod.read_met(_need(met_path, "meteorological file"))
        # receiver antennas from the ANTEX file the orbits were loaded with (inputs.antex)
        res[who] = run_ppp(obs, orbits, st, popt, met=met, biases=biases, erp=erp)
    systems = sorted({str(s) for s in getattr(popt, "systems", options.measure.systems)})
    system = systems[0] if len(systems) == 1 else "ALL"
    offset = ppp_difference(res["A"].clock, res["B"].clock, system=system)
    if not (offset["flag"] == "ok").any():
        raise NoDataError(f"no common good PPP epoch between {station_a.id} and {station_b.id} "
                          f"({len(offset)} common epochs, flags: {offset['flag'].value_counts().to_dict()})")
    sats = []
    for who, st in (("A", station_a), ("B", station_b)):
        r = res[who].residuals.copy()
        r.insert(0, "station", st.id)
        r.insert(0, "time", r["time_gps_ns"].to_numpy(np.int64))
        sats.append(r.drop(columns=["time_gps_ns"]))
    satellites = pd.concat(sats, ignore_index=True).sort_values(["time", "station", "sat"], kind="stable")
    satellites = satellites.reset_index(drop=True)
    t_mid = int(np.median(offset["time"].to_numpy(np.int64)))
    type_b = {}
    for who, st in (("A", station_a), ("B", station_b)):
        u_hw = (res[who].summary or {}).get("u_hardware_ns")
        type_b[f"delays {st.id}"] = float(u_hw) if u_hw is not None else _delay_u_at(st, t_mid, iono_free=True)
    for who, st in (("A", station_a), ("B", station_b)):
        item = _ppp_coordinate_u(res[who], st)
        if item is not None:
            type_b[f"coordinates {st.id} (held fixed)"] = item
    budget = commonview.uncertainty_budget(offset, type_b_items=type_b, system=system)
    budget["cancels"] = list(PPP_CANCELS)
    budget["does_not_cancel"] = list(PPP_REMAINS)
    free = clock_not_continuous(station_a, station_b, [res[w].summary.get("receiver_clock") for w in ("A", "B")])
    if free is None:
        daily, daily_detail = day_value(offset, station_a, station_b, budget["type_b_ns"])
        budget = {**budget, "mean_offset_ns": daily["offset_ns"], "type_a_ns": daily["u_a_ns"],
                  "total_ns": daily["u_ns"], "type_a_method": "link noise",
                  "type_a_detail": daily_detail["u_a_parts_ns"]}
    else:
        log.warning("%s", free)
        daily, daily_detail = None, {"reason": free}
    summary = _summary_ppp(inputs, station_a, station_b, options, popt, res, offset, budget, satellites)
    summary["warnings"] = list(input_warnings) + ([free] if free else [])
    summary["daily_value"] = daily
    summary["daily_value_detail"] = daily_detail
    return PairResult(offset=offset, offset_by_system=offset, satellites=satellites, summary=summary,
                      station_a=None, station_b=None, cv=None, budget=budget, ppp=res)


def _ppp_coordinate_u(result, station) -> float | None:
    """Coordinate item (ns) of a station whose PPP held the position fixed at the station file's.

    A constant position error moves every clock estimate by the mean projection on the lines of
    sight; horizontal parts average out over the sky, the vertical one does not (as in
    :func:`ctt.commonview.coordinate_uncertainty_ns`): u = σ_U·mean(sin el)/c, with the elevations
    of the used residuals. None when the position was estimated or constrained (then it is in the
    formal u)."""
    summ = getattr(result, "summary", {}) or {}
    if summ.get("position_mode", "estimate") != "fixed":
        return None
    el = result.residuals.loc[result.residuals["flag"] == "ok", "el_deg"].to_numpy(float)
    if not el.size:
        return None
    s_u = _sigma_enu(station)[2]
    return float(s_u * np.mean(np.sin(np.radians(el))) / 299_792_458.0 * 1e9)


def _summary_ppp(inputs, station_a, station_b, options, popt, res, offset, budget, satellites) -> dict:
    files = {}
    for k, v in inputs.files().items():
        paths = v if isinstance(v, (list, tuple)) else [v]
        recs = [{"path": str(p), "sha256": file_sha256(p)} for p in paths]
        files[k] = recs[0] if len(recs) == 1 else recs
    ok = offset["flag"] == "ok"
    rejected = {}
    for who in ("A", "B"):
        for flag, n in res[who].clock["flag"].value_counts().to_dict().items():
            if flag != "ok":
                rejected[f"{who} epochs {flag}"] = int(n)
        for flag, n in res[who].residuals["flag"].value_counts().to_dict().items():
            if flag != "ok":
                rejected[f"{who} observations {flag}"] = int(n)
    return {
        **_summary_head(station_a, station_b, files, offset, rejected),
        "mode": "ppp", "signals": "iono-free code and carrier phase", "reference": "precise",
        "config": options.to_dict(),
        "models": {"A": res["A"].summary, "B": res["B"].summary},
        "counts": {"points": int(len(offset)), "points_ok": int(ok.sum()),
                   "epochs_a": int(len(res["A"].clock)), "epochs_b": int(len(res["B"].clock)),
                   "residuals": int(len(satellites))},
        "budget": {k: budget[k] for k in ("type_b_ns", "items", "system", "n_bins", "cancels",
                                          "does_not_cancel") if k in budget},
        "isb": [],
        "rejected": rejected,
    }


def read_track_file(path) -> pd.DataFrame:
    """A partner's CGGTTS 2E file as a track table for :func:`ctt.commonview.common_view`."""
    from .exports import cggtts_to_track_table
    from .formats.cggtts import read_cggtts

    header, df = read_cggtts(_need(path, "CGGTTS track file"))
    return cggtts_to_track_table(header, df)


def _check_overlap(inputs, red_a, red_b):
    ta, tb = red_a["mid_time"], red_b["mid_time"]
    name_a = inputs.obs_a or inputs.tracks_a
    name_b = inputs.obs_b or inputs.tracks_b
    if ta.empty or tb.empty:
        raise NoDataError(f"no usable data in {name_a if ta.empty else name_b}")
    lo, hi = max(ta.min(), tb.min()), min(ta.max(), tb.max())
    if lo > hi:
        raise NoDataError(f"{name_a} ({ts.to_iso(int(ta.min()))}..{ts.to_iso(int(ta.max()))} GPS) and "
                          f"{name_b} ({ts.to_iso(int(tb.min()))}..{ts.to_iso(int(tb.max()))} GPS) "
                          f"do not overlap in time")
    span_a = ta.max() - ta.min()
    span_b = tb.max() - tb.min()
    common = hi - lo
    if common < 0.9 * max(span_a, span_b):
        msg = (f"the two stations' data overlap for {common / 3.6e12:.1f} h only "
               f"({ts.to_iso(int(lo))}..{ts.to_iso(int(hi))}); the result covers that part")
        log.warning(msg)
        warnings.warn(msg, stacklevel=3)


def _summary_head(station_a, station_b, files, offset, rejected) -> dict:
    """The part of a pair-day summary every mode shares: software, pair, date, sign, inputs with
    the station files' hashes; adds the flagged points to ``rejected`` (in place)."""
    for label, st in (("station_a", station_a), ("station_b", station_b)):
        if getattr(st, "path", None):
            files[label] = {"path": str(st.path), "sha256": st.sha256}
    for flag, n in offset["flag"].value_counts().to_dict().items():
        if flag != "ok":
            rejected[f"points {flag}"] = int(n)
    t_mid = int(np.median(offset["time"].to_numpy(np.int64)))
    return {
        "software": {"name": "ctt", "version": __version__},
        "version": __version__,
        "pair": f"{station_a.id}-{station_b.id}",
        "station_a": station_a.id, "station_b": station_b.id,
        "date_utc": str(ts.to_iso(ts.convert(t_mid, "GPS", "UTC")))[:10],
        "sign": "offset_ns = clock A - clock B",
        "inputs": files,
    }


def _summary(inputs, station_a, station_b, options, day_a, day_b, cv, offset, budget, reference) -> dict:
    files = files_record(inputs.files())
    ok = offset["flag"] == "ok"
    rejected = {}
    for who, day in (("A", day_a), ("B", day_b)):
        for flag, n in (day.counts.items() if day is not None else ()):
            if flag != "ok":
                rejected[f"{who} {flag}"] = int(n)
    sat_flags = cv.sat_df["flag"].value_counts().to_dict() if "flag" in cv.sat_df else {}
    for flag, n in sat_flags.items():
        if flag != "ok":
            rejected[f"differences {flag}"] = int(n)
    return {
        **_summary_head(station_a, station_b, files, offset, rejected),
        "mode": options.mode, "signals": options.measure.signals, "reference": reference,
        "config": options.to_dict(),
        "models": {"A": day_a.info if day_a is not None else {"source": f"track file {inputs.tracks_a}"},
                   "B": day_b.info if day_b is not None else {"source": f"track file {inputs.tracks_b}"}},
        "counts": {"points": int(len(offset)), "points_ok": int(ok.sum()),
                   "differences": int(len(cv.sat_df)),
                   "measurements_a": int(len(day_a.table)) if day_a is not None else 0,
                   "measurements_b": int(len(day_b.table)) if day_b is not None else 0},
        "budget": {k: budget[k] for k in ("type_b_ns", "items", "system", "n_bins")},
        "isb": cv.isb.to_dict(orient="records") if len(cv.isb) else [],
        "glonass_channel_biases": (cv.channel_biases.to_dict(orient="records") if len(cv.channel_biases)
                                   else []),
        "rejected": rejected,
    }


# ------------------------------------------------------------------ outputs

OFFSET_CSV_COLUMNS = ["time_utc", "mjd_utc", "offset_ns", "u_ns", "n_sat", "flag", "system",
                      "scatter_ns", "n_rejected", "u_apriori_ns", "chi2", "dof", "time_gps_ns"]


def offset_table(offset: pd.DataFrame) -> pd.DataFrame:
    """The offset series in the column order of ``offset.csv``, values rounded as in every
    output (:data:`ctt.commonview.OFFSET_DECIMALS`); the integer instant is ``time_gps_ns``."""
    out = commonview.round_offsets(offset)
    out["time_gps_ns"] = out["time"].astype(np.int64)
    cols = [c for c in OFFSET_CSV_COLUMNS if c in out.columns]
    return out[cols]


def with_named_times(df: pd.DataFrame) -> pd.DataFrame:
    """A table for a file: its integer GPS-time column ``time`` renamed ``time_gps_ns`` (no
    column in a written file is called just ``time``; ns since 1980-01-06 on GPS time)."""
    return df.rename(columns={"time": "time_gps_ns"}) if "time" in df.columns else df


def _csv(df: pd.DataFrame, rounded: bool = False):
    """Writer of a table as CSV: 4 decimals (0.1 ps) for values, MJD with 10 (~10 µs), the
    offset series' values with :data:`ctt.commonview.OFFSET_DECIMALS`.

    ``rounded``: values rounded to 4 decimals and written in their shortest form (no
    trailing zeros) by pandas' C writer, ~20 times faster than a format string for large
    tables (PPP residuals)."""
    def write(f):
        d = df.copy()
        for c in d.columns:
            if c.startswith("mjd"):
                d[c] = d[c].map(lambda v: f"{v:.10f}" if np.isfinite(v) else "")
            elif c in commonview.OFFSET_DECIMALS and d[c].dtype.kind == "f":
                n = commonview.OFFSET_DECIMALS[c]
                d[c] = d[c].map(lambda v: f"{v:.{n}f}" if np.isfinite(v) else "")
            elif rounded and d[c].dtype.kind == "f":
                d[c] = d[c].round(4)
        if rounded:
            d.to_csv(f, index=False)
        else:
            d.to_csv(f, index=False, float_format="%.4f")
    return write


def _atomic_write(path: pathlib.Path, write):
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "w", newline="") as f:
            write(f)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def _json_default(o):
    if isinstance(o, (np.integer,)):
        return int(o)
    if isinstance(o, (np.floating,)):
        return None if not np.isfinite(o) else float(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, (pathlib.Path,)):
        return str(o)
    return str(o)


def _clean(o):
    """Replace non-finite floats by None so the JSON is standard."""
    if isinstance(o, dict):
        return {str(k): _clean(v) for k, v in o.items()}
    if isinstance(o, (list, tuple)):
        return [_clean(v) for v in o]
    if isinstance(o, float) and not np.isfinite(o):
        return None
    if isinstance(o, np.floating):
        return None if not np.isfinite(o) else float(o)
    return o


def write_json(path, obj):
    _atomic_write(pathlib.Path(path), lambda f: json.dump(_clean(obj), f, indent=2, default=_json_default))


def write_pair_outputs(result: PairResult, out_dir) -> dict:
    """Write offset.csv, satellites.csv, summary.json (and offset_by_system.csv) into ``out_dir``."""
    out = pathlib.Path(out_dir)
    paths = {}
    p = out / "offset.csv"
    _atomic_write(p, _csv(offset_table(result.offset)))
    paths["offset"] = p
    if result.offset_by_system["system"].nunique() > 1:
        p = out / "offset_by_system.csv"
        _atomic_write(p, _csv(offset_table(result.offset_by_system)))
        paths["offset_by_system"] = p
    sat = with_named_times(result.satellites)
    if "time_gps_ns" in sat.columns:
        sat.insert(0, "time_utc", ts.to_iso(ts.convert(sat["time_gps_ns"].to_numpy(np.int64), "GPS", "UTC")))
    p = out / "satellites.csv"
    _atomic_write(p, _csv(sat))
    paths["satellites"] = p
    p = out / "summary.json"
    write_json(p, result.summary)
    paths["summary"] = p
    return paths


# ------------------------------------------------------------------ pair files

def options_from_processing(proc) -> PairOptions:
    """PairOptions from a pair file's ``[processing]`` table (ctt.config.Processing)."""
    m = MeasureOptions(
        signals=proc.signals, systems=tuple(proc.systems), codes=tuple(proc.codes),
        elevation_mask_deg=proc.elevation_mask_deg,
        troposphere=not proc.no_troposphere, ionosphere=not proc.no_ionosphere, tide=not proc.no_tide,
        sagnac=not proc.no_sagnac, relativity=not proc.no_relativity,
        smoothing_s=float(proc.smoothing_s),
        mad_k=float(proc.mad_k), biases="estimate" if getattr(proc, "bias", None) == "estimate" else None)
    bin_s = proc.bin_s if proc.mode not in ("tracks", "ppp") else None
    return PairOptions(mode=proc.mode, bin_s=bin_s, orbits=proc.orbits, mad_k=float(proc.mad_k),
                       min_common=int(proc.min_common_sats), measure=m,
                       glonass_ifb=getattr(proc, "glonass_ifb", "estimate"),
                       weights=proc.weights)


def pair_day_from_config(config, date):
    """(PairInputs, station A, station B, PairOptions) for one UTC date of a pair file."""
    from .config import load_pair

    pc = config if hasattr(config, "resolve_inputs") else load_pair(config)
    found = pc.resolve_inputs(date)
    inputs = PairInputs(obs_a=str(found["obs_a"]), obs_b=str(found["obs_b"]),
                        nav=_s(found.get("nav")), sp3=_s(found.get("sp3")), clk=_s(found.get("clk")),
                        ionex=_s(found.get("ionex")), met_a=_s(found.get("met_a")), met_b=_s(found.get("met_b")),
                        antex=_s(found.get("antex")), erp=_s(found.get("erp")))
    if pc.patterns.get("erp") and found.get("erp") is None:
        log.warning("%s: no ERP file for %s (erp is optional): the PPP solid Earth pole tide is not applied "
                    "that day", pc.path, date)
    options = options_from_processing(pc.processing)
    if options.measure.elevation_mask_deg is None:
        # the pair file's documented default: the larger of the two stations' masks, at both
        options = dataclasses.replace(options, measure=dataclasses.replace(
            options.measure, elevation_mask_deg=pc.elevation_mask_deg()))
    return inputs, pc.station_a, pc.station_b, options


def _s(p):
    if p is None:
        return None
    if isinstance(p, (tuple, list)):
        return tuple(str(x) for x in p)
    return str(p)



# ------------------------------------------------------------------ PPP (one station)

#: Columns of a PPP clock.csv, in order.
PPP_CLOCK_COLUMNS = ["time_utc", "time_gps_ns", "clock_ns", "u_ns", "n_sat", "flag", "ztd_m"]


def ppp_files(obs_path, station, *, sp3, clk=(), antex=None, bias=None, met=None, erp=(), options=None,
              out_dir=None, force_inputs: bool = False):
    """Read one station-day's files (the observation file checked against the station file as
    for every command, :func:`check_obs_file`), run :func:`ctt.ppp.run_ppp`, write the
    outputs when ``out_dir`` is given. ``sp3``/``clk``/``erp`` may name several files (merged).
    Returns (PPPResult, {name: path})."""
    from .config import load_station
    from .formats.rinex_obs import read_obs
    from .ppp import PPPOptions, run_ppp

    opts = options or PPPOptions()
    st = station if hasattr(station, "arp_m") else load_station(_need(station, "station file"))
    erp_data = load_erp(erp)      # before the long reads: a bad ERP file is reported at once
    obs = read_obs(_need(obs_path, "observation file"), on_error="skip", systems=tuple(opts.systems))
    if obs.dropped:
        log.warning("%s: %d bad epochs skipped (first: line %s, %s)", obs_path, len(obs.dropped),
                    obs.dropped[0][0], obs.dropped[0][1])
    warns = check_obs_file(obs, st, obs_path, force_inputs=force_inputs)
    if not _several(sp3):
        raise MissingInputError("no SP3 orbit file given (--sp3)")
    orbits = load_orbits(PairInputs(obs_a=None, obs_b=None, sp3=tuple(_several(sp3)),
                                    clk=tuple(_several(clk)) or None, antex=antex), "precise")[0]
    met_data = None
    if met:
        from .formats import rinex_met as metmod

        met_data = metmod.read_met(_need(met, "meteorological file"))
    biases = None
    if bias:
        from .formats.bias_sinex import read_code_biases

        biases = read_code_biases(_need(bias, "code-bias file"))     # Bias-SINEX or a monthly DCB file
    result = run_ppp(obs, orbits, st, opts, met=met_data, biases=biases, erp=erp_data)
    if warns:
        result.summary["input_warnings"] = warns
    paths = {}
    if out_dir is not None:
        from .archive import inputs_record

        sp3_l, clk_l = _several(sp3), _several(clk)
        named = {"obs": obs_path, "station": getattr(st, "path", None) or station, "antex": antex,
                 "bias": bias, "met": met}
        named.update({f"sp3_{k + 1}": p for k, p in enumerate(sp3_l)})
        named.update({f"clk_{k + 1}": p for k, p in enumerate(clk_l)})
        erp_l = _several(erp)
        named.update({"erp" if len(erp_l) == 1 else f"erp_{k + 1}": p for k, p in enumerate(erp_l)})
        result.summary["inputs"] = inputs_record(named)
        paths = write_ppp_outputs(result, out_dir)
    return result, paths


def write_ppp_outputs(result, out_dir) -> dict:
    """Write clock.csv, residuals.csv and summary.json of a :class:`ctt.ppp.PPPResult`."""
    out = pathlib.Path(out_dir)
    clock = result.clock.copy()
    clock.insert(0, "time_utc", ts.to_iso(ts.convert(clock["time_gps_ns"].to_numpy(np.int64), "GPS", "UTC"), 1))
    paths = {"clock": out / "clock.csv", "residuals": out / "residuals.csv", "summary": out / "summary.json"}
    _atomic_write(paths["clock"], _csv(clock[PPP_CLOCK_COLUMNS + [c for c in clock.columns
                                                                  if c not in PPP_CLOCK_COLUMNS]]))
    res = result.residuals.copy()
    res.insert(0, "time_utc", ts.to_iso(ts.convert(res["time_gps_ns"].to_numpy(np.int64), "GPS", "UTC"), 1))
    _atomic_write(paths["residuals"], _csv(res, rounded=True))
    summary = dict(result.summary)
    summary["options"] = dataclasses.asdict(result.options) if result.options is not None else {}
    summary["software"] = {"name": "ctt", "version": __version__}
    summary["version"] = __version__
    write_json(paths["summary"], summary)
    return paths
