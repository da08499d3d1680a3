"""Multi-GNSS measurement on a real station: ESBC, 2020-06-25 (../shared/data/real-2020-177).

One real multi-GNSS receiver (RINEX 3.05, Hatanaka + gzip; GPS, GLONASS, Galileo, BeiDou),
its own mixed broadcast navigation file, and a multi-GNSS analysis centre's final orbits and
30-s clocks for GPS, GLONASS and Galileo (no precise BeiDou: BeiDou is checked with the
broadcast ephemeris only). Per system: the residual RMS of ``ctt measure`` against each
system's own epoch mean, broadcast and precise; the GLONASS frequency channels from the
navigation file; the receiver's inter-system biases and their stability over the day.

The station file (tests/data/stations/esbc.toml) uses the RINEX header position (IGS headers
are within about 1 m of the frame coordinate, common practice) and uncalibrated (zero)
delays: only relative quantities are checked, never absolute clock values.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from ctt.config import load_station
from ctt.formats.rinex_nav import read_nav
from ctt.formats.rinex_obs import read_obs
from ctt.formats.sp3 import read_sp3
from ctt.measure import MeasureOptions, glonass_channels_from_nav, measure_station
from ctt.orbits import BroadcastOrbits, PreciseOrbits

pytestmark = pytest.mark.slow  # reading the 30-s multi-GNSS day alone takes ~20 s

C_M_PER_NS = 0.299792458
OBS = "ESBC00DNK_R_20201770000_01D_30S_MO.crx.gz"
NAV = "ESBC00DNK_R_20201770000_01D_MN.rnx.gz"
SP3 = "GRG0MGXFIN_20201770000_01D_15M_ORB.SP3.gz"
CLK = "GRG0MGXFIN_20201770000_01D_30S_CLK.CLK.gz"
MIN_EL = 15.0   # as in test_against_real_data: the residual RMS above 15° elevation

# Bounds (metres of residual RMS above 15°, iono-free code, no carrier smoothing):
# GPS: the same bounds as ZIMM/CN00 in test_against_real_data (the bounds for a
# geodetic receiver: 1.3 m with final orbits and clocks, 1.4 m with the broadcast ephemeris).
GPS_BOUND_M = {"precise": 1.3, "broadcast": 1.4}
# Galileo: the GPS bound, and no worse than GPS on the same receiver and day: the Galileo
# broadcast signal-in-space error is about a third of GPS's (Galileo quarterly performance
# reports: SISE ~0.2-0.3 m vs GPS ~0.6 m; from memory) and E5a (10.23 MHz chip rate) is a
# cleaner second code than semi-codeless L2 P(Y) (common practice).
# GLONASS: the C/A code chip rate (0.511 MHz) is half GPS's, so its code noise is about
# twice GPS's (code noise scales with the chip length: common practice); after each
# satellite's constant (the receiver's per-channel code bias) is removed the RMS must stay
# within twice the GPS bound. The per-channel biases themselves are not noise: they are
# checked separately (linear in the channel number, as they are for most geodetic
# receivers; from memory), and the raw RMS is bounded only loosely (3.0 m: measured 2.65 m).
# BeiDou (broadcast only): B1I has twice GPS C/A's chip rate and the BeiDou broadcast
# clock/orbit error is ~1 m class (from memory), so after each satellite's constant (BDS-2 and
# BDS-3 differ by ~10 ns in this receiver: measured) the GPS broadcast bound; raw 3.0 m.
RAW_BOUND_M = {"R": 3.0, "C": 3.0}


@pytest.fixture(scope="module")
def esbc(shared_set, test_data):
    d = shared_set("real-2020-177")
    obs = read_obs(d / OBS)
    nav = read_nav(d / NAV)
    precise = PreciseOrbits(read_sp3(d / SP3), clk=str(d / CLK))
    station = load_station(test_data / "stations" / "esbc.toml")
    out = {"obs": obs, "nav": nav, "station": station, "precise_orbits": precise}
    for name, orbits, systems in (("broadcast", BroadcastOrbits(nav), "GREC"), ("precise", precise, "GRE")):
        for bias in (None, "estimate"):
            out[(name, bias)] = measure_station(obs, orbits, station,
                                                MeasureOptions(systems=tuple(systems), biases=bias),
                                                nav_header=nav.header, nav=nav)
    return out


def _per_system(day) -> pd.DataFrame:
    t = day.table
    r = t[(t["flag"] == "ok") & (t["elevation_deg"] > MIN_EL)].copy()
    r["demeaned"] = r["residual_ns"] - r.groupby("sat")["residual_ns"].transform("mean")
    g = r.groupby("system")
    return pd.DataFrame({"n": g.size(), "sats": g["sat"].nunique(),
                         "rms_m": g["residual_ns"].apply(lambda v: np.sqrt(np.mean(v ** 2))) * C_M_PER_NS,
                         "rms_demeaned_m": g["demeaned"].apply(lambda v: np.sqrt(np.mean(v ** 2))) * C_M_PER_NS})


def test_per_system_residual_rms(esbc):
    tabs = {name: _per_system(esbc[(name, None)]) for name in ("broadcast", "precise")}
    lines = ["system  product    values  sats  RMS (m)  RMS (ns)  RMS less per-satellite mean (m)"]
    for name, tab in tabs.items():
        for s, row in tab.iterrows():
            lines.append(f"{s:6}  {name:9}  {int(row.n):6d}  {int(row.sats):4d}  {row.rms_m:7.2f}  "
                         f"{row.rms_m / C_M_PER_NS:8.2f}  {row.rms_demeaned_m:7.2f}")
    print("\n" + "\n".join(lines))
    assert set(tabs["broadcast"].index) == {"G", "R", "E", "C"}
    assert set(tabs["precise"].index) == {"G", "R", "E"}
    for name, tab in tabs.items():
        g, e, r = tab.loc["G"], tab.loc["E"], tab.loc["R"]
        assert g.sats >= 28 and e.sats >= 20 and r.sats >= 20      # constellations of mid-2020
        assert g.rms_m < GPS_BOUND_M[name]
        assert e.rms_m < GPS_BOUND_M[name] and e.rms_m < g.rms_m
        assert r.rms_demeaned_m < 2 * GPS_BOUND_M[name]
        assert r.rms_m < RAW_BOUND_M["R"]
    c = tabs["broadcast"].loc["C"]
    assert c.sats >= 15
    assert c.rms_demeaned_m < GPS_BOUND_M["broadcast"]
    assert c.rms_m < RAW_BOUND_M["C"]


def test_glonass_channels_from_the_navigation_file(esbc):
    obs, nav = esbc["obs"], esbc["nav"]
    k_nav = glonass_channels_from_nav(nav)
    header = {str(s): int(v) for s, v in obs.header.glonass_slots.items()}
    # two independent sources in the real data: the satellites' own broadcast frequency number
    # and the receiver's GLONASS SLOT / FRQ # header record (RINEX 3.05 §5.x; common practice)
    assert len(k_nav) >= 20
    assert {s: k_nav[s] for s in header if s in k_nav} == {s: header[s] for s in header if s in k_nav}
    assert all(-7 <= v <= 6 for v in k_nav.values())   # GLONASS ICD: k = -7..+6
    day = esbc[("precise", None)]
    assert day.info["glonass_channels"]["navigation"] == len(k_nav)
    assert day.info["glonass_channels"]["disagreeing"] == []
    # a file without the header record (RINEX 2 has none): the navigation file alone supplies
    # the channels, also beside a precise product, and the GLONASS result is the same
    bare = dataclasses.replace(obs, header=dataclasses.replace(obs.header, glonass_slots={}))
    d = esbc[("precise", None)]
    again = measure_station(bare, esbc["precise_orbits"], esbc["station"], MeasureOptions(systems=("R",)),
                            nav_header=esbc["nav"].header, nav=esbc["nav"])
    a = d.table[(d.table["system"] == "R") & (d.table["flag"] == "ok")]
    b = again.table[again.table["flag"] == "ok"]
    assert b["sat"].nunique() == a["sat"].nunique() >= 20
    assert again.info["glonass_channels"]["header_only"] == 0
    m = a.merge(b, on=["time", "sat"], suffixes=("_a", "_b"))
    assert len(m) >= 0.95 * len(a)
    np.testing.assert_allclose(m["clock_ns_a"], m["clock_ns_b"], atol=1e-6)


def test_glonass_code_biases_follow_the_frequency_channel(esbc):
    # With the precise clocks, each GLONASS satellite's constant code bias (estimated, zero mean)
    # is the receiver's inter-frequency code bias of that satellite's channel (relative to the
    # product's network average); for most geodetic receivers it is close to linear in the
    # channel number k (from memory). A wrong channel assignment would scramble that relation.
    est = pd.DataFrame(esbc[("precise", "estimate")].info["code_bias_estimates"])
    k = glonass_channels_from_nav(esbc["nav"])
    g = est[est["system"] == "R"].copy()
    g["k"] = g["sat"].map(k)
    slope, intercept = np.polyfit(g["k"], g["bias_ns"], 1)
    r = np.corrcoef(g["k"], g["bias_ns"])[0, 1]
    resid = g["bias_ns"] - (slope * g["k"] + intercept)
    print(f"\nGLONASS code bias vs channel: {slope:+.2f} ns per channel, r = {r:+.3f}, "
          f"scatter about the line {np.sqrt(np.mean(resid ** 2)):.2f} ns ({len(g)} satellites)")
    assert len(g) >= 20
    assert abs(r) > 0.9
    # the scatter about the line must be at the level of the estimates' own uncertainty plus the
    # satellites' own P1-C1-type biases (~1 ns x 2.5 in iono-free; common practice)
    assert np.sqrt(np.mean(resid ** 2)) < 3.0


def test_inter_system_biases_reported_and_stable(esbc):
    lines = ["ISB      product    bias estimate  mean (ns)  SD epochs (ns)  hourly SD (ns)  hourly spread (ns)"]
    isb = {}
    for name in ("broadcast", "precise"):
        for bias in (None, "estimate"):
            got = esbc[(name, bias)].info["inter_system_bias"]
            isb[(name, bias)] = got
            for s, b in got.items():
                lines.append(f"{s}-{b['reference']}      {name:9}  {str(bias):13}  {b['mean_ns']:+9.2f}  "
                             f"{b['sd_ns']:14.2f}  {b['hourly_sd_ns']:14.2f}  {b['hourly_spread_ns']:18.2f}")
    print("\n" + "\n".join(lines))
    assert set(isb[("broadcast", None)]) == {"R", "E", "C"}
    assert set(isb[("precise", None)]) == {"R", "E"}
    # An ISB is a hardware constant of the receiver over a day (common practice). What its hourly
    # means may still show: the per-satellite code biases of the satellites in view (GPS C1C-C1W,
    # ~1 ns x 2.5 in iono-free over ~8 satellites: ~1 ns; common practice) and, with broadcast
    # clocks, the broadcast clock errors of two systems (a few ns each, averaged over ~8
    # satellites; IGS product table, from memory). Hence 1.5 ns for the hourly SD.
    for name in ("broadcast", "precise"):
        assert isb[(name, None)]["E"]["hourly_sd_ns"] < 1.5
    # GLONASS: the per-channel code biases (previous test) move the epoch mean as satellites
    # rise and set; only with them estimated is the GLONASS ISB stable, to the same bound with
    # the precise clocks (broadcast GLONASS clocks are worse: ~5-10 ns, from memory; 2.5 ns)
    assert isb[("precise", "estimate")]["R"]["hourly_sd_ns"] < 1.5
    assert isb[("precise", "estimate")]["R"]["hourly_sd_ns"] < 0.5 * isb[("precise", None)]["R"]["hourly_sd_ns"]
    assert isb[("broadcast", "estimate")]["R"]["hourly_sd_ns"] < 2.5
    # BeiDou (broadcast): BDS-2 and BDS-3 satellites differ by ~10 ns in this receiver; with the
    # biases estimated the BeiDou broadcast clock errors (~2 ns class, from memory) remain
    assert isb[("broadcast", "estimate")]["C"]["hourly_sd_ns"] < 3.0
    # the same receiver's Galileo-GPS bias from the two clock sources: broadcast clocks realise
    # GST via the broadcast GPS-Galileo time offset, accurate to a few ns (Galileo OS SDD,
    # from memory); the precise product puts all systems on one scale with its own convention
    d = isb[("broadcast", "estimate")]["E"]["mean_ns"] - isb[("precise", "estimate")]["E"]["mean_ns"]
    assert abs(d) < 5.0


def test_broadcast_against_precise_per_system(shared_set):
    from ctt.commands.compare_products import run_comparison

    d = shared_set("real-2020-177")
    result, details, precise = run_comparison(d / NAV, [d / SP3], str(d / CLK))
    sy = result["systems"]
    print("\nsystem  sats  orbit 3D  radial  along  cross (m)  clock RMS  median over satellites (ns)")
    for s, v in sy.items():
        print(f"{s:6}  {v['n_satellites']:4d}  {v['orbit_rms_m']:8.2f}  {v['radial_rms_m']:6.2f}  "
              f"{v['along_rms_m']:5.2f}  {v['cross_rms_m']:5.2f}      {v['clock_rms_ns']:9.2f}  "
              f"{v['clock_rms_median_ns']:9.2f}")
    assert set(sy) == {"G", "R", "E"}            # no BeiDou in this precise product
    assert sy["G"]["n_satellites"] >= 28 and sy["R"]["n_satellites"] >= 20 and sy["E"]["n_satellites"] >= 20
    assert not precise.pco_applied  # no ANTEX: the differences hold the satellite antenna offsets
    # GPS: IGS product table (from memory): broadcast orbits ~1 m, clocks ~5 ns RMS; with the
    # antenna offset (0-1.6 m radial, no ANTEX) the same bounds as test_against_igs_products
    assert sy["G"]["orbit_rms_m"] <= 2.0 and sy["G"]["clock_rms_ns"] <= 5.0
    # Galileo: broadcast SISE about 0.2-0.3 m, clock part ~1 ns (Galileo quarterly performance
    # reports, from memory); the E1 antenna offset along the body z axis (~0.8 m; IGS ANTEX
    # Galileo values, from memory) stays in the radial: 3D 1.5 m; clock RMS per system 2.5 ns
    # (one satellite may be worse: the median over satellites within 1.5 ns)
    assert sy["E"]["orbit_rms_m"] <= 1.5
    assert sy["E"]["clock_rms_ns"] <= 2.5 and sy["E"]["clock_rms_median_ns"] <= 1.5
    # GLONASS: broadcast orbits a few metres and clocks 5-10 ns (GLONASS ICD accuracy figures
    # and IGS comparisons, from memory); GLONASS-M antenna offsets ~2 m radial (from memory)
    assert sy["R"]["orbit_rms_m"] <= 5.0 and sy["R"]["clock_rms_ns"] <= 10.0
    # and the published order of the three broadcast services' clock quality
    assert sy["E"]["clock_rms_median_ns"] < sy["G"]["clock_rms_median_ns"] < sy["R"]["clock_rms_median_ns"]


def test_code_position_with_several_systems(esbc):
    """The day's code-only position (one receiver clock per epoch and system, ctt.measure.
    estimate_position) from the multi-GNSS days lands where the RINEX header says: IGS headers
    are within about 1 m of the frame coordinate (common practice; tests/data/stations/esbc.toml),
    and a code position over a day is good to a few decimetres (the check's warning threshold is
    2 m). The broadcast (G, R, E, C) and precise (G, R, E) days, with different satellites and
    clock references, agree within 1 m. Mixing the systems' clocks in one epoch group moves it
    by metres (inter-system biases of 12-37 ns here, test_inter_system_biases_reported_and_stable)."""
    pos = {k: esbc[(k, None)].info["position_check"] for k in ("broadcast", "precise")}
    for k, p in pos.items():
        print(f"\nESBC code position, {k}: E {p['d_east_m']:+.2f} N {p['d_north_m']:+.2f} U {p['d_up_m']:+.2f} m "
              f"from the header; fit RMS {p['rms_m']:.2f} m over {p['n_used']} values, {p['n_epochs']} epoch groups")
        assert p["status"] == "ok" and p["distance_m"] <= 2.0
        assert p["n_epochs"] > 2 * 2880       # one clock per epoch and system: at least two systems
    d = np.subtract(pos["broadcast"]["estimate_m"], pos["precise"]["estimate_m"])
    assert np.linalg.norm(d) <= 1.0
