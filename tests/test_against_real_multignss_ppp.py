"""``ctt ppp`` of one real multi-GNSS station with 30-s precise clocks (real-2020-177, ESBC).

Sources: the station's RINEX 3 observations and a multi-GNSS analysis centre's final orbits
(15 min) and 30-s clocks for GPS and Galileo (../shared/data/README.md). No clock truth that
day, so the checks are internal but still independent of ctt's own data:

* phase residual RMS <= 1 cm and code residual RMS <= 1 m: common practice for a geodetic
  receiver with final products (issue 11);
* the GPS-only and the GPS+Galileo clocks agree within 0.1 ns RMS once their mean difference
  (the receiver's inter-system bias enters only through the ISB parameter) is removed (issue 11).

The data set has no ANTEX file of the antenna model the products were made with (the clock
header names igs14), so neither the satellites' phase-centre offsets (PCOs of up to 0.4 m
across the nadir direction, rotating with the yaw attitude) nor the receiver antenna model
can be applied: what that costs is measured here and reported, the bounds are kept.
"""

from __future__ import annotations

import pytest

from ctt.config import load_station
from ctt.formats.rinex_obs import read_obs
from ctt.orbits import PreciseOrbits
from ctt.ppp import PPPOptions, run_ppp

STATION = """[station]
id = "ESBC"
name = "ESBC (real open data)"
elevation_mask_deg = 7.0
[station.position]
x_m = 3582105.2910
y_m = 532589.7313
z_m = 5232754.8054
sigma_m = 1.0
frame = "RINEX header approximate position"
epoch = 2020.5
is_marker = true
[station.antenna]
type = "ASH701945E_M    SCIS"
delta_h_m = 0.2160
delta_e_m = 0.0
delta_n_m = 0.0
[[delays]]
valid_from = 2020-01-01T00:00:00Z
receiver_ns = { C1C = 0.0, C1W = 0.0, C2W = 0.0, C5Q = 0.0 }
u_receiver_ns = 5.0
cable_ns = 0.0
u_cable_ns = 1.0
reference_ns = 0.0
u_reference_ns = 1.0
"""


@pytest.fixture(scope="module")
def esbc(shared_set, tmp_path_factory):
    d = shared_set("real-2020-177")
    st_path = tmp_path_factory.mktemp("esbc") / "esbc.toml"
    st_path.write_text(STATION)
    station = load_station(st_path)
    obs = read_obs(d / "ESBC00DNK_R_20201770000_01D_30S_MO.crx.gz", systems=("G", "E"))
    orbits = PreciseOrbits(d / "GRG0MGXFIN_20201770000_01D_15M_ORB.SP3.gz",
                           d / "GRG0MGXFIN_20201770000_01D_30S_CLK.CLK.gz")
    g = run_ppp(obs, orbits, station, PPPOptions(systems=("G",)))
    ge = run_ppp(obs, orbits, station, PPPOptions(systems=("G", "E")))
    for name, r in (("GPS", g), ("GPS+Galileo", ge)):
        s = r.summary
        print(f"\nESBC {name}: code RMS {s['code_rms_m']:.3f} m, phase RMS {s['phase_rms_m'] * 1000:.1f} mm, "
              f"{s['n_arcs']} arcs, ISB {s['isb_m']}")
    return g, ge


@pytest.mark.slow
def test_code_residuals_within_a_metre(esbc):
    for r in esbc:
        assert r.summary["code_rms_m"] <= 1.0     # common practice for a geodetic receiver (issue 11)


@pytest.mark.slow
@pytest.mark.xfail(strict=True, reason="measured 23.8 mm (GPS) and 19.8 mm (GPS+Galileo) phase RMS; 8-11 mm above "
                                       "45 deg, 34 mm below 15 deg: no ANTEX of the products' antenna model in "
                                       "the data set (satellite PCOs and receiver PCV not applied)")
def test_phase_residuals_within_a_centimetre(esbc):
    for r in esbc:
        assert r.summary["phase_rms_m"] <= 0.010   # common practice for a geodetic receiver (issue 11)


@pytest.mark.slow
@pytest.mark.xfail(strict=True, reason="measured 0.110 ns RMS over 2850 epochs (mean +0.001 ns): without the "
                                       "satellite antenna offsets each satellite carries cm-level errors that move "
                                       "the epoch clock as satellites rise and set")
def test_gps_and_gps_galileo_clocks_agree(esbc):
    g, ge = (r.clock.set_index("time_gps_ns") for r in esbc)
    both = (g["flag"] == "ok") & (ge["flag"] == "ok")
    d = (g["clock_ns"] - ge["clock_ns"])[both]
    rms = float(d.std(ddof=0))
    print(f"\nESBC GPS - GPS+Galileo clock: {len(d)} epochs, mean {d.mean():+.3f} ns, RMS about it {rms:.3f} ns")
    assert len(d) > 2500
    assert rms <= 0.10                              # issue 11 target
