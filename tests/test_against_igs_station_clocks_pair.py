"""`ctt pair --mode ppp` on real pairs with IGS products.

* BRUS − CAGZ on 2011-10-10 (../shared/data/real-2011-283): the IGS final clock
  file's AR records are the IGS network's carrier-phase estimates of both
  station clocks (data README), an external truth for the pair difference up to
  a constant (uncalibrated receiver delays). PPP issue target: the PPP pair
  follows it to ≤ 0.15 ns RMS about a constant. The same day in common-view
  epochs and in all-in-view with the P1/P2 codes is printed against the same
  truth (the issue quotes 1.98 / 1.99 ns for them).
* ALGO − ZIMM on 2016-01-01 (../shared/data/real-2016-001, about 6,000 km, a
  multi-GNSS centre's 5-min SP3 orbits and clocks with the neighbouring days):
  the PPP pair series has no gap at the day edges, its mean agrees with the
  smoothed all-in-view series within 1 ns, and its TDEV at 1,000 s and
  10,000 s is printed.

Station coordinates: BRUS and CAGZ from the IGS weekly SINEX igs11P1657.ssc.gz
(SOLUTION/ESTIMATE STAX/STAY/STAZ, marker, IGS08) with the antenna heights of
their RINEX headers; ALGO and ZIMM from their RINEX headers (approximate,
metres: the PPP estimates the position). Delays are not calibrated (zero).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ctt.config import load_station

from station_files import igs_station_toml


STATIONS = {
    # IGS weekly SINEX igs11P1657.ssc.gz, SOLUTION/ESTIMATE (m); antenna type and height: RINEX headers
    "BRUS": dict(x=4027893.65767462, y=307045.945327882, z=4919475.18725798, sigma=0.002, frame="IGS08",
                 epoch=2011.78, antenna="ASH701945B_M    NONE", dh=3.9702),
    "CAGZ": dict(x=4893379.88174353, y=772650.611464080, z=4004180.11182155, sigma=0.002, frame="IGS08",
                 epoch=2011.78, antenna="JPSREGANT_DD_E  NONE", dh=0.0945),
    # RINEX header APPROX POSITION (approximate; data README)
    "ALGO": dict(x=918129.4, y=-4346071.2, z=4561977.8, sigma=5.0, frame="RINEX header approximate position",
                 epoch=2016.0, antenna="AOAD/M_T        NONE", dh=0.1),
    "ZIMM": dict(x=4331297.348, y=567555.640, z=4633133.728, sigma=5.0, frame="RINEX header approximate position",
                 epoch=2016.0, antenna="TRM29659.00     NONE", dh=0.0),
}


def _station(folder, sid):
    p = folder / f"{sid.lower()}.toml"
    v = STATIONS[sid]
    p.write_text(igs_station_toml(sid, (v["x"], v["y"], v["z"]), v["antenna"], v["dh"], sigma=v["sigma"],
                                  frame=v["frame"], epoch=v["epoch"], mask=10.0))
    return load_station(p)


def _rms_about_mean(d):
    d = np.asarray(d, dtype=float)
    return float(np.sqrt(np.mean((d - d.mean()) ** 2)))


@pytest.fixture(scope="module")
def day_2011(shared_set, tmp_path_factory):
    from ctt.formats.rinex_clock import read_clock
    from ctt.pipeline import PairInputs

    d = shared_set("real-2011-283")
    folder = tmp_path_factory.mktemp("brus-cagz")
    inputs = PairInputs(obs_a=str(d / "brus2830.11o.gz"), obs_b=str(d / "cagz2830.11d"),
                        sp3=tuple(str(d / f"igs1657{k}.sp3") for k in (0, 1, 2)), clk=str(d / "igs16571.clk"),
                        antex=str(d / "igs08_1648.atx.gz"))
    st = read_clock(d / "igs16571.clk").stations
    ar = pd.Series((st.bias_s[:, st.column("BRUS")] - st.bias_s[:, st.column("CAGZ")]) * 1e9,
                   index=st.time_ns).dropna()
    return inputs, _station(folder, "BRUS"), _station(folder, "CAGZ"), ar, folder


def _against_ar(offset, ar):
    o = offset[offset["flag"] == "ok"].set_index("time")
    common = ar.index.intersection(o.index)
    return (o.loc[common, "offset_ns"] - ar.loc[common]).to_numpy(), len(common)


@pytest.mark.slow
def test_ppp_pair_follows_the_igs_station_clocks(day_2011):
    """BRUS − CAGZ by PPP against the AR difference (00:00-11:55, 5-min epochs): ≤ 0.15 ns RMS about a
    constant (PPP issue target; IGS AR clocks carry 0.01-0.03 ns formal sigmas, data README).

    CAGZ resets its clock by +1 ms 26 times in the day (data README); the AR clocks and the PPP clock both
    follow the receiver clock, so the difference has no jump. With the week's IGS ERP file both
    stations get the solid Earth pole tide (IERS 2010 §7.1.4), as the IGS analysis centres' solutions
    behind the AR clocks model it (IERS Conventions; common practice)."""
    import dataclasses
    import pathlib

    from ctt.pipeline import PairOptions, run_pair, write_pair_outputs

    inputs, a, b, ar, folder = day_2011
    erp = pathlib.Path(inputs.clk).with_name("igs16577.erp")
    res = run_pair(dataclasses.replace(inputs, erp=str(erp)), a, b, PairOptions(mode="ppp"))
    for who in ("A", "B"):       # the pair wiring hands the ERP data to both stations' PPP
        assert res.summary["models"][who]["models"]["pole_tide"] == "IERS 2010 §7.1.4 with igs16577.erp"
    assert res.summary["inputs"]["erp"]["path"] == str(erp)
    write_pair_outputs(res, folder / "ppp")
    d, n = _against_ar(res.offset, ar)
    rms = _rms_about_mean(d)
    print(f"\nBRUS-CAGZ PPP pair vs IGS AR clocks: {n} common 5-min epochs, RMS about a constant {rms:.3f} ns "
          f"(target 0.15), max |dev| {np.max(np.abs(d - d.mean())):.3f} ns; "
          f"jumps found at CAGZ: {res.summary['models']['B']['n_clock_jumps']}")
    assert n >= 130  # 144 AR epochs in 00:00-11:55
    assert rms <= 0.15
    assert res.summary["models"]["B"]["n_clock_jumps"] == 26  # data README: 26 resets of +1 ms in the day


@pytest.mark.slow
@pytest.mark.parametrize("mode", ["epochs", "all-in-view"])
def test_code_modes_against_the_same_truth(day_2011, mode):
    """The same day with the code only (P1/P2, IGS final orbits and clocks): how far from the AR truth.

    The code-only series cannot follow the truth below the code noise, 1-2 ns per 30-s epoch (data
    README; the issue measured 1.98 ns in CV epochs and 1.99 ns all-in-view). Printed; checked only to
    lie within that code-noise range, so the carrier-phase figure of the test above has its yardstick."""
    from ctt.measure import MeasureOptions
    from ctt.pipeline import PairOptions, run_pair

    inputs, a, b, ar, _ = day_2011
    opt = PairOptions(mode=mode, orbits="precise", measure=MeasureOptions(codes=("C1W", "C2W")))
    res = run_pair(inputs, a, b, opt)
    d, n = _against_ar(res.offset, ar)
    rms = _rms_about_mean(d)
    print(f"\nBRUS-CAGZ {mode} with P1/P2 vs IGS AR clocks: {n} common epochs, RMS about a constant {rms:.2f} ns")
    assert n >= 130
    assert 0.5 <= rms <= 3.0


@pytest.mark.slow
def test_algo_zimm_ppp_pair_across_the_day(shared_set, tmp_path):
    """ALGO − ZIMM, 2016-01-01, 5-min SP3 clocks of the day before, the day and the day after.

    * no gap at the day edges: the first and last epochs of the day (00:00:00 and 23:59:30 GPS) are 'ok'
      (the neighbouring days' SP3 files make interpolation valid there);
    * the mean agrees with the carrier-smoothed (600 s) all-in-view series within 1 ns (PPP issue),
      all-in-view measured with the same codes as the PPP at each station (ALGO P1/P2; ZIMM has no P1
      and uses C1/P2 in both): the receivers' C1−P1 delays are not calibrated, so different code
      choices would differ by them (×2.546 in the iono-free code);
    * TDEV at about 1,000 s and 10,000 s printed (tens of ps for good clocks, common practice);
    * which clock wanders: the pair's TDEV (0.8 ns at 990 s, 3.7 ns at 9,990 s when measured)
      is far above that. Each station's own PPP clock against the product's time scale tells
      the two apart: ALGO's is smooth at the level the data README gives for a station on a
      good clock (10–50 ps over hours; measured TDEV 15 ps at 990 s, 36 ps at 9,990 s), so
      ≤ 50 ps there; ZIMM's carries the wander (measured 0.82 / 3.8 ns). That the wander is
      ZIMM's clock and not a PPP artefact: ZIMM's code-only clock (600-s smoothed, its own
      epoch solution, nothing shared with the PPP but the product and the observation file)
      follows the same wander, so PPP − code scatters far less than the wander itself (the
      code series' noise, about 1 ns, against an RMS of several ns about a quadratic).
    """
    from ctt import commonview, stability, tracks
    from ctt import timescales as ts
    from ctt.measure import MeasureOptions
    from ctt.pipeline import PairInputs, PairOptions, load_orbits, measure_file, run_pair

    d = shared_set("real-2016-001")
    a, b = _station(tmp_path, "ALGO"), _station(tmp_path, "ZIMM")
    inputs = PairInputs(obs_a=str(d / "algo0010.16o.gz"), obs_b=str(d / "zimm0010.16o.gz"),
                        sp3=tuple(str(d / f"gbm1877{k}.sp3.gz") for k in (4, 5, 6)))
    bundle = load_orbits(inputs, "precise")
    res = run_pair(inputs, a, b, PairOptions(mode="ppp"), orbits_bundle=bundle)
    o = res.offset
    ok = o[o["flag"] == "ok"]
    day0 = ts.parse_iso("2016-01-01T00:00:00")
    assert ok["time"].iloc[0] == day0 and ok["time"].iloc[-1] == day0 + 86_370 * ts.NS_PER_S
    # AIV with the PPP's codes at each station
    used = {k: set(res.summary["models"][k]["signals"].values()) for k in ("A", "B")}
    reduced, days = [], []
    for st, path, codes in ((a, inputs.obs_a, used["A"]), (b, inputs.obs_b, used["B"])):
        pair = sorted(codes)[0].split("+")
        day = measure_file(path, st, bundle[0], None, MeasureOptions(codes=tuple(pair), smoothing_s=600.0),
                           reference="precise")
        r = tracks.bin_epochs(day.table, None)
        r.attrs["reference"], r.attrs["station"] = "precise", st.id
        reduced.append(r)
        days.append(day)
    aiv = commonview.common_view(reduced[0], reduced[1], mode="all-in-view").offset_df
    y = aiv[aiv["flag"] == "ok"].set_index("time")["offset_ns"]
    x = ok.set_index("time")["offset_ns"]
    common = x.index.intersection(y.index)
    diff = x.loc[common] - y.loc[common]
    g = stability.grid_series(ok["time"].to_numpy(np.int64), ok["offset_ns"].to_numpy(float) * 1e-9)
    dev = stability.deviation("tdev", g.value, rate=1.0 / g.tau0_s, taus=np.array([990.0, 9990.0]))
    print(f"\nALGO-ZIMM PPP pair: {len(ok)} of {len(o)} epochs ok, first {ts.to_iso(int(ok['time'].iloc[0]))}, "
          f"last {ts.to_iso(int(ok['time'].iloc[-1]))}; codes A {used['A']}, B {used['B']}; "
          f"PPP − smoothed AIV on {len(common)} epochs: mean {diff.mean():+.3f} ns, scatter {diff.std():.3f} ns; "
          f"TDEV(990 s) {dev.dev[0] * 1e12:.0f} ps, TDEV(9990 s) {dev.dev[1] * 1e12:.0f} ps")
    assert len(common) > 2500
    assert abs(diff.mean()) <= 1.0

    # which clock wanders: each station's PPP clock against the product's time scale
    own = {}
    for who, sid in (("A", "ALGO"), ("B", "ZIMM")):
        c = res.ppp[who].clock
        c = c[c["flag"] == "ok"]
        t, x = c["time_gps_ns"].to_numpy(np.int64), c["clock_ns"].to_numpy(float)
        gs = stability.grid_series(t, x * 1e-9)
        own[sid] = stability.deviation("tdev", gs.value, rate=1.0 / gs.tau0_s, taus=np.array([990.0, 9990.0])).dev
        xd = (t - t[0]) / 86_400e9
        wander = float(np.std(x - np.polyval(np.polyfit(xd, x, 2), xd)))
        code = days[0 if who == "A" else 1].epochs.set_index("time")["clock_ns"].dropna()
        cc = np.intersect1d(t, code.index.to_numpy(np.int64))
        gap = pd.Series(x, index=t).loc[cc] - code.loc[cc]
        print(f"{sid} PPP clock vs product time: TDEV(990 s) {own[sid][0] * 1e12:.0f} ps, TDEV(9990 s) "
              f"{own[sid][1] * 1e12:.0f} ps, RMS about a quadratic {wander:.3f} ns; PPP − code-only clock on "
              f"{len(cc)} epochs: scatter {gap.std():.3f} ns")
        if sid == "ZIMM":
            assert wander >= 3.0 * gap.std()       # the code clock follows the wander: it is the clock's
    assert own["ALGO"][0] <= 50e-12 and own["ALGO"][1] <= 50e-12   # data README: 10-50 ps for good clocks
    assert own["ZIMM"][0] >= 10 * own["ALGO"][0]                     # the pair's wander is ZIMM's
