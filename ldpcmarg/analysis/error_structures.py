"""Error structures behind an error floor: trapping sets, low-weight codewords, noise shifts.

An *error structure* is a set of bits on which a decoder fails together,
with the noise shift that drives the all-zero word onto the decoder's
failure boundary there. In the BPSK-AWGN convention of DESIGN.md (bit 0 sent
as ``+1``, received ``y = 1 + noise``) a structure carries the mean shift
``mu`` (negative on its bits, zero elsewhere) and its *effective weight*
``|mu|**2``, which plays the role of the Hamming weight: the failure
probability along that structure behaves like ``Q(|mu| / sigma) =
Q(sqrt(2 R |mu|**2 Eb/N0))``.

* Codewords: ``mu = -c`` (the received word ``y = 0`` on the support is the
  median point between the two words), effective weight = Hamming weight.
* LP pseudo-codewords (:mod:`ldpcmarg.analysis.pseudocodewords`):
  ``mu = -(sum w / sum w**2) w``, effective weight = AWGN pseudo-weight.
* Trapping sets of a message-passing decoder: ``mu = -t 1_S`` with ``t`` the
  smallest uniform impulse on the bits of ``S`` (noise-free elsewhere) on
  which the decoder fails, found by bisection (the 1-D search of Richardson,
  "Error floors of LDPC codes", Allerton 2003); effective weight ``|S| t**2``.

Trapping-set search
-------------------
Candidates come from noise impulses on short-cycle neighbourhoods: for every
bit, the bits on the shortest cycles through it (each cycle, and the union of
two cycles). For each candidate the uniform impulse is bisected to the
decoder's failure threshold; the bits the decoder leaves wrong just above the
threshold are the (elementary) trapping set it fell into. Each distinct set is
kept with its ``(a, b)`` (``a`` bits, ``b`` odd-degree checks of the induced
subgraph), the number of candidates that led to it (hits), and its own
impulse threshold. Optionally, failures of plain noise at a moderate SNR add
candidates (their noise is scaled down to the failure boundary first).

References
----------
T. Richardson, "Error floors of LDPC codes", Proc. 41st Allerton Conf., 2003.
C. A. Cole, S. G. Wilson, E. K. Hall and T. R. Giallorenzi, "A general method for
finding low error rates of LDPC codes", arXiv:cs/0605051, 2006.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError

__all__ = [
    "ErrorStructure",
    "StructureSearch",
    "MESSAGE_PASSING_DECODERS",
    "CODEWORD_DECODERS",
    "structure_family",
    "induced_ab",
    "short_cycle_candidates",
    "impulse_threshold",
    "find_trapping_sets",
    "find_low_weight_codewords",
    "search_structures",
]

#: Decoders whose floor is searched as trapping sets (impulse search).
MESSAGE_PASSING_DECODERS = ("sum-product", "layered-sum-product", "min-sum", "offset-min-sum",
                            "layered-min-sum", "reweighted-sum-product")
#: Decoders whose floor is set by codewords (block ML).
CODEWORD_DECODERS = ("ml", "exact")


def structure_family(decoder_name: str) -> str:
    """Which structure search fits a decoder: "trapping-sets", "pseudo-codewords" or "codewords".

    Raises
    ------
    InputError
        For decoders the importance-sampling estimator cannot aim at (hard-decision
        families, Frank-Wolfe marginals).
    """
    base = decoder_name.split(":", 1)[0].strip()
    if base in MESSAGE_PASSING_DECODERS:
        return "trapping-sets"
    if base == "lp":
        return "pseudo-codewords"
    if base in CODEWORD_DECODERS:
        return "codewords"
    accepted = ", ".join(MESSAGE_PASSING_DECODERS + ("lp",) + CODEWORD_DECODERS)
    raise InputError(
        f"The error-floor estimator cannot bias the noise for decoder {base!r} (no structure "
        f"search models its failures); use one of: {accepted}.")


@dataclass
class ErrorStructure:
    """One error structure and the noise shift aimed at it.

    Attributes
    ----------
    kind : {"trapping-set", "codeword", "pseudo-codeword"}
    bits : ndarray of shape (s,), int64
        Support (sorted bit indices).
    shift : ndarray of shape (s,), float64
        Noise mean on ``bits`` (negative: towards bit value 1), in units of the
        BPSK amplitude; the received word at the shift is ``y = 1 + shift``.
    a, b : int or None
        Trapping-set parameters: ``a = |bits|`` and ``b`` = checks of odd degree in
        the subgraph induced by ``bits`` (0 for a codeword).
    hits : int
        How often the search met this structure.
    decoder : str
        Decoder spec the structure was found for ("" for codewords found by the
        information-set search).
    elementary : bool or None
        Every check of the induced subgraph has degree 1 or 2 (trapping sets).
    threshold : float or None
        Trapping sets: the uniform impulse ``t`` (shift ``-t`` on every bit).
    pseudo_weight : float or None
        AWGN pseudo-weight ``(sum w)**2 / sum w**2`` of a pseudo-codeword (the
        Hamming weight for a codeword).
    """

    kind: str
    bits: np.ndarray
    shift: np.ndarray
    a: int | None = None
    b: int | None = None
    hits: int = 1
    decoder: str = ""
    elementary: bool | None = None
    threshold: float | None = None
    pseudo_weight: float | None = None

    @property
    def effective_weight(self) -> float:
        """``|mu|**2``: failure probability along the structure ~ ``Q(sqrt(2 R w Eb/N0))``."""
        return float(np.dot(self.shift, self.shift))

    def key(self) -> tuple:
        return (self.kind, tuple(int(i) for i in self.bits))

    def to_dict(self) -> dict:
        out = {"kind": self.kind, "bits": [int(i) for i in self.bits],
               "effective_weight": round(self.effective_weight, 6), "hits": int(self.hits)}
        # a and b are written separately: a pseudo-codeword has a support size a
        # but no trapping-set b (its values are fractional), so b stays None there
        if self.a is not None:
            out["a"] = int(self.a)
        if self.b is not None:
            out["b"] = int(self.b)
        if self.elementary is not None:
            out["elementary"] = bool(self.elementary)
        if self.threshold is not None:
            out["threshold"] = round(float(self.threshold), 6)
        if self.pseudo_weight is not None:
            out["pseudo_weight"] = round(float(self.pseudo_weight), 6)
        if self.decoder:
            out["decoder"] = self.decoder
        if self.kind != "trapping-set":
            out["shift"] = [round(float(v), 9) for v in self.shift]
        return out

    @classmethod
    def from_dict(cls, d: dict) -> ErrorStructure:
        bits = np.asarray(d["bits"], dtype=np.int64)
        if "shift" in d:
            shift = np.asarray(d["shift"], dtype=np.float64)
        else:
            shift = np.full(bits.size, -float(d["threshold"]))
        return cls(kind=d["kind"], bits=bits, shift=shift, a=d.get("a"), b=d.get("b"),
                   hits=int(d.get("hits", 1)), decoder=d.get("decoder", ""),
                   elementary=d.get("elementary"), threshold=d.get("threshold"),
                   pseudo_weight=d.get("pseudo_weight"))


@dataclass
class StructureSearch:
    """What a structure search found and how it searched.

    Attributes
    ----------
    structures : list of ErrorStructure
        Sorted by increasing effective weight.
    family : str
        "trapping-sets", "pseudo-codewords" or "codewords".
    settings : dict
        Search settings (SNR, caps, seed) for the record.
    seconds : float
    notes : list of str
        Caps that were hit and other caveats.
    """

    structures: list
    family: str
    settings: dict
    seconds: float = 0.0
    notes: list = field(default_factory=list)

    def to_dict(self, limit: int | None = None) -> dict:
        items = self.structures if limit is None else self.structures[:limit]
        return {"family": self.family, "settings": self.settings,
                "seconds": round(self.seconds, 3), "notes": list(self.notes),
                "count": len(self.structures), "structures": [s.to_dict() for s in items]}


# ---------------------------------------------------------------- graph helpers
def induced_ab(code, bits) -> tuple[int, int, bool]:
    """``(a, b, elementary)`` of the subgraph induced by ``bits``.

    ``b`` counts checks joined to an odd number of the bits; the set is
    elementary when every such check is joined to one or two of them.
    """
    bits = np.asarray(bits, dtype=np.int64)
    if bits.size == 0:
        return 0, 0, True
    edges = np.concatenate([code.var_edges[code.var_ptr[i]:code.var_ptr[i + 1]] for i in bits])
    checks, counts = np.unique(code.edge_check[edges], return_counts=True)
    del checks
    return int(bits.size), int(np.count_nonzero(counts % 2)), bool(np.all(counts <= 2))


def _bit_neighbours(code):
    """Per bit: list of (check, [other bits of that check])."""
    out = []
    for v in range(code.n):
        row = []
        for e in code.var_edges[code.var_ptr[v]:code.var_ptr[v + 1]]:
            c = int(code.edge_check[e])
            others = code.edge_var[code.check_ptr[c]:code.check_ptr[c + 1]]
            row.append((c, [int(u) for u in others if u != v]))
        out.append(row)
    return out


def _shortest_cycles_through(v: int, nbrs, max_cycles: int) -> list[frozenset]:
    """Bit sets of the shortest cycles through bit ``v`` (breadth-first, branch labels)."""
    # BFS over bits; a node's branch is the check of v it was first reached through
    parent = {v: (None, None)}
    branch = {v: None}
    depth = {v: 0}
    frontier = [v]
    found: list[frozenset] = []
    best = None
    d = 0
    while frontier and (best is None) and d < 12:
        nxt = []
        for u in frontier:
            for c, others in nbrs[u]:
                if u != v and c == parent[u][1]:
                    continue
                for w in others:
                    br = c if u == v else branch[u]
                    if w not in depth:
                        depth[w], branch[w], parent[w] = d + 1, br, (u, c)
                        nxt.append(w)
                    elif branch[w] is not None and branch[w] != br and w != v:
                        # two shortest paths from v meet: a cycle through v
                        cyc = set()
                        for x in (u, w):
                            while x is not None:
                                cyc.add(x)
                                x = parent[x][0]
                        found.append(frozenset(cyc))
                        best = d + 1
        frontier = nxt
        d += 1
    uniq = list(dict.fromkeys(found))
    return uniq[:max_cycles]


def short_cycle_candidates(code, max_candidates: int = 4000, cycles_per_bit: int = 8,
                           pairs: bool = True, seed: int = 0) -> list[np.ndarray]:
    """Impulse candidates: bits on the shortest cycles through each bit, and unions of two.

    Parameters
    ----------
    code : ParityCheckCode
    max_candidates : int
        Cap on the number of distinct candidates returned (a seeded random subset
        when there are more).
    cycles_per_bit : int
        Shortest cycles kept per bit.
    pairs : bool
        Add the union of every two cycles through a bit.
    seed : int
        Seed of the subset choice.

    Returns
    -------
    list of ndarray of int64
    """
    nbrs = _bit_neighbours(code)
    cands: dict[frozenset, None] = {}
    for v in range(code.n):
        cycles = _shortest_cycles_through(v, nbrs, cycles_per_bit)
        for c in cycles:
            cands.setdefault(c, None)
        if pairs:
            for i in range(len(cycles)):
                for j in range(i + 1, len(cycles)):
                    cands.setdefault(cycles[i] | cycles[j], None)
    keys = list(cands)
    if len(keys) > max_candidates:
        rng = np.random.default_rng(seed)
        pick = np.sort(rng.choice(len(keys), size=max_candidates, replace=False))
        keys = [keys[i] for i in pick]
    return [np.array(sorted(k), dtype=np.int64) for k in keys]


# ---------------------------------------------------------------- impulse search
def _impulse_llr(n: int, sets, shifts, sigma: float) -> np.ndarray:
    """Noise-free all-zero LLRs with ``y = 1 - t`` on each set: shape (len(sets), n)."""
    y = np.ones((len(sets), n), dtype=np.float64)
    for f, (s, t) in enumerate(zip(sets, shifts, strict=True)):
        y[f, s] = 1.0 - t
    return y * (2.0 / sigma**2)


def impulse_threshold(decoder, sets, sigma: float, t_max: float = 3.0, steps: int = 10):
    """Smallest uniform impulse on each set at which ``decoder`` fails (bisection).

    Parameters
    ----------
    decoder : Decoder
    sets : list of ndarray of int64
    sigma : float
        Noise standard deviation that scales the LLRs (``2 y / sigma**2``).
    t_max : float
        Largest impulse tried (``y = 1 - t_max`` on the set).
    steps : int
        Bisection steps (precision ``t_max / 2**steps``).

    Returns
    -------
    thresholds : ndarray of shape (S,), float64
        NaN where the decoder does not fail even at ``t_max``.
    error_sets : list of ndarray or None
        Bits left wrong at the threshold (just above it).
    """
    n = decoder.code.n
    S = len(sets)
    if S == 0:
        return np.zeros(0), []
    res = decoder.decode(_impulse_llr(n, sets, np.full(S, t_max), sigma))
    fails = np.asarray(res.bits, dtype=bool).any(axis=1)
    lo = np.zeros(S)
    hi = np.full(S, t_max)
    idx = np.flatnonzero(fails)
    last_err: dict[int, np.ndarray] = {int(i): np.flatnonzero(res.bits[i]) for i in idx}
    for _ in range(int(steps)):
        if idx.size == 0:
            break
        mid = 0.5 * (lo[idx] + hi[idx])
        r = decoder.decode(_impulse_llr(n, [sets[i] for i in idx], mid, sigma))
        f = np.asarray(r.bits, dtype=bool).any(axis=1)
        for j, i in enumerate(idx):
            if f[j]:
                hi[i] = mid[j]
                last_err[int(i)] = np.flatnonzero(r.bits[j])
            else:
                lo[i] = mid[j]
    thr = np.where(fails, hi, np.nan)
    errs = [last_err.get(i) for i in range(S)]
    return thr, errs


def find_trapping_sets(code, decoder_spec: str, ebn0_db: float, *, max_candidates: int = 2000,
                       max_a: int = 20, t_max: float = 3.0, steps: int = 10,
                       noise_frames: int = 0, noise_ebn0_db: float | None = None,
                       seed: int = 0, batch: int = 512, time_budget: float | None = None,
                       progress=None) -> StructureSearch:
    """Search the trapping sets of a message-passing decoder by noise impulses.

    Parameters
    ----------
    code : ParityCheckCode
    decoder_spec : str
        A message-passing decoder spec (e.g. ``"sum-product:max_iter=50"``).
    ebn0_db : float
        Eb/N0 (dB, code rate k/n) that sets the LLR scale of the impulses.
    max_candidates : int
        Cap on the short-cycle impulse candidates (finite default).
    max_a : int
        Error sets with more bits are not kept as trapping sets.
    t_max, steps : float, int
        Impulse range and bisection steps (see :func:`impulse_threshold`).
    noise_frames : int
        Extra candidates from plain-noise failures: frames simulated at
        ``noise_ebn0_db``; each failure's noise is scaled down to the failure
        boundary and the bits left wrong become a candidate.
    noise_ebn0_db : float, optional
        Default: ``ebn0_db - 1.5``.
    seed : int
    batch : int
        Frames per decoder call.
    time_budget : float, optional
        Seconds; stop adding candidates when spent (a note says so).
    progress : callable, optional
        ``progress(done, total)`` after each batch.

    Returns
    -------
    StructureSearch
    """
    from ..decoders.base import make_decoder
    from ..link.channels import ebn0_to_sigma

    if structure_family(decoder_spec) != "trapping-sets":
        raise InputError(f"Trapping-set search needs a message-passing decoder; got "
                         f"{decoder_spec!r}.")
    t0 = time.perf_counter()
    dec = make_decoder(decoder_spec, code)
    sigma = ebn0_to_sigma(ebn0_db, code.rate)
    notes = []
    cands = short_cycle_candidates(code, max_candidates=max_candidates, seed=seed)
    if noise_frames > 0:
        cands += _noise_failure_candidates(code, dec, noise_ebn0_db if noise_ebn0_db is not None
                                           else ebn0_db - 1.5, sigma, noise_frames, seed,
                                           max_a, batch)
    found: dict[tuple, list] = {}
    total = len(cands)
    done = 0
    for start in range(0, total, batch):
        if time_budget is not None and time.perf_counter() - t0 > time_budget:
            notes.append(f"time budget spent after {done} of {total} candidates")
            break
        part = cands[start:start + batch]
        _, errs = impulse_threshold(dec, part, sigma, t_max=t_max, steps=steps)
        for e in errs:
            if e is None or e.size == 0 or e.size > max_a:
                continue
            k = tuple(int(i) for i in e)
            found.setdefault(k, [0])[0] += 1
        done += len(part)
        if progress is not None:
            progress(done, total)
    # each distinct error set gets its own threshold as an impulse target
    keys = list(found)
    sets = [np.array(k, dtype=np.int64) for k in keys]
    structures = []
    for start in range(0, len(sets), batch):
        part = sets[start:start + batch]
        thr, _ = impulse_threshold(dec, part, sigma, t_max=t_max, steps=steps + 2)
        for s, t in zip(part, thr, strict=True):
            if not math.isfinite(t):
                continue
            a, b, elem = induced_ab(code, s)
            kind = "codeword" if b == 0 and bool(code.is_codeword(_indicator(code.n, s))) \
                else "trapping-set"
            structures.append(ErrorStructure(
                kind="trapping-set" if kind == "trapping-set" else "codeword", bits=s,
                shift=np.full(s.size, -float(t)), a=a, b=b, hits=found[tuple(int(i) for i in s)][0],
                decoder=dec.spec, elementary=elem, threshold=float(t)))
    structures.sort(key=lambda s: (s.effective_weight, s.a, tuple(s.bits)))
    settings = {"ebn0_db": float(ebn0_db), "candidates": total, "max_candidates": max_candidates,
                "max_a": max_a, "t_max": t_max, "steps": steps, "noise_frames": noise_frames,
                "seed": seed}
    if total >= max_candidates:
        notes.append(f"impulse candidates capped at {max_candidates}")
    return StructureSearch(structures, "trapping-sets", settings,
                           time.perf_counter() - t0, notes)


def _indicator(n: int, bits) -> np.ndarray:
    x = np.zeros(n, dtype=np.uint8)
    x[np.asarray(bits, dtype=np.int64)] = 1
    return x


def _noise_failure_candidates(code, dec, ebn0_db, sigma_target, frames, seed, max_a, batch):
    """Bits left wrong by failures of plain noise, with the noise scaled to the boundary."""
    from ..link.channels import ebn0_to_sigma

    sig = ebn0_to_sigma(ebn0_db, code.rate)
    rng = np.random.default_rng(np.random.SeedSequence(entropy=int(seed), spawn_key=(7,)))
    out = []
    for start in range(0, frames, batch):
        F = min(batch, frames - start)
        noise = rng.standard_normal((F, code.n)) * sig
        res = dec.decode((1.0 + noise) * (2.0 / sigma_target**2))
        bad = np.flatnonzero(np.asarray(res.bits, dtype=bool).any(axis=1))
        if bad.size == 0:
            continue
        # bisect the scale s in (0, 1] of the failing noise down to the boundary
        lo, hi = np.zeros(bad.size), np.ones(bad.size)
        errs = [np.flatnonzero(res.bits[i]) for i in bad]
        for _ in range(8):
            mid = 0.5 * (lo + hi)
            r = dec.decode((1.0 + noise[bad] * mid[:, None]) * (2.0 / sigma_target**2))
            f = np.asarray(r.bits, dtype=bool).any(axis=1)
            for j in range(bad.size):
                if f[j]:
                    hi[j] = mid[j]
                    errs[j] = np.flatnonzero(r.bits[j])
                else:
                    lo[j] = mid[j]
        out += [e for e in errs if 0 < e.size <= max_a]
    return out


# ---------------------------------------------------------------- codewords
def find_low_weight_codewords(code, *, budget: int = 200, rounds: int = 8, seed: int = 0,
                              max_exact_k: int = 20) -> StructureSearch:
    """Low-weight codewords: exhaustive for small ``k``, else repeated information-set search.

    Parameters
    ----------
    code : ParityCheckCode
    budget : int
        Information sets per round (:func:`ldpcmarg.code.gf2.information_set_search`).
    rounds : int
        Independent seeded rounds; each returns its lightest codeword, distinct
        ones are kept (so the multiplicity of the lightest weight is a lower
        bound unless the enumeration was exhaustive).
    seed : int
    max_exact_k : int
        Enumerate all codewords (and report every minimum-weight one up to 64)
        when ``k <= max_exact_k``.

    Returns
    -------
    StructureSearch
        Structures of kind "codeword" with ``shift = -c`` (effective weight = Hamming
        weight); ``settings["exact"]`` says whether the list of lightest words is complete.
    """
    from ..code import gf2

    t0 = time.perf_counter()
    words: dict[tuple, int] = {}
    exact = False
    if code.k == 0:
        return StructureSearch([], "codewords", {"exact": True}, 0.0, ["k = 0: no codewords"])
    if code.k <= max_exact_k:
        G = code.encoder.generator_matrix()
        hist, _ = gf2.enumerate_weights(G)
        d = int(np.flatnonzero(hist[1:])[0]) + 1
        # collect the minimum-weight words themselves by a Gray walk in python (small k)
        if hist[d] <= 64 and code.k <= 16:
            for m in range(1, 1 << code.k):
                msg = np.array([(m >> j) & 1 for j in range(code.k)], dtype=np.uint8)
                c = (msg @ G) % 2
                if int(c.sum()) == d:
                    words[tuple(np.flatnonzero(c).tolist())] = 1
            exact = True
        else:
            _, w = gf2.information_set_search(code.H, budget=budget, seed=seed)
            if w is not None:
                words[tuple(np.flatnonzero(w).tolist())] = 1
        settings = {"method": "enumeration", "minimum_distance": d,
                    "multiplicity": int(hist[d]), "exact": exact}
    else:
        for r in range(int(rounds)):
            wt, w = gf2.information_set_search(code.H, budget=budget, seed=seed + r)
            if w is not None and wt > 0:
                k = tuple(np.flatnonzero(w).tolist())
                words[k] = words.get(k, 0) + 1
        settings = {"method": "information-set search", "budget": budget, "rounds": rounds,
                    "seed": seed, "exact": False}
    structures = []
    for k, hits in words.items():
        bits = np.array(k, dtype=np.int64)
        structures.append(ErrorStructure(kind="codeword", bits=bits, shift=-np.ones(bits.size),
                                         a=int(bits.size), b=0, hits=hits,
                                         pseudo_weight=float(bits.size)))
    structures.sort(key=lambda s: (s.bits.size, tuple(s.bits)))
    return StructureSearch(structures, "codewords", settings, time.perf_counter() - t0)


def search_structures(code, decoder_spec: str, ebn0_db: float, *, seed: int = 0,
                      max_candidates: int = 2000, max_structures: int = 200,
                      codeword_budget: int = 100, pseudo_starts: int = 60,
                      time_budget: float | None = None, progress=None) -> StructureSearch:
    """The structure search that fits ``decoder_spec``, plus the lightest codewords found.

    Message-passing decoders get trapping sets (:func:`find_trapping_sets`), LP
    decoding gets pseudo-codewords (instanton search,
    :func:`ldpcmarg.analysis.pseudocodewords.instanton_search`), ML-type decoders
    codewords. The lightest codewords (information-set search) are added in every
    case, since every decoder fails on them too.

    Returns
    -------
    StructureSearch
        At most ``max_structures`` structures of lowest effective weight.
    """
    fam = structure_family(decoder_spec)
    t0 = time.perf_counter()
    notes = []
    cw = find_low_weight_codewords(code, budget=codeword_budget, seed=seed)
    found: list[ErrorStructure] = []
    settings: dict = {"decoder": decoder_spec, "ebn0_db": float(ebn0_db), "seed": seed,
                      "codewords": cw.settings}
    if fam == "trapping-sets":
        ts = find_trapping_sets(code, decoder_spec, ebn0_db, max_candidates=max_candidates,
                                seed=seed, time_budget=time_budget, progress=progress)
        found += ts.structures
        notes += ts.notes
        settings["trapping_sets"] = ts.settings
    elif fam == "pseudo-codewords":
        from .pseudocodewords import instanton_search

        ps = instanton_search(code, starts=pseudo_starts, seed=seed, time_budget=time_budget)
        found += ps.structures
        notes += ps.notes
        settings["pseudo_codewords"] = ps.settings
    keys = {s.key() for s in found}
    for s in cw.structures:
        if ("codeword", s.key()[1]) not in keys:
            found.append(s)
    found.sort(key=lambda s: (s.effective_weight, s.bits.size, tuple(s.bits)))
    if len(found) > max_structures:
        notes.append(f"kept the {max_structures} lightest of {len(found)} structures")
        found = found[:max_structures]
    if not found:
        notes.append("the search found no error structure")
    return StructureSearch(found, fam, settings, time.perf_counter() - t0, notes)
