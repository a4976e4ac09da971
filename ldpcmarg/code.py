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

import numpy as np
import scipy.sparse as sp

from . import gf2
from ._settings import DEFAULT_MAX_CHECK_DEGREE
from .errors import InputError

__all__ = ["ParityCheckCode", "LocalCodewords"]


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
    """All even-weight binary vectors of length d, shape (2**(d-1), d), in increasing integer order."""
    if d == 0:
        return np.zeros((1, 0), dtype=np.uint8)
    ints = np.arange(2**d, dtype=np.int64)
    bits = ((ints[:, None] >> np.arange(d)) & 1).astype(np.uint8)
    return bits[bits.sum(axis=1) % 2 == 0]


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
                    f"The parity-check matrix must be binary (0/1); entry ({r}, {c}) is {arr[r, c]!r}."
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
        return gf2.rank(self.H.toarray())

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
        return LocalCodewords(offset=offset, bit_ptr=bit_ptr, bits=bits.astype(np.uint8), owner=owner)

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
