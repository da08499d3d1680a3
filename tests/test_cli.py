"""The command line's contract, through the real ``ctt`` entry point (one process per case).

The README's exit-code table is the one statement of the contract: each
documented code is exercised here by at least three cases (counted by a test
below), and no user's mistake may end as an "internal error". The cases
include the reproducers of the fault-finding pass on error handling (bad
dates, option values the pair file refuses, outputs escaping their folders,
patterns that are not the documented placeholders, folders and devices given
as input files, damaged or empty archives, locked archives, a day whose
navigation file is of another date).
"""

from __future__ import annotations

import collections
import fcntl
import json
import os
import pathlib
import re
import shutil
import socket
import subprocess
import sys

import pytest

from ctt import errors

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMO = ROOT / "data_demo"
OBS_A = "ALDR00XXX_R_20210010000_01D_30S_MO.crx"
OBS_B = "BRKW00XXX_R_20210010000_01D_30S_MO.crx"
NAV = "BRDC00XXX_R_20210010000_01D_MN.rnx"
NAV_OTHER_DAY = ROOT.parent / "shared" / "data" / "real-2016-001" / "brdc0010.16n"


def _ctt_command() -> list[str]:
    """The installed console script beside this interpreter, else ``python -m ctt``."""
    script = pathlib.Path(sys.executable).with_name("ctt")
    return [str(script)] if script.is_file() else [sys.executable, "-m", "ctt"]


def run_ctt(argv, cwd) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run(_ctt_command() + [str(a) for a in argv], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=300)


# ----------------------------------------------------------------- the work folder

def _variant(work: pathlib.Path, name: str, old: str, new: str) -> None:
    text = (work / "aldr-brkw.toml").read_text()
    assert old in text, old
    (work / name).write_text(text.replace(old, new))


def _small_archive(path: pathlib.Path) -> None:
    """An archive holding one invented day (enough pages to damage the data, not the schema)."""
    import numpy as np
    import pandas as pd

    from ctt.archive import Archive
    from ctt.timescales import parse_iso

    t = parse_iso("2021-01-01T00:00:00Z") + np.arange(2000, dtype=np.int64) * 30_000_000_000
    off = pd.DataFrame({"time_utc_ns": t, "offset_ns": np.linspace(0, 1, t.size), "u_ns": 0.5, "n_sat": 7,
                        "flag": "ok"})
    with Archive(path) as arc:
        arc.store_day("aldr-brkw", "2021-01-01", off, None, {"inputs": {}})


@pytest.fixture(scope="module")
def work(tmp_path_factory) -> pathlib.Path:
    w = tmp_path_factory.mktemp("cli")
    demo = w / "demo"
    shutil.copytree(DEMO, demo, ignore=shutil.ignore_patterns("out", "*.sqlite*"))
    pair = demo / "aldr-brkw.toml"
    nav_line = 'nav = "BRDC00XXX_R_{yyyy}{doy:03d}0000_01D_MN.rnx"'
    _variant(demo, "report5.toml", '[output]\ndir = "out"', '[output]\ndir = "out"\nreport = 5')
    _variant(demo, "wide.toml", nav_line, 'nav = "BRDC{doy:999999999}"')
    _variant(demo, "attr.toml", nav_line, 'nav = "BRDC{station.__class__}"')
    _variant(demo, "escape.toml", '[output]\ndir = "out"', '[output]\ndir = "../escaped_out"')
    _variant(demo, "absolute.toml", '[output]\ndir = "out"', f'[output]\ndir = "{(w / "elsewhere").as_posix()}"')
    _variant(demo, "dotdot.toml", 'name = "aldr-brkw"', 'name = ".."')
    (demo / "a_file").write_text("not a folder\n")
    _variant(demo, "dirfile.toml", '[output]\ndir = "out"', '[output]\ndir = "a_file"')
    # an input found outside the data root (the data root is a sub-folder; the pattern climbs out)
    (demo / "root").mkdir()
    _variant(demo, "outside.toml", 'data_root = "."', 'data_root = "root"')
    text = (demo / "outside.toml").read_text().replace('obs = "{STATION}', 'obs = "../{STATION}')
    (demo / "outside.toml").write_text(text)
    # the demo pair file in a folder with a long name (the message text must not matter)
    deep = w / ("a-long-folder-name-for-the-pair-file-" * 3).rstrip("-")
    shutil.copytree(demo, deep, ignore=shutil.ignore_patterns("out", "*.sqlite*"))
    # archives: a damaged one, a good one with one day, an empty (0-byte) one
    for name in ("damaged", "good"):
        _small_archive(w / f"{name}.sqlite")
    raw = bytearray((w / "damaged.sqlite").read_bytes())
    raw[4096 * 2:] = b"\xa5" * (len(raw) - 4096 * 2)
    (w / "damaged.sqlite").write_bytes(bytes(raw))
    for name, archive in (("damaged", "../damaged.sqlite"), ("good", "../good.sqlite")):
        # the pair file's output root is the work folder, so that the archive may sit there
        _variant(demo, f"{name}.toml", '[output]\ndir = "out"',
                 f'[output]\nroot = ".."\ndir = "demo/out"\narchive = "{name}.sqlite"')
    (w / "plain.rnx").write_text("this is not a RINEX file\n" * 5)
    (w / "broken.rnx.gz").write_bytes(b"\x1f\x8b\x08\x00" + b"\x00" * 40)
    (w / "series").mkdir()
    (demo / "out" / "aldr-brkw").mkdir(parents=True)     # where rebuild-archive looks for run folders
    assert pair.is_file()
    return w


def _hold_lock(archive: pathlib.Path):
    """Take the run lock of ``archive`` as a live run on this host would (ctt.archive.run_lock)."""
    archive.parent.mkdir(parents=True, exist_ok=True)
    lock = archive.with_name(archive.name + ".lock")
    fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    os.ftruncate(fd, 0)
    os.pwrite(fd, json.dumps({"pid": os.getpid(), "host": socket.gethostname(), "time": "now"}).encode(), 0)
    return fd


D = "demo/aldr-brkw.toml"
DAY = ["--date", "2021-01-01"]
PAIR_CFG = ["pair", "--config", D, *DAY, "--out", "run"]
MEASURE = ["measure", f"demo/{OBS_A}", "--nav", f"demo/{NAV}", "--station", "demo/aldr.toml"]
PAIR_FILES = ["pair", "--obs-a", f"demo/{OBS_A}", "--obs-b", f"demo/{OBS_B}", "--nav", f"demo/{NAV}",
              "--station-a", "demo/aldr.toml", "--station-b", "demo/brkw.toml", "--out", "run"]
LONG = ("a-long-folder-name-for-the-pair-file-" * 3).rstrip("-")

#: (id, argv, expected exit code, a text the output must contain: the file, key or option named)
CASES = [
    # 0: success
    ("version", ["--version"], 0, "ctt "),
    ("help", ["--help"], 0, "Exit codes"),
    ("info", ["info", f"demo/{OBS_A}"], 0, "ALDR"),
    ("check-config", ["check-config", D, *DAY], 0, "ok: pair aldr-brkw"),
    # 1: processing error (inputs readable, job failed)
    ("info-not-rinex", ["info", "plain.rnx"], 1, "plain.rnx"),
    ("info-broken-gzip", ["info", "broken.rnx.gz"], 1, "broken.rnx.gz"),
    ("export-damaged-archive", ["export", "--config", "demo/damaged.toml", "--from", "2021-01-01",
                                "--to", "2021-01-01"], 1, "damaged.sqlite"),
    ("backfill-damaged-archive", ["backfill", "--config", "demo/damaged.toml", "--from", "2021-01-01",
                                  "--to", "2021-01-01", "--check"], 1, "rebuild-archive"),
    ("ppp-erp-not-erp", ["ppp", f"demo/{OBS_A}", "--station", "demo/aldr.toml", "--sp3", f"demo/{NAV}",
                         "--erp", "plain.rnx", "--out", "ppp"], 1, "plain.rnx"),
    # 2: usage or configuration error
    ("no-command", [], 2, "usage"),
    ("pair-feb-30", [*PAIR_CFG[:3], "--date", "2021-02-30", "--out", "run"], 2, "2021-02-30"),
    ("pair-month-13", [*PAIR_CFG[:3], "--date", "2021-13-01", "--out", "run"], 2, "2021-13-01"),
    ("pair-yesterday", [*PAIR_CFG[:3], "--date", "yesterday", "--out", "run"], 2, "yesterday"),
    ("daily-feb-30", ["daily", "--config", D, "--date", "2021-02-30"], 2, "2021-02-30"),
    ("backfill-bad-date", ["backfill", "--config", D, "--from", "2021-01-01", "--to", "2021-02-29"], 2,
     "2021-02-29"),
    ("report-number", ["daily", "--config", "demo/report5.toml", *DAY], 2, "[output.report]"),
    ("pattern-width", ["daily", "--config", "demo/wide.toml", *DAY], 2, "{doy:999999999}"),
    ("pattern-attribute", ["daily", "--config", "demo/attr.toml", *DAY], 2, "{station.__class__}"),
    ("output-escapes", ["daily", "--config", "demo/escape.toml", *DAY], 2, "[output.dir]"),
    ("output-absolute", ["daily", "--config", "demo/absolute.toml", *DAY], 2, "[output.dir]"),
    ("pair-name-dotdot", ["daily", "--config", "demo/dotdot.toml", *DAY], 2, "[pair.name]"),
    ("output-dir-is-file", ["daily", "--config", "demo/dirfile.toml", *DAY], 2, "[output.dir]"),
    ("input-outside-root", ["daily", "--config", "demo/outside.toml", *DAY], 2, "data_root"),
    ("measure-out-folder", [*MEASURE, "--out", "series"], 2, "--out"),
    ("measure-out-below-file", [*MEASURE, "--out", "demo/a_file/x.csv"], 2, "a_file"),
    ("pair-out-is-file", [*PAIR_FILES[:-1], "demo/a_file"], 2, "a_file"),
    ("bin-0", [*PAIR_CFG, "--mode", "epochs", "--bin", "0"], 2, "--bin"),
    ("bin-negative", [*PAIR_CFG, "--bin", "-30"], 2, "--bin"),
    ("mask-negative", [*PAIR_CFG, "--elevation-mask", "-5"], 2, "--elevation-mask"),
    ("mask-100", [*PAIR_FILES, "--elevation-mask", "100"], 2, "--elevation-mask"),
    ("smoothing-negative", [*MEASURE, "--smoothing", "-600"], 2, "--smoothing"),
    ("mad-k-negative", [*PAIR_CFG, "--mad-k", "-1"], 2, "--mad-k"),
    ("min-common-0", [*PAIR_CFG, "--min-common", "0"], 2, "--min-common"),
    ("codes-unknown", [*PAIR_CFG, "--codes", "FOO,BAR"], 2, "--codes"),
    ("all-in-view-without-sp3", [*PAIR_FILES, "--mode", "all-in-view"], 2, "--sp3"),
    ("all-in-view-config-without-sp3", [*PAIR_CFG, "--mode", "all-in-view"], 2, "sp3"),
    ("input-is-folder", ["info", "demo"], 2, "demo"),
    ("input-is-device", [*MEASURE[:1], "/dev/null", *MEASURE[2:]], 2, "/dev/null"),
    ("ppp-mask-100", ["ppp", f"demo/{OBS_A}", "--station", "demo/aldr.toml", "--sp3", f"demo/{NAV}", "--out",
                      "ppp", "--elevation-mask", "100"], 2, "--elevation-mask"),
    ("ppp-input-is-folder", ["ppp", "demo", "--station", "demo/aldr.toml", "--sp3", f"demo/{NAV}", "--out",
                             "ppp"], 2, "is a folder"),
    ("pair-config-and-erp", [*PAIR_CFG, "--erp", "plain.rnx"], 2, "--erp"),
    ("lock-timeout-negative", ["daily", "--config", D, *DAY, "--lock-timeout", "-5"], 2, "--lock-timeout"),
    ("series-is-device", ["stability", "/dev/null"], 2, "/dev/null"),
    ("rebuild-over-archive", ["rebuild-archive", "--config", "demo/good.toml"], 2, "good.sqlite"),
    # 3: missing input, or no usable data
    ("info-missing", ["info", "demo/nothing.rnx"], 3, "nothing.rnx"),
    ("daily-missing-day", ["daily", "--config", D, "--date", "2021-01-02", "--no-report"], 3, "2021-01-02"),
    pytest.param("daily-missing-day-long-path", ["daily", "--config", f"{LONG}/aldr-brkw.toml", "--date",
                                                 "2021-01-03", "--no-report"], 3, "2021-01-03",
                 marks=pytest.mark.slow),
    ("backfill-missing-days", ["backfill", "--config", D, "--from", "2021-01-04", "--to", "2021-01-05",
                               "--no-report"], 3, "2021-01-05"),
    ("ppp-missing-erp", ["ppp", f"demo/{OBS_A}", "--station", "demo/aldr.toml", "--sp3", f"demo/{NAV}",
                         "--erp", "demo/none.erp", "--out", "ppp"], 3, "none.erp"),
    ("pair-missing-obs", [*PAIR_FILES[:2], "demo/none.crx", *PAIR_FILES[3:]], 3, "none.crx"),
    pytest.param("export-empty-range", ["export", "--config", "demo/good.toml", "--from", "2020-01-01",
                                        "--to", "2020-01-31"], 3, "good.sqlite", marks=pytest.mark.slow),
    pytest.param("measure-nav-of-another-day", [*MEASURE[:3], str(NAV_OTHER_DAY), *MEASURE[4:]], 3, "0 of",
                 marks=pytest.mark.slow),
    # 4: the archive is locked by another run and the wait timed out
    ("daily-locked", ["daily", "--config", "demo/good.toml", *DAY, "--lock-timeout", "0.3"], 4, "locked"),
    ("backfill-locked", ["backfill", "--config", "demo/good.toml", "--from", "2021-01-01", "--to",
                         "2021-01-01", "--force", "--lock-timeout", "0.3"], 4, "locked"),
    ("rebuild-locked", ["rebuild-archive", "--config", "demo/good.toml", "--archive", "rebuilt.sqlite",
                        "--lock-timeout", "0.3"], 4, "locked"),
]


def _values(c):
    return tuple(c.values) if hasattr(c, "values") else c


@pytest.mark.parametrize("name,argv,code,named", CASES, ids=[_values(c)[0] for c in CASES])
def test_exit_code(name, argv, code, named, work):
    if name == "measure-nav-of-another-day" and not NAV_OTHER_DAY.is_file():
        pytest.skip(f"real open data not present at {NAV_OTHER_DAY}")
    fd = None
    if name.endswith("-locked"):
        target = work / ("rebuilt.sqlite" if name == "rebuild-locked" else "good.sqlite")
        fd = _hold_lock(target)
    try:
        res = run_ctt(argv, cwd=work)
    finally:
        if fd is not None:
            os.close(fd)
    out = res.stdout + res.stderr
    assert "internal error" not in out, out
    assert "Traceback" not in out, out
    assert res.returncode == code, out
    assert named in out, out
    if code != 0:
        # one line says what went wrong (argparse's own errors come after its usage line)
        lines = [ln for ln in res.stderr.splitlines() if re.match(r"^ctt( [\w-]+)?: error: ", ln)]
        assert lines, res.stderr


def test_every_documented_exit_code_has_three_cases():
    """README's table lists the codes; each must be exercised by >= 3 cases above."""
    counts = collections.Counter(_values(c)[2] for c in CASES)
    documented = readme_exit_codes()
    assert set(documented) == {0, 1, 2, 3, 4}
    for code in documented:
        assert counts[code] >= 3, (code, counts)


def readme_exit_codes() -> dict[int, str]:
    text = (ROOT / "README.md").read_text()
    section = text.split("## Exit codes", 1)[1].split("\n## ", 1)[0]
    return {int(m.group(1)): m.group(2).strip() for m in re.finditer(r"^\| (\d) \| (.+?) \|$", section, re.M)}


def test_readme_table_is_the_contract_of_ctt_errors():
    """The meanings in ctt.errors are the README's words, code for code (one contract)."""
    assert readme_exit_codes() == errors.EXIT_MEANING


def test_error_classes_map_to_their_documented_codes():
    e = errors
    # README: 1 processing, 2 usage/configuration, 3 missing input or no usable data, 4 locked
    assert e.exit_code_for(e.ConfigError("p.toml", "pair.name", "bad")) == 2
    assert e.exit_code_for(e.UsageError("x")) == 2
    assert e.exit_code_for(e.MissingInputError("x")) == 3
    assert e.exit_code_for(e.NoDataError("x")) == 3
    assert e.exit_code_for(e.LockTimeoutError("x")) == 4
    assert e.exit_code_for(e.FileFormatError("f", 3, "a header")) == 1
    assert e.exit_code_for(e.ArchiveError("a.sqlite", "damaged", "restore it")) == 1
    assert e.exit_code_for(IsADirectoryError(21, "Is a directory", "d")) == 2
    assert e.exit_code_for(FileNotFoundError(2, "No such file", "f")) == 3
    assert e.exit_code_for(ZeroDivisionError()) == 1          # a bug stays a processing error
    assert e.UsageError("x").exit_code == 2                     # the attribute reads the same table
    # backfill's worst day: configuration before processing before missing input
    assert e.worst_exit_code([3, 1, 3]) == 1
    assert e.worst_exit_code([3, 2, 1]) == 2
    assert e.worst_exit_code([0, 3]) == 3
    assert e.worst_exit_code([]) == 0


def test_starting_the_command_line_imports_no_numerical_library():
    """``ctt --help`` builds every parser; numpy, pandas, scipy, matplotlib load only to run a command."""
    code = ("import sys; from ctt.cli import build_parser; build_parser(); "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in "
            "('numpy', 'pandas', 'scipy', 'matplotlib', 'allantools', 'hatanaka')))")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, check=True)
    assert res.stdout.strip() == "[]", res.stdout


def test_export_formats_listed_without_pandas_match_the_writer():
    from ctt.commands.export import FORMATS
    from ctt.exports import OUT_FORMATS

    assert FORMATS == OUT_FORMATS


@pytest.mark.slow
def test_daily_outside_data_root_and_missing_input_do_not_depend_on_message_text(work):
    """Item 1 of the fault-finding pass: the code comes from the error's class, whatever the path length."""
    short = run_ctt(["daily", "--config", D, "--date", "2021-01-06", "--no-report"], cwd=work)
    long = run_ctt(["daily", "--config", f"{LONG}/aldr-brkw.toml", "--date", "2021-01-06", "--no-report"],
                   cwd=work)
    assert short.returncode == long.returncode == 3, short.stderr + long.stderr


def test_codes_not_in_the_file_are_reported_not_silently_replaced(caplog):
    """--codes names codes the file lacks: the priority lists choose others, and a warning says so."""
    import types

    from ctt.commands._common import warn_unused_codes

    day = types.SimpleNamespace(station_id="ALDR", info={"codes": {"G01": "C1C+C2W", "G02": "C1C+C2W"}})
    with caplog.at_level("WARNING", logger="ctt"):
        warn_unused_codes(day, "C1W,C2W")
    assert "C1W" in caplog.text and "C2W not" not in caplog.text and "used C1C,C2W" in caplog.text
    caplog.clear()
    with caplog.at_level("WARNING", logger="ctt"):
        warn_unused_codes(day, "C1C,C2W")
    assert caplog.text == ""
