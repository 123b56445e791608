"""Atomic outputs: every file is written beside its target and renamed over it, never over an input.

A part left by a killed run is removed by the next write of the same name; a
failed write becomes one :class:`~audiobw.errors.OutputError` line.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

import numpy as np

from ..errors import OutputError, ParameterError
from .reading import _short, sha256_file, shown


def _identity(path):
    """(resolved path, (st_dev, st_ino) or None) of ``path``; never raises."""
    try:
        real = os.path.realpath(path)
    except (OSError, ValueError):
        real = os.path.abspath(path)
    try:
        st = os.stat(real)
        return real, (st.st_dev, st.st_ino)
    except (OSError, ValueError):
        return real, None


def refuse_input_target(target, inputs=()) -> None:
    """Raise :class:`OutputError` if ``target`` is any of ``inputs``.

    Compared by resolved path and by device/inode (hard links, bind mounts), before
    anything is written.  Every writer goes through :func:`atomic_path`, which calls this.
    """
    t_real, t_id = _identity(target)
    for src in inputs:
        if src is None:
            continue
        s_real, s_id = _identity(src)
        if s_real == t_real or (t_id is not None and t_id == s_id):
            raise OutputError(
                f"{shown(target)}: is an input ({shown(src)}); refusing to overwrite an input file; "
                "accepted: an output path that is not an input"
            )


PART_SUFFIX = ".part"


def _part_prefix(name: str) -> str:
    return f".{name}."


def clean_stale_parts(folder, name: str) -> int:
    """Remove ``.<name>.*.part`` files (our temporary outputs) left by a killed run.

    A live writer holds an exclusive ``flock`` on its part; a part whose lock can be
    taken belongs to no running process and is removed.  Returns how many were removed.
    """
    import fcntl

    removed = 0
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return 0
    prefix = _part_prefix(name)
    for entry in entries:
        if not (entry.name.startswith(prefix) and entry.name.endswith(PART_SUFFIX)):
            continue
        try:
            if not entry.is_file(follow_symlinks=False):
                continue
            fd = os.open(entry.path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
        except OSError:
            continue
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            continue  # a live writer holds it
        try:
            os.unlink(entry.path)
            removed += 1
        except OSError:
            pass
        finally:
            os.close(fd)
    return removed


def is_output_failure(exc: BaseException) -> bool:
    """True for the errors a failed write raises: OSError and libsndfile's RuntimeError."""
    if isinstance(exc, OSError):
        return True
    return isinstance(exc, RuntimeError) and type(exc).__module__.split(".")[0] == "soundfile"


def output_error(target, exc: BaseException) -> OutputError:
    """The one-line :class:`OutputError` for a failed write of ``target``."""
    import errno

    if isinstance(exc, OutputError):
        return exc
    hint = ""
    if isinstance(exc, OSError):
        why = exc.strerror or str(exc)
        if exc.errno == errno.ENAMETOOLONG:
            hint = "; accepted: names up to 255 bytes"
        elif exc.errno == errno.ENOSPC:
            hint = "; free space on the device or choose another --out"
        elif exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
            hint = "; accepted: a writable folder"
    else:
        why = _short(exc)
        if "system error" in why.lower():
            why = "write failed: disk full or device error"
    return OutputError(f"{shown(target)}: cannot write ({why}){hint}")


@contextlib.contextmanager
def atomic_path(target, *, inputs=(), input_sha256=None):
    """Yield a temporary path beside ``target``; rename it over ``target`` on success.

    An interrupted or failed write leaves no partial file; a part left by a killed
    run is removed by the next write of the same name.  Refuses to write over any of
    ``inputs`` (resolved path or device/inode) or over an existing file whose SHA-256
    is ``input_sha256``.  Every OSError and libsndfile error becomes one
    :class:`OutputError`.
    """
    import fcntl

    target = Path(target)
    refuse_input_target(target, inputs)
    if input_sha256 and target.is_file():
        try:
            same = sha256_file(target) == input_sha256
        except OSError:
            same = False
        if same:
            raise OutputError(
                f"{shown(target)}: holds the input program (same SHA-256); refusing to overwrite "
                "an input file; accepted: an output path that is not an input"
            )
    fd = None
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        clean_stale_parts(target.parent, target.name)
        fd, tmp = tempfile.mkstemp(prefix=_part_prefix(target.name), suffix=PART_SUFFIX, dir=target.parent)
        fcntl.flock(fd, fcntl.LOCK_EX)  # marks the part as live for clean_stale_parts
    except OSError as exc:
        if fd is not None:
            os.close(fd)
        raise output_error(target, exc) from None
    ok = False
    try:
        yield Path(tmp)
        # mkstemp makes the file private (0600); outputs are ordinary files
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, target)
        ok = True
    except (OSError, RuntimeError) as exc:
        if not is_output_failure(exc):
            raise
        raise output_error(target, exc) from None
    finally:
        if not ok:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
        os.close(fd)


def open_wav_writer(path, sample_rate_hz: int, channels: int, *, subtype: str = "FLOAT", format: str = "WAV"):
    """A ``soundfile.SoundFile`` open for writing, without libsndfile's PEAK chunk.

    libsndfile adds a PEAK chunk (with a time stamp) to float WAV files; it is
    switched off with ``SFC_SET_ADD_PEAK_CHUNK`` before any frame is written, so
    the same samples always give the same bytes.
    """
    import soundfile as sf

    fh = sf.SoundFile(
        str(path), "w", samplerate=int(sample_rate_hz), channels=int(channels), subtype=subtype, format=format
    )
    sf._snd.sf_command(fh._file, SFC_SET_ADD_PEAK_CHUNK, sf._ffi.NULL, 0)  # SF_FALSE
    return fh


#: sndfile.h: ``SFC_SET_ADD_PEAK_CHUNK = 0x1050``
SFC_SET_ADD_PEAK_CHUNK = 0x1050


def write_text_atomic(target, text: str, *, inputs=()) -> Path:
    """Write ``text`` (UTF-8; an undecodable byte of a file name, a lone surrogate, as \\udcNN) to ``target`` atomically."""
    with atomic_path(target, inputs=inputs) as tmp:
        with open(tmp, "w", encoding="utf-8", errors="backslashreplace", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
    return Path(target)


def write_audio_atomic(target, data: np.ndarray, sample_rate_hz: int, *, subtype: str = "FLOAT", inputs=()) -> Path:
    """Write audio atomically with an explicit subtype (never the PCM_16 default).

    Integer subtypes clip above ±1: such data is refused rather than clipped.
    RF64 is used for WAV output past 4 GiB.
    """

    target = Path(target)
    data = np.asarray(data)
    if not subtype.startswith(("FLOAT", "DOUBLE")) and data.size and np.max(np.abs(data)) > 1.0:
        raise OutputError(f"{target}: samples exceed full scale for integer subtype {subtype}")
    fmt = None
    if target.suffix.lower() == ".wav" and data.nbytes > (4 << 30) - (1 << 20):
        fmt = "RF64"
    fmt = fmt or _format_for(target)
    if data.ndim == 1:
        data = data[:, None]
    with atomic_path(target, inputs=inputs) as tmp:
        with open_wav_writer(tmp, sample_rate_hz, data.shape[1], subtype=subtype, format=fmt) as fh:
            fh.write(data)
    return target


#: Output audio formats by file extension (what ``--out`` accepts for audio).
OUTPUT_FORMATS = {".wav": "WAV", ".flac": "FLAC"}


def _format_for(target: Path) -> str:
    fmt = OUTPUT_FORMATS.get(target.suffix.lower())
    if fmt is None:
        raise ParameterError(
            f"--out: {shown(target)!r}: format {target.suffix or '(no extension)'!r} is not "
            f"written; accepted: {', '.join(OUTPUT_FORMATS)}"
        )
    return fmt
