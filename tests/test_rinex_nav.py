"""ctt.formats.rinex_nav.read_nav behaviour: errors with file and line, dropped records, field layout.

The records used here are lines of the real IGS merged broadcast file layout
(RINEX 2.11 / 3.04 standards, fixed 19-column D19.12 fields).
"""

from __future__ import annotations

import numpy as np
import pytest

from ctt.errors import RinexFormatError
from ctt.formats.rinex_nav import read_nav
from ctt.timescales import civil_to_ns, week_sow_ns

V2_HEADER = (
    "     2.11           N: GPS NAV DATA                         RINEX VERSION / TYPE\n"
    "    7.4510D-09 -1.4900D-08 -5.9600D-08  1.1920D-07          ION ALPHA\n"
    "    9.2160D+04 -1.1470D+05 -1.3110D+05  7.2090D+05          ION BETA\n"
    "   -3.725290298460D-09-1.065814103640D-14    61440     2139 DELTA-UTC: A0,A1,T,W\n"
    "    18                                                      LEAP SECONDS\n"
    "                                                            END OF HEADER\n"
)
# one GPS record (G02, 2020-12-31 22:00) as printed in brdc0010.21n
V2_REC = (
    " 2 20 12 31 22  0  0.0-5.608671344817D-04-4.320099833421D-12 0.000000000000D+00\n"
    "    5.900000000000D+01-7.018750000000D+01 4.593048461762D-09-1.832745337954D+00\n"
    "   -3.218650817871D-06 2.031373803038D-02 4.023313522339D-07 5.153584920883D+03\n"
    "    4.248000000000D+05 2.924352884293D-07-8.894102241916D-01 3.203749656677D-07\n"
    "    9.615117626415D-01 3.707500000000D+02-1.567828775527D+00-8.236057350562D-09\n"
    "   -2.214377952016D-10 1.000000000000D+00 2.138000000000D+03 0.000000000000D+00\n"
    "    2.000000000000D+00 0.000000000000D+00-1.769512891769D-08 5.900000000000D+01\n"
    "    4.176200000000D+05 4.000000000000D+00\n"
)


def _write(tmp_path, text, name="t.21n"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_v2_record_fields_and_header(tmp_path):
    nav = read_nav(_write(tmp_path, V2_HEADER + V2_REC))
    df = nav.records["G"]
    assert len(df) == 1 and nav.dropped == []
    r = df.iloc[0]
    assert r.sat == "G02" and r.line == 7
    # values as printed (the D exponent read as E)
    assert r.af0_s == -5.608671344817e-04 and r.sqrt_a_sqrtm == 5.153584920883e03
    assert r.iode == 59 and r.iodc == 59 and r.week == 2138 and r.fit_h == 4.0
    assert r.toc_ns == civil_to_ns(2020, 12, 31, 22, 0, 0)
    # toe 424800 s of week 2138 (GPS week/second convention, IS-GPS-200)
    assert week_sow_ns(r.toe_ns) == (2138, 424800 * 10**9)
    hdr = nav.header
    np.testing.assert_array_equal(hdr.iono["GPSA"], [7.4510e-09, -1.4900e-08, -5.9600e-08, 1.1920e-07])
    assert hdr.time_corrections["GPUT"]["a0_s"] == -3.725290298460e-09
    assert hdr.time_corrections["GPUT"]["week"] == 2139
    assert hdr.leap_seconds == 18


def test_week_written_mod_1024_is_unwrapped(tmp_path):
    # a writer that puts the 10-bit broadcast week (2138 mod 1024 = 90) in the record
    rec = V2_REC.replace(" 2.138000000000D+03", " 9.000000000000D+01")
    r = read_nav(_write(tmp_path, V2_HEADER + rec)).records["G"].iloc[0]
    assert r.week == 90 and r.toe_week == 2138  # IS-GPS-200 10-bit week, unwrapped near toc


def test_non_numeric_field_names_file_and_line(tmp_path):
    bad = V2_REC.replace("-7.018750000000D+01", "-7.01875000000xD+01")
    p = _write(tmp_path, V2_HEADER + bad)
    with pytest.raises(RinexFormatError) as ei:
        read_nav(p)
    e = ei.value
    assert e.path == str(p) and e.line == 8  # second line of the record
    assert "crs_m" in e.expected and "columns 23-41" in e.expected


def test_blank_required_field_is_an_error(tmp_path):
    lines = V2_REC.splitlines(keepends=True)
    lines[2] = lines[2][:41] + "\n"  # cuts Cus and sqrt(A)
    with pytest.raises(RinexFormatError) as ei:
        read_nav(_write(tmp_path, V2_HEADER + "".join(lines)))
    assert ei.value.line == 9


def test_truncated_record_dropped_with_reason(tmp_path):
    cut = "".join(V2_REC.splitlines(keepends=True)[:5])
    nav = read_nav(_write(tmp_path, V2_HEADER + V2_REC + cut))
    assert len(nav.records["G"]) == 1
    assert nav.dropped == [(15, "G record has 5 lines, expected 8")]


def test_touching_fields_parse(tmp_path):
    # fields written without separating blanks still occupy their 19 columns
    rec = V2_REC.replace("-5.608671344817D-04-4.320099833421D-12 0.000000000000D+00",
                         "-5.608671344817D-04-4.320099833421D-12-1.234000000000D-05")
    r = read_nav(_write(tmp_path, V2_HEADER + rec)).records["G"].iloc[0]
    assert r.af1_sps == -4.320099833421e-12 and r.af2_sps2 == -1.234e-05


def test_missing_end_of_header(tmp_path):
    with pytest.raises(RinexFormatError):
        read_nav(_write(tmp_path, V2_HEADER.replace("END OF HEADER", "COMMENT      ") + V2_REC))


def test_duplicate_records_dropped(tmp_path):
    nav = read_nav(_write(tmp_path, V2_HEADER + V2_REC + V2_REC))
    assert len(nav.records["G"]) == 1
    assert nav.dropped == [(15, "duplicate of an earlier record")]


# ------------------------------------------------------------------ RINEX 3 / 4 mixed files

def test_v4_reads_the_same_ephemerides_as_v3(test_data):
    v3 = read_nav(test_data / "nav" / "mixed_v304.rnx")
    v4 = read_nav(test_data / "nav" / "mixed_v400.rnx")
    assert v4.header.version == 4.0 and v4.header.leap_seconds == 16
    # RINEX 4: STO/ION/EOP records and non-legacy ephemerides are skipped and counted
    assert v4.skipped == {"STO": 1, "ION": 1, "EOP": 1, "EPH G CNAV": 1, "EPH S SBAS": 1}
    assert v4.dropped == []
    extra = ["line", "status_flags", "delay_l1l2_s", "urai", "health_flags"]
    for s in ("G", "E", "C", "R", "J"):
        a = v3.records[s].drop(columns=extra, errors="ignore")
        b = v4.records[s].drop(columns=extra, errors="ignore")
        assert a.equals(b), s
    # the fifth FDMA line (RINEX 4 / 3.05) is read where present, NaN elsewhere
    r = v4.records["R"]
    assert r.urai.iloc[0] == 15.0 and r.delay_l1l2_s.iloc[0] == 2.793967723846e-09
    assert r.urai.isna().sum() == 3
    # message types from the '> EPH' lines
    assert sorted(v4.records["E"].message) == ["FNAV", "INAV"]
    assert set(v4.records["C"].message) == {"D2"}


def test_v3_header_and_time_columns(test_data):
    nav = read_nav(test_data / "nav" / "mixed_v304.rnx")
    h = nav.header
    assert h.version == 3.04 and h.system == "M"
    assert set(h.iono) == {"GPSA", "GPSB", "GAL", "BDSA", "BDSB"} and h.iono["GAL"].shape == (3,)
    assert h.time_corrections["GLGP"]["a0_s"] == -3.2875686884e-07
    assert h.time_corrections["GPGA"]["week"] == 1685
    c = nav.records["C"].iloc[0]
    # BeiDou: toc in BDT; BDT week 834 + 518400 s (BDS ICD week origin 2006-01-01) is 2022-01-01 00:00 BDT
    assert c.toc_ns == civil_to_ns(2022, 1, 1) and c.toe_ns == c.toc_ns
    assert c.toc_gps_ns - c.toc_ns == 14 * 10**9  # BDT = GPS - 14 s
    assert c.message == "D2"  # PRN 1 is a GEO (D2 message)
    r = nav.records["R"].iloc[0]
    # GLONASS epochs are UTC in RINEX; GPS - UTC = 16 s in 2013 (IERS Bulletin C)
    assert r.toc_gps_ns - r.toc_ns == 16 * 10**9
    assert r.tk_ns == civil_to_ns(2013, 1, 1, 0, 0, 0)  # 172800 s of the UTC week = Tuesday 00:00
    assert r.x_m == 8450.493652344 * 1000.0 and r.freq_num == 1
    e = nav.records["E"]
    assert list(e.source) == ["fnav", "inav"] and list(e.data_source) == [258, 517]
    g = nav.records["G"].iloc[0]
    assert np.isnan(g.fit_raw) and g.fit_h == 4.0  # blank fit interval -> 4 h (IS-GPS-200 flag 0)


V2_GLO = (
    "     2.11           G: GLONASS NAV DATA                     RINEX VERSION / TYPE\n"
    "  2013     1     1   -1.657754182800D-07                    CORR TO SYSTEM TIME\n"
    "    16                                                      LEAP SECONDS\n"
    "                                                            END OF HEADER\n"
    " 1 13  1  1  0 15  0.0-1.750094816089D-04 0.000000000000D+00 0.000000000000D+00\n"
    "    8.450493652344D+03 1.381167411804D+00 0.000000000000D+00 0.000000000000D+00\n"
    "   -1.874471679688D+04-1.543292045593D+00 1.862645149231D-09 1.000000000000D+00\n"
    "    1.510979541016D+04-2.684219360352D+00-9.313225746155D-10 0.000000000000D+00\n"
)


def test_v2_glonass(tmp_path):
    # the R01 record of mixed_v304.rnx in the RINEX 2.11 GLONASS layout (frame time as seconds of day)
    nav = read_nav(_write(tmp_path, V2_GLO, "t.13g"))
    r = nav.records["R"].iloc[0]
    assert r.sat == "R01" and r.toc_ns == civil_to_ns(2013, 1, 1, 0, 15, 0)
    assert r.tk_ns == civil_to_ns(2013, 1, 1, 0, 0, 0)
    assert r.vz_mps == -2.684219360352e00 * 1000.0
    assert nav.header.time_corrections["GLUT"]["a0_s"] == -1.657754182800e-07


def test_v3_bad_epoch_reported(tmp_path, test_data):
    text = (test_data / "nav" / "mixed_v304.rnx").read_text()
    text = text.replace("C01 2022 01 01 01 00 00", "C01 2022 13 01 01 00 00")
    p = _write(tmp_path, text, "bad.rnx")
    with pytest.raises(RinexFormatError) as ei:
        read_nav(p)
    assert "epoch" in ei.value.expected
    assert text.splitlines()[ei.value.line - 1].startswith("C01 2022 13")


V2_GAL = (
    "     2.12           N: GNSS NAV DATA    E: GALILEO          RINEX VERSION / TYPE\n"
    "                                                            END OF HEADER\n"
    "24 20  5 15  0  0  0.0 5.455520295072E-03-1.993782916543E-11 0.000000000000E+00\n"
    "    8.000000000000E+01 3.037500000000E+01 2.826903466162E-09 1.111185876666E-01\n"
    "    1.413747668266E-06 5.261546466500E-04 6.578862667084E-06 5.440599994659E+03\n"
    "    4.320000000000E+05-3.725290298462E-08 9.568013010147E-01-1.490116119385E-08\n"
    "    9.805210430486E-01 2.093750000000E+02 8.678592816169E-01-5.435583556730E-09\n"
    "   -2.946551307118E-10 5.170000000000E+02 2.105000000000E+03\n"
    "    3.120000000000E+00 0.000000000000E+00 4.540197551250E-08 5.098991096020E-08\n"
    "    4.326650000000E+05\n"
)


def test_v2_galileo(tmp_path, test_data):
    # the I/NAV E24 record of mixed_v304.rnx in a RINEX 2 Galileo layout: same values as in RINEX 3
    nav = read_nav(_write(tmp_path, V2_GAL, "t.20l"))
    a = nav.records["E"].drop(columns=["line"]).iloc[0]
    v3 = read_nav(test_data / "nav" / "mixed_v304.rnx").records["E"]
    b = v3[v3.source == "inav"].drop(columns=["line"]).iloc[0]
    assert a.equals(b)


def test_gzip_file_reads_the_same(tmp_path):
    import gzip

    p = tmp_path / "t.21n.gz"
    p.write_bytes(gzip.compress((V2_HEADER + V2_REC).encode()))
    a = read_nav(p).records["G"]
    b = read_nav(_write(tmp_path, V2_HEADER + V2_REC)).records["G"]
    assert a.equals(b)


def test_blank_lines_in_body_are_ignored_with_true_line_numbers(tmp_path):
    text = V2_HEADER + "\n" + V2_REC + "\n\n" + V2_REC.replace(" 2 20 12 31 22", " 3 20 12 31 22")
    nav = read_nav(_write(tmp_path, text))
    assert list(nav.records["G"].line) == [8, 18] and nav.dropped == []
    bad = text.replace("-7.018750000000D+01", "-7.01875000000xD+01", 1)
    with pytest.raises(RinexFormatError) as ei:
        read_nav(_write(tmp_path, bad, "bad.21n"))
    assert ei.value.line == 9 and bad.splitlines()[8].startswith("    5.9")


def test_bare_integer_version_2_and_unknown_versions(tmp_path):
    # "     2" (no decimals, written by some archive tools) is RINEX 2.00, whose GPS navigation
    # record has the 2.11 layout used above; 2.50 never existed (RINEX 2.11 document's history,
    # from memory) and is refused naming line 1.
    nav = read_nav(_write(tmp_path, V2_HEADER.replace("     2.11   ", "     2      ", 1) + V2_REC))
    assert nav.header.version == 2.0
    assert len(nav.records["G"]) == 1
    with pytest.raises(RinexFormatError) as exc:
        read_nav(_write(tmp_path, V2_HEADER.replace("     2.11   ", "     2.50   ", 1) + V2_REC, "u.21n"))
    assert exc.value.line == 1 and "u.21n" in str(exc.value)


@pytest.mark.parametrize("line_in_record, col, text", [
    (1, 3, "NaN"), (1, 3, "inf"),          # IODE (RINEX 2.11 broadcast orbit 1, first field)
    (5, 41, "NaN"), (5, 41, "1.0D+300"),   # GPS week (broadcast orbit 5, third field)
    (6, 22, "-inf"),                       # SV health (broadcast orbit 6, second field)
    (6, 60, "NaN"),                        # IODC (broadcast orbit 6, fourth field)
    (7, 22, "1.0D+09"),                    # fit interval in hours (broadcast orbit 7)
    (3, 60, "1.0D+300"),                   # sqrt(A)
])
def test_non_finite_or_impossible_fields_name_file_and_line(tmp_path, line_in_record, col, text):
    # Field positions of the RINEX 2.11 GPS navigation record (4X,4D19.12 continuation lines).
    lines = V2_REC.splitlines(keepends=True)
    ln = lines[line_in_record]
    lines[line_in_record] = ln[:col] + text.rjust(19) + ln[col + 19:]
    p = _write(tmp_path, V2_HEADER + "".join(lines))
    with pytest.raises(RinexFormatError) as exc:
        read_nav(p)
    assert str(p) in str(exc.value)
    assert exc.value.line in (7, 7 + line_in_record)   # the record's first line or the field's line


def test_time_system_correction_with_impossible_week_refused(tmp_path, test_data):
    text = (test_data / "nav" / "mixed_v304.rnx").read_text()
    i = text.index("TIME SYSTEM CORR")
    line_start = text.rindex("\n", 0, i) + 1
    line = text[line_start:i]
    bad = line[:45] + "99999" + line[50:]
    p = _write(tmp_path, text[:line_start] + bad + text[i:], "w.rnx")
    with pytest.raises(RinexFormatError) as exc:
        read_nav(p)
    assert exc.value.line == text[:line_start].count("\n") + 1
