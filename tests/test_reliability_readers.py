"""Hostile matrix and channel-output files: one clear error each, memory bounded, no hangs.

Each test reproduces one defect of a hostile-input review. Where the defect
was seen in the command line, the test runs the CLI in a subprocess and
checks the contract: exit status 2, one ``Error:`` line, no traceback.
"""

from __future__ import annotations

import io
import os
import resource
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from cli_helpers import assert_clean_error

from ldpcmarg.code.io import load_code
from ldpcmarg.errors import CodeFileError, InputError, LdpcmargError, ResourceError

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}


def cli(args, cwd, timeout=60, address_space=None, env=None):
    """Run ``ldpcmarg ARGS`` in a subprocess, optionally under an address-space limit."""
    def limit():
        if address_space is not None:
            resource.setrlimit(resource.RLIMIT_AS, (address_space, address_space))

    return subprocess.run([sys.executable, "-m", "ldpcmarg", *map(str, args)], cwd=cwd,
                          env={**ENV, **(env or {})}, capture_output=True, text=True,
                          timeout=timeout, preexec_fn=limit)


def npy_bytes(arr) -> bytes:
    buf = io.BytesIO()
    np.save(buf, arr, allow_pickle=False)
    return buf.getvalue()


# ------------------------------------------------------------------ strict text numbers
@pytest.mark.parametrize("token", ["+0", "\u0663", "6_0", "0x3", "1.0", "\u00a02"])
def test_text_reader_accepts_only_ascii_decimals(tmp_path, token):
    # Python's int() takes '+0', '6_0' (= 60) and Arabic-Indic digits; the format does not
    p = tmp_path / "c.txt"
    p.write_text(f"ldpcmarg-checks n=70 m=1\n{token} 1\n", encoding="utf-8")
    with pytest.raises(CodeFileError, match="line 2: unparsable bit index"):
        load_code(p)


@pytest.mark.parametrize("header", ["n=+7 m=1", "n=7 m=\u0661", "n=7_0 m=1"])
def test_text_header_accepts_only_ascii_decimals(tmp_path, header):
    p = tmp_path / "h.txt"
    p.write_text(f"ldpcmarg-checks {header}\n0 1\n", encoding="utf-8")
    with pytest.raises(CodeFileError, match="line 1: wrong header"):
        load_code(p)


def test_mtx_reader_refuses_underscore_and_signs_in_indices(tmp_path):
    p = tmp_path / "u.mtx"
    p.write_text("%%MatrixMarket matrix coordinate pattern general\n2 70 1\n1 6_0\n")
    with pytest.raises(CodeFileError, match="line 3: unparsable entry"):
        load_code(p)
    p.write_text("%%MatrixMarket matrix coordinate pattern general\n2 +3 1\n1 1\n")
    with pytest.raises(CodeFileError, match="line 2: unparsable size"):
        load_code(p)


# ------------------------------------------------------------------ .npz raw arrays
def _npz(path, **arrays):
    np.savez(path, **arrays)
    return path


def test_npz_inconsistent_indptr_is_refused(tmp_path):
    # a valid 2 x 3 CSR matrix [[1,1,0],[0,1,1]] with indptr rewritten: scipy would build
    # a different matrix from these arrays than either reading of the file
    M = sp.csr_matrix(np.array([[1, 1, 0], [0, 1, 1]], dtype=np.uint8))
    for indptr in ([0, 3, 4, 4], [0, 1, 5], [1, 2, 4], [0, 3, 2]):
        p = _npz(tmp_path / "p.npz", format=np.array("csr"), shape=np.array([2, 3]),
                 data=M.data, indices=M.indices, indptr=np.array(indptr))
        with pytest.raises(CodeFileError, match="indptr"):
            load_code(p)


def test_npz_float_coo_indices_are_refused(tmp_path):
    p = _npz(tmp_path / "f.npz", format=np.array("coo"), shape=np.array([2, 3]),
             data=np.ones(2), row=np.array([0.0, 1.0]), col=np.array([0.0, 2.0]))
    with pytest.raises(CodeFileError, match="float or other indices are refused"):
        load_code(p)


def test_npz_without_pickles_even_when_members_are_objects(tmp_path):
    p = tmp_path / "o.npz"
    np.savez(p, format=np.array("csr"), shape=np.array([1, 2], dtype=object),
             data=np.ones(1), indices=np.array([0]), indptr=np.array([0, 1]), allow_pickle=True)
    with pytest.raises(CodeFileError, match="never pickled objects"):
        load_code(p)


def test_npy_header_that_lies_about_shape(tmp_path):
    raw = npy_bytes(np.array([0, 1], dtype=np.int64))
    lie = raw.replace(b"(2,)", b"(99999999999,)")
    p = tmp_path / "lie.npz"
    with zipfile.ZipFile(p, "w") as zf:
        zf.writestr("format.npy", npy_bytes(np.array("csr")))
        zf.writestr("shape.npy", npy_bytes(np.array([1, 2])))
        zf.writestr("data.npy", npy_bytes(np.ones(2)))
        zf.writestr("indices.npy", lie)
        zf.writestr("indptr.npy", npy_bytes(np.array([0, 2])))
    with pytest.raises(CodeFileError, match="header announces shape"):
        load_code(p)


@pytest.mark.parametrize("shape", [(10**9, 10**9), (2**62 - 1, 3)])
def test_npz_huge_declared_shape(tmp_path, shape):
    p = _npz(tmp_path / "s.npz", format=np.array("coo"), shape=np.array(shape),
             data=np.ones(2), row=np.array([0, 1]), col=np.array([0, 1]))
    with pytest.raises(CodeFileError, match="memory stays bounded"):
        load_code(p)


# ------------------------------------------------------------------ CLI: sizes, files
def test_cli_huge_declared_sizes_bounded_memory(tmp_path):
    # the 44-byte file that made 'inspect' take 45 s and 6.4 GB; run under a 1.5 GB
    # address-space limit so any allocation proportional to n would fail loudly
    cases = {
        "n8.txt": "ldpcmarg-checks n=100000000 m=1\n0 1 2\n",
        "n12.txt": "ldpcmarg-checks n=1000000000000 m=1\n0 1\n",
        "d5000.txt": "ldpcmarg-checks n=" + "9" * 5000 + " m=1\n0 1\n",
        "big.mtx": "%%MatrixMarket matrix coordinate pattern general\n"
                   "1000000000000 1000000000000 1\n1 1\n",
    }
    for name, text in cases.items():
        (tmp_path / name).write_text(text)
        done = cli(["inspect", name], tmp_path, address_space=1536 << 20)
        assert_clean_error(done, name)
        assert "bounded" in done.stderr or "digits" in done.stderr, done.stderr


def test_cli_fifo_is_refused_without_hanging(tmp_path):
    fifo = tmp_path / "pipe.txt"
    os.mkfifo(fifo)
    done = cli(["inspect", fifo.name], tmp_path, timeout=60)  # used to block forever
    assert_clean_error(done, "named pipe")


def test_cli_empty_and_corrupt_npz(tmp_path):
    (tmp_path / "empty.npz").write_bytes(b"")  # used to print "Aborted." with exit 130
    M = sp.csr_matrix(np.array([[1, 1, 0, 1], [0, 1, 1, 1]], dtype=np.uint8))
    sp.save_npz(tmp_path / "good.npz", M)
    raw = bytearray((tmp_path / "good.npz").read_bytes())
    with zipfile.ZipFile(tmp_path / "good.npz") as zf:
        info = zf.getinfo("indices.npy")
    h = info.header_offset  # the local header's own name and extra lengths (bytes 26-29)
    start = h + 30 + int.from_bytes(raw[h + 26:h + 28], "little") \
        + int.from_bytes(raw[h + 28:h + 30], "little")
    for j in range(start + 2, start + 8):  # damage the compressed member (BadZipFile before)
        raw[j] ^= 0x5A
    (tmp_path / "corrupt.npz").write_bytes(bytes(raw))
    for name in ("empty.npz", "corrupt.npz"):
        assert_clean_error(cli(["inspect", name], tmp_path), name, "not a readable .npz")


def test_long_code_gf2_work_refused_by_estimate(tmp_path):
    # a valid long code whose bit-packed rank needs ~2.5 GB: under a 1.5 GB address-space
    # limit the estimate refuses it with one clear error instead of a MemoryError
    rng = np.random.default_rng(5)
    n, m = 200_000, 100_000
    cols = np.concatenate([rng.permutation(n) for _ in range(3)])
    rows = np.repeat(np.arange(m), 6)
    H = sp.coo_matrix((np.ones(cols.size, dtype=np.uint8), (rows, cols)), shape=(m, n)).tocsr()
    H.sum_duplicates()
    H.data[:] = 1
    sp.save_npz(tmp_path / "long.npz", H)
    code = "from ldpcmarg import load_code; print(load_code('long.npz').rank)"
    env = ENV

    def limit():
        resource.setrlimit(resource.RLIMIT_AS, (1536 << 20, 1536 << 20))

    done = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, env=env, text=True,
                          capture_output=True, timeout=120, preexec_fn=limit)
    assert done.returncode != 0
    assert "ResourceError" in done.stderr and "Bit-packed GF(2) work" in done.stderr
    assert "MemoryError: \n" not in done.stderr


def test_memory_limit_variable(monkeypatch):
    from ldpcmarg import _memory

    monkeypatch.setenv("LDPCMARG_MEMORY_LIMIT", "1M")
    assert _memory.memory_budget() <= 1 << 20
    with pytest.raises(ResourceError, match="would need about 2.0 MiB"):
        _memory.require_memory(2 << 20, "A test allocation")
    monkeypatch.setenv("LDPCMARG_MEMORY_LIMIT", "lots")
    with pytest.raises(ResourceError, match="not a byte count"):
        _memory.memory_budget()


# ------------------------------------------------------------------ posteriors input
def test_posteriors_input_hostile_files(tmp_path):
    from ldpcmarg.analysis.posteriors import read_frames

    (tmp_path / "empty.npy").write_bytes(b"")
    (tmp_path / "empty.npz").write_bytes(b"")
    raw = npy_bytes(np.zeros(7))
    (tmp_path / "lie.npy").write_bytes(raw.replace(b"(7,)", b"(70000000000,)"))
    (tmp_path / "under.csv").write_text("1_0,2,3,4,5,6,7\n")
    os.mkfifo(tmp_path / "pipe.csv")
    for name, fragment in [("empty.npy", "empty"), ("empty.npz", "not a readable .npz"),
                           ("lie.npy", "header announces shape"), ("under.csv", "not a number"),
                           ("pipe.csv", "named pipe")]:
        with pytest.raises(InputError, match=fragment):
            read_frames(tmp_path / name, n=7)


def test_cli_outputs_out_of_range_message(tmp_path):
    y = np.full((1, 7), 0.9)
    y[0, 3] = 1e308  # 2y/sigma^2 overflows float64: used to say "LLRs contain an infinite value"
    np.save(tmp_path / "y.npy", y)
    done = cli(["posteriors", "hamming-7-4", "y.npy", "-o", "p.npz", "--ebn0", "2"], tmp_path)
    assert_clean_error(done, "channel outputs out of range", "frame 0, bit 3")
    assert "LLRs contain" not in done.stderr


def test_errors_are_package_errors():
    assert issubclass(ResourceError, LdpcmargError) and issubclass(ResourceError, MemoryError)
