"""Audio input in blocks, validation, and atomic output.

:mod:`.reading` the input (header checks, blocks, SHA-256, the file's
identity, ``shown``, ``warn``); :mod:`.writing` atomic outputs (never over an
input; parts of killed runs removed); :mod:`.lock` one run per output folder.
Everything is imported from ``audiobw.audio``.
"""

from __future__ import annotations

from .lock import LOCK_NAME, LOCK_WAIT_S, output_lock
from .reading import (
    AUDIO_SUFFIXES,
    INTEGER_SUBTYPES,
    MAX_CHANNELS,
    MAX_RATE_HZ,
    MIN_RATE_HZ,
    AudioInfo,
    canonical_path,
    check_unchanged,
    fingerprint,
    is_regular_file,
    iter_blocks,
    open_info,
    sha256_file,
    shown,
    warn,
    wav_declared_frames,
)
from .writing import (
    OUTPUT_FORMATS,
    PART_SUFFIX,
    SFC_SET_ADD_PEAK_CHUNK,
    atomic_path,
    clean_stale_parts,
    is_output_failure,
    open_wav_writer,
    output_error,
    refuse_input_target,
    write_audio_atomic,
    write_text_atomic,
)

__all__ = [
    "AUDIO_SUFFIXES",
    "INTEGER_SUBTYPES",
    "LOCK_NAME",
    "LOCK_WAIT_S",
    "MAX_CHANNELS",
    "MAX_RATE_HZ",
    "MIN_RATE_HZ",
    "OUTPUT_FORMATS",
    "PART_SUFFIX",
    "SFC_SET_ADD_PEAK_CHUNK",
    "AudioInfo",
    "atomic_path",
    "canonical_path",
    "check_unchanged",
    "clean_stale_parts",
    "fingerprint",
    "is_output_failure",
    "is_regular_file",
    "iter_blocks",
    "open_info",
    "open_wav_writer",
    "output_error",
    "output_lock",
    "refuse_input_target",
    "sha256_file",
    "shown",
    "warn",
    "wav_declared_frames",
    "write_audio_atomic",
    "write_text_atomic",
]
