"""Study: decoder cost against code length and iterations, and LP-oracle cost against n.

Writes ``experiments/results/throughput_scaling/`` with

* ``length_scaling.csv`` / ``.md`` — per decoder and length n (random (3,6)-regular
  codes, n = 504 … 16128): seconds per frame, edge-updates per second and
  decoded information Mbit/s at a fixed number of iterations (early stop off,
  so every frame costs the same and the figure measures the kernel, not the
  channel);
* ``iteration_scaling.csv`` — seconds per frame against the iteration cap at
  n = 1008;
* ``lp_scaling.csv`` — LP-oracle seconds per call against n: a cold solve of
  plain LP decoding (costs on bits only), a cold solve with dense costs on local
  codewords, and a hot re-solve after a 1 % objective change;
* ``throughput_scaling.png`` — the three panels.

Usage::

    python experiments/throughput_scaling.py            # full study (~5-10 min on 2 cores)
    python experiments/throughput_scaling.py --quick    # smoke run (< 1 min)

Timings are wall-clock on whatever else the machine is doing; numba kernels
are compiled (and cached) before anything is timed.
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import ldpcmarg as lm  # noqa: E402
from ldpcmarg.code.construct import random_regular  # noqa: E402

OUT = Path(__file__).resolve().parent / "results" / "throughput_scaling"

DECODERS = ["sum-product", "min-sum:alpha=0.75", "layered-sum-product"]


def channel_llr(code, ebn0_db: float, frames: int, seed: int) -> np.ndarray:
    """All-zero codeword over BPSK-AWGN at Eb/N0 (dB) for the code's rate."""
    ch = lm.make_channel("awgn", ebn0_db=ebn0_db, rate=code.rate)
    rng = np.random.default_rng(seed)
    return ch.sample_llr(np.zeros((frames, code.n), dtype=np.uint8), rng)


def time_decoder(spec: str, code, llr: np.ndarray, iterations: int) -> tuple[float, int]:
    """Seconds for one decode of the batch, and iterations actually performed in total."""
    sep = "," if ":" in spec else ":"
    dec = lm.make_decoder(f"{spec}{sep}max_iter={iterations},early_stop=false", code)
    dec.decode(llr[:2])  # compile / load the numba cache outside the timing
    t0 = time.perf_counter()
    res = dec.decode(llr)
    return time.perf_counter() - t0, int(res.iterations.sum())


def length_scaling(lengths, frames, iterations, rows):
    for n in lengths:
        code = random_regular(n, 3, 6, seed=1)
        llr = channel_llr(code, 2.0, frames, seed=n)
        for spec in DECODERS:
            sec, its = time_decoder(spec, code, llr, iterations)
            rows.append({
                "decoder": spec, "n": n, "frames": frames, "iterations": iterations,
                "sec_per_frame": sec / frames,
                "edge_updates_per_s": code.num_edges * its / sec,
                "info_mbit_per_s": code.k * frames / sec / 1e6,
            })
            print(f"n={n:6d} {spec:24s} {sec / frames * 1e3:8.3f} ms/frame "
                  f"{rows[-1]['edge_updates_per_s']:.3g} edge-updates/s", flush=True)


def iteration_scaling(caps, frames, rows):
    code = random_regular(1008, 3, 6, seed=1)
    llr = channel_llr(code, 2.0, frames, seed=7)
    for spec in DECODERS[:2]:
        for cap in caps:
            sec, _ = time_decoder(spec, code, llr, cap)
            rows.append({"decoder": spec, "n": 1008, "iterations": cap,
                         "sec_per_frame": sec / frames})


def lp_scaling(lengths, reps, rows):
    from ldpcmarg.decoders.lp import LocalPolytopeLP

    for n in lengths:
        code = random_regular(n, 3, 6, seed=1)
        rng = np.random.default_rng(n)
        lp = LocalPolytopeLP(code)
        L = lp.local_codewords.count
        cold_bits, cold_dense, hot = [], [], []
        for r in range(reps):
            llr = channel_llr(code, 2.0, 1, seed=100 + r)[0]
            t0 = time.perf_counter()
            lp.solve(llr, None, warm=False).require_optimal()
            cold_bits.append(time.perf_counter() - t0)
            h = rng.standard_normal(L)
            t0 = time.perf_counter()
            lp.solve(llr, h, warm=False).require_optimal()
            cold_dense.append(time.perf_counter() - t0)
            scale = 0.01 * np.sqrt(np.mean(np.concatenate([llr, h]) ** 2))
            t0 = time.perf_counter()
            lp.solve(llr + scale * rng.standard_normal(n), h + scale * rng.standard_normal(L),
                     warm=True).require_optimal()
            hot.append(time.perf_counter() - t0)
        rows.append({"n": n, "columns": n + L, "cold_bits_only_s": float(np.median(cold_bits)),
                     "cold_dense_s": float(np.median(cold_dense)),
                     "hot_1pct_s": float(np.median(hot))})
        print(f"LP n={n:6d} cold(bits) {rows[-1]['cold_bits_only_s']:.3f} s  "
              f"cold(dense) {rows[-1]['cold_dense_s']:.3f} s  "
              f"hot 1% {rows[-1]['hot_1pct_s']:.4f} s",
              flush=True)


def write_csv(path: Path, rows: list[dict]) -> None:
    with path.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)


def write_markdown(path: Path, rows: list[dict]) -> None:
    lines = ["| decoder | n | ms/frame | edge-updates/s | info Mbit/s |", "|---|---|---|---|---|"]
    for r in rows:
        lines.append(f"| {r['decoder']} | {r['n']} | {r['sec_per_frame'] * 1e3:.3f} | "
                     f"{r['edge_updates_per_s']:.3g} | {r['info_mbit_per_s']:.2f} |")
    path.write_text("\n".join(lines) + "\n")


def plot(length_rows, iter_rows, lp_rows, path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 3, figsize=(15, 4.5))
    ax = axes[0]
    for spec in DECODERS:
        rs = [r for r in length_rows if r["decoder"] == spec]
        ax.loglog([r["n"] for r in rs], [r["sec_per_frame"] * 1e3 for r in rs], "o-", label=spec)
    ax.set_xlabel("code length n (bits)")
    ax.set_ylabel("decoding time per frame (ms)")
    ax.set_title(f"(3,6) codes, {length_rows[0]['iterations']} iterations, no early stop")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend()
    ax = axes[1]
    for spec in DECODERS[:2]:
        rs = [r for r in iter_rows if r["decoder"] == spec]
        ax.plot([r["iterations"] for r in rs], [r["sec_per_frame"] * 1e3 for r in rs], "o-",
                label=spec)
    ax.set_xlabel("iterations (fixed, no early stop)")
    ax.set_ylabel("decoding time per frame (ms)")
    ax.set_title("n = 1008")
    ax.grid(True, alpha=0.3)
    ax.legend()
    ax = axes[2]
    ns = [r["n"] for r in lp_rows]
    ax.loglog(ns, [r["cold_bits_only_s"] for r in lp_rows], "o-",
              label="cold, LP decoding (bit costs)")
    ax.loglog(ns, [r["cold_dense_s"] for r in lp_rows], "s-", label="cold, dense local costs")
    ax.loglog(ns, [r["hot_1pct_s"] for r in lp_rows], "^-", label="hot re-solve, 1 % change")
    ax.set_xlabel("code length n (bits)")
    ax.set_ylabel("HiGHS time per call (s)")
    ax.set_title("local-polytope LP oracle")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend()
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, for a smoke run")
    ap.add_argument("--out", type=Path, default=OUT)
    args = ap.parse_args(argv)
    if args.quick:
        lengths, frames, iters, caps = [504, 1008], 50, 10, [5, 10]
        lp_lengths, reps = [96, 504], 1
    else:
        lengths = [504, 1008, 2016, 4032, 8064, 16128]
        frames, iters, caps, lp_lengths, reps = 400, 30, [5, 10, 20, 40, 80], [504, 1008, 2016], 3
    args.out.mkdir(parents=True, exist_ok=True)
    length_rows, iter_rows, lp_rows = [], [], []
    length_scaling(lengths, frames, iters, length_rows)
    iteration_scaling(caps, frames, iter_rows)
    lp_scaling(lp_lengths, reps, lp_rows)
    write_csv(args.out / "length_scaling.csv", length_rows)
    write_markdown(args.out / "length_scaling.md", length_rows)
    write_csv(args.out / "iteration_scaling.csv", iter_rows)
    write_csv(args.out / "lp_scaling.csv", lp_rows)
    plot(length_rows, iter_rows, lp_rows, args.out / "throughput_scaling.png")
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
