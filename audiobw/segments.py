"""How the analysis pass cuts the program: PSD segment, fine-PSD segment and short-frame lengths, the window.

Used by :func:`audiobw.spectrum.analyse`; the constants are also part of the
analysis cache's key (:func:`audiobw.cache.params`).
"""

from __future__ import annotations

import math

import numpy as np

#: Target resolution of the long-term PSD, Hz (edges near 20 Hz need it).
PSD_RESOLUTION_HZ = 3.0
#: Target resolution of the fine low-frequency PSD, Hz.  A Hann window smears a
#: tone over a main lobe whose power-weighted spread is σ = 1/(√3·T) for a
#: segment of T seconds; against a response falling s dB/Hz the power-averaged
#: gain is off by about (ln 10/20)·s²·σ² dB (a Gaussian-spread estimate).  At
#: 3 Hz a Butterworth 8 highpass at 50 Hz read 0.8 dB too little loss at 40 Hz;
#: at 0.37 Hz (48 kHz) the worst 20-50 Hz highpass of every family, orders 2-8,
#: on tones at 25, 40 and 60 Hz is within 0.01 dB of |H(f)|² at the tones
#: (tests/test_lowfreq.py).  Halving it again cost 40 % more analysis time for
#: 0.007 dB.
FINE_RESOLUTION_HZ = 0.4
#: The file must be at least this many fine segments long; a shorter file gets
#: a shorter fine segment.  Welch weighs the first and last 3/4 segment less, so
#: a long segment on a short clip whose level changes near its ends reads its
#: low band off (a 9 s speech clip: +0.5 dB with 1.5 s segments, against a
#: periodogram of the whole file); 16 lengths keep that share of the file small.
FINE_MIN_LENGTHS = 16
#: Length of a short-time frame for the band summary, s (~43 ms).
FRAME_SECONDS = 0.043


def hann_periodic(m: int) -> np.ndarray:
    """Periodic Hann window, bit for bit scipy.signal.get_window('hann', m).

    Computed with numpy as scipy.signal.windows.general_cosine does, so the
    analysis does not import scipy.signal (checked in tests/test_spectrum.py).
    """
    if m <= 1:
        return np.ones(m)
    fac = np.linspace(-np.pi, np.pi, m + 1)
    w = np.zeros(m + 1)
    for k, a in enumerate((0.5, 0.5)):
        w += a * np.cos(k * fac)
    return w[:-1]


def _pow2_at_least(x: float) -> int:
    return 1 << max(0, math.ceil(math.log2(max(x, 1.0))))


def _pow2_nearest(x: float) -> int:
    return 1 << max(0, round(math.log2(max(x, 1.0))))


def frame_lengths(fs_hz: float, n_frames: int | None = None) -> tuple[int, int]:
    """(PSD segment length, short-time frame length) in samples for ``fs_hz``.

    The PSD segment is the power of two giving at most 3 Hz resolution,
    shortened to fit a short file; the short frame is the power of two
    nearest 43 ms.
    """
    n_short = _pow2_nearest(FRAME_SECONDS * fs_hz)
    n_psd = _pow2_at_least(fs_hz / PSD_RESOLUTION_HZ)
    if n_frames is not None:
        while n_psd > n_short and n_psd > n_frames:
            n_psd //= 2
    return n_psd, n_short


def fine_length(fs_hz: float, n_psd: int, n_frames: int | None = None) -> int:
    """Segment length of the fine low-frequency PSD, samples (0: none).

    The power of two giving at most FINE_RESOLUTION_HZ, halved until the file
    is at least FINE_MIN_LENGTHS segments long; 0 when that leaves it no
    longer than the normal segment ``n_psd``.
    """
    n = _pow2_at_least(fs_hz / FINE_RESOLUTION_HZ)
    if n_frames is not None:
        while n > n_psd and FINE_MIN_LENGTHS * n > n_frames:
            n //= 2
    return n if n > n_psd else 0
