"""Ordered-statistics decoding against exact ML and brute-force references."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from conftest import HAMMING_7_4
from naive import random_regular_H

from ldpcmarg.code import construct
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.decoders.base import make_decoder
from ldpcmarg.engine.stats import clopper_pearson
from ldpcmarg.errors import InputError

GOLAY = construct.golay24()


def awgn_llr(n, rate, ebn0_db, frames, seed):
    """Channel LLRs 2y/sigma^2 of the all-zero word (BPSK +1) at Eb/N0 (dB)."""
    rng = np.random.default_rng(seed)
    sigma = math.sqrt(1.0 / (2.0 * rate * 10.0 ** (ebn0_db / 10.0)))
    y = 1.0 + sigma * rng.standard_normal((frames, n))
    return 2.0 * y / sigma**2


def codebook(H):
    """All codewords of {x : Hx = 0} by enumerating 2**n words (n <= 20)."""
    H = np.asarray(H, dtype=np.int64)
    n = H.shape[1]
    words = np.array(list(itertools.product([0, 1], repeat=n)), dtype=np.int64)
    return words[((words @ H.T) % 2 == 0).all(axis=1)]


def small_ldpc():
    # (3,6)-regular n = 20: rank-deficient H is normal, which the elimination must handle
    rng = np.random.default_rng(5)
    return ParityCheckCode(random_regular_H(20, 3, 6, rng), name="reg-20")


CODES = {
    "hamming74": ParityCheckCode(HAMMING_7_4),
    "golay24": GOLAY,
    "reg20": small_ldpc(),
}


@pytest.mark.parametrize("name", sorted(CODES))
@pytest.mark.parametrize("ebn0", [0.0, 2.0, 4.0])
def test_order_k_is_block_ml(name, ebn0):
    # Order k re-encodes every information pattern, i.e. every codeword, so the
    # decision is block-ML by construction (Fossorier & Lin 1995, Sec. III);
    # the reference is the exact decoder (enumeration / syndrome trellis).
    code = CODES[name]
    llr = awgn_llr(code.n, code.rate, ebn0, 300, seed=11)
    ml = make_decoder("exact", code).decode(llr).bits
    res = make_decoder("osd", code, order=code.k).decode(llr)
    assert res.valid.all()
    assert np.asarray(code.is_codeword(res.bits)).all()
    np.testing.assert_array_equal(res.bits, ml)


@pytest.mark.parametrize("name", ["hamming74", "reg20"])
def test_soft_output_is_list_max_log(name):
    # max-log APP over the full codebook (common practice: L_i = min_{x_i=1} D - min_{x_i=0} D,
    # D(x) = sum_j lambda_j x_j up to a constant), clipped; brute force over the codebook
    code = CODES[name]
    words = codebook(code.H.toarray())
    llr = awgn_llr(code.n, code.rate, 1.0, 100, seed=3)
    clip = 12.0
    res = make_decoder(f"osd:order={code.k},soft=true,soft_clip={clip}", code).decode(llr)
    E = llr @ words.T  # (F, |C|)
    for i in range(code.n):
        m0 = np.where(words[:, i] == 0, E, np.inf).min(axis=1)
        m1 = np.where(words[:, i] == 1, E, np.inf).min(axis=1)
        with np.errstate(invalid="ignore"):
            ref = np.clip(m1 - m0, -clip, clip)
        ref = np.where(np.isnan(ref), 0.0, ref)
        np.testing.assert_allclose(res.posterior_llr[:, i], ref, atol=1e-9)
    assert make_decoder("osd", code).hard_output
    assert make_decoder("osd:soft=true", code).decode(llr).posterior_llr is not None


@pytest.mark.slow
@pytest.mark.parametrize("ebn0", [1.0, 2.0, 3.0])
def test_order2_golay_matches_ml_fer(ebn0):
    # Fossorier & Lin 1995: order ceil(d/4 - 1) = 1 is asymptotically ML for d = 8, so
    # order 2 must have the FER of exact ML: its estimate lies inside the 99%
    # Clopper-Pearson interval of the ML FER on the same frames.
    frames = {1.0: 1000, 2.0: 1500, 3.0: 2500}[ebn0]  # about 25+ ML errors each
    llr = awgn_llr(24, 0.5, ebn0, frames, seed=int(ebn0 * 10))
    ml = make_decoder("exact", GOLAY).decode(llr).bits.any(axis=1)
    osd = make_decoder("osd:order=2", GOLAY).decode(llr).bits.any(axis=1)
    lo, hi = clopper_pearson(int(ml.sum()), frames, 0.99)
    assert ml.sum() >= 10  # the point carries information
    assert lo <= osd.mean() <= hi
    # order 2 can only lose where ML is right if it misses the ML word
    assert (osd & ~ml).sum() <= (ml.sum() // 10) + 2


def test_low_order_is_worse_but_valid():
    # order 0 re-encodes the hard decisions on the most reliable basis: always a
    # codeword, and never more likely than the order-k (ML) word (common practice)
    llr = awgn_llr(24, 0.5, 1.0, 400, seed=9)
    ml = make_decoder("osd", GOLAY, order=12).decode(llr)
    o0 = make_decoder("osd", GOLAY, order=0).decode(llr)
    assert o0.valid.all() and np.asarray(GOLAY.is_codeword(o0.bits)).all()
    cost = lambda bits: (llr * bits).sum(axis=1)  # noqa: E731
    assert (cost(o0.bits) >= cost(ml.bits) - 1e-9).all()
    assert (o0.bits != ml.bits).any(axis=1).sum() > 0
    assert (o0.info["osd_patterns"] == 1).all()


def test_probabilistic_stopping_rule():
    # With stop_prob = q, phase w runs unless P(>= w errors on the basis | y) < q, so
    # per frame the chance of losing the sent word grows by at most q (module notes).
    # Frames lost relative to the full search: binomial with p <= q; allow mean + 4 sd.
    code = construct.peg(96, 48, 3, seed=2)
    frames, q = 2000, 0.01
    llr = awgn_llr(code.n, code.rate, 2.5, frames, seed=4)
    full = make_decoder("osd:order=2", code).decode(llr)
    fast = make_decoder("osd:order=2,stop_prob=0.01", code).decode(llr)
    lost = (fast.bits.any(axis=1) & ~full.bits.any(axis=1)).sum()
    assert lost <= frames * q + 4 * math.sqrt(frames * q)
    assert fast.info["osd_patterns"].sum() < full.info["osd_patterns"].sum()
    assert (fast.iterations <= 2).all() and (fast.iterations < 2).any()


def test_options_and_errors():
    dec = make_decoder("osd:order=1", GOLAY)
    assert dec.spec == "osd:order=1"
    assert make_decoder("osd", GOLAY).options["order"] == 2
    with pytest.raises(InputError, match="order"):
        make_decoder("osd", GOLAY, order=13)
    with pytest.raises(InputError, match="order"):
        make_decoder("osd", GOLAY, order=-1)
    with pytest.raises(InputError, match="stop_prob"):
        make_decoder("osd:stop_prob=1.5", GOLAY)
    one = make_decoder("osd", GOLAY).decode(np.ones(24))
    assert one.bits.shape == (1, 24) and not one.bits.any()
