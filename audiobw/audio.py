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

from .errors import AudioFileError, AudiobwWarning, OutputError

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
        raise AudioFileError(
            f"{p}: sample rate {info.samplerate} Hz; accepted: {MIN_RATE_HZ} to {MAX_RATE_HZ} Hz")
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
    with handle:
        start = 0
        while True:
            try:
                block = handle.read(blocksize, dtype="float64", always_2d=True)
            except Exception as exc:
                raise AudioFileError(f"{p}: read failed after {start} frames ({_short(exc)})") from None
            if block.shape[0] == 0:
                break
            if not np.all(np.isfinite(block)):
                bad = int(np.argwhere(~np.isfinite(block))[0, 0]) + start
                raise AudioFileError(
                    f"{p}: NaN or infinite sample at frame {bad}; accepted: finite samples only")
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


# -- atomic outputs ---------------------------------------------------------

@contextlib.contextmanager
def atomic_path(target, *, inputs=()):
    """Yield a temporary path beside ``target``; rename it over ``target`` on success.

    An interrupted or failed write leaves no partial file.  Refuses to write
    over any of ``inputs``.
    """
    target = Path(target)
    for src in inputs:
        try:
            if Path(src).exists() and target.exists() and os.path.samefile(src, target):
                raise OutputError(f"{target}: refusing to overwrite an input file")
        except OSError as exc:
            if isinstance(exc, OutputError):
                raise
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
        os.close(fd)
    except OSError as exc:
        raise OutputError(f"{target}: cannot write ({exc.strerror or exc})") from None
    ok = False
    try:
        yield Path(tmp)
        # mkstemp makes the file private (0600); outputs are ordinary files
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, target)
        ok = True
    except OSError as exc:
        if isinstance(exc, OutputError):
            raise
        raise OutputError(f"{target}: cannot write ({exc.strerror or exc})") from None
    finally:
        if not ok:
            with contextlib.suppress(OSError):
                os.unlink(tmp)


def write_text_atomic(target, text: str, *, inputs=()) -> Path:
    """Write ``text`` (UTF-8; an undecodable byte of a file name, a lone surrogate, as \\udcNN) to ``target`` atomically."""
    with atomic_path(target, inputs=inputs) as tmp:
        with open(tmp, "w", encoding="utf-8", errors="backslashreplace", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
    return Path(target)


def write_audio_atomic(target, data: np.ndarray, sample_rate_hz: int, *, subtype: str = "FLOAT",
                       inputs=()) -> Path:
    """Write audio atomically with an explicit subtype (never the PCM_16 default).

    Integer subtypes clip above ±1: such data is refused rather than clipped.
    RF64 is used for WAV output past 4 GiB.
    """
    import soundfile as sf

    target = Path(target)
    data = np.asarray(data)
    if not subtype.startswith(("FLOAT", "DOUBLE")) and data.size and np.max(np.abs(data)) > 1.0:
        raise OutputError(f"{target}: samples exceed full scale for integer subtype {subtype}")
    fmt = None
    if target.suffix.lower() == ".wav" and data.nbytes > (4 << 30) - (1 << 20):
        fmt = "RF64"
    with atomic_path(target, inputs=inputs) as tmp:
        sf.write(str(tmp), data, int(sample_rate_hz), subtype=subtype,
                 format=fmt or _format_for(target))
    return target


def _format_for(target: Path) -> str:
    return {".wav": "WAV", ".flac": "FLAC", ".ogg": "OGG"}.get(target.suffix.lower(), "WAV")


def warn(message: str) -> None:
    """Emit an :class:`AudiobwWarning` (shown as one line by the CLI)."""
    warnings.warn(message, AudiobwWarning, stacklevel=2)
