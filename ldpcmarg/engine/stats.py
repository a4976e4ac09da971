"""Confidence intervals for Monte Carlo error rates.

Frame error rate
    Frames fail independently of one another (each chunk has its own seed and
    frames inside a chunk are independent draws), so the number of frame
    errors is binomial and :func:`clopper_pearson` gives the exact
    (conservative) interval.

Bit error rate
    Bit errors are *not* independent: a decoder failure usually flips many
    bits of the same frame at once, so the naive binomial interval over
    ``frames * bits`` trials is far too narrow. :func:`ber_interval` treats the
    frame as the sampling unit. The estimate is the ratio (mean of per-frame
    error fractions) ``sum(e_j) / (F * b)``; its variance is estimated from
    the between-frame spread of ``e_j`` (only ``sum e_j`` and ``sum e_j**2``
    are needed, so chunks can be merged). That variance is turned into an
    *effective number of trials* ``n_eff = p (1 - p) / var`` and the interval
    is Clopper–Pearson with ``n_eff`` trials and ``p * n_eff`` successes
    (the Korn–Graubard construction for clustered samples, from memory:
    Korn & Graubard, Survey Methodology 24(2), 1998). With independent bit
    errors this reduces to the exact binomial interval over bits; with bursts
    it widens accordingly, and it stays sensible for a handful of error frames,
    where a plain normal interval on the ratio would not.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError

__all__ = ["clopper_pearson", "ber_interval"]


def _check_level(confidence: float) -> float:
    c = float(confidence)
    if not 0.0 < c < 1.0:
        raise InputError(f"The confidence level must be in (0, 1); got {confidence!r}.")
    return c


def _beta_interval(x: float, n: float, confidence: float) -> tuple[float, float]:
    # beta quantiles via the inverse regularised incomplete beta function
    # (scipy.special is far lighter to import than scipy.stats)
    from scipy.special import betaincinv

    a = (1.0 - confidence) / 2.0
    lo = 0.0 if x <= 0 else float(betaincinv(x, n - x + 1.0, a))
    hi = 1.0 if x >= n else float(betaincinv(x + 1.0, n - x, 1.0 - a))
    return lo, hi


def clopper_pearson(successes: int, trials: int, confidence: float = 0.95) -> tuple[float, float]:
    """Exact (Clopper–Pearson) two-sided interval for a binomial proportion.

    Parameters
    ----------
    successes : int
        Observed events (e.g. frame errors), ``0 <= successes <= trials``.
    trials : int
        Number of trials (frames); ``0`` gives the uninformative ``(0, 1)``.
    confidence : float
        Two-sided level, e.g. 0.95.

    Returns
    -------
    (lo, hi) : tuple of float
        Bounds from the beta quantiles ``B(a/2; x, n-x+1)`` and
        ``B(1-a/2; x+1, n-x)``, with ``a = 1 - confidence``.
    """
    confidence = _check_level(confidence)
    x, n = int(successes), int(trials)
    if n < 0 or x < 0 or x > n:
        raise InputError(f"Need 0 <= successes <= trials; got {x} of {n}.")
    if n == 0:
        return 0.0, 1.0
    return _beta_interval(float(x), float(n), confidence)


def ber_interval(bit_errors: int, bit_errors_sq: int, frames: int, bits_per_frame: int,
                 confidence: float = 0.95) -> tuple[float, float]:
    """Interval for the bit error rate with frames as the sampling unit.

    Parameters
    ----------
    bit_errors : int
        ``sum_j e_j``, total bit errors over all frames.
    bit_errors_sq : int
        ``sum_j e_j**2``, sum over frames of squared per-frame bit errors.
    frames : int
        Number of frames ``F``.
    bits_per_frame : int
        Bits counted per frame ``b`` (information bits or all bits).
    confidence : float
        Two-sided level.

    Returns
    -------
    (lo, hi) : tuple of float
        See the module notes. With no errors at all the bound uses one trial
        per frame (``Clopper–Pearson(0, F)``), since BER never exceeds FER.
    """
    confidence = _check_level(confidence)
    F, b = int(frames), int(bits_per_frame)
    s1, s2 = float(bit_errors), float(bit_errors_sq)
    if F <= 0 or b <= 0:
        return 0.0, 1.0
    if s1 < 0 or s2 < s1 or s1 > F * b:
        raise InputError(f"Inconsistent bit-error sums: sum={s1}, sum of squares={s2}.")
    n_total = float(F) * b
    p = s1 / n_total
    if s1 == 0:
        return _beta_interval(0.0, float(F), confidence)
    if p >= 1.0:
        return _beta_interval(n_total, n_total, confidence)
    if F > 1:
        # unbiased between-frame variance of the per-frame error fraction
        var_frac = max(s2 / F - (s1 / F) ** 2, 0.0) * F / (F - 1) / (b * b)
    else:
        var_frac = p * (1 - p)
    var_mean = var_frac / F
    if var_mean <= 0.0:
        n_eff = n_total
    else:
        n_eff = p * (1.0 - p) / var_mean
    # never claim more information than the bits themselves, nor less than one trial per frame
    n_eff = float(np.clip(n_eff, min(F, n_total), n_total))
    if not math.isfinite(n_eff):
        n_eff = float(F)
    return _beta_interval(p * n_eff, n_eff, confidence)
