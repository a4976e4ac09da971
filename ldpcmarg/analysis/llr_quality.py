"""Quality of soft outputs: mutual information and calibration of LLRs.

These helpers take pairs ``(bits, llr)`` — transmitted bits and the LLRs a
detector or decoder produced for them — and measure how much the LLRs tell
about the bits and whether the probabilities they state can be trusted. They
work on any data, not only on ldpcmarg decoders.

Conventions
-----------
* ``bits`` are 0/1; ``llr = ln P(x=0|.) - ln P(x=1|.)`` (positive favours 0).
* The probability of bit ``1`` stated by an LLR is ``1 / (1 + e^L)``; the
  stated probability that the hard decision (``1`` where ``L < 0``, else ``0``)
  is wrong is ``1 / (1 + e^|L|)``, between 0 and 1/2.
* Mutual information is in bits (log base 2).

References
----------
S. ten Brink, "Convergence behavior of iteratively decoded parallel
concatenated codes", IEEE Trans. Commun. 49(10), 2001 (mutual information of
LLRs, EXIT charts). I. Land, P. Hoeher, S. Gligorevic, "Computation of
symbol-wise mutual information in transmission systems with LogAPP decoders
and application to EXIT charts", 2004 (citation from memory; the time-average
estimate, valid when the LLRs are consistent). M. P. Naeini, G. Cooper, M. Hauskrecht,
"Obtaining well calibrated probabilities using Bayesian binning", AAAI 2015
(expected calibration error). G. W. Brier, Monthly Weather Review 78, 1950.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import expit

from ..errors import InputError

__all__ = [
    "mutual_information",
    "calibration",
    "CalibrationResult",
    "fit_llr_scale",
    "error_probability",
    "prob_one",
]

_LN2 = math.log(2.0)


def _validated_pair(bits, llr) -> tuple[np.ndarray, np.ndarray]:
    """Flatten and check ``bits`` (0/1) and ``llr`` (float, no NaN) of the same shape."""
    b = np.asarray(bits)
    L = np.asarray(llr)
    if L.dtype.kind not in "fiu":
        raise InputError(f"LLRs must be a numeric array; got dtype {L.dtype}.")
    if b.shape != L.shape:
        raise InputError(
            f"bits and LLRs must have the same shape; got bits {b.shape} and LLRs {L.shape}."
        )
    if b.size == 0:
        raise InputError("bits and LLRs are empty.")
    if b.dtype.kind == "b":
        b = b.astype(np.uint8)
    if b.dtype.kind not in "iuf" or np.any((b != 0) & (b != 1)):
        raise InputError("bits must contain only 0 and 1.")
    L = np.asarray(L, dtype=np.float64).ravel()
    if np.isnan(L).any():
        raise InputError(f"LLRs contain NaN (flat index {int(np.flatnonzero(np.isnan(L))[0])}).")
    return b.astype(np.uint8).ravel(), L


def prob_one(llr) -> np.ndarray:
    """Probability of bit 1 stated by LLRs: ``1 / (1 + e^L)`` (accurate for large ``|L|``).

    Parameters
    ----------
    llr : array_like of float
        LLRs ``ln P(0) - ln P(1)``; ``+-inf`` allowed.

    Returns
    -------
    ndarray of float64, same shape
    """
    return expit(-np.asarray(llr, dtype=np.float64))


def error_probability(llr) -> np.ndarray:
    """Stated probability that the hard decision of each LLR is wrong: ``1 / (1 + e^|L|)``.

    Parameters
    ----------
    llr : array_like of float

    Returns
    -------
    ndarray of float64, same shape, values in [0, 0.5]
    """
    return expit(-np.abs(np.asarray(llr, dtype=np.float64)))


def mutual_information(bits, llr, *, return_stderr: bool = False):
    """Mutual information between bits and their LLRs, by time averaging.

    ``I = 1 - mean(log2(1 + exp(-(1 - 2 x) L)))``, computed stably as
    ``1 - mean(logaddexp(0, -(1 - 2x) L)) / ln 2``. For consistent LLRs
    (true log-likelihood ratios of a binary-input symmetric channel with
    uniform inputs) this is an unbiased estimate of ``I(X; L)``; for
    inconsistent LLRs it is the "achievable information" of a receiver that
    trusts them, and can be negative when they are badly over-confident.

    Parameters
    ----------
    bits : array_like of 0/1, any shape
        Transmitted bits.
    llr : array_like of float, same shape
        LLRs ``ln P(x=0) - ln P(x=1)``; ``+-inf`` allowed (a wrong infinite
        LLR gives ``-inf``).
    return_stderr : bool
        Also return the standard error of the mean (treating the terms as
        independent; with correlated bits, e.g. within a decoded frame, it
        understates the spread).

    Returns
    -------
    float
        Mutual information in bits per bit, at most 1.
    float
        Standard error (only with ``return_stderr=True``).

    Examples
    --------
    >>> round(mutual_information([0, 1, 0, 1], [30.0, -30.0, 30.0, -30.0]), 6)
    1.0
    >>> mutual_information([0, 1], [0.0, 0.0])
    0.0
    """
    b, L = _validated_pair(bits, llr)
    signed = (1.0 - 2.0 * b) * L
    with np.errstate(over="ignore"):
        terms = np.logaddexp(0.0, -signed) / _LN2
    mi = 1.0 - float(np.mean(terms))
    if not return_stderr:
        return mi
    se = float(np.std(terms, ddof=1) / math.sqrt(terms.size)) if terms.size > 1 else math.inf
    return mi, se


def fit_llr_scale(bits, llr, *, max_iter: int = 100, tol: float = 1e-10) -> tuple[float, float]:
    """Scale factor ``s`` for which ``s * L`` best explains the bits (1-D maximum likelihood).

    Maximises ``sum log P(x | s L) = -sum log(1 + exp(-s (1 - 2x) L))``, a
    concave function of ``s`` (logistic regression with one weight and no
    intercept), by safeguarded Newton steps. ``s < 1`` means the LLRs are
    over-confident (they should be shrunk), ``s > 1`` under-confident.

    Parameters
    ----------
    bits : array_like of 0/1
    llr : array_like of float, same shape (finite)
    max_iter : int
    tol : float
        Stop when the Newton step is below ``tol * max(1, |s|)``.

    Returns
    -------
    scale : float
        The maximiser; ``inf`` when every nonzero LLR has the right sign (no
        finite maximiser), ``nan`` when every LLR is zero.
    stderr : float
        ``1 / sqrt(Fisher information)`` at the maximiser (``nan`` when
        ``scale`` is not finite). Bits are treated as independent.
    """
    b, L = _validated_pair(bits, llr)
    if not np.all(np.isfinite(L)):
        raise InputError("fit_llr_scale needs finite LLRs; clip infinite values first.")
    z = (1.0 - 2.0 * b) * L  # positive where the LLR points the right way
    z = z[z != 0.0]
    if z.size == 0:
        return math.nan, math.nan
    if np.all(z > 0):
        return math.inf, math.nan
    if np.all(z < 0):
        return -math.inf, math.nan

    def nll(s: float) -> float:
        return float(np.sum(np.logaddexp(0.0, -s * z)))

    s = 1.0
    f = nll(s)
    for _ in range(max_iter):
        q = expit(-s * z)  # P(wrong | s z)
        grad = -float(np.sum(z * q))
        hess = float(np.sum(z * z * q * (1.0 - q)))
        if hess <= 0.0:
            break
        step = -grad / hess
        t = 1.0
        while True:  # backtracking keeps the objective decreasing
            s_new = s + t * step
            f_new = nll(s_new)
            if f_new <= f + 1e-12 * abs(f) or t < 1e-12:
                break
            t *= 0.5
        done = abs(s_new - s) <= tol * max(1.0, abs(s))
        s, f = s_new, f_new
        if done:
            break
    q = expit(-s * z)
    info = float(np.sum(z * z * q * (1.0 - q)))
    se = 1.0 / math.sqrt(info) if info > 0 else math.nan
    return float(s), se


@dataclass
class CalibrationResult:
    """Calibration of LLRs against the true bits (reliability-diagram data).

    The quantity calibrated is the stated probability that the hard decision
    is wrong, ``p = 1 / (1 + e^|L|)`` (in [0, 1/2]); per bin it is set against
    the observed frequency of hard-decision errors.

    Attributes
    ----------
    bin_edges : ndarray of shape (B + 1,), float64
        Edges on the stated-error-probability axis; bin ``b`` holds
        ``bin_edges[b] <= p < bin_edges[b+1]`` (the last bin includes 1/2).
    predicted : ndarray of shape (B,), float64
        Mean stated error probability per bin (NaN where empty).
    observed : ndarray of shape (B,), float64
        Observed hard-decision error frequency per bin (NaN where empty).
    counts : ndarray of shape (B,), int64
        Number of bits per bin.
    errors : ndarray of shape (B,), int64
        Number of hard-decision errors per bin.
    observed_low, observed_high : ndarray of shape (B,), float64
        95 % Clopper–Pearson interval of the observed frequency (NaN where empty).
    ece : float
        Expected calibration error ``sum_b (n_b / N) |observed_b - predicted_b|``.
    mce : float
        Maximum calibration error over non-empty bins.
    brier : float
        Brier score ``mean((P(x=1) - x)^2)``.
    llr_scale, llr_scale_stderr : float
        Maximum-likelihood LLR scale factor (see :func:`fit_llr_scale`).
    num_bits : int
    bit_errors : int
        Hard-decision errors in total.
    binning : str
        ``"uniform"`` or ``"log"``.
    """

    bin_edges: np.ndarray
    predicted: np.ndarray
    observed: np.ndarray
    counts: np.ndarray
    errors: np.ndarray
    observed_low: np.ndarray
    observed_high: np.ndarray
    ece: float
    mce: float
    brier: float
    llr_scale: float
    llr_scale_stderr: float
    num_bits: int
    bit_errors: int
    binning: str

    @property
    def confidence(self) -> str:
        """``"over-confident"``, ``"under-confident"`` or ``"consistent"``.

        Decided from the fitted scale factor: over-confident when
        ``s + 2 se < 1``, under-confident when ``s - 2 se > 1`` (about a 95 %
        two-sided test of ``s = 1``); ``"undetermined"`` when no hard decision
        was wrong or every LLR is zero (the scale is not finite).
        """
        s, se = self.llr_scale, self.llr_scale_stderr
        if not (math.isfinite(s) and math.isfinite(se)):
            return "undetermined"
        if s + 2.0 * se < 1.0:
            return "over-confident"
        if s - 2.0 * se > 1.0:
            return "under-confident"
        return "consistent"

    @property
    def overconfident(self) -> bool:
        """True when the LLRs are significantly over-confident (see :attr:`confidence`)."""
        return self.confidence == "over-confident"

    def to_dict(self) -> dict:
        """JSON-ready dict (NaN as None)."""
        def arr(a):
            return [None if not math.isfinite(v) else float(v) for v in np.asarray(a, float)]

        def num(v):
            return float(v) if math.isfinite(v) else None

        return {
            "binning": self.binning,
            "bin_edges": arr(self.bin_edges),
            "predicted": arr(self.predicted),
            "observed": arr(self.observed),
            "observed_low": arr(self.observed_low),
            "observed_high": arr(self.observed_high),
            "counts": [int(c) for c in self.counts],
            "errors": [int(c) for c in self.errors],
            "ece": num(self.ece),
            "mce": num(self.mce),
            "brier": num(self.brier),
            "llr_scale": (None if math.isnan(self.llr_scale) else
                          (str(self.llr_scale) if math.isinf(self.llr_scale)
                           else float(self.llr_scale))),
            "llr_scale_stderr": num(self.llr_scale_stderr),
            "confidence": self.confidence,
            "num_bits": int(self.num_bits),
            "bit_errors": int(self.bit_errors),
        }


def _bin_edges(num_bins: int, binning: str, min_prob: float) -> np.ndarray:
    if binning == "uniform":
        return np.linspace(0.0, 0.5, num_bins + 1)
    if binning == "log":
        # lowest bin [0, min_prob), then log-spaced bins up to 1/2
        inner = np.logspace(math.log10(min_prob), math.log10(0.5), num_bins)
        return np.concatenate([[0.0], inner])
    raise InputError(f"binning must be 'uniform' or 'log'; got {binning!r}.")


def calibration(bits, llr, *, num_bins: int = 10, binning: str = "uniform",
                min_prob: float = 1e-6) -> CalibrationResult:
    """Reliability-diagram data, expected calibration error, Brier score and LLR scale.

    Parameters
    ----------
    bits : array_like of 0/1, any shape
        True (transmitted) bits.
    llr : array_like of float, same shape
        LLRs ``ln P(x=0) - ln P(x=1)``; ``+-inf`` allowed except for the
        scale fit, which then uses LLRs clipped to ``+-700``.
    num_bins : int
        Number of bins on the stated-error-probability axis ``[0, 1/2]``.
    binning : {"uniform", "log"}
        ``"uniform"``: equal-width bins on ``[0, 1/2]`` (the usual ECE, which
        is the confidence-based ECE of a binary classifier). ``"log"``: a
        lowest bin ``[0, min_prob)`` then ``num_bins - 1`` log-spaced bins up
        to 1/2 — better for decoders, whose error probabilities span many
        decades (use it with log axes).
    min_prob : float
        Lower edge of the log-spaced bins (``binning="log"`` only).

    Returns
    -------
    CalibrationResult

    Notes
    -----
    A hard decision of 0 is taken where ``L >= 0`` (so ``L = 0`` states an
    error probability of 1/2 and is right half the time on uniform bits).
    Calibrated LLRs give ``observed ≈ predicted`` in every bin and an ECE
    near 0 (up to the binomial noise of the bins).
    """
    if not (isinstance(num_bins, int | np.integer) and num_bins >= 1):
        raise InputError(f"num_bins must be an integer >= 1; got {num_bins!r}.")
    if binning == "log" and num_bins < 2:
        raise InputError("binning='log' needs num_bins >= 2.")
    if not (0.0 < min_prob < 0.5):
        raise InputError(f"min_prob must be in (0, 0.5); got {min_prob!r}.")
    b, L = _validated_pair(bits, llr)
    edges = _bin_edges(int(num_bins), binning, min_prob)
    p_err = error_probability(L)
    hard = (L < 0).astype(np.uint8)
    wrong = hard != b
    idx = np.clip(np.searchsorted(edges, p_err, side="right") - 1, 0, len(edges) - 2)
    B = len(edges) - 1
    counts = np.bincount(idx, minlength=B).astype(np.int64)
    errors = np.bincount(idx, weights=wrong.astype(np.float64), minlength=B).astype(np.int64)
    sum_pred = np.bincount(idx, weights=p_err, minlength=B)
    with np.errstate(invalid="ignore", divide="ignore"):
        predicted = np.where(counts > 0, sum_pred / counts, np.nan)
        observed = np.where(counts > 0, errors / counts, np.nan)
    low, high = _clopper_pearson(errors, counts)
    nonempty = counts > 0
    gaps = np.abs(observed[nonempty] - predicted[nonempty])
    N = int(b.size)
    ece = float(np.sum(counts[nonempty] * gaps) / N)
    mce = float(np.max(gaps)) if gaps.size else math.nan
    p1 = prob_one(L)
    brier = float(np.mean((p1 - b) ** 2))
    s, se = fit_llr_scale(b, np.clip(L, -700.0, 700.0))
    return CalibrationResult(
        bin_edges=edges, predicted=predicted, observed=observed, counts=counts,
        errors=errors, observed_low=low, observed_high=high, ece=ece, mce=mce,
        brier=brier, llr_scale=s, llr_scale_stderr=se, num_bits=N,
        bit_errors=int(wrong.sum()), binning=binning,
    )


def _clopper_pearson(k: np.ndarray, n: np.ndarray, level: float = 0.95):
    """Two-sided Clopper–Pearson interval for k successes in n trials (NaN where n = 0)."""
    from scipy.stats import beta

    a = (1.0 - level) / 2.0
    k = np.asarray(k, dtype=np.float64)
    n = np.asarray(n, dtype=np.float64)
    low = np.full(k.shape, np.nan)
    high = np.full(k.shape, np.nan)
    ok = n > 0
    with np.errstate(invalid="ignore", divide="ignore"):
        lo = np.where(k > 0, beta.ppf(a, k, n - k + 1), 0.0)
        hi = np.where(k < n, beta.ppf(1 - a, k + 1, n - k), 1.0)
    low[ok] = lo[ok]
    high[ok] = hi[ok]
    return low, high
