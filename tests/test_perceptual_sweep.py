"""The perceptual figures inside the sweep: properties, bound and a time-domain check."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import signal

from audiobw.chain import Chain
from audiobw.metrics import best_delay
from audiobw.filters import FilterSpec, design
from audiobw.noise import noise_total
from audiobw.perceptual import wiener
from audiobw.perceptual.scoring import Listening, PerceptualScorer, complex_response
from audiobw.spectrum import analyse
from audiobw.sweep import Grid, run_sweep

FS = 48000


def _speechlike(rng, seconds=3.0):
    """Noise with a falling spectrum (about −6 dB/octave above 500 Hz), syllable-rate modulated."""
    n = int(FS * seconds)
    x = rng.normal(size=n)
    sos = signal.butter(1, 500.0, fs=FS, output="sos")
    y = signal.sosfilt(sos, x) + 0.02 * x
    env = 0.55 + 0.45 * np.sin(2 * np.pi * 4.0 * np.arange(n) / FS)
    y = y * env
    y -= y.mean()
    return 0.1 * y / np.sqrt(np.mean(y**2))


@pytest.fixture(scope="module")
def speech_analysis(tmp_path_factory):
    rng = np.random.default_rng(11)
    import soundfile as sf

    path = tmp_path_factory.mktemp("p") / "speechlike.wav"
    sf.write(str(path), _speechlike(rng), FS, subtype="FLOAT")
    return path, analyse(path)


def _lp(fc, order=4, family="butterworth", stage="analog"):
    return design(FilterSpec("lowpass", family, order, None, float(fc), 0.1, 60.0, stage, float(FS)))


def test_sii_grows_with_bandwidth_and_target_picks_narrowest(speech_analysis):
    path, a = speech_analysis
    cutoffs = (300.0, 600.0, 1000.0, 2000.0, 3000.0, 4500.0, 7000.0, 10000.0)
    r = run_sweep(
        path,
        chain=Chain(),
        grid=Grid("lowpass", ("butterworth",), (8,), cutoffs),
        targets={"min_sii": 0.75},
        analysis=a,
        listening=Listening("speech"),
    )
    siis = [c["sii"] for c in r.cases]
    assert np.all(np.diff(siis) >= -1e-9)
    assert siis[0] < 0.75 < siis[-1]
    chosen = r.case(r.choice["case"])
    assert chosen["sii"] >= 0.75
    assert all(c["sii"] < 0.75 for c in r.cases if c["bandwidth_hz"] < chosen["bandwidth_hz"])
    doc = r.to_json()
    assert doc["limits"]["playback_spl_db"] == pytest.approx(62.35)
    assert doc["limits"]["wiener_ser_db"] > 0
    assert all(c["wiener_gap_db"] >= -1e-9 for c in doc["cases"])


@settings(max_examples=15, deadline=None)
@given(en1=st.floats(1e-10, 1e-6), factor=st.floats(1.0, 1e3), fc=st.floats(2000, 20000))
def test_more_chain_noise_never_lowers_nmr_or_audible_frames(speech_analysis, en1, factor, fc):
    _, a = speech_analysis
    filt = _lp(fc)
    out = []
    for en in (en1, en1 * factor):
        c = Chain(en_v_rthz=en)
        ps = PerceptualScorer(a, c, Listening("music"))
        n = noise_total(c, filt, a.freqs_hz, a.weights_hz, a.sample_rate_hz)
        out.append(ps.score(filt, n))
    assert out[1]["nmr_db"] >= out[0]["nmr_db"] - 1e-9
    assert out[1]["audible_frames_pct"] >= out[0]["audible_frames_pct"]


@settings(max_examples=20, deadline=None)
@given(
    fc=st.floats(1000, 15000),
    ratio=st.floats(1.05, 1.5),
    order=st.integers(1, 8),
    family=st.sampled_from(["butterworth", "bessel"]),
)
def test_wider_lowpass_never_removes_more(speech_analysis, fc, ratio, order, family):
    _, a = speech_analysis
    f, w = a.freqs_hz, a.weights_hz
    removed = []
    for cut in (fc, min(fc * ratio, 21000.0)):
        h = complex_response(_lp(cut, order, family), f)
        tau = best_delay(a.psd, h, f, w)[0]
        removed.append(float(np.sum(w * wiener.removed_psd(h, a.psd, f, tau))))
    assert removed[1] <= removed[0] * (1 + 1e-6)


@settings(max_examples=15, deadline=None)
@given(
    fc=st.floats(800, 20000),
    order=st.integers(1, 8),
    en=st.floats(1e-10, 1e-6),
    stage=st.sampled_from(["analog", "digital"]),
)
def test_no_case_beats_the_wiener_bound(speech_analysis, fc, order, en, stage):
    _, a = speech_analysis
    c = Chain(en_v_rthz=en, stage=stage, anti_alias="ideal" if stage == "digital" else "none")
    ps = PerceptualScorer(a, c, Listening("music"))
    filt = _lp(fc, order, stage=stage)
    n = noise_total(c, filt, a.freqs_hz, a.weights_hz, a.sample_rate_hz)
    assert ps.score(filt, n)["wiener_gap_db"] >= -1e-6


def test_complex_response_matches_scipy():
    # scipy.signal.freqz_zpk / freqs_zpk as the reference for H(f), phase included.
    f = np.linspace(10, 20000, 300)
    dig = _lp(5000, 6, "elliptic", "digital")
    _, hd = signal.freqz_zpk(dig.z, dig.p, dig.k, worN=f, fs=FS)
    assert np.allclose(complex_response(dig, f), hd, rtol=1e-8, atol=1e-12)
    ana = _lp(5000, 5, "chebyshev1", "analog")
    _, ha = signal.freqs_zpk(
        ana.z * ana.ref_rad_s,
        ana.p * ana.ref_rad_s,
        ana.k * ana.ref_rad_s ** (len(ana.p) - len(ana.z)),
        worN=2 * np.pi * f,
    )
    assert np.allclose(complex_response(ana, f), ha, rtol=1e-6)


def test_removed_part_matches_time_domain(speech_analysis, rng):
    # Independent check: filter the program in the time domain (scipy.signal.sosfilt),
    # align by the best delay (rounded to a sample), and measure the error power.
    path, a = speech_analysis
    import soundfile as sf

    x, _ = sf.read(str(path))
    filt = _lp(3000.0, 4, "butterworth", "digital")
    f, w = a.freqs_hz, a.weights_hz
    h = complex_response(filt, f)
    tau = best_delay(a.psd, h, f, w)[0]
    spectral = float(np.sum(w * wiener.removed_psd(h, a.psd, f, round(tau * FS) / FS)))
    y = signal.sosfilt(filt.sos(), x)
    d = int(round(tau * FS))
    e = x[2000:-2000] - y[2000 + d : len(y) - 2000 + d]
    assert 10 * np.log10(np.mean(e**2) / spectral) == pytest.approx(0.0, abs=0.5)


@pytest.mark.parametrize(
    "args,match",
    [
        (["--hearing-threshold", "1000"], "--hearing-threshold"),
        (["--max-audible-frames", "150"], "0 to 100"),
        (["--min-sii", "0.8"], "speech programs only"),
        (["--playback-spl", "200"], "0 < level <= 130"),
    ],
)
def test_bad_listening_options_are_one_line_errors(speech_analysis, capsys, args, match):
    from audiobw.cli import main

    path, _ = speech_analysis
    code = main(["sweep", str(path), "--cutoffs", "2k:8k:3", "--min-snr", "10", *args])
    err = capsys.readouterr().err
    assert code == 2 and match in err and len(err.strip().splitlines()) == 1
