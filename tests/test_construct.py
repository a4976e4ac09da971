"""Constructions: degrees, girth, determinism, classical codes, shipped-code reproducibility."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

import ldpcmarg as lm
from ldpcmarg.code import construct as C
from ldpcmarg.errors import InputError

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("n", [504, 1008])
def test_peg_regular_girth_and_exact_degrees(n):
    # PEG (Hu, Eleftheriou & Arnold, IEEE Trans. IT 2005) avoids 4-cycles at these sizes
    code = C.peg(n, n // 2, 3, seed=0)
    assert code.girth() >= 6
    assert np.all(code.var_degrees == 3)
    assert np.all(code.check_degrees == 6)


def test_shipped_peg_codes_girth_and_degrees():
    for name in ("peg-504-3-6", "peg-1008-3-6", "drifter-256-128"):
        code = lm.load_code(name)
        assert code.girth() >= 6, name
        assert np.all(code.var_degrees == 3) and np.all(code.check_degrees == 6), name
        assert code.k == code.n // 2, name


def test_peg_irregular_follows_the_degree_sequence():
    lam = {2: 0.3, 3: 0.4, 6: 0.3}
    rho = {6: 0.5, 7: 0.5}
    vd, cd = C.degree_sequences(400, lam, rho)
    code = C.peg(400, cd.size, vd, seed=2, check_degrees=cd, order="descending")
    assert np.array_equal(np.sort(code.var_degrees), vd)
    assert np.array_equal(np.sort(code.check_degrees), cd)
    assert code.girth() >= 6


def test_irregular_shipped_code():
    code = lm.load_code("peg-irr-2016")
    assert code.n == 2016 and code.m == 1008 and code.k == 1008
    assert code.girth() >= 6
    assert set(np.unique(code.var_degrees).tolist()) == {2, 3, 4, 6, 7, 8, 9, 19, 20}
    assert set(np.unique(code.check_degrees).tolist()) <= {8, 9}


def test_degree_sequences_match_distribution():
    lam = {2: 0.25, 3: 0.5, 4: 0.25}
    rho = {6: 1.0}
    vd, cd = C.degree_sequences(1200, lam, rho)
    assert vd.sum() == cd.sum() and vd.size == 1200
    # node fractions L_d proportional to lambda_d / d (definition of the edge perspective)
    L = np.array([0.25 / 2, 0.5 / 3, 0.25 / 4])
    L /= L.sum()
    counts = np.array([(vd == d).sum() for d in (2, 3, 4)])
    assert np.all(np.abs(counts - 1200 * L) <= 1)
    vd2, cd2 = C.degree_sequences(100, {3: 1.0}, {6: 1.0}, perspective="node")
    assert np.all(vd2 == 3) and np.all(cd2 == 6) and cd2.size == 50


def test_regular_constructions_exact_degrees(seed):
    for code in (C.random_regular(120, 3, 6, seed=seed), C.gallager(120, 3, 6, seed=seed)):
        assert np.all(code.var_degrees == 3) and np.all(code.check_degrees == 6)
        assert code.m == 60
        assert np.all(code.H.data == 1)


def test_random_irregular_no_repeated_edges(seed):
    code = C.random_irregular(300, {2: 0.3, 3: 0.7}, {5: 0.5, 6: 0.5}, seed=seed)
    # ParityCheckCode rejects duplicates, so building it proves none; check the sums too
    assert code.var_degrees.sum() == code.check_degrees.sum() == code.num_edges
    assert set(np.unique(code.var_degrees).tolist()) == {2, 3}


def test_constructions_are_deterministic():
    for f in (lambda s: C.peg(200, 100, 3, seed=s), lambda s: C.random_regular(200, 3, 6, seed=s),
              lambda s: C.gallager(200, 3, 4, seed=s), lambda s: C.tree_code(30, seed=s)):
        assert f(5).fingerprint == f(5).fingerprint
        assert f(5).fingerprint != f(6).fingerprint


def test_quasi_cyclic_structure():
    code = C.quasi_cyclic([[0, 1, -1], [2, -1, 0]], 4)
    H = code.H.toarray()
    assert H.shape == (8, 12)
    assert not H[4:8, 4:8].any()  # -1 is a zero block
    # block (0, 1): row r has its one at column (r + 1) mod 4
    assert [int(np.flatnonzero(H[r, 4:8])[0]) for r in range(4)] == [1, 2, 3, 0]


def test_tanner_exponents_give_published_parameters():
    # Tanner, Sridhara & Fuja (2001): (155, 64), girth 8
    code = C.quasi_cyclic([[1, 2, 4, 8, 16], [5, 10, 20, 9, 18], [25, 19, 7, 14, 28]], 31)
    assert (code.n, code.k, code.girth()) == (155, 64, 8)
    assert code.fingerprint == lm.load_code("tanner-155-64").fingerprint


def test_array_code_has_no_four_cycles():
    # k <= p prime: no 4-cycles (Fan, 2000)
    code = C.array_code(11, 3, 11)
    assert code.girth() == 6 and code.n == 121
    assert np.all(code.var_degrees == 3) and np.all(code.check_degrees == 11)
    shipped = lm.load_code("array-1455-1166")
    assert shipped.n == 1455 and abs(shipped.rate - 0.8) < 0.01


def test_classical_codes():
    h = C.hamming(4)
    assert (h.n, h.k) == (15, 11)
    cols = h.H.toarray().T
    assert len({tuple(c) for c in cols}) == 15 and cols.any(axis=1).all()
    r = C.repetition(7)
    assert r.k == 1 and r.is_codeword(np.ones(7))
    p = C.single_parity(7)
    assert p.k == 6 and p.m == 1
    g = C.golay24()
    assert (g.n, g.k) == (24, 12)


def test_tree_code_is_a_tree(seed):
    code = C.tree_code(50, seed=seed, min_degree=2, max_degree=4)
    assert code.girth() == 0
    # connected tree: edges = nodes - 1
    assert code.num_edges == code.n + code.m - 1
    assert code.k == code.n - code.m
    assert set(np.unique(code.check_degrees).tolist()) <= {2, 3, 4}


def test_construction_errors():
    with pytest.raises(InputError, match="divisible"):
        C.gallager(10, 3, 4)
    with pytest.raises(InputError, match="prime"):
        C.array_code(9, 3, 5)
    with pytest.raises(InputError, match="outside"):
        C.quasi_cyclic([[0, 5]], 4)
    with pytest.raises(InputError, match="sum to 1"):
        C.degree_sequences(10, {2: 0.5}, {4: 1.0})
    with pytest.raises(InputError, match="length n"):
        C.peg(10, 5, [3, 3], seed=0)
    with pytest.raises(InputError, match="exceeds"):
        C.random_regular(6, 4, 8, seed=0)


def test_shipped_matrices_are_reproducible():
    """Every shipped matrix equals its construction (cards: experiments/make_shipped_codes.py)."""
    spec = importlib.util.spec_from_file_location(
        "make_shipped_codes", ROOT / "experiments" / "make_shipped_codes.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    names = []
    for name, _ext, build, *_ in mod.specs():
        assert build().fingerprint == lm.load_code(name).fingerprint, name
        names.append(name)
    for required in ("hamming-7-4", "golay-24-12", "tanner-155-64", "peg-504-3-6",
                     "peg-1008-3-6"):
        assert required in names
