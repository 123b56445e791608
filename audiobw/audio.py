"""Audio input in blocks, validation, and atomic output.

Reading goes through soundfile (libsndfile): WAV, FLAC, OGG/Vorbis, MP3 and
the other formats libsndfile reads.  Files are read in blocks so that a long
file never sits in memory whole, and frames are counted as they are read
(libsndfile's frame count is only an estimate for some formats).

References
----------
.. [1] python-soundfile documentation: ``SoundFile``, ``SoundFile.blocks``,
   ``info``, ``available_subtypes``.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import AudioFileError, AudiobwWarning, OutputError, ParameterError

MAX_CHANNELS = 8
MIN_RATE_HZ, MAX_RATE_HZ = 8000, 384000
AUDIO_SUFFIXES = (".wav", ".flac", ".ogg", ".oga", ".mp3", ".aif", ".aiff", ".aifc", ".au", ".caf", ".w64", ".rf64")


@dataclass(frozen=True)
class AudioInfo:
    """What the file's header says (frames may be an estimate)."""

    path: Path
    sample_rate_hz: int
    channels: int
    frames: int
    format: str
    subtype: str


def open_info(path) -> AudioInfo:
    """Read and validate a file's header.

    Raises
    ------
    AudioFileError
        Missing, unreadable, not audio, or outside the accepted channel count
        (1 to 8) or sample rate (8 kHz to 384 kHz).
    """
    import soundfile as sf

    p = Path(path)
    if not p.exists():
        raise AudioFileError(f"{p}: no such file")
    if p.is_dir():
        raise AudioFileError(f"{p}: is a directory; accepted: an audio file")
    if not os.access(p, os.R_OK):
        raise AudioFileError(f"{p}: not readable (permission denied)")
    if p.stat().st_size == 0:
        raise AudioFileError(f"{p}: empty file (0 bytes)")
    try:
        info = sf.info(os.fsencode(p))
    except Exception as exc:  # libsndfile's errors carry no stable type
        raise AudioFileError(f"{p}: not a readable audio file ({_short(exc)})") from None
    if not 1 <= info.channels <= MAX_CHANNELS:
        raise AudioFileError(f"{p}: {info.channels} channels; accepted: 1 to {MAX_CHANNELS}")
    if not MIN_RATE_HZ <= info.samplerate <= MAX_RATE_HZ:
        raise AudioFileError(f"{p}: sample rate {info.samplerate} Hz; accepted: {MIN_RATE_HZ} to {MAX_RATE_HZ} Hz")
    return AudioInfo(p, int(info.samplerate), int(info.channels), int(info.frames), info.format, info.subtype)


def wav_declared_frames(path) -> int | None:
    """Frames the WAV header's 'data' chunk declares (None if not a plain RIFF/WAVE file).

    libsndfile trims a truncated WAV silently to what is on disk; comparing
    the declared size lets the caller warn about the truncation.
    """
    import struct

    try:
        with open(path, "rb") as fh:
            head = fh.read(12)
            if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
                return None
            block_align = None
            while True:
                chunk = fh.read(8)
                if len(chunk) < 8:
                    return None
                cid, size = chunk[:4], struct.unpack("<I", chunk[4:])[0]
                if cid == b"fmt ":
                    fmt = fh.read(size)
                    if len(fmt) >= 14:
                        block_align = struct.unpack("<H", fmt[12:14])[0]
                    if size % 2:
                        fh.read(1)
                elif cid == b"data":
                    if size in (0, 0xFFFFFFFF) or not block_align:  # streamed or RF64 placeholder
                        return None
                    return size // block_align
                else:
                    fh.seek(size + (size % 2), 1)
    except OSError:
        return None


def _short(exc: Exception) -> str:
    text = str(exc).strip().splitlines()
    if not text:
        return type(exc).__name__
    line = text[-1]
    if line.startswith("Error opening ") and ": " in line:  # the path is named by the caller already
        line = line.rsplit(": ", 1)[1]
    return line[:160]


#: libsndfile subtypes that store integers (or integer-coded samples): never NaN or infinite.
INTEGER_SUBTYPES = ("PCM_", "ULAW", "ALAW", "ALAC_", "DPCM_", "DWVW_")


def iter_blocks(path, *, blocksize: int = 1 << 17):
    """Yield float64 blocks of shape (frames, channels) from ``path``.

    Raises
    ------
    AudioFileError
        On a read error part-way (truncated or corrupt data) or on NaN or
        infinite samples.
    """
    import soundfile as sf

    p = Path(path)
    try:
        handle = sf.SoundFile(os.fsencode(p))
    except Exception as exc:
        raise AudioFileError(f"{p}: not a readable audio file ({_short(exc)})") from None
    # integer PCM decodes to finite floats by construction: the NaN/Inf scan is
    # only needed for floating-point and lossy (float-decoded) subtypes
    check = not str(handle.subtype).startswith(INTEGER_SUBTYPES)
    with handle:
        start = 0
        while True:
            try:
                block = handle.read(blocksize, dtype="float64", always_2d=True)
            except Exception as exc:
                raise AudioFileError(f"{p}: read failed after {start} frames ({_short(exc)})") from None
            if block.shape[0] == 0:
                break
            if check and not np.all(np.isfinite(block)):
                bad = int(np.argwhere(~np.isfinite(block))[0, 0]) + start
                raise AudioFileError(f"{p}: NaN or infinite sample at frame {bad}; accepted: finite samples only")
            start += block.shape[0]
            yield block
            if block.shape[0] < blocksize:
                break


def sha256_file(path, *, chunk: int = 1 << 20) -> str:
    """SHA-256 of the file's bytes, hex."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for piece in iter(lambda: fh.read(chunk), b""):
            h.update(piece)
    return h.hexdigest()


def canonical_path(path) -> str:
    """The path recorded in output files (sweep.json ``input.path``, corpus.json, batch folder names).

    Rule: the file's absolute path (``.`` and ``..`` removed, symbolic links kept as named)
    written relative to the current working folder when it lies inside it, else absolute.
    So ``take.wav``, ``./take.wav`` and ``$PWD/take.wav`` give the same bytes in every output.
    """
    p = os.path.abspath(os.fspath(path))
    cwd = os.path.abspath(os.getcwd())
    try:
        rel = os.path.relpath(p, cwd)
    except ValueError:  # another drive (Windows)
        return Path(p).as_posix()
    if rel == os.curdir or rel.startswith(os.pardir + os.sep) or rel == os.pardir:
        return Path(p).as_posix()
    return Path(rel).as_posix()


def is_regular_file(path) -> bool:
    """True for a regular file (after symbolic links); False for FIFOs, devices, sockets, folders."""
    import stat

    try:
        return stat.S_ISREG(os.stat(path).st_mode)
    except OSError:
        return False


def fingerprint(path) -> tuple:
    """(device, inode, size, mtime_ns, ctime_ns) of ``path``: any write or replacement changes it
    (ctime cannot be set back by a writer)."""
    st = os.stat(path)
    return (st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns, st.st_ctime_ns)


def check_unchanged(path, before: tuple) -> None:
    """Raise :class:`AudioFileError` if ``path`` is not the file :func:`fingerprint` saw.

    Called after a pass (decoding and hashing) so that figures never come from a
    mix of two files recorded under one SHA-256.
    """
    try:
        after = fingerprint(path)
    except OSError:
        after = None
    if after != before:
        raise AudioFileError(
            f"{shown(path)}: changed while it was read (size, time stamps or inode differ "
            "before and after the pass); nothing was written or cached; accepted: a file no "
            "process writes during the run"
        )


# -- atomic outputs ---------------------------------------------------------


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


def shown(path) -> str:
    """A path for one line of text: control characters and undecodable bytes escaped."""
    text = os.fsdecode(path) if isinstance(path, bytes) else str(path)
    out = []
    for ch in text:
        if ch.isprintable() and not 0xDC80 <= ord(ch) <= 0xDCFF:
            out.append(ch)
        elif 0xDC80 <= ord(ch) <= 0xDCFF:
            out.append(f"\\x{ord(ch) - 0xDC00:02x}")
        else:
            out.append(ch.encode("unicode_escape").decode("ascii"))
    return "".join(out)


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


def warn(message: str) -> None:
    """Emit an :class:`AudiobwWarning` (shown as one line by the CLI)."""
    warnings.warn(message, AudiobwWarning, stacklevel=2)


# -- one run per output folder ----------------------------------------------

LOCK_NAME = ".audiobw-lock"
LOCK_WAIT_S = 5.0
_held_locks: dict = {}


@contextlib.contextmanager
def output_lock(folder, *, wait_s: float | None = None):
    """Hold an exclusive lock on the output ``folder`` while a run writes into it.

    ``fcntl.flock`` on ``folder/.audiobw-lock`` (a file of our own naming, left in
    place, empty).  A second run waits up to ``wait_s`` seconds (default
    :data:`LOCK_WAIT_S`), then refuses with :class:`OutputError`; the kernel
    releases the lock when the holder exits, however it exits.  Re-entrant
    within one process (sweep --report takes it once for both steps).
    """
    import fcntl
    import time

    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OutputError(f"--out: {shown(folder)!r} exists and is not a folder")
    created = not folder.exists()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        key = os.path.realpath(folder)
    except OSError as exc:
        raise output_error(folder, exc) from None
    if key in _held_locks:
        _held_locks[key][1] += 1
        try:
            yield folder
        finally:
            _held_locks[key][1] -= 1
        return
    try:
        fd = os.open(folder / LOCK_NAME, os.O_RDWR | os.O_CREAT | getattr(os, "O_NOFOLLOW", 0), 0o666)
    except OSError as exc:
        raise output_error(folder / LOCK_NAME, exc) from None
    deadline = time.monotonic() + (LOCK_WAIT_S if wait_s is None else wait_s)
    try:
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise OutputError(
                        f"{shown(folder)}: another audiobw run is writing into this folder (lock {LOCK_NAME} "
                        "held); accepted: a folder no other run is using: wait for it to finish or choose "
                        "another --out"
                    ) from None
                time.sleep(0.1)
        _held_locks[key] = [fd, 1]
        try:
            yield folder
        except BaseException:
            # a run refused before writing leaves no folder behind that it made itself
            if created and [p.name for p in folder.iterdir()] == [LOCK_NAME]:
                with contextlib.suppress(OSError):
                    (folder / LOCK_NAME).unlink()
                    folder.rmdir()
            raise
        finally:
            del _held_locks[key]
    finally:
        os.close(fd)  # closing the descriptor releases the flock
