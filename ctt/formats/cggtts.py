"""The time community's open common-view exchange format, CGGTTS version 2E.

:func:`write_cggtts` / :func:`read_cggtts` handle per-track files of the time
community's open common-view exchange format, version 2E (CCTF; its complete
description is the article in Metrologia 52 (2015) G1, as CCTF Recommendation 4
(2015) states). Track tables use these columns (scaled on writing to the
format's integer units, shown in brackets):

===========  =================================================  ==========
column       meaning                                            file unit
===========  =================================================  ==========
sat          satellite, RINEX 3 id ('G07')                      SAT
cl           common-view class, two hex digits (str, 'FF')      CL
mjd          MJD of the track start (int)                       MJD
sttime       start time 'hhmmss' (str, UTC)                     STTIME
trkl_s       track length, s (int)                              TRKL
elv_deg      elevation at mid-track, deg                        0.1 deg
azth_deg     azimuth at mid-track, deg                          0.1 deg
refsv_ns     local reference - satellite time at mid-track, ns  0.1 ns
srsv_ps_s    slope of refsv, ps/s                               0.1 ps/s
refsys_ns    local reference - system time at mid-track, ns     0.1 ns
srsys_ps_s   slope of refsys, ps/s                              0.1 ps/s
dsg_ns       RMS of the REFSYS fit residuals, ns                0.1 ns
ioe          ephemeris issue (int)                              IOE
mdtr_ns      modelled troposphere delay, ns                     0.1 ns
smdt_ps_s    its slope, ps/s                                    0.1 ps/s
mdio_ns      modelled ionosphere delay, ns                      0.1 ns
smdi_ps_s    its slope, ps/s                                    0.1 ps/s
msio_ns      measured ionosphere delay, ns                      0.1 ns
smsi_ps_s    its slope, ps/s                                    0.1 ps/s
isg_ns       RMS of the measured-ionosphere residuals, ns       0.1 ns
fr           GLONASS frequency channel (int; 0 otherwise)       FR
hc           receiver hardware channel (int)                    HC
frc          frequency code, e.g. 'L3P' (str)                   FRC
===========  =================================================  ==========

Sources. The 2E article itself could not be retrieved (searched for in the
stored documentation, web pages and code corpora; the programs that produce
or read such files were not used as a reference). What was read:

[R4] CCTF Recommendation 4 (2015), "On the Common Generic GNSS Time Transfer
     Standard": version V2E covers GPS, GLONASS, BeiDou, Galileo and QZSS; its
     complete description is Metrologia 52 (2015) G1.
[V01] The version-01 format as documented by time laboratories that publish
     such files (a national measurement institute's "GGTTS GPS Data Format,
     version 01" page; a national observatory's and a national research
     council's CGGTTS data-category tables), which version 2E extends:
     - header lines in this order with these meanings: REV DATE (revision
       date of the header, YYYY-MM-DD), RCVR (receiver type, serial number
       etc.), CH (number of channels, two digits), IMS (the ionosphere
       measurement system, or 99999 when the ionosphere is modelled), LAB,
       X/Y/Z (antenna coordinates, signed, metres with 2 decimals), FRAME,
       COMMENTS ('NO COMMENTS' when none), INT DLY / CAB DLY / REF DLY (internal
       receiver, antenna cable and reference 1PPS delays in ns with one
       decimal), REF, CKSUM (header checksum);
     - the column label line followed by the units line (hhmmss, s, .1dg,
       .1ns, .1ps/s);
     - column meanings and units: CL the common-view class in hexadecimal;
       MJD of the track start (five digits); STTIME hhmmss UTC of the start;
       TRKL in s (780 for a full track); ELV and AZTH at mid-track in 0.1
       degree; REFSV = laboratory reference clock - satellite time and
       REFGPS (REFSYS in 2E) = reference - system time, in 0.1 ns, at
       mid-track from a linear fit, SRSV/SRGPS their slopes in 0.1 ps/s; DSG
       the root mean square of the residuals of that fit; IOE a three-digit
       decimal ephemeris index; MDTR/MDIO modelled troposphere/ionosphere in
       0.1 ns at mid-track with slopes SMDT/SMDI in 0.1 ps/s; MSIO measured
       ionosphere in 0.1 ns ('9999 indicates no data available') with slope
       SMSI.

[HDR] Version-2E header files published by the BIPM time department for its
     time links (webtai.bipm.org, ftp/pub/tai/timelinks/taippp/header/):
     the [V01] header order under the 2E first line; 'RCVR = <model>
     (<firmware>) SN<serial>'; X/Y/Z also written unsigned with 3 decimals;
     'INT DLY = v ns (GPS P1), v ns (GPS P2)' with 'CAL_ID = ...' on the same
     line; 'REF = UTC(lab)'; CKSUM hex digits seen in lower case. The reader
     accepts all of these (tests/test_against_cggtts_v2e.py). The excerpts fold
     blanks, so no spacing and no checksum value could be checked against them.

From memory of the 2E article (not checked against its text): the first line
with five spaces after CGGTTS; the SAT column (system letter and two-digit
number) in place of PRN; ISG, FR, HC and FRC and the FRC codes ('L3P'
iono-free P1/P2, 'L1C' C/A); the field widths and positions below; the
delay line forms '<INT|SYS|TOT> DLY = v ns (SYS CODE), ... CAL_ID = ...' and
which of CAB DLY / REF DLY follow each; and the checksum rules: the header
``CKSUM`` is the sum of the ASCII codes of every character of the header lines
from the first line up to and including ``CKSUM = `` (line ends excluded),
modulo 256, written as two hex digits; each data line's ``CK`` is the same sum
over all characters before the CK field (columns 1..125 of the line with
measured ionosphere). The version-01 pages confirm only that CKSUM is a header
checksum of the same kind as CK. The reader verifies both and raises
:class:`ctt.errors.FileFormatError` with the line number on a mismatch; it
accepts lower-case hex digits and delay lists without commas.

A value that is not available (NaN) is written as a field of 9s [V01: MSIO],
which the reader maps back to NaN. Files without the measured-ionosphere
columns (MSIO, SMSI, ISG) are read too (NaN there); the writer always writes them.
"""

from __future__ import annotations

import math
import pathlib
import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import FileFormatError

TRACK_COLUMNS = ("sat", "cl", "mjd", "sttime", "trkl_s", "elv_deg", "azth_deg", "refsv_ns", "srsv_ps_s",
                 "refsys_ns", "srsys_ps_s", "dsg_ns", "ioe", "mdtr_ns", "smdt_ps_s", "mdio_ns", "smdi_ps_s",
                 "msio_ns", "smsi_ps_s", "isg_ns", "fr", "hc", "frc")

# (column, file label, width, scale to file integer or None for text/ints as is)
# Field widths and order from memory of the version 2E document (dual-frequency
# line with measured ionosphere); one space between fields.
_FIELDS = (
    ("sat", "SAT", 3, "sat"), ("cl", "CL", 2, "hex"), ("mjd", "MJD", 5, 1), ("sttime", "STTIME", 6, "hms"),
    ("trkl_s", "TRKL", 4, 1), ("elv_deg", "ELV", 3, 10), ("azth_deg", "AZTH", 4, 10),
    ("refsv_ns", "REFSV", 11, 10), ("srsv_ps_s", "SRSV", 6, 10), ("refsys_ns", "REFSYS", 11, 10),
    ("srsys_ps_s", "SRSYS", 6, 10), ("dsg_ns", "DSG", 4, 10), ("ioe", "IOE", 3, 1),
    ("mdtr_ns", "MDTR", 4, 10), ("smdt_ps_s", "SMDT", 4, 10), ("mdio_ns", "MDIO", 4, 10),
    ("smdi_ps_s", "SMDI", 4, 10), ("msio_ns", "MSIO", 4, 10), ("smsi_ps_s", "SMSI", 4, 10),
    ("isg_ns", "ISG", 3, 10), ("fr", "FR", 2, 1), ("hc", "HC", 2, 1), ("frc", "FRC", 3, "text"),
)
_IONO_ONLY = {"msio_ns", "smsi_ps_s", "isg_ns"}

_LABELS = ("SAT CL  MJD  STTIME TRKL ELV AZTH   REFSV      SRSV     REFSYS    SRSYS  DSG IOE MDTR SMDT MDIO "
           "SMDI MSIO SMSI ISG FR HC FRC CK")
_UNITS = ("             hhmmss  s  .1dg .1dg    .1ns     .1ps/s     .1ns    .1ps/s .1ns     .1ns.1ps/s.1ns.1ps/s"
          ".1ns.1ps/s.1ns")
_FIRST_LINE = "CGGTTS     GENERIC DATA FORMAT VERSION = 2E"


def _layout(iono: bool):
    """[(column, start, end)] 0-based slices of each field, and the CK slice."""
    out, pos = [], 0
    for col, _, w, kind in _FIELDS:
        if not iono and col in _IONO_ONLY:
            continue
        out.append((col, pos, pos + w, kind))
        pos += w + 1
    return out, (pos, pos + 2)


def cggtts_checksum(text: str) -> int:
    """Sum of the ASCII codes of ``text`` modulo 256 (the format's CK / CKSUM definition)."""
    return sum(text.encode("ascii")) % 256


@dataclass
class CggttsHeader:
    """Header of a version 2E file. Delays in ns; ``delay_kind`` 'INT', 'SYS' or 'TOT'.

    ``delays`` is a list of ``(value_ns, label)`` such as ``(34.6, 'GPS C1')``.
    With 'INT' the file also has CAB DLY and REF DLY lines; with 'SYS' only REF DLY;
    with 'TOT' neither (from memory of the document's three delay variants).
    """

    rev_date: str = "2015-01-01"
    rcvr: str = "INVENTED RECEIVER"
    ch: int = 0
    ims: str = "99999"
    lab: str = "LABA"
    x_m: float = 0.0
    y_m: float = 0.0
    z_m: float = 0.0
    frame: str = "ITRF"
    comments: str = "NO COMMENTS"
    delay_kind: str = "INT"
    delays: list = field(default_factory=list)
    cal_id: str = "NA"
    cab_dly_ns: float | None = 0.0
    ref_dly_ns: float | None = 0.0
    ref: str = "LOCAL CLOCK"

    def lines(self) -> list[str]:
        kind = self.delay_kind.upper()
        if kind not in ("INT", "SYS", "TOT"):
            raise ValueError(f"delay_kind must be INT, SYS or TOT, not {self.delay_kind!r}")
        dl = ", ".join(f"{v:.1f} ns ({label})" for v, label in self.delays) or "0.0 ns (GPS C1)"
        out = [_FIRST_LINE, f"REV DATE = {self.rev_date}", f"RCVR = {self.rcvr}", f"CH = {int(self.ch):02d}",
               f"IMS = {self.ims}", f"LAB = {self.lab}", f"X = {self.x_m:+.2f} m", f"Y = {self.y_m:+.2f} m",
               f"Z = {self.z_m:+.2f} m", f"FRAME = {self.frame}", f"COMMENTS = {self.comments}",
               f"{kind} DLY = {dl}     CAL_ID = {self.cal_id}"]
        if kind == "INT":
            out.append(f"CAB DLY = {self.cab_dly_ns:.1f} ns")
        if kind in ("INT", "SYS"):
            out.append(f"REF DLY = {self.ref_dly_ns:.1f} ns")
        out.append(f"REF = {self.ref}")
        for ln in out:
            ln.encode("ascii")
        return out


def representable(col: str, values) -> np.ndarray:
    """True where a numeric column's values fit their field (rounded to the file unit, not all 9s).

    NaN counts as representable (it is written as the all-9 'not available' code).
    """
    spec = {c: (w, kind) for c, _, w, kind in _FIELDS}
    if col not in spec or not isinstance(spec[col][1], int):
        raise ValueError(f"{col!r} is not a numeric CGGTTS column")
    w, kind = spec[col]
    v = np.asarray(values, dtype=float)
    with np.errstate(invalid="ignore"):
        iv = np.rint(v * kind)
        hi = 10.0 ** w - 1          # w digits
        lo = -(10.0 ** (w - 1) - 1)  # a sign and w-1 digits
        fits = (iv >= lo) & (iv < hi)  # hi itself is all 9s: the 'not available' code
    return fits | ~np.isfinite(v)


def _fmt_field(v, w, kind, col, row):
    if kind == "sat":
        s = str(v)
        if not re.match(r"^[A-Z]\d{2}$", s):
            raise ValueError(f"row {row}: sat must look like G07, found {s!r}")
        return s
    if kind == "hex":
        s = str(v).upper()
        if not re.match(r"^[0-9A-F]{2}$", s):
            raise ValueError(f"row {row}: cl must be two hex digits, found {s!r}")
        return s
    if kind == "hms":
        s = str(v)
        if isinstance(v, (int, np.integer)):
            s = f"{int(v):06d}"
        if not re.match(r"^\d{6}$", s):
            raise ValueError(f"row {row}: sttime must be 'hhmmss', found {s!r}")
        return s
    if kind == "text":
        s = str(v)
        if len(s) > w:
            raise ValueError(f"row {row}: {col} longer than {w} characters: {s!r}")
        return s.ljust(w)
    if v is None or (isinstance(v, float) and not math.isfinite(v)) or v is pd.NA:
        return "9" * w
    iv = int(round(float(v) * kind))
    s = str(iv)
    if len(s) > w or s == "9" * w:
        raise ValueError(f"row {row}: {col} = {v!r} does not fit the {w}-character field "
                         f"(units of 1/{kind}) or collides with the all-9 'not available' code")
    return s.rjust(w)


def write_cggtts(path, tracks_df: pd.DataFrame, header: CggttsHeader) -> None:
    """Write a version 2E file (dual-frequency line with measured ionosphere columns)."""
    head = header.lines()
    head_text = "".join(head) + "CKSUM = "
    lines = head + [f"CKSUM = {cggtts_checksum(head_text):02X}", "", _LABELS, _UNITS]
    layout, _ = _layout(True)
    missing = [c for c in TRACK_COLUMNS if c not in tracks_df.columns]
    if missing:
        raise ValueError(f"tracks table lacks columns {', '.join(missing)}")
    for i, rec in enumerate(tracks_df[list(TRACK_COLUMNS)].itertuples(index=False, name=None)):
        vals = dict(zip(TRACK_COLUMNS, rec))
        body = " ".join(_fmt_field(vals[c], e - s, kind, c, i) for c, s, e, kind in layout) + " "
        lines.append(body + f"{cggtts_checksum(body):02X}")
    text = "\n".join(lines) + "\n"
    p = pathlib.Path(path)
    tmp = p.with_name(p.name + ".part")
    tmp.write_text(text, encoding="ascii", newline="\n")
    tmp.replace(p)


_HEAD_RE = {
    "rev_date": r"^REV DATE = (.*)$", "rcvr": r"^RCVR = (.*)$", "ch": r"^CH = (\d+)\s*$", "ims": r"^IMS = (.*)$",
    "lab": r"^LAB = (.*)$", "x_m": r"^X = ([+-]?\d+(?:\.\d*)?) m\s*$", "y_m": r"^Y = ([+-]?\d+(?:\.\d*)?) m\s*$",
    "z_m": r"^Z = ([+-]?\d+(?:\.\d*)?) m\s*$", "frame": r"^FRAME = (.*)$", "comments": r"^COMMENTS = (.*)$",
}


def read_cggtts(path):
    """Read a version 2E file -> (CggttsHeader, tracks DataFrame); checksums verified."""
    path = pathlib.Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        from .errors import MissingInputError
        raise MissingInputError(f"{path}: CGGTTS file not found") from None
    try:
        text = raw.decode("ascii")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise FileFormatError(path, line, "ASCII text", repr(raw[exc.start:exc.start + 1])) from None
    lines = text.replace("\r\n", "\n").split("\n")
    if not re.match(r"^CGGTTS\s+GENERIC DATA FORMAT VERSION = 2E\s*$", lines[0]):
        raise FileFormatError(path, 1, "'CGGTTS GENERIC DATA FORMAT VERSION = 2E'", lines[0])
    hdr = CggttsHeader(delays=[])
    i = 1
    order = ["rev_date", "rcvr", "ch", "ims", "lab", "x_m", "y_m", "z_m", "frame", "comments"]
    for key in order:
        if i >= len(lines):
            raise FileFormatError(path, i + 1, f"the {key.upper()} header line", "end of file")
        m = re.match(_HEAD_RE[key], lines[i])
        if not m:
            raise FileFormatError(path, i + 1, f"the header line {_HEAD_RE[key][1:].split(' = ')[0]} = ...",
                                  lines[i])
        v = m.group(1).strip()
        setattr(hdr, key, int(v) if key == "ch" else float(v) if key.endswith("_m") else v)
        i += 1
    m = re.match(r"^(INT|SYS|TOT) DLY = (.*?)\s+CAL_ID = (.*)$", lines[i]) if i < len(lines) else None
    if not m:
        raise FileFormatError(path, i + 1, "'INT DLY = ...', 'SYS DLY = ...' or 'TOT DLY = ...' with CAL_ID",
                              lines[i] if i < len(lines) else "end of file")
    hdr.delay_kind, dl, hdr.cal_id = m.group(1), m.group(2), m.group(3).strip()
    # '<v> ns (<system> <code>)' items separated by commas (or, in some files, by blanks only)
    item = r"([+-]?\d+(?:\.\d*)?)\s*ns\s*\(([^)]*)\)"
    if not re.fullmatch(rf"\s*{item}(?:\s*,?\s*{item})*\s*", dl):
        raise FileFormatError(path, i + 1, "delays written as '<value> ns (<system> <code>)'", dl)
    hdr.delays.extend((float(v), lab) for v, lab in re.findall(item, dl))
    i += 1
    hdr.cab_dly_ns = hdr.ref_dly_ns = None
    for key, label, needed in (("cab_dly_ns", "CAB DLY", hdr.delay_kind == "INT"),
                               ("ref_dly_ns", "REF DLY", hdr.delay_kind in ("INT", "SYS"))):
        if not needed:
            continue
        mm = re.match(rf"^{label} = ([+-]?\d+(?:\.\d*)?) ns\s*$", lines[i]) if i < len(lines) else None
        if not mm:
            raise FileFormatError(path, i + 1, f"'{label} = <value> ns'", lines[i] if i < len(lines) else "end")
        setattr(hdr, key, float(mm.group(1)))
        i += 1
    mm = re.match(r"^REF = (.*)$", lines[i]) if i < len(lines) else None
    if not mm:
        raise FileFormatError(path, i + 1, "'REF = ...'", lines[i] if i < len(lines) else "end of file")
    hdr.ref = mm.group(1).strip()
    i += 1
    mm = re.match(r"^CKSUM = ([0-9A-Fa-f]{2})\s*$", lines[i]) if i < len(lines) else None
    if not mm:
        raise FileFormatError(path, i + 1, "'CKSUM = <two hex digits>'", lines[i] if i < len(lines) else "end")
    want = cggtts_checksum("".join(lines[:i]) + "CKSUM = ")
    if int(mm.group(1), 16) != want:
        raise FileFormatError(path, i + 1, f"header checksum {want:02X} (sum of the header's ASCII codes mod 256)",
                              lines[i])
    i += 1
    while i < len(lines) and not lines[i].strip():
        i += 1
    if i >= len(lines) or not lines[i].startswith("SAT"):
        raise FileFormatError(path, i + 1, "the column label line starting 'SAT CL  MJD'",
                              lines[i] if i < len(lines) else "end of file")
    iono = "MSIO" in lines[i].split()
    layout, ck = _layout(iono)
    i += 2  # labels and units
    rows = []
    for ln_no in range(i, len(lines)):
        ln = lines[ln_no].rstrip("\r")
        if not ln.strip():
            continue
        if len(ln) < ck[1]:
            raise FileFormatError(path, ln_no + 1, f"a data line of {ck[1]} characters", ln)
        want = cggtts_checksum(ln[:ck[0]])
        try:
            got = int(ln[ck[0]:ck[1]], 16)
        except ValueError:
            got = None
        if got != want:
            raise FileFormatError(path, ln_no + 1, f"data-line checksum {want:02X} (columns 1-{ck[0]})", ln)
        rec = {}
        for col, s, e, kind in layout:
            f = ln[s:e]
            try:
                if kind in ("sat", "hex", "hms"):
                    if kind == "hms" and not re.match(r"^\d{6}$", f):
                        raise ValueError
                    rec[col] = f
                elif kind == "text":
                    rec[col] = f.strip()
                elif f.strip() == "9" * (e - s):
                    rec[col] = np.nan  # all 9s: not available
                else:
                    iv = int(f)
                    rec[col] = iv if kind == 1 else iv / kind
            except ValueError:
                raise FileFormatError(path, ln_no + 1, f"{col.split('_')[0].upper()} in columns {s + 1}-{e}",
                                      f) from None
        rows.append(rec)
    df = pd.DataFrame(rows, columns=list(TRACK_COLUMNS))
    for c in _IONO_ONLY:
        if not iono:
            df[c] = np.nan
    return hdr, df
