"""SQLite archive: replace-in-one-transaction, failures, staleness, locking, crash safety.

External reference for soundness: SQLite's own ``PRAGMA integrity_check`` (stdlib sqlite3).
"""

from __future__ import annotations

import json
import math
import multiprocessing as mp
import os
import random
import signal
import socket
import sqlite3
import threading
import time

import numpy as np
import pandas as pd
import pytest

from ctt.archive import Archive, inputs_record, offsets_checksum
from ctt.errors import (EXIT_LOCKED, ArchiveError, ConfigError, FileFormatError, LockTimeoutError, ProcessingError,
                        exit_code_for)
from ctt.timescales import parse_iso

PAIR = "laba-labb"
DAY = "2021-01-01"
T0 = parse_iso("2021-01-01T00:00:00Z")


def make_day(version: int, n: int = 2880, nsat: int = 8):
    """A deterministic day; each version differs in size and values."""
    rng = np.random.default_rng(version)
    n = n - 97 * version
    t = T0 + np.arange(n, dtype=np.int64) * 30_000_000_000
    off = pd.DataFrame({"time_utc_ns": t, "offset_ns": rng.normal(5.0 * version, 1.0, n),
                        "u_ns": np.full(n, 1.5), "n_sat": np.full(n, nsat), "flag": "ok"})
    sat = pd.DataFrame({"time_utc_ns": np.repeat(t, nsat), "sat": [f"G{i + 1:02d}" for i in range(nsat)] * n,
                        "value_ns": rng.normal(0, 1, n * nsat)})
    return off, sat


def _checksum(off):
    rows = zip([""] * len(off), off["time_utc_ns"].tolist(), off["offset_ns"].tolist(), off["u_ns"].tolist(),
               off["n_sat"].tolist(), off["flag"].tolist())
    return offsets_checksum(rows)


def test_store_and_load(tmp_path):
    off, sat = make_day(0)
    with Archive(tmp_path / "a.sqlite") as a:
        a.store_day(PAIR, DAY, off, sat, {"config_hash": "c1", "version": "0.1.0"})
        got = a.load_offsets(PAIR, DAY, DAY)
        assert list(got.columns[:7]) == ["time_utc", "time_utc_ns", "mjd_utc", "offset_ns", "u_ns", "n_sat", "flag"]
        np.testing.assert_array_equal(got["time_utc_ns"].to_numpy(), off["time_utc_ns"].to_numpy())
        np.testing.assert_array_equal(got["offset_ns"].to_numpy(), off["offset_ns"].to_numpy())  # exact: REAL is binary64
        assert got["time_utc"].iloc[1] == "2021-01-01T00:00:30.000000000Z"
        assert got["mjd_utc"].iloc[0] == 59215.0   # MJD of 2021-01-01 (common practice: MJD 59215)
        assert len(a.load_satellites(PAIR, DAY)) == len(sat)
        assert a.verify_day(PAIR, DAY)
        assert a.integrity_check() == "ok"
        mode = sqlite3.connect(tmp_path / "a.sqlite").execute("PRAGMA journal_mode").fetchone()[0]
        assert mode == "wal"


def test_rerun_is_idempotent_and_replaces(tmp_path):
    off0, sat0 = make_day(0)
    off1, sat1 = make_day(1)
    with Archive(tmp_path / "a.sqlite") as a:
        a.store_day(PAIR, DAY, off0, sat0, {})
        a.store_day(PAIR, DAY, off0, sat0, {})
        assert len(a.load_offsets(PAIR)) == len(off0)
        a.store_day(PAIR, DAY, off1, sat1, {})
        got = a.load_offsets(PAIR)
        assert len(got) == len(off1) and len(a.load_satellites(PAIR, DAY)) == len(sat1)
        assert a.day_info(PAIR, DAY)["checksum"] == _checksum(off1)
        assert len(a.runs(PAIR, DAY)) == 3


def test_systems_share_times(tmp_path):
    off, _ = make_day(0, n=10)
    both = pd.concat([off.assign(system="G"), off.assign(system="ALL", offset_ns=off["offset_ns"] + 1)])
    with Archive(tmp_path / "a.sqlite") as a:
        a.store_day(PAIR, DAY, both, None, {})
        assert len(a.load_offsets(PAIR)) == 20 and a.verify_day(PAIR, DAY)
        got = a.load_offsets(PAIR, system="ALL")
        np.testing.assert_array_equal(got["offset_ns"].to_numpy(), off["offset_ns"].to_numpy() + 1)


def test_extra_columns_and_nan(tmp_path):
    off, _ = make_day(0, n=10)
    off["u_ns"] = np.nan
    off["u_type_a_ns"] = 0.25
    with Archive(tmp_path / "a.sqlite") as a:
        a.store_day(PAIR, DAY, off, None, {})
        got = a.load_offsets(PAIR)
        assert got["u_ns"].isna().all() and (got["u_type_a_ns"] == 0.25).all()
        assert "u_type_a_ns" not in a.load_offsets(PAIR, extras=False).columns


def test_failure_keeps_previous_results(tmp_path):
    off, sat = make_day(0)
    inp = tmp_path / "obs.txt"
    inp.write_text("hello")
    rec = inputs_record({"obs_a": inp, "sp3": None})
    # SHA-256 of b"hello" (FIPS 180-4 test-style vector; common practice)
    assert rec["obs_a"]["sha256"] == "2cf24dba5fb0a30e26e83b2ac5b9e29e1b161e5c1fa7425e73043362938b9824"
    with Archive(tmp_path / "a.sqlite") as a:
        a.store_day(PAIR, DAY, off, sat, {"inputs": rec, "config_hash": "c1"})
        done_before = a.days_done(PAIR)
        a.record_failure(PAIR, DAY, "nav file truncated", {"config_hash": "c2", "messages": ["nav file truncated"]})
        assert len(a.load_offsets(PAIR)) == len(off)          # kept
        info = a.day_info(PAIR, DAY)
        assert info["latest_status"] == "failed" and info["run_id"] != info["latest_run_id"]
        assert a.days_done(PAIR) == done_before
        runs = a.runs(PAIR, DAY)
        assert list(runs["status"]) == ["ok", "failed"]
        assert json.loads(runs["messages"].iloc[1]) == ["nav file truncated"]   # once, not twice
        assert json.loads(runs["inputs_json"].iloc[0])["obs_a"]["sha256"] == rec["obs_a"]["sha256"]
        a.record_failure(PAIR, "2021-01-02", "no common satellites", {})
        assert "2021-01-02" not in a.days_done(PAIR)
        assert a.verify_day(PAIR, "2021-01-02")


def test_days_done_and_stale(tmp_path):
    off, sat = make_day(0, n=50)
    with Archive(tmp_path / "a.sqlite") as a:
        for d in ("2021-01-01", "2021-01-02", "2021-01-03"):
            a.store_day(PAIR, d, off, sat, {"config_hash": "c1", "inputs": {"obs_a": {"sha256": d}}})
        done = a.days_done(PAIR)
        assert sorted(done) == ["2021-01-01", "2021-01-02", "2021-01-03"]
        assert done["2021-01-01"][1] == "c1" and done["2021-01-01"][0] != done["2021-01-02"][0]
        assert a.mark_stale(PAIR, ["2021-01-02", "2021-01-03", "2021-02-01"], "cable delay recalibrated") == 2
        assert a.stale_days(PAIR) == {"2021-01-02": "cable delay recalibrated", "2021-01-03": "cable delay recalibrated"}
        assert sorted(a.days_done(PAIR)) == ["2021-01-01"]
        a.store_day(PAIR, "2021-01-02", off, sat, {"config_hash": "c2"})
        assert a.stale_days(PAIR) == {"2021-01-03": "cable delay recalibrated"}
        assert a.days_done(PAIR)["2021-01-02"][1] == "c2"
        assert a.days_done("other-pair") == {}


def test_not_an_archive(tmp_path):
    p = tmp_path / "junk.sqlite"
    p.write_bytes(b"this is not a database file at all" * 200)
    with pytest.raises(FileFormatError) as ei:
        Archive(p)
    assert str(p) in str(ei.value) and "SQLite archive" in str(ei.value)
    assert p.read_bytes().startswith(b"this is not")        # left untouched


def test_repeated_times_refused(tmp_path):
    off, _ = make_day(0, n=5)
    off.loc[3, "time_utc_ns"] = off.loc[2, "time_utc_ns"]
    with Archive(tmp_path / "a.sqlite") as a:
        with pytest.raises(ProcessingError, match="repeated"):
            a.store_day(PAIR, DAY, off, None, {})
        assert a.day_info(PAIR, DAY) is None


def test_exception_mid_transaction_rolls_back(tmp_path):
    off0, sat0 = make_day(0)
    with Archive(tmp_path / "a.sqlite") as a:
        a.store_day(PAIR, DAY, off0, sat0, {})
        off1, sat1 = make_day(1)
        sat1["bad"] = [object()] * len(sat1)   # json falls back to str(): fine; force a failure instead:
        bad = off1.copy()
        bad["n_sat"] = [object()] * len(bad)   # sqlite3 cannot bind an object -> error inside the txn
        with pytest.raises(sqlite3.Error):
            a.store_day(PAIR, DAY, bad, sat1, {})
        assert a.verify_day(PAIR, DAY) and a.day_info(PAIR, DAY)["checksum"] == _checksum(off0)
        assert len(a.load_satellites(PAIR, DAY)) == len(sat0)


# ---------------------------------------------------------------- locking

def test_second_writer_times_out_with_exit_code_4(tmp_path):
    path = tmp_path / "a.sqlite"
    a = Archive(path)
    b = Archive(path, timeout_s=0.3)
    off, sat = make_day(0, n=20)
    with a._write("hold"):
        t = time.monotonic()
        with pytest.raises(LockTimeoutError) as ei:
            b.store_day(PAIR, DAY, off, sat, {})
        assert time.monotonic() - t >= 0.29
    assert ei.value.exit_code == EXIT_LOCKED == 4
    assert "another run is writing" in str(ei.value) and str(path) in str(ei.value)
    b.store_day(PAIR, DAY, off, sat, {})   # free again
    assert a.verify_day(PAIR, DAY)
    a.close(), b.close()


def test_second_writer_waits_then_completes(tmp_path):
    path = tmp_path / "a.sqlite"
    a = Archive(path)
    off, sat = make_day(0, n=20)
    done = []

    def second():
        with Archive(path, timeout_s=10) as b:   # sqlite3 connections stay in their thread
            b.store_day(PAIR, DAY, off, sat, {})
        done.append(time.monotonic())

    with a._write("hold"):
        th = threading.Thread(target=second)
        th.start()
        time.sleep(0.3)
        assert not done        # still waiting while the first holds the write lock
        released = time.monotonic()
    th.join(10)
    assert done and done[0] >= released
    assert a.verify_day(PAIR, DAY)
    a.close()


def _writer_proc(path, version, timeout_s, q):
    try:
        off, sat = make_day(version)
        with Archive(path, timeout_s=timeout_s) as a:
            a.store_day(PAIR, DAY, off, sat, {"version": str(version)})
        q.put(("ok", version))
    except LockTimeoutError as exc:
        q.put(("locked", str(exc)))


def test_two_simultaneous_writers_no_duplicates(tmp_path):
    path = tmp_path / "a.sqlite"
    Archive(path).close()
    ctx = mp.get_context("fork")
    q = ctx.Queue()
    procs = [ctx.Process(target=_writer_proc, args=(path, v, 30.0, q)) for v in (1, 2)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(60)
    results = sorted(q.get(timeout=5) for _ in procs)
    assert [r[0] for r in results] == ["ok", "ok"]   # the second waited and completed
    with Archive(path) as a:
        n = a._con.execute("SELECT COUNT(*) FROM offsets").fetchone()[0]
        info = a.day_info(PAIR, DAY)
        assert n == info["n_offsets"] and a.verify_day(PAIR, DAY)
        assert info["checksum"] in (_checksum(make_day(1)[0]), _checksum(make_day(2)[0]))
        assert len(a.runs(PAIR, DAY)) == 2
        assert a.integrity_check() == "ok"


def _hold_run_lock(path, ready_w):
    with Archive(path) as a, a.run_lock():
        os.write(ready_w, b"r")
        time.sleep(60)


def test_run_lock_waits_and_takes_over_dead_holder(tmp_path):
    path = tmp_path / "a.sqlite"
    with Archive(path, timeout_s=0.3) as a:
        with a.run_lock() as lock:
            held = json.loads(lock.read_text())
            assert held["pid"] == os.getpid() and held["host"] == socket.gethostname()
            # a live holder (this process, another open of the file) -> the second attempt times out
            with pytest.raises(LockTimeoutError, match=f"PID {os.getpid()}"):
                with a.run_lock(timeout_s=0.3, poll_s=0.05):
                    pass
        assert lock.read_text() == ""            # released: record emptied
        # a holder killed with SIGKILL: its lock is taken over at once
        ctx = mp.get_context("fork")
        r, w = os.pipe()
        p = ctx.Process(target=_hold_run_lock, args=(path, w))
        p.start()
        os.read(r, 1)
        with pytest.raises(LockTimeoutError, match=f"PID {p.pid}"):
            with a.run_lock(timeout_s=0.2, poll_s=0.05):
                pass
        os.kill(p.pid, signal.SIGKILL)
        p.join()
        assert json.loads(lock.read_text())["pid"] == p.pid   # its record is still there
        with a.run_lock(timeout_s=0.3):
            assert json.loads(lock.read_text())["pid"] == os.getpid()
        # a record of a dead PID written by hand (e.g. an older run) is taken over too
        lock.write_text(json.dumps({"pid": p.pid, "host": socket.gethostname(), "time": "2021-01-01T00:00:00Z"}))
        with a.run_lock(timeout_s=0.3):
            assert json.loads(lock.read_text())["pid"] == os.getpid()
        # a lock recorded by another host is never broken
        lock.write_text(json.dumps({"pid": 1, "host": "some-other-host", "time": "2021-01-01T00:00:00Z"}))
        with pytest.raises(LockTimeoutError, match="some-other-host.*if that host is down"):
            with a.run_lock(timeout_s=0.2, poll_s=0.05):
                pass


# ---------------------------------------------------------------- crash safety

KILL_N = 500    # bins per day in the kill trials (x8 satellite rows): a store takes ~0.05 s here


def _store_forever(path, w, versions):
    # child of fork: alternate two versions of the day; report 's' before each store, 'c' after its commit
    a = Archive(path, timeout_s=5)
    os.write(w, b"r")
    k = 0
    while True:
        off, sat = versions[k % 2]
        os.write(w, b"s")
        a.store_day(PAIR, DAY, off, sat, {"version": str(k)})
        os.write(w, b"c")
        k += 1


def _kill_trials(tmp_path, trials, random_state):
    path = tmp_path / "k.sqlite"
    days = {v: make_day(v, n=KILL_N) for v in (0, 1, 2)}
    sums = {_checksum(days[v][0]): v for v in days}
    off0, sat0 = days[0]
    with Archive(path) as a:
        store_s = math.inf
        for _ in range(2):                        # scale the kill window to this machine's speed
            t = time.monotonic()
            a.store_day(PAIR, DAY, off0, sat0, {})
            store_s = min(store_s, time.monotonic() - t)
    current = 0                                   # version the archive holds
    rng = random.Random(random_state)
    ctx = mp.get_context("fork")
    killed_mid_store = 0
    for trial in range(trials):
        r, w = os.pipe()
        p = ctx.Process(target=_store_forever, args=(path, w, [days[1], days[2]]))
        p.start()
        os.close(w)
        assert os.read(r, 1) == b"r"
        time.sleep(rng.uniform(0.0, 2.5 * store_s))  # before, inside or between stores
        os.kill(p.pid, signal.SIGKILL)
        p.join()
        assert p.exitcode == -signal.SIGKILL
        log = b""
        while chunk := os.read(r, 4096):
            log += chunk
        os.close(r)
        k = log.count(b"c")
        committed = current if k == 0 else (1 if (k - 1) % 2 == 0 else 2)
        in_progress = 1 if k % 2 == 0 else 2 if log.endswith(b"s") else None
        killed_mid_store += in_progress is not None
        with Archive(path, timeout_s=5) as a:
            assert a.integrity_check() == "ok", trial
            info = a.day_info(PAIR, DAY)
            assert a.verify_day(PAIR, DAY), trial            # row counts and checksum agree
            assert info["checksum"] in sums, trial           # one whole version, never a mixture
            v = sums[info["checksum"]]
            # the old day or the new one (a commit may land just before the kill stops the 'c')
            assert v in (committed, in_progress), (trial, v, committed, in_progress)
            assert info["n_satellites"] == len(days[v][1])
            current = v
            if trial % 5 == 0:   # the next write completes
                got = a.load_offsets(PAIR)
                np.testing.assert_array_equal(got["offset_ns"].to_numpy(), days[v][0]["offset_ns"].to_numpy())
                a.store_day(PAIR, DAY, off0, sat0, {})
                assert a.verify_day(PAIR, DAY)
                current = 0
    with Archive(path) as a:
        a.store_day(PAIR, DAY, off0, sat0, {})
        assert a.verify_day(PAIR, DAY) and a.integrity_check() == "ok"
    return killed_mid_store


def test_sigkill_during_store_day(tmp_path):
    mid = _kill_trials(tmp_path, trials=20, random_state=1)
    assert mid >= 5          # most kills land inside a store (stores fill the child's time)


@pytest.mark.slow
def test_sigkill_during_store_day_many(tmp_path):
    mid = _kill_trials(tmp_path, trials=50, random_state=2)
    assert mid >= 15


def test_empty_archive_is_kept_aside_with_a_warning(tmp_path, caplog):
    """A 0-byte archive (truncated copy, full disk) is never silently replaced."""
    p = tmp_path / "ctt.sqlite"
    p.write_bytes(b"")
    with caplog.at_level("WARNING", logger="ctt.archive"):
        with Archive(p) as a:
            off, sat = make_day(0, n=10, nsat=2)
            a.store_day(PAIR, DAY, off, sat)
    aside = sorted(tmp_path.glob("ctt.sqlite.empty-*"))
    assert len(aside) == 1 and aside[0].stat().st_size == 0
    assert aside[0].name in caplog.text and "0 bytes" in caplog.text
    with Archive(p) as a:
        assert len(a.load_offsets(PAIR)) == 10


def test_damaged_pages_name_the_file_and_the_way_back(tmp_path):
    p = tmp_path / "ctt.sqlite"
    off, sat = make_day(0)
    with Archive(p) as a:
        a.store_day(PAIR, DAY, off, sat)
    raw = bytearray(p.read_bytes())
    raw[4096 * 2:] = b"\xa5" * (len(raw) - 4096 * 2)     # page 1 (schema) intact, data pages garbage
    p.write_bytes(bytes(raw))
    with pytest.raises(ArchiveError) as ei:
        with Archive(p) as a:
            a.load_offsets(PAIR)
            a.days_done(PAIR)
    msg = str(ei.value)
    assert str(p) in msg and "rebuild-archive" in msg and "backup" in msg
    assert exit_code_for(ei.value) == 1          # README: processing error
    assert bytes(raw) == p.read_bytes()          # left as it was, for inspection


def test_read_only_archive_is_a_configuration_error(tmp_path, monkeypatch):
    """Opened read-only (as a file without write permission is, for a non-root user): exit 2."""
    import sqlite3

    import ctt.archive as arch

    p = tmp_path / "ctt.sqlite"
    off, sat = make_day(0, n=10, nsat=2)
    with Archive(p) as a:
        a.store_day(PAIR, DAY, off, sat)
    real_connect = sqlite3.connect

    def read_only(path, *args, **kwargs):
        return real_connect(f"file:{path}?mode=ro", *args, uri=True, **kwargs)

    monkeypatch.setattr(arch.sqlite3, "connect", read_only)
    with pytest.raises(ConfigError) as ei:
        with Archive(p) as a:
            a.store_day(PAIR, DAY, off, sat)
    assert str(p) in str(ei.value) and "writable" in str(ei.value)
    assert exit_code_for(ei.value) == 2


def test_last_date_and_rows_dated_before_a_window(tmp_path):
    """What the report's windowed read relies on (ctt.operations.report_window): the latest date
    stored, and whether a row dated before the window's first date lies inside it. An archive made
    before the time index gets it when opened."""
    off, _ = make_day(0, n=100)
    db = tmp_path / "a.sqlite"
    with Archive(db) as a:
        assert a.last_date(PAIR) is None
        a.store_day(PAIR, DAY, off, None, {"messages": []})
        late = off.assign(time_utc_ns=off["time_utc_ns"] + 9 * 86_400_000_000_000)   # data of 2021-01-10 ...
        a.store_day(PAIR, "2021-01-03", late, None, {"messages": []})                # ... filed under 01-03
        a.store_day(PAIR, "2021-01-10", off.assign(time_utc_ns=off["time_utc_ns"] + 9 * 86_400_000_000_000),
                    None, {"messages": []})
        assert a.last_date(PAIR) == "2021-01-10" and a.last_date("other") is None
        t10 = T0 + 9 * 86_400_000_000_000
        assert a.offsets_dated_before(PAIR, "2021-01-05", t10)          # the 01-03 rows are in 01-10
        assert not a.offsets_dated_before(PAIR, "2021-01-03", t10)      # only 01-10 itself from there
        assert not a.offsets_dated_before(PAIR, "2021-01-05", t10 + 100 * 30_000_000_000)  # after every row
    con = sqlite3.connect(db)
    con.execute("DROP INDEX offsets_pair_time")
    con.commit()
    con.close()
    with Archive(db) as a:      # the query names the index (INDEXED BY): it fails if the index is absent
        assert a.offsets_dated_before(PAIR, "2021-01-05", t10)
    con = sqlite3.connect(db)
    assert con.execute("SELECT sql FROM sqlite_master WHERE name='offsets_pair_time'").fetchone()[0].endswith(
        "offsets (pair, time_utc_ns)")
    con.close()


def test_days_with_and_without_extra_columns_load_together(tmp_path):
    """A span holding a day stored with an extra column (u_type_a_ns) and one without reads back
    with the column, missing on the second day."""
    off, _ = make_day(0, n=10)
    with Archive(tmp_path / "a.sqlite") as a:
        a.store_day(PAIR, DAY, off.assign(u_type_a_ns=0.25), None, {"messages": []})
        a.store_day(PAIR, "2021-01-02", off.assign(time_utc_ns=off["time_utc_ns"] + 86_400_000_000_000), None,
                    {"messages": []})
        got = a.load_offsets(PAIR)
    assert len(got) == 20
    assert (got["u_type_a_ns"][:10] == 0.25).all() and got["u_type_a_ns"][10:].isna().all()


def test_satellite_rows_are_one_compressed_block_per_day_and_old_rows_still_read(tmp_path):
    """Per-satellite rows are stored as one zlib block per day and read back exactly (floats by their
    shortest round-trip text, as before); an archive written with the previous row-per-satellite
    layout is still read, and the block is several times smaller than the rows it replaces."""
    import json
    import sqlite3

    from ctt.archive import Archive

    rng = np.random.default_rng(1)
    n = 3000
    sats = pd.DataFrame({"time_utc_ns": T0 + np.arange(n, dtype=np.int64) * 30_000_000_000,
                         "sat": [f"G{k % 32 + 1:02d}" for k in range(n)],
                         "diff_ns": rng.normal(0, 3, n), "elevation_a_deg": rng.uniform(5, 90, n),
                         "flag": np.where(rng.random(n) < 0.05, "outlier", "ok")})
    sats.loc[7, "diff_ns"] = np.nan
    off, _ = make_day(0, n=10)
    db = tmp_path / "a.sqlite"
    with Archive(db) as a:
        a.store_day("p", "2021-01-01", off, sats)
        back = a.load_satellites("p", "2021-01-01")
        assert a.verify_day("p", "2021-01-01")
    pd.testing.assert_frame_equal(back, sats, check_dtype=False)
    assert np.array_equal(back["diff_ns"].to_numpy(), sats["diff_ns"].to_numpy(), equal_nan=True)  # exact
    con = sqlite3.connect(db)
    size = con.execute("SELECT length(data) FROM satellite_days").fetchone()[0]
    raw = sum(len(json.dumps(r)) for r in back.to_dict(orient="records"))
    assert con.execute("SELECT COUNT(*) FROM satellites").fetchone()[0] == 0
    # the previous layout: the same rows one per line of table satellites
    con.execute("DELETE FROM satellite_days")
    con.executemany("INSERT INTO satellites VALUES (?,?,?,?,?,?)",
                    [("p", "2021-01-01", i, int(r["time_utc_ns"]), r["sat"], json.dumps(r))
                     for i, r in enumerate(sats.to_dict(orient="records"))])
    con.commit()
    con.close()
    with Archive(db) as a:
        pd.testing.assert_frame_equal(a.load_satellites("p", "2021-01-01"), sats, check_dtype=False)
        assert a.verify_day("p", "2021-01-01")
    print(f"\n{n} satellite rows: {raw} bytes as JSON rows, {size} bytes as one block ({raw / size:.1f}x)")
    assert size * 3 < raw
