"""Channel capacities and Shannon limits for binary-input channels.

Conventions
-----------
* Capacities are in bits per channel use (per real dimension for AWGN).
* BPSK with unit symbol energy Es = 1 over real AWGN with noise standard
  deviation ``sigma``: ``Es/N0 = 1 / (2 sigma**2)``; with code rate ``R``,
  ``Eb/N0 = Es/N0 / R``. SNRs in dB unless the name says otherwise.
* The BI-AWGN capacity is ``C = 1 - E[log2(1 + exp(-L))]`` with the channel
  LLR ``L = 2 y / sigma**2`` given that +1 was sent, ``L ~ N(2/sigma**2, 4/sigma**2)``
  (Richardson & Urbanke, *Modern Coding Theory*, ch. 4), evaluated by
  adaptive quadrature.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import integrate, optimize

from ..errors import InputError

__all__ = [
    "binary_entropy",
    "biawgn_capacity",
    "gaussian_capacity",
    "bsc_capacity",
    "bec_capacity",
    "shannon_limit_ebn0_db",
    "biawgn_shannon_limit_ebn0_db",
    "gaussian_shannon_limit_ebn0_db",
    "bsc_shannon_limit_p",
    "bec_shannon_limit_epsilon",
]

_LN2 = math.log(2.0)


def _check_prob(name: str, p, low_open=False, high_open=False, high=1.0) -> float:
    try:
        v = float(p)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be a number; got {p!r}.") from exc
    bad = (not math.isfinite(v) or v < 0.0 or v > high or (low_open and v == 0.0)
           or (high_open and v == high))
    if bad:
        lo = "(" if low_open else "["
        hi = ")" if high_open else "]"
        raise InputError(f"{name} must be in {lo}0, {high:g}{hi}; got {p!r}.")
    return v


def _check_rate(rate) -> float:
    return _check_prob("The code rate", rate, low_open=True, high_open=True)


def binary_entropy(p) -> float:
    """Binary entropy ``h(p) = -p log2 p - (1-p) log2(1-p)`` in bits (h(0) = h(1) = 0)."""
    p = _check_prob("p", p)
    if p in (0.0, 1.0):
        return 0.0
    return -(p * math.log2(p) + (1.0 - p) * math.log2(1.0 - p))


def _sigma_from(sigma, esn0_db) -> float:
    if (sigma is None) == (esn0_db is None):
        raise InputError("Give exactly one of sigma or esn0_db.")
    if sigma is None:
        e = float(esn0_db)
        if not math.isfinite(e):
            raise InputError(f"esn0_db must be finite; got {esn0_db!r}.")
        return math.sqrt(1.0 / (2.0 * 10.0 ** (e / 10.0)))
    s = float(sigma)
    if not (math.isfinite(s) and s > 0):
        raise InputError(f"sigma must be a positive number; got {sigma!r}.")
    return s


def biawgn_capacity(sigma: float | None = None, *, esn0_db: float | None = None) -> float:
    """Capacity of BPSK over real AWGN (binary-input AWGN), bits per channel use.

    Parameters
    ----------
    sigma : float, optional
        Noise standard deviation per real dimension (symbols +-1).
    esn0_db : float, optional
        Symbol SNR Es/N0 in dB (``sigma**2 = 1 / (2 Es/N0)``). Give exactly one.

    Returns
    -------
    float in (0, 1)

    Notes
    -----
    ``C = 1 - int phi(t) log2(1 + exp(-2 (1 + sigma t) / sigma**2)) dt`` with
    ``phi`` the standard normal density; the integrand is evaluated as
    ``logaddexp(0, -z) / ln 2`` so it never overflows.
    """
    s = _sigma_from(sigma, esn0_db)
    s2 = s * s

    def integrand(t):
        z = 2.0 * (1.0 + s * t) / s2
        return math.exp(-0.5 * t * t) * np.logaddexp(0.0, -z)

    # |t| > 40 contributes below exp(-800) relative to the rest
    val, _ = integrate.quad(integrand, -40.0, 40.0, points=[-1.0 / s, 0.0],
                            epsabs=1e-14, epsrel=1e-12, limit=400)
    cap = 1.0 - val / (math.sqrt(2.0 * math.pi) * _LN2)
    return min(max(cap, 0.0), 1.0)


def gaussian_capacity(sigma: float | None = None, *, esn0_db: float | None = None) -> float:
    """Capacity with Gaussian input, ``0.5 log2(1 + 2 Es/N0)`` bits per real dimension.

    Same SNR parameterisation as :func:`biawgn_capacity` (power 1, noise variance ``sigma**2``).
    """
    s = _sigma_from(sigma, esn0_db)
    return 0.5 * math.log2(1.0 + 1.0 / (s * s))


def bsc_capacity(p: float) -> float:
    """Capacity ``1 - h(p)`` of the binary symmetric channel (bits per use), p in [0, 1]."""
    return 1.0 - binary_entropy(p)


def bec_capacity(epsilon: float) -> float:
    """Capacity ``1 - epsilon`` of the binary erasure channel (bits per use)."""
    return 1.0 - _check_prob("epsilon", epsilon)


def biawgn_shannon_limit_ebn0_db(rate: float) -> float:
    """Smallest Eb/N0 (dB) at which the BI-AWGN capacity reaches ``rate``.

    Solves ``biawgn_capacity(sigma(Eb/N0, R)) = R`` with Brent's method;
    ``sigma**2 = 1 / (2 R 10**(Eb/N0 / 10))``.

    Parameters
    ----------
    rate : float in (0, 1)

    Returns
    -------
    float
        Eb/N0 in dB (about 0.187 dB for R = 1/2).
    """
    r = _check_rate(rate)

    def f(ebn0_db):
        sigma = math.sqrt(1.0 / (2.0 * r * 10.0 ** (ebn0_db / 10.0)))
        return biawgn_capacity(sigma) - r

    # below the unconstrained limit (>= ln 2 = -1.59 dB) the binary capacity is smaller
    lo = 10.0 * math.log10(math.log(2.0)) - 0.01
    hi = 20.0
    while f(hi) < 0.0:
        hi += 20.0
        if hi > 200.0:  # pragma: no cover - rate within 1e-16 of 1
            raise InputError(f"The rate {rate!r} is too close to 1 for a finite Shannon limit.")
    return float(optimize.brentq(f, lo, hi, xtol=1e-10, rtol=1e-12))


def gaussian_shannon_limit_ebn0_db(rate: float) -> float:
    """Shannon limit Eb/N0 (dB) with unconstrained Gaussian input: ``(2**(2R) - 1) / (2R)``.

    ``rate`` in bits per real dimension, > 0 (may exceed 1). Tends to ln 2 = -1.59 dB as R -> 0.
    """
    try:
        r = float(rate)
    except (TypeError, ValueError) as exc:
        raise InputError(f"The rate must be a number; got {rate!r}.") from exc
    if not (math.isfinite(r) and r > 0):
        raise InputError(f"The rate must be a positive number; got {rate!r}.")
    return 10.0 * math.log10(math.expm1(2.0 * r * _LN2) / (2.0 * r))


def shannon_limit_ebn0_db(rate: float, input: str = "binary") -> float:
    """Shannon-limit Eb/N0 (dB) for ``rate`` over AWGN.

    Parameters
    ----------
    rate : float
    input : {"binary", "gaussian"}
        BPSK (binary-input AWGN) or unconstrained Gaussian input.
    """
    if input == "binary":
        return biawgn_shannon_limit_ebn0_db(rate)
    if input == "gaussian":
        return gaussian_shannon_limit_ebn0_db(rate)
    raise InputError(f"Unknown input {input!r}; accepted: 'binary', 'gaussian'.")


def bsc_shannon_limit_p(rate: float) -> float:
    """Largest BSC crossover probability ``p <= 1/2`` with ``1 - h(p) >= rate``."""
    r = _check_rate(rate)
    return float(optimize.brentq(lambda p: bsc_capacity(p) - r, 1e-300, 0.5,
                                 xtol=1e-15, rtol=1e-13))


def bec_shannon_limit_epsilon(rate: float) -> float:
    """Largest BEC erasure probability with capacity >= ``rate``: ``1 - rate``."""
    return 1.0 - _check_rate(rate)
