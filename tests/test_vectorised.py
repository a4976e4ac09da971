"""Frame-interleaved (lane) kernels against the scalar kernels and independent references."""

from __future__ import annotations

import numpy as np
import pytest
from naive import exact_posteriors, random_regular_H, random_tree_code

import ldpcmarg as lm
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.decoders import vectorised as V
from ldpcmarg.decoders.message_passing import LayeredMinSumDecoder
from ldpcmarg.errors import InputError
from ldpcmarg.link.channels import make_channel

# not a multiple of the lane width: the last lane group is partly empty
F_ODD = V.LANES + 37


@pytest.fixture(scope="module")
def code96():
    return ParityCheckCode(random_regular_H(96, 3, 6, np.random.default_rng(96)),
                           name="rand-96-3-6")


def _awgn(code, frames, ebn0, seed):
    ch = make_channel("awgn", ebn0_db=ebn0, rate=code.rate)
    return ch.sample_llr(np.zeros((frames, code.n), np.uint8), np.random.default_rng(seed))


# ------------------------------------------------------------ maths helpers
def test_exp_log1p_match_numpy_over_their_range():
    # Reference: numpy's exp/log1p (correctly rounded to within ~1 ulp).
    t = np.concatenate([np.linspace(0, 700, 200001), np.geomspace(1e-30, 1, 2000)])
    e = V.exp_neg_lanes(t)
    assert np.max(np.abs(e - np.exp(-t)) / np.exp(-t)) < 1e-15   # a few ulp
    assert V.exp_neg_lanes(np.array([700.5, 1e4]))[0] == 0.0   # flushed, never subnormal
    u = np.concatenate([np.linspace(0, 1, 200001), np.geomspace(1e-300, 1, 2000)])
    lg = V.log1p_unit_lanes(u)
    ref = np.log1p(u)
    assert np.max(np.abs(lg - ref) / np.maximum(ref, 1e-300)) < 1e-15   # a few ulp
    t32 = np.linspace(0, 80, 20001).astype(np.float32)
    e32 = V.exp_neg_lanes(t32)
    assert e32.dtype == np.float32
    assert np.max(np.abs(e32 - np.exp(-t32.astype(float))) / np.exp(-t32.astype(float))) < 4e-7
    u32 = np.linspace(0, 1, 20001).astype(np.float32)
    ref32 = np.log1p(u32.astype(float))
    assert np.max(np.abs(V.log1p_unit_lanes(u32) - ref32) / np.maximum(ref32, 1e-30)) < 4e-7


def test_boxplus_exact_at_every_magnitude():
    # |a [+] b| = 2 atanh(tanh(x/2) tanh(y/2)) = ln((1 + e^{-(x+y)}) / (e^{-x} + e^{-y}))
    # for magnitudes x, y (standard LLR box-plus; Hagenauer, Offer & Papke, IEEE
    # Trans. IT 1996). Reference: that log-ratio with numpy's stable logaddexp.
    rng = np.random.default_rng(5)
    x = np.concatenate([rng.uniform(0, 5, 5000), rng.uniform(0, 100, 5000),
                        rng.uniform(0, 1e4, 2000), [37.0, 40.0, 1e4]])
    y = np.concatenate([rng.uniform(0, 5, 5000), rng.uniform(0, 100, 5000),
                        rng.uniform(0, 1e4, 2000), [38.0, 60.0, 1e4 - 1]])
    ref = np.logaddexp(0.0, -(x + y)) - np.logaddexp(-x, -y)
    got = V.boxplus_lanes(x, y)
    assert np.max(np.abs(got - ref)) < 1e-12
    # far above the old saturation level (about 37.4) nothing saturates
    assert got[-2] == pytest.approx(40.0 - np.log1p(np.exp(-20.0)), abs=1e-13)
    assert got[-1] == pytest.approx(1e4 - 1 - np.log1p(np.exp(-1.0)), abs=1e-11)
    # erasure: 0 [+] y = 0
    assert V.boxplus_lanes(np.zeros(3), np.array([0.0, 3.0, 1e4])).tolist() == [0.0, 0.0, 0.0]


# ------------------------------------------------------------ sum-product
@pytest.mark.parametrize("layered", [False, True])
@pytest.mark.parametrize("precision,tol", [("float64", 1e-9), ("float32", 2e-4)])
def test_sum_product_lanes_exact_on_trees(layered, precision, tol, seed):
    # Belief propagation is exact on cycle-free factor graphs once messages have
    # crossed the tree (Pearl 1988); reference: enumeration (tests/naive.py).
    rng = np.random.default_rng(3000 + seed)
    H = random_tree_code(int(rng.integers(3, 6)), rng)
    code = ParityCheckCode(H)
    llr = rng.normal(0.5, 2.0, size=(F_ODD, code.n))
    post, _, _ = V.decode_float_lanes(code, llr, mode="sum-product", layered=layered,
                                      max_iter=2 * code.m + 2, early_stop=False,
                                      precision=precision)
    ref = exact_posteriors(H, llr)
    p1 = 1.0 / (1.0 + np.exp(post))
    assert np.max(np.abs(p1 - ref)) < tol


def test_sum_product_lanes_match_scalar_on_random_code(code96):
    # Same updates, different (but both exact to rounding) box-plus formulas:
    # after a few iterations the posteriors agree to rounding error.
    llr = _awgn(code96, F_ODD, 1.0, 11)
    post, it, _ = V.decode_float_lanes(code96, llr, mode="sum-product", max_iter=4,
                                       early_stop=False)
    ref = lm.make_decoder("sum-product", code96, max_iter=4, early_stop=False,
                          kernel="scalar").decode(llr)
    assert np.all(it == 4)
    assert np.max(np.abs(post - ref.posterior_llr)) < 1e-8
    # with early stop the decisions and iteration counts agree frame by frame
    res = lm.make_decoder("sum-product", code96, kernel="lanes").decode(llr)
    ref = lm.make_decoder("sum-product", code96, kernel="scalar").decode(llr)
    assert np.mean(np.all(res.bits == ref.bits, axis=1)) > 0.97
    assert np.mean(res.iterations == ref.iterations) > 0.9


# ------------------------------------------------------------ min-sum
@pytest.mark.parametrize("name,opts", [("min-sum", {"alpha": 0.75}),
                                       ("offset-min-sum", {"beta": 0.5}),
                                       ("layered-min-sum", {"alpha": 0.8})])
@pytest.mark.parametrize("ebn0", [1.0, 2.5])
def test_min_sum_lanes_bit_exact_in_float64(name, opts, ebn0, code96):
    # The lane kernels perform the scalar kernel's float64 operations in the same
    # order, so posteriors, decisions and iteration counts are identical.
    llr = _awgn(code96, 3 * V.LANES + 5, ebn0, 21)
    a = lm.make_decoder(name, code96, kernel="lanes", **opts).decode(llr)
    b = lm.make_decoder(name, code96, kernel="scalar", **opts).decode(llr)
    np.testing.assert_array_equal(a.posterior_llr, b.posterior_llr)
    np.testing.assert_array_equal(a.iterations, b.iterations)
    np.testing.assert_array_equal(a.valid, b.valid)
    # lane refill was exercised: frames finished at different iterations
    assert len(np.unique(a.iterations)) > 3


def test_layered_offset_min_sum_lanes_bit_exact(code96):
    class LayeredOffset(LayeredMinSumDecoder):
        def _alpha_beta(self):
            return 1.0, 0.4

    llr = _awgn(code96, F_ODD, 1.5, 31)
    a = LayeredOffset(code96, kernel="lanes").decode(llr)
    b = LayeredOffset(code96, kernel="scalar").decode(llr)
    np.testing.assert_array_equal(a.posterior_llr, b.posterior_llr)
    np.testing.assert_array_equal(a.iterations, b.iterations)


def test_min_sum_lanes_float32_statistically_equal(code96):
    # float32 lanes round differently from the scalar float32 kernel (which
    # mixes float64 constants in); decisions agree on almost every frame and
    # the frame error rates agree within sampling noise. 600 frames at FER ~0.3:
    # the two counts share most errors, so a difference of 4 % of frames is
    # far beyond what rounding flips produce (common practice).
    llr = _awgn(code96, 600, 1.5, 41)
    a = lm.make_decoder("min-sum", code96, alpha=0.75, precision="float32",
                        kernel="lanes").decode(llr)
    b = lm.make_decoder("min-sum", code96, alpha=0.75, precision="float32",
                        kernel="scalar").decode(llr)
    assert np.mean(np.all(a.bits == b.bits, axis=1)) > 0.95
    assert abs(a.valid.mean() - b.valid.mean()) < 0.04
    assert 0.05 < 1 - b.valid.mean() < 0.95      # the sample has errors


def test_float32_and_float64_inputs_give_the_same_result(code96):
    llr = _awgn(code96, F_ODD, 2.0, 51).astype(np.float32)
    a = V.decode_float_lanes(code96, llr, mode="min-sum", alpha=0.75)
    b = V.decode_float_lanes(code96, llr.astype(np.float64), mode="min-sum", alpha=0.75)
    for x, y in zip(a, b, strict=True):
        np.testing.assert_array_equal(x, y)


def test_auto_dispatch_and_errors(code96):
    llr = _awgn(code96, F_ODD, 2.0, 61)
    auto = lm.make_decoder("min-sum", code96, alpha=0.75)          # kernel="auto"
    assert auto._use_lanes(F_ODD, 0.0) and not auto._use_lanes(V.LANES - 1, 0.0)
    sp = lm.make_decoder("sum-product", code96)
    assert sp._use_lanes(F_ODD, 0.0) and not sp._use_lanes(V.LANES - 1, 0.0)
    damped = lm.make_decoder("min-sum", code96, damping=0.1)
    assert not damped._use_lanes(F_ODD, 0.0)
    np.testing.assert_array_equal(
        auto.decode(llr).posterior_llr,
        lm.make_decoder("min-sum", code96, alpha=0.75, kernel="scalar").decode(llr).posterior_llr)
    with pytest.raises(InputError, match="damping=0"):
        lm.make_decoder("min-sum", code96, damping=0.1, kernel="lanes").decode(llr)
    with pytest.raises(InputError, match="kernel"):
        lm.make_decoder("min-sum", code96, kernel="simd")
    with pytest.raises(InputError):
        V.decode_fixed_point_lanes(code96, llr, q=9)


# ------------------------------------------------------------ fixed point
def _fixed_reference(H, llr, q, step, q_post, rule, factor, layered, max_iter):
    """Plain integer reference of the shared fixed-point format (written from the spec)."""
    qmax, pmax = 2 ** (q - 1) - 1, 2 ** (q_post - 1) - 1
    rows = [list(np.flatnonzero(r)) for r in H]
    m, n = H.shape
    out_post, out_it, out_ok = [], [], []

    def clip(x, lim):
        return max(-lim, min(lim, x))

    def check(vs):
        res = []
        for k in range(len(vs)):
            others = vs[:k] + vs[k + 1:]
            neg = sum(1 for v in others if v < 0) % 2
            mn = min((abs(v) for v in others), default=qmax)
            mag = max(mn - factor, 0) if rule == "offset" else (factor * mn + 8) >> 4
            res.append(-mag if neg else mag)
        return res

    for row in llr:
        lq = [int(clip(np.rint(x / step), qmax)) for x in row]
        c2v = [[0] * len(r) for r in rows]
        P = list(lq)
        T = list(lq)
        it = 0
        while True:
            hard = [1 if (T[i] if not layered else P[i]) < 0 else 0 for i in range(n)]
            zero = [(T[i] if not layered else P[i]) == 0 for i in range(n)]
            par = [sum(hard[i] for i in r) % 2 for r in rows]
            tie = [any(zero[i] for i in r) for r in rows]
            if not any(p or t for p, t in zip(par, tie, strict=True)):
                ok = True
                break
            if it >= max_iter:
                ok = not any(par)
                break
            if layered:
                for c, r in enumerate(rows):
                    v = [clip(P[i] - c2v[c][k], qmax) for k, i in enumerate(r)]
                    new = check(v)
                    for k, i in enumerate(r):
                        P[i] = clip(v[k] + new[k], pmax)
                    c2v[c] = new
            else:
                new_all = []
                for c, r in enumerate(rows):
                    v = [clip(T[i] - c2v[c][k], qmax) for k, i in enumerate(r)]
                    new_all.append(check(v))
                c2v = new_all
                T = list(lq)
                for c, r in enumerate(rows):
                    for k, i in enumerate(r):
                        T[i] += c2v[c][k]
            it += 1
        reg = P if layered else [clip(t, pmax) for t in T]
        out_post.append([x * step for x in reg])
        out_it.append(it)
        out_ok.append(ok)
    return np.array(out_post), np.array(out_it), np.array(out_ok)


@pytest.mark.parametrize("layered", [False, True])
@pytest.mark.parametrize("rule,opts,factor", [("offset", {"beta_steps": 1}, 1),
                                              ("normalised", {"alpha": 0.75}, 12)])
def test_fixed_point_lanes_bit_exact_against_integer_reference(layered, rule, opts, factor):
    # Spec: /work/tools shared fixed-point format (int8 messages, q = 5, step 0.5,
    # posterior register q + 2 bits); the reference above is plain Python integers.
    H = random_regular_H(48, 3, 6, np.random.default_rng(48))
    code = ParityCheckCode(H)
    llr = np.concatenate([_awgn(code, 40, 1.0, 71), _awgn(code, V.LANES - 10, 3.0, 72)])
    llr[0, :5] = 0.0                                     # erasures quantise to 0
    post, it, ok = V.decode_fixed_point_lanes(code, llr, q=5, step=0.5, rule=rule,
                                              layered=layered, max_iter=20, **opts)
    rp, ri, rok = _fixed_reference(H, llr, 5, 0.5, 7, rule, factor, layered, 20)
    np.testing.assert_array_equal(post, rp)
    np.testing.assert_array_equal(it, ri)
    np.testing.assert_array_equal(ok, rok)
    assert len(np.unique(it)) > 2


def test_quantiser_rounds_half_to_even_and_saturates():
    # numpy rint is round-half-to-even (IEEE 754 default rounding)
    q = V.quantise_llr(np.array([0.25, 0.75, -0.25, 100.0, -100.0, 0.0]), q=4, step=0.5)
    assert q.tolist() == [0, 2, 0, 7, -7, 0]


@pytest.mark.parametrize("scale", [30.0, 1000.0])
@pytest.mark.parametrize("precision,tol", [("float64", 1e-9), ("float32", 1e-4)])
def test_sum_product_lanes_exact_at_large_magnitudes(scale, precision, tol, code96):
    # Scaled LLRs drive cavity magnitudes far past the range where e^{-|v|} is a
    # normal number (the lanes' per-lane shift and the scalar pairwise fallback
    # take over); both are exact box-plus implementations, so the posteriors
    # agree to rounding relative to their size (common practice: BP messages
    # are bounded by the smallest extrinsic magnitude).
    llr = _awgn(code96, F_ODD, 1.0, 12) * scale
    post, _, _ = V.decode_float_lanes(code96, llr, mode="sum-product", max_iter=3,
                                      early_stop=False, precision=precision)
    ref = lm.make_decoder("sum-product", code96, max_iter=3, early_stop=False,
                          kernel="scalar").decode(llr).posterior_llr
    rel = np.abs(post - ref) / np.maximum(np.abs(ref), 1.0)
    assert np.max(rel) < tol


def test_sum_product_lanes_erasures_send_exact_zeros():
    # An erased input (LLR 0) makes every other message of its check exactly 0
    # (tanh(0) = 0 in the product; common practice).
    code = ParityCheckCode(np.ones((1, 4), dtype=np.uint8))
    llr = np.tile(np.array([0.0, 2.0, -3.0, 50.0]), (V.LANES + 3, 1))
    post, _, _ = V.decode_float_lanes(code, llr, mode="sum-product", max_iter=1,
                                      early_stop=False)
    assert np.all(post[:, 1:] == llr[:, 1:])
    # the erased bit gets 2 [+] -3 [+] 50 (pairwise, numpy reference)
    def bp(x, y):
        return 2 * np.arctanh(np.tanh(x / 2) * np.tanh(y / 2))
    assert np.allclose(post[:, 0], bp(bp(2.0, -3.0), 50.0), rtol=1e-12)
