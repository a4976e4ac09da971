"""Dask executor on loopback: same counts as the process pool, worker loss, bad address."""

from __future__ import annotations

import os
import signal
import socket
import sys

import distributed
import pytest

from ldpcmarg.cli import main
from ldpcmarg.engine.executors import ClusterError, DaskExecutor, ProcessExecutor
from ldpcmarg.engine.simulate import StopRule, simulate
from ldpcmarg.errors import MissingExtraError

DECODERS = ["sum-product", "min-sum:alpha=0.8,max_iter=20"]
SNR = [1.0, 2.5, 4.0]


def counts(res):
    return [(p.decoder, p.snr, p.frames, p.frame_errors, p.bit_errors, p.info_bit_errors,
             p.undetected_errors, p.iterations, p.chunks) for p in res.points]


@pytest.fixture(scope="module")
def cluster():
    # one loopback cluster for the module: starting one costs seconds
    import logging

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None,
                                  silence_logs=logging.ERROR) as c:
        yield c


def test_dask_counts_equal_process_pool(cluster, hamming74):
    kw = dict(seed=31, stop=StopRule(frame_errors=30, max_frames=4000), chunk_frames=250)
    on_dask = simulate(hamming74, DECODERS, SNR, executor=DaskExecutor(cluster.scheduler_address),
                       **kw)
    on_pool = simulate(hamming74, DECODERS, SNR, executor=ProcessExecutor(2), **kw)
    assert on_dask.settings["executor"] == "dask" and on_dask.settings["workers"] == 2
    assert counts(on_dask) == counts(on_pool)


def test_dask_worker_killed_mid_run(cluster, hamming74):
    kw = dict(seed=32, stop=StopRule(frame_errors=150, max_frames=20_000), chunk_frames=100)
    ex = DaskExecutor(cluster.scheduler_address)
    pids = sorted(ex.client.run(os.getpid).values())
    killed = []

    def progress(info):
        # kill one worker process as soon as the first chunk has come back
        if not killed and any(d["frames"] for d in info["decoders"]):
            os.kill(pids[0], signal.SIGKILL)
            killed.append(pids[0])

    hurt = simulate(hamming74, DECODERS, SNR, executor=ex, progress=progress, **kw)
    assert killed
    reference = simulate(hamming74, DECODERS, SNR, workers=1, **kw)
    assert counts(hurt) == counts(reference)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_unreachable_scheduler_fails_cleanly(capsys):
    # A port nobody listens on: ClusterError after the connect timeout, no hang.
    port = _free_port()
    with pytest.raises(ClusterError, match="Cannot reach the Dask scheduler"):
        DaskExecutor(f"tcp://127.0.0.1:{port}", connect_timeout=2)
    with pytest.raises(SystemExit) as exc:
        main(["simulate", "hamming-7-4", "-d", "hard-decision", "--ebn0", "1", "-q",
              "--max-frames", "100", "--cluster", f"tcp://127.0.0.1:{port}",
              "--cluster-timeout", "2"])
    err = capsys.readouterr().err
    assert exc.value.code == 2
    assert "Cannot reach the Dask scheduler" in err and "Traceback" not in err
    with pytest.raises(SystemExit):
        main(["simulate", "hamming-7-4", "-d", "hard-decision", "--ebn0", "1", "-q",
              "--cluster", "udp://nowhere"])
    assert "Unknown cluster address" in capsys.readouterr().err


def test_missing_extra_is_named(monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import now raises ImportError
    with pytest.raises(MissingExtraError, match=r"ldpcmarg\[dask\]"):
        DaskExecutor("local:1")
