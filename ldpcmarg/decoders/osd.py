"""Ordered-statistics decoding (OSD) of binary linear codes, hard and soft output.

Ordered-statistics decoding (Fossorier & Lin 1995) per frame:

1. sort the bits by reliability ``|lambda_i|``;
2. find the most reliable independent positions (MRIP, an information set)
   by GF(2) elimination;
3. re-encode the hard decisions on the MRIP with every error pattern of
   Hamming weight ``<= order`` on it;
4. keep the codeword of smallest discrepancy
   ``D(x) = sum_i |lambda_i| [x_i != h_i]`` (``h`` = hard decision), which is
   the most likely candidate, since ``sum_i lambda_i x_i = const + D(x)``.

Order ``k`` visits every codeword and is block-ML; order ``ceil(d/4 - 1)`` is
asymptotically ML (same paper).

Implementation notes
--------------------
* Step 2 runs on the parity-check matrix: eliminating ``H`` with columns
  tried from the *least* reliable upwards gives pivots on the least reliable
  independent columns of ``H``, whose complement is the MRIP (the greedy
  basis of a matroid and of its dual are complements). The elimination is
  :func:`ldpcmarg.code.gf2._row_reduce_kernel` on bit-packed rows.
* A candidate flips a set ``S`` of MRIP bits. Its parity bits differ from
  the hard decisions by ``e(S) = e0 XOR (XOR_{i in S} col_i)`` (``col_i`` =
  packed column of the reduced ``H``), so its discrepancy is
  ``sum_{i in S} |lambda_i| + sum_j |lambda_{p_j}| e_j(S)``; the second sum is
  read from per-byte tables (8 parity bits per look-up).
* Patterns are visited depth-first with the MRIP sorted by increasing
  reliability; a branch is cut as soon as its partial discrepancy
  ``sum_{i in S} |lambda_i|`` reaches the best complete one (plus the soft
  margin in soft mode). The cut never changes the decision: every completion
  of the branch is at least as far from ``h``.
* Optional probabilistic stopping rule (our own, ``stop_prob``): phase ``w``
  (patterns of weight exactly ``w``) can only find the sent codeword when the
  MRIP holds at least ``w`` hard-decision errors. Given the channel LLRs these
  errors are independent with probabilities ``1 / (1 + e^{|lambda_i|})``, so
  the probability of ``>= w`` errors is a Poisson-binomial tail, computed
  exactly per frame; phase ``w`` and the rest are skipped when it is below
  ``stop_prob``. Per frame, this raises the chance of missing the sent word by
  at most ``stop_prob`` (on a memoryless channel with true LLRs).
* Soft output (``soft=true``): the max-log APP over the candidate list,
  ``L_i = min_{c: c_i = 1} D(c) - min_{c: c_i = 0} D(c)`` clipped to
  ``+-soft_clip``; a bit with no competitor in the list gets ``+-soft_clip``.
  Every candidate within ``soft_clip`` of the best is visited, so the clipped
  result is exactly the clipped max-log value over all patterns of weight
  ``<= order``.

References
----------
M. P. C. Fossorier and S. Lin, "Soft-decision decoding of linear block codes
based on ordered statistics", IEEE Trans. Inf. Theory 41(5), 1379-1396, 1995.
doi:10.1109/18.412683
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from .._params import Param
from .._settings import NUMBA_OPTS
from ..code import gf2
from ..errors import InputError
from .base import Decoder, DecodeResult

__all__ = ["OSDDecoder", "osd_decode", "MAX_PATTERNS_PER_FRAME"]

#: Cap on the number of error patterns one frame may need (sum of C(k, w), w <= order).
MAX_PATTERNS_PER_FRAME = 1 << 26


# ------------------------------------------------------------------ kernels
@nb.njit(inline="always")
def _parity_cost(e, table, nbytes):
    """sum_j w_j e_j from per-byte tables: table[b, v] = sum of w over the set bits of byte v."""
    tot = 0.0
    for b in range(nbytes):
        v = (e[b >> 3] >> np.uint64((b & 7) * 8)) & np.uint64(255)
        tot += table[b, v]
    return tot


@nb.njit(**NUMBA_OPTS)
def _tail_at_least(p, w):
    """P(at least w successes) for independent Bernoulli(p_i) (Poisson-binomial, exact DP)."""
    # dist[t] = P(exactly t successes) for t < w; the tail is 1 - sum
    dist = np.zeros(w + 1)
    dist[0] = 1.0
    for i in range(p.shape[0]):
        pi = p[i]
        for t in range(w, 0, -1):
            dist[t] = dist[t] * (1.0 - pi) + dist[t - 1] * pi
        dist[0] *= 1.0 - pi
    s = 0.0
    for t in range(w):
        s += dist[t]
    return max(0.0, 1.0 - s)


@nb.njit(**NUMBA_OPTS)
def _osd_kernel(hrows, n, llr, order, stop_prob, soft, soft_clip,
                bits_out, post_out, patterns_out, phases_out):
    """OSD of every frame.

    hrows : (r, ceil(n/64)) uint64, independent packed rows of H (r = rank).
    llr : (F, n) float64 channel LLRs (positive favours 0), finite.
    order : maximum error-pattern weight on the MRIP (0 <= order <= k).
    stop_prob : probabilistic stopping threshold (0 disables).
    soft, soft_clip : list soft output and its clip (nats).
    Outputs: bits_out (F, n) uint8, post_out (F, n) float64 (written when soft),
    patterns_out (F,) int64 candidates evaluated, phases_out (F,) int64 last phase run.
    Prior validation is assumed.
    """
    F = llr.shape[0]
    r, words = hrows.shape
    k = n - r
    rw = max(1, (r + 63) // 64)
    nbytes = (r + 7) // 8
    one = np.uint64(1)
    work = np.empty((r, words), dtype=np.uint64)
    pivots = np.empty(max(r, 1), dtype=np.int64)
    is_piv = np.empty(n, dtype=np.uint8)
    info = np.empty(max(k, 1), dtype=np.int64)
    rel = np.empty(max(k, 1))
    perr = np.empty(max(k, 1))
    cols = np.zeros((max(k, 1), rw), dtype=np.uint64)
    e0 = np.zeros(rw, dtype=np.uint64)
    table = np.zeros((max(nbytes, 1), 256))
    depth = max(order, 1)
    idx = np.empty(depth + 1, dtype=np.int64)
    estack = np.zeros((depth + 1, rw), dtype=np.uint64)
    cstack = np.zeros(depth + 1)
    best_set = np.empty(depth, dtype=np.int64)
    mn = np.empty((2, n))
    flipped = np.zeros(max(k, 1), dtype=np.uint8)
    hard = np.empty(n, dtype=np.uint8)
    absl = np.empty(n)
    for f in range(F):
        for i in range(n):
            hard[i] = 1 if llr[f, i] < 0.0 else 0
            absl[i] = abs(llr[f, i])
            is_piv[i] = 0
        # least reliable first: the pivots become the parity positions
        col_order = np.argsort(absl, kind="mergesort")
        for j in range(r):
            for q in range(words):
                work[j, q] = hrows[j, q]
        rk = gf2._row_reduce_kernel(work, n, col_order, pivots)
        # rk == r because the rows are independent
        for j in range(rk):
            is_piv[pivots[j]] = 1
        # MRIP in increasing reliability (col_order is increasing)
        t = 0
        for q in range(n):
            c = col_order[q]
            if is_piv[c] == 0:
                info[t] = c
                rel[t] = absl[c]
                t += 1
        # packed columns of the reduced H on the MRIP, and e0 = parity(h_I) XOR h_P
        for a in range(k):
            c = info[a]
            for q in range(rw):
                cols[a, q] = np.uint64(0)
            for j in range(r):
                if (work[j, c >> 6] >> np.uint64(c & 63)) & one:
                    cols[a, j >> 6] |= one << np.uint64(j & 63)
        for q in range(rw):
            e0[q] = np.uint64(0)
        for a in range(k):
            if hard[info[a]] == 1:
                for q in range(rw):
                    e0[q] ^= cols[a, q]
        for j in range(r):
            if hard[pivots[j]] == 1:
                e0[j >> 6] ^= one << np.uint64(j & 63)
        # byte tables of parity-bit reliabilities
        for b in range(nbytes):
            table[b, 0] = 0.0
            for v in range(1, 256):
                low = 0
                while ((v >> low) & 1) == 0:
                    low += 1
                j = b * 8 + low
                wj = absl[pivots[j]] if j < r else 0.0
                table[b, v] = table[b, v & (v - 1)] + wj
        best = _parity_cost(e0, table, nbytes)
        best_w = 0
        count = 1
        margin = soft_clip if soft else 0.0
        if soft:
            for i in range(n):
                mn[0, i] = np.inf
                mn[1, i] = np.inf
            # order-0 candidate
            for a in range(k):
                c = info[a]
                mn[hard[c], c] = best
            for j in range(r):
                c = pivots[j]
                x = hard[c] ^ np.uint8((e0[j >> 6] >> np.uint64(j & 63)) & one)
                mn[x, c] = best
        phase = 0
        if stop_prob > 0.0:
            for a in range(k):
                perr[a] = 1.0 / (1.0 + math.exp(rel[a]))
        for w in range(1, min(order, k) + 1):
            if stop_prob > 0.0 and _tail_at_least(perr[:k], w) < stop_prob:
                break
            phase = w
            # depth-first visit of the w-subsets of the MRIP, cut on partial cost
            for q in range(rw):
                estack[0, q] = e0[q]
            cstack[0] = 0.0
            lev = 0
            idx[0] = -1
            while lev >= 0:
                idx[lev] += 1
                a = idx[lev]
                if a > k - (w - lev):
                    lev -= 1
                    continue
                pc = cstack[lev] + rel[a]
                if pc >= best + margin:
                    lev -= 1  # larger a only costs more
                    continue
                for q in range(rw):
                    estack[lev + 1, q] = estack[lev, q] ^ cols[a, q]
                cstack[lev + 1] = pc
                if lev == w - 1:
                    tot = pc + _parity_cost(estack[lev + 1], table, nbytes)
                    count += 1
                    if soft:
                        for s in range(w):
                            flipped[idx[s]] = 1
                        for b in range(k):
                            c = info[b]
                            x = hard[c] ^ flipped[b]
                            if tot < mn[x, c]:
                                mn[x, c] = tot
                        for j in range(r):
                            c = pivots[j]
                            x = hard[c] ^ np.uint8((estack[lev + 1, j >> 6]
                                                    >> np.uint64(j & 63)) & one)
                            if tot < mn[x, c]:
                                mn[x, c] = tot
                        for s in range(w):
                            flipped[idx[s]] = 0
                    if tot < best:
                        best = tot
                        best_w = w
                        for s in range(w):
                            best_set[s] = idx[s]
                else:
                    lev += 1
                    idx[lev] = a
        # rebuild the best codeword
        for q in range(rw):
            estack[0, q] = e0[q]
        for i in range(n):
            bits_out[f, i] = hard[i]
        for s in range(best_w):
            a = best_set[s]
            bits_out[f, info[a]] ^= 1
            for q in range(rw):
                estack[0, q] ^= cols[a, q]
        for j in range(r):
            if (estack[0, j >> 6] >> np.uint64(j & 63)) & one:
                bits_out[f, pivots[j]] ^= 1
        if soft:
            for i in range(n):
                v = mn[1, i] - mn[0, i]  # inf - finite or finite - inf
                if v > soft_clip:
                    v = soft_clip
                elif v < -soft_clip:
                    v = -soft_clip
                post_out[f, i] = v
        patterns_out[f] = count
        phases_out[f] = phase


# ------------------------------------------------------------ public functions
def _pattern_count(k: int, order: int) -> int:
    return sum(math.comb(k, w) for w in range(order + 1))


def osd_decode(code, llr, order: int = 2, *, stop_prob: float = 0.0, soft: bool = False,
               soft_clip: float = 30.0, hrows: np.ndarray | None = None):
    """Ordered-statistics decoding of a batch of frames.

    Parameters
    ----------
    code : ParityCheckCode
    llr : ndarray of shape (F, n), float64
        Channel LLRs ``ln P(y|x=0) - ln P(y|x=1)`` (positive favours 0), finite
        and already validated (see :func:`~ldpcmarg.decoders.base.check_llr`).
    order : int
        Largest weight of the error patterns re-encoded on the MRIP, ``0 <= order <= k``.
    stop_prob : float
        Probabilistic stopping threshold in ``[0, 1)``; 0 disables the rule.
    soft : bool
        Also return list-based max-log posterior LLRs.
    soft_clip : float
        Magnitude cap of the soft output, nats.
    hrows : ndarray of shape (rank, words), uint64, optional
        Independent packed rows of ``H`` (computed from the code when omitted).

    Returns
    -------
    bits : ndarray of shape (F, n), uint8
        The most likely codeword found (always a codeword).
    posterior_llr : ndarray of shape (F, n), float64, or None
    patterns : ndarray of shape (F,), int64
        Candidates whose discrepancy was evaluated (order 0 counts one).
    phases : ndarray of shape (F,), int64
        Largest pattern weight searched (below ``order`` when stopped early).
    """
    n = int(code.n)
    if hrows is None:
        hrows, _ = gf2.row_reduce(code.H)
    hrows = np.ascontiguousarray(hrows, dtype=np.uint64)
    if hrows.shape[0] == 0:
        hrows = np.zeros((0, max(1, (n + 63) // 64)), dtype=np.uint64)
    F = llr.shape[0]
    bits = np.empty((F, n), dtype=np.uint8)
    post = np.zeros((F, n), dtype=np.float64) if soft else np.zeros((1, 1), dtype=np.float64)
    patterns = np.empty(F, dtype=np.int64)
    phases = np.empty(F, dtype=np.int64)
    _osd_kernel(hrows, n, np.ascontiguousarray(llr, dtype=np.float64), int(order),
                float(stop_prob), bool(soft), float(soft_clip), bits, post, patterns, phases)
    return bits, (post if soft else None), patterns, phases


class OSDDecoder(Decoder):
    """Ordered-statistics decoding (Fossorier & Lin 1995) of order 0 to k.

    Outputs
    -------
    bits : (F, n) uint8
        The most likely codeword among the re-encoded candidates (always a
        codeword, so ``valid`` is all True). Order ``k`` is block-ML.
    posterior_llr : (F, n) float64 or None
        With ``soft=true``: max-log LLRs over the candidate list, clipped to
        ``+-soft_clip``; otherwise None (hard output).
    iterations : (F,) int64
        Largest error-pattern weight searched (the phase reached).
    info["osd_patterns"] : (F,) int64
        Number of candidate codewords evaluated.

    Cost per frame: one GF(2) elimination of ``H`` plus at most
    ``sum_{w <= order} C(k, w)`` candidates (fewer after the lossless cut).
    """

    name = "osd"
    description = ("Ordered-statistics decoding (Fossorier-Lin) of order 0..k; "
                   "order k is block-ML; optional list soft output.")
    params = {
        "order": Param("int", 2, low=0,
                       doc="Largest error-pattern weight re-encoded on the most reliable "
                           "basis (order k is block-ML)."),
        "stop_prob": Param("float", 0.0, low=0.0, high=1.0, high_open=True,
                           doc="Skip the phases of weight w and up once P(>= w errors on the "
                               "basis) < stop_prob (0 = off)."),
        "soft": Param("bool", False,
                      doc="Return max-log posterior LLRs over the candidate list."),
        "soft_clip": Param("float", 30.0, low=0.0, low_open=True,
                           doc="Magnitude cap of the soft output, nats."),
    }

    @property
    def hard_output(self) -> bool:  # type: ignore[override]
        return not self.options["soft"]

    def _setup(self) -> None:
        order = self.options["order"]
        k = int(self.code.k)
        if order > k:
            raise InputError(f"The 'order' option of osd must be <= k = {k} for this code; "
                             f"got {order} (order k already visits every codeword).")
        count = _pattern_count(k, order)
        if count > MAX_PATTERNS_PER_FRAME:
            raise InputError(
                f"OSD of order {order} on k = {k} visits up to {count:.3g} patterns per frame, "
                f"above the cap {MAX_PATTERNS_PER_FRAME}; lower the order.")
        hrows, _ = gf2.row_reduce(self.code.H)
        self._hrows = np.ascontiguousarray(hrows, dtype=np.uint64)

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        o = self.options
        bits, post, patterns, phases = osd_decode(
            self.code, llr, o["order"], stop_prob=o["stop_prob"], soft=o["soft"],
            soft_clip=o["soft_clip"], hrows=self._hrows)
        F = llr.shape[0]
        return DecodeResult(bits=bits, posterior_llr=post, iterations=phases,
                            valid=np.ones(F, dtype=bool),
                            info={"osd_patterns": patterns})
