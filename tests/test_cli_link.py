"""CLI contract of the link options: spellings, JSON channel record, one clear error each."""

from __future__ import annotations

import json

import pytest
from cli_helpers import run_cli


def test_simulate_records_the_link(tmp_path, capsys):
    out = tmp_path / "r.json"
    st, so, se = run_cli(["simulate", "hamming-7-4", "-d", "min-sum", "--ebn0", "6",
                          "--modulation", "qam16:maxlog", "--fading", "rician:K=4,block=2",
                          "--puncture", "1", "--shorten", "1", "--quantize", "q=5,step=0.5",
                          "--max-frames", "200", "--workers", "1", "-q", "--json", out], capsys)
    assert st == 0, se
    ch = json.loads(out.read_text())["channel"]
    assert ch["modulation"] == "qam16" and ch["demapper"] == "maxlog"
    assert ch["fading"] == "rician" and ch["block"] == 2
    assert ch["puncture"] == 1 and ch["shorten"] == 1 and ch["quantize"] == "q=5,step=0.5"
    assert ch["transmitted_rate"] == pytest.approx((4 - 1) / (7 - 1 - 1))
    p = json.loads(out.read_text())["points"][0]
    # Es/N0 = R_t * m * Eb/N0 (DESIGN §9)
    assert p["esn0_db"] == pytest.approx(6 + 10 * __import__("math").log10(0.6 * 4))


def test_store_identity_includes_the_link(tmp_path, capsys):
    store = tmp_path / "s.sqlite"
    base = ["simulate", "hamming-7-4", "-d", "sum-product", "--ebn0", "3", "--max-frames", "64",
            "--workers", "1", "-q", "--store", store]
    assert run_cli(base + ["--modulation", "qpsk"], capsys)[0] == 0
    assert run_cli(base + ["--modulation", "8psk"], capsys)[0] == 0
    import sqlite3

    with sqlite3.connect(store) as c:
        assert c.execute("SELECT COUNT(*) FROM runs").fetchone()[0] == 2
    # the same link again reuses its run
    assert run_cli(base + ["--modulation", "qpsk"], capsys)[0] == 0
    with sqlite3.connect(store) as c:
        assert c.execute("SELECT COUNT(*) FROM runs").fetchone()[0] == 2


@pytest.mark.parametrize("args,needle", [
    (["--modulation", "@MISSING"], "Cannot read the constellation file"),
    (["--modulation", "qam32"], "Unknown modulation"),
    (["--fading", "rayleigh:block=0"], "block length"),
    (["--quantize", "q=1"], "q between 2 and 16"),
    (["--puncture", "7"], "puncture count"),
    (["--puncture", "@PATTERN"], "longer than the code length"),
    (["--fading", "rician"], "K factor"),
])
def test_bad_link_input_one_clear_error(tmp_path, capsys, args, needle):
    (tmp_path / "pattern.txt").write_text("1" * 8)
    args = [a.replace("MISSING", str(tmp_path / "none.txt"))
            .replace("PATTERN", str(tmp_path / "pattern.txt")) for a in args]
    out = tmp_path / "r.json"
    st, so, se = run_cli(["simulate", "hamming-7-4", "-d", "sum-product", "--ebn0", "3",
                          "--workers", "1", "-q", "--json", out] + args, capsys)
    assert st == 2
    assert se.startswith("Error: ") and needle in se and "Traceback" not in se
    assert not out.exists()


def test_puncturing_a_whole_check_is_refused(tmp_path, capsys):
    # Hamming(7,4) check 0 covers bits 0, 2, 4, 6 (conftest HAMMING_7_4 order)
    pat = tmp_path / "p.txt"
    pat.write_text("1010101")
    st, _, se = run_cli(["simulate", "hamming-7-4", "-d", "sum-product", "--ebn0", "3", "-q",
                         "--puncture", f"@{pat}"], capsys)
    assert st == 2 and "every bit of check" in se
