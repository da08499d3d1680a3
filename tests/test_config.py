"""Station and pair files: values, validation messages, TOML writing, input resolution."""

from __future__ import annotations

import json
import math
import os
import pathlib
import re
import shutil
import tomllib

import numpy as np
import pytest

from ctt import config as C
from ctt.errors import ConfigError, MissingInputError
from ctt.timescales import civil_to_ns, parse_iso

CFG = pathlib.Path(__file__).parent / "data" / "config"


def _station_text(**repl):
    text = (CFG / "laba.toml").read_text()
    for old, new in repl.items():
        text = text.replace(old, new)
    return text


def _write(tmp_path, text, name="labx.toml"):
    p = tmp_path / name
    p.write_text(text)
    return p


# ---------------------------------------------------------------- station files

def test_station_values():
    s = C.load_station(CFG / "laba.toml")
    assert s.id == "LABA"
    np.testing.assert_array_equal(s.position_m, [4034007.873, 502462.242, 4898445.157])
    np.testing.assert_array_equal(s.position_sigma_m, [0.02, 0.02, 0.02])
    assert s.frame == "ITRF2014" and s.epoch == 2021.0 and s.is_marker
    assert s.elevation_mask_deg == 10.0
    assert s.met_pattern == "{station_lower}{doy:03d}0.{yy:02d}m"
    assert len(s.delay_sets) == 2 and len(s.changes) == 1
    assert s.changes[0].expected_delay_change_ns == 3.2
    assert len(s.sha256) == 64
    with pytest.raises(ValueError):
        s.position_m[0] = 0.0          # read-only arrays in a frozen config
    b = C.load_station(CFG / "labb.toml")
    np.testing.assert_array_equal(b.position_sigma_m, [0.03, 0.02, 0.04])
    assert b.delay_sets[0].valid_until_ns is None           # open-ended
    assert b.delay_sets[0].valid_from_ns == civil_to_ns(2019, 6, 1)  # TOML date = 00:00 UTC


def test_hardware_delay_sign_and_uncertainty():
    s = C.load_station(CFG / "laba.toml")
    first, second = s.delay_sets
    # hardware = receiver + cable - reference (documented convention)
    assert first.hardware_ns("C1C") == pytest.approx(25.1 + 152.4 - 11.8, abs=1e-12)
    # uncertainty: independent terms in quadrature
    assert first.u_hardware_ns("C1C") == pytest.approx(math.sqrt(1.0 ** 2 + 0.2 ** 2 + 0.3 ** 2), rel=1e-12)
    assert second.u_hardware_ns("C5Q") == pytest.approx(math.sqrt(1.5 ** 2 + 0.2 ** 2 + 0.3 ** 2), rel=1e-12)


def test_cable_change_lowers_clock(tmp_path):
    base = C.load_station(CFG / "laba.toml").delay_sets[0]
    more = C.load_station(_write(tmp_path, _station_text(**{"cable_ns = 152.4": "cable_ns = 162.4"}))).delay_sets[0]
    raw = 1234.5
    assert (raw - more.hardware_ns("C1W")) - (raw - base.hardware_ns("C1W")) == pytest.approx(-10.0, abs=1e-9)


def test_iono_free_combination_of_delays():
    ds = C.load_station(CFG / "laba.toml").delay_sets[0]
    f1, f2 = 1575.42, 1227.60  # MHz, IS-GPS-200
    a = f1 ** 2 / (f1 ** 2 - f2 ** 2)
    comb = {"C1W": a, "C2W": 1 - a}
    expect = a * 25.3 + (1 - a) * 27.0 + 152.4 - 11.8
    assert ds.hardware_combined_ns(comb) == pytest.approx(expect, abs=1e-9)
    # default: the codes' receiver delays fully correlated (one calibration campaign), so by the
    # GUM law of propagation (JCGM 100:2008 eq. 16, r = 1) u = |a·1.0 + (1 − a)·1.0| = 1.0 ns
    assert ds.receiver_correlation == 1.0
    assert ds.u_hardware_combined_ns(comb) == pytest.approx(
        math.sqrt((a * 1.0 + (1 - a) * 1.0) ** 2 + 0.2 ** 2 + 0.3 ** 2), rel=1e-12)
    with pytest.raises(ValueError):
        ds.hardware_combined_ns({"C1W": 1.0, "C2W": 1.0})


def test_receiver_delay_correlation_and_calibrated_combination(tmp_path):
    # issue 12: 1.5 ns per code gave 4.48 ns iono-free when taken as independent (×2.98 for L1/L2);
    # the station file now states the correlation, or the combination's own delay and u
    f1, f2 = 1575.42, 1227.60  # MHz, IS-GPS-200
    a = f1 ** 2 / (f1 ** 2 - f2 ** 2)
    comb = {"C1W": a, "C2W": 1 - a}
    text = _station_text(**{"u_receiver_ns = 1.0": "u_receiver_ns = 1.5\nreceiver_correlation = 0.0"})
    ind = C.load_station(_write(tmp_path, text)).delay_sets[0]
    assert math.sqrt(a ** 2 + (1 - a) ** 2) == pytest.approx(2.98, abs=0.005)   # the amplification
    assert ind.u_hardware_combined_ns(comb) == pytest.approx(
        math.sqrt((1.5 * a) ** 2 + (1.5 * (1 - a)) ** 2 + 0.2 ** 2 + 0.3 ** 2), rel=1e-12)
    half = C.load_station(_write(tmp_path, text.replace("receiver_correlation = 0.0",
                                                        "receiver_correlation = 0.5"))).delay_sets[0]
    var = (1.5 * a) ** 2 + (1.5 * (1 - a)) ** 2 + 2 * 0.5 * (1.5 * a) * (1.5 * (1 - a))   # GUM eq. 16
    assert half.u_hardware_combined_ns(comb) == pytest.approx(math.sqrt(var + 0.2 ** 2 + 0.3 ** 2), rel=1e-12)
    # a calibrated iono-free delay replaces the combination of the codes, with its own u
    cal = C.load_station(_write(tmp_path, _station_text(**{"u_receiver_ns = 1.0": (
        'u_receiver_ns = 1.0\ncombined_ns = { "C1W+C2W" = 22.0 }\nu_combined_ns = 0.7')}))).delay_sets[0]
    assert cal.hardware_combined_ns(comb) == pytest.approx(22.0 + 152.4 - 11.8, abs=1e-9)
    assert cal.u_hardware_combined_ns(comb) == pytest.approx(math.sqrt(0.7 ** 2 + 0.2 ** 2 + 0.3 ** 2), rel=1e-12)
    # written back and read again: the same set
    again = C.load_station(_write(tmp_path, C.dump_station(C.load_station(_write(tmp_path, text)))))
    assert again.delay_sets[0].receiver_correlation == 0.0
    # a correlation outside 0..1 is refused naming the key
    with pytest.raises(ConfigError, match="receiver_correlation"):
        C.load_station(_write(tmp_path, text.replace("receiver_correlation = 0.0", "receiver_correlation = 1.5")))


def test_delays_at_boundaries():
    s = C.load_station(CFG / "laba.toml")
    t = parse_iso("2021-03-01T12:00:00Z")
    assert s.delays_at(t - 1).cable_ns == 152.4   # valid_until is exclusive
    assert s.delays_at(t).cable_ns == 155.6
    with pytest.raises(ConfigError) as ei:
        s.delays_at(parse_iso("2019-12-31T23:59:59Z"))
    assert "laba.toml" in str(ei.value) and "no delay set covers 2019-12-31T23:59:59" in str(ei.value)
    day = s.delay_sets_between(parse_iso("2021-03-01"), parse_iso("2021-03-02"))
    assert [d.cable_ns for d in day] == [152.4, 155.6]


def test_missing_code_names_file_and_key():
    ds = C.load_station(CFG / "labb.toml").delay_sets[0]
    with pytest.raises(ConfigError) as ei:
        ds.hardware_ns("C5Q")
    msg = str(ei.value)
    assert "labb.toml" in msg and "delays[1].receiver_ns.C5Q" in msg


def test_bad_number_message(tmp_path):
    p = _write(tmp_path, _station_text(**{"cable_ns = 152.4": "cable_ns = 'abc'"}))
    with pytest.raises(ConfigError) as ei:
        C.load_station(p)
    assert str(ei.value) == f"{p}: [delays[1].cable_ns]: expected a delay in ns, found 'abc'"


@pytest.mark.parametrize("old,new,key,words", [
    ('id = "LABA"', 'id = "LA"', "station.id", "4-9 letters"),
    ("z_m = 4898445.157", "z_m = 489844.157", "station.position", "geocentric radius"),
    ("sigma_m = 0.02", "sigma_mm = 0.02", "station.position.sigma_mm", "unknown key"),
    ("valid_until = 2021-03-01T12:00:00Z", "valid_until = 2021-03-02T12:00:00Z", "delays[2].valid_from", "overlap"),
    ("valid_until = 2021-03-01T12:00:00Z", "valid_until = 2019-03-01T12:00:00Z", "delays[1].valid_until", "after valid_from"),
    ("C1C = 25.1, C1W", "P1 = 25.1, C1W", "delays[1].receiver_ns.P1", "RINEX 3 observation code"),
    ("u_cable_ns = 0.2", "u_cable_ns = -0.2", "delays[1].u_cable_ns", ">= 0"),
    ("elevation_mask_deg = 10.0", "elevation_mask_deg = 95.0", "station.elevation_mask_deg", "<= 90"),
    ('pattern = "{station_lower}', 'pattern = "{stn}', "station.met.pattern", "unknown placeholder"),
    ("what = \"antenna cable replaced\"", "", "changes[1].what", "missing"),
])
def test_station_validation(tmp_path, old, new, key, words):
    text = _station_text(**{old: new})
    assert text != (CFG / "laba.toml").read_text()
    p = _write(tmp_path, text)
    with pytest.raises(ConfigError) as ei:
        C.load_station(p)
    keys = [e.key for e in ei.value.problems]
    assert key in keys, keys
    err = ei.value.problems[keys.index(key)]
    assert err.path == str(p)
    if words:
        assert words in err.problem


def test_open_earlier_set_overlaps(tmp_path):
    p = _write(tmp_path, _station_text(**{"valid_until = 2021-03-01T12:00:00Z\n": ""}))
    with pytest.raises(ConfigError, match="overlap"):
        C.load_station(p)


def test_all_problems_collected(tmp_path):
    p = _write(tmp_path, _station_text(**{"cable_ns = 152.4": "cable_ns = 'abc'", 'id = "LABA"': 'id = "L-A"'}))
    with pytest.raises(ConfigError) as ei:
        C.load_station(p)
    keys = {e.key for e in ei.value.problems}
    assert {"station.id", "delays[1].cable_ns"} <= keys


def test_toml_syntax_error_names_line(tmp_path):
    p = _write(tmp_path, "[station]\nid = \n")
    with pytest.raises(ConfigError) as ei:
        C.load_station(p)
    assert str(p) in str(ei.value) and "line 2" in str(ei.value)  # tomllib reports "(at line 2, column 6)"


def test_dump_station_round_trip(tmp_path):
    for name in ("laba.toml", "labb.toml"):
        s = C.load_station(CFG / name)
        text = C.dump_station(s)
        tomllib.loads(text)  # valid TOML (stdlib parser as the reference)
        back = C.load_station(_write(tmp_path, text, name))
        for f in ("id", "name", "frame", "epoch", "is_marker", "elevation_mask_deg", "met_pattern",
                  "delay_sets", "changes"):
            assert getattr(back, f) == getattr(s, f), f
        np.testing.assert_array_equal(back.position_m, s.position_m)
        np.testing.assert_array_equal(back.position_sigma_m, s.position_sigma_m)
        np.testing.assert_array_equal(back.antenna.delta_hen_m, s.antenna.delta_hen_m)
        assert back.content_sha256 == s.content_sha256


def test_dump_sub_second_times_and_escapes(tmp_path):
    s = C.load_station(CFG / "labb.toml")
    import dataclasses
    ds = dataclasses.replace(s.delay_sets[0], valid_from_ns=s.delay_sets[0].valid_from_ns + 123_456_000,
                             note='quote " and backslash \\ and é')
    s2 = dataclasses.replace(s, delay_sets=(ds,), name="Invented \"B\"")
    back = C.load_station(_write(tmp_path, C.dump_station(s2)))
    assert back.delay_sets[0].valid_from_ns == ds.valid_from_ns
    assert back.delay_sets[0].note == ds.note and back.name == s2.name


def test_arp_against_pyproj():
    # Reference: PROJ's geodetic conversion on WGS 84 gives the ellipsoid normal;
    # the ARP must be 0.1 m (delta_h) along it.
    pyproj = pytest.importorskip("pyproj")
    s = C.load_station(CFG / "laba.toml")
    tr = pyproj.Transformer.from_crs("EPSG:4978", "EPSG:4979", always_xy=True)
    lon, lat, h = tr.transform(*s.position_m)
    lon2, lat2, h2 = tr.transform(*s.arp_m)
    assert h2 - h == pytest.approx(0.1, abs=1e-6)          # 1 um: rotation is exact to rounding
    assert abs(lat2 - lat) * 111e3 < 1e-6 and abs(lon2 - lon) * 111e3 < 1e-6


# ---------------------------------------------------------------- pair files

@pytest.fixture()
def pair_dir(tmp_path):
    for n in ("laba.toml", "labb.toml", "pair.toml"):
        shutil.copy(CFG / n, tmp_path / n)
    (tmp_path / "data" / "prod").mkdir(parents=True)
    return tmp_path


def test_pair_values(pair_dir):
    p = C.load_pair(pair_dir / "pair.toml")
    assert p.name == "laba-labb"
    assert p.station_a.id == "LABA" and p.station_b.id == "LABB"
    assert p.processing.mode == "tracks" and p.processing.min_common_sats == 3
    assert p.processing.mad_k == 3.5 and not p.processing.no_troposphere
    assert p.max_gap_s == 1800.0
    assert p.elevation_mask_deg() == 10.0
    assert p.archive_path == pair_dir / "out" / "ctt.sqlite"
    assert p.data_root == (pair_dir / "data").resolve()
    assert len(p.config_hash) == 64


def test_config_hash_stable_and_sensitive(pair_dir):
    h0 = C.load_pair(pair_dir / "pair.toml").config_hash
    txt = (pair_dir / "pair.toml").read_text()
    (pair_dir / "pair.toml").write_text("# another comment\n" + txt.replace("mode = \"tracks\"", "mode   =   'tracks'"))
    assert C.load_pair(pair_dir / "pair.toml").config_hash == h0     # formatting only
    txt2 = (pair_dir / "pair.toml").read_text()
    (pair_dir / "pair.toml").write_text(txt2.replace('dir = "out"', 'dir = "elsewhere"')
                                        .replace("min_common_sats = 3", "min_common_sats = 3\nmad_k = 3.5"))
    assert C.load_pair(pair_dir / "pair.toml").config_hash == h0     # output place, explicit default
    (pair_dir / "pair.toml").write_text(txt2.replace("min_common_sats = 3", "min_common_sats = 4"))
    assert C.load_pair(pair_dir / "pair.toml").config_hash != h0     # a processing option
    (pair_dir / "pair.toml").write_text(txt2)
    st = (pair_dir / "labb.toml").read_text()
    (pair_dir / "labb.toml").write_text(st.replace("cable_ns = 80.0", "cable_ns = 80.5"))
    assert C.load_pair(pair_dir / "pair.toml").config_hash != h0     # a delay changed


def test_placeholders():
    f = C.pattern_fields("LABA00XYZ", "2021-01-01")
    # 2021-01-01 is a Friday in GPS week 2138 (week started 2020-12-27; common practice / from memory)
    assert (f["gpsweek"], f["gpsdow"]) == (2138, 5)
    assert (f["doy"], f["yy"], f["station"], f["STATION"], f["ID"]) == (1, 21, "laba", "LABA", "LABA00XYZ")
    assert C.format_pattern("{station}{doy:03d}0.{yy:02d}o", "LABA", "2021-02-03") == "laba0340.21o"
    assert C.format_pattern("{ID}_R_{yyyy}{ddd}0000_01D_30S_MO.crx.gz", "LABA00XYZ", "2020-12-31") == \
        "LABA00XYZ_R_20203660000_01D_30S_MO.crx.gz"


def test_resolve_inputs_alternatives(pair_dir):
    d = pair_dir / "data"
    (d / "laba0010.21o").write_text("x")                 # third alternative for A
    (d / "labb0010.21d.Z").write_text("x")               # second alternative for B
    (d / "LABB00XXX_R_20210010000_01D_30S_MO.crx.gz").write_text("x")  # first alternative wins
    (d / "brdc0010.21n.gz").write_text("x")
    p = C.load_pair(pair_dir / "pair.toml")
    got = p.resolve_inputs("2021-01-01")
    assert got["obs_a"].name == "laba0010.21o"
    assert got["obs_b"].name == "LABB00XXX_R_20210010000_01D_30S_MO.crx.gz"
    assert got["nav"].name == "brdc0010.21n.gz"
    assert got["sp3"] is None and got["met_a"] is None          # optional and absent
    (d / "prod" / "igs21385.sp3").write_text("x")
    (d / "laba0010.21m").write_text("x")                        # station A's own met pattern
    got = p.resolve_inputs("2021-01-01")
    assert got["sp3"].name == "igs21385.sp3" and got["met_a"].name == "laba0010.21m"


def test_missing_input_names_pattern_and_path(pair_dir):
    (pair_dir / "data" / "laba0010.21o").write_text("x")
    p = C.load_pair(pair_dir / "pair.toml")
    with pytest.raises(MissingInputError) as ei:
        p.resolve_inputs("2021-01-01")
    msg = str(ei.value)
    assert "obs_b" in msg and "{station}{doy:03d}0.{yy:02d}o" in msg and "labb0010.21o" in msg


def test_glob_pattern_and_station_override(pair_dir):
    txt = (pair_dir / "pair.toml").read_text()
    (pair_dir / "pair.toml").write_text(txt + '\n[inputs.a]\nobs = "a/{STATION}00*_R_{yyyy}{ddd}0000_01D_30S_MO.rnx"\n')
    (pair_dir / "data" / "a").mkdir()
    (pair_dir / "data" / "a" / "LABA00ABC_R_20210010000_01D_30S_MO.rnx").write_text("x")
    (pair_dir / "data" / "labb0010.21o").write_text("x")
    (pair_dir / "data" / "brdc0010.21n.gz").write_text("x")
    got = C.load_pair(pair_dir / "pair.toml").resolve_inputs("2021-01-01")
    assert got["obs_a"].name == "LABA00ABC_R_20210010000_01D_30S_MO.rnx"


def test_paths_cannot_escape_data_root(pair_dir, tmp_path_factory):
    outside = tmp_path_factory.mktemp("outside")
    (outside / "brdc0010.21n.gz").write_text("x")
    txt = (pair_dir / "pair.toml").read_text()
    (pair_dir / "pair.toml").write_text(txt.replace('nav = "brdc', f'nav = "../../{outside.name}/brdc'))
    (pair_dir / "data" / "laba0010.21o").write_text("x")
    (pair_dir / "data" / "labb0010.21o").write_text("x")
    p = C.load_pair(pair_dir / "pair.toml")
    with pytest.raises(ConfigError) as ei:
        p.resolve_inputs("2021-01-01")
    assert "inputs.nav" in str(ei.value) and "inside data_root" in str(ei.value)
    # a symbolic link inside the root pointing outside it is refused too
    (pair_dir / "pair.toml").write_text(txt)
    os.symlink(outside / "brdc0010.21n.gz", pair_dir / "data" / "brdc0010.21n.gz")
    with pytest.raises(ConfigError, match="inside data_root"):
        C.load_pair(pair_dir / "pair.toml").resolve_inputs("2021-01-01")


@pytest.mark.parametrize("old,new,key", [
    ('station_b = "labb.toml"', 'station_b = "laba.toml"', "pair.station_b"),
    ('station_b = "labb.toml"', 'station_b = "nope.toml"', "pair.station_b"),
    ('data_root = "data"', 'data_root = "nodata"', "pair.data_root"),
    ('mode = "tracks"', 'mode = "track"', "processing.mode"),
    ("min_common_sats = 3", "min_common_sats = 0", "processing.min_common_sats"),
    ('mode = "tracks"', 'mode = "tracks"\nglonass_ifb = "maybe"', "processing.glonass_ifb"),
    ("max_gap_s = 1800.0", "max_gap_s = -1.0", "events.max_gap_s"),
    ('nav = "brdc{doy:03d}', 'nav = "brdc{day:03d}', "inputs.nav"),
    ('optional = ["met", "sp3"]', 'optional = ["obs"]', "inputs.optional"),
])
def test_pair_validation(pair_dir, old, new, key):
    txt = (pair_dir / "pair.toml").read_text()
    assert old in txt
    (pair_dir / "pair.toml").write_text(txt.replace(old, new))
    with pytest.raises(ConfigError) as ei:
        C.load_pair(pair_dir / "pair.toml")
    assert key in [e.key for e in ei.value.problems]


def test_pair_reports_station_file_problems(pair_dir):
    st = (pair_dir / "labb.toml").read_text()
    (pair_dir / "labb.toml").write_text(st.replace("cable_ns = 80.0", "cable_ns = \"x\""))
    with pytest.raises(ConfigError) as ei:
        C.load_pair(pair_dir / "pair.toml")
    assert any(e.path.endswith("labb.toml") and e.key == "delays[1].cable_ns" for e in ei.value.problems)


# ---------------------------------------------------------------- ctt check-config

def _fill_day(pair_dir, doy="001", yy="21"):
    for name in (f"laba{doy}0.{yy}o", f"labb{doy}0.{yy}o", f"brdc{doy}0.{yy}n.gz"):
        (pair_dir / "data" / name).write_text("x")


def test_check_config_ok(pair_dir, capsys):
    from ctt.cli import main
    _fill_day(pair_dir)
    assert main(["check-config", str(pair_dir / "pair.toml"), "--date", "2021-01-01"]) == 0
    out = capsys.readouterr().out
    assert "ok: pair laba-labb" in out and "obs_a=laba0010.21o" in out and "problem" not in out


def test_check_config_latest_available(pair_dir, capsys):
    from ctt.commands.check_config import check, latest_available
    _fill_day(pair_dir, "001")
    _fill_day(pair_dir, "003")
    (pair_dir / "data" / "labb0050.21o").write_text("x")       # only B on day 5
    import datetime
    p = C.load_pair(pair_dir / "pair.toml")
    assert latest_available(p, today=datetime.date(2021, 1, 10)) == datetime.date(2021, 1, 3)
    problems, oks = check(pair_dir / "pair.toml", today=datetime.date(2021, 1, 10))
    assert problems == [] and any("2021-01-03" in o for o in oks)


def test_check_config_lists_every_problem(pair_dir, capsys):
    from ctt.cli import main
    st = (pair_dir / "labb.toml").read_text()
    (pair_dir / "labb.toml").write_text(st.replace("cable_ns = 80.0", "cable_ns = 'x'")
                                        .replace('id = "LABB"', 'id = "B"'))
    assert main(["check-config", str(pair_dir / "pair.toml"), "--date", "2021-01-01"]) == 2
    lines = [ln for ln in capsys.readouterr().out.splitlines() if ln.startswith("problem:")]
    assert len(lines) == 2
    assert any("[delays[1].cable_ns]" in ln for ln in lines) and any("[station.id]" in ln for ln in lines)


def test_check_config_missing_inputs_and_uncovered_dates(pair_dir, capsys):
    from ctt.cli import main
    _fill_day(pair_dir, "001", "19")          # 2019-01-01: before LABA's first delay set (2020-01-01)
    (pair_dir / "data" / "labb0010.19o").unlink()
    assert main(["check-config", str(pair_dir / "pair.toml"), "--date", "2019-01-01"]) == 2
    out = capsys.readouterr().out
    assert "no obs_b file for 2019-01-01" in out
    assert "laba.toml: [delays]: no delay set covers 2019-01-01T00:00:00.000" in out
    assert "needed for 2019-01-01" in out


# ---------------------------------------------------------------- outputs confined, one validation per field

def _with_output(pair_dir, output_table: str):
    txt = (pair_dir / "pair.toml").read_text()
    head, _, rest = txt.partition("[output]")
    tail = rest[rest.find("\n["):] if "\n[" in rest else ""
    (pair_dir / "pair.toml").write_text(head + output_table + "\n" + tail)


def test_outputs_stay_inside_the_output_root(pair_dir, tmp_path_factory):
    """README "Where outputs go": the pair file's folder, or [output] root; nothing escapes it."""
    _with_output(pair_dir, '[output]\ndir = "runs"')
    p = C.load_pair(pair_dir / "pair.toml")
    assert p.output_root == pair_dir and p.archive_path == pair_dir / "runs" / "ctt.sqlite"
    elsewhere = tmp_path_factory.mktemp("srv")
    _with_output(pair_dir, f'[output]\nroot = "{elsewhere.as_posix()}"\ndir = "out"\narchive = "a/ctt.sqlite"')
    p = C.load_pair(pair_dir / "pair.toml")
    assert p.output_dir == elsewhere / "out" and p.archive_path == elsewhere / "a" / "ctt.sqlite"
    assert p.report_path == elsewhere / "out" / "report.html"
    for table, key in (('dir = "../escaped_out"', "output.dir"),
                       (f'dir = "{elsewhere.as_posix()}"', "output.dir"),
                       ('archive = "/tmp/ctt.sqlite"', "output.archive"),
                       ('report = "out/../../report.html"', "output.report"),
                       ('report = 5', "output.report"),
                       ('archive = "out"', "output.archive")):   # a folder where a file is expected
        (pair_dir / "out").mkdir(exist_ok=True)
        _with_output(pair_dir, "[output]\n" + table)
        with pytest.raises(ConfigError) as ei:
            C.load_pair(pair_dir / "pair.toml")
        assert key in [e.key for e in ei.value.problems], (table, str(ei.value))
    # a symbolic link inside the root that points outside it is refused as well
    os.symlink(elsewhere, pair_dir / "link")
    _with_output(pair_dir, '[output]\ndir = "link/out"')
    with pytest.raises(ConfigError, match="inside the output root"):
        C.load_pair(pair_dir / "pair.toml")


@pytest.mark.parametrize("name", ["..", ".", ".hidden", "a/b", "-x", "x" * 65])
def test_pair_name_is_a_plain_folder_name(pair_dir, name):
    txt = (pair_dir / "pair.toml").read_text()
    (pair_dir / "pair.toml").write_text(txt.replace("[pair]\n", f'[pair]\nname = "{name}"\n', 1)
                                        if "name =" not in txt.split("[inputs]")[0]
                                        else re.sub(r'name = "[^"]*"', f'name = "{name}"', txt, count=1))
    with pytest.raises(ConfigError) as ei:
        C.load_pair(pair_dir / "pair.toml")
    assert ei.value.key == "pair.name"


@pytest.mark.parametrize("pattern,words", [
    ("brdc{doy:999999999}", "width up to 99"),
    ("brdc{station.__class__}", "unknown placeholder"),
    ("brdc{id[0]}", "unknown placeholder"),
    ("brdc{id!r}", "conversions"),
    ("brdc{doy:>5}", "format such as"),
])
def test_patterns_allow_only_the_documented_placeholders(pattern, words):
    assert words in C.pattern_problem(pattern)


def test_documented_patterns_pass():
    for p in ("{ID}_R_{yyyy}{doy:03d}0000_01D_30S_MO.crx.gz", "{station}{doy:03d}0.{yy:02d}d.Z",
              "prod/igs{gpsweek}{gpsdow}.sp3.Z", "{station}{ddd}{session}.{yy:02d}o"):
        assert C.pattern_problem(p) is None, p


@pytest.mark.parametrize("key,bad,words", [
    ("elevation_mask_deg", -5.0, ">= 0"), ("elevation_mask_deg", 100.0, "<= 90"),
    ("smoothing_s", -600.0, ">= 0"), ("mad_k", -1.0, "> 0"), ("min_common_sats", 0, ">= 1"),
    ("bin_s", 0.0, "> 0"), ("codes", ["FOO", "BAR"], "RINEX 3 codes"), ("systems", ["X"], "system letters"),
])
def test_pair_file_and_command_line_share_one_validation(pair_dir, key, bad, words):
    """The same value is refused with the same words by the pair file and the command line."""
    from ctt.commands._common import OPTION_FIELDS, checked
    from ctt.errors import UsageError

    with pytest.raises(ValueError, match=re.escape(words)):
        C.check_processing_value(key, bad)
    option = next(o for o, f in OPTION_FIELDS.items() if f == key)
    with pytest.raises(UsageError) as cli:
        checked(option, tuple(bad) if isinstance(bad, list) else bad)
    txt = (pair_dir / "pair.toml").read_text()
    value = json.dumps(bad)
    (pair_dir / "pair.toml").write_text(txt.replace("[processing]\n", f"[processing]\n{key} = {value}\n", 1)
                                        if f"\n{key} =" not in txt
                                        else re.sub(rf"\n{key} = [^\n]*", f"\n{key} = {value}", txt, count=1))
    with pytest.raises(ConfigError) as cfg:
        C.load_pair(pair_dir / "pair.toml")
    problem = next(e for e in cfg.value.problems if e.key == f"processing.{key}")
    assert words in problem.problem and words in str(cli.value)
