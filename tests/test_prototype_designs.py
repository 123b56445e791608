"""Analog bandpass and digital designs built from the shipped lowpass prototypes (audiobw._zpk).

References named beside each check: scipy.signal.butter / bessel(norm='mag') /
cheby1 / ellip designing the same filter directly (analog, or with fs given),
evaluated by scipy.signal.freqs_zpk / freqz_zpk; the half-power search the
closed-form edges replace (Filter._crossing_search, Brent's method); the
Lyapunov path the closed-form bandpass integral replaces (design(use_table=False));
scipy.integrate.quad of |H|² evaluated by scipy.signal.freqs_zpk; and for the
digital integral Parseval on a long impulse response from scipy.signal.sosfilt.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, signal

from audiobw.filters import FilterSpec, butterworth_enbw_ratio, design

FAMILIES = ("butterworth", "bessel", "chebyshev1", "elliptic")
ORDERS = range(1, 9)


def scipy_design(spec: FilterSpec, wn):
    """The reference design: scipy.signal.butter / bessel(norm='mag') / cheby1 / ellip, output='zpk'."""
    kw = dict(btype=spec.response, output="zpk")
    if spec.stage == "analog":
        kw["analog"] = True
    else:
        kw["fs"] = spec.fs_hz
    if spec.family == "butterworth":
        return signal.butter(spec.order, wn, **kw)
    if spec.family == "bessel":
        return signal.bessel(spec.order, wn, norm="mag", **kw)
    if spec.family == "chebyshev1":
        return signal.cheby1(spec.order, spec.ripple_db, wn, **kw)
    return signal.ellip(spec.order, spec.ripple_db, spec.stopband_db, wn, **kw)


def reference_power(spec: FilterSpec, f_hz):
    """|H(f)|² of the reference design: scipy.signal.freqs_zpk (analog, rad/s) or freqz_zpk (fs given)."""
    if spec.stage == "analog":
        wn = [2 * np.pi * spec.low_hz, 2 * np.pi * spec.high_hz]
        z, p, k = scipy_design(spec, wn)
        _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * np.asarray(f_hz))
    else:
        wn = {"lowpass": spec.high_hz, "highpass": spec.low_hz}.get(spec.response, [spec.low_hz, spec.high_hz])
        z, p, k = scipy_design(spec, wn)
        _, h = signal.freqz_zpk(z, p, k, worN=np.asarray(f_hz), fs=spec.fs_hz)
    return np.abs(h) ** 2


ANALOG_BANDS = [(40.0, 60.0), (300.0, 3400.0), (1000.0, 1010.0), (5.0, 20900.0)]
DIGITAL = [
    ("lowpass", None, 3000.0),
    ("lowpass", None, 20500.0),
    ("highpass", 25.0, None),
    ("highpass", 4000.0, None),
    ("bandpass", 40.0, 60.0),
    ("bandpass", 300.0, 3400.0),
    ("bandpass", 5.0, 21000.0),
]


def _grid(spec):
    top = spec.fs_hz / 2 * 0.999 if spec.fs_hz else 40000.0
    return np.geomspace(1.0, top, 400)


@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("band", ANALOG_BANDS)
def test_analog_bandpass_response_matches_scipy(family, band):
    # scipy.signal.<family>(n, [w1, w2], 'bandpass', analog=True) evaluated by scipy.signal.freqs_zpk
    for order in ORDERS:
        spec = FilterSpec("bandpass", family, order, *band)
        ours = design(spec)
        f = _grid(spec)
        ref = reference_power(spec, f)
        got = ours.power_response(f)
        # relative, except in the deep stopband and at the notches, where rounding sets the floor (-170 dB)
        np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-17)
        # the numpy transform repeats scipy.signal.lp2bp_zpk's operations on the same
        # prototype (design(use_table=False) is scipy.signal at the normalised edges): the same bits
        old = design(spec, use_table=False)
        np.testing.assert_array_equal(ours.p, old.p)
        np.testing.assert_array_equal(ours.z, old.z)
        assert ours.k == old.k


@pytest.mark.parametrize("fs", [44100.0, 48000.0, 96000.0])
@pytest.mark.parametrize("family", FAMILIES)
def test_digital_response_matches_scipy(fs, family):
    # scipy.signal.<family>(n, edges, btype, fs=fs) evaluated by scipy.signal.freqz_zpk
    for order in ORDERS:
        for response, lo, hi in DIGITAL:
            spec = FilterSpec(response, family, order, lo, hi, stage="digital", fs_hz=fs)
            ours = design(spec)
            f = _grid(spec)
            ref = reference_power(spec, f)
            got = ours.power_response(f)
            np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-17)  # as above
            # prewarp, lp2lp/lp2hp/lp2bp_zpk and bilinear_zpk repeated operation for operation
            # (design(use_table=False) is scipy.signal with fs given): the same bits
            old = design(spec, use_table=False)
            np.testing.assert_array_equal(ours.p, old.p)
            np.testing.assert_array_equal(ours.z, old.z)
            assert ours.k == old.k


def _edge_cases():
    for family in FAMILIES:
        for order in ORDERS:
            for band in ANALOG_BANDS:
                yield FilterSpec("bandpass", family, order, *band)
            for fs in (44100.0, 96000.0):
                for response, lo, hi in DIGITAL:
                    yield FilterSpec(response, family, order, lo, hi, stage="digital", fs_hz=fs)
            # an edge close to Nyquist: the crossing of a ripple family lies well above it
            yield FilterSpec("lowpass", family, order, None, 0.97 * 24000.0, stage="digital", fs_hz=48000.0)


def test_closed_form_edges_match_the_half_power_search():
    # reference: the scalar search the closed forms replace (Filter._crossing_search, scipy.optimize.brentq)
    worst = 0.0
    for spec in _edge_cases():
        f = design(spec)
        lo, hi = f.edges_3db
        assert (lo is None) == (spec.response == "lowpass") and (hi is None) == (spec.response == "highpass")
        if hi is not None:
            ref = f._crossing_search(spec.high_hz, upward=True)
            assert hi == pytest.approx(ref, rel=1e-9)
            worst = max(worst, abs(hi / ref - 1))
        if lo is not None:
            ref = f._crossing_search(spec.low_hz, upward=False)
            assert lo == pytest.approx(ref, rel=1e-9)
            worst = max(worst, abs(lo / ref - 1))
        for e in (lo, hi):
            if e is not None:
                assert float(f.power_response(e)) == pytest.approx(0.5, rel=1e-8)
    assert worst > 0.0  # two methods, not one value read twice


def _quad_varying(spec: FilterSpec) -> float:
    """∫₀^∞ (|H(f)|² − |H(∞)|²) df in Hz: scipy.integrate.quad in ln f of scipy.signal.freqs_zpk."""
    z, p, k = scipy_design(spec, [2 * np.pi * spec.low_hz, 2 * np.pi * spec.high_hz])
    floor = abs(k) ** 2 if len(z) == len(p) else 0.0

    def g(u):
        f = math.exp(u)
        h = signal.freqs_zpk(z, p, k, worN=[2 * np.pi * f])[1][0]
        return (abs(h) ** 2 - floor) * f

    lo, hi = math.log(spec.low_hz), math.log(spec.high_hz)
    pts = np.concatenate(([lo - 30.0, lo - 12.0], np.linspace(lo - 1.0, hi + 1.0, 40), [hi + 12.0, hi + 30.0]))
    val = sum(
        integrate.quad(g, a, b, epsabs=0, epsrel=1e-12, limit=400)[0] for a, b in zip(pts[:-1], pts[1:], strict=True)
    )
    # beyond ±30 in ln f, |H|² − floor (falling at least as f^±2) leaves less than 1e-20 of the total
    return val


@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")  # checked by value
@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("band", [(995.0, 1005.0), (40.0, 60.0), (300.0, 3400.0), (5.0, 20900.0)])
def test_bandpass_noise_integral_is_bw_times_the_prototype(family, band):
    for order in ORDERS:
        spec = FilterSpec("bandpass", family, order, *band)
        closed = design(spec).varying_integral_hz()
        # the numeric integral of the scipy design (scipy.integrate.quad, scipy.signal.freqs_zpk);
        # with a floor (even-order elliptic) |H|² − |H(∞)|² loses digits to the subtraction
        # above the band, and quad with them (about 1e-8)
        floor = family == "elliptic" and order % 2 == 0
        assert closed == pytest.approx(_quad_varying(spec), rel=1e-7 if floor else 1e-9)
        if family == "butterworth":
            # ENBW = BW·(π/2n)/sin(π/2n), the lowpass closed form through x(ω)
            assert closed == pytest.approx((band[1] - band[0]) * butterworth_enbw_ratio(order), rel=1e-12)
        # the Lyapunov path it replaces (scipy.linalg.solve_continuous_lyapunov on the companion
        # form; Simpson's rule where that is ill-conditioned), on scipy.signal's own design.  For
        # a 1 % band from order 5 up that solve loses the answer (3e-3 off at order 6, all of it
        # at order 8: quad and the Butterworth closed form above agree with the new value).
        if band[1] / band[0] > 1.1 or order <= 4:
            assert closed == pytest.approx(design(spec, use_table=False).varying_integral_hz(), rel=1e-6)


def _impulse_energy_hz(spec: FilterSpec, n: int) -> float:
    """(fs/2)·Σ h[n]² (Parseval): h from scipy.signal.sosfilt of scipy.signal's own design (zpk2sos)."""
    wn = {"lowpass": spec.high_hz, "highpass": spec.low_hz}.get(spec.response, [spec.low_hz, spec.high_hz])
    z, p, k = scipy_design(spec, wn)
    x = np.zeros(n)
    x[0] = 1.0
    h = signal.sosfilt(signal.zpk2sos(z, p, k), x)
    assert np.max(np.abs(h[-n // 8 :])) < 1e-12 * np.max(np.abs(h))  # decayed: the sum is complete
    return float(np.sum(h * h)) * spec.fs_hz / 2


DIGITAL_ENBW = [
    ("lowpass", None, 3000.0, 48000.0),
    ("highpass", 25.0, None, 96000.0),
    ("bandpass", 40.0, 60.0, 48000.0),  # narrow and low: clustered poles near z = 1
    ("bandpass", 40.0, 60.0, 96000.0),
    ("bandpass", 300.0, 1749.0, 44100.0),  # near bw = 2·wo: an odd order's real pole nearly doubles
    ("bandpass", 5.0, 21000.0, 48000.0),
]


@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("case", DIGITAL_ENBW)
def test_digital_power_integral_is_exact(family, case):
    response, lo, hi, fs = case
    for order in (1, 2, 5, 8):
        spec = FilterSpec(response, family, order, lo, hi, stage="digital", fs_hz=fs)
        exact = design(spec).power_integral_hz()
        # long enough for the impulse response to decay below 1e-12 of its peak
        truth = _impulse_energy_hz(spec, 1 << 21 if (lo or 1000.0) < 100.0 else 1 << 16)
        assert exact == pytest.approx(truth, rel=1e-9)
        # the dense-grid trapezoid it replaces (design(use_table=False)) agrees to its own accuracy
        assert exact == pytest.approx(design(spec, use_table=False).power_integral_hz(), rel=1e-4)


def test_untabled_ripple_uses_the_same_transforms():
    # a ripple the table does not hold: the prototype comes from scipy.signal, the rest as tabled
    for stage, fs in (("analog", None), ("digital", 48000.0)):
        for family in ("chebyshev1", "elliptic"):
            spec = FilterSpec("bandpass", family, 5, 300.0, 3400.0, ripple_db=0.25, stage=stage, fs_hz=fs)
            ours, old = design(spec), design(spec, use_table=False)
            f = np.geomspace(20.0, 20000.0, 200)
            np.testing.assert_allclose(ours.power_response(f), reference_power(spec, f), rtol=1e-9, atol=0)
            for a, b in zip(ours.edges_3db, old.edges_3db, strict=True):
                assert a == pytest.approx(b, rel=1e-9)
            assert ours.power_integral_hz() == pytest.approx(old.power_integral_hz(), rel=1e-6)


def test_bandpass_and_digital_sweeps_import_no_scipy(tmp_path):
    """Sweeps of analog bandpasses and digital lowpass, highpass and bandpass candidates
    (four families, tabled ripple) import no scipy module."""
    import os
    import subprocess
    import sys

    code = f"""
import sys
import numpy as np
import soundfile as sf
from audiobw.chain import Chain
from audiobw.sweep import Grid, run_sweep
path = {str(tmp_path / "program.wav")!r}
rng = np.random.default_rng(3)
sf.write(path, 0.1 * rng.standard_normal((48000 * 2, 2)), 48000, subtype="FLOAT")
fams = ("butterworth", "bessel", "chebyshev1", "elliptic")
bands = dict(low_edges_hz=(50.0, 300.0), high_edges_hz=(3000.0, 15000.0))
rows = 0
for stage in ("analog", "digital"):
    chain = Chain(stage=stage, anti_alias="ideal")
    rows += len(run_sweep(path, chain=chain, grid=Grid("bandpass", fams, (2, 5), **bands),
                          targets={{"max_loss_db": 1.0}}).cases)
chain = Chain(stage="digital", anti_alias="ideal")
for response, cuts in (("lowpass", (3000.0, 20000.0)), ("highpass", (30.0, 200.0))):
    rows += len(run_sweep(path, chain=chain, grid=Grid(response, fams, (1, 8), cutoffs_hz=cuts),
                          targets={{"max_loss_db": 1.0}}).cases)
print(rows, sorted(m for m in sys.modules if m.split(".")[0] == "scipy")[:5])
"""
    out = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        check=True,
        env={**os.environ, "AUDIOBW_NO_CACHE": "1"},
    )
    # 2 stages x 4 families x 2 orders x 4 bands, and 2 x 4 x 2 x 2 digital lowpass/highpass
    assert out.stdout.strip().splitlines()[-1] == "96 []", out.stdout + out.stderr


def test_cascade_energy_closed_forms_with_a_repeated_pole():
    from audiobw._zpk import cascade_energy

    # ∫|h(t)|² dt (Parseval) by hand: h = t·e^{-t} -> 1/4; h = (e^{-t} - e^{-3t})/2 -> 1/24;
    # (s + 2)/(s + 1)² has h = (1 + t)·e^{-t} -> 1/2 + 1/2 + 1/4
    assert cascade_energy([(-1 + 0j, None), (-1 + 0j, None)], 1.0) == pytest.approx(0.25, rel=1e-15)
    assert cascade_energy([(-1 + 0j, None), (-3 + 0j, None)], 1.0 / 3.0) == pytest.approx(1 / 24, rel=1e-15)
    assert cascade_energy([(-1 + 0j, -2 + 0j), (-1 + 0j, None)], 1.0) == pytest.approx(1.25, rel=1e-15)
    with pytest.raises(ValueError):
        cascade_energy([(-1 + 0j, -2 + 0j)], 1.0)  # not strictly proper
