"""The ideal-pulse view of a data program: test patterns, polar NRZ, a candidate's unit pulse response,
its eye by peak distortion, data-dependent jitter and the pattern-averaged error rate.

References: :mod:`audiobw.datalink` (Nyquist 1928, Proakis & Salehi §9.2 and §4.2, ITU-T O.150 §5).
"""

from __future__ import annotations

import math

import numpy as np

#: Generator taps (x^n + x^m + 1) of the pseudo-random patterns, ITU-T O.150 §5.
PRBS_TAPS = {"prbs7": (7, 6), "prbs9": (9, 5), "prbs15": (15, 14)}
PATTERNS = tuple(PRBS_TAPS) + ("alternating", "random")
OVERSAMPLE = 64  # fine-grid samples per bit for the pulse response (analog stage)


def prbs(name: str, n_bits: int, *, seed: int = 1) -> np.ndarray:
    """Bits (0/1, uint8) of a test pattern.

    Parameters
    ----------
    name : {'prbs7', 'prbs9', 'prbs15', 'alternating', 'random'}
        PRBS patterns from a Fibonacci LFSR with the ITU-T O.150 polynomials,
        started from all ones; 'alternating' is 1010…; 'random' is seeded.
    n_bits : int, >= 1
    """
    if name == "alternating":
        return (np.arange(n_bits) % 2 == 0).astype(np.uint8)
    if name == "random":
        return np.random.default_rng(seed).integers(0, 2, n_bits).astype(np.uint8)
    n, m = PRBS_TAPS[name]
    state = (1 << n) - 1
    out = np.empty(n_bits, dtype=np.uint8)
    for i in range(n_bits):
        bit = ((state >> (n - 1)) ^ (state >> (m - 1))) & 1
        out[i] = bit
        state = ((state << 1) | bit) & ((1 << n) - 1)
    return out


def nrz_stream(bits: np.ndarray, bit_rate_hz: float, fs_hz: float, amplitude: float) -> np.ndarray:
    """Polar NRZ samples: sample n carries bit floor(n·R/fs) as ±amplitude."""
    n = int(math.floor(len(bits) * fs_hz / bit_rate_hz))
    idx = np.minimum((np.arange(n) * bit_rate_hz / fs_hz).astype(np.int64), len(bits) - 1)
    return np.where(bits[idx] > 0, amplitude, -amplitude)


def complex_response(filt, freq_hz: np.ndarray) -> np.ndarray:
    """H(f), complex, of a designed candidate at frequencies in Hz."""
    f = np.asarray(freq_hz, dtype=float)
    if filt.analog:
        s = 1j * (2.0 * np.pi * f / filt.ref_rad_s)
    else:
        s = np.exp(1j * 2.0 * np.pi * f / filt.spec.fs_hz)
    h = np.full(s.shape, filt.k, dtype=complex)
    for z in filt.z:
        h = h * (s - z)
    for p in filt.p:
        h = h / (s - p)
    if not filt.analog:
        h = np.where(f < filt.spec.fs_hz / 2.0, h, 0.0)
    return h


def _spectral_pulse(filt, n_bits: int, bit_rate_hz: float, oversample: int) -> np.ndarray:
    """Unit NRZ pulse through a digital-stage chain, periodic over ``n_bits``.

    The converter's ideal anti-alias filter band-limits the stream to fs/2;
    the band-limited pulse's exact spectrum T·sinc(fT)·e^(−jπfT) times H(f)
    is inverted on a grid of ``oversample`` points per bit (exact, as the
    grid rate exceeds fs).
    """
    n = n_bits * oversample
    freqs = np.arange(n // 2 + 1) * bit_rate_hz / n_bits
    t_bit = 1.0 / bit_rate_hz
    pulse = t_bit * np.sinc(freqs * t_bit) * np.exp(-1j * np.pi * freqs * t_bit)
    return np.fft.irfft(pulse * complex_response(filt, freqs) * (oversample * bit_rate_hz), n)


def _modal_step(filt):
    """(D, c, λ) of the analog step response s(t) = D + Σ c_i (e^(λ_i t) − 1)/λ_i, t in normalised time."""
    from scipy import signal

    a, b, c, d = signal.zpk2ss(filt.z, filt.p, filt.k)
    lam, vec = np.linalg.eig(a)
    coef = (c @ vec).ravel() * np.linalg.solve(vec, b).ravel()
    return float(np.real(d[0, 0])) if d.size else 0.0, coef, lam


def _analog_pulse(filt, n_bits: int, bit_rate_hz: float, oversample: int) -> np.ndarray:
    """Unit NRZ pulse through an analog prototype, exactly from its modal step response."""
    d, coef, lam = _modal_step(filt)
    t = np.arange(n_bits * oversample) / (oversample * bit_rate_hz) * filt.ref_rad_s  # normalised time
    width = filt.ref_rad_s / bit_rate_hz

    def step(tt):
        e = np.expm1(np.outer(tt, lam)) / lam
        return np.where(tt >= 0, d + np.real(e @ coef), 0.0)

    return step(t) - step(t - width)


def pulse_response(filt, bit_rate_hz: float, *, oversample: int | None = None, max_bits: int = 1 << 14):
    """The channel's response to one unit NRZ pulse, long enough for its tail.

    Returns
    -------
    y : ndarray, shape (L, M)
        ``y[k, j]`` = response at time (k + j/M)·T after the pulse starts;
        M = ``oversample`` (default 64, raised for the digital stage so the
        grid rate exceeds fs).  L (bits) doubles until the last half holds
        less than 1e-12 of the pulse energy, or reaches ``max_bits``.
    """
    m = oversample or OVERSAMPLE
    if not filt.analog:
        m = max(m, 1 << int(math.ceil(math.log2(filt.spec.fs_hz / bit_rate_hz))))
    length = 32
    while True:
        if filt.analog:
            y = _analog_pulse(filt, length, bit_rate_hz, m)
        else:
            # periodic: use twice the length so the wrapped tail can be checked
            y = _spectral_pulse(filt, 2 * length, bit_rate_hz, m)[: length * m]
        y = y.reshape(length, m)
        energy = float(np.sum(y**2))
        tail = float(np.sum(y[length // 2 :] ** 2))
        if tail <= 1e-12 * energy or length >= max_bits:
            return y
        length *= 2


def _periodic_output(y: np.ndarray, symbols: np.ndarray) -> np.ndarray:
    """Noiseless output for a periodic symbol sequence: superposition of pulse responses."""
    n_bits, m = len(symbols), y.shape[1]
    n = n_bits * m
    flat = y.reshape(-1)
    folded = np.zeros(n)
    for start in range(0, flat.size, n):
        piece = flat[start : start + n]
        folded[: piece.size] += piece
    impulses = np.zeros(n)
    impulses[::m] = symbols
    return np.fft.irfft(np.fft.rfft(impulses) * np.fft.rfft(folded), n)


def eye_from_pulse(y: np.ndarray) -> tuple[float, int, int]:
    """Worst-case eye opening (fraction of the unfiltered one) by peak distortion.

    Returns ``(opening, k0, j0)``: the best opening (may be negative: the eye is
    closed), the main-cursor bit index and the phase index of the best instant.
    """
    absum = np.sum(np.abs(y), axis=0)  # per phase
    k0 = np.argmax(y, axis=0)  # main cursor per phase
    main = y[k0, np.arange(y.shape[1])]
    opening = 2 * main - absum  # y0 - sum_{k != 0} |yk|
    j0 = int(np.argmax(opening))
    return float(opening[j0]), int(k0[j0]), j0


def crossing_jitter_ui(y: np.ndarray, *, pattern: str = "prbs7") -> float:
    """Peak-to-peak spread of the zero crossings of the noiseless PRBS output, in UI.

    ``y`` is the pulse response from :func:`pulse_response`.  NaN when the
    output never crosses zero twice (a closed or stuck channel).
    """
    base = prbs(pattern, (1 << PRBS_TAPS[pattern][0]) - 1)
    reps = max(1, math.ceil(y.shape[0] / len(base)))
    out = _periodic_output(y, np.tile(2.0 * base - 1.0, reps))
    m = y.shape[1]
    s = np.signbit(out)
    idx = np.nonzero(s[:-1] != s[1:])[0]
    if idx.size < 2:
        return math.nan
    frac = out[idx] / (out[idx] - out[idx + 1])
    t_ui = (idx + frac) / m
    phase = 2 * np.pi * (t_ui % 1.0)
    mean = np.angle(np.mean(np.exp(1j * phase)))
    dev = np.angle(np.exp(1j * (phase - mean))) / (2 * np.pi)
    return float(dev.max() - dev.min())


def average_ber(y: np.ndarray, noise_sigma_rel: float, *, pattern: str = "prbs7") -> tuple[float, float]:
    """Bit-error rate averaged over a pattern at the best sampling instant.

    Each bit of the periodic pattern is decided at the same instant (main
    cursor and phase chosen to minimise the average); its error probability in
    Gaussian noise is ½·erfc(m_i/(σ√2)) for its own margin m_i (the noiseless
    sample times the bit's sign), and the rate is their mean (Proakis & Salehi
    §4.2, §9.2).  ``y`` is the pulse response from :func:`pulse_response`;
    ``noise_sigma_rel`` is σ relative to the NRZ amplitude.

    Returns ``(ber, sample_delay_ui)``.
    """
    base = prbs(pattern, (1 << PRBS_TAPS[pattern][0]) - 1)
    reps = max(1, math.ceil(y.shape[0] / len(base)))
    symbols = np.tile(2.0 * base - 1.0, reps)
    n_bits, m = len(symbols), y.shape[1]
    out = _periodic_output(y, symbols).reshape(n_bits, m)  # out[i, j]: bit i, phase j
    best, where = math.inf, 0.0
    for k0 in np.unique(np.argmax(y, axis=0)):
        # bit i is seen at bit slot i + k0 of the output
        margins = np.roll(out, -int(k0), axis=0) * symbols[:, None]
        if noise_sigma_rel > 0:
            from scipy.special import erfc

            p = 0.5 * erfc(margins / (noise_sigma_rel * math.sqrt(2.0)))
        else:
            p = np.where(margins > 0, 0.0, np.where(margins < 0, 1.0, 0.5))
        per_phase = p.mean(axis=0)
        j = int(np.argmin(per_phase))
        if per_phase[j] < best:
            best, where = float(per_phase[j]), float(k0) + j / m
    return best, where


def ber_from_q(q: float) -> float:
    """Bit-error rate of binary antipodal signalling in Gaussian noise: ½·erfc(Q/√2)."""
    if not math.isfinite(q):
        return 0.0 if q > 0 else 0.5
    return 0.5 * math.erfc(q / math.sqrt(2.0)) if q > 0 else 0.5
