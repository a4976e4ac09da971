"""Importance-sampling FER estimation below the plain Monte Carlo range (error floors).

The all-zero word is sent over BPSK-AWGN (``y = 1 + z``, ``z ~ N(0, sigma**2 I)``).
Instead of ``p = N(0, sigma**2 I)`` the noise is drawn from a *mixture*

    q(z) = pi_0 N(0, sigma**2 I) + sum_k pi_k N(mu_k, sigma**2 I)

with one mean shift ``mu_k`` per error structure (trapping set, codeword or
pseudo-codeword; :mod:`ldpcmarg.analysis.error_structures`) and a *defensive*
unshifted component ``pi_0`` (Hesterberg, Technometrics 37, 1995). Every
frame carries the weight of the whole mixture (DESIGN.md section 9), not that
of the component it was drawn from::

    w(z) = p(z) / q(z) = 1 / (pi_0 + sum_k pi_k exp((2 mu_k . z - |mu_k|**2) / (2 sigma**2)))

and the estimator is ``P = (1/N) sum_j 1[error_j] w_j``, unbiased for any
mixture; its variance is estimated from the same samples,
``Var(P) = (mean(1 w**2) - P**2) / (N - 1)``. The defensive component bounds
every weight by ``1 / pi_0``, so ``P <= P_q(error) / pi_0`` and the
Clopper-Pearson upper bound on the biased error frequency, divided by
``pi_0``, is an honest upper bound whatever the structures missed.

Trust
-----
The normal interval ``P +- z sqrt(Var)`` is only stated when Kish's effective
number of hits ``(sum_err w)**2 / sum_err w**2`` reaches ``min_effective_hits``
(default 30). Otherwise the point is marked ``trustworthy = False`` and the
interval is ``[0, upper bound]``. Either way the upper end never exceeds the
defensive bound.

Equivalent frames
-----------------
``P (1 - P) / Var(P)``: the plain Monte Carlo frames that would give the same
variance.

Chunks and seeds
----------------
A point runs as chunks; chunk ``c`` of the point at Eb/N0 ``s`` draws the
component labels and the noise from
``SeedSequence(entropy=seed, spawn_key=(IS_STREAM, point_key(s), c))``, so the
sums do not depend on the executor or the number of workers. Chunks are kept
in the results store (``payload_chunks``) under a run whose identity includes
the decoder, the structures and the mixture rule; the counted chunks are the
shortest prefix meeting the stopping rule, so an interrupted run resumes to
exactly the figures of an uninterrupted one.

References
----------
T. Richardson, "Error floors of LDPC codes", Allerton 2003.
C. A. Cole, S. G. Wilson, E. K. Hall and T. R. Giallorenzi, "A general method for
finding low error rates of LDPC codes", arXiv:cs/0605051, 2006.
T. Hesterberg, "Weighted average importance sampling and defensive mixture
distributions", Technometrics 37(2), 185-194, 1995.
L. Kish, *Survey Sampling*, Wiley, 1965 (effective sample size).
"""

from __future__ import annotations

import hashlib
import json
import math
import time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from ..errors import InputError
from . import stats
from .simulate import point_key, require_chunk_memory

__all__ = [
    "Bias",
    "FloorStop",
    "FloorPoint",
    "FloorResult",
    "ISContext",
    "ISTask",
    "mixture_weights",
    "run_is_chunk",
    "estimate_floor",
    "IS_STREAM",
]

#: First spawn-key entry of importance-sampling chunk seeds (keeps them apart from
#: the plain sweep's streams, which use (point key, chunk) only).
IS_STREAM = 15
#: Version of the importance-sampling chunk scheme; part of a run's identity.
IS_SCHEME = 1


@dataclass(frozen=True)
class Bias:
    """One mean shift of the mixture: noise mean ``shift`` on ``bits`` (zero elsewhere)."""

    bits: np.ndarray
    shift: np.ndarray
    label: str = ""

    @property
    def norm2(self) -> float:
        return float(np.dot(self.shift, self.shift))


@dataclass(frozen=True)
class FloorStop:
    """Stopping rule per point of an importance-sampling estimate.

    Parameters
    ----------
    rel_half_width : float
        Stop when the interval's half-width is at most this fraction of the
        estimate and the point is trustworthy (e.g. 0.3 for +-30 %).
    max_frames : int
        Frame cap per point (finite default).
    min_effective_hits : float
        Kish effective hits needed before a normal interval is stated.
    time_budget : float, optional
        Wall seconds per point (not reproducible across machines).
    """

    rel_half_width: float = 0.3
    max_frames: int = 200_000
    min_effective_hits: float = 30.0
    time_budget: float | None = None

    def __post_init__(self):
        if not (0 < self.rel_half_width < 10):
            raise InputError("The target relative half-width must be in (0, 10); got "
                             f"{self.rel_half_width!r}.")
        if isinstance(self.max_frames, bool) or int(self.max_frames) < 1:
            raise InputError(f"The frame cap must be an integer >= 1; got {self.max_frames!r}.")
        if not (self.min_effective_hits >= 1):
            raise InputError("The minimum effective hits must be >= 1; got "
                             f"{self.min_effective_hits!r}.")
        if self.time_budget is not None and not (self.time_budget > 0):
            raise InputError(f"The time budget must be > 0 seconds; got {self.time_budget!r}.")

    def to_dict(self) -> dict:
        return {"rel_half_width": self.rel_half_width, "max_frames": int(self.max_frames),
                "min_effective_hits": self.min_effective_hits, "time_budget": self.time_budget}


def mixture_weights(biases, sigma: float, defensive: float) -> np.ndarray:
    """Mixture weights ``(pi_0, pi_1, ..., pi_K)`` for noise level ``sigma``.

    Half of the shifted share goes to the structures in proportion to
    ``Q(|mu_k| / sigma)`` (their expected contribution at high SNR), half is
    spread evenly, so that a structure whose weight was misjudged still gets
    samples. Without structures the mixture is the plain noise (``pi_0 = 1``).
    """
    from scipy.special import log_ndtr

    K = len(biases)
    if K == 0:
        return np.ones(1)
    d = float(defensive)
    logq = np.array([log_ndtr(-math.sqrt(b.norm2) / sigma) for b in biases])
    prop = np.exp(logq - logq.max())
    prop /= prop.sum()
    share = 0.5 * prop + 0.5 / K
    return np.concatenate([[d], (1.0 - d) * share])


# ---------------------------------------------------------------- worker side
@dataclass(frozen=True)
class ISContext:
    """What every worker needs once: code, decoder, the biases (flat CSR) and mixtures."""

    H: object
    code_name: str
    code_source: str
    rate: float
    decoder: str
    seed: int
    bias_ptr: np.ndarray
    bias_bits: np.ndarray
    bias_shift: np.ndarray
    weights: dict  # point key -> (K+1,) mixture weights
    scales: dict  # point key -> factor applied to every shift
    key: str
    stream: int = IS_STREAM


@dataclass(frozen=True)
class ISTask:
    """One chunk of one point."""

    point_key: int
    ebn0_db: float
    chunk_index: int
    frames: int


_STATE: dict = {}


def _state(ctx: ISContext):
    st = _STATE.get(ctx.key)
    if st is None:
        from ..code.parity_check import ParityCheckCode
        from ..decoders.base import make_decoder

        code = ParityCheckCode(ctx.H, name=ctx.code_name, source=ctx.code_source)
        dec = make_decoder(ctx.decoder, code)
        K = len(ctx.bias_ptr) - 1
        rows = np.repeat(np.arange(K, dtype=np.int64), np.diff(ctx.bias_ptr))
        M = sp.csr_matrix((ctx.bias_shift, (rows, ctx.bias_bits)), shape=(K, code.n))
        ind = sp.csr_matrix((np.ones(rows.size), (rows, ctx.bias_bits)), shape=(K, code.n))
        norms = np.asarray(M.multiply(M).sum(axis=1)).ravel()
        sizes = np.diff(ctx.bias_ptr).astype(np.float64)
        if len(_STATE) > 4:
            _STATE.clear()
        st = _STATE[ctx.key] = (code, dec, M, ind, norms, sizes)
    return st


def _is_extra_bytes(frames: int, structures: int) -> int:
    """Bytes of a chunk's mixture terms beyond the LLRs: noise, K+1 log terms (float64,
    with two temporaries each), weights."""
    return int(frames) * 8 * (3 * (int(structures) + 1) + 4)


def run_is_chunk(ctx: ISContext, task: ISTask) -> dict:
    """Decode one importance-sampling chunk (runs on a worker).

    Returns
    -------
    dict
        ``frames``, ``hits`` (error frames under the biased noise), ``s1`` =
        sum of weights over error frames, ``s2`` = sum of squared weights over
        error frames, ``sum_w`` (all frames; its mean estimates 1, a check),
        ``by_structure`` {index: [hits, sum w, sum w**2]} by the component that best
        explains the error's noise (index -1: the unshifted component),
        ``unlisted`` (a few error sets credited to it), ``seconds``.
        A pure function of ``(ctx, task)``.
    """
    from ..link.channels import ebn0_to_sigma

    code, dec, M, ind, norms, sizes = _state(ctx)
    t0 = time.perf_counter()
    n, F = code.n, int(task.frames)
    K = M.shape[0]
    require_chunk_memory(F, code, sub_batch=F, extra=_is_extra_bytes(F, K))
    weights = np.asarray(ctx.weights[task.point_key], dtype=np.float64)
    scale = float(ctx.scales[task.point_key])
    sigma = ebn0_to_sigma(task.ebn0_db, ctx.rate)
    ss = np.random.SeedSequence(entropy=int(ctx.seed),
                                spawn_key=(int(ctx.stream), int(task.point_key),
                                           int(task.chunk_index)))
    rng = np.random.default_rng(ss)
    comp = rng.choice(K + 1, size=F, p=weights / weights.sum())
    z = rng.standard_normal((F, n))
    z *= sigma
    for f in np.flatnonzero(comp > 0):
        k = comp[f] - 1
        a, b = ctx.bias_ptr[k], ctx.bias_ptr[k + 1]
        z[f, ctx.bias_bits[a:b]] += scale * ctx.bias_shift[a:b]
    # log of q/p for every frame: log sum_k pi_k exp((2 mu_k.z - |mu_k|^2) / (2 sigma^2))
    with np.errstate(divide="ignore"):
        logpi = np.log(weights)
    if K:
        expo = (2.0 * scale * (M @ z.T) - scale**2 * norms[:, None]) / (2.0 * sigma**2)
        terms = np.vstack([np.full((1, F), logpi[0]), expo + logpi[1:, None]])
        top = terms.max(axis=0)
        log_q_over_p = top + np.log(np.exp(terms - top).sum(axis=0))
    else:
        log_q_over_p = np.zeros(F)
    w = np.exp(-log_q_over_p)
    llr = (1.0 + z) * (2.0 / sigma**2)
    res = dec.decode(llr)
    err = np.asarray(res.bits, dtype=bool)
    if res.posterior_llr is not None:
        err = err | (res.posterior_llr == 0.0)  # an undecided bit counts as an error
    fe = err.any(axis=1)
    hit = np.flatnonzero(fe)
    by: dict[int, list] = {}
    unlisted = []
    if hit.size:
        # credit each error to the mixture component that best explains its noise
        # (largest responsibility pi_k q_k(z) / q(z)); -1 is the unshifted component
        resp = (terms[:, hit].argmax(axis=0) - 1) if K else np.full(hit.size, -1)
        for j, f in enumerate(hit):
            k = int(resp[j])
            row = by.setdefault(k, [0, 0.0, 0.0])
            row[0] += 1
            row[1] += float(w[f])
            row[2] += float(w[f]) ** 2
            if k < 0 and len(unlisted) < 4:
                bits = np.flatnonzero(err[f])
                if bits.size <= 40:
                    unlisted.append([int(i) for i in bits])
    wh = w[hit]
    return {"frames": F, "hits": int(hit.size), "s1": float(wh.sum()),
            "s2": float((wh * wh).sum()), "sum_w": float(w.sum()),
            "by_structure": {str(k): v for k, v in sorted(by.items())},
            "unlisted": unlisted, "seconds": time.perf_counter() - t0}


# ---------------------------------------------------------------- results
@dataclass
class FloorPoint:
    """Importance-sampling estimate at one Eb/N0 for one decoder."""

    decoder: str
    ebn0_db: float
    frames: int
    hits: int
    fer: float
    fer_ci: tuple
    std_error: float | None
    effective_hits: float
    equivalent_frames: float | None
    trustworthy: bool
    reason: str
    mean_weight: float
    by_structure: list
    unlisted_share: float
    chunks: int
    stop: str
    seconds: float
    upper_bound: float
    structures_used: int
    defensive: float
    confidence: float
    unlisted: list = field(default_factory=list)
    pilot: list | None = None

    @property
    def rel_half_width(self) -> float | None:
        if not self.trustworthy or self.fer <= 0:
            return None
        return (self.fer_ci[1] - self.fer_ci[0]) / (2.0 * self.fer)

    def to_dict(self) -> dict:
        rhw = self.rel_half_width
        return {
            "decoder": self.decoder, "ebn0_db": self.ebn0_db,
            "method": "importance-sampling", "fer": self.fer,
            "fer_ci": [self.fer_ci[0], self.fer_ci[1]], "confidence": self.confidence,
            "trustworthy": self.trustworthy, "reason": self.reason,
            "std_error": self.std_error, "relative_half_width": rhw,
            "frames": self.frames, "hits": self.hits,
            "effective_hits": round(self.effective_hits, 3),
            "equivalent_frames": self.equivalent_frames,
            "upper_bound": self.upper_bound, "mean_weight": self.mean_weight,
            "defensive_weight": self.defensive, "structures_used": self.structures_used,
            "structures_hit": self.by_structure, "unlisted_share": self.unlisted_share,
            "unlisted_examples": self.unlisted,
            "chunks": self.chunks, "stop": self.stop, "seconds": round(self.seconds, 3),
            "pilot": self.pilot,
        }


@dataclass
class FloorResult:
    """An importance-sampling estimate over an Eb/N0 grid."""

    points: list
    settings: dict
    run_id: int | None
    timing: dict


def _summarise(tot: dict, *, decoder, ebn0_db, chunks, stop, confidence, defensive,
               min_eff, structures_used, seconds) -> FloorPoint:
    N, hits, s1, s2 = tot["frames"], tot["hits"], tot["s1"], tot["s2"]
    from scipy.special import ndtri

    z = float(ndtri(0.5 + confidence / 2.0))
    P = s1 / N if N else 0.0
    var = max(s2 / N - P * P, 0.0) / max(N - 1, 1) if N else float("inf")
    se = math.sqrt(var)
    eff = s1 * s1 / s2 if s2 > 0 else 0.0
    # every weight is at most 1/pi_0: P <= P_q(error) / pi_0
    cp_hi = stats.clopper_pearson(hits, N, confidence)[1] if N else 1.0
    upper = min(1.0, cp_hi / defensive)
    trust = eff >= min_eff and P > 0
    if trust:
        lo, hi = max(P - z * se, 0.0), min(P + z * se, upper)
        reason = "ok"
    else:
        lo, hi = 0.0, upper
        reason = (f"only {eff:.1f} effective hits (< {min_eff:g}): the variance estimate is "
                  "not trustworthy; the interval is [0, defensive upper bound]")
    eq = P * (1.0 - P) / var if var > 0 else None
    by = []
    for k, (cnt, sw, _sw2) in sorted(tot["by_structure"].items(), key=lambda kv: -kv[1][1]):
        by.append({"structure": int(k), "hits": int(cnt),
                   "fer_share": (sw / s1) if s1 > 0 else 0.0})
    un = tot["by_structure"].get(-1)
    unl_share = (un[1] / s1) if (un and s1 > 0) else 0.0
    return FloorPoint(decoder=decoder, ebn0_db=ebn0_db, frames=N, hits=hits, fer=P,
                      fer_ci=(lo, hi), std_error=se if N else None, effective_hits=eff,
                      equivalent_frames=eq, trustworthy=trust, reason=reason,
                      mean_weight=tot["sum_w"] / N if N else float("nan"), by_structure=by[:20],
                      unlisted_share=unl_share, chunks=chunks, stop=stop, seconds=seconds,
                      upper_bound=upper, structures_used=structures_used, defensive=defensive,
                      confidence=confidence, unlisted=tot["unlisted"][:8])


def _add(tot: dict, ch: dict) -> None:
    for k in ("frames", "hits", "s1", "s2", "sum_w", "seconds"):
        tot[k] += ch[k]
    for k, v in ch["by_structure"].items():
        row = tot["by_structure"].setdefault(int(k), [0, 0.0, 0.0])
        for j in range(3):
            row[j] += v[j]
    if len(tot["unlisted"]) < 8:
        tot["unlisted"] += ch["unlisted"][:8 - len(tot["unlisted"])]


def _empty() -> dict:
    return {"frames": 0, "hits": 0, "s1": 0.0, "s2": 0.0, "sum_w": 0.0, "seconds": 0.0,
            "by_structure": {}, "unlisted": []}


def _met(tot: dict, rule: FloorStop, confidence: float, defensive: float) -> str | None:
    """Which stopping condition the running totals meet (None: keep going)."""
    N = tot["frames"]
    if N == 0:
        return None
    if N >= rule.max_frames:
        return "max_frames"
    s1, s2 = tot["s1"], tot["s2"]
    if s2 <= 0:
        return None
    eff = s1 * s1 / s2
    P = s1 / N
    var = max(s2 / N - P * P, 0.0) / max(N - 1, 1)
    from scipy.special import ndtri

    z = float(ndtri(0.5 + confidence / 2.0))
    if eff >= rule.min_effective_hits and P > 0 and z * math.sqrt(var) <= rule.rel_half_width * P:
        return "precision"
    return None


#: Shift factors tried by the pilot search (the 1-D search of Richardson 2003 over a
#: common factor of every shift).
PILOT_SCALES = (0.5, 0.6, 0.7, 0.8, 0.9, 1.0)


def choose_scale(ctx: ISContext, task: ISTask, scales=PILOT_SCALES) -> tuple[float, list]:
    """Pick the shift factor with the most Kish effective hits per frame in a short pilot.

    The pilot draws its own stream (``IS_STREAM + 1``), so the choice is a
    deterministic function of the seed; the estimate itself never reuses
    pilot frames.

    Returns
    -------
    (scale, table) : float and list of dict
        The chosen factor and the pilot figures per factor.
    """
    table = []
    best, best_eff = 1.0, -1.0
    for j, sc in enumerate(scales):
        pctx = ISContext(**{**ctx.__dict__, "scales": {task.point_key: float(sc)},
                            "stream": IS_STREAM + 1})
        ch = run_is_chunk(pctx, ISTask(task.point_key, task.ebn0_db, j, task.frames))
        eff = ch["s1"] ** 2 / ch["s2"] if ch["s2"] > 0 else 0.0
        table.append({"scale": float(sc), "frames": ch["frames"], "hits": ch["hits"],
                      "effective_hits": round(eff, 3)})
        if eff > best_eff:
            best, best_eff = float(sc), eff
    return best, table


def estimate_floor(code, decoder: str, biases, ebn0_db, *, seed: int = 0,
                   stop: FloorStop | None = None, chunk_frames: int | None = None,
                   defensive: float = 0.05, confidence: float = 0.95, workers: int | None = 1,
                   executor=None, store=None, progress=None, scale="pilot",
                   pilot_frames: int = 512) -> FloorResult:
    """Estimate the FER at each Eb/N0 by mean-shifted importance sampling.

    Parameters
    ----------
    code : ParityCheckCode
    decoder : str
        Decoder spec; it must be symmetric (the all-zero word is sent).
    biases : sequence of Bias
        Mean shifts (noise domain, ``y = 1 + z``), e.g. from
        :func:`ldpcmarg.analysis.error_structures.search_structures`
        (``Bias(s.bits, s.shift)``). Empty: plain Monte Carlo (``pi_0 = 1``).
    ebn0_db : sequence of float
        Eb/N0 points in dB (code rate k/n).
    seed : int
        Run seed (>= 0).
    stop : FloorStop, optional
    chunk_frames : int, optional
        Frames per chunk (default 512); part of the run's identity.
    defensive : float
        Weight ``pi_0`` of the unshifted component, in (0, 1].
    confidence : float
        Level of the intervals.
    workers : int, optional
        Local processes when ``executor`` is None (1: in this process).
    executor : Executor, optional
        E.g. :class:`ldpcmarg.engine.executors.DaskExecutor`; started and closed here.
    store : Store, optional
        Opened with :meth:`Store.open_writer`; chunks are kept there and reused.
    progress : callable, optional
        ``progress(dict)`` after every chunk.
    scale : float or "pilot"
        Factor applied to every shift; "pilot" picks it per point from
        :data:`PILOT_SCALES` by a short pilot (:func:`choose_scale`), run in this
        process before the estimate.
    pilot_frames : int
        Frames per pilot factor.

    Returns
    -------
    FloorResult

    Raises
    ------
    InputError
        Non-symmetric decoder, bad parameters.
    """
    from ..decoders.base import make_decoder
    from .executors import make_executor
    from .simulate import _versions

    stop = stop or FloorStop()
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise InputError(f"The seed must be an integer >= 0; got {seed!r}.")
    if not 0.0 < float(defensive) <= 1.0:
        raise InputError(f"The defensive weight must be in (0, 1]; got {defensive!r}.")
    if not 0.0 < float(confidence) < 1.0:
        raise InputError(f"The confidence level must be in (0, 1); got {confidence!r}.")
    dec = make_decoder(decoder, code)
    if not getattr(dec, "symmetric", True):
        raise InputError(f"Decoder {dec.spec!r} is not symmetric: the all-zero word the "
                         "importance-sampling estimator sends would not be representative.")
    spec = dec.spec
    grid = [float(v) for v in ebn0_db]
    if not grid:
        raise InputError("Give at least one Eb/N0 point.")
    keys = [point_key(v) for v in grid]
    if len(set(keys)) != len(keys):
        raise InputError("The Eb/N0 grid repeats a value.")
    biases = list(biases)
    if not biases:
        defensive = 1.0
    for b in biases:
        if len(b.bits) != len(b.shift) or len(b.bits) == 0:
            raise InputError("Every bias needs as many shift values as bits (and at least one).")
        if np.any(np.asarray(b.bits) < 0) or np.any(np.asarray(b.bits) >= code.n):
            raise InputError(f"A bias names a bit outside 0..{code.n - 1}.")
    chunk_frames = 512 if chunk_frames is None else int(chunk_frames)
    if chunk_frames < 1:
        raise InputError(f"The chunk size must be >= 1 frames; got {chunk_frames}.")
    # a chunk is decoded in one batch; refuse one too large before any work
    largest_chunk = min(chunk_frames, int(stop.max_frames))
    require_chunk_memory(largest_chunk, code, sub_batch=largest_chunk,
                         extra=_is_extra_bytes(largest_chunk, len(biases)))
    from ..link.channels import ebn0_to_sigma

    rate = code.rate
    ptr = np.zeros(len(biases) + 1, dtype=np.int64)
    ptr[1:] = np.cumsum([len(b.bits) for b in biases])
    bits = np.concatenate([np.asarray(b.bits, dtype=np.int64) for b in biases]) \
        if biases else np.zeros(0, dtype=np.int64)
    shift = np.concatenate([np.asarray(b.shift, dtype=np.float64) for b in biases]) \
        if biases else np.zeros(0)
    weights = {k: mixture_weights(biases, ebn0_to_sigma(v, rate), defensive)
               for k, v in zip(keys, grid, strict=True)}
    bias_hash = hashlib.sha256(ptr.tobytes() + bits.tobytes()
                               + np.round(shift, 12).tobytes()).hexdigest()[:16]
    settings = {"kind": "importance-sampling", "is_scheme": IS_SCHEME, "channel": "awgn",
                "snr_kind": "ebn0_db", "seed": int(seed), "chunk_frames": chunk_frames,
                "codewords": "all-zero", "decoder": spec, "biases": bias_hash,
                "num_biases": len(biases), "defensive": float(defensive),
                "mixture": "half-proportional-Q, half-even"}
    ctx_key = hashlib.sha256(json.dumps([settings, code.fingerprint], sort_keys=True)
                             .encode()).hexdigest()[:16]
    scales = {k: 1.0 for k in keys}
    pilots: dict = {}
    ctx = ISContext(H=code.H, code_name=code.name, code_source=code.source, rate=rate,
                    decoder=spec, seed=int(seed), bias_ptr=ptr, bias_bits=bits,
                    bias_shift=shift, weights=weights, scales=scales, key=ctx_key + "-pilot")
    if scale == "pilot" and biases:
        for k, v in zip(keys, grid, strict=True):
            scales[k], pilots[v] = choose_scale(ctx, ISTask(k, v, 0, int(pilot_frames)))
    elif scale != "pilot":
        if not (isinstance(scale, int | float) and 0 < float(scale) <= 4):
            raise InputError(f"The shift factor must be in (0, 4] or 'pilot'; got {scale!r}.")
        scales = {k: float(scale) for k in keys}
    settings["scales"] = {f"{v:g}": scales[k] for k, v in zip(keys, grid, strict=True)}
    ctx_key = hashlib.sha256((ctx_key + json.dumps(settings["scales"])).encode()).hexdigest()[:16]
    ctx = ISContext(H=code.H, code_name=code.name, code_source=code.source, rate=rate,
                    decoder=spec, seed=int(seed), bias_ptr=ptr, bias_bits=bits,
                    bias_shift=shift, weights=weights, scales=scales, key=ctx_key)
    n_max = -(-stop.max_frames // chunk_frames)

    def frames_for(c: int) -> int:
        return min(chunk_frames, stop.max_frames - c * chunk_frames)

    run_id = pids = None
    stored: dict[int, dict[int, dict]] = {k: {} for k in keys}
    if store is not None:
        run_id, _ = store.run_for(settings, [spec], _versions())
        pids = {k: store.point_id(run_id, k, v) for k, v in zip(keys, grid, strict=True)}
        for k in keys:
            for d, c, fr, payload in store.payload_chunks(pids[k]):
                if d == spec and c < n_max and fr == frames_for(c):
                    stored[k][c] = payload

    class _P:
        def __init__(self, i, k, v):
            self.i, self.key, self.snr = i, k, v
            self.tot = _empty()
            self.next = 0
            self.done = False
            self.stop = "running"
            self.inflight: set[int] = set()
            self.started: float | None = None

    pts = [_P(i, k, v) for i, (k, v) in enumerate(zip(keys, grid, strict=True))]

    def advance(p: _P):
        while not p.done:
            why = _met(p.tot, stop, confidence, defensive)
            if why is not None:
                p.done, p.stop = True, why
                break
            ch = stored[p.key].get(p.next)
            if ch is None:
                break
            _add(p.tot, ch)
            p.next += 1
            if p.next >= n_max and p.tot["frames"] >= stop.max_frames:
                p.done, p.stop = True, "max_frames"

    for p in pts:
        advance(p)

    if executor is None:
        executor = make_executor(workers)
    timing = {"worker_seconds": 0.0, "chunks": 0}
    t_run = time.perf_counter()
    inflight: dict = {}
    interrupted = False

    def record(h):
        p, task = inflight.pop(h)
        ch = executor.result(h)
        p.inflight.discard(task.chunk_index)
        if store is not None:
            store.add_payload_chunk(pids[p.key], spec, task.chunk_index, task.frames, ch)
        stored[p.key][task.chunk_index] = ch
        timing["worker_seconds"] += ch["seconds"]
        timing["chunks"] += 1
        advance(p)
        if progress is not None:
            progress(_progress(p, stop, confidence, defensive))

    def next_task():
        for p in pts:
            if p.done:
                continue
            if stop.time_budget is not None and p.started is not None \
                    and time.perf_counter() - p.started > stop.time_budget:
                p.done, p.stop = True, "time_budget"
                continue
            c = p.next
            while c < n_max and (c in stored[p.key] or c in p.inflight):
                c += 1
            if c >= n_max or c > p.next + 2 * executor.capacity:
                continue
            if p.started is None:
                p.started = time.perf_counter()
            return p, ISTask(p.key, p.snr, c, frames_for(c))
        return None

    try:
        executor.start(run_is_chunk, ctx)
        while True:
            while len(inflight) < executor.capacity:
                nt = next_task()
                if nt is None:
                    break
                p, task = nt
                h = executor.submit(task)
                inflight[h] = (p, task)
                p.inflight.add(task.chunk_index)
            if not inflight:
                break
            for h in executor.wait(list(inflight), 0.25 if stop.time_budget else None):
                record(h)
            if all(p.done for p in pts):
                running = set(executor.cancel(list(inflight)))
                for h in [h for h in inflight if h not in running]:
                    inflight.pop(h)
    except KeyboardInterrupt:
        interrupted = True
        raise
    finally:
        if inflight and not interrupted:
            for h in executor.wait(list(inflight), 0) or []:
                if h in inflight:
                    try:
                        record(h)
                    except Exception:  # pragma: no cover - best effort while stopping
                        inflight.pop(h, None)
        executor.close(abort=interrupted or bool(inflight))
        timing["wall_seconds"] = time.perf_counter() - t_run

    out = []
    for p in pts:
        out.append(_summarise(p.tot, decoder=spec, ebn0_db=p.snr, chunks=p.next,
                              stop=p.stop, confidence=confidence, defensive=defensive,
                              min_eff=stop.min_effective_hits, structures_used=len(biases),
                              seconds=p.tot["seconds"]))
    for p in out:
        p.pilot = pilots.get(p.ebn0_db)
    return FloorResult(points=out, settings={**settings, **stop.to_dict(),
                                             "confidence": confidence,
                                             "executor": executor.label,
                                             "workers": executor.workers},
                       run_id=run_id, timing=timing)


def _progress(p, stop: FloorStop, confidence: float, defensive: float) -> dict:
    tot = p.tot
    N = tot["frames"]
    P = tot["s1"] / N if N else float("nan")
    eff = tot["s1"] ** 2 / tot["s2"] if tot["s2"] > 0 else 0.0
    return {"ebn0_db": p.snr, "frames": N, "hits": tot["hits"], "fer": P,
            "effective_hits": eff, "done": p.done, "stop": p.stop,
            "fraction": min(1.0, N / stop.max_frames)}
