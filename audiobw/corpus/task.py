"""The task that runs on a worker: sweep one file, or take it from the batch cache.

Plain data in and out (paths and an option mapping; a small mapping back), so
the local pool (spawn: the function is pickled by its module path) and a dask
cluster run the same :func:`sweep_task`.
"""

from __future__ import annotations

import json
import os
import threading
import warnings
from pathlib import Path

from ..errors import AudiobwError, OutputError
from ..forked import exit_with_parent  # noqa: F401  (re-exported: audiobw.batch)
from .cache import (
    CACHE_FORMAT,
    DATA_KEYS,
    IDENTITY_KEYS,
    MEDIAN_KEYS,
    _cache_file,
    _sweep_present,
    entry_checksum,
    read_cache,
)
from ..model import Settings

_local = threading.local()
_hook_lock = threading.Lock()


def _install_warning_hook() -> None:
    """Route warnings raised inside a task to that task's own list (thread-safe)."""
    with _hook_lock:
        current = warnings.showwarning
        if getattr(current, "_audiobw_batch", False):
            return

        def hook(message, category, filename, lineno, file=None, line=None):
            sink = getattr(_local, "sink", None)
            if sink is not None:
                sink.append(str(message))
            else:
                current(message, category, filename, lineno, file, line)

        hook._audiobw_batch = True
        warnings.showwarning = hook


def _limit_blas() -> None:
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return
    threadpool_limits(1)


def worker_init(parent_pid: int | None = None) -> None:
    """Process-pool initializer: one BLAS thread, Ctrl-C handled by the parent only, exit with the parent.

    A worker is one core: its sweeps run without the analysis's extra helper
    thread and without forked scoring (``AUDIOBW_THREADS=1``,
    :func:`audiobw.background.helper_threads`); ``--workers`` says how many
    cores a batch takes.
    """
    import signal

    exit_with_parent(parent_pid)

    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = "1"
    os.environ["AUDIOBW_THREADS"] = "1"
    if os.environ.get("AUDIOBW_MALLOC", "") != "default":
        from .._start import tune_malloc

        tune_malloc()
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def sweep_task(task: dict) -> dict:
    """Sweep one file (or take it from the cache); returns a small plain mapping.

    ``task`` keys: ``path`` (absolute), ``out_dir``, ``cache_dir``,
    ``settings`` (:meth:`Settings.to_json`), ``options`` (its hash).
    The result has ``status`` ("ok" or "failed"), ``cached``, and either the
    cache entry (``entry``) or a ``reason``.
    """
    from .. import jobs
    from ..audio import sha256_file, write_text_atomic

    _limit_blas()
    path, out_dir, opt = task["path"], Path(task["out_dir"]), task["options"]
    from ..audio import check_unchanged, fingerprint, is_regular_file

    if not is_regular_file(path):
        return {
            "status": "failed",
            "cached": False,
            "reason": f"{path}: not a regular file; not opened; accepted: regular audio files",
        }
    try:
        before = fingerprint(path)
        sha = sha256_file(path)
    except OSError as exc:
        return {"status": "failed", "cached": False, "reason": f"{path}: cannot read ({exc.strerror or exc})"}
    entry = read_cache(task["cache_dir"], sha, opt)
    if entry is not None and _sweep_present(out_dir, sha):
        return {"status": "ok", "cached": True, "entry": entry}
    _install_warning_hook()
    _local.sink = caught = []
    try:
        settings = Settings.from_json(task["settings"])
        # the digest just taken is reused by the analysis (one hash per file);
        # a change while the file is read shows in its fingerprint (check_unchanged)
        # the analysis cache is keyed by that digest too: options changed since, the file is not decoded
        doc, _ = jobs.sweep_file(path, settings, out_dir=out_dir, sha256=sha, use_cache=task.get("use_cache", True))
    except AudiobwError as exc:
        return {"status": "failed", "cached": False, "reason": str(exc)}
    except Exception as exc:  # a bug or exhausted memory: list the file and go on
        return {"status": "failed", "cached": False, "reason": f"{path}: internal error ({type(exc).__name__}: {exc})"}
    finally:
        _local.sink = None
    try:
        check_unchanged(path, before)
        if doc["input"]["sha256"] != sha:
            raise AudiobwError(f"{path}: changed while it was read (SHA-256 differs); nothing cached")
    except AudiobwError as exc:
        return {"status": "failed", "cached": False, "reason": str(exc)}
    keys = ("id", "poles", *IDENTITY_KEYS, *MEDIAN_KEYS, "thdn_note", "passes", "fails", "margins_db")
    cases = [{k: c.get(k) for k in keys + tuple(k for k in DATA_KEYS if k in c)} for c in doc["cases"]]
    from .. import __version__

    entry = {
        "format": CACHE_FORMAT,
        "sha256": sha,
        "options": opt,
        "tool_version": __version__,
        "input": {k: v for k, v in doc["input"].items() if k != "path"},
        "choice": doc["choice"],
        "cases": cases,
        "warnings": caught,
    }
    entry["checksum"] = entry_checksum(entry)
    text = json.dumps(entry, sort_keys=True, allow_nan=False, ensure_ascii=False)
    try:
        write_text_atomic(_cache_file(task["cache_dir"], sha, opt), text + "\n")
    except OutputError:
        pass  # the sweep is done and its outputs written; only a rerun would redo it
    return {"status": "ok", "cached": False, "entry": json.loads(text)}
