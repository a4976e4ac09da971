"""Independent brute-force references for the fast kernels (pure numpy / Python).

Written without reference to the decoders they check:

* :func:`exact_posteriors` -- bitwise posteriors by enumerating all ``2**n`` words;
* :func:`peeling_decode` -- the BEC peeling decoder (resolve checks with one erasure);
* :func:`random_tree_code` -- a random cycle-free (tree) Tanner graph;
* :func:`random_regular_H` -- a random (dv, dc)-regular matrix without repeated edges;
* :func:`nullspace_basis` -- a GF(2) basis of the code, for random codewords;
* :func:`min_sum_single_check` -- closed form of min-sum on a single parity check.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from ldpcmarg.code import gf2


def all_words(n: int) -> np.ndarray:
    """Every binary word of length n, shape (2**n, n), uint8 (row j = binary digits of j)."""
    j = np.arange(2**n, dtype=np.int64)
    return ((j[:, None] >> np.arange(n)) & 1).astype(np.uint8)


def exact_posteriors(H: np.ndarray, llr: np.ndarray) -> np.ndarray:
    """Exact ``P(x_i = 1 | y)`` for ``p(x|y) ~ exp(-sum_i llr_i x_i) 1[Hx = 0]``.

    Parameters
    ----------
    H : ndarray of shape (m, n), 0/1 (n <= 20)
    llr : ndarray of shape (n,) or (F, n)

    Returns
    -------
    ndarray of the shape of ``llr``, float64
    """
    H = np.asarray(H, dtype=np.int64)
    n = H.shape[1]
    words = all_words(n)
    cw = words[((words.astype(np.int64) @ H.T) % 2 == 0).all(axis=1)].astype(np.float64)
    lam = np.atleast_2d(np.asarray(llr, dtype=np.float64))
    logw = -(lam @ cw.T)                                # (F, #codewords)
    logw -= logw.max(axis=1, keepdims=True)
    w = np.exp(logw)
    p1 = (w @ cw) / w.sum(axis=1, keepdims=True)
    return p1[0] if np.ndim(llr) == 1 else p1


def exact_posterior_llr(H: np.ndarray, llr: np.ndarray) -> np.ndarray:
    """Exact posterior LLRs ``ln P(x_i=0|y) - ln P(x_i=1|y)`` by enumeration, in the log domain.

    Same model as :func:`exact_posteriors`, but the sums over codewords are
    taken with ``scipy.special.logsumexp``, so LLRs of any finite magnitude
    give finite, exact results (no probabilities that round to 0 or 1).
    """
    from scipy.special import logsumexp

    H = np.asarray(H, dtype=np.int64)
    n = H.shape[1]
    words = all_words(n)
    cw = words[((words.astype(np.int64) @ H.T) % 2 == 0).all(axis=1)]
    lam = np.atleast_2d(np.asarray(llr, dtype=np.float64))
    logw = -(lam @ cw.T.astype(np.float64))             # (F, #codewords)
    out = np.empty_like(lam)
    for i in range(n):
        one = cw[:, i] == 1
        out[:, i] = logsumexp(logw[:, ~one], axis=1) - logsumexp(logw[:, one], axis=1)
    return out[0] if np.ndim(llr) == 1 else out


def boxplus(values) -> float:
    """Box-plus ``2 atanh(prod tanh(v/2))`` of LLRs, pairwise in the overflow-free form.

    ``a [+] b = sign(a) sign(b) min(|a|, |b|) + log1p(e^{-|a+b|}) - log1p(e^{-|a-b|})``
    (Hagenauer, Offer & Papke 1996); plain Python floats, any magnitude.
    """
    acc = math.inf
    for v in values:
        a, b = acc, float(v)
        s = math.copysign(1.0, a) * math.copysign(1.0, b)
        acc = s * min(abs(a), abs(b)) + math.log1p(math.exp(-abs(a + b))) \
            - math.log1p(math.exp(-abs(a - b))) if math.isfinite(a) else b
    return acc


def random_tree_code(num_checks: int, rng: np.random.Generator, degrees=(2, 3, 4)) -> np.ndarray:
    """Parity-check matrix of a random cycle-free Tanner graph.

    Grown from one bit: each new check joins one bit already in the tree and
    ``d - 1`` fresh bits (``d`` drawn from ``degrees``), so the factor graph
    stays a connected tree. Rows and columns are shuffled afterwards.

    Returns
    -------
    ndarray of shape (num_checks, n), uint8
    """
    rows = []
    n = 1
    for _ in range(num_checks):
        d = int(rng.choice(degrees))
        anchor = int(rng.integers(n))
        members = [anchor] + list(range(n, n + d - 1))
        n += d - 1
        rows.append(members)
    H = np.zeros((num_checks, n), dtype=np.uint8)
    for c, members in enumerate(rows):
        H[c, members] = 1
    H = H[rng.permutation(num_checks)][:, rng.permutation(n)]
    return H


def random_regular_H(n: int, dv: int, dc: int, rng: np.random.Generator) -> np.ndarray:
    """Random (dv, dc)-regular parity-check matrix (m = n dv / dc) without repeated edges.

    Sockets are matched by a random permutation; repeated (check, bit) pairs
    are removed by swapping the bit end with a random other edge until none is left.
    """
    assert (n * dv) % dc == 0
    m = n * dv // dc
    var_of = np.repeat(np.arange(n), dv)[rng.permutation(n * dv)]
    chk_of = np.repeat(np.arange(m), dc)
    for _ in range(100000):
        key = chk_of * n + var_of
        _, first, counts = np.unique(key, return_index=True, return_counts=True)
        dup = np.setdiff1d(np.arange(key.size), first)
        if dup.size == 0:
            break
        e = int(dup[0])
        f = int(rng.integers(key.size))
        var_of[e], var_of[f] = var_of[f], var_of[e]
    H = np.zeros((m, n), dtype=np.uint8)
    H[chk_of, var_of] = 1
    assert H.sum() == n * dv
    return H


def regular_H_by_redraw(n: int, dv: int, dc: int, seed: int) -> np.ndarray:
    """Random (dv, dc)-regular H by socket matching, redrawn until no double edges.

    Seeded: the same ``seed`` always gives the same matrix.
    """
    rng = np.random.default_rng(seed)
    m = n * dv // dc
    for _ in range(1000):
        sockets = np.repeat(np.arange(n), dv)
        rng.shuffle(sockets)
        rows = sockets.reshape(m, dc)
        if all(len(set(r)) == dc for r in rows):
            H = np.zeros((m, n), dtype=np.uint8)
            for c, r in enumerate(rows):
                H[c, r] = 1
            return H
    raise RuntimeError("no simple graph drawn")


def nullspace_basis(H: np.ndarray) -> np.ndarray:
    """A basis of ``{x : Hx = 0}`` over GF(2), shape (k, n), uint8."""
    H = np.asarray(H, dtype=np.uint8)
    n = H.shape[1]
    packed, pivots = gf2.row_reduce(H)
    R = gf2.unpack_rows(packed, n)
    free = [j for j in range(n) if j not in set(pivots.tolist())]
    basis = np.zeros((len(free), n), dtype=np.uint8)
    for t, f in enumerate(free):
        basis[t, f] = 1
        for r, p in enumerate(pivots):
            basis[t, p] = R[r, f]
    assert not ((basis.astype(np.int64) @ H.T.astype(np.int64)) % 2).any()
    return basis


def random_codewords(H: np.ndarray, count: int, rng: np.random.Generator) -> np.ndarray:
    """``count`` uniformly random codewords, shape (count, n), uint8."""
    B = nullspace_basis(H).astype(np.int64)
    coeff = rng.integers(0, 2, size=(count, B.shape[0]))
    return ((coeff @ B) % 2).astype(np.uint8)


def peeling_decode(H: np.ndarray, received: np.ndarray, erased: np.ndarray):
    """BEC peeling decoder: repeatedly solve a check that has exactly one erased bit.

    Parameters
    ----------
    H : ndarray of shape (m, n), 0/1
    received : ndarray of shape (n,), 0/1 (values at erased positions ignored)
    erased : ndarray of shape (n,), bool

    Returns
    -------
    values : ndarray (n,), uint8 -- decoded values (0 where still erased)
    still_erased : ndarray (n,), bool
    """
    H = np.asarray(H, dtype=np.uint8)
    vals = np.where(erased, 0, received).astype(np.uint8)
    er = np.asarray(erased, dtype=bool).copy()
    checks = [np.flatnonzero(row) for row in H]
    progress = True
    while progress:
        progress = False
        for members in checks:
            unknown = [i for i in members if er[i]]
            if len(unknown) == 1:
                i = unknown[0]
                vals[i] = int(vals[[j for j in members if j != i]].sum() % 2)
                er[i] = False
                progress = True
    return vals, er


def min_sum_single_check(llr: np.ndarray, alpha: float = 1.0, beta: float = 0.0) -> np.ndarray:
    """Posterior LLRs of (normalised / offset) min-sum on the single parity check on all bits.

    ``L_i = llr_i + prod_{j != i} sign(llr_j) * max(alpha * min_{j != i} |llr_j| - beta, 0)``.
    """
    llr = np.asarray(llr, dtype=np.float64)
    out = np.empty_like(llr)
    for i in range(llr.size):
        others = np.delete(llr, i)
        sign = np.prod(np.where(others < 0, -1.0, 1.0))
        out[i] = llr[i] + sign * max(alpha * np.abs(others).min() - beta, 0.0)
    return out


def is_tree(H: np.ndarray) -> bool:
    """True when the Tanner graph of H is a forest (edges = nodes - components)."""
    m, n = H.shape
    parent = list(range(m + n))

    def find(a):
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    for c, i in itertools.product(range(m), range(n)):
        if H[c, i]:
            a, b = find(c), find(m + i)
            if a == b:
                return False
            parent[a] = b
    return True


def gallager_naive(H: np.ndarray, y: np.ndarray, thresh: np.ndarray, iterations: int):
    """Gallager A/B on one hard word by dense matrices, no early stop, no best-word keeping.

    Independent of the kernel's edge bookkeeping: messages live in an m x n
    array indexed by (check, bit). ``thresh[i]``: disagreeing extrinsic check
    messages that make bit i send ``1 - y_i``. Returns the decisions after each
    iteration, shape (iterations + 1, n), row 0 = ``y`` (Gallager 1963).
    """
    H = np.asarray(H, dtype=np.int64)
    y = np.asarray(y, dtype=np.int64)
    deg = H.sum(axis=0)
    v2c = H * y[None, :]
    out = [y.copy()]
    for _ in range(iterations):
        total = (v2c.sum(axis=1) % 2)[:, None]
        c2v = H * ((total + v2c) % 2)          # XOR of the other bits of the check
        dis = (H * (c2v != y[None, :])).sum(axis=0)  # check messages disagreeing with y
        x = np.where(2 * dis > deg + 1, 1 - y, y)
        ext = dis[None, :] - H * (c2v != y[None, :])
        v2c = H * np.where(ext >= thresh[None, :], 1 - y[None, :], y[None, :])
        out.append(x)
    return np.array(out)


def unsatisfied_checks(H: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Number of unsatisfied checks of each word in x (shape (F, n) or (n,)), dense."""
    return ((np.atleast_2d(x).astype(np.int64) @ np.asarray(H, dtype=np.int64).T) % 2).sum(axis=1)
