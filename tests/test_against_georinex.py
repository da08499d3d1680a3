"""ctt.formats.rinex_obs.read_obs against the reference reader georinex (georinex.load).

Every value, every NaN position and every time tag must be identical
(tolerance zero: both readers decode the same decimal text into the nearest
double, so any difference is a bug on one side). georinex is slow, so the
real files are compared on time slices (``tlim``); the whole day is under
``@pytest.mark.slow``.

Known georinex behaviours that are *not* copied (each is shown from the
file's own text in a test below):

* RINEX 3 epoch seconds are cut to microseconds (``int(float(s) % 1 * 1e6)``),
  so a tag such as ``0.1234567 s`` loses its 100 ns digit, and float error
  makes some tags one microsecond early (``0.3370200`` -> 337019 us); ctt
  reads the digits exactly.
* RINEX 3 event records (flags 2-5) confuse georinex: it reads their header
  records as satellite records, and an event whose epoch time is blank (allowed
  for flags 2-4) ends its read, dropping every epoch after.
* RINEX 2 cycle-slip records (flag 6) are read by georinex as observations
  of a second epoch with the same time; RINEX 2.11 says they are "slip"
  records, not data, so ctt keeps them out of ``obs``.
* georinex drops satellites (and epochs) whose values are all blank; ctt
  keeps every satellite and epoch the file lists (compared after the same drop).
* georinex 1.16 refuses RINEX 4 (``unknown RINEX``); the 4.01 file is
  checked against the 3.05 file with the same records instead.
"""

from __future__ import annotations

import warnings
from datetime import datetime

import numpy as np
import pytest

from ctt.formats.rinex_obs import read_obs
from ctt.timescales import civil_to_ns, to_datetime64

georinex = pytest.importorskip("georinex")


def _gr_load(path, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return georinex.load(path, useindicators=True, **kw)


def _assert_same(ours, g, *, t_slice=None):
    """Compare an ObsData with a georinex Dataset: times, satellites, values, LLI, SSI."""
    ds = ours.to_xarray(indicators=True)
    if t_slice is not None:
        ds = ds.sel(time=slice(*t_slice))
    v2 = ours.header.version < 3
    # same epochs, exactly (georinex: datetime64[ns] from datetime; ctt: int64 ns)
    assert np.array_equal(ds.time.values, g.time.values.astype("datetime64[ns]"))
    # the same satellites once all-blank columns are dropped as georinex does
    present = [sv for sv in ds.sv.values
               if any(np.isfinite(ds[c].sel(sv=sv).values).any() for c in ours.obs)]
    assert sorted(present) == sorted(g.sv.values.tolist())
    n_checked = 0
    for var in g.data_vars:
        base = var[:2] if v2 else var[:3]
        suffix = var[len(base):]
        for sv in g.sv.values:
            code = ours.header.v2_to_v3[sv[0]][base] if v2 else base
            ref = g[var].sel(sv=sv).values
            if code + suffix not in ds:
                assert np.isnan(ref).all(), (var, sv)
                continue
            got = ds[code + suffix].sel(sv=sv).values
            # identical values and NaN positions (tolerance 0, see module docstring)
            assert np.array_equal(got, ref, equal_nan=True), (var, sv)
            n_checked += np.count_nonzero(np.isfinite(ref))
    assert n_checked > 0
    return n_checked


# ----------------------------------------------------------------- real open data (../shared/data/README.md)

@pytest.mark.parametrize("name", ["zimm0010.21o.gz", "cn000010.21o.gz"])
def test_real_rinex2_slice(shared_data, name):
    """First 90 minutes of the real 2021-001 files (README of ../shared/data)."""
    path = shared_data / name
    ours = read_obs(path)
    t0, t1 = datetime(2021, 1, 1, 0, 0), datetime(2021, 1, 1, 1, 30)
    g = _gr_load(path, tlim=(t0, t1))
    n = _assert_same(ours, g, t_slice=(np.datetime64(t0), np.datetime64(t1)))
    assert n > 10_000


@pytest.mark.parametrize("name", ["zimm0010.21o.gz", "cn000010.21o.gz"])
def test_real_rinex2_late_slice(shared_data, name):
    """A slice at the end of the day: the last epoch 23:59:30 (README: full day, 30 s)."""
    path = shared_data / name
    ours = read_obs(path)
    t0, t1 = datetime(2021, 1, 1, 23, 0), datetime(2021, 1, 1, 23, 59, 30)
    g = _gr_load(path, tlim=(t0, t1))
    _assert_same(ours, g, t_slice=(np.datetime64(t0), np.datetime64(t1)))
    assert ours.time_ns[-1] == civil_to_ns(2021, 1, 1, 23, 59, 30)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["zimm0010.21o.gz", "cn000010.21o.gz"])
def test_real_rinex2_whole_day(shared_data, name):
    path = shared_data / name
    _assert_same(read_obs(path), _gr_load(path))


# ----------------------------------------------------------------- hand-made edge cases

def test_edge_v211_mixed(test_data):
    """Wrapped lines (7 types), 16 satellites (continuation line), a blank record line,
    a flag-4 event with comments, a flag-1 epoch, four systems."""
    path = test_data / "obs" / "edge_v211_mixed.21o"
    ours = read_obs(path)
    _assert_same(ours, _gr_load(path))


def test_edge_v305_mixed(test_data):
    """All seven systems with unequal type lists, 14 GPS types (continuation line)."""
    path = test_data / "obs" / "edge_v305_mixed.rnx"
    ours = read_obs(path)
    _assert_same(ours, _gr_load(path))


def test_edge_v401_equals_v305(test_data):
    """georinex 1.16 cannot read RINEX 4: the 4.01 file holds the first epoch of the
    3.05 file record for record, so its values must equal the 3.05 read (which is
    itself checked against georinex above)."""
    v4 = read_obs(test_data / "obs" / "edge_v401_mixed.rnx")
    v3 = read_obs(test_data / "obs" / "edge_v305_mixed.rnx")
    assert v4.header.version == 4.01
    assert np.array_equal(v4.time_ns, v3.time_ns[:1])
    assert np.array_equal(v4.sats, v3.sats)
    for c in v3.obs:
        assert np.array_equal(v4.obs[c], v3.obs[c][:1], equal_nan=True), c
        assert np.array_equal(v4.lli[c], v3.lli[c][:1]) and np.array_equal(v4.ssi[c], v3.ssi[c][:1])
    with pytest.raises(ValueError, match="unknown RINEX"):  # georinex's own error
        _gr_load(test_data / "obs" / "edge_v401_mixed.rnx")


def test_edge_v304_events_georinex_stops_at_event(test_data):
    """georinex ends a RINEX 3 read at an event record whose time is blank; ctt reads on.

    The file's own text: line 33 is '>' + blank time + flag 4 with two header records
    (RINEX 3.05, observation data record description allows a blank epoch for flags 2-4); data epochs follow.
    """
    path = test_data / "obs" / "edge_v304_events.rnx"
    lines = path.read_text().splitlines()
    assert lines[32].startswith(">") and not lines[32][1:29].strip() and lines[32][31] == "4"
    before = [ln for ln in lines[:32] if ln.startswith(">") and ln[31] in "01"]
    after = [ln for ln in lines[33:] if ln.startswith(">") and ln[31] in "01"]
    assert len(before) == 3 and len(after) == 4
    ours = read_obs(path)
    g = _gr_load(path)
    assert g.sizes["time"] == len(before) and len(ours.time_ns) == len(before) + len(after)
    # the epochs both read agree (after georinex's microsecond cut, see next test)
    head = ours.to_xarray(indicators=True).isel(time=slice(0, 3))
    for var in g.data_vars:
        for sv in g.sv.values:
            assert np.array_equal(head[var].sel(sv=sv).values, g[var].sel(sv=sv).values,
                                  equal_nan=True), (var, sv)


def test_fractional_seconds_georinex_cuts_to_microseconds(test_data):
    """Epoch seconds F11.7 (RINEX 3.05, observation data record description): '0.1234567' is 123 456 700 ns.
    georinex keeps 123 456 us (int(float % 1 * 1e6)); ctt keeps the 100 ns digit."""
    path = test_data / "obs" / "edge_v304_events.rnx"
    first = path.read_text().splitlines()[14]
    assert first[18:29] == "  0.1234567"
    ours = read_obs(path)
    g = _gr_load(path)
    assert ours.time_ns[0] == civil_to_ns(2021, 1, 1, 12, 0, 0, 123_456_700)
    cut = (ours.time_ns[:3] // 1000) * 1000  # truncated to the microsecond
    assert np.array_equal(to_datetime64(cut), g.time.values.astype("datetime64[ns]"))
    assert np.all(ours.time_ns[:3] - cut == 700)


def test_edge_v211_events(test_data):
    """Flag 5 (no records) and flag 2 events before 06:00:30 read the same as georinex."""
    path = test_data / "obs" / "edge_v211_events.21o"
    ours = read_obs(path)
    t0, t1 = datetime(2021, 1, 1, 6, 0, 0), datetime(2021, 1, 1, 6, 0, 15)
    _assert_same(ours, _gr_load(path, tlim=(t0, t1)), t_slice=(np.datetime64(t0), np.datetime64(t1)))


def test_v2_cycle_slip_records_are_not_data(test_data):
    """RINEX 2.11 flag 6: 'cycle slip records follow', slips instead of observations.
    The file's line 37 is such a record at 06:00:30, the time of the data epoch at line 32.
    georinex reads it as a second epoch with the same time and fails to align;
    ctt keeps one 06:00:30 epoch with the observations, and the slip in ``events``."""
    path = test_data / "obs" / "edge_v211_events.21o"
    lines = path.read_text().splitlines()
    assert lines[36][:29] == " 21  1  1  6  0 30.0000000  6"
    assert lines[31][:29] == " 21  1  1  6  0 30.0000000  0"
    with pytest.raises(ValueError, match="duplicate"):  # georinex (xarray) error
        _gr_load(path, tlim=(datetime(2021, 1, 1, 6), datetime(2021, 1, 1, 6, 0, 30)))
    ours = read_obs(path)
    t = civil_to_ns(2021, 1, 1, 6, 0, 30)
    assert np.count_nonzero(ours.time_ns == t) == 1
    slip = [e for e in ours.events if e["flag"] == 6]
    assert len(slip) == 1 and slip[0]["line"] == 37 and slip[0]["time_ns"] == t


# ----------------------------------------------------------------- a RINEX 3 file written here

def _write_rinex3(path, rng, n_ep=40):
    """Small RINEX 3.04 file: four systems with their own types, blanks, signs, LLI/SSI."""
    types = {"G": ["C1C", "L1C", "D1C", "S1C", "C2W", "L2W"], "E": ["C1C", "L1C", "C5Q", "L5Q", "S5Q"],
             "R": ["C1C", "L1C", "S1C"], "C": ["C2I", "L2I", "D2I", "C7I"]}
    sats = ["G01", "G12", "G31", "E02", "E30", "R03", "R24", "C06", "C41"]
    out = [f"{'     3.04           OBSERVATION DATA    M':<60}RINEX VERSION / TYPE\n",
           f"{'TST9':<60}MARKER NAME\n"]
    out += [f"{s}  {len(t):3d} {' '.join(t):<53}SYS / # / OBS TYPES\n" for s, t in types.items()]
    out += [f"{'  2021     1     1     0     0    0.0000000     GPS':<60}TIME OF FIRST OBS\n",
            f"{'':<60}END OF HEADER\n"]
    for e in range(n_ep):
        here = [s for s in sats if rng.random() < 0.85]
        frac = int(rng.integers(0, 10_000_000))
        out.append(f"> 2021 01 01 00 {e // 2:02d} {(e % 2) * 30 + frac / 1e7:10.7f}  0{len(here):3d}\n")
        for sv in here:
            txt = sv
            for _ in types[sv[0]]:
                if rng.random() < 0.1:
                    txt += " " * 16
                    continue
                v = rng.choice([rng.uniform(-9e8, 9e9), rng.uniform(-5000, 5000), rng.uniform(0, 60)])
                lli = rng.choice(list(" 0123456789"))
                ssi = rng.choice(list(" 123456789"))
                txt += f"{v:14.3f}{lli}{ssi}"
            out.append(txt.rstrip() + "\n")
    path.write_text("".join(out))


def test_written_rinex3_equals_georinex(tmp_path):
    path = tmp_path / "TST900XXX_R_20210010000_01H_30S_MO.rnx"
    _write_rinex3(path, np.random.default_rng(11))
    ours = read_obs(path)
    g = _gr_load(path)
    # georinex cuts times to microseconds (see test above); compare values on its grid
    gt = g.time.values.astype("datetime64[ns]")
    # the epoch seconds as the file's text gives them (F11.7, RINEX 3.05, observation data record description)
    text = [ln for ln in path.read_text().splitlines() if ln.startswith(">")]
    frac_100ns = np.array([int(ln[22:29]) for ln in text])
    assert np.array_equal(ours.time_ns % 1_000_000_000, frac_100ns * 100)
    # georinex: int(float(s) % 1 * 1e6) truncates to the microsecond and, float
    # arithmetic being inexact, sometimes one microsecond lower than the text says
    # (e.g. '0.3370200' -> 337019 us): allowed differences are 0 and exactly -1 us
    text_us = (ours.time_ns // 1000) * 1000
    diff = gt.astype(np.int64) - to_datetime64(text_us).astype(np.int64)
    assert set(diff.tolist()) <= {0, -1000}
    wrong = np.flatnonzero(diff)
    assert np.all(frac_100ns[wrong] % 10 == 0)  # e.g. ...3370200: an exact microsecond in the text
    ds = ours.to_xarray(indicators=True)
    ds = ds.assign_coords(time=gt)
    n = 0
    for var in g.data_vars:
        for sv in g.sv.values:
            ref = g[var].sel(sv=sv).values
            got = ds[var].sel(sv=sv).values if var in ds else np.full(len(ref), np.nan)
            assert np.array_equal(got, ref, equal_nan=True), (var, sv)
            n += np.isfinite(ref).sum()
    assert n > 500


# ----------------------------------------------------------------- the demo files (data_demo/, simulated)

_DEMO = __import__("pathlib").Path(__file__).resolve().parents[1] / "data_demo"


@pytest.mark.parametrize("station", ["ALDR", "BRKW"])
def test_demo_rinex3_slice(station):
    """The committed demo observation files (RINEX 3.04 as Hatanaka compact RINEX, GPS + Galileo): first 40 minutes."""
    path = next(_DEMO.glob(f"{station}*_MO.crx"))
    ours = read_obs(path)
    t0, t1 = datetime(2021, 1, 1, 0, 0), datetime(2021, 1, 1, 0, 40)
    g = _gr_load(path, tlim=(t0, t1))
    n = _assert_same(ours, g, t_slice=(np.datetime64(t0), np.datetime64(t1)))
    assert n > 5_000
