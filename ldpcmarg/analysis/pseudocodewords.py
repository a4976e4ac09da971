"""LP pseudo-codewords of low AWGN pseudo-weight: the instanton search.

LP decoding (Feldman, Wainwright & Karger 2005) of the all-zero word fails
exactly when some vertex ``w`` of the fundamental polytope (a pseudo-codeword,
projected to the bits) has a cost ``sum_i y_i w_i`` below zero. The smallest
noise that makes ``w`` win lies on the line towards it, at the *median point*
``y = 1 - (sum w / sum w**2) w`` (BPSK ``0 -> +1``, ``y = 1 + noise``), whose
squared distance from the sent word is the AWGN pseudo-weight

    w_p(w) = (sum_i w_i)**2 / sum_i w_i**2

(Wiberg 1996; Forney, Koetter, Kschischang & Reznik 2001), so the LP error
probability at high SNR behaves like ``Q(sqrt(2 R w_p Eb/N0))``. For a codeword
``w_p`` is its Hamming weight.

The instanton search of Chertkov & Stepanov (2008) alternates: LP-decode a
noisy word; take the pseudo-codeword ``w`` found; move the received word just
past the median point of ``w``; LP-decode again. The pseudo-weight does not
increase along the sequence; it stops when ``w`` repeats. Many random starts
give a list of low-weight pseudo-codewords. The LP is the hot-started
local-polytope oracle of :mod:`ldpcmarg.decoders.lp`.

References
----------
M. Chertkov and M. G. Stepanov, "An efficient pseudocodeword search algorithm for
linear programming decoding of LDPC codes", IEEE Trans. Inf. Theory 54(4),
1514-1520, 2008. doi:10.1109/TIT.2008.917682
G. D. Forney, R. Koetter, F. R. Kschischang and A. Reznik, "On the effective
weights of pseudocodewords for codes defined on graphs with cycles", in *Codes,
Systems and Graphical Models*, Springer, 2001.
"""

from __future__ import annotations

import time

import numpy as np

from ..errors import InputError
from .error_structures import ErrorStructure, StructureSearch

__all__ = ["awgn_pseudo_weight", "instanton_search", "SUPPORT_TOL"]

#: Bits with a pseudo-codeword value at or below this count as outside its support.
SUPPORT_TOL = 1e-7


def awgn_pseudo_weight(w) -> float:
    """AWGN pseudo-weight ``(sum w)**2 / sum w**2`` of a nonnegative vector (0 for w = 0)."""
    w = np.asarray(w, dtype=np.float64)
    s2 = float(np.dot(w, w))
    return 0.0 if s2 <= 0 else float(w.sum() ** 2 / s2)


def _median_point(w: np.ndarray, overshoot: float) -> np.ndarray:
    """Received word just past the median point between the all-zero word and ``w``."""
    return 1.0 - (1.0 + overshoot) * (w.sum() / np.dot(w, w)) * w


def instanton_search(code, *, starts: int = 60, start_ebn0_db: float | None = None,
                     max_steps: int = 30, overshoot: float = 1e-4, seed: int = 0,
                     time_budget: float | None = 300.0, progress=None) -> StructureSearch:
    """Low AWGN pseudo-weight pseudo-codewords by the Chertkov-Stepanov instanton search.

    Parameters
    ----------
    code : ParityCheckCode
    starts : int
        Random starting noise vectors (finite default).
    start_ebn0_db : float, optional
        Eb/N0 (dB) of the starting noise; default 1 dB, a noisy channel on which
        LP decoding of a typical code fails often. Starts that LP-decode
        correctly are drawn again (up to 20 tries).
    max_steps : int
        Cap on the instanton steps per start.
    overshoot : float
        Relative step past the median point (breaks the tie between 0 and ``w``).
    seed : int
    time_budget : float, optional
        Seconds for the whole search (a note says when it ran out).
    progress : callable, optional
        ``progress(done, total, best_weight)`` after each start.

    Returns
    -------
    StructureSearch
        Structures of kind "pseudo-codeword" (or "codeword" when integral),
        sorted by increasing pseudo-weight; ``shift`` is the median-point noise
        ``-(sum w / sum w**2) w`` on the support, ``hits`` counts the starts
        that ended on it.
    """
    from ..decoders.lp import LocalPolytopeLP
    from ..link.channels import ebn0_to_sigma

    if int(starts) < 1:
        raise InputError(f"The number of starts must be an integer >= 1; got {starts!r}.")
    t0 = time.perf_counter()
    lp = LocalPolytopeLP(code)
    if start_ebn0_db is None:
        start_ebn0_db = 1.0
    sigma = ebn0_to_sigma(float(start_ebn0_db), code.rate)
    rng = np.random.default_rng(np.random.SeedSequence(entropy=int(seed), spawn_key=(16,)))
    found: dict[tuple, list] = {}
    notes: list[str] = []
    steps_total = 0
    done = 0
    for _ in range(int(starts)):
        if time_budget is not None and time.perf_counter() - t0 > time_budget:
            notes.append(f"time budget spent after {done} of {starts} starts")
            break
        w = None
        for _try in range(20):
            y = 1.0 + sigma * rng.standard_normal(code.n)
            sol = lp.solve(y, warm=True)
            if sol.optimal and sol.bits.max() > SUPPORT_TOL:
                w = sol.bits.copy()
                break
        done += 1
        if w is None:
            continue
        seen: set = set()
        for _step in range(int(max_steps)):
            key = tuple(np.round(w, 6))
            if key in seen:
                break
            seen.add(key)
            sol = lp.solve(_median_point(w, overshoot), warm=True)
            steps_total += 1
            if not sol.optimal or sol.bits.max() <= SUPPORT_TOL:
                break
            nw = sol.bits.copy()
            if awgn_pseudo_weight(nw) > awgn_pseudo_weight(w) + 1e-9:
                break  # never climb (a tie broken the other way)
            w = nw
        w[w <= SUPPORT_TOL] = 0.0
        k = tuple(np.round(w, 6))
        entry = found.setdefault(k, [w, 0])
        entry[1] += 1
        if progress is not None:
            best = min(awgn_pseudo_weight(v[0]) for v in found.values())
            progress(done, starts, best)
    structures = []
    for w, hits in found.values():
        bits = np.flatnonzero(w > SUPPORT_TOL).astype(np.int64)
        vals = w[bits]
        wp = awgn_pseudo_weight(vals)
        integral = bool(np.all(np.minimum(vals, 1.0 - vals) <= 1e-6))
        shift = -(vals.sum() / np.dot(vals, vals)) * vals
        # an integral vertex of the fundamental polytope is a codeword: no odd check (b = 0);
        # a fractional one has no trapping-set b
        structures.append(ErrorStructure(
            kind="codeword" if integral else "pseudo-codeword", bits=bits, shift=shift,
            a=int(bits.size), b=0 if integral else None, hits=int(hits), decoder="lp",
            pseudo_weight=wp))
    structures.sort(key=lambda s: (s.pseudo_weight, s.bits.size, tuple(s.bits)))
    settings = {"starts": int(starts), "start_ebn0_db": float(start_ebn0_db),
                "max_steps": int(max_steps), "overshoot": overshoot, "seed": int(seed),
                "lp_solves": steps_total}
    return StructureSearch(structures, "pseudo-codewords", settings,
                           time.perf_counter() - t0, notes)
