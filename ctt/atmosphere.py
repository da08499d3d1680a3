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

from dataclasses import dataclass, field

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
