"""``ldpcmarg pseudocodewords``: low AWGN pseudo-weight LP pseudo-codewords (instanton search)."""

from __future__ import annotations

import json
import sys

import click

from ._outputs import Outputs


@click.command("pseudocodewords")
@click.argument("code_arg", metavar="CODE")
@click.option("--json", "json_path", type=click.Path(dir_okay=False), default=None,
              help="Write the pseudo-codewords, lightest first, to this JSON file.")
@click.option("--starts", type=click.IntRange(1, 100_000), default=60, show_default=True,
              help="Random starting noise vectors of the instanton search.")
@click.option("--start-ebn0", type=float, default=1.0, show_default=True,
              help="Eb/N0 (dB) of the starting noise.")
@click.option("--seed", type=click.IntRange(0), default=0, show_default=True)
@click.option("--time-budget", type=click.FloatRange(0, min_open=True), default=300.0,
              show_default=True, help="Seconds for the whole search.")
@click.option("--top", type=click.IntRange(1), default=10, show_default=True,
              help="Rows of the printed table.")
@click.option("--force", is_flag=True, help="Overwrite an existing --json file.")
def command(code_arg, json_path, starts, start_ebn0, seed, time_budget, top, force):
    """Search LP pseudo-codewords of CODE by the instanton method (Chertkov & Stepanov 2008).

    The AWGN pseudo-weight (sum w)^2 / sum w^2 plays the role of the Hamming
    weight for LP decoding: its error rate at high SNR behaves like
    Q(sqrt(2 R w_p Eb/N0)). The search gives an upper bound on the smallest
    pseudo-weight, not a proof that nothing lighter exists.
    """
    from .. import load_code
    from ..analysis.pseudocodewords import instanton_search

    outputs = Outputs(force)
    outputs.protect_if_file(code_arg, f"the code file {code_arg}")
    outputs.add(json_path, "--json")
    outputs.check()
    code = load_code(code_arg)

    def progress(done, total, best):
        if sys.stderr.isatty():
            click.echo(f"\rstart {done}/{total}, lightest {best:.4f}", err=True, nl=False)

    res = instanton_search(code, starts=starts, start_ebn0_db=start_ebn0, seed=seed,
                           time_budget=time_budget, progress=progress)
    if sys.stderr.isatty():
        click.echo("", err=True)
    items = [{"awgn_pseudo_weight": s.pseudo_weight, "support": [int(i) for i in s.bits],
              "values": [round(float(-v / s.shift.min() if s.shift.min() < 0 else 0), 9)
                         for v in s.shift],
              "kind": s.kind, "hits": s.hits} for s in res.structures]
    click.echo(f"{code.name}: {len(items)} distinct pseudo-codewords from {starts} starts "
               f"({res.seconds:.1f} s)")
    for note in res.notes:
        click.echo(f"note: {note}")
    if not items:
        click.echo("the search found no pseudo-codeword (every start LP-decoded correctly)")
    for it in items[:top]:
        click.echo(f"  w_p = {it['awgn_pseudo_weight']:.4f}  support {len(it['support'])} bits  "
                   f"{it['kind']}  hits {it['hits']}")
    if json_path:
        doc = {"code": {**code.summary(), "source": code.source},
               "search": {"method": "instanton (Chertkov & Stepanov 2008)", **res.settings,
                          "seconds": round(res.seconds, 3), "notes": res.notes,
                          "found": len(items)},
               "pseudocodewords": items}
        with open(json_path, "w", encoding="utf-8") as fh:
            json.dump(doc, fh, indent=1)
        click.echo(f"wrote {json_path}")
