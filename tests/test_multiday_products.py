"""Products over several files: SP3 and RINEX clock files of neighbouring days merged.

Real IGS products of ../shared/data (International GNSS Service, CC BY 4.0):
real-2011-283 ships the SP3 files of the day before and after; the RINEX
clock file igs16571.clk is split here into two files to check the merge
against the original. Sources are named beside each check.
"""

from __future__ import annotations

import gzip
import pathlib
import shutil

import numpy as np
import pandas as pd
import pytest

from ctt import config as C
from ctt import orbits as P
from ctt.formats import rinex_clock as CLK
from ctt.timescales import NS_PER_S, civil_to_ns

REPO = pathlib.Path(__file__).resolve().parents[1]
STATIONS = REPO / "tests" / "data" / "stations"
DAY = int(civil_to_ns(2011, 10, 10))          # GPS time (SP3 files in GPS time, header '%c ... GPS')


def _measure(set_dir, obs, station, sp3, clk=()):
    from ctt.measure import MeasureOptions
    from ctt.pipeline import PairInputs, load_orbits, measure_file
    from ctt.config import load_station

    inputs = PairInputs(obs_a=str(set_dir / obs), obs_b=None, sp3=tuple(str(set_dir / s) for s in sp3),
                        clk=tuple(str(set_dir / c) for c in clk) or None)
    orbits, nav_header, ref, _ = load_orbits(inputs, "auto")
    return measure_file(str(set_dir / obs), load_station(STATIONS / station), orbits, nav_header,
                        MeasureOptions(), reference=ref).table


def test_neighbouring_sp3_days_remove_out_of_span_rows(shared_set):
    d = shared_set("real-2011-283")
    one = _measure(d, "brus2830.11o.gz", "brus.toml", ["igs16571.sp3"])
    three = _measure(d, "brus2830.11o.gz", "brus.toml", ["igs16570.sp3", "igs16571.sp3", "igs16572.sp3"])
    t1 = one["time"].to_numpy(np.int64)
    oos = one["flag"].to_numpy() == "out_of_span"
    # igs16571.sp3 ends at 23:45:00 GPS (SP3 header: 96 epochs of 900 s from 00:00), so with that
    # file alone every row after 23:45 (and the 00:00 rows, whose transmission time lies before
    # the first node) is flagged, never extrapolated:
    late = t1 > DAY + (23 * 3600 + 45 * 60) * NS_PER_S
    assert oos[late & (one["elevation_deg"].to_numpy() >= 10)].all()
    assert oos.sum() > 200
    assert set(np.unique(t1[oos])) <= set(np.unique(t1[late | (t1 == DAY)]))
    # with the day before and after the same rows are served: none is out of span
    assert (three["flag"] == "out_of_span").sum() == 0
    # and the values inside the day are the same within the interpolation's edge effect
    # (a 10-point Lagrange window near a file edge against one centred across midnight; the
    # IGS orbit accuracy is about 2.5 cm, IGS product table, from memory)
    both = (one["flag"] == "ok").to_numpy() & (three["flag"] == "ok").to_numpy()
    mid = both & (t1 > DAY + 3 * 3600 * NS_PER_S) & (t1 < DAY + 21 * 3600 * NS_PER_S)
    diff = (one["geometry_m"].to_numpy() - three["geometry_m"].to_numpy())[mid]
    assert np.max(np.abs(diff)) < 1e-6


def test_one_clock_file_leaves_the_day_edge_flagged(shared_set):
    d = shared_set("real-2011-283")
    tab = _measure(d, "brus2830.11o.gz", "brus.toml", ["igs16570.sp3", "igs16571.sp3", "igs16572.sp3"],
                   ["igs16571.clk"])
    t = tab["time"].to_numpy(np.int64)
    oos = tab["flag"].to_numpy() == "out_of_span"
    # igs16571.clk holds 5-min clocks 00:00:00-23:55:00 (its AS records): beyond 23:55 the
    # clock is out of span even though the orbits continue
    assert oos.any()
    assert (t[oos] > DAY + (23 * 3600 + 55 * 60) * NS_PER_S).sum() + (t[oos] == DAY).sum() == oos.sum()


def _split_clock_file(src: pathlib.Path, tmp: pathlib.Path, cut="2011 10 10 12 00", drop_hour=None):
    lines = src.read_text().splitlines(keepends=True)
    end = next(i for i, ln in enumerate(lines) if "END OF HEADER" in ln)
    head, body = lines[:end + 1], lines[end + 1:]
    epoch = np.array([ln[8:24] for ln in body])
    first = [ln for ln, e in zip(body, epoch) if e <= cut]
    second = [ln for ln, e in zip(body, epoch) if e >= cut
              and not (drop_hour and e.startswith(drop_hour))]
    a, b = tmp / "part1.clk", tmp / "part2.clk"
    a.write_text("".join(head + first))
    b.write_text("".join(head + second))
    return a, b


def test_clock_files_merge_back_into_the_original(shared_set, tmp_path):
    d = shared_set("real-2011-283")
    whole = CLK.read_clock(d / "igs16571.clk")
    a, b = _split_clock_file(d / "igs16571.clk", tmp_path)
    merged = CLK.merge_clock([CLK.read_clock(b), CLK.read_clock(a)])   # order of the files does not matter
    assert list(merged.satellites.names) == list(whole.satellites.names)
    assert np.array_equal(merged.satellites.time_ns, whole.satellites.time_ns)
    np.testing.assert_array_equal(merged.satellites.bias_s, whole.satellites.bias_s)
    np.testing.assert_array_equal(merged.stations.bias_s, whole.stations.bias_s)
    # the 12:00 epoch is in both parts: counted once per clock, identical values here
    n_noon = int(np.isfinite(whole.satellites.bias_s[whole.satellites.time_ns == DAY + 12 * 3600 * NS_PER_S]).sum())
    n_noon += int(np.isfinite(whole.stations.bias_s[whole.stations.time_ns == DAY + 12 * 3600 * NS_PER_S]).sum())
    assert merged.header["duplicate_epochs"] == n_noon and merged.header["duplicate_max_diff_s"] == 0.0
    # PreciseOrbits takes the list and interpolates across the former file edge like the original
    po_whole = P.PreciseOrbits(str(d / "igs16571.sp3"), clk=whole)
    po_parts = P.PreciseOrbits(str(d / "igs16571.sp3"), clk=[str(a), str(b)])
    t = DAY + np.arange(11 * 3600, 13 * 3600, 37) * NS_PER_S
    sats = np.full(len(t), "G05")
    s1, s2 = po_whole.states(sats, t), po_parts.states(sats, t)
    np.testing.assert_array_equal(s1.clock_s, s2.clock_s)
    assert (s2.clock_status == P.STATUS_OK).all()


def test_clock_gap_between_files_is_flagged_not_bridged(shared_set, tmp_path):
    d = shared_set("real-2011-283")
    a, b = _split_clock_file(d / "igs16571.clk", tmp_path, drop_hour="2011 10 10 13")
    po = P.PreciseOrbits(str(d / "igs16571.sp3"), clk=[str(a), str(b)])
    t = DAY + np.array([12 * 3600 + 30 * 60, 13 * 3600 + 30 * 60, 14 * 3600 + 30, 86400 - 60]) * NS_PER_S
    st = po.states(np.full(4, "G05"), t)
    # 12:30 is served (both neighbours present), 13:30 lies in the hour removed (12:55..14:00 is
    # longer than 1.5 x the 300-s interval: a gap), 14:00:30 is served, 23:59 is beyond every file
    assert list(st.clock_status) == [P.STATUS_OK, P.STATUS_GAP, P.STATUS_OK, P.STATUS_OUT_OF_SPAN]
    assert np.isnan(st.clock_s[[1, 3]]).all() and np.isfinite(st.clock_s[[0, 2]]).all()


def test_clock_interpolation_leave_one_out_igs_5min(shared_set):
    """Leave-one-out on the IGS final 5-min clocks (igs16571.clk): each epoch from its two neighbours.

    Bound: linear interpolation over T = 600 s of a clock with white FM noise
    errs at mid-span by about σ_y(T)·T/2; GPS rubidium/caesium clocks of 2011
    had σ_y(600 s) of a few 1e-13 (common practice, from memory), i.e. about
    100-300 ps. Measured 166 ps RMS (GPS, 31 satellites). The check keeps 300 ps.
    """
    d = shared_set("real-2011-283")
    c = CLK.read_clock(d / "igs16571.clk")
    err, times = P.clock_interpolation_error(c.satellites, stride=2)
    v = err[np.isfinite(err)]
    rms = float(np.sqrt(np.mean(v ** 2)))
    print(f"igs16571.clk leave-one-out (600-s span): RMS {rms * 1e12:.0f} ps, "
          f"median |e| {np.median(np.abs(v)) * 1e12:.0f} ps, 95 % {np.percentile(np.abs(v), 95) * 1e12:.0f} ps, n {len(v)}")
    assert len(v) > 4000
    assert 50e-12 < rms < 300e-12


@pytest.mark.slow
def test_clock_interpolation_30s_multi_gnss(shared_set):
    """GRG0MGXFIN 30-s clocks (real-2020-177): leave-one-out and 5-min decimation per system.

    Galileo's passive hydrogen masers are an order of magnitude more stable
    over minutes than GPS and GLONASS clocks (common practice), so their
    interpolation error must be the smallest; 5-min nodes (stride 10) must err
    more than 30-s nodes (stride 2 = 60-s span) for every system.
    """
    d = shared_set("real-2020-177")
    c = CLK.read_clock(d / "GRG0MGXFIN_20201770000_01D_30S_CLK.CLK.gz")
    names = c.satellites.names.astype(str)
    rms = {}
    for stride in (2, 10):
        err, _ = P.clock_interpolation_error(c.satellites, stride=stride)
        for s in "GRE":
            v = err[:, np.char.startswith(names, s)]
            v = v[np.isfinite(v)]
            rms[s, stride] = float(np.sqrt(np.mean(v ** 2)))
            print(f"GRG 30-s clocks, {s}, nodes every {30 * stride} s: RMS {rms[s, stride] * 1e12:.1f} ps (n {len(v)})")
    for s in "GRE":
        assert rms[s, 2] < rms[s, 10]
    assert rms["E", 10] < 0.3 * min(rms["G", 10], rms["R", 10])
    # 30-s clocks interpolated from 60-s spans: below the 75 ps RMS accuracy of final clocks
    # (IGS product table, from memory) for every system, so 30-s products add no error of note
    assert max(rms[s, 2] for s in "GRE") < 75e-12


# ---------------------------------------------------------------- pair-file patterns

def test_day_offset_placeholders():
    # the offset moves the date; every field is read from the moved date (README, ctt.config)
    assert C.format_pattern("{yyyy-1}{doy-1:03d}", "X", "2011-01-01") == "2010365"
    # 2011-10-09 is a Sunday, GPS week 1657 day 0 (igs16570.sp3 is that day's file)
    assert C.format_pattern("igs{gpsweek-1}{gpsdow-1}.sp3", "X", "2011-10-09") == "igs16566.sp3"
    assert C.format_pattern("igs{gpsweek+1}{gpsdow+1}.sp3", "X", "2011-10-15") == "igs16580.sp3"
    assert C.pattern_day_offset("igs{gpsweek+1}{gpsdow+1}.sp3") == 1
    with pytest.raises(ValueError):
        C.pattern_day_offset("igs{gpsweek}{gpsdow+1}.sp3")


def _pair_with_products(tmp_path, set_dir, sp3_value):
    (tmp_path / "data").mkdir()
    # names as in real-2011-283; the contents are not read here (placeholders: symbolic links to
    # the shared data would leave data_root, which the pair file refuses)
    for f in ("igs16570.sp3", "igs16571.sp3", "igs16572.sp3", "brus2830.11o.gz"):
        assert (set_dir / f).is_file()
        (tmp_path / "data" / f).write_text("x")
    (tmp_path / "data" / "cagz2830.11o").write_text("x")
    (tmp_path / "data" / "brdc2830.11n").write_text("x")
    shutil.copy(STATIONS / "brus.toml", tmp_path / "brus.toml")
    txt = (STATIONS / "brus.toml").read_text().replace('"BRUS"', '"CAGZ"').replace("307045.598", "317045.598")
    (tmp_path / "cagz.toml").write_text(txt)
    (tmp_path / "pair.toml").write_text(f"""
[pair]
station_a = "brus.toml"
station_b = "cagz.toml"
data_root = "data"
[inputs]
obs = "{{station}}{{doy:03d}}0.{{yy:02d}}o*"
nav = "brdc{{doy:03d}}0.{{yy:02d}}n"
sp3 = {sp3_value}
""")
    return tmp_path / "pair.toml"


def test_pair_file_names_neighbouring_days(shared_set, tmp_path):
    d = shared_set("real-2011-283")
    pats = '["igs{gpsweek-1}{gpsdow-1}.sp3", "igs{gpsweek}{gpsdow}.sp3", "igs{gpsweek+1}{gpsdow+1}.sp3"]'
    pc = C.load_pair(_pair_with_products(tmp_path, d, pats))
    got = pc.resolve_inputs("2011-10-10")
    assert [p.name for p in got["sp3"]] == ["igs16570.sp3", "igs16571.sp3", "igs16572.sp3"]
    # the day after has no next-day file here: logged, the day's own and the previous day's used
    (tmp_path / "data" / "igs16573.sp3").unlink(missing_ok=True)
    (tmp_path / "data" / "brus2840.11o.gz").write_text("x")
    (tmp_path / "data" / "cagz2840.11o").write_text("x")
    (tmp_path / "data" / "brdc2840.11n").write_text("x")
    got = pc.resolve_inputs("2011-10-11")
    assert [p.name for p in got["sp3"]] == ["igs16571.sp3", "igs16572.sp3"]
    # and the pipeline reads them as one product; the archive hashes each file
    from ctt.archive import inputs_hash, inputs_record
    from ctt.pipeline import pair_day_from_config

    inputs, *_ = pair_day_from_config(pc, "2011-10-10")
    assert isinstance(inputs.sp3, tuple) and len(inputs.sp3) == 3
    rec = inputs_record({"sp3": inputs.sp3})
    assert [r["path"] for r in rec["sp3"]] == list(inputs.sp3)
    assert len(inputs_hash(rec)) == 64


@pytest.mark.parametrize("value, words", [
    ('["igs{gpsweek}{gpsdow+1}.sp3"]', "different day offsets"),
    ('["igs{gpsweek+1}{gpsdow+1}.sp3"]', "for the day itself"),
    ('"{station+1}.sp3"', "date placeholders only"),
])
def test_day_offset_rules_in_pair_files(shared_set, tmp_path, value, words):
    d = shared_set("real-2011-283")
    with pytest.raises(C.ConfigError) as ei:
        C.load_pair(_pair_with_products(tmp_path, d, value))
    assert words in str(ei.value) and "inputs.sp3" in str(ei.value)


def test_day_offsets_refused_for_observation_patterns(shared_set, tmp_path):
    d = shared_set("real-2011-283")
    p = _pair_with_products(tmp_path, d, '"igs{gpsweek}{gpsdow}.sp3"')
    p.write_text(p.read_text().replace('obs = "{station}{doy:03d}', 'obs = "{station}{doy-1:03d}'))
    with pytest.raises(C.ConfigError) as ei:
        C.load_pair(p)
    assert "inputs.obs" in str(ei.value) and "day offsets" in str(ei.value)


def test_sp3_and_clk_repeatable_on_the_command_line():
    from ctt.cli import build_parser

    ap = build_parser()
    a = ap.parse_args(["measure", "x.rnx", "--station", "s.toml", "--sp3", "a.sp3", "--sp3", "b.sp3",
                       "--clk", "a.clk", "--clk", "b.clk"])
    assert a.sp3 == ["a.sp3", "b.sp3"] and a.clk == ["a.clk", "b.clk"]
    a = ap.parse_args(["compare-products", "--nav", "n", "--sp3", "a.sp3", "b.sp3", "--sp3", "c.sp3",
                       "--clk", "a.clk", "--clk", "b.clk"])
    assert a.sp3 == ["a.sp3", "b.sp3", "c.sp3"] and a.clk == ["a.clk", "b.clk"]
