"""Data and pulse programs: the bandwidth a bit stream needs, its eye and its error rate.

Two views of each candidate, both reported:

**Measured on the recording** (``eye_fraction``, ``q``, ``ber``,
``ber_worst``): the recorded stream — its own channel and noise included — is
passed through the candidate in the frequency domain (one FFT of the stream,
times H(f) of the case, inverse FFT), the bit clock is recovered from the
recording's zero crossings, and at each trial instant the samples are sorted
by the bit each carries (the recording sliced at the middle of its own bits).
A least-squares fit of each sample on its own and its neighbours' symbols
(linear inter-symbol interference; Proakis & Salehi §9.2) gives the level
means conditioned on the pattern (the channel's cursors) and, in its
residual, the recording's own noise at the decision point.  The chain's
modelled noise is added in power to that variance.  See :func:`measure_stream`.

**Ideal pulse** (``eye_ideal``, ``q_ideal``, ``ber_ideal``): the candidate
alone on a perfect NRZ stream.  For a polar NRZ stream of bit period T = 1/R
through a candidate filter, the channel's unit pulse response y(t) is
computed from the case's response (in the frequency domain, never by
filtering the file), and then:

* worst-case vertical eye opening at the best sampling instant, by
  peak-distortion analysis of inter-symbol interference: for sampling phase
  τ and main cursor y0(τ), the opening relative to the unfiltered one is
  ``y0(τ) − Σ_{k≠0} |yk(τ)|`` (yk = y(τ + kT)); the best τ maximises it;
* noise σ at the decision point: the chain's output noise over 0…fs/2;
* Q = (opening / 2) / σ and the worst-pattern bound ``ber_worst`` =
  ½·erfc(Q/√2) (Gaussian noise);
* ``ber``: the error rate averaged over a PRBS-7 pattern at its best
  sampling instant, each bit with its own margin (what ``--max-ber`` tests);
* data-dependent jitter: the peak-to-peak spread of the zero crossings of the
  noiseless output for a PRBS-7 pattern, in unit intervals.

The minimum bandwidth of a binary stream is 1/(2T) (Nyquist): the fastest
pattern 1010… has its fundamental there.

Digital stage: the stream is taken band-limited to fs/2, as the recording
holds it; the digital filter then acts on it.  (The chain's noise and
harmonics follow ``--anti-alias``: :mod:`audiobw.noise`.)

References
----------
.. [1] H. Nyquist, "Certain topics in telegraph transmission theory",
   Trans. AIEE 47, 617–644, 1928 (minimum bandwidth 1/(2T)).
.. [2] J. G. Proakis, M. Salehi, *Digital Communications*, 5th ed., §9.2
   (inter-symbol interference, peak distortion) and §4.2 (error probability
   of binary antipodal signalling, ½·erfc(√(Eb/N0))).
.. [3] ITU-T O.150 (05/96), §5: pseudo-random test patterns (2^7 − 1,
   2^9 − 1, 2^15 − 1 and their generator polynomials).
.. [4] S. D. Personick, "Receiver design for digital fiber optic
   communication systems", Bell Syst. Tech. J. 52(6), 843–874, 1973 (the
   Q-factor of two Gaussian levels, BER = ½·erfc(Q/√2); from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import AudioFileError, ParameterError

#: Generator taps (x^n + x^m + 1) of the pseudo-random patterns, ITU-T O.150 §5.
PRBS_TAPS = {"prbs7": (7, 6), "prbs9": (9, 5), "prbs15": (15, 14)}
PATTERNS = tuple(PRBS_TAPS) + ("alternating", "random")
OVERSAMPLE = 64  # fine-grid samples per bit for the pulse response (analog stage)
#: At most this many bits of a recorded stream are measured (data files are short; the cost is one FFT per case).
MAX_STREAM_BITS = 8192
#: A recording needs at least this many bits for its levels' statistics and a clock.
MIN_STREAM_BITS = 64
#: Zero crossings of a clocked stream fall on one bit grid: the resultant length of their phases
#: (1 = every crossing on the grid, about 0 for a program with no clock) must reach this.
MIN_CLOCK_COHERENCE = 0.5
#: Trial sampling instants per unit interval in the measured eye.
PHASES_PER_UI = 32


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


@dataclass(frozen=True)
class RecordedStream:
    """The recorded data stream the measured figures are taken on.

    Parameters
    ----------
    samples_v : ndarray
        The recording (channel mean) in V at the converter input, at most
        :data:`MAX_STREAM_BITS` bits plus a margin.
    fs_hz : float
    clock_phase_ui : float, 0 <= phase < 1
        The recovered bit boundaries: bit i spans (i + phase)·T … (i + 1 + phase)·T
        after the first sample.
    coherence : float, 0…1
        Resultant length of the zero crossings' phases on the bit grid.
    n_bits : int
        Whole bits in ``samples_v``.
    symbols : ndarray
        The bits it carries (±1, :func:`reference_symbols`).
    name : str
        The file, for messages.
    level_v : float
        The recording's NRZ amplitude A (V): the settled level of long runs,
        Σ h_k of its cursors fitted at the middle of its bits (on the smoothed
        stream, whose gain at DC is 1) — exactly A for a
        clean ±A NRZ and for a stream already low-passed (whatever its
        overshoot); where the recording blocks DC (Σ h_k under half its rms)
        its rms.  The unfiltered opening the eye is a fraction of is 2A.
    """

    samples_v: np.ndarray = field(repr=False)
    fs_hz: float
    clock_phase_ui: float
    coherence: float
    n_bits: int
    level_v: float
    symbols: np.ndarray = field(repr=False)
    name: str = "the recording"


def smoothed_stream(x: np.ndarray, fs_hz: float, bit_rate_hz: float) -> np.ndarray:
    """``x`` less its mean through a zero-phase Gaussian lowpass (|H| = e^(−f²/2R²), R the bit rate).

    Wide-band noise makes many spurious crossings and wrong slices; a
    zero-phase filter removes it without moving the crossings of the stream
    (common practice in clock recovery: filter, then detect transitions).
    """
    from scipy import fft as sfft

    xc = np.asarray(x, float) - float(np.mean(x))
    n = sfft.next_fast_len(len(xc), real=True)
    f = np.fft.rfftfreq(n, 1.0 / fs_hz)
    return sfft.irfft(sfft.rfft(xc, n) * np.exp(-0.5 * (f / bit_rate_hz) ** 2), n)[: len(xc)]


def recover_clock(x: np.ndarray, fs_hz: float, bit_rate_hz: float) -> tuple[float, float, int]:
    """Bit-boundary phase of a recorded stream from its zero crossings.

    Each crossing of the mean of the smoothed stream (:func:`smoothed_stream`;
    interpolated between samples) is taken modulo the bit period; the circular
    mean of those phases is the boundary phase and their resultant length
    ``|mean(e^{j2πt/T})|`` the coherence (1 when every crossing falls on one
    grid; near 0 for a program with no clock).

    Returns ``(phase_ui, coherence, crossings)``.
    """
    xc = smoothed_stream(x, fs_hz, bit_rate_hz)
    s = np.signbit(xc)
    idx = np.nonzero(s[:-1] != s[1:])[0]
    if idx.size == 0:
        return 0.0, 0.0, 0
    den = xc[idx] - xc[idx + 1]
    frac = np.where(den != 0, xc[idx] / np.where(den != 0, den, 1.0), 0.5)
    t_ui = (idx + frac) * bit_rate_hz / fs_hz
    z = np.mean(np.exp(2j * np.pi * t_ui))
    return float((np.angle(z) / (2 * np.pi)) % 1.0), float(abs(z)), int(idx.size)


def reference_symbols(x: np.ndarray, fs_hz: float, bit_rate_hz: float, phase_ui: float, n_bits: int) -> np.ndarray:
    """The bits the recording carries (±1): its smoothed stream sliced at the middle of each bit."""
    xs = smoothed_stream(x, fs_hz, bit_rate_hz)
    mid = (np.arange(n_bits) + phase_ui + 0.5) * fs_hz / bit_rate_hz
    return np.where(np.interp(mid, np.arange(len(xs)), xs) >= 0.0, 1.0, -1.0)


def recorded_stream(
    x: np.ndarray, fs_hz: float, bit_rate_hz: float, *, name="the recording", recovered: bool = False
) -> RecordedStream:
    """Check that ``x`` (V) carries a clocked stream at ``bit_rate_hz`` and recover its clock.

    Raises
    ------
    AudioFileError
        Fewer than :data:`MIN_STREAM_BITS` bits, or zero crossings that do not
        fall on one bit grid (coherence below :data:`MIN_CLOCK_COHERENCE`): no
        reliable clock, so no eye can be measured.
    """
    accepted = (
        f"accepted: a recorded two-level (NRZ) data stream of at least {MIN_STREAM_BITS} bits whose "
        f"zero crossings fall on one bit grid (for music or speech use --program music|speech)"
    )
    how = " (recovered from the recording)" if recovered else ""
    n_bits = int(len(x) * bit_rate_hz / fs_hz)
    if n_bits < MIN_STREAM_BITS:
        raise AudioFileError(
            f"{name}: no reliable bit clock: {n_bits} bit(s) at {bit_rate_hz:.6g} bit/s{how} in "
            f"{len(x) / fs_hz:.3g} s; {accepted}"
        )
    phase, coherence, crossings = recover_clock(x, fs_hz, bit_rate_hz)
    if crossings < 8 or coherence < MIN_CLOCK_COHERENCE:
        raise AudioFileError(
            f"{name}: no reliable bit clock at {bit_rate_hz:.6g} bit/s{how}: {crossings} zero "
            f"crossings with a grid coherence of {coherence:.2f} (needs {MIN_CLOCK_COHERENCE:g}); "
            f"{accepted}"
        )
    x = np.asarray(x, float)
    xs = smoothed_stream(x, fs_hz, bit_rate_hz)  # unit gain at DC: long runs keep their level
    mid = (np.arange(n_bits - 1) + phase + 0.5) * fs_hz / bit_rate_hz
    ref = np.interp(mid, np.arange(len(xs)), xs)
    a = np.where(ref >= 0.0, 1.0, -1.0)
    pre, post = 3, 16
    rows = np.arange(post, len(a) - pre)
    design_m = np.column_stack([a[rows - k] for k in range(-pre, post + 1)] + [np.ones(rows.size)])
    coef, *_ = np.linalg.lstsq(design_m, ref[rows], rcond=None)
    level = float(np.sum(coef[:-1]))
    rms = float(np.std(x))
    if level < 0.5 * rms:
        level = rms
    if not level > 0:
        raise AudioFileError(
            f"{name}: no reliable bit clock at {bit_rate_hz:.6g} bit/s: the bits carry no level; {accepted}"
        )
    return RecordedStream(x, float(fs_hz), phase, coherence, n_bits, level, a, str(name))


def _tail_bits(y: np.ndarray, share: float = 1e-9) -> int:
    """Bits of the pulse response holding all but ``share`` of its energy."""
    e = np.cumsum(np.sum(y**2, axis=1))
    if e[-1] <= 0:
        return 1
    return int(np.searchsorted(e, (1.0 - share) * e[-1])) + 1


def filtered_stream(filt, stream: RecordedStream, pad_samples: int, upsample: int = 1) -> np.ndarray:
    """The recorded stream through ``filt``: one FFT, times H(f), inverse FFT (zero history).

    The stream is zero-padded by ``pad_samples`` so the circular convolution
    equals the linear one over the stream; ``upsample`` > 1 interpolates
    band-limited (zeros above fs/2) onto a grid that much finer.
    """
    from scipy import fft as sfft

    x = stream.samples_v
    n = sfft.next_fast_len(len(x) + pad_samples, real=True)
    spec = sfft.rfft(x, n)
    spec = spec * complex_response(filt, np.fft.rfftfreq(n, 1.0 / stream.fs_hz))
    if upsample > 1:
        wide = np.zeros(n * upsample // 2 + 1, dtype=complex)
        wide[: spec.size] = spec
        return sfft.irfft(wide, n * upsample) * upsample
    return sfft.irfft(spec, n)


def measure_stream(filt, program: DataProgram, chain_sigma_v: float, y: np.ndarray, k0: int, j0: int) -> dict:
    """Eye, Q and BER of the recorded stream through one candidate.

    Method (per case):

    1. The stream through the candidate (:func:`filtered_stream`), sampled at
       trial instants (i + φ + d)·T for bit i — φ the recovered boundary
       phase, d on a grid of :data:`PHASES_PER_UI` per UI over ±1 UI around
       the ideal pulse's best instant.
    2. Reference symbols aᵢ = ±1: the recording, smoothed by a zero-phase
       lowpass at the bit rate, sliced at the middle of its own bits.
    3. At each instant, least squares sᵢ = c + Σ_k h_k·a_{i−k} (3 precursors,
       postcursors as long as the candidate's pulse holds energy, at most 32):
       h₀ is the main cursor, the fitted values are the level means
       conditioned on the pattern, the residual rms σ_rec the recording's own
       noise at the decision point.  σ² = σ_rec² + σ_chain².
    4. ``q`` = (h₀ − Σ_{k≠0}|h_k|)/σ (the half-opening of the noiseless eye
       over the noise), best over the instants; ``ber`` the mean over the
       recorded bits of ½·erfc(mᵢ/(σ√2)) (mᵢ each bit's fitted margin), at
       its own best instant among the nine of highest Q; ``ber_worst`` =
       ½·erfc(q/√2).
    5. ``eye_fraction``: (min over the ones − max over the zeros) of the
       samples as they are (recorded noise included), best instant, over the
       unfiltered opening 2A — what an eye diagram of the output shows.
    """
    from scipy.special import erfc

    st = program.stream
    assert st is not None
    rate, fs = program.bit_rate_hz, st.fs_hz
    spb = fs / rate
    tail = min(_tail_bits(y), y.shape[0])
    pre = 3
    post = int(min(max(tail, 4), 48, max(4, (st.n_bits - pre) // 5)))
    up = max(1, math.ceil(16.0 / spb))
    centre = k0 + j0 / y.shape[1]
    d = centre + np.arange(-PHASES_PER_UI, PHASES_PER_UI + 1) / PHASES_PER_UI
    d = d[d >= 0]
    pad = int(math.ceil((max(tail, post) + d[-1] + 2) * spb))
    out = filtered_stream(filt, st, pad, up)
    n_bits = st.n_bits - 1
    a = st.symbols[:n_bits]
    # the case starts from rest: skip its settling (at most a quarter of the stream: a slow AC coupling's
    # tail lasts longer, and its start-up then counts as the baseline wander it is)
    first = max(post, min(tail, n_bits // 4))
    judged = np.arange(first, n_bits - pre)
    ones = a[judged] > 0
    if judged.size < 2 * (pre + post + 2) or ones.all() or not ones.any():
        raise AudioFileError(
            f"{st.name}: {judged.size} bits left to measure after the filter settles, "
            f"{int(ones.sum())} of them ones; accepted: a longer stream with both levels"
        )
    pos = (judged[:, None] + st.clock_phase_ui + d[None, :]) * spb * up
    samples = np.interp(pos, np.arange(out.size), out)  # (bits, instants)
    design_m = np.column_stack([a[judged - k] for k in range(-pre, post + 1)] + [np.ones(judged.size)])
    # normal equations: ±1 symbols of a stream with both levels make a well-conditioned Gram matrix
    # (a constant run would be singular; lstsq then), and this is ~50× faster than an SVD per case
    gram = design_m.T @ design_m
    rhs = design_m.T @ samples
    try:
        coef = np.linalg.solve(gram, rhs)
    except np.linalg.LinAlgError:
        coef = np.linalg.lstsq(design_m, samples, rcond=None)[0]
    dof = max(judged.size - design_m.shape[1], 1)
    # residual sum of squares of a least-squares fit: |s|² − coefᵀ·Aᵀs
    var_rec = np.maximum(np.sum(samples**2, axis=0) - np.sum(coef * rhs, axis=0), 0.0) / dof
    cursors = coef[:-1]
    half = cursors[pre] - (np.sum(np.abs(cursors), axis=0) - np.abs(cursors[pre]))
    sigma = np.sqrt(var_rec + chain_sigma_v**2)
    with np.errstate(divide="ignore", invalid="ignore"):
        q_all = np.where(half > 0, np.where(sigma > 0, half / sigma, np.inf), 0.0)
    iq = int(np.argmax(q_all))
    q = float(q_all[iq])
    # the average error rate at its own best instant, searched among the nine highest-Q instants
    near = np.argsort(-q_all, kind="stable")[:9]
    margins = (design_m[:, :-1] @ cursors[:, near]) * a[judged][:, None]
    if np.all(sigma[near] > 0):
        p = 0.5 * erfc(margins / (sigma[near][None, :] * math.sqrt(2.0)))
    else:
        p = np.where(margins > 0, 0.0, np.where(margins < 0, 1.0, 0.5))
    ber = float(np.min(p.mean(axis=0)))
    opening = samples[ones].min(axis=0) - samples[~ones].max(axis=0)
    ie = int(np.argmax(opening))
    eye = max(float(opening[ie]), 0.0) / (2.0 * program.amplitude_v)
    return {
        "eye_fraction": eye,
        "eye_opening_v": 2.0 * program.amplitude_v * eye,
        "sample_delay_ui": float(d[iq]),
        "q": q if math.isfinite(q) else None,
        "ber": ber,
        "ber_worst": ber_from_q(q) if q > 0 else 0.5,
        "stream_sigma_v": float(math.sqrt(var_rec[iq])),
    }


@dataclass(frozen=True)
class DataProgram:
    """What the data metrics need from the program: bit rate and amplitude.

    Parameters
    ----------
    bit_rate_hz : float, 0 < R <= fs/2
    amplitude_v : float, > 0
        NRZ amplitude at the converter input (±A), V.
    source : str
        'given' or 'recovered'.
    confidence_db : float or None
        For a recovered rate: the clock line's height over the median of the
        transition spectrum, dB.
    stream : RecordedStream, optional
        The recorded samples: the figures are then measured on them through
        each case (:func:`measure_stream`); without it, only the ideal-pulse
        figures exist and they stand in for the measured ones.
    """

    bit_rate_hz: float
    amplitude_v: float
    source: str = "given"
    confidence_db: float | None = None
    stream: RecordedStream | None = field(default=None, compare=False, repr=False)

    @property
    def nyquist_min_hz(self) -> float:
        """The minimum bandwidth 1/(2T) (Nyquist; common practice of the trade)."""
        return self.bit_rate_hz / 2.0

    def to_json(self) -> dict:
        doc = {
            "bit_rate_hz": self.bit_rate_hz,
            "bit_rate_source": self.source,
            "bit_rate_confidence_db": self.confidence_db,
            "amplitude_v": self.amplitude_v,
            "nyquist_min_hz": self.nyquist_min_hz,
            "eye_basis": "recording" if self.stream is not None else "ideal pulse",
        }
        if self.stream is not None:
            doc.update(
                bits_measured=self.stream.n_bits,
                clock_phase_ui=self.stream.clock_phase_ui,
                clock_coherence=self.stream.coherence,
            )
        return doc


def score_data(filt, program: DataProgram, noise_sigma_v: float) -> dict:
    """The data-link metrics of one candidate (a plain mapping).

    ``noise_sigma_v`` is the chain's modelled noise at the decision point.
    With a recorded stream (``program.stream``) ``eye_fraction``, ``q``,
    ``ber``, ``ber_worst`` and ``sample_delay_ui`` are measured on it
    (:func:`measure_stream`); the ideal-pulse figures are always kept as
    ``eye_ideal``, ``q_ideal`` and ``ber_ideal``.
    """
    y = pulse_response(filt, program.bit_rate_hz)
    opening, k0, j0 = eye_from_pulse(y)
    eye = max(opening, 0.0)
    half_v = program.amplitude_v * eye
    q = half_v / noise_sigma_v if noise_sigma_v > 0 else math.inf
    ber_avg = average_ber(y, noise_sigma_v / program.amplitude_v)[0]
    row = {
        "eye_fraction": eye,
        "eye_opening_v": 2 * half_v,
        "sample_delay_ui": k0 + j0 / y.shape[1],
        "noise_sigma_v": noise_sigma_v,
        "q": q if math.isfinite(q) else None,
        # the average over the pattern at its best instant (what --max-ber tests) and the
        # peak-distortion bound (the worst pattern at the worst-case eye's instant)
        "ber": ber_avg,
        "ber_worst": ber_from_q(q) if eye > 0 else 0.5,
        "jitter_pp_ui": crossing_jitter_ui(y),
        "stream_sigma_v": 0.0,
        "eye_ideal": eye,
        "q_ideal": q if math.isfinite(q) else None,
        "ber_ideal": ber_avg,
    }
    if program.stream is not None:
        row.update(measure_stream(filt, program, noise_sigma_v, y, k0, j0))
    return row


def recover_bit_rate(path, *, max_seconds: float = 60.0, min_confidence_db: float = 20.0):
    """Recover the bit rate of a recorded NRZ stream from the spectrum of its transitions.

    The squared first difference of an NRZ signal is a train of pulses at the
    bit boundaries; its spectrum has lines at the bit rate R and its
    multiples.  The lowest line within 12 dB of the strongest (above 1 Hz) is
    taken and refined by parabolic interpolation on the log spectrum.  At
    most ``max_seconds`` of audio are read.

    Returns
    -------
    (bit_rate_hz, confidence_db)

    Raises
    ------
    AudioFileError
        When no line stands ``min_confidence_db`` above the spectrum's median.
    """
    from .audio import open_info

    fs = open_info(path).sample_rate_hz
    x = _channel_mean_head(path, int(max_seconds * fs))
    d = np.diff(x) ** 2
    d = d - d.mean()
    n = 1 << int(math.ceil(math.log2(max(len(d), 16))))
    spec = np.abs(np.fft.rfft(d * np.hanning(len(d)), n))
    freqs = np.fft.rfftfreq(n, 1.0 / fs)
    valid = freqs > 1.0
    spec_v = np.where(valid, spec, 0.0)
    median = float(np.median(spec[valid])) or 1e-300
    top = int(np.argmax(spec_v))
    confidence = 20 * math.log10(max(spec_v[top], 1e-300) / median)
    if confidence < min_confidence_db:
        raise AudioFileError(
            f"{path}: no bit rate found (strongest clock line {confidence:.1f} dB over the spectrum median; "
            f"accepted: a line at least {min_confidence_db:g} dB up) — give --bit-rate"
        )
    # Sharp NRZ edges give lines of similar height at every multiple of R: the
    # bit rate is the lowest line within 12 dB of the strongest.
    threshold = max(0.25 * spec_v[top], median * 10 ** (min_confidence_db / 20))
    is_peak = (spec_v[1:-1] >= threshold) & (spec_v[1:-1] >= spec_v[:-2]) & (spec_v[1:-1] >= spec_v[2:])
    k = int(np.nonzero(is_peak)[0][0]) + 1 if np.any(is_peak) else top
    confidence = 20 * math.log10(max(spec_v[k], 1e-300) / median)
    if 0 < k < len(spec) - 1:
        a, b, c = np.log(spec[k - 1 : k + 2] + 1e-300)
        shift = 0.5 * (a - c) / (a - 2 * b + c) if (a - 2 * b + c) != 0 else 0.0
    else:
        shift = 0.0
    return float((k + shift) * fs / n), confidence


def read_stream(path, bit_rate_hz: float, *, max_bits: int = MAX_STREAM_BITS) -> tuple[np.ndarray, float]:
    """The first ``max_bits`` bits (plus a settling margin) of ``path``, channel mean, sample units."""
    from .audio import open_info

    fs = open_info(path).sample_rate_hz
    return _channel_mean_head(path, int(math.ceil((max_bits + 128) * fs / bit_rate_hz))), float(fs)


def _channel_mean_head(path, need: int) -> np.ndarray:
    """The first ``need`` frames of ``path`` (fewer if it is shorter), channel mean, sample units."""
    from .audio import iter_blocks

    parts, got = [], 0
    for block in iter_blocks(path):
        parts.append(block.mean(axis=1))
        got += block.shape[0]
        if got >= need:
            break
    return np.concatenate(parts)[:need] if parts else np.zeros(0)


def data_program_for(analysis, chain, bit_rate) -> DataProgram:
    """Build the DataProgram of an analysed file: bit rate, NRZ amplitude and the recorded stream.

    ``bit_rate`` is a float in Hz or the string 'auto'.  The amplitude is the
    recording's own outer level (:attr:`RecordedStream.level_v`; its rms for a
    clean polar NRZ) in volts at the converter input.  The recording's clock is recovered from its zero crossings; a program with no
    reliable clock (too few bits, or crossings on no common bit grid: music
    or speech swept as data) is refused with :class:`AudioFileError`.
    """
    if bit_rate == "auto":
        rate, conf = recover_bit_rate(analysis.path)
        source = "recovered"
    else:
        rate, conf, source = float(bit_rate), None, "given"
    if not 0 < rate <= analysis.sample_rate_hz / 2:
        raise ParameterError(
            f"--bit-rate: {rate:g} bit/s cannot be carried at fs = {analysis.sample_rate_hz} Hz; "
            f"accepted: 0 < rate <= fs/2 = {analysis.sample_rate_hz / 2:g}"
        )
    x, fs = read_stream(analysis.path, rate)
    stream = recorded_stream(
        x * chain.volts_per_unit, fs, rate, name=str(analysis.path), recovered=source == "recovered"
    )
    return DataProgram(rate, stream.level_v, source, conf, stream)
