"""Bias-SINEX 1.00 code biases -> :class:`BiasSet` (the code-bias subset of the format).

Applying the biases to observations is a model: :func:`ctt.signals.code_bias_s`.
"""

from __future__ import annotations

import pathlib
from dataclasses import dataclass

import numpy as np

from ..errors import ProductFormatError
from .compression import read_text


@dataclass(frozen=True)
class BiasSet:
    """Code biases read from a Bias-SINEX file (satellite and station entries).

    Columns as arrays: ``kind`` ("OSB"/"DSB"), ``prn`` (satellite id or ''),
    ``station`` ('' for satellite biases), ``obs1``, ``obs2`` ('' for OSB),
    ``start_ns``/``end_ns`` (GPS ns; end −1 for open), ``value_s``, ``sigma_s``.
    """

    path: str
    kind: np.ndarray
    prn: np.ndarray
    station: np.ndarray
    obs1: np.ndarray
    obs2: np.ndarray
    start_ns: np.ndarray
    end_ns: np.ndarray
    value_s: np.ndarray
    sigma_s: np.ndarray
    skipped: int  #: entries outside the supported subset (phase biases, other types, units)


def _sinex_time_ns(text, path, lineno, line):
    from .. import timescales as ts

    text = text.strip()
    parts = text.split(":")
    # isascii: str.isdigit also accepts digits such as '³' that int() refuses
    if len(parts) != 3 or not all(p.strip().isascii() and p.strip().isdigit() for p in parts):
        raise ProductFormatError(path, lineno, "a time YYYY:DDD:SSSSS", line)
    y, d, s = (int(p) for p in parts)
    if y == 0 and d == 0 and s == 0:
        return -1
    if y < 100:  # two-digit years of the 0.01 draft: 80-99 -> 19xx
        y += 1900 if y >= 80 else 2000
    return int(ts.civil_to_ns(y, 1, 1)) + (d - 1) * ts.NS_PER_DAY + s * ts.NS_PER_S


def read_bias_sinex(path) -> BiasSet:
    """Read the code-bias subset of a Bias-SINEX 1.00 file.

    Supported: ``+BIAS/SOLUTION`` lines of type ``OSB`` (observable-specific)
    and ``DSB`` (differential, = B(OBS1) − B(OBS2)) for *code* observables
    (``C..``) with unit ``ns``, satellite or station entries, time windows
    ``BIAS_START``–``BIAS_END`` (time system taken as GPS). Skipped and
    counted: phase biases, ``ISB`` and other types, other units, slopes (the
    optional slope columns are ignored). Fields are read at the fixed columns
    of the format (1-based): type 2–5, SVN 7–10, PRN 12–14, station 16–24,
    OBS1 26–29, OBS2 31–34, start 36–49, end 51–64, unit 66–69, value 71–91,
    sigma 93–103. Sign (Bias-SINEX 1.00, from memory): observation = true +
    bias, so a bias is *subtracted* from the observation.
    """
    path = pathlib.Path(path)
    text = read_text(path)
    lines = text.splitlines()
    if not lines or not lines[0].startswith("%=BIA"):
        raise ProductFormatError(path, 1, "a Bias-SINEX header line starting '%=BIA'",
                                 lines[0] if lines else "an empty file")
    rows = []
    skipped = 0
    in_block = False
    for lineno, line in enumerate(lines, start=1):
        if line.startswith("+BIAS/SOLUTION"):
            in_block = True
            continue
        if line.startswith("-BIAS/SOLUTION"):
            in_block = False
            continue
        if not in_block or line.startswith("*") or not line.strip():
            continue
        kind = line[1:5].strip()
        obs1 = line[25:29].strip()
        obs2 = line[30:34].strip()
        unit = line[65:69].strip()
        if kind not in ("OSB", "DSB") or not obs1.startswith("C") or unit != "ns" or (
                obs2 and not obs2.startswith("C")):
            skipped += 1
            continue
        if kind == "DSB" and not obs2:
            raise ProductFormatError(path, lineno, "OBS2 (columns 31-34) in a DSB entry", line)
        try:
            value = float(line[70:91])
            sig_txt = line[92:103].strip()
            sigma = float(sig_txt) if sig_txt else np.nan
        except ValueError:
            raise ProductFormatError(path, lineno, "numeric ESTIMATED_VALUE (columns 71-91) and STD_DEV "
                                     "(93-103)", line) from None
        start = _sinex_time_ns(line[35:49], path, lineno, line)
        end_txt = line[50:64]
        end = _sinex_time_ns(end_txt, path, lineno, line) if end_txt.strip() else -1
        rows.append((kind, line[11:14].strip(), line[15:24].strip(), obs1, obs2, start, end,
                     value * 1e-9, sigma * 1e-9))
    if not rows and skipped == 0:
        raise ProductFormatError(path, None, "a +BIAS/SOLUTION block with OSB or DSB code entries",
                                 "none")
    cols = list(zip(*rows)) if rows else [()] * 9
    return BiasSet(path=str(path), kind=np.array(cols[0], dtype="<U3"), prn=np.array(cols[1], dtype="<U3"),
                   station=np.array(cols[2], dtype="<U9"), obs1=np.array(cols[3], dtype="<U3"),
                   obs2=np.array(cols[4], dtype="<U3"), start_ns=np.array(cols[5], dtype=np.int64),
                   end_ns=np.array(cols[6], dtype=np.int64), value_s=np.array(cols[7], dtype=float),
                   sigma_s=np.array(cols[8], dtype=float), skipped=skipped)


def read_code_biases(path) -> BiasSet:
    """A code-bias file of either kind: Bias-SINEX (first line '%=BIA') or a classic monthly
    DCB file (P1-C1, P1-P2; :func:`ctt.formats.dcb.read_dcb`), as one :class:`BiasSet`."""
    from .dcb import is_dcb, read_dcb

    first = read_text(pathlib.Path(path)).split("\n", 1)[0]
    if not first.startswith("%=BIA") and is_dcb(path):
        return read_dcb(path)
    return read_bias_sinex(path)
