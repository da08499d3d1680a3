"""ANTEX antenna phase-centre files -> :class:`AntexData`.

:func:`read_antex` reads ANTEX 1.4 satellite *and* receiver antenna blocks:
per frequency the phase-centre offset (PCO) and the phase-centre variations
(PCV) on the block's grid (``NOAZI`` row over zenith or nadir angle, and the
azimuth rows when ``DAZI`` > 0), validity dates, block type, SVN.

Definitions (ANTEX 1.4 format document, Rothacher & Schmid 2010, section 3
"Definition of the antenna corrections"): receiver antennas: mean phase
centre = antenna reference point (ARP) + PCO, PCO given as NORTH / EAST / UP
in a local topocentric frame; observed range = geometric range to the mean
phase centre + PCV(azimuth, zenith angle), azimuth counted from north to
east. Satellite antennas: mean phase centre = centre of mass + PCO in the
satellite body frame (x, y, z); observed range = range to the mean phase
centre + PCV(nadir angle[, azimuth]). All values in the file are mm; here
metres. The models that apply them: :func:`ctt.signals.receiver_antenna_range_m`,
:func:`ctt.signals.satellite_antenna_pcv_m` and :class:`ctt.orbits.PreciseOrbits`.
"""

from __future__ import annotations

import dataclasses
import logging
import math
import re

import numpy as np

from ..errors import ProductFormatError
from ..timescales import civil_to_ns
from .compression import read_bytes

log = logging.getLogger(__name__)

# ------------------------------------------------------------------ ANTEX


@dataclasses.dataclass
class AntexData:
    """Satellite and receiver antenna blocks of an ANTEX file.

    ``satellites`` is a list of dicts with ``type`` (e.g. 'BLOCK IIF'), ``prn``
    ('G01'), ``svn``, ``cospar``, ``valid_from_ns`` / ``valid_until_ns`` (GPS
    time; ``None`` = open), ``pco_m`` {frequency code ('G01', 'E05'...):
    (x, y, z) metres in the satellite body frame} and the grid described below.

    ``receivers`` maps the antenna name exactly as ANTEX spells it, columns
    1-20 of ``TYPE / SERIAL NO`` ("TYPE" in 1-16, radome in 17-20, e.g.
    ``'ASH701945B_M    NONE'``), to its type calibration (blank serial
    number); ``receivers_by_serial`` maps (name, serial) to individual
    calibrations. Each block has ``pco_m`` {frequency: (north, east, up) m}.

    Every block also has ``zen_deg`` (the ZEN1..ZEN2 grid by DZEN: zenith
    angle for receivers, nadir angle for satellites), ``azi_deg`` (0..360 by
    DAZI, or an empty array when DAZI = 0) and ``pcv_m`` {frequency:
    {"noazi": (n_zen,), "grid": (n_azi, n_zen) or None}} in metres.
    """

    path: str
    version: float
    pcv_type: str
    satellites: list
    n_receiver_antennas: int
    receivers: dict = dataclasses.field(default_factory=dict)
    receivers_by_serial: dict = dataclasses.field(default_factory=dict)

    def offset(self, prn: str, t_ns: int):
        """The block of ``prn`` valid at ``t_ns`` (GPS), or ``None``."""
        for blk in self.satellites:
            if blk["prn"] != prn:
                continue
            lo, hi = blk["valid_from_ns"], blk["valid_until_ns"]
            if (lo is None or t_ns >= lo) and (hi is None or t_ns <= hi):
                return blk
        return None

    def receiver(self, name: str, serial: str | None = None):
        """The receiver antenna block of ``name`` ('TYPE' + radome, see :func:`antenna_name`), or None.

        With ``serial`` an individual calibration is preferred when the file has one.
        """
        if serial:
            blk = self.receivers_by_serial.get((antenna_name(name), serial.strip()))
            if blk is not None:
                return blk
        return self.receivers.get(antenna_name(name))


def antenna_name(antenna_type: str, radome: str | None = None) -> str:
    """The 20-character ANTEX name: type left-justified in columns 1-16, radome in 17-20.

    ``antenna_name('ASH701945B_M', 'NONE') == 'ASH701945B_M    NONE'``; a
    single string already in that layout (or with the radome after blanks) is
    normalised the same way; a missing radome is 'NONE' (ANTEX 1.4 / IGS
    naming convention, rcvr_ant.tab).
    """
    if radome is None:
        text = antenna_type.rstrip()
        if len(text) > 16 and text[16:].strip():
            antenna_type, radome = text[:16], text[16:]
        else:
            parts = text.split()
            if len(parts) == 2 and len(parts[1]) == 4 and len(text) <= 20:
                antenna_type, radome = parts
            else:
                antenna_type, radome = text, "NONE"
    return f"{antenna_type.strip():<16}{(radome.strip() or 'NONE'):>4}"


def _antex_epoch(text, path_s, line):
    try:
        f = text[:43].split()
        y, mo, d, h, mi = (int(v) for v in f[:5])
        s = float(f[5])
    except (ValueError, IndexError):
        raise ProductFormatError(path_s, line, "a date as 5I6,F13.7 (year month day hour minute second)",
                                 text) from None
    return int(civil_to_ns(y, mo, d, h, mi, s))


def read_antex(path) -> AntexData:  # noqa: C901 - one pass over a flat block structure
    """Read the satellite and receiver antenna blocks of an ANTEX 1.4 file.

    Offsets come from the ``NORTH / EAST / UP`` line of each frequency (mm,
    3F10.2; for satellites x, y, z in the body frame), variations from the
    ``NOAZI`` line (3X,A5, then mF8.2 over ZEN1..ZEN2 by DZEN) and, when
    ``DAZI`` > 0, one line per azimuth (F8.1, then mF8.2). Dates are read as
    GPS time. RMS blocks (``START OF FREQ RMS``) are skipped. One loop over
    lines: the format is a nest of labelled records that no library reads.
    """
    path_s = str(path)
    lines = read_bytes(path).decode("latin-1").splitlines()
    if not lines or "ANTEX VERSION / SYST" not in lines[0]:
        raise ProductFormatError(path_s, 1, "'ANTEX VERSION / SYST' on the first line",
                                 lines[0] if lines else "an empty file")
    try:
        version = float(lines[0][:8])
    except ValueError:
        raise ProductFormatError(path_s, 1, "the format version as F8.1 in columns 1-8", lines[0]) from None
    pcv_type = ""
    sats: list = []
    receivers: dict = {}
    by_serial: dict = {}
    n_rx = 0
    block = None
    freq = None
    in_rms = False
    in_header = True
    for i, text in enumerate(lines, start=1):
        label = text[60:80].strip()
        if in_header:
            if label == "PCV TYPE / REFANT":
                pcv_type = text[:1]
            elif label == "END OF HEADER":
                in_header = False
            continue
        if label == "START OF ANTENNA":
            if block is not None:
                raise ProductFormatError(path_s, i, "'END OF ANTENNA' before the next 'START OF ANTENNA'", text)
            block = {"line": i, "pco_m": {}, "pcv_m": {}, "valid_from_ns": None, "valid_until_ns": None,
                     "dazi_deg": 0.0, "zen_deg": None}
            freq = None
        elif block is None:
            if text.strip():
                raise ProductFormatError(path_s, i, "'START OF ANTENNA'", text)
        elif in_rms:
            if label == "END OF FREQ RMS":
                in_rms = False
        elif label == "START OF FREQ RMS":
            in_rms = True
        elif label == "TYPE / SERIAL NO":
            block["type"] = text[:20].strip()
            block["name"] = text[:20]
            block["prn"] = text[20:40].strip()
            block["svn"] = text[40:50].strip()
            block["cospar"] = text[50:60].strip()
        elif label == "DAZI":
            try:
                block["dazi_deg"] = float(text[2:8])
                if not (block["dazi_deg"] == 0.0 or 0.1 <= block["dazi_deg"] <= 360.0):
                    raise ValueError
            except ValueError:
                raise ProductFormatError(path_s, i, "the azimuth step DAZI as F6.1 in columns 3-8: 0, or 0.1 to 360",
                                         text) from None
        elif label == "ZEN1 / ZEN2 / DZEN":
            try:
                z1, z2, dz = (float(text[a:a + 6]) for a in (2, 8, 14))
            except ValueError:
                raise ProductFormatError(path_s, i, "ZEN1, ZEN2, DZEN as 2X,3F6.1", text) from None
            if not (math.isfinite(z1) and math.isfinite(z2) and math.isfinite(dz)) or dz <= 0 or z2 < z1 \
                    or z1 < 0 or z2 > 180 or (z2 - z1) / dz > 1000:
                raise ProductFormatError(path_s, i, "0 <= ZEN1 <= ZEN2 <= 180 and DZEN > 0 (at most 1000 steps)", text)
            block["zen_deg"] = z1 + dz * np.arange(int(round((z2 - z1) / dz)) + 1)
        elif label == "VALID FROM":
            block["valid_from_ns"] = _antex_epoch(text, path_s, i)
        elif label == "VALID UNTIL":
            block["valid_until_ns"] = _antex_epoch(text, path_s, i)
        elif label == "START OF FREQUENCY":
            freq = text[3:6].strip()
            if not re.fullmatch(r"[GRECJSI]\d\d", freq):
                raise ProductFormatError(path_s, i, "a frequency code such as 'G01' in columns 4-6", text)
            block["pcv_m"][freq] = {"noazi": None, "rows": []}
        elif label == "NORTH / EAST / UP":
            if freq is None:
                raise ProductFormatError(path_s, i, "'START OF FREQUENCY' before 'NORTH / EAST / UP'", text)
            try:
                vals = tuple(float(text[a:a + 10]) * 1e-3 for a in (0, 10, 20))
                if not all(math.isfinite(v) for v in vals):
                    raise ValueError
            except ValueError:
                raise ProductFormatError(path_s, i, "three offsets in mm as 3F10.2", text) from None
            block["pco_m"][freq] = vals
        elif label == "END OF FREQUENCY":
            _close_frequency(block, freq, path_s, i)
            freq = None
        elif label == "END OF ANTENNA":
            if freq is not None:
                raise ProductFormatError(path_s, i, f"'END OF FREQUENCY' of {freq} before 'END OF ANTENNA'", text)
            prn = block.get("prn", "")
            if "type" not in block:
                raise ProductFormatError(path_s, block["line"], "a 'TYPE / SERIAL NO' line in the antenna block",
                                         None)
            zen = block.pop("zen_deg")
            dazi = block.pop("dazi_deg")
            block["zen_deg"] = zen if zen is not None else np.zeros(0)
            block["azi_deg"] = dazi * np.arange(int(round(360.0 / dazi)) + 1) if dazi > 0 else np.zeros(0)
            del block["line"]
            if re.fullmatch(r"[GRECJSI]\d\d", prn) and block["svn"]:
                sats.append(block)
            else:
                n_rx += 1
                block["serial"] = prn
                if prn:
                    by_serial[(block["name"], prn)] = block
                else:
                    receivers.setdefault(block["name"], block)
            block = None
        elif freq is not None and text[3:8] == "NOAZI":
            block["pcv_m"][freq]["noazi"] = _pcv_values(text[8:], path_s, i, block)
        elif freq is not None and text.strip():
            block["pcv_m"][freq]["rows"].append((i, text))     # parsed per frequency, all rows at once
    if in_header:
        raise ProductFormatError(path_s, None, "an 'END OF HEADER' line", "end of file")
    if block is not None:
        raise ProductFormatError(path_s, block["line"], "'END OF ANTENNA' closing the block", "end of file")
    return AntexData(path_s, version, pcv_type, sats, n_rx, receivers, by_serial)


def _pcv_values(text, path_s, line, block):
    zen = block.get("zen_deg")
    n = len(zen) if zen is not None else None
    try:
        vals = np.array(text.split(), dtype=float) * 1e-3
        if not np.isfinite(vals).all():
            raise ValueError
    except ValueError:
        raise ProductFormatError(path_s, line, "PCV values in mm as mF8.2", text) from None
    if n is not None and len(vals) != n:
        raise ProductFormatError(path_s, line, f"{n} PCV values (ZEN1..ZEN2 by DZEN)", f"{len(vals)} values")
    return vals


def _close_frequency(block, freq, path_s, line):
    if freq is None or freq not in block["pcv_m"]:
        return
    rec = block["pcv_m"][freq]
    rows = rec.pop("rows")
    grid = None
    if rec["noazi"] is None:
        raise ProductFormatError(path_s, line, f"a NOAZI row in frequency {freq}", "none")
    if rows:
        dazi = block.get("dazi_deg", 0.0)
        n_azi = int(round(360.0 / dazi)) + 1 if dazi > 0 else 0
        n_zen = len(rec["noazi"])
        if len(rows) != n_azi:
            raise ProductFormatError(path_s, rows[0][0], f"{n_azi} azimuth rows 0..360 by DAZI {dazi:g} in "
                                     f"frequency {freq}", f"{len(rows)} rows")
        try:
            vals = np.array(" ".join(t for _, t in rows).split(), dtype=float).reshape(n_azi, n_zen + 1)
            if not np.isfinite(vals).all():
                raise ValueError
        except ValueError:
            for ln, t in rows:     # find the line to name
                try:
                    v = np.array(t.split(), dtype=float)
                    if len(v) != n_zen + 1 or not np.isfinite(v).all():
                        raise ValueError
                except ValueError:
                    raise ProductFormatError(path_s, ln, f"an azimuth (F8.1) and {n_zen} PCV values in mm "
                                             "(mF8.2)", t) from None
            raise ProductFormatError(path_s, rows[0][0], f"azimuth rows of {n_zen + 1} numbers", "other rows") \
                from None
        if np.max(np.abs(vals[:, 0] - dazi * np.arange(n_azi))) > 1e-6:
            raise ProductFormatError(path_s, rows[0][0], f"azimuths 0..360 by DAZI {dazi:g}", "other azimuths")
        grid = vals[:, 1:] * 1e-3
    rec["grid"] = grid
