"""The measurement model on real open data (../shared/data/real-2021-001).

Stations ZIMM and CN00 on 2021-01-01, positions from the RINEX headers (ZIMM's
is within about 1 m of its frame coordinate: data README). The figure checked
is the RMS over the day of the per-satellite residuals against each epoch's
robust mean, above 15° elevation. These RMS bounds are REGRESSION bounds: the
figures ctt measured on these files when the bounds were set (ZIMM / CN00: precise
iono-free 1.294 / 1.237 m, broadcast iono-free 1.331 / 1.291 m, broadcast single
frequency 0.962 / 0.926 m), rounded up to the bound a first project issue set; they
guard against a model change making things worse, they are not an external accuracy
figure (code noise and multipath of a geodetic receiver dominate; iono-free triples the
code noise). The external checks of this file are the met-file troposphere (published
formulas, per row) and the IONEX wiring; the pair's external truth is the IGS station
clocks of real-2011-283 (tests/test_against_igs_station_clocks.py).
Both receivers give C1 (C/A) but no P1, so the iono-free combination carries
each satellite's C1-P1 code bias times 2.546 (ctt.signals notes): a constant
per satellite of up to ~2 m, which carrier smoothing cannot remove.
"""

import numpy as np
import pytest

from ctt.config import load_station
from ctt.measure import MeasureOptions, measure_station
from ctt.orbits import BroadcastOrbits
from ctt.formats.sp3 import read_sp3
from ctt.orbits import PreciseOrbits
from ctt.formats.rinex_met import read_met
from ctt.formats.rinex_nav import read_nav
from ctt.formats.rinex_obs import read_obs

C = 299_792_458.0


@pytest.fixture(scope="module")
def real(shared_data, test_data):
    nav = read_nav(shared_data / "brdc0010.21n")
    sp3 = read_sp3(shared_data / "igs21385.sp3")
    return {
        "nav": nav,
        "broadcast": BroadcastOrbits(nav),
        "precise": PreciseOrbits(sp3),
        "obs": {s: read_obs(shared_data / f"{s}0010.21o.gz") for s in ("zimm", "cn00")},
        "station": {s: load_station(test_data / "stations" / f"{s}.toml") for s in ("zimm", "cn00")},
        "met": read_met(shared_data / "zimm0010.21m"),
    }


def _rms_m(day, min_el=15.0):
    t = day.table
    ok = (t["flag"] == "ok") & (t["elevation_deg"] > min_el)
    return float(np.sqrt(np.mean(t.loc[ok, "residual_ns"] ** 2)) * C * 1e-9), t[ok]


@pytest.mark.parametrize("site", ["zimm", "cn00"])
@pytest.mark.parametrize("orbits, signals, bound_m", [
    ("precise", "iono-free", 1.3),    # regression bound (measured 1.294 / 1.237 m), IGS finals, iono-free
    ("broadcast", "iono-free", 1.4),  # regression bound (measured 1.331 / 1.291 m), broadcast, iono-free
    ("broadcast", "single", 1.1),     # regression bound (measured 0.962 / 0.926 m), C1 with Klobuchar
])
def test_residual_rms_against_epoch_mean(real, site, orbits, signals, bound_m):
    met = real["met"] if site == "zimm" else None
    day = measure_station(real["obs"][site], real[orbits], real["station"][site],
                          MeasureOptions(signals=signals), nav_header=real["nav"].header, met=met)
    rms, ok = _rms_m(day)
    print(f"{site} {orbits} {signals}: residual RMS {rms:.3f} m over {len(ok)} values")
    assert rms <= bound_m
    # the day is really used: most satellites and epochs contribute
    assert ok["sat"].nunique() >= 28 and ok["time"].nunique() >= 2800


@pytest.mark.parametrize("site", ["zimm", "cn00"])
def test_carrier_smoothing_removes_code_noise(real, site):
    opts = dict(signals="iono-free")
    raw = measure_station(real["obs"][site], real["precise"], real["station"][site],
                          MeasureOptions(**opts), nav_header=real["nav"].header)
    smooth = measure_station(real["obs"][site], real["precise"], real["station"][site],
                             MeasureOptions(smoothing_s=600.0, **opts), nav_header=real["nav"].header)
    rms_raw, ok_raw = _rms_m(raw)
    rms_s, ok_s = _rms_m(smooth)
    # Per-satellite scatter about its own mean (the C1-P1 code bias of each
    # satellite removed): the part smoothing acts on. Hatch (1982): the
    # averaging window shrinks white code noise by ~sqrt(N) (N = 20 here).
    within_raw = ok_raw.groupby("sat")["residual_ns"].std().pow(2).mean() ** 0.5 * C * 1e-9
    within_s = ok_s.groupby("sat")["residual_ns"].std().pow(2).mean() ** 0.5 * C * 1e-9
    print(f"{site}: RMS {rms_raw:.3f} -> {rms_s:.3f} m; within-satellite {within_raw:.3f} -> {within_s:.3f} m")
    assert within_s <= 0.6  # regression bound (measured 0.495 / 0.352 m), what smoothing can reach
    assert within_s < 0.75 * within_raw
    assert rms_s < rms_raw


def test_met_file_changes_troposphere_by_the_pressure_difference(real):
    # Saastamoinen hydrostatic delay ~2.3 mm per hPa at zenith (0.0022768 m/hPa,
    # Davis et al. 1985): the ZIMM met file vs the standard atmosphere must differ
    # at zenith by that factor times the pressure difference.
    obs, st = real["obs"]["zimm"], real["station"]["zimm"]
    a = measure_station(obs, real["broadcast"], st, MeasureOptions(), met=real["met"])
    b = measure_station(obs, real["broadcast"], st, MeasureOptions())
    da = a.table["troposphere_m"].to_numpy()
    db = b.table["troposphere_m"].to_numpy()
    assert a.info["troposphere"] == "met" and b.info["troposphere"] == "standard atmosphere"
    # Per row near the zenith (elevation > 80°), the difference expected from the published
    # formulas written out here: Saastamoinen/Davis ZHD = 0.0022768 P/(1 − 0.00266 cos 2φ −
    # 0.28e-6 H) (IERS Conventions 2010 eq. 9.11, number from memory), Saastamoinen ZWD =
    # 0.002277 (1255/T + 0.05) e, e from RH with Magnus-Tetens (Murray 1967), the standard
    # atmosphere of Berg (1948, common practice) at the antenna height, the met file's P, T, RH
    # interpolated linearly in time. Above 80° both mapping functions equal 1/sin E to 5e-5
    # (curvature term (H/R)·cot²E, ctt.atmosphere tests), 0.02 mm of the 0.3 m difference; the
    # file's 0.1 hPa rounding is the data itself. Bound: 0.1 mm per row (measured: 0.7 µm).
    from ctt.geodesy import ecef_to_geodetic

    lat, _, h = (float(v) for v in ecef_to_geodetic(st.arp_m))
    m = real["met"]
    t = a.table["time"].to_numpy()
    p, tc, rh = (np.interp(t, m.time_ns, m.values[k]) for k in ("PR", "TD", "HR"))
    p0 = 1013.25 * (1 - 2.2557e-5 * h) ** 5.2568
    t0, rh0 = 15.0 - 6.5e-3 * h, 50.0

    def zenith(p, tc, rh):
        e = rh / 100 * 6.1078 * np.exp(17.2694 * tc / (tc + 237.3))
        return (0.0022768 * p / (1 - 0.00266 * np.cos(2 * lat) - 0.28e-6 * h)
                + 0.002277 * (1255 / (tc + 273.15) + 0.05) * e)

    high = (a.table["elevation_deg"] > 80).to_numpy() & np.isfinite(da) & np.isfinite(db)
    expect = (zenith(p, tc, rh) - zenith(p0, t0, rh0)) / np.sin(np.radians(a.table["elevation_deg"].to_numpy()))
    assert high.sum() > 100
    np.testing.assert_allclose((da - db)[high], expect[high], atol=1e-4)
    # ZIMM at 956 m: P ≈ 900-902 hPa against the standard 902.5 -> tenths of a hPa to 2 hPa,
    # so the rows really carry the met file (not a constant)
    assert np.ptp((da - db)[high]) > 1e-3


def test_ionex_maps_are_used_for_single_frequency(real, test_data):
    # Wiring check with the small hand-made IONEX 1.0 file of tests/data/atmosphere
    # (00-04 h of 2021-01-01 over 30-60 N, 40 W-40 E; invented TEC values): the
    # single-frequency ionosphere column is the map's slant delay at each row.
    import dataclasses

    from ctt.atmosphere import ionex_slant_delay_m
    from ctt.formats.ionex import read_ionex
    from ctt.geodesy import ecef_to_geodetic

    ionex = read_ionex(test_data / "atmosphere" / "hand0010.21i")
    obs = real["obs"]["zimm"]
    # the maps are on UTC epochs (00:00 UTC = 00:00:18 GPS): the first 18 s of the GPS day take
    # the first map; after the last map (04:00 UT) by more than one map interval, rows are flagged
    keep = obs.time_ns < obs.time_ns[0] + 6 * 3600 * 10**9
    sub = dataclasses.replace(obs, time_ns=obs.time_ns[keep], obs={k: v[keep] for k, v in obs.obs.items()},
                              lli={k: v[keep] for k, v in obs.lli.items()}, ssi={k: v[keep] for k, v in obs.ssi.items()},
                              epoch_flag=obs.epoch_flag[keep], clock_offset_s=obs.clock_offset_s[keep])
    st = real["station"]["zimm"]
    day = measure_station(sub, real["broadcast"], st, MeasureOptions(signals="single", iono_model="ionex"),
                          nav_header=real["nav"].header, ionex=ionex)
    assert day.info["ionosphere"] == "IONEX"
    ep = ionex.epochs_ns
    late = day.table["time"] > ep[-1] + np.min(np.diff(ep))
    assert (day.table.loc[late & (day.table["elevation_deg"] > 10), "flag"] == "no_ionosphere_model").all()
    # (inside the span, rows whose rotated pierce point leaves this regional grid are flagged too)
    assert (day.table.loc[~late & (day.table["elevation_deg"] > 15), "flag"] == "ok").mean() > 0.8
    t = day.table[day.table["flag"] == "ok"]
    assert t["time"].min() == obs.time_ns[0]  # the first epoch, 18 s before the first map, is used
    lat, lon, _ = ecef_to_geodetic(st.arp_m)
    direct = ionex_slant_delay_m(ionex, t["time"].to_numpy(), float(lat), float(lon),
                                 np.radians(t["azimuth_deg"].to_numpy()), np.radians(t["elevation_deg"].to_numpy()),
                                 np.full(len(t), 1575.42e6))[0]
    np.testing.assert_allclose(t["ionosphere_m"].to_numpy(), direct, rtol=1e-12)
    assert (t["ionosphere_m"] > 0).all()


def test_measure_command_must_show(shared_data, test_data, tmp_path, capsys):
    # The "must show" command: iono-free with the IGS final orbits and clocks and the met file.
    import pandas as pd

    from ctt.cli import main

    out = tmp_path / "zimm.csv"
    rc = main(["measure", str(shared_data / "zimm0010.21o.gz"), "--nav", str(shared_data / "brdc0010.21n"),
               "--sp3", str(shared_data / "igs21385.sp3"), "--met", str(shared_data / "zimm0010.21m"),
               "--station", str(test_data / "stations" / "zimm.toml"), "--signals", "iono-free", "--out", str(out)])
    assert rc == 0
    t = pd.read_csv(out)
    for col in ("time_gps_ns", "sat", "system", "signal", "elevation_deg", "azimuth_deg", "clock_ns", "geometry_m",
                "sat_clock_ns", "relativity_ns", "group_delay_ns", "sagnac_m", "troposphere_m", "ionosphere_m",
                "tide_m", "hardware_ns", "residual_ns", "flag"):
        assert col in t.columns
    assert "time" not in t.columns  # every integer time column names its scale (issue 12)
    ok = (t["flag"] == "ok") & (t["elevation_deg"] > 15)
    assert np.sqrt(np.mean(t.loc[ok, "residual_ns"] ** 2)) * C * 1e-9 <= 1.3  # regression bound, as above
    assert "clock reference: precise" in capsys.readouterr().out


def test_a_gap_in_the_met_file_falls_back_to_the_standard_atmosphere(real):
    # A met file with a 3-hour hole: the epochs it does not cover use the standard atmosphere
    # (ctt.atmosphere) and the summary says how many; the day is not lost.
    import dataclasses

    met = real["met"]
    t0 = met.time_ns[0]
    keep = (met.time_ns < t0 + 6 * 3600 * 10**9) | (met.time_ns > t0 + 9 * 3600 * 10**9)
    holed = dataclasses.replace(met, time_ns=met.time_ns[keep], values={k: v[keep] for k, v in met.values.items()})
    day = measure_station(real["obs"]["zimm"], real["broadcast"], real["station"]["zimm"], MeasureOptions(),
                          met=holed)
    assert "standard atmosphere at" in day.info["troposphere"]
    n_std = int(day.info["troposphere"].split("standard atmosphere at ")[1].split()[0])
    # every epoch strictly inside the hole between the kept records (longer than 4 samples)
    tk = holed.time_ns
    k = np.flatnonzero(np.diff(tk) > 4 * 1800 * 10**9)[0]
    t_obs = real["obs"]["zimm"].time_ns
    assert n_std == int(np.count_nonzero((t_obs > tk[k]) & (t_obs < tk[k + 1])))
    assert (day.table["flag"] == "ok").sum() > 20_000


def test_tracks_command_with_precise_orbits(shared_data, test_data, tmp_path):
    # ctt tracks with IGS finals: no broadcast IODE exists, so IOE is the format's 'not available';
    # with broadcast orbits IOE follows the ephemeris in force at each track's midpoint.
    from ctt.cli import main
    from ctt.formats.cggtts import read_cggtts

    args = [str(shared_data / "zimm0010.21o.gz"), "--nav", str(shared_data / "brdc0010.21n"),
            "--station", str(test_data / "stations" / "zimm.toml")]
    assert main(["tracks", *args, "--sp3", str(shared_data / "igs21385.sp3"), "--out", str(tmp_path / "p.cggtts")]) == 0
    _, precise = read_cggtts(tmp_path / "p.cggtts")
    assert len(precise) > 500 and precise["ioe"].isna().all()
    assert main(["tracks", *args, "--out", str(tmp_path / "b.cggtts")]) == 0
    _, brdc = read_cggtts(tmp_path / "b.cggtts")
    per_sat = brdc.groupby("sat")["ioe"].nunique()
    assert (per_sat > 1).sum() > 10  # broadcast ephemerides change every ~2 h: several IOE per satellite
    assert (brdc["azth_deg"] < 360.0).all()
