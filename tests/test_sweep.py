"""The sweep scheduler's parts on their own: chunk plan, counting prefix, look-ahead, tasks."""

from __future__ import annotations

import pytest

from ldpcmarg.engine.executors import Executor
from ldpcmarg.engine.simulate import StopRule, simulate
from ldpcmarg.engine.store import COUNT_FIELDS, StoredChunk
from ldpcmarg.engine.sweep import ChunkPlan, DecoderState, PointState, Sweep

F = {name: i for i, name in enumerate(COUNT_FIELDS)}


def chunk(frames, frame_errors, seconds=0.0):
    row = [0] * len(COUNT_FIELDS)
    row[F["frames"]], row[F["frame_errors"]], row[F["seconds"]] = frames, frame_errors, seconds
    return tuple(row)


def test_chunk_plan_lands_on_max_frames():
    plan = ChunkPlan(chunk_frames=64, max_frames=1000)
    sizes = [plan.frames_for(c) for c in range(plan.n_chunks)]
    assert plan.n_chunks == 16 and sum(sizes) == 1000 and sizes[-1] == 1000 - 15 * 64
    assert plan.is_full(15, 40) and not plan.is_full(15, 64) and not plan.is_full(16, 64)
    assert not plan.is_full(3, 20)  # a chunk cut short is not the planned chunk


def test_prefix_stops_at_first_gap_and_at_target():
    rule = StopRule(frame_errors=5, max_frames=10_000)
    ds = DecoderState("d")
    ds.add(0, chunk(100, 2))
    ds.add(2, chunk(100, 9))  # beyond a gap: known but not counted
    ds.advance(rule)
    assert (ds.next, ds.frames, ds.frame_errors, ds.done) == (1, 100, 2, False)
    ds.add(1, chunk(100, 1))
    ds.advance(rule)
    # 2 + 1 < 5, then chunk 2 brings 12 >= 5: counted prefix is 0..2 and it stops
    assert (ds.next, ds.frame_errors, ds.done, ds.stop) == (3, 12, True, "frame_errors")
    ds.add(3, chunk(100, 50))
    ds.advance(rule)
    assert ds.next == 3  # nothing counted after the stop


def test_prefix_stops_on_frame_cap_and_time_budget():
    rule = StopRule(frame_errors=100, max_frames=250)
    ds = DecoderState("d")
    for c, fr in enumerate((100, 100, 50)):
        ds.add(c, chunk(fr, 0))
    ds.advance(rule)
    assert (ds.frames, ds.stop) == (250, "max_frames")
    other = DecoderState("e")
    other.stop_now("time_budget")
    other.stop_now("max_frames")  # the first reason is kept
    assert other.done and other.stop == "time_budget"


def test_lookahead_geometric_then_proportional():
    plan = ChunkPlan(10, 10_000)
    rule = StopRule(frame_errors=100, max_frames=10_000)
    ds = DecoderState("d")
    assert ds.lookahead(plan, rule) == 1
    for c in range(4):
        ds.add(c, chunk(10, 0))
    ds.advance(rule)
    assert ds.lookahead(plan, rule) == 9  # no errors: 2 * next + 1
    ds.add(4, chunk(10, 20))
    ds.advance(rule)
    # 20 errors in 5 chunks (4 per chunk), 80 to go: 1.25 * 80 / 4 = 25 more chunks
    assert ds.lookahead(plan, rule) == 5 + 25
    assert ds.lookahead(plan, rule, speculate=False) == 6
    assert DecoderState("x").lookahead(ChunkPlan(10, 20), rule) == 1


def test_next_task_pairs_decoders_and_skips_busy_chunks():
    plan = ChunkPlan(16, 1600)
    rule = StopRule(frame_errors=10, max_frames=1600)
    ps = PointState(0, 2.0, 4_000_000_000, 1, ["a", "b"])
    task = ps.next_task(plan, rule)
    assert (task.chunk_index, task.decoders, task.frames) == (0, (0, 1), 16)
    ps.decs["a"].inflight.add(0)
    ps.decs["b"].inflight.add(0)
    assert ps.next_task(plan, rule) is None  # look-ahead of 1 with no counted chunk yet
    ps.decs["a"].add(0, chunk(16, 10))
    ps.decs["a"].advance(rule)
    ps.decs["b"].add(0, chunk(16, 0))
    ps.decs["b"].advance(rule)
    task = ps.next_task(plan, rule)
    assert ps.decs["a"].done and (task.chunk_index, task.decoders) == (1, (1,))


def test_point_load_takes_only_planned_chunks():
    plan = ChunkPlan(50, 120)
    rule = StopRule(frame_errors=99, max_frames=120)
    stored = [StoredChunk("a", 0, chunk(50, 1)), StoredChunk("a", 1, chunk(30, 1)),  # cut
              StoredChunk("a", 2, chunk(20, 1)), StoredChunk("zz", 0, chunk(50, 1)),
              StoredChunk("a", 3, chunk(50, 1))]  # beyond the plan
    ps = PointState(0, 1.0, 2, 1, ["a"])
    assert ps.load(stored, plan, rule) == 2
    assert ps.decs["a"].next == 1 and sorted(ps.decs["a"].chunks) == [0, 2]


def test_progress_info_fraction_and_eta():
    rule = StopRule(frame_errors=100, max_frames=10_000)
    ps = PointState(3, 1.5, 1, 1, ["a"])
    ps.started = 10.0
    ps.decs["a"].add(0, chunk(1000, 25))
    ps.decs["a"].advance(rule)
    info = ps.progress_info(rule, "ebn0_db", k=4, now=14.0)
    # a quarter of the error target in 4 s: 12 s to go
    assert info["fraction"] == pytest.approx(0.25) and info["eta"] == pytest.approx(12.0)
    assert info["decoders"][0]["fer"] == pytest.approx(0.025) and info["index"] == 3


class _Handle:
    def __init__(self, task):
        self.task, self.value = task, None


class _ReverseExecutor(Executor):
    """Runs queued tasks newest first: finishing order must not change the counts."""

    capacity = 4
    label = "reverse"

    def start(self, func, context):
        self.func, self.ctx = func, context

    def submit(self, task):
        return _Handle(task)

    def wait(self, handles, timeout):
        h = handles[-1]
        h.value = self.func(self.ctx, h.task)
        return [h]

    def result(self, handle):
        return handle.value

    def cancel(self, handles):
        return []


def test_sweep_object_matches_simulate_whatever_the_finishing_order(hamming74):
    kw = dict(seed=5, stop=StopRule(frame_errors=25, max_frames=3000), chunk_frames=64)
    decs = ["sum-product", "hard-decision"]
    ref = simulate(hamming74, decs, [1.0, 3.0], **kw)
    sweep = Sweep(hamming74, decs, [1.0, 3.0], **kw)
    sweep.attach(None)
    out = sweep.run(executor=_ReverseExecutor())
    key = [(p.decoder, p.snr, p.frames, p.frame_errors, p.bit_errors, p.iterations, p.chunks)
           for p in ref.points]
    assert key == [(p.decoder, p.snr, p.frames, p.frame_errors, p.bit_errors, p.iterations,
                    p.chunks) for p in out.points]
