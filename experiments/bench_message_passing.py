"""Throughput of the message-passing kernels (scalar and lane) against scalar C references.

Run from the repository root::

    python experiments/bench_message_passing.py [--frames 2000] [--repeats 3] [--out FILE]

What it does
------------
* Code: the shipped PEG (3,6) code ``peg-1008-3-6`` (n = 1008, 3024 edges); if
  it cannot be loaded, a seeded random (3,6) code of the same size (said so).
* Frames: the all-zero codeword, BPSK over AWGN at Eb/N0 = 1.5 and 2.5 dB,
  ``--frames`` frames per point (seeded, the same LLRs for every decoder),
  at most 50 iterations, syndrome early stop.
* ldpcmarg: the scalar kernels (``kernel="scalar"``, one frame at a time) and
  the frame-interleaved lane kernels of ``ldpcmarg.decoders.vectorised``
  (``kernel="lanes"``; float32/float64 min-sum and sum-product, fixed-point
  min-sum in the shared int8 format), 1 and 2 threads.
* References, compiled here with ``gcc -O3 -march=native`` and called through
  ctypes on the same LLR arrays: ``c_reference/flooding.c`` (plain scalar C)
  and ``c_reference/flooding_tuned.c`` (branch-free signs, select-based
  minima, exp/log box-plus). "2 threads" for C = two Python threads each
  decoding half of the frames (ctypes releases the GIL).
* Runs alternate: every repeat runs every implementation once, in reversed
  order on odd repeats; each figure is the median over repeats of wall time
  and of process CPU time (all threads). The JIT is warmed up first.
* Figures: edge-updates/s (edges x iterations actually performed / wall
  second), the same per CPU second, frames/s, FER, mean iterations, and the
  ratio of each ldpcmarg row to the tuned C row of the same decoder and thread
  count (wall time).
"""

from __future__ import annotations

import argparse
import ctypes
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import ldpcmarg as lm  # noqa: E402
from ldpcmarg.code.parity_check import ParityCheckCode  # noqa: E402
from ldpcmarg.decoders import vectorised  # noqa: E402
from ldpcmarg.decoders.message_passing import _Threads  # noqa: E402
from ldpcmarg.link.channels import make_channel  # noqa: E402


def cpu_seconds() -> float:
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


def get_code():
    try:
        return lm.load_code("peg-1008-3-6"), "shipped PEG (3,6) code peg-1008-3-6"
    except Exception as exc:  # noqa: BLE001 - fall back, and say so
        rng = np.random.default_rng(1008)
        n, m = 1008, 504
        var_of = np.repeat(np.arange(n), 3)[rng.permutation(3 * n)]
        H = np.zeros((m, n), dtype=np.uint8)
        H[np.repeat(np.arange(m), 6), var_of] = 1
        return ParityCheckCode(H, name="random-1008-3-6"), (
            f"RANDOM (3,6) code, seed 1008 (peg-1008-3-6 unavailable: {exc})")


def build_c(name: str, symbol: str, extra_double: int):
    """Compile ``c_reference/<name>.c``; returns (ctypes function, gcc version) or (None, why)."""
    gcc = shutil.which("gcc")
    if gcc is None:
        return None, "gcc not found"
    out = Path(tempfile.mkdtemp(prefix="ldpcmarg-cref-")) / f"{name}.so"
    cmd = [gcc, "-O3", "-march=native", "-shared", "-fPIC", "-o", str(out),
           str(HERE / "c_reference" / f"{name}.c"), "-lm"]
    subprocess.run(cmd, check=True)
    fn = getattr(ctypes.CDLL(str(out)), symbol)
    P = ctypes.c_void_p
    fn.argtypes = ([ctypes.c_int] * 3 + [P] * 5 + [ctypes.c_int, ctypes.c_int]
                   + [ctypes.c_double] * extra_double + [P] * 3)
    fn.restype = ctypes.c_int
    version = subprocess.run([gcc, "--version"], capture_output=True, text=True).stdout
    return fn, version.split("\n")[0]


class CDecoder:
    """ctypes wrapper of a C reference, with the frame batch split over threads."""

    def __init__(self, fn, code, mode, params, max_iter):
        self.fn, self.code, self.mode, self.params, self.max_iter = (fn, code, mode, params,
                                                                     max_iter)
        c = code
        self.arrays = [np.ascontiguousarray(a, dtype=np.int64)
                       for a in (c.check_ptr, c.edge_var, c.var_ptr, c.var_edges)]

    def _run(self, llr, post, iters, valid):
        c = self.code
        ptr = [a.ctypes.data for a in self.arrays]
        rc = self.fn(llr.shape[0], c.n, c.m, *ptr, llr.ctypes.data, self.max_iter, self.mode,
                     *self.params, post.ctypes.data, iters.ctypes.data, valid.ctypes.data)
        assert rc == 0

    def decode(self, llr, threads):
        F = llr.shape[0]
        post = np.empty_like(llr)
        iters = np.zeros(F, dtype=np.int64)
        valid = np.zeros(F, dtype=np.uint8)
        bounds = np.linspace(0, F, threads + 1).astype(int)
        jobs = [threading.Thread(target=self._run, args=(llr[a:b], post[a:b], iters[a:b],
                                                         valid[a:b]))
                for a, b in zip(bounds[:-1], bounds[1:], strict=True) if b > a]
        for j in jobs:
            j.start()
        for j in jobs:
            j.join()
        return iters, valid.astype(bool)


def implementations(code, cplain, ctuned, max_iter):
    """(decoder label, implementation label, threads, callable(llr) -> (iters, valid))."""
    rows = []

    def numba_row(label, impl, name, th, **opts):
        dec = lm.make_decoder(name, code, max_iter=max_iter, threads=th, **opts)

        def run(llr, dec=dec):
            r = dec.decode(llr)
            return r.iterations, r.valid
        rows.append((label, impl, th, run))

    def fixed_row(label, impl, th, **opts):
        def run(llr, th=th):
            with _Threads(th):
                _, it, ok = vectorised.decode_fixed_point_lanes(code, llr, max_iter=max_iter,
                                                                threads=th, **opts)
            return it, ok
        rows.append((label, impl, th, run))

    def c_row(label, impl, fn, mode, params, th):
        dec = CDecoder(fn, code, mode, params, max_iter)
        rows.append((label, impl, th, lambda llr, dec=dec, th=th: dec.decode(llr, th)))

    for th in (1, 2):
        sp, ms, oms = "sum-product", "min-sum a=0.75", "offset min-sum b=0.5"
        numba_row(sp, "numba scalar f64", "sum-product", th, kernel="scalar")
        numba_row(sp, "numba lanes f64", "sum-product", th, kernel="lanes")
        numba_row(sp, "numba lanes f32", "sum-product", th, kernel="lanes", precision="float32")
        numba_row(ms, "numba scalar f64", "min-sum", th, kernel="scalar", alpha=0.75)
        numba_row(ms, "numba lanes f64", "min-sum", th, kernel="lanes", alpha=0.75)
        numba_row(ms, "numba lanes f32", "min-sum", th, kernel="lanes", alpha=0.75,
                  precision="float32")
        fixed_row(ms, "numba lanes int8 q=6", th, q=6, step=0.5, rule="normalised",
                  alpha=0.75)
        numba_row(oms, "numba scalar f64", "offset-min-sum", th, kernel="scalar", beta=0.5)
        numba_row(oms, "numba lanes f32", "offset-min-sum", th, kernel="lanes", beta=0.5,
                  precision="float32")
        fixed_row(oms, "numba lanes int8 q=6", th, q=6, step=0.5, rule="offset", beta_steps=1)
        numba_row("layered min-sum a=0.75", "numba scalar f64", "layered-min-sum", th,
                  kernel="scalar", alpha=0.75)
        numba_row("layered min-sum a=0.75", "numba lanes f32", "layered-min-sum", th,
                  kernel="lanes", alpha=0.75, precision="float32")
        if cplain is not None:
            c_row(sp, "C plain", cplain, 0, (1.0,), th)
            c_row(ms, "C plain", cplain, 1, (0.75,), th)
        if ctuned is not None:
            c_row(sp, "C tuned", ctuned, 0, (1.0, 0.0), th)
            c_row(ms, "C tuned", ctuned, 1, (0.75, 0.0), th)
            c_row(oms, "C tuned", ctuned, 1, (1.0, 0.5), th)
    return rows


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--frames", type=int, default=2000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--max-iter", type=int, default=50)
    ap.add_argument("--out", type=Path, default=None, help="also write the table (markdown)")
    args = ap.parse_args(argv)

    code, code_note = get_code()
    cplain, cver = build_c("flooding", "decode_batch", 1)
    ctuned, _ = build_c("flooding_tuned", "decode_tuned", 2)
    E = code.num_edges
    load0 = os.getloadavg()
    lines = [
        f"code: {code_note}; n={code.n}, m={code.m}, k={code.k}, edges={E}",
        f"frames per point: {args.frames}, max_iter {args.max_iter}, median of "
        f"{args.repeats} alternating runs; lane width {vectorised.LANES} frames",
        f"C references: {cver if cplain else 'not available: ' + cver} "
        "(-O3 -march=native): flooding.c (plain), flooding_tuned.c (tuned)",
        f"machine: {os.cpu_count()} logical CPUs, load average at start "
        f"{load0[0]:.1f} / {load0[1]:.1f} (1 / 5 min). The machine was shared with other "
        "jobs: wall figures are noisy; CPU-second figures are steadier.",
        "",
        "| Eb/N0 | decoder | impl | threads | frames/s | edge-upd/s (wall) | edge-upd/CPU-s "
        "| x tuned C (wall) | FER | mean iter |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    print("\n".join(lines), flush=True)
    impls = implementations(code, cplain, ctuned, args.max_iter)
    for ebn0 in (1.5, 2.5):
        rng = np.random.default_rng(int(ebn0 * 1000))
        ch = make_channel("awgn", ebn0_db=ebn0, rate=code.rate)
        llr = np.ascontiguousarray(
            ch.sample_llr(np.zeros((args.frames, code.n), dtype=np.uint8), rng))
        for _, _, _, run in impls:                       # warm-up (JIT, caches)
            run(llr[:70])
        walls = [[] for _ in impls]
        cpus = [[] for _ in impls]
        results = [None] * len(impls)
        for rep in range(args.repeats):
            order = range(len(impls)) if rep % 2 == 0 else reversed(range(len(impls)))
            for j in order:
                c0, t0 = cpu_seconds(), time.perf_counter()
                results[j] = impls[j][3](llr)
                walls[j].append(time.perf_counter() - t0)
                cpus[j].append(cpu_seconds() - c0)
        tuned_wall = {}
        for j, (label, impl, th, _) in enumerate(impls):
            if impl == "C tuned":
                iters = results[j][0]
                tuned_wall[(label, th)] = E * int(iters.sum()) / float(np.median(walls[j]))
        for j, (label, impl, th, _) in enumerate(impls):
            iters, valid = results[j]
            tot = int(iters.sum())
            wall, cpu = float(np.median(walls[j])), float(np.median(cpus[j]))
            rate = E * tot / wall
            base = tuned_wall.get((label.replace("layered ", ""), th))
            ratio = f"{rate / base:.2f}" if base and "layered" not in label else "-"
            line = (f"| {ebn0:g} dB | {label} | {impl} | {th} | {len(iters) / wall:,.0f} | "
                    f"{rate:.3g} | {E * tot / max(cpu, 1e-9):.3g} | {ratio} | "
                    f"{1 - valid.mean():.4f} | {iters.mean():.2f} |")
            lines.append(line)
            print(line, flush=True)
    load1 = os.getloadavg()
    lines.append("")
    lines.append(f"load average at end {load1[0]:.1f} / {load1[1]:.1f} (1 / 5 min)")
    print(lines[-1])
    if args.out:
        args.out.write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
