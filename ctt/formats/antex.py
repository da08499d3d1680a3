"""ANTEX antenna phase-centre files -> :class:`AntexData`.

:func:`read_antex` reads ANTEX 1.4 satellite blocks: phase-centre offset per
frequency in the satellite body frame, validity dates, block type, SVN.
Receiver antenna blocks are skipped (counted).
"""

from __future__ import annotations

import dataclasses
import logging
import re

from ..errors import ProductFormatError
from ..timescales import civil_to_ns
from .compression import read_bytes

log = logging.getLogger(__name__)

# ------------------------------------------------------------------ ANTEX

@dataclasses.dataclass
class AntexData:
    """Satellite antenna blocks of an ANTEX file.

    ``satellites`` is a list of dicts with ``type`` (e.g. 'BLOCK IIF'), ``prn``
    ('G01'), ``svn``, ``cospar``, ``valid_from_ns`` / ``valid_until_ns`` (GPS
    time; ``None`` = open) and ``pco_m`` {frequency code ('G01', 'E05'...):
    (x, y, z) metres in the satellite body frame}.
    """

    path: str
    version: float
    pcv_type: str
    satellites: list
    n_receiver_antennas: int

    def offset(self, prn: str, t_ns: int):
        """The block of ``prn`` valid at ``t_ns`` (GPS), or ``None``."""
        for blk in self.satellites:
            if blk["prn"] != prn:
                continue
            lo, hi = blk["valid_from_ns"], blk["valid_until_ns"]
            if (lo is None or t_ns >= lo) and (hi is None or t_ns <= hi):
                return blk
        return None


def _antex_epoch(text, path_s, line):
    try:
        f = text[:43].split()
        y, mo, d, h, mi = (int(v) for v in f[:5])
        s = float(f[5])
    except (ValueError, IndexError):
        raise ProductFormatError(path_s, line, "a date as 5I6,F13.7 (year month day hour minute second)",
                                 text) from None
    return int(civil_to_ns(y, mo, d, h, mi, s))


def read_antex(path) -> AntexData:
    """Read the satellite antenna phase-centre offsets of an ANTEX 1.4 file.

    Offsets are read from the ``NORTH / EAST / UP`` line of each frequency of
    a satellite block, which for satellites holds x, y, z in the body frame
    (mm, 3F10.2; ANTEX 1.4 format document). Dates are read as GPS time.
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
    n_rx = 0
    block = None
    freq = None
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
            block = {"line": i, "pco_m": {}, "valid_from_ns": None, "valid_until_ns": None}
        elif block is None:
            if text.strip():
                raise ProductFormatError(path_s, i, "'START OF ANTENNA'", text)
        elif label == "TYPE / SERIAL NO":
            block["type"] = text[:20].strip()
            block["prn"] = text[20:40].strip()
            block["svn"] = text[40:50].strip()
            block["cospar"] = text[50:60].strip()
        elif label == "VALID FROM":
            block["valid_from_ns"] = _antex_epoch(text, path_s, i)
        elif label == "VALID UNTIL":
            block["valid_until_ns"] = _antex_epoch(text, path_s, i)
        elif label == "START OF FREQUENCY":
            freq = text[3:6].strip()
            if not re.fullmatch(r"[GRECJSI]\d\d", freq):
                raise ProductFormatError(path_s, i, "a frequency code such as 'G01' in columns 4-6", text)
        elif label == "NORTH / EAST / UP":
            if freq is None:
                raise ProductFormatError(path_s, i, "'START OF FREQUENCY' before 'NORTH / EAST / UP'", text)
            try:
                vals = tuple(float(text[a:a + 10]) * 1e-3 for a in (0, 10, 20))
            except ValueError:
                raise ProductFormatError(path_s, i, "three offsets in mm as 3F10.2", text) from None
            block["pco_m"][freq] = vals
        elif label == "END OF FREQUENCY":
            freq = None
        elif label == "END OF ANTENNA":
            prn = block.get("prn", "")
            if "type" not in block:
                raise ProductFormatError(path_s, block["line"], "a 'TYPE / SERIAL NO' line in the antenna block",
                                         None)
            if re.fullmatch(r"[GRECJSI]\d\d", prn) and block["svn"]:
                del block["line"]
                sats.append(block)
            else:
                n_rx += 1
            block = None
    if in_header:
        raise ProductFormatError(path_s, None, "an 'END OF HEADER' line", "end of file")
    if block is not None:
        raise ProductFormatError(path_s, block["line"], "'END OF ANTENNA' closing the block", "end of file")
    return AntexData(path_s, version, pcv_type, sats, n_rx)
