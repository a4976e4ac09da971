"""Local-polytope LP oracle, LP decoder and ML (MIP) decoder.

References used below:
* scipy.optimize.linprog(method="highs") on a dense formulation built here from H
  alone (an independent reference implementation of the LP);
* brute-force ML over all 2**n words (naive reference);
* Feldman, Wainwright & Karger, IEEE Trans. IT 51(3), 2005: an integral LP
  optimum is the ML codeword; on a cycle-free Tanner graph the fundamental
  polytope equals the codeword polytope, so optima are integral.
"""

from __future__ import annotations

import itertools
import pickle

import numpy as np
import pytest
from conftest import HAMMING_7_4
from naive import regular_H_by_redraw
from scipy.optimize import linprog

import ldpcmarg as lm
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.decoders.base import make_decoder
from ldpcmarg.decoders.lp import LocalPolytopeLP
from ldpcmarg.errors import InputError


# ------------------------------------------------------------ naive references
def random_regular_H(n, dv, dc, seed):
    """A random (dv, dc)-regular H (tests/naive.py)."""
    return regular_H_by_redraw(n, dv, dc, seed)


# A cycle-free Tanner graph (checks {0,1,2}, {2,3,4}, {4,5,6,7}, {1,8,9}) and a
# bit (10) in no check.
TREE_H = np.zeros((4, 11), dtype=np.uint8)
for _c, _bits in enumerate([(0, 1, 2), (2, 3, 4), (4, 5, 6, 7), (1, 8, 9)]):
    TREE_H[_c, list(_bits)] = 1


def dense_lp(H):
    """Equality-constrained local-polytope LP built directly from dense H.

    Columns: n bits, then per check its even-weight patterns in increasing
    integer order (bit t of the integer = t-th neighbour in column order).
    Returns (A_eq, b_eq, bounds).
    """
    H = np.asarray(H)
    m, n = H.shape
    cols = []  # (check, pattern over neighbours)
    for c in range(m):
        nb = np.flatnonzero(H[c])
        d = len(nb)
        for v in range(2**d):
            pat = [(v >> t) & 1 for t in range(d)]
            if sum(pat) % 2 == 0:
                cols.append((c, nb, pat))
    L = len(cols)
    edges = [(c, i) for c in range(m) for i in np.flatnonzero(H[c])]
    A = np.zeros((m + len(edges), n + L))
    b = np.zeros(m + len(edges))
    b[:m] = 1
    for j, (c, _nb, _pat) in enumerate(cols):
        A[c, n + j] = 1
    for r, (c, i) in enumerate(edges):
        A[m + r, i] = 1
        for j, (c2, nb, pat) in enumerate(cols):
            if c2 == c and pat[list(nb).index(i)] == 1:
                A[m + r, n + j] = -1
    bounds = [(0, 1)] * n + [(0, None)] * L
    return A, b, bounds, L


def brute_force_codewords(H):
    H = np.asarray(H, dtype=np.int64)
    n = H.shape[1]
    words = np.array(list(itertools.product([0, 1], repeat=n)), dtype=np.int64)
    return words[((words @ H.T) % 2 == 0).all(axis=1)]


def codes():
    return {
        "hamming74": HAMMING_7_4,
        "reg36-n12": random_regular_H(12, 3, 6, seed=11),
        "reg36-n18": random_regular_H(18, 3, 6, seed=12),
        "tree": TREE_H,
    }


CODES = codes()


# ------------------------------------------------------------------ the oracle
@pytest.mark.parametrize("name", sorted(CODES))
@pytest.mark.parametrize("with_local", [False, True])
def test_optimum_matches_linprog(name, with_local, seed):
    H = CODES[name]
    code = ParityCheckCode(H)
    lp = LocalPolytopeLP(code)
    A, b, bounds, L = dense_lp(H)
    assert L == lp.num_local
    rng = np.random.default_rng(1000 + seed)
    for trial in range(4):
        g = rng.normal(size=code.n)
        h = rng.normal(size=L) if with_local else None
        c = np.concatenate([g, h if h is not None else np.zeros(L)])
        ref = linprog(c, A_eq=A, b_eq=b, bounds=bounds, method="highs")
        assert ref.status == 0
        # alternate hot and cold solves: both must reach the reference optimum
        sol = lp.solve(g, h, warm=(trial % 2 == 1))
        assert sol.optimal and sol.status == "optimal"
        assert sol.objective == pytest.approx(ref.fun, abs=1e-8)
        x = np.concatenate([sol.bits, sol.local])
        assert np.allclose(A @ x, b, atol=1e-8)
        # continuous random costs make the optimum unique with probability 1: the
        # bit part always, the local part only when the local columns carry costs
        # (with bit costs only, several local distributions give the same bits)
        assert np.allclose(sol.bits, ref.x[: code.n], atol=1e-7)
        if with_local:
            assert np.allclose(sol.local, ref.x[code.n:], atol=1e-7)


def test_hot_resolves_follow_small_changes():
    """A chain of 1 % objective changes (as successive Frank-Wolfe gradients) stays exact."""
    H = random_regular_H(18, 3, 6, seed=5)
    code = ParityCheckCode(H)
    lp = LocalPolytopeLP(code)
    A, b, bounds, L = dense_lp(H)
    rng = np.random.default_rng(7)
    c = rng.normal(size=code.n + L)
    lp.solve(c[: code.n], c[code.n:], warm=False)
    for _ in range(6):
        c = c + 0.01 * rng.normal(size=c.size)
        sol = lp.solve(c[: code.n], c[code.n:], warm=True)
        ref = linprog(c, A_eq=A, b_eq=b, bounds=bounds, method="highs")
        assert sol.optimal
        assert sol.objective == pytest.approx(ref.fun, abs=1e-8)


@pytest.mark.parametrize("cold", ["dual", "primal", "ipm"])
@pytest.mark.parametrize("hot", ["primal", "dual", "choose"])
def test_every_method_reaches_the_optimum(cold, hot):
    H = CODES["reg36-n12"]
    code = ParityCheckCode(H)
    lp = LocalPolytopeLP(code, cold_method=cold, hot_method=hot)
    A, b, bounds, L = dense_lp(H)
    rng = np.random.default_rng(3)
    for warm in (False, True, True):
        c = rng.normal(size=code.n + L)
        sol = lp.solve(c[: code.n], c[code.n:], warm=warm)
        ref = linprog(c, A_eq=A, b_eq=b, bounds=bounds, method="highs")
        assert sol.optimal
        assert sol.objective == pytest.approx(ref.fun, abs=1e-8)


@pytest.mark.parametrize("name", ["hamming74", "reg36-n12", "reg36-n18"])
def test_integral_optimum_is_brute_force_ml(name, seed):
    H = CODES[name]
    code = ParityCheckCode(H)
    lp = LocalPolytopeLP(code)
    words = brute_force_codewords(H)
    rng = np.random.default_rng(2000 + seed)
    integral = 0
    for _ in range(30):
        # noisy all-zero word at moderate SNR: a mix of integral and fractional optima
        llr = 2.0 + 1.5 * rng.normal(size=code.n)
        sol = lp.solve(llr)
        costs = words @ llr
        if np.all(np.minimum(sol.bits, 1 - sol.bits) <= 1e-9):
            integral += 1
            ml = words[np.argmin(costs)]
            assert np.array_equal(np.rint(sol.bits).astype(int), ml)
            assert sol.objective == pytest.approx(costs.min(), abs=1e-9)
        else:
            # a relaxation: its optimum never exceeds the ML cost
            assert sol.objective <= costs.min() + 1e-9
    assert integral > 0  # the equality branch above was exercised


def test_cycle_free_code_always_integral():
    """Feldman et al. 2005: on a tree the local polytope is the codeword polytope."""
    code = ParityCheckCode(TREE_H)
    lp = LocalPolytopeLP(code)
    words = brute_force_codewords(TREE_H)
    rng = np.random.default_rng(9)
    for trial in range(40):
        g = 3.0 * rng.normal(size=code.n)
        h = rng.normal(size=lp.num_local) if trial % 2 else None
        sol = lp.solve(g, h, warm=bool(trial % 3))
        assert np.all(np.minimum(sol.bits, 1 - sol.bits) <= 1e-9)
        assert np.all(np.minimum(sol.local, 1 - sol.local) <= 1e-9)
        if h is None:
            assert np.array_equal(np.rint(sol.bits).astype(int), words[np.argmin(words @ g)])


def test_layout_matches_local_codewords():
    """Column n + j is local codeword j of code.local_codewords(): check it via the edge rows."""
    code = ParityCheckCode(CODES["reg36-n12"])
    lp = LocalPolytopeLP(code)
    lc = lp.local_codewords
    A = lp.constraint_matrix().toarray()
    for j in [0, 1, 17, lc.count - 1]:
        c = int(lc.owner[j])
        d = int(code.check_degrees[c])
        pat = lc.patterns(c, d)[j - lc.offset[c]]
        col = A[:, code.n + j]
        assert col[c] == 1 and col[: code.m].sum() == 1
        edge_rows = code.m + code.check_ptr[c] + np.arange(d)
        assert np.array_equal(-col[edge_rows], pat.astype(float))


# ------------------------------------------------------------------ refusals
def test_refuses_high_degree_check():
    H = np.zeros((2, 14), dtype=np.uint8)
    H[0, :4] = 1
    H[1, :13] = 1
    with pytest.raises(InputError, match=r"Check 1 has degree 13"):
        LocalPolytopeLP(ParityCheckCode(H), max_check_degree=12)


def test_bad_costs_rejected():
    lp = LocalPolytopeLP(ParityCheckCode(HAMMING_7_4))
    with pytest.raises(InputError, match="bit_costs"):
        lp.solve(np.zeros(6))
    with pytest.raises(InputError, match="local_costs"):
        lp.solve(np.zeros(7), np.zeros(3))
    with pytest.raises(InputError, match="finite"):
        lp.solve(np.array([0, 0, np.nan, 0, 0, 0, 0.0]))
    with pytest.raises(InputError, match="time_limit"):
        lp.solve(np.zeros(7), time_limit=-1)


def test_time_limit_is_flagged_not_used():
    code = ParityCheckCode(random_regular_H(240, 3, 6, seed=4))
    lp = LocalPolytopeLP(code, cold_method="primal")
    rng = np.random.default_rng(0)
    sol = lp.solve(rng.normal(size=code.n), rng.normal(size=lp.num_local), time_limit=1e-6)
    assert not sol.optimal and sol.status == "time_limit"
    assert np.isnan(sol.bits).all() and np.isnan(sol.objective) and not sol.has_solution
    with pytest.raises(Exception, match="not solved to optimality"):
        sol.require_optimal()
    # the same object recovers on the next call
    sol2 = lp.solve(rng.normal(size=code.n))
    assert sol2.optimal


# ------------------------------------------------------------------ decoders
def test_lp_decoder_certificates(seed):
    H = CODES["reg36-n18"]
    code = ParityCheckCode(H)
    words = brute_force_codewords(H)
    rng = np.random.default_rng(3000 + seed)
    llr = 1.5 + 1.5 * rng.normal(size=(25, code.n))
    res = make_decoder("lp", code).decode(llr)
    ml = words[np.argmin(llr @ words.T, axis=1)]
    cert = res.info["ml_certificate"]
    assert res.posterior_llr is None
    assert cert.dtype == bool and cert.shape == (25,)
    assert res.info["pseudo_codeword"].shape == (25, code.n)
    assert cert.any()
    assert np.array_equal(res.bits[cert], ml[cert].astype(np.uint8))
    assert np.all(res.valid[cert])
    obj = res.info["lp_objective"]
    assert np.allclose(obj, np.einsum("fi,fi->f", llr, res.info["pseudo_codeword"]))
    assert np.all(obj <= np.min(llr @ words.T, axis=1) + 1e-9)
    frac = ~cert
    assert np.all(res.info["num_fractional"][frac] > 0 | ~res.valid[frac])


@pytest.mark.parametrize("formulation", ["parity", "local"])
def test_ml_decoder_matches_brute_force_and_pickles(seed, formulation):
    H = CODES["reg36-n18"]
    code = ParityCheckCode(H)
    words = brute_force_codewords(H)
    rng = np.random.default_rng(4000 + seed)
    llr = 1.0 + 1.5 * rng.normal(size=(10, code.n))
    dec = make_decoder(f"ml:time_limit=30,formulation={formulation}", code)
    dec = pickle.loads(pickle.dumps(dec))
    res = dec.decode(llr)
    ml = words[np.argmin(llr @ words.T, axis=1)]
    assert res.info["proved_optimal"].all()
    assert np.array_equal(res.bits, ml.astype(np.uint8))
    assert res.valid.all()


@pytest.mark.parametrize("formulation,frames", [("parity", 16), ("local", 4)])
def test_ml_decoder_on_golay_frames(formulation, frames):
    """MIP decoding equals brute-force ML over the 4096 Golay codewords."""
    from ldpcmarg.code import construct

    code = construct.golay24()
    G = code.H.toarray().astype(np.int64)
    # extended Golay is self-dual (MacWilliams & Sloane, ch. 2): C = row space of H
    msgs = np.array(list(itertools.product([0, 1], repeat=12)), dtype=np.int64)
    words = (msgs @ G) % 2
    assert not ((words @ G.T) % 2).any() and len(np.unique(words, axis=0)) == 4096
    rng = np.random.default_rng(77)
    sigma = 0.9  # moderate noise so that hard decisions are often wrong
    x = words[rng.integers(4096, size=frames)]
    llr = 2 * ((1 - 2 * x) + sigma * rng.normal(size=x.shape)) / sigma**2
    res = make_decoder("ml", code, time_limit=60, formulation=formulation).decode(llr)
    ml = words[np.argmin(llr @ words.T, axis=1)]
    assert res.info["proved_optimal"].all()
    assert np.array_equal(res.bits, ml.astype(np.uint8))
    assert np.allclose(res.info["ml_objective"], np.min(llr @ words.T, axis=1))
    assert np.any(res.bits != (llr < 0))  # the decoder corrected something


def lagrangian_bound(code, lc, g, h, mu):
    """DESIGN.md section 5a bound, written out with plain loops over checks."""
    total = 0.0
    for c in range(code.m):
        d = int(code.check_degrees[c])
        pats = lc.patterns(c, d).astype(float)
        e = code.check_ptr[c] + np.arange(d)
        total += np.min(h[lc.offset[c]:lc.offset[c + 1]] + pats @ mu[e])
    mu_bit = np.zeros(code.n)
    np.add.at(mu_bit, code.edge_var, mu)
    return total + np.minimum(0.0, g - mu_bit).sum()


@pytest.mark.parametrize("name", ["hamming74", "reg36-n18", "tree"])
def test_duals_close_the_lagrangian_bound(name):
    """Strong LP duality: the section 5a bound at the edge duals equals the optimum."""
    code = ParityCheckCode(CODES[name])
    lp = LocalPolytopeLP(code)
    rng = np.random.default_rng(31)
    for warm in (False, True, True):
        g = rng.normal(size=code.n)
        h = rng.normal(size=lp.num_local)
        sol = lp.solve(g, h, warm=warm)
        nu, mu = lp.duals()
        assert nu.shape == (code.m,) and mu.shape == (code.num_edges,)
        # weak duality holds for any multipliers, equality at the optimal ones
        assert lagrangian_bound(code, lp.local_codewords, g, h, 0.0 * mu) <= sol.objective + 1e-9
        assert lagrangian_bound(code, lp.local_codewords, g, h, mu) == pytest.approx(
            sol.objective, abs=1e-8)


@pytest.mark.parametrize("formulation", ["parity", "local"])
def test_ml_time_limit_is_flagged(formulation):
    code = ParityCheckCode(random_regular_H(240, 3, 6, seed=4))
    rng = np.random.default_rng(5)
    llr = 0.5 + 1.5 * rng.normal(size=(2, code.n))  # very noisy: a hard MIP
    res = make_decoder("ml", code, time_limit=1e-5, formulation=formulation).decode(llr)
    assert not res.info["proved_optimal"].any()
    assert res.bits.shape == (2, code.n) and res.bits.dtype == np.uint8
    # a returned word is either a codeword found by the MIP (objective given) or the
    # channel hard decision (objective NaN)
    found = np.isfinite(res.info["ml_objective"])
    assert np.all(res.valid[found])
    assert np.array_equal(res.bits[~found], (llr[~found] < 0).astype(np.uint8))


def test_lp_decoder_time_limit_is_flagged():
    code = ParityCheckCode(random_regular_H(240, 3, 6, seed=4))
    rng = np.random.default_rng(6)
    llr = 0.5 + 1.5 * rng.normal(size=(2, code.n))
    res = make_decoder("lp", code, time_limit=1e-6).decode(llr)
    assert not res.info["proved_optimal"].any() and not res.info["ml_certificate"].any()
    assert np.isnan(res.info["pseudo_codeword"]).all()
    assert np.array_equal(res.bits, (llr < 0).astype(np.uint8))


def test_oracle_pickles_after_use():
    code = ParityCheckCode(HAMMING_7_4)
    lp = LocalPolytopeLP(code)
    g = np.array([1.0, -2.0, 0.5, 0.3, -0.1, 0.7, 1.1])
    first = lp.solve(g)
    clone = pickle.loads(pickle.dumps(lp))
    again = clone.solve(g)  # cold on the other side, same optimum
    assert again.optimal and again.objective == pytest.approx(first.objective, abs=1e-12)


def test_hot_start_gives_up_and_solves_cold():
    H = CODES["reg36-n18"]
    code = ParityCheckCode(H)
    A, b, bounds, L = dense_lp(H)
    lp = LocalPolytopeLP(code, hot_iteration_limit=1)
    rng = np.random.default_rng(12)
    c = rng.normal(size=code.n + L)
    first = lp.solve(c[: code.n], c[code.n:], warm=True)  # no basis yet: cold
    assert first.method == "cold-ipm"
    seen = set()
    for _ in range(4):
        c = rng.normal(size=code.n + L)  # a new, unrelated objective
        sol = lp.solve(c[: code.n], c[code.n:], warm=True)
        ref = linprog(c, A_eq=A, b_eq=b, bounds=bounds, method="highs")
        assert sol.optimal and sol.objective == pytest.approx(ref.fun, abs=1e-8)
        seen.add(sol.method)
    # an unrelated objective needs more than one hot iteration at least once
    assert "hot+cold-ipm" in seen
    with pytest.raises(InputError, match="hot_iteration_limit"):
        LocalPolytopeLP(code, hot_iteration_limit=0)


@pytest.mark.parametrize("name", ["lp", "ml"])
def test_lp_and_ml_decisions_at_every_llr_scale(name):
    # HiGHS treats costs >= 1e20 as infinite (its `infinite_cost` option, HiGHS
    # documentation), so unscaled LLRs of 1e21 decoded wrongly. LP and ML decoding
    # minimise a linear objective, whose minimiser does not change under a positive
    # scale: the decisions must be identical at every finite scale.
    code = lm.load_code("golay-24-12")
    ch = lm.make_channel("awgn", ebn0_db=1.0, rate=code.rate)
    llr = ch.sample_llr(np.zeros((12, code.n), np.uint8), np.random.default_rng(4))
    dec = lm.make_decoder(name, code)
    ref = dec.decode(llr)
    for s in (1e5, 1e21, 1e300):
        res = dec.decode(llr * s)
        np.testing.assert_array_equal(res.bits, ref.bits)
        if name == "lp":
            np.testing.assert_array_equal(res.info["ml_certificate"], ref.info["ml_certificate"])
            np.testing.assert_allclose(res.info["lp_objective"], ref.info["lp_objective"] * s,
                                       rtol=1e-9)
