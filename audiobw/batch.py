"""Corpus runs: sweep many files, then choose one passband for the whole library.

Every file is swept exactly as ``audiobw sweep`` sweeps it (through
:func:`audiobw.jobs.sweep_file`), its sweep.json written under
``OUT/files/<name>/``.  The corpus summary then takes, for every case, the
share of files on which the case passes, and picks the narrowest case that
passes on at least the requested coverage with the same rule as
:func:`audiobw.sweep.choose` (narrowest −3 dB bandwidth, then lower ENBW,
then lower order).

Case identity across files is ``(response, family, order, design_low_hz,
design_high_hz)``.  The grid is built per file (``Settings.grid_for`` with
the file's Nyquist frequency) and validated at the file's rate, so files
at different rates share a case only when the grid was given explicitly; a
case missing from a file's grid counts as not passing on that file.  A file
whose grid is invalid at its rate (an edge too close to its Nyquist
frequency) or which cannot be read is listed under ``failed`` with its
reason, and does not count in the shares (they are over the files swept).

Work is done by a local process pool (spawn context) or, with a cluster
address, by an existing dask.distributed cluster.  Tasks carry plain data
(paths and an option mapping) and return small mappings.  Each finished
file leaves one JSON file in ``OUT/cache/`` keyed by the file's SHA-256 and
the options' hash, so an interrupted run resumes with only the missing work.

References
----------
.. [1] Python documentation, ``concurrent.futures.ProcessPoolExecutor``,
   ``as_completed``; ``multiprocessing`` contexts ("spawn").
.. [2] dask.distributed documentation, ``Client.submit``, ``as_completed``,
   ``KilledWorker``.
.. [3] numpy documentation, ``numpy.percentile`` (method="linear").
"""

from __future__ import annotations

import glob
import hashlib
import json
import math
import os
import re
import secrets
import sys
import threading
import time
import warnings
from dataclasses import asdict, dataclass, field
from pathlib import Path

from . import registry
from .errors import AudiobwError, OutputError, ParameterError
from .names import shown

CACHE_FORMAT = "audiobw-batch-cache/2"  # /2: bound to the tool version, with a checksum
IDENTITY_KEYS = ("response", "family", "order", "design_low_hz", "design_high_hz")
#: Per-case values kept in the cache and aggregated by median over the files.
MEDIAN_KEYS = ("low_hz", "high_hz") + registry.keys(1, "median")
#: Data-program metrics (``--program data``), carried the same way when a file has them.
DATA_KEYS = registry.keys(3, "median")
PERCENTILES = (5, 25, 50, 75, 95)
CSV_KEYS = ("id", "response", "family", "order", "poles", "design_low_hz", "design_high_hz", "low_hz",
            "high_hz", "bandwidth_hz", "enbw_hz", "files_evaluated", "pass_share", "passes", "fails")


class BatchInterrupted(AudiobwError):
    """The pool or the cluster was lost part-way; finished files are kept in the cache."""

    exit_code = 1


# -- inputs -------------------------------------------------------------------

@dataclass(frozen=True)
class Item:
    """One input file: the path as shown (``path``) and its folder name under files/."""

    path: str
    name: str


@dataclass
class Inputs:
    items: list
    skipped: list = field(default_factory=list)


def _is_audio(name: str) -> bool:
    from .audio import AUDIO_SUFFIXES

    return os.path.splitext(name)[1].lower() in AUDIO_SUFFIXES


def _inside(path_real: str, root_real: str) -> bool:
    return path_real == root_real or path_real.startswith(root_real.rstrip(os.sep) + os.sep)


def _walk(root: str, follow_links: bool, found: list, skipped: list) -> None:
    """Audio files under ``root``; symlink loops safe; no link leaves the tree unless asked."""
    root_real = os.path.realpath(root)
    seen_dirs: set = set()

    def visit(display: str):
        try:
            st = os.stat(display)
        except OSError as exc:
            skipped.append((display, f"cannot read folder ({exc.strerror or exc})"))
            return
        key = (st.st_dev, st.st_ino)
        if key in seen_dirs:  # a loop, or a second way into a folder already walked
            return
        seen_dirs.add(key)
        try:
            entries = sorted(os.scandir(display), key=lambda e: e.name)
        except OSError as exc:
            skipped.append((display, f"cannot read folder ({exc.strerror or exc})"))
            return
        for entry in entries:
            if entry.name.startswith("."):
                continue  # hidden files and folders (and our own .part files), common practice
            full = os.path.join(display, entry.name)
            if entry.is_symlink():
                real = os.path.realpath(full)
                if not os.path.exists(real):
                    if _is_audio(entry.name):
                        skipped.append((full, "broken symbolic link"))
                    continue
                if not follow_links and not _inside(real, root_real):
                    if os.path.isdir(real) or _is_audio(entry.name):
                        skipped.append((full, "symbolic link out of the folder given; not followed "
                                              "(--follow-links follows it)"))
                    continue
                if not follow_links and os.path.isdir(real):
                    continue  # a folder inside the tree: walked under its own name
            if entry.is_dir():
                visit(full)
            elif entry.is_file() and _is_audio(entry.name):
                found.append(full)

    visit(root)


def _glob_base(pattern: str) -> str:
    """The leading part of a glob pattern with no wildcard in it."""
    parts, out = Path(pattern).parts, []
    for part in parts:
        if glob.has_magic(part):
            break
        out.append(part)
    return os.path.join(*out) if out else "."


def _through_link(match: str, base: str) -> bool:
    """Whether ``match`` is reached through a symbolic link below ``base``, or is a link leading out of it."""
    rel = os.path.relpath(match, base)
    if rel.startswith(os.pardir):
        return False
    here = base
    for part in Path(rel).parts[:-1]:
        here = os.path.join(here, part)
        if os.path.islink(here):
            return True
    return os.path.islink(match) and not _inside(os.path.realpath(match), os.path.realpath(base))


def _slug(display: str) -> str:
    parts = [p for p in Path(display).parts if p not in ("", ".", "..", os.sep, "/") and not p.endswith(":\\")]
    text = "__".join(re.sub(r"[^A-Za-z0-9._-]+", "_", p) for p in parts).strip("._") or "file"
    return text[:150]


def collect_inputs(args, *, follow_links: bool = False) -> Inputs:
    """Expand INPUT arguments (files, folders, globs) into a sorted, de-duplicated list.

    A file named explicitly is taken whatever its suffix; folders (walked
    recursively) and glob matches give audio files only
    (:data:`audiobw.audio.AUDIO_SUFFIXES`).  Hidden entries in folders are
    left out.  Without ``follow_links`` no symbolic link to a folder is
    descended (the tree's own folders are walked under their own names) and
    no link that leads out of a folder given (or out of a pattern's fixed
    leading part) is taken; links that lead out are listed as skipped.  The same file reached twice (same real path) is taken once,
    under the first name in sorted order.

    Raises
    ------
    ParameterError
        An argument that names nothing and matches nothing, or no audio file at all.
    """
    found: list[str] = []
    skipped: list[tuple[str, str]] = []
    for arg in args:
        arg = os.fspath(arg)
        if os.path.isdir(arg):
            _walk(os.path.normpath(arg), follow_links, found, skipped)
        elif os.path.lexists(arg):
            found.append(os.path.normpath(arg))
        elif glob.has_magic(arg):
            matches = sorted(glob.glob(arg, recursive=True))
            if not matches:
                raise ParameterError(f"INPUT: {arg!r} matches no file or folder")
            base = _glob_base(arg)
            for m in matches:
                if not follow_links and _through_link(m, base):
                    continue  # reached through a symbolic link below the pattern's fixed part
                if os.path.isdir(m):
                    _walk(os.path.normpath(m), follow_links, found, skipped)
                elif _is_audio(m):
                    found.append(os.path.normpath(m))
        else:
            raise ParameterError(f"INPUT: {arg!r}: no such file or folder; accepted: files, folders, glob patterns")
    from .audio import canonical_path, is_regular_file

    regular = []
    for display in found:
        if not is_regular_file(display):
            kind = ("broken symbolic link" if not os.path.exists(display) else "a folder" if os.path.isdir(display)
                    else "not a regular file (FIFO, device or socket)")
            skipped.append((canonical_path(display), f"{kind}; not opened; accepted: regular audio files"))
        else:
            regular.append(display)
    # folder names, order and recorded paths come from one canonical form of each path,
    # so naming a file by an absolute or a relative path gives the same outputs
    found = [canonical_path(d) for d in regular]
    items, seen_real, used = [], set(), set()
    for display in sorted(set(found)):
        real = os.path.realpath(display)
        if real in seen_real:
            continue
        seen_real.add(real)
        name = _slug(display)
        if name.casefold() in used:
            name = f"{name}~{hashlib.sha1(display.encode('utf-8', 'surrogateescape')).hexdigest()[:8]}"
        used.add(name.casefold())
        items.append(Item(Path(display).as_posix(), name))
    if not items:
        from .audio import AUDIO_SUFFIXES

        if skipped:
            raise ParameterError(f"INPUT: {skipped[0][0]!r}: {skipped[0][1]}")
        raise ParameterError("INPUT: no audio file found; accepted suffixes: " + ", ".join(AUDIO_SUFFIXES))
    return Inputs(items, sorted({(canonical_path(p), r) for p, r in skipped}))


# -- settings as plain data ---------------------------------------------------

def _plain(v):
    if isinstance(v, (tuple, list)):
        return [_plain(x) for x in v]
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if hasattr(v, "__dataclass_fields__"):
        return _plain(asdict(v))
    return v


def settings_to_plain(settings) -> dict:
    """The Settings as JSON-ready plain data (what travels to the workers): every field."""
    from dataclasses import fields

    return {f.name: _plain(getattr(settings, f.name)) for f in fields(settings)}


def settings_from_plain(data: dict):
    """Rebuild Settings from :func:`settings_to_plain` output."""
    from dataclasses import fields

    from .chain import Chain
    from .metrics import Meter
    from .settings import Settings

    kw = dict(data)
    kw["chain"] = Chain(**data["chain"])
    kw["meter"] = Meter(**data["meter"])
    kw["grid_values"] = {k: tuple(v) if isinstance(v, list) else v for k, v in data["grid_values"].items()}
    kw["targets"] = dict(data["targets"])
    kw["input_level"] = tuple(data["input_level"]) if data["input_level"] is not None else None
    if data.get("listening"):
        from .perceptual.scoring import Listening

        ls = data["listening"]
        ag = ls.get("audiogram_hl")
        kw["listening"] = Listening(ls["program"], ls.get("playback_spl_db"),
                                    {float(k): float(v) for k, v in ag.items()} if ag else None)
    if "default_targets" in data:
        kw["default_targets"] = tuple(data["default_targets"])
    known = {f.name for f in fields(Settings)}
    return Settings(**{k: v for k, v in kw.items() if k in known})


def options_hash(plain: dict) -> str:
    """SHA-256 of the options (canonical JSON) and the audiobw version: the cache key's second half."""
    from . import __version__

    text = json.dumps({"version": __version__, "settings": plain}, sort_keys=True, allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def parse_coverage(value) -> float:
    """``95%`` or a fraction ``0.95`` -> 0.95 (0 < coverage <= 1)."""
    text = str(value).strip()
    try:
        x = float(text[:-1]) / 100.0 if text.endswith("%") else float(text)
    except ValueError:
        x = math.nan
    if not (0.0 < x <= 1.0) or (not text.endswith("%") and x > 1.0):
        raise ParameterError(f"--coverage: {value!r} is not accepted; accepted: a percentage such as 95% "
                             "or a fraction such as 0.95 (above 0, at most 100 %)")
    return x


# -- the task (runs on a worker) ----------------------------------------------

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


def exit_with_parent(parent_pid: int | None) -> None:
    """Make this worker die with its parent, so a killed batch leaves no process holding the caller's pipes.

    Linux: ``prctl(PR_SET_PDEATHSIG, SIGKILL)`` through ctypes (prctl(2)); then the parent is checked
    once, since it may have died before the call.  Elsewhere: a daemon thread watches the parent's pid.
    """
    import signal

    if parent_pid is None:
        return
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            PR_SET_PDEATHSIG = 1  # linux/prctl.h
            if libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0:
                if os.getppid() != parent_pid:
                    os._exit(1)
                return
        except (OSError, AttributeError):
            pass

    def watch():
        while True:
            if os.getppid() != parent_pid:
                os._exit(1)
            time.sleep(0.5)

    threading.Thread(target=watch, name="audiobw-parent-watch", daemon=True).start()


def worker_init(parent_pid: int | None = None) -> None:
    """Process-pool initializer: one BLAS thread, Ctrl-C handled by the parent only, exit with the parent."""
    import signal

    exit_with_parent(parent_pid)

    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = "1"
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _cache_file(cache_dir, sha256: str, opt_hash: str) -> Path:
    return Path(cache_dir) / f"{sha256}-{opt_hash[:16]}.json"


def read_cache(cache_dir, sha256: str, opt_hash: str):
    """A cached per-file result, or None when absent or not ours."""
    from . import __version__

    path = _cache_file(cache_dir, sha256, opt_hash)

    def no_constant(name):
        raise ValueError(name)

    try:
        entry = json.loads(path.read_text(encoding="utf-8"), parse_constant=no_constant)
    except (OSError, ValueError, RecursionError):
        return None
    if not isinstance(entry, dict):
        return None
    if entry.get("format") != CACHE_FORMAT or entry.get("sha256") != sha256 or entry.get("options") != opt_hash:
        return None
    if entry.get("tool_version") != __version__ or entry.get("checksum") != entry_checksum(entry):
        return None  # written by another version, or edited by hand: recomputed
    return entry if cache_entry_valid(entry) else None


def entry_checksum(entry: dict) -> str:
    """SHA-256 over a cache entry's content (canonical JSON, without the checksum itself).

    It binds the entry to its inputs (file SHA-256, options hash, tool version, all inside
    the content) and shows any edit; it is a consistency check, not a signature.
    """
    body = {k: v for k, v in entry.items() if k != "checksum"}
    text = json.dumps(body, sort_keys=True, allow_nan=False, ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _num_or_none(v) -> bool:
    return v is None or (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v))


def cache_entry_valid(entry: dict) -> bool:
    """The shape :func:`summarise` relies on: cases with unique integer ids, their identity,
    finite figures, passes/fails/margins; a choice that names one of them."""
    cases = entry.get("cases")
    if not isinstance(cases, list) or not cases or not isinstance(entry.get("input"), dict):
        return False
    ids = []
    for c in cases:
        if not isinstance(c, dict):
            return False
        ident = c.get("id")
        if isinstance(ident, bool) or not isinstance(ident, int) or ident in ids:
            return False
        ids.append(ident)
        if any(k not in c for k in IDENTITY_KEYS) or not isinstance(c.get("order"), int):
            return False
        if not all(_num_or_none(c.get(k)) for k in MEDIAN_KEYS + tuple(k for k in DATA_KEYS if k in c)):
            return False
        if not isinstance(c.get("passes"), bool) or not isinstance(c.get("fails"), list):
            return False
        if not all(isinstance(f, str) for f in c["fails"]) or c["passes"] != (not c["fails"]):
            return False
        margins = c.get("margins_db")
        if not isinstance(margins, dict) or not all(_num_or_none(v) for v in margins.values()):
            return False
    choice = entry.get("choice")
    if choice is not None and (not isinstance(choice, dict) or choice.get("case") not in ids):
        return False
    return isinstance(entry.get("warnings", []), list)


def _sweep_present(out_dir: Path, sha256: str) -> bool:
    try:
        doc = json.loads((out_dir / "sweep.json").read_text(encoding="utf-8"))
        return doc["input"]["sha256"] == sha256 and (out_dir / "sweep.csv").is_file()
    except (OSError, ValueError, KeyError, TypeError):
        return False


def sweep_task(task: dict) -> dict:
    """Sweep one file (or take it from the cache); returns a small plain mapping.

    ``task`` keys: ``path`` (absolute), ``out_dir``, ``cache_dir``,
    ``settings`` (:func:`settings_to_plain`), ``options`` (its hash).
    The result has ``status`` ("ok" or "failed"), ``cached``, and either the
    cache entry (``entry``) or a ``reason``.
    """
    from . import jobs
    from .audio import sha256_file, write_text_atomic

    _limit_blas()
    path, out_dir, opt = task["path"], Path(task["out_dir"]), task["options"]
    from .audio import check_unchanged, fingerprint, is_regular_file

    if not is_regular_file(path):
        return {"status": "failed", "cached": False,
                "reason": f"{path}: not a regular file; not opened; accepted: regular audio files"}
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
        settings = settings_from_plain(task["settings"])
        # the digest just taken is reused by the analysis (one hash per file);
        # a change while the file is read shows in its fingerprint (check_unchanged)
        # the analysis cache is keyed by that digest too: options changed since, the file is not decoded
        doc, _ = jobs.sweep_file(path, settings, out_dir=out_dir, sha256=sha,
                                 use_cache=task.get("use_cache", True))
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
    from . import __version__

    entry = {"format": CACHE_FORMAT, "sha256": sha, "options": opt, "tool_version": __version__,
             "input": {k: v for k, v in doc["input"].items() if k != "path"},
             "choice": doc["choice"], "cases": cases, "warnings": caught}
    entry["checksum"] = entry_checksum(entry)
    text = json.dumps(entry, sort_keys=True, allow_nan=False, ensure_ascii=False)
    try:
        write_text_atomic(_cache_file(task["cache_dir"], sha, opt), text + "\n")
    except OutputError:
        pass  # the sweep is done and its outputs written; only a rerun would redo it
    return {"status": "ok", "cached": False, "entry": json.loads(text)}


# -- running the tasks ----------------------------------------------------------

def _run_serial(tasks, on_result):
    for i, task in enumerate(tasks):
        on_result(i, sweep_task(task))


def _run_pool(tasks, workers: int, on_result):
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    pool = ProcessPoolExecutor(max_workers=max(1, min(workers, len(tasks))),
                               mp_context=multiprocessing.get_context("spawn"), initializer=worker_init,
                               initargs=(os.getpid(),))
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
        raise BatchInterrupted(f"--workers: a worker process died ({exc}); finished files are kept in the "
                               "cache: run the same command again to resume") from None
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
        raise BatchInterrupted(f"--cluster: {address!r}: no dask scheduler answered within {timeout_s:g} s "
                               "(is it a scheduler's address?); accepted: e.g. tcp://host:8786; "
                               "--cluster-timeout sets the wait")
    if "error" in box:
        raise box["error"]
    return box["client"]


def _run_cluster(tasks, address, on_result, opt_hash: str, *, timeout_s: float = 10.0):
    try:
        from distributed import Client, as_completed
        from distributed.client import FutureCancelledError  # noqa: F401
    except ImportError:
        raise ParameterError(f"--cluster: {address!r} needs the optional package 'distributed'; "
                             "install it with: pip install 'audiobw[cluster]'") from None
    from distributed import KilledWorker

    try:
        client = _connect(Client, address, timeout_s)
    except ValueError as exc:
        raise ParameterError(f"--cluster: {address!r} is not a scheduler address ({exc}); "
                             "accepted: e.g. tcp://host:8786 or tls://host:8786") from None
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
                result = {"status": "failed", "cached": False,
                          "reason": f"{tasks[i]['path']}: its task killed the cluster's workers ({exc})"}
            except Exception as exc:
                raise BatchInterrupted(f"--cluster: {address}: lost ({type(exc).__name__}: {exc}); finished "
                                       "files are kept in the cache: run the same command again to resume") from None
            on_result(i, result)
    finally:
        try:
            for fut in futures:
                fut.cancel()
        except Exception:  # the cluster may already be gone
            pass
        client.close()


# -- the corpus summary ---------------------------------------------------------

def _round(x):
    from .sweep import _round as r

    return r(x)


def _median(values):
    import statistics

    vals = [v for v in values if v is not None]
    return _round(statistics.median(vals)) if vals else None


def _percentiles(values):
    import numpy as np

    vals = [v for v in values if v is not None]
    if not vals:
        return None
    arr = np.asarray(sorted(vals), dtype=float)
    out = {"min": _round(float(arr[0]))}
    for p in PERCENTILES:
        out[f"p{p}"] = _round(float(np.percentile(arr, p, method="linear")))  # numpy.percentile [3]
    out["max"] = _round(float(arr[-1]))
    return out


def _worst(margins: dict):
    """(target, margin) with the least margin; None margins (not evaluable) first."""
    from .metrics import TARGET_KEYS

    if not margins:
        return None, None
    key = min(margins, key=lambda k: (-math.inf if margins[k] is None else margins[k], TARGET_KEYS.index(k)))
    return key, margins[key]


def summarise(files: list, failed: list, skipped: list, *, settings, coverage: float, opt_hash: str) -> dict:
    """Build the corpus.json mapping from per-file entries.

    Parameters
    ----------
    files : list of (Item, entry)
        Swept files in sorted order with their cache entries.
    failed : list of (path, reason)
    skipped : list of (path, reason)
    settings : Settings
    coverage : float, 0 < coverage <= 1
    opt_hash : str
    """
    from . import __version__
    from .metrics import TARGET_KEYS
    from .sweep import choose

    # a file that could not be swept (unreadable, or it cannot take the grid) counts as one on which
    # no case passes: the shares are over every input, not only the swept ones
    n = len(files) + len(failed)
    need = math.ceil(coverage * n - 1e-9)
    families = list(settings.grid_values.get("family", ("butterworth",)))
    table: dict[tuple, dict] = {}
    for fi, (_, entry) in enumerate(files):
        for case in entry["cases"]:
            ident = tuple(case[k] for k in IDENTITY_KEYS)
            table.setdefault(ident, {"poles": case["poles"], "rows": {}})["rows"][fi] = case

    def order_key(ident):
        _, fam, order, lo, hi = ident
        return (families.index(fam) if fam in families else len(families), fam, order,
                -1.0 if lo is None else lo, math.inf if hi is None else hi)

    targets = [k for k in TARGET_KEYS if settings.targets.get(k) is not None]
    cases = []
    for cid, ident in enumerate(sorted(table, key=order_key), start=1):
        rows = table[ident]["rows"]
        passing = sum(1 for r in rows.values() if r["passes"])
        case = {"id": cid, **dict(zip(IDENTITY_KEYS, ident)), "poles": table[ident]["poles"]}
        for key in MEDIAN_KEYS:
            case[key] = _median(r.get(key) for r in rows.values())
        for key in DATA_KEYS:
            if any(key in r for r in rows.values()):
                case[key] = _median(r.get(key) for r in rows.values())
        notes = [r.get("thdn_note") for r in rows.values() if r.get("thdn_note")]
        case["thdn_note"] = notes[0] if notes else None
        share_t, margin_q = {}, {}
        for t in targets:
            share_t[t] = _round(sum(1 for r in rows.values() if t not in r["fails"]) / n) if n else 0.0
            # margin reached by at least `coverage` of the files (missing case or unevaluable: -inf)
            ms = sorted(((-math.inf if rows.get(f) is None or rows[f]["margins_db"].get(t) is None
                          else rows[f]["margins_db"][t]) for f in range(n)), reverse=True)
            q = ms[need - 1] if n and need >= 1 else None
            margin_q[t] = _round(q) if q is not None and math.isfinite(q) else None
        case["passes"] = n > 0 and passing >= need
        case["fails"] = [] if case["passes"] else [
            t for t in targets if sum(1 for r in rows.values() if t not in r["fails"]) < need]
        case["margins_db"] = margin_q
        case["pass_share"] = _round(passing / n) if n else 0.0
        case["files_evaluated"] = len(rows)
        case["target_pass_share"] = share_t
        cases.append(case)

    choice, best, failing = None, None, []
    if cases:
        picked, _ = choose(cases, settings.targets, rank=settings.grid_values.get("rank", "enbw"),
                           tie=settings.grid_values.get("tie", 0.01))
        if picked is not None:
            chosen = cases[picked["case"] - 1]
            choice = {"case": chosen["id"], "pass_share": chosen["pass_share"]}
            ident = tuple(chosen[k] for k in IDENTITY_KEYS)
            rows = table[ident]["rows"]
            for fi, (item, entry) in enumerate(files):
                row = rows.get(fi)
                if row is not None and row["passes"]:
                    continue
                if row is None:
                    failing.append({"path": item.path, "sweep": f"files/{item.name}/sweep.json", "binding": None,
                                    "margin_db": None, "fails": [],
                                    "note": f"case not in this file's grid ({entry['input']['sample_rate_hz']} Hz)"})
                    continue
                key, margin = _worst(row["margins_db"])
                failing.append({"path": item.path, "sweep": f"files/{item.name}/sweep.json", "binding": key,
                                "margin_db": _round(margin), "fails": list(row["fails"]), "note": None})
            for path, reason in failed:
                failing.append({"path": path, "sweep": None, "binding": None, "margin_db": None, "fails": [],
                                "note": f"could not be swept ({reason})"})
            failing.sort(key=lambda f: (f["margin_db"] is not None,
                                        f["margin_db"] if f["margin_db"] is not None else 0.0, f["path"]))
        else:
            top = max(cases, key=lambda c: (c["pass_share"], -c["bandwidth_hz"], -c["enbw_hz"], -c["order"],
                                            -c["id"]))
            best = {"case": top["id"], "pass_share": top["pass_share"]}

    per_file, lows, highs, without = [], [], [], 0
    rates: dict[str, int] = {}
    for item, entry in files:
        inp = entry["input"]
        rates[str(inp["sample_rate_hz"])] = rates.get(str(inp["sample_rate_hz"]), 0) + 1
        own = None
        if entry["choice"] is not None:
            c = next(c for c in entry["cases"] if c["id"] == entry["choice"]["case"])
            own = {"response": c["response"], "family": c["family"], "order": c["order"],
                   "low_hz": c["low_hz"], "high_hz": c["high_hz"], "binding": entry["choice"].get("binding")}
            lows.append(c["low_hz"])
            highs.append(c["high_hz"])
        else:
            without += 1
        per_file.append({"path": item.path, "sweep": f"files/{item.name}/sweep.json", "sha256": entry["sha256"],
                         "sample_rate_hz": inp["sample_rate_hz"], "channels": inp["channels"],
                         "duration_s": inp["duration_s"], "choice": own, "warnings": list(entry["warnings"])})
    chain = settings.chain.to_json()
    plain = settings_to_plain(settings)
    return {
        "tool": "audiobw",
        "version": __version__,
        "kind": "corpus",
        "coverage": _round(coverage),
        "options_sha256": opt_hash,
        "settings": {"chain": chain, "grid": plain["grid_values"], "meter": plain["meter"],
                     **{k: v for k, v in plain.items() if k not in ("chain", "grid_values", "meter", "targets")}},
        "targets": {k: v for k, v in settings.targets.items() if v is not None},
        "counts": {"inputs": len(files) + len(failed), "swept": len(files), "failed": len(failed),
                   "skipped": len(skipped),
                   "sample_rates_hz": dict(sorted(rates.items(), key=lambda kv: int(kv[0])))},
        "cases": cases,
        "choice": choice,
        "best": best,
        "failing": failing,
        "passbands": {"files_with_choice": len(files) - without, "files_without_choice": without,
                      "low_hz": _percentiles(lows), "high_hz": _percentiles(highs)},
        "files": per_file,
        "failed": [{"path": p, "reason": r} for p, r in failed],
        "skipped": [{"path": p, "reason": r} for p, r in skipped],
    }


def csv_text(doc: dict) -> str:
    """corpus.csv: one row per case (CSV_KEYS); failing targets joined with ';'."""
    from .report.sweepio import csv_text as cases_csv

    return cases_csv(doc, CSV_KEYS)


# -- the whole run --------------------------------------------------------------

@dataclass
class BatchResult:
    doc: dict
    paths: dict
    computed: int
    cached: int
    elapsed_s: float


def run_batch(args, settings, out_dir, *, coverage: float = 0.95, workers: int | None = None,
              cluster: str | None = None, follow_links: bool = False, progress=None, **kw) -> BatchResult:
    """Run a batch into ``out_dir`` while holding its output lock (see :func:`_run_batch`)."""
    from .audio import output_lock

    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise OutputError(f"--out: {str(out)!r} exists and is not a folder")
    with output_lock(out):
        return _run_batch(args, settings, out_dir, coverage=coverage, workers=workers, cluster=cluster,
                          follow_links=follow_links, progress=progress, **kw)


def _run_batch(args, settings, out_dir, *, coverage: float = 0.95, workers: int | None = None,
              cluster: str | None = None, follow_links: bool = False, progress=None,
              cluster_timeout_s: float = 10.0, use_cache: bool = True) -> BatchResult:
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
    from .audio import write_text_atomic
    from .report.sweepio import dumps

    if not settings.targets:
        raise ParameterError(
            "targets: none given; accepted: at least one of --min-snr, --min-snr-a, --max-thdn, "
            "--max-loss, --max-lsd, --min-ser")
    if workers is not None and workers < 0:
        raise ParameterError(f"--workers: {workers!r}; accepted: 0 (sweep in this process) or more")
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise OutputError(f"--out: {str(out)!r} exists and is not a folder")
    inputs = collect_inputs(args, follow_links=follow_links)
    plain = settings_to_plain(settings)
    opt = options_hash(plain)
    out_abs = Path(os.path.abspath(out))
    tasks = [{"path": os.path.abspath(it.path), "out_dir": str(out_abs / "files" / it.name),
              "cache_dir": str(out_abs / "cache"), "settings": plain, "options": opt, "use_cache": use_cache}
             for it in inputs.items]
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
    paths = {"json": write_text_atomic(out / "corpus.json", dumps(doc)),
             "csv": write_text_atomic(out / "corpus.csv", csv_text(doc))}
    return BatchResult(doc, paths, computed=stats["done"] - stats["cached"] - stats["failed"],
                       cached=stats["cached"], elapsed_s=time.monotonic() - start)


def summary_lines(doc: dict) -> list[str]:
    """A short printed summary of corpus.json."""
    c = doc["counts"]
    lines = [f"Corpus: {c['inputs']} files, {c['swept']} swept, {c['failed']} failed"
             + (f", {c['skipped']} skipped" if c["skipped"] else "")
             + "; sample rates: " + ", ".join(f"{int(r):,} Hz × {k}" for r, k in c["sample_rates_hz"].items())]
    cov = f"{doc['coverage'] * 100:g} %"
    if doc["choice"] is not None:
        case = doc["cases"][doc["choice"]["case"] - 1]
        lines.append(f"Narrowest case passing on at least {cov} of the files: #{case['id']} {_label(case)}, "
                     f"passes on {case['pass_share'] * 100:.1f} %" + _over(c) + ".")
        if doc["failing"]:
            worst = doc["failing"][:5]
            lines.append(f"It fails on {len(doc['failing'])} file(s); worst first:")
            for f in worst:
                label = _target_words(f["binding"]) if f["binding"] else None
                what = (f"{label}, margin {f['margin_db']:+.2f} dB" if f["margin_db"] is not None
                        else (f"{label}: not defined for this file" if label else f["note"]))
                lines.append(f"  {shown(f['path'])}: {what}")
    else:
        msg = f"No case passes on {cov} of the files."
        if doc["best"] is not None:
            case = doc["cases"][doc["best"]["case"] - 1]
            msg += f" Best: #{case['id']} {_label(case)} on {case['pass_share'] * 100:.1f} %" + _over(c) + "."
        lines.append(msg)
    pb = doc["passbands"]
    for key, label in (("low_hz", "lower"), ("high_hz", "upper")):
        p = pb[key]
        if p:
            lines.append(f"Per-file chosen {label} edge: p5 {p['p5']:.6g} Hz, median {p['p50']:.6g} Hz, "
                         f"p95 {p['p95']:.6g} Hz (min {p['min']:.6g}, max {p['max']:.6g}).")
    if pb["files_without_choice"]:
        lines.append(f"{pb['files_without_choice']} file(s) have no passing case of their own.")
    for f in doc["failed"][:5]:
        # a refusal of the grid names the option, not the file: name the file first
        reason = f["reason"] if f["reason"].startswith(f["path"]) else f"{f['path']}: {f['reason']}"
        lines.append(f"Failed: {shown(reason)}")
    if len(doc["failed"]) > 5:
        lines.append(f"... and {len(doc['failed']) - 5} more failed (see corpus.json).")
    return lines


def _over(counts: dict) -> str:
    """' of all N files (M could not be swept and count as not passing)' when some failed."""
    if not counts["failed"]:
        return ""
    return (f" of all {counts['swept'] + counts['failed']} files ({counts['failed']} could not be swept and "
            "count as not passing)")


def _target_words(key: str) -> str:
    """A target as the sweep prints it: 'A-weighted SNR ≥ …' rather than the JSON key."""
    from .report.text import TARGET_LABEL

    label, _metric, _unit, sense = TARGET_LABEL.get(key, (key, None, "", ""))
    return label


def _label(case: dict) -> str:
    lo, hi = case["design_low_hz"], case["design_high_hz"]
    edges = f"{lo:g}–{hi:g} Hz" if lo and hi else (f"{hi:g} Hz" if hi else f"{lo:g} Hz")
    return f"{case['family']} order {case['order']} {case['response']} {edges}"
