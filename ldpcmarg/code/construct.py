"""Constructions of parity-check matrices.

Every random construction takes a ``seed`` (int or ``numpy.random.SeedSequence``)
and is deterministic for a given seed: the same arguments give the same
matrix. Each function returns a :class:`~ldpcmarg.code.parity_check.ParityCheckCode` whose
``name`` is short and whose ``source`` records the call that made it.

Degree distributions are written as ``{degree: fraction}`` dicts, in the edge
perspective by default (``lambda_d``: fraction of edges at bits of degree
``d``; ``rho_d``: same for checks), as in Richardson, Shokrollahi & Urbanke,
IEEE Trans. IT 47(2), 2001; pass ``perspective="node"`` for node fractions.

References
----------
- R. G. Gallager, *Low-Density Parity-Check Codes*, MIT Press, 1963.
- X.-Y. Hu, E. Eleftheriou, D. M. Arnold, "Regular and irregular progressive
  edge-growth Tanner graphs", IEEE Trans. IT 51(1), 2005.
- J. L. Fan, "Array codes as low-density parity-check codes", Proc. 2nd Int.
  Symp. on Turbo Codes, 2000.
- R. M. Tanner, D. Sridhara, T. Fuja, "A class of group-structured LDPC
  codes", Proc. ICSTA, 2001.
- F. J. MacWilliams, N. J. A. Sloane, *The Theory of Error-Correcting Codes*,
  North-Holland, 1977 (Hamming and Golay codes).
"""

from __future__ import annotations

import numba as nb
import numpy as np
import scipy.sparse as sp

from .._settings import NUMBA_OPTS
from ..errors import InputError
from .parity_check import ParityCheckCode

__all__ = [
    "gallager",
    "random_regular",
    "random_irregular",
    "peg",
    "quasi_cyclic",
    "array_code",
    "hamming",
    "golay24",
    "repetition",
    "single_parity",
    "tree_code",
    "degree_sequences",
    "CONSTRUCTIONS",
]


def _rng(seed) -> np.random.Generator:
    if isinstance(seed, np.random.Generator):
        return seed
    if seed is None:
        raise InputError("A seed is required so the construction is reproducible.")
    return np.random.default_rng(seed)


def _int(name: str, value, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int | np.integer):
        raise InputError(f"{name} must be an integer >= {low}; got {value!r}.")
    if value < low:
        raise InputError(f"{name} must be an integer >= {low}; got {value}.")
    return int(value)


def _from_edges(rows, cols, shape, name, source) -> ParityCheckCode:
    H = sp.csr_matrix(
        (np.ones(len(rows), dtype=np.uint8), (np.asarray(rows), np.asarray(cols))),
        shape=shape, dtype=np.uint8)
    return ParityCheckCode(H, name=name, source=source)


# ------------------------------------------------------------ degree sequences
def _normalise_dist(dist, what: str) -> dict[int, float]:
    if not isinstance(dist, dict) or not dist:
        raise InputError(
            f"The {what} degree distribution must be a non-empty dict degree -> fraction.")
    out = {}
    for d, f in dist.items():
        d = _int(f"A {what} degree", d, 1)
        f = float(f)
        if not f >= 0.0:
            raise InputError(f"The {what} degree fraction for degree {d} must be >= 0; got {f}.")
        if f > 0:
            out[d] = f
    total = sum(out.values())
    if total <= 0 or abs(total - 1.0) > 1e-3:
        raise InputError(f"The {what} degree fractions must sum to 1; they sum to {total:.6g}.")
    return {d: f / total for d, f in sorted(out.items())}


def _counts(total: int, fractions: dict[int, float]) -> dict[int, int]:
    """Largest-remainder rounding of ``total * fractions``."""
    degs = list(fractions)
    raw = np.array([total * fractions[d] for d in degs])
    base = np.floor(raw).astype(np.int64)
    rest = total - int(base.sum())
    order = np.argsort(-(raw - base), kind="stable")
    base[order[:rest]] += 1
    return {d: int(c) for d, c in zip(degs, base, strict=True)}


def degree_sequences(n: int, var_dist: dict, check_dist: dict,
                     perspective: str = "edge") -> tuple[np.ndarray, np.ndarray]:
    """Bit and check degree sequences with equal edge counts from two distributions.

    Parameters
    ----------
    n : int
        Number of bits.
    var_dist, check_dist : dict of int to float
        Degree distributions (fractions summing to 1).
    perspective : {"edge", "node"}
        Whether the fractions count edges (``lambda``, ``rho``) or nodes.

    Returns
    -------
    var_degrees : ndarray of shape (n,), int64
        Non-decreasing.
    check_degrees : ndarray of shape (m,), int64
        Same sum as ``var_degrees``; ``m`` follows from the distributions.
        When rounding leaves the edge counts unequal, the lowest (or highest)
        check degrees are raised (lowered) by one until they match.
    """
    n = _int("n", n, 1)
    if perspective not in ("edge", "node"):
        raise InputError(f"perspective must be 'edge' or 'node'; got {perspective!r}.")
    lam = _normalise_dist(var_dist, "variable")
    rho = _normalise_dist(check_dist, "check")
    if perspective == "edge":
        vn = {d: f / d for d, f in lam.items()}
        cn = {d: f / d for d, f in rho.items()}
        sv, sc = sum(vn.values()), sum(cn.values())
        vn = {d: f / sv for d, f in vn.items()}
        cn = {d: f / sc for d, f in cn.items()}
    else:
        vn, cn = lam, rho
    vc = _counts(n, vn)
    var_degrees = np.repeat(np.array(list(vc), dtype=np.int64), list(vc.values()))
    E = int(var_degrees.sum())
    mean_c = sum(d * f for d, f in cn.items())
    m = max(1, int(round(E / mean_c)))
    cc = _counts(m, cn)
    check_degrees = np.repeat(np.array(list(cc), dtype=np.int64), list(cc.values()))
    diff = E - int(check_degrees.sum())
    while diff != 0:
        if diff > 0:
            i = int(np.argmin(check_degrees))
            check_degrees[i] += 1
            diff -= 1
        else:
            i = int(np.argmax(check_degrees))
            if check_degrees[i] <= 1:
                raise InputError("Cannot match the check degrees to the edge count.")
            check_degrees[i] -= 1
            diff += 1
    return var_degrees, np.sort(check_degrees)


# ------------------------------------------------------- configuration model
def _configuration(var_degrees, check_degrees, rng, max_rounds: int = 1000):
    """Random bipartite graph with given degrees and no repeated edge.

    Sockets are matched by a random permutation; each repeated edge then swaps
    its check end with a random other edge when the swap creates no new repeat.
    """
    n, m = len(var_degrees), len(check_degrees)
    if var_degrees.sum() != check_degrees.sum():
        raise InputError("Bit and check degree sums differ.")
    if var_degrees.max(initial=0) > m:
        raise InputError(f"A bit degree of {var_degrees.max()} exceeds the {m} checks.")
    if check_degrees.max(initial=0) > n:
        raise InputError(f"A check degree of {check_degrees.max()} exceeds the {n} bits.")
    vs = np.repeat(np.arange(n, dtype=np.int64), var_degrees)
    cs = rng.permutation(np.repeat(np.arange(m, dtype=np.int64), check_degrees))
    E = vs.size
    for _ in range(max_rounds):
        key = vs * m + cs
        order = np.argsort(key, kind="stable")
        dup_sorted = np.flatnonzero(np.diff(key[order]) == 0) + 1
        if dup_sorted.size == 0:
            return vs, cs
        present = set(key.tolist())
        for e in order[dup_sorted]:
            for _try in range(50):
                f = int(rng.integers(E))
                if f == e:
                    continue
                k1 = vs[e] * m + cs[f]
                k2 = vs[f] * m + cs[e]
                if k1 in present or k2 in present or k1 == k2:
                    continue
                present.discard(vs[f] * m + cs[f])
                # key of e stays present (it was a repeat)
                cs[e], cs[f] = cs[f], cs[e]
                present.add(k1)
                present.add(k2)
                break
    raise InputError("Could not remove repeated edges; the degrees are too dense for this size.")


def gallager(n: int, dv: int, dc: int, seed=0) -> ParityCheckCode:
    """Gallager's (dv, dc)-regular construction: ``dv`` bands, each a column permutation.

    Parameters
    ----------
    n : int
        Code length, a multiple of ``dc``.
    dv, dc : int
        Bit and check degrees; ``m = n dv / dc``.
    seed : int
    """
    n, dv, dc = _int("n", n, 2), _int("dv", dv, 1), _int("dc", dc, 2)
    if n % dc:
        raise InputError(f"Gallager's construction needs n divisible by dc; got n={n}, dc={dc}.")
    rng = _rng(seed)
    b = n // dc
    rows, cols = [], []
    for band in range(dv):
        perm = np.arange(n) if band == 0 else rng.permutation(n)
        rows.append(band * b + np.arange(n) // dc)
        cols.append(perm)
    return _from_edges(np.concatenate(rows), np.concatenate(cols), (dv * b, n),
                       f"gallager-{n}-{dv}-{dc}", f"gallager(n={n}, dv={dv}, dc={dc}, seed={seed})")


def random_regular(n: int, dv: int, dc: int, seed=0) -> ParityCheckCode:
    """(dv, dc)-regular code from the configuration model with no repeated edges.

    ``n dv`` must be divisible by ``dc``; ``m = n dv / dc``.
    """
    n, dv, dc = _int("n", n, 2), _int("dv", dv, 1), _int("dc", dc, 2)
    if (n * dv) % dc:
        raise InputError(f"n*dv must be divisible by dc; got n={n}, dv={dv}, dc={dc}.")
    m = n * dv // dc
    vs, cs = _configuration(np.full(n, dv, dtype=np.int64), np.full(m, dc, dtype=np.int64),
                            _rng(seed))
    return _from_edges(cs, vs, (m, n), f"regular-{n}-{dv}-{dc}",
                       f"random_regular(n={n}, dv={dv}, dc={dc}, seed={seed})")


def random_irregular(n: int, var_degree_dist: dict, check_degree_dist: dict, seed=0,
                     perspective: str = "edge") -> ParityCheckCode:
    """Irregular code from the configuration model with no repeated edges.

    Parameters
    ----------
    n : int
    var_degree_dist, check_degree_dist : dict of int to float
        Degree distributions (see :func:`degree_sequences`).
    seed : int
    perspective : {"edge", "node"}
    """
    vd, cd = degree_sequences(n, var_degree_dist, check_degree_dist, perspective)
    vs, cs = _configuration(vd, cd, _rng(seed))
    return _from_edges(cs, vs, (cd.size, n), f"irregular-{n}",
                       f"random_irregular(n={n}, var={var_degree_dist}, check={check_degree_dist}, "
                       f"perspective={perspective}, seed={seed})")


# -------------------------------------------------------------------- PEG
@nb.njit(**NUMBA_OPTS)
def _peg_kernel(order, var_deg, check_cap, uniforms, var_adj, var_cnt, check_adj, check_cnt):
    """Progressive edge growth. Returns 0 on success, or -(j+1) if bit j got stuck.

    For each bit in ``order`` and each of its edges: BFS from the bit over the
    current graph gives every check's distance (unreachable = farthest); among
    checks with spare capacity and not yet joined to the bit, take the
    farthest, then the lowest current degree, then one at random
    (``uniforms`` holds one U(0,1) per edge).
    """
    n = var_deg.shape[0]
    m = check_cap.shape[0]
    big = n + m + 5
    cdist = np.empty(m, dtype=np.int64)
    vdist = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    cand = np.empty(m, dtype=np.int64)
    u = 0
    for oi in range(order.shape[0]):
        j = order[oi]
        for _t in range(var_deg[j]):
            for c in range(m):
                cdist[c] = big
            for v in range(n):
                vdist[v] = -1
            # BFS over bits; check distances are odd levels
            head = 0
            tail = 0
            queue[tail] = j
            tail += 1
            vdist[j] = 0
            while head < tail:
                v = queue[head]
                head += 1
                for a in range(var_cnt[v]):
                    c = var_adj[v, a]
                    if cdist[c] == big:
                        cdist[c] = vdist[v] + 1
                        for b in range(check_cnt[c]):
                            w = check_adj[c, b]
                            if vdist[w] < 0:
                                vdist[w] = vdist[v] + 2
                                queue[tail] = w
                                tail += 1
            best_d = -1
            best_deg = big
            q = 0
            for c in range(m):
                if check_cnt[c] >= check_cap[c] or cdist[c] == 1:
                    continue
                d = cdist[c]
                if d > best_d or (d == best_d and check_cnt[c] < best_deg):
                    best_d = d
                    best_deg = check_cnt[c]
                    q = 0
                if d == best_d and check_cnt[c] == best_deg:
                    cand[q] = c
                    q += 1
            if q == 0:
                return -(j + 1)
            pick = int(uniforms[u] * q)
            if pick >= q:
                pick = q - 1
            u += 1
            c = cand[pick]
            var_adj[j, var_cnt[j]] = c
            var_cnt[j] += 1
            check_adj[c, check_cnt[c]] = j
            check_cnt[c] += 1
    return 0


def peg(n: int, m: int, var_degrees, seed=0, check_degrees=None,
        order: str = "ascending", name: str | None = None) -> ParityCheckCode:
    """Progressive edge-growth Tanner graph (Hu, Eleftheriou & Arnold, IEEE Trans. IT 2005).

    Bits are processed in order of non-decreasing degree (as in the paper;
    ``order="descending"`` reverses it); each new edge of a
    bit goes to a check as far from the bit as possible in the current graph
    (so short cycles are avoided), breaking ties by lowest current check
    degree (check-degree balancing) and then at random.

    Parameters
    ----------
    n, m : int
        Numbers of bits and checks.
    var_degrees : int or array_like of shape (n,), int
        Degree of every bit (an int means all equal).
    seed : int
    check_degrees : array_like of shape (m,), int, or "free", optional
        Exact check degrees to reach (summing to the bit degrees). Default:
        as equal as possible (``E // m`` or ``E // m + 1``), so a (3,6)
        sequence gives exactly degree-6 checks. ``"free"``: no cap, only the
        lowest-degree tie-break (the original algorithm).
    order : {"ascending", "descending"}
        Processing order of the bits by degree.
    name : str, optional

    Returns
    -------
    ParityCheckCode
        Bit ``i`` has exactly ``var_degrees[i]`` edges and check ``c`` exactly
        ``check_degrees[c]``.

    Examples
    --------
    >>> from ldpcmarg.code.construct import peg
    >>> code = peg(504, 252, 3, seed=0)
    >>> code.girth(), set(code.check_degrees.tolist())
    (6, {6})
    """
    n, m = _int("n", n, 1), _int("m", m, 1)
    vd = np.full(n, var_degrees, dtype=np.int64) if np.ndim(var_degrees) == 0 else \
        np.asarray(var_degrees, dtype=np.int64)
    if vd.shape != (n,):
        raise InputError(f"var_degrees must have length n = {n}; got {vd.shape}.")
    if vd.min() < 1 or vd.max() > m:
        raise InputError(f"Bit degrees must lie in 1..m = {m}; got {vd.min()}..{vd.max()}.")
    E = int(vd.sum())
    if isinstance(check_degrees, str):
        if check_degrees != "free":
            raise InputError(
                f"check_degrees must be a sequence, None or 'free'; got {check_degrees!r}.")
        cd = np.full(m, n, dtype=np.int64)
    elif check_degrees is None:
        cd = np.full(m, E // m, dtype=np.int64)
        cd[: E % m] += 1
    else:
        cd = np.asarray(check_degrees, dtype=np.int64)
        if cd.shape != (m,) or int(cd.sum()) != E or cd.min() < 0:
            raise InputError(
                f"check_degrees must have length m = {m}, be >= 0 and sum to {E} "
                "(the bit degrees).")
    rng = _rng(seed)
    uniforms = rng.random(E)
    if order not in ("ascending", "descending"):
        raise InputError(f"order must be 'ascending' or 'descending'; got {order!r}.")
    key = vd if order == "ascending" else -vd
    order_idx = np.argsort(key, kind="stable").astype(np.int64)
    var_adj = np.full((n, int(vd.max())), -1, dtype=np.int64)
    check_adj = np.full((m, max(min(int(cd.max()), n), 1)), -1, dtype=np.int64)
    var_cnt = np.zeros(n, dtype=np.int64)
    check_cnt = np.zeros(m, dtype=np.int64)
    status = _peg_kernel(order_idx, vd, cd, uniforms, var_adj, var_cnt, check_adj, check_cnt)
    if status < 0:
        raise InputError(
            f"PEG could not place every edge of bit {-status - 1}: no check with spare "
            "capacity left that is not already joined to it. Try another seed or degrees.")
    rows = np.repeat(np.arange(n, dtype=np.int64), vd)
    cols = np.concatenate([var_adj[i, : vd[i]] for i in range(n)])
    degtxt = f"{int(vd[0])}" if np.all(vd == vd[0]) else "irregular"
    vtxt = degtxt if degtxt != "irregular" else "sequence"
    return _from_edges(cols, rows, (m, n), name or f"peg-{n}-{m}-{degtxt}",
                       f"peg(n={n}, m={m}, var_degrees={vtxt}, "
                       f"seed={seed}, order={order}"
                       + (", check_degrees=free" if isinstance(check_degrees, str) else "") + ")")


# ------------------------------------------------------------ algebraic codes
def quasi_cyclic(exponents, circulant_size: int, name: str | None = None) -> ParityCheckCode:
    """Quasi-cyclic code from an exponent (shift) matrix.

    Parameters
    ----------
    exponents : array_like of shape (J, K), int
        Block ``(a, b)`` is the ``Z x Z`` identity cyclically shifted by
        ``e = exponents[a, b]`` (row ``r`` has its 1 in column ``(r + e) mod Z``),
        or the zero block when ``e = -1``.
    circulant_size : int
        ``Z``; the matrix is ``J Z x K Z``.
    name : str, optional
    """
    E = np.asarray(exponents)
    if E.ndim != 2 or E.size == 0 or E.dtype.kind not in "iu":
        raise InputError("The exponent matrix must be a non-empty 2-D integer array.")
    Z = _int("circulant_size", circulant_size, 1)
    if np.any((E < -1) | (E >= Z)):
        a, b = (int(v) for v in np.argwhere((E < -1) | (E >= Z))[0])
        raise InputError(f"Exponent ({a}, {b}) = {E[a, b]} is outside -1..{Z - 1}.")
    J, K = E.shape
    rows, cols = [], []
    r = np.arange(Z)
    for a in range(J):
        for b in range(K):
            e = int(E[a, b])
            if e < 0:
                continue
            rows.append(a * Z + r)
            cols.append(b * Z + (r + e) % Z)
    rows = np.concatenate(rows) if rows else np.zeros(0, dtype=np.int64)
    cols = np.concatenate(cols) if cols else np.zeros(0, dtype=np.int64)
    return _from_edges(rows, cols, (J * Z, K * Z), name or f"qc-{K * Z}-{J * Z}",
                       f"quasi_cyclic(exponents={E.tolist()}, circulant_size={Z})")


def _is_prime(p: int) -> bool:
    return p >= 2 and all(p % q for q in range(2, int(p**0.5) + 1))


def array_code(p: int, j: int, k: int) -> ParityCheckCode:
    """Array LDPC code (Fan 2000): exponents ``a * b mod p``, ``a < j``, ``b < k``.

    Parameters
    ----------
    p : int
        Prime circulant size; ``k <= p`` (then the Tanner graph has no 4-cycle).
    j, k : int
        Block rows (bit degree) and block columns (check degree); ``n = k p``.
    """
    p, j, k = _int("p", p, 2), _int("j", j, 1), _int("k", k, 1)
    if not _is_prime(p):
        raise InputError(f"Array codes need a prime p; got {p}.")
    if j > p or k > p:
        raise InputError(f"Array codes need j, k <= p; got j={j}, k={k}, p={p}.")
    E = np.outer(np.arange(j), np.arange(k)) % p
    code = quasi_cyclic(E, p, name=f"array-{p}-{j}-{k}")
    code.source = f"array_code(p={p}, j={j}, k={k})"
    return code


def hamming(r: int) -> ParityCheckCode:
    """Hamming code of length ``2**r - 1``: column ``i`` is ``i + 1`` in binary (LSB in row 0)."""
    r = _int("r", r, 2)
    n = 2**r - 1
    cols = np.arange(1, n + 1)
    H = ((cols[None, :] >> np.arange(r)[:, None]) & 1).astype(np.uint8)
    return ParityCheckCode(H, name=f"hamming-{n}-{n - r}", source=f"hamming(r={r})")


# Generator polynomial of the binary (23, 12) Golay code, coefficients of
# x^0..x^11: g(x) = 1 + x^2 + x^4 + x^5 + x^6 + x^10 + x^11 (from memory; the
# weight-enumerator test against MacWilliams & Sloane confirms it).
_GOLAY_G = (1, 0, 1, 0, 1, 1, 1, 0, 0, 0, 1, 1)


def golay24() -> ParityCheckCode:
    """Extended binary Golay code (24, 12, 8).

    Built as the cyclic (23, 12) Golay code extended by an overall parity bit.
    The extended code is self-dual, so its generator matrix is also a
    parity-check matrix.
    """
    G = np.zeros((12, 24), dtype=np.uint8)
    g = np.array(_GOLAY_G, dtype=np.uint8)
    for i in range(12):
        G[i, i:i + 12] = g
    G[:, 23] = G[:, :23].sum(axis=1) % 2
    return ParityCheckCode(G, name="golay-24-12", source="golay24()")


def repetition(n: int) -> ParityCheckCode:
    """Repetition code of length ``n``: checks ``x_i + x_{i+1} = 0``."""
    n = _int("n", n, 2)
    i = np.arange(n - 1)
    return _from_edges(np.concatenate([i, i]), np.concatenate([i, i + 1]), (n - 1, n),
                       f"repetition-{n}", f"repetition(n={n})")


def single_parity(n: int) -> ParityCheckCode:
    """Single parity-check code of length ``n`` (one check on all bits)."""
    n = _int("n", n, 2)
    return _from_edges(np.zeros(n, dtype=np.int64), np.arange(n), (1, n),
                       f"parity-{n}", f"single_parity(n={n})")


def tree_code(m: int, seed=0, min_degree: int = 2, max_degree: int = 4) -> ParityCheckCode:
    """A random code whose Tanner graph is a tree (cycle-free), for tests.

    Check 0 joins ``d_0`` new bits; every later check joins one existing bit
    (chosen uniformly) and ``d_c - 1`` new bits, with ``d_c`` uniform on
    ``min_degree..max_degree``. The graph is connected and acyclic, so
    sum-product is exact on it.

    Parameters
    ----------
    m : int
        Number of checks; ``n = d_0 + sum_{c>0} (d_c - 1)``.
    seed : int
    min_degree, max_degree : int
    """
    m = _int("m", m, 1)
    lo, hi = _int("min_degree", min_degree, 2), _int("max_degree", max_degree, 2)
    if hi < lo:
        raise InputError(f"max_degree ({hi}) must be >= min_degree ({lo}).")
    rng = _rng(seed)
    degs = rng.integers(lo, hi + 1, size=m)
    rows, cols = [], []
    n = int(degs[0])
    rows += [0] * n
    cols += list(range(n))
    for c in range(1, m):
        old = int(rng.integers(n))
        new = list(range(n, n + int(degs[c]) - 1))
        n += len(new)
        rows += [c] * (1 + len(new))
        cols += [old] + new
    return _from_edges(np.array(rows), np.array(cols), (m, n), f"tree-{n}-{m}",
                       f"tree_code(m={m}, seed={seed}, min_degree={lo}, max_degree={hi})")


#: Construction names used by ``ldpcmarg build`` -> function.
CONSTRUCTIONS = {
    "gallager": gallager,
    "regular": random_regular,
    "irregular": random_irregular,
    "peg": peg,
    "qc": quasi_cyclic,
    "array": array_code,
    "hamming": hamming,
    "golay": golay24,
    "repetition": repetition,
    "parity": single_parity,
    "tree": tree_code,
}
