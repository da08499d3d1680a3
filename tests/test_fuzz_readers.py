"""Mutation fuzzing of every reader of an external file or a configuration file.

Seeds are real open files (``../shared/data``, sliced to their header and a few
records so one case takes milliseconds), the demo's files and the small test
files; :mod:`fuzz_engine` damages them (truncation, byte flips, deleted and
duplicated lines, numeric garbage including NaN/inf/huge values, changed
counts, CRLF, NUL and non-UTF-8 bytes). The contract checked for every case
(DEVELOPERS.md, "Errors"): the reader returns a result, or raises a
:class:`ctt.errors.CttError` whose message names the file, with a line number
inside the file when the error is a format error that gives one; it never
hangs (an alarm of a few seconds) and never raises anything else.

The normal run does a few hundred seeded cases per reader; the ``slow`` run
(CI runs it) 10,000 per reader in a child process with a 3 GB address-space
limit, so a memory blow-up fails the test instead of the machine.
"""

from __future__ import annotations

import gzip
import json
import os
import pathlib
import random
import resource
import subprocess
import sys

import pytest

import fuzz_engine
from ctt.errors import CttError, FileFormatError

ROOT = pathlib.Path(__file__).resolve().parents[1]
SHARED = ROOT.parent / "shared" / "data"
DEMO = ROOT / "data_demo"
TD = ROOT / "tests" / "data"

NORMAL_CASES = 250
SLOW_CASES = 10_000
ALARM_S = 10


# ---------------------------------------------------------------- seeds

def _text(path: pathlib.Path) -> bytes:
    raw = path.read_bytes()
    return gzip.decompress(raw) if raw[:2] == b"\x1f\x8b" else raw


def _head_rinex_obs(path, n_epochs=6, text=None) -> bytes:
    """Header and the first epochs of a RINEX 2/3 observation file (epoch lines found by layout)."""
    lines = (text if text is not None else _text(path)).split(b"\n")
    end = next(i for i, ln in enumerate(lines) if b"END OF HEADER" in ln)
    out, seen = lines[: end + 1], 0
    for ln in lines[end + 1:]:
        is_epoch = ln[:1] == b">" or (len(ln) > 29 and ln[:1] == b" " and ln[3:4] == b" "
                                      and ln[26:29] in (b"  0", b"  1") and ln[29:32].strip().isdigit())
        if is_epoch:
            seen += 1
            if seen > n_epochs:
                break
        out.append(ln)
    return b"\n".join(out) + b"\n"


def _crx_slice(path) -> bytes:
    """The first epochs of a compact RINEX file, cut in RINEX and compressed again with hatanaka."""
    import hatanaka

    from ctt.formats.compression import read_bytes

    rnx = read_bytes(path).replace(b"\r\n", b"\n")
    return hatanaka.compress(_head_rinex_obs(None, 5, text=rnx))


def _head_records(path, n_records) -> bytes:
    """Header and the first records of a RINEX 3 navigation or RINEX clock file (records start in column 1)."""
    lines = _text(path).split(b"\n")
    end = next(i for i, ln in enumerate(lines) if b"END OF HEADER" in ln)
    starts = [i for i in range(end + 1, len(lines)) if lines[i][:1].strip()]
    return b"\n".join(lines[: starts[n_records]]) + b"\n"


def _head_lines(path, n) -> bytes:
    return b"\n".join(_text(path).split(b"\n")[:n]) + b"\n"


def _head_until(path, marker: bytes, count: int) -> bytes:
    """Lines up to (excluding) the ``count``-th line starting with ``marker`` after the header."""
    lines = _text(path).split(b"\n")
    out, seen = [], 0
    for ln in lines:
        if ln.startswith(marker):
            seen += 1
            if seen > count:
                break
        out.append(ln)
    return b"\n".join(out) + b"\n"


def _shared(rel: str):
    p = SHARED / rel
    return p if p.is_file() else None


def _cggtts_seed(tmp: pathlib.Path) -> bytes:
    import pandas as pd

    from ctt.formats.cggtts import TRACK_COLUMNS, CggttsHeader, write_cggtts

    rows = []
    for k in range(4):   # invented values: a seed for damage, not a truth
        rows.append(dict(sat=f"G{k + 3:02d}", cl="FF", mjd=59215, sttime=f"{k:02d}0200", trkl_s=780,
                         elv_deg=30.0 + k, azth_deg=100.0 + k, refsv_ns=12.3 + k, srsv_ps_s=-1.5,
                         refsys_ns=4.5 - k, srsys_ps_s=0.7, dsg_ns=1.1, ioe=40 + k, mdtr_ns=9.8,
                         smdt_ps_s=-0.3, mdio_ns=4.4, smdi_ps_s=0.2, msio_ns=5.1, smsi_ps_s=0.1,
                         isg_ns=0.9, fr=0, hc=0, frc="L3P"))
    df = pd.DataFrame(rows)[list(TRACK_COLUMNS)]
    p = tmp / "seed.cggtts"
    write_cggtts(p, df, CggttsHeader(lab="LABA", x_m=4.0e6, y_m=5.0e5, z_m=4.6e6,
                                     delays=[(25.3, "GPS C1"), (27.0, "GPS C2")]))
    return p.read_bytes()


def _bias_seed() -> bytes:
    return (TD / "products" / "bias_sample.bsx").read_bytes() if (TD / "products" / "bias_sample.bsx").is_file() \
        else b"""%=BIA 1.00 XYZ 2021:005:00000 XYZ 2020:366:00000 2021:002:00000 R 00000004
+BIAS/SOLUTION
*BIAS SVN_ PRN STATION__ OBS1 OBS2 BIAS_START____ BIAS_END______ UNIT __ESTIMATED_VALUE____ _STD_DEV___
 DSB  G063 G01           C1C  C1W  2020:366:00000 2021:002:00000 ns                -1.2340      0.0100
 DSB  G061 G02           C1W  C1C  2020:366:00000 2021:002:00000 ns                 0.5000      0.0100
 OSB  G063 G01           C1C       2020:366:00000 2021:002:00000 ns                 3.0000      0.0200
 OSB  G063 G01           L1C       2020:366:00000 2021:002:00000 cyc                0.1000      0.0010
-BIAS/SOLUTION
%=ENDBIA
"""


def seeds(reader: str, tmp: pathlib.Path) -> list[tuple[str, bytes]]:
    """(name, bytes) seeds of one reader; real files only where ../shared/data is present."""
    out: list[tuple[str, bytes]] = []

    def add(name, make, *args):
        if all(a is not None for a in args):
            out.append((name, make(*args)))

    if reader == "obs":
        for f in sorted((TD / "obs").iterdir()):
            out.append((f.name, f.read_bytes()))
        add("zimm0010.21o", _head_rinex_obs, _shared("real-2021-001/zimm0010.21o.gz"))
        add("ALDR.crx", _crx_slice, DEMO / "ALDR00XXX_R_20210010000_01D_30S_MO.crx")
        add("cagz2830.11d", _crx_slice, _shared("real-2011-283/cagz2830.11d"))
    elif reader == "nav":
        for f in sorted((TD / "nav").iterdir()):
            out.append((f.name, f.read_bytes()))
        add("brdc0010.21n", _head_lines, _shared("real-2021-001/brdc0010.21n"), 120)
        add("AMEL_MN.rnx", _head_records, _shared("real-2021-001/AMEL00NLD_R_20210010000_01D_MN.rnx"), 24)
    elif reader == "sp3":
        out.append(("mixed_sp3d.sp3", (TD / "products" / "mixed_sp3d.sp3").read_bytes()))
        add("igs21385.sp3", _head_until, _shared("real-2021-001/igs21385.sp3"), b"*", 3)
    elif reader == "clock":
        for f in ("clock_v300.clk", "clock_v304.clk"):
            out.append((f, (TD / "products" / f).read_bytes()))
        add("igs16571.clk", _head_records, _shared("real-2011-283/igs16571.clk"), 120)
    elif reader == "ionex":
        out.append(("hand0010.21i", (TD / "atmosphere" / "hand0010.21i").read_bytes()))
    elif reader == "antex":
        out.append(("satellites.atx", (TD / "products" / "satellites.atx").read_bytes()))
        add("igs08_1648.atx", _head_until, _shared("real-2011-283/igs08_1648.atx.gz"), b"   ", 10**9)
        if out[-1][0] == "igs08_1648.atx":   # keep the header and the first few antenna blocks
            ls = out[-1][1].split(b"\n")
            ends = [i for i, ln in enumerate(ls) if b"END OF ANTENNA" in ln]
            out[-1] = ("igs08_1648.atx", b"\n".join(ls[: ends[3] + 1]) + b"\n")
    elif reader == "bias":
        out.append(("sample.bsx", _bias_seed()))
    elif reader == "cggtts":
        out.append(("seed.cggtts", _cggtts_seed(tmp)))
    elif reader == "met":
        out.append(("aldr0010.21m", (DEMO / "aldr0010.21m").read_bytes()))
        add("zimm0010.21m", _head_lines, _shared("real-2021-001/zimm0010.21m"), 60)
    elif reader == "station":
        out.append(("aldr.toml", (DEMO / "aldr.toml").read_bytes()))
        for f in sorted((TD / "stations").iterdir()):
            out.append((f.name, f.read_bytes()))
    elif reader == "pair":
        out.append(("aldr-brkw.toml", (DEMO / "aldr-brkw.toml").read_bytes()))
    return out


def reader_function(reader: str):
    if reader == "obs":
        from ctt.formats.rinex_obs import read_obs as f
    elif reader == "nav":
        from ctt.formats.rinex_nav import read_nav as f
    elif reader == "sp3":
        from ctt.formats.sp3 import read_sp3 as f
    elif reader == "clock":
        from ctt.formats.rinex_clock import read_clock as f
    elif reader == "ionex":
        from ctt.formats.ionex import read_ionex as f
    elif reader == "antex":
        from ctt.formats.antex import read_antex as f
    elif reader == "bias":
        from ctt.formats.bias_sinex import read_bias_sinex as f
    elif reader == "cggtts":
        from ctt.formats.cggtts import read_cggtts as f
    elif reader == "met":
        from ctt.formats.rinex_met import read_met as f
    elif reader == "station":
        from ctt.config import load_station as f
    elif reader == "pair":
        from ctt.config import load_pair as f
    else:
        raise KeyError(reader)
    return f


READERS = ("obs", "nav", "sp3", "clock", "ionex", "antex", "bias", "cggtts", "met", "station", "pair")
#: File names the readers see (some readers look at the suffix: compression, RINEX 2 type letter).
SUFFIX = {"obs": {".crx": "fuzz.crx", "cagz2830.11d": "fuzz.11d"}, "nav": "fuzz.rnx", "sp3": "fuzz.sp3",
          "clock": "fuzz.clk", "ionex": "fuzz.21i", "antex": "fuzz.atx", "bias": "fuzz.bsx",
          "cggtts": "fuzz.cggtts", "met": "fuzz.21m", "station": "fuzz.toml", "pair": "fuzz.toml"}


def _file_name(reader, seed_name):
    rule = SUFFIX[reader]
    if isinstance(rule, dict):
        for key, name in rule.items():
            if seed_name.endswith(key):
                return name
        return "fuzz" + pathlib.Path(seed_name).suffix
    return rule


def check_case(read, path: pathlib.Path, data: bytes) -> str:
    """Read one mutated file; returns 'ok' or 'error'; raises AssertionError on a contract breach."""
    path.write_bytes(data)
    # a lone CR counts as a line end too (as for str.splitlines and most editors)
    n_lines = max(data.count(b"\n"), len(data.splitlines())) + 1
    try:
        with fuzz_engine.alarm(ALARM_S):
            read(path)
        return "ok"
    except fuzz_engine.Hang as e:
        raise AssertionError(f"{path}: {e}") from None
    except CttError as e:
        msg = str(e)
        assert str(path) in msg or path.name in msg, f"error does not name the file: {msg!r}"
        if isinstance(e, FileFormatError) and e.line is not None:
            assert 1 <= int(e.line) <= n_lines + 1, f"line {e.line} outside the file ({n_lines} lines): {msg!r}"
        return "error"


def run_cases(reader: str, n_cases: int, master_seed: int, tmp: pathlib.Path) -> dict:
    """Run ``n_cases`` seeded cases; returns outcome counts. Raises AssertionError naming the case."""
    read = reader_function(reader)
    pool = seeds(reader, tmp)
    assert pool, f"no seed files for {reader}"
    counts = {"ok": 0, "error": 0, "cases": n_cases, "seeds": len(pool)}
    if reader == "pair":   # a pair file names its station files beside it
        for f in ("aldr.toml", "brkw.toml"):
            (tmp / f).write_bytes((DEMO / f).read_bytes())
    # the unmutated seeds must read (a fuzz run on files the reader refuses proves nothing)
    for name, data in pool:
        assert check_case(read, tmp / _file_name(reader, name), data) == "ok", f"seed {name} does not read"
    for case in range(n_cases):
        rng = random.Random(master_seed * 1_000_003 + case)
        name, data = pool[case % len(pool)]
        mutated, how = fuzz_engine.mutate(data, rng)
        path = tmp / _file_name(reader, name)
        try:
            counts[check_case(read, path, mutated)] += 1
        except Exception as e:   # noqa: BLE001 - any other exception is the defect we report
            raise AssertionError(f"{reader} case {case} (seed file {name}, mutations {how}, "
                                 f"random state {master_seed}/{case}): {type(e).__name__}: {e}") from e
    return counts


@pytest.mark.parametrize("reader", READERS)
def test_reader_survives_mutations(reader, tmp_path):
    counts = run_cases(reader, NORMAL_CASES, master_seed=1, tmp=tmp_path)
    print(f"fuzz {reader}: {counts}")
    assert counts["ok"] + counts["error"] == NORMAL_CASES


def test_hypothesis_drives_the_same_engine(tmp_path):
    """hypothesis picks the random streams (and shrinks a failure to a minimal mutation)."""
    import hypothesis   # a test extra (pyproject.toml), so a missing install fails instead of skipping
    from hypothesis import HealthCheck, given, settings, strategies as st

    read = reader_function("sp3")
    name, data = seeds("sp3", tmp_path)[0]

    @settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
    @given(st.randoms(use_true_random=False))
    def one(rng):
        mutated, _ = fuzz_engine.mutate(data, rng)
        check_case(read, tmp_path / "h.sp3", mutated)

    one()
    assert hypothesis.__version__


@pytest.mark.slow
@pytest.mark.parametrize("reader", READERS)
def test_reader_survives_ten_thousand_mutations(reader, tmp_path):
    """10,000 cases in a child process limited to 3 GB of address space (a blow-up fails, not the host)."""
    code = (
        "import json, pathlib, resource, sys\n"
        f"sys.path.insert(0, {str(ROOT / 'tests')!r})\n"
        "resource.setrlimit(resource.RLIMIT_AS, (3 * 1024**3, 3 * 1024**3))\n"
        "import test_fuzz_readers as T\n"
        f"c = T.run_cases({reader!r}, {SLOW_CASES}, 2, pathlib.Path({str(tmp_path)!r}))\n"
        "print(json.dumps(c))\n"
    )
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")])))
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=3000)
    assert r.returncode == 0, r.stderr[-3000:]
    counts = json.loads(r.stdout.strip().splitlines()[-1])
    print(f"fuzz {reader} x{SLOW_CASES}: {counts}")
    assert counts["ok"] + counts["error"] == SLOW_CASES


# resource is imported for the child process's limit; keep the import checked here
assert resource.RLIMIT_AS is not None
