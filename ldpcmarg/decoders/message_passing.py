"""Message-passing decoders: sum-product, min-sum family, layered, reweighted sum-product.

The hard-decision family (bit flipping, Gallager A/B) lives in
:mod:`ldpcmarg.decoders.hard_decision`.

All decoders work on the flat Tanner-graph arrays of
:class:`~ldpcmarg.code.parity_check.ParityCheckCode` (check-major edge order) and decode a
batch of F frames at once; chunks of frames run in parallel (``numba.prange``
over chunks), each chunk owning its message buffers.

Conventions
-----------
* LLR ``= ln P(x=0|y) - ln P(x=1|y)``; positive favours 0. Channel LLRs are
  clipped to ``+-LLR_MAX`` (:mod:`ldpcmarg._settings`).
* ``c2v[e]`` is the check-to-bit message on edge ``e``; the bit-to-check
  message is the cavity value ``L[i] - c2v[e]`` (``L`` = posterior LLR).
* One *iteration* is one update of every check-to-bit message (flooding) or
  one sweep over all checks (layered). ``iterations == 0`` means the channel
  hard decision already satisfied every check.
* Early stop (default on): before each iteration the hard decision of the
  current posterior is tested against every check; a frame stops as soon as
  it is a codeword. The returned posterior is always ``channel LLR + sum of
  the incoming check messages`` of the messages that were current at exit.

Box-plus
--------
Sum-product check messages are exact to rounding at every LLR magnitude
(:func:`_sp_magnitudes`). With ``r = 1 - tanh(|v|/2) = 2e^{-|v|}/(1+e^{-|v|})``
the complement ``q = 1 - prod tanh(|v_j|/2)`` of the extrinsic product is
accumulated as ``q <- q + r - q r`` (positive terms only, so no cancellation
however reliable the inputs), and the message magnitude is
``log((2 - q)/q)``: one ``exp`` and one ``log`` per edge, as the plain
``tanh``/``atanh`` form costs, but without its saturation (that form cannot
send more than ``ln(2**54 - 1) ~ 37.4``, so LLRs on a larger scale stopped
being corrected). An extrinsic set whose magnitudes all exceed
``_BIG64 = 600`` (where ``e^{-|v|}`` leaves the normal range) is computed as
the shifted log-sum-exp ``-ln sum_j e^{-|v_j|}``, to which the box-plus
reduces there to rounding: exact at every magnitude. Channel LLRs are
clipped to ``+-LLR_MAX``; messages of degree-1
checks (an empty extrinsic product, i.e. certainty) are capped there too.
All operations act on magnitudes and signs separately, so decoding is exactly
symmetric under codeword translation (sign flips).

Performance notes
-----------------
* Signs are carried arithmetically (``copysign``) and the two smallest
  magnitudes of min-sum are tracked with ``min``/``max`` instead of branches:
  message signs are random at low SNR, and the branchy form mispredicted so
  often that it ran at about half the speed (measured on the PEG (3,6)
  n = 1008 code).
* Index arrays are passed as uint64 (no negative-index tests in the hot loops).
* Frames are dealt to ``4 x threads`` chunks that own their buffers.
* float32 messages (option ``precision``) gave no speed-up on the machine
  measured in these scalar kernels.
* Option ``kernel`` (``auto`` by default): batches of at least 64 undamped
  frames (min-sum and sum-product) go to the frame-interleaved SIMD kernels of
  :mod:`ldpcmarg.decoders.vectorised` (min-sum identical in float64, float32
  differs by rounding only; sum-product agrees to rounding: same complement
  form, polynomial exp/log). Figures:
  ``experiments/bench_message_passing.py``.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from .._params import Param
from .._settings import LLR_MAX, NUMBA_OPTS
from ..errors import InputError
from .base import Decoder, DecodeResult

__all__ = [
    "SumProductDecoder",
    "LayeredSumProductDecoder",
    "MinSumDecoder",
    "OffsetMinSumDecoder",
    "LayeredMinSumDecoder",
    "ReweightedSumProductDecoder",
]

_MODE_SP = 0
_MODE_MS = 1

#: Cavity magnitude above which a sum-product extrinsic set switches from the
#: ``1 - tanh`` form to a shifted log-sum-exp (:func:`_sp_magnitudes`):
#: ``e^{-600}`` is still a normal float64, ``e^{-40}`` a normal float32.
_BIG64 = 600.0
_BIG32 = 40.0


# --------------------------------------------------------------------- kernels
# Index arrays reach the kernels as uint64 (``_setup``): unsigned indices spare
# numba the negative-index wraparound test on every access (measured ~20 % on
# min-sum). Check updates are written inline in the frame loops; loop-invariant
# flags (damping, weights, tolerance) are hoisted by LLVM.


@nb.njit(**NUMBA_OPTS)
def _first_unsatisfied(L, check_ptr, edge_var, start):
    """Index of an unsatisfied check of the hard decision ``L < 0``, or -1.

    The scan starts at check ``start`` and wraps around, so a check that failed
    at the previous iteration (the likeliest to fail again) is tried first.
    """
    m = check_ptr.shape[0] - 1
    for t in range(m):
        c = start + t
        if c >= m:
            c -= m
        par = False
        for e in range(check_ptr[c], check_ptr[c + 1]):
            par ^= L[edge_var[e]] < 0
        if par:
            return c
    return -1


@nb.njit(**NUMBA_OPTS)
def _first_open(L, check_ptr, edge_var, start):
    """Like :func:`_first_unsatisfied`, but a check touching a bit with ``L == 0`` is open too.

    Used for the early stop: a tie (e.g. a BEC erasure not yet resolved) is no
    decision, even when the all-zero hard decision happens to satisfy the checks.
    """
    m = check_ptr.shape[0] - 1
    for t in range(m):
        c = start + t
        if c >= m:
            c -= m
        par = False
        tie = False
        for e in range(check_ptr[c], check_ptr[c + 1]):
            v = L[edge_var[e]]
            par ^= v < 0
            tie |= v == 0.0
        if par or tie:
            return c
    return -1


@nb.njit(**NUMBA_OPTS)
def _sp_magnitudes(vbuf, d, big, cap, tbuf):
    """Extrinsic sum-product message magnitudes of one check.

    Reads the cavity LLRs ``vbuf[:d]``, writes ``|msg_k|`` for ``k < d`` to
    ``tbuf[:d]`` (capped at ``cap``); ``vbuf[d:2d]`` and ``tbuf[d]`` are scratch.

    With ``r_j = 1 - tanh(|v_j|/2) = 2 e^{-|v_j|} / (1 + e^{-|v_j|})`` and
    ``q_k = 1 - prod_{j != k} tanh(|v_j|/2)`` (built from prefix and suffix
    values with ``q <- q + r - q r``, a sum of positive terms, so ``q`` keeps
    its full relative precision however small it is), the message is
    ``2 atanh(1 - q_k) = log((2 - q_k) / q_k)``: exact to a few ulps in
    absolute terms whenever the smallest magnitude among the inputs ``j != k``
    is at most ``big`` (then ``q_k >= r_j`` stays a normal float, and inputs
    whose ``e^{-|v|}`` leaves the normal range change ``q_k`` by far less than
    an ulp). When every input of the set ``J = {j != k}`` exceeds ``big``,
    ``q_k = 2 sum_J e^{-|v_j|} (1 + O(e^{-big}))``, so the message is
    ``-ln sum_J e^{-|v_j|}``, taken as a log-sum-exp shifted by the smallest
    magnitude of ``J``: exact to rounding at every magnitude, for about two
    exponentials and one logarithm per input. (That regime is common: with
    early stopping off, messages on a loopy graph grow towards ``LLR_MAX``
    once a frame has converged.)
    """
    # one pass: prefix complements (q = 1 exactly once an input is an erasure:
    # r = 1, tanh = 0, the message is then exactly 0; min(., 1) keeps rounding
    # from pushing q above 1) and the two smallest magnitudes
    min1 = np.inf
    min2 = np.inf
    imin = d - d            # an index of d's integer type (d may be uint64)
    q = 0.0
    for k in range(d):
        x = abs(vbuf[k])
        if x < min1:
            min2 = min1
            min1 = x
            imin = k
        elif x < min2:
            min2 = x
        u = math.exp(-x)
        r = 2.0 * u / (1.0 + u)
        tbuf[k] = q                     # q of the prefix j < k
        vbuf[d + k] = r
        q = 1.0 if (r >= 1.0 or q >= 1.0) else min(q + r - q * r, 1.0)
    if min1 <= big:
        q = 0.0
        for kk in range(d):
            k = d - 1 - kk
            qf = tbuf[k]
            # prefix and suffix combined
            qk = 1.0 if (qf >= 1.0 or q >= 1.0) else min(qf + q - qf * q, 1.0)
            r = vbuf[d + k]
            q = 1.0 if (r >= 1.0 or q >= 1.0) else min(q + r - q * r, 1.0)
            if qk <= 0.0:               # empty product (degree-1 check): certain
                tbuf[k] = cap
            else:
                tbuf[k] = min(math.log((2.0 - qk) / qk), cap)
        if min2 <= big:
            return
    # from here on the set J = {j != imin} has only magnitudes above big (its
    # smallest is min2); if min1 > big too, so has every other set (smallest min1)
    if d == 1:
        tbuf[0] = cap
        return
    s = 0.0
    for j in range(d):
        if j != imin:
            s += math.exp(-(abs(vbuf[j]) - min2))
    tbuf[imin] = min(min2 - math.log(s), cap)
    if min1 > big:
        total = 0.0
        for j in range(d):
            total += math.exp(-(abs(vbuf[j]) - min1))     # the term of imin is 1
        for k in range(d):
            if k != imin:
                # total - own term >= 1: no cancellation
                rest = total - math.exp(-(abs(vbuf[k]) - min1))
                tbuf[k] = min(min1 - math.log(rest), cap)


@nb.njit(**NUMBA_OPTS)
def _check_messages(L, c2v, edge_var, a, d, mode, alpha, beta, big, cap, vbuf, tbuf):
    """Extrinsic check messages of one check (edges ``a .. a+d-1``).

    Reads the cavity LLRs ``v_k = L[edge_var[a+k]] - c2v[a+k]`` into ``vbuf[:d]``
    and writes the message *magnitudes* to ``tbuf[:d]``; returns the product
    ``s`` of the signs (``copysign(1, v_k)``) of all ``v_k``: message k is
    ``tbuf[k] * s * copysign(1, v_k)``. Signs are handled arithmetically, not
    with branches: random signs would defeat branch prediction.

    Sum-product: ``|msg_k| = |[+]_{j != k} v_j|`` by :func:`_sp_magnitudes`
    (exact at every magnitude; capped at ``cap`` only for degree-1 checks).
    Min-sum: ``|msg_k| = min(max(alpha * min_{j != k} |v_j| - beta, 0), cap)``.
    """
    sprod = 1.0
    if mode == _MODE_SP:
        for k in range(d):
            e = a + k
            v = L[edge_var[e]] - c2v[e]
            vbuf[k] = v
            sprod *= math.copysign(1.0, v)
        _sp_magnitudes(vbuf, d, big, cap, tbuf)
    else:
        min1 = np.inf
        min2 = np.inf
        idx = d
        for k in range(d):
            e = a + k
            v = L[edge_var[e]] - c2v[e]
            vbuf[k] = v
            sprod *= math.copysign(1.0, v)
            x = abs(v)
            # branch-free running two smallest magnitudes (ties keep the first index)
            min2 = min(min2, max(min1, x))
            idx = k if x < min1 else idx
            min1 = min(min1, x)
        m1 = min(max(alpha * min1 - beta, 0.0), cap)
        m2 = min(max(alpha * min2 - beta, 0.0), cap)
        for k in range(d):
            tbuf[k] = m2 if k == idx else m1
    return sprod


@nb.njit(**NUMBA_OPTS)
def _flood_ms_plain(llr, check_ptr, edge_var, alpha, beta, max_iter, early_stop, c2v, L, Lnew,
                    vbuf):
    """Min-sum flooding without damping, weights or tolerance: the common fast path.

    Same arithmetic, buffers and return values as :func:`_flood_frame` in min-sum
    mode (results are identical); kept separate because the single-purpose loop
    compiles to markedly faster code.
    """
    n = llr.shape[0]
    m = check_ptr.shape[0] - 1
    cap = LLR_MAX
    for i in range(n):
        L[i] = llr[i]
    for e in range(c2v.shape[0]):
        c2v[e] = 0.0
    it = 0
    start = 0
    while True:
        if early_stop:
            c = _first_open(L, check_ptr, edge_var, start)
            if c < 0:
                return it, True, True
            start = c
        if it >= max_iter:
            break
        for i in range(n):
            Lnew[i] = llr[i]
        for c in range(m):
            a = check_ptr[c]
            b = check_ptr[c + 1]
            min1 = np.inf
            min2 = np.inf
            idx = b
            sprod = 1.0
            for e in range(a, b):
                v = L[edge_var[e]] - c2v[e]
                vbuf[e - a] = v
                sprod *= math.copysign(1.0, v)
                x = abs(v)
                # branch-free running two smallest magnitudes (ties keep the first index)
                min2 = min(min2, max(min1, x))
                idx = e if x < min1 else idx
                min1 = min(min1, x)
            m1 = min(max(alpha * min1 - beta, 0.0), cap) * sprod
            m2 = min(max(alpha * min2 - beta, 0.0), cap) * sprod
            for e in range(a, b):
                mag = m2 if e == idx else m1
                out = mag * math.copysign(1.0, vbuf[e - a])
                c2v[e] = out
                Lnew[edge_var[e]] += out
        for i in range(n):
            L[i] = Lnew[i]
        it += 1
    ok = _first_unsatisfied(L, check_ptr, edge_var, start) < 0
    return it, ok, False


@nb.njit(**NUMBA_OPTS)
def _flood_sp_plain(llr, check_ptr, edge_var, big, max_iter, early_stop, c2v, L, Lnew, vbuf,
                    tbuf):
    """Sum-product flooding without damping, weights or tolerance: the common fast path.

    Same arithmetic (operation for operation) as :func:`_flood_frame` in
    sum-product mode, so results are identical; the single-purpose loop
    compiles to faster code.
    """
    n = llr.shape[0]
    m = check_ptr.shape[0] - 1
    cap = LLR_MAX
    for i in range(n):
        L[i] = llr[i]
    for e in range(c2v.shape[0]):
        c2v[e] = 0.0
    it = 0
    start = 0
    while True:
        if early_stop:
            c = _first_open(L, check_ptr, edge_var, start)
            if c < 0:
                return it, True, True
            start = c
        if it >= max_iter:
            break
        for i in range(n):
            Lnew[i] = llr[i]
        for c in range(m):
            a = check_ptr[c]
            d = check_ptr[c + 1] - a
            sprod = 1.0
            for k in range(d):
                e = a + k
                v = L[edge_var[e]] - c2v[e]
                vbuf[k] = v
                sprod *= math.copysign(1.0, v)
            _sp_magnitudes(vbuf, d, big, cap, tbuf)
            for k in range(d):
                e = a + k
                out = tbuf[k] * sprod * math.copysign(1.0, vbuf[k])
                c2v[e] = out
                Lnew[edge_var[e]] += out
        for i in range(n):
            L[i] = Lnew[i]
        it += 1
    ok = _first_unsatisfied(L, check_ptr, edge_var, start) < 0
    return it, ok, False


@nb.njit(**NUMBA_OPTS)
def _flood_frame(llr, check_ptr, edge_var, rho, weighted, mode, alpha, beta, damping,
                 max_iter, early_stop, tol, big, c2v, L, Lnew, vbuf, tbuf):
    """Flooding schedule on one frame.

    Parameters (prior validation assumed)
    ----------
    llr : (n,) clipped channel LLRs.
    check_ptr, edge_var : uint64 CSR arrays of the Tanner graph.
    rho : (m,) check weights, used when ``weighted`` (reweighted sum-product):
        ``L_i = llr_i + sum_c rho_c c2v_ci``; otherwise weight 1.
    c2v : (E,) receives the final check-to-bit messages.
    L : (n,) receives the posterior LLR; ``Lnew`` (n,) scratch.
    vbuf : (2 dmax + 1,) and tbuf : (dmax + 1,) float scratch.

    Returns
    -------
    (iterations, valid, stopped_early)
    """
    n = llr.shape[0]
    m = check_ptr.shape[0] - 1
    cap = LLR_MAX
    damped = damping > 0.0
    track = tol > 0.0
    keep = 1.0 - damping
    for i in range(n):
        L[i] = llr[i]
    for e in range(c2v.shape[0]):
        c2v[e] = 0.0
    it = 0
    start = 0
    stopped = False
    while True:
        if early_stop:
            c = _first_open(L, check_ptr, edge_var, start)
            if c < 0:
                return it, True, True
            start = c
        if it >= max_iter:
            break
        for i in range(n):
            Lnew[i] = llr[i]
        maxdelta = 0.0
        for c in range(m):
            a = check_ptr[c]
            d = check_ptr[c + 1] - a
            sprod = _check_messages(L, c2v, edge_var, a, d, mode, alpha, beta, big, cap,
                                  vbuf, tbuf)
            w = rho[c] if weighted else 1.0
            for k in range(d):
                e = a + k
                mag = tbuf[k]
                out = mag * sprod * math.copysign(1.0, vbuf[k])
                if damped:
                    old = c2v[e]
                    out = keep * out + damping * old
                    if track:
                        diff = abs(out - old)
                        if diff > maxdelta:
                            maxdelta = diff
                elif track:
                    diff = abs(out - c2v[e])
                    if diff > maxdelta:
                        maxdelta = diff
                c2v[e] = out
                if weighted:
                    Lnew[edge_var[e]] += w * out
                else:
                    Lnew[edge_var[e]] += out
        for i in range(n):
            L[i] = Lnew[i]
        it += 1
        if track and maxdelta <= tol:
            stopped = True
            break
    ok = _first_unsatisfied(L, check_ptr, edge_var, start) < 0
    return it, ok, stopped


@nb.njit(**NUMBA_OPTS)
def _layered_frame(llr, check_ptr, edge_var, mode, alpha, beta, damping, max_iter,
                   early_stop, big, c2v, L, vbuf, tbuf):
    """Layered (row-serial) schedule on one frame: checks updated one after another.

    After check ``c`` is updated, the posteriors of its bits are refreshed
    (``L_i <- (L_i - old c2v) + new c2v``) before the next check reads them.
    Same buffers and return values as :func:`_flood_frame`.
    """
    n = llr.shape[0]
    m = check_ptr.shape[0] - 1
    cap = LLR_MAX
    damped = damping > 0.0
    keep = 1.0 - damping
    for i in range(n):
        L[i] = llr[i]
    for e in range(c2v.shape[0]):
        c2v[e] = 0.0
    it = 0
    start = 0
    while True:
        if early_stop:
            c = _first_open(L, check_ptr, edge_var, start)
            if c < 0:
                return it, True, True
            start = c
        if it >= max_iter:
            break
        for c in range(m):
            a = check_ptr[c]
            d = check_ptr[c + 1] - a
            sprod = _check_messages(L, c2v, edge_var, a, d, mode, alpha, beta, big, cap,
                                  vbuf, tbuf)
            for k in range(d):
                e = a + k
                mag = tbuf[k]
                out = mag * sprod * math.copysign(1.0, vbuf[k])
                if damped:
                    out = keep * out + damping * c2v[e]
                c2v[e] = out
                L[edge_var[e]] = vbuf[k] + out
        it += 1
    ok = _first_unsatisfied(L, check_ptr, edge_var, start) < 0
    return it, ok, False


@nb.njit(parallel=True, **NUMBA_OPTS)
def _flood_batch(llr, check_ptr, edge_var, rho, weighted, mode, alpha, beta, damping,
                 max_iter, early_stop, tol, big, dmax, nchunks, post, iters, valid, stopped):
    """Flooding over a batch: llr (F, n) -> post (F, n); iters, valid, stopped (F,).

    Frames are dealt to ``nchunks`` chunks (frame f to chunk f mod nchunks); a
    chunk owns its message buffers and runs on one thread.
    """
    F, n = llr.shape
    E = edge_var.shape[0]
    for ch in nb.prange(nchunks):
        c2v = np.empty(E, dtype=post.dtype)
        Lnew = np.empty(n, dtype=post.dtype)
        vbuf = np.empty(2 * dmax + 1, dtype=post.dtype)
        tbuf = np.empty(dmax + 1, dtype=post.dtype)
        plain = damping == 0.0 and tol == 0.0 and not weighted
        for f in range(ch, F, nchunks):
            if plain and mode == _MODE_MS:
                it, ok, st = _flood_ms_plain(llr[f], check_ptr, edge_var, alpha, beta, max_iter,
                                             early_stop, c2v, post[f], Lnew, vbuf)
            elif plain:
                it, ok, st = _flood_sp_plain(llr[f], check_ptr, edge_var, big, max_iter,
                                             early_stop, c2v, post[f], Lnew, vbuf, tbuf)
            else:
                it, ok, st = _flood_frame(llr[f], check_ptr, edge_var, rho, weighted, mode,
                                          alpha, beta, damping, max_iter, early_stop, tol, big,
                                          c2v, post[f], Lnew, vbuf, tbuf)
            iters[f] = it
            valid[f] = ok
            stopped[f] = st


@nb.njit(parallel=True, **NUMBA_OPTS)
def _layered_batch(llr, check_ptr, edge_var, mode, alpha, beta, damping, max_iter,
                   early_stop, big, dmax, nchunks, post, iters, valid):
    """Layered schedule over a batch (see :func:`_layered_frame`, :func:`_flood_batch`)."""
    F, n = llr.shape
    E = edge_var.shape[0]
    for ch in nb.prange(nchunks):
        c2v = np.empty(E, dtype=post.dtype)
        vbuf = np.empty(2 * dmax + 1, dtype=post.dtype)
        tbuf = np.empty(dmax + 1, dtype=post.dtype)
        for f in range(ch, F, nchunks):
            it, ok, _ = _layered_frame(llr[f], check_ptr, edge_var, mode, alpha, beta, damping,
                                       max_iter, early_stop, big, c2v, post[f], vbuf, tbuf)
            iters[f] = it
            valid[f] = ok

@nb.njit(**NUMBA_OPTS)
def _local_beliefs_kernel(L, c2v, check_ptr, edge_var, lc_offset, lc_bit_ptr, lc_bits, out):
    """Check beliefs ``tau_c(S) ~ exp(-sum_{t} S_t v_t)`` with ``v_t = L_i - c2v_e`` (cavity LLRs).

    ``out`` (number of local codewords,) receives the normalised beliefs in the
    flat :class:`~ldpcmarg.code.parity_check.LocalCodewords` layout.
    """
    m = check_ptr.shape[0] - 1
    for c in range(m):
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        j0 = lc_offset[c]
        cnt = lc_offset[c + 1] - j0
        b0 = lc_bit_ptr[c]
        best = -np.inf
        for j in range(cnt):
            s = 0.0
            for t in range(d):
                if lc_bits[b0 + j * d + t]:
                    e = a + t
                    s -= L[edge_var[e]] - c2v[e]
            out[j0 + j] = s
            if s > best:
                best = s
        tot = 0.0
        for j in range(cnt):
            w = math.exp(out[j0 + j] - best)
            out[j0 + j] = w
            tot += w
        for j in range(cnt):
            out[j0 + j] /= tot


# -------------------------------------------------------------------- options
def _kernel_param() -> dict[str, Param]:
    return {"kernel": Param("choice", "auto", choices=("auto", "scalar", "lanes"),
                            doc="'lanes': frame-interleaved SIMD kernels "
                                "(ldpcmarg.decoders.vectorised); 'scalar': one frame at a "
                                "time; 'auto': lanes for batches of at least 64 undamped "
                                "frames, scalar otherwise")}


def _common_params(damping_default: float = 0.0) -> dict[str, Param]:
    return {
        "max_iter": Param("int", 50, low=1, doc="maximum number of iterations"),
        "early_stop": Param("bool", True,
                            doc="stop a frame as soon as its hard decision satisfies every check"),
        "damping": Param("float", damping_default, low=0.0, high=1.0, high_open=True,
                         doc="message damping d: new = (1-d) * update + d * old"),
        "precision": Param("choice", "float64", choices=("float64", "float32"),
                           doc="floating type of messages (posteriors are returned as float64)"),
        "threads": Param("int", 0, low=0,
                         doc="threads for the frame-parallel loop (0 = numba's current setting)"),
    }


class _Threads:
    """Context manager setting numba's thread count for one call, then restoring it."""

    def __init__(self, threads: int):
        self.threads = int(threads)
        self.old = None

    def __enter__(self):
        if self.threads > 0:
            self.old = nb.get_num_threads()
            nb.set_num_threads(min(self.threads, nb.config.NUMBA_NUM_THREADS))
        return self

    def __exit__(self, *exc):
        if self.old is not None:
            nb.set_num_threads(self.old)
        return False


class _MessagePassing(Decoder):
    """Shared machinery of the soft-output message-passing decoders."""

    _mode = _MODE_SP
    _layered = False
    _weighted = False

    def _setup(self) -> None:
        c = self.code
        self._dmax = int(c.check_degrees.max()) if c.m else 0
        self._rho = np.ones(max(c.m, 1), dtype=np.float64)
        self._check_ptr = np.ascontiguousarray(c.check_ptr, dtype=np.uint64)
        self._edge_var = np.ascontiguousarray(c.edge_var, dtype=np.uint64)

    def _nchunks(self, F: int) -> int:
        th = self.options["threads"] or nb.get_num_threads()
        return max(1, min(F, 4 * th))

    def _alpha_beta(self) -> tuple[float, float]:
        return 1.0, 0.0

    def _tol(self) -> float:
        return 0.0

    def _use_lanes(self, F: int, tol: float) -> bool:
        """Whether this batch goes to the lane kernels (option ``kernel``)."""
        kernel = self.options.get("kernel", "scalar")
        if kernel == "scalar" or self._weighted or self.code.m == 0:
            return False
        fits = self.options["damping"] == 0.0 and tol == 0.0
        if kernel == "lanes":
            if not fits:
                raise InputError(f"kernel='lanes' of {self.name} needs damping=0; use "
                                 "kernel='auto' or 'scalar' for damped decoding.")
            return True
        from .vectorised import LANES

        # min-sum and sum-product lanes both measured faster than the scalar
        # kernels on full lane groups (experiments/results/bench_message_passing.md)
        return fits and F >= LANES

    def _run(self, llr: np.ndarray, *, max_iter: int, early_stop: bool, tol: float):
        """Run the kernel on (F, n) float64 LLRs; returns (post, iters, valid, stopped)."""
        c = self.code
        if self._use_lanes(llr.shape[0], tol):
            from .vectorised import decode_float_lanes

            alpha, beta = self._alpha_beta()
            with _Threads(self.options["threads"]):
                post, iters, valid = decode_float_lanes(
                    c, llr, mode="min-sum" if self._mode == _MODE_MS else "sum-product",
                    layered=self._layered, alpha=float(alpha), beta=float(beta),
                    max_iter=int(max_iter), early_stop=bool(early_stop),
                    precision=self.options["precision"], threads=self.options["threads"])
            return post, iters, valid, np.zeros(llr.shape[0], dtype=np.bool_)
        dtype = np.float32 if self.options["precision"] == "float32" else np.float64
        x = np.clip(llr, -LLR_MAX, LLR_MAX).astype(dtype, copy=False)
        x = np.ascontiguousarray(x)
        F = x.shape[0]
        post = np.empty((F, c.n), dtype=dtype)
        iters = np.zeros(F, dtype=np.int64)
        valid = np.zeros(F, dtype=np.bool_)
        stopped = np.zeros(F, dtype=np.bool_)
        alpha, beta = self._alpha_beta()
        big = _BIG32 if dtype == np.float32 else _BIG64
        nchunks = self._nchunks(F)
        with _Threads(self.options["threads"]):
            if self._layered:
                _layered_batch(x, self._check_ptr, self._edge_var, self._mode, float(alpha),
                               float(beta), float(self.options["damping"]), int(max_iter),
                               bool(early_stop), big, self._dmax, nchunks, post, iters, valid)
            else:
                _flood_batch(x, self._check_ptr, self._edge_var, self._rho, self._weighted,
                             self._mode, float(alpha), float(beta),
                             float(self.options["damping"]), int(max_iter), bool(early_stop),
                             float(tol), big, self._dmax, nchunks, post, iters, valid, stopped)
        return post.astype(np.float64, copy=False), iters, valid, stopped

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        post, iters, valid, _ = self._run(llr, max_iter=self.options["max_iter"],
                                          early_stop=self.options["early_stop"], tol=self._tol())
        return DecodeResult(bits=(post < 0).astype(np.uint8), posterior_llr=post,
                            iterations=iters, valid=valid, info={})


class SumProductDecoder(_MessagePassing):
    """Sum-product (belief propagation) in the LLR domain, flooding schedule.

    Check update ``c2v_{c->i} = 2 atanh( prod_{j in N(c)\\i} tanh(v_{j->c} / 2) )``
    with a numerically safe implementation (module docstring); bit update
    ``v_{i->c} = L_i - c2v_{c->i}``, ``L_i = llr_i + sum_c c2v_{c->i}``.
    Exact on cycle-free Tanner graphs once the number of iterations reaches
    the graph's diameter (Pearl 1988).

    Options: ``max_iter`` (50), ``early_stop`` (True), ``damping`` (0),
    ``precision`` ("float64"), ``kernel`` ("auto"), ``threads`` (0 = numba default).
    """

    name = "sum-product"
    description = "Sum-product (belief propagation) in the LLR domain, flooding schedule."
    params = {**_common_params(), **_kernel_param()}


class LayeredSumProductDecoder(SumProductDecoder):
    """Sum-product with a layered (row-serial) schedule; same options as sum-product."""

    name = "layered-sum-product"
    description = "Sum-product with a layered (row-serial) schedule."
    params = {**_common_params(), **_kernel_param()}
    _layered = True


class MinSumDecoder(_MessagePassing):
    """Normalised min-sum, flooding: ``c2v = alpha * prod sign(v_j) * min |v_j|`` over ``j != i``.

    ``alpha = 1`` is plain min-sum. Messages are capped at ``LLR_MAX``.
    """

    name = "min-sum"
    description = "Normalised min-sum, flooding (alpha=1 is plain min-sum)."
    params = {**_common_params(), **_kernel_param(),
              "alpha": Param("float", 1.0, low=0.0, high=1.0, low_open=True,
                             doc="normalisation factor multiplying the check messages")}
    _mode = _MODE_MS

    def _alpha_beta(self):
        return self.options["alpha"], 0.0


class OffsetMinSumDecoder(_MessagePassing):
    """Offset min-sum, flooding: ``c2v = prod sign(v_j) * max(min |v_j| - beta, 0)``, ``j != i``.

    ``beta`` is in LLR units (channel LLRs ``2 y / sigma**2`` for BPSK/AWGN).
    """

    name = "offset-min-sum"
    description = "Offset min-sum, flooding (offset beta)."
    params = {**_common_params(), **_kernel_param(),
              "beta": Param("float", 0.5, low=0.0,
                            doc="offset subtracted from check-message magnitudes (LLR units)")}
    _mode = _MODE_MS

    def _alpha_beta(self):
        return 1.0, self.options["beta"]


class LayeredMinSumDecoder(MinSumDecoder):
    """Normalised min-sum with a layered (row-serial) schedule; options as min-sum."""

    name = "layered-min-sum"
    description = "Normalised min-sum with a layered schedule."
    params = dict(MinSumDecoder.params)
    _layered = True


class ReweightedSumProductDecoder(_MessagePassing):
    r"""Tree-reweighted (fractional) sum-product with check weights ``rho``, flooding, damped.

    Target free energy (DESIGN.md §5), on the local polytope:

    .. math::

        F(\tau) = \sum_i \lambda_i \tau_i - \Big[\sum_c \rho_c H(\tau_c)
                  + \sum_i \big(1 - \sum_{c \ni i} \rho_c\big) H(\tau_i)\Big].

    **Updates.** With check-to-bit messages :math:`\ell_{c\to i}` (LLRs):

    * posterior   :math:`L_i = \lambda_i + \sum_{c \ni i} \rho_c \ell_{c\to i}`;
    * cavity      :math:`v_{i\to c} = L_i - \ell_{c\to i}` (the *full* message is
      removed, not :math:`\rho_c \ell_{c\to i}`);
    * check       :math:`\ell_{c\to i} = \boxplus_{j \in N(c)\setminus i} v_{j\to c}`
      (ordinary box-plus, because :math:`\psi_c^{1/\rho_c}` is still the parity
      indicator), then damping :math:`\ell \leftarrow (1-d)\ell + d\,\ell_{old}`.

    **Beliefs.** :math:`\tau_i = P(x_i = 1) = 1/(1 + e^{L_i})` and, over the
    even-weight local codewords :math:`S` of check :math:`c`,
    :math:`\tau_c(S) \propto \exp(-\sum_{i\in c} S_i v_{i\to c})`.

    **Derivation.** Stationarity of the Lagrangian of :math:`F` with
    multipliers :math:`\mu_{ci}(x_i)` on the edge constraints
    :math:`\tau_i = \sum_{S \ni i} \tau_c(S)` gives
    :math:`\tau_c(S) \propto \exp(\sum_{i} \mu_{ci}(S_i)/\rho_c)` and
    :math:`\kappa_i \ln \tau_i(x) = -\lambda_i x - \sum_c \mu_{ci}(x) + \text{const}`
    with :math:`\kappa_i = 1 - \sum_{c\ni i}\rho_c`. Choosing
    :math:`\mu_{ci}(x) = \rho_c\,[\ln \tau_i(x) - \ln M_{c\to i}(x)]` (message
    :math:`M` with LLR :math:`\ell`) satisfies the check condition with the
    belief above, and the bit condition reduces to
    :math:`\ln \tau_i = -\lambda_i x + \sum_c \rho_c \ln M_{c\to i}(x)`, i.e.
    the posterior rule. At a fixed point the check update makes the marginal
    of :math:`\tau_c` on bit :math:`i` equal to :math:`v_{i\to c} +
    \ell_{c\to i} = L_i`, so the beliefs lie in the local polytope and are a
    stationary point of :math:`F`. With every :math:`\rho_c = 1` the updates are
    those of sum-product, operation for operation (multiplying by 1.0 is exact),
    so the results are identical bit for bit.

    Options
    -------
    rho : float, ndarray of shape (m,), or "trw"
        Check weights (>= 0). Default 1.0 (Bethe, i.e. sum-product with damping).
        ``"trw"`` samples hyperforests with
        :func:`ldpcmarg.code.hyperforest.trw_check_weights` (``trw_samples``,
        ``trw_seed``), giving a convex free energy.
    damping : float in [0, 1)
        Default 0.5: reweighted updates with ``rho < 1`` feed back
        ``(1 - rho_c)`` of a bit's own message and oscillate without damping.
    tol : float >= 0
        Also stop a frame when no message moved by more than ``tol`` in an
        iteration (0 disables). Default 0.
    local_beliefs : bool
        Put the check beliefs ``tau_c`` of every frame in
        ``info["local_beliefs"]`` (F, L) float64. Default False.
    """

    name = "reweighted-sum-product"
    description = "Tree-reweighted sum-product with edge weights rho (damped)."
    params = {
        **_common_params(damping_default=0.5),
        "rho": Param("any", 1.0, doc="check weights: a number, an array of shape (m,), or 'trw'"),
        "trw_samples": Param("int", 200, low=1,
                             doc="number of sampled hyperforests when rho='trw'"),
        "trw_seed": Param("int", 0, low=0, doc="seed of the hyperforest sampler when rho='trw'"),
        "tol": Param("float", 0.0, low=0.0,
                     doc="stop when the largest message change is <= tol (0 = off)"),
        "local_beliefs": Param("bool", False,
                               doc="return check beliefs over local codewords in info"),
    }
    _weighted = True

    def _setup(self) -> None:
        super()._setup()
        self._rho = self._resolve_rho(self.options["rho"])
        self.rho = self._rho[: self.code.m].copy()

    def _resolve_rho(self, rho) -> np.ndarray:
        m = self.code.m
        if isinstance(rho, str):
            if rho.strip().lower() != "trw":
                raise InputError(
                    f"The 'rho' option of {self.name} must be a number, an array of shape "
                    f"({m},) or 'trw'; got {rho!r}."
                )
            try:
                from ..code import hyperforest
            except ModuleNotFoundError as exc:
                raise InputError(
                    "rho='trw' needs ldpcmarg.code.hyperforest, which is not available "
                    "in this build."
                ) from exc
            arr = hyperforest.trw_check_weights(
                self.code, num_samples=self.options["trw_samples"], seed=self.options["trw_seed"]
            )
            arr = np.asarray(arr, dtype=np.float64)
        elif np.isscalar(rho) and not isinstance(rho, bool):
            try:
                val = float(rho)
            except (TypeError, ValueError):
                val = float("nan")
            arr = np.full(m, val, dtype=np.float64)
        else:
            try:
                arr = np.asarray(rho, dtype=np.float64)
            except (TypeError, ValueError) as exc:
                raise InputError(
                    f"The 'rho' option of {self.name} must be numeric; got {type(rho).__name__}."
                ) from exc
        if arr.shape != (m,):
            raise InputError(
                f"The 'rho' option of {self.name} must be a number or an array of shape ({m},); "
                f"got shape {arr.shape}."
            )
        if not np.all(np.isfinite(arr)) or np.any(arr < 0):
            raise InputError(f"The 'rho' option of {self.name} must hold finite values >= 0.")
        return np.ascontiguousarray(arr if m else np.ones(1))

    @property
    def spec(self) -> str:
        s = super().spec
        rho = self.options["rho"]
        if isinstance(rho, str | int | float) and rho != 1.0:
            s += ("," if ":" in s else ":") + f"rho={rho}"
        return s

    def _tol(self) -> float:
        return float(self.options["tol"])

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        post, iters, valid, stopped = self._run(
            llr, max_iter=self.options["max_iter"], early_stop=self.options["early_stop"],
            tol=self._tol())
        info = {"converged": stopped}
        if self.options["local_beliefs"]:
            info["local_beliefs"] = np.stack([self._beliefs_one(row)[1] for row in llr])
        return DecodeResult(bits=(post < 0).astype(np.uint8), posterior_llr=post,
                            iterations=iters, valid=valid, info=info)

    def _beliefs_one(self, llr_row, max_iter=None, tol=None, early_stop=None):
        c = self.code
        lc = c.local_codewords()
        dtype = np.float32 if self.options["precision"] == "float32" else np.float64
        x = np.clip(np.asarray(llr_row, dtype=np.float64), -LLR_MAX, LLR_MAX).astype(dtype)
        c2v = np.zeros(c.num_edges, dtype=dtype)
        L = np.empty(c.n, dtype=dtype)
        Lnew = np.empty(c.n, dtype=dtype)
        vbuf = np.empty(2 * self._dmax + 1, dtype=dtype)
        tbuf = np.empty(self._dmax + 1, dtype=dtype)
        it, ok, stopped = _flood_frame(
            x, self._check_ptr, self._edge_var, self._rho, True, _MODE_SP, 1.0, 0.0,
            float(self.options["damping"]),
            int(self.options["max_iter"] if max_iter is None else max_iter),
            bool(self.options["early_stop"] if early_stop is None else early_stop),
            float(self._tol() if tol is None else tol),
            _BIG32 if dtype == np.float32 else _BIG64, c2v, L, Lnew, vbuf, tbuf)
        Lf = L.astype(np.float64)
        tau_local = np.empty(lc.count, dtype=np.float64)
        _local_beliefs_kernel(Lf, c2v.astype(np.float64), c.check_ptr, c.edge_var, lc.offset,
                              lc.bit_ptr, lc.bits, tau_local)
        tau_bits = 0.5 * (1.0 - np.tanh(0.5 * Lf))
        return tau_bits, tau_local, {"iterations": int(it), "valid": bool(ok),
                                     "converged": bool(stopped), "posterior_llr": Lf}

    def beliefs(self, llr, *, max_iter: int = 1000, tol: float = 1e-12,
                return_info: bool = False):
        """Run reweighted sum-product on one frame to convergence and return its beliefs.

        Parameters
        ----------
        llr : ndarray of shape (n,), float
            Channel LLRs of one frame (positive favours 0).
        max_iter : int
            Iteration cap (default 1000).
        tol : float
            Stop when no message changes by more than ``tol`` (default 1e-12);
            the syndrome early stop is off here, since beliefs must be at a fixed
            point, not merely at a codeword.
        return_info : bool
            Also return a dict with ``iterations``, ``converged`` (message change
            reached ``tol``), ``valid`` and ``posterior_llr``.

        Returns
        -------
        tau_bits : ndarray of shape (n,), float64
            ``P(x_i = 1)``.
        tau_local : ndarray of shape (L,), float64
            Check beliefs over the local codewords, in the flat layout of
            :meth:`ParityCheckCode.local_codewords` (each check's block sums to 1).
        info : dict, only when ``return_info``
        """
        from .base import check_llr

        a, single = check_llr(llr, self.code.n)
        if not single:
            raise InputError("beliefs() takes one frame of shape (n,).")
        if int(max_iter) < 1:
            raise InputError(f"max_iter must be an integer >= 1; got {max_iter!r}.")
        if not (tol >= 0):
            raise InputError(f"tol must be >= 0; got {tol!r}.")
        tb, tl, info = self._beliefs_one(a[0], max_iter=int(max_iter), tol=float(tol),
                                         early_stop=False)
        return (tb, tl, info) if return_info else (tb, tl)
