"""Audio input: a file's header checked, its samples read in blocks, its SHA-256 and identity.

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

import hashlib
import os
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import AudioFileError, AudiobwWarning

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


def warn(message: str) -> None:
    """Emit an :class:`AudiobwWarning` (shown as one line by the CLI)."""
    warnings.warn(message, AudiobwWarning, stacklevel=2)
