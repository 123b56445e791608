"""Generate the synthetic demo clips bundled with audiobw.

The clips are invented demo programs, not recordings. Each one is built from
scratch with numpy (additive synthesis, filtered noise, simple resonators and
a synthetic room) and written as FLAC with soundfile. Every random draw comes
from a ``numpy.random.default_rng`` seeded with a fixed constant, so running
the script twice gives byte-identical files (with the same numpy and
libsndfile builds).

Clips
-----
``ensemble-48k-stereo.flac``
    A music-like excerpt: an invented small chamber group (bass, two bowed
    voices, a horn-like voice, a plucked instrument, a frame drum and a
    cymbal-like shimmer) in a small timber hall. Wide band: real content
    below 60 Hz and above 12 kHz.
``announcement-44k1-mono.flac``
    A speech-like boarding call over the paging system of an invented ferry
    terminal: chime, glottal pulses through time-varying formant
    resonators, fricative and burst noise, a hall reverb, and a faint mains
    hum and rumble. Narrow band: little above about 9 kHz, almost nothing
    below 80 Hz except the hum.

Usage
-----
``python clips/make_clips.py [--outdir DIR]``  (or ``make clips``).

Each clip is checked before it is written (duration 8-10 s, sample peak
between -6 and -1 dBFS with no clipping, RMS between -24 and -16 dBFS
re a full-scale sine) and after (FLAC size under 1 MB); files are written to
a temporary name in the output folder and then moved into place with
``os.replace``.
"""

from __future__ import annotations

import argparse
import hashlib
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import soundfile as sf

#: Seed of the ensemble clip's random generator.
ENSEMBLE_SEED = 480_217
#: Seed of the announcement clip's random generator.
ANNOUNCEMENT_SEED = 441_023

#: Sample peak the mix is scaled to before quantisation, dBFS.
TARGET_PEAK_DBFS = -3.0
#: Accepted range of the written sample peak, dBFS.
PEAK_LIMITS_DBFS = (-6.0, -1.0)
#: Accepted range of the RMS level, dB re a full-scale sine.
RMS_LIMITS_DBFS = (-24.0, -16.0)
#: Accepted range of the duration, seconds.
DURATION_LIMITS_S = (8.0, 10.0)
#: Largest accepted FLAC file, bytes.
MAX_FILE_BYTES = 1_000_000
#: Frequency bands of the printed spectral summary, Hz.
SUMMARY_BANDS_HZ = ((0.0, 100.0), (100.0, 4000.0), (4000.0, 10000.0), (10000.0, np.inf))

TWO_PI = 2.0 * np.pi


# ---------------------------------------------------------------------------
# Small signal helpers
# ---------------------------------------------------------------------------


def db_to_gain(db: float) -> float:
    """Convert a level in dB to a linear amplitude factor.

    Parameters
    ----------
    db : float
        Level in decibels.

    Returns
    -------
    float
        ``10 ** (db / 20)``.
    """
    return float(10.0 ** (db / 20.0))


def rms_dbfs(x: np.ndarray) -> float:
    """RMS level in dB relative to a full-scale sine.

    Parameters
    ----------
    x : numpy.ndarray
        Samples scaled so that full scale is 1.0 (any shape; all channels
        are pooled).

    Returns
    -------
    float
        ``20 * log10(rms * sqrt(2))``, so a full-scale sine reads 0 dBFS.
    """
    rms = np.sqrt(np.mean(np.square(x, dtype=np.float64)))
    return float(20.0 * np.log10(rms * np.sqrt(2.0)))


def peak_dbfs(x: np.ndarray) -> float:
    """Sample peak level in dBFS.

    Parameters
    ----------
    x : numpy.ndarray
        Samples scaled so that full scale is 1.0.

    Returns
    -------
    float
        ``20 * log10(max |x|)``.
    """
    return float(20.0 * np.log10(np.max(np.abs(x))))


def butterworth_lowpass_mag(f: np.ndarray, fc: float, order: int) -> np.ndarray:
    """Magnitude of a Butterworth-shaped low-pass response.

    Parameters
    ----------
    f : numpy.ndarray
        Frequencies, Hz.
    fc : float
        Corner (-3 dB) frequency, Hz.
    order : int
        Filter order; the roll-off is ``6 * order`` dB/octave.

    Returns
    -------
    numpy.ndarray
        ``1 / sqrt(1 + (f / fc) ** (2 * order))``.
    """
    return 1.0 / np.sqrt(1.0 + (f / fc) ** (2 * order))


def butterworth_highpass_mag(f: np.ndarray, fc: float, order: int) -> np.ndarray:
    """Magnitude of a Butterworth-shaped high-pass response.

    Parameters
    ----------
    f : numpy.ndarray
        Frequencies, Hz.
    fc : float
        Corner (-3 dB) frequency, Hz.
    order : int
        Filter order.

    Returns
    -------
    numpy.ndarray
        ``1 / sqrt(1 + (fc / f) ** (2 * order))``, zero at DC.
    """
    with np.errstate(divide="ignore"):
        ratio = np.where(f > 0.0, fc / np.maximum(f, 1e-12), np.inf)
    return 1.0 / np.sqrt(1.0 + ratio ** (2 * order))


def fft_filter(x: np.ndarray, fs: float, magnitude, pad_s: float = 0.25) -> np.ndarray:
    """Zero-phase filtering of a whole signal in the frequency domain.

    Parameters
    ----------
    x : numpy.ndarray
        Signal, shape ``(n,)``.
    fs : float
        Sample rate, Hz.
    magnitude : callable
        Maps an array of frequencies (Hz) to the wanted magnitude response.
        It should be smooth so the implied impulse response is short.
    pad_s : float, optional
        Zero padding added before transforming, seconds, so that circular
        wrap-around stays negligible.

    Returns
    -------
    numpy.ndarray
        Filtered signal, same length as `x`.
    """
    n = x.shape[0]
    nfft = n + int(pad_s * fs)
    spectrum = np.fft.rfft(x, nfft)
    freqs = np.fft.rfftfreq(nfft, 1.0 / fs)
    return np.fft.irfft(spectrum * magnitude(freqs), nfft)[:n]


def fft_convolve(x: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Linear convolution via the FFT, truncated to the length of `x`.

    Parameters
    ----------
    x : numpy.ndarray
        Signal, shape ``(n,)``.
    h : numpy.ndarray
        Impulse response, shape ``(m,)``.

    Returns
    -------
    numpy.ndarray
        The first ``n`` samples of ``x * h``.
    """
    n = x.shape[0] + h.shape[0] - 1
    nfft = 1 << (n - 1).bit_length()
    y = np.fft.irfft(np.fft.rfft(x, nfft) * np.fft.rfft(h, nfft), nfft)
    return y[: x.shape[0]]


def raised_cosine_ramp(n: int) -> np.ndarray:
    """Rising half-cosine ramp from 0 to 1.

    Parameters
    ----------
    n : int
        Number of samples (0 gives an empty ramp).

    Returns
    -------
    numpy.ndarray
        ``0.5 * (1 - cos(pi * k / n))`` for ``k = 0 .. n-1``.
    """
    if n <= 0:
        return np.zeros(0)
    return 0.5 * (1.0 - np.cos(np.pi * np.arange(n) / n))


def gate_envelope(n: int, fs: float, attack_s: float, release_s: float) -> np.ndarray:
    """Flat envelope with raised-cosine attack and release.

    Parameters
    ----------
    n : int
        Length, samples.
    fs : float
        Sample rate, Hz.
    attack_s, release_s : float
        Ramp lengths, seconds (shortened if they do not fit).

    Returns
    -------
    numpy.ndarray
        Envelope of length `n`, peak 1.
    """
    env = np.ones(n)
    na = min(int(attack_s * fs), n // 2)
    nr = min(int(release_s * fs), n - na)
    env[:na] = raised_cosine_ramp(na)
    if nr > 0:
        env[n - nr :] = raised_cosine_ramp(nr)[::-1]
    return env


def add_into(buffer: np.ndarray, start: int, segment: np.ndarray) -> None:
    """Add a segment into a buffer in place, dropping what falls outside.

    Parameters
    ----------
    buffer : numpy.ndarray
        Target, shape ``(n,)``.
    start : int
        Sample index in `buffer` where `segment` begins (may be negative).
    segment : numpy.ndarray
        Samples to add.
    """
    lo = max(start, 0)
    hi = min(start + segment.shape[0], buffer.shape[0])
    if hi > lo:
        buffer[lo:hi] += segment[lo - start : hi - start]


def room_impulse(
    fs: float,
    rng: np.random.Generator,
    *,
    length_s: float,
    predelay_s: float,
    rt60_low_s: float,
    rt60_high_s: float,
    split_hz: float,
    early: tuple[tuple[float, float], ...] = (),
) -> np.ndarray:
    """Synthetic room impulse response: seeded noise with an exponential decay.

    The diffuse tail is seeded Gaussian noise split into a low and a high band
    that decay at different rates (high frequencies die away sooner, as in
    a furnished room). A few discrete early reflections may be added.

    Parameters
    ----------
    fs : float
        Sample rate, Hz.
    rng : numpy.random.Generator
        Source of the noise.
    length_s : float
        Length of the response, seconds.
    predelay_s : float
        Gap between the direct sound and the start of the diffuse tail, s.
    rt60_low_s, rt60_high_s : float
        60 dB decay times of the low and high bands, seconds.
    split_hz : float
        Crossover between the two bands, Hz.
    early : tuple of (float, float), optional
        Early reflections as ``(delay_s, gain)`` pairs.

    Returns
    -------
    numpy.ndarray
        Impulse response with unit energy and no direct-sound tap (the dry
        signal is mixed separately).
    """
    n = int(length_s * fs)
    t = np.arange(n) / fs
    noise = rng.standard_normal(n)
    low = fft_filter(noise, fs, lambda f: butterworth_lowpass_mag(f, split_hz, 2), pad_s=0.05)
    high = fft_filter(noise, fs, lambda f: butterworth_highpass_mag(f, split_hz, 2), pad_s=0.05)
    ln_1000 = np.log(1000.0)
    tail = low * np.exp(-ln_1000 * t / rt60_low_s) + high * np.exp(-ln_1000 * t / rt60_high_s)
    onset = int(predelay_s * fs)
    ramp = int(0.015 * fs)
    tail[:onset] = 0.0
    tail[onset : onset + ramp] *= raised_cosine_ramp(ramp)
    tail /= np.sqrt(np.sum(tail**2))
    ir = 0.8 * tail
    for delay_s, gain in early:
        ir[int(round(delay_s * fs))] += gain
    return ir / np.sqrt(np.sum(ir**2))


def spectral_summary(x: np.ndarray, fs: float) -> list[float]:
    """Fraction of the total power in each band of ``SUMMARY_BANDS_HZ``.

    Parameters
    ----------
    x : numpy.ndarray
        Samples, shape ``(n,)`` or ``(n, channels)``; channel powers add.
    fs : float
        Sample rate, Hz.

    Returns
    -------
    list of float
        One fraction per band; they sum to 1.
    """
    frames = x.reshape(x.shape[0], -1)
    power = np.sum(np.abs(np.fft.rfft(frames, axis=0)) ** 2, axis=1)
    freqs = np.fft.rfftfreq(frames.shape[0], 1.0 / fs)
    total = np.sum(power)
    return [float(np.sum(power[(freqs >= lo) & (freqs < hi)]) / total) for lo, hi in SUMMARY_BANDS_HZ]


# ---------------------------------------------------------------------------
# Ensemble clip
# ---------------------------------------------------------------------------


def midi_to_hz(note: int) -> float:
    """Equal-tempered frequency of a MIDI note number (A4 = 69 = 440 Hz).

    Parameters
    ----------
    note : int
        MIDI note number.

    Returns
    -------
    float
        Frequency, Hz.
    """
    return 440.0 * 2.0 ** ((note - 69) / 12.0)


def harmonic_note(
    f0: float,
    duration_s: float,
    fs: float,
    rng: np.random.Generator,
    *,
    slope_db_per_octave: float,
    fmax: float,
    attack_s: float,
    release_s: float,
    vibrato_hz: float = 0.0,
    vibrato_depth: float = 0.0,
    body_peaks: tuple[tuple[float, float, float], ...] = (),
    decay_s: float | None = None,
    sustain: float = 1.0,
) -> np.ndarray:
    """A sustained note with a full harmonic series (bowed or horn-like).

    Harmonic ``k`` has amplitude ``k ** (slope / 6.02)`` (so the series
    rolls off by ``slope_db_per_octave``), optionally lifted by Gaussian
    "body" resonances, and tapered to zero between ``0.8 * fmax`` and
    ``fmax``. Each harmonic starts at a random phase.

    Parameters
    ----------
    f0 : float
        Fundamental, Hz.
    duration_s : float
        Length including the release, seconds.
    fs : float
        Sample rate, Hz.
    rng : numpy.random.Generator
        Source of the phases and vibrato phase.
    slope_db_per_octave : float
        Spectral slope, negative (e.g. -6 for bowed, -9 for horn-like).
    fmax : float
        Highest harmonic frequency, Hz.
    attack_s, release_s : float
        Envelope ramps, seconds.
    vibrato_hz, vibrato_depth : float, optional
        Vibrato rate (Hz) and relative frequency depth.
    decay_s : float, optional
        If given, the level falls from 1 towards `sustain` with this time
        constant after the attack (a bowed accent or a pizzicato-like bass).
    sustain : float, optional
        Level the decay settles at.
    body_peaks : tuple of (float, float, float), optional
        Resonances as ``(centre_hz, width_hz, boost)``; ``boost`` is a linear
        factor added to 1 at the centre.

    Returns
    -------
    numpy.ndarray
        The note, peak amplitude of order 1.
    """
    n = int(duration_s * fs)
    t = np.arange(n) / fs
    vib = vibrato_depth * np.sin(TWO_PI * vibrato_hz * t + rng.uniform(0.0, TWO_PI))
    phase = TWO_PI * np.cumsum(f0 * (1.0 + vib)) / fs
    exponent = slope_db_per_octave / (20.0 * np.log10(2.0))
    out = np.zeros(n)
    k_max = int(fmax / (f0 * (1.0 + vibrato_depth)))
    for k in range(1, k_max + 1):
        fk = k * f0
        amp = k**exponent
        for centre, width, boost in body_peaks:
            amp *= 1.0 + boost * np.exp(-(((fk - centre) / width) ** 2))
        if fk > 0.8 * fmax:
            amp *= 0.5 * (1.0 + np.cos(np.pi * (fk - 0.8 * fmax) / (0.2 * fmax)))
        out += amp * np.sin(k * phase + rng.uniform(0.0, TWO_PI))
    env = gate_envelope(n, fs, attack_s, release_s)
    if decay_s is not None:
        env *= sustain + (1.0 - sustain) * np.exp(-t / decay_s)
    return out * env


def plucked_note(f0: float, fs: float, rng: np.random.Generator, *, duration_s: float = 1.3) -> np.ndarray:
    """A plucked-string note: slightly stretched partials that decay away.

    Partial ``k`` has frequency ``k f0 sqrt(1 + B k^2)`` (B = 1.5e-4), an
    amplitude set by a pluck one fifth of the way along the string, and a
    decay time that shortens with frequency, so the tone darkens as it dies.

    Parameters
    ----------
    f0 : float
        Fundamental, Hz.
    fs : float
        Sample rate, Hz.
    rng : numpy.random.Generator
        Source of the partial phases.
    duration_s : float, optional
        Length, seconds.

    Returns
    -------
    numpy.ndarray
        The note, peak amplitude of order 1.
    """
    n = int(duration_s * fs)
    t = np.arange(n) / fs
    out = np.zeros(n)
    k = 1
    while True:
        fk = k * f0 * np.sqrt(1.0 + 1.5e-4 * k * k)
        if fk > 14000.0:
            break
        amp = abs(np.sin(np.pi * k * 0.2)) / k
        tau = 0.9 / (1.0 + (fk / 1800.0) ** 1.2)
        out += amp * np.exp(-t / tau) * np.sin(TWO_PI * fk * t + rng.uniform(0.0, TWO_PI))
        k += 1
    env = np.ones(n)
    attack = int(0.002 * fs)
    env[:attack] = raised_cosine_ramp(attack)
    env[-int(0.05 * fs) :] = raised_cosine_ramp(int(0.05 * fs))[::-1]
    return out * env


def drum_hit(fs: float, rng: np.random.Generator) -> np.ndarray:
    """A soft frame-drum thump: a pitch-dropping sine plus a short felt click.

    Parameters
    ----------
    fs : float
        Sample rate, Hz.
    rng : numpy.random.Generator
        Source of the click noise.

    Returns
    -------
    numpy.ndarray
        The hit, 0.6 s long, peak amplitude of order 1.
    """
    n = int(0.6 * fs)
    t = np.arange(n) / fs
    freq = 46.0 + 38.0 * np.exp(-t / 0.035)
    body = np.sin(TWO_PI * np.cumsum(freq) / fs) * np.exp(-t / 0.2)
    click = fft_filter(
        rng.standard_normal(n), fs, lambda f: butterworth_lowpass_mag(f, 1200.0, 2), pad_s=0.02
    )
    body += 0.25 * click * np.exp(-t / 0.008)
    body[: int(0.001 * fs)] *= raised_cosine_ramp(int(0.001 * fs))
    return body


def place_stereo(
    mix: np.ndarray,
    mono: np.ndarray,
    start: int,
    gains: tuple[float, float],
    delays: tuple[int, int],
) -> None:
    """Add a mono part into a stereo mix with per-channel gain and delay.

    Parameters
    ----------
    mix : numpy.ndarray
        Stereo buffer, shape ``(n, 2)``, modified in place.
    mono : numpy.ndarray
        The part, shape ``(m,)``.
    start : int
        Start sample of the part.
    gains : tuple of float
        Left and right gains.
    delays : tuple of int
        Left and right extra delays, samples.
    """
    for ch in range(2):
        add_into(mix[:, ch], start + delays[ch], gains[ch] * mono)


def make_ensemble(fs: int = 48000, duration_s: float = 8.5, seed: int = ENSEMBLE_SEED) -> np.ndarray:
    """Synthesise the ensemble excerpt (invented chamber group, timber hall).

    Four chords of a quarter of the clip each (A minor, F, C, G). Parts:
    a bass line with fundamentals 44-98 Hz and a decaying, pizzicato-like
    envelope; a frame drum (accent on beat 1, softer on beat 3); two bowed
    voices (-6 dB/octave, harmonics to 15 kHz) and a horn-like voice
    (-9 dB/octave) holding the chords; a plucked eighth-note arpeggio; and
    a cymbal-like shimmer of filtered noise plus inharmonic metallic
    partials reaching 19-20 kHz. Each part gets its own gain and small
    delay per channel; the whole group swells into the third chord and
    eases off; a seeded noise-tail reverb (partly shared, partly different
    per channel) adds the room.

    Parameters
    ----------
    fs : int, optional
        Sample rate, Hz.
    duration_s : float, optional
        Length, seconds.
    seed : int, optional
        Seed of the ``numpy.random.default_rng`` used for every random draw.

    Returns
    -------
    numpy.ndarray
        Float mix, shape ``(n, 2)``, not yet level-normalised.
    """
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * fs))
    dry = np.zeros((n, 2))
    chord_s = duration_s / 4.0
    beat_s = chord_s / 4.0

    # (bass notes as (MIDI, beats), chord tones as MIDI)
    progression = [
        ([(33, 2), (40, 2)], [57, 60, 64]),  # A1 E2 | A3 C4 E4
        ([(29, 2), (36, 2)], [53, 57, 60]),  # F1 C2 | F3 A3 C4
        ([(36, 2), (43, 2)], [55, 60, 64]),  # C2 G2 | G3 C4 E4
        ([(31, 2), (38, 2)], [55, 59, 62]),  # G1 D2 | G3 B3 D4
    ]

    bass = np.zeros(n)
    chords = [np.zeros(n) for _ in range(3)]
    plucks = np.zeros(n)
    drums = np.zeros(n)
    for i, (bass_notes, tones) in enumerate(progression):
        t0 = i * chord_s
        # Bass line: body resonances near 110 Hz and 600 Hz, harmonics to 4 kHz.
        tb = t0
        for note, beats in bass_notes:
            length = beats * beat_s
            seg = harmonic_note(
                midi_to_hz(note), length + 0.12, fs, rng,
                slope_db_per_octave=-7.0, fmax=4000.0, attack_s=0.03, release_s=0.12,
                vibrato_hz=4.8, vibrato_depth=0.001, decay_s=0.35, sustain=0.3,
                body_peaks=((110.0, 60.0, 0.8), (600.0, 250.0, 0.5)),
            )
            add_into(bass, int(tb * fs), seg)
            tb += length
        # Drum: an accent on beat 1, a softer stroke on beat 3.
        for b, accent in ((0, 1.0), (2, 0.45)):
            add_into(drums, int((t0 + b * beat_s) * fs), drum_hit(fs, rng) * accent * rng.uniform(0.9, 1.0))
        # Sustained chord: two bowed voices and a horn-like voice.
        start = int(max(t0 - 0.05, 0.0) * fs)
        length = chord_s + 0.3
        for v, note in enumerate(tones):
            if v < 2:
                seg = harmonic_note(
                    midi_to_hz(note), length, fs, rng,
                    slope_db_per_octave=-6.0, fmax=15000.0, attack_s=0.18, release_s=0.3,
                    vibrato_hz=5.3 + 0.4 * v, vibrato_depth=0.003,
                    body_peaks=((480.0, 200.0, 1.0), (2900.0, 900.0, 0.8)),
                )
            else:
                seg = harmonic_note(
                    midi_to_hz(note), length, fs, rng,
                    slope_db_per_octave=-9.0, fmax=14000.0, attack_s=0.09, release_s=0.3,
                    vibrato_hz=4.9, vibrato_depth=0.0015,
                    body_peaks=((1100.0, 500.0, 3.0),),
                )
            add_into(chords[v], start, seg)
        # Plucked arpeggio an octave above the chord, in eighth notes.
        pattern = [0, 1, 2, 1, 0, 2, 1, 2]
        for j, idx in enumerate(pattern):
            note = tones[idx] + 12
            onset = int((t0 + j * beat_s / 2.0) * fs)
            add_into(plucks, onset, plucked_note(midi_to_hz(note), fs, rng) * rng.uniform(0.75, 1.0))

    # Cymbal-like shimmer: shaped noise, partly shared between channels.
    t = np.arange(n) / fs

    def shimmer_shape(f: np.ndarray) -> np.ndarray:
        hp = butterworth_highpass_mag(f, 5500.0, 3)
        lp = butterworth_lowpass_mag(f, 19500.0, 8)
        return hp * lp * (1.0 + 1.5 * np.exp(-(((f - 12500.0) / 3500.0) ** 2)))

    common = rng.standard_normal(n)
    shimmer_env = np.zeros(n)
    for i in range(4):
        k0 = int(i * chord_s * fs)
        shimmer_env[k0:] += np.exp(-(t[k0:] - t[k0]) / 0.4)
    for j in range(int(duration_s / (beat_s / 2.0))):
        k0 = int(j * beat_s / 2.0 * fs)
        shimmer_env[k0:] += (0.35 if j % 2 == 0 else 0.2) * np.exp(-(t[k0:] - t[k0]) / 0.09)
    metal = np.zeros(n)
    partials = (3170.0, 4630.0, 6890.0, 9410.0, 12230.0, 15380.0, 17820.0, 19260.0)
    for i in range(4):
        k0 = int(i * chord_s * fs)
        tt = t[k0:] - t[k0]
        for p, fp in enumerate(partials):
            amp = 0.6 ** (p / 3.0)
            ring = np.exp(-tt / (1.8 - 0.15 * p))
            metal[k0:] += amp * ring * np.sin(TWO_PI * fp * tt + rng.uniform(0.0, TWO_PI))
    shimmer = []
    for ch in range(2):
        noise = 0.9 * common + 0.35 * rng.standard_normal(n)
        shaped = fft_filter(noise, fs, shimmer_shape)
        shimmer.append(shaped / np.std(shaped) * shimmer_env + 0.5 * metal)

    # Mix: (part, level, (gain L, gain R), (delay L, delay R) in samples).
    parts = [
        (bass, 0.09, (0.9, 0.9), (0, 0)),
        (drums, 0.7, (0.85, 0.83), (0, 2)),
        (chords[0], 0.03, (0.8, 0.6), (0, 6)),
        (chords[1], 0.03, (0.6, 0.8), (5, 0)),
        (chords[2], 0.035, (0.72, 0.68), (0, 2)),
        (plucks, 0.13, (0.62, 0.8), (8, 0)),
    ]
    for part, level, gains, delays in parts:
        place_stereo(dry, level * part, 0, gains, delays)
    for ch in range(2):
        dry[:, ch] += 0.015 * shimmer[ch]

    # Phrase dynamics: soft start, swell into the third chord, ease off.
    swell = np.interp(
        t,
        [0.0, 1.5 * chord_s, 2.2 * chord_s, 3.2 * chord_s, duration_s],
        [0.4, 0.6, 1.0, 0.55, 0.5],
    )
    dry *= swell[:, None]

    # Small timber hall: a shared seeded tail plus a weaker one of each
    # channel's own, so the two channels' reverb is only partly correlated.
    room = dict(length_s=1.4, predelay_s=0.012, rt60_low_s=1.1, rt60_high_s=0.55, split_hz=3000.0)
    shared = room_impulse(fs, rng, **room)
    early_sets = (
        ((0.0071, 0.5), (0.0123, 0.35), (0.0189, 0.3), (0.0262, 0.2)),
        ((0.0083, 0.5), (0.0137, 0.35), (0.0171, 0.3), (0.0284, 0.2)),
    )
    wet = np.zeros_like(dry)
    for ch in range(2):
        ir = 0.85 * shared + 0.5 * room_impulse(fs, rng, early=early_sets[ch], **room)
        wet[:, ch] = fft_convolve(dry[:, ch], ir / np.sqrt(np.sum(ir**2)))
    mix = dry + 0.35 * wet

    fade_in = int(0.005 * fs)
    fade_out = int(0.4 * fs)
    mix[:fade_in] *= raised_cosine_ramp(fade_in)[:, None]
    mix[-fade_out:] *= raised_cosine_ramp(fade_out)[::-1, None]
    return mix


# ---------------------------------------------------------------------------
# Announcement clip
# ---------------------------------------------------------------------------

#: Vowel formant targets (F1, F2, F3), Hz.
VOWELS = {
    "a": (730.0, 1150.0, 2600.0),
    "ae": (660.0, 1700.0, 2500.0),
    "e": (530.0, 1840.0, 2550.0),
    "i": (300.0, 2250.0, 2950.0),
    "o": (520.0, 920.0, 2550.0),
    "u": (330.0, 950.0, 2500.0),
    "uh": (600.0, 1200.0, 2600.0),
    "er": (480.0, 1350.0, 2550.0),
}
#: Formants used for nasal murmurs (F1, F2, F3), Hz.
NASAL_FORMANTS = (260.0, 1100.0, 2500.0)
#: Formant bandwidths (B1, B2, B3, B4), Hz, and the fixed fourth formant, Hz.
BANDWIDTHS = (90.0, 110.0, 170.0, 300.0)
F4_HZ = 3500.0

#: Noise sources: name -> (high-pass corner Hz, low-pass corner Hz, level dB
#: re the voiced RMS, length s). Fricatives are long; bursts are short.
NOISES = {
    "s": (4000.0, 8000.0, -9.0, 0.10),
    "sh": (2500.0, 6000.0, -8.0, 0.10),
    "f": (1800.0, 8500.0, -18.0, 0.09),
    "p": (500.0, 2500.0, -6.0, 0.015),
    "t": (3000.0, 7000.0, -4.0, 0.015),
    "k": (1500.0, 3500.0, -5.0, 0.018),
}
#: Silent closure before a burst, seconds.
CLOSURE_S = 0.05

#: The invented boarding call, as phrases of (onset, vowel, stressed).
#: Onsets: None, "m" (nasal murmur) or a key of ``NOISES``. The words are
#: only a guide to the rhythm; the synthesis is speech-like, not speech.
PHRASES = (
    # "passengers for the seven-fifteen sailing"
    [("p", "ae", True), ("s", "e", False), ("sh", "er", False), ("f", "o", False),
     (None, "uh", False), ("s", "e", True), ("m", "e", False), ("f", "i", False),
     ("t", "i", True), ("s", "e", True), ("m", "i", False)],
    # "to the island, please proceed to gate four"
    [("t", "u", False), (None, "uh", False), (None, "a", True), ("m", "e", False),
     ("p", "i", True), ("p", "o", False), ("s", "i", True), ("t", "u", False),
     ("k", "e", True), ("f", "o", True)],
    # "thank you"
    [("t", "ae", True), ("k", "u", False)],
)


def resonator_cascade(
    x: np.ndarray, fs: float, freqs: np.ndarray, bandwidths: tuple[float, ...]
) -> np.ndarray:
    """Run a signal through cascaded time-varying second-order resonators.

    Each stage is ``y[n] = g x[n] + a1 y[n-1] + a2 y[n-2]`` with pole
    radius ``r = exp(-pi B / fs)``, ``a1 = 2 r cos(2 pi F / fs)``,
    ``a2 = -r^2`` and ``g = 1 - a1 - a2`` (unity gain at DC). The
    coefficients are recomputed for every sample from the formant tracks.

    Parameters
    ----------
    x : numpy.ndarray
        Excitation, shape ``(n,)``.
    fs : float
        Sample rate, Hz.
    freqs : numpy.ndarray
        Formant frequency tracks, shape ``(stages, n)``, Hz.
    bandwidths : tuple of float
        One bandwidth per stage, Hz.

    Returns
    -------
    numpy.ndarray
        Filtered signal, shape ``(n,)``.
    """
    y = x.astype(np.float64)
    for track, bw in zip(freqs, bandwidths):
        r = np.exp(-np.pi * bw / fs)
        a1 = (2.0 * r * np.cos(TWO_PI * track / fs)).tolist()
        a2 = -r * r
        gain = [1.0 - c - a2 for c in a1]
        xin = y.tolist()
        out = [0.0] * len(xin)
        y1 = y2 = 0.0
        for i, xi in enumerate(xin):
            y0 = gain[i] * xi + a1[i] * y1 + a2 * y2
            out[i] = y0
            y2 = y1
            y1 = y0
        y = np.asarray(out)
    return y


def glottal_pulse(period_s: float, fs: float, offset: float) -> np.ndarray:
    """Derivative of a Rosenberg-shaped glottal flow pulse.

    The flow opens over 40 % of the period and closes over 16 %; its time
    derivative stands in for the excitation with lip radiation included.

    Parameters
    ----------
    period_s : float
        Pitch period, seconds.
    fs : float
        Sample rate, Hz.
    offset : float
        Fraction of a sample (0 to 1) by which the pulse starts after the
        first returned sample, for sub-sample timing.

    Returns
    -------
    numpy.ndarray
        One period of the flow derivative, normalised to unit peak.
    """
    n = int(np.ceil(period_s * fs)) + 2
    tau = (np.arange(n) - offset) / fs
    tp, tn = 0.40 * period_s, 0.16 * period_s
    flow = np.zeros(n)
    opening = (tau >= 0.0) & (tau < tp)
    closing = (tau >= tp) & (tau < tp + tn)
    flow[opening] = 0.5 * (1.0 - np.cos(np.pi * tau[opening] / tp))
    flow[closing] = np.cos(0.5 * np.pi * (tau[closing] - tp) / tn)
    deriv = np.diff(flow, prepend=0.0)
    return deriv / np.max(np.abs(deriv))


def chime(fs: float, n: int) -> np.ndarray:
    """Two-tone paging chime (E5 then C5) with a few weak upper partials.

    Parameters
    ----------
    fs : float
        Sample rate, Hz.
    n : int
        Length of the returned buffer, samples.

    Returns
    -------
    numpy.ndarray
        The chime, peak amplitude of order 1.
    """
    out = np.zeros(n)
    for start_s, f0 in ((0.12, 659.26), (0.62, 523.25)):
        m = int(1.6 * fs)
        t = np.arange(m) / fs
        tone = np.zeros(m)
        for ratio, amp in ((1.0, 1.0), (2.0, 0.3), (3.0, 0.1), (4.2, 0.05)):
            tone += amp * np.sin(TWO_PI * ratio * f0 * t) * np.exp(-t * ratio**0.5 / 0.55)
        tone[: int(0.004 * fs)] *= raised_cosine_ramp(int(0.004 * fs))
        add_into(out, int(start_s * fs), tone)
    return out


def make_announcement(fs: int = 44100, duration_s: float = 9.0, seed: int = ANNOUNCEMENT_SEED) -> np.ndarray:
    """Synthesise the boarding-call excerpt (invented ferry terminal).

    A two-tone chime, then three phrases of syllables at about four per
    second. Voiced parts are Rosenberg glottal pulses (F0 gliding down from
    about 175 Hz to 105 Hz in each phrase, with stress bumps, 1 % period
    jitter and 6 % amplitude shimmer) through four cascaded time-varying
    resonators; fricatives are band-passed noise within about 2-8 kHz
    (the hissed "s" 4-8 kHz) and the bursts of stop consonants 0.5-7 kHz.
    The result passes a paging-loudspeaker band (140 Hz to 6.5 kHz, steep
    above) and a reverberant hall, and gets a faint 50 Hz hum (-60 dBFS),
    sub-50 Hz rumble and room tone, added after scaling.

    Parameters
    ----------
    fs : int, optional
        Sample rate, Hz.
    duration_s : float, optional
        Length, seconds.
    seed : int, optional
        Seed of the ``numpy.random.default_rng`` used for every random draw.

    Returns
    -------
    numpy.ndarray
        Float signal, shape ``(n,)``, already scaled to the target peak.
    """
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * fs))

    # --- Timeline of segments --------------------------------------------
    voice_amp = np.zeros(n)
    noise_gates = {name: np.zeros(n) for name in NOISES}
    targets_t: list[float] = []
    targets_f: list[tuple[float, float, float]] = []
    f0_t: list[float] = []
    f0_v: list[float] = []
    t = 1.6
    pause_after = (0.42, 0.38, 0.0)
    phrase_f0 = ((176.0, 108.0), (168.0, 104.0), (160.0, 102.0))
    for p, phrase in enumerate(PHRASES):
        phrase_start = t
        stress_times = []
        for s, (onset, vowel, stressed) in enumerate(phrase):
            if onset in ("p", "t", "k"):
                t += CLOSURE_S
            if onset is not None and onset != "m":
                length = NOISES[onset][3] * rng.uniform(0.85, 1.15)
                k0, k1 = int(t * fs), int((t + length) * fs)
                ramp = 0.003 if length < 0.03 else 0.02
                noise_gates[onset][k0:k1] += gate_envelope(k1 - k0, fs, ramp, min(ramp * 2, length / 2))
                t += length * (0.6 if length < 0.03 else 0.8)  # vowel overlaps the end
            elif onset == "m":
                length = 0.06 * rng.uniform(0.9, 1.1)
                k0, k1 = int(t * fs), int((t + length) * fs)
                murmur = 0.3 * gate_envelope(k1 - k0, fs, 0.015, 0.005)
                voice_amp[k0:k1] = np.maximum(voice_amp[k0:k1], murmur)
                targets_t.append(t + length / 2)
                targets_f.append(NASAL_FORMANTS)
                t += length
            else:
                t += 0.02
            vdur = (0.19 if stressed else 0.13) * rng.uniform(0.9, 1.1)
            if s == len(phrase) - 1:
                vdur *= 1.45
            k0, k1 = int(t * fs), int((t + vdur) * fs)
            if stressed:
                level = 1.0 if not stress_times else 0.75  # phrase-initial accent
            else:
                level = 0.5
            voice_amp[k0:k1] = np.maximum(voice_amp[k0:k1], level * gate_envelope(k1 - k0, fs, 0.025, 0.045))
            targets_t.append(t + vdur / 2)
            targets_f.append(VOWELS[vowel])
            if stressed:
                stress_times.append(t + vdur * 0.4)
            t += vdur
        phrase_end = t
        hi, lo = phrase_f0[p]
        for tt in np.linspace(phrase_start - 0.05, phrase_end + 0.05, 40):
            frac = (tt - phrase_start) / max(phrase_end - phrase_start, 1e-9)
            f = hi + (lo - hi) * np.clip(frac, 0.0, 1.0)
            f += sum(14.0 * np.exp(-(((tt - ts) / 0.07) ** 2)) for ts in stress_times)
            f0_t.append(float(tt))
            f0_v.append(float(np.clip(f, 100.0, 180.0)))
        t += pause_after[p]

    time = np.arange(n) / fs
    # Formant tracks: linear between targets, smoothed over 25 ms.
    box = np.ones(int(0.025 * fs)) / int(0.025 * fs)
    tracks = []
    for i in range(3):
        track = np.interp(time, targets_t, [f[i] for f in targets_f])
        padded = np.pad(track, len(box), mode="edge")
        tracks.append(np.convolve(padded, box, mode="same")[len(box) : -len(box)])
    tracks.append(np.full(n, F4_HZ))

    # --- Voiced excitation: glottal pulses with jitter and shimmer -------
    f0_track = np.interp(time, f0_t, f0_v)
    source = np.zeros(n)
    pos = f0_t[0] * fs
    last = f0_t[-1] * fs
    while pos < last:
        k = int(pos)
        period = (1.0 / f0_track[k]) * (1.0 + 0.01 * rng.standard_normal())
        amp = voice_amp[k] * (1.0 + 0.06 * rng.standard_normal())
        if amp > 1e-4:
            add_into(source, k, amp * glottal_pulse(period, fs, pos - k))
        pos += period * fs
    breath = fft_filter(rng.standard_normal(n), fs, lambda f: butterworth_highpass_mag(f, 1500.0, 2))
    source += 0.04 * voice_amp * breath
    voiced = resonator_cascade(source, fs, np.array(tracks), BANDWIDTHS)

    # --- Fricatives and bursts -----------------------------------------
    voiced_rms = np.sqrt(np.mean(voiced[voice_amp > 0.5] ** 2))
    speech = voiced.copy()
    for name, (hp, lp, level_db, _) in NOISES.items():
        gate = noise_gates[name]
        if not np.any(gate):
            continue
        band = fft_filter(
            rng.standard_normal(n), fs,
            lambda f, hp=hp, lp=lp: butterworth_highpass_mag(f, hp, 4) * butterworth_lowpass_mag(f, lp, 4),
        )
        speech += voiced_rms * db_to_gain(level_db) * gate * band / np.std(band)

    # --- Paging chain and hall ------------------------------------------
    program = speech / np.max(np.abs(speech)) + 0.25 * chime(fs, n)

    def paging_band(f: np.ndarray) -> np.ndarray:
        horn = 1.0 + 0.4 * np.exp(-(((f - 2500.0) / 900.0) ** 2))
        return butterworth_highpass_mag(f, 140.0, 3) * butterworth_lowpass_mag(f, 6500.0, 6) * horn

    program = fft_filter(program, fs, paging_band)
    ir = room_impulse(
        fs, rng, length_s=1.8, predelay_s=0.02, rt60_low_s=1.4, rt60_high_s=0.8, split_hz=2500.0,
        early=((0.011, 0.45), (0.019, 0.35), (0.031, 0.25)),
    )
    program = program + 0.22 * fft_convolve(program, ir)
    program *= db_to_gain(TARGET_PEAK_DBFS) / np.max(np.abs(program))

    # --- Hall background, at absolute levels ----------------------------
    sine_rms = 1.0 / np.sqrt(2.0)
    hum = sum(
        db_to_gain(level) * np.sin(TWO_PI * f * time + rng.uniform(0.0, TWO_PI))
        for f, level in ((50.0, -60.0), (100.0, -72.0), (150.0, -70.0))
    )
    rumble = fft_filter(
        rng.standard_normal(n), fs,
        lambda f: butterworth_lowpass_mag(f, 40.0, 2) * butterworth_highpass_mag(f, 12.0, 2),
    )
    rumble *= sine_rms * db_to_gain(-66.0) / np.std(rumble)
    room = fft_filter(
        rng.standard_normal(n), fs,
        lambda f: butterworth_highpass_mag(f, 120.0, 2) * butterworth_lowpass_mag(f, 5000.0, 2),
    )
    room *= sine_rms * db_to_gain(-72.0) / np.std(room)
    out = program + hum + rumble + room

    fade_in = int(0.01 * fs)
    fade_out = int(0.3 * fs)
    out[:fade_in] *= raised_cosine_ramp(fade_in)
    out[-fade_out:] *= raised_cosine_ramp(fade_out)[::-1]
    return out


# ---------------------------------------------------------------------------
# Quantisation, checks and writing
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Clip:
    """A clip ready to be written.

    Attributes
    ----------
    name : str
        File name inside the output folder.
    samplerate : int
        Sample rate, Hz.
    samples : numpy.ndarray
        Integer samples, shape ``(n, channels)``, dtype ``int16``.
    subtype : str
        soundfile subtype (``"PCM_16"``).
    seed : int
        Seed the clip was generated with.
    title : str
        Title stored in the FLAC tags.
    """

    name: str
    samplerate: int
    samples: np.ndarray
    subtype: str
    seed: int
    title: str

    @property
    def floats(self) -> np.ndarray:
        """Samples as floats with full scale 1.0, shape ``(n, channels)``."""
        return self.samples.astype(np.float64) / 32768.0


def quantise_pcm16(x: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Scale to the target peak and quantise to 16 bits with TPDF dither.

    Parameters
    ----------
    x : numpy.ndarray
        Float signal, shape ``(n,)`` or ``(n, channels)``.
    rng : numpy.random.Generator
        Source of the dither.

    Returns
    -------
    numpy.ndarray
        ``int16`` samples, shape ``(n, channels)``.

    Raises
    ------
    ValueError
        If any sample would clip.
    """
    frames = x.reshape(x.shape[0], -1)
    scaled = frames * (db_to_gain(TARGET_PEAK_DBFS) / np.max(np.abs(frames))) * 32768.0
    dither = rng.uniform(-0.5, 0.5, scaled.shape) + rng.uniform(-0.5, 0.5, scaled.shape)
    q = np.round(scaled + dither)
    if np.max(q) > 32767 or np.min(q) < -32768:
        raise ValueError("quantised signal would clip")
    return q.astype(np.int16)


def check_clip(clip: Clip) -> None:
    """Check duration, peak and RMS of a clip against the project's limits.

    Parameters
    ----------
    clip : Clip
        The clip to check.

    Raises
    ------
    ValueError
        If a limit is not met.
    """
    duration = clip.samples.shape[0] / clip.samplerate
    peak = peak_dbfs(clip.floats)
    rms = rms_dbfs(clip.floats)
    problems = []
    if not DURATION_LIMITS_S[0] <= duration <= DURATION_LIMITS_S[1]:
        problems.append(f"duration {duration:.2f} s")
    if not PEAK_LIMITS_DBFS[0] <= peak <= PEAK_LIMITS_DBFS[1]:
        problems.append(f"peak {peak:.2f} dBFS")
    if not RMS_LIMITS_DBFS[0] <= rms <= RMS_LIMITS_DBFS[1]:
        problems.append(f"rms {rms:.2f} dBFS")
    if problems:
        raise ValueError(f"{clip.name}: out of limits: {', '.join(problems)}")


def write_clip(clip: Clip, outdir: Path) -> Path:
    """Write a clip as FLAC atomically (temporary file, then ``os.replace``).

    Parameters
    ----------
    clip : Clip
        The clip to write.
    outdir : pathlib.Path
        Output folder (created if missing).

    Returns
    -------
    pathlib.Path
        Path of the written file.

    Raises
    ------
    ValueError
        If the encoded file is larger than ``MAX_FILE_BYTES``.
    """
    outdir.mkdir(parents=True, exist_ok=True)
    target = outdir / clip.name
    fd, tmp_name = tempfile.mkstemp(prefix=f".{clip.name}.", suffix=".tmp", dir=outdir)
    os.close(fd)
    try:
        with sf.SoundFile(
            tmp_name, mode="w", samplerate=clip.samplerate, channels=clip.samples.shape[1],
            format="FLAC", subtype=clip.subtype,
        ) as f:
            f.title = clip.title
            f.comment = (
                "Synthetic demo program for audiobw, made by clips/make_clips.py "
                f"(seed {clip.seed}). Not a recording."
            )
            f.write(clip.samples)
        size = os.path.getsize(tmp_name)
        if size > MAX_FILE_BYTES:
            raise ValueError(f"{clip.name}: {size} bytes exceeds {MAX_FILE_BYTES}")
        os.chmod(tmp_name, 0o644)  # mkstemp creates the file owner-only
        os.replace(tmp_name, target)
    except BaseException:
        if os.path.exists(tmp_name):
            os.remove(tmp_name)
        raise
    return target


def build_clips() -> list[Clip]:
    """Synthesise, quantise and check every clip.

    Returns
    -------
    list of Clip
        The clips, in writing order.
    """
    ensemble = make_ensemble(seed=ENSEMBLE_SEED)
    announcement = make_announcement(seed=ANNOUNCEMENT_SEED)
    clips = [
        Clip(
            name="ensemble-48k-stereo.flac",
            samplerate=48000,
            samples=quantise_pcm16(ensemble, np.random.default_rng(ENSEMBLE_SEED + 1)),
            subtype="PCM_16",
            seed=ENSEMBLE_SEED,
            title="Invented chamber group in a small timber hall (synthetic)",
        ),
        Clip(
            name="announcement-44k1-mono.flac",
            samplerate=44100,
            samples=quantise_pcm16(announcement, np.random.default_rng(ANNOUNCEMENT_SEED + 1)),
            subtype="PCM_16",
            seed=ANNOUNCEMENT_SEED,
            title="Boarding call at an invented ferry terminal (synthetic)",
        ),
    ]
    for clip in clips:
        check_clip(clip)
    return clips


def describe(clip: Clip, path: Path) -> str:
    """One printable line of facts about a written clip.

    Parameters
    ----------
    clip : Clip
        The clip.
    path : pathlib.Path
        Where it was written.

    Returns
    -------
    str
        Name, rate, channels, duration, peak, RMS, size, SHA-256 and the
        spectral summary.
    """
    x = clip.floats
    fractions = spectral_summary(x, clip.samplerate)
    digest = hashlib.sha256(path.read_bytes()).hexdigest()
    bands = "  ".join(
        f"{label} {100.0 * frac:6.3f}%"
        for label, frac in zip(("<100 Hz", "100 Hz-4 kHz", "4-10 kHz", ">10 kHz"), fractions)
    )
    return (
        f"{clip.name}\n"
        f"  rate {clip.samplerate} Hz, channels {clip.samples.shape[1]}, {clip.subtype}, "
        f"duration {clip.samples.shape[0] / clip.samplerate:.3f} s\n"
        f"  peak {peak_dbfs(x):.2f} dBFS, rms {rms_dbfs(x):.2f} dBFS (re full-scale sine), "
        f"size {path.stat().st_size} bytes\n"
        f"  power: {bands}\n"
        f"  sha256 {digest}"
    )


def main(argv: list[str] | None = None) -> int:
    """Command-line entry point.

    Parameters
    ----------
    argv : list of str, optional
        Arguments (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        Exit status, 0 on success.
    """
    parser = argparse.ArgumentParser(description="Generate audiobw's synthetic demo clips.")
    parser.add_argument(
        "--outdir", type=Path, default=Path(__file__).resolve().parent,
        help="output folder (default: the folder holding this script)",
    )
    args = parser.parse_args(argv)
    for clip in build_clips():
        path = write_clip(clip, args.outdir)
        print(describe(clip, path))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
