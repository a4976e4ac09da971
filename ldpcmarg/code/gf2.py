"""Linear algebra over GF(2) on bit-packed rows (numba kernels).

Rows of a binary matrix are packed into ``uint64`` words (bit ``j`` of a row
lives in word ``j // 64`` at bit position ``j % 64``). Every public function
accepts a dense 0/1 ``ndarray`` or a ``scipy.sparse`` matrix; sparse input is
packed directly, without a dense copy, so ``H`` of an n = 16128 code costs
16 MB of packed words rather than 130 MB of bytes.

Public API
----------
pack_rows, unpack_rows
    Dense 0/1 <-> packed words.
pack_matrix
    Dense or sparse 0/1 matrix (optionally with permuted columns) -> packed words.
row_reduce
    Reduced row echelon form (Gauss-Jordan) with a chosen column order.
rank
    Rank over GF(2) (forward elimination only).
nullspace
    A basis of ``{x : M x = 0}``, shape ``(n - rank, n)``.
systematic_form
    Information set, parity (pivot) positions and the packed map from
    information bits to parity bits: the core of the systematic encoder.

Memory: the packed work matrix of an ``r x c`` input takes ``r * c / 8``
bytes whatever its sparsity. :func:`pack_matrix` checks that estimate
against :func:`ldpcmarg._memory.memory_budget` (half the available memory)
first and raises :class:`~ldpcmarg.errors.ResourceError` when it does not fit,
so the documented limit is ``m * n <= 4 * available bytes`` (about 10^11 on a
machine with 24 GB free, e.g. n = 4.5 * 10^5 at rate 1/2).
"""

from __future__ import annotations

from dataclasses import dataclass

import numba as nb
import numpy as np
import scipy.sparse as sp

from .._memory import require_memory
from .._settings import NUMBA_OPTS
from ..errors import InputError

__all__ = [
    "pack_rows",
    "unpack_rows",
    "pack_matrix",
    "row_reduce",
    "rank",
    "nullspace",
    "systematic_form",
    "SystematicForm",
    "popcount_rows",
    "apply_systematic",
    "enumerate_weights",
    "information_set_search",
]


# --------------------------------------------------------------------- packing
def pack_rows(dense: np.ndarray) -> np.ndarray:
    """Pack a 0/1 matrix of shape (r, c) into uint64 words of shape (r, ceil(c/64))."""
    dense = np.asarray(dense)
    r, c = dense.shape
    words = (c + 63) // 64
    padded = np.zeros((r, words * 64), dtype=np.uint8)
    padded[:, :c] = dense != 0
    # little bit order within bytes + little-endian words: bit j -> word j//64, bit j%64
    packed = np.packbits(padded, axis=1, bitorder="little")
    return np.ascontiguousarray(packed).view("<u8").astype(np.uint64, copy=False).reshape(r, words)


def unpack_rows(packed: np.ndarray, ncols: int) -> np.ndarray:
    """Inverse of :func:`pack_rows`: (r, words) uint64 -> (r, ncols) uint8."""
    packed = np.ascontiguousarray(packed, dtype=np.uint64)
    r, words = packed.shape
    as_bytes = packed.astype("<u8", copy=False).view(np.uint8).reshape(r, words * 8)
    return np.unpackbits(as_bytes, axis=1, count=ncols, bitorder="little")


@nb.njit(**NUMBA_OPTS)
def _pack_coo_kernel(rows, cols, out):
    """Set bit ``cols[e]`` of packed row ``rows[e]`` (out zero-initialised)."""
    one = np.uint64(1)
    for e in range(rows.shape[0]):
        c = cols[e]
        out[rows[e], c >> 6] |= one << np.uint64(c & 63)


def _as_coo(M):
    """(rows, cols, shape) of the nonzeros of a 0/1 dense or sparse matrix (validated)."""
    if sp.issparse(M):
        coo = sp.coo_matrix(M)
        data = np.asarray(coo.data)
        if data.size and np.any((data != 0) & (data != 1)):
            raise InputError("GF(2) routines need a 0/1 matrix.")
        keep = data != 0
        return coo.row[keep].astype(np.int64), coo.col[keep].astype(np.int64), coo.shape
    arr = np.asarray(M)
    if arr.ndim != 2:
        raise InputError(f"GF(2) routines need a two-dimensional matrix; got shape {arr.shape}.")
    if arr.size and np.any((arr != 0) & (arr != 1)):
        raise InputError("GF(2) routines need a 0/1 matrix.")
    r, c = np.nonzero(arr)
    return r.astype(np.int64), c.astype(np.int64), arr.shape


def pack_matrix(M, col_order: np.ndarray | None = None) -> np.ndarray:
    """Pack a dense or sparse 0/1 matrix, optionally with its columns reordered.

    Parameters
    ----------
    M : ndarray or scipy.sparse matrix of shape (r, c), 0/1
        Duplicate sparse coordinates are OR-ed (not summed mod 2);
        :class:`~ldpcmarg.code.parity_check.ParityCheckCode` rejects them before this point.
    col_order : ndarray of shape (c,), int, optional
        Column ``t`` of the packed result is column ``col_order[t]`` of ``M``.

    Returns
    -------
    ndarray of shape (r, ceil(c / 64)), uint64
    """
    rows, cols, (r, c) = _as_coo(M)
    if col_order is not None:
        col_order = np.asarray(col_order, dtype=np.int64)
        inv = np.empty(c, dtype=np.int64)
        inv[col_order] = np.arange(c, dtype=np.int64)
        cols = inv[cols]
    words = max((c + 63) // 64, 1)
    # dense bit-packed work costs r * c / 8 bytes whatever the sparsity: estimate first
    require_memory(8.0 * r * words, f"Bit-packed GF(2) work on a {r} x {c} matrix",
                   "this code is too long for dense GF(2) elimination (rank, encoder, "
                   "minimum distance) on this machine.")
    out = np.zeros((r, words), dtype=np.uint64)
    _pack_coo_kernel(rows, cols, out)
    return out


# ----------------------------------------------------------------- popcount
@nb.njit(inline="always")
def _popcount64(x):
    x = x - ((x >> np.uint64(1)) & np.uint64(0x5555555555555555))
    x = (x & np.uint64(0x3333333333333333)) + ((x >> np.uint64(2)) & np.uint64(0x3333333333333333))
    x = (x + (x >> np.uint64(4))) & np.uint64(0x0F0F0F0F0F0F0F0F)
    return (x * np.uint64(0x0101010101010101)) >> np.uint64(56)


@nb.njit(**NUMBA_OPTS)
def _popcount_rows_kernel(packed, out):
    for r in range(packed.shape[0]):
        s = 0
        for w in range(packed.shape[1]):
            s += int(_popcount64(packed[r, w]))
        out[r] = s


def popcount_rows(packed: np.ndarray) -> np.ndarray:
    """Hamming weight of every packed row: (r, words) uint64 -> (r,) int64."""
    packed = np.ascontiguousarray(packed, dtype=np.uint64)
    out = np.zeros(packed.shape[0], dtype=np.int64)
    _popcount_rows_kernel(packed, out)
    return out


# -------------------------------------------------------------- elimination
@nb.njit(**NUMBA_OPTS)
def _row_reduce_kernel(rows, ncols, col_order, pivots):
    """Gauss-Jordan elimination in place on packed rows (columns tried in ``col_order``).

    ``pivots[r]`` receives the pivot column of reduced row ``r``. Returns the
    rank. Rows above the rank are zero. Kept for arbitrary column orders; the
    public functions permute columns first and use the faster kernels below.
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


@nb.njit(**NUMBA_OPTS)
def _eliminate_kernel(rows, ncols, full, pivots):
    """Elimination in place on packed rows in natural column order.

    Assumes ``rows`` is C-contiguous uint64 of shape (r, ceil(ncols/64)).
    Forward elimination clears each pivot column below the pivot (enough for
    the rank). With ``full`` true a back substitution from the last pivot up
    then clears the pivot columns above, giving the reduced row echelon form;
    on sparse ``H`` this is about five times faster than clearing above and
    below at each pivot (Gauss-Jordan), because the rows stay sparse during
    the forward pass (experiments/bench_gf2_encoder.py). Because columns are
    tried left to right, a pivot row is zero left of its pivot, so only
    words from the pivot's word onwards are XORed. ``pivots[r]`` receives the
    pivot column of row ``r``; returns the rank.
    """
    nrows, words = rows.shape
    rank = 0
    one = np.uint64(1)
    for col in range(ncols):
        if rank == nrows:
            break
        w = col >> 6
        bit = one << np.uint64(col & 63)
        piv = -1
        for r in range(rank, nrows):
            if rows[r, w] & bit:
                piv = r
                break
        if piv < 0:
            continue
        if piv != rank:
            for j in range(w, words):
                tmp = rows[piv, j]
                rows[piv, j] = rows[rank, j]
                rows[rank, j] = tmp
        for r in range(rank + 1, nrows):
            if rows[r, w] & bit:
                for j in range(w, words):
                    rows[r, j] ^= rows[rank, j]
        pivots[rank] = col
        rank += 1
    if full:
        for r in range(rank - 1, 0, -1):
            col = pivots[r]
            w = col >> 6
            bit = one << np.uint64(col & 63)
            for q in range(r):
                if rows[q, w] & bit:
                    for j in range(w, words):
                        rows[q, j] ^= rows[r, j]
    return rank


def _reduce_packed(M, col_order, full: bool):
    """Pack ``M`` with columns in ``col_order`` and eliminate; pivots in original indices."""
    rows_, cols_, (r, c) = _as_coo(M)
    del rows_, cols_
    if col_order is None:
        col_order = np.arange(c, dtype=np.int64)
    else:
        col_order = np.asarray(col_order, dtype=np.int64)
        if col_order.shape != (c,) or not np.array_equal(np.sort(col_order), np.arange(c)):
            raise InputError(f"col_order must be a permutation of 0..{c - 1}.")
    packed = pack_matrix(M, col_order)
    pivots = np.full(max(r, 1), -1, dtype=np.int64)
    rk = _eliminate_kernel(packed, c, full, pivots)
    return packed, pivots[:rk].copy(), rk, col_order


def row_reduce(dense, col_order: np.ndarray | None = None):
    """Reduced row echelon form over GF(2).

    Parameters
    ----------
    dense : ndarray or scipy.sparse matrix of shape (r, c), 0/1
        Matrix to reduce (not modified).
    col_order : ndarray of int, optional
        Order in which columns are tried as pivots (default ``0..c-1``).

    Returns
    -------
    packed : ndarray of shape (rank, words), uint64
        The nonzero reduced rows, packed, columns in the *original* order.
    pivots : ndarray of shape (rank,), int64
        Pivot column (original index) of each reduced row.
    """
    if col_order is None:
        rows_, cols_, (r, c) = _as_coo(dense)
        packed = pack_matrix(dense)
        pivots = np.full(max(r, 1), -1, dtype=np.int64)
        rk = _eliminate_kernel(packed, c, True, pivots)
        return packed[:rk].copy(), pivots[:rk].copy()
    packed, piv_t, rk, order = _reduce_packed(dense, col_order, True)
    c = order.shape[0]
    # undo the column permutation of the reduced rows
    red = unpack_rows(packed[:rk], c)
    orig = np.zeros_like(red)
    orig[:, order] = red
    return pack_rows(orig), order[piv_t]


def rank(dense) -> int:
    """Rank over GF(2) of a 0/1 matrix (dense ndarray or scipy.sparse)."""
    return int(_reduce_packed(dense, None, False)[2])


# -------------------------------------------------------- systematic form
@nb.njit(**NUMBA_OPTS)
def _gather_columns_kernel(rows, rk, free_cols, out):
    """out[j] = packed bits rows[j, free_cols[f]] over f (j < rk)."""
    one = np.uint64(1)
    for j in range(rk):
        for f in range(free_cols.shape[0]):
            c = free_cols[f]
            if (rows[j, c >> 6] >> np.uint64(c & 63)) & one:
                out[j, f >> 6] |= one << np.uint64(f & 63)


@dataclass(frozen=True)
class SystematicForm:
    """A systematic description of the nullspace of ``M`` (m x n, rank r).

    Attributes
    ----------
    info : ndarray of shape (k,), int64
        Information set: positions whose values can be chosen freely
        (``k = n - r``), increasing.
    parity : ndarray of shape (r,), int64
        Pivot positions; ``parity[j]`` is determined by the information bits.
    parity_map : ndarray of shape (r, ceil(k / 64)), uint64
        Packed rows: ``x[parity[j]] = XOR_f parity_map[j, f] * x[info[f]]``.
    n : int
    """

    info: np.ndarray
    parity: np.ndarray
    parity_map: np.ndarray
    n: int

    @property
    def k(self) -> int:
        return int(self.info.shape[0])

    @property
    def rank(self) -> int:
        return int(self.parity.shape[0])


def systematic_form(M, col_order: np.ndarray | None = None) -> SystematicForm:
    """Information set and parity map of the nullspace of ``M`` over GF(2).

    Parameters
    ----------
    M : ndarray or scipy.sparse matrix of shape (m, n), 0/1
    col_order : ndarray of shape (n,), int, optional
        Preference order for pivot (parity) positions: the first columns of
        the order become parity positions when they can. Default: ``n-1, ..., 0``
        (parity bits at the right, information bits at the left, as in
        ``H = [A | B]`` with ``B`` invertible).

    Returns
    -------
    SystematicForm
    """
    _, _, (m, n) = _as_coo(M)
    if col_order is None:
        col_order = np.arange(n - 1, -1, -1, dtype=np.int64)
    packed, piv_t, rk, order = _reduce_packed(M, col_order, True)
    is_piv = np.zeros(n, dtype=bool)
    is_piv[piv_t] = True
    free_t = np.flatnonzero(~is_piv).astype(np.int64)  # permuted indices
    # information set in increasing original position
    free_t = free_t[np.argsort(order[free_t], kind="stable")]
    k = free_t.shape[0]
    pmap = np.zeros((rk, max((k + 63) // 64, 1)), dtype=np.uint64)
    _gather_columns_kernel(packed, rk, free_t, pmap)
    info = order[free_t]
    parity = order[piv_t]
    return SystematicForm(info=info.astype(np.int64), parity=parity.astype(np.int64),
                          parity_map=np.ascontiguousarray(pmap), n=int(n))


@nb.njit(**NUMBA_OPTS)
def _encode_kernel(msgs_packed, pmap, parity_bits_out):
    """parity_bits_out[f, j] = parity of popcount(pmap[j] & msgs_packed[f])."""
    F = msgs_packed.shape[0]
    r, words = pmap.shape
    one = np.uint64(1)
    for f in range(F):
        for j in range(r):
            acc = np.uint64(0)
            for w in range(words):
                acc ^= pmap[j, w] & msgs_packed[f, w]
            acc ^= acc >> np.uint64(32)
            acc ^= acc >> np.uint64(16)
            acc ^= acc >> np.uint64(8)
            acc ^= acc >> np.uint64(4)
            acc ^= acc >> np.uint64(2)
            acc ^= acc >> np.uint64(1)
            parity_bits_out[f, j] = np.uint8(acc & one)


def apply_systematic(form: SystematicForm, msgs: np.ndarray) -> np.ndarray:
    """Codewords from information bits (no validation; see ``Encoder.encode``).

    Parameters
    ----------
    form : SystematicForm
    msgs : ndarray of shape (F, k), uint8 0/1

    Returns
    -------
    ndarray of shape (F, n), uint8
    """
    F = msgs.shape[0]
    out = np.zeros((F, form.n), dtype=np.uint8)
    out[:, form.info] = msgs
    if form.rank:
        packed = pack_rows(msgs) if form.k else np.zeros((F, 1), dtype=np.uint64)
        if packed.shape[1] < form.parity_map.shape[1]:
            packed = np.zeros((F, form.parity_map.shape[1]), dtype=np.uint64)
        par = np.zeros((F, form.rank), dtype=np.uint8)
        _encode_kernel(np.ascontiguousarray(packed), form.parity_map, par)
        out[:, form.parity] = par
    return out


def nullspace(M, packed: bool = False) -> np.ndarray:
    """A basis of the nullspace ``{x : M x = 0 (mod 2)}``.

    Parameters
    ----------
    M : ndarray or scipy.sparse matrix of shape (m, n), 0/1
    packed : bool
        Return packed rows (uint64, shape (n - r, ceil(n/64))) instead of bytes.

    Returns
    -------
    ndarray of shape (n - rank, n), uint8
        Row ``f`` has a 1 at information position ``info[f]``, zeros at the
        other information positions (systematic generator matrix).
    """
    form = systematic_form(M)
    basis = apply_systematic(form, np.eye(form.k, dtype=np.uint8))
    return pack_rows(basis) if packed else basis


# ------------------------------------------------- codeword weight searches
@nb.njit(**NUMBA_OPTS)
def _gray_enumerate_kernel(gen, n, hist, witness_index):
    """Visit all 2**k codewords spanned by packed rows ``gen`` (k, words) in Gray-code order.

    ``hist[w]`` counts codewords of weight ``w`` (the zero word included);
    ``witness_index[0]`` receives the Gray-code message (an integer whose bit
    ``f`` selects row ``f``) of one nonzero codeword of least weight.
    Assumes k <= 62.
    """
    k, words = gen.shape
    cur = np.zeros(words, dtype=np.uint64)
    hist[0] += 1
    best = n + 1
    total = np.int64(1) << np.int64(k)
    for i in range(1, total):
        # flip the row given by the number of trailing zeros of i
        t = 0
        v = i
        while (v & 1) == 0:
            v >>= 1
            t += 1
        w = 0
        for j in range(words):
            cur[j] ^= gen[t, j]
            w += int(_popcount64(cur[j]))
        hist[w] += 1
        if 0 < w < best:
            best = w
            witness_index[0] = i ^ (i >> 1)


def enumerate_weights(gen_dense: np.ndarray):
    """Weight distribution of the code spanned by the rows of ``gen_dense``.

    Parameters
    ----------
    gen_dense : ndarray of shape (k, n), uint8
        Linearly independent generator rows, ``k <= 62``.

    Returns
    -------
    hist : ndarray of shape (n + 1,), int64
        ``hist[w]`` = number of codewords of weight ``w``.
    witness : ndarray of shape (n,), uint8 or None
        A nonzero codeword of least weight (None when k = 0).
    """
    gen_dense = np.ascontiguousarray(gen_dense, dtype=np.uint8)
    k, n = gen_dense.shape
    if k > 62:
        raise InputError(f"Exhaustive enumeration needs k <= 62; got k = {k}.")
    hist = np.zeros(n + 1, dtype=np.int64)
    if k == 0:
        hist[0] = 1
        return hist, None
    gen = pack_rows(gen_dense)
    widx = np.zeros(1, dtype=np.int64)
    _gray_enumerate_kernel(gen, n, hist, widx)
    sel = ((int(widx[0]) >> np.arange(k)) & 1).astype(np.uint8)
    witness = (sel.astype(np.int64) @ gen_dense.astype(np.int64) % 2).astype(np.uint8)
    return hist, witness


@nb.njit(**NUMBA_OPTS)
def _xor_weight(cols, a, b, c, d, base, bound):
    """base + popcount(cols[a] ^ cols[b] ^ cols[c] ^ cols[d]) (indices < 0 are absent).

    Stops early once the running weight reaches ``bound``.
    """
    s = base
    for w in range(cols.shape[1]):
        x = np.uint64(0)
        if a >= 0:
            x ^= cols[a, w]
        if b >= 0:
            x ^= cols[b, w]
        if c >= 0:
            x ^= cols[c, w]
        if d >= 0:
            x ^= cols[d, w]
        s += int(_popcount64(x))
        if s >= bound:
            return s
    return s


@nb.njit(**NUMBA_OPTS)
def _side_items(lo, hi, pairs, cols, zmask):
    """Subsets of size 0, 1 (and 2 if ``pairs``) of free columns lo..hi-1 (window bits zeroed)."""
    cnt = hi - lo
    total = 1 + cnt + (cnt * (cnt - 1) // 2 if pairs else 0)
    ia = np.full(total, -1, dtype=np.int64)
    ib = np.full(total, -1, dtype=np.int64)
    zv = np.zeros(total, dtype=np.uint64)
    q = 1
    for f in range(lo, hi):
        ia[q] = f
        q += 1
    if pairs:
        for f in range(lo, hi):
            for g in range(f + 1, hi):
                ia[q] = f
                ib[q] = g
                q += 1
    return ia, ib, zv


@nb.njit(**NUMBA_OPTS)
def _isd_kernel(hrows, n, perms, method, max_pairs_side, best_in, witness):
    """Information-set search over a batch of column permutations.

    hrows : (m, ceil(n/64)) uint64, packed H in original column order.
    perms : (B, n) int64, one column order per information set.
    method : 0 = Lee-Brickell (information weight <= 2); 1 = Stern (information
        set split in halves X, Y; subsets of size <= 2 of each half whose
        combination vanishes on a window of l parity rows, l ~ log2 of the
        list size, rows chosen with density closest to 1/2; a half larger
        than ``max_pairs_side`` uses subsets of size <= 1).
    best_in : current best weight (only strictly lighter codewords are kept).
    witness : (n,) uint8, overwritten with each improvement.
    Returns the best weight found (``best_in`` if none lighter).
    """
    m, wn = hrows.shape
    one = np.uint64(1)
    best = best_in
    rows = np.zeros((m, wn), dtype=np.uint64)
    pivots = np.zeros(max(m, 1), dtype=np.int64)
    is_piv = np.zeros(n, dtype=np.bool_)
    for b in range(perms.shape[0]):
        perm = perms[b]
        # permuted copy: column t of rows = column perm[t] of H
        for i in range(m):
            for j in range(wn):
                rows[i, j] = 0
            for t in range(n):
                c = perm[t]
                if (hrows[i, c >> 6] >> np.uint64(c & 63)) & one:
                    rows[i, t >> 6] |= one << np.uint64(t & 63)
        rk = _eliminate_kernel(rows, n, True, pivots)
        for t in range(n):
            is_piv[t] = False
        for j in range(rk):
            is_piv[pivots[j]] = True
        k = n - rk
        if k == 0:
            continue
        free = np.empty(k, dtype=np.int64)
        q = 0
        for t in range(n):
            if not is_piv[t]:
                free[q] = t
                q += 1
        wr = max((rk + 63) // 64, 1)
        # columns of the reduced matrix at free positions, packed over the rk pivot rows
        cols = np.zeros((k, wr), dtype=np.uint64)
        for j in range(rk):
            for f in range(k):
                t = free[f]
                if (rows[j, t >> 6] >> np.uint64(t & 63)) & one:
                    cols[f, j >> 6] |= one << np.uint64(j & 63)
        sel = np.full(4, -1, dtype=np.int64)
        found = False
        # information weight 1 (always)
        for f in range(k):
            w = _xor_weight(cols, f, -1, -1, -1, 1, best)
            if w < best:
                best = w
                sel[:] = -1
                sel[0] = f
                found = True
        if method == 0:
            for f in range(k):
                for g in range(f + 1, k):
                    w = _xor_weight(cols, f, g, -1, -1, 2, best)
                    if w < best:
                        best = w
                        sel[:] = -1
                        sel[0] = f
                        sel[1] = g
                        found = True
        else:
            half = k // 2
            pairs = half <= max_pairs_side
            ia, ib, zx = _side_items(0, half, pairs, cols, np.uint64(0))
            ja, jb, zy = _side_items(half, k, pairs, cols, np.uint64(0))
            ny = ja.shape[0]
            ell = 0
            while (1 << (ell + 1)) <= ny and ell < 63:
                ell += 1
            ell = min(ell, rk, 63)
            # window: the ell parity rows whose density over the free columns is
            # closest to 1/2 (sparse rows would put most subsets in one bucket)
            dens = np.zeros(rk, dtype=np.int64)
            for f in range(k):
                for j in range(rk):
                    if (cols[f, j >> 6] >> np.uint64(j & 63)) & one:
                        dens[j] += 1
            win = np.argsort(np.abs(2 * dens - k))[:ell]
            zcol = np.zeros(k, dtype=np.uint64)
            for f in range(k):
                z = np.uint64(0)
                for i in range(ell):
                    j = win[i]
                    z |= ((cols[f, j >> 6] >> np.uint64(j & 63)) & one) << np.uint64(i)
                zcol[f] = z
            for q in range(zx.shape[0]):
                z = np.uint64(0)
                if ia[q] >= 0:
                    z ^= zcol[ia[q]]
                if ib[q] >= 0:
                    z ^= zcol[ib[q]]
                zx[q] = z
            for q in range(ny):
                z = np.uint64(0)
                if ja[q] >= 0:
                    z ^= zcol[ja[q]]
                if jb[q] >= 0:
                    z ^= zcol[jb[q]]
                zy[q] = z
            # merge-join the two lists on their window bits
            ox = np.argsort(zx)
            oy = np.argsort(zy)
            nxl = zx.shape[0]
            # count the matches first: when the window rows are strongly
            # dependent (structured codes) the matches explode; skip the
            # pair search of such an information set to bound the work
            matches = 0
            px = 0
            py = 0
            while px < nxl and py < ny:
                kx = zx[ox[px]]
                ky = zy[oy[py]]
                if kx < ky:
                    px += 1
                elif ky < kx:
                    py += 1
                else:
                    ex = px
                    while ex < nxl and zx[ox[ex]] == kx:
                        ex += 1
                    ey = py
                    while ey < ny and zy[oy[ey]] == kx:
                        ey += 1
                    matches += (ex - px) * (ey - py)
                    px = ex
                    py = ey
            px = 0
            py = 0
            if matches > 16 * (nxl + ny) + 100000:
                px = nxl
            while px < nxl and py < ny:
                kx = zx[ox[px]]
                ky = zy[oy[py]]
                if kx < ky:
                    px += 1
                    continue
                if ky < kx:
                    py += 1
                    continue
                ex = px
                while ex < nxl and zx[ox[ex]] == kx:
                    ex += 1
                ey = py
                while ey < ny and zy[oy[ey]] == kx:
                    ey += 1
                for u in range(px, ex):
                    q = ox[u]
                    nx = (ia[q] >= 0) + (ib[q] >= 0)
                    for v in range(py, ey):
                        y = oy[v]
                        nyy = (ja[y] >= 0) + (jb[y] >= 0)
                        if nx + nyy == 0:
                            continue
                        w = _xor_weight(cols, ia[q], ib[q], ja[y], jb[y], nx + nyy, best)
                        if w < best:
                            best = w
                            sel[0] = ia[q]
                            sel[1] = ib[q]
                            sel[2] = ja[y]
                            sel[3] = jb[y]
                            found = True
                px = ex
                py = ey
        if found:
            for t in range(n):
                witness[t] = 0
            for s_ in range(4):
                if sel[s_] >= 0:
                    witness[perm[free[sel[s_]]]] ^= 1
            for j in range(rk):
                bit = np.uint64(0)
                for s_ in range(4):
                    if sel[s_] >= 0:
                        bit ^= (cols[sel[s_], j >> 6] >> np.uint64(j & 63)) & one
                if bit:
                    witness[perm[pivots[j]]] = 1
    return best


_ISD_METHODS = {"lee-brickell": 0, "stern": 1}


def information_set_search(M, budget: int, seed: int = 0, method: str = "stern",
                           max_pairs_side: int = 2000, batch: int = 16):
    """Randomised search for a low-weight nonzero vector of the nullspace of ``M``.

    Information-set decoding: draw a random column order, bring ``M`` to
    reduced echelon form (an information set of ``k`` positions), and inspect
    codewords whose information part is light:

    * ``"lee-brickell"``: information weight 1 or 2 (Lee & Brickell, 1988);
    * ``"stern"`` (default): the information set is split into halves X and
      Y; subsets of size <= 2 from each half are matched on a window of ``l``
      parity rows where the codeword must vanish (Stern, 1989), so codewords of
      information weight up to 4 are found at the cost of sorting two lists.

    The lightest codeword seen is an upper bound on the minimum distance; it
    is not proven minimal.

    Parameters
    ----------
    M : ndarray or scipy.sparse matrix of shape (m, n), 0/1
    budget : int
        Number of random information sets tried (the result is deterministic
        in ``budget`` and ``seed``).
    seed : int
        Seed of the ``numpy.random.Generator`` drawing the column orders.
    method : {"stern", "lee-brickell"}
    max_pairs_side : int
        Stern: halves larger than this use subsets of size <= 1 (memory bound).
    batch : int
        Permutations drawn per kernel call.

    Returns
    -------
    weight : int
        Weight of the lightest nonzero codeword found (0 if the nullspace is trivial).
    witness : ndarray of shape (n,), uint8 or None
    """
    if method not in _ISD_METHODS:
        raise InputError(f"Unknown information-set search {method!r}; use 'stern' or "
                         "'lee-brickell'.")
    _, _, (m, n) = _as_coo(M)
    hrows = pack_matrix(M)
    rng = np.random.default_rng(seed)
    witness = np.zeros(n, dtype=np.uint8)
    best = n + 1
    done = 0
    while done < budget:
        b = min(batch, budget - done)
        perms = np.argsort(rng.random((b, n)), axis=1).astype(np.int64)
        best = _isd_kernel(hrows, n, perms, _ISD_METHODS[method], int(max_pairs_side), best,
                           witness)
        done += b
    if best > n:
        return 0, None
    return int(best), witness
