"""Frank–Wolfe convergence study: oracle calls and time to a relative duality gap.

On a small random (3,6)-regular code (n = 24, all-zero codeword, BPSK-AWGN),
for every Frank–Wolfe variant of the ``fw`` decoder with tree-reweighted
entropy weights (convex free energy, so the duality gap bounds ``F - F*``),
this records per frame the number of oracle calls and the wall time until the
relative gap ``gap / max(1, |F|)`` first falls below 1e-2, 1e-4 and 1e-6,
against Eb/N0 and against the entropy of the exact posterior
``H(p(x|y))`` (by enumeration of the 2^12 codewords). Runs are capped at a
number of oracle calls; a frame that does not reach a threshold is censored.

Variants: ``vanilla``, ``away``, ``pairwise`` and ``contracted`` from the
uniform point (the iteration of DESIGN.md §5), and the same four (``warm-*``)
started from reweighted sum-product beliefs with the same rho, made consistent
and interior (the decoder's default start; contraction then starts at
eps = 1e-3), and the same four (``rough-*``) from only 10 iterations of that
message passing (an unconverged start, as on frames where message passing
does not settle), which is what separates the variants once a start is
given. Warm-start time (message passing) is included in the seconds.
The HiGHS oracle (``LocalPolytopeLP``) is used throughout.

Usage::

    python experiments/fw_convergence.py            # full study (several minutes)
    python experiments/fw_convergence.py --quick    # about a minute

Writes ``experiments/results/fw_convergence.{json,md,png}``. Timings are
wall-clock on a machine shared with other jobs: treat them as indicative.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import ldpcmarg as lm  # noqa: E402
from ldpcmarg.code import gf2  # noqa: E402
from ldpcmarg.code.parity_check import ParityCheckCode  # noqa: E402
from ldpcmarg.decoders.frank_wolfe import consistent_interior_point, solve_frame  # noqa: E402
from ldpcmarg.link.channels import ebn0_to_sigma  # noqa: E402

OUT = Path(__file__).resolve().parent / "results"
THRESHOLDS = (1e-2, 1e-4, 1e-6)
BASE = ("vanilla", "away", "pairwise", "contracted")
VARIANTS = BASE + tuple(f"warm-{v}" for v in BASE) + tuple(f"rough-{v}" for v in BASE)


def regular_code(n: int, seed: int) -> ParityCheckCode:
    """Random (3,6)-regular code by socket matching without double edges."""
    rng = np.random.default_rng(seed)
    m = n // 2
    while True:
        sockets = rng.permutation(np.repeat(np.arange(n), 3)).reshape(m, 6)
        if all(len(set(r)) == 6 for r in sockets):
            H = np.zeros((m, n), dtype=np.uint8)
            for c, r in enumerate(sockets):
                H[c, r] = 1
            return ParityCheckCode(H, name=f"reg-3-6-{n}")


def exact_entropy(code, lam) -> float:
    """Entropy (nats) of p(x|y) ∝ exp(-<lam, x>) 1[Hx = 0], by enumeration."""
    B = gf2.nullspace(code.H.toarray()).astype(np.int64)
    k = B.shape[0]
    X = ((np.arange(2**k)[:, None] >> np.arange(k)) & 1) @ B % 2
    logw = -(X @ lam)
    mx = logw.max()
    w = np.exp(logw - mx)
    Z = w.sum()
    p = w / Z
    ln_z = np.log(Z) + mx
    return float(p @ (X @ lam) + ln_z)


def first_reach(trace, thr):
    rel = trace["gap"] / np.maximum(1.0, np.abs(trace["objective"]))
    hit = np.flatnonzero(rel <= thr)
    if hit.size == 0:
        return None, None, float(rel[-1])
    j = int(hit[0])
    return j + 1, float(trace["time"][j]), float(rel[-1])


def run(args):
    code = regular_code(24, 4)
    dec = lm.make_decoder("fw", code, entropy="trw", certificate="none")
    prob, oracle = dec._prob, dec._get_oracle()
    mp = lm.make_decoder("reweighted-sum-product", code, rho=dec.rho, damping=0.5)
    rows = []
    rng_master = np.random.SeedSequence(2026)
    # warm-up (numba compile, HiGHS model build)
    solve_frame(prob, oracle, np.ones(code.n), variant="vanilla", max_iter=3)
    for p_idx, ebn0 in enumerate(args.ebn0):
        sigma = ebn0_to_sigma(ebn0, code.rate)
        rng = np.random.default_rng(rng_master.spawn(p_idx + 1)[-1])
        for f in range(args.frames):
            lam = 2.0 * (1.0 + sigma * rng.standard_normal(code.n)) / sigma**2
            H = exact_entropy(code, lam)
            for v in VARIANTS:
                start = None
                t0 = time.perf_counter()
                if v.startswith(("warm", "rough")):
                    its = 5000 if v.startswith("warm") else 10
                    tb, tl = mp.beliefs(lam, max_iter=its, tol=1e-12)
                    start = consistent_interior_point(code, prob.lc, tb, tl)[:2]
                t_start = time.perf_counter() - t0
                r = solve_frame(prob, oracle, lam, variant=v.split("-")[-1],
                                eps0=1e-3 if start is not None else 0.1,
                                start=start, gap_tol=min(THRESHOLDS), max_iter=args.max_iter,
                                time_limit=args.time_cap, convex=True, trace=True)
                row = {"ebn0": ebn0, "frame": f, "variant": v, "entropy": H,
                       "calls": r.oracle_calls, "seconds": r.seconds + t_start,
                       "oracle_seconds": r.oracle_seconds, "status": r.status}
                for thr in THRESHOLDS:
                    it, sec, final = first_reach(r.trace, thr)
                    row[f"iters_{thr:g}"] = it
                    row[f"sec_{thr:g}"] = None if sec is None else sec + t_start
                    row["final_rel_gap"] = final
                rows.append(row)
            print(f"Eb/N0 {ebn0:4.1f} dB frame {f}: H = {H:.3g} nats; " + ", ".join(
                f"{r['variant']} {r['iters_1e-06'] or '>' + str(r['calls'])}"
                for r in rows[-len(VARIANTS):]), flush=True)
    return code, rows


def summarise(rows, ebn0s):
    table = []
    for v in VARIANTS:
        for e in ebn0s:
            sel = [r for r in rows if r["variant"] == v and r["ebn0"] == e]
            it6 = [r["iters_1e-06"] for r in sel if r["iters_1e-06"] is not None]
            s6 = [r["sec_1e-06"] for r in sel if r["sec_1e-06"] is not None]
            it4 = [r["iters_0.0001"] for r in sel if r["iters_0.0001"] is not None]
            table.append({
                "variant": v, "ebn0": e, "frames": len(sel),
                "reached_1e-4": len(it4) / len(sel), "reached_1e-6": len(it6) / len(sel),
                "median_iters_1e-6": float(np.median(it6)) if it6 else None,
                "median_sec_1e-6": float(np.median(s6)) if s6 else None,
                "median_final_rel_gap": float(np.median([r["final_rel_gap"] for r in sel])),
                "median_oracle_share": float(np.median(
                    [r["oracle_seconds"] / max(r["seconds"], 1e-12) for r in sel])),
            })
    return table


def markdown(table, args, code):
    lines = [
        f"# Frank–Wolfe convergence, TRW entropy, {code.name} (n = {code.n}), "
        f"cap {args.max_iter} oracle calls / {args.time_cap:g} s per frame, "
        f"{args.frames} frames per point",
        "",
        "| variant | Eb/N0 (dB) | reached 1e-4 | reached 1e-6 | median calls to 1e-6 | "
        "median s to 1e-6 | median final rel. gap | oracle share |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for t in table:
        def f(x, fmt):
            return "—" if x is None else format(x, fmt)
        lines.append(
            f"| {t['variant']} | {t['ebn0']:g} | {t['reached_1e-4']:.0%} | "
            f"{t['reached_1e-6']:.0%} | {f(t['median_iters_1e-6'], '.0f')} | "
            f"{f(t['median_sec_1e-6'], '.3f')} | {t['median_final_rel_gap']:.1e} | "
            f"{t['median_oracle_share']:.0%} |")
    return "\n".join(lines) + "\n"


def figure(rows, table, ebn0s, path, cap):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 3, figsize=(15, 4.3))
    markers = dict(zip(VARIANTS, "osD^osD^osD^", strict=True))
    for v in VARIANTS:
        sel = [t for t in table if t["variant"] == v]
        ls = "--" if v.startswith("warm") else (":" if v.startswith("rough") else "-")
        col = f"C{BASE.index(v.split('-')[-1])}"
        axes[0].semilogy([t["ebn0"] for t in sel], [max(t["median_final_rel_gap"], 1e-17)
                                                     for t in sel],
                         marker=markers[v], ls=ls, label=v, color=col)
        med = []
        for e in ebn0s:
            its = [r["iters_1e-06"] if r["iters_1e-06"] is not None else np.inf
                   for r in rows if r["variant"] == v and r["ebn0"] == e]
            med.append(min(np.median(its), cap * 1.5))
        axes[1].semilogy(ebn0s, med, marker=markers[v], ls=ls, label=v, color=col)
        pts = [r for r in rows if r["variant"] == v]
        axes[2].loglog([r["entropy"] for r in pts],
                       [r["iters_1e-06"] if r["iters_1e-06"] is not None else cap * 1.5
                        for r in pts], markers[v], alpha=0.6, label=v, color=col,
                       mfc="none" if v.startswith(("warm", "rough")) else None)
    axes[0].set(xlabel="Eb/N0 (dB)", ylabel="median relative gap at the cap",
                title="Where each variant ends")
    axes[1].axhline(cap, color="grey", ls=":", lw=1)
    axes[1].set(xlabel="Eb/N0 (dB)", ylabel="median oracle calls to rel. gap 1e-6",
                title=f"Calls to 1e-6 (above dotted line: not reached in {cap})")
    axes[2].axhline(cap, color="grey", ls=":", lw=1)
    axes[2].set(xlabel="entropy of the exact posterior (nats)",
                ylabel="oracle calls to rel. gap 1e-6", title="Per frame")
    for ax in axes:
        ax.grid(True, which="both", alpha=0.3)
    axes[0].legend(fontsize=6, ncol=3)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="about one minute")
    ap.add_argument("--frames", type=int, default=None)
    ap.add_argument("--max-iter", type=int, default=None)
    ap.add_argument("--time-cap", type=float, default=None, help="seconds per frame and variant")
    ap.add_argument("--out", type=Path, default=None,
                    help="output folder (default experiments/results, files tagged _quick "
                         "in quick mode); with --out the files are named fw_convergence.*")
    args = ap.parse_args()
    if args.quick:
        args.ebn0 = [1.0, 3.0, 5.0]
        args.frames = args.frames or 3
        args.max_iter = args.max_iter or 150
        args.time_cap = args.time_cap or 1.5
    else:
        args.ebn0 = [0.0, 1.0, 2.0, 3.0, 4.0, 5.0]
        args.frames = args.frames or 4
        args.max_iter = args.max_iter or 300
        args.time_cap = args.time_cap or 3.0
    out = args.out or OUT
    out.mkdir(parents=True, exist_ok=True)
    t0 = time.time()
    code, rows = run(args)
    table = summarise(rows, args.ebn0)
    tag = "fw_convergence_quick" if args.quick and args.out is None else "fw_convergence"
    (out / f"{tag}.json").write_text(json.dumps(
        {"code": code.summary(), "args": {k: (str(v) if isinstance(v, Path) else v)
                 for k, v in vars(args).items()},
         "rows": rows, "table": table}, indent=1))
    md = markdown(table, args, code)
    (out / f"{tag}.md").write_text(md)
    figure(rows, table, args.ebn0, out / f"{tag}.png", args.max_iter)
    print(md)
    print(f"total {time.time() - t0:.0f} s; wrote {out / tag}.{{json,md,png}}")


if __name__ == "__main__":
    main()
