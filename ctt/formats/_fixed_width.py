"""Fixed-width column helpers shared by the SP3 and RINEX clock readers (vectorised over lines)."""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from ..errors import ProductFormatError

def _line_matrix(lines: Sequence[bytes], width: int) -> np.ndarray:
    """Lines as a (n, width) uint8 matrix, blank padded (NULs become spaces)."""
    if not lines:
        return np.zeros((0, width), dtype=np.uint8)
    arr = np.array(lines, dtype=f"S{width}")
    mat = arr.view(np.uint8).reshape(len(lines), width).copy()
    mat[mat == 0] = 32
    return mat


def _fields(mat: np.ndarray, a: int, b: int) -> np.ndarray:
    """Columns a..b-1 (0-based) of each row as a bytes array."""
    sub = np.ascontiguousarray(mat[:, a:b])
    return sub.view(f"S{b - a}").ravel()


def _numbers(mat, a, b, *, path, line_no, lines, what, dtype=np.float64, blank=np.nan):
    """Parse a fixed-width numeric field of every row; blank fields become ``blank``.

    On a bad value raises :class:`ProductFormatError` naming the first bad line.
    """
    sub = np.ascontiguousarray(mat[:, a:b])
    isblank = (sub == 32).all(axis=1)
    if isblank.any():
        sub[isblank, -1] = ord("0")
    text = sub.view(f"S{b - a}").ravel()
    try:
        out = text.astype(dtype)
    except (ValueError, OverflowError):
        for i, t in enumerate(text):
            try:
                if not t.isascii():   # Python's float() takes e.g. U+0085 as blank, numpy does not
                    raise ValueError(t)
                dtype(t.decode("latin-1"))
            except (ValueError, OverflowError):
                raise ProductFormatError(path, int(line_no[i]), what,
                                         lines[i].decode("latin-1")) from None
        raise  # pragma: no cover - astype and the per-value parse disagree
    if isblank.any():
        if np.issubdtype(np.dtype(dtype), np.floating):
            out[isblank] = blank
        else:
            out[isblank] = blank if not (isinstance(blank, float) and math.isnan(blank)) else -1
    return out


def _sat_ids(raw: np.ndarray) -> np.ndarray:
    """3-byte satellite fields to RINEX 3 ids: blank system is GPS, blank digit is 0."""
    mat = raw.view(np.uint8).reshape(-1, 3).copy()
    mat[:, 0] = np.where(mat[:, 0] == 32, ord("G"), mat[:, 0])
    mat[:, 1:] = np.where(mat[:, 1:] == 32, ord("0"), mat[:, 1:])
    # latin-1 maps every byte to one character, so a stray non-ASCII byte gives an id
    # that matches nothing (and is reported with its line) instead of a decode error
    return np.char.decode(mat.view("S3").ravel(), "latin-1").astype("<U3")
