"""Linear algebra over GF(2) on bit-packed rows (numba kernels).

Rows of a binary matrix are packed into ``uint64`` words (bit ``j`` of a row
lives in word ``j // 64`` at bit position ``j % 64``).
"""

from __future__ import annotations

import numpy as np
import numba as nb

from ._settings import NUMBA_OPTS

__all__ = ["pack_rows", "unpack_rows", "row_reduce", "rank"]


def pack_rows(dense: np.ndarray) -> np.ndarray:
    """Pack a 0/1 matrix of shape (r, c) into uint64 words of shape (r, ceil(c/64))."""
    dense = np.ascontiguousarray(dense, dtype=np.uint8)
    r, c = dense.shape
    words = (c + 63) // 64
    padded = np.zeros((r, words * 64), dtype=np.uint8)
    padded[:, :c] = dense
    bits = padded.reshape(r, words, 64)
    weights = (np.uint64(1) << np.arange(64, dtype=np.uint64))
    return (bits.astype(np.uint64) * weights).sum(axis=2, dtype=np.uint64)


def unpack_rows(packed: np.ndarray, ncols: int) -> np.ndarray:
    """Inverse of :func:`pack_rows`: (r, words) uint64 -> (r, ncols) uint8."""
    r, words = packed.shape
    shifts = np.arange(64, dtype=np.uint64)
    bits = ((packed[:, :, None] >> shifts) & np.uint64(1)).astype(np.uint8)
    return bits.reshape(r, words * 64)[:, :ncols].copy()


@nb.njit(**NUMBA_OPTS)
def _row_reduce_kernel(rows, ncols, col_order, pivots):
    """Gauss-Jordan elimination in place on packed rows.

    Columns are tried in ``col_order``; ``pivots[r]`` receives the pivot column
    of reduced row ``r``. Returns the rank. Rows above the rank are zero.
    """
    nrows, words = rows.shape
    rank = 0
    one = np.uint64(1)
    for t in range(ncols):
        if rank == nrows:
            break
        col = col_order[t]
        w = col // 64
        bit = one << np.uint64(col % 64)
        piv = -1
        for r in range(rank, nrows):
            if rows[r, w] & bit:
                piv = r
                break
        if piv < 0:
            continue
        if piv != rank:
            for j in range(words):
                tmp = rows[piv, j]
                rows[piv, j] = rows[rank, j]
                rows[rank, j] = tmp
        for r in range(nrows):
            if r != rank and (rows[r, w] & bit):
                for j in range(words):
                    rows[r, j] ^= rows[rank, j]
        pivots[rank] = col
        rank += 1
    return rank


def row_reduce(dense: np.ndarray, col_order: np.ndarray | None = None):
    """Reduced row echelon form over GF(2).

    Parameters
    ----------
    dense : ndarray of shape (r, c), 0/1
        Matrix to reduce (not modified).
    col_order : ndarray of int, optional
        Order in which columns are tried as pivots (default ``0..c-1``).

    Returns
    -------
    packed : ndarray of shape (rank, words), uint64
        The nonzero reduced rows, packed.
    pivots : ndarray of shape (rank,), int64
        Pivot column of each reduced row.
    """
    dense = np.asarray(dense)
    r, c = dense.shape
    rows = pack_rows(dense)
    if col_order is None:
        col_order = np.arange(c, dtype=np.int64)
    pivots = np.full(max(r, 1), -1, dtype=np.int64)
    rk = _row_reduce_kernel(rows, c, np.ascontiguousarray(col_order, dtype=np.int64), pivots)
    return rows[:rk].copy(), pivots[:rk].copy()


def rank(dense: np.ndarray) -> int:
    """Rank over GF(2) of a 0/1 matrix (dense ndarray)."""
    return int(row_reduce(dense)[1].shape[0])
