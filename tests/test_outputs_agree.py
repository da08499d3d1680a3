"""One demo day through `ctt daily`, then every output read back (issue 12 items 8-10).

Data: the invented demo scenario (data_demo/, truth in data_demo/scenario.toml: a logged
+5 ns cable change at ALDR at 2021-01-01T15:00Z that the station file does not enter as a
delay set). Time-column names and the 1980-01-06 epoch: ctt's convention (DEVELOPERS.md).
"""

from __future__ import annotations

import json
import logging
import pathlib
import re
import shutil

import numpy as np
import pandas as pd
import pytest

from ctt.cli import build_parser, main
from ctt.errors import EXIT_USAGE

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMO = ROOT / "data_demo"
DATE = "2021-01-01"


@pytest.fixture(scope="module")
def daily(tmp_path_factory):
    work = tmp_path_factory.mktemp("daily")
    for f in DEMO.iterdir():
        if f.is_file():
            shutil.copy(f, work / f.name)
    pair = work / "aldr-brkw.toml"
    assert main(["daily", "--config", str(pair), "--date", DATE, "-q"]) == 0
    return work, pair


@pytest.mark.slow
def test_time_columns_and_rounding_agree_everywhere(daily, capsysbinary):
    work, pair = daily
    run = work / "out" / "aldr-brkw" / DATE
    off = pd.read_csv(run / "offset.csv", dtype={"offset_ns": str, "u_ns": str})
    sat = pd.read_csv(run / "satellites.csv")
    for table in (off, sat):
        assert "time" not in table.columns
    assert "time_gps_ns" in off.columns and "time_gps_ns" in sat.columns
    # written with exactly 3 decimals (0.001 ns)
    assert off["offset_ns"].str.fullmatch(r"-?\d+\.\d{3}").all()
    # archive: the same numbers
    from ctt.archive import Archive

    with Archive(work / "out" / "ctt.sqlite") as ar:
        arc = ar.load_offsets("aldr-brkw", DATE, DATE)
        sats = ar.load_satellites("aldr-brkw", DATE)
    assert "time" not in sats.columns and {"time_gps_ns", "time_utc_ns"} <= set(sats.columns)
    from ctt.commonview import main_series

    arc = main_series(arc).reset_index(drop=True)
    np.testing.assert_array_equal(arc["offset_ns"].to_numpy(), off["offset_ns"].astype(float).to_numpy())
    # the GPS and UTC integer instants differ by the 18 leap seconds of 2021 (IERS Bulletin C)
    np.testing.assert_array_equal(off["time_gps_ns"].to_numpy() - arc["time_utc_ns"].to_numpy(), 18 * 10**9)
    # exports: CSV (comment block), JSON (object), Parquet (schema metadata): the same numbers
    for fmt in ("csv", "json", "parquet"):
        out = work / f"export.{fmt}"
        assert main(["export", "--config", str(pair), "--from", DATE, "--to", DATE, "--format", fmt,
                     "--out", str(out)]) == 0
        if fmt == "csv":
            text = out.read_text()
            meta = {ln[2:].split(": ", 1)[0]: ln[2:].split(": ", 1)[1]
                    for ln in text.splitlines() if ln.startswith("# ")}
            ex = pd.read_csv(out, comment="#", dtype={"offset_ns": str})
            assert list(ex["offset_ns"]) == list(off["offset_ns"])        # the same text
        elif fmt == "json":
            doc = json.loads(out.read_text())
            meta, ex = doc["metadata"], pd.DataFrame(doc["rows"])
        else:
            import pyarrow.parquet as pq

            meta = json.loads(pq.read_schema(out).metadata[b"ctt"])
            ex = pd.read_parquet(out)
        assert meta["pair"] == "aldr-brkw" and "clock ALDR - clock BRKW" in meta["sign"]
        assert "UTC" in meta["time_scale"] and "1980-01-06" in meta["time_scale"]
        np.testing.assert_array_equal(ex["offset_ns"].astype(float).to_numpy(), off["offset_ns"].astype(float).to_numpy())
        np.testing.assert_array_equal(ex["time_utc_ns"].to_numpy(np.int64), arc["time_utc_ns"].to_numpy())
        assert "time" not in ex.columns


@pytest.mark.slow
def test_correct_events_flags_and_config_changes(daily, capsys):
    work, pair = daily
    ev = work / "events.csv"
    ev.write_text("time_utc,event_id\n2021-01-01T06:00:00Z,1\n2021-01-01T16:00:00Z,2\n")
    out = work / "corrected.csv"
    capsys.readouterr()
    assert main(["correct-events", "--config", str(pair), "--events", str(ev), "--site", "B",
                 "--out", str(out)]) == 0
    r = pd.read_csv(out, keep_default_na=False)
    assert list(r["status"]) == ["ok", "ok"]
    # event 2 comes after the logged cable change that no delay set starts at
    assert r["warning"].iloc[0] == ""
    assert "change logged at ALDR at 2021-01-01T15:00:00Z" in r["warning"].iloc[1]
    assert "WARNING: after the change logged at ALDR" in capsys.readouterr().err  # logged too
    # enter the change as a new delay set: that note goes, but the archived day was computed
    # with the old configuration, so both events are flagged until the day is re-processed
    st = work / "aldr.toml"
    text = st.read_text()
    old = text[text.index("[[delays]]"):text.index("[[changes]]")]
    new = (old.replace("valid_from = 2020-12-01T00:00:00Z",
                       "valid_from = 2020-12-01T00:00:00Z\nvalid_until = 2021-01-01T15:00:00Z")
           + old.replace("valid_from = 2020-12-01T00:00:00Z", "valid_from = 2021-01-01T15:00:00Z")
                .replace("cable_ns = 187.3", "cable_ns = 192.3"))
    st.write_text(text.replace(old, new))
    try:
        assert main(["correct-events", "--config", str(pair), "--events", str(ev), "--site", "B",
                     "--out", str(out)]) == 0
        r = pd.read_csv(out, keep_default_na=False)
        assert all("configuration different from the current one" in w for w in r["warning"])
        assert not any("no delay set" in w for w in r["warning"])
        # backfill --check names the day and why
        capsys.readouterr()
        assert main(["backfill", "--config", str(pair), "--from", "2020-12-31", "--to", "2021-01-01",
                     "--check"]) == 0
        text_out = capsys.readouterr().out
        assert "2021-01-01: configuration changed" in text_out
        assert "not processed yet: 2020-12-31" in text_out
    finally:
        st.write_text(text)


def test_unexpected_step_flags_later_events(tmp_path):
    """A run folder whose series has a 10 ns step at 12:00 that no change log has (invented
    series: white noise 0.1 ns per 16-min point plus the step)."""
    for n in ("aldr.toml", "brkw.toml", "aldr-brkw.toml"):
        shutil.copy(DEMO / n, tmp_path / n)
    st = tmp_path / "aldr.toml"
    st.write_text(st.read_text().split("[[changes]]")[0])  # no logged change
    rng = np.random.default_rng(seed=9)
    t0 = np.datetime64("2021-01-01T00:00:00")
    times = t0 + np.arange(90) * np.timedelta64(960, "s")
    x = 150.0 + rng.normal(0, 0.1, 90) + np.where(np.arange(90) >= 45, 10.0, 0.0)
    run = tmp_path / "run"
    run.mkdir()
    pd.DataFrame({"time_utc": [str(t) + "Z" for t in times], "offset_ns": x, "u_ns": 0.1, "n_sat": 8,
                  "flag": "ok"}).to_csv(run / "offset.csv", index=False)
    ev = tmp_path / "ev.csv"
    ev.write_text("time_utc\n2021-01-01T06:00:00Z\n2021-01-01T18:00:00Z\n")
    out = tmp_path / "c.csv"
    assert main(["correct-events", "--config", str(tmp_path / "aldr-brkw.toml"), "--events", str(ev),
                 "--site", "A", "--from-dir", str(run), "--out", str(out), "--type-b-ns", "1"]) == 0
    r = pd.read_csv(out, keep_default_na=False)
    assert r["warning"].iloc[0] == ""
    m = re.search(r"unexpected phase step of ([+-][0-9.]+) ns", r["warning"].iloc[1])
    assert m, r["warning"].iloc[1]
    # the step is estimated by an offset+slope line on each side (at least 4 points of 0.1 ns white
    # noise: the end value of a 4-point line has sigma 0.1*sqrt(0.7) = 0.084 ns, the difference of the
    # two sides 0.118 ns); 3 sigma of that is the tolerance on the +10 ns put into the series
    assert abs(float(m.group(1)) - 10.0) < 0.36


def test_check_config_on_the_shipped_demo_needs_no_options(capsys):
    assert main(["check-config", str(DEMO / "aldr-brkw.toml")]) == 0
    out = capsys.readouterr().out
    assert "latest date with both observation files: 2021-01-01" in out
    assert "belongs to ALDR" in out and "belongs to BRKW" in out


def test_quiet_and_debug_after_the_subcommand():
    p = build_parser()
    assert p.parse_args(["check-config", "x.toml", "-q"]).quiet is True
    assert p.parse_args(["-q", "check-config", "x.toml"]).quiet is True
    assert p.parse_args(["check-config", "x.toml"]).quiet is False
    assert p.parse_args(["check-config", "x.toml", "--debug"]).debug is True
    assert main(["check-config", str(DEMO / "aldr-brkw.toml"), "-q"]) == 0
    assert logging.getLogger("ctt").level == logging.WARNING


def test_demo_help_says_what_it_writes():
    p = build_parser()
    sub = next(a for a in p._actions if a.dest == "command").choices["demo"]
    text = " ".join(sub.format_help().split())
    for item in ("offset.csv", "summary.json", "archive.sqlite", "report.html", "report_figures", "events_b_on_a.csv"):
        assert item in text


def test_backfill_check_lists_new_days(tmp_path, capsys):
    for f in DEMO.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    assert main(["backfill", "--config", str(tmp_path / "aldr-brkw.toml"), "--from", "2020-12-30",
                 "--to", "2021-01-01", "--check"]) == 0
    out = capsys.readouterr().out
    assert "3 day(s) not processed yet: 2020-12-30..2021-01-01" in out
    assert main(["report", str(tmp_path / "nothing.sqlite"), "--out", str(tmp_path / "r.html")]) in (2, 3)
    assert EXIT_USAGE == 2


@pytest.mark.slow
def test_readme_demo_figures_are_what_the_demo_day_gives(daily):
    """The README quotes the demo's daily value and its cable-change step: they must be what
    processing the shipped demo day gives today (a model change must update the README)."""
    work, _ = daily
    summary = json.loads(next((work / "out").rglob("summary.json")).read_text())
    dv = summary["daily_value"]
    readme = (ROOT / "README.md").read_text()
    m = re.search(r"On the demo: ([0-9.]+) ns at (\d\d:\d\d:\d\d) UTC, u_a ([0-9.]+) ns", readme)
    assert m, "README: the demo's daily value sentence is missing"
    assert float(m.group(1)) == dv["offset_ns"] and float(m.group(3)) == dv["u_a_ns"]
    assert dv["epoch_utc"][11:19] == m.group(2)
    step = summary["daily_value_detail"]["changes"][0]
    assert (step["n_before"], step["n_after"]) == (6, 6) and "(6 tracks each side)" in readme
    m2 = re.search(r"change at 15:00 UTC comes out \+([0-9.]+) ± ([0-9.]+) ns", readme)
    assert m2 and float(m2.group(1)) == round(step["size"], 2) and float(m2.group(2)) == round(step["u_size"], 2)
