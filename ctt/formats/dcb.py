"""Classic monthly code-bias text files (P1−C1, P1−P2, ns) -> :class:`ctt.formats.bias_sinex.BiasSet`.

The analysis centres' monthly differential code-bias files (``P1C1yymm.DCB``,
``P1P2yymm.DCB``; e.g. ``P1C11110.DCB`` for October 2011) list one value per
satellite (and per station) in ns. They are turned into the same structure as
Bias-SINEX, as ``DSB`` entries, so :func:`ctt.signals.code_bias_s` and
``ctt measure --bias`` use either file the same way.

Layout (read from the files themselves): line 1 is the title naming the
quantity and the month, ``... P1-C1 DCB SOLUTION, YEAR-MONTH 11-10``; a line
``DIFFERENTIAL (P1-C1) CODE BIASES ...``; a column header line and a line of
asterisks marking the fields; then one record per line: satellite id in
columns 1-3 (``G01``; for a station the system letter alone), station name in
columns 7-22, value in columns 27-35 (F9.3, ns) and RMS in columns 39-47
(F9.3, ns). Blank lines end nothing and are skipped.

Sign convention. The title's "P1-C1" is the difference of the two codes'
biases, DCB(P1−C1) = b(P1) − b(C1), so C1 + DCB(P1−C1) reads like P1 (the
convention of these files, e.g. the CODE analysis centre's DCB notes, from
memory; checked in tests/test_against_code_dcb.py against the real P1 − C1
differences of BRUS and CAGZ observations). Bias-SINEX defines a DSB as
B(OBS1) − B(OBS2) (Bias-SINEX 1.00 format document), so P1−C1 becomes the
DSB (OBS1 = C1W, OBS2 = C1C) with the same value and P1−P2 the DSB
(C1W, C2W): the RINEX 3 codes of P1, C1 and P2 for GPS (C1W, C1C, C2W) and
GLONASS (C1P, C1C, C2P) (RINEX 3 code table).

Validity: the calendar month of the title (a monthly mean), from its first
day 00:00 to the next month's first day (GPS time, as Bias-SINEX windows are
read). A day outside it finds no entry and is flagged ``no_code_bias``, never
silently given last month's values.
"""

from __future__ import annotations

import pathlib
import re

import numpy as np

from ..errors import ProductFormatError
from .bias_sinex import BiasSet
from .compression import read_text

#: DCB quantity -> (OBS1, OBS2) per system, so that value = B(OBS1) − B(OBS2).
DCB_CODES = {
    "P1-C1": {"G": ("C1W", "C1C"), "R": ("C1P", "C1C")},
    "P1-P2": {"G": ("C1W", "C2W"), "R": ("C1P", "C2P")},
    "P2-C2": {"G": ("C2W", "C2L"), "R": ("C2P", "C2C")},
}

_TITLE = re.compile(r"\b(P1-C1|P1-P2|P2-C2)\b.*YEAR-MONTH\s+(\d{2})-(\d{2})")


def is_dcb(path) -> bool:
    """True when the file's first line is a classic DCB title (not Bias-SINEX)."""
    first = read_text(path).split("\n", 1)[0]
    return bool(_TITLE.search(first))


def read_dcb(path) -> BiasSet:
    """Read a monthly P1−C1, P1−P2 or P2−C2 DCB file into DSB entries of a :class:`BiasSet`.

    Satellites of systems without a code mapping in :data:`DCB_CODES` are
    skipped and counted in ``skipped``; bad lines raise
    :class:`ctt.errors.ProductFormatError` with file and line.
    """
    from .. import timescales as ts

    path = pathlib.Path(path)
    lines = read_text(path).splitlines()
    m = _TITLE.search(lines[0]) if lines else None
    if m is None:
        raise ProductFormatError(path, 1, "a DCB title naming P1-C1, P1-P2 or P2-C2 and 'YEAR-MONTH yy-mm'",
                                 lines[0] if lines else "an empty file")
    quantity, yy, mm = m.group(1), int(m.group(2)), int(m.group(3))
    if not 1 <= mm <= 12:
        raise ProductFormatError(path, 1, "a month 01-12 after YEAR-MONTH", lines[0])
    year = yy + (1900 if yy >= 80 else 2000)
    start = int(ts.civil_to_ns(year, mm, 1))
    end = int(ts.civil_to_ns(year + (mm == 12), mm % 12 + 1, 1))
    try:
        body0 = next(i for i, ln in enumerate(lines) if ln.startswith("***")) + 1
    except StopIteration:
        raise ProductFormatError(path, None, "the line of asterisks ('***   ****...') before the records",
                                 "none") from None
    rows = []
    skipped = 0
    for lineno, line in enumerate(lines[body0:], start=body0 + 1):
        if not line.strip():
            continue
        prn = line[:3].strip()
        station = line[6:22].strip()
        try:
            value = float(line[26:35])
            rms_txt = line[38:47].strip()
            rms = float(rms_txt) if rms_txt else np.nan
            if not np.isfinite(value) or abs(value) > 1e6:
                raise ValueError
        except ValueError:
            raise ProductFormatError(path, lineno, "a record: id in columns 1-3, station 7-22, value (ns) "
                                     "27-35 and RMS (ns) 39-47", line) from None
        if re.fullmatch(r"[A-Z]\d\d", prn) and not station:
            sys_, sat = prn[0], prn
        elif re.fullmatch(r"[A-Z]", prn) and station:
            sys_, sat = prn, ""
        else:
            raise ProductFormatError(path, lineno, "a satellite id such as G01 in columns 1-3, or a system "
                                     "letter with a station name in columns 7-22", line)
        codes = DCB_CODES[quantity].get(sys_)
        if codes is None:
            skipped += 1
            continue
        rows.append(("DSB", sat, station, codes[0], codes[1], start, end, value * 1e-9, rms * 1e-9))
    if not rows:
        raise ProductFormatError(path, None, "at least one satellite or station record", "none")
    cols = list(zip(*rows))
    return BiasSet(path=str(path), kind=np.array(cols[0], dtype="<U3"), prn=np.array(cols[1], dtype="<U3"),
                   station=np.array(cols[2], dtype="<U16"), obs1=np.array(cols[3], dtype="<U3"),
                   obs2=np.array(cols[4], dtype="<U3"), start_ns=np.array(cols[5], dtype=np.int64),
                   end_ns=np.array(cols[6], dtype=np.int64), value_s=np.array(cols[7], dtype=float),
                   sigma_s=np.array(cols[8], dtype=float), skipped=skipped)
