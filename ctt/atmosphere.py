"""Troposphere and ionosphere delay models, vectorised over epochs × satellites.

Troposphere
-----------
* Zenith hydrostatic delay: Saastamoinen (1972) in the form of Davis et al.
  (1985), ``ZHD = 0.0022768 P / (1 − 0.00266 cos 2φ − 0.00028 h_km)``.
* Zenith wet delay: Saastamoinen (1972), ``ZWD = 0.002277 (1255/T + 0.05) e``.
* Surface meteorology: a RINEX meteorological file when the station has one
  (see :mod:`ctt.formats.rinex_met`), otherwise the standard atmosphere at the station
  height (:func:`standard_atmosphere`: P = 1013.25 (1 − 2.2557e-5 h)^5.2568 hPa,
  T = 15 − 6.5e-3 h °C, RH = 50 %; common practice, the Berg (1948) model
  used with Saastamoinen's delays).
* Water-vapour pressure from relative humidity: Magnus–Tetens saturation
  pressure, Tetens (1930) in the form of Murray (1967),
  ``e_s = 6.1078 exp(17.2694 t / (t + 237.3))`` hPa, t in °C (over water).
* Mapping: Niell (1996) hydrostatic (with its seasonal terms and height
  correction) and wet functions. The coefficient tables are those of Niell,
  J. Geophys. Res. 101(B2), 3227–3246, 1996, Tables 3–4; every digit is
  pinned in ``tests/test_against_niell_1996.py`` against two reproductions
  of them (the paper itself was not at hand; sources named there).
  Optionally GMF (Boehm et al. 2006), with the coefficient tables published
  in the IERS Conventions (2010) software collection (Chapter 9, GMF); see
  :func:`gmf_mapping`. Niell and GMF differ by mm-level zenith equivalents
  above 5–10° elevation, picoseconds in a common-view difference; GMF is
  better at low elevation and at stations where Niell's latitude-only model
  is poor (Boehm et al. 2006).

Ionosphere
----------
* Klobuchar broadcast model (IS-GPS-200, §20.3.3.5.2.5 and Figure 20-4), on L1,
  scaled to another frequency f by (f_L1/f)².
* IONEX (Schaer et al. 1998, "IONEX: The IONosphere Map EXchange Format
  Version 1") maps (read by :mod:`ctt.formats.ionex`): interpolation,
  single-layer mapping to a slant delay at a frequency, and the ionospheric
  pierce point.

Delays are positive metres (or seconds) of *group* delay: a code pseudorange is
longer by this amount.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import OutOfSpanError
from .formats.ionex import IonexMaps

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


# ---------------------------------------------------------------- GMF mapping

# Global Mapping Functions, Boehm, Niell, Tregoning & Schuh (2006), Geophys.
# Res. Lett. 33, L07304. Spherical-harmonic coefficients (degree and order 9,
# 55 terms each, in units of 1e-5; order n = 0..9, m = 0..n) of the
# hydrostatic and wet "a" coefficients, mean and annual amplitude, as
# published with the IERS Conventions (2010) software collection (routine
# GMF of Chapter 9). The numbers are the published model's; the evaluation
# below is this module's own numpy implementation (vectorised over epochs and
# satellites, Legendre functions by recursion).
_GMF_AH_MEAN = np.array([
    +1.2517e+02, +8.503e-01, +6.936e-02, -6.760e+00, +1.771e-01,
    +1.130e-02, +5.963e-01, +1.808e-02, +2.801e-03, -1.414e-03,
    -1.212e+00, +9.300e-02, +3.683e-03, +1.095e-03, +4.671e-05,
    +3.959e-01, -3.867e-02, +5.413e-03, -5.289e-04, +3.229e-04,
    +2.067e-05, +3.000e-01, +2.031e-02, +5.900e-03, +4.573e-04,
    -7.619e-05, +2.327e-06, +3.845e-06, +1.182e-01, +1.158e-02,
    +5.445e-03, +6.219e-05, +4.204e-06, -2.093e-06, +1.540e-07,
    -4.280e-08, -4.751e-01, -3.490e-02, +1.758e-03, +4.019e-04,
    -2.799e-06, -1.287e-06, +5.468e-07, +7.580e-08, -6.300e-09,
    -1.160e-01, +8.301e-03, +8.771e-04, +9.955e-05, -1.718e-06,
    -2.012e-06, +1.170e-08, +1.790e-08, -1.300e-09, +1.000e-10,
]) * 1e-5
_GMF_BH_MEAN = np.array([
    +0.000e+00, +0.000e+00, +3.249e-02, +0.000e+00, +3.324e-02,
    +1.850e-02, +0.000e+00, -1.115e-01, +2.519e-02, +4.923e-03,
    +0.000e+00, +2.737e-02, +1.595e-02, -7.332e-04, +1.933e-04,
    +0.000e+00, -4.796e-02, +6.381e-03, -1.599e-04, -3.685e-04,
    +1.815e-05, +0.000e+00, +7.033e-02, +2.426e-03, -1.111e-03,
    -1.357e-04, -7.828e-06, +2.547e-06, +0.000e+00, +5.779e-03,
    +3.133e-03, -5.312e-04, -2.028e-05, +2.323e-07, -9.100e-08,
    -1.650e-08, +0.000e+00, +3.688e-02, -8.638e-04, -8.514e-05,
    -2.828e-05, +5.403e-07, +4.390e-07, +1.350e-08, +1.800e-09,
    +0.000e+00, -2.736e-02, -2.977e-04, +8.113e-05, +2.329e-07,
    +8.451e-07, +4.490e-08, -8.100e-09, -1.500e-09, +2.000e-10,
]) * 1e-5
_GMF_AH_AMP = np.array([
    -2.738e-01, -2.837e+00, +1.298e-02, -3.588e-01, +2.413e-02,
    +3.427e-02, -7.624e-01, +7.272e-02, +2.160e-02, -3.385e-03,
    +4.424e-01, +3.722e-02, +2.195e-02, -1.503e-03, +2.426e-04,
    +3.013e-01, +5.762e-02, +1.019e-02, -4.476e-04, +6.790e-05,
    +3.227e-05, +3.123e-01, -3.535e-02, +4.840e-03, +3.025e-06,
    -4.363e-05, +2.854e-07, -1.286e-06, -6.725e-01, -3.730e-02,
    +8.964e-04, +1.399e-04, -3.990e-06, +7.431e-06, -2.796e-07,
    -1.601e-07, +4.068e-02, -1.352e-02, +7.282e-04, +9.594e-05,
    +2.070e-06, -9.620e-08, -2.742e-07, -6.370e-08, -6.300e-09,
    +8.625e-02, -5.971e-03, +4.705e-04, +2.335e-05, +4.226e-06,
    +2.475e-07, -8.850e-08, -3.600e-08, -2.900e-09, +0.000e+00,
]) * 1e-5
_GMF_BH_AMP = np.array([
    +0.000e+00, +0.000e+00, -1.136e-01, +0.000e+00, -1.868e-01,
    -1.399e-02, +0.000e+00, -1.043e-01, +1.175e-02, -2.240e-03,
    +0.000e+00, -3.222e-02, +1.333e-02, -2.647e-03, -2.316e-05,
    +0.000e+00, +5.339e-02, +1.107e-02, -3.116e-03, -1.079e-04,
    -1.299e-05, +0.000e+00, +4.861e-03, +8.891e-03, -6.448e-04,
    -1.279e-05, +6.358e-06, -1.417e-07, +0.000e+00, +3.041e-02,
    +1.150e-03, -8.743e-04, -2.781e-05, +6.367e-07, -1.140e-08,
    -4.200e-08, +0.000e+00, -2.982e-02, -3.000e-03, +1.394e-05,
    -3.290e-05, -1.705e-07, +7.440e-08, +2.720e-08, -6.600e-09,
    +0.000e+00, +1.236e-02, -9.981e-04, -3.792e-05, -1.355e-05,
    +1.162e-06, -1.789e-07, +1.470e-08, -2.400e-09, -4.000e-10,
]) * 1e-5
_GMF_AW_MEAN = np.array([
    +5.640e+01, +1.555e+00, -1.011e+00, -3.975e+00, +3.171e-02,
    +1.065e-01, +6.175e-01, +1.376e-01, +4.229e-02, +3.028e-03,
    +1.688e+00, -1.692e-01, +5.478e-02, +2.473e-02, +6.059e-04,
    +2.278e+00, +6.614e-03, -3.505e-04, -6.697e-03, +8.402e-04,
    +7.033e-04, -3.236e+00, +2.184e-01, -4.611e-02, -1.613e-02,
    -1.604e-03, +5.420e-05, +7.922e-05, -2.711e-01, -4.406e-01,
    -3.376e-02, -2.801e-03, -4.090e-04, -2.056e-05, +6.894e-06,
    +2.317e-06, +1.941e+00, -2.562e-01, +1.598e-02, +5.449e-03,
    +3.544e-04, +1.148e-05, +7.503e-06, -5.667e-07, -3.660e-08,
    +8.683e-01, -5.931e-02, -1.864e-03, -1.277e-04, +2.029e-04,
    +1.269e-05, +1.629e-06, +9.660e-08, -1.015e-07, -5.000e-10,
]) * 1e-5
_GMF_BW_MEAN = np.array([
    +0.000e+00, +0.000e+00, +2.592e-01, +0.000e+00, +2.974e-02,
    -5.471e-01, +0.000e+00, -5.926e-01, -1.030e-01, -1.567e-02,
    +0.000e+00, +1.710e-01, +9.025e-02, +2.689e-02, +2.243e-03,
    +0.000e+00, +3.439e-01, +2.402e-02, +5.410e-03, +1.601e-03,
    +9.669e-05, +0.000e+00, +9.502e-02, -3.063e-02, -1.055e-03,
    -1.067e-04, -1.130e-04, +2.124e-05, +0.000e+00, -3.129e-01,
    +8.463e-03, +2.253e-04, +7.413e-05, -9.376e-05, -1.606e-06,
    +2.060e-06, +0.000e+00, +2.739e-01, +1.167e-03, -2.246e-05,
    -1.287e-04, -2.438e-05, -7.561e-07, +1.158e-06, +4.950e-08,
    +0.000e+00, -1.344e-01, +5.342e-03, +3.775e-04, -6.756e-05,
    -1.686e-06, -1.184e-06, +2.768e-07, +2.730e-08, +5.700e-09,
]) * 1e-5
_GMF_AW_AMP = np.array([
    +1.023e-01, -2.695e+00, +3.417e-01, -1.405e-01, +3.175e-01,
    +2.116e-01, +3.536e+00, -1.505e-01, -1.660e-02, +2.967e-02,
    +3.819e-01, -1.695e-01, -7.444e-02, +7.409e-03, -6.262e-03,
    -1.836e+00, -1.759e-02, -6.256e-02, -2.371e-03, +7.947e-04,
    +1.501e-04, -8.603e-01, -1.360e-01, -3.629e-02, -3.706e-03,
    -2.976e-04, +1.857e-05, +3.021e-05, +2.248e+00, -1.178e-01,
    +1.255e-02, +1.134e-03, -2.161e-04, -5.817e-06, +8.836e-07,
    -1.769e-07, +7.313e-01, -1.188e-01, +1.145e-02, +1.011e-03,
    +1.083e-04, +2.570e-06, -2.140e-06, -5.710e-08, +2.000e-08,
    -1.632e+00, -6.948e-03, -3.893e-03, +8.592e-04, +7.577e-05,
    +4.539e-06, -3.852e-07, -2.213e-07, -1.370e-08, +5.800e-09,
]) * 1e-5
_GMF_BW_AMP = np.array([
    +0.000e+00, +0.000e+00, -8.865e-02, +0.000e+00, -4.309e-01,
    +6.340e-02, +0.000e+00, +1.162e-01, +6.176e-02, -4.234e-03,
    +0.000e+00, +2.530e-01, +4.017e-02, -6.204e-03, +4.977e-03,
    +0.000e+00, -1.737e-01, -5.638e-03, +1.488e-04, +4.857e-04,
    -1.809e-04, +0.000e+00, -1.514e-01, -1.685e-02, +5.333e-03,
    -7.611e-05, +2.394e-05, +8.195e-06, +0.000e+00, +9.326e-02,
    -1.275e-02, -3.071e-04, +5.374e-05, -3.391e-05, -7.436e-06,
    +6.747e-07, +0.000e+00, -8.637e-02, -3.807e-03, -6.833e-04,
    -3.861e-05, -2.268e-05, +1.454e-06, +3.860e-07, -1.068e-07,
    +0.000e+00, -2.658e-02, -1.947e-03, +7.131e-04, -3.506e-05,
    +1.885e-07, +5.792e-07, +3.990e-08, +2.000e-08, -5.700e-09,
]) * 1e-5


_GMF_N = 9


def _legendre_unnormalised(t, n_max=_GMF_N):
    """Associated Legendre functions P_nm(t), no Condon-Shortley phase (Heiskanen &
    Moritz 1967, eq. 1-62), for n ≤ n_max, m ≤ n; returns a dict {(n, m): array}."""
    t = np.asarray(t, dtype=float)
    u = np.sqrt(np.maximum(0.0, 1.0 - t * t))
    p = {(0, 0): np.ones_like(t)}
    for m in range(0, n_max + 1):
        if m > 0:
            p[(m, m)] = (2 * m - 1) * u * p[(m - 1, m - 1)]
        if m + 1 <= n_max:
            p[(m + 1, m)] = (2 * m + 1) * t * p[(m, m)]
        for n in range(m + 2, n_max + 1):
            p[(n, m)] = ((2 * n - 1) * t * p[(n - 1, m)] - (n + m - 1) * p[(n - 2, m)]) / (n - m)
    return p


def _gmf_sh(lat, lon, cos_coef, sin_coef):
    p = _legendre_unnormalised(np.sin(lat))
    total = np.zeros(np.broadcast(lat, lon).shape)
    i = 0
    for n in range(_GMF_N + 1):
        for m in range(n + 1):
            total = total + p[(n, m)] * (cos_coef[i] * np.cos(m * lon) + sin_coef[i] * np.sin(m * lon))
            i += 1
    return total


def gmf_mapping(el_rad, lat_rad, lon_rad, h_m, mjd):
    """Global Mapping Functions (Boehm et al. 2006): hydrostatic and wet ``(mh, mw)``.

    ``mjd`` is the (fractional) Modified Julian Date; the seasonal phase counts
    from 28 January (as Niell 1996). ``h_m`` is the height above mean sea level
    (GMF's definition; the ellipsoidal height is within ~50 m of it, a
    negligible difference for the height correction). b and c follow the
    paper: ``b_h = 0.0029``, ``c_h = c0 + [(cos(2π doy/365.25 + ψ) + 1) c11/2 + c10](1 − cos φ)``
    with c0 = 0.062, (ψ, c11, c10) = (0, 0.005, 0.001) north and
    (π, 0.007, 0.002) south; ``b_w = 0.00146``, ``c_w = 0.04391``; the
    hydrostatic height correction is Niell's (1996). Arguments broadcast.
    """
    el = np.asarray(el_rad, dtype=float)
    lat = np.asarray(lat_rad, dtype=float)
    lon = np.asarray(lon_rad, dtype=float)
    doy = np.asarray(mjd, dtype=float) - 44239.0 + 1.0 - 28.0
    season = np.cos(doy / 365.25 * 2.0 * np.pi)
    ah = _gmf_sh(lat, lon, _GMF_AH_MEAN, _GMF_BH_MEAN) + _gmf_sh(lat, lon, _GMF_AH_AMP, _GMF_BH_AMP) * season
    aw = _gmf_sh(lat, lon, _GMF_AW_MEAN, _GMF_BW_MEAN) + _gmf_sh(lat, lon, _GMF_AW_AMP, _GMF_BW_AMP) * season
    south = lat < 0
    psi = np.where(south, np.pi, 0.0)
    c11 = np.where(south, 0.007, 0.005)
    c10 = np.where(south, 0.002, 0.001)
    ch = 0.062 + ((np.cos(doy / 365.25 * 2.0 * np.pi + psi) + 1.0) * c11 / 2.0 + c10) * (1.0 - np.cos(lat))
    s = np.sin(el)
    mh = _marini(s, ah, 0.0029, ch) + (1.0 / s - _marini(s, *_NIELL_HT)) * (np.asarray(h_m, dtype=float) / 1000.0)
    mw = _marini(s, aw, 0.00146, 0.04391)
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


def slant_troposphere(el_rad, lat_rad, h_m, doy, p_hpa=None, t_c=None, rh_pct=None, *,
                      mapping="niell", lon_rad=None, mjd=None) -> TroposphereDelay:
    """Slant tropospheric delay ``ZHD·mh + ZWD·mw`` (metres).

    ``el_rad`` is typically ``(n_epoch, n_sat)``; per-epoch meteorology should
    then be shaped ``(n_epoch, 1)`` so it broadcasts. When ``p_hpa``, ``t_c``
    and ``rh_pct`` are all ``None`` the standard atmosphere at ``h_m`` is used
    (see :func:`standard_atmosphere`); give all three or none.
    Below 3° elevation the Niell functions are extrapolated (Niell fitted to 3°);
    the measurement model's elevation mask should exclude such rays.
    ``mapping="gmf"`` uses :func:`gmf_mapping` and then needs ``lon_rad`` and
    ``mjd`` (``doy`` is then unused).
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
    if mapping == "niell":
        mh, mw = niell_mapping(el_rad, lat_rad, h_m, doy)
    elif mapping == "gmf":
        if lon_rad is None or mjd is None:
            raise ValueError("the GMF mapping needs lon_rad and mjd")
        mh, mw = gmf_mapping(el_rad, lat_rad, lon_rad, h_m, mjd)
    else:
        raise ValueError(f"mapping must be 'niell' or 'gmf', not {mapping!r}")
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


# ---------------------------------------------------------------- IONEX maps (reader: ctt.formats.ionex)

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
    if abs(span - 360.0) < 1e-6:  # global, first meridian repeated at the end (e.g. -180..180)
        lon = lon_grid[0] + np.mod(lon - lon_grid[0], 360.0)
    elif abs(span + dlon - 360.0) < 1e-6:  # global without the repeat (e.g. 0..355): close the ring
        lon_grid = np.append(lon_grid, lon_grid[0] + 360.0)
        grid = np.concatenate([grid, grid[:, :1]], axis=1)
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


def ionex_vtec_tecu(maps: IonexMaps, t_ns, lat_rad, lon_rad, *, rotate=True, rms=False, strict=False):
    """Vertical TEC (TECU) at epochs and places, interpolated in space and time.

    Space: bilinear between the four surrounding grid points (IONEX 1.0,
    eq. 2). Time: between the two maps bracketing the epoch; with
    ``rotate=True`` (the IONEX 1.0 recommendation, its eq. 3) each map is
    first rotated about the polar axis by the Earth-Sun angle elapsed since
    its epoch, ``λ' = λ + (t − T_i) · 360°/day``, so that the Sun-fixed
    ionosphere pattern is interpolated instead of blurred; ``rotate=False``
    gives plain linear interpolation in time. Epochs up to one map interval
    before the first or after the last map take that end map (IONEX epochs
    are UT while daily observation files run on GPS time, 18 s earlier; a
    daily IONEX file usually ends with the 24:00 map); epochs farther out
    give NaN (the caller flags them), or raise :class:`~ctt.errors.OutOfSpanError`
    with ``strict=True``. Latitudes beyond the last grid
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
    step = int(np.min(np.diff(ep))) if ep.size > 1 else 0
    outside = (t < ep[0] - step) | (t > ep[-1] + step)
    if np.any(outside) and strict:
        bad = t[outside].ravel()[0]
        from . import timescales as ts

        raise OutOfSpanError(f"{maps.path}: epoch {ts.to_iso(bad)} GPS outside the maps' span "
                             f"{ts.to_iso(ep[0])}..{ts.to_iso(ep[-1])}")
    t = np.clip(t, ep[0], ep[-1])
    if ep.size == 1:
        return np.where(outside, np.nan, _bilinear(grids[0], maps.lat_deg, maps.lon_deg, lat, lon))
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
    out[outside] = np.nan
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
