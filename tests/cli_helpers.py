"""Running the command line in-process from tests."""

from __future__ import annotations

from ldpcmarg.cli import main


def run_cli(argv, capsys):
    """Run ``ldpcmarg ARGV`` in this process; return (exit status, stdout, stderr)."""
    try:
        main([str(a) for a in argv])
        status = 0
    except SystemExit as exc:
        status = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    out = capsys.readouterr()
    return status, out.out, out.err
