"""The per-satellite code biases fitted by ``--bias estimate`` against a published monthly P1-C1
DCB solution (real-2011-283/P1C11110.DCB, October 2011, an IGS analysis centre's product).

BRUS (2011-10-10) is processed twice against the IGS final orbits and clocks (which refer to
P1/P2, data README): with C1 and P2 (``codes = C1C, C2W``), where every satellite's value carries
its C1 bias times the iono-free coefficient a1 = f1^2/(f1^2 - f2^2) = 2.546 (IS-GPS-200
frequencies), and with P1 and P2, where it carries none. Each fit also absorbs whatever else is
constant per satellite over the day at this station (pass-averaged multipath: BRUS sits on a tall
mast; measured here as 2.25 ns RMS of 'biases' with P1/P2, where no code bias is expected), which
the batch-means uncertainty does not cover. Those station effects are the same in both runs, so
the difference of the two fits isolates a1 x (C1 bias against P1): it must follow the file's
values (read by the classic DCB reader, mapped by ctt.signals.code_bias_s, so the sign is theirs),
both with their common part removed (the zero-mean constraint).
"""

import numpy as np
import pytest

from ctt.config import load_station
from ctt.measure import MeasureOptions
from ctt.pipeline import PairInputs, load_orbits, measure_file
from ctt.signals import code_bias_s

dcb = pytest.importorskip("ctt.formats.dcb", reason="the classic DCB reader (ctt.formats.dcb) is not in this tree")


@pytest.mark.slow
def test_estimated_c1_biases_follow_the_published_p1_c1_dcbs(shared_set, test_data):
    d = shared_set("real-2011-283")
    inputs = PairInputs(obs_a=str(d / "brus2830.11o.gz"), obs_b=None, sp3=str(d / "igs16571.sp3"),
                        clk=str(d / "igs16571.clk"))
    orbits, nav_header, ref, _ = load_orbits(inputs, "auto")
    station = load_station(test_data / "stations" / "brus.toml")
    est = {}
    for codes in (("C1C", "C2W"), ("C1W", "C2W")):
        day = measure_file(inputs.obs_a, station, orbits, nav_header,
                           MeasureOptions(codes=codes, biases="estimate"), reference=ref)
        est[codes[0]] = {e["sat"]: e for e in day.info["code_bias_estimates"]}
    sats = np.array(sorted(set(est["C1C"]) & set(est["C1W"])))
    beta, found = code_bias_s(dcb.read_dcb(d / "P1C11110.DCB"), sats, "C1C", int(day.table["time"].min()),
                              reference="C1W")
    f1, f2 = 1575.42e6, 1227.60e6
    a1 = f1 ** 2 / (f1 ** 2 - f2 ** 2)
    keep = np.asarray(found)
    s = sats[keep]
    want = a1 * np.asarray(beta)[keep] * 1e9
    got = np.array([est["C1C"][k]["bias_ns"] - est["C1W"][k]["bias_ns"] for k in s])
    u = np.array([np.hypot(est["C1C"][k]["u_ns"], est["C1W"][k]["u_ns"]) for k in s])
    alone = np.array([est["C1W"][k]["bias_ns"] for k in s])
    want, got = want - want.mean(), got - got.mean()
    diff = got - want
    r = np.corrcoef(got, want)[0, 1]
    print(f"\nBRUS: {keep.sum()} satellites; fit with C1/P2 minus fit with P1/P2: correlation {r:.3f} with "
          f"2.546 x (P1-C1 DCB), RMS difference {np.sqrt(np.mean(diff ** 2)):.2f} ns, RMS of the combined u "
          f"{np.sqrt(np.mean(u ** 2)):.2f} ns; P1/P2 fit alone (station effects): RMS "
          f"{np.sqrt(np.mean(alone ** 2)):.2f} ns")
    assert keep.sum() >= 25
    assert r > 0.9
    # within the stated uncertainties (conservative: the two fits share the station's effects and
    # most of its noise, so their difference scatters less than the quadrature sum of their u)
    assert np.sqrt(np.mean(diff ** 2)) <= np.sqrt(np.mean(u ** 2))
