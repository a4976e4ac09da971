"""Finite-length limits against closed forms, independent routes and exact ML."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from cli_helpers import run_cli
from scipy import special, stats

from ldpcmarg.analysis import capacity
from ldpcmarg.analysis import limits as L
from ldpcmarg.code import construct
from ldpcmarg.decoders.base import make_decoder
from ldpcmarg.engine.stats import clopper_pearson
from ldpcmarg.errors import InputError


@pytest.mark.parametrize("eps", [0.01, 0.1, 0.3, 0.5, 0.77])
def test_bec_dispersion_closed_form(eps):
    # BEC: C = 1 - eps, V = eps (1 - eps) bits^2 (Polyanskiy, Poor & Verdu 2010, Thm. 53)
    C, V = L.bec_capacity_dispersion(eps)
    assert C == pytest.approx(1 - eps, abs=1e-14)
    assert V == pytest.approx(eps * (1 - eps), abs=1e-14)


@pytest.mark.parametrize("p", [0.001, 0.02, 0.11, 0.3, 0.45])
def test_bsc_dispersion_closed_form(p):
    # BSC: C = 1 - h(p), V = p (1 - p) log2^2((1 - p)/p) bits^2
    # (Polyanskiy, Poor & Verdu 2010, Thm. 52)
    C, V = L.bsc_capacity_dispersion(p)
    assert C == pytest.approx(capacity.bsc_capacity(p), abs=1e-13)
    assert V == pytest.approx(p * (1 - p) * math.log2((1 - p) / p) ** 2, rel=1e-12)


@pytest.mark.parametrize("sigma", [0.3, 0.6, 0.9784, 1.5, 3.0])
def test_biawgn_two_quadratures_agree(sigma):
    # the same integrals by adaptive Gauss-Kronrod (scipy.integrate.quad) and by the
    # trapezoid rule: two independent routes must agree to 1e-6 (issue requirement)
    c1, v1 = L.biawgn_capacity_dispersion(sigma, "quad")
    c2, v2 = L.biawgn_capacity_dispersion(sigma, "trapezoid")
    assert abs(c1 - c2) < 1e-6 and abs(v1 - v2) < 1e-6
    # and the capacity matches the lab's capacity module (its own quadrature)
    assert c1 == pytest.approx(capacity.biawgn_capacity(sigma), abs=1e-9)


def test_biawgn_dispersion_limits():
    # noiseless end: i = 1 bit surely, V -> 0; low-SNR end: i ~ (L/2 - L^2/8)/ln 2, so
    # V ~ Var(L)/(4 ln^2 2) = 1/(sigma^2 ln^2 2) (first-order expansion, common practice);
    # at sigma = 0.9784 (C = 1/2) V is about 0.66 bits^2,
    # matching the Monte Carlo variance of 1 - log2(1 + e^-L) (independent estimate)
    assert L.biawgn_capacity_dispersion(0.05)[1] < 1e-10
    assert L.biawgn_capacity_dispersion(300.0)[1] == pytest.approx(
        1 / (300.0**2 * math.log(2) ** 2), rel=0.01)
    rng = np.random.default_rng(0)
    s = 0.9784
    Lv = 2 / s**2 + (2 / s) * rng.standard_normal(400_000)
    i = 1 - np.logaddexp(0, -Lv) / math.log(2)
    # standard error of a sample variance ~ sqrt(2/N) V ~ 0.0015; allow 5 sd
    assert L.biawgn_capacity_dispersion(s)[1] == pytest.approx(i.var(), abs=0.0075)


def test_cone_share_matches_incomplete_beta():
    # share of the unit sphere in R^n within angle theta <= pi/2 of a pole:
    # 1/2 I_{sin^2 theta}((n-1)/2, 1/2) (standard result, e.g. S. Li, Asian J. Math. Stat.
    # 4(1), 2011, "Concise formulas for the area and volume of a hyperspherical cap")
    for n in (3, 24, 128, 1000):
        for theta in (0.2, 0.7, 1.2, math.pi / 2):
            ref = 0.5 * special.betainc((n - 1) / 2, 0.5, math.sin(theta) ** 2)
            if ref > 1e-280:
                assert math.exp(L._log_cone_share(n, theta)) == pytest.approx(ref, rel=1e-7)
    # n = 3: the cap share is (1 - cos theta)/2 (Archimedes)
    assert math.exp(L._log_cone_share(3, 0.9)) == pytest.approx((1 - math.cos(0.9)) / 2, 1e-8)


def test_cone_exit_matches_noncentral_t():
    # P(sqrt(n)A + Z < cot(theta) R) with R ~ chi_{n-1} is the noncentral-t CDF with
    # n - 1 degrees of freedom and noncentrality sqrt(n) A at sqrt(n-1) cot(theta)
    # (definition of the noncentral t; scipy.stats.nct as the independent reference)
    for n, A, theta in [(24, 1.0, 0.9), (128, 1.2, 1.1), (64, 0.8, 1.3), (256, 1.4, 1.0)]:
        ref = stats.nct.cdf(math.sqrt(n - 1) / math.tan(theta), n - 1, math.sqrt(n) * A)
        if ref > 1e-12:
            assert math.exp(L._log_cone_exit(n, A, theta)) == pytest.approx(ref, rel=1e-6)


@pytest.mark.parametrize("n,k", [(24, 12), (128, 64), (256, 128), (512, 384)])
def test_normal_approximation_between_sphere_packing_and_rcu(n, k):
    # converse <= NA <= achievability where all three are defined (Polyanskiy, Poor &
    # Verdu 2010, Fig. 12 and the discussion of the BI-AWGN; Shannon 1959 bound as converse)
    for ebn0 in (1.0, 2.0, 3.0, 4.0):
        lim = L.finite_length_limits("awgn", ebn0, n, k)
        if lim.rcu < 1e-12:
            continue
        assert lim.sphere_packing <= lim.normal_approximation <= lim.rcu, (ebn0, lim)


def test_sphere_packing_monotone_and_tiny_values():
    vals = [L.sphere_packing_1959(e, 256, 128) for e in (1.0, 2.0, 3.0, 4.0, 5.0)]
    assert all(a > b for a, b in zip(vals[:-1], vals[1:], strict=True))
    # log-domain evaluation: values far below double-precision tails stay positive
    log_tiny = L.log_sphere_packing_1959(12.0, 1024, 512)
    assert -1e5 < log_tiny < math.log(1e-308)


def test_rcus_saddlepoint_matches_monte_carlo():
    # RCU_s = E[min(1, e^{a - S})], S = sum of n i.i.d. i_s; Monte Carlo with 200k
    # blocks at FER ~ 3e-2 has a relative standard error ~ 1%; allow 5%.
    n, k, ebn0, s = 128, 64, 2.0, 0.8
    sigma = L.awgn_sigma(ebn0, k / n)
    sp = math.exp(L._rcus_awgn_log(sigma, n, k, s))
    rng = np.random.default_rng(7)
    a = k * math.log(2) + math.log1p(-(2.0**-k))
    mu = 2 / sigma**2
    acc = 0.0
    for _ in range(10):
        Lv = mu + math.sqrt(2 * mu) * rng.standard_normal((20000, n))
        S = (math.log(2) - np.logaddexp(0, -s * Lv)).sum(axis=1)
        acc += np.minimum(1.0, np.exp(a - S)).mean() / 10
    assert sp == pytest.approx(acc, rel=0.05)


def test_bsc_bec_rcu_by_direct_sums():
    # direct float evaluation of the finite sums of Polyanskiy, Poor & Verdu 2010
    # (RCU for the BSC, Thm. 33; for the BEC, Thm. 37; theorem numbers from memory)
    n, k = 40, 20
    M1 = 2.0**k - 1
    for p in (0.02, 0.08, 0.15):
        ref = sum(stats.binom.pmf(t, n, p)
                  * min(1.0, M1 * stats.binom.cdf(t, n, 0.5)) for t in range(n + 1))
        assert L.rcu("bsc", p, n, k) == pytest.approx(ref, rel=1e-9)
    for e in (0.1, 0.3, 0.45):
        ref = sum(stats.binom.pmf(t, n, e) * min(1.0, M1 * 2.0 ** (t - n)) for t in range(n + 1))
        assert L.rcu("bec", e, n, k) == pytest.approx(ref, rel=1e-9)


@pytest.mark.slow
def test_golay_ml_never_below_sphere_packing():
    # no code of 2^12 equal-energy words in 24 dimensions beats Shannon's 1959 bound;
    # the exact-ML FER of Golay(24,12) (upper 99% Clopper-Pearson limit) stays above it
    code = construct.golay24()
    dec = make_decoder("exact", code)
    rng = np.random.default_rng(21)
    for ebn0, frames in [(1.0, 600), (2.0, 1000), (3.0, 1500)]:
        sigma = L.awgn_sigma(ebn0, 0.5)
        llr = 2 * (1 + sigma * rng.standard_normal((frames, 24))) / sigma**2
        errors = int(dec.decode(llr).bits.any(axis=1).sum())
        _, hi = clopper_pearson(errors, frames, 0.99)
        sp = L.sphere_packing_1959(ebn0, 24, 12)
        assert hi >= sp
        assert errors / frames >= 0.5 * sp  # and not merely by the width of the interval


def test_cli_json_contract(capsys):
    st, out, _ = run_cli(["limits", "--channel", "awgn", "--param", "2", "-n", "128",
                          "-k", "64", "--json"], capsys)
    assert st == 0
    d = json.loads(out)
    assert set(d) >= {"normal_approximation", "rcu", "sphere_packing"}
    assert 0 < d["sphere_packing"] < d["normal_approximation"] < d["rcu"] < 1
    st, out, _ = run_cli(["limits", "--channel", "bsc", "--param", "0.05", "-n", "128",
                          "-k", "64", "--json"], capsys)
    d = json.loads(out)
    assert d["sphere_packing"] is None and 0 < d["rcu"] < 1
    st, out, _ = run_cli(["limits", "golay-24-12", "--param", "2", "--param", "3"], capsys)
    assert st == 0 and "n = 24, k = 12" in out and "RCU" in out


def test_cli_errors(capsys):
    st, _, err = run_cli(["limits", "--channel", "bec", "--param", "1.5", "-n", "10",
                          "-k", "5"], capsys)
    assert st == 2 and err.startswith("Error:")
    st, _, err = run_cli(["limits", "--param", "1", "-n", "10"], capsys)
    assert st == 2 and "-k" in err
    with pytest.raises(InputError):
        L.normal_approximation("awgn", 1.0, 10, 10)
