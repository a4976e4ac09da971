"""Speed of the link: 16-QAM channel + exact demapping vs sum-product; fixed vs float min-sum.

Run from the repository root::

    python experiments/bench_link.py [--frames 2000] [--repeats 5] [--quick]

What it measures (one thread everywhere: numba set to 1 thread)
---------------------------------------------------------------
1. ``peg-1008-3-6`` with Gray 16-QAM, exact demapper, AWGN, all-zero word plus
   the scrambler (the engine's path): wall time of :meth:`Link.sample_llr`
   (scrambler, modulation, noise, exact LLRs) and of a sum-product decode
   (registry defaults: 50 iterations, early stop) of the same frames, at the
   16-QAM waterfall (Eb/N0 = 4.0 and 4.5 dB, FER about 1e-1 and 1e-2).
   Share = channel / (channel + decoder).
2. Fixed-point min-sum (``fixed-min-sum:q=6,step=0.5``) vs float min-sum
   (``min-sum``, registry defaults), BPSK-AWGN at Eb/N0 = 2.0 and 2.5 dB, the
   same frames, runs alternating (fixed, float, fixed, float, ...). Reported:
   best-of-repeats wall seconds per frame and per iteration, and the ratio.

Both sides of every ratio run in the same process, alternating, after the JIT
is warmed up. The machine is shared and loaded (2 cores, other jobs running):
absolute times are noisy; the best-of-N figures and the ratios of alternating
runs are the ones to read. Results go to ``experiments/results/bench_link.md``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import numba as nb  # noqa: E402

import ldpcmarg as lm  # noqa: E402
from ldpcmarg.link.channels import make_channel  # noqa: E402
from ldpcmarg.link.link import Link  # noqa: E402


def _best(fn, repeats):
    best = np.inf
    out = None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=2000)
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--quick", action="store_true", help="small run (smoke test)")
    ap.add_argument("--out", default=str(HERE / "results" / "bench_link.md"))
    a = ap.parse_args(argv)
    frames, repeats = (100, 2) if a.quick else (a.frames, a.repeats)
    nb.set_num_threads(1)
    code = lm.load_code("peg-1008-3-6")
    lines = ["# bench_link: link generation/demapping share and fixed- vs float-point min-sum",
             "", f"peg-1008-3-6, {frames} frames per point, best of {repeats} alternating runs, "
             "1 thread. Shared, loaded 2-core machine: absolute times are noisy.", ""]

    # ---- 1. 16-QAM channel share of a sum-product sweep
    link = Link.build(code, modulation="qam16")
    sp = lm.make_decoder("sum-product:threads=1", code)
    zeros = np.zeros((frames, code.n), dtype=np.uint8)
    link.sample_llr(zeros[:4], 10.0, np.random.default_rng(0))
    sp.decode(np.full((2, code.n), 3.0))
    lines += ["## 16-QAM exact demapping vs sum-product (registry defaults)", "",
              "| Eb/N0 dB | FER | mean iter | channel ms/frame | decoder ms/frame | "
              "channel share |", "|---|---|---|---|---|---|"]
    for eb in (4.0, 4.5):
        es = link.esn0_linear(eb)
        tc, td = np.inf, np.inf
        res = None
        for r in range(repeats):
            rng = np.random.default_rng(100 + r)
            t = time.perf_counter()
            llr = link.sample_llr(zeros, es, rng)
            t1 = time.perf_counter()
            res = sp.decode(llr)
            t2 = time.perf_counter()
            tc, td = min(tc, t1 - t), min(td, t2 - t1)
        fer = 1 - res.valid.mean()
        lines.append(f"| {eb:g} | {fer:.3g} | {res.iterations.mean():.1f} | "
                     f"{1e3 * tc / frames:.3f} | {1e3 * td / frames:.3f} | "
                     f"{100 * tc / (tc + td):.1f} % |")

    # ---- 2. fixed vs float min-sum on the same frames
    fx = lm.make_decoder("fixed-min-sum:q=6,step=0.5,threads=1", code)
    fl = lm.make_decoder("min-sum:threads=1", code)
    for d in (fx, fl):
        d.decode(np.full((2, code.n), 3.0))
    lines += ["", "## fixed-min-sum:q=6,step=0.5 vs min-sum, BPSK-AWGN, same frames", "",
              "| Eb/N0 dB | fixed ms/frame | float ms/frame | fixed us/iter | float us/iter | "
              "float/fixed time | FER fixed | FER float |", "|---|---|---|---|---|---|---|---|"]
    for eb in (2.0, 2.5):
        llr = make_channel("awgn", ebn0_db=eb, rate=code.rate).sample_llr(
            zeros, np.random.default_rng(7))
        bx, bl = np.inf, np.inf
        rx = rl = None
        for _ in range(repeats):
            t = time.perf_counter()
            rx = fx.decode(llr)
            t1 = time.perf_counter()
            rl = fl.decode(llr)
            t2 = time.perf_counter()
            bx, bl = min(bx, t1 - t), min(bl, t2 - t1)
        ix, il = rx.iterations.sum(), rl.iterations.sum()
        lines.append(f"| {eb:g} | {1e3 * bx / frames:.3f} | {1e3 * bl / frames:.3f} | "
                     f"{1e6 * bx / max(ix, 1):.2f} | {1e6 * bl / max(il, 1):.2f} | "
                     f"{bl / bx:.2f} | {1 - rx.valid.mean():.3g} | {1 - rl.valid.mean():.3g} |")
    text = "\n".join(lines) + "\n"
    print(text)
    if not a.quick:
        Path(a.out).write_text(text)
        print(f"wrote {a.out}")


if __name__ == "__main__":
    main()
