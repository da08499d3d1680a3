"""Synthetic scenarios: RINEX files from a known truth.

``ctt simulate --scenario SCENARIO.toml --out DIR`` (or :func:`run_scenario`)
writes, for every station, a RINEX 3.04 observation file (code, carrier phase
and signal strength; optionally RINEX 2.11 too), a RINEX 2.11 meteorological
file and a station TOML file for :mod:`ctt.config`; one RINEX 3.04
navigation file; a pair TOML file per pair; ``truth.csv`` (the true clock
offsets) and ``truth_steps.csv`` (the true steps). A scenario longer than a
day is written as one observation, navigation and met file per GPS day (the
pair file's patterns then end in a glob, so every date resolves).

The forward model is written here on purpose and does not call the
measurement code of :mod:`ctt.measure` (light time, Sagnac, relativity, delay
application), so that an error there cannot cancel itself in an end-to-end
test. It does reuse the *satellite model* (:mod:`ctt.orbits` for a real
navigation file; for a synthetic constellation the truth comes from the
Keplerian elements written into the file, evaluated here with the IS-GPS-200
Table 20-IV equations) and the atmosphere and tide *model functions*
(:func:`ctt.atmosphere.zenith_delays`, :func:`ctt.atmosphere.niell_mapping`,
:func:`ctt.atmosphere.klobuchar_delay_s`,
:func:`ctt.geodesy.solid_tide_displacement`).

Forward model (one station, one satellite, one epoch)
=====================================================
Time tags. A timing receiver steers its time tags to GPS time; the common
case simulated here is that the RINEX time tags are exact nominal epochs
``t_tag = start + k·interval`` read on the receiver's clock. With
``x(t) = local clock − GPS time`` (the truth, seconds) the true receive
instant in GPS time is ``t_r = t_tag − x(t_r)``; x is taken at the time tag
(between t_tag and t_r it changes by |y|·|x| < 1e-11·|x|, far below 1 ps).
``truth.csv`` gives x at every time tag.

Light time. The transmit instant ``t_t = t_r − τ`` solves, exactly, the
geometric light-time equation in the Earth-fixed frame of ``t_r``::

    c·τ = | R3(ωe·τ) · r_sat(t_r − τ) − r_rx(t_r) |

where ``r_sat`` is the Earth-fixed satellite position at ``t_t`` and
``R3(θ)`` turns coordinates of the Earth-fixed frame at ``t_t`` into those of
``t_r`` (the Earth has turned by ωe·τ meanwhile; ωe = 7.2921151467e-5 rad/s,
IS-GPS-200). Fixed-point iteration converges by a factor ~|v|/c ≈ 1e-5 per
step; it is run until |Δτ| < 1e-15 s. ``earth_rotation = false`` sets ωe = 0
(a test switch: then ``c·τ = |r_sat(t_t) − r_rx|`` exactly). ``r_rx`` is the
antenna reference point (marker + ANTENNA: DELTA H/E/N) plus the solid Earth
tide displacement (IERS Conventions 2010 §7.1.1, via :mod:`ctt.geodesy`).

Code pseudorange of code ``k`` on frequency ``f``::

    P_k = c·(t_tag − (t_t + dt_sat(t_t)))                 # = c·(τ + x − dt_sat)
          + T_slant + I_L1·(f_L1/f)²
          + c·(receiver_k + cable − reference)            # station hardware
          + c·g_k                                          # satellite group delay
          + multipath_k(az, el) + noise_k

* ``dt_sat`` = broadcast clock polynomial + periodic relativistic term
  F·e·√A·sin E (IS-GPS-200 §20.3.3.3.3.1) (+ an optional "true minus
  broadcast" satellite clock error, ``[satellites] clock_error_ns``).
* The true satellite position is the broadcast one plus, optionally, an
  orbit error (``[satellites] orbit_error_m``: per satellite and axis a
  constant and a once-per-revolution term, together of that rms), which a
  user of the broadcast file cannot see.
* GLONASS (``systems`` with ``"R"``; with ``source = "nav"`` the file's
  GLONASS records are the truth and their frequency numbers the channels). The
  synthetic orbits are integrated here (central term + J2, PZ-90 constants of the
  GLONASS ICD; :class:`GlonassTruth`) and written as RINEX 3 GLONASS records
  every 30 min (t_b at hh:15/hh:45 UTC, t_k 15 min earlier, the true state at
  t_b, no luni-solar acceleration, −τ_n and γ_n of a linear clock, channel
  k); ctt's reader and RK4 propagator reproduce the truth within 1 mm.
  Each satellite transmits on its FDMA channel k (24 slots, antipodal slots
  sharing k as in the 2020 allocation): G1 = 1602 + 0.5625·k MHz, G2 = 1246 +
  0.4375·k MHz (GLONASS ICD), so wavelength and ionosphere (∝ 1/f²) follow k.
  GLONASS time = UTC(SU) + 3 h = UTC + 3 h (header GLUT 0): with GPS-time
  tags the satellite clock enters like a GPS one. The receiver's GLONASS
  code delay, on top of ``receiver_ns``, is per code and channel
  (``[stations.glonass]``: an inter-system part, a part linear in k, and
  per-channel departures), on code only (a constant carrier-phase bias would
  go into the ambiguity); ``truth_glonass_biases.csv`` holds it. All GLONASS
  draws come from a random stream of their own (:func:`glonass_random_stream`),
  so adding ``"R"`` leaves the GPS and Galileo constellation and the clocks
  of a scenario unchanged.
* Satellite group delays as broadcast (IS-GPS-200 §20.3.3.3.3.2: an L1 P(Y)
  user subtracts T_GD from the clock, i.e. the L1 code is late by T_GD
  relative to the iono-free clock reference): GPS ``g = T_GD`` on L1 (C1C
  too: no ISC in LNAV), ``γ·T_GD`` on L2, and ``(f_L1/f_L5)²·T_GD`` on L5
  (the LNAV-only user's model; CNAV ISCs are not simulated). Galileo (OS SIS
  ICD §5.1.5) ``BGD`` on E1, ``(f_E1/f_E5a)²·BGD(E1,E5a)`` on E5a,
  ``(f_E1/f_E5b)²·BGD(E1,E5b)`` on E5b. The synthetic constellation broadcasts
  BGD(E1,E5a) = BGD(E1,E5b), so both iono-free pairs are free of group delay
  whichever message (I/NAV or F/NAV) a user takes.
* Troposphere: Saastamoinen zenith delays from the met truth of the station
  (pressure, temperature, humidity with a daily cycle, written to the RINEX
  met file at ``met_interval_s``), Niell mapping, plus an optional wet-delay
  random walk (``wet_random_walk_mm_per_sqrt_h``) that no met file shows.
* Ionosphere: Klobuchar (IS-GPS-200 §20.3.3.5.2.5) with the coefficients of
  the navigation file, times ``iono_scale`` (1.0 = the broadcast model is the
  truth; e.g. 1.3 = the true ionosphere is 30 % stronger than broadcast),
  dispersive ∝ 1/f², positive on code, negative on phase.

* Shapiro delay (IERS Conventions 2010, eq. 11.17 with γ = 1), on code and
  phase alike: ``(2GM/c²)·ln((r_s + r_r + ρ)/(r_s + r_r − ρ))`` with r_s, r_r
  the geocentric distances of satellite and antenna and ρ = c·τ (12-19 mm for
  GPS; ``[propagation] shapiro = false`` leaves it out).

Carrier phase (cycles) of band ``f``, wavelength λ = c/f::

    L = [c·(τ + x − dt_sat) + T_slant − I_L1·(f_L1/f)² + c·(receiver_k + cable − reference)
         + multipath_k/100 + noise] / λ + N + φ_wu + slips

with an integer ambiguity N drawn per continuous arc (new after a gap, a
receiver reset or a random cycle slip; LLI bit 0 is set on the first epoch of
every arc; the first epoch after a receiver reset has epoch flag 1, "power
failure"). Carrier phase is written for every code's band (L1/L2/L5 for GPS,
E1/E5a/E5b for Galileo), with the noise ``phase_noise_m / sin(el)``.

* Phase wind-up φ_wu (cycles, the same on every band; Wu et al. 1993, "Effects
  of antenna orientation on GPS carrier phase", manuscripta geodaetica 18,
  pp. 91-98), computed here on its own (:func:`phase_windup_cycles`): with k̂
  the unit vector from the satellite to the receiver, the satellite's body
  axes x̂', ŷ' of nominal yaw attitude (ẑ' towards the Earth's centre, ŷ' = ẑ'
  × ê_sun normalised, x̂' = ŷ' × ẑ'; Sun from
  :func:`ctt.geodesy.sun_moon_ecef`) and the receiver antenna's x̂ = local
  north, ŷ = local west (antenna not rotated), the effective dipoles are
  ``D' = x̂' − k̂(k̂·x̂') − k̂ × ŷ'`` and ``D = x̂ − k̂(k̂·x̂) + k̂ × ŷ`` and
  ``φ = sign(k̂·(D' × D))·arccos(D'·D / |D'||D|) / 2π``, made continuous along
  time for each satellite (the integer count is then absorbed in N).
  ``[propagation] phase_windup = false`` leaves it out. A PPP user removes it
  by subtracting the same φ (cycles) from L.
* Cycle slips at configured epochs (``[[stations.slips]]``): from that epoch
  on the carrier phase of the named bands is shifted by whole cycles;
  ``lli = true`` also sets LLI bit 0 there (receivers often do not).
* Receiver millisecond clock jumps: a receiver on a free-running oscillator
  (``[stations.clock] frequency_offset`` of e.g. −3e-7) keeps its clock within
  ``ms_jump_threshold_us`` of GPS time by stepping it by whole milliseconds
  (``[stations.clock] ms_jump_threshold_us``, 0 = never), or at configured
  instants (``[[stations.clock_jumps]]``, added on top of the threshold's resets,
  which look at the oscillator alone). The jump is part of x (the true
  receiver clock, as truth.csv gives it), so code *and* phase both follow it:
  the phase jumps by c·1 ms/λ cycles without any change of ambiguity.
Signal strength S (dB-Hz) rises with elevation; the RINEX SSI digit is
``min(9, max(1, S // 6))`` (RINEX 3.04 §5.7).

Delays and signs (the convention of :mod:`ctt.config`)
------------------------------------------------------
All station delays are positive numbers. The signal reaches the correlator
``cable + receiver_k`` after it reaches the antenna, so the pseudorange is
longer by ``c·(cable + receiver_k)``. The receiver's internal time scale lags
the local clock's time point by ``reference`` (the 1PPS/10 MHz path from the
clock to the receiver), i.e. receiver internal clock = local clock −
reference: its readings are smaller, so the pseudorange is *shorter* by
``c·reference``. Hence the receiver's raw "clock minus GNSS time" is
``raw = x + receiver_k + cable − reference`` and the local clock is recovered
as ``x = raw − (receiver_k + cable) + reference``, as :mod:`ctt.config`
states. (These delays shift the instant at which the geometry applies by
< 1 µs, i.e. < 1 mm of range; that second-order shift is not simulated.)

Clocks (``local clock − GPS time``)
-----------------------------------
``x(t) = offset + y0·(t − t0) + ½·D·(t − t0)² + Σ noise + Σ steps`` with
``y0`` the fractional frequency offset, ``D`` the linear frequency drift
(``drift_per_day``/86 400 s), phase steps (``phase_ns`` from an instant on)
and frequency steps (``frequency``: x grows by Δy·(t − T) after T).

Power-law noise, generated at the sampling interval τ0 by the method of
Kasdin & Walter (1992) ("Discrete simulation of power law noise", Proc.
IEEE FCS 1992, pp. 274-283): white noise of variance Q_d filtered by the
impulse response h_0 = 1, h_k = h_{k-1}·(k − 1 − b/2)/k with b = α − 2 the
phase-PSD exponent, as a linear convolution through zero-padded FFTs (the
same algorithm as ``allantools.noise_kasdin.Noise``, written here so that
it takes a ``numpy.random.Generator``). Q_d follows from h_α by Kasdin &
Walter eq. (39): ``h_α = 2·(2π)^α·τ0^(α−1)·Q_d``.

Each term's level is given either as ``h`` (h_α of S_y(f) = h_α·f^α, 1/Hz·f^-α)
or as ``adev_1s`` (σ_y(1 s) of that noise type alone). The NIST SP 1065
(Riley 2008) table relating h_α and σ_y(τ) is used (f_h = high-frequency cut-off):

==============  ===  ======================================  ==========
type            α    σ_y²(τ)                                 slope μ
==============  ===  ======================================  ==========
white_pm         2   3·f_h·h₂ / (4π²τ²)                      −1
flicker_pm       1   [1.038 + 3 ln(2π f_h τ)]·h₁ / (4π²τ²)   ≈ −1
white_fm         0   h₀ / (2τ)                               −1/2
flicker_fm      −1   2 ln 2 · h₋₁                            0
random_walk_fm  −2   (2π)²·τ·h₋₂ / 6                         +1/2
==============  ===  ======================================  ==========

* ``adev_1s`` is first carried to τ0 by the slope: σ_y(τ0) = σ_y(1 s)·τ0^μ
  (for white and flicker PM this keeps the phase noise per sample as it is
  at 1 s — the reading noise of a phase comparator does not depend on how
  often it is read; for flicker PM the log factor is neglected, "≈ −1"), then
  turned into h_α with the table at τ = τ0 and **f_h = 1/(2τ0)**, the Nyquist
  frequency of the generated series.
* ``h`` is used as given, with the same f_h = 1/(2τ0) for the PM types.

The generated series has the table's σ_y(τ) exactly for white PM and white
FM; for flicker FM and random-walk FM from τ ≈ 16 τ0 on (within 0.5 %), while
at τ = τ0 itself the sampled series are 20-22 % above the continuous formula
(a known property of sampled power-law noise); flicker PM stays 2-3 % above
the table's approximate formula over 16-256 τ0 (tests/test_against_kasdin_walter.py).

Scenario file
=============
All instants with a ``Z`` are UTC; ``start_gps`` is read on GPS time (daily
RINEX files start at 00:00:00 GPS). Unknown keys are refused.

.. code-block:: toml

    [scenario]
    name = "demo"
    start_gps = 2021-01-01T00:00:00     # first time tag, GPS time
    duration_h = 24.0
    interval_s = 30.0
    random_state = 20210101             # makes every run identical
    systems = ["G", "E", "R"]           # GPS, Galileo, GLONASS

    [satellites]
    source = "synthetic"                # or "nav": a real broadcast file
    nav_file = "brdc0010.21n"           # source = "nav": path, relative to the scenario file
    gps_count = 31                      # synthetic: 24..32 in 6 planes (55°, half-sidereal-day orbit)
    galileo_count = 24                  # synthetic: Walker 24/3/1, 56°, a = 29 600 km
    glonass_count = 24                  # synthetic: slots 1..n of 24 in 3 planes, 64.8°, 11 h 15 min 44 s
    klobuchar_alpha = [1.1e-8, 0.0, -6.0e-8, 0.0]   # synthetic nav header (GPSA)
    klobuchar_beta = [9.0e4, 0.0, -2.0e5, 0.0]      # (GPSB)
    clock_error_ns = 0.0                # true minus broadcast satellite clock, rms (random walk)
    orbit_error_m = 0.0                 # true minus broadcast position, rms per axis (constant + once per rev)

    [propagation]
    earth_rotation = true
    troposphere = true
    wet_random_walk_mm_per_sqrt_h = 0.0
    ionosphere = true
    iono_scale = 1.0
    solid_tide = true
    shapiro = true                      # Shapiro delay on code and phase
    phase_windup = true                 # carrier-phase wind-up (nominal yaw, antenna north-aligned)

    [output]
    gzip = true                         # gzip the obs and nav files (.gz)
    hatanaka = false                    # obs as Hatanaka compact RINEX (.crx)
    rinex2 = false                      # also write RINEX 2.11 (GPS) obs files
    met_interval_s = 300.0
    products = false                    # also write precise products of the truth (SP3-c + RINEX clock)
    sp3_interval_s = 300.0              # SP3 epochs (the file spans the data ± 1 h)
    clk_interval_s = 30.0               # clock epochs (the file spans the data ± 5 min)

    [[stations]]
    id = "LABA"
    name = "Invented Lab A"
    position_m = [x, y, z]              # marker, ECEF (or lat_deg/lon_deg/height_m)
    antenna_type = "INVENTED-ANT1"
    antenna_delta_hen_m = [0.0, 0.0, 0.0]
    receiver_type = "INVENTED-RX"
    elevation_mask_deg = 10.0
    code_noise_m = 0.3                  # sigma0 of sigma(el) = sigma0 / sin(el)
    phase_noise_m = 0.002
    signals = { G = ["C1C", "C2W", "C5Q"], E = ["C1C", "C5Q", "C7Q"], R = ["C1P", "C2P"] }
    cycle_slips_per_h = 0.0             # random carrier-phase slips per satellite-hour (LLI set)
    [[stations.slips]]                  # a cycle slip at a configured epoch
    time = 2021-01-01T06:00:00Z         # first epoch at or after it
    sat = "G05"                         # optional: default the highest tracked satellite of `system`
    system = "G"                        # used when sat is not given (default "G")
    cycles = { 1 = 3, 2 = -2 }          # band digit -> whole cycles (bands of the station's signals)
    lli = false                         # set LLI bit 0 at the slip
    [[stations.clock_jumps]]            # receiver clock stepped by whole ms
    time = 2021-01-01T09:00:00Z
    ms = 1
    [stations.delays]
    receiver_ns = { C1C = 25.1, C2W = 27.0, C5Q = 24.0, C7Q = 24.5, C1P = 30.0, C2P = 31.5 }
    cable_ns = 152.4
    reference_ns = 11.8
    u_receiver_ns = 1.0
    u_cable_ns = 0.2
    u_reference_ns = 0.3
    [stations.glonass]                  # receiver GLONASS code biases (truth; not in the station file)
    isb_ns = 12.0                       # on every GLONASS code: GLONASS − GPS inter-system part
    ifb_ns_per_channel = { C1P = 0.8, C2P = 0.5 }   # + value · k
    ifb_ns = { C1P = { "-7" = 4.0 } }   # + per code and channel (quoted channel keys −7..6)
    ifb_random_ns = 0.5                 # + N(0, value²) per code and channel (GLONASS stream)
    [stations.met]                      # truth: mean values and daily amplitudes
    pressure_hpa = 1005.0
    temperature_c = 12.0
    humidity_pct = 65.0
    pressure_amplitude_hpa = 1.0
    temperature_amplitude_c = 4.0       # maximum at 15 h local solar time
    humidity_amplitude_pct = 10.0       # minimum at 15 h local solar time
    [stations.multipath]                # optional; function of (az, el), so it repeats with the geometry
    amplitude_m = 0.4
    decay_deg = 15.0
    [stations.clock]
    offset_ns = 120.0
    frequency_offset = 1.0e-13
    drift_per_day = 0.0
    ms_jump_threshold_us = 0.0          # > 0: free-running receiver kept within it by 1-ms steps
    [[stations.clock.noise]]
    type = "white_fm"                   # white_pm flicker_pm white_fm flicker_fm random_walk_fm
    adev_1s = 1.0e-11                   # or h = 2.0e-22
    source = "caesium class, common practice"   # optional note
    [[stations.clock.steps]]
    time = 2021-01-01T10:00:00Z
    phase_ns = 5.0                      # and/or frequency = 1e-14
    what = "clock swapped"              # optional
    [[stations.gaps]]
    start = 2021-01-01T04:00:00Z
    end = 2021-01-01T04:10:00Z
    [[stations.resets]]                 # receiver reset: outage, all arcs restart
    time = 2021-01-01T18:00:00Z
    outage_s = 120.0
    [[stations.delay_changes]]          # hardware change: in the data, not in the clock
    time = 2021-01-01T15:00:00Z
    cable_ns = 5.0                      # change (receiver_ns = {...}, reference_ns also possible)
    what = "antenna cable replaced"
    in_delays = false                   # true: the station TOML gets a new [[delays]] set

    [[pairs]]
    a = "LABA"
    b = "LABB"

Truth files
===========
``truth.csv``: one row per epoch: ``time_utc`` (ISO, Z), ``mjd_utc``,
``time_gps`` (ISO, no Z), ``<ID>_ns`` (true local clock − GPS time),
``<A>-<B>_ns`` (true clock A − clock B), and ``<ID>_apparent_ns`` /
``<A>-<B>_apparent_ns``: what a correct pipeline using the written station
files recovers (the true clock plus every hardware change not entered in the
station's [[delays]]; for receiver-delay changes the first GPS code's).
``truth_steps.csv``: ``time_utc, station, kind (clock_phase |
clock_frequency | delay), phase_ns, frequency, apparent_step_ns,
in_delays, what``.
``truth_events.csv``: the carrier-phase events, one row per cycle slip and
phase observable, per receiver clock jump and per receiver reset:
``time_utc, time_gps, time_gps_ns, station, kind (cycle_slip | clock_jump |
receiver_reset), sat, obs (e.g. L1C), cycles, jump_ms, lli, source
(configured | random | threshold)``. A random slip (``cycle_slips_per_h``)
starts a new arc: its ``cycles`` is the change of that arc's ambiguity.
``truth_glonass_biases.csv`` (with GLONASS): ``station, code, channel, bias_ns``,
each station's GLONASS code bias per code and channel k = −7..6, and for two
codes on G1 and G2 their iono-free combination (code ``C1P+C2P``).
With ``products = true``: ``SIMU{week}{dow}.sp3`` (SP3-c) and
``SIMU{week}{dow}.clk`` (RINEX clock 3.00) per GPS day hold the true
satellite positions and the true satellite clocks *without* the periodic
relativistic term, −2 r·v/c² (IGS convention, as :class:`ctt.orbits.PreciseOrbits`
adds it back), on GPS time; the satellites have no antenna offset (positions
are of the phase centre).
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import logging
import math
import pathlib
import shutil
import tomllib

import numpy as np
import pandas as pd

from . import timescales as ts
from .errors import ConfigError, MissingInputError

log = logging.getLogger("ctt.simulate")

__all__ = [
    "NOISE_TYPES", "C_MPS", "OMEGA_E", "kasdin_walter", "h_from_adev", "adev_from_h", "noise_level",
    "power_law_noise", "clock_series", "Scenario", "StationSpec", "ClockSpec", "load_scenario",
    "scenario_from_dict", "synthetic_constellation", "KeplerEphemerides", "light_time", "simulate", "run_scenario",
    "SimulationResult", "StationResult", "write_outputs", "obs_file_name", "nav_file_name", "met_file_name",
    "phase_windup_cycles", "ms_jumps", "product_file_name",
]

C_MPS = 299_792_458.0  # SI
OMEGA_E = 7.2921151467e-5  # rad/s, IS-GPS-200
GM_GPS = 3.986005e14  # IS-GPS-200
GM_GAL = 3.986004418e14  # Galileo OS SIS ICD
GM_EARTH = 3.986004418e14  # IERS Conventions 2010, table 1.1 (Shapiro delay)
SIDEREAL_DAY_S = 86164.0905  # common practice
NS = ts.NS_PER_S

F_HZ = {  # IS-GPS-200, Galileo OS SIS ICD
    ("G", "1"): 1575.42e6, ("G", "2"): 1227.60e6, ("G", "5"): 1176.45e6,
    ("E", "1"): 1575.42e6, ("E", "5"): 1176.45e6, ("E", "7"): 1207.14e6, ("E", "8"): 1191.795e6,
}
F_L1 = 1575.42e6

#: noise type -> (alpha of S_y(f) = h_alpha f^alpha, ADEV slope mu of the NIST SP 1065 table)
NOISE_TYPES = {
    "white_pm": (2, -1.0),
    "flicker_pm": (1, -1.0),
    "white_fm": (0, -0.5),
    "flicker_fm": (-1, 0.0),
    "random_walk_fm": (-2, 0.5),
}

DEFAULT_SIGNALS = {"G": ("C1C", "C2W", "C5Q"), "E": ("C1C", "C5Q", "C7Q"), "R": ("C1P", "C2P")}
#: system letters the simulator writes, in the order of its satellite columns
SYSTEMS = "GER"


# ==================================================================== power-law noise

def kasdin_walter(n: int, alpha: int, rng: np.random.Generator, qd: float = 1.0) -> np.ndarray:
    """Power-law *phase* noise x_k (n samples) by Kasdin & Walter (1992).

    ``alpha`` is the exponent of S_y(f); the phase PSD exponent is b = α − 2.
    White noise of variance ``qd`` is convolved (linear convolution, zero
    padded FFT) with h_0 = 1, h_k = h_{k-1}·(k − 1 − b/2)/k.
    """
    n = int(n)
    b = alpha - 2
    w = np.zeros(2 * n)
    w[:n] = rng.standard_normal(n) * math.sqrt(qd)
    h = np.zeros(2 * n)
    k = np.arange(1, n)
    h[0] = 1.0
    h[1:n] = (k - 1 - b / 2.0) / k
    h[:n] = np.cumprod(h[:n])
    return np.fft.irfft(np.fft.rfft(w) * np.fft.rfft(h), 2 * n)[:n]


def adev_from_h(kind: str, h: float, tau: float, f_h: float) -> float:
    """σ_y(τ) of one noise type from h_α (NIST SP 1065 table; f_h for the PM types)."""
    alpha, _ = NOISE_TYPES[kind]
    if alpha == 2:
        var = 3.0 * f_h * h / (4 * math.pi ** 2 * tau ** 2)
    elif alpha == 1:
        var = (1.038 + 3.0 * math.log(2 * math.pi * f_h * tau)) * h / (4 * math.pi ** 2 * tau ** 2)
    elif alpha == 0:
        var = h / (2.0 * tau)
    elif alpha == -1:
        var = 2.0 * math.log(2.0) * h
    else:
        var = (2 * math.pi) ** 2 * tau * h / 6.0
    return math.sqrt(var)


def h_from_adev(kind: str, adev: float, tau: float, f_h: float) -> float:
    """h_α from σ_y(τ) of one noise type (inverse of :func:`adev_from_h`)."""
    return adev ** 2 / adev_from_h(kind, 1.0, tau, f_h) ** 2


def noise_level(kind: str, tau0: float, *, adev_1s: float | None = None, h: float | None = None):
    """(h_α, σ_y(τ0)) for a noise term given as ``adev_1s`` or ``h`` (see the module docstring)."""
    if kind not in NOISE_TYPES:
        raise ValueError(f"unknown noise type {kind!r}; expected one of {', '.join(NOISE_TYPES)}")
    _, mu = NOISE_TYPES[kind]
    f_h = 1.0 / (2.0 * tau0)
    if (adev_1s is None) == (h is None):
        raise ValueError("give exactly one of adev_1s and h")
    if adev_1s is not None:
        a_tau0 = adev_1s * tau0 ** mu
        return h_from_adev(kind, a_tau0, tau0, f_h), a_tau0
    return h, adev_from_h(kind, h, tau0, f_h)


def power_law_noise(n: int, tau0: float, kind: str, h: float, rng: np.random.Generator) -> np.ndarray:
    """Phase noise (s) of ``n`` samples at ``tau0`` with S_y(f) = h·f^α (Kasdin & Walter eq. 39)."""
    alpha, _ = NOISE_TYPES[kind]
    qd = h / (2.0 * (2 * math.pi) ** alpha * tau0 ** (alpha - 1))
    return kasdin_walter(n, alpha, rng, qd)


# ==================================================================== scenario

@dataclasses.dataclass(frozen=True)
class NoiseTerm:
    kind: str
    h: float
    adev_tau0: float


@dataclasses.dataclass(frozen=True)
class ClockStep:
    time_utc_ns: int
    phase_ns: float = 0.0
    frequency: float = 0.0
    what: str = ""


@dataclasses.dataclass(frozen=True)
class ClockSpec:
    offset_ns: float = 0.0
    frequency_offset: float = 0.0
    drift_per_day: float = 0.0
    noise: tuple = ()
    steps: tuple = ()
    ms_jump_threshold_us: float = 0.0   #: > 0: the receiver steps its clock by whole ms to stay within it
    jumps: tuple = ()                   #: configured (time_utc_ns, ms) receiver clock steps


@dataclasses.dataclass(frozen=True)
class SlipSpec:
    """A cycle slip at a configured epoch (``[[stations.slips]]``)."""

    time_utc_ns: int
    sat: str | None
    system: str
    cycles: dict          #: band digit -> whole cycles
    lli: bool
    key: str              #: scenario key, for error messages


@dataclasses.dataclass(frozen=True)
class DelayChange:
    time_utc_ns: int
    receiver_ns: dict
    cable_ns: float
    reference_ns: float
    what: str
    in_delays: bool


@dataclasses.dataclass(frozen=True)
class StationSpec:
    id: str
    name: str
    marker_m: np.ndarray
    antenna_type: str
    antenna_delta_hen_m: np.ndarray
    receiver_type: str
    elevation_mask_deg: float
    code_noise_m: float
    phase_noise_m: float
    signals: dict
    receiver_ns: dict
    cable_ns: float
    reference_ns: float
    u_receiver_ns: float
    u_cable_ns: float
    u_reference_ns: float
    met: dict
    multipath: dict | None
    clock: ClockSpec
    gaps: tuple
    resets: tuple
    delay_changes: tuple
    cycle_slips_per_h: float = 0.0
    slips: tuple = ()
    glonass: dict | None = None   #: [stations.glonass]: isb_ns, ifb_ns_per_channel, ifb_ns, ifb_random_ns


@dataclasses.dataclass(frozen=True)
class Scenario:
    name: str
    start_gps_ns: int
    n_epochs: int
    interval_s: float
    random_state: int
    systems: tuple
    satellites: dict
    propagation: dict
    output: dict
    stations: tuple
    pairs: tuple
    path: pathlib.Path | None
    text: str = ""

    @property
    def time_ns(self) -> np.ndarray:
        step = int(round(self.interval_s * NS))
        return self.start_gps_ns + step * np.arange(self.n_epochs, dtype=np.int64)


class _R:
    """Scenario reader: typed look-ups raising ConfigError(path, key, problem)."""

    def __init__(self, path):
        self.path = path

    def fail(self, key, problem):
        raise ConfigError(self.path, key, problem)

    def keys(self, tab, allowed, where):
        bad = sorted(set(tab) - set(allowed))
        if bad:
            self.fail(where, f"unknown key(s) {', '.join(bad)}; expected some of {', '.join(sorted(allowed))}")

    def num(self, tab, k, where, default=None, lo=None, hi=None):
        if k not in tab:
            if default is None:
                self.fail(f"{where}.{k}" if where else k, "missing; expected a number")
            return default
        v = tab[k]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            self.fail(f"{where}.{k}", f"expected a number, found {v!r}")
        if (lo is not None and v < lo) or (hi is not None and v > hi):
            self.fail(f"{where}.{k}", f"expected a value in [{lo}, {hi}], found {v!r}")
        return float(v)

    def text(self, tab, k, where, default=None):
        if k not in tab:
            if default is None:
                self.fail(f"{where}.{k}", "missing; expected a string")
            return default
        v = tab[k]
        if not isinstance(v, str):
            self.fail(f"{where}.{k}", f"expected a string, found {v!r}")
        return v

    def flag(self, tab, k, where, default):
        v = tab.get(k, default)
        if not isinstance(v, bool):
            self.fail(f"{where}.{k}", f"expected true or false, found {v!r}")
        return v

    def utc(self, tab, k, where):
        v = tab.get(k)
        if isinstance(v, _dt.datetime):
            if v.tzinfo is None or v.utcoffset() != _dt.timedelta(0):
                self.fail(f"{where}.{k}", f"expected a UTC time with Z, found {v!r}")
            return ts.parse_iso(v.replace(tzinfo=None).isoformat())
        if isinstance(v, str):
            try:
                return ts.parse_iso(v)
            except ValueError:
                pass
        self.fail(f"{where}.{k}", f"expected a UTC instant such as 2021-01-01T15:00:00Z, found {v!r}")


def _utc_to_gps(utc_ns):
    return int(ts.convert(np.int64(utc_ns), "UTC", "GPS"))


def load_scenario(path) -> Scenario:
    """Read and validate a scenario TOML file (format in the module docstring)."""
    path = pathlib.Path(path)
    if not path.is_file():
        raise MissingInputError(f"{path}: scenario file not found")
    text = path.read_text()
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(path, None, f"not valid TOML: {exc}") from exc
    return scenario_from_dict(data, path, text)


def scenario_from_dict(data: dict, path=None, text: str = "") -> Scenario:
    r = _R(path)
    r.keys(data, {"scenario", "satellites", "propagation", "output", "stations", "pairs"}, "")
    sc = data.get("scenario")
    if not isinstance(sc, dict):
        r.fail("scenario", "missing; expected a [scenario] table")
    r.keys(sc, {"name", "start_gps", "duration_h", "interval_s", "random_state", "systems"}, "scenario")
    start = sc.get("start_gps")
    if isinstance(start, _dt.datetime) and start.tzinfo is None:
        start_ns = ts.parse_iso(start.isoformat())
    elif isinstance(start, _dt.date) and not isinstance(start, _dt.datetime):
        start_ns = ts.date_to_ns(start)
    else:
        r.fail("scenario.start_gps", f"expected a local TOML date-time read on GPS time (no Z), found {start!r}")
    duration_h = r.num(sc, "duration_h", "scenario", lo=0.01, hi=24 * 31)
    interval_s = r.num(sc, "interval_s", "scenario", default=30.0, lo=0.1, hi=3600)
    if abs(interval_s * 10 - round(interval_s * 10)) > 1e-9:
        r.fail("scenario.interval_s", f"expected a multiple of 0.1 s, found {interval_s}")
    n_ep = int(round(duration_h * 3600.0 / interval_s))
    state = sc.get("random_state")
    if isinstance(state, bool) or not isinstance(state, int) or state < 0:
        r.fail("scenario.random_state", f"expected a non-negative integer, found {state!r}")
    systems = sc.get("systems", ["G"])
    if (not isinstance(systems, list) or not systems or any(s not in SYSTEMS for s in systems)
            or len(set(systems)) != len(systems)):
        r.fail("scenario.systems", f"expected a list of distinct 'G', 'E', 'R', found {systems!r}")

    sat = data.get("satellites", {})
    r.keys(sat, {"source", "nav_file", "gps_count", "galileo_count", "glonass_count", "klobuchar_alpha",
                 "klobuchar_beta", "clock_error_ns", "orbit_error_m"}, "satellites")
    source = r.text(sat, "source", "satellites", "synthetic")
    if source not in ("synthetic", "nav"):
        r.fail("satellites.source", f"expected 'synthetic' or 'nav', found {source!r}")
    sat_out = {"source": source, "clock_error_ns": r.num(sat, "clock_error_ns", "satellites", 0.0, lo=0),
               "orbit_error_m": r.num(sat, "orbit_error_m", "satellites", 0.0, lo=0)}
    if source == "nav":
        nav_rel = r.text(sat, "nav_file", "satellites")
        nav_path = pathlib.Path(nav_rel)
        if not nav_path.is_absolute() and path is not None:
            nav_path = path.parent / nav_path
        sat_out["nav_file"] = nav_path
    else:
        sat_out["gps_count"] = int(r.num(sat, "gps_count", "satellites", 31, lo=24, hi=32))
        sat_out["galileo_count"] = int(r.num(sat, "galileo_count", "satellites", 24, lo=1, hi=36))
        sat_out["glonass_count"] = int(r.num(sat, "glonass_count", "satellites", 24, lo=1, hi=24))
        for k, dflt in (("klobuchar_alpha", [1.1e-8, 0.0, -6.0e-8, 0.0]),
                        ("klobuchar_beta", [9.0e4, 0.0, -2.0e5, 0.0])):
            v = sat.get(k, dflt)
            if (not isinstance(v, list) or len(v) != 4
                    or any(isinstance(x, bool) or not isinstance(x, (int, float)) for x in v)):
                r.fail(f"satellites.{k}", f"expected 4 numbers, found {v!r}")
            sat_out[k] = [float(x) for x in v]

    prop = data.get("propagation", {})
    r.keys(prop, {"earth_rotation", "troposphere", "wet_random_walk_mm_per_sqrt_h", "ionosphere", "iono_scale",
                  "solid_tide", "shapiro", "phase_windup"}, "propagation")
    prop_out = {
        "earth_rotation": r.flag(prop, "earth_rotation", "propagation", True),
        "troposphere": r.flag(prop, "troposphere", "propagation", True),
        "wet_random_walk_mm_per_sqrt_h": r.num(prop, "wet_random_walk_mm_per_sqrt_h", "propagation", 0.0, lo=0),
        "ionosphere": r.flag(prop, "ionosphere", "propagation", True),
        "iono_scale": r.num(prop, "iono_scale", "propagation", 1.0, lo=0),
        "solid_tide": r.flag(prop, "solid_tide", "propagation", True),
        "shapiro": r.flag(prop, "shapiro", "propagation", True),
        "phase_windup": r.flag(prop, "phase_windup", "propagation", True),
    }
    out = data.get("output", {})
    r.keys(out, {"gzip", "hatanaka", "rinex2", "met_interval_s", "products", "sp3_interval_s", "clk_interval_s"},
           "output")
    out_out = {"gzip": r.flag(out, "gzip", "output", True), "hatanaka": r.flag(out, "hatanaka", "output", False),
               "rinex2": r.flag(out, "rinex2", "output", False),
               "met_interval_s": r.num(out, "met_interval_s", "output", 300.0, lo=1.0),
               "products": r.flag(out, "products", "output", False),
               "sp3_interval_s": r.num(out, "sp3_interval_s", "output", 300.0, lo=1.0, hi=3600.0),
               "clk_interval_s": r.num(out, "clk_interval_s", "output", 30.0, lo=1.0, hi=3600.0)}

    st_list = data.get("stations")
    if not isinstance(st_list, list) or not st_list:
        r.fail("stations", "missing; expected one or more [[stations]] tables")
    stations = tuple(_station(r, st, i + 1, systems) for i, st in enumerate(st_list))
    ids = [s.id for s in stations]
    if len(set(ids)) != len(ids):
        r.fail("stations", f"expected distinct station ids, found {ids}")
    pairs = []
    for j, p in enumerate(data.get("pairs", []), start=1):
        r.keys(p, {"a", "b"}, f"pairs[{j}]")
        a, b = r.text(p, "a", f"pairs[{j}]"), r.text(p, "b", f"pairs[{j}]")
        if a not in ids or b not in ids or a == b:
            r.fail(f"pairs[{j}]", f"expected two different station ids among {ids}, found {a!r}, {b!r}")
        pairs.append((a, b))
    if not pairs and len(ids) == 2:
        pairs.append((ids[0], ids[1]))
    return Scenario(name=r.text(sc, "name", "scenario", "scenario"), start_gps_ns=int(start_ns), n_epochs=n_ep,
                    interval_s=interval_s, random_state=int(state), systems=tuple(systems), satellites=sat_out,
                    propagation=prop_out, output=out_out, stations=stations, pairs=tuple(pairs),
                    path=path, text=text)


_STATION_KEYS = {"id", "name", "position_m", "lat_deg", "lon_deg", "height_m", "antenna_type",
                 "antenna_delta_hen_m", "receiver_type", "elevation_mask_deg", "code_noise_m", "phase_noise_m",
                 "signals", "delays", "met", "multipath", "clock", "gaps", "resets", "delay_changes",
                 "cycle_slips_per_h", "slips", "clock_jumps", "glonass"}


def _station(r: _R, st: dict, i: int, systems) -> StationSpec:
    w = f"stations[{i}]"
    r.keys(st, _STATION_KEYS, w)
    sid = r.text(st, "id", w)
    if not sid.isalnum() or not 4 <= len(sid) <= 9:
        r.fail(f"{w}.id", f"expected 4-9 letters/digits, found {sid!r}")
    if "position_m" in st:
        pos = st["position_m"]
        if not isinstance(pos, list) or len(pos) != 3:
            r.fail(f"{w}.position_m", f"expected [x, y, z] in metres, found {pos!r}")
        marker = np.array(pos, dtype=float)
    else:
        from .geodesy import geodetic_to_ecef

        lat, lon, hgt = (r.num(st, k, w) for k in ("lat_deg", "lon_deg", "height_m"))
        marker = np.asarray(geodetic_to_ecef(math.radians(lat), math.radians(lon), hgt), dtype=float)
    radius = float(np.linalg.norm(marker))
    if not 6.35e6 <= radius <= 6.40e6:
        r.fail(f"{w}.position_m", f"expected a geocentric radius 6.35e6..6.40e6 m, found {radius:.1f}")
    delta = np.array(st.get("antenna_delta_hen_m", [0.0, 0.0, 0.0]), dtype=float)
    sig = st.get("signals", {s: list(DEFAULT_SIGNALS[s]) for s in systems})
    signals = {}
    for s in systems:
        codes = sig.get(s, list(DEFAULT_SIGNALS[s]))
        for c in codes:
            if not (isinstance(c, str) and len(c) == 3 and c[0] == "C"
                    and ((s, c[1]) in F_HZ or (s == "R" and c[1] in GLO_FDMA_HZ))):
                r.fail(f"{w}.signals.{s}", f"expected code names such as C1C, C2W, C5Q, C7Q (GLONASS: C1C, "
                                           f"C1P, C2C, C2P), found {c!r}")
        signals[s] = tuple(codes)
    d = st.get("delays", {})
    r.keys(d, {"receiver_ns", "cable_ns", "reference_ns", "u_receiver_ns", "u_cable_ns", "u_reference_ns"},
           f"{w}.delays")
    rx = d.get("receiver_ns", {})
    all_codes = sorted({c for cs in signals.values() for c in cs})
    rx_ns = {}
    for c in all_codes:
        if c not in rx:
            r.fail(f"{w}.delays.receiver_ns", f"missing receiver delay for {c}")
        rx_ns[c] = float(rx[c])
    met = st.get("met", {})
    r.keys(met, {"pressure_hpa", "temperature_c", "humidity_pct", "pressure_amplitude_hpa",
                 "temperature_amplitude_c", "humidity_amplitude_pct"}, f"{w}.met")
    met_out = {k: r.num(met, k, f"{w}.met", dflt) for k, dflt in (
        ("pressure_hpa", 1013.25), ("temperature_c", 15.0), ("humidity_pct", 50.0),
        ("pressure_amplitude_hpa", 0.0), ("temperature_amplitude_c", 0.0), ("humidity_amplitude_pct", 0.0))}
    mp = st.get("multipath")
    mp_out = None
    if mp is not None:
        r.keys(mp, {"amplitude_m", "decay_deg"}, f"{w}.multipath")
        mp_out = {"amplitude_m": r.num(mp, "amplitude_m", f"{w}.multipath", lo=0),
                  "decay_deg": r.num(mp, "decay_deg", f"{w}.multipath", 15.0, lo=0.1)}
    ck = st.get("clock", {})
    r.keys(ck, {"offset_ns", "frequency_offset", "drift_per_day", "noise", "steps", "ms_jump_threshold_us"},
           f"{w}.clock")
    noise = []
    for j, nt in enumerate(ck.get("noise", []), start=1):
        nw = f"{w}.clock.noise[{j}]"
        r.keys(nt, {"type", "adev_1s", "h", "source"}, nw)
        kind = r.text(nt, "type", nw)
        if kind not in NOISE_TYPES:
            r.fail(f"{nw}.type", f"expected one of {', '.join(NOISE_TYPES)}, found {kind!r}")
        a1 = r.num(nt, "adev_1s", nw, 0.0, lo=0) if "adev_1s" in nt else None
        hh = r.num(nt, "h", nw, 0.0, lo=0) if "h" in nt else None
        if (a1 is None) == (hh is None):
            r.fail(nw, "expected exactly one of adev_1s and h")
        noise.append((kind, a1, hh))
    steps = []
    for j, s in enumerate(ck.get("steps", []), start=1):
        sw = f"{w}.clock.steps[{j}]"
        r.keys(s, {"time", "phase_ns", "frequency", "what"}, sw)
        steps.append(ClockStep(r.utc(s, "time", sw), r.num(s, "phase_ns", sw, 0.0), r.num(s, "frequency", sw, 0.0),
                               r.text(s, "what", sw, "")))
    jumps = []
    for j, g in enumerate(st.get("clock_jumps", []), start=1):
        gw = f"{w}.clock_jumps[{j}]"
        r.keys(g, {"time", "ms"}, gw)
        ms = g.get("ms")
        if isinstance(ms, bool) or not isinstance(ms, int) or ms == 0:
            r.fail(f"{gw}.ms", f"expected a non-zero whole number of milliseconds, found {ms!r}")
        jumps.append((r.utc(g, "time", gw), int(ms)))
    clock = ClockSpec(offset_ns=r.num(ck, "offset_ns", f"{w}.clock", 0.0),
                      frequency_offset=r.num(ck, "frequency_offset", f"{w}.clock", 0.0),
                      drift_per_day=r.num(ck, "drift_per_day", f"{w}.clock", 0.0),
                      noise=tuple(noise), steps=tuple(steps),
                      ms_jump_threshold_us=r.num(ck, "ms_jump_threshold_us", f"{w}.clock", 0.0, lo=0, hi=1e6),
                      jumps=tuple(sorted(jumps)))
    slips = []
    bands = {s: {c[1] for c in cs} for s, cs in signals.items()}
    for j, g in enumerate(st.get("slips", []), start=1):
        gw = f"{w}.slips[{j}]"
        r.keys(g, {"time", "sat", "system", "cycles", "lli"}, gw)
        sat = g.get("sat")
        if sat is not None and not (isinstance(sat, str) and len(sat) == 3 and sat[0] in signals
                                    and sat[1:].isdigit()):
            r.fail(f"{gw}.sat", f"expected a satellite id of the systems {sorted(signals)} such as G05, found {sat!r}")
        system = sat[0] if sat else r.text(g, "system", gw, "G")
        if system not in signals:
            r.fail(f"{gw}.system", f"expected one of {sorted(signals)}, found {system!r}")
        cyc = g.get("cycles")
        if (not isinstance(cyc, dict) or not cyc
                or any(str(b) not in bands[system] or isinstance(v, bool) or not isinstance(v, int)
                       for b, v in cyc.items())):
            r.fail(f"{gw}.cycles", f"expected whole cycles per band among {sorted(bands[system])} "
                                   f"(e.g. {{ 1 = 3, 2 = -2 }}), found {cyc!r}")
        slips.append(SlipSpec(r.utc(g, "time", gw), sat, system, {str(b): int(v) for b, v in cyc.items()},
                              r.flag(g, "lli", gw, False), gw))
    gaps = []
    for j, g in enumerate(st.get("gaps", []), start=1):
        gw = f"{w}.gaps[{j}]"
        r.keys(g, {"start", "end"}, gw)
        a, b = r.utc(g, "start", gw), r.utc(g, "end", gw)
        if b <= a:
            r.fail(gw, "expected end after start")
        gaps.append((a, b))
    resets = []
    for j, g in enumerate(st.get("resets", []), start=1):
        gw = f"{w}.resets[{j}]"
        r.keys(g, {"time", "outage_s"}, gw)
        resets.append((r.utc(g, "time", gw), r.num(g, "outage_s", gw, 60.0, lo=0)))
    changes = []
    for j, g in enumerate(st.get("delay_changes", []), start=1):
        gw = f"{w}.delay_changes[{j}]"
        r.keys(g, {"time", "receiver_ns", "cable_ns", "reference_ns", "what", "in_delays"}, gw)
        rxc = g.get("receiver_ns", {})
        if not isinstance(rxc, dict) or any(c not in rx_ns for c in rxc):
            r.fail(f"{gw}.receiver_ns", f"expected a table of changes for codes among {all_codes}, found {rxc!r}")
        changes.append(DelayChange(r.utc(g, "time", gw), {c: float(v) for c, v in rxc.items()},
                                   r.num(g, "cable_ns", gw, 0.0), r.num(g, "reference_ns", gw, 0.0),
                                   r.text(g, "what", gw, "hardware delay change"),
                                   r.flag(g, "in_delays", gw, False)))
    glo = _glonass_station(r, st.get("glonass"), f"{w}.glonass", signals.get("R", ()))
    return StationSpec(
        id=sid, name=r.text(st, "name", w, sid), marker_m=marker,
        antenna_type=r.text(st, "antenna_type", w, "INVENTED-ANT1"), antenna_delta_hen_m=delta,
        receiver_type=r.text(st, "receiver_type", w, "INVENTED-RX"),
        elevation_mask_deg=r.num(st, "elevation_mask_deg", w, 10.0, lo=0, hi=60),
        code_noise_m=r.num(st, "code_noise_m", w, 0.3, lo=0), phase_noise_m=r.num(st, "phase_noise_m", w, 0.002, lo=0),
        signals=signals, receiver_ns=rx_ns, cable_ns=r.num(d, "cable_ns", f"{w}.delays", 0.0),
        reference_ns=r.num(d, "reference_ns", f"{w}.delays", 0.0),
        u_receiver_ns=r.num(d, "u_receiver_ns", f"{w}.delays", 1.0, lo=0),
        u_cable_ns=r.num(d, "u_cable_ns", f"{w}.delays", 0.2, lo=0),
        u_reference_ns=r.num(d, "u_reference_ns", f"{w}.delays", 0.3, lo=0),
        met=met_out, multipath=mp_out, clock=clock, gaps=tuple(gaps), resets=tuple(resets),
        delay_changes=tuple(sorted(changes, key=lambda c: c.time_utc_ns)),
        cycle_slips_per_h=r.num(st, "cycle_slips_per_h", w, 0.0, lo=0),
        slips=tuple(sorted(slips, key=lambda v: v.time_utc_ns)), glonass=glo)


def _glonass_station(r: _R, g, where, codes):
    """``[stations.glonass]``: the receiver's GLONASS code biases (truth, not in the station file).

    The delay of GLONASS code c on channel k, on top of the station's ``receiver_ns[c]``, is
    ``isb_ns + ifb_ns_per_channel[c]·k + ifb_ns[c][k] + a normal draw of rms ifb_random_ns``
    (one draw per code and channel, from the GLONASS random stream)."""
    if g is None:
        return None
    if not codes:
        r.fail(where, "given, but the station has no GLONASS signals (scenario.systems lacks 'R')")
    if not isinstance(g, dict):
        r.fail(where, f"expected a table, found {g!r}")
    r.keys(g, {"isb_ns", "ifb_ns_per_channel", "ifb_ns", "ifb_random_ns"}, where)
    slope = g.get("ifb_ns_per_channel", {})
    if (not isinstance(slope, dict) or any(c not in codes for c in slope)
            or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in slope.values())):
        r.fail(f"{where}.ifb_ns_per_channel", f"expected {{code = ns per channel}} for codes among {list(codes)}, "
                                              f"found {slope!r}")
    extra = g.get("ifb_ns", {})
    out_extra = {}
    if not isinstance(extra, dict) or any(c not in codes or not isinstance(v, dict) for c, v in extra.items()):
        r.fail(f"{where}.ifb_ns", f"expected {{code = {{channel = ns}}}} for codes among {list(codes)}, "
                                  f"found {extra!r}")
    for c, tab in extra.items():
        out_extra[c] = {}
        for kk, v in tab.items():
            try:
                k = int(kk)
            except ValueError:
                k = None
            if k is None or not -7 <= k <= 6 or isinstance(v, bool) or not isinstance(v, (int, float)):
                r.fail(f"{where}.ifb_ns.{c}", f"expected channel numbers -7..6 (quoted keys, e.g. \"-7\" = 1.5) "
                                              f"with values in ns, found {kk!r} = {v!r}")
            out_extra[c][k] = float(v)
    return {"isb_ns": r.num(g, "isb_ns", where, 0.0), "slope": {c: float(v) for c, v in slope.items()},
            "extra": out_extra, "random_ns": r.num(g, "ifb_random_ns", where, 0.0, lo=0)}


# ==================================================================== clocks

def clock_series(spec: ClockSpec, time_gps_ns: np.ndarray, tau0: float, rng: np.random.Generator,
                 *, noise: bool = True, steps: bool = True):
    """True ``local clock − GPS time`` (s) at the epochs, and the noise terms' levels.

    Returns ``(x_s, levels)`` with ``levels`` a list of :class:`NoiseTerm`.
    The noise of every term is generated at ``tau0`` over the whole span.
    """
    t = np.asarray(time_gps_ns, dtype=np.int64)
    dt = (t - t[0]) / 1e9
    x = spec.offset_ns * 1e-9 + spec.frequency_offset * dt + 0.5 * (spec.drift_per_day / 86400.0) * dt ** 2
    levels = []
    for kind, a1, hh in spec.noise:
        h, a_tau0 = noise_level(kind, tau0, adev_1s=a1, h=hh)
        levels.append(NoiseTerm(kind, h, a_tau0))
        if noise and h > 0:
            x = x + power_law_noise(t.size, tau0, kind, h, rng)
    if steps:
        for st in spec.steps:
            tg = _utc_to_gps(st.time_utc_ns)
            after = t >= tg
            x = x + np.where(after, st.phase_ns * 1e-9 + st.frequency * (t - tg) / 1e9, 0.0)
    return x, levels


def ms_jumps(x_s: np.ndarray, time_utc_ns: np.ndarray, spec: ClockSpec):
    """Receiver millisecond clock steps added to a clock series ``x_s`` (s).

    Configured jumps (``spec.jumps``: (UTC ns, ms)) apply from the first epoch at
    or after their instant; with ``spec.ms_jump_threshold_us`` > 0 the receiver
    also steps by the whole number of ms that brings |x| back within the
    threshold whenever it exceeds it (a free-running oscillator kept near GPS
    time, module docstring). Returns ``(steps_s, events)`` with ``events`` a list
    of ``(epoch index, ms, source)``; one loop turn per jump, not per epoch.
    """
    t = np.asarray(time_utc_ns, dtype=np.int64)
    add = np.zeros(t.size)
    events = []
    thr = spec.ms_jump_threshold_us * 1e-6
    if thr > 0:
        start = 0
        while True:
            y = x_s[start:] + add[start:]
            over = np.flatnonzero(np.abs(y) > thr)
            if not over.size:
                break
            k = start + int(over[0])
            v = x_s[k] + add[k]
            ms = -int(math.copysign(math.ceil((abs(v) - thr) / 1e-3 - 1e-9), v))
            add[k:] += ms * 1e-3
            events.append((k, ms, "threshold"))
            start = k + 1
    # configured jumps come on top of the free-running clock's own resets (the threshold
    # looks at the oscillator, so a configured jump is not undone at once)
    for tj, ms in spec.jumps:
        k = int(np.searchsorted(t, tj))
        if k < t.size:
            add[k:] += ms * 1e-3
            events.append((k, int(ms), "configured"))
    events.sort()
    return add, events


# ==================================================================== carrier phase

def phase_windup_cycles(sat_m: np.ndarray, rx_m: np.ndarray, sun_m: np.ndarray) -> np.ndarray:
    """Carrier-phase wind-up (cycles, in (−0.5, 0.5]) by Wu et al. (1993); module docstring.

    ``sat_m``, ``rx_m``, ``sun_m``: ECEF positions broadcastable to ``(..., 3)``.
    Satellite: nominal yaw attitude (ẑ' to the Earth's centre, ŷ' = ẑ' × ê_sun,
    x̂' = ŷ' × ẑ'); receiver antenna: x̂ = north, ŷ = west of the geodetic
    horizon. Written here, apart from any model of the processing side, so a
    test of that model against the simulator is a test against an independent
    computation. The caller makes it continuous along time (``np.unwrap``).
    """
    from .geodesy import ecef_to_geodetic

    sat = np.asarray(sat_m, dtype=float)
    rx = np.asarray(rx_m, dtype=float)
    sun = np.asarray(sun_m, dtype=float)

    def unit(v):
        return v / np.linalg.norm(v, axis=-1, keepdims=True)

    ez = unit(-sat)
    ey = unit(np.cross(ez, unit(sun - sat)))
    ex = np.cross(ey, ez)
    lat, lon, _ = ecef_to_geodetic(rx)
    sl, cl, so, co = np.sin(lat), np.cos(lat), np.sin(lon), np.cos(lon)
    north = np.stack([-sl * co, -sl * so, cl], axis=-1)
    west = np.stack([so, -co, np.zeros_like(so)], axis=-1)
    k = unit(rx - sat)
    kdot = lambda a: np.sum(k * a, axis=-1, keepdims=True)  # noqa: E731
    d_sat = ex - k * kdot(ex) - np.cross(k, ey)
    d_rx = north - k * kdot(north) + np.cross(k, west)
    cosang = np.sum(d_sat * d_rx, axis=-1) / (np.linalg.norm(d_sat, axis=-1) * np.linalg.norm(d_rx, axis=-1))
    zeta = np.sum(k * np.cross(d_sat, d_rx), axis=-1)
    return np.sign(zeta) * np.arccos(np.clip(cosang, -1.0, 1.0)) / (2 * math.pi)


def _configured_slips(spec: StationSpec, t_utc, tracked, start_arc, el, sats, path):
    """Resolve ``[[stations.slips]]`` to (epoch, satellite column, SlipSpec); a slip must fall inside an arc."""
    out = []
    sats = np.asarray(sats)
    for sl in spec.slips:
        k = int(np.searchsorted(t_utc, sl.time_utc_ns))
        if k >= t_utc.size or k == 0:
            raise ConfigError(path, f"{sl.key}.time", "expected an instant inside the scenario's span")
        inside = tracked[k] & tracked[k - 1] & ~start_arc[k]
        if sl.sat is None:
            cand = np.flatnonzero(inside & (np.char.startswith(sats.astype(str), sl.system)))
            if not cand.size:
                raise ConfigError(path, sl.key, f"no {sl.system} satellite tracked across that epoch")
            j = int(cand[np.argmax(el[k, cand])])
        else:
            hit = np.flatnonzero(sats == sl.sat)
            if not hit.size or not inside[hit[0]]:
                raise ConfigError(path, f"{sl.key}.sat",
                                  f"{sl.sat} is not tracked across {ts.to_iso(int(t_utc[k]), 0, 'Z')} UTC "
                                  "(a slip needs an arc that goes on; omit sat to take the highest satellite)")
            j = int(hit[0])
        out.append((k, j, sl))
    return out


# ==================================================================== satellites

_EPH_FIELDS = ("af0_s", "af1_sps", "af2_sps2", "crs_m", "delta_n_radps", "m0_rad", "cuc_rad", "e", "cus_rad",
               "sqrt_a_sqrtm", "toe_sow_s", "cic_rad", "omega0_rad", "cis_rad", "i0_rad", "crc_m", "omega_rad",
               "omega_dot_radps", "idot_radps", "tgd_s", "bgd_e5a_s", "bgd_e5b_s")


def synthetic_constellation(start_gps_ns: int, end_gps_ns: int, systems, rng: np.random.Generator, *,
                            gps_count: int = 31, galileo_count: int = 24, record_spacing_s: int = 7200):
    """Ephemeris records (list of dicts for :func:`ctt.formats.rinex_writers.write_nav3`) of an invented constellation.

    GPS: 6 planes 60° apart in right ascension, inclination 55°, mean motion of
    two revolutions per sidereal day (a ≈ 26 560 km), 4-6 slots per plane,
    e 0.002-0.015. Galileo: Walker 24/3/1, 56°, a = 29 600 km, e ≈ 3e-4.
    Each satellite is one Keplerian orbit with secular Ω̇ and i̇ and small
    harmonic terms; its records every ``record_spacing_s`` all describe that
    same orbit and clock polynomial (t_oe = t_oc), so switching records does
    not move the satellite. Records start one spacing before ``start`` and end
    one after ``end``.
    """
    recs = []
    spacing = record_spacing_s * NS
    first = (start_gps_ns // spacing) * spacing - spacing
    last = -(-end_gps_ns // spacing) * spacing + spacing
    toes = np.arange(first, last + 1, spacing, dtype=np.int64)
    t_ref = int(toes[0])
    sats = []
    if "G" in systems:
        per_plane = [gps_count // 6 + (1 if k < gps_count % 6 else 0) for k in range(6)]
        prn = 1
        for plane, n_in in enumerate(per_plane):
            for slot in range(n_in):
                n_target = 2 * (2 * math.pi / SIDEREAL_DAY_S)  # rad/s, inertial mean motion ~ 2 rev/sidereal day
                dn = rng.uniform(3e-9, 5.5e-9)
                a = (GM_GPS / (n_target - dn) ** 2) ** (1.0 / 3.0)
                sats.append(dict(sat=f"G{prn:02d}", gm=GM_GPS, sqrt_a=math.sqrt(a), dn=dn,
                                 e=rng.uniform(0.002, 0.015), i0=math.radians(55.0) + rng.normal(0, 0.01),
                                 om0=math.radians(60.0 * plane) + rng.normal(0, 0.005) - 1.0,
                                 w=rng.uniform(-math.pi, math.pi),
                                 m0=math.radians(360.0 * slot / n_in + 15.0 * plane) + rng.normal(0, 0.02),
                                 omdot=-8.0e-9 + rng.normal(0, 3e-10), idot=rng.normal(0, 2e-10),
                                 cuc=rng.normal(0, 2e-6), cus=rng.normal(0, 5e-6), crc=rng.normal(200, 40),
                                 crs=rng.normal(0, 40), cic=rng.normal(0, 5e-8), cis=rng.normal(0, 5e-8),
                                 af0=rng.uniform(-4e-4, 4e-4), af1=rng.normal(0, 3e-12),
                                 tgd=float(np.round(rng.normal(0, 3e-9) / 4.656612873e-10) * 4.656612873e-10)))
                prn += 1
    if "E" in systems:
        n_planes = 3
        per = [galileo_count // n_planes + (1 if k < galileo_count % n_planes else 0) for k in range(n_planes)]
        prn = 1
        a = 29_600_000.0
        for plane, n_in in enumerate(per):
            for slot in range(n_in):
                bgd = float(np.round(rng.normal(0, 2e-9) / 2 ** -32) * 2 ** -32)
                sats.append(dict(sat=f"E{prn:02d}", gm=GM_GAL, sqrt_a=math.sqrt(a + rng.normal(0, 200)),
                                 dn=rng.normal(3e-9, 3e-10), e=rng.uniform(1e-4, 6e-4),
                                 i0=math.radians(56.0) + rng.normal(0, 0.005),
                                 om0=math.radians(120.0 * plane) + 0.3 + rng.normal(0, 0.003),
                                 w=rng.uniform(-math.pi, math.pi),
                                 m0=math.radians(360.0 * slot / n_in + 15.0 * plane) + rng.normal(0, 0.01),
                                 omdot=-5.5e-9 + rng.normal(0, 2e-10), idot=rng.normal(0, 2e-10),
                                 cuc=rng.normal(0, 2e-6), cus=rng.normal(0, 4e-6), crc=rng.normal(150, 30),
                                 crs=rng.normal(0, 30), cic=rng.normal(0, 3e-8), cis=rng.normal(0, 3e-8),
                                 af0=rng.uniform(-6e-4, 6e-4), af1=rng.normal(0, 2e-12), bgd=bgd))
                prn += 1
    for s in sats:
        n0 = math.sqrt(s["gm"]) / s["sqrt_a"] ** 3
        n = n0 + s["dn"]
        wrap = lambda ang: (ang + math.pi) % (2 * math.pi) - math.pi  # noqa: E731
        for iod, toe in enumerate(toes.tolist()):
            d = (toe - t_ref) / 1e9
            week, sow_ns = ts.week_sow_ns(np.int64(toe))
            week, sow = int(week), int(sow_ns) // NS
            rec = dict(sat=s["sat"], toc_ns=int(toe), af0_s=s["af0"] + s["af1"] * d, af1_sps=s["af1"], af2_sps2=0.0,
                       iode=float(iod % 256), crs_m=s["crs"], delta_n_radps=s["dn"], m0_rad=wrap(s["m0"] + n * d),
                       cuc_rad=s["cuc"], e=s["e"], cus_rad=s["cus"], sqrt_a_sqrtm=s["sqrt_a"], toe_sow_s=float(sow),
                       cic_rad=s["cic"], omega0_rad=wrap(s["om0"] + s["omdot"] * d), cis_rad=s["cis"],
                       i0_rad=s["i0"] + s["idot"] * d, crc_m=s["crc"], omega_rad=s["w"],
                       omega_dot_radps=s["omdot"], idot_radps=s["idot"], week=float(week), health=0.0,
                       ttm_sow_s=float(max(sow - record_spacing_s, 0)))
            if s["sat"][0] == "G":
                rec.update(l2_codes=1.0, l2p_flag=0.0, ura_m=2.0, tgd_s=s["tgd"], iodc=float(iod % 256), fit_h=4.0)
            else:
                # I/NAV (bits 0 and 2) with E5b/E1 clocks (bit 9): 517; the same set as F/NAV (bit 1)
                # with E5a/E1 clocks (bit 8): 258 (RINEX 3.04 table A8). One orbit and clock, so both
                # messages say the same; BGD(E1,E5a) = BGD(E1,E5b) (module docstring).
                rec.update(data_source=517.0, ura_m=3.12, bgd_e5a_s=s["bgd"], bgd_e5b_s=s["bgd"])
                recs.append(dict(rec, data_source=258.0))
            recs.append(rec)
    return recs


class KeplerEphemerides:
    """Truth satellite model from ephemeris records: IS-GPS-200 Table 20-IV.

    Takes the records *as a reader gets them back from the file* (every field
    rounded to the D19.12 format by :func:`ctt.formats.rinex_writers.nav_field`) and
    uses, for each instant, the record of that satellite whose t_oe is
    nearest. ``states(sats, t_ns, dt_s)`` returns an object with ``pos_m``
    (Earth-fixed at the instant), ``clock_s`` (polynomial), ``relativity_s``
    (F·e·√A·sin E), ``tgd_s``, ``bgd_e5a_s``, ``bgd_e5b_s`` and ``status``
    (0 = ok), like :class:`ctt.orbits.SatStates`.
    """

    def __init__(self, records: list):
        from .formats.rinex_writers import nav_field

        self.sats = sorted({r["sat"] for r in records})
        self._index = {s: i for i, s in enumerate(self.sats)}
        self._sats_arr = np.array(self.sats)
        by_sat = {s: sorted([r for r in records if r["sat"] == s], key=lambda r: r["toc_ns"]) for s in self.sats}
        n_rec = max(len(v) for v in by_sat.values())
        self.toe_ns = np.full((len(self.sats), n_rec), np.iinfo(np.int64).max // 4, dtype=np.int64)
        self.p = {k: np.full((len(self.sats), n_rec), np.nan) for k in _EPH_FIELDS}
        for s, rs in by_sat.items():
            i = self._index[s]
            for j, r in enumerate(rs):
                self.toe_ns[i, j] = r["toc_ns"]
                for k in _EPH_FIELDS:
                    self.p[k][i, j] = nav_field(r.get(k, 0.0))
        self.gm = np.array([GM_GPS if s[0] == "G" else GM_GAL for s in self.sats])

    def _nearest_record(self, si, t_ns):
        """Index of each instant's record with the nearest t_oe (the first such on a tie or a
        repeated t_oe, as an argmin over the row would give). A search per satellite rather than
        an (instants x records) table, whose size grows with the square of the span (25 GB for a
        month of 30 s epochs)."""
        j = np.zeros(si.shape, dtype=np.int64)
        for k in np.unique(si):
            m = si == k
            row = self.toe_ns[k]               # sorted; the padding (a huge t_oe) sits at the end
            t = t_ns[m]
            hi = np.minimum(np.searchsorted(row, t), len(row) - 1)
            lo = np.maximum(hi - 1, 0)
            near = np.where(np.abs(row[lo] - t) <= np.abs(row[hi] - t), row[lo], row[hi])
            j[m] = np.searchsorted(row, near)  # first record with that t_oe
        return j

    def states(self, sats, t_ns, dt_s=0.0):
        sats = np.asarray(sats).astype(str)
        t_ns = np.broadcast_to(np.asarray(t_ns, dtype=np.int64), sats.shape)
        dt_s = np.broadcast_to(np.asarray(dt_s, dtype=float), sats.shape)
        si = np.searchsorted(self._sats_arr, sats)  # self.sats is sorted
        bad = (si >= len(self.sats)) | (self._sats_arr[np.minimum(si, len(self.sats) - 1)] != sats)
        if np.any(bad):
            raise KeyError(f"no ephemeris records for {sorted(set(sats[bad].tolist()))[:5]}")
        j = self._nearest_record(si, t_ns)
        g = {k: v[si, j] for k, v in self.p.items()}
        tk = (t_ns - self.toe_ns[si, j]) / 1e9 + dt_s
        gm = self.gm[si]
        a = g["sqrt_a_sqrtm"] ** 2
        n = np.sqrt(gm / a ** 3) + g["delta_n_radps"]
        m = g["m0_rad"] + n * tk
        e = g["e"]
        E = m.copy()
        for _ in range(30):
            dE = (E - e * np.sin(E) - m) / (1 - e * np.cos(E))
            E -= dE
            if np.all(np.abs(dE) < 1e-14):
                break
        nu = np.arctan2(np.sqrt(1 - e * e) * np.sin(E), np.cos(E) - e)
        phi = nu + g["omega_rad"]
        s2, c2 = np.sin(2 * phi), np.cos(2 * phi)
        u = phi + g["cus_rad"] * s2 + g["cuc_rad"] * c2
        r = a * (1 - e * np.cos(E)) + g["crs_m"] * s2 + g["crc_m"] * c2
        inc = g["i0_rad"] + g["cis_rad"] * s2 + g["cic_rad"] * c2 + g["idot_radps"] * tk
        xp, yp = r * np.cos(u), r * np.sin(u)
        om = g["omega0_rad"] + (g["omega_dot_radps"] - OMEGA_E) * tk - OMEGA_E * g["toe_sow_s"]
        co, so, ci = np.cos(om), np.sin(om), np.cos(inc)
        pos = np.stack([xp * co - yp * ci * so, xp * so + yp * ci * co, yp * np.sin(inc)], axis=-1)
        tc = tk  # t_oc = t_oe in these records
        clock = g["af0_s"] + g["af1_sps"] * tc + g["af2_sps2"] * tc ** 2
        f_rel = -2.0 * np.sqrt(gm) / C_MPS ** 2
        rel = f_rel * e * g["sqrt_a_sqrtm"] * np.sin(E)
        return _States(pos_m=pos, clock_s=clock, relativity_s=rel, tgd_s=g["tgd_s"], bgd_e5a_s=g["bgd_e5a_s"],
                       bgd_e5b_s=g["bgd_e5b_s"], status=np.zeros(sats.shape, dtype=int))


@dataclasses.dataclass
class _States:
    pos_m: np.ndarray
    clock_s: np.ndarray
    relativity_s: np.ndarray
    tgd_s: np.ndarray
    bgd_e5a_s: np.ndarray
    bgd_e5b_s: np.ndarray
    status: np.ndarray


# ==================================================================== GLONASS

#: GLONASS ICD (edition 5.1, 2008) §3.1.3 and Appendix A.3.1.2: PZ-90 constants of the orbit model.
GM_GLO = 3.9860044e14
AE_GLO = 6378136.0
J2_GLO = 1082625.75e-9
OMEGA_GLO = 7.292115e-5
#: GLONASS ICD §3.1.1 (orbital constellation): 24 slots in 3 planes 120° apart, 8 slots 45° apart
#: in each plane, adjacent planes shifted by 15° in argument of latitude, inclination 64.8°, nominal
#: draconic period 11 h 15 min 44 s, altitude 19 100 km (a ≈ 25 510 km). The mean semi-major axis
#: used, 25 507.55 km, is the one whose integrated orbits (central term + J2) have that node-to-node
#: period: a Keplerian 25 510 km gives 5.85 s more (measured here, mean of 28 revolutions).
GLO_INCLINATION_DEG = 64.8
GLO_PERIOD_S = 11 * 3600 + 15 * 60 + 44
GLO_A_M = 25_507_550.0
#: Frequency channel k of slot n: antipodal slots (n, n + 4 of one plane) share k. The allocation
#: of 2020 as broadcast in ../shared/data/real-2020-177 (ESBC navigation file; slot 22 absent
#: there and given -3 like its antipodal slot 18).
GLO_CHANNELS = {1: 1, 2: -4, 3: 5, 4: 6, 5: 1, 6: -4, 7: 5, 8: 6, 9: -2, 10: -7, 11: 0, 12: -1,
                13: -2, 14: -7, 15: 0, 16: -1, 17: 4, 18: -3, 19: 3, 20: 2, 21: 4, 22: -3, 23: 3, 24: 2}
#: GLONASS ICD §3.3.1.4: G1 = 1602 + 0.5625·k MHz, G2 = 1246 + 0.4375·k MHz.
GLO_FDMA_HZ = {"1": (1602.0e6, 0.5625e6), "2": (1246.0e6, 0.4375e6)}
#: t_b: every 30 min at :15 and :45 (GLONASS ICD: t_b in 15-min units, records 30 min apart);
#: t_k, the start of the frame, 15 min before t_b (as in the broadcast files of ../shared/data).
GLO_RECORD_SPACING_S = 1800
GLO_FRAME_LEAD_S = 900


def glonass_frequency_hz(band: str, k):
    """G1/G2 carrier frequency (Hz) of frequency channel ``k`` (GLONASS ICD §3.3.1.4)."""
    base, step = GLO_FDMA_HZ[band]
    return base + step * np.asarray(k, dtype=float)


class GlonassTruth:
    """True GLONASS orbits and clocks, and the broadcast records that describe them.

    Orbits: numerical integration, here and on its own, of the central field and the J2 term with
    the PZ-90 constants of the GLONASS ICD, in the inertial frame that coincides with the
    Earth-fixed one at ``t0`` (the Earth turning at ω = 7.292115e-5 rad/s about z), by
    ``scipy.integrate.solve_ivp`` (DOP853, rtol 1e-12, atol 1e-6 m; a library integrator rather
    than a hand-written one, with dense output for any instant). No luni-solar perturbation is
    simulated, so the broadcast accelerations are 0. The receiver's model
    (:func:`ctt.orbits.glonass_propagate`: RK4 of the Earth-fixed equations from the nearest t_b)
    then reproduces the truth to its integration error, which
    ``tests/test_against_simulation_multignss.py`` measures.

    Clocks: satellite clock − GLONASS time = a0 + γ·(t − t0) (γ ~ 1e-12), broadcast at each t_b
    as −τ_n = a0 + γ·(t_b − t0) and γ_n = γ; the truth takes the record nearest in time as read
    back from the file (D19.12). GLONASS time is UTC(SU) + 3 h with UTC(SU) = UTC and no
    GLONASS − GPS offset beyond the leap seconds (header GLUT = 0), so the clock is also the
    satellite clock minus GPS time on the GPS count. Periodic relativistic term: −2 r·v/c²
    (the convention of :mod:`ctt.orbits`). No satellite group delay (τ_n refers to G1 and the
    synthetic satellites have G2 − G1 = 0).
    """

    def __init__(self, start_gps_ns: int, end_gps_ns: int, rng: np.random.Generator, count: int = 24):
        from scipy.integrate import solve_ivp

        from .formats.rinex_writers import nav_field

        spacing = GLO_RECORD_SPACING_S * NS
        # t_b on the UTC count at hh:15 and hh:45, one spacing beyond each end
        u0 = int(ts.convert(np.int64(start_gps_ns), "GPS", "UTC"))
        u1 = int(ts.convert(np.int64(end_gps_ns), "GPS", "UTC"))
        off = 900 * NS
        first = ((u0 - off) // spacing) * spacing + off - spacing
        last = -(-(u1 - off) // spacing) * spacing + off + spacing
        tb_utc = np.arange(first, last + 1, spacing, dtype=np.int64)
        tb_gps = ts.convert(tb_utc, "UTC", "GPS")
        # the integration covers the records and 3 h more each side (SP3 files span the data ± 1 h)
        self.t0 = int(tb_gps[0]) - 3 * 3600 * NS
        span_s = (int(tb_gps[-1]) - self.t0) / 1e9 + 3 * 3600.0
        slots = list(range(1, count + 1))
        self.sats = [f"R{n:02d}" for n in slots]
        self.channels = {f"R{n:02d}": GLO_CHANNELS[n] for n in slots}
        y0 = []
        self.a0 = {}
        self.gamma = {}
        for n in slots:
            plane, slot = (n - 1) // 8, (n - 1) % 8
            a = GLO_A_M + rng.normal(0, 100.0)
            e = rng.uniform(2e-4, 1.5e-3)
            inc = math.radians(GLO_INCLINATION_DEG) + rng.normal(0, 0.003)
            raan = math.radians(120.0 * plane) + 0.7 + rng.normal(0, 0.002)
            argp = rng.uniform(-math.pi, math.pi)
            u = math.radians(45.0 * slot + 15.0 * plane) + rng.normal(0, 0.002)
            # osculating from mean semi-major axis: first-order short-period J2 term of a near-circular
            # orbit, (3/2)·J2·(a_e²/a)·sin²i·cos 2u (Kozai 1959, e → 0; ~2 km here), so that every
            # satellite has the same mean period whatever its starting argument of latitude
            a = a + 1.5 * J2_GLO * AE_GLO ** 2 / a * math.sin(inc) ** 2 * math.cos(2 * u)
            y0.append(_kepler_to_inertial(a, e, inc, raan, argp, u - argp, GM_GLO))
            self.a0[f"R{n:02d}"] = rng.uniform(-3e-4, 3e-4)
            self.gamma[f"R{n:02d}"] = float(np.round(rng.normal(0, 1e-12) / 2 ** -40) * 2 ** -40)
        self._n = len(slots)
        sol = solve_ivp(_j2_rhs, (0.0, span_s), np.concatenate(y0), method="DOP853", rtol=1e-12, atol=1e-6,
                        dense_output=True)
        if not sol.success:  # pragma: no cover - a failure of the integrator is a bug here
            raise RuntimeError(f"GLONASS truth integration failed: {sol.message}")
        self._sol = sol.sol
        self._span_s = span_s
        self._index = {s: i for i, s in enumerate(self.sats)}
        self._sats_arr = np.array(self.sats)
        # broadcast records: the true state at t_b
        recs = []
        T = np.repeat(tb_gps, self._n)
        S = np.tile(self._sats_arr, tb_gps.size)
        pos, vel = self._ecef(S, T, 0.0)
        for r, (sat, tg, tu) in enumerate(zip(S, T, np.repeat(tb_utc, self._n))):
            week, sow_ns = ts.week_sow_ns(np.int64(tu - GLO_FRAME_LEAD_S * NS))
            recs.append(dict(sat=str(sat), toc_ns=int(tu), toc_gps_ns=int(tg),
                             minus_tau_n_s=self.a0[sat] + self.gamma[sat] * (int(tg) - self.t0) / 1e9,
                             gamma_n=self.gamma[sat], tk_s=float(int(sow_ns) // NS),
                             x_m=pos[r, 0], y_m=pos[r, 1], z_m=pos[r, 2],
                             vx_mps=vel[r, 0], vy_mps=vel[r, 1], vz_mps=vel[r, 2],
                             ax_mps2=0.0, ay_mps2=0.0, az_mps2=0.0, health=0.0,
                             freq_num=float(self.channels[sat]), age_days=0.0))
        self.records = recs
        # clock truth from the records as read back
        self.tb_gps = tb_gps
        self._tau = np.array([[nav_field(rc["minus_tau_n_s"]) for rc in recs[i::self._n]] for i in range(self._n)])
        self._gam = np.array([nav_field(self.gamma[s]) for s in self.sats])

    def _ecef(self, sats, t_ns, dt_s):
        i = self._index_of(sats)
        t = (np.asarray(t_ns, dtype=np.int64) - self.t0) / 1e9 + dt_s
        if t.size and (t.min() < 0 or t.max() > self._span_s):
            raise ValueError("instant outside the span of the GLONASS truth integration")
        y = self._sol(t)   # (6 n_sat, N)
        cols = np.arange(y.shape[1])
        r_i = np.stack([y[6 * i + c, cols] for c in range(3)], axis=-1)
        v_i = np.stack([y[6 * i + 3 + c, cols] for c in range(3)], axis=-1)
        th = OMEGA_GLO * t
        c, s = np.cos(th), np.sin(th)
        r = np.stack([c * r_i[:, 0] + s * r_i[:, 1], -s * r_i[:, 0] + c * r_i[:, 1], r_i[:, 2]], axis=-1)
        v = np.stack([c * v_i[:, 0] + s * v_i[:, 1], -s * v_i[:, 0] + c * v_i[:, 1], v_i[:, 2]], axis=-1)
        v = v + OMEGA_GLO * np.stack([r[:, 1], -r[:, 0], np.zeros(len(t))], axis=-1)   # − ω × r
        return r, v

    def _index_of(self, sats):
        sats = np.asarray(sats).astype(str)
        i = np.searchsorted(self._sats_arr, sats)
        bad = (i >= len(self.sats)) | (self._sats_arr[np.minimum(i, len(self.sats) - 1)] != sats)
        if np.any(bad):
            raise KeyError(f"no GLONASS truth for {sorted(set(sats[bad].tolist()))[:5]}")
        return i

    def states(self, sats, t_ns, dt_s=0.0):
        sats = np.asarray(sats).astype(str)
        t_ns = np.broadcast_to(np.asarray(t_ns, dtype=np.int64), sats.shape)
        dt_s = np.broadcast_to(np.asarray(dt_s, dtype=float), sats.shape)
        i = self._index_of(sats)
        pos, vel = self._ecef(sats, t_ns, dt_s)
        j = np.clip(np.rint((t_ns - self.tb_gps[0]) / (GLO_RECORD_SPACING_S * NS)).astype(np.int64), 0,
                    self.tb_gps.size - 1)
        dt_b = (t_ns - self.tb_gps[j]) / 1e9 + dt_s
        clock = self._tau[i, j] + self._gam[i] * dt_b
        rel = -2.0 * np.einsum("ij,ij->i", pos, vel) / C_MPS ** 2
        nan = np.full(sats.shape, np.nan)
        return _States(pos_m=pos, clock_s=clock, relativity_s=rel, tgd_s=nan, bgd_e5a_s=nan, bgd_e5b_s=nan,
                       status=np.zeros(sats.shape, dtype=int))


def _kepler_to_inertial(a, e, inc, raan, argp, nu, gm):
    """Position and velocity (m, m/s) of Keplerian elements, true anomaly ``nu`` (two-body formulas)."""
    p = a * (1 - e * e)
    r = p / (1 + e * math.cos(nu))
    rp = np.array([r * math.cos(nu), r * math.sin(nu), 0.0])
    vp = math.sqrt(gm / p) * np.array([-math.sin(nu), e + math.cos(nu), 0.0])
    cO, sO, ci, si, cw, sw = (math.cos(raan), math.sin(raan), math.cos(inc), math.sin(inc),
                              math.cos(argp), math.sin(argp))
    rot = np.array([[cO * cw - sO * sw * ci, -cO * sw - sO * cw * ci, sO * si],
                    [sO * cw + cO * sw * ci, -sO * sw + cO * cw * ci, -cO * si],
                    [sw * si, cw * si, ci]])
    return np.concatenate([rot @ rp, rot @ vp])


def _j2_rhs(_t, y):
    """Inertial-frame derivative of stacked (r, v) states: central term plus J2 (PZ-90 constants)."""
    s = y.reshape(-1, 6)
    r, v = s[:, :3], s[:, 3:]
    x, yy, z = r[:, 0], r[:, 1], r[:, 2]
    r2 = x * x + yy * yy + z * z
    rn = np.sqrt(r2)
    f = -GM_GLO / (r2 * rn)
    k = -1.5 * J2_GLO * GM_GLO * AE_GLO ** 2 / (r2 * r2 * rn)
    q = 5.0 * z * z / r2
    acc = np.stack([f * x + k * x * (1 - q), f * yy + k * yy * (1 - q), f * z + k * z * (3 - q)], axis=-1)
    return np.concatenate([v, acc], axis=1).ravel()


class _ModelBySystem:
    """One ``states`` over several truth models (rows split by system letter, put back in order)."""

    def __init__(self, models: dict):
        self.models = models
        self.sats = sorted(s for m in models.values() for s in m.sats)

    def states(self, sats, t_ns, dt_s=0.0):
        sats = np.asarray(sats).astype(str)
        t_ns = np.broadcast_to(np.asarray(t_ns, dtype=np.int64), sats.shape)
        dt_s = np.broadcast_to(np.asarray(dt_s, dtype=float), sats.shape)
        letters = np.array([s[:1] for s in sats]) if sats.size else np.zeros(0, dtype="U1")
        out = None
        for key, model in self.models.items():
            rows = np.isin(letters, list(key))
            if not rows.any():
                continue
            st = model.states(sats[rows], t_ns[rows], dt_s[rows])
            if out is None:
                out = _States(pos_m=np.full(sats.shape + (3,), np.nan),
                              **{f.name: np.full(sats.shape, np.nan) for f in dataclasses.fields(_States)
                                 if f.name not in ("pos_m", "status")},
                              status=np.zeros(sats.shape, dtype=int))
            for f in dataclasses.fields(_States):
                getattr(out, f.name)[rows] = getattr(st, f.name)
        return out


class _OrbitError:
    """Truth satellite model: a broadcast model plus a per-satellite orbit error (module docstring).

    Error per satellite and ECEF axis: ``a + b·sin(2π (t − t0)/P + φ)`` with P half a
    sidereal day; a and b have rms ``rms_m/√2`` and ``rms_m`` so the total rms is ``rms_m``.
    """

    def __init__(self, model, sats, rms_m, t0_ns, rng):
        self.model = model
        self.sats = np.array(sorted(sats))
        n = len(self.sats)
        self.a = rng.standard_normal((n, 3)) * rms_m / math.sqrt(2.0)
        self.b = rng.standard_normal((n, 3)) * rms_m
        self.phi = rng.uniform(0, 2 * math.pi, (n, 3))
        self.t0 = t0_ns

    def states(self, sats, t_ns, dt_s=0.0):
        st = self.model.states(sats, t_ns, dt_s)
        i = np.searchsorted(self.sats, np.asarray(sats).astype(str))
        t = ((np.asarray(t_ns, dtype=np.int64) - self.t0) / 1e9 + dt_s)[..., None]
        err = self.a[i] + self.b[i] * np.sin(2 * math.pi * t / (SIDEREAL_DAY_S / 2) + self.phi[i])
        st.pos_m = st.pos_m + err
        return st


def light_time(model, sats, t_r_ns, t_r_dt_s, rx_m, *, earth_rotation: bool = True, tol_s: float = 1e-15):
    """Exact geometric light time τ (s) and the satellite position in the receive-time Earth frame.

    Solves ``c·τ = |R3(ωe·τ)·r_sat(t_r − τ) − r_rx|`` by fixed-point iteration
    (module docstring). ``sats`` (N,), ``t_r_ns`` int64 (N,), ``t_r_dt_s``
    (N,), ``rx_m`` (N, 3). Returns ``(tau_s, sat_rot_m, states_at_transmit)``.
    """
    we = OMEGA_E if earth_rotation else 0.0
    tau = np.full(np.shape(t_r_ns), 0.075)
    for _ in range(12):
        st = model.states(sats, t_r_ns, t_r_dt_s - tau)
        th = we * tau
        c, s = np.cos(th), np.sin(th)
        p = st.pos_m
        rot = np.stack([c * p[..., 0] + s * p[..., 1], -s * p[..., 0] + c * p[..., 1], p[..., 2]], axis=-1)
        new = np.linalg.norm(rot - rx_m, axis=-1) / C_MPS
        done = np.nanmax(np.abs(new - tau)) < tol_s if new.size else True
        tau = new
        if done:
            break
    st = model.states(sats, t_r_ns, t_r_dt_s - tau)
    th = we * tau
    c, s = np.cos(th), np.sin(th)
    p = st.pos_m
    rot = np.stack([c * p[..., 0] + s * p[..., 1], -s * p[..., 0] + c * p[..., 1], p[..., 2]], axis=-1)
    return tau, rot, st


# ==================================================================== simulation

@dataclasses.dataclass
class StationResult:
    spec: StationSpec
    time_ns: np.ndarray          # time tags (GPS), all epochs
    sats: list
    obs: dict                    # code -> (n_epoch, n_sat), NaN absent
    lli: dict
    ssi: dict
    clock_s: np.ndarray          # true local clock - GPS (s), all epochs
    apparent_s: np.ndarray       # clock + undocumented hardware changes (s)
    tau_s: np.ndarray            # geometric light time (n_epoch, n_sat)
    sat_clock_s: np.ndarray      # true satellite clock - GPS at transmission, with relativity (n_epoch, n_sat)
    rx_m: np.ndarray             # antenna position with the tide, ECEF (n_epoch, 3)
    elevation_rad: np.ndarray
    azimuth_rad: np.ndarray
    epoch_kept: np.ndarray       # bool per epoch (gaps/outages removed)
    epoch_flag: np.ndarray       # RINEX epoch flag per epoch: 1 (power failure) after a receiver reset
    met: dict                    # met truth at the met epochs
    noise_levels: list
    parts: dict                  # per-code itemised terms (m) for checks
    windup_cycles: np.ndarray | None = None   # phase wind-up added to every band (n_epoch, n_sat)
    events: list = dataclasses.field(default_factory=list)   # carrier-phase events (truth_events.csv rows)
    glonass_bias_ns: dict = dataclasses.field(default_factory=dict)   # code -> {channel k: receiver bias, ns}
    glonass_channels: dict = dataclasses.field(default_factory=dict)  # GLONASS sat -> channel k


@dataclasses.dataclass
class SimulationResult:
    scenario: Scenario
    stations: dict
    nav_records: list
    iono_alpha: np.ndarray
    iono_beta: np.ndarray
    truth: pd.DataFrame
    steps: pd.DataFrame
    files: dict
    model: object = None         # the true satellite model (orbits + clocks), for the product files
    sat_clock_error_s: np.ndarray | None = None   # true minus broadcast satellite clock at the epochs


def _met_truth(spec: StationSpec, lon_rad, time_gps_ns):
    utc = ts.convert(time_gps_ns, "GPS", "UTC")
    hours = (utc % ts.NS_PER_DAY) / 3.6e12 + math.degrees(lon_rad) / 15.0
    ph = 2 * math.pi * (hours - 15.0) / 24.0
    m = spec.met
    p = m["pressure_hpa"] + m["pressure_amplitude_hpa"] * np.cos(2 * math.pi * (hours - 10.0) / 12.0)
    t = m["temperature_c"] + m["temperature_amplitude_c"] * np.cos(ph)
    rh = np.clip(m["humidity_pct"] - m["humidity_amplitude_pct"] * np.cos(ph), 1.0, 100.0)
    return p, t, rh


def _hardware_ns(spec: StationSpec, code: str, time_utc_ns, documented_only=False):
    """Station hardware delay receiver + cable − reference (ns) at each instant, with changes."""
    t = np.asarray(time_utc_ns)
    hw = np.full(t.shape, spec.receiver_ns[code] + spec.cable_ns - spec.reference_ns)
    for ch in spec.delay_changes:
        if documented_only and not ch.in_delays:
            continue
        d = ch.receiver_ns.get(code, 0.0) + ch.cable_ns - ch.reference_ns
        hw = hw + np.where(t >= ch.time_utc_ns, d, 0.0)
    return hw


def glonass_random_stream(random_state: int) -> np.random.Generator:
    """The GLONASS generator of a scenario: a child of ``random_state`` of its own (spawn key 82,
    'R'), so adding GLONASS changes no draw of the GPS and Galileo streams."""
    return np.random.default_rng(np.random.SeedSequence(random_state, spawn_key=(82,)))


def _satellite_model(scn: Scenario, rng, rng_glo=None):
    """(model, sats, records or None, alpha, beta, nav path or None, GLONASS channels {sat: k})."""
    if scn.satellites["source"] == "synthetic":
        t = scn.time_ns
        kepler = [s for s in scn.systems if s != "R"]
        recs = synthetic_constellation(int(t[0]), int(t[-1]), kepler, rng,
                                       gps_count=scn.satellites["gps_count"],
                                       galileo_count=scn.satellites["galileo_count"]) if kepler else []
        models = {"GE": KeplerEphemerides(recs)} if recs else {}
        channels = {}
        if "R" in scn.systems:
            glo = GlonassTruth(int(t[0]), int(t[-1]), rng_glo if rng_glo is not None else
                               glonass_random_stream(scn.random_state), scn.satellites["glonass_count"])
            models["R"] = glo
            recs = recs + glo.records
            channels = dict(glo.channels)
        model = models["GE"] if list(models) == ["GE"] else _ModelBySystem(models)
        from .formats.rinex_writers import nav_field

        alpha = nav_field(np.array(scn.satellites["klobuchar_alpha"]))
        beta = nav_field(np.array(scn.satellites["klobuchar_beta"]))
        alpha = np.array([float(f"{v:.4E}") for v in alpha])  # the header's D12.4 fields
        beta = np.array([float(f"{v:.4E}") for v in beta])
        return model, list(model.sats), recs, alpha, beta, None, channels
    from .orbits import BroadcastOrbits
    from .formats.rinex_nav import read_nav

    nav_path = scn.satellites["nav_file"]
    if not nav_path.is_file():
        raise MissingInputError(f"{nav_path}: navigation file not found (scenario satellites.nav_file)")
    nav = read_nav(nav_path)
    model = BroadcastOrbits(nav)
    sats = sorted({str(s) for sysl in scn.systems if sysl in nav.records for s in nav.records[sysl]["sat"]})
    if not sats:
        raise MissingInputError(f"{nav_path}: no ephemerides of the systems {scn.systems}")
    iono = nav.header.iono
    alpha = np.asarray(iono.get("GPSA", [0.0] * 4), dtype=float)
    beta = np.asarray(iono.get("GPSB", [0.0] * 4), dtype=float)
    rec_r = nav.records.get("R")
    channels = ({} if rec_r is None or not len(rec_r) else
                {str(k): int(v) for k, v in rec_r.groupby("sat")["freq_num"].agg(lambda v: v.mode().iloc[0]).items()})
    return model, sats, None, alpha, beta, nav_path, channels


def _glonass_code_biases(spec: StationSpec, rng: np.random.Generator) -> dict:
    """{code: {k: ns}} for k = −7..6: the station's GLONASS receiver code biases (``_glonass_station``)."""
    g = spec.glonass
    if not g:
        return {}
    out = {}
    for code in spec.signals.get("R", ()):
        draws = rng.standard_normal(14) * g["random_ns"] if g["random_ns"] > 0 else np.zeros(14)
        out[code] = {k: g["isb_ns"] + g["slope"].get(code, 0.0) * k + g["extra"].get(code, {}).get(k, 0.0)
                     + float(draws[k + 7]) for k in range(-7, 7)}
    return out


def _gps_sow_s(t_ns):
    _, sow = ts.week_sow_ns(t_ns)
    return sow / 1e9


def simulate(scn: Scenario) -> SimulationResult:
    """Run the forward model for every station (no files written)."""
    from .atmosphere import klobuchar_delay_s, niell_mapping, zenith_delays
    from .geodesy import antenna_reference_point, azimuth_elevation, ecef_to_geodetic, solid_tide_displacement

    rng = np.random.default_rng(scn.random_state)
    rng_sats, rng_clocks, rng_obs = (np.random.default_rng(s) for s in rng.integers(0, 2 ** 63, 3))
    rng_glo = glonass_random_stream(scn.random_state)
    model, sats, recs, alpha, beta, _, channels = _satellite_model(scn, rng_sats, rng_glo)
    sats = sorted((s for s in sats if s[0] in scn.systems), key=lambda s: (SYSTEMS.index(s[0]), s))
    t_tag = scn.time_ns
    n_ep, n_sat = t_tag.size, len(sats)
    tau0 = scn.interval_s
    prop = scn.propagation
    sat_clock_err = np.zeros((n_ep, n_sat))
    if scn.satellites["clock_error_ns"] > 0:
        # true minus broadcast satellite clock: a random walk scaled to the given rms over the span
        walk = np.cumsum(rng_sats.standard_normal((n_ep, n_sat)), axis=0)
        walk -= walk.mean(axis=0)
        walk /= max(np.sqrt(np.mean(walk ** 2)), 1e-30)
        sat_clock_err = walk * scn.satellites["clock_error_ns"] * 1e-9
    sat_arr = np.array(sats)
    if scn.satellites["orbit_error_m"] > 0:
        model = _OrbitError(model, sats, scn.satellites["orbit_error_m"], int(t_tag[0]), rng_sats)
    results = {}
    for spec in scn.stations:
        srng = np.random.default_rng(rng_clocks.integers(0, 2 ** 63))
        orng = np.random.default_rng(rng_obs.integers(0, 2 ** 63))
        x, levels = clock_series(spec.clock, t_tag, tau0, srng)
        jump_s, jump_events = ms_jumps(x, ts.convert(t_tag, "GPS", "UTC"), spec.clock)
        x = x + jump_s
        # true receive instant t_r = t_tag - x (int ns + float s)
        t_r_dt = -x
        arp = antenna_reference_point(spec.marker_m, *spec.antenna_delta_hen_m)
        lat, lon, hgt = (float(v) for v in ecef_to_geodetic(arp))
        rx = np.broadcast_to(arp, (n_ep, 3)).copy()
        if prop["solid_tide"]:
            rx = rx + solid_tide_displacement(spec.marker_m, t_tag, time_scale="GPS")
        T = np.repeat(t_tag, n_sat)
        DT = np.repeat(t_r_dt, n_sat)
        S = np.tile(sat_arr, n_ep)
        RX = np.repeat(rx, n_sat, axis=0)
        tau, sat_rot, st = light_time(model, S, T, DT, RX, earth_rotation=prop["earth_rotation"])
        ok = st.status == 0
        tau = tau.reshape(n_ep, n_sat)
        sat_rot = sat_rot.reshape(n_ep, n_sat, 3)
        az, el, _ = azimuth_elevation(rx[:, None, :], sat_rot)
        dts = (st.clock_s + st.relativity_s).reshape(n_ep, n_sat) + sat_clock_err
        ok = ok.reshape(n_ep, n_sat) & np.isfinite(tau) & np.isfinite(dts)
        # troposphere truth
        met_p, met_t, met_rh = _met_truth(spec, lon, t_tag)
        if prop["troposphere"]:
            zhd, zwd = zenith_delays(met_p, met_t, met_rh, lat, hgt)
            rw = prop["wet_random_walk_mm_per_sqrt_h"]
            if rw > 0:
                steps_rw = orng.standard_normal(n_ep) * rw * 1e-3 * math.sqrt(tau0 / 3600.0)
                steps_rw[0] = 0.0
                zwd = np.maximum(zwd + np.cumsum(steps_rw), 0.0)
            doy = ts.day_of_year(t_tag) + (t_tag % ts.NS_PER_DAY) / ts.NS_PER_DAY
            el_safe = np.where(el > math.radians(1.0), el, math.radians(1.0))
            mh, mw = niell_mapping(el_safe, lat, hgt, doy[:, None])
            trop = zhd[:, None] * mh + zwd[:, None] * mw
        else:
            trop = np.zeros((n_ep, n_sat))
        if prop["ionosphere"]:
            sow = _gps_sow_s(t_tag)[:, None]
            iono_l1 = prop["iono_scale"] * C_MPS * klobuchar_delay_s(alpha, beta, lat, lon, az,
                                                                     np.maximum(el, 0.0), sow)
        else:
            iono_l1 = np.zeros((n_ep, n_sat))
        # visibility, gaps, resets
        visible = ok & (el >= math.radians(spec.elevation_mask_deg))
        t_utc = ts.convert(t_tag, "GPS", "UTC")
        kept = np.ones(n_ep, dtype=bool)
        for a, b in spec.gaps:
            kept &= ~((t_utc >= a) & (t_utc < b))
        reset_flag = np.zeros(n_ep, dtype=bool)
        for tr, outage in spec.resets:
            kept &= ~((t_utc >= tr) & (t_utc < tr + int(outage * NS)))
            after = np.flatnonzero(t_utc >= tr + int(outage * NS))
            if after.size:
                reset_flag[after[0]] = True
        tracked = visible & kept[:, None]
        # arcs: new arc where tracking starts, after a reset, or at a cycle slip
        prev = np.vstack([np.zeros((1, n_sat), bool), tracked[:-1]])
        start_arc = tracked & (~prev | reset_flag[:, None])
        if spec.cycle_slips_per_h > 0:
            p_slip = spec.cycle_slips_per_h * tau0 / 3600.0
            start_arc |= tracked & (orng.random((n_ep, n_sat)) < p_slip)
        arc_id = np.cumsum(start_arc, axis=0)
        sin_el = np.sin(np.clip(el, math.radians(1.0), None))
        sys_of = np.array([s[0] for s in sats])
        obs, lli, ssi, parts = {}, {}, {}, {}
        mp = spec.multipath
        base_range = C_MPS * (tau + x[:, None] - dts)
        if prop["shapiro"]:
            r_s = np.linalg.norm(sat_rot, axis=-1)
            r_r = np.linalg.norm(rx, axis=-1)[:, None]
            rho = C_MPS * tau
            base_range = base_range + 2.0 * GM_EARTH / C_MPS ** 2 * np.log((r_s + r_r + rho) / (r_s + r_r - rho))
        windup = None
        if prop["phase_windup"]:
            from .geodesy import sun_moon_ecef

            sun = sun_moon_ecef(t_tag, time_scale="GPS")[0]
            wu = phase_windup_cycles(sat_rot, rx[:, None, :], sun[:, None, :])
            windup = np.unwrap(wu * 2 * math.pi, axis=0) / (2 * math.pi)
            windup = windup - np.round(windup[:1])
        slips = _configured_slips(spec, t_utc, tracked, start_arc, el, sats, scn.path)
        events = [(int(k), "receiver_reset", "", "", np.nan, np.nan, True, "configured")
                  for k in np.flatnonzero(reset_flag)]
        events += [(k, "clock_jump", "", "", np.nan, float(ms), False, src) for k, ms, src in jump_events]
        random_slip = start_arc & prev & ~reset_flag[:, None]
        glo_bias = _glonass_code_biases(spec, rng_glo) if "R" in spec.signals else {}
        k_col = np.array([channels.get(s, 0) if s[0] == "R" else 0 for s in sats], dtype=float)
        for s_letter in scn.systems:
            cols = sys_of == s_letter
            for code in spec.signals.get(s_letter, ()):
                band = code[1]
                # GLONASS FDMA: one frequency per column (channel k of the satellite)
                f = glonass_frequency_hz(band, k_col) if s_letter == "R" else F_HZ[(s_letter, band)]
                lam = C_MPS / f
                k_iono = (F_L1 / f) ** 2
                hw_m = C_MPS * 1e-9 * _hardware_ns(spec, code, t_utc)[:, None]
                # receiver code biases of GLONASS (inter-system + per channel): code only, a constant
                # carrier-phase bias would go into the ambiguity
                cb_m = 0.0
                if s_letter == "R" and code in glo_bias:
                    cb_m = C_MPS * 1e-9 * np.array([glo_bias[code].get(int(k), 0.0) for k in k_col])[None, :]
                if s_letter == "G":
                    g = {"1": 1.0, "2": (F_L1 / F_HZ[("G", "2")]) ** 2, "5": (F_L1 / F_HZ[("G", "5")]) ** 2}[band]
                    gd = g * st.tgd_s.reshape(n_ep, n_sat)
                elif s_letter == "R":
                    gd = np.zeros((n_ep, n_sat))   # τ_n refers to G1; no G2 − G1 delay simulated
                else:
                    if band == "1":
                        gd = st.bgd_e5b_s.reshape(n_ep, n_sat)
                    elif band == "5":
                        gd = k_iono * st.bgd_e5a_s.reshape(n_ep, n_sat)
                    else:
                        gd = k_iono * st.bgd_e5b_s.reshape(n_ep, n_sat)
                gd_m = C_MPS * np.nan_to_num(gd)
                if mp is not None:
                    ph0 = {"1": 0.3, "2": 1.7, "5": 2.9, "7": 4.1}[band] + (0.0 if s_letter == "G" else 0.8)
                    # two reflections' interference terms: fast in elevation like a reflector a few
                    # wavelengths away, slower in azimuth; a function of (az, el) only, so it repeats
                    # with the constellation's geometry (a sidereal day for GPS)
                    mpm = (mp["amplitude_m"] * np.exp(-(np.degrees(el) - spec.elevation_mask_deg) / mp["decay_deg"])
                           * (0.8 * np.sin(2.0 * az + 30.0 * el + ph0) + 0.6 * np.sin(5.0 * az - 45.0 * el + 2 * ph0)))
                else:
                    mpm = np.zeros((n_ep, n_sat))
                code_noise = orng.standard_normal((n_ep, n_sat)) * spec.code_noise_m / sin_el
                phase_noise = orng.standard_normal((n_ep, n_sat)) * spec.phase_noise_m / sin_el
                P = base_range + trop + k_iono * iono_l1 + hw_m + cb_m + gd_m + mpm + code_noise
                amb = orng.integers(-200, 200, size=(int(arc_id.max()) + 2, n_sat))
                N = np.take_along_axis(amb, arc_id, axis=0)
                lname = "L" + code[1:]
                for k, j in zip(*np.nonzero(random_slip & cols[None, :])):
                    events.append((int(k), "cycle_slip", sats[j], lname, float(N[k, j] - N[k - 1, j]), np.nan,
                                   True, "random"))
                slip_lli = np.zeros((n_ep, n_sat), dtype=bool)
                for k, j, sl in slips:
                    if sats[j][0] == s_letter and band in sl.cycles:
                        N[k:, j] += sl.cycles[band]
                        slip_lli[k, j] = sl.lli
                        events.append((k, "cycle_slip", sats[j], lname, float(sl.cycles[band]), np.nan, sl.lli,
                                       "configured"))
                L = (base_range + trop - k_iono * iono_l1 + hw_m + mpm / 100.0 + phase_noise) / lam + N
                if windup is not None:
                    L = L + windup
                cn0 = {"1": 0.0, "2": -6.0, "5": 3.0, "7": 2.0}[band] + 32.0 + 18.0 * np.sin(np.clip(el, 0, None))
                Sv = np.round((cn0 + 0.5 * orng.standard_normal((n_ep, n_sat))) * 4) / 4
                m = tracked & cols[None, :]
                sig = np.clip(np.floor(np.nan_to_num(Sv) / 6.0), 1, 9).astype(np.int8)
                for kind, val in (("C", P), ("L", L), ("S", Sv)):
                    # codes shared by GPS and Galileo (C1C, C5Q...) fill their own columns of one array
                    name = kind + code[1:]
                    if name not in obs:
                        obs[name] = np.full((n_ep, n_sat), np.nan)
                        ssi[name] = np.zeros((n_ep, n_sat), np.int8)
                        lli[name] = np.zeros((n_ep, n_sat), np.int8)
                    obs[name] = np.where(m, np.round(val, 3), obs[name])
                    if kind != "S":
                        ssi[name] = np.where(m, sig, ssi[name]).astype(np.int8)
                    if kind == "L":
                        lli[name] = np.where(m & (start_arc | slip_lli), 1, lli[name]).astype(np.int8)
                parts[(s_letter, code)] = dict(trop=trop, iono=k_iono * iono_l1, hw=hw_m, gd=gd_m, mp=mpm,
                                               code_bias=cb_m)
        first_code = next(iter(spec.signals.get("G", spec.signals.get("E", ("C1C",)))))
        undocumented = (_hardware_ns(spec, first_code, t_utc) - _hardware_ns(spec, first_code, t_utc, True)) * 1e-9
        results[spec.id] = StationResult(
            spec=spec, time_ns=t_tag, sats=sats, obs=obs, lli=lli, ssi=ssi, clock_s=x,
            apparent_s=x + undocumented, tau_s=tau, sat_clock_s=dts, rx_m=rx, elevation_rad=el, azimuth_rad=az,
            epoch_kept=kept, epoch_flag=reset_flag.astype(int),
            met=dict(p=met_p, t=met_t, rh=met_rh), noise_levels=levels, parts=parts,
            windup_cycles=windup, events=sorted(events, key=lambda e: (e[0], e[1], e[2], e[3])),
            glonass_bias_ns=glo_bias, glonass_channels=dict(channels))
    truth, steps = _truth_tables(scn, results)
    return SimulationResult(scenario=scn, stations=results, nav_records=recs or [], iono_alpha=alpha,
                            iono_beta=beta, truth=truth, steps=steps, files={}, model=model,
                            sat_clock_error_s=sat_clock_err)


EVENT_COLUMNS = ["time_utc", "time_gps", "time_gps_ns", "station", "kind", "sat", "obs", "cycles", "jump_ms",
                 "lli", "source"]


def events_table(res: "SimulationResult") -> pd.DataFrame:
    """The carrier-phase events of every station (``truth_events.csv``; module docstring)."""
    rows = []
    t = res.scenario.time_ns
    for sid, r in res.stations.items():
        for k, kind, sat, obs_name, cycles, jump_ms, lli_set, src in r.events:
            tg = int(t[k])
            rows.append(dict(time_utc=ts.to_iso(ts.convert(np.int64(tg), "GPS", "UTC"), 0, "Z"),
                             time_gps=ts.to_iso(np.int64(tg), 0, ""), time_gps_ns=tg, station=sid, kind=kind,
                             sat=sat, obs=obs_name, cycles=cycles, jump_ms=jump_ms, lli=bool(lli_set), source=src))
    return pd.DataFrame(rows, columns=EVENT_COLUMNS)


def glonass_bias_table(res: "SimulationResult") -> pd.DataFrame:
    """``truth_glonass_biases.csv``: each station's GLONASS receiver code bias per code and
    channel (ns, on top of the station file's delays), and for a station with two GLONASS codes on
    G1 and G2 their iono-free combination ``(f1²·b1 − f2²·b2)/(f1² − f2²)``: with
    f1/f2 = 9/7 on every channel (GLONASS ICD §3.3.1.4) the coefficients are 81/32 and −49/32."""
    rows = []
    for sid, r in res.stations.items():
        codes = list(r.glonass_bias_ns)
        for code in codes:
            for k, v in r.glonass_bias_ns[code].items():
                rows.append(dict(station=sid, code=code, channel=k, bias_ns=v))
        c1 = [c for c in codes if c[1] == "1"]
        c2 = [c for c in codes if c[1] == "2"]
        if c1 and c2:
            for k in range(-7, 7):
                f1, f2 = glonass_frequency_hz("1", k), glonass_frequency_hz("2", k)
                b = (f1 ** 2 * r.glonass_bias_ns[c1[0]][k] - f2 ** 2 * r.glonass_bias_ns[c2[0]][k]) / (f1 ** 2 - f2 ** 2)
                rows.append(dict(station=sid, code=f"{c1[0]}+{c2[0]}", channel=k, bias_ns=float(b)))
    return pd.DataFrame(rows, columns=["station", "code", "channel", "bias_ns"])


def _truth_tables(scn: Scenario, results: dict):
    t = scn.time_ns
    utc = ts.convert(t, "GPS", "UTC")
    mjd, sod = ts.to_mjd(utc)
    cols = {"time_utc": ts.to_iso(utc, 0, "Z"), "mjd_utc": np.round(mjd + sod / 86400.0, 8),
            "time_gps": ts.to_iso(t, 0, "")}
    for sid, r in results.items():
        cols[f"{sid}_ns"] = r.clock_s * 1e9
    for a, b in scn.pairs:
        cols[f"{a}-{b}_ns"] = (results[a].clock_s - results[b].clock_s) * 1e9
    for sid, r in results.items():
        cols[f"{sid}_apparent_ns"] = r.apparent_s * 1e9
    for a, b in scn.pairs:
        cols[f"{a}-{b}_apparent_ns"] = (results[a].apparent_s - results[b].apparent_s) * 1e9
    truth = pd.DataFrame(cols)
    rows = []
    for spec in scn.stations:
        for stp in spec.clock.steps:
            if stp.phase_ns:
                rows.append(dict(time_utc=ts.to_iso(stp.time_utc_ns, 0, "Z"), station=spec.id, kind="clock_phase",
                                 phase_ns=stp.phase_ns, frequency=0.0, apparent_step_ns=stp.phase_ns,
                                 in_delays=False, what=stp.what or "clock phase step"))
            if stp.frequency:
                rows.append(dict(time_utc=ts.to_iso(stp.time_utc_ns, 0, "Z"), station=spec.id,
                                 kind="clock_frequency", phase_ns=0.0, frequency=stp.frequency, apparent_step_ns=0.0,
                                 in_delays=False, what=stp.what or "clock frequency step"))
        first_code = next(iter(spec.signals.get("G", spec.signals.get("E", ("C1C",)))))
        for ch in spec.delay_changes:
            d = ch.receiver_ns.get(first_code, 0.0) + ch.cable_ns - ch.reference_ns
            rows.append(dict(time_utc=ts.to_iso(ch.time_utc_ns, 0, "Z"), station=spec.id, kind="delay",
                             phase_ns=d, frequency=0.0, apparent_step_ns=0.0 if ch.in_delays else d,
                             in_delays=ch.in_delays, what=ch.what))
    steps = pd.DataFrame(rows, columns=["time_utc", "station", "kind", "phase_ns", "frequency", "apparent_step_ns",
                                        "in_delays", "what"])
    return truth, steps


# ==================================================================== files

def _period_code(duration_s: float) -> str:
    if duration_s % 86400 == 0:
        return f"{int(duration_s // 86400):02d}D"
    if duration_s % 3600 == 0:
        return f"{int(duration_s // 3600):02d}H"
    return f"{int(round(duration_s / 60)):02d}M"


def obs_file_name(sid: str, start_gps_ns: int, duration_s: float, interval_s: float, gz: bool,
                  crx: bool = False) -> str:
    """RINEX 3 long name ``LABA00XXX_R_YYYYDDDHHMM_01D_30S_MO.rnx`` (country code XXX: user-assigned);
    ``.crx`` for Hatanaka compact RINEX, ``.gz`` appended when gzipped."""
    y, _, _, h, mi, _, _ = (int(v) for v in ts.ns_to_civil(np.int64(start_gps_ns)))
    doy = int(ts.day_of_year(np.int64(start_gps_ns)))
    name = (f"{sid[:4].upper()}00XXX_R_{y:04d}{doy:03d}{h:02d}{mi:02d}_{_period_code(duration_s)}_"
            f"{int(round(interval_s)):02d}S_MO." + ("crx" if crx else "rnx"))
    return name + (".gz" if gz else "")


def nav_file_name(start_gps_ns: int, duration_s: float, gz: bool) -> str:
    y, _, _, h, mi, _, _ = (int(v) for v in ts.ns_to_civil(np.int64(start_gps_ns)))
    doy = int(ts.day_of_year(np.int64(start_gps_ns)))
    return f"BRDC00XXX_R_{y:04d}{doy:03d}{h:02d}{mi:02d}_{_period_code(duration_s)}_MN.rnx" + (".gz" if gz else "")


def met_file_name(sid: str, start_gps_ns: int) -> str:
    y = int(ts.ns_to_civil(np.int64(start_gps_ns))[0])
    doy = int(ts.day_of_year(np.int64(start_gps_ns)))
    return f"{sid[:4].lower()}{doy:03d}0.{y % 100:02d}m"


def product_file_name(start_gps_ns: int, ext: str) -> str:
    """``SIMU{gpsweek}{gpsdow}.{ext}``: the simulated precise products of a GPS day."""
    week, sow = ts.gps_week_sow(np.int64(start_gps_ns))
    return f"SIMU{int(week):04d}{int(sow // 86400)}.{ext}"


def true_products(res: SimulationResult, time_ns: np.ndarray):
    """True satellite positions (m, ECEF) and product clocks (s) at GPS instants ``time_ns``.

    Product clock = true satellite clock (polynomial + periodic relativistic
    term + true-minus-broadcast error) + 2 r·v/c², i.e. without the periodic
    term in the IGS convention (−2 r·v/c², IERS Conventions 2010 §10.2 as
    recalled, from memory), r·v from the true orbit (velocity by a central
    difference over ±0.5 s: its error, ~(h²/6)·|jerk| ≈ 1e-7 m/s, is
    negligible). The clock error of the data epochs is linearly interpolated
    (held constant outside them).
    Returns ``(sats, pos_m (n, n_sat, 3), clock_s (n, n_sat))``.
    """
    scn = res.scenario
    sats = next(iter(res.stations.values())).sats
    t = np.asarray(time_ns, dtype=np.int64)
    T = np.repeat(t, len(sats))
    S = np.tile(np.array(sats), t.size)
    st = res.model.states(S, T, 0.0)
    p_plus = res.model.states(S, T, 0.5).pos_m
    p_minus = res.model.states(S, T, -0.5).pos_m
    vel = p_plus - p_minus
    rel_rv = -2.0 * np.einsum("ij,ij->i", st.pos_m, vel) / C_MPS ** 2
    err = np.zeros((t.size, len(sats)))
    if res.sat_clock_error_s is not None and np.any(res.sat_clock_error_s):
        tt = scn.time_ns
        u = (t - tt[0]) / 1e9
        uu = (tt - tt[0]) / 1e9
        err = np.stack([np.interp(u, uu, res.sat_clock_error_s[:, j]) for j in range(len(sats))], axis=1)
    clk = (st.clock_s + st.relativity_s - rel_rv).reshape(t.size, len(sats)) + err
    bad = (np.asarray(st.status).reshape(t.size, len(sats)) != 0)
    pos = st.pos_m.reshape(t.size, len(sats), 3).copy()
    pos[bad] = np.nan
    clk[bad] = np.nan
    return sats, pos, clk


def _write_products(res: SimulationResult, out: pathlib.Path, ts0: int, ts1: int, leap: int, comments) -> list:
    from .formats.rinex_writers import write_clock3, write_sp3

    scn = res.scenario
    paths = []
    step = int(round(scn.output["sp3_interval_s"] * NS))
    a = ((ts0 - 3600 * NS) // step) * step
    b = -(-(ts1 + 3600 * NS) // step) * step
    t = np.arange(a, b + 1, step, dtype=np.int64)
    sats, pos, clk = true_products(res, t)
    paths.append(write_sp3(out / product_file_name(ts0, "sp3"), time_ns=t, sats=sats, pos_m=pos, clock_s=clk,
                           comments=comments[:4]))
    step = int(round(scn.output["clk_interval_s"] * NS))
    a = ((ts0 - 300 * NS) // step) * step
    b = -(-(ts1 + 300 * NS) // step) * step
    t = np.arange(a, b + 1, step, dtype=np.int64)
    sats, _, clk = true_products(res, t)
    paths.append(write_clock3(out / product_file_name(ts0, "clk"), time_ns=t, sats=sats, clock_s=clk,
                              leap_seconds=leap, comments=comments, run_ns=int(scn.time_ns[0])))
    return paths


def write_outputs(res: SimulationResult, out_dir) -> dict:
    """Write every file of the scenario into ``out_dir``; returns ``{kind: [paths]}``."""
    from .config import Antenna, DelaySet, HardwareChange, StationConfig, dump_station
    from .geodesy import ecef_to_geodetic
    from .formats.rinex_writers import write_met2, write_nav3, write_obs2, write_obs3

    scn = res.scenario
    out = pathlib.Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    gz = scn.output["gzip"]
    t = scn.time_ns
    duration_s = scn.n_epochs * scn.interval_s
    leap = int(ts.leap_seconds_at_gps(t[0]))
    files = {"obs": [], "obs2": [], "met": [], "station": [], "pair": [], "nav": [], "truth": [], "products": []}
    comments = [f"simulated by ctt: scenario {scn.name}", f"random_state {scn.random_state}",
                "synthetic data: invented stations and clocks"]
    # one set of files per GPS day when the scenario is longer than a day, else one set
    day = t // ts.NS_PER_DAY
    if duration_s > 86400:
        segments = [np.flatnonzero(day == d) for d in np.unique(day)]
    else:
        segments = [np.arange(t.size)]
    split = len(segments) > 1
    met_step = max(1, int(round(scn.output["met_interval_s"] / scn.interval_s)))
    for seg in segments:
        ts0, ts1 = int(t[seg[0]]), int(t[seg[-1]])
        seg_s = seg.size * scn.interval_s
        if scn.output["products"]:
            files["products"] += _write_products(res, out, ts0, ts1, leap, comments)
        # navigation
        if res.nav_records:
            week, sow = ts.gps_week_sow(ts0)
            margin = 4 * 3600 * NS
            recs = [rc for rc in res.nav_records if ts0 - margin <= rc["toc_ns"] <= ts1 + margin]
            nav_path = out / nav_file_name(ts0, seg_s, gz)
            corr = {"GPUT": (0.0, 0.0, int(sow) - int(sow) % 4096, int(week)),
                    "GAGP": (0.0, 0.0, int(sow) - int(sow) % 4096, int(week))}
            if "R" in scn.systems:
                corr["GLUT"] = (0.0, 0.0, 0, 0)   # GLONASS time − UTC(SU) − 3 h = τ_c = 0 (no reference time)
            write_nav3(nav_path, recs,
                       iono={"GPSA": res.iono_alpha, "GPSB": res.iono_beta, "GAL": [60.0, 0.2, 0.003]},
                       time_corrections=corr,
                       leap_seconds=leap, run_ns=int(t[0]), comments=comments[:1])
            files["nav"].append(nav_path)
        elif not files["nav"]:
            src = scn.satellites["nav_file"]
            if (out / src.name).resolve() != src.resolve():
                shutil.copyfile(src, out / src.name)
            files["nav"].append(out / src.name)
        for sid, r in res.stations.items():
            spec = r.spec
            obs_types = {s: [k + c[1:] for c in spec.signals[s] for k in "CLS"]
                         for s in scn.systems if s in spec.signals}
            sub = {k: v[seg] for k, v in r.obs.items()}
            sub_lli = {k: v[seg] for k, v in r.lli.items()}
            sub_ssi = {k: v[seg] for k, v in r.ssi.items()}
            if not any(np.isfinite(v).any() for v in sub.values()):
                continue
            p = write_obs3(out / obs_file_name(sid, ts0, seg_s, scn.interval_s, gz, scn.output["hatanaka"]),
                           marker=sid,
                           time_ns=t[seg], sats=r.sats, obs=sub, types=obs_types, lli=sub_lli, ssi=sub_ssi,
                           interval_s=scn.interval_s, approx_xyz_m=spec.marker_m,
                           antenna_delta_hen_m=spec.antenna_delta_hen_m, receiver_type=spec.receiver_type,
                           receiver_number=f"{sid}-RX1", receiver_version="1.0", antenna_type=spec.antenna_type,
                           antenna_number=f"{sid}-ANT1", observer="ctt simulate", agency=spec.name,
                           leap_seconds=leap, run_ns=int(t[0]), comments=comments, epoch_flags=r.epoch_flag[seg],
                           glonass_slots={s: k for s, k in r.glonass_channels.items()
                                          if s in r.sats and "R" in spec.signals})
            files["obs"].append(p)
            if scn.output["rinex2"] and "G" in spec.signals:
                y = int(ts.ns_to_civil(np.int64(ts0))[0])
                doy = int(ts.day_of_year(np.int64(ts0)))
                name2 = f"{sid[:4].lower()}{doy:03d}0.{y % 100:02d}o" + (".gz" if gz else "")
                codes = [k + c[1:] for c in spec.signals["G"] for k in "CLS"]
                files["obs2"].append(write_obs2(
                    out / name2, marker=sid, time_ns=t[seg], sats=r.sats, obs=sub, codes=codes, lli=sub_lli,
                    ssi=sub_ssi, interval_s=scn.interval_s, approx_xyz_m=spec.marker_m,
                    antenna_delta_hen_m=spec.antenna_delta_hen_m, receiver_type=spec.receiver_type,
                    antenna_type=spec.antenna_type, observer="ctt simulate", agency=spec.name, leap_seconds=leap,
                    run_ns=int(t[0])))
            lat, lon, hgt = (float(v) for v in ecef_to_geodetic(spec.marker_m))
            mi = seg[(seg - seg[0]) % met_step == 0]
            files["met"].append(write_met2(out / met_file_name(sid, ts0), marker=sid, time_ns=t[mi],
                                           pressure_hpa=r.met["p"][mi], temperature_c=r.met["t"][mi],
                                           humidity_pct=r.met["rh"][mi],
                                           sensor_xyz_h_m=(*spec.marker_m, hgt), run_ns=int(t[0])))
    nav_name = files["nav"][0].name
    for sid, r in res.stations.items():
        spec = r.spec
        # station TOML: the true delays; documented changes open a new [[delays]] set
        utc0 = int(ts.convert(np.int64(t[0]), "GPS", "UTC"))
        valid_from = ts.date_to_ns(str(ts.to_datetime64(utc0 - 30 * ts.NS_PER_DAY))[:10])
        sets = []
        cur = dict(receiver=dict(spec.receiver_ns), cable=spec.cable_ns, reference=spec.reference_ns)
        t_from = valid_from
        documented = [c for c in spec.delay_changes if c.in_delays]
        for k, ch in enumerate(documented + [None]):
            t_until = None if ch is None else ch.time_utc_ns
            sets.append(DelaySet(valid_from_ns=int(t_from), valid_until_ns=t_until,
                                 receiver_ns=dict(cur["receiver"]),
                                 u_receiver_ns={c: spec.u_receiver_ns for c in cur["receiver"]},
                                 cable_ns=cur["cable"], u_cable_ns=spec.u_cable_ns, reference_ns=cur["reference"],
                                 u_reference_ns=spec.u_reference_ns,
                                 note="simulated truth" if k == 0 else f"after: {documented[k - 1].what}",
                                 index=k + 1))
            if ch is not None:
                cur = dict(receiver={c: v + ch.receiver_ns.get(c, 0.0) for c, v in cur["receiver"].items()},
                           cable=cur["cable"] + ch.cable_ns, reference=cur["reference"] + ch.reference_ns)
                t_from = ch.time_utc_ns
        first_code = next(iter(spec.signals.get("G", spec.signals.get("E", ("C1C",)))))
        changes = tuple(HardwareChange(ch.time_utc_ns, ch.what,
                                       ch.receiver_ns.get(first_code, 0.0) + ch.cable_ns - ch.reference_ns)
                        for ch in spec.delay_changes)
        cfg = StationConfig(
            id=sid, name=spec.name, position_m=np.array(spec.marker_m, dtype=float),
            position_sigma_m=np.array([0.005, 0.005, 0.005]), frame="ITRF2014",
            epoch=float(y_frac(t[0])), is_marker=True,
            antenna=Antenna(spec.antenna_type, np.array(spec.antenna_delta_hen_m, dtype=float)),
            elevation_mask_deg=spec.elevation_mask_deg, met_pattern="{station}{doy:03d}0.{yy:02d}m",
            delay_sets=tuple(sets), changes=changes, path=None, sha256="")
        sp = out / f"{sid.lower()}.toml"
        sp.write_text("# simulated station (invented); written by ctt simulate\n" + dump_station(cfg))
        files["station"].append(sp)
    period = "*" if split else _period_code(duration_s)
    obs_pattern = (f"{{STATION}}00XXX_R_{{yyyy}}{{doy:03d}}{'*' if split else '0000'}_{period}_"
                   f"{int(round(scn.interval_s)):02d}S_MO." + ("crx" if scn.output["hatanaka"] else "rnx")
                   + (".gz" if gz else ""))
    nav_pattern = nav_name
    if res.nav_records:
        nav_pattern = (f"BRDC00XXX_R_{{yyyy}}{{doy:03d}}{'*' if split else '0000'}_{period}_MN.rnx"
                       + (".gz" if gz else ""))
    for a, b in scn.pairs:
        pp = out / f"{a.lower()}-{b.lower()}.toml"
        systems = ", ".join(f'"{s}"' for s in scn.systems)
        pp.write_text(
            "# pair of simulated stations; written by ctt simulate\n"
            f"[pair]\nname = \"{a.lower()}-{b.lower()}\"\nstation_a = \"{a.lower()}.toml\"\n"
            f"station_b = \"{b.lower()}.toml\"\ndata_root = \".\"\n\n"
            f"[inputs]\nobs = \"{obs_pattern}\"\nnav = \"{nav_pattern}\"\n"
            + ("sp3 = \"SIMU{gpsweek:04d}{gpsdow}.sp3\"\nclk = \"SIMU{gpsweek:04d}{gpsdow}.clk\"\n"
               if scn.output["products"] else "")
            + 
            "met = \"{station}{doy:03d}0.{yy:02d}m\"\noptional = [\"met\"]\n\n"
            f"[processing]\nsystems = [{systems}]\n\n[output]\ndir = \"out\"\n")
        files["pair"].append(pp)
    tp = out / "truth.csv"
    table = res.truth.copy()
    table["mjd_utc"] = [f"{v:.8f}" for v in table["mjd_utc"]]
    table.to_csv(tp, index=False, float_format="%.6f")
    sp = out / "truth_steps.csv"
    res.steps.to_csv(sp, index=False)
    ep = out / "truth_events.csv"
    events_table(res).to_csv(ep, index=False, float_format="%.0f")
    files["truth"] += [tp, sp, ep]
    gb = glonass_bias_table(res)
    if len(gb):
        gp = out / "truth_glonass_biases.csv"
        gb.to_csv(gp, index=False, float_format="%.6f")
        files["truth"].append(gp)
    res.files = files
    return files


def y_frac(t_gps_ns) -> float:
    """Decimal year of an instant (for the station file's coordinate epoch), rounded to 0.001."""
    y = int(ts.ns_to_civil(np.int64(t_gps_ns))[0])
    t0 = ts.civil_to_ns(y, 1, 1)
    t1 = ts.civil_to_ns(y + 1, 1, 1)
    return round(y + float((t_gps_ns - t0) / (t1 - t0)), 3)


def run_scenario(scenario_path, out_dir) -> SimulationResult:
    """Load a scenario file, simulate it and write its files into ``out_dir``."""
    scn = load_scenario(scenario_path)
    res = simulate(scn)
    write_outputs(res, out_dir)
    return res

