"""Low decades: loss and SNR of 20–50 Hz highpass decisions against exact filtering.

The normal Welch PSD (≈3 Hz bins, Hann) smears a 40 Hz tone over ±6 Hz; against
a steep highpass the power-averaged gain is then off by most of a dB.  The
analysis keeps a fine low-frequency PSD (≈0.4 Hz) from the same streaming pass and
the scorer integrates loss and SNR on a grid that uses it below the crossover.
Every figure here is checked against an independent time-domain computation
(scipy.signal filtering of the samples) or the exact response at a steady tone.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf
from hypothesis import given, settings as hsettings, strategies as st
from scipy import signal

from audiobw.chain import Chain
from audiobw.filters import FilterSpec, design
from audiobw.metrics import Meter, Scorer
from audiobw.spectrum import analyse
from audiobw.sweep import Grid, run_sweep

FS = 48000
SECONDS = 45.0  # the full fine resolution (131072 samples at 48 kHz) needs 16 segments: 43.7 s
QUIET = dict(source_ohms=0.0, en_v_rthz=0.0, in_a_rthz=0.0, bits=32, dither="none")
#: the goal of the fine grid: 20–50 Hz highpass decisions within 0.1 dB of exact filtering
TOL_DB = 0.1
#: a common period of 25, 40, 60 and 1000 Hz (5, 8, 12 and 200 cycles): a time
#: average over whole multiples of it has no cross terms between the tones
COMMON_PERIOD = int(0.2 * FS)


def _tones(freqs, amps, seconds=SECONDS, seed=7):
    rng = np.random.default_rng(seed)
    t = np.arange(int(round(FS * seconds))) / FS
    return sum(a * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi)) for f, a in zip(freqs, amps))


@pytest.fixture(scope="module")
def low_tones(tmp_path_factory):
    """Stereo, 45 s: a 40 Hz tone with weaker 25 and 60 Hz tones and a 1 kHz tone (program above the crossover)."""
    freqs, amps = (25.0, 40.0, 60.0, 1000.0), (0.1, 0.5, 0.05, 0.02)
    left = _tones(freqs, amps, seed=1)
    right = _tones(freqs, amps, seed=2)
    path = tmp_path_factory.mktemp("lowfreq") / "low.wav"
    sf.write(str(path), np.stack([left, right], axis=1), FS, subtype="FLOAT")
    return path, freqs, amps, np.stack([left, right])


def _time_domain_loss_db(x: np.ndarray, sos: np.ndarray) -> float:
    """Loss of the filtered samples: scipy.signal.sosfilt, the start-up transient
    (first 5 s) dropped, mean squares over whole common periods of the tones."""
    y = signal.sosfilt(sos, x, axis=-1)
    start = 5 * FS
    n = (x.shape[-1] - start) // COMMON_PERIOD * COMMON_PERIOD
    xin = x[..., start : start + n]
    yout = y[..., start : start + n]
    return 10 * math.log10(float(np.mean(xin**2)) / float(np.mean(yout**2)))


@pytest.mark.parametrize("fc", [20.0, 30.0, 40.0, 50.0])
def test_butterworth8_highpass_loss_matches_time_domain_filtering(low_tones, fc):
    path, _, _, x = low_tones
    r = run_sweep(
        path, chain=Chain(**QUIET), grid=Grid("highpass", ("butterworth",), (8,), (fc,)), targets={"max_loss_db": 1.0}
    )
    row = r.cases[0]
    # reference: scipy.signal.butter(8, fc, 'highpass', fs=48000, output='sos') (bilinear; the
    # frequency warping at 50 Hz is tan(π·50/48000)/(π·50/48000) − 1 ≈ 4e-6) run by sosfilt
    sos = signal.butter(8, fc, "highpass", fs=FS, output="sos")
    ref = _time_domain_loss_db(x, sos)
    assert row["loss_db"] == pytest.approx(ref, abs=TOL_DB)
    # the 40 Hz tone through the 50 Hz highpass alone: the case (3 Hz grid: 14.82 dB)
    if fc == 50.0:
        b, a = signal.butter(8, 2 * np.pi * fc, "highpass", analog=True)
        g40 = float(np.abs(signal.freqs(b, a, [2 * np.pi * 40.0])[1][0]) ** 2)  # scipy.signal.freqs
        assert -10 * math.log10(g40) == pytest.approx(15.63, abs=0.01)


def test_loss_of_every_family_is_the_exact_response_at_the_tones(low_tones):
    path, freqs, amps, _ = low_tones
    fams = ("butterworth", "bessel", "chebyshev1", "elliptic")
    r = run_sweep(
        path,
        chain=Chain(**QUIET),
        grid=Grid("highpass", fams, (2, 4, 8), (20.0, 32.0, 50.0)),
        targets={"max_loss_db": 1.0},
    )
    p_in = sum(a * a / 2 for a in amps)
    worst = 0.0
    for row in r.cases:
        filt = design(
            FilterSpec(
                "highpass",
                row["family"],
                row["order"],
                row["design_low_hz"],
                None,
                r.grid.ripple_db,
                r.grid.stopband_db,
                "analog",
                FS,
            )
        )
        # exact |H(f)|² at each steady tone: scipy.signal.freqs_zpk on the designed prototype
        w = 2 * np.pi * np.asarray(freqs) / filt.ref_rad_s
        g = np.abs(signal.freqs_zpk(filt.z, filt.p, filt.k, worN=w)[1]) ** 2
        exact = 10 * math.log10(p_in / sum(a * a / 2 * gi for a, gi in zip(amps, g)))
        worst = max(worst, abs(row["loss_db"] - exact))
    assert worst <= TOL_DB


def test_normal_grid_alone_smears_the_40_hz_tone(tmp_path):
    # the case of the issue, on the normal (≈3 Hz) grid and on the scoring grid: the check
    # above can fail, and the fine grid is what passes it
    x = _tones([40.0], [0.5])
    path = tmp_path / "t40.wav"
    sf.write(str(path), x, FS, subtype="FLOAT")
    a = analyse(path)
    filt = design(FilterSpec("highpass", "butterworth", 8, 50.0, None))
    exact = -10 * math.log10(float(filt.power_response(40.0)))
    normal = 10 * math.log10(
        np.sum(a.psd * a.weights_hz) / np.sum(a.psd * a.weights_hz * filt.power_response(a.freqs_hz))
    )
    assert exact - normal > 0.5  # 3 Hz grid: 14.82 dB against 15.63 dB
    f, p, w, _ = a.scoring_grid()
    fine = 10 * math.log10(np.sum(p * w) / np.sum(p * w * filt.power_response(f)))
    assert fine == pytest.approx(exact, abs=0.02)


def test_snr_follows_the_program_out(low_tones):
    # SNR = program out / modelled noise; with the noise model unchanged, the program out is
    # checked against the filtered samples (scipy.signal.sosfilt as above)
    path, _, _, x = low_tones
    # a highpass's noise needs a bound: the ideal anti-alias filter (the default 'none' refuses it)
    chain = Chain(source_ohms=150.0, en_v_rthz=1e-9, bits=24, anti_alias="ideal")
    fc = 45.0
    r = run_sweep(path, chain=chain, grid=Grid("highpass", ("butterworth",), (8,), (fc,)), targets={"min_snr_db": 0})
    row = r.cases[0]
    sos = signal.butter(8, fc, "highpass", fs=FS, output="sos")
    y = signal.sosfilt(sos, x, axis=-1)[:, 5 * FS :]
    y = y[:, : y.shape[1] // COMMON_PERIOD * COMMON_PERIOD]
    p_out_v2 = float(np.mean(y**2)) * chain.volts_per_unit**2
    ref = 10 * math.log10(p_out_v2 / row["noise_vrms"] ** 2)
    assert row["snr_db"] == pytest.approx(ref, abs=TOL_DB)


def _a_weighting_db(f):
    # IEC 61672-1:2013 Annex E, eq. E.6 with the pole frequencies of E.1-E.4 and A1000 = −2.000 dB
    # (own code, independent of audiobw.weighting); Table 3 gives −50.5 dB at 20 Hz (one decimal)
    f1, f2, f3, f4 = 20.598997, 107.65265, 737.86223, 12194.217
    ra = f4**2 * f**4 / ((f**2 + f1**2) * math.sqrt((f**2 + f2**2) * (f**2 + f3**2)) * (f**2 + f4**2))
    return 20 * math.log10(ra) + 2.0


def test_a_weighted_20_hz_tone(tmp_path):
    # snr_a − snr = 10·lg(A-weighted program out / program out) − (the same for the noise); the
    # noise term cancels between a 20 Hz and a 1 kHz tone scored through the same chain and filter
    assert _a_weighting_db(20.0) == pytest.approx(-50.5, abs=0.15)  # IEC 61672-1 Table 3
    assert _a_weighting_db(1000.0) == pytest.approx(0.0, abs=0.001)
    # a highpass's noise needs a bound: the ideal anti-alias filter (the default 'none' refuses it)
    chain = Chain(source_ohms=150.0, en_v_rthz=1e-9, bits=24, anti_alias="ideal")
    grid = Grid("lowpass", ("butterworth",), (2,), (20000.0,))
    diff = {}
    for f0 in (20.0, 1000.0):
        path = tmp_path / f"a{f0:g}.wav"
        sf.write(str(path), np.stack([_tones([f0], [0.25])] * 2, axis=1), FS, subtype="FLOAT")
        row = run_sweep(path, chain=chain, grid=grid, targets={"min_snr_db": 0}).cases[0]
        diff[f0] = row["snr_a_db"] - row["snr_db"]
    assert diff[20.0] - diff[1000.0] == pytest.approx(_a_weighting_db(20.0) - _a_weighting_db(1000.0), abs=TOL_DB)


def test_total_power_is_preserved(tmp_path):
    # tones (one in the crossover range) and white noise: the scoring grid holds the time-domain
    # mean square (numpy, channel mean) within 0.01 dB, and its widths add up to fs/2
    rng = np.random.default_rng(3)
    x = np.stack([_tones([40.0, 330.0, 1000.0], [0.3, 0.2, 0.1], seed=s) for s in (4, 5)])
    x += 0.02 * rng.standard_normal(x.shape)
    path = tmp_path / "mix.wav"
    sf.write(str(path), x.T, FS, subtype="FLOAT")
    a = analyse(path)
    f, p, w, k = a.scoring_grid()
    assert k > 0 and a.fine_nperseg >= 8 * a.nperseg
    assert 250.0 <= a.meta["crossover_hz"] <= 500.0
    assert abs(a.meta["crossover_hz"] - 330.0) > 20.0  # not on the tone
    assert np.sum(w) == pytest.approx(FS / 2, rel=1e-12)
    assert np.all(np.diff(f) > 0)
    ms = float(np.mean(x**2))
    assert 10 * math.log10(float(np.sum(p * w)) / ms) == pytest.approx(0.0, abs=0.01)
    # the fine PSD, below the crossover, holds what the normal one holds there (a steady
    # program: the two estimates differ only by leakage across the crossover)
    assert a.meta["fine_vs_normal_db"] == pytest.approx(0.0, abs=0.01)
    # and the sweep's full-band program power is that total (no case removes anything at 0 dB)
    sc = Scorer(a, Chain(**QUIET), Meter())
    assert sc._pre["x_total"] == pytest.approx(float(np.sum(p * w)) * Chain(**QUIET).volts_per_unit ** 2, rel=1e-12)


def test_fine_psd_streams_like_one_block(tmp_path):
    x = _tones([33.0, 47.0], [0.3, 0.3], seconds=20.0) + 0.01 * np.random.default_rng(9).standard_normal(20 * FS)
    x[4 * FS : 7 * FS] *= 0.1  # a level change: the time weights matter
    path = tmp_path / "s.wav"
    sf.write(str(path), x, FS, subtype="FLOAT")
    a = analyse(path, blocksize=1 << 17)
    b = analyse(path, blocksize=12345)
    assert a.fine_nperseg == b.fine_nperseg == 32768  # 20 s: 16 segments of 0.68 s
    np.testing.assert_allclose(a.fine_psd, b.fine_psd, rtol=1e-9)
    x = sf.read(str(path))[0]  # the samples as stored (32-bit float)
    # scipy.signal.welch at the same segment: Hann, 50 % overlap, no detrending, density;
    # the fine DC bin is doubled (for its half-width trapezoid weight).  The analysis takes
    # these transforms at a 16th of the rate after a 150 dB low-pass (audiobw.decimate), so
    # it agrees to what that stopband lets fold in (measured: 6e-8; 1e-6 is 4e-6 dB)
    n = a.fine_nperseg
    fw, pw = signal.welch(x, fs=FS, window="hann", nperseg=n, noverlap=n // 2, detrend=False, scaling="density")
    m = a.fine_psd.size
    np.testing.assert_allclose(a.fine_psd[1:], pw[1:m], rtol=1e-6, atol=1e-20)
    assert a.fine_psd[0] == pytest.approx(2 * pw[0], rel=1e-6)
    np.testing.assert_allclose(a.fine_freqs_hz, fw[:m])
    # the level change is weighed like the time domain: its power below 100 Hz is that of a
    # numpy periodogram of the whole file within 0.05 dB (−0.025 dB: the first and last half
    # segment weigh less)
    X = np.fft.rfft(x)
    fr = np.fft.rfftfreq(x.size, 1 / FS)
    p_true = (np.abs(X[0]) ** 2 + 2 * np.sum(np.abs(X[(fr > 0) & (fr < 100)]) ** 2)) / x.size**2
    fine = a.fine_psd * np.where(a.fine_freqs_hz == 0, 0.5, 1.0) * (a.fine_freqs_hz[1])
    assert 10 * math.log10(np.sum(fine[a.fine_freqs_hz < 100]) / p_true) == pytest.approx(0.0, abs=0.05)


def test_short_file_keeps_the_normal_grid(tmp_path):
    path = tmp_path / "short.wav"
    sf.write(str(path), _tones([40.0], [0.3], seconds=1.0), FS, subtype="FLOAT")
    a = analyse(path)
    f, p, w, k = a.scoring_grid()
    assert a.fine_nperseg == 0 and k == 0
    assert f is a.freqs_hz and p is a.psd and w is a.weights_hz


@pytest.fixture(scope="module")
def low_scorer(low_tones):
    return Scorer(analyse(low_tones[0]), Chain(source_ohms=150.0, en_v_rthz=1e-9, bits=24, anti_alias="ideal"), Meter())


@hsettings(max_examples=25, deadline=None)
@given(c1=st.floats(15.0, 80.0), c2=st.floats(15.0, 80.0), order=st.sampled_from([2, 4, 8]))
def test_a_lower_highpass_edge_never_removes_more(low_scorer, c1, c2, order):
    lo, hi = sorted((c1, c2))
    r_lo = low_scorer.score(design(FilterSpec("highpass", "butterworth", order, lo, None)))
    r_hi = low_scorer.score(design(FilterSpec("highpass", "butterworth", order, hi, None)))
    assert r_lo["loss_db"] <= r_hi["loss_db"] + 1e-9


@pytest.mark.filterwarnings("ignore::audiobw.errors.AudiobwWarning")  # the DC-offset warning, expected here
def test_dc_offset_is_counted_on_the_scoring_grid(tmp_path):
    # a DC offset and a 40 Hz tone: the scoring grid holds the time-domain mean square
    # (numpy) within 0.01 dB (the normal grid, which counts half its DC bin: −0.27 dB), and a highpass removes the offset as loss (exact: the tone
    # power through |H(40 Hz)|², scipy.signal.freqs on scipy.signal.butter(analog=True))
    x = 0.1 + _tones([40.0], [0.3])
    path = tmp_path / "dc.wav"
    sf.write(str(path), x, FS, subtype="FLOAT")
    a = analyse(path)
    f, p, w, _ = a.scoring_grid()
    ms = float(np.mean(sf.read(str(path))[0] ** 2))
    assert 10 * math.log10(float(np.sum(p * w)) / ms) == pytest.approx(0.0, abs=0.01)
    b, aa = signal.butter(4, 2 * np.pi * 20.0, "highpass", analog=True)
    g40 = float(np.abs(signal.freqs(b, aa, [2 * np.pi * 40.0])[1][0]) ** 2)
    exact = 10 * math.log10(ms / (0.3**2 / 2 * g40))
    row = Scorer(a, Chain(**QUIET), Meter()).score(design(FilterSpec("highpass", "butterworth", 4, 20.0, None)))
    assert row["loss_db"] == pytest.approx(exact, abs=TOL_DB)
