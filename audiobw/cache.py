"""The analysis cache: the single streaming pass, kept per file in the user cache folder.

Re-sweeping one recording with other targets, chains or grids is the common
loop, and the pass over the audio (:func:`audiobw.spectrum.analyse`) does not
depend on any of them.  Its result is kept as one numpy ``.npz`` file (no
pickled objects: read with ``allow_pickle=False``) keyed by

* the file's SHA-256 (the same digest batch takes once per file and the
  sweep records in sweep.json ``input.sha256``), and
* the analysis parameters: cache format, the versions of audiobw, numpy and
  libsndfile, PSD resolution, short-frame length, frame cap and
  decode block size.

Folder: ``$AUDIOBW_CACHE_DIR`` if set, else ``$XDG_CACHE_HOME/audiobw/analysis``
(XDG Base Directory Specification, when that variable is an absolute path),
else ``~/.cache/audiobw/analysis``.  Size bound: ``$AUDIOBW_CACHE_MAX_MB``
(default 500 MB); beyond it the least recently used entries (oldest
modification time: a hit touches its entry) are removed.  ``--no-cache`` (sweep,
batch) or ``AUDIOBW_NO_CACHE=1`` neither reads nor writes it.

An entry is never trusted: it is used only when it loads without pickle,
names this format, echoes the key it is stored under, holds arrays of the
shapes and dtypes the file's sample rate and channel count imply with finite,
non-negative powers, and its checksum matches its content.  Anything else
(truncated, random bytes, another file's entry renamed, another version) is
ignored and rebuilt.  The primary arrays alone are stored; frequencies, bin
widths, band edges and the channel mean are recomputed as the pass computes
them, so a hit gives byte-identical figures.  A cache folder that cannot be
written costs one warning line on stderr, never the sweep.

A small index record per file path (``path-<hash of the real path>.json``)
keeps the digest with the file's device, inode, size, modification and change
time; when all five are unchanged the digest is taken from it instead of
hashing the file again (the rule ``make`` and ``git`` use: a writer cannot set
the change time back).  A record that does not match exactly is ignored.

References
----------
.. [1] XDG Base Directory Specification 0.8, freedesktop.org (``XDG_CACHE_HOME``).
.. [2] numpy documentation, ``numpy.load`` (``allow_pickle=False``), ``numpy.savez``.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
from pathlib import Path
from typing import Any

import numpy as np

FORMAT = "audiobw-analysis-cache/2"  # 2: the fine low-frequency PSD
ENV_DIR = "AUDIOBW_CACHE_DIR"
ENV_MAX_MB = "AUDIOBW_CACHE_MAX_MB"
#: Default bound on the folder's size, bytes (500 MB).
DEFAULT_MAX_BYTES = 500 * 10**6
SUFFIX = ".npz"
#: An entry larger than this is refused unread (a 192 kHz 8-channel entry is about 2.3 MB).
MAX_ENTRY_BYTES = 64 * 2**20
#: Index records (path → digest), one small JSON file per file path, named by a hash of the path.
INDEX_PREFIX, INDEX_SUFFIX = "path-", ".json"

#: Counters for this process (tests and ``--debug`` read them): lookups that hit, missed,
#: found an entry and refused it, entries written, entries evicted, writes that failed.
STATS = {"hits": 0, "misses": 0, "rejected": 0, "writes": 0, "evicted": 0, "write_failures": 0, "index_hits": 0}

_ARRAYS = ("psd_channels", "peak", "mean_square", "dc", "band_frames", "fine_psd")
_INTS = (
    "sample_rate_hz",
    "channels",
    "frames",
    "nperseg",
    "frame_len",
    "frame_stride",
    "full_scale_samples",
    "welch_segments",
    "declared_frames",
    "fine_nperseg",
    "fine_welch_segments",
)
_STRS = ("format", "key", "sha256", "audio_format", "subtype")
_warned = False


def cache_dir() -> Path:
    """The analysis cache folder (see the module docstring); not created here."""
    env = os.environ.get(ENV_DIR)
    if env:
        return Path(env)
    xdg = os.environ.get("XDG_CACHE_HOME")
    base = Path(xdg) if xdg and os.path.isabs(xdg) else Path.home() / ".cache"
    return base / "audiobw" / "analysis"


def enabled() -> bool:
    """False when ``$AUDIOBW_NO_CACHE`` is ``1`` (the environment's ``--no-cache``)."""
    return os.environ.get("AUDIOBW_NO_CACHE", "") != "1"


def max_bytes() -> int:
    """The size bound, bytes: ``$AUDIOBW_CACHE_MAX_MB`` (decimal megabytes, ≥ 0) or 500 MB."""
    env = os.environ.get(ENV_MAX_MB)
    if env:
        try:
            mb = float(env)
            if mb >= 0 and mb == mb and mb != float("inf"):
                return int(mb * 10**6)
        except ValueError:
            pass
        _warn_once(f"{ENV_MAX_MB}={env!r} is not a size in MB; accepted: a number ≥ 0; using 500")
    return DEFAULT_MAX_BYTES


def params(blocksize: int) -> dict:
    """Everything besides the file's bytes that the analysis depends on."""
    import soundfile

    from . import __version__, decimate, spectrum

    # the libraries whose arithmetic or decoding the figures come from: an upgrade rebuilds
    return {
        "format": FORMAT,
        "audiobw": __version__,
        "numpy": np.__version__,
        "libsndfile": soundfile.__libsndfile_version__,
        "psd_resolution_hz": spectrum.PSD_RESOLUTION_HZ,
        "frame_seconds": spectrum.FRAME_SECONDS,
        "max_frames": spectrum.MAX_FRAMES,
        "fine_resolution_hz": spectrum.FINE_RESOLUTION_HZ,
        "fine_top_hz": spectrum.FINE_TOP_HZ,
        "fine_min_lengths": spectrum.FINE_MIN_LENGTHS,
        "fine_stopband_db": decimate.STOPBAND_DB,
        "fine_rate_over_top": decimate.RATE_OVER_TOP,
        "blocksize": int(blocksize),
    }


def entry_key(sha256: str, blocksize: int) -> str:
    """SHA-256 of the file's digest and the analysis parameters (canonical JSON)."""
    text = json.dumps({"sha256": sha256, **params(blocksize)}, sort_keys=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def entry_path(sha256: str, blocksize: int, folder=None) -> Path:
    return Path(folder or cache_dir()) / f"{sha256}-{entry_key(sha256, blocksize)[:16]}{SUFFIX}"


def _checksum(key: str, data: dict) -> str:
    h = hashlib.sha256(key.encode("ascii"))
    for name in sorted(data):
        a = np.ascontiguousarray(data[name])
        h.update(f"{name}|{a.dtype.str}|{a.shape}|".encode())
        h.update(a.tobytes())
    return h.hexdigest()


def _warn_once(message: str) -> None:
    """One line on stderr per process (not an AudiobwWarning: batch records those per file)."""
    global _warned
    if not _warned:
        _warned = True
        print(f"audiobw: analysis cache: {message}", file=sys.stderr)


def store(analysis, *, blocksize: int, folder=None) -> Path | None:
    """Write ``analysis`` as a cache entry (atomically), then keep the folder under its bound.

    Returns the entry's path, or None when the folder cannot be written (one warning).
    """
    from .audio import atomic_path
    from .errors import OutputError

    key = entry_key(analysis.sha256, blocksize)
    data: dict[str, Any] = {
        "psd_channels": np.asarray(analysis.psd_channels, dtype=np.float64),
        "peak": np.asarray(analysis.peak, dtype=np.float64),
        "mean_square": np.asarray(analysis.mean_square, dtype=np.float64),
        "dc": np.asarray(analysis.dc, dtype=np.float64),
        "band_frames": np.asarray(analysis.band_frames, dtype=np.float64),
        "fine_psd": np.asarray(analysis.fine_psd, dtype=np.float64),
        "fine_nperseg": np.int64(analysis.fine_nperseg),
        "fine_welch_segments": np.int64(analysis.meta.get("fine_welch_segments", 0)),
        "sample_rate_hz": np.int64(analysis.sample_rate_hz),
        "channels": np.int64(analysis.channels),
        "frames": np.int64(analysis.frames),
        "nperseg": np.int64(analysis.nperseg),
        "frame_len": np.int64(analysis.frame_len),
        "frame_stride": np.int64(analysis.frame_stride),
        "full_scale_samples": np.int64(analysis.full_scale_samples),
        "welch_segments": np.int64(analysis.meta.get("welch_segments", 0)),
        "declared_frames": np.int64(analysis.meta.get("declared_frames") or 0),
        "format": np.str_(FORMAT),
        "key": np.str_(key),
        "sha256": np.str_(analysis.sha256),
        "audio_format": np.str_(analysis.meta.get("format", "")),
        "subtype": np.str_(analysis.meta.get("subtype", "")),
    }
    data["checksum"] = np.str_(_checksum(key, data))
    target = entry_path(analysis.sha256, blocksize, folder)
    try:
        with atomic_path(target) as tmp:
            with open(tmp, "wb") as fh:
                np.savez(fh, **data)
    except OutputError as exc:
        STATS["write_failures"] += 1
        _warn_once(f"not written ({exc}); the sweep goes on without it")
        return None
    STATS["writes"] += 1
    evict(folder, keep=target)
    return target


def _index_path(path, folder=None) -> Path:
    real = os.path.realpath(os.fspath(path))
    name = hashlib.sha256(os.fsencode(real)).hexdigest()[:32]
    return Path(folder or cache_dir()) / f"{INDEX_PREFIX}{name}{INDEX_SUFFIX}"


def known_digest(path, fingerprint: tuple, folder=None) -> str | None:
    """The SHA-256 recorded for ``path`` when the file is still the one hashed then, else None.

    "Still the one" means the same device, inode, size, modification and change time
    (:func:`audiobw.audio.fingerprint`); a writer cannot set the change time back, so a
    changed file misses and is hashed again (the rule ``make`` and ``git`` use).
    """
    target = _index_path(path, folder)
    try:
        rec = json.loads(target.read_text(encoding="utf-8"))
    except (OSError, ValueError, RecursionError):
        return None
    if not isinstance(rec, dict) or rec.get("format") != FORMAT:
        return None
    if rec.get("path") != os.path.realpath(os.fspath(path)) or rec.get("fingerprint") != list(fingerprint):
        return None
    sha = rec.get("sha256")
    if not isinstance(sha, str) or len(sha) != 64 or sha.strip("0123456789abcdef"):
        return None
    STATS["index_hits"] += 1
    try:
        os.utime(target)
    except OSError:
        pass
    return sha


def remember(path, fingerprint: tuple, sha256: str, folder=None) -> None:
    """Record ``path``'s digest with its fingerprint (see :func:`known_digest`); failures are silent
    (the entry's own write has warned)."""
    from .audio import write_text_atomic
    from .errors import OutputError

    rec = {
        "format": FORMAT,
        "path": os.path.realpath(os.fspath(path)),
        "fingerprint": list(fingerprint),
        "sha256": sha256,
    }
    try:
        write_text_atomic(_index_path(path, folder), json.dumps(rec) + "\n")
    except OutputError:
        pass


def load(sha256: str, info, *, blocksize: int, folder=None):
    """The cached :class:`~audiobw.spectrum.Analysis` of the file ``info`` describes, or None.

    ``info`` is the file's :class:`~audiobw.audio.AudioInfo` (its path, rate and
    channel count, checked against the entry).  Anything not exactly as
    :func:`store` writes it is refused (counted in ``STATS["rejected"]``).
    """
    target = entry_path(sha256, blocksize, folder)
    try:
        with open(target, "rb") as fh:
            # a real entry is well under 1 MB (48 kHz stereo: 250 kB); anything far larger is not ours
            raw = fh.read(MAX_ENTRY_BYTES + 1)
    except OSError:
        STATS["misses"] += 1
        return None
    try:
        a = _validated(raw, sha256, info, blocksize) if len(raw) <= MAX_ENTRY_BYTES else None
    except Exception:  # noqa: BLE001 - any failure to read or validate means: rebuild
        a = None
    if a is None:
        STATS["rejected"] += 1
        STATS["misses"] += 1
        _debug(f"refused {target} (not a valid entry for this file); rebuilt")
        return None
    try:
        os.utime(target)  # least recently used = oldest modification time
    except OSError:
        pass
    STATS["hits"] += 1
    _debug(f"hit {target}")
    return a


def _debug(message: str) -> None:
    if os.environ.get("AUDIOBW_DEBUG") == "1":
        print(f"audiobw: analysis cache: {message}", file=sys.stderr)


def _validated(raw: bytes, sha256: str, info, blocksize: int):
    import io

    from .spectrum import MAX_FRAMES, Analysis, fine_length, frame_lengths, trapezoid_weights
    from .weighting import critical_band_edges

    import zipfile

    with np.load(io.BytesIO(raw), allow_pickle=False) as z:
        members = z.zip.infolist()
        # written by np.savez: stored, not deflated; so no member can expand beyond the file read
        if any(m.compress_type != zipfile.ZIP_STORED or m.file_size > len(raw) for m in members):
            return None
        names = set(z.files)
        if names != set(_ARRAYS) | set(_INTS) | set(_STRS) | {"checksum"}:
            return None
        data = {n: z[n] for n in names}
    for n in _STRS + ("checksum",):
        if data[n].dtype.kind != "U" or data[n].shape != ():
            return None
    key = entry_key(sha256, blocksize)
    if str(data["format"]) != FORMAT or str(data["key"]) != key or str(data["sha256"]) != sha256:
        return None
    checksum = str(data.pop("checksum"))
    if checksum != _checksum(key, data):
        return None
    ints = {}
    for n in _INTS:
        if data[n].dtype != np.int64 or data[n].shape != ():
            return None
        ints[n] = int(data[n])
    fs, nch = ints["sample_rate_hz"], ints["channels"]
    if fs != info.sample_rate_hz or nch != info.channels or ints["frames"] <= 0:
        return None
    nper, nshort = frame_lengths(fs, info.frames if info.frames > 0 else None)
    if ints["nperseg"] != nper or ints["frame_len"] != nshort or ints["welch_segments"] <= 0:
        return None
    stride = ints["frame_stride"]
    if stride < 1 or stride & (stride - 1) or ints["full_scale_samples"] < 0 or ints["declared_frames"] < 0:
        return None
    edges = critical_band_edges(fs / 2.0)
    shapes = {"psd_channels": (nch, nper // 2 + 1), "peak": (nch,), "mean_square": (nch,), "dc": (nch,)}
    for n in _ARRAYS:
        arr = data[n]
        if arr.dtype != np.float64 or not np.all(np.isfinite(arr)):
            return None
        if n in shapes and arr.shape != shapes[n]:
            return None
        if n != "dc" and np.any(arr < 0):
            return None
    nfine, fine = ints["fine_nperseg"], data["fine_psd"]
    if nfine < 0 or fine.ndim != 1 or (nfine == 0) != (fine.size == 0) or fine.size > nfine // 2 + 1:
        return None
    if nfine and nfine != fine_length(fs, nper, info.frames if info.frames > 0 else None):
        return None
    bf = data["band_frames"]
    if bf.ndim != 2 or bf.shape[1] != len(edges) - 1 or not 1 <= bf.shape[0] <= MAX_FRAMES:
        return None
    if not np.any(data["peak"] > 0):
        return None
    psd_ch = data["psd_channels"]
    freqs = np.arange(nper // 2 + 1) * fs / nper
    meta = {
        "format": str(data["audio_format"]),
        "subtype": str(data["subtype"]),
        "welch_segments": ints["welch_segments"],
        "fine_welch_segments": ints["fine_welch_segments"],
    }
    if ints["declared_frames"]:
        meta["declared_frames"] = ints["declared_frames"]
    return Analysis(
        path=str(info.path),
        sha256=sha256,
        sample_rate_hz=fs,
        channels=nch,
        frames=ints["frames"],
        nperseg=nper,
        freqs_hz=freqs,
        psd_channels=psd_ch,
        psd=psd_ch.mean(axis=0),
        weights_hz=trapezoid_weights(freqs.size, fs / nper),
        peak=data["peak"],
        mean_square=data["mean_square"],
        dc=data["dc"],
        full_scale_samples=ints["full_scale_samples"],
        band_edges_hz=edges,
        band_frames=bf,
        frame_len=nshort,
        frame_stride=stride,
        meta=meta,
        fine_nperseg=nfine,
        fine_freqs_hz=np.arange(fine.size) * fs / nfine if nfine else np.zeros(0),
        fine_psd=fine,
    )


def evict(folder=None, *, keep=None, limit: int | None = None) -> int:
    """Remove least recently used entries (and index records) until they total at most ``limit`` bytes.

    ``keep`` (the entry just written) goes last.  Returns how many were removed.
    """
    folder = Path(folder or cache_dir())
    limit = max_bytes() if limit is None else limit
    entries = []
    try:
        with os.scandir(folder) as it:
            for e in it:
                if not (e.name.endswith(SUFFIX) or (e.name.startswith(INDEX_PREFIX) and e.name.endswith(INDEX_SUFFIX))):
                    continue
                try:
                    st = e.stat(follow_symlinks=False)
                except OSError:
                    continue
                entries.append((e.path == str(keep), st.st_mtime_ns, e.name, e.path, st.st_size))
    except OSError:
        return 0
    total = sum(x[4] for x in entries)
    removed = 0
    for _, _, _, p, size in sorted(entries):
        if total <= limit:
            break
        try:
            os.unlink(p)
        except FileNotFoundError:
            pass
        except OSError:
            continue
        total -= size
        removed += 1
    STATS["evicted"] += removed
    return removed
