"""``ldpcmarg plot``: BER/FER figure from results stores, JSON or CSV files, and floor JSON."""

from __future__ import annotations

import math

import click

from .._text import plural
from ..errors import InputError
from ._outputs import Outputs


def _thresholds(values) -> dict:
    out = {}
    for item in values:
        label, eq, value = item.rpartition("=")
        if not eq or not label.strip():
            raise InputError(f"--line takes LABEL=VALUE (e.g. 'BP threshold=1.11'); got {item!r}.")
        try:
            out[label.strip()] = float(value)
        except ValueError as exc:
            raise InputError(f"--line value in {item!r} is not a number.") from exc
    return out


@click.command("plot")
@click.argument("sources", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="Figure file: .png, .svg or .pdf.")
@click.option("--run", type=int, default=None,
              help="Only this run of a store (see 'ldpcmarg runs STORE').")
@click.option("--metric", type=click.Choice(["both", "ber", "fer"]), default="both",
              show_default=True, help="Panels to draw.")
@click.option("--line", "lines", multiple=True, metavar="LABEL=X",
              help="Extra vertical line at X in the unit of the x axis (e.g. a threshold in "
                   "dB); the legend adds the value. Repeatable.")
@click.option("--threshold", "threshold_codes", multiple=True, metavar="CODE",
              help="Draw the BI-AWGN BP threshold (discretised density evolution) of CODE's "
                   "degree distribution, as Eb/N0 (or Es/N0) at its design rate; repeatable.")
@click.option("--x-axis", "x_axis", type=click.Choice(["ebn0", "esn0"]), default="ebn0",
              show_default=True, help="AWGN results against Eb/N0 or Es/N0 (dB).")
@click.option("--no-uncoded", is_flag=True, help="Leave out the uncoded reference curve.")
@click.option("--no-shannon", is_flag=True, help="Leave out the Shannon-limit line(s).")
@click.option("--limits", "with_limits", is_flag=True,
              help="FER panel: add the finite-length limits for each code's n and k "
                   "(sphere packing 1959 on AWGN, normal approximation, RCU).")
@click.option("--union-bound", "union_bound", is_flag=True,
              help="FER panel: add the union-bound terms A_w Q(sqrt(2 w R Eb/N0)) recorded in "
                   "floor --json sources (lightest codewords; each decoder's lightest "
                   "structures), labelled with weight and multiplicity.")
@click.option("--no-ml-bound", is_flag=True,
              help="Leave out the ML lower bound counted in the simulation.")
@click.option("--title", default=None,
              help="Figure title [default: code, n, k, channel and iteration cap].")
@click.option("--force", is_flag=True, help="Overwrite an existing figure file.")
def command(sources, output, run, metric, lines, threshold_codes, x_axis, no_uncoded,
            no_shannon, with_limits, union_bound, no_ml_bound, title, force):
    """Draw BER and FER against Eb/N0 from SOURCES (stores, --json or --csv files).

    Several sources (codes, decoders) share one figure; a decoder keeps its
    colour and marker in every figure. Error bars are the confidence
    intervals, hollow markers the upper limit where no error was seen; the
    uncoded reference (BPSK 1/2 erfc(sqrt(Eb/N0)), and on the FER panel a frame
    of k uncoded bits) and the Shannon limit of each code rate are drawn too.
    The FER panel also shows the ML lower bound counted during the simulation
    (frames where the decoder's valid output was at least as likely as the
    sent word) and, with --limits, the finite-length limits of each code's n
    and k.

    A 'floor --json' source (told apart by its content) adds its
    importance-sampling FER estimates to the FER panel: dashed, in the colour
    and marker of the decoder's plain curve, with interval bars; a point with
    too few effective hits shows only its upper bound (hollow marker and
    caret). floor estimates FER only, so floor files need --metric fer or both.
    """
    from ..plots.curves import check_figure_path, curves_from_file, curves_from_store, plot_curves

    check_figure_path(output)
    outputs = Outputs(force)
    for src in sources:
        outputs.protect(src, f"the source {src}", store=True)
    outputs.add(output, "-o")
    outputs.check()
    extra = _thresholds(lines)
    if threshold_codes:
        from .. import load_code
        from ..analysis.density_evolution import DegreeDistribution, compute_threshold

        for name in threshold_codes:
            code = load_code(name)
            thr = compute_threshold(DegreeDistribution.from_code(code), "awgn", "discretized")
            value = thr.ebn0_db
            if x_axis == "esn0":  # Es/N0 = R Eb/N0 at the design rate
                value += 10.0 * math.log10(thr.rate)
            extra[f"BP threshold {code.name}"] = value
    from ..plots.floor import FER_ONLY_MESSAGE, floor_series_from_file, is_floor_file

    curves, floors = [], []
    for src in sources:
        if is_floor_file(src):
            if metric == "ber":
                raise InputError(f"{src}: {FER_ONLY_MESSAGE}")
            floors += floor_series_from_file(src)
        elif run is not None:
            curves += curves_from_store(src, run=run)
        else:
            curves += curves_from_file(src)
    if union_bound and not floors:
        raise InputError("--union-bound draws the terms recorded in floor --json files; "
                         "give one as a source.")
    metrics = ("ber", "fer") if metric == "both" else (metric,)
    if not curves and floors:
        metrics = ("fer",)  # floor files alone: there is no BER to draw
    plot_curves(curves, output, metrics=metrics, thresholds=extra, uncoded=not no_uncoded,
                shannon=not no_shannon, title=title, x_axis=x_axis,
                ml_lower_bound=not no_ml_bound, limits=with_limits,
                progress=lambda text: click.echo(text, err=True), floors=floors,
                union_bound=union_bound)
    drawn = plural(len(curves), "curve")
    if floors:
        drawn += f", {len(floors)} importance-sampling series"
    click.echo(f"wrote {output} ({drawn})")
