"""The sweep scheduler: which chunks to compute, when a point stops, what is counted.

:func:`ldpcmarg.engine.simulate.simulate` builds a :class:`Sweep` and runs it.
The parts can be read and tested on their own:

:class:`ChunkPlan`
    The chunk sequence of every point: chunk ``c`` holds ``frames_for(c)``
    frames (the last one cut so a point lands exactly on ``max_frames``).
:class:`DecoderState`
    Counting state of one (point, decoder): the chunks known (stored or
    finished), the counted prefix and its totals, whether and why it stopped,
    and how far ahead it is worth computing (:meth:`DecoderState.lookahead`).
:class:`PointState`
    The decoders of one SNR point, the next chunk to submit
    (:meth:`PointState.next_task`) and the figures shown by progress displays
    (:meth:`PointState.progress_info`).
:class:`Sweep`
    The whole sweep: settings and run identity, loading stored chunks,
    the submit/wait/record loop over an executor, the time budget, the FER
    floor and the final :class:`~ldpcmarg.engine.simulate.SweepResult`.

The counting rule (the shortest prefix of chunks meeting the stopping rule)
is documented in :mod:`ldpcmarg.engine.simulate`.
"""

from __future__ import annotations

import hashlib
import json
import math
import time
from dataclasses import dataclass, replace

import numpy as np

from ..errors import InputError
from .store import COUNT_FIELDS, Store

__all__ = ["ChunkPlan", "DecoderState", "PointState", "Sweep"]

_F = {name: i for i, name in enumerate(COUNT_FIELDS)}


# ---------------------------------------------------------------- chunk plan
@dataclass(frozen=True)
class ChunkPlan:
    """Chunk sizes of a point: ``chunk_frames`` each, the last cut at ``max_frames``.

    Parameters
    ----------
    chunk_frames : int
        Frames per chunk (>= 1).
    max_frames : int
        Frame cap per point and decoder (>= 1).
    """

    chunk_frames: int
    max_frames: int

    @property
    def n_chunks(self) -> int:
        """Number of chunks needed to reach ``max_frames``."""
        return -(-self.max_frames // self.chunk_frames)

    def frames_for(self, c: int) -> int:
        """Frames of chunk ``c`` (0-based)."""
        return min(self.chunk_frames, self.max_frames - c * self.chunk_frames)

    def is_full(self, c: int, frames: int) -> bool:
        """Whether stored counts of ``frames`` frames are the whole planned chunk ``c``."""
        return 0 <= c < self.n_chunks and frames == self.frames_for(c)


# ---------------------------------------------------------------- per (point, decoder)
class DecoderState:
    """Counting state of one (SNR point, decoder).

    Attributes
    ----------
    spec : str
        Decoder spec.
    totals : list
        Sums of the counted chunks (``COUNT_FIELDS`` order).
    next : int
        Index of the first chunk not yet counted (= number of counted chunks).
    done : bool
        The decoder needs no more chunks at this point.
    stop : str
        Why it stopped: ``"frame_errors"``, ``"max_frames"``, ``"time_budget"``,
        or ``"running"``.
    chunks : dict of int to tuple
        Known chunk counts (stored or finished, counted or not).
    inflight : set of int
        Chunk indices submitted and not yet recorded.
    cut_short : int
        Chunks the time budget ended early (counted here, never reused from the store).
    """

    __slots__ = ("spec", "totals", "next", "done", "stop", "chunks", "inflight", "cut_short")

    def __init__(self, spec: str = ""):
        self.spec = spec
        self.totals = [0] * len(COUNT_FIELDS)
        self.totals[_F["seconds"]] = 0.0
        self.next = 0
        self.done = False
        self.stop = "running"
        self.chunks: dict[int, tuple] = {}
        self.inflight: set[int] = set()
        self.cut_short = 0  # counted chunks the time budget ended early

    @property
    def frames(self) -> int:
        return self.totals[_F["frames"]]

    @property
    def frame_errors(self) -> int:
        return self.totals[_F["frame_errors"]]

    def add(self, chunk_index: int, counts: tuple) -> None:
        """Record the counts of a finished (or stored) chunk; it is no longer in flight."""
        self.inflight.discard(chunk_index)
        self.chunks[chunk_index] = tuple(counts)

    def advance(self, rule) -> None:
        """Extend the counted prefix with known chunks until the stopping rule is met.

        ``rule`` is a :class:`~ldpcmarg.engine.simulate.StopRule`; the prefix stops
        growing at the first missing chunk.
        """
        tot = self.totals
        while not self.done:
            if tot[_F["frame_errors"]] >= rule.frame_errors:
                self.done, self.stop = True, "frame_errors"
                break
            if tot[_F["frames"]] >= rule.max_frames:
                self.done, self.stop = True, "max_frames"
                break
            row = self.chunks.get(self.next)
            if row is None:
                break
            for j, v in enumerate(row):
                tot[j] += v
            self.next += 1

    def stop_now(self, reason: str) -> None:
        """Stop counting (e.g. the time budget ran out); the prefix so far is kept."""
        if not self.done:
            self.done, self.stop = True, reason

    def lookahead(self, plan: ChunkPlan, rule, speculate: bool = True) -> int:
        """Chunks worth computing (exclusive upper index), judged from the error rate so far.

        Without errors yet the look-ahead doubles with every counted chunk;
        with errors it is 1.25 times the chunks the observed rate needs to
        reach the target. Without speculation only the next chunk.
        """
        fe = self.frame_errors
        if not speculate:
            return self.next + 1
        if fe == 0:  # nothing to extrapolate from: grow the look-ahead geometrically
            return min(plan.n_chunks, 2 * self.next + 1)
        need = rule.frame_errors - fe
        per_chunk = fe / max(self.next, 1)
        return min(plan.n_chunks, self.next + max(1, math.ceil(1.25 * need / per_chunk)))

    def progress_fraction(self, rule) -> float:
        """Share of the stopping rule reached (1.0 once done)."""
        if self.done:
            return 1.0
        return max(self.frame_errors / rule.frame_errors, self.frames / rule.max_frames)


# ---------------------------------------------------------------- per point
class PointState:
    """The decoders of one SNR point of a sweep.

    Parameters
    ----------
    index : int
        Place of the point in the sweep's grid.
    snr : float
        SNR value (unit of the sweep's ``snr_kind``).
    key : int
        :func:`~ldpcmarg.engine.simulate.point_key` of ``snr``.
    pid : int
        Point id in the store.
    decoders : sequence of str
        Decoder specs, in the sweep's order.
    """

    def __init__(self, index, snr, key, pid, decoders):
        self.index, self.snr, self.key, self.pid = index, snr, key, pid
        self.decs = {d: DecoderState(d) for d in decoders}
        self.started: float | None = None
        self.handles: set = set()
        #: counts so far of chunks still being decoded: chunk index -> {spec: counts}
        self.partial: dict[int, dict] = {}

    @property
    def done(self) -> bool:
        return all(d.done for d in self.decs.values())

    def load(self, stored, plan: ChunkPlan, rule) -> int:
        """Take the stored chunks that belong to the plan; return how many were taken."""
        taken = 0
        for row in stored:
            ds = self.decs.get(row.decoder)
            if ds is not None and plan.is_full(row.chunk_index, row.counts[_F["frames"]]):
                ds.add(row.chunk_index, row.counts)
                taken += 1
        for ds in self.decs.values():
            ds.advance(rule)
        return taken

    def next_task(self, plan: ChunkPlan, rule, speculate: bool = True):
        """The lowest chunk some active decoder wants and nobody computes yet, or None.

        The task lists every decoder that wants that chunk, so they decode the
        same frames (paired comparison).
        """
        from .simulate import ChunkTask

        active = [(d, ds) for d, ds in self.decs.items() if not ds.done]
        if not active:
            return None
        limits = {d: ds.lookahead(plan, rule, speculate) for d, ds in active}
        start = min(ds.next for _, ds in active)
        upper = max(limits.values())
        for c in range(start, upper):
            want = tuple(i for i, (d, ds) in enumerate(self.decs.items())
                         if not ds.done and c >= ds.next and c < limits[d]
                         and c not in ds.chunks and c not in ds.inflight)
            if want:
                return ChunkTask(self.key, self.snr, c, plan.frames_for(c), want)
        return None

    def fer_below(self, floor: float | None) -> bool:
        """Every decoder's counted FER is below ``floor`` (False without a floor)."""
        return floor is not None and all(
            ds.frame_errors < floor * ds.frames for ds in self.decs.values())

    def progress_info(self, rule, snr_kind: str, k: int, now: float | None = None,
                      reused_chunks: int = 0) -> dict:
        """Live figures of the point for progress displays.

        Returns
        -------
        dict
            ``snr``, ``snr_kind``, ``index``, ``decoders`` (one dict each:
            ``decoder``, ``frames``, ``frame_errors``, ``fer``, ``ber``,
            ``done``, ``stop``, ``ms_per_frame``), ``fraction`` (share of the
            slowest decoder's rule reached), ``elapsed`` and ``eta`` in seconds
            (``eta`` None when unknown), ``done`` and ``reused_chunks`` (chunks
            of the whole sweep taken from the store). Frames of chunks still
            being decoded are included in the figures (not yet counted).
        """
        decs = []
        frac = 1.0
        for ds in self.decs.values():
            t = list(ds.totals)
            if not ds.done:
                for c, part in self.partial.items():
                    if c >= ds.next and ds.spec in part:
                        for j, v in enumerate(part[ds.spec]):
                            t[j] += v
            frames, fe = t[_F["frames"]], t[_F["frame_errors"]]
            decs.append({"decoder": ds.spec, "frames": frames, "frame_errors": fe,
                         "fer": fe / frames if frames else float("nan"),
                         "ber": t[_F["info_bit_errors"]] / (frames * k) if frames
                         else float("nan"),
                         "done": ds.done, "stop": ds.stop,
                         "ms_per_frame": 1e3 * t[_F["seconds"]] / frames if frames
                         else float("nan")})
            if not ds.done:
                frac = min(frac, max(fe / rule.frame_errors, frames / rule.max_frames))
        now = time.perf_counter() if now is None else now
        elapsed = now - self.started if self.started else 0.0
        eta = elapsed * (1 - frac) / frac if 0 < frac < 1 else (0.0 if frac >= 1 else None)
        if rule.time_budget is not None and self.started:
            rest = max(rule.time_budget - elapsed, 0.0)
            eta = rest if eta is None else min(eta, rest)
        return {"snr": self.snr, "snr_kind": snr_kind, "index": self.index, "decoders": decs,
                "fraction": frac, "elapsed": elapsed, "eta": eta, "done": self.done,
                "reused_chunks": reused_chunks}


# ---------------------------------------------------------------- the sweep
class Sweep:
    """A BER/FER sweep: validated settings, per-point state and the scheduling loop.

    Parameters are those of :func:`~ldpcmarg.engine.simulate.simulate` (without
    the executor, store and progress, which :meth:`attach` and :meth:`run` take).
    Construction validates everything and touches nothing.

    Examples
    --------
    >>> import numpy as np
    >>> from ldpcmarg.code.parity_check import ParityCheckCode
    >>> from ldpcmarg.engine.simulate import StopRule
    >>> code = ParityCheckCode(np.zeros((1, 32), dtype=np.uint8), name="uncoded-32")
    >>> sweep = Sweep(code, ["hard-decision"], [3.0], seed=2,
    ...               stop=StopRule(frame_errors=5, max_frames=640), chunk_frames=64)
    >>> sweep.plan.n_chunks
    10
    >>> res = sweep.run()
    >>> res.points[0].frame_errors >= 5 or res.points[0].frames == 640
    True
    """

    def __init__(self, code, decoders, snr, *, snr_kind: str = "ebn0_db", seed: int = 1,
                 stop=None, chunk_frames: int | None = None, random_codewords: bool = False,
                 confidence: float = 0.95, speculate: bool = True, link=None):
        from ..decoders.base import make_decoder
        from .simulate import (
            CHUNK_SCHEME,
            SNR_KINDS,
            StopRule,
            SweepContext,
            _point_channel,
            default_chunk_frames,
            info_positions,
            point_key,
            require_chunk_memory,
        )

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
        link = _check_link(link, code, snr_kind)
        decs = [make_decoder(d, code) for d in decoders]
        specs = [d.spec for d in decs]
        dup = {s for s in specs if specs.count(s) > 1}
        if dup:
            raise InputError(f"Decoder {sorted(dup)[0]!r} is given twice.")
        if chunk_frames is None:
            chunk_frames = default_chunk_frames(code.n)
        if isinstance(chunk_frames, bool) or not isinstance(chunk_frames, int | np.integer) \
                or chunk_frames < 1:
            raise InputError(
                f"The chunk size must be an integer >= 1 frames; got {chunk_frames!r}.")
        chunk_frames = int(chunk_frames)
        forced = ""
        largest_chunk = min(chunk_frames, int(stop.max_frames))
        if not random_codewords:
            asym = [d.spec for d in decs if not getattr(d, "symmetric", True)]
            if asym or not channels[0].symmetric:
                random_codewords = True
                forced = ("not symmetric: " + ", ".join(asym)) if asym else \
                    "channel not symmetric"
        if random_codewords and getattr(code, "encoder", None) is None:
            raise InputError("Random codewords need an encoder for this code (code.encoder).")
        # before any store is written or worker started (each worker checks again)
        require_chunk_memory(largest_chunk, code, random_codewords=bool(random_codewords))
        info = info_positions(code)
        if link is not None and link.rate_matching.shortened.size:
            info = np.setdiff1d(info, link.rate_matching.shortened).astype(np.int64)

        self.code = code
        self.link = link
        self.snr = snr
        self.keys = keys
        self.snr_kind = snr_kind
        self.rule = stop
        self.specs = specs
        self.k = int(len(info))
        self.confidence = confidence
        self.speculate = speculate
        self.forced = forced
        self.plan = ChunkPlan(chunk_frames, stop.max_frames)
        self.settings = {
            "chunk_scheme": CHUNK_SCHEME,
            "channel": SNR_KINDS[snr_kind],
            "snr_kind": snr_kind,
            "seed": int(seed),
            "chunk_frames": chunk_frames,
            "codewords": "random" if random_codewords else "all-zero",
            "info_positions": hashlib.sha256(info.tobytes()).hexdigest()[:16],
        }
        if link is not None:  # every link setting is part of the run's identity
            self.settings["link"] = link.to_dict()
        ctx_key = hashlib.sha256(json.dumps(
            [self.settings, code.fingerprint, specs], sort_keys=True).encode()).hexdigest()[:16]
        self.context = SweepContext(
            H=code.H, code_name=code.name, code_source=code.source, rate=rate,
            decoders=tuple(specs), snr_kind=snr_kind, seed=int(seed),
            random_codewords=bool(random_codewords), key=ctx_key, link=link)
        self.store: Store | None = None
        self.own_store = False
        self.run_id: int | None = None
        self.points: list[PointState] = []
        self.reused_chunks = 0
        self.floor_at: int | None = None
        self.timing = {"store_seconds": 0.0, "channel_seconds": 0.0, "decoder_seconds": 0.0,
                       "worker_seconds": 0.0, "chunks": 0}
        self._executor = None
        self._inflight: dict = {}  # handle -> (point state, task)
        self._progress = None

    # ------------------------------------------------------------ store
    def attach(self, store: Store | None = None) -> None:
        """Bind the sweep to ``store`` (default: a new in-memory one) and load its chunks."""
        from .simulate import _versions

        self.own_store = store is None
        self.store = Store.memory(self.code) if store is None else store
        self.run_id, _ = self.store.run_for(self.settings, self.specs, _versions())
        if self.link is not None:  # the readable link record (plots, tables) beside the run
            self.store.put_payload("link_record", str(self.run_id), self.link.record())
        self.points = []
        self.reused_chunks = 0
        for i, (s, key) in enumerate(zip(self.snr, self.keys, strict=True)):
            ps = PointState(i, s, key, self.store.point_id(self.run_id, key, s), self.specs)
            self.reused_chunks += ps.load(self.store.chunks(ps.pid), self.plan, self.rule)
            self.points.append(ps)

    # ------------------------------------------------------------ stopping
    def active_points(self):
        """Points still running, in grid order, up to the FER-floor point."""
        for ps in self.points:
            if self.floor_at is not None and ps.index > self.floor_at:
                return
            if not ps.done:
                yield ps

    def update_floor(self) -> None:
        """Find the first point (in grid order, all earlier ones done) below the FER floor."""
        if self.rule.fer_floor is None:
            return
        for ps in self.points:
            if not ps.done:
                return
            if ps.fer_below(self.rule.fer_floor):
                self.floor_at = ps.index
                return

    def apply_time_budget(self, now: float) -> None:
        """Stop every point whose budget (seconds since its first submitted chunk) is spent."""
        if self.rule.time_budget is None:
            return
        for ps in self.active_points():
            if ps.started is not None and now - ps.started > self.rule.time_budget:
                for ds in ps.decs.values():
                    ds.stop_now("time_budget")
        self.update_floor()

    # ------------------------------------------------------------ the loop
    def _emit(self, ps: PointState) -> None:
        if self._progress is not None:
            self._progress(ps.progress_info(self.rule, self.snr_kind, self.k,
                                            reused_chunks=self.reused_chunks))

    def on_sub_batch(self, task, counts: dict) -> None:
        """Counts so far of a chunk still being decoded (progress within a long chunk)."""
        for ps in self.points:
            if ps.key == task.point_key:
                ps.partial[task.chunk_index] = counts
                self._emit(ps)
                return

    def deadline_for(self, ps: PointState) -> float | None:
        """Wall-clock deadline (``time.time()``) of the point's time budget, or None."""
        if self.rule.time_budget is None or ps.started is None:
            return None
        spent = time.perf_counter() - ps.started
        return time.time() + self.rule.time_budget - spent

    def next_task(self):
        """The next (point, task) to submit, or (None, None)."""
        for ps in self.active_points():
            task = ps.next_task(self.plan, self.rule, self.speculate)
            if task is not None:
                return ps, task
            if not self.speculate:
                break
        return None, None

    def submit_ready(self) -> None:
        """Keep the executor's capacity filled with wanted chunks."""
        ex = self._executor
        while len(self._inflight) < ex.capacity:
            ps, task = self.next_task()
            if task is None:
                break
            if ps.started is None:
                ps.started = time.perf_counter()
                self._emit(ps)
            if self.rule.time_budget is not None:
                task = replace(task, deadline=self.deadline_for(ps))
            h = ex.submit(task)
            self._inflight[h] = (ps, task)
            ps.handles.add(h)
            for i in task.decoders:
                ps.decs[self.specs[i]].inflight.add(task.chunk_index)

    def record(self, handle) -> None:
        """Store a finished chunk, count it where it extends a prefix, report progress."""
        ps, task = self._inflight.pop(handle)
        ps.handles.discard(handle)
        ps.partial.pop(task.chunk_index, None)
        res = self._executor.result(handle)
        timing = self.timing
        t0 = time.perf_counter()
        self.store.add_chunk(ps.pid, task.chunk_index, res.counts)
        timing["store_seconds"] += time.perf_counter() - t0
        timing["channel_seconds"] += res.channel_seconds
        timing["worker_seconds"] += res.total_seconds
        timing["decoder_seconds"] += sum(c[_F["seconds"]] for c in res.counts.values())
        timing["chunks"] += 1
        for spec, counts in res.counts.items():
            ds = ps.decs[spec]
            ds.add(task.chunk_index, counts)
            before = ds.next
            ds.advance(self.rule)
            if res.cut_short and before <= task.chunk_index < ds.next:
                ds.cut_short += 1
            if res.cut_short:
                ds.stop_now("time_budget")
        self._emit(ps)

    def run(self, executor=None, progress=None, workers: int | None = 1):
        """Run the sweep to its stopping rules and return the result.

        Parameters
        ----------
        executor : Executor, optional
            Default: ``make_executor(workers)``. Started and closed here.
        progress : callable, optional
            Called with :meth:`PointState.progress_info` dicts.
        workers : int, optional
            Used when ``executor`` is None.

        Returns
        -------
        SweepResult
        """
        from . import simulate as sim
        from .executors import InlineExecutor, make_executor

        if self.store is None:
            self.attach(None)
        if executor is None:
            executor = make_executor(workers)
        self._executor, self._progress = executor, progress
        inflight = self._inflight
        t_run = time.perf_counter()
        interrupted = False
        old_hook = sim.SUB_BATCH_HOOK
        if isinstance(executor, InlineExecutor) and progress is not None:
            sim.SUB_BATCH_HOOK = self.on_sub_batch  # chunks run in this process
        if progress is not None and self.reused_chunks:
            for ps in self.points:  # what the store already holds
                if ps.done:
                    self._emit(ps)
        try:
            executor.start(sim.run_chunk, self.context)
            while True:
                self.update_floor()
                self.apply_time_budget(time.perf_counter())
                self.submit_ready()
                if not inflight:
                    break
                wait_for = 0.25 if self.rule.time_budget is not None else (
                    1.0 if progress is not None else None)
                finished = executor.wait(list(inflight), wait_for)
                for h in finished:
                    self.record(h)
                if not finished and progress is not None:
                    # nothing finished: refresh elapsed time and ETA of the running points
                    for ps in {id(p): p for p, _ in inflight.values()}.values():
                        self._emit(ps)
            # drop queued speculative chunks; keep (store) those already running
            running = set(executor.cancel(list(inflight)))
            for h in [h for h in inflight if h not in running]:
                inflight.pop(h)
            while inflight:
                for h in executor.wait(list(inflight), None):
                    self.record(h)
        except KeyboardInterrupt:
            interrupted = True
            raise
        finally:
            sim.SUB_BATCH_HOOK = old_hook
            # keep every chunk that finished, then stop the workers
            if inflight:
                try:
                    for h in executor.wait(list(inflight), 0) or []:
                        if h in inflight:
                            try:
                                self.record(h)
                            except Exception:  # pragma: no cover - best effort while stopping
                                inflight.pop(h, None)
                except BaseException:  # pragma: no cover
                    pass
            executor.close(abort=interrupted or bool(inflight))
            self.timing["wall_seconds"] = time.perf_counter() - t_run
            if interrupted and self.own_store:
                self.store.close()
        return self.result()

    # ------------------------------------------------------------ results
    def result(self):
        """Save the counted totals of every (point, decoder) and build the SweepResult."""
        from .simulate import PointResult, SweepResult

        self.update_floor()
        code, rule, ex = self.code, self.rule, self._executor
        results, skipped = [], []
        link = self.link
        # Eb/N0 <-> Es/N0 uses the transmitted rate times the bits per symbol
        rate = code.rate if link is None else link.transmitted_rate * link.bits_per_symbol
        n_bits = code.n if link is None else code.n - int(link.rate_matching.shortened.size)
        for ps in self.points:
            if self.floor_at is not None and ps.index > self.floor_at:
                skipped.append(ps.snr)
                continue
            for spec, ds in ps.decs.items():
                results.append(PointResult.from_counts(
                    tuple(ds.totals), decoder=spec, snr_kind=self.snr_kind, snr=ps.snr,
                    rate=rate, n=n_bits, k=self.k, chunks=ds.next, stop=ds.stop,
                    cut_short_chunks=ds.cut_short, confidence=self.confidence))
                self.store.save_result(ps.pid, spec, tuple(ds.totals), ds.next, ds.stop,
                                       rule.to_dict())
        channel = {"kind": self.settings["channel"], "snr_kind": self.snr_kind,
                   "codewords": self.settings["codewords"], "rate": code.rate}
        if self.forced:
            channel["codewords_reason"] = self.forced
        if self.settings["channel"] == "awgn":
            channel.update(_link_record(code, link))
        code_info = dict(code.summary())
        code_info["source"] = code.source
        out = SweepResult(
            code=code_info, channel=channel, points=results,
            settings={**self.settings, **rule.to_dict(), "decoders": self.specs,
                      "confidence": self.confidence,
                      "executor": ex.label if ex is not None else None,
                      "workers": ex.workers if ex is not None else None},
            run_id=None if self.own_store else self.run_id, skipped=skipped,
            timing=self.timing)
        if self.own_store:
            self.store.close()
        return out


def _check_link(link, code, snr_kind):
    """None for the classic BPSK-AWGN link (old run identities stay valid), else the link."""
    if link is None:
        return None
    if link.n != code.n:
        raise InputError(f"The link was built for n = {link.n}, the code has n = {code.n}.")
    if link.is_plain_bpsk:
        return None
    if snr_kind not in ("ebn0_db", "esn0_db"):
        raise InputError("Modulation, fading, rate matching and quantisation need the AWGN "
                         "channel (give Eb/N0 or Es/N0, not p or epsilon).")
    return link


def _link_record(code, link) -> dict:
    """The link fields of the JSON ``channel`` object (BPSK defaults without a link)."""
    if link is not None:
        return link.record()
    return {"modulation": "bpsk", "demapper": "exact", "bits_per_symbol": 1, "fading": "none",
            "fading_spec": "none", "block": 1, "puncture": 0, "shorten": 0, "quantize": None,
            "interleaver": None, "scrambler": False, "transmitted_rate": code.rate,
            "punctured_stopping_set": 0}
