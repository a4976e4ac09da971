"""Benchmark: ordered-statistics decoding of order 2 on a rate-1/2, n = 128 code.

Code: a PEG (3-regular bits) n = 128, m = 64 parity-check matrix built by
``ldpcmarg.code.construct.peg(128, 64, 3, seed=1)`` (k = 64). Channel: BPSK
over AWGN, all-zero codeword, Eb/N0 = 1.0, 2.0, 3.0 dB (plus 4.0 dB with
``--full``). Decoder: ``osd:order=2`` as registered (lossless branch cut on),
and for comparison ``osd:order=2,stop_prob=0.001`` (probabilistic stopping
rule), ``osd:order=1`` and sum-product with registry defaults, all on the
same frames in one process, one thread (numba kernels here are serial).

Figures: frames per second of wall time and per CPU second (process time),
the mean number of candidate codewords evaluated, and the FER. numba is
warmed up on a small batch first, so compile time is not counted. The
machine is shared with other jobs: wall times are noisy, per-CPU-second
figures less so; the methods alternate per repetition to spread the noise.

Usage::

    python experiments/bench_osd.py [--frames 4000] [--reps 3] [--full] [--quick]

Writes ``experiments/results/bench_osd.json`` and ``bench_osd.md``.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import ldpcmarg as lm  # noqa: E402
from ldpcmarg.code import construct  # noqa: E402

RESULTS = Path(__file__).resolve().parent / "results"
METHODS = ["osd:order=2", "osd:order=2,stop_prob=0.001", "osd:order=1", "sum-product"]


def llr_batch(n, rate, ebn0_db, frames, seed):
    rng = np.random.default_rng(seed)
    sigma = math.sqrt(1.0 / (2.0 * rate * 10.0 ** (ebn0_db / 10.0)))
    return np.ascontiguousarray(2.0 * (1.0 + sigma * rng.standard_normal((frames, n))) / sigma**2)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=4000)
    ap.add_argument("--reps", type=int, default=3)
    ap.add_argument("--full", action="store_true", help="Also 4 dB.")
    ap.add_argument("--quick", action="store_true", help="Smoke test: few frames, no files.")
    args = ap.parse_args(argv)
    frames, reps = (200, 1) if args.quick else (args.frames, args.reps)
    code = construct.peg(128, 64, 3, seed=1)
    snrs = [1.0, 2.0] if args.quick else ([1.0, 2.0, 3.0, 4.0] if args.full else [1.0, 2.0, 3.0])
    decs = {m: lm.make_decoder(m, code) for m in METHODS}
    warm = llr_batch(code.n, code.rate, 2.0, 16, seed=0)
    for d in decs.values():
        d.decode(warm)
    rows = []
    for snr in snrs:
        llr = llr_batch(code.n, code.rate, snr, frames, seed=int(10 * snr) + 1)
        acc = {m: {"wall": 0.0, "cpu": 0.0} for m in METHODS}
        out = {}
        for rep in range(reps):
            order = METHODS if rep % 2 == 0 else METHODS[::-1]
            for m in order:
                w0, c0 = time.perf_counter(), time.process_time()
                res = decs[m].decode(llr)
                acc[m]["wall"] += time.perf_counter() - w0
                acc[m]["cpu"] += time.process_time() - c0
                out[m] = res
        for m in METHODS:
            res = out[m]
            pats = res.info.get("osd_patterns")
            rows.append({
                "decoder": m, "ebn0_db": snr, "frames": frames, "reps": reps,
                "frames_per_s_wall": frames * reps / acc[m]["wall"],
                "frames_per_cpu_s": frames * reps / max(acc[m]["cpu"], 1e-12),
                "mean_candidates": None if pats is None else float(np.mean(pats)),
                "fer": float(res.bits.any(axis=1).mean()),
            })
            r = rows[-1]
            cand = "-" if r["mean_candidates"] is None else f"{r['mean_candidates']:.0f}"
            print(f"{snr:4.1f} dB  {m:30s} {r['frames_per_s_wall']:9.0f} fr/s wall "
                  f"{r['frames_per_cpu_s']:9.0f} fr/CPU-s  cand {cand:>6s}  FER {r['fer']:.3e}",
                  flush=True)
    if args.quick:
        return rows
    meta = {"code": code.name, "n": code.n, "k": code.k, "python": platform.python_version(),
            "numpy": np.__version__, "cpus": os.cpu_count(), "machine": platform.machine(),
            "note": ("shared machine (about 9 jobs on 2 cores): wall times are noisy; "
                     "one thread; numba warmed up first")}
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / "bench_osd.json").write_text(json.dumps({"meta": meta, "rows": rows}, indent=2)
                                            + "\n")
    lines = ["# OSD order 2 on a rate-1/2, n = 128 code (one thread)", "",
             f"Code {code.name} (n = {code.n}, k = {code.k}); BPSK-AWGN, all-zero word; "
             f"{frames} frames x {reps} repetitions per point. {meta['note']}.", "",
             "| Eb/N0 dB | decoder | frames/s (wall) | frames per CPU-s | mean candidates | FER |",
             "|---|---|---|---|---|---|"]
    for r in rows:
        cand = "-" if r["mean_candidates"] is None else f"{r['mean_candidates']:.0f}"
        lines.append(f"| {r['ebn0_db']:.1f} | `{r['decoder']}` | {r['frames_per_s_wall']:.0f} | "
                     f"{r['frames_per_cpu_s']:.0f} | {cand} | {r['fer']:.3e} |")
    (RESULTS / "bench_osd.md").write_text("\n".join(lines) + "\n")
    print(f"wrote {RESULTS / 'bench_osd.json'} and bench_osd.md")
    return rows


if __name__ == "__main__":
    main()
