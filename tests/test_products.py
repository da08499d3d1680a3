"""Behaviour of the SP3, RINEX clock and ANTEX readers (ctt.formats) and of precise interpolation and the Sun (ctt.orbits).

The small files in tests/data/products were written by hand following the
published layouts (SP3-d format document; RINEX clock 3.00 and 3.04 format
documents; ANTEX 1.4 format document); their values are invented. Checks of
the real IGS products live in test_against_igs_products.py.
"""

from __future__ import annotations

import gzip
import math

import numpy as np
import pytest

from ctt.errors import OutOfSpanError, ProductFormatError
from ctt import orbits as P
from ctt.formats import antex as ATX, rinex_clock as CLK, sp3 as SP3
from ctt.timescales import NS_PER_S, civil_to_ns


@pytest.fixture(scope="module")
def pdir(test_data):
    return test_data / "products"


T0 = int(civil_to_ns(2021, 1, 1))


# ------------------------------------------------------------------ SP3-d reader

def test_sp3d_header_fields(pdir):
    d = SP3.read_sp3(pdir / "mixed_sp3d.sp3")
    h = d.header
    # SP3-d line 1/2 layout (format document): version col 2, P/V flag col 3,
    # epochs cols 33-39, coordinate system cols 47-51, orbit type 53-55, agency 57-60.
    assert (h.version, h.pos_vel_flag, h.n_epochs) == ("d", "V", 3)
    assert (h.coord_system, h.orbit_type, h.agency) == ("IGS20", "FIT", "XYZ")
    assert (h.gps_week, h.seconds_of_week, h.interval_s, h.mjd) == (2138, 432000.0, 300.0, 59215)
    # '%c' line: file type cols 4-5, time system cols 10-12; '%f' bases cols 4-13 and 15-26.
    assert (h.file_type, h.time_system, h.pos_vel_base, h.clock_base) == ("M", "GPS", 1.25, 1.025)
    assert list(d.sats) == ["G01", "E11", "R05"]
    assert h.accuracy_exponent == {"G01": 2, "E11": 3, "R05": 4}
    assert len(h.comments) == 2
    assert h.start_ns == T0 and d.time_ns[0] == T0
    assert list(np.diff(d.time_ns)) == [300 * NS_PER_S] * 2


def test_sp3d_values_units_and_bad_values(pdir):
    d = SP3.read_sp3(pdir / "mixed_sp3d.sp3")
    g, e, r = 0, 1, 2
    # positions km -> m, clocks microseconds -> s (SP3 layout, columns 5-60)
    assert np.allclose(d.pos_m[0, g], [13000e3, -22000e3, -5000e3], rtol=0, atol=1e-6)
    assert d.clock_s[0, g] == pytest.approx(100e-6, abs=1e-15)
    assert d.clock_s[2, e] == pytest.approx(-50.498e-6, abs=1e-15)
    # bad values per the SP3 documents: 0.000000 position, 999999.999999 clock -> NaN
    assert np.isnan(d.pos_m[0, r]).all() and np.isfinite(d.pos_m[1, r]).all()
    assert np.isnan(d.clock_s[:2, r]).all() and d.clock_s[2, r] == pytest.approx(12.345678e-6, abs=1e-15)
    assert d.missing["position"] == 1 and d.missing["clock"] == 2
    # velocities dm/s -> m/s, clock rate 1e-4 microseconds/s -> s/s
    assert np.allclose(d.vel_mps[0, g], [-500.0, 1000.0, -3000.0], rtol=0, atol=1e-9)
    assert d.clock_rate[0, g] == pytest.approx(-1e-10, rel=1e-12)
    assert np.isnan(d.vel_mps[0, r]).all() and np.isnan(d.clock_rate[:2, r]).all()
    assert d.clock_rate[2, r] == 0.0  # a zero rate is a value, only 999999.999999 is bad
    assert d.missing["velocity"] == 1 and d.missing["clock_rate"] == 2
    # standard deviations: base**exponent mm and ps (SP3-c/d)
    assert d.pos_sdev_m[0, g, 1] == pytest.approx(1.25**6 * 1e-3)
    assert d.clock_sdev_s[0, e] == pytest.approx(1.025**100 * 1e-12)
    assert np.isnan(d.pos_sdev_m[1, e]).all()  # blank exponent fields


def test_sp3d_flags(pdir):
    d = SP3.read_sp3(pdir / "mixed_sp3d.sp3")
    # flag columns of the SP3-c/d P record: 75 'E' clock event, 76 'P' clock
    # prediction, 79 'M' manoeuvre, 80 'P' orbit prediction
    assert d.clock_event[1, 0] and d.clock_predicted[1, 0] and d.manoeuvre[1, 0]
    assert not d.orbit_predicted[1, 0]
    assert d.clock_event[1, 1] and d.orbit_predicted[1, 1] and not d.manoeuvre[1, 1]
    assert d.clock_event.sum() == 2 and d.manoeuvre.sum() == 1


def _sp3_error(tmp_path, data: bytes) -> ProductFormatError:
    p = tmp_path / "bad.sp3"
    p.write_bytes(data)
    with pytest.raises(ProductFormatError) as exc:
        SP3.read_sp3(p)
    assert str(p) in str(exc.value)
    return exc.value


def test_sp3_non_ascii_satellite_ids_name_the_line(pdir, tmp_path):
    # SP3-d layout: '+' lines hold 3-character ids from column 10, 'P' records from column 2.
    lines = (pdir / "mixed_sp3d.sp3").read_bytes().split(b"\n")
    bad = list(lines)
    bad[2] = bad[2][:9] + b"\xe9" + bad[2][10:]
    assert _sp3_error(tmp_path, b"\n".join(bad)).line == 3
    first_p = next(i for i, ln in enumerate(lines) if ln.startswith(b"P"))
    bad = list(lines)
    bad[first_p] = b"P\xe9" + bad[first_p][2:]
    assert _sp3_error(tmp_path, b"\n".join(bad)).line == first_p + 1


def test_sp3_header_with_zero_satellites_refused(pdir, tmp_path):
    lines = (pdir / "mixed_sp3d.sp3").read_bytes().split(b"\n")
    lines[2] = b"+    0" + lines[2][6:]
    assert _sp3_error(tmp_path, b"\n".join(lines)).line == 3


def test_sp3_compressed_gives_same_data(pdir, tmp_path):
    raw = (pdir / "mixed_sp3d.sp3").read_bytes()
    gz = tmp_path / "mixed.sp3.gz"
    gz.write_bytes(gzip.compress(raw))
    a, b = SP3.read_sp3(pdir / "mixed_sp3d.sp3"), SP3.read_sp3(gz)
    assert np.array_equal(a.pos_m, b.pos_m, equal_nan=True)
    assert np.array_equal(a.time_ns, b.time_ns)


def test_sp3_time_system_converted_to_gps(pdir, tmp_path):
    text = (pdir / "mixed_sp3d.sp3").read_text().replace("%c M  cc GPS", "%c M  cc UTC", 1)
    f = tmp_path / "utc.sp3"
    f.write_text(text)
    d = SP3.read_sp3(f)
    # GPS - UTC = 18 s in 2021 (IERS Bulletin C)
    assert d.header.time_system == "UTC"
    assert d.time_ns[0] - d.time_file_ns[0] == 18 * NS_PER_S


@pytest.mark.parametrize("old,new,line,what", [
    ("PG01  13000.000000", "PG01  13000.0x0000", 22, "x coordinate"),
    ("PE11  20000.000000", "PE99  20000.000000", 25, "satellite listed in the header"),
    ("#dV2021", "#zV2021", 1, "version"),
    ("*  2021  1  1  0  5", "*  2021  1  1  0  0", 29, "increasing order"),
])
def test_sp3_bad_input_names_file_and_line(pdir, tmp_path, old, new, line, what):
    text = (pdir / "mixed_sp3d.sp3").read_text()
    assert old in text
    f = tmp_path / "bad.sp3"
    f.write_text(text.replace(old, new, 1))
    with pytest.raises(ProductFormatError) as exc:
        SP3.read_sp3(f)
    assert exc.value.line == line and what in exc.value.expected
    assert str(f) in str(exc.value)


# ------------------------------------------------------------------ interpolation

GM = 3.986005e14          # IS-GPS-200
OMEGA_E = 7.2921151467e-5  # IS-GPS-200


def _circular_ecef(t_s, a=26_560e3, inc=math.radians(55), raan=0.3, u0=0.7):
    """Analytic circular orbit seen from the rotating Earth (position, velocity)."""
    n = math.sqrt(GM / a**3)
    u = u0 + n * t_s
    th = OMEGA_E * t_s
    xo, yo = a * np.cos(u), a * np.sin(u)
    vxo, vyo = -a * n * np.sin(u), a * n * np.cos(u)
    ci, si, cO, sO = math.cos(inc), math.sin(inc), math.cos(raan), math.sin(raan)
    xi = np.stack([cO * xo - sO * ci * yo, sO * xo + cO * ci * yo, si * yo], -1)
    vi = np.stack([cO * vxo - sO * ci * vyo, sO * vxo + cO * ci * vyo, si * vyo], -1)
    c, s = np.cos(th)[:, None], np.sin(th)[:, None]
    x = np.concatenate([c * xi[:, :1] + s * xi[:, 1:2], -s * xi[:, :1] + c * xi[:, 1:2], xi[:, 2:]], 1)
    vrot = np.concatenate([c * vi[:, :1] + s * vi[:, 1:2], -s * vi[:, :1] + c * vi[:, 1:2], vi[:, 2:]], 1)
    v = vrot - np.cross(np.array([0, 0, OMEGA_E]), x)
    return x, v


def _synthetic_sp3(n_ep=96, step_s=900, clock=None):
    t = T0 + np.arange(n_ep, dtype=np.int64) * step_s * NS_PER_S
    x, _ = _circular_ecef(np.arange(n_ep) * float(step_s))
    pos = x[:, None, :]
    clk = np.full((n_ep, 1), 1e-4) if clock is None else clock[:, None]
    z = np.zeros((n_ep, 1), dtype=bool)
    hdr = SP3.SP3Header("d", "P", int(t[0]), n_ep, "", "", "", "", 0, 0.0, float(step_s), 0, 0.0, ["G01"],
                      {}, "G", "GPS", 0.0, 0.0, [])
    return SP3.SP3Data("synthetic", hdr, t, t.copy(), np.array(["G01"]), pos, clk, None, None,
                     np.full(pos.shape, np.nan), np.full(clk.shape, np.nan), z, z.copy(), z.copy(), z.copy(),
                     {}, [])


def test_lagrange_matches_analytic_orbit_position_and_velocity():
    po = P.PreciseOrbits(_synthetic_sp3())
    t_s = np.arange(0.0, 95 * 900.0, 37.0)
    t_ns = T0 + (t_s * 1e9).astype(np.int64)
    st = po.states(np.full(len(t_ns), "G01"), t_ns)
    x, v = _circular_ecef(t_s)
    assert (st.status == P.STATUS_OK).all()
    err = np.linalg.norm(st.pos_m - x, axis=1)
    verr = np.linalg.norm(st.vel_mps - v, axis=1)
    inner = (t_s > 5 * 900) & (t_s < 90 * 900)
    # Lagrange error term a * w^10 * prod|u - u_k| / 10! with a = 26 560 km and
    # w = n + Earth rotation = 0.197 rad per 15-min node: 0.56 mm for a centred
    # window (u = 4.5), 2.1 cm in the first/last interval (window shifted inwards).
    assert err[inner].max() < 0.6e-3
    assert err.max() < 2.2e-2
    # velocity (derivative of the interpolant): about error / node spacing * 3
    assert verr[inner].max() < 2e-6
    assert verr.max() < 1e-4
    # relativistic term -2 r.v / c^2 is zero for a circular orbit (IERS Conventions)
    assert np.abs(st.relativity_s).max() < 1e-12


def test_nodes_are_reproduced_and_dt_keeps_sub_ns_precision():
    sp3 = _synthetic_sp3()
    po = P.PreciseOrbits(sp3)
    st = po.states(["G01"] * 3, sp3.time_ns[[0, 40, 95]])
    assert np.array_equal(st.pos_m, sp3.pos_m[[0, 40, 95], 0])  # Lagrange basis is exact at nodes
    # t_ns + dt_s with dt_s = 0.25 s equals t_ns + 250 ms (exact int) to float rounding
    a = po.states(["G01"], [sp3.time_ns[10]], 0.25)
    b = po.states(["G01"], [sp3.time_ns[10] + 250_000_000])
    assert np.abs(a.pos_m - b.pos_m).max() < 1e-6
    # a 1 ps offset moves the satellite by v * 1e-12 s (~3.9e-9 m): visible, not lost
    c = po.states(["G01"], [sp3.time_ns[10]], 1e-3)
    moved = np.linalg.norm(c.pos_m - po.states(["G01"], [sp3.time_ns[10]]).pos_m)
    assert moved == pytest.approx(np.linalg.norm(c.vel_mps) * 1e-3, rel=1e-6)


def test_out_of_span_gap_and_unknown_satellite():
    sp3 = _synthetic_sp3()
    sp3.pos_m[50, 0] = np.nan
    po = P.PreciseOrbits(sp3)
    t = np.array([sp3.time_ns[0] - 1, sp3.time_ns[-1] + 1, sp3.time_ns[50] + 60 * NS_PER_S,
                  sp3.time_ns[20], sp3.time_ns[20]])
    st = po.states(["G01", "G01", "G01", "G01", "G02"], t)
    assert list(st.pos_status) == [P.STATUS_OUT_OF_SPAN, P.STATUS_OUT_OF_SPAN, P.STATUS_GAP,
                                   P.STATUS_OK, P.STATUS_NO_DATA]
    assert np.isnan(st.pos_m[[0, 1, 2, 4]]).all() and np.isfinite(st.pos_m[3]).all()
    assert st.reason()[0] == P.PRECISE_STATUS_REASON[P.STATUS_OUT_OF_SPAN]
    with pytest.raises(OutOfSpanError, match="outside the span"):
        po.states(["G01"], [sp3.time_ns[-1] + 1], strict=True)
    with pytest.raises(OutOfSpanError, match="gap"):
        po.states(["G01"], [sp3.time_ns[50] + 1], strict=True)


def test_clock_linear_interpolation_gap_and_event(pdir):
    d = SP3.read_sp3(pdir / "mixed_sp3d.sp3")
    po = P.PreciseOrbits(d)
    t = T0 + np.array([150, 450, 450, 450, 150]) * NS_PER_S
    st = po.states(["E11", "E11", "G01", "R05", "G01"], t)
    # E11: linear between -50.499 and -50.498 microseconds
    assert st.clock_s[1] == pytest.approx(-50.4985e-6, abs=1e-16)
    assert st.clock_status[1] == P.STATUS_OK
    # E11's clock event at 00:05 forbids interpolating 00:00-00:05 (SP3 'E' flag)
    assert st.clock_status[0] == P.STATUS_BAD_FLAG and np.isnan(st.clock_s[0])
    # G01 carries a manoeuvre flag at 00:05: positions around it are refused
    assert st.pos_status[2] == P.STATUS_BAD_FLAG
    # R05 has no clock at 00:05 -> gap; its first position is missing -> gap too
    assert st.clock_status[3] == P.STATUS_GAP and st.pos_status[3] == P.STATUS_GAP
    assert st.status[4] == P.STATUS_BAD_FLAG
    assert np.isnan(st.tgd_s).all()


def test_leave_one_out_on_analytic_orbit_is_tiny():
    pe, ce, ep = P.leave_one_out(_synthetic_sp3())
    assert list(ep) == list(range(5, 91))
    # 10 neighbours around a 30-min hole: error term a * w^10 * (5!)^2 / 10! = 9 mm
    # for this orbit (see the test above); the estimate bounds the measured error
    assert np.linalg.norm(pe, axis=-1).max() < 9.2e-3
    assert np.abs(ce).max() < 1e-18  # constant clock


def test_merge_adjacent_files_extends_span():
    a = _synthetic_sp3(48)
    b = _synthetic_sp3(96)
    b_part = SP3.SP3Data(**{**b.__dict__})
    sel = slice(48, 96)
    for k in ("time_ns", "time_file_ns"):
        setattr(b_part, k, b.__dict__[k][sel])
    for k in ("pos_m", "clock_s", "pos_sdev_m", "clock_sdev_s", "clock_event", "clock_predicted",
              "manoeuvre", "orbit_predicted"):
        setattr(b_part, k, b.__dict__[k][sel])
    m = SP3.merge_sp3([a, b_part])
    assert len(m.time_ns) == 96
    assert np.array_equal(m.pos_m, b.pos_m)


# ------------------------------------------------------------------ RINEX clock

def test_clock_v300(pdir):
    c = CLK.read_clock(pdir / "clock_v300.clk")
    assert c.version == 3.00 and c.time_system == "GPS"
    assert c.header["leap_seconds"] == 18 and c.header["analysis_center"] == "XYZ"
    assert c.header["satellites"] == ["G01", "G02"] and "STA1" in c.header["stations"]
    s = c.satellites
    assert list(s.names) == ["G01", "G02"]
    assert list((s.time_ns - T0) // NS_PER_S) == [0, 30, 60, 180]
    i = s.column("G01")
    assert s.bias_s[0, i] == 1.0e-4  # written with a D exponent (Fortran style, allowed)
    assert s.sigma_s[0, i] == 1.0e-11
    j = s.column("G02")
    assert s.bias_s[0, j] == -2.0e-5 and np.isnan(s.sigma_s[0, j])  # one value only
    assert np.isnan(s.bias_s[3, j])
    r = c.stations
    assert list(r.names) == ["STA1"] and r.bias_s[0, 0] == 3.0e-8 and r.bias_s[1, 0] == 3.3e-8
    assert c.skipped["CR"] == 1


def test_clock_v304_nine_character_names(pdir):
    c = CLK.read_clock(pdir / "clock_v304.clk")
    assert c.version == 3.04 and c.time_system == "GAL"
    assert list(c.stations.names) == ["STAT00XYZ"]
    assert list(c.satellites.names) == ["E11", "G01"]
    assert c.stations.bias_s[0, 0] == -4.0e-9


def test_clock_series_interpolation_and_gap(pdir):
    s = CLK.read_clock(pdir / "clock_v300.clk").satellites
    t = T0 + np.array([15, 45, 120, 200]) * NS_PER_S
    v, st = P.interpolate_clock_series(s, ["G01", "G01", "G01", "G01"], t)
    assert v[0] == pytest.approx(1.00015e-4, abs=1e-17) and v[1] == pytest.approx(1.00045e-4, abs=1e-17)
    # 00:01 -> 00:03 is four nominal 30 s intervals: a gap (> 1.5 x nominal)
    assert st[2] == P.STATUS_GAP and st[3] == P.STATUS_OUT_OF_SPAN


def test_precise_orbits_take_clocks_from_clock_file(pdir):
    d = SP3.read_sp3(pdir / "mixed_sp3d.sp3")
    c = CLK.read_clock(pdir / "clock_v300.clk")
    st = P.PreciseOrbits(d, clk=c).states(["G01"], [T0 + 15 * NS_PER_S])
    assert st.clock_s[0] == pytest.approx(1.00015e-4, abs=1e-17)


def test_clock_bad_record_names_line(pdir, tmp_path):
    text = (pdir / "clock_v300.clk").read_text().replace("AS G02  2021 01 01 00  0 30", "AS G02  2021 0x 01 00  0 30")
    f = tmp_path / "bad.clk"
    f.write_text(text)
    with pytest.raises(ProductFormatError) as exc:
        CLK.read_clock(f)
    assert exc.value.line == 20


# ------------------------------------------------------------------ ANTEX

def test_antex_satellite_blocks(pdir):
    a = ATX.read_antex(pdir / "satellites.atx")
    assert a.version == 1.4 and a.pcv_type == "A"
    assert [b["prn"] for b in a.satellites] == ["G01", "G01", "E11"]
    assert a.n_receiver_antennas == 1
    # validity dates pick the block (ANTEX VALID FROM / VALID UNTIL)
    assert a.offset("G01", T0)["svn"] == "G063"
    assert a.offset("G01", int(civil_to_ns(2000, 1, 1)))["svn"] == "G032"
    assert a.offset("G01", int(civil_to_ns(2010, 1, 1))) is None
    # NORTH / EAST / UP of a satellite = body-frame x, y, z in mm (ANTEX 1.4)
    assert a.offset("G01", T0)["pco_m"]["G01"] == pytest.approx((0.394, 0.0, 1.6))


def test_iono_free_offset_combination(pdir):
    a = ATX.read_antex(pdir / "satellites.atx")
    pco = a.offset("E11", T0)["pco_m"]
    f1, f5 = 1575.42**2, 1176.45**2
    expect_z = (f1 * 0.95 - f5 * 0.80) / (f1 - f5)  # iono-free combination (common practice)
    assert P._if_offset("E", pco)[2] == pytest.approx(expect_z, abs=1e-12)


def test_antex_offset_applied_in_body_frame(pdir):
    d = SP3.read_sp3(pdir / "mixed_sp3d.sp3")
    a = ATX.read_antex(pdir / "satellites.atx")
    com = P.PreciseOrbits(d)
    apc = P.PreciseOrbits(d, antex=a)
    assert not com.pco_applied and "centre of mass" in com.pco_note
    assert apc.pco_applied and "R05" in apc.pco_note
    t = [T0 + 450 * NS_PER_S]
    s0, s1 = com.states(["E11"], t), apc.states(["E11"], t)
    off = s1.pos_m[0] - s0.pos_m[0]
    pco = np.array(P._if_offset("E", a.offset("E11", T0)["pco_m"]))
    assert np.linalg.norm(off) == pytest.approx(np.linalg.norm(pco), abs=1e-9)
    rhat = s0.pos_m[0] / np.linalg.norm(s0.pos_m[0])
    assert -off @ rhat == pytest.approx(pco[2], abs=1e-9)  # body z points at the Earth's centre
    sun = P.sun_position_ecef(np.array(t))[0]
    ex, ey, ez = P.body_frame(s0.pos_m, sun[None, :])
    assert (sun - s0.pos_m[0]) @ ex[0] > 0  # the Sun is on the +x side (IGS frame convention)
    assert s1.pco_applied[0] and not s0.pco_applied[0]


def test_antex_bad_offset_line(pdir, tmp_path):
    text = (pdir / "satellites.atx").read_text().replace("    394.00", "    39x.00", 1)
    f = tmp_path / "bad.atx"
    f.write_text(text)
    with pytest.raises(ProductFormatError, match="3F10.2"):
        ATX.read_antex(f)


# ------------------------------------------------------------------ Sun

@pytest.mark.slow
def test_sun_position_against_astropy():
    astropy = pytest.importorskip("astropy")  # noqa: F841
    from astropy import units as u
    from astropy.coordinates import ITRS, get_sun
    from astropy.time import Time
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.iers_degraded_accuracy = "warn"
    dates = ["2021-01-01T00:00:00", "2021-03-20T09:37:00", "2021-06-21T12:00:00",
             "2022-09-23T01:00:00", "2019-12-31T23:00:00"]
    t_gps = np.array([int(civil_to_ns(int(s[:4]), int(s[5:7]), int(s[8:10]), int(s[11:13]), int(s[14:16])))
                      for s in dates]) + 18 * NS_PER_S  # dates are UTC; GPS - UTC = 18 s
    ours = P.sun_position_ecef(t_gps)
    tt = Time(dates, scale="utc")
    ref = get_sun(tt).transform_to(ITRS(obstime=tt)).cartesian.xyz.to(u.m).value.T
    ang = np.degrees(np.arccos(np.sum(ours * ref, 1) / np.linalg.norm(ours, axis=1) / np.linalg.norm(ref, axis=1)))
    # Astronomical Almanac low-precision formula: 0.01 deg (its stated accuracy, from memory)
    assert ang.max() < 0.01
    assert np.allclose(np.linalg.norm(ours, axis=1), np.linalg.norm(ref, axis=1), rtol=2e-4)


# ------------------------------------------------------------------ compare-products arithmetic

class _Perturbed:
    """A states() source: the precise states moved by known amounts (a test double)."""

    def __init__(self, base, radial_m, clock_s, unhealthy=()):
        self.base, self.radial_m, self.clock_s, self.unhealthy = base, radial_m, clock_s, unhealthy

    def states(self, sats, t_ns, dt_s=0.0):
        st = self.base.states(sats, t_ns, dt_s)
        rhat = st.pos_m / np.linalg.norm(st.pos_m, axis=1, keepdims=True)
        st.pos_m = st.pos_m + np.array([self.radial_m[s] for s in sats])[:, None] * rhat
        st.clock_s = st.clock_s + np.array([self.clock_s[s] for s in sats]) + 1e-6  # + common datum
        st.status = np.where(np.isin(sats, self.unhealthy), 5, st.status)
        return st


def _three_sat_sp3():
    one = _synthetic_sp3(20)
    x2, _ = _circular_ecef(np.arange(20) * 900.0, raan=2.4, u0=0.1)
    x3, _ = _circular_ecef(np.arange(20) * 900.0, raan=4.5, u0=2.0)
    one.sats = np.array(["G01", "G02", "G03"])
    one.pos_m = np.stack([one.pos_m[:, 0], x2, x3], axis=1)
    for k in ("clock_s", "pos_sdev_m", "clock_sdev_s", "clock_event", "clock_predicted", "manoeuvre",
              "orbit_predicted"):
        v = getattr(one, k)
        setattr(one, k, np.repeat(v, 3, axis=1))
    return one


def test_compare_states_recovers_injected_differences():
    from ctt.commands.compare_products import compare_states

    sp3 = _three_sat_sp3()
    po = P.PreciseOrbits(sp3)
    fake = _Perturbed(po, {"G01": 1.0, "G02": -2.0, "G03": 0.0}, {"G01": 1e-9, "G02": -1e-9, "G03": 0.0})
    res, det = compare_states(fake, po, sp3.sats, sp3.time_ns)
    g1, g2, g3 = (res["satellites"][s] for s in ("G01", "G02", "G03"))
    # a pure radial shift: radial RMS = 3D RMS = |shift|, nothing along or across
    assert g1["radial_rms_m"] == pytest.approx(1.0, abs=1e-9) and g1["orbit_rms_m"] == pytest.approx(1.0, abs=1e-9)
    assert g2["radial_rms_m"] == pytest.approx(2.0, abs=1e-9)
    assert max(g1["along_rms_m"], g1["cross_rms_m"], g3["orbit_rms_m"]) < 1e-9
    assert det["radial_mean_m"]["G02"] == pytest.approx(-2.0, abs=1e-9)
    # clock: the common 1 us disappears with the per-epoch mean; +1, -1, 0 ns remain
    assert g1["clock_rms_ns"] == pytest.approx(1.0, abs=1e-6)
    assert g2["clock_rms_ns"] == pytest.approx(1.0, abs=1e-6)
    assert g3["clock_rms_ns"] == pytest.approx(0.0, abs=1e-6)
    assert res["summary"]["n_satellites"] == 3
    assert res["summary"]["orbit_rms_m"] == pytest.approx(math.sqrt((1 + 4 + 0) / 3), abs=1e-9)


def test_compare_states_lists_unhealthy_with_reason():
    from ctt.commands.compare_products import compare_states

    sp3 = _three_sat_sp3()
    po = P.PreciseOrbits(sp3)
    zero = {"G01": 0.0, "G02": 0.0, "G03": 0.0}
    res, _ = compare_states(_Perturbed(po, zero, zero, unhealthy=("G02",)), po, sp3.sats, sp3.time_ns)
    assert set(res["satellites"]) == {"G01", "G03"}
    from ctt.orbits import reason

    assert res["excluded"] == {"G02": "broadcast: " + reason(5)}  # ctt.orbits UNHEALTHY
