"""IGS Earth rotation parameter files (ERP, version 2) -> :class:`ErpData`.

Layout (the IGS ERP version 2 format, read from the files: ``version 2`` on
the first line, then column titles and units, then one line per epoch):
MJD, Xpole and Ypole in 1e-6 arcsec, UT1−UTC in 1e-7 s, LOD in 1e-7 s/day,
their sigmas, and further columns not used here. Values are read as
whitespace-separated numbers; a data line is any line whose first field is
a number. Interpolation to an instant is linear (:meth:`ErpData.pole_arcsec`);
instants outside the file's epochs give NaN (never extrapolated). :func:`merge_erp`
joins several files (e.g. two weekly files, so the first half of a week's first
day, before its first noon epoch, is covered too).
"""

from __future__ import annotations

import dataclasses
import pathlib

import numpy as np

from ..errors import ProductFormatError
from .compression import read_text


@dataclasses.dataclass
class ErpData:
    """``mjd`` (UTC days), ``xp_arcsec``, ``yp_arcsec``, ``ut1_utc_s``, ``lod_s`` per epoch."""

    path: str
    mjd: np.ndarray
    xp_arcsec: np.ndarray
    yp_arcsec: np.ndarray
    ut1_utc_s: np.ndarray
    lod_s: np.ndarray

    def pole_arcsec(self, mjd):
        """(xp, yp) in arcsec linearly interpolated at ``mjd``; NaN outside the file's epochs."""
        m = np.asarray(mjd, dtype=float)
        inside = (m >= self.mjd[0]) & (m <= self.mjd[-1])
        x = np.where(inside, np.interp(m, self.mjd, self.xp_arcsec), np.nan)
        y = np.where(inside, np.interp(m, self.mjd, self.yp_arcsec), np.nan)
        return x, y


def read_erp(path) -> ErpData:
    path = pathlib.Path(path)
    lines = read_text(path).splitlines()
    if not lines or not lines[0].strip().lower().startswith("version 2"):
        raise ProductFormatError(path, 1, "'version 2' on the first line (IGS ERP version 2)",
                                 lines[0] if lines else "an empty file")
    rows = []
    for no, ln in enumerate(lines[1:], start=2):
        f = ln.split()
        if not f:
            continue
        try:
            mjd = float(f[0])
        except ValueError:
            continue                           # column titles and units
        try:
            row = (mjd, float(f[1]) * 1e-6, float(f[2]) * 1e-6, float(f[3]) * 1e-7, float(f[4]) * 1e-7)
            if not np.isfinite(row).all():
                raise ValueError
            rows.append(row)
        except (ValueError, IndexError):
            raise ProductFormatError(path, no, "MJD, Xpole, Ypole (1e-6 arcsec), UT1-UTC (1e-7 s), LOD "
                                     "(1e-7 s/d) as numbers", ln) from None
    if not rows:
        raise ProductFormatError(path, None, "at least one data line", "none")
    a = np.array(rows)
    a = a[np.argsort(a[:, 0])]
    if np.any(np.diff(a[:, 0]) <= 0):
        raise ProductFormatError(path, None, "epochs that increase", "a repeated MJD")
    return ErpData(str(path), a[:, 0], a[:, 1], a[:, 2], a[:, 3], a[:, 4])


def merge_erp(items) -> ErpData:
    """One :class:`ErpData` from several (e.g. consecutive weekly files), epochs in order.

    An epoch given by more than one file is taken from the first file that gives it (the
    files' values of one epoch are the same product's; a later file does not override).
    ``path`` joins the files' paths with ``"+"``.
    """
    items = list(items)
    if len(items) == 1:
        return items[0]
    if not items:
        raise ValueError("no ERP data to merge")
    cols = ("mjd", "xp_arcsec", "yp_arcsec", "ut1_utc_s", "lod_s")
    stacked = {c: np.concatenate([getattr(e, c) for e in items]) for c in cols}
    _, first = np.unique(stacked["mjd"], return_index=True)   # sorted epochs, first occurrence
    return ErpData("+".join(e.path for e in items), *(stacked[c][first] for c in cols))
