"""BICM capacity of a labelled constellation and the Shannon limit of a link.

The bit-interleaved coded-modulation capacity with uniform inputs, ideal
interleaving and the exact demapper (Caire, Taricco & Biglieri, IEEE Trans.
IT 1998) is, in bits per symbol,

    C_BICM = m - sum_j E[ log2( sum_s' exp(-|y - h s'|^2 / N0)
                               / sum_{s': b_j(s') = b_j(s)} exp(-|y - h s'|^2 / N0) ) ]

with ``s`` uniform over the M = 2**m points, ``y = h s + w``, complex noise
``N0 = 1/(Es/N0)`` and Es = 1 (the conventions of :mod:`ldpcmarg.link`).

Computation
-----------
* AWGN: Gauss--Hermite quadrature over the noise -- one real dimension for
  real constellations (BPSK, PAM: the imaginary noise carries nothing), one
  dimension per quadrature for square Gray QAM (its bits split into two
  independent PAM channels, so ``C = 2 C_PAM``), a product rule over both
  dimensions otherwise (8-PSK, user files).
* Fast fading with perfect channel knowledge: after derotation by
  ``conj(h)/|h|`` the noise stays circular, so the capacity given ``h`` is the
  AWGN capacity at ``|h|^2 Es/N0``; the ergodic capacity averages it over
  ``|h|^2`` by the midpoint rule in probability (quantiles of the exponential
  law for Rayleigh, of the scaled non-central chi-square for Rician; erasures
  scale it by ``1 - p``).
* Block fading is not covered: a codeword that sees a few fades is limited by
  outage, not by the ergodic capacity, so no single Eb/N0 limit applies.

The limit Eb/N0 of a link solves ``C_BICM(Es/N0) = R_t m`` and converts with
``Es/N0 = R_t m Eb/N0`` (DESIGN §9). It uses the unquantised exact demapper;
a quantiser or max-log demapping can only move the achievable point to the
right of it.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq
from scipy.special import logsumexp

from ..errors import InputError

__all__ = ["bicm_capacity", "bicm_shannon_limit_ebn0_db", "link_limit_note"]

#: Gauss-Hermite nodes per real dimension (1-D rules) and for the 2-D product rule.
_NODES_1D = 64
_NODES_2D = 24
#: Probability midpoints of the fading average.
_FADING_NODES = 64


def _gh(n: int):
    t, w = np.polynomial.hermite.hermgauss(n)
    return t, w / math.sqrt(math.pi)  # E[f(u)], u ~ N(0, 1/2) per node t


def _bits_of(labels: np.ndarray, m: int) -> np.ndarray:
    return ((labels[:, None] >> (m - 1 - np.arange(m))[None, :]) & 1).astype(bool)


def _awgn_bicm(points: np.ndarray, bits: np.ndarray, esn0: np.ndarray, dims: int) -> np.ndarray:
    """C_BICM in bits per symbol on AWGN for points (M,) with bit table (M, m), per Es/N0.

    ``esn0`` (G,) linear values, all > 0. ``dims = 1``: real points, real noise
    of variance N0/2; ``dims = 2``: complex points, circular noise. The noise
    is ``w = sqrt(N0) t`` at the quadrature nodes t.
    """
    M, m = bits.shape
    sq = np.sqrt(np.asarray(esn0, dtype=np.float64))  # 1 / sqrt(N0), shape (G,)
    if dims == 1:
        t, w = _gh(_NODES_1D)
        noise = t.astype(np.complex128)
        weight = w
    else:
        t, w = _gh(_NODES_2D)
        noise = (t[:, None] + 1j * t[None, :]).ravel()
        weight = (w[:, None] * w[None, :]).ravel()
    d = points[:, None] - points[None, :]  # (M, M)
    loss = np.zeros(sq.shape)
    for i in range(M):
        # metric[g, a, k] = -|(s_i - s_k) sqrt(Es/N0) + t_a|^2
        diff = (d[i][None, None, :] * sq[:, None, None]) + noise[None, :, None]
        metric = -(diff.real ** 2 + diff.imag ** 2)
        total = logsumexp(metric, axis=2)  # (G, A)
        for j in range(m):
            same = bits[:, j] == bits[i, j]
            loss += (total - logsumexp(metric[:, :, same], axis=2)) @ weight
    return m - loss / (M * math.log(2.0))


def _awgn_capacity(constellation, esn0: np.ndarray) -> np.ndarray:
    """AWGN BICM capacity (bits per symbol) at linear Es/N0 values (G,) > 0."""
    m = constellation.bits_per_symbol
    if constellation.pam_levels is not None:  # square Gray QAM: two PAM channels
        lev = constellation.pam_levels.astype(np.complex128)
        return 2.0 * _awgn_bicm(lev, _bits_of(constellation.pam_labels, m // 2), esn0, 1)
    bits = _bits_of(constellation.labels, m)
    dims = 1 if constellation.is_real else 2
    return _awgn_bicm(constellation.points.astype(np.complex128), bits, esn0, dims)


def _fading_gains2(fading) -> tuple[np.ndarray, float]:
    """Nodes of |h|^2 (equal weights) and the fraction of symbols not erased."""
    p = (np.arange(_FADING_NODES) + 0.5) / _FADING_NODES
    if fading.kind == "rayleigh":
        return -np.log1p(-p), 1.0
    if fading.kind == "rician":
        from scipy.stats import ncx2

        K = float(fading.K)
        if K == 0.0:
            return -np.log1p(-p), 1.0
        # (K+1)|h|^2 = |sqrt(K) + CN(0,1)|^2 = chi'^2(2 dof, nc = 2K) / 2
        return ncx2.ppf(p, 2, 2.0 * K) / (2.0 * (K + 1.0)), 1.0
    if fading.kind == "erasure":
        return np.ones(1), 1.0 - float(fading.p)
    return np.ones(1), 1.0


def bicm_capacity(constellation, esn0_db, *, fading=None) -> np.ndarray | float:
    """BICM capacity in bits per symbol (module docstring for the method).

    Parameters
    ----------
    constellation : Constellation
        From :func:`ldpcmarg.link.modulation.make_constellation` (unit energy).
    esn0_db : float or array_like
        Es/N0 in dB.
    fading : Fading, optional
        Fast fading (``block = 1``) with perfect channel knowledge; None or
        ``none`` for AWGN.

    Returns
    -------
    float or ndarray
        Bits per symbol, between 0 and m.

    Raises
    ------
    InputError
        Block fading (``block > 1``), where no ergodic limit applies.
    """
    if fading is not None and fading.active and fading.block != 1:
        raise InputError("The BICM capacity here is ergodic and needs fast fading (block=1); "
                         "a codeword over a few fading blocks is limited by outage instead.")
    g2, keep = (np.ones(1), 1.0) if fading is None or not fading.active else \
        _fading_gains2(fading)
    vals = np.atleast_1d(np.asarray(esn0_db, dtype=np.float64))
    out = np.empty(vals.shape)
    for idx, v in enumerate(vals):
        es = 10.0 ** (v / 10.0)
        pos = g2 > 0  # a zero gain carries nothing
        out[idx] = keep * float(np.sum(_awgn_capacity(constellation, es * g2[pos]))) / g2.size
    return float(out[0]) if np.ndim(esn0_db) == 0 else out


def bicm_shannon_limit_ebn0_db(constellation, rate: float, *, fading=None) -> float:
    """Smallest Eb/N0 (dB) at which the BICM capacity reaches ``rate * m`` bits per symbol.

    Parameters
    ----------
    constellation : Constellation
    rate : float
        Transmitted code rate ``R_t`` in (0, 1).
    fading : Fading, optional
        As in :func:`bicm_capacity`.

    Returns
    -------
    float
        ``Eb/N0 = Es/N0 - 10 log10(R_t m)`` at the root, in dB.
    """
    if not 0.0 < rate < 1.0:
        raise InputError(f"The transmitted rate must be in (0, 1) for a finite limit; "
                         f"got {rate!r}.")
    m = constellation.bits_per_symbol
    target = rate * m
    keep = 1.0 if fading is None or fading.kind != "erasure" else 1.0 - float(fading.p)
    if target >= keep * m:
        raise InputError(f"Rate {rate:g} is at or above the capacity of the erasure link "
                         f"({keep:g} of the symbols survive).")

    def gap(esn0_db):
        return bicm_capacity(constellation, esn0_db, fading=fading) - target

    lo, hi = -20.0, 30.0
    while gap(hi) < 0:
        hi += 20.0
        if hi > 150:  # pragma: no cover - only for pathological user constellations
            raise InputError("No finite Shannon limit found below Es/N0 = 150 dB.")
    esn0_db = brentq(gap, lo, hi, xtol=1e-4)
    return esn0_db - 10.0 * math.log10(target)


def link_limit_note(fading) -> str | None:
    """Why no limit is drawn for this fading law (None when one is)."""
    if fading is not None and fading.active and fading.block != 1:
        return (f"no Shannon limit drawn for block fading ({fading.label()}): a codeword "
                "over a few fades is limited by outage")
    return None
