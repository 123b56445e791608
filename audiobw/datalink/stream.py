"""The data program: the recorded stream (its clock, levels and bits), its bit rate, :class:`DataProgram`."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import AudioFileError, ParameterError

#: At most this many bits of a recorded stream are measured (data files are short; the cost is one FFT per case).
MAX_STREAM_BITS = 8192
#: A recording needs at least this many bits for its levels' statistics and a clock.
MIN_STREAM_BITS = 64
#: Zero crossings of a clocked stream fall on one bit grid: the resultant length of their phases
#: (1 = every crossing on the grid, about 0 for a program with no clock) must reach this.
MIN_CLOCK_COHERENCE = 0.5


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
    from ..audio import open_info

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
    from ..audio import open_info

    fs = open_info(path).sample_rate_hz
    return _channel_mean_head(path, int(math.ceil((max_bits + 128) * fs / bit_rate_hz))), float(fs)


def _channel_mean_head(path, need: int) -> np.ndarray:
    """The first ``need`` frames of ``path`` (fewer if it is shorter), channel mean, sample units."""
    from ..audio import iter_blocks

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
