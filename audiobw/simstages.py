"""The parts the chain simulation (:mod:`audiobw.simulate`) is built from: the amplifier polynomial's
coefficients, FIRs for the analog response, the ideal anti-alias filter and the noise shape,
overlap-save convolution, and the converter's rounding with TPDF dither.

References: :mod:`audiobw.simulate` (Oppenheim & Schafer §8.7 and §4.2; scipy.signal.freqs_zpk;
Wannamaker et al. 2000 for TPDF dither).
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from .chain import Chain
from .errors import NumericalWarning
from .filters import Filter

#: The FIR's response is checked (and must hold) up to this fraction of fs.
ACCURACY_FRACTION = 0.45
MIN_TAPS = 1 << 12
MAX_TAPS = 1 << 20
REL_TOL = 1e-3
ABS_TOL = 1e-6
#: Designs reused across renders of the same filter (FIR taps, noise gain shapes); a few entries only.
_CACHE: dict = {}
_CACHE_SIZE = 16


def cached(key, make):
    if key not in _CACHE:
        if len(_CACHE) >= _CACHE_SIZE:
            _CACHE.pop(next(iter(_CACHE)))
        _CACHE[key] = make()
    return _CACHE[key]


def harmonic_coefficients(chain: Chain) -> tuple[float, float]:
    """(a2, a3) of the amplifier polynomial y = x + a2·x² + a3·x³.

    For x = sin: x² = (1 − cos 2ωt)/2 and x³ = (3 sin ωt − sin 3ωt)/4, so the
    2nd harmonic is a2/2 and the 3rd a3/4 of a full-scale fundamental.
    """
    a2 = 2.0 * 10 ** (chain.h2_db / 20.0) if chain.h2_db is not None else 0.0
    a3 = 4.0 * 10 ** (chain.h3_db / 20.0) if chain.h3_db is not None else 0.0
    return a2, a3


def analog_response(filt: Filter, freqs_hz: np.ndarray) -> np.ndarray:
    """Complex analog response H(j2πf), from the normalised zpk (scipy.signal.freqs_zpk)."""
    from scipy import signal

    w = 2.0 * np.pi * np.asarray(freqs_hz, float) / filt.ref_rad_s
    _, h = signal.freqs_zpk(filt.z, filt.p, filt.k, worN=w)
    return h


def fft_grid(m: int, fs_hz: float) -> np.ndarray:
    return np.arange(m // 2 + 1) * fs_hz / m


def analog_fir(
    filt: Filter, fs_hz: float, *, max_taps: int = MAX_TAPS, delay: int | None = None, min_taps: int = MIN_TAPS
) -> tuple[np.ndarray, int, float]:
    """An FIR whose response matches the analog filter below fs/2.

    Parameters
    ----------
    filt : Filter
        An analog candidate.
    fs_hz : float
        The rate the FIR runs at.
    max_taps, min_taps : int
        Bounds of the search (powers of two).
    delay : int or None
        Precursor room in samples; None: an eighth of the taps.

    Returns
    -------
    h : ndarray, (M,)
        Taps.
    delay : int
        Samples of precursor room: h[n] stands for the response at n − delay.
    max_error : float
        Worst |H_fir − H| / (|H| + 1e-3) found up to 0.45·fs on a 4× finer grid.
    """
    m = int(min_taps)
    while delay is not None and 4 * delay > m:
        m *= 2
    fixed = delay
    while True:
        f = fft_grid(m, fs_hz)
        h_grid = analog_response(filt, f)
        h_grid[-1] = h_grid[-1].real  # the DFT of real taps is real at fs/2
        delay = m // 8 if fixed is None else fixed
        taps = np.roll(np.fft.irfft(h_grid, m), delay)
        fine = fft_grid(4 * m, fs_hz)
        band = fine <= ACCURACY_FRACTION * fs_hz
        got = np.fft.rfft(taps, 4 * m)[band] * np.exp(2j * np.pi * fine[band] * delay / fs_hz)
        want = analog_response(filt, fine[band])
        err = np.abs(got - want)
        ok = bool(np.all(err <= REL_TOL * np.abs(want) + ABS_TOL))
        worst = float(np.max(err / (np.abs(want) + 1e-3)))
        if ok or m >= max_taps:
            if not ok:
                warnings.warn(
                    f"analog filter {filt.spec.label()}: FIR of {m} taps misses the analog "
                    f"response by up to {worst:.2g} (relative) below 0.45*fs",
                    NumericalWarning,
                    stacklevel=2,
                )
            return taps, delay, worst
        m *= 2


#: The converter's ideal anti-alias filter as rendered: a Kaiser-windowed sinc at fs/2 with this many
#: zero crossings each side and this window parameter (about 100 dB stopband; the transition band
#: spans about ±1 % of fs around fs/2, where "ideal" cannot be rendered exactly).
AA_ZEROS = 160
AA_BETA = 10.0


def anti_alias_fir(r: int) -> np.ndarray:
    """The ideal anti-alias filter at fs/2 for a signal at r·fs (unit passband gain, linear phase).

    A Kaiser-windowed sinc (scipy.signal.firwin); Kaiser's design formula gives
    A ≈ 100 dB for β = 10 and a transition width of (A − 7.95)/(14.36·N) of the
    rate (J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh
    window function", Proc. IEEE ISCAS 1974; from memory): ≈ 0.02·fs for
    N = 2·160·r + 1 taps.
    """
    from scipy import signal

    return cached(("aa", r), lambda: signal.firwin(2 * AA_ZEROS * r + 1, 1.0 / r, window=("kaiser", AA_BETA)))


def noise_shaper(gain: np.ndarray, m: int) -> np.ndarray:
    """Linear-phase FIR of M taps whose power response on the M-grid is ``gain``.

    Its energy Σh² is the mean of ``gain`` over the two-sided grid, so white
    noise of variance σ² comes out with power σ²·Σ(gain·w)/(fs/2), w the
    trapezoid widths of the one-sided grid: the exact total of the gain shape.
    """
    return np.roll(np.fft.irfft(np.sqrt(np.maximum(gain, 0.0)), m), m // 2)


class OverlapSave:
    """Overlap-save FIR convolution of multichannel hops of a fixed length.

    Parameters
    ----------
    taps : ndarray, (M,)
    hop : int, >= 1
        Samples consumed and produced per call.
    channels : int
    """

    def __init__(self, taps: np.ndarray, hop: int, channels: int):
        from scipy import fft

        self._fft = fft
        self.m = int(taps.size)
        self.hop = int(hop)
        self.nfft = 1 << math.ceil(math.log2(self.hop + self.m - 1))
        self.spectrum = fft.rfft(taps, self.nfft)[:, None]
        self.history = np.zeros((self.m - 1, channels))

    def process(self, x: np.ndarray) -> np.ndarray:
        fft = self._fft
        buf = np.concatenate([self.history, x]) if self.m > 1 else x
        y = fft.irfft(fft.rfft(buf, self.nfft, axis=0) * self.spectrum, self.nfft, axis=0)
        if self.m > 1:
            self.history = buf[-(self.m - 1) :]
        return y[self.m - 1 : self.m - 1 + x.shape[0]]


def quantise(
    x: np.ndarray, bits: int, dither_rng: np.random.Generator | None
) -> tuple[np.ndarray, np.ndarray, int | None]:
    """Round to the converter's codes, optionally with TPDF dither; clip and count.

    Parameters
    ----------
    x : ndarray, (n, channels)
        Converter input in sample units (full-scale sine peak 1.0).
    bits : int, 1 <= bits <= 32
    dither_rng : numpy.random.Generator or None
        Source of TPDF dither (difference of two uniform variates, 2 LSB peak
        to peak); None for no dither.

    Returns
    -------
    y : ndarray
        Quantised samples, in [−1, 1 − q].
    clipped : ndarray of int, (channels,)
        Samples that fell outside the code range, per channel.
    first : int or None
        Row of the first clipped sample.
    """
    q = 2.0 / 2.0 ** int(bits)
    codes = x / q
    if dither_rng is not None:
        codes = codes + (dither_rng.random(x.shape) - dither_rng.random(x.shape))
    codes = np.round(codes)
    top, bottom = 2.0 ** (int(bits) - 1) - 1.0, -(2.0 ** (int(bits) - 1))
    over = (codes > top) | (codes < bottom)
    clipped = over.sum(axis=0)
    first = None
    if np.any(over):
        codes = np.clip(codes, bottom, top)
        first = int(np.argmax(np.any(over, axis=1)))
    return codes * q, clipped, first
