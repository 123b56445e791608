"""The render stage: simulation accuracy, streaming, loudness, ceilings, trials, the commands."""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
import soundfile as sf

from audiobw.chain import Chain
from audiobw.cli import main
from audiobw.filters import FilterSpec, design
from audiobw.render import (
    K_WEIGHTING_48K_SOS,
    RenderOptions,
    integrated_loudness,
    k_weighting_sos,
    render_file,
    render_sweep,
    score_trials,
    true_peak,
)
from audiobw.simulate import ChainSimulator, analog_response, quantise

from .conftest import REPO, tones

FS = 48000
CLIP = REPO / "clips" / "ensemble-48k-stereo.flac"


def spec(response="lowpass", family="butterworth", order=4, lo=None, hi=9500.0, stage="analog", fs=FS):
    return FilterSpec(response, family, order, lo, hi, 0.1, 60.0, stage, fs)


# -- the simulation ----------------------------------------------------------------------


@pytest.mark.parametrize("family", ["butterworth", "bessel", "chebyshev1", "elliptic"])
@pytest.mark.parametrize(
    "response,lo,hi,order",
    [
        ("lowpass", None, 20000.0, 8),  # edge near fs/2: where a bilinear form would warp
        ("highpass", 20.0, None, 8),  # long impulse response
        ("bandpass", 300.0, 3400.0, 2),
    ],
)
def test_simulated_analog_magnitude_matches_the_analog_response(family, response, lo, hi, order):
    """The impulse response of the simulated analog stage, transformed on a grid that is not the
    FIR's own, matches |H(f)| of the analog prototype within 0.1 dB up to 0.45·fs wherever the
    response is above −60 dB, and within 1e-4 (absolute, −80 dB re the passband) below that."""
    s = spec(response, family, order, lo, hi)
    filt = design(s)
    sim = ChainSimulator(Chain(), filt, FS, 1, noise=False, quantise=False)
    n = 4 * sim.hop + 12345  # a grid finer than, and offset from, the FIR's
    x = np.zeros(n)
    x[sim.hop] = 1.0  # room for the response's precursor (band-limiting to fs/2 rings before t = 0)
    y = sim.run(x)
    f = np.fft.rfftfreq(n, 1.0 / FS)
    band = f <= 0.45 * FS
    got = np.abs(np.fft.rfft(y))[band]
    want = np.sqrt(filt.power_response(f[band]))  # the fast path's own analytic response
    loud = want > 1e-3
    err_db = np.abs(20 * np.log10(got[loud] / want[loud]))
    assert err_db.max() < 0.1, f"worst {err_db.max():.4f} dB"
    assert np.all(np.abs(got[~loud] - want[~loud]) < 1e-4)


def test_analog_response_helper_agrees_with_the_filter_module():
    filt = design(spec("bandpass", "elliptic", 8, 300.0, 3400.0))
    f = np.geomspace(10, 23000, 500)
    np.testing.assert_allclose(np.abs(analog_response(filt, f)) ** 2, filt.power_response(f), rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize("stage", ["analog", "digital"])
def test_streaming_equals_one_shot(stage, rng):
    """Block by block (odd block sizes) gives exactly the samples of a one-shot run."""
    # digital: the ideal anti-alias model, so the oversampled harmonic path streams too
    chain = Chain(bits=16, stage=stage, h2_db=-80.0, h3_db=-90.0, anti_alias="ideal" if stage == "digital" else "none")
    filt = design(spec("bandpass", "chebyshev1", 6, 80.0, 7000.0, stage=stage))
    x = rng.standard_normal((50000, 2)) * 0.1
    one = ChainSimulator(chain, filt, FS, 2, seed=7).run(x)
    sim = ChainSimulator(chain, filt, FS, 2, seed=7)
    parts, i = [], 0
    for size in [1, 999, 4096, 17, 12000] * 10:
        parts.append(sim.push(x[i : i + size]))
        i += size
        if i >= x.shape[0]:
            break
    parts.append(sim.finish())
    streamed = np.concatenate(parts)
    assert streamed.shape == x.shape
    np.testing.assert_array_equal(streamed, one)


def test_render_streams_the_file_and_writes_the_true_level(tmp_path, write_audio, rng):
    """chain-output.wav is the simulation of the whole file (read in blocks), as 32-bit float."""
    x = rng.standard_normal((300000, 1)) * 0.05  # longer than one read block of 2**17 frames
    src = write_audio("prog.wav", x, FS)
    chain = Chain(bits=20, anti_alias="ideal")  # an even-order elliptic: its noise bounded at fs/2
    s = spec("lowpass", "elliptic", 8, None, 9000.0)
    res = render_file(src, s, chain, tmp_path / "out", RenderOptions(excerpt_s=2, seed=3))
    y, fs = sf.read(str(tmp_path / "out" / "chain-output.wav"), always_2d=True, dtype="float64")
    assert sf.info(str(tmp_path / "out" / "chain-output.wav")).subtype == "FLOAT"
    x_file, _ = sf.read(str(src), always_2d=True)
    want = ChainSimulator(chain, design(s), FS, 1, seed=3).run(x_file).astype(np.float32)
    np.testing.assert_array_equal(y.astype(np.float32), want)
    assert res.facts["clipping"]["samples"] == 0


def test_same_seed_same_output_other_seed_other_noise(rng):
    filt = design(spec())
    x = rng.standard_normal((20000, 1)) * 0.01
    a = ChainSimulator(Chain(bits=16), filt, FS, 1, seed=5).run(x)
    b = ChainSimulator(Chain(bits=16), filt, FS, 1, seed=5).run(x)
    c = ChainSimulator(Chain(bits=16), filt, FS, 1, seed=6).run(x)
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, c)


def test_quantiser_error_power_with_and_without_dither(rng):
    """Rounding error q²/12 (Bennett 1948); TPDF dither adds q²/6 (Wannamaker et al. 2000)."""
    bits = 12
    q = 2.0 / 2**bits
    x = rng.uniform(-0.5, 0.5, (200000, 1))
    y, clipped, _ = quantise(x, bits, None)
    assert abs(np.mean((y - x) ** 2) / (q**2 / 12) - 1) < 0.02
    y, _, _ = quantise(x, bits, np.random.default_rng(1))
    assert abs(np.mean((y - x) ** 2) / (q**2 / 4) - 1) < 0.02
    assert clipped.sum() == 0
    y, clipped, first = quantise(np.array([[0.5], [1.2], [-1.5]]), bits, None)
    assert clipped.tolist() == [2] and first == 1 and y.max() == 1 - q and y.min() == -1


def test_amplifier_polynomial_sets_the_harmonic_levels():
    """A full-scale sine through y = x + a2x² + a3x³: 2nd harmonic at h2, 3rd at h3 dB re the fundamental."""
    chain = Chain(h2_db=-60.0, h3_db=-70.0, bits=24)
    filt = design(spec("lowpass", "butterworth", 2, None, 20000.0, stage="digital"))
    n = 48000
    t = np.arange(n) / FS
    x = np.sin(2 * np.pi * 1000 * t)[:, None] * (1 - 1e-6)
    sim = ChainSimulator(chain, filt, FS, 1, noise=False, quantise=False)
    y = sim.run(x)[:, 0]
    spec_ = np.abs(np.fft.rfft(y * np.hanning(n)))
    f = np.fft.rfftfreq(n, 1 / FS)
    peak = lambda fr: spec_[np.argmin(np.abs(f - fr))] / math.sqrt(filt.power_response(fr))  # noqa: E731
    assert abs(20 * np.log10(peak(2000) / peak(1000)) + 60) < 0.05
    assert abs(20 * np.log10(peak(3000) / peak(1000)) + 70) < 0.05


# -- loudness and peaks --------------------------------------------------------------------------


def test_k_weighting_at_48k_is_the_published_table_and_the_rederivation_agrees():
    """BS.1770-4 Annex 1 Tables 1 and 2 (48 kHz); the re-derivation used at other rates reproduces them."""
    sos, how = k_weighting_sos(48000)
    assert "published" in how
    assert sos[0, 0] == 1.53512485958697 and sos[1, 4] == -1.99004745483398
    from audiobw.render import k_weighting_derived_sos

    np.testing.assert_allclose(k_weighting_derived_sos(48000.0), K_WEIGHTING_48K_SOS, rtol=0, atol=1e-8)
    assert "re-derived" in k_weighting_sos(44100)[1]


@pytest.mark.parametrize("fs", [48000, 44100, 96000])
def test_a_full_scale_997_hz_sine_reads_minus_3_01_lkfs(fs):
    """BS.1770-4 Annex 1 (note to eq. 2): a 0 dBFS sine at 997 Hz on one channel reads −3.01 LKFS.

    At 48 kHz (the published coefficients) to the standard's 0.01; at other rates the re-derived
    filters read −3.008 (44.1 kHz) and −3.028 (96 kHz), held here within 0.03 LU."""
    t = np.arange(int(5 * fs)) / fs
    x = np.sin(2 * np.pi * 997 * t)
    assert abs(integrated_loudness(x, fs) - (-3.01)) < (0.01 if fs == 48000 else 0.03)


class _ExactStage:
    """A pyloudnorm filter stage with the published BS.1770-4 48 kHz coefficients."""

    def __init__(self, row):
        self.b, self.a = row[:3], row[3:]
        self.passband_gain = 1.0

    def apply_filter(self, data):
        from scipy import signal

        return signal.lfilter(self.b, self.a, data)


def pyloudnorm_exact_meter():
    """pyloudnorm.Meter (filter_class='custom') fitted with the exact BS.1770-4 coefficients."""
    import pyloudnorm

    meter = pyloudnorm.Meter(48000, filter_class="custom")
    meter._filters = {"stage1": _ExactStage(K_WEIGHTING_48K_SOS[0]), "stage2": _ExactStage(K_WEIGHTING_48K_SOS[1])}
    return meter


def test_our_meter_agrees_with_pyloudnorm_with_exact_coefficients():
    x, _ = sf.read(str(CLIP), always_2d=True)
    ours = integrated_loudness(x, 48000)
    theirs = pyloudnorm_exact_meter().integrated_loudness(x)
    assert abs(ours - theirs) < 0.02


def test_ab_clips_are_loudness_matched_and_under_the_ceiling(tmp_path):
    """The pair differs by at most 0.5 LU (pyloudnorm.Meter.integrated_loudness with the exact
    BS.1770-4 coefficients) and no sample exceeds the ceiling."""
    res = render_file(
        CLIP,
        spec("bandpass", "butterworth", 4, 300.0, 3000.0),
        Chain(bits=16),
        tmp_path / "ab",
        RenderOptions(excerpt_s=4.0, trials=3),
    )
    meter = pyloudnorm_exact_meter()
    ref, _ = sf.read(str(tmp_path / "ab" / "ab-reference.wav"), always_2d=True)
    proc, _ = sf.read(str(tmp_path / "ab" / "ab-processed.wav"), always_2d=True)
    la, lb = meter.integrated_loudness(ref), meter.integrated_loudness(proc)
    assert abs(la - lb) <= 0.5
    assert abs(la + 23.0) < 0.5  # the moderate default target
    assert ref.shape[0] == proc.shape[0] == 4 * 48000
    for clip in (ref, proc):
        assert np.max(np.abs(clip)) <= 10 ** (-1 / 20)
    notes = (tmp_path / "ab" / "render-notes.txt").read_text()
    assert "Listening caution" in notes and "LUFS" in notes and "Seed: 1" in notes
    assert res.facts["excerpt"]["why"].startswith("the stretch")


def test_clips_never_exceed_the_ceiling_even_when_the_target_is_loud(tmp_path, write_audio, rng):
    """A peaky program at a loud target: both clips are lowered together to the ceiling."""
    x = rng.standard_normal((3 * FS, 2)) * 0.02
    x[FS::4000] = 0.95  # clicks: high crest factor
    src = write_audio("peaky.wav", x, FS)
    ceiling = -6.0
    res = render_file(
        src,
        spec(),
        Chain(),
        tmp_path / "o",
        RenderOptions(loudness_lufs=-10.0, ceiling_dbfs=ceiling, excerpt_s=2.0, trials=2),
    )
    assert res.facts["loudness"]["ceiling_reduction_db"] > 0
    files = [
        tmp_path / "o" / "ab-reference.wav",
        tmp_path / "o" / "ab-processed.wav",
        *sorted((tmp_path / "o" / "blind").glob("*.wav")),
    ]
    assert len(files) == 6
    for p in files:
        y, _ = sf.read(str(p), always_2d=True)
        assert np.max(np.abs(y)) <= 10 ** (ceiling / 20)
        assert true_peak(y) <= 10 ** (ceiling / 20) * 1.001  # 4x oversampled (BS.1770-4 Annex 2)
    clips = res.facts["clips"]
    assert abs(clips["reference"]["loudness_lufs"] - clips["processed"]["loudness_lufs"]) < 0.5


def test_converter_clipping_is_counted_and_reported(tmp_path, write_audio):
    x = tones([500.0], [0.9], FS, 1.0)[:, None]
    src = write_audio("hot.wav", x, FS)
    chain = replace(Chain(), input_gain_db=6.0)
    res = render_file(src, spec(), chain, tmp_path / "o", RenderOptions(excerpt_s=1.0))
    assert res.facts["clipping"]["samples"] > 1000
    assert "samples clipped" in (tmp_path / "o" / "render-notes.txt").read_text()


def test_short_file_is_refused_with_the_reason(tmp_path, write_audio, capsys):
    src = write_audio("short.wav", np.ones((int(0.3 * FS), 1)) * 0.1, FS)
    rc = main(["render", str(src), "--band", ":9k", "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 1 and "0.4 s" in err and "Traceback" not in err


@pytest.mark.parametrize(
    "args,needle",
    [
        (["--loudness", "-3LUFS"], "--loudness"),
        (["--ceiling", "loud"], "--ceiling"),
        (["--excerpt-at", "100"], "--excerpt-at"),
        (["--band", "30k:"], "--band"),
    ],
)
def test_bad_render_options_exit_2_with_one_line(tmp_path, args, needle, capsys):
    argv = ["render", str(CLIP), "--band", ":9k", "--out", str(tmp_path / "o"), *args]
    rc = main(argv)
    err = capsys.readouterr().err
    assert rc == 2 and needle in err and "Traceback" not in err


# -- blind trials ---------------------------------------------------------------------------------


def test_trials_are_the_clips_in_the_keyed_order_and_score(tmp_path, capsys):
    out = tmp_path / "t"
    rc = main(
        [
            "render",
            str(CLIP),
            "--band",
            ":4k",
            "--order",
            "8",
            "--excerpt",
            "1.5",
            "--trials",
            "10",
            "--seed",
            "11",
            "--out",
            str(out),
        ]
    )
    stdout = capsys.readouterr().out
    assert rc == 0 and stdout.count("Listening caution") >= 1
    key = json.loads((out / "trial-key.json").read_text())
    assert key["format"] == "audiobw trial key 1" and len(key["trials"]) == 10
    ref, _ = sf.read(str(out / "ab-reference.wav"))
    proc, _ = sf.read(str(out / "ab-processed.wav"))
    for t in key["trials"]:
        for slot in ("first", "second"):
            y, _ = sf.read(str(out / "blind" / t["files"][slot]))
            np.testing.assert_array_equal(y, proc if t[slot] == "processed" else ref)
    assert {t["processed"] for t in key["trials"]} == {"first", "second"}  # seeded, but not one-sided
    assert not any("ref" in p.name or "proc" in p.name for p in (out / "blind").iterdir())
    # all right: p = 0.5**10 (exact one-sided binomial, scipy.stats.binomtest)
    answers = tmp_path / "answers.txt"
    answers.write_text("# listener 1\n" + "".join(f"{t['trial']:02d} {t['processed']}\n" for t in key["trials"]))
    s = score_trials(out / "trial-key.json", answers)
    assert s["correct"] == 10 and math.isclose(s["p_value"], 0.5**10, rel_tol=1e-12)
    assert "more often than chance" in s["reading"]
    # half right: P(X >= 5 | n = 10, p = 1/2) = 638/1024
    flip = {"first": "second", "second": "first"}
    answers.write_text(
        "".join(f"{t['trial']} {t['processed'] if t['trial'] % 2 else flip[t['processed']]}\n" for t in key["trials"])
    )
    s = score_trials(out / "trial-key.json", answers)
    assert s["correct"] == 5 and math.isclose(s["p_value"], 638 / 1024, rel_tol=1e-12)
    assert "does not show the two sound the same" in s["reading"]
    rc = main(["trials-score", str(out / "trial-key.json"), str(answers)])
    assert rc == 0 and "5 right" in capsys.readouterr().out


def test_trials_score_refuses_a_bad_answer_line(tmp_path, capsys):
    key = tmp_path / "k.json"
    key.write_text(
        json.dumps(
            {
                "format": "audiobw trial key 1",
                "trials": [{"trial": 1, "processed": "first"}, {"trial": 2, "processed": "second"}],
            }
        )
    )
    bad = tmp_path / "a.txt"
    bad.write_text("1 first\n3 second\n")
    rc = main(["trials-score", str(key), str(bad)])
    err = capsys.readouterr().err
    assert rc == 2 and "line 2" in err and "trial 3" in err


# -- sweep --render ----------------------------------------------------------------------------------


def test_render_sweep_renders_the_chosen_and_the_next_narrower_case(tmp_path, write_audio):
    from audiobw.jobs import sweep_file
    from audiobw.settings import Raw, build

    x = tones([300.0, 3000.0, 12000.0], [0.2, 0.1, 0.01], FS, 2.0)
    src = write_audio("prog.wav", np.column_stack([x, x]), FS)
    settings = build({"cutoffs": Raw("2k:18k:6", "test"), "max_loss": Raw(0.1, "test"), "order": Raw("4", "test")})
    doc, _ = sweep_file(src, settings)
    assert doc["choice"] and doc["choice"]["next_narrower"]
    paths = render_sweep(doc, src, settings, tmp_path / "r", RenderOptions(excerpt_s=1.0))
    for folder, case_id in (
        ("render-chosen", doc["choice"]["case"]),
        ("render-narrower", doc["choice"]["next_narrower"]),
    ):
        facts = json.loads((tmp_path / "r" / folder / "render.json").read_text())
        case = doc["cases"][case_id - 1]
        assert facts["filter"]["design_high_hz"] == case["design_high_hz"]
        assert (tmp_path / "r" / folder / "chain-output.wav") in paths


@pytest.mark.parametrize("response,lo,hi", [("lowpass", None, 20000.0), ("highpass", 100.0, None)])
def test_noise_the_analog_filter_passes_above_fs_over_2_aliases_into_the_output(response, lo, hi):
    """An analog 2nd-order lowpass at 20 kHz passes much noise above fs/2 = 24 kHz; the converter
    folds it into the output, so the rendered noise matches the model's folded total
    (audiobw.noise.budget), not the integral of |H|² up to fs/2 only (chain-model.md).  The highpass
    folds the noise the amplifier's 60 kHz pole lets through (--anti-alias none, the default)."""
    from audiobw.noise import budget

    chain = Chain(bits=24, amp_bandwidth_hz=60e3 if response == "highpass" else None)
    filt = design(spec(response, "butterworth", 2, lo, hi))
    y = ChainSimulator(chain, filt, FS, 1, seed=9).run(np.zeros((4 * FS, 1)))
    measured = math.sqrt(np.mean(y**2)) * math.sqrt(2) * chain.full_scale_vrms
    model = budget(chain, filt, FS)["total"]["vrms"]
    assert abs(measured / model - 1) < 0.02
    f = np.linspace(0, FS / 2, 200001)
    unfolded = math.sqrt(
        chain.density_amplifier_v2_hz() * np.trapezoid(filt.power_response(f), f)
        + chain.quantisation_power_v2()
        + chain.dither_power_v2()
    )
    if response == "lowpass":
        assert measured / unfolded > 1.05  # the folded noise is there (the model: 8.2 % more here)


# -- the render's own noise and SNR beside the sweep's estimate (issue 13) --------------------------


def test_render_prints_its_measured_noise_and_snr_beside_the_estimate_and_the_caution_once(tmp_path, capsys):
    """A 997 Hz tone at -40 dBFS through a 16-bit chain (quantisation and amplifier noise both count).

    The printed measured noise is checked against an independent measurement on chain-output.wav: a
    least-squares sine fit (numpy.linalg.lstsq) removes DC and the tone, and the residual's rms over
    the settled middle is the noise (AES17-2020 §6-style residual measurement, as in
    tests/test_render_agreement.py).  Measured and estimated agree within that file's tolerances:
    noise_vrms 2 %, snr_db 0.2 dB.
    """
    from .test_render_agreement import TOL

    fs, seconds, level = FS, 3.0, 10 ** (-40 / 20)
    t = np.arange(int(fs * seconds)) / fs
    x = level * np.sin(2 * np.pi * 997.0 * t)
    src = tmp_path / "tone.wav"
    sf.write(str(src), np.stack([x, x], axis=1), fs, subtype="FLOAT")
    out = tmp_path / "r"
    rc = main(["render", str(src), "--band", ":6k", "--bits", "16", "--excerpt", "1", "--out", str(out)])
    stdout = capsys.readouterr().out
    assert rc == 0
    assert stdout.count("Listening caution") == 1
    (noise_line,) = [ln for ln in stdout.splitlines() if ln.startswith("noise: measured ")]
    (snr_line,) = [ln for ln in stdout.splitlines() if ln.startswith("SNR: measured ")]
    assert "sweep estimate" in noise_line and "dB apart" in noise_line and "sweep estimate" in snr_line
    check = json.loads((out / "render.json").read_text())["noise_check"]
    measured, estimate = check["measured_noise_vrms"], check["estimate_noise_vrms"]
    assert abs(measured / estimate - 1) <= TOL["noise_vrms"]
    assert abs(check["measured_snr_db"] - check["estimate_snr_db"]) <= TOL["snr_db"]
    assert check["noise_apart_db"] == pytest.approx(abs(20 * math.log10(measured / estimate)))
    # the measured figure is the output's noise: the residual of chain-output.wav after the tone
    y, _ = sf.read(str(out / "chain-output.wav"))
    mid = slice(int(0.5 * fs), int(2.9 * fs))
    tt = t[mid]
    basis = np.column_stack([np.ones_like(tt), np.cos(2 * np.pi * 997.0 * tt), np.sin(2 * np.pi * 997.0 * tt)])
    residual = [y[mid, ch] - basis @ np.linalg.lstsq(basis, y[mid, ch], rcond=None)[0] for ch in range(2)]
    rms_v = math.sqrt(np.mean(np.square(residual))) * math.sqrt(2) * Chain().full_scale_vrms
    assert abs(rms_v / measured - 1) <= TOL["noise_vrms"]
    assert "Measured on this render" in (out / "render-notes.txt").read_text()
