"""Sampled hyperforests, TRW check weights and the concavity test."""

from __future__ import annotations

import numpy as np
import pytest
from naive import regular_H_by_redraw

from ldpcmarg.code.hyperforest import check_concavity, sample_hyperforests, trw_check_weights
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import InputError


def random_regular_code(n: int, dv: int, dc: int, seed: int) -> ParityCheckCode:
    """Random (dv, dc)-regular code by socket matching (tests/naive.py)."""
    return ParityCheckCode(regular_H_by_redraw(n, dv, dc, seed), name=f"reg-{dv}-{dc}-{n}")


def random_tree_code(num_checks: int, seed: int) -> ParityCheckCode:
    """A cycle-free code: every new check shares exactly one bit with the tree so far."""
    rng = np.random.default_rng(seed)
    rows = [list(range(int(rng.integers(2, 5))))]
    n = len(rows[0])
    for _ in range(num_checks - 1):
        d = int(rng.integers(2, 5))
        anchor = int(rng.integers(0, n))
        rows.append([anchor] + list(range(n, n + d - 1)))
        n += d - 1
    H = np.zeros((num_checks, n), dtype=np.uint8)
    for c, r in enumerate(rows):
        H[c, r] = 1
    return ParityCheckCode(H, name="tree")


def golay24() -> ParityCheckCode:
    """Extended Golay(24,12): cyclic generator g(x) = 1+x^2+x^4+x^5+x^6+x^10+x^11 plus
    an overall parity bit (MacWilliams & Sloane, ch. 2 and 16); the code is self-dual, so
    its generator matrix is also a parity-check matrix."""
    g = np.zeros(23, dtype=np.uint8)
    g[[0, 2, 4, 5, 6, 10, 11]] = 1
    G = np.zeros((12, 24), dtype=np.uint8)
    for r in range(12):
        G[r, :23] = np.roll(g, r)
        G[r, 23] = G[r, :23].sum() % 2
    return ParityCheckCode(G, name="golay-24-12")


def _is_forest(H: np.ndarray, checks) -> bool:
    """Naive acyclicity test of the factor subgraph: edges == nodes - components."""
    checks = list(checks)
    bits = sorted({int(b) for c in checks for b in np.flatnonzero(H[c])})
    idx = {b: k for k, b in enumerate(bits)}
    parent = list(range(len(bits) + len(checks)))

    def find(a):
        while parent[a] != a:
            a = parent[a]
        return a

    for k, c in enumerate(checks):
        for b in np.flatnonzero(H[c]):
            ra, rb = find(len(bits) + k), find(idx[int(b)])
            if ra == rb:
                return False
            parent[ra] = rb
    return True


def test_golay_weight_enumerator():
    # 1 + 759 z^8 + 2576 z^12 + 759 z^16 + z^24 (MacWilliams & Sloane)
    code = golay24()
    G = code.H.toarray().astype(np.int64)
    msgs = ((np.arange(4096)[:, None] >> np.arange(12)) & 1)
    words = msgs @ G % 2
    counts = np.bincount(words.sum(axis=1), minlength=25)
    expected = np.zeros(25, dtype=np.int64)
    expected[[0, 8, 12, 16, 24]] = [1, 759, 2576, 759, 1]
    assert np.array_equal(counts, expected)


@pytest.mark.parametrize("which", ["reg", "tree"])
def test_each_sample_is_a_maximal_forest(which, seed):
    code = random_regular_code(48, 3, 6, seed) if which == "reg" else random_tree_code(9, seed)
    H = code.H.toarray()
    for s in range(5):
        one = sample_hyperforests(code, num_samples=1, seed=[seed, s])
        forest = np.flatnonzero(one.rho == 1.0)
        assert np.all((one.rho == 0) | (one.rho == 1))
        assert _is_forest(H, forest)
        for c in set(range(code.m)) - set(forest.tolist()):
            assert not _is_forest(H, list(forest) + [c])  # maximal
        # tree allocation: each forest check gives its weight to exactly one of its bits
        per_check = np.bincount(code.edge_check, weights=one.alpha, minlength=code.m)
        assert np.array_equal(per_check, one.rho)


def test_tree_code_weights_are_one(seed):
    code = random_tree_code(12, seed)
    assert np.array_equal(trw_check_weights(code, num_samples=20, seed=seed), np.ones(code.m))


def test_golay_forests_are_single_checks():
    # any two rows share the parity bit and, the code being self-dual with even
    # intersections, at least one more bit: every forest is one check
    code = golay24()
    s = sample_hyperforests(code, num_samples=300, seed=5)
    assert np.all(s.sizes == 1)
    assert s.rho.sum() == pytest.approx(1.0)


def test_regular_36_weight_range():
    # DESIGN.md §5 (measured): rho between 0.2 and 0.4, mean ~0.3 at n = 504.
    # Counting argument: a forest of f degree-6 checks has 6 f edges and at most
    # f + n nodes in at least one component, so 6 f <= f + n - 1.
    code = random_regular_code(504, 3, 6, 11)
    s = sample_hyperforests(code, num_samples=100, seed=1)
    assert np.all(s.sizes * 5 <= code.n - 1)
    assert 0.2 <= s.rho.mean() <= 0.4


def test_sampled_weights_pass_concavity(seed):
    code = random_regular_code(96, 3, 6, seed)
    s = sample_hyperforests(code, num_samples=50, seed=seed)
    rep = check_concavity(code, s.rho, alpha=s.alpha)
    assert rep.guaranteed and rep.reason.startswith("allocation from the sampled trees")
    assert rep.max_excess <= 1e-12
    # the LP route finds an allocation too, and it satisfies every constraint
    rep2 = check_concavity(code, s.rho)
    assert rep2.guaranteed
    a = rep2.alpha
    assert np.all(a >= 0)
    assert np.all(np.bincount(code.edge_check, weights=a, minlength=code.m) <= s.rho + 1e-9)
    load = np.bincount(code.edge_var, weights=s.rho[code.edge_check] - a, minlength=code.n)
    assert np.all(load <= 1 + 1e-9)


def test_bethe_weights_on_tree_need_the_lp():
    # Heskes 2006: Bethe (rho = 1) is concave on trees; the even split alpha = rho/d
    # does not show it (DESIGN.md §5), the LP allocation does
    code = random_tree_code(10, 3)
    rho = np.ones(code.m)
    even = rho[code.edge_check] / code.check_degrees[code.edge_check]
    load = np.bincount(code.edge_var, weights=rho[code.edge_check] - even, minlength=code.n)
    assert load.max() > 1.0
    assert check_concavity(code, rho, alpha=even).guaranteed  # LP fallback succeeds


def test_bethe_weights_on_loopy_code_fail():
    # every bit has degree 3: sum_c (1 - alpha_ic) <= 1 needs sum alpha >= 2 per bit,
    # i.e. 2n in total, but the checks only hold m = n/2
    code = random_regular_code(48, 3, 6, 0)
    rep = check_concavity(code, np.ones(code.m))
    assert not rep.guaranteed and rep.alpha is None


def test_bad_inputs():
    code = random_tree_code(4, 0)
    with pytest.raises(InputError, match="one weight per check"):
        check_concavity(code, np.ones(code.m + 1))
    with pytest.raises(InputError, match=">= 0"):
        check_concavity(code, -np.ones(code.m))
    with pytest.raises(InputError, match="num_samples"):
        trw_check_weights(code, num_samples=0)
