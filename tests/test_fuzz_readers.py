"""Fuzzing the three matrix readers and the posteriors input reader.

Property: any byte string gives either a valid result or exactly one
``LdpcmargError`` -- never another exception -- and the memory the reader
allocates stays bounded (tracemalloc peak, which numpy reports to). Inputs
are mutations of valid files (bit flips, truncations, insertions of hostile
tokens), so most examples reach deep into each parser. Seeded with
``derandomize=True`` and bounded in examples, so the run is repeatable.
"""

from __future__ import annotations

import io
import tracemalloc

import numpy as np
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ldpcmarg.analysis.posteriors import read_frames
from ldpcmarg.code.io import load_code
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import LdpcmargError

#: Peak bytes a reader may allocate for inputs of at most a few kilobytes. The
#: valid inputs need well under 1 MB; a reader trusting a declared size would
#: try gigabytes.
PEAK_LIMIT = 32 << 20

FUZZ = settings(max_examples=120, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.function_scoped_fixture,
                                       HealthCheck.too_slow])

H = np.array([[1, 0, 1, 0, 1, 0, 1], [0, 1, 1, 0, 0, 1, 1], [0, 0, 0, 1, 1, 1, 1]],
             dtype=np.uint8)  # Hamming(7,4)


def _valid_txt() -> bytes:
    return b"ldpcmarg-checks n=7 m=3\n# hamming\n0 2 4 6\n1 2 5 6\n3 4 5 6\n"


def _valid_mtx() -> bytes:
    r, c = np.nonzero(H)
    body = "".join(f"{i + 1} {j + 1}\n" for i, j in zip(r, c, strict=True))
    return f"%%MatrixMarket matrix coordinate pattern general\n3 7 {r.size}\n{body}".encode()


def _valid_npz(fmt: str) -> bytes:
    buf = io.BytesIO()
    M = {"csr": sp.csr_matrix, "csc": sp.csc_matrix, "coo": sp.coo_matrix}[fmt](H)
    sp.save_npz(buf, M, compressed=fmt != "coo")
    return buf.getvalue()


def _valid_npy() -> bytes:
    buf = io.BytesIO()
    np.save(buf, np.linspace(-2, 2, 14).reshape(2, 7))
    return buf.getvalue()


HOSTILE = [b"+0", b"6_0", "\u0663".encode(), b"99999999999999999999", b"9" * 400, b"-1",
           b"nan", b"inf", b"1e308", b"\x00", b"\xff\xfe", b"n=100000000", b"(9999999999,)",
           b"'<f8'", b"'|O'", b"True", b"\n", b"PK\x03\x04", b"%%MatrixMarket", b"-"]


@st.composite
def mutated(draw, base: bytes):
    data = bytearray(base)
    for _ in range(draw(st.integers(1, 6))):
        op = draw(st.sampled_from(["flip", "cut", "insert", "replace", "dup"]))
        if not data:
            data += draw(st.binary(max_size=8))
            continue
        i = draw(st.integers(0, len(data) - 1))
        if op == "flip":
            data[i] ^= 1 << draw(st.integers(0, 7))
        elif op == "cut":
            j = draw(st.integers(i, len(data)))
            del data[i:j]
        elif op == "insert":
            data[i:i] = draw(st.sampled_from(HOSTILE))
        elif op == "replace":
            tok = draw(st.sampled_from(HOSTILE))
            data[i:i + len(tok)] = tok
        else:
            j = draw(st.integers(i, min(len(data), i + 64)))
            data[j:j] = data[i:j]
    return bytes(data)


def _bounded(fn):
    """Run ``fn``; return its result or the LdpcmargError; assert the memory peak."""
    tracemalloc.start()
    try:
        try:
            out = fn()
        except LdpcmargError as exc:
            out = exc
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < PEAK_LIMIT, f"reader allocated {peak} bytes"
    return out


def _check_code(tmp_path, name: str, data: bytes):
    p = tmp_path / name
    p.write_bytes(data)
    out = _bounded(lambda: load_code(p))
    if isinstance(out, LdpcmargError):
        msg = str(out)
        assert msg and "\n" not in msg
    else:
        assert isinstance(out, ParityCheckCode)
        assert out.H.nnz > 0 and out.H.data.max() == 1


@FUZZ
@given(data=mutated(_valid_txt()))
def test_fuzz_text_reader(tmp_path, data):
    _check_code(tmp_path, "f.txt", data)


@FUZZ
@given(data=mutated(_valid_mtx()))
def test_fuzz_matrix_market_reader(tmp_path, data):
    _check_code(tmp_path, "f.mtx", data)


@FUZZ
@given(fmt=st.sampled_from(["csr", "csc", "coo"]), seed=st.integers(0, 2**16),
       data=st.data())
def test_fuzz_npz_reader(tmp_path, fmt, seed, data):
    raw = data.draw(mutated(_valid_npz(fmt)))
    _check_code(tmp_path, "f.npz", raw)


@FUZZ
@given(kind=st.sampled_from(["npy", "csv"]), data=st.data())
def test_fuzz_posteriors_input_reader(tmp_path, kind, data):
    base = _valid_npy() if kind == "npy" else b"0.5,-1.25,2,3e-1,-0.75,1,0\n1,1,1,1,1,1,-1\n"
    raw = data.draw(mutated(base))
    p = tmp_path / f"y.{kind}"
    p.write_bytes(raw)
    out = _bounded(lambda: read_frames(p, n=7))
    if not isinstance(out, LdpcmargError):
        assert out.ndim == 2 and out.shape[1] == 7 and out.shape[0] >= 1
