"""The sweep scheduler's parts on their own: chunk plan, counting prefix, look-ahead, tasks."""

from __future__ import annotations

import time

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


# ------------------------------------------------------------------ sub-batches and deadlines
def test_next_sub_batch_sizes():
    from ldpcmarg.engine.simulate import SUB_BATCH_SECONDS, _next_sub_batch

    assert _next_sub_batch(0, 500, 0.0, 0.0, None) == 1  # nothing measured yet
    assert _next_sub_batch(3, 500, 1e-6, 1e-6, None) == 3  # at most doubles what is done
    per = SUB_BATCH_SECONDS / 10
    assert _next_sub_batch(400, 500, per, per, None) == 10  # about SUB_BATCH_SECONDS
    assert _next_sub_batch(499, 500, 1e-6, 1e-6, None) == 1  # never past the chunk
    # a deadline 1 s away with a 0.3 s per-frame cap: three frames fit
    assert _next_sub_batch(100, 500, 1e-6, 1e-6, time.time() + 1.0, 0.3) == 3
    assert _next_sub_batch(100, 500, 1e-6, 1e-6, time.time() - 5.0, 0.3) == 1


@pytest.mark.parametrize("snr_kind,snr", [("ebn0_db", 2.0), ("p", 0.04)])
def test_sub_batches_do_not_change_counts(monkeypatch, snr_kind, snr):
    # counts are sums over frames and decoders decode frames independently, so any
    # split of a chunk into sub-batches must give the counts of the whole chunk
    from ldpcmarg.code.construct import random_regular
    from ldpcmarg.engine import simulate as sim

    code = random_regular(96, 3, 6, seed=4)
    decs = ["sum-product", "min-sum:alpha=0.8", "layered-sum-product", "bit-flipping",
            "hard-decision"]
    sweep = Sweep(code, decs, [snr], snr_kind=snr_kind, seed=3, chunk_frames=200)
    task = sim.ChunkTask(sim.point_key(snr), snr, 0, 200, tuple(range(len(decs))))
    seconds = COUNT_FIELDS.index("seconds")

    def run(sub_batch_seconds):
        monkeypatch.setattr(sim, "SUB_BATCH_SECONDS", sub_batch_seconds)
        res = sim.run_chunk(sweep.context, task)
        assert not res.cut_short
        return {d: c[:seconds] + c[seconds + 1:] for d, c in res.counts.items()}

    whole = run(1e9)  # one frame, then the rest at once
    tiny = run(1e-12)  # 1, 1, 2, 4, ... frames
    assert tiny == whole and whole["sum-product"][F["frames"]] == 200


def test_slow_decoder_ends_within_time_budget_plus_one_frame_cap(hamming74):
    # fw with gap_tol=0 never meets its tolerance, so frames run to the 0.3 s cap;
    # one 200-frame chunk would take about a minute without the cut inside the chunk
    cap, budget = 0.3, 1.0
    slow = f"fw:gap_tol=0,max_iter=1000000,time_limit={cap}"
    res = simulate(hamming74, [slow, "sum-product"], [1.0], seed=2, chunk_frames=200,
                   stop=StopRule(frame_errors=10**6, max_frames=10**6, time_budget=budget))
    # timing bound asked for by the stopping rule itself. 8 s of slack covers the
    # coordinator's 0.25 s polling, the decoders' warm-up (numba compilation on a
    # cold cache) and a loaded machine, and still separates the two behaviours
    # widely: without the cut inside the chunk the run takes about 60 s.
    assert res.timing["wall_seconds"] < budget + cap + 8.0
    fw, spa = res.points
    for p in (fw, spa):
        assert p.stop == "time_budget" and p.cut_short_chunks == 1 and not p.reproducible
        assert 0 < p.frames < 200
    assert fw.frames == spa.frames  # the same frames for both decoders
    assert fw.capped_frames >= 1 and spa.capped_frames == 0
    doc = res.to_dict()["points"][0]
    assert doc["capped_frames"] == fw.capped_frames and doc["reproducible"] is False
    assert "cut short" in res.table() and "not reproducible" in res.table()
