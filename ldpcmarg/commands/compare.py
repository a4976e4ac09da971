"""``ldpcmarg compare``: decoders side by side on the same frames."""

from __future__ import annotations

import json
from pathlib import Path

import click

from ..errors import InputError
from ._outputs import Outputs
from .posteriors import load_code_arg


def parse_points(text: str, what: str) -> list[float]:
    """SNR points: ``"1,2,3"`` or ``"start:step:stop"`` (the same grid syntax as ``simulate``)."""
    from ..engine.simulate import parse_grid

    return parse_grid(text, option=f"--{what}")


@click.command("compare")
@click.argument("code")
@click.option("-d", "--decoder", "decoders", multiple=True, required=True,
              help="Decoder spec NAME:key=value,... (repeat for each decoder).")
@click.option("--ebn0",
              help="BPSK-AWGN at these Eb/N0 points (dB; rate k/n): '1,2,3' or "
                   "start:step:stop such as '1:0.5:3'.")
@click.option("--esn0", help="BPSK-AWGN at these Es/N0 points (dB).")
@click.option("--sigma", help="BPSK-AWGN with these noise standard deviations.")
@click.option("--bsc", help="BSC with these crossover probabilities.")
@click.option("--bec", help="BEC with these erasure probabilities.")
@click.option("--frames", type=click.IntRange(min=1), default=200, show_default=True,
              help="Frames per point (the same frames for every decoder).")
@click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True,
              help="Seed of the frames (codewords and noise); point j uses (seed, j).")
@click.option("--reference", default="auto", show_default=True,
              help="Posterior reference: auto (exact when the code is small enough), exact, "
                   "none, or a decoder spec.")
@click.option("--bins", type=click.IntRange(min=2), default=12, show_default=True,
              help="Calibration bins.")
@click.option("--binning", type=click.Choice(["log", "uniform"]), default="log",
              show_default=True, help="Calibration bins on the stated bit-error probability.")
@click.option("--json", "json_path", type=click.Path(dir_okay=False),
              help="Write all results as JSON to this file ('-' for standard output).")
@click.option("--plots", "plot_dir", type=click.Path(file_okay=False),
              help="Write figures (PNG) into this directory.")
@click.option("--force", is_flag=True, help="Overwrite an existing JSON file or figures.")
@click.option("--quiet", is_flag=True, help="No progress lines.")
def command(code, decoders, ebn0, esn0, sigma, bsc, bec, frames, seed, reference, bins, binning,
            json_path, plot_dir, force, quiet):
    """Compare decoders on the same seeded frames of CODE.

    Per decoder and SNR point: BER, FER, mean/max |P(x=1) error| and mean KL
    divergence (bits) against the exact posteriors or the reference decoder,
    expected calibration error, mutual information (bits) between transmitted
    bits and output LLRs, iterations and time per frame. Give exactly one of
    --ebn0, --esn0, --sigma, --bsc, --bec.

    Tip: message-passing decoders stop at the first valid hard decision by
    default; add early_stop=false to compare converged soft outputs.
    """
    from ..analysis.compare import compare_decoders

    given = {k: v for k, v in dict(ebn0=ebn0, esn0=esn0, sigma=sigma, p=bsc, epsilon=bec).items()
             if v is not None}
    if len(given) != 1:
        raise InputError("Give exactly one of --ebn0, --esn0, --sigma, --bsc or --bec.")
    (unit, text), = given.items()
    points = parse_points(text, {"p": "bsc", "epsilon": "bec"}.get(unit, unit))
    outputs = Outputs(force)
    outputs.protect_if_file(code, f"the code file {code}")
    if json_path != "-":
        outputs.add(json_path, "--json")
    outputs.add_dir(plot_dir, "--plots", "compare_*.png")
    outputs.check()
    the_code = load_code_arg(code)

    def progress(snr, label):
        if not quiet:
            click.echo(f"  {unit} = {snr:g}: {label}", err=True)

    res = compare_decoders(the_code, list(decoders), snr=points, snr_unit=unit, frames=frames,
                           seed=seed, reference=reference, num_bins=bins, binning=binning,
                           progress=progress)
    if json_path == "-":
        click.echo(json.dumps(res.to_dict(), indent=1, allow_nan=False))
    else:
        click.echo(res.format_table())
        if json_path:
            Path(json_path).write_text(json.dumps(res.to_dict(), indent=1, allow_nan=False))
            click.echo(f"wrote {json_path}")
    if plot_dir:
        from ..plots.compare import save_compare_figures

        paths = save_compare_figures(res, plot_dir, force=force)
        click.echo("wrote " + ", ".join(str(p) for p in paths), err=json_path == "-")
