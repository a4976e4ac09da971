"""The link options shared by ``simulate``, ``compare`` and ``posteriors``.

``--modulation NAME[:maxlog]`` (bpsk, qpsk, 8psk, qam16, qam64, qam256 or
@FILE), ``--fading none|rayleigh|rician:K=<linear K>[,block=<symbols>]``
(also ``erasure:p=<probability>``), ``--puncture <count>|@FILE``,
``--shorten <count>``, ``--quantize q=<bits>[,step=<LLR step>]`` and
``--interleaver SEED``. See :mod:`ldpcmarg.link.link`.
"""

from __future__ import annotations

import warnings

import click

from ..errors import InputError

__all__ = ["link_options", "build_cli_link", "link_input_files"]

_OPTIONS = [
    click.option("--modulation", default=None, metavar="NAME[:maxlog]",
                 help="Constellation: bpsk (default), qpsk, 8psk, qam16, qam64, qam256 or "
                      "@FILE (points and labels); ':maxlog' selects the max-log demapper.")
    , click.option("--fading", default=None, metavar="SPEC",
                   help="none (default), rayleigh or rician:K=<linear K>, with optional "
                        ",block=<symbols> (block fading); erasure:p=<prob> loses whole blocks.")
    , click.option("--puncture", default=None, metavar="COUNT|@FILE",
                   help="Puncture the first COUNT code bits, or the 0/1 pattern in FILE "
                        "(n bits, or a period dividing n); punctured bits enter with LLR 0.")
    , click.option("--shorten", default=None, metavar="COUNT",
                   help="Shorten the last COUNT information bits (fixed to 0, not sent).")
    , click.option("--quantize", default=None, metavar="q=BITS[,step=STEP]",
                   help="Quantise channel LLRs to BITS bits with this LLR step (default: a "
                        "rule from the SNR, see the README).")
    , click.option("--interleaver", type=click.IntRange(min=0), default=None, metavar="SEED",
                   help="Random bit interleaver over the sent bits, drawn from SEED.")
]


def link_options(func):
    """Decorator adding the link options to a click command."""
    for opt in reversed(_OPTIONS):
        func = opt(func)
    return func


def link_input_files(modulation, puncture) -> list[str]:
    """Files named by @FILE link options (inputs that outputs must not overwrite)."""
    out = []
    if modulation and modulation.strip().startswith("@"):
        out.append(modulation.strip()[1:].rsplit(":", 1)[0] if modulation.strip().endswith(
            (":maxlog", ":exact")) else modulation.strip()[1:])
    if puncture and puncture.strip().startswith("@"):
        out.append(puncture.strip()[1:])
    return out


def build_cli_link(code, *, modulation=None, fading=None, puncture=None, shorten=None,
                   quantize=None, interleaver=None, channel="awgn"):
    """The Link for these options, or None when every option is at its default.

    Warnings (punctured stopping sets) are printed as ``Warning: ...`` on stderr.
    """
    given = any(v is not None for v in (modulation, fading, puncture, shorten, quantize,
                                        interleaver))
    if not given:
        return None
    if channel != "awgn":
        raise InputError("--modulation, --fading, --puncture, --shorten, --quantize and "
                         "--interleaver need the AWGN channel (--ebn0 or --esn0).")
    from ..link.link import Link

    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        link = Link.build(code, modulation=modulation, fading=fading, puncture=puncture,
                          shorten=shorten, quantize=quantize, interleaver=interleaver)
    for w in rec:
        click.echo(f"Warning: {w.message}", err=True)
    return link
