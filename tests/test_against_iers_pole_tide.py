"""The solid Earth pole tide in ``ctt ppp`` against IERS Conventions (2010) §7.1.4 on a real day.

BRUS on 2011-10-10 (../shared/data/real-2011-283) with the IGS final products of that
day and the IGS ERP file of that week (``igs16577.erp``), the position held at (and, in a
second pair of runs, estimated from) the IGS weekly SINEX coordinate, each time with and
without ``--erp``.

Sources:
* IERS Conventions (2010), IERS Technical Note 36, §7.1.4, eq. 7.26 (displacement in mm,
  θ colatitude, λ east longitude, m1 = xp − x̄p, m2 = −(yp − ȳp) in arcsec)::

      S_r = −33 sin 2θ (m1 cos λ + m2 sin λ),  S_θ = −9 cos 2θ (…),  S_λ = 9 cos θ (m1 sin λ − m2 cos λ)

  and Table 7.7, the 2010 conventional mean pole after 2010.0: x̄p = 23.513 + 7.6141 t,
  ȳp = 358.891 − 0.6287 t (mas, t in years since 2000.0). Written here as literals.
* The pole of that day: the data line for MJD 55844.50 of ``igs16577.erp`` (IGS ERP version 2,
  1e-6 arcsec), read here from the file text, not with ctt's reader.
* BRUS's latitude and longitude: the IGS weekly SINEX SITE/ID block (50°47'52.8" N,
  4°21'31.2" E, rounded to 1e-4°; 0.0001° moves the displacement by far less than 0.001 mm).
"""

from __future__ import annotations

import hashlib
import json
import math

import numpy as np
import pandas as pd
import pytest

from ctt.cli import main
from ctt.formats.sinex import read_sinex_stations

from station_files import igs_station_toml

C_MPS = 299_792_458.0          # speed of light (SI definition)
LAT_DEG, LON_DEG = 50.7980, 4.3587                    # BRUS, IGS SINEX SITE/ID (rounded)
ANTENNA, DH = "ASH701945B_M    NONE", 3.9702          # BRUS RINEX header (data README)


def iers2010_pole_tide_mm(lat_deg, lon_deg, xp_as, yp_as, year):
    """(east, north, up) mm from IERS 2010 eq. 7.26 with the Table 7.7 mean pole (after 2010.0)."""
    t = year - 2000.0
    xbar = (23.513 + 7.6141 * t) * 1e-3
    ybar = (358.891 - 0.6287 * t) * 1e-3
    m1, m2 = xp_as - xbar, -(yp_as - ybar)
    theta = math.radians(90.0 - lat_deg)
    lam = math.radians(lon_deg)
    a = m1 * math.cos(lam) + m2 * math.sin(lam)
    s_r = -33.0 * math.sin(2 * theta) * a
    s_theta = -9.0 * math.cos(2 * theta) * a          # towards the south
    s_lambda = 9.0 * math.cos(theta) * (m1 * math.sin(lam) - m2 * math.cos(lam))
    return s_lambda, -s_theta, s_r


def erp_line(path, mjd_text):
    """(xp, yp) arcsec of the data line starting with ``mjd_text`` (IGS ERP version 2 columns)."""
    for ln in path.read_text().splitlines():
        f = ln.split()
        if f and f[0] == mjd_text:
            return int(f[1]) * 1e-6, int(f[2]) * 1e-6
    raise AssertionError(f"{mjd_text} not in {path}")


@pytest.fixture(scope="module")
def runs(shared_set, tmp_path_factory):
    """ctt ppp on BRUS with the position fixed at the SINEX coordinate (command line, with and
    without --erp) and estimated (run_ppp, with and without the ERP data)."""
    import dataclasses

    from ctt.config import load_station
    from ctt.formats.erp import read_erp
    from ctt.formats.rinex_obs import read_obs
    from ctt.pipeline import PairInputs, load_orbits
    from ctt.ppp import PPPOptions, run_ppp

    d = shared_set("real-2011-283")
    root = tmp_path_factory.mktemp("pole")
    marker = read_sinex_stations(d / "igs11P1657.ssc.gz").site("BRUS").xyz_m
    st = root / "brus.toml"
    st.write_text(igs_station_toml("BRUS", marker, ANTENNA, DH, sigma=0.005, frame="IGS08"))
    common = [str(d / "brus2830.11o.gz"), "--station", str(st),
              *[a for k in range(3) for a in ("--sp3", str(d / f"igs1657{k}.sp3"))],
              "--clk", str(d / "igs16571.clk"), "--antex", str(d / "igs08_1648.atx.gz"), "--position", "fixed"]
    fixed = {}
    for name, extra in (("without", []), ("with", ["--erp", str(d / "igs16577.erp")])):
        out = root / name
        assert main(["ppp", *common, *extra, "--out", str(out)]) == 0
        fixed[name] = (pd.read_csv(out / "clock.csv"), json.loads((out / "summary.json").read_text()),
                       pd.read_csv(out / "residuals.csv"))
    station = load_station(st)
    obs = read_obs(d / "brus2830.11o.gz", systems=("G",))
    orbits = load_orbits(PairInputs(obs_a=None, obs_b=None, sp3=tuple(str(d / f"igs1657{k}.sp3") for k in range(3)),
                                    clk=str(d / "igs16571.clk"), antex=str(d / "igs08_1648.atx.gz")), "precise")[0]
    est = {name: run_ppp(obs, orbits, station, dataclasses.replace(PPPOptions(), position="estimate"), erp=e)
           for name, e in (("without", None), ("with", read_erp(d / "igs16577.erp")))}
    return d, fixed, est


def _expected_mm(d):
    xp, yp = erp_line(d / "igs16577.erp", "55844.50")
    assert (xp, yp) == (0.186349, 0.361993)        # the file's line for 2011-10-10 12:00 UTC
    year = 2000.0 + (55844.5 - 51544.5) / 365.25    # 2011-10-10 12:00 in years since J2000.0
    return np.array(iers2010_pole_tide_mm(LAT_DEG, LON_DEG, xp, yp, year))


@pytest.mark.slow
def test_reported_pole_tide_is_the_iers_2010_displacement(runs):
    d, fixed, _ = runs
    expected = _expected_mm(d)
    _, s_without, r_without = fixed["without"]
    _, s_with, r_with = fixed["with"]
    print(f"\nBRUS 2011-10-10 pole tide, IERS 2010 eq. 7.26 with igs16577.erp: E {expected[0]:+.3f} mm, "
          f"N {expected[1]:+.3f} mm, U {expected[2]:+.3f} mm; ctt: {s_with['pole_tide']}")
    assert s_without["models"]["pole_tide"] == "not applied (no ERP file given)" and "pole_tide" not in s_without
    assert s_with["models"]["pole_tide"] == "IERS 2010 §7.1.4 with igs16577.erp"
    # the pole moves by at most 0.21 mas in the day (the file's lines for MJD 55843.5-55845.5), which
    # moves the displacement by at most 33 mm/arcsec x 0.00021 arcsec = 0.007 mm: the day's mean and
    # extreme equal the noon value well within the 0.1 mm asked for
    np.testing.assert_allclose(s_with["pole_tide"]["mean_enu_mm"], expected, rtol=0, atol=0.1)
    assert s_with["pole_tide"]["max_abs_up_mm"] == pytest.approx(abs(expected[2]), abs=0.1)
    # the input is recorded like the other inputs: path and SHA-256
    rec = s_with["inputs"]["erp"]
    assert rec["sha256"] == hashlib.sha256((d / "igs16577.erp").read_bytes()).hexdigest()
    assert "erp" not in s_without["inputs"] or s_without["inputs"]["erp"] is None
    # per row, the range term is −(line of sight)·displacement: between the up part at the lowest
    # and at the highest elevation used, |Δρ| <= |d| (a projection); absent without the file
    ok = r_with["flag"] == "ok"
    d_mm = float(np.linalg.norm(expected))
    assert np.all(np.abs(r_with.loc[ok, "pole_tide_m"]) * 1e3 <= d_mm + 0.05)   # + the file's 0.1-mm rounding
    assert (r_without["pole_tide_m"] == 0).all()
    # with the station moved down (U < 0) every range grows: the dominant up part, U sin(el), is
    # 2.3 mm x sin(7°) = 0.28 mm at least, more than the 0.17 mm horizontal part can take away
    assert expected[2] < 0 and (r_with.loc[ok, "pole_tide_m"] > 0).all()


@pytest.mark.slow
def test_fixed_position_clock_moves_by_what_the_displacement_can_cause(runs):
    """With the position held, the pole tide goes into the clock (and the zenith wet delay).

    Bound (error propagation): each range changes by Δρ = −ê·d, ê the unit line of sight; the
    up part is U·sin(el) = U/x with x = 1/sin(el) ≈ the wet mapping factor m_w. The clock and the
    zenith wet delay of an epoch are a least-squares line c + z·x fitted to U/x over that epoch's
    satellites; U/x is convex in x, so the fit's residuals change sign exactly twice and the line
    is the chord through two points x1, x2 of the elevations used: c = U (1/x1 + 1/x2), i.e.
    0 < c/U <= 2 (a factor up to 2, not 1: estimating the troposphere beside the clock lets the
    clock take more than the height change, the well-known height-clock-troposphere correlation),
    and at least 2 sin(7°) = 0.24 with the 7° mask. The horizontal part adds at most |d_h| in
    either direction (|ê_h·d_h| <= |d_h|). The batch solution also has per-arc ambiguities
    (they take out constants per arc) and a random-walk zenith delay, which tie the epochs
    together; the per-epoch bounds are those of its building block."""
    d, fixed, _ = runs
    enu = _expected_mm(d) * 1e-3
    up, horiz = abs(enu[2]), float(np.hypot(enu[0], enu[1]))
    c_without, *_ = fixed["without"]
    c_with, *_ = fixed["with"]
    m = pd.merge(c_without, c_with, on="time_gps_ns", suffixes=("_0", "_1"))
    m = m[(m["flag_0"] == "ok") & (m["flag_1"] == "ok")]
    dclk_m = (m["clock_ns_1"] - m["clock_ns_0"]).to_numpy(float) * 1e-9 * C_MPS
    factor = dclk_m / enu[2]           # c/U of the docstring
    print(f"\nBRUS, position fixed: clock with - without the pole tide over {len(m)} epochs: mean "
          f"{dclk_m.mean() / C_MPS * 1e12:+.2f} ps (min {dclk_m.min() / C_MPS * 1e12:+.2f}, max "
          f"{dclk_m.max() / C_MPS * 1e12:+.2f}); U = {enu[2] * 1e3:+.3f} mm, ΔU/c = {up / C_MPS * 1e12:.2f} ps; "
          f"factor clock/U {factor.mean():.2f} (range {factor.min():.2f}-{factor.max():.2f})")
    assert len(m) > 2500                            # most of the 2,880 30-s epochs of the day
    # U < 0 here (the station lower): modelled ranges longer, so every clock estimate lower
    assert (dclk_m < 0).all()
    assert np.all(np.abs(dclk_m) <= 2.0 * up + horiz)
    assert np.all(np.abs(dclk_m) >= 2.0 * math.sin(math.radians(7.0)) * up - horiz)


@pytest.mark.slow
def test_estimated_position_absorbs_the_displacement(runs):
    """With the position estimated, the (nearly constant) displacement is a position change:
    the estimate without the model is the station plus the displacement, so with − without is
    −d, to the displacement's variation over the day (<= 0.007 mm, above) plus what that
    variation can do through the factor 2 above (0.014 mm); the clock moves by at most that
    variation's share, 2 x 0.007 mm / c = 0.05 ps."""
    d, _, est = runs
    enu = _expected_mm(d) * 1e-3
    diff = np.array(est["with"].summary["enu_difference_m"]) - np.array(est["without"].summary["enu_difference_m"])
    dclk = (est["with"].clock["clock_ns"] - est["without"].clock["clock_ns"]).to_numpy(float) * 1e3   # ps
    ok = (est["with"].clock["flag"] == "ok") & (est["without"].clock["flag"] == "ok")
    print(f"\nBRUS, position estimated: with - without the pole tide: dE {diff[0] * 1e3:+.3f} mm, dN "
          f"{diff[1] * 1e3:+.3f} mm, dU {diff[2] * 1e3:+.3f} mm; clock max |Δ| "
          f"{np.nanmax(np.abs(dclk[ok])):.3f} ps")
    np.testing.assert_allclose(diff, -enu, rtol=0, atol=0.021e-3)
    assert np.nanmax(np.abs(dclk[ok])) <= 0.05
