"""``ldpcmarg floor``: error structures and an importance-sampling FER estimate (error floors)."""

from __future__ import annotations

import hashlib
import json
import math
import sys

import click

from ._outputs import Outputs
from .simulate import GRID_HELP

CAUTION = ("Importance-sampling error rates are estimates aimed at the structures the search "
           "found; a failure mode it missed is under-represented. They are not a "
           "certification: defer to applicable standards and qualified review.")


def union_terms(code, codewords, structures, ebn0_db: float) -> dict:
    """Union-bound terms ``A_w Q(sqrt(2 w R Eb/N0))`` of the lightest codewords and structures."""
    from scipy.special import ndtr

    g = 10.0 ** (ebn0_db / 10.0)
    out = {}
    if codewords.structures:
        w = int(min(s.bits.size for s in codewords.structures))
        A = sum(1 for s in codewords.structures if s.bits.size == w)
        complete = bool(codewords.settings.get("exact"))
        if codewords.settings.get("method") == "enumeration":
            A = int(codewords.settings.get("multiplicity", A))
            complete = True
        out["codewords"] = {"weight": w, "multiplicity": A, "multiplicity_complete": complete,
                            "fer": A * float(ndtr(-math.sqrt(2 * w * code.rate * g)))}
    if structures:
        w = min(s.effective_weight for s in structures)
        A = sum(1 for s in structures if abs(s.effective_weight - w) <= 1e-6 * max(w, 1))
        out["lightest_structures"] = {
            "effective_weight": w, "count": A,
            "fer": A * float(ndtr(-math.sqrt(2 * w * code.rate * g)))}
    return out


@click.command("floor")
@click.argument("code_arg", metavar="CODE")
@click.option("-d", "--decoder", "decoders", multiple=True, required=True, metavar="SPEC",
              help="Decoder spec (repeatable): a message-passing decoder, lp, ml or exact.")
@click.option("--ebn0", required=True, help=f"Eb/N0 grid in dB: {GRID_HELP}.")
@click.option("--seed", type=click.IntRange(0), default=0, show_default=True)
@click.option("--json", "json_path", type=click.Path(dir_okay=False), default=None,
              help="Write points, structures and settings to this JSON file.")
@click.option("--search-ebn0", type=float, default=None,
              help="Eb/N0 (dB) of the structure search (default: the middle grid point).")
@click.option("--candidates", type=click.IntRange(1), default=2000, show_default=True,
              help="Cap on the impulse candidates of the trapping-set search.")
@click.option("--structures", "max_structures", type=click.IntRange(0), default=200,
              show_default=True, help="Keep this many lightest structures (0: none, plain MC).")
@click.option("--pseudo-starts", type=click.IntRange(1), default=40, show_default=True,
              help="Starts of the LP pseudo-codeword search (decoder lp).")
@click.option("--max-frames", type=click.IntRange(1), default=200_000, show_default=True,
              help="Frame cap per point and decoder.")
@click.option("--rel-half-width", type=click.FloatRange(0, 10, min_open=True), default=0.3,
              show_default=True, help="Stop a point when the interval is +- this fraction.")
@click.option("--min-effective-hits", type=click.FloatRange(1), default=30.0,
              show_default=True, help="Kish effective hits needed to state an interval.")
@click.option("--defensive", type=click.FloatRange(0, 1, min_open=True), default=0.05,
              show_default=True, help="Weight of the unshifted noise in the mixture.")
@click.option("--chunk-frames", type=click.IntRange(1), default=512, show_default=True)
@click.option("--time-budget", type=click.FloatRange(0, min_open=True), default=None,
              help="Wall seconds per point (not reproducible).")
@click.option("--workers", type=click.IntRange(1), default=None,
              help="Local worker processes (default: all cores).")
@click.option("--cluster", default=None, help="Dask scheduler tcp://HOST:PORT or local:N.")
@click.option("--store", type=click.Path(dir_okay=False), default=None,
              help="Results store: chunks and the structure search are kept and reused.")
@click.option("--confidence", type=click.FloatRange(0, 1, min_open=True, max_open=True),
              default=0.95, show_default=True)
@click.option("--force", is_flag=True, help="Overwrite an existing --json file.")
@click.option("-q", "--quiet", is_flag=True, help="No progress on stderr.")
def command(code_arg, decoders, ebn0, seed, json_path, search_ebn0, candidates, max_structures,
            pseudo_starts, max_frames, rel_half_width, min_effective_hits, defensive,
            chunk_frames, time_budget, workers, cluster, store, confidence, force, quiet):
    """Find the error structures of CODE under each decoder and estimate FER by importance sampling.

    For every decoder: a structure search (trapping sets for message passing,
    LP pseudo-codewords for lp, codewords for ml/exact, plus the lightest
    codewords in every case), then a mean-shifted mixture importance-sampling
    estimate at each Eb/N0 with its interval, Kish effective hits and the plain
    Monte Carlo frames it replaces. Points with too few effective hits are
    marked untrustworthy and get the interval [0, upper bound].
    """
    from .. import load_code
    from ..analysis.error_structures import (
        find_low_weight_codewords,
        search_structures,
        structure_family,
    )
    from ..decoders.base import make_decoder
    from ..engine.executors import make_executor
    from ..engine.importance_sampling import Bias, FloorStop, estimate_floor
    from ..engine.simulate import parse_grid
    from ..engine.store import Store
    from ..errors import InputError

    outputs = Outputs(force)
    outputs.protect(store, f"the store --store {store}", store=True)
    outputs.protect_if_file(code_arg, f"the code file {code_arg}")
    outputs.add(json_path, "--json")
    outputs.check()
    code = load_code(code_arg)
    grid = parse_grid(ebn0, "--ebn0")
    specs = []
    for d in decoders:
        structure_family(d)  # refuse decoders the estimator cannot aim at, before any work
        specs.append(make_decoder(d, code).spec)
    if len(set(specs)) != len(specs):
        raise InputError("A decoder is given twice.")
    stop = FloorStop(rel_half_width=rel_half_width, max_frames=max_frames,
                     min_effective_hits=min_effective_hits, time_budget=time_budget)
    s_ebn0 = search_ebn0 if search_ebn0 is not None else sorted(grid)[len(grid) // 2]
    st = Store.open_writer(store, code) if store else None
    say = (lambda msg: None) if quiet else (lambda msg: click.echo(msg, err=True))
    points, searches = [], {}
    try:
        cw = find_low_weight_codewords(code, budget=100, seed=seed)
        for spec in specs:
            search_key = hashlib.sha256(json.dumps(
                [code.fingerprint, spec, s_ebn0, seed, candidates, max_structures,
                 pseudo_starts, 1], sort_keys=True).encode()).hexdigest()[:16]
            cached = st.get_payload("structure-search", search_key) if st else None
            from ..analysis.error_structures import ErrorStructure, StructureSearch

            if cached is not None:
                search = StructureSearch([ErrorStructure.from_dict(d) for d in
                                          cached["structures"]], cached["family"],
                                         cached["settings"], cached["seconds"], cached["notes"])
                say(f"{spec}: reusing the stored structure search ({len(search.structures)} "
                    "structures)")
            else:
                say(f"{spec}: searching error structures at Eb/N0 {s_ebn0:g} dB ...")
                search = search_structures(
                    code, spec, s_ebn0, seed=seed, max_candidates=candidates,
                    max_structures=max(max_structures, 1), pseudo_starts=pseudo_starts)
                if st:
                    st.put_payload("structure-search", search_key, search.to_dict())
            used = search.structures[:max_structures]
            searches[spec] = search
            say(f"{spec}: {len(search.structures)} structures found in {search.seconds:.1f} s"
                + (f"; lightest effective weight {used[0].effective_weight:.3f}" if used else ""))
            if not used:
                say(f"{spec}: no error structure to aim at: the estimate is plain Monte Carlo "
                    "and will rarely be trustworthy at low error rates")
            biases = [Bias(s.bits, s.shift, f"{s.kind} {i}") for i, s in enumerate(used)]

            def progress(info, spec=spec):
                if quiet or not sys.stderr.isatty():
                    return
                click.echo(f"\r{spec} Eb/N0 {info['ebn0_db']:g}: {info['frames']} frames, "
                           f"{info['hits']} hits, eff {info['effective_hits']:.1f}, "
                           f"FER {info['fer']:.3g}    ", err=True, nl=False)

            executor = make_executor(workers, cluster)
            res = estimate_floor(code, spec, biases, grid, seed=seed, stop=stop,
                                 chunk_frames=chunk_frames, defensive=defensive,
                                 confidence=confidence, executor=executor, store=st,
                                 progress=progress)
            if not quiet and sys.stderr.isatty():
                click.echo("", err=True)
            for p in res.points:
                d = p.to_dict()
                for h in d["structures_hit"]:
                    k = h["structure"]
                    if 0 <= k < len(used):
                        h.update({kk: vv for kk, vv in used[k].to_dict().items()
                                  if kk in ("kind", "a", "b", "effective_weight", "bits")})
                d["structures"] = {"family": search.family, "used": len(used),
                                   "lightest": [s.to_dict() for s in used[:5]]}
                if not used:
                    d["reason"] = ("the structure search found nothing; plain Monte Carlo. "
                                   + d["reason"])
                d["union_bound"] = union_terms(code, cw, used, p.ebn0_db)
                points.append(d)
    finally:
        if st:
            st.close()
    click.echo(f"{code.name} (n={code.n}, k={code.k}, R={code.rate:.4g}): importance-sampling "
               f"FER, {int(confidence * 100)} % intervals")
    click.echo(f"{'decoder':24s} {'Eb/N0':>6s} {'FER':>10s} {'interval':>23s} {'eff.hits':>9s} "
               f"{'frames':>8s} {'equiv. frames':>14s}  note")
    for d in points:
        lo, hi = d["fer_ci"]
        eq = "-" if d["equivalent_frames"] is None else f"{d['equivalent_frames']:.3g}"
        note = "" if d["trustworthy"] else "NOT TRUSTWORTHY"
        click.echo(f"{d['decoder'][:24]:24s} {d['ebn0_db']:6g} {d['fer']:10.3g} "
                   f"[{lo:9.3g}, {hi:9.3g}] {d['effective_hits']:9.1f} {d['frames']:8d} "
                   f"{eq:>14s}  {note}")
    click.echo(CAUTION)
    if json_path:
        doc = {"code": {**code.summary(), "source": code.source},
               "method": "importance-sampling",
               "settings": {"seed": seed, "search_ebn0_db": s_ebn0, "defensive": defensive,
                            "chunk_frames": chunk_frames, "confidence": confidence,
                            **stop.to_dict()},
               "codewords": cw.to_dict(limit=10),
               "searches": {k: v.to_dict(limit=50) for k, v in searches.items()},
               "points": points, "caution": CAUTION}
        with open(json_path, "w", encoding="utf-8") as fh:
            json.dump(doc, fh, indent=1, default=_jsonable)
        click.echo(f"wrote {json_path}")


def _jsonable(v):
    import numpy as np

    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    if isinstance(v, np.ndarray):
        return v.tolist()
    raise TypeError(f"not JSON serialisable: {type(v)}")
