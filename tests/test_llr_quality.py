"""Mutual information and calibration of LLRs (ldpcmarg.analysis.llr_quality)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from ldpcmarg.analysis.llr_quality import (
    calibration,
    error_probability,
    fit_llr_scale,
    mutual_information,
    prob_one,
)
from ldpcmarg.errors import InputError
from ldpcmarg.link.channels import make_channel


def biawgn_capacity_quad(sigma: float) -> float:
    """BI-AWGN capacity by numerical integration, written out here independently.

    C = 1 - integral of N(y; 1, sigma^2) * log2(1 + exp(-2 y / sigma^2)) dy
    (capacity of the binary-input AWGN channel with uniform inputs +-1;
    Richardson & Urbanke, Modern Coding Theory, chapter 4 -- section from memory).
    """
    def f(y):
        dens = math.exp(-((y - 1.0) ** 2) / (2 * sigma**2)) / math.sqrt(2 * math.pi * sigma**2)
        return dens * np.logaddexp(0.0, -2.0 * y / sigma**2) / math.log(2.0)

    lo, hi = 1.0 - 40 * sigma, 1.0 + 40 * sigma
    val, _ = integrate.quad(f, lo, hi, points=[0.0, 1.0], limit=400, epsabs=1e-13)
    return 1.0 - val


@pytest.mark.parametrize("esn0_db", [-3.0, 0.0, 3.0])
def test_mutual_information_matches_biawgn_capacity(esn0_db):
    # Channel LLRs 2y/sigma^2 are the true LLRs, so the time average estimates
    # I(X; Y) = capacity with uniform inputs (Richardson & Urbanke, Modern Coding Theory).
    ch = make_channel("awgn", esn0_db=esn0_db)
    rng = np.random.default_rng(20260 + int(10 * esn0_db))
    N = 400_000
    bits = rng.integers(0, 2, size=(N // 100, 100), dtype=np.uint8)
    llr = ch.sample_llr(bits, rng)
    mi, se = mutual_information(bits, llr, return_stderr=True)
    cap = biawgn_capacity_quad(ch.sigma)
    # The per-sample terms have standard deviation < 1 bit, so with 400 000
    # independent samples the standard error is < 0.0016 -- more than six
    # standard errors inside the 0.01-bit tolerance of the requirement.
    assert se < 0.002
    assert abs(mi - cap) < 0.01
    # and, tighter, within 5 standard errors (the estimate is unbiased)
    assert abs(mi - cap) < 5 * se


def test_capacity_quadrature_agrees_with_library():
    # Cross-check of the test's own integral against ldpcmarg.analysis.capacity
    # (two independent codings of the same formula).
    from ldpcmarg.analysis.capacity import biawgn_capacity

    for s in (0.5, 0.8809, 1.3):
        assert abs(biawgn_capacity_quad(s) - biawgn_capacity(s)) < 1e-8


def test_mutual_information_limits():
    # Certain and right: 1 bit; uninformative: 0 bit; certain and wrong: -inf.
    assert mutual_information([0, 1, 1], [800.0, -800.0, -np.inf]) == pytest.approx(1.0)
    assert mutual_information([0, 1], [0.0, 0.0]) == pytest.approx(0.0, abs=1e-15)
    assert mutual_information([0, 1], [np.inf, np.inf]) == -np.inf
    # one bit with LLR 2 favouring the truth: 1 - log2(1 + e^-2)
    assert mutual_information([1], [-2.0]) == pytest.approx(1 - math.log2(1 + math.exp(-2)))


def _calibrated_sample(rng, N):
    """LLRs from a broad distribution and bits drawn from the probabilities they state."""
    L = rng.normal(1.0, 3.0, size=N)
    bits = (rng.random(N) < prob_one(L)).astype(np.uint8)
    return bits, L


def test_calibrated_llrs_have_small_ece(seed):
    rng = np.random.default_rng(1000 + seed)
    N = 200_000
    bits, L = _calibrated_sample(rng, N)
    for binning in ("uniform", "log"):
        cal = calibration(bits, L, num_bins=10, binning=binning)
        # With B bins the binomial noise of the ECE is at most
        # sqrt(B * N * 1/4) / N (Cauchy-Schwarz over bins) = 0.0035 for
        # B = 10, N = 200 000; 0.01 leaves a wide margin.
        assert cal.ece < 0.01
        ok = cal.counts > 2000
        p = cal.predicted[ok]
        sd = np.sqrt(p * (1 - p) / cal.counts[ok])
        # every well-filled bin within 5 binomial standard deviations
        assert np.all(np.abs(cal.observed[ok] - p) < 5 * sd + 1e-12)
        assert cal.counts.sum() == N
    # the scale fit: stderr about 0.005 here, so 0.03 is a 6-sigma band
    assert abs(cal.llr_scale - 1.0) < 0.03
    # Brier score of calibrated probabilities has expectation E[p(1-p)]
    # (Murphy decomposition; from memory); 200 000 samples give sd < 0.001.
    p1 = prob_one(L)
    assert abs(cal.brier - np.mean(p1 * (1 - p1))) < 0.005


def test_doubled_llrs_are_over_confident(seed):
    rng = np.random.default_rng(2000 + seed)
    bits, L = _calibrated_sample(rng, 200_000)
    good = calibration(bits, L)
    over = calibration(bits, 2.0 * L)
    under = calibration(bits, 0.5 * L)
    assert over.confidence == "over-confident" and over.overconfident
    assert under.confidence == "under-confident" and not under.overconfident
    # the fitted scale undoes the distortion (stderr ~ 0.003 and ~ 0.01)
    assert abs(over.llr_scale - 0.5) < 0.02
    assert abs(under.llr_scale - 2.0) < 0.06
    assert over.ece > 5 * good.ece
    # over-confident: more errors observed than stated in the well-filled bins
    ok = over.counts > 2000
    assert np.all(over.observed[ok] > over.predicted[ok])


def test_fit_llr_scale_recovers_known_scale():
    rng = np.random.default_rng(7)
    L = rng.normal(0.0, 4.0, size=100_000)
    bits = (rng.random(L.size) < prob_one(0.7 * L)).astype(np.uint8)
    s, se = fit_llr_scale(bits, L)
    assert abs(s - 0.7) < 5 * se and se < 0.01


def test_scale_undetermined_without_errors():
    s, se = fit_llr_scale([0, 1, 0], [3.0, -2.0, 0.5])
    assert s == math.inf and math.isnan(se)
    cal = calibration([0, 1, 0], [3.0, -2.0, 0.5])
    assert cal.confidence == "undetermined"
    assert cal.bit_errors == 0


def test_error_probability_and_prob_one_are_accurate_for_large_llrs():
    # 1 / (1 + e^50) = e^-50 to double precision; a tanh-based formula gives 0.
    assert prob_one(50.0) == pytest.approx(math.exp(-50.0), rel=1e-12)
    assert error_probability(-50.0) == pytest.approx(math.exp(-50.0), rel=1e-12)
    assert prob_one(-50.0) == pytest.approx(1.0)
    assert error_probability(0.0) == 0.5


def test_calibration_bins_and_json():
    import json

    cal = calibration([0, 0, 1, 1], [0.0, 5.0, -5.0, 1.0], num_bins=5)
    assert cal.counts.sum() == 4 and cal.bin_edges[0] == 0 and cal.bin_edges[-1] == 0.5
    # bit 3 (x=1, L=1) is the only hard-decision error; L=0 decides 0, right here
    assert cal.bit_errors == 1
    json.dumps(cal.to_dict(), allow_nan=False)


@pytest.mark.parametrize("bits, llr, match", [
    ([0, 1], [1.0], "same shape"),
    ([0, 2], [1.0, 1.0], "only 0 and 1"),
    ([0, 1], [1.0, np.nan], "NaN"),
    ([], [], "empty"),
])
def test_bad_inputs_rejected(bits, llr, match):
    with pytest.raises(InputError, match=match):
        mutual_information(bits, llr)
    with pytest.raises(InputError, match=match):
        calibration(bits, llr)


def test_bad_calibration_options():
    with pytest.raises(InputError, match="num_bins"):
        calibration([0, 1], [1.0, -1.0], num_bins=0)
    with pytest.raises(InputError, match="binning"):
        calibration([0, 1], [1.0, -1.0], binning="quantile")
