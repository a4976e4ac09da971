"""Table: BP thresholds of LDPC ensembles by density evolution, beside the Shannon limits.

For a few regular ensembles, one irregular sample pair (our own choice) and the
Tanner graphs of two shipped codes, this prints

* the BEC threshold ``eps*`` (exact density evolution) and the capacity limit ``1 - R``;
* the BI-AWGN threshold ``sigma*`` and its Eb/N0 by discretised density evolution
  (default step 0.05, LLR range +-25), by the Gaussian approximation with ``phi`` by
  numerical integration, and with the closed-form ``phi``;
* the BI-AWGN Shannon limit (Eb/N0 at which capacity equals the design rate) and the gap;

then a step-refinement study of the discretised (3,6) threshold (how the quantised
decoder's threshold approaches 0.8809 as the step shrinks).

Timings are wall-clock and CPU time of this process; the machine is shared with
other jobs, so wall times are noisy. numba kernels are warmed up first.

Usage::

    python experiments/de_thresholds.py [--quick]

Writes ``experiments/results/de_thresholds.json`` and prints the tables.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from ldpcmarg.analysis.density_evolution import (  # noqa: E402
    DegreeDistribution,
    awgn_threshold_discretized,
    awgn_threshold_gaussian,
    bec_threshold,
)

OUT = Path(__file__).resolve().parent / "results" / "de_thresholds.json"


def timed(fn, *a, **k):
    w, c = time.perf_counter(), time.process_time()
    r = fn(*a, **k)
    return r, time.perf_counter() - w, time.process_time() - c


def ensembles(quick: bool):
    out = [DegreeDistribution.regular(3, 6), DegreeDistribution.regular(4, 8),
           DegreeDistribution.regular(3, 5)]
    if not quick:
        out += [DegreeDistribution.regular(3, 4), DegreeDistribution.regular(5, 10),
                DegreeDistribution.regular(3, 9)]
        irr = DegreeDistribution.from_edge_fractions({2: 0.3, 3: 0.4, 8: 0.3},
                                                     {6: 0.5, 7: 0.5},
                                                     label="sample irregular")
        out.append(irr)
        try:
            from ldpcmarg import load_code

            for name in ("peg-504-3-6", "peg-irr-2016"):
                out.append(DegreeDistribution.from_code(load_code(name)))
        except Exception as exc:  # shipped codes are optional for this table
            print(f"(shipped codes skipped: {exc})")
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="three ensembles, no refinement study")
    args = ap.parse_args()

    # warm-up: compile (or load cached) numba kernels outside the timings
    warm = DegreeDistribution.regular(3, 6)
    bec_threshold(warm, tol=1e-3)
    awgn_threshold_gaussian(warm, tol=1e-2)
    awgn_threshold_discretized(warm, step=0.5, llr_max=10.0, tol=1e-2, max_iter=50)

    rows = []
    hdr = (f"{'ensemble':34s} {'R':>6s} {'eps*':>8s} {'1-R':>6s} | {'sigma*':>7s} {'EbN0':>6s} "
           f"{'GA':>7s} {'GA dB':>6s} {'GAcf':>7s} | {'ShEbN0':>6s} {'gap':>6s} | "
           f"{'cpu DE':>6s} {'wall DE':>7s}")
    print(hdr)
    print("-" * len(hdr))
    for dd in ensembles(args.quick):
        bec, _, bec_cpu = timed(bec_threshold, dd)
        disc, disc_wall, disc_cpu = timed(awgn_threshold_discretized, dd)
        ga, _, ga_cpu = timed(awgn_threshold_gaussian, dd)
        gacf = awgn_threshold_gaussian(dd, phi_form="closed-form")
        label = dd.label if len(dd.label) <= 34 else dd.label[:31] + "..."
        print(f"{label:34s} {dd.design_rate:6.4f} {bec.threshold:8.5f} {1 - dd.design_rate:6.4f} | "
              f"{disc.threshold:7.5f} {disc.ebn0_db:6.3f} {ga.threshold:7.5f} {ga.ebn0_db:6.3f} "
              f"{gacf.threshold:7.5f} | {disc.capacity_ebn0_db:6.3f} {disc.gap_db:6.3f} | "
              f"{disc_cpu:6.2f} {disc_wall:7.2f}")
        rows.append({"ensemble": dd.to_dict(), "bec": bec.to_dict(), "discretized": disc.to_dict(),
                     "gaussian": ga.to_dict(), "gaussian_closed_form": gacf.to_dict(),
                     "cpu_s": {"bec": bec_cpu, "discretized": disc_cpu, "gaussian": ga_cpu},
                     "wall_s": {"discretized": disc_wall}})

    refine = []
    if not args.quick:
        print("\n(3,6) discretised threshold vs quantisation step (LLR range +-25, tol 2e-5)")
        print(f"{'step':>6s} {'sigma*':>9s} {'EbN0 dB':>8s} {'iters':>6s} {'cpu s':>7s} "
              f"{'wall s':>7s}")
        for step in (0.2, 0.1, 0.05, 0.025, 0.0125):
            r, w, c = timed(awgn_threshold_discretized, warm, step=step, tol=2e-5)
            print(f"{step:6.4f} {r.threshold:9.6f} {r.ebn0_db:8.4f} {r.iterations:6d} "
                  f"{c:7.2f} {w:7.2f}")
            refine.append({"step": step, "sigma": r.threshold, "ebn0_db": r.ebn0_db,
                           "bracket": r.tolerance, "cpu_s": c, "wall_s": w})
        print("reference: sigma* = 0.8809 (Richardson & Urbanke, Modern Coding Theory)")

    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps({"ensembles": rows, "step_refinement_36": refine}, indent=1))
    print(f"\nwritten {OUT}")


if __name__ == "__main__":
    main()
