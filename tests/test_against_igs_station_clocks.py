"""``ctt ppp`` against the IGS network's own station clocks and coordinates (real-2011-283).

Truth: the AR records of the IGS final combined clock file ``igs16571.clk`` (kept for
BRUS and CAGZ, 00:00-11:55, 5-min; "local clock - IGS time" from the IGS analysis
centres' carrier-phase solutions, formal sigmas 0.01-0.03 ns, ../shared/data/README.md)
and the IGS weekly SINEX ``igs11P1657.ssc.gz`` (station marker coordinates, IGS08).

Bounds (issue 11): clock RMS about a constant <= 0.10 ns per station over the epochs
both have (a carrier-phase solution with these products follows such a truth to about
0.1 ns, common practice); the constant is free because neither receiver's hardware
delays are calibrated. Position within 2 cm horizontally and 5 cm vertically of the
SINEX marker plus the antenna height (common practice for a daily static PPP solution
with final products).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from ctt import geodesy
from ctt.cli import main
from ctt.formats.rinex_clock import read_clock
from ctt.formats.sinex import read_sinex_stations

from station_files import igs_station_toml

STATIONS = {
    # id: (file, RINEX header APPROX POSITION (a priori, metres from the IGS frame), antenna, delta H)
    "BRUS": ("brus2830.11o.gz", (4027894.0130, 307045.5980, 4919474.9120), "ASH701945B_M    NONE", 3.9702),
    "CAGZ": ("cagz2830.11d", (4893378.7999, 772650.4734, 4004179.0402), "JPSREGANT_DD_E  NONE", 0.0945),
}


def _station_toml(sid, pos, antenna, dh, sigma=1.0):
    return igs_station_toml(sid, pos, antenna, dh, sigma=sigma)


def sinex_marker(path, sid):
    """STAX/STAY/STAZ of a station from the IGS weekly SINEX (read by ctt.formats.sinex)."""
    return read_sinex_stations(path).site(sid).xyz_m


@pytest.fixture(scope="module")
def day(shared_set, tmp_path_factory):
    d = shared_set("real-2011-283")
    root = tmp_path_factory.mktemp("ppp")
    out = {}
    for sid, (fname, pos, ant, dh) in STATIONS.items():
        st = root / f"{sid.lower()}.toml"
        st.write_text(_station_toml(sid, pos, ant, dh))
        folder = root / sid
        rc = main(["ppp", str(d / fname), "--station", str(st),
                   "--sp3", str(d / "igs16570.sp3"), "--sp3", str(d / "igs16571.sp3"),
                   "--sp3", str(d / "igs16572.sp3"), "--clk", str(d / "igs16571.clk"),
                   "--antex", str(d / "igs08_1648.atx.gz"), "--out", str(folder)])
        assert rc == 0
        out[sid] = (pd.read_csv(folder / "clock.csv"), json.loads((folder / "summary.json").read_text()))
    return d, out


def _against_ar(d, sid, clock):
    ar = read_clock(d / "igs16571.clk").stations
    col = ar.column(sid)
    truth = pd.Series(ar.bias_s[:, col] * 1e9, index=ar.time_ns).dropna()
    ok = clock[clock["flag"] == "ok"].set_index("time_gps_ns")["clock_ns"]
    common = truth.index.intersection(ok.index)
    diff = ok.loc[common] - truth.loc[common]
    return diff


@pytest.mark.slow
@pytest.mark.parametrize("sid", ["BRUS", "CAGZ"])
def test_clock_follows_the_igs_station_clock(day, sid):
    d, out = day
    clock, summary = out[sid]
    diff = _against_ar(d, sid, clock)
    rms = float(diff.std(ddof=0))
    first_hour = float(diff.iloc[:12].std(ddof=0))
    print(f"\n{sid}: ctt ppp - IGS AR clock over {len(diff)} common 5-min epochs: mean {diff.mean():+.3f} ns, "
          f"RMS about the mean {rms:.3f} ns (first hour {first_hour:.3f} ns); code RMS "
          f"{summary['code_rms_m']:.2f} m, phase RMS {summary['phase_rms_m'] * 1000:.1f} mm, "
          f"{summary['n_arcs']} arcs, {summary['n_slips']} slips, {summary['n_clock_jumps']} clock jumps")
    assert len(diff) >= 140           # 00:00-11:55 at 5 min is 144 epochs (data README)
    assert rms <= 0.10                # issue 11 target (common practice for PPP with final products)
    assert first_hour <= 0.10         # the batch solution: the first hour as good as the rest
    # the summary names the product's time scale and clock convention
    assert "IGS" in summary["time_scale"] and "P1/P2" in summary["satellite_clock_convention"]


@pytest.mark.slow
def test_cagz_millisecond_resets_are_found_and_bridged(day):
    _, out = day
    clock, summary = out["CAGZ"]
    # CAGZ resets its free oscillator by +1 ms 26 times in the day (../shared/data/README.md)
    assert summary["n_clock_jumps"] == 26
    assert all(j["size_ms"] == 1 for j in summary["clock_jumps"])
    # the arcs continue across the resets: far fewer arcs than resets x satellites in view
    assert summary["n_arcs"] < 26 * 8


@pytest.mark.slow
@pytest.mark.parametrize("sid", ["BRUS", "CAGZ"])
def test_position_matches_the_igs_weekly_sinex(day, sid):
    d, out = day
    _, summary = out[sid]
    marker = sinex_marker(d / "igs11P1657.ssc.gz", sid)
    arp_truth = geodesy.antenna_reference_point(marker, STATIONS[sid][3])
    lat, lon, _ = geodesy.ecef_to_geodetic(arp_truth)
    enu = np.asarray(geodesy.ecef_to_enu(np.asarray(summary["position_arp_m"]) - arp_truth, lat, lon)).ravel()
    horiz = float(np.hypot(enu[0], enu[1]))
    print(f"\n{sid}: estimated ARP - SINEX marker+antenna height: E {enu[0] * 100:+.1f} cm, N {enu[1] * 100:+.1f} cm, "
          f"U {enu[2] * 100:+.1f} cm (horizontal {horiz * 100:.1f} cm); receiver antenna model: "
          f"{summary['models']['receiver_antenna']}")
    assert horiz <= 0.02 and abs(enu[2]) <= 0.05   # issue 11 targets


@pytest.mark.slow
def test_outputs_and_position_modes(day, tmp_path):
    # clock.csv / summary.json carry what issue 11 lists; the position held at (or constrained to)
    # the IGS weekly SINEX coordinate gives the same clock to well within the 0.10 ns target
    import dataclasses

    from ctt.config import load_station
    from ctt.formats.rinex_obs import read_obs
    from ctt.pipeline import PairInputs, load_orbits
    from ctt.ppp import PPPOptions, run_ppp

    d, out = day
    clock, summary = out["BRUS"]
    assert list(clock.columns[:7]) == ["time_utc", "time_gps_ns", "clock_ns", "u_ns", "n_sat", "flag", "ztd_m"]
    assert clock["time_utc"].str.endswith("Z").all()
    assert all(len(v["sha256"]) == 64 for v in summary["inputs"].values() if v)
    for key in ("enu_difference_m", "code_rms_m", "phase_rms_m", "n_arcs", "n_slips", "n_clock_jumps",
                "rejected", "time_scale", "satellite_clock_convention", "options", "version"):
        assert key in summary
    # 2.3-2.7 m: the zenith total delay at a site near sea level (Saastamoinen; common practice)
    ok = clock["flag"] == "ok"
    assert 2.2 < clock.loc[ok, "ztd_m"].median() < 2.7

    fname, pos, ant, dh = STATIONS["BRUS"]
    marker = sinex_marker(d / "igs11P1657.ssc.gz", "BRUS")
    st_path = tmp_path / "brus.toml"
    st_path.write_text(_station_toml("BRUS", marker, ant, dh, sigma=0.005))
    station = load_station(st_path)
    obs = read_obs(d / fname, systems=("G",))
    orbits = load_orbits(PairInputs(obs_a=None, obs_b=None, sp3=tuple(str(d / f"igs1657{k}.sp3") for k in range(3)),
                                    clk=str(d / "igs16571.clk"), antex=str(d / "igs08_1648.atx.gz")), "precise")[0]
    for mode in ("fixed", "constrained"):
        r = run_ppp(obs, orbits, station, dataclasses.replace(PPPOptions(), position=mode))
        c = r.clock.assign(time_utc="")  # same layout as the file for the helper
        diff = _against_ar(d, "BRUS", c)
        print(f"\nBRUS position {mode} at the SINEX coordinate: RMS about the mean {diff.std(ddof=0):.3f} ns, "
              f"dU {r.summary['enu_difference_m'][2] * 100:+.1f} cm")
        assert diff.std(ddof=0) <= 0.10
        if mode == "fixed":
            assert r.summary["enu_difference_m"] == [0.0, 0.0, 0.0]
