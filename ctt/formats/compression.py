"""Open RINEX-family files whatever their compression, as text.

Outer compressions: gzip (``.gz``), Unix compress (``.Z``, through
``unlzw3`` since the standard library has no LZW decoder), bzip2 (``.bz2``)
and zip (``.zip``, the first member). Inner compression: Hatanaka compact
RINEX (``.crx``, ``.??d``, or a file whose first line says ``COMPACT RINEX``),
decoded by the ``hatanaka`` package. Detection is by content (magic bytes and
the first line), the file name only breaks ties, so a misnamed file still
opens.
"""

from __future__ import annotations

import bz2
import gzip
import io
import os
import pathlib
import zipfile

from ..errors import FileFormatError, require_file

_GZIP = b"\x1f\x8b"
_LZW = b"\x1f\x9d"
_BZ2 = b"BZh"
_ZIP = b"PK\x03\x04"


def _decompress_outer(path: pathlib.Path, raw: bytes) -> bytes:
    try:
        if raw.startswith(_GZIP):
            return gzip.decompress(raw)
        if raw.startswith(_LZW):
            import unlzw3

            return unlzw3.unlzw(raw)
        if raw.startswith(_BZ2):
            return bz2.decompress(raw)
        if raw.startswith(_ZIP):
            with zipfile.ZipFile(io.BytesIO(raw)) as zf:
                names = [n for n in zf.namelist() if not n.endswith("/")]
                if not names:
                    raise FileFormatError(path, None, "a zip archive with one RINEX file", "an empty archive")
                return zf.read(names[0])
    except FileFormatError:
        raise
    except Exception as exc:  # corrupt or truncated archive
        raise FileFormatError(path, None, "a readable compressed file", f"{type(exc).__name__}: {exc}") from exc
    return raw


def read_bytes(path) -> bytes:
    """The file's content with any outer compression and Hatanaka encoding removed."""
    path = pathlib.Path(require_file(path))   # absent: exit 3; a folder or a device: exit 2
    raw = path.read_bytes()
    data = _decompress_outer(path, raw)
    if data.startswith(_GZIP) or data.startswith(_LZW) or data.startswith(_BZ2):
        data = _decompress_outer(path, data)  # doubly wrapped (seen on some archives)
    head = data[:200]
    if b"COMPACT RINEX" in head.split(b"\n", 1)[0] or b"CRINEX VERS" in head:
        import hatanaka

        try:
            data = hatanaka.decompress(data)
        except Exception as exc:
            raise FileFormatError(path, None, "a valid Hatanaka-compressed (compact RINEX) file",
                                  f"{type(exc).__name__}: {exc}") from exc
    return data


def read_text(path) -> str:
    """The file as text (ASCII per the RINEX standards; other bytes decoded as Latin-1)."""
    return read_bytes(path).decode("latin-1")


def display_name(path) -> str:
    """The path as given, for messages."""
    return os.fspath(path)
