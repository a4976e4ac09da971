"""Benchmark: cold solves vs hot re-solves of the local-polytope LP oracle.

For (3,6)-regular codes of length 504 and 1008 this measures, per call:

* cold solves (no basis) by the dual simplex, the primal simplex and the
  interior-point method with crossover;
* hot re-solves from the previous optimal basis after the objective changes
  by a relative amount eps (cost <- cost + eps * rms(cost) * N(0, 1), chained,
  as successive Frank-Wolfe gradients are), by the primal simplex, the dual
  simplex and HiGHS's own choice; and after a "new frame" (fresh costs);

with dense costs on the local codewords (the Frank-Wolfe oracle) and with
costs on bits only (LP decoding). Bit costs are BPSK-AWGN LLRs of the
all-zero word at Eb/N0 = 2 dB; local costs are N(0, 1).

Usage::

    python experiments/bench_lp_oracle.py [--sizes 504 1008] [--reps 5] [--cap 20]

Each row gives the median wall-clock time and the median CPU time of this
process per call (HiGHS runs single-threaded, so CPU time is the less noisy
figure on a shared machine; the speed-up columns use it). A call that
exceeds ``--cap`` seconds of wall time counts as infinitely slow in the
median; a row whose median is such a call reads "> cap" (a row stops after
two). A last section compares the two exact ML (MIP) formulations on small
codes.
"""

from __future__ import annotations

import argparse
import math
import platform
import statistics
import sys
import time
from pathlib import Path

import highspy
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from ldpcmarg.code.parity_check import ParityCheckCode  # noqa: E402
from ldpcmarg.decoders.lp import LocalPolytopeLP  # noqa: E402


def random_regular_code(n: int, dv: int = 3, dc: int = 6, seed: int = 0) -> ParityCheckCode:
    """Seeded random (dv, dc)-regular code by socket matching, double edges swapped away."""
    rng = np.random.default_rng(seed)
    m = n * dv // dc
    sockets = np.repeat(np.arange(n), dv)
    rng.shuffle(sockets)
    for _ in range(100000):
        rows = sockets.reshape(m, dc)
        bad = [c for c in range(m) if len(set(rows[c])) < dc]
        if not bad:
            break
        c = bad[0]
        pos = c * dc + int(rng.integers(dc))
        other = int(rng.integers(sockets.size))
        sockets[pos], sockets[other] = sockets[other], sockets[pos]
    else:  # pragma: no cover
        raise RuntimeError("could not remove double edges")
    H = np.zeros((m, n), dtype=np.uint8)
    H[np.repeat(np.arange(m), dc), sockets] = 1
    return ParityCheckCode(H, name=f"random-(3,6)-n{n}-seed{seed}")


def get_code(n: int) -> tuple[ParityCheckCode, str]:
    try:
        import ldpcmarg

        code = ldpcmarg.load_code(f"peg-{n}-3-6")
        return code, f"shipped peg-{n}-3-6"
    except Exception:
        return (random_regular_code(n, seed=n),
                f"seeded random (3,6) code (seed {n}); no shipped PEG code found")


def awgn_llr(rng, n, ebn0_db=2.0, rate=0.5):
    sigma2 = 1.0 / (2 * rate * 10 ** (ebn0_db / 10))
    y = 1.0 + np.sqrt(sigma2) * rng.normal(size=n)
    return 2 * y / sigma2


def fmt(t, cap):
    if t is None:
        return f"> {cap:g} s"
    return f"{t * 1e3:.1f} ms" if t < 1 else f"{t:.2f} s"


def median_or_none(ts):
    """Median with capped calls (None) counted as +inf; None if that median is capped."""
    if not ts:
        return None
    med = statistics.median([math.inf if t is None else t for t in ts])
    return None if math.isinf(med) else med


def too_many_capped(ts):
    """Stop a row once two calls hit the cap (bounds the running time)."""
    return sum(t is None for t in ts) >= 2


def timed_solve(lp, g, h, warm, cap):
    """One solve; returns (wall seconds, CPU seconds, solution), times None on the cap."""
    c0 = time.process_time()
    sol = lp.solve(g, h, warm=warm, time_limit=cap)
    cpu = time.process_time() - c0
    if sol.status == "time_limit":
        return None, None, sol
    if not sol.optimal:
        raise RuntimeError(f"solver status {sol.status}")
    return sol.seconds, cpu, sol


def _draw(rng, n, num_local, dense):
    g = awgn_llr(rng, n)
    h = rng.normal(size=num_local) if dense else None
    return g, h


HOT_VARIANTS = ("primal", "dual", "choose", "primal+fallback")


def bench_code(code, reps, cap, out, hot_variants=HOT_VARIANTS,
               cold_methods=("dual", "primal", "ipm")):
    rng = np.random.default_rng(12345)
    n = code.n
    probe = LocalPolytopeLP(code)
    L = probe.num_local
    out(f"model: {probe.num_cols} columns, {probe.num_rows} rows, "
        f"{probe.constraint_matrix().nnz} nonzeros")
    rows = []
    for dense in (True, False):
        label = "dense local costs" if dense else "bit costs only"
        # ---- cold solves
        cold = {}
        for method in cold_methods:
            lp = LocalPolytopeLP(code, cold_method=method)
            walls, cpus, its = [], [], []
            for _ in range(reps):
                g, h = _draw(rng, n, L, dense)
                t, c, sol = timed_solve(lp, g, h, False, cap)
                walls.append(t)
                cpus.append(c)
                its.append(sol.simplex_iterations)
                if too_many_capped(walls):
                    break
            cold[method] = median_or_none(cpus)
            rows.append((label, f"cold {method}", "-", median_or_none(walls), cold[method],
                         int(statistics.median(its)), None, None))
        best_cold = min((v for v in cold.values() if v is not None), default=None)
        dual_cold = cold.get("dual")
        # ---- hot re-solves
        for hot in hot_variants:
            for eps in (0.001, 0.01, 0.1, "new frame"):
                if hot == "primal+fallback":
                    # the default oracle: hot primal, cold again after max(1000, rows) iterations
                    lp = LocalPolytopeLP(code)
                else:
                    # raw hot starts, never given up
                    lp = LocalPolytopeLP(code, hot_method=hot, hot_iteration_limit=None)
                c_g, c_h = _draw(rng, n, L, dense)
                lp.solve(c_g, c_h, warm=False)
                k = reps if eps in ("new frame", 0.1) else 4 * reps
                walls, cpus, its = [], [], []
                for _ in range(k):
                    if eps == "new frame":
                        c_g, c_h = _draw(rng, n, L, dense)
                    else:
                        c_g = c_g + eps * np.sqrt(np.mean(c_g**2)) * rng.normal(size=n)
                        if c_h is not None:
                            c_h = c_h + eps * np.sqrt(np.mean(c_h**2)) * rng.normal(size=L)
                    t, c, sol = timed_solve(lp, c_g, c_h, True, cap)
                    walls.append(t)
                    cpus.append(c)
                    its.append(sol.simplex_iterations)
                    if too_many_capped(walls):
                        break
                med = median_or_none(cpus)
                r_dual = dual_cold / med if (med and dual_cold) else None
                r_best = best_cold / med if (med and best_cold) else None
                rows.append((label, f"hot {hot}" if hot != "primal+fallback" else "hot+fallbk",
                             str(eps), median_or_none(walls), med,
                             int(statistics.median(its)), r_dual, r_best))
    out(f"{'costs':<18} {'solve':<12} {'change':<10} {'wall/call':>10} {'CPU/call':>10} "
        f"{'simplex it':>10} {'cold dual/hot':>13} {'best cold/hot':>13}")

    def ratio(x):
        return "" if x is None else f"{x:.1f}x" if x < 10 else f"{x:.0f}x"

    for lab, solve, change, wall, cpu, it, r1, r2 in rows:
        out(f"{lab:<18} {solve:<12} {change:<10} {fmt(wall, cap):>10} {fmt(cpu, cap):>10} "
            f"{it:>10} {ratio(r1):>13} {ratio(r2):>13}")


def bench_mip(out, frames=10):
    """CPU time per frame of the two exact ML formulations on small codes."""
    from ldpcmarg.code import construct
    from ldpcmarg.decoders.lp import ParityMIP

    out("\n== block-ML MIP: CPU ms per frame (AWGN sigma = 0.9, LLRs of the all-zero word, "
        f"{frames} frames)")
    out(f"{'code':<22} {'local model, int bits':>22} {'parity MIP Hx = 2z':>20}")
    for code in (construct.golay24(), random_regular_code(48, seed=1),
                 random_regular_code(96, seed=2)):
        rng = np.random.default_rng(77)
        llrs = [2 * (1 + 0.9 * rng.normal(size=code.n)) / 0.81 for _ in range(frames)]
        res = []
        for model in (LocalPolytopeLP(code, integral_bits=True), ParityMIP(code)):
            c0 = time.process_time()
            for llr in llrs:
                if not model.solve(llr, time_limit=60).optimal:
                    raise RuntimeError("MIP not solved")
            res.append((time.process_time() - c0) / frames * 1e3)
        out(f"{code.name:<22} {res[0]:>22.0f} {res[1]:>20.0f}")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[504, 1008])
    ap.add_argument("--reps", type=int, default=5)
    ap.add_argument("--cap", type=float, default=20.0, help="seconds per call before giving up")
    ap.add_argument("--no-mip", action="store_true", help="skip the ML-MIP comparison")
    ap.add_argument("--hot", nargs="+", choices=HOT_VARIANTS, default=list(HOT_VARIANTS),
                    help="hot-start variants to time")
    ap.add_argument("--cold", nargs="+", choices=("dual", "primal", "ipm"),
                    default=["dual", "primal", "ipm"], help="cold methods to time")
    args = ap.parse_args(argv)
    out = print
    out(f"highspy {highspy.HIGHS_VERSION_MAJOR}.{highspy.HIGHS_VERSION_MINOR}."
        f"{highspy.HIGHS_VERSION_PATCH}, Python {platform.python_version()}, "
        f"{platform.machine()}, threads=1; medians of {args.reps} calls")
    for n in args.sizes:
        code, provenance = get_code(n)
        out(f"\n== n = {n}: {provenance}, {code.summary()['edges']} edges")
        t0 = time.perf_counter()
        bench_code(code, args.reps, args.cap, out, tuple(args.hot), tuple(args.cold))
        out(f"(section took {time.perf_counter() - t0:.0f} s)")
    if not args.no_mip:
        bench_mip(out)
    sys.stdout.flush()


if __name__ == "__main__":
    main()
