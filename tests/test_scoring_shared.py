"""The per-case shortcuts of the sweep's scorers agree with the direct computations.

One inverse FFT per case serves SER's and the perceptual scorer's delay
searches; complex exponentials on the uniform grid are table products; the
numerical group delay works on wrapped phase steps; the SII's upward spread of
masking is one matrix expression.  Each is checked here against the plain
computation it replaces (numpy.exp, numpy.unwrap + numpy.gradient, the
standard's per-band sum written as a loop) and, for the group delay, against
the analytic delay of the zpk (Oppenheim & Schafer, Discrete-Time Signal
Processing, 3rd ed., §5.1.2, as Filter.group_delay_s computes it).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from audiobw.chain import Chain
from audiobw.filters import FilterSpec, design
from audiobw.delay import _delay_cross_many, windowed_delay_known
from audiobw.metrics import Meter, Scorer, _delay_cross, best_delay, coarse_cross, uniform_phasor
from audiobw.noise import noise_total
from audiobw.perceptual import sii, wiener
from audiobw.perceptual.scoring import Listening, PerceptualScorer, complex_response
from audiobw.spectrum import analyse

from .conftest import tones


@given(n=st.integers(1, 9000), step=st.floats(-3.0, 3.0, allow_nan=False))
@settings(max_examples=60, deadline=None)
def test_uniform_phasor_matches_numpy_exp(n, step):
    ref = np.exp(1j * step * np.arange(n))
    assert np.max(np.abs(uniform_phasor(n, step) - ref)) < 1e-12 * max(1.0, abs(step) * n)


def _grid(n=4097, fs=48000.0):
    f = np.linspace(0.0, fs / 2, n)
    return f, np.full(n, f[1] - f[0])


@pytest.mark.parametrize(
    "family,order,response",
    [
        ("butterworth", 2, "highpass"),
        ("chebyshev1", 4, "highpass"),
        ("bessel", 8, "highpass"),
        ("butterworth", 3, "lowpass"),
        ("elliptic", 6, "lowpass"),
    ],
)
def test_group_delay_matches_unwrap_gradient_and_the_zpk(family, order, response):
    f, _ = _grid()
    cut = 300.0 if response == "highpass" else 5000.0
    filt = design(
        FilterSpec(
            response, family, order, cut if response == "highpass" else None, cut if response == "lowpass" else None
        )
    )
    h = filt.response(f)
    new = wiener.group_delay_s(h, f)
    old = -np.gradient(np.unwrap(np.angle(h)), 2 * np.pi * f)
    # away from the ends the two are the same numbers (to rounding)
    inner = slice(2, -2)
    assert np.allclose(new[inner], old[inner], rtol=1e-9, atol=1e-12)
    # at 0 Hz a highpass has an exact zero: its delay is the limit from inside, as the zpk gives it,
    # whichever sign of zero np.angle sees (the old form read 0 or π there and gave tens of ms off)
    if response == "highpass":
        ana = filt.group_delay_s(f[:3])
        for hh in (h, np.concatenate([[complex(-0.0, 0.0)], h[1:]])):
            g = wiener.group_delay_s(hh, f)
            assert abs(g[0] - ana[0]) < 0.05 * abs(ana[0]) + 1e-4


def test_band_audibility_matches_the_standards_loop():
    rng = np.random.default_rng(3)
    for _ in range(50):
        e = rng.uniform(-20, 70, 18)
        n = rng.uniform(-40, 60, 18)
        t = rng.uniform(0, 40, 18)
        # ANSI S3.5-1997 4.3.2.3 written band by band
        nn = np.maximum(n, -200.0)
        b = np.maximum(nn, e - 24.0)
        c = -80.0 + 0.6 * (b + 10 * np.log10(sii.CENTRES_HZ) - 6.353)
        z = np.empty(18)
        z[0] = b[0]
        for i in range(1, 18):
            acc = 10 ** (0.1 * nn[i])
            for k in range(i):
                acc += 10 ** (0.1 * (b[k] + 3.32 * c[k] * np.log10(0.89 * sii.CENTRES_HZ[i] / sii.CENTRES_HZ[k])))
            z[i] = 10 * np.log10(acc)
        d = np.maximum(z, sii.INTERNAL_NOISE_DB + t)
        level = np.minimum(1 - (e - sii.SPEECH_NORMAL_DB - 10) / 160, 1)
        ref = level * np.clip((e - d + 15) / 30, 0, 1)
        assert np.allclose(sii.band_audibility(e, n, t), ref, rtol=1e-12, atol=1e-12)


def test_shared_delay_search_gives_the_separate_searches(write_audio):
    rng = np.random.default_rng(5)
    x = tones([300.0, 2500.0, 9000.0], [0.3, 0.2, 0.05], 48000, 3.0) + 1e-3 * rng.standard_normal(144000)
    path = write_audio("p.wav", x, 48000)
    a = analyse(path)
    chain = Chain(anti_alias="ideal")
    sc = Scorer(a, chain, Meter())
    ps = PerceptualScorer(a, chain, Listening(program="speech"))
    f, w = a.freqs_hz, a.weights_hz
    for spec in (
        FilterSpec("lowpass", "elliptic", 8, None, 4000.0),
        FilterSpec("highpass", "bessel", 4, 120.0, None),
        FilterSpec("lowpass", "chebyshev1", 6, None, 12000.0),
    ):
        filt = design(spec)
        shared: dict = {}
        row = sc.score(filt, shared)
        assert "cross" in shared
        # SER's search, done alone (its own inverse FFT), gives the same cross term
        h = filt.response(f)
        c = sc._pre["S"] * sc._pre["wm"] * h
        assert _delay_cross(c, f) == _delay_cross(c, f, coarse=coarse_cross(c, f))
        # the perceptual figures with the shared arrays equal those computed from scratch
        noise = noise_total(chain, filt, f, w, a.sample_rate_hz)
        alone = ps.score(filt, noise)
        with_shared = ps.score(filt, shared["N"], shared)
        for k in ("nmr_db", "audible_frames_pct", "wiener_gap_db", "delay_s", "sii"):
            assert with_shared[k] == pytest.approx(alone[k], rel=1e-9, abs=1e-12), k
        # and the causal search agrees with best_delay on the direct response
        limit = 2.0 * max(wiener.passband_group_delay_s(h, f), 0.0) + 2.0 / a.sample_rate_hz
        tau, _ = best_delay(ps.S, complex_response(filt, f), f, w, max_delay_s=limit)
        assert with_shared["delay_s"] == pytest.approx(tau, rel=1e-9, abs=1e-12)
        assert row["ser_db"] is not None


@pytest.mark.parametrize(
    "tau0_ms,window_ms,reused",
    [(1.0, 3.0, True), (0.0213, 0.5, True), (1.0, 0.5, False), (-1.0, 3.0, False)],
)
def test_a_windowed_search_reuses_the_unconstrained_peak_only_inside_its_window(tau0_ms, window_ms, reused):
    """The perceptual scorer's causal search takes SER's unconstrained result when its peak lies in
    the window and no clamp at 0 acts; then the delay is the one a windowed search finds."""
    f, w = _grid(8193)
    rng = np.random.default_rng(3)
    s = (1.0 + rng.random(f.size)) * np.exp(-f / 6000.0)
    c = s * w * np.exp(-2j * np.pi * f * tau0_ms * 1e-3)  # a program delayed by tau0
    coarse = coarse_cross(c, f)
    peaks: list = []
    taus, _ = _delay_cross_many(c[None, :], f, [None], [coarse], peaks)
    assert taus[0] == pytest.approx(tau0_ms * 1e-3, abs=1e-7)
    found = (*peaks[0], float(taus[0]))
    known = windowed_delay_known(found, coarse, window_ms * 1e-3)
    windowed = float(_delay_cross_many(c[None, :], f, [window_ms * 1e-3], [coarse])[0][0])
    if reused:
        assert known == windowed
    else:
        assert known is None and windowed >= 0.0 and windowed != pytest.approx(tau0_ms * 1e-3, abs=1e-6)


def test_aes17_meter_does_not_share_the_search(write_audio):
    path = write_audio("p.wav", tones([1000.0], [0.3], 48000, 1.0), 48000)
    sc = Scorer(analyse(path), Chain(), Meter(mode="aes17"))
    shared: dict = {}
    sc.score(design(FilterSpec("lowpass", "butterworth", 4, None, 8000.0)), shared)
    assert "cross" not in shared and "H" in shared
