"""SQLite archive of daily results (stdlib ``sqlite3``, WAL journal).

Tables
======

``runs``        one row per attempt: pair, date, status ``ok``/``failed``, inputs JSON
                (name -> {path, sha256}), inputs hash, config hash, software version,
                messages (JSON list), started/finished (ISO UTC).
``days``        one row per (pair, date) holding results: the ``ok`` run whose results
                are stored (``run_id``), the latest attempt (``latest_run_id``,
                ``latest_status``), row counts, a SHA-256 ``checksum`` of the stored
                offsets, and the stale flag and reason.
``offsets``     per-bin rows with the offset.csv columns: ``system`` ('' when the frame
                has none; e.g. 'G' or 'ALL'), ``time_utc`` (ISO text, Z),
                ``time_utc_ns`` (int), ``mjd_utc``, ``offset_ns``, ``u_ns``, ``n_sat``,
                ``flag``, plus ``extra`` (JSON of any further columns).
``satellite_days`` one row per (pair, date): the day's per-satellite rows, each as the
                JSON object of its columns, one per line, zlib-compressed in ``data``
                (``n_rows`` of them). A row per satellite-epoch (the previous layout, table
                ``satellites``, still read) made an epochs-mode archive about 900 MB a
                month, stored at ~30,000 inserts a day; one compressed block keeps every
                value as exactly (JSON holds the float's shortest round-trip text) in
                about a tenth of the space.
``daily_values`` one row per (pair, date): the day's ``daily_value`` object of
                summary.json exactly as written there (``epoch_utc``, ``offset_ns``,
                ``u_a_ns``, ``u_b_ns``, ``u_ns``, ``definition``) and ``stations``
                ('ALDR-BRKW': the A − B names). Archives made before this table
                existed get it when opened (it is created if missing).

Semantics
=========

* :meth:`Archive.store_day` replaces a day's results in ONE transaction: delete the
  old rows, insert the new ones, update ``days`` and insert the ``runs`` row, commit.
  Re-running a day is idempotent; a crash (even SIGKILL) at any point leaves
  either the previous or the new day, never a mixture (SQLite's atomic commit).
* :meth:`Archive.record_failure` keeps the previous good results and marks the
  latest attempt of the day failed (``days.latest_status = 'failed'``); a day
  that never succeeded gets a ``days`` row with no results.
* A damaged archive (SQLite reports a malformed image or not a database) raises
  :class:`ctt.errors.ArchiveError` naming the file and how to recover: restore a
  backup, or move the file aside and rebuild it from the run folders
  (``ctt rebuild-archive``, :func:`ctt.operations.rebuild_archive`). An archive that
  cannot be written (read-only file or folder) is a :class:`ctt.errors.ConfigError`.
  A 0-byte archive file (a truncated copy, a full disk) is never silently replaced: it
  is renamed ``<name>.empty-<UTC time>`` with a warning in the log, and a new
  archive is started.
* Writers are serialised by ``BEGIN IMMEDIATE`` with SQLite's busy timeout: a
  second writer waits up to ``timeout_s`` and then raises
  :class:`ctt.errors.LockTimeoutError` (exit code 4). Readers are never blocked
  (WAL). For a whole cron run, :meth:`Archive.run_lock` takes a lock file
  ``<archive>.lock`` (flock; PID, host name and time recorded in it); a lock
  left by a dead process on this host is taken over.
"""

from __future__ import annotations

import contextlib
import functools
import hashlib
import json
import logging
import math
import os
import pathlib
import socket
import sqlite3
import time
import zlib
import datetime as _dt

import numpy as np
import pandas as pd

from .errors import ArchiveError, ConfigError, LockTimeoutError, ProcessingError
from .timescales import parse_iso_array, to_iso, to_mjd_float

__all__ = ["Archive", "file_sha256", "inputs_record", "inputs_hash", "OFFSET_COLUMNS", "offsets_checksum"]

log = logging.getLogger(__name__)

SCHEMA_VERSION = 1
OFFSET_COLUMNS = ("time_utc", "mjd_utc", "offset_ns", "u_ns", "n_sat", "flag")
_KNOWN = (*OFFSET_COLUMNS, "time_utc_ns", "system")

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT);
CREATE TABLE IF NOT EXISTS runs (
    run_id INTEGER PRIMARY KEY AUTOINCREMENT,
    pair TEXT NOT NULL,
    date TEXT NOT NULL,
    status TEXT NOT NULL CHECK (status IN ('ok', 'failed')),
    inputs_json TEXT NOT NULL,
    inputs_hash TEXT,
    config_hash TEXT,
    version TEXT,
    messages TEXT,
    started_utc TEXT,
    finished_utc TEXT
);
CREATE INDEX IF NOT EXISTS runs_pair_date ON runs (pair, date);
CREATE TABLE IF NOT EXISTS days (
    pair TEXT NOT NULL,
    date TEXT NOT NULL,
    run_id INTEGER REFERENCES runs (run_id),
    latest_run_id INTEGER REFERENCES runs (run_id),
    latest_status TEXT,
    n_offsets INTEGER NOT NULL DEFAULT 0,
    n_satellites INTEGER NOT NULL DEFAULT 0,
    checksum TEXT,
    stale INTEGER NOT NULL DEFAULT 0,
    stale_reason TEXT,
    PRIMARY KEY (pair, date)
);
CREATE TABLE IF NOT EXISTS offsets (
    pair TEXT NOT NULL,
    date TEXT NOT NULL,
    system TEXT NOT NULL DEFAULT '',
    time_utc_ns INTEGER NOT NULL,
    time_utc TEXT NOT NULL,
    mjd_utc REAL,
    offset_ns REAL,
    u_ns REAL,
    n_sat INTEGER,
    flag,
    extra TEXT,
    PRIMARY KEY (pair, date, system, time_utc_ns)
);
CREATE INDEX IF NOT EXISTS offsets_pair_time ON offsets (pair, time_utc_ns);
CREATE TABLE IF NOT EXISTS daily_values (
    pair TEXT NOT NULL,
    date TEXT NOT NULL,
    epoch_utc TEXT NOT NULL,
    offset_ns REAL,
    u_a_ns REAL,
    u_b_ns REAL,
    u_ns REAL,
    definition TEXT,
    stations TEXT,
    PRIMARY KEY (pair, date)
);
CREATE TABLE IF NOT EXISTS satellite_days (
    pair TEXT NOT NULL,
    date TEXT NOT NULL,
    n_rows INTEGER NOT NULL,
    data BLOB NOT NULL,
    PRIMARY KEY (pair, date)
);
CREATE TABLE IF NOT EXISTS satellites (
    pair TEXT NOT NULL,
    date TEXT NOT NULL,
    row INTEGER NOT NULL,
    time_utc_ns INTEGER,
    sat TEXT,
    data TEXT NOT NULL,
    PRIMARY KEY (pair, date, row)
);
"""


def file_sha256(path, chunk: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        while True:
            b = f.read(chunk)
            if not b:
                break
            h.update(b)
    return h.hexdigest()


def inputs_record(paths: dict) -> dict:
    """{name: path or None} -> {name: {"path": str, "sha256": hex}} (None entries kept as None).

    A name with several files (a tuple or list of paths, e.g. SP3 files of the
    neighbouring days) gets a list of such dicts, in the order given.
    """
    out = {}
    for name, p in sorted(paths.items()):
        if isinstance(p, (tuple, list)):
            out[name] = [{"path": str(q), "sha256": file_sha256(q)} for q in p]
        else:
            out[name] = None if p is None else {"path": str(p), "sha256": file_sha256(p)}
    return out


def inputs_hash(inputs: dict) -> str:
    """One SHA-256 over the inputs' own hashes (names and contents, not paths)."""
    return _inputs_hash(inputs)


def _inputs_hash(inputs: dict) -> str:
    def content(v):
        if isinstance(v, list):   # several files: their hashes in order, paths left out
            return [content(x) for x in v]
        return (v or {}).get("sha256") if isinstance(v, dict) else v

    items = sorted((k, content(v)) for k, v in inputs.items())
    return hashlib.sha256(json.dumps(items, separators=(",", ":")).encode()).hexdigest()


def _date_text(d) -> str:
    if isinstance(d, _dt.datetime):
        d = d.date()
    if isinstance(d, _dt.date):
        return d.isoformat()
    try:
        return _dt.date.fromisoformat(str(d)).isoformat()
    except ValueError:
        raise ValueError(f"expected a date YYYY-MM-DD, found {d!r}") from None


def _now_iso() -> str:
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _json_default(o):
    if isinstance(o, (np.integer,)):
        return int(o)
    if isinstance(o, (np.floating,)):
        return None if not np.isfinite(o) else float(o)
    if isinstance(o, (np.bool_,)):
        return bool(o)
    if isinstance(o, (pathlib.Path,)):
        return str(o)
    if isinstance(o, (pd.Timestamp, _dt.datetime, _dt.date)):
        return o.isoformat()
    return str(o)


def _clean(v):
    """A pandas/numpy scalar -> a plain Python value SQLite stores (NaN -> NULL)."""
    if v is None:
        return None
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        v = float(v)
        return None if math.isnan(v) else v
    if isinstance(v, (np.bool_,)):
        return int(v)
    if v is pd.NA or v is pd.NaT:
        return None
    return v


def _offset_rows(pair: str, date: str, df: pd.DataFrame) -> list[tuple]:
    if "time_utc_ns" in df.columns:
        t_ns = df["time_utc_ns"].to_numpy(dtype=np.int64)
    elif "time_utc" in df.columns:
        t_ns = parse_iso_array(df["time_utc"].astype(str).to_numpy())
    else:
        raise ProcessingError("offsets table needs a time_utc or time_utc_ns column")
    text = to_iso(t_ns, 9) if len(t_ns) else np.array([], dtype=str)
    mjd = df["mjd_utc"].to_numpy(dtype=float) if "mjd_utc" in df.columns else to_mjd_float(t_ns)
    n = len(df)

    def col(name, dtype=None):
        if name not in df.columns:
            return [None] * n
        return [_clean(v) for v in df[name].tolist()]

    extra_cols = [c for c in df.columns if c not in _KNOWN]
    systems = df["system"].astype(str).tolist() if "system" in df.columns else [""] * n
    extras = ([json.dumps({c: _clean(v) for c, v in zip(extra_cols, row)}, default=_json_default)
               for row in df[extra_cols].itertuples(index=False, name=None)] if extra_cols else [None] * n)
    return list(zip([pair] * n, [date] * n, systems, t_ns.tolist(), [str(x) for x in text],
                    [_clean(v) for v in mjd], col("offset_ns"), col("u_ns"), col("n_sat"), col("flag"), extras))


def offsets_checksum(rows) -> str:
    """SHA-256 over (system, time_utc_ns, offset_ns, u_ns, n_sat, flag) of rows sorted by (system, time)."""
    h = hashlib.sha256()
    for s, t, off, u, n, flag in sorted(rows, key=lambda r: (r[0], r[1])):
        h.update(f"{s}|{t}|{off!r}|{u!r}|{n!r}|{flag!r}\n".encode())
    return h.hexdigest()


def _database_error(path, exc: sqlite3.DatabaseError) -> Exception:
    """A ctt error for an SQLite error on the archive ``path``: what happened and how to recover."""
    text = str(exc)
    if "locked" in text or "busy" in text:
        return LockTimeoutError(f"{path}: another run is using the archive ({text}); try again later")
    if "readonly" in text or "read-only" in text or "unable to open" in text or "disk I/O" in text:
        return ConfigError(path, None, f"cannot write the archive ({text}); make the file and its folder "
                                       "writable by this user, or point [output] archive elsewhere")
    return ArchiveError(path, f"a damaged file (SQLite: {text})",
                        "Recover: restore it from a backup, or move it aside and rebuild it from the run "
                        "folders with `ctt rebuild-archive --config PAIR.toml` (every day whose run folder "
                        "is kept comes back; failed attempts are not in run folders)")


_PROGRAMMING_ERRORS = (sqlite3.ProgrammingError, sqlite3.InterfaceError, sqlite3.IntegrityError,
                       sqlite3.DataError, sqlite3.NotSupportedError)


def _guarded(method):
    """Archive method whose SQLite errors become ctt errors naming the file (see _database_error)."""
    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        try:
            return method(self, *args, **kwargs)
        except _PROGRAMMING_ERRORS:
            raise                       # a bug in the caller's data, not a problem of the file
        except sqlite3.DatabaseError as exc:
            raise _database_error(self.path, exc) from None
    return wrapper


def _set_aside_if_empty(path: pathlib.Path) -> pathlib.Path | None:
    """Rename a 0-byte archive (and its empty WAL files) out of the way; returns the new name.

    A non-empty WAL beside an empty main file may still hold committed days: then
    the file is left for SQLite to recover."""
    try:
        if not path.is_file() or path.stat().st_size != 0:
            return None
    except OSError:
        return None
    wal = path.with_name(path.name + "-wal")
    if wal.is_file() and wal.stat().st_size > 0:
        return None
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    aside = path.with_name(f"{path.name}.empty-{stamp}")
    k = 1
    while aside.exists():
        aside = path.with_name(f"{path.name}.empty-{stamp}-{k}")
        k += 1
    os.replace(path, aside)
    for suffix in ("-wal", "-shm"):
        side = path.with_name(path.name + suffix)
        if side.is_file():
            os.replace(side, aside.with_name(aside.name + suffix))
    return aside


class Archive:
    """One SQLite archive file. Use as a context manager or call :meth:`close`."""

    def __init__(self, path, timeout_s: float = 60.0):
        self.path = pathlib.Path(path)
        self.timeout_s = float(timeout_s)
        self._con = None
        if self.path.is_dir():
            raise ConfigError(self.path, None, "expected the archive file, found a folder")
        self.path.parent.mkdir(parents=True, exist_ok=True)
        aside = _set_aside_if_empty(self.path)
        if aside is not None:
            log.warning("%s: the archive file was empty (0 bytes: truncated copy or full disk?); kept it as "
                        "%s and started a new archive. If days were stored before, restore a backup or run "
                        "`ctt rebuild-archive`", self.path, aside.name)
        try:
            self._con = sqlite3.connect(str(self.path), timeout=self.timeout_s, isolation_level=None)
        except sqlite3.Error as exc:
            raise ConfigError(self.path, None, f"cannot open the archive: {exc}") from None
        try:
            self._con.execute("PRAGMA foreign_keys = ON")
            self._con.execute("PRAGMA synchronous = FULL")  # a committed day survives power loss too
            self._with_lock("open", self._init_schema)
        except sqlite3.DatabaseError as exc:
            self._con.close()
            self._con = None
            raise _database_error(self.path, exc) from None
        except BaseException:
            self._con.close()
            self._con = None
            raise

    # ------------------------------------------------------------ plumbing

    def _init_schema(self):
        mode = self._con.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        if str(mode).lower() != "wal":
            raise ProcessingError(f"{self.path}: could not switch the archive to WAL mode (got {mode})")
        cur = self._con.execute("SELECT name FROM sqlite_master WHERE type='table' AND name='meta'")
        if cur.fetchone() is None:
            self._con.execute("BEGIN IMMEDIATE")
            try:
                for stmt in _SCHEMA.split(";"):
                    if stmt.strip():
                        self._con.execute(stmt)
                self._con.execute("INSERT OR REPLACE INTO meta VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),))
                self._con.execute("COMMIT")
            except BaseException:
                self._con.execute("ROLLBACK")
                raise
        else:
            row = self._con.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
            if row is None or int(row[0]) != SCHEMA_VERSION:
                raise ProcessingError(f"{self.path}: archive schema version {row and row[0]}, "
                                      f"expected {SCHEMA_VERSION}")
            if self._con.execute("SELECT name FROM sqlite_master WHERE type='table' AND name='daily_values'"
                                 ).fetchone() is None:
                stmt = _SCHEMA[_SCHEMA.index("CREATE TABLE IF NOT EXISTS daily_values"):]
                self._con.execute(stmt[:stmt.index(";")])
            if self._con.execute("SELECT name FROM sqlite_master WHERE type='table' AND name='satellite_days'"
                                 ).fetchone() is None:   # archives made before the compressed blocks
                stmt = _SCHEMA[_SCHEMA.index("CREATE TABLE IF NOT EXISTS satellite_days"):]
                self._con.execute(stmt[:stmt.index(";")])
            if self._con.execute("SELECT name FROM sqlite_master WHERE type='index' AND name='offsets_pair_time'"
                                 ).fetchone() is None:   # archives made before the index: add it once
                stmt = _SCHEMA[_SCHEMA.index("CREATE INDEX IF NOT EXISTS offsets_pair_time"):]
                self._con.execute(stmt[:stmt.index(";")])

    def _with_lock(self, what, fn, *args):
        deadline = time.monotonic() + self.timeout_s
        while True:
            try:
                return fn(*args)
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) and "busy" not in str(exc):
                    raise
                if time.monotonic() >= deadline:
                    raise LockTimeoutError(
                        f"{self.path}: another run is writing the archive; waited {self.timeout_s:g} s "
                        f"to {what} and gave up (try again later or raise the timeout)") from None
                time.sleep(0.05)

    @contextlib.contextmanager
    def _write(self, what):
        """BEGIN IMMEDIATE ... COMMIT; LockTimeoutError when another writer holds it too long."""
        self._with_lock(what, self._con.execute, "BEGIN IMMEDIATE")
        try:
            yield self._con
        except BaseException:
            with contextlib.suppress(sqlite3.Error):   # a damaged file may refuse the rollback too
                self._con.execute("ROLLBACK")
            raise
        self._con.execute("COMMIT")

    def close(self):
        if self._con is not None:
            self._con.close()
            self._con = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    @_guarded
    def integrity_check(self) -> str:
        """SQLite's own ``PRAGMA integrity_check`` result ('ok' when sound)."""
        return "; ".join(r[0] for r in self._con.execute("PRAGMA integrity_check").fetchall())

    # ------------------------------------------------------------ writing

    def _insert_run(self, con, pair, date, status, run_info, messages):
        run_info = dict(run_info or {})
        inputs = run_info.get("inputs", {}) or {}
        msgs = list(run_info.get("messages", []) or [])
        msgs += [m for m in (messages or []) if m not in msgs]
        cur = con.execute(
            "INSERT INTO runs (pair, date, status, inputs_json, inputs_hash, config_hash, version, messages,"
            " started_utc, finished_utc) VALUES (?,?,?,?,?,?,?,?,?,?)",
            (pair, date, status, json.dumps(inputs, sort_keys=True, default=_json_default),
             run_info.get("inputs_hash") or _inputs_hash(inputs), run_info.get("config_hash"),
             run_info.get("version"), json.dumps(msgs, default=_json_default),
             run_info.get("started"), run_info.get("finished") or _now_iso()))
        return cur.lastrowid

    @_guarded
    def store_day(self, pair: str, date, offsets_df: pd.DataFrame, satellites_df: pd.DataFrame | None,
                  run_info: dict | None = None, daily_value: dict | None = None, stations: str | None = None) -> int:
        """Replace the day's results and record an ``ok`` run, all in one transaction; returns run_id.

        ``run_info`` keys (all optional): ``inputs`` ({name: {path, sha256}}, see
        :func:`inputs_record`), ``inputs_hash``, ``config_hash``, ``version``,
        ``messages`` (list of str), ``started``, ``finished`` (ISO UTC).
        ``daily_value``: the day's ``daily_value`` object (stored as it is);
        ``stations``: the A − B names, e.g. 'ALDR-BRKW'.
        """
        date = _date_text(date)
        orows = _offset_rows(pair, date, offsets_df)
        keys = [(r[2], r[3]) for r in orows]
        if len(set(keys)) != len(keys):
            raise ProcessingError(f"offsets for {pair} {date} have repeated (system, time_utc) values")
        checksum = offsets_checksum([(r[2], r[3], r[6], r[7], r[8], r[9]) for r in orows])
        n_sat_rows, block = 0, None
        if satellites_df is not None and len(satellites_df):
            sdf = satellites_df.reset_index(drop=True)
            cols = list(sdf.columns)
            data = [json.dumps(dict(zip(cols, map(_clean, row))), default=_json_default)
                    for row in sdf.itertuples(index=False, name=None)]
            n_sat_rows, block = len(data), zlib.compress("\n".join(data).encode(), 6)
        with self._write(f"store {pair} {date}") as con:
            con.execute("DELETE FROM offsets WHERE pair=? AND date=?", (pair, date))
            con.execute("DELETE FROM satellites WHERE pair=? AND date=?", (pair, date))
            con.execute("DELETE FROM satellite_days WHERE pair=? AND date=?", (pair, date))
            con.executemany("INSERT INTO offsets VALUES (?,?,?,?,?,?,?,?,?,?,?)", orows)
            if block is not None:
                con.execute("INSERT INTO satellite_days VALUES (?,?,?,?)", (pair, date, n_sat_rows, block))
            con.execute("DELETE FROM daily_values WHERE pair=? AND date=?", (pair, date))
            if daily_value is not None:
                dv = daily_value
                con.execute("INSERT INTO daily_values VALUES (?,?,?,?,?,?,?,?,?)",
                            (pair, date, dv["epoch_utc"], _clean(dv["offset_ns"]), _clean(dv["u_a_ns"]),
                             _clean(dv["u_b_ns"]), _clean(dv["u_ns"]), dv.get("definition"), stations))
            run_id = self._insert_run(con, pair, date, "ok", run_info, [])
            con.execute(
                "INSERT INTO days (pair, date, run_id, latest_run_id, latest_status, n_offsets, n_satellites,"
                " checksum, stale, stale_reason) VALUES (?,?,?,?,'ok',?,?,?,0,NULL)"
                " ON CONFLICT (pair, date) DO UPDATE SET run_id=excluded.run_id,"
                " latest_run_id=excluded.latest_run_id, latest_status='ok', n_offsets=excluded.n_offsets,"
                " n_satellites=excluded.n_satellites, checksum=excluded.checksum, stale=0, stale_reason=NULL",
                (pair, date, run_id, run_id, len(orows), n_sat_rows, checksum))
        return run_id

    @_guarded
    def record_failure(self, pair: str, date, reason: str, run_info: dict | None = None) -> int:
        """Record a failed attempt; previous good results of the day are kept (see module doc)."""
        date = _date_text(date)
        with self._write(f"record a failure for {pair} {date}") as con:
            run_id = self._insert_run(con, pair, date, "failed", run_info, [reason])
            con.execute(
                "INSERT INTO days (pair, date, run_id, latest_run_id, latest_status) VALUES (?,?,NULL,?,'failed')"
                " ON CONFLICT (pair, date) DO UPDATE SET latest_run_id=excluded.latest_run_id,"
                " latest_status='failed'", (pair, date, run_id))
        return run_id

    @_guarded
    def mark_stale(self, pair: str, dates, reason: str) -> int:
        """Flag stored days for reprocessing (e.g. after a calibration change); returns how many."""
        ds = [_date_text(d) for d in dates]
        with self._write(f"mark days stale for {pair}") as con:
            n = 0
            for d in ds:
                n += con.execute("UPDATE days SET stale=1, stale_reason=? WHERE pair=? AND date=?",
                                 (reason, pair, d)).rowcount
        return n

    # ------------------------------------------------------------ reading

    @_guarded
    def load_offsets(self, pair: str, date_from=None, date_to=None, system: str | None = None,
                     extras: bool = True) -> pd.DataFrame:
        """Stored per-bin offsets of ``pair`` for dates ``date_from..date_to`` inclusive, sorted by time.

        Columns: ``time_utc`` (ISO, 9 digits, Z), ``time_utc_ns`` (int64), ``mjd_utc``,
        ``offset_ns``, ``u_ns``, ``n_sat``, ``flag``, ``system``, ``date``, plus any extra
        columns stored (``extras=False`` skips them: faster for long spans). ``system``
        selects one system's rows.
        """
        q = ("SELECT time_utc, time_utc_ns, mjd_utc, offset_ns, u_ns, n_sat, flag, system, date, extra"
             " FROM offsets WHERE pair=?")
        args: list = [pair]
        if system is not None:
            q += " AND system = ?"
            args.append(system)
        if date_from is not None:
            q += " AND date >= ?"
            args.append(_date_text(date_from))
        if date_to is not None:
            q += " AND date <= ?"
            args.append(_date_text(date_to))
        q += " ORDER BY time_utc_ns, system"
        rows = self._con.execute(q, args).fetchall()
        df = pd.DataFrame(rows, columns=["time_utc", "time_utc_ns", "mjd_utc", "offset_ns", "u_ns", "n_sat",
                                         "flag", "system", "date", "extra"])
        df["time_utc_ns"] = df["time_utc_ns"].astype(np.int64)
        for c in ("mjd_utc", "offset_ns", "u_ns"):
            df[c] = df[c].astype(float)
        if extras and df["extra"].notna().any():
            # a day without extra columns reads back as missing (NaN under pandas' string dtype)
            ext = pd.DataFrame.from_records([json.loads(e) if isinstance(e, str) and e else {} for e in df["extra"]],
                                            index=df.index)
            df = pd.concat([df.drop(columns="extra"), ext], axis=1)
        else:
            df = df.drop(columns="extra")
        return df

    @_guarded
    def last_date(self, pair: str) -> str | None:
        """The latest date holding offsets of ``pair`` (YYYY-MM-DD), or None (primary-key index)."""
        row = self._con.execute("SELECT MAX(date) FROM offsets WHERE pair=?", (pair,)).fetchone()
        return row[0] if row else None

    @_guarded
    def offsets_dated_before(self, pair: str, date, time_from_ns: int) -> bool:
        """True when a row of ``pair`` dated before ``date`` has a time at or after ``time_from_ns``
        (a day stored under a date far from its data); index on (pair, time_utc_ns), so only the
        rows from ``time_from_ns`` on are looked at."""
        row = self._con.execute("SELECT 1 FROM offsets INDEXED BY offsets_pair_time WHERE pair=? AND time_utc_ns >= ? AND date < ?"
                                " LIMIT 1",
                                (pair, int(time_from_ns), _date_text(date))).fetchone()
        return row is not None

    @_guarded
    def load_daily_values(self, pair: str, date_from=None, date_to=None) -> pd.DataFrame:
        """The stored ``daily_value`` objects of ``pair`` (one row per date, sorted): ``date``,
        ``epoch_utc``, ``offset_ns``, ``u_a_ns``, ``u_b_ns``, ``u_ns``, ``definition``, ``stations``."""
        q = ("SELECT date, epoch_utc, offset_ns, u_a_ns, u_b_ns, u_ns, definition, stations"
             " FROM daily_values WHERE pair=?")
        args: list = [pair]
        if date_from is not None:
            q += " AND date >= ?"
            args.append(_date_text(date_from))
        if date_to is not None:
            q += " AND date <= ?"
            args.append(_date_text(date_to))
        rows = self._con.execute(q + " ORDER BY date", args).fetchall()
        return pd.DataFrame(rows, columns=["date", "epoch_utc", "offset_ns", "u_a_ns", "u_b_ns", "u_ns",
                                           "definition", "stations"])

    @_guarded
    def load_satellites(self, pair: str, date) -> pd.DataFrame:
        lines = self._satellite_lines(pair, date)
        return pd.DataFrame([json.loads(ln) for ln in lines])

    def _satellite_lines(self, pair: str, date) -> list:
        """The day's per-satellite rows as JSON texts: the compressed block, or the rows of the
        previous layout (archives written before the blocks)."""
        row = self._con.execute("SELECT data FROM satellite_days WHERE pair=? AND date=?",
                                (pair, _date_text(date))).fetchone()
        if row is not None:
            try:
                text = zlib.decompress(row[0]).decode()
            except zlib.error as exc:
                raise ArchiveError(f"{self.path}: the per-satellite block of {pair} {_date_text(date)} is "
                                   f"damaged ({exc}); re-run the day or rebuild the archive "
                                   "(ctt rebuild-archive)") from None
            return text.split("\n") if text else []
        return [r[0] for r in self._con.execute("SELECT data FROM satellites WHERE pair=? AND date=? ORDER BY row",
                                                (pair, _date_text(date))).fetchall()]

    @_guarded
    def pairs(self) -> list[str]:
        """Names of the pairs with days in the archive, sorted."""
        return [r[0] for r in self._con.execute("SELECT DISTINCT pair FROM days ORDER BY pair").fetchall()]

    @_guarded
    def days_done(self, pair: str) -> dict:
        """{date: (inputs_hash, config_hash)} of days holding good, non-stale results (for backfill)."""
        rows = self._con.execute(
            "SELECT d.date, r.inputs_hash, r.config_hash FROM days d JOIN runs r ON r.run_id = d.run_id"
            " WHERE d.pair=? AND d.stale=0 ORDER BY d.date", (pair,)).fetchall()
        return {d: (ih, ch) for d, ih, ch in rows}

    @_guarded
    def stale_days(self, pair: str) -> dict:
        """{date: reason} of days marked stale."""
        rows = self._con.execute("SELECT date, stale_reason FROM days WHERE pair=? AND stale=1 ORDER BY date",
                                 (pair,)).fetchall()
        return dict(rows)

    @_guarded
    def day_info(self, pair: str, date) -> dict | None:
        row = self._con.execute(
            "SELECT run_id, latest_run_id, latest_status, n_offsets, n_satellites, checksum, stale, stale_reason"
            " FROM days WHERE pair=? AND date=?", (pair, _date_text(date))).fetchone()
        if row is None:
            return None
        keys = ("run_id", "latest_run_id", "latest_status", "n_offsets", "n_satellites", "checksum", "stale",
                "stale_reason")
        return dict(zip(keys, row))

    @_guarded
    def runs(self, pair: str, date=None) -> pd.DataFrame:
        q = "SELECT * FROM runs WHERE pair=?"
        args: list = [pair]
        if date is not None:
            q += " AND date=?"
            args.append(_date_text(date))
        cur = self._con.execute(q + " ORDER BY run_id", args)
        return pd.DataFrame(cur.fetchall(), columns=[c[0] for c in cur.description])

    @_guarded
    def verify_day(self, pair: str, date) -> bool:
        """Stored offsets match the day's recorded row count and checksum."""
        info = self.day_info(pair, date)
        if info is None:
            return False
        rows = self._con.execute("SELECT system, time_utc_ns, offset_ns, u_ns, n_sat, flag FROM offsets"
                                 " WHERE pair=? AND date=?", (pair, _date_text(date))).fetchall()
        try:
            nsat = len(self._satellite_lines(pair, date))
        except ArchiveError:
            return False
        if info["run_id"] is None:
            return not rows and nsat == 0
        return (len(rows) == info["n_offsets"] and nsat == info["n_satellites"]
                and offsets_checksum(rows) == info["checksum"])

    # ------------------------------------------------------------ whole-run lock

    @contextlib.contextmanager
    def run_lock(self, timeout_s: float | None = None, poll_s: float = 0.2):
        """Lock file ``<archive>.lock`` held for a whole run; it records PID, host and time.

        The lock is an ``flock`` on that file, which the kernel releases when the
        holder dies (even by SIGKILL), so a lock left by a dead process on this host
        is simply taken over; its recorded PID/host/time only serve the messages.
        A record naming another host (a shared file system, where flock may not
        reach across machines) is respected and waited for, never broken. Waits up
        to ``timeout_s`` (default: the archive's), then raises LockTimeoutError.
        On release the record is emptied; the file itself stays (unlinking a
        flock'ed file would let two processes lock different inodes).
        """
        import fcntl

        lock = self.path.with_name(self.path.name + ".lock")
        timeout = self.timeout_s if timeout_s is None else timeout_s
        deadline = time.monotonic() + timeout
        host = socket.gethostname()
        fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
        held = False
        try:
            while True:
                try:
                    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                except BlockingIOError:
                    holder = _read_lock(lock)
                    foreign = False
                else:
                    holder = _read_lock(lock)
                    foreign = bool(holder) and holder.get("host") != host
                    if not foreign:
                        break          # free, or the record of a dead process on this host
                    fcntl.flock(fd, fcntl.LOCK_UN)
                if time.monotonic() >= deadline:
                    who = (f"PID {holder.get('pid')} on {holder.get('host')} since {holder.get('time')}"
                           if holder else "another process")
                    hint = f" (remove {lock} if that host is down)" if foreign else ""
                    raise LockTimeoutError(f"{lock}: archive locked by {who}; waited {timeout:g} s{hint}")
                time.sleep(poll_s)
            held = True
            me = {"pid": os.getpid(), "host": host, "time": _now_iso()}
            os.ftruncate(fd, 0)
            os.pwrite(fd, json.dumps(me).encode(), 0)
            os.fsync(fd)
            yield lock
        finally:
            if held:
                os.ftruncate(fd, 0)
                fcntl.flock(fd, fcntl.LOCK_UN)
            os.close(fd)


def _read_lock(lock: pathlib.Path):
    try:
        return json.loads(lock.read_text() or "null")
    except (FileNotFoundError, ValueError):
        return None
