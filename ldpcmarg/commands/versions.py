"""``ldpcmarg versions``: environment report for bug reports."""

from __future__ import annotations

import json
import os
import platform
from importlib import metadata

import click

from .._version import __version__


def environment_report() -> dict:
    """Versions of ldpcmarg and its main dependencies, Python and CPU facts."""
    out = {"ldpcmarg": __version__, "python": platform.python_version(),
           "platform": platform.platform(), "cpu_count": os.cpu_count()}
    for pkg in ("numpy", "scipy", "numba", "highspy", "click", "matplotlib", "dask", "distributed"):
        try:
            out[pkg] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            out[pkg] = None
    return out


@click.command("versions")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
def command(as_json):
    """Print versions and machine facts (paste them into bug reports)."""
    rep = environment_report()
    if as_json:
        click.echo(json.dumps(rep, indent=2))
    else:
        for k, v in rep.items():
            click.echo(f"{k:12s} {v}")
