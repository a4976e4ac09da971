"""Loss of fixed-point min-sum (q = 5, 6) against float min-sum at FER 1e-2 on peg-1008-3-6.

Run from the repository root::

    python experiments/fixed_point_loss.py [--quick]

BPSK-AWGN, all-zero codeword, the same seeded frames for every decoder
(``simulate`` pairs them), 50 iterations. Decoders: float ``min-sum`` and
``offset-min-sum`` (beta = 0.5) against ``fixed-min-sum`` and
``fixed-offset-min-sum`` (beta = 1 step) with q = 5 and 6 bits and step 0.5.
Each point runs to 100 frame errors or 40 000 frames. The Eb/N0 at FER 1e-2
is interpolated linearly in (Eb/N0, log10 FER) between the two grid points
around 1e-2; the loss is fixed minus float in dB (positive = fixed needs more
SNR). Results: ``experiments/results/fixed_point_loss.md`` (and ``.json``).
Simulated error rates are estimates with intervals, not a certification.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import ldpcmarg as lm  # noqa: E402
from ldpcmarg.engine.simulate import StopRule, simulate  # noqa: E402

DECODERS = ["min-sum", "fixed-min-sum:q=6,step=0.5", "fixed-min-sum:q=5,step=0.5",
            "offset-min-sum", "fixed-offset-min-sum:q=6,step=0.5",
            "fixed-offset-min-sum:q=5,step=0.5"]
FLOAT_OF = {"fixed-min-sum": "min-sum", "fixed-offset-min-sum": "offset-min-sum"}


def crossing(points, target=1e-2):
    """Eb/N0 where FER crosses ``target`` (log-linear interpolation), or None."""
    pts = sorted((p.snr, p.fer) for p in points if p.frames)
    for (x0, f0), (x1, f1) in zip(pts, pts[1:], strict=False):
        if f0 >= target > f1 and f1 > 0:
            t = (math.log10(f0) - math.log10(target)) / (math.log10(f0) - math.log10(f1))
            return x0 + t * (x1 - x0)
    return None


def _fmt(v):
    return "n/a" if v is None else f"{v:.3f}"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="tiny run (smoke test)")
    ap.add_argument("--out", default=str(HERE / "results"), help="folder for the results")
    ap.add_argument("--workers", type=int, default=2)
    a = ap.parse_args(argv)
    code = lm.load_code("peg-1008-3-6")
    if a.quick:
        grid, stop = [2.0, 3.0], StopRule(frame_errors=5, max_frames=200)
    else:
        grid = [1.75, 2.0, 2.25, 2.5, 2.75, 3.0]
        stop = StopRule(frame_errors=100, max_frames=40_000)
    res = simulate(code, DECODERS, grid, seed=14, stop=stop, workers=a.workers)
    by = {}
    for p in res.points:
        by.setdefault(p.decoder, []).append(p)
    at = {d: crossing(ps) for d, ps in by.items()}
    lines = ["# Fixed-point min-sum loss at FER 1e-2, peg-1008-3-6, BPSK-AWGN", "",
             f"Same frames for every decoder (seed 14), 50 iterations, up to {stop.frame_errors} "
             f"frame errors or {stop.max_frames} frames per point.", "",
             "| decoder | Eb/N0 at FER 1e-2 (dB) | loss vs float (dB) |", "|---|---|---|"]
    table = {}
    for d in by:
        base = FLOAT_OF.get(d.split(":")[0])
        loss = None
        if base and at.get(d) is not None and at.get(base) is not None:
            loss = at[d] - at[base]
        table[d] = {"ebn0_at_fer_1e-2": at[d], "loss_db": loss}
        lines.append(f"| {d} | {_fmt(at[d])} | {_fmt(loss) if base else '-'} |")
    lines += ["", "FER per point:", "", "| decoder | " + " | ".join(f"{g:g}" for g in grid) + " |",
              "|---|" + "---|" * len(grid)]
    for d, ps in by.items():
        lines.append(f"| {d} | " + " | ".join(f"{p.fer:.2e} ({p.frame_errors}/{p.frames})"
                                              for p in ps) + " |")
    text = "\n".join(lines) + "\n"
    print(text, flush=True)
    out = Path(a.out)
    out.mkdir(exist_ok=True)
    (out / "fixed_point_loss.md").write_text(text)
    (out / "fixed_point_loss.json").write_text(
            json.dumps({"table": table, "sweep": res.to_dict()}, indent=1))


if __name__ == "__main__":
    main()
