"""``ldpcmarg inspect``: a code's properties as a readable table or JSON."""

from __future__ import annotations

import json

import click
import numpy as np

from .._text import plural
from ..code.io import load_code, shipped_codes
from ..errors import InputError

#: Default information-set budget of the minimum-distance search, by code length.
AUTO_BUDGETS = ((1200, 100), (4096, 20))


def _auto_budget(n: int) -> int:
    for limit, budget in AUTO_BUDGETS:
        if n <= limit:
            return budget
    return 0


def _index_list(idx: np.ndarray, limit: int = 12) -> str:
    if idx.size == 0:
        return "none"
    head = ", ".join(str(int(i)) for i in idx[:limit])
    more = f", ... ({idx.size} in all)" if idx.size > limit else f" ({idx.size})"
    return head + more


def code_report(code, dmin_budget: int | None = None, dmin_seed: int = 0,
                exact_k: int = 26) -> dict:
    """Everything ``inspect`` prints, as a JSON-ready dict."""
    dd = code.degree_distributions()
    g, cycles = code.girth_and_cycles()
    rep = code.summary()
    rep["source"] = code.source
    rep["degrees"] = dd.as_dict()
    rep["bit_degree_counts"] = {int(d): int(c) for d, c in
                                enumerate(np.bincount(code.var_degrees)) if c}
    rep["check_degree_counts"] = {int(d): int(c) for d, c in
                                  enumerate(np.bincount(code.check_degrees)) if c}
    rep["girth"] = g
    rep["shortest_cycles"] = cycles
    budget = _auto_budget(code.n) if dmin_budget is None else dmin_budget
    if code.k <= exact_k or budget > 0:
        dm = code.minimum_distance(max_exact_k=exact_k, budget=max(budget, 1), seed=dmin_seed)
        rep["min_distance"] = {"value": dm.value, "exact": dm.exact, "method": dm.method}
    else:
        rep["min_distance"] = None
    rep["zero_weight_columns"] = code.zero_weight_columns.tolist()
    rep["zero_rows"] = code.zero_rows.tolist()
    return rep


def _degree_line(counts: dict, total: int, node: dict, edge: dict) -> list[str]:
    return [f"{d}: {c} ({100 * node[d]:.1f}% of nodes, {100 * edge.get(d, 0.0):.1f}% of edges)"
            for d, c in counts.items()]


def format_report(rep: dict) -> str:
    """The human-readable table of :func:`code_report`."""
    dm = rep["min_distance"]
    if dm is None:
        dmin = "not computed (large code; pass --dmin-budget N to search)"
    elif dm["value"] == 0:
        dmin = "none: the code has no nonzero codeword (k = 0)"
    else:
        dmin = (f"{dm['value']} (exact; {dm['method']})" if dm["exact"]
                else f"<= {dm['value']} (upper bound; {dm['method']})")
    g = rep["girth"]
    girth = f"{g} ({plural(rep['shortest_cycles'], 'cycle')} of length {g})" if g else \
        "none (the Tanner graph has no cycle)"
    deg = rep["degrees"]
    rows = [
        ("code", rep["name"]),
        ("source", rep["source"] or "-"),
        ("fingerprint", rep["fingerprint"]),
        ("n (bits)", rep["n"]),
        ("m (checks)", rep["m"]),
        ("rank of H", rep["rank"]),
        ("k = n - rank", rep["k"]),
        ("rate k/n", f"{rep['rate']:.6f}"),
        ("design rate 1-m/n", f"{rep['design_rate']:.6f}"),
        ("edges", rep["edges"]),
    ]
    lines = [f"{k:22s} {v}" for k, v in rows]
    for label, counts, node, edge in (
            ("bit degrees", rep["bit_degree_counts"], deg["var_node"], deg["var_edge"]),
            ("check degrees", rep["check_degree_counts"], deg["check_node"], deg["check_edge"])):
        for i, text in enumerate(_degree_line(counts, 0, node, edge)):
            lines.append(f"{label if i == 0 else '':22s} {text}")
    lines.append(f"{'girth':22s} {girth}")
    lines.append(f"{'minimum distance':22s} {dmin}")
    zc = np.array(rep["zero_weight_columns"], dtype=np.int64)
    zr = np.array(rep["zero_rows"], dtype=np.int64)
    lines.append(f"{'zero-weight columns':22s} {_index_list(zc)}"
                 + ("  <- unprotected bits" if zc.size else ""))
    lines.append(f"{'all-zero rows':22s} {_index_list(zr)}")
    return "\n".join(lines)


@click.command("inspect")
@click.argument("code", required=False)
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of a table.")
@click.option("--dmin-budget", type=click.IntRange(min=0), default=None,
              help="Information sets tried by the minimum-distance search (0: skip the "
                   "search). Default: 100 up to n = 1200, 20 up to n = 4096, else skipped.")
@click.option("--dmin-seed", type=click.IntRange(min=0), default=0, show_default=True,
              help="Seed of the minimum-distance search.")
@click.option("--exact-k", type=click.IntRange(min=0, max=40), default=26, show_default=True,
              help="Enumerate all 2^k codewords (exact minimum distance) when k is at most this.")
@click.option("--list", "list_shipped", is_flag=True, help="List the shipped codes and exit.")
def command(code, as_json, dmin_budget, dmin_seed, exact_k, list_shipped):
    """Print the properties of CODE (a shipped code name or a .mtx/.txt/.npz file).

    Shows n, m, k, rank, rate, design rate, degree distributions, girth and the
    number of shortest cycles, minimum distance (exact or an upper bound),
    zero-weight columns and all-zero rows.
    """
    if list_shipped:
        items = shipped_codes()
        if as_json:
            click.echo(json.dumps([{k: v for k, v in it.items() if k != "card"}
                                   for it in items], indent=2))
        else:
            for it in items:
                click.echo(f"{it['name']:18s} {it['summary']}")
        return
    if code is None:
        raise InputError("Give a CODE (shipped name or file), or --list to see the shipped codes.")
    c = load_code(code)
    rep = code_report(c, dmin_budget=dmin_budget, dmin_seed=dmin_seed, exact_k=exact_k)
    if as_json:
        click.echo(json.dumps(rep, indent=2))
    else:
        click.echo(format_report(rep))
