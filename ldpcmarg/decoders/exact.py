"""Exact bitwise posteriors, log-partition function and block-ML words for small codes.

For channel LLRs ``lambda`` (``ln P(x=0|y) - ln P(x=1|y)``) the posterior over
codewords is ``p(x|y) = exp(-sum_i lambda_i x_i) / Z`` on ``{x : Hx = 0}``.
This module computes, per frame,

* ``P(x_i = 1 | y)`` and the posterior LLR ``ln P(x_i=0|y) - ln P(x_i=1|y)``;
* ``ln Z = ln sum_{x in C} exp(-sum_i lambda_i x_i)``;
* the block-ML codeword ``argmin_{x in C} sum_i lambda_i x_i``;

by one of two exact methods:

``"enumerate"``
    Visit all ``2**k`` codewords (Gray-code order over a generator basis).
    Cost ``O(2**k * n)`` per frame.
``"trellis"``
    Forward-backward (Bahl, Cocke, Jelinek & Raviv 1974) and Viterbi passes over
    the syndrome trellis of a full-rank parity-check matrix (Wolf 1978): the
    state after bit ``i`` is the partial syndrome, ``2**rank`` states.
    Cost ``O(2**(n-k) * n)`` per frame, memory ``(n + 1) * 2**(n-k) * 9`` bytes.

Everything is done in the log domain on the non-negative "distance"
``D(x) = sum_i |lambda_i| [x_i != h_i]`` from the hard decision ``h``
(``sum_i lambda_i x_i = sum_{lambda_i < 0} lambda_i + D(x)``), so that large
LLRs (1e4 and beyond) neither overflow nor cancel.

References
----------
L. R. Bahl, J. Cocke, F. Jelinek and J. Raviv, "Optimal decoding of linear codes
for minimizing symbol error rate", IEEE Trans. Inf. Theory 20(2), 284-287, 1974.
doi:10.1109/TIT.1974.1055186
J. K. Wolf, "Efficient maximum likelihood decoding of linear block codes using a
trellis", IEEE Trans. Inf. Theory 24(1), 76-80, 1978. doi:10.1109/TIT.1978.1055821
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba as nb
import numpy as np
from scipy.special import expit

from .._params import Param
from .._settings import NUMBA_OPTS
from ..code import gf2
from ..errors import InputError
from .base import Decoder, DecodeResult, check_llr

__all__ = ["ExactResult", "exact_posteriors", "choose_method", "ExactDecoder",
           "MAX_ENUMERATION_K", "MAX_TRELLIS_STATE_BITS", "TRELLIS_MEMORY_BYTES"]

#: Largest dimension k accepted by enumeration (2**k codewords per frame).
MAX_ENUMERATION_K = 24
#: Largest rank of H accepted by the syndrome trellis (2**rank states).
MAX_TRELLIS_STATE_BITS = 24
#: Memory cap of the trellis tables, (n + 1) * 2**rank * 9 bytes.
TRELLIS_MEMORY_BYTES = 1 << 30


@dataclass
class ExactResult:
    """Exact posteriors of F frames.

    Attributes
    ----------
    p1 : ndarray of shape (F, n), float64
        ``P(x_i = 1 | y)``.
    log_partition : ndarray of shape (F,), float64
        ``ln Z = ln sum_{x in C} exp(-sum_i lambda_i x_i)`` (natural log).
    ml_bits : ndarray of shape (F, n), uint8
        A block-ML codeword (ties, of probability zero for continuous LLRs,
        broken by the method's visiting order).
    method : str
        ``"enumerate"`` or ``"trellis"``.
    posterior_llr : ndarray of shape (F, n), float64
        ``ln P(x_i=0|y) - ln P(x_i=1|y)`` from log-domain sums (not from
        ``p1``); ``+inf``/``-inf`` only for a bit that is 0/1 in every codeword.
    """

    p1: np.ndarray
    log_partition: np.ndarray
    ml_bits: np.ndarray
    method: str
    posterior_llr: np.ndarray


# ------------------------------------------------------------------ kernels
@nb.njit(**NUMBA_OPTS)
def _lae(a, b):
    """ln(e^a + e^b), exact for -inf arguments."""
    if a < b:
        a, b = b, a
    if b == -np.inf:
        return a
    return a + math.log1p(math.exp(b - a))


@nb.njit(**NUMBA_OPTS)
def _enumerate_kernel(gen, absl, hard, logs, ml, lnz):
    """Exact sums over the 2**k codewords spanned by ``gen``.

    gen : (k, n) uint8 generator rows (assumed independent, H gen^T = 0).
    absl : (F, n) float64 |lambda|;  hard : (F, n) uint8 hard decisions.
    Outputs: logs (F, 2, n) = ln sum_{x: x_i = v} exp(-D(x)); ml (F, n) uint8;
    lnz (F,) = ln sum_x exp(-D(x)).
    """
    k, n = gen.shape
    F = absl.shape[0]
    total = np.int64(1) << np.int64(k)
    x = np.zeros(n, dtype=np.uint8)
    mx = np.empty((2, n))
    acc = np.empty((2, n))
    for f in range(F):
        a = absl[f]
        h = hard[f]
        # pass 1: per-(value, bit) maxima of -D and the best codeword
        for i in range(n):
            x[i] = 0
            mx[0, i] = -np.inf
            mx[1, i] = -np.inf
        best = np.inf
        gmax = -np.inf
        for t in range(total):
            if t > 0:
                j = 0
                tt = t
                while (tt & 1) == 0:
                    tt >>= 1
                    j += 1
                for i in range(n):
                    x[i] ^= gen[j, i]
            d = 0.0
            for i in range(n):
                if x[i] != h[i]:
                    d += a[i]
            if d < best:
                best = d
                for i in range(n):
                    ml[f, i] = x[i]
            for i in range(n):
                if -d > mx[x[i], i]:
                    mx[x[i], i] = -d
        gmax = -best
        # pass 2: scaled sums
        for i in range(n):
            x[i] = 0
            acc[0, i] = 0.0
            acc[1, i] = 0.0
        z = 0.0
        for t in range(total):
            if t > 0:
                j = 0
                tt = t
                while (tt & 1) == 0:
                    tt >>= 1
                    j += 1
                for i in range(n):
                    x[i] ^= gen[j, i]
            d = 0.0
            for i in range(n):
                if x[i] != h[i]:
                    d += a[i]
            z += math.exp(-d - gmax)
            for i in range(n):
                v = x[i]
                acc[v, i] += math.exp(-d - mx[v, i])
        lnz[f] = gmax + math.log(z)
        for v in range(2):
            for i in range(n):
                if mx[v, i] == -np.inf:
                    logs[f, v, i] = -np.inf
                else:
                    logs[f, v, i] = mx[v, i] + math.log(acc[v, i])


@nb.njit(**NUMBA_OPTS)
def _trellis_kernel(masks, nstates, absl, hard, logs, ml, lnz, alpha, dec):
    """BCJR and Viterbi over the syndrome trellis.

    masks : (n,) int64, column i of the full-rank H as a bit mask of its rows.
    nstates : 2**rank.  absl, hard : (F, n) as in ``_enumerate_kernel``.
    alpha : (n + 1, nstates) float64 and dec : (n, nstates) uint8 work tables.
    Outputs as in ``_enumerate_kernel``.
    """
    F, n = absl.shape
    S = nstates
    beta = np.empty(S)
    beta2 = np.empty(S)
    delta = np.empty(S)
    delta2 = np.empty(S)
    for f in range(F):
        a = absl[f]
        h = hard[f]
        for s in range(S):
            alpha[0, s] = -np.inf
            delta[s] = -np.inf
        alpha[0, 0] = 0.0
        delta[0] = 0.0
        # forward (sum-product) and Viterbi (max-product) recursions
        for i in range(n):
            mk = masks[i]
            c0 = a[i] if h[i] == 1 else 0.0   # cost of x_i = 0
            c1 = a[i] if h[i] == 0 else 0.0   # cost of x_i = 1
            for s in range(S):
                p = s ^ mk
                alpha[i + 1, s] = _lae(alpha[i, s] - c0, alpha[i, p] - c1)
                v0 = delta[s] - c0
                v1 = delta[p] - c1
                if v1 > v0:
                    delta2[s] = v1
                    dec[i, s] = 1
                else:
                    delta2[s] = v0
                    dec[i, s] = 0
            for s in range(S):
                delta[s] = delta2[s]
        lnz[f] = alpha[n, 0]
        # traceback of the ML path ending in the zero syndrome
        s = 0
        for i in range(n - 1, -1, -1):
            b = dec[i, s]
            ml[f, i] = b
            if b == 1:
                s ^= masks[i]
        # backward recursion with bit marginals
        for s in range(S):
            beta[s] = -np.inf
        beta[0] = 0.0
        for i in range(n - 1, -1, -1):
            mk = masks[i]
            c0 = a[i] if h[i] == 1 else 0.0
            c1 = a[i] if h[i] == 0 else 0.0
            m0 = -np.inf
            m1 = -np.inf
            for s in range(S):
                t0 = alpha[i, s] + beta[s]
                t1 = alpha[i, s] + beta[s ^ mk]
                if t0 > m0:
                    m0 = t0
                if t1 > m1:
                    m1 = t1
            s0 = 0.0
            s1 = 0.0
            for s in range(S):
                if m0 > -np.inf:
                    s0 += math.exp(alpha[i, s] + beta[s] - m0)
                if m1 > -np.inf:
                    s1 += math.exp(alpha[i, s] + beta[s ^ mk] - m1)
            logs[f, 0, i] = (m0 + math.log(s0) - c0) if m0 > -np.inf else -np.inf
            logs[f, 1, i] = (m1 + math.log(s1) - c1) if m1 > -np.inf else -np.inf
            for s in range(S):
                beta2[s] = _lae(beta[s] - c0, beta[s ^ mk] - c1)
            for s in range(S):
                beta[s] = beta2[s]


# ------------------------------------------------------------ public functions
def _sizes(code) -> tuple[int, int, int]:
    return int(code.n), int(code.k), int(code.rank)


def choose_method(code, method: str = "auto") -> str:
    """Pick ``"enumerate"`` or ``"trellis"`` for a code, or refuse.

    ``"auto"`` takes the cheaper feasible method: enumeration costs about
    ``2 * 2**k * n`` steps per frame, the trellis about ``3 * 2**rank * n``.

    Raises
    ------
    InputError
        When the requested (or every) method is infeasible; the message gives
        n, k, rank and the limits.
    """
    n, k, r = _sizes(code)
    enum_ok = k <= MAX_ENUMERATION_K
    trellis_mem = (n + 1) * (2**r) * 9 if r <= 62 else float("inf")
    trellis_ok = r <= MAX_TRELLIS_STATE_BITS and trellis_mem <= TRELLIS_MEMORY_BYTES
    sizes = (f"n = {n}, k = {k}, rank = {r}; enumeration needs k <= {MAX_ENUMERATION_K}, "
             f"the syndrome trellis needs rank <= {MAX_TRELLIS_STATE_BITS} and "
             f"(n+1)*2**rank*9 bytes <= {TRELLIS_MEMORY_BYTES} (here {trellis_mem:.3g})")
    if method == "enumerate":
        if not enum_ok:
            raise InputError(f"Exact posteriors by enumeration are infeasible: {sizes}.")
        return method
    if method == "trellis":
        if not trellis_ok:
            raise InputError(f"Exact posteriors by the syndrome trellis are infeasible: {sizes}.")
        return method
    if method != "auto":
        raise InputError(f"method must be 'auto', 'enumerate' or 'trellis'; got {method!r}.")
    if not (enum_ok or trellis_ok):
        raise InputError(f"Exact posteriors are infeasible for this code: {sizes}.")
    if enum_ok and (not trellis_ok or 2 * 2**k <= 3 * 2**r):
        return "enumerate"
    return "trellis"


#: Largest per-frame sum of |LLR| the exact sums accept. Every quantity the
#: kernels form (distances ``D(x)``, their differences, ``ln Z``) is bounded by
#: this sum, so below it all arithmetic is finite and exact to rounding;
#: above it ``D(x)`` would overflow to inf and ``inf - inf`` give NaN.
EXACT_MAX_ABS_LLR_SUM = 1.0e300


def _check_exact_range(llr2: np.ndarray) -> None:
    """Refuse frames whose LLR magnitudes would overflow the exact log-domain sums."""
    with np.errstate(over="ignore"):
        tot = np.abs(llr2).sum(axis=1)
    bad = ~(tot <= EXACT_MAX_ABS_LLR_SUM)
    if bad.any():
        f = int(np.flatnonzero(bad)[0])
        raise InputError(
            f"LLR magnitudes of frame {f} are too large for exact posteriors: the sum of "
            f"|LLR| over the frame is {float(tot[f]):.3g}, above {EXACT_MAX_ABS_LLR_SUM:.0e}, "
            "where the log-domain sums would overflow. Clip the LLRs first (e.g. to +-1e4, "
            "which already means certainty in float64)."
        )


def exact_posteriors(code, llr, method: str = "auto") -> ExactResult:
    """Exact bitwise posteriors, ``ln Z`` and block-ML codewords.

    Parameters
    ----------
    code : ParityCheckCode
    llr : array_like of shape (F, n) or (n,), float
        Channel LLRs ``ln P(y|x=0) - ln P(y|x=1)`` (positive favours 0); finite.
    method : {"auto", "enumerate", "trellis"}
        See :func:`choose_method`.

    Returns
    -------
    ExactResult
        Arrays with first dimension F (F = 1 for a single frame).

    Raises
    ------
    InputError
        Bad LLRs (NaN, infinite, or a frame whose sum of ``|LLR|`` exceeds
        :data:`EXACT_MAX_ABS_LLR_SUM`), or a code too large for the chosen
        method (message gives n, k and rank).

    Examples
    --------
    >>> import numpy as np
    >>> from ldpcmarg.code.parity_check import ParityCheckCode
    >>> rep3 = ParityCheckCode(np.array([[1, 1, 0], [0, 1, 1]]))  # {000, 111}
    >>> res = exact_posteriors(rep3, np.array([1.0, 1.0, -1.0]))
    >>> bool(np.isclose(res.log_partition[0], np.log(1 + np.exp(-1.0)), rtol=1e-14))
    True
    >>> res.ml_bits.tolist()
    [[0, 0, 0]]
    """
    llr2, _ = check_llr(llr, code.n)
    _check_exact_range(llr2)
    method = choose_method(code, method)
    F, n = llr2.shape
    absl = np.ascontiguousarray(np.abs(llr2))
    hard = np.ascontiguousarray((llr2 < 0).astype(np.uint8))
    logs = np.empty((F, 2, n), dtype=np.float64)
    ml = np.zeros((F, n), dtype=np.uint8)
    lnz_rel = np.empty(F, dtype=np.float64)
    if method == "enumerate":
        gen = np.ascontiguousarray(gf2.nullspace(code.H), dtype=np.uint8)
        if gen.shape[0] == 0:
            gen = np.zeros((0, n), dtype=np.uint8)
        _enumerate_kernel(gen, absl, hard, logs, ml, lnz_rel)
    else:
        packed, _ = gf2.row_reduce(code.H)
        rows = gf2.unpack_rows(packed, n).astype(np.int64)  # (rank, n)
        r = rows.shape[0]
        masks = np.zeros(n, dtype=np.int64)
        for j in range(r):
            masks |= rows[j] << j
        S = 1 << r
        alpha = np.empty((n + 1, S), dtype=np.float64)
        dec = np.empty((n, S), dtype=np.uint8)
        _trellis_kernel(np.ascontiguousarray(masks), S, absl, hard, logs, ml, lnz_rel, alpha, dec)
    with np.errstate(invalid="ignore"):
        post = logs[:, 0, :] - logs[:, 1, :]
    p1 = expit(-post)
    offset = np.where(llr2 < 0, llr2, 0.0).sum(axis=1)
    return ExactResult(p1=p1, log_partition=lnz_rel - offset, ml_bits=ml, method=method,
                       posterior_llr=post)


class ExactDecoder(Decoder):
    """Exact bitwise posteriors with the block-ML codeword as hard decisions.

    Outputs
    -------
    bits : (F, n) uint8
        The block-ML codeword (minimises ``sum_i lambda_i x_i``), which is
        what a "maximum-likelihood" BER/FER curve needs; note that it is not
        the bitwise-MAP decision ``posterior_llr < 0`` (the two differ on a
        few bits at low SNR).
    posterior_llr : (F, n) float64
        Exact ``ln P(x_i=0|y) - ln P(x_i=1|y)`` from log-domain sums
        (``+-inf`` only for bits that are constant over the code).
    info["log_partition"] : (F,) float64
        ``ln Z = ln sum_{x in C} exp(-sum_i lambda_i x_i)``.
    info["bitwise_map"] : (F, n) uint8
        Bitwise-MAP decisions ``posterior_llr < 0``.

    For small codes only: enumeration needs ``k <= 24``, the trellis
    ``rank <= 24`` (and about ``(n+1) * 2**rank * 9`` bytes).
    """

    name = "exact"
    description = ("Exact bitwise posteriors and ML by enumeration or syndrome trellis "
                   "(small codes).")
    params = {"method": Param("choice", "auto", choices=("auto", "enumerate", "trellis"),
                              doc="Enumeration of codewords, syndrome trellis, or the cheaper.")}

    def _setup(self) -> None:
        self.method = choose_method(self.code, self.options["method"])

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        res = exact_posteriors(self.code, llr, self.method)
        F = llr.shape[0]
        valid = np.asarray(self.code.is_codeword(res.ml_bits), dtype=bool).reshape(-1)
        return DecodeResult(bits=res.ml_bits, posterior_llr=res.posterior_llr,
                            iterations=np.zeros(F, dtype=np.int64), valid=valid,
                            info={"log_partition": res.log_partition,
                                  "bitwise_map": (res.posterior_llr < 0).astype(np.uint8)})
