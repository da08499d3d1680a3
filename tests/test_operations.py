"""Daily operation on the demo scenario: idempotent re-runs, failures recorded, reprocessing after a calibration.

The demo pair (data_demo/, invented and simulated) is copied into a temporary
folder so the tests never write into the repository.
"""

import pathlib
import shutil
import sqlite3

import numpy as np
import pytest

from ctt.cli import main

DEMO = pathlib.Path(__file__).resolve().parents[1] / "data_demo"


@pytest.fixture()
def demo(tmp_path):
    work = tmp_path / "demo"
    shutil.copytree(DEMO, work, ignore=shutil.ignore_patterns("out", "*.sqlite*"))
    pair = work / "aldr-brkw.toml"
    text = pair.read_text()
    if "[output]" not in text:
        text += '\n[output]\ndir = "out"\n'
    pair.write_text(text)
    return work, pair


def _counts(db):
    con = sqlite3.connect(db)
    try:
        out = {t: con.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0] for t in ("offsets", "runs")}
        # per-satellite rows: one compressed block per day (ctt.archive, table satellite_days)
        out["satellites"] = con.execute("SELECT COALESCE(SUM(n_rows), 0) FROM satellite_days").fetchone()[0]
        return out
    finally:
        con.close()


@pytest.mark.slow
def test_daily_twice_is_idempotent_and_backfill_sees_calibration_changes(demo, capsys):
    work, pair = demo
    assert main(["daily", "--config", str(pair), "--date", "2021-01-01", "--no-report"]) == 0
    db = next((work / "out").glob("*.sqlite"))
    first = _counts(db)
    assert first["offsets"] > 0 and first["satellites"] > 0
    # same inputs, same configuration: skipped; forced: replaced, same rows
    assert main(["daily", "--config", str(pair), "--date", "2021-01-01", "--no-report"]) == 0
    assert "already done" in capsys.readouterr().out
    assert main(["daily", "--config", str(pair), "--date", "2021-01-01", "--force", "--no-report"]) == 0
    second = _counts(db)
    assert second["offsets"] == first["offsets"] and second["satellites"] == first["satellites"]
    with sqlite3.connect(db) as con:
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        dup = con.execute("SELECT COUNT(*) FROM (SELECT pair, date, system, time_utc, COUNT(*) c FROM offsets "
                          "GROUP BY pair, date, system, time_utc HAVING c > 1)").fetchone()[0]
    assert dup == 0

    # nothing to do for the day ...
    capsys.readouterr()
    assert main(["backfill", "--config", str(pair), "--from", "2021-01-01", "--to", "2021-01-01", "--check"]) == 0
    assert "0 of 1 day(s) to process" in capsys.readouterr().out
    # ... until a delay set covering it changes (a new calibration of B's cable)
    st_b = work / "brkw.toml"
    st_b.write_text(st_b.read_text().replace("cable_ns = 96.8", "cable_ns = 97.3"))
    assert main(["backfill", "--config", str(pair), "--from", "2021-01-01", "--to", "2021-01-01", "--check"]) == 0
    out = capsys.readouterr().out
    assert "2021-01-01: configuration changed" in out


@pytest.mark.slow
def test_a_missing_or_corrupt_day_is_recorded_and_others_are_kept(demo, capsys):
    work, pair = demo
    # day 2 has no files at all: recorded as failed, day 1 processed
    rc = main(["backfill", "--config", str(pair), "--from", "2021-01-01", "--to", "2021-01-02", "--no-report"])
    assert rc == 3      # README: backfill exits with its worst failed day's code, here a missing input
    err = capsys.readouterr().err
    assert "2021-01-02 [exit 3]" in err and "no obs_a file" in err
    db = next((work / "out").glob("*.sqlite"))
    with sqlite3.connect(db) as con:
        status = dict(con.execute("SELECT date, latest_status FROM days").fetchall())
        n1 = con.execute("SELECT COUNT(*) FROM offsets WHERE date='2021-01-01'").fetchone()[0]
    assert status == {"2021-01-01": "ok", "2021-01-02": "failed"}
    # corrupt day 1's observation file: the re-run fails with the reason, the old results stay
    obs = next(work.glob("ALDR*_MO.crx"))
    obs.write_bytes(obs.read_bytes()[:5000])
    rc = main(["daily", "--config", str(pair), "--date", "2021-01-01", "--no-report"])
    assert rc == 1      # a truncated file is a format error (README: exit 1), not a missing one
    assert str(obs.name) in capsys.readouterr().err
    with sqlite3.connect(db) as con:
        status = dict(con.execute("SELECT date, latest_status FROM days").fetchall())
        n1b = con.execute("SELECT COUNT(*) FROM offsets WHERE date='2021-01-01'").fetchone()[0]
    assert status["2021-01-01"] == "failed" and n1b == n1


@pytest.mark.slow
def test_export_gives_the_rows_of_offset_csv(demo, tmp_path):
    import pandas as pd

    work, pair = demo
    assert main(["daily", "--config", str(pair), "--date", "2021-01-01", "--no-report"]) == 0
    run = next((work / "out").glob("*/2021-01-01"))
    out = tmp_path / "export.csv"
    assert main(["export", "--config", str(pair), "--from", "2021-01-01", "--to", "2021-01-01",
                 "--format", "csv", "--out", str(out)]) == 0
    exp = pd.read_csv(out, comment="#")  # the main series by default, as offset.csv (README: '#' header block)
    ref = pd.read_csv(run / "offset.csv")
    assert list(exp["time_utc"]) == list(ref["time_utc"])
    assert list(exp["system"]) == list(ref["system"])
    for col in ("offset_ns", "u_ns", "n_sat"):
        a, b = exp[col].to_numpy(float), ref[col].to_numpy(float)
        assert np.array_equal(np.isnan(a), np.isnan(b))
        assert np.nanmax(np.abs(a - b)) <= 1e-4  # offset.csv keeps 4 decimals
    assert list(exp["flag"]) == list(ref["flag"])


@pytest.mark.slow
def test_two_simultaneous_daily_runs(demo):
    import subprocess
    import sys

    work, pair = demo
    cmd = [sys.executable, "-m", "ctt", "daily", "--config", str(pair), "--date", "2021-01-01", "--force",
           "--no-report", "--lock-timeout", "120"]
    procs = [subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for _ in range(2)]
    codes = [p.wait(timeout=300) for p in procs]
    # both complete one after the other (the second waits for the lock), or the second
    # gives up with the documented exit code 4; never both writing at once
    assert sorted(codes) in ([0, 0], [0, 4])
    db = next((work / "out").glob("*.sqlite"))
    with sqlite3.connect(db) as con:
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        dup = con.execute("SELECT COUNT(*) FROM (SELECT pair, date, system, time_utc, COUNT(*) c FROM offsets "
                          "GROUP BY pair, date, system, time_utc HAVING c > 1)").fetchone()[0]
        runs = con.execute("SELECT COUNT(*) FROM runs WHERE status='ok'").fetchone()[0]
    assert dup == 0 and runs == codes.count(0)


@pytest.mark.slow
def test_backfill_on_a_dask_cluster(demo, capsys):
    distributed = pytest.importorskip("dask.distributed")
    work, pair = demo
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        rc = main(["backfill", "--config", str(pair), "--from", "2021-01-01", "--to", "2021-01-02",
                   "--scheduler", cluster.scheduler_address, "--no-report"])
    assert rc == 3      # README: the worst failed day's code; 2021-01-02 has no files (exit 3)
    out = capsys.readouterr()
    assert "1 day(s) processed, 1 failed" in out.out
    db = next((work / "out").glob("*.sqlite"))
    with sqlite3.connect(db) as con:
        status = dict(con.execute("SELECT date, latest_status FROM days").fetchall())
    assert status == {"2021-01-01": "ok", "2021-01-02": "failed"}


@pytest.mark.slow
def test_a_file_of_another_day_under_the_requested_name_is_refused(demo, capsys):
    work, pair = demo
    for f in list(work.glob("*20210010000*")):
        f.rename(f.with_name(f.name.replace("20210010000", "20210020000")))
    rc = main(["daily", "--config", str(pair), "--date", "2021-01-02", "--no-report"])
    assert rc == 1
    assert "hold data of 2021-01-01" in capsys.readouterr().err


@pytest.mark.slow
def test_rebuild_archive_from_run_folders_gives_back_the_days(demo, capsys):
    """A lost archive comes back from the run folders: same rows, values to the CSV's 0.1 ps, and the
    fingerprints, so the next daily run sees the day as done."""
    import numpy as np

    from ctt.archive import Archive

    work, pair = demo
    assert main(["daily", "--config", str(pair), "--date", "2021-01-01", "--no-report"]) == 0
    db = next((work / "out").glob("*.sqlite"))
    with Archive(db) as arc:
        before = arc.load_offsets("aldr-brkw", extras=False)
        done = arc.days_done("aldr-brkw")
    db.rename(db.with_name("damaged.sqlite"))
    capsys.readouterr()
    assert main(["rebuild-archive", "--config", str(pair)]) == 0
    assert "1 day(s) stored" in capsys.readouterr().out
    with Archive(db) as arc:
        after = arc.load_offsets("aldr-brkw", extras=False)
        assert arc.days_done("aldr-brkw") == done
        assert arc.verify_day("aldr-brkw", "2021-01-01")
    assert len(after) == len(before) > 0
    np.testing.assert_array_equal(after["time_utc_ns"], before["time_utc_ns"])
    assert list(after["system"]) == list(before["system"]) and list(after["flag"]) == list(before["flag"])
    # offset.csv writes 4 decimals: the rebuilt values are within half a unit of the last digit
    np.testing.assert_allclose(after["offset_ns"], before["offset_ns"], rtol=0, atol=0.5e-4 + 1e-9)
    np.testing.assert_allclose(after["u_ns"], before["u_ns"], rtol=0, atol=0.5e-4 + 1e-9)
    # the rebuilt archive refuses to be overwritten, and the next daily run skips the day
    assert main(["rebuild-archive", "--config", str(pair)]) == 2
    assert main(["daily", "--config", str(pair), "--date", "2021-01-01", "--no-report"]) == 0
    assert "already done" in capsys.readouterr().out


def _synthetic_archive(db, pair, first_day: str, n_days: int, bin_s: int = 960):
    """Days stored with the archive's own ``store_day``: invented data (a random-walk offset, the
    demo's G/E/ALL systems on most days, GPS alone on every fifth, flagged bins on every day,
    a daily value at each noon). Returns {date: (times, flags)} of the main series' rows."""
    import datetime as dt

    import pandas as pd

    from ctt import timescales as ts
    from ctt.archive import Archive

    rng = np.random.default_rng(15)
    d0 = dt.date.fromisoformat(first_day)
    main_rows = {}
    with Archive(db) as arc:
        for k in range(n_days):
            date = (d0 + dt.timedelta(days=k)).isoformat()
            t = ts.date_to_ns(date) + np.arange(0, 86400, bin_s, dtype=np.int64) * ts.NS_PER_S
            systems = ["G"] if k % 5 == 0 else ["ALL", "E", "G"]
            frames = []
            for s in systems:
                flag = np.where(rng.random(len(t)) < 0.05, "few_satellites", "ok")
                frames.append(pd.DataFrame({
                    "time_utc_ns": t, "offset_ns": 3.0 + np.cumsum(rng.normal(0, 0.1, len(t))) + k * 0.01,
                    "u_ns": np.full(len(t), 1.2), "n_sat": rng.integers(4, 12, len(t)), "flag": flag,
                    "system": s, "u_type_a_ns": np.full(len(t), 0.4)}))
                if s == systems[0]:     # 'ALL' when present, else 'G': the main series (ctt.commonview)
                    main_rows[date] = (t, flag)
            dv = {"epoch_utc": f"{date}T12:00:00Z", "offset_ns": 3.0 + 0.01 * k, "u_a_ns": 1.0, "u_b_ns": 1.1,
                  "u_ns": 1.5, "definition": "invented"}
            arc.store_day(pair, date, pd.concat(frames, ignore_index=True), None, {"messages": []},
                          daily_value=dv, stations="ALDR-BRKW")
    return main_rows


def _report_from_full_load(pc, arc, days, out_html):
    """The report as refresh_report made it before the windowed load: every offset of the archive
    read, the main series picked (one system per date), the window cut from its last point, every
    daily value passed."""
    from ctt import operations, timescales as ts
    from ctt.commonview import main_series
    from ctt.report import build_report

    off = main_series(arc.load_offsets(pc.name))
    t_from = int(off["time_utc_ns"].max()) - days * ts.NS_PER_DAY
    summary = {"daily_values": arc.load_daily_values(pc.name).to_dict(orient="records"),
               "station_a": pc.station_a.id, "station_b": pc.station_b.id}
    bounds = operations._day_boundaries(pc, off, t_from)
    if bounds:
        summary["day_boundaries"] = bounds
    off = off[off["time_utc_ns"] >= t_from].drop(columns="system")
    return build_report(off, None, summary, operations.hardware_changes(pc), out_html=out_html,
                        time_from_ns=t_from, title=f"{pc.name}: clock {pc.station_a.id} − clock {pc.station_b.id}",
                        source=str(arc.path))


def _record_reads(monkeypatch, arc) -> list:
    """The (date_from, date_to) of every load_offsets call on ``arc`` from now on."""
    asked, real = [], arc.load_offsets
    monkeypatch.setattr(arc, "load_offsets", lambda *a, **k: asked.append(a[1:3]) or real(*a, **k))
    return asked


@pytest.mark.slow
def test_report_refresh_reads_only_its_window_and_shows_what_the_full_load_shows(demo, tmp_path, monkeypatch):
    """Issue 15: the refresh after each daily run read the whole archive (99 s at a year's size
    against 35 s at a month's). It now reads a date range; the report it writes must hold the
    same data as one made from every row of the archive, cut to the same window."""
    import json

    from ctt import timescales as ts
    from ctt.archive import Archive
    from ctt.config import load_pair
    from ctt.operations import refresh_report

    work, pair = demo
    pc = load_pair(pair)
    days, n_days = 30, 50
    main_rows = _synthetic_archive(pc.archive_path, pc.name, "2021-02-01", n_days)
    with Archive(pc.archive_path) as arc:
        asked = _record_reads(monkeypatch, arc)
        path = refresh_report(pc, arc, days=days)
        # one date-range read: the last date stored is 2021-03-22, the window starts 30 days before
        # its last bin (2021-02-20T23:44), the read two dates before that, not the 50 days stored
        assert asked == [("2021-02-18",)]
        got = json.loads(path.with_suffix(".json").read_text())
        monkeypatch.undo()
        _report_from_full_load(pc, arc, days, tmp_path / "full.html")
    ref = json.loads((tmp_path / "full.json").read_text())
    got.pop("generated_utc"), ref.pop("generated_utc")
    assert got == ref
    # the window's own numbers, counted from what was stored: its main-series bins and flagged bins
    t_end = max(int(t.max()) for t, _ in main_rows.values())
    t_from = t_end - days * ts.NS_PER_DAY
    t_ok = np.concatenate([t[(t >= t_from) & (f == "ok")] for t, f in main_rows.values()])
    n_flagged = sum(int(np.count_nonzero((t >= t_from) & (f != "ok"))) for t, f in main_rows.values())
    assert got["series"]["n_flagged"] == n_flagged > 0
    assert got["series"]["n_samples"] == len(t_ok)
    assert got["series"]["start"] == ts.to_iso(int(t_ok.min()))
    # daily values from a day before the window on (ctt.report._daily_values: epoch >= start - 1 day)
    want = [d for d in main_rows if ts.parse_iso(f"{d}T12:00:00Z") >= t_from - ts.NS_PER_DAY]
    assert [d["date"] for d in got["daily_values"]] == want and len(want) == days + 1

    # a day filed under a date far from its data (2021-03-23's bins under 2021-02-02): the window is
    # no longer a date range, so the whole archive is read, and the report is again the full load's
    import pandas as pd

    t_late = ts.date_to_ns("2021-03-23") + np.arange(0, 86400, 960, dtype=np.int64) * ts.NS_PER_S
    late = pd.DataFrame({"time_utc_ns": t_late, "offset_ns": 3.5, "u_ns": 1.2, "n_sat": 7, "flag": "ok",
                         "system": "G"})
    with Archive(pc.archive_path) as arc:
        arc.store_day(pc.name, "2021-02-02", late, None, {"messages": []})
        asked = _record_reads(monkeypatch, arc)
        got = json.loads(refresh_report(pc, arc, days=days).with_suffix(".json").read_text())
        assert asked == [("2021-02-18",), ()]
        monkeypatch.undo()
        _report_from_full_load(pc, arc, days, tmp_path / "full.html")
    ref = json.loads((tmp_path / "full.json").read_text())
    got.pop("generated_utc"), ref.pop("generated_utc")
    assert got == ref and got["series"]["end"] == ts.to_iso(int(t_late[-1]))
