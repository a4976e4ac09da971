"""Constellations with bit labels and the soft demapper of bit-interleaved coded modulation.

Conventions
-----------
* A constellation has ``M = 2**m`` complex points with **unit average symbol
  energy** ``Es = mean |s|^2 = 1`` and a distinct ``m``-bit label per point.
  The ``m`` code bits of a symbol are taken in stream order; the first bit is
  the most significant bit of the label.
* Channel ``y = h s + w`` with complex Gaussian noise of variance
  ``N0 = 1 / (Es/N0)`` (``N0 / 2`` per real dimension) and a fading gain ``h``
  known at the receiver (``h = 1`` without fading).
* Bit LLR (positive favours bit 0)::

      L_j = ln sum_{s: b_j(s)=0} exp(-|y - h s|^2 / N0)
          - ln sum_{s: b_j(s)=1} exp(-|y - h s|^2 / N0)

  The exact demapper evaluates both sums as log-sum-exp: it shifts every
  metric by the symbol's largest metric before ``exp`` (the sum holding the
  nearest point is then >= 1) and recomputes a sum with its own maximum when
  it underflows, so no metric is ever exponentiated unshifted. The max-log
  demapper keeps only the largest term of each sum. LLRs are clipped to
  ``+-LLR_MAX``.

Built-in constellations (``make_modulation``)
---------------------------------------------
``bpsk`` (0 -> +1, 1 -> -1), ``qpsk``, ``8psk`` -- Gray-labelled M-PSK,
point ``k`` at angle ``2 pi k / M + pi / M`` (``M >= 4``) with label
``k xor (k >> 1)`` -- and ``qam16``, ``qam64``, ``qam256`` -- square Gray
QAM: the first ``m/2`` label bits are the Gray label of the in-phase level,
the last ``m/2`` bits that of the quadrature level, levels
``-(L-1), ..., -1, 1, ..., L-1`` scaled by ``sqrt(3 / (2 (M - 1)))``.
Gray 4-PSK carries its two bits on the two quadratures (MSB on the
quadrature, LSB on the in-phase axis): two independent BPSK channels, each
at half the symbol energy.

User constellation file (a format of this project)
--------------------------------------------------
A text file with one point per line: a bit label written as ``m`` binary
digits, then the real and the imaginary part::

    # four points of a rotated square, labels in Gray order
    00   0.7071   0.7071
    01  -0.7071   0.7071
    11  -0.7071  -0.7071
    10   0.7071  -0.7071

``#`` starts a comment; blank lines are ignored; fields are separated by
spaces, tabs or commas. ``M`` (the number of lines with points) must be a
power of two >= 2, every label must have ``m = log2 M`` digits, and points
and labels must be distinct. The points are rescaled to unit average energy
(the file's scale does not matter); the scale factor is recorded.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass, field
from pathlib import Path

import numba as nb
import numpy as np

from .._settings import LLR_MAX, NUMBA_OPTS
from ..errors import InputError

__all__ = [
    "Constellation",
    "make_constellation",
    "load_constellation",
    "parse_modulation",
    "psk",
    "square_qam",
    "demap",
    "square_qam_channel",
    "square_qam_demap",
    "BUILTIN_CONSTELLATIONS",
    "DEMAPPERS",
]

#: Names accepted by :func:`make_constellation`.
BUILTIN_CONSTELLATIONS = ("bpsk", "qpsk", "8psk", "qam16", "qam64", "qam256")
#: Demapper names: exact log-sum-exp or max-log.
DEMAPPERS = ("exact", "maxlog")

#: A sum of shifted exponentials below this is recomputed with its own maximum.
_UNDERFLOW = 1e-250


def _gray(k: np.ndarray) -> np.ndarray:
    return k ^ (k >> 1)


@dataclass(frozen=True, eq=False)
class Constellation:
    """A labelled constellation with unit average energy.

    Parameters
    ----------
    name : str
        ``"qam16"``, ..., or ``"@path"`` for a user file.
    points : ndarray of shape (M,), complex128
        Symbol points, unit average energy.
    labels : ndarray of shape (M,), int64
        Bit label of each point (an integer in ``0 .. M-1``; bit ``j`` of a
        symbol, ``j = 0`` first, is bit ``m-1-j`` of the label).
    digest : str
        Short hash of points and labels (part of a run's identity).
    """

    name: str
    points: np.ndarray
    labels: np.ndarray
    digest: str = ""
    bit_table: np.ndarray = field(default=None, repr=False)
    #: Square QAM only: the real levels of one dimension (unit-energy scale) and
    #: the Gray label of each level; enables the separable fast path.
    pam_levels: np.ndarray | None = field(default=None, repr=False)
    pam_labels: np.ndarray | None = field(default=None, repr=False)

    def __post_init__(self):
        M = self.points.shape[0]
        m = int(round(math.log2(M))) if M > 0 else 0
        if M < 2 or 2**m != M:
            raise InputError(f"A constellation needs M = 2**m >= 2 points; got M = {M}.")
        table = ((self.labels[:, None] >> (m - 1 - np.arange(m))[None, :]) & 1).astype(np.uint8)
        object.__setattr__(self, "bit_table", np.ascontiguousarray(table))
        if not self.digest:
            h = hashlib.sha256(np.round(self.points.view(np.float64), 12).tobytes()
                               + self.labels.astype(np.int64).tobytes()).hexdigest()[:16]
            object.__setattr__(self, "digest", h)

    @property
    def size(self) -> int:
        """Number of points M."""
        return int(self.points.shape[0])

    @property
    def bits_per_symbol(self) -> int:
        """m = log2 M."""
        return int(round(math.log2(self.size)))

    @property
    def min_distance(self) -> float:
        """Smallest distance between two points (unit average energy)."""
        d = np.abs(self.points[:, None] - self.points[None, :])
        d[np.diag_indices_from(d)] = np.inf
        return float(d.min())

    @property
    def is_real(self) -> bool:
        """All points on the real axis (BPSK-like: one real dimension carries the signal)."""
        return bool(np.all(self.points.imag == 0.0))

    @property
    def bit_symmetric(self) -> bool:
        """Every bit channel is output-symmetric (BPSK and Gray 4-PSK).

        True when, for each bit position, the reflection that flips that bit
        maps the constellation onto itself with the other bits unchanged.
        Only then may the all-zero word stand for random codewords without
        the scrambler.
        """
        pts = self.points
        lab = self.labels
        m = self.bits_per_symbol
        by_label = {int(lab[i]): pts[i] for i in range(self.size)}
        for j in range(m):
            flip = 1 << (m - 1 - j)
            ok_re = all(abs(by_label[int(lb) ^ flip] - complex(-p.real, p.imag)) < 1e-9
                        for lb, p in by_label.items())
            ok_im = all(abs(by_label[int(lb) ^ flip] - complex(p.real, -p.imag)) < 1e-9
                        for lb, p in by_label.items())
            ok_neg = all(abs(by_label[int(lb) ^ flip] + p) < 1e-9 for lb, p in by_label.items())
            if not (ok_re or ok_im or (m == 1 and ok_neg)):
                return False
        return True

    def modulate(self, bits: np.ndarray) -> np.ndarray:
        """Map bits to symbols.

        Parameters
        ----------
        bits : ndarray of shape (F, S * m), uint8
            Bit stream per frame (its length a multiple of m).

        Returns
        -------
        ndarray of shape (F, S), complex128
        """
        m = self.bits_per_symbol
        F, nb_ = bits.shape
        if nb_ % m:
            raise InputError(f"The bit stream length {nb_} is not a multiple of m = {m}.")
        groups = bits.reshape(F, nb_ // m, m).astype(np.int64)
        weights = (1 << (m - 1 - np.arange(m))).astype(np.int64)
        lab = groups @ weights
        inverse = np.empty(self.size, dtype=np.int64)
        inverse[self.labels] = np.arange(self.size)
        return self.points[inverse[lab]]

    def to_dict(self) -> dict:
        return {"name": self.name, "M": self.size, "bits_per_symbol": self.bits_per_symbol,
                "digest": self.digest}


def psk(M: int) -> Constellation:
    """Gray-labelled M-PSK with unit energy (see module docstring for the geometry)."""
    k = np.arange(M)
    offset = 0.0 if M == 2 else math.pi / M
    pts = np.exp(1j * (2 * math.pi * k / M + offset))
    pts = np.where(np.abs(pts.real) < 1e-15, 1j * pts.imag, pts)
    pts = np.where(np.abs(pts.imag) < 1e-15, pts.real + 0j, pts)
    name = {2: "bpsk", 4: "qpsk"}.get(M, f"{M}psk")
    return Constellation(name, pts.astype(np.complex128), _gray(k).astype(np.int64))


def square_qam(M: int) -> Constellation:
    """Square Gray M-QAM (M = 4**j) with unit average energy."""
    m = int(round(math.log2(M)))
    if 2**m != M or m % 2:
        raise InputError(f"Square QAM needs M = 4**j; got {M}.")
    L = 2 ** (m // 2)
    levels = 2 * np.arange(L) - (L - 1)
    gi, gq = np.meshgrid(np.arange(L), np.arange(L), indexing="ij")
    pts = (levels[gi] + 1j * levels[gq]).ravel() * math.sqrt(3.0 / (2.0 * (M - 1)))
    labels = ((_gray(gi) << (m // 2)) | _gray(gq)).ravel()
    scale = math.sqrt(3.0 / (2.0 * (M - 1)))
    return Constellation(f"qam{M}", pts.astype(np.complex128), labels.astype(np.int64),
                         pam_levels=(levels * scale).astype(np.float64),
                         pam_labels=_gray(np.arange(L)).astype(np.int64))


def make_constellation(name: str) -> Constellation:
    """A built-in constellation by name, or a user file given as ``@path``."""
    key = name.strip().lower()
    if key.startswith("@"):
        return load_constellation(name.strip()[1:])
    table = {"bpsk": lambda: psk(2), "qpsk": lambda: psk(4), "8psk": lambda: psk(8),
             "qam16": lambda: square_qam(16), "qam64": lambda: square_qam(64),
             "qam256": lambda: square_qam(256)}
    if key not in table:
        raise InputError(f"Unknown modulation {name!r}; accepted: "
                         f"{', '.join(BUILTIN_CONSTELLATIONS)} or @FILE.")
    return table[key]()


def load_constellation(path) -> Constellation:
    """Read a user constellation file (format in the module docstring).

    Raises
    ------
    InputError
        Missing file, malformed line, M not a power of two, labels of the
        wrong width, repeated points or labels.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"Cannot read the constellation file {str(p)!r}: {exc.strerror}.") \
            from exc
    labels, pts, widths = [], [], set()
    for lineno, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].replace(",", " ").strip()
        if not line:
            continue
        f = line.split()
        if len(f) != 3 or any(ch not in "01" for ch in f[0]):
            raise InputError(f"Constellation file {p.name} line {lineno}: expected 'LABEL RE IM' "
                             f"with a binary label, e.g. '0110 0.3 -0.9'; got {raw.strip()!r}.")
        try:
            re_, im_ = float(f[1]), float(f[2])
        except ValueError as exc:
            raise InputError(f"Constellation file {p.name} line {lineno}: the point "
                             f"coordinates must be numbers; got {raw.strip()!r}.") from exc
        if not (math.isfinite(re_) and math.isfinite(im_)):
            raise InputError(f"Constellation file {p.name} line {lineno}: coordinates must "
                             "be finite.")
        widths.add(len(f[0]))
        labels.append(int(f[0], 2))
        pts.append(complex(re_, im_))
    M = len(pts)
    if M < 2 or M & (M - 1):
        raise InputError(f"Constellation file {p.name} has {M} points; the number of points "
                         "must be a power of two >= 2 (2, 4, 8, ...).")
    m = int(round(math.log2(M)))
    if widths != {m}:
        raise InputError(f"Constellation file {p.name}: every label must have m = log2 M = {m} "
                         f"binary digits; found widths {sorted(widths)}.")
    if len(set(labels)) != M:
        dup = next(lb for lb in labels if labels.count(lb) > 1)
        raise InputError(f"Constellation file {p.name} repeats the label {dup:0{m}b}; each "
                         "label must appear once.")
    arr = np.asarray(pts, dtype=np.complex128)
    d = np.abs(arr[:, None] - arr[None, :])
    d[np.diag_indices_from(d)] = np.inf
    if d.min() <= 1e-12 * max(np.abs(arr).max(), 1e-300):
        i, j = np.unravel_index(np.argmin(d), d.shape)
        raise InputError(f"Constellation file {p.name} repeats the point {arr[i]:.6g} (labels "
                         f"{labels[i]:0{m}b} and {labels[j]:0{m}b}); points must be distinct.")
    energy = float(np.mean(np.abs(arr) ** 2))
    arr = arr / math.sqrt(energy)
    return Constellation("@" + str(path), arr, np.asarray(labels, dtype=np.int64))


def parse_modulation(text: str | None) -> tuple[Constellation, str]:
    """Parse ``NAME[:maxlog]`` (``NAME`` built in or ``@FILE``) -> (constellation, demapper).

    ``NAME:exact`` is accepted too; the default demapper is ``exact``.
    """
    if text is None or not str(text).strip():
        return psk(2), "exact"
    s = str(text).strip()
    name, demapper = s, "exact"
    head, sep, tail = s.rpartition(":")
    if sep and tail.strip().lower() in DEMAPPERS:
        name, demapper = head, tail.strip().lower()
    elif sep and not s.startswith("@"):
        raise InputError(f"Unknown demapper {tail!r} in --modulation {s!r}; write NAME or "
                         "NAME:maxlog (NAME one of bpsk, qpsk, 8psk, qam16, qam64, qam256, @FILE).")
    return make_constellation(name), demapper


# ------------------------------------------------------------------ demapper kernels
@nb.njit(**NUMBA_OPTS)
def _demap_kernel(y, h, points, bit_table, inv_n0, maxlog, out):
    """Bit LLRs of complex symbols ``y`` (F, S) with gains ``h`` (F, S) -> out (F, S*m).

    ``points`` (M,) complex128, ``bit_table`` (M, m) uint8, ``inv_n0`` = 1/N0.
    Assumes validated, contiguous inputs.
    """
    F, S = y.shape
    M = points.shape[0]
    m = bit_table.shape[1]
    metric = np.empty(M, dtype=np.float64)
    expo = np.empty(M, dtype=np.float64)
    for f in range(F):
        for s in range(S):
            ys = y[f, s]
            hs = h[f, s]
            best = -np.inf
            for k in range(M):
                d = ys - hs * points[k]
                v = -(d.real * d.real + d.imag * d.imag) * inv_n0
                metric[k] = v
                if v > best:
                    best = v
            if not maxlog:
                for k in range(M):
                    expo[k] = math.exp(metric[k] - best)
            for j in range(m):
                mx0 = -np.inf
                mx1 = -np.inf
                for k in range(M):
                    v = metric[k]
                    if bit_table[k, j] == 0:
                        if v > mx0:
                            mx0 = v
                    elif v > mx1:
                        mx1 = v
                if maxlog:
                    llr = mx0 - mx1
                else:
                    s0 = 0.0
                    s1 = 0.0
                    for k in range(M):
                        if bit_table[k, j] == 0:
                            s0 += expo[k]
                        else:
                            s1 += expo[k]
                    # the sum holding the nearest point is >= 1; the other may underflow:
                    # recompute it shifted by its own maximum (still log-sum-exp)
                    if s0 < _UNDERFLOW:
                        s0 = 0.0
                        for k in range(M):
                            if bit_table[k, j] == 0:
                                s0 += math.exp(metric[k] - mx0)
                        l0 = mx0 + math.log(s0)
                    else:
                        l0 = best + math.log(s0)
                    if s1 < _UNDERFLOW:
                        s1 = 0.0
                        for k in range(M):
                            if bit_table[k, j] != 0:
                                s1 += math.exp(metric[k] - mx1)
                        l1 = mx1 + math.log(s1)
                    else:
                        l1 = best + math.log(s1)
                    llr = l0 - l1
                if llr > LLR_MAX:
                    llr = LLR_MAX
                elif llr < -LLR_MAX:
                    llr = -LLR_MAX
                out[f, s * m + j] = llr


@nb.njit(**NUMBA_OPTS)
def _pam_llrs(yd, a, levels, pam_bits, inv_n0, maxlog, metric, expo, out, f, off):
    """Exact (or max-log) LLRs of the ``m/2`` label bits of one PAM dimension.

    ``yd`` is the derotated received value of this dimension and ``a = |h|``;
    writes ``out[f, off + j]`` for ``j < m/2``. Shared by the fused channel
    kernel and the receiver-side kernel so both give the same numbers.
    """
    L = levels.shape[0]
    half = pam_bits.shape[1]
    best = -np.inf
    for k in range(L):
        e = yd - a * levels[k]
        v = -e * e * inv_n0
        metric[k] = v
        if v > best:
            best = v
    if not maxlog:
        for k in range(L):
            expo[k] = math.exp(metric[k] - best)
    for j in range(half):
        mx0 = -np.inf
        mx1 = -np.inf
        s0 = 0.0
        s1 = 0.0
        for k in range(L):
            v = metric[k]
            if pam_bits[k, j] == 0:
                mx0 = max(mx0, v)
                s0 += expo[k] if not maxlog else 0.0
            else:
                mx1 = max(mx1, v)
                s1 += expo[k] if not maxlog else 0.0
        if maxlog:
            llr = mx0 - mx1
        else:
            if s0 < _UNDERFLOW:
                s0 = 0.0
                for k in range(L):
                    if pam_bits[k, j] == 0:
                        s0 += math.exp(metric[k] - mx0)
                l0 = mx0 + math.log(s0)
            else:
                l0 = best + math.log(s0)
            if s1 < _UNDERFLOW:
                s1 = 0.0
                for k in range(L):
                    if pam_bits[k, j] != 0:
                        s1 += math.exp(metric[k] - mx1)
                l1 = mx1 + math.log(s1)
            else:
                l1 = best + math.log(s1)
            llr = l0 - l1
        if llr > LLR_MAX:
            llr = LLR_MAX
        elif llr < -LLR_MAX:
            llr = -LLR_MAX
        out[f, off + j] = llr


@nb.njit(**NUMBA_OPTS)
def _square_qam_kernel(stream, z, h, faded, sigma, inv_n0, levels, level_of_label, pam_bits,
                       maxlog, out):
    """Square Gray QAM: map bits, add fading and noise, demap exactly -- in one pass.

    stream (F, S*m) uint8 bits; z (F, S, 2) standard normals; h (F, S) complex
    gains (read only when ``faded``); ``sigma = sqrt(N0/2)``; ``levels`` (L,)
    one-dimensional levels; ``level_of_label`` (L,) level index of each Gray
    half-label; ``pam_bits`` (L, m/2) uint8 bits of each level's label.
    The LLR of a bit of one quadrature is exact with the other quadrature
    summed out: after derotation by ``conj(h)/|h|`` the noise stays circular,
    so the two dimensions separate and the other dimension's sum cancels.
    The received value ``h x + w`` is formed exactly as numpy's complex
    arithmetic forms it, so :func:`_square_qam_rx_kernel` applied to the
    symbols of :meth:`Link.transmit` gives these LLRs bit for bit.
    """
    F = stream.shape[0]
    S = z.shape[1]
    L = levels.shape[0]
    half = pam_bits.shape[1]
    m = 2 * half
    metric = np.empty(L, dtype=np.float64)
    expo = np.empty(L, dtype=np.float64)
    for f in range(F):
        for s in range(S):
            base = s * m
            li = 0
            lq = 0
            for j in range(half):
                li = 2 * li + stream[f, base + j]
                lq = 2 * lq + stream[f, base + half + j]
            xr = levels[level_of_label[li]]
            xq = levels[level_of_label[lq]]
            wr = sigma * z[f, s, 0]
            wi = sigma * z[f, s, 1]
            if faded:
                hr = h[f, s].real
                hi = h[f, s].imag
                a = math.sqrt(hr * hr + hi * hi)
                if a == 0.0:
                    for j in range(m):
                        out[f, base + j] = 0.0
                    continue
                yr = hr * xr - hi * xq + wr
                yi = hr * xq + hi * xr + wi
                # derotate: conj(h) y / |h| = |h| x + circular noise
                dr = (hr * yr + hi * yi) / a
                di = (hr * yi - hi * yr) / a
            else:
                a = 1.0
                dr = xr + wr
                di = xq + wi
            _pam_llrs(dr, a, levels, pam_bits, inv_n0, maxlog, metric, expo, out, f, base)
            _pam_llrs(di, a, levels, pam_bits, inv_n0, maxlog, metric, expo, out, f,
                      base + half)


@nb.njit(**NUMBA_OPTS)
def _square_qam_rx_kernel(y, h, faded, inv_n0, levels, pam_bits, maxlog, out):
    """Square Gray QAM receiver: received symbols y (F, S) and gains h -> bit LLRs.

    The demapping half of :func:`_square_qam_kernel` (same derotation, same
    per-dimension sums). Assumes validated, contiguous inputs.
    """
    F, S = y.shape
    L = levels.shape[0]
    half = pam_bits.shape[1]
    m = 2 * half
    metric = np.empty(L, dtype=np.float64)
    expo = np.empty(L, dtype=np.float64)
    for f in range(F):
        for s in range(S):
            base = s * m
            yr = y[f, s].real
            yi = y[f, s].imag
            if faded:
                hr = h[f, s].real
                hi = h[f, s].imag
                a = math.sqrt(hr * hr + hi * hi)
                if a == 0.0:
                    for j in range(m):
                        out[f, base + j] = 0.0
                    continue
                dr = (hr * yr + hi * yi) / a
                di = (hr * yi - hi * yr) / a
            else:
                a = 1.0
                dr = yr
                di = yi
            _pam_llrs(dr, a, levels, pam_bits, inv_n0, maxlog, metric, expo, out, f, base)
            _pam_llrs(di, a, levels, pam_bits, inv_n0, maxlog, metric, expo, out, f,
                      base + half)


def _pam_tables(constellation: Constellation):
    L = constellation.pam_levels.shape[0]
    level_of_label = np.empty(L, dtype=np.int64)
    level_of_label[constellation.pam_labels] = np.arange(L)
    half = int(round(math.log2(L)))
    pam_bits = ((constellation.pam_labels[:, None] >> (half - 1 - np.arange(half))[None, :])
                & 1).astype(np.uint8)
    return level_of_label, np.ascontiguousarray(pam_bits), half


def square_qam_channel(constellation: Constellation, stream: np.ndarray, h, z: np.ndarray,
                       n0: float, *, demapper: str = "exact") -> np.ndarray:
    """Square Gray QAM link in one pass: bits -> symbols -> ``h s + w`` -> bit LLRs.

    Parameters
    ----------
    constellation : Constellation
        A square QAM from :func:`square_qam` (``pam_levels`` set).
    stream : ndarray of shape (F, S*m), uint8
    h : ndarray of shape (F, S), complex128, or None (no fading)
    z : ndarray of shape (F, S, 2), float64
        Standard normal draws; the noise is ``sqrt(N0/2) * (z0 + i z1)``.
    n0 : float
        Complex noise variance N0 = 1/(Es/N0).

    Returns
    -------
    ndarray of shape (F, S*m), float64
        The same LLRs as :func:`demap` of ``h * modulate(stream) + w`` (up to rounding).
    """
    lev = constellation.pam_levels
    if lev is None:
        raise InputError(f"{constellation.name} is not a square QAM.")
    level_of_label, pam_bits, half = _pam_tables(constellation)
    F = stream.shape[0]
    S = z.shape[1]
    faded = h is not None
    hh = np.ascontiguousarray(h, dtype=np.complex128) if faded else \
        np.zeros((1, 1), dtype=np.complex128)
    out = np.empty((F, S * 2 * half), dtype=np.float64)
    _square_qam_kernel(np.ascontiguousarray(stream, dtype=np.uint8),
                       np.ascontiguousarray(z, dtype=np.float64), hh, faded,
                       math.sqrt(n0 / 2.0), 1.0 / n0, np.ascontiguousarray(lev),
                       level_of_label, pam_bits, demapper == "maxlog", out)
    return out


def square_qam_demap(constellation: Constellation, y, h, n0: float, *,
                     demapper: str = "exact") -> np.ndarray:
    """Bit LLRs of received square-QAM symbols, one real dimension at a time.

    The same LLRs as :func:`demap` (up to rounding) and, for the symbols of
    :meth:`ldpcmarg.link.link.Link.transmit`, bit for bit those of
    :func:`square_qam_channel`.

    Parameters
    ----------
    constellation : Constellation
        A square QAM from :func:`square_qam`.
    y : ndarray of shape (F, S), complex128
        Received symbols ``h s + w``.
    h : ndarray of shape (F, S), complex128, or None (no fading, h = 1)
    n0 : float
        Complex noise variance N0 = 1/(Es/N0).

    Returns
    -------
    ndarray of shape (F, S*m), float64
    """
    if constellation.pam_levels is None:
        raise InputError(f"{constellation.name} is not a square QAM.")
    _, pam_bits, half = _pam_tables(constellation)
    yy = np.ascontiguousarray(np.atleast_2d(y), dtype=np.complex128)
    faded = h is not None
    hh = np.ascontiguousarray(h, dtype=np.complex128) if faded else \
        np.zeros((1, 1), dtype=np.complex128)
    out = np.empty((yy.shape[0], yy.shape[1] * 2 * half), dtype=np.float64)
    _square_qam_rx_kernel(yy, hh, faded, 1.0 / n0,
                          np.ascontiguousarray(constellation.pam_levels), pam_bits,
                          demapper == "maxlog", out)
    return out


def demap(constellation: Constellation, y, h, n0: float, *, demapper: str = "exact") -> np.ndarray:
    """Bit LLRs of received symbols.

    Parameters
    ----------
    constellation : Constellation
    y : ndarray of shape (F, S), complex
        Received symbols ``h s + w``.
    h : ndarray of shape (F, S), complex, or scalar
        Channel gains known at the receiver (1 without fading).
    n0 : float
        Complex noise variance N0 = 1 / (Es/N0) (linear, Es = 1).
    demapper : {"exact", "maxlog"}

    Returns
    -------
    ndarray of shape (F, S * m), float64
        Bit LLRs ``ln P(b=0|y) - ln P(b=1|y)`` (equal bit priors), clipped to ``+-LLR_MAX``.
    """
    if demapper not in DEMAPPERS:
        raise InputError(f"Unknown demapper {demapper!r}; accepted: exact, maxlog.")
    if not (math.isfinite(n0) and n0 > 0):
        raise InputError(f"The noise variance N0 must be a positive number; got {n0!r}.")
    y = np.ascontiguousarray(np.atleast_2d(y), dtype=np.complex128)
    hh = np.ascontiguousarray(np.broadcast_to(np.asarray(h, dtype=np.complex128), y.shape))
    if not (np.all(np.isfinite(y)) and np.all(np.isfinite(hh))):
        raise InputError("Received symbols or channel gains contain NaN or infinite values.")
    out = np.empty((y.shape[0], y.shape[1] * constellation.bits_per_symbol), dtype=np.float64)
    _demap_kernel(y, hh, np.ascontiguousarray(constellation.points), constellation.bit_table,
                  1.0 / n0, demapper == "maxlog", out)
    return out
