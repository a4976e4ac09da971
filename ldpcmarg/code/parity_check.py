"""The parity-check code model: ``H``, Tanner-graph arrays and derived properties.

Conventions (see DEVELOPERS.md): bits ``x in {0, 1}``; ``H`` is an ``m x n``
0/1 matrix held as ``scipy.sparse.csr_matrix`` with ``uint8`` data and sorted
indices. Tanner-graph edges are numbered in check-major (CSR) order: edge
``e`` in ``check_ptr[c]:check_ptr[c+1]`` joins check ``c`` and bit
``edge_var[e]``. ``var_edges[var_ptr[i]:var_ptr[i+1]]`` lists the edges of bit
``i`` (variable-major order, increasing check index).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property

import numba as nb
import numpy as np
import scipy.sparse as sp

from .._settings import DEFAULT_MAX_CHECK_DEGREE, NUMBA_OPTS
from .._text import plural
from ..errors import InputError
from . import gf2

__all__ = [
    "ParityCheckCode",
    "LocalCodewords",
    "DegreeDistributions",
    "SystematicEncoder",
    "MinimumDistance",
]


@dataclass(frozen=True)
class LocalCodewords:
    """Even-weight patterns ("local codewords") of every check, in flat arrays.

    Check ``c`` of degree ``d`` has ``2**(d-1)`` local codewords, numbered
    globally ``offset[c] .. offset[c+1]-1``. Local codeword ``j`` of check
    ``c`` assigns bit ``t`` (``0 <= t < d``, the ``t``-th edge of the check in
    CSR order, i.e. bit ``edge_var[check_ptr[c] + t]``) the value
    ``bits[bit_ptr[c] + (j - offset[c]) * d + t]``.

    Attributes
    ----------
    offset : ndarray of shape (m + 1,), int64
    bit_ptr : ndarray of shape (m + 1,), int64
    bits : ndarray of shape (sum_c 2**(d_c-1) * d_c,), uint8
    owner : ndarray of shape (offset[-1],), int64
        Check index of every local codeword.
    """

    offset: np.ndarray
    bit_ptr: np.ndarray
    bits: np.ndarray
    owner: np.ndarray

    @property
    def count(self) -> int:
        """Total number of local codewords."""
        return int(self.offset[-1])

    def patterns(self, check: int, degree: int) -> np.ndarray:
        """Local codewords of one check as an array of shape (2**(d-1), d), uint8."""
        a, b = self.bit_ptr[check], self.bit_ptr[check + 1]
        return self.bits[a:b].reshape(-1, degree)


def _even_patterns(d: int) -> np.ndarray:
    """All even-weight binary vectors of length d, shape (2**(d-1), d), in increasing order."""
    if d == 0:
        return np.zeros((1, 0), dtype=np.uint8)
    ints = np.arange(2**d, dtype=np.int64)
    bits = ((ints[:, None] >> np.arange(d)) & 1).astype(np.uint8)
    return bits[bits.sum(axis=1) % 2 == 0]


@dataclass(frozen=True)
class DegreeDistributions:
    """Degree distributions of the Tanner graph, node and edge perspective.

    Every array is indexed by degree ``d`` (length ``max degree + 1``) and sums
    to 1 (edge arrays: to 0 when the graph has no edges).

    Attributes
    ----------
    var_node : ndarray of float64
        ``L_d``: fraction of bits of degree ``d`` (``d = 0`` counts unprotected bits).
    check_node : ndarray of float64
        ``R_d``: fraction of checks of degree ``d``.
    var_edge : ndarray of float64
        ``lambda_d``: fraction of edges attached to a bit of degree ``d``, so
        ``lambda(x) = sum_d lambda_d x**(d-1)`` in the usual polynomial notation.
    check_edge : ndarray of float64
        ``rho_d``: fraction of edges attached to a check of degree ``d``;
        ``rho(x) = sum_d rho_d x**(d-1)``.
    """

    var_node: np.ndarray
    check_node: np.ndarray
    var_edge: np.ndarray
    check_edge: np.ndarray

    def as_dict(self) -> dict:
        """``{"var_node": {d: fraction}, ...}`` with only the nonzero degrees (JSON-ready)."""
        out = {}
        for key in ("var_node", "check_node", "var_edge", "check_edge"):
            arr = getattr(self, key)
            out[key] = {int(d): float(arr[d]) for d in np.flatnonzero(arr)}
        return out


def _node_edge_fractions(degrees: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    counts = np.bincount(degrees, minlength=1).astype(np.float64)
    node = counts / max(counts.sum(), 1.0)
    edges = counts * np.arange(counts.size)
    edge = edges / edges.sum() if edges.sum() > 0 else edges
    return node, edge


@dataclass(frozen=True)
class MinimumDistance:
    """Result of :meth:`ParityCheckCode.minimum_distance`.

    Attributes
    ----------
    value : int
        The minimum distance when ``exact``; otherwise the weight of the
        lightest nonzero codeword found, an upper bound. ``0`` means the code
        has no nonzero codeword (``k = 0``).
    exact : bool
        True when every codeword was enumerated.
    method : str
        How the value was obtained (enumeration, or the search and its budget/seed).
    witness : ndarray of shape (n,), uint8, or None
        A nonzero codeword of weight ``value``.
    """

    value: int
    exact: bool
    method: str
    witness: np.ndarray | None

    def label(self) -> str:
        """``"20 (exact)"`` or ``"<= 20 (upper bound)"``."""
        if self.value == 0:
            return "none (k = 0)"
        return f"{self.value} (exact)" if self.exact else f"<= {self.value} (upper bound)"


class SystematicEncoder:
    """Systematic encoder of a code: information set plus the parity map.

    The information positions are chosen by Gauss-Jordan elimination of ``H``
    trying pivot (parity) columns from the right, so for ``H = [A | B]`` with
    ``B`` invertible the information bits are the first ``k`` positions.

    Parameters
    ----------
    code : ParityCheckCode

    Attributes
    ----------
    info_positions : ndarray of shape (k,), int64
        Increasing positions that carry the message bits unchanged.
    parity_positions : ndarray of shape (n - k,), int64
    n, k : int
    """

    def __init__(self, code: ParityCheckCode):
        self._form = gf2.systematic_form(code.H)
        self.n = code.n
        self.k = self._form.k
        self.info_positions = self._form.info
        self.parity_positions = self._form.parity

    def encode(self, msgs) -> np.ndarray:
        """Codewords for messages.

        Parameters
        ----------
        msgs : array_like of shape (F, k) or (k,), 0/1

        Returns
        -------
        ndarray of shape (F, n) or (n,), uint8
            ``c[:, info_positions] == msgs`` and ``H c = 0``.
        """
        arr = np.asarray(msgs)
        single = arr.ndim == 1
        M = np.atleast_2d(arr)
        if M.ndim != 2 or M.shape[1] != self.k:
            raise InputError(f"Expected messages of length k = {self.k}; got shape {arr.shape}.")
        if M.size and np.any((M != 0) & (M != 1)):
            raise InputError("Messages must contain only 0 and 1.")
        out = gf2.apply_systematic(self._form, np.ascontiguousarray(M, dtype=np.uint8))
        return out[0] if single else out

    def extract(self, codewords) -> np.ndarray:
        """Messages carried by codewords (the bits at ``info_positions``).

        Parameters
        ----------
        codewords : array_like of shape (F, n) or (n,), 0/1

        Returns
        -------
        ndarray of shape (F, k) or (k,), uint8
        """
        arr = np.asarray(codewords)
        if arr.shape[-1] != self.n or arr.ndim not in (1, 2):
            raise InputError(f"Expected words of length n = {self.n}; got shape {arr.shape}.")
        return np.ascontiguousarray(arr[..., self.info_positions], dtype=np.uint8)

    def generator_matrix(self) -> np.ndarray:
        """Systematic generator matrix, shape (k, n), uint8 (identity at ``info_positions``)."""
        return self.encode(np.eye(self.k, dtype=np.uint8)) if self.k else np.zeros(
            (0, self.n), dtype=np.uint8)


@nb.njit(**NUMBA_OPTS)
def _neighbours(x, n, var_ptr, var_checks, check_ptr, edge_var, out):
    """Write the Tanner-graph neighbours of node ``x`` into ``out``; return their count.

    Nodes ``0..n-1`` are bits, ``n..n+m-1`` checks.
    """
    q = 0
    if x < n:
        for e in range(var_ptr[x], var_ptr[x + 1]):
            out[q] = n + var_checks[e]
            q += 1
    else:
        c = x - n
        for e in range(check_ptr[c], check_ptr[c + 1]):
            out[q] = edge_var[e]
            q += 1
    return q


@nb.njit(**NUMBA_OPTS)
def _girth_kernel(n, m, var_ptr, var_checks, check_ptr, edge_var, maxdeg):
    """Length of the shortest cycle of the Tanner graph (0 if there is none).

    BFS from every bit; a non-tree edge met at depth d closes a walk of length
    ``dist[x] + dist[y] + 1`` >= the length of some cycle, and the minimum over
    all roots is the girth. Search from a root stops once no shorter cycle can appear.
    """
    N = n + m
    dist = np.full(N, -1, dtype=np.int64)
    parent = np.full(N, -1, dtype=np.int64)
    queue = np.empty(N, dtype=np.int64)
    nb_buf = np.empty(maxdeg, dtype=np.int64)
    best = N + 10
    for root in range(n):
        head = 0
        tail = 0
        queue[tail] = root
        tail += 1
        dist[root] = 0
        parent[root] = -1
        while head < tail:
            x = queue[head]
            head += 1
            d = dist[x]
            if 2 * d >= best:
                break
            q = _neighbours(x, n, var_ptr, var_checks, check_ptr, edge_var, nb_buf)
            for a in range(q):
                y = nb_buf[a]
                if y == parent[x]:
                    continue
                if dist[y] < 0:
                    dist[y] = d + 1
                    parent[y] = x
                    queue[tail] = y
                    tail += 1
                else:
                    L = d + dist[y] + 1
                    if L < best:
                        best = L
        for t in range(tail):
            dist[queue[t]] = -1
            parent[queue[t]] = -1
    return 0 if best == N + 10 else best


@nb.njit(**NUMBA_OPTS)
def _cycle_count_kernel(n, m, var_ptr, var_checks, check_ptr, edge_var, maxdeg, girth):
    """Number of cycles of length ``girth`` (even, > 0) in the Tanner graph.

    From each bit, count shortest paths (sigma) up to depth ``L = girth/2``; any
    two distinct shortest paths to a node at depth L close a cycle of length
    ``girth`` (no shorter cycle exists), and each such cycle is seen once from
    each of its L bits.
    """
    N = n + m
    L = girth // 2
    dist = np.full(N, -1, dtype=np.int64)
    sigma = np.zeros(N, dtype=np.int64)
    queue = np.empty(N, dtype=np.int64)
    nb_buf = np.empty(maxdeg, dtype=np.int64)
    total = 0
    for root in range(n):
        head = 0
        tail = 0
        queue[tail] = root
        tail += 1
        dist[root] = 0
        sigma[root] = 1
        while head < tail:
            x = queue[head]
            head += 1
            d = dist[x]
            if d >= L:
                continue
            q = _neighbours(x, n, var_ptr, var_checks, check_ptr, edge_var, nb_buf)
            for a in range(q):
                y = nb_buf[a]
                if dist[y] < 0:
                    dist[y] = d + 1
                    sigma[y] = sigma[x]
                    queue[tail] = y
                    tail += 1
                elif dist[y] == d + 1:
                    sigma[y] += sigma[x]
        for t in range(tail):
            y = queue[t]
            if dist[y] == L:
                total += sigma[y] * (sigma[y] - 1) // 2
            dist[y] = -1
            sigma[y] = 0
    return total // L


class ParityCheckCode:
    """A binary linear code given by a parity-check matrix ``H`` (m x n).

    Parameters
    ----------
    H : array_like or scipy.sparse matrix of shape (m, n)
        Entries must be 0 or 1. A sparse input with duplicate coordinates is
        rejected (duplicates are never summed mod 2).
    name : str, optional
        Human-readable name (shipped code name or file stem).
    source : str, optional
        Where the matrix came from (path or construction description).

    Notes
    -----
    ``H`` may be rank deficient; the dimension is ``k = n - rank_GF2(H)``.
    Zero-weight columns (unprotected bits) and all-zero rows are legal.

    Examples
    --------
    >>> import numpy as np
    >>> from ldpcmarg.code.parity_check import ParityCheckCode
    >>> H = [[1, 0, 1, 0, 1, 0, 1], [0, 1, 1, 0, 0, 1, 1], [0, 0, 0, 1, 1, 1, 1]]
    >>> code = ParityCheckCode(H, name="hamming-7-4")
    >>> code.n, code.m, code.k, code.girth_and_cycles()
    (7, 3, 4, (4, 3))
    >>> cw = code.encoder.encode([[1, 0, 1, 1]])
    >>> bool(code.is_codeword(cw)[0]), code.encoder.extract(cw).tolist()
    (True, [[1, 0, 1, 1]])
    >>> code.minimum_distance().label()
    '3 (exact)'
    """

    def __init__(self, H, name: str = "", source: str = ""):
        self.H = self._validated_csr(H)
        self.m, self.n = (int(s) for s in self.H.shape)
        self.name = name or f"code-{self.n}x{self.m}"
        self.source = source
        H = self.H
        #: check-major edge arrays
        self.check_ptr = H.indptr.astype(np.int64)
        self.edge_var = H.indices.astype(np.int64)
        self.num_edges = int(H.nnz)
        self.edge_check = np.repeat(np.arange(self.m, dtype=np.int64), np.diff(self.check_ptr))
        # variable-major order: stable sort on bit index keeps checks increasing
        order = np.argsort(self.edge_var, kind="stable").astype(np.int64)
        self.var_edges = order
        self.var_ptr = np.zeros(self.n + 1, dtype=np.int64)
        np.cumsum(np.bincount(self.edge_var, minlength=self.n), out=self.var_ptr[1:])
        self.check_degrees = np.diff(self.check_ptr).astype(np.int64)
        self.var_degrees = np.diff(self.var_ptr).astype(np.int64)

    # ------------------------------------------------------------------ input
    @staticmethod
    def _validated_csr(H) -> sp.csr_matrix:
        if sp.issparse(H):
            coo = sp.coo_matrix(H)
            if coo.ndim != 2:
                raise InputError("The parity-check matrix must be two-dimensional.")
            data = np.asarray(coo.data)
            if data.size and not np.all(np.isfinite(data.astype(np.float64))):
                raise InputError("The parity-check matrix has non-finite entries.")
            bad = (data != 0) & (data != 1)
            if np.any(bad):
                j = int(np.flatnonzero(bad)[0])
                raise InputError(
                    f"The parity-check matrix must be binary (0/1); entry ({coo.row[j]}, "
                    f"{coo.col[j]}) is {data[j]!r}."
                )
            keep = data != 0
            rows, cols = coo.row[keep].astype(np.int64), coo.col[keep].astype(np.int64)
            shape = coo.shape
            if rows.size:
                key = rows * shape[1] + cols
                uniq, counts = np.unique(key, return_counts=True)
                if np.any(counts > 1):
                    dup = int(uniq[np.argmax(counts > 1)])
                    raise InputError(
                        f"The parity-check matrix has a duplicate entry at ({dup // shape[1]}, "
                        f"{dup % shape[1]}); duplicates are not summed mod 2."
                    )
        else:
            arr = np.asarray(H)
            if arr.ndim != 2:
                raise InputError(
                    f"The parity-check matrix must be two-dimensional; got shape {arr.shape}."
                )
            if arr.dtype.kind not in "biuf":
                raise InputError(f"The parity-check matrix must be numeric; got dtype {arr.dtype}.")
            if arr.dtype.kind == "f" and not np.all(np.isfinite(arr)):
                raise InputError("The parity-check matrix has non-finite entries.")
            bad = (arr != 0) & (arr != 1)
            if np.any(bad):
                r, c = (int(v) for v in np.argwhere(bad)[0])
                raise InputError(
                    f"The parity-check matrix must be binary (0/1); entry ({r}, {c}) is "
                    f"{arr[r, c].item()!r}."
                )
            rows, cols = np.nonzero(arr)
            shape = arr.shape
        if shape[0] == 0 or shape[1] == 0:
            raise InputError(f"The parity-check matrix is empty (shape {shape}).")
        csr = sp.csr_matrix(
            (np.ones(len(rows), dtype=np.uint8), (np.asarray(rows), np.asarray(cols))),
            shape=shape,
            dtype=np.uint8,
        )
        csr.sort_indices()
        csr.indices = csr.indices.astype(np.int32 if shape[1] < 2**31 else np.int64)
        return csr

    # -------------------------------------------------------------- properties
    @cached_property
    def rank(self) -> int:
        """Rank of ``H`` over GF(2)."""
        return gf2.rank(self.H)

    @property
    def k(self) -> int:
        """Code dimension ``n - rank(H)``."""
        return self.n - self.rank

    @property
    def rate(self) -> float:
        """Code rate ``k / n``."""
        return self.k / self.n

    @property
    def design_rate(self) -> float:
        """Design rate ``1 - m / n`` (equals ``rate`` when ``H`` has full rank)."""
        return 1.0 - self.m / self.n

    @cached_property
    def fingerprint(self) -> str:
        """SHA-256 of the shape and sorted nonzero positions of ``H`` (hex, 16 chars)."""
        h = hashlib.sha256()
        h.update(f"{self.m}x{self.n}:".encode())
        h.update(self.H.indptr.astype(np.int64).tobytes())
        h.update(self.H.indices.astype(np.int64).tobytes())
        return h.hexdigest()[:16]

    def local_codewords(self, max_check_degree: int = DEFAULT_MAX_CHECK_DEGREE) -> LocalCodewords:
        """Enumerate the even-weight local codewords of every check.

        Parameters
        ----------
        max_check_degree : int
            Refuse (``InputError`` naming the check) when a check has a larger degree,
            since it would have ``2**(d-1)`` local codewords.
        """
        too_big = np.flatnonzero(self.check_degrees > max_check_degree)
        if too_big.size:
            c = int(too_big[0])
            raise InputError(
                f"Check {c} has degree {int(self.check_degrees[c])}, above the cap of "
                f"{max_check_degree} for local-codeword enumeration "
                f"({2 ** (int(self.check_degrees[c]) - 1)} local codewords); "
                "raise max_check_degree if you really want this."
            )
        counts = np.where(self.check_degrees > 0, 2 ** np.maximum(self.check_degrees - 1, 0), 1)
        offset = np.zeros(self.m + 1, dtype=np.int64)
        np.cumsum(counts, out=offset[1:])
        bit_ptr = np.zeros(self.m + 1, dtype=np.int64)
        np.cumsum(counts * self.check_degrees, out=bit_ptr[1:])
        cache: dict[int, np.ndarray] = {}
        chunks = []
        for d in self.check_degrees:
            d = int(d)
            if d not in cache:
                cache[d] = _even_patterns(d).ravel()
            chunks.append(cache[d])
        bits = np.concatenate(chunks) if chunks else np.zeros(0, dtype=np.uint8)
        owner = np.repeat(np.arange(self.m, dtype=np.int64), counts)
        return LocalCodewords(offset=offset, bit_ptr=bit_ptr, bits=bits.astype(np.uint8),
                              owner=owner)


    # --------------------------------------------------------- graph structure
    def _graph_args(self):
        var_checks = self.edge_check[self.var_edges]
        maxdeg = int(max(self.var_degrees.max(initial=0), self.check_degrees.max(initial=0), 1))
        return (self.n, self.m, self.var_ptr, np.ascontiguousarray(var_checks),
                self.check_ptr, self.edge_var, maxdeg)

    @cached_property
    def _girth_and_cycles(self) -> tuple[int, int]:
        args = self._graph_args()
        g = int(_girth_kernel(*args))
        count = int(_cycle_count_kernel(*args, g)) if g > 0 else 0
        return g, count

    def girth(self) -> int:
        """Length of the shortest cycle of the Tanner graph (a method, returning int).

        Returns
        -------
        int
            An even number >= 4, or ``0`` when the Tanner graph has no cycle
            (a tree or forest). Cached after the first call.
        """
        return self._girth_and_cycles[0]

    def girth_and_cycles(self) -> tuple[int, int]:
        """``(girth, number of cycles of length girth)``; ``(0, 0)`` for a cycle-free graph."""
        return self._girth_and_cycles

    def degree_distributions(self) -> DegreeDistributions:
        """Variable and check degree distributions, node and edge perspective."""
        vn, ve = _node_edge_fractions(self.var_degrees)
        cn, ce = _node_edge_fractions(self.check_degrees)
        return DegreeDistributions(var_node=vn, check_node=cn, var_edge=ve, check_edge=ce)

    @property
    def zero_weight_columns(self) -> np.ndarray:
        """Bits in no check (unprotected bits), int64 indices."""
        return np.flatnonzero(self.var_degrees == 0).astype(np.int64)

    @property
    def zero_rows(self) -> np.ndarray:
        """All-zero rows of ``H`` (checks on no bit), int64 indices."""
        return np.flatnonzero(self.check_degrees == 0).astype(np.int64)

    # ----------------------------------------------------------------- encoder
    @cached_property
    def encoder(self) -> SystematicEncoder:
        """The systematic encoder (built on first use, then cached)."""
        return SystematicEncoder(self)

    @property
    def info_positions(self) -> np.ndarray:
        """Information set of :attr:`encoder`, shape (k,), int64."""
        return self.encoder.info_positions

    def encode(self, msgs) -> np.ndarray:
        """Shorthand for ``self.encoder.encode(msgs)``: (F, k) -> (F, n) uint8."""
        return self.encoder.encode(msgs)

    # -------------------------------------------------------- weight structure
    def weight_enumerator(self, max_k: int = 26) -> np.ndarray:
        """Number of codewords of every weight, by exhaustive enumeration.

        Parameters
        ----------
        max_k : int
            Refuse (``InputError``) when ``k > max_k`` (``2**k`` codewords are visited).

        Returns
        -------
        ndarray of shape (n + 1,), int64
            ``A[w]`` = number of codewords of Hamming weight ``w``; ``A[0] = 1``.
        """
        if self.k > max_k:
            raise InputError(
                f"The weight enumerator visits 2**k codewords; k = {self.k} exceeds "
                f"max_k = {max_k}."
            )
        hist, _ = gf2.enumerate_weights(self.encoder.generator_matrix())
        return hist

    def minimum_distance(self, max_exact_k: int = 26, budget: int = 300,
                         seed: int = 0, method: str = "stern") -> MinimumDistance:
        """Minimum distance: exact for small ``k``, otherwise a labelled upper bound.

        Parameters
        ----------
        max_exact_k : int
            Enumerate all ``2**k`` codewords (Gray-code order, bit-packed) when
            ``k <= max_exact_k``.
        budget : int
            Otherwise, the number of random information sets tried by an
            information-set search (:func:`ldpcmarg.code.gf2.information_set_search`);
            the lightest codeword found is an upper bound. Each information
            set costs one Gauss-Jordan elimination of ``H`` (about
            ``n * m**2 / 128`` word operations) plus the search over it.
        seed : int
            Seed of the search (results are reproducible).
        method : {"stern", "lee-brickell"}
            Search variant (see :func:`ldpcmarg.code.gf2.information_set_search`).

        Returns
        -------
        MinimumDistance
        """
        if self.k == 0:
            return MinimumDistance(0, True, "trivial code (k = 0): no nonzero codeword", None)
        if self.k <= max_exact_k:
            hist, witness = gf2.enumerate_weights(self.encoder.generator_matrix())
            d = int(np.flatnonzero(hist[1:])[0]) + 1
            return MinimumDistance(d, True, f"exhaustive enumeration of 2^{self.k} codewords",
                                   witness)
        if budget < 1:
            raise InputError(f"The search budget must be an integer >= 1; got {budget}.")
        w, witness = gf2.information_set_search(self.H, budget=int(budget), seed=int(seed),
                                                method=method)
        return MinimumDistance(
            int(w), False,
            f"information-set search ({method}), {plural(budget, 'set')}, seed {seed}",
            witness)

    # ------------------------------------------------------------- operations
    def syndrome(self, x) -> np.ndarray:
        """Syndromes ``H x mod 2``.

        Parameters
        ----------
        x : ndarray of shape (F, n) or (n,), 0/1

        Returns
        -------
        ndarray of shape (F, m) or (m,), uint8
        """
        x = np.asarray(x)
        single = x.ndim == 1
        X = np.atleast_2d(x)
        if X.shape[1] != self.n:
            raise InputError(f"Expected words of length n = {self.n}; got length {X.shape[1]}.")
        s = (self.H @ X.T.astype(np.int64)).T % 2
        s = np.asarray(s, dtype=np.uint8)
        return s[0] if single else s

    def is_codeword(self, x) -> np.ndarray | bool:
        """True where ``H x = 0`` (array of shape (F,) for a batch, bool for one word)."""
        s = self.syndrome(x)
        if s.ndim == 1:
            return bool(not s.any())
        return ~s.any(axis=1)

    def summary(self) -> dict:
        """Basic parameters as a JSON-ready dict."""
        return {
            "name": self.name,
            "n": self.n,
            "m": self.m,
            "k": self.k,
            "rank": self.rank,
            "rate": self.rate,
            "design_rate": self.design_rate,
            "edges": self.num_edges,
            "fingerprint": self.fingerprint,
        }

    def __repr__(self) -> str:
        return f"ParityCheckCode(name={self.name!r}, n={self.n}, m={self.m}, k={self.k})"

    def __getstate__(self):
        # Ship only H and labels; Tanner arrays are rebuilt on the other side.
        return {"H": self.H, "name": self.name, "source": self.source}

    def __setstate__(self, state):
        self.__init__(state["H"], name=state["name"], source=state["source"])
