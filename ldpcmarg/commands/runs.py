"""``ldpcmarg runs``: list the runs held in a results store."""

from __future__ import annotations

import json

import click


@click.command("runs")
@click.argument("store", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print JSON (runs and counted results).")
def command(store, as_json):
    """List the runs in results STORE: settings, decoders, points and chunks.

    The store is opened read-only (also on read-only media); a run written by
    several package versions lists them.
    """
    from ..engine.store import Store, version_history

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
        history = version_history(r["versions"])
        if len(history) > 1:
            keys = [k for k in sorted({k for h in history for k in h})
                    if len({h.get(k) for h in history}) > 1]
            written = "; then ".join(", ".join(f"{k} {h.get(k)}" for k in keys) for h in history)
            click.echo(f"    written by several versions: {written}")
