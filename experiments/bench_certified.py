"""Benchmark: certified tree-reweighted marginals against sum-product, same thread count.

For the shipped PEG (3,6) codes (n = 504 and n = 1008) at Eb/N0 = 1.5 and
2.5 dB (BPSK-AWGN, all-zero codeword, TRW weights rho from 200 sampled
hyperforests) this measures, in one process per thread count
(``NUMBA_NUM_THREADS`` set in the child's environment, 1 and 2 threads), with
the two sides interleaved frame by frame so that load from other jobs on the
shared machine hits both alike:

* sum-product with the registry defaults (``sum-product``: 50 iterations,
  syndrome early stop) and with ``early_stop=false``: a batch of all frames in
  one ``decode`` call (batched per-frame time = call time / frames) and
  single-frame ``decode`` calls (latency);
* ``fw:entropy=trw`` (registry defaults otherwise, ``gap_tol=1e-4``): the
  batch in one call and single-frame calls; a frame counts as certified when
  ``info["certified_gap"] / max(1, |F|) <= 1e-4`` (the Lagrangian
  certificate, ``>= F(tau) - F*`` for this convex F);
* where the fw time goes, from the phases of its batched certified route
  (``fw.last_phase_seconds``): message passing (first run and the polishing
  sweeps between certificate checks), projection + certificates, and the rest
  (per-frame fallback of frames the batched route did not certify, Python);
* a study of the batched route of ``ldpcmarg.decoders.certified``: fw's
  setting (peeled projection; Anderson memory 3 on sweeps with frames across
  SIMD lanes, float32 lanes up to the first certificate; first certificate at a
  5e-3 message change, then every 3 sweeps; entropic certificate with Heskes'
  allocation), the same with float64 lanes throughout, the previous default
  (one frame at a time, first certificate at a 1e-2 change), and the route
  before it (Newton
  projection with the uniform mix, first certificate at a 3e-5 message change,
  then every 4 sweeps).

Times are wall-clock medians; CPU time of the process is recorded beside
them. Ratios are fw / sum-product per frame, same thread count, same frames.

Usage::

    python experiments/bench_certified.py [--frames 12] [--threads 1 2] [--quick]

Writes ``experiments/results/bench_certified.json`` and ``bench_certified.md``;
the README's certified-marginals table is the markdown table of that file
(``tests/test_bench_certified_readme.py`` checks that they agree).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

REL_GAP = 1e-4
RESULTS = ROOT / "experiments" / "results"
BEGIN = "<!-- bench_certified:begin -->"
END = "<!-- bench_certified:end -->"


def awgn_llr(code, ebn0_db, rng, frames):
    # sigma^2 = 1 / (2 R 10^(EbN0/10)), LLR = 2 y / sigma^2 (DESIGN.md §2), all-zero word
    sigma = np.sqrt(1.0 / (2.0 * code.rate * 10 ** (ebn0_db / 10.0)))
    y = 1.0 + sigma * rng.normal(size=(frames, code.n))
    return 2.0 * y / sigma**2


def pt_fw_batch(fw_b):
    return float(np.median([x[0] for x in fw_b]))


def timed(fn, *a):
    w, c = time.perf_counter(), time.process_time()
    out = fn(*a)
    return out, time.perf_counter() - w, time.process_time() - c


def child(args):
    """Measure everything with the thread count fixed by NUMBA_NUM_THREADS."""
    import numba

    import ldpcmarg as lm
    from ldpcmarg.code.hyperforest import trw_check_weights
    from ldpcmarg.decoders.certified import CertifiedTRW

    threads = numba.config.NUMBA_NUM_THREADS
    numba.set_num_threads(threads)
    out = {"threads": threads, "points": []}
    for ci, name in enumerate(args.codes):
        code = lm.load_code(name)
        rho = trw_check_weights(code, 200, 0)
        sp = lm.make_decoder("sum-product", code)
        sp_nes = lm.make_decoder("sum-product:early_stop=false", code)
        fw = lm.make_decoder("fw", code, entropy=rho, gap_tol=REL_GAP, time_limit=args.cap)
        # warm-up: numba compilation and HiGHS start-up are not counted. 128 frames, so
        # that the lane kernels are compiled too (fw sweeps large batches in lanes:
        # float32 lanes first, float64 lanes when many frames need polishing)
        lam0 = awgn_llr(code, 2.0, np.random.default_rng(0), 128)
        sp.decode(lam0)
        sp_nes.decode(lam0)
        fw.decode(lam0)
        for cfg in args.study:
            CertifiedTRW(code, rho, **cfg).run(lam0)
        for si, eb in enumerate(args.ebn0):
            rng = np.random.default_rng(np.random.SeedSequence([args.seed, ci, si]))
            lam = awgn_llr(code, eb, rng, args.frames)
            F = args.frames
            pt = {"code": name, "n": code.n, "ebn0_db": eb, "frames": F}
            # batched: interleave sum-product and fw batches, each repeated, so that load
            # from other jobs hits both sides alike; medians
            sp_b, sp_nes_b, fw_b, fw_phases = [], [], [], []
            for _ in range(args.repeats):
                _, w, c = timed(sp.decode, lam)
                sp_b.append((w / F, c / F))
                _, w, c = timed(sp_nes.decode, lam)
                sp_nes_b.append((w / F, c / F))
                res, w, c = timed(fw.decode, lam)
                fw_b.append((w / F, c / F))
                fw_phases.append(dict(fw.last_phase_seconds))
                _, w, c = timed(sp.decode, lam)  # sum-product again after fw: same window
                sp_b.append((w / F, c / F))
            # the phases of the repeat whose wall time is the median one
            order = np.argsort([x[0] for x in fw_b])
            phases = fw_phases[int(order[len(order) // 2])]
            info = res.info
            fval = info["free_energy"]
            rel = info["certified_gap"] / np.maximum(1.0, np.abs(fval))
            # single-frame latency, interleaved frame by frame
            sp_1, fw_1 = [], []
            for f in range(min(F, args.single)):
                _, w, c = timed(sp.decode, lam[f])
                sp_1.append((w, c))
                r1, w, c = timed(fw.decode, lam[f])
                fw_1.append((w, c))
            med = lambda xs, k=0: float(np.median([x[k] for x in xs]))  # noqa: E731
            # where the batched call's time went, per frame: message passing (first
            # run and the polishing sweeps between certificate checks), projection +
            # certificates, and the rest (per-frame fallback of uncertified frames,
            # Python)
            warm = (phases["warm_start"] + phases["polish"]) / F
            oracle = phases["certificate"] / F
            pt.update({
                "sum_product_batch_s": med(sp_b), "sum_product_batch_cpu_s": med(sp_b, 1),
                "sum_product_no_early_stop_batch_s": med(sp_nes_b),
                "sum_product_single_s": med(sp_1), "fw_batch_s": med(fw_b),
                "fw_batch_cpu_s": med(fw_b, 1), "fw_single_s": med(fw_1),
                "fw_frame_median_s": float(np.median(info["seconds"])),
                "certified_share": float(np.mean(rel <= REL_GAP)),
                "batched_share": float(np.mean(info["route"] == "batched")),
                "rel_gap_max": float(np.max(rel)),
                "status": {s: int(np.sum(info["status"] == s)) for s in np.unique(info["status"])},
                "breakdown_s": {"warm_start": warm, "oracle_and_certificate": oracle,
                                "rest": max(pt_fw_batch(fw_b) - warm - oracle, 0.0)},
            })
            pt["ratio_batch"] = pt["fw_batch_s"] / pt["sum_product_batch_s"]
            pt["ratio_batch_no_early_stop"] = (pt["fw_batch_s"]
                                               / pt["sum_product_no_early_stop_batch_s"])
            pt["ratio_single"] = pt["fw_single_s"] / pt["sum_product_single_s"]
            # the batched warm start of decoders/certified.py at a few settings
            study = []
            for cfg in args.study:
                ct = CertifiedTRW(code, rho, **cfg)
                walls = []
                for _ in range(args.repeats):
                    r, w, _ = timed(lambda x, ct=ct: ct.run(x, gap_tol=REL_GAP), lam)
                    walls.append(w)
                w = float(np.median(walls))
                study.append({"config": cfg, "batch_s_per_frame": w / F,
                              "ratio_batch": (w / F) / pt["sum_product_batch_s"],
                              "certified_share": float(np.mean(r.certified)),
                              "median_sweeps": float(np.median(r.iterations)),
                              "median_rel_gap": float(np.median(r.relative_gap)),
                              "seconds_per_frame": {k: v / F for k, v in r.seconds.items()}})
            pt["warm_start_study"] = study
            out["points"].append(pt)
            print(f"[{threads} thread(s)] {name} {eb:g} dB: sum-product batch "
                  f"{pt['sum_product_batch_s'] * 1e3:.2f} ms/frame, fw batch "
                  f"{pt['fw_batch_s'] * 1e3:.1f} ms/frame (x{pt['ratio_batch']:.0f}), "
                  f"certified {pt['certified_share']:.0%}", file=sys.stderr, flush=True)
    json.dump(out, sys.stdout)


def render_table(results) -> str:
    """The markdown table quoted by the README (one row per code, SNR and thread count)."""
    lines = ["| code | Eb/N0 | threads | sum-product batched | sum-product single | "
             "`fw:entropy=trw` batched | fw single | ratio batched (no early stop) | "
             "ratio single | certified (batched route) | "
             "fw: message passing / projection + certificate / rest |",
             "|---|---|---|---|---|---|---|---|---|---|---|"]
    for run in results["runs"]:
        for p in run["points"]:
            b = p["breakdown_s"]
            lines.append(
                f"| `{p['code']}` | {p['ebn0_db']:g} dB | {run['threads']} | "
                f"{p['sum_product_batch_s'] * 1e3:.2f} ms | "
                f"{p['sum_product_single_s'] * 1e3:.2f} ms | "
                f"{p['fw_batch_s'] * 1e3:.1f} ms | {p['fw_single_s'] * 1e3:.1f} ms | "
                f"{p['ratio_batch']:.0f}× ({p['ratio_batch_no_early_stop']:.0f}×) | "
                f"{p['ratio_single']:.0f}× | {p['certified_share']:.0%} "
                f"({p.get('batched_share', 0.0):.0%}) | "
                f"{b['warm_start'] * 1e3:.1f} / {b['oracle_and_certificate'] * 1e3:.1f} / "
                f"{b['rest'] * 1e3:.1f} ms |")
    return "\n".join(lines)


def render_study(results) -> str:
    lines = ["| code | Eb/N0 | threads | warm-start setting | ms per frame (batched) | "
             "x sum-product | certified | median sweeps | median rel. gap |",
             "|---|---|---|---|---|---|---|---|---|"]
    for run in results["runs"]:
        for p in run["points"]:
            for s in p["warm_start_study"]:
                cfg = ", ".join(f"{k}={v}" for k, v in s["config"].items())
                lines.append(f"| `{p['code']}` | {p['ebn0_db']:g} dB | {run['threads']} | {cfg} | "
                             f"{s['batch_s_per_frame'] * 1e3:.1f} | {s['ratio_batch']:.0f}× | "
                             f"{s['certified_share']:.0%} | {s['median_sweeps']:.0f} | "
                             f"{s['median_rel_gap']:.1e} |")
    return "\n".join(lines)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--codes", nargs="+", default=["peg-504-3-6", "peg-1008-3-6"])
    ap.add_argument("--ebn0", nargs="+", type=float, default=[1.5, 2.5])
    ap.add_argument("--frames", type=int, default=12)
    ap.add_argument("--single", type=int, default=6, help="frames timed as single calls")
    ap.add_argument("--repeats", type=int, default=3, help="batch repeats (both sides)")
    ap.add_argument("--threads", nargs="+", type=int, default=[1, 2])
    ap.add_argument("--cap", type=float, default=30.0, help="fw seconds per frame")
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--quick", action="store_true", help="one code, one SNR, 3 frames")
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--out", default=str(RESULTS / "bench_certified.json"))
    args = ap.parse_args(argv)
    if args.quick:
        args.codes, args.ebn0, args.frames, args.single, args.threads = (
            args.codes[:1], args.ebn0[:1], 3, 2, args.threads[:1])
    # the route fw uses (peeled projection, Anderson memory 3 on lane sweeps, float32
    # lanes up to the first certificate at a 5e-3 message change, then every 3 sweeps;
    # entropic certificate with Heskes' allocation of entropy to bits with kappa_i <
    # 0.1), the same with float64 lanes throughout, the previous default (one frame at a
    # time, first certificate at a 1e-2 change), and the Newton route before it (the
    # uniform mix: first certificate at a 3e-5 message change, then every 4 sweeps)
    from ldpcmarg.decoders.frank_wolfe import _BATCHED_SETTINGS

    fw_route = dict(_BATCHED_SETTINGS)
    previous = {"anderson": 5, "tol": 3e-5, "polish_rounds": 16, "check_every": 4,
                "linear": False, "kappa_floor": 0.1, "projection": "newton"}
    peeled_scalar = dict(fw_route, tol=1e-2, lanes=False, lane_float32=False)
    args.study = [fw_route, dict(fw_route, lane_float32=False), peeled_scalar, previous]
    if args.quick:
        args.study = args.study[:1]
    if args.child:
        child(args)
        return
    runs = []
    for t in args.threads:
        env = dict(os.environ, NUMBA_NUM_THREADS=str(t), PYTHONPATH=str(ROOT))
        cmd = [sys.executable, __file__, "--child", "--codes", *args.codes, "--ebn0",
               *map(str, args.ebn0), "--frames", str(args.frames), "--single", str(args.single),
               "--repeats", str(args.repeats), "--cap", str(args.cap), "--seed", str(args.seed)]
        if args.quick:
            cmd.append("--quick")
        proc = subprocess.run(cmd, env=env, capture_output=True, text=True, check=False)
        sys.stderr.write(proc.stderr)
        if proc.returncode != 0:
            raise SystemExit(f"benchmark child with {t} thread(s) failed")
        runs.append(json.loads(proc.stdout))
    results = {
        "machine": {"python": platform.python_version(), "cpu": platform.processor(),
                    "cores": os.cpu_count(), "node": platform.machine()},
        "note": (f"{args.frames} frames per point (sum-product with the registry defaults, "
                 "i.e. the lane kernels for batches of 64 or more); both sides measured "
                 "interleaved in the same process with the same numba thread count. "
                 "Times are wall-clock medians per frame. Load average at the start: "
                 f"{' '.join(f'{v:.2f}' for v in os.getloadavg())} (2 cores)."),
        "rel_gap": REL_GAP, "frames": args.frames, "runs": runs,
    }
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(results, indent=1, default=float))
    md = ("# Certified marginals against sum-product\n\n" + results["note"] + "\n\n"
          + render_table(results) + "\n\n## Batched warm start of `decoders/certified.py`\n\n"
          + render_study(results) + "\n")
    out.with_suffix(".md").write_text(md)
    print(render_table(results))
    print(f"wrote {out} and {out.with_suffix('.md')}")


if __name__ == "__main__":
    main()
