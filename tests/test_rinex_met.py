"""RINEX meteorological reader and interpolation (RINEX 2.11 Tables A9/A10,
RINEX 3.05 Tables A20/A21), on the real ZIMM file and on hand-written files."""

from __future__ import annotations

import numpy as np
import pytest

from ctt import timescales as ts
from ctt.errors import OutOfSpanError, RinexFormatError
from ctt.formats.rinex_met import interpolate_met, read_met


def test_real_zimm_met_file(shared_data):
    m = read_met(shared_data / "zimm0010.21m")
    # data README: pressure, dry temperature, humidity every 30 min over the day
    assert m.obs_types == ("PR", "TD", "HR")
    assert m.version == 2.0 and m.marker == "ZIMMERWALD"
    assert m.time_ns.size == 48
    # epochs as printed in the file: first 21 1 1 0 25 2, last 21 1 1 23 55 2
    assert ts.to_iso(m.time_ns[0]) == "2021-01-01T00:25:02Z"
    assert ts.to_iso(m.time_ns[-1]) == "2021-01-01T23:55:02Z"
    step = np.diff(m.time_ns) / 1e9
    assert np.all(np.abs(step - 1800) <= 2)  # 30 min, the recorder's seconds wander by 1-2 s
    assert m.interval_s() == pytest.approx(1800, abs=1)
    # values as printed in the first and last records
    assert (m.values["PR"][0], m.values["TD"][0], m.values["HR"][0]) == (900.2, -4.6, 70.0)
    assert (m.values["PR"][-1], m.values["TD"][-1], m.values["HR"][-1]) == (903.3, -5.2, 70.0)
    # a station at ~950 m: pressure near the standard atmosphere's ~900 hPa (common practice)
    assert np.all((m.values["PR"] > 880) & (m.values["PR"] < 920))
    # interpolation over the whole day at 30 s: 00:00 is 25 min before the first sample,
    # within one interval, so it is accepted
    t = ts.civil_to_ns(2021, 1, 1) + np.arange(0, 86400, 30, dtype=np.int64) * 10**9
    v = interpolate_met(m, t)
    assert v["PR"].shape == (2880,)
    assert v["PR"][0] == 900.2  # held at the first sample
    i = int(np.searchsorted(t, m.time_ns[0] + (m.time_ns[1] - m.time_ns[0]) // 2))
    frac = (t[i] - m.time_ns[0]) / (m.time_ns[1] - m.time_ns[0])
    assert v["PR"][i] == pytest.approx(900.2 + frac * (900.3 - 900.2), abs=1e-9)


def _h(content, label):
    return content.ljust(60) + label + "\n"


RINEX3 = (
    _h("     3.05           METEOROLOGICAL DATA", "RINEX VERSION / TYPE")
    + _h("handwritten         test                20210101 000000 UTC", "PGM / RUN BY / DATE")
    + _h("TEST", "MARKER NAME")
    + _h("    10" + "".join(f"{t:>6}" for t in ("PR", "TD", "HR", "ZW", "ZD", "ZT", "WD", "WS", "RI")),
         "# / TYPES OF OBSERV")
    + _h("      " + f"{'HI':>6}", "# / TYPES OF OBSERV")
    + _h(f"{'SOMEBARO':<20}{'SOMETYPE':<20}{'':6}{0.1:7.1f}    PR", "SENSOR MOD/TYPE/ACC")
    + _h(f"{4331297.0:14.4f}{567555.0:14.4f}{4633133.0:14.4f}{956.0:14.4f} PR", "SENSOR POS XYZ/H")
    + _h("", "END OF HEADER")
    + " 2021 01 01 00 00 00 1000.0   10.0   50.0  100.0 2300.0 2400.0  180.0    2.5\n"
    + "        0.0    1.0\n"
    + " 2021 01 01 00 10 00 1001.0   12.0   52.0  101.0 2301.0 2401.0  190.0    3.5\n"
    + "               2.0\n"
    + " 2021 01 01 00 20 00 1002.0   14.0   54.0  102.0 2302.0 2402.0  200.0    4.5\n"
    + "        0.0    3.0\n"
)


def test_rinex3_with_continuation_lines(tmp_path):
    p = tmp_path / "TEST00XXX_R_20210010000_01D_10M_MM.rnx"
    p.write_text(RINEX3)
    m = read_met(p)
    assert m.version == 3.05 and len(m.obs_types) == 10 and m.time_ns.size == 3
    assert np.array_equal(m.values["WS"], [2.5, 3.5, 4.5])
    assert np.isnan(m.values["RI"][1])  # blank field = missing
    assert np.array_equal(m.values["HI"], [1.0, 2.0, 3.0])
    assert m.sensor_pos["PR"][3] == 956.0
    assert m.sensor_type["PR"][0] == "SOMEBARO"
    v = interpolate_met(m, [ts.civil_to_ns(2021, 1, 1, 0, 5)], types=("PR", "TD", "RI"))
    assert v["PR"][0] == pytest.approx(1000.5) and v["TD"][0] == pytest.approx(11.0)
    # RI at 00:05 interpolates between the valid samples 00:00 and 00:20 only
    assert v["RI"][0] == pytest.approx(0.0)
    # more than one interval (600 s) outside the span: error naming the file
    with pytest.raises(OutOfSpanError, match="TEST00XXX"):
        interpolate_met(m, [ts.civil_to_ns(2021, 1, 1, 0, 31)])
    # within one interval after the end: held at the last value
    assert interpolate_met(m, [ts.civil_to_ns(2021, 1, 1, 0, 29)])["PR"][0] == 1002.0
    with pytest.raises(OutOfSpanError, match="gap"):
        interpolate_met(m, [ts.civil_to_ns(2021, 1, 1, 0, 5)], max_gap_s=300)


def test_errors_name_file_and_line(tmp_path):
    p = tmp_path / "bad.21m"
    p.write_text(RINEX3.replace(" 2021 01 01 00 10 00", " 2021 01 0x 00 10 00"))
    with pytest.raises(RinexFormatError, match=r"bad.21m:11: expected an epoch"):
        read_met(p)
    p.write_text(RINEX3.replace("1001.0", "10a1.0"))
    with pytest.raises(RinexFormatError, match=r"bad.21m:11: expected a value"):
        read_met(p)
    p.write_text(RINEX3.replace("METEOROLOGICAL DATA", "OBSERVATION DATA   ").replace("     3.05           M",
                                                                                       "     3.05           O"))
    with pytest.raises(RinexFormatError, match=r"bad.21m:1: expected"):
        read_met(p)
    p.write_text(RINEX3.replace("    10    PR", "    11    PR"))
    with pytest.raises(RinexFormatError, match="11 observation types"):
        read_met(p)
    p.write_text(RINEX3.rsplit("\n", 2)[0] + "\n")  # drop the last continuation line
    with pytest.raises(RinexFormatError, match="line"):
        read_met(p)
