"""Hard-decision decoders for the BSC: guarded bit flipping, Gallager A and Gallager B.

All three see only the signs of the channel LLRs (``LLR < 0`` means bit 1), work
on the flat Tanner-graph arrays of :class:`~ldpcmarg.code.parity_check.ParityCheckCode`
(check-major edge order) and decode a batch of F frames at once, frames in
parallel (``numba.prange``; each frame owns its buffers). ``posterior_llr`` is
None. ``info["unsatisfied_checks"]`` holds, per frame, the number of parity
checks the returned word leaves unsatisfied (0 for a valid word).

Bit flipping
------------
The plain parallel rule (flip every bit with more unsatisfied than satisfied
checks) oscillates on frames it cannot correct and then ends worse than the
channel's own decisions. Here the number of unsatisfied checks must fall in
every round, so the decoder cannot cycle:

* the *gain* of bit i is ``g_i = u_i - (d_i - u_i)``, the drop in the number
  of unsatisfied checks if bit i alone were flipped (``u_i`` of its ``d_i``
  checks unsatisfied);
* each round flips, together, every bit whose gain equals the largest gain
  ``G``, provided ``G > 0``;
* guard: if that parallel step does not lower the number of unsatisfied checks
  (two flipped bits shared checks), it is replaced by flipping only the
  lowest-numbered of those bits, which lowers the count by exactly ``G``;
* the decoder stops at a valid word, at ``max_iter`` rounds, or at a word no
  single flip improves (``G <= 0``).

Each round strictly lowers the count, so the returned word is also the best
word seen (fewest unsatisfied checks), and it never leaves more unsatisfied
checks than the channel word. With one bit per round this is the sequential
flipping decoder of Sipser & Spielman ("Expander codes", IEEE Trans. IT 42(6),
1996, doi:10.1109/18.556667); flipping all maximal-gain bits at once is the
usual speed-up.

Gallager A and B
----------------
Binary message passing (Gallager, *Low-Density Parity-Check Codes*, MIT Press,
1963; Richardson & Urbanke, *Modern Coding Theory*, 2008, sec. 4.10). A check
sends each bit the XOR of the other incoming bit messages. A bit of channel
value ``y`` sends a check the opposite value ``1 - y`` when at least ``b`` of
its other ``d - 1`` incoming check messages disagree with ``y``, else ``y``.
Gallager A is ``b = d - 1`` (all of them must disagree); Gallager B takes a
fixed threshold ``b`` (default :func:`gallager_b_default_threshold`,
``min(ceil(d/2) + 1, d - 1)``, which equals Gallager A for ``d = 3, 4``). After every
iteration the bit decision is the majority of the channel value and all ``d``
check messages, a tie keeping the channel value. Decoding stops at a valid
word or at ``max_iter``; with ``keep_best`` (default) the returned word is the
decision with the fewest unsatisfied checks over all iterations, the channel
word included. The density evolution of both rules on the BSC is
:func:`ldpcmarg.analysis.density_evolution.gallager_bsc_evolution`.
"""

from __future__ import annotations

import numba as nb
import numpy as np

from .._params import Param
from .._settings import NUMBA_OPTS
from ..errors import InputError
from .base import Decoder, DecodeResult
from .message_passing import _Threads

__all__ = ["BitFlippingDecoder", "GallagerADecoder", "GallagerBDecoder",
           "gallager_b_default_threshold"]


# --------------------------------------------------------------------- kernels
@nb.njit(**NUMBA_OPTS)
def _syndrome(x, check_ptr, edge_var, syn):
    """Fill ``syn[c]`` with the parity of check c on word ``x``; return the number of ones."""
    m = check_ptr.shape[0] - 1
    total = 0
    for c in range(m):
        par = 0
        for e in range(check_ptr[c], check_ptr[c + 1]):
            par ^= x[edge_var[e]]
        syn[c] = par
        total += par
    return total


@nb.njit(parallel=True, **NUMBA_OPTS)
def _flip_batch(hard, check_ptr, edge_var, var_ptr, var_edges, edge_check, max_iter,
                bits, iters, valid, unsat):
    """Guarded maximal-gain bit flipping over a batch (see the module docstring).

    Assumes ``hard`` (F, n) uint8 in {0, 1}, contiguous int arrays of the code's
    Tanner graph, and output arrays of matching first dimension F.
    """
    F, n = hard.shape
    m = check_ptr.shape[0] - 1
    for f in nb.prange(F):
        x = bits[f]
        for i in range(n):
            x[i] = hard[f, i]
        syn = np.empty(m, dtype=np.uint8)
        gain = np.empty(n, dtype=np.int64)
        cand = np.empty(n, dtype=np.int64)
        nunsat = _syndrome(x, check_ptr, edge_var, syn)
        it = 0
        while nunsat > 0 and it < max_iter:
            best = -(1 << 30)
            for i in range(n):
                u = 0
                for t in range(var_ptr[i], var_ptr[i + 1]):
                    u += syn[edge_check[var_edges[t]]]
                g = 2 * u - (var_ptr[i + 1] - var_ptr[i])
                gain[i] = g
                if g > best:
                    best = g
            if best <= 0:
                break  # no single flip lowers the count: a local minimum
            nc = 0
            for i in range(n):
                if gain[i] == best:
                    cand[nc] = i
                    nc += 1
            before = nunsat
            for j in range(nc):
                i = cand[j]
                x[i] ^= 1
                for t in range(var_ptr[i], var_ptr[i + 1]):
                    c = edge_check[var_edges[t]]
                    nunsat += 1 - 2 * syn[c]
                    syn[c] ^= 1
            if nunsat >= before:
                # guard: undo every flip but the first (XOR toggles commute), which
                # alone lowers the count by exactly `best`
                for j in range(1, nc):
                    i = cand[j]
                    x[i] ^= 1
                    for t in range(var_ptr[i], var_ptr[i + 1]):
                        c = edge_check[var_edges[t]]
                        nunsat += 1 - 2 * syn[c]
                        syn[c] ^= 1
            it += 1
        iters[f] = it
        valid[f] = nunsat == 0
        unsat[f] = nunsat


@nb.njit(parallel=True, **NUMBA_OPTS)
def _gallager_batch(hard, check_ptr, edge_var, var_ptr, var_edges, thresh, max_iter,
                    keep_best, bits, iters, valid, unsat):
    """Gallager A/B binary message passing over a batch (see the module docstring).

    ``thresh[i]`` is the number of disagreeing extrinsic check messages that
    makes bit i send the opposite of its channel value (``d_i - 1`` for
    Gallager A); a value above ``d_i - 1`` means the bit always sends its
    channel value. Assumes validated contiguous arrays.
    """
    F, n = hard.shape
    m = check_ptr.shape[0] - 1
    E = edge_var.shape[0]
    for f in nb.prange(F):
        y = hard[f]
        x = np.empty(n, dtype=np.uint8)
        best_x = bits[f]
        v2c = np.empty(E, dtype=np.uint8)
        c2v = np.empty(E, dtype=np.uint8)
        syn = np.empty(m, dtype=np.uint8)
        for i in range(n):
            x[i] = y[i]
            best_x[i] = y[i]
        for e in range(E):
            v2c[e] = y[edge_var[e]]
        nunsat = _syndrome(x, check_ptr, edge_var, syn)
        best_unsat = nunsat
        it = 0
        while nunsat > 0 and it < max_iter:
            it += 1
            for c in range(m):
                par = 0
                for e in range(check_ptr[c], check_ptr[c + 1]):
                    par ^= v2c[e]
                for e in range(check_ptr[c], check_ptr[c + 1]):
                    c2v[e] = par ^ v2c[e]
            for i in range(n):
                yi = y[i]
                deg = var_ptr[i + 1] - var_ptr[i]
                dis = 0
                for t in range(var_ptr[i], var_ptr[i + 1]):
                    dis += c2v[var_edges[t]] ^ yi
                # decision: majority of the channel value and all d check messages;
                # a tie keeps the channel value
                x[i] = (1 - yi) if 2 * dis > deg + 1 else yi
                for t in range(var_ptr[i], var_ptr[i + 1]):
                    e = var_edges[t]
                    ext = dis - (c2v[e] ^ yi)
                    v2c[e] = (1 - yi) if ext >= thresh[i] else yi
            nunsat = _syndrome(x, check_ptr, edge_var, syn)
            if nunsat < best_unsat or not keep_best:
                best_unsat = nunsat
                for i in range(n):
                    best_x[i] = x[i]
        iters[f] = it
        valid[f] = best_unsat == 0
        unsat[f] = best_unsat


# -------------------------------------------------------------------- classes
def _threads_param() -> Param:
    return Param("int", 0, low=0,
                 doc="threads for the frame-parallel loop (0 = numba's current setting)")


class _HardDecision(Decoder):
    """Shared set-up of the hard-decision family (sign of the channel LLR in, bits out)."""

    hard_output = True

    def _setup(self) -> None:
        c = self.code
        # int64 copies: the kernels index with them and must not depend on the
        # code object's own dtypes (int32 or int64)
        self._check_ptr = np.ascontiguousarray(c.check_ptr, dtype=np.int64)
        self._edge_var = np.ascontiguousarray(c.edge_var, dtype=np.int64)
        self._var_ptr = np.ascontiguousarray(c.var_ptr, dtype=np.int64)
        self._var_edges = np.ascontiguousarray(c.var_edges, dtype=np.int64)
        self._edge_check = np.ascontiguousarray(c.edge_check, dtype=np.int64)

    def _outputs(self, F: int):
        n = self.code.n
        return (np.empty((F, n), dtype=np.uint8), np.zeros(F, dtype=np.int64),
                np.zeros(F, dtype=np.bool_), np.zeros(F, dtype=np.int64))

    @staticmethod
    def _hard(llr: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray((llr < 0).astype(np.uint8))


class BitFlippingDecoder(_HardDecision):
    """Guarded maximal-gain bit flipping for the BSC (never cycles).

    Each round flips the bits whose flip would remove the most unsatisfied
    checks, and only when that number falls; otherwise the lowest-numbered
    such bit alone (see :mod:`ldpcmarg.decoders.hard_decision`). The returned
    word is the best seen: it never leaves more unsatisfied checks than the
    channel's hard decision. ``iterations`` counts flipping rounds.
    """

    name = "bit-flipping"
    description = ("Guarded bit flipping for the BSC: flips the bits with the most "
                   "unsatisfied checks while their number falls.")
    params = {
        "max_iter": Param("int", 100, low=1, doc="maximum number of flipping rounds"),
        "threads": _threads_param(),
    }

    def _decode(self, llr):
        hard = self._hard(llr)
        bits, iters, valid, unsat = self._outputs(hard.shape[0])
        with _Threads(self.options["threads"]):
            _flip_batch(hard, self._check_ptr, self._edge_var, self._var_ptr, self._var_edges,
                        self._edge_check, int(self.options["max_iter"]), bits, iters, valid,
                        unsat)
        return DecodeResult(bits=bits, posterior_llr=None, iterations=iters, valid=valid,
                            info={"unsatisfied_checks": unsat})


def gallager_b_default_threshold(var_degree) -> np.ndarray:
    """Default fixed Gallager-B threshold per bit of degree d: ``min(ceil(d/2) + 1, d - 1)``.

    A fixed ``b`` must be high while messages are unreliable and may be lower
    later (Gallager re-chose it per iteration). Among fixed thresholds this one
    gave the largest density-evolution threshold on the BSC for the regular
    (d, 2d) ensembles with d = 3 ... 7 (``gallager_bsc_threshold``: p* = 0.0395,
    0.0476, 0.0278, 0.0341, 0.0379), where a bare majority of the ``d - 1``
    extrinsic messages does much worse for even d (d = 4, b = 2: p* = 0.0077).
    It is 2 (Gallager A) for d = 3 and 3 (Gallager A) for d = 4. Degree-1 bits
    get 1, which they cannot reach, so they always send their channel value.
    """
    d = np.asarray(var_degree, dtype=np.int64)
    return np.maximum(np.minimum((d + 1) // 2 + 1, d - 1), 1)


class _Gallager(_HardDecision):
    def _thresholds(self) -> np.ndarray:
        raise NotImplementedError

    def _setup(self) -> None:
        super()._setup()
        self._thresh = np.ascontiguousarray(self._thresholds(), dtype=np.int64)

    def _decode(self, llr):
        hard = self._hard(llr)
        bits, iters, valid, unsat = self._outputs(hard.shape[0])
        with _Threads(self.options["threads"]):
            _gallager_batch(hard, self._check_ptr, self._edge_var, self._var_ptr,
                            self._var_edges, self._thresh, int(self.options["max_iter"]),
                            bool(self.options["keep_best"]), bits, iters, valid, unsat)
        return DecodeResult(bits=bits, posterior_llr=None, iterations=iters, valid=valid,
                            info={"unsatisfied_checks": unsat})


def _gallager_params() -> dict[str, Param]:
    return {
        "max_iter": Param("int", 100, low=1, doc="maximum number of iterations"),
        "keep_best": Param("bool", True,
                           doc="return the decision with the fewest unsatisfied checks "
                               "seen (else the last one)"),
        "threads": _threads_param(),
    }


class GallagerADecoder(_Gallager):
    """Gallager's algorithm A (binary message passing, unanimous rule) for the BSC.

    A bit sends the opposite of its channel value only when all its other
    check messages disagree with it (Gallager 1963). ``iterations`` counts
    message-passing iterations.
    """

    name = "gallager-a"
    description = "Gallager A binary message passing for the BSC (unanimous flip rule)."
    params = _gallager_params()

    def _thresholds(self):
        d = np.asarray(self.code.var_degrees, dtype=np.int64)
        # d - 1 disagreeing messages of d - 1; degree-1 bits (no extrinsic message)
        # get 1, which they cannot reach
        return np.maximum(d - 1, 1)


class GallagerBDecoder(_Gallager):
    """Gallager's algorithm B (binary message passing, threshold rule) for the BSC.

    A bit sends the opposite of its channel value when at least ``b`` of its
    other check messages disagree with it (Gallager 1963). ``b`` defaults to
    ``min(ceil(d/2) + 1, d - 1)`` per bit of degree d
    (:func:`gallager_b_default_threshold`); a given ``b`` applies to every bit,
    capped at ``d - 1`` (Gallager A) for bits of lower degree.
    """

    name = "gallager-b"
    description = ("Gallager B binary message passing for the BSC (flip on b disagreeing "
                   "checks of d - 1).")
    params = {
        **_gallager_params(),
        "b": Param("int", None, low=1,
                   doc="disagreeing extrinsic check messages needed to send the opposite "
                       "value (default min(ceil(d/2)+1, d-1) per bit of degree d)"),
    }

    def _thresholds(self):
        d = np.asarray(self.code.var_degrees, dtype=np.int64)
        b = self.options["b"]
        if b is None:
            return gallager_b_default_threshold(d)
        dmax = int(d.max()) if d.size else 0
        if b > max(dmax - 1, 1):
            raise InputError(
                f"The 'b' option of gallager-b must be at most d - 1 = {max(dmax - 1, 1)} "
                f"for this code (largest bit degree {dmax}); got {b}."
            )
        return np.maximum(np.minimum(b, d - 1), 1)
