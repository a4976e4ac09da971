"""Fault cases: kill -9, signals, killed workers, full disk, read-only media, links, hostile files.

Every case runs the command line in a subprocess (with a timeout, so a hang
is recorded as a hang, not waited for) and classifies what happened:

* ``ok`` -- the command finished, or a fault it is meant to survive (a killed
  worker) was survived;
* ``clean error`` -- exit status 2 (or 130 after a signal) with one clear line
  and no traceback;
* ``traceback`` -- a Python traceback reached the user (goal: 0);
* ``hang`` -- the timeout expired (goal: 0);
* ``data lost`` -- after the fault, re-running the same command did not give
  exactly the counts of an uninterrupted run, or the store failed SQLite's
  integrity check (goal: 0).

Writes ``fault_cases.md`` and ``fault_cases.json`` into ``--out`` (default
``experiments/results``).

Usage::

    python experiments/fault_cases.py           # 16 random kill moments, Dask cases (~3 min)
    python experiments/fault_cases.py --quick   # 3 kill moments, no Dask (~40 s)

Timings are on a shared, loaded machine; they only bound the run.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import resource
import shutil
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
BASE = ["simulate", "hamming-7-4", "-d", "sum-product", "-d", "hard-decision", "--ebn0", "1,2",
        "--frame-errors", "600", "--max-frames", "200000", "--seed", "17", "--chunk-frames",
        "32", "-q"]
TIMEOUT = 180


def ldpcmarg(args, cwd, **kw):
    return [sys.executable, "-m", "ldpcmarg", *map(str, args)]


def run(args, cwd, timeout=TIMEOUT, preexec=None):
    try:
        done = subprocess.run(ldpcmarg(args, cwd), cwd=cwd, env=ENV, capture_output=True,
                              text=True, timeout=timeout, preexec_fn=preexec)
        return done.returncode, done.stdout, done.stderr
    except subprocess.TimeoutExpired as exc:
        return None, exc.stdout or "", exc.stderr or ""


def classify(code, err, expect_error=False) -> str:
    err = err if isinstance(err, str) else (err or b"").decode(errors="replace")
    if code is None:
        return "hang"
    if "Traceback" in err:
        return "traceback"
    if code == 0:
        return "clean error" if expect_error else "ok"
    lines = [ln for ln in err.splitlines() if ln.strip()]
    errors = [ln for ln in lines if ln.startswith("Error: ")]
    if code == 2 and len(errors) == 1:
        return "clean error"
    if code == 130 and lines and lines[0].startswith("Interrupted"):
        return "clean error"
    return "traceback"  # any other ending is treated as a failure to report clearly


def counted(js: Path):
    doc = json.loads(js.read_text())
    keys = ("decoder", "ebn0_db", "frames", "bit_errors", "frame_errors", "stop")
    return [tuple(p[k] for k in keys) for p in doc["points"]]


def intact(store: Path) -> bool:
    if not store.exists():
        return True
    con = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
    try:
        return con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    finally:
        con.close()


def chunk_count(store: Path) -> int:
    try:
        con = sqlite3.connect(f"file:{store}?mode=ro", uri=True, timeout=1)
        try:
            return con.execute("SELECT COUNT(*) FROM chunks").fetchone()[0]
        finally:
            con.close()
    except sqlite3.Error:
        return 0


class Cases:
    def __init__(self, work: Path, reference):
        self.work, self.reference = work, reference
        self.rows: list[dict] = []

    def add(self, group, name, outcome, lost=False, note=""):
        self.rows.append({"group": group, "case": name, "outcome": outcome,
                          "data_lost": bool(lost), "note": note})
        print(f"  {group:<22} {name:<36} {outcome:<12} {'DATA LOST' if lost else ''} {note}")

    def resume_equal(self, store: Path, extra=()) -> bool:
        js = store.with_suffix(".resumed.json")
        code, _, err = run(BASE + list(extra) + ["--store", store, "--json", js], self.work)
        return code == 0 and intact(store) and counted(js) == self.reference


def _default_sigint():
    # a script started in the background inherits SIGINT ignored; restore what a
    # terminal user has, so the signal cases really deliver Ctrl-C
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def start(args, cwd, new_session=False):
    return subprocess.Popen(ldpcmarg(args, cwd), cwd=cwd, env=ENV, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE, text=True, start_new_session=new_session,
                            preexec_fn=_default_sigint)


def wait_for_chunks(store: Path, proc, at_least: int, deadline: float) -> bool:
    while time.monotonic() < deadline and proc.poll() is None:
        if store.exists() and chunk_count(store) >= at_least:
            return True
        time.sleep(0.02)
    return proc.poll() is None


def kill_cases(cases: Cases, moments: int, rng: random.Random):
    for i in range(moments):
        store = cases.work / f"kill{i}.sqlite"
        target = rng.randint(1, 120)  # kill after this many stored chunk rows
        proc = start(BASE + ["--workers", "1", "--store", store], cases.work)
        alive = wait_for_chunks(store, proc, target, time.monotonic() + 60)
        if alive:
            proc.kill()
        proc.wait(timeout=60)
        err = proc.stderr.read()
        proc.stderr.close()
        outcome = "ok" if alive else classify(proc.returncode, err)
        cases.add("kill -9", f"after {target} chunk rows", outcome,
                  lost=not cases.resume_equal(store))


def signal_cases(cases: Cases):
    for sig in (signal.SIGINT, signal.SIGTERM):
        store = cases.work / f"{sig.name}.sqlite"
        proc = start(BASE + ["--workers", "1", "--store", store], cases.work, new_session=True)
        wait_for_chunks(store, proc, 30, time.monotonic() + 60)
        os.killpg(proc.pid, sig)
        try:
            _, err = proc.communicate(timeout=60)
            outcome = classify(proc.returncode, err)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
            outcome = "hang"
        note = "finished before the signal" if proc.returncode == 0 else ""
        cases.add("signal", sig.name, outcome, lost=not cases.resume_equal(store), note=note)


def worker_cases(cases: Cases, dask: bool):
    kinds = [("pool worker", ["--workers", "2"])]
    if dask:
        kinds += [("Dask worker (local:1)", ["--cluster", "local:1"]),
                  ("Dask worker (local:2)", ["--cluster", "local:2"])]
    for label, extra in kinds:
        store = cases.work / f"worker{len(cases.rows)}.sqlite"
        proc = start(BASE + extra + ["--store", store], cases.work)
        wait_for_chunks(store, proc, 20, time.monotonic() + 90)
        victims = _worker_pids(proc.pid)
        if victims:
            os.kill(victims[0], signal.SIGKILL)
        try:
            _, err = proc.communicate(timeout=TIMEOUT)
            outcome = classify(proc.returncode, err)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.communicate()
            outcome = "hang"
        note = "" if victims else "finished before a worker could be killed"
        cases.add("killed worker", label, outcome, lost=not cases.resume_equal(store, extra),
                  note=note)


def _children(parent: int) -> list[tuple[int, bytes]]:
    out = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
            if int(stat.rsplit(")", 1)[1].split()[1]) == parent:
                out.append((int(entry.name), (entry / "cmdline").read_bytes()))
        except (OSError, ValueError, IndexError):
            continue
    return out


def _worker_pids(parent: int) -> list[int]:
    """Worker processes of ``parent``: spawned children, or the forkserver's children."""
    out = []
    for pid, cmd in _children(parent):
        if b"resource_tracker" in cmd:
            continue
        if b"forkserver" in cmd:  # pool workers are forked from the forkserver
            out += [p for p, _ in _children(pid)]
        else:
            out.append(pid)
    return out


def disk_cases(cases: Cases):
    store = cases.work / "full.sqlite"
    run(BASE + ["--workers", "1", "--max-frames", "640", "--store", store], cases.work)
    size = store.stat().st_size

    def limit():
        resource.setrlimit(resource.RLIMIT_FSIZE, (size + 8192, size + 8192))

    code, _, err = run(BASE + ["--workers", "1", "--store", store], cases.work, preexec=limit)
    outcome = classify(code, err, expect_error=True)
    ok_msg = "disk is full" in err and "Nothing stored was lost" in err
    cases.add("full disk", "ulimit -f", outcome, lost=not cases.resume_equal(store),
              note="" if ok_msg else "message does not name the full disk")


def readonly_cases(cases: Cases):
    src = cases.work / "ro-src.sqlite"
    run(BASE + ["--workers", "1", "--max-frames", "640", "--store", src], cases.work)
    media = cases.work / "media"
    media.mkdir()
    dst = media / "ro.sqlite"
    shutil.copy(src, dst)
    con = sqlite3.connect(dst)
    con.execute("PRAGMA journal_mode=WAL")
    con.close()
    before = dst.read_bytes()
    root = os.geteuid() == 0
    chattr = root and shutil.which("chattr") and subprocess.run(
        ["chattr", "+i", str(dst), str(media)], capture_output=True).returncode == 0
    if not chattr:
        if root:  # no immutable attribute: block the WAL index like read-only media do
            (media / "ro.sqlite-shm").mkdir()
        else:
            dst.chmod(0o444)
            media.chmod(0o555)
    try:
        for cmd in (["runs", dst], ["plot", dst, "-o", cases.work / "ro.png"]):
            code, _, err = run(cmd, cases.work)
            cases.add("read-only media", cmd[0], classify(code, err))
        code, _, err = run(BASE + ["--workers", "1", "--store", dst], cases.work)
        cases.add("read-only media", "simulate --store (writer)",
                  classify(code, err, expect_error=chattr or not root))
    finally:
        if chattr:
            subprocess.run(["chattr", "-i", str(dst), str(media)], check=False)
        elif not root:
            media.chmod(0o755)
            dst.chmod(0o644)
    if chattr or not root:
        cases.rows[-1]["data_lost"] = dst.read_bytes() != before


def link_cases(cases: Cases):
    store = cases.work / "linked.sqlite"
    for kind in ("hard link", "symbolic link"):
        link = cases.work / f"{kind.split()[0]}.sqlite"
        if link.exists() or link.is_symlink():
            link.unlink()
        # the first writer runs far longer than the second needs to start (same run: the
        # stop rule is not part of a run's settings, so its chunks serve the resume check)
        holder = BASE + ["--workers", "1", "--frame-errors", "10000000", "--max-frames",
                         "100000000", "--store", store]
        proc = start(holder, cases.work, new_session=True)
        wait_for_chunks(store, proc, 5, time.monotonic() + 60)
        (os.link if kind == "hard link" else os.symlink)(store, link)
        code, _, err = run(BASE + ["--workers", "1", "--store", link], cases.work)
        refused = code == 2 and "being written by another process" in err
        still = proc.poll() is None
        os.killpg(proc.pid, signal.SIGINT)
        try:
            proc.communicate(timeout=60)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
        if not still:
            refused = False
        cases.add("second writer", kind, classify(code, err, expect_error=True),
                  lost=not intact(store) or not cases.resume_equal(store),
                  note="" if refused else "second writer was not refused")
        store.unlink()
        link.unlink()


def hostile_file_cases(cases: Cases):
    d = cases.work / "hostile"
    d.mkdir()
    files = {
        "n-1e8.txt": b"ldpcmarg-checks n=100000000 m=1\n0 1 2\n",
        "n-1e12.txt": b"ldpcmarg-checks n=1000000000000 m=1\n0 1\n",
        "digits.txt": b"ldpcmarg-checks n=" + b"9" * 5000 + b" m=1\n0 1\n",
        "underscore.txt": b"ldpcmarg-checks n=70 m=1\n6_0 1\n",
        "huge.mtx": b"%%MatrixMarket matrix coordinate pattern general\n1000000000000 5 1\n1 1\n",
        "empty.npz": b"",
        "garbage.npz": b"PK\x03\x04" + bytes(range(256)),
    }
    for name, data in files.items():
        (d / name).write_bytes(data)
    os.mkfifo(d / "fifo.txt")
    for name in [*files, "fifo.txt"]:
        code, _, err = run(["inspect", name], d, timeout=60)
        cases.add("hostile file", name, classify(code, err, expect_error=True))
    y = np.full((1, 7), 0.9)
    y[0, 2] = 1e308
    np.save(d / "y.npy", y)
    code, _, err = run(["posteriors", "hamming-7-4", "y.npy", "-o", "p.npz", "--ebn0", "2"], d)
    cases.add("hostile file", "outputs 1e308 --ebn0", classify(code, err, expect_error=True),
              note="" if "out of range" in err else "message does not say out of range")


def summarise(rows):
    groups: dict[str, dict] = {}
    for r in rows:
        g = groups.setdefault(r["group"], {"tried": 0, "ok": 0, "clean error": 0,
                                           "traceback": 0, "hang": 0, "data lost": 0})
        g["tried"] += 1
        g[r["outcome"]] += 1
        g["data lost"] += r["data_lost"]
    total = {k: sum(g[k] for g in groups.values()) for k in next(iter(groups.values()))}
    return groups, total


def write(out: Path, rows, seconds, quick):
    groups, total = summarise(rows)
    out.mkdir(parents=True, exist_ok=True)
    (out / "fault_cases.json").write_text(json.dumps(
        {"quick": quick, "seconds": round(seconds, 1), "totals": total, "groups": groups,
         "cases": rows}, indent=1))
    head = "| fault | tried | ok | clean errors | tracebacks | hangs | data lost |"
    lines = [f"# Fault cases{' (quick run)' if quick else ''}", "",
             "Generated by `experiments/fault_cases.py`; each case runs the CLI in a "
             "subprocess. *ok*: finished or survived; *clean error*: one `Error:` line "
             "(or one `Interrupted` line after a signal), no traceback; *data lost*: "
             "re-running did not give the counts of an uninterrupted run, or the store "
             "failed SQLite's integrity check. Timings are from a shared, loaded machine.",
             "", head, "|---|---:|---:|---:|---:|---:|---:|"]
    for name, g in list(groups.items()) + [("**total**", total)]:
        lines.append(f"| {name} | {g['tried']} | {g['ok']} | {g['clean error']} | "
                     f"{g['traceback']} | {g['hang']} | {g['data lost']} |")
    lines += ["", f"Run time {seconds:.0f} s.", "", "| fault | case | outcome | note |",
              "|---|---|---|---|"]
    for r in rows:
        note = r["note"] + (" DATA LOST" if r["data_lost"] else "")
        lines.append(f"| {r['group']} | {r['case']} | {r['outcome']} | {note} |")
    (out / "fault_cases.md").write_text("\n".join(lines) + "\n")
    return total


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="3 kill moments, no Dask cases")
    ap.add_argument("--seed", type=int, default=20, help="seed of the kill moments")
    ap.add_argument("--out", type=Path, default=ROOT / "experiments" / "results")
    args = ap.parse_args(argv)
    t0 = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="ldpcmarg-faults-") as tmp:
        work = Path(tmp)
        ref_js = work / "reference.json"
        code, _, err = run(BASE + ["--workers", "1", "--json", ref_js], work)
        if code != 0:
            sys.exit(f"the reference run failed:\n{err}")
        cases = Cases(work, counted(ref_js))
        rng = random.Random(args.seed)
        kill_cases(cases, 3 if args.quick else 16, rng)
        signal_cases(cases)
        worker_cases(cases, dask=not args.quick)
        disk_cases(cases)
        readonly_cases(cases)
        link_cases(cases)
        hostile_file_cases(cases)
        total = write(args.out, cases.rows, time.monotonic() - t0, args.quick)
    print(f"{total['tried']} cases: {total['ok']} ok, {total['clean error']} clean errors, "
          f"{total['traceback']} tracebacks, {total['hang']} hangs, {total['data lost']} with "
          f"data lost; wrote {args.out / 'fault_cases.md'}")


if __name__ == "__main__":
    main()
