"""The whole batch run: inputs, tasks, runners, summary; corpus.json and corpus.csv written atomically."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path

from ..errors import OutputError, ParameterError
from .inputs import collect_inputs
from .plain import options_hash
from .runners import _run_cluster, _run_pool, _run_serial
from .summary import csv_text, summarise


@dataclass
class BatchResult:
    doc: dict
    paths: dict
    computed: int
    cached: int
    elapsed_s: float


def run_batch(
    args,
    settings,
    out_dir,
    *,
    coverage: float = 0.95,
    workers: int | None = None,
    cluster: str | None = None,
    follow_links: bool = False,
    progress=None,
    **kw,
) -> BatchResult:
    """Run a batch into ``out_dir`` while holding its output lock (see :func:`_run_batch`)."""
    from ..audio import output_lock

    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise OutputError(f"--out: {str(out)!r} exists and is not a folder")
    with output_lock(out):
        return _run_batch(
            args,
            settings,
            out_dir,
            coverage=coverage,
            workers=workers,
            cluster=cluster,
            follow_links=follow_links,
            progress=progress,
            **kw,
        )


def _run_batch(
    args,
    settings,
    out_dir,
    *,
    coverage: float = 0.95,
    workers: int | None = None,
    cluster: str | None = None,
    follow_links: bool = False,
    progress=None,
    cluster_timeout_s: float = 10.0,
    use_cache: bool = True,
) -> BatchResult:
    """Sweep every input file and write corpus.json and corpus.csv into ``out_dir``.

    Parameters
    ----------
    args : list of str or path
        Files, folders (recursive) and glob patterns.
    settings : Settings
    out_dir : path
        Gets ``corpus.json``, ``corpus.csv``, ``files/<name>/`` and ``cache/``.
    coverage : float, 0 < coverage <= 1
        Share of the swept files the chosen case must pass on.
    workers : int, optional
        Local processes (default ``os.cpu_count()``); 0 sweeps in this process.
    cluster : str, optional
        Address of a running dask.distributed scheduler; overrides ``workers``.
    follow_links : bool
        Follow symbolic links to folders, and links that lead out of a given folder.
    progress : callable(stats: dict), optional
        Called after each file with ``done``, ``failed``, ``cached``, ``total``, ``elapsed_s``.
    use_cache : bool
        Read and write the analysis cache (:mod:`audiobw.cache`, the user's cache folder):
        a file swept before, with any options, is not decoded again.  ``OUT/cache/``
        (finished files of this option set, for resuming) is used either way.
    """
    from ..audio import write_text_atomic
    from ..report.sweepio import dumps

    if not settings.targets:
        raise ParameterError(
            "targets: none given; accepted: at least one of --min-snr, --min-snr-a, --max-thdn, "
            "--max-loss, --max-lsd, --min-ser"
        )
    if workers is not None and workers < 0:
        raise ParameterError(f"--workers: {workers!r}; accepted: 0 (sweep in this process) or more")
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise OutputError(f"--out: {str(out)!r} exists and is not a folder")
    inputs = collect_inputs(args, follow_links=follow_links)
    plain = settings.to_json()  # what travels to the workers (Settings.from_json there)
    opt = options_hash(plain)
    out_abs = Path(os.path.abspath(out))
    tasks = [
        {
            "path": os.path.abspath(it.path),
            "out_dir": str(out_abs / "files" / it.name),
            "cache_dir": str(out_abs / "cache"),
            "settings": plain,
            "options": opt,
            "use_cache": use_cache,
        }
        for it in inputs.items
    ]
    results: list = [None] * len(tasks)
    stats = {"done": 0, "failed": 0, "cached": 0, "total": len(tasks), "elapsed_s": 0.0}
    start = time.monotonic()

    def on_result(i, result):
        results[i] = result
        stats["done"] += 1
        stats["failed"] += result["status"] != "ok"
        stats["cached"] += bool(result.get("cached"))
        stats["elapsed_s"] = time.monotonic() - start
        if progress is not None:
            progress(dict(stats))

    if cluster:
        _run_cluster(tasks, cluster, on_result, opt, timeout_s=cluster_timeout_s)
    elif workers == 0:
        _run_serial(tasks, on_result)
    else:
        _run_pool(tasks, (os.cpu_count() or 1) if workers is None else workers, on_result)

    files, failed = [], []
    for item, task, result in zip(inputs.items, tasks, results):
        if result["status"] == "ok":
            files.append((item, result["entry"]))
        else:
            failed.append((item.path, result["reason"].replace(task["path"], item.path)))
    doc = summarise(files, failed, inputs.skipped, settings=settings, coverage=coverage, opt_hash=opt)
    paths = {
        "json": write_text_atomic(out / "corpus.json", dumps(doc)),
        "csv": write_text_atomic(out / "corpus.csv", csv_text(doc)),
    }
    return BatchResult(
        doc,
        paths,
        computed=stats["done"] - stats["cached"] - stats["failed"],
        cached=stats["cached"],
        elapsed_s=time.monotonic() - start,
    )
