"""Simulated clock noise against the published power-law relations.

Sources:

* Kasdin & Walter (1992), "Discrete simulation of power law noise", Proc.
  IEEE Frequency Control Symposium, pp. 274-283: the generator and its eq. (39)
  relating the discrete variance Q_d to h_α.
* NIST SP 1065 (W. J. Riley, *Handbook of Frequency Stability Analysis*,
  2008): the table relating h_α and σ_y(τ), and the table of σ_y(τ) slopes by
  noise type (white PM −1, flicker PM ≈ −1, white FM −1/2, flicker FM 0,
  random-walk FM +1/2; quoted in ``../shared/reference-values.md``).
* ``allantools.noise_kasdin.Noise`` (an independent implementation of the
  same paper) for the predicted ADEV of a given Q_d.

Tolerances: the confidence intervals of the overlapping ADEV use the
equivalent degrees of freedom of Greenhall's algorithm (NIST SP 1065
§5.3, ``allantools.edf_greenhall``), with several independent realisations
averaged (``random_state`` differs per realisation and per noise type).
"""

from __future__ import annotations

import math

import allantools
import numpy as np
import pytest

from ctt.simulate import NOISE_TYPES, ClockSpec, adev_from_h, clock_series, h_from_adev, noise_level

TAU0 = 30.0
N = 2 ** 14
T_NS = (np.arange(N) * int(TAU0 * 1e9)).astype(np.int64)
REALISATIONS = 6
# NIST SP 1065 table of slopes (reference-values.md)
NIST_SLOPE = {"white_pm": -1.0, "flicker_pm": -1.0, "white_fm": -0.5, "flicker_fm": 0.0, "random_walk_fm": 0.5}


def _series(kind, k, adev_1s=1e-11):
    spec = ClockSpec(noise=((kind, adev_1s, None),))
    rng = np.random.default_rng(1000 * list(NOISE_TYPES).index(kind) + k)
    x, levels = clock_series(spec, T_NS, TAU0, rng)
    return x, levels[0]


def _oadev(x, m):
    _, dev, _, _ = allantools.oadev(x, rate=1.0 / TAU0, data_type="phase", taus=np.asarray(m) * TAU0)
    return dev


def _edf(kind, m):
    alpha = NOISE_TYPES[kind][0]
    return allantools.edf_greenhall(alpha=alpha, d=2, m=int(m), N=N, overlapping=True, modified=False)


@pytest.mark.parametrize("kind", list(NOISE_TYPES))
def test_adev_slope_matches_nist_table(kind):
    """Slope of σ_y(τ) between 4τ0 and 256τ0, mean of independent realisations."""
    m1, m2 = 4, 256
    slopes = []
    for k in range(REALISATIONS):
        x, _ = _series(kind, k)
        d1, d2 = _oadev(x, [m1, m2])
        slopes.append(math.log(d2 / d1) / math.log(m2 / m1))
    measured = float(np.mean(slopes))
    # standard error of one slope from the EDF at both ends (var ln σ = 1/(2 edf)), then of the mean
    se = math.sqrt(1 / (2 * _edf(kind, m1)) + 1 / (2 * _edf(kind, m2))) / math.log(m2 / m1)
    se /= math.sqrt(REALISATIONS)
    # flicker PM: the table's slope is "≈ −1"; its h-relation has the log term, which over 4..256 τ0
    # with f_h = 1/(2τ0) gives the slope computed here (NIST SP 1065 h_α table)
    expected = NIST_SLOPE[kind]
    if kind == "flicker_pm":
        expected = math.log(adev_from_h(kind, 1.0, m2 * TAU0, 0.5 / TAU0)
                            / adev_from_h(kind, 1.0, m1 * TAU0, 0.5 / TAU0)) / math.log(m2 / m1)
        assert -1.0 < expected < -0.8
    # (the discrete series' excess at 4τ0 over the table, < 2.5 % for flicker/random-walk FM, see
    # test_expected_level_is_the_nist_relation, biases the slope by < 0.006, well inside 4 se)
    assert abs(measured - expected) < 4 * se, (kind, measured, expected, se)
    # and the slope tells this noise type from its neighbours in the table (slopes 1/2 apart,
    # flicker and white PM share −1 and are told apart by MDEV, not by ADEV)
    for other, s in NIST_SLOPE.items():
        if abs(s - NIST_SLOPE[kind]) >= 0.5:
            assert abs(measured - s) > 0.25


@pytest.mark.parametrize("kind", ["white_pm", "white_fm"])
def test_level_at_tau0_is_the_configured_adev(kind):
    """White PM / white FM: σ_y(τ0) = σ_y(1 s)·τ0^μ (NIST slope), to the 99 % CI of the mean."""
    configured = 1e-11 * TAU0 ** NIST_SLOPE[kind]
    devs = [float(_oadev(_series(kind, k)[0], [1])[0]) for k in range(REALISATIONS)]
    rel_se = math.sqrt(1 / (2 * _edf(kind, 1))) / math.sqrt(REALISATIONS)
    assert abs(np.mean(devs) / configured - 1) < 2.6 * rel_se, (np.mean(devs), configured)
    _, level = _series(kind, 0)
    assert level.adev_tau0 == pytest.approx(configured, rel=1e-12, abs=0)


def _expected_discrete_adev(kind, h, m):
    """Exact expected overlapping ADEV at m·τ0 of the Kasdin & Walter series of length N.

    x_k = Σ_{j<=k} h_j w_{k-j} (their filter, Q_d from eq. 39), so the second difference
    x_{k+2m} − 2x_{k+m} + x_k has variance Q_d·Σ_{j<=k+2m} d_j², d = h − 2h(·−m) + h(·−2m);
    averaged over the N − 2m differences the estimator uses.
    """
    alpha, _ = NOISE_TYPES[kind]
    qd = h / (2.0 * (2 * math.pi) ** alpha * TAU0 ** (alpha - 1))
    b = alpha - 2
    j = np.arange(1, N)
    hh = np.ones(N)
    hh[1:] = np.cumprod((j - 1 - b / 2.0) / j)
    d = hh.copy()
    d[m:] -= 2 * hh[:-m]
    d[2 * m:] += hh[:-2 * m]
    var2 = np.cumsum(d ** 2)
    return math.sqrt(qd * np.mean(var2[2 * m:]) / (2.0 * m * m * TAU0 ** 2))


@pytest.mark.parametrize("kind", list(NOISE_TYPES))
@pytest.mark.parametrize("m", [1, 16])
def test_level_matches_the_expected_adev(kind, m):
    """Mean measured σ_y(m τ0) of the realisations against its exact expectation, within 3 standard errors."""
    devs, expected = [], None
    for k in range(REALISATIONS):
        x, level = _series(kind, k)
        devs.append(float(_oadev(x, [m])[0]))
        expected = _expected_discrete_adev(kind, level.h, m)
    rel_se = math.sqrt(1 / (2 * _edf(kind, m))) / math.sqrt(REALISATIONS)
    assert abs(np.mean(devs) / expected - 1) < 3 * rel_se, (kind, m, np.mean(devs), expected, rel_se)


@pytest.mark.parametrize("kind", list(NOISE_TYPES))
def test_expected_level_is_the_nist_relation(kind):
    """The generated series has the NIST SP 1065 σ_y(τ) of its h_α (f_h = 1/(2τ0)).

    Exactly for white PM and white FM at every τ; for flicker FM and random-walk FM from
    ~16 τ0 on (at τ0 itself sampled series are 20-22 % above the continuous formula);
    flicker PM stays 2-3 % above it (the table's constant 1.038 + 3 ln(2π f_h τ) holds for
    2π f_h τ >> 1, and the discrete series approaches it only logarithmically).
    """
    h, _ = noise_level(kind, TAU0, adev_1s=1e-11)
    ratio = {m: _expected_discrete_adev(kind, h, m) / adev_from_h(kind, h, m * TAU0, 0.5 / TAU0)
             for m in (1, 16, 256)}
    if kind in ("white_pm", "white_fm"):
        assert all(abs(r - 1) < 1e-9 for r in ratio.values()), ratio
    elif kind == "flicker_pm":
        assert 1.0 < ratio[256] < ratio[16] < 1.03, ratio
    else:
        assert abs(ratio[16] - 1) < 0.005 and abs(ratio[256] - 1) < 0.001 and ratio[1] > 1.15, ratio


@pytest.mark.parametrize("kind", list(NOISE_TYPES))
def test_qd_to_adev_agrees_with_allantools_noise(kind):
    """Our Q_d (Kasdin & Walter eq. 39) and h_α -> σ_y relation against allantools' Noise predictions."""
    from allantools.noise_kasdin import Noise

    alpha, _ = NOISE_TYPES[kind]
    h, _ = noise_level(kind, TAU0, adev_1s=1e-11)
    qd = h / (2.0 * (2 * math.pi) ** alpha * TAU0 ** (alpha - 1))
    ref = Noise(nr=2, qd=qd, b=alpha - 2)
    assert ref.frequency_psd_from_qd(TAU0) == pytest.approx(h, rel=1e-12, abs=0)
    for m in (1, 10, 100):
        # allantools writes the flicker-PM constant as 3γ − ln 2 = 1.0385; NIST SP 1065 rounds it to 1.038
        assert ref.adev(TAU0, m * TAU0) == pytest.approx(adev_from_h(kind, h, m * TAU0, 0.5 / TAU0), rel=2e-4, abs=0)


def test_h_and_adev_inputs_are_inverse():
    for kind in NOISE_TYPES:
        h = h_from_adev(kind, 3e-13, 100.0, 0.5 / TAU0)
        assert adev_from_h(kind, h, 100.0, 0.5 / TAU0) == pytest.approx(3e-13, rel=1e-12, abs=0)
        h2, a2 = noise_level(kind, TAU0, h=h)
        assert h2 == h and a2 == pytest.approx(adev_from_h(kind, h, TAU0, 0.5 / TAU0), rel=1e-12, abs=0)
