"""Troposphere and ionosphere delay models, vectorised over epochs × satellites.

Troposphere
-----------
* Zenith hydrostatic delay: Saastamoinen (1972) in the form of Davis et al.
  (1985), ``ZHD = 0.0022768 P / (1 − 0.00266 cos 2φ − 0.00028 h_km)``.
* Zenith wet delay: Saastamoinen (1972), ``ZWD = 0.002277 (1255/T + 0.05) e``.
* Surface meteorology: a RINEX meteorological file when the station has one
  (see :mod:`ctt.rinex.met`), otherwise the standard atmosphere at the station
  height (:func:`standard_atmosphere`: P = 1013.25 (1 − 2.2557e-5 h)^5.2568 hPa,
  T = 15 − 6.5e-3 h °C, RH = 50 %; common practice, the Berg (1948) model
  used with Saastamoinen's delays).
* Water-vapour pressure from relative humidity: Magnus–Tetens saturation
  pressure, Tetens (1930) in the form of Murray (1967),
  ``e_s = 6.1078 exp(17.2694 t / (t + 237.3))`` hPa, t in °C (over water).
* Mapping: Niell (1996) hydrostatic (with its seasonal terms and height
  correction) and wet functions. The coefficient tables are those of Niell,
  J. Geophys. Res. 101(B2), 3227–3246, 1996, Table 3 (as reproduced in
  textbooks, e.g. Leick et al., *GPS Satellite Surveying*, Tables 6.1–6.2).
  GMF (Boehm et al. 2006) is not included: its spherical-harmonic tables
  (4 × 55 coefficients per function) could not be obtained from a published
  source within this work, and Niell differs from GMF by mm-level zenith
  equivalents above 5–10° elevation — picoseconds in a common-view difference.

Ionosphere
----------
* Klobuchar broadcast model (IS-GPS-200, §20.3.3.5.2.5 and Figure 20-4), on L1,
  scaled to another frequency f by (f_L1/f)².
* IONEX (Schaer et al. 1998, "IONEX: The IONosphere Map EXchange Format
  Version 1") maps: reader, interpolation, single-layer mapping to a slant
  delay at a frequency, and the ionospheric pierce point.

Delays are positive metres (or seconds) of *group* delay: a code pseudorange is
longer by this amount.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import OutOfSpanError, ProductFormatError

C_MPS = 299_792_458.0  # SI
F_L1_HZ = 1575.42e6  # IS-GPS-200

# ---------------------------------------------------------------- surface meteorology


def standard_atmosphere(h_m):
    """Standard-atmosphere pressure (hPa), temperature (°C) and relative humidity (%)
    at height ``h_m`` (common practice: Berg 1948 as used with Saastamoinen).

    P = 1013.25 (1 − 2.2557e-5 h)^5.2568, T = 15 − 6.5e-3 h, RH = 50 %.
    The height is treated as orthometric; using the ellipsoidal height instead
    (≤ ~60 m off) changes the ZHD by ≤ 15 mm.
    """
    h = np.asarray(h_m, dtype=float)
    p = 1013.25 * (1.0 - 2.2557e-5 * h) ** 5.2568
    t = 15.0 - 6.5e-3 * h
    rh = np.full_like(p, 50.0)
    return p, t, rh


def water_vapour_pressure_hpa(t_c, rh_pct):
    """Partial pressure of water vapour (hPa) from temperature (°C) and relative
    humidity (%): ``RH/100 · e_s(t)`` with the Magnus–Tetens saturation pressure
    ``e_s = 6.1078 exp(17.2694 t/(t + 237.3))`` (Tetens 1930; Murray 1967)."""
    t = np.asarray(t_c, dtype=float)
    es = 6.1078 * np.exp(17.2694 * t / (t + 237.3))
    return np.asarray(rh_pct, dtype=float) / 100.0 * es


def zenith_delays(p_hpa, t_c, rh_pct, lat_rad, h_m):
    """Saastamoinen zenith hydrostatic and wet delays (metres).

    ``ZHD = 0.0022768 P / (1 − 0.00266 cos 2φ − 0.00028 h_km)`` (Saastamoinen
    1972, Davis et al. 1985) and ``ZWD = 0.002277 (1255/T + 0.05) e``
    (Saastamoinen 1972), T in kelvin, e the water-vapour pressure in hPa
    (:func:`water_vapour_pressure_hpa`). ``h_m`` is the height of the pressure
    measurement. All arguments broadcast.
    """
    p = np.asarray(p_hpa, dtype=float)
    lat = np.asarray(lat_rad, dtype=float)
    h_km = np.asarray(h_m, dtype=float) / 1000.0
    zhd = 0.0022768 * p / (1.0 - 0.00266 * np.cos(2.0 * lat) - 0.00028 * h_km)
    e = water_vapour_pressure_hpa(t_c, rh_pct)
    t_k = np.asarray(t_c, dtype=float) + 273.15
    zwd = 0.002277 * (1255.0 / t_k + 0.05) * e
    return zhd, zwd


# ---------------------------------------------------------------- Niell mapping

_NIELL_LAT_DEG = np.array([15.0, 30.0, 45.0, 60.0, 75.0])
# Niell (1996), Table 3: hydrostatic average a, b, c
_NIELL_H_AVG = np.array([
    [1.2769934e-3, 2.9153695e-3, 62.610505e-3],
    [1.2683230e-3, 2.9152299e-3, 62.837393e-3],
    [1.2465397e-3, 2.9288445e-3, 63.721774e-3],
    [1.2196049e-3, 2.9022565e-3, 63.824265e-3],
    [1.2045996e-3, 2.9024912e-3, 64.258455e-3],
])
# hydrostatic seasonal amplitude a, b, c
_NIELL_H_AMP = np.array([
    [0.0, 0.0, 0.0],
    [1.2709626e-5, 2.1414979e-5, 9.0128400e-5],
    [2.6523662e-5, 3.0160779e-5, 4.3497037e-5],
    [3.4000452e-5, 7.2562722e-5, 84.795348e-5],
    [4.1202191e-5, 11.723375e-5, 170.37206e-5],
])
# height correction a_ht, b_ht, c_ht
_NIELL_HT = (2.53e-5, 5.49e-3, 1.14e-3)
# wet a, b, c
_NIELL_W = np.array([
    [5.8021897e-4, 1.4275268e-3, 4.3472961e-2],
    [5.6794847e-4, 1.5138625e-3, 4.6729510e-2],
    [5.8118019e-4, 1.4572752e-3, 4.3908931e-2],
    [5.9727542e-4, 1.5007428e-3, 4.4626982e-2],
    [6.1641693e-4, 1.7599082e-3, 5.4736038e-2],
])


def _marini(sin_el, a, b, c):
    """Marini (1972) continued fraction normalised to 1 at the zenith (Herring 1992)."""
    num = 1.0 + a / (1.0 + b / (1.0 + c))
    den = sin_el + a / (sin_el + b / (sin_el + c))
    return num / den


def _interp_lat(table, abs_lat_deg):
    """Linear interpolation of a 5-row table in |latitude|, held constant outside 15–75°."""
    x = np.clip(abs_lat_deg, 15.0, 75.0)
    cols = [np.interp(x, _NIELL_LAT_DEG, table[:, k]) for k in range(3)]
    return cols


def niell_mapping(el_rad, lat_rad, h_m, doy):
    """Niell (1996) hydrostatic and wet mapping functions ``(mh, mw)``.

    ``el_rad`` any shape; ``lat_rad``, ``h_m`` (ellipsoidal height, m) and ``doy``
    (day of year, may be fractional) broadcast against it. The hydrostatic
    coefficients vary as ``a = a_avg − a_amp cos(2π (doy − 28)/365.25)``, with
    half a year added in the southern hemisphere (Niell 1996, eq. 5), and the
    height correction is ``[1/sin E − m(E; a_ht, b_ht, c_ht)] · h_km`` (eq. 6).
    """
    el = np.asarray(el_rad, dtype=float)
    lat = np.asarray(lat_rad, dtype=float)
    h_km = np.asarray(h_m, dtype=float) / 1000.0
    d = np.asarray(doy, dtype=float)
    d = np.where(lat < 0, d + 365.25 / 2.0, d)
    abs_lat = np.degrees(np.abs(lat))
    s = np.sin(el)
    cos_season = np.cos(2.0 * np.pi * (d - 28.0) / 365.25)
    avg = _interp_lat(_NIELL_H_AVG, abs_lat)
    amp = _interp_lat(_NIELL_H_AMP, abs_lat)
    ah, bh, ch = (avg[k] - amp[k] * cos_season for k in range(3))
    mh = _marini(s, ah, bh, ch) + (1.0 / s - _marini(s, *_NIELL_HT)) * h_km
    aw, bw, cw = _interp_lat(_NIELL_W, abs_lat)
    mw = _marini(s, aw, bw, cw)
    return mh, mw


@dataclass(frozen=True)
class TroposphereDelay:
    """Slant troposphere and its parts (metres; mapping factors dimensionless)."""

    slant_m: np.ndarray
    zhd_m: np.ndarray
    zwd_m: np.ndarray
    mh: np.ndarray
    mw: np.ndarray
    met_source: str  # "met" (measured values given) or "standard atmosphere"


def slant_troposphere(el_rad, lat_rad, h_m, doy, p_hpa=None, t_c=None, rh_pct=None) -> TroposphereDelay:
    """Slant tropospheric delay ``ZHD·mh + ZWD·mw`` (metres).

    ``el_rad`` is typically ``(n_epoch, n_sat)``; per-epoch meteorology should
    then be shaped ``(n_epoch, 1)`` so it broadcasts. When ``p_hpa``, ``t_c``
    and ``rh_pct`` are all ``None`` the standard atmosphere at ``h_m`` is used
    (see :func:`standard_atmosphere`); give all three or none.
    Below 3° elevation the Niell functions are extrapolated (Niell fitted to 3°);
    the measurement model's elevation mask should exclude such rays.
    """
    given = [v is not None for v in (p_hpa, t_c, rh_pct)]
    if any(given) and not all(given):
        raise ValueError("give pressure, temperature and humidity together, or none of them")
    if all(given):
        source = "met"
    else:
        p_hpa, t_c, rh_pct = standard_atmosphere(h_m)
        source = "standard atmosphere"
    zhd, zwd = zenith_delays(p_hpa, t_c, rh_pct, lat_rad, h_m)
    mh, mw = niell_mapping(el_rad, lat_rad, h_m, doy)
    slant = zhd * mh + zwd * mw
    return TroposphereDelay(slant_m=slant, zhd_m=np.asarray(zhd), zwd_m=np.asarray(zwd), mh=mh, mw=mw,
                            met_source=source)


# ---------------------------------------------------------------- Klobuchar


def klobuchar_delay_s(alpha, beta, lat_rad, lon_rad, az_rad, el_rad, gps_sow):
    """Klobuchar ionospheric group delay on L1, seconds (IS-GPS-200 Figure 20-4).

    ``alpha``, ``beta``: the four broadcast coefficients each (units s,
    s/semicircle, ... and s, s/semicircle, ... as broadcast). User geodetic
    latitude/longitude, satellite azimuth/elevation in radians, GPS time of
    week in seconds; all broadcast (e.g. ``(n_epoch, 1)`` times against
    ``(n_epoch, n_sat)`` angles). For another frequency multiply by
    ``(f_L1/f)²`` (:func:`scale_iono_to_frequency`).

    The ICD works in semicircles; the steps below follow Figure 20-4 in order.
    """
    a = np.asarray(alpha, dtype=float).reshape(4)
    b = np.asarray(beta, dtype=float).reshape(4)
    phi_u = np.asarray(lat_rad, dtype=float) / np.pi  # semicircles
    lam_u = np.asarray(lon_rad, dtype=float) / np.pi
    az = np.asarray(az_rad, dtype=float)  # the ICD's A is used inside cos/sin in radians
    e = np.asarray(el_rad, dtype=float) / np.pi
    # Earth-centred angle between user and pierce point (semicircles)
    psi = 0.0137 / (e + 0.11) - 0.022
    # pierce-point geodetic latitude, limited to ±0.416 semicircles
    phi_i = np.clip(phi_u + psi * np.cos(az), -0.416, 0.416)
    # pierce-point longitude
    lam_i = lam_u + psi * np.sin(az) / np.cos(phi_i * np.pi)
    # geomagnetic latitude of the pierce point
    phi_m = phi_i + 0.064 * np.cos((lam_i - 1.617) * np.pi)
    # local time at the pierce point, 0 <= t < 86400 s
    t = np.mod(4.32e4 * lam_i + np.asarray(gps_sow, dtype=float), 86400.0)
    # obliquity factor
    f = 1.0 + 16.0 * (0.53 - e) ** 3
    # period and amplitude of the cosine, with the ICD's floors
    per = b[0] + phi_m * (b[1] + phi_m * (b[2] + phi_m * b[3]))
    per = np.maximum(per, 72000.0)
    amp = a[0] + phi_m * (a[1] + phi_m * (a[2] + phi_m * a[3]))
    amp = np.maximum(amp, 0.0)
    x = 2.0 * np.pi * (t - 50400.0) / per
    day = f * (5.0e-9 + amp * (1.0 - x * x / 2.0 + x ** 4 / 24.0))
    night = f * 5.0e-9
    return np.where(np.abs(x) < 1.57, day, night)


def scale_iono_to_frequency(delay_l1, f_hz):
    """First-order ionospheric group delay scales as 1/f²: ``delay · (f_L1/f)²``."""
    return np.asarray(delay_l1, dtype=float) * (F_L1_HZ / np.asarray(f_hz, dtype=float)) ** 2


# ---------------------------------------------------------------- ionosphere: constants, pierce point

#: First-order ionospheric constant K = e²/(8π² ε0 m_e) in m³/s² (CODATA 2018 constants):
#: group delay [m] = K · TEC [el/m²] / f² — the "40.3" of common practice.
_E_CHARGE = 1.602176634e-19
_EPS0 = 8.8541878128e-12
_M_E = 9.1093837015e-31
IONO_K = _E_CHARGE**2 / (8.0 * np.pi**2 * _EPS0 * _M_E)
TECU = 1.0e16  # electrons per m² in one TEC unit


def tec_to_delay_m(tec_tecu, f_hz):
    """First-order group delay (m) of a slant TEC (TECU) at frequency ``f_hz``: K·TEC/f²."""
    return IONO_K * np.asarray(tec_tecu, dtype=float) * TECU / np.asarray(f_hz, dtype=float) ** 2


def pierce_point(lat_rad, lon_rad, az_rad, el_rad, shell_height_m=450e3, radius_m=6371e3):
    """Ionospheric pierce point of a ray on a spherical thin shell.

    Returns ``(lat_ipp_rad, lon_ipp_rad, zenith_ipp_rad)``: the pierce point's
    latitude and longitude and the ray's zenith angle there,
    ``sin z' = R/(R+H) · cos E``. The Earth-central angle is
    ``ψ = π/2 − E − z'``; the point follows from spherical trigonometry
    (``sin φ' = sin φ cos ψ + cos φ sin ψ cos A``; longitude by atan2, which
    stays well defined near the poles). ``radius_m`` should be the IONEX file's
    BASE RADIUS when used with its maps.
    """
    lat = np.asarray(lat_rad, dtype=float)
    lon = np.asarray(lon_rad, dtype=float)
    az = np.asarray(az_rad, dtype=float)
    el = np.asarray(el_rad, dtype=float)
    sin_z = radius_m / (radius_m + shell_height_m) * np.cos(el)
    z_ipp = np.arcsin(sin_z)
    psi = np.pi / 2.0 - el - z_ipp
    sin_lat = np.sin(lat) * np.cos(psi) + np.cos(lat) * np.sin(psi) * np.cos(az)
    lat_ipp = np.arcsin(np.clip(sin_lat, -1.0, 1.0))
    dlon = np.arctan2(np.sin(psi) * np.sin(az) * np.cos(lat), np.cos(psi) - np.sin(lat) * sin_lat)
    lon_ipp = np.mod(lon + dlon + np.pi, 2.0 * np.pi) - np.pi
    return lat_ipp, lon_ipp, z_ipp


def single_layer_mapping(el_rad, shell_height_m=450e3, radius_m=6371e3):
    """Single-layer (thin shell) mapping STEC/VTEC = 1/cos z', sin z' = R/(R+H) cos E
    (the IONEX "COSZ" mapping function evaluated at the shell)."""
    sin_z = radius_m / (radius_m + shell_height_m) * np.cos(np.asarray(el_rad, dtype=float))
    return 1.0 / np.sqrt(1.0 - sin_z * sin_z)


# ---------------------------------------------------------------- IONEX

@dataclass(frozen=True)
class IonexMaps:
    """Vertical TEC maps of an IONEX file (2-D maps only).

    ``tec_tecu``: ``(n_map, n_lat, n_lon)`` TEC units (NaN where the file has
    9999); ``rms_tecu`` the same shape or ``None``; ``lat_deg`` ascending or
    descending as in the file; ``epochs_ns`` int64 (the file's epochs, GPS
    time is assumed: IONEX 1.0 epochs are UT, which differs from GPS by the
    leap seconds, 18 s in 2021 — a 0.3 % shift of the hourly interpolation
    weight, far below the maps' accuracy; see ``time_scale``).
    """

    path: str
    epochs_ns: np.ndarray
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    tec_tecu: np.ndarray
    rms_tecu: np.ndarray | None
    height_m: float  #: shell height HGT1
    base_radius_m: float
    mapping_function: str
    elevation_cutoff_deg: float
    time_scale: str = "UTC"


def _f(line, a, b, path, lineno, what):
    try:
        return float(line[a:b])
    except ValueError:
        raise ProductFormatError(path, lineno, what, line) from None


def _i(line, a, b, path, lineno, what):
    try:
        return int(line[a:b])
    except ValueError:
        raise ProductFormatError(path, lineno, what, line) from None


def _epoch6(line, path, lineno):
    from . import timescales as ts

    v = [_i(line, 6 * k, 6 * k + 6, path, lineno, "an epoch as 6I6 (year month day hour min sec)") for k in range(6)]
    return int(ts.civil_to_ns(*v))


def read_ionex(path, *, time_scale="UTC") -> IonexMaps:
    """Read an IONEX 1.0 file: header, TEC maps, optional RMS maps.

    Handles the header's and each map's ``EXPONENT`` records, values 9999
    (no value), ``16I5`` data lines per latitude band, ``START/END OF AUX
    DATA`` blocks (skipped). Height maps and 3-D maps (MAP DIMENSION 3) are
    rejected with a :class:`~ctt.errors.ProductFormatError`. ``time_scale``
    names the scale of the file's epochs (IONEX 1.0: UT, taken as UTC); the
    epochs are stored converted to GPS time.
    """
    import pathlib

    from . import timescales as ts
    from .rinex.compression import read_text

    path = pathlib.Path(path)
    lines = read_text(path).splitlines()
    if not lines or lines[0][60:80].strip() != "IONEX VERSION / TYPE":
        raise ProductFormatError(path, 1, "'IONEX VERSION / TYPE' in columns 61-80",
                                 lines[0] if lines else "an empty file")
    if lines[0][20:21] != "I":
        raise ProductFormatError(path, 1, "file type 'I' in column 21", lines[0])
    hdr = {}
    exponent = -1
    n_maps = None
    end = None
    i = 1
    while i < len(lines):
        line = lines[i]
        lineno = i + 1
        label = line[60:80].strip()
        if label == "START OF AUX DATA":
            while i < len(lines) and lines[i][60:80].strip() != "END OF AUX DATA":
                i += 1
        elif label == "HGT1 / HGT2 / DHGT":
            hdr["hgt"] = tuple(_f(line, 2 + 6 * k, 8 + 6 * k, path, lineno, "HGT1/HGT2/DHGT as 2X,3F6.1") for k in range(3))
        elif label == "LAT1 / LAT2 / DLAT":
            hdr["lat"] = tuple(_f(line, 2 + 6 * k, 8 + 6 * k, path, lineno, "LAT1/LAT2/DLAT as 2X,3F6.1") for k in range(3))
        elif label == "LON1 / LON2 / DLON":
            hdr["lon"] = tuple(_f(line, 2 + 6 * k, 8 + 6 * k, path, lineno, "LON1/LON2/DLON as 2X,3F6.1") for k in range(3))
        elif label == "EXPONENT":
            exponent = _i(line, 0, 6, path, lineno, "EXPONENT as I6")
        elif label == "BASE RADIUS":
            hdr["radius"] = _f(line, 0, 8, path, lineno, "BASE RADIUS as F8.1 (km)")
        elif label == "MAP DIMENSION":
            if _i(line, 0, 6, path, lineno, "MAP DIMENSION as I6") != 2:
                raise ProductFormatError(path, lineno, "2-dimensional maps (MAP DIMENSION 2)", line)
        elif label == "# OF MAPS IN FILE":
            n_maps = _i(line, 0, 6, path, lineno, "# OF MAPS IN FILE as I6")
        elif label == "MAPPING FUNCTION":
            hdr["mapping"] = line[2:6].strip()
        elif label == "ELEVATION CUTOFF":
            hdr["cutoff"] = _f(line, 0, 8, path, lineno, "ELEVATION CUTOFF as F8.1")
        elif label == "END OF HEADER":
            end = i
            break
        i += 1
    if end is None:
        raise ProductFormatError(path, len(lines), "'END OF HEADER'", "end of file")
    for key, label in (("hgt", "HGT1 / HGT2 / DHGT"), ("lat", "LAT1 / LAT2 / DLAT"),
                       ("lon", "LON1 / LON2 / DLON"), ("radius", "BASE RADIUS")):
        if key not in hdr:
            raise ProductFormatError(path, end + 1, f"a '{label}' header record", "none before END OF HEADER")
    lat1, lat2, dlat = hdr["lat"]
    lon1, lon2, dlon = hdr["lon"]
    if dlat == 0 or dlon == 0:
        raise ProductFormatError(path, end + 1, "non-zero DLAT and DLON", f"{dlat}, {dlon}")
    n_lat = int(round((lat2 - lat1) / dlat)) + 1
    n_lon = int(round((lon2 - lon1) / dlon)) + 1
    lat_grid = lat1 + dlat * np.arange(n_lat)
    lon_grid = lon1 + dlon * np.arange(n_lon)
    rows_per_band = (n_lon + 15) // 16

    maps = {"TEC": {}, "RMS": {}}
    i = end + 1
    while i < len(lines):
        line = lines[i]
        label = line[60:80].strip()
        if label in ("START OF TEC MAP", "START OF RMS MAP", "START OF HEIGHT MAP"):
            kind = label.split()[2]
            if kind == "HEIGHT":
                raise ProductFormatError(path, i + 1, "TEC or RMS maps (height maps are not supported)", line)
            idx = _i(line, 0, 6, path, i + 1, "the map index as I6")
            stop = f"END OF {kind} MAP"
            grid = np.full((n_lat, n_lon), np.nan)
            epoch = None
            exp_map = exponent
            band = 0
            i += 1
            while i < len(lines) and lines[i][60:80].strip() != stop:
                line = lines[i]
                lab = line[60:80].strip()
                if lab == "EPOCH OF CURRENT MAP":
                    epoch = _epoch6(line, path, i + 1)
                elif lab == "EXPONENT":
                    exp_map = _i(line, 0, 6, path, i + 1, "EXPONENT as I6")
                elif lab == "LAT/LON1/LON2/DLON/H":
                    lat = _f(line, 2, 8, path, i + 1, "LAT as 2X,F6.1")
                    j = int(round((lat - lat1) / dlat))
                    if not 0 <= j < n_lat or abs(lat_grid[j] - lat) > 1e-6:
                        raise ProductFormatError(path, i + 1, f"a latitude of the grid {lat1}..{lat2} step {dlat}", line)
                    data = lines[i + 1:i + 1 + rows_per_band]
                    if len(data) < rows_per_band:
                        raise ProductFormatError(path, len(lines), f"{rows_per_band} data line(s) of 16I5", "end of file")
                    text = "".join(d[:80].ljust(80) for d in data)
                    chars = np.frombuffer(text.encode("latin-1"), dtype=np.uint8).reshape(-1, 5)[:n_lon]
                    fields = np.char.strip(np.ascontiguousarray(chars).view("S5").ravel())
                    if np.any(fields == b""):
                        raise ProductFormatError(path, i + 2, f"{n_lon} values as 16I5 per latitude band",
                                                 data[0])
                    try:
                        vals = fields.astype(np.int64)
                    except ValueError:
                        raise ProductFormatError(path, i + 2, "integer values as 16I5", data[0]) from None
                    row = vals.astype(float) * 10.0 ** exp_map
                    row[vals == 9999] = np.nan
                    grid[j] = row
                    band += 1
                    i += rows_per_band
                i += 1
            if i >= len(lines):
                raise ProductFormatError(path, len(lines), f"'{stop}'", "end of file")
            if epoch is None:
                raise ProductFormatError(path, i + 1, "an 'EPOCH OF CURRENT MAP' record in the map", lines[i])
            if band != n_lat:
                raise ProductFormatError(path, i + 1, f"{n_lat} latitude bands in the map", f"{band}")
            maps[kind][idx] = (epoch, grid)
        elif label == "END OF FILE":
            break
        i += 1
    if not maps["TEC"]:
        raise ProductFormatError(path, None, "at least one TEC map", "none")
    order = sorted(maps["TEC"])
    if n_maps is not None and len(order) != n_maps:
        raise ProductFormatError(path, None, f"{n_maps} TEC maps ('# OF MAPS IN FILE')", f"{len(order)}")
    epochs = np.array([maps["TEC"][k][0] for k in order], dtype=np.int64)
    tec = np.stack([maps["TEC"][k][1] for k in order])
    rms = None
    if maps["RMS"]:
        rms = np.stack([maps["RMS"][k][1] if k in maps["RMS"] else np.full((n_lat, n_lon), np.nan) for k in order])
    scale = ts.normalise_scale(time_scale)
    epochs_gps = epochs if scale == "GPS" else ts.convert(epochs, scale, "GPS")
    if np.any(np.diff(epochs_gps) <= 0):
        raise ProductFormatError(path, None, "map epochs in increasing order", epochs.tolist())
    return IonexMaps(path=str(path), epochs_ns=np.asarray(epochs_gps, dtype=np.int64), lat_deg=lat_grid,
                     lon_deg=lon_grid, tec_tecu=tec, rms_tecu=rms, height_m=hdr["hgt"][0] * 1e3,
                     base_radius_m=hdr["radius"] * 1e3, mapping_function=hdr.get("mapping", "NONE"),
                     elevation_cutoff_deg=hdr.get("cutoff", 0.0), time_scale=scale)


def _bilinear(grid, lat_grid, lon_grid, lat_deg, lon_deg):
    """Bilinear interpolation on one map (IONEX 1.0 eq. 2); grid (n_lat, n_lon)."""
    # latitudes: make ascending
    if lat_grid[-1] < lat_grid[0]:
        lat_grid = lat_grid[::-1]
        grid = grid[::-1]
    dlat = lat_grid[1] - lat_grid[0] if lat_grid.size > 1 else 1.0
    dlon = lon_grid[1] - lon_grid[0] if lon_grid.size > 1 else 1.0
    if lon_grid[-1] < lon_grid[0]:
        lon_grid = lon_grid[::-1]
        grid = grid[:, ::-1]
        dlon = -dlon
    span = lon_grid[-1] - lon_grid[0]
    lon = np.asarray(lon_deg, dtype=float)
    if abs(span - 360.0) < 1e-6 or span + dlon >= 360.0 - 1e-6:
        lon = lon_grid[0] + np.mod(lon - lon_grid[0], 360.0)
    lat = np.clip(np.asarray(lat_deg, dtype=float), lat_grid[0], lat_grid[-1])  # beyond the last band: hold
    x = (lon - lon_grid[0]) / dlon
    y = (lat - lat_grid[0]) / dlat
    outside = (x < -1e-9) | (x > lon_grid.size - 1 + 1e-9)
    ix = np.clip(np.floor(x).astype(int), 0, max(lon_grid.size - 2, 0))
    iy = np.clip(np.floor(y).astype(int), 0, max(lat_grid.size - 2, 0))
    p = x - ix
    q = y - iy
    ix1 = np.minimum(ix + 1, lon_grid.size - 1)
    iy1 = np.minimum(iy + 1, lat_grid.size - 1)
    e00 = grid[iy, ix]
    e10 = grid[iy, ix1]
    e01 = grid[iy1, ix]
    e11 = grid[iy1, ix1]
    val = (1 - p) * (1 - q) * e00 + p * (1 - q) * e10 + q * (1 - p) * e01 + p * q * e11
    return np.where(outside, np.nan, val)


def ionex_vtec_tecu(maps: IonexMaps, t_ns, lat_rad, lon_rad, *, rotate=True, rms=False):
    """Vertical TEC (TECU) at epochs and places, interpolated in space and time.

    Space: bilinear between the four surrounding grid points (IONEX 1.0,
    eq. 2). Time: between the two maps bracketing the epoch; with
    ``rotate=True`` (the IONEX 1.0 recommendation, its eq. 3) each map is
    first rotated about the polar axis by the Earth-Sun angle elapsed since
    its epoch, ``λ' = λ + (t − T_i) · 360°/day``, so that the Sun-fixed
    ionosphere pattern is interpolated instead of blurred; ``rotate=False``
    gives plain linear interpolation in time. Epochs outside the maps' span
    raise :class:`~ctt.errors.OutOfSpanError`. Latitudes beyond the last grid
    band take that band's values; longitudes outside a regional grid give NaN.
    ``rms=True`` interpolates the RMS maps instead.
    """
    grids = maps.rms_tecu if rms else maps.tec_tecu
    if grids is None:
        raise OutOfSpanError(f"{maps.path}: the file has no RMS maps")
    t = np.asarray(t_ns, dtype=np.int64)
    lat = np.degrees(np.asarray(lat_rad, dtype=float))
    lon = np.degrees(np.asarray(lon_rad, dtype=float))
    t, lat, lon = np.broadcast_arrays(t, lat, lon)
    ep = maps.epochs_ns
    if np.any(t < ep[0]) or np.any(t > ep[-1]):
        bad = t[(t < ep[0]) | (t > ep[-1])].ravel()[0]
        from . import timescales as ts

        raise OutOfSpanError(f"{maps.path}: epoch {ts.to_iso(bad)} GPS outside the maps' span "
                             f"{ts.to_iso(ep[0])}..{ts.to_iso(ep[-1])}")
    if ep.size == 1:
        return _bilinear(grids[0], maps.lat_deg, maps.lon_deg, lat, lon)
    i = np.clip(np.searchsorted(ep, t, side="right") - 1, 0, ep.size - 2)
    t0 = ep[i]
    t1 = ep[i + 1]
    w = (t - t0).astype(float) / (t1 - t0).astype(float)
    out = np.full(t.shape, np.nan)
    deg_per_ns = 360.0 / 86400e9
    for k in np.unique(i):  # loop over the (few) map intervals, vectorised inside
        sel = i == k
        if rotate:
            lam0 = lon[sel] + (t[sel] - ep[k]).astype(float) * deg_per_ns
            lam1 = lon[sel] + (t[sel] - ep[k + 1]).astype(float) * deg_per_ns
        else:
            lam0 = lam1 = lon[sel]
        e0 = _bilinear(grids[k], maps.lat_deg, maps.lon_deg, lat[sel], lam0)
        e1 = _bilinear(grids[k + 1], maps.lat_deg, maps.lon_deg, lat[sel], lam1)
        out[sel] = (1.0 - w[sel]) * e0 + w[sel] * e1
    return out


def ionex_slant_delay_m(maps: IonexMaps, t_ns, lat_rad, lon_rad, az_rad, el_rad, f_hz, *, rotate=True):
    """Slant ionospheric group delay (m) at frequency ``f_hz`` from IONEX maps.

    Pierce point on the file's shell (HGT1, BASE RADIUS), vertical TEC there
    (:func:`ionex_vtec_tecu`), single-layer mapping ``1/cos z'``
    (:func:`single_layer_mapping`), and ``K · STEC / f²``. Arguments broadcast
    (e.g. ``t`` as ``(n_epoch, 1)`` against ``(n_epoch, n_sat)`` angles).
    Returns ``(delay_m, stec_tecu)``.
    """
    lat_i, lon_i, z = pierce_point(lat_rad, lon_rad, az_rad, el_rad, maps.height_m, maps.base_radius_m)
    vtec = ionex_vtec_tecu(maps, t_ns, lat_i, lon_i, rotate=rotate)
    stec = vtec / np.cos(z)
    return tec_to_delay_m(stec, f_hz), stec
