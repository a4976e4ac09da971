"""``ldpcmarg posteriors``: per-bit posteriors for given channel outputs or LLRs."""

from __future__ import annotations

import json

import click

from .._text import plural
from ..errors import InputError
from ._link_options import build_cli_link, link_input_files, link_options
from ._outputs import Outputs

_CHANNEL_FLAGS = ("ebn0", "esn0", "sigma", "bsc", "bec")


def load_code_arg(name_or_path: str):
    """Load a shipped code by name or a matrix file (via :mod:`ldpcmarg.code.io`)."""
    try:
        from ..code.io import load_code
    except ModuleNotFoundError as exc:
        if exc.name == "ldpcmarg.code.io":
            raise InputError(
                "Loading codes needs ldpcmarg.code.io, missing from this build.") from exc
        raise
    return load_code(name_or_path)


def channel_spec_from_flags(**flags) -> str | None:
    """Channel spec string (``"awgn:ebn0=2"``) from at most one of the channel flags."""
    given = {k: v for k, v in flags.items() if v is not None}
    if len(given) > 1:
        raise InputError(
            "Give at most one channel option (--ebn0, --esn0, --sigma, --bsc or --bec); got "
            + ", ".join("--" + k for k in given) + "."
        )
    if not given:
        return None
    (k, v), = given.items()
    return {"ebn0": f"awgn:ebn0={v!r}", "esn0": f"awgn:esn0={v!r}", "sigma": f"awgn:sigma={v!r}",
            "bsc": f"bsc:p={v!r}", "bec": f"bec:epsilon={v!r}"}[k]


@click.command("posteriors")
@click.argument("code")
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=False))
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="Output file: .npz (one file), .npy (+ .llr.npy, .bits.npy, .npy.json) "
                   "or .csv (long format + .csv.json).")
@click.option("-d", "--decoder", default="sum-product:early_stop=false", show_default=True,
              help="Decoder spec NAME:key=value,... (see 'ldpcmarg decoders'). The default "
                   "runs sum-product to its iteration limit: stopping at the first valid hard "
                   "decision leaves the soft outputs unconverged.")
@click.option("--ebn0", type=float, help="INPUT holds BPSK-AWGN outputs at this Eb/N0 (dB; "
                                         "uses the code rate k/n).")
@click.option("--esn0", type=float, help="INPUT holds BPSK-AWGN outputs at this Es/N0 (dB).")
@click.option("--sigma", type=float, help="INPUT holds BPSK-AWGN outputs with noise std SIGMA.")
@click.option("--bsc", type=float, metavar="P", help="INPUT holds BSC outputs (0/1), crossover P.")
@click.option("--bec", type=float, metavar="EPS",
              help="INPUT holds BEC outputs (0, 1, 2 = erased), erasure probability EPS.")
@link_options
@click.option("--key", help="Array name inside an .npz INPUT holding several arrays (with a "
                            "link: the received symbols, default 'y').")
@click.option("--format", "fmt", type=click.Choice(["npz", "npy", "csv"]),
              help="Output format (default: from the output file's extension).")
@click.option("--force", is_flag=True, help="Overwrite existing output files.")
@click.option("--json", "as_json", is_flag=True, help="Print the run summary as JSON.")
def command(code, input_path, output, decoder, ebn0, esn0, sigma, bsc, bec, modulation, fading,
            puncture, shorten, quantize, interleaver, key, fmt, force, as_json):
    """Decode the frames in INPUT and write per-bit posteriors P(x=1|y) and posterior LLRs.

    CODE is a shipped code name or a parity-check matrix file. INPUT (.npy,
    .npz, .csv/.txt/.tsv/.dat) holds one frame of shape (n,) or F frames of
    shape (F, n). Without a channel option INPUT holds channel LLRs
    (ln P(y|0) - ln P(y|1), positive favours 0); with one it holds channel
    outputs. Per-frame iterations, validity and the decoder's certificates
    (duality gap, ln Z bound, ML certificate, ...) go into the .npz or the
    JSON sidecar. Existing outputs are kept unless --force is given.

    With a link option (--modulation, --fading, --puncture, --shorten,
    --quantize, --interleaver) INPUT holds received symbols: an .npz with the
    complex array 'y' of shape (F, S), S symbols per frame as the link sends
    them, and the channel gains 'h' of the same shape (required with fading),
    or an .npy of symbols; the noise level is --ebn0 (transmitted rate and
    bits per symbol), --esn0 or --sigma (per real dimension). They are
    demapped, de-interleaved, punctured bits re-inserted with LLR 0 and
    shortened bits with the maximal LLR, quantised with --quantize, and decoded.
    """
    from ..analysis.posteriors import compute_posteriors, output_paths, read_frames

    spec = channel_spec_from_flags(ebn0=ebn0, esn0=esn0, sigma=sigma, bsc=bsc, bec=bec)
    # check the output target before the (possibly long) decoding
    outputs = Outputs(force)
    outputs.protect(input_path, f"the input {input_path}")
    outputs.protect_if_file(code, f"the code file {code}")
    for f in link_input_files(modulation, puncture):
        outputs.protect_if_file(f, f"the link file {f}")
    for role, target in output_paths(output, fmt).items():
        outputs.add(target, "-o" if role in ("bundle", "p1", "table") else f"-o ({role} file)")
    outputs.check()
    the_code = load_code_arg(code)
    link = build_cli_link(the_code, modulation=modulation, fading=fading, puncture=puncture,
                          shorten=shorten, quantize=quantize, interleaver=interleaver,
                          channel="awgn" if spec is None or spec.startswith("awgn") else "other")
    if link is not None:
        if spec is None:
            raise InputError("Received symbols need the noise level: give --ebn0 (dB, with the "
                             "transmitted rate and bits per symbol), --esn0 (dB) or --sigma.")
        from ..analysis.posteriors import read_received

        y, h = read_received(input_path, key=key)
        res = compute_posteriors(the_code, decoder, outputs=y, gains=h, channel=spec, link=link)
        return _finish(res, output, fmt, force, decoder, as_json)
    data = read_frames(input_path, key=key, n=the_code.n,
                       prefer=("outputs", "y", "llr") if spec else ("llr", "outputs", "y"))
    if spec is None:
        res = compute_posteriors(the_code, decoder, llr=data)
    else:
        res = compute_posteriors(the_code, decoder, outputs=data, channel=spec)
    _finish(res, output, fmt, force, decoder, as_json)


def _finish(res, output, fmt, force, decoder, as_json):
    from ..analysis.posteriors import write_posteriors

    written = write_posteriors(res, output, fmt=fmt, force=force)
    summary = res.summary()
    summary["decoder"] = decoder
    summary["files"] = [str(p) for p in written]
    if as_json:
        click.echo(json.dumps(summary, indent=2))
        return
    click.echo(f"{plural(summary['frames'], 'frame')} of length {summary['n']} decoded with "
               f"{summary['decoder']}: {summary['valid_frames']} valid, "
               f"{summary['mean_iterations']:.1f} iterations on average.")
    ch = res.meta.get("channel") or {}
    if res.meta.get("input") == "received-symbols":
        click.echo(f"  link: {ch['modulation']}"
                   + (":maxlog" if ch["demapper"] == "maxlog" else "")
                   + f", fading {ch['fading_spec']}, {ch['symbols_per_frame']} symbols per "
                   f"frame, transmitted rate {ch['transmitted_rate']:.4g}, Eb/N0 "
                   f"{ch['ebn0_db']:.4g} dB (Es/N0 {ch['esn0_db']:.4g} dB)")
    for k, v in summary.items():
        if isinstance(v, dict):
            click.echo(f"  {k}: min {v['min']!r}, mean {v['mean']!r}, max {v['max']!r}")
    click.echo("wrote " + ", ".join(summary["files"]))
