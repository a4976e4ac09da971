"""SQLite results store: runs, points, completed chunks and per-point results.

Layout
------
``meta``     one code per store file (fingerprint, name, source, n, k); a
             store opened with another code is refused with :class:`StoreError`.
``runs``     one row per distinct simulation setting (channel, SNR kind, seed,
             chunk size, codeword mode); the same store holds several runs.
``points``   one row per (run, SNR point); the point key is derived from the
             SNR value, not its position in the grid.
``chunks``   one row per completed (point, decoder, chunk index, chunk size)
             with the raw counts. Rows are never updated: a chunk's counts are
             fixed by its seed, so they can be reused by any later sweep.
``results``  the counts a sweep *counted* for each (point, decoder) under its
             stopping rule (a prefix of the chunks), for listing and plotting.
``payload_chunks``  completed chunks of estimators whose counts are not the
             plain ``COUNT_FIELDS`` (importance sampling: weighted sums), as
             JSON; rows are never updated either.
``payloads`` cached JSON documents by (kind, key), e.g. a structure search.

The last two tables were added without changing the schema version: they are
created when a store is opened for writing, and readers treat a store
without them as holding none.

Concurrency
-----------
The coordinating process is the only writer. It holds an exclusive advisory
``flock`` on the database file itself for as long as the store is open for
writing. The lock belongs to the file (its device and inode), not to the path
string, so a second writer reaching the same file through a hard link or a
symbolic link gets a clear :class:`StoreError` at once; the lock goes away
with the process, even after SIGKILL, and leaves no lock file behind. (Older
versions kept a ``<store>.lock`` file; it is no longer used.) Each completed
chunk is written in one ``BEGIN IMMEDIATE`` transaction; the database runs in
WAL mode, so readers (``ldpcmarg runs``, ``ldpcmarg plot``) never block the
writer, and a killed writer leaves every committed chunk intact.

Failures
--------
Every SQLite failure becomes one :class:`StoreError` sentence: a full disk or
a file-size limit (``ulimit -f``) says so and that the chunks already stored
are intact; a damaged file is found by ``PRAGMA quick_check`` when a writer
opens it; a foreign SQLite database (one with tables that are not a results
store) is refused unchanged; an empty file is a new store. Readers open with
``mode=ro`` and, when that is impossible (read-only media or folder, where
WAL mode cannot create its ``-shm`` file), with ``immutable=1``.

Versions
--------
A run records the package versions (ldpcmarg, numpy, numba, scipy) of every
process that wrote to it, in order. Resuming with different versions logs a
warning (logger ``ldpcmarg.store``) naming both; the stored chunks are reused.
"""

from __future__ import annotations

import datetime as _dt
import functools
import hashlib
import json
import logging
import os
import sqlite3
import stat
import urllib.parse
from dataclasses import dataclass

from ..errors import StoreError

__all__ = ["Store", "COUNT_FIELDS", "SCHEMA_VERSION", "STORE_TABLES"]

_log = logging.getLogger("ldpcmarg.store")

#: Tables of a results store; a database holding other tables is refused.
STORE_TABLES = ("meta", "runs", "points", "chunks", "results")

#: 2 adds ``ml_lower_bound_frame_errors`` (version-1 stores are refused with a message).
SCHEMA_VERSION = 2

#: Integer/float count columns of a chunk or a result, in storage order.
COUNT_FIELDS = (
    "frames",
    "bit_errors",
    "bit_errors_sq",
    "info_bit_errors",
    "info_bit_errors_sq",
    "frame_errors",
    "undetected_errors",
    "ml_lower_bound_frame_errors",
    "iterations",
    "seconds",
    "capped_frames",
)

#: Count columns added to schema version 1 after its first release: a store written
#: before gets them (value 0) when opened for writing and reads them as 0 otherwise.
_ADDED_COUNT_FIELDS = ("capped_frames",)

_COUNT_COLS = ",\n    ".join(
    f"{f} {'REAL' if f == 'seconds' else 'INTEGER'} NOT NULL" for f in COUNT_FIELDS
)

_SCHEMA = f"""
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE runs (
    id INTEGER PRIMARY KEY,
    key TEXT NOT NULL UNIQUE,
    settings TEXT NOT NULL,
    decoders TEXT NOT NULL,
    versions TEXT NOT NULL,
    created TEXT NOT NULL,
    updated TEXT NOT NULL
);
CREATE TABLE points (
    id INTEGER PRIMARY KEY,
    run_id INTEGER NOT NULL REFERENCES runs(id),
    point_key INTEGER NOT NULL,
    snr REAL NOT NULL,
    UNIQUE (run_id, point_key)
);
CREATE TABLE chunks (
    point_id INTEGER NOT NULL REFERENCES points(id),
    decoder TEXT NOT NULL,
    chunk_index INTEGER NOT NULL,
    {_COUNT_COLS},
    created TEXT NOT NULL,
    PRIMARY KEY (point_id, decoder, chunk_index, frames)
);
CREATE TABLE results (
    point_id INTEGER NOT NULL REFERENCES points(id),
    decoder TEXT NOT NULL,
    {_COUNT_COLS},
    chunks INTEGER NOT NULL,
    stop TEXT NOT NULL,
    rule TEXT NOT NULL,
    updated TEXT NOT NULL,
    PRIMARY KEY (point_id, decoder)
);
"""


# Added later, created with IF NOT EXISTS so that older stores gain them on open.
_SCHEMA_EXTRA = """
CREATE TABLE IF NOT EXISTS payload_chunks (
    point_id INTEGER NOT NULL REFERENCES points(id),
    decoder TEXT NOT NULL,
    chunk_index INTEGER NOT NULL,
    frames INTEGER NOT NULL,
    payload TEXT NOT NULL,
    created TEXT NOT NULL,
    PRIMARY KEY (point_id, decoder, chunk_index, frames)
);
CREATE TABLE IF NOT EXISTS payloads (
    kind TEXT NOT NULL,
    key TEXT NOT NULL,
    payload TEXT NOT NULL,
    created TEXT NOT NULL,
    PRIMARY KEY (kind, key)
);
"""


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")


def _code_of(exc: BaseException | None) -> int | None:
    """Primary SQLite result code of an exception (None if unknown)."""
    code = getattr(exc, "sqlite_errorcode", None)
    return None if code is None else int(code) & 0xFF


def _store_error(path, what: str, exc: BaseException | None) -> StoreError:
    """One clear sentence for an SQLite failure while ``what``."""
    code = _code_of(exc)
    text = str(exc) if exc is not None else "unknown error"
    if code == sqlite3.SQLITE_FULL or "disk is full" in text or code == sqlite3.SQLITE_IOERR:
        cause = ("the disk is full (or a file-size limit such as 'ulimit -f' was reached)"
                 if code == sqlite3.SQLITE_FULL or "full" in text else
                 "the disk is full, a file-size limit such as 'ulimit -f' was reached, or the "
                 f"medium failed ({text})")
        return StoreError(
            f"Writing to the store {path!r} failed while {what}: {cause}. Nothing stored was "
            "lost: every chunk recorded before this point is intact; free some space and run "
            "the same command again to continue.")
    if code in (sqlite3.SQLITE_CORRUPT, sqlite3.SQLITE_NOTADB):
        return StoreError(
            f"The store {path!r} is damaged ({text}); restore it from a copy, or start a new "
            "--store file.")
    if code == sqlite3.SQLITE_READONLY:
        return StoreError(f"The store {path!r} is read-only ({text}); copy it to a writable "
                          "place to continue it.")
    if code == sqlite3.SQLITE_CANTOPEN:
        return StoreError(f"Cannot open the store {path!r} ({text}).")
    return StoreError(f"The store {path!r} is not usable while {what}: {text}.")


class _sql_errors:
    """Context manager turning sqlite3 errors into one StoreError."""

    def __init__(self, path, what: str):
        self.path, self.what = path, what

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None and issubclass(exc_type, sqlite3.Error):
            raise _store_error(self.path, self.what, exc) from exc
        return False


def _guard_reads(method):
    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        with _sql_errors(self.path, "reading it"):
            return method(self, *args, **kwargs)
    return wrapper


def _rollback(conn: sqlite3.Connection) -> None:
    if conn.in_transaction:
        try:
            conn.execute("ROLLBACK")
        except sqlite3.Error:
            pass  # the original error is the one to report


def version_history(stored: dict) -> list[dict]:
    """The version sets that wrote to a run, oldest first (from its ``versions`` entry)."""
    if not isinstance(stored, dict):
        return []
    hist = stored.get("history")
    if isinstance(hist, list) and hist:
        return [dict(h) for h in hist if isinstance(h, dict)]
    plain = {k: v for k, v in stored.items() if k != "history"}
    return [plain] if plain else []


def _with_history(first: dict, history: list[dict]) -> dict:
    out = dict(first)
    out["history"] = list(history)
    return out


def _version_notice(run_id: int, path, old: dict, new: dict) -> str:
    changed = [k for k in sorted(set(old) | set(new)) if old.get(k) != new.get(k)]

    def fmt(v):
        return ", ".join(f"{k} {v.get(k)}" for k in changed)

    return (f"Warning: run {run_id} in {path} was last written with {fmt(old)}; this is "
            f"{fmt(new)}. Its stored chunks are reused as they are; both versions are now "
            "recorded in the run (see 'ldpcmarg runs').")


@dataclass(frozen=True)
class StoredChunk:
    """Counts of one stored chunk for one decoder (fields as in ``COUNT_FIELDS``)."""

    decoder: str
    chunk_index: int
    counts: tuple


class Store:
    """A results store file (or an in-memory one).

    Use :meth:`open_writer` to simulate into it and :meth:`open_reader` to
    list or plot. ``Store.memory(code)`` gives a throw-away in-memory store.
    """

    def __init__(self, conn: sqlite3.Connection, path: str | None, lock_fd: int | None):
        self._conn = conn
        self.path = path
        self._lock_fd = lock_fd
        #: Warnings raised while writing (e.g. a run resumed with other versions).
        self.notices: list[str] = []

    # ------------------------------------------------------------ opening
    @classmethod
    def memory(cls, code) -> Store:
        """An in-memory store bound to ``code`` (nothing is written to disk)."""
        conn = sqlite3.connect(":memory:", isolation_level=None)
        st = cls(conn, None, None)
        st._create(code)
        return st

    @classmethod
    def open_writer(cls, path, code) -> Store:
        """Open (or create) ``path`` for writing results of ``code``.

        Raises
        ------
        StoreError
            Path unusable or unwritable, file not a store (or a foreign
            SQLite database), file damaged, store held by another writer
            (through any path, hard or symbolic link), or store made for a
            different code. Nothing in an existing store is changed when this
            is raised.
        """
        path = os.fspath(path)
        parent = os.path.dirname(os.path.abspath(path)) or "."
        if os.path.isdir(path):
            raise StoreError(f"The store path {path!r} is a directory; give a file name.")
        if not os.path.isdir(parent):
            raise StoreError(
                f"Cannot create the store {path!r}: directory {parent!r} does not exist.")
        exists = os.path.exists(path)
        if exists and not stat.S_ISREG(os.stat(path).st_mode):
            raise StoreError(f"The store {path!r} is not a regular file; give a file name.")
        if exists and not os.access(path, os.R_OK | os.W_OK):
            raise StoreError(f"The store {path!r} is not writable.")
        real_parent = os.path.dirname(os.path.realpath(path)) or "."
        if not os.access(real_parent, os.W_OK):
            raise StoreError(
                f"Cannot write the store {path!r}: directory {real_parent!r} is not writable "
                "(the store needs its folder for the write-ahead log).")
        if exists and os.path.getsize(path) > 0:
            _check_sqlite_header(path)
        lock_fd, created = _acquire_lock(path)
        conn = None
        try:
            conn = sqlite3.connect(path, isolation_level=None, timeout=10.0)
            st = cls(conn, path, lock_fd)
            with _sql_errors(path, "opening it"):
                if st._has_schema():
                    st._check_intact()
                    st._check_code(code)
                    st._add_missing_columns()
                    conn.execute("PRAGMA journal_mode=WAL")
                    st._create_extra()
                else:
                    conn.execute("PRAGMA journal_mode=WAL")
                    st._create(code)
                conn.execute("PRAGMA synchronous=NORMAL")
            return st
        except BaseException:
            if conn is not None:
                conn.close()
            _release_lock(lock_fd)
            if created and os.path.exists(path) and os.path.getsize(path) == 0:
                os.unlink(path)  # leave nothing behind for a store that never started
            raise

    @classmethod
    def open_reader(cls, path) -> Store:
        """Open an existing store read-only (no lock; safe while a writer runs).

        Tries ``mode=ro`` first; on read-only media or a read-only folder (where
        the WAL index cannot be created) falls back to ``immutable=1``.
        """
        path = os.fspath(path)
        if not os.path.isfile(path):
            raise StoreError(f"No results store at {path!r}.")
        _check_sqlite_header(path)
        uri = "file:" + urllib.parse.quote(os.path.abspath(path))
        last = None
        for flags in ("mode=ro", "mode=ro&immutable=1"):
            conn = None
            try:
                conn = sqlite3.connect(f"{uri}?{flags}", uri=True, isolation_level=None,
                                       timeout=10.0)
                st = cls(conn, path, None)
                if not st._has_schema():
                    conn.close()
                    raise StoreError(
                        f"{path!r} is an SQLite file but not an ldpcmarg results store.")
                return st
            except sqlite3.DatabaseError as exc:
                if conn is not None:
                    conn.close()
                last = exc
                if _code_of(exc) in (sqlite3.SQLITE_CORRUPT, sqlite3.SQLITE_NOTADB):
                    break
        raise _store_error(path, "reading it", last)

    def close(self) -> None:
        """Close the connection and release the writer lock."""
        if self._conn is not None:
            try:
                self._conn.close()
            finally:
                self._conn = None
                _release_lock(self._lock_fd)
                self._lock_fd = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # ------------------------------------------------------------ schema
    def _has_schema(self) -> bool:
        """True for a results store, False for an empty database; StoreError otherwise."""
        names = {r[0] for r in self._conn.execute(
            "SELECT name FROM sqlite_master WHERE type IN ('table', 'view', 'index', 'trigger') "
            "AND name NOT LIKE 'sqlite_%'")}
        if not names:
            return False
        tables = {r[0] for r in self._conn.execute(
            "SELECT name FROM sqlite_master WHERE type='table'")}
        ours = set(STORE_TABLES) <= tables
        if ours:
            keys = {r[0] for r in self._conn.execute("SELECT key FROM meta")}
            ours = {"code_fingerprint", "schema_version"} <= keys
        if not ours:
            shown = ", ".join(sorted(tables)[:6]) or "none"
            raise StoreError(
                f"{self.path!r} is an SQLite database but not an ldpcmarg results store "
                f"(its tables: {shown}); it was left unchanged. Give another --store file.")
        return True

    def _check_intact(self) -> None:
        rows = [r[0] for r in self._conn.execute("PRAGMA quick_check(5)")]
        if rows != ["ok"]:
            raise StoreError(
                f"The store {self.path!r} is damaged ({'; '.join(map(str, rows))[:160]}); it was "
                "left unchanged. Restore it from a copy, or read what is left with "
                "'ldpcmarg runs' and start a new --store file.")

    def _create(self, code) -> None:
        c = self._conn
        c.execute("BEGIN IMMEDIATE")
        try:
            for stmt in (_SCHEMA + _SCHEMA_EXTRA).split(";"):
                if stmt.strip():
                    c.execute(stmt)
            meta = {
                "schema_version": str(SCHEMA_VERSION),
                "code_fingerprint": code.fingerprint,
                "code_name": code.name,
                "code_source": code.source or "",
                "n": str(code.n),
                "m": str(code.m),
                "k": str(code.k),
                "created": _now(),
            }
            c.executemany("INSERT INTO meta VALUES (?, ?)", sorted(meta.items()))
            c.execute("COMMIT")
        except BaseException:
            _rollback(c)
            raise

    def _create_extra(self) -> None:
        def work(c):
            for stmt in _SCHEMA_EXTRA.split(";"):
                if stmt.strip():
                    c.execute(stmt)

        self._tx(work)

    def _columns(self, table: str) -> set:
        return {r[1] for r in self._conn.execute(f"PRAGMA table_info({table})")}

    def _add_missing_columns(self) -> None:
        for table in ("chunks", "results"):
            have = self._columns(table)
            for f in _ADDED_COUNT_FIELDS:
                if f not in have:
                    self._conn.execute(
                        f"ALTER TABLE {table} ADD COLUMN {f} INTEGER NOT NULL DEFAULT 0")

    def _count_select(self, table: str, alias: str = "") -> str:
        """The count columns of ``table`` for a SELECT (0 for columns an old store lacks)."""
        have = self._columns(table)
        if self.meta().get("schema_version") == "1":
            have.discard("ml_lower_bound_frame_errors")
        # a store written before the ML lower bound was counted: unknown (None), not 0
        missing = {f: ("NULL" if f == "ml_lower_bound_frame_errors" else "0")
                   for f in COUNT_FIELDS}
        return ", ".join(alias + f if f in have else missing[f] for f in COUNT_FIELDS)

    @_guard_reads
    def meta(self) -> dict:
        """Store-level facts (code fingerprint, name, source, n, m, k)."""
        return dict(self._conn.execute("SELECT key, value FROM meta").fetchall())

    def _check_code(self, code) -> None:
        meta = self.meta()
        if meta.get("schema_version") != str(SCHEMA_VERSION):
            raise StoreError(
                f"The store {self.path!r} has schema version {meta.get('schema_version')}; "
                f"this ldpcmarg writes version {SCHEMA_VERSION}. Use a new store file."
            )
        if meta.get("code_fingerprint") != code.fingerprint:
            raise StoreError(
                f"The store {self.path!r} holds results for another code "
                f"({meta.get('code_name')!r}, n={meta.get('n')}, fingerprint "
                f"{meta.get('code_fingerprint')}), not {code.name!r} (fingerprint "
                f"{code.fingerprint}); use another --store file."
            )

    # ------------------------------------------------------------ writing
    def _tx(self, fn, what: str = "recording results"):
        c = self._conn
        with _sql_errors(self.path, what):
            try:
                c.execute("BEGIN IMMEDIATE")
            except sqlite3.OperationalError as exc:
                if _code_of(exc) == sqlite3.SQLITE_BUSY:
                    raise StoreError(f"The store {self.path!r} is busy: {exc}.") from exc
                raise
            try:
                out = fn(c)
                c.execute("COMMIT")
                return out
            except BaseException:
                # SQLite rolls back by itself after e.g. SQLITE_FULL; a second ROLLBACK
                # would fail with "no transaction is active" and hide the real cause
                _rollback(c)
                raise

    def run_for(self, settings: dict, decoders, versions: dict) -> tuple[int, bool]:
        """Find or create the run with these ``settings``.

        Returns
        -------
        (run_id, created) : tuple of int and bool
        """
        text = json.dumps(settings, sort_keys=True)
        key = hashlib.sha256(text.encode()).hexdigest()[:16]

        versions = {k: v for k, v in dict(versions).items() if k != "history"}
        notice = []

        def work(c):
            row = c.execute("SELECT id, decoders, versions FROM runs WHERE key=?",
                            (key,)).fetchone()
            now = _now()
            if row is None:
                cur = c.execute(
                    "INSERT INTO runs (key, settings, decoders, versions, created, updated) "
                    "VALUES (?, ?, ?, ?, ?, ?)",
                    (key, text, json.dumps(list(decoders)),
                     json.dumps(_with_history(versions, [versions]), sort_keys=True), now, now))
                return int(cur.lastrowid), True
            known = json.loads(row[1])
            merged = known + [d for d in decoders if d not in known]
            history = version_history(json.loads(row[2]))
            if history and history[-1] != versions:
                notice.append(_version_notice(int(row[0]), self.path, history[-1], versions))
            if versions not in history:
                history.append(versions)
            first = history[0]
            c.execute("UPDATE runs SET decoders=?, versions=?, updated=? WHERE id=?",
                      (json.dumps(merged), json.dumps(_with_history(first, history),
                                                      sort_keys=True), now, row[0]))
            return int(row[0]), False

        out = self._tx(work)
        for line in notice:
            _log.warning(line)
        self.notices.extend(notice)
        return out

    def point_id(self, run_id: int, point_key: int, snr: float) -> int:
        """Id of the (run, point) row, created if needed."""
        def work(c):
            row = c.execute("SELECT id FROM points WHERE run_id=? AND point_key=?",
                            (run_id, point_key)).fetchone()
            if row is not None:
                return int(row[0])
            cur = c.execute("INSERT INTO points (run_id, point_key, snr) VALUES (?, ?, ?)",
                            (run_id, point_key, float(snr)))
            return int(cur.lastrowid)

        return self._tx(work)

    def add_chunk(self, point_id: int, chunk_index: int, rows: dict) -> None:
        """Record one completed chunk (all its decoders) in one transaction.

        Parameters
        ----------
        rows : dict of str to tuple
            decoder spec -> counts in ``COUNT_FIELDS`` order.
        """
        now = _now()
        ph = ", ".join("?" * (len(COUNT_FIELDS) + 4))

        def work(c):
            c.executemany(
                f"INSERT OR IGNORE INTO chunks (point_id, decoder, chunk_index, "
                f"{', '.join(COUNT_FIELDS)}, created) VALUES ({ph})",
                [(point_id, dec, chunk_index, *counts, now) for dec, counts in rows.items()])

        self._tx(work)

    def save_result(self, point_id: int, decoder: str, counts: tuple, chunks: int,
                    stop: str, rule: dict) -> None:
        """Record the counted totals of one (point, decoder)."""
        ph = ", ".join("?" * (len(COUNT_FIELDS) + 6))

        def work(c):
            c.execute(
                f"INSERT OR REPLACE INTO results (point_id, decoder, {', '.join(COUNT_FIELDS)}, "
                f"chunks, stop, rule, updated) VALUES ({ph})",
                (point_id, decoder, *counts, chunks, stop, json.dumps(rule, sort_keys=True),
                 _now()))

        self._tx(work)

    def add_payload_chunk(self, point_id: int, decoder: str, chunk_index: int, frames: int,
                          payload: dict) -> None:
        """Record one completed chunk whose results are a JSON document (one transaction)."""
        text = json.dumps(payload, sort_keys=True)

        def work(c):
            c.execute("INSERT OR IGNORE INTO payload_chunks (point_id, decoder, chunk_index, "
                      "frames, payload, created) VALUES (?, ?, ?, ?, ?, ?)",
                      (point_id, decoder, int(chunk_index), int(frames), text, _now()))

        self._tx(work)

    def put_payload(self, kind: str, key: str, payload) -> None:
        """Cache a JSON document under (kind, key); an existing one is kept."""
        text = json.dumps(payload, sort_keys=True)

        def work(c):
            c.execute("INSERT OR IGNORE INTO payloads (kind, key, payload, created) "
                      "VALUES (?, ?, ?, ?)", (kind, key, text, _now()))

        self._tx(work)

    # ------------------------------------------------------------ reading
    @_guard_reads
    def payload_chunks(self, point_id: int) -> list[tuple]:
        """Stored JSON chunks of a point: ``(decoder, chunk_index, frames, payload)`` tuples."""
        try:
            rows = self._conn.execute(
                "SELECT decoder, chunk_index, frames, payload FROM payload_chunks "
                "WHERE point_id=? ORDER BY chunk_index", (point_id,)).fetchall()
        except sqlite3.OperationalError:  # a store written before the table existed
            return []
        return [(r[0], int(r[1]), int(r[2]), json.loads(r[3])) for r in rows]

    @_guard_reads
    def get_payload(self, kind: str, key: str):
        """The cached JSON document under (kind, key), or None."""
        try:
            row = self._conn.execute("SELECT payload FROM payloads WHERE kind=? AND key=?",
                                     (kind, key)).fetchone()
        except sqlite3.OperationalError:
            return None
        return None if row is None else json.loads(row[0])

    @_guard_reads
    def chunks(self, point_id: int) -> list[StoredChunk]:
        """All stored chunks of a point (any decoder, any size)."""
        rows = self._conn.execute(
            f"SELECT decoder, chunk_index, {self._count_select('chunks')} FROM chunks "
            "WHERE point_id=? ORDER BY chunk_index", (point_id,)).fetchall()
        return [StoredChunk(r[0], int(r[1]), tuple(r[2:])) for r in rows]

    @_guard_reads
    def runs(self) -> list[dict]:
        """Every run with its settings, decoders, point count and chunk totals."""
        out = []
        for rid, settings, decoders, versions, created, updated in self._conn.execute(
                "SELECT id, settings, decoders, versions, created, updated FROM runs ORDER BY id"):
            npts, nchunks, frames = self._conn.execute(
                "SELECT COUNT(DISTINCT p.id), COUNT(c.chunk_index), "
                "COALESCE(SUM(c.frames), 0) FROM points p LEFT JOIN chunks c "
                "ON c.point_id = p.id WHERE p.run_id=?", (rid,)).fetchone()
            snrs = [r[0] for r in self._conn.execute(
                "SELECT snr FROM points WHERE run_id=? ORDER BY snr", (rid,))]
            out.append({
                "run": rid, "settings": json.loads(settings), "decoders": json.loads(decoders),
                "versions": json.loads(versions), "created": created, "updated": updated,
                "points": int(npts), "snr": snrs, "chunks": int(nchunks),
                "decoded_frames": int(frames),
            })
        return out

    @_guard_reads
    def results(self, run_id: int | None = None) -> list[dict]:
        """Counted results (one dict per run, point and decoder), ordered by run, decoder, SNR.

        Version-1 stores (read-only use) give ``ml_lower_bound_frame_errors = None``.
        """
        sql = (f"SELECT p.run_id, p.snr, r.decoder, {self._count_select('results', 'r.')}, "
               "r.chunks, r.stop, r.rule FROM results r JOIN points p ON p.id = r.point_id")
        args: tuple = ()
        if run_id is not None:
            sql += " WHERE p.run_id=?"
            args = (run_id,)
        sql += " ORDER BY p.run_id, r.decoder, p.snr"
        out = []
        for row in self._conn.execute(sql, args):
            d = {"run": row[0], "snr": row[1], "decoder": row[2]}
            d.update(dict(zip(COUNT_FIELDS, row[3:3 + len(COUNT_FIELDS)], strict=True)))
            d["chunks"], d["stop"], d["rule"] = row[-3], row[-2], json.loads(row[-1])
            out.append(d)
        return out

    @_guard_reads
    def row_counts(self) -> dict:
        """Number of rows per table (for integrity checks)."""
        return {t: self._conn.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
                for t in ("meta", "runs", "points", "chunks", "results")}


def _check_sqlite_header(path: str) -> None:
    try:
        with open(path, "rb") as fh:
            head = fh.read(16)
    except OSError as exc:
        raise StoreError(f"Cannot read the store {path!r}: {exc.strerror}.") from exc
    if head and head != b"SQLite format 3\x00":
        raise StoreError(f"{path!r} exists and is not an ldpcmarg results store (not SQLite).")


def _acquire_lock(path: str) -> tuple[int, bool]:
    """Exclusive advisory lock on the database file itself; returns (fd, created).

    ``flock`` locks the open file (device and inode), so every path to the same
    file -- hard links, symbolic links, relative or absolute spellings -- meets
    the same lock. It is independent of SQLite's own POSIX byte-range locks.
    """
    import fcntl

    created = not os.path.exists(path)
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT | getattr(os, "O_CLOEXEC", 0), 0o644)
    except OSError as exc:
        raise StoreError(f"Cannot open the store {path!r}: {exc.strerror}.") from exc
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        os.close(fd)
        raise StoreError(
            f"The store {path!r} is being written by another process (perhaps through "
            "another name or link of the same file); wait for it to finish or use another "
            "--store file."
        ) from exc
    return fd, created


def _release_lock(fd: int | None) -> None:
    if fd is None:
        return
    import fcntl

    try:
        fcntl.flock(fd, fcntl.LOCK_UN)
    finally:
        os.close(fd)
