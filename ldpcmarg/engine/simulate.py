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
import hashlib
import json
import math
import time
from dataclasses import dataclass, field

import numpy as np

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


@dataclass(frozen=True)
class ChunkTask:
    """One chunk: SNR point, chunk index, frame count and which decoders to run."""

    point_key: int
    snr: float
    chunk_index: int
    frames: int
    decoders: tuple


@dataclass
class ChunkResult:
    """Counts of one chunk, per decoder spec (tuples in ``COUNT_FIELDS`` order)."""

    task: ChunkTask
    counts: dict
    channel_seconds: float
    total_seconds: float


# ---------------------------------------------------------------- the worker side
_STATE: dict = {}


def _worker_state(ctx: SweepContext):
    st = _STATE.get(ctx.key)
    if st is None:
        from ..code.parity_check import ParityCheckCode
        from ..decoders.base import make_decoder

        code = ParityCheckCode(ctx.H, name=ctx.code_name, source=ctx.code_source)
        decs = [make_decoder(s, code) for s in ctx.decoders]
        info = info_positions(code)
        enc = code.encoder if ctx.random_codewords else None
        if len(_STATE) > 4:
            _STATE.clear()
        st = _STATE[ctx.key] = (code, decs, info, enc)
    return st


def run_chunk(ctx: SweepContext, task: ChunkTask) -> ChunkResult:
    """Simulate one chunk for the requested decoders (runs on a worker).

    Parameters
    ----------
    ctx : SweepContext
    task : ChunkTask

    Returns
    -------
    ChunkResult
        Raw counts; the seed makes them a pure function of ``(ctx, task)``.
    """
    code, decs, info, enc = _worker_state(ctx)
    t_start = time.perf_counter()
    n, F = code.n, int(task.frames)
    ss = np.random.SeedSequence(entropy=int(ctx.seed), spawn_key=(int(task.point_key),
                                                                  int(task.chunk_index)))
    noise_ss, msg_ss = ss.spawn(2)
    rng = np.random.default_rng(noise_ss)
    channel = _point_channel("", ctx.snr_kind, task.snr, ctx.rate)
    if ctx.random_codewords:
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
    counts = {}
    last = len(task.decoders) - 1
    for j, i in enumerate(task.decoders):
        dec = decs[i]
        arg = llr if j == last else llr.copy()  # a decoder must not see another's scratch
        t0 = time.perf_counter()
        res = dec.decode(arg)
        sec = time.perf_counter() - t0
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
        counts[ctx.decoders[i]] = (
            F, int(e_all.sum()), int((e_all * e_all).sum()), int(e_info.sum()),
            int((e_info * e_info).sum()), int(fe.sum()), int(und.sum()),
            int(np.asarray(res.iterations, dtype=np.int64).sum()), float(sec))
    return ChunkResult(task, counts, t_channel, time.perf_counter() - t_start)


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
    iterations: int = 0
    seconds: float = 0.0
    chunks: int = 0
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
            "decoder_seconds": self.seconds,
            "seconds_per_frame": num(self.seconds / self.frames if self.frames else float("nan")),
            "chunks": self.chunks,
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
                  "stop")

    def write_csv(self, path) -> None:
        with open(path, "w", encoding="utf-8", newline="") as fh:
            w = csv.writer(fh)
            w.writerow(self.CSV_FIELDS)
            for p in self.points:
                d = p.to_dict()
                row = {"code": self.code.get("name"), "n": self.code["n"], "k": self.code["k"],
                       "rate": self.code["rate"], "channel": self.channel["kind"], **d,
                       "ber_ci_lo": d["ber_ci"][0], "ber_ci_hi": d["ber_ci"][1],
                       "fer_ci_lo": d["fer_ci"][0], "fer_ci_hi": d["fer_ci"][1]}
                w.writerow(["" if row.get(f) is None else row.get(f) for f in self.CSV_FIELDS])

    def table(self) -> str:
        """Plain-text results table."""
        label = {"ebn0_db": "Eb/N0 dB", "esn0_db": "Es/N0 dB", "p": "p", "epsilon": "epsilon"}
        w = max([7] + [len(p.decoder) for p in self.points])
        conf = f"BER {100 * self.settings.get('confidence', 0.95):g}%-CI"
        head = (f"{'decoder':{w}s} {label[self.channel['snr_kind']]:>9s} {'frames':>10s} "
                f"{'fr.err':>7s} {'FER':>9s} {'BER':>9s} {conf:>21s} {'iter':>6s} "
                f"{'ms/fr':>7s} stop")
        lines = [head, "-" * len(head)]
        for p in self.points:
            lo, hi = p.ber_ci
            ms = 1e3 * p.seconds / p.frames if p.frames else float("nan")
            lines.append(
                f"{p.decoder:{w}s} {p.snr:9.4g} {p.frames:10d} {p.frame_errors:7d} "
                f"{p.fer:9.3e} {p.ber:9.3e} [{lo:9.2e},{hi:9.2e}] {p.avg_iterations:6.2f} "
                f"{ms:7.3f} {p.stop}")
        if self.skipped:
            pts = ", ".join(f"{s:g}" for s in self.skipped)
            lines.append(f"(skipped after the FER floor: {pts})")
        return "\n".join(lines)


# ---------------------------------------------------------------- the coordinator
class _DecState:
    __slots__ = ("totals", "next", "done", "stop", "chunks", "inflight")

    def __init__(self):
        self.totals = [0] * len(COUNT_FIELDS)
        self.totals[_F["seconds"]] = 0.0
        self.next = 0
        self.done = False
        self.stop = "running"
        self.chunks: dict[int, tuple] = {}
        self.inflight: set[int] = set()


class _PointState:
    def __init__(self, index, snr, key, pid, decoders):
        self.index, self.snr, self.key, self.pid = index, snr, key, pid
        self.decs = {d: _DecState() for d in decoders}
        self.started: float | None = None
        self.handles: set = set()

    @property
    def done(self) -> bool:
        return all(d.done for d in self.decs.values())


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
             speculate: bool = True) -> SweepResult:
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
        Called as ``progress(info: dict)`` after every chunk (see ``_progress_info``).
    confidence : float
        Level of the reported intervals.
    speculate : bool
        Let idle workers start chunks of later points early.

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
    from ..decoders.base import make_decoder
    from .executors import make_executor

    if snr_kind not in SNR_KINDS:
        raise InputError(f"Unknown SNR kind {snr_kind!r}; accepted: {', '.join(SNR_KINDS)}.")
    stop = stop or StopRule()
    if not 0.0 < float(confidence) < 1.0:
        raise InputError(f"The confidence level must be in (0, 1); got {confidence!r}.")
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise InputError(f"The seed must be an integer >= 0; got {seed!r}.")
    if isinstance(decoders, str):
        decoders = [decoders]
    if not decoders:
        raise InputError("Give at least one decoder.")
    snr = [float(s) for s in snr]
    if not snr:
        raise InputError("Give at least one SNR point.")
    keys = [point_key(s) for s in snr]
    if len(set(keys)) != len(keys):
        raise InputError("The SNR grid repeats a value.")
    rate = code.rate
    channels = [_point_channel(SNR_KINDS[snr_kind], snr_kind, s, rate) for s in snr]
    decs = [make_decoder(d, code) for d in decoders]
    specs = [d.spec for d in decs]
    dup = {s for s in specs if specs.count(s) > 1}
    if dup:
        raise InputError(f"Decoder {sorted(dup)[0]!r} is given twice.")
    if chunk_frames is None:
        chunk_frames = default_chunk_frames(code.n)
    if isinstance(chunk_frames, bool) or not isinstance(chunk_frames, int | np.integer) \
            or chunk_frames < 1:
        raise InputError(f"The chunk size must be an integer >= 1 frames; got {chunk_frames!r}.")
    chunk_frames = int(chunk_frames)
    forced = ""
    if not random_codewords:
        asym = [d.spec for d in decs if not getattr(d, "symmetric", True)]
        if asym or not channels[0].symmetric:
            random_codewords = True
            forced = ("not symmetric: " + ", ".join(asym)) if asym else "channel not symmetric"
    if random_codewords and getattr(code, "encoder", None) is None:
        raise InputError("Random codewords need an encoder for this code (code.encoder).")
    info = info_positions(code)
    k = int(len(info))

    settings = {
        "chunk_scheme": CHUNK_SCHEME,
        "channel": SNR_KINDS[snr_kind],
        "snr_kind": snr_kind,
        "seed": int(seed),
        "chunk_frames": chunk_frames,
        "codewords": "random" if random_codewords else "all-zero",
        "info_positions": hashlib.sha256(info.tobytes()).hexdigest()[:16],
    }
    ctx_key = hashlib.sha256(json.dumps(
        [settings, code.fingerprint, specs], sort_keys=True).encode()).hexdigest()[:16]
    ctx = SweepContext(H=code.H, code_name=code.name, code_source=code.source, rate=rate,
                       decoders=tuple(specs), snr_kind=snr_kind, seed=int(seed),
                       random_codewords=bool(random_codewords), key=ctx_key)

    own_store = store is None
    if own_store:
        store = Store.memory(code)
    run_id, _ = store.run_for(settings, specs, _versions())
    n_chunks = -(-stop.max_frames // chunk_frames)

    def frames_for(c: int) -> int:
        return min(chunk_frames, stop.max_frames - c * chunk_frames)

    points = []
    for i, (s, key) in enumerate(zip(snr, keys, strict=True)):
        pid = store.point_id(run_id, key, s)
        ps = _PointState(i, s, key, pid, specs)
        for row in store.chunks(pid):
            ds = ps.decs.get(row.decoder)
            if ds is not None and row.chunk_index < n_chunks \
                    and row.counts[_F["frames"]] == frames_for(row.chunk_index):
                ds.chunks[row.chunk_index] = row.counts
        points.append(ps)

    def advance(ds: _DecState) -> None:
        tot = ds.totals
        while not ds.done:
            if tot[_F["frame_errors"]] >= stop.frame_errors:
                ds.done, ds.stop = True, "frame_errors"
                break
            if tot[_F["frames"]] >= stop.max_frames:
                ds.done, ds.stop = True, "max_frames"
                break
            row = ds.chunks.get(ds.next)
            if row is None:
                break
            for j, v in enumerate(row):
                tot[j] += v
            ds.next += 1

    for ps in points:
        for ds in ps.decs.values():
            advance(ds)

    def chunk_limit(ds: _DecState) -> int:
        """Chunks worth computing for this decoder, judged from its error rate so far."""
        fe = ds.totals[_F["frame_errors"]]
        if not speculate:
            return ds.next + 1
        if fe == 0:  # nothing to extrapolate from: grow the look-ahead geometrically
            return min(n_chunks, 2 * ds.next + 1)
        need = stop.frame_errors - fe
        per_chunk = fe / max(ds.next, 1)
        return min(n_chunks, ds.next + max(1, math.ceil(1.25 * need / per_chunk)))

    def next_task(ps: _PointState) -> ChunkTask | None:
        active = [(d, ds) for d, ds in ps.decs.items() if not ds.done]
        if not active:
            return None
        limits = {d: chunk_limit(ds) for d, ds in active}
        start = min(ds.next for _, ds in active)
        upper = max(limits.values())
        for c in range(start, upper):
            want = tuple(i for i, (d, ds) in enumerate(ps.decs.items())
                         if not ds.done and c >= ds.next and c < limits[d]
                         and c not in ds.chunks and c not in ds.inflight)
            if want:
                return ChunkTask(ps.key, ps.snr, c, frames_for(c), want)
        return None

    if executor is None:
        executor = make_executor(workers)
    t_run = time.perf_counter()
    timing = {"store_seconds": 0.0, "channel_seconds": 0.0, "decoder_seconds": 0.0,
              "worker_seconds": 0.0, "chunks": 0}
    inflight: dict = {}  # handle -> (point state, task)
    interrupted = False
    floor_at: int | None = None

    def point_fer_below_floor(ps: _PointState) -> bool:
        return stop.fer_floor is not None and all(
            ds.totals[_F["frame_errors"]] < stop.fer_floor * ds.totals[_F["frames"]]
            for ds in ps.decs.values())

    def active_points():
        for ps in points:
            if floor_at is not None and ps.index > floor_at:
                return
            if not ps.done:
                yield ps

    def update_floor():
        nonlocal floor_at
        if stop.fer_floor is None:
            return
        for ps in points:
            if not ps.done:
                return
            if point_fer_below_floor(ps):
                floor_at = ps.index
                return

    def record(handle):
        ps, task = inflight.pop(handle)
        ps.handles.discard(handle)
        res: ChunkResult = executor.result(handle)
        t0 = time.perf_counter()
        store.add_chunk(ps.pid, task.chunk_index, res.counts)
        timing["store_seconds"] += time.perf_counter() - t0
        timing["channel_seconds"] += res.channel_seconds
        timing["worker_seconds"] += res.total_seconds
        timing["decoder_seconds"] += sum(c[_F["seconds"]] for c in res.counts.values())
        timing["chunks"] += 1
        for spec, counts in res.counts.items():
            ds = ps.decs[spec]
            ds.inflight.discard(task.chunk_index)
            ds.chunks[task.chunk_index] = counts
            advance(ds)
        if progress is not None:
            progress(_progress_info(ps, stop, specs, snr_kind, k))

    try:
        executor.start(run_chunk, ctx)
        while True:
            update_floor()
            now = time.perf_counter()
            if stop.time_budget is not None:
                for ps in active_points():
                    if ps.started is not None and now - ps.started > stop.time_budget:
                        for ds in ps.decs.values():
                            if not ds.done:
                                ds.done, ds.stop = True, "time_budget"
                update_floor()
            while len(inflight) < executor.capacity:
                task = None
                for ps in active_points():
                    task = next_task(ps)
                    if task is not None:
                        break
                    if not speculate:
                        break
                if task is None:
                    break
                if ps.started is None:
                    ps.started = time.perf_counter()
                    if progress is not None:
                        progress(_progress_info(ps, stop, specs, snr_kind, k))
                h = executor.submit(task)
                inflight[h] = (ps, task)
                ps.handles.add(h)
                for i in task.decoders:
                    ps.decs[specs[i]].inflight.add(task.chunk_index)
            if not inflight:
                break
            wait_for = None if stop.time_budget is None else 0.25
            for h in executor.wait(list(inflight), wait_for):
                record(h)
        # drop queued speculative chunks; keep (store) those already running
        running = set(executor.cancel(list(inflight)))
        for h in [h for h in inflight if h not in running]:
            inflight.pop(h)
        while inflight:
            for h in executor.wait(list(inflight), None):
                record(h)
    except KeyboardInterrupt:
        interrupted = True
        raise
    finally:
        # keep every chunk that finished, then stop the workers
        if inflight:
            try:
                for h in executor.wait(list(inflight), 0) or []:
                    if h in inflight:
                        try:
                            record(h)
                        except Exception:  # pragma: no cover - best effort while stopping
                            inflight.pop(h, None)
            except BaseException:  # pragma: no cover
                pass
        executor.close(abort=interrupted or bool(inflight))
        timing["wall_seconds"] = time.perf_counter() - t_run
        if interrupted and own_store:
            store.close()

    # ---- results
    update_floor()
    results, skipped = [], []
    for ps in points:
        if floor_at is not None and ps.index > floor_at:
            skipped.append(ps.snr)
            continue
        for spec, ds in ps.decs.items():
            pr = PointResult.from_counts(
                tuple(ds.totals), decoder=spec, snr_kind=snr_kind, snr=ps.snr, rate=rate,
                n=code.n, k=k, chunks=ds.next, stop=ds.stop, confidence=confidence)
            results.append(pr)
            store.save_result(ps.pid, spec, tuple(ds.totals), ds.next, ds.stop, stop.to_dict())
    channel = {"kind": SNR_KINDS[snr_kind], "snr_kind": snr_kind,
               "codewords": settings["codewords"], "rate": rate}
    if forced:
        channel["codewords_reason"] = forced
    code_info = dict(code.summary())
    code_info["source"] = code.source
    out = SweepResult(code=code_info, channel=channel, points=results,
                      settings={**settings, **stop.to_dict(), "decoders": specs,
                                "confidence": confidence, "executor": executor.label,
                                "workers": executor.workers},
                      run_id=None if own_store else run_id, skipped=skipped, timing=timing)
    if own_store:
        store.close()
    return out


def _progress_info(ps: _PointState, stop: StopRule, specs, snr_kind: str, k: int) -> dict:
    """Live figures of a point for progress displays."""
    decs = []
    frac = 1.0
    for spec in specs:
        ds = ps.decs[spec]
        t = ds.totals
        frames, fe = t[_F["frames"]], t[_F["frame_errors"]]
        decs.append({"decoder": spec, "frames": frames, "frame_errors": fe,
                     "fer": fe / frames if frames else float("nan"),
                     "ber": t[_F["info_bit_errors"]] / (frames * k) if frames else float("nan"),
                     "done": ds.done, "stop": ds.stop})
        if not ds.done:
            frac = min(frac, max(fe / stop.frame_errors, frames / stop.max_frames))
    elapsed = time.perf_counter() - ps.started if ps.started else 0.0
    eta = elapsed * (1 - frac) / frac if 0 < frac < 1 else (0.0 if frac >= 1 else None)
    if stop.time_budget is not None and ps.started:
        rest = max(stop.time_budget - elapsed, 0.0)
        eta = rest if eta is None else min(eta, rest)
    return {"snr": ps.snr, "snr_kind": snr_kind, "index": ps.index, "decoders": decs,
            "fraction": frac, "elapsed": elapsed, "eta": eta, "done": ps.done}
