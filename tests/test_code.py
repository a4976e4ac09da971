"""Code model: weight enumerators, girth, degrees, encoder, minimum distance."""

from __future__ import annotations

import pickle

import numpy as np
import pytest
import scipy.sparse as sp

import ldpcmarg as lm
from ldpcmarg.code import construct as C
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import InputError


def naive_cycles(code: ParityCheckCode) -> tuple[int, int]:
    """(girth, number of shortest cycles) by enumerating simple cycles with DFS.

    Independent reference: every cycle is listed from its smallest node, in
    both directions, so each is found exactly twice.
    """
    n, m = code.n, code.m
    adj = [[] for _ in range(n + m)]
    for e in range(code.num_edges):
        v, c = int(code.edge_var[e]), n + int(code.edge_check[e])
        adj[v].append(c)
        adj[c].append(v)
    lengths: dict[int, int] = {}

    def dfs(start, node, depth, visited):
        for y in adj[node]:
            if y == start and depth >= 3:
                lengths[depth + 1] = lengths.get(depth + 1, 0) + 1
            elif y > start and y not in visited and depth < 11:
                visited.add(y)
                dfs(start, y, depth + 1, visited)
                visited.remove(y)

    for s in range(n + m):
        dfs(s, s, 0, {s})
    if not lengths:
        return 0, 0
    g = min(lengths)
    return g, lengths[g] // 2


def test_hamming_7_4_weight_enumerator(hamming74):
    # 1 + 7z^3 + 7z^4 + z^7 (MacWilliams & Sloane, The Theory of Error-Correcting Codes, ch. 1)
    assert hamming74.weight_enumerator().tolist() == [1, 0, 0, 7, 7, 0, 0, 1]


def test_extended_golay_weight_enumerator():
    # 1 + 759z^8 + 2576z^12 + 759z^16 + z^24 (MacWilliams & Sloane, ch. 2 and 20)
    A = lm.load_code("golay-24-12").weight_enumerator()
    expected = np.zeros(25, dtype=np.int64)
    expected[[0, 8, 12, 16, 24]] = [1, 759, 2576, 759, 1]
    assert np.array_equal(A, expected)
    assert np.array_equal(C.golay24().weight_enumerator(), expected)


def test_tanner_155_64_parameters():
    # Tanner, Sridhara & Fuja (2001): dimension 64, girth 8, minimum distance 20.
    code = lm.load_code("tanner-155-64")
    assert (code.n, code.m, code.k) == (155, 93, 64)
    assert code.girth() == 8
    # bounded, seeded search: 300 information sets take well under a second
    for method in ("stern", "lee-brickell"):
        dm = code.minimum_distance(budget=300, seed=0, method=method)
        assert not dm.exact
        assert dm.value == 20
        assert code.is_codeword(dm.witness) and int(dm.witness.sum()) == 20
        assert "upper bound" in dm.label()


@pytest.mark.parametrize("builder", [
    lambda: C.hamming(3),
    lambda: C.repetition(6),
    lambda: C.random_regular(24, 3, 6, seed=4),
    lambda: C.random_regular(16, 2, 4, seed=0),
    lambda: C.peg(30, 15, 2, seed=1),
    lambda: C.gallager(20, 2, 4, seed=3),
    lambda: C.tree_code(6, seed=2),
    lambda: C.array_code(5, 3, 4),   # girth 6
    lambda: C.array_code(5, 2, 5),   # girth 8
    lambda: C.peg(24, 12, 2, seed=0),
])
def test_girth_and_cycle_count_match_brute_force(builder):
    code = builder()
    assert code.girth_and_cycles() == naive_cycles(code)


def test_four_cycles_from_check_overlaps(seed):
    # A 4-cycle is a pair of checks sharing a pair of bits (common practice):
    # count = sum over check pairs of C(overlap, 2).
    code = C.random_regular(60, 3, 6, seed=seed)
    O = (code.H.astype(np.int64) @ code.H.T.astype(np.int64)).toarray()
    iu = np.triu_indices(code.m, 1)
    expected = int((O[iu] * (O[iu] - 1) // 2).sum())
    g, cnt = code.girth_and_cycles()
    if expected:
        assert (g, cnt) == (4, expected)
    else:
        assert g >= 6


def test_tree_is_cycle_free():
    code = C.tree_code(40, seed=5)
    assert code.girth() == 0 and code.girth_and_cycles() == (0, 0)


def test_degree_distributions():
    code = lm.load_code("hamming-7-4")
    dd = code.degree_distributions()
    for arr in (dd.var_node, dd.check_node, dd.var_edge, dd.check_edge):
        assert arr.sum() == pytest.approx(1.0)
    # edge perspective: lambda_d = d L_d / sum_j j L_j (definition)
    d = np.arange(dd.var_node.size)
    assert np.allclose(dd.var_edge, d * dd.var_node / (d * dd.var_node).sum())
    assert dd.as_dict()["var_node"] == {1: 3 / 7, 2: 3 / 7, 3: 1 / 7}
    assert dd.as_dict()["check_edge"] == {4: 1.0}


@pytest.mark.parametrize("shape,p", [((10, 30), 0.2), ((25, 40), 0.1), ((12, 12), 0.3)])
def test_encoder_outputs_codewords_and_round_trips(shape, p, seed):
    rng = np.random.default_rng(seed)
    H = (rng.random(shape) < p).astype(np.uint8)
    H[0, 0] = 1  # never empty
    code = ParityCheckCode(H)
    enc = code.encoder
    assert enc.k == code.k and enc.info_positions.size == code.k
    msgs = rng.integers(0, 2, size=(50, code.k), dtype=np.uint8)
    cw = enc.encode(msgs)
    assert cw.shape == (50, code.n) and cw.dtype == np.uint8
    assert np.all(code.is_codeword(cw))
    # dense reference: H c = 0 (mod 2)
    assert not np.any(H.astype(np.int64) @ cw.T.astype(np.int64) % 2)
    assert np.array_equal(enc.extract(cw), msgs)
    assert np.array_equal(enc.encode(msgs[0]), cw[0])
    G = enc.generator_matrix()
    assert G.shape == (code.k, code.n)
    assert np.array_equal(G[:, enc.info_positions], np.eye(code.k, dtype=np.uint8))


def test_encoder_on_shipped_peg_code():
    code = lm.load_code("peg-504-3-6")
    rng = np.random.default_rng(11)
    msgs = rng.integers(0, 2, size=(20, code.k), dtype=np.uint8)
    cw = code.encode(msgs)
    assert np.all(code.is_codeword(cw))
    assert np.array_equal(code.encoder.extract(cw), msgs)
    assert np.array_equal(code.info_positions, code.encoder.info_positions)


def test_encoder_rejects_bad_messages(hamming74):
    with pytest.raises(InputError, match="k = 4"):
        hamming74.encoder.encode(np.zeros((2, 5)))
    with pytest.raises(InputError, match="0 and 1"):
        hamming74.encoder.encode(np.full((1, 4), 2))
    with pytest.raises(InputError, match="n = 7"):
        hamming74.encoder.extract(np.zeros(6))


def test_minimum_distance_exact_matches_enumerator(seed):
    rng = np.random.default_rng(seed)
    code = ParityCheckCode((rng.random((10, 24)) < 0.3).astype(np.uint8))
    dm = code.minimum_distance()
    A = code.weight_enumerator()
    assert dm.exact and dm.value == int(np.flatnonzero(A[1:])[0]) + 1
    assert code.is_codeword(dm.witness) and dm.witness.sum() == dm.value
    # the search can only report codewords, so it never beats the exact value
    ub = code.minimum_distance(max_exact_k=0, budget=5, seed=seed)
    assert not ub.exact and ub.value >= dm.value and code.is_codeword(ub.witness)


def test_small_classical_distances():
    # Hamming d = 3, repetition d = n, single parity d = 2 (MacWilliams & Sloane, ch. 1)
    assert C.hamming(4).minimum_distance().value == 3
    assert C.repetition(9).minimum_distance().value == 9
    assert C.single_parity(9).minimum_distance().value == 2
    trivial = ParityCheckCode(np.eye(4, dtype=np.uint8))
    dm = trivial.minimum_distance()
    assert dm.value == 0 and dm.witness is None and trivial.k == 0


def test_zero_columns_and_rows_are_legal_and_reported():
    H = np.array([[1, 1, 0, 0], [0, 0, 0, 0], [0, 1, 0, 1]], dtype=np.uint8)
    code = ParityCheckCode(H)
    assert code.zero_weight_columns.tolist() == [2]
    assert code.zero_rows.tolist() == [1]
    # an unprotected bit is a weight-1 codeword
    assert code.minimum_distance().value == 1
    assert code.minimum_distance(max_exact_k=0, budget=3).value == 1
    assert code.k == 2


def test_weight_enumerator_refuses_large_k():
    with pytest.raises(InputError, match="max_k"):
        lm.load_code("peg-504-3-6").weight_enumerator()


def test_sparse_rank_matches_dense_and_pickle_keeps_properties():
    code = lm.load_code("array-1455-1166")
    # rank 3p - 2 for j = 3 block rows (array codes; from memory, confirmed by dense elimination)
    assert code.rank == 3 * 97 - 2
    from ldpcmarg.code import gf2
    assert gf2.rank(code.H.toarray()) == code.rank
    _ = code.encoder
    c2 = pickle.loads(pickle.dumps(code))
    assert c2.fingerprint == code.fingerprint and c2.k == code.k
    assert np.array_equal(c2.info_positions, code.info_positions)
    assert isinstance(code.H, sp.csr_matrix)


@pytest.mark.parametrize("name", ["peg-504-3-6", "drifter-256-128", "array-1455-1166"])
def test_six_cycles_from_check_triangles(name):
    # Without 4-cycles, a 6-cycle is a triangle of checks pairwise sharing distinct bits:
    # triangles of the check graph minus, per bit of degree d, the C(d, 3) triangles
    # of checks all meeting in that bit (graph counting, common practice).
    from math import comb
    code = lm.load_code(name)
    O = (code.H.astype(np.int64) @ code.H.T.astype(np.int64)).toarray()
    np.fill_diagonal(O, 0)
    assert O.max() <= 1  # no 4-cycles
    six = int(np.trace(O @ O @ O)) // 6 - sum(comb(int(d), 3) for d in code.var_degrees)
    assert code.girth_and_cycles() == (6, six)


def test_docstring_examples():
    import doctest

    import ldpcmarg.code.construct
    import ldpcmarg.code.gf2
    import ldpcmarg.code.io
    import ldpcmarg.code.parity_check
    for mod in (ldpcmarg.code.parity_check, ldpcmarg.code.construct,
                ldpcmarg.code.io, ldpcmarg.code.gf2):
        res = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
        assert res.failed == 0, mod.__name__
    assert doctest.testmod(ldpcmarg.code.parity_check).attempted >= 5
