"""SINEX station coordinates of the IGS weekly solution igs11P1657.ssc.gz, and the station commands.

Source: ../shared/data/real-2011-283/igs11P1657.ssc.gz (IGS weekly SINEX,
GPS week 1657, IGS08; CC BY 4.0). Expected values are read from the file's
text (line numbers of the decompressed file); column layout from the SINEX
2.01/2.02 format document.
"""

from __future__ import annotations

import gzip
import math
import pathlib

import numpy as np
import pytest

from ctt.cli import main
from ctt.config import load_station
from ctt.formats.sinex import read_sinex_stations
from ctt.timescales import NS_PER_S, civil_to_ns

STATIONS = pathlib.Path(__file__).parent / "data" / "stations"


@pytest.fixture(scope="module")
def ssc(shared_set):
    return shared_set("real-2011-283") / "igs11P1657.ssc.gz"


def test_brus_and_cagz_from_the_text(ssc):
    s = read_sinex_stations(ssc)
    assert len(s.sites) > 300 and s.frame == "IGS08"   # line 51: IGS08.snx, IGS realization of ITRF2008
    b = s.site("BRUS")
    # lines 2385-2387: STAX/STAY/STAZ BRUS A 2 11:286:14393 m 2 4.02789365767462e+06 5.24252e-04 ...
    assert b.xyz_m == pytest.approx([4.02789365767462e+06, 3.07045945327882e+05, 4.91947518725798e+06], abs=1e-8)
    assert b.sigma_m == pytest.approx([5.24252e-04, 2.29471e-04, 5.70300e-04])
    assert (b.point, b.solution) == ("A", "2")
    assert b.epoch_ns == int(civil_to_ns(2011, 1, 1)) + 285 * 86400 * NS_PER_S + 14393 * NS_PER_S
    # line 105 SITE/ID, line 946 SITE/ANTENNA, line 1450 SITE/ECCENTRICITY (UNE 3.9702 0 0)
    assert (b.domes, b.description) == ("13101M004", "Brussels, BE")
    assert b.antenna == "ASH701945B_M    NONE" and b.antenna_serial == "CR519"
    assert b.eccentricity_une_m == pytest.approx([3.9702, 0.0, 0.0])
    assert b.vel_mpy is None
    c = s.site("cagz")
    # lines 2406-2408 and 954, 1458
    assert c.xyz_m == pytest.approx([4.89337988174353e+06, 7.72650611464080e+05, 4.00418011182155e+06], abs=1e-8)
    assert c.antenna == "JPSREGANT_DD_E  NONE" and c.eccentricity_une_m == pytest.approx([0.0945, 0.0, 0.0])


def test_velocity_propagation(ssc, tmp_path):
    # the weekly file has no velocities: add VELX/Y/Z records for BRUS in the file's own layout
    text = gzip.open(ssc, "rt").read()
    sta = {ln[7:11]: ln for ln in text.splitlines() if ln[7:11] in ("STAX", "STAY", "STAZ") and ln[14:18] == "BRUS"}
    add = "".join(sta[f"STA{ax}"][:7] + f"VEL{ax}" + sta[f"STA{ax}"][11:40] + "m/y " + sta[f"STA{ax}"][44:47]
                  + f"{v:21.14e}" + " 1.00000e-04\n" for ax, v in zip("XYZ", (-0.0150, 0.0170, 0.0090)))
    text = text.replace("-SOLUTION/ESTIMATE", add + "-SOLUTION/ESTIMATE")
    f = tmp_path / "with_vel.snx"
    f.write_text(text)
    b = read_sinex_stations(f).site("BRUS")
    assert b.vel_mpy == pytest.approx([-0.0150, 0.0170, 0.0090])
    one_year = b.epoch_ns + int(365.25 * 86400) * NS_PER_S      # SINEX velocities are per Julian year
    assert b.position_at(one_year) - b.xyz_m == pytest.approx([-0.0150, 0.0170, 0.0090], abs=1e-9)


def test_from_sinex_writes_a_station_file_that_checks_clean(ssc, tmp_path, capsys):
    out = tmp_path / "brus.toml"
    assert main(["station", "from-sinex", str(ssc), "--site", "BRUS", "--date", "2011-10-10",
                 "--station", str(STATIONS / "brus.toml"), "--out", str(out)]) == 0
    st = load_station(out)
    assert st.position_m == pytest.approx([4027893.65767462, 307045.945327882, 4919475.18725798], abs=1e-6)
    assert st.is_marker and st.antenna.antex_name == "ASH701945B_M    NONE"
    assert st.antenna.delta_hen_m == pytest.approx([3.9702, 0.0, 0.0])
    assert st.frame == "IGS08" and st.epoch == pytest.approx(2011.7726, abs=1e-4)
    assert st.delay_sets == load_station(STATIONS / "brus.toml").delay_sets    # kept from --station
    capsys.readouterr()
    assert main(["station", "check", str(out), "--sinex", str(ssc)]) == 0
    assert "east +0.0 mm, north +0.0 mm, up +0.0 mm" in capsys.readouterr().out
    # a new file without --station: placeholder delays, reads back
    new = tmp_path / "cagz.toml"
    assert main(["station", "from-sinex", str(ssc), "--site", "CAGZ", "--out", str(new)]) == 0
    c = load_station(new)
    assert c.id == "CAGZ" and c.antenna.antex_name == "JPSREGANT_DD_E  NONE" and "placeholder" in c.delay_sets[0].note


def test_check_reports_the_difference_and_fails_beyond_tolerance(ssc, tmp_path, capsys):
    s = read_sinex_stations(ssc).site("BRUS")
    txt = (STATIONS / "brus.toml").read_text()
    # a station file 0.10 m off along X from the SINEX marker
    moved = s.xyz_m + np.array([0.10, 0.0, 0.0])
    for ax, v in zip("xyz", moved):
        import re
        txt = re.sub(rf"{ax}_m = [-0-9.]+", f"{ax}_m = {v:.4f}", txt)
    f = tmp_path / "off.toml"
    f.write_text(txt)
    capsys.readouterr()
    assert main(["station", "check", str(f), "--sinex", str(ssc), "--date", "2011-10-10"]) == 2
    out = capsys.readouterr().out
    # a rotation keeps lengths: the 3-D E/N/U difference is the 0.100 m ECEF offset (to the 0.1 mm
    # rounding of the file's coordinates)
    d3 = float(out.split("3-D ")[1].split(" mm")[0])
    assert d3 == pytest.approx(100.0, abs=0.2)
    # up is the offset's projection on the ellipsoidal normal: cos(lat)cos(lon)·0.1 m (BRUS ~50.8 N, 4.4 E)
    lat, lon = math.radians(50.798), math.radians(4.359)
    up = float(out.split("up ")[1].split(" mm")[0])
    assert up == pytest.approx(100.0 * math.cos(lat) * math.cos(lon), abs=0.5)
    assert main(["station", "check", str(f), "--sinex", str(ssc), "--tolerance-m", "0.2"]) == 0
