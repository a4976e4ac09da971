"""Belief-propagation thresholds of LDPC ensembles by density evolution.

An ensemble is a pair of *edge-perspective* degree distributions

    lambda(x) = sum_d lambda_d x**(d-1),    rho(x) = sum_d rho_d x**(d-1),

where ``lambda_d`` (``rho_d``) is the fraction of Tanner-graph edges attached
to variable (check) nodes of degree ``d``. Its design rate is
``1 - (int_0^1 rho) / (int_0^1 lambda) = 1 - (sum_d rho_d/d) / (sum_d lambda_d/d)``.

Three threshold computations are offered:

* **BEC, exact** (:func:`bec_threshold`). The erasure probability of a
  variable-to-check message obeys ``x_{l+1} = eps * lambda(1 - rho(1 - x_l))``,
  ``x_0 = eps``; the threshold ``eps*`` is the largest ``eps`` for which
  ``x_l -> 0``, found by bisection.
* **BI-AWGN, discretised density evolution** (:func:`awgn_threshold_discretized`):
  the densities of the message LLRs are held on a uniform grid
  ``k * step, |k| <= K`` (Chung, Forney, Richardson & Urbanke, IEEE Commun.
  Letters 5(2), 2001, doi:10.1109/4234.905935). Variable nodes add LLRs, i.e.
  convolve densities (FFT); check nodes combine two messages at a time with the
  quantised "box-plus" operator ``R(a, b) = Q(2 atanh(tanh(a/2) tanh(b/2)))``
  held as a table. The result is the threshold of the quantised decoder, a
  close lower-side approximation of the exact one that improves as ``step``
  shrinks.
* **BI-AWGN, Gaussian approximation** (:func:`awgn_threshold_gaussian`): every
  message density is replaced by a symmetric Gaussian ``N(m, 2m)`` and only the
  means are tracked with the function ``phi`` (Chung, Richardson & Urbanke,
  IEEE Trans. IT 47(2), 2001, doi:10.1109/18.910580). Fast, **approximate**.

Conventions: LLR ``= ln P(x=0|y) - ln P(x=1|y)``; BPSK ``0 -> +1`` with unit
symbol energy; AWGN noise standard deviation ``sigma`` per real dimension, so
the channel LLR of the all-zero word is ``N(2/sigma**2, 4/sigma**2)``;
``Eb/N0 = 10 log10(1 / (2 R sigma**2))`` dB with ``R`` the design rate.
"""

from __future__ import annotations

import math
import time
from dataclasses import asdict, dataclass, field
from functools import lru_cache
from typing import Any

import numba as nb
import numpy as np

from .._settings import NUMBA_OPTS
from ..errors import InputError
from ..link.channels import sigma_to_ebn0

__all__ = [
    "DegreeDistribution",
    "ThresholdResult",
    "parse_degree_spec",
    "edge_to_node",
    "node_to_edge",
    "bec_evolution",
    "bec_threshold",
    "awgn_evolution_discretized",
    "awgn_threshold_discretized",
    "phi",
    "phi_inverse",
    "awgn_evolution_gaussian",
    "awgn_threshold_gaussian",
    "biawgn_shannon_sigma",
    "compute_threshold",
    "METHODS",
    "GallagerEvolution",
    "gallager_thresholds_by_degree",
    "gallager_bsc_evolution",
    "gallager_bsc_threshold",
]

#: Methods available per channel; the first one is the default.
METHODS: dict[str, tuple[str, ...]] = {
    "bec": ("exact",),
    "awgn": ("discretized", "gaussian"),
    "bsc": ("gallager-b", "gallager-a"),
}


# ======================================================================
# degree distributions
# ======================================================================
def _as_degree_array(spec, what: str) -> np.ndarray:
    """Normalise a distribution given as a dict {degree: fraction} or an array indexed by degree."""
    if isinstance(spec, str):
        spec = parse_degree_spec(spec, what)
    if isinstance(spec, dict):
        if not spec:
            raise InputError(f"The {what} degree distribution is empty.")
        degs = []
        for d in spec:
            try:
                di = int(d)
            except (TypeError, ValueError):
                raise InputError(
                    f"The {what} degree distribution has a non-integer degree {d!r}."
                ) from None
            if di != d or di < 1:
                raise InputError(
                    f"Degrees must be integers >= 1; the {what} distribution has {d!r}."
                )
            degs.append(di)
        arr = np.zeros(max(degs) + 1, dtype=np.float64)
        for d, f in spec.items():
            arr[int(d)] += float(f)
    else:
        arr = np.asarray(spec, dtype=np.float64).ravel().copy()
        if arr.size < 2:
            raise InputError(
                f"The {what} degree array must be indexed by degree "
                "(entry d = fraction of degree d); "
                f"got {arr.size} entries."
            )
        if arr[0] != 0:
            raise InputError(
                f"The {what} degree array is indexed by degree, so entry 0 (degree 0) must be 0; "
                f"got {arr[0]!r}."
            )
    if not np.all(np.isfinite(arr)) or np.any(arr < 0):
        raise InputError(f"The {what} degree fractions must be finite and >= 0.")
    total = arr.sum()
    if total <= 0:
        raise InputError(f"The {what} degree fractions sum to zero.")
    if abs(total - 1.0) > 1e-6:
        raise InputError(
            f"The {what} degree fractions must sum to 1; they sum to {total:.6g}."
        )
    arr /= total
    nz = np.flatnonzero(arr)
    return arr[: nz[-1] + 1]


def parse_degree_spec(text: str, what: str = "degree") -> dict[int, float]:
    """Parse ``"2:0.3,3:0.7"`` (degree:fraction pairs) into ``{2: 0.3, 3: 0.7}``.

    A lone degree (``"6"``) means fraction 1.

    Raises
    ------
    InputError
        Malformed text, naming the bad item.
    """
    out: dict[int, float] = {}
    items = [t.strip() for t in str(text).split(",") if t.strip()]
    if not items:
        raise InputError(f"The {what} distribution {text!r} is empty; write e.g. '2:0.3,3:0.7'.")
    for item in items:
        if ":" in item:
            d_txt, f_txt = item.split(":", 1)
        else:
            d_txt, f_txt = item, "1"
        try:
            d = int(d_txt)
            f = float(f_txt)
        except ValueError:
            raise InputError(
                f"Cannot read {item!r} in the {what} distribution {text!r}; "
                "write degree:fraction pairs such as '2:0.3,3:0.7'."
            ) from None
        if d < 1 or not math.isfinite(f) or f < 0:
            raise InputError(
                f"Bad item {item!r} in the {what} distribution: degree >= 1, fraction >= 0."
            )
        out[d] = out.get(d, 0.0) + f
    return out


def edge_to_node(edge: np.ndarray) -> np.ndarray:
    """Convert edge-perspective fractions to node-perspective fractions.

    ``L_d = (lambda_d / d) / sum_j (lambda_j / j)``.

    Parameters
    ----------
    edge : ndarray of shape (dmax + 1,), float64
        Indexed by degree; entry 0 is 0.

    Returns
    -------
    ndarray of shape (dmax + 1,), float64
    """
    edge = np.asarray(edge, dtype=np.float64)
    d = np.arange(edge.size, dtype=np.float64)
    w = np.divide(edge, d, out=np.zeros_like(edge), where=d > 0)
    return w / w.sum()


def node_to_edge(node: np.ndarray) -> np.ndarray:
    """Convert node-perspective fractions to edge-perspective fractions.

    ``lambda_d = d L_d / sum_j j L_j``. Degree-0 nodes carry no edges and are dropped.

    Parameters
    ----------
    node : ndarray of shape (dmax + 1,), float64
        Indexed by degree.

    Returns
    -------
    ndarray of shape (dmax + 1,), float64
    """
    node = np.asarray(node, dtype=np.float64)
    w = node * np.arange(node.size, dtype=np.float64)
    if w.sum() <= 0:
        raise InputError("The node degree distribution has no edges.")
    return w / w.sum()


def _poly_text(arr: np.ndarray) -> str:
    terms = []
    for d in np.flatnonzero(arr):
        c = arr[d]
        p = int(d) - 1
        mono = "1" if p == 0 else ("x" if p == 1 else f"x^{p}")
        terms.append(mono if abs(c - 1) < 1e-12 else f"{c:.6g} {mono}" if p else f"{c:.6g}")
    return " + ".join(terms)


@dataclass(frozen=True, eq=False)
class DegreeDistribution:
    """Edge-perspective degree distribution pair ``(lambda, rho)`` of an LDPC ensemble.

    Attributes
    ----------
    lam : ndarray of shape (dv_max + 1,), float64
        ``lam[d]`` = fraction of edges attached to variable nodes of degree ``d``.
    rho : ndarray of shape (dc_max + 1,), float64
        ``rho[d]`` = fraction of edges attached to check nodes of degree ``d``.
    label : str
        Human-readable origin (``"(3,6)-regular"``, a code name, ...).

    Examples
    --------
    >>> dd = DegreeDistribution.regular(3, 6)
    >>> round(dd.design_rate, 6)
    0.5
    >>> dd2 = DegreeDistribution.from_edge_fractions({2: 0.5, 3: 0.5}, "6")
    >>> dd2.lam.tolist()
    [0.0, 0.0, 0.5, 0.5]
    """

    lam: np.ndarray
    rho: np.ndarray
    label: str = ""

    # ---------------------------------------------------------------- builders
    @classmethod
    def from_edge_fractions(cls, var, check, label: str = "") -> DegreeDistribution:
        """Build from edge-perspective fractions.

        Parameters
        ----------
        var, check : dict {degree: fraction}, str ``"2:0.3,3:0.7"``, or array indexed by degree
            Fractions must sum to 1 (within 1e-6; they are then renormalised).
        """
        lam = _as_degree_array(var, "variable-node")
        rho = _as_degree_array(check, "check-node")
        return cls._checked(lam, rho, label)

    @classmethod
    def from_node_fractions(cls, var, check, label: str = "") -> DegreeDistribution:
        """Build from node-perspective fractions (fraction of *nodes* of each degree)."""
        lam = node_to_edge(_as_degree_array(var, "variable-node"))
        rho = node_to_edge(_as_degree_array(check, "check-node"))
        return cls._checked(lam, rho, label)

    @classmethod
    def regular(cls, dv: int, dc: int) -> DegreeDistribution:
        """The ``(dv, dc)``-regular ensemble: ``lambda(x) = x**(dv-1)``, ``rho(x) = x**(dc-1)``."""
        for v, nm in ((dv, "variable"), (dc, "check")):
            if int(v) != v or v < 1:
                raise InputError(
                    f"The {nm}-node degree of a regular ensemble must be an integer >= 1; "
                    f"got {v!r}."
                )
        return cls.from_edge_fractions({int(dv): 1.0}, {int(dc): 1.0}, label=f"({dv},{dc})-regular")

    @classmethod
    def from_code(cls, code) -> DegreeDistribution:
        """Edge-perspective fractions of a code's Tanner graph.

        ``lambda_d = d * #{bits of degree d} / #edges`` (likewise ``rho``).
        Bits or checks of degree 0 carry no edges and do not appear.

        Parameters
        ----------
        code : ParityCheckCode
        """
        vdeg = np.asarray(code.var_degrees, dtype=np.int64)
        cdeg = np.asarray(code.check_degrees, dtype=np.int64)
        E = int(vdeg.sum())
        if E == 0:
            raise InputError("The code has no Tanner-graph edges; no degree distribution.")
        lam = np.bincount(vdeg, weights=vdeg.astype(np.float64)) / E
        rho = np.bincount(cdeg, weights=cdeg.astype(np.float64)) / E
        name = getattr(code, "name", "") or "code"
        return cls._checked(lam, rho, f"Tanner graph of {name}")

    @classmethod
    def _checked(cls, lam: np.ndarray, rho: np.ndarray, label: str) -> DegreeDistribution:
        lam = np.ascontiguousarray(lam, dtype=np.float64)
        rho = np.ascontiguousarray(rho, dtype=np.float64)
        if lam.size < 2 or lam[1:].sum() <= 0:
            raise InputError("The variable-node distribution has no edges.")
        if rho.size < 2 or rho[1:].sum() <= 0:
            raise InputError("The check-node distribution has no edges.")
        return cls(lam=lam, rho=rho, label=label)

    # -------------------------------------------------------------- properties
    @property
    def design_rate(self) -> float:
        """``1 - int rho / int lambda`` (may be <= 0 for silly ensembles)."""
        d_v = np.arange(self.lam.size)
        d_c = np.arange(self.rho.size)
        il = float(np.sum(self.lam[1:] / d_v[1:]))
        ir = float(np.sum(self.rho[1:] / d_c[1:]))
        return 1.0 - ir / il

    @property
    def var_node_fractions(self) -> np.ndarray:
        """Node-perspective variable degree fractions, indexed by degree."""
        return edge_to_node(self.lam)

    @property
    def check_node_fractions(self) -> np.ndarray:
        """Node-perspective check degree fractions, indexed by degree."""
        return edge_to_node(self.rho)

    def lam_poly(self, x):
        """Evaluate ``lambda(x)`` (scalar or array)."""
        return _poly_eval(self.lam, x)

    def rho_poly(self, x):
        """Evaluate ``rho(x)`` (scalar or array)."""
        return _poly_eval(self.rho, x)

    def describe(self) -> str:
        """``lambda(x) = ...; rho(x) = ...``."""
        return f"lambda(x) = {_poly_text(self.lam)}; rho(x) = {_poly_text(self.rho)}"

    def to_dict(self) -> dict:
        """JSON-ready dict: edge fractions keyed by degree (as strings), rate and label."""
        return {
            "label": self.label,
            "lambda": {str(int(d)): float(self.lam[d]) for d in np.flatnonzero(self.lam)},
            "rho": {str(int(d)): float(self.rho[d]) for d in np.flatnonzero(self.rho)},
            "design_rate": self.design_rate,
        }


def _poly_eval(coef: np.ndarray, x):
    """``sum_d coef[d] x**(d-1)`` for an array indexed by degree."""
    x = np.asarray(x, dtype=np.float64)
    out = np.zeros_like(x)
    for d in range(coef.size - 1, 0, -1):  # Horner on coefficients of x**(d-1)
        out = out * x + coef[d]
    return out


def _as_dd(dd) -> DegreeDistribution:
    if isinstance(dd, DegreeDistribution):
        return dd
    if hasattr(dd, "var_degrees") and hasattr(dd, "check_degrees"):
        return DegreeDistribution.from_code(dd)
    if isinstance(dd, tuple) and len(dd) == 2:
        return DegreeDistribution.from_edge_fractions(*dd)
    raise InputError(
        "Expected a DegreeDistribution, a ParityCheckCode or a (lambda, rho) pair; "
        f"got {type(dd).__name__}."
    )


# ======================================================================
# result type
# ======================================================================
@dataclass
class ThresholdResult:
    """A BP threshold with the conditions it was computed under.

    Attributes
    ----------
    channel : {"bec", "awgn", "bsc"}
    method : {"exact", "discretized", "gaussian", "gallager-a", "gallager-b"}
    parameter : {"epsilon", "sigma", "p"}
        Name of the channel parameter ``threshold`` refers to (BEC erasure
        probability, AWGN noise standard deviation per real dimension, Es = 1,
        BSC crossover probability).
    threshold : float
        ``eps*`` or ``sigma*``: the decoder succeeds (in the limit of long
        codes) for channel parameters below it.
    rate : float
        Design rate ``R`` of the ensemble.
    ebn0_db : float or None
        ``Eb/N0`` (dB) at the threshold for rate ``R`` (AWGN only):
        ``sigma**2 = 1 / (2 R 10**(EbN0/10))``.
    capacity_limit : float
        Channel parameter at which capacity equals ``R`` (BEC: ``1 - R``;
        BI-AWGN: Shannon-limit ``sigma``; BSC: ``p`` with ``1 - h(p) = R``).
    capacity_ebn0_db : float or None
        Shannon-limit ``Eb/N0`` (dB) for rate ``R`` (AWGN only).
    gap_db : float or None
        ``ebn0_db - capacity_ebn0_db`` (AWGN only).
    approximate : bool
        True for the Gaussian approximation.
    iterations : int
        Density-evolution iterations at the last converging parameter of the search.
    tolerance : float
        Width of the final bisection bracket (threshold within ``tolerance``).
    settings : dict
        Method options (grid step, LLR range, iteration cap, targets).
    seconds : float
        Wall-clock time of the search.
    ensemble : dict
        :meth:`DegreeDistribution.to_dict` of the ensemble.
    """

    channel: str
    method: str
    parameter: str
    threshold: float
    rate: float
    ebn0_db: float | None
    capacity_limit: float
    capacity_ebn0_db: float | None
    gap_db: float | None
    approximate: bool
    iterations: int
    tolerance: float
    settings: dict = field(default_factory=dict)
    seconds: float = 0.0
    ensemble: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """JSON-ready dict of every field."""
        return asdict(self)


def _finish(dd: DegreeDistribution, channel, method, parameter, thr, iters, tol, settings, t0,
            approximate=False) -> ThresholdResult:
    R = dd.design_rate
    if channel == "bec":
        limit = 1.0 - R
        ebn0 = cap_ebn0 = gap = None
    elif channel == "bsc":
        from .capacity import bsc_shannon_limit_p

        limit = bsc_shannon_limit_p(R) if 0 < R < 1 else float("nan")
        ebn0 = cap_ebn0 = gap = None
    else:
        limit = biawgn_shannon_sigma(R) if 0 < R < 1 else float("nan")
        ebn0 = sigma_to_ebn0(thr, R) if (R > 0 and thr > 0) else None
        cap_ebn0 = sigma_to_ebn0(limit, R) if 0 < R < 1 else None
        gap = ebn0 - cap_ebn0 if (ebn0 is not None and cap_ebn0 is not None) else None
    return ThresholdResult(
        channel=channel, method=method, parameter=parameter, threshold=float(thr), rate=R,
        ebn0_db=ebn0, capacity_limit=float(limit), capacity_ebn0_db=cap_ebn0, gap_db=gap,
        approximate=approximate, iterations=int(iters), tolerance=float(tol),
        settings=settings, seconds=time.perf_counter() - t0, ensemble=dd.to_dict(),
    )


def _check_positive(name: str, value, low=0.0, high=None, integer=False):
    ok = isinstance(value, int | float | np.integer | np.floating) and not isinstance(value, bool)
    if ok:
        ok = math.isfinite(float(value)) and value > low and (high is None or value <= high)
        if integer:
            ok = ok and float(value).is_integer()
    if not ok:
        rng = f"> {low:g}" + (f" and <= {high:g}" if high is not None else "")
        kind = "an integer" if integer else "a number"
        raise InputError(
            f"The {name!r} option of density evolution must be {kind} {rng}; got {value!r}."
        )
    return int(value) if integer else float(value)


def _bisect(succeeds, lo: float, hi: float, tol: float):
    """Largest parameter in [lo, hi] for which ``succeeds`` holds (monotone), to within ``tol``.

    ``succeeds(p)`` returns ``(ok, iterations)``. Returns ``(lo, hi, iterations_at_lo)``.
    """
    it_lo = 0
    while hi - lo > tol:
        mid = 0.5 * (lo + hi)
        ok, it = succeeds(mid)
        if ok:
            lo, it_lo = mid, it
        else:
            hi = mid
    return lo, hi, it_lo


# ======================================================================
# BEC: exact density evolution
# ======================================================================
@nb.njit(**NUMBA_OPTS)
def _bec_kernel(lam, rho, eps, max_iter, target, stall, r_lin, half_m):
    """Run ``x <- eps * lambda(1 - rho(1 - x))`` from ``x = eps``.

    Assumes ``lam``/``rho`` contiguous float64 indexed by degree, ``lam[1] = 0``,
    ``r_lin = eps * lambda_2 * rho'(1)`` (slope of the map at 0) and
    ``half_m = eps * M / 2`` with ``M >= |h''|`` on [0, 1] for
    ``h(x) = lambda(1 - rho(1 - x))``. Returns ``(status, iterations, x)``:

    * 1 = reached ``x <= target``;
    * 2 = certified: ``r_lin + half_m * x < 1``, so ``g(y) < y`` on (0, x]
      (Taylor bound ``g(y) <= r_lin y + half_m y**2``) and ``x_l -> 0``;
    * 0 = stalled at a non-zero fixed point (decrease below ``stall * x``),
      or unstable at 0 (``r_lin > 1``: the recursion cannot reach 0);
    * -1 = iteration cap (undecided; counted as failure).
    """
    if r_lin > 1.0:
        return 0, 0, eps
    x = eps
    for it in range(1, max_iter + 1):
        y = 1.0 - x
        r = 0.0
        for d in range(rho.size - 1, 0, -1):
            r = r * y + rho[d]
        z = 1.0 - r
        v = 0.0
        for d in range(lam.size - 1, 0, -1):
            v = v * z + lam[d]
        xn = eps * v
        if xn <= target:
            return 1, it, xn
        if r_lin + half_m * xn < 1.0:
            return 2, it, xn
        if x - xn <= stall * x:
            return 0, it, xn
        x = xn
    return -1, max_iter, x


def _deriv_at_one(coef: np.ndarray, order: int) -> float:
    """``order``-th derivative at x = 1 of ``sum_d coef[d] x**(d-1)``."""
    d = np.arange(coef.size, dtype=np.float64)
    f = np.ones_like(d)
    for k in range(order):
        f *= np.maximum(d - 1 - k, 0.0)
    return float(np.sum(coef * f))


def bec_evolution(dd, eps: float, max_iter: int = 1000) -> np.ndarray:
    """Erasure probability of variable-to-check messages per iteration on BEC(eps).

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    eps : float
        Erasure probability in [0, 1].
    max_iter : int

    Returns
    -------
    ndarray of shape (max_iter + 1,), float64
        ``x_0 = eps, x_1, ..., x_max_iter``.
    """
    dd = _as_dd(dd)
    if not 0.0 <= eps <= 1.0:
        raise InputError(f"The erasure probability must be in [0, 1]; got {eps!r}.")
    max_iter = _check_positive("max_iter", max_iter, integer=True)
    xs = np.empty(max_iter + 1, dtype=np.float64)
    xs[0] = eps
    for i in range(max_iter):
        xs[i + 1] = eps * float(dd.lam_poly(1.0 - dd.rho_poly(1.0 - xs[i])))
    return xs


def bec_threshold(dd, *, tol: float = 1e-7, max_iter: int = 1_000_000,
                  target: float = 1e-12) -> ThresholdResult:
    """Exact BP threshold ``eps*`` of an ensemble on the binary erasure channel.

    Bisection on ``eps``. A trial succeeds when the message erasure probability
    falls to ``target`` or, earlier, once it is small enough that a Taylor bound
    proves it goes on to 0. It fails when the recursion stalls at a non-zero
    fixed point, when 0 is unstable (``eps lambda_2 rho'(1) > 1``, the stability
    condition of Richardson, Shokrollahi & Urbanke 2001), or at ``max_iter``.

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    tol : float
        Final bracket width.
    max_iter : int
        Iteration cap per trial. Near a threshold set by a non-zero fixed point
        the recursion needs about ``C / sqrt(eps* - eps)`` iterations, so the
        cap costs nothing there. When the threshold is set by the stability
        condition the recursion slows down like ``1 / (eps_stab - eps)`` and the
        cap leaves ``threshold`` low by roughly ``30 eps / max_iter``;
        ``settings["capped_trials"]`` counts the trials that ended by the cap.
    target : float
        Erasure probability counted as convergence to zero.

    Returns
    -------
    ThresholdResult
        ``parameter = "epsilon"``; ``capacity_limit = 1 - R``.

    Examples
    --------
    >>> res = bec_threshold(DegreeDistribution.regular(3, 6))
    >>> round(res.threshold, 4), res.capacity_limit
    (0.4294, 0.5)
    """
    t0 = time.perf_counter()
    dd = _as_dd(dd)
    tol = _check_positive("tol", tol, high=0.1)
    max_iter = _check_positive("max_iter", max_iter, integer=True)
    target = _check_positive("target", target, high=1e-3)
    lam, rho = dd.lam, dd.rho
    if lam[1] > 0:
        # x_{l+1} >= eps * lambda_1 > 0: no erasure probability below eps * lambda_1
        settings = {"max_iter": max_iter, "target": target, "tol": tol, "capped_trials": 0,
                    "note": "degree-1 variable nodes: threshold 0"}
        return _finish(dd, "bec", "exact", "epsilon", 0.0, 0, 0.0, settings, t0)
    lam2 = lam[2] if lam.size > 2 else 0.0
    rho1 = _deriv_at_one(rho, 1)
    # |h''| <= lambda''(1) rho'(1)^2 + lambda'(1) rho''(1) (all coefficients >= 0)
    m_bound = _deriv_at_one(lam, 2) * rho1**2 + _deriv_at_one(lam, 1) * _deriv_at_one(rho, 2)
    capped = [0]

    def ok(eps):
        st, it, _ = _bec_kernel(lam, rho, eps, max_iter, target, 1e-15,
                                eps * lam2 * rho1, 0.5 * eps * m_bound)
        capped[0] += st == -1
        return st >= 1, it

    lo, hi, it = _bisect(ok, 0.0, 1.0, tol)
    settings = {"max_iter": max_iter, "target": target, "tol": tol,
                "capped_trials": int(capped[0])}
    return _finish(dd, "bec", "exact", "epsilon", lo, it, hi - lo, settings, t0)


# ======================================================================
# BI-AWGN: discretised density evolution
# ======================================================================
@lru_cache(maxsize=8)
def _boxplus_table(K: int, step: float) -> tuple[np.ndarray, ...]:
    """Quantised magnitude table of the check-node operator, compressed into runs.

    ``T[i, j] = round(2 atanh(tanh(i s/2) tanh(j s/2)) / s)``, (K + 1, K + 1),
    int32, symmetric, ``T[0, :] = 0``. ``T[i, j]`` is non-decreasing in ``j``,
    so right of the diagonal each row is a few runs of equal values and then
    constant (``T[i, K]``) from column ``jsat[i] > i`` on.

    Returns
    -------
    T : ndarray (K + 1, K + 1), int32
    jsat : ndarray (K + 1,), int64
        First column ``j > i`` from which row ``i`` is constant (``K + 1`` if none).
    run_ptr : ndarray (K + 2,), int64
        Runs of row ``i`` are ``run_ptr[i]:run_ptr[i+1]``, covering ``i+1 .. jsat[i]-1``.
    run_lo, run_hi, run_k : ndarray, int64
        Columns ``run_lo[r] .. run_hi[r]-1`` of the run all map to magnitude ``run_k[r]``.
    """
    a = np.arange(K + 1, dtype=np.float64) * step
    t = np.tanh(0.5 * a)
    prod = np.clip(np.outer(t, t), 0.0, 1.0 - 1e-16)
    mag = 2.0 * np.arctanh(prod)
    T = np.rint(mag / step).astype(np.int32)
    np.minimum(T, K, out=T)
    idx = np.arange(K + 1)
    sat = (T == T[:, K:K + 1]) & (idx[None, :] > idx[:, None])
    jsat = np.where(sat.any(axis=1), sat.argmax(axis=1), K + 1).astype(np.int64)
    run_ptr = np.zeros(K + 2, dtype=np.int64)
    lo_l, hi_l, k_l = [], [], []
    for i in range(K + 1):
        cols = np.arange(i + 1, jsat[i])
        if cols.size:
            vals = T[i, cols]
            starts = np.flatnonzero(np.r_[True, vals[1:] != vals[:-1]])
            ends = np.r_[starts[1:], cols.size]
            lo_l.append(cols[starts])
            hi_l.append(cols[0] + ends)
            k_l.append(vals[starts])
        run_ptr[i + 1] = run_ptr[i] + (cols.size and starts.size)

    def cat(xs):
        return np.concatenate(xs).astype(np.int64) if xs else np.zeros(0, np.int64)

    out = (T, jsat, run_ptr, cat(lo_l), cat(hi_l), cat(k_l))
    for arr in out:
        arr.setflags(write=False)
    return out


@nb.njit(**NUMBA_OPTS)
def _boxplus_pair(sa, da, sb, db, T, jsat, run_ptr, run_lo, run_hi, run_k, out_s, out_d):
    """Density of ``R(a, b)`` for independent quantised LLRs ``a``, ``b``.

    Densities are given by magnitude ``i = 0..K`` as ``s[i] = P(|L| = i)`` and
    ``d[i] = P(L = +i) - P(L = -i)`` (``d[0] = 0``). ``R`` multiplies signs and
    its magnitude is the table entry, so ``s`` and ``d`` combine the same way.
    Uses the symmetry of the table (pairs ``i <= j``), runs of equal entries
    (differences of prefix sums accumulated from magnitude 0) and the constant
    tail of each row (suffix sums accumulated from the top), so the cost is
    about ``K ln(2)/step`` rather than ``K**2``. Absolute rounding errors stay
    at the 1e-16 level. Writes ``out_s``/``out_d`` (``out_d[0] = 0``).
    Assumes contiguous float64 arrays of length K + 1 and the arrays of
    :func:`_boxplus_table`.
    """
    K1 = sa.size
    K = K1 - 1
    SA = np.zeros(K1 + 1)  # suffix sums: SA[j] = sum_{j' >= j}
    SB = np.zeros(K1 + 1)
    DA = np.zeros(K1 + 1)
    DB = np.zeros(K1 + 1)
    PA = np.zeros(K1 + 1)  # prefix sums: PA[j] = sum_{j' < j}
    PB = np.zeros(K1 + 1)
    QA = np.zeros(K1 + 1)
    QB = np.zeros(K1 + 1)
    for j in range(K, -1, -1):
        SA[j] = SA[j + 1] + sa[j]
        SB[j] = SB[j + 1] + sb[j]
        DA[j] = DA[j + 1] + da[j]
        DB[j] = DB[j + 1] + db[j]
    for j in range(K1):
        PA[j + 1] = PA[j] + sa[j]
        PB[j + 1] = PB[j] + sb[j]
        QA[j + 1] = QA[j] + da[j]
        QB[j + 1] = QB[j] + db[j]
    out_s[:] = 0.0
    out_d[:] = 0.0
    for i in range(K1):
        sai = sa[i]
        sbi = sb[i]
        dai = da[i]
        dbi = db[i]
        k = T[i, i]
        out_s[k] += sai * sbi
        out_d[k] += dai * dbi
        for r in range(run_ptr[i], run_ptr[i + 1]):
            lo = run_lo[r]
            hi = run_hi[r]
            k = run_k[r]
            out_s[k] += sai * (PB[hi] - PB[lo]) + sbi * (PA[hi] - PA[lo])
            out_d[k] += dai * (QB[hi] - QB[lo]) + dbi * (QA[hi] - QA[lo])
        js = jsat[i]
        if js <= K:
            k = T[i, K]
            out_s[k] += sai * SB[js] + sbi * SA[js]
            out_d[k] += dai * DB[js] + dbi * DA[js]
    out_d[0] = 0.0
    for k in range(K1):  # rounding can leave -1e-17; keep |d| <= s >= 0
        if out_s[k] < 0.0:
            out_s[k] = 0.0
        if out_d[k] > out_s[k]:
            out_d[k] = out_s[k]
        elif out_d[k] < -out_s[k]:
            out_d[k] = -out_s[k]


@nb.njit(**NUMBA_OPTS)
def _boxplus_pair_naive(sa, da, sb, db, table, out_s, out_d):
    """Reference for :func:`_boxplus_pair`: the full ``(K+1)**2`` double loop."""
    K1 = sa.size
    out_s[:] = 0.0
    out_d[:] = 0.0
    for i in range(K1):
        for j in range(K1):
            k = table[i, j]
            out_s[k] += sa[i] * sb[j]
            out_d[k] += da[i] * db[j]
    out_d[0] = 0.0


def _full_to_sd(p: np.ndarray, K: int) -> tuple[np.ndarray, np.ndarray]:
    """pmf over ``-K..K`` -> (s, d) magnitude form."""
    pos = p[K:]
    neg = p[K::-1]
    s = pos + neg
    s[0] = p[K]
    d = pos - neg
    d[0] = 0.0
    return np.ascontiguousarray(s), np.ascontiguousarray(d)


def _sd_to_full(s: np.ndarray, d: np.ndarray, K: int) -> np.ndarray:
    p = np.empty(2 * K + 1, dtype=np.float64)
    p[K + 1:] = 0.5 * (s[1:] + d[1:])
    p[:K][::-1] = 0.5 * (s[1:] - d[1:])
    p[K] = s[0]
    return p


def _quantised_channel(sigma: float, K: int, step: float) -> np.ndarray:
    """pmf of the channel LLR ``N(2/sigma^2, 4/sigma^2)`` on the grid ``-K..K`` (tails saturate)."""
    from scipy.special import ndtr

    mu = 2.0 / sigma**2
    sd = 2.0 / sigma
    edges = (np.arange(-K, K + 2, dtype=np.float64) - 0.5) * step
    z_lo = (edges[:-1] - mu) / sd
    z_hi = (edges[1:] - mu) / sd
    # differences of the CDF below the mean and of the survival function above
    # it, so that small tail masses keep their relative accuracy
    p = np.where(z_hi <= 0.0, ndtr(z_hi) - ndtr(z_lo), ndtr(-z_lo) - ndtr(-z_hi))
    p = np.maximum(p, 0.0)
    p[0] = ndtr(z_hi[0])  # saturation: everything below the grid
    p[-1] = ndtr(-z_lo[-1])  # and above it
    return p / p.sum()


def _fold(conv: np.ndarray, center: int, K: int) -> np.ndarray:
    """Clip a pmf whose index ``center`` is LLR 0 to ``-K..K``, saturating the tails."""
    out = conv[center - K: center + K + 1].copy()
    out[0] += conv[: center - K].sum()
    out[-1] += conv[center + K + 1:].sum()
    return out


class _DiscretizedDE:
    """State shared by the trials of one discretised-DE threshold search."""

    def __init__(self, dd: DegreeDistribution, step: float, llr_max: float):
        self.dd = dd
        self.step = step
        self.K = K = int(round(llr_max / step))
        self.N = 2 * K + 1
        self.tables = _boxplus_table(K, step)
        self.vdeg = [int(d) for d in np.flatnonzero(dd.lam)]
        self.cdeg = [int(d) for d in np.flatnonzero(dd.rho)]
        # linear convolution of the channel and (d-1) check messages: length d*(N-1)+1
        need = max(self.vdeg) * (self.N - 1) + 1
        self.nfft = 1 << int(math.ceil(math.log2(need)))
        self.buf_s = np.zeros(K + 1)
        self.buf_d = np.zeros(K + 1)

    def _pair(self, a, b):
        out_s, out_d = np.empty_like(a[0]), np.empty_like(a[0])
        _boxplus_pair(a[0], a[1], b[0], b[1], *self.tables, out_s, out_d)
        return out_s, out_d

    def check_update(self, s: np.ndarray, d: np.ndarray) -> np.ndarray:
        """Mixture over check degrees of the (j-1)-fold box-plus of the message density."""
        rho = self.dd.rho
        if len(self.cdeg) == 1 and self.cdeg[0] >= 2:
            # one check degree: (j-1)-fold power by repeated squaring
            n = self.cdeg[0] - 1
            base, res = (s, d), None
            while n:
                if n & 1:
                    res = base if res is None else self._pair(res, base)
                n >>= 1
                if n:
                    base = self._pair(base, base)
            return _sd_to_full(res[0], res[1], self.K)
        acc_s = np.zeros_like(s)
        acc_d = np.zeros_like(d)
        cur = (s, d)  # density of the box-plus of j - 1 messages
        for j in range(2, max(self.cdeg) + 1):
            if j > 2:
                cur = self._pair(cur, (s, d))
            if rho[j] > 0:
                acc_s += rho[j] * cur[0]
                acc_d += rho[j] * cur[1]
        if rho[1] > 0:  # degree-1 checks send LLR 0
            acc_s[0] += rho[1]
        return _sd_to_full(acc_s, acc_d, self.K)

    def run(self, sigma: float, max_iter: int, target: float, stall: float,
            trace: bool = False, r_stab: float | None = None):
        """Evolve the densities at ``sigma``; returns (status, iterations, P_e trace, density).

        status 1 = error probability reached ``target``; 2 = linear regime
        reached (see :func:`awgn_threshold_discretized`, only when ``r_stab``
        is given); 0 = stalled; -1 = iteration cap.
        """
        K = self.K
        ch = _quantised_channel(sigma, K, self.step)
        # Bhattacharyya parameter E[exp(-L/2)] for the linear-regime rule
        bw = np.exp(-0.5 * self.step * np.arange(-K, K + 1, dtype=np.float64))
        b_prev = float(np.dot(bw, ch))
        contracting = 0
        ch_f = np.fft.rfft(ch, self.nfft)
        lam = self.dd.lam
        dmax_v = max(self.vdeg)
        # For degree dv the sum of channel + (dv-1) messages sits at offset dv*K;
        # shifting lower degrees so every term has the same zero index dmax_v*K
        # is done in the frequency domain with a phase factor.
        shift = {}
        freqs = np.arange(self.nfft // 2 + 1)
        for dv in self.vdeg:
            delta = (dmax_v - dv) * K
            shift[dv] = np.exp(-2j * np.pi * freqs * delta / self.nfft) if delta else None
        center = dmax_v * K
        msg = ch
        pes = []
        pe_prev = _pe(msg, K)
        if trace:
            pes.append(pe_prev)
        status, done = -1, max_iter
        for it in range(1, max_iter + 1):
            done = it
            s, d = _full_to_sd(msg, K)
            chk = self.check_update(s, d)
            c_f = np.fft.rfft(chk, self.nfft)
            acc = np.zeros_like(c_f)
            pw = np.ones_like(c_f)
            prev = 1
            for dv in self.vdeg:
                while prev < dv:
                    pw = pw * c_f
                    prev += 1
                term = lam[dv] * pw
                if shift[dv] is not None:
                    term = term * shift[dv]
                acc += term
            conv = np.fft.irfft(acc * ch_f, self.nfft)
            np.maximum(conv, 0.0, out=conv)
            msg = _fold(conv, center, K)
            msg /= msg.sum()
            pe = _pe(msg, K)
            if trace:
                pes.append(pe)
            if pe <= target:
                status = 1
                break
            if stall > 0 and pe_prev - pe <= stall * pe_prev:
                status = 0
                break
            pe_prev = pe
            if r_stab is not None:
                b = float(np.dot(bw, msg))
                if b <= _LINEAR_B and b <= (1.0 - 0.5 * (1.0 - r_stab)) * b_prev:
                    contracting += 1
                    if contracting >= _LINEAR_RUN:
                        status = 2
                        break
                else:
                    contracting = 0
                b_prev = b
        return status, done, np.asarray(pes), msg


#: Linear-regime rule: Bhattacharyya parameter below this, contracting for this many
#: iterations in a row by at least half the linear margin ``1 - r_stab``.
_LINEAR_B = 1e-3
_LINEAR_RUN = 5


def _pe(p: np.ndarray, K: int) -> float:
    """Error probability of a message: ``P(L < 0) + P(L = 0) / 2``."""
    return float(p[:K].sum() + 0.5 * p[K])


_DISC_DEFAULTS = {"step": 0.05, "llr_max": 25.0, "max_iter": 2000, "target": 1e-7,
                  "stall": 1e-9, "tol": 1e-4}


def _disc_settings(step, llr_max, max_iter, target, stall, tol=None) -> dict:
    step = _check_positive("step", step, high=1.0)
    llr_max = _check_positive("llr_max", llr_max)
    if llr_max < 4 * step or llr_max / step > 20000:
        raise InputError(
            f"The LLR range ({llr_max:g}) over the step ({step:g}) gives "
            f"{llr_max / step:.0f} grid points per side; use between 4 and 20000."
        )
    out = {
        "step": step, "llr_max": llr_max,
        "max_iter": _check_positive("max_iter", max_iter, integer=True),
        "target": _check_positive("target", target, high=0.01),
        "stall": _check_positive("stall", stall, high=0.1),
    }
    if tol is not None:
        out["tol"] = _check_positive("tol", tol, high=0.1)
    return out


def awgn_evolution_discretized(dd, sigma: float, *, step: float = _DISC_DEFAULTS["step"],
                               llr_max: float = _DISC_DEFAULTS["llr_max"],
                               max_iter: int = 200, target: float = 1e-7,
                               stall: float = 0.0) -> dict:
    """Run discretised density evolution on the BI-AWGN channel at one ``sigma``.

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    sigma : float
        Noise standard deviation per real dimension (BPSK, Es = 1).
    step : float
        LLR quantisation step.
    llr_max : float
        Grid half-range; message LLRs saturate at ``+-llr_max``.
    max_iter : int
    target : float
        Stop once the message error probability is ``<= target``.
    stall : float
        Stop when an iteration lowers the error probability by less than
        ``stall`` times its value (0 disables the test).

    Returns
    -------
    dict
        ``converged`` (bool), ``iterations`` (int), ``error_prob`` (ndarray of
        shape (iterations + 1,), float64: ``P(L < 0) + P(L = 0)/2`` of the
        variable-to-check message, starting with the channel), ``llr``
        (grid, ndarray of shape (2K+1,)) and ``density`` (final message pmf on it).
    """
    dd = _as_dd(dd)
    sigma = _check_positive("sigma", sigma)
    st = _disc_settings(step, llr_max, max_iter, target, max(stall, 1e-300))
    de = _DiscretizedDE(dd, st["step"], st["llr_max"])
    status, it, pes, msg = de.run(sigma, st["max_iter"], st["target"], stall, trace=True)
    grid = np.arange(-de.K, de.K + 1, dtype=np.float64) * de.step
    return {"converged": status == 1, "iterations": it, "error_prob": pes,
            "llr": grid, "density": msg}


def awgn_threshold_discretized(dd, *, step: float = _DISC_DEFAULTS["step"],
                               llr_max: float = _DISC_DEFAULTS["llr_max"],
                               max_iter: int = _DISC_DEFAULTS["max_iter"],
                               target: float = _DISC_DEFAULTS["target"],
                               stall: float = _DISC_DEFAULTS["stall"],
                               tol: float = _DISC_DEFAULTS["tol"],
                               linear_stop: bool = True) -> ThresholdResult:
    """BP threshold ``sigma*`` on the BI-AWGN channel by discretised density evolution.

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    step : float
        LLR quantisation step (grid ``k * step``). Smaller is more accurate and
        slower (the check-node table costs ``(llr_max/step)**2`` per pairwise step).
    llr_max : float
        Grid half-range; LLRs saturate at ``+-llr_max``.
    max_iter : int
        Iteration cap per trial ``sigma``; a trial that has not converged by
        then counts as a failure (so the result errs low).
    target : float
        Message error probability counted as convergence to zero.
    stall : float
        A trial fails as soon as one iteration lowers the error probability by
        less than ``stall`` times its value (a non-zero fixed point).
    tol : float
        Final width of the bisection bracket on ``sigma``.
    linear_stop : bool
        For ensembles with degree-2 variable nodes, also count a trial as a
        success once the message density is in the linear regime around the
        error-free fixed point: Bhattacharyya parameter ``E[exp(-L/2)] <= 1e-3``
        and shrinking, five iterations in a row, by a factor at most
        ``1 - (1 - r)/2`` with ``r = lambda_2 rho'(1) exp(-1/(2 sigma^2)) < 1``,
        the factor by which the linearised recursion contracts it. Without
        this rule, thresholds set by the stability condition need
        ``~1/(sigma_stab - sigma)`` iterations and come out low.

    Returns
    -------
    ThresholdResult
        ``parameter = "sigma"``, with ``ebn0_db`` for the design rate.

    Notes
    -----
    The search brackets ``sigma*`` between the Gaussian-approximation value
    minus/plus a margin (widened until the ends fail/succeed) and bisects.
    Noise levels beyond the stability condition ``lambda_2 rho'(1)
    exp(-1/(2 sigma^2)) < 1`` fail without a run (``settings["stability_sigma"]``).
    When the threshold is set by that condition, the error probability falls
    ever more slowly close to it, so the iteration cap leaves the result a
    little low.
    """
    t0 = time.perf_counter()
    dd = _as_dd(dd)
    st = _disc_settings(step, llr_max, max_iter, target, stall, tol)
    R = dd.design_rate
    if not 0.0 < R < 1.0:
        raise InputError(f"The ensemble's design rate is {R:.4g}; a threshold needs 0 < R < 1.")
    if dd.lam[1] > 0:
        # messages from degree-1 bits carry the channel LLR only: error probability
        # >= lambda_1 Q(1/sigma) > 0 at every noise level
        st["note"] = "degree-1 variable nodes: threshold 0"
        return _finish(dd, "awgn", "discretized", "sigma", 0.0, 0, 0.0, st, t0)
    de = _DiscretizedDE(dd, st["step"], st["llr_max"])
    # stability condition lambda_2 rho'(1) exp(-1/(2 sigma^2)) < 1 (Richardson,
    # Shokrollahi & Urbanke 2001): beyond it BP cannot converge, so skip the run
    lam2 = dd.lam[2] if dd.lam.size > 2 else 0.0
    slope = lam2 * _deriv_at_one(dd.rho, 1)
    sigma_stab = math.sqrt(1.0 / (2.0 * math.log(slope))) if slope > 1.0 else math.inf
    st["stability_sigma"] = sigma_stab

    st["linear_stop"] = bool(linear_stop)

    def ok(sig):
        if sig >= sigma_stab:
            return False, 0
        r_stab = slope * math.exp(-0.5 / sig**2) if (linear_stop and lam2 > 0) else None
        status, it, _, _ = de.run(sig, st["max_iter"], st["target"], st["stall"],
                                  r_stab=r_stab)
        return status >= 1, it

    lo, hi, it_lo = _bracket(ok, dd)
    lo, hi, it = _bisect(ok, lo, hi, st["tol"])
    it = it or it_lo
    return _finish(dd, "awgn", "discretized", "sigma", lo, it, hi - lo, st, t0)


def _bracket(ok, dd: DegreeDistribution):
    """(lo, hi) with ok(lo) true and ok(hi) false, starting around the GA threshold."""
    sh = biawgn_shannon_sigma(dd.design_rate)
    try:
        # the closed-form phi needs no table and is close enough for a bracket
        guess = awgn_threshold_gaussian(dd, tol=1e-4, phi_form="closed-form").threshold
    except InputError:
        guess = 0.8 * sh
    if not guess > 0:
        guess = 0.5 * sh
    # the GA errs by about 1 % on sigma for regular ensembles; widen if needed
    lo = guess * 0.99
    hi = min(guess * 1.03, sh * 1.001)
    it_lo = 0
    for _ in range(60):
        good, it_lo = ok(lo)
        if good:
            break
        hi, lo = lo, lo * 0.8
    else:
        return 0.0, lo, 0
    for _ in range(60):
        good, it = ok(hi)
        if not good:
            break
        lo, it_lo = hi, it
        hi = hi * 1.05
    return lo, hi, it_lo


# ======================================================================
# BI-AWGN: Gaussian approximation
# ======================================================================
_PHI_SQRT_MAX = 40.0  # table covers x in [0, 1600]
_PHI_FORMS = ("integral", "closed-form")


@lru_cache(maxsize=1)
def _phi_table() -> tuple[np.ndarray, np.ndarray]:
    """(sqrt(x), ln phi(x)) on a grid uniform in sqrt(x), 8001 points up to x = 1600.

    Uses ``phi(x) = (2/sqrt(pi)) exp(-x/4) J(x)``, ``J(x) = int_0^inf exp(-v^2)
    sech(sqrt(x) v) dv`` (substitute ``u = 2 sqrt(x) v`` in the defining
    integral), integrated numerically with ``scipy.integrate.quad_vec``.
    """
    from scipy.integrate import quad_vec

    r = np.linspace(0.0, _PHI_SQRT_MAX, 8001)

    def f(v):
        a = r * v
        # sech(a) = 2 exp(-a) / (1 + exp(-2a)), stable for large a
        return np.exp(-v * v) * 2.0 * np.exp(-a) / (1.0 + np.exp(-2.0 * a))

    J, _ = quad_vec(f, 0.0, np.inf, epsabs=1e-14, epsrel=1e-12)
    lnphi = math.log(2.0 / math.sqrt(math.pi)) - r * r / 4.0 + np.log(J)
    lnphi[0] = 0.0
    r.setflags(write=False)
    lnphi.setflags(write=False)
    return r, lnphi


@nb.njit(**NUMBA_OPTS)
def _lnphi_asym(x):
    # phi(x) ~ sqrt(pi/x) exp(-x/4) (1 - 10/(7x)) for large x (Chung, Richardson & Urbanke 2001)
    return 0.5 * math.log(math.pi / x) - 0.25 * x + math.log1p(-10.0 / (7.0 * x))


@nb.njit(**NUMBA_OPTS)
def _lnphi_scalar(x, rt, lt, form):
    """ln phi(x); form 0 = table of the integral, 1 = the closed-form approximation."""
    if x <= 0.0:
        return 0.0
    if form == 1:
        if x < 10.0:
            # phi(x) ~ exp(-0.4527 x^0.86 + 0.0218) for 0 < x < 10 (same paper)
            return min(-0.4527 * x**0.86 + 0.0218, 0.0)
        return _lnphi_asym(x)
    r = math.sqrt(x)
    if r <= rt[-1]:
        return np.interp(r, rt, lt)
    return _lnphi_asym(x)


@nb.njit(**NUMBA_OPTS)
def _asym_inverse(ly, x0):
    """Solve ``_lnphi_asym(x) = ly`` for ``x >= x0`` by Newton (the function decreases)."""
    x = max(x0, -4.0 * ly)
    for _ in range(100):
        g = _lnphi_asym(x) - ly
        dg = -0.5 / x - 0.25 + (10.0 / 7.0) / (x * x * (1.0 - 10.0 / (7.0 * x)))
        step = g / dg
        x = max(x - step, 0.5 * x)
        if abs(step) <= 1e-13 * x:
            break
    return x


@nb.njit(**NUMBA_OPTS)
def _lnphi_inv_scalar(ly, rt, neg_lt, form):
    """Inverse of :func:`_lnphi_scalar`: x >= 0 with ln phi(x) = ly (ly <= 0)."""
    if ly >= 0.0:
        return 0.0
    if form == 1:
        small_end = -0.4527 * 10.0**0.86 + 0.0218
        if ly >= small_end:
            return ((0.0218 - ly) / 0.4527) ** (1.0 / 0.86)
        return _asym_inverse(ly, 10.0)
    if -ly <= neg_lt[-1]:
        r = np.interp(-ly, neg_lt, rt)
        return r * r
    return _asym_inverse(ly, rt[-1] * rt[-1])


@nb.njit(**NUMBA_OPTS)
def _ga_step_kernel(lam, rho, s, t, rt, lt, neg_lt, form):
    """One GA iteration for irregular ensembles (arrays indexed by degree)."""
    a = 0.0
    for i in range(1, lam.size):
        if lam[i] > 0.0:
            a += lam[i] * math.exp(_lnphi_scalar(s + (i - 1) * t, rt, lt, form))
    a = min(a, 1.0)
    out = 0.0
    for j in range(2, rho.size):  # degree-1 checks send mean 0
        if rho[j] > 0.0:
            if a >= 1.0:
                continue
            y = -math.expm1((j - 1) * math.log1p(-a))  # 1 - (1 - a)^(j-1)
            if y <= 0.0:
                return np.inf
            out += rho[j] * _lnphi_inv_scalar(math.log(y), rt, neg_lt, form)
    return out


@nb.njit(**NUMBA_OPTS)
def _ga_kernel(lam, rho, s, rt, lt, neg_lt, form, max_iter, mean_max, stall, trace):
    """Iterate the GA from t = 0. Returns (status, iterations); fills ``trace`` if long enough.

    status 1 = mean reached ``mean_max``; 0 = stalled; -1 = iteration cap.
    """
    t = 0.0
    if trace.size > 0:
        trace[0] = 0.0
    for it in range(1, max_iter + 1):
        tn = _ga_step_kernel(lam, rho, s, t, rt, lt, neg_lt, form)
        if it < trace.size:
            trace[it] = tn
        if tn >= mean_max:
            return 1, it
        if tn - t <= stall * (1.0 + t):
            return 0, it
        t = tn
    return -1, max_iter


def _phi_form_code(form: str) -> int:
    if form not in _PHI_FORMS:
        raise InputError(f"The 'phi' option of the Gaussian approximation must be one of "
                         f"{', '.join(map(repr, _PHI_FORMS))}; got {form!r}.")
    return _PHI_FORMS.index(form)


def phi(x, form: str = "integral"):
    """``phi(x) = 1 - E[tanh(U/2)]`` for ``U ~ N(x, 2x)``; ``phi(0) = 1``.

    Parameters
    ----------
    x : float or ndarray, >= 0
        Mean of a symmetric Gaussian LLR density.
    form : {"integral", "closed-form"}
        ``"integral"``: numerical integration (tabulated once, interpolated in
        ``sqrt(x)``, relative error about 1e-6; asymptotic form beyond
        x = 1600). ``"closed-form"``: ``exp(-0.4527 x^0.86 + 0.0218)`` below 10
        and ``sqrt(pi/x) exp(-x/4) (1 - 10/(7x))`` above (Chung, Richardson &
        Urbanke 2001).

    Returns
    -------
    float or ndarray, float64, in (0, 1]
    """
    code = _phi_form_code(form)
    rt, lt = _phi_table()
    xs = np.atleast_1d(np.asarray(x, dtype=np.float64))
    v = np.array([math.exp(_lnphi_scalar(float(xx), rt, lt, code)) for xx in xs.ravel()])
    return float(v[0]) if np.ndim(x) == 0 else v.reshape(xs.shape)


def phi_inverse(y, form: str = "integral"):
    """Inverse of :func:`phi` on (0, 1]: the mean ``x >= 0`` with ``phi(x) = y``."""
    code = _phi_form_code(form)
    rt, lt = _phi_table()
    neg_lt = -lt
    ys = np.atleast_1d(np.asarray(y, dtype=np.float64))
    if np.any(~(ys > 0)) or np.any(ys > 1):
        raise InputError("phi_inverse needs values in (0, 1].")
    v = np.array([_lnphi_inv_scalar(math.log(yy), rt, neg_lt, code) for yy in ys.ravel()])
    return float(v[0]) if np.ndim(y) == 0 else v.reshape(ys.shape)


def awgn_evolution_gaussian(dd, sigma: float, max_iter: int = 1000,
                            mean_max: float = 400.0, phi_form: str = "integral") -> np.ndarray:
    """Means of check-to-variable messages per iteration under the Gaussian approximation.

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    sigma : float
        Noise standard deviation (BPSK, Es = 1); the channel LLR mean is ``2/sigma**2``.
    max_iter : int
    mean_max : float
        Stop once the mean exceeds this (decoding success).
    phi_form : {"integral", "closed-form"}

    Returns
    -------
    ndarray of shape (iterations + 1,), float64, starting with 0.
    """
    dd = _as_dd(dd)
    sigma = _check_positive("sigma", sigma)
    max_iter = _check_positive("max_iter", max_iter, integer=True)
    code = _phi_form_code(phi_form)
    rt, lt = _phi_table()
    trace = np.zeros(max_iter + 1)
    _, it = _ga_kernel(dd.lam, dd.rho, 2.0 / sigma**2, rt, lt, -lt, code, max_iter,
                       float(mean_max), 0.0, trace)
    return trace[: it + 1].copy()


def awgn_threshold_gaussian(dd, *, tol: float = 1e-5, max_iter: int = 20000,
                            mean_max: float = 400.0, stall: float = 1e-12,
                            phi_form: str = "integral") -> ThresholdResult:
    """**Approximate** BI-AWGN BP threshold by the Gaussian approximation (GA).

    Every message density is taken as the symmetric Gaussian ``N(m, 2m)``; the
    check-to-variable mean obeys (Chung, Richardson & Urbanke 2001, irregular case)

        t_l = sum_j rho_j phi^{-1}(1 - [1 - sum_i lambda_i phi(s + (i-1) t_{l-1})]^(j-1)),

    with ``s = 2/sigma**2`` and ``t_0 = 0``; decoding succeeds when ``t_l``
    grows without bound. For regular ensembles the GA threshold lies within
    about 0.1 dB of the exact one.

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    tol : float
        Bracket width on ``sigma``.
    max_iter : int
        Iteration cap per trial.
    mean_max : float
        Mean counted as "unbounded" (error probability ``Q(sqrt(m/2))``, about 1e-45 at 400).
    stall : float
        A trial fails when the mean grows by less than ``stall * (1 + t)``.
    phi_form : {"integral", "closed-form"}
        How ``phi`` is evaluated (see :func:`phi`).

    Returns
    -------
    ThresholdResult
        ``approximate = True``.
    """
    t0 = time.perf_counter()
    dd = _as_dd(dd)
    tol = _check_positive("tol", tol, high=0.1)
    max_iter = _check_positive("max_iter", max_iter, integer=True)
    mean_max = _check_positive("mean_max", mean_max, high=1e4)
    stall = _check_positive("stall", stall, high=0.1)
    code = _phi_form_code(phi_form)
    R = dd.design_rate
    if not 0.0 < R < 1.0:
        raise InputError(f"The ensemble's design rate is {R:.4g}; a threshold needs 0 < R < 1.")
    settings = {"tol": tol, "max_iter": max_iter, "mean_max": mean_max, "stall": stall,
                "phi": phi_form}
    if dd.lam[1] > 0:
        settings["note"] = "degree-1 variable nodes: threshold 0"
        return _finish(dd, "awgn", "gaussian", "sigma", 0.0, 0, 0.0, settings, t0,
                       approximate=True)
    rt, lt = _phi_table()
    neg_lt = -lt
    empty = np.zeros(0)

    def ok(sig):
        st, it = _ga_kernel(dd.lam, dd.rho, 2.0 / sig**2, rt, lt, neg_lt, code, max_iter,
                            mean_max, stall, empty)
        return st == 1, it

    hi = biawgn_shannon_sigma(R) * 1.0001
    lo, hi, it = _bisect(ok, 0.0, hi, tol)
    return _finish(dd, "awgn", "gaussian", "sigma", lo, it, hi - lo, settings, t0,
                   approximate=True)


# ======================================================================
# BSC: Gallager A / B density evolution (binary messages, closed form)
# ======================================================================
def gallager_thresholds_by_degree(dd, rule: str = "b", b: int | None = None) -> np.ndarray:
    """Flip threshold ``t_d`` per variable degree ``d`` (array indexed by degree).

    A degree-d bit sends the opposite of its channel value when at least
    ``t_d`` of its ``d - 1`` extrinsic check messages disagree with it. Rule
    ``"a"``: ``t_d = d - 1``; rule ``"b"``: ``t_d = b`` capped at ``d - 1``, or,
    with ``b`` None, ``min(ceil(d/2) + 1, d - 1)``. Degree-1 bits
    get ``t_1 = 1``, which they cannot reach. The same rule as
    :mod:`ldpcmarg.decoders.hard_decision`.
    """
    dd = _as_dd(dd)
    if rule not in ("a", "b"):
        raise InputError(f"The Gallager rule must be 'a' or 'b'; got {rule!r}.")
    d = np.arange(dd.lam.size, dtype=np.int64)
    if rule == "a":
        t = d - 1
    elif b is None:
        from ..decoders.hard_decision import gallager_b_default_threshold

        t = gallager_b_default_threshold(d)
    else:
        b = _check_positive("b", b, low=0.5, integer=True)
        dmax = int(np.flatnonzero(dd.lam).max())
        if b > max(dmax - 1, 1):
            raise InputError(
                f"The 'b' option of Gallager B must be at most d - 1 = {max(dmax - 1, 1)} "
                f"for this ensemble (largest bit degree {dmax}); got {b}."
            )
        t = np.minimum(b, d - 1)
    return np.ascontiguousarray(np.maximum(t, 1), dtype=np.int64)


@nb.njit(**NUMBA_OPTS)
def _binom_tail(k, q, t):
    """``P(Binomial(k, q) >= t)`` for small integer k (direct sum)."""
    if t <= 0:
        return 1.0
    if t > k:
        return 0.0
    s = 0.0
    c = 1.0  # C(k, j), built up from j = 0
    for j in range(k + 1):
        if j >= t:
            s += c * q**j * (1.0 - q) ** (k - j)
        c = c * (k - j) / (j + 1)
    return s


@nb.njit(**NUMBA_OPTS)
def _gallager_check_error(rho, x):
    """Check-to-bit message error probability ``(1 - rho(1 - 2x)) / 2``."""
    z = 1.0 - 2.0 * x
    r = 0.0
    for d in range(rho.size - 1, 0, -1):
        r = r * z + rho[d]
    return 0.5 * (1.0 - r)


@nb.njit(**NUMBA_OPTS)
def _gallager_var_error(lam, thresh, p, q):
    """Bit-to-check message error probability given check-message error ``q``.

    ``sum_d lam_d [p P(Bin(d-1, 1-q) < t_d) + (1-p) P(Bin(d-1, q) >= t_d)]``.
    """
    v = 0.0
    for d in range(1, lam.size):
        if lam[d] == 0.0:
            continue
        k = d - 1
        stay_wrong = 1.0 - _binom_tail(k, 1.0 - q, thresh[d])
        go_wrong = _binom_tail(k, q, thresh[d])
        v += lam[d] * (p * stay_wrong + (1.0 - p) * go_wrong)
    return v


@nb.njit(**NUMBA_OPTS)
def _gallager_decision_error(node_frac, p, q):
    """Bit-decision error: majority vote of channel value and d check messages (tie: channel)."""
    v = 0.0
    for d in range(node_frac.size):
        if node_frac[d] == 0.0:
            continue
        # channel wrong: the decision is right only when more than (d+1)/2 of the
        # d check messages are right; channel right: wrong when more than (d+1)/2 are wrong
        need = (d + 1) // 2 + 1
        stay_wrong = 1.0 - _binom_tail(d, 1.0 - q, need)
        go_wrong = _binom_tail(d, q, need)
        v += node_frac[d] * (p * stay_wrong + (1.0 - p) * go_wrong)
    return v


@nb.njit(**NUMBA_OPTS)
def _gallager_kernel(lam, rho, thresh, p, max_iter, target, stall):
    """Run ``x <- f(p, q(x))`` from ``x = p``; return ``(status, iterations, x)``.

    Status 1: ``x <= target``; 0: stalled (the decrease fell below ``stall * x``)
    or grew; -1: iteration cap (counted as failure).
    """
    x = p
    for it in range(1, max_iter + 1):
        xn = _gallager_var_error(lam, thresh, p, _gallager_check_error(rho, x))
        if xn <= target:
            return 1, it, xn
        if x - xn <= stall * x:
            return 0, it, xn
        x = xn
    return -1, max_iter, x


@dataclass
class GallagerEvolution:
    """Density evolution of Gallager A/B on the BSC, iteration by iteration.

    Attributes
    ----------
    p : float
        Crossover probability of the BSC.
    message_error : ndarray of shape (L + 1,), float64
        ``x_l``: probability that a bit-to-check message is wrong after ``l``
        iterations (``x_0 = p``).
    check_error : ndarray of shape (L + 1,), float64
        ``q_l = (1 - rho(1 - 2 x_l)) / 2``: check-to-bit messages computed from ``x_l``.
    decision_error : ndarray of shape (L + 1,), float64
        Bit-decision error probability after ``l`` iterations (``[0] = p``, the
        channel's own decisions; ``[l]`` uses ``q_{l-1}``), averaged over bits.
    thresholds : ndarray of int64
        Flip threshold ``t_d`` per variable degree (index = degree).
    """

    p: float
    message_error: np.ndarray
    check_error: np.ndarray
    decision_error: np.ndarray
    thresholds: np.ndarray


def gallager_bsc_evolution(dd, p: float, *, rule: str = "b", b: int | None = None,
                           max_iter: int = 100) -> GallagerEvolution:
    """Density evolution of Gallager's algorithm A or B on BSC(p).

    For a tree-like neighbourhood the messages are binary and the recursion is
    closed form (Gallager 1963; Richardson & Urbanke, *Modern Coding Theory*,
    2008, sec. 4.10; written here for edge-perspective ``lambda``, ``rho``):

    ``q_l = (1 - rho(1 - 2 x_l)) / 2``,
    ``x_{l+1} = sum_d lambda_d [p P(Bin(d-1, 1-q_l) < t_d) + (1-p) P(Bin(d-1, q_l) >= t_d)]``,

    which for a regular (dv, dc) ensemble and Gallager A (``t = dv - 1``) is
    ``x_{l+1} = p - p ((1 + (1-2x_l)^(dc-1))/2)^(dv-1) + (1-p) ((1 - (1-2x_l)^(dc-1))/2)^(dv-1)``.

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    p : float
        Crossover probability in [0, 1/2].
    rule : {"a", "b"}
    b : int, optional
        Gallager-B threshold (see :func:`gallager_thresholds_by_degree`).
    max_iter : int
        Number of iterations ``L`` to evolve.

    Returns
    -------
    GallagerEvolution
    """
    dd = _as_dd(dd)
    if not (isinstance(p, int | float | np.floating) and 0.0 <= float(p) <= 0.5):
        raise InputError(f"The crossover probability must be in [0, 1/2]; got {p!r}.")
    p = float(p)
    max_iter = _check_positive("max_iter", max_iter, integer=True)
    thr = gallager_thresholds_by_degree(dd, rule, b)
    lam = np.ascontiguousarray(dd.lam, dtype=np.float64)
    rho = np.ascontiguousarray(dd.rho, dtype=np.float64)
    node = np.ascontiguousarray(dd.var_node_fractions, dtype=np.float64)
    xs = np.empty(max_iter + 1)
    qs = np.empty(max_iter + 1)
    ds = np.empty(max_iter + 1)
    xs[0], ds[0] = p, p
    for it in range(max_iter + 1):
        qs[it] = _gallager_check_error(rho, xs[it])
        if it < max_iter:
            xs[it + 1] = _gallager_var_error(lam, thr, p, qs[it])
            ds[it + 1] = _gallager_decision_error(node, p, qs[it])
    return GallagerEvolution(p=p, message_error=xs, check_error=qs, decision_error=ds,
                             thresholds=thr)


def gallager_bsc_threshold(dd, *, rule: str = "b", b: int | None = None, tol: float = 1e-7,
                           max_iter: int = 100_000, target: float = 1e-12) -> ThresholdResult:
    """Threshold ``p*`` of Gallager A or B on the BSC by density evolution.

    Bisection on ``p`` in (0, 1/2): a trial succeeds when the message error
    probability of :func:`gallager_bsc_evolution` falls to ``target``; it fails
    when the recursion stalls at a non-zero fixed point, grows, or reaches
    ``max_iter``. ``b`` is a fixed threshold for every iteration (Gallager's
    variant that re-optimises ``b`` per iteration is not offered).

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    rule : {"a", "b"}
    b : int, optional
        Gallager-B threshold; default ``min(ceil(d/2) + 1, d - 1)`` per degree.
    tol : float
        Final bracket width.
    max_iter : int
        Iteration cap per trial.
    target : float
        Message error probability counted as convergence to zero.

    Returns
    -------
    ThresholdResult
        ``channel = "bsc"``, ``method = "gallager-a"`` or ``"gallager-b"``,
        ``parameter = "p"``; ``capacity_limit`` is the BSC crossover probability
        at which capacity equals the design rate.

    Examples
    --------
    >>> res = gallager_bsc_threshold(DegreeDistribution.regular(3, 6), rule="a")
    >>> round(res.threshold, 4)
    0.0394
    """
    t0 = time.perf_counter()
    dd = _as_dd(dd)
    tol = _check_positive("tol", tol, high=0.1)
    max_iter = _check_positive("max_iter", max_iter, integer=True)
    target = _check_positive("target", target, high=1e-3)
    thr = gallager_thresholds_by_degree(dd, rule, b)
    lam = np.ascontiguousarray(dd.lam, dtype=np.float64)
    rho = np.ascontiguousarray(dd.rho, dtype=np.float64)
    capped = [0]

    def ok(p):
        st, it, _ = _gallager_kernel(lam, rho, thr, p, max_iter, target, 1e-15)
        capped[0] += st == -1
        return st == 1, it

    lo, hi, it = _bisect(ok, 0.0, 0.5, tol)
    settings = {"max_iter": max_iter, "target": target, "tol": tol,
                "capped_trials": int(capped[0]),
                "flip_thresholds": {int(d): int(thr[d]) for d in np.flatnonzero(dd.lam)}}
    if rule == "b" and b is not None:
        settings["b"] = int(b)
    return _finish(dd, "bsc", f"gallager-{rule}", "p", lo, it, hi - lo, settings, t0)


# ======================================================================
# BI-AWGN Shannon limit (from ldpcmarg.analysis.capacity)
# ======================================================================
@lru_cache(maxsize=256)
def biawgn_shannon_sigma(rate: float) -> float:
    """Noise std ``sigma`` at which the BI-AWGN capacity equals ``rate`` (0 < rate < 1).

    From :func:`ldpcmarg.analysis.capacity.biawgn_shannon_limit_ebn0_db` (numerical
    integration of the capacity); ``sigma**2 = 1 / (2 R 10**(EbN0/10))``.
    """
    from ..link.channels import ebn0_to_sigma
    from .capacity import biawgn_shannon_limit_ebn0_db

    if not 0.0 < rate < 1.0:
        raise InputError(f"The rate must be in (0, 1) for a Shannon limit; got {rate!r}.")
    return ebn0_to_sigma(biawgn_shannon_limit_ebn0_db(rate), rate)


# ======================================================================
# dispatcher
# ======================================================================
def compute_threshold(dd, channel: str = "bec", method: str | None = None,
                      **options: Any) -> ThresholdResult:
    """Threshold of an ensemble for a channel and method.

    Parameters
    ----------
    dd : DegreeDistribution, ParityCheckCode or (lambda, rho) pair
    channel : {"bec", "awgn", "bsc"}
    method : {"exact", "discretized", "gaussian", "gallager-a", "gallager-b"}, optional
        Default: ``"exact"`` for the BEC, ``"discretized"`` for the AWGN
        channel, ``"gallager-b"`` for the BSC (the BSC has only the Gallager
        A/B decoders here, not BP).
    **options
        Passed to :func:`bec_threshold`, :func:`awgn_threshold_discretized`,
        :func:`awgn_threshold_gaussian` or :func:`gallager_bsc_threshold`.
    """
    if channel not in METHODS:
        raise InputError(
            f"Unknown channel {channel!r} for thresholds; accepted: {', '.join(METHODS)}."
        )
    method = method or METHODS[channel][0]
    if method not in METHODS[channel]:
        raise InputError(
            f"Method {method!r} is not available for the {channel} channel; "
            f"accepted: {', '.join(METHODS[channel])}."
        )
    if channel == "bsc":
        allowed = {"b", "tol", "max_iter", "target"}
        unknown = sorted(set(options) - allowed)
        if unknown or (method == "gallager-a" and "b" in options):
            bad = unknown[0] if unknown else "b"
            raise InputError(
                f"The {method} bsc threshold has no option {bad!r}; accepted: "
                f"{', '.join(sorted(allowed - ({'b'} if method == 'gallager-a' else set())))}."
            )
        return gallager_bsc_threshold(dd, rule=method[-1], **options)
    fn = {("bec", "exact"): bec_threshold,
          ("awgn", "discretized"): awgn_threshold_discretized,
          ("awgn", "gaussian"): awgn_threshold_gaussian}[(channel, method)]
    import inspect

    accepted = [p for p in inspect.signature(fn).parameters if p != "dd"]
    unknown = sorted(set(options) - set(accepted))
    if unknown:
        raise InputError(
            f"The {method} {channel} threshold has no option {unknown[0]!r}; "
            f"accepted: {', '.join(accepted)}."
        )
    return fn(dd, **options)
