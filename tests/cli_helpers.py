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


def assert_clean_error(done, *fragments):
    """A finished subprocess ended with exit status 2 and one ``Error: ...`` line
    naming every fragment (case-insensitive), and no traceback."""
    assert done.returncode == 2, (done.returncode, done.stderr[-2000:])
    assert "Traceback" not in done.stderr, done.stderr[-2000:]
    lines = [ln for ln in done.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("Error: "), done.stderr[-2000:]
    for f in fragments:
        assert f.lower() in lines[0].lower(), (f, lines[0])
