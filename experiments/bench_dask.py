"""Throughput of the Dask executor (``local:N``) against one worker, and Dask's per-chunk cost.

Sum-product on the shipped PEG (3,6) code, n = 1008, at Eb/N0 = 2 dB, a
fixed number of frames (frame cap, no error target) so every configuration
decodes exactly the same frames. Configurations:

* ``inline, 1 thread``  - in-process, numba limited to one thread (one core);
* ``inline, default``   - in-process, numba frame-parallel on every core;
* ``local:1``, ``local:2`` - Dask LocalCluster with 1 or 2 single-threaded
  worker processes (cluster start-up is not timed; workers are warmed up).

Throughput is decoded frames per second of wall time. The per-chunk overhead
of Dask is measured with tiny chunks of the uncoded "hard-decision" decoder,
where the work per chunk is negligible: (wall time / chunks).

The machine is shared with other jobs; figures vary. Usage::

    python experiments/bench_dask.py [--frames 8000]
"""

from __future__ import annotations

import argparse
import logging
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout

import ldpcmarg as lm
from ldpcmarg.engine.executors import DaskExecutor, InlineExecutor
from ldpcmarg.engine.simulate import StopRule, simulate


def timed(code, dec, ebn0, frames, chunk, executor, seed=5):
    t0 = time.perf_counter()
    res = simulate(code, [dec], [ebn0], seed=seed, chunk_frames=chunk, executor=executor,
                   stop=StopRule(frame_errors=10**9, max_frames=frames))
    wall = time.perf_counter() - t0
    p = res.points[0]
    return wall, p.frames, p.frame_errors, res.timing["chunks"]


def main():
    import distributed

    ap = argparse.ArgumentParser()
    ap.add_argument("--code", default="peg-1008-3-6")
    ap.add_argument("--ebn0", type=float, default=2.0)
    ap.add_argument("--frames", type=int, default=8000)
    ap.add_argument("--chunk-frames", type=int, default=250)
    args = ap.parse_args()
    code = lm.load_code(args.code)
    dec = "sum-product"
    # warm up numba in this process
    lm.make_decoder(dec, code).decode(np.full((2, code.n), 2.0))

    rows = []
    wall, fr, fe, nch = timed(code, dec + ":threads=1", args.ebn0, args.frames, args.chunk_frames,
                              InlineExecutor())
    rows.append(("inline, 1 thread", wall, fr, fe, nch))
    wall, fr, fe, nch = timed(code, dec, args.ebn0, args.frames, args.chunk_frames,
                              InlineExecutor())
    rows.append(("inline, default threads", wall, fr, fe, nch))
    for n in (1, 2):
        with distributed.LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                      host="127.0.0.1", dashboard_address=None,
                                      silence_logs=logging.ERROR) as cluster:
            addr = cluster.scheduler_address
            # warm-up: every worker loads the numba kernels
            timed(code, dec, args.ebn0, 64 * n, 32, DaskExecutor(addr))
            wall, fr, fe, nch = timed(code, dec, args.ebn0, args.frames, args.chunk_frames,
                                      DaskExecutor(addr))
            rows.append((f"dask local:{n}", wall, fr, fe, nch))
            if n == 2:
                tiny = lm.ParityCheckCode(np.zeros((1, 8), dtype=np.uint8), name="uncoded-8")
                timed(tiny, "hard-decision", 5.0, 200, 1, DaskExecutor(addr))
                w_tiny, _, _, n_tiny = timed(tiny, "hard-decision", 5.0, 2000, 1,
                                             DaskExecutor(addr))
    w_inline, _, _, n_inline_tiny = timed(
        lm.ParityCheckCode(np.zeros((1, 8), dtype=np.uint8)), "hard-decision", 5.0, 2000, 1,
        InlineExecutor())

    print(f"{args.code} (n={code.n}), {dec}, Eb/N0 {args.ebn0} dB, {args.frames} frames, "
          f"chunks of {args.chunk_frames}")
    base = rows[0][1]
    for name, wall, fr, fe, nch in rows:
        print(f"  {name:24s} wall {wall:7.2f} s  {fr / wall:8.1f} frames/s  "
              f"x{base / wall:4.2f} vs 1 thread  ({fe} frame errors, {nch} chunks)")
    one = next(r for r in rows if r[0] == "dask local:1")[1]
    two = next(r for r in rows if r[0] == "dask local:2")[1]
    print(f"  local:2 vs local:1: x{one / two:.2f};  local:2 vs inline 1 thread: x{base / two:.2f}"
          "  (target >= 1.7)")
    print(f"  per-chunk overhead: dask local:2 {1e3 * w_tiny / n_tiny:.2f} ms/chunk "
          f"({n_tiny} one-frame chunks), in-process {1e3 * w_inline / n_inline_tiny:.2f} ms/chunk")


if __name__ == "__main__":
    main()
