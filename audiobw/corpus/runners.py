"""Running the tasks: in this process, on a local process pool (spawn), or on a dask.distributed cluster.

References
----------
.. [1] Python documentation, ``concurrent.futures.ProcessPoolExecutor``,
   ``as_completed``; ``multiprocessing`` contexts ("spawn").
.. [2] dask.distributed documentation, ``Client.submit``, ``as_completed``,
   ``KilledWorker``.
"""

from __future__ import annotations

import os
import secrets
import threading

from ..errors import AudiobwError, ParameterError
from .task import sweep_task, worker_init


class BatchInterrupted(AudiobwError):
    """The pool or the cluster was lost part-way; finished files are kept in the cache."""

    exit_code = 1


def _run_serial(tasks, on_result):
    for i, task in enumerate(tasks):
        on_result(i, sweep_task(task))


def _run_pool(tasks, workers: int, on_result):
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    pool = ProcessPoolExecutor(
        max_workers=max(1, min(workers, len(tasks))),
        mp_context=multiprocessing.get_context("spawn"),
        initializer=worker_init,
        initargs=(os.getpid(),),
    )
    futures: dict = {}

    def stop():
        # Cancel what has not started ourselves: shutdown(cancel_futures=True) alone
        # does nothing once the executor object is collected while the process exits.
        for fut in futures:
            fut.cancel()
        pool.shutdown(wait=True, cancel_futures=True)  # the files in progress finish and are cached

    try:
        for i, t in enumerate(tasks):
            futures[pool.submit(sweep_task, t)] = i
        for fut in as_completed(futures):
            on_result(futures[fut], fut.result())
    except BrokenProcessPool as exc:
        stop()
        raise BatchInterrupted(
            f"--workers: a worker process died ({exc}); finished files are kept in the "
            "cache: run the same command again to resume"
        ) from None
    except BaseException:
        stop()
        raise
    pool.shutdown(wait=True)


def _connect(Client, address: str, timeout_s: float):
    """``Client(address)`` with a hard deadline over the connection and the scheduler's handshake.

    distributed's own ``timeout`` covers the connection; a listener that is not a scheduler
    (an HTTP server, a port that accepts and never answers) can stall the handshake for ever.
    The client is built in a helper thread; past the deadline the run stops with one line.
    """
    box: dict = {}

    def work():
        try:
            box["client"] = Client(address, timeout=f"{timeout_s}s")
        except BaseException as exc:  # re-raised in the caller
            box["error"] = exc

    t = threading.Thread(target=work, name="audiobw-cluster-connect", daemon=True)
    t.start()
    t.join(timeout_s + 2.0)
    if t.is_alive():
        raise BatchInterrupted(
            f"--cluster: {address!r}: no dask scheduler answered within {timeout_s:g} s "
            "(is it a scheduler's address?); accepted: e.g. tcp://host:8786; "
            "--cluster-timeout sets the wait"
        )
    if "error" in box:
        raise box["error"]
    return box["client"]


def _run_cluster(tasks, address, on_result, opt_hash: str, *, timeout_s: float = 10.0):
    try:
        from distributed import Client, as_completed
        from distributed.client import FutureCancelledError  # noqa: F401
    except ImportError:
        raise ParameterError(
            f"--cluster: {address!r} needs the optional package 'distributed'; "
            "install it with: pip install 'audiobw[cluster]'"
        ) from None
    from distributed import KilledWorker

    try:
        client = _connect(Client, address, timeout_s)
    except ValueError as exc:
        raise ParameterError(
            f"--cluster: {address!r} is not a scheduler address ({exc}); "
            "accepted: e.g. tcp://host:8786 or tls://host:8786"
        ) from None
    except (OSError, TimeoutError) as exc:
        raise BatchInterrupted(f"--cluster: cannot reach a dask scheduler at {address!r} ({exc})") from None
    try:
        futures = {}
        run = secrets.token_hex(4)  # keys unique to this run: never another client's finished task
        for i, t in enumerate(tasks):
            key = f"audiobw-sweep-{opt_hash[:12]}-{run}-{i}"
            futures[client.submit(sweep_task, t, key=key, pure=False)] = i
        for fut in as_completed(futures):
            i = futures[fut]
            try:
                result = fut.result()
            except KilledWorker as exc:
                result = {
                    "status": "failed",
                    "cached": False,
                    "reason": f"{tasks[i]['path']}: its task killed the cluster's workers ({exc})",
                }
            except Exception as exc:
                raise BatchInterrupted(
                    f"--cluster: {address}: lost ({type(exc).__name__}: {exc}); finished "
                    "files are kept in the cache: run the same command again to resume"
                ) from None
            on_result(i, result)
    finally:
        try:
            for fut in futures:
                fut.cancel()
        except Exception:  # the cluster may already be gone
            pass
        client.close()
