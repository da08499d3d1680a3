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
    x, y, z = (float(v) for v in stb.arp_m)  # the partner file must match its station file (input checks)
    write_cggtts(f, tracks, CggttsHeader(lab="BRKW", x_m=x, y_m=y, z_m=z))
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


def test_fields_that_do_not_fit_are_not_available_and_partner_u_follows_our_rule(tmp_path):
    # Field widths: CGGTTS 2E data line (see tests/test_against_cggtts_v2e.py for their source).
    from ctt.exports import cggtts_to_track_table
    from ctt.formats.cggtts import representable

    # SRSV is 6 characters of 0.1 ps/s: 999998 is the largest positive value, 999999 means n/a,
    # -99999 the most negative (a sign and five digits)
    assert representable("srsv_ps_s", [99999.8, 99999.9, -9999.9, -10000.0, np.nan]).tolist() == \
        [True, False, True, False, True]
    hdr = CggttsHeader(lab="LABB")
    base = dict(sat="G07", cl="FF", mjd=59215, sttime="000200", trkl_s=780, azth_deg=10.0, refsv_ns=1.0,
                srsv_ps_s=0.0, refsys_ns=5.0, srsys_ps_s=0.0, ioe=11, mdtr_ns=10.0, smdt_ps_s=0.0,
                mdio_ns=5.0, smdi_ps_s=0.0, msio_ns=np.nan, smsi_ps_s=np.nan, isg_ns=np.nan, fr=0, hc=0,
                frc="L3P")
    import pandas as pd
    df = pd.DataFrame([dict(base, elv_deg=30.0, dsg_ns=0.5), dict(base, sat="G08", elv_deg=30.0, dsg_ns=20.0),
                       dict(base, sat="G09", elv_deg=30.0, dsg_ns=np.nan)])
    t = cggtts_to_track_table(hdr, df).set_index("sat")
    # our code-noise model (ctt.measure: 0.3 m / sin el, x sqrt(2.546^2 + 1.546^2) iono-free) over
    # 26 points (780 s at 30 s): sigma/sqrt(26); sqrt(a1^2+a2^2) from the IS-GPS-200 frequencies
    f1, f2 = 1575.42e6, 1227.60e6
    a1, a2 = f1**2 / (f1**2 - f2**2), f2**2 / (f1**2 - f2**2)
    sig = 0.3 / 0.5 / 299792458.0 * 1e9 * np.hypot(a1, a2)
    assert t.loc["G07", "u_apriori_ns"] == pytest.approx(sig / np.sqrt(26), rel=1e-12)
    # residual RMS compatible with the model: the model's value (plus the 0.1 ns rounding)
    assert t.loc["G07", "u_ns"] == pytest.approx(np.hypot(sig / np.sqrt(26), 0.1 / np.sqrt(12)), rel=1e-12)
    # 20 ns RMS is far above the model (chi2(24) 99 % quantile): the residuals' value
    # (DSG is the RMS, so the residual SD with 24 dof is 20*sqrt(26/24) and u = that/sqrt(26))
    assert t.loc["G08", "u_ns"] == pytest.approx(np.hypot(20 / np.sqrt(24), 0.1 / np.sqrt(12)), rel=1e-12)
    assert t.loc["G09", "flag"] == "dsg_unavailable" and t.loc["G07", "flag"] == "ok"


def test_header_receiver_and_revision_date_come_from_rinex_and_station(test_data):
    from ctt.config import load_station
    from ctt.exports import receiver_line, station_revision_date
    from ctt.formats.rinex_obs import ObsHeader
    from ctt.timescales import civil_to_ns

    st = load_station(test_data / "stations" / "zimm.toml")
    t = int(civil_to_ns(2021, 1, 1, 12, 0, 0))
    assert station_revision_date(st, t) == "2020-01-01"   # its only delay set's valid_from
    h = ObsHeader(version=2.11, receiver_type="TRIMBLE NETR9", receiver_serial="5429R49141",
                  receiver_version="5.45")
    assert receiver_line(h, st, t) == "TRIMBLE NETR9 SN 5429R49141 FW 5.45"
    assert receiver_line(ObsHeader(version=2.11), st, t) == "UNKNOWN"
