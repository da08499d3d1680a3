"""Seeded mutation of input files for the reader fuzz tests (``test_fuzz_readers.py``).

Each case takes one seed file (real open data sliced to a few epochs, the
demo's files, or the small test files) and applies one to three mutations
drawn from the classes a damaged or hand-edited file shows in practice:
truncation, byte flips, deleted or duplicated lines, a number replaced by
garbage (NaN, inf, huge, negative, empty), an integer count changed, CRLF line
ends, NUL bytes and bytes that are not UTF-8. The only acceptable outcomes of
reading such a file are a result or a :class:`ctt.errors.CttError` naming the
file (and for a format error a line inside the file, or none); anything else
(an internal exception, a hang beyond the alarm, a line number outside the
file) is a defect.

Written by hand because the mutations are specific to line-oriented
fixed-column text; ``hypothesis`` drives the same engine through its
``randoms()`` strategy in one test so that its shrinking shows a minimal case.
"""

from __future__ import annotations

import contextlib
import random
import re
import signal

NUMBER = re.compile(rb"[-+]?\d+(?:\.\d*)?(?:[EeDd][-+]?\d+)?")
INTEGER = re.compile(rb"(?<![\d.])\d+(?![\d.])")
GARBAGE = (b"NaN", b"nan", b"inf", b"-inf", b"1e308", b"9" * 30, b"-1", b"0", b"", b"  ", b"1D+99999",
           b"-99999999999", b"0x1F", b"1,5")


def _lines(data: bytes) -> list[bytes]:
    return data.split(b"\n")


def truncate(data: bytes, rng: random.Random) -> bytes:
    return data[: rng.randrange(0, max(1, len(data)))]


def flip_bytes(data: bytes, rng: random.Random) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 8)):
        if b:
            b[rng.randrange(len(b))] = rng.randrange(256)
    return bytes(b)


def delete_line(data: bytes, rng: random.Random) -> bytes:
    ls = _lines(data)
    if len(ls) > 1:
        del ls[rng.randrange(len(ls))]
    return b"\n".join(ls)


def duplicate_line(data: bytes, rng: random.Random) -> bytes:
    ls = _lines(data)
    i = rng.randrange(len(ls))
    ls.insert(i, ls[i])
    return b"\n".join(ls)


def swap_lines(data: bytes, rng: random.Random) -> bytes:
    ls = _lines(data)
    if len(ls) > 2:
        i, j = rng.randrange(len(ls)), rng.randrange(len(ls))
        ls[i], ls[j] = ls[j], ls[i]
    return b"\n".join(ls)


def _replace_match(data: bytes, rng: random.Random, pattern, new_for) -> bytes:
    matches = list(pattern.finditer(data))
    if not matches:
        return data
    m = matches[rng.randrange(len(matches))]
    new = new_for(m.group(0))
    if rng.random() < 0.5:   # keep the field width (fixed-column formats)
        w = len(m.group(0))
        new = new[-w:].rjust(w)
    return data[: m.start()] + new + data[m.end():]


def numeric_garbage(data: bytes, rng: random.Random) -> bytes:
    return _replace_match(data, rng, NUMBER, lambda old: rng.choice(GARBAGE))


def count_change(data: bytes, rng: random.Random) -> bytes:
    def new(old: bytes) -> bytes:
        v = int(old)
        return str(rng.choice([v + 1, v - 1, 0, v * 10 + 7, 10 ** rng.randint(3, 12), -v])).encode()
    return _replace_match(data, rng, INTEGER, new)


def crlf(data: bytes, rng: random.Random) -> bytes:
    return data.replace(b"\n", b"\r\n")


def nul_bytes(data: bytes, rng: random.Random) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 4)):
        b.insert(rng.randrange(len(b) + 1), 0)
    return bytes(b)


def non_utf8(data: bytes, rng: random.Random) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 4)):
        b.insert(rng.randrange(len(b) + 1), rng.choice([0xC3, 0xE9, 0xFF, 0x80, 0xFE]))
    return bytes(b)


MUTATIONS = (truncate, flip_bytes, delete_line, duplicate_line, swap_lines, numeric_garbage,
             numeric_garbage, count_change, count_change, crlf, nul_bytes, non_utf8)


def mutate(data: bytes, rng: random.Random) -> tuple[bytes, list[str]]:
    """One to three mutations of ``data``; returns the bytes and the mutation names."""
    names = []
    for _ in range(rng.choice((1, 1, 2, 3))):
        m = rng.choice(MUTATIONS)
        data = m(data, rng)
        names.append(m.__name__)
    return data, names


class Hang(Exception):
    pass


@contextlib.contextmanager
def alarm(seconds: int):
    """Raise :class:`Hang` if the block runs longer than ``seconds`` (main thread, POSIX)."""
    def on_alarm(signum, frame):
        raise Hang(f"no result within {seconds} s")
    old = signal.signal(signal.SIGALRM, on_alarm)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
