"""ctt.rinex.obs.read_obs against the reference reader georinex (georinex.load).

Every value, every NaN position and every time tag must be identical
(tolerance zero: both readers decode the same decimal text into the nearest
double, so any difference is a bug on one side). georinex is slow, so the
real files are compared on time slices (``tlim``); the whole day is under
``@pytest.mark.slow``.

Known georinex behaviours that are *not* copied (each is shown from the
file's own text in a test below):

* RINEX 3 epoch seconds are cut to microseconds (``int(float(s) % 1 * 1e6)``),
  so a tag such as ``0.1234567 s`` loses its 100 ns digit; ctt keeps it.
* A RINEX 3 event record (flags 2-5) stops georinex: it ends the read at the
  first data line that does not start with ``>`` and drops every epoch after.
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

from ctt.rinex.obs import read_obs
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


# ----------------------------------------------------------------- real data (IGS, UNAVCO)

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
    with pytest.raises(Exception, match="unknown RINEX"):
        _gr_load(test_data / "obs" / "edge_v401_mixed.rnx")
