"""Message-passing decoders against independent brute-force references (tests/naive.py)."""

from __future__ import annotations

import pickle
import sys

import numpy as np
import pytest
from naive import (
    exact_posterior_llr,
    exact_posteriors,
    is_tree,
    min_sum_single_check,
    peeling_decode,
    random_codewords,
    random_regular_H,
    random_tree_code,
)

import ldpcmarg as lm
from ldpcmarg._settings import LLR_MAX
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import InputError
from ldpcmarg.link.channels import make_channel

SOFT = ["sum-product", "layered-sum-product", "min-sum", "offset-min-sum", "layered-min-sum",
        "reweighted-sum-product"]


@pytest.fixture(scope="module")
def code96():
    H = random_regular_H(96, 3, 6, np.random.default_rng(96))
    return ParityCheckCode(H, name="rand-96-3-6")


# ---------------------------------------------------------------- exactness on trees
@pytest.mark.parametrize("name", ["sum-product", "layered-sum-product"])
def test_tree_posteriors_exact(name, seed):
    # Belief propagation is exact on cycle-free factor graphs once messages have
    # crossed the whole tree (Pearl, Probabilistic Reasoning in Intelligent
    # Systems, 1988). Reference: enumeration over all 2^n words (tests/naive.py).
    rng = np.random.default_rng(1000 + seed)
    for _ in range(4):
        H = random_tree_code(int(rng.integers(3, 7)), rng)
        assert is_tree(H) and H.shape[1] <= 19
        code = ParityCheckCode(H)
        llr = rng.normal(0.5, 2.0, size=(5, code.n))
        # a tree with m checks has diameter < 2m; run 2m + 2 iterations without early stop
        dec = lm.make_decoder(name, code, max_iter=2 * code.m + 2, early_stop=False)
        res = dec.decode(llr)
        ref = exact_posteriors(H, llr)
        assert np.max(np.abs(res.posterior_p1 - ref)) < 1e-9


@pytest.mark.parametrize("name", ["sum-product", "layered-sum-product"])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_tree_posteriors_exact_at_every_llr_scale(name, dtype, seed):
    # Scaling every LLR by s > 0 is the same model at temperature 1/s:
    # p_s(x|y) ~ exp(-s sum_i llr_i x_i) 1[Hx = 0]. On a tree sum-product must give
    # its exact posterior LLRs at every scale (Pearl 1988), here against a
    # log-domain enumeration (scipy logsumexp). Before the box-plus fix, check
    # messages saturated near 37.4 and these differed by hundreds at s >= 30.
    # Scales up to 1000 put cavity LLRs in the thousands (the pairwise branch).
    rng = np.random.default_rng(3000 + seed)
    for _ in range(3):
        H = random_tree_code(int(rng.integers(3, 7)), rng)
        code = ParityCheckCode(H)
        base = rng.normal(0.5, 2.0, size=(4, code.n))
        dec = lm.make_decoder(name, code, max_iter=2 * code.m + 2, early_stop=False)
        for s in (1.0, 30.0, 100.0, 1000.0):
            llr = np.clip(base * s, -LLR_MAX, LLR_MAX)
            res = dec.decode(llr.astype(dtype))
            ref = exact_posterior_llr(H, llr.astype(dtype).astype(np.float64))
            assert np.all(np.isfinite(res.posterior_llr))
            # float64: a few ulps per message; float32 messages carry ~1e-7 relative.
            rtol, atol = (1e-9, 1e-9) if dtype == np.float64 else (2e-5, 2e-4)
            np.testing.assert_allclose(res.posterior_llr, ref, rtol=rtol, atol=atol)


@pytest.mark.parametrize("name", ["min-sum", "layered-min-sum"])
def test_min_sum_is_scale_equivariant_on_the_bsc(name):
    # On the BSC every LLR magnitude describes the same observations; normalised
    # min-sum (no offset) commutes with scaling, and scaling by a power of two is
    # exact in binary floating point, so decisions must be identical and the
    # posteriors exactly scaled (common practice: min-sum needs no channel estimate).
    code = lm.load_code("peg-504-3-6")
    rng = np.random.default_rng(21)
    p = 0.04
    flips = rng.random((200, code.n)) < p
    base = np.where(flips, -1.0, 1.0) * np.log((1 - p) / p)
    dec = lm.make_decoder(name, code)
    ref = dec.decode(base)
    # (Scales stay below the point where messages reach the LLR_MAX cap.)
    for s in (2.0**-4, 2.0**-1, 2.0**3):
        res = dec.decode(base * s)
        np.testing.assert_array_equal(res.bits, ref.bits)
        np.testing.assert_array_equal(res.iterations, ref.iterations)
        np.testing.assert_array_equal(res.posterior_llr, ref.posterior_llr * s)


@pytest.mark.parametrize("name", ["sum-product", "layered-sum-product", "reweighted-sum-product"])
def test_sum_product_keeps_correcting_large_llrs(name):
    # Reproduction from a reliability report: AWGN LLRs at 2.5 dB scaled by 30 or
    # 100 (e.g. integer demapper outputs) made sum-product fail on 190-200 of 200
    # frames while min-sum failed on 9 at every scale. Sum-product at a large
    # scale behaves like min-sum, so it must stay near min-sum's count; a bound of
    # 10 % of the frames (min-sum: 4.5 %) separates the two regimes widely.
    code = lm.load_code("peg-504-3-6")
    ch = make_channel("awgn", ebn0_db=2.5, rate=code.rate)
    L = ch.sample_llr(np.zeros((200, code.n), np.uint8), np.random.default_rng(11))
    dec = lm.make_decoder(name, code)
    for s in (1.0, 30.0, 100.0):
        res = dec.decode(L * s)
        assert np.all(np.isfinite(res.posterior_llr))
        assert int((res.bits.sum(axis=1) > 0).sum()) <= 20, s


def test_tree_reweighted_rho_one_converges_to_exact(seed):
    # rho = 1 is the Bethe free energy, exact on trees (Yedidia, Freeman & Weiss 2005);
    # damped reweighted SP must reach the same fixed point.
    rng = np.random.default_rng(2000 + seed)
    H = random_tree_code(5, rng)
    code = ParityCheckCode(H)
    llr = rng.normal(0.5, 2.0, size=code.n)
    dec = lm.make_decoder("reweighted-sum-product", code, rho=1.0, damping=0.5)
    tau_bits, tau_local, info = dec.beliefs(llr, max_iter=2000, tol=1e-14, return_info=True)
    assert info["converged"]
    assert np.max(np.abs(tau_bits - exact_posteriors(H, llr))) < 1e-9
    # check beliefs are distributions, consistent with the bit beliefs (local polytope)
    lc = code.local_codewords()
    for c in range(code.m):
        d = int(code.check_degrees[c])
        block = tau_local[lc.offset[c]:lc.offset[c + 1]]
        assert block.sum() == pytest.approx(1.0, abs=1e-12)
        pats = lc.patterns(c, d)
        bits = code.edge_var[code.check_ptr[c]:code.check_ptr[c + 1]]
        np.testing.assert_allclose(block @ pats, tau_bits[bits], atol=1e-9)


# --------------------------------------------------------------------- BEC peeling
@pytest.mark.parametrize("eps", [0.3, 0.42, 0.5])
@pytest.mark.parametrize("n", [96, 240])
def test_bec_sum_product_equals_peeling(n, eps):
    # On the BEC, BP and the peeling decoder stop at the same set of erasures (the
    # largest stopping set inside the erasures; Richardson & Urbanke, Modern Coding
    # Theory, ch. 3). eps spans below, near and above the (3,6) BP threshold 0.4294.
    rng = np.random.default_rng(int(n * 10 + eps * 100))
    H = random_regular_H(n, 3, 6, rng)
    code = ParityCheckCode(H)
    cw = random_codewords(H, 12, rng)
    bec = make_channel("bec", epsilon=eps)
    out = bec.transmit(cw, rng)
    llr = bec.llr(out)
    res = lm.make_decoder("sum-product", code, max_iter=n, early_stop=False).decode(llr)
    assert np.all(np.isfinite(res.posterior_llr))
    n_stuck = 0
    for f in range(cw.shape[0]):
        erased = out[f] == 2
        vals, still = peeling_decode(H, out[f], erased)
        resolved_bp = res.posterior_llr[f] != 0.0
        np.testing.assert_array_equal(resolved_bp, ~still)
        # resolved bits carry the transmitted value
        np.testing.assert_array_equal(res.bits[f][~still], cw[f][~still])
        np.testing.assert_array_equal(vals[~still], cw[f][~still])
        n_stuck += int(still.any())
    if eps == 0.3:
        assert n_stuck < cw.shape[0]      # the test exercises successes ...
    if eps == 0.5:
        assert n_stuck > 0                # ... and stopping sets


@pytest.mark.parametrize("name", ["sum-product", "layered-sum-product", "min-sum",
                                  "layered-min-sum"])
def test_bec_all_zero_early_stop_does_not_stop_on_ties(name):
    # With the all-zero word an erased bit (LLR 0) has hard decision 0, so the
    # hard decision satisfies every check before any decoding. The early stop
    # must not take that for success: the unresolved set must still be the
    # peeling decoder's (Richardson & Urbanke, Modern Coding Theory, ch. 3).
    rng = np.random.default_rng(4242)
    H = random_regular_H(96, 3, 6, rng)
    code = ParityCheckCode(H)
    bec = make_channel("bec", epsilon=0.35)
    zeros = np.zeros((12, code.n), dtype=np.uint8)
    out = bec.transmit(zeros, rng)
    res = lm.make_decoder(name, code, max_iter=96).decode(bec.llr(out))
    assert np.all(res.iterations > 0)
    for f in range(zeros.shape[0]):
        _, still = peeling_decode(H, out[f], out[f] == 2)
        np.testing.assert_array_equal(res.posterior_llr[f] == 0.0, still)


# ------------------------------------------------------------------------ symmetry
@pytest.mark.parametrize("name", SOFT + ["bit-flipping"])
def test_codeword_symmetry_bit_for_bit(name, code96, seed):
    # Message passing commutes with codeword translation: decoding y for codeword c
    # gives the error pattern of decoding the all-zero word with LLRs
    # sign-flipped where c_i = 1 (Richardson & Urbanke, Modern Coding Theory, ch. 4).
    rng = np.random.default_rng(300 + seed)
    cw = random_codewords(code96.H.toarray(), 20, rng)
    assert cw.any()
    ch = make_channel("awgn", ebn0_db=1.5, rate=0.5)
    llr = ch.sample_llr(cw, rng)
    flipped = llr * (1.0 - 2.0 * cw)
    dec = lm.make_decoder(name, code96, max_iter=30)
    r1, r0 = dec.decode(llr), dec.decode(flipped)
    np.testing.assert_array_equal(r1.bits ^ cw, r0.bits)
    np.testing.assert_array_equal(r1.iterations, r0.iterations)
    np.testing.assert_array_equal(r1.valid, r0.valid)
    if r1.posterior_llr is not None:
        np.testing.assert_array_equal(r1.posterior_llr * (1.0 - 2.0 * cw), r0.posterior_llr)


def test_symmetry_sample_has_errors(code96):
    # guard for the symmetry test: at 1.5 dB on n = 96 some frames are not decoded,
    # so the bit-for-bit comparison covers failures as well (FER of roughly 0.1-0.5
    # expected at this length; from memory). Seeded, 200 frames.
    rng = np.random.default_rng(7)
    llr = make_channel("awgn", ebn0_db=1.5, rate=0.5).sample_llr(np.zeros((200, 96), np.uint8), rng)
    res = lm.make_decoder("sum-product", code96, max_iter=30).decode(llr)
    assert 0 < (~res.valid).sum() < 200


# ----------------------------------------------------------------- small behaviours
@pytest.mark.parametrize("name", SOFT + ["bit-flipping"])
def test_noiseless_decodes_immediately(name, code96):
    cw = random_codewords(code96.H.toarray(), 4, np.random.default_rng(5))
    llr = 4.0 * (1.0 - 2.0 * cw.astype(np.float64))
    res = lm.make_decoder(name, code96).decode(llr)
    assert np.all(res.iterations <= 1)
    assert res.valid.all()
    np.testing.assert_array_equal(res.bits, cw)


@pytest.mark.parametrize("alpha,beta,name", [(1.0, 0.0, "min-sum"), (0.75, 0.0, "min-sum"),
                                             (1.0, 0.4, "offset-min-sum"),
                                             (0.75, 0.0, "layered-min-sum")])
def test_min_sum_single_parity_check_closed_form(alpha, beta, name, seed):
    # On one parity check, min-sum gives L_i = llr_i + prod_{j!=i} sign(llr_j) *
    # max(alpha min_{j!=i} |llr_j| - beta, 0) after one iteration, and stays there
    # (a single check is a tree of depth one). Closed form in tests/naive.py.
    rng = np.random.default_rng(40 + seed)
    n = 7
    code = ParityCheckCode(np.ones((1, n), dtype=np.uint8))
    llr = rng.normal(0.3, 1.5, size=(6, n))
    opts = {"alpha": alpha} if name != "offset-min-sum" else {"beta": beta}
    for iters in (1, 5):
        res = lm.make_decoder(name, code, max_iter=iters, early_stop=False, **opts).decode(llr)
        ref = np.stack([min_sum_single_check(row, alpha, beta) for row in llr])
        np.testing.assert_allclose(res.posterior_llr, ref, rtol=0, atol=1e-12)


def test_reweighted_rho_one_equals_sum_product(code96, seed):
    # With rho_c = 1 the reweighted updates are those of sum-product exactly.
    rng = np.random.default_rng(60 + seed)
    llr = make_channel("awgn", ebn0_db=1.0, rate=0.5).sample_llr(np.zeros((30, 96), np.uint8), rng)
    for damping in (0.0, 0.3):
        a = lm.make_decoder("sum-product", code96, max_iter=20, damping=damping).decode(llr)
        b = lm.make_decoder("reweighted-sum-product", code96, rho=1.0, max_iter=20,
                            damping=damping).decode(llr)
        np.testing.assert_array_equal(a.posterior_llr, b.posterior_llr)
        np.testing.assert_array_equal(a.iterations, b.iterations)
        c = lm.make_decoder("reweighted-sum-product", code96, rho=np.ones(code96.m), max_iter=20,
                            damping=damping).decode(llr)
        np.testing.assert_array_equal(a.posterior_llr, c.posterior_llr)


@pytest.mark.parametrize("rho", [0.4, "varied"])
def test_reweighted_fixed_point_is_stationary(code96, rho):
    # A converged fixed point of reweighted SP must be a stationary point of
    # F(tau) = sum_i lam_i tau_i - [sum_c rho_c H(tau_c) + sum_i kappa_i H(tau_i)]
    # on the local polytope (DESIGN.md section 5). The beliefs are interior, so only
    # the equality constraints bind: grad F must lie in the row space of the
    # constraint matrix A (edge consistency tau_i = sum_{S ∋ i} tau_c(S) and
    # normalisation sum_S tau_c(S) = 1). Checked by least squares, independently of
    # the message updates (Lagrange conditions; textbook optimisation).
    rng = np.random.default_rng(11)
    m, n = code96.m, code96.n
    rho_v = np.full(m, 0.4) if rho == 0.4 else rng.uniform(0.2, 0.6, size=m)
    llr = make_channel("awgn", ebn0_db=2.0, rate=0.5).sample_llr(np.zeros((1, n), np.uint8), rng)[0]
    dec = lm.make_decoder("reweighted-sum-product", code96, rho=rho_v, damping=0.5)
    tau_bits, tau_local, info = dec.beliefs(llr, max_iter=5000, tol=1e-13, return_info=True)
    assert info["converged"]
    lc = code96.local_codewords()
    L = lc.count
    kappa = 1.0 - np.bincount(code96.edge_var, weights=rho_v[code96.edge_check], minlength=n)
    grad = np.concatenate([
        llr + kappa * np.log(tau_bits / (1.0 - tau_bits)),
        rho_v[lc.owner] * (np.log(tau_local) + 1.0),
    ])
    rows = []
    for c in range(m):
        d = int(code96.check_degrees[c])
        pats = lc.patterns(c, d)
        bits = code96.edge_var[code96.check_ptr[c]:code96.check_ptr[c + 1]]
        for t in range(d):
            r = np.zeros(n + L)
            r[bits[t]] = 1.0
            r[n + lc.offset[c]:n + lc.offset[c + 1]] = -pats[:, t].astype(np.float64)
            rows.append(r)
        r = np.zeros(n + L)
        r[n + lc.offset[c]:n + lc.offset[c + 1]] = 1.0
        rows.append(r)
        # feasibility: the beliefs lie in the local polytope
        block = tau_local[lc.offset[c]:lc.offset[c + 1]]
        np.testing.assert_allclose(block @ pats, tau_bits[bits], atol=1e-9)
    A = np.array(rows)
    y, *_ = np.linalg.lstsq(A.T, grad, rcond=None)
    resid = grad - A.T @ y
    # gradient entries are O(10); converged to 1e-13 message change -> residual ~1e-9
    assert np.max(np.abs(resid)) < 1e-6 * max(1.0, np.max(np.abs(grad)))
    # and it is not sum-product's fixed point (rho matters)
    sp = lm.make_decoder("reweighted-sum-product", code96, rho=1.0, damping=0.5)
    tb1, _ = sp.beliefs(llr, max_iter=5000, tol=1e-13)
    assert np.max(np.abs(tb1 - tau_bits)) > 1e-6


def test_reweighted_local_beliefs_option(code96):
    rng = np.random.default_rng(12)
    llr = make_channel("awgn", ebn0_db=2.0, rate=0.5).sample_llr(np.zeros((2, 96), np.uint8), rng)
    dec = lm.make_decoder("reweighted-sum-product", code96, rho=0.5, local_beliefs=True,
                          max_iter=10, early_stop=False)
    res = dec.decode(llr)
    L = code96.local_codewords().count
    assert res.info["local_beliefs"].shape == (2, L)
    assert res.info["converged"].shape == (2,)
    tb, tl = dec._beliefs_one(llr[1])[:2]
    np.testing.assert_array_equal(res.info["local_beliefs"][1], tl)
    np.testing.assert_allclose(tb, res.posterior_p1[1], atol=1e-15)


def test_reweighted_trw_option_calls_hyperforest(code96, monkeypatch):
    import types

    calls = {}

    def fake(code, num_samples=200, seed=0):
        calls["args"] = (code.m, num_samples, seed)
        return np.full(code.m, 0.25)

    mod = types.ModuleType("ldpcmarg.code.hyperforest")
    mod.trw_check_weights = fake
    monkeypatch.setitem(sys.modules, "ldpcmarg.code.hyperforest", mod)
    import ldpcmarg.code

    monkeypatch.setattr(ldpcmarg.code, "hyperforest", mod, raising=False)
    dec = lm.make_decoder("reweighted-sum-product", code96, rho="trw", trw_samples=7, trw_seed=3)
    assert calls["args"] == (code96.m, 7, 3)
    np.testing.assert_array_equal(dec.rho, np.full(code96.m, 0.25))


def test_reweighted_rho_validation(code96):
    with pytest.raises(InputError, match="shape"):
        lm.make_decoder("reweighted-sum-product", code96, rho=np.ones(3))
    with pytest.raises(InputError, match=">= 0"):
        lm.make_decoder("reweighted-sum-product", code96, rho=-0.5)
    with pytest.raises(InputError, match="trw"):
        lm.make_decoder("reweighted-sum-product", code96, rho="bethe")


@pytest.mark.parametrize("name", SOFT)
def test_no_nan_with_saturated_llrs(name, code96):
    # BEC-like inputs: +-LLR_MAX and exact zeros; also +-1e4 with wrong signs
    rng = np.random.default_rng(9)
    llr = LLR_MAX * rng.choice([-1.0, 0.0, 1.0], size=(8, 96), p=[0.2, 0.4, 0.4])
    res = lm.make_decoder(name, code96, max_iter=60, early_stop=False).decode(llr)
    assert np.all(np.isfinite(res.posterior_llr))
    big = np.full((1, 96), 1e300)
    res = lm.make_decoder(name, code96, max_iter=5).decode(big)   # clipped at LLR_MAX
    assert np.all(np.isfinite(res.posterior_llr)) and res.valid.all()


@pytest.mark.parametrize("name", SOFT + ["bit-flipping"])
def test_float32_input_accepted(name, code96):
    rng = np.random.default_rng(13)
    llr = make_channel("awgn", ebn0_db=2.0, rate=0.5).sample_llr(np.zeros((5, 96), np.uint8), rng)
    l32 = llr.astype(np.float32)
    dec = lm.make_decoder(name, code96, max_iter=20)
    a, b = dec.decode(l32), dec.decode(l32.astype(np.float64))
    np.testing.assert_array_equal(a.bits, b.bits)
    if a.posterior_llr is not None:
        assert a.posterior_llr.dtype == np.float64
        np.testing.assert_array_equal(a.posterior_llr, b.posterior_llr)


def test_float32_messages_close_to_float64(code96):
    rng = np.random.default_rng(14)
    llr = make_channel("awgn", ebn0_db=2.0, rate=0.5).sample_llr(np.zeros((20, 96), np.uint8), rng)
    for name in ("sum-product", "min-sum"):
        a = lm.make_decoder(name, code96, max_iter=5, early_stop=False).decode(llr)
        b = lm.make_decoder(name, code96, max_iter=5, early_stop=False,
                            precision="float32").decode(llr)
        # float32 carries ~7 significant digits; five iterations amplify rounding modestly
        np.testing.assert_allclose(b.posterior_p1, a.posterior_p1, atol=1e-4)


def test_decoders_agree_at_high_snr(code96):
    # sanity: at 4 dB on a (3,6) code every decoder fixes every frame of this seeded batch
    rng = np.random.default_rng(15)
    llr = make_channel("awgn", ebn0_db=4.0, rate=0.5).sample_llr(np.zeros((50, 96), np.uint8), rng)
    for name in SOFT:
        res = lm.make_decoder(name, code96).decode(llr)
        assert res.valid.all() and not res.bits.any(), name


def test_bit_flipping_corrects_single_errors(code96):
    # Majority flipping corrects a single error on bit i when no other bit shares two
    # checks with i: the wrong bit sees 3 of 3 checks unsatisfied, every other bit at
    # most 1 of 3 (Gallager, Low-Density Parity-Check Codes, 1963).
    Hd = code96.H.toarray().astype(np.int64)
    overlap = Hd.T @ Hd
    np.fill_diagonal(overlap, 0)
    clean = np.flatnonzero(overlap.max(axis=1) <= 1)
    assert clean.size > 10
    llr = np.full((clean.size, 96), 3.0)
    llr[np.arange(clean.size), clean] = -3.0
    res = lm.make_decoder("bit-flipping", code96).decode(llr)
    assert res.valid.all() and not res.bits.any()
    assert np.all(res.iterations == 1)
    assert res.posterior_llr is None


def test_options_and_errors(code96):
    with pytest.raises(InputError, match="max_iter"):
        lm.make_decoder("sum-product", code96, max_iter=0)
    with pytest.raises(InputError, match="damping"):
        lm.make_decoder("min-sum", code96, damping=1.0)
    with pytest.raises(InputError, match="alpha"):
        lm.make_decoder("min-sum", code96, alpha=0.0)
    with pytest.raises(InputError, match="accepted options"):
        lm.make_decoder("sum-product", code96, alpha=0.5)
    dec = lm.make_decoder("sum-product", code96)
    with pytest.raises(InputError, match="length"):
        dec.decode(np.zeros((2, 95)))
    with pytest.raises(InputError, match="NaN"):
        dec.decode(np.full(96, np.nan))
    with pytest.raises(InputError, match="dtype"):
        dec.decode(np.array(["a"] * 96))
    one = dec.decode(np.full(96, 2.0))
    assert one.bits.shape == (1, 96) and one.iterations.dtype == np.int64


@pytest.mark.parametrize("name", SOFT + ["bit-flipping"])
def test_picklable_and_threads(name, code96):
    rng = np.random.default_rng(16)
    llr = make_channel("awgn", ebn0_db=1.5, rate=0.5).sample_llr(np.zeros((16, 96), np.uint8), rng)
    dec = lm.make_decoder(name, code96, threads=1)
    dec2 = pickle.loads(pickle.dumps(dec))
    r1 = dec.decode(llr)
    r2 = lm.make_decoder(name, code96, threads=2).decode(llr)
    r3 = dec2.decode(llr)
    np.testing.assert_array_equal(r1.bits, r2.bits)
    np.testing.assert_array_equal(r1.bits, r3.bits)
    np.testing.assert_array_equal(r1.iterations, r2.iterations)


@pytest.mark.parametrize("name,opts", [("sum-product", {}), ("min-sum", {"alpha": 0.75}),
                                       ("offset-min-sum", {"beta": 0.3})])
def test_fast_paths_match_general_kernel(name, opts, code96):
    # Undamped flooding runs a dedicated loop; a damping of 1e-300 forces the
    # general kernel, whose update then rounds to the same numbers
    # ((1 - 1e-300) == 1.0 in float64 and 1e-300 * old vanishes beside the new
    # message), so both must agree exactly.
    rng = np.random.default_rng(17)
    llr = make_channel("awgn", ebn0_db=1.5, rate=0.5).sample_llr(np.zeros((40, 96), np.uint8), rng)
    a = lm.make_decoder(name, code96, max_iter=40, **opts).decode(llr)
    b = lm.make_decoder(name, code96, max_iter=40, damping=1e-300, **opts).decode(llr)
    np.testing.assert_array_equal(a.posterior_llr, b.posterior_llr)
    np.testing.assert_array_equal(a.iterations, b.iterations)


def test_sum_product_check_with_an_erasure_sends_exact_zeros():
    # tanh(0/2) = 0, so every extrinsic product that contains an erased input is
    # exactly 0 and so is the message (common practice: an erasure blocks a check);
    # rounding in the complement form must not leak ~1e-16 into those messages.
    from ldpcmarg.decoders.message_passing import _BIG64, _sp_magnitudes

    for pos in range(6):
        v = np.zeros(13)
        v[:6] = [20.0, 3.0, 45.0, 0.5, 20.0, 7.0]
        v[pos] = 0.0
        t = np.zeros(7)
        _sp_magnitudes(v, 6, _BIG64, LLR_MAX, t)
        others = np.delete(t[:6], pos)
        assert np.all(others == 0.0), (pos, others)
        assert t[pos] > 0.0


def test_sum_product_check_messages_match_pairwise_box_plus_in_every_regime():
    # Every extrinsic message of a check must equal the box-plus of the other
    # inputs, computed pairwise in the overflow-free form (Hagenauer, Offer &
    # Papke 1996; tests/naive.py), whether the inputs are moderate (1 - tanh
    # complement form), all beyond 600 (shifted log-sum-exp) or mixed, up to
    # the LLR_MAX clip; the signs are handled outside this kernel.
    from naive import boxplus

    from ldpcmarg.decoders.message_passing import _BIG64, _sp_magnitudes

    rng = np.random.default_rng(17)
    for _ in range(1500):
        d = int(rng.integers(1, 9))
        scale = rng.choice([1.0, 10.0, 100.0, 500.0, 700.0, 1000.0, 5000.0])
        x = np.clip(rng.exponential(scale, size=d), 0.0, LLR_MAX)
        v = np.zeros(2 * d + 1)
        v[:d] = x * rng.choice([-1.0, 1.0], size=d)
        t = np.zeros(d + 1)
        _sp_magnitudes(v, d, _BIG64, LLR_MAX, t)
        for k in range(d):
            ref = min(abs(boxplus(np.delete(x, k))), LLR_MAX) if d > 1 else LLR_MAX
            # a few ulps of the message (or of 1 for messages below 1)
            assert abs(t[k] - ref) <= 1e-13 * max(1.0, ref), (x, k, t[k], ref)
