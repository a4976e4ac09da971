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
The coordinating process is the only writer. It holds an exclusive
``flock`` on ``<store>.lock`` for as long as the store is open for writing, so
a second writer gets a clear :class:`StoreError` at once (the lock goes away
with the process, even after SIGKILL). Each completed chunk is written in one
``BEGIN IMMEDIATE`` transaction; the database runs in WAL mode, so readers
(``ldpcmarg runs``, ``ldpcmarg plot``) never block the writer, and a killed
writer leaves every committed chunk intact.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
import sqlite3
from dataclasses import dataclass

from ..errors import StoreError

__all__ = ["Store", "COUNT_FIELDS", "SCHEMA_VERSION"]

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
            Path unusable or unwritable, file not a store, store held by
            another writer, or store made for a different code. Nothing in
            an existing store is changed when this is raised.
        """
        path = os.fspath(path)
        parent = os.path.dirname(os.path.abspath(path)) or "."
        if os.path.isdir(path):
            raise StoreError(f"The store path {path!r} is a directory; give a file name.")
        if not os.path.isdir(parent):
            raise StoreError(
                f"Cannot create the store {path!r}: directory {parent!r} does not exist.")
        exists = os.path.exists(path)
        if exists and not os.access(path, os.R_OK | os.W_OK):
            raise StoreError(f"The store {path!r} is not writable.")
        if not os.access(parent, os.W_OK):
            raise StoreError(
                f"Cannot write the store {path!r}: directory {parent!r} is not writable.")
        lock_fd = _acquire_lock(path + ".lock")
        conn = None
        try:
            if exists and os.path.getsize(path) > 0:
                _check_sqlite_header(path)
            conn = sqlite3.connect(path, isolation_level=None, timeout=10.0)
            st = cls(conn, path, lock_fd)
            if st._has_schema():
                st._check_code(code)
                st._add_missing_columns()
                conn.execute("PRAGMA journal_mode=WAL")
                st._create_extra()
            else:
                conn.execute("PRAGMA journal_mode=WAL")
                st._create(code)
            conn.execute("PRAGMA synchronous=NORMAL")
            return st
        except sqlite3.DatabaseError as exc:
            if conn is not None:
                conn.close()
            _release_lock(lock_fd)
            raise StoreError(f"The store {path!r} is not usable: {exc}.") from exc
        except BaseException:
            if conn is not None:
                conn.close()
            _release_lock(lock_fd)
            raise

    @classmethod
    def open_reader(cls, path) -> Store:
        """Open an existing store read-only (no lock; safe while a writer runs)."""
        path = os.fspath(path)
        if not os.path.isfile(path):
            raise StoreError(f"No results store at {path!r}.")
        _check_sqlite_header(path)
        try:
            conn = sqlite3.connect(f"file:{os.path.abspath(path)}?mode=ro", uri=True,
                                   isolation_level=None, timeout=10.0)
            st = cls(conn, path, None)
            if not st._has_schema():
                conn.close()
                raise StoreError(f"{path!r} is an SQLite file but not an ldpcmarg results store.")
            return st
        except sqlite3.DatabaseError as exc:
            raise StoreError(f"The store {path!r} is not readable: {exc}.") from exc

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
        row = self._conn.execute(
            "SELECT name FROM sqlite_master WHERE type='table' AND name='meta'").fetchone()
        return row is not None

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
            c.execute("ROLLBACK")
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
    def _tx(self, fn):
        c = self._conn
        try:
            c.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise StoreError(f"The store {self.path!r} is busy: {exc}.") from exc
        try:
            out = fn(c)
            c.execute("COMMIT")
            return out
        except BaseException:
            c.execute("ROLLBACK")
            raise

    def run_for(self, settings: dict, decoders, versions: dict) -> tuple[int, bool]:
        """Find or create the run with these ``settings``.

        Returns
        -------
        (run_id, created) : tuple of int and bool
        """
        text = json.dumps(settings, sort_keys=True)
        key = hashlib.sha256(text.encode()).hexdigest()[:16]

        def work(c):
            row = c.execute("SELECT id, decoders FROM runs WHERE key=?", (key,)).fetchone()
            now = _now()
            if row is None:
                cur = c.execute(
                    "INSERT INTO runs (key, settings, decoders, versions, created, updated) "
                    "VALUES (?, ?, ?, ?, ?, ?)",
                    (key, text, json.dumps(list(decoders)), json.dumps(versions, sort_keys=True),
                     now, now))
                return int(cur.lastrowid), True
            known = json.loads(row[1])
            merged = known + [d for d in decoders if d not in known]
            c.execute("UPDATE runs SET decoders=?, versions=?, updated=? WHERE id=?",
                      (json.dumps(merged), json.dumps(versions, sort_keys=True), now, row[0]))
            return int(row[0]), False

        return self._tx(work)

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
    def payload_chunks(self, point_id: int) -> list[tuple]:
        """Stored JSON chunks of a point: ``(decoder, chunk_index, frames, payload)`` tuples."""
        try:
            rows = self._conn.execute(
                "SELECT decoder, chunk_index, frames, payload FROM payload_chunks "
                "WHERE point_id=? ORDER BY chunk_index", (point_id,)).fetchall()
        except sqlite3.OperationalError:  # a store written before the table existed
            return []
        return [(r[0], int(r[1]), int(r[2]), json.loads(r[3])) for r in rows]

    def get_payload(self, kind: str, key: str):
        """The cached JSON document under (kind, key), or None."""
        try:
            row = self._conn.execute("SELECT payload FROM payloads WHERE kind=? AND key=?",
                                     (kind, key)).fetchone()
        except sqlite3.OperationalError:
            return None
        return None if row is None else json.loads(row[0])

    def chunks(self, point_id: int) -> list[StoredChunk]:
        """All stored chunks of a point (any decoder, any size)."""
        rows = self._conn.execute(
            f"SELECT decoder, chunk_index, {self._count_select('chunks')} FROM chunks "
            "WHERE point_id=? ORDER BY chunk_index", (point_id,)).fetchall()
        return [StoredChunk(r[0], int(r[1]), tuple(r[2:])) for r in rows]

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


def _acquire_lock(lock_path: str) -> int:
    import fcntl

    try:
        fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o644)
    except OSError as exc:
        raise StoreError(f"Cannot create the store lock {lock_path!r}: {exc.strerror}.") from exc
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        os.close(fd)
        raise StoreError(
            f"The store {lock_path[:-5]!r} is being written by another process; "
            "wait for it to finish or use another --store file."
        ) from exc
    return fd


def _release_lock(fd: int | None) -> None:
    if fd is None:
        return
    import fcntl

    try:
        fcntl.flock(fd, fcntl.LOCK_UN)
    finally:
        os.close(fd)
