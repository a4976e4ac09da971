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
            mn = min(abs(m) for m in others) if others else 0
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


@pytest.mark.parametrize("name,opts,rule,layered", CASES)
def test_bit_exact_against_integer_reference(small_code, name, opts, rule, layered):
    code = small_code
    # a noisy point (many frames fail and run to max_iter) plus erased and saturated bits
    ch = make_channel("awgn", ebn0_db=1.5, rate=code.rate)
    rng = np.random.default_rng(7)
    cw = np.zeros((12, code.n), dtype=np.uint8)
    llr = ch.sample_llr(cw, rng)
    llr[0, :5] = 0.0          # punctured/erased bits enter as 0
    llr[1, :3] = 1.0e4        # shortened bits saturate at +QMAX
    llr[2] = np.round(llr[2] / opts["step"] - 0.5) * opts["step"] + 0.5 * opts["step"]  # ties
    dec = make_decoder(name, code, max_iter=15, **opts)
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
