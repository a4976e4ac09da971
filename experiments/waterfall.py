"""Study: waterfall (BER/FER against Eb/N0) of the shipped codes under every decoder family.

For each code the study runs paired Monte Carlo sweeps over BPSK-AWGN and
draws BER and FER with Clopper–Pearson / per-frame-ratio error bars, the
uncoded BPSK reference, the BI-AWGN Shannon limit for the code's rate and the
density-evolution BP threshold of the code's degree distribution. Decoders:
sum-product, layered sum-product, normalised min-sum (α = 0.75), offset
min-sum (β = 0.5), LP decoding, Frank–Wolfe marginals (short codes only, where
the LP oracle is affordable) and block-ML (codes small enough for the MIP).
Expensive decoders get a smaller frame cap than message passing; each group is
its own sweep on the same seed, so within a group frames are shared.

Writes ``experiments/results/waterfall/``: ``waterfall.csv``, ``waterfall.md``
and one ``<code>.png`` per code.

Usage::

    python experiments/waterfall.py           # full study (about 10 min on 2 shared cores)
    python experiments/waterfall.py --quick   # smoke run (about 1 min)

Simulated error rates are statistical estimates on a model channel; see the
README's caution.
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
from ldpcmarg.engine.simulate import StopRule, simulate  # noqa: E402
from ldpcmarg.plots.curves import curves_from_sweep, plot_curves  # noqa: E402
from ldpcmarg.plots.style import default_title, iteration_cap  # noqa: E402

OUT = Path(__file__).resolve().parent / "results" / "waterfall"

MESSAGE_PASSING = ["sum-product", "layered-sum-product", "min-sum:alpha=0.75",
                   "offset-min-sum:beta=0.5"]

# code name -> (Eb/N0 grid in dB, groups of (decoder specs, StopRule))
FULL = {
    "golay-24-12": (np.arange(0.0, 6.01, 1.0), [
        (MESSAGE_PASSING, StopRule(frame_errors=100, max_frames=20_000)),
        (["lp", "ml", "fw:entropy=trw,max_iter=200"], StopRule(frame_errors=50, max_frames=400)),
    ]),
    "tanner-155-64": (np.arange(0.0, 4.01, 1.0), [
        (MESSAGE_PASSING, StopRule(frame_errors=100, max_frames=20_000)),
        (["lp"], StopRule(frame_errors=50, max_frames=400)),
    ]),
    "peg-504-3-6": (np.arange(0.5, 3.01, 0.5), [
        (MESSAGE_PASSING, StopRule(frame_errors=100, max_frames=20_000)),
        (["lp"], StopRule(frame_errors=30, max_frames=200)),
    ]),
    "peg-1008-3-6": (np.arange(0.5, 2.51, 0.5), [
        (MESSAGE_PASSING, StopRule(frame_errors=100, max_frames=10_000)),
    ]),
    "peg-irr-2016": (np.arange(0.25, 1.76, 0.25), [
        (["sum-product", "layered-sum-product", "min-sum:alpha=0.75"],
         StopRule(frame_errors=50, max_frames=5_000)),
    ]),
    "array-1455-1166": (np.arange(2.5, 4.51, 0.5), [
        (["sum-product", "min-sum:alpha=0.75"], StopRule(frame_errors=50, max_frames=5_000)),
    ]),
}

QUICK = {
    "golay-24-12": (np.array([1.0, 3.0]), [
        (["sum-product", "min-sum:alpha=0.75"], StopRule(frame_errors=20, max_frames=500)),
        (["lp", "ml"], StopRule(frame_errors=5, max_frames=20)),
    ]),
    "peg-504-3-6": (np.array([1.0, 2.0]), [
        (["sum-product", "layered-sum-product"], StopRule(frame_errors=10, max_frames=300)),
    ]),
}


def de_threshold(code, quick: bool) -> float | None:
    """BP threshold Eb/N0 (dB) of the code's degree distribution (None if it fails)."""
    from ldpcmarg.analysis.density_evolution import DegreeDistribution, compute_threshold

    try:
        dd = DegreeDistribution.from_code(code)
        res = compute_threshold(dd, "awgn", "gaussian" if quick else "discretized")
        return res.ebn0_db
    except lm.LdpcmargError as exc:
        print(f"  (no threshold for {code.name}: {exc})")
        return None


def figure_title(code, specs) -> str:
    """Code, n, k, channel and the iteration cap most decoders share; other caps by name.

    The default title lists every decoder's cap when they differ, which is wider
    than the figure when a group of several decoders shares one cap.
    """
    text = default_title([(code.name, code.n, code.k)], "ebn0_db", [])
    caps = {s: c for s in specs if (c := iteration_cap(s)) is not None}
    if not caps:
        return text
    values = list(caps.values())
    common = max(set(values), key=values.count)
    text += f", at most {common} iterations"
    others = [f"{s.split(':')[0]} {c}" for s, c in caps.items() if c != common]
    return text + (f" ({', '.join(others)})" if others else "")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="two codes, two points, few frames")
    ap.add_argument("--workers", type=int, default=None,
                    help="worker processes (default: all cores)")
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--out", type=Path, default=OUT)
    args = ap.parse_args(argv)
    plan = QUICK if args.quick else FULL
    workers = 1 if args.quick else args.workers
    args.out.mkdir(parents=True, exist_ok=True)
    rows = []
    for name, (grid, groups) in plan.items():
        code = lm.load_code(name)
        print(f"{name}: n={code.n} k={code.k} rate={code.rate:.3f}", flush=True)
        curves = []
        for specs, stop in groups:
            t0 = time.perf_counter()
            res = simulate(code, specs, [float(x) for x in grid], seed=args.seed, stop=stop,
                           workers=workers)
            print(res.table())
            print(f"  ({time.perf_counter() - t0:.1f} s)", flush=True)
            curves += curves_from_sweep(res, code_label="")
            for p in res.points:
                d = p.to_dict()
                rows.append({"code": name, "decoder": d["decoder"], "ebn0_db": d["ebn0_db"],
                             "frames": d["frames"], "frame_errors": d["frame_errors"],
                             "fer": d["fer"], "fer_ci_lo": d["fer_ci"][0],
                             "fer_ci_hi": d["fer_ci"][1], "ber": d["ber"],
                             "ber_ci_lo": d["ber_ci"][0], "ber_ci_hi": d["ber_ci"][1],
                             "avg_iterations": d["avg_iterations"]})
        thr = de_threshold(code, args.quick)
        if thr is not None and not (grid.min() - 3.0 <= thr <= grid.max() + 3.0):
            # Dense short codes (Golay) have degree distributions whose BP
            # threshold says nothing about the finite code; keep the axes useful.
            print(f"  (BP threshold {thr:.2f} dB far outside the grid; not drawn)")
            thr = None
        thresholds = {} if thr is None else {
            f"BP threshold ({'Gaussian approx.' if args.quick else 'density evolution'})": thr}
        specs = [s for group, _ in groups for s in group]
        plot_curves(curves, args.out / f"{name}.png", thresholds=thresholds,
                    title=figure_title(code, specs))
    with (args.out / "waterfall.csv").open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    lines = ["| code | decoder | Eb/N0 (dB) | frames | frame errors | FER | BER |",
             "|---|---|---|---|---|---|---|"]
    for r in rows:
        lines.append(f"| {r['code']} | {r['decoder']} | {r['ebn0_db']:g} | {r['frames']} | "
                     f"{r['frame_errors']} | {r['fer']:.3g} | {r['ber']:.3g} |")
    (args.out / "waterfall.md").write_text("\n".join(lines) + "\n")
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
