"""Behaviour of ctt.rinex.obs.read_obs and `ctt info`.

Format facts are from the RINEX 2.11 and RINEX 3.05 format descriptions
(IGS/RTCM), cited beside each check. Small files are written here in
``tmp_path`` or stored under tests/data/obs/.
"""

from __future__ import annotations

import gzip
import json
import warnings

import numpy as np
import pytest

from ctt import cli
from ctt.errors import RinexFormatError
from ctt.rinex.obs import read_obs, read_obs_header
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
    """Epoch record '> yyyy mm dd hh mm ss.sssssss  f nnn' (RINEX 3.05 Table A13)."""
    ln = f"> 2021 01 01 00 00 {sec:>10}  {flag}{len(sats):3d}"
    if clock:
        ln = f"{ln:<41}{clock:>15}"
    return ln + "\n"


def v3_sat(sv: str, *vals) -> str:
    """Observation record: A3 then per type F14.3, I1 LLI, I1 SSI (RINEX 3.05 Table A13)."""
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
    # epoch seconds F11.7 exactly to 100 ns, no float rounding (RINEX 3.05 Table A13)
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
    # receiver clock offset F15.12, cols 42-56 (RINEX 3.05 Table A13), NaN when absent
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
