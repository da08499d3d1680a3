"""SINEX station coordinates -> :class:`SinexStations` (the coordinate subset of SINEX 2.xx).

Read (SINEX 2.01/2.02 format document, IERS; fixed columns, 1-based):

* ``+SITE/ID``: site code 2-5, point code 7-8, DOMES number 10-18,
  observation technique 20, description 22-43;
* ``+SITE/ANTENNA``: site 2-5, point 7-8, solution 10-13, antenna type and
  radome 43-62 (the 20-character ANTEX name), serial number 64-68;
* ``+SITE/ECCENTRICITY``: site 2-5, point 7-8, solution 10-13, reference
  system 43-45 (``UNE`` or ``XYZ``), the three values 47-54, 56-63, 65-72
  (for UNE: up, north, east; metres, marker to antenna reference point);
* ``+SOLUTION/ESTIMATE``: parameter type 8-13 (``STAX``, ``STAY``, ``STAZ``,
  ``VELX``, ``VELY``, ``VELZ``), site 15-18, point 20-21, solution 23-26,
  reference epoch 28-39 (``YY:DDD:SSSSS``), unit 41-44 (m, m/y), value 48-68,
  standard deviation 70-80.

A site with several solutions (a break) keeps each one; :meth:`SinexStations.site`
returns the last listed unless a solution is named. Epochs are read as given
(SINEX epochs are calendar days and seconds; a second does not matter at mm/yr).
The position at another instant is propagated linearly with the velocity
(:meth:`SinexSite.position_at`, Julian years as the SINEX m/y unit).
"""

from __future__ import annotations

import dataclasses
import pathlib

import numpy as np

from ..errors import ProductFormatError
from .compression import read_text

SECONDS_PER_YEAR = 365.25 * 86400.0   #: Julian year, the unit of SINEX velocities (m/y)


@dataclasses.dataclass
class SinexSite:
    """One site/point/solution of a SINEX file: position (m) at ``epoch_ns`` and optional velocity (m/y)."""

    code: str
    point: str
    solution: str
    domes: str
    description: str
    epoch_ns: int
    xyz_m: np.ndarray
    sigma_m: np.ndarray
    vel_mpy: np.ndarray | None = None
    vel_sigma_mpy: np.ndarray | None = None
    antenna: str | None = None            #: ANTEX name 'TYPE' (1-16) + radome (17-20)
    antenna_serial: str | None = None
    eccentricity_une_m: np.ndarray | None = None   #: marker -> ARP, up/north/east
    line: int = 0

    def position_at(self, t_ns: int) -> np.ndarray:
        """Position at ``t_ns`` propagated with the velocity (unchanged without one)."""
        if self.vel_mpy is None:
            return self.xyz_m.copy()
        dt_y = (int(t_ns) - self.epoch_ns) / 1e9 / SECONDS_PER_YEAR
        return self.xyz_m + self.vel_mpy * dt_y


@dataclasses.dataclass
class SinexStations:
    """Sites of a SINEX file; ``frame`` the first reference-frame name (IGSyy, IGbyy, ITRFyyyy) met in
    the FILE/* and INPUT/* blocks (a hint for the station file's ``frame``; '' when none)."""

    path: str
    sites: list
    frame: str = ""

    def site(self, code: str, solution: str | None = None) -> SinexSite:
        """The entry of ``code`` (4 characters, case-insensitive); KeyError if absent."""
        hits = [s for s in self.sites if s.code.upper() == code[:4].upper()
                and (solution is None or s.solution == solution)]
        if not hits:
            raise KeyError(code)
        return hits[-1]

    @property
    def codes(self) -> list:
        return sorted({s.code for s in self.sites})


def sinex_epoch_ns(text: str, path=None, line=None, raw=None) -> int:
    """``YY:DDD:SSSSS`` (or ``YYYY:DDD:SSSSS``) -> ns on the calendar count; 00:000:00000 -> -1."""
    from .. import timescales as ts

    parts = text.strip().split(":")
    try:
        y, d, s = (int(p) for p in parts)
    except ValueError:
        raise ProductFormatError(path, line, "an epoch YY:DDD:SSSSS", raw if raw is not None else text) from None
    if y == 0 and d == 0 and s == 0:
        return -1
    if y < 100:
        y += 1900 if y >= 50 else 2000   # SINEX 2.x: 2-digit years, <= 49 -> 20xx
    return int(ts.civil_to_ns(y, 1, 1)) + (d - 1) * ts.NS_PER_DAY + s * ts.NS_PER_S


def read_sinex_stations(path) -> SinexStations:  # noqa: C901 - one pass over four blocks
    """Read station ids, antennas, eccentricities, positions and velocities of a SINEX file."""
    path = pathlib.Path(path)
    lines = read_text(path).splitlines()
    if not lines or not lines[0].startswith("%=SNX"):
        raise ProductFormatError(path, 1, "a SINEX header line starting '%=SNX'", lines[0] if lines else "an empty file")
    import re

    frame_re = re.compile(r"\b(IG[Sb]\d\d|ITRF\d{4})\b")
    frame = ""
    block = None
    ids: dict = {}
    ants: dict = {}
    ecc: dict = {}
    est: dict = {}
    for no, ln in enumerate(lines, start=1):
        if ln.startswith("+"):
            block = ln[1:].strip()
            continue
        if ln.startswith("-"):
            block = None
            continue
        if block is None or ln.startswith("*") or not ln.strip():
            continue
        if not frame and block.startswith(("FILE/", "INPUT/")):
            m = frame_re.search(ln)
            frame = m.group(1) if m else ""
        if block == "SITE/ID":
            ids[(ln[1:5].strip(), ln[6:8].strip())] = (ln[9:18].strip(), ln[21:43].strip())
        elif block == "SITE/ANTENNA":
            ants[(ln[1:5].strip(), ln[6:8].strip(), ln[9:13].strip())] = (ln[42:62], ln[63:68].strip())
        elif block == "SITE/ECCENTRICITY":
            ref = ln[42:45]
            try:
                v = np.array([float(ln[46:54]), float(ln[55:63]), float(ln[64:72])])
            except ValueError:
                raise ProductFormatError(path, no, "three eccentricities in metres in columns 47-54, 56-63, "
                                         "65-72", ln) from None
            if ref != "UNE":
                raise ProductFormatError(path, no, "eccentricity reference 'UNE' in columns 43-45 "
                                         "(XYZ eccentricities are not supported)", ln)
            ecc[(ln[1:5].strip(), ln[6:8].strip(), ln[9:13].strip())] = v
        elif block == "SOLUTION/ESTIMATE":
            kind = ln[7:13].strip()
            if kind not in ("STAX", "STAY", "STAZ", "VELX", "VELY", "VELZ"):
                continue
            key = (ln[14:18].strip(), ln[19:21].strip(), ln[22:26].strip())
            try:
                val = float(ln[47:68])
                sig_t = ln[69:80].strip()
                sig = float(sig_t) if sig_t else np.nan
                if not np.isfinite(val):
                    raise ValueError
            except ValueError:
                raise ProductFormatError(path, no, "the estimate in columns 48-68 and its standard deviation "
                                         "in 70-80", ln) from None
            unit = ln[40:44].strip()
            if unit != ("m" if kind.startswith("STA") else "m/y"):
                raise ProductFormatError(path, no, f"unit {'m' if kind.startswith('STA') else 'm/y'} in "
                                         "columns 41-44", ln)
            rec = est.setdefault(key, {"line": no})
            rec[kind] = (val, sig)
            if kind.startswith("STA"):
                rec["epoch"] = sinex_epoch_ns(ln[27:39], path, no, ln)
    sites = []
    for (code, pt, soln), rec in est.items():
        if not all(k in rec for k in ("STAX", "STAY", "STAZ")):
            raise ProductFormatError(path, rec["line"], f"STAX, STAY and STAZ of {code} {pt} {soln}", "some missing")
        xyz = np.array([rec[k][0] for k in ("STAX", "STAY", "STAZ")])
        sig = np.array([rec[k][1] for k in ("STAX", "STAY", "STAZ")])
        vel = vsig = None
        if all(k in rec for k in ("VELX", "VELY", "VELZ")):
            vel = np.array([rec[k][0] for k in ("VELX", "VELY", "VELZ")])
            vsig = np.array([rec[k][1] for k in ("VELX", "VELY", "VELZ")])
        domes, desc = ids.get((code, pt), ("", ""))

        def per_soln(table):
            for key in ((code, pt, soln), (code, pt, "----"), (code, pt, "")):
                if key in table:
                    return table[key]
            return None

        ant = per_soln(ants)
        sites.append(SinexSite(code=code, point=pt, solution=soln, domes=domes, description=desc,
                               epoch_ns=int(rec["epoch"]), xyz_m=xyz, sigma_m=sig, vel_mpy=vel,
                               vel_sigma_mpy=vsig, antenna=ant[0] if ant else None,
                               antenna_serial=ant[1] if ant else None, eccentricity_une_m=per_soln(ecc),
                               line=rec["line"]))
    if not sites:
        raise ProductFormatError(path, None, "a +SOLUTION/ESTIMATE block with STAX/STAY/STAZ entries", "none")
    return SinexStations(str(path), sites, frame)
