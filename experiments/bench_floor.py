"""Error-floor estimate by importance sampling against plain Monte Carlo: time and speed-up.

Sum-product on the shipped Tanner (155,64) code. The trapping-set search and
the importance-sampling estimate run at one high Eb/N0 on two worker
processes; plain Monte Carlo decodes a fixed number of frames at the same
point with the same two workers (batched, registry defaults) to measure its
frames per second. The speed-up is

    (equivalent plain frames / IS wall seconds) / (plain frames / plain wall seconds)

where the equivalent plain frames are ``FER (1 - FER) / Var(FER estimate)``.
The search time is reported separately and included in the total.

The machine is shared with other jobs: wall times are noisy. Usage::

    python experiments/bench_floor.py --quick      # about a minute
    python experiments/bench_floor.py              # full: target <= 10 min
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout

import ldpcmarg as lm
from ldpcmarg.analysis.error_structures import search_structures
from ldpcmarg.engine.executors import make_executor
from ldpcmarg.engine.importance_sampling import Bias, FloorStop, estimate_floor
from ldpcmarg.engine.simulate import StopRule, simulate

OUT = Path(__file__).resolve().parent / "results"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--code", default="tanner-155-64")
    ap.add_argument("--ebn0", type=float, default=None)
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args(argv)
    quick = args.quick
    ebn0 = args.ebn0 if args.ebn0 is not None else (5.0 if quick else 7.0)
    candidates = 300 if quick else 4000
    max_frames = 6_000 if quick else 400_000
    budget = 60.0 if quick else 480.0
    code = lm.load_code(args.code)
    dec = "sum-product"
    # warm up numba (compile or load the cache) outside the timings
    simulate(code, [dec], [ebn0], seed=0, stop=StopRule(frame_errors=1, max_frames=64),
             workers=1)
    t0 = time.perf_counter()
    ss = search_structures(code, dec, ebn0, seed=1, max_candidates=candidates,
                           codeword_budget=50, max_structures=1000)
    t_search = time.perf_counter() - t0
    biases = [Bias(s.bits, s.shift) for s in ss.structures]
    t1 = time.perf_counter()
    res = estimate_floor(code, dec, biases, [ebn0], seed=2,
                         stop=FloorStop(rel_half_width=0.5 if not quick else 1.0,
                                        max_frames=max_frames, time_budget=budget),
                         executor=make_executor(args.workers), pilot_frames=512)
    t_is = time.perf_counter() - t1
    p = res.points[0]
    plain_frames = 20_000 if quick else 100_000
    t2 = time.perf_counter()
    mc = simulate(code, [dec], [ebn0], seed=3,
                  stop=StopRule(frame_errors=10**9, max_frames=plain_frames),
                  workers=args.workers).points[0]
    t_mc = time.perf_counter() - t2
    mc_rate = mc.frames / t_mc
    eq = p.equivalent_frames or 0.0
    is_rate = eq / t_is if t_is > 0 else 0.0
    doc = {
        "code": code.name, "decoder": dec, "ebn0_db": ebn0, "mode": "quick" if quick else "full",
        "workers": args.workers,
        "search": {"seconds": round(t_search, 2), "structures": len(ss.structures),
                   "candidates": candidates, "lightest": [s.to_dict() for s in ss.structures[:3]],
                   "notes": ss.notes},
        "importance_sampling": {**p.to_dict(), "wall_seconds": round(t_is, 2)},
        "plain_monte_carlo": {"frames": mc.frames, "frame_errors": mc.frame_errors,
                              "wall_seconds": round(t_mc, 2),
                              "frames_per_second": round(mc_rate, 1)},
        "equivalent_frames_per_second": round(is_rate, 1),
        "speed_up": round(is_rate / mc_rate, 1) if mc_rate > 0 else None,
        "total_seconds": round(t_search + t_is, 2),
        "note": "shared 2-core machine; wall times are noisy. Speed-up counts the IS "
                "estimate only; total_seconds adds the search.",
    }
    OUT.mkdir(exist_ok=True)
    path = OUT / f"bench_floor{'_quick' if quick else ''}.json"
    path.write_text(json.dumps(doc, indent=1))
    rhw = p.rel_half_width
    print(f"{code.name} {dec} Eb/N0 {ebn0:g} dB: FER {p.fer:.3g} [{p.fer_ci[0]:.3g}, "
          f"{p.fer_ci[1]:.3g}] trustworthy={p.trustworthy} rel. half-width "
          f"{'-' if rhw is None else f'{rhw:.2f}'}")
    print(f"search {t_search:.1f} s ({len(ss.structures)} structures), IS {t_is:.1f} s, "
          f"{p.frames} frames, equivalent {eq:.3g} plain frames")
    print(f"plain MC {mc_rate:.0f} frames/s; IS {is_rate:.3g} equivalent frames/s; "
          f"speed-up {doc['speed_up']}")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
