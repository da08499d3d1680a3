"""Behaviour of ctt.ppp: the batch estimator, cycle slips, clock jumps, model terms, the command."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from ctt.cli import main
from ctt.ppp import C_MPS, PPPOptions, _Design, detect_clock_jumps, detect_slips

F1, F2 = 1575.42e6, 1227.60e6          # GPS L1, L2 (IS-GPS-200)
LAM1, LAM2 = C_MPS / F1, C_MPS / F2
LAM_WL = C_MPS / (F1 - F2)


def test_epoch_clock_elimination_equals_the_full_least_squares():
    # The Schur-complement solution must equal an explicit least squares with one clock
    # column per epoch (numpy's dense solver as the independent reference).
    rng = np.random.default_rng(11)
    n_ep, n_g, n = 40, 5, 400
    epoch = rng.integers(0, n_ep, n)
    A = rng.normal(size=(n, n_g)) * (rng.random((n, n_g)) < 0.6)
    w = rng.uniform(0.5, 2.0, n)
    y = rng.normal(size=n)
    prior = np.full(n_g, 1e-3)
    x, Q, clk, var_c, v = _Design(n_ep, n_g).solve(epoch, y, w, sp.csr_matrix(A), prior_diag=prior)
    full = np.hstack([A, np.eye(n_ep)[epoch]])
    N = (full * w[:, None]).T @ full
    N[np.arange(n_g), np.arange(n_g)] += prior
    sol = np.linalg.solve(N, (full * w[:, None]).T @ y)
    cov = np.linalg.inv(N)
    assert np.allclose(x, sol[:n_g], atol=1e-9)
    have = np.isfinite(clk)
    assert np.allclose(clk[have], sol[n_g:][have], atol=1e-9)
    assert np.allclose(var_c[have], np.diag(cov)[n_g:][have], rtol=1e-8)
    assert np.allclose(v, y - full @ sol, atol=1e-9)


def _arcs(n_ep=240, n_sat=3, seed=5):
    rng = np.random.default_rng(seed)
    t = np.arange(n_ep, dtype=np.int64) * 30_000_000_000
    # MW noise 0.2 wide-lane cycles, GF: a slow ionosphere drift plus 3 mm noise (common practice
    # magnitudes for a geodetic receiver)
    mw = 3.7 + rng.normal(0, 0.2, (n_ep, n_sat))
    gf = 0.8 + np.linspace(0, 0.3, n_ep)[:, None] + rng.normal(0, 0.003, (n_ep, n_sat))
    return t, mw, gf


# (n1, n2) with λ1n1 − λ2n2 ≈ 0 and n1 − n2 = 1 (e.g. 5, 4: 2.5 cm, one wide-lane cycle) are
# below both thresholds by design (documented in ctt.ppp); these are the detectable kinds.
@pytest.mark.parametrize("n1,n2", [(1, 1), (1, 0), (0, 1), (3, 1), (4, 1), (7, 7)])
def test_simulated_slips_are_found(n1, n2):
    t, mw, gf = _arcs()
    k, j = 120, 1
    # a slip of n1, n2 cycles changes GF by λ1n1 − λ2n2 and MW by n1 − n2 wide-lane cycles
    gf[k:, j] += LAM1 * n1 - LAM2 * n2
    mw[k:, j] += n1 - n2
    usable = np.ones(mw.shape, bool)
    start, slip = detect_slips(t, mw, gf, np.zeros(mw.shape, bool), usable, PPPOptions())
    assert slip[k, j]
    assert slip.sum() == 1                       # and no false alarm elsewhere
    assert start[0].all() and start.sum() == mw.shape[1] + 1


def test_gaps_and_loss_of_lock_start_new_arcs():
    t, mw, gf = _arcs()
    usable = np.ones(mw.shape, bool)
    usable[100:115, 0] = False                   # 7.5 min gap > max_gap_s (300 s)
    lli = np.zeros(mw.shape, bool)
    lli[50, 2] = True
    start, slip = detect_slips(t, mw, gf, lli, usable, PPPOptions())
    assert start[115, 0] and not slip[115, 0]     # a gap is a new arc, not a slip
    assert slip[50, 2]
    assert start.sum() == 3 + 2


def test_millisecond_clock_jumps():
    n_ep, n_sat = 100, 6
    t = np.arange(n_ep, dtype=np.int64) * 30_000_000_000
    clk = -3.1e-7 * np.arange(n_ep) * 30.0       # a free oscillator's drift (CAGZ, data README)
    clk[40:] += 1e-3
    clk[70:] += 1e-3
    lmp = np.tile(np.linspace(0, 5, n_sat), (n_ep, 1))   # phases follow the code: L − P unchanged
    jumps, corr = detect_clock_jumps(t, clk, lmp)
    assert [j["epoch"] for j in jumps] == [40, 70] and all(j["phases_followed"] for j in jumps)
    assert not corr.any()
    # phases that do not follow: L − P jumps by −c·1 ms; the correction restores it
    lmp2 = lmp.copy()
    lmp2[40:] -= C_MPS * 1e-3
    jumps, corr = detect_clock_jumps(t, clk, lmp2)
    assert not jumps[0]["phases_followed"] and jumps[1]["phases_followed"]
    assert np.allclose((lmp2 + corr[:, None])[-1], lmp[-1])


# Shapiro delay and phase wind-up: tests/test_against_iers_phase_terms.py (ctt.measure, ctt.signals).


def test_command_bad_input_exit_codes(tmp_path):
    # missing files: exit 3; options that do not fit: exit 2 (ctt.errors, README "Exit codes")
    rc = main(["ppp", str(tmp_path / "none.o"), "--station", str(tmp_path / "none.toml"),
               "--sp3", str(tmp_path / "none.sp3"), "--out", str(tmp_path / "out")])
    assert rc == 3
    with pytest.raises(SystemExit) as e:
        main(["ppp", "x.o", "--station", "s.toml", "--sp3", "a.sp3", "--position", "floating", "--out", "o"])
    assert e.value.code == 2


@pytest.mark.slow
def test_slips_inserted_into_real_phases_are_found(shared_set):
    # Real BRUS phases (real-2011-283) with slips added: each inserted slip is found at its epoch.
    from ctt.formats.rinex_obs import read_obs
    from ctt.measure import MeasureOptions, select_signals
    from ctt.ppp import PPP_CODES

    d = shared_set("real-2011-283")
    obs = read_obs(d / "brus2830.11o.gz", systems=("G",))
    sel = select_signals(obs, np.asarray(obs.sats), MeasureOptions(codes=PPP_CODES))
    f1, f2 = sel.f1_hz, sel.f2_hz
    t = obs.time_ns

    def grids(l1, l2):
        mw = ((f1 * l1 - f2 * l2) / (f1 - f2) - (f1 * sel.code1_m + f2 * sel.code2_m) / (f1 + f2)) / (C_MPS / (f1 - f2))
        return mw, l1 - l2

    mw, gf = grids(sel.phase1_m, sel.phase2_m)
    usable = np.isfinite(mw) & np.isfinite(gf)
    lli = sel.slip_flags
    _, base = detect_slips(t, mw, gf, lli, usable, PPPOptions())
    # choose, per satellite, an epoch in the middle of a long run of data
    l1, l2 = sel.phase1_m.copy(), sel.phase2_m.copy()
    inserted = []
    for j, (n1, n2) in zip(range(usable.shape[1]), [(1, 1), (1, 0), (0, 1), (2, 1), (4, 1), (3, 3)] * 6):
        run = np.flatnonzero(usable[:, j])
        if len(run) < 200:
            continue
        k = int(run[len(run) // 2])
        if not (usable[k - 3:k + 3, j].all()) or base[k, j]:
            continue
        l1[k:, j] += n1 * LAM1
        l2[k:, j] += n2 * LAM2
        inserted.append((k, j, n1, n2))
    mw2, gf2 = grids(l1, l2)
    _, found = detect_slips(t, mw2, gf2, lli, usable, PPPOptions())
    hits = sum(bool(found[k, j]) for k, j, *_ in inserted)
    missed = [(obs.sats[j], n1, n2) for k, j, n1, n2 in inserted if not found[k, j]]
    print(f"\nBRUS: {int(base.sum())} slips detected in the real data; {hits} of {len(inserted)} inserted found; missed {missed}")
    assert len(inserted) >= 15
    assert hits == len(inserted)

