"""File formats: round trips (hypothesis), shipped codes, one clear error per malformed input."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

import ldpcmarg as lm
from ldpcmarg.code.io import load_code, save_code, shipped_codes
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import CodeFileError, InputError

HEADER_MTX = "%%MatrixMarket matrix coordinate pattern general\n"


def malformed_files(d: Path) -> list[tuple[str, Path, str]]:
    """(label, path, fragment the error message must contain) for every malformed case."""
    cases = []

    def add(label, name, content, fragment):
        p = d / name
        if isinstance(content, bytes):
            p.write_bytes(content)
        else:
            p.write_text(content)
        cases.append((label, p, fragment))

    cases.append(("missing file", d / "nope.mtx", "no such file"))
    # ldpcmarg-checks text format
    add("txt wrong header", "hdr.txt", "checks n=3 m=1\n0 1\n", "line 1: wrong header")
    add("txt unparsable", "parse.txt", "ldpcmarg-checks n=4 m=2\n0 1\n2 x\n", "line 3: unparsable")
    add("txt duplicate", "dup.txt", "ldpcmarg-checks n=4 m=2\n0 1\n2 2\n", "line 3: duplicate")
    add("txt out of range", "range.txt", "ldpcmarg-checks n=4 m=1\n0 4\n", "line 2: bit index 4")
    add("txt empty matrix", "empty.txt", "ldpcmarg-checks n=0 m=0\n", "empty matrix")
    add("txt no ones", "zeros.txt", "ldpcmarg-checks n=3 m=2\n-\n-\n", "empty matrix")
    add("txt too few lines", "short.txt", "ldpcmarg-checks n=3 m=3\n0 1\n", "header says m = 3")
    add("txt too many lines", "long.txt", "ldpcmarg-checks n=3 m=1\n0 1\n1 2\n", "line 3: more")
    add("txt empty file", "blank.txt", "", "line 1")
    # Matrix Market
    add("mtx wrong header", "hdr.mtx", "%%Matrix coordinate\n2 2 1\n1 1\n", "line 1")
    add("mtx wrong field", "cplx.mtx",
        "%%MatrixMarket matrix coordinate complex general\n2 2 1\n1 1 1 0\n", "field 'complex'")
    add("mtx unparsable", "parse.mtx", HEADER_MTX + "2 3 2\n1 1\n2 q\n", "line 4: unparsable")
    add("mtx value", "value.mtx",
        "%%MatrixMarket matrix coordinate integer general\n2 3 2\n1 1 1\n2 3 2\n",
        "line 4: value 2 is not 0 or 1")
    add("mtx real value", "real.mtx",
        "%%MatrixMarket matrix coordinate real general\n2 3 1\n1 1 0.5\n", "value 0.5")
    add("mtx duplicate", "dup.mtx", HEADER_MTX + "2 3 3\n1 1\n2 2\n1 1\n",
        "line 5: duplicate entry (1, 1)")
    add("mtx out of range", "range.mtx", HEADER_MTX + "2 3 2\n1 1\n3 1\n",
        "line 4: index (3, 1) out of range")
    add("mtx zero index", "zero.mtx", HEADER_MTX + "2 3 1\n0 1\n", "out of range")
    add("mtx empty", "empty.mtx", HEADER_MTX + "0 5 0\n", "empty matrix")
    add("mtx count", "count.mtx", HEADER_MTX + "2 3 3\n1 1\n", "announces 3")
    add("mtx size line", "size.mtx", HEADER_MTX + "2 three 1\n1 1\n", "line 2: unparsable size")
    # scipy .npz
    add("npz garbage", "garbage.npz", b"PK\x03\x04 not really a zip", "not a readable .npz")
    p = d / "plain.npz"
    np.savez(p, H=np.eye(3))
    cases.append(("npz without sparse keys", p, "not a scipy.sparse .npz"))
    p = d / "value.npz"
    sp.save_npz(p, sp.csr_matrix(np.array([[1, 0, 3]])))
    cases.append(("npz value", p, "entry (0, 2): value 3"))
    p = d / "dup.npz"
    sp.save_npz(p, sp.coo_matrix((np.ones(2), ([0, 0], [1, 1])), shape=(2, 3)))
    cases.append(("npz duplicate", p, "entry (0, 1)"))
    p = d / "empty.npz"
    sp.save_npz(p, sp.csr_matrix((0, 4)))
    cases.append(("npz empty", p, "empty matrix"))
    add("unknown format", "code.bin", "hello\n", "unknown file format")
    return cases


def test_malformed_inputs_give_one_clear_error(tmp_path):
    for label, path, fragment in malformed_files(tmp_path):
        with pytest.raises(CodeFileError) as info:
            load_code(path)
        msg = str(info.value)
        assert str(path.name) in msg, label
        assert fragment in msg, (label, msg)
        assert "\n" not in msg, label


def _random_H(draw_matrix):
    M = np.array(draw_matrix, dtype=np.uint8)
    if not M.any():
        M[0, 0] = 1
    return M


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(arrays(np.uint8, st.tuples(st.integers(1, 9), st.integers(1, 40)),
              elements=st.integers(0, 1)),
       st.sampled_from(["txt", "mtx", "npz"]))
def test_round_trip_all_formats(tmp_path, M, fmt):
    H = _random_H(M)  # zero rows and columns allowed
    code = ParityCheckCode(H, name="rt")
    path = save_code(code, tmp_path / f"rt.{fmt}")
    back = load_code(path)
    assert back.fingerprint == code.fingerprint
    assert np.array_equal(back.H.toarray(), H)
    assert back.name == "rt"


def test_format_override_and_sniffing(tmp_path):
    code = lm.load_code("hamming-7-4")
    for fmt in ("txt", "mtx", "npz"):
        p = save_code(code, tmp_path / f"h-{fmt}.dat", fmt=fmt)
        assert load_code(p).fingerprint == code.fingerprint
        assert load_code(p, fmt=fmt).fingerprint == code.fingerprint
    with pytest.raises(InputError, match="format"):
        save_code(code, tmp_path / "x.bin")


def test_text_format_details(tmp_path):
    p = tmp_path / "c.txt"
    p.write_text("ldpcmarg-checks n=5 m=3\n# a comment\n4 0\n\n-\n1 2 3\n")
    code = load_code(p)
    assert code.H.toarray().tolist() == [[1, 0, 0, 0, 1], [0, 0, 0, 0, 0], [0, 1, 1, 1, 0]]
    save_code(code, tmp_path / "d.txt")
    text = (tmp_path / "d.txt").read_text().splitlines()
    assert text[0] == "ldpcmarg-checks n=5 m=3" and "-" in text


def test_mtx_variants(tmp_path):
    p = tmp_path / "a.mtx"
    # explicit zeros are dropped; integer and real fields accepted; dense array format too
    p.write_text("%%MatrixMarket matrix coordinate integer general\n% c\n2 3 3\n1 1 1\n2 3 1\n"
                 "1 2 0\n")
    assert load_code(p).H.toarray().tolist() == [[1, 0, 0], [0, 0, 1]]
    p.write_text("%%MatrixMarket matrix array real general\n2 2\n1\n0\n1.0\n1\n")
    assert load_code(p).H.toarray().tolist() == [[1, 1], [0, 1]]


def test_shipped_codes_listed_with_cards():
    items = {it["name"]: it for it in shipped_codes()}
    for name in ("hamming-7-4", "golay-24-12", "tanner-155-64", "peg-504-3-6", "peg-1008-3-6",
                 "array-1455-1166", "peg-irr-2016", "drifter-256-128"):
        assert name in items
        card = items[name]["card"]
        assert card.startswith(f"# {name}") and "minimum distance" in card
        assert items[name]["summary"]
        code = lm.load_code(name)
        assert code.name == name and f"| n, m, k | {code.n}, {code.m}, {code.k} |" in card
        assert f"`{code.fingerprint}`" in card


def test_shipped_name_and_path_agree():
    from ldpcmarg.code.io import shipped_code_dir
    path = Path(str(shipped_code_dir() / "tanner-155-64.mtx"))
    assert load_code(path).fingerprint == load_code("tanner-155-64").fingerprint
    root_link = Path(__file__).resolve().parent.parent / "codes" / "tanner-155-64.mtx"
    assert root_link.exists()


def test_directory_is_an_error(tmp_path):
    with pytest.raises(CodeFileError, match="directory"):
        load_code(tmp_path)
