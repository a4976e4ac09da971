"""``ldpcmarg runs``: list the runs held in a results store."""

from __future__ import annotations

import json

import click


@click.command("runs")
@click.argument("store", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print JSON (runs and counted results).")
def command(store, as_json):
    """List the runs in results STORE: settings, decoders, points and chunks."""
    from ..engine.store import Store

    with Store.open_reader(store) as st:
        meta = st.meta()
        runs = st.runs()
        results = st.results()
    if as_json:
        click.echo(json.dumps({"code": meta, "runs": runs, "results": results}, indent=2))
        return
    click.echo(f"store {store}: code {meta['code_name']} (n={meta['n']}, k={meta['k']}, "
               f"fingerprint {meta['code_fingerprint']})")
    if not runs:
        click.echo("no runs")
        return
    unit = {"ebn0_db": "Eb/N0 dB", "esn0_db": "Es/N0 dB", "p": "p", "epsilon": "epsilon"}
    for r in runs:
        s = r["settings"]
        snr = ", ".join(f"{v:g}" for v in r["snr"])
        click.echo(f"run {r['run']}: {s['channel']} seed={s['seed']} chunk={s['chunk_frames']} "
                   f"{s['codewords']} codewords; created {r['created']}, updated {r['updated']}")
        click.echo(f"    decoders: {', '.join(r['decoders'])}")
        click.echo(f"    {unit.get(s['snr_kind'], s['snr_kind'])}: {snr}")
        click.echo(f"    {r['chunks']} stored chunk rows, {r['decoded_frames']} decoded frames")
