"""Tree-reweighted entropy weights from sampled hyperforests of the factor graph.

A *hyperforest* is a set of checks whose factor subgraph (those checks, their
bits and the edges between them) has no cycle. Averaging the indicator
vectors of random maximal hyperforests gives check weights ``rho`` that are a
convex combination of forests, so the reweighted entropy

    H_rho(tau) = sum_c rho_c H(tau_c) + sum_i (1 - sum_{c ∋ i} rho_c) H_b(tau_i)

is concave on the local polytope and ``max_tau [-<lambda, tau> + H_rho(tau)]``
bounds ``ln Z`` from above (Wainwright, Jaakkola & Willsky, IEEE Trans. IT
2005). With degree-6 checks no hyperforest can reach every bit of a long code,
which is why the forests are maximal rather than spanning.

For a user-supplied ``rho`` the module tests the sufficient concavity
condition of Heskes (JAIR 2006): each check's weight can be shared among its
bits, ``alpha_ic >= 0``, ``sum_{i ∈ c} alpha_ic <= rho_c``, with
``sum_{c ∋ i} (rho_c - alpha_ic) <= 1`` for every bit. Feasibility is a small
linear programme (``scipy.optimize.linprog``). For sampled weights an
allocation is also built directly from the sampled trees, each rooted at a
random bit (every check gives its weight to its parent bit), which always
satisfies the condition.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba as nb
import numpy as np

from .._settings import NUMBA_OPTS
from ..errors import InputError, SolverError

__all__ = [
    "HyperforestSample",
    "ConcavityReport",
    "sample_hyperforests",
    "trw_check_weights",
    "check_concavity",
]


@dataclass(frozen=True)
class HyperforestSample:
    """Summary of sampled maximal hyperforests.

    Attributes
    ----------
    rho : ndarray of shape (m,), float64
        Fraction of samples that contain each check.
    alpha : ndarray of shape (E,), float64
        Tree allocation per Tanner-graph edge (check-major order): fraction of
        samples in which the edge's check is in the forest and the edge's bit
        is that check's parent (the bit nearest the randomly chosen root).
    num_samples : int
    sizes : ndarray of shape (num_samples,), int64
        Number of checks in each sampled forest.
    """

    rho: np.ndarray
    alpha: np.ndarray
    num_samples: int
    sizes: np.ndarray


@dataclass(frozen=True)
class ConcavityReport:
    """Outcome of the sufficient concavity test for check weights ``rho``.

    Attributes
    ----------
    guaranteed : bool
        True when an allocation satisfying Heskes' condition exists (then the
        reweighted entropy is concave on the local polytope and ``F`` convex).
        False means the sufficient condition fails; concavity is then not
        guaranteed (it may still hold).
    alpha : ndarray of shape (E,), float64, or None
        A feasible allocation per edge (check-major order) when ``guaranteed``.
    max_excess : float
        ``max_i [sum_{c ∋ i} (rho_c - alpha_ic) - 1]`` for the allocation found
        (``<= 0`` up to rounding when guaranteed), or ``inf`` when infeasible.
    reason : str
        One sentence for reports.
    """

    guaranteed: bool
    alpha: np.ndarray | None
    max_excess: float
    reason: str


@nb.njit(**NUMBA_OPTS)
def _find(parent, i):
    root = i
    while parent[root] != root:
        root = parent[root]
    while parent[i] != root:  # path compression
        nxt = parent[i]
        parent[i] = root
        i = nxt
    return root


@nb.njit(**NUMBA_OPTS)
def _sample_kernel(n, m, check_ptr, edge_var, var_ptr, var_edges, edge_check,
                   orders, bit_orders, counts, alpha_counts, sizes):
    """Greedy maximal hyperforests, one per row of ``orders`` (check permutations).

    A check joins the forest when its bits lie in pairwise different
    union-find components; the forest is maximal because components only grow.
    Then each tree is rooted at its first bit in ``bit_orders[s]`` (a uniformly
    random bit of the tree) and
    breadth-first search assigns every forest check its parent bit.
    Accumulates ``counts`` (m,), ``alpha_counts`` (E,) and ``sizes``.
    """
    parent = np.empty(n, dtype=np.int64)
    in_forest = np.zeros(m, dtype=np.bool_)
    seen_root = np.empty(n, dtype=np.int64)
    visited = np.zeros(n, dtype=np.bool_)
    queue = np.empty(n, dtype=np.int64)
    for s in range(orders.shape[0]):
        for i in range(n):
            parent[i] = i
            visited[i] = False
        for c in range(m):
            in_forest[c] = False
        size = 0
        for t in range(m):
            c = orders[s, t]
            a = check_ptr[c]
            b = check_ptr[c + 1]
            ok = True
            for e in range(a, b):
                seen_root[e - a] = _find(parent, edge_var[e])
            d = b - a
            for p in range(d):
                for q in range(p + 1, d):
                    if seen_root[p] == seen_root[q]:
                        ok = False
                        break
                if not ok:
                    break
            if ok:
                in_forest[c] = True
                size += 1
                r0 = seen_root[0] if d > 0 else -1
                for p in range(1, d):
                    rp = _find(parent, seen_root[p])
                    r0 = _find(parent, r0)
                    if rp != r0:
                        parent[rp] = r0
                counts[c] += 1
        sizes[s] = size
        # root every tree at the first of its bits in a random bit order (a
        # uniformly random bit of the component), then BFS over forest checks
        for t in range(n):
            root = bit_orders[s, t]
            if visited[root]:
                continue
            head = 0
            tail = 0
            queue[tail] = root
            tail += 1
            visited[root] = True
            while head < tail:
                v = queue[head]
                head += 1
                for pe in range(var_ptr[v], var_ptr[v + 1]):
                    e = var_edges[pe]
                    c = edge_check[e]
                    if not in_forest[c]:
                        continue
                    in_forest[c] = False  # reached first from v: v is its parent bit
                    alpha_counts[e] += 1
                    for e2 in range(check_ptr[c], check_ptr[c + 1]):
                        w = edge_var[e2]
                        if not visited[w]:
                            visited[w] = True
                            queue[tail] = w
                            tail += 1
        # checks of degree 0 never meet a bit: give them no parent (no alpha needed)
    return 0


def _seed_rng(seed) -> np.random.Generator:
    if isinstance(seed, np.random.Generator):
        return seed
    return np.random.default_rng(np.random.SeedSequence(seed))


def sample_hyperforests(code, num_samples: int = 200, seed=0) -> HyperforestSample:
    """Sample random maximal hyperforests and return their averages.

    Parameters
    ----------
    code : ParityCheckCode
    num_samples : int
        Number of forests (each built greedily from a uniformly random check order).
    seed : int, SeedSequence or Generator
        Randomness (fixed seed gives fixed weights).

    Returns
    -------
    HyperforestSample
    """
    num_samples = int(num_samples)
    if num_samples < 1:
        raise InputError(f"num_samples must be an integer >= 1; got {num_samples}.")
    rng = _seed_rng(seed)
    m, n = code.m, code.n
    orders = np.empty((num_samples, m), dtype=np.int64)
    for s in range(num_samples):
        orders[s] = rng.permutation(m)
    bit_orders = np.empty((num_samples, n), dtype=np.int64)
    for s in range(num_samples):
        bit_orders[s] = rng.permutation(n)
    counts = np.zeros(m, dtype=np.int64)
    alpha_counts = np.zeros(code.num_edges, dtype=np.int64)
    sizes = np.zeros(num_samples, dtype=np.int64)
    _sample_kernel(n, m, code.check_ptr, code.edge_var, code.var_ptr, code.var_edges,
                   code.edge_check, orders, bit_orders, counts, alpha_counts, sizes)
    return HyperforestSample(
        rho=counts / float(num_samples),
        alpha=alpha_counts / float(num_samples),
        num_samples=num_samples,
        sizes=sizes,
    )


def trw_check_weights(code, num_samples: int = 200, seed=0) -> np.ndarray:
    """Tree-reweighted check weights ``rho_c`` from sampled maximal hyperforests.

    Parameters
    ----------
    code : ParityCheckCode
    num_samples : int
        Number of sampled forests; ``rho`` is an exact convex combination of
        forests for any sample size, so the entropy stays concave and the
        ``ln Z`` bound stays valid; more samples only make ``rho`` smoother.
    seed : int, SeedSequence or Generator

    Returns
    -------
    ndarray of shape (m,), float64
        ``rho_c`` in [0, 1]: the fraction of samples containing check ``c``.
        Checks of degree 0 or 1 are in every maximal forest (weight 1).
    """
    return sample_hyperforests(code, num_samples=num_samples, seed=seed).rho


def _edge_sums(code, alpha_or_rho_edge):
    """Per-bit sums of an edge-indexed vector."""
    return np.bincount(code.edge_var, weights=alpha_or_rho_edge, minlength=code.n)


def check_concavity(code, rho, *, alpha=None, tol: float = 1e-9) -> ConcavityReport:
    """Test Heskes' sufficient condition for concavity of the reweighted entropy.

    Parameters
    ----------
    code : ParityCheckCode
    rho : array_like of shape (m,), float
        Check weights (must be >= 0).
    alpha : array_like of shape (E,), optional
        A candidate allocation (e.g. ``HyperforestSample.alpha``); checked
        first, and the LP is solved only if it fails.
    tol : float
        Slack allowed for rounding.

    Returns
    -------
    ConcavityReport
    """
    rho = np.asarray(rho, dtype=np.float64).reshape(-1)
    if rho.shape != (code.m,):
        raise InputError(
            f"rho must have one weight per check (m = {code.m}); got shape {rho.shape}."
        )
    if not np.all(np.isfinite(rho)) or np.any(rho < 0):
        raise InputError("rho must be finite and >= 0.")
    rho_edge = rho[code.edge_check]
    load = _edge_sums(code, rho_edge)  # sum_{c ∋ i} rho_c

    def excess(a):
        return float(np.max(load - _edge_sums(code, a) - 1.0)) if code.n else -1.0

    if alpha is not None:
        a = np.asarray(alpha, dtype=np.float64).reshape(-1)
        if a.shape == (code.num_edges,) and np.all(a >= -tol):
            per_check = np.bincount(code.edge_check, weights=a, minlength=code.m)
            ex = excess(a)
            if np.all(per_check <= rho + tol) and ex <= tol:
                return ConcavityReport(True, a, ex, "allocation from the sampled trees")
    if np.all(load <= 1.0 + tol):
        a = np.zeros(code.num_edges)
        return ConcavityReport(True, a, excess(a), "every bit has total check weight <= 1")
    import scipy.sparse as sp
    from scipy.optimize import linprog

    E = code.num_edges
    rows_c = sp.csr_matrix((np.ones(E), (code.edge_check, np.arange(E))), shape=(code.m, E))
    rows_i = sp.csr_matrix((-np.ones(E), (code.edge_var, np.arange(E))), shape=(code.n, E))
    A = sp.vstack([rows_c, rows_i]).tocsr()
    b = np.concatenate([rho, 1.0 - load])
    res = linprog(np.zeros(E), A_ub=A, b_ub=b, bounds=(0, None), method="highs")
    if res.status == 2:
        return ConcavityReport(False, None, float("inf"),
                               "no allocation satisfies the sufficient condition (LP infeasible)")
    if res.status != 0:
        raise SolverError(f"Concavity allocation LP failed: {res.message}")
    a = np.maximum(np.asarray(res.x, dtype=np.float64), 0.0)
    return ConcavityReport(True, a, excess(a), "allocation found by linear programming")
