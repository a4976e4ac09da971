"""Fading gains with perfect channel knowledge at the receiver, and block erasures.

Model: ``y = h s + w`` per symbol. The gain ``h`` is

* ``none``: ``h = 1``;
* ``rayleigh``: ``h ~ CN(0, 1)`` (``E|h|^2 = 1``);
* ``rician`` with factor K (linear): ``h = sqrt(K/(K+1)) + sqrt(1/(K+1)) CN(0, 1)``;
* ``erasure`` with probability p: ``h = 0`` (the symbol is lost: its bits get
  LLR 0) with probability p, else ``h = 1`` -- a burst/block-erasure channel
  for storage-style failures when ``block > 1``.

Fast fading draws an independent gain per symbol; block fading (``block = B``)
holds one gain for ``B`` consecutive symbols of a frame (the last block of a
frame may be shorter). Fast fading *is* block fading with ``B = 1``: both
draw the same numbers, so results agree bit for bit for the same seed.

Spec strings (``--fading``): ``none``, ``rayleigh``, ``rician:K=<linear K>``,
``erasure:p=<probability>``, each with an optional ``,block=<symbols>``
(``rayleigh:block=8`` or ``rician:K=3,block=8``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["Fading", "parse_fading", "FADING_KINDS"]

FADING_KINDS = ("none", "rayleigh", "rician", "erasure")


@dataclass(frozen=True)
class Fading:
    """Fading law of the link.

    Parameters
    ----------
    kind : {"none", "rayleigh", "rician", "erasure"}
    K : float, optional
        Rician K factor (linear, >= 0); only for ``rician``.
    p : float, optional
        Symbol-block erasure probability in [0, 1); only for ``erasure``.
    block : int
        Coherence length in symbols (>= 1); 1 is fast (i.i.d.) fading.
    """

    kind: str = "none"
    K: float | None = None
    p: float | None = None
    block: int = 1

    def __post_init__(self):
        if self.kind not in FADING_KINDS:
            raise InputError(f"Unknown fading {self.kind!r}; accepted: none, rayleigh, "
                             "rician:K=<linear K>, erasure:p=<probability>.")
        if isinstance(self.block, bool) or not isinstance(self.block, int | np.integer) \
                or self.block < 1:
            raise InputError(f"The fading block length must be an integer >= 1 symbols; got "
                             f"{self.block!r} (use block=1 for fast fading).")
        if self.kind == "rician":
            if self.K is None or not (math.isfinite(self.K) and self.K >= 0):
                raise InputError(f"Rician fading needs a K factor >= 0 (linear), e.g. "
                                 f"rician:K=3; got {self.K!r}.")
        elif self.K is not None:
            raise InputError(f"The K factor applies to rician fading only; got it with "
                             f"{self.kind!r}.")
        if self.kind == "erasure":
            if self.p is None or not (0.0 <= self.p < 1.0):
                raise InputError(f"Erasure fading needs a probability p in [0, 1), e.g. "
                                 f"erasure:p=0.01; got {self.p!r}.")
        elif self.p is not None:
            raise InputError(f"The probability p applies to erasure fading only; got it with "
                             f"{self.kind!r}.")

    @property
    def active(self) -> bool:
        return self.kind != "none"

    def gains(self, frames: int, symbols: int, rng: np.random.Generator) -> np.ndarray | None:
        """Gains ``h`` of shape (frames, symbols), complex128 (None for ``none``).

        Draws ``ceil(symbols / block)`` gains per frame from ``rng`` and repeats
        each ``block`` times.
        """
        if self.kind == "none":
            return None
        nblocks = -(-symbols // self.block)
        if self.kind == "erasure":
            keep = rng.random((frames, nblocks)) >= self.p
            g = keep.astype(np.complex128)
        else:
            z = rng.standard_normal((frames, nblocks, 2))
            g = (z[..., 0] + 1j * z[..., 1]) * math.sqrt(0.5)
            if self.kind == "rician":
                K = float(self.K)
                g = math.sqrt(K / (K + 1.0)) + math.sqrt(1.0 / (K + 1.0)) * g
        if self.block == 1:
            return np.ascontiguousarray(g)
        return np.ascontiguousarray(np.repeat(g, self.block, axis=1)[:, :symbols])

    def label(self) -> str:
        if self.kind == "rician":
            base = f"rician:K={self.K:g}"
        elif self.kind == "erasure":
            base = f"erasure:p={self.p:g}"
        else:
            base = self.kind
        if self.block != 1 and self.kind != "none":
            base += ("," if ":" in base else ":") + f"block={self.block}"
        return base

    def to_dict(self) -> dict:
        d = {"kind": self.kind, "block": int(self.block)}
        if self.K is not None:
            d["K"] = float(self.K)
        if self.p is not None:
            d["p"] = float(self.p)
        return d


def parse_fading(text: str | None) -> Fading:
    """Parse a ``--fading`` spec (module docstring) into a :class:`Fading`."""
    if text is None or not str(text).strip():
        return Fading()
    s = str(text).strip()
    kind, _, rest = s.partition(":")
    kind = kind.strip().lower()
    opts: dict = {}
    if rest.strip():
        for item in rest.split(","):
            key, eq, value = item.partition("=")
            key = key.strip()
            if not eq or key not in ("K", "k", "p", "block"):
                raise InputError(f"Malformed fading option {item.strip()!r} in {s!r}; expected "
                                 "rician:K=<linear K>[,block=<symbols>] or "
                                 "rayleigh[:block=<symbols>].")
            try:
                opts[key.upper() if key in ("K", "k") else key] = (
                    int(value) if key == "block" else float(value))
            except ValueError as exc:
                raise InputError(f"The fading option {key}= needs a number"
                                 f"{' (an integer)' if key == 'block' else ''}; got "
                                 f"{value.strip()!r}.") from exc
    if kind not in FADING_KINDS:
        raise InputError(f"Unknown fading {kind!r}; accepted: none, rayleigh, "
                         "rician:K=<linear K>, erasure:p=<probability>, with ,block=<symbols>.")
    if kind == "none" and opts:
        raise InputError("--fading none takes no options.")
    return Fading(kind=kind, K=opts.get("K"), p=opts.get("p"), block=opts.get("block", 1))
