"""The decimating low-pass behind the fine low-frequency PSD (audiobw.decimate).

Its stopband and passband are measured on a 2²⁰-point numpy FFT of the taps;
its streaming output is checked against numpy.convolve of the whole signal
(the time-domain definition), for any way the program is cut into blocks; the
fine PSD against scipy.signal.welch at the full rate is in tests/test_lowfreq.py.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import signal

from audiobw.decimate import STOPBAND_DB, Decimator, LowBandWelch, StreamingDecimator

TOP = 560.0


def _measured(dec: Decimator):
    n = 1 << 20
    h = np.abs(np.fft.rfft(dec.taps, n))
    f = np.fft.rfftfreq(n, 1.0 / dec.fs_hz)
    return f, h


@pytest.mark.parametrize("fs,factor", [(8000, 2), (16000, 4), (44100, 8), (48000, 16), (96000, 32), (192000, 64)])
def test_the_low_pass_keeps_the_band_and_stops_what_would_fold_into_it(fs, factor):
    dec = Decimator(fs, TOP)
    assert dec.factor == factor  # the low rate is at least 5 × 560 Hz
    f, h = _measured(dec)
    low = fs / factor
    # Kaiser's length estimate for 150 dB (Kaiser 1974) lands within 5 dB of it
    assert 20 * np.log10(h[f >= low - TOP].max()) < -(STOPBAND_DB - 5.0)
    # the passband within 3e-7 of unity, and gain2 is that response (divided out of the PSD)
    keep = f <= TOP
    assert np.abs(h[keep] ** 2 - 1.0).max() < 3e-7
    np.testing.assert_allclose(dec.gain2(f[keep]), h[keep] ** 2, rtol=0, atol=1e-14)
    # linear phase with the delay on a low-rate sample: symmetric taps, half length a multiple of the factor
    np.testing.assert_array_equal(dec.taps, dec.taps[::-1])
    assert dec.half % factor == 0


def test_a_low_rate_too_close_to_the_band_is_not_decimated():
    assert Decimator(5000.0, TOP).factor == 1
    np.testing.assert_array_equal(Decimator(5000.0, TOP).gain2(np.array([0.0, 100.0])), [1.0, 1.0])


@given(cuts=st.lists(st.integers(1, 9000), min_size=1, max_size=6), seed=st.integers(0, 2**16))
@settings(max_examples=25, deadline=None)
def test_streaming_output_is_the_convolution_sampled_at_the_input_samples(cuts, seed):
    """Low-rate sample m is Σᵢ h[i]·x[D·m + M − i] (x zero outside the program), however the
    program is cut into blocks, to what the stopband passes: the decimation folds only the
    bins below the low rate, the rest (≥ 145 dB down) is left out (measured: 1.3e-8 of the rms)."""
    fs = 48000
    dec = Decimator(fs, TOP)
    d, m = dec.factor, dec.half
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((2, 20000))
    stream = StreamingDecimator(dec, 2)
    parts, start = [], 0
    for c in sorted(set(cuts)) + [x.shape[1]]:
        if c > start:
            parts.append(stream.push(x[:, start:c]))
            start = c
    parts.append(stream.finish())
    got = np.concatenate(parts, axis=1)
    # the reference: the full convolution, then the zero-delay samples at every D-th input sample
    full = np.array([np.convolve(row, dec.taps) for row in x])  # full[n] = Σ h[i] x[n − i]
    idx = np.arange(0, x.shape[1], d) + m
    want = full[:, idx]
    assert got.shape[1] >= want.shape[1]
    np.testing.assert_allclose(got[:, : want.shape[1]], want, rtol=0, atol=10 ** (-(STOPBAND_DB - 5) / 20) * x.std())


def test_low_band_welch_counts_the_segments_of_the_full_rate_and_matches_its_bins():
    """Segments that end within the program, as at the full rate; a 37 Hz tone in white noise
    against scipy.signal.welch at the full rate (Hann, 50 % overlap, density), every kept bin."""
    fs, nfine = 48000, 32768
    rng = np.random.default_rng(4)
    n = 17 * nfine // 2 + 777
    x = 0.3 * np.sin(2 * np.pi * 37.0 * np.arange(n) / fs) + 0.01 * rng.standard_normal(n)
    n_keep = int(np.ceil(TOP * nfine / fs)) + 1
    lb = LowBandWelch(fs, 1, nfine, n_keep, TOP)
    for start in range(0, n, 50000):
        lb.push(x[None, start : start + 50000])
    psd, segments = lb.finish(n)
    assert segments == (n - nfine) // (nfine // 2) + 1
    _, pw = signal.welch(x, fs=fs, window="hann", nperseg=nfine, noverlap=nfine // 2, detrend=False)
    np.testing.assert_allclose(psd[0, 1:], pw[1:n_keep], rtol=1e-6)
    assert psd[0, 0] == pytest.approx(2 * pw[0], rel=1e-6)  # DC doubled, as the analysis keeps it


@pytest.mark.parametrize("fs", [11025, 32000, 88200, 384000])
def test_low_band_welch_at_other_rates_with_a_tone_where_images_would_fold(fs):
    """A 41.3 Hz tone, white noise and a strong tone at 0.37·fs (far above the kept band, where
    only the stopband stands between it and an alias): every kept bin within 1e-6 of
    scipy.signal.welch at the full rate."""
    from audiobw.segments import fine_length, frame_lengths

    n = fs * 20
    nper, _ = frame_lengths(fs, n)
    nfine = fine_length(fs, nper, n)
    assert nfine > nper
    t = np.arange(n) / fs
    rng = np.random.default_rng(fs)
    x = 0.3 * np.sin(2 * np.pi * 41.3 * t) + 0.2 * np.sin(2 * np.pi * 0.37 * fs * t) + 0.01 * rng.standard_normal(n)
    n_keep = int(np.ceil(TOP * nfine / fs)) + 1
    lb = LowBandWelch(fs, 1, nfine, n_keep, TOP)
    assert lb.dec.factor > 1
    for start in range(0, n, 100000):
        lb.push(x[None, start : start + 100000])
    psd, _ = lb.finish(n)
    _, pw = signal.welch(x, fs=fs, window="hann", nperseg=nfine, noverlap=nfine // 2, detrend=False)
    np.testing.assert_allclose(psd[0, 1:], pw[1:n_keep], rtol=1e-6)
