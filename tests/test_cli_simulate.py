"""`ldpcmarg simulate / plot / runs` from the command line: contracts, errors, kill and resume."""

from __future__ import annotations

import json
import math
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from cli_helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]


def counted(doc):
    keys = ("decoder", "ebn0_db", "frames", "bit_errors", "frame_errors", "codeword_bit_errors",
            "undetected_errors", "chunks", "stop")
    return [tuple(p[k] for k in keys) for p in doc["points"]]


BASE = ["simulate", "hamming-7-4", "--decoder", "sum-product",
        "--decoder", "min-sum:alpha=0.8,max_iter=30", "--ebn0", "1:1.5:4", "--frame-errors",
        "25", "--max-frames", "3000", "--seed", "4", "--workers", "1", "--chunk-frames", "200",
        "-q"]


def test_json_csv_contract_and_plot(tmp_path, capsys):
    js, cs, fig = tmp_path / "c.json", tmp_path / "c.csv", tmp_path / "c.svg"
    st = tmp_path / "s.sqlite"
    status, out, err = run_cli(BASE + ["--store", st, "--json", js, "--csv", cs, "--plot", fig],
                               capsys)
    assert status == 0, err
    doc = json.loads(js.read_text())
    assert doc["code"]["n"] == 7 and doc["code"]["k"] == 4
    assert doc["channel"]["kind"] == "awgn"
    assert len(doc["points"]) == 2 * 3  # grid 1:1.5:4 -> 1, 2.5, 4 (stop included)
    assert sorted({p["ebn0_db"] for p in doc["points"]}) == [1.0, 2.5, 4.0]
    for p in doc["points"]:
        assert isinstance(p["decoder"], str)
        assert isinstance(p["frames"], int) and isinstance(p["bit_errors"], int)
        assert isinstance(p["frame_errors"], int)
        assert p["fer"] == pytest.approx(p["frame_errors"] / p["frames"])
        assert p["ber"] == pytest.approx(p["bit_errors"] / (p["frames"] * 4))
        assert p["fer_ci"][0] <= p["fer"] <= p["fer_ci"][1]
        assert p["ber_ci"][0] <= p["ber"] <= p["ber_ci"][1]
        assert isinstance(p["avg_iterations"], float)
        assert p["frame_errors"] >= 25 or p["frames"] == 3000
    assert {p["decoder"] for p in doc["points"]} == {"sum-product", "min-sum:alpha=0.8,max_iter=30"}
    assert "sum-product" in out and "FER" in out  # results table
    rows = cs.read_text().splitlines()
    assert len(rows) == 1 + 6 and rows[0].startswith("code,")
    assert fig.read_text().lstrip().startswith("<?xml")
    # plot from the store and from the CSV, runs listing
    png = tmp_path / "p.png"
    status, out, err = run_cli(["plot", st, cs, "-o", png, "--line", "a threshold=2.0"], capsys)
    assert status == 0, err
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    status, out, err = run_cli(["runs", st], capsys)
    assert status == 0 and "run 1" in out and "min-sum:alpha=0.8,max_iter=30" in out
    status, out, err = run_cli(["runs", st, "--json"], capsys)
    assert json.loads(out)["runs"][0]["settings"]["seed"] == 4


def test_bsc_channel(tmp_path, capsys):
    js = tmp_path / "b.json"
    status, out, err = run_cli(["simulate", "hamming-7-4", "-d", "bit-flipping", "--channel", "bsc",
                                "--param", "0.01,0.05", "--frame-errors", "10", "--max-frames",
                                "2000", "--workers", "1", "-q", "--json", js], capsys)
    assert status == 0, err
    doc = json.loads(js.read_text())
    assert [p["p"] for p in doc["points"]] == [0.01, 0.05]
    assert doc["points"][0]["fer"] < doc["points"][1]["fer"]


def _store_state(path):
    con = sqlite3.connect(path)
    try:
        return {t: con.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
                for t in ("runs", "points", "chunks", "results")}
    finally:
        con.close()


@pytest.mark.parametrize("change,needle", [
    (["--decoder", "no-such-decoder"], "Unknown decoder"),
    (["--decoder", "min-sum:nonsense=2"], "no option"),
    (["--decoder", "min-sum:alpha=-1"], "alpha"),
    (["--ebn0", "1:0:3"], "step"),
    (["--ebn0", "1:x:3"], "Malformed"),
    (["--frame-errors", "0"], "frame-errors"),
    (["--max-frames", "-5"], "max-frames"),
    (["--workers", "0"], "workers"),
    (["--code", "missing.mtx"], "missing.mtx"),
    (["--store", "DIR"], "directory"),
    (["--store", "NODIR/x.sqlite"], "does not exist"),
    (["--code", "golay-24-12"], "another code"),
    (["--plot", "fig.bmp"], ".png"),
])
def test_bad_input_one_clear_error_store_intact(tmp_path, capsys, change, needle):
    st = tmp_path / "s.sqlite"
    args = ["simulate", "hamming-7-4", "-d", "hard-decision", "--ebn0", "1,2",
            "--frame-errors", "5", "--max-frames", "400", "--workers", "1", "-q", "--store", st]
    status, _, err = run_cli(args, capsys)
    assert status == 0, err
    before_bytes, before_rows = st.read_bytes(), _store_state(st)
    args = list(args)
    change = list(change)
    if change[0] == "--code":
        args[1] = str(tmp_path / change[1]) if change[1].endswith(".mtx") else change[1]
    elif change[0] == "--store":
        target = tmp_path if change[1] == "DIR" else tmp_path / change[1]
        args[args.index("--store") + 1] = str(target)
    elif change[0] == "--plot":
        args += ["--plot", str(tmp_path / change[1])]
    elif change[0] == "--decoder":
        args[args.index("-d") + 1] = change[1]
    else:
        args[args.index(change[0]) + 1] = change[1] if change[0] in args else None
        if change[0] not in args:
            args += change
    status, out, err = run_cli(args, capsys)
    assert status == 2, (out, err)
    assert "Traceback" not in err
    lines = [ln for ln in err.strip().splitlines() if ln.strip()]
    assert lines and needle.lower() in err.lower(), err
    assert sum(ln.startswith("Error") for ln in lines) == 1
    assert st.read_bytes() == before_bytes and _store_state(st) == before_rows


def test_sigkill_then_resume_gives_uninterrupted_counts(tmp_path):
    args = [sys.executable, "-m", "ldpcmarg", "simulate", "hamming-7-4",
            "-d", "sum-product", "-d", "hard-decision", "--ebn0", "1,1.5",
            "--frame-errors", "300", "--max-frames", "200000", "--seed", "17",
            "--chunk-frames", "32", "--workers", "1", "-q"]
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    killed = tmp_path / "killed.sqlite"
    proc = subprocess.Popen(args + ["--store", str(killed)], env=env, cwd=tmp_path,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 120
    n = 0
    while time.monotonic() < deadline and proc.poll() is None:
        if killed.exists():
            try:
                con = sqlite3.connect(f"file:{killed}?mode=ro", uri=True, timeout=1)
                n = con.execute("SELECT COUNT(*) FROM chunks").fetchone()[0]
                con.close()
            except sqlite3.OperationalError:
                n = 0
            if n >= 12:
                break
        time.sleep(0.02)
    assert proc.poll() is None, "the run ended before it could be killed; make it longer"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    assert proc.returncode == -signal.SIGKILL
    js_resumed, js_clean = tmp_path / "resumed.json", tmp_path / "clean.json"
    done = subprocess.run(args + ["--store", str(killed), "--json", str(js_resumed)], env=env,
                          cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    clean = subprocess.run(args + ["--json", str(js_clean)], env=env, cwd=tmp_path,
                           capture_output=True, text=True, timeout=300)
    assert clean.returncode == 0, clean.stderr
    resumed, fresh = json.loads(js_resumed.read_text()), json.loads(js_clean.read_text())
    assert counted(resumed) == counted(fresh)
    assert all(p["stop"] == "frame_errors" for p in fresh["points"])


def test_esn0_grid_and_random_codewords(tmp_path, capsys):
    js = tmp_path / "e.json"
    status, out, err = run_cli(["simulate", "hamming-7-4", "-d", "sum-product", "--esn0", "0,2",
                                "--random-codewords", "--frame-errors", "10", "--max-frames",
                                "1000", "--workers", "1", "-q", "--json", js], capsys)
    assert status == 0, err
    doc = json.loads(js.read_text())
    assert doc["channel"]["codewords"] == "random"
    for p, esn0 in zip(doc["points"], (0.0, 2.0), strict=True):
        # Eb/N0 = Es/N0 - 10 log10(k/n) (definition, DESIGN.md section 2)
        assert p["esn0_db"] == esn0
        assert p["ebn0_db"] == pytest.approx(esn0 - 10 * math.log10(4 / 7))


def test_ctrl_c_with_process_pool_keeps_chunks(tmp_path):
    store = tmp_path / "c.sqlite"
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    proc = subprocess.Popen(
        [sys.executable, "-m", "ldpcmarg", "simulate", "hamming-7-4", "-d", "sum-product",
         "--ebn0", "1,2", "--frame-errors", "10000000", "--max-frames", "100000000",
         "--chunk-frames", "64", "--workers", "2", "-q", "--store", str(store)],
        env=env, cwd=tmp_path, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    deadline = time.monotonic() + 120
    n = 0
    while time.monotonic() < deadline and proc.poll() is None and n < 5:
        time.sleep(0.05)
        if store.exists():
            try:
                con = sqlite3.connect(f"file:{store}?mode=ro", uri=True, timeout=1)
                n = con.execute("SELECT COUNT(*) FROM chunks").fetchone()[0]
                con.close()
            except sqlite3.OperationalError:
                n = 0
    assert proc.poll() is None
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130
    # one line, and the promise that finished chunks are kept
    assert err.strip().splitlines() == [
        f"Interrupted; finished chunks are kept in {store}. Run the same command again to "
        "continue."], err
    assert _store_state(store)["chunks"] >= n


@pytest.mark.parametrize("when", ["pool start-up", "chunks running"])
def test_sigterm_with_process_pool_prints_one_line_and_no_warning(tmp_path, when):
    # Long chunks (8192 frames of n = 504 at 0 dB, every frame to the iteration cap) outlast
    # the coordinator's grace period, so the workers are killed mid-chunk: a killed worker
    # used to leave its numba lock semaphore to the resource tracker ("leaked semaphore
    # objects"), and a worker still starting used to fail in SemLock._rebuild.
    store = tmp_path / "t.sqlite"
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    proc = subprocess.Popen(
        [sys.executable, "-m", "ldpcmarg", "simulate", "peg-504-3-6", "-d", "sum-product",
         "--ebn0", "0", "--frame-errors", "10000000", "--max-frames", "100000000",
         "--chunk-frames", "8192", "--workers", "2", "-q", "--store", str(store)],
        env=env, cwd=tmp_path, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and proc.poll() is None and not store.exists():
        time.sleep(0.01)
    if when == "chunks running":
        time.sleep(3.0)  # workers started and decoding their first chunks
    assert proc.poll() is None
    proc.send_signal(signal.SIGTERM)
    try:
        _, err = proc.communicate(timeout=60)  # stderr closes once every process is gone
    except subprocess.TimeoutExpired:
        proc.kill()
        raise AssertionError("the run did not stop after SIGTERM") from None
    assert proc.returncode == 130, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("Interrupted"), err
    assert "leaked" not in err and "Traceback" not in err


def test_plot_draws_density_evolution_threshold(tmp_path, capsys):
    # The threshold line of a (3,6)-regular graph sits at Eb/N0 ~ 1.10 dB
    # (sigma* ~ 0.8809 at rate 1/2; Richardson & Urbanke, Modern Coding Theory).
    js = str(tmp_path / "c.json")
    status, _, err = run_cli(BASE + ["--json", js], capsys)
    assert status == 0, err
    png = str(tmp_path / "thr.png")
    status, out, err = run_cli(["plot", js, "-o", png, "--threshold", "peg-504-3-6"], capsys)
    assert status == 0, err
    assert Path(png).read_bytes()[:4] == b"\x89PNG"
    status, _, err = run_cli(["plot", js, "-o", png, "--force", "--threshold", "no-such-code.txt"],
                             capsys)
    assert status == 2 and "no-such-code.txt" in err and "Traceback" not in err
