"""Exact posteriors: enumeration vs syndrome trellis vs a naive direct sum.

The naive reference builds the full codebook independently (all 2**n words
filtered by H x = 0, or, for the self-dual extended Golay code, the row space
of H) and takes ``scipy.special.logsumexp`` over it.
"""

from __future__ import annotations

import itertools
import pickle

import numpy as np
import pytest
from conftest import HAMMING_7_4
from scipy.special import logsumexp

from ldpcmarg.code import construct
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.decoders.base import make_decoder
from ldpcmarg.decoders.exact import choose_method, exact_posteriors
from ldpcmarg.errors import InputError


def random_H(m, n, density, seed):
    rng = np.random.default_rng(seed)
    H = (rng.random((m, n)) < density).astype(np.uint8)
    return H


def codebook_brute(H):
    H = np.asarray(H, dtype=np.int64)
    n = H.shape[1]
    words = np.array(list(itertools.product([0, 1], repeat=n)), dtype=np.int64)
    return words[((words @ H.T) % 2 == 0).all(axis=1)]


def codebook_golay(code):
    """Extended Golay is self-dual (MacWilliams & Sloane, ch. 2): C = row space of H."""
    G = code.H.toarray().astype(np.int64)
    msgs = np.array(list(itertools.product([0, 1], repeat=G.shape[0])), dtype=np.int64)
    words = np.unique((msgs @ G) % 2, axis=0)
    assert words.shape[0] == 2**12
    assert not ((words @ G.T) % 2).any()
    return words


def direct(words, llr):
    """ln Z, p1 and ML words by a direct log-domain sum over the codebook."""
    E = -(llr @ words.T)  # (F, |C|)
    lnz = logsumexp(E, axis=1)
    p1 = np.exp(logsumexp(E[:, :, None], b=words[None, :, :], axis=1) - lnz[:, None])
    ml = words[np.argmax(E, axis=1)]
    return lnz, p1, ml


GOLAY = construct.golay24()
CASES = {
    "hamming74": (ParityCheckCode(HAMMING_7_4), codebook_brute(HAMMING_7_4)),
    # small k: 18 bits, 14 checks (k = 4 or so)
    "small-k": (ParityCheckCode(random_H(14, 18, 0.3, 1)),
                codebook_brute(random_H(14, 18, 0.3, 1))),
    # small n - k: 18 bits, 5 checks
    "small-r": (ParityCheckCode(random_H(5, 18, 0.35, 2)),
                codebook_brute(random_H(5, 18, 0.35, 2))),
    "golay24": (GOLAY, codebook_golay(GOLAY)),
}


def test_golay_is_golay():
    # weight enumerator 1 + 759 z^8 + 2576 z^12 + 759 z^16 + z^24 (MacWilliams & Sloane)
    w = CASES["golay24"][1].sum(axis=1)
    counts = np.bincount(w, minlength=25)
    assert {int(i): int(c) for i, c in enumerate(counts) if c} == {
        0: 1, 8: 759, 12: 2576, 16: 759, 24: 1}


@pytest.mark.parametrize("name", sorted(CASES))
def test_methods_agree_and_match_direct_sum(name, seed):
    code, words = CASES[name]
    rng = np.random.default_rng(500 + seed)
    # BPSK-AWGN LLRs of a random codeword at a moderate SNR (sigma = 0.8)
    x = words[rng.integers(len(words), size=6)]
    sigma = 0.8
    llr = 2 * ((1 - 2 * x) + sigma * rng.normal(size=x.shape)) / sigma**2
    a = exact_posteriors(code, llr, "enumerate")
    b = exact_posteriors(code, llr, "trellis")
    assert a.method == "enumerate" and b.method == "trellis"
    # both are exact: agreement to round-off
    assert np.max(np.abs(a.p1 - b.p1)) < 1e-10
    assert np.max(np.abs(a.log_partition - b.log_partition)) < 1e-10
    assert np.allclose(a.posterior_llr, b.posterior_llr, rtol=1e-10, atol=1e-10)
    assert np.array_equal(a.ml_bits, b.ml_bits)
    lnz, p1, ml = direct(words, llr)
    assert np.max(np.abs(a.log_partition - lnz)) < 1e-10
    assert np.max(np.abs(a.p1 - p1)) < 1e-10
    assert np.array_equal(a.ml_bits, ml.astype(np.uint8))
    assert code.is_codeword(a.ml_bits).all()


@pytest.mark.parametrize("name", ["hamming74", "golay24", "small-r"])
def test_stable_at_huge_llrs(name):
    code, words = CASES[name]
    rng = np.random.default_rng(8)
    llr = 1e4 * np.sign(rng.normal(size=(4, code.n))) * rng.uniform(0.5, 1.0, size=(4, code.n))
    llr[0] = 1e4  # all-zero word overwhelmingly likely
    a = exact_posteriors(code, llr, "enumerate")
    b = exact_posteriors(code, llr, "trellis")
    for r in (a, b):
        assert np.all(np.isfinite(r.posterior_llr)) and np.all(np.isfinite(r.log_partition))
        assert np.all((r.p1 >= 0) & (r.p1 <= 1))
    lnz, _, ml = direct(words, llr)
    assert np.allclose(a.log_partition, lnz, rtol=1e-12, atol=1e-9)
    assert np.allclose(b.log_partition, lnz, rtol=1e-12, atol=1e-9)
    assert np.array_equal(a.ml_bits, ml.astype(np.uint8))
    assert np.array_equal(b.ml_bits, ml.astype(np.uint8))
    # posterior LLRs are differences of log sums of order 1e4: relative agreement
    assert np.allclose(a.posterior_llr, b.posterior_llr, rtol=1e-12, atol=1e-8)
    # the all-zero frame with lambda = 1e4 everywhere: the x_i = 1 sum is dominated by
    # the A_i lightest codewords covering bit i, of weight w_i (heavier ones are
    # e^-1e4 smaller), and the x_i = 0 sum by the zero word, so
    # LLR_i = 1e4 * w_i - ln A_i to round-off
    weights = words.sum(axis=1)
    for i in range(code.n):
        wi = weights[words[:, i] == 1]
        expected = 1e4 * wi.min() - np.log(np.sum(wi == wi.min()))
        assert a.posterior_llr[0, i] == pytest.approx(expected, abs=1e-8)


def test_free_and_frozen_bits():
    # bit 3 is in no check (posterior = prior); bit 0 alone in a check (always 0)
    H = np.array([[1, 0, 0, 0], [0, 1, 1, 0]], dtype=np.uint8)
    code = ParityCheckCode(H)
    llr = np.array([[-2.0, 0.3, -1.1, 0.7]])
    for method in ("enumerate", "trellis"):
        r = exact_posteriors(code, llr, method)
        # posterior of an unconstrained bit equals its prior: p1 = 1 / (1 + e^llr)
        assert r.p1[0, 3] == pytest.approx(1 / (1 + np.exp(0.7)), abs=1e-15)
        assert r.p1[0, 0] == 0.0 and r.posterior_llr[0, 0] == np.inf
        # bits 1 and 2 are equal: LLR = 0.3 + (-1.1)
        assert r.posterior_llr[0, 1] == pytest.approx(-0.8, abs=1e-12)


def test_auto_choice_and_refusal():
    assert choose_method(CASES["small-k"][0]) == "enumerate"
    assert choose_method(CASES["small-r"][0]) == "trellis"
    big = ParityCheckCode(random_H(30, 60, 0.2, 3))
    assert big.k > 24 and big.rank > 24
    with pytest.raises(InputError, match=r"n = 60, k = \d+, rank = \d+"):
        exact_posteriors(big, np.zeros(60))
    with pytest.raises(InputError, match="enumeration"):
        exact_posteriors(ParityCheckCode(random_H(2, 30, 0.5, 4)), np.zeros(30), "enumerate")
    with pytest.raises(InputError, match="method"):
        exact_posteriors(GOLAY, np.zeros(24), "magic")


def test_exact_decoder():
    code, words = CASES["golay24"]
    rng = np.random.default_rng(21)
    llr = (1.0 + 1.2 * rng.normal(size=(5, 24))).astype(np.float32)
    dec = pickle.loads(pickle.dumps(make_decoder("exact", code)))
    res = dec.decode(llr)
    ref = exact_posteriors(code, llr.astype(np.float64))
    assert np.array_equal(res.bits, ref.ml_bits)
    assert np.allclose(res.posterior_llr, ref.posterior_llr, rtol=0, atol=1e-12)
    assert np.allclose(res.posterior_p1, ref.p1, rtol=0, atol=1e-12)
    assert np.allclose(res.info["log_partition"], ref.log_partition)
    assert res.valid.all()
    assert np.array_equal(res.info["bitwise_map"], (ref.p1 > 0.5).astype(np.uint8))
    with pytest.raises(InputError):
        make_decoder("exact:method=trellis", ParityCheckCode(random_H(30, 60, 0.2, 3)))


@pytest.mark.parametrize("name", ["hamming74", "golay24"])
def test_exact_at_every_representable_scale_or_clear_refusal(name):
    # Reproduction from a reliability report: LLRs of +-1.7e308 gave NaN for every
    # posterior and ln Z. Below the documented bound (sum of |LLR| <= 1e300) the
    # log-domain sums are finite and exact: LLRs scaled by 1e290 must give finite
    # results whose ML word equals the unscaled ML word (the minimiser of a linear
    # objective does not depend on a positive scale); above it, a clear InputError.
    code, words = CASES[name]
    rng = np.random.default_rng(9)
    llr = rng.normal(1.0, 1.5, size=(5, code.n))
    base = exact_posteriors(code, llr, "enumerate")
    for method in ("enumerate", "trellis"):
        big = exact_posteriors(code, llr * 1e290, method)
        assert np.all(np.isfinite(big.posterior_llr)) and np.all(np.isfinite(big.log_partition))
        np.testing.assert_array_equal(big.ml_bits, base.ml_bits)
        # ln Z -> -min_x sum lambda_i x_i at low temperature (Laplace's method)
        lnz, _, _ = direct(words, llr * 1e290)
        np.testing.assert_allclose(big.log_partition, lnz, rtol=1e-12)
        with pytest.raises(InputError, match="too large for exact posteriors"):
            exact_posteriors(code, np.full((1, code.n), -1.7e308), method)


def test_posteriors_cli_refuses_overflowing_llrs(tmp_path):
    # Seen in the CLI: `posteriors -d exact` printed NaN posteriors and exited 0.
    import subprocess
    import sys

    llr_file = tmp_path / "huge.npy"
    np.save(llr_file, np.full((3, 24), 1.7e308))
    out = tmp_path / "post.npz"
    res = subprocess.run([sys.executable, "-m", "ldpcmarg", "posteriors", "golay-24-12",
                          str(llr_file), "-d", "exact", "-o", str(out)],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 2, res.stderr
    assert "Traceback" not in res.stderr
    assert "too large for exact posteriors" in res.stderr
    assert not out.exists()
