"""CLI 'build' and 'inspect': tables, JSON, and one clear error (no traceback) per bad file."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from cli_helpers import run_cli as run
from test_io import malformed_files

ROOT = Path(__file__).resolve().parent.parent


def test_every_malformed_file_gives_one_line_error(tmp_path, capsys):
    for label, path, fragment in malformed_files(tmp_path):
        status, out, err = run(["inspect", str(path)], capsys)
        assert status == 2, label
        assert "Traceback" not in err and out == "", label
        lines = err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("Error: "), (label, err)
        assert fragment in lines[0] and path.name in lines[0], (label, err)


@pytest.mark.parametrize("content,fragment", [
    ("ldpcmarg-checks n=4 m=1\n0 9\n", "out of range"),
    ("%%MatrixMarket matrix coordinate pattern general\n2 2 2\n1 1\n1 1\n", "duplicate entry"),
])
def test_subprocess_has_no_traceback(tmp_path, content, fragment):
    p = tmp_path / ("bad.txt" if content.startswith("ldpc") else "bad.mtx")
    p.write_text(content)
    res = subprocess.run([sys.executable, "-m", "ldpcmarg", "inspect", str(p)], cwd=ROOT,
                         capture_output=True, text=True, timeout=120)
    assert res.returncode != 0
    assert "Traceback" not in res.stderr
    assert fragment in res.stderr and len(res.stderr.strip().splitlines()) == 1


def test_inspect_table_and_json(capsys):
    status, out, err = run(["inspect", "tanner-155-64", "--dmin-budget", "300"], capsys)
    assert status == 0, err
    assert "k = n - rank           64" in out
    # Tanner, Sridhara & Fuja (2001): girth 8, minimum distance 20
    assert "girth                  8 (" in out
    assert "<= 20 (upper bound" in out
    status, out, _ = run(["inspect", "hamming-7-4", "--json"], capsys)
    rep = json.loads(out)
    assert rep["k"] == 4 and rep["min_distance"] == {
        "value": 3, "exact": True, "method": "exhaustive enumeration of 2^4 codewords"}
    assert rep["girth"] == 4 and rep["shortest_cycles"] == 3
    assert rep["zero_weight_columns"] == [] and rep["zero_rows"] == []


def test_inspect_reports_zero_columns_and_rows(tmp_path, capsys):
    p = tmp_path / "z.txt"
    p.write_text("ldpcmarg-checks n=5 m=3\n0 1\n-\n1 3\n")
    status, out, _ = run(["inspect", str(p)], capsys)
    assert status == 0
    assert "zero-weight columns    2, 4 (2)  <- unprotected bits" in out
    assert "all-zero rows          1 (1)" in out
    assert "1 (exact" in out  # an unprotected bit is a weight-1 codeword


def test_inspect_list(capsys):
    status, out, _ = run(["inspect", "--list"], capsys)
    assert status == 0 and "tanner-155-64" in out and "drifter-256-128" in out


@pytest.mark.parametrize("args,check", [
    (["peg", "-n", "96", "--bit-degree", "3", "--check-degree", "6", "--seed", "3"],
     lambda c: c.n == 96 and c.m == 48 and (c.check_degrees == 6).all()),
    (["peg", "-n", "200", "--bit-dist", "2:0.3,3:0.7", "--check-dist", "6:1", "--order",
      "descending"], lambda c: c.n == 200 and set(c.var_degrees.tolist()) == {2, 3}),
    (["regular", "-n", "60", "--bit-degree", "3", "--check-degree", "6"],
     lambda c: (c.var_degrees == 3).all()),
    (["gallager", "-n", "60", "--bit-degree", "3", "--check-degree", "6"],
     lambda c: (c.check_degrees == 6).all()),
    (["irregular", "-n", "60", "--bit-dist", "2:0.5,3:0.5", "--check-dist", "5:1"],
     lambda c: c.n == 60),
    (["qc", "--exponents", "0,1,2;0,2,4", "--circulant", "5"], lambda c: c.n == 15 and c.m == 10),
    (["array", "--prime", "7", "--block-rows", "3", "--block-cols", "7"], lambda c: c.n == 49),
    (["hamming", "--parity-bits", "3"], lambda c: c.k == 4),
    (["golay"], lambda c: c.k == 12),
    (["repetition", "-n", "5"], lambda c: c.k == 1),
    (["parity", "-n", "5"], lambda c: c.k == 4),
    (["tree", "-m", "8", "--seed", "2"], lambda c: c.girth() == 0),
])
@pytest.mark.parametrize("ext", ["txt", "mtx", "npz"])
def test_build_then_load(tmp_path, capsys, args, check, ext):
    from ldpcmarg.code.io import load_code
    out_path = tmp_path / f"c.{ext}"
    status, out, err = run(["build", *args, "-o", str(out_path)], capsys)
    assert status == 0, err
    assert out.startswith(f"wrote {out_path}")
    assert check(load_code(out_path))


def test_build_errors(tmp_path, capsys):
    p = tmp_path / "x.txt"
    status, _, err = run(["build", "peg", "-o", str(p)], capsys)
    assert status == 2 and "needs --length" in err
    status, _, err = run(["build", "irregular", "-n", "10", "--bit-dist", "2-0.5",
                          "--check-dist", "4:1", "-o", str(p)], capsys)
    assert status == 2 and "degree:fraction" in err
    status, _, err = run(["build", "hamming", "--parity-bits", "3", "-o", str(p)], capsys)
    assert status == 0
    status, _, err = run(["build", "hamming", "--parity-bits", "3", "-o", str(p)], capsys)
    assert status == 2 and "--force" in err
    status, _, err = run(["build", "nosuch", "-o", str(p)], capsys)
    assert status != 0 and "Traceback" not in err


def test_inspect_without_search_says_so(capsys):
    status, out, _ = run(["inspect", "peg-504-3-6", "--dmin-budget", "0"], capsys)
    assert status == 0
    assert "minimum distance       not computed" in out
    assert "bit degrees            3: 504 (100.0% of nodes, 100.0% of edges)" in out
    assert "check degrees          6: 252" in out


def test_inspect_counts_take_the_right_number(tmp_path, capsys):
    # Two checks sharing two bits close exactly one 4-cycle (bits 0, 1 and both checks).
    p = tmp_path / "one-cycle.txt"
    p.write_text("ldpcmarg-checks n=4 m=2\n0 1 2\n0 1 3\n")
    status, out, _ = run(["inspect", str(p)], capsys)
    assert status == 0
    assert "1 cycle of length 4" in out and "1 cycles" not in out


def test_plural_helper():
    from ldpcmarg._text import plural

    assert [plural(c, "frame") for c in (0, 1, 2)] == ["0 frames", "1 frame", "2 frames"]
    assert plural(1, "matrix", "matrices") == "1 matrix"
    assert plural(5, "matrix", "matrices") == "5 matrices"


def test_versions_command_replaces_the_old_name(capsys):
    status, out, _ = run(["versions", "--json"], capsys)
    assert status == 0
    rep = json.loads(out)
    assert rep["numpy"] and rep["ldpcmarg"]
    status, _, err = run(["envinfo"], capsys)
    assert status == 2 and "No such command" in err
