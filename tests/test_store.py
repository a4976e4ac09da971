"""Results store: one code per file, runs by settings, exclusive writer, no damage on errors."""

from __future__ import annotations

import sqlite3

import numpy as np
import pytest

from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.engine.store import COUNT_FIELDS, Store
from ldpcmarg.errors import StoreError
from tests.conftest import HAMMING_7_4

SETTINGS = {"channel": "awgn", "snr_kind": "ebn0_db", "seed": 1, "chunk_frames": 10}


def _other_code():
    H = HAMMING_7_4.copy()
    H[0, 0] = 0
    return ParityCheckCode(H, name="other")


def _counts(frames=10, fe=2):
    return (frames, 5, 9, 3, 5, fe, 0, 1, 20, 0.01, 1)  # COUNT_FIELDS order


def test_roundtrip_and_reuse(tmp_path, hamming74):
    path = tmp_path / "r.sqlite"
    with Store.open_writer(path, hamming74) as st:
        run, created = st.run_for(SETTINGS, ["sum-product"], {"ldpcmarg": "x"})
        assert created
        pid = st.point_id(run, 7, 1.5)
        st.add_chunk(pid, 0, {"sum-product": _counts()})
        st.add_chunk(pid, 0, {"sum-product": _counts()})  # same chunk again: ignored
        st.save_result(pid, "sum-product", _counts(), 1, "frame_errors", {"frame_errors": 2})
    with Store.open_writer(path, hamming74) as st:
        run2, created = st.run_for(SETTINGS, ["min-sum"], {"ldpcmarg": "x"})
        assert (run2, created) == (run, False)
        assert st.point_id(run, 7, 1.5) == pid
        rows = st.chunks(pid)
        assert len(rows) == 1 and rows[0].counts == _counts()
        other, created = st.run_for({**SETTINGS, "seed": 2}, ["min-sum"], {})
        assert created and other != run
    with Store.open_reader(path) as st:
        runs = st.runs()
        assert [r["run"] for r in runs] == [run, other]
        assert runs[0]["decoders"] == ["sum-product", "min-sum"]
        res = st.results()
        assert len(res) == 1 and res[0]["frame_errors"] == 2
        assert set(COUNT_FIELDS) <= set(res[0])


def test_other_code_refused_and_store_untouched(tmp_path, hamming74):
    path = tmp_path / "r.sqlite"
    with Store.open_writer(path, hamming74) as st:
        run, _ = st.run_for(SETTINGS, ["sum-product"], {})
        st.add_chunk(st.point_id(run, 1, 0.0), 0, {"sum-product": _counts()})
    before = path.read_bytes()
    with pytest.raises(StoreError, match="another code"):
        Store.open_writer(path, _other_code())
    assert path.read_bytes() == before
    with Store.open_reader(path) as st:
        assert st.row_counts()["chunks"] == 1


def test_second_writer_gets_clear_error(tmp_path, hamming74):
    path = tmp_path / "r.sqlite"
    first = Store.open_writer(path, hamming74)
    try:
        with pytest.raises(StoreError, match="another process"):
            Store.open_writer(path, hamming74)
        # readers are fine while the writer holds the lock
        with Store.open_reader(path) as rd:
            assert rd.meta()["code_fingerprint"] == hamming74.fingerprint
    finally:
        first.close()
    Store.open_writer(path, hamming74).close()  # lock released on close


def test_not_a_store(tmp_path, hamming74):
    bad = tmp_path / "notes.txt"
    bad.write_text("hello")
    with pytest.raises(StoreError, match="not an ldpcmarg results store"):
        Store.open_writer(bad, hamming74)
    assert bad.read_text() == "hello"
    plain = tmp_path / "plain.sqlite"
    con = sqlite3.connect(plain)
    con.execute("CREATE TABLE t (x)")
    con.commit()
    con.close()
    with pytest.raises(StoreError, match="not an ldpcmarg results store"):
        Store.open_reader(plain)
    with pytest.raises(StoreError, match="does not exist"):
        Store.open_writer(tmp_path / "missing" / "r.sqlite", hamming74)
    with pytest.raises(StoreError, match="No results store"):
        Store.open_reader(tmp_path / "absent.sqlite")


def test_unusable_paths(tmp_path, hamming74):
    # A directory, or a "directory" that is really a file: refused before anything is written.
    with pytest.raises(StoreError, match="is a directory"):
        Store.open_writer(tmp_path, hamming74)
    f = tmp_path / "file"
    f.write_text("x")
    with pytest.raises(StoreError, match="does not exist"):
        Store.open_writer(f / "r.sqlite", hamming74)
    assert f.read_text() == "x"


def test_memory_store(hamming74):
    st = Store.memory(hamming74)
    run, _ = st.run_for(SETTINGS, ["a"], {})
    pid = st.point_id(run, 3, 2.0)
    st.add_chunk(pid, 4, {"a": _counts(), "b": _counts(fe=1)})
    assert sorted((c.decoder, c.chunk_index) for c in st.chunks(pid)) == [("a", 4), ("b", 4)]
    assert np.isclose(st.chunks(pid)[0].counts[COUNT_FIELDS.index("seconds")], 0.01)
    st.close()


def test_store_written_before_capped_frames_is_read_and_upgraded(tmp_path, hamming74):
    # a store made before the capped_frames column existed (emulated by dropping it)
    path = tmp_path / "old.sqlite"
    with Store.open_writer(path, hamming74) as st:
        run, _ = st.run_for({"seed": 1}, ["sum-product"], {})
        pid = st.point_id(run, 1, 0.0)
        st.add_chunk(pid, 0, {"sum-product": _counts()})
        st.save_result(pid, "sum-product", _counts(), 1, "max_frames", {})
    with sqlite3.connect(path) as conn:
        for table in ("chunks", "results"):
            conn.execute(f"ALTER TABLE {table} DROP COLUMN capped_frames")
    with Store.open_reader(path) as st:
        assert st.chunks(pid)[0].counts[-1] == 0 and st.results()[0]["capped_frames"] == 0
    with Store.open_writer(path, hamming74) as st:
        st.add_chunk(pid, 1, {"sum-product": _counts()})
        assert [c.counts[-1] for c in st.chunks(pid)] == [0, 1]
