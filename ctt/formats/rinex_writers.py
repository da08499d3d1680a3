"""RINEX writers used by the scenario simulator (:mod:`ctt.simulate`).

* :func:`write_obs3` — RINEX 3.04 observation file (mixed GNSS): header with
  APPROX POSITION XYZ, ANTENNA: DELTA H/E/N, SYS / # / OBS TYPES, INTERVAL,
  TIME OF FIRST/LAST OBS, SYS / PHASE SHIFT, LEAP SECONDS; epoch records
  ``> yyyy mm dd hh mm ss.sssssss  f nn`` and one ``A3 + n*(F14.3 I1 I1)``
  record per satellite (RINEX 3.04 tables A2/A3).
* :func:`write_obs2` — RINEX 2.11 observation file (GPS only, two-letter
  codes, 5 values per 80-column line; RINEX 2.11 table A1).
* :func:`write_nav3` — RINEX 3.04 navigation file with GPS LNAV, Galileo and
  GLONASS FDMA records (``A1,I2.2,1X,I4,5(1X,I2.2),3D19.12`` then
  ``4X,4D19.12`` lines; RINEX 3.04 tables A6/A8/A10: GLONASS −τ_n, +γ_n, t_k
  then three lines of position, velocity, luni-solar acceleration in km, km/s,
  km/s² with health, frequency number and age), IONOSPHERIC CORR, TIME SYSTEM
  CORR, LEAP SECONDS.
* :func:`write_met2` — RINEX 2.11 meteorological file (PR, TD, HR; table A9).
* :func:`write_sp3` — SP3-c orbit and clock file (positions in km with
  ``F14.6``, clocks in µs with ``F14.6``; header lines as in the SP3-c
  format document, Hilla 2010).
* :func:`write_clock3` — RINEX clock 3.00 file with ``AS`` satellite clock
  records (``A2,1X,A4,1X,I4,4(1X,I2),F10.6,I3,2X,2E20.12``; RINEX clock 3.00).

Every writer takes plain numpy arrays, writes text and, when the target name
ends in ``.gz``, gzips it; an observation file named ``.crx`` (or ``.crx.gz``)
is written as Hatanaka compact RINEX through the ``hatanaka`` package (text,
about a third of the size, and what many archives distribute). Values are written with the formats' fixed
resolution (0.001 for observations, 0.1 for met values, 12 decimal mantissa
digits for navigation fields); :func:`nav_field` returns the value a reader
will get back from a navigation field, so a simulator can take its truth from
the rounded numbers it actually wrote.
"""

from __future__ import annotations

import gzip
import io
import pathlib

import numpy as np

from ..timescales import ns_to_civil

__all__ = ["write_obs3", "write_obs2", "write_nav3", "write_met2", "write_sp3", "write_clock3", "nav_field",
           "header_line", "V3_TO_V2_GPS"]

PROGRAM = "ctt simulate"


def header_line(content: str, label: str) -> str:
    """One header line: content in columns 1-60, label in 61-80."""
    if len(content) > 60:
        raise ValueError(f"header content longer than 60 columns: {content!r}")
    return f"{content:<60}{label}\n"


def _finish(path, buf: io.StringIO) -> pathlib.Path:
    path = pathlib.Path(path)
    data = buf.getvalue().encode("ascii")
    if path.name.endswith((".crx", ".crx.gz")):
        data = _compact(data)
    if path.name.endswith(".gz"):
        # mtime=0: the same content gives the same bytes (reproducible demo files)
        with open(path, "wb") as fh, gzip.GzipFile(filename="", mode="wb", fileobj=fh, mtime=0) as gz:
            gz.write(data)
    else:
        path.write_bytes(data)
    return path


def _compact(rinex: bytes) -> bytes:
    """Hatanaka compact RINEX of an observation file (the ``hatanaka`` package), with the
    CRINEX PROG / DATE line dated like the RINEX header's PGM / RUN BY / DATE instead of
    the wall clock, so the same content gives the same bytes (reproducible demo files)."""
    import datetime as _dt

    import hatanaka

    crx = hatanaka.rnx2crx(rinex).split(b"\n")
    stamp = None
    for line in rinex[:8000].split(b"\n"):
        if line[60:].startswith(b"PGM / RUN BY / DATE"):
            try:
                stamp = _dt.datetime.strptime(line[40:55].decode(), "%Y%m%d %H%M%S")
            except ValueError:
                stamp = None
            break
    if stamp is not None and len(crx) > 1 and crx[1][60:].startswith(b"CRINEX PROG / DATE"):
        crx[1] = crx[1][:40] + stamp.strftime("%d-%b-%y %H:%M").encode().ljust(20) + crx[1][60:]
    return b"\n".join(crx)


def _station_lines(w, observer, agency, receiver_number, receiver_type, receiver_version, antenna_number,
                   antenna_type, approx_xyz_m, antenna_delta_hen_m) -> None:
    """The observer, receiver, antenna and position header records (same in RINEX 2.11 and 3.04)."""
    w(header_line(f"{observer[:20]:<20}{agency[:40]:<40}", "OBSERVER / AGENCY"))
    w(header_line(f"{receiver_number[:20]:<20}{receiver_type[:20]:<20}{receiver_version[:20]:<20}",
                  "REC # / TYPE / VERS"))
    w(header_line(f"{antenna_number[:20]:<20}{antenna_type[:20]:<20}", "ANT # / TYPE"))
    x, y, z = (float(v) for v in approx_xyz_m)
    w(header_line(f"{x:14.4f}{y:14.4f}{z:14.4f}", "APPROX POSITION XYZ"))
    dh, de, dn = (float(v) for v in antenna_delta_hen_m)
    w(header_line(f"{dh:14.4f}{de:14.4f}{dn:14.4f}", "ANTENNA: DELTA H/E/N"))


def _civil(ns):
    y, mo, d, h, mi, s, nano = (int(v) for v in ns_to_civil(np.int64(ns)))
    return y, mo, d, h, mi, s, nano


def _run_date(ns) -> str:
    y, mo, d, h, mi, s, _ = _civil(ns)
    return f"{y:04d}{mo:02d}{d:02d} {h:02d}{mi:02d}{s:02d} UTC"


def _fmt_values(vals: np.ndarray, lli: np.ndarray, ssi: np.ndarray) -> list[str]:
    """Fixed-width ``F14.3 I1 I1`` fields (blank where NaN) for a 1-D array."""
    out = []
    for v, a, b in zip(vals.tolist(), lli.tolist(), ssi.tolist()):
        if v != v:  # NaN
            out.append(" " * 16)
        else:
            if not -9.9999999999e9 < v < 9.9999999999e10:
                raise ValueError(f"observation {v} does not fit F14.3")
            out.append(f"{v:14.3f}{(str(a) if a > 0 else ' ')}{(str(b) if b > 0 else ' ')}")
    return out


# ---------------------------------------------------------------- RINEX 3.04 observation

def write_obs3(path, *, marker: str, time_ns, sats, obs: dict, types: dict, lli: dict | None = None,
               ssi: dict | None = None, interval_s: float, approx_xyz_m, antenna_delta_hen_m=(0.0, 0.0, 0.0),
               receiver_type: str = "", receiver_number: str = "", receiver_version: str = "",
               antenna_type: str = "", antenna_number: str = "", observer: str = "", agency: str = "",
               leap_seconds: int | None = None, run_ns=None, comments=(), epoch_flags=None,
               marker_number: str = "", glonass_slots: dict | None = None) -> pathlib.Path:
    """Write a RINEX 3.04 observation file.

    ``time_ns``: int64 epochs (GPS time calendar count), ``sats``: list of RINEX
    3 ids, ``obs[code]``: float64 ``(n_epoch, n_sat)`` (NaN = absent),
    ``types[system]``: ordered list of codes written for that system,
    ``lli``/``ssi``: int arrays like ``obs`` (0 or negative = blank).
    ``epoch_flags``: optional int array per epoch (default 0). ``glonass_slots``:
    ``{'R01': k}`` written as GLONASS SLOT / FRQ # (RINEX 3.04 table A2: I3, 1X,
    then 8 × (A3, 1X, I2, 1X) per line, continuation lines indented by 4). Epochs with no
    satellite are not written. Returns the path.
    """
    time_ns = np.asarray(time_ns, dtype=np.int64)
    sats = list(sats)
    lli = lli or {}
    ssi = ssi or {}
    n_ep = time_ns.size
    buf = io.StringIO()
    w = buf.write
    systems = sorted({s[0] for s in sats if s[0] in types}, key="GREJCIS".index)
    sys_char = systems[0] if len(systems) == 1 else "M"
    w(header_line(f"{'3.04':>9}{'':11}{'OBSERVATION DATA':<20}{sys_char:<20}", "RINEX VERSION / TYPE"))
    w(header_line(f"{PROGRAM:<20}{'ctt':<20}{_run_date(run_ns if run_ns is not None else time_ns[0]):<20}",
                  "PGM / RUN BY / DATE"))
    for c in comments:
        w(header_line(str(c)[:60], "COMMENT"))
    w(header_line(marker[:60], "MARKER NAME"))
    if marker_number:
        w(header_line(marker_number[:20], "MARKER NUMBER"))
    w(header_line("GEODETIC", "MARKER TYPE"))
    _station_lines(w, observer, agency, receiver_number, receiver_type, receiver_version, antenna_number,
                   antenna_type, approx_xyz_m, antenna_delta_hen_m)
    for s in systems:
        codes = list(types[s])
        for k in range(0, max(len(codes), 1), 13):
            chunk = codes[k:k + 13]
            head = f"{s}  {len(codes):3d}" if k == 0 else " " * 6
            w(header_line(head + "".join(f" {c}" for c in chunk), "SYS / # / OBS TYPES"))
    w(header_line(" DBHZ", "SIGNAL STRENGTH UNIT"))
    w(header_line(f"{interval_s:10.3f}", "INTERVAL"))
    if glonass_slots:
        items = sorted(glonass_slots.items())
        for k in range(0, len(items), 8):
            head = f"{len(items):3d} " if k == 0 else " " * 4
            w(header_line(head + "".join(f"{sat} {int(v):2d} " for sat, v in items[k:k + 8]), "GLONASS SLOT / FRQ #"))
    sat_sys = np.array([s[0] for s in sats])
    present = np.zeros((n_ep, len(sats)), dtype=bool)
    for s in systems:
        cols = sat_sys == s
        for c in types[s]:
            if c in obs:
                present[:, cols] |= np.isfinite(obs[c][:, cols])
    with_data = np.flatnonzero(present.any(axis=1))
    if with_data.size == 0:
        raise ValueError("no observation to write")
    t_first, t_last = time_ns[with_data[0]], time_ns[with_data[-1]]
    for label, t in (("TIME OF FIRST OBS", t_first), ("TIME OF LAST OBS", t_last)):
        yy, mo, d, h, mi, sec, nano = _civil(t)
        w(header_line(f"{yy:6d}{mo:6d}{d:6d}{h:6d}{mi:6d}{sec + nano * 1e-9:13.7f}{'':5}GPS", label))
    for s in systems:
        for c in types[s]:
            if c[0] == "L":
                w(header_line(f"{s} {c} {0.0:8.5f}", "SYS / PHASE SHIFT"))
    if leap_seconds is not None:
        w(header_line(f"{int(leap_seconds):6d}", "LEAP SECONDS"))
    w(header_line("", "END OF HEADER"))

    col = {s: list(types[s]) for s in systems}
    civ = ns_to_civil(time_ns)
    flags = np.zeros(n_ep, dtype=int) if epoch_flags is None else np.asarray(epoch_flags, dtype=int)
    # pre-format per system: arrays of text per (epoch, sat) built column by column
    lines_by_sat = {}
    for j, sat in enumerate(sats):
        s = sat[0]
        if s not in col:
            continue
        rows = np.flatnonzero(present[:, j])
        if rows.size == 0:
            continue
        parts = []
        for c in col[s]:
            v = obs[c][rows, j] if c in obs else np.full(rows.size, np.nan)
            a = lli[c][rows, j] if c in lli else np.zeros(rows.size, dtype=np.int8)
            b = ssi[c][rows, j] if c in ssi else np.zeros(rows.size, dtype=np.int8)
            parts.append(_fmt_values(v, a, b))
        texts = [(sat + "".join(p)).rstrip() + "\n" for p in zip(*parts)]
        lines_by_sat[j] = dict(zip(rows.tolist(), texts))
    order = list(lines_by_sat)
    for i in range(n_ep):
        recs = [lines_by_sat[j][i] for j in order if i in lines_by_sat[j]]
        if not recs:
            continue
        sec = int(civ[5][i]) + int(civ[6][i]) * 1e-9
        w(f"> {int(civ[0][i]):4d} {int(civ[1][i]):02d} {int(civ[2][i]):02d} {int(civ[3][i]):02d} "
          f"{int(civ[4][i]):02d}{sec:11.7f}  {flags[i]:1d}{len(recs):3d}\n")
        w("".join(recs))
    return _finish(path, buf)


# ---------------------------------------------------------------- RINEX 2.11 observation (GPS)

#: RINEX 3 GPS codes -> RINEX 2.11 two-letter codes (RINEX 2.11 section 5.1;
#: C2W/L2W/S2W are the P2/L2/S2 of a Z-tracking receiver).
V3_TO_V2_GPS = {"C1C": "C1", "L1C": "L1", "S1C": "S1", "C1W": "P1", "C2W": "P2", "L2W": "L2",
                "S2W": "S2", "C5Q": "C5", "L5Q": "L5", "S5Q": "S5", "C2X": "C2", "C5X": "C5"}


def write_obs2(path, *, marker: str, time_ns, sats, obs: dict, codes: list, lli: dict | None = None,
               ssi: dict | None = None, interval_s: float, approx_xyz_m, antenna_delta_hen_m=(0.0, 0.0, 0.0),
               receiver_type: str = "", receiver_number: str = "", receiver_version: str = "",
               antenna_type: str = "", antenna_number: str = "", observer: str = "", agency: str = "",
               leap_seconds: int | None = None, run_ns=None) -> pathlib.Path:
    """Write a RINEX 2.11 GPS observation file with the RINEX 3 ``codes`` mapped by :data:`V3_TO_V2_GPS`."""
    time_ns = np.asarray(time_ns, dtype=np.int64)
    gps = [j for j, s in enumerate(sats) if s[0] == "G"]
    codes = [c for c in codes if c in V3_TO_V2_GPS]
    v2 = [V3_TO_V2_GPS[c] for c in codes]
    lli = lli or {}
    ssi = ssi or {}
    buf = io.StringIO()
    w = buf.write
    w(header_line(f"{'2.11':>9}{'':11}{'OBSERVATION DATA':<20}{'G (GPS)':<20}", "RINEX VERSION / TYPE"))
    w(header_line(f"{PROGRAM:<20}{'ctt':<20}{_run_date(run_ns if run_ns is not None else time_ns[0]):<20}",
                  "PGM / RUN BY / DATE"))
    w(header_line(marker[:60], "MARKER NAME"))
    _station_lines(w, observer, agency, receiver_number, receiver_type, receiver_version, antenna_number,
                   antenna_type, approx_xyz_m, antenna_delta_hen_m)
    w(header_line(f"{1:6d}{1:6d}", "WAVELENGTH FACT L1/2"))
    for k in range(0, len(v2), 9):
        head = f"{len(v2):6d}" if k == 0 else " " * 6
        w(header_line(head + "".join(f"{'':4}{c}" for c in v2[k:k + 9]), "# / TYPES OF OBSERV"))
    w(header_line(f"{interval_s:10.3f}", "INTERVAL"))
    yy, mo, d, h, mi, sec, nano = _civil(time_ns[0])
    w(header_line(f"{yy:6d}{mo:6d}{d:6d}{h:6d}{mi:6d}{sec + nano * 1e-9:13.7f}{'':5}GPS", "TIME OF FIRST OBS"))
    if leap_seconds is not None:
        w(header_line(f"{int(leap_seconds):6d}", "LEAP SECONDS"))
    w(header_line("", "END OF HEADER"))
    civ = ns_to_civil(time_ns)
    n_ep = time_ns.size
    present = np.zeros((n_ep, len(gps)), dtype=bool)
    for c in codes:
        present |= np.isfinite(obs[c][:, gps])
    fields = {}
    for c in codes:
        fields[c] = obs[c][:, gps]
    for i in range(n_ep):
        cols = np.flatnonzero(present[i])
        if cols.size == 0:
            continue
        ids = [sats[gps[j]] for j in cols]
        sec = int(civ[5][i]) + int(civ[6][i]) * 1e-9
        head = (f" {int(civ[0][i]) % 100:02d} {int(civ[1][i]):2d} {int(civ[2][i]):2d} {int(civ[3][i]):2d} "
                f"{int(civ[4][i]):2d}{sec:11.7f}  0{len(ids):3d}")
        for k in range(0, len(ids), 12):
            chunk = "".join(ids[k:k + 12])
            w((head if k == 0 else " " * 32) + chunk + "\n")
        for j in cols:
            jj = gps[j]
            vals = [fields[c][i, j] for c in codes]
            a = [int(lli[c][i, jj]) if c in lli else 0 for c in codes]
            b = [int(ssi[c][i, jj]) if c in ssi else 0 for c in codes]
            txt = _fmt_values(np.array(vals), np.array(a), np.array(b))
            for k in range(0, len(txt), 5):
                w("".join(txt[k:k + 5]).rstrip() + "\n")
    return _finish(path, buf)


# ---------------------------------------------------------------- RINEX 3.04 navigation

def _d19(x: float) -> str:
    """One D19.12 field (written with an ``E`` exponent, which RINEX 3 allows)."""
    x = float(x)
    if x != x:
        return " " * 19
    s = f"{x:19.12E}"
    if len(s) != 19:
        raise ValueError(f"value {x!r} does not fit a D19.12 field")
    return s


def nav_field(x):
    """The value a reader gets back from ``x`` written as a D19.12 field (vectorised)."""
    arr = np.asarray(x, dtype=float)
    out = np.array([float(f"{v:.12E}") for v in arr.ravel()]).reshape(arr.shape)
    return out if arr.ndim else float(out)


_GPS_FIELDS = [
    ["iode", "crs_m", "delta_n_radps", "m0_rad"],
    ["cuc_rad", "e", "cus_rad", "sqrt_a_sqrtm"],
    ["toe_sow_s", "cic_rad", "omega0_rad", "cis_rad"],
    ["i0_rad", "crc_m", "omega_rad", "omega_dot_radps"],
    ["idot_radps", "l2_codes", "week", "l2p_flag"],
    ["ura_m", "health", "tgd_s", "iodc"],
    ["ttm_sow_s", "fit_h", None, None],
]
_GAL_FIELDS = [
    ["iode", "crs_m", "delta_n_radps", "m0_rad"],
    ["cuc_rad", "e", "cus_rad", "sqrt_a_sqrtm"],
    ["toe_sow_s", "cic_rad", "omega0_rad", "cis_rad"],
    ["i0_rad", "crc_m", "omega_rad", "omega_dot_radps"],
    ["idot_radps", "data_source", "week", None],
    ["ura_m", "health", "bgd_e5a_s", "bgd_e5b_s"],
    ["ttm_sow_s", None, None, None],
]
#: RINEX 3.04 table A10 (GLONASS): the epoch line holds −τ_n, +γ_n, t_k (s of the UTC week);
#: positions, velocities and accelerations are written in km, km/s, km/s² (the record keeps metres).
_GLO_FIELDS = [
    ["x_m", "vx_mps", "ax_mps2", "health"],
    ["y_m", "vy_mps", "ay_mps2", "freq_num"],
    ["z_m", "vz_mps", "az_mps2", "age_days"],
]
_GLO_KM = {"x_m", "vx_mps", "ax_mps2", "y_m", "vy_mps", "ay_mps2", "z_m", "vz_mps", "az_mps2"}


def write_nav3(path, records: list, *, iono: dict | None = None, time_corrections: dict | None = None,
               leap_seconds: int | None = None, run_ns=None, comments=()) -> pathlib.Path:
    """Write a RINEX 3.04 navigation file.

    ``records``: list of dicts with ``sat`` ('G07', 'E11'), ``toc_ns`` (int64
    calendar count of the system's time: GPS or GST), ``af0_s``, ``af1_sps``,
    ``af2_sps2`` and the orbit fields named as in :mod:`ctt.formats.rinex_nav`
    (``iode``, ``crs_m``, ... ``tgd_s`` for GPS, ``bgd_e5a_s``/``bgd_e5b_s``
    and ``data_source`` for Galileo; ``fit_h`` the GPS fit interval in hours).
    GLONASS (``R``) records: ``toc_ns`` is t_b on the **UTC** calendar count (RINEX
    writes GLONASS epochs in UTC), ``minus_tau_n_s``, ``gamma_n``, ``tk_s``,
    ``x_m`` .. ``az_mps2`` in metres (written in km), ``health``, ``freq_num``,
    ``age_days``.
    ``iono``: ``{'GPSA': [4], 'GPSB': [4], 'GAL': [3]}``;
    ``time_corrections``: ``{'GPUT': (a0_s, a1_sps, t_ref_sow, week)}``.
    """
    buf = io.StringIO()
    w = buf.write
    systems = sorted({r["sat"][0] for r in records}, key="GREJCIS".index)
    sys_char = systems[0] if len(systems) == 1 else "M"
    sys_text = "M: MIXED" if sys_char == "M" else sys_char
    w(header_line(f"{'3.04':>9}{'':11}{'N: GNSS NAV DATA':<20}{sys_text:<20}", "RINEX VERSION / TYPE"))
    t0 = run_ns if run_ns is not None else (records[0]["toc_ns"] if records else 0)
    w(header_line(f"{PROGRAM:<20}{'ctt':<20}{_run_date(t0):<20}", "PGM / RUN BY / DATE"))
    for c in comments:
        w(header_line(str(c)[:60], "COMMENT"))
    for label, vals in (iono or {}).items():
        v = list(vals) + [0.0] * (4 - len(vals))
        w(header_line(f"{label:<4} " + "".join(f"{_d12_4(x)}" for x in v), "IONOSPHERIC CORR"))
    for label, (a0, a1, tref, week) in (time_corrections or {}).items():
        w(header_line(f"{label:<4} {_d17_10(a0)}{_d16_9(a1)}{int(tref):7d}{int(week):5d}", "TIME SYSTEM CORR"))
    if leap_seconds is not None:
        w(header_line(f"{int(leap_seconds):6d}", "LEAP SECONDS"))
    w(header_line("", "END OF HEADER"))
    for r in sorted(records, key=lambda r: (r["sat"], r["toc_ns"])):
        y, mo, d, h, mi, s, _ = _civil(r["toc_ns"])
        if r["sat"][0] == "R":
            w(f"{r['sat']} {y:4d} {mo:02d} {d:02d} {h:02d} {mi:02d} {s:02d}"
              f"{_d19(r['minus_tau_n_s'])}{_d19(r['gamma_n'])}{_d19(r['tk_s'])}\n")
            for names in _GLO_FIELDS:
                w("    " + "".join(_d19(r.get(n, 0.0) / (1000.0 if n in _GLO_KM else 1.0))
                                   for n in names).rstrip() + "\n")
            continue
        w(f"{r['sat']} {y:4d} {mo:02d} {d:02d} {h:02d} {mi:02d} {s:02d}"
          f"{_d19(r['af0_s'])}{_d19(r['af1_sps'])}{_d19(r['af2_sps2'])}\n")
        layout = _GPS_FIELDS if r["sat"][0] == "G" else _GAL_FIELDS
        for names in layout:
            w("    " + "".join(_d19(r.get(n, 0.0)) if n is not None else _d19(0.0) for n in names).rstrip() + "\n")
    return _finish(path, buf)


def _d12_4(x: float) -> str:
    s = f"{float(x):12.4E}"
    if len(s) != 12:
        raise ValueError(f"{x!r} does not fit D12.4")
    return s


def _d17_10(x: float) -> str:
    s = f"{float(x):17.10E}"
    if len(s) != 17:
        raise ValueError(f"{x!r} does not fit D17.10")
    return s


def _d16_9(x: float) -> str:
    s = f"{float(x):16.9E}"
    if len(s) != 16:
        raise ValueError(f"{x!r} does not fit D16.9")
    return s


# ---------------------------------------------------------------- RINEX 2.11 meteorological

def write_met2(path, *, marker: str, time_ns, pressure_hpa, temperature_c, humidity_pct,
               sensor_xyz_h_m=None, run_ns=None) -> pathlib.Path:
    """Write a RINEX 2.11 meteorological file with PR (hPa), TD (deg C), HR (%).

    Epochs are GPS time (RINEX 2.11 met files are in GPS time), written
    ``6I3,3F7.1`` (two-digit year).
    """
    time_ns = np.asarray(time_ns, dtype=np.int64)
    buf = io.StringIO()
    w = buf.write
    w(header_line(f"{'2.11':>9}{'':11}{'METEOROLOGICAL DATA':<20}", "RINEX VERSION / TYPE"))
    w(header_line(f"{PROGRAM:<20}{'ctt':<20}{_run_date(run_ns if run_ns is not None else time_ns[0]):<20}",
                  "PGM / RUN BY / DATE"))
    w(header_line(marker[:60], "MARKER NAME"))
    w(header_line(f"{3:6d}" + "".join(f"{'':4}{t}" for t in ("PR", "TD", "HR")), "# / TYPES OF OBSERV"))
    for t, model, acc in (("PR", "INVENTED-BARO", 0.1), ("TD", "INVENTED-THERMO", 0.1), ("HR", "INVENTED-HYGRO", 1.0)):
        w(header_line(f"{model:<20}{'':20}{'':6}{acc:7.1f}{'':4}{t}", "SENSOR MOD/TYPE/ACC"))
    if sensor_xyz_h_m is not None:
        x, y, z, h = (float(v) for v in sensor_xyz_h_m)
        for t in ("PR",):
            w(header_line(f"{x:14.4f}{y:14.4f}{z:14.4f}{h:14.4f} {t}", "SENSOR POS XYZ/H"))
    w(header_line("", "END OF HEADER"))
    civ = ns_to_civil(time_ns)
    for i in range(time_ns.size):
        vals = (pressure_hpa[i], temperature_c[i], humidity_pct[i])
        w(f" {int(civ[0][i]) % 100:2d} {int(civ[1][i]):2d} {int(civ[2][i]):2d} {int(civ[3][i]):2d} "
          f"{int(civ[4][i]):2d} {int(civ[5][i]):2d}" + "".join(f"{float(v):7.1f}" for v in vals) + "\n")
    return _finish(path, buf)


# ---------------------------------------------------------------- SP3-c orbits and clocks

def write_sp3(path, *, time_ns, sats, pos_m, clock_s, agency: str = "CTT", coord_system: str = "IGb14",
              comments=()) -> pathlib.Path:
    """Write an SP3-c file (GPS time) of positions ``pos_m`` (epochs × sats × 3, metres, ECEF)
    and clocks ``clock_s`` (epochs × sats, seconds; NaN written as the format's 999999.999999).

    Layout of the SP3-c format document (Hilla 2010): line 1 ``#cP`` with the first
    epoch and the number of epochs, line 2 ``##`` with GPS week, seconds of week,
    interval, MJD and fraction of day, 5+ ``+`` lines of satellite ids (17 per line),
    as many ``++`` accuracy lines (exponent 0 = unknown), two ``%c``, two ``%f``, two
    ``%i`` lines, 4+ ``/*`` comments, then ``*`` epoch lines and ``P`` records, ``EOF``.
    """
    from ..timescales import to_mjd, week_sow_ns

    time_ns = np.asarray(time_ns, dtype=np.int64)
    sats = [str(s) for s in sats]
    pos_km = np.asarray(pos_m, dtype=float) / 1000.0
    clk_us = np.asarray(clock_s, dtype=float) * 1e6
    n_ep, n_sat = time_ns.size, len(sats)
    if n_sat > 85:
        raise ValueError("SP3-c lists at most 85 satellites")
    y, mo, d, h, mi, s, nano = _civil(time_ns[0])
    interval = float((time_ns[1] - time_ns[0]) / 1e9) if n_ep > 1 else 900.0
    week, sow_ns = week_sow_ns(np.int64(time_ns[0]))
    mjd, sod = to_mjd(np.int64(time_ns[0]))
    buf = io.StringIO()
    w = buf.write
    w(f"#cP{y:4d} {mo:2d} {d:2d} {h:2d} {mi:2d} {s + nano / 1e9:11.8f} {n_ep:7d} ORBIT {coord_system[:5]:>5} "
      f"FIT {agency[:4]:>4}\n")
    w(f"## {int(week):4d} {int(sow_ns) / 1e9:15.8f} {interval:14.8f} {int(mjd):5d} {float(sod) / 86400.0:15.13f}\n")
    n_lines = max(5, -(-n_sat // 17))
    padded = sats + ["  0"] * (17 * n_lines - n_sat)
    for k in range(n_lines):
        head = f"+   {n_sat:2d}   " if k == 0 else "+        "
        w(head + "".join(f"{v:>3}" for v in padded[17 * k:17 * (k + 1)]) + "\n")
    for k in range(n_lines):
        w("++       " + "  0" * 17 + "\n")
    ftype = sats[0][0] if len({v[0] for v in sats}) == 1 else "M"
    w(f"%c {ftype}  cc GPS ccc cccc cccc cccc cccc ccccc ccccc ccccc ccccc\n")
    w("%c cc cc ccc ccc cccc cccc cccc cccc ccccc ccccc ccccc ccccc\n")
    w("%f  1.2500000  1.025000000  0.00000000000  0.000000000000000\n")
    w("%f  0.0000000  0.000000000  0.00000000000  0.000000000000000\n")
    w("%i    0    0    0    0      0      0      0      0         0\n")
    w("%i    0    0    0    0      0      0      0      0         0\n")
    notes = list(comments)[:]
    notes += [""] * max(0, 4 - len(notes))
    for c in notes:
        w(f"/* {c[:57]:<57}\n")
    civ = ns_to_civil(time_ns)
    for i in range(n_ep):
        w(f"*  {int(civ[0][i]):4d} {int(civ[1][i]):2d} {int(civ[2][i]):2d} {int(civ[3][i]):2d} {int(civ[4][i]):2d} "
          f"{int(civ[5][i]) + int(civ[6][i]) / 1e9:11.8f}\n")
        for j, sat in enumerate(sats):
            p = pos_km[i, j]
            if not np.all(np.isfinite(p)):
                p = np.zeros(3)
            c = clk_us[i, j]
            c = 999999.999999 if not np.isfinite(c) else c
            w(f"P{sat}{p[0]:14.6f}{p[1]:14.6f}{p[2]:14.6f}{c:14.6f}\n")
    w("EOF\n")
    return _finish(path, buf)


# ---------------------------------------------------------------- RINEX clock 3.00

def write_clock3(path, *, time_ns, sats, clock_s, agency: str = "CTT", leap_seconds: int | None = None,
                 comments=(), run_ns=None) -> pathlib.Path:
    """Write a RINEX clock 3.00 file of satellite clocks (``AS`` records; GPS time).

    ``clock_s`` (epochs × sats, seconds; NaN records are left out). One value
    (the bias) per record; header records of RINEX clock 3.00 (RINEX VERSION /
    TYPE, PGM / RUN BY / DATE, TIME SYSTEM ID, LEAP SECONDS, # / TYPES OF DATA,
    ANALYSIS CENTER, # OF SOLN SATS, PRN LIST).
    """
    time_ns = np.asarray(time_ns, dtype=np.int64)
    sats = [str(s) for s in sats]
    clock_s = np.asarray(clock_s, dtype=float)
    buf = io.StringIO()
    w = buf.write
    sys_letter = sats[0][0] if len({v[0] for v in sats}) == 1 else "M"
    w(header_line(f"{'3.00':>9}{'':11}{'C':<20}{sys_letter:<20}", "RINEX VERSION / TYPE"))
    w(header_line(f"{PROGRAM:<20}{'ctt':<20}{_run_date(run_ns if run_ns is not None else time_ns[0]):<20}",
                  "PGM / RUN BY / DATE"))
    for c in comments:
        w(header_line(str(c)[:60], "COMMENT"))
    w(header_line("   GPS", "TIME SYSTEM ID"))
    if leap_seconds is not None:
        w(header_line(f"{int(leap_seconds):6d}", "LEAP SECONDS"))
    w(header_line(f"{1:6d}    AS", "# / TYPES OF DATA"))
    w(header_line(f"{agency[:3]:<3}  {'simulated truth (ctt simulate)':<55}"[:60], "ANALYSIS CENTER"))
    w(header_line(f"{len(sats):6d}", "# OF SOLN SATS"))
    for k in range(0, len(sats), 15):
        w(header_line(" ".join(f"{v:<3}" for v in sats[k:k + 15]), "PRN LIST"))
    w(header_line("", "END OF HEADER"))
    civ = ns_to_civil(time_ns)
    for i in range(time_ns.size):
        stamp = (f"{int(civ[0][i]):4d} {int(civ[1][i]):02d} {int(civ[2][i]):02d} {int(civ[3][i]):02d} "
                 f"{int(civ[4][i]):02d} {int(civ[5][i]) + int(civ[6][i]) / 1e9:9.6f}")
        for j, sat in enumerate(sats):
            v = clock_s[i, j]
            if np.isfinite(v):
                w(f"AS {sat:<4} {stamp}  1   {v:19.12e}\n")
    return _finish(path, buf)
