"""The A/B excerpt: where the filter removes the most program, and the fades at its ends."""

from __future__ import annotations


import numpy as np

from ..audio import iter_blocks
from .options import FADE_S


# -- the excerpt ------------------------------------------------------------------


def removed_band_profile(path, filt, fs_hz: float, *, frame_s: float = 0.1, progress=None, expected: int = 0):
    """Per-frame input power in the band the filter removes, and the program's levels.

    Each frame (``frame_s``, Hann window) contributes Σ|X(f)|²·(1 − |H(f)|²)
    over channels.  Returns ``(profile, frames, mean_square)``.
    """
    n = max(16, int(round(frame_s * fs_hz)))
    win = np.hanning(n)
    f = np.fft.rfftfreq(n, 1.0 / fs_hz)
    removed = np.clip(1.0 - filt.power_response(f), 0.0, 1.0)
    profile, carry, frames, sumsq = [], None, 0, None
    for block in iter_blocks(path):
        frames += block.shape[0]
        sumsq = np.einsum("ij,ij->j", block, block) + (0 if sumsq is None else sumsq)
        buf = block if carry is None else np.concatenate([carry, block])
        k = buf.shape[0] // n
        if k:
            seg = buf[: k * n].reshape(k, n, -1) * win[None, :, None]
            spec = np.fft.rfft(seg, axis=1)
            profile.extend(np.einsum("kfc,f->k", spec.real**2 + spec.imag**2, removed))
        carry = buf[k * n :]
        if progress is not None:
            progress(frames, max(expected, frames))
    return np.asarray(profile), frames, (sumsq / max(frames, 1)) if sumsq is not None else None, n


def choose_excerpt(profile: np.ndarray, frame_len: int, frames: int, length: int) -> int:
    """Start frame of the ``length``-sample stretch with the most removed-band power."""
    if length >= frames or profile.size == 0:
        return 0
    k = max(1, int(round(length / frame_len)))
    if profile.size <= k:
        return 0
    sums = np.convolve(profile, np.ones(k), mode="valid")
    start = int(np.argmax(sums)) * frame_len
    return min(start, frames - length)


def _fade(x: np.ndarray, fs_hz: float) -> np.ndarray:
    n = min(int(round(FADE_S * fs_hz)), x.shape[0] // 4)
    if n < 2:
        return x
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(n) / n)
    y = x.copy()
    y[:n] *= ramp[:, None]
    y[-n:] *= ramp[::-1, None]
    return y
