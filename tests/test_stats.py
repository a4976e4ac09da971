"""Confidence intervals: Clopper-Pearson against scipy, the frame-clustered BER interval."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import binomtest

from ldpcmarg.engine.stats import ber_interval, clopper_pearson
from ldpcmarg.errors import InputError


@pytest.mark.parametrize("k,n", [(0, 10), (1, 10), (5, 10), (10, 10), (3, 1000), (97, 12345)])
@pytest.mark.parametrize("level", [0.9, 0.95, 0.99])
def test_clopper_pearson_matches_scipy_exact(k, n, level):
    # reference: scipy's exact (Clopper-Pearson) binomial interval
    ref = binomtest(k, n).proportion_ci(confidence_level=level, method="exact")
    lo, hi = clopper_pearson(k, n, level)
    assert lo == pytest.approx(ref.low, rel=1e-9, abs=1e-14)
    assert hi == pytest.approx(ref.high, rel=1e-9, abs=1e-14)


def test_clopper_pearson_rejects_bad_input():
    with pytest.raises(InputError):
        clopper_pearson(5, 3)
    with pytest.raises(InputError):
        clopper_pearson(1, 3, confidence=1.5)
    assert clopper_pearson(0, 0) == (0.0, 1.0)


def test_ber_interval_independent_bits_is_binomial_over_bits():
    # With independent bit errors the per-frame variance is binomial, so the
    # effective trial count is ~ all bits and the interval ~ Clopper-Pearson over bits.
    rng = np.random.default_rng(11)
    F, b, p = 4000, 50, 0.01
    e = rng.binomial(b, p, size=F)
    lo, hi = ber_interval(int(e.sum()), int((e * e).sum()), F, b)
    ref = binomtest(int(e.sum()), F * b).proportion_ci(method="exact")
    # the effective n equals F*b up to the sampling error of the variance estimate
    # (relative sd ~ sqrt(2/F) ~ 2 %), so the widths agree within ~5 %
    assert (hi - lo) == pytest.approx(ref.high - ref.low, rel=0.05)


def test_ber_interval_widens_for_bursts():
    # All-or-nothing frames (every bit of a failed frame wrong): the information is
    # one trial per frame, so the BER interval equals Clopper-Pearson over frames.
    F, b, fails = 1000, 64, 37
    s1 = fails * b
    s2 = fails * b * b
    lo, hi = ber_interval(s1, s2, F, b)
    ref = clopper_pearson(fails, F)
    assert lo == pytest.approx(ref[0], rel=1e-6)
    assert hi == pytest.approx(ref[1], rel=1e-6)
    naive = clopper_pearson(s1, F * b)
    assert hi - lo > 5 * (naive[1] - naive[0])


def test_ber_interval_coverage_under_bursty_errors():
    # Simulated decoder-like errors: a frame fails w.p. q and then has a random
    # number of wrong bits. Nominal 95 % coverage; with 600 replicates the
    # binomial sd of the coverage is ~0.9 %, so >= 0.92 fails only if the
    # interval is genuinely too narrow (the naive bitwise interval gives ~0.5).
    rng = np.random.default_rng(5)
    F, b, q = 2000, 100, 0.01
    mean_bits = 1 + 0.5 * 11  # uniform 1..12 wrong bits per failed frame
    true_ber = q * mean_bits / b
    hits = naive_hits = 0
    reps = 600
    for _ in range(reps):
        fail = rng.random(F) < q
        e = np.where(fail, rng.integers(1, 13, size=F), 0)
        lo, hi = ber_interval(int(e.sum()), int((e * e).sum()), F, b)
        hits += lo <= true_ber <= hi
        nlo, nhi = clopper_pearson(int(e.sum()), F * b)
        naive_hits += nlo <= true_ber <= nhi
    assert hits / reps >= 0.92
    assert naive_hits / reps < hits / reps


def test_ber_interval_zero_errors_bounded_by_frames():
    lo, hi = ber_interval(0, 0, 500, 64)
    assert lo == 0.0
    assert hi == pytest.approx(clopper_pearson(0, 500)[1])
