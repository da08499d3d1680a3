"""The measurement model against an independent forward model.

The truth here is built in the inertial frame (satellites on circular orbits,
the Earth turning at ω_e under them), so an error in ctt.measure's rotating-
frame light time, Earth rotation or sign conventions cannot cancel itself.
Invented geometry; the physics constants are IS-GPS-200's, written here as
literals (not imported from the module under test, whose values are checked
against them below).
"""

import dataclasses

import numpy as np
import pandas as pd
import pytest

from ctt import timescales as ts
from ctt.config import load_station
from ctt import measure as measure_module
from ctt.measure import MeasureOptions, light_time, measure_station, sagnac_closed_form_m
from ctt.orbits import SatStates
from ctt.formats.rinex_obs import ObsData, ObsHeader

# IS-GPS-200, Table 30-II / §20.3.4.3: WGS 84 Earth rotation rate and speed of light
OMEGA_E = 7.2921151467e-5  # rad/s
C_MPS = 2.99792458e8       # m/s (also the SI definition of the metre)

T0 = ts.civil_to_ns(2021, 1, 1)  # GPS
R_ORBIT = 26_560e3               # GPS semi-major axis, common practice
N_ORBIT = np.sqrt(3.986005e14 / R_ORBIT**3)  # mean motion with IS-GPS-200 GM


def _eci(plane_deg, phase0, t_s, incl=np.radians(55.0)):
    """Inertial position of a circular orbit at times t_s (s since T0)."""
    u = phase0 + N_ORBIT * t_s
    raan = np.radians(plane_deg)
    x_orb, y_orb = R_ORBIT * np.cos(u), R_ORBIT * np.sin(u)
    x = x_orb * np.cos(raan) - y_orb * np.cos(incl) * np.sin(raan)
    y = x_orb * np.sin(raan) + y_orb * np.cos(incl) * np.cos(raan)
    z = y_orb * np.sin(incl)
    return np.stack([x, y, z], axis=-1)


def _rot3(angle, v):
    """R3(angle)·v: coordinates in a frame rotated by +angle about z."""
    c, s = np.cos(angle), np.sin(angle)
    return np.stack([c * v[..., 0] + s * v[..., 1], -s * v[..., 0] + c * v[..., 1], v[..., 2]], axis=-1)


SATS = {"G01": (0.0, 0.3), "G02": (60.0, 1.1), "G03": (120.0, 2.0), "G04": (180.0, 2.9),
        "G05": (240.0, 3.6), "G06": (300.0, 4.5), "G07": (30.0, 5.2), "G08": (90.0, 0.7)}


class InertialOrbits:
    """Satellite source: ECEF = R3(ω_e t)·ECI (Earth rotation angle 0 at T0); clocks zero."""

    def states(self, sats, t_ns, dt_s=0.0):
        sats = np.asarray(sats).astype(str)
        n = sats.size
        t = (np.broadcast_to(np.asarray(t_ns, dtype=np.int64), (n,)) - T0) / 1e9 + np.broadcast_to(dt_s, (n,))
        pos = np.empty((n, 3))
        vel = np.empty((n, 3))
        for s, (plane, ph) in SATS.items():
            m = sats == s
            if m.any():
                pos[m] = _rot3(OMEGA_E * t[m], _eci(plane, ph, t[m]))
                vel[m] = (_rot3(OMEGA_E * (t[m] + 1e-3), _eci(plane, ph, t[m] + 1e-3)) - pos[m]) / 1e-3
        z = np.zeros(n)
        return SatStates(pos_m=pos, vel_mps=vel, clock_s=z.copy(), clock_drift_sps=z.copy(),
                         relativity_s=z.copy(), tgd_s=z.copy(), bgd_e5a_s=z.copy(), bgd_e5b_s=z.copy(),
                         tgd1_s=z.copy(), tgd2_s=z.copy(), iode=np.zeros(n, int), status=np.zeros(n, int),
                         toe_gps_ns=np.full(n, T0), record=np.zeros(n, int), system=np.array([s[0] for s in sats]),
                         system_time_offset_s=z.copy())


STATION_TOML = """
[station]
id = "TSTA"
name = "test station (invented)"
elevation_mask_deg = 5.0
[station.position]
x_m = {x}
y_m = {y}
z_m = {z}
sigma_m = 0.01
frame = "test"
epoch = 2021.0
is_marker = false
[station.antenna]
type = "TEST"
[[delays]]
valid_from = 2020-01-01T00:00:00Z
receiver_ns = {{ C1C = 20.0, C2W = 20.0 }}
u_receiver_ns = 1.0
cable_ns = {cable}
u_cable_ns = 0.1
reference_ns = 5.0
u_reference_ns = 0.1
"""


def _station(tmp_path, xyz, cable=100.0, name="st.toml"):
    p = tmp_path / name
    p.write_text(STATION_TOML.format(x=xyz[0], y=xyz[1], z=xyz[2], cable=cable))
    return load_station(p)


def _geodetic_xyz(lat_deg, lon_deg, h=0.0):
    from ctt.geodesy import geodetic_to_ecef
    return np.asarray(geodetic_to_ecef(np.radians(lat_deg), np.radians(lon_deg), h), dtype=float)


def _simulate(rx_ecef, clock_s, hardware_s, n_ep=120, step_s=30):
    """Pseudoranges from an inertial light-time solution (independent of ctt.measure)."""
    tags = T0 + np.arange(n_ep, dtype=np.int64) * step_s * 1_000_000_000
    sats = np.array(sorted(SATS))
    P = np.full((n_ep, len(sats)), np.nan)
    t_tag = (tags - T0) / 1e9
    t_r = t_tag - clock_s(t_tag)                     # true receive instants
    rx_eci = _rot3(-OMEGA_E * t_r, np.broadcast_to(rx_ecef, (n_ep, 3)))
    for j, s in enumerate(sats):
        plane, ph = SATS[s]
        tau = np.full(n_ep, 0.07)
        for _ in range(20):
            tau = np.linalg.norm(_eci(plane, ph, t_r - tau) - rx_eci, axis=1) / C_MPS
        # only satellites well above the horizon (sine of the geocentric elevation > 0.2)
        sat_ecef = _rot3(OMEGA_E * t_r, _eci(plane, ph, t_r - tau))
        el_ok = np.einsum("ij,j->i", sat_ecef - rx_ecef, rx_ecef / np.linalg.norm(rx_ecef)) > 0.2 * np.linalg.norm(
            sat_ecef - rx_ecef, axis=1)
        P[:, j] = np.where(el_ok, C_MPS * (tau + clock_s(t_tag) + hardware_s), np.nan)
    hdr = ObsHeader(version=3.04, system="G", marker_name="TSTA", obs_types={"G": ["C1C", "C2W"]},
                    interval_s=float(step_s))
    obs = {"C1C": P.copy(), "C2W": P.copy()}
    none = {k: np.full(P.shape, -1, dtype=np.int8) for k in obs}
    return ObsData(path="synthetic", header=hdr, time_ns=tags, sats=sats, obs=obs, lli=dict(none), ssi=dict(none),
                   epoch_flag=np.zeros(n_ep, np.int8), clock_offset_s=np.full(n_ep, np.nan))


# the synthetic ranges are pure geometry: no atmosphere, tide or Shapiro delay (the relativity
# switch takes the Shapiro delay with it; the inertial test orbits have no clock relativity term)
OFF = dict(troposphere=False, ionosphere=False, tide=False, relativity=False)


def test_module_constants_are_the_published_ones():
    # IS-GPS-200 (Ω̇e, c): exact equality, these are defined values
    assert measure_module.OMEGA_E == 7.2921151467e-5
    assert measure_module.C_MPS == 299_792_458.0


def test_recovers_the_clock_to_a_picosecond(tmp_path):
    rx = _geodetic_xyz(46.0, 7.0, 500.0)
    st = _station(tmp_path, rx)
    # a receiver 0.3 ms off GPS time with a frequency offset: the receive instant matters
    clock = lambda t: 3e-4 + 1e-9 * t  # noqa: E731
    hw = (20.0 + 100.0 - 5.0) * 1e-9   # receiver + cable - reference (ctt.config sign convention)
    obs = _simulate(rx, clock, hw)
    day = measure_station(obs, InertialOrbits(), st, MeasureOptions(**OFF))
    ok = day.table["flag"] == "ok"
    truth_ns = clock((day.table["time"] - T0) / 1e9) * 1e9
    err = (day.table["clock_ns"] - truth_ns)[ok]
    assert ok.sum() > 200 and day.table.loc[ok, 'sat'].nunique() >= 3
    # iterations converged to 1 ps (LIGHT_TIME_TOL_S); float64 ranges ~2e7 m hold ~4e-9 m
    assert np.max(np.abs(err)) < 2e-3  # ns


def test_summary_lines_report_the_table(tmp_path):
    # the printed summary states the table's own figures: values used, residual RMS (ns and m at
    # c = 299 792 458 m/s), median and max |value| of each non-zero correction column
    import re

    rx = _geodetic_xyz(46.0, 7.0, 500.0)
    obs = _simulate(rx, lambda t: 3e-4 + 1e-9 * t, 115e-9)
    day = measure_station(obs, InertialOrbits(), _station(tmp_path, rx), MeasureOptions(tide=True, troposphere=True,
                                                                                         ionosphere=False))
    t = day.table
    ok = t["flag"] == "ok"
    text = "\n".join(day.summary_lines())
    assert f"{int(ok.sum())} of {len(t)} values used" in text
    rms = np.sqrt(np.mean(t.loc[ok, "residual_ns"] ** 2))
    assert f"residual RMS against the epoch mean: {rms:.2f} ns ({rms * 0.299792458:.2f} m)" in text
    for col, unit in (("troposphere_m", "m"), ("tide_m", "m"), ("hardware_ns", "ns")):
        v = np.abs(t.loc[ok, col].to_numpy())
        assert v.max() > 0
        assert f"median |{np.median(v):.3f}| {unit}, max |{v.max():.3f}| {unit}" in text, col
    assert "ionosphere_m" not in text          # all zero: no line
    assert not re.search(r"system [A-Z]:", text)  # one system: no per-system lines


def test_sagnac_matches_closed_form_and_matters_east_west(tmp_path):
    # IS-GPS-200 (Earth rotation correction): Δρ ≈ ω_e/c·(x_s·y_r − y_s·x_r), first order.
    orb = InertialOrbits()
    sats = np.array(sorted(SATS))
    t = np.full(sats.size, T0 + 3600 * 1_000_000_000)
    for lon in (0.0, 6.35):  # 6.35° of longitude at 45° N ≈ 500 km east-west
        rx = _geodetic_xyz(45.0, lon)
        tau, st, rot = light_time(orb, sats, t, np.zeros(sats.size), rx)
        exact = np.linalg.norm(rot - rx, axis=1) - np.linalg.norm(st.pos_m - rx, axis=1)
        closed = sagnac_closed_form_m(st.pos_m, rx)
        assert np.max(np.abs(exact - closed)) / C_MPS < 10e-12  # < 10 ps (issue bound)
        # light-time equation satisfied to 1 ps
        assert np.max(np.abs(np.linalg.norm(rot - rx, axis=1) / C_MPS - tau)) < 1e-12
    # For one satellite, the difference between two stations 500 km apart east-west:
    rx_w, rx_e = _geodetic_xyz(45.0, 0.0), _geodetic_xyz(45.0, 6.35)
    sat = np.array([[15_000e3, 5_000e3, 20_000e3]])  # a stated ECEF satellite position (m)
    d_ns = (sagnac_closed_form_m(sat, rx_e) - sagnac_closed_form_m(sat, rx_w))[0] / C_MPS * 1e9
    # ω_e/c² (x_s Δy_r − y_s Δx_r) by hand: Δy_r ≈ 4.996e5 m, Δx_r ≈ −2.77e4 m
    dx, dy = (rx_e - rx_w)[0], (rx_e - rx_w)[1]
    by_hand = OMEGA_E / C_MPS**2 * (15_000e3 * dy - 5_000e3 * dx) * 1e9
    assert d_ns == pytest.approx(by_hand, rel=1e-12)
    assert 5.0 < abs(d_ns) < 7.0  # several ns: neglecting it is visible in common view


def test_cable_delay_sign(tmp_path):
    rx = _geodetic_xyz(46.0, 7.0, 500.0)
    obs = _simulate(rx, lambda t: 1e-6 + 0 * t, 0.0, n_ep=20)
    a = measure_station(obs, InertialOrbits(), _station(tmp_path, rx, cable=100.0, name="a.toml"),
                        MeasureOptions(**OFF))
    b = measure_station(obs, InertialOrbits(), _station(tmp_path, rx, cable=110.0, name="b.toml"),
                        MeasureOptions(**OFF))
    ok = a.table["flag"] == "ok"
    # README / ctt.config: clock = raw − (receiver + cable) + reference, so +10 ns of cable lowers it by 10 ns.
    np.testing.assert_allclose((b.table["clock_ns"] - a.table["clock_ns"])[ok], -10.0, atol=1e-9)
    assert a.table["hardware_ns"][ok].iloc[0] == pytest.approx(20.0 + 100.0 - 5.0)


def test_switches_zero_their_columns(tmp_path):
    rx = _geodetic_xyz(46.0, 7.0, 500.0)
    obs = _simulate(rx, lambda t: 0 * t, 0.0, n_ep=10)
    st = _station(tmp_path, rx)
    on = measure_station(obs, InertialOrbits(), st, MeasureOptions(tide=True, troposphere=True))
    off = measure_station(obs, InertialOrbits(), st, MeasureOptions(tide=False, troposphere=False, sagnac=False))
    ok = on.table["flag"] == "ok"
    assert (on.table["troposphere_m"][ok] > 2.0).all()  # Saastamoinen ~2.3 m at zenith and more below
    assert (np.abs(on.table["tide_m"][ok]) > 0).all() and (np.abs(on.table["sagnac_m"][ok]) > 1).any()
    assert (off.table[["troposphere_m", "tide_m", "sagnac_m"]][ok] == 0).all().all()
    # troposphere switched on raises the clock estimate by exactly the modelled delay
    d = (off.table["clock_ns"] - on.table["clock_ns"])[ok]
    expect = (on.table["troposphere_m"] + on.table["tide_m"] + on.table["sagnac_m"])[ok] / C_MPS * 1e9
    # Without the rotation the light time (and so the transmit instant) moves by
    # up to ~0.1 µs, the satellite by range-rate × 0.1 µs < 0.1 mm: 1 ps tolerance.
    np.testing.assert_allclose(d, expect, atol=1e-3)


def test_bias_file_maps_c1c_onto_the_clock_reference(tmp_path):
    # IS-GPS-200 §20.3.3.3.3.2: the broadcast clock is the L1/L2 P(Y) iono-free clock, so a
    # C1C bias b (C1C = C1W + b) enters the iono-free value times a1 = f1²/(f1²−f2²) = 2.546
    # (ctt.signals notes); with the DSB C1C-C1W from a bias file it is removed.
    from ctt.signals import BiasSet

    rx = _geodetic_xyz(46.0, 7.0, 500.0)
    st = _station(tmp_path, rx)
    obs = _simulate(rx, lambda t: 2e-6 + 0 * t, (20.0 + 100.0 - 5.0) * 1e-9, n_ep=40)
    dsb_ns = {s: 0.3 * (k - 3.5) for k, s in enumerate(sorted(SATS))}  # -1.05 .. +1.05 ns
    for j, s in enumerate(obs.sats):
        obs.obs["C1C"][:, j] += dsb_ns[s] * 1e-9 * C_MPS
    n = len(dsb_ns)
    bs = BiasSet(path="test.bsx", kind=np.array(["DSB"] * n), prn=np.array(sorted(dsb_ns)),
                 station=np.array([""] * n), obs1=np.array(["C1C"] * n), obs2=np.array(["C1W"] * n),
                 start_ns=np.zeros(n, np.int64), end_ns=np.full(n, -1, np.int64),
                 value_s=np.array([dsb_ns[s] * 1e-9 for s in sorted(dsb_ns)]), sigma_s=np.zeros(n), skipped=0)
    plain = measure_station(obs, InertialOrbits(), st, MeasureOptions(**OFF))
    fixed = measure_station(obs, InertialOrbits(), st, MeasureOptions(biases=bs, **OFF))
    ok = plain.table["flag"] == "ok"
    a1 = 1575.42**2 / (1575.42**2 - 1227.60**2)
    expect = plain.table.loc[ok, "sat"].map(dsb_ns) * a1
    truth = 2e3  # ns
    np.testing.assert_allclose(plain.table.loc[ok, "clock_ns"] - truth, expect, atol=2e-3)
    np.testing.assert_allclose(fixed.table.loc[ok, "clock_ns"], truth, atol=2e-3)
    # a satellite the file does not cover is flagged, not used with a silent zero
    bs2 = BiasSet(**{**bs.__dict__, **{k: getattr(bs, k)[1:] for k in
                                       ("kind", "prn", "station", "obs1", "obs2", "start_ns", "end_ns",
                                        "value_s", "sigma_s")}})
    part = measure_station(obs, InertialOrbits(), st, MeasureOptions(biases=bs2, **OFF))
    g01 = part.table["sat"] == sorted(SATS)[0]
    assert (part.table.loc[g01 & (part.table["elevation_deg"] > 10), "flag"] == "no_code_bias").all()


def test_each_galileo_satellite_uses_the_message_of_its_signals():
    # Galileo OS SIS ICD §5.1.5: F/NAV clocks refer to E1/E5a, I/NAV clocks to E1/E5b. A receiver
    # tracking E5a on one satellite and E5b on the others must not move the E5b satellites onto
    # F/NAV clocks. Demo files (simulated); the F/NAV records are made to differ by 1 ns in af0
    # and BGD(E1,E5a) so that using them for an E1/E5b satellite would show as a 1 ns shift.
    import pathlib

    from ctt.orbits import BroadcastOrbits
    from ctt.formats.rinex_nav import read_nav
    from ctt.formats.rinex_obs import read_obs

    demo = pathlib.Path(__file__).resolve().parents[1] / "data_demo"
    nav = read_nav(next(demo.glob("BRDC*_MN.rnx")))
    obs = read_obs(next(demo.glob("ALDR*_MO.crx")))
    import tempfile

    text = (demo / "aldr.toml").read_text().replace("C7Q = 26.7", "C7Q = 26.7, C5Q = 26.7")
    with tempfile.TemporaryDirectory() as tmp:
        p = pathlib.Path(tmp) / "aldr.toml"
        p.write_text(text)
        st = load_station(p)
    e = nav.records["E"].copy()
    f = e["source"] == "fnav"
    e.loc[f, "bgd_e5a_s"] = e.loc[f, "bgd_e5b_s"] + 1e-9
    e.loc[f, "af0_s"] = e.loc[f, "af0_s"] + 1e-9
    nav = dataclasses.replace(nav, records={**nav.records, "E": e})
    opt = MeasureOptions(systems=("E",), troposphere=False, tide=False)
    before = measure_station(obs, BroadcastOrbits(nav), st, opt)
    j = list(obs.sats).index("E01")
    c5 = np.full_like(obs.obs["C1C"], np.nan)
    c5[:, j] = obs.obs["C7Q"][:, j]  # any E5a code for E01 only
    obs2 = dataclasses.replace(obs, obs={**obs.obs, "C5Q": c5})
    after = measure_station(obs2, BroadcastOrbits(nav), st, opt)
    assert after.info["codes"]["E01"] == "C1C+C5Q" and after.info["codes"]["E02"] == "C1C+C7Q"
    m = before.table.merge(after.table, on=["time", "sat"], suffixes=("_b", "_a"))
    m = m[(m["sat"] != "E01") & (m["flag_b"] == "ok") & (m["flag_a"] != "missing_signal")]
    assert len(m) > 10_000
    np.testing.assert_allclose(m["clock_ns_a"], m["clock_ns_b"], atol=1e-5)  # unchanged (ns)


def test_epoch_rejection_keeps_a_normal_sample_and_removes_a_spike():
    # A normal sample with the right a-priori sigma must keep (nearly) all its values: the
    # documented false-rejection rate with FLOOR_FACTOR 0.5 is 1-2 % for 3-8 satellites
    # (k = 3.5); a 10-sigma spike must go. Invented noise (simulation truth).
    from ctt.measure import robust_epoch_mean

    rng = np.random.default_rng(5)
    for n in (3, 5, 8):
        v = rng.normal(0.0, 3.0, (20000, n))
        mean, scatter, n_used, rej = robust_epoch_mean(v, np.ones_like(v), 3.5, sigma=np.full_like(v, 3.0))
        assert rej.mean() < 0.025
        if n == 3:
            continue  # with 3 values one spike inflates the MAD itself (breakdown; common practice)
        v[:, 0] += 30.0
        _, _, _, rej = robust_epoch_mean(v, np.ones_like(v), 3.5, sigma=np.full_like(v, 3.0))
        assert rej[:, 0].mean() > 0.9


def test_epoch_of_exactly_three_satellites_rejects_its_spike():
    # By hand from the documented rule (median/MAD, Croux & Rousseeuw b₃ = 1.495 as in the
    # module, floor 0.5 × median σ): values 0, 0.3, 30 with σ = 1: median 0.3, MAD 0.3,
    # scale max(1.4826·1.495·0.3 = 0.665, 0.5) -> limit 3.5·0.665 = 2.33; 29.7 is rejected and
    # the mean of the other two is 0.15. Two values: nothing can be rejected.
    from ctt.measure import robust_epoch_mean

    v = np.array([[0.0, 0.3, 30.0], [0.0, 30.0, np.nan]])
    mean, _, n_used, rej = robust_epoch_mean(v, np.ones_like(v), 3.5, sigma=np.ones_like(v))
    assert mean[0] == pytest.approx(0.15, abs=1e-12) and n_used[0] == 2 and list(rej[0]) == [False, False, True]
    assert mean[1] == pytest.approx(15.0, abs=1e-12) and n_used[1] == 2 and not rej[1].any()
    # one value: its own mean (min_sats defaults to 1)
    assert robust_epoch_mean(np.array([[4.0, np.nan, np.nan]]), np.ones((1, 3)))[0][0] == 4.0


# Croux & Rousseeuw (1992) small-sample consistency factors of the MAD (from memory, as in the
# module docstring): b_n tabulated for n = 3..9, b_n = n/(n − 0.8) above
B_N = {3: 1.495, 4: 1.363, 5: 1.206, 6: 1.200, 7: 1.140, 8: 1.129, 9: 1.107, 10: 10 / 9.2}
# n − 1 values with median 0 and MAD 1 whatever the n-th (largest) value is
CORE = {3: [-1.0, 0.0], 4: [-2.0, 0.0, 0.0], 5: [-1.5, -1.0, 0.0, 1.0], 6: [-1.5, -1.0, 0.0, 0.0, 1.0],
        7: [-1.5, -1.0, -1.0, 0.0, 1.0, 1.0], 8: [-1.5, -1.0, -1.0, 0.0, 0.0, 1.0, 1.0],
        9: [-1.5, -1.0, -1.0, -1.0, 0.0, 1.0, 1.0, 1.0],
        10: [-1.2, -1.0, -1.0, -0.5, 0.0, 0.0, 0.5, 1.0, 1.0]}


@pytest.mark.parametrize("n", sorted(B_N))
def test_epoch_rejection_limit_uses_the_small_sample_mad_factor(n):
    # With median 0 and MAD 1 the limit is k·1.4826·b_n (floor 0.1 ns, σ not given): a last value
    # 2e-4 above it is rejected, 2e-4 below it kept, which pins b_n to better than its printed digits
    from ctt.measure import robust_epoch_mean

    limit = 3.5 * 1.4826 * B_N[n]
    v = np.array([CORE[n] + [limit * (1 + 2e-4)], CORE[n] + [limit * (1 - 2e-4)]])
    assert np.median(v[0]) == np.median(v[1]) == 0.0 and np.median(np.abs(v[0])) == 1.0
    _, _, n_used, rej = robust_epoch_mean(v, np.ones_like(v), 3.5)
    assert list(n_used) == [n - 1, n] and rej[0, -1] and not rej[1].any()


def test_inter_system_bias_uses_inverse_variance_epoch_means():
    # inter_system_biases: each system's clock per epoch is the weighted (1/σ²) mean of its rows
    # (error propagation, GUM): GPS rows 10 ns (σ 1) and 20 ns (σ 2) give (10 + 20/4)/(1 + 1/4) = 12;
    # Galileo 30 ns; bias E − G = 18 ns at both epochs
    from ctt.measure import inter_system_biases

    t = np.repeat(np.array([0, 30], dtype=np.int64) * 10**9, 3)
    table = pd.DataFrame({"time": t, "system": ["G", "G", "E"] * 2, "sat": ["G01", "G02", "E11"] * 2,
                          "clock_ns": [10.0, 20.0, 30.0] * 2, "sigma_ns": [1.0, 2.0, 1.0] * 2, "flag": "ok"})
    b = inter_system_biases(table, "G")["E"]
    assert b["mean_ns"] == pytest.approx(18.0, rel=1e-14, abs=0) and b["n_epochs"] == 2


def test_code_bias_uncertainty_needs_two_blocks():
    # estimate_code_biases: u = SD(block means)/√n_blocks, NaN with fewer than 2 blocks (docstring);
    # 4 satellites over exactly two hour-blocks, then over one (invented white noise)
    from ctt.measure import BIAS_BLOCK_S, estimate_code_biases

    rng = np.random.default_rng(3)
    n_ep = int(2 * BIAS_BLOCK_S // 30)
    t = np.arange(n_ep, dtype=np.int64) * 30 * 10**9
    table = pd.DataFrame({"time": np.repeat(t, 4), "sat": ["G01", "G02", "G03", "G04"] * n_ep, "system": "G",
                          "flag": "ok", "sigma_ns": 1.0, "clock_ns": rng.normal(0, 1.0, 4 * n_ep)})
    two = estimate_code_biases(table)
    assert (two["n_blocks"] == 2).all() and np.isfinite(two["u_ns"]).all()
    one = estimate_code_biases(table[table["time"] < BIAS_BLOCK_S * 10**9])
    assert (one["n_blocks"] == 1).all() and np.isnan(one["u_ns"]).all()


def test_met_gap_longer_than_four_intervals_falls_back_to_the_standard_atmosphere():
    # _met_at_epochs: inside a gap longer than four sampling intervals the file is not used
    # (standard atmosphere instead). 10-min records with a 4-interval and a 5-interval gap.
    from ctt import atmosphere
    from ctt.formats.rinex_met import MetData
    from ctt.measure import _met_at_epochs

    step = 600 * 10**9
    k = np.concatenate([np.arange(0, 6), np.arange(9, 15), np.arange(19, 25)])  # gaps of 4 and 5 intervals
    tt = k.astype(np.int64) * step
    met = MetData(path="invented.21m", version=3.05, marker="TEST", obs_types=("PR", "TD", "HR"), time_ns=tt,
                  values={"PR": np.full(k.size, 950.0), "TD": np.full(k.size, 10.0), "HR": np.full(k.size, 50.0)})
    q = np.array([7 * step, 17 * step])                       # the middle of each gap
    p, _, _, n_std = _met_at_epochs(met, q, 500.0)
    assert p[0] == 950.0 and n_std == 1
    assert p[1] == pytest.approx(atmosphere.standard_atmosphere(500.0)[0], rel=1e-15, abs=0)


def test_glonass_without_channel_numbers_does_not_stop_a_gps_day(tmp_path):
    rx = _geodetic_xyz(46.0, 7.0, 500.0)
    obs = _simulate(rx, lambda t: 1e-6 + 0 * t, 0.0, n_ep=20)
    j = 0
    add = lambda d: {k: np.concatenate([v, v[:, j:j + 1]], axis=1) for k, v in d.items()}  # noqa: E731
    obs2 = dataclasses.replace(obs, sats=np.append(obs.sats, "R05"), obs=add(obs.obs), lli=add(obs.lli),
                               ssi=add(obs.ssi))
    day = measure_station(obs2, InertialOrbits(), _station(tmp_path, rx), MeasureOptions(**OFF))
    assert "R05" not in set(day.table["sat"]) and (day.table["flag"] == "ok").sum() > 50


def test_estimate_position_recovers_an_invented_truth():
    """Invented geometry (simulation truth): 8 satellites at GPS orbit radius, 200 epochs,
    a receiver clock per epoch of up to 1 ms, 0.5 m code noise and outliers of 30 m and 4 m; the start
    is 50 m off. The estimate must land within 5 formal sigmas of the truth, and the
    formal sigma must be the one of the design (a few cm for 1,600 rows)."""
    from ctt.measure import estimate_position, position_check

    rng = np.random.default_rng(seed=12)
    truth = np.array([4_000_000.0, 500_000.0, 4_900_000.0])
    n_ep, n_sat = 200, 8
    up = truth / np.linalg.norm(truth)
    dirs = rng.normal(size=(n_ep, n_sat, 3))
    dirs += 1.5 * up  # above the horizon
    dirs /= np.linalg.norm(dirs, axis=2, keepdims=True)
    sat = truth + 20_200e3 * dirs
    clock_m = rng.uniform(-3e5, 3e5, size=n_ep)
    pc = np.linalg.norm(sat - truth, axis=2) + clock_m[:, None] + rng.normal(0, 0.5, size=(n_ep, n_sat))
    pc[17, 3] += 30.0
    # and an 8σ one: above reject_k × scale = 5 × 1.4826·MAD ≈ 2.4 m (0.5 m noise, one clock per epoch
    # removed), so it goes too; a 30 m outlier alone does not pin the threshold
    pc[50, 5] += 4.0
    group = np.repeat(np.arange(n_ep), n_sat)
    est = estimate_position(sat.reshape(-1, 3), pc.ravel(), group, np.ones(n_ep * n_sat), truth + [30.0, -20.0, 34.6])
    assert est is not None
    err = est["position_m"] - truth
    assert np.all(np.abs(err) < 5 * est["sigma_m"]), (err, est["sigma_m"])
    assert np.all(est["sigma_m"] < 0.2) and est["rms_m"] == pytest.approx(0.5, rel=0.15)
    assert est["n_used"] == n_ep * n_sat - 2  # the two outliers left out
    chk = position_check(est, truth + [0.0, 0.0, 12.0])
    assert chk["status"] == "flagged" and chk["distance_m"] == pytest.approx(12.0, abs=0.3)


def test_code_bias_estimates_recover_simulated_biases():
    """Simulation truth (invented): 12 satellites with constant code biases of zero mean, a station
    clock wandering by tens of ns, white code noise 1/sin(el)-scaled and each satellite in view for
    part of the day. The zero-mean fit recovers the biases within their stated uncertainties
    (normalised errors: RMS near 1, none beyond 4), and removing them leaves the epoch clock."""
    import pandas as pd

    from ctt.measure import estimate_code_biases

    rng = np.random.default_rng(14)
    n_ep, n_sat = 2880, 12
    t = (np.arange(n_ep, dtype=np.int64) * 30) * 1_000_000_000
    clock = np.cumsum(rng.normal(0, 0.5, n_ep))
    bias = rng.normal(0, 3.0, n_sat)
    bias -= bias.mean()
    rows = []
    for k in range(n_sat):
        start = rng.integers(0, n_ep // 2)
        vis = slice(start, start + n_ep // 2)
        el = np.linspace(15, 80, n_ep)[vis]
        sig = 0.9 / np.sin(np.deg2rad(el))
        rows.append(pd.DataFrame({"time": t[vis], "sat": f"G{k + 1:02d}", "system": "G", "flag": "ok",
                                  "sigma_ns": sig, "clock_ns": clock[vis] + bias[k] + rng.normal(0, sig)}))
    table = pd.concat(rows, ignore_index=True)
    est = estimate_code_biases(table).set_index("sat")
    z = (est["bias_ns"].to_numpy() - bias) / est["u_ns"].to_numpy()
    assert abs(est["bias_ns"].mean()) < 1e-9                  # the constraint
    assert np.max(np.abs(z)) < 4 and 0.5 < np.sqrt(np.mean(z ** 2)) < 1.6
    # white noise: the block-scale variance factor is near 1 - 1/6 (each satellite's share in the
    # clock of its epoch, ~6 in view, is taken out of its residuals), never the 2-7 of correlated
    # multipath; ~290 block means give it to about +-0.1
    assert 0.65 < est.attrs["block_variance_factor"] < 1.1
    # residual RMS per satellite: its white noise, less the share it has in its epochs' clocks
    # (about 1/6 of the variance with ~6 in view, between 1/12 and 1/3 with these weights), to
    # the 2 % sampling error of an RMS over ~1,440 points
    sig_rms = table.groupby("sat")["sigma_ns"].apply(lambda s: np.sqrt(np.mean(s ** 2)))
    ratio = est["rms_ns"] / sig_rms.loc[est.index]
    assert np.all((ratio > 0.78) & (ratio < 1.0)), ratio


def test_smoothing_sigma_ratio_is_the_residual_rms_ratio_per_band():
    """The factor on σ for smoothed code is RMS(smoothed residuals)/RMS(raw residuals) on the
    same rows, per elevation band, never above 1, and 1 in a band with too few rows. Checked
    on normal samples of known σ (simulation truth): raw σ 1, smoothed σ 0.4 in 30-45°, 0.7 in
    60-90°; with 5,000 rows a band's RMS ratio has a relative SD of about 1.4 % (chi-square,
    2·n degrees of freedom -> 1/√(2n) per RMS, √2 for the ratio), so 5 % is over 3 SD."""
    from ctt.measure import SMOOTHING_MIN_ROWS, smoothing_sigma_ratio

    rng = np.random.default_rng(3)
    n = 5000
    el = np.r_[np.full(n, 40.0), np.full(n, 75.0), np.full(SMOOTHING_MIN_ROWS - 1, 10.0)]
    raw = rng.normal(0.0, 1.0, el.size)
    sm = rng.normal(0.0, 1.0, el.size) * np.where(el == 40.0, 0.4, np.where(el == 75.0, 0.7, 2.0))
    use = np.ones(el.size, dtype=bool)
    factor, ratios = smoothing_sigma_ratio(sm, raw, el, use)
    assert ratios["30-45"] == pytest.approx(0.4, rel=0.05) and ratios["60-90"] == pytest.approx(0.7, rel=0.05)
    assert "0-15" not in ratios and np.all(factor[el == 10.0] == 1.0)   # too few rows: not reduced
    # never above 1: a band where smoothing made things worse keeps the raw σ
    f2, r2 = smoothing_sigma_ratio(raw * 2.0, raw, el, use)
    assert np.all(f2 <= 1.0) and r2["30-45"] == 1.0


def test_measured_ionosphere_from_the_two_codes(tmp_path):
    # First-order ionosphere on the first code from the code difference (common practice; the
    # frequencies of IS-GPS-200: f1 = 1575.42, f2 = 1227.60 MHz): I1 = (P2 - P1) f2^2/(f1^2 - f2^2)
    # = (P2 - P1)/(gamma - 1), gamma = (f1/f2)^2. A P2 3 m longer than P1 reads 4.637 m on P1.
    rx = _geodetic_xyz(46.0, 7.0, 500.0)
    st = _station(tmp_path, rx)
    obs = _simulate(rx, lambda t: 3e-4 + 0.0 * t, 0.0)
    obs = dataclasses.replace(obs, obs={**obs.obs, "C2W": obs.obs["C2W"] + 3.0})
    day = measure_station(obs, InertialOrbits(), st, MeasureOptions(**OFF))
    v = day.table["iono_measured_m"].to_numpy(float)
    v = v[np.isfinite(v)]
    gamma = (1575.42 / 1227.60) ** 2
    assert v.size > 200
    np.testing.assert_allclose(v, 3.0 / (gamma - 1.0), rtol=1e-12)
