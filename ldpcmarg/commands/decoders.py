"""``ldpcmarg decoders``: list registered decoders and their options."""

from __future__ import annotations

import click

from .._params import describe_options
from ..decoders.base import decoder_class, decoder_names
from ..errors import InputError


@click.command("decoders")
@click.argument("name", required=False)
def command(name):
    """List decoders (or show the options of decoder NAME).

    Options ride on the name in other commands: NAME:key=value,key=value.
    """
    if name:
        cls = decoder_class(name)
        click.echo(f"{name}: {cls.description}")
        text = describe_options(cls.params)
        click.echo(text if text else "(no options)")
        return
    for n, desc in decoder_names().items():
        try:
            decoder_class(n)
        except InputError:
            continue
        click.echo(f"{n:24s} {desc}")
