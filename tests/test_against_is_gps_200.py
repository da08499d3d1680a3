"""Klobuchar ionosphere and GNSS signal constants against IS-GPS-200
(Navstar GPS Interface Specification; Klobuchar algorithm §20.3.3.5.2.5,
Figure 20-4; frequencies §3.3.1.1; group delay §20.3.3.3.3.2)."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from ctt import atmosphere as atm

# IS-GPS-200: L1 = 1575.42 MHz, L2 = 1227.60 MHz
F_L1 = 1575.42e6
F_L2 = 1227.60e6


def test_klobuchar_night_at_zenith_is_5ns_times_obliquity():
    # IS-GPS-200 Fig. 20-4: at night T_iono = F · 5 ns; at zenith E = 0.5 semicircle,
    # F = 1 + 16 (0.53 − 0.5)³ = 1.000432 -> 5.00216 ns
    alpha = [7.4510e-09, -1.4900e-08, -5.9600e-08, 1.1920e-07]
    beta = [9.2160e+04, -1.1470e+05, -1.3110e+05, 7.2090e+05]
    lat, lon = math.radians(46.9), math.radians(7.5)
    # local time at the pierce point ≈ 01:30: |x| > 1.57 for any PER ≥ 72000 s
    sow = 86400.0 * 5 + 1.5 * 3600 - 4.32e4 * (7.5 / 180.0)
    d = atm.klobuchar_delay_s(alpha, beta, lat, lon, 0.0, math.pi / 2, sow)
    assert d == pytest.approx(5.00216e-9, abs=1e-15)  # exact arithmetic: 5e-9 × 1.000432


def _ion_coefficients(nav_path):
    alpha = beta = None
    for line in nav_path.read_text().splitlines():
        if line[60:].startswith("ION ALPHA"):
            alpha = [float(v.replace("D", "E")) for v in re.findall(r"\S+", line[:60])]
        elif line[60:].startswith("ION BETA"):
            beta = [float(v.replace("D", "E")) for v in re.findall(r"\S+", line[:60])]
        elif "END OF HEADER" in line:
            break
    return alpha, beta


def test_klobuchar_daytime_by_hand_from_real_broadcast(shared_data):
    # Broadcast coefficients of the IGS merged file for 2021-01-01 (real data).
    alpha, beta = _ion_coefficients(shared_data / "brdc0010.21n")
    assert alpha == pytest.approx([7.4510e-09, -1.4900e-08, -5.9600e-08, 1.1920e-07], rel=1e-12, abs=0)
    # Place, time, direction: 46.877°N 7.465°E, satellite at azimuth 150°,
    # elevation 35°, GPS time 2021-01-01 12:00:00 (Friday: sow = 5·86400 + 43200).
    lat_deg, lon_deg, az_deg, el_deg, sow = 46.877, 7.465, 150.0, 35.0, 5 * 86400 + 43200.0
    # Step by step with IS-GPS-200 Fig. 20-4 (semicircles, scalar arithmetic):
    E = el_deg / 180.0
    A = az_deg / 180.0
    phi_u, lam_u = lat_deg / 180.0, lon_deg / 180.0
    psi = 0.0137 / (E + 0.11) - 0.022
    phi_i = phi_u + psi * math.cos(A * math.pi)
    phi_i = max(-0.416, min(0.416, phi_i))
    lam_i = lam_u + psi * math.sin(A * math.pi) / math.cos(phi_i * math.pi)
    phi_m = phi_i + 0.064 * math.cos((lam_i - 1.617) * math.pi)
    t = (4.32e4 * lam_i + sow) % 86400.0
    F = 1.0 + 16.0 * (0.53 - E) ** 3
    PER = max(72000.0, sum(beta[n] * phi_m ** n for n in range(4)))
    AMP = max(0.0, sum(alpha[n] * phi_m ** n for n in range(4)))
    x = 2.0 * math.pi * (t - 50400.0) / PER
    assert abs(x) < 1.57  # daytime branch
    expected = F * (5e-9 + AMP * (1 - x ** 2 / 2 + x ** 4 / 24))
    got = atm.klobuchar_delay_s(alpha, beta, math.radians(lat_deg), math.radians(lon_deg),
                                math.radians(az_deg), math.radians(el_deg), sow)
    # same equations, independent scalar evaluation: agreement to float rounding
    assert got == pytest.approx(expected, rel=1e-12, abs=0)
    # plausibility: winter-noon mid-latitude vertical L1 delay of a few ns (common practice: 2-10 ns)
    assert 2e-9 < got / F < 10e-9
    assert got > F * 5e-9  # the day term adds to the night floor


def test_klobuchar_vectorised_and_frequency_scaling():
    alpha = [7.4510e-09, -1.4900e-08, -5.9600e-08, 1.1920e-07]
    beta = [9.2160e+04, -1.1470e+05, -1.3110e+05, 7.2090e+05]
    sow = 5 * 86400 + np.arange(0, 86400, 300.0)[:, None]
    az = np.radians(np.linspace(0, 330, 12))[None, :]
    el = np.radians(np.linspace(10, 85, 12))[None, :]
    d = atm.klobuchar_delay_s(alpha, beta, math.radians(46.9), math.radians(7.5), az, el, sow)
    assert d.shape == (288, 12)
    one = atm.klobuchar_delay_s(alpha, beta, math.radians(46.9), math.radians(7.5), az[0, 3], el[0, 3], sow[100, 0])
    assert d[100, 3] == one
    # IS-GPS-200 §20.3.3.3.3.2: L2 ionospheric delay is γ = (77/60)² times L1's
    l2 = atm.scale_iono_to_frequency(d, F_L2)
    assert np.allclose(l2 / d, (77.0 / 60.0) ** 2, rtol=1e-14)
    # never below the night floor 5 ns × F with F ≥ 1 (ICD: AMP floored at 0)
    assert np.all(d >= 5e-9 - 1e-20)


# ---------------------------------------------------------------- signals

def test_gps_frequencies_and_gamma():
    from ctt import signals as sig

    # IS-GPS-200 §3.3.1.1: L1 = 154 × 10.23 MHz, L2 = 120 × 10.23 MHz; IS-GPS-705: L5 = 115 × 10.23 MHz
    f = sig.frequency_hz(["G01", "G01", "G01"], ["C1C", "C2W", "C5Q"])
    assert np.array_equal(f, [154 * 10.23e6, 120 * 10.23e6, 115 * 10.23e6])
    # IS-GPS-200 §20.3.3.3.3.2: γ = (f_L1/f_L2)² = (77/60)²
    assert sig.GAMMA_L1L2 == pytest.approx((F_L1 / F_L2) ** 2, rel=1e-15)


def test_gps_tgd_factors():
    from ctt import signals as sig

    # IS-GPS-200 §20.3.3.3.3.2: (Δt_SV)L1P(Y) = Δt_SV − T_GD; (Δt_SV)L2P(Y) = Δt_SV − γ T_GD
    assert sig.group_delay_factor("G", "C1W").terms == (("tgd_s", 1.0),)
    gd = sig.group_delay_factor("G", ["C2W"])
    assert gd.parameter == "tgd_s" and gd.factor == pytest.approx((77 / 60) ** 2, rel=1e-15)
    # the broadcast clock is that of the L1/L2 P(Y) iono-free combination: no T_GD there
    assert sig.group_delay_factor("G", ("C1C", "C2W")).terms == ()
    # applying it: sat_clock -= factor * T_GD
    assert sig.group_delay_factor("G", "C2W").correction_s({"tgd_s": -1.2e-8}) == pytest.approx(
        -(77 / 60) ** 2 * 1.2e-8, rel=1e-14, abs=0)


def test_iono_free_dcb_factor_l1l2():
    from ctt import signals as sig

    # a bias on P1 enters P_IF with f1²/(f1²−f2²) = γ/(γ−1) = 2.5457 (IS-GPS-200 γ; common practice "2.546")
    g = (77 / 60) ** 2
    assert sig.dcb_iono_free_factor(F_L1, F_L2) == pytest.approx(g / (g - 1), rel=1e-14)
    assert sig.dcb_iono_free_factor(F_L1, F_L2) == pytest.approx(2.546, abs=5e-4)
    # equal-noise amplification sqrt(a1² + a2²) = 2.978 (common practice)
    assert sig.iono_free_noise_factor(F_L1, F_L2) == pytest.approx(2.978, abs=5e-4)
    # the combination removes a 1/f² delay exactly (first-order ionosphere, IS-GPS-200 §20.3.3.3.3.3)
    rho, i1 = 2.2e7, 7.5
    p1, p2 = rho + i1, rho + i1 * (F_L1 / F_L2) ** 2
    assert sig.iono_free(p1, p2, F_L1, F_L2) == pytest.approx(rho, abs=1e-7)


def test_broadcast_clock_drift_is_the_derivative_of_the_clock_polynomial(shared_data):
    # IS-GPS-200 §20.3.3.3.3.1 (and the Galileo OS SIS ICD §5.1.4, same form): Δt_sv = a_f0 +
    # a_f1 (t − t_oc) + a_f2 (t − t_oc)², so its rate is a_f1 + 2 a_f2 (t − t_oc). Checked on a
    # real record with a non-zero a_f2 (E11 in the mixed navigation file AMEL00NLD of
    # real-2021-001: 3.47e-18 s/s²) by the central difference of the clock itself, exact for a
    # quadratic up to float rounding (~1e-19 s / 60 s).
    from ctt import timescales as ts
    from ctt.formats.rinex_nav import read_nav
    from ctt.orbits import BroadcastOrbits

    nav = read_nav(shared_data / "AMEL00NLD_R_20210010000_01D_MN.rnx")
    orb = BroadcastOrbits(nav)
    sat = np.array(["E11"])
    h = 30.0
    found = 0
    for hour in range(1, 23):
        t = np.array([ts.parse_iso(f"2021-01-01T{hour:02d}:10:00")], dtype=np.int64)
        st = orb.states(sat, t, np.zeros(1))
        lo, hi = orb.states(sat, t, np.full(1, -h)), orb.states(sat, t, np.full(1, h))
        if not np.isfinite(st.clock_drift_sps[0]) or not (np.isfinite(lo.clock_s[0]) and np.isfinite(hi.clock_s[0])):
            continue
        deriv = (hi.clock_s[0] - lo.clock_s[0]) / (2 * h)
        assert st.clock_drift_sps[0] == pytest.approx(deriv, rel=0, abs=1e-17)
        found += 1
    assert found >= 10
