"""Capacities and Shannon limits against published values and independent evaluations."""

from __future__ import annotations

import math

import numpy as np
import pytest

from ldpcmarg.analysis import capacity as cap
from ldpcmarg.errors import InputError


def test_biawgn_shannon_limit_rate_half():
    # Richardson & Urbanke, Modern Coding Theory (BI-AWGN Shannon limit, rate 1/2): 0.187 dB
    assert cap.biawgn_shannon_limit_ebn0_db(0.5) == pytest.approx(0.187, abs=0.002)


def test_biawgn_shannon_limit_rate_third():
    # Richardson & Urbanke, Modern Coding Theory (BI-AWGN Shannon limit, rate 1/3): -0.495 dB
    assert cap.biawgn_shannon_limit_ebn0_db(1 / 3) == pytest.approx(-0.495, abs=0.002)


def test_gaussian_shannon_limit():
    # Shannon's formula R = 0.5 log2(1 + 2 R Eb/N0): rate 1/2 needs Eb/N0 = 1, i.e. 0 dB
    assert cap.gaussian_shannon_limit_ebn0_db(0.5) == pytest.approx(0.0, abs=1e-12)
    # as R -> 0 the limit tends to ln 2 = -1.592 dB (Shannon; standard textbook result)
    assert cap.gaussian_shannon_limit_ebn0_db(1e-6) == pytest.approx(10 * math.log10(math.log(2)),
                                                                      abs=1e-4)


@pytest.mark.parametrize("rate", [0.1, 0.5, 0.8, 0.95])
def test_binary_limit_above_gaussian_limit(rate):
    # binary input can only lose against the Gaussian input (capacity of the
    # constrained input is smaller; Shannon)
    assert cap.biawgn_shannon_limit_ebn0_db(rate) > cap.gaussian_shannon_limit_ebn0_db(rate)


def test_shannon_limit_inverts_capacity():
    for rate in (0.25, 0.5, 0.75):
        eb = cap.biawgn_shannon_limit_ebn0_db(rate)
        sigma = math.sqrt(1.0 / (2 * rate * 10 ** (eb / 10)))
        assert cap.biawgn_capacity(sigma) == pytest.approx(rate, abs=1e-9)


@pytest.mark.parametrize("sigma", [0.5, 0.8, 0.9787, 1.5])
def test_biawgn_capacity_against_gauss_hermite(sigma):
    # Independent evaluation of C = 1 - E[log2(1 + exp(-2y/sigma^2))], y ~ N(1, sigma^2),
    # by 200-point Gauss-Hermite quadrature (numpy); the integrand is smooth, so
    # the two agree to ~1e-9.
    t, w = np.polynomial.hermite_e.hermegauss(200)
    y = 1.0 + sigma * t
    ref = 1.0 - np.sum(w * np.logaddexp(0.0, -2 * y / sigma**2)) / (math.sqrt(2 * math.pi)
                                                                     * math.log(2))
    assert cap.biawgn_capacity(sigma) == pytest.approx(ref, abs=1e-9)


def test_biawgn_capacity_limits_and_esn0():
    # C -> 1 at high SNR and C ~ (SNR / ln 2) at low SNR, where SNR = 1/sigma^2 and the
    # first-order expansion of the binary-input capacity equals the Gaussian one
    # (standard textbook result, e.g. Richardson & Urbanke ch. 4).
    assert cap.biawgn_capacity(esn0_db=15.0) == pytest.approx(1.0, abs=1e-12)
    low = cap.biawgn_capacity(esn0_db=-30.0)
    assert low == pytest.approx(cap.gaussian_capacity(esn0_db=-30.0), rel=1e-2)
    # Es/N0 and sigma parameterisations agree: sigma^2 = 1 / (2 Es/N0)
    s = math.sqrt(1 / (2 * 10 ** 0.2))
    assert cap.biawgn_capacity(esn0_db=2.0) == pytest.approx(cap.biawgn_capacity(s), abs=1e-15)
    # never above the unconstrained-input capacity (Shannon)
    for e in (-10.0, 0.0, 5.0):
        assert cap.biawgn_capacity(esn0_db=e) < cap.gaussian_capacity(esn0_db=e)


def test_bsc_and_bec():
    # BSC(0.11) has capacity ~ 0.5 (1 - h(0.11) = 0.5001; a textbook example, from memory)
    assert cap.bsc_capacity(0.11) == pytest.approx(0.5, abs=1e-3)
    assert cap.bsc_capacity(0.5) == pytest.approx(0.0, abs=1e-15)
    assert cap.bsc_capacity(0.0) == 1.0
    assert cap.binary_entropy(0.25) == pytest.approx(0.25 * 2 + 0.75 * math.log2(4 / 3))
    p = cap.bsc_shannon_limit_p(0.5)
    assert cap.bsc_capacity(p) == pytest.approx(0.5, abs=1e-12)
    assert cap.bec_capacity(0.3) == pytest.approx(0.7)
    assert cap.bec_shannon_limit_epsilon(0.5) == pytest.approx(0.5)


def test_bad_inputs():
    with pytest.raises(InputError, match="rate"):
        cap.biawgn_shannon_limit_ebn0_db(1.0)
    with pytest.raises(InputError, match="rate"):
        cap.biawgn_shannon_limit_ebn0_db(0.0)
    with pytest.raises(InputError, match="exactly one"):
        cap.biawgn_capacity()
    with pytest.raises(InputError, match="sigma"):
        cap.biawgn_capacity(-1.0)
    with pytest.raises(InputError, match="p must be"):
        cap.bsc_capacity(1.5)
    with pytest.raises(InputError, match="input"):
        cap.shannon_limit_ebn0_db(0.5, input="ternary")
    assert cap.shannon_limit_ebn0_db(0.5, input="gaussian") == pytest.approx(0.0, abs=1e-12)
