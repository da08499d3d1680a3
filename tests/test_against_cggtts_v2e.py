"""The open CV exchange format, CGGTTS version 2E (CCTF/BIPM; Metrologia 52 (2015) G1).

The published document itself could not be retrieved while writing these tests,
so the field layout and checksum rules below are FROM MEMORY of it, cross-checked
only against header lines of version 2E files published by the BIPM (first line
'CGGTTS GENERIC DATA FORMAT VERSION = 2E', then REV DATE, RCVR, CH, IMS, LAB,
X, Y, Z, FRAME, COMMENTS, 'INT DLY = ... ns (GPS P1), ... ns (GPS P2) CAL_ID = ...',
CAB DLY, REF DLY, REF, 'CKSUM = <2 hex digits>'). Each check names what it relies on.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ctt.formats import cggtts as CG
from ctt.errors import FileFormatError


def _ck(text: str) -> str:
    # checksum as the format defines it (from memory): sum of ASCII codes mod 256, 2 hex digits
    total = 0
    for ch in text:
        total += ord(ch)
    return f"{total % 256:02X}"


HEADER = [
    "CGGTTS     GENERIC DATA FORMAT VERSION = 2E",   # 5 spaces after CGGTTS: from memory
    "REV DATE = 2021-01-01",
    "RCVR = INVENTED RX-1 SN0001",
    "CH = 20",
    "IMS = 99999",
    "LAB = LABA",
    "X = +4034007.87 m",
    "Y = +502462.24 m",
    "Z = +4898445.16 m",
    "FRAME = ITRF2014",
    "COMMENTS = INVENTED TEST FILE",
    "INT DLY = 25.3 ns (GPS C1), 27.0 ns (GPS C2)     CAL_ID = NA",
    "CAB DLY = 152.4 ns",
    "REF DLY = 11.8 ns",
    "REF = LABA-CS1",
]


def _data_line(sat, cl, mjd, st, trkl, elv, azth, refsv, srsv, refsys, srsys, dsg, ioe, mdtr, smdt, mdio,
               smdi, msio, smsi, isg, fr, hc, frc):
    # columns from memory of the 2E table: SAT 1-3, CL 5-6, MJD 8-12, STTIME 14-19, TRKL 21-24,
    # ELV 26-28, AZTH 30-33, REFSV 35-45, SRSV 47-52, REFSYS 54-64, SRSYS 66-71, DSG 73-76,
    # IOE 78-80, MDTR 82-85, SMDT 87-90, MDIO 92-95, SMDI 97-100, MSIO 102-105, SMSI 107-110,
    # ISG 112-114, FR 116-117, HC 119-120, FRC 122-124, CK 126-127 (sum over columns 1-125)
    body = (f"{sat:3s} {cl:2s} {mjd:5d} {st:6s} {trkl:4d} {elv:3d} {azth:4d} {refsv:11d} {srsv:6d} "
            f"{refsys:11d} {srsys:6d} {dsg:4d} {ioe:3d} {mdtr:4d} {smdt:4d} {mdio:4d} {smdi:4d} {msio:4d} "
            f"{smsi:4d} {isg:3d} {fr:2d} {hc:2d} {frc:3s} ")
    assert len(body) == 125
    return body + _ck(body)


def _file_text(lines=None, header=HEADER):
    head = list(header)
    cks = _ck("".join(head) + "CKSUM = ")   # header checksum over lines 1..CKSUM = (from memory)
    data = lines if lines is not None else [
        _data_line("G07", "FF", 59215, "000200", 780, 453, 1234, -29296, -198, 134, 12, 41, 11, 138, -14, 87,
                   2, 96, 5, 11, 0, 0, "L3P"),
        _data_line("G30", "FF", 59215, "001800", 780, 102, 3571, 1234567, 321, -56, -7, 120, 86, 411, 25, 99,
                   -3, 9999, 9999, 999, 0, 12, "L3P"),
    ]
    labels = ("SAT CL  MJD  STTIME TRKL ELV AZTH   REFSV      SRSV     REFSYS    SRSYS  DSG IOE MDTR SMDT "
              "MDIO SMDI MSIO SMSI ISG FR HC FRC CK")
    units = "             hhmmss  s  .1dg .1dg    .1ns     .1ps/s     .1ns    .1ps/s .1ns"
    return "\n".join(head + [f"CKSUM = {cks}", "", labels, units] + data) + "\n"


def test_reads_a_file_built_from_the_layout(tmp_path):
    p = tmp_path / "GZLA0159.215"
    p.write_text(_file_text())
    hdr, df = CG.read_cggtts(p)
    assert hdr.lab == "LABA" and hdr.ch == 20 and hdr.delay_kind == "INT"
    assert hdr.delays == [(25.3, "GPS C1"), (27.0, "GPS C2")] and hdr.cal_id == "NA"
    assert (hdr.cab_dly_ns, hdr.ref_dly_ns, hdr.ref) == (152.4, 11.8, "LABA-CS1")
    assert hdr.x_m == 4034007.87
    r = df.iloc[0]
    # units from the format: 0.1 deg, 0.1 ns, 0.1 ps/s (from memory; same units as version 01)
    assert (r.sat, r.cl, r.mjd, r.sttime, r.trkl_s) == ("G07", "FF", 59215, "000200", 780)
    assert r.elv_deg == pytest.approx(45.3) and r.azth_deg == pytest.approx(123.4)
    assert r.refsv_ns == pytest.approx(-2929.6) and r.srsv_ps_s == pytest.approx(-19.8)
    assert r.refsys_ns == pytest.approx(13.4) and r.srsys_ps_s == pytest.approx(1.2)
    assert r.dsg_ns == pytest.approx(4.1) and r.ioe == 11 and r.frc == "L3P"
    assert r.mdtr_ns == pytest.approx(13.8) and r.smdt_ps_s == pytest.approx(-1.4)
    assert r.msio_ns == pytest.approx(9.6) and r.isg_ns == pytest.approx(1.1)
    r2 = df.iloc[1]
    # all 9s = not available (from memory of the format's convention)
    assert np.isnan(r2.msio_ns) and np.isnan(r2.smsi_ps_s) and np.isnan(r2.isg_ns)
    assert r2.refsv_ns == pytest.approx(123456.7) and r2.hc == 12


def test_writer_output_matches_the_layout_and_checksums(tmp_path):
    p = tmp_path / "in.cggtts"
    p.write_text(_file_text())
    hdr, df = CG.read_cggtts(p)
    out = tmp_path / "out.cggtts"
    CG.write_cggtts(out, df, hdr)
    lines = out.read_text().splitlines()
    # header checksum: our independent sum over the written header lines
    i = next(k for k, ln in enumerate(lines) if ln.startswith("CKSUM = "))
    assert lines[i] == "CKSUM = " + _ck("".join(lines[:i]) + "CKSUM = ")
    data = [ln for ln in lines[i + 1:] if ln[:1] in ("G", "E", "R", "C", "J")]
    assert len(data) == 2
    expected = _file_text().splitlines()[-2:]
    assert data == expected                           # byte-identical data lines
    for ln in data:
        assert len(ln) == 127 and ln[125:] == _ck(ln[:125])


@pytest.mark.parametrize("kind", ["SYS", "TOT"])
def test_round_trip_to_the_format_resolution(tmp_path, kind):
    rng = np.random.default_rng(7)
    n = 60
    df = pd.DataFrame({
        "sat": [f"G{k:02d}" for k in rng.integers(1, 33, n)], "cl": "FF", "mjd": 59215,
        "sttime": [f"{h:02d}{m:02d}00" for h, m in zip(rng.integers(0, 24, n), rng.integers(0, 60, n))],
        "trkl_s": 780, "elv_deg": rng.uniform(10, 90, n), "azth_deg": rng.uniform(0, 359.9, n),
        "refsv_ns": rng.uniform(-1e5, 1e5, n), "srsv_ps_s": rng.uniform(-999, 999, n),
        "refsys_ns": rng.uniform(-1e3, 1e3, n), "srsys_ps_s": rng.uniform(-99, 99, n),
        "dsg_ns": rng.uniform(0, 99, n), "ioe": rng.integers(0, 255, n), "mdtr_ns": rng.uniform(5, 80, n),
        "smdt_ps_s": rng.uniform(-99, 99, n), "mdio_ns": rng.uniform(0, 99, n), "smdi_ps_s": rng.uniform(-99, 99, n),
        "msio_ns": rng.uniform(0, 99, n), "smsi_ps_s": rng.uniform(-99, 99, n), "isg_ns": rng.uniform(0, 9, n),
        "fr": 0, "hc": rng.integers(0, 20, n), "frc": "L3P"})
    df.loc[5, "mdio_ns"] = np.nan
    hdr = CG.CggttsHeader(lab="LABB", x_m=4495078.80, y_m=955458.49, z_m=4408115.93, delay_kind=kind,
                         delays=[(190.2, "GPS C1")], ref_dly_ns=5.0, ref="LABB-H1")
    p = tmp_path / "rt.cggtts"
    CG.write_cggtts(p, df, hdr)
    text = p.read_text()
    # SYS: no CAB DLY line; TOT: neither CAB DLY nor REF DLY (from memory of the three variants)
    assert "CAB DLY" not in text and (("REF DLY = 5.0 ns" in text) == (kind == "SYS"))
    hdr2, back = CG.read_cggtts(p)
    assert hdr2.delay_kind == kind and hdr2.cab_dly_ns is None
    assert hdr2.ref_dly_ns == (5.0 if kind == "SYS" else None)
    assert hdr2.lab == "LABB" and hdr2.delays == [(190.2, "GPS C1")]
    for c in CG.TRACK_COLUMNS:
        a, b = df[c].to_numpy(), back[c].to_numpy()
        if df[c].dtype.kind == "f":
            # resolution 0.1 of the unit: the read value is the value rounded to 0.1
            np.testing.assert_allclose(b, np.round(a * 10) / 10, atol=1e-9, equal_nan=True, err_msg=c)
        else:
            assert list(a) == list(b), c


def test_corrupted_character_is_detected(tmp_path):
    text = _file_text()
    lines = text.split("\n")
    k = len(lines) - 2                                  # last data line
    ln = lines[k]
    lines[k] = ln[:40] + ("7" if ln[40] != "7" else "8") + ln[41:]
    p = tmp_path / "bad.cggtts"
    p.write_text("\n".join(lines))
    with pytest.raises(FileFormatError) as ei:
        CG.read_cggtts(p)
    assert ei.value.line == k + 1 and "checksum" in str(ei.value)
    # a changed header character breaks CKSUM
    p.write_text(text.replace("CAB DLY = 152.4 ns", "CAB DLY = 152.5 ns"))
    with pytest.raises(FileFormatError) as ei:
        CG.read_cggtts(p)
    assert ei.value.line == 16 and "header checksum" in str(ei.value)


def test_file_without_measured_ionosphere(tmp_path):
    # single-frequency variant (from memory): no MSIO, SMSI, ISG columns
    body = "G07 FF 59215 000200  780 453 1234      -29296   -198         134     12   41  11  138  -14   87    2  0  0 L1C "
    line = body + _ck(body)
    labels = "SAT CL  MJD  STTIME TRKL ELV AZTH   REFSV      SRSV     REFSYS    SRSYS  DSG IOE MDTR SMDT MDIO SMDI FR HC FRC CK"
    head = HEADER
    text = "\n".join(head + ["CKSUM = " + _ck("".join(head) + "CKSUM = "), "", labels, "units", line]) + "\n"
    p = tmp_path / "sf.cggtts"
    p.write_text(text)
    _, df = CG.read_cggtts(p)
    assert df["frc"].iloc[0] == "L1C" and np.isnan(df["msio_ns"].iloc[0])
    assert df["mdio_ns"].iloc[0] == pytest.approx(8.7)


def test_bad_files_name_the_line(tmp_path):
    p = tmp_path / "x.cggtts"
    p.write_text("GGTTS GPS DATA FORMAT VERSION = 01\n")
    with pytest.raises(FileFormatError) as ei:
        CG.read_cggtts(p)
    assert ei.value.line == 1 and "VERSION = 2E" in str(ei.value)
    p.write_text(_file_text().replace("CH = 20", "CH = twenty"))
    with pytest.raises(FileFormatError) as ei:
        CG.read_cggtts(p)
    assert ei.value.line == 4


def test_writer_refuses_values_that_do_not_fit(tmp_path):
    p = tmp_path / "in.cggtts"
    p.write_text(_file_text())
    hdr, df = CG.read_cggtts(p)
    df.loc[0, "dsg_ns"] = 1000.0        # 10000 in 0.1 ns: 5 characters for a 4-character field
    with pytest.raises(ValueError, match="dsg_ns"):
        CG.write_cggtts(tmp_path / "o.cggtts", df, hdr)
    assert not (tmp_path / "o.cggtts").exists()
