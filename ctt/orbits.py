"""Satellite position, velocity and clock at an instant: broadcast ephemerides, and interpolation of precise products.

``BroadcastOrbits(nav, *, galileo_source='inav', allow_future=False)``
and its ``states(sats, t_ns, dt_s=0.0) -> SatStates`` (the interface shared with
``PreciseOrbits`` (below)). Everything is vectorised over the flat
query arrays (satellites × epochs flattened to N rows).

Instants
--------
``t_ns`` is int64 GPS-time calendar-count ns, ``dt_s`` a float64 offset in
seconds added to it (so a transmission time keeps ps precision). Before an
ephemeris is evaluated the instant is converted to the system's own scale with
:func:`ctt.timescales.convert`: GST = GPS and QZSS time = GPS (nominal), BDT =
GPS − 14 s, and for GLONASS to **UTC**, because RINEX gives the GLONASS
reference epoch t_b in UTC (the GLONASS ICD's t_b is in GLONASS time =
UTC(SU) + 3 h; RINEX removes the 3 h). Intervals are formed as exact int64
differences first and only then turned into float seconds.

Frames
------
``pos_m`` and ``vel_mps`` are Earth-fixed at the instant (rotating frame, the
velocity is the time derivative of the Earth-fixed position). WGS 84 (GPS),
GTRF (Galileo), CGCS2000 (BeiDou), the QZSS frame and PZ-90.11 (GLONASS) are
treated as one frame: they agree at the few-cm level, far below broadcast
orbit errors (common practice).

Clocks
------
``clock_s`` is satellite clock minus *its own system time* from the broadcast
polynomial af0 + af1·Δt + af2·Δt² (Δt from t_oc), or −τ_n + γ_n·(t − t_b) for
GLONASS, *without* the periodic relativistic term and without group delays.
``relativity_s`` is that periodic term: F·e·√A·sin E_k (IS-GPS-200
§20.3.3.3.3.1, F = −2√μ/c²) for Keplerian ephemerides, −2 r·v/c² for GLONASS
states (GLONASS ICD; r·v is the same in the Earth-fixed and inertial frames).
The satellite clock for a signal, against its own system time, is
``clock_s + relativity_s + group_delay_s`` (see
:meth:`BroadcastOrbits.group_delay_s`). ``system_time_offset_s`` is
(system time − GPS time) *beyond* the nominal offset that ``ctt.timescales``
applies (integer seconds, the 3 h of GLONASS): 0 for GPS; GST−GPS from the
header GAGP/GPGA line; BDT−GPS from BDUT−GPUT; QZSS from QZGP or QZUT−GPUT;
GLONASS−GPS from GLGP, or GLUT−GPUT; NaN when the file gives no usable
correction for that system (a user of a second system then estimates the
offset, e.g. as an extra clock parameter). The reading convention of the
TIME SYSTEM CORR lines is given in ``BroadcastOrbits._system_offset``.

Ephemeris selection (what a receiver would use)
-----------------------------------------------
For each row the record of that satellite is chosen that is

* healthy: GPS/QZSS health word 0 and URA below index 15; Galileo health
  bits of the signals used (E1-B and E5b DVS/HS for I/NAV, E5a DVS/HS for
  F/NAV; Galileo OS SIS ICD §5.1.9.3) and SISA not NAPA; BeiDou SatH1 0;
  GLONASS B_n health 0 (and l_n where RINEX 3.05/4 gives the health flags);
* of the right Galileo message: ``galileo_source='inav'`` (E1/E5b users) keeps
  only records whose data-source bits say I/NAV, ``'fnav'`` (E5a) only F/NAV;
* IOD-consistent: GPS/QZSS IODE equal to the low 8 bits of IODC
  (IS-GPS-200 §20.3.4.4);
* inside its validity interval: GPS/QZSS ±fit/2 around t_oe (fit interval
  from the record, 4 h when flagged 0; IS-GPS-200 §20.3.4.4, t_oe at the middle
  of the curve fit); Galileo ±4 h around t_oe (the ICD gives no fit interval;
  4 h is common practice); BeiDou ±2 h (records are updated hourly; common
  practice); GLONASS ±30 min around t_b (records every 30 min intended for
  ±15 min; the wider window bridges one missing record at metre-level cost);
* already broadcast: its transmission time of message (GLONASS: message frame
  time t_k) not after the instant, unless ``allow_future=True``; where a file
  gives no transmission time the start of the validity interval is used. This
  is the receiver's view: a GPS data set is first broadcast about 2 h before
  its t_oe, so a rule "t_oe not after t" would force the previous, older set
  (that stricter rule is available as ``available_from='reference'``: a
  record then counts only from its t_oe / t_b on);
* and among those the one whose t_oe (t_b) is closest to the instant.

The record is chosen for the instant ``t_ns`` alone (``dt_s``, a light time of
~0.07 s, does not change the choice), so the light-time iteration of the
measurement model always evaluates one record per row.

Rows that get no record keep NaN outputs and a status code (``STATUS_NAMES``,
:func:`reason`): NO_EPHEMERIS (no record of that satellite), STALE (none
within its validity interval), NOT_YET_BROADCAST (only records transmitted
after the instant), WRONG_SOURCE (Galileo: only the other message), UNHEALTHY,
IOD_MISMATCH (only records failing that check), UNSUPPORTED_SYSTEM (SBAS,
IRNSS, unknown letters), BAD_ID (not a satellite id).

Models
------
GPS/QZSS: IS-GPS-200 Table 20-IV (μ = 3.986005e14, Ω̇e = 7.2921151467e-5).
Galileo: Galileo OS SIS ICD §5.1.1 (μ = 3.986004418e14, same Ω̇e). BeiDou: BDS
SIS ICD (CGCS2000 μ = 3.986004418e14, Ω̇e = 7.2921150e-5), GEO satellites
(PRN 1–5, 59–63) with the extra −5° rotation. Kepler's equation is solved by
vectorised Newton iteration to |ΔE| < 1e-13 rad. Velocities are the analytic
time derivatives. GLONASS: GLONASS ICD (2008) Appendix A.3.1.2, 4th-order
Runge–Kutta integration of the PZ-90 state in the Earth-fixed frame with the
central term, J2 and the broadcast (constant) luni-solar accelerations, steps
≤ 60 s (μ = 3.9860044e14, a_e = 6378136 m, J2 = 1082625.75e-9,
ω = 7.292115e-5 rad/s).

For the PPP estimator
---------------------
:func:`eclipse_flags` (rows in the Earth's shadow and 30 min after, from
:func:`in_earth_shadow` and :func:`sun_position_ecef`), :func:`body_frame`
(nominal yaw attitude), :class:`PreciseOrbits` with several SP3/clock files,
:func:`clock_interpolation_error` (leave-one-out figures of a clock file).
"""

from __future__ import annotations

import dataclasses
import logging
import math
import pathlib

import numpy as np

from .errors import OutOfSpanError, ProcessingError
from .formats.antex import read_antex
from .formats.rinex_clock import ClockData, ClockSeries, merge_clock, read_clock
from .formats.rinex_nav import BDS_GEO_PRN, NavData
from .formats.sp3 import SP3Data, merge_sp3, read_sp3
from .timescales import NS_PER_S, convert

log = logging.getLogger(__name__)

C_MPS = 299_792_458.0  # SI
GM_GPS = 3.986005e14  # IS-GPS-200 §20.3.3.4.3
OMEGA_E_GPS = 7.2921151467e-5  # IS-GPS-200
GM_GAL = 3.986004418e14  # Galileo OS SIS ICD §5.1.1
OMEGA_E_GAL = 7.2921151467e-5  # Galileo OS SIS ICD §5.1.1
GM_BDS = 3.986004418e14  # BDS SIS ICD (CGCS2000)
OMEGA_E_BDS = 7.2921150e-5  # BDS SIS ICD (CGCS2000)
# GLONASS ICD (2008) §3.1.3 / Appendix A.3.1.2, PZ-90
GM_GLO = 3.9860044e14
AE_GLO = 6378136.0
J2_GLO = 1082625.75e-9
OMEGA_E_GLO = 7.292115e-5

#: F = −2√μ/c² (IS-GPS-200 §20.3.3.3.3.1: −4.442807633e-10 s/m^½).
F_GPS = -2.0 * math.sqrt(GM_GPS) / C_MPS**2
F_GAL = -2.0 * math.sqrt(GM_GAL) / C_MPS**2
F_BDS = -2.0 * math.sqrt(GM_BDS) / C_MPS**2
assert abs(F_GPS - (-4.442807633e-10)) < 5e-19, F_GPS


KEPLER_TOL_RAD = 1e-13
KEPLER_MAX_ITER = 50

OK = 0
NO_EPHEMERIS = 1
STALE = 2
NOT_YET_BROADCAST = 3
WRONG_SOURCE = 4
UNHEALTHY = 5
IOD_MISMATCH = 6
UNSUPPORTED_SYSTEM = 7
BAD_ID = 8
STATUS_NAMES = {
    OK: "OK", NO_EPHEMERIS: "NO_EPHEMERIS", STALE: "STALE", NOT_YET_BROADCAST: "NOT_YET_BROADCAST",
    WRONG_SOURCE: "WRONG_SOURCE", UNHEALTHY: "UNHEALTHY", IOD_MISMATCH: "IOD_MISMATCH",
    UNSUPPORTED_SYSTEM: "UNSUPPORTED_SYSTEM", BAD_ID: "BAD_ID",
}
_REASONS = {
    OK: "usable",
    NO_EPHEMERIS: "no ephemeris record for this satellite in the navigation data",
    STALE: "no record whose validity interval contains the instant",
    NOT_YET_BROADCAST: "only records transmitted after the instant (allow_future=False)",
    WRONG_SOURCE: "no Galileo record of the requested message (I/NAV or F/NAV)",
    UNHEALTHY: "records in range are flagged unhealthy",
    IOD_MISMATCH: "records in range have IODE different from the low 8 bits of IODC",
    UNSUPPORTED_SYSTEM: "system not modelled (SBAS, IRNSS or unknown letter)",
    BAD_ID: "not a satellite id (letter + two digits)",
}

_SCALE = {"G": "GPS", "J": "QZS", "E": "GST", "C": "BDT", "R": "UTC"}
_HALF_VALID_NS = {"E": 4 * 3600 * NS_PER_S, "C": 2 * 3600 * NS_PER_S, "R": 1800 * NS_PER_S}
# candidates examined on each side of the instant (per satellite, sorted by t_oe): among usable
# records, and (for the reason of a failure) among all records
_WINDOW = 4
_WINDOW_ALL = 4
_I64MIN = np.iinfo(np.int64).min


def reason(status):
    """Text reason(s) for status code(s)."""
    st = np.asarray(status)
    if st.ndim == 0:
        return _REASONS[int(st)]
    return np.array([_REASONS[int(s)] for s in st.ravel()], dtype=object).reshape(st.shape)


@dataclasses.dataclass
class SatStates:
    """Satellite states for N rows (see module docstring for frames and signs).

    pos_m (N,3), vel_mps (N,3) Earth-fixed; clock_s, clock_drift_sps,
    relativity_s; broadcast group delays tgd_s (GPS/QZSS), bgd_e5a_s,
    bgd_e5b_s (Galileo), tgd1_s, tgd2_s (BeiDou), NaN where not applicable;
    iode (int, −1 when none; IODE/IODnav/AODE, for GLONASS the t_b index of
    the ICD: the 15-min interval of the Moscow day), status (int, STATUS_NAMES), toe_gps_ns (GPS time
    of the chosen record's t_oe / t_b, int64 min when none), record (row index
    into ``nav.records[system]``, −1 when none), system (letter),
    system_time_offset_s.
    """

    pos_m: np.ndarray
    vel_mps: np.ndarray
    clock_s: np.ndarray
    clock_drift_sps: np.ndarray
    relativity_s: np.ndarray
    tgd_s: np.ndarray
    bgd_e5a_s: np.ndarray
    bgd_e5b_s: np.ndarray
    tgd1_s: np.ndarray
    tgd2_s: np.ndarray
    iode: np.ndarray
    status: np.ndarray
    toe_gps_ns: np.ndarray
    record: np.ndarray
    system: np.ndarray
    system_time_offset_s: np.ndarray

    def reason(self, status=None):
        return reason(self.status if status is None else status)

    @property
    def ok(self):
        return self.status == OK

    def __len__(self):
        return len(self.status)


# ------------------------------------------------------------------ Kepler

def solve_kepler(m_rad, e):
    """Eccentric anomaly E with E − e·sin E = M (vectorised Newton, |ΔE| < 1e-13 rad).

    Start at M + e·sin M (π for e > 0.8, where Newton from there can overshoot); raises
    ProcessingError if some element has not converged after 50 iterations.
    """
    m = np.asarray(m_rad, dtype=np.float64)
    e = np.broadcast_to(np.asarray(e, dtype=np.float64), m.shape)
    if np.any((e < 0) | (e >= 1)):
        raise ProcessingError("eccentricity outside [0, 1) in Kepler's equation")
    two_pi = 2.0 * np.pi
    mr = np.mod(m, two_pi)  # [0, 2π)
    big = e > 0.8
    E = np.where(big, np.pi, mr + e * np.sin(mr))
    for _ in range(KEPLER_MAX_ITER):
        d = (E - e * np.sin(E) - mr) / (1.0 - e * np.cos(E))
        E = E - d
        if np.all(np.abs(d) < KEPLER_TOL_RAD):
            break
    else:
        raise ProcessingError("Kepler's equation did not converge (|ΔE| ≥ 1e-13 rad after 50 iterations)")
    return E + (m - mr)


def _kepler_states(p, tk, gm, omega_e, geo=None):
    """Position/velocity (Earth-fixed) and sin E, from gathered record columns ``p`` and tk (s)."""
    a = p["sqrt_a_sqrtm"] ** 2
    n = np.sqrt(gm / a**3) + p["delta_n_radps"]
    e = p["e"]
    E = solve_kepler(p["m0_rad"] + n * tk, e)
    sE, cE = np.sin(E), np.cos(E)
    den = 1.0 - e * cE
    s1e = np.sqrt(1.0 - e * e)
    nu = np.arctan2(s1e * sE, cE - e)
    phi = nu + p["omega_rad"]
    s2, c2 = np.sin(2 * phi), np.cos(2 * phi)
    du = p["cus_rad"] * s2 + p["cuc_rad"] * c2
    dr = p["crs_m"] * s2 + p["crc_m"] * c2
    di = p["cis_rad"] * s2 + p["cic_rad"] * c2
    u = phi + du
    r = a * den + dr
    inc = p["i0_rad"] + di + p["idot_radps"] * tk
    # derivatives
    Edot = n / den
    nudot = Edot * s1e / den
    udot = nudot * (1.0 + 2.0 * (p["cus_rad"] * c2 - p["cuc_rad"] * s2))
    rdot = a * e * sE * Edot + 2.0 * nudot * (p["crs_m"] * c2 - p["crc_m"] * s2)
    idot = p["idot_radps"] + 2.0 * nudot * (p["cis_rad"] * c2 - p["cic_rad"] * s2)
    cu, su = np.cos(u), np.sin(u)
    xp, yp = r * cu, r * su
    xpd = rdot * cu - r * udot * su
    ypd = rdot * su + r * udot * cu
    toe = p["toe_sow_s"]
    if geo is None:
        geo = np.zeros(tk.shape, dtype=bool)
    # MEO/IGSO: Ω_k = Ω0 + (Ω̇ − Ω̇e) t_k − Ω̇e t_oe ; GEO (BDS): Ω_k = Ω0 + Ω̇ t_k − Ω̇e t_oe
    odot = np.where(geo, p["omega_dot_radps"], p["omega_dot_radps"] - omega_e)
    Om = p["omega0_rad"] + odot * tk - omega_e * toe
    cO, sO = np.cos(Om), np.sin(Om)
    ci, si = np.cos(inc), np.sin(inc)
    x = xp * cO - yp * ci * sO
    y = xp * sO + yp * ci * cO
    z = yp * si
    vx = xpd * cO - ypd * ci * sO + yp * si * sO * idot - y * odot
    vy = xpd * sO + ypd * ci * cO - yp * si * cO * idot + x * odot
    vz = ypd * si + yp * ci * idot
    pos = np.stack([x, y, z], axis=-1)
    vel = np.stack([vx, vy, vz], axis=-1)
    if np.any(geo):
        g = geo
        # BDS SIS ICD: X = Rz(Ω̇e t_k) · Rx(−5°) · X_GK
        phi5 = np.deg2rad(-5.0)
        cf, sf = math.cos(phi5), math.sin(phi5)
        xg, yg, zg = x[g], y[g], z[g]
        vxg, vyg, vzg = vx[g], vy[g], vz[g]
        # Rx(φ) = [[1,0,0],[0,c,s],[0,−s,c]]
        y1, z1 = cf * yg + sf * zg, -sf * yg + cf * zg
        vy1, vz1 = cf * vyg + sf * vzg, -sf * vyg + cf * vzg
        ang = omega_e * tk[g]
        ca, sa = np.cos(ang), np.sin(ang)
        # Rz(a) = [[c,s,0],[−s,c,0],[0,0,1]]; d/dt Rz = Ω̇e [[−s,c,0],[−c,−s,0],[0,0,0]]
        X = ca * xg + sa * y1
        Y = -sa * xg + ca * y1
        VX = ca * vxg + sa * vy1 + omega_e * (-sa * xg + ca * y1)
        VY = -sa * vxg + ca * vy1 + omega_e * (-ca * xg - sa * y1)
        pos[g] = np.stack([X, Y, z1], axis=-1)
        vel[g] = np.stack([VX, VY, vz1], axis=-1)
    return pos, vel, sE


# ------------------------------------------------------------------ GLONASS

def _glo_accel(r, v, a_ls):
    x, y, z = r[:, 0], r[:, 1], r[:, 2]
    r2 = x * x + y * y + z * z
    rr = np.sqrt(r2)
    mu_r3 = GM_GLO / (r2 * rr)
    k = 1.5 * J2_GLO * GM_GLO * AE_GLO**2 / (r2 * r2 * rr)
    zz = 5.0 * z * z / r2
    w2 = OMEGA_E_GLO**2
    ax = -mu_r3 * x - k * x * (1.0 - zz) + w2 * x + 2.0 * OMEGA_E_GLO * v[:, 1] + a_ls[:, 0]
    ay = -mu_r3 * y - k * y * (1.0 - zz) + w2 * y - 2.0 * OMEGA_E_GLO * v[:, 0] + a_ls[:, 1]
    az = -mu_r3 * z - k * z * (3.0 - zz) + a_ls[:, 2]
    return np.stack([ax, ay, az], axis=-1)


def glonass_propagate(pos_m, vel_mps, acc_mps2, dt_s, max_step_s=60.0):
    """Integrate PZ-90 states (N,3) by dt_s (N,) seconds with RK4, steps ≤ ``max_step_s``.

    All rows take the same number of steps (that of the longest interval), each
    row its own step length dt/n, so the loop runs over steps, not rows.
    """
    r = np.array(pos_m, dtype=np.float64, copy=True)
    v = np.array(vel_mps, dtype=np.float64, copy=True)
    acc = np.asarray(acc_mps2, dtype=np.float64)
    dt = np.asarray(dt_s, dtype=np.float64)
    if r.shape[0] == 0:
        return r, v
    nsteps = max(1, int(math.ceil(np.max(np.abs(dt)) / max_step_s - 1e-12)))
    h = (dt / nsteps)[:, None]
    for _ in range(nsteps):
        r, v = _rk4_step(r, v, acc, h)
    return r, v


def _rk4_step(r, v, acc, h):
    k1v = _glo_accel(r, v, acc)
    k1r = v
    k2r = v + 0.5 * h * k1v
    k2v = _glo_accel(r + 0.5 * h * k1r, k2r, acc)
    k3r = v + 0.5 * h * k2v
    k3v = _glo_accel(r + 0.5 * h * k2r, k3r, acc)
    k4r = v + h * k3v
    k4v = _glo_accel(r + h * k3r, k4r, acc)
    return r + h / 6.0 * (k1r + 2 * k2r + 2 * k3r + k4r), v + h / 6.0 * (k1v + 2 * k2v + 2 * k3v + k4v)


def glonass_states_from_records(rec, r0, v0, a0, dt_s, step_s=60.0):
    """States of many rows that share few broadcast records (row -> ``rec`` index).

    Each record's state is integrated once to the nodes t_b + k·step (k
    towards the rows' instants), then each row takes one last RK4 step of
    less than ``step_s`` from the node before it. The steps are the ones
    :func:`glonass_propagate` would take for that row up to the last, so the
    result agrees with it to integration accuracy (sub-mm), at the cost of
    one step per row instead of up to 15.
    """
    dt = np.asarray(dt_s, dtype=np.float64)
    n = len(dt)
    ur, inv = np.unique(rec, return_inverse=True)
    k = np.trunc(dt / step_s).astype(np.int64)  # node index towards the instant, |rest| < step
    rest = dt - k * step_s
    kmax, kmin = int(k.max(initial=0)), int(k.min(initial=0))
    R0, V0, A0 = r0[ur], v0[ur], a0[ur]
    nodes_r = {0: R0}
    nodes_v = {0: V0}
    for sign, kend in ((1, kmax), (-1, kmin)):
        r, v = R0, V0
        h = np.full((len(ur), 1), sign * step_s)
        for j in range(1, abs(kend) + 1):
            r, v = _rk4_step(r, v, A0, h)
            nodes_r[sign * j] = r
            nodes_v[sign * j] = v
    r = np.empty((n, 3))
    v = np.empty((n, 3))
    for kk in np.unique(k):
        m = k == kk
        r[m] = nodes_r[int(kk)][inv[m]]
        v[m] = nodes_v[int(kk)][inv[m]]
    return _rk4_step(r, v, A0[inv], rest[:, None])


# ------------------------------------------------------------------ selection

class _SystemTable:
    """Records of one system, sorted by (satellite, reference epoch), with selection helpers."""

    def __init__(self, s, df, galileo_source, available_from="transmission"):
        self.s = s
        self.df = df
        sats = df["sat"].to_numpy().astype(str)
        ref = df["toc_ns"].to_numpy() if s == "R" else df["toe_ns"].to_numpy()
        self.ref_ns = ref.astype(np.int64)
        self.sat_names, code = np.unique(sats, return_inverse=True)
        self.code = code.astype(np.int64)
        self.t0 = int(ref.min()) if len(ref) else 0
        if s in ("G", "J"):
            half = (df["fit_h"].to_numpy() * 1800.0 * NS_PER_S).astype(np.int64)
        else:
            half = np.full(len(df), _HALF_VALID_NS[s], dtype=np.int64)
        self.half_ns = half
        if s == "R":
            tk = df["tk_ns"].to_numpy()
            okt = (tk >= ref - 3600 * NS_PER_S) & (tk <= ref + 1800 * NS_PER_S)
            avail = np.where(okt, tk, ref - 900 * NS_PER_S)
        else:
            ttm = df["ttm_ns"].to_numpy()
            avail = np.where(ttm == _I64MIN, ref - half, ttm)
        if available_from == "reference":
            avail = ref  # a record counts from its t_oe / t_b on
        self.avail_ns = avail.astype(np.int64)
        # static checks -> a reason code per record (OK when usable)
        st = np.full(len(df), OK, dtype=np.int64)
        health = df["health"].to_numpy()
        if s == "E":
            src = df["source"].to_numpy().astype(str)
            mask = 0x1C7 if galileo_source == "inav" else 0x38
            st = np.where((health & mask) != 0, UNHEALTHY, st)
            # SISA "no accuracy prediction available" (NAPA, written as a negative value in RINEX):
            # Galileo OS SIS ICD §5.1.11 -- the signal may be anomalous
            st = np.where(df["ura_m"].to_numpy() < 0, UNHEALTHY, st)
            st = np.where(src != galileo_source, WRONG_SOURCE, st)
        elif s == "R":
            hf = df["health_flags"].to_numpy()
            st = np.where(health != 0, UNHEALTHY, st)
            # RINEX 3.05/4 health flags: bit 0 l_n (extended health) when present
            st = np.where(np.isfinite(hf) & ((np.nan_to_num(hf).astype(np.int64) & 1) != 0), UNHEALTHY, st)
        else:
            st = np.where(health != 0, UNHEALTHY, st)
            if s in ("G", "J"):
                # URA index 15 (>= 6144 m): "no accuracy prediction available", IS-GPS-200 §20.3.3.3.1.3
                st = np.where(df["ura_m"].to_numpy() >= 6144.0, UNHEALTHY, st)
                iode = df["iode"].to_numpy()
                iodc = df["iodc"].to_numpy()
                st = np.where((st == OK) & (iode != (iodc & 0xFF)), IOD_MISMATCH, st)
        self.static = st
        # Checks in the order a failure is reported: message source, health, IOD. stage = how many
        # of them a record passes; subset k holds the records with stage >= k, reduced to one per
        # (satellite, reference epoch) -- the copy broadcast first -- so that the few candidates
        # examined around an instant are distinct data sets (merged files carry many copies).
        stage = np.full(len(df), 3, dtype=np.int64)
        stage = np.where(st == IOD_MISMATCH, 2, stage)
        stage = np.where(st == UNHEALTHY, 1, stage)
        stage = np.where(st == WRONG_SOURCE, 0, stage)
        self.n_sat = len(self.sat_names)
        self.subsets = []
        for k in range(4):
            idx = np.flatnonzero(stage >= k)
            o = np.lexsort((self.avail_ns[idx], ref[idx], self.code[idx]))
            idx = idx[o]
            if len(idx) > 1:
                first = np.ones(len(idx), dtype=bool)
                first[1:] = (self.code[idx][1:] != self.code[idx][:-1]) | (ref[idx][1:] != ref[idx][:-1])
                idx = idx[first]
            self.subsets.append((idx, self._key(self.code[idx], ref[idx])))

    def _key(self, code, t_ns):
        rel = np.clip((np.asarray(t_ns, dtype=np.int64) - self.t0) // 1000, -(2**42), 2**42 - 1)
        return code * (2**44) + rel + 2**42

    def _pick(self, subset, q_code, q_t, allow_future, window=_WINDOW):
        """Best record (row into df, −1 none) and whether any candidate was in its validity interval."""
        idx_sorted, keys = subset
        n = len(q_code)
        if len(idx_sorted) == 0 or n == 0:
            return np.full(n, -1, dtype=np.int64), np.zeros(n, dtype=bool)
        pos = np.searchsorted(keys, self._key(q_code, q_t))
        offs = np.arange(-window, window)
        cand = pos[:, None] + offs[None, :]
        inside = (cand >= 0) & (cand < len(idx_sorted))
        cand = np.clip(cand, 0, len(idx_sorted) - 1)
        rec = idx_sorted[cand]
        same = inside & (self.code[rec] == q_code[:, None])
        dt = q_t[:, None] - self.ref_ns[rec]
        adt = np.abs(dt)
        in_fit = same & (adt <= self.half_ns[rec])
        avail = in_fit & (allow_future | (self.avail_ns[rec] <= q_t[:, None]))
        score = np.where(avail, adt, np.iinfo(np.int64).max)
        j = np.argmin(score, axis=1)
        best = rec[np.arange(n), j]
        found = avail[np.arange(n), j]
        return np.where(found, best, -1), in_fit.any(axis=1)

    def build_table(self, allow_future, max_gap=8):
        """Precompute the choice as a step function of time per satellite.

        The chosen record and the status only change at a record's
        transmission time, at the ends of its validity interval (t_oe ± half,
        the end exclusive) and half-way between two reference epochs (the
        closer one wins; the earlier on a tie). Those instants are collected
        (midpoints for records up to ``max_gap`` apart in time order) and
        :meth:`select` is evaluated exactly at each, so a query is one
        ``searchsorted``. Returns False (and the caller uses :meth:`select`
        per query) when the file spans too long for one int64 key.
        """
        self.table = None
        if not len(self.ref_ns):
            return False
        ref, half, av, code = self.ref_ns, self.half_ns, self.avail_ns, self.code
        ev_c = [code, code, code]
        ev_t = [av, ref - half, ref + half + 1]
        idx0 = self.subsets[0][0]
        for d in range(1, max_gap + 1):
            if len(idx0) <= d:
                break
            i, j = idx0[:-d], idx0[d:]
            same = code[i] == code[j]
            ev_c.append(code[i][same])
            ev_t.append((ref[i][same] + ref[j][same]) // 2 + 1)
        ev_c = np.concatenate(ev_c)
        ev_t = np.concatenate(ev_t)
        t0 = int(ev_t.min()) - 1
        span = int(ev_t.max()) - t0 + 1
        code_bits = max(1, int(self.n_sat).bit_length())
        time_bits = max(1, span.bit_length())
        if code_bits + time_bits > 62:
            return False
        ev_c = np.concatenate([ev_c, np.arange(self.n_sat, dtype=np.int64)])
        ev_t = np.concatenate([ev_t, np.full(self.n_sat, t0, dtype=np.int64)])
        keys = np.unique((ev_c << time_bits) | (ev_t - t0))
        c_e = keys >> time_bits
        t_e = (keys & ((1 << time_bits) - 1)) + t0
        rec, st = self.select(self.sat_names[c_e], t_e, allow_future)
        self.table = (keys, rec, st, t0, span, time_bits)
        return True

    def lookup(self, q_sat, q_t):
        """Record and status per query from the step-function table (see :meth:`build_table`)."""
        keys, rec_t, st_t, t0, span, time_bits = self.table
        n = len(q_sat)
        code = np.searchsorted(self.sat_names, q_sat)
        code = np.clip(code, 0, self.n_sat - 1)
        known = self.sat_names[code] == q_sat
        rel = np.clip(np.asarray(q_t, dtype=np.int64) - t0, 0, span)
        pos = np.searchsorted(keys, (code << time_bits) | rel, side="right") - 1
        rec = np.where(known, rec_t[pos], -1)
        status = np.where(known, st_t[pos], NO_EPHEMERIS)
        if n and not known.all():
            rec = rec.astype(np.int64)
        return rec, status.astype(np.int64)

    def select(self, q_sat, q_t, allow_future):
        """Record per query (−1 none) and status codes."""
        n = len(q_sat)
        code = np.searchsorted(self.sat_names, q_sat)
        code = np.clip(code, 0, max(self.n_sat - 1, 0))
        known = (self.n_sat > 0) & (self.sat_names[code] == q_sat) if self.n_sat else np.zeros(n, bool)
        code = np.where(known, code, -1)
        status = np.where(known, OK, NO_EPHEMERIS).astype(np.int64)
        rec = np.full(n, -1, dtype=np.int64)
        k = np.flatnonzero(known)
        if len(k):
            best, _ = self._pick(self.subsets[3], code[k], q_t[k], allow_future)
            rec[k] = best
            bad = k[best < 0]
            if len(bad):
                # why not: first over all records (validity interval, broadcast yet), then adding
                # the checks one by one; the first subset without a candidate names the reason
                st = np.full(len(bad), IOD_MISMATCH, dtype=np.int64)
                todo = np.ones(len(bad), dtype=bool)
                for kk, why in ((0, None), (1, WRONG_SOURCE), (2, UNHEALTHY)):
                    rows = bad[todo]
                    found, any_fit = self._pick(self.subsets[kk], code[rows], q_t[rows], allow_future, _WINDOW_ALL)
                    miss = found < 0
                    if why is None:
                        code_ = np.where(any_fit, NOT_YET_BROADCAST, STALE)
                    else:
                        code_ = np.full(len(rows), why)
                    sub = np.flatnonzero(todo)
                    st[sub[miss]] = code_[miss]
                    todo[sub[miss]] = False
                    if not todo.any():
                        break
                status[bad] = st
        return rec, status


# ------------------------------------------------------------------ main class

_KEP_COLS = ["sqrt_a_sqrtm", "delta_n_radps", "e", "m0_rad", "omega_rad", "cus_rad", "cuc_rad",
             "crs_m", "crc_m", "cis_rad", "cic_rad", "i0_rad", "idot_radps", "omega0_rad",
             "omega_dot_radps", "toe_sow_s", "af0_s", "af1_sps", "af2_sps2"]


class BroadcastOrbits:
    """Satellite states from a :class:`ctt.formats.rinex_nav.NavData` (see the module docstring)."""

    def __init__(self, nav: NavData, *, galileo_source="inav", allow_future=False,
                 available_from="transmission"):
        if galileo_source not in ("inav", "fnav"):
            raise ValueError("galileo_source must be 'inav' (E1/E5b) or 'fnav' (E5a)")
        if available_from not in ("transmission", "reference"):
            raise ValueError("available_from must be 'transmission' (message transmission time) or "
                             "'reference' (t_oe / t_b)")
        self.available_from = available_from
        self.nav = nav
        self.galileo_source = galileo_source
        self.allow_future = bool(allow_future)
        self._tables = {}
        for s, df in nav.records.items():
            if s in _SCALE and len(df):
                self._tables[s] = _SystemTable(s, df, galileo_source, available_from)
                self._tables[s].build_table(self.allow_future)
        self._cols = {}
        for s, tab in self._tables.items():
            df = tab.df
            cols = {c: df[c].to_numpy(dtype=np.float64) for c in df.columns
                    if df[c].dtype.kind in "fiu" and c not in ("line",)}
            for c in ("toc_ns", "toe_ns", "toc_gps_ns"):
                if c in df.columns:
                    cols[c] = df[c].to_numpy(dtype=np.int64)
            if s == "C":
                prn = df["sat"].str[1:].astype(int).to_numpy()
                cols["geo"] = np.isin(prn, sorted(BDS_GEO_PRN))
            if s != "R":
                # (n_col, n_rec): a gather along axis 1 gives contiguous rows per parameter
                cols["_kep"] = np.ascontiguousarray(np.stack([cols[c] for c in _KEP_COLS], axis=0))
            self._cols[s] = cols

    # ------------------------------------------------------------ offsets
    def _system_offset(self, s, t_gps_ns):
        """(system time − GPS time) beyond the nominal offset of ctt.timescales, s; NaN when unknown.

        RINEX 3 TIME SYSTEM CORR lines are read with one convention for all of
        them, that of GPUT (IS-GPS-200 §20.3.3.5.2.4: t_UTC = t_GPS − Δt_LS − A0 − ...):
        T_target = T_source − nominal − (a0 + a1·(t − t_ref)). So GAGP/GPGA give
        GST − GPS = a0 (Galileo OS SIS ICD §5.1.8 GGTO), QZGP QZSS − GPS, GLGP
        GLONASS − GPS; otherwise the difference of two UTC corrections
        (BDUT − GPUT, QZUT − GPUT, GLUT − GPUT). A correction whose reference
        time is more than 7 days from the instant is treated as absent (merged
        files sometimes carry stale ones).
        """
        n = len(t_gps_ns)
        if s == "G":
            return np.zeros(n)
        corr = self.nav.header.time_corrections

        def ev(key):
            c = corr.get(key)
            if c is None:
                return None
            if not c.get("week"):
                return np.full(n, c["a0_s"]) if not c["a1_sps"] else None
            t_ref = (int(c["week"]) * 604800 + int(c["t_ref_s"])) * NS_PER_S
            if key.startswith("BD"):  # BDT week and seconds (BDS ICD): week 0 = GPS week 1356, BDT = GPS − 14 s
                t_ref += 1356 * 604800 * NS_PER_S + 14 * NS_PER_S
            dt = (t_gps_ns - t_ref) / 1e9
            return np.where(np.abs(dt) <= 7 * 86400, c["a0_s"] + c["a1_sps"] * dt, np.nan)

        def diff(a, b):
            va, vb = ev(a), ev(b)
            return None if va is None or vb is None else va - vb

        cands = {"E": [lambda: ev("GAGP"), lambda: ev("GPGA"), lambda: diff("GAUT", "GPUT")],
                 "J": [lambda: ev("QZGP"), lambda: diff("QZUT", "GPUT")],
                 "C": [lambda: diff("BDUT", "GPUT")],
                 "R": [lambda: ev("GLGP"), lambda: diff("GLUT", "GPUT")]}.get(s, [])
        for f in cands:
            v = f()
            if v is not None:
                return v
        return np.full(n, np.nan)

    # ------------------------------------------------------------ states
    def states(self, sats, t_ns, dt_s=0.0) -> SatStates:
        sats = np.asarray(sats).astype(str)
        n = sats.shape[0] if sats.ndim else 1
        sats = np.broadcast_to(sats, (n,))
        t_ns = np.broadcast_to(np.asarray(t_ns, dtype=np.int64), (n,))
        dt_s = np.broadcast_to(np.asarray(dt_s, dtype=np.float64), (n,))
        nan = np.full(n, np.nan)
        out = SatStates(
            pos_m=np.full((n, 3), np.nan), vel_mps=np.full((n, 3), np.nan), clock_s=nan.copy(),
            clock_drift_sps=nan.copy(), relativity_s=nan.copy(), tgd_s=nan.copy(), bgd_e5a_s=nan.copy(),
            bgd_e5b_s=nan.copy(), tgd1_s=nan.copy(), tgd2_s=nan.copy(), iode=np.full(n, -1, dtype=np.int64),
            status=np.full(n, UNSUPPORTED_SYSTEM, dtype=np.int64), toe_gps_ns=np.full(n, _I64MIN, dtype=np.int64),
            record=np.full(n, -1, dtype=np.int64), system=np.full(n, "", dtype="U1"),
            system_time_offset_s=nan.copy())
        lens = np.char.str_len(sats)
        chars = np.ascontiguousarray(sats.astype("U3")).view("U1").reshape(n, 3)
        out.system = chars[:, 0].copy()
        letters = out.system
        good_id = (lens == 3) & np.char.isdigit(chars[:, 1]) & np.char.isdigit(chars[:, 2])
        out.status[~good_id] = BAD_ID
        for s in _SCALE:
            rows = np.flatnonzero((letters == s) & good_id)
            if not len(rows):
                continue
            tab = self._tables.get(s)
            if tab is None:
                out.status[rows] = NO_EPHEMERIS
                continue
            tq = convert(t_ns[rows], "GPS", _SCALE[s])
            if tab.table is not None:
                rec, st = tab.lookup(sats[rows], tq)
            else:
                rec, st = tab.select(sats[rows], tq, self.allow_future)
            out.status[rows] = st
            out.system_time_offset_s[rows] = self._system_offset(s, t_ns[rows])
            okr = rec >= 0
            rows, rec, tq = rows[okr], rec[okr], tq[okr]
            if not len(rows):
                continue
            self._evaluate(s, rows, rec, tq, dt_s[rows], out)
        return out

    def _evaluate(self, s, rows, rec, tq, dts, out):
        cols = self._cols[s]
        out.record[rows] = rec
        out.toe_gps_ns[rows] = convert((cols["toc_ns"] if s == "R" else cols["toe_ns"])[rec], _SCALE[s], "GPS")
        out.iode[rows] = cols["iode"][rec].astype(np.int64) if "iode" in cols else -1
        if s == "R":
            dt = (tq - cols["toc_ns"][rec]) / 1e9 + dts
            # per record (not per row): each record is integrated once, see glonass_states_from_records
            r0 = np.stack([cols["x_m"], cols["y_m"], cols["z_m"]], axis=-1)
            v0 = np.stack([cols["vx_mps"], cols["vy_mps"], cols["vz_mps"]], axis=-1)
            a0 = np.stack([cols["ax_mps2"], cols["ay_mps2"], cols["az_mps2"]], axis=-1)
            pos, vel = glonass_states_from_records(rec, r0, v0, a0, dt)
            out.pos_m[rows] = pos
            out.vel_mps[rows] = vel
            gam = cols["gamma_n"][rec]
            out.clock_s[rows] = cols["minus_tau_n_s"][rec] + gam * dt
            out.clock_drift_sps[rows] = gam
            out.relativity_s[rows] = -2.0 * np.einsum("ij,ij->i", pos, vel) / C_MPS**2
            out.iode[rows] = np.rint(np.mod(cols["toc_ns"][rec] / 1e9 + 3 * 3600, 86400) / 900).astype(np.int64)
            out.status[rows] = OK
            return
        block = np.take(cols["_kep"], rec, axis=1)
        p = {c: block[j] for j, c in enumerate(_KEP_COLS)}
        tk = (tq - cols["toe_ns"][rec]) / 1e9 + dts
        tc = (tq - cols["toc_ns"][rec]) / 1e9 + dts
        if s in ("G", "J"):
            gm, we, F = GM_GPS, OMEGA_E_GPS, F_GPS
        elif s == "E":
            gm, we, F = GM_GAL, OMEGA_E_GAL, F_GAL
        else:
            gm, we, F = GM_BDS, OMEGA_E_BDS, F_BDS
        geo = cols["geo"][rec] if s == "C" else None
        pos, vel, sE = _kepler_states(p, tk, gm, we, geo)
        out.pos_m[rows] = pos
        out.vel_mps[rows] = vel
        out.clock_s[rows] = p["af0_s"] + tc * (p["af1_sps"] + tc * p["af2_sps2"])
        out.clock_drift_sps[rows] = p["af1_sps"] + 2.0 * tc * p["af2_sps2"]
        out.relativity_s[rows] = F * p["e"] * p["sqrt_a_sqrtm"] * sE
        if s in ("G", "J"):
            out.tgd_s[rows] = cols["tgd_s"][rec]
        elif s == "E":
            out.bgd_e5a_s[rows] = cols["bgd_e5a_s"][rec]
            out.bgd_e5b_s[rows] = cols["bgd_e5b_s"][rec]
        else:
            out.tgd1_s[rows] = cols["tgd1_s"][rec]
            out.tgd2_s[rows] = cols["tgd2_s"][rec]
        out.status[rows] = OK

    # ------------------------------------------------------------ group delays
    def group_delay_s(self, sats, signal, t_ns=None, dt_s=0.0, states=None):
        """Broadcast group-delay correction (s) to ADD to ``clock_s + relativity_s``.

        ``signal`` is a RINEX 3 observation code (``'C1C'``, ``'C2W'``, ``'C5Q'``,
        ``'C7Q'``, ``'C2I'``, ``'C6I'``...) or an iono-free pair given as a
        tuple ``('C1W', 'C2W')``. Pass ``states`` from :meth:`states` (or
        ``t_ns``/``dt_s`` to compute them). Rows where the broadcast message
        defines no group delay for the signal (e.g. GPS L5 without CNAV ISCs,
        Galileo E5a with I/NAV clocks, GLONASS) are NaN. See
        :func:`group_delay_correction_s` for the sources.
        """
        if states is None:
            if t_ns is None:
                raise ValueError("give states or t_ns")
            states = self.states(sats, t_ns, dt_s)
        return group_delay_correction_s(sats, states, signal, galileo_source=self.galileo_source)


def group_delay_correction_s(sats, states: SatStates, signal, *, galileo_source="inav"):
    """Group-delay correction (s) to add to the broadcast clock for ``signal`` (see
    :meth:`BroadcastOrbits.group_delay_s`): ``−Σ factor · parameter`` with the ICD
    factors of :func:`ctt.signals.group_delay_factor` (the one place they are
    written down). For an iono-free pair the terms combine like the codes, which
    is 0 for the pair the clock refers to (GPS L1/L2 P(Y), Galileo E1/E5b with
    I/NAV, E1/E5a with F/NAV). NaN where the broadcast message defines no
    delay for the signal (e.g. GPS L5 in LNAV) and on unusable rows.
    """
    from .signals import group_delay_factor

    letters = np.asarray(states.system).astype(str)
    out = np.full(len(states.status), np.nan)
    codes = tuple(signal) if isinstance(signal, (tuple, list)) else (str(signal),)
    params = {"tgd_s": states.tgd_s, "bgd_e1e5a_s": states.bgd_e5a_s, "bgd_e1e5b_s": states.bgd_e5b_s,
              "tgd1_s": states.tgd1_s, "tgd2_s": states.tgd2_s}
    bands = {c[1:2] for c in codes}
    for letter in np.unique(letters):
        rows = letters == letter
        if letter == "E" and (("5" in bands and galileo_source == "inav") or ("7" in bands and galileo_source == "fnav")):
            # the clock of these records refers to the other pair (OS SIS ICD §5.1.5): undefined
            continue
        try:
            gd = group_delay_factor(letter, codes, nav=galileo_source.upper())
        except ValueError:
            continue  # no broadcast model for this signal: NaN
        out[rows] = -np.broadcast_to(gd.correction_s(params), out.shape)[rows]
    out[states.status != OK] = np.nan
    return out



# ================================================================== precise products
# # Interpolation of precise products (:class:`PreciseOrbits`)
# --------------------------------------
# Positions: Lagrange polynomial through ``order_points`` (default 10, degree
# 9) SP3 nodes on a moving window centred on the requested instant (five
# nodes each side of the bracketing interval; shifted inwards at the ends of
# the span, never beyond them). Velocity is the analytic derivative of the
# same polynomial. The interpolation argument is float seconds relative to a
# node *near* the instant, computed from int64 nanosecond differences plus the
# ``dt_s`` offset, so nothing is lost to float seconds since 1980.
#
# Measured accuracy. (1) Leave-one-out (:func:`leave_one_out`) on the IGS
# final ``igs21385.sp3`` (15-min nodes, 32 GPS satellites, 2021-01-01):
# predicting each interior node from the five nodes on either side, i.e.
# across a 30-min hole, gives a 3D error of 2.9 mm RMS, 7.5 mm at the 99th
# percentile and 10.1 mm at worst (2752 node predictions). That is
# *pessimistic*: in normal use the instant lies inside a 15-min interval with
# no node removed. (2) Against an analytic GPS-like orbit (26 560 km, seen
# from the rotating Earth, 15-min nodes) the 10-point interpolant is within
# 0.12 mm for centred windows and 5.8 mm in the first/last interval of the
# span, where the window cannot be centred; the velocity within 0.5 µm/s
# (centred) and 0.05 mm/s (ends). So the interpolation is sub-cm for GPS at
# 15 min; ``tests/test_against_igs_products.py`` and ``tests/test_products.py``
# re-measure both.
#
# Clocks: linear interpolation between the two bracketing nodes (SP3 clocks,
# or the ``AS`` records of a RINEX clock file when one is given, which are
# usually denser: 30 s or 5 min). A missing node, nodes further apart than
# ``max_clock_gap_s`` (default 1.5 × the nominal interval) or an SP3 clock
# event flag on the later node stop the interpolation (status ``GAP`` or
# ``BAD_FLAG``). On 15-min nodes linear interpolation adds tens to hundreds of
# picoseconds: leave-one-out on igs21385.sp3 (linear over 30 min) gives
# 0.17 ns RMS, 0.02 to 0.45 ns per satellite, 1.3 ns at worst; use a 30 s
# clock file for sub-100 ps work.
#
# Outside the span of the data, or across a gap, the instant is marked
# (``OUT_OF_SPAN``, ``GAP``) and its values are NaN; :meth:`PreciseOrbits.states`
# with ``strict=True`` raises :class:`ctt.errors.OutOfSpanError` instead. There
# is no extrapolation.
#
# Conventions of the products (state them where they are used)
# ------------------------------------------------------------
# * SP3 positions are of the satellite's centre of mass (IGS convention),
#   ECEF in the file's frame (e.g. IGb14). Broadcast ephemerides give the
#   antenna phase centre; with an ANTEX file :class:`PreciseOrbits` moves the
#   position to the phase centre (:attr:`PreciseOrbits.pco_applied`).
# * IGS satellite clocks exclude the periodic relativistic effect; the user
#   adds ``−2 r·v / c²`` (IGS conventions; IERS Conventions 2010, §10, eq.
#   10.10 as recalled — from memory). It is returned as ``relativity_s``,
#   never folded into ``clock_s``.
# * IGS GPS clocks refer to the ionosphere-free combination of P1 and P2
#   (IGS convention, as are the broadcast af0..af2 per IS-GPS-200
#   §20.3.3.3.3.2); ``tgd_s`` is therefore NaN here: a single-frequency user
#   needs a differential code bias from elsewhere.

# ------------------------------------------------------------------ status codes

# Codes 0-2 share their meaning (and value) with ctt.orbits (OK, NO_EPHEMERIS,
# STALE); GAP and BAD_FLAG follow ctt.orbits' last code (BAD_ID = 8).
STATUS_OK = 0
STATUS_NO_DATA = 1
STATUS_OUT_OF_SPAN = 2
STATUS_GAP = 9
STATUS_BAD_FLAG = 10
#: Short names of the codes (as ctt.orbits.STATUS_NAMES).
PRECISE_STATUS_NAMES = {STATUS_OK: "OK", STATUS_NO_DATA: "NO_DATA", STATUS_OUT_OF_SPAN: "OUT_OF_SPAN",
                STATUS_GAP: "GAP", STATUS_BAD_FLAG: "BAD_FLAG"}

#: Reason text of each status code (for tables and logs).
PRECISE_STATUS_REASON = {
    STATUS_OK: "ok",
    STATUS_NO_DATA: "no data for this satellite in the product",
    STATUS_OUT_OF_SPAN: "instant outside the span of the product (no extrapolation)",
    STATUS_GAP: "missing node or gap in the product around the instant",
    STATUS_BAD_FLAG: "product flags a manoeuvre or clock event around the instant",
}


# ------------------------------------------------------------------ Sun



def sun_position_ecef(t_ns, dt_s=0.0) -> np.ndarray:
    """Low-precision Sun position, ECEF metres ``(N, 3)``, at GPS instants ``t_ns + dt_s``.

    The Astronomical Almanac's low-precision formula as implemented in
    :func:`ctt.geodesy.sun_moon_ecef` (about 0.01°; enough for satellite
    attitude, not for astronomy).
    """
    from .geodesy import sun_moon_ecef

    t = np.atleast_1d(np.asarray(t_ns, dtype=np.int64))
    dt = np.broadcast_to(np.asarray(dt_s, dtype=float), t.shape)
    t = t + np.rint(dt * 1e9).astype(np.int64)
    # evaluated once per whole second (rows share a handful of instants): within 0.5 s the
    # Earth-fixed Sun turns by at most 3.6e-5 rad, below the formula's own 0.01° (1.7e-4 rad)
    sec, inv = np.unique(np.rint(t / 1e9).astype(np.int64), return_inverse=True)
    return sun_moon_ecef(sec * 1_000_000_000, time_scale="GPS")[0][inv.ravel()]


def body_frame(pos_m: np.ndarray, sun_m: np.ndarray):
    """Unit vectors (i, j, k) of the nominal yaw-steering satellite body frame, ECEF.

    k points from the satellite to the Earth's centre, j = k × e / |k × e|
    with e the unit vector from the satellite to the Sun, and i = j × k, so
    that the Sun lies in the +x half of the x-z plane (the IGS/ANTEX frame,
    as in Kouba 2009, "A guide to using IGS products", from memory).
    """
    k = -pos_m / np.linalg.norm(pos_m, axis=-1, keepdims=True)
    e = sun_m - pos_m
    e = e / np.linalg.norm(e, axis=-1, keepdims=True)
    j = np.cross(k, e)
    j = j / np.linalg.norm(j, axis=-1, keepdims=True)
    i = np.cross(j, k)
    return i, j, k


# ------------------------------------------------------------------ interpolation kernels

def _lagrange(u: np.ndarray, nodes: np.ndarray):
    """Lagrange basis values and derivatives at ``u`` (N,) for nodes (N, K), same units.

    Returns ``(w, dw)`` each (N, K): value = Σ w_k y_k, derivative = Σ dw_k y_k.
    Numerators Π_{k≠j}(u − u_k) come from prefix and suffix products (and
    their derivatives by the product rule), so nothing divides by u − u_j
    and the basis is exact at the nodes. Loops run over the K window points
    only (vectorised over N); when every row has the same node pattern (a
    regular grid) the denominators are computed once.
    """
    n, k_pts = nodes.shape
    d = np.ascontiguousarray((u[:, None] - nodes).T)         # (K, N): rows are contiguous
    pre = np.empty((k_pts, n))
    dpre = np.empty((k_pts, n))
    suf = np.empty((k_pts, n))
    dsuf = np.empty((k_pts, n))
    pre[0], dpre[0], suf[-1], dsuf[-1] = 1.0, 0.0, 1.0, 0.0
    for j in range(1, k_pts):
        np.multiply(pre[j - 1], d[j - 1], out=pre[j])
        dpre[j] = dpre[j - 1] * d[j - 1] + pre[j - 1]
        i = k_pts - 1 - j
        np.multiply(suf[i + 1], d[i + 1], out=suf[i])
        dsuf[i] = dsuf[i + 1] * d[i + 1] + suf[i + 1]
    num = (pre * suf).T
    dnum = (dpre * suf + pre * dsuf).T
    regular = n > 0 and bool(np.all(nodes == nodes[:1]))
    base = nodes[:1] if regular else nodes
    diff = base[:, :, None] - base[:, None, :]               # (1 or N, K, K)
    idx = np.arange(k_pts)
    diff[:, idx, idx] = 1.0
    den = diff.prod(axis=2)
    return num / den, dnum / den


def _columns(names: np.ndarray, wanted: np.ndarray) -> np.ndarray:
    """Column of each wanted name in ``names`` (−1 where absent)."""
    if len(names) == 0:
        return np.full(wanted.shape, -1, dtype=np.int64)
    order = np.argsort(names)
    srt = names[order]
    pos = np.clip(np.searchsorted(srt, wanted), 0, len(srt) - 1)
    return np.where(srt[pos] == wanted, order[pos], -1).astype(np.int64)


def _max_gap_ns(times: np.ndarray, max_gap_s) -> int:
    if max_gap_s is not None:
        return int(round(max_gap_s * 1e9))
    if len(times) < 2:
        return 0
    return int(1.5 * float(np.median(np.diff(times))))


def _interp_linear(times, values, col, t_ns, dt_s, max_gap_ns, event, with_rate=False):
    """Linear interpolation of ``values[:, col]`` at ``t_ns + dt_s``; returns (value, status).

    With ``with_rate`` also the slope (units per second) of the interval used.

    ``event`` (epochs × names bool, or None) marks a discontinuity since the
    previous node (SP3 clock event flag): interpolating across it is refused.
    """
    n = len(t_ns)
    out = np.full(n, np.nan)
    rate = np.full(n, np.nan)
    status = np.full(n, STATUS_NO_DATA, dtype=np.int8)
    if len(times) == 0:
        return (out, status, rate) if with_rate else (out, status)
    has = col >= 0
    t_eff = t_ns + np.rint(dt_s * 1e9).astype(np.int64)
    inside = (t_eff >= times[0]) & (t_eff <= times[-1])
    status[has & ~inside] = STATUS_OUT_OF_SPAN
    m = has & inside
    if len(times) == 1:
        hit = m & (t_eff == times[0])
        out[hit] = values[0, col[hit]]
        status[hit] = np.where(np.isnan(out[hit]), STATUS_GAP, STATUS_OK)
        status[m & ~hit] = STATUS_OUT_OF_SPAN
        return (out, status, rate) if with_rate else (out, status)
    i0 = np.clip(np.searchsorted(times, t_eff, side="right") - 1, 0, len(times) - 2)
    i1 = i0 + 1
    c = np.where(m, col, 0)
    v0 = values[i0, c]
    v1 = values[i1, c]
    span = (times[i1] - times[i0]).astype(np.float64) / 1e9
    x = ((t_ns - times[i0]).astype(np.float64) / 1e9 + dt_s) / span
    at0 = x == 0.0
    at1 = x == 1.0
    val = np.where(at0, v0, np.where(at1, v1, v0 + (v1 - v0) * x))
    gap = np.isnan(val) | ((times[i1] - times[i0]) > max_gap_ns) & ~at0 & ~at1
    bad = np.zeros(n, dtype=bool)
    if event is not None:
        bad = event[i1, c] & ~at0
    out[m] = np.where(gap | bad, np.nan, val)[m]
    status[m] = np.where(gap, STATUS_GAP, np.where(bad, STATUS_BAD_FLAG, STATUS_OK))[m]
    if with_rate:
        rate[m] = np.where(gap | bad | np.isnan(v0 + v1), np.nan, (v1 - v0) / span)[m]
        return out, status, rate
    return out, status


def interpolate_clock_series(series: ClockSeries, names, t_ns, dt_s=0.0, max_gap_s: float | None = None):
    """Linear interpolation of a RINEX clock file's records at instants; returns ``(bias_s, status)``.

    ``series`` is :attr:`ClockData.satellites` or ``.stations``; statuses as
    :data:`PRECISE_STATUS_REASON` (a gap longer than ``max_gap_s``, default 1.5
    × the nominal interval, or an instant outside the records, gives NaN).
    """
    names = np.asarray(names, dtype=str)
    col = _columns(series.names, names)
    return _interp_linear(series.time_ns, series.bias_s, col, np.asarray(t_ns, np.int64),
                          np.broadcast_to(np.asarray(dt_s, float), names.shape),
                          _max_gap_ns(series.time_ns, max_gap_s), None)


# ------------------------------------------------------------------ states

@dataclasses.dataclass
class PreciseStates(SatStates):
    """:class:`ctt.orbits.SatStates` from precise products, plus what only they have.

    Shared fields: ``pos_m`` (N, 3) and ``vel_mps`` (N, 3) ECEF at
    ``t_ns + dt_s`` (GPS time); ``clock_s`` satellite clock minus the
    product's time scale (IGS time, aligned to GPS time, for every system:
    ``system_time_offset_s`` is therefore 0) *without* the periodic
    relativistic term; ``clock_drift_sps`` the slope of the clock interval
    used; ``relativity_s`` = −2 r·v / c² (IGS conventions / IERS Conventions
    2010 §10: add it to ``clock_s`` for the clock as transmitted); group
    delays ``tgd_s`` etc. NaN (IGS clocks refer to the iono-free P1/P2
    combination; a single-frequency user needs a code-bias product);
    ``iode``/``record`` −1 and ``toe_gps_ns`` int64 min (no ephemeris records);
    ``status`` codes of :data:`PRECISE_STATUS_NAMES` (worst of ``pos_status`` and
    ``clock_status``), reasons in :data:`PRECISE_STATUS_REASON`.

    Extra: ``sats``, ``t_ns``, ``dt_s`` echo the query; ``pos_status``,
    ``clock_status``; ``pco_applied`` (bool per row: moved to the phase centre).
    """

    sats: np.ndarray = None
    t_ns: np.ndarray = None
    dt_s: np.ndarray = None
    pos_status: np.ndarray = None
    clock_status: np.ndarray = None
    pco_applied: np.ndarray = None

    def reason(self, status=None):
        """Reason text of each row's status (or of the given codes)."""
        
        def one(k):  # codes this module does not use are ctt.orbits' codes
            return PRECISE_STATUS_REASON[k] if k in PRECISE_STATUS_REASON else str(reason(k))

        st = np.asarray(self.status if status is None else status)
        if st.ndim == 0:
            return one(int(st))
        return np.array([one(int(k)) for k in st.ravel()], dtype=object).reshape(st.shape)


#: ANTEX frequency pair whose iono-free combination gives the phase centre per system.
IF_FREQUENCIES = {"G": ("G01", "G02"), "E": ("E01", "E05"), "R": ("R01", "R02"),
                  "C": ("C02", "C06"), "J": ("J01", "J02"), "I": ("I05", "I09")}
#: Carrier frequencies (MHz) of the ANTEX frequency codes used above (system ICDs, common practice).
_FREQ_MHZ = {"G01": 1575.42, "G02": 1227.60, "G05": 1176.45, "E01": 1575.42, "E05": 1176.45,
             "E07": 1207.14, "R01": 1602.0, "R02": 1246.0, "C02": 1561.098, "C06": 1268.52,
             "C07": 1207.14, "J01": 1575.42, "J02": 1227.60, "I05": 1176.45, "I09": 2492.028}


class PreciseOrbits:
    """Satellite positions, velocities and clocks from precise products.

    ``sp3``: an :class:`SP3Data`, a path, or a sequence of them (adjacent
    files are merged so the span continues across midnight). ``clk``: a
    :class:`ClockData`, a path, or a sequence of them (merged by
    :func:`ctt.formats.rinex_clock.merge_clock`: the first file given wins
    at a shared edge epoch); its ``AS`` clocks replace the SP3 clocks.
    An instant outside every file is ``OUT_OF_SPAN`` and an interval longer
    than 1.5 × the median clock interval (a missing file or records) is
    ``GAP``: never extrapolated, never bridged.

    Satellite clocks are interpolated linearly between clock epochs.
    Leave-one-out error of that interpolation on real files
    (:func:`clock_leave_one_out`, predicting each epoch from its two
    neighbours, i.e. over twice the nominal interval, so an upper bound):
    IGS final 5-min clocks (igs16571.clk, GPS, 2011) 166 ps RMS (median
    80 ps, 95 % 345 ps); a centre's 30-s clocks (GRG0MGXFIN, 2020-177):
    45 ps GPS, 47 ps GLONASS, 4.8 ps Galileo RMS, and the same file thinned
    to 5-min nodes errs by 95 ps GPS, 86 ps GLONASS, 7.9 ps Galileo RMS at
    every 30-s instant (tests/test_multiday_products.py). Use 30-s clocks for
    carrier-phase work where the product has them: 5-min GPS clocks add about
    0.1 ns RMS, comparable with the final clocks' own 75 ps accuracy.
    ``antex``: an :class:`AntexData` or path; when given, positions are moved
    from the centre of mass to the antenna phase centre of the iono-free
    combination (:data:`IF_FREQUENCIES`) in the nominal yaw-steering attitude
    (:func:`body_frame`, Sun from :func:`sun_position_ecef`). The velocity is
    not corrected for the attitude rotation (≤ 1 mm/s). Without ANTEX
    :attr:`pco_applied` is False and :attr:`pco_note` says positions are of
    the centre of mass.
    """

    #: Status names of the rows (measure's flags): the broadcast codes plus the precise ones,
    #: so an instant beyond the product is 'out_of_span' (not the broadcast 'stale').
    STATUS_NAMES = {**STATUS_NAMES, **PRECISE_STATUS_NAMES}

    def __init__(self, sp3, clk=None, antex=None, *, order_points: int = 10,
                 max_clock_gap_s: float | None = None):
        if isinstance(sp3, (str, pathlib.Path)):
            sp3 = read_sp3(sp3)
        elif not isinstance(sp3, SP3Data):
            sp3 = merge_sp3([read_sp3(p) if isinstance(p, (str, pathlib.Path)) else p for p in sp3])
        if isinstance(clk, (str, pathlib.Path)):
            clk = read_clock(clk)
        elif clk is not None and not isinstance(clk, ClockData):
            clk = merge_clock([read_clock(p) if isinstance(p, (str, pathlib.Path)) else p for p in clk])
        if isinstance(antex, (str, pathlib.Path)):
            antex = read_antex(antex)
        if order_points < 2:
            raise ValueError("order_points must be at least 2")
        self.sp3 = sp3
        self.clk = clk
        self.antex = antex
        self.order_points = int(order_points)
        self.max_clock_gap_s = max_clock_gap_s
        self._node_gap_ns = int(1.5 * sp3.interval_s * 1e9) if len(sp3.time_ns) > 1 else 0
        self.pco_applied = antex is not None
        self._pco = {}
        if antex is not None:
            mid = int(sp3.time_ns[len(sp3.time_ns) // 2]) if len(sp3.time_ns) else 0
            for s in sp3.sats:
                blk = antex.offset(str(s), mid)
                if blk is None:
                    continue
                pco = _if_offset(str(s)[0], blk["pco_m"])
                if pco is not None:
                    self._pco[str(s)] = pco
            missing = [str(s) for s in sp3.sats if str(s) not in self._pco]
            self.pco_note = ("positions moved to the iono-free antenna phase centre with "
                             f"{antex.path}" + (f"; no offset for {', '.join(missing)}" if missing else ""))
        else:
            self.pco_note = ("no ANTEX file: positions are of the satellite centre of mass "
                             "(broadcast ephemerides give the antenna phase centre)")

    # -- positions
    def _positions(self, col, t_ns, dt_s):
        sp3 = self.sp3
        n = len(t_ns)
        pos = np.full((n, 3), np.nan)
        vel = np.full((n, 3), np.nan)
        status = np.full(n, STATUS_NO_DATA, dtype=np.int8)
        times = sp3.time_ns
        n_ep = len(times)
        has = col >= 0
        if n_ep < 2 or not has.any():
            return pos, vel, status
        has_any = np.zeros(n, dtype=bool)
        valid_col = ~np.isnan(sp3.pos_m[..., 0]).all(axis=0)
        has_any[has] = valid_col[col[has]]
        t_eff = t_ns + np.rint(dt_s * 1e9).astype(np.int64)
        inside = (t_eff >= times[0]) & (t_eff <= times[-1])
        status[has_any & ~inside] = STATUS_OUT_OF_SPAN
        m = has_any & inside
        if not m.any():
            return pos, vel, status
        K = min(self.order_points, n_ep)
        i0 = np.clip(np.searchsorted(times, t_eff[m], side="right") - 1, 0, n_ep - 2)
        start = np.clip(i0 - (K // 2 - 1), 0, n_ep - K)
        win = start[:, None] + np.arange(K)[None, :]          # (M, K) node indices
        c = col[m]
        ref = times[start]
        h = sp3.interval_s
        nodes = (times[win] - ref[:, None]).astype(np.float64) / 1e9 / h
        u = ((t_ns[m] - ref).astype(np.float64) / 1e9 + dt_s[m]) / h
        vals = sp3.pos_m[win, c[:, None]]                    # (M, K, 3)
        w, dw = _lagrange(u, nodes)
        p = np.einsum("mk,mkc->mc", w, vals)
        v = np.einsum("mk,mkc->mc", dw, vals) / h
        gap = np.isnan(vals).any(axis=(1, 2)) | (np.diff(times[win], axis=1) > self._node_gap_ns).any(axis=1)
        flag = sp3.manoeuvre[win, c[:, None]].any(axis=1)
        st = np.where(gap, STATUS_GAP, np.where(flag, STATUS_BAD_FLAG, STATUS_OK)).astype(np.int8)
        p[st != STATUS_OK] = np.nan
        v[st != STATUS_OK] = np.nan
        pos[m], vel[m], status[m] = p, v, st
        return pos, vel, status

    def states(self, sats, t_ns, dt_s=0.0, *, strict: bool = False):
        """States at ``t_ns + dt_s`` (GPS time) for each (satellite, instant) row.

        ``sats`` (N,) ids, ``t_ns`` (N,) int64, ``dt_s`` scalar or (N,)
        float64 seconds. Rows that cannot be served are NaN with a status
        code; with ``strict=True`` any row outside the span or across a gap
        raises :class:`OutOfSpanError` naming the first such row.
        """
        sats = np.asarray(sats, dtype=str).reshape(-1)
        t_ns = np.asarray(t_ns, dtype=np.int64).reshape(-1)
        if t_ns.shape != sats.shape:
            t_ns = np.broadcast_to(t_ns, sats.shape).copy()
        dt_s = np.broadcast_to(np.asarray(dt_s, dtype=np.float64), sats.shape).astype(np.float64)
        col = _columns(self.sp3.sats, sats)
        pos, vel, pst = self._positions(col, t_ns, dt_s)
        if self.clk is not None:
            cs = self.clk.satellites
            ccol = _columns(cs.names, sats)
            clock, cst, drift = _interp_linear(cs.time_ns, cs.bias_s, ccol, t_ns, dt_s,
                                               _max_gap_ns(cs.time_ns, self.max_clock_gap_s), None, True)
        else:
            clock, cst, drift = _interp_linear(self.sp3.time_ns, self.sp3.clock_s, col, t_ns, dt_s,
                                               _max_gap_ns(self.sp3.time_ns, self.max_clock_gap_s),
                                               self.sp3.clock_event, True)
        applied = np.zeros(len(sats), dtype=bool)
        if self._pco:
            off = np.array([self._pco.get(s, (np.nan, np.nan, np.nan)) for s in np.unique(sats)])
            uniq, inv = np.unique(sats, return_inverse=True)
            body = off[inv]
            have = ~np.isnan(body).any(axis=1) & (pst == STATUS_OK)
            if have.any():
                sun = sun_position_ecef(t_ns[have], dt_s[have])
                ex, ey, ez = body_frame(pos[have], sun)
                b = body[have]
                pos[have] = pos[have] + b[:, :1] * ex + b[:, 1:2] * ey + b[:, 2:3] * ez
                applied[have] = True
        rel = -2.0 * np.einsum("nc,nc->n", pos, vel) / C_MPS**2
        status = np.where(pst != STATUS_OK, pst, cst).astype(np.int64)
        if strict:
            bad = np.flatnonzero(np.isin(status, (STATUS_OUT_OF_SPAN, STATUS_GAP)))
            if len(bad):
                k = int(bad[0])
                from .timescales import to_iso
                raise OutOfSpanError(
                    f"{self.sp3.path}: {sats[k]} at {to_iso(int(t_ns[k]), 3, ' GPS')}: {PRECISE_STATUS_REASON[int(status[k])]}"
                    f" (product spans {to_iso(int(self.sp3.time_ns[0]), 0, '')} to "
                    f"{to_iso(int(self.sp3.time_ns[-1]), 0, '')} GPS; {len(bad)} rows affected)")
        n = len(sats)
        nan = np.full(n, np.nan)
        return PreciseStates(
            pos_m=pos, vel_mps=vel, clock_s=clock, clock_drift_sps=drift, relativity_s=rel,
            tgd_s=nan.copy(), bgd_e5a_s=nan.copy(), bgd_e5b_s=nan.copy(), tgd1_s=nan.copy(), tgd2_s=nan.copy(),
            iode=np.full(n, -1, dtype=np.int64), status=status,
            toe_gps_ns=np.full(n, np.iinfo(np.int64).min, dtype=np.int64), record=np.full(n, -1, dtype=np.int64),
            system=sats.astype("U1"),
            system_time_offset_s=np.zeros(n),
            sats=sats, t_ns=t_ns, dt_s=dt_s, pos_status=pst, clock_status=cst, pco_applied=applied)

    @property
    def span_ns(self):
        """(first, last) instant of the orbit data, GPS ns."""
        return int(self.sp3.time_ns[0]), int(self.sp3.time_ns[-1])


def _if_offset(system: str, pco: dict):
    """Iono-free combination of two frequencies' offsets (body frame, m); one frequency if alone."""
    f1, f2 = IF_FREQUENCIES.get(system, (None, None))
    if f1 in pco and f2 in pco and f1 in _FREQ_MHZ and f2 in _FREQ_MHZ:
        a, b = _FREQ_MHZ[f1] ** 2, _FREQ_MHZ[f2] ** 2
        return tuple((a * np.array(pco[f1]) - b * np.array(pco[f2])) / (a - b))
    for f in (f1, f2):
        if f in pco:
            return tuple(pco[f])
    return None


# ------------------------------------------------------------------ diagnostics

def leave_one_out(sp3: SP3Data, order_points: int = 10):
    """Leave-one-out interpolation errors of an SP3 file's own nodes.

    For each epoch with ``order_points // 2`` nodes on either side, predict
    it from those neighbours (the node itself removed) and compare with the
    file. Returns ``(pos_err_m (E, S, 3), clock_err_s (E, S), epochs)``
    where ``epochs`` are the indices predicted; the clock prediction is
    linear between the two neighbours (a 2 × interval span, pessimistic).
    NaN where a neighbour or the node itself is missing.
    """
    n_ep = len(sp3.time_ns)
    half = order_points // 2
    epochs = np.arange(half, n_ep - half)
    if not len(epochs):
        return np.zeros((0, len(sp3.sats), 3)), np.zeros((0, len(sp3.sats))), epochs
    offs = np.concatenate([np.arange(-half, 0), np.arange(1, half + 1)])
    win = epochs[:, None] + offs[None, :]                                   # (E, K)
    h = sp3.interval_s
    ref = sp3.time_ns[epochs]
    nodes = (sp3.time_ns[win] - ref[:, None]).astype(np.float64) / 1e9 / h
    w, _ = _lagrange(np.zeros(len(epochs)), nodes)                          # (E, K)
    pred = np.einsum("ek,eksc->esc", w, sp3.pos_m[win])
    pos_err = pred - sp3.pos_m[epochs]
    t0, t1 = sp3.time_ns[epochs - 1], sp3.time_ns[epochs + 1]
    x = ((ref - t0) / (t1 - t0)).astype(np.float64)[:, None]
    c_pred = sp3.clock_s[epochs - 1] + (sp3.clock_s[epochs + 1] - sp3.clock_s[epochs - 1]) * x
    return pos_err, c_pred - sp3.clock_s[epochs], epochs


def clock_interpolation_error(series: ClockSeries, stride: int = 2, max_gap_s: float | None = None):
    """Errors of linear clock interpolation measured on a clock file's own epochs.

    Keeps every ``stride``-th epoch as nodes, interpolates linearly (as
    :meth:`PreciseOrbits.states` does) at the epochs in between and compares
    with the file's values there. ``stride=2`` is leave-one-out: each dropped
    epoch is predicted from its two neighbours (over twice the file's
    interval); ``stride=10`` on a 30-s file gives the error of 5-min clocks at
    every 30-s instant. Returns ``(err_s (E, S), times_ns (E,))`` for the
    predicted epochs (NaN where a node or the value is missing or the nodes
    are further apart than ``max_gap_s``, default 1.5 × ``stride`` × the
    median interval). Vectorised over epochs and satellites.
    """
    t = series.time_ns
    if len(t) < stride + 1 or stride < 2:
        return np.zeros((0, len(series.names))), np.zeros(0, np.int64)
    node_idx = np.arange(0, len(t), stride)
    pred_idx = np.setdiff1d(np.arange(node_idx[0], node_idx[-1]), node_idx)
    k = np.searchsorted(node_idx, pred_idx, side="right") - 1
    i0, i1 = node_idx[k], node_idx[k + 1]
    span_ns = (t[i1] - t[i0])
    limit = (max_gap_s * 1e9 if max_gap_s is not None
             else 1.5 * stride * float(np.median(np.diff(t))))
    x = ((t[pred_idx] - t[i0]) / span_ns).astype(float)[:, None]
    pred = series.bias_s[i0] + (series.bias_s[i1] - series.bias_s[i0]) * x
    err = pred - series.bias_s[pred_idx]
    err[span_ns > limit] = np.nan
    return err, t[pred_idx]


# ------------------------------------------------------------------ satellite eclipses

#: Mean equatorial radius of the Earth for the shadow test, m (IERS Conventions 2010, Table 1.1).
R_EARTH_M = 6378136.6


def in_earth_shadow(sat_ecef_m, sun_ecef_m):
    """True where a satellite is in the Earth's shadow (cylindrical model), vectorised.

    The satellite is shadowed when it is on the night side (r·ŝ < 0) and
    closer to the Earth–Sun line than the Earth's radius,
    |r − (r·ŝ)ŝ| < R_E (the cylindrical shadow of Kouba 2009, "A guide to
    using IGS products", eclipse section, from memory; it includes the
    penumbra's inner part and ignores the ~0.5° Sun disc, a few seconds of
    eclipse at GPS heights).
    """
    r = np.asarray(sat_ecef_m, dtype=float)
    sun = np.asarray(sun_ecef_m, dtype=float)
    s_hat = sun / np.linalg.norm(sun, axis=-1, keepdims=True)
    along = np.einsum("...i,...i->...", r, s_hat)
    perp = np.linalg.norm(r - along[..., None] * s_hat, axis=-1)
    return (along < 0.0) & (perp < R_EARTH_M)


def eclipse_flags(sats, t_ns, sat_ecef_m, sun_ecef_m, *, after_s: float = 1800.0):
    """Flag rows of satellites in the Earth's shadow and for ``after_s`` after leaving it.

    Flat rows (N,) of satellite id, GPS instant and positions. Returns
    ``(in_shadow, flagged)``: flagged = in shadow, or less than ``after_s``
    (default 30 min) after the satellite's last shadowed row: its yaw is not
    nominal during the eclipse and the post-eclipse manoeuvre (common
    practice for GPS Block IIA; applied to every satellite here, the safe
    side). Vectorised: rows are sorted by satellite and time, and the last
    shadow time is a running maximum within each satellite.
    """
    sats = np.asarray(sats).astype(str)
    t = np.asarray(t_ns, dtype=np.int64)
    shadow = in_earth_shadow(sat_ecef_m, sun_ecef_m)
    order = np.lexsort((t, sats))
    s_sorted, t_sorted, sh_sorted = sats[order], t[order], shadow[order]
    new_sat = np.r_[True, s_sorted[1:] != s_sorted[:-1]]
    neg = np.iinfo(np.int64).min // 4
    last = np.where(sh_sorted, t_sorted, neg)
    starts = np.flatnonzero(new_sat)
    run = np.empty_like(last)
    for a, b in zip(starts, np.r_[starts[1:], len(last)]):   # one loop per satellite, not per row
        run[a:b] = np.maximum.accumulate(last[a:b])
    recent = (run > neg) & (t_sorted - run <= int(after_s * 1e9))
    flagged_sorted = sh_sorted | recent
    flagged = np.empty_like(flagged_sorted)
    flagged[order] = flagged_sorted
    return shadow, flagged


__all__ = ["BroadcastOrbits", "SatStates", "STATUS_NAMES", "reason", "solve_kepler", "glonass_propagate",
           "group_delay_correction_s", "F_GPS", "GM_GPS", "OMEGA_E_GPS", "C_MPS",
           "PreciseOrbits", "PreciseStates", "PRECISE_STATUS_NAMES", "PRECISE_STATUS_REASON",
           "sun_position_ecef", "body_frame", "leave_one_out", "clock_interpolation_error", "in_earth_shadow", "eclipse_flags", "R_EARTH_M", "IF_FREQUENCIES", "interpolate_clock_series"]
