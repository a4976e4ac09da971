"""Soft-output quality against SNR: posterior error and calibration of several decoders.

Codes
    * the extended Golay code (24, 12) (shipped as ``golay-24-12``): dense,
      many 4-cycles;
    * a (3, 6)-regular LDPC code with n = 36 built by progressive edge growth
      (``construct.peg(36, 18, 3, seed=1)``): small enough (k = 18) for exact
      posteriors by enumeration.

Decoders (those the registry holds when the study runs)
    sum-product (with and without stopping at the first valid hard decision),
    min-sum, reweighted (tree-reweighted) sum-product with sampled-hyperforest
    weights, Frank–Wolfe on the Bethe free energy and on the TRW free energy.
    The Frank–Wolfe runs get a time cap per frame; their duality gaps and
    statuses are reported beside the errors.

For every code, decoder and Eb/N0 point the same seeded frames (random
codewords, BPSK over AWGN) are decoded and compared with the exact
posteriors: mean and maximum ``|P(x=1) - P_exact(x=1)|``, mean per-bit
``KL(exact || decoder)`` in bits, expected calibration error against the
transmitted bits (log-spaced bins of the stated bit-error probability),
fitted LLR scale, mutual information, BER, FER, iterations and time per frame.

Writes ``table.csv``, ``table.md``, ``results.json`` and ``soft_output.png``
into ``experiments/results/soft_output/`` (``--quick``: the ``quick/``
subfolder, so a smoke run never replaces the full results).

Run from the repository root::

    python experiments/soft_output_study.py --quick     # about a minute
    python experiments/soft_output_study.py             # the full study

Times are wall-clock on whatever machine runs it; on a shared machine they
are noisy.
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from ldpcmarg.analysis.compare import compare_decoders  # noqa: E402
from ldpcmarg.code.construct import peg  # noqa: E402
from ldpcmarg.code.io import load_code  # noqa: E402
from ldpcmarg.decoders.base import make_decoder  # noqa: E402
from ldpcmarg.errors import InputError  # noqa: E402


def decoder_specs(fw_time_limit: float, fw_max_iter: int) -> list[tuple[str, str]]:
    """(short name, spec) of every decoder in the study."""
    fw = f"time_limit={fw_time_limit:g},max_iter={fw_max_iter}"
    return [
        ("SP", "sum-product:early_stop=false,max_iter=100"),
        ("SP (early stop)", "sum-product:max_iter=100"),
        ("MS", "min-sum:early_stop=false,max_iter=100"),
        ("RSP (TRW rho)", "reweighted-sum-product:rho=trw,early_stop=false,max_iter=300"),
        ("FW Bethe", f"fw:entropy=bethe,{fw}"),
        ("FW TRW", f"fw:entropy=trw,{fw}"),
    ]


def available(code, specs):
    """Keep the decoders the registry can build; report the others."""
    keep, missing = [], []
    for short, spec in specs:
        try:
            make_decoder(spec, code)
            keep.append((short, spec))
        except InputError as exc:
            missing.append(f"{short} ({spec}): {exc}")
    return keep, missing


def _revision() -> str:
    import subprocess

    try:
        rev = subprocess.run(["git", "-C", str(ROOT), "rev-parse", "--short", "HEAD"],
                             capture_output=True, text=True, timeout=10).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        rev = ""
    return rev or "unknown"


def fmt(v, spec=".3g"):
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "n/a"
    return format(v, spec)


def run(args) -> int:
    out = Path(args.out) if args.out else ROOT / "experiments" / "results" / "soft_output"
    if args.quick and not args.out:
        out = out / "quick"
    out.mkdir(parents=True, exist_ok=True)
    if args.quick:
        snr, frames, fw_t, fw_it = [1.0, 3.0], 10, 0.4, 100
    else:
        snr, frames, fw_t, fw_it = [0.0, 1.0, 2.0, 3.0, 4.0], 50, 2.0, 300
    if args.frames:
        frames = args.frames
    codes = [load_code("golay-24-12"), peg(36, 18, 3, seed=1)]
    t_start = time.perf_counter()
    rows, results, notes = [], {}, []
    for code in codes:
        specs, missing = available(code, decoder_specs(fw_t, fw_it))
        notes += [f"{code.name}: left out {m}" for m in missing]
        print(f"{code.name} (n={code.n}, k={code.k}): {len(specs)} decoders, "
              f"Eb/N0 {snr} dB, {frames} frames per point", flush=True)
        res = compare_decoders(code, [s for _, s in specs], snr=snr, snr_unit="ebn0",
                               frames=frames, seed=args.seed, reference="auto",
                               num_bins=10, binning="log", min_prob=1e-5,
                               labels=[f"{short} [{spec}]" for short, spec in specs],
                               progress=lambda s, lab: print(f"  {s:g} dB {lab}", flush=True))
        results[code.name] = res
        short_of = {f"{short} [{spec}]": short for short, spec in specs}
        spec_of = {f"{short} [{spec}]": spec for short, spec in specs}
        for r in res.rows:
            cal = r.calibration
            fw_gap = r.info_summary.get("relative_gap_mean")
            capped = sum(v for k, v in r.info_summary.items()
                         if k.startswith("status=") and k.split("=")[1].startswith(
                             ("time_limit", "max_iter")))
            rows.append({
                "code": code.name, "decoder": short_of[r.label], "spec": spec_of[r.label],
                "ebn0_db": r.snr, "frames": r.frames, "ber": r.ber, "fer": r.fer,
                "mean_abs_error": r.mean_abs_error, "max_abs_error": r.max_abs_error,
                "mean_kl_bits": r.mean_kl_bits, "ece": r.ece,
                "llr_scale": None if cal is None else cal.llr_scale,
                "confidence": None if cal is None else cal.confidence,
                "mutual_information": r.mutual_information,
                "mean_iterations": r.mean_iterations, "ms_per_frame": 1e3 * r.time_per_frame_s,
                "fw_relative_gap_mean": fw_gap,
                "fw_capped_fraction": capped if r.decoder.startswith("fw") else None,
                "reference": res.reference,
            })
    elapsed = time.perf_counter() - t_start
    # ---------------------------------------------------------------- tables
    cols = list(rows[0])
    with open(out / "table.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=cols)
        w.writeheader()
        for r in rows:
            w.writerow({k: ("" if v is None else v) for k, v in r.items()})
    md = [
        "# Soft-output quality against Eb/N0",
        "",
        f"Mode: {'quick' if args.quick else 'full'}; {frames} frames per point (random "
        f"codewords, BPSK-AWGN, seed {args.seed}); reference: exact posteriors "
        "(enumeration). |dp| = |P(x=1) - P_exact(x=1)|; KL = KL(exact || decoder) per bit in "
        "bits; ECE over 10 log-spaced bins of the stated bit-error probability (noisy with "
        "few frames); scale = fitted LLR scale (< 1: over-confident). Frank-Wolfe capped at "
        f"{fw_t:g} s and {fw_it} oracle calls per frame; 'capped' = fraction of frames that "
        "hit a cap. Times: wall clock on a shared 2-core machine, noisy. "
        f"Total run time {elapsed:.0f} s. Source revision: {_revision()}.",
        "",
        "| code | decoder | Eb/N0 (dB) | BER | FER | mean \\|dp\\| | max \\|dp\\| | KL (bit) "
        "| ECE | scale | MI (bit) | iter | ms/frame | FW rel. gap | capped |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in rows:
        md.append(
            f"| {r['code']} | {r['decoder']} | {r['ebn0_db']:g} | {fmt(r['ber'], '.2e')} | "
            f"{fmt(r['fer'], '.2e')} | {fmt(r['mean_abs_error'], '.2e')} | "
            f"{fmt(r['max_abs_error'], '.2e')} | {fmt(r['mean_kl_bits'], '.2e')} | "
            f"{fmt(r['ece'], '.2e')} | {fmt(r['llr_scale'], '.2f')} | "
            f"{fmt(r['mutual_information'], '.3f')} | {r['mean_iterations']:.1f} | "
            f"{r['ms_per_frame']:.2f} | {fmt(r['fw_relative_gap_mean'], '.1e')} | "
            f"{fmt(r['fw_capped_fraction'], '.2f')} |"
        )
    if notes:
        md += ["", "Left out:"] + [f"- {n}" for n in notes]
    (out / "table.md").write_text("\n".join(md) + "\n")
    (out / "results.json").write_text(json.dumps(
        {name: res.to_dict() for name, res in results.items()}, indent=1, allow_nan=False))
    # ---------------------------------------------------------------- figure
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ldpcmarg.plots.compare import (
        plot_calibration_error,
        plot_posterior_error,
        plot_reliability,
    )

    fig, axes = plt.subplots(len(results), 3, figsize=(16, 4.4 * len(results) + 1.6),
                             layout="constrained", squeeze=False)
    for i, (name, res) in enumerate(results.items()):
        plot_posterior_error(res, "mean_abs_error", axes[i][0], legend=False)
        axes[i][0].set_title(f"{name}: posterior error against {res.reference}", fontsize=10)
        plot_calibration_error(res, axes[i][1], legend=False)
        axes[i][1].set_title(f"{name}: calibration against transmitted bits", fontsize=10)
        mid = res.snr_points[len(res.snr_points) // 2]
        plot_reliability(res, mid, axes[i][2], legend=False)
        axes[i][2].set_title(f"{name}: reliability at Eb/N0 = {mid:g} dB", fontsize=10)
    handles, labels = axes[0][0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncols=2, fontsize=8,
               title=f"decoders ({frames} frames per point; reliability: triangles = upper "
                     "95 % bound where no error was seen)", title_fontsize=8)
    fig.savefig(out / "soft_output.png", dpi=110)
    plt.close(fig)
    print()
    print("\n".join(md))
    print(f"\nwrote {out / 'table.csv'}, {out / 'table.md'}, {out / 'results.json'}, "
          f"{out / 'soft_output.png'}")
    return 0


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="small run (about a minute)")
    p.add_argument("--out", help="output folder (default experiments/results/soft_output[/quick])")
    p.add_argument("--frames", type=int, help="frames per point (overrides the mode's default)")
    p.add_argument("--seed", type=int, default=2026)
    return run(p.parse_args(argv))


if __name__ == "__main__":
    sys.exit(main())
