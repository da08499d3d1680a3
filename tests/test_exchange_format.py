"""A station processed by ctt, written as CGGTTS 2E, read back and differenced with the
other station: the same clock A − clock B as from the observation files.

The format keeps REFSYS in 0.1 ns (CGGTTS 2E field layout, from memory; see
ctt.exports), so each track value is rounded by at most 0.05 ns; a point, a
weighted mean of such values, moves by at most that much.
Demo data (invented, simulated).
"""

import pathlib

import numpy as np
import pytest

from ctt.config import load_station
from ctt.exports import station_tracks_to_cggtts
from ctt.formats.cggtts import CggttsHeader, read_cggtts, write_cggtts
from ctt.measure import MeasureOptions
from ctt.pipeline import PairInputs, PairOptions, load_orbits, measure_file, run_pair

DEMO = pathlib.Path(__file__).resolve().parents[1] / "data_demo"


@pytest.mark.slow
def test_pair_from_a_track_file_matches_pair_from_observations(tmp_path):
    obs_a = str(next(DEMO.glob("ALDR*_MO.crx")))
    obs_b = str(next(DEMO.glob("BRKW*_MO.crx")))
    nav = str(next(DEMO.glob("BRDC*_MN.rnx")))
    sta, stb = load_station(DEMO / "aldr.toml"), load_station(DEMO / "brkw.toml")
    m = MeasureOptions(systems=("G", "E"))
    opts = PairOptions(mode="tracks", measure=m)
    inputs = PairInputs(obs_a=obs_a, obs_b=obs_b, nav=nav, met_a=str(DEMO / "aldr0010.21m"),
                        met_b=str(DEMO / "brkw0010.21m"))
    direct = run_pair(inputs, sta, stb, opts)

    orbits = load_orbits(inputs, "auto")
    day_b = measure_file(obs_b, stb, orbits[0], orbits[1], m, met_path=inputs.met_b, reference="broadcast")
    tracks = station_tracks_to_cggtts(day_b.table)
    f = tmp_path / "BRKW59215.cggtts"
    write_cggtts(f, tracks, CggttsHeader(lab="BRKW", x_m=1.0, y_m=2.0, z_m=3.0))
    hdr, back = read_cggtts(f)
    assert len(back) == len(tracks) and hdr.lab == "BRKW"
    np.testing.assert_allclose(back["refsys_ns"], tracks["refsys_ns"], atol=0.05 + 1e-9)  # 0.1 ns field

    via_file = run_pair(PairInputs(obs_a=obs_a, obs_b=None, nav=nav, met_a=inputs.met_a, tracks_b=str(f)),
                        sta, stb, opts)
    x = direct.offset_by_system.set_index(["system", "time"])
    y = via_file.offset_by_system.set_index(["system", "time"])
    ok = (x["flag"] == "ok").reindex(y.index).fillna(False) & (y["flag"] == "ok")
    common = y.index[ok.to_numpy()]
    d = (x.loc[common, "offset_ns"] - y.loc[common, "offset_ns"]).to_numpy()
    print(f"{len(common)} common points, max |diff| {np.max(np.abs(d)):.4f} ns")
    assert len(common) > 150
    # identical except for the 0.1 ns rounding of REFSYS and the rejection decisions it can tip
    assert np.median(np.abs(d)) <= 0.05
    assert np.mean(np.abs(d) <= 0.05 + 1e-9) > 0.95
