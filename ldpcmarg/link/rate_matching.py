"""Rate matching: puncturing and shortening a mother code.

* **Punctured** bits are coded bits that are not sent; the decoder sees them
  with LLR 0.
* **Shortened** bits are information bits fixed to 0 and not sent; the
  decoder sees them with LLR ``+LLR_MAX`` (known zeros).

With ``p`` punctured and ``s`` shortened bits of an (n, k) code, the
transmitted rate is ``R_t = (k - s) / (n - p - s)`` and a frame carries
``k - s`` information bits (DESIGN §9); Eb/N0 is measured with ``R_t``.

Patterns (``--puncture``, ``--shorten``)
----------------------------------------
* ``--puncture <count>`` punctures the first ``count`` code bits (indices
  ``0 .. count-1``); in systematic codes whose information bits come first
  (the shipped PEG codes) these are systematic bits, as several standards do.
* ``--puncture @FILE``: a text file holding a 0/1 pattern (1 = punctured;
  whitespace, line breaks and ``#`` comments ignored). A pattern of length
  ``n`` is used as is; a shorter pattern whose length divides ``n`` is
  repeated periodically (``0001`` punctures every fourth bit).
* ``--shorten <count>`` shortens the *last* ``count`` information positions
  of the code's systematic encoder (``code.encoder.info_positions``), so a
  shortened frame is a codeword of the subcode with those bits 0, of
  dimension exactly ``k - count``.

Checks
------
A bit both punctured and shortened, a pattern longer than ``n``, and a
check whose bits are *all* punctured (such a check carries no information
and the decoder can never use it) are errors. A punctured set that contains a
stopping set (bits that stay erased under peeling even without noise) is
reported by :func:`undecodable_punctured_bits` and warned about.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from ..errors import InputError

__all__ = [
    "RateMatching",
    "LinkWarning",
    "parse_puncture",
    "shorten_positions",
    "undecodable_punctured_bits",
    "fully_punctured_checks",
]


class LinkWarning(UserWarning):
    """A link setting works but deserves attention (e.g. punctured stopping sets)."""


def _read_pattern(path: str, n: int) -> np.ndarray:
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"Cannot read the puncture pattern file {str(p)!r}: {exc.strerror}.") \
            from exc
    digits = "".join(line.split("#", 1)[0] for line in text.splitlines())
    digits = "".join(digits.split())
    bad = set(digits) - {"0", "1"}
    if bad:
        raise InputError(f"The puncture pattern file {p.name} may hold only 0 and 1 "
                         f"(1 = punctured); found {sorted(bad)[0]!r}.")
    if not digits:
        raise InputError(f"The puncture pattern file {p.name} is empty; write a 0/1 pattern.")
    L = len(digits)
    if L > n:
        raise InputError(f"The puncture pattern in {p.name} has {L} bits, longer than the code "
                         f"length n = {n}; give at most n bits.")
    if n % L:
        raise InputError(f"The puncture pattern in {p.name} has {L} bits, which neither equals "
                         f"nor divides n = {n}; give n bits or a period that divides n.")
    mask = np.frombuffer(digits.encode(), dtype=np.uint8) - ord("0")
    return np.flatnonzero(np.tile(mask, n // L)).astype(np.int64)


def parse_puncture(spec, n: int) -> np.ndarray:
    """Punctured bit indices (sorted int64) from ``<count>``, ``@FILE`` or an index array."""
    if spec is None:
        return np.zeros(0, dtype=np.int64)
    if isinstance(spec, str):
        s = spec.strip()
        if s.startswith("@"):
            return _read_pattern(s[1:], n)
        try:
            count = int(s)
        except ValueError as exc:
            raise InputError(f"--puncture needs a bit count or @FILE; got {spec!r}.") from exc
        spec = count
    if isinstance(spec, int | np.integer) and not isinstance(spec, bool):
        if not 0 <= spec < n:
            raise InputError(f"The puncture count must be between 0 and n - 1 = {n - 1}; "
                             f"got {spec}.")
        return np.arange(int(spec), dtype=np.int64)
    idx = np.unique(np.asarray(spec, dtype=np.int64).ravel())
    if idx.size and (idx[0] < 0 or idx[-1] >= n):
        raise InputError(f"Punctured bit indices must lie in 0 .. {n - 1}.")
    return idx


def shorten_positions(count, code) -> np.ndarray:
    """The last ``count`` information positions of ``code``'s encoder (sorted int64)."""
    if count is None:
        return np.zeros(0, dtype=np.int64)
    if isinstance(count, str):
        try:
            count = int(count.strip())
        except ValueError as exc:
            raise InputError(f"--shorten needs a bit count; got {count!r}.") from exc
    if isinstance(count, bool) or not isinstance(count, int | np.integer):
        idx = np.unique(np.asarray(count, dtype=np.int64).ravel())
        info = set(np.asarray(code.encoder.info_positions).tolist())
        if not set(idx.tolist()) <= info:
            raise InputError("Shortened bits must be information positions of the code's "
                             "encoder (code.encoder.info_positions).")
        return idx
    k = int(code.k)
    if not 0 <= count < k:
        raise InputError(f"The shorten count must be between 0 and k - 1 = {k - 1} "
                         f"(at least one information bit must remain); got {count}.")
    if count == 0:
        return np.zeros(0, dtype=np.int64)
    info = np.sort(np.asarray(code.encoder.info_positions, dtype=np.int64))
    return np.sort(info[-int(count):])


def fully_punctured_checks(H, punctured: np.ndarray) -> np.ndarray:
    """Checks (int64 indices) all of whose bits are punctured."""
    H = sp.csr_matrix(H)
    mask = np.zeros(H.shape[1], dtype=np.int64)
    mask[punctured] = 1
    deg = np.diff(H.indptr)
    hit = H.astype(np.int64) @ mask
    return np.flatnonzero((hit == deg) & (deg > 0)).astype(np.int64)


def undecodable_punctured_bits(H, punctured: np.ndarray) -> np.ndarray:
    """Punctured bits that peeling cannot recover even without noise (a stopping set).

    Every bit outside ``punctured`` is known; a check with exactly one unknown
    bit resolves it; repeated until nothing changes. The bits left form the
    largest stopping set inside the punctured set (Di, Proietti, Telatar,
    Richardson & Urbanke 2002); empty means the puncturing is recoverable.
    """
    H = sp.csr_matrix(H).astype(np.int64)
    unknown = np.zeros(H.shape[1], dtype=bool)
    unknown[punctured] = True
    while True:
        cnt = H @ unknown.astype(np.int64)
        ones = np.flatnonzero(cnt == 1)
        if ones.size == 0:
            break
        sub = H[ones]
        resolved = np.unique(sub.indices[unknown[sub.indices]])
        if resolved.size == 0:  # pragma: no cover - cnt == 1 guarantees one
            break
        unknown[resolved] = False
    return np.flatnonzero(unknown).astype(np.int64)


@dataclass(frozen=True, eq=False)
class RateMatching:
    """Punctured and shortened bits of a frame and the transmitted rate.

    Parameters
    ----------
    n, k : int
        Mother code length and dimension.
    punctured, shortened : ndarray of int64
        Sorted, disjoint bit indices.
    undecodable : int
        Size of the stopping set inside the punctured set (0 = recoverable).
    """

    n: int
    k: int
    punctured: np.ndarray
    shortened: np.ndarray
    undecodable: int = 0

    @classmethod
    def build(cls, code, puncture=None, shorten=None, *, warn: bool = True) -> RateMatching:
        """Validate and build from ``--puncture``/``--shorten`` values (or index arrays)."""
        n = int(code.n)
        pun = parse_puncture(puncture, n)
        sho = shorten_positions(shorten, code) if shorten is not None else \
            np.zeros(0, dtype=np.int64)
        both = np.intersect1d(pun, sho)
        if both.size:
            raise InputError(f"Bit {int(both[0])} is both punctured and shortened; a bit can be "
                             "one or the other (shortening takes the last information bits, "
                             "--puncture COUNT the first bits).")
        if n - pun.size - sho.size < 1:
            raise InputError("Puncturing and shortening leave no bit to send.")
        full = fully_punctured_checks(code.H, pun) if pun.size else np.zeros(0, np.int64)
        if full.size:
            raise InputError(f"The puncturing removes every bit of check {int(full[0])} "
                             f"({full.size} such check(s)); such a check can never help the "
                             "decoder: puncture fewer or other bits.")
        und = 0
        if pun.size:
            und = int(undecodable_punctured_bits(code.H, pun).size)
            if und and warn:
                warnings.warn(f"{und} punctured bits form a stopping set: they stay undecodable "
                              "even without noise; choose another puncture pattern.",
                              LinkWarning, stacklevel=2)
        return cls(n, int(code.k), pun, sho, und)

    @property
    def active(self) -> bool:
        return bool(self.punctured.size or self.shortened.size)

    @property
    def sent_positions(self) -> np.ndarray:
        """Indices of the transmitted bits, ascending (int64)."""
        mask = np.ones(self.n, dtype=bool)
        mask[self.punctured] = False
        mask[self.shortened] = False
        return np.flatnonzero(mask).astype(np.int64)

    @property
    def n_sent(self) -> int:
        return self.n - int(self.punctured.size) - int(self.shortened.size)

    @property
    def info_bits(self) -> int:
        """Information bits per frame, ``k - s``."""
        return self.k - int(self.shortened.size)

    @property
    def rate(self) -> float:
        """Transmitted rate ``(k - s) / (n - p - s)``."""
        return self.info_bits / self.n_sent

    def to_dict(self) -> dict:
        import hashlib

        def dig(a):
            return hashlib.sha256(np.asarray(a, np.int64).tobytes()).hexdigest()[:16]

        return {"puncture": int(self.punctured.size), "shorten": int(self.shortened.size),
                "puncture_digest": dig(self.punctured), "shorten_digest": dig(self.shortened)}
