"""``ldpcmarg threshold``: decoding threshold of an ensemble by density evolution.

BP on the BEC and the BI-AWGN channel; Gallager A/B on the BSC (``--decoder``).
"""

from __future__ import annotations

import json

import click

from .._text import plural
from ..errors import InputError

_METHOD_NAMES = {
    "exact": "exact density evolution (erasure-probability recursion)",
    "discretized": "discretised density evolution of quantised LLR densities",
    "gaussian": "Gaussian approximation (APPROXIMATE)",
    "gallager-a": "Gallager A density evolution (binary messages, closed form)",
    "gallager-b": "Gallager B density evolution (binary messages, closed form)",
}


def _ensemble(code, regular, var_edges, check_edges, var_nodes, check_nodes):
    """Build the DegreeDistribution from exactly one of the accepted sources."""
    from ..analysis.density_evolution import DegreeDistribution

    sources = [code is not None, regular is not None,
               var_edges is not None or check_edges is not None,
               var_nodes is not None or check_nodes is not None]
    if sum(sources) != 1:
        raise InputError(
            "Give exactly one ensemble: a CODE, --regular DV,DC, "
            "--var-edges/--check-edges, or --var-nodes/--check-nodes."
        )
    if code is not None:
        try:
            from .. import load_code

            c = load_code(code)
        except ModuleNotFoundError as exc:
            if exc.name == "ldpcmarg.code.io":
                raise InputError("Loading codes is not available in this build "
                                 "(ldpcmarg.code.io is missing).") from exc
            raise
        return DegreeDistribution.from_code(c)
    if regular is not None:
        parts = [p.strip() for p in regular.split(",")]
        try:
            dv, dc = (int(p) for p in parts)
        except ValueError:
            raise InputError(
                f"--regular takes two integers DV,DC such as '3,6'; got {regular!r}."
            ) from None
        return DegreeDistribution.regular(dv, dc)
    if var_edges is not None or check_edges is not None:
        if var_edges is None or check_edges is None:
            raise InputError("Give both --var-edges and --check-edges.")
        return DegreeDistribution.from_edge_fractions(var_edges, check_edges,
                                                      label="given edge fractions")
    if var_nodes is None or check_nodes is None:
        raise InputError("Give both --var-nodes and --check-nodes.")
    return DegreeDistribution.from_node_fractions(var_nodes, check_nodes,
                                                  label="given node fractions")


def _settings_text(res) -> str:
    s = res.settings
    if res.method == "discretized":
        return (f"step {s['step']:g}, LLR range +-{s['llr_max']:g}, at most "
                f"{plural(s['max_iter'], 'iteration')}, success at error probability "
                f"<= {s['target']:g}")
    if res.method == "gaussian":
        return f"phi by {s['phi']}, at most {plural(s['max_iter'], 'iteration')}"
    if res.channel == "bsc":
        flips = ", ".join(f"d={d}: b={t}" for d, t in s["flip_thresholds"].items())
        return (f"flip thresholds {flips}; at most {plural(s['max_iter'], 'iteration')}, "
                f"success at message error probability <= {s['target']:g}")
    return (f"at most {plural(s['max_iter'], 'iteration')}, success at erasure probability "
            f"<= {s['target']:g}")


def format_result(res) -> str:
    """Readable multi-line report of a :class:`ThresholdResult`."""
    from ..analysis.density_evolution import _poly_text

    ens = res.ensemble
    lines = []
    lam = _dict_poly(ens["lambda"])
    rho = _dict_poly(ens["rho"])
    lines.append(f"ensemble        {ens['label'] or '(unnamed)'}")
    lines.append(f"                lambda(x) = {_poly_text(lam)}")
    lines.append(f"                rho(x)    = {_poly_text(rho)}   (edge perspective)")
    lines.append(f"design rate     {res.rate:.6f}")
    if res.channel == "bec":
        lines.append("channel         binary erasure channel")
    elif res.channel == "bsc":
        lines.append("channel         binary symmetric channel")
    else:
        lines.append("channel         BI-AWGN (BPSK, unit symbol energy)")
    lines.append(f"method          {_METHOD_NAMES[res.method]}")
    lines.append(f"                {_settings_text(res)}")
    if res.channel == "bsc":
        lines.append(f"threshold       p* = {res.threshold:.6f}   "
                     f"(to within {res.tolerance:.1g})")
        lines.append(f"capacity limit  p  = {res.capacity_limit:.6f}   (1 - h(p) = R)")
        lines.append(f"gap             {res.capacity_limit - res.threshold:.6f} in p "
                     f"(p*/p_Shannon = {res.threshold / res.capacity_limit:.4f})")
    elif res.channel == "bec":
        lines.append(f"threshold       eps* = {res.threshold:.6f}   "
                     f"(to within {res.tolerance:.1g})")
        lines.append(f"capacity limit  eps  = 1 - R = {res.capacity_limit:.6f}")
        lines.append(f"gap             {res.capacity_limit - res.threshold:.6f} in eps "
                     f"(eps*/(1 - R) = {res.threshold / res.capacity_limit:.4f})")
    else:
        approx = "  [approximate]" if res.approximate else ""
        lines.append(f"threshold       sigma* = {res.threshold:.5f}   (to within "
                     f"{res.tolerance:.1g}){approx}")
        if res.ebn0_db is not None:
            lines.append(f"                Eb/N0  = {res.ebn0_db:.4f} dB at the design rate")
        if res.capacity_ebn0_db is not None:
            lines.append(f"Shannon limit   sigma  = {res.capacity_limit:.5f}, Eb/N0 = "
                         f"{res.capacity_ebn0_db:.4f} dB (BI-AWGN capacity, numerical "
                         "integration)")
            if res.gap_db is not None:
                lines.append(f"gap             {res.gap_db:.4f} dB")
    if "note" in res.settings:
        lines.append(f"note            {res.settings['note']}")
    lines.append(f"iterations      {plural(res.iterations, 'iteration')} at the largest "
                 "converging parameter")
    lines.append(f"time            {res.seconds:.2f} s")
    return "\n".join(lines)


def _dict_poly(d: dict):
    import numpy as np

    degs = [int(k) for k in d]
    arr = np.zeros(max(degs) + 1)
    for k, v in d.items():
        arr[int(k)] = v
    return arr


@click.command("threshold")
@click.argument("code", required=False)
@click.option("--regular", metavar="DV,DC", help="Regular ensemble, e.g. 3,6.")
@click.option("--var-edges", metavar="D:F,...",
              help="Variable-node edge fractions lambda_d, e.g. '2:0.3,3:0.7'.")
@click.option("--check-edges", metavar="D:F,...",
              help="Check-node edge fractions rho_d, e.g. '6:1'.")
@click.option("--var-nodes", metavar="D:F,...",
              help="Variable-node fractions by nodes (converted to edge fractions).")
@click.option("--check-nodes", metavar="D:F,...",
              help="Check-node fractions by nodes (converted to edge fractions).")
@click.option("--decoder", type=click.Choice(["bp", "gallager-a", "gallager-b"]), default="bp",
              show_default=True,
              help="Decoder whose threshold is computed: belief propagation (BEC, AWGN) or "
                   "Gallager's hard-decision algorithms A/B (BSC).")
@click.option("--channel", type=click.Choice(["bec", "awgn", "bsc"]),
              help="Channel [default: awgn for bp, bsc for gallager-a/b].")
@click.option("--method", type=click.Choice(["exact", "discretized", "gaussian"]),
              help="exact (BEC; default there), discretized (AWGN; default there) "
                   "or gaussian (AWGN, approximate).")
@click.option("--step", type=float, help="discretized: LLR quantisation step [default 0.05].")
@click.option("--llr-max", type=float, help="discretized: LLR grid half-range [default 25].")
@click.option("--max-iter", type=click.IntRange(min=1), help="Iteration cap per trial.")
@click.option("--tol", type=float, help="Width of the final bisection bracket.")
@click.option("--target", type=float,
              help="Error (BEC: erasure) probability counted as convergence.")
@click.option("--phi", "phi_form", type=click.Choice(["integral", "closed-form"]),
              help="gaussian: how phi is evaluated [default integral].")
@click.option("--b", "flip_b", type=click.IntRange(min=1),
              help="gallager-b: disagreeing check messages (of d - 1) that overturn the "
                   "channel value [default min(ceil(d/2)+1, d-1) per bit degree d].")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
def command(code, regular, var_edges, check_edges, var_nodes, check_nodes, decoder, channel,
            method, step, llr_max, max_iter, tol, target, phi_form, flip_b, as_json):
    """Decoding threshold of an LDPC ensemble by density evolution.

    The ensemble is the Tanner graph of CODE (shipped name or file), a regular
    pair (--regular 3,6) or degree distributions given as degree:fraction
    lists. The threshold is reported as the channel parameter (BEC erasure
    probability eps*, AWGN noise sigma* with Es = 1, BSC crossover
    probability p*) and, for the AWGN channel, as Eb/N0 at the design rate,
    next to the Shannon limit. BP thresholds are offered on the BEC and the
    AWGN channel; --decoder gallager-a/gallager-b gives the thresholds of
    Gallager's hard-decision algorithms on the BSC.
    """
    from ..analysis.density_evolution import METHODS, compute_threshold

    dd = _ensemble(code, regular, var_edges, check_edges, var_nodes, check_nodes)
    if decoder == "bp":
        channel = channel or "awgn"
        if channel == "bsc":
            raise InputError("BP density evolution on the BSC is not offered; use "
                             "--decoder gallager-a or gallager-b there.")
        if flip_b is not None:
            raise InputError("Option --b applies to --decoder gallager-b only.")
    else:
        channel = channel or "bsc"
        if channel != "bsc":
            raise InputError(f"--decoder {decoder} is a BSC decoder; drop --channel {channel} "
                             "or use --channel bsc.")
        if method is not None:
            raise InputError(f"Option --method does not apply to --decoder {decoder}.")
        if flip_b is not None and decoder != "gallager-b":
            raise InputError("Option --b applies to --decoder gallager-b only.")
        method = decoder
    method = method or METHODS[channel][0]
    if method not in METHODS[channel]:
        raise InputError(f"--method {method} is not available for the {channel} channel; "
                         f"accepted: {', '.join(METHODS[channel])}.")
    given = {"step": step, "llr_max": llr_max, "max_iter": max_iter, "tol": tol,
             "target": target, "phi_form": phi_form, "b": flip_b}
    options = {k: v for k, v in given.items() if v is not None}
    allowed = {"exact": {"max_iter", "tol", "target"},
               "discretized": {"step", "llr_max", "max_iter", "tol", "target"},
               "gaussian": {"max_iter", "tol", "phi_form"},
               "gallager-a": {"max_iter", "tol", "target"},
               "gallager-b": {"max_iter", "tol", "target", "b"}}.get(method, set())
    for k in options:
        if k not in allowed:
            flag = "--phi" if k == "phi_form" else "--" + k.replace("_", "-")
            raise InputError(f"Option {flag} does not apply to --method {method}.")
    res = compute_threshold(dd, channel=channel, method=method, **options)
    if as_json:
        click.echo(json.dumps(res.to_dict(), indent=2))
    else:
        click.echo(format_result(res))
