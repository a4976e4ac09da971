"""Frank–Wolfe bitwise-marginal solver: exactness on trees, TRW bounds, line search, edge cases."""

from __future__ import annotations

import pickle

import numpy as np
import pytest
from test_hyperforest import golay24, random_regular_code, random_tree_code

import ldpcmarg as lm
from ldpcmarg._settings import LLR_MAX
from ldpcmarg.code import gf2
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.decoders import frank_wolfe as fw
from ldpcmarg.decoders.lp import LocalPolytopeLP
from ldpcmarg.errors import InputError


# ---------------------------------------------------------------- naive references
def codewords(code: ParityCheckCode) -> np.ndarray:
    """All codewords, by enumerating the span of a nullspace basis (small k only)."""
    B = gf2.nullspace(code.H.toarray()).astype(np.int64)
    k = B.shape[0]
    msgs = (np.arange(2**k)[:, None] >> np.arange(k)) & 1
    return (msgs @ B) % 2


def brute_force(code, lam):
    """Exact P(x_i = 1) and ln Z of p(x) ∝ exp(-<lam, x>) 1[Hx = 0], by enumeration."""
    X = codewords(code)
    logw = -(X @ lam)
    mx = logw.max()
    w = np.exp(logw - mx)
    return (w @ X) / w.sum(), float(np.log(w.sum()) + mx)


def awgn_llr(code, sigma, seed):
    """All-zero codeword over BPSK-AWGN with noise std sigma: LLR = 2 y / sigma^2."""
    rng = np.random.default_rng(seed)
    return 2.0 * (1.0 + sigma * rng.standard_normal(code.n)) / sigma**2


# ---------------------------------------------------------------- kernels
def test_line_kernel_modes_agree_with_direct_evaluation():
    code = random_regular_code(12, 3, 6, 0)
    rng = np.random.default_rng(1)
    prob = fw.FWProblem(code, rng.uniform(0.2, 1.0, code.m))
    lam = rng.normal(1.0, 2.0, code.n)
    X = codewords(code)
    lp = LocalPolytopeLP(code, integral_bits=True)

    def vertex(x):  # the codeword's point of L (one local codeword per check)
        sol = lp.solve(np.where(x == 1, -1.0, 1.0))
        return np.abs(sol.bits.round()), np.abs(sol.local.round())

    (sb, sl), (vb, vl) = vertex(X[1]), vertex(X[2])
    tb = 0.3 * prob.uniform_bits + 0.3 * sb + 0.4 * vb
    tl = 0.3 * prob.uniform_local + 0.3 * sl + 0.4 * vl
    m = code.m
    mode, ha, hb, ne = (np.zeros(m, np.int64), np.zeros(m, np.int64), np.zeros(m, np.int64),
                        np.zeros(m))
    f0 = prob.free_energy(lam, tb, tl)
    for kind, db, dl, gammas in [(1, sb - tb, sl - tl, (1e-7, 0.2, 0.7, 1.0)),
                                 (2, sb - vb, sl - vl, (1e-7, 0.1, 0.39))]:
        fw._classify_kernel(prob.offset, kind, sl, vl, mode, ha, hb)
        assert np.all(mode == (fw._TO_ONE if kind == 1 else fw._PAIR))
        fw._check_negentropy_kernel(prob.offset, tl, ne)
        for g in gammas:
            fast = fw._line_kernel(lam, prob.kappa, prob.rho, prob.offset, tb, tl, db, dl,
                                   mode, ha, hb, ne, g)
            generic = fw._line_kernel(lam, prob.kappa, prob.rho, prob.offset, tb, tl, db, dl,
                                      np.zeros(m, np.int64), ha, hb, ne, g)
            direct = prob.free_energy(lam, tb + g * db, tl + g * dl) - f0
            assert fast[0] == pytest.approx(direct, rel=1e-9, abs=1e-12)
            assert generic[0] == pytest.approx(direct, rel=1e-9, abs=1e-12)
            if g < 1.0:  # derivatives: central differences (interior points only)
                h = 1e-6  # central difference; every coordinate stays positive
                num = (prob.free_energy(lam, tb + (g + h) * db, tl + (g + h) * dl)
                       - prob.free_energy(lam, tb + (g - h) * db, tl + (g - h) * dl)) / (2 * h)
                assert fast[1] == pytest.approx(num, rel=1e-5, abs=1e-6)
                assert fast[1] == pytest.approx(generic[1], rel=1e-12, abs=1e-12)
                assert fast[2] == pytest.approx(generic[2], rel=1e-12)


def test_consistent_interior_point_is_in_the_polytope(seed):
    code = random_regular_code(24, 3, 6, seed)
    lc = code.local_codewords()
    rng = np.random.default_rng(seed)
    tb0 = rng.uniform(0, 1, code.n)
    tl0 = rng.uniform(0, 1, lc.count)
    tb, tl, theta = fw.consistent_interior_point(code, lc, tb0, tl0)
    lp = LocalPolytopeLP(code)
    resid = lp.constraint_matrix() @ np.concatenate([tb, tl]) - lp.row_bounds()
    assert np.max(np.abs(resid)) < 1e-12
    assert tl.min() > 0 and 0 < tb.min() and tb.max() < 1
    assert 0 < theta < 1


# ---------------------------------------------------------------- exactness on trees
@pytest.mark.parametrize("variant", ["away", "pairwise"])
def test_bethe_on_tree_equals_exact_posteriors(seed, variant):
    # Bethe free energy is exact on cycle-free factor graphs
    # (Yedidia, Freeman & Weiss, IEEE Trans. IT 2005)
    code = random_tree_code(5, seed)
    lam = np.random.default_rng(seed).normal(1.0, 1.5, code.n)
    p1, ln_z = brute_force(code, lam)
    warm = "uniform" if variant == "away" else "reweighted-sum-product"
    # the exact HiGHS oracle: a gap of 1e-14 is below the dual oracle's acceptance tolerance
    dec = lm.make_decoder("fw", code, entropy="bethe", variant=variant, warm_start=warm,
                          oracle="lp", gap_tol=1e-14, max_iter=3000)
    res = dec.decode(lam)
    assert res.info["convex"][0]  # Bethe entropy is concave on a tree (Heskes 2006)
    assert res.info["status"][0] == "converged"
    assert np.max(np.abs(res.posterior_p1[0] - p1)) < 1e-6
    assert -res.info["free_energy"][0] == pytest.approx(ln_z, abs=1e-9)


def test_dual_oracle_on_tree_certifies_exact_posteriors():
    # warm start (sum-product is exact on a tree) + the dual-candidate oracle:
    # exact posteriors with a Lagrangian-certified gap below 1e-8
    code = random_tree_code(6, 2)
    lam = np.random.default_rng(2).normal(1.0, 1.5, code.n)
    p1, _ = brute_force(code, lam)
    res = lm.make_decoder("fw", code, oracle="dual", gap_tol=1e-9).decode(lam)
    assert res.info["status"][0] == "converged"
    assert res.info["certified_gap"][0] < 1e-8
    assert np.max(np.abs(res.posterior_p1[0] - p1)) < 1e-6


def test_ml_oracle_on_tree_matches_exact():
    # on a tree the codeword polytope equals the local polytope, so the MIP oracle
    # reaches the same (exact) optimum
    code = random_tree_code(4, 7)
    lam = np.random.default_rng(7).normal(0.5, 1.5, code.n)
    p1, _ = brute_force(code, lam)
    dec = lm.make_decoder("fw", code, oracle="ml", variant="away", warm_start="uniform",
                          gap_tol=1e-14, max_iter=1500, time_limit=300)
    res = dec.decode(lam)
    assert np.max(np.abs(res.posterior_p1[0] - p1)) < 1e-6


# ---------------------------------------------------------------- TRW bounds
@pytest.mark.parametrize("which", ["golay", "ldpc"])
def test_trw_bound_and_gap_are_valid(which):
    from ldpcmarg.decoders.exact import exact_posteriors

    code = golay24() if which == "golay" else random_regular_code(24, 3, 6, 4)
    ref = lm.make_decoder("fw", code, entropy="trw", gap_tol=1e-11, max_iter=400)
    short = lm.make_decoder("fw", code, entropy="trw", warm_start="uniform", variant="vanilla",
                            gap_tol=1e-12, max_iter=15)
    for frame in range(3):
        lam = awgn_llr(code, 0.9, 100 + frame)
        # exact ln Z from the syndrome trellis, checked against plain enumeration
        ln_z = float(exact_posteriors(code, lam, method="trellis").log_partition[0])
        assert ln_z == pytest.approx(brute_force(code, lam)[1], rel=1e-10)
        r_ref = ref.decode(lam)
        r = short.decode(lam)
        # ln Z <= -(F(tau) - gap) (Wainwright, Jaakkola & Willsky 2005)
        for rr in (r, r_ref):
            assert rr.info["log_partition_bound"][0] >= ln_z
            assert np.isfinite(rr.info["log_partition_bound"][0])
        # the short run's gaps bound its suboptimality against the long run's value
        f_ref = r_ref.info["free_energy"][0]
        assert r_ref.info["relative_gap"][0] <= 1e-11
        subopt = r.info["free_energy"][0] - f_ref
        assert subopt > 0  # the short run really is suboptimal
        assert r.info["duality_gap"][0] >= subopt
        # Lagrangian certificate (weak duality, DESIGN.md §5a): never below the truth
        assert r.info["certified_gap"][0] >= subopt
        assert r_ref.info["certified_gap"][0] >= 0.0


def test_fw_optimum_equals_reweighted_sum_product():
    # Same rho: the minimiser of the convex TRW free energy is the fixed point of
    # reweighted sum-product (Wainwright, Jaakkola & Willsky 2005). FW certifies the
    # converged beliefs as optimal (gap ~ 0, which bounds F - F* for convex F) and
    # returns them; the certificate is not vacuous: 1 % of the uniform point mixed into
    # the same beliefs gives a clearly positive gap.
    code = random_regular_code(96, 3, 6, 2)
    dec = lm.make_decoder("fw", code, entropy="trw", gap_tol=1e-8, max_iter=50)
    mp = lm.make_decoder("reweighted-sum-product", code, rho=dec.rho, damping=0.5)
    prob = dec._prob
    for frame in range(2):
        lam = awgn_llr(code, 1.0, 5 + frame)
        tb_mp, tl_mp, info = mp.beliefs(lam, max_iter=5000, tol=1e-13, return_info=True)
        assert info["converged"]
        res = dec.decode(lam)
        assert res.info["status"][0] == "converged"
        # the certified gap g pins every bit to the optimum: F is 4 k_i-strongly convex
        # in tau_i (k_i = kappa_i + the entropy the bit borrows, times the binary
        # negentropy, whose second derivative is >= 4), so F(tau) - F* >= 2 k_i
        # (tau_i - tau_i*)^2 (first-order optimality of tau* over L); tb_mp is
        # converged to 1e-13, so its own error is negligible
        gap = res.info["certified_gap"][0]
        k = dec._batch.kappa + dec._batch._bit_alpha
        dev = np.abs(res.posterior_p1[0] - tb_mp)
        assert gap <= 1e-8 * max(1.0, abs(res.info["free_energy"][0])) + 1e-12
        assert np.all(dev[k > 0] <= np.sqrt(gap / (2.0 * k[k > 0])) + 1e-9)
        assert np.max(dev) < 1e-3
        mixed = (0.99 * tb_mp + 0.01 * prob.uniform_bits, 0.99 * tl_mp + 0.01 * prob.uniform_local)
        r = fw.solve_frame(prob, dec._get_oracle(), lam, start=mixed, max_iter=1, gap_tol=0.0)
        assert r.relative_gap > 1e-6


# ---------------------------------------------------------------- line search, stopping
@pytest.mark.parametrize("variant", ["vanilla", "away", "pairwise", "contracted"])
@pytest.mark.parametrize("entropy", ["bethe", "trw"])
def test_objective_never_increases(variant, entropy):
    code = random_regular_code(24, 3, 6, 1)
    lam = awgn_llr(code, 1.0, 3)
    dec = lm.make_decoder("fw", code, entropy=entropy, variant=variant, warm_start="uniform",
                          gap_tol=0.0, max_iter=40, trace=True)
    res = dec.decode(lam)
    obj = res.info["trace"][0]["objective"]
    assert obj.size >= 2
    # exact line search guarded against any increase; 1e-12 relative covers the
    # rounding of re-evaluating F at a new point
    assert np.all(np.diff(obj) <= 1e-12 * np.maximum(1.0, np.abs(obj[:-1])))
    assert obj[-1] < obj[0]


def test_gap_reaches_tolerance():
    code = random_regular_code(24, 3, 6, 2)
    lam = awgn_llr(code, 1.0, 9)
    # time_limit lifted: the default per-frame cap (5 s) is a wall-clock guard that a
    # loaded machine can hit; this test is about the iteration count
    dec = lm.make_decoder("fw", code, entropy="trw", variant="vanilla", warm_start="uniform",
                          gap_tol=2e-3, max_iter=2000, time_limit=300)
    res = dec.decode(lam)
    assert res.info["status"][0] == "converged"
    assert res.info["relative_gap"][0] <= 2e-3
    assert res.iterations[0] < 2000


def test_bethe_trap_is_reported_not_converged():
    # every bit has degree 3: each codeword vertex is a strict local minimum of the
    # Bethe F (DESIGN.md §5), and plain FW from the uniform point jumps to the
    # LP vertex in one step
    code = random_regular_code(24, 3, 6, 3)
    lam = awgn_llr(code, 0.7, 1)
    dec = lm.make_decoder("fw", code, entropy="bethe", variant="vanilla", warm_start="uniform",
                          gap_tol=1e-9, max_iter=50)
    res = dec.decode(lam)
    assert not res.info["convex"][0]
    assert res.info["status"][0] == "vertex"


# ---------------------------------------------------------------- edge cases
@pytest.mark.parametrize("kind", ["saturated", "bec"])
def test_no_nan_or_inf_for_extreme_inputs(kind):
    code = random_regular_code(24, 3, 6, 0)
    rng = np.random.default_rng(0)
    if kind == "saturated":
        llr = rng.choice([-1.0, 1.0], size=(2, code.n)) * 1e4
    else:  # BEC: erased bits 0, the rest +LLR_MAX (all-zero codeword)
        llr = np.full((2, code.n), LLR_MAX)
        llr[rng.random((2, code.n)) < 0.3] = 0.0
    for entropy in ("bethe", "trw"):
        for variant in ("vanilla", "pairwise", "contracted"):
            for warm in ("uniform", "auto"):
                dec = lm.make_decoder("fw", code, entropy=entropy, variant=variant,
                                      warm_start=warm, max_iter=15)
                res = dec.decode(llr)
                assert np.all(np.isfinite(res.posterior_llr))
                for key in ("duality_gap", "free_energy", "relative_gap"):
                    assert np.all(np.isfinite(res.info[key]))
                if entropy == "trw":
                    assert np.all(np.isfinite(res.info["log_partition_bound"]))


def test_options_and_errors():
    code = random_regular_code(24, 3, 6, 0)
    dec = lm.make_decoder("fw:entropy=trw,variant=contracted,gap_tol=1e-4", code)
    assert dec.entropy_kind == "trw" and dec.convex
    user = lm.make_decoder("fw", code, entropy=np.full(code.m, 0.5))
    assert user.entropy_kind == "user"
    # Heskes' condition needs sum_c alpha_ic >= 3 * 0.5 - 1 at every bit, 12 in
    # total, but the checks only hold 12 * 0.5 = 6: not guaranteed
    assert not user.convex
    # rho = 0.3: every bit keeps 1 - 3 * 0.3 > 0 of its own entropy, concave
    assert lm.make_decoder("fw", code, entropy=0.3).convex
    assert lm.make_decoder("fw", code, entropy="1.0").convex is False
    with pytest.raises(InputError, match="entropy"):
        lm.make_decoder("fw", code, entropy="tree")
    with pytest.raises(InputError, match="entropy"):
        lm.make_decoder("fw", code, entropy=np.ones(code.m + 1))
    with pytest.raises(InputError, match="variant"):
        lm.make_decoder("fw", code, variant="fast")
    H = np.zeros((2, 4), dtype=np.uint8)
    H[0, :3] = 1
    H[1, 3] = 1
    with pytest.raises(InputError, match="degree 1"):
        lm.make_decoder("fw", ParityCheckCode(H))
    clone = pickle.loads(pickle.dumps(dec))
    lam = awgn_llr(code, 1.0, 0)
    assert np.allclose(clone.decode(lam).posterior_llr, dec.decode(lam).posterior_llr)
    assert "log_partition_bound" not in lm.make_decoder("fw", code, max_iter=2).decode(lam).info


def test_refuses_llrs_beyond_saturation_and_survives_at_it():
    # Reproduction from a reliability report: |LLR| >= 1e21 (past HiGHS's infinite
    # cost, 1e20) gave near-uniform posteriors and a wrong word marked valid.
    # Above the lab's saturation level LLR_MAX fw now refuses with one clear error;
    # at the saturation level with uneven magnitudes (scaled AWGN, clipped) the warm
    # start used to crash in an SVD: the outputs must be finite.
    code = random_regular_code(24, 3, 6, 0)
    ch = lm.make_channel("awgn", ebn0_db=2.0, rate=code.rate)
    llr = ch.sample_llr(np.zeros((2, code.n), np.uint8), np.random.default_rng(3))
    dec = lm.make_decoder("fw", code, max_iter=30)
    with pytest.raises(InputError, match="fw accepts LLR magnitudes up to"):
        dec.decode(llr * 1e21)
    res = dec.decode(np.clip(llr * 1e4, -LLR_MAX, LLR_MAX))
    assert np.all(np.isfinite(res.posterior_llr))
    assert np.array_equal(res.valid, np.asarray(code.is_codeword(res.bits)).reshape(-1))


@pytest.mark.parametrize("entropy", ["trw", "bethe"])
def test_low_temperature_frames_give_the_lp_optimum_never_a_false_success(entropy):
    # Scaled AWGN LLRs (x1e4, clipped at LLR_MAX) on Golay(24,12). As the LLR scale
    # grows, min_L <lam, tau> - H(tau) tends to LP decoding (the entropy is bounded,
    # Wainwright & Jordan 2008, ch. 8, zero-temperature limit; from memory); the exact bitwise MAP
    # tends to block ML. fw must return the LP vertex with status "low_temperature",
    # honest valid flags, and a valid word only where it is the exact MAP word.
    code = golay24()
    ch = lm.make_channel("awgn", ebn0_db=2.0, rate=code.rate)
    llr = ch.sample_llr(np.zeros((6, code.n), np.uint8), np.random.default_rng(3))
    llr = np.clip(llr * 1e4, -LLR_MAX, LLR_MAX)
    dec = lm.make_decoder("fw", code, entropy=entropy)
    res = dec.decode(llr)
    lp = lm.make_decoder("lp", code).decode(llr)
    exact = lm.make_decoder("exact", code).decode(llr)
    assert np.all(res.info["status"] == "low_temperature")
    tau = 1.0 / (1.0 + np.exp(np.clip(res.posterior_llr, -700, 700)))
    assert np.allclose(tau, lp.info["pseudo_codeword"], atol=1e-9)
    assert np.array_equal(res.valid, np.asarray(code.is_codeword(res.bits)).reshape(-1))
    # where the LP optimum is integral (ML certificate, Feldman et al. 2005) the word
    # is the ML word, which is the exact bitwise MAP word at this scale
    cert = lp.info["ml_certificate"]
    assert cert.any() and (~cert).any()  # both cases occur in these frames
    assert np.array_equal(res.bits[cert], exact.bits[cert])
    assert not np.any(res.valid & ~(res.bits == exact.bits).all(axis=1))
    # F* >= LP* - Hmax, so the certified gap and (TRW) the ln Z bound stay valid
    assert np.all(np.isfinite(res.info["certified_gap"]))
    if entropy == "trw":
        for f in range(llr.shape[0]):
            assert res.info["log_partition_bound"][f] >= brute_force(code, llr[f])[1]
