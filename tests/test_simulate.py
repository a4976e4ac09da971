"""Monte Carlo engine: outside-world checks, determinism, resumption, codeword modes."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.special import erfc
from scipy.stats import fisher_exact

from ldpcmarg.code.construct import random_regular
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.engine.simulate import StopRule, parse_grid, point_key, simulate
from ldpcmarg.engine.store import Store
from ldpcmarg.errors import InputError

COUNTS = ("frames", "bit_errors", "info_bit_errors", "bit_errors_sq", "frame_errors",
          "undetected_errors", "iterations", "chunks")


def counts(res):
    return [(p.decoder, p.snr, *(getattr(p, f) for f in COUNTS)) for p in res.points]


@pytest.fixture(scope="module")
def ldpc96():
    return random_regular(96, 3, 6, seed=4)


# ------------------------------------------------------------------ grids
def test_parse_grid_forms():
    assert parse_grid("1,2,3.5") == [1.0, 2.0, 3.5]
    # float accumulation would give 0.30000000000000004 and could drop the stop
    assert parse_grid("0:0.1:0.3") == [0.0, 0.1, 0.2, 0.3]
    assert parse_grid("0:0.5:1.9") == [0.0, 0.5, 1.0, 1.5]
    assert parse_grid("3:-1:1") == [3.0, 2.0, 1.0]
    assert parse_grid("0:1:2,2.5") == [0.0, 1.0, 2.0, 2.5]
    assert parse_grid("-1:0.25:-0.5") == [-1.0, -0.75, -0.5]


@pytest.mark.parametrize("bad", ["", "1,,2", "a", "0:1", "0:0:3", "3:1:1", "1:1:2:3", "1,1",
                                 "nan", "0:1:inf"])
def test_parse_grid_rejects(bad):
    with pytest.raises(InputError):
        parse_grid(bad)


def test_point_key_is_value_based():
    assert point_key(2.0) == point_key(2.0000000000001)
    assert point_key(-0.5) != point_key(0.5)
    assert point_key(0.1 + 0.2) == point_key(0.3)


def test_fast_all_zero_llr_is_bit_identical_to_channel():
    from ldpcmarg.engine.simulate import _all_zero_llr
    from ldpcmarg.link.channels import make_channel

    for ch in (make_channel("awgn", ebn0_db=1.7, rate=0.5), make_channel("bsc", p=0.1),
               make_channel("bec", epsilon=0.3)):
        fast = _all_zero_llr(ch, 50, 33, np.random.default_rng(8))
        ref = ch.sample_llr(np.zeros((50, 33), dtype=np.uint8), np.random.default_rng(8))
        assert fast.dtype == np.float64 and np.array_equal(fast, ref)


# ------------------------------------------------------------------ outside world
def test_uncoded_bpsk_matches_textbook():
    # One all-zero check row: rank 0, so k = n and rate 1, and Eb/N0 = Es/N0.
    # "hard-decision" then is uncoded BPSK, whose BER is 1/2 erfc(sqrt(Eb/N0))
    # (standard textbook result, Proakis, Digital Communications).
    code = ParityCheckCode(np.zeros((1, 128), dtype=np.uint8), name="uncoded-128")
    assert code.rate == 1.0
    # 99.9 % intervals: three points checked at once, so the chance that a correct
    # simulator fails this test is below 0.3 %.
    res = simulate(code, ["hard-decision"], [0.0, 4.0, 7.0], seed=12,
                   stop=StopRule(frame_errors=10**9, max_frames=12_000), chunk_frames=2000,
                   confidence=0.999)
    for p in res.points:
        theory = 0.5 * erfc(np.sqrt(10 ** (p.snr / 10)))
        lo, hi = p.ber_ci
        assert lo <= theory <= hi, (p.snr, p.ber, theory, lo, hi)
        assert (hi - lo) / theory < 0.25  # informative, not vacuous (>= ~1000 errors)
        # uncoded: every wrong bit is an information bit, every error frame is "valid"
        assert p.bit_errors == p.info_bit_errors
        assert p.undetected_errors == p.frame_errors


def test_same_seed_same_counts_for_1_and_2_workers(hamming74):
    kw = dict(seed=7, stop=StopRule(frame_errors=40, max_frames=6000), chunk_frames=300)
    decs = ["sum-product", "min-sum:alpha=0.8,max_iter=20"]
    one = simulate(hamming74, decs, [1.0, 2.5, 4.0], workers=1, **kw)
    two = simulate(hamming74, decs, [1.0, 2.5, 4.0], workers=2, **kw)
    assert counts(one) == counts(two)
    assert two.settings["workers"] == 2
    assert all(p.frame_errors >= 40 or p.frames == 6000 for p in one.points)


# ------------------------------------------------------------------ stopping rules
def test_prefix_rule_and_per_decoder_stopping(hamming74):
    stop = StopRule(frame_errors=30, max_frames=5000)
    res = simulate(hamming74, ["hard-decision", "sum-product"], [2.0], seed=3, stop=stop,
                   chunk_frames=16)
    hd, spa = res.points
    # each decoder stops at the first chunk where it reaches the target
    for p in (hd, spa):
        assert p.stop == "frame_errors" and p.frame_errors >= 30
        assert p.frames == 16 * p.chunks and p.chunks > 1
    assert hd.chunks < spa.chunks  # the weaker decoder stopped earlier
    # ... and one chunk fewer would not have reached it: rerun with that cap
    for p in (hd, spa):
        short = simulate(hamming74, [p.decoder], [2.0], seed=3, chunk_frames=16,
                         stop=StopRule(frame_errors=30, max_frames=16 * (p.chunks - 1)))
        assert short.points[0].frame_errors < 30
    # the frame cap cuts the last chunk so the count lands exactly on it
    capped = simulate(hamming74, ["sum-product"], [6.0], seed=3, chunk_frames=64,
                      stop=StopRule(frame_errors=10**6, max_frames=1000))
    assert capped.points[0].frames == 1000 and capped.points[0].stop == "max_frames"


def test_fer_floor_stops_sweep(hamming74):
    res = simulate(hamming74, ["sum-product"], [0.0, 6.0, 7.0, 8.0], seed=1, chunk_frames=500,
                   stop=StopRule(frame_errors=20, max_frames=4000, fer_floor=0.05))
    assert [p.snr for p in res.points] == [0.0, 6.0]
    assert res.skipped == [7.0, 8.0]
    assert res.points[1].fer < 0.05 <= res.points[0].fer


def test_time_budget_stops_point(hamming74):
    res = simulate(hamming74, ["sum-product"], [9.0], seed=1, chunk_frames=64,
                   stop=StopRule(frame_errors=10**6, max_frames=10**9, time_budget=0.5))
    p = res.points[0]
    assert p.stop == "time_budget" and 0 < p.frames < 10**9


# ------------------------------------------------------------------ store and resume
def test_raising_target_and_adding_points_reuse_chunks(tmp_path, hamming74):
    path = tmp_path / "s.sqlite"
    decs = ["sum-product", "hard-decision"]
    kw = dict(seed=5, chunk_frames=100)
    with Store.open_writer(path, hamming74) as st:
        simulate(hamming74, decs, [1.0, 3.0], stop=StopRule(20, 20_000), store=st, **kw)
    with Store.open_writer(path, hamming74) as st:
        again = simulate(hamming74, decs, [1.0, 3.0], stop=StopRule(20, 20_000), store=st, **kw)
    assert again.timing["chunks"] == 0  # nothing recomputed
    with Store.open_writer(path, hamming74) as st:
        more = simulate(hamming74, decs, [3.0, 1.0, 2.0], stop=StopRule(60, 20_000), store=st,
                        **kw)
    fresh = simulate(hamming74, decs, [3.0, 1.0, 2.0], stop=StopRule(60, 20_000), **kw)
    assert counts(more) == counts(fresh)
    assert more.timing["chunks"] < fresh.timing["chunks"]
    with Store.open_reader(path) as st:
        assert len(st.runs()) == 1
        assert {r["snr"] for r in st.results()} == {1.0, 2.0, 3.0}


def test_store_run_per_settings(tmp_path, hamming74):
    path = tmp_path / "s.sqlite"
    for seed in (1, 2):
        with Store.open_writer(path, hamming74) as st:
            simulate(hamming74, ["hard-decision"], [2.0], seed=seed, chunk_frames=50,
                     stop=StopRule(5, 500), store=st)
    with Store.open_reader(path) as st:
        assert [r["settings"]["seed"] for r in st.runs()] == [1, 2]


# ------------------------------------------------------------------ codeword modes
def test_random_codewords_same_noise_same_errors_sum_product(ldpc96):
    # Channel symmetry: L_x = (1 - 2x) L_0 and a symmetric decoder gives
    # bits_x = bits_0 xor x, so every count is identical (not merely close).
    kw = dict(seed=9, stop=StopRule(frame_errors=10**6, max_frames=600), chunk_frames=200)
    zero = simulate(ldpc96, ["sum-product:max_iter=30"], [1.5, 2.5], **kw)
    rnd = simulate(ldpc96, ["sum-product:max_iter=30"], [1.5, 2.5], random_codewords=True, **kw)
    assert rnd.channel["codewords"] == "random" and zero.channel["codewords"] == "all-zero"
    assert counts(zero) == counts(rnd)
    assert sum(p.frame_errors for p in zero.points) > 10  # the check is not vacuous


def test_random_codewords_min_sum_consistent(ldpc96):
    # Independent noise (different seeds): the FERs must agree statistically.
    # Fisher's exact test at the 0.1 % level (a correct engine fails it once in 1000 seeds).
    stop = StopRule(frame_errors=10**6, max_frames=1500)
    zero = simulate(ldpc96, ["min-sum"], [2.0], seed=21, stop=stop, chunk_frames=500)
    rnd = simulate(ldpc96, ["min-sum"], [2.0], seed=22, stop=stop, chunk_frames=500,
                   random_codewords=True)
    a, b = zero.points[0], rnd.points[0]
    assert a.frame_errors > 20 and b.frame_errors > 20
    table = [[a.frame_errors, a.frames - a.frame_errors],
             [b.frame_errors, b.frames - b.frame_errors]]
    assert fisher_exact(table).pvalue > 1e-3


# ------------------------------------------------------------------ bad input
@pytest.mark.parametrize("kwargs", [
    dict(decoders=["no-such-decoder"]),
    dict(decoders=["sum-product:nonsense=3"]),
    dict(decoders=["sum-product:max_iter=0"]),
    dict(decoders=["sum-product", "sum-product"]),
    dict(snr=[]),
    dict(snr=[1.0, 1.0]),
    dict(snr_kind="p", snr=[0.7]),
    dict(seed=-1),
    dict(chunk_frames=0),
])
def test_bad_input_is_input_error(hamming74, kwargs):
    args = dict(decoders=["hard-decision"], snr=[1.0])
    args.update(kwargs)
    st = Store.memory(hamming74)
    before = st.row_counts()
    with pytest.raises(InputError):
        simulate(hamming74, args.pop("decoders"), args.pop("snr"), store=st, **args)
    assert st.row_counts() == before


@pytest.mark.parametrize("rule", [dict(frame_errors=0), dict(max_frames=-5),
                                  dict(time_budget=0.0), dict(fer_floor=1.5)])
def test_bad_stop_rule(rule):
    with pytest.raises(InputError):
        StopRule(**rule)


def test_unresolved_bec_erasures_count_as_errors():
    # Uncoded BEC: every erased bit is undecided (LLR 0), so the bit error rate
    # must equal the erasure probability, not 0 as the all-zero word would
    # suggest (common practice: unresolved erasures are errors).
    code = ParityCheckCode(np.zeros((1, 64), dtype=np.uint8), name="uncoded-64")  # rate 1
    res = simulate(code, ["hard-decision"], [0.2], snr_kind="epsilon", seed=3,
                   stop=StopRule(frame_errors=10**6, max_frames=2000))
    p = res.points[0]
    assert p.frames == 2000
    # 128000 bits, binomial sd of the rate = sqrt(0.2*0.8/128000) = 1.1e-3: 5 sd = 0.0056
    assert abs(p.bit_errors / (2000 * 64) - 0.2) < 0.0056
    assert p.undetected_errors == 0


# ---------------------------------------------------------------- chunk memory
def test_chunk_memory_estimate_covers_the_llr_array():
    from ldpcmarg.engine.simulate import chunk_memory_bytes

    # a chunk holds at least its (frames, n) float64 LLRs: 8 bytes each (IEEE 754 double)
    for frames, n in ((1, 7), (1000, 504), (8192, 2016)):
        assert chunk_memory_bytes(frames, n, 3 * n) >= frames * n * 8
    # more frames, more memory
    assert chunk_memory_bytes(2000, 504, 1512) > chunk_memory_bytes(1000, 504, 1512)


def test_huge_chunk_is_one_resource_error_before_any_work(monkeypatch):
    import ldpcmarg
    from ldpcmarg.engine.simulate import ChunkTask, SweepContext, run_chunk

    assert issubclass(ldpcmarg.ResourceError, ldpcmarg.LdpcmargError)
    assert issubclass(ldpcmarg.ResourceError, MemoryError)
    code = ldpcmarg.load_code("hamming-7-4")
    monkeypatch.setenv("LDPCMARG_MEMORY_LIMIT", "1M")
    stop = StopRule(frame_errors=10, max_frames=10**9)
    with pytest.raises(ldpcmarg.ResourceError, match="--chunk-frames"):
        simulate(code, ["sum-product"], [2.0], stop=stop, chunk_frames=10**8)
    # the worker side checks too, before drawing the chunk's frames
    ctx = SweepContext(H=code.H, code_name=code.name, code_source=code.source, rate=code.rate,
                       decoders=("sum-product",), snr_kind="ebn0_db", seed=1,
                       random_codewords=False, key="k", link=None)
    with pytest.raises(ldpcmarg.ResourceError):
        run_chunk(ctx, ChunkTask(point_key=0, chunk_index=0, snr=2.0, frames=10**8,
                                 decoders=(0,)))


def test_cli_huge_chunk_frames_is_one_clear_error_in_a_subprocess(tmp_path):
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]),
               LDPCMARG_MEMORY_LIMIT="64M")
    store = tmp_path / "s.sqlite"
    # 10^6 frames x 504 bits of float64 LLRs alone are 4 GB, far above 64 MiB
    done = subprocess.run(
        [sys.executable, "-m", "ldpcmarg", "simulate", "peg-504-3-6", "-d", "min-sum",
         "--ebn0", "2", "--chunk-frames", "1000000", "--max-frames", "1000000",
         "--workers", "1", "-q", "--store", str(store)],
        env=env, capture_output=True, text=True, timeout=120)
    assert done.returncode == 2, done.stderr
    assert done.stderr.startswith("Error: A chunk of 1000000 frames")
    assert done.stderr.count("\n") == 1 and "--chunk-frames" in done.stderr
    assert "Traceback" not in done.stderr and not store.exists()
