"""The fast path is proven, not assumed: spectral metrics against time-domain renders.

For every family at orders 2 and 8, lowpass, highpass and bandpass, analog and
digital stage, a stationary program is rendered through the time-domain
simulation (:func:`audiobw.render.render_file`, which writes chain-output.wav)
and measured here by routines that share nothing with :mod:`audiobw.metrics`:

* noise: a render of a low-level 997 Hz tone; the tone and DC are removed by a
  least-squares sine fit (numpy.linalg.lstsq) and the residual's rms is the
  noise (AES17-2020 §6-style residual measurement);
* THD+N: a −1 dBFS 997 Hz tone through the chain with its 2nd and 3rd
  harmonics; sine fit and subtraction, residual rms over total rms without DC
  (the AES17 ratio to the total);
* SNR and loss: the program's output power minus the measured noise power,
  against that noise power and against the input power;
* A-weighted SNR: the same powers weighted by the IEC 61672-1:2013 Annex E
  A-weighting formula written out below (eq. E.6), on Hann-windowed
  periodograms of the measured signals;
* LSD: per 43 ms frame, critical-band powers of input and output (Hann,
  one-sided), dB difference with a floor 60 dB under each input frame's level, rms over bands, mean
  over frames — the definition in docs/metrics.md, computed on the audio.

Each program is rendered 0.5 s before and 0.1 s after the 2 s that are
measured: the filter settles, and the abrupt end of the file (whose
band-limited ringing reaches a few ms back) stays out of the measurement; the
fast path analyses the measured part only.
The tolerances are the issue's: noise_vrms 2 %, snr_db and snr_a_db 0.2 dB,
loss_db 0.05 dB, thdn_pct 5 %, lsd_db 0.2 dB.

Run ``python tests/test_render_agreement.py`` to print the table of worst
deviations quoted in docs/render.md.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from audiobw.chain import Chain
from audiobw.filters import FilterSpec, design
from audiobw.metrics import Meter, Scorer
from audiobw.noise import unbounded_reason
from audiobw.render import RenderOptions, render_file
from audiobw.spectrum import analyse
from audiobw.weighting import critical_band_edges

FS = 48000
PRE_S = 0.5
MEASURE_S = 2.0
POST_S = 0.1
M0, M1 = int(PRE_S * FS), int((PRE_S + MEASURE_S) * FS)
FAMILIES = ("butterworth", "bessel", "chebyshev1", "elliptic")
ORDERS = (2, 8)
RESPONSES = {"lowpass": (None, 6000.0), "highpass": (300.0, None), "bandpass": (300.0, 6000.0)}
STAGES = ("analog", "digital")
#: 16 bits: quantisation and amplifier noise both count (−93 and −91 dBFS over 0–24 kHz).
CHAIN = Chain(bits=16)
#: The same chain with the amplifier's harmonics, for THD+N (noise, harmonics and the polynomial's DC
#: all count: a2·x² makes a DC term as large as the 2nd harmonic, which the full meter includes).
DISTORTING = replace(CHAIN, h2_db=-70.0, h3_db=-80.0)
#: A quiet chain for the LSD: every band's noise far below the floor 60 dB under each frame's level.
QUIET = Chain(bits=24, gain_db=10.0)
#: Tones on the bins of the 2048-sample LSD frame (k·fs/2048), one near the middle of each of seven
#: critical bands, so a frame's Hann spectrum of each stays inside its band.
TONE_BINS = (6, 19, 53, 124, 226, 367, 576)
TOL = {
    "noise_vrms": 0.02,
    "snr_db": 0.2,
    "snr_a_db": 0.2,
    "loss_db": 0.05,
    "thdn_pct": 0.05,
    "lsd_db": 0.2,
    "thdn_pct_aes17": 0.05,
}
RELATIVE = ("noise_vrms", "thdn_pct", "thdn_pct_aes17")

ABOVE = "thdn_pct, 3rd harmonic above fs/2"
CASES = [(fam, order, resp, stage) for fam in FAMILIES for order in ORDERS for resp in RESPONSES for stage in STAGES]
WORST: dict = {}


# -- independent measuring routines -------------------------------------------------


def a_weighting_power(f):
    """IEC 61672-1:2013 Annex E, eq. E.6 with the constants of E.1–E.4 (f1 = 20.598997 Hz,
    f2 = 107.65265 Hz, f3 = 737.86223 Hz, f4 = 12194.217 Hz, A1000 = −2.000 dB)."""
    f1, f2, f3, f4 = 20.598997, 107.65265, 737.86223, 12194.217
    f = np.asarray(f, float)
    ra = (f4**2 * f**4) / ((f**2 + f1**2) * np.sqrt((f**2 + f2**2) * (f**2 + f3**2)) * (f**2 + f4**2))
    return (ra * 10 ** (2.0 / 20.0)) ** 2


def periodogram(x):
    """One-sided Hann-windowed power spectrum whose sum is the mean square (common practice)."""
    x = np.atleast_2d(np.asarray(x, float).T).T
    w = np.hanning(x.shape[0])[:, None]
    spec = np.fft.rfft(x * w, axis=0)
    p = (spec.real**2 + spec.imag**2) / np.sum(w**2) / x.shape[0]
    p[1:-1] *= 2.0
    return np.fft.rfftfreq(x.shape[0], 1.0 / FS), p.mean(axis=1)


def power(x, weighting=None):
    """Mean square power per channel, averaged over channels; optionally A-weighted."""
    if weighting is None:
        return float(np.mean(np.asarray(x, float) ** 2))
    f, p = periodogram(x)
    return float(np.sum(p * weighting(f)))


def sine_fit_residual(y, freq_hz, dc=True):
    """Least-squares fit of DC (unless ``dc`` is False: the residual keeps it) + a sine at ``freq_hz``
    (numpy.linalg.lstsq); returns (residual, fundamental)."""
    t = np.arange(y.shape[0]) / FS
    ones = np.ones_like(t) if dc else np.zeros_like(t)
    basis = np.column_stack([ones, np.cos(2 * np.pi * freq_hz * t), np.sin(2 * np.pi * freq_hz * t)])
    coef, *_ = np.linalg.lstsq(basis, y, rcond=None)
    fundamental = basis[:, 1:] @ coef[1:]
    return y - basis @ coef, fundamental


def lsd_measured(x_in, y_out):
    """Critical-band log-spectral distance of two signals (docs/metrics.md definition)."""
    n = 2048  # the power of two nearest 0.043·fs at 48 kHz
    edges = critical_band_edges(FS / 2.0)
    f = np.fft.rfftfreq(n, 1.0 / FS)
    band = np.clip(np.searchsorted(edges, f, side="right") - 1, 0, len(edges) - 2)
    w = np.hanning(n + 1)[:-1]  # periodic Hann, as scipy.signal.get_window('hann')
    frames = x_in.shape[0] // n

    def bands(sig):
        seg = sig[: frames * n].reshape(frames, n, -1) * w[None, :, None]
        s = np.fft.rfft(seg, axis=1)
        p = (s.real**2 + s.imag**2).mean(axis=2) * 2.0 / (n * np.sum(w**2))
        p[:, 0] *= 0.5
        p[:, -1] *= 0.5
        out = np.zeros((frames, len(edges) - 1))
        for b in range(len(edges) - 1):
            out[:, b] = p[:, band == b].sum(axis=1)
        return out

    b_in = bands(x_in)
    floor = b_in.sum(axis=1, keepdims=True) * 1e-6  # 60 dB under each input frame's level
    d = 10 * np.log10(np.maximum(bands(y_out), floor)) - 10 * np.log10(np.maximum(b_in, floor))
    return float(np.mean(np.sqrt(np.mean(d**2, axis=1))))


# -- programs and renders -----------------------------------------------------------


def noise_program(rng, seconds, channels=2):
    """Gaussian noise with a gentle −3 dB/octave tilt above 200 Hz, −20 dBFS rms (circularly shaped,
    so stationary)."""
    n = int(seconds * FS)
    spec = np.fft.rfft(rng.standard_normal((n, channels)), axis=0)
    f = np.fft.rfftfreq(n, 1.0 / FS)
    spec *= (1.0 / np.sqrt(1.0 + f / 200.0))[:, None]
    x = np.fft.irfft(spec, n, axis=0)
    x -= x[M0:M1].mean(axis=0)  # no DC in the measured part
    return x * (10 ** (-20 / 20) / math.sqrt(2)) / np.sqrt(np.mean(x**2))


def tone_program(seconds, amp=0.05):
    t = np.arange(int(seconds * FS)) / FS
    x = sum(amp * np.sin(2 * np.pi * k * FS / 2048 * t + 0.3 * k) for k in TONE_BINS)
    return np.column_stack([x, 0.7 * x])


def single_tone(seconds, freq_hz, level_dbfs):
    t = np.arange(int(seconds * FS)) / FS
    return (10 ** (level_dbfs / 20) * np.sin(2 * np.pi * freq_hz * t))[:, None]


def render(tmp, name, program, spec, chain, seed):
    src = tmp / f"{name}.wav"
    sf.write(str(src), program, FS, subtype="DOUBLE")
    out = tmp / name
    render_file(src, spec, chain, out, RenderOptions(excerpt_s=0.5, seed=seed))
    y, fs = sf.read(str(out / "chain-output.wav"), always_2d=True)
    assert fs == FS and y.shape == program.shape
    return y[M0:M1]


def fast_path(tmp, name, program, spec, chain, meter=None):
    path = tmp / f"{name}-measured.wav"
    sf.write(str(path), program[M0:M1], FS, subtype="DOUBLE")
    return Scorer(analyse(path), chain, meter or Meter()).score(design(spec))


def thdn_measured(y, freq_hz, band=None):
    """THD+N of a rendered tone, %: the residual of a sine fit over residual + fundamental.  Full meter
    (``band`` None): everything but the fundamental, DC included.  With a band (AES17-2020 §5.2.5,
    20 Hz–20 kHz), the residual's power is summed over the periodogram bins inside it."""
    resid, fund = sine_fit_residual(y, freq_hz, dc=band is not None)
    if band is None:
        p_resid = power(resid)
    else:
        f, p = periodogram(resid)
        p_resid = float(np.sum(p[(f >= band[0]) & (f <= band[1])]))
    return 100 * math.sqrt(p_resid / (p_resid + power(fund)))


def spec_for(family, order, response, stage):
    lo, hi = RESPONSES[response]
    return FilterSpec(response, family, order, lo, hi, 0.1, 60.0, stage, FS)


def anti_alias_for(spec):
    """'none' (the default: everything above fs/2 folds) where the candidate bounds the noise; else the
    ideal anti-alias filter (with 'none' such a case is refused; both models: tests/test_antialias.py)."""
    bounded = unbounded_reason(replace(CHAIN, stage=spec.stage), design(spec)) is None
    return "none" if bounded else "ideal"


def measure_case(tmp, family, order, response, stage, seed):
    spec = spec_for(family, order, response, stage)
    aa = anti_alias_for(spec)
    chain = replace(CHAIN, stage=stage, anti_alias=aa)
    quiet = replace(QUIET, stage=stage, anti_alias=aa)
    rng = np.random.default_rng(seed)
    total = PRE_S + MEASURE_S + POST_S
    got, want = {}, {}

    # noise: a low-level tone, removed by a sine fit
    y = render(tmp, "quiet-tone", single_tone(total, 997.0, -60.0), spec, chain, seed + 1)
    resid, _ = sine_fit_residual(y[:, 0], 997.0)
    p_noise = power(resid)
    p_noise_a = power(resid, a_weighting_power)
    got["noise_vrms"] = math.sqrt(p_noise) * math.sqrt(2) * chain.full_scale_vrms

    # THD+N: a -1 dBFS tone with the amplifier's harmonics
    distorting = replace(DISTORTING, stage=stage, anti_alias=aa)
    y = render(tmp, "tone", single_tone(total, 997.0, -1.0), spec, distorting, seed + 2)
    got["thdn_pct"] = thdn_measured(y[:, 0], 997.0)
    got["thdn_pct_aes17"] = thdn_measured(y[:, 0], 997.0, band=(20.0, 20000.0))
    want_tone = fast_path(tmp, "tone", single_tone(total, 997.0, -1.0), spec, distorting)
    want_aes17 = fast_path(tmp, "tone", single_tone(total, 997.0, -1.0), spec, distorting, Meter(mode="aes17"))

    # SNR, A-weighted SNR and loss on a stationary program (noise-like or tones, alternately)
    kind = (
        "noise"
        if (FAMILIES.index(family) + ORDERS.index(order) + list(RESPONSES).index(response)) % 2 == 0
        else "tones"
    )
    x = noise_program(rng, total) if kind == "noise" else tone_program(total)
    y = render(tmp, "program", x, spec, chain, seed + 3)
    xm = x[M0:M1]
    p_out, p_out_a = power(y), power(y, a_weighting_power)
    got["snr_db"] = 10 * math.log10((p_out - p_noise) / p_noise)
    got["snr_a_db"] = 10 * math.log10((p_out_a - p_noise_a) / p_noise_a)
    got["loss_db"] = 10 * math.log10(power(xm) / (p_out - p_noise))
    row = fast_path(tmp, "program", x, spec, chain)

    # LSD: the tone set through the quiet chain
    xt = tone_program(total)
    yt = render(tmp, "lsd", xt, spec, quiet, seed + 4)
    got["lsd_db"] = lsd_measured(xt[M0:M1], yt)
    row_lsd = fast_path(tmp, "lsd", xt, spec, quiet)

    want = {
        "noise_vrms": row["noise_vrms"],
        "snr_db": row["snr_db"],
        "snr_a_db": row["snr_a_db"],
        "loss_db": row["loss_db"],
        "thdn_pct": want_tone["thdn_pct"],
        "lsd_db": row_lsd["lsd_db"],
        "thdn_pct_aes17": want_aes17["thdn_pct"],
    }
    return got, want, kind


def deviation(key, got, want):
    return abs(got / want - 1.0) if key in RELATIVE else abs(got - want)


@pytest.mark.parametrize("family,order,response,stage", CASES, ids=["-".join(map(str, c)) for c in CASES])
def test_fast_path_agrees_with_the_time_domain(tmp_path, family, order, response, stage):
    seed = 1000 + CASES.index((family, order, response, stage)) * 10
    got, want, kind = measure_case(tmp_path, family, order, response, stage, seed)
    bad = []
    for key, tol in TOL.items():
        dev = deviation(key, got[key], want[key])
        prev = WORST.get(key)
        if prev is None or dev > prev[0]:
            WORST[key] = (dev, f"{family} {order} {response} {stage} ({kind})", got[key], want[key])
        if not dev <= tol:
            bad.append(f"{key}: measured {got[key]:.6g}, fast path {want[key]:.6g}, deviation {dev:.3g} > {tol}")
    assert not bad, "; ".join(bad)


@pytest.mark.parametrize("stage", STAGES)
def test_thdn_agrees_when_the_harmonics_lie_above_fs_over_2(tmp_path, stage):
    """A 9 kHz tone at 48 kHz: its 3rd harmonic (27 kHz) is above fs/2.  The model filters it at
    27 kHz in the analog stage (then folds it to 21 kHz), at 21 kHz in the digital stage; the
    render must do the same (an 8th-order Butterworth lowpass at 20 kHz: 20.9 dB apart).  Anti-alias
    'none' (the harmonic folds); on the digital stage the amplifier's bandwidth then bounds the noise."""
    spec = FilterSpec("lowpass", "butterworth", 8, None, 20000.0, 0.1, 60.0, stage, FS)
    chain = Chain(
        bits=24,
        gain_db=20.0,
        h2_db=-80.0,
        h3_db=-50.0,
        stage=stage,
        amp_bandwidth_hz=200e3 if stage == "digital" else None,
    )
    x = single_tone(PRE_S + MEASURE_S + POST_S, 9000.0, -1.0)
    y = render(tmp_path, "tone9k", x, spec, chain, 77)
    got = thdn_measured(y[:, 0], 9000.0)
    path = tmp_path / "tone9k-measured.wav"
    sf.write(str(path), x[M0:M1], FS, subtype="DOUBLE")
    want = Scorer(analyse(path), chain, Meter(tone_hz=9000.0)).score(design(spec))["thdn_pct"]
    dev = abs(got / want - 1)
    prev = WORST.get(ABOVE)
    if prev is None or dev > prev[0]:
        WORST[ABOVE] = (dev, f"butterworth 8 lowpass 20 kHz {stage}, 9 kHz tone", got, want)
    assert dev <= TOL["thdn_pct"], f"measured {got:.5g} %, fast path {want:.5g} %"


def test_the_matrix_covers_every_factor_for_every_metric():
    """Every family, both orders, every response and both stages are in the matrix, for each metric."""
    assert {c[0] for c in CASES} == set(FAMILIES)
    assert {c[1] for c in CASES} == set(ORDERS)
    assert {c[2] for c in CASES} == {"lowpass", "highpass", "bandpass"}
    assert {c[3] for c in CASES} == set(STAGES)
    kinds = {
        (c[0], c[1], c[2])
        for c in CASES
        if (FAMILIES.index(c[0]) + ORDERS.index(c[1]) + list(RESPONSES).index(c[2])) % 2 == 0
    }
    assert kinds and len(kinds) < len(CASES) // 2 + 1  # both program kinds are used


def test_the_independent_a_weighting_is_iec_61672():
    """IEC 61672-1:2013 Table 3: A-weighting −19.1 dB at 100 Hz, 0.0 dB at 1 kHz, −6.6 dB at 16 kHz
    (tabulated to 0.1 dB at the exact base-10 frequencies 10², 10³, 10^4.2 Hz)."""
    db = 10 * np.log10(a_weighting_power(np.array([100.0, 1000.0, 10**4.2])))
    np.testing.assert_allclose(db, [-19.1, 0.0, -6.6], atol=0.06)


if __name__ == "__main__":  # print the agreement table for docs/render.md
    import tempfile

    for case in CASES:
        with tempfile.TemporaryDirectory() as d:
            got, want, kind = measure_case(Path(d), *case, seed=1000 + CASES.index(case) * 10)
        for key in TOL:
            dev = deviation(key, got[key], want[key])
            if key not in WORST or dev > WORST[key][0]:
                WORST[key] = (dev, f"{' '.join(map(str, case))} ({kind})", got[key], want[key])
    for stage in STAGES:
        with tempfile.TemporaryDirectory() as d:
            test_thdn_agrees_when_the_harmonics_lie_above_fs_over_2(Path(d), stage)
    print("| metric | tolerance | worst deviation | where | measured | fast path |")
    print("|---|---|---|---|---|---|")
    for key in (*TOL, ABOVE):
        tol = TOL[key.split(",")[0]]
        dev, where, g, w = WORST[key]
        unit = "%" if key.split(",")[0] in RELATIVE else " dB"
        scale = 100 if key.split(",")[0] in RELATIVE else 1
        print(f"| `{key}` | {tol * scale:g}{unit} | {dev * scale:.3g}{unit} | {where} | {g:.6g} | {w:.6g} |")
