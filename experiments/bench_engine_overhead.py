"""Engine overhead of the Monte Carlo simulator against pure decoding time.

Sum-product on the shipped PEG (3,6) code, n = 1008, at Eb/N0 = 2 dB, run
in-process (``workers=1``) into an on-disk results store. The decoders'
own time is measured inside the chunk around ``decode``; everything else
(channel sampling, seeding, error counting, the store's transactions,
scheduling) is engine overhead. Target: overhead <= 10 % of wall time.

Usage::

    python experiments/bench_engine_overhead.py [--frames 20000] [--chunk-frames N]

The machine is shared; figures vary from run to run.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout

import ldpcmarg as lm
from ldpcmarg.engine.simulate import StopRule, default_chunk_frames, simulate
from ldpcmarg.engine.store import Store


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--code", default="peg-1008-3-6")
    ap.add_argument("--decoder", default="sum-product")
    ap.add_argument("--ebn0", type=float, default=2.0)
    ap.add_argument("--frames", type=int, default=20_000)
    ap.add_argument("--chunk-frames", type=int, default=None)
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    code = lm.load_code(args.code)
    chunk = args.chunk_frames or default_chunk_frames(code.n)
    # warm-up: compile / load the numba kernels outside the measurement
    dec = lm.make_decoder(args.decoder, code)
    dec.decode(np.full((4, code.n), 3.0))
    simulate(code, [args.decoder], [args.ebn0], stop=StopRule(1, 64), chunk_frames=64)

    rows = []
    for rep in range(args.repeats):
        with tempfile.TemporaryDirectory() as d:
            path = os.path.join(d, "bench.sqlite")
            t0 = time.perf_counter()
            with Store.open_writer(path, code) as st:
                res = simulate(code, [args.decoder], [args.ebn0], seed=100 + rep,
                               stop=StopRule(frame_errors=10**9, max_frames=args.frames),
                               chunk_frames=chunk, store=st, workers=1)
            wall = time.perf_counter() - t0
        t = res.timing
        dec_s = t["decoder_seconds"]
        rows.append((wall, dec_s, t["channel_seconds"], t["store_seconds"], t["chunks"]))
        p = res.points[0]
        print(f"rep {rep}: {p.frames} frames, {p.frame_errors} frame errors, "
              f"wall {wall:.2f} s, decoding {dec_s:.2f} s, channel {t['channel_seconds']:.3f} s, "
              f"store {t['store_seconds']:.3f} s, chunks {t['chunks']}, "
              f"overhead {100 * (1 - dec_s / wall):.1f} %")
    wall, dec_s, ch, stv, nch = np.median(np.array(rows), axis=0)
    other = wall - dec_s - ch - stv
    print(f"\n{args.code} (n={code.n}), {args.decoder}, Eb/N0 {args.ebn0} dB, "
          f"{args.frames} frames in chunks of {chunk}; median of {args.repeats}:")
    print(f"  wall             {wall:8.3f} s")
    print(f"  decoding         {dec_s:8.3f} s  ({100 * dec_s / wall:5.1f} %)")
    print(f"  channel          {ch:8.3f} s  ({100 * ch / wall:5.1f} %)")
    print(f"  store            {stv:8.3f} s  ({100 * stv / wall:5.1f} %)")
    print(f"  other bookkeeping{other:8.3f} s  ({100 * other / wall:5.1f} %)")
    print(f"  engine overhead  {100 * (1 - dec_s / wall):5.1f} %  (target <= 10 %)")
    print(f"  per chunk        {1e3 * (wall - dec_s) / nch:.2f} ms engine, "
          f"{1e3 * dec_s / nch:.1f} ms decoding")


if __name__ == "__main__":
    main()
