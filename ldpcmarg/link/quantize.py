"""Uniform q-bit quantiser of channel LLRs (the front end of a fixed-point receiver).

``l = clip(rint(L / step), -QMAX, QMAX)`` with ``QMAX = 2**(q-1) - 1`` and
numpy's ``rint`` (round half to even); the quantised LLR handed on is
``l * step`` (float64). This is the channel quantisation of the fixed-point
message format (:mod:`ldpcmarg.decoders.fixed_point`), so a fixed-point decoder
given the same ``q`` and ``step`` reproduces these integers exactly.

Step rule when no step is given
-------------------------------
``step = A / QMAX`` with the clipping level ``A = 4 g + 2 sqrt(8 g)``,
``g = (d_min / 2)**2 * Es/N0`` (linear) and ``d_min`` the constellation's
minimum distance: ``4 g`` is the mean and ``sqrt(8 g)`` the standard
deviation of the LLR of the nearest-neighbour binary decision at that SNR
(for BPSK, ``g = Es/N0`` and the LLR ``2 y / sigma^2`` has mean ``4 Es/N0``),
so the quantiser clips about two standard deviations above the mean. The
step then depends on the SNR point and is recorded with it.

Punctured bits (LLR 0) stay 0; shortened bits are left at ``+LLR_MAX``
(known zeros), not quantised.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["Quantizer", "parse_quantize", "quantize_llr"]


def quantize_llr(llr: np.ndarray, q: int, step: float) -> np.ndarray:
    """Integer levels ``clip(rint(llr / step), -QMAX, QMAX)`` as int32 (same shape)."""
    qmax = 2 ** (q - 1) - 1
    return np.clip(np.rint(np.asarray(llr, dtype=np.float64) / step), -qmax, qmax).astype(np.int32)


@dataclass(frozen=True)
class Quantizer:
    """Uniform q-bit LLR quantiser.

    Parameters
    ----------
    q : int
        Bits per quantised LLR, 2 ... 16 (sign included).
    step : float, optional
        LLR units per level (> 0); None = the SNR-dependent rule of the module docstring.
    """

    q: int
    step: float | None = None

    def __post_init__(self):
        if isinstance(self.q, bool) or not isinstance(self.q, int | np.integer) \
                or not 2 <= self.q <= 16:
            raise InputError(f"The quantiser needs q between 2 and 16 bits (e.g. "
                             f"--quantize q=5); got q={self.q!r}.")
        if self.step is not None and not (math.isfinite(self.step) and self.step > 0):
            raise InputError(f"The quantiser step must be a positive number of LLR units; got "
                             f"step={self.step!r}.")

    @property
    def qmax(self) -> int:
        return 2 ** (self.q - 1) - 1

    def step_for(self, esn0_db: float, min_distance: float) -> float:
        """The step used at Es/N0 (dB) for a constellation of minimum distance ``min_distance``."""
        if self.step is not None:
            return float(self.step)
        g = (min_distance / 2.0) ** 2 * 10.0 ** (esn0_db / 10.0)
        return (4.0 * g + 2.0 * math.sqrt(8.0 * g)) / self.qmax

    def apply(self, llr: np.ndarray, step: float) -> np.ndarray:
        """Quantised LLRs ``step * clip(rint(llr / step))`` (float64, same shape)."""
        return quantize_llr(llr, self.q, step).astype(np.float64) * step

    def to_dict(self) -> dict:
        return {"q": int(self.q), "step": self.step}

    def label(self) -> str:
        return f"q={self.q}" + ("" if self.step is None else f",step={self.step:g}")


def parse_quantize(text: str | None) -> Quantizer | None:
    """Parse ``q=<bits>[,step=<LLR step>]`` (None or ``none`` = no quantiser)."""
    if text is None or not str(text).strip() or str(text).strip().lower() == "none":
        return None
    s = str(text).strip()
    opts: dict = {}
    for item in s.split(","):
        key, eq, value = item.partition("=")
        key = key.strip().lower()
        if not eq or key not in ("q", "step") or key in opts:
            raise InputError(f"Malformed --quantize {s!r}; expected q=<bits>[,step=<LLR step>], "
                             "e.g. q=5,step=0.5.")
        try:
            opts[key] = int(value) if key == "q" else float(value)
        except ValueError as exc:
            raise InputError(f"The quantiser option {key}= needs "
                             f"{'an integer' if key == 'q' else 'a number'}; got "
                             f"{value.strip()!r}.") from exc
    if "q" not in opts:
        raise InputError(f"--quantize {s!r} needs q=<bits>, e.g. q=5.")
    return Quantizer(opts["q"], opts.get("step"))
