"""Data mode measures the recording's own channel (issue 12 item 7).

A stream that was already low-passed at 700 Hz and carries noise of known σ is
swept with --program data.  Before, the sweep saw only the candidate's ideal
pulse response (eye 67 %, Q in the thousands, BER 0) while the render of the
same case showed a far smaller eye.  The sweep now filters the recording
itself through each case; here its figures are checked against time-domain
references that share nothing with the fast path:

* the recording is made with scipy.signal.sosfilt (a 4th-order Butterworth at
  700 Hz, scipy.signal.butter) and seeded Gaussian noise;
* each case is simulated by scipy.signal.lsim of the candidate's analog
  prototype on the recording, on the clean stream and on the noise alone
  (superposition), and sliced at every sample of the bit;
* the eye is (min over the ones − max over the zeros) of the noisy output at
  the best instant over the unfiltered opening 2A; Q is half the noiseless
  eye over √(σ_rec² + σ_chain²), σ_rec the std of the filtered noise alone;
  the error rate is the mean over the bits of ½·erfc(mᵢ/(σ√2)) on the
  noiseless margins (Proakis & Salehi, Digital Communications, 5th ed.,
  §4.2, §9.2);
* with negligible inter-symbol interference, Q from the two levels' means and
  standard deviations, (μ₁ − μ₀)/(σ₁ + σ₀) with the chain noise added in power
  (S. D. Personick, Bell Syst. Tech. J. 52, 1973; from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf
from scipy import signal
from scipy.special import erfc

from audiobw.chain import Chain
from audiobw.cli import main
from audiobw.datalink import DataProgram, data_program_for, nrz_stream, prbs, recorded_stream, score_data
from audiobw.errors import AudioFileError
from audiobw.filters import FilterSpec, design
from audiobw.spectrum import analyse

FS = 48000
R = 1200.0
SPB = int(FS / R)  # 40 samples per bit
A = 0.25  # NRZ amplitude, full-scale units
#: a chain whose sample unit is 1 V (full scale 1 V peak) and whose own noise is known below
CHAIN = Chain(
    source_ohms=0.0, gain_db=0.0, en_v_rthz=0.0, in_a_rthz=0.0, bits=32, dither="none", full_scale_vrms=1 / math.sqrt(2)
)
N_BITS = 2000


def _stream(noise_sigma, *, prefilter=True, seed=7):
    bits = prbs("prbs9", N_BITS)
    clean = nrz_stream(bits, R, FS, A)
    if prefilter:
        clean = signal.sosfilt(signal.butter(4, 700.0, fs=FS, output="sos"), clean)
    noise = np.random.default_rng(seed).normal(0.0, noise_sigma, clean.size)
    return bits, clean, noise


def _program(tmp_path, x):
    path = tmp_path / "stream.wav"
    sf.write(str(path), x, FS, subtype="FLOAT")
    return data_program_for(analyse(path), CHAIN, R), path


def _lsim(filt, x):
    z, p, k = filt.zpk()
    t = np.arange(x.size) / FS
    return signal.lsim((z, p, k), x, t)[1]


def _reference(filt, bits, clean, noise, chain_sigma, amplitude):
    """Time-domain eye, Q and BER at every integer-sample instant of bits 30 … N−10; the best kept."""
    y_clean, y_noise = _lsim(filt, clean), _lsim(filt, noise)
    judged = np.arange(30, N_BITS - 10)
    sym = 2.0 * bits[judged] - 1.0
    ones = sym > 0
    best = {"eye": -np.inf, "q": -np.inf, "ber": 1.0}
    for lag in range(0, 4 * SPB):
        idx = judged * SPB + lag
        s0, sn = y_clean[idx], y_clean[idx] + y_noise[idx]
        thr = 0.5 * (s0[ones].min() + s0[~ones].max())
        sigma = math.hypot(float(np.std(y_noise[idx])), chain_sigma)
        half = 0.5 * (s0[ones].min() - s0[~ones].max())
        best["eye"] = max(best["eye"], (sn[ones].min() - sn[~ones].max()) / (2 * amplitude))
        best["q"] = max(best["q"], half / sigma)
        best["ber"] = min(best["ber"], float(np.mean(0.5 * erfc((s0 - thr) * sym / (sigma * math.sqrt(2))))))
    return best


@pytest.mark.parametrize(
    "family,order,fc", [("butterworth", 4, 1500.0), ("bessel", 4, 900.0), ("butterworth", 2, 2500.0)]
)
def test_prefiltered_noisy_stream_matches_a_time_domain_measurement(tmp_path, family, order, fc):
    sigma_w = 0.14  # white, over 0…24 kHz: the stream's own noise
    bits, clean, noise = _stream(sigma_w)
    prog, _ = _program(tmp_path, clean + noise)
    # the recording's NRZ amplitude: the settled level of long runs (the prefilter passes DC)
    assert prog.amplitude_v == pytest.approx(A, rel=0.01)
    chain_sigma = 0.004
    filt = design(FilterSpec("lowpass", family, order, None, fc))
    row = score_data(filt, prog, chain_sigma)
    ref = _reference(filt, bits, clean, noise, chain_sigma, A)
    # lsim's linear-interpolated input against the band-limited FFT filtering, integer-sample instants
    # against a 1/32 UI grid: the eye within 0.02 of the unfiltered opening, Q within 3 %
    assert row["eye_fraction"] == pytest.approx(ref["eye"], abs=0.02)
    assert row["q"] == pytest.approx(ref["q"], rel=0.03)
    assert row["ber"] == pytest.approx(ref["ber"], rel=0.35)  # d ln BER/dQ ≈ −Q: 3 % of Q ≈ 6 is ~20 %
    assert row["ber_worst"] == pytest.approx(0.5 * erfc(row["q"] / math.sqrt(2)))
    assert row["ber_worst"] >= row["ber"] * 0.999
    # the ideal-pulse figures are kept, and the recording's channel and noise make the truth worse
    assert row["eye_ideal"] > row["eye_fraction"] + 0.05
    assert row["q_ideal"] > 2 * row["q"]
    assert row["stream_sigma_v"] > 0.5 * sigma_w * math.sqrt(fc / (FS / 2))


def test_the_issue_case_no_longer_reads_as_a_perfect_link(tmp_path):
    """700 Hz-lowpassed stream with noise, true Q about 10 at 1200 bit/s: before, Q ≈ 5300 and BER 0."""
    bits, clean, noise = _stream(0.08)
    prog, _ = _program(tmp_path, clean + noise)
    filt = design(FilterSpec("lowpass", "butterworth", 4, None, 2000.0))
    row = score_data(filt, prog, 1e-5)
    ref = _reference(filt, bits, clean, noise, 1e-5, A)
    assert 5 < row["q"] < 20 and row["q"] == pytest.approx(ref["q"], rel=0.03)
    assert row["q_ideal"] > 1000
    assert row["eye_fraction"] == pytest.approx(ref["eye"], abs=0.02) and row["eye_fraction"] < 0.85


def test_negligible_isi_q_equals_the_two_levels_statistics(tmp_path):
    # No prefilter, a wide Bessel (no overshoot): the levels are Gaussian, and the plain Q-factor
    # (μ1 − μ0)/(σ1 + σ0) sliced at the bit centres must agree
    bits, clean, noise = _stream(0.05, prefilter=False)
    prog, _ = _program(tmp_path, clean + noise)
    chain_sigma = 0.003
    filt = design(FilterSpec("lowpass", "bessel", 4, None, 4000.0))
    row = score_data(filt, prog, chain_sigma)
    y = _lsim(filt, clean + noise)
    judged = np.arange(30, N_BITS - 10)
    ones = bits[judged] > 0
    best = 0.0
    for lag in range(SPB // 2, SPB + SPB // 2):  # the bit centre after the filter's delay
        s = y[judged * SPB + lag]
        s1 = math.hypot(float(np.std(s[ones])), chain_sigma)
        s0 = math.hypot(float(np.std(s[~ones])), chain_sigma)
        best = max(best, (float(np.mean(s[ones])) - float(np.mean(s[~ones]))) / (s1 + s0))
    assert row["q"] == pytest.approx(best, rel=0.03)


@pytest.mark.parametrize(
    "family,order,fc", [("butterworth", 4, 800.0), ("bessel", 2, 600.0), ("butterworth", 4, 3000.0)]
)
def test_a_clean_stream_gives_the_ideal_figures(tmp_path, family, order, fc):
    bits, clean, _ = _stream(0.0, prefilter=False)
    prog, _ = _program(tmp_path, clean)
    assert prog.amplitude_v == pytest.approx(A, rel=1e-6)
    filt = design(FilterSpec("lowpass", family, order, None, fc))
    chain_sigma = 0.04  # Q of a few: the error rates are in the double range and mean something
    row = score_data(filt, prog, chain_sigma)
    ideal = score_data(filt, DataProgram(R, A), chain_sigma)  # no stream: the ideal pulse alone
    assert ideal["eye_fraction"] == ideal["eye_ideal"]
    assert row["eye_ideal"] == ideal["eye_ideal"]
    # PRBS-9 holds every 9-bit pattern: the measured worst case is the peak-distortion bound
    assert row["eye_fraction"] == pytest.approx(ideal["eye_ideal"], abs=0.005)
    assert row["q"] == pytest.approx(ideal["q_ideal"], rel=0.01)
    assert row["ber"] == pytest.approx(ideal["ber_ideal"], rel=0.05)
    assert row["stream_sigma_v"] < 1e-4 * A


def test_more_recorded_noise_never_improves_q(tmp_path):
    qs = []
    for k, sigma in enumerate((0.0, 0.02, 0.05, 0.1)):
        _, clean, noise = _stream(sigma)
        (tmp_path / str(k)).mkdir()
        prog, _ = _program(tmp_path / str(k), clean + noise)
        qs.append(score_data(design(FilterSpec("lowpass", "butterworth", 4, None, 1500.0)), prog, 0.002)["q"])
    assert all(a > b for a, b in zip(qs, qs[1:]))


def test_render_and_sweep_eye_agree(tmp_path, capsys):
    """The sweep's eye is the one the render's output shows (measured here on chain-output.wav)."""
    from audiobw.render import RenderOptions, render_file

    bits, clean, noise = _stream(0.03)
    prog, path = _program(tmp_path, clean + noise)
    quiet = Chain(bits=24, gain_db=0.0, full_scale_vrms=1 / math.sqrt(2), en_v_rthz=1e-9, source_ohms=0.0)
    spec = FilterSpec("lowpass", "butterworth", 4, None, 1500.0)
    row = score_data(design(spec), prog, 1e-6)
    render_file(path, spec, quiet, tmp_path / "r", RenderOptions(excerpt_s=1.0))
    y, fs = sf.read(str(tmp_path / "r" / "chain-output.wav"), always_2d=True)
    y = y[:, 0]
    gain = 10 ** (quiet.gain_db / 20)
    judged = np.arange(30, N_BITS - 10)
    ones = bits[judged] > 0
    eye = max(
        (y[judged * SPB + lag][ones].min() - y[judged * SPB + lag][~ones].max()) / (2 * A * gain)
        for lag in range(4 * SPB)
    )
    print(f"render eye {eye:.4f}, sweep eye {row['eye_fraction']:.4f}, ideal {row['eye_ideal']:.4f}")
    assert row["eye_fraction"] == pytest.approx(eye, abs=0.02)
    assert row["eye_fraction"] < row["eye_ideal"] - 0.05


def test_sweep_json_carries_measured_and_ideal(tmp_path, capsys):
    import json

    _, clean, noise = _stream(0.03)
    path = tmp_path / "s.wav"
    sf.write(str(path), clean + noise, FS, subtype="FLOAT")
    out = tmp_path / "o"
    code = main(
        [
            "sweep",
            str(path),
            "--program",
            "data",
            "--bit-rate",
            "1200",
            "--response",
            "lowpass",
            "--family",
            "butterworth",
            "--order",
            "4",
            "--cutoffs",
            "600:4k:6",
            "--min-eye",
            "0.5",
            "--out",
            str(out),
        ]
    )
    assert code in (0, 1), capsys.readouterr()
    doc = json.loads((out / "sweep.json").read_text())
    assert doc["data"]["eye_basis"] == "recording" and doc["data"]["bits_measured"] == N_BITS
    for c in doc["cases"]:
        assert c["eye_ideal"] >= c["eye_fraction"] - 0.01
        assert c["stream_sigma_v"] > 0


def test_music_swept_as_data_is_refused(tmp_path, capsys, rng):
    # a program with no clock: tones and noise; neither a recovered nor a given rate makes it a stream
    t = np.arange(3 * FS) / FS
    music = 0.2 * np.sin(2 * np.pi * 220 * t) * (1 + 0.5 * np.sin(2 * np.pi * 1.4 * t)) + rng.normal(0, 0.01, t.size)
    path = tmp_path / "music.wav"
    sf.write(str(path), music, FS, subtype="FLOAT")
    with pytest.raises(AudioFileError, match="no reliable bit clock"):
        recorded_stream(music, FS, 1200.0, name=str(path))
    code = main(["sweep", str(path), "--program", "data", "--bit-rate", "1200", "--max-ber", "1e-6"])
    err = capsys.readouterr().err
    assert code != 0
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and "music.wav" in lines[0] and "accepted:" in lines[0]
    assert "Traceback" not in err


def test_an_implausible_rate_is_refused(tmp_path):
    # "1.435 bit/s" from a 1.67 s file: two bits are no stream
    bits, clean, _ = _stream(0.0, prefilter=False)
    with pytest.raises(AudioFileError, match=r"x\.wav: no reliable bit clock: 2 bit\(s\) at 1\.435 bit/s"):
        recorded_stream(clean, FS, 1.435, name="x.wav")


def test_music_with_a_recovered_rate_is_refused_in_one_line(tmp_path, capsys, rng):
    # a phrase with a strong 1.435 Hz pulse: the transition spectrum offers a "clock" of a few bit/s
    fs = 44100
    t = np.arange(20 * fs) / fs
    x = sum(
        0.1 * np.sin(2 * np.pi * f0 * t) * (0.5 + 0.5 * np.sin(2 * np.pi * 1.435 * t) ** 8)
        for f0 in (220.0, 277.2, 329.6, 440.0)
    )
    x = x + 0.3 * np.sign(np.sin(2 * np.pi * 1.435 * t)) * np.exp(-((t * 1.435) % 1) * 8) * np.sin(2 * np.pi * 80 * t)
    x = x + rng.normal(0, 0.003, t.size)
    path = tmp_path / "piece.wav"
    sf.write(str(path), x, fs, subtype="FLOAT")
    code = main(
        [
            "sweep",
            str(path),
            "--program",
            "data",
            "--bit-rate",
            "auto",
            "--max-ber",
            "1e-6",
            "--out",
            str(tmp_path / "o"),
        ]
    )
    err = capsys.readouterr().err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert code != 0 and len(lines) == 1, err
    assert "piece.wav" in lines[0] and "accepted:" in lines[0]
    assert "no reliable bit clock" in lines[0] or "no bit rate found" in lines[0]
    assert not (tmp_path / "o" / "sweep.json").exists()


@pytest.fixture(scope="module")
def noisy_program(tmp_path_factory):
    _, clean, noise = _stream(0.1)
    return _program(tmp_path_factory.mktemp("p"), clean + noise)[0]


def test_more_chain_noise_never_improves_q_or_ber(noisy_program):
    """Property (hypothesis): the chain's noise adds in power, so a noisier chain never raises Q, never
    lowers the error rate, and leaves the eye (a noiseless-chain figure) where it is."""
    from hypothesis import given, settings
    from hypothesis import strategies as st

    filt = design(FilterSpec("lowpass", "bessel", 4, None, 1100.0))

    @settings(max_examples=12, deadline=None)
    @given(st.floats(1e-4, 0.05), st.floats(1.01, 4.0))
    def check(sigma, factor):
        a = score_data(filt, noisy_program, sigma)
        b = score_data(filt, noisy_program, sigma * factor)
        assert b["q"] < a["q"] and b["ber"] >= a["ber"] and b["ber_worst"] >= a["ber_worst"]
        assert b["eye_fraction"] == a["eye_fraction"]

    check()
