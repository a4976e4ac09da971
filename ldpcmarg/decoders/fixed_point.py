"""Fixed-point min-sum decoders: offset and normalised, flooding and layered, q = 3 ... 8.

These decoders implement exactly the shared fixed-point message format that
the frame-interleaved vectorised kernels implement too, so that both are
bit-exact against each other and against the plain integer reference in the
tests (``tests/test_fixed_point.py``). The format, quoted:

    - Parameters: ``q`` (message bits, 3…8), ``step`` Δ > 0 (LLR units per
      integer step), ``q_post`` (posterior register bits, default ``q + 2``,
      at most 16). ``QMAX = 2**(q-1) - 1``, ``PMAX = 2**(q_post-1) - 1``.
      Messages are stored as int8 (q ≤ 8), posteriors as int16,
      accumulations in int32.
    - Channel quantisation: ``l = clip(rint(L / Δ), -QMAX, QMAX)`` with
      numpy's ``rint`` (round half to even). Erasures / punctured bits
      (L = 0) give 0. Shortened bits (L = +LLR_MAX) give +QMAX.
    - Check node (both schedules), for incoming v2c messages ``m_j`` of
      check c: sign: product over the other edges of ``s(m_j)`` with
      ``s(m) = -1 if m < 0 else +1`` (0 counts as positive); magnitude: the
      minimum ``|m_j|`` over the other edges (the usual two-minimum trick is
      equivalent), then
      * offset min-sum: ``max(min - beta, 0)`` with ``beta`` an integer
        number of steps;
      * normalised min-sum: ``(a * min + 8) >> 4`` with
        ``a = round(16 * alpha)`` (alpha rounded to a multiple of 1/16;
        ``a`` in 1…16) — i.e. alpha·min rounded half up; document the
        effective alpha ``a/16``.
      The result is within ±QMAX automatically.
    - Flooding variable node: ``total = l + Σ c2v`` in int32; posterior
      ``P = clip(total, -PMAX, PMAX)``; v2c on edge e:
      ``clip(total - c2v_e, -QMAX, QMAX)``.
    - Layered (row-serial, checks in index order) variable update: the
      posterior register ``P`` (int16, saturated at ±PMAX) starts at ``l``;
      for check c: ``v2c_e = clip(P_i - c2v_e_old, -QMAX, QMAX)``, compute
      new ``c2v_e`` from the v2c of the row, then
      ``P_i = clip(v2c_e + c2v_e_new, -PMAX, PMAX)``.
    - Hard decision: bit 1 iff ``P < 0`` (P = 0 gives bit 0, and the engine
      counts a posterior LLR of exactly 0 as undecided). Posterior LLR
      output: ``P * Δ`` as float64.
    - Early stop: after each full iteration, stop a frame when its hard
      decision satisfies every check (same rule as the float decoders);
      ``max_iter`` default 50.
    - Initial c2v messages are 0.

Points the format leaves to the implementation, as done here
------------------------------------------------------------
* ``a = round(16 * alpha)`` is Python's ``round`` (half to even: alpha =
  0.78125 gives a = 12, 0.84375 gives a = 14), computed once by
  :func:`normalisation_steps` for this module and the lane kernels alike;
  the effective alpha ``a / 16`` is reported by :attr:`effective_alpha`.
* An empty minimum (a check of degree 1) is ``QMAX``: the running minimum
  starts there, so such a check sends the saturated level (offset or
  normalised), sign +, to its one bit -- as the float decoders send
  ``LLR_MAX``.
* Option ``kernel`` (``auto`` by default), as in :mod:`.message_passing`:
  ``lanes`` decodes 64 frames side by side in int8 SIMD lanes
  (:func:`ldpcmarg.decoders.vectorised.decode_fixed_point_lanes`, the same
  arithmetic, bit for bit), ``scalar`` one frame at a time; ``auto`` takes
  the lanes for batches of at least 64 frames.
* "Same rule as the float decoders" (:mod:`.message_passing`): the stop test
  runs before the first iteration too (``iterations == 0`` when the channel
  decision is already a codeword) and after every full iteration; a check
  counts as open while any of its bits has ``P == 0`` (a tie is no decision,
  e.g. an unresolved punctured bit), so a frame stops only on a codeword
  with every bit of every check decided. After ``max_iter`` iterations
  ``valid`` reports whether the hard decision (``P == 0`` read as bit 0)
  satisfies every check.
* Flooding keeps ``total`` in int32 between iterations (the v2c of the next
  iteration uses ``total``, not the saturated ``P``); the first iteration's
  v2c are therefore the channel levels ``l``.
* Channel LLRs are clipped to ``+-LLR_MAX`` before quantising (nothing
  changes for any ``step`` in range) and NaN is refused at the boundary.
"""

from __future__ import annotations

import numba as nb
import numpy as np

from .._params import Param
from .._settings import LLR_MAX, NUMBA_OPTS
from ..errors import InputError
from .base import Decoder, DecodeResult

__all__ = [
    "FixedMinSumDecoder",
    "FixedOffsetMinSumDecoder",
    "FixedLayeredMinSumDecoder",
    "FixedLayeredOffsetMinSumDecoder",
    "normalisation_steps",
    "quantize_channel",
]

_NORMALISED = 0
_OFFSET = 1


def quantize_channel(llr: np.ndarray, q: int, step: float) -> np.ndarray:
    """Channel levels ``clip(rint(L / step), -QMAX, QMAX)`` (int8 array of the same shape).

    ``L`` is first clipped to ``+-LLR_MAX``; ``rint`` rounds half to even;
    ``QMAX = 2**(q-1) - 1``. The one quantiser of the scalar and lane paths.
    """
    qmax = 2 ** (q - 1) - 1
    x = np.clip(np.asarray(llr, dtype=np.float64), -LLR_MAX, LLR_MAX)
    return np.clip(np.rint(x / step), -qmax, qmax).astype(np.int8)


def normalisation_steps(alpha: float) -> int:
    """The integer factor ``a = round(16 * alpha)`` of normalised fixed-point min-sum.

    Python's ``round`` (half to even, so 12.5 -> 12 and 13.5 -> 14); the
    check node applies ``(a * min + 8) >> 4``, i.e. the effective alpha
    ``a / 16`` with the product rounded half up. Shared by the scalar and
    lane kernels so that both read alpha the same way.
    """
    return int(round(16 * float(alpha)))


# --------------------------------------------------------------------- kernels
# Index arrays arrive as uint64 (no negative-index wraparound tests), the two
# smallest magnitudes and the sign parity are tracked branch-free (message
# signs are random at low SNR; branches mispredict), and the stop test starts
# at the check that failed last time -- the same devices as the float kernels.


@nb.njit(**NUMBA_OPTS)
def _first_open(P, check_ptr, edge_var, start):
    """A check unsatisfied by ``P < 0`` or touching a bit with ``P == 0``, or -1.

    Scans from check ``start`` with wraparound (the check that failed last is
    the likeliest to fail again); the answer "none" does not depend on ``start``.
    """
    m = check_ptr.shape[0] - 1
    for t in range(m):
        c = start + t
        if c >= m:
            c -= m
        par = 0
        tie = False
        for e in range(check_ptr[c], check_ptr[c + 1]):
            p = P[edge_var[e]]
            tie |= p == 0
            par ^= p < 0
        if par or tie:
            return c
    return -1


@nb.njit(**NUMBA_OPTS)
def _unsatisfied(P, check_ptr, edge_var):
    """True when the hard decision ``P < 0`` violates some check."""
    m = check_ptr.shape[0] - 1
    for c in range(m):
        par = 0
        for e in range(check_ptr[c], check_ptr[c + 1]):
            par ^= P[edge_var[e]] < 0
        if par:
            return True
    return False


@nb.njit(**NUMBA_OPTS)
def _flood_frame(lq, check_ptr, edge_var, rule, a, beta, qmax, pmax, max_iter, c2v, total,
                 tnew, P, vbuf):
    """Fixed-point flooding min-sum of one frame (module docstring); returns (iters, valid).

    The stop tests read ``total``: saturation keeps sign and zero, so they see
    exactly what they would see on ``P = clip(total)``, which is formed once at exit.
    """
    n = lq.shape[0]
    m = check_ptr.shape[0] - 1
    for e in range(c2v.shape[0]):
        c2v[e] = 0
    for i in range(n):
        total[i] = lq[i]
    it = 0
    start = 0
    ok = True
    while True:
        c = _first_open(total, check_ptr, edge_var, start)
        if c < 0:
            break
        start = c
        if it >= max_iter:
            ok = not _unsatisfied(total, check_ptr, edge_var)
            break
        for i in range(n):
            tnew[i] = lq[i]
        for c in range(m):
            a0 = check_ptr[c]
            b0 = check_ptr[c + 1]
            # an empty minimum is QMAX (a degree-1 check sends the saturated level;
            # a larger start would wrap around in the int8 message)
            min1 = qmax
            min2 = qmax
            idx = b0
            neg = 0
            for e in range(a0, b0):
                v = min(max(total[edge_var[e]] - np.int64(c2v[e]), -qmax), qmax)
                vbuf[e - a0] = v
                sv = v >> 63
                neg ^= sv
                x = (v ^ sv) - sv  # branch-free |v|
                min2 = min(min2, max(min1, x))
                idx = e if x < min1 else idx
                min1 = min(min1, x)
            if rule == _OFFSET:
                m1 = max(min1 - beta, 0)
                m2 = max(min2 - beta, 0)
            else:
                m1 = (a * min1 + 8) >> 4
                m2 = (a * min2 + 8) >> 4
            for e in range(a0, b0):
                mag = m2 if e == idx else m1
                # sign = parity of the other edges: total parity xor own sign bit
                sg = neg ^ (vbuf[e - a0] >> 63)
                out = (mag ^ sg) - sg
                c2v[e] = out
                tnew[edge_var[e]] += out
        total, tnew = tnew, total
        it += 1
    for i in range(n):
        P[i] = min(max(total[i], -pmax), pmax)
    return it, ok


@nb.njit(**NUMBA_OPTS)
def _layered_frame(lq, check_ptr, edge_var, rule, a, beta, qmax, pmax, max_iter, c2v, P, vbuf):
    """Fixed-point layered min-sum of one frame (module docstring); returns (iters, valid)."""
    n = lq.shape[0]
    m = check_ptr.shape[0] - 1
    for e in range(c2v.shape[0]):
        c2v[e] = 0
    for i in range(n):
        P[i] = lq[i]
    it = 0
    start = 0
    while True:
        c = _first_open(P, check_ptr, edge_var, start)
        if c < 0:
            return it, True
        start = c
        if it >= max_iter:
            break
        for c in range(m):
            a0 = check_ptr[c]
            b0 = check_ptr[c + 1]
            # an empty minimum is QMAX (a degree-1 check sends the saturated level;
            # a larger start would wrap around in the int8 message)
            min1 = qmax
            min2 = qmax
            idx = b0
            neg = 0
            for e in range(a0, b0):
                v = min(max(np.int64(P[edge_var[e]]) - np.int64(c2v[e]), -qmax), qmax)
                vbuf[e - a0] = v
                sv = v >> 63
                neg ^= sv
                x = (v ^ sv) - sv  # branch-free |v|
                min2 = min(min2, max(min1, x))
                idx = e if x < min1 else idx
                min1 = min(min1, x)
            if rule == _OFFSET:
                m1 = max(min1 - beta, 0)
                m2 = max(min2 - beta, 0)
            else:
                m1 = (a * min1 + 8) >> 4
                m2 = (a * min2 + 8) >> 4
            for e in range(a0, b0):
                mag = m2 if e == idx else m1
                v = vbuf[e - a0]
                sg = neg ^ (v >> 63)
                out = (mag ^ sg) - sg
                c2v[e] = out
                P[edge_var[e]] = min(max(v + out, -pmax), pmax)
        it += 1
    return it, not _unsatisfied(P, check_ptr, edge_var)


@nb.njit(**NUMBA_OPTS)
def _quantize_row(llr, step, qmax, out):
    """``out = clip(rint(clip(llr, +-LLR_MAX) / step), -qmax, qmax)`` for one frame (int8)."""
    for i in range(llr.shape[0]):
        x = min(max(llr[i], -LLR_MAX), LLR_MAX)
        out[i] = min(max(np.rint(x / step), -qmax), qmax)


@nb.njit(parallel=True, **NUMBA_OPTS)
def _fixed_batch(llr, quantized, lq_in, check_ptr, edge_var, layered, rule, a, beta, qmax, pmax,
                 max_iter, dmax, nchunks, step, post_llr, post, iters, valid):
    """Batch driver -> post_llr (F, n) float64 = P * step, post (F, n) int16; iters, valid (F,).

    With ``quantized`` the integer levels come from ``lq_in`` (F, n) int8, else
    they are quantised here from the float LLRs ``llr`` (F, n). Frame f goes to
    chunk f mod nchunks; a chunk owns its buffers (one thread).
    """
    F = post.shape[0]
    n = post.shape[1]
    E = edge_var.shape[0]
    for ch in nb.prange(nchunks):
        c2v = np.zeros(E, dtype=np.int8)
        total = np.zeros(n, dtype=np.int64)
        tnew = np.zeros(n, dtype=np.int64)
        vbuf = np.zeros(dmax + 1, dtype=np.int64)
        lq = np.zeros(n, dtype=np.int8)
        for f in range(ch, F, nchunks):
            if quantized:
                for i in range(n):
                    lq[i] = lq_in[f, i]
            else:
                _quantize_row(llr[f], step, qmax, lq)
            P = post[f]
            if layered:
                it, ok = _layered_frame(lq, check_ptr, edge_var, rule, a, beta, qmax, pmax,
                                        max_iter, c2v, P, vbuf)
            else:
                it, ok = _flood_frame(lq, check_ptr, edge_var, rule, a, beta, qmax, pmax,
                                      max_iter, c2v, total, tnew, P, vbuf)
            for i in range(n):
                post_llr[f, i] = P[i] * step
            iters[f] = it
            valid[f] = ok


# -------------------------------------------------------------------- decoders
def _fixed_params() -> dict[str, Param]:
    return {
        "q": Param("int", 6, low=3, high=8, doc="message bits (sign included), 3 ... 8"),
        "step": Param("float", 0.5, low=0.0, low_open=True,
                      doc="LLR units per integer level (channel LLR L -> rint(L/step))"),
        "q_post": Param("int", None, low=3, high=16,
                        doc="posterior register bits (default q + 2, at most 16)"),
        "max_iter": Param("int", 50, low=1, doc="maximum number of iterations"),
        "threads": Param("int", 0, low=0,
                         doc="threads for the frame-parallel loop (0 = numba's current setting)"),
        "kernel": Param("choice", "auto", choices=("auto", "scalar", "lanes"),
                        doc="'lanes': frame-interleaved int8 SIMD kernels "
                            "(ldpcmarg.decoders.vectorised, bit-exact); 'scalar': one frame "
                            "at a time; 'auto': lanes for batches of at least 64 frames"),
    }


class _FixedPoint(Decoder):
    """Shared machinery of the fixed-point min-sum decoders."""

    _rule = _NORMALISED
    _layered = False

    def _setup(self) -> None:
        o = self.options
        if o["q_post"] is None:
            o["q_post"] = min(o["q"] + 2, 16)
        if o["q_post"] < o["q"]:
            raise InputError(f"The 'q_post' option of {self.name} must be >= q = {o['q']}; got "
                             f"{o['q_post']}.")
        if self._rule == _NORMALISED:
            a = normalisation_steps(o["alpha"])
            if not 1 <= a <= 16:
                raise InputError(f"The 'alpha' option of {self.name} rounds to {a}/16; it must "
                                 "be at least 1/32 so that a = round(16 alpha) >= 1.")
            self._a = int(a)
            self._beta = 0
        else:
            self._a = 16
            self._beta = int(o["beta"])
        c = self.code
        self._dmax = int(c.check_degrees.max()) if c.m else 0
        self._check_ptr = np.ascontiguousarray(c.check_ptr, dtype=np.uint64)
        self._edge_var = np.ascontiguousarray(c.edge_var, dtype=np.uint64)

    @property
    def qmax(self) -> int:
        return 2 ** (self.options["q"] - 1) - 1

    @property
    def pmax(self) -> int:
        return 2 ** (self.options["q_post"] - 1) - 1

    @property
    def effective_alpha(self) -> float:
        """The normalisation actually applied, ``a / 16`` (1 for offset min-sum)."""
        return self._a / 16.0

    @property
    def spec(self) -> str:
        o = dict(self.options)
        if o.get("q_post") == min(o["q"] + 2, 16):
            o["q_post"] = None  # the default: keep the spec string short and stable
        saved, self.options = self.options, o
        try:
            return super().spec
        finally:
            self.options = saved

    def quantize(self, llr: np.ndarray) -> np.ndarray:
        """Channel levels of (F, n) LLRs (int8), as the decoder sees them."""
        return quantize_channel(llr, self.options["q"], self.options["step"])

    def _use_lanes(self, F: int) -> bool:
        """Whether a batch of ``F`` frames goes to the lane kernels (option ``kernel``)."""
        kernel = self.options.get("kernel", "scalar")
        if kernel == "scalar" or self.code.m == 0:
            return False
        if kernel == "lanes":
            return True
        from .vectorised import LANES

        return F >= LANES

    def _run_lanes(self, llr, lq):
        """The lane path of :meth:`_run` (same outputs, same arithmetic)."""
        from .message_passing import _Threads
        from .vectorised import decode_fixed_point_levels_lanes

        if lq is None:
            lq = self.quantize(llr)
        o = self.options
        with _Threads(o["threads"]):
            post, iters, valid = decode_fixed_point_levels_lanes(
                self.code, lq, q=int(o["q"]), q_post=int(o["q_post"]),
                offset=self._rule == _OFFSET,
                factor=int(self._beta if self._rule == _OFFSET else self._a),
                layered=self._layered, max_iter=int(o["max_iter"]), threads=o["threads"])
        # P * step, exactly the scalar kernel's float64 product
        return post * float(o["step"]), post, iters, valid

    def _run(self, llr, lq):
        F, n = (llr if lq is None else lq).shape
        if self._use_lanes(F):
            return self._run_lanes(llr, lq)
        post = np.zeros((F, n), dtype=np.int16)
        post_llr = np.empty((F, n), dtype=np.float64)
        iters = np.zeros(F, dtype=np.int64)
        valid = np.zeros(F, dtype=np.bool_)
        from .message_passing import _Threads

        th = self.options["threads"] or nb.get_num_threads()
        nchunks = max(1, min(F, 4 * th))
        dummy_f = np.zeros((1, 1), dtype=np.float64)
        dummy_q = np.zeros((1, 1), dtype=np.int8)
        with _Threads(self.options["threads"]):
            _fixed_batch(dummy_f if llr is None else llr, lq is not None,
                         dummy_q if lq is None else lq, self._check_ptr, self._edge_var,
                         self._layered, self._rule, int(self._a), int(self._beta),
                         int(self.qmax), int(self.pmax), int(self.options["max_iter"]),
                         max(self._dmax, 1), nchunks, float(self.options["step"]), post_llr,
                         post, iters, valid)
        return post_llr, post, iters, valid

    def decode_levels(self, lq: np.ndarray):
        """Decode integer channel levels (F, n) -> (P int16 (F, n), iterations, valid)."""
        lq = np.ascontiguousarray(lq, dtype=np.int8)
        if lq.ndim != 2 or lq.shape[1] != self.code.n:
            raise InputError(f"Channel levels must have shape (F, {self.code.n}).")
        if np.abs(lq.astype(np.int64)).max(initial=0) > self.qmax:
            raise InputError(f"Channel levels must lie within +-QMAX = {self.qmax}.")
        _, post, iters, valid = self._run(None, lq)
        return post, iters, valid

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        post_llr, post, iters, valid = self._run(np.ascontiguousarray(llr), None)
        return DecodeResult(bits=(post < 0).astype(np.uint8), posterior_llr=post_llr,
                            iterations=iters, valid=valid, info={})


_ALPHA = Param("float", 1.0, low=0.0, high=1.0, low_open=True,
               doc="normalisation; applied as a/16 with a = round(16 alpha)")
_BETA = Param("int", 1, low=0, doc="offset in integer steps (beta * step LLR units)")


class FixedMinSumDecoder(_FixedPoint):
    """Fixed-point normalised min-sum, flooding (alpha = 1 is plain min-sum).

    Options: ``q`` (6), ``step`` (0.5), ``q_post`` (q + 2), ``alpha`` (1.0,
    applied as ``a/16`` with ``a = round(16 alpha)``, half to even),
    ``max_iter`` (50), ``threads`` (0), ``kernel`` ("auto": int8 lanes for
    batches of 64+ frames). Arithmetic in the module docstring.
    """

    name = "fixed-min-sum"
    description = "Fixed-point normalised min-sum (q-bit messages), flooding."
    params = {**_fixed_params(), "alpha": _ALPHA}


class FixedOffsetMinSumDecoder(_FixedPoint):
    """Fixed-point offset min-sum, flooding; ``beta`` in integer steps (default 1)."""

    name = "fixed-offset-min-sum"
    description = "Fixed-point offset min-sum (q-bit messages), flooding."
    params = {**_fixed_params(), "beta": _BETA}
    _rule = _OFFSET


class FixedLayeredMinSumDecoder(_FixedPoint):
    """Fixed-point normalised min-sum, layered (row-serial, checks in index order)."""

    name = "fixed-layered-min-sum"
    description = "Fixed-point normalised min-sum (q-bit messages), layered schedule."
    params = {**_fixed_params(), "alpha": _ALPHA}
    _layered = True


class FixedLayeredOffsetMinSumDecoder(_FixedPoint):
    """Fixed-point offset min-sum, layered (row-serial, checks in index order)."""

    name = "fixed-layered-offset-min-sum"
    description = "Fixed-point offset min-sum (q-bit messages), layered schedule."
    params = {**_fixed_params(), "beta": _BETA}
    _rule = _OFFSET
    _layered = True
