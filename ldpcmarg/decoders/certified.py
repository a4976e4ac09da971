r"""Batched certified tree-reweighted marginals: fast warm start, projection, certificate.

An experimental batched route to the certified marginals of the ``fw`` decoder
for a convex free energy (tree-reweighted weights ``rho``, DESIGN.md §5, §5a). For a
batch of F frames it runs, as numba kernels parallel over frames (``prange``; every
frame owns its buffers):

1. **Warm start** — reweighted sum-product with the same ``rho``
   (posterior ``L_i = lambda_i + sum_c rho_c l_ci``, cavity ``v_ci = L_i - l_ci``,
   check message ``l_ci = boxplus_{j != i} v_cj``), stopped at a loose tolerance
   on the largest message change. Schedules: ``"layered"`` (checks one after
   another, each refreshing its bits' posteriors at once) or ``"flooding"``;
   relaxation ``new = old + omega (update - old)`` (``omega < 1`` damps,
   ``omega > 1`` over-relaxes), optionally adapted: whenever the largest change
   grows from one sweep to the next, ``omega`` is multiplied by ``0.7`` (down to
   ``omega_min``). Measured in ``experiments/bench_certified.py``.
2. **Projection** — the beliefs are made a point of the local polytope ``L``.
   ``projection="peeled"`` (fw's route, :func:`_peeled_project_frame`): the
   check beliefs start at the message cavities ``w = L - c2v`` and the bit
   targets at ``1 / (1 + exp(L_i))``; checks whose belief lies within a tiny
   slack of a face of their parity polytope become linear equations on the
   targets, solved by peeling; then one exact linear step per check matches
   its marginals to the targets, with the check quantities in closed form
   (product measure conditioned on even parity). ``projection="newton"``
   (:func:`_project_frame`): per check,
   damped Newton on the cavity LLRs
   ``w`` (the marginals of
   ``tau_c(S) ∝ exp(-sum_t S_t w_t)`` have Jacobian ``-Cov``) until the check's
   bit marginals equal the posteriors, then one multiplicative step
   ``tau(S) <- tau(S) (1 + sum_t c_t (S_t - m_t))`` with ``Cov c = q - m`` (linear
   in ``tau``: exact to rounding, every entry moves in proportion to itself).
   Where Newton fails — unconverged posteriors can lie just outside a check's
   parity polytope, e.g. ``q_t > sum_{u != t} q_u`` — the mismatch is removed by
   adding ``sum_t delta_t (2 S_t - 1) / 2**(d-2)`` and the whole point is mixed
   with the uniform point by the least weight ``theta`` keeping every entry >= 0.
3. **Certificates** — with ``mu_ci = rho_c w_ci``: (a) the *entropic*
   Lagrangian bound ``G(mu) <= F*`` (weak duality for the separable pieces of
   F: each check gives ``-rho_c ln sum_S exp(-sum_{i in S} w_ci)``, each bit
   ``-kappa_i softplus(-b_i / kappa_i)`` or ``min(0, b_i)`` for ``kappa_i <= 0``);
   (b) optionally the linear bound of DESIGN.md §5a,
   ``<grad F(tau), tau> - D(mu) >= F(tau) - F*``. The certified gap is the smaller
   of ``F(tau) - G(mu)`` and (b).
4. **Polishing** — frames not yet certified continue their message passing
   with a tolerance ten times smaller and are projected and certified again,
   up to ``polish_rounds`` times.

With ``anderson > 0`` the message passing is layered, unrelaxed, with the
one-``exp``-one-``log`` complement form of the check update and Anderson
acceleration of the sweep map (:func:`_anderson_frame`); every polishing round
then runs at most ``check_every`` sweeps before the frame's certificate is
evaluated again, so each frame stops as soon as its certificate closes. With
``lanes`` the sweeps of a batch run 64 frames at a time across SIMD lanes
(:func:`_anderson_group`, the lane sum-product update of
:mod:`ldpcmarg.decoders.vectorised` weighted by ``rho``; a lane whose frame
stops is refilled at once). This is the route ``fw`` takes by default for convex ``F`` (settings
``frank_wolfe._BATCHED_SETTINGS``; frames it does not certify go to the
per-frame solver).

Measured (``experiments/bench_certified.py``, study in
``experiments/results/bench_certified.md``): Anderson (memory 5) cuts the
sweeps to a 1e-8 message change about threefold against plain layered
sweeps (which need about 40 % of the sweeps of flooding with damping 0.5);
the linear certificate with multipliers from the projected cavities closes a
1e-4 relative gap on nearly every frame once messages move by <= 1e-10 to
1e-12, while a loose tolerance (1e-5) certifies few frames: the linear bound is
first order in the fixed-point residual, and loose posteriors can fall outside
a check's parity polytope, where the fix-up mixes in the uniform point. The
entropic bound with the plain split levels off at a relative gap of 2e-3
(1.5 dB) to 1e-2 (2.5 dB): sampled-hyperforest weights leave a few bits (6 of
504, 7 of 1008) with ``kappa_i <= 0``, whose linear pieces make > 99 % of the
gap. With ``kappa_floor > 0`` every bit with ``kappa_i < kappa_floor`` borrows
``alpha <= rho_c / 2`` of the entropy of one adjacent check (a partial Heskes
allocation, one bit per check so the check piece's minimum stays closed form,
multiplier shifted by ``-alpha L_i``); the entropic bound then closes on its own,
10–20 % fewer sweeps than the linear one and without its star sweeps.

With the Newton projection the entropic bound is evaluated at two multiplier
sets, the Newton cavities of the projection and the message cavities
``L - c2v``, and the larger is kept (the peeled projection uses the message
cavities only).
With the Newton cavities alone the bound stalled at a relative gap of 1e-3 to
1e-2 until messages moved by <= 1e-8 (the Newton step ``Cov^-1 (q - m)`` is
large on nearly deterministic checks and the bits pay for it at first order);
with the message cavities it closes a 1e-4 relative gap at a 3e-5 to 1e-4
message change, after 30–41 sweeps instead of 55–70 (peg-504/1008 at 1.5 and
2.5 dB).

**Why the peeled projection.** At the message cavities the dual bound is
already within 3e-5 (relative) of the optimum at a 3e-2 message change
(2.5 dB, peg-1008-3-6; 3e-6 at 1e-2), yet the Newton projection certified
only 2e-2 there: it mixed in the uniform point on every frame. TRW messages
are large while the posteriors are moderate (median ``|L|`` ~ 3), so many
check beliefs put almost all their mass next to their most likely odd
pattern ``V``: the face ``sum_V x - sum_not-V x <= |V| - 1`` of the parity
polytope is within ~1e-7 of the belief, and bit targets off by the message
residual (1e-5 to 1e-4 in probability at a 1e-3 change) fall outside it;
mixing with the uniform point then costs ``theta (F(u) - F(tau))``, first
order in the residual. The peeled projection keeps such checks on their
face (one equation each, solved for one bit that no other equation
contains, in peeling order), so every check can be matched by a small step
and the gap is second order: 3e-6 relative at a 3e-3 change. Where the
linear step would leave an entry <= 0 or needs a coefficient above 1e4 (its
rounding), that check is made by Newton, else by the additive correction and
the uniform mix (rare at a 5e-3 change). The certificate uses a closed-form
upper bound on each check's negentropy (``(1 + u) ln(1 + u) <= u + u^2``, about
twice the check's Kullback–Leibler term); near misses and certified frames
get their point written and F evaluated exactly. fw uses Anderson memory 3,
first certificate at a 5e-3 message change, then every 3 sweeps: 17–23
sweeps (peg-504/1008 at 1.5 and 2.5 dB).

Box-plus is evaluated exactly at every magnitude (no clamped tanh/atanh, no
overflow): ``a ⊞ b = sign(a) sign(b) min(|a|, |b|) + log1p(exp(-|a+b|))
- log1p(exp(-|a-b|))`` (Hagenauer, Offer & Papke, IEEE Trans. IT 42(2), 1996,
the "Jacobian logarithm" form of the boxplus).

Conventions: LLR positive favours 0; ``tau_i = P(x_i = 1) = 1 / (1 + exp(L_i))``;
local codewords in the flat layout of :class:`ldpcmarg.code.parity_check.LocalCodewords`;
edges in check-major order.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numba as nb
import numpy as np

from .._settings import LLR_MAX, NUMBA_OPTS
from ..errors import InputError
from .lp_dual import (
    _bound_kernel,
    _graph_of,
    _reduced_bits_kernel,
    _star_sweep_kernel,
    _theta_kernel,
)
from .message_passing import _sp_magnitudes
from .vectorised import _SP_OPTS, LANES, _log_pos64, _sp_scratch, _sp_update

__all__ = ["boxplus", "CertifiedBatch", "CertifiedTRW", "SCHEDULES"]

#: Floor inside logarithms (same as the Frank–Wolfe solver): gradients stay finite.
_TINY = 1e-300

SCHEDULES = ("layered", "flooding")
#: Largest coefficient of the peeled projection's linear step (rounding of 1 + u ~ 1e-12).
_C_MAX = 1e4
PROJECTIONS = ("newton", "peeled")
#: Frame-sweeps of the scalar Anderson kernel per lane-frame sweep (measured on
#: peg-1008-3-6, AVX2, float64: ~110 us against ~60 us per frame and sweep).
_LANE_SPEEDUP = 1.8
#: Smallest first tolerance for float32 lanes: messages of magnitude ~300 have a
#: float32 spacing of 3e-5, so a float32 sweep's change cannot go much below 1e-4.
_F32_TOL_MIN = 1e-3


# ------------------------------------------------------------------ kernels
@nb.njit(**NUMBA_OPTS)
def _boxplus(a, b):
    """Exact box-plus of two LLRs: the LLR of x XOR y, finite for finite inputs."""
    s = math.copysign(1.0, a) * math.copysign(1.0, b)
    m = min(abs(a), abs(b))
    # log1p(exp(-|a+b|)) - log1p(exp(-|a-b|)) as one log1p (argument in (-1, 1)):
    # one logarithm instead of two, same value to rounding
    ep = math.exp(-abs(a + b))
    em = math.exp(-abs(a - b))
    return s * m + math.log1p((ep - em) / (1.0 + em))


@nb.njit(**NUMBA_OPTS)
def _extrinsic(v, d, fwd, out):
    """out[k] = boxplus of v[j] over j != k (k < d), by prefix/suffix box-plus.

    ``fwd`` is scratch of length >= d. Needs d >= 2.
    """
    fwd[0] = v[0]
    for k in range(1, d - 1):
        fwd[k] = _boxplus(fwd[k - 1], v[k])
    acc = v[d - 1]
    out[d - 1] = fwd[d - 2]
    for k in range(d - 2, 0, -1):
        out[k] = _boxplus(fwd[k - 1], acc)
        acc = _boxplus(acc, v[k])
    out[0] = acc


@nb.njit(**NUMBA_OPTS)
def _mp_frame(llr, check_ptr, edge_var, rho, layered, omega0, adaptive, omega_min,
              max_iter, tol, c2v, L, Lnew, v, ext, fwd, state):
    """Reweighted sum-product on one frame, continuing from ``c2v``/``L``.

    ``state`` (3,) float64 carries (iterations so far, current omega, last
    residual) between calls; a fresh frame has state = (0, omega0, inf) and
    ``c2v = 0``, ``L = llr``. Stops when the largest message change of a sweep is
    <= tol or after ``max_iter`` further sweeps. Returns the last residual.
    """
    n = llr.shape[0]
    m = check_ptr.shape[0] - 1
    omega = state[1]
    prev = state[2]
    it = 0
    resid = prev
    while it < max_iter:
        maxd = 0.0
        if layered:
            for c in range(m):
                a = check_ptr[c]
                d = check_ptr[c + 1] - a
                if d < 2:
                    continue
                r = rho[c]
                for k in range(d):
                    v[k] = L[edge_var[a + k]] - c2v[a + k]
                _extrinsic(v, d, fwd, ext)
                for k in range(d):
                    e = a + k
                    old = c2v[e]
                    ch = ext[k] - old
                    if abs(ch) > maxd:
                        maxd = abs(ch)
                    new = old + omega * ch
                    c2v[e] = new
                    L[edge_var[e]] += r * (new - old)
        else:
            for i in range(n):
                Lnew[i] = llr[i]
            for c in range(m):
                a = check_ptr[c]
                d = check_ptr[c + 1] - a
                if d < 2:
                    continue
                r = rho[c]
                for k in range(d):
                    v[k] = L[edge_var[a + k]] - c2v[a + k]
                _extrinsic(v, d, fwd, ext)
                for k in range(d):
                    e = a + k
                    old = c2v[e]
                    ch = ext[k] - old
                    if abs(ch) > maxd:
                        maxd = abs(ch)
                    new = old + omega * ch
                    c2v[e] = new
                    Lnew[edge_var[e]] += r * new
            for i in range(n):
                L[i] = Lnew[i]
        it += 1
        if adaptive and maxd > prev and omega > omega_min:
            omega = max(omega * 0.7, omega_min)
        prev = maxd
        resid = maxd
        if maxd <= tol:
            break
    if layered and it > 0:
        # refresh L from the messages: the running sums drift by rounding
        for i in range(n):
            Lnew[i] = llr[i]
        for c in range(m):
            for e in range(check_ptr[c], check_ptr[c + 1]):
                Lnew[edge_var[e]] += rho[c] * c2v[e]
        for i in range(n):
            L[i] = Lnew[i]
    state[0] += it
    state[1] = omega
    state[2] = prev
    return resid


@nb.njit(parallel=True, **NUMBA_OPTS)
def _mp_batch(llr, check_ptr, edge_var, rho, layered, omega0, adaptive, omega_min, max_iter,
              tol, active, c2v, L, state, resid, dmax):
    """:func:`_mp_frame` on every active frame of a batch (prange over frames)."""
    F, n = llr.shape
    for f in nb.prange(F):
        if not active[f]:
            continue
        Lnew = np.empty(n, dtype=np.float64)
        v = np.empty(dmax + 1, dtype=np.float64)
        ext = np.empty(dmax + 1, dtype=np.float64)
        fwd = np.empty(dmax + 1, dtype=np.float64)
        resid[f] = _mp_frame(llr[f], check_ptr, edge_var, rho, layered, omega0, adaptive,
                             omega_min, max_iter, tol, c2v[f], L[f], Lnew, v, ext, fwd, state[f])


@nb.njit(**NUMBA_OPTS)
def _layered_sweep(llr, check_ptr, edge_var, rho, c2v, L, vbuf, tbuf):
    """One layered sweep of reweighted sum-product in place; returns the largest change.

    Check messages by :func:`ldpcmarg.decoders.message_passing._sp_magnitudes`
    (the ``1 - tanh`` complement form: one ``exp`` and one ``log`` per edge, exact
    at every magnitude). ``L`` is kept equal to ``llr + sum_c rho_c c2v`` by
    incremental updates. ``vbuf`` (2 dmax + 2,) and ``tbuf`` (dmax + 1,) are scratch.
    """
    m = check_ptr.shape[0] - 1
    maxd = 0.0
    for c in range(m):
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        if d < 2:
            continue
        r = rho[c]
        sprod = 1.0
        for k in range(d):
            v = L[edge_var[a + k]] - c2v[a + k]
            vbuf[k] = v
            sprod *= math.copysign(1.0, v)
        _sp_magnitudes(vbuf, d, 600.0, LLR_MAX, tbuf)
        for k in range(d):
            e = a + k
            old = c2v[e]
            new = tbuf[k] * sprod * math.copysign(1.0, vbuf[k])
            ch = abs(new - old)
            if ch > maxd:
                maxd = ch
            c2v[e] = new
            L[edge_var[e]] += r * (new - old)
    return maxd


@nb.njit(**NUMBA_OPTS)
def _refresh_posteriors(llr, check_ptr, edge_var, rho, c2v, L):
    """L = llr + sum_c rho_c c2v (exact, no running-sum drift)."""
    n = llr.shape[0]
    m = check_ptr.shape[0] - 1
    for i in range(n):
        L[i] = llr[i]
    for c in range(m):
        for e in range(check_ptr[c], check_ptr[c + 1]):
            L[edge_var[e]] += rho[c] * c2v[e]


@nb.njit(**NUMBA_OPTS)
def _gauss_solve(A, rhs, k, x, pivot_min):
    """Solve the k x k system A x = rhs by Gaussian elimination with partial pivoting.

    Overwrites ``A`` and ``rhs``. Returns False (``x`` undefined) when a pivot's
    magnitude is at or below ``pivot_min``.
    """
    for col in range(k):
        p = col
        for r in range(col + 1, k):
            if abs(A[r, col]) > abs(A[p, col]):
                p = r
        if abs(A[p, col]) <= pivot_min:
            return False
        if p != col:
            for u in range(k):
                tmp = A[col, u]
                A[col, u] = A[p, u]
                A[p, u] = tmp
            tmp = rhs[col]
            rhs[col] = rhs[p]
            rhs[p] = tmp
        for r in range(col + 1, k):
            f = A[r, col] / A[col, col]
            if f != 0.0:
                for u in range(col, k):
                    A[r, u] -= f * A[col, u]
                rhs[r] -= f * rhs[col]
    for cc in range(k):
        r = k - 1 - cc
        acc = rhs[r]
        for u in range(r + 1, k):
            acc -= A[r, u] * x[u]
        x[r] = acc / A[r, r]
    return True


@nb.njit(**NUMBA_OPTS)
def _anderson_solve(Mt, rhs, gam, k):
    """Anderson coefficients from the (k x k) Gram matrix ``Mt`` (overwritten).

    Solves ``(Mt + 1e-10 max diag) g = 1`` by Gaussian elimination with partial
    pivoting into ``gam[:k]`` and returns ``sum g`` (the normaliser of
    ``gamma = g / sum g``), or 0.0 when the system is singular, the Gram matrix
    is zero or the sum is not a usable finite number (then no extrapolation).
    """
    scale = 0.0
    for a in range(k):
        scale = max(scale, Mt[a, a])
    if scale <= 0.0:
        return 0.0
    for a in range(k):
        Mt[a, a] += 1e-10 * scale
        rhs[a] = 1.0
    if not _gauss_solve(Mt, rhs, k, gam, 1e-300):
        return 0.0
    tot = 0.0
    for a in range(k):
        tot += gam[a]
    if not (abs(tot) > 1e-300) or not math.isfinite(tot):
        return 0.0
    return tot


@nb.njit(**NUMBA_OPTS)
def _anderson_frame(llr, check_ptr, edge_var, rho, max_iter, tol, mem, c2v, L, R, G, M, Mt,
                    rhs, gam, vbuf, tbuf, state):
    """Layered reweighted sum-product with Anderson acceleration (type II), one frame.

    The fixed-point map is one layered sweep ``x -> G(x)`` on the messages ``x``
    (E,). With the last ``k <= mem + 1`` pairs kept in the ring buffers ``R``
    (residuals ``G(x_j) - x_j``) and ``G`` (mem + 1, E), the next iterate is
    ``sum_j gamma_j G(x_j)`` with ``sum_j gamma_j = 1`` minimising
    ``|sum_j gamma_j (G(x_j) - x_j)|`` (Walker & Ni, SIAM J. Numer. Anal. 49(4),
    2011; normal equations with a small Tikhonov term). The Gram matrix of the
    residuals ``M`` (mem + 1, mem + 1) is kept between sweeps: each sweep adds one
    row (k dot products instead of k (k + 1) / 2; measured: the Gram matrix took
    about half of an accelerated sweep when rebuilt every time). Safeguard: when
    the residual grows past twice the best seen, the history is cleared and a
    plain sweep is taken. ``state`` (3,): sweeps done, history length, last
    residual. Returns the last residual (largest message change of a plain sweep).
    """
    E = c2v.shape[0]
    slots = mem + 1
    it = 0
    hist = int(state[1])
    best = state[2]
    resid = state[2]
    while it < max_iter:
        pos = int(state[0]) % slots
        for e in range(E):
            R[pos, e] = c2v[e]
        resid = _layered_sweep(llr, check_ptr, edge_var, rho, c2v, L, vbuf, tbuf)
        it += 1
        state[0] += 1
        for e in range(E):
            g = c2v[e]
            G[pos, e] = g
            R[pos, e] = g - R[pos, e]
        if mem > 0:
            # the new slot's row of the Gram matrix (the other rows are kept), also
            # when stopping: a later call continues with this slot in its history
            for a in range(min(hist + 1, slots)):
                pa = (pos - a) % slots
                acc = 0.0
                for e in range(E):
                    acc += R[pos, e] * R[pa, e]
                M[pos, pa] = acc
                M[pa, pos] = acc
        if resid <= tol:
            break
        if resid > 2.0 * best:
            hist = 0            # diverging extrapolation: restart from the plain sweep
            best = resid
        best = min(best, resid)
        hist = min(hist + 1, slots)
        if mem == 0 or hist < 2:
            continue
        # minimise |sum gamma_j f_j| subject to sum gamma_j = 1 via the (hist x hist)
        # Gram matrix, in recency order
        k = hist
        for a in range(k):
            pa = (pos - a) % slots
            for b in range(k):
                Mt[a, b] = M[pa, (pos - b) % slots]
        tot = _anderson_solve(Mt, rhs, gam, k)
        if tot == 0.0:
            hist = 1
            continue
        # x <- sum_a gamma_a G(x_a) / sum_a gamma_a, one contiguous pass per slot (slot
        # indices outside the edge loop: an integer modulo per edge and slot cost more
        # than the arithmetic)
        g0 = gam[0] / tot
        for e in range(E):
            c2v[e] = g0 * G[pos, e]
        for a in range(1, k):
            pa = (pos - a) % slots
            ga = gam[a] / tot
            for e in range(E):
                c2v[e] += ga * G[pa, e]
        _refresh_posteriors(llr, check_ptr, edge_var, rho, c2v, L)
    state[1] = hist
    state[2] = best
    return resid


@nb.njit(parallel=True, **NUMBA_OPTS)
def _refresh_batch(llr, check_ptr, edge_var, rho, active, c2v, L):
    for f in nb.prange(llr.shape[0]):
        if active[f]:
            _refresh_posteriors(llr[f], check_ptr, edge_var, rho, c2v[f], L[f])


@nb.njit(parallel=True, **NUMBA_OPTS)
def _anderson_batch(llr, check_ptr, edge_var, rho, max_iter, tol, mem, active, c2v, L, R, G,
                    M, state, resid, dmax):
    """:func:`_anderson_frame` on every active frame (prange; each frame owns its buffers)."""
    F = llr.shape[0]
    for f in nb.prange(F):
        if not active[f]:
            continue
        Mt = np.empty((mem + 1, mem + 1), dtype=np.float64)
        rhs = np.empty(mem + 1, dtype=np.float64)
        gam = np.empty(mem + 1, dtype=np.float64)
        vbuf = np.empty(2 * dmax + 2, dtype=np.float64)
        tbuf = np.empty(dmax + 1, dtype=np.float64)
        resid[f] = _anderson_frame(llr[f], check_ptr, edge_var, rho, max_iter, tol, mem, c2v[f],
                                   L[f], R[f], G[f], M[f], Mt, rhs, gam, vbuf, tbuf, state[f])


# ------------------------------------------------- lane kernels (frames across SIMD lanes)
@nb.njit(**NUMBA_OPTS)
def _trw_lane_sweep(check_ptr, edge_var, rho, c2v, L, X, md, vb, xb, fb, bb, st, sg):
    """One layered tree-reweighted sweep of a lane group, in place.

    Frame-innermost layout of :mod:`ldpcmarg.decoders.vectorised` (edge ``e`` of
    lane ``w`` at ``e * LANES + w``). The check messages are the lane sum-product
    update :func:`ldpcmarg.decoders.vectorised._sp_update` (complement form,
    polynomial exp/log, exact at every magnitude) at the cavities ``L - c2v``;
    the posteriors take ``rho_c`` times each message change. ``X`` holds the
    messages before the sweep; ``md`` (LANES,) receives each lane's largest
    message change. Indices are unsigned (``check_ptr``, ``edge_var`` uint64).
    """
    W = np.uint64(LANES)
    m = check_ptr.shape[0] - 1
    cap = L.dtype.type(LLR_MAX)
    for w in range(W):
        md[w] = 0
    for c in range(m):
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        r = rho[c]
        _sp_update(L, L, c2v, edge_var, a, d, cap, vb, xb, fb, bb, st, sg, 2)
        for k in range(d):
            e = a + k
            be = e * W
            bi = edge_var[e] * W
            for w in range(W):
                ch = c2v[be + w] - X[be + w]
                md[w] = max(md[w], abs(ch))
                L[bi + w] += r * ch


@nb.njit(**NUMBA_OPTS)
def _lane_refresh(chan, check_ptr, edge_var, rho, c2v, L):
    """L = chan + sum_c rho_c c2v in every lane (no running-sum drift)."""
    W = np.uint64(LANES)
    m = check_ptr.shape[0] - 1
    for j in range(L.shape[0]):
        L[j] = chan[j]
    for c in range(m):
        r = rho[c]
        for e in range(check_ptr[c], check_ptr[c + 1]):
            be = e * W
            bi = edge_var[e] * W
            for w in range(W):
                L[bi + w] += r * c2v[be + w]


@nb.njit(**NUMBA_OPTS)
def _lane_move(w, f, load, sh, history, llr, c2v, L, R, G, M, chan, cl, Ll, Rl, Gl, Ml):
    """Copy frame ``f`` into lane ``w`` (``load``) or lane ``w`` back to frame ``f``.

    Frame ring slot ``j`` is group slot ``(j + sh) % slots``: a lane's history
    keeps its recency order whatever the group's sweep counter. ``f < 0`` with
    ``load`` fills the lane with zeros (an idle lane: zero messages stay zero).
    """
    W = np.uint64(LANES)
    n = np.uint64(L.shape[1])
    E = np.uint64(c2v.shape[1])
    slots = R.shape[1]
    ww = np.uint64(w)
    if load:
        if f < 0:
            for i in range(n):
                chan[i * W + ww] = 0.0
                Ll[i * W + ww] = 0.0
            for s in range(slots):
                for e in range(E):
                    Rl[s, e * W + ww] = 0.0
                    Gl[s, e * W + ww] = 0.0
            for e in range(E):
                cl[e * W + ww] = 0.0
            return
        for i in range(n):
            chan[i * W + ww] = llr[f, i]
            Ll[i * W + ww] = L[f, i]
        for e in range(E):
            cl[e * W + ww] = c2v[f, e]
        if not history:
            return
        for j in range(slots):
            gj = (j + sh) % slots
            for e in range(E):
                Rl[gj, e * W + ww] = R[f, j, e]
                Gl[gj, e * W + ww] = G[f, j, e]
            for i in range(slots):
                Ml[(i + sh) % slots, gj, w] = M[f, i, j]
    else:
        for i in range(n):
            L[f, i] = Ll[i * W + ww]
        for e in range(E):
            c2v[f, e] = cl[e * W + ww]
        if not history:
            return
        for j in range(slots):
            gj = (j + sh) % slots
            for e in range(E):
                R[f, j, e] = Rl[gj, e * W + ww]
                G[f, j, e] = Gl[gj, e * W + ww]
            for i in range(slots):
                M[f, i, j] = Ml[(i + sh) % slots, gj, w]


@nb.njit(**NUMBA_OPTS)
def _anderson_group(frames, llr, check_ptr, edge_var, rho, max_iter, tol, mem, keep, c2v, L, R,
                    G, M, state, resid, dmax):
    """:func:`_anderson_frame` on the frames of one chunk, ``LANES`` at a time.

    The same iteration per frame (sweep, residual history, restart safeguard,
    Anderson extrapolation; ``max_iter`` sweeps or the tolerance per frame and
    call), with the sweep (:func:`_trw_lane_sweep`), the Gram rows and the
    extrapolation vectorised across lanes and the small solves per lane. A lane
    whose frame stops is written back at once and refilled with the next frame
    of ``frames``. Results equal the scalar kernel's to rounding (the check
    update uses the lane exp/log), not bit for bit.
    """
    W = np.uint64(LANES)
    n = np.uint64(llr.shape[1])
    E = np.uint64(c2v.shape[1])
    slots = mem + 1
    dt = rho.dtype          # float64, or float32 for a cheaper first approach
    chan = np.zeros(n * W, dtype=dt)
    Ll = np.zeros(n * W, dtype=dt)
    cl = np.zeros(E * W, dtype=dt)
    Rl = np.zeros((slots, E * W), dtype=dt)
    Gl = np.zeros((slots, E * W), dtype=dt)
    Ml = np.zeros((slots, slots, LANES))
    gl = np.zeros((slots, LANES), dtype=dt)
    vb, xb, fb, bb, st, sg = _sp_scratch(dmax, chan)
    md = np.zeros(W, dtype=dt)
    acc = np.zeros(W)
    Mt = np.empty((slots, slots))
    rhs = np.empty(slots)
    gam = np.empty(slots)
    lane_frame = np.full(LANES, -1, dtype=np.int64)
    lane_it = np.zeros(LANES, dtype=np.int64)
    lane_sh = np.zeros(LANES, dtype=np.int64)
    hist = np.zeros(LANES, dtype=np.int64)
    best = np.zeros(LANES)
    retire = np.zeros(LANES, dtype=np.bool_)
    T = 0               # sweeps of the group
    nxt = 0
    live = 0
    for w in range(LANES):
        f = frames[nxt] if nxt < frames.shape[0] else -1
        if f >= 0:
            nxt += 1
            live += 1
            lane_sh[w] = (T - int(state[f, 0])) % slots
            hist[w] = int(state[f, 1])
            best[w] = state[f, 2]
        lane_frame[w] = f
        _lane_move(w, f, True, lane_sh[w], hist[w] > 0, llr, c2v, L, R, G, M, chan, cl, Ll, Rl, Gl, Ml)
    while live > 0:
        pos = T % slots
        Rp = Rl[pos]
        Gp = Gl[pos]
        for j in range(E * W):
            Rp[j] = cl[j]
        _trw_lane_sweep(check_ptr, edge_var, rho, cl, Ll, Rp, md, vb, xb, fb, bb, st, sg)
        T += 1
        for j in range(E * W):
            g = cl[j]
            Gp[j] = g
            Rp[j] = g - Rp[j]
        if mem > 0:
            # the new slot's Gram row against every slot, all lanes at once (entries
            # of slots outside a lane's history are never read before being redone)
            for a in range(slots):
                pa = (pos - a) % slots
                Ra = Rl[pa]
                for w in range(W):
                    acc[w] = 0.0
                for e in range(E):
                    b = e * W
                    for w in range(W):
                        acc[w] += Rp[b + w] * Ra[b + w]
                for w in range(LANES):
                    Ml[pos, pa, w] = acc[w]
                    Ml[pa, pos, w] = acc[w]
        extrapolate = False
        for w in range(LANES):
            gl[0, w] = 1.0
            for a in range(1, slots):
                gl[a, w] = 0.0
            retire[w] = False
            f = lane_frame[w]
            if f < 0:
                continue
            lane_it[w] += 1
            r = md[w]
            resid[f] = r
            if r <= tol:
                retire[w] = True
                continue
            if r > 2.0 * best[w]:
                hist[w] = 0
                best[w] = r
            best[w] = min(best[w], r)
            hist[w] = min(hist[w] + 1, slots)
            k = hist[w]
            if lane_it[w] >= max_iter:
                retire[w] = True        # after this sweep's extrapolation, as the scalar loop
            if mem == 0 or k < 2:
                continue
            for a in range(k):
                pa = (pos - a) % slots
                for b in range(k):
                    Mt[a, b] = Ml[pa, (pos - b) % slots, w]
            tot = _anderson_solve(Mt, rhs, gam, k)
            if tot == 0.0:
                hist[w] = 1
                continue
            for a in range(k):
                gl[a, w] = gam[a] / tot
            extrapolate = True
        if extrapolate:
            # lanes without extrapolation have gamma = (1, 0, ...): G(x) = c2v exactly
            for e in range(E):
                b = e * W
                for w in range(W):
                    cl[b + w] = gl[0, w] * Gp[b + w]
            for a in range(1, slots):
                Ga = Gl[(pos - a) % slots]
                for e in range(E):
                    b = e * W
                    for w in range(W):
                        cl[b + w] += gl[a, w] * Ga[b + w]
            _lane_refresh(chan, check_ptr, edge_var, rho, cl, Ll)
        for w in range(LANES):
            if not retire[w]:
                continue
            f = lane_frame[w]
            _lane_move(w, f, False, lane_sh[w], keep, llr, c2v, L, R, G, M, chan, cl, Ll, Rl, Gl, Ml)
            state[f, 0] += lane_it[w]
            state[f, 1] = hist[w] if keep else 0
            state[f, 2] = best[w]
            nf = frames[nxt] if nxt < frames.shape[0] else -1
            if nf >= 0:
                nxt += 1
                lane_sh[w] = (T - int(state[nf, 0])) % slots
                hist[w] = int(state[nf, 1])
                best[w] = state[nf, 2]
            else:
                live -= 1
            lane_frame[w] = nf
            lane_it[w] = 0
            _lane_move(w, nf, True, lane_sh[w], hist[w] > 0, llr, c2v, L, R, G, M, chan, cl, Ll, Rl, Gl, Ml)


@nb.njit(parallel=True, **NUMBA_OPTS)
def _anderson_lanes_batch(llr, check_ptr, edge_var, rho, max_iter, tol, mem, keep, active,
                          nchunks, c2v, L, R, G, M, state, resid, dmax):
    """:func:`_anderson_group` on the active frames: frame j of the active list goes to
    chunk j mod nchunks; chunks in parallel, each one lane group."""
    idx = np.nonzero(active)[0]
    for ch in nb.prange(nchunks):
        frames = idx[ch::nchunks]
        _anderson_group(frames, llr, check_ptr, edge_var, rho, max_iter, tol, mem, keep, c2v, L,
                        R, G, M, state, resid, np.uint64(dmax))


@nb.njit(**NUMBA_OPTS)
def _prob_one(llr):
    """P(x = 1) = 1 / (1 + exp(llr)), without overflow."""
    if llr >= 0.0:
        e = math.exp(-llr)
        return e / (1.0 + e)
    return 1.0 / (1.0 + math.exp(llr))


@nb.njit(**NUMBA_OPTS)
def _xlogx(t):
    if t <= 0.0:
        return 0.0
    return t * math.log(t)


@nb.njit(**NUMBA_OPTS)
def _safe_log(t):
    return math.log(t if t > _TINY else _TINY)


@nb.njit(**NUMBA_OPTS)
def _solve_scaled(C, rhs, d, x, piv):
    """Solve the d x d symmetric system C x = rhs (diagonally scaled, partial pivoting).

    Rows/columns with a zero diagonal (a bit without variance) get x = 0.
    Overwrites C and rhs. Returns False when the system is numerically singular.
    """
    for t in range(d):
        piv[t] = 1.0 / math.sqrt(C[t, t]) if C[t, t] > 0.0 else 0.0
    for t in range(d):
        for u in range(d):
            C[t, u] *= piv[t] * piv[u]
        rhs[t] *= piv[t]
        if piv[t] == 0.0:
            C[t, t] = 1.0
            rhs[t] = 0.0
    if not _gauss_solve(C, rhs, d, x, 1e-14):
        return False
    for t in range(d):
        x[t] *= piv[t]
    return True


@nb.njit(**NUMBA_OPTS)
def _solve_spd(C, rhs, d, x, piv):
    """Solve the d x d covariance system C x = rhs by Cholesky after diagonal scaling.

    The cheaper twin of :func:`_solve_scaled` for a covariance of a positive
    distribution (symmetric positive definite). Rows/columns with a zero
    diagonal get x = 0. Overwrites C (its lower triangle) and rhs. Returns False
    when a pivot falls below 1e-14 (numerically singular after scaling).
    """
    for t in range(d):
        piv[t] = 1.0 / math.sqrt(C[t, t]) if C[t, t] > 0.0 else 0.0
    for t in range(d):
        for u in range(t + 1):
            C[t, u] *= piv[t] * piv[u]
        rhs[t] *= piv[t]
        if piv[t] == 0.0:
            for u in range(t):
                C[t, u] = 0.0
            C[t, t] = 1.0
            rhs[t] = 0.0
    for k in range(d):
        acc = C[k, k]
        for u in range(k):
            acc -= C[k, u] * C[k, u]
        if acc < 1e-14:
            return False
        dk = math.sqrt(acc)
        C[k, k] = dk
        for t in range(k + 1, d):
            if piv[t] == 0.0:
                C[t, k] = 0.0
                continue
            acc = C[t, k]
            for u in range(k):
                acc -= C[t, u] * C[k, u]
            C[t, k] = acc / dk
    for t in range(d):          # forward: L y = rhs
        acc = rhs[t]
        for u in range(t):
            acc -= C[t, u] * x[u]
        x[t] = acc / C[t, t]
    for tt in range(d):         # back: L^T x = y
        t = d - 1 - tt
        acc = x[t]
        for u in range(t + 1, d):
            acc -= C[u, t] * x[u]
        x[t] = acc / C[t, t]
    for t in range(d):
        x[t] *= piv[t]
    return True


@nb.njit(**NUMBA_OPTS)
def _check_marginals(tl, bits, o, K, bp, d, out):
    for t in range(d):
        out[t] = 0.0
    for j in range(K):
        x = tl[o + j]
        base = bp + j * d
        for t in range(d):
            # branch-free: the patterns' bits are irregular, a branch mispredicts often
            out[t] += x * bits[base + t]


@nb.njit(**NUMBA_OPTS)
def _product_belief(w, bits, o, K, bp, d, tl):
    """tl[o:o+K] = exp(-sum_t S_t w_t) / Z over the patterns S; returns ln Z.

    ``-ln Z`` is the exact minimum of ``sum_S tau(S) [ln tau(S) + sum_t S_t w_t]``
    over the simplex (the check term of the entropic dual).
    """
    best = -np.inf
    for j in range(K):
        s = 0.0
        base = bp + j * d
        for t in range(d):
            s -= w[t] * bits[base + t]
        tl[o + j] = s
        if s > best:
            best = s
    tot = 0.0
    for j in range(K):
        x = math.exp(tl[o + j] - best)
        tl[o + j] = x
        tot += x
    for j in range(K):
        tl[o + j] /= tot
    return best + math.log(tot)


@nb.njit(**NUMBA_OPTS)
def _split_lnz(w, bits, o, K, bp, d, kk):
    """(ln Z_0, ln Z_1): ln sum of exp(-sum_t S_t w_t) over the patterns with S_kk = 0 / 1."""
    best0 = -np.inf
    best1 = -np.inf
    for j in range(K):
        s = 0.0
        base = bp + j * d
        for t in range(d):
            if bits[base + t]:
                s -= w[t]
        if bits[base + kk]:
            best1 = max(best1, s)
        else:
            best0 = max(best0, s)
    t0 = 0.0
    t1 = 0.0
    for j in range(K):
        s = 0.0
        base = bp + j * d
        for t in range(d):
            if bits[base + t]:
                s -= w[t]
        if bits[base + kk]:
            t1 += math.exp(s - best1)
        else:
            t0 += math.exp(s - best0)
    return best0 + math.log(t0), best1 + math.log(t1)


@nb.njit(**NUMBA_OPTS)
def _covariance(tl, bits, o, K, bp, d, mt, C):
    for t in range(d):
        for u in range(d):
            C[t, u] = 0.0
    for j in range(K):
        x = tl[o + j]
        base = bp + j * d
        for t in range(d):
            xt = x * bits[base + t]
            for u in range(t, d):
                C[t, u] += xt * bits[base + u]
    for t in range(d):
        for u in range(t, d):
            C[t, u] -= mt[t] * mt[u]
            C[u, t] = C[t, u]


@nb.njit(**NUMBA_OPTS)
def _bit_dual(b, k):
    """min over t in [0, 1] of b t + k (t ln t + (1 - t) ln(1 - t)) (nats)."""
    if k > 0.0:
        x = -b / k
        return -k * (max(x, 0.0) + math.log1p(math.exp(-abs(x))))
    return min(0.0, b)


@nb.njit(**NUMBA_OPTS)
def _check_dual(w, bits, o, K, bp, d, kk, al, r, L_kk):
    """Dual term of one check at cavities ``w`` (length d, restored on return).

    ``-r ln Z(w)`` for a check without allocation (``kk < 0``); with bit ``kk``
    borrowing ``al`` of its entropy, the closed-form minimum of the allocated piece
    with the multiplier of bit ``kk`` shifted by ``-al L_kk`` (see
    :func:`_project_frame`).
    """
    if kk < 0:
        best = -np.inf
        for j in range(K):
            s = 0.0
            base = bp + j * d
            for t in range(d):
                if bits[base + t]:
                    s -= w[t]
            if s > best:
                best = s
        tot = 0.0
        for j in range(K):
            s = 0.0
            base = bp + j * d
            for t in range(d):
                if bits[base + t]:
                    s -= w[t]
            tot += math.exp(s - best)
        return -r * (best + math.log(tot))
    wk = w[kk]
    w[kk] = wk - al * L_kk / r
    lz0, lz1 = _split_lnz(w, bits, o, K, bp, d, kk)
    w[kk] = wk
    x0 = r * lz0 / (r - al)
    x1 = r * lz1 / (r - al)
    big = max(x0, x1)
    return -(r - al) * (big + math.log(math.exp(x0 - big) + math.exp(x1 - big)))


@nb.njit(**NUMBA_OPTS)
def _mix_uniform(theta, tb, tl, offset):
    """Mix the point with the uniform point by ``min(1, 2 theta)`` (returned).

    ``theta`` is the least weight that makes every entry >= 0; twice it keeps
    every entry away from exactly 0. Entries are clipped at 0 against rounding.
    """
    theta = min(1.0, 2.0 * theta)
    for i in range(tb.shape[0]):
        tb[i] = (1.0 - theta) * tb[i] + 0.5 * theta
    for c in range(offset.shape[0] - 1):
        o = offset[c]
        K = offset[c + 1] - o
        for j in range(o, o + K):
            x = (1.0 - theta) * tl[j] + theta / K
            tl[j] = x if x > 0.0 else 0.0
    return theta


@nb.njit(**NUMBA_OPTS)
def _checks_negentropy(tl, offset, rho):
    """sum_c rho_c sum_S tau_c(S) ln tau_c(S) over the local-codeword entries ``tl``."""
    f = 0.0
    for c in range(offset.shape[0] - 1):
        a = 0.0
        for j in range(offset[c], offset[c + 1]):
            a += _xlogx(tl[j])
        f += rho[c] * a
    return f


@nb.njit(**NUMBA_OPTS)
def _additive_correction(tl, bits, o, K, bp, d, q, mt):
    """Add ``sum_t (q_t - m_t) (2 S_t - 1) / 2**(d-2)`` to a check belief (``mt`` its marginals).

    The marginals become ``q`` exactly and the total stays 1 (over the even
    patterns, ``sum_S S_u (2 S_t - 1) = 2**(d-2)`` for ``u = t`` and 0 otherwise), but
    entries may turn negative: returns the least weight ``theta`` of the uniform
    point that keeps every entry of this check >= 0 (0 if none is negative).
    """
    scale = 1.0 / 2.0 ** (d - 2)
    theta = 0.0
    for j in range(K):
        corr = 0.0
        base = bp + j * d
        for t in range(d):
            dl = q[t] - mt[t]
            corr += dl if bits[base + t] else -dl
        x = tl[o + j] + corr * scale
        tl[o + j] = x
        if x < 0.0:
            u = 1.0 / K
            theta = max(theta, -x / (u - x))
    return theta


@nb.njit(**NUMBA_OPTS)
def _newton_match(w, q, bits, o, K, bp, d, newton_max, tl, mt, cvec, rhs, C, piv, res):
    """Positive check belief ``tl[o:o+K]`` with bit marginals ``q``, by damped Newton on ``w``.

    Starts from the cavities ``w`` (overwritten with the final ones). ``res`` (4,)
    receives (1.0 if matched else 0.0, the belief's negentropy ``sum tau ln tau``,
    Newton steps, ``ln Z(w)`` at the final ``w``). On failure ``tl`` holds the
    belief at the last ``w``.
    """
    steps = 0
    # Newton on the cavity LLRs w: the marginals of exp(-sum S_t w_t) have
    # Jacobian -Cov, so w <- w - Cov^-1 (q - m) (the belief stays positive)
    ok = False
    lnz = 0.0
    small = False
    for _ in range(newton_max):
        lnz = _product_belief(w, bits, o, K, bp, d, tl)
        _check_marginals(tl, bits, o, K, bp, d, mt)
        big = 0.0
        for t in range(d):
            rhs[t] = q[t] - mt[t]
            big = max(big, abs(rhs[t]))
        if big <= 1e-17:
            ok = True
            small = False
            break
        _covariance(tl, bits, o, K, bp, d, mt, C)
        if not _solve_scaled(C, rhs, d, cvec, piv):
            break
        steps += 1
        cmax = 0.0
        for t in range(d):
            cmax = max(cmax, abs(cvec[t]))
        if cmax <= 1e-7:
            ok = True
            small = True
            break
        # damped Newton: halve the step until Phi(w) = ln Z(w) + <q, w> (convex,
        # gradient q - m, Hessian Cov) decreases; near-deterministic checks make Cov
        # ill-conditioned and full steps overshoot
        phi0 = lnz
        for t in range(d):
            phi0 += q[t] * w[t]
            rhs[t] = w[t]
        alpha = 1.0
        accepted = False
        for _h in range(12):
            for t in range(d):
                w[t] = rhs[t] - alpha * cvec[t]
            phi = _product_belief(w, bits, o, K, bp, d, tl)
            for t in range(d):
                phi += q[t] * w[t]
            if phi <= phi0:
                accepted = True
                break
            alpha *= 0.5
        if not accepted:
            for t in range(d):
                w[t] = rhs[t]
            break
    # check negentropy sum_S tau ln tau of the final belief, via ln tau = -S.w - ln Z
    negent = 0.0
    if ok and small:
        # last step is linear: tau(S) <- tau(S) (1 + sum_t c_t (S_t - m_t)) matches the
        # marginals exactly (linear in tau) and moves every entry by < 1e-6 of itself
        for j in range(K):
            base = bp + j * d
            fac = 1.0
            sw = 0.0
            for t in range(d):
                if bits[base + t]:
                    fac += cvec[t] * (1.0 - mt[t])
                    sw += w[t]
                else:
                    fac -= cvec[t] * mt[t]
            x = tl[o + j] * fac
            tl[o + j] = x
            if x > 0.0:
                negent += x * (-sw - lnz + math.log1p(fac - 1.0))
    elif ok:
        for j in range(K):
            base = bp + j * d
            sw = 0.0
            for t in range(d):
                if bits[base + t]:
                    sw += w[t]
            x = tl[o + j]
            if x > 0.0:
                negent += x * (-sw - lnz)
    res[0] = 1.0 if ok else 0.0
    res[1] = negent
    res[2] = steps
    res[3] = lnz


@nb.njit(**NUMBA_OPTS)
def _project_frame(llr, L, c2v, check_ptr, edge_var, var_ptr, var_edges, offset, bit_ptr, bits,
                   rho, kappa, alloc_k, alloc_alpha, bit_alpha, newton_max, tb, tl, mu, mu0, w, w0,
                   q, mt, cvec, rhs, C, piv, out):
    """Exact point of L from posteriors ``L`` (n,) and messages ``c2v`` (E,), and its certificate.

    Writes ``tb`` (n,), ``tl`` (K,), ``mu`` (E,) = rho_c w_c. ``out`` (5,)
    receives (F(tau), G(mu) the entropic dual bound, theta = weight of the
    uniform point, largest remaining marginal mismatch, Newton steps).
    Scratch: w, q, mt, cvec, rhs, piv (dmax + 1,), C (dmax + 1, dmax + 1), mu0 (E,).

    The dual bound is evaluated at two multiplier sets and the larger is kept
    (each is a valid lower bound on F*, weak duality): the Newton cavities ``w``
    (which make the check pieces' Fenchel gaps vanish) and the message cavities
    ``w0 = L - c2v`` (which make the bit pieces' gaps vanish: ``b_i = kappa_i L_i``).
    Near a fixed point the second is usually far better: where a check is nearly
    deterministic its covariance is nearly singular, Newton moves ``w`` by
    ``Cov^-1 (q - m)`` (large for a small mismatch) and the bits pay for it at first
    order, while the check pieces pay for ``w0`` only a Kullback–Leibler
    divergence, second order in the mismatch.
    """
    n = L.shape[0]
    m = check_ptr.shape[0] - 1
    for i in range(n):
        tb[i] = _prob_one(L[i])
    theta = 0.0
    worst_mismatch = 0.0
    steps = 0
    nres = np.empty(4, dtype=np.float64)
    f_checks = 0.0
    g_checks = 0.0
    g_checks0 = 0.0
    for c in range(m):
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        o = offset[c]
        K = offset[c + 1] - o
        bp = bit_ptr[c]
        for k in range(d):
            w[k] = L[edge_var[a + k]] - c2v[a + k]
            q[k] = tb[edge_var[a + k]]
            w0[k] = w[k]
        _newton_match(w, q, bits, o, K, bp, d, newton_max, tl, mt, cvec, rhs, C, piv, nres)
        ok = nres[0] > 0.0
        negent = nres[1]
        steps += int(nres[2])
        lnz = nres[3]
        if ok:
            pass
        else:
            # Newton failed: the bit targets lie (nearly) outside this check's parity
            # polytope (unconverged posteriors). Keep the message cavities for the
            # multipliers (near the dual optimum; Newton drifts off to infinity here),
            # remove the mismatch exactly by the additive correction, then the
            # uniform mix below
            for k in range(d):
                w[k] = w0[k]
            lnz = _product_belief(w, bits, o, K, bp, d, tl)
            _check_marginals(tl, bits, o, K, bp, d, mt)
            theta = max(theta, _additive_correction(tl, bits, o, K, bp, d, q, mt))
            negent = np.nan  # recomputed below from the entries
        _check_marginals(tl, bits, o, K, bp, d, mt)
        for t in range(d):
            worst_mismatch = max(worst_mismatch, abs(q[t] - mt[t]))
        f_checks += rho[c] * negent if not math.isnan(negent) else 0.0
        if math.isnan(negent):
            f_checks = np.nan
        # dual check term: min over the simplex of rho (negentropy + <tau, S.w>) = -rho ln Z
        kk = alloc_k[c]
        g_checks0 += _check_dual(w0, bits, o, K, bp, d, kk, alloc_alpha[c], rho[c],
                                 L[edge_var[a + kk]] if kk >= 0 else 0.0)
        for k in range(d):
            mu0[a + k] = rho[c] * w0[k]
        if kk < 0:
            g_checks -= rho[c] * lnz
        else:
            # allocated piece rho negent(tau_c) - alpha h(tau_c's marginal of bit i), with
            # multiplier mu_ic - alpha L_i (the dual optimum moves by alpha h'(t_i) = -alpha L_i):
            # min over tau_c = min over p of p A_1 + (1 - p) A_0 + (rho - alpha) h(p),
            # A_b = -rho ln Z_b, i.e. -(rho - alpha) ln sum_b exp(-A_b / (rho - alpha))
            al = alloc_alpha[c]
            r = rho[c]
            wk = w[kk]
            w[kk] = wk - al * L[edge_var[a + kk]] / r
            lz0, lz1 = _split_lnz(w, bits, o, K, bp, d, kk)
            w[kk] = wk
            x0 = r * lz0 / (r - al)
            x1 = r * lz1 / (r - al)
            big = max(x0, x1)
            g_checks -= (r - al) * (big + math.log(math.exp(x0 - big) + math.exp(x1 - big)))
        for k in range(d):
            mu[a + k] = rho[c] * w[k]
    if theta > 0.0:
        theta = _mix_uniform(theta, tb, tl, offset)
    if math.isnan(f_checks) or theta > 0.0:
        f_checks = _checks_negentropy(tl, offset, rho)
    # bits: F term lam t + kappa (t ln t + (1-t) ln(1-t)); dual term
    # min over [0, 1] of b t + kappa (...), b = lam - sum_c mu_ic:
    # -kappa softplus(-b / kappa) for kappa > 0, min(0, b) for kappa <= 0 (endpoints)
    f_bits = 0.0
    g_bits = 0.0
    g_bits0 = 0.0
    for i in range(n):
        t = tb[i]
        k = kappa[i]
        f_bits += llr[i] * t + k * (_xlogx(t) + _xlogx(1.0 - t))
        b = llr[i]
        b0 = llr[i]
        for p in range(var_ptr[i], var_ptr[i + 1]):
            b -= mu[var_edges[p]]
            b0 -= mu0[var_edges[p]]
        if bit_alpha[i] > 0.0:
            # the bit piece keeps kappa + alpha of the entropy (Heskes allocation), and
            # its check's multiplier moved by -alpha L_i
            k += bit_alpha[i]
            b += bit_alpha[i] * L[i]
            b0 += bit_alpha[i] * L[i]
        g_bits += _bit_dual(b, k)
        g_bits0 += _bit_dual(b0, k)
    out[0] = f_bits + f_checks
    g_newton = g_bits + g_checks
    g_message = g_bits0 + g_checks0
    if g_message > g_newton:
        # report the multipliers of the better bound
        for e in range(mu.shape[0]):
            mu[e] = mu0[e]
        g_newton = g_message
    out[1] = g_newton
    out[2] = theta
    out[3] = worst_mismatch
    out[4] = steps


@nb.njit(**NUMBA_OPTS)
def _certify_frame(lam, tb, tl, kappa, rho_loc, check_ptr, edge_check, var_ptr, var_edges,
                   offset, bit_ptr, bits, masks, mu, sweeps, gb, gl, theta_s, r, argmin, order,
                   delta, out):
    """F(tau), <grad F, tau> and the best D(mu) over up to ``sweeps`` hard star sweeps.

    ``out`` (4,) receives (F, gtau, bound, sweeps done). Stops sweeping once the
    bound stops rising.
    """
    n = tb.shape[0]
    K = tl.shape[0]
    f = 0.0
    gtau = 0.0
    for i in range(n):
        t = tb[i]
        f += lam[i] * t + kappa[i] * (_xlogx(t) + _xlogx(1.0 - t))
        g = lam[i] + kappa[i] * (_safe_log(t) - _safe_log(1.0 - t))
        gb[i] = g
        gtau += g * t
    for j in range(K):
        t = tl[j]
        f += rho_loc[j] * _xlogx(t)
        g = rho_loc[j] * _safe_log(t)
        gl[j] = g
        gtau += g * t
    _theta_kernel(check_ptr, offset, bit_ptr, bits, gl, mu, theta_s)
    _reduced_bits_kernel(var_ptr, var_edges, gb, mu, r)
    bound = _bound_kernel(offset, theta_s, r, argmin)
    done = 0
    if sweeps > 0:
        best_mu = mu.copy()
        best = bound
        for _ in range(sweeps):
            _star_sweep_kernel(check_ptr, edge_check, var_ptr, var_edges, offset, masks, gb, mu,
                               theta_s, r, order, 0.0, delta)
            done += 1
            b = _bound_kernel(offset, theta_s, r, argmin)
            if b > best + 1e-12 * (1.0 + abs(best)):
                best = b
                best_mu[:] = mu
            else:
                break
        mu[:] = best_mu
        # exact re-evaluation at the kept multipliers (theta drifts by rounding)
        _theta_kernel(check_ptr, offset, bit_ptr, bits, gl, mu, theta_s)
        _reduced_bits_kernel(var_ptr, var_edges, gb, mu, r)
        bound = _bound_kernel(offset, theta_s, r, argmin)
    out[0] = f
    out[1] = gtau
    out[2] = bound
    out[3] = done


@nb.njit(parallel=True, **NUMBA_OPTS)
def _project_certify_batch(llr, L, c2v, check_ptr, edge_var, edge_check, var_ptr, var_edges,
                           offset, bit_ptr, bits, masks, rho, rho_loc, kappa, alloc_k, alloc_alpha,
                           bit_alpha, newton_max, linear, sweeps, active, tb, tl, mu, out, dmax,
                           dvmax):
    """Projection and certificates of every active frame (prange over frames).

    ``out`` (F, 8): F(tau), entropic dual bound G(mu), theta, mismatch, Newton
    steps, and with ``linear``: <grad F, tau>, the linear Lagrangian bound D,
    star sweeps (else NaN, NaN, 0).
    """
    F, n = llr.shape
    K = tl.shape[1]
    m = check_ptr.shape[0] - 1
    for f in nb.prange(F):
        if not active[f]:
            continue
        w = np.empty(dmax + 1, dtype=np.float64)
        w0 = np.empty(dmax + 1, dtype=np.float64)
        mu0 = np.empty(mu.shape[1], dtype=np.float64)
        q = np.empty(dmax + 1, dtype=np.float64)
        mt = np.empty(dmax + 1, dtype=np.float64)
        cvec = np.empty(dmax + 1, dtype=np.float64)
        rhs = np.empty(dmax + 1, dtype=np.float64)
        piv = np.empty(dmax + 1, dtype=np.float64)
        C = np.empty((dmax + 1, dmax + 1), dtype=np.float64)
        o5 = np.empty(5, dtype=np.float64)
        _project_frame(llr[f], L[f], c2v[f], check_ptr, edge_var, var_ptr, var_edges, offset,
                       bit_ptr, bits, rho, kappa, alloc_k, alloc_alpha, bit_alpha, newton_max,
                       tb[f], tl[f], mu[f], mu0, w, w0, q, mt, cvec, rhs, C, piv, o5)
        for k in range(5):
            out[f, k] = o5[k]
        out[f, 5] = np.nan
        out[f, 6] = np.nan
        out[f, 7] = 0.0
        if linear:
            gb = np.empty(n, dtype=np.float64)
            gl = np.empty(K, dtype=np.float64)
            th = np.empty(K, dtype=np.float64)
            r = np.empty(n, dtype=np.float64)
            am = np.empty(m, dtype=np.int64)
            order = np.arange(n)
            delta = np.empty(dvmax + 1, dtype=np.float64)
            o4 = np.empty(4, dtype=np.float64)
            mu_lin = mu[f].copy()
            _certify_frame(llr[f], tb[f], tl[f], kappa, rho_loc, check_ptr, edge_check, var_ptr,
                           var_edges, offset, bit_ptr, bits, masks, mu_lin, sweeps, gb, gl, th,
                           r, am, order, delta, o4)
            out[f, 5] = o4[1]
            out[f, 6] = o4[2]
            out[f, 7] = o4[3]


@nb.njit(**NUMBA_OPTS)
def _face_value(tb, edge_var, a, d, vm, pick, sl):
    """Target of position ``pick`` that puts a check on its face at slack ``sl``.

    The face of the odd pattern ``vm`` (bit mask over the check's positions):
    ``sum_{t in V} x_t - sum_{t not in V} x_t = |V| - 1 - sl``, the other targets fixed.
    """
    size = 0
    acc = 0.0
    for k in range(d):
        inside = ((vm >> k) & 1) != 0
        if inside:
            size += 1
        if k == pick:
            continue
        x = tb[edge_var[a + k]]
        acc += x if inside else -x
    target = size - 1 - sl - acc
    if ((vm >> pick) & 1) == 0:
        target = -target
    return target


@nb.njit(**NUMBA_OPTS)
def _qadd(q, r):
    """1 - (1 - q)(1 - r) as a sum of non-negative terms (full relative precision)."""
    if q >= 1.0 or r >= 1.0:
        return 1.0
    return min(q + r - q * r, 1.0)


@nb.njit(**NUMBA_OPTS)
def _parity_even(qc, s):
    """P(even parity) of independent bits from ``qc = 1 - prod |g|`` and ``s = sign(prod g)``."""
    return 1.0 - 0.5 * qc if s > 0 else 0.5 * qc


@nb.njit(**NUMBA_OPTS)
def _edge_terms(w, d, pi, lp0, lp1, rr, sg):
    """Per-bit terms of the product measure at cavities ``w``: ``pi = 1 / (1 + exp(w))``,
    ``lp0 = ln(1 - pi)``, ``lp1 = ln pi``, ``rr = 1 - |tanh(w / 2)|``, ``sg = sign(w)``."""
    for t in range(d):
        wt = w[t]
        e = math.exp(-abs(wt))
        sp = math.log1p(e)
        lp1[t] = -(max(wt, 0.0) + sp)
        lp0[t] = -(max(-wt, 0.0) + sp)
        inv = 1.0 / (1.0 + e)
        pi[t] = e * inv if wt >= 0.0 else inv
        rr[t] = 2.0 * e * inv
        sg[t] = 1.0 if wt >= 0.0 else -1.0


@nb.njit(**NUMBA_OPTS)
def _closed_check(d, pi, lp0, lp1, rr, sg, qx, qxx, m, C, want_cov):
    """Marginals (and covariance) of the check belief ``b(S) ∝ exp(-S.w)`` in closed form.

    ``b`` is the product measure with ``P(S_t = 1) = pi_t = 1 / (1 + exp(w_t))``
    conditioned on even parity, so with ``g_t = 1 - 2 pi_t = tanh(w_t / 2)``:
    ``P(even) = (1 + prod g) / 2``, ``m_t = pi_t (1 - prod_{v != t} g_v) / (2 P(even))``,
    ``P(S_t = S_u = 1) = pi_t pi_u (1 + prod_{v != t, u} g_v) / (2 P(even))``. The
    products are kept as complements ``1 - prod |g|`` accumulated from
    ``r = 1 - |g| = 2 / (1 + exp(|w|))`` (the form of the sum-product check update:
    no cancellation at any magnitude) and a sign, from prefix and suffix
    complements: O(d^2) arithmetic per check after the 2 d transcendental
    functions of :func:`_edge_terms`, against O(d 2^d) for the pattern loop.

    Reads the terms of :func:`_edge_terms`; writes ``m`` (d,) and, with
    ``want_cov``, ``C`` (d, d); ``qx`` (d + 1,), ``qxx`` (d + 1, d + 1) are
    scratch. Returns ``(ln Z(w), negentropy of b)``, ``Z(w) = sum_S exp(-S.w)``.
    """
    s_all = 1.0
    lnz = 0.0
    for t in range(d):
        s_all *= sg[t]
        lnz -= lp0[t]
    # qxx[i, j] (i <= j): complement over the positions i..j-1 (qxx[i, i] = 0)
    for i in range(d + 1):
        q = 0.0
        qxx[i, i] = 0.0
        for j in range(i, d):
            q = _qadd(q, rr[j])
            qxx[i, j + 1] = q
    q_all = qxx[0, d]
    z_even = _parity_even(q_all, s_all)
    lnz_even = math.log(z_even)
    negent = -lnz_even
    for t in range(d):
        # P(rest odd), from the complement directly (1 - P(even) would cancel)
        qt = _qadd(qxx[0, t], qxx[t + 1, d])
        qx[t] = qt
        if s_all * sg[t] > 0:
            p_odd = 0.5 * qt
        else:
            p_odd = 1.0 - 0.5 * qt
        m[t] = pi[t] * p_odd / z_even
        negent += m[t] * lp1[t] + (1.0 - m[t]) * lp0[t]
    if want_cov:
        for t in range(d):
            C[t, t] = m[t] * (1.0 - m[t])
            for u in range(t + 1, d):
                q = _qadd(_qadd(qxx[0, t], qxx[t + 1, u]), qxx[u + 1, d])
                p_tu = pi[t] * pi[u] * _parity_even(q, s_all * sg[t] * sg[u]) / z_even
                C[t, u] = p_tu - m[t] * m[u]
                C[u, t] = C[t, u]
    return lnz + lnz_even, negent


@nb.njit(**NUMBA_OPTS)
def _closed_check_dual(w, d, kk, al, r, L_kk, lp0, rr, sg):
    """:func:`_check_dual` of an allocated check (``kk >= 0``) in closed form.

    ``ln Z_b = ln sum_{S even, S_kk = b} exp(-S.w')`` (``w'`` = ``w`` with
    ``w'_kk = w_kk - al L_kk / r``) is ``sum_t softplus(-w'_t) + ln P(S_kk = b)
    + ln P(rest has parity b)`` under the product measure of
    :func:`_closed_check`. ``lp0``, ``rr``, ``sg``: the terms of
    :func:`_edge_terms` at ``w`` (only position ``kk`` moves).
    """
    s_rest = 1.0
    base = 0.0
    q = 0.0
    for t in range(d):
        if t != kk:
            base -= lp0[t]
            s_rest *= sg[t]
            q = _qadd(q, rr[t])
    wk = w[kk] - al * L_kk / r
    e = math.exp(-abs(wk))
    sp = math.log1p(e)
    lp1k = -(max(wk, 0.0) + sp)
    lp0k = -(max(-wk, 0.0) + sp)
    base -= lp0k
    p_even = _parity_even(q, s_rest)
    p_odd = 0.5 * q if s_rest > 0 else 1.0 - 0.5 * q
    lz0 = base + lp0k + math.log(p_even)
    lz1 = base + lp1k + math.log(p_odd)
    x0 = r * lz0 / (r - al)
    x1 = r * lz1 / (r - al)
    big = max(x0, x1)
    return -(r - al) * (big + math.log(math.exp(x0 - big) + math.exp(x1 - big)))


@nb.njit(**NUMBA_OPTS)
def _peeled_project_frame(llr, L, c2v, check_ptr, edge_var, var_ptr, var_edges, offset,
                          bit_ptr, bits, rho, kappa, alloc_k, alloc_alpha, bit_alpha,
                          tight_factor, newton_max, tb, tl, mu, w_e, m_e, c_e, made, slack,
                          vmask, tight, assigned, order, deg, is_assigned, out):
    """Point of L and entropic certificate from the message cavities, tight checks peeled.

    The check beliefs start as ``b_c(S) ∝ exp(-sum_{t in S} w_ct)`` at the message
    cavities ``w = L - c2v`` (the minimisers of the dual's check pieces, so the
    check pieces' Fenchel gaps are Kullback–Leibler divergences from them) and the
    bit targets as ``P(x_i = 1) = 1 / (1 + exp(L_i))`` (the bit pieces' minimisers).
    Near a tree-reweighted fixed point many checks are *tight*: their belief lies
    within ``slack`` of a face ``sum_{t in V} x_t - sum_{t not in V} x_t <= |V| - 1``
    of the check's parity polytope (``V`` its most likely odd pattern; the mass
    sits on the patterns next to ``V``), with a slack far below the bit targets'
    distance from the check's marginals, so no positive check belief matches the
    targets (measured: 1e-7 slack against 1e-5 to 1e-4 mismatch at a 1e-3
    message change, peg-1008-3-6 at 2.5 dB). Each tight check therefore becomes
    the linear equation "the targets keep the check's slack", solved by peeling
    (an equation takes a bit that no other remaining equation contains; the
    most uncertain such bit moves), in reverse peeling order; checks made tight
    by moved targets take a bit of their own in a few further rounds.

    Then every check is matched to its targets by one exact linear step
    ``tau(S) = b(S) (1 + u(S))``, ``u(S) = sum_t c_t (S_t - m_t)``, ``Cov c = q - m``
    (marginals ``m + Cov c = q`` exactly, total mass kept). Where
    ``sum_t |c_t| max(m_t, 1 - m_t) < 1`` every ``1 + u > 0`` and the check's
    negentropy has the closed-form upper bound
    ``sum b ln b - r.w + c.r`` (``r = q - m``; from ``ln b = -S.w + const`` and
    ``(1 + u) ln(1 + u) <= u + u^2``), so a certificate costs O(d^3) per check
    and no pattern loop; the point itself is written by :func:`_emit_frame`
    (``c_e``). Elsewhere the check is made at once (``made[c]``): the linear step
    on the pattern loop, damped Newton (:func:`_newton_match`), or the additive
    correction with the uniform mix of :func:`_project_frame` (then every check
    is made and F evaluated exactly).

    Every deviation from the dual's minimisers is of the order of the
    fixed-point residual, and the gap second order in it, where the uniform mix
    costs first order. ``out`` (5,): an upper bound on F(tau), G(mu), theta,
    0 (the mismatch is measured by :func:`_emit_frame`), checks made at once.
    Scratch/state: ``w_e``, ``m_e``, ``c_e`` (E,), ``made``, ``slack``, ``vmask``,
    ``tight``, ``assigned``, ``order`` (m,), ``deg``, ``is_assigned`` (n,).
    """
    n = L.shape[0]
    m = check_ptr.shape[0] - 1
    dmax = 0
    for c in range(m):
        dmax = max(dmax, check_ptr[c + 1] - check_ptr[c])
    kmax = 1
    for c in range(m):
        kmax = max(kmax, offset[c + 1] - offset[c])
    w = np.empty(dmax, dtype=np.float64)
    q = np.empty(dmax, dtype=np.float64)
    mt = np.empty(dmax, dtype=np.float64)
    cvec = np.empty(dmax, dtype=np.float64)
    rhs = np.empty(dmax, dtype=np.float64)
    piv = np.empty(dmax, dtype=np.float64)
    qx = np.empty(dmax + 1, dtype=np.float64)
    C = np.empty((dmax, dmax), dtype=np.float64)
    qxx = np.empty((dmax + 1, dmax + 1), dtype=np.float64)
    facs = np.empty(kmax, dtype=np.float64)
    nres = np.empty(4, dtype=np.float64)
    E = c2v.shape[0]
    pi_e = np.empty(E, dtype=np.float64)
    lp0_e = np.empty(E, dtype=np.float64)
    lp1_e = np.empty(E, dtype=np.float64)
    rr_e = np.empty(E, dtype=np.float64)
    sg_e = np.empty(E, dtype=np.float64)
    for i in range(n):
        tb[i] = _prob_one(L[i])
        deg[i] = 0
        is_assigned[i] = False
    # 1. check beliefs at the message cavities: marginals, dual term, most likely
    #    odd pattern V and the slack of its face (linear in the marginals)
    g_checks = 0.0
    for c in range(m):
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        vm = 0
        weakest = 0
        parity = 0
        for k in range(d):
            wk = L[edge_var[a + k]] - c2v[a + k]
            w_e[a + k] = wk
            w[k] = wk
            if wk < 0.0:
                vm |= 1 << k
                parity ^= 1
            if abs(wk) < abs(w[weakest]):
                weakest = k
        if parity == 0:
            vm ^= 1 << weakest
        vmask[c] = vm
        _edge_terms(w, d, pi_e[a:], lp0_e[a:], lp1_e[a:], rr_e[a:], sg_e[a:])
        lnz, _ = _closed_check(d, pi_e[a:], lp0_e[a:], lp1_e[a:], rr_e[a:], sg_e[a:], qx, qxx,
                               mt, C, False)
        size = 0
        lhs = 0.0
        for k in range(d):
            m_e[a + k] = mt[k]
            if (vm >> k) & 1:
                size += 1
                lhs += mt[k]
            else:
                lhs -= mt[k]
        slack[c] = size - 1 - lhs
        kk = alloc_k[c]
        if kk < 0:
            g_checks -= rho[c] * lnz
        else:
            g_checks += _closed_check_dual(w, d, kk, alloc_alpha[c], rho[c], L[edge_var[a + kk]],
                                           lp0_e[a:], rr_e[a:], sg_e[a:])
        for k in range(d):
            mu[a + k] = rho[c] * w_e[a + k]
    # 2. tight checks: slack below tight_factor times the largest possible change of
    #    the face's left-hand side between the check's marginals and the targets
    for c in range(m):
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        dev = 0.0
        for k in range(d):
            dev += abs(tb[edge_var[a + k]] - m_e[a + k])
        tight[c] = slack[c] <= tight_factor * dev
        assigned[c] = -1
        if tight[c]:
            for k in range(d):
                deg[edge_var[a + k]] += 1
    # 3. peeling: an equation takes its most uncertain bit that no other remaining
    #    equation contains
    count = 0
    progress = True
    while progress:
        progress = False
        for c in range(m):
            if not tight[c] or assigned[c] >= 0:
                continue
            a = check_ptr[c]
            d = check_ptr[c + 1] - a
            pick = -1
            var_best = -1.0
            for k in range(d):
                i = edge_var[a + k]
                if deg[i] == 1 and not is_assigned[i]:
                    v = tb[i] * (1.0 - tb[i])
                    if v > var_best:
                        var_best = v
                        pick = k
            if pick < 0:
                continue
            assigned[c] = pick
            is_assigned[edge_var[a + pick]] = True
            order[count] = c
            count += 1
            for k in range(d):
                deg[edge_var[a + k]] -= 1
            progress = True
    # reverse order: each equation's bit from the others (already final)
    for r in range(count - 1, -1, -1):
        c = order[r]
        a = check_ptr[c]
        x = _face_value(tb, edge_var, a, check_ptr[c + 1] - a, vmask[c], assigned[c], slack[c])
        if 0.0 < x < 1.0:
            tb[edge_var[a + assigned[c]]] = x
    # moved targets can make further checks tight: those take a bit of their own
    # (one no other tight check contains), solved at once, for a few rounds
    for _rep in range(4):
        for i in range(n):
            deg[i] = 0
        for c in range(m):
            if tight[c]:
                for e in range(check_ptr[c], check_ptr[c + 1]):
                    deg[edge_var[e]] += 1
        changed = False
        for c in range(m):
            if tight[c]:
                continue
            a = check_ptr[c]
            d = check_ptr[c + 1] - a
            dev = 0.0
            for k in range(d):
                dev += abs(tb[edge_var[a + k]] - m_e[a + k])
            if slack[c] > tight_factor * dev:
                continue
            tight[c] = True
            changed = True
            pick = -1
            var_best = -1.0
            for k in range(d):
                i = edge_var[a + k]
                deg[i] += 1
                if deg[i] == 1 and not is_assigned[i]:
                    v = tb[i] * (1.0 - tb[i])
                    if v > var_best:
                        var_best = v
                        pick = k
            if pick < 0:
                continue
            assigned[c] = pick
            is_assigned[edge_var[a + pick]] = True
            x = _face_value(tb, edge_var, a, d, vmask[c], pick, slack[c])
            if 0.0 < x < 1.0:
                tb[edge_var[a + pick]] = x
        if not changed:
            break
    # 4. every check matched to its targets by one exact linear step
    theta = 0.0
    n_made = 0
    f_checks = 0.0
    for c in range(m):
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        o = offset[c]
        K = offset[c + 1] - o
        bp = bit_ptr[c]
        for k in range(d):
            w[k] = w_e[a + k]
        _, negent = _closed_check(d, pi_e[a:], lp0_e[a:], lp1_e[a:], rr_e[a:], sg_e[a:], qx, qxx,
                                  mt, C, True)
        bound = 0.0
        rdotw = 0.0
        for t in range(d):
            q[t] = tb[edge_var[a + t]]
            rhs[t] = q[t] - mt[t]
            rdotw += rhs[t] * w[t]
            bound += abs(rhs[t])
        made[c] = False
        ok = False
        if bound == 0.0:
            for t in range(d):
                c_e[a + t] = 0.0
            f_checks += rho[c] * negent
            continue
        if _solve_spd(C, rhs, d, cvec, piv):
            reach = 0.0
            cdotr = 0.0
            cmax = 0.0
            for t in range(d):
                cmax = max(cmax, abs(cvec[t]))
                reach += abs(cvec[t]) * max(mt[t], 1.0 - mt[t])
                cdotr += cvec[t] * (q[t] - mt[t])
            # reach < 1 keeps every 1 + u > 0; |c| <= _C_MAX keeps the rounding of
            # 1 + u (a sum of terms of size |c|) at ~1e-12: a large c means the
            # targets ask the check to move along a direction of almost no variance
            if reach < 1.0 and cmax <= _C_MAX:
                ok = True
                for t in range(d):
                    c_e[a + t] = cvec[t]
                f_checks += rho[c] * (negent - rdotw + cdotr)
        if ok:
            continue
        # made at once on the pattern loop: the linear step where it keeps every entry
        # > 0, else damped Newton from the cavities, else the additive correction
        made[c] = True
        n_made += 1
        _product_belief(w, bits, o, K, bp, d, tl)
        _check_marginals(tl, bits, o, K, bp, d, mt)
        _covariance(tl, bits, o, K, bp, d, mt, C)
        for t in range(d):
            rhs[t] = q[t] - mt[t]
        if _solve_scaled(C, rhs, d, cvec, piv):
            fac0 = 1.0
            ok = True
            for t in range(d):
                fac0 -= cvec[t] * mt[t]
                ok = ok and abs(cvec[t]) <= _C_MAX
            for j in range(K):
                base = bp + j * d
                fac = fac0
                for t in range(d):
                    fac += cvec[t] * bits[base + t]
                facs[j] = fac
                ok = ok and fac > 0.0
            if ok:
                for j in range(K):
                    tl[o + j] *= facs[j]
        if not ok:
            _newton_match(w, q, bits, o, K, bp, d, newton_max, tl, mt, cvec, rhs, C, piv, nres)
            ok = nres[0] > 0.0
            if not ok:
                _check_marginals(tl, bits, o, K, bp, d, mt)
        if not ok:
            # additive correction sum_t delta_t (2 S_t - 1) / 2**(d-2) (exact marginals,
            # may leave entries < 0: the uniform mix below restores them)
            theta = max(theta, _additive_correction(tl, bits, o, K, bp, d, q, mt))
        negent = 0.0
        for j in range(o, o + K):
            negent += _xlogx(tl[j])
        f_checks += rho[c] * negent
    if theta > 0.0:
        # every check made, mixed with the uniform point, F evaluated exactly
        _emit_checks(check_ptr, offset, w_e, m_e, c_e, made, tl)
        theta = _mix_uniform(theta, tb, tl, offset)
        f_checks = _checks_negentropy(tl, offset, rho)
        for c in range(m):
            made[c] = True
    # 5. bits: F term and dual term at b_i = lam_i - sum_c mu_ic (kappa_i L_i at
    #    the message cavities, plus the allocation's shift)
    f_bits = 0.0
    g_bits = 0.0
    for i in range(n):
        t = tb[i]
        k = kappa[i]
        f_bits += llr[i] * t + k * (_xlogx(t) + _xlogx(1.0 - t))
        b = llr[i]
        for p in range(var_ptr[i], var_ptr[i + 1]):
            b -= mu[var_edges[p]]
        if bit_alpha[i] > 0.0:
            k += bit_alpha[i]
            b += bit_alpha[i] * L[i]
        g_bits += _bit_dual(b, k)
    out[0] = f_bits + f_checks
    out[1] = g_bits + g_checks
    out[2] = theta
    out[3] = 0.0
    out[4] = n_made


@nb.njit(**NUMBA_OPTS)
def _emit_checks(check_ptr, offset, w_e, m_e, c_e, made, tl):
    """Write ``tl = b(S) (1 + sum_t c_t (S_t - m_t))`` of every check not made yet.

    ``b`` is the product measure at the cavities ``w_e`` on the even patterns,
    normalised by its own total (so the entries are exact products, no ``exp``
    per pattern); ``m_e``, ``c_e`` as left by :func:`_peeled_project_frame`.

    Needs the canonical pattern order of
    :class:`ldpcmarg.code.parity_check.LocalCodewords` (even-weight integers in
    increasing order, bit ``t`` = position ``t``; checked by :class:`CertifiedTRW`):
    pattern ``j`` has positions ``1..d-1`` equal to the binary digits of ``j`` and
    position 0 equal to their parity. The products and ``sum_t c_t S_t`` over the
    positions ``1..d-1`` are then built by doubling (one multiplication and one
    addition per pattern and level, ``2 K`` in all, instead of ``K d`` selects).
    """
    m = check_ptr.shape[0] - 1
    dmax = 1
    kmax = 1
    for c in range(m):
        dmax = max(dmax, check_ptr[c + 1] - check_ptr[c])
        kmax = max(kmax, offset[c + 1] - offset[c])
    p0 = np.empty(dmax, dtype=np.float64)
    p1 = np.empty(dmax, dtype=np.float64)
    prod = np.empty(kmax, dtype=np.float64)
    lin = np.empty(kmax, dtype=np.float64)
    odd = np.empty(kmax, dtype=np.bool_)
    for c in range(m):
        if made[c]:
            continue
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        o = offset[c]
        K = offset[c + 1] - o
        fac0 = 1.0
        for t in range(d):
            fac0 -= c_e[a + t] * m_e[a + t]
            # P(S_t = 1) = 1 / (1 + exp(w)) and its complement from one exp
            wt = w_e[a + t]
            e = math.exp(-abs(wt))
            small = e / (1.0 + e)
            large = 1.0 / (1.0 + e)
            p1[t] = small if wt >= 0.0 else large
            p0[t] = large if wt >= 0.0 else small
        prod[0] = 1.0
        lin[0] = fac0
        odd[0] = False
        h = 1
        for t in range(1, d):
            ct = c_e[a + t]
            for j in range(h):
                prod[j + h] = prod[j] * p1[t]
                prod[j] *= p0[t]
                lin[j + h] = lin[j] + ct
                odd[j + h] = not odd[j]
            h *= 2
        c0 = c_e[a]
        tot = 0.0
        for j in range(K):
            x = prod[j] * (p1[0] if odd[j] else p0[0])
            tl[o + j] = x
            tot += x
        for j in range(K):
            fac = lin[j] + c0 if odd[j] else lin[j]
            tl[o + j] = tl[o + j] / tot * fac


@nb.njit(**_SP_OPTS)
def _xlogx_sum(x, buf):
    """``sum_j x_j ln x_j`` (``0 ln 0 = 0``) of a short array, the logarithms vectorised.

    The polynomial ``log`` of :mod:`ldpcmarg.decoders.vectorised` (a few ulps),
    computed into ``buf`` in a loop LLVM turns into packed instructions, then
    summed in order. Entries below ``1e-300`` use ``ln 1e-300`` (their terms are
    below 1e-297 in absolute value).
    """
    K = x.shape[0]
    for j in range(K):
        t = x[j]
        lg = _log_pos64(max(t, 1e-300))
        buf[j] = t * lg if t > 0.0 else 0.0
    total = 0.0
    for j in range(K):
        total += buf[j]
    return total


@nb.njit(**NUMBA_OPTS)
def _check_negent_mismatch(tl, bits, o, K, bp, d, tb, edge_var, a, mt, buf):
    """(sum tau ln tau, largest |marginal - target|) of one check's belief.

    ``buf`` (>= K,) is scratch for :func:`_xlogx_sum`.
    """
    negent = _xlogx_sum(tl[o:o + K], buf)
    _check_marginals(tl, bits, o, K, bp, d, mt)
    worst = 0.0
    for t in range(d):
        worst = max(worst, abs(mt[t] - tb[edge_var[a + t]]))
    return negent, worst


@nb.njit(**NUMBA_OPTS)
def _emit_frame(llr, check_ptr, edge_var, offset, bit_ptr, bits, rho, kappa, tb, tl, w_e, m_e,
                c_e, made, out):
    """The point of a peeled certificate: write ``tl`` and evaluate F(tau) exactly.

    ``out`` (2,): F(tau) (nats) and the largest |bit target - check marginal|
    (rounding level: the point lies in L up to it).
    """
    _emit_checks(check_ptr, offset, w_e, m_e, c_e, made, tl)
    m = check_ptr.shape[0] - 1
    n = tb.shape[0]
    f = 0.0
    worst = 0.0
    mt = np.empty(check_ptr[1] - check_ptr[0] if m else 1, dtype=np.float64)
    kmax = 1
    for c in range(m):
        kmax = max(kmax, offset[c + 1] - offset[c])
    buf = np.empty(kmax, dtype=np.float64)
    for c in range(m):
        made[c] = True
        a = check_ptr[c]
        d = check_ptr[c + 1] - a
        if d > mt.shape[0]:
            mt = np.empty(d, dtype=np.float64)
        negent, dev = _check_negent_mismatch(tl, bits, offset[c], offset[c + 1] - offset[c],
                                             bit_ptr[c], d, tb, edge_var, a, mt, buf)
        f += rho[c] * negent
        worst = max(worst, dev)
    for i in range(n):
        t = tb[i]
        f += llr[i] * t + kappa[i] * (_xlogx(t) + _xlogx(1.0 - t))
    out[0] = f
    out[1] = worst


@nb.njit(parallel=True, **NUMBA_OPTS)
def _peeled_certify_batch(llr, L, c2v, check_ptr, edge_var, var_ptr, var_edges, offset, bit_ptr,
                          bits, rho, kappa, alloc_k, alloc_alpha, bit_alpha, tight_factor,
                          newton_max, active, tb, tl, mu, w_e, m_e, c_e, made, out):
    """:func:`_peeled_project_frame` on every active frame (prange; ``out`` (F, 8) as
    :func:`_project_certify_batch`, columns 5-7 NaN, NaN, 0)."""
    F, n = llr.shape
    m = check_ptr.shape[0] - 1
    for f in nb.prange(F):
        if not active[f]:
            continue
        slack = np.empty(m, dtype=np.float64)
        vmask = np.empty(m, dtype=np.int64)
        tight = np.empty(m, dtype=np.bool_)
        assigned = np.empty(m, dtype=np.int64)
        order = np.empty(m, dtype=np.int64)
        deg = np.empty(n, dtype=np.int64)
        is_assigned = np.empty(n, dtype=np.bool_)
        o5 = np.empty(5, dtype=np.float64)
        _peeled_project_frame(llr[f], L[f], c2v[f], check_ptr, edge_var, var_ptr, var_edges,
                              offset, bit_ptr, bits, rho, kappa, alloc_k, alloc_alpha,
                              bit_alpha, tight_factor, newton_max, tb[f], tl[f], mu[f], w_e[f],
                              m_e[f], c_e[f], made[f], slack, vmask, tight, assigned, order,
                              deg, is_assigned, o5)
        for k in range(5):
            out[f, k] = o5[k]
        out[f, 5] = np.nan
        out[f, 6] = np.nan
        out[f, 7] = 0.0


@nb.njit(parallel=True, **NUMBA_OPTS)
def _emit_batch(llr, check_ptr, edge_var, offset, bit_ptr, bits, rho, kappa, select, tb, tl,
                w_e, m_e, c_e, made, out):
    """:func:`_emit_frame` on the selected frames; F(tau) to ``out[f, 0]``, mismatch to
    ``out[f, 3]``."""
    for f in nb.prange(llr.shape[0]):
        if not select[f]:
            continue
        o2 = np.empty(2, dtype=np.float64)
        _emit_frame(llr[f], check_ptr, edge_var, offset, bit_ptr, bits, rho, kappa, tb[f],
                    tl[f], w_e[f], m_e[f], c_e[f], made[f], o2)
        out[f, 0] = o2[0]
        out[f, 3] = o2[1]


def _gap_of(out):
    """Certified gap per frame: the smaller of the entropic and the linear certificate."""
    ent = out[:, 0] - out[:, 1]
    lin = out[:, 5] - out[:, 6]
    gap = np.where(np.isfinite(lin), np.minimum(ent, lin), ent)
    # rounding allowance: gap is a difference of sums over thousands of terms of
    # size ~|F|; 1e-12 (1 + |F|) covers their float64 rounding, so a frame at the
    # optimum reports a small positive gap rather than a (possibly too small) 0
    gap = np.maximum(gap, 0.0) + 1e-12 * (1.0 + np.abs(out[:, 0]))
    gap[~np.isfinite(gap)] = np.inf
    return gap


# ------------------------------------------------------------------ driver
@dataclass
class CertifiedBatch:
    """Outcome of :meth:`CertifiedTRW.run` on F frames.

    Attributes
    ----------
    tau_bits : ndarray of shape (F, n), float64
        ``P(x_i = 1)`` of the projected point (a point of ``L``).
    tau_local : ndarray of shape (F, K), float64
        Check beliefs over local codewords (flat layout).
    free_energy : ndarray of shape (F,), float64
        ``F(tau)`` (nats).
    certified_gap : ndarray of shape (F,), float64
        ``<grad F(tau), tau> - D(mu) >= F(tau) - F*`` (convex F), nats.
    relative_gap : ndarray of shape (F,), float64
        ``certified_gap / max(1, |F|)``.
    certified : ndarray of shape (F,), bool
        Relative gap <= the requested tolerance.
    iterations : ndarray of shape (F,), int64
        Message-passing sweeps.
    rounds : ndarray of shape (F,), int64
        Certificate evaluations (1 + polishing rounds used).
    residual : ndarray of shape (F,), float64
        Largest message change of the last sweep (LLR units).
    theta : ndarray of shape (F,), float64
        Weight of the uniform point mixed in by the projection (usually 0).
    mismatch : ndarray of shape (F,), float64
        Largest remaining |bit marginal - check marginal| of the point (rounding level,
        about 1e-16; the point lies in ``L`` up to it).
    mu : ndarray of shape (F, E), float64
        Multipliers of the certificate.
    seconds : dict of str to float
        Wall time of the batch per phase: ``warm_start``, ``certificate``, ``polish``.
    entropic_gap, linear_gap : ndarray of shape (F,), float64
        The two certificates (``linear_gap`` NaN unless requested);
        ``certified_gap`` is the smaller.
    """

    tau_bits: np.ndarray
    tau_local: np.ndarray
    free_energy: np.ndarray
    certified_gap: np.ndarray
    relative_gap: np.ndarray
    certified: np.ndarray
    iterations: np.ndarray
    rounds: np.ndarray
    residual: np.ndarray
    theta: np.ndarray
    mismatch: np.ndarray
    mu: np.ndarray
    seconds: dict
    entropic_gap: np.ndarray
    linear_gap: np.ndarray


def _require_canonical_patterns(lc, code) -> None:
    """Refuse local codewords that are not in the canonical order of
    :func:`ldpcmarg.code.parity_check._even_patterns` (the point writer relies on it)."""
    from ..code.parity_check import _even_patterns

    degrees = np.diff(np.asarray(code.check_ptr))
    for d in np.unique(degrees):
        ref = _even_patterns(int(d)).ravel()
        for c in np.flatnonzero(degrees == d):
            a = int(lc.bit_ptr[c])
            if not np.array_equal(lc.bits[a:a + ref.size], ref):
                raise InputError(f"The local codewords of check {c} are not in the canonical "
                                 "order of LocalCodewords; build them with "
                                 "code.local_codewords().")


class CertifiedTRW:
    """Batched certified marginals for a convex (tree-reweighted) free energy.

    Parameters
    ----------
    code : ParityCheckCode
        Every check must have degree >= 3 (degree-2 checks force equal
        marginals, which the per-check projection does not handle; the
        ``fw`` decoder then uses its per-frame path).
    rho : ndarray of shape (m,), float64
        Check weights of a convex free energy (e.g. sampled-hyperforest TRW weights).
    lc : LocalCodewords, optional
    schedule : {"layered", "flooding"}
    omega : float
        Relaxation factor of the message updates (``new = old + omega (update - old)``).
    adaptive : bool
        Multiply ``omega`` by 0.7 whenever the largest message change grows.
    omega_min : float
    tol : float
        First message tolerance (largest change per sweep, LLR units).
    max_iter : int
        Sweep cap per frame over all rounds.
    polish_rounds : int
        Further rounds, each continuing the message passing with a tolerance ten
        times smaller, for frames not yet certified.
    linear : bool
        Also evaluate the linear (Frank–Wolfe) Lagrangian certificate of DESIGN.md
        §5a and keep the smaller gap (costs a pass over the local codewords).
    sweeps : int
        Hard star sweeps of dual ascent for the linear certificate.
    newton_max : int
        Newton steps of the per-check projection.
    anderson : int
        Memory of Anderson acceleration of the layered sweeps (0: off, then the
        relaxation options apply). With it, the schedule is layered without
        relaxation and the check update is the one-``exp``-one-``log`` complement
        form of sum-product.
    check_every : int
        With ``anderson``: sweeps between two certificate evaluations of a frame
        not yet certified (each polishing round runs at most this many).
    kappa_floor : float
        Bits with ``kappa_i`` below this borrow entropy from one adjacent check for
        the entropic bound (Heskes allocation; 0 = off).
    projection : {"newton", "peeled"}
        How the beliefs are made a point of ``L`` (module docstring): per-check
        Newton with the uniform mix as fix-up, or the peeled projection (tight
        checks kept on their face, closed-form certificate; needs ``linear=False``).
    tight_factor : float
        Peeled projection: a check counts as tight when its belief's slack on the
        face of its most likely odd pattern is at most this times the summed
        distance between its marginals and the bit targets.
    lanes : bool
        With ``anderson``: sweep ``LANES`` frames at a time across SIMD lanes
        (:func:`_anderson_group`; the same iteration per frame, equal to rounding)
        instead of one frame at a time, whenever that is the faster of the two for
        the frames to be swept and numba's thread count (:meth:`_lane_chunks`). A frame's Anderson history is not carried out of a lane call (its
        next call restarts the extrapolation from a plain sweep): writing the
        history back lane by lane cost more than the restart (measured on
        peg-1008-3-6 at 2.5 dB).
    lane_float32 : bool
        With ``lanes``: the first approach (up to the first certificate, at a
        message change of ``tol``) in float32 lanes, twice as many per register;
        later sweeps in float64. The certificate holds for any messages; float32
        rounding (~1e-6 on messages of magnitude 10) is far below a 5e-3 change.
        Only for ``tol >= 1e-3`` (below that, float64 lanes).
    """

    def __init__(self, code, rho, *, lc=None, schedule: str = "layered", omega: float = 1.0,
                 adaptive: bool = True, omega_min: float = 0.3, tol: float = 1e-4,
                 max_iter: int = 2000, polish_rounds: int = 4, linear: bool = False,
                 sweeps: int = 0, newton_max: int = 8, anderson: int = 0,
                 check_every: int = 10, kappa_floor: float = 0.0, projection: str = "newton",
                 tight_factor: float = 4.0, lanes: bool = False, lane_float32: bool = False):
        if schedule not in SCHEDULES:
            raise InputError(f"The warm-start schedule must be one of {SCHEDULES}; got "
                             f"{schedule!r}.")
        if code.m and int(code.check_degrees.min()) < 3:
            raise InputError("The batched certified path needs every check of degree >= 3; "
                             "use fw's per-frame path for this code.")
        if not (0.0 < omega < 2.0) or not (0.0 < omega_min <= omega):
            raise InputError(f"Relaxation needs 0 < omega_min <= omega < 2; got omega={omega}, "
                             f"omega_min={omega_min}.")
        if projection not in PROJECTIONS:
            raise InputError(f"The projection must be one of {PROJECTIONS}; got {projection!r}.")
        if projection == "peeled" and linear:
            raise InputError("The linear certificate needs projection='newton'.")
        self.projection, self.tight_factor = projection, float(tight_factor)
        self.lanes, self.lane_float32 = bool(lanes), bool(lane_float32)
        self.code = code
        self.lc = lc if lc is not None else code.local_codewords()
        self._gr = _graph_of(code, self.lc)
        _require_canonical_patterns(self.lc, code)
        self.rho = np.ascontiguousarray(rho, dtype=np.float64)
        self._rho32 = self.rho.astype(np.float32)
        self.kappa = 1.0 - np.bincount(code.edge_var, weights=self.rho[code.edge_check],
                                       minlength=code.n)
        self.rho_loc = np.ascontiguousarray(self.rho[self.lc.owner])
        self.schedule, self.omega, self.adaptive = schedule, float(omega), bool(adaptive)
        self.omega_min, self.tol, self.max_iter = float(omega_min), float(tol), int(max_iter)
        self.polish_rounds, self.sweeps = int(polish_rounds), int(sweeps)
        self.newton_max, self.linear = int(newton_max), bool(linear)
        self.anderson, self.check_every = int(anderson), int(check_every)
        if self.anderson < 0 or self.check_every < 1:
            raise InputError(f"anderson must be >= 0 and check_every >= 1; got {anderson}, "
                             f"{check_every}.")
        self._dmax = int(code.check_degrees.max()) if code.m else 0
        self._cp_u = np.ascontiguousarray(self._gr.check_ptr, dtype=np.uint64)
        self._ev_u = np.ascontiguousarray(self._gr.edge_var, dtype=np.uint64)
        self.kappa_floor = float(kappa_floor)
        self._allocate(self.kappa_floor)
        self._dvmax = max(int(code.var_degrees.max()) if code.n else 0, 1)

    def _lane_chunks(self, count: int) -> int:
        """Lane groups for sweeping ``count`` frames, or 0 when one frame at a time is faster.

        A lane group costs about ``LANES`` lane-frame sweeps however few frames it
        holds, a frame-at-a-time sweep about ``_LANE_SPEEDUP`` lane-frame sweeps,
        and both spread over numba's threads (one group per thread).
        """
        if not (self.lanes and self.anderson and count):
            return 0
        threads = max(1, nb.get_num_threads())
        chunks = max(1, min(threads, -(-count // LANES)))
        lane_cost = max(LANES, count / chunks)
        scalar_cost = _LANE_SPEEDUP * -(-count // threads)
        return chunks if lane_cost < scalar_cost else 0

    def _allocate(self, floor: float) -> None:
        """Heskes allocation for the entropic bound: bits with kappa_i < floor borrow entropy.

        Bit ``i`` takes ``alpha <= rho_c / 2`` of the entropy of one adjacent check ``c``
        (``-rho_c H(tau_c) = -alpha H(tau_i) - [(rho_c - alpha) H(tau_c) + alpha
        H(tau_c | x_i)]``: the same F on L, the check piece stays convex since the
        conditional entropy is concave; Heskes, Neural Comput. 18(10), 2006). Each
        check lends to at most one bit, so its piece's minimum stays in closed form.
        Checks with the largest ``rho_c`` are used first.
        """
        code = self.code
        m, n = code.m, code.n
        self._alloc_k = np.full(m, -1, dtype=np.int64)
        self._alloc_alpha = np.zeros(m)
        self._bit_alpha = np.zeros(n)
        if floor <= 0.0:
            return
        check_ptr = np.asarray(self._gr.check_ptr)
        edge_var = np.asarray(self._gr.edge_var)
        edges_of = [[] for _ in range(n)]
        for c in range(m):
            for e in range(check_ptr[c], check_ptr[c + 1]):
                edges_of[edge_var[e]].append((c, e - check_ptr[c]))
        for i in np.argsort(self.kappa, kind="stable"):
            need = floor - self.kappa[i]
            if need <= 0.0:
                break
            free = [(self.rho[c], c, k) for c, k in edges_of[i] if self._alloc_k[c] < 0]
            if not free:
                continue
            r, c, k = max(free)
            alpha = min(need, 0.5 * r)
            self._alloc_k[c] = k
            self._alloc_alpha[c] = alpha
            self._bit_alpha[i] = alpha

    def run(self, llr, *, gap_tol: float = 1e-4, abs_gap_tol: float = 0.0) -> CertifiedBatch:
        """Certified TRW marginals of F frames.

        Parameters
        ----------
        llr : ndarray of shape (F, n), float64
            Channel LLRs (positive favours 0); clipped to ``+-LLR_MAX``.
        gap_tol : float
            Relative target: ``certified_gap <= gap_tol * max(1, |F(tau)|)``.
        abs_gap_tol : float
            Absolute target (nats); a frame is certified when either holds.

        Returns
        -------
        CertifiedBatch
        """
        gr = self._gr
        lam = np.ascontiguousarray(np.clip(llr, -LLR_MAX, LLR_MAX), dtype=np.float64)
        F, n = lam.shape
        E, K = gr.E, gr.K
        c2v = np.zeros((F, E))
        L = lam.copy()
        state = np.empty((F, 3))
        state[:, 0] = 0.0
        state[:, 1] = self.omega
        state[:, 2] = np.inf
        resid = np.full(F, np.inf)
        tb = np.empty((F, n))
        tl = np.empty((F, K))
        mu = np.empty((F, E))
        out = np.zeros((F, 8))
        active = np.ones(F, dtype=np.bool_)
        done = np.zeros(F, dtype=np.bool_)
        rounds = np.zeros(F, dtype=np.int64)
        secs = {"warm_start": 0.0, "certificate": 0.0, "polish": 0.0}
        tol = self.tol
        layered = self.schedule == "layered"
        hist_x = hist_g = hist_m = None
        peel = None
        emitted = np.zeros(F, dtype=np.bool_)
        for rnd in range(self.polish_rounds + 1):
            budget = self.max_iter - state[:, 0]
            active &= budget > 0
            if not active.any():
                break
            t0 = time.perf_counter()
            # each round gets the remaining sweep budget of its frames (max over them)
            if self.anderson:
                if hist_x is None:
                    hist_x = np.zeros((F, self.anderson + 1, E))
                    hist_g = np.zeros((F, self.anderson + 1, E))
                    hist_m = np.zeros((F, self.anderson + 1, self.anderson + 1))
                    state[:, 1] = 0.0
                cap = int(budget[active].max())
                if rnd:
                    cap = min(cap, self.check_every)
                chunks = self._lane_chunks(int(active.sum()))
                if chunks:
                    # float32 lanes for the first approach only (twice the lanes per
                    # register; a 5e-3 message change is far above their rounding)
                    f32 = rnd == 0 and self.lane_float32 and tol >= _F32_TOL_MIN
                    rho_l = self._rho32 if f32 else self.rho
                    _anderson_lanes_batch(lam, self._cp_u, self._ev_u, rho_l, cap, tol,
                                          self.anderson, False, active, chunks, c2v, L,
                                          hist_x, hist_g, hist_m, state, resid, self._dmax)
                else:
                    _anderson_batch(lam, gr.check_ptr, gr.edge_var, self.rho, cap, tol,
                                    self.anderson, active, c2v, L, hist_x, hist_g, hist_m, state,
                                    resid, self._dmax)
                _refresh_batch(lam, gr.check_ptr, gr.edge_var, self.rho, active, c2v, L)
            else:
                _mp_batch(lam, gr.check_ptr, gr.edge_var, self.rho, layered, self.omega,
                          self.adaptive, self.omega_min, int(budget[active].max()), tol, active,
                          c2v, L, state, resid, self._dmax)
            t1 = time.perf_counter()
            if self.projection == "peeled":
                if peel is None:
                    peel = (np.zeros((F, E)), np.zeros((F, E)), np.zeros((F, E)),
                            np.zeros((F, gr.m), dtype=np.bool_))
                _peeled_certify_batch(lam, L, c2v, gr.check_ptr, gr.edge_var, gr.var_ptr,
                                      gr.var_edges, gr.offset, gr.bit_ptr, gr.bits, self.rho,
                                      self.kappa, self._alloc_k, self._alloc_alpha,
                                      self._bit_alpha, self.tight_factor, self.newton_max,
                                      active, tb, tl, mu, *peel, out)
            else:
                _project_certify_batch(lam, L, c2v, gr.check_ptr, gr.edge_var, gr.edge_check,
                                       gr.var_ptr, gr.var_edges, gr.offset, gr.bit_ptr, gr.bits,
                                       gr.masks, self.rho, self.rho_loc, self.kappa, self._alloc_k,
                                       self._alloc_alpha, self._bit_alpha, self.newton_max,
                                       self.linear, self.sweeps, active, tb, tl, mu, out,
                                       self._dmax, self._dvmax)
            t2 = time.perf_counter()
            secs["polish" if rnd else "warm_start"] += t1 - t0
            secs["certificate"] += t2 - t1
            rounds[active] += 1
            gap = _gap_of(out)
            target = np.maximum(abs_gap_tol, gap_tol * np.maximum(1.0, np.abs(out[:, 0])))
            if peel is not None:
                # near misses of the closed-form bound (it counts each check's
                # Kullback-Leibler term about twice): write their points and evaluate
                # F exactly, which may certify them without further sweeps
                near = active & (gap > target) & (gap <= 4.0 * target)
                if near.any():
                    t3 = time.perf_counter()
                    _emit_batch(lam, gr.check_ptr, gr.edge_var, gr.offset, gr.bit_ptr,
                                gr.bits, self.rho, self.kappa, near, tb, tl, *peel, out)
                    emitted |= near
                    secs["certificate"] += time.perf_counter() - t3
                    gap = _gap_of(out)
                    target = np.maximum(abs_gap_tol,
                                        gap_tol * np.maximum(1.0, np.abs(out[:, 0])))
            done |= active & (gap <= target)
            active &= ~done
            if peel is not None:
                emitted &= done     # frames that go on are certified afresh next round
            tol *= 0.1
        if peel is not None:
            # the points of the peeled certificates, and F(tau) exactly (the
            # certificates used an upper bound on it: the gaps only shrink)
            t2 = time.perf_counter()
            _emit_batch(lam, gr.check_ptr, gr.edge_var, gr.offset, gr.bit_ptr, gr.bits,
                        self.rho, self.kappa, (rounds > 0) & ~emitted, tb, tl, *peel, out)
            secs["certificate"] += time.perf_counter() - t2
        f_val = out[:, 0].copy()
        gap = _gap_of(out)
        return CertifiedBatch(tau_bits=tb, tau_local=tl, free_energy=f_val, certified_gap=gap,
                              relative_gap=gap / np.maximum(1.0, np.abs(f_val)), certified=done,
                              iterations=state[:, 0].astype(np.int64), rounds=rounds,
                              residual=resid, theta=out[:, 2].copy(),
                              mismatch=out[:, 3].copy(), mu=mu, seconds=secs,
                              entropic_gap=np.maximum(out[:, 0] - out[:, 1], 0.0),
                              linear_gap=np.maximum(out[:, 5] - out[:, 6], 0.0))


def boxplus(a, b):
    """Exact box-plus of LLRs: ``ln P(x XOR y = 0) - ln P(x XOR y = 1)``, elementwise.

    Parameters
    ----------
    a, b : float or ndarray of float64
        LLRs of independent bits (positive favours 0), any finite magnitude.

    Returns
    -------
    ndarray of float64
        ``sign(a) sign(b) min(|a|, |b|) + log1p(exp(-|a+b|)) - log1p(exp(-|a-b|))``.
    """
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
        raise InputError("boxplus needs finite LLRs.")
    a, b = np.broadcast_arrays(a, b)
    out = np.empty(a.shape)
    fa, fb, fo = a.ravel(), b.ravel(), out.reshape(-1)
    for k in range(fa.size):
        fo[k] = _boxplus(float(fa[k]), float(fb[k]))
    return out
