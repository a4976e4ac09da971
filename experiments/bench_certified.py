"""Benchmark: per-frame time to a *certified* relative gap for tree-reweighted marginals.

For the shipped PEG (3,6) codes (n = 504 and n = 1008) at Eb/N0 = 1.5 and
2.5 dB (BPSK-AWGN, all-zero codeword, TRW weights rho from 200 sampled
hyperforests), this measures per frame the time until the free energy
``F(tau) = <lambda, tau> - H_rho(tau)`` is certified within a relative gap
``(F(tau) - F*) / max(1, |F(tau)|) <= 1e-4``, for the registered ``fw``
decoder (its default variant) with

* ``fw-highs``        the uniform start and the HiGHS oracle (``oracle="lp"``, hot re-solves);
* ``fw-highs-warm``   the reweighted-sum-product warm start and the HiGHS oracle;
* ``fw-dual``         the uniform start and the dual-candidate oracle
                      (``oracle="dual"``: dual ascent, candidates certified by the
                      Lagrangian bound, restricted LP with column generation, HiGHS fallback);
* ``fw-dual-warm``    the warm start and the dual-candidate oracle: each iteration first
                      asks the oracle to certify the current point (``gap_target``), so a
                      frame whose warm start is already good costs one dual ascent;

beside sum-product's per-frame time (flooding, registry defaults) and the time
of the warm start alone (reweighted sum-product beliefs, as the decoder runs them).

The certified gap is the decoder's ``info["certified_gap"]``:
``<grad F(tau), tau> - D(mu)`` with ``D`` the Lagrangian bound of
``ldpcmarg.decoders.lp_dual`` after dual ascent at the final point; it is
``>= F(tau) - F*`` because F is convex with these TRW weights. A frame
"reaches" the tolerance when that certified relative gap is <= 1e-4.

Timings: CPU time of this process (numba and HiGHS run single-threaded here)
and wall-clock time. The machine is shared with other jobs, so wall times are
noisy; the ratios use CPU time. numba kernels and HiGHS are warmed up first.
The slow HiGHS-based methods and the uniform-start dual oracle run on the
first ``--slow-frames`` frames only, with a time cap per frame.

Usage::

    python experiments/bench_certified.py [--frames 12] [--slow-frames 2] [--cap 30]

Writes ``experiments/results/bench_certified.json`` and prints a table.
"""

from __future__ import annotations

import argparse
import json
import platform
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import ldpcmarg as lm  # noqa: E402
from ldpcmarg.code.hyperforest import trw_check_weights  # noqa: E402
from ldpcmarg.decoders.message_passing import ReweightedSumProductDecoder  # noqa: E402

REL_GAP = 1e-4


class Clock:
    """Wall and CPU time since creation."""

    def __init__(self):
        self.w = time.perf_counter()
        self.c = time.process_time()

    def read(self):
        return time.perf_counter() - self.w, time.process_time() - self.c


def awgn_llr(code, ebn0_db, rng):
    # sigma^2 = 1 / (2 R 10^(EbN0/10)), LLR = 2 y / sigma^2 (DESIGN.md §2), all-zero word
    sigma = np.sqrt(1.0 / (2.0 * code.rate * 10 ** (ebn0_db / 10.0)))
    y = 1.0 + sigma * rng.normal(size=code.n)
    return 2.0 * y / sigma**2


METHODS = {
    "fw-highs": {"oracle": "lp", "warm_start": "uniform"},
    "fw-highs-warm": {"oracle": "lp", "warm_start": "reweighted-sum-product"},
    "fw-dual": {"oracle": "dual", "warm_start": "uniform"},
    "fw-dual-warm": {"oracle": "dual", "warm_start": "reweighted-sum-product"},
}
SLOW = ("fw-highs", "fw-highs-warm", "fw-dual")


class Setup:
    def __init__(self, code, cap):
        self.code = code
        self.rho = trw_check_weights(code, 200, 0)
        self.sp = lm.make_decoder("sum-product", code)
        self.fw = {k: lm.make_decoder("fw", code, entropy=self.rho, gap_tol=REL_GAP,
                                      time_limit=cap, max_iter=100000, **v)
                   for k, v in METHODS.items()}
        self.rsp = ReweightedSumProductDecoder(code, rho=self.rho, damping=0.5)
        self.warm_iter = self.fw["fw-dual-warm"].options["warm_iter"]


def run_sp(S, lam):
    ck = Clock()
    res = S.sp.decode(lam)
    w, c = ck.read()
    return {"wall": w, "cpu": c, "valid": bool(res.valid[0]), "iterations": int(res.iterations[0])}


def run_warm_only(S, lam):
    # the decoder's warm start: reweighted sum-product to a fixed point (tol 1e-12)
    ck = Clock()
    S.rsp.beliefs(lam, max_iter=S.warm_iter, tol=1e-12)
    w, c = ck.read()
    return {"wall": w, "cpu": c}


def run_fw(S, key, lam):
    dec = S.fw[key]
    ck = Clock()
    res = dec.decode(lam)
    w, c = ck.read()
    info = res.info
    F = float(info["free_energy"][0])
    cg = info.get("certified_gap")
    cert = float(cg[0]) if cg is not None else float("nan")
    rel = cert / max(1.0, abs(F)) if np.isfinite(cert) else float("inf")
    out = {"wall": w, "cpu": c, "F": F, "rel_cert": rel,
           "fw_rel_gap": float(info["relative_gap"][0]), "status": str(info["status"][0]),
           "iterations": int(res.iterations[0]),
           "oracle_calls": int(info["oracle_calls"][0]),
           "oracle_seconds": float(info["oracle_seconds"][0]),
           "reached": bool(rel <= REL_GAP)}
    oracle = getattr(dec, "_oracle", None)
    if oracle is not None and hasattr(oracle, "routes"):
        out["routes_cumulative"] = dict(oracle.routes)
    return out


def summarise(rows, key="cpu"):
    if not rows:
        return None
    vals = np.array([r[key] for r in rows])
    reached = [r for r in rows if r.get("reached", True)]
    return {"frames": len(rows), "reached": len(reached),
            "median_cpu": float(np.median(vals)),
            "median_wall": float(np.median([r["wall"] for r in rows])),
            "median_cpu_reached": (float(np.median([r[key] for r in reached]))
                                   if reached else None)}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--codes", nargs="+", default=["peg-504-3-6", "peg-1008-3-6"])
    ap.add_argument("--ebn0", nargs="+", type=float, default=[1.5, 2.5])
    ap.add_argument("--frames", type=int, default=12,
                    help="frames for sum-product and certify-first")
    ap.add_argument("--slow-frames", type=int, default=2, help="frames for the FW runs")
    ap.add_argument("--cap", type=float, default=30.0, help="seconds per frame and FW method")
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--out",
                    default=str(Path(__file__).parent / "results" / "bench_certified.json"))
    args = ap.parse_args(argv)

    results = {"machine": {"python": platform.python_version(), "cpu": platform.processor(),
                           "node": platform.machine()},
               "rel_gap": REL_GAP, "cap": args.cap, "points": []}
    print(f"certified relative gap target {REL_GAP:g}; FW cap {args.cap:g} s per frame; "
          "times are CPU seconds of this process (wall in brackets)")
    for ci, name in enumerate(args.codes):
        code = lm.load_code(name)
        S = Setup(code, args.cap)
        # warm-up of the numba kernels and of HiGHS (compile time is not counted)
        lam0 = awgn_llr(code, 3.0, np.random.default_rng(0))
        run_sp(S, lam0)
        run_warm_only(S, lam0)
        run_fw(S, "fw-dual-warm", lam0)
        for si, eb in enumerate(args.ebn0):
            rng = np.random.default_rng(np.random.SeedSequence([args.seed, ci, si]))
            frames = [awgn_llr(code, eb, rng) for _ in range(args.frames)]
            point = {"code": name, "n": code.n, "ebn0_db": eb, "methods": {}}
            rows = {k: [] for k in ("sum-product", "warm-start-only", "fw-dual-warm", *SLOW)}
            for f, lam in enumerate(frames):
                rows["sum-product"].append(run_sp(S, lam))
                rows["warm-start-only"].append(run_warm_only(S, lam))
                rows["fw-dual-warm"].append(run_fw(S, "fw-dual-warm", lam))
                if f < args.slow_frames:
                    for k in SLOW:
                        rows[k].append(run_fw(S, k, lam))
                cf = rows["fw-dual-warm"][-1]
                print(f"  {name} {eb:g} dB frame {f}: sum-product "
                      f"{rows['sum-product'][-1]['cpu'] * 1e3:.1f} ms, fw-dual-warm "
                      f"{cf['cpu'] * 1e3:.0f} ms, certified rel gap {cf['rel_cert']:.1e}, "
                      f"{cf['iterations']} iterations", flush=True)
            sp_med = summarise(rows["sum-product"])["median_cpu"]
            for k, v in rows.items():
                s = summarise(v)
                if s is None:
                    continue
                s["ratio_to_sp"] = s["median_cpu"] / sp_med
                point["methods"][k] = {"summary": s, "frames": v}
            results["points"].append(point)
            print(f"\n{name} (n = {code.n}) at {eb:g} dB")
            print(f"  {'method':15s} {'frames':>6s} {'reached':>8s} {'median CPU s':>13s} "
                  f"{'(wall)':>9s} {'x sum-product':>14s}")
            for k, m in point["methods"].items():
                s = m["summary"]
                print(f"  {k:15s} {s['frames']:6d} {s['reached']:8d} {s['median_cpu']:13.4f} "
                      f"({s['median_wall']:7.3f}) {s['ratio_to_sp']:14.1f}")
            for k in (*SLOW, "fw-dual-warm"):
                for r in rows[k]:
                    print(f"    {k}: status {r['status']}, FW rel gap {r['fw_rel_gap']:.1e}, "
                          f"certified {r['rel_cert']:.1e}, {r['iterations']} iterations, "
                          f"{r['oracle_calls']} oracle calls ({r['oracle_seconds']:.2f} s)")
            for k in ("fw-dual", "fw-dual-warm"):
                o = getattr(S.fw[k], "_oracle", None)
                if o is not None:
                    print(f"    {k} oracle routes so far (this code): {dict(o.routes)}")
            print(flush=True)
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(results, indent=1, default=float))
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
