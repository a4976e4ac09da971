"""Benchmark: GF(2) rank and systematic-encoder construction for rate-1/2 codes.

Run from the repository root::

    python experiments/bench_gf2_encoder.py [--sizes 1008 4032 16128] [--repeats 3]

Codes are random (3, 6)-regular (configuration model, seed 0). For each size
the table gives the best of ``--repeats`` wall-clock times for

* ``rank``     -- sparse H packed into uint64 rows + forward elimination;
* ``encoder``  -- Gauss-Jordan elimination, information set and packed parity
                  map (what ``code.encoder`` builds);
* ``encode``   -- encoding 1000 random messages with the packed parity map
                  (reported as frames per second);
* ``girth``    -- girth and number of shortest cycles (BFS from every bit);
* ``baseline`` -- the plain Gauss-Jordan kernel that XORs whole rows
                  (``gf2._row_reduce_kernel``), for comparison (skipped above
                  n = 4032 unless --baseline-all).

numba kernels are compiled (warmed up) on a small matrix before timing.
Timings depend on the machine and its load; they are not assertions.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from ldpcmarg.code import construct as C  # noqa: E402
from ldpcmarg.code import gf2  # noqa: E402
from ldpcmarg.code.parity_check import SystematicEncoder  # noqa: E402


def best_of(fn, repeats):
    best, out = np.inf, None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def baseline_rank(H):
    dense = gf2.pack_matrix(H)
    piv = np.full(H.shape[0], -1, dtype=np.int64)
    return gf2._row_reduce_kernel(dense, H.shape[1], np.arange(H.shape[1], dtype=np.int64), piv)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1008, 4032, 16128])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--frames", type=int, default=1000)
    ap.add_argument("--baseline-all", action="store_true")
    args = ap.parse_args(argv)

    # warm-up: compile every kernel once
    w = C.random_regular(96, 3, 6, seed=1)
    gf2.rank(w.H)
    SystematicEncoder(w).encode(np.zeros((2, w.k), dtype=np.uint8))
    baseline_rank(w.H)
    w.girth_and_cycles()

    rng = np.random.default_rng(0)
    head = (f"{'n':>6} {'m':>6} {'rank':>6} {'k':>6} {'rank [s]':>9} {'encoder [s]':>11} "
            f"{'encode [frames/s]':>18} {'girth':>5} {'girth [s]':>9} {'baseline GJ [s]':>15}")
    print(head)
    print("-" * len(head))
    for n in args.sizes:
        code = C.random_regular(n, 3, 6, seed=0)
        t_rank, r = best_of(lambda code=code: gf2.rank(code.H), args.repeats)
        t_enc, enc = best_of(lambda code=code: SystematicEncoder(code), args.repeats)
        msgs = rng.integers(0, 2, size=(args.frames, enc.k), dtype=np.uint8)
        t_cw, cw = best_of(lambda enc=enc, msgs=msgs: enc.encode(msgs), args.repeats)
        assert np.all(code.is_codeword(cw)) and np.array_equal(enc.extract(cw), msgs)
        t_g = time.perf_counter()
        g, _cycles = C.random_regular(n, 3, 6, seed=0).girth_and_cycles()
        t_g = time.perf_counter() - t_g
        if n <= 4032 or args.baseline_all:
            t_base, rb = best_of(lambda code=code: baseline_rank(code.H), 1)
            assert rb == r
            base = f"{t_base:15.3f}"
        else:
            base = f"{'skipped':>15}"
        print(f"{n:6d} {code.m:6d} {r:6d} {enc.k:6d} {t_rank:9.3f} {t_enc:11.3f} "
              f"{args.frames / t_cw:18.0f} {g:5d} {t_g:9.3f} {base}", flush=True)


if __name__ == "__main__":
    main()
