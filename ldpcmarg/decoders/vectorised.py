"""Frame-interleaved ("lane") message-passing kernels: many frames per SIMD register.

The scalar kernels of :mod:`ldpcmarg.decoders.message_passing` decode one frame
at a time, so their inner loops walk the irregular Tanner graph and the
compiler has nothing to vectorise. Here a *lane group* of ``LANES`` frames is
decoded together: every message array is stored frame-innermost, i.e. the
value of edge ``e`` in lane ``w`` sits at ``[e * LANES + w]``, and every
arithmetic step is a loop over ``w in range(LANES)`` on contiguous memory with
no branches (signs by ``copysign``/xor, minima by compare-and-select). LLVM
turns those loops into packed vector instructions (the benchmark notes in
``experiments/results/`` say what was found in the assembly).

Kernels
-------
* float32/float64 normalised/offset min-sum, flooding and layered;
* float32/float64 sum-product, flooding and layered, in the complement form
  of the scalar kernel (one ``exp`` and one ``log`` per edge; see
  :func:`_sp_update`), exact at every magnitude;
* fixed-point min-sum (offset or normalised) in the shared integer format
  (int8 messages, int16 posteriors, int32 accumulation; see
  :func:`decode_fixed_point_lanes`), flooding and layered.

Every lane stops on its own (syndrome early stop, the same rule and iteration
count as the scalar decoders) and is refilled at once with the next frame of
its chunk, so a lane group is never held back by its slowest frame. Chunks of
frames run in parallel (``numba.prange``), each owning its buffers.

Polynomial exp/log, and the pairwise box-plus
---------------------------------------------
The check update itself is described at :func:`_sp_update`. The pairwise
box-plus below is kept as a tested reference of the lane arithmetic: for
magnitudes ``x, y >= 0`` of two messages,
``|a [+] b| = min(x, y) + log1p(exp(-(x + y))) - log1p(exp(-|x - y|))``
(the sign is the product of the signs). Both correction terms lie in
``[0, ln 2]``, so nothing overflows and nothing saturates at any magnitude;
extrinsic values of a check come from forward and backward partial box-plus
sums (3 (d - 2) pairs for degree ``d``; no division by a message, so erasures
are exact). Without a vector maths library (numba's SVML support is not
installed here), calls to ``exp``/``log1p`` keep a loop scalar, so both are
written out in plain arithmetic that vectorises:

* ``exp(-t)``, ``t >= 0``: Cody-Waite reduction ``t = k ln 2 + r``,
  ``|r| <= ln 2 / 2``, Taylor polynomial of ``exp(-r)`` (degree 13 in float64,
  7 in float32; truncation below half an ulp), scaled by ``2**-k`` built from
  its exponent bits; results below ``exp(-700)`` (float64) resp.
  ``exp(-80)`` (float32) are flushed to 0 -- an absolute error below
  ``1e-304`` resp. ``2e-35`` -- so that no subnormal number is ever formed
  (each costs a microcode assist of ~100 cycles, measured as a tenfold slow
  down of the whole check update).
* ``log(y)``, ``y`` positive and normal: exponent and mantissa from the bits,
  mantissa ``m`` in ``[sqrt(1/2), sqrt(2))``, ``log m = 2 atanh((m-1)/(m+1))``
  by the series below, plus ``e ln 2`` (``ln 2`` split in two parts).
* ``log1p(u)``, ``0 <= u <= 1``: for ``u > sqrt(2) - 1`` write
  ``1 + u = 2 (1 + (u - 1)/2)``; then ``log(1 + g) = 2 atanh(g / (2 + g))`` by
  its Taylor series (``|s| <= 0.1716``; 11 terms in float64, 6 in float32).

The tests check both against ``numpy`` over their whole ranges and the
decoder against exact posteriors on trees.

Arithmetic against the scalar path
----------------------------------
* float64 min-sum: the same operations in the same order as the scalar
  kernel, so decisions, posteriors and iteration counts are identical.
* float32 min-sum: the scalar kernel mixes float64 constants into float32
  messages (double rounding); the lanes stay in float32, so results differ
  slightly and only the error rates agree statistically.
* sum-product: the scalar kernel's complement form with polynomial exp/log
  (and a per-lane shift instead of the scalar pairwise fallback at large
  magnitudes), so posteriors agree to rounding error, not bit for bit.
* fixed point: integer arithmetic, the same quantiser and alpha rounding as
  :mod:`ldpcmarg.decoders.fixed_point`, so posterior registers, iterations
  and validity equal the scalar fixed-point kernels bit for bit (tested for
  all four decoders, q = 3 ... 8); reached through their ``kernel`` option.

What kept the lanes scalar (found in the LLVM IR and the loop-vectorize
debug output, ``llvm.set_option("", "-debug-only=loop-vectorize")``):
a signed index (``range(1, d - 1)`` with an unsigned ``d``) brings numba's
negative-index wraparound select, which LLVM turns into gathers; a numba
helper that can set an exception status is called, not inlined, at the time
the vectoriser runs ("call instruction cannot be vectorized"), so every
helper in the lane loops is ``inline="always"``; a load inside one arm of a
conditional expression and a short-circuit ``and``/``or`` become branches
(written as selects of values computed first, and bitwise ``&``/``|``); and a
loop that combined prefix and suffix in place stayed scalar without any remark.
"""

from __future__ import annotations

import math
from decimal import Decimal, getcontext

import llvmlite.binding as llvm
import numba as nb
import numpy as np
from numba.core import types as nbt
from numba.extending import intrinsic, overload

from .._settings import LLR_MAX, NUMBA_OPTS
from ..errors import InputError
from .fixed_point import normalisation_steps, quantize_channel

# LLVM vectorises a lane loop behind run-time checks that its arrays do not
# overlap; the default limits (8 pointer checks, 16 SCEV predicates) were too
# low for the check updates, which then stayed scalar (loop-vectorize remarks:
# "Too many SCEV assumptions"). Raising them only lets more loops vectorise;
# they apply to code compiled in this process (cached kernels keep theirs).
for _opt in ("-runtime-memory-check-threshold=64", "-vectorize-scev-check-threshold=64"):
    llvm.set_option("", _opt)

__all__ = [
    "LANES",
    "decode_float_lanes",
    "decode_fixed_point_lanes",
    "decode_fixed_point_levels_lanes",
    "exp_neg_lanes",
    "log1p_unit_lanes",
    "log_lanes",
    "boxplus_lanes",
]

#: Frames per lane group (a compile-time constant of every kernel): 64 float32
#: values are four 512-bit registers per step. Measured on the PEG (3,6)
#: n = 1008 code: 16 lanes ran at about half the edge rate of 64.
LANES = 64

#: Flags for the sum-product helpers: FMA contraction only. No ``nnan``/``ninf``
#: (LLRs saturate) and no reassociation (it would change rounding order).
#: ``error_model="numpy"`` drops the divide-by-zero test of Python semantics,
#: whose exception branch kept the box-plus loops scalar (the divisors here are
#: never 0).
_SP_OPTS = {**NUMBA_OPTS, "fastmath": {"contract"}, "error_model": "numpy"}

MODE_MIN_SUM = 1
MODE_SUM_PRODUCT = 0
FIXED_OFFSET = 0
FIXED_NORMALISED = 1


# ------------------------------------------------------------ exact constants
def _ln2_split() -> tuple[float, float]:
    """``ln 2 = hi + lo`` with ``hi`` holding 32 significant bits (``k * hi`` exact)."""
    getcontext().prec = 50
    ln2 = Decimal(2).ln()
    hi_bits = np.array([float(ln2)], dtype=np.float64).view(np.uint64)[0] & np.uint64(
        0xFFFFFFFF00000000)
    hi = float(np.array([hi_bits], dtype=np.uint64).view(np.float64)[0])
    lo = float(ln2 - Decimal(hi))
    return hi, lo


_LN2_HI, _LN2_LO = _ln2_split()
_LN2 = math.log(2.0)
_LOG2E = 1.0 / _LN2
_SQRT2M1 = math.sqrt(2.0) - 1.0
_SQRT2 = math.sqrt(2.0)
_F32 = np.float32
_LN2_HI32 = _F32(0.693145751953125)          # 16 significant bits: k * hi exact
_LN2_LO32 = _F32(math.log(2.0) - 0.693145751953125)
_LN2_32 = _F32(_LN2)
_LOG2E32 = _F32(_LOG2E)
_SQRT2M1_32 = _F32(_SQRT2M1)
_SQRT2_32 = _F32(_SQRT2)


# --------------------------------------------------------------- bit casts
@intrinsic
def _i64_as_f64(typingctx, x):
    """Reinterpret the bits of an int64 as a float64 (vectorises to a no-op)."""
    sig = nbt.float64(nbt.int64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(nbt.float64))
    return sig, codegen


@intrinsic
def _i32_as_f32(typingctx, x):
    """Reinterpret the bits of an int32 as a float32."""
    sig = nbt.float32(nbt.int32)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(nbt.float32))
    return sig, codegen


@intrinsic
def _f64_as_i64(typingctx, x):
    """Reinterpret the bits of a float64 as an int64."""
    sig = nbt.int64(nbt.float64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(nbt.int64))
    return sig, codegen


@intrinsic
def _f32_as_i32(typingctx, x):
    """Reinterpret the bits of a float32 as an int32."""
    sig = nbt.int32(nbt.float32)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(nbt.int32))
    return sig, codegen


# -------------------------------------------- exp(-t) and log1p(u) in arithmetic
@nb.njit(**_SP_OPTS)
def _exp_neg64(t):
    """``exp(-t)`` for float64 ``t >= 0`` (see module docstring)."""
    tc = min(t, 700.0)
    k = np.floor(tc * _LOG2E + 0.5)
    r = (tc - k * _LN2_HI) - k * _LN2_LO
    u = -r
    # Taylor coefficients 1/j!, j = 13 .. 0 (Horner)
    p = 1.0 / 6227020800.0
    p = p * u + 1.0 / 479001600.0
    p = p * u + 1.0 / 39916800.0
    p = p * u + 1.0 / 3628800.0
    p = p * u + 1.0 / 362880.0
    p = p * u + 1.0 / 40320.0
    p = p * u + 1.0 / 5040.0
    p = p * u + 1.0 / 720.0
    p = p * u + 1.0 / 120.0
    p = p * u + 1.0 / 24.0
    p = p * u + 1.0 / 6.0
    p = p * u + 0.5
    p = p * u + 1.0
    p = p * u + 1.0
    scale = _i64_as_f64((np.int64(1023) - np.int64(k)) << np.int64(52))
    res = p * scale
    return res if t <= 700.0 else 0.0


@nb.njit(**_SP_OPTS)
def _exp_neg32(t):
    """``exp(-t)`` for float32 ``t >= 0``."""
    tc = min(t, _F32(80.0))
    k = np.floor(tc * _LOG2E32 + _F32(0.5))
    r = (tc - k * _LN2_HI32) - k * _LN2_LO32
    u = -r
    p = _F32(1.0 / 5040.0)
    p = p * u + _F32(1.0 / 720.0)
    p = p * u + _F32(1.0 / 120.0)
    p = p * u + _F32(1.0 / 24.0)
    p = p * u + _F32(1.0 / 6.0)
    p = p * u + _F32(0.5)
    p = p * u + _F32(1.0)
    p = p * u + _F32(1.0)
    scale = _i32_as_f32((np.int32(127) - np.int32(k)) << np.int32(23))
    res = p * scale
    return res if t <= _F32(80.0) else _F32(0.0)


@nb.njit(**_SP_OPTS)
def _log1p_unit64(u):
    """``log(1 + u)`` for float64 ``0 <= u <= 1`` (see module docstring)."""
    big = u > _SQRT2M1
    g = (u - 1.0) * 0.5 if big else u
    s = g / (2.0 + g)
    # no subnormal z = s*s (a microcode assist costs ~100 cycles per lane):
    # below 2**-200 the series is 1 to working precision anyway
    sz = s if abs(s) > 2.0 ** -200 else 0.0
    z = sz * sz
    # 2 atanh(s) = 2 s sum_j z^j / (2j + 1), j = 0 .. 10
    p = 1.0 / 21.0
    p = p * z + 1.0 / 19.0
    p = p * z + 1.0 / 17.0
    p = p * z + 1.0 / 15.0
    p = p * z + 1.0 / 13.0
    p = p * z + 1.0 / 11.0
    p = p * z + 1.0 / 9.0
    p = p * z + 1.0 / 7.0
    p = p * z + 1.0 / 5.0
    p = p * z + 1.0 / 3.0
    p = p * z + 1.0
    res = 2.0 * s * p
    return res + _LN2 if big else res


@nb.njit(**_SP_OPTS)
def _log1p_unit32(u):
    """``log(1 + u)`` for float32 ``0 <= u <= 1``."""
    big = u > _SQRT2M1_32
    g = (u - _F32(1.0)) * _F32(0.5) if big else u
    s = g / (_F32(2.0) + g)
    sz = s if abs(s) > _F32(2.0 ** -40) else _F32(0.0)
    z = sz * sz
    p = _F32(1.0 / 11.0)
    p = p * z + _F32(1.0 / 9.0)
    p = p * z + _F32(1.0 / 7.0)
    p = p * z + _F32(1.0 / 5.0)
    p = p * z + _F32(1.0 / 3.0)
    p = p * z + _F32(1.0)
    res = _F32(2.0) * s * p
    return res + _LN2_32 if big else res


@nb.njit(inline="always", **_SP_OPTS)
def _log_pos64(y):
    """``log(y)`` for a positive normal float64 ``y`` (see module docstring)."""
    bits = _f64_as_i64(y)
    ex = (bits >> np.int64(52)) - np.int64(1023)
    m = _i64_as_f64((bits & np.int64(0xFFFFFFFFFFFFF)) | np.int64(0x3FF0000000000000))
    big = m > _SQRT2
    m = m * 0.5 if big else m
    k = np.float64(ex) + (1.0 if big else 0.0)
    f = m - 1.0
    s = f / (2.0 + f)
    z = s * s
    p = 1.0 / 21.0
    p = p * z + 1.0 / 19.0
    p = p * z + 1.0 / 17.0
    p = p * z + 1.0 / 15.0
    p = p * z + 1.0 / 13.0
    p = p * z + 1.0 / 11.0
    p = p * z + 1.0 / 9.0
    p = p * z + 1.0 / 7.0
    p = p * z + 1.0 / 5.0
    p = p * z + 1.0 / 3.0
    p = p * z + 1.0
    return k * _LN2_HI + (2.0 * s * p + k * _LN2_LO)


@nb.njit(inline="always", **_SP_OPTS)
def _log_pos32(y):
    """``log(y)`` for a positive normal float32 ``y``."""
    bits = _f32_as_i32(y)
    ex = (bits >> np.int32(23)) - np.int32(127)
    m = _i32_as_f32((bits & np.int32(0x7FFFFF)) | np.int32(0x3F800000))
    big = m > _SQRT2_32
    m = m * _F32(0.5) if big else m
    k = _F32(ex) + (_F32(1.0) if big else _F32(0.0))
    f = m - _F32(1.0)
    s = f / (_F32(2.0) + f)
    z = s * s
    p = _F32(1.0 / 11.0)
    p = p * z + _F32(1.0 / 9.0)
    p = p * z + _F32(1.0 / 7.0)
    p = p * z + _F32(1.0 / 5.0)
    p = p * z + _F32(1.0 / 3.0)
    p = p * z + _F32(1.0)
    return k * _LN2_HI32 + (_F32(2.0) * s * p + k * _LN2_LO32)


def _log_pos(y):  # pragma: no cover - replaced by the overload below
    raise NotImplementedError


def _sp_limits(cap):  # pragma: no cover - replaced by the overload below
    raise NotImplementedError


@overload(_log_pos, jit_options=_SP_OPTS, inline="always")
def _log_pos_impl(y):
    if y == nbt.float32:
        return lambda y: _log_pos32(y)
    return lambda y: _log_pos64(y)


@overload(_sp_limits, inline="always")
def _sp_limits_impl(cap):
    """``(BIG, GAP, CLAMP)`` of the sum-product check update for the type of ``cap``."""
    if cap == nbt.float32:
        return lambda cap: (_F32(60.0), _F32(20.0), _F32(20.0))
    return lambda cap: (600.0, 40.0, 40.0)


def _exp_neg(t):  # pragma: no cover - replaced by the overload below
    raise NotImplementedError


def _log1p_unit(u):  # pragma: no cover - replaced by the overload below
    raise NotImplementedError


def _boxplus_mag(x, y):  # pragma: no cover - replaced by the overload below
    raise NotImplementedError


@overload(_exp_neg, jit_options=_SP_OPTS, inline="always")
def _exp_neg_impl(t):
    if t == nbt.float32:
        return lambda t: _exp_neg32(t)
    return lambda t: _exp_neg64(t)


@overload(_log1p_unit, jit_options=_SP_OPTS, inline="always")
def _log1p_unit_impl(u):
    if u == nbt.float32:
        return lambda u: _log1p_unit32(u)
    return lambda u: _log1p_unit64(u)


@overload(_boxplus_mag, jit_options=_SP_OPTS, inline="always")
def _boxplus_mag_impl(x, y):
    """Exact box-plus of two magnitudes, dispatched on float32/float64."""
    if x == nbt.float32:
        def impl32(x, y):
            mn = min(x, y)
            r = (mn + _log1p_unit32(_exp_neg32(x + y))) - _log1p_unit32(_exp_neg32(abs(x - y)))
            return max(r, _F32(0.0))
        return impl32

    def impl64(x, y):
        mn = min(x, y)
        r = (mn + _log1p_unit64(_exp_neg64(x + y))) - _log1p_unit64(_exp_neg64(abs(x - y)))
        return max(r, 0.0)
    return impl64


# ----------------------------------------------------- public test entry points
@nb.njit(**_SP_OPTS)
def _map_exp(t, out):
    for j in range(t.shape[0]):
        out[j] = _exp_neg(t[j])


@nb.njit(**_SP_OPTS)
def _map_log1p(u, out):
    for j in range(u.shape[0]):
        out[j] = _log1p_unit(u[j])


@nb.njit(**_SP_OPTS)
def _map_log(y, out):
    for j in range(y.shape[0]):
        out[j] = _log_pos(y[j])


@nb.njit(**_SP_OPTS)
def _map_boxplus(x, y, out):
    for j in range(x.shape[0]):
        out[j] = _boxplus_mag(x[j], y[j])


def exp_neg_lanes(t: np.ndarray) -> np.ndarray:
    """``exp(-t)`` for ``t >= 0`` as computed inside the lane kernels (float32 or float64)."""
    t = np.ascontiguousarray(t).ravel()
    out = np.empty_like(t)
    _map_exp(t, out)
    return out


def log1p_unit_lanes(u: np.ndarray) -> np.ndarray:
    """``log1p(u)`` for ``0 <= u <= 1`` as computed inside the lane kernels."""
    u = np.ascontiguousarray(u).ravel()
    out = np.empty_like(u)
    _map_log1p(u, out)
    return out


def log_lanes(y: np.ndarray) -> np.ndarray:
    """``log(y)`` for positive normal ``y`` as computed inside the lane kernels."""
    y = np.ascontiguousarray(y).ravel()
    out = np.empty_like(y)
    _map_log(y, out)
    return out


def boxplus_lanes(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Box-plus ``|a [+] b|`` of magnitudes ``x, y >= 0`` as computed inside the lane kernels."""
    x = np.ascontiguousarray(x).ravel()
    y = np.ascontiguousarray(y, dtype=x.dtype).ravel()
    out = np.empty_like(x)
    _map_boxplus(x, y, out)
    return out


# ---------------------------------------------------------- float check updates
# All helpers act on one check (edges a .. a+d-1) of one lane group; W = LANES
# is a compile-time constant (a run-time lane count kept LLVM's loops at about
# a fifth of the speed). Per-lane state lives in one array ``st`` of 6 W values:
# [0] sign product, [1] smallest and [2] second-smallest magnitude, [3] index
# of the smallest, [4] number of negative and [5] of zero posteriors read (the
# syndrome of the posteriors, for the early stop). Few distinct arrays keep
# LLVM's run-time alias checks within the limits set above.

@nb.njit(**NUMBA_OPTS)
def _ms_read(src, c2v, edge_var, a, d, vb, st):
    """Pass 1 of min-sum: cavity values ``v = src[i] - c2v[e]`` into ``vb``, state into ``st``.

    Same operations in the same order as the scalar kernel.
    """
    W = np.uint64(LANES)
    zero = src.dtype.type(0.0)
    one = src.dtype.type(1.0)
    for w in range(W):
        st[w] = one
        st[W + w] = np.inf
        st[2 * W + w] = np.inf
        st[3 * W + w] = zero
        st[4 * W + w] = zero
        st[5 * W + w] = zero
    for k in range(d):
        e = a + k
        bi = edge_var[e] * W
        be = e * W
        bk = k * W
        kf = src.dtype.type(k)
        for w in range(W):
            p = src[bi + w]
            v = p - c2v[be + w]
            vb[bk + w] = v
            st[w] *= math.copysign(one, v)
            x = abs(v)
            lo = st[W + w]
            st[2 * W + w] = min(st[2 * W + w], max(lo, x))
            st[3 * W + w] = kf if x < lo else st[3 * W + w]
            st[W + w] = min(lo, x)
            st[4 * W + w] += one if p < zero else zero
            st[5 * W + w] += one if p == zero else zero


@nb.njit(**NUMBA_OPTS)
def _ms_write(dst, c2v, edge_var, a, d, alpha, beta, cap, vb, st, layered):
    """Pass 2 of min-sum: new messages into ``c2v``; flooding adds them to ``dst``
    (next posteriors), layered sets ``dst[i] = v + c2v`` (as the scalar kernel)."""
    W = np.uint64(LANES)
    zero = dst.dtype.type(0.0)
    one = dst.dtype.type(1.0)
    for w in range(W):
        st[W + w] = min(max(alpha * st[W + w] - beta, zero), cap)
        st[2 * W + w] = min(max(alpha * st[2 * W + w] - beta, zero), cap)
    for k in range(d):
        e = a + k
        bi = edge_var[e] * W
        be = e * W
        bk = k * W
        kf = dst.dtype.type(k)
        if layered:
            for w in range(W):
                # max(m1, m2 * [k is the argmin]) is m2 there and m1 elsewhere
                # (0 <= m1 <= m2), with no select between loads (which stayed scalar)
                hit = one if st[3 * W + w] == kf else zero
                mag = max(st[W + w], st[2 * W + w] * hit)
                out = (mag * st[w]) * math.copysign(one, vb[bk + w])
                c2v[be + w] = out
                dst[bi + w] = vb[bk + w] + out
        else:
            for w in range(W):
                hit = one if st[3 * W + w] == kf else zero
                mag = max(st[W + w], st[2 * W + w] * hit)
                out = (mag * st[w]) * math.copysign(one, vb[bk + w])
                c2v[be + w] = out
                dst[bi + w] += out


@nb.njit(inline="always", **_SP_OPTS)
def _sp_combine(q, r, eps, qcap):
    """``q [+] r`` of two complements, ``q + r - eps q r`` (see :func:`_sp_update`).

    ``qcap = 1`` in unshifted lanes: a complement of 1 (an erasure) absorbs
    everything exactly; ``qcap = inf`` in shifted lanes (no erasures there).
    """
    # bitwise | and a select of computed values: a short-circuit `or` became a
    # branch that kept the backward sweep scalar
    full = (q >= qcap) | (r >= qcap)
    val = min(q + r - eps * q * r, qcap)
    return qcap if full else val


@nb.njit(**NUMBA_OPTS)
def _sp_scratch(dmax, like):
    """Scratch of :func:`_sp_update` for checks of degree <= ``dmax``, dtype of ``like``:
    ``vb``, ``xb``, ``fb``, ``bb`` (dmax * LANES,), ``st`` (10 * LANES,), ``sg`` (LANES,)."""
    W = np.uint64(LANES)
    dt = like.dtype
    return (np.zeros(dmax * W, dtype=dt), np.zeros(dmax * W, dtype=dt),
            np.zeros(dmax * W, dtype=dt), np.zeros(dmax * W, dtype=dt),
            np.zeros(10 * W, dtype=dt), np.zeros(W, dtype=dt))


@nb.njit(**_SP_OPTS)
def _sp_update(src, dst, c2v, edge_var, a, d, cap, vb, xb, fb, bb, st, sg, layered):
    """Sum-product update of one check in the complement form, all lanes at once.

    For cavity magnitudes ``x_j`` write ``u_j = e^{-x_j}``,
    ``r_j = 1 - tanh(x_j/2) = 2 u_j/(1 + u_j)`` and, for edge ``k``, the complement
    ``q_k = 1 - prod_{j != k} tanh(x_j/2)``, built from prefix and suffix values
    with ``q [+] r = q + r - q r`` (a sum of non-negative terms: no
    cancellation); the message magnitude is ``log((2 - q_k)/q_k)``. That is
    the scalar kernel's form (one ``exp`` and one ``log`` per edge), here with
    the polynomial ``exp``/``log`` of this module.

    Large magnitudes, per lane, without branches: let ``m1 <= m2`` be the two
    smallest ``x_j``. Every ``q_k`` is at least about ``e^{-m2}``, so when
    ``m2 <= BIG`` (600 in float64, 60 in float32) terms flushed to 0 (``x_j``
    beyond 700 resp. 80) change ``q_k`` by a relative ``d e^{-100}`` resp.
    ``d e^{-20}``, below rounding. Otherwise the lane is shifted by
    ``S = m2 - BIG``: ``u_j = e^{-S} e^{-(x_j - S)}``, and with ``eps = e^{-S}``
    the same recursion holds exactly for ``q~ = q / eps``, ``r~ = r / eps``:
    ``r~ = 2 u~/(1 + eps u~)``, ``q~ [+] r~ = q~ + r~ - eps q~ r~``,
    ``|msg| = S + log((2 - eps q~)/q~)``. If moreover ``m2 - m1 > GAP`` (40
    resp. 20), ``e^{-(x_j - S)}`` of the smallest input could overflow, so it
    is clamped; then only the message to that smallest edge is taken from the
    recursion (it excludes the clamped term) and every other edge receives
    ``m1``, which is exact up to ``d e^{-GAP}`` (``1e-16`` resp. ``1e-8``,
    absolute). Erased inputs (``x = 0``, ``r = 1``) give ``q = 1`` and exactly
    0 messages; a degree-1 check (empty product) sends ``cap``.

    Per-lane state in ``st`` (rows of ``W``): 0 ``m1``, 1 ``m2``, 2 index of
    ``m1``, 3 ``S``, 4/5 syndrome counts (as :func:`_ms_read`), 6 ``eps``,
    7 ``qcap``, 8 split flag, 9 running suffix. ``layered``: True writes the
    posteriors ``dst = cavity + message`` (row-serial), False adds the messages
    to ``dst`` (flooding), 2 writes the messages only (the tree-reweighted lane
    sweep of :mod:`ldpcmarg.decoders.certified` weights them itself). ``xb`` holds ``x`` then
    ``r~``, ``fb`` and ``bb`` the prefix and suffix complements. Every index is unsigned (a signed
    index brings numba's negative-index test, which LLVM turned into gathers).
    """
    W = np.uint64(LANES)
    u1 = np.uint64(1)
    big, gap, clamp = _sp_limits(cap)
    zero = src.dtype.type(0.0)
    one = src.dtype.type(1.0)
    two = src.dtype.type(2.0)
    inf = src.dtype.type(np.inf)
    for w in range(W):
        sg[w] = one
        st[w] = inf
        st[W + w] = inf
        st[2 * W + w] = zero
        st[4 * W + w] = zero
        st[5 * W + w] = zero
    for k in range(d):
        e = a + k
        bi = edge_var[e] * W
        be = e * W
        bk = k * W
        kf = src.dtype.type(k)
        for w in range(W):
            p = src[bi + w]
            v = p - c2v[be + w]
            vb[bk + w] = v
            sg[w] *= math.copysign(one, v)
            x = abs(v)
            xb[bk + w] = x
            lo = st[w]
            st[W + w] = min(st[W + w], max(lo, x))
            st[2 * W + w] = kf if x < lo else st[2 * W + w]
            st[w] = min(lo, x)
            st[4 * W + w] += one if p < zero else zero
            st[5 * W + w] += one if p == zero else zero
    for w in range(W):
        m2 = st[W + w]
        sh = max(m2 - big, zero)
        sh = sh if sh < inf else zero      # m2 = inf: degree 1, nothing to shift
        st[3 * W + w] = sh
        st[6 * W + w] = _exp_neg(sh)
        st[7 * W + w] = one if sh == zero else inf
        st[8 * W + w] = one if ((sh > zero) & (m2 - st[w] > gap)) else zero
        st[9 * W + w] = zero
    if d == u1:
        # empty extrinsic product: certainty, sent as cap
        for w in range(W):
            c2v[a * W + w] = cap * sg[w] * math.copysign(one, vb[w])
    # forward: prefix complements into fb, r~ into xb
    for k in range(d):
        bk = k * W
        for w in range(W):
            eps = st[6 * W + w]
            uu = _exp_neg(max(xb[bk + w] - st[3 * W + w], -clamp))
            r = (two * uu) / (one + eps * uu)
            q = st[9 * W + w]
            fb[bk + w] = q
            xb[bk + w] = r
            st[9 * W + w] = _sp_combine(q, r, eps, st[7 * W + w])
    # backward: suffix complements into bb (the forward loop's shape; a backward
    # loop that also combined prefix and suffix stayed scalar), then messages
    for w in range(W):
        st[9 * W + w] = zero
    for kk in range(d):
        k = d - u1 - kk
        bk = k * W
        for w in range(W):
            q = st[9 * W + w]
            bb[bk + w] = q
            st[9 * W + w] = _sp_combine(q, xb[bk + w], st[6 * W + w], st[7 * W + w])
    for k in range(d if d > u1 else np.uint64(0)):
        bk = k * W
        be = (a + k) * W
        kf = src.dtype.type(k)
        for w in range(W):
            eps = st[6 * W + w]
            qk = _sp_combine(fb[bk + w], bb[bk + w], eps, st[7 * W + w])
            mag = min(st[3 * W + w] + _log_pos((two - eps * qk) / qk), cap)
            # both sides computed first: a load inside the conditional arm kept
            # the loop scalar (LLVM does not speculate the load)
            m1c = min(st[w], cap)
            other = (st[8 * W + w] > zero) & (st[2 * W + w] != kf)
            mag = m1c if other else mag
            c2v[be + w] = mag * sg[w] * math.copysign(one, vb[bk + w])
    if layered == 2:
        return      # messages only: the caller updates its posteriors itself
    for k in range(d):
        e = a + k
        bi = edge_var[e] * W
        be = e * W
        bk = k * W
        if layered:
            for w in range(W):
                dst[bi + w] = vb[bk + w] + c2v[be + w]
        else:
            for w in range(W):
                dst[bi + w] += c2v[be + w]


@nb.njit(**NUMBA_OPTS)
def _syndrome_add(st, open_, bad):
    """Fold one check's counts (``st[4W:6W]``) into the per-lane open/failed flags."""
    W = np.uint64(LANES)
    for w in range(W):
        par = (np.int64(st[4 * W + w]) & 1) != 0
        open_[w] |= par | (st[5 * W + w] > 0)
        bad[w] |= par


@nb.njit(**NUMBA_OPTS)
def _syndrome_pass(L, check_ptr, edge_var, st, open_, bad):
    """Per-lane syndrome of the hard decision ``L < 0`` (and ties ``L == 0``) over all checks."""
    W = np.uint64(LANES)
    m = check_ptr.shape[0] - 1
    zero = st.dtype.type(0)
    one = st.dtype.type(1)
    for w in range(W):
        open_[w] = False
        bad[w] = False
    for c in range(m):
        a = check_ptr[c]
        for w in range(W):
            st[4 * W + w] = zero
            st[5 * W + w] = zero
        for k in range(check_ptr[c + 1] - a):
            bi = edge_var[a + k] * W
            for w in range(W):
                p = L[bi + w]
                st[4 * W + w] += one if p < 0 else zero
                st[5 * W + w] += one if p == 0 else zero
        _syndrome_add(st, open_, bad)


# ------------------------------------------------------------ lane bookkeeping
@nb.njit(**NUMBA_OPTS)
def _lane_load(w, f, llr, chan, L, c2v, n, E):
    """Put frame ``f`` (or zeros when ``f < 0``) into lane ``w`` with fresh messages."""
    W = np.uint64(LANES)
    if f >= 0:
        for i in range(n):
            chan[i * W + w] = llr[f, i]
            L[i * W + w] = llr[f, i]
    else:
        for i in range(n):
            chan[i * W + w] = 0
            L[i * W + w] = 0
    for e in range(E):
        c2v[e * W + w] = 0


@nb.njit(**NUMBA_OPTS)
def _retire_and_refill(frames, pos, lane_frame, it, open_, bad, early_stop, max_iter,
                       llr, chan, L, c2v, n, E, pmax, scale, post, iters, valid, cont):
    """Retire the lanes whose frame is finished; refill them from ``frames[pos:]``.

    A lane is finished when early stop is on and no check is open (valid), or
    when it has run ``max_iter`` iterations (valid iff every parity holds). Its
    posterior ``clip(L, -pmax, pmax) * scale`` goes to ``post``. ``cont[w]`` is
    set for lanes that go on iterating. Returns the new ``pos``.
    """
    W = np.uint64(LANES)
    for w in range(W):
        f = lane_frame[w]
        cont[w] = False
        if f < 0:
            continue
        done_ok = early_stop and not open_[w]
        if done_ok or it[w] >= max_iter:
            for i in range(n):
                post[f, i] = min(max(L[i * W + w], -pmax), pmax) * scale
            iters[f] = it[w]
            valid[f] = done_ok or not bad[w]
            nf = frames[pos] if pos < frames.shape[0] else -1
            if nf >= 0:
                pos += 1
            lane_frame[w] = nf
            it[w] = 0
            _lane_load(w, nf, llr, chan, L, c2v, n, E)
        else:
            cont[w] = True
    return pos


@nb.njit(**NUMBA_OPTS)
def _first_load(frames, lane_frame, llr, chan, L, c2v, n, E):
    W = np.uint64(LANES)
    pos = 0
    for w in range(W):
        if pos < frames.shape[0]:
            lane_frame[w] = frames[pos]
            pos += 1
        _lane_load(w, lane_frame[w], llr, chan, L, c2v, n, E)
    return pos


@nb.njit(**NUMBA_OPTS)
def _any_active(lane_frame):
    for w in range(lane_frame.shape[0]):
        if lane_frame[w] >= 0:
            return True
    return False


# ----------------------------------------------------------- float lane kernels
@nb.njit(**NUMBA_OPTS)
def _float_group(frames, llr, check_ptr, edge_var, mode, layered, alpha, beta, max_iter,
                 early_stop, post, iters, valid):
    """Flooding or layered decoding of one chunk of frames in one lane group, with refill.

    Flooding: each check pass also counts the syndrome of the posteriors it
    reads (exactly the current ones), so the early-stop test needs no extra
    pass; a lane found finished discards that pass's update. Layered: checks
    in index order, posteriors refreshed after each check; the syndrome is a
    separate vectorised pass before each sweep.
    """
    W = np.uint64(LANES)
    n = np.uint64(llr.shape[1])
    m = check_ptr.shape[0] - 1
    E = np.uint64(edge_var.shape[0])
    dt = llr.dtype
    dmax = np.uint64(1)
    for c in range(m):
        dmax = max(dmax, check_ptr[c + 1] - check_ptr[c])
    chan = np.zeros(n * W, dtype=dt)
    L = np.zeros(n * W, dtype=dt)
    Lnew = np.zeros(n * W, dtype=dt)
    c2v = np.zeros(E * W, dtype=dt)
    vb, xb, fb, bb, st, sg = _sp_scratch(dmax, chan)
    open_ = np.zeros(W, dtype=np.bool_)
    bad = np.zeros(W, dtype=np.bool_)
    cont = np.zeros(W, dtype=np.bool_)
    it = np.zeros(W, dtype=np.int64)
    lane_frame = np.full(W, -1, dtype=np.int64)
    cap = dt.type(LLR_MAX)
    al = dt.type(alpha)
    be_ = dt.type(beta)
    big = dt.type(np.inf)
    pos = _first_load(frames, lane_frame, llr, chan, L, c2v, n, E)
    while _any_active(lane_frame):
        if layered:
            _syndrome_pass(L, check_ptr, edge_var, st, open_, bad)
            pos = _retire_and_refill(frames, pos, lane_frame, it, open_, bad, early_stop,
                                     max_iter, llr, chan, L, c2v, n, E, big, 1.0, post, iters,
                                     valid, cont)
            for c in range(m):
                a = check_ptr[c]
                d = check_ptr[c + 1] - a
                if mode == MODE_MIN_SUM:
                    _ms_read(L, c2v, edge_var, a, d, vb, st)
                    _ms_write(L, c2v, edge_var, a, d, al, be_, cap, vb, st, True)
                else:
                    _sp_update(L, L, c2v, edge_var, a, d, cap, vb, xb, fb, bb, st, sg, True)
            for w in range(W):
                it[w] += 1
        else:
            for j in range(n * W):
                Lnew[j] = chan[j]
            for w in range(W):
                open_[w] = False
                bad[w] = False
            for c in range(m):
                a = check_ptr[c]
                d = check_ptr[c + 1] - a
                if mode == MODE_MIN_SUM:
                    _ms_read(L, c2v, edge_var, a, d, vb, st)
                    _ms_write(Lnew, c2v, edge_var, a, d, al, be_, cap, vb, st, False)
                else:
                    _sp_update(L, Lnew, c2v, edge_var, a, d, cap, vb, xb, fb, bb, st, sg, False)
                _syndrome_add(st, open_, bad)
            pos = _retire_and_refill(frames, pos, lane_frame, it, open_, bad, early_stop,
                                     max_iter, llr, chan, L, c2v, n, E, big, 1.0, post, iters,
                                     valid, cont)
            for i in range(n):
                b = i * W
                for w in range(W):
                    L[b + w] = Lnew[b + w] if cont[w] else L[b + w]
            for w in range(W):
                it[w] += 1 if cont[w] else 0


@nb.njit(parallel=True, **NUMBA_OPTS)
def _float_batch(llr, check_ptr, edge_var, mode, layered, alpha, beta, max_iter, early_stop,
                 nchunks, post, iters, valid):
    """All frames of ``llr`` (F, n): frame f goes to chunk f mod nchunks; chunks in parallel."""
    F = llr.shape[0]
    for ch in nb.prange(nchunks):
        frames = np.arange(ch, F, nchunks)
        _float_group(frames, llr, check_ptr, edge_var, mode, layered, alpha, beta, max_iter,
                     early_stop, post, iters, valid)


# ---------------------------------------------------------- fixed-point kernels
@nb.njit(**NUMBA_OPTS)
def _fx_update(src, dst, c2v, edge_var, a, d, kind, factor, qmax, pmax, vb, st, layered):
    """Fixed-point min-sum update of one check (int32 working values, int8 messages).

    ``v = clip(src[i] - c2v[e], -qmax, qmax)``; sign product with 0 counted
    positive; magnitude ``max(min - beta, 0)`` (``kind`` offset, ``factor`` =
    beta) or ``(a * min + 8) >> 4`` (normalised, ``factor`` = a). Flooding adds
    the new messages to the int32 totals ``dst``; layered sets the posterior
    register ``dst[i] = clip(v + c2v, -pmax, pmax)``. ``st`` (int32, 6 W) as
    in :func:`_ms_read` (sign parity instead of sign product).
    """
    W = np.uint64(LANES)
    nqmax = np.int32(-qmax)
    for w in range(W):
        st[w] = 0
        st[W + w] = qmax
        st[2 * W + w] = qmax
        st[3 * W + w] = 0
        st[4 * W + w] = 0
        st[5 * W + w] = 0
    for k in range(d):
        e = a + k
        bi = edge_var[e] * W
        be = e * W
        bk = k * W
        kk = np.int32(k)
        for w in range(W):
            p = src[bi + w]
            v = np.int32(np.int32(p) - np.int32(c2v[be + w]))
            v = min(max(v, nqmax), qmax)
            vb[bk + w] = v
            st[w] ^= np.int32(1) if v < 0 else np.int32(0)
            x = np.int32(abs(v))
            lo = st[W + w]
            st[2 * W + w] = min(st[2 * W + w], max(lo, x))
            st[3 * W + w] = kk if x < lo else st[3 * W + w]
            st[W + w] = min(lo, x)
            st[4 * W + w] += np.int32(1) if p < 0 else np.int32(0)
            st[5 * W + w] += np.int32(1) if p == 0 else np.int32(0)
    # numba widens int32 arithmetic to int64; the np.int32(...) after each step
    # (exact: |values| <= 16 * 127 + 8) lets LLVM keep 32-bit lanes (16 per zmm
    # register instead of 8, and no 64-bit vpmullq in the second pass)
    zero32 = np.int32(0)
    eight = np.int32(8)
    four = np.int32(4)
    if kind == FIXED_OFFSET:
        for w in range(W):
            st[W + w] = max(np.int32(st[W + w] - factor), zero32)
            st[2 * W + w] = max(np.int32(st[2 * W + w] - factor), zero32)
    else:
        for w in range(W):
            st[W + w] = np.int32(np.int32(np.int32(factor * st[W + w]) + eight) >> four)
            st[2 * W + w] = np.int32(np.int32(np.int32(factor * st[2 * W + w]) + eight) >> four)
    npmax = np.int32(-pmax)
    for k in range(d):
        e = a + k
        bi = edge_var[e] * W
        be = e * W
        bk = k * W
        kk = np.int32(k)
        for w in range(W):
            hit = np.int32(1) if st[3 * W + w] == kk else np.int32(0)
            mag = max(st[W + w], st[2 * W + w] * hit)
            neg = st[w] ^ (np.int32(1) if vb[bk + w] < 0 else np.int32(0))
            sgn = np.int32(-neg)  # 0 or -1: (mag ^ sgn) - sgn is mag or -mag
            out = np.int32((mag ^ sgn) - sgn)
            c2v[be + w] = np.int8(out)
            if layered:
                dst[bi + w] = min(max(np.int32(vb[bk + w] + out), npmax), pmax)
            else:
                dst[bi + w] = np.int32(dst[bi + w] + out)


@nb.njit(**NUMBA_OPTS)
def _fx_group(frames, lq, check_ptr, edge_var, layered, kind, factor, qmax, pmax, step,
              max_iter, early_stop, post, iters, valid):
    """Fixed-point flooding or layered decoding of one chunk of frames, with lane refill.

    Flooding keeps the int32 totals ``T = l + sum c2v`` (the posterior
    ``clip(T, -pmax, pmax)`` has the signs and zeros of ``T``, so the syndrome
    is read from ``T`` inside the check pass, as in :func:`_float_group`);
    layered keeps the saturated posterior register (int16 range, int32 storage).
    """
    W = np.uint64(LANES)
    n = np.uint64(lq.shape[1])
    m = check_ptr.shape[0] - 1
    E = np.uint64(edge_var.shape[0])
    dmax = np.uint64(1)
    for c in range(m):
        dmax = max(dmax, check_ptr[c + 1] - check_ptr[c])
    chan = np.zeros(n * W, dtype=np.int32)
    T = np.zeros(n * W, dtype=np.int32)
    Tnew = np.zeros(n * W, dtype=np.int32)
    c2v = np.zeros(E * W, dtype=np.int8)
    vb = np.zeros(dmax * W, dtype=np.int32)
    st = np.zeros(6 * W, dtype=np.int32)
    open_ = np.zeros(W, dtype=np.bool_)
    bad = np.zeros(W, dtype=np.bool_)
    cont = np.zeros(W, dtype=np.bool_)
    it = np.zeros(W, dtype=np.int64)
    lane_frame = np.full(W, -1, dtype=np.int64)
    qm = np.int32(qmax)
    pm = np.int32(pmax)
    fac = np.int32(factor)
    pos = _first_load(frames, lane_frame, lq, chan, T, c2v, n, E)
    while _any_active(lane_frame):
        if layered:
            _syndrome_pass(T, check_ptr, edge_var, st, open_, bad)
            pos = _retire_and_refill(frames, pos, lane_frame, it, open_, bad, early_stop,
                                     max_iter, lq, chan, T, c2v, n, E, pm, step, post, iters,
                                     valid, cont)
            for c in range(m):
                a = check_ptr[c]
                d = check_ptr[c + 1] - a
                _fx_update(T, T, c2v, edge_var, a, d, kind, fac, qm, pm, vb, st, True)
            for w in range(W):
                it[w] += 1
        else:
            for j in range(n * W):
                Tnew[j] = chan[j]
            for w in range(W):
                open_[w] = False
                bad[w] = False
            for c in range(m):
                a = check_ptr[c]
                d = check_ptr[c + 1] - a
                _fx_update(T, Tnew, c2v, edge_var, a, d, kind, fac, qm, pm, vb, st, False)
                _syndrome_add(st, open_, bad)
            pos = _retire_and_refill(frames, pos, lane_frame, it, open_, bad, early_stop,
                                     max_iter, lq, chan, T, c2v, n, E, pm, step, post, iters,
                                     valid, cont)
            for i in range(n):
                b = i * W
                for w in range(W):
                    T[b + w] = Tnew[b + w] if cont[w] else T[b + w]
            for w in range(W):
                it[w] += 1 if cont[w] else 0


@nb.njit(parallel=True, **NUMBA_OPTS)
def _fixed_batch(lq, check_ptr, edge_var, layered, kind, factor, qmax, pmax, step, max_iter,
                 early_stop, nchunks, post, iters, valid):
    F = lq.shape[0]
    for ch in nb.prange(nchunks):
        frames = np.arange(ch, F, nchunks)
        _fx_group(frames, lq, check_ptr, edge_var, layered, kind, factor, qmax, pmax, step,
                  max_iter, early_stop, post, iters, valid)


# ------------------------------------------------------------- Python wrappers
def _graph_arrays(code):
    return (np.ascontiguousarray(code.check_ptr, dtype=np.uint64),
            np.ascontiguousarray(code.edge_var, dtype=np.uint64))


def _chunks(F: int, threads: int) -> int:
    """One lane group per thread (fewer when the batch does not fill them)."""
    th = max(1, threads or nb.get_num_threads())
    return max(1, min(th, -(-F // LANES)))


def decode_float_lanes(code, llr, *, mode: str, layered: bool = False, alpha: float = 1.0,
                       beta: float = 0.0, max_iter: int = 50, early_stop: bool = True,
                       precision: str = "float64", threads: int = 0):
    """Decode a batch with the lane kernels (float min-sum or sum-product).

    Parameters
    ----------
    code : ParityCheckCode
    llr : ndarray of shape (F, n), float32 or float64
        Channel LLRs (positive favours 0); clipped to ``+-LLR_MAX``.
    mode : {"min-sum", "sum-product"}
    layered : bool
        Row-serial schedule (checks in index order) instead of flooding.
    alpha, beta : float
        Min-sum normalisation and offset (LLR units): ``min(max(alpha m - beta, 0), LLR_MAX)``.
    max_iter, early_stop : as the scalar decoders.
    precision : {"float64", "float32"}
        Message type.
    threads : int
        Threads for the chunk-parallel loop (0 = numba's current setting; the
        caller sets numba's thread count).

    Returns
    -------
    post : ndarray of shape (F, n), float64
        Posterior LLRs.
    iters : ndarray of shape (F,), int64
    valid : ndarray of shape (F,), bool
    """
    if mode not in ("min-sum", "sum-product"):
        raise InputError(f"mode must be 'min-sum' or 'sum-product'; got {mode!r}.")
    if precision not in ("float64", "float32"):
        raise InputError(f"precision must be 'float64' or 'float32'; got {precision!r}.")
    dtype = np.float32 if precision == "float32" else np.float64
    x = np.ascontiguousarray(np.clip(np.asarray(llr, dtype=np.float64), -LLR_MAX, LLR_MAX)
                             .astype(dtype, copy=False))
    if x.ndim != 2 or x.shape[1] != code.n:
        raise InputError(f"LLRs must have shape (F, {code.n}); got {x.shape}.")
    F = x.shape[0]
    post = np.zeros((F, code.n), dtype=np.float64)
    iters = np.zeros(F, dtype=np.int64)
    valid = np.zeros(F, dtype=np.bool_)
    if F:
        cp, ev = _graph_arrays(code)
        _float_batch(x, cp, ev, MODE_MIN_SUM if mode == "min-sum" else MODE_SUM_PRODUCT,
                     bool(layered), float(alpha), float(beta), int(max_iter), bool(early_stop),
                     _chunks(F, threads), post, iters, valid)
    return post, iters, valid


def quantise_llr(llr, q: int, step: float) -> np.ndarray:
    """Channel quantisation of the fixed-point format: ``clip(rint(L / step), -QMAX, QMAX)``.

    Returns an int8 array of the shape of ``llr`` (``QMAX = 2**(q-1) - 1``;
    ``L`` clipped to ``+-LLR_MAX`` first). The same function as the scalar
    decoders' :func:`ldpcmarg.decoders.fixed_point.quantize_channel`.
    """
    return quantize_channel(llr, q, step)


def decode_fixed_point_levels_lanes(code, levels, *, q: int, q_post: int, offset: bool,
                                    factor: int, layered: bool = False, max_iter: int = 50,
                                    early_stop: bool = True, threads: int = 0):
    """Fixed-point min-sum on integer channel levels with the lane kernels (no checks).

    The entry point of the ``kernel`` option of the fixed-point decoders,
    which validate their options; :func:`decode_fixed_point_lanes` is the
    checked public form.

    Parameters
    ----------
    code : ParityCheckCode
    levels : ndarray of shape (F, n), int8
        Channel levels within ``+-QMAX``, ``QMAX = 2**(q-1) - 1``.
    q, q_post : int
        Message and posterior register bits.
    offset : bool
        Offset min-sum ``max(min - factor, 0)``; else normalised
        ``(factor * min + 8) >> 4`` (``factor = a = round(16 alpha)``).
    factor : int
        ``beta`` in steps (offset) or ``a`` in 1 .. 16 (normalised).
    layered, max_iter, early_stop, threads : as :func:`decode_fixed_point_lanes`.

    Returns
    -------
    post : ndarray of shape (F, n), int16
        Posterior registers ``P`` (LLR ``P * step``).
    iters : ndarray of shape (F,), int64
    valid : ndarray of shape (F,), bool
    """
    lq = np.ascontiguousarray(levels, dtype=np.int8)
    F = lq.shape[0]
    post = np.zeros((F, code.n), dtype=np.int16)
    iters = np.zeros(F, dtype=np.int64)
    valid = np.zeros(F, dtype=np.bool_)
    if F:
        cp, ev = _graph_arrays(code)
        _fixed_batch(lq, cp, ev, bool(layered), FIXED_OFFSET if offset else FIXED_NORMALISED,
                     int(factor), 2 ** (q - 1) - 1, 2 ** (q_post - 1) - 1, 1.0, int(max_iter),
                     bool(early_stop), _chunks(F, threads), post, iters, valid)
    return post, iters, valid


def decode_fixed_point_lanes(code, llr, *, q: int = 6, step: float = 0.5,
                             q_post: int | None = None, rule: str = "offset",
                             beta_steps: int = 1, alpha: float = 0.75, layered: bool = False,
                             max_iter: int = 50, early_stop: bool = True, threads: int = 0):
    """Fixed-point min-sum with the lane kernels (the shared integer message format).

    Parameters
    ----------
    code : ParityCheckCode
    llr : ndarray of shape (F, n), float
        Channel LLRs; quantised by :func:`quantise_llr` (clip to ``+-LLR_MAX``,
        round half to even, saturate at ``QMAX = 2**(q-1) - 1``); NaN is refused.
    q : int, 3 .. 8
        Message bits (int8 storage).
    step : float > 0
        LLR units per integer step (Delta).
    q_post : int, optional
        Posterior register bits (default ``q + 2``, at most 16).
    rule : {"offset", "normalised"}
        Offset min-sum ``max(min - beta_steps, 0)`` or normalised min-sum
        ``(a min + 8) >> 4`` with ``a = round(16 alpha)`` (Python's round, half
        to even: :func:`ldpcmarg.decoders.fixed_point.normalisation_steps`;
        effective alpha a/16). A check of degree 1 (empty minimum) sends the
        saturated level computed from ``QMAX``.
    layered : bool
        Row-serial schedule (posterior register saturated at every update).
    max_iter, early_stop : as the float decoders (early stop tests the hard
        decision ``P < 0`` before each iteration; a bit with ``P == 0`` keeps
        its checks open).

    Returns
    -------
    post : ndarray of shape (F, n), float64
        Posterior LLRs ``P * step``.
    iters : ndarray of shape (F,), int64
    valid : ndarray of shape (F,), bool
    """
    if not (isinstance(q, int | np.integer) and 3 <= q <= 8):
        raise InputError(f"q must be an integer from 3 to 8; got {q!r}.")
    q_post = q + 2 if q_post is None else q_post
    if not (isinstance(q_post, int | np.integer) and q <= q_post <= 16):
        raise InputError(f"q_post must be an integer from q = {q} to 16; got {q_post!r}.")
    if not (step > 0 and math.isfinite(step)):
        raise InputError(f"step must be a finite number > 0; got {step!r}.")
    if rule == "offset":
        kind, factor = FIXED_OFFSET, int(beta_steps)
        if factor < 0:
            raise InputError(f"beta_steps must be an integer >= 0; got {beta_steps!r}.")
    elif rule == "normalised":
        kind, factor = FIXED_NORMALISED, normalisation_steps(alpha)
        if not 1 <= factor <= 16:
            raise InputError(f"alpha must lie in [1/32, 1] (a = round(16 alpha) in 1..16); "
                             f"got {alpha!r}.")
    else:
        raise InputError(f"rule must be 'offset' or 'normalised'; got {rule!r}.")
    a = np.asarray(llr, dtype=np.float64)
    if a.ndim != 2 or a.shape[1] != code.n:
        raise InputError(f"LLRs must have shape (F, {code.n}); got {a.shape}.")
    if np.isnan(a).any():
        raise InputError("LLRs contain NaN; pass finite values (or +-inf for certain bits).")
    reg, iters, valid = decode_fixed_point_levels_lanes(
        code, quantise_llr(a, q, step), q=int(q), q_post=int(q_post),
        offset=kind == FIXED_OFFSET, factor=factor, layered=layered, max_iter=max_iter,
        early_stop=early_stop, threads=threads)
    return reg * float(step), iters, valid
