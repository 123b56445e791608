"""The analysis pass: Welch PSD golden tests, levels, occupied bandwidth, streaming."""

import math

import numpy as np
import pytest
from scipy import signal

from audiobw.errors import AudioFileError
from audiobw.spectrum import analyse, frame_lengths, occupied_band

from .conftest import tones


def test_white_noise_psd_integrates_to_its_variance(write_audio, rng):
    # scipy.signal.welch(scaling='density') convention: sum(psd)·df = variance
    # (golden test from the welch scaling pitfalls, scipy#8651)
    fs = 48000
    x = rng.normal(0.0, 0.1, (fs * 6, 1))
    a = analyse(write_audio("white.wav", x, fs))
    assert np.sum(a.psd * a.weights_hz) == pytest.approx(0.01, rel=0.01)
    # flat: a white density of σ²/(fs/2)
    mid = a.psd[(a.freqs_hz > 100) & (a.freqs_hz < 23000)]
    assert np.mean(mid) == pytest.approx(0.01 / (fs / 2), rel=0.01)


@pytest.mark.parametrize("freq", [997.0, 1000.0, 12345.6])
def test_sine_power_is_a_squared_over_two(write_audio, freq):
    fs = 48000
    amp = 0.5
    a = analyse(write_audio("sine.wav", tones([freq], [amp], fs, 4.0)[:, None], fs))
    assert np.sum(a.psd * a.weights_hz) == pytest.approx(amp**2 / 2, rel=2e-3)
    assert a.rms_dbfs == pytest.approx(20 * math.log10(amp), abs=0.01)  # AES17: FS sine = 0 dBFS
    assert a.peak_dbfs == pytest.approx(20 * math.log10(amp), abs=0.01)


def test_psd_matches_scipy_welch(write_audio, rng):
    fs = 44100
    sos = signal.butter(4, [300, 5000], btype="bandpass", fs=fs, output="sos")
    x = signal.sosfilt(sos, rng.standard_normal(fs * 5)) * 0.2
    path = write_audio("band.wav", x[:, None], fs)
    a = analyse(path)
    import soundfile as sf

    x = sf.read(str(path))[0]  # the float32 samples actually stored
    # scipy.signal.welch with the same segment, Hann window, 50 % overlap, no detrending
    f, p = signal.welch(
        x, fs=fs, window="hann", nperseg=a.nperseg, noverlap=a.nperseg // 2, detrend=False, scaling="density"
    )
    np.testing.assert_allclose(a.freqs_hz, f)
    np.testing.assert_allclose(a.psd, p, rtol=1e-6, atol=1e-12 * p.max())


def test_streaming_matches_one_block(write_audio, rng):
    fs = 48000
    x = rng.standard_normal((fs * 3 + 1234, 2)) * 0.1
    path = write_audio("st.wav", x, fs)
    big = analyse(path, blocksize=1 << 22)
    small = analyse(path, blocksize=1000)
    np.testing.assert_allclose(small.psd_channels, big.psd_channels, rtol=1e-10)
    np.testing.assert_allclose(small.band_frames, big.band_frames, rtol=1e-10)
    assert small.frames == big.frames == x.shape[0]


def test_channels_are_power_averaged(write_audio):
    fs = 48000
    left = tones([1000.0], [0.5], fs, 2.0)
    x = np.stack([left, np.zeros_like(left)], axis=1)
    a = analyse(write_audio("lr.wav", x, fs))
    assert np.sum(a.psd * a.weights_hz) == pytest.approx(0.5**2 / 2 / 2, rel=2e-3)
    assert np.sum(a.psd_channels[1]) == 0.0


def test_band_summary_sums_to_the_power(write_audio, rng):
    fs = 48000
    x = rng.normal(0, 0.1, (fs * 4, 1))
    a = analyse(write_audio("w.wav", x, fs))
    # each short frame's band powers add up to the frame's power (Hann-windowed estimate)
    assert np.mean(a.band_frames.sum(axis=1)) == pytest.approx(0.01, rel=0.02)
    assert a.band_frames.shape[1] == len(a.band_edges_hz) - 1


def test_occupied_band_of_flat_spectrum_is_known():
    # A flat PSD over 1 kHz…5 kHz: 99 % of the power lies between 1020 Hz and
    # 4980 Hz (0.5 % of 4 kHz = 20 Hz each side; ITU-R SM.328 §1.1.2)
    f = np.arange(0, 24001, 1.0)
    psd = ((f >= 1000) & (f <= 5000)).astype(float)
    w = np.ones_like(f)
    lo, hi = occupied_band(f, psd, w, 0.99)
    assert lo == pytest.approx(1020.0, abs=1.0) and hi == pytest.approx(4980.0, abs=1.0)


def test_occupied_bandwidth_of_lowpass_noise(write_audio, rng):
    # White noise through an ideal (FFT brick-wall) lowpass at 6 kHz: the
    # 99 % band is 0.5 % of 6 kHz from each edge: 30 Hz to 5970 Hz.
    fs = 48000
    n = fs * 8
    spec = np.fft.rfft(rng.standard_normal(n))
    fr = np.fft.rfftfreq(n, 1 / fs)
    spec[fr > 6000] = 0
    x = np.fft.irfft(spec, n) * 0.05
    a = analyse(write_audio("lp.wav", x[:, None], fs))
    lo, hi = a.occupied_band_hz()
    assert lo == pytest.approx(30.0, abs=8.0)
    assert hi == pytest.approx(5970.0, abs=15.0)


@pytest.mark.parametrize("fs", [8000, 22050, 44100, 96000, 192000, 384000])
def test_frame_lengths_scale_with_rate(fs):
    nper, nshort = frame_lengths(fs)
    assert fs / nper <= 3.0
    assert 0.025 < nshort / fs < 0.065


def test_short_file_is_refused(write_audio):
    with pytest.raises(AudioFileError, match="shorter than one analysis frame"):
        analyse(write_audio("short.wav", np.full((100, 1), 0.1), 48000))


def test_digital_silence_is_refused(write_audio):
    with pytest.raises(AudioFileError, match="digital silence"):
        analyse(write_audio("silent.wav", np.zeros((48000, 1)), 48000))


def test_nan_is_refused(write_audio):
    x = np.full((48000, 1), 0.1)
    x[30000] = np.nan
    with pytest.raises(AudioFileError, match="NaN or infinite sample at frame 30000"):
        analyse(write_audio("nan.wav", x, 48000))


def test_frame_buffer_stays_bounded(write_audio, monkeypatch, rng):
    import audiobw.spectrum as sp

    monkeypatch.setattr(sp, "MAX_FRAMES", 16)
    fs = 8000
    a = analyse(write_audio("long.wav", rng.standard_normal((fs * 20, 1)) * 0.1, fs))
    assert 8 <= a.band_frames.shape[0] <= 16
    assert a.frame_stride > 1


@pytest.mark.parametrize("m", [1, 2, 3, 255, 256, 2048, 16384])
def test_hann_window_is_scipy_bit_for_bit(m):
    from audiobw.spectrum import hann_periodic

    # reference: scipy.signal.get_window('hann', m) (periodic, fftbins=True)
    assert np.array_equal(hann_periodic(m), signal.get_window("hann", m))


def test_fine_psd_in_a_helper_thread_is_bit_identical(write_audio, rng, monkeypatch):
    """The fine low-frequency PSD computed in its helper thread (default) and inline
    (AUDIOBW_THREADS=1, as batch workers that fill the cores run it) are the same bits."""
    fs = 48000
    x = rng.standard_normal((fs * 13 + 777, 2)) * 0.1
    path = write_audio("fine.wav", x, fs)
    threaded = analyse(path, blocksize=40000)
    monkeypatch.setenv("AUDIOBW_THREADS", "1")
    inline = analyse(path, blocksize=40000)
    assert threaded.fine_nperseg > 0 and threaded.meta["fine_welch_segments"] >= 16
    assert threaded.fine_psd.tobytes() == inline.fine_psd.tobytes()
    assert threaded.psd_channels.tobytes() == inline.psd_channels.tobytes()
    # and against one block (no carries): the same sums up to rounding
    whole = analyse(path, blocksize=1 << 22)
    np.testing.assert_allclose(threaded.fine_psd, whole.fine_psd, rtol=1e-10)


def test_with_helper_threads_off_the_blocks_are_decoded_in_line(monkeypatch):
    """``AUDIOBW_THREADS=1`` (a batch worker, one core): each block is produced, and prepared, in
    the consuming thread; with threads on, in the decode thread."""
    import threading

    from audiobw.background import prefetched

    def blocks():
        for i in range(3):
            yield threading.get_ident(), i

    def prepare(item):
        return item[0], item[1], threading.get_ident()

    me = threading.get_ident()
    monkeypatch.setenv("AUDIOBW_THREADS", "1")
    assert [x[1] for x in prefetched(blocks(), prepare=prepare)] == [0, 1, 2]
    assert all(made == me and prepared == me for made, _, prepared in prefetched(blocks(), prepare=prepare))
    monkeypatch.delenv("AUDIOBW_THREADS")
    assert all(made != me and prepared != me for made, _, prepared in prefetched(blocks(), prepare=prepare))
