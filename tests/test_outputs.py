"""One overwrite rule for every command's output files, checked before any work (CLI)."""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from cli_helpers import run_cli

ROOT = Path(__file__).resolve().parents[1]

SIM = ["simulate", "hamming-7-4", "-d", "sum-product", "--ebn0", "2", "--frame-errors", "5",
       "--max-frames", "400", "--chunk-frames", "100", "--workers", "1", "-q"]

# a small error-floor run: a few impulse candidates, few frames, in-process
FLOOR = ["floor", "hamming-7-4", "-d", "sum-product", "--ebn0", "4", "--candidates", "5",
         "--max-frames", "400", "--chunk-frames", "200", "--workers", "1", "-q"]


def _llr_file(tmp_path) -> Path:
    path = tmp_path / "llr.npy"
    np.save(path, np.random.default_rng(3).normal(2.0, 1.5, size=(3, 7)))
    return path


def _commands(tmp_path, out_name: str):
    """(argv writing ``out`` as its output, out) for every command that writes files."""
    d = tmp_path
    llr = _llr_file(tmp_path)
    return {
        "simulate --json": (SIM + ["--json", d / "o.json"], d / "o.json"),
        "simulate --csv": (SIM + ["--csv", d / "o.csv"], d / "o.csv"),
        "simulate --plot": (SIM + ["--plot", d / "o.svg"], d / "o.svg"),
        "posteriors -o": (["posteriors", "hamming-7-4", llr, "-o", d / "o.npz"], d / "o.npz"),
        "build -o": (["build", "hamming", "--parity-bits", "3", "-o", d / "o.txt"],
                     d / "o.txt"),
        "compare --json": (["compare", "hamming-7-4", "-d", "sum-product", "--ebn0", "2",
                            "--frames", "8", "--reference", "none", "--quiet",
                            "--json", d / "o.json"], d / "o.json"),
        "compare --plots": (["compare", "hamming-7-4", "-d", "sum-product", "--ebn0", "2",
                             "--frames", "8", "--reference", "none", "--quiet",
                             "--plots", d / "figs"], d / "figs" / "compare_reliability.png"),
        "plot -o": (["plot", d / "src.json", "-o", d / "o.png"], d / "o.png"),
        "floor --json": (FLOOR + ["--json", d / "o.json"], d / "o.json"),
        "pseudocodewords --json": (["pseudocodewords", "hamming-7-4", "--starts", "3",
                                    "--json", d / "o.json"], d / "o.json"),
    }[out_name]


ALL = ["simulate --json", "simulate --csv", "simulate --plot", "posteriors -o", "build -o",
       "compare --json", "compare --plots", "plot -o", "floor --json",
       "pseudocodewords --json"]


@pytest.fixture
def plot_source(tmp_path, capsys):
    status, _, err = run_cli(SIM + ["--json", tmp_path / "src.json"], capsys)
    assert status == 0, err


@pytest.mark.parametrize("which", ALL)
def test_existing_output_refused_without_force_everywhere(tmp_path, capsys, plot_source, which):
    argv, out = _commands(tmp_path, which)
    out.parent.mkdir(exist_ok=True)
    out.write_bytes(b"keep me")
    status, stdout, err = run_cli(argv, capsys)
    # one clear line naming the file, exit status 2, the file untouched
    assert status == 2 and err.count("\n") == 1 and str(out) in err and "--force" in err
    assert "Traceback" not in err and out.read_bytes() == b"keep me"
    status, _, err = run_cli(argv + ["--force"], capsys)
    assert status == 0, err
    assert out.read_bytes() != b"keep me"


def _store_rows(path):
    with sqlite3.connect(path) as conn:
        return conn.execute("SELECT COUNT(*) FROM chunks").fetchone()[0]


@pytest.mark.parametrize("link", ["same", "symlink", "hardlink", "companion"])
def test_output_resolving_to_the_store_is_refused(tmp_path, capsys, link):
    store = tmp_path / "s.sqlite"
    status, _, err = run_cli(SIM + ["--store", store], capsys)
    assert status == 0, err
    before = (store.read_bytes(), _store_rows(store))
    target = {"same": store, "symlink": tmp_path / "l.json", "hardlink": tmp_path / "h.json",
              "companion": Path(str(store) + "-wal")}[link]
    if link == "symlink":
        target.symlink_to(store)
    elif link == "hardlink":
        os.link(store, target)
    status, _, err = run_cli(SIM + ["--store", store, "--json", target, "--force"], capsys)
    assert status == 2 and "same file as the store" in err and "Traceback" not in err
    assert (store.read_bytes(), _store_rows(store)) == before


def test_two_outputs_of_one_command_must_differ(tmp_path, capsys):
    out = tmp_path / "o.txt"
    status, _, err = run_cli(SIM + ["--json", out, "--csv", out], capsys)
    assert status == 2 and "same file as --json" in err
    assert not out.exists()
    # plot -o through a link onto its own source store
    store = tmp_path / "s.sqlite"
    status, _, err = run_cli(SIM + ["--store", store], capsys)
    assert status == 0, err
    fig = tmp_path / "fig.png"
    fig.symlink_to(store)
    before = store.read_bytes()
    status, _, err = run_cli(["plot", store, "-o", fig, "--force"], capsys)
    assert status == 2 and "same file as the source" in err and store.read_bytes() == before


def _read_only_dir(tmp_path) -> Path:
    """A folder nobody may create files in: chmod 555, or /sys where chmod does not bind (root)."""
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    probe = ro / "probe"
    try:
        probe.touch()
    except OSError:
        return ro
    probe.unlink()
    return Path("/sys")  # sysfs refuses new files even to root


def test_read_only_target_fails_before_the_sweep(tmp_path, capsys):
    ro = _read_only_dir(tmp_path)
    store = tmp_path / "s.sqlite"
    status, out, err = run_cli(SIM + ["--store", store, "--csv", ro / "o.csv"], capsys)
    assert status == 2 and err.startswith("Error: Cannot write --csv") and err.count("\n") == 1
    assert not store.exists() and "FER" not in out  # nothing computed, nothing written
    status, _, err = run_cli(["build", "hamming", "--parity-bits", "3", "-o", ro / "h.txt"],
                             capsys)
    assert status == 2 and "Cannot write -o" in err


def test_posteriors_refuses_dangling_link_and_missing_folder(tmp_path, capsys):
    llr = _llr_file(tmp_path)
    link = tmp_path / "out.npz"
    link.symlink_to(tmp_path / "elsewhere" / "target.npz")
    status, _, err = run_cli(["posteriors", "hamming-7-4", llr, "-o", link], capsys)
    assert status == 2 and "symbolic link to a missing file" in err
    assert not (tmp_path / "elsewhere").exists()
    status, _, err = run_cli(["posteriors", "hamming-7-4", llr, "-o",
                              tmp_path / "new" / "deeper" / "p.npz"], capsys)
    assert status == 2 and "does not exist; create it first" in err
    assert not (tmp_path / "new").exists()
    status, _, err = run_cli(["posteriors", "hamming-7-4", llr, "-o", llr, "--format", "npy",
                              "--force"], capsys)
    assert status == 2 and "same file as the input" in err


def test_json_equal_to_store_refused_in_a_subprocess(tmp_path):
    # the reproduction of the data-loss report: --json equal to --store
    store = tmp_path / "s.sqlite"
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    cmd = [sys.executable, "-m", "ldpcmarg"] + [str(a) for a in SIM] + ["--store", str(store)]
    first = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=120)
    assert first.returncode == 0, first.stderr
    rows = _store_rows(store)
    again = subprocess.run(cmd + ["--json", str(store)], env=env, capture_output=True,
                           text=True, timeout=120)
    assert again.returncode == 2 and "same file as the store" in again.stderr
    assert "Traceback" not in again.stderr and _store_rows(store) == rows


def test_floor_json_equal_to_its_store_refused_in_a_subprocess(tmp_path):
    # floor used to open --json for writing itself, so a --json naming its own store
    # (here through a symbolic link) replaced the SQLite file after the whole run
    store = tmp_path / "f.sqlite"
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    cmd = [sys.executable, "-m", "ldpcmarg"] + [str(a) for a in FLOOR] + ["--store", str(store)]
    first = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=120)
    assert first.returncode == 0, first.stderr
    rows, before = _store_rows(store), store.read_bytes()
    link = tmp_path / "f.json"
    link.symlink_to(store)
    again = subprocess.run(cmd + ["--json", str(link), "--force"], env=env,
                           capture_output=True, text=True, timeout=120)
    assert again.returncode == 2 and "same file as the store" in again.stderr
    assert again.stderr.count("\n") == 1 and "Traceback" not in again.stderr
    assert _store_rows(store) == rows and store.read_bytes() == before


def test_pseudocodewords_and_build_refuse_to_overwrite_their_inputs(tmp_path, capsys):
    code = tmp_path / "h.txt"
    status, _, err = run_cli(["build", "hamming", "--parity-bits", "3", "-o", code], capsys)
    assert status == 0, err
    before = code.read_bytes()
    status, _, err = run_cli(["pseudocodewords", code, "--starts", "2", "--json", code,
                              "--force"], capsys)
    assert status == 2 and "same file as the code file" in err and code.read_bytes() == before
    exps = tmp_path / "e.txt"
    exps.write_text("0 1\n1 0\n")
    status, _, err = run_cli(["build", "qc", "--exponents", f"@{exps}", "--circulant", "3",
                              "-o", exps, "--format", "txt", "--force"], capsys)
    assert status == 2 and "same file as the exponent file" in err
    assert exps.read_text() == "0 1\n1 0\n"


def test_floor_refuses_a_missing_folder_before_any_work(tmp_path, capsys):
    status, out, err = run_cli(FLOOR + ["--json", tmp_path / "no" / "f.json"], capsys)
    assert status == 2 and "does not exist; create it first" in err
    assert "FER" not in out and not (tmp_path / "no").exists()
