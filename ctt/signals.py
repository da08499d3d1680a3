"""GNSS signals: carrier frequencies, code priorities, the single-frequency and
ionosphere-free choices, code biases and broadcast group-delay parameters.

Codes are RINEX 3 observation codes (``C1C``: C = pseudorange, 1 = band,
C = tracking mode). Satellite ids are RINEX 3 (``G07``, ``R12``...).

Frequencies (MHz)
-----------------
=======  ======================  ===============================================
system   band -> frequency       source
=======  ======================  ===============================================
GPS      1 L1 1575.42, 2 L2      IS-GPS-200 §3.3.1.1; IS-GPS-705 (L5)
         1227.60, 5 L5 1176.45
Galileo  1 E1 1575.42, 5 E5a     Galileo OS SIS ICD §2.3
         1176.45, 7 E5b 1207.14,
         8 E5 1191.795, 6 E6
         1278.75
BeiDou   2 B1I 1561.098, 1 B1C    BDS-SIS-ICD-B1I, -B3I, -B1C, -B2a
         1575.42, 5 B2a 1176.45,
         7 B2I/B2b 1207.14, 8 B2
         1191.795, 6 B3I 1268.52
GLONASS  1 G1 1602 + k·0.5625,    GLONASS ICD (FDMA, k = −7..+6); G1a/G2a/G3
         2 G2 1246 + k·0.4375,    CDMA 1600.995/1248.06/1202.025
         4 G1a, 6 G2a, 3 G3
QZSS     1, 2, 5 as GPS; 6 L6     IS-QZSS-PNT
         1278.75
SBAS     1 L1, 5 L5               RINEX 3.05 Table
NavIC    5 L5 1176.45, 9 S        IRNSS SPS ICD
         2492.028
=======  ======================  ===============================================

The two processing choices
--------------------------
*single* uses one code per satellite (the first available of the band's
priority list) and needs an ionosphere model; *dual* forms the ionosphere-free
combination ``P_IF = (f1² P1 − f2² P2)/(f1² − f2²)`` which removes the first-
order ionosphere at the cost of noise amplification
``sqrt(a1² + a2²)`` with ``a1 = f1²/(f1² − f2²)``, ``a2 = −f2²/(f1² − f2²)``
(2.98 for GPS L1/L2 with equal noise on both codes).

Code biases and mixing C1C with C2W
-----------------------------------
GPS broadcast clocks refer to the L1/L2 P(Y) (C1W/C2W) ionosphere-free
combination (IS-GPS-200 §20.3.3.3.3.2). A receiver without P1 (many timing
receivers, and the RINEX 2 files with ``C1`` but no ``P1``) gives
``C1C = C1W + DCB(C1C−C1W)``. In ``P_IF = a1·C1C + a2·C2W`` that bias enters
as ``a1 · DCB = f1²/(f1² − f2²) · DCB ≈ 2.546 · DCB`` for L1/L2 — with
satellite DCB(C1C−C1W) of up to ~±2 ns (from memory; published monthly by
the analysis centres) this is up to ~5 ns per satellite, and it does *not*
cancel in common view unless both stations use the same codes. Apply a bias
file (:func:`ctt.formats.bias_sinex.read_bias_sinex`, :func:`code_bias_s`) to map C1C onto C1W, or
make sure both stations of a pair use the same code pair. For single
frequency the C1C user's error is the DCB itself (factor 1).

For the PPP estimator
---------------------
:func:`phase_windup_cycles` (Wu et al. 1993; continuous per satellite along
the epoch axis), :func:`receiver_antenna_range_m` /
:func:`iono_free_antenna_range_m` (receiver PCO + PCV along the line of sight,
ANTEX), :func:`satellite_antenna_pcv_m` / :func:`iono_free_satellite_pcv_m`
(nadir-dependent satellite PCV), :func:`iono_free_offset_m`,
:func:`antex_frequency_hz`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .formats.bias_sinex import BiasSet

MHZ = 1.0e6

#: Frequencies in Hz per system letter and RINEX band digit (GLONASS FDMA bands separately).
BAND_FREQUENCY_HZ = {
    "G": {"1": 1575.42 * MHZ, "2": 1227.60 * MHZ, "5": 1176.45 * MHZ},
    "E": {"1": 1575.42 * MHZ, "5": 1176.45 * MHZ, "7": 1207.14 * MHZ, "8": 1191.795 * MHZ,
          "6": 1278.75 * MHZ},
    "C": {"2": 1561.098 * MHZ, "1": 1575.42 * MHZ, "5": 1176.45 * MHZ, "7": 1207.14 * MHZ,
          "8": 1191.795 * MHZ, "6": 1268.52 * MHZ},
    "R": {"4": 1600.995 * MHZ, "6": 1248.06 * MHZ, "3": 1202.025 * MHZ},
    "J": {"1": 1575.42 * MHZ, "2": 1227.60 * MHZ, "5": 1176.45 * MHZ, "6": 1278.75 * MHZ},
    "S": {"1": 1575.42 * MHZ, "5": 1176.45 * MHZ},
    "I": {"5": 1176.45 * MHZ, "9": 2492.028 * MHZ},
}
#: GLONASS FDMA: f = base + k · step (GLONASS ICD, k the frequency channel number).
GLONASS_FDMA = {"1": (1602.0 * MHZ, 0.5625 * MHZ), "2": (1246.0 * MHZ, 0.4375 * MHZ)}

#: Band names per system and RINEX band digit (for messages and priority tables).
BAND_NAME = {
    "G": {"1": "L1", "2": "L2", "5": "L5"},
    "E": {"1": "E1", "5": "E5a", "7": "E5b", "8": "E5", "6": "E6"},
    "C": {"2": "B1I", "1": "B1C", "5": "B2a", "7": "B2I", "8": "B2", "6": "B3I"},
    "R": {"1": "G1", "2": "G2", "4": "G1a", "6": "G2a", "3": "G3"},
    "J": {"1": "L1", "2": "L2", "5": "L5", "6": "L6"},
    "S": {"1": "L1", "5": "L5"},
    "I": {"5": "L5", "9": "S"},
}

F_L1_HZ = BAND_FREQUENCY_HZ["G"]["1"]
F_L2_HZ = BAND_FREQUENCY_HZ["G"]["2"]
#: IS-GPS-200 §20.3.3.3.3.2: γ = (f_L1/f_L2)² = (77/60)²
GAMMA_L1L2 = (77.0 / 60.0) ** 2

#: Default code priorities per system and band, suited to timing receivers:
#: the civil code first (what a timing receiver's own clock solution uses), the
#: semi-codeless P(Y)/W or pilot/data variants after it.
DEFAULT_PRIORITIES: dict[str, dict[str, tuple[str, ...]]] = {
    "G": {"L1": ("C1C", "C1W"), "L2": ("C2W", "C2L", "C2X"), "L5": ("C5Q", "C5X", "C5I")},
    "E": {"E1": ("C1C", "C1X"), "E5a": ("C5Q", "C5X"), "E5b": ("C7Q", "C7X")},
    "C": {"B1I": ("C2I",), "B3I": ("C6I",), "B2I": ("C7I",), "B1C": ("C1P", "C1X"), "B2a": ("C5P", "C5X")},
    "R": {"G1": ("C1C", "C1P"), "G2": ("C2C", "C2P")},
    "J": {"L1": ("C1C",), "L2": ("C2L", "C2X"), "L5": ("C5Q", "C5X")},
}
#: Default (first, second) bands per system: single frequency uses the first;
#: the ionosphere-free combination uses both. These are the bands the
#: broadcast clocks refer to (GPS L1/L2 P(Y); Galileo F/NAV E1/E5a; BeiDou
#: B3I as clock reference with B1I; GLONASS G1/G2).
DEFAULT_BANDS: dict[str, tuple[str, str]] = {
    "G": ("L1", "L2"), "E": ("E1", "E5a"), "C": ("B1I", "B3I"), "R": ("G1", "G2"), "J": ("L1", "L2"),
}


def _band_digit(system: str, band: str) -> str:
    for digit, name in BAND_NAME.get(system, {}).items():
        if name == band:
            return digit
    raise ValueError(f"system {system!r} has no band {band!r} (known: {sorted(BAND_NAME.get(system, {}).values())})")


def _glonass_k_array(sats, glonass_k):
    """Per-satellite k (float, NaN if unknown) from a dict {sat: k} or an array aligned with sats."""
    if glonass_k is None:
        return np.full(sats.shape, np.nan)
    if isinstance(glonass_k, dict):
        return np.array([glonass_k.get(s, np.nan) for s in sats.ravel()], dtype=float).reshape(sats.shape)
    k = np.asarray(glonass_k, dtype=float)
    return np.broadcast_to(k, sats.shape)


def frequency_hz(sat_ids, code, glonass_k=None):
    """Carrier frequency (Hz) of ``code`` for each satellite, vectorised.

    ``sat_ids``: a str or array of RINEX 3 satellite ids; ``code``: a RINEX 3
    code (``"C1C"``, ``"L2W"``), a band digit (``"1"``) or an array of codes
    aligned with ``sat_ids``. ``glonass_k``: frequency channel numbers for
    GLONASS FDMA satellites, as ``{sat: k}`` (e.g. from the RINEX 3 ``GLONASS
    SLOT / FRQ #`` header or the navigation records) or an array aligned with
    ``sat_ids``. Raises ``ValueError`` for an unknown band or a GLONASS FDMA
    satellite without k.
    """
    sats0 = np.asarray(sat_ids, dtype=str)
    sats = np.atleast_1d(sats0)
    codes = np.broadcast_to(np.asarray(code, dtype=str), sats.shape)
    systems = np.array([s[:1] for s in sats.ravel()], dtype="<U1").reshape(sats.shape)
    digits = np.array([c[1] if len(c) >= 2 else c[:1] for c in codes.ravel()], dtype="<U1").reshape(sats.shape)
    out = np.full(sats.shape, np.nan)
    k = _glonass_k_array(sats, glonass_k)
    for sys_letter in np.unique(systems):
        in_sys = systems == sys_letter
        table = BAND_FREQUENCY_HZ.get(str(sys_letter), {})
        for dig in np.unique(digits[in_sys]):
            sel = in_sys & (digits == dig)
            if sys_letter == "R" and dig in GLONASS_FDMA:
                base, step = GLONASS_FDMA[str(dig)]
                kk = k[sel]
                if np.any(np.isnan(kk)):
                    missing = sorted(set(sats[sel][np.isnan(kk)].ravel().tolist()))
                    raise ValueError(f"GLONASS frequency channel k unknown for {missing} "
                                     "(give glonass_k from the obs header or navigation data)")
                out[sel] = base + kk * step
            elif str(dig) in table:
                out[sel] = table[str(dig)]
            else:
                raise ValueError(f"no carrier frequency for system {sys_letter!r} band {dig!r}")
    if sats0.ndim == 0:
        return float(out[0])
    return out


# ---------------------------------------------------------------- code selection

@dataclass(frozen=True)
class CodeChoice:
    """Per-satellite codes chosen for processing ('' where none is available)."""

    sats: np.ndarray
    mode: str  #: "single" or "dual"
    band1: np.ndarray
    code1: np.ndarray
    band2: np.ndarray
    code2: np.ndarray
    priorities: dict = field(repr=False, default_factory=dict)

    @property
    def usable(self) -> np.ndarray:
        """True where the satellite has every code the mode needs."""
        ok = self.code1 != ""
        if self.mode == "dual":
            ok &= self.code2 != ""
        return ok


def _pick(obs, col, candidates, min_fraction):
    """First candidate code with at least ``min_fraction`` of the best candidate's epoch count."""
    counts = [int(np.count_nonzero(np.isfinite(obs[c][:, col]))) if c in obs else 0 for c in candidates]
    best = max(counts, default=0)
    if best == 0:
        return ""
    for c, n in zip(candidates, counts):
        if n >= min_fraction * best:
            return c
    return ""  # unreachable: the best itself qualifies


def select_codes(obs, sats, mode="dual", *, priorities=None, bands=None, min_fraction=0.8) -> CodeChoice:
    """Choose, per satellite, the code (single) or code pair (dual) to process.

    ``obs``: ``{code: (n_epoch, n_sat) array}`` (NaN where absent) as in
    ``ObsData.obs``; ``sats``: the ``n_sat`` satellite ids. For each satellite
    and band, the first code of the priority list whose number of valid
    epochs is at least ``min_fraction`` of the best-covered code of that band
    is taken (so a sparsely tracked preferred code does not win over a fully
    tracked second choice). One code per satellite for the whole file keeps
    the code biases constant along a track. ``priorities`` overrides
    :data:`DEFAULT_PRIORITIES` per system (``{"G": {"L1": ("C1W", "C1C")}}``)
    and ``bands`` overrides :data:`DEFAULT_BANDS`. Systems without a band
    definition get ``''``. The loop runs over satellites × candidate codes
    (tens), each step a vectorised count over the epochs.
    """
    if mode not in ("single", "dual"):
        raise ValueError(f"mode must be 'single' or 'dual', not {mode!r}")
    pri = {s: dict(v) for s, v in DEFAULT_PRIORITIES.items()}
    for s, v in (priorities or {}).items():
        pri.setdefault(s, {}).update({b: tuple(c) for b, c in v.items()})
    bnd = dict(DEFAULT_BANDS)
    bnd.update(bands or {})
    sats = np.asarray(sats, dtype=str)
    n = sats.size
    b1 = np.full(n, "", dtype="<U4")
    b2 = np.full(n, "", dtype="<U4")
    c1 = np.full(n, "", dtype="<U3")
    c2 = np.full(n, "", dtype="<U3")
    for j, sat in enumerate(sats):
        sys_letter = sat[:1]
        if sys_letter not in bnd or sys_letter not in pri:
            continue
        first, second = bnd[sys_letter]
        b1[j] = first
        c1[j] = _pick(obs, j, pri[sys_letter].get(first, ()), min_fraction)
        if mode == "dual":
            b2[j] = second
            c2[j] = _pick(obs, j, pri[sys_letter].get(second, ()), min_fraction)
    return CodeChoice(sats=sats, mode=mode, band1=b1, code1=c1, band2=b2, code2=c2, priorities=pri)


def gather(obs, codes):
    """``(n_epoch, n_sat)`` array taking, for each satellite column j, ``obs[codes[j]][:, j]``
    (NaN where the code is '' or absent). Loops over the distinct codes only."""
    codes = np.asarray(codes, dtype=str)
    n_epoch = next(iter(obs.values())).shape[0] if obs else 0
    out = np.full((n_epoch, codes.size), np.nan)
    for c in np.unique(codes):
        if c == "" or c not in obs:
            continue
        cols = codes == c
        out[:, cols] = obs[c][:, cols]
    return out


# ---------------------------------------------------------------- combinations

def iono_free_coefficients(f1_hz, f2_hz):
    """``(a1, a2)`` of ``P_IF = a1 P1 + a2 P2``: a1 = f1²/(f1²−f2²), a2 = −f2²/(f1²−f2²)."""
    f1 = np.asarray(f1_hz, dtype=float) ** 2
    f2 = np.asarray(f2_hz, dtype=float) ** 2
    return f1 / (f1 - f2), -f2 / (f1 - f2)


def iono_free(p1, p2, f1_hz, f2_hz):
    """Ionosphere-free code combination ``(f1² P1 − f2² P2)/(f1² − f2²)`` (broadcasting)."""
    a1, a2 = iono_free_coefficients(f1_hz, f2_hz)
    return a1 * np.asarray(p1, dtype=float) + a2 * np.asarray(p2, dtype=float)


def iono_free_noise_factor(f1_hz, f2_hz, sigma_ratio=1.0):
    """σ(P_IF)/σ(P1) for independent code noise with σ(P2) = sigma_ratio · σ(P1):
    ``sqrt(a1² + (a2·sigma_ratio)²)``; 2.978 for GPS L1/L2 with equal noise."""
    a1, a2 = iono_free_coefficients(f1_hz, f2_hz)
    return np.sqrt(a1 ** 2 + (a2 * sigma_ratio) ** 2)


def dcb_iono_free_factor(f1_hz, f2_hz):
    """Factor by which a bias on the first code enters the ionosphere-free combination
    (a1 = f1²/(f1² − f2²); ≈ 2.546 for GPS L1/L2, see the module notes)."""
    return iono_free_coefficients(f1_hz, f2_hz)[0]


@dataclass(frozen=True)
class Pseudorange:
    """The pseudorange each satellite is processed with, and how it was formed."""

    value_m: np.ndarray  #: (n_epoch, n_sat)
    mode: str
    code1: np.ndarray
    code2: np.ndarray
    f1_hz: np.ndarray  #: (n_sat,)
    f2_hz: np.ndarray  #: (n_sat,), NaN in single mode
    noise_factor: np.ndarray  #: (n_sat,) σ(value)/σ(P1)


def processing_pseudorange(obs, choice: CodeChoice, glonass_k=None, bias_m1=None, bias_m2=None) -> Pseudorange:
    """Form the single-frequency code or the ionosphere-free combination per satellite.

    ``bias_m1`` / ``bias_m2``: optional per-satellite code biases in metres
    (``(n_sat,)``) *subtracted* from the first / second code before combining
    (e.g. ``C_MPS * code_bias_s(...)`` from a Bias-SINEX file).
    """
    sats = choice.sats
    p1, f1 = _code_and_frequency(obs, sats, choice.code1, glonass_k, bias_m1)
    if choice.mode == "single":
        return Pseudorange(p1, "single", choice.code1, choice.code2, f1, np.full(sats.size, np.nan),
                           np.ones(sats.size))
    p2, f2 = _code_and_frequency(obs, sats, choice.code2, glonass_k, bias_m2)
    with np.errstate(invalid="ignore", divide="ignore"):
        value = iono_free(p1, p2, f1[None, :], f2[None, :])
        noise = iono_free_noise_factor(f1, f2)
    return Pseudorange(value, "dual", choice.code1, choice.code2, f1, f2, noise)


def _code_and_frequency(obs, sats, codes, glonass_k, bias_m):
    """Per-satellite code values (bias subtracted) and the carrier frequency of each code."""
    p = gather(obs, codes)
    f = np.full(sats.size, np.nan)
    has = codes != ""
    if has.any():
        f[has] = frequency_hz(sats[has], codes[has], _subset_k(glonass_k, has, sats))
    if bias_m is not None:
        p = p - np.asarray(bias_m, dtype=float)[None, :]
    return p, f


def _subset_k(glonass_k, mask, sats):
    if glonass_k is None or isinstance(glonass_k, dict):
        return glonass_k
    return np.broadcast_to(np.asarray(glonass_k, dtype=float), sats.shape)[mask]


# ---------------------------------------------------------------- broadcast group delays

@dataclass(frozen=True)
class GroupDelay:
    """Broadcast group-delay terms for the codes used: the satellite clock for
    these codes is ``sat_clock − Σ factor · parameter`` (parameters in seconds
    as broadcast). ``terms`` is empty when no correction applies."""

    system: str
    codes: tuple
    terms: tuple  #: ((parameter name, factor), ...)
    reference: str  #: the ICD equation the factors come from

    @property
    def parameter(self):
        """The single parameter name (None if no term); error if there are two."""
        if not self.terms:
            return None
        if len(self.terms) > 1:
            raise ValueError(f"{self.system} {self.codes}: two group-delay parameters, use .terms")
        return self.terms[0][0]

    @property
    def factor(self) -> float:
        if not self.terms:
            return 0.0
        if len(self.terms) > 1:
            raise ValueError(f"{self.system} {self.codes}: two group-delay parameters, use .terms")
        return self.terms[0][1]

    def correction_s(self, params: dict):
        """``Σ factor · params[name]`` (broadcasts over arrays of parameters)."""
        total = 0.0
        for name, f in self.terms:
            total = total + f * np.asarray(params[name], dtype=float)
        return total


def _single_band_terms(system, band, nav):
    """Per-band terms: the satellite clock for a single-frequency user of ``band``."""
    if system in ("G", "J"):
        # IS-GPS-200 §20.3.3.3.3.2: (Δt_SV)_L1P(Y) = Δt_SV − T_GD; (Δt_SV)_L2P(Y) = Δt_SV − γ T_GD.
        # LNAV users of L1 C/A apply the L1 term as well (the C/A−P(Y) difference
        # is a separate DCB; see the module notes). QZSS follows IS-QZSS-PNT, same form.
        if band == "L1":
            return [("tgd_s", 1.0)]
        if band == "L2":
            return [("tgd_s", GAMMA_L1L2)]
        raise ValueError(f"{system} {band}: needs the CNAV inter-signal corrections (ISC), "
                         "which the broadcast LNAV record does not carry")
    if system == "E":
        # Galileo OS SIS ICD §5.1.5 (eqs. for single-frequency users):
        # E1 (F/NAV): Δt_SV(E1) = Δt_SV − BGD(E1,E5a); E1 (I/NAV): Δt_SV − BGD(E1,E5b);
        # E5a: Δt_SV − (f_E1/f_E5a)² BGD(E1,E5a); E5b: Δt_SV − (f_E1/f_E5b)² BGD(E1,E5b).
        fe1 = BAND_FREQUENCY_HZ["E"]["1"]
        if band == "E1":
            return [("bgd_e1e5a_s", 1.0)] if nav == "FNAV" else [("bgd_e1e5b_s", 1.0)]
        if band == "E5a":
            return [("bgd_e1e5a_s", (fe1 / BAND_FREQUENCY_HZ["E"]["5"]) ** 2)]
        if band == "E5b":
            return [("bgd_e1e5b_s", (fe1 / BAND_FREQUENCY_HZ["E"]["7"]) ** 2)]
        raise ValueError(f"Galileo {band}: no broadcast group delay defined")
    if system == "C":
        # BDS-SIS-ICD-B1I (v3.0) §5.2.4.10: Δt_SV(B1I) = Δt_SV − T_GD1;
        # Δt_SV(B2I) = Δt_SV − T_GD2; B3I is the clock reference (no term).
        if band == "B1I":
            return [("tgd1_s", 1.0)]
        if band == "B2I":
            return [("tgd2_s", 1.0)]
        if band == "B3I":
            return []
        raise ValueError(f"BeiDou {band}: needs the B-CNAV group delays (not in the D1/D2 record)")
    if system == "R":
        # GLONASS ICD: τ_n is the L1 (G1) clock; the G2−G1 difference Δτ_n is not in
        # the RINEX 2/3 navigation record, so G1 and G2 get no broadcast term.
        if band in ("G1", "G2"):
            return []
        raise ValueError(f"GLONASS {band}: no broadcast group delay defined")
    raise ValueError(f"no broadcast group-delay model for system {system!r}")


def _band_of(system, code):
    if len(code) >= 2 and code[0] in "CLDS" and code[1].isdigit():
        digit = code[1]
    else:
        return code  # already a band name
    try:
        return BAND_NAME[system][digit]
    except KeyError:
        raise ValueError(f"system {system!r} has no band for code {code!r}") from None


def group_delay_factor(system, codes, *, nav="INAV") -> GroupDelay:
    """Broadcast group-delay parameter(s) and multiplier(s) for the codes used.

    ``codes``: one code (single frequency) or two codes (the ionosphere-free
    combination of those bands), e.g. ``("C1C",)`` or ``("C1C", "C2W")``.
    ``nav``: for Galileo, ``"INAV"`` or ``"FNAV"``, the message the
    clock/BGD come from. Usage: ``sat_clock_s -= gd.correction_s(params)``
    (or ``factor * parameter`` when there is one term).

    For the ionosphere-free combination ``a1 P1 + a2 P2`` the term is
    ``a1·k1 + a2·k2`` from the single-frequency terms ``k``: GPS L1/L2 gives 0
    (the broadcast clock is the P(Y) iono-free clock), Galileo E1/E5a with
    F/NAV and E1/E5b with I/NAV give 0, BeiDou B1I/B3I gives
    ``f_B1I²/(f_B1I² − f_B3I²) · T_GD1`` ≈ 2.944 T_GD1.
    """
    system = str(system)[:1].upper()
    codes = (codes,) if isinstance(codes, str) else tuple(codes)
    nav = nav.upper().replace("/", "")
    bands = [_band_of(system, c) for c in codes]
    if len(bands) == 1:
        terms = _single_band_terms(system, bands[0], nav)
        ref = _REFS[system]
    elif len(bands) == 2:
        if system == "E" and nav == "INAV" and "E5a" in bands:
            nav_eff = "FNAV"  # E1/E5a users take the F/NAV clock and BGD(E1,E5a) (OS SIS ICD §5.1.5)
        elif system == "E" and "E5b" in bands:
            nav_eff = "INAV"
        else:
            nav_eff = nav
        f = [BAND_FREQUENCY_HZ.get(system, {}).get(_band_digit(system, b)) for b in bands]
        if system == "R":
            # FDMA: the factors below would need k, but GLONASS has no terms anyway
            f = [1.0, 2.0]
        a1, a2 = iono_free_coefficients(f[0], f[1])
        acc: dict[str, float] = {}
        for a, b in ((a1, bands[0]), (a2, bands[1])):
            for name, k in _single_band_terms(system, b, nav_eff if system == "E" else nav):
                acc[name] = acc.get(name, 0.0) + float(a) * k
        terms = [(n, v) for n, v in acc.items() if abs(v) > 1e-12]
        ref = _REFS[system] + "; iono-free: a1·k1 + a2·k2"
    else:
        raise ValueError(f"give one or two codes, not {codes!r}")
    return GroupDelay(system=system, codes=codes, terms=tuple(terms), reference=ref)


_REFS = {
    "G": "IS-GPS-200 §20.3.3.3.3.2", "J": "IS-QZSS-PNT (as IS-GPS-200 §20.3.3.3.3.2)",
    "E": "Galileo OS SIS ICD §5.1.5", "C": "BDS-SIS-ICD-B1I §5.2.4.10", "R": "GLONASS ICD (τ_n on L1)",
}


# ---------------------------------------------------------------- code biases (reader: ctt.formats.bias_sinex)

def code_bias_s(biases: BiasSet, sats, codes, t_ns, *, reference=None, station=""):
    """Per-satellite code bias (s) to *subtract* from the observation of ``codes``.

    Without ``reference``: the OSB of each (satellite, code) valid at ``t_ns``.
    With ``reference`` (a code or per-satellite codes, e.g. ``"C1W"``): the
    bias that maps the code onto the reference, ``B(code) − B(reference)``,
    from the DSB entry (either order, sign handled) or from two OSBs. Returns
    ``(bias_s, found)``: bias 0 and ``found`` False where the file has nothing,
    so a caller can flag such satellites instead of using them silently.
    ``station`` selects receiver entries ('' = satellite biases).
    """
    sats = np.asarray(sats, dtype=str)
    codes = np.broadcast_to(np.asarray(codes, dtype=str), sats.shape)
    refs = None if reference is None else np.broadcast_to(np.asarray(reference, dtype=str), sats.shape)
    t = int(t_ns)
    valid = (biases.start_ns <= t) & ((biases.end_ns < 0) | (t < biases.end_ns)) & (biases.station == station)
    osb = {}
    dsb = {}
    for i in np.nonzero(valid)[0]:
        if biases.kind[i] == "OSB":
            osb[(biases.prn[i], biases.obs1[i])] = biases.value_s[i]
        else:
            dsb[(biases.prn[i], biases.obs1[i], biases.obs2[i])] = biases.value_s[i]
    out = np.zeros(sats.shape)
    found = np.zeros(sats.shape, dtype=bool)
    for j, (s, c) in enumerate(zip(sats.ravel(), codes.ravel())):
        key = s if not station else ""
        if refs is None:
            v = osb.get((key, c))
        else:
            r = refs.ravel()[j]
            if c == r:
                v = 0.0
            elif (key, c, r) in dsb:
                v = dsb[(key, c, r)]
            elif (key, r, c) in dsb:
                v = -dsb[(key, r, c)]
            elif (key, c) in osb and (key, r) in osb:
                v = osb[(key, c)] - osb[(key, r)]
            else:
                v = None
        if v is not None:
            out.ravel()[j] = v
            found.ravel()[j] = True
    return out, found


# ------------------------------------------------------------------ antenna phase centres (ANTEX)
#
# The per-frequency antenna corrections live here, beside the frequencies and the
# iono-free coefficients they are combined with: an antenna offset or variation is a
# property of a carrier frequency, and the PPP model needs it per frequency and as the
# iono-free combination of the two frequencies it uses. The geometry they need is only
# the line of sight (azimuth and elevation, or the nadir angle), given by the caller.

def antex_frequency_hz(freq: str) -> float:
    """Carrier frequency (Hz) of an ANTEX frequency code (``'G01'``, ``'E05'``, ``'R02'``).

    GLONASS FDMA codes R01/R02 give the channel-0 frequency (1602 / 1246 MHz):
    ANTEX calibrations are per band, not per channel (ANTEX 1.4 frequency codes).
    """
    sys_, band = freq[0], str(int(freq[1:]))
    if sys_ == "R" and band in GLONASS_FDMA:
        return GLONASS_FDMA[band][0]
    try:
        return BAND_FREQUENCY_HZ[sys_][band]
    except KeyError:
        raise ValueError(f"unknown ANTEX frequency code {freq!r}") from None


def _antex_freq(block: dict, freq: str, fallback_gps: bool) -> str:
    if freq in block["pco_m"]:
        return freq
    if fallback_gps:
        alt = "G01" if freq[1:] == "01" else "G02"
        if alt in block["pco_m"]:
            return alt
    name = block.get("name", block.get("type", "?"))
    raise KeyError(f"antenna {name!r} has no calibration for {freq} (has {sorted(block['pco_m'])})")


def antenna_pcv_m(block: dict, freq: str, zen_deg, azi_deg=None):
    """Phase-centre variation (m) of one ANTEX block at zenith (or nadir) angles, vectorised.

    Bilinear in zenith angle and azimuth on the block's grid when it has
    azimuth rows and ``azi_deg`` is given, else linear in the ``NOAZI`` row.
    Angles beyond the grid by more than one step give NaN (never
    extrapolated); within one step the edge value is held.
    """
    rec = block["pcv_m"][freq]
    zen_grid = block["zen_deg"]
    z = np.asarray(zen_deg, dtype=float)
    dz = float(zen_grid[1] - zen_grid[0]) if len(zen_grid) > 1 else 1.0
    x = (z - zen_grid[0]) / dz
    n = len(zen_grid)
    outside = (x < -1.0) | (x > n)
    x = np.clip(x, 0.0, n - 1.0)
    i0 = np.minimum(np.floor(x).astype(int), max(n - 2, 0))
    i1 = np.minimum(i0 + 1, n - 1)
    fz = x - i0
    if rec.get("grid") is not None and azi_deg is not None and len(block["azi_deg"]) > 1:
        g = rec["grid"]
        a = np.mod(np.asarray(azi_deg, dtype=float), 360.0)
        da = float(block["azi_deg"][1] - block["azi_deg"][0])
        y = a / da
        j0 = np.minimum(np.floor(y).astype(int), g.shape[0] - 2)
        fa = y - j0
        v = ((1 - fa) * ((1 - fz) * g[j0, i0] + fz * g[j0, i1])
             + fa * ((1 - fz) * g[j0 + 1, i0] + fz * g[j0 + 1, i1]))
    else:
        row = rec["noazi"]
        v = (1 - fz) * row[i0] + fz * row[i1]
    return np.where(outside, np.nan, v)


def receiver_antenna_range_m(block: dict, freq: str, azimuth_rad, elevation_rad, *, fallback_gps=True):
    """Receiver antenna correction (m) to *add* to the geometric range computed to the ARP.

    ANTEX 1.4 (section 3): mean phase centre = ARP + PCO (north, east, up) and
    observed range = range to the mean phase centre + PCV(azimuth, zenith),
    so to first order (the antenna is millimetres against 20,000 km)::

        range_observed = range_ARP − e · PCO + PCV(az, 90° − el)

    with ``e`` the unit vector from the receiver to the satellite in the local
    north/east/up frame. Vectorised over the angles. ``fallback_gps``: a
    frequency the calibration lacks (e.g. E05 in an IGS08-era file) takes the
    GPS value of the same role (01 -> G01, others -> G02), the common practice
    for type calibrations made on GPS only; without it a KeyError is raised.
    """
    f = _antex_freq(block, freq, fallback_gps)
    az = np.asarray(azimuth_rad, dtype=float)
    el = np.asarray(elevation_rad, dtype=float)
    n, e, u = block["pco_m"][f]
    ce = np.cos(el)
    proj = n * ce * np.cos(az) + e * ce * np.sin(az) + u * np.sin(el)
    pcv = antenna_pcv_m(block, f, 90.0 - np.degrees(el), np.degrees(az))
    return -proj + pcv


def iono_free_antenna_range_m(block: dict, freq1: str, freq2: str, azimuth_rad, elevation_rad, *,
                              fallback_gps=True):
    """Iono-free combination of two frequencies' receiver antenna corrections (m).

    ``a1·Δ(f1) + a2·Δ(f2)`` with the coefficients of :func:`iono_free_coefficients`
    (a1 = 2.546, a2 = −1.546 for GPS L1/L2): the correction of an iono-free
    code or carrier combination formed on those frequencies (common practice).
    """
    a1, a2 = iono_free_coefficients(antex_frequency_hz(freq1), antex_frequency_hz(freq2))
    return (a1 * receiver_antenna_range_m(block, freq1, azimuth_rad, elevation_rad, fallback_gps=fallback_gps)
            + a2 * receiver_antenna_range_m(block, freq2, azimuth_rad, elevation_rad, fallback_gps=fallback_gps))


def iono_free_offset_m(pco_by_freq: dict, freq1: str, freq2: str) -> np.ndarray:
    """Iono-free combination of two frequencies' phase-centre offset vectors (any frame, m)."""
    a1, a2 = iono_free_coefficients(antex_frequency_hz(freq1), antex_frequency_hz(freq2))
    return a1 * np.asarray(pco_by_freq[freq1], dtype=float) + a2 * np.asarray(pco_by_freq[freq2], dtype=float)


def satellite_antenna_pcv_m(block: dict, freq: str, nadir_rad, azimuth_rad=None):
    """Satellite antenna phase-centre variation (m) at nadir angles, to *add* to the range.

    ANTEX 1.4 (section 3): observed range = range to the satellite's mean
    phase centre + PCV(nadir[, azimuth]). The offset itself is applied to the
    orbit by :class:`ctt.orbits.PreciseOrbits`; this is the variation only.
    IGS08-era satellite calibrations are nadir-only (``NOAZI``, 0-14° for
    GPS); the azimuth (body frame) is used only where the block has a grid.
    """
    az = None if azimuth_rad is None else np.degrees(azimuth_rad)
    return antenna_pcv_m(block, freq, np.degrees(np.asarray(nadir_rad, dtype=float)), az)


def iono_free_satellite_pcv_m(block: dict, freq1: str, freq2: str, nadir_rad):
    """Iono-free combination of two frequencies' satellite PCV (m)."""
    a1, a2 = iono_free_coefficients(antex_frequency_hz(freq1), antex_frequency_hz(freq2))
    return a1 * satellite_antenna_pcv_m(block, freq1, nadir_rad) + a2 * satellite_antenna_pcv_m(block, freq2, nadir_rad)


# ------------------------------------------------------------------ phase wind-up (Wu et al. 1993)

def phase_windup_cycles(sat_ecef_m, rx_ecef_m, sun_ecef_m, *, axis=0):
    """Carrier phase wind-up (cycles) of a right-hand circularly polarised signal, Wu et al. (1993).

    Satellite dipole axes from the nominal yaw-steering body frame
    (:func:`ctt.orbits.body_frame`: x toward the Sun side, y along the
    solar-panel axis), receiver dipoles north (x) and east... following Wu
    et al. (1993, Manuscripta Geodaetica 18) as written in Kouba (2009, "A
    guide to using IGS products", §2.3; from memory)::

        k  = unit vector satellite -> receiver
        D' = x_s − k (k·x_s) − k × y_s          (satellite effective dipole)
        D  = x_r − k (k·x_r) + k × y_r          (receiver, x_r north, y_r west)
        Δφ = sign(k · (D' × D)) · arccos(D'·D / (|D'||D|)) / 2π

    The value is defined modulo one cycle; over a continuous arc the wind-up
    is continuous, so inputs shaped (epoch, satellite, 3) are unwrapped along
    ``axis`` (the epochs) with :func:`numpy.unwrap` (period 1): the result is
    continuous per satellite, starting in (−0.5, 0.5]. The sign makes the
    correction to *subtract* from the measured phase in cycles (common
    practice). Receiver antenna pointed north (no azimuth rotation).
    Vectorised; no loop over observations.
    """
    from .geodesy import ecef_to_geodetic, enu_matrix
    from .orbits import body_frame

    s = np.asarray(sat_ecef_m, dtype=float)
    r = np.broadcast_to(np.asarray(rx_ecef_m, dtype=float), s.shape)
    sun = np.broadcast_to(np.asarray(sun_ecef_m, dtype=float), s.shape)
    xs, ys, _ = body_frame(s, sun)
    k = r - s
    k = k / np.linalg.norm(k, axis=-1, keepdims=True)
    lat, lon, _ = ecef_to_geodetic(r.reshape(-1, 3)[0])
    rot = enu_matrix(float(lat), float(lon))          # rows: east, north, up in ECEF
    east, north = rot[0], rot[1]
    xr = np.broadcast_to(north, s.shape)
    yr = np.broadcast_to(-east, s.shape)              # west: x north, y west, z up (right-handed)

    def dot(a, b):
        return np.einsum("...i,...i->...", a, b)[..., None]

    d_sat = xs - k * dot(k, xs) - np.cross(k, ys)
    d_rx = xr - k * dot(k, xr) + np.cross(k, yr)
    cosang = dot(d_sat, d_rx)[..., 0] / (np.linalg.norm(d_sat, axis=-1) * np.linalg.norm(d_rx, axis=-1))
    sign = np.sign(dot(k, np.cross(d_sat, d_rx))[..., 0])
    sign = np.where(sign == 0, 1.0, sign)
    frac = sign * np.arccos(np.clip(cosang, -1.0, 1.0)) / (2.0 * np.pi)
    if frac.ndim >= 1 and frac.shape[axis] > 1:
        frac = np.unwrap(frac, period=1.0, axis=axis)
    return frac
