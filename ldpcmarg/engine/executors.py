"""Where chunks run: in-process, a local process pool, or a Dask cluster.

Every executor runs ``func(context, task)`` for many small ``task`` objects
that share one ``context`` (code matrix, decoder specs, channel kind, run
seed). The context travels to each worker once; tasks carry only a chunk
index, an SNR value and a frame count. The coordinator submits tasks,
waits for any to finish and records results itself, so it stays the only
writer of the results store whatever the executor.

Executors
---------
:class:`InlineExecutor`
    Runs tasks in the calling process, one at a time (``workers=1``).
:class:`ProcessExecutor`
    A :class:`concurrent.futures.ProcessPoolExecutor` using the
    ``forkserver`` start method (forking a process that already runs numba
    threads is unsafe), dispatching tasks dynamically.
:class:`DaskExecutor`
    A Dask distributed cluster: an existing scheduler (``tcp://host:port``)
    or a loopback :class:`distributed.LocalCluster` (``local:N``). Needs the
    ``ldpcmarg[dask]`` extra.
"""

from __future__ import annotations

import concurrent.futures as cf
import multiprocessing as mp
import os
import signal
import threading
import time
from typing import Any

from ..errors import InputError, LdpcmargError, MissingExtraError

__all__ = [
    "Executor",
    "InlineExecutor",
    "ProcessExecutor",
    "DaskExecutor",
    "make_executor",
    "ClusterError",
]


class ClusterError(LdpcmargError):
    """A Dask cluster could not be reached or failed."""


class Executor:
    """Interface shared by the executors.

    Attributes
    ----------
    capacity : int
        How many tasks the coordinator should keep in flight.
    workers : int
        Number of worker slots (processes or Dask threads).
    """

    capacity = 1
    workers = 1
    label = "executor"

    def start(self, func, context) -> None:
        """Prepare workers to run ``func(context, task)``; ``context`` is shipped once."""
        raise NotImplementedError

    def submit(self, task) -> Any:
        """Queue one task; returns a handle."""
        raise NotImplementedError

    def wait(self, handles: list, timeout: float | None) -> list:
        """Block until at least one handle is done (or ``timeout`` s); return the done ones."""
        raise NotImplementedError

    def result(self, handle):
        """Result of a finished handle (re-raises the task's exception)."""
        raise NotImplementedError

    def cancel(self, handles: list) -> list:
        """Drop queued tasks; return the handles that could not be cancelled (running)."""
        return []

    def close(self, abort: bool = False) -> None:
        """Release workers; ``abort=True`` stops running tasks without waiting."""

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        self.close(abort=exc_type is not None)


# ---------------------------------------------------------------- inline
class InlineExecutor(Executor):
    """Run tasks in this process when waited for (deterministic, no pickling)."""

    label = "in-process"

    def start(self, func, context):
        self._func, self._ctx = func, context

    def submit(self, task):
        return _InlineHandle(task)

    def wait(self, handles, timeout):
        for h in handles:
            if h.done:
                return [h]
        if not handles or (timeout is not None and timeout <= 0):
            return []
        h = handles[0]
        try:
            h.value = self._func(self._ctx, h.task)
        except Exception as exc:  # surfaced by result()
            h.error = exc
        h.done = True
        return [h]

    def result(self, handle):
        if handle.error is not None:
            raise handle.error
        return handle.value

    def cancel(self, handles):
        for h in handles:
            h.done = True
        return []


class _InlineHandle:
    __slots__ = ("task", "done", "value", "error")

    def __init__(self, task):
        self.task, self.done, self.value, self.error = task, False, None, None


# ---------------------------------------------------------------- process pool
_WORKER_FUNC = None
_WORKER_CTX = None


def _one_numba_thread() -> None:
    """Run numba's frame-parallel loops on one thread in this worker thread.

    With one worker per core, letting every worker also start a numba thread
    per core would oversubscribe the machine. (The in-process executor keeps
    numba's default, so ``workers=1`` still uses every core.) A decoder spec
    with an explicit ``threads=`` option overrides this inside ``decode``.
    """
    import sys

    nb = sys.modules.get("numba")
    if nb is not None:
        try:
            nb.set_num_threads(1)
        except Exception:  # pragma: no cover - numba without a threading layer
            pass


def _exit_with_parent() -> None:
    """Leave when the coordinator is gone (e.g. killed with SIGKILL): no orphan workers."""
    parent = mp.parent_process()
    if parent is None:  # pragma: no cover - not started by multiprocessing
        return

    def watch():
        parent.join()
        os._exit(1)

    threading.Thread(target=watch, name="ldpcmarg-parent-watch", daemon=True).start()


def _init_worker(func, context):
    global _WORKER_FUNC, _WORKER_CTX
    # The coordinator alone handles Ctrl-C and SIGTERM and stops the pool (a short grace,
    # then SIGKILL); a worker hit by the terminal's SIGINT or a process-group SIGTERM would
    # otherwise die mid-chunk or print a KeyboardInterrupt traceback.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    # numba guards its thread-pool start with a multiprocessing RLock whenever the default
    # start method contains "fork" (a forkserver child inherits "forkserver"): a named
    # semaphore registered with the resource tracker, which a killed worker never unlinks
    # ("leaked semaphore objects" at shutdown). This worker starts no processes of its own,
    # so its default start method may be "spawn", for which numba takes a plain lock.
    mp.set_start_method("spawn", force=True)
    _WORKER_FUNC, _WORKER_CTX = func, context
    _one_numba_thread()
    _exit_with_parent()


class _DeferSignals:
    """Hold SIGINT and SIGTERM while worker processes are being started.

    A KeyboardInterrupt raised inside ``Process.start`` (e.g. while waiting for
    the forkserver to report the new pid) leaves a child the pool does not
    know about; the coordinator then exits and unlinks the pool's semaphores
    while that child is still unpickling them (``SemLock._rebuild``
    FileNotFoundError traceback). Signals that arrive inside the block are
    recorded and raised again, with the usual handlers, once it ends.
    """

    SIGNALS = (signal.SIGINT, signal.SIGTERM)

    def __enter__(self):
        self._caught: list[int] = []
        self._old: dict = {}
        if threading.current_thread() is threading.main_thread():
            for sig in self.SIGNALS:
                old = signal.getsignal(sig)
                if old is not None:  # None: a handler not set from Python; leave it alone
                    self._old[sig] = signal.signal(sig, self._record)
        return self

    def _record(self, signum, frame):
        self._caught.append(signum)

    def __exit__(self, *exc_info):
        for sig, old in self._old.items():
            signal.signal(sig, old)
        for sig in dict.fromkeys(self._caught):
            signal.raise_signal(sig)  # now met by the handler it would have met
        return False


def _run_in_worker(task):
    return _WORKER_FUNC(_WORKER_CTX, task)


class ProcessExecutor(Executor):
    """Local process pool with dynamic dispatch.

    Parameters
    ----------
    workers : int, optional
        Worker processes (default: all cores, ``os.cpu_count()``).
    start_method : str
        ``"forkserver"`` (default) or ``"spawn"``.
    """

    label = "process pool"
    #: Seconds a running chunk may take to finish after Ctrl-C before it is terminated.
    grace_seconds = 3.0

    def __init__(self, workers: int | None = None, start_method: str = "forkserver"):
        w = (os.cpu_count() or 1) if workers is None else int(workers)
        if w < 1:
            raise InputError(f"The number of workers must be >= 1; got {workers!r}.")
        self.workers = w
        self.capacity = 2 * w
        self._method = start_method
        self._pool = None

    def start(self, func, context):
        with _DeferSignals():
            self._pool = cf.ProcessPoolExecutor(
                max_workers=self.workers, mp_context=mp.get_context(self._method),
                initializer=_init_worker, initargs=(func, context))

    def submit(self, task):
        with _DeferSignals():  # a submit may start a worker process (and the forkserver)
            return self._pool.submit(_run_in_worker, task)

    def wait(self, handles, timeout):
        done, _ = cf.wait(handles, timeout=timeout, return_when=cf.FIRST_COMPLETED)
        return list(done)

    def result(self, handle):
        try:
            return handle.result()
        except cf.process.BrokenProcessPool as exc:
            raise LdpcmargError(
                "A worker process died unexpectedly (out of memory or killed?); completed "
                "chunks are kept in the store, run the same command again to continue."
            ) from exc

    def cancel(self, handles):
        return [h for h in handles if not h.cancel()]

    def close(self, abort=False):
        pool, self._pool = self._pool, None
        if pool is None:
            return
        if abort:
            # queued chunks are dropped; running ones get a short grace period to finish,
            # then are killed (workers ignore SIGTERM; they hold no named semaphores, so
            # nothing leaks). Every worker is gone before this process unlinks the
            # pool's own semaphores at exit.
            procs = list((getattr(pool, "_processes", None) or {}).values())
            pool.shutdown(wait=False, cancel_futures=True)
            deadline = time.monotonic() + self.grace_seconds
            for p in procs:
                p.join(timeout=max(deadline - time.monotonic(), 0.0))
            for p in procs:
                if p.is_alive():
                    p.kill()
            for p in procs:
                p.join(timeout=5)
        else:
            pool.shutdown(wait=True, cancel_futures=True)


# ---------------------------------------------------------------- dask
def dask_setup(worker=None):
    """Dask preload hook for the workers of a ``local:N`` cluster: ignore SIGINT.

    Ctrl-C reaches every process of the terminal's process group; the
    coordinator alone handles it (one line, chunks kept) and closes the
    cluster, so the workers must not each print a KeyboardInterrupt traceback.
    """
    try:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except ValueError:  # pragma: no cover - not the main thread of the worker
        pass


def _is_lost(exc: BaseException) -> bool:
    """Did a task fail because its worker (or the scattered context) was lost?"""
    names = {t.__name__ for t in type(exc).__mro__}
    return bool(names & {"CancelledError", "FuturesCancelledError", "KilledWorker",
                         "FutureCancelledError"})


async def _probe_scheduler(address: str, timeout: float, connection_args: dict) -> dict:
    """Speak to ``address`` as a Dask client would, giving up after ``timeout`` s.

    ``distributed.Client`` can wait far longer than its ``timeout`` when the
    port is served by something else (an HTTP server accepts the connection
    and never answers the handshake); this bounded probe comes first.
    """
    import asyncio

    from distributed.comm import connect

    async def exchange():
        comm = await connect(address, timeout=timeout, **connection_args)
        try:
            await comm.write({"op": "identity", "reply": True})
            return await comm.read()
        finally:
            comm.abort()

    return await asyncio.wait_for(exchange(), timeout)


def _dask_call(func, context, task):
    _one_numba_thread()  # numba's thread count is per calling thread
    return func(context, task)


def _import_distributed():
    try:
        import distributed
    except ImportError as exc:
        raise MissingExtraError(
            "Running on a cluster needs Dask distributed; install the extra: "
            "pip install 'ldpcmarg[dask]'."
        ) from exc
    return distributed


class DaskExecutor(Executor):
    """Run chunks on a Dask distributed cluster.

    Parameters
    ----------
    address : str
        ``tcp://HOST:PORT`` of a running scheduler, or ``local:N`` to start a
        :class:`distributed.LocalCluster` with N single-threaded worker
        processes bound to 127.0.0.1.
    connect_timeout : float
        Seconds to wait for the scheduler before giving up with
        :class:`ClusterError`.
    retries : int
        Times a failed chunk is retried (a chunk lost with a dead worker is
        rescheduled by Dask itself; its result is the same, seeded by chunk).

    Notes
    -----
    The context (code matrix and specs) is scattered to every worker once
    (``broadcast=True``); workers build the decoders once per context and
    reuse them (numba kernels load from the on-disk cache).
    """

    label = "dask"

    #: Seconds to wait for a lost chunk's recompute (a worker must come back).
    recompute_timeout = 300.0

    def __init__(self, address: str, connect_timeout: float = 10.0, retries: int = 3):
        distributed = _import_distributed()
        self._distributed = distributed
        self.address = address
        self._retries = int(retries)
        self._cluster = None
        self._ctx_future = None
        self._context = None
        self._func = None
        self._tasks: dict = {}
        security = None
        if address.startswith("local:"):
            try:
                n = int(address.split(":", 1)[1])
            except ValueError:
                n = 0
            if n < 1:
                raise InputError(f"--cluster local:N needs a worker count N >= 1; got {address!r}.")
            self._cluster = _local_cluster(distributed, n)
            target = self._cluster
        elif address.startswith(("tcp://", "tls://")):
            target = address
            security = distributed.Security()
            if address.startswith("tls://") and \
                    security.get_connection_args("client").get("ssl_context") is None:
                raise ClusterError(
                    f"Cannot connect to {address}: a tls:// scheduler needs TLS certificates, "
                    "and none are configured; set distributed.comm.tls.ca-file, "
                    "distributed.comm.tls.client.cert and .key in the Dask configuration, or "
                    "use tcp:// (e.g. through an SSH tunnel).")
            self._probe(address, connect_timeout, security)
        else:
            raise InputError(
                f"Unknown cluster address {address!r}; use tcp://HOST:PORT or local:N.")
        try:
            self._client = distributed.Client(target, timeout=connect_timeout,
                                              set_as_default=False,
                                              **({"security": security} if security else {}))
        except (OSError, TimeoutError, TypeError, ValueError) as exc:
            if self._cluster is not None:
                self._cluster.close()
            raise ClusterError(
                f"Cannot reach the Dask scheduler at {address} within {connect_timeout:g} s "
                f"({type(exc).__name__}); is it running and reachable?"
            ) from exc
        nthreads = sum(self._client.nthreads().values()) or 1
        self.workers = nthreads
        self.capacity = 2 * nthreads

    def _probe(self, address, timeout, security):
        import asyncio

        try:
            reply = asyncio.run(_probe_scheduler(address, timeout,
                                                 security.get_connection_args("client")))
        except Exception as exc:  # any failure to exchange messages is "not a reachable scheduler"
            raise ClusterError(
                f"Cannot reach the Dask scheduler at {address} within {timeout:g} s "
                f"({type(exc).__name__}); is it running, and is that its address and port "
                "(not another service)?"
            ) from None
        if not isinstance(reply, dict) or reply.get("type") != "Scheduler":
            raise ClusterError(f"{address} answered, but not as a Dask scheduler; check the "
                               "address and port.")

    @property
    def client(self):
        return self._client

    def start(self, func, context):
        self._func = func
        self._context = context
        self._ctx_future = self._client.scatter(context, broadcast=True, hash=False)

    def submit(self, task):
        fut = self._client.submit(_dask_call, self._func, self._ctx_future, task,
                                  pure=False, retries=self._retries)
        self._tasks[fut.key] = task
        return fut

    def wait(self, handles, timeout):
        done = [h for h in handles if h.done()]
        if done or not handles:
            return done
        try:
            with self._client.as_current():
                res = self._distributed.wait(handles, timeout=timeout,
                                             return_when="FIRST_COMPLETED")
        except TimeoutError:
            return []
        except Exception as exc:  # dask raises its own TimeoutError subclass on some versions
            if "Timeout" in type(exc).__name__:
                return []
            if _is_lost(exc):  # a worker died: hand back the lost chunks for recompute
                return [h for h in handles if h.status in ("cancelled", "error", "lost")] \
                    or [h for h in handles if h.done()] or handles[:1]
            raise
        return list(res.done)

    def result(self, handle):
        task = self._tasks.pop(handle.key, None)
        try:
            return handle.result()
        except Exception as exc:
            if task is None or not _is_lost(exc):
                raise
            return self._recompute(task)

    def _recompute(self, task):
        """Run a chunk again after its worker (and maybe the scattered context) was lost.

        The chunk's result is fixed by its seed, so the recompute gives the
        counts the lost run would have given.
        """
        deadline = time.monotonic() + self.recompute_timeout
        last = None
        for _ in range(max(self._retries, 1)):
            if self._ctx_future is None or self._ctx_future.status != "finished":
                try:
                    self._ctx_future = self._client.scatter(self._context, broadcast=True,
                                                            hash=False)
                except Exception as exc:  # no worker yet: wait and try again
                    last = exc
                    time.sleep(1.0)
                    if time.monotonic() > deadline:
                        break
                    continue
            fut = self._client.submit(_dask_call, self._func, self._ctx_future, task,
                                      pure=False, retries=self._retries)
            try:
                return fut.result(timeout=max(deadline - time.monotonic(), 1.0))
            except Exception as exc:
                last = exc
                if not _is_lost(exc) or time.monotonic() > deadline:
                    break
        raise ClusterError(
            f"A chunk was lost with its Dask worker and could not be recomputed "
            f"({type(last).__name__ if last else 'timeout'}); completed chunks are kept in the "
            "store, run the same command again to continue."
        )

    def cancel(self, handles):
        for h in handles:
            self._tasks.pop(h.key, None)
        if handles:
            self._client.cancel(handles)
        return []

    def close(self, abort=False):
        client, self._client = getattr(self, "_client", None), None
        if client is not None:
            try:
                client.close(timeout=5)
            except Exception:  # pragma: no cover - best effort on shutdown
                pass
        if self._cluster is not None:
            try:
                self._cluster.close(timeout=10)
            except Exception:  # pragma: no cover
                pass
            self._cluster = None


def _local_cluster(distributed, n: int):
    """A loopback LocalCluster with no dashboard and workers that ignore Ctrl-C.

    ``dashboard_address=None`` still leaves the scheduler's HTTP server (health
    and metrics routes) on the default port 8787; with no routes configured
    and an ephemeral loopback port, nothing is served there.
    """
    import logging

    import dask

    with dask.config.set({"distributed.scheduler.http.routes": [],
                          "distributed.worker.http.routes": []}):
        return distributed.LocalCluster(
            n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1",
            dashboard_address=None, worker_dashboard_address=None,
            scheduler_kwargs={"dashboard": False, "dashboard_address": "127.0.0.1:0"},
            silence_logs=logging.CRITICAL, preload=[__name__])


def make_executor(workers: int | None = None, cluster: str | None = None) -> Executor:
    """Pick an executor: Dask when ``cluster`` is given, else a process pool or inline.

    Parameters
    ----------
    workers : int, optional
        Local worker processes; ``1`` runs in-process; default all cores.
    cluster : str, optional
        ``tcp://HOST:PORT`` or ``local:N`` (see :class:`DaskExecutor`).
    """
    if cluster:
        return DaskExecutor(cluster)
    w = (os.cpu_count() or 1) if workers is None else int(workers)
    if w < 1:
        raise InputError(f"The number of workers must be >= 1; got {workers!r}.")
    if w == 1:
        return InlineExecutor()
    return ProcessExecutor(w)
