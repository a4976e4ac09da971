"""GF(2) linear algebra against naive references (pure-Python elimination, brute force)."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from ldpcmarg.code import gf2
from ldpcmarg.errors import InputError


def naive_rank(M: np.ndarray) -> int:
    """Rank over GF(2) by elimination on Python integers (independent reference)."""
    rows = [int("".join(str(int(b)) for b in r), 2) if r.size else 0 for r in M]
    rank = 0
    while rows:
        pivot = max(rows)
        rows.remove(pivot)
        if pivot == 0:
            break
        rank += 1
        top = pivot.bit_length() - 1
        rows = [r ^ pivot if (r >> top) & 1 else r for r in rows]
    return rank


def naive_weights(G: np.ndarray) -> np.ndarray:
    k, n = G.shape
    hist = np.zeros(n + 1, dtype=np.int64)
    for msg in itertools.product((0, 1), repeat=k):
        c = np.array(msg, dtype=np.int64) @ G.astype(np.int64) % 2
        hist[int(c.sum())] += 1
    return hist


binary_matrices = st.tuples(st.integers(1, 14), st.integers(1, 90)).flatmap(
    lambda s: arrays(np.uint8, s, elements=st.integers(0, 1)))


@settings(max_examples=60, deadline=None)
@given(binary_matrices)
def test_pack_unpack_round_trip(M):
    assert np.array_equal(gf2.unpack_rows(gf2.pack_rows(M), M.shape[1]), M)
    assert np.array_equal(gf2.pack_matrix(sp.csr_matrix(M)), gf2.pack_rows(M))


@settings(max_examples=80, deadline=None)
@given(binary_matrices)
def test_rank_and_nullspace_consistent(M):
    r = gf2.rank(M)
    assert r == naive_rank(M)
    assert gf2.rank(sp.csr_matrix(M)) == r
    N = gf2.nullspace(M)
    n = M.shape[1]
    # rank-nullity over GF(2)
    assert N.shape == (n - r, n)
    # every basis vector is in the nullspace, and the basis is independent
    assert not np.any((M.astype(np.int64) @ N.T.astype(np.int64)) % 2)
    assert naive_rank(N) == n - r


@settings(max_examples=40, deadline=None)
@given(binary_matrices, st.randoms(use_true_random=False))
def test_row_reduce_is_reduced_and_spans_rowspace(M, rnd):
    order = np.array(rnd.sample(range(M.shape[1]), M.shape[1]), dtype=np.int64)
    packed, piv = gf2.row_reduce(M, order)
    R = gf2.unpack_rows(packed, M.shape[1])
    assert R.shape[0] == naive_rank(M) == piv.size
    # pivot columns are unit vectors
    for j, p in enumerate(piv):
        col = R[:, p]
        assert col[j] == 1 and col.sum() == 1
    # same row space: stacking adds nothing
    assert naive_rank(np.vstack([M, R])) == R.shape[0]
    # pivots respect the preference order: each pivot is the earliest possible
    pos = np.empty_like(order)
    pos[order] = np.arange(order.size)
    assert np.all(np.diff(pos[piv]) > 0)


@settings(max_examples=40, deadline=None)
@given(binary_matrices)
def test_systematic_form_encodes_nullspace(M):
    form = gf2.systematic_form(M)
    assert form.k + form.rank == M.shape[1]
    assert np.all(np.diff(form.info) > 0)
    assert set(form.info.tolist()).isdisjoint(form.parity.tolist())
    rng = np.random.default_rng(0)
    msgs = rng.integers(0, 2, size=(5, form.k), dtype=np.uint8)
    cw = gf2.apply_systematic(form, msgs)
    assert not np.any((M.astype(np.int64) @ cw.T.astype(np.int64)) % 2)
    assert np.array_equal(cw[:, form.info], msgs)


@pytest.mark.parametrize("shape", [(3, 7), (5, 12), (8, 20)])
def test_weight_enumeration_matches_brute_force(shape):
    rng = np.random.default_rng(sum(shape))
    G = gf2.nullspace(rng.integers(0, 2, size=shape, dtype=np.uint8))
    hist, witness = gf2.enumerate_weights(G)
    assert np.array_equal(hist, naive_weights(G))
    d = int(np.flatnonzero(hist[1:])[0]) + 1
    assert witness.sum() == d


def test_information_set_search_finds_exact_distance_on_small_codes():
    # On codes this small a few hundred information sets reach the true minimum
    # (checked against exhaustive enumeration); the witness is always a codeword.
    for s in range(5):
        rng = np.random.default_rng(100 + s)
        H = (rng.random((12, 30)) < 0.25).astype(np.uint8)
        hist, _ = gf2.enumerate_weights(gf2.nullspace(H))
        d = int(np.flatnonzero(hist[1:])[0]) + 1
        for method in ("stern", "lee-brickell"):
            w, witness = gf2.information_set_search(H, budget=300, seed=s, method=method)
            assert w == d
            assert witness.sum() == w
            assert not np.any(H.astype(np.int64) @ witness % 2)


def test_information_set_search_is_deterministic():
    rng = np.random.default_rng(7)
    H = (rng.random((40, 80)) < 0.08).astype(np.uint8)
    a = gf2.information_set_search(H, budget=20, seed=3)
    b = gf2.information_set_search(H, budget=20, seed=3)
    assert a[0] == b[0] and np.array_equal(a[1], b[1])


def test_bad_inputs():
    with pytest.raises(InputError, match="0/1"):
        gf2.rank(np.array([[0, 2]]))
    with pytest.raises(InputError, match="permutation"):
        gf2.row_reduce(np.eye(3, dtype=np.uint8), np.array([0, 0, 1]))
    with pytest.raises(InputError, match="stern"):
        gf2.information_set_search(np.eye(3, dtype=np.uint8), budget=1, method="guess")
