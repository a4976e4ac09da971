"""Fixed-point min-sum decoders against a plain integer reference written here.

The reference below follows the shared fixed-point message format step by
step with Python integers and lists (no numba, no shared code with
``ldpcmarg.decoders.fixed_point``); the decoders must agree bit for bit:
same posterior registers, iterations and validity flags.
"""

from __future__ import annotations

import numpy as np
import pytest

from ldpcmarg import make_decoder
from ldpcmarg.code.construct import random_regular
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import InputError
from ldpcmarg.link.channels import make_channel


def _clip(x, lim):
    return max(-lim, min(lim, x))


def _sgn_neg(m):
    return m < 0  # s(m) = -1 iff m < 0 (0 counts as positive)


def _reference(llr_row, checks, n, q, step, q_post, rule, alpha_a, beta, max_iter, layered):
    """Plain integer reference of the format for one frame -> (P list, iterations, valid)."""
    qmax = 2 ** (q - 1) - 1
    pmax = 2 ** (q_post - 1) - 1
    lev = [int(_clip(int(np.rint(float(v) / step)), qmax)) for v in llr_row]

    def check_out(v2c):
        out = []
        for k in range(len(v2c)):
            others = v2c[:k] + v2c[k + 1:]
            neg = sum(1 for m in others if _sgn_neg(m)) % 2
            # the minimum over no edges (a degree-1 check) is the saturated level QMAX,
            # as the float decoders send LLR_MAX (spec: "the result is within +-QMAX")
            mn = min(abs(m) for m in others) if others else qmax
            if rule == "offset":
                mag = max(mn - beta, 0)
            else:
                mag = (alpha_a * mn + 8) // 16  # >> 4 on a non-negative value
            out.append(-mag if neg else mag)
        return out

    def is_open(P):
        for row in checks:
            if any(P[i] == 0 for i in row) or sum(1 for i in row if P[i] < 0) % 2:
                return True
        return False

    def satisfied(P):
        return all(sum(1 for i in row if P[i] < 0) % 2 == 0 for row in checks)

    c2v = [[0] * len(row) for row in checks]
    if layered:
        P = list(lev)
    else:
        total = list(lev)
        P = [_clip(t, pmax) for t in total]
    it = 0
    while True:
        if not is_open(P):
            return P, it, True
        if it >= max_iter:
            break
        if layered:
            for c, row in enumerate(checks):
                v2c = [_clip(P[i] - c2v[c][k], qmax) for k, i in enumerate(row)]
                new = check_out(v2c)
                for k, i in enumerate(row):
                    P[i] = _clip(v2c[k] + new[k], pmax)
                c2v[c] = new
        else:
            new_all = []
            for c, row in enumerate(checks):
                v2c = [_clip(total[i] - c2v[c][k], qmax) for k, i in enumerate(row)]
                new_all.append(check_out(v2c))
            c2v = new_all
            total = list(lev)
            for c, row in enumerate(checks):
                for k, i in enumerate(row):
                    total[i] += c2v[c][k]
            P = [_clip(t, pmax) for t in total]
        it += 1
    return P, it, satisfied(P)


def _rows(code):
    H = code.H.tocsr()
    return [list(H.indices[H.indptr[r]:H.indptr[r + 1]]) for r in range(code.m)]


@pytest.fixture(scope="module")
def small_code():
    return random_regular(96, 3, 6, seed=3)


CASES = [
    ("fixed-min-sum", dict(q=3, step=0.6), "norm", False),
    ("fixed-min-sum", dict(q=5, step=0.5, alpha=0.8), "norm", False),
    ("fixed-offset-min-sum", dict(q=6, step=0.4, beta=1), "offset", False),
    ("fixed-offset-min-sum", dict(q=8, step=0.1, beta=2, q_post=9), "offset", False),
    ("fixed-layered-min-sum", dict(q=4, step=0.7, alpha=0.75), "norm", True),
    ("fixed-layered-min-sum", dict(q=8, step=0.05), "norm", True),
    ("fixed-layered-offset-min-sum", dict(q=5, step=0.5, beta=1, q_post=6), "offset", True),
    ("fixed-layered-offset-min-sum", dict(q=7, step=0.25, beta=0), "offset", True),
]


@pytest.mark.parametrize("kernel", ["scalar", "lanes"])
@pytest.mark.parametrize("name,opts,rule,layered", CASES)
def test_bit_exact_against_integer_reference(small_code, name, opts, rule, layered, kernel):
    code = small_code
    # a noisy point (many frames fail and run to max_iter) plus erased and saturated bits
    ch = make_channel("awgn", ebn0_db=1.5, rate=code.rate)
    rng = np.random.default_rng(7)
    cw = np.zeros((12, code.n), dtype=np.uint8)
    llr = ch.sample_llr(cw, rng)
    llr[0, :5] = 0.0          # punctured/erased bits enter as 0
    llr[1, :3] = 1.0e4        # shortened bits saturate at +QMAX
    llr[2] = np.round(llr[2] / opts["step"] - 0.5) * opts["step"] + 0.5 * opts["step"]  # ties
    dec = make_decoder(name, code, max_iter=15, kernel=kernel, **opts)
    res = dec.decode(llr)
    q = opts["q"]
    q_post = opts.get("q_post", q + 2)
    a = round(16 * opts.get("alpha", 1.0))
    rows = _rows(code)
    for f in range(llr.shape[0]):
        P, it, ok = _reference(llr[f], rows, code.n, q, opts["step"], q_post, rule, a,
                               opts.get("beta", 0), 15, layered)
        np.testing.assert_array_equal(res.posterior_llr[f], np.asarray(P) * opts["step"])
        assert res.iterations[f] == it
        assert bool(res.valid[f]) == ok
        np.testing.assert_array_equal(res.bits[f], (np.asarray(P) < 0).astype(np.uint8))


def test_fine_fixed_point_matches_float_min_sum(seed):
    """q = 8 with a fine step decides like float min-sum on >= 99 % of frames.

    Common practice: an 8-bit min-sum with enough range is indistinguishable
    from floating point. The step 1/8 keeps the channel LLRs (mean ~6.6,
    std ~3.6 at this point) well inside the +-15.9 message range.
    """
    code = random_regular(504, 3, 6, seed=1)
    ch = make_channel("awgn", ebn0_db=3.0, rate=code.rate)
    llr = ch.sample_llr(np.zeros((600, code.n), dtype=np.uint8), np.random.default_rng(seed))
    fx = make_decoder("fixed-min-sum:q=8,step=0.125", code).decode(llr)
    fl = make_decoder("min-sum", code).decode(llr)
    same = np.mean(np.all(fx.bits == fl.bits, axis=1))
    assert same >= 0.99


def test_spec_roundtrip_and_effective_alpha(small_code):
    d = make_decoder("fixed-min-sum:q=5,alpha=0.8", small_code)
    assert d.effective_alpha == 13 / 16  # round(12.8) = 13
    assert make_decoder(d.spec, small_code).spec == d.spec
    assert d.pmax == 2 ** 6 - 1  # q_post defaults to q + 2


@pytest.mark.parametrize("spec", ["fixed-min-sum:q=2", "fixed-min-sum:q=9",
                                  "fixed-min-sum:step=0", "fixed-min-sum:q=6,q_post=5",
                                  "fixed-min-sum:alpha=0.01", "fixed-offset-min-sum:beta=-1"])
def test_bad_options(small_code, spec):
    with pytest.raises(InputError):
        make_decoder(spec, small_code)


def test_symmetric_under_codeword_translation(small_code):
    """Sign flips of a codeword's bits flip the posterior signs (integer symmetry)."""
    code = small_code
    rng = np.random.default_rng(2)
    msg = rng.integers(0, 2, size=(8, code.k), dtype=np.uint8)
    cw = code.encoder.encode(msg)
    ch = make_channel("awgn", ebn0_db=2.0, rate=code.rate)
    l0 = ch.sample_llr(np.zeros_like(cw), rng)
    dec = make_decoder("fixed-offset-min-sum:q=5", code)
    r0 = dec.decode(l0)
    r1 = dec.decode(l0 * (1.0 - 2.0 * cw))
    np.testing.assert_array_equal(r1.posterior_llr, r0.posterior_llr * (1.0 - 2.0 * cw))
    np.testing.assert_array_equal(r1.iterations, r0.iterations)


# ------------------------------------------------- degree-1 checks (empty minimum)
def _with_short_checks(code):
    """``code`` plus a degree-1 check on bit 5 and a degree-2 check on bits 7 and 40."""
    extra = np.zeros((2, code.n), dtype=np.uint8)
    extra[0, 5] = 1
    extra[1, [7, 40]] = 1
    return ParityCheckCode(np.vstack([code.H.toarray(), extra]), name="short-checks")


@pytest.fixture(scope="module")
def short_check_code(small_code):
    return _with_short_checks(small_code)


@pytest.mark.parametrize("kernel", ["scalar", "lanes"])
@pytest.mark.parametrize("name", ["fixed-min-sum", "fixed-offset-min-sum",
                                  "fixed-layered-min-sum", "fixed-layered-offset-min-sum"])
def test_degree_one_check_sends_the_saturated_level(name, kernel):
    # A degree-1 check says its bit is 0 with certainty (parity of one bit); the
    # empty minimum is QMAX, so it sends +QMAX (offset: QMAX - beta), never a
    # wrapped-around int8. Two such checks on two bits, q = 5 (QMAX = 15):
    # l = -1 turns into -1 + 15 (alpha = 1) or -1 + 14 (beta = 1) after one iteration.
    code = ParityCheckCode(np.eye(2, dtype=np.uint8), name="two-unit-checks")
    dec = make_decoder(name, code, q=5, step=1.0, max_iter=5, kernel=kernel)
    P, it, ok = dec.decode_levels(np.array([[-1, 3]], dtype=np.int8))
    sent = 15 - (1 if "offset" in name else 0)
    assert P.tolist() == [[-1 + sent, 3 + sent]]
    assert it.tolist() == [1] and ok.tolist() == [True]


@pytest.mark.parametrize("kernel", ["scalar", "lanes"])
@pytest.mark.parametrize("name,opts,rule,layered", CASES[::2])
def test_short_checks_bit_exact_against_integer_reference(short_check_code, name, opts, rule,
                                                           layered, kernel):
    code = short_check_code
    llr = make_channel("awgn", ebn0_db=2.0, rate=0.5).sample_llr(
        np.zeros((6, code.n), dtype=np.uint8), np.random.default_rng(11))
    llr[:, 5] = -2.0   # the bit of the degree-1 check starts wrong
    res = make_decoder(name, code, max_iter=12, kernel=kernel, **opts).decode(llr)
    a = round(16 * opts.get("alpha", 1.0))
    rows = _rows(code)
    for f in range(llr.shape[0]):
        P, it, ok = _reference(llr[f], rows, code.n, opts["q"], opts["step"],
                               opts.get("q_post", opts["q"] + 2), rule, a,
                               opts.get("beta", 0), 12, layered)
        np.testing.assert_array_equal(res.posterior_llr[f], np.asarray(P) * opts["step"])
        assert (res.iterations[f], bool(res.valid[f])) == (it, ok)


# -------------------------------------------------------- lanes against scalar
LANES = 64  # lane width of ldpcmarg.decoders.vectorised (checked below)


def _hard_frames(code, step, frames, seed):
    """Frames that exercise every branch: noise at several SNRs (frames that stop
    at different iterations or run to max_iter), erasures, all-zero input,
    saturated inputs (beyond LLR_MAX too) of both signs, exact half-step ties."""
    rng = np.random.default_rng(seed)
    parts = [make_channel("awgn", ebn0_db=eb, rate=code.rate).sample_llr(
        np.zeros((frames // 4 + 1, code.n), dtype=np.uint8), rng) for eb in (1.0, 2.0, 3.0, 4.5)]
    llr = np.concatenate(parts)[:frames]
    n = code.n
    llr[0] = 0.0                                          # every bit erased
    llr[1, rng.random(n) < 0.15] = 0.0                    # scattered erasures
    llr[2, :] = 1.0e4                                     # saturated, right: stops at 0
    llr[3] = np.where(rng.random(n) < 0.1, -1.0e4, 1.0e4)  # saturated, some wrong
    llr[4, :8] = 5.0e4                                    # beyond LLR_MAX: clipped first
    llr[4, 8:12] = -5.0e4
    llr[5] = (rng.integers(-4, 4, size=n) + 0.5) * step   # ties at every bit
    llr[6, : n // 2] = 0.5 * step                         # rint(0.5) = 0: tied at zero
    llr[7] = np.where(rng.random(n) < 0.5, 1.0, -1.0) * step  # many equal magnitudes
    return llr


def _assert_same(a, b):
    np.testing.assert_array_equal(a.posterior_llr, b.posterior_llr)
    np.testing.assert_array_equal(a.iterations, b.iterations)
    np.testing.assert_array_equal(a.valid, b.valid)
    np.testing.assert_array_equal(a.bits, b.bits)


@pytest.mark.parametrize("q", [3, 4, 5, 6, 7, 8])
@pytest.mark.parametrize("name,extra", [
    ("fixed-min-sum", {"alpha": 0.78125}),          # 16 alpha = 12.5 -> a = 12 (half to even)
    ("fixed-offset-min-sum", {"beta": 1}),
    ("fixed-layered-min-sum", {"alpha": 0.84375}),  # 13.5 -> 14
    ("fixed-layered-offset-min-sum", {"beta": 1}),
])
def test_lanes_equal_scalar_bit_for_bit(short_check_code, name, extra, q):
    """The int8 lane kernels and the scalar kernels implement one arithmetic: the same
    posterior registers, iterations and validity on every frame (batch of 101 frames,
    not a multiple of the 64 lanes, so the last lane group runs partly empty)."""
    code = short_check_code
    step = 6.0 / (2 ** (q - 1) - 1)   # messages reach LLR 6 at every q
    llr = _hard_frames(code, step, LANES + 37, 5)
    opts = dict(q=q, step=step, max_iter=20, **extra)
    lanes = make_decoder(name, code, kernel="lanes", **opts)
    scalar = make_decoder(name, code, kernel="scalar", **opts)
    ra, rs = lanes.decode(llr), scalar.decode(llr)
    _assert_same(ra, rs)
    # the frames did what they are there for
    # (stops at two or more iterations strictly between 0 and max_iter, and failures)
    assert len(set(rs.iterations.tolist()) - {0, 20}) >= 2 and rs.iterations.max() == 20
    assert rs.iterations[2] == 0 and not rs.valid.all()
    # integer levels in, int16 registers out: the same on both paths
    lev = scalar.quantize(llr)
    for x, y in zip(lanes.decode_levels(lev[:LANES - 1]), scalar.decode_levels(lev[:LANES - 1]),
                    strict=True):
        np.testing.assert_array_equal(x, y)


@pytest.mark.parametrize("frames", [1, LANES - 1, LANES, 2 * LANES + 1])
def test_lanes_equal_scalar_at_any_batch_size(short_check_code, frames):
    code = short_check_code
    llr = _hard_frames(code, 0.5, max(frames, 8), 9)[:frames]
    opts = dict(q=6, step=0.5, max_iter=15)
    for name in ("fixed-offset-min-sum", "fixed-layered-min-sum"):
        _assert_same(make_decoder(name, code, kernel="lanes", **opts).decode(llr),
                     make_decoder(name, code, kernel="scalar", **opts).decode(llr))


def test_two_threads_give_the_same_result(short_check_code):
    # lane groups are dealt to threads; results must not depend on the split
    llr = _hard_frames(short_check_code, 0.5, 3 * LANES + 5, 13)
    one = make_decoder("fixed-min-sum:kernel=lanes,threads=1", short_check_code).decode(llr)
    two = make_decoder("fixed-min-sum:kernel=lanes,threads=2", short_check_code).decode(llr)
    _assert_same(one, two)


def test_auto_kernel_dispatch(small_code):
    from ldpcmarg.decoders import vectorised

    assert vectorised.LANES == LANES
    auto = make_decoder("fixed-layered-offset-min-sum", small_code)
    assert auto.options["kernel"] == "auto"
    assert auto._use_lanes(LANES) and not auto._use_lanes(LANES - 1)
    assert not make_decoder("fixed-min-sum:kernel=scalar", small_code)._use_lanes(10 * LANES)
    assert make_decoder("fixed-min-sum:kernel=lanes", small_code)._use_lanes(1)
    with pytest.raises(InputError, match="kernel"):
        make_decoder("fixed-min-sum:kernel=simd", small_code)


def test_lane_function_reads_alpha_like_the_decoders(small_code):
    # decode_fixed_point_lanes (public) and the decoder round 16 alpha the same way
    from ldpcmarg.decoders.vectorised import decode_fixed_point_lanes

    llr = _hard_frames(small_code, 0.5, 70, 17)
    for alpha in (0.78125, 0.84375, 0.7):
        post, it, ok = decode_fixed_point_lanes(small_code, llr, q=6, step=0.5,
                                                rule="normalised", alpha=alpha, max_iter=10)
        res = make_decoder("fixed-min-sum", small_code, q=6, step=0.5, alpha=alpha,
                           max_iter=10, kernel="scalar").decode(llr)
        np.testing.assert_array_equal(post, res.posterior_llr)
        np.testing.assert_array_equal(it, res.iterations)
        np.testing.assert_array_equal(ok, res.valid)


def test_simulate_takes_the_lanes_for_large_chunks(small_code, monkeypatch):
    """A sweep in this process: the default kernel sends the sub-batches of 64+
    frames to the lanes, and the counts equal those of the scalar kernel."""
    from ldpcmarg.decoders import vectorised
    from ldpcmarg.engine.simulate import StopRule, simulate

    sizes = []
    real = vectorised.decode_fixed_point_levels_lanes

    def counting(code, levels, **kw):
        sizes.append(levels.shape[0])
        return real(code, levels, **kw)

    monkeypatch.setattr(vectorised, "decode_fixed_point_levels_lanes", counting)
    decs = ["fixed-offset-min-sum:q=5", "fixed-offset-min-sum:q=5,kernel=scalar"]
    res = simulate(small_code, decs, [1.5, 2.5], seed=4, workers=1, chunk_frames=1500,
                   stop=StopRule(frame_errors=10**6, max_frames=1500))
    assert sizes and min(sizes) >= LANES   # the lanes ran, and only on batches of 64+
    by = {}
    for p in res.points:
        by.setdefault(p.decoder, []).append((p.frames, p.frame_errors, p.bit_errors))
    lanes, scalar = (by[make_decoder(d, small_code).spec] for d in decs)
    assert lanes == scalar and len(lanes) == 2 and lanes[0][1] > 0
