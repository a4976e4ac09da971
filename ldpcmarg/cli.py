"""Command-line entry point ``ldpcmarg``.

The group loads each command's module only when that command runs, so
``ldpcmarg --help`` stays fast. Commands live in ``ldpcmarg/commands/<name>.py``
and each defines a click command called ``command``. Every deliberate error
(:class:`~ldpcmarg.errors.LdpcmargError`) becomes one line on stderr and exit
status 2, never a traceback.
"""

from __future__ import annotations

import contextlib
import importlib
import signal
import sys
import threading

import click

from ._version import __version__
from .errors import LdpcmargError, RunInterrupted

# command name -> (module under ldpcmarg.commands, short help)
COMMANDS: dict[str, tuple[str, str]] = {
    "build": ("build", "Construct a parity-check matrix and write it to a file."),
    "inspect": ("inspect", "Print a code's properties (table or JSON)."),
    "decoders": ("decoders", "List the decoders and their options."),
    "simulate": ("simulate", "Monte Carlo BER/FER sweep over SNR points."),
    "plot": ("plot", "Draw BER/FER curves from a results store or CSV."),
    "runs": ("runs", "List the runs held in a results store."),
    "threshold": ("threshold", "Density-evolution BP threshold of a degree distribution."),
    "posteriors": ("posteriors", "Per-bit posteriors (soft outputs) for given channel outputs."),
    "compare": ("compare", "Compare decoders on the same frames: errors, soft-output quality."),
    "limits": ("limits", "Finite-length limits at n, k: normal approx., RCU, sphere packing."),
    "floor": ("floor", "Error structures and an importance-sampling FER estimate (error floor)."),
    "pseudocodewords": ("pseudocodewords", "Low pseudo-weight LP pseudo-codewords (instanton "
                        "search)."),
    "versions": ("versions", "Versions and machine facts for bug reports."),
}


class LazyGroup(click.Group):
    def list_commands(self, ctx):
        return sorted(COMMANDS)

    def get_command(self, ctx, name):
        if name not in COMMANDS:
            return None
        module, _ = COMMANDS[name]
        try:
            mod = importlib.import_module(f"ldpcmarg.commands.{module}")
        except ModuleNotFoundError as exc:
            if exc.name == f"ldpcmarg.commands.{module}":
                return None
            raise
        return mod.command

    def format_commands(self, ctx, formatter):
        rows = [(name, COMMANDS[name][1]) for name in self.list_commands(ctx)
                if self.get_command(ctx, name) is not None]
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="ldpcmarg")
def cli():
    """ldpcmarg: soft-output decoding lab for binary LDPC codes.

    Conventions: bit 0 -> +1 (BPSK), LLR = ln P(0|y) - ln P(1|y),
    Eb/N0 in dB uses the code rate k/n.
    """


def _raise_interrupt(signum, frame):
    raise KeyboardInterrupt


@contextlib.contextmanager
def _sigterm_as_interrupt():
    """SIGTERM stops a command as cleanly as Ctrl-C (stores closed, one line, status 130)."""
    if threading.current_thread() is not threading.main_thread() \
            or signal.getsignal(signal.SIGTERM) is None:  # not ours to replace
        yield
        return
    old = signal.signal(signal.SIGTERM, _raise_interrupt)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, old)


def _interrupt_line(exc: BaseException) -> str:
    """The one line printed for a Ctrl-C or SIGTERM (the command's own, if it gave one)."""
    seen = set()
    while exc is not None and id(exc) not in seen:
        if isinstance(exc, RunInterrupted) and str(exc):
            return str(exc)
        seen.add(id(exc))
        exc = exc.__cause__ or exc.__context__
    return "Interrupted."


def main(argv=None):
    """Run the CLI; turn package errors into one clear message (exit status 2).

    Ctrl-C and SIGTERM end with one line on stderr and exit status 130.
    """
    try:
        with _sigterm_as_interrupt():
            cli.main(args=argv, prog_name="ldpcmarg", standalone_mode=False)
    except click.exceptions.Abort as exc:
        # click turns a KeyboardInterrupt inside a command into Abort (after ending the line)
        cause = exc.__cause__ or exc.__context__
        if isinstance(cause, KeyboardInterrupt):
            click.echo(_interrupt_line(cause), err=True)
        else:
            click.echo("Aborted.", err=True)
        sys.exit(130)
    except click.ClickException as exc:
        exc.show()
        sys.exit(exc.exit_code)
    except click.exceptions.Exit as exc:
        sys.exit(exc.exit_code)
    except LdpcmargError as exc:
        click.echo(f"Error: {exc}", err=True)
        sys.exit(2)
    except KeyboardInterrupt as exc:
        click.echo(_interrupt_line(exc), err=True)
        sys.exit(130)
    except (FileNotFoundError, PermissionError, IsADirectoryError) as exc:
        click.echo(f"Error: {exc.strerror or exc}: {exc.filename}", err=True)
        sys.exit(2)
