"""Monte Carlo BER/FER engine: chunks, paired decoders, stopping rules, resumable sweeps.

A *sweep* is one code, one or more decoders, one channel kind and a list of
SNR points. Each point runs as *chunks* of frames. Chunk ``c`` of the point
with SNR value ``s`` draws its noise from::

    SeedSequence(entropy=seed, spawn_key=(point_key(s), c))

where :func:`point_key` depends on the SNR *value* (rounded to 1e-9), not on
its place in the grid, so adding points or reordering the grid reuses stored
chunks. Every decoder of the sweep decodes the same frames of a chunk, so
comparisons are paired.

Which chunks count
------------------
For each (point, decoder) the counted chunks are the shortest prefix
``0..c`` of the chunk sequence whose totals meet the stopping rule: at least
``frame_errors`` frame errors, or ``max_frames`` frames (the last chunk is
cut to land exactly on ``max_frames``). The prefix is a function of the
seed and the rule only, so the counts do not depend on the number of workers,
the executor, the order in which chunks finish, or interruptions: chunks
computed speculatively beyond the prefix are stored (a later run with a
higher target reuses them) but not counted. Decoders stop independently
(a weak decoder reaches its target early and is no longer run on later
chunks). Two rules are *not* deterministic and say so in the output: a
``time_budget`` per point (the prefix finished when the budget runs out), and
an interrupted sweep.

``fer_floor`` stops the sweep: points after the first point at which every
decoder's FER is below the floor are skipped (points are taken in the
order given).

Codewords
---------
By default the all-zero codeword is sent; this is exact when the channel is
output-symmetric and the decoders are symmetric (``Decoder.symmetric``).
With ``random_codewords=True`` (forced when some decoder or the channel is
not symmetric) messages are drawn from a second stream of the chunk seed and
encoded with ``code.encoder``. On a symmetric channel the LLRs of codeword
``x`` are made from the *same* noise as the all-zero frame,
``L_x = (1 - 2x) * L_0`` (for an output-symmetric channel this has exactly
the channel's law given ``x``), so a symmetric decoder makes identical errors
in both modes.

Counts (per point and decoder)
------------------------------
frames, bit errors over information bits (``code.encoder.info_positions``)
and over all ``n`` bits, with the per-frame sums of squares for the BER
interval (:mod:`ldpcmarg.engine.stats`), frame errors (decoded word differs from
the sent codeword), undetected errors (decoded word is a valid codeword but
the wrong one), iterations and decoder seconds. A bit whose posterior LLR
is exactly 0 (a tie, such as an erasure the decoder left unresolved on the
BEC) counts as an error whatever word was sent.
"""

from __future__ import annotations

import csv
import json
import math
import time
from dataclasses import dataclass, field

import numpy as np

from .._memory import require_memory
from ..errors import InputError
from ..link.channels import make_channel
from . import stats
from .store import COUNT_FIELDS, Store

__all__ = [
    "StopRule",
    "SweepContext",
    "ChunkTask",
    "ChunkResult",
    "PointResult",
    "SweepResult",
    "run_chunk",
    "simulate",
    "parse_grid",
    "point_key",
    "default_chunk_frames",
    "chunk_memory_bytes",
    "require_chunk_memory",
    "info_positions",
    "SNR_KINDS",
]

#: SNR kind -> channel kind: ``ebn0_db``/``esn0_db`` in dB, ``p`` BSC crossover,
#: ``epsilon`` BEC erasure probability.
SNR_KINDS = {"ebn0_db": "awgn", "esn0_db": "awgn", "p": "bsc", "epsilon": "bec"}

#: Version of the chunk/seed scheme; part of a run's identity in the store.
CHUNK_SCHEME = 1

_F = {name: i for i, name in enumerate(COUNT_FIELDS)}


# ---------------------------------------------------------------- small helpers
def parse_grid(text: str, option: str = "--ebn0", max_points: int = 10_000) -> list[float]:
    """Parse an SNR grid: ``"a,b,c"`` or ``"start:step:stop"``.

    The range form includes ``stop`` when it lands on the grid (within
    1e-9 of a step); values are rounded to 12 significant decimals so that
    ``0:0.1:0.3`` gives ``[0.0, 0.1, 0.2, 0.3]`` without float drift. A
    negative step walks downwards. Both forms may be mixed with commas
    (``"0:1:3,3.5"``).

    Raises
    ------
    InputError
        Malformed numbers, zero step, step pointing away from ``stop``,
        duplicate values or more than ``max_points`` points.
    """
    if not isinstance(text, str) or not text.strip():
        raise InputError(f"{option} needs a value such as 1,2,3 or 0:0.5:3.")
    out: list[float] = []
    for part in text.split(","):
        part = part.strip()
        if not part:
            raise InputError(f"Malformed {option} grid {text!r}: empty item.")
        if ":" in part:
            bits = part.split(":")
            if len(bits) != 3:
                raise InputError(
                    f"Malformed {option} range {part!r}; expected start:step:stop, e.g. 0:0.5:3.")
            try:
                start, step, stop = (float(b) for b in bits)
            except ValueError as exc:
                raise InputError(f"Malformed {option} range {part!r}: not a number.") from exc
            if not all(math.isfinite(v) for v in (start, step, stop)):
                raise InputError(f"Malformed {option} range {part!r}: values must be finite.")
            if step == 0:
                raise InputError(f"The step of the {option} range {part!r} must not be zero.")
            span = (stop - start) / step
            if span < -1e-9:
                raise InputError(
                    f"The {option} range {part!r} is empty: the step points away from stop.")
            count = int(math.floor(span + 1e-9)) + 1
            if count > max_points:
                raise InputError(f"The {option} range {part!r} has {count} points; at most "
                                 f"{max_points} are allowed.")
            out.extend(float(f"{start + i * step:.12g}") for i in range(count))
        else:
            try:
                v = float(part)
            except ValueError as exc:
                raise InputError(f"Malformed {option} value {part!r}: not a number.") from exc
            if not math.isfinite(v):
                raise InputError(f"{option} values must be finite; got {part!r}.")
            out.append(v)
    if len(out) > max_points:
        raise InputError(f"{option} has {len(out)} points; at most {max_points} are allowed.")
    keys = [point_key(v) for v in out]
    if len(set(keys)) != len(keys):
        raise InputError(f"{option} grid {text!r} repeats a value.")
    return out


def point_key(value: float) -> int:
    """Stable non-negative integer key of an SNR value (rounded to 1e-9; zigzag sign)."""
    q = int(round(float(value) * 1e9))
    return 2 * q if q >= 0 else -2 * q - 1


def default_chunk_frames(n: int) -> int:
    """Default frames per chunk: about 2**19 bits, between 64 and 8192 frames."""
    return int(min(8192, max(64, (1 << 19) // max(int(n), 1))))


def info_positions(code) -> np.ndarray:
    """Information-bit positions of ``code`` (int64 array of length k).

    Uses ``code.encoder.info_positions`` when the code has an encoder; else
    the non-pivot columns of the reduced row echelon form of ``H`` (the same
    choice a systematic encoder makes).
    """
    enc = getattr(code, "encoder", None)
    pos = getattr(enc, "info_positions", None) if enc is not None else None
    if pos is not None:
        return np.asarray(pos, dtype=np.int64)
    from ..code import gf2

    _, piv = gf2.row_reduce(code.H.toarray())
    mask = np.ones(code.n, dtype=bool)
    mask[piv] = False
    return np.flatnonzero(mask).astype(np.int64)


def chunk_memory_bytes(frames: int, n: int, edges: int, *, random_codewords: bool = False,
                       sub_batch: int | None = None, extra: int = 0) -> int:
    """Estimated peak memory of one chunk on the process that decodes it, in bytes.

    Parameters
    ----------
    frames : int
        Frames of the chunk.
    n, edges : int
        Code length and Tanner-graph edges (``H.nnz``).
    random_codewords : bool
        The chunk also holds its codewords and messages (uint8).
    sub_batch : int, optional
        Frames decoded at once; default half the chunk, the largest sub-batch
        :func:`run_chunk` forms (a sub-batch never exceeds the frames done).
    extra : int
        Further bytes of the caller (e.g. importance-sampling weights).

    Returns
    -------
    int
        The chunk's LLRs (``frames x n`` float64, and as much again for channel
        temporaries), codewords when random, and the decoder working set of
        one sub-batch: an LLR copy and posterior LLRs (float64), hard bits
        (uint8) and two float64 messages per edge and frame.
    """
    F, n, E = int(frames), int(n), int(edges)
    S = -(-F // 2) if sub_batch is None else int(sub_batch)
    per_chunk = F * n * 16 + (F * n * 2 if random_codewords else 0)
    per_batch = S * (n * 17 + 16 * E)
    return per_chunk + per_batch + int(extra)


def require_chunk_memory(frames: int, code, *, random_codewords: bool = False,
                         sub_batch: int | None = None, extra: int = 0) -> None:
    """Refuse, with one :class:`~ldpcmarg.errors.ResourceError`, a chunk too large for memory.

    Called by the coordinator before a sweep starts and by :func:`run_chunk`
    before it draws a chunk's frames, so a huge ``chunk_frames x n`` is one
    clear error instead of a ``MemoryError`` traceback.
    """
    nbytes = chunk_memory_bytes(frames, code.n, code.H.nnz, random_codewords=random_codewords,
                                sub_batch=sub_batch, extra=extra)
    require_memory(nbytes, f"A chunk of {int(frames)} frames of a code with n = {code.n} bits",
                   "give a smaller --chunk-frames (chunk_frames).")


def _all_zero_llr(channel, frames: int, n: int, rng: np.random.Generator) -> np.ndarray:
    """Channel LLRs of the all-zero codeword, shape (frames, n), float64.

    For BPSK-AWGN this is computed in place (``L = (2/sigma^2)(1 + sigma z)``),
    bit-identical to ``channel.sample_llr(zeros, rng)`` but without its
    temporaries; other channels go through ``sample_llr``.
    """
    from ..link.channels import AWGNChannel

    if type(channel) is AWGNChannel:
        llr = rng.standard_normal((frames, n))
        llr *= channel.sigma
        llr += 1.0
        llr *= 2.0 / channel.sigma**2
        return llr
    return channel.sample_llr(np.zeros((frames, n), dtype=np.uint8), rng)


def _point_channel(kind: str, snr_kind: str, value: float, rate: float):
    if snr_kind == "ebn0_db":
        return make_channel("awgn", ebn0_db=value, rate=rate)
    if snr_kind == "esn0_db":
        return make_channel("awgn", esn0_db=value, rate=rate)
    if snr_kind == "p":
        return make_channel("bsc", p=value)
    return make_channel("bec", epsilon=value)


# ---------------------------------------------------------------- data types
@dataclass(frozen=True)
class StopRule:
    """Stopping rule of every point of a sweep.

    Parameters
    ----------
    frame_errors : int
        Target number of frame errors per decoder (>= 1).
    max_frames : int
        Frame cap per point and decoder (>= 1).
    time_budget : float, optional
        Wall-clock seconds per point; when spent the point keeps the chunks
        finished so far (not reproducible across machines).
    fer_floor : float, optional
        Stop the sweep after the first point at which every decoder's FER is
        below this value.
    """

    frame_errors: int = 100
    max_frames: int = 1_000_000
    time_budget: float | None = None
    fer_floor: float | None = None

    def __post_init__(self):
        for name in ("frame_errors", "max_frames"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, int | np.integer) or v < 1:
                raise InputError(f"The {name.replace('_', '-')} setting must be an integer >= 1; "
                                 f"got {v!r}.")
        if self.time_budget is not None and not (self.time_budget > 0):
            raise InputError(f"The time budget must be > 0 seconds; got {self.time_budget!r}.")
        if self.fer_floor is not None and not (0 < self.fer_floor < 1):
            raise InputError(f"The FER floor must be in (0, 1); got {self.fer_floor!r}.")

    def to_dict(self) -> dict:
        return {"frame_errors": int(self.frame_errors), "max_frames": int(self.max_frames),
                "time_budget": self.time_budget, "fer_floor": self.fer_floor}


@dataclass(frozen=True)
class SweepContext:
    """What every worker needs once: the code matrix, decoder specs, channel and seed."""

    H: object
    code_name: str
    code_source: str
    rate: float
    decoders: tuple
    snr_kind: str
    seed: int
    random_codewords: bool
    key: str
    link: object = None


@dataclass(frozen=True)
class ChunkTask:
    """One chunk: SNR point, chunk index, frame count and which decoders to run.

    ``deadline`` (seconds since the epoch, :func:`time.time`) is set when the
    point has a time budget: the chunk is then cut short at the first
    sub-batch boundary after it.
    """

    point_key: int
    snr: float
    chunk_index: int
    frames: int
    decoders: tuple
    deadline: float | None = None


@dataclass
class ChunkResult:
    """Counts of one chunk, per decoder spec (tuples in ``COUNT_FIELDS`` order).

    ``cut_short`` is True when the time budget ended the chunk early; its
    counts then cover the first ``counts[...][0]`` frames only.
    """

    task: ChunkTask
    counts: dict
    channel_seconds: float
    total_seconds: float
    cut_short: bool = False


# ---------------------------------------------------------------- the worker side
_STATE: dict = {}

#: Seconds one sub-batch of a chunk aims at: the granularity of progress reports and of
#: the time-budget check inside a chunk.
SUB_BATCH_SECONDS = 1.0

#: Called after every sub-batch of a chunk as ``hook(task, counts)`` (counts so far, per
#: decoder spec) in the process that decodes it; the sweep sets it for in-process runs
#: and worker processes set it to report to the coordinator.
SUB_BATCH_HOOK = None


def _warm_up(decs, n: int) -> None:
    """Decode one easy frame with a copy of each decoder so that numba compiles (or loads
    its cache) before any frame is timed; copies keep the decoders' own state untouched."""
    import copy

    llr = np.full((1, n), 8.0)
    for dec in decs:
        try:
            copy.deepcopy(dec).decode(llr.copy())
        except Exception:  # pragma: no cover - a real problem shows on the first chunk
            pass


def _worker_state(ctx: SweepContext):
    st = _STATE.get(ctx.key)
    if st is None:
        from ..code.parity_check import ParityCheckCode
        from ..decoders.base import make_decoder

        code = ParityCheckCode(ctx.H, name=ctx.code_name, source=ctx.code_source)
        decs = [make_decoder(s, code) for s in ctx.decoders]
        _warm_up(decs, code.n)
        info = info_positions(code)
        if ctx.link is not None and ctx.link.rate_matching.shortened.size:
            info = np.setdiff1d(info, ctx.link.rate_matching.shortened).astype(np.int64)
        enc = code.encoder if ctx.random_codewords else None
        if len(_STATE) > 4:
            _STATE.clear()
        st = _STATE[ctx.key] = (code, decs, info, enc)
    return st


def _ml_also_fails(code, llr, res, cw) -> np.ndarray:
    """Frames on which block-ML decoding fails too: the decoder returned a
    codeword other than the sent one that is at least as likely.

    With ``lambda`` the channel LLRs (positive favours 0), a word ``x`` has
    log-likelihood ``const - sum_i lambda_i x_i``; the decoded codeword ``d`` is
    at least as likely as the sent word ``c`` when
    ``sum_i lambda_i (d_i - c_i) <= 0``. Then the ML word is at least as likely
    as ``d``, so ML errs as well (ties count as ML failures, the convention of
    ML decoding on the BEC). The comparison allows a rounding tolerance of
    1e-9 of ``sum |lambda_i|`` over the differing bits; validity is re-checked
    against ``H``. Returns a bool array of shape (F,).
    """
    bits = np.asarray(res.bits, dtype=np.uint8)
    sent = np.zeros_like(bits) if cw is None else cw
    wrong = (bits != sent).any(axis=1) & np.asarray(res.valid, dtype=bool)
    out = np.zeros(bits.shape[0], dtype=bool)
    idx = np.flatnonzero(wrong)
    if idx.size == 0:
        return out
    d = bits[idx].astype(np.int8) - sent[idx].astype(np.int8)
    lam = llr[idx]
    delta = (lam * d).sum(axis=1)
    tol = 1e-9 * (np.abs(lam) * (d != 0)).sum(axis=1)
    is_cw = np.asarray(code.is_codeword(bits[idx]), dtype=bool).reshape(-1)
    out[idx] = (delta <= tol) & is_cw
    return out


def _batch_counts(res, cw, info, all_info: bool, seconds: float, code, llr) -> list:
    """Counts (``COUNT_FIELDS`` order) of one decoded batch; sums over frames, so the
    counts of consecutive sub-batches add up to those of the whole batch.

    ``llr`` are the decoder-input LLRs of the batch (for the ML lower bound,
    :func:`_ml_also_fails`)."""
    F = res.bits.shape[0]
    err = np.asarray(res.bits, dtype=np.uint8)
    if cw is not None:
        err = err ^ cw
    decided = np.ones(F, dtype=bool)
    if res.posterior_llr is not None:
        # An undecided bit (posterior LLR exactly 0, e.g. an unresolved BEC
        # erasure) is an error whatever word was sent; otherwise the
        # all-zero word would credit the decoder with every tie it left.
        ties = res.posterior_llr == 0.0
        err = err | ties
        decided = ~ties.any(axis=1)
    e_all = err.sum(axis=1, dtype=np.int64)
    e_info = e_all if all_info else err[:, info].sum(axis=1, dtype=np.int64)
    fe = e_all > 0
    und = fe & np.asarray(res.valid, dtype=bool) & decided
    ml_lb = _ml_also_fails(code, llr, res, cw)
    capped = res.info.get("capped") if isinstance(res.info, dict) else None
    n_capped = 0 if capped is None else int(np.count_nonzero(np.asarray(capped, dtype=bool)))
    return [F, int(e_all.sum()), int((e_all * e_all).sum()), int(e_info.sum()),
            int((e_info * e_info).sum()), int(fe.sum()), int(und.sum()), int(ml_lb.sum()),
            int(np.asarray(res.iterations, dtype=np.int64).sum()), float(seconds), n_capped]


def _next_sub_batch(done: int, total: int, per_frame: float, worst_frame: float,
                    deadline: float | None, frame_cap: float = 0.0) -> int:
    """Frames of the next sub-batch of a chunk.

    About ``SUB_BATCH_SECONDS`` of decoding at the mean time per frame so far,
    starting with one frame and at most doubling the frames done (a fast
    first frame must not commit the worker to a long batch). With a
    ``deadline`` (``time.time()``) no more frames than fit before it at the
    slowest observed time per frame or the decoders' per-frame time cap
    ``frame_cap`` (seconds, summed over the decoders), at least one: so a
    chunk ends at most one frame's cap after the deadline.
    """
    left = total - done
    if left <= 0:
        return 0
    if done == 0 or per_frame <= 0.0:
        return 1
    size = min(max(1, int(SUB_BATCH_SECONDS / per_frame)), done)
    if deadline is not None:
        slowest = max(worst_frame, frame_cap, 1e-9)
        size = min(size, max(1, int((deadline - time.time()) / slowest)))
    return min(left, size)


def run_chunk(ctx: SweepContext, task: ChunkTask) -> ChunkResult:
    """Simulate one chunk for the requested decoders (runs on a worker).

    The chunk's frames are drawn at once from its seed and decoded in
    sub-batches (every decoder decodes each sub-batch), so progress can be
    reported within a chunk and a ``task.deadline`` can cut it short between
    sub-batches. Counts are sums over frames, so splitting does not change
    them (decoders decode frames independently).

    Parameters
    ----------
    ctx : SweepContext
    task : ChunkTask

    Returns
    -------
    ChunkResult
        Raw counts; the seed makes them a pure function of ``(ctx, task)``
        unless the chunk was cut short.
    """
    code, decs, info, enc = _worker_state(ctx)
    t_start = time.perf_counter()
    n, F = code.n, int(task.frames)
    require_chunk_memory(F, code, random_codewords=ctx.random_codewords)
    ss = np.random.SeedSequence(entropy=int(ctx.seed), spawn_key=(int(task.point_key),
                                                                  int(task.chunk_index)))
    noise_ss, msg_ss = ss.spawn(2)
    rng = np.random.default_rng(noise_ss)
    channel = None if ctx.link is not None else \
        _point_channel("", ctx.snr_kind, task.snr, ctx.rate)
    if ctx.link is not None:
        cw, llr = _link_llr(ctx.link, ctx, task, F, n, info, enc, rng, msg_ss)
    elif ctx.random_codewords:
        msgs = np.random.default_rng(msg_ss).integers(0, 2, size=(F, len(info)), dtype=np.uint8)
        cw = np.ascontiguousarray(enc.encode(msgs), dtype=np.uint8)
        if channel.symmetric:
            llr = _all_zero_llr(channel, F, n, rng)
            llr *= 1.0 - 2.0 * cw
        else:
            llr = channel.sample_llr(cw, rng)
    else:
        cw = None
        llr = _all_zero_llr(channel, F, n, rng)
    llr = np.ascontiguousarray(llr, dtype=np.float64)
    t_channel = time.perf_counter() - t_start
    all_info = len(info) == n
    totals = {ctx.decoders[i]: [0] * len(COUNT_FIELDS) for i in task.decoders}
    last = len(task.decoders) - 1
    # the per-frame time caps of the decoders bound how long one more frame can take
    frame_cap = sum(float((getattr(decs[i], "options", None) or {}).get("time_limit") or 0.0)
                    for i in task.decoders)
    done, spent, worst, cut = 0, 0.0, 0.0, False
    while done < F:
        size = _next_sub_batch(done, F, spent / done if done else 0.0, worst, task.deadline,
                               frame_cap)
        part = slice(done, done + size)
        t_batch = time.perf_counter()
        for j, i in enumerate(task.decoders):
            # a decoder must not see another's scratch
            arg = np.ascontiguousarray(llr[part]) if j == last else llr[part].copy()
            t0 = time.perf_counter()
            res = decs[i].decode(arg)
            sec = time.perf_counter() - t0
            row = _batch_counts(res, None if cw is None else cw[part], info, all_info, sec,
                                code, llr[part])
            tot = totals[ctx.decoders[i]]
            for k, v in enumerate(row):
                tot[k] += v
        batch_seconds = time.perf_counter() - t_batch
        spent += batch_seconds
        worst = max(worst, batch_seconds / size)
        done += size
        hook = SUB_BATCH_HOOK
        if hook is not None and done < F:
            hook(task, {d: tuple(t) for d, t in totals.items()})
        if task.deadline is not None and done < F and time.time() >= task.deadline:
            cut = True
            break
    counts = {d: tuple(float(v) if k == _F["seconds"] else int(v) for k, v in enumerate(t))
              for d, t in totals.items()}
    return ChunkResult(task, counts, t_channel, time.perf_counter() - t_start, cut_short=cut)


def _link_llr(link, ctx, task, F, n, info, enc, rng, msg_ss):
    """Codewords (None = all zero) and decoder LLRs of a chunk sent over ``link``.

    All-zero codewords by default: the link's scrambler (when its bit channels
    are not output-symmetric) makes that exact. Random codewords carry zeros at
    the shortened positions (``info`` excludes them).
    """
    if ctx.snr_kind == "ebn0_db":
        esn0 = link.esn0_linear(task.snr)
    else:
        esn0 = 10.0 ** (float(task.snr) / 10.0)
    if ctx.random_codewords:
        msg_pos = np.asarray(enc.info_positions, dtype=np.int64)
        msgs = np.zeros((F, len(msg_pos)), dtype=np.uint8)
        free = np.isin(msg_pos, info)
        msgs[:, free] = np.random.default_rng(msg_ss).integers(
            0, 2, size=(F, int(free.sum())), dtype=np.uint8)
        cw = np.ascontiguousarray(enc.encode(msgs), dtype=np.uint8)
    else:
        cw = None
    sent = cw if cw is not None else np.zeros((F, n), dtype=np.uint8)
    return cw, link.sample_llr(sent, esn0, rng)


# ---------------------------------------------------------------- results
@dataclass
class PointResult:
    """Counted totals of one (SNR point, decoder) and the derived rates and intervals."""

    decoder: str
    snr_kind: str
    snr: float
    rate: float
    n: int
    k: int
    frames: int = 0
    bit_errors: int = 0
    bit_errors_sq: int = 0
    info_bit_errors: int = 0
    info_bit_errors_sq: int = 0
    frame_errors: int = 0
    undetected_errors: int = 0
    ml_lower_bound_frame_errors: int = 0
    iterations: int = 0
    seconds: float = 0.0
    capped_frames: int = 0
    chunks: int = 0
    cut_short_chunks: int = 0
    stop: str = "running"
    confidence: float = 0.95

    @classmethod
    def from_counts(cls, counts, **kw) -> PointResult:
        vals = dict(zip(COUNT_FIELDS, counts, strict=True))
        return cls(**kw, **{k: (float(v) if k == "seconds" else int(v)) for k, v in vals.items()})

    @property
    def ebn0_db(self) -> float | None:
        if self.snr_kind == "ebn0_db":
            return self.snr
        if self.snr_kind == "esn0_db":
            return self.snr - 10.0 * math.log10(self.rate)
        return None

    @property
    def esn0_db(self) -> float | None:
        if self.snr_kind == "esn0_db":
            return self.snr
        if self.snr_kind == "ebn0_db":
            return self.snr + 10.0 * math.log10(self.rate)
        return None

    @property
    def fer(self) -> float:
        return self.frame_errors / self.frames if self.frames else float("nan")

    @property
    def ml_lower_bound_fer(self) -> float:
        """Lower bound on the block-ML FER: frames where the decoder's valid output
        was at least as likely as the sent word, over all frames."""
        return self.ml_lower_bound_frame_errors / self.frames if self.frames else float("nan")

    @property
    def ml_lower_bound_fer_ci(self) -> tuple[float, float]:
        """Clopper-Pearson interval of :attr:`ml_lower_bound_fer`."""
        return stats.clopper_pearson(self.ml_lower_bound_frame_errors, self.frames,
                                     self.confidence)

    @property
    def ber(self) -> float:
        """Information-bit error rate."""
        return self.info_bit_errors / (self.frames * self.k) if self.frames else float("nan")

    @property
    def codeword_ber(self) -> float:
        """Bit error rate over all n code bits."""
        return self.bit_errors / (self.frames * self.n) if self.frames else float("nan")

    @property
    def fer_ci(self) -> tuple[float, float]:
        return stats.clopper_pearson(self.frame_errors, self.frames, self.confidence)

    @property
    def ber_ci(self) -> tuple[float, float]:
        return stats.ber_interval(self.info_bit_errors, self.info_bit_errors_sq, self.frames,
                                  self.k, self.confidence)

    @property
    def codeword_ber_ci(self) -> tuple[float, float]:
        return stats.ber_interval(self.bit_errors, self.bit_errors_sq, self.frames, self.n,
                                  self.confidence)

    @property
    def reproducible(self) -> bool:
        """Counts fixed by the seed and the rule: not ended by the time budget."""
        return self.stop != "time_budget" and self.cut_short_chunks == 0

    @property
    def avg_iterations(self) -> float:
        return self.iterations / self.frames if self.frames else float("nan")

    def to_dict(self) -> dict:
        """JSON-ready record (keys of the ``--json`` output)."""
        def num(x):
            return None if x is None or (isinstance(x, float) and math.isnan(x)) else x

        d = {
            "decoder": self.decoder,
            "ebn0_db": num(self.ebn0_db),
            "esn0_db": num(self.esn0_db),
            "snr_kind": self.snr_kind,
            "snr": self.snr,
            "frames": self.frames,
            "bit_errors": self.info_bit_errors,
            "frame_errors": self.frame_errors,
            "ber": num(self.ber),
            "fer": num(self.fer),
            "fer_ci": list(self.fer_ci),
            "ber_ci": list(self.ber_ci),
            "avg_iterations": num(self.avg_iterations),
            "info_bits_per_frame": self.k,
            "codeword_bit_errors": self.bit_errors,
            "codeword_ber": num(self.codeword_ber),
            "codeword_ber_ci": list(self.codeword_ber_ci),
            "undetected_errors": self.undetected_errors,
            "ml_lower_bound_frame_errors": self.ml_lower_bound_frame_errors,
            "ml_lower_bound_fer": num(self.ml_lower_bound_fer),
            "ml_lower_bound_fer_ci": list(self.ml_lower_bound_fer_ci),
            "decoder_seconds": self.seconds,
            "seconds_per_frame": num(self.seconds / self.frames if self.frames else float("nan")),
            "capped_frames": self.capped_frames,
            "chunks": self.chunks,
            "cut_short_chunks": self.cut_short_chunks,
            "reproducible": self.reproducible,
            "stop": self.stop,
            "confidence": self.confidence,
        }
        if self.snr_kind in ("p", "epsilon"):
            d[self.snr_kind] = self.snr
        return d


@dataclass
class SweepResult:
    """Outcome of :func:`simulate`: code and channel facts and one result per point and decoder."""

    code: dict
    channel: dict
    points: list
    settings: dict
    run_id: int | None = None
    skipped: list = field(default_factory=list)
    interrupted: bool = False
    timing: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"code": self.code, "channel": self.channel, "settings": self.settings,
                "run": self.run_id, "skipped_points": self.skipped,
                "interrupted": self.interrupted,
                "points": [p.to_dict() for p in self.points]}

    def write_json(self, path) -> None:
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(self.to_dict(), fh, indent=2)
            fh.write("\n")

    CSV_FIELDS = ("code", "n", "k", "rate", "channel", "decoder", "snr_kind", "snr", "ebn0_db",
                  "esn0_db", "frames", "bit_errors", "frame_errors", "ber", "ber_ci_lo",
                  "ber_ci_hi", "fer", "fer_ci_lo", "fer_ci_hi", "avg_iterations",
                  "undetected_errors", "codeword_bit_errors", "codeword_ber", "decoder_seconds",
                  "capped_frames", "cut_short_chunks", "stop", "ml_lower_bound_frame_errors",
                  "ml_lower_bound_fer", "ml_lower_bound_fer_ci_lo", "ml_lower_bound_fer_ci_hi",
                  "modulation", "demapper", "fading", "puncture", "shorten", "quantize",
                  "interleaver", "transmitted_rate")

    _CSV_LINK = ("modulation", "demapper", "puncture", "shorten", "quantize", "interleaver",
                 "transmitted_rate")

    def write_csv(self, path) -> None:
        with open(path, "w", encoding="utf-8", newline="") as fh:
            w = csv.writer(fh)
            w.writerow(self.CSV_FIELDS)
            for p in self.points:
                d = p.to_dict()
                row = {"code": self.code.get("name"), "n": self.code["n"], "k": self.code["k"],
                       "rate": self.code["rate"], "channel": self.channel["kind"], **d,
                       **{f: self.channel.get(f) for f in self._CSV_LINK},
                       "fading": self.channel.get("fading_spec"),
                       "ber_ci_lo": d["ber_ci"][0], "ber_ci_hi": d["ber_ci"][1],
                       "fer_ci_lo": d["fer_ci"][0], "fer_ci_hi": d["fer_ci"][1],
                       "ml_lower_bound_fer_ci_lo": d["ml_lower_bound_fer_ci"][0],
                       "ml_lower_bound_fer_ci_hi": d["ml_lower_bound_fer_ci"][1]}
                w.writerow(["" if row.get(f) is None else row.get(f) for f in self.CSV_FIELDS])

    def table(self) -> str:
        """Plain-text results table."""
        label = {"ebn0_db": "Eb/N0 dB", "esn0_db": "Es/N0 dB", "p": "p", "epsilon": "epsilon"}
        w = max([7] + [len(p.decoder) for p in self.points])
        pct = f"{100 * self.settings.get('confidence', 0.95):g}%-CI"
        conf = f"BER {pct}"
        ml_conf = f"ML-LB {pct}"
        head = (f"{'decoder':{w}s} {label[self.channel['snr_kind']]:>9s} {'frames':>10s} "
                f"{'fr.err':>7s} {'FER':>9s} {'ML-LB FER':>9s} {ml_conf:>21s} "
                f"{'BER':>9s} {conf:>21s} {'iter':>6s} {'ms/fr':>7s} {'capped':>6s} stop")
        lines = [head, "-" * len(head)]
        for p in self.points:
            lo, hi = p.ber_ci
            mlo, mhi = p.ml_lower_bound_fer_ci
            ms = 1e3 * p.seconds / p.frames if p.frames else float("nan")
            stop = p.stop + (f" ({p.cut_short_chunks} chunk cut short)"
                             if p.cut_short_chunks else "")
            lines.append(
                f"{p.decoder:{w}s} {p.snr:9.4g} {p.frames:10d} {p.frame_errors:7d} "
                f"{p.fer:9.3e} {p.ml_lower_bound_fer:9.3e} [{mlo:9.2e},{mhi:9.2e}] "
                f"{p.ber:9.3e} [{lo:9.2e},{hi:9.2e}] {p.avg_iterations:6.2f} "
                f"{ms:7.3f} {p.capped_frames:6d} {stop}")
        lines.append("ML-LB FER: frames where the decoder's valid output was at least as "
                     "likely as the sent word (block-ML fails there too).")
        if any(not p.reproducible for p in self.points):
            lines.append("(time_budget: counts depend on machine speed and load and are not "
                         "reproducible; a chunk cut short is stored but never reused)")
        if any(p.capped_frames for p in self.points):
            lines.append("(capped: frames where the decoder hit its per-frame cap, time_limit "
                         "or max_iter; with a time cap they depend on machine speed)")
        if self.skipped:
            pts = ", ".join(f"{s:g}" for s in self.skipped)
            lines.append(f"(skipped after the FER floor: {pts})")
        return "\n".join(lines)


# ---------------------------------------------------------------- the coordinator
def _versions() -> dict:
    from importlib import metadata

    from .._version import __version__

    out = {"ldpcmarg": __version__}
    for pkg in ("numpy", "numba", "scipy"):
        try:
            out[pkg] = metadata.version(pkg)
        except metadata.PackageNotFoundError:  # pragma: no cover
            out[pkg] = None
    return out


def simulate(code, decoders, snr, *, snr_kind: str = "ebn0_db", seed: int = 1,
             stop: StopRule | None = None, chunk_frames: int | None = None,
             random_codewords: bool = False, workers: int | None = 1, executor=None,
             store: Store | None = None, progress=None, confidence: float = 0.95,
             speculate: bool = True, link=None) -> SweepResult:
    """Run a BER/FER sweep.

    Parameters
    ----------
    code : ParityCheckCode
    decoders : list of str
        Decoder specs ``"name:opt=value,..."``; all decode the same frames.
    snr : sequence of float
        Points in the unit of ``snr_kind``: Eb/N0 or Es/N0 in dB for AWGN
        (Eb/N0 uses the code rate k/n), crossover ``p`` for the BSC,
        erasure probability ``epsilon`` for the BEC.
    snr_kind : {"ebn0_db", "esn0_db", "p", "epsilon"}
        Selects the channel (see ``SNR_KINDS``).
    seed : int
        Run seed (>= 0); with the chunk size and codeword mode it fixes every frame.
    stop : StopRule, optional
        Default: 100 frame errors or 1e6 frames per point and decoder.
    chunk_frames : int, optional
        Frames per chunk (default :func:`default_chunk_frames`). Part of the
        run's identity: a different chunk size draws different frames.
    random_codewords : bool
        Send random codewords through ``code.encoder`` instead of all-zero.
    workers : int, optional
        Local processes when ``executor`` is None (1 = in this process,
        None = all cores).
    executor : Executor, optional
        An :mod:`ldpcmarg.engine.executors` executor (e.g. a :class:`DaskExecutor`);
        it is started and closed here.
    store : Store, optional
        Results store opened with :meth:`Store.open_writer`; default: in memory.
    progress : callable, optional
        Called as ``progress(info: dict)`` after every chunk (see
        :meth:`ldpcmarg.engine.sweep.PointState.progress_info`).
    confidence : float
        Level of the reported intervals.
    speculate : bool
        Let idle workers start chunks of later points early.
    link : ldpcmarg.link.link.Link, optional
        Modulation, fading, rate matching and quantiser (AWGN only). Eb/N0 then
        uses the transmitted rate and the bits per symbol
        (``Es/N0 = R_t m Eb/N0``), BER counts the ``k - s`` unshortened
        information bits, and every link setting is part of the run's identity
        in the store. The all-zero codeword plus the link's scrambler stands for
        random codewords (see :mod:`ldpcmarg.link.link`).

    Returns
    -------
    SweepResult

    Raises
    ------
    InputError
        Unknown decoder or option, bad SNR values, bad counts.
    StoreError
        Store problems (see :class:`Store`).
    KeyboardInterrupt
        Re-raised after stopping workers; every finished chunk is kept.

    Examples
    --------
    Uncoded BPSK: a single all-zero check row gives rate 1, so Eb/N0 = Es/N0.

    >>> import numpy as np
    >>> from ldpcmarg.code.parity_check import ParityCheckCode
    >>> code = ParityCheckCode(np.zeros((1, 64), dtype=np.uint8), name="uncoded-64")
    >>> res = simulate(code, ["hard-decision"], [4.0], seed=1,
    ...                stop=StopRule(frame_errors=50, max_frames=10_000))
    >>> p = res.points[0]
    >>> p.frame_errors >= 50 and p.ber_ci[0] <= p.ber <= p.ber_ci[1]
    True
    """
    from .sweep import Sweep

    sweep = Sweep(code, decoders, snr, snr_kind=snr_kind, seed=seed, stop=stop,
                  chunk_frames=chunk_frames, random_codewords=random_codewords,
                  confidence=confidence, speculate=speculate, link=link)
    sweep.attach(store)
    return sweep.run(executor=executor, progress=progress, workers=workers)
