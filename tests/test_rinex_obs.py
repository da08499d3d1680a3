"""Behaviour of ctt.formats.rinex_obs.read_obs and `ctt info`.

Format facts are from the RINEX 2.11 and RINEX 3.05 format descriptions,
cited beside each check. Small files are written here in
``tmp_path`` or stored under tests/data/obs/.
"""

from __future__ import annotations

import gzip
import json
import math
import re
import warnings

import numpy as np
import pytest

from ctt import cli
from ctt.errors import RinexFormatError
from ctt.formats.rinex_obs import read_obs, read_obs_header
from ctt.timescales import civil_to_ns


def hl(body: str, label: str) -> str:
    """One header line: 60 columns of content, then the label (RINEX 3.05 section 5.1)."""
    return f"{body:<60}{label}\n"


V3_HEADER = (
    hl("     3.05           OBSERVATION DATA    M", "RINEX VERSION / TYPE")
    + hl("tests               Example Lab         20210101 000000 UTC", "PGM / RUN BY / DATE")
    + hl("TST1", "MARKER NAME")
    + hl("RX1                 EXAMPLE RECEIVER    1.0", "REC # / TYPE / VERS")
    + hl("AN1                 EXAMPLEANT      NONE", "ANT # / TYPE")
    + hl("  4000000.0000  1000000.0000  4800000.0000", "APPROX POSITION XYZ")
    + hl("        0.1230        0.0000        0.0000", "ANTENNA: DELTA H/E/N")
    + hl("G    4 C1C L1C C2W L2W", "SYS / # / OBS TYPES")
    + hl("E    2 C1C L1C", "SYS / # / OBS TYPES")
    + hl("    30.000", "INTERVAL")
    + hl("  2021     1     1     0     0    0.1234567     GPS", "TIME OF FIRST OBS")
    + hl("", "END OF HEADER")
)


def v3_epoch(sec: str, sats: list[str], flag=0, clock="") -> str:
    """Epoch record '> yyyy mm dd hh mm ss.sssssss  f nnn' (RINEX 3.05, observation data record description)."""
    ln = f"> 2021 01 01 00 00 {sec:>10}  {flag}{len(sats):3d}"
    if clock:
        ln = f"{ln:<41}{clock:>15}"
    return ln + "\n"


def v3_sat(sv: str, *vals) -> str:
    """Observation record: A3 then per type F14.3, I1 LLI, I1 SSI (RINEX 3.05, observation data record description)."""
    out = sv
    for v in vals:
        if v is None:
            out += " " * 16
        else:
            val, lli, ssi = (v + (" ", " "))[:3] if isinstance(v, tuple) else (v, " ", " ")
            out += f"{val:14.3f}{lli}{ssi}"
    return out.rstrip() + "\n"


def small_v3() -> str:
    return (V3_HEADER
            + v3_epoch("0.1234567", ["G07", "E11"], clock="0.000000123456")
            + v3_sat("G07", (20000000.123, "1", "7"), 105100000.456, None, (81900000.789, " ", "5"))
            + v3_sat("E11", -1.5, (123456.0, "4", " "))
            + v3_epoch("30.1234567", ["G07"])
            + v3_sat("G07", 20000100.001, None, 20000105.5))


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return p


# ----------------------------------------------------------------- RINEX 3 content

def test_v3_values_times_indicators(tmp_path):
    d = read_obs(write(tmp_path, "a.rnx", small_v3()))
    # epoch seconds F11.7 exactly to 100 ns, no float rounding (RINEX 3.05, observation data record description)
    assert d.time_ns.dtype == np.int64
    assert d.time_ns.tolist() == [int(civil_to_ns(2021, 1, 1, 0, 0, 0, 123_456_700)),
                                  int(civil_to_ns(2021, 1, 1, 0, 0, 30, 123_456_700))]
    assert d.header.time_first_ns == d.time_ns[0]
    assert d.sats.tolist() == ["E11", "G07"]
    g, e = 1, 0
    # values as written above (the file's own text), NaN where the field is blank
    assert d.obs["C1C"][0, g] == 20000000.123 and d.obs["L1C"][0, g] == 105100000.456
    assert np.isnan(d.obs["C2W"][0, g]) and d.obs["L2W"][0, g] == 81900000.789
    assert d.obs["C1C"][0, e] == -1.5 and d.obs["L1C"][0, e] == 123456.0
    # Galileo has no C2W in its type list: NaN, indicator -1
    assert np.isnan(d.obs["C2W"][:, e]).all() and (d.lli["C2W"][:, e] == -1).all()
    assert d.lli["C1C"][0, g] == 1 and d.ssi["C1C"][0, g] == 7
    assert d.lli["L1C"][0, e] == 4 and d.ssi["L1C"][0, e] == -1
    assert d.ssi["L2W"][0, g] == 5 and d.lli["L2W"][0, g] == -1
    assert d.obs["C1C"][1, g] == 20000100.001 and d.obs["C2W"][1, g] == 20000105.5
    assert np.isnan(d.obs["C1C"][1, e])
    # receiver clock offset F15.12, cols 42-56 (RINEX 3.05, observation data record description), NaN when absent
    assert d.clock_offset_s[0] == 0.000000123456 and np.isnan(d.clock_offset_s[1])
    assert d.epoch_flag.tolist() == [0, 0]
    h = d.header
    assert h.marker_name == "TST1" and h.receiver_type == "EXAMPLE RECEIVER"
    assert h.antenna_type == "EXAMPLEANT      NONE"
    assert np.array_equal(h.approx_position_m, [4000000.0, 1000000.0, 4800000.0])
    assert h.antenna_delta_hen_m[0] == 0.123
    assert h.obs_types == {"G": ["C1C", "L1C", "C2W", "L2W"], "E": ["C1C", "L1C"]}
    assert h.time_system == "GPS" and h.interval_s == 30.0


def test_filters_and_tables(tmp_path):
    p = write(tmp_path, "a.rnx", small_v3())
    d = read_obs(p, systems="E")
    assert d.sats.tolist() == ["E11"] and set(d.obs) == {"C1C", "L1C"}
    d = read_obs(p, codes=["L1C"])
    assert list(d.obs) == ["L1C"]
    full = read_obs(p)
    ds = full.to_xarray()
    assert ds.sizes == {"time": 2, "sv": 2}
    assert np.array_equal(ds["C1C"].values, full.obs["C1C"], equal_nan=True)
    df = full.to_dataframe()
    n_values = sum(int(np.isfinite(a).sum()) for a in full.obs.values())
    assert len(df) == n_values
    row = df[(df.sv == "G07") & (df.code == "C1C")].iloc[0]
    assert row.value == 20000000.123 and row.lli == 1 and row.ssi == 7


def test_compressed_same_as_plain(tmp_path):
    text = small_v3()
    plain = read_obs(write(tmp_path, "a.rnx", text))
    gz = tmp_path / "a.rnx.gz"
    gz.write_bytes(gzip.compress(text.encode()))
    packed = read_obs(gz)
    for c in plain.obs:
        assert np.array_equal(plain.obs[c], packed.obs[c], equal_nan=True)
    assert np.array_equal(plain.time_ns, packed.time_ns)


def test_crlf_line_ends(tmp_path):
    p = tmp_path / "crlf.rnx"
    p.write_bytes(small_v3().replace("\n", "\r\n").encode())
    d = read_obs(p)
    assert d.obs["L2W"][0, 1] == 81900000.789


# ----------------------------------------------------------------- bad input

def _raises(tmp_path, text, line, match, name="bad.rnx"):
    p = write(tmp_path, name, text)
    with pytest.raises(RinexFormatError, match=match) as exc:
        read_obs(p)
    assert exc.value.line == line
    assert str(p) in str(exc.value)
    return exc.value


def test_unknown_version(tmp_path):
    text = small_v3().replace("     3.05     ", "     3.99     ", 1)
    _raises(tmp_path, text, 1, "RINEX version")


def test_version_that_never_existed_refused(tmp_path):
    # RINEX 2 versions are 2.00-2.02, 2.10 and 2.11 (from memory of the RINEX 2.11 document's history)
    text = small_v3().replace("     3.05     ", "     2.50     ", 1)
    _raises(tmp_path, text, 1, "RINEX version")


def test_bare_integer_version_2_is_read(shared_set):
    # The archived CAGZ file writes its version as "     2" (no decimals); it is RINEX 2.00 and
    # its own header says 2880 epochs at 30 s from 00:00:00 to 23:59:30 with P1/P2/C1 (data README).
    d = read_obs(shared_set("real-2011-283") / "cagz2830.11d")
    assert d.header.version == 2.0
    assert d.header.marker_name.startswith("CAGZ")
    assert len(d.time_ns) == 2880 and (np.diff(d.time_ns) == 30 * 10**9).all()
    assert {"C1C", "C1W", "C2W", "L1C", "L2W"} <= set(d.obs)


def test_missing_end_of_header(tmp_path):
    text = small_v3().replace(hl("", "END OF HEADER"), "")
    # the error points at the first epoch record, met where END OF HEADER was due
    _raises(tmp_path, text, len(V3_HEADER.splitlines()), "END OF HEADER")


def test_garbage_in_data_line(tmp_path):
    lines = small_v3().splitlines(keepends=True)
    n = len(V3_HEADER.splitlines()) + 3  # the E11 record of the first epoch (1-based)
    lines[n - 1] = lines[n - 1][:10] + "x" + lines[n - 1][11:]
    err = _raises(tmp_path, "".join(lines), n, "F14.3")
    assert err.found.startswith(lines[n - 1][3:19])


def test_truncated_file(tmp_path):
    text = small_v3()
    cut = text[: text.rindex("G07  20000100")]  # the last record is lost
    n_lines = len(cut.splitlines())
    _raises(tmp_path, cut, n_lines, "1 records after this epoch")


def test_truncated_mid_field(tmp_path):
    text = small_v3().rstrip("\n")
    _raises(tmp_path, text[:-3], len(text.splitlines()), "F14.3")


def test_satellite_count_too_small(tmp_path):
    text = small_v3().replace(v3_epoch("0.1234567", ["G07", "E11"], clock="0.000000123456"),
                              v3_epoch("0.1234567", ["G07"], clock="0.000000123456"))
    n = len(V3_HEADER.splitlines()) + 3
    _raises(tmp_path, text, n, "satellite count disagrees")


def test_satellite_count_too_large(tmp_path):
    text = small_v3().replace(v3_epoch("0.1234567", ["G07", "E11"], clock="0.000000123456"),
                              v3_epoch("0.1234567", ["G07", "E11", "E12"], clock="0.000000123456"))
    n = len(V3_HEADER.splitlines()) + 4  # the next epoch record sits where a satellite was due
    _raises(tmp_path, text, n, "satellite count disagrees")


@pytest.mark.parametrize("sec, word", [("0.1234567", "repeated"), ("0.0000000", "earlier")])
def test_epochs_backwards_or_repeated(tmp_path, sec, word):
    text = small_v3().replace(v3_epoch("30.1234567", ["G07"]), v3_epoch(sec, ["G07"]))
    n = len(V3_HEADER.splitlines()) + 4
    _raises(tmp_path, text, n, word)


def test_skip_mode_drops_and_warns_once(tmp_path):
    lines = small_v3().splitlines(keepends=True)
    n = len(V3_HEADER.splitlines()) + 3
    lines[n - 1] = lines[n - 1][:10] + "x" + lines[n - 1][11:]
    p = write(tmp_path, "bad.rnx", "".join(lines))
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        d = read_obs(p, on_error="skip")
    assert len([x for x in w if "skipped 1 bad epoch" in str(x.message)]) == 1
    assert [ln for ln, _ in d.dropped] == [n]
    assert len(d.time_ns) == 1 and d.obs["C1C"][0, d.sats.tolist().index("G07")] == 20000100.001


# ----------------------------------------------------------------- ctt info

def test_info_text_zimm(shared_data, capsys):
    """README of ../shared/data: ZIMM, RINEX 2.11, GPS only, 30 s, ten types."""
    assert cli.main(["info", str(shared_data / "zimm0010.21o.gz")]) == 0
    out = capsys.readouterr().out
    assert "ZIMM" in out and "2880" in out and "GPS (G)" in out
    assert "C1 L1 S1 C2 L2 S2 P2 C5 L5 S5" in out
    assert "2021-01-01T00:00:00" in out and "2021-01-01T23:59:30" in out


def test_info_json_cn00(shared_data, capsys):
    """README of ../shared/data: CN00, GPS only, full day at 30 s, types L1 L2 C1 P2 P1 S1 S2."""
    assert cli.main(["info", "--json", str(shared_data / "cn000010.21o.gz")]) == 0
    s = json.loads(capsys.readouterr().out)
    assert s["marker_name"] == "CN00" and s["systems"] == ["G"]
    assert s["n_epochs"] == 2880 and s["interval_s"] == 30.0
    assert s["obs_types_v2"] == ["L1", "L2", "C1", "P2", "P1", "S1", "S2"]
    assert s["gaps"]["missing_epochs"] == 0


def test_info_bad_file_exit_code(tmp_path, capsys):
    p = write(tmp_path, "bad.rnx", small_v3().replace("     3.05     ", "     9.00     ", 1))
    assert cli.main(["info", str(p)]) == 1
    assert "bad.rnx:1" in capsys.readouterr().err


def test_header_only(tmp_path):
    h = read_obs_header(write(tmp_path, "a.rnx", small_v3()))
    assert h.version == 3.05 and h.n_lines == len(V3_HEADER.splitlines())


# ----------------------------------------------------------------- field decoding

def _reference_field(text: str):
    """F14.3 read the way the format's Fortran descriptor defines it (RINEX 3.05 Table
    A13): blank -> absent; right-aligned decimal -> float(text); else malformed."""
    if not text.strip():
        return math.nan, False
    if re.fullmatch(r" *-?\d*\.\d+", text):
        return float(text), False
    return math.nan, True


@pytest.mark.parametrize("stream", [1, 2])
def test_field_decoder_against_the_format_rule(stream):
    from ctt.formats.rinex_obs import _num_fields

    rng = np.random.default_rng(stream)
    vals = np.concatenate([rng.uniform(-999999999.999, 9999999999.999, 3000),
                           rng.uniform(-1, 1, 500), rng.integers(-5, 5, 200).astype(float)])
    texts = [f"{v:14.3f}" for v in vals]
    texts += ["              ", "         0.000", "        -0.001", "    -12345.678",
              "9999999999.999", "-999999999.999", "   12345.6789 ", "  1234 5.678  ", " -1234-5.678  ",
              "   12345.6x8  ", "  - 1234.567  ", "        -.123 ", "         -.123", "          .123",
              "    12345.67  ", "      12345.67", "    1.5e3     ", "    12.345-   ", "   --12.345   ",
              "       12.34.5", "        12,345", "\t       12.345", "      20000105.", "      123456.1"]
    texts = [t.ljust(14)[:14] for t in texts]
    inds = [(rng.choice(list(" 0123456789")), rng.choice(list(" 0123456789"))) for _ in texts]
    inds[-1] = ("x", " ")  # an invalid LLI
    raw = "".join(t + a + b for t, (a, b) in zip(texts, inds)).encode("latin-1")
    got, bad, lli, ssi = _num_fields(np.frombuffer(raw, np.uint8).reshape(-1, 16).copy())
    for k, (t, (a, b)) in enumerate(zip(texts, inds)):
        ref, ref_bad = _reference_field(t)
        ref_bad = ref_bad or a not in " 0123456789" or b not in " 0123456789"
        assert bool(bad[k]) == ref_bad, t
        if not ref_bad:
            assert (math.isnan(ref) and math.isnan(got[k])) or got[k] == ref, t
            assert lli[k] == (-1 if a == " " else int(a)) and ssi[k] == (-1 if b == " " else int(b))


# ----------------------------------------------------------------- events and flags

def test_v3_events_applied_and_recorded(test_data):
    """RINEX 3.05, observation data record description epoch flags: 2-5 header records follow, 6 slip records."""
    d = read_obs(test_data / "obs" / "edge_v304_events.rnx")
    flags = [(e["flag"], e["line"]) for e in d.events]
    assert flags == [(2, 25), (4, 33), (5, 41), (6, 47), (3, 54)]
    ev = {e["flag"]: e for e in d.events}
    assert ev[2]["time_ns"] == civil_to_ns(2021, 1, 1, 12, 0, 1, 500_000_000)
    assert ev[2]["changes"]["ANTENNA: DELTA H/E/N"] == ["        0.2500        0.0000        0.0000"]
    assert ev[4]["time_ns"] is None  # blank epoch allowed for flags 2-4
    assert ev[5]["time_ns"] == civil_to_ns(2021, 1, 1, 12, 0, 3, 500_000_100) and ev[5]["records"] == []
    assert ev[3]["changes"]["MARKER NAME"] == ["EXA3-B"]
    # 7 data epochs (flags 0/1); the power-failure epoch keeps flag 1
    assert len(d.time_ns) == 7 and d.epoch_flag.tolist() == [0, 0, 0, 0, 0, 1, 0]
    g02 = d.sats.tolist().index("G02")
    # flag 4 changed the GPS types to C1C L1C S1C: from epoch 4 (3.12 s) on, G02's
    # third value is S1C (file line 37: 'G02  25379245.570 5 133574964.487 9        36.114 8')
    assert d.obs["S1C"][3, g02] == 36.114 and d.ssi["S1C"][3, g02] == 8
    assert np.isnan(d.obs["C2W"][3:, g02]).all() and np.isfinite(d.obs["C2W"][:3, g02]).all()
    # the slip record (line 48) is not data: L1C of G02 at 4.12 s is line 43's value
    assert d.obs["L1C"][4, g02] == 111070191.880
    assert ev[6]["records"] == ["G02                         1.000 1"]


def test_v2_events_type_change_and_gaps(test_data):
    d = read_obs(test_data / "obs" / "edge_v211_events.21o")
    assert [e["flag"] for e in d.events] == [5, 2, 6, 4]
    assert d.header.obs_types_v2 == ["C1", "L1", "L2", "P2", "S1", "S2"]
    g03 = 0
    # after the flag-4 record the types are C1 L1 S1 (file line 51: S1 of G03 = 43.534)
    assert d.obs["S1C"][4, g03] == 43.534 and np.isnan(d.obs["L2W"][4:, g03]).all()
    # slip record not mixed in: L1 of G03 at 06:00:30 is line 33's value
    assert d.obs["L1C"][2, g03] == 132436074.790 and d.lli["L1C"][2, g03] == 0
    # interval 15 s (header); epochs 0 15 30 45 60 90 s: one epoch (75 s) missing
    gaps = d.gaps()
    assert gaps["missing_epochs"] == 1 and gaps["n_gaps"] == 1 and gaps["longest_gap_s"] == 15.0
    assert gaps["longest_gap_after"].startswith("2021-01-01T06:01:00")


def test_v2_mixed_continuation_and_mapping(test_data):
    """RINEX 2.11: >12 satellites continue on the next line (cols 33-68); 7 types wrap
    after 5 per line; blank system letter would be GPS."""
    d = read_obs(test_data / "obs" / "edge_v211_mixed.21o")
    assert len(d.sats) == 16 and {"R12", "E11", "S20"} <= set(d.sats.tolist())
    m = d.header.v2_to_v3
    # the table in ctt/rinex/obs.py (RINEX 3.05 attributes, RINEX 2 tracking choices)
    assert m["G"]["P1"] == "C1W" and m["G"]["P2"] == "C2W" and m["G"]["L2"] == "L2W"
    assert m["R"]["P1"] == "C1P" and m["R"]["L2"] == "L2P"
    assert m["E"]["C1"] == "C1X" and m["E"]["P1"] == "P1"  # no P code on Galileo: name kept
    # clock offset F12.9 in cols 69-80 of the first epoch line (RINEX 2.11 Table A2)
    assert d.clock_offset_s[0] == 0.000123456 and d.clock_offset_s[1] == -0.000000789
    assert np.isnan(d.clock_offset_s[2])
    assert d.epoch_flag.tolist() == [0, 0, 1, 0]
    # file line 19: G01's first record line, '  24151181.236 1  24151184.993 2 ...'
    line19 = (test_data / "obs" / "edge_v211_mixed.21o").read_text().splitlines()[18]
    g01 = d.sats.tolist().index("G01")
    assert d.obs["C1C"][0, g01] == float(line19[:14]) and d.obs["C1W"][0, g01] == float(line19[16:30])
    assert d.lli["C1C"][0, g01] == -1 and d.ssi["C1C"][0, g01] == int(line19[15])
    # RINEX 2 code filter works with either spelling
    assert set(read_obs(test_data / "obs" / "edge_v211_mixed.21o", codes=["P2", "C1C"]).obs) >= {"C2W", "C1C"}


def test_v305_header_records(test_data):
    h = read_obs_header(test_data / "obs" / "edge_v305_mixed.rnx")
    # values as written in the file's header (RINEX 3.05 header section description)
    assert h.system == "M" and h.marker_type == "GEODETIC"
    assert len(h.obs_types["G"]) == 14 and h.obs_types["G"][-1] == "L2L"  # continuation line
    assert h.glonass_slots == {"R01": 1, "R12": -2}
    assert h.glonass_code_phase_bias["C1C"] == -10.0
    assert h.phase_shifts[0] == {"system": "G", "code": "L2L", "shift_cycles": 0.25, "sats": []}
    assert h.signal_strength_unit == "DBHZ" and h.leap_seconds == 18
    assert h.time_last_ns == civil_to_ns(2021, 1, 1, 0, 2, 0)
    assert h.interval_s == 30.0 and h.time_system == "GPS"


# ----------------------------------------------------------------- more bad input

V2_HEADER = (
    hl("     2.11           OBSERVATION DATA    G (GPS)", "RINEX VERSION / TYPE")
    + hl("TST2", "MARKER NAME")
    + hl("     6    C1    L1    L2    P2    S1    S2", "# / TYPES OF OBSERV")
    + hl("    30.0000", "INTERVAL")
    + hl("  2021     1     1     0     0    0.0000000     GPS", "TIME OF FIRST OBS")
    + hl("", "END OF HEADER")
)


def v2_epoch(sec: float, sats, flag=0):
    return f" 21  1  1  0  0{sec:11.7f}  {flag}{len(sats):3d}{''.join(sats)}\n"


def v2_record(base: float):
    vals = [base, base / 0.19, base / 0.24, base + 2.5, 45.25, 38.5]
    txt = "".join(f"{v:14.3f}  " for v in vals)
    return txt[:80].rstrip() + "\n" + txt[80:].rstrip() + "\n"


def small_v2():
    return (V2_HEADER + v2_epoch(0, ["G01", "G02"]) + v2_record(2.0e7) + v2_record(2.1e7)
            + v2_epoch(30, ["G01"]) + v2_record(2.2e7))


def test_v2_small_reads(tmp_path):
    d = read_obs(write(tmp_path, "a.21o", small_v2()))
    assert d.sats.tolist() == ["G01", "G02"] and len(d.time_ns) == 2
    assert d.obs["C2W"][1, 0] == 2.2e7 + 2.5 and d.obs["S2W"][0, 1] == 38.5


def test_v2_count_too_large(tmp_path):
    text = small_v2().replace(v2_epoch(0, ["G01", "G02"]), v2_epoch(0, ["G01", "G02", "G03"]))
    n = len(V2_HEADER.splitlines()) + 6  # the next epoch record sits where G03's record was due
    _raises(tmp_path, text, n, "satellite count disagrees", name="a.21o")


def test_v2_count_too_small(tmp_path):
    text = small_v2().replace(v2_epoch(0, ["G01", "G02"]), v2_epoch(0, ["G01"]))
    n = len(V2_HEADER.splitlines()) + 4  # G02's record lines are met where an epoch was due
    _raises(tmp_path, text, n, "epoch record", name="a.21o")


def test_v2_garbage_and_truncation(tmp_path):
    lines = small_v2().splitlines(keepends=True)
    k = len(V2_HEADER.splitlines()) + 2  # G01's first record line (1-based)
    lines[k - 1] = lines[k - 1][:20] + "?" + lines[k - 1][21:]
    _raises(tmp_path, "".join(lines), k, "F14.3", name="a.21o")
    cut = small_v2().splitlines(keepends=True)[:-1]
    _raises(tmp_path, "".join(cut), len(V2_HEADER.splitlines()) + 6, "records of 2 lines", name="b.21o")


def test_bad_satellite_id_and_duplicate(tmp_path):
    text = small_v3().replace("E11 ", "X11 ")
    _raises(tmp_path, text, len(V3_HEADER.splitlines()) + 3, "satellite")
    # RINEX 3.05: the system letter is required (a blank one means GPS only in RINEX 2)
    text = small_v3().replace("\nG07  20000100", "\n 07  20000100")
    _raises(tmp_path, text, len(V3_HEADER.splitlines()) + 5, "satellite ids")
    text = small_v3().replace("\nE11 ", "\nG07 ")
    _raises(tmp_path, text, len(V3_HEADER.splitlines()) + 1, "at most once")


def test_undeclared_fields_and_system(tmp_path):
    # Galileo declares 2 types: a third value on an E line is an error
    text = small_v3().replace("      123456.0004", "      123456.0004  1.000")
    _raises(tmp_path, text, len(V3_HEADER.splitlines()) + 3, "nothing after column 35")
    text = small_v3().replace("\nE11 ", "\nR11 ")
    _raises(tmp_path, text, len(V3_HEADER.splitlines()) + 3, "system with observation types")


def test_not_an_observation_file(tmp_path):
    text = small_v3().replace("OBSERVATION DATA    M", "N: GNSS NAV DATA    M", 1)
    _raises(tmp_path, text, 1, "file type 'O'")
    _raises(tmp_path, "hello\n", 1, "RINEX VERSION / TYPE")


def test_on_error_value():
    with pytest.raises(ValueError):
        read_obs("x", on_error="ignore")


def test_skip_mode_several_problems(tmp_path):
    text = (small_v3().replace(v3_epoch("30.1234567", ["G07"]), v3_epoch("0.1234567", ["G07"]))
            + v3_epoch("60.0000000", ["G07"]) + v3_sat("G07", 1.0))
    with pytest.warns(UserWarning, match="skipped 1 bad epoch"):
        d = read_obs(write(tmp_path, "a.rnx", text), on_error="skip")
    assert len(d.time_ns) == 2 and d.time_ns[-1] == civil_to_ns(2021, 1, 1, 0, 1, 0)
    assert "repeated" in d.dropped[0][1]


def test_info_events_text(test_data, capsys):
    assert cli.main(["info", str(test_data / "obs" / "edge_v304_events.rnx")]) == 0
    out = capsys.readouterr().out
    assert "EXA3" in out and "flag 2: 1" in out and "flag 6: 1" in out and "line 25: flag 2" in out
    assert "E  5 types" in out


@pytest.mark.parametrize("name", ["edge_v305_mixed.rnx", "edge_v211_mixed.21o"])
def test_bulk_walk_equals_epoch_by_epoch_walk(test_data, tmp_path, monkeypatch, name):
    """The bulk fast paths and the epoch-by-epoch walk must give the same result."""
    import ctt.formats.rinex_obs as obs_mod

    path = test_data / "obs" / name
    lines = path.read_text().splitlines(keepends=True)
    # drop event records so that the bulk path applies (an event forces the walk)
    for ev in reversed(read_obs(path).events):
        del lines[ev["line"] - 1: ev["line"] + len(ev["records"])]
    p = write(tmp_path, name, "".join(lines))
    fast = obs_mod.read_obs(p)
    monkeypatch.setattr(obs_mod, "_fast_walk_v2", lambda *a: False)
    monkeypatch.setattr(obs_mod, "_fast_walk_v3", lambda *a: False)
    slow = obs_mod.read_obs(p)
    assert len(fast.time_ns) >= 4 and not fast.events
    assert np.array_equal(fast.time_ns, slow.time_ns) and np.array_equal(fast.sats, slow.sats)
    assert fast.obs.keys() == slow.obs.keys()
    for c in fast.obs:
        assert np.array_equal(fast.obs[c], slow.obs[c], equal_nan=True)
        assert np.array_equal(fast.lli[c], slow.lli[c]) and np.array_equal(fast.ssi[c], slow.ssi[c])
    assert np.array_equal(fast.clock_offset_s, slow.clock_offset_s, equal_nan=True)
    assert np.array_equal(fast.epoch_flag, slow.epoch_flag)


def test_hatanaka_compressed(tmp_path):
    """Compact RINEX (Hatanaka) input decodes to the same observations."""
    hatanaka = pytest.importorskip("hatanaka")
    text = small_v3()
    plain = read_obs(write(tmp_path, "a.rnx", text))
    crx = tmp_path / "a.crx"
    crx.write_bytes(hatanaka.rnx2crx(text.encode()))
    packed = read_obs(crx)
    assert np.array_equal(plain.time_ns, packed.time_ns)
    for c in plain.obs:
        assert np.array_equal(plain.obs[c], packed.obs[c], equal_nan=True)
        assert np.array_equal(plain.lli[c], packed.lli[c]) and np.array_equal(plain.ssi[c], packed.ssi[c])


def test_more_values_than_declared_types(tmp_path):
    # a fifth GPS value where the header declares four types (RINEX 3.05: one field
    # per declared type): refused, not silently dropped
    text = small_v3().replace("20000105.500", "20000105.500" + " " * 20 + "       1.000")
    _raises(tmp_path, text, len(V3_HEADER.splitlines()) + 5, "nothing after column 67")
    lines = small_v2().splitlines(keepends=True)
    k = len(V2_HEADER.splitlines()) + 3  # G01's second record line: S2 ends at column 16
    lines[k - 1] = lines[k - 1].rstrip("\n") + "        12.000  \n"
    _raises(tmp_path, "".join(lines), k, "nothing after column 16", name="a.21o")


def test_v2_missing_end_of_header(tmp_path):
    text = small_v2().replace(hl("", "END OF HEADER"), "")
    _raises(tmp_path, text, len(V2_HEADER.splitlines()), "END OF HEADER", name="a.21o")


def test_scale_factor_divides(tmp_path):
    """RINEX 3.05 SYS / SCALE FACTOR: stored values are divided by the factor before use."""
    text = small_v3().replace(hl("    30.000", "INTERVAL"),
                              hl("    30.000", "INTERVAL") + hl("G   10  1 L1C", "SYS / SCALE FACTOR"))
    d = read_obs(write(tmp_path, "a.rnx", text))
    plain = read_obs(write(tmp_path, "b.rnx", small_v3()))
    g = d.sats.tolist().index("G07")
    assert d.header.scale_factors == {("G", "L1C"): 10}
    assert d.obs["L1C"][0, g] == plain.obs["L1C"][0, g] / 10
    assert d.obs["C1C"][0, g] == plain.obs["C1C"][0, g]


def test_event_changes_decoded(test_data):
    d = read_obs(test_data / "obs" / "edge_v304_events.rnx")
    ev = {e["flag"]: e for e in d.events}
    # file line 26: '        0.2500        0.0000        0.0000  ANTENNA: DELTA H/E/N'
    assert np.array_equal(ev[2]["applied"]["antenna_delta_hen_m"], [0.25, 0.0, 0.0])
    assert ev[3]["applied"] == {"marker_name": "EXA3-B"}
    assert d.header.marker_name == "EXA3"  # the header keeps the file's opening state


def test_info_json_without_position(tmp_path, capsys):
    text = small_v3().replace(hl("  4000000.0000  1000000.0000  4800000.0000", "APPROX POSITION XYZ"), "")
    p = write(tmp_path, "a.rnx", text)
    assert cli.main(["info", "--json", str(p)]) == 0
    s = json.loads(capsys.readouterr().out)
    assert s["approx_position_m"] == [None, None, None] and s["n_epochs"] == 2


def test_skip_mode_many_backward_epochs(tmp_path):
    """Epochs 0, 60, 30, 30, 90, 60, 120 s: the ones not later than the latest before
    them (30, 30, 60) are dropped, each against the epoch that makes it late."""
    secs = [0, 60, 30, 30, 90, 60, 120]
    body = "".join(f"> 2021 01 01 00 {s // 60:02d} {s % 60:10.7f}  0  1\n" + v3_sat("G07", float(s))
                   for s in secs)
    p = write(tmp_path, "a.rnx", V3_HEADER + body)
    with pytest.raises(RinexFormatError, match="later than 2021-01-01T00:01:00") as exc:
        read_obs(p)
    assert exc.value.line == len(V3_HEADER.splitlines()) + 5
    with pytest.warns(UserWarning, match="skipped 3 bad epoch"):
        d = read_obs(p, on_error="skip")
    assert (d.time_ns - d.time_ns[0]).tolist() == [int(x * 1e9) for x in (0, 60, 90, 120)]
    assert d.obs["C1C"][:, 0].tolist() == [0.0, 60.0, 90.0, 120.0]
    assert ["repeated" in r or "earlier" in r for _, r in d.dropped] == [True] * 3


def test_epoch_seconds_need_seven_decimals(tmp_path):
    """Epoch seconds are F11.7 (RINEX 3.05 observation data record description):
    '30.12345  ' (blanks in the decimals) is refused rather than read as another time."""
    text = small_v3().replace("30.1234567  0  1", "30.12345    0  1")
    _raises(tmp_path, text, len(V3_HEADER.splitlines()) + 4, "epoch time")


def test_header_only_rinex2_types(tmp_path):
    h = read_obs_header(write(tmp_path, "a.21o", small_v2()))
    # mapping table of ctt/rinex/obs.py for GPS: C1 L1 L2 P2 S1 S2
    assert h.obs_types == {"G": ["C1C", "L1C", "L2W", "C2W", "S1C", "S2W"]}
    assert h.obs_types_v2 == ["C1", "L1", "L2", "P2", "S1", "S2"]


@pytest.mark.parametrize("name", ["edge_v211_mixed.21o", "edge_v305_mixed.rnx"])
def test_block_decoding_equals_one_block(test_data, tmp_path, monkeypatch, name):
    """Large files are decoded in blocks of fields; small blocks must change nothing,
    and an error in a later block still names its own line."""
    import ctt.formats.rinex_obs as obs_mod

    path = test_data / "obs" / name
    whole = obs_mod.read_obs(path)
    monkeypatch.setattr(obs_mod, "_CHUNK_FIELDS", 17)
    blocks = obs_mod.read_obs(path)
    for c in whole.obs:
        assert np.array_equal(whole.obs[c], blocks.obs[c], equal_nan=True)
        assert np.array_equal(whole.lli[c], blocks.lli[c]) and np.array_equal(whole.ssi[c], blocks.ssi[c])
    lines = path.read_text().splitlines(keepends=True)
    k = len(lines) - 1  # the last line holds observations in both files
    lines[k] = lines[k][:20] + "#" + lines[k][21:]
    bad = write(tmp_path, name, "".join(lines))
    with pytest.raises(RinexFormatError) as exc:
        obs_mod.read_obs(bad)
    assert exc.value.line == k + 1 and "#" in exc.value.found
