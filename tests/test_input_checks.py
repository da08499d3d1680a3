"""Input files checked against their station files (marker name, approximate position).

Checks on the invented demo (data_demo/, whose truth is in data_demo/scenario.toml) and on
real RINEX headers of the open data set (../shared/data/real-2021-001, IGS/EUREF files).
"""

from __future__ import annotations

import json
import pathlib

import numpy as np
import pytest

from ctt import config as C
from ctt.cli import main
from ctt.errors import EXIT_USAGE, UsageError

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMO = ROOT / "data_demo"
OBS_A = DEMO / "ALDR00XXX_R_20210010000_01D_30S_MO.crx"
OBS_B = DEMO / "BRKW00XXX_R_20210010000_01D_30S_MO.crx"
NAV = DEMO / "BRDC00XXX_R_20210010000_01D_MN.rnx"


def _station(tmp_path, sid, xyz, marker_names=None, name="st.toml"):
    xyz = [float(v) for v in xyz]
    mn = ("marker_names = [" + ", ".join(f'"{m}"' for m in marker_names) + "]\n") if marker_names else ""
    p = tmp_path / name
    p.write_text(f'[station]\nid = "{sid}"\n{mn}[station.position]\nx_m = {xyz[0]!r}\ny_m = {xyz[1]!r}\n'
                 f'z_m = {xyz[2]!r}\nsigma_m = 1.0\n[[delays]]\nvalid_from = 2010-01-01\n'
                 'receiver_ns = { C1C = 0.0, C1W = 0.0, C2W = 0.0 }\nu_receiver_ns = 5.0\ncable_ns = 0.0\n'
                 'u_cable_ns = 1.0\nreference_ns = 0.0\nu_reference_ns = 1.0\n')
    return C.load_station(p)


def test_marker_names_key_is_read_and_written(tmp_path):
    st = _station(tmp_path, "DLFT", (3924687.702, 301132.766, 5001910.775), ["DELFT-16"])
    assert st.marker_names == ("DELFT-16",)
    again = tmp_path / "again.toml"
    again.write_text(C.dump_station(st))
    assert C.load_station(again).marker_names == ("DELFT-16",)
    bad = tmp_path / "bad.toml"
    bad.write_text(again.read_text().replace('marker_names = ["DELFT-16"]', "marker_names = 16"))
    with pytest.raises(C.ConfigError, match="station.marker_names"):
        C.load_station(bad)


def test_real_headers_against_station_files(tmp_path, shared_data):
    """Real headers: DELF's file calls it 'DELFT-16' (EUREF/IGS file, real-2021-001)."""
    from ctt.formats.rinex_obs import read_obs_header

    h = read_obs_header(shared_data / "delf0010.21d")
    assert h.marker_name.strip() == "DELFT-16"
    # the id's first four characters match (RINEX 2 four-character station names, common practice)
    delf = _station(tmp_path, "DELF", h.approx_position_m, name="delf.toml")
    assert C.check_station_data(delf, "delf0010.21d", h.marker_name, h.approx_position_m) == []
    # a station known by another id needs the name listed
    dlft = _station(tmp_path, "DLFT", h.approx_position_m, name="dlft.toml")
    with pytest.raises(UsageError, match="'DELFT-16' does not match station 'DLFT'"):
        C.check_station_data(dlft, "delf0010.21d", h.marker_name, h.approx_position_m)
    dlft = _station(tmp_path, "DLFT", h.approx_position_m, ["DELFT-16"], name="dlft2.toml")
    assert C.check_station_data(dlft, "delf0010.21d", h.marker_name, h.approx_position_m) == []
    # WSRA's file against DELF's station file: about 180 km apart (data README)
    w = read_obs_header(shared_data / "wsra0010.21d")
    with pytest.raises(UsageError) as e:
        C.check_station_data(delf, "wsra0010.21d", w.marker_name, w.approx_position_m)
    msg = str(e.value)
    assert "wsra0010.21d" in msg and str(delf.path) in msg and "'WSRA'" in msg and "'DELF'" in msg
    d_km = np.linalg.norm(w.approx_position_m - h.approx_position_m) / 1000
    assert f"{d_km:.1f} km" in msg and 150 < d_km < 200
    # overridden: the same problems come back as warnings
    warns = C.check_station_data(delf, "wsra0010.21d", w.marker_name, w.approx_position_m, force=True)
    assert len(warns) == 2 and all("--force-inputs" in x for x in warns)


def test_position_thresholds(tmp_path):
    xyz = np.array([4828758.46, -418215.81, 4133728.27])
    st = _station(tmp_path, "ALDR", xyz)
    up = xyz / np.linalg.norm(xyz)
    assert C.check_station_data(st, "f", "ALDR", xyz + 99.0 * up) == []
    w = C.check_station_data(st, "f", "ALDR", xyz + 150.0 * up)
    assert len(w) == 1 and "150 m" in w[0]
    with pytest.raises(UsageError, match="1.5 km"):
        C.check_station_data(st, "f", "ALDR", xyz + 1500.0 * up)
    # a header without a position (zeros) is not refused, only noted
    w = C.check_station_data(st, "f", "ALDR", np.zeros(3))
    assert len(w) == 1 and "no approximate position" in w[0]


def _pair_args(out, obs_a, obs_b, *extra):
    return ["pair", "--obs-a", str(obs_a), "--obs-b", str(obs_b), "--nav", str(NAV),
            "--station-a", str(DEMO / "aldr.toml"), "--station-b", str(DEMO / "brkw.toml"),
            "--out", str(out), *extra]


def test_swapped_demo_files_are_refused_then_forced(tmp_path, capsys):
    # refused before any processing: exit 2, naming both observation files and both station files
    assert main(_pair_args(tmp_path / "r", OBS_B, OBS_A)) == EXIT_USAGE
    err = capsys.readouterr().err
    for name in (OBS_A.name, OBS_B.name, "aldr.toml", "brkw.toml", "'ALDR'", "'BRKW'", "445.9 km"):
        assert name in err
    assert not (tmp_path / "r").exists()
    # forced: processed, with the warnings printed and recorded; the position estimate then
    # finds each file's antenna 446 km from its (wrong) station file and flags the day
    assert main(_pair_args(tmp_path / "f", OBS_B, OBS_A, "--force-inputs")) == 0
    out = capsys.readouterr().out
    assert "warning:" in out and "DAY FLAGGED" in out
    s = json.loads((tmp_path / "f" / "summary.json").read_text())
    assert sum("MARKER NAME" in w for w in s["warnings"]) == 2
    assert len(s["day_flags"]) == 2
    # the demo sites are 445.9 km apart (data_demo/scenario.toml); code positioning finds that
    assert s["coordinates"]["A"]["distance_m"] == pytest.approx(445.9e3, abs=0.2e3)


def test_same_station_as_a_and_b_is_refused(tmp_path, capsys):
    args = ["pair", "--obs-a", str(OBS_A), "--obs-b", str(OBS_A), "--nav", str(NAV),
            "--station-a", str(DEMO / "aldr.toml"), "--station-b", str(DEMO / "aldr.toml"), "--out", str(tmp_path)]
    assert main(args) == EXIT_USAGE
    assert "same station 'ALDR'" in capsys.readouterr().err


def test_measure_with_another_stations_file_is_refused(tmp_path, capsys):
    args = ["measure", str(OBS_B), "--nav", str(NAV), "--station", str(DEMO / "aldr.toml")]
    assert main(args) == EXIT_USAGE
    err = capsys.readouterr().err
    assert OBS_B.name in err and "aldr.toml" in err and "'BRKW'" in err
    args = ["tracks", str(OBS_B), "--nav", str(NAV), "--station", str(DEMO / "aldr.toml"),
            "--out", str(tmp_path / "x.cggtts")]
    assert main(args) == EXIT_USAGE
    assert not (tmp_path / "x.cggtts").exists()


def test_partner_track_file_lab_and_position(tmp_path):
    from ctt.formats.cggtts import CggttsHeader
    from ctt.pipeline import check_track_file

    brkw = C.load_station(DEMO / "brkw.toml")
    aldr = C.load_station(DEMO / "aldr.toml")
    x, y, z = (float(v) for v in brkw.position_m)
    good = CggttsHeader(lab="BRKW", x_m=x, y_m=y, z_m=z)
    assert check_track_file(good, brkw, "BRKW59215.cggtts") == []
    with pytest.raises(UsageError, match="LAB 'BRKW' does not match station 'ALDR'"):
        check_track_file(good, aldr, "BRKW59215.cggtts")
    other = CggttsHeader(lab="BRKW", x_m=x + 3000.0, y_m=y, z_m=z)
    with pytest.raises(UsageError, match="3.0 km from the position of BRKW"):
        check_track_file(other, brkw, "BRKW59215.cggtts")


def test_daily_refuses_swapped_files_with_exit_2(tmp_path, capsys):
    import shutil

    for f in DEMO.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    pair = tmp_path / "aldr-brkw.toml"
    text = pair.read_text().replace("[processing]", '[inputs.a]\nobs = "BRKW00XXX_R_{yyyy}{doy:03d}0000_01D_30S_MO.crx"'
                                                    '\n\n[processing]')
    pair.write_text(text)
    assert main(["daily", "--config", str(pair), "--date", "2021-01-01", "--no-report"]) == EXIT_USAGE
    err = capsys.readouterr().err
    assert "BRKW00XXX" in err and "aldr.toml" in err
