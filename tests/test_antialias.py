"""One anti-alias assumption for noise and harmonics alike (issue 12, item 4): ``--anti-alias none|ideal``.

* ``none`` (the default): the converter has no anti-alias filter; everything that reaches it above
  fs/2 folds into 0…fs/2, noise and harmonic products alike, and the candidate (analog stage) or
  ``--amp-bandwidth`` must bound the noise, else the case is refused.
* ``ideal``: a brick-wall at fs/2 ahead of the converter; nothing folds.

Each figure is checked against a computation of its own here: scipy designs the responses again
(scipy.signal.butter, freqs_zpk, sosfreqz), the folded noise is numpy's integration of
|H(f)|²·N0 over the images k·fs ± f (sampling folds them onto f: Oppenheim & Schafer,
*Discrete-Time Signal Processing*, 3rd ed., §4.2) or scipy.integrate.quad for a total, and THD+N is
measured on the polynomial's output formed at 8·fs, filtered, decimated (which folds) and fitted
(numpy.linalg.lstsq).  The render (time domain) must agree with the sweep within the agreement
tests' tolerances (tests/test_render_agreement.py: noise 2 %, THD+N 5 %).
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
import soundfile as sf
from scipy import integrate, signal

from audiobw.chain import Chain
from audiobw.cli import main
from audiobw.errors import ParameterError
from audiobw.filters import FilterSpec, design
from audiobw.metrics import Meter, Scorer
from audiobw.noise import budget
from audiobw.spectrum import analyse

from .test_render_agreement import (
    M0,
    M1,
    MEASURE_S,
    POST_S,
    PRE_S,
    TOL,
    power,
    render,
    sine_fit_residual,
    single_tone,
    thdn_measured,
)

FS = 48000.0
EN = 10e-9  # V/√Hz: the only noise (gain 0 dB, ideal source, no current noise)
NOISE_ONLY = Chain(
    source_ohms=0.0, gain_db=0.0, en_v_rthz=EN, in_a_rthz=0.0, bits=32, dither="none", full_scale_vrms=1.0
)
MODES = ("none", "ideal")


# -- independent responses (scipy designs them again) --------------------------------
def analog_power(btype, order, fc_hz, amp_bw_hz=None):
    """|H(f)|² of an analog Butterworth (scipy.signal.butter, analog=True, freqs_zpk) times the
    amplifier's one pole 1/(1 + (f/f_a)²)."""
    z, p, k = signal.butter(order, 2 * np.pi * fc_hz, btype=btype, analog=True, output="zpk")

    def h2(f):
        f = np.atleast_1d(np.asarray(f, float))
        _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * f)
        pole = 1.0 if amp_bw_hz is None else 1.0 / (1.0 + (f / amp_bw_hz) ** 2)
        return np.abs(h) ** 2 * pole

    return h2


def one_pole(amp_bw_hz):
    return lambda f: 1.0 / (1.0 + (np.asarray(f, float) / amp_bw_hz) ** 2)


def digital_power(order, fc_hz):
    """|H(e^{j2πf/fs})|² of scipy.signal.butter(..., fs=fs) (bilinear, prewarped), scipy.signal.sosfreqz."""
    sos = signal.butter(order, fc_hz, fs=FS, output="sos")

    def h2(f):
        _, h = signal.sosfreqz(sos, worN=np.atleast_1d(np.asarray(f, float)), fs=FS)
        return np.abs(h) ** 2

    return h2


def images_integral(pre, post, lo_hz, hi_hz, mode, *, images=1500, far=2_000_000):
    """∫_lo^hi post(f)·Σ_k pre(k·fs ± f) df (mode 'none': every image folds onto f) or
    ∫_lo^hi post(f)·pre(f) df ('ideal'), by the trapezoid rule on 8001 points; the images beyond
    ``images`` are flat over the band and are added as 2·pre(k·fs)·∫post."""
    f = np.linspace(lo_hz, hi_hz, 8001)
    w = post(f)
    g = pre(f)
    if mode == "none":
        for k in range(1, images + 1):
            g = g + pre(k * FS - f) + pre(k * FS + f)
    total = float(np.trapezoid(w * g, f))
    if mode == "none":
        k = np.arange(images + 1, far, dtype=float)
        total += 2.0 * float(np.sum(pre(k * FS))) * float(np.trapezoid(w, f))
    return total


CASES = {
    # name: (candidate spec, chain changes, pre-sampler |H|², post-sampler |H|²)
    "analog lowpass": (
        FilterSpec("lowpass", "butterworth", 2, None, 20000.0),
        {},
        analog_power("lowpass", 2, 20000.0),
        lambda f: np.ones_like(f),
    ),
    "analog highpass": (
        FilterSpec("highpass", "butterworth", 2, 100.0, None),
        {"amp_bandwidth_hz": 60e3},
        analog_power("highpass", 2, 100.0, 60e3),
        lambda f: np.ones_like(f),
    ),
    "digital lowpass": (
        FilterSpec("lowpass", "butterworth", 4, None, 15000.0, stage="digital", fs_hz=FS),
        {"amp_bandwidth_hz": 60e3, "stage": "digital"},
        one_pole(60e3),
        digital_power(4, 15000.0),
    ),
}


@pytest.mark.parametrize("meter", [(0.0, FS / 2), (20.0, 20000.0)], ids=["full", "20Hz-20kHz"])
@pytest.mark.parametrize("mode", MODES)
@pytest.mark.parametrize("case", list(CASES))
def test_folded_noise_against_an_image_sum(case, mode, meter):
    spec, changes, pre, post = CASES[case]
    chain = replace(NOISE_ONLY, anti_alias=mode, **changes)
    got = budget(chain, design(spec), FS, meter=meter)["components"]["amplifier_voltage"]["vrms"] ** 2
    want = EN**2 * images_integral(pre, post, *meter, mode)
    assert got == pytest.approx(want, rel=2e-4), (case, mode, meter)


@pytest.mark.parametrize("case", list(CASES))
def test_the_two_models_differ_and_fold_the_whole_integral(case):
    """With 'none' the whole ∫₀^∞ of the pre-sampler response lands in 0…fs/2 (folding keeps power:
    scipy.integrate.quad); with 'ideal' only ∫₀^{fs/2}.  The cases are chosen so the two differ by more
    than 0.5 dB: a test that ignored the mode would fail."""
    spec, changes, pre, post = CASES[case]
    filt = design(spec)
    total = {
        m: budget(replace(NOISE_ONLY, anti_alias=m, **changes), filt, FS)["components"]["amplifier_voltage"]["vrms"]
        ** 2
        / EN**2
        for m in MODES
    }
    assert 10 * math.log10(total["none"] / total["ideal"]) > 0.5
    if filt.analog:

        def q(a, b):
            return integrate.quad(lambda f: float(pre(f)[0]), a, b, limit=400)[0]

        assert total["ideal"] == pytest.approx(q(0.0, FS / 2), rel=1e-4)
        assert total["none"] == pytest.approx(q(0.0, FS / 2) + q(FS / 2, np.inf), rel=1e-4)


@pytest.mark.parametrize(
    "spec,changes,what",
    [
        (FilterSpec("highpass", "butterworth", 2, 100.0, None), {}, "analog butterworth order 2 highpass"),
        (FilterSpec("lowpass", "elliptic", 4, None, 15000.0), {}, "analog elliptic order 4 lowpass"),
        (
            FilterSpec("lowpass", "butterworth", 4, None, 15000.0, stage="digital", fs_hz=FS),
            {"stage": "digital"},
            "digital stage",
        ),
    ],
)
def test_unbounded_noise_is_refused(spec, changes, what):
    chain = replace(NOISE_ONLY, **changes)
    with pytest.raises(
        ParameterError,
        match=r"--anti-alias none: .*" + what + r".*--amp-bandwidth HZ.*"
        r"--anti-alias ideal",
    ):
        budget(chain, design(spec), FS)
    # either remedy bounds it
    assert budget(replace(chain, anti_alias="ideal"), design(spec), FS)["total"]["vrms"] > 0
    assert budget(replace(chain, amp_bandwidth_hz=80e3), design(spec), FS)["total"]["vrms"] > 0


# -- THD+N of a tone whose harmonics exceed fs/2 ----------------------------------------
TONE_HZ, H2, H3 = 9000.0, -90.0, -50.0  # 2nd at 18 kHz, 3rd at 27 kHz: above fs/2, folds to 21 kHz


def thdn_reference(stage, mode, r=10 ** (-1 / 20), over=8):
    """THD+N (%, full meter, DC included) of y = x + a2·x² + a3·x³ on r·sin(2π·9 kHz·t), formed at 8·fs
    (exact: x³ ends at 27 kHz), filtered and sampled at fs by this routine alone.  a2 = 2·10^(h2/20),
    a3 = 4·10^(h3/20): sin² = (1 − cos 2ωt)/2 and sin³ = (3 sin ωt − sin 3ωt)/4 make the harmonics h2
    and h3 dB re a full-scale fundamental (textbook identities)."""
    n = int(FS)  # 9000 whole cycles in 1 s: every product is periodic in the record
    t = np.arange(over * n) / (over * FS)
    x = r * np.sin(2 * np.pi * TONE_HZ * t)
    u = x + 2 * 10 ** (H2 / 20) * x**2 + 4 * 10 ** (H3 / 20) * x**3
    U = np.fft.rfft(u)
    f = np.fft.rfftfreq(u.size, 1 / (over * FS))
    if stage == "analog":
        z, p, k = signal.butter(8, 2 * np.pi * 20000.0, analog=True, output="zpk")
        U = U * signal.freqs_zpk(z, p, k, worN=2 * np.pi * f)[1]
    if mode == "ideal":
        U[f > FS / 2] = 0.0
    y = np.fft.irfft(U, u.size)[::over]  # the sampler: every image k·fs ± f lands on f
    if stage == "digital":
        Y = np.fft.rfft(y)
        sos = signal.butter(8, 20000.0, fs=FS, output="sos")
        Y = Y * signal.sosfreqz(sos, worN=np.fft.rfftfreq(n, 1 / FS), fs=FS)[1]
        y = np.fft.irfft(Y, n)
    tt = np.arange(n) / FS
    basis = np.stack([np.sin(2 * np.pi * TONE_HZ * tt), np.cos(2 * np.pi * TONE_HZ * tt)], axis=1)
    coef, *_ = np.linalg.lstsq(basis, y, rcond=None)
    resid = y - basis @ coef
    fund = basis @ coef
    return 100 * math.sqrt(np.mean(resid**2) / (np.mean(resid**2) + np.mean(fund**2)))


@pytest.fixture(scope="module")
def any_program(tmp_path_factory):
    path = tmp_path_factory.mktemp("p") / "p.wav"
    t = np.arange(int(FS)) / FS
    sf.write(str(path), (0.1 * np.sin(2 * np.pi * 1000 * t))[:, None], int(FS), subtype="DOUBLE")
    return analyse(path)


@pytest.mark.parametrize("mode", MODES)
@pytest.mark.parametrize("stage", ["analog", "digital"])
def test_thdn_folds_harmonics_per_the_model(any_program, stage, mode):
    chain = Chain(
        source_ohms=0.0,
        en_v_rthz=0.0,
        in_a_rthz=0.0,
        bits=32,
        dither="none",
        h2_db=H2,
        h3_db=H3,
        stage=stage,
        anti_alias=mode,
    )
    filt = design(FilterSpec("lowpass", "butterworth", 8, None, 20000.0, stage=stage, fs_hz=FS))
    got = Scorer(any_program, chain, Meter(tone_hz=TONE_HZ)).score(filt)["thdn_pct"]
    want = thdn_reference(stage, mode)
    assert got == pytest.approx(want, rel=1e-3), (stage, mode)
    other = thdn_reference(stage, "ideal" if mode == "none" else "none")
    assert abs(20 * math.log10(want / other)) > 1.0  # the 3rd harmonic's fold is what tells them apart


# -- the render (time domain, oversampled harmonics) follows the same model ------------------
RENDER_CHAIN = Chain(bits=24, gain_db=20.0)


def _measured_noise_vrms(tmp, name, spec, chain, seed):
    y = render(tmp, name, single_tone(PRE_S + MEASURE_S + POST_S, 997.0, -60.0), spec, chain, seed)
    resid, _ = sine_fit_residual(y[:, 0], 997.0)
    return math.sqrt(power(resid)) * math.sqrt(2) * chain.full_scale_vrms


def _sweep_row(tmp, name, program, spec, chain, meter=None):
    path = tmp / f"{name}-measured.wav"
    sf.write(str(path), program[M0:M1], int(FS), subtype="DOUBLE")
    return Scorer(analyse(path), chain, meter or Meter()).score(design(spec))


@pytest.mark.parametrize("mode", MODES)
@pytest.mark.parametrize("case", list(CASES))
def test_render_noise_agrees_with_the_sweep(tmp_path, case, mode):
    spec, changes, _, _ = CASES[case]
    spec = replace(spec, fs_hz=FS)
    chain = replace(RENDER_CHAIN, anti_alias=mode, **changes)
    got = _measured_noise_vrms(tmp_path, "n", spec, chain, 4242)
    want = _sweep_row(tmp_path, "n", single_tone(PRE_S + MEASURE_S + POST_S, 997.0, -60.0), spec, chain)
    assert got == pytest.approx(want["noise_vrms"], rel=TOL["noise_vrms"]), (case, mode)


@pytest.mark.parametrize("mode", MODES)
@pytest.mark.parametrize("stage", ["analog", "digital"])
def test_render_thdn_agrees_with_the_sweep_above_fs_over_2(tmp_path, stage, mode):
    spec = FilterSpec("lowpass", "butterworth", 8, None, 20000.0, 0.1, 60.0, stage, FS)
    chain = replace(
        RENDER_CHAIN,
        h2_db=H2,
        h3_db=H3,
        stage=stage,
        anti_alias=mode,
        amp_bandwidth_hz=200e3 if stage == "digital" else None,
    )
    x = single_tone(PRE_S + MEASURE_S + POST_S, TONE_HZ, -1.0)
    y = render(tmp_path, "t", x, spec, chain, 77)
    got = thdn_measured(y[:, 0], TONE_HZ)
    want = _sweep_row(tmp_path, "t", x, spec, chain, Meter(tone_hz=TONE_HZ))["thdn_pct"]
    assert got == pytest.approx(want, rel=TOL["thdn_pct"]), (stage, mode)


# -- the command line: the option, the TOML key, the refusal, sweep.json, the verdict -----------
@pytest.fixture(scope="module")
def program_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("cli") / "tone.wav"
    t = np.arange(int(FS)) / FS
    sf.write(str(path), (0.1 * np.sin(2 * np.pi * 1000 * t))[:, None], int(FS), subtype="PCM_24")
    return path


@pytest.mark.parametrize(
    "args,what",
    [
        (["--response", "highpass", "--cutoffs", "100"], "analog butterworth order 4 highpass"),
        (["--stage", "digital", "--cutoffs", "10k"], "digital stage"),
        (["--family", "elliptic", "--order", "2", "--cutoffs", "10k"], "analog elliptic order 2 lowpass"),
    ],
)
def test_cli_refuses_unbounded_noise_in_one_line(program_file, tmp_path, capsys, args, what):
    code = main(["sweep", str(program_file), "--min-snr", "10", "--out", str(tmp_path / "o"), *args])
    err = capsys.readouterr().err
    assert code == 2
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in err, err
    assert "--anti-alias none" in lines[0] and what in lines[0]
    assert "--amp-bandwidth HZ" in lines[0] and "--anti-alias ideal" in lines[0]


def test_a_mixed_grid_leaves_out_only_the_unbounded_cases(program_file, tmp_path, capsys):
    # elliptic 2 (|H(∞)| = −60 dB) has no bound under --anti-alias none; elliptic 3 and the
    # Butterworths do: 2 of 8 cases are left out with a note, the other 6 are scored
    out = tmp_path / "o"
    code = main(
        [
            "sweep",
            str(program_file),
            "--family",
            "butterworth,elliptic",
            "--order",
            "2,3",
            "--cutoffs",
            "8k,16k",
            "--min-snr",
            "10",
            "--out",
            str(out),
        ]
    )
    text = capsys.readouterr().out
    assert code == 0
    doc = json.loads((out / "sweep.json").read_text())
    kept = [(c["family"], c["order"]) for c in doc["cases"]]
    assert len(kept) == 6 and ("elliptic", 2) not in kept and kept.count(("elliptic", 3)) == 2
    assert [c["id"] for c in doc["cases"]] == list(range(1, 7))
    note = [n for n in doc["notes"] if "left out" in n]
    assert len(note) == 1 and note[0].startswith("2 of 8 cases left out") and "--amp-bandwidth HZ" in note[0]
    assert "2 of 8 cases left out" in text


def test_cli_refuses_a_bad_anti_alias_value(program_file, tmp_path, capsys):
    code = main(
        ["sweep", str(program_file), "--min-snr", "10", "--anti-alias", "brickwall", "--out", str(tmp_path / "o")]
    )
    err = capsys.readouterr().err
    assert code == 2 and "--anti-alias" in err and "'brickwall'" in err and "none, ideal" in err
    assert "Traceback" not in err


@pytest.mark.parametrize("how", ["option", "toml", "amp_bandwidth"])
def test_cli_records_the_model_in_sweep_json_and_the_verdict(program_file, tmp_path, capsys, how):
    out = tmp_path / "o"
    args = [
        "sweep",
        str(program_file),
        "--response",
        "highpass",
        "--cutoffs",
        "50:200:3",
        "--min-snr",
        "10",
        "--out",
        str(out),
    ]
    if how == "option":
        args += ["--anti-alias", "ideal"]
    elif how == "toml":
        toml = tmp_path / "chain.toml"
        toml.write_text('[converter]\nanti_alias = "ideal"\n', encoding="utf-8")
        args += ["--chain", str(toml)]
    else:
        args += ["--amp-bandwidth", "100k"]
    assert main(args) == 0, capsys.readouterr().err
    text = capsys.readouterr().out
    doc = json.loads((out / "sweep.json").read_text(encoding="utf-8"))
    mode = "none" if how == "amp_bandwidth" else "ideal"
    assert doc["chain"]["anti_alias"] == mode
    assert f"Anti-alias model: {mode}" in text
    if mode == "none":
        assert "the analog candidate is the only anti-alias filter" in text


def test_the_default_keeps_folding_on_the_analog_stage(program_file, tmp_path, capsys):
    """The default is 'none': an analog lowpass candidate is the converter's only anti-alias filter."""
    out = tmp_path / "o"
    assert (
        main(["sweep", str(program_file), "--cutoffs", "20k", "--order", "2", "--min-snr", "10", "--out", str(out)])
        == 0
    )
    text = capsys.readouterr().out
    doc = json.loads((out / "sweep.json").read_text(encoding="utf-8"))
    assert doc["chain"]["anti_alias"] == "none"
    assert "Anti-alias model: none (the default): the analog candidate is the only anti-alias filter" in text
    # the sweep's noise is the folded one: the whole ∫₀^∞|H|² (Butterworth 2: (π/4)/sin(π/4)·fc,
    # the Butterworth ENBW ratio (π/2n)/sin(π/2n), common practice), not ∫₀^{fs/2}
    c = Chain()
    folded = c.density_amplifier_v2_hz() * 20000.0 * (math.pi / 4) / math.sin(math.pi / 4)
    q2 = c.quantisation_power_v2() + c.dither_power_v2()
    assert doc["cases"][0]["noise_vrms"] ** 2 == pytest.approx(folded + q2, rel=1e-3)


def test_noise_command_states_the_model_and_refuses_unbounded_noise(capsys):
    assert main(["noise", "--band", "100:", "--order", "2"]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "--anti-alias none" in err and "--amp-bandwidth HZ" in err
    assert main(["noise", "--band", "100:", "--order", "2", "--amp-bandwidth", "60k", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["chain"]["anti_alias"] == "none" and doc["chain"]["amp_bandwidth_hz"] == 60e3
    assert main(["noise", "--band", "100:", "--order", "2", "--anti-alias", "ideal"]) == 0
    assert "anti-alias ideal" in capsys.readouterr().out
