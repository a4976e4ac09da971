"""The results store under hostile conditions: links, foreign files, damage, full disk, read-only.

Each test reproduces one defect of a fault review; where it was seen in the
command line the CLI runs in a subprocess (exit status 2, one ``Error:``
line, no traceback) and the store is checked afterwards: nothing stored is
lost.
"""

from __future__ import annotations

import json
import logging
import os
import resource
import shutil
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from cli_helpers import assert_clean_error

from ldpcmarg.engine.store import Store
from ldpcmarg.errors import StoreError

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
SIM = ["simulate", "hamming-7-4", "-d", "sum-product", "--ebn0", "1,2", "--frame-errors",
       "1000000", "--chunk-frames", "32", "--workers", "1", "-q"]


def cli(args, cwd, timeout=120, file_size=None):
    def limit():
        if file_size is not None:
            resource.setrlimit(resource.RLIMIT_FSIZE, (file_size, file_size))

    return subprocess.run([sys.executable, "-m", "ldpcmarg", *map(str, args)], cwd=cwd,
                          env=ENV, capture_output=True, text=True, timeout=timeout,
                          preexec_fn=limit)


def chunk_rows(path) -> list:
    con = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return con.execute("SELECT point_id, decoder, chunk_index, frames, bit_errors, "
                           "frame_errors FROM chunks ORDER BY 1, 2, 3").fetchall()
    finally:
        con.close()


@pytest.fixture
def small_store(tmp_path):
    path = tmp_path / "s.sqlite"
    done = cli(SIM + ["--max-frames", "320", "--store", path.name], tmp_path)
    assert done.returncode == 0, done.stderr
    return path


# ------------------------------------------------------------------ the writer lock
@pytest.mark.parametrize("kind", ["hard", "symbolic"])
def test_second_writer_through_a_link_is_refused(tmp_path, hamming74, kind):
    path = tmp_path / "a.sqlite"
    link = tmp_path / f"{kind}.sqlite"
    with Store.open_writer(path, hamming74):
        (os.link if kind == "hard" else os.symlink)(path, link)
        with pytest.raises(StoreError, match="being written by another process"):
            Store.open_writer(link, hamming74)
        # and from another process, through the CLI
        done = cli(SIM + ["--max-frames", "64", "--store", link.name], tmp_path)
        assert_clean_error(done, "being written by another process")
    Store.open_writer(link, hamming74).close()  # free once the first writer closed
    assert not list(tmp_path.glob("*.lock"))  # the lock is on the file: no lock file


def test_no_lock_file_left_after_a_clean_run(small_store):
    assert not list(small_store.parent.glob("*.lock"))


# ------------------------------------------------------------------ foreign and empty files
def test_foreign_sqlite_database_is_refused_unchanged(tmp_path):
    foreign = tmp_path / "other.db"
    con = sqlite3.connect(foreign)
    con.execute("CREATE TABLE inventory (item TEXT, qty INTEGER)")
    con.execute("INSERT INTO inventory VALUES ('bolts', 12)")
    con.commit()
    con.close()
    before = foreign.read_bytes()
    done = cli(SIM + ["--max-frames", "64", "--store", foreign.name], tmp_path)
    assert_clean_error(done, "not an ldpcmarg results store", "inventory")
    assert foreign.read_bytes() == before


def test_empty_file_is_a_new_store(tmp_path):
    (tmp_path / "e.sqlite").write_bytes(b"")
    done = cli(SIM + ["--max-frames", "64", "--store", "e.sqlite"], tmp_path)
    assert done.returncode == 0, done.stderr
    assert len(chunk_rows(tmp_path / "e.sqlite")) == 4  # 2 points x 2 chunks of 32


# ------------------------------------------------------------------ versions
def test_every_writing_version_is_recorded_and_a_change_is_reported(tmp_path, small_store):
    con = sqlite3.connect(small_store)
    (stored,) = con.execute("SELECT versions FROM runs").fetchone()
    old = json.loads(stored)
    old.pop("history", None)
    old["ldpcmarg"] = "0.0.1-older"
    con.execute("UPDATE runs SET versions=?", (json.dumps(old),))  # a store from an old release
    con.commit()
    con.close()
    done = cli(SIM + ["--max-frames", "640", "--store", small_store.name], tmp_path)
    assert done.returncode == 0, done.stderr
    warn = [ln for ln in done.stderr.splitlines() if ln.startswith("Warning:")]
    assert len(warn) == 1 and "0.0.1-older" in warn[0], done.stderr
    with Store.open_reader(small_store) as st:
        versions = st.runs()[0]["versions"]
    assert versions["ldpcmarg"] == "0.0.1-older"  # the recorded first version is kept
    assert [h["ldpcmarg"] for h in versions["history"]][0] == "0.0.1-older"
    assert len(versions["history"]) == 2
    listing = cli(["runs", small_store.name], tmp_path)
    assert listing.returncode == 0 and "written by several versions" in listing.stdout


def test_run_for_logs_version_change(tmp_path, hamming74, caplog):
    with Store.open_writer(tmp_path / "v.sqlite", hamming74) as st:
        settings = {"seed": 1}
        st.run_for(settings, ["sum-product"], {"ldpcmarg": "1", "numpy": "2"})
        with caplog.at_level(logging.WARNING, logger="ldpcmarg.store"):
            st.run_for(settings, ["sum-product"], {"ldpcmarg": "1", "numpy": "3"})
        assert "numpy 2" in caplog.text and "numpy 3" in caplog.text
        st.run_for(settings, ["sum-product"], {"ldpcmarg": "1", "numpy": "3"})
        hist = st.runs()[0]["versions"]["history"]
    assert [h["numpy"] for h in hist] == ["2", "3"]


# ------------------------------------------------------------------ damage, full disk
def test_damaged_page_on_resume_is_one_clear_error(tmp_path, small_store):
    raw = bytearray(small_store.read_bytes())
    page = 4096
    assert len(raw) >= 4 * page
    raw[2 * page:3 * page] = b"\xab" * page  # a middle page of the chunks table
    small_store.write_bytes(bytes(raw))
    done = cli(SIM + ["--max-frames", "640", "--store", small_store.name], tmp_path)
    assert_clean_error(done, "damaged")


def test_full_disk_says_so_and_loses_nothing(tmp_path, small_store):
    before = chunk_rows(small_store)
    size = small_store.stat().st_size
    # ulimit -f just above the current size: the next pages cannot be written
    done = cli(SIM + ["--max-frames", "200000", "--store", small_store.name], tmp_path,
               file_size=size + 8192)
    assert_clean_error(done, "disk is full", "nothing stored was lost")
    assert "cannot rollback" not in done.stderr
    after = chunk_rows(small_store)
    assert after[:len(before)] == before or set(before) <= set(after)
    con = sqlite3.connect(small_store)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()


# ------------------------------------------------------------------ read-only stores
def _wal_copy(src: Path, dst_dir: Path) -> Path:
    dst_dir.mkdir()
    dst = dst_dir / src.name
    shutil.copy(src, dst)
    con = sqlite3.connect(dst)
    assert con.execute("PRAGMA journal_mode=WAL").fetchone()[0] == "wal"
    con.close()
    return dst


def test_read_only_wal_store_is_readable_by_runs_and_plot(tmp_path, small_store):
    # the WAL index (-shm) cannot be created: here a directory is in its way, which
    # blocks it for any user (read-only media do the same)
    dst = _wal_copy(small_store, tmp_path / "media")
    (dst.parent / (dst.name + "-shm")).mkdir()
    listing = cli(["runs", dst], tmp_path)
    assert listing.returncode == 0, listing.stderr
    assert "hamming-7-4" in listing.stdout
    fig = cli(["plot", dst, "-o", tmp_path / "f.png"], tmp_path)
    assert fig.returncode == 0, fig.stderr
    assert (tmp_path / "f.png").stat().st_size > 0


def test_immutable_media_readable(tmp_path, small_store):
    # read-only media: the 'immutable' file attribute (root) or plain permissions (others)
    dst = _wal_copy(small_store, tmp_path / "ro")
    undo = None
    if os.geteuid() == 0:
        if shutil.which("chattr") and not subprocess.run(
                ["chattr", "+i", str(dst), str(dst.parent)], capture_output=True).returncode:
            undo = ["chattr", "-i", str(dst), str(dst.parent)]
        else:  # no immutable attribute here: block the WAL index and the file instead
            (dst.parent / (dst.name + "-shm")).mkdir()
            (dst.parent / (dst.name + "-wal")).mkdir()
    else:
        dst.chmod(0o444)
        dst.parent.chmod(0o555)
    try:
        listing = cli(["runs", dst], tmp_path)
        assert listing.returncode == 0, listing.stderr
        writer = cli(SIM + ["--max-frames", "64", "--store", dst], tmp_path)
        assert_clean_error(writer)
    finally:
        if undo:
            subprocess.run(undo, check=True)
        elif os.geteuid() != 0:
            dst.parent.chmod(0o755)
            dst.chmod(0o644)
