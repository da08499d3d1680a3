"""Antenna positions estimated from a day's code data against published IGS coordinates.

Sources: the IGS weekly SINEX combination igs11P1657.ssc.gz (GPS week 1657, IGS08; in
../shared/data/real-2011-283) for the station coordinates, the RINEX files and orbit
products of real-2011-283 and real-2016-001 (IGS data, CC BY 4.0).

Accuracy expected of a one-day iono-free code solution with these orbits: decimetres
horizontally and about a metre in height (code multipath, troposphere and the clock are
correlated with height; common practice). Measured with this code: horizontal 0.03-0.45 m,
up -0.57..+1.29 m against the published coordinates. Bounds: 1.0 m horizontal, 2.0 m up
(the warning threshold).
"""

from __future__ import annotations

import json
import pathlib

import numpy as np
import pytest

from ctt import geodesy
from ctt.config import load_station
from ctt.measure import MeasureOptions
from ctt.pipeline import PairInputs, load_orbits, measure_file

ROOT = pathlib.Path(__file__).resolve().parents[1]
SHARED = ROOT.parent / "shared" / "data"
D2011 = SHARED / "real-2011-283"
D2016 = SHARED / "real-2016-001"


def _need(*paths):
    for p in paths:
        if not p.exists():
            pytest.skip(f"real open data not present at {p} (../shared/data beside the project)")


def _sinex_positions(path) -> dict:
    """{station: ECEF (3,)} of the SOLUTION/ESTIMATE block, read by ctt.formats.sinex (itself
    checked against the file's text in test_against_igs_sinex.py)."""
    from ctt.formats.sinex import read_sinex_stations

    return {s.code: s.xyz_m for s in read_sinex_stations(path).sites}


def _enu(ref, x):
    lat, lon, _ = geodesy.ecef_to_geodetic(np.asarray(ref, dtype=float))
    return geodesy.enu_matrix(float(lat), float(lon)) @ (np.asarray(x, dtype=float) - ref)


def _station_file(tmp_path, sid, xyz, delta_h):
    p = tmp_path / f"{sid.lower()}.toml"
    p.write_text(f'[station]\nid = "{sid}"\n[station.position]\nx_m = {float(xyz[0])!r}\ny_m = {float(xyz[1])!r}\n'
                 f'z_m = {float(xyz[2])!r}\nsigma_m = 0.1\nis_marker = true\n[station.antenna]\n'
                 f'delta_h_m = {float(delta_h)!r}\n[[delays]]\nvalid_from = 2010-01-01\n'
                 'receiver_ns = { C1C = 0.0, C1W = 0.0, C2W = 0.0 }\nu_receiver_ns = 5.0\ncable_ns = 0.0\n'
                 'u_cable_ns = 1.0\nreference_ns = 0.0\nu_reference_ns = 1.0\n')
    return load_station(p)


def _displaced(xyz, enu_m):
    lat, lon, _ = geodesy.ecef_to_geodetic(np.asarray(xyz, dtype=float))
    return np.asarray(xyz) + geodesy.enu_matrix(float(lat), float(lon)).T @ np.asarray(enu_m, dtype=float)


CASES = [  # (folder, observation file, station, nav, sp3, clk)
    (D2016, "algo0010.16o.gz", "ALGO", "brdc0010.16n", None, None),
    (D2016, "zimm0010.16o.gz", "ZIMM", "brdc0010.16n", None, None),
    (D2016, "algo0010.16o.gz", "ALGO", None, "gbm18775.sp3.gz", None),
    (D2016, "zimm0010.16o.gz", "ZIMM", None, "gbm18775.sp3.gz", None),
    (D2011, "brus2830.11o.gz", "BRUS", None, "igs16571.sp3", "igs16571.clk"),
    (D2011, "cagz2830.11d", "CAGZ", None, "igs16571.sp3", "igs16571.clk"),
]


@pytest.mark.parametrize("folder, obs, sid, nav, sp3, clk", CASES, ids=[f"{c[2]}-{c[3] or c[4]}" for c in CASES])
def test_estimate_agrees_with_published_coordinates(tmp_path, folder, obs, sid, nav, sp3, clk):
    from ctt.formats.rinex_obs import read_obs_header

    _need(D2011 / "igs11P1657.ssc.gz", folder / obs)
    published = _sinex_positions(D2011 / "igs11P1657.ssc.gz")[sid]
    h = read_obs_header(folder / obs)
    # the station file holds the RINEX header's approximate marker position and antenna height
    st = _station_file(tmp_path, sid, h.approx_position_m, h.antenna_delta_hen_m[0])
    inputs = PairInputs(None, None, nav=str(folder / nav) if nav else None,
                        sp3=str(folder / sp3) if sp3 else None, clk=str(folder / clk) if clk else None)
    orbits, nav_header, reference, _ = load_orbits(inputs)
    day = measure_file(folder / obs, st, orbits, nav_header, MeasureOptions(), reference=reference)
    pc = day.info["position_check"]
    # the estimate is of the antenna reference point: published marker + the header's antenna height
    arp_published = geodesy.antenna_reference_point(published, float(h.antenna_delta_hen_m[0]), 0.0, 0.0)
    d = _enu(arp_published, pc["estimate_m"])
    # 2016 data against 2011 coordinates: plate motion of 2-3 cm/yr (from memory) adds ~0.1 m
    assert np.hypot(d[0], d[1]) < 1.0, d
    assert abs(d[2]) < 2.0, d
    # the check reports the estimate minus the station file (here the header): it must show the
    # header's own offset from the published coordinate (0.2-0.6 m for ALGO, ZIMM, BRUS; 1.5 m,
    # mostly up, for CAGZ) within the same accuracy
    header_off = _enu(published, np.asarray(h.approx_position_m))
    got = np.array([pc["d_east_m"], pc["d_north_m"], pc["d_up_m"]])
    print(sid, "estimate - published", np.round(d, 3), "estimate - header", np.round(got, 3),
          "published - header", np.round(-header_off, 3))
    assert np.hypot(*(got + header_off)[:2]) < 1.0
    assert abs((got + header_off)[2]) < 2.0
    assert pc["status"] == ("ok" if pc["distance_m"] <= 2.0 else "warning")
    assert pc["n_used"] > 20000  # a day of 30-s epochs, ~8 satellites each


def test_wrong_coordinates_are_found_and_the_day_flagged(tmp_path):
    """ALGO-ZIMM 2016-001 (about 6,000 km): station files metres off, as an a-priori list may be.

    ALGO displaced by (E +8, N -7, U +6) m (12.2 m) must be flagged, ZIMM by (E +2, N -2) m
    must draw a warning; the estimate minus the file recovers minus the displacement within
    the accuracy of a code solution above (1 m horizontal, 2 m up)."""
    from ctt.pipeline import PairOptions, run_pair
    from ctt.formats.rinex_obs import read_obs_header

    _need(D2011 / "igs11P1657.ssc.gz", D2016 / "algo0010.16o.gz", D2016 / "zimm0010.16o.gz")
    published = _sinex_positions(D2011 / "igs11P1657.ssc.gz")
    shift = {"ALGO": np.array([8.0, -7.0, 6.0]), "ZIMM": np.array([2.0, -2.0, 0.0])}
    st = {}
    for sid in ("ALGO", "ZIMM"):
        h = read_obs_header(D2016 / f"{sid.lower()}0010.16o.gz")
        st[sid] = _station_file(tmp_path, sid, _displaced(published[sid], shift[sid]), h.antenna_delta_hen_m[0])
    inputs = PairInputs(obs_a=str(D2016 / "algo0010.16o.gz"), obs_b=str(D2016 / "zimm0010.16o.gz"),
                        nav=str(D2016 / "brdc0010.16n"))
    res = run_pair(inputs, st["ALGO"], st["ZIMM"], PairOptions())
    s = res.summary
    for who, sid in (("A", "ALGO"), ("B", "ZIMM")):
        c = s["coordinates"][who]
        got = np.array([c["d_east_m"], c["d_north_m"], c["d_up_m"]])
        assert np.hypot(*(got + shift[sid])[:2]) < 1.0, (sid, got)
        assert abs((got + shift[sid])[2]) < 2.0, (sid, got)
    assert s["coordinates"]["A"]["status"] == "flagged"
    assert s["coordinates"]["B"]["status"] == "warning"
    assert len(s["day_flags"]) == 1 and s["day_flags"][0].startswith("ALGO")
    assert any(w.startswith("ZIMM") for w in s["warnings"])
    text = "\n".join(res.summary_lines())
    assert "DAY FLAGGED: ALGO" in text and "station coordinates are wrong" in text
    json.dumps(s, default=str)  # summary.json can hold it
