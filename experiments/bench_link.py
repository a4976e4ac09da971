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
2. Fixed-point min-sum (``fixed-min-sum:q=6,step=0.5``, registry defaults:
   ``kernel=auto``, i.e. the int8 lane kernels for batches of 64+ frames) vs
   float min-sum (``min-sum``, registry defaults, i.e. its own ``auto`` choice:
   the float lanes for these batches), BPSK-AWGN at Eb/N0 = 2.0 and 2.5 dB, the
   same frames, one batch of all frames per call, runs alternating (fixed,
   float, fixed scalar, fixed, float, ...). The scalar fixed-point kernel
   (``kernel=scalar``) and float min-sum with ``precision=float32`` (an
   opt-in, also on lanes) run in the same rotation for reference. Reported:
   best-of-repeats wall seconds per frame and per iteration, the ratio of the
   best wall times, the median of the per-round wall ratios, and the ratio of
   the best process CPU times (numba on one thread, so CPU time is the
   decoder's own work, less disturbed by other jobs than wall time).

``--part channel`` or ``--part fixed`` runs one part and replaces only its
section of the results file.

Both sides of every ratio run in the same process, alternating, after the JIT
is warmed up. The machine is shared and loaded (2 cores, other jobs running):
absolute times are noisy; the best-of-N figures and the ratios of alternating
runs are the ones to read. Results go to ``experiments/results/bench_link.md``.
"""

from __future__ import annotations

import argparse
import os
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
    ap.add_argument("--part", choices=("all", "channel", "fixed"), default="all",
                    help="run one part only and replace its section of the results file")
    ap.add_argument("--out", default=str(HERE / "results" / "bench_link.md"))
    a = ap.parse_args(argv)
    frames, repeats = (100, 2) if a.quick else (a.frames, a.repeats)
    nb.set_num_threads(1)
    code = lm.load_code("peg-1008-3-6")
    zeros = np.zeros((frames, code.n), dtype=np.uint8)
    head = ["# bench_link: link generation/demapping share and fixed- vs float-point min-sum",
            "", "peg-1008-3-6, 1 thread (numba set to 1 thread), both sides of every ratio "
            "in the same process, alternating. Shared, loaded 2-core machine (other jobs "
            "running): absolute times are noisy; read the ratios.", ""]
    sections = {}
    if a.part in ("all", "channel"):
        sections["channel"] = _channel_part(code, zeros, frames, repeats)
    if a.part in ("all", "fixed"):
        sections["fixed"] = _fixed_part(code, zeros, frames, repeats)
    out = Path(a.out)
    if a.part != "all" and out.exists():
        old = _split_sections(out.read_text())
        old.update(sections)
        sections = old
    text = "\n".join(head + [line for key in ("channel", "fixed") if key in sections
                             for line in sections[key]]) + "\n"
    print(text)
    if not a.quick:
        out.write_text(text)
        print(f"wrote {out}")


_TITLES = {"channel": "## 16-QAM exact demapping", "fixed": "## fixed-min-sum"}


def _split_sections(text):
    """The sections of an existing results file, keyed as ``_TITLES``."""
    sections, key = {}, None
    for line in text.splitlines():
        if line.startswith("## "):
            key = next((k for k, t in _TITLES.items() if line.startswith(t)), None)
            if key:
                sections[key] = []
        if key:
            sections[key].append(line)
    return sections


def _load():
    try:
        return "load average {:.1f} {:.1f} {:.1f}".format(*os.getloadavg())
    except OSError:
        return "load average unknown"


def _channel_part(code, zeros, frames, repeats):
    """Section 1: 16-QAM channel generation + exact demapping vs a sum-product decode."""
    lines = []
    link = Link.build(code, modulation="qam16")
    sp = lm.make_decoder("sum-product:threads=1", code)
    link.sample_llr(zeros[:4], 10.0, np.random.default_rng(0))
    sp.decode(np.full((2, code.n), 3.0))
    lines += [f"{_TITLES['channel']} vs sum-product (registry defaults)", "",
              f"{frames} frames per point, best of {repeats} runs ({_load()} at the start).",
              "",
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

    lines.append("")
    return lines


def _fixed_part(code, zeros, frames, repeats):
    """Section 2: fixed-point min-sum (default kernel) vs float min-sum (default kernel)."""
    sides = {"fixed": lm.make_decoder("fixed-min-sum:q=6,step=0.5,threads=1", code),
             "float": lm.make_decoder("min-sum:threads=1", code),
             "fixed scalar": lm.make_decoder("fixed-min-sum:q=6,step=0.5,threads=1,"
                                             "kernel=scalar", code),
             "float32": lm.make_decoder("min-sum:threads=1,precision=float32", code)}
    warm = np.full((80, code.n), 3.0)  # 80 >= 64 frames: compiles the lane kernels too
    for d in sides.values():
        d.decode(warm)
        d.decode(warm[:2])
    kern = {"fixed": "lanes" if sides["fixed"]._use_lanes(frames) else "scalar",
            "float": "lanes" if sides["float"]._use_lanes(frames, 0.0) else "scalar"}
    lines = [f"{_TITLES['fixed']}:q=6,step=0.5 vs min-sum, BPSK-AWGN, same frames", "",
             f"{frames} frames per point in one batch per call, {repeats} rounds of "
             f"(fixed, float, fixed scalar, float32) ({_load()} at the start). Kernels chosen by "
             f"the registry defaults (`kernel=auto`): fixed-min-sum -> {kern['fixed']}, "
             f"min-sum -> {kern['float']}; for reference the scalar fixed-point kernel and "
             "float min-sum with its opt-in `precision=float32` (lanes too). "
             "Times are best of the rounds; \"median\" is the median of the per-round wall "
             "ratios; \"CPU\" the ratio of the best process CPU times.", "",
             "| Eb/N0 dB | fixed ms/frame | float ms/frame | fixed scalar ms/frame | "
             "fixed us/iter | float us/iter | float/fixed wall | median | CPU | "
             "float/fixed-scalar wall | float32/fixed wall | FER fixed | FER float |",
             "|---|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for eb in (2.0, 2.5):
        llr = make_channel("awgn", ebn0_db=eb, rate=code.rate).sample_llr(
            zeros, np.random.default_rng(7))
        wall = {k: [] for k in sides}
        cpu = {k: [] for k in sides}
        res = {}
        for _ in range(repeats):
            for k, d in sides.items():
                t, c = time.perf_counter(), time.process_time()
                res[k] = d.decode(llr)
                wall[k].append(time.perf_counter() - t)
                cpu[k].append(time.process_time() - c)
        assert np.array_equal(res["fixed"].posterior_llr, res["fixed scalar"].posterior_llr)
        bx, bl, bs, b32 = (min(wall[k]) for k in ("fixed", "float", "fixed scalar", "float32"))
        med = float(np.median(np.array(wall["float"]) / np.array(wall["fixed"])))
        cr = min(cpu["float"]) / max(min(cpu["fixed"]), 1e-12)
        ix, il = res["fixed"].iterations.sum(), res["float"].iterations.sum()
        lines.append(f"| {eb:g} | {1e3 * bx / frames:.3f} | {1e3 * bl / frames:.3f} | "
                     f"{1e3 * bs / frames:.3f} | {1e6 * bx / max(ix, 1):.2f} | "
                     f"{1e6 * bl / max(il, 1):.2f} | {bl / bx:.2f} | {med:.2f} | {cr:.2f} | "
                     f"{bl / bs:.2f} | {b32 / bx:.2f} | {1 - res['fixed'].valid.mean():.3g} | "
                     f"{1 - res['float'].valid.mean():.3g} |")
    lines += ["", "The fixed-point lanes give bit for bit the scalar fixed-point results "
              "(checked in this run and in `tests/test_fixed_point.py`)."]
    return lines


if __name__ == "__main__":
    main()
