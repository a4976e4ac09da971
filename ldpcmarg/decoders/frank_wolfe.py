r"""Frank–Wolfe (conditional-gradient) solver for bitwise marginals.

The posterior of a frame is :math:`p(x\mid y) \propto \exp(-\sum_i \lambda_i x_i)\,1[Hx=0]`
with channel LLRs :math:`\lambda` (positive favours 0). The solver minimises the
free energy (DESIGN.md §5)

.. math::

    F(\tau) = \sum_i \lambda_i \tau_i - \sum_c \rho_c H(\tau_c)
              - \sum_i \kappa_i H_b(\tau_i), \qquad \kappa_i = 1 - \sum_{c \ni i} \rho_c,

over the local polytope ``L`` (``tau_i = P(x_i = 1)``; per check ``c`` a
distribution ``tau_c`` over its even-weight local codewords; edge consistency),
in the lifted coordinates ``(tau_bits (n,), tau_local (L,))`` of
:class:`~ldpcmarg.decoders.lp.LocalPolytopeLP`. Frank–Wolfe only moves along
segments between points of ``L``, so the consistency constraints hold by
construction and the gradient may be taken coordinate-wise in the lifted space:
``dF/dtau_i = lambda_i + kappa_i ln(tau_i / (1 - tau_i))`` and
``dF/dtau_c(S) = rho_c (ln tau_c(S) + 1)`` (the ``+1`` is constant on each
check's simplex and is dropped; any two gradient representatives differ by a
vector orthogonal to the affine hull of ``L``).

Entropy weights: ``"bethe"`` (``rho = 1``; exact on cycle-free codes, non-convex
otherwise), ``"trw"`` (``rho`` from sampled maximal hyperforests,
:func:`ldpcmarg.code.hyperforest.trw_check_weights`; ``F`` convex and
``ln Z <= -(F(tau) - gap)``), or a user array (with a report of whether the
sufficient concavity condition holds).

Each iteration: gradient, a linear-minimisation oracle (LP decoding with extra
costs on local codewords: by default the dual-candidate oracle of
:mod:`ldpcmarg.decoders.lp_dual`, which accepts cheap candidate vertices proved
optimal by a Lagrangian bound and falls back to hot-started HiGHS;
``oracle="lp"`` calls HiGHS every time), an exact line search (safeguarded
Newton with bisection on ``f'(gamma)``; ``O(#checks)`` per evaluation when each
check's direction involves one or two local codewords), update. Variants:

* ``"vanilla"`` — classical FW from the start point;
* ``"away"`` and ``"pairwise"`` — away-step and pairwise FW with an active set
  of oracle vertices (Lacoste-Julien & Jaggi, NeurIPS 2015); the start point,
  which is not a vertex, is an atom of the active set and can be shed;
* ``"contracted"`` — FW over ``(1 - eps) L + eps u`` (``u`` the uniform point)
  with ``eps`` shrunk adaptively (in the spirit of Krishnan, Lacoste-Julien &
  Sontag, NeurIPS 2015), which keeps the iterate interior.

Measured (``experiments/fw_convergence.py``, ``experiments/bench_frank_wolfe.py``):
from the uniform point no variant reaches a relative gap of 1e-4 in 15 s on
the PEG (3,6) n = 504 code (HiGHS calls of 1–5 s each, > 99 % of the time);
started from converged reweighted sum-product beliefs, one oracle call
certifies the point, so the warm start is the default. For convex ``F`` the
default route is batched (option ``route``): Anderson-accelerated layered
reweighted sum-product, the peeled projection onto ``L`` and the entropic
Lagrangian certificate as numba kernels parallel over frames
(:class:`ldpcmarg.decoders.certified.CertifiedTRW`), with this per-frame
solver as fallback. Its cost against sum-product (same thread count, batched
and single-frame) is measured by ``experiments/bench_certified.py``; see
``experiments/results/bench_certified.md``.

Frames with LLRs beyond ``LOW_TEMPERATURE_LLR`` are solved at zero
temperature (the LP-decoding vertex, status ``"low_temperature"``).

The duality gap ``g = <grad F(tau), tau - s>`` (``s`` the oracle vertex) bounds
``F(tau) - F*`` from above when ``F`` is convex. For non-convex (Bethe) ``F`` it
is only a stationarity measure, and a Bethe run that ends at an integral vertex
(a "Bethe trap": every codeword vertex is a strict local minimum when all bit
degrees are >= 3) is reported with status ``"vertex"``, never as converged.

References
----------
J. S. Yedidia, W. T. Freeman and Y. Weiss, "Constructing free-energy
approximations and generalized belief propagation algorithms", IEEE Trans.
Inf. Theory 51(7), 2005. doi:10.1109/TIT.2005.850085

M. J. Wainwright, T. S. Jaakkola and A. S. Willsky, "A new class of upper
bounds on the log partition function", IEEE Trans. Inf. Theory 51(7), 2005.
doi:10.1109/TIT.2005.850091

S. Lacoste-Julien and M. Jaggi, "On the global linear convergence of
Frank-Wolfe optimization variants", NeurIPS 2015.

R. G. Krishnan, S. Lacoste-Julien and D. Sontag, "Barrier Frank-Wolfe for
marginal inference", NeurIPS 2015.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numba as nb
import numpy as np

from .._params import Param
from .._settings import DEFAULT_MAX_CHECK_DEGREE, LLR_MAX, NUMBA_OPTS
from ..errors import InputError
from .base import Decoder, DecodeResult

__all__ = [
    "FrankWolfeDecoder",
    "FWProblem",
    "FWFrameResult",
    "consistent_interior_point",
]

#: Floor inside logarithms and reciprocals: keeps gradients finite (|ln| <= 690)
#: when a coordinate underflows to 0 (e.g. LLRs of 1e4). Never produces NaN.
#: Default wall-clock cap per frame (seconds) of the fw decoder: a frame where the
#: solver does not reach its tolerance must not hold a sweep for ever.
DEFAULT_FW_TIME_LIMIT = 5.0
_TINY = 1e-300

#: A vanilla or contracted full step stops this short of the vertex, so the
#: iterate keeps a positive share of the start point (stays interior).
_FULL_STEP = 1.0 - 1e-12

# per-check direction kinds of the line-search kernel
_GENERIC, _TO_ONE, _PAIR, _NONE = 0, 1, 2, 3

#: Frames whose largest |LLR| exceeds this are solved at zero temperature (status
#: ``"low_temperature"``): a local codeword spanning three such bits then has a
#: probability below exp(-900), under float64's smallest subnormal (about
#: exp(-745)), so the free energy and its gradient (logs floored at 1e-300, i.e.
#: -690.8) can no longer be evaluated faithfully, while the entropy (at most
#: ``entropy_bound`` nats) is negligible against the linear term: the optimum of
#: ``F`` is then within ``entropy_bound`` of the LP-decoding optimum.
LOW_TEMPERATURE_LLR = 300.0

#: Settings of the batched certified route (measured in experiments/bench_certified.py):
#: Anderson memory 3 on layered sweeps to a 5e-3 message change, then the peeled
#: projection and the entropic certificate (bits of kappa_i < 0.1 borrowing entropy from
#: one check each, Heskes allocation; multipliers from the message cavities) every 3
#: further sweeps, up to 16 times. With the peeled projection the gap is second order in
#: the message change: a 1e-4 relative gap closes after 15-21 sweeps (peg-504/1008 at
#: 1.5 and 2.5 dB), where the Newton projection's uniform mix needed a 3e-5 change and
#: 30-41 sweeps. Memory 3 and 5 take about as many sweeps; 3 costs less per sweep.
#: Large batches sweep with frames across SIMD lanes (the lane sum-product update of
#: ``vectorised.py``), float32 lanes up to the first certificate: warm start 2.2 ->
#: 1.1 (float64 lanes) -> 0.5 ms per frame at peg-1008-3-6, 2.5 dB, one thread, with
#: the same sweep counts and certified shares. Once sweeps are that cheap, a 5e-3 first
#: tolerance beats 1e-2 (at 2.5 dB about 30 % of the frames missed the first certificate
#: at 1e-2 and paid a second one; ~13 % less time in all at 2.5 dB, the same at 1.5 dB).
_BATCHED_SETTINGS = {"anderson": 3, "tol": 5e-3, "polish_rounds": 16, "check_every": 3,
                     "linear": False, "kappa_floor": 0.1, "projection": "peeled",
                     "lanes": True, "lane_float32": True}

_VARIANTS = ("vanilla", "away", "pairwise", "contracted")
_ORACLES = ("lp", "ml", "dual")
_WARM = ("auto", "uniform", "reweighted-sum-product")


# ---------------------------------------------------------------- kernels
@nb.njit(**NUMBA_OPTS)
def _xlogx(t):
    if t <= 0.0:
        return 0.0
    return t * math.log(t)


@nb.njit(**NUMBA_OPTS)
def _dxlogx(t0, delta):
    """(t0 + delta) ln(t0 + delta) - t0 ln t0, accurate when delta is small."""
    t = t0 + delta
    if t0 <= 0.0:
        return _xlogx(t)
    if t <= 0.0:
        return -_xlogx(t0)
    return delta * math.log(t) + t0 * math.log1p(delta / t0)


@nb.njit(**NUMBA_OPTS)
def _safe_log(t):
    return math.log(t if t > _TINY else _TINY)


@nb.njit(**NUMBA_OPTS)
def _free_energy_kernel(lam, kappa, rho_loc, tb, tl):
    """F(tau) = <lam, tb> + sum rho_loc * tl ln tl + sum kappa * (negative binary entropy)."""
    f = 0.0
    for i in range(tb.shape[0]):
        t = tb[i]
        f += lam[i] * t + kappa[i] * (_xlogx(t) + _xlogx(1.0 - t))
    for j in range(tl.shape[0]):
        f += rho_loc[j] * _xlogx(tl[j])
    return f


@nb.njit(**NUMBA_OPTS)
def _gradient_kernel(lam, kappa, rho_loc, tb, tl, gb, gl):
    """Gradient of F in the lifted coordinates (constants dropped), clamped logs."""
    for i in range(tb.shape[0]):
        t = tb[i]
        gb[i] = lam[i] + kappa[i] * (_safe_log(t) - _safe_log(1.0 - t))
    for j in range(tl.shape[0]):
        gl[j] = rho_loc[j] * _safe_log(tl[j])


@nb.njit(**NUMBA_OPTS)
def _check_negentropy_kernel(offset, tl, out):
    """out[c] = sum_S tau_c(S) ln tau_c(S)."""
    for c in range(offset.shape[0] - 1):
        a = 0.0
        for j in range(offset[c], offset[c + 1]):
            a += _xlogx(tl[j])
        out[c] = a


@nb.njit(**NUMBA_OPTS)
def _classify_kernel(offset, kind_if_hot, sl, vl, mode, hot_a, hot_b):
    """Per check: direction kind for the line search.

    ``kind_if_hot == 1`` (direction s - tau): mode _TO_ONE when s_c is one local
    codeword (``hot_a`` its index), else _GENERIC.
    ``kind_if_hot == 2`` (direction s - v): _PAIR when both are one codeword
    (``hot_a`` gains, ``hot_b`` loses), _NONE when they coincide, else _GENERIC.
    """
    for c in range(offset.shape[0] - 1):
        a = -1
        b = -1
        for j in range(offset[c], offset[c + 1]):
            if sl[j] > 1.0 - 1e-12:
                a = j
            if kind_if_hot == 2 and vl[j] > 1.0 - 1e-12:
                b = j
        if kind_if_hot == 1:
            mode[c] = _TO_ONE if a >= 0 else _GENERIC
        else:
            if a >= 0 and b >= 0:
                mode[c] = _NONE if a == b else _PAIR
            else:
                mode[c] = _GENERIC
        hot_a[c] = a
        hot_b[c] = b


@nb.njit(**NUMBA_OPTS)
def _line_kernel(lam, kappa, rho, offset, tb, tl, db, dl, mode, hot_a, hot_b, negent, gamma):
    """f(gamma) - f(0), f'(gamma), f''(gamma) along tau + gamma d.

    Bits always cost O(n). A check costs O(#local codewords) in _GENERIC mode;
    O(1) in _TO_ONE mode (d_c = e_S - tau_c, using negent[c] = sum tau ln tau),
    in _PAIR mode (d_c = e_a - e_b) and in _NONE mode (d_c = 0).
    """
    df = 0.0
    d1 = 0.0
    d2 = 0.0
    for i in range(tb.shape[0]):
        d = db[i]
        if d == 0.0:
            continue
        t0 = tb[i]
        t = t0 + gamma * d
        k = kappa[i]
        df += lam[i] * gamma * d
        if k != 0.0:
            df += k * (_dxlogx(t0, gamma * d) + _dxlogx(1.0 - t0, -gamma * d))
            d1 += k * d * (_safe_log(t) - _safe_log(1.0 - t))
            tt = t * (1.0 - t)
            d2 += k * d * d / (tt if tt > _TINY else _TINY)
        d1 += lam[i] * d
    for c in range(offset.shape[0] - 1):
        r = rho[c]
        if r == 0.0:
            continue
        md = mode[c]
        if md == _NONE:
            continue
        if md == _GENERIC:
            for j in range(offset[c], offset[c + 1]):
                d = dl[j]
                if d == 0.0:
                    continue
                t0 = tl[j]
                t = t0 + gamma * d
                df += r * _dxlogx(t0, gamma * d)
                d1 += r * d * _safe_log(t)
                d2 += r * d * d / (t if t > _TINY else _TINY)
        elif md == _TO_ONE:
            ts = tl[hot_a[c]]
            q = 1.0 - ts  # mass outside the target codeword
            if q <= 0.0:
                continue
            A = negent[c]
            B = _xlogx(ts)
            om = 1.0 - gamma
            t = om * ts + gamma
            # phi(g) = om (A - B) + om q ln(om) + t ln t,  t - ts = gamma q
            if om > 0.0:
                df += r * (-gamma * (A - B) + q * om * math.log1p(-gamma)
                           + _dxlogx(ts, gamma * q))
            else:
                df += r * (-(A - B) + _dxlogx(ts, q))
            d1 += r * (-(A - B) + q * (_safe_log(t) - _safe_log(om)))
            d2 += r * q * (q / (t if t > _TINY else _TINY) + 1.0 / (om if om > _TINY else _TINY))
        else:  # _PAIR
            ja = hot_a[c]
            jb = hot_b[c]
            ta0 = tl[ja]
            tb0 = tl[jb]
            ta = ta0 + gamma
            tbb = tb0 - gamma
            df += r * (_dxlogx(ta0, gamma) + _dxlogx(tb0, -gamma))
            d1 += r * (_safe_log(ta) - _safe_log(tbb))
            d2 += r * (1.0 / (ta if ta > _TINY else _TINY) + 1.0 / (tbb if tbb > _TINY else _TINY))
    return df, d1, d2


# ------------------------------------------------------------- the problem
class FWProblem:
    """Per-code data of the free energy: weights, layout, the uniform point.

    Parameters
    ----------
    code : ParityCheckCode
    rho : ndarray of shape (m,), float64
        Check weights (>= 0).
    max_check_degree : int
        Cap on check degrees (local-codeword enumeration).

    Attributes
    ----------
    lc : LocalCodewords
    rho, kappa : ndarray (m,), (n,) float64
    rho_loc : ndarray of shape (L,), float64
        ``rho`` of each local codeword's check.
    uniform_bits, uniform_local : ndarray (n,), (L,)
        The uniform point: every ``tau_c`` uniform, ``tau_i = 1/2``.
    """

    def __init__(self, code, rho, *, max_check_degree: int = DEFAULT_MAX_CHECK_DEGREE):
        self.code = code
        d1 = np.flatnonzero(code.check_degrees == 1)
        if d1.size:
            c = int(d1[0])
            i = int(code.edge_var[code.check_ptr[c]])
            raise InputError(
                f"Check {c} has degree 1 and forces bit {i} to 0; the local polytope then has no "
                "interior point. Remove the check (and fix the bit) before using fw."
            )
        self.lc = code.local_codewords(max_check_degree)
        self.n, self.m, self.L = code.n, code.m, self.lc.count
        self.rho = np.ascontiguousarray(rho, dtype=np.float64)
        self.kappa = 1.0 - np.bincount(code.edge_var, weights=self.rho[code.edge_check],
                                       minlength=code.n)
        self.rho_loc = np.ascontiguousarray(self.rho[self.lc.owner])
        self.offset = np.ascontiguousarray(self.lc.offset)
        counts = np.diff(self.offset).astype(np.float64)
        self.uniform_local = 1.0 / counts[self.lc.owner]
        self.uniform_bits = np.full(self.n, 0.5)
        self.uniform_bits[code.var_degrees == 0] = 0.5

    def entropy_bound(self) -> float:
        """Upper bound on ``H_rho(tau)`` over ``L`` (nats).

        ``sum_c rho_c ln(#local codewords of c) + sum_i max(kappa_i, 0) ln 2``:
        each check entropy is at most the log of its number of local codewords,
        each bit entropy at most ``ln 2`` (and >= 0, so bits with ``kappa_i < 0``
        add at most 0). Hence ``F(tau) >= LP* - entropy_bound`` on ``L`` for any
        ``rho >= 0``, convex or not (``LP*`` the LP-decoding optimum).
        """
        counts = np.diff(self.offset).astype(np.float64)
        return float(self.rho @ np.log(np.maximum(counts, 1.0))
                     + math.log(2.0) * np.maximum(self.kappa, 0.0).sum())

    def free_energy(self, lam, tb, tl) -> float:
        """``F(tau)`` for LLRs ``lam`` (n,) at ``(tb (n,), tl (L,))``."""
        return float(_free_energy_kernel(lam, self.kappa, self.rho_loc, tb, tl))

    def gradient(self, lam, tb, tl):
        """Gradient of ``F`` in the lifted coordinates: ``(gb (n,), gl (L,))``."""
        gb = np.empty(self.n)
        gl = np.empty(self.L)
        _gradient_kernel(lam, self.kappa, self.rho_loc, tb, tl, gb, gl)
        return gb, gl


def _fit_check_group(B, pats, Q, steps: int = 3):
    """Fit check beliefs to bit marginals by Newton steps of a multiplicative update.

    B : (k, 2**(d-1)) nonnegative beliefs of k checks (rows sum to 1); pats :
    (2**(d-1), d) patterns; Q : (k, d) target marginals. Each step adds
    ``B(S) sum_i c_i (S_i - m_i)`` with ``Cov c = Q - m`` (the covariance of the
    pattern bits under B), which keeps every row's sum and, to first order,
    matches the marginals; entries change in proportion to themselves, so tiny
    entries keep their relative accuracy (the FW gap is sensitive to it).
    Returns the fitted B (possibly with negative entries if Q is far away).
    """
    P = pats.astype(np.float64)
    for _ in range(steps):
        m = B @ P
        delta = Q - m
        if not np.any(np.abs(delta) > 1e-16):
            break
        C = np.einsum("ks,si,sj->kij", B, P, P) - m[:, :, None] * m[:, None, :]
        if not (np.all(np.isfinite(C)) and np.all(np.isfinite(delta))):
            break                   # degenerate beliefs: the caller checks the result
        c = np.einsum("kij,kj->ki", np.linalg.pinv(C, rcond=1e-10), delta)
        B = B + B * ((P[None, :, :] - m[:, None, :]) @ c[:, :, None])[:, :, 0]
    return B


def consistent_interior_point(code, lc, tau_bits, tau_local, *, theta_min: float = 0.0,
                              accept: float = 1e-10):
    """Turn approximate beliefs into a point of the local polytope with all entries > 0.

    Bit targets ``q`` are the given ``tau_bits`` (averaged over chains of
    degree-2 checks, which force equal marginals). Every other check of degree
    ``d >= 3`` is first fitted to ``q`` by a few Newton steps of a
    multiplicative update (:func:`_fit_check_group`; tiny entries keep their
    relative accuracy, which the Frank–Wolfe gap is sensitive to). Where that
    does not reach ``q`` to 1e-11 with positive entries (beliefs far from
    consistent), the check is corrected exactly by adding
    ``delta_i (P_i1 - P_i0)`` per bit, where ``P_ix`` is uniform over the
    local codewords with ``x_i = x``: this changes the check's marginal on bit
    ``i`` by ``delta_i`` and on no other bit; the result is then mixed with
    the uniform point by the smallest ``theta`` that keeps every entry
    positive.

    Parameters
    ----------
    code : ParityCheckCode
    lc : LocalCodewords
    tau_bits : ndarray of shape (n,), float
        Approximate ``P(x_i = 1)``.
    tau_local : ndarray of shape (L,), float
        Approximate check beliefs (each block summing to about 1).
    theta_min : float
        Least weight of the uniform point.
    accept : float
        Checks whose beliefs are positive and match ``q`` within ``accept``
        (converged message passing: about 1e-12) are kept unchanged; the point
        is then in ``L`` up to that rounding, which moves ``<grad F, tau>`` by
        at most ``accept`` times the largest gradient entry (about 700 nats).

    Returns
    -------
    tb : ndarray of shape (n,), float64
    tl : ndarray of shape (L,), float64
    theta : float
        Weight given to the uniform point.
    """
    n = code.n
    q = np.clip(np.nan_to_num(np.asarray(tau_bits, dtype=np.float64), nan=0.5), 0.0, 1.0)
    b = np.clip(np.nan_to_num(np.asarray(tau_local, dtype=np.float64), nan=0.0), 0.0, None)
    deg = code.check_degrees
    two = np.flatnonzero(deg == 2)
    if two.size:  # chains of degree-2 checks: equal marginals, take the mean
        import scipy.sparse as sp
        from scipy.sparse.csgraph import connected_components

        a = code.edge_var[code.check_ptr[two]]
        bb = code.edge_var[code.check_ptr[two] + 1]
        g = sp.coo_matrix((np.ones(two.size), (a, bb)), shape=(n, n))
        ncomp, lab = connected_components(g, directed=False)
        mean = np.bincount(lab, weights=q, minlength=ncomp) / np.bincount(lab, minlength=ncomp)
        q = mean[lab]
    out = np.empty(lc.count)
    theta = float(theta_min)
    corrected = []
    for d in np.unique(deg):
        d = int(d)
        checks = np.flatnonzero(deg == d)
        size = 2 ** max(d - 1, 0)
        idx = lc.offset[checks][:, None] + np.arange(size)[None, :]
        if d == 0:
            out[idx] = 1.0
            continue
        pats = lc.patterns(int(checks[0]), d)
        bits_c = code.edge_var[code.check_ptr[checks][:, None] + np.arange(d)[None, :]]
        Q = q[bits_c]
        if d == 2:
            R = np.where(pats[None, :, 0] == 1, Q[:, :1], 1.0 - Q[:, :1])
        else:
            B = b[idx].copy()
            s = B.sum(axis=1, keepdims=True)
            B = np.where(s > 0, B / np.where(s > 0, s, 1.0), 1.0 / size)
            P = pats.astype(np.float64)
            # beliefs of converged message passing are consistent to rounding: keep
            # them as they are (refitting would perturb tiny entries, see above)
            keep = (np.max(np.abs(B @ P - Q), axis=1) <= accept) & np.all(B > 0, axis=1)
            if not np.all(keep):
                B[~keep] = _fit_check_group(B[~keep], pats, Q[~keep])
            resid = np.max(np.abs(B @ P - Q), axis=1)
            bad = (resid > 1e-11) | np.any(B <= 0, axis=1)
            R = B
            if np.any(bad):
                delta = Q[bad] - B[bad] @ P
                R[bad] = B[bad] + (delta @ (2.0 * P - 1.0).T) / 2.0 ** (d - 2)
        corrected.append((idx, R, d))
        rmin = float(R.min())
        if rmin < 0:  # need theta/2^d + (1 - theta) r >= 0 for every entry
            theta = max(theta, -rmin / (1.0 / 2.0**d - rmin))
    theta = min(theta, 1.0)
    for idx, R, _d in corrected:
        out[idx] = (1.0 - theta) * R + theta / R.shape[1]
    tb = (1.0 - theta) * q + theta * 0.5
    return np.ascontiguousarray(tb), np.maximum(out, 0.0), theta


# ------------------------------------------------------------ line search
def _line_search(prob: FWProblem, lam, tb, tl, db, dl, mode, hot_a, hot_b, negent,
                 gmax: float, slope0: float, cap_full: bool):
    """Exact line search on [0, gmax] that never increases F.

    Returns ``(gamma, delta_f)`` with ``delta_f = f(gamma) - f(0) <= 0``.
    """
    rho, off = prob.rho, prob.offset

    def ev(g):
        return _line_kernel(lam, prob.kappa, rho, off, tb, tl, db, dl, mode, hot_a, hot_b,
                            negent, g)

    if not slope0 < 0.0 or gmax <= 0.0:
        return 0.0, 0.0
    b = gmax * _FULL_STEP if cap_full else gmax
    fb, db1, _ = ev(b)
    best_g, best_f = 0.0, 0.0
    if fb <= 0.0:
        best_g, best_f = b, fb
    if db1 <= 0.0:
        # end derivative <= 0: for convex F the end point is optimal; for a
        # non-convex F it is accepted only if it lowers F (checked above)
        if best_g > 0.0:
            return best_g, best_f
        # F rose at the end: look for a sign change of f' by halving
        hi = b
        found = False
        for _ in range(80):
            hi *= 0.5
            fh, dh, _ = ev(hi)
            if fh <= best_f:
                best_g, best_f = hi, fh
            if dh > 0.0:
                found = True
                break
            if best_g > 0.0 and dh <= 0.0:
                break
        if not found:
            return best_g, best_f
        b, db1 = hi, dh
    # safeguarded Newton with bisection on f' over [lo, hi], f'(lo) < 0 < f'(hi)
    lo, hi = 0.0, b
    x = 0.5 * b
    # Newton guess from the origin using f''(0)
    _, _, s2 = ev(0.0)
    if s2 > 0.0:
        x = -slope0 / s2
        if not (lo < x < hi):
            x = 0.5 * (lo + hi)
    tol = 1e-9 * abs(slope0)
    for _ in range(100):
        fx, d1, d2 = ev(x)
        if fx <= best_f:
            best_g, best_f = x, fx
        if abs(d1) <= tol:
            break
        if d1 < 0.0:
            lo = x
        else:
            hi = x
        if hi - lo <= 4e-16 * hi:
            break
        xn = x - d1 / d2 if d2 > 0.0 else -1.0
        if not (lo < xn < hi) or (d2 <= 0.0):
            xn = 0.5 * (lo + hi)
        x = xn
    # final guard: never increase F
    if best_f > 0.0 or best_g <= 0.0:
        g = b
        for _ in range(200):
            g *= 0.5
            fg, _, _ = ev(g)
            if fg <= 0.0:
                return g, fg
        return 0.0, 0.0
    return best_g, best_f


# ---------------------------------------------------------- active set
class _ActiveSet:
    """Atoms (points of L, start point included) with convex weights."""

    def __init__(self, dim: int, first: np.ndarray, cap: int = 64):
        self.A = np.empty((cap, dim))
        self.A[0] = first
        self.w = np.zeros(cap)
        self.w[0] = 1.0
        self.K = 1
        self.keys: dict[bytes, int] = {}
        self.alive = np.zeros(cap, dtype=bool)
        self.alive[0] = True

    @staticmethod
    def key(v: np.ndarray) -> bytes:
        return np.round(v, 9).tobytes()

    def index_of(self, v: np.ndarray) -> int:
        k = self.key(v)
        j = self.keys.get(k, -1)
        if j >= 0 and self.alive[j]:
            return j
        if j >= 0:  # revive the slot
            self.A[j] = v
            self.alive[j] = True
            self.w[j] = 0.0
            return j
        if self.K == self.A.shape[0]:
            cap = 2 * self.K
            A = np.empty((cap, self.A.shape[1]))
            A[: self.K] = self.A[: self.K]
            self.A = A
            self.w = np.concatenate([self.w, np.zeros(cap - self.K)])
            self.alive = np.concatenate([self.alive, np.zeros(cap - self.K, dtype=bool)])
        j = self.K
        self.K += 1
        self.A[j] = v
        self.w[j] = 0.0
        self.alive[j] = True
        self.keys[k] = j
        return j

    def away_atom(self, grad: np.ndarray) -> int:
        idx = np.flatnonzero(self.alive[: self.K] & (self.w[: self.K] > 0))
        scores = self.A[idx] @ grad
        return int(idx[np.argmax(scores)])

    def drop(self, j: int) -> None:
        self.w[j] = 0.0
        self.alive[j] = False

    def point(self) -> np.ndarray:
        idx = np.flatnonzero(self.alive[: self.K])
        w = self.w[idx]
        return (w / w.sum()) @ self.A[idx]

    def size(self) -> int:
        return int(np.count_nonzero(self.alive[: self.K] & (self.w[: self.K] > 0)))


# ------------------------------------------------------------- results
@dataclass
class FWFrameResult:
    """Outcome of one frame.

    Attributes
    ----------
    tau_bits : ndarray of shape (n,), float64
        ``P(x_i = 1)`` at the final iterate.
    tau_local : ndarray of shape (L,), float64
    free_energy, gap, relative_gap : float
        ``F(tau)``, the FW duality gap, and ``gap / max(1, |F|)``.
    iterations : int
    oracle_calls : int
    oracle_seconds, seconds : float
    status : str
        ``"converged"`` (gap tolerance reached, convex F), ``"stationary"``
        (tolerance reached, F not known to be convex: a stationary point only),
        ``"vertex"`` (F not known to be convex, started away from every vertex
        and ended at an integral one: a Bethe trap, not marginals),
        ``"max_iter"``, ``"time_limit"``, ``"stalled"`` (line search made no
        progress), ``"oracle_failed"``, or ``"low_temperature"`` (LLRs beyond
        ``LOW_TEMPERATURE_LLR``: the LP-decoding vertex, within ``certified_gap``
        of the optimum; its hard decisions are the LP decoder's, a
        pseudo-codeword when fractional).
    eps : float
        Final contraction (variant "contracted").
    certified_gap : float or None
        Lagrangian certificate ``<grad F(tau), tau> - D(mu) >= F(tau) - F*``
        (convex F), when an oracle or the final dual ascent provided one.
    trace : dict of str to ndarray, or None
        Per iteration: ``objective`` and ``gap`` at the point the oracle was
        called at, ``step``, ``oracle_seconds``, ``time`` (seconds since the
        frame started, when the gap was known), ``certified_gap`` (NaN without
        an oracle bound), ``eps`` and ``kind`` (0 FW step, 1 away step,
        2 pairwise step, 3 drop step).
    """

    tau_bits: np.ndarray
    tau_local: np.ndarray
    free_energy: float
    gap: float
    relative_gap: float
    iterations: int
    oracle_calls: int
    oracle_seconds: float
    seconds: float
    status: str
    eps: float = 0.0
    trace: dict | None = field(default=None)
    certified_gap: float | None = None


def _relative(gap: float, f: float) -> float:
    return gap / max(1.0, abs(f))


def _toward_vertex(prob, sb, sl, tb, tl, mode, hot_a, hot_b, negent):
    """Frank-Wolfe direction ``s - tau`` with the line-search shortcut tables filled.

    Classifies each check's direction (one local codeword or generic) into
    ``mode``/``hot_a``/``hot_b`` and stores each check's negative entropy in ``negent``.
    """
    _classify_kernel(prob.offset, 1, sl, sl, mode, hot_a, hot_b)
    _check_negentropy_kernel(prob.offset, tl, negent)
    return sb - tb, sl - tl


def solve_frame(prob: FWProblem, oracle, lam: np.ndarray, *, variant: str = "vanilla",
                start=None, gap_tol: float = 1e-6, abs_gap_tol: float = 0.0,
                max_iter: int = 1000, time_limit: float | None = None, eps0: float = 0.1,
                eps_min: float = 0.0, convex: bool = True, trace: bool = False,
                oracle_time_limit: float | None = None, dual=None,
                cert_sweeps: int = 200) -> FWFrameResult:
    """Minimise F for one frame with Frank–Wolfe.

    Parameters
    ----------
    prob : FWProblem
    oracle : object
        ``solve(bit_costs (n,), local_costs (L,), warm=True, time_limit=None)``
        returning an object with ``bits``, ``local``, ``optimal`` (as
        :class:`~ldpcmarg.decoders.lp.LocalPolytopeLP`).
    lam : ndarray of shape (n,), float64
        Channel LLRs.
    variant : {"vanilla", "away", "pairwise", "contracted"}
    start : tuple (tb, tl), optional
        A strictly interior point of L (default: the uniform point).
    gap_tol, abs_gap_tol : float
        Stop when ``gap <= abs_gap_tol`` or ``gap <= gap_tol * max(1, |F|)``.
    max_iter : int
        Oracle calls allowed.
    time_limit : float, optional
        Seconds for this frame.
    eps0, eps_min : float
        Contraction start and floor (variant ``"contracted"``).
    convex : bool
        Whether F is known to be convex (decides "converged" vs "stationary").
    trace : bool
        Record the per-iteration trace.
    oracle_time_limit : float, optional
        Seconds per oracle call.
    dual : DualAscent, optional
        With an exact (HiGHS) oracle: compute the Lagrangian certificate of
        the final point with these multipliers (kept across frames).
    cert_sweeps : int
        Dual-ascent sweeps for that certificate.

    Notes
    -----
    With an oracle that reports a Lagrangian ``bound`` (the dual-candidate
    oracle of :mod:`ldpcmarg.decoders.lp_dual`), the stopping test uses the
    certified gap ``<grad F, tau> - bound`` and passes the current point and
    the target gap to the oracle, which may then certify the point without
    building a vertex.

    Returns
    -------
    FWFrameResult
    """
    t_start = time.perf_counter()
    n, L = prob.n, prob.L
    if start is None:
        tb, tl = prob.uniform_bits.copy(), prob.uniform_local.copy()
    else:
        tb, tl = (np.array(start[0], dtype=np.float64), np.array(start[1], dtype=np.float64))
    ub, ul = prob.uniform_bits, prob.uniform_local
    start_spread = float(np.max(np.minimum(tb, 1.0 - tb))) if n else 0.0
    active = None
    if variant in ("away", "pairwise"):
        active = _ActiveSet(n + L, np.concatenate([tb, tl]))
    eps = float(eps0) if variant == "contracted" else 0.0
    mode = np.empty(prob.m, dtype=np.int64)
    hot_a = np.empty(prob.m, dtype=np.int64)
    hot_b = np.empty(prob.m, dtype=np.int64)
    negent = np.zeros(prob.m)
    F = prob.free_energy(lam, tb, tl)
    gap = math.inf
    it = 0
    calls = 0
    o_sec = 0.0
    status = "max_iter"
    tr = {"objective": [], "gap": [], "step": [], "oracle_seconds": [], "kind": [], "eps": [],
          "time": [], "certified_gap": []}
    stall = 0
    cert = math.inf
    prev = None  # last point with a valid gap: (tb, tl, F, gap, cert)
    dual_oracle = hasattr(oracle, "dual") and hasattr(oracle, "counts")
    while True:
        gb, gl = prob.gradient(lam, tb, tl)
        elapsed = time.perf_counter() - t_start
        lim = oracle_time_limit
        if time_limit is not None:
            rem = max(time_limit - elapsed, 1e-3)
            lim = rem if lim is None else min(lim, rem)
        target = max(abs_gap_tol, gap_tol * max(1.0, abs(F)))
        t0 = time.perf_counter()
        if dual_oracle:
            sol = oracle.solve(gb, gl, warm=True, time_limit=lim, tau=(tb, tl),
                               gap_target=target)
        else:
            sol = oracle.solve(gb, gl, warm=True, time_limit=lim)
        dt = time.perf_counter() - t0
        o_sec += dt
        calls += 1
        it += 1
        if not getattr(sol, "optimal", True) or not np.all(np.isfinite(sol.bits)):
            status = "time_limit" if getattr(sol, "status", "") == "time_limit" else "oracle_failed"
            if prev is not None:  # report the last point whose gap is known
                tb, tl, F, gap, cert = prev
            break
        sb = np.clip(np.asarray(sol.bits, dtype=np.float64), 0.0, 1.0)
        sl = np.clip(np.asarray(sol.local, dtype=np.float64), 0.0, 1.0)
        # snap round-off of the LP vertex
        sb[sb < 1e-9] = 0.0
        sb[sb > 1 - 1e-9] = 1.0
        sl[sl < 1e-9] = 0.0
        sl[sl > 1 - 1e-9] = 1.0
        gtau = float(gb @ tb + gl @ tl)
        gs = float(gb @ sb + gl @ sl)
        gap = max(gtau - gs, 0.0)
        bound = float(getattr(sol, "bound", math.nan))
        cert = max(gtau - bound, 0.0) if math.isfinite(bound) else math.inf
        if getattr(sol, "status", "") == "certified-point":
            gap = cert  # the oracle returned tau itself: only the bound is known
        stop_gap = cert if math.isfinite(cert) else gap
        prev = (tb, tl, F, gap, cert)
        if trace:
            tr["objective"].append(F)
            tr["gap"].append(gap)
            tr["oracle_seconds"].append(dt)
            tr["eps"].append(eps)
            tr["time"].append(time.perf_counter() - t_start)
            tr["certified_gap"].append(cert if math.isfinite(cert) else np.nan)
        if stop_gap <= abs_gap_tol or _relative(stop_gap, F) <= gap_tol:
            status = "converged" if convex else "stationary"
            if trace:
                tr["step"].append(0.0)
                tr["kind"].append(0)
            break
        if it >= max_iter or (time_limit is not None
                              and time.perf_counter() - t_start >= time_limit):
            status = "max_iter" if it >= max_iter else "time_limit"
            if trace:
                tr["step"].append(0.0)
                tr["kind"].append(0)
            break
        kind = 0
        if variant == "contracted":
            gu = float(gb @ ub + gl @ ul)
            B = gtau - gu  # <grad, tau - u>
            if B < 0.0 and eps * (-B) > 0.25 * gap:
                eps = max(min(gap / (-4.0 * B), 0.5 * eps), eps_min)
            tb_t = (1.0 - eps) * sb + eps * ub
            tl_t = (1.0 - eps) * sl + eps * ul
            db, dl = tb_t - tb, tl_t - tl
            mode[:] = _GENERIC
            gmax, cap = 1.0, eps == 0.0
            slope = float(gb @ db + gl @ dl)
        elif variant == "vanilla":
            db, dl = _toward_vertex(prob, sb, sl, tb, tl, mode, hot_a, hot_b, negent)
            gmax, cap = 1.0, True
            slope = -gap
        else:
            grad = np.concatenate([gb, gl])
            jv = active.away_atom(grad)
            v = active.A[jv]
            gaway = float(grad @ v) - gtau  # <grad, v - tau>
            vb, vl = v[:n], v[n:]
            if variant == "away" and gap >= gaway:
                kind = 0
                db, dl = _toward_vertex(prob, sb, sl, tb, tl, mode, hot_a, hot_b, negent)
                gmax, cap = 1.0, False
                slope = -gap
            elif variant == "away":
                kind = 1
                wv = active.w[jv]
                if wv >= 1.0 - 1e-15:
                    kind = 0
                    db, dl = _toward_vertex(prob, sb, sl, tb, tl, mode, hot_a, hot_b, negent)
                    gmax, cap = 1.0, False
                    slope = -gap
                else:
                    db, dl = tb - vb, tl - vl
                    mode[:] = _GENERIC
                    gmax, cap = wv / (1.0 - wv), False
                    slope = -gaway
            elif active.keys.get(active.key(np.concatenate([sb, sl])), -1) == jv:
                # the away atom is the oracle's vertex (ties): take a plain FW step
                kind = 0
                db, dl = _toward_vertex(prob, sb, sl, tb, tl, mode, hot_a, hot_b, negent)
                gmax, cap = 1.0, False
                slope = -gap
            else:  # pairwise
                kind = 2
                db, dl = sb - vb, sl - vl
                _classify_kernel(prob.offset, 2, sl, vl, mode, hot_a, hot_b)
                gmax, cap = float(active.w[jv]), False
                slope = -(gap + gaway)
        db = np.ascontiguousarray(db)
        dl = np.ascontiguousarray(dl)
        gamma, dF = _line_search(prob, lam, tb, tl, db, dl, mode, hot_a, hot_b, negent,
                                 gmax, slope, cap)
        if gamma <= 0.0:
            stall += 1
            if trace:
                tr["step"].append(0.0)
                tr["kind"].append(kind)
            if stall >= 3:
                status = "stalled"
                break
            continue
        stall = 0
        tb = tb + gamma * db
        tl = tl + gamma * dl
        np.clip(tb, 0.0, 1.0, out=tb)
        np.maximum(tl, 0.0, out=tl)
        if active is not None:
            js = -1
            if kind in (0, 2):
                js = active.index_of(np.concatenate([sb, sl]))
            K = active.K
            w = active.w
            if kind == 0:
                w[:K] *= (1.0 - gamma)
                w[js] += gamma
                if gamma >= 1.0 - 1e-15:
                    for j in range(K):
                        if j != js:
                            active.drop(j)
            elif kind == 1:
                w[:K] *= (1.0 + gamma)
                w[jv] -= gamma
                if gamma >= gmax * (1 - 1e-12):
                    active.drop(jv)
                    kind = 3
            else:
                w[js] += gamma
                w[jv] -= gamma
                if gamma >= gmax * (1 - 1e-12):
                    active.drop(jv)
                    kind = 3
            if kind == 3:
                x = active.point()
                tb, tl = np.clip(x[:n], 0, 1), np.maximum(x[n:], 0.0)
        F = prob.free_energy(lam, tb, tl)
        if trace:
            tr["step"].append(gamma)
            tr["kind"].append(kind)
    if not convex and start_spread >= 1e-3 and np.max(np.minimum(tb, 1.0 - tb)) < 1e-6:
        # started away from any vertex and ended on one: a Bethe trap
        status = "vertex"
    F = prob.free_energy(lam, tb, tl)
    if dual is not None and not math.isfinite(cert):
        # Lagrangian certificate at the final point (DESIGN.md §5a): any multipliers
        # give a valid lower bound on the oracle LP, so gtau - bound >= F - F* (convex F)
        gb, gl = prob.gradient(lam, tb, tl)
        gtau = float(gb @ tb + gl @ tl)
        dual.flatten(gl)
        res = dual.run(gb, gl, max_sweeps=cert_sweeps,
                       target=gtau - max(abs_gap_tol, gap_tol * max(1.0, abs(F))))
        cert = max(gtau - float(res.bound), 0.0)
    seconds = time.perf_counter() - t_start
    out_trace = None
    if trace:
        out_trace = {k: np.asarray(v, dtype=np.float64 if k != "kind" else np.int64)
                     for k, v in tr.items()}
    # no oracle answer at all (e.g. the first call hit the time cap): the gap is
    # unknown, reported as +inf (never a huge finite stand-in), with the status
    # "time_limit" or "oracle_failed" set above
    gap_out = float(gap) if math.isfinite(gap) else math.inf
    return FWFrameResult(tau_bits=tb, tau_local=tl, free_energy=F, gap=gap_out,
                         relative_gap=_relative(gap_out, F), iterations=it, oracle_calls=calls,
                         oracle_seconds=o_sec, seconds=seconds, status=status, eps=eps,
                         trace=out_trace,
                         certified_gap=float(cert) if math.isfinite(cert) else None)


# ------------------------------------------------------------- the decoder
class FrankWolfeDecoder(Decoder):
    """Bitwise marginals by Frank–Wolfe on the Bethe / tree-reweighted free energy.

    Options
    -------
    entropy : "bethe" | "trw" | float | ndarray of shape (m,)
        Check weights ``rho``: Bethe (all 1), sampled-hyperforest TRW weights
        (convex ``F``, certified ``ln Z`` bound), one number for every check, or
        a user vector (``info["convex"]`` says whether the sufficient
        concavity condition of Heskes 2006 holds).
    oracle : {"lp", "ml", "dual"}
        ``"lp"``: local polytope, HiGHS hot-started (default). ``"ml"``: the
        MIP over codewords (the feasible set becomes the codeword polytope;
        small codes). ``"dual"``: the dual-candidate oracle of
        :mod:`ldpcmarg.decoders.lp_dual` with HiGHS as exact fallback.
    variant : {"vanilla", "away", "pairwise", "contracted"}
        Default "vanilla", measured in ``experiments/fw_convergence.py``: from a
        converged warm start every variant certifies in one oracle call; from
        the uniform point or an unconverged start none reaches a relative gap
        of 1e-4 within 300 calls on an n = 24 code, and vanilla ends lowest
        (median 5e-3 to 2e-2, contracted 6e-3 to 4e-2; away and pairwise shed
        the start atom, then crawl along the boundary where the entropy
        gradient is unbounded, and end at 5e-2 to 1e2).
    gap_tol : float
        Relative duality-gap tolerance: stop when ``gap <= gap_tol * max(1, |F|)``.
    abs_gap_tol : float
        Absolute gap tolerance (0: off).
    max_iter : int
        Oracle calls per frame (default 1000).
    time_limit : float
        Seconds per frame, warm start included (default
        :data:`DEFAULT_FW_TIME_LIMIT` = 5 s, so that a frame where the solver
        crawls cannot hold a sweep for ever).
    eps0, eps_min : float
        Start and floor of the contraction (variant "contracted"); from a warm
        start the contraction starts at ``min(eps0, 1e-3)``.
    warm_start : {"auto", "uniform", "reweighted-sum-product"}
        Start point: the uniform point, or the beliefs of reweighted
        sum-product with the same ``rho`` made consistent and strictly
        interior (:func:`consistent_interior_point`). ``"auto"`` (default):
        reweighted sum-product, measured in ``experiments/fw_convergence.py``
        to save orders of magnitude of oracle calls; with Bethe weights the
        uniform start also falls into Bethe traps. With ``oracle="ml"`` the
        default start is uniform (message-passing beliefs need not be codeword
        marginals).
    warm_iter : int
        Iteration cap of the warm-start message passing (damping 0.5, stops when
        no message moves by more than 1e-12). Default 5000.
    certificate : {"lagrangian", "none"}
        ``"lagrangian"`` (default): certify the final point with the
        Lagrangian bound of :mod:`ldpcmarg.decoders.lp_dual` (dual ascent,
        multipliers kept across frames), giving ``info["certified_gap"]``,
        which does not rely on HiGHS tolerances. With ``oracle="dual"`` the
        certificate comes with every oracle call and also drives the stopping test.
    cert_sweeps : int
        Dual-ascent sweeps for the final certificate (default 200).
    trace : bool
        Put a per-iteration trace of every frame in ``info["trace"]`` (a list).
    trw_samples, trw_seed : int
        Hyperforest sampling for ``entropy="trw"``.
    max_check_degree : int

    route : {"auto", "per-frame"}
        ``"auto"`` (default): when ``F`` is convex (TRW or a user ``rho`` with
        guaranteed concavity), the warm start is reweighted sum-product, the
        certificate is on, no trace is asked for and every check has degree
        >= 3, all frames first go through the batched certified route
        (:meth:`_solve_batched`: numba kernels parallel over frames); frames it
        does not certify within its sweep cap fall back to the per-frame solver.
        Batched frames report ``oracle_calls = 0``, ``duality_gap =
        certified_gap`` and the batch's wall time divided by its frames as
        ``seconds``; ``info["route"]`` says which route each frame took.
        ``"per-frame"``: always the per-frame solver.

    Frames with ``max |LLR| > LOW_TEMPERATURE_LLR`` (300) are solved at zero
    temperature (:meth:`solve_low_temperature`): the LP-decoding vertex, status
    ``"low_temperature"``, with a certified gap from the entropy bound.

    Outputs
    -------
    posterior_llr : (F, n) float64
        ``ln((1 - tau_i) / tau_i)`` (finite: logs are floored at 1e-300).
    bits : (F, n) uint8
        ``tau_i > 1/2``.
    iterations : (F,) int64
        Oracle calls.
    info : dict
        ``duality_gap``, ``relative_gap``, ``free_energy`` (F,) float64;
        ``status`` (F,) str (see :class:`FWFrameResult`); ``capped`` (F,) bool
        (the frame stopped on ``time_limit``, default
        :data:`DEFAULT_FW_TIME_LIMIT` s, or ``max_iter``); ``convex`` (F,) bool;
        ``oracle_calls`` (F,), ``oracle_seconds``, ``seconds`` (F,);
        ``certified_gap`` (F,) float64 when a certificate is on (``>= F - F*``
        for convex F); ``log_partition_bound`` (F,) float64 only with
        ``entropy="trw"``: ``ln Z <= certified_gap - F(tau)`` (or the FW gap
        when the certificate is off; then HiGHS tolerances apply);
        ``trace`` (list of dicts) on request.
    """

    name = "fw"
    description = "Frank-Wolfe bitwise marginals (Bethe/TRW free energy) with an LP oracle."
    params = {
        "entropy": Param("any", "bethe",
                         doc="'bethe', 'trw', a number, or an array of check weights (m,)"),
        "oracle": Param("choice", "dual", choices=_ORACLES,
                        doc="linear-minimisation oracle: local-polytope LP, MIP, dual candidate"),
        "variant": Param("choice", "vanilla", choices=_VARIANTS,
                         doc="Frank-Wolfe variant"),
        "gap_tol": Param("float", 1e-6, low=0.0,
                         doc="relative duality-gap tolerance gap / max(1, |F|)"),
        "abs_gap_tol": Param("float", 0.0, low=0.0, doc="absolute duality-gap tolerance (nats)"),
        "max_iter": Param("int", 1000, low=1, doc="oracle calls per frame"),
        "time_limit": Param("float", DEFAULT_FW_TIME_LIMIT, low=0.0, low_open=True,
                            doc="seconds per frame, warm start included (none: no cap; a "
                                "frame that hits it or max_iter is reported in "
                                "info['capped'])"),
        "eps0": Param("float", 0.1, low=0.0, high=1.0, high_open=True,
                      doc="initial contraction towards the uniform point (variant 'contracted')"),
        "eps_min": Param("float", 0.0, low=0.0, high=1.0, high_open=True,
                         doc="floor of the contraction (variant 'contracted')"),
        "warm_start": Param("choice", "auto", choices=_WARM,
                            doc="start point: uniform or reweighted sum-product beliefs"),
        "warm_iter": Param("int", 5000, low=1,
                           doc="iteration cap of the reweighted sum-product warm start"),
        "certificate": Param("choice", "lagrangian", choices=("none", "lagrangian"),
                             doc="certify the final point (info['certified_gap'])"),
        "cert_sweeps": Param("int", 200, low=0,
                             doc="dual-ascent sweeps for the Lagrangian certificate"),
        "trace": Param("bool", False, doc="record a per-iteration trace in info['trace']"),
        "trw_samples": Param("int", 200, low=1, doc="sampled hyperforests for entropy='trw'"),
        "trw_seed": Param("int", 0, low=0, doc="seed of the hyperforest sampler"),
        "max_check_degree": Param("int", DEFAULT_MAX_CHECK_DEGREE, low=1,
                                  doc="refuse checks of larger degree"),
        "route": Param("choice", "auto", choices=("auto", "per-frame"),
                       doc="auto: batched certified route for convex F, per-frame fallback"),
    }

    def _setup(self) -> None:
        from ..code.hyperforest import check_concavity, sample_hyperforests

        ent = self.options["entropy"]
        m = self.code.m
        alpha = None
        self.entropy_kind = "user"
        if isinstance(ent, str):
            key = ent.strip().lower()
            if key == "bethe":
                rho = np.ones(m)
                self.entropy_kind = "bethe"
            elif key == "trw":
                hs = sample_hyperforests(self.code, num_samples=self.options["trw_samples"],
                                         seed=self.options["trw_seed"])
                rho, alpha = hs.rho, hs.alpha
                self.entropy_kind = "trw"
            else:
                try:
                    rho = np.full(m, float(key))
                except ValueError:
                    raise InputError(
                        f"The 'entropy' option of fw must be 'bethe', 'trw', a number or an "
                        f"array of shape ({m},); got {ent!r}."
                    ) from None
        elif isinstance(ent, bool):
            raise InputError(f"The 'entropy' option of fw must not be a boolean; got {ent!r}.")
        elif np.isscalar(ent):
            rho = np.full(m, float(ent))
        else:
            rho = np.asarray(ent, dtype=np.float64)
        if rho.shape != (m,) or not np.all(np.isfinite(rho)) or np.any(rho < 0):
            raise InputError(
                f"The 'entropy' option of fw needs {m} finite check weights >= 0; got "
                f"shape {np.shape(rho)}."
            )
        self.rho = np.ascontiguousarray(rho, dtype=np.float64)
        self.concavity = check_concavity(self.code, self.rho, alpha=alpha)
        self.convex = bool(self.concavity.guaranteed)
        self._prob = FWProblem(self.code, self.rho,
                               max_check_degree=self.options["max_check_degree"])
        ws = self.options["warm_start"]
        if ws == "auto":
            # the MIP oracle optimises over codeword marginals: the message-passing
            # beliefs (a point of L) would keep the iterate outside that polytope
            ws = "uniform" if self.options["oracle"] == "ml" else "reweighted-sum-product"
        self.start_kind = ws
        self._oracle = None
        self._mp = None
        self._dual = None

    # HiGHS objects do not pickle: ship the options, rebuild on the other side
    def __getstate__(self):
        state = self.__dict__.copy()
        state["_oracle"] = None
        state["_mp"] = None
        state["_dual"] = None
        state["_lp_zero_t"] = None
        state["_batch"] = None
        return state

    def _get_oracle(self):
        if self._oracle is None:
            kind = self.options["oracle"]
            deg = self.options["max_check_degree"]
            if kind in ("lp", "ml"):
                from .lp import LocalPolytopeLP

                self._oracle = LocalPolytopeLP(self.code, max_check_degree=deg,
                                               integral_bits=(kind == "ml"))
            else:
                try:
                    from .lp_dual import DualCandidateOracle
                except ImportError as exc:
                    raise InputError("oracle='dual' is not available in this build.") from exc
                self._oracle = DualCandidateOracle(self.code, lc=self._prob.lc)
        return self._oracle

    def _get_dual(self):
        if self.options["certificate"] != "lagrangian" or self.options["oracle"] == "dual":
            return None
        if self._dual is None:
            from .lp_dual import DualAscent

            self._dual = DualAscent(self.code, self._prob.lc)
        return self._dual

    def _start(self, lam):
        if self.start_kind == "uniform":
            return None
        if self._mp is None:
            from .message_passing import ReweightedSumProductDecoder

            self._mp = ReweightedSumProductDecoder(self.code, rho=self.rho, damping=0.5)
        tb, tl = self._mp.beliefs(lam, max_iter=self.options["warm_iter"], tol=1e-12)
        try:
            tb, tl, _ = consistent_interior_point(self.code, self._prob.lc, tb, tl)
        except np.linalg.LinAlgError:
            return None
        if not (np.all(np.isfinite(tb)) and np.all(np.isfinite(tl))):
            return None             # beliefs too close to 0/1 to repair: uniform start
        return tb, tl

    def _batched_route_ok(self) -> bool:
        o = self.options
        return (o["route"] != "per-frame" and self.convex and o["oracle"] != "ml"
                and self.start_kind == "reweighted-sum-product"
                and o["certificate"] == "lagrangian" and not o["trace"]
                and self.code.m > 0 and int(self.code.check_degrees.min()) >= 3)

    def _solve_batched(self, llr) -> list:
        """The batched certified route (``route="auto"``, convex F) on all frames at once.

        Returns one :class:`FWFrameResult` per frame certified by
        :class:`ldpcmarg.decoders.certified.CertifiedTRW` (Anderson-accelerated
        layered reweighted sum-product, peeled projection onto ``L``, entropic
        Lagrangian certificate with multipliers from the messages, checked every
        ``check_every`` sweeps), ``None`` for frames left to the per-frame path
        (not certified within the sweep cap, or low-temperature frames). The
        batch's wall time per phase is kept in ``self.last_phase_seconds``.
        """
        F = llr.shape[0]
        out: list = [None] * F
        self.last_phase_seconds = {"warm_start": 0.0, "certificate": 0.0, "polish": 0.0}
        if not self._batched_route_ok() or F == 0:
            return out
        low = np.max(np.abs(llr), axis=1) > LOW_TEMPERATURE_LLR
        idx = np.flatnonzero(~low)
        if idx.size == 0:
            return out
        if getattr(self, "_batch", None) is None:
            from .certified import CertifiedTRW

            self._batch = CertifiedTRW(self.code, self.rho, lc=self._prob.lc, **_BATCHED_SETTINGS,
                                       max_iter=min(self.options["warm_iter"], 2000))
        o = self.options
        t0 = time.perf_counter()
        res = self._batch.run(llr[idx], gap_tol=o["gap_tol"], abs_gap_tol=o["abs_gap_tol"])
        per_frame = (time.perf_counter() - t0) / idx.size
        self.last_phase_seconds = dict(res.seconds)
        for k, f in enumerate(idx):
            if not res.certified[k]:
                continue
            gap = float(res.certified_gap[k])
            fv = float(res.free_energy[k])
            out[f] = FWFrameResult(tau_bits=res.tau_bits[k], tau_local=res.tau_local[k],
                                   free_energy=fv, gap=gap, relative_gap=_relative(gap, fv),
                                   iterations=0, oracle_calls=0, oracle_seconds=0.0,
                                   seconds=per_frame, status="converged", certified_gap=gap)
        return out

    def solve_low_temperature(self, llr_row) -> FWFrameResult:
        """Zero-temperature solve of one frame: the LP-decoding optimum and its certificate.

        Used for frames with ``max |LLR| > LOW_TEMPERATURE_LLR``. Since
        ``F(tau) = <lam, tau> - H_rho(tau)`` and ``0 <= H_rho <= Hmax``
        (:meth:`FWProblem.entropy_bound`) on ``L`` for TRW weights (``H_rho <=
        Hmax`` for any ``rho >= 0``), ``F* >= LP* - Hmax`` and the LP vertex ``v``
        satisfies ``F(v) - F* <= Hmax - H_rho(v)``: the reported certified gap.
        As the LLR scale grows the free-energy optimum tends to the LP optimum
        (not to the exact bitwise MAP, which tends to block ML; both agree when
        the LP optimum is integral, the ML certificate). A fractional vertex
        gives a pseudo-codeword; its hard decisions are then not a codeword
        and ``valid`` says so.
        """
        from .lp import LocalPolytopeLP, cost_scale

        lam = np.ascontiguousarray(llr_row, dtype=np.float64)
        t0 = time.perf_counter()
        if getattr(self, "_lp_zero_t", None) is None:
            self._lp_zero_t = LocalPolytopeLP(self.code,
                                              max_check_degree=self.options["max_check_degree"])
        scale = cost_scale(lam)
        sol = self._lp_zero_t.solve(lam * scale, warm=False, time_limit=self.options["time_limit"])
        seconds = time.perf_counter() - t0
        prob = self._prob
        if not sol.optimal or not np.all(np.isfinite(sol.bits)):
            status = "time_limit" if sol.status == "time_limit" else "oracle_failed"
            tb, tl = prob.uniform_bits.copy(), prob.uniform_local.copy()
            F = prob.free_energy(lam, tb, tl)
            return FWFrameResult(tau_bits=tb, tau_local=tl, free_energy=F, gap=math.inf,
                                 relative_gap=math.inf, iterations=1, oracle_calls=1,
                                 oracle_seconds=seconds, seconds=seconds, status=status)
        tb = np.clip(np.asarray(sol.bits, dtype=np.float64), 0.0, 1.0)
        tl = np.clip(np.asarray(sol.local, dtype=np.float64), 0.0, 1.0)
        tb[tb < 1e-9] = 0.0  # snap the solver's round-off of the vertex
        tb[tb > 1 - 1e-9] = 1.0
        tl[tl < 1e-9] = 0.0
        F = prob.free_energy(lam, tb, tl)
        entropy = float(lam @ tb) - F
        cert = max(prob.entropy_bound() - entropy, 0.0)
        return FWFrameResult(tau_bits=tb, tau_local=tl, free_energy=F, gap=cert,
                             relative_gap=_relative(cert, F), iterations=1, oracle_calls=1,
                             oracle_seconds=seconds, seconds=seconds, status="low_temperature",
                             certified_gap=cert)

    def solve_one(self, llr_row) -> FWFrameResult:
        """Run the solver on one frame of channel LLRs (n,) and return the full record.

        Frames with ``max |LLR| > LOW_TEMPERATURE_LLR`` go to
        :meth:`solve_low_temperature` (status ``"low_temperature"``).
        """
        lam = np.ascontiguousarray(llr_row, dtype=np.float64)
        if lam.size and float(np.max(np.abs(lam))) > LOW_TEMPERATURE_LLR:
            return self.solve_low_temperature(lam)
        o = self.options
        t0 = time.perf_counter()
        start = self._start(lam)
        t_warm = time.perf_counter() - t0
        limit = o["time_limit"]
        if limit is not None:  # the warm start counts against the frame's time cap
            limit = max(limit - t_warm, 1e-3)
        eps0 = o["eps0"] if start is None else min(o["eps0"], 1e-3)
        r = solve_frame(self._prob, self._get_oracle(), lam, variant=o["variant"],
                        start=start, gap_tol=o["gap_tol"], abs_gap_tol=o["abs_gap_tol"],
                        max_iter=o["max_iter"], time_limit=limit, eps0=eps0,
                        eps_min=o["eps_min"], convex=self.convex, trace=o["trace"],
                        dual=self._get_dual(), cert_sweeps=o["cert_sweeps"])
        r.seconds += t_warm
        return r

    def _decode(self, llr: np.ndarray) -> DecodeResult:
        F, n = llr.shape
        big = np.abs(llr) > LLR_MAX
        if big.any():
            f, i = (int(v) for v in np.argwhere(big)[0])
            raise InputError(
                f"fw accepts LLR magnitudes up to {LLR_MAX:g} (the lab's saturation level, "
                f"already certainty in float64); frame {f}, bit {i} has {llr[f, i]:.3g}. "
                f"Clip the LLRs to +-{LLR_MAX:g} first, or use lp, exact or sum-product, "
                "which take any finite magnitude.")
        post = np.empty((F, n))
        iters = np.zeros(F, dtype=np.int64)
        info = {k: np.zeros(F) for k in ("duality_gap", "relative_gap", "free_energy",
                                         "oracle_seconds", "seconds")}
        info["oracle_calls"] = np.zeros(F, dtype=np.int64)
        cert = np.full(F, np.nan)
        info["status"] = np.empty(F, dtype=object)
        info["convex"] = np.full(F, self.convex)
        traces = []
        results = self._solve_batched(llr)
        info["route"] = np.array(["batched" if r is not None else "per-frame" for r in results],
                                 dtype=object)
        for f in range(F):
            r = results[f]
            if r is None:
                r = self.solve_one(llr[f])
                if r.status == "low_temperature":
                    info["route"][f] = "low_temperature"
            t = r.tau_bits
            post[f] = np.log(np.maximum(1.0 - t, _TINY)) - np.log(np.maximum(t, _TINY))
            iters[f] = r.iterations
            info["duality_gap"][f] = r.gap
            info["relative_gap"][f] = r.relative_gap
            info["free_energy"][f] = r.free_energy
            info["oracle_seconds"][f] = r.oracle_seconds
            info["seconds"][f] = r.seconds
            info["oracle_calls"][f] = r.oracle_calls
            info["status"][f] = r.status
            if r.certified_gap is not None:
                cert[f] = r.certified_gap
            traces.append(r.trace)
        info["status"] = info["status"].astype(str)
        # the per-frame caps (time_limit, max_iter) stopped the solver before its tolerance
        info["capped"] = np.isin(info["status"], ("time_limit", "max_iter"))
        info["route"] = info["route"].astype(str)
        have_cert = bool(np.all(np.isfinite(cert)))
        if have_cert:
            info["certified_gap"] = cert
        if self.entropy_kind == "trw":
            gap = cert if have_cert else info["duality_gap"]
            info["log_partition_bound"] = gap - info["free_energy"]
        if self.options["trace"]:
            info["trace"] = traces
        bits = (post < 0).astype(np.uint8)
        valid = np.asarray(self.code.is_codeword(bits), dtype=bool).reshape(-1)
        return DecodeResult(bits=bits, posterior_llr=post, iterations=iters, valid=valid,
                            info=info)
