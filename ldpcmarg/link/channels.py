"""Binary-input channels: BPSK over AWGN, BSC and BEC.

Conventions
-----------
* BPSK maps bit 0 to +1 and bit 1 to -1, unit symbol energy (Es = 1).
* LLR ``= ln P(x=0|y) - ln P(x=1|y)``; positive favours 0.
* AWGN noise variance per real dimension ``sigma**2 = 1 / (2 * Es/N0)`` and
  ``Es/N0 = R * Eb/N0`` for code rate ``R``; channel LLR ``= 2 y / sigma**2``.
* BSC(p): output bits; LLR ``= (1 - 2 y) ln((1-p)/p)``.
* BEC(eps): outputs 0, 1 or ``ERASED`` (= 2 in the uint8 output array); erased
  bits get LLR 0, others ``+-LLR_MAX`` (never inf, never NaN).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._settings import LLR_MAX
from ..errors import InputError

__all__ = [
    "Channel",
    "AWGNChannel",
    "BSCChannel",
    "BECChannel",
    "make_channel",
    "ebn0_to_sigma",
    "esn0_to_sigma",
    "sigma_to_ebn0",
    "ERASED",
]

#: Marker of an erased BEC output symbol.
ERASED = 2


def esn0_to_sigma(esn0_db: float) -> float:
    """Noise standard deviation per real dimension for BPSK at ``Es/N0`` (dB), Es = 1."""
    return math.sqrt(1.0 / (2.0 * 10.0 ** (esn0_db / 10.0)))


def ebn0_to_sigma(ebn0_db: float, rate: float) -> float:
    """Noise standard deviation for BPSK at ``Eb/N0`` (dB) with code rate ``rate``.

    ``sigma**2 = 1 / (2 R 10**(EbN0/10))``.
    """
    if not 0.0 < rate <= 1.0:
        raise InputError(f"The code rate must be in (0, 1]; got {rate!r}.")
    return math.sqrt(1.0 / (2.0 * rate * 10.0 ** (ebn0_db / 10.0)))


def sigma_to_ebn0(sigma: float, rate: float) -> float:
    """Inverse of :func:`ebn0_to_sigma`: Eb/N0 in dB for noise std ``sigma`` and rate ``rate``."""
    return 10.0 * math.log10(1.0 / (2.0 * rate * sigma**2))


def _check_codewords(codewords) -> np.ndarray:
    c = np.asarray(codewords)
    if c.ndim == 1:
        c = c[None, :]
    if c.ndim != 2:
        raise InputError(f"Codewords must have shape (F, n); got {c.shape}.")
    return c.astype(np.uint8, copy=False)


class Channel:
    """Base class: a memoryless binary-input channel.

    Subclasses implement :meth:`transmit` (codewords -> outputs) and
    :meth:`llr` (outputs -> LLRs). ``symmetric`` is True for output-symmetric
    channels, where the all-zero codeword may stand in for random codewords.
    """

    kind = "channel"
    symmetric = True

    def transmit(self, codewords, rng: np.random.Generator) -> np.ndarray:
        raise NotImplementedError

    def llr(self, outputs) -> np.ndarray:
        raise NotImplementedError

    def sample_llr(self, codewords, rng: np.random.Generator) -> np.ndarray:
        """Channel LLRs, shape (F, n) float64, for transmitted ``codewords`` (F, n)."""
        return self.llr(self.transmit(codewords, rng))

    def to_dict(self) -> dict:
        raise NotImplementedError

    def snr_label(self) -> str:
        raise NotImplementedError


@dataclass(frozen=True)
class AWGNChannel(Channel):
    """BPSK over AWGN with noise standard deviation ``sigma`` per real dimension.

    Build it with :func:`make_channel` from Eb/N0 (needs the rate) or Es/N0.
    ``ebn0_db`` and ``rate`` are kept for labelling when known.
    """

    sigma: float
    ebn0_db: float | None = None
    rate: float | None = None
    kind = "awgn"

    def __post_init__(self):
        if not (math.isfinite(self.sigma) and self.sigma > 0):
            raise InputError(f"AWGN noise sigma must be a positive number; got {self.sigma!r}.")

    @property
    def esn0_db(self) -> float:
        """Es/N0 in dB (Es = 1)."""
        return 10.0 * math.log10(1.0 / (2.0 * self.sigma**2))

    def transmit(self, codewords, rng):
        c = _check_codewords(codewords)
        x = 1.0 - 2.0 * c.astype(np.float64)
        return x + self.sigma * rng.standard_normal(c.shape)

    def llr(self, outputs):
        y = np.asarray(outputs, dtype=np.float64)
        if not np.all(np.isfinite(y)):
            raise InputError("AWGN channel outputs contain NaN or infinite values.")
        return (2.0 / self.sigma**2) * y

    def to_dict(self):
        return {"kind": "awgn", "sigma": self.sigma, "ebn0_db": self.ebn0_db,
                "esn0_db": self.esn0_db, "rate": self.rate}

    def snr_label(self):
        if self.ebn0_db is not None:
            return f"Eb/N0 = {self.ebn0_db:g} dB"
        return f"Es/N0 = {self.esn0_db:g} dB"


@dataclass(frozen=True)
class BSCChannel(Channel):
    """Binary symmetric channel with crossover probability ``p`` (0 < p < 1/2)."""

    p: float
    kind = "bsc"

    def __post_init__(self):
        if not (0.0 < self.p < 0.5):
            raise InputError(f"BSC crossover probability p must be in (0, 0.5); got {self.p!r}.")

    @property
    def llr_magnitude(self) -> float:
        return math.log((1.0 - self.p) / self.p)

    def transmit(self, codewords, rng):
        c = _check_codewords(codewords)
        flips = (rng.random(c.shape) < self.p).astype(np.uint8)
        return c ^ flips

    def llr(self, outputs):
        y = np.asarray(outputs)
        if np.any((y != 0) & (y != 1)):
            raise InputError("BSC outputs must be 0 or 1.")
        return self.llr_magnitude * (1.0 - 2.0 * y.astype(np.float64))

    def to_dict(self):
        return {"kind": "bsc", "p": self.p}

    def snr_label(self):
        return f"p = {self.p:g}"


@dataclass(frozen=True)
class BECChannel(Channel):
    """Binary erasure channel with erasure probability ``epsilon`` (0 <= eps < 1)."""

    epsilon: float
    kind = "bec"

    def __post_init__(self):
        if not (0.0 <= self.epsilon < 1.0):
            raise InputError(f"BEC erasure probability must be in [0, 1); got {self.epsilon!r}.")

    def transmit(self, codewords, rng):
        c = _check_codewords(codewords).copy()
        c[rng.random(c.shape) < self.epsilon] = ERASED
        return c

    def llr(self, outputs):
        y = np.asarray(outputs)
        if np.any((y != 0) & (y != 1) & (y != ERASED)):
            raise InputError(f"BEC outputs must be 0, 1 or {ERASED} (erased).")
        out = LLR_MAX * (1.0 - 2.0 * y.astype(np.float64))
        out[y == ERASED] = 0.0
        return out

    def to_dict(self):
        return {"kind": "bec", "epsilon": self.epsilon}

    def snr_label(self):
        return f"epsilon = {self.epsilon:g}"


def make_channel(kind: str, *, ebn0_db: float | None = None, esn0_db: float | None = None,
                 sigma: float | None = None, rate: float | None = None,
                 p: float | None = None, epsilon: float | None = None) -> Channel:
    """Build a channel by name.

    Parameters
    ----------
    kind : {"awgn", "bsc", "bec"}
    ebn0_db : float, optional
        AWGN: Eb/N0 in dB; needs ``rate``.
    esn0_db : float, optional
        AWGN: Es/N0 in dB (symbol SNR; Es = 1).
    sigma : float, optional
        AWGN: noise standard deviation per real dimension.
    rate : float, optional
        Code rate k/n, for Eb/N0.
    p : float, optional
        BSC crossover probability.
    epsilon : float, optional
        BEC erasure probability.
    """
    kind = kind.lower()
    if kind == "awgn":
        given = [v is not None for v in (ebn0_db, esn0_db, sigma)]
        if sum(given) != 1:
            raise InputError("An AWGN channel needs exactly one of ebn0_db, esn0_db or sigma.")
        if ebn0_db is not None:
            if rate is None:
                raise InputError("An AWGN channel given by Eb/N0 needs the code rate.")
            sigma = ebn0_to_sigma(float(ebn0_db), float(rate))
            return AWGNChannel(sigma, float(ebn0_db), float(rate))
        if esn0_db is not None:
            s = esn0_to_sigma(float(esn0_db))
            eb = None if rate is None else float(esn0_db) - 10 * math.log10(rate)
            return AWGNChannel(s, eb, rate)
        eb = None if rate is None else sigma_to_ebn0(float(sigma), float(rate))
        return AWGNChannel(float(sigma), eb, rate)
    if kind == "bsc":
        if p is None:
            raise InputError("A BSC needs its crossover probability p.")
        return BSCChannel(float(p))
    if kind == "bec":
        if epsilon is None:
            raise InputError("A BEC needs its erasure probability epsilon.")
        return BECChannel(float(epsilon))
    raise InputError(f"Unknown channel {kind!r}; accepted: awgn, bsc, bec.")
