"""Classic monthly code-bias file P1C11110.DCB (P1−C1, October 2011) read and applied.

Source: ../shared/data/real-2011-283/P1C11110.DCB (an IGS analysis centre's
monthly DCB solution, CC BY 4.0); values below are read from the file's
text. The sign convention is checked against something outside the file: the
real P1 and C1 pseudoranges of BRUS and CAGZ on 2011-10-10 (same directory),
whose per-satellite mean difference P1 − C1 is the satellites' P1−C1 bias
plus one receiver constant.
"""

from __future__ import annotations

import pathlib

import numpy as np
import pytest

from ctt.formats import dcb as DCB
from ctt.formats.bias_sinex import read_code_biases
from ctt.signals import code_bias_s
from ctt.timescales import civil_to_ns

C = 0.299792458   # m per ns (SI)
STATIONS = pathlib.Path(__file__).parent / "data" / "stations"


@pytest.fixture(scope="module")
def d(shared_set):
    return shared_set("real-2011-283")


def test_values_read_from_the_text(d):
    b = DCB.read_dcb(d / "P1C11110.DCB")
    # line 8 'G01   -0.210   0.015', line 12 'G05   1.862   0.002', line 39 'G32  -1.201  0.003'
    val = dict(zip(b.prn, b.value_s))
    sig = dict(zip(b.prn, b.sigma_s))
    assert val["G01"] == pytest.approx(-0.210e-9, abs=1e-15) and sig["G01"] == pytest.approx(0.015e-9)
    assert val["G05"] == pytest.approx(1.862e-9, abs=1e-15) and val["G32"] == pytest.approx(-1.201e-9, abs=1e-15)
    assert len(b.prn) == 31 and set(b.kind) == {"DSB"} and set(b.station) == {""}
    # P1−C1 = B(P1) − B(C1) becomes the Bias-SINEX DSB (OBS1 C1W, OBS2 C1C) with the same value
    assert set(zip(b.obs1, b.obs2)) == {("C1W", "C1C")}
    # title 'YEAR-MONTH 11-10': valid for October 2011
    assert set(b.start_ns) == {int(civil_to_ns(2011, 10, 1))} and set(b.end_ns) == {int(civil_to_ns(2011, 11, 1))}
    # --bias reads either kind of file
    assert read_code_biases(d / "P1C11110.DCB").prn.tolist() == b.prn.tolist()


def test_mapping_c1c_onto_c1w_as_with_bias_sinex(d):
    b = DCB.read_dcb(d / "P1C11110.DCB")
    t = int(civil_to_ns(2011, 10, 10))
    v, found = code_bias_s(b, np.array(["G05", "G01", "G05"]), np.array(["C1C", "C1C", "C1W"]), t,
                           reference="C1W")
    # bias to subtract from C1C so it reads like C1W: B(C1C) − B(C1W) = −DCB(P1−C1)
    assert found.all() and v == pytest.approx([-1.862e-9, 0.210e-9, 0.0], abs=1e-15)
    v, found = code_bias_s(b, np.array(["G05"]), np.array(["C1C"]), int(civil_to_ns(2011, 11, 2)),
                           reference="C1W")
    assert not found.any()          # outside the month: no value, flagged by measure, never reused


@pytest.mark.parametrize("obs, bound_ns", [("brus2830.11o.gz", 0.5), ("cagz2830.11d", 0.6)])
def test_sign_against_real_p1_minus_c1(d, obs, bound_ns):
    """Per-satellite median of P1 − C1 over the day (minus the satellites' mean, which holds the
    receiver's own P1−C1) must follow the file's values with the file's sign.

    Measured: BRUS 0.32 ns RMS (correlation 0.965), CAGZ 0.45 ns (0.934); the
    day-to-day variation of satellite P1−C1 and receiver tracking differences
    are a few tenths of a ns (common practice, from memory), hence the
    bounds. The opposite sign would leave about 2.4 ns RMS (twice the 1.2 ns
    spread of the values).
    """
    from ctt.formats.rinex_obs import read_obs

    b = DCB.read_dcb(d / "P1C11110.DCB")
    val = {p: v * 1e9 for p, v in zip(b.prn, b.value_s)}
    o = read_obs(d / obs, codes=("C1C", "C1W"))
    diff = (o.obs["C1W"] - o.obs["C1C"]) / C
    n = np.sum(np.isfinite(diff), axis=0)
    keep = [i for i, s in enumerate(o.sats) if str(s) in val and n[i] > 100]
    med = np.array([np.nanmedian(diff[:, i]) for i in keep])
    ref = np.array([val[str(o.sats[i])] for i in keep])
    x, y = med - med.mean(), ref - ref.mean()
    rms = float(np.sqrt(np.mean((x - y) ** 2)))
    rms_flipped = float(np.sqrt(np.mean((x + y) ** 2)))
    print(f"{obs}: {len(keep)} satellites, P1-C1 observed vs file: RMS {rms:.3f} ns "
          f"(opposite sign: {rms_flipped:.3f} ns), correlation {np.corrcoef(x, y)[0, 1]:.3f}")
    assert len(keep) >= 25
    assert rms < bound_ns < rms_flipped


def test_measure_maps_c1c_onto_c1w_with_the_dcb_file(d):
    """BRUS has both C1 and P1: C1C+C2W with the DCB must agree per satellite with C1W+C2W.

    Without the file each satellite's value carries 2.546 × its P1−C1 bias
    (1.2 ns RMS spread, so about 3 ns); with it the remaining spread is
    2.546 × the 0.32 ns found above, about 0.8 ns.
    """
    import dataclasses

    from ctt.config import load_station
    from ctt.measure import MeasureOptions
    from ctt.pipeline import PairInputs, load_orbits, measure_file

    st = load_station(STATIONS / "brus.toml")
    inputs = PairInputs(obs_a=str(d / "brus2830.11o.gz"), obs_b=None, sp3=str(d / "igs16571.sp3"))
    orbits, nav_header, ref, _ = load_orbits(inputs, "auto")
    base = MeasureOptions()
    spread = {}
    tabs = {}
    for name, opts in (("p1", dataclasses.replace(base, codes=("C1W", "C2W"))),
                       ("c1", dataclasses.replace(base, codes=("C1C", "C2W"))),
                       ("c1+dcb", dataclasses.replace(base, codes=("C1C", "C2W"),
                                                      biases=read_code_biases(d / "P1C11110.DCB")))):
        t = measure_file(str(d / "brus2830.11o.gz"), st, orbits, nav_header, opts, reference=ref).table
        tabs[name] = t.set_index(["time", "sat"])["clock_ns"].where(t.set_index(["time", "sat"])["flag"] == "ok")
    for name in ("c1", "c1+dcb"):
        dd = (tabs[name] - tabs["p1"]).dropna()
        per_sat = dd.groupby(level="sat").mean()
        spread[name] = float((per_sat - per_sat.mean()).std())
    print(f"per-satellite spread of (C1C+C2W) - (C1W+C2W): {spread['c1']:.2f} ns without, "
          f"{spread['c1+dcb']:.2f} ns with P1C11110.DCB")
    assert spread["c1"] > 2.0 and spread["c1+dcb"] < 1.2
