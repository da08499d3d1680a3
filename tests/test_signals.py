"""ctt.signals: frequencies of all systems, code selection, combinations,
group-delay factors of Galileo/BeiDou, and the Bias-SINEX reader."""

from __future__ import annotations

import numpy as np
import pytest

from ctt import signals as sig
from ctt.formats.bias_sinex import read_bias_sinex
from ctt.errors import ProductFormatError


def test_frequencies_other_systems():
    sats = ["E11", "E11", "E11", "E11", "C20", "C20", "C20", "C20"]
    codes = ["C1C", "C5Q", "C7Q", "C6C", "C2I", "C6I", "C1P", "C5P"]
    # Galileo OS SIS ICD §2.3 (E1, E5a, E5b, E6) and BDS ICDs (B1I, B3I, B1C, B2a), MHz
    expect = [1575.42, 1176.45, 1207.14, 1278.75, 1561.098, 1268.52, 1575.42, 1176.45]
    assert np.allclose(sig.frequency_hz(sats, codes) / 1e6, expect, rtol=0, atol=1e-9)


def test_frequencies_qzss_sbas_navic():
    # IS-QZSS (L1, L2, L5, L6), SBAS (RTCA DO-229: L1, L5) and the NavIC SPS ICD (L5, S), MHz
    sats = ["J01", "J01", "J01", "J01", "S20", "S20", "I05", "I05"]
    codes = ["C1C", "C2L", "C5Q", "C6L", "C1C", "C5I", "C5A", "C9A"]
    expect = [1575.42, 1227.60, 1176.45, 1278.75, 1575.42, 1176.45, 1176.45, 2492.028]
    assert np.allclose(sig.frequency_hz(sats, codes) / 1e6, expect, rtol=0, atol=1e-9)


def test_glonass_fdma():
    # GLONASS ICD: G1 = 1602 + k·0.5625 MHz, G2 = 1246 + k·0.4375 MHz
    f = sig.frequency_hz(["R01", "R02", "R01", "R02"], ["C1C", "C1P", "C2P", "C2C"], {"R01": 1, "R02": -7})
    assert np.allclose(f / 1e6, [1602.5625, 1602 - 7 * 0.5625, 1246.4375, 1246 - 7 * 0.4375], atol=1e-9)
    # array form aligned with the satellites
    f2 = sig.frequency_hz(["R01", "R02"], "C1C", np.array([1, -7]))
    assert np.allclose(f2 / 1e6, [1602.5625, 1598.0625])
    with pytest.raises(ValueError, match="R03"):
        sig.frequency_hz(["R01", "R03"], "C1C", {"R01": 1})
    with pytest.raises(ValueError, match="band"):
        sig.frequency_hz(["G01"], "C7Q")


def _obs(n_epoch=100):
    rng = np.random.default_rng(0)
    sats = np.array(["G01", "G02", "G03", "E11", "C20", "R05"])
    base = 2.2e7 + rng.normal(0, 1e5, (n_epoch, sats.size))
    nan = np.full_like(base, np.nan)
    obs = {c: nan.copy() for c in ("C1C", "C1W", "C2W", "C2L", "C5Q", "C2I", "C6I", "C1P", "C2P", "C1X")}
    obs["C1C"][:, [0, 1, 3, 5]] = base[:, [0, 1, 3, 5]]
    obs["C1W"][:, [0, 2]] = base[:, [0, 2]] + 1.0
    obs["C2W"][:, 0] = base[:, 0] + 5.0
    obs["C2L"][:, [1, 2]] = base[:, [1, 2]] + 5.0
    obs["C2W"][:10, 1] = base[:10, 1] + 5.0  # sparse C2W: must not win for G02
    obs["C5Q"][:, 3] = base[:, 3] + 3.0
    obs["C1X"][:, 3] = base[:, 3]
    obs["C2I"][:, 4] = base[:, 4]
    obs["C6I"][:, 4] = base[:, 4] + 2.0
    obs["C2P"][:, 5] = base[:, 5] + 4.0
    return obs, sats


def test_select_codes_priorities_and_coverage():
    obs, sats = _obs()
    ch = sig.select_codes(obs, sats, "dual")
    assert list(ch.code1) == ["C1C", "C1C", "C1W", "C1C", "C2I", "C1C"]
    assert list(ch.code2) == ["C2W", "C2L", "C2L", "C5Q", "C6I", "C2P"]
    assert ch.usable.all()
    single = sig.select_codes(obs, sats, "single")
    assert list(single.code2) == [""] * 6 and single.usable.all()
    # a user priority list overrides the default
    alt = sig.select_codes(obs, sats, "dual", priorities={"G": {"L1": ("C1W", "C1C")}})
    assert list(alt.code1[:3]) == ["C1W", "C1C", "C1W"]
    # no L2 at all for a satellite -> not usable in dual mode
    obs2 = dict(obs)
    obs2["C2L"] = np.full_like(obs["C2L"], np.nan)
    ch2 = sig.select_codes(obs2, sats, "dual")
    assert ch2.code2[2] == "" and not ch2.usable[2]
    assert ch2.code2[1] == "C2W"  # the sparse code is all there is now
    # "at least min_fraction of the best-covered code" (docstring): exactly 80 of 100 epochs
    # with min_fraction 0.8 keeps the preferred C2W
    obs3 = dict(obs)
    obs3["C2W"] = obs["C2W"].copy()
    obs3["C2W"][:80, 1] = obs["C2L"][:80, 1]
    assert np.count_nonzero(np.isfinite(obs3["C2L"][:, 1])) == 100
    assert sig.select_codes(obs3, sats, "dual", min_fraction=0.8).code2[1] == "C2W"


def test_processing_pseudorange_iono_free_and_single():
    obs, sats = _obs()
    ch = sig.select_codes(obs, sats, "dual")
    pr = sig.processing_pseudorange(obs, ch, glonass_k={"R05": 2})
    assert pr.value_m.shape == (100, 6)
    f1, f2 = pr.f1_hz[0], pr.f2_hz[0]
    expect = (f1**2 * obs["C1C"][:, 0] - f2**2 * obs["C2W"][:, 0]) / (f1**2 - f2**2)
    assert np.allclose(pr.value_m[:, 0], expect, rtol=0, atol=1e-6)
    assert pr.f1_hz[5] == pytest.approx(1602e6 + 2 * 0.5625e6)
    assert pr.noise_factor[0] == pytest.approx(2.978, abs=1e-3)
    # a 1 m bias removed from C1C moves P_IF by a1 = 2.546 m
    b = np.zeros(6)
    b[0] = 1.0
    prb = sig.processing_pseudorange(obs, ch, glonass_k={"R05": 2}, bias_m1=b)
    assert np.allclose(pr.value_m[:, 0] - prb.value_m[:, 0], sig.dcb_iono_free_factor(f1, f2))
    single = sig.processing_pseudorange(obs, sig.select_codes(obs, sats, "single"), glonass_k={"R05": 2})
    assert np.array_equal(single.value_m[:, 3], obs["C1C"][:, 3], equal_nan=True)


def test_galileo_bgd_factors():
    fe1, fe5a, fe5b = 1575.42e6, 1176.45e6, 1207.14e6
    # Galileo OS SIS ICD §5.1.5: E1 single frequency: Δt − BGD(E1,E5a) (F/NAV) or Δt − BGD(E1,E5b) (I/NAV)
    assert sig.group_delay_factor("E", "C1C", nav="FNAV").terms == (("bgd_e1e5a_s", 1.0),)
    assert sig.group_delay_factor("E", "C1C", nav="INAV").terms == (("bgd_e1e5b_s", 1.0),)
    # E5a: Δt − (f_E1/f_E5a)² BGD(E1,E5a); E5b: Δt − (f_E1/f_E5b)² BGD(E1,E5b)
    gd = sig.group_delay_factor("E", "C5Q")
    assert gd.parameter == "bgd_e1e5a_s" and gd.factor == pytest.approx((fe1 / fe5a) ** 2, rel=1e-15)
    gd = sig.group_delay_factor("E", "C7Q")
    assert gd.parameter == "bgd_e1e5b_s" and gd.factor == pytest.approx((fe1 / fe5b) ** 2, rel=1e-15)
    # the broadcast clocks are the E1/E5a (F/NAV) and E1/E5b (I/NAV) iono-free clocks
    assert sig.group_delay_factor("E", ("C1C", "C5Q")).terms == ()
    assert sig.group_delay_factor("E", ("C1X", "C7X")).terms == ()


def test_beidou_tgd_factors():
    fb1, fb3 = 1561.098e6, 1268.52e6
    # BDS-SIS-ICD-B1I §5.2.4.10: B1I: Δt − T_GD1, B2I: Δt − T_GD2, B3I: reference (no term)
    assert sig.group_delay_factor("C", "C2I").terms == (("tgd1_s", 1.0),)
    assert sig.group_delay_factor("C", "C7I").terms == (("tgd2_s", 1.0),)
    assert sig.group_delay_factor("C", "C6I").terms == ()
    # iono-free B1I/B3I: a1 (Δt − T_GD1) + a2 Δt = Δt − a1 T_GD1
    gd = sig.group_delay_factor("C", ("C2I", "C6I"))
    assert gd.parameter == "tgd1_s" and gd.factor == pytest.approx(fb1**2 / (fb1**2 - fb3**2), rel=1e-14)
    # B1I/B2I: two parameters
    gd2 = sig.group_delay_factor("C", ("C2I", "C7I"))
    assert dict(gd2.terms).keys() == {"tgd1_s", "tgd2_s"}
    with pytest.raises(ValueError):
        gd2.factor
    with pytest.raises(ValueError, match="ISC"):
        sig.group_delay_factor("G", "C5Q")


BIAS_FILE = """\
%=BIA 1.00 XYZ 2021:005:00000 XYZ 2020:366:00000 2021:002:00000 R 00000005
*-------------------------------------------------------------------------------
+BIAS/SOLUTION
*BIAS SVN_ PRN STATION__ OBS1 OBS2 BIAS_START____ BIAS_END______ UNIT __ESTIMATED_VALUE____ _STD_DEV___
 DSB  G063 G01           C1C  C1W  2020:366:00000 2021:002:00000 ns                -1.2340      0.0100
 DSB  G061 G02           C1W  C1C  2020:366:00000 2021:002:00000 ns                 0.5000      0.0100
 OSB  G063 G01           C1C       2020:366:00000 2021:002:00000 ns                 3.0000      0.0200
 OSB  G063 G01           C1W       2020:366:00000 2021:002:00000 ns                 4.2340      0.0200
 OSB  G063 G01           L1C       2020:366:00000 2021:002:00000 cyc                0.1000      0.0010
-BIAS/SOLUTION
%=ENDBIA
"""


def test_bias_sinex_reader(tmp_path):
    from ctt import timescales as ts

    p = tmp_path / "test.bia"
    p.write_text(BIAS_FILE)
    b = read_bias_sinex(p)
    assert b.skipped == 1  # the phase bias (Bias-SINEX 1.00: unit cyc)
    assert list(b.kind) == ["DSB", "DSB", "OSB", "OSB"]
    assert b.value_s[0] == pytest.approx(-1.234e-9, rel=1e-12, abs=0)
    t = ts.civil_to_ns(2021, 1, 1, 12)
    # DSB = B(OBS1) − B(OBS2) (Bias-SINEX 1.00); either order is used with its sign
    v, found = sig.code_bias_s(b, ["G01", "G02", "G03"], "C1C", t, reference="C1W")
    assert found.tolist() == [True, True, False]
    # (abs=0: pytest.approx's default abs of 1e-12 would swamp a nanosecond-level value)
    assert v[0] == pytest.approx(-1.234e-9, rel=1e-12, abs=0) and v[2] == 0.0
    assert v[1] == pytest.approx(-0.5e-9, rel=1e-12, abs=0)
    # OSB lookup
    v, found = sig.code_bias_s(b, ["G01"], "C1W", t)
    assert found[0] and v[0] == pytest.approx(4.234e-9, rel=1e-12, abs=0)
    # outside the window: nothing
    _, found = sig.code_bias_s(b, ["G01"], "C1W", ts.civil_to_ns(2021, 1, 3))
    assert not found[0]
    # the window [start, end) includes its start and excludes its end (2021:002:00000), so that
    # consecutive daily files tile time without overlap (common practice)
    ends = [sig.code_bias_s(b, ["G01"], "C1W", ts.civil_to_ns(*d))[1][0]
            for d in ((2020, 12, 31), (2021, 1, 2), (2021, 1, 1, 23, 59, 59))]
    assert ends == [True, False, True]


def test_bias_sinex_errors(tmp_path):
    p = tmp_path / "bad.bia"
    p.write_text("not a bias file\n")
    with pytest.raises(ProductFormatError, match="bad.bia:1"):
        read_bias_sinex(p)
    p.write_text(BIAS_FILE.replace("-1.2340", "-1.2x40"))
    with pytest.raises(ProductFormatError, match=r"bad.bia:5: expected numeric"):
        read_bias_sinex(p)
    p.write_text(BIAS_FILE.replace("2020:366:00000 2021:002:00000 ns                 0.5", "2020:36x:00000 2021:002:00000 ns                 0.5"))
    with pytest.raises(ProductFormatError, match=r":6: expected a time"):
        read_bias_sinex(p)
