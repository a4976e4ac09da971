"""Dask faults: the only worker lost, a non-Dask server, tls:// without certificates, Ctrl-C,
no dashboard. Each test reproduces one defect of a fault review."""

from __future__ import annotations

import http.server
import os
import signal
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

pytest.importorskip("distributed")

from ldpcmarg.engine.executors import ClusterError, DaskExecutor  # noqa: E402
from ldpcmarg.engine.simulate import StopRule, simulate  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}


def counts(res):
    return [(p.decoder, p.snr, p.frames, p.frame_errors, p.bit_errors, p.chunks)
            for p in res.points]


@pytest.mark.slow
def test_losing_the_only_worker_recomputes(hamming74):
    # local:1 loses its only worker, and with it the scattered context: the lost chunks
    # must be recomputed (same seeds, so the same counts as an undisturbed in-process run)
    kw = dict(seed=41, stop=StopRule(frame_errors=10**6, max_frames=6000), chunk_frames=200)
    ex = DaskExecutor("local:1")
    pids = sorted(ex.client.run(os.getpid).values())
    assert len(pids) == 1
    killed = []

    def progress(info):
        if not killed and any(d["frames"] for d in info["decoders"]):
            os.kill(pids[0], signal.SIGKILL)
            killed.append(pids[0])

    hurt = simulate(hamming74, ["sum-product"], [1.0, 2.0], executor=ex, progress=progress,
                    **kw)
    clean = simulate(hamming74, ["sum-product"], [1.0, 2.0], workers=1, **kw)
    assert killed
    assert counts(hurt) == counts(clean)


class _Http(http.server.BaseHTTPRequestHandler):
    def do_GET(self):  # pragma: no cover - a Dask client never sends GET
        self.send_response(200)
        self.end_headers()

    def log_message(self, *args):
        pass


@pytest.fixture
def http_port():
    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), _Http)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield server.server_address[1]
    server.shutdown()
    server.server_close()


def test_tcp_address_of_an_http_server_honours_the_timeout(tmp_path, http_port):
    # this used to hang well past --cluster-timeout; the subprocess timeout only guards a hang
    done = subprocess.run(
        [sys.executable, "-m", "ldpcmarg", "simulate", "hamming-7-4", "-d", "sum-product",
         "--ebn0", "1", "--max-frames", "64", "-q", "--cluster", f"tcp://127.0.0.1:{http_port}",
         "--cluster-timeout", "2"], cwd=tmp_path, env=ENV, capture_output=True, text=True,
        timeout=90)
    assert done.returncode == 2, done.stderr[-2000:]
    assert "Traceback" not in done.stderr
    lines = [ln for ln in done.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Cannot reach the Dask scheduler" in lines[0], done.stderr


def test_tls_without_certificates_is_a_clear_error(http_port):
    with pytest.raises(ClusterError, match="needs TLS certificates"):
        DaskExecutor(f"tls://127.0.0.1:{http_port}", connect_timeout=2)


def test_local_cluster_serves_no_dashboard():
    ex = DaskExecutor("local:1")
    try:
        sched = ex._cluster.scheduler
        ports = [s.getsockname()[1] for s in sched.http_server._sockets.values()]
        hosts = [s.getsockname()[0] for s in sched.http_server._sockets.values()]
        assert 8787 not in ports and set(hosts) <= {"127.0.0.1"}
        # the scheduler always keeps an HTTP listener; it must serve no page at all
        for page in ("status", "health", "metrics", "info/main/workers.html"):
            with pytest.raises(urllib.error.HTTPError) as info:
                urllib.request.urlopen(f"http://127.0.0.1:{ports[0]}/{page}", timeout=10)
            assert info.value.code == 404, page
    finally:
        ex.close()


@pytest.mark.slow
def test_ctrl_c_with_two_local_workers_prints_no_tracebacks(tmp_path):
    proc = subprocess.Popen(
        [sys.executable, "-m", "ldpcmarg", "simulate", "hamming-7-4", "-d", "sum-product",
         "--ebn0", "1,2", "--frame-errors", "1000000", "--max-frames", "5000000",
         "--chunk-frames", "2000", "-q", "--cluster", "local:2", "--store", "c.sqlite"],
        cwd=tmp_path, env=ENV, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        start_new_session=True)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and not (tmp_path / "c.sqlite-wal").exists():
        time.sleep(0.2)
    time.sleep(1.0)
    assert proc.poll() is None, proc.communicate()
    os.killpg(proc.pid, signal.SIGINT)  # what Ctrl-C does: the whole process group
    try:
        _, err = proc.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        _, err = proc.communicate()
        raise AssertionError("the run did not stop after Ctrl-C") from None
    assert proc.returncode == 130, err
    assert "Traceback" not in err and "KeyboardInterrupt" not in err, err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("Interrupted;"), err
