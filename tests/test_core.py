"""Core model, channels and registry basics."""

from __future__ import annotations

import math
import pickle

import numpy as np
import pytest

import ldpcmarg as lm
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import InputError


def test_hamming_dimensions(hamming74):
    assert (hamming74.n, hamming74.m, hamming74.k) == (7, 3, 4)
    assert hamming74.num_edges == 12
    # every even-weight pattern on a degree-4 check: 2^3 of them
    assert hamming74.local_codewords().count == 3 * 8


def test_edge_arrays_consistent(hamming74):
    c = hamming74
    dense = c.H.toarray()
    for e in range(c.num_edges):
        assert dense[c.edge_check[e], c.edge_var[e]] == 1
    for i in range(c.n):
        edges = c.var_edges[c.var_ptr[i]:c.var_ptr[i + 1]]
        assert np.all(c.edge_var[edges] == i)
        assert np.all(np.diff(c.edge_check[edges]) > 0)


def test_local_codewords_are_even(hamming74):
    lc = hamming74.local_codewords()
    for ch in range(hamming74.m):
        pats = lc.patterns(ch, int(hamming74.check_degrees[ch]))
        assert pats.shape == (8, 4)
        assert np.all(pats.sum(axis=1) % 2 == 0)
        assert len({tuple(p) for p in pats}) == 8


def test_rejects_bad_matrices():
    with pytest.raises(InputError, match="binary"):
        ParityCheckCode(np.array([[1, 2, 0]]))
    with pytest.raises(InputError, match="empty"):
        ParityCheckCode(np.zeros((0, 3)))
    import scipy.sparse as sp
    dup = sp.coo_matrix((np.array([1, 1]), (np.array([0, 0]), np.array([1, 1]))), shape=(1, 3))
    with pytest.raises(InputError, match="duplicate"):
        ParityCheckCode(dup)


def test_pickle_round_trip(hamming74):
    c2 = pickle.loads(pickle.dumps(hamming74))
    assert c2.fingerprint == hamming74.fingerprint
    assert (c2.H != hamming74.H).nnz == 0


def test_awgn_sigma_formula():
    # sigma^2 = 1 / (2 R 10^(EbN0/10)) (DESIGN conventions; standard BPSK link budget)
    ch = lm.make_channel("awgn", ebn0_db=3.0, rate=0.5)
    assert math.isclose(ch.sigma**2, 1.0 / (2 * 0.5 * 10 ** 0.3))
    assert math.isclose(ch.esn0_db, 3.0 + 10 * math.log10(0.5))


def test_channel_llr_signs_and_no_nan():
    rng = np.random.default_rng(5)
    zeros = np.zeros((3, 50), dtype=np.uint8)
    bec = lm.make_channel("bec", epsilon=0.4)
    llr = bec.sample_llr(zeros, rng)
    assert np.all(np.isfinite(llr)) and np.all(llr >= 0)
    assert np.any(llr == 0)
    bsc = lm.make_channel("bsc", p=0.1)
    llr = bsc.llr(np.array([0, 1]))
    assert llr[0] == pytest.approx(math.log(9)) and llr[1] == pytest.approx(-math.log(9))


def test_registry_errors(hamming74):
    with pytest.raises(InputError, match="Unknown decoder"):
        lm.make_decoder("no-such-decoder", hamming74)
    with pytest.raises(InputError, match="no option"):
        lm.make_decoder("hard-decision:alpha=1", hamming74)
    dec = lm.make_decoder("hard-decision", hamming74)
    with pytest.raises(InputError, match="length n = 7"):
        dec.decode(np.zeros(6))
    with pytest.raises(InputError, match="NaN"):
        dec.decode(np.array([0, 1, np.nan, 0, 0, 0, 0.0]))
