"""Filter design: edges, ENBW, responses — against closed forms and scipy."""

import math

import numpy as np
import pytest
from scipy import integrate, signal

from audiobw.errors import ParameterError
from audiobw.filters import FAMILIES, FilterSpec, butterworth_enbw_ratio, design, validate_spec

FS = 48000.0


def spec(response="lowpass", family="butterworth", order=4, lo=None, hi=1000.0, stage="analog", **kw):
    return FilterSpec(response, family, order, lo, hi, stage=stage, fs_hz=FS, **kw)


# Butterworth ENBW/fc = (π/2n)/sin(π/2n): closed form from ∫ dx/(1+x^2n)
# (Gradshteyn & Ryzhik 3.241.2).  Published table values, e.g. 1.571, 1.111,
# 1.047, 1.026 for n = 1..4 (common practice; the figures quoted in noise
# bandwidth tables, from memory).
PUBLISHED_BUTTERWORTH_ENBW = {1: 1.571, 2: 1.111, 3: 1.047, 4: 1.026, 5: 1.017, 6: 1.012, 8: 1.006}


@pytest.mark.parametrize("order", range(1, 9))
def test_butterworth_enbw_closed_form(order):
    f = design(spec(order=order, hi=1000.0))
    assert f.enbw_hz() == pytest.approx(1000.0 * butterworth_enbw_ratio(order), rel=1e-9)


@pytest.mark.parametrize("order,ratio", sorted(PUBLISHED_BUTTERWORTH_ENBW.items()))
def test_butterworth_enbw_published_table(order, ratio):
    f = design(spec(order=order, hi=1000.0))
    assert f.enbw_hz() / 1000.0 == pytest.approx(ratio, abs=0.0006)


def test_first_order_rc_enbw_is_pi_over_two():
    # one RC pole: ENBW = (π/2)·fc (common practice; e.g. Motchenbacher &
    # Connelly, Low-Noise Electronic System Design, §1.6)
    assert design(spec(order=1, hi=159.155)).enbw_hz() == pytest.approx(math.pi / 2 * 159.155, rel=1e-12)


@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("lo,hi,order", [(5.0, 20939.0, 7), (1.0, 23900.0, 8), (2.0, 20000.0, 6)])
def test_wide_bandpass_integral_survives_an_ill_conditioned_state_space(family, lo, hi, order):
    # Found by hypothesis: the companion form of a Butterworth 7 bandpass at
    # 5 Hz–20.9 kHz made the Lyapunov solve return a negative integral
    # (−89 080 Hz).  Reference: numpy.trapezoid on 400 001 log-spaced points of
    # |H|² evaluated by scipy.signal.freqs_zpk, independent of the fast path.
    f = design(spec("bandpass", family, order, lo, hi))
    z, p, k = f.zpk()
    x = np.geomspace(lo / 1e4, hi * 1e4, 400001)
    _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * x)
    reference = float(np.trapezoid(np.abs(h) ** 2 - f.floor_gain(), x))
    assert f.varying_integral_hz() == pytest.approx(reference, rel=1e-6)
    assert 0.9 * (hi - lo) < f.varying_integral_hz() < 1.6 * (hi - lo)


@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize(
    "response,lo,hi", [("lowpass", None, 3000.0), ("bandpass", 80.0, 9000.0), ("highpass", 200.0, None)]
)
@pytest.mark.parametrize("order", [1, 2, 5, 8])
@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")  # quad's tail warnings; checked by value
def test_gramian_integral_matches_numerical_integration(family, response, lo, hi, order):
    f = design(spec(response, family, order, lo, hi))
    exact = f.varying_integral_hz()
    floor = f.floor_gain()
    # scipy.integrate.quad on |H|² - |H(inf)|², with |H| evaluated independently
    # by scipy.signal.freqs_zpk
    z, p, k = f.zpk()

    def h2(x):
        _, h = signal.freqs_zpk(z, p, k, worN=[2 * np.pi * x])
        return abs(h[0]) ** 2 - floor

    e = hi or lo
    num = sum(
        integrate.quad(h2, a, b, limit=800, epsabs=1e-9 * e)[0]
        for a, b in [(0, 0.5 * e), (0.5 * e, 2 * e), (2 * e, 50 * e), (50 * e, 1e3 * e)]
    )
    # the tail above 1000·edge by the substitution u = 1/f (tails fall as 1/f²)
    num += integrate.quad(lambda u: h2(1.0 / u) / u**2, 1e-12 / e, 1.0 / (1e3 * e), limit=800)[0]
    assert exact == pytest.approx(num, rel=1e-5, abs=1e-6 * e)
    if floor == 0:
        assert f.power_integral_hz() == pytest.approx(exact, rel=1e-12)
    else:
        assert math.isinf(f.power_integral_hz())


def test_floor_gains():
    # |H(inf)|²: 1 for a highpass; the stopband floor for an even-order elliptic
    # lowpass (scipy.signal.ellip: even orders keep |H(inf)| = 10^(-rs/20))
    assert design(spec("highpass", "butterworth", 3, 100.0, None)).floor_gain() == pytest.approx(1.0)
    assert design(spec("lowpass", "elliptic", 4, None, 1000.0, stopband_db=60.0)).floor_gain() == pytest.approx(
        1e-6, rel=1e-6
    )
    assert design(spec("lowpass", "elliptic", 5, None, 1000.0)).floor_gain() == 0.0


@pytest.mark.parametrize("family", ["butterworth", "bessel"])
@pytest.mark.parametrize("order", [1, 2, 3, 4, 6, 8])
@pytest.mark.parametrize("stage", ["analog", "digital"])
@pytest.mark.parametrize(
    "response,lo,hi", [("lowpass", None, 2500.0), ("highpass", 120.0, None), ("bandpass", 120.0, 8000.0)]
)
def test_minus_3db_at_cutoff_independently(family, order, stage, response, lo, hi):
    f = design(spec(response, family, order, lo, hi, stage=stage))
    z, p, k = f.zpk()
    edges = [e for e in (lo, hi) if e]
    for e in edges:
        if stage == "analog":
            _, h = signal.freqs_zpk(z, p, k, worN=[2 * np.pi * e])  # scipy.signal.freqs_zpk
        else:
            _, h = signal.freqz_zpk(z, p, k, worN=[e], fs=FS)  # scipy.signal.freqz_zpk, fs given
        assert 20 * np.log10(abs(h[0])) == pytest.approx(-3.0103, abs=2e-3)


@pytest.mark.parametrize("family", ["chebyshev1", "elliptic"])
@pytest.mark.parametrize("order", [2, 3, 4, 8])
def test_ripple_families_report_true_minus_3db_edge(family, order):
    f = design(spec("lowpass", family, order, None, 2000.0, ripple_db=0.5))
    lo, hi = f.edges_3db
    assert lo is None and hi > 2000.0
    # the ripple edge is at -ripple dB; the reported edge is at -3.01 dB
    assert f.response_db(2000.0) == pytest.approx(-0.5, abs=1e-6)
    assert f.response_db(hi) == pytest.approx(-3.0103, abs=1e-6)
    # scipy.signal.cheby1/ellip: passband peak gain is 0 dB (even orders dip at DC)
    fgrid = np.linspace(1.0, 2000.0, 4000)
    assert f.response_db(fgrid).max() == pytest.approx(0.0, abs=1e-3)


def test_elliptic_reaches_its_stopband():
    f = design(spec("lowpass", "elliptic", 6, None, 2000.0, stopband_db=70.0))
    fgrid = np.linspace(4000.0, 24000.0, 20000)
    assert f.response_db(fgrid).max() <= -70.0 + 1e-6


def test_bandpass_has_twice_the_poles():
    f = design(spec("bandpass", "butterworth", 3, 100.0, 5000.0))
    assert f.spec.poles == 6 and len(f.p) == 6


def test_digital_sos_matches_zpk_response():
    f = design(spec("bandpass", "elliptic", 4, 30.0, 15000.0, stage="digital"))
    w, h = signal.sosfreqz(f.sos(), worN=np.array([100.0, 1000.0, 10000.0]), fs=FS)
    np.testing.assert_allclose(np.abs(h) ** 2, f.power_response(w), rtol=1e-8)


def test_highpass_analog_integral_is_infinite_and_enbw_capped():
    f = design(spec("highpass", "butterworth", 2, 100.0, None))
    assert math.isinf(f.power_integral_hz())
    assert f.enbw_hz(24000.0) == pytest.approx(24000.0 - 100.0 * butterworth_enbw_ratio(2), rel=2e-3)


@pytest.mark.parametrize(
    "kw,match",
    [
        (dict(hi=24000.0), r"edge 24000 Hz must be 0 < edge < 0.98\*fs/2 \(fs=48000"),
        (dict(hi=-5.0), "edge -5 Hz"),
        (dict(order=0), "--order: 0 is out of range; accepted: integers 1 to 8"),
        (dict(order=20), "--order: 20 is out of range"),
        (dict(response="bandpass", lo=5000.0, hi=100.0), "low edge 5000 Hz is not below high edge 100 Hz"),
        (dict(family="chebyshev1", ripple_db=3.5), "--ripple: 3.5 dB is out of range"),
        (dict(family="elliptic", stopband_db=0.05), "--stopband"),
        (dict(family="gauss"), "--family: 'gauss' is not known"),
    ],
)
def test_invalid_specs_are_refused(kw, match):
    with pytest.raises(ParameterError, match=match):
        validate_spec(spec(**kw), fs_hz=FS)


@pytest.mark.parametrize(
    "family,make",
    [
        ("butterworth", lambda n, w, bt: signal.butter(n, w, btype=bt, analog=True, output="zpk")),
        ("bessel", lambda n, w, bt: signal.bessel(n, w, btype=bt, analog=True, norm="mag", output="zpk")),
        ("chebyshev1", lambda n, w, bt: signal.cheby1(n, 0.1, w, btype=bt, analog=True, output="zpk")),
        ("elliptic", lambda n, w, bt: signal.ellip(n, 0.1, 60.0, w, btype=bt, analog=True, output="zpk")),
    ],
)
@pytest.mark.parametrize("order", [1, 3, 6])
@pytest.mark.parametrize(
    "response,lo,hi", [("lowpass", None, 5000.0), ("highpass", 60.0, None), ("bandpass", 300.0, 3400.0)]
)
def test_analog_response_matches_a_direct_scipy_design(family, make, order, response, lo, hi):
    # Independent reference: scipy designs the same prototype directly at the
    # edge in rad/s (no normalisation), evaluated with scipy.signal.freqs_zpk.
    ours = design(spec(response, family, order, lo, hi))
    w = [2 * np.pi * lo, 2 * np.pi * hi] if response == "bandpass" else 2 * np.pi * (lo or hi)
    z, p, k = make(order, w, response)
    f = np.geomspace(5.0, 40000.0, 400)
    _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * f)
    ref = 20 * np.log10(np.maximum(np.abs(h), 1e-300))
    got = ours.response_db(f)
    mask = ref > -150  # deep stopband values are at the rounding floor
    np.testing.assert_allclose(got[mask], ref[mask], atol=1e-6)


def test_edges_of_a_very_wide_digital_bessel_bandpass():
    # regression (found by the hypothesis property test): the half-power search
    # must bracket the crossing whichever side of the design edge it lies on
    f = design(
        FilterSpec(
            "bandpass", "bessel", 4, 5.0, 21115.75, ripple_db=1.0, stopband_db=20.0, stage="digital", fs_hz=48000.0
        )
    )
    lo, hi = f.edges_3db
    assert f.response_db(lo) == pytest.approx(-3.0103, abs=1e-6)
    assert f.response_db(hi) == pytest.approx(-3.0103, abs=1e-6)


# --- the shipped prototype table (audiobw/_prototypes.py) -------------------------------


def _scipy_prototype(response, family, order, ripple):
    """Reference: scipy.signal.butter / bessel(norm='mag') / cheby1 / ellip, analog, output='zpk', 1 rad/s."""
    kw = dict(btype=response, analog=True, output="zpk")
    if family == "butterworth":
        return signal.butter(order, 1.0, **kw)
    if family == "bessel":
        return signal.bessel(order, 1.0, norm="mag", **kw)
    if family == "elliptic":
        rp, rs = ripple
        return signal.ellip(order, rp, rs, 1.0, **kw)
    return signal.cheby1(order, ripple, 1.0, **kw)


def _sorted(x):
    x = np.asarray(x, complex)
    return x[np.lexsort((x.imag, x.real))]


def test_prototype_table_matches_scipy_signal():
    from audiobw._prototypes import TABLE

    # lp/hp x (butterworth, bessel, 3 chebyshev ripples, 3 elliptic ripples at 60 dB stopband) x orders
    assert len(TABLE) == 2 * (2 + 3 + 3) * 8
    for (response, family, order, ripple), (z, p, k, gram, (upward, ratio)) in TABLE.items():
        zr, pr, kr = _scipy_prototype(response, family, order, ripple)
        assert len(z) == len(zr) and len(p) == len(pr)
        np.testing.assert_allclose(_sorted(z), _sorted(zr), rtol=0, atol=1e-12)
        np.testing.assert_allclose(_sorted(p), _sorted(pr), rtol=1e-12, atol=1e-14)
        assert k == pytest.approx(float(np.real(kr)), rel=1e-12)
        # Gramian term: ∫₀^∞ (|H|² − |H(∞)|²) dω / π at 1 rad/s, by quadrature of
        # scipy.signal.freqs_zpk (scipy.integrate.quad); cross ratio: |H|² = 1/2 there
        w_edge = ratio  # rad/s, since the prototype edge is 1 rad/s
        _, h = signal.freqs_zpk(zr, pr, kr, worN=[w_edge])
        assert abs(h[0]) ** 2 == pytest.approx(0.5, abs=1e-9)
        assert upward == (response == "lowpass")
        floor = float(np.real(kr)) ** 2 if len(zr) == len(pr) else 0.0

        def integrand(w, zr=zr, pr=pr, kr=kr, floor=floor):
            return abs(signal.freqs_zpk(zr, pr, kr, worN=[w])[1][0]) ** 2 - floor

        val = integrate.quad(integrand, 0, 50)[0] + integrate.quad(integrand, 50, np.inf, limit=200)[0]
        assert 2 * gram == pytest.approx(2 * val / math.pi, rel=1e-6, abs=1e-9)


@pytest.mark.parametrize("family", ["butterworth", "bessel", "chebyshev1", "elliptic"])
@pytest.mark.parametrize("response", ["lowpass", "highpass"])
def test_tabled_design_equals_scipy_designed(family, response):
    for order in (1, 3, 8):
        kw = dict(low_hz=None, high_hz=3000.0) if response == "lowpass" else dict(low_hz=80.0, high_hz=None)
        spec = FilterSpec(response, family, order, **kw)
        a, b = design(spec), design(spec, use_table=False)
        f = np.geomspace(10, 40000, 50)
        np.testing.assert_allclose(a.power_response(f), b.power_response(f), rtol=1e-10, atol=1e-300)
        for ea, eb in zip(a.edges_3db, b.edges_3db):
            assert (ea is None and eb is None) or ea == pytest.approx(eb, rel=1e-10)
        if response == "lowpass":
            assert a.enbw_hz() == pytest.approx(b.enbw_hz(), rel=1e-10)


def test_sweep_imports_no_heavy_scipy(tmp_path):
    """A sweep of the four families (default ripple and stopband) imports no scipy at all (numpy.fft, tabled prototypes)."""
    import subprocess
    import sys
    from pathlib import Path

    clip = Path(__file__).resolve().parents[1] / "clips" / "ensemble-48k-stereo.flac"
    code = (
        "import sys\n"
        "from audiobw.cli import main\n"
        f"args = ['sweep', {str(clip)!r}, '--family', 'butterworth,bessel,chebyshev1,elliptic', '--order', '2,3,4',\n"
        f"        '--cutoffs', '2k:20k:8', '--max-loss', '0.5', '--out', {str(tmp_path / 'o')!r}]\n"
        "try:\n    rc = main(args)\nexcept SystemExit as e:\n    rc = e.code\n"
        "heavy = sorted(m for m in sys.modules if m.split('.')[0] == 'scipy')\n"
        "print(rc, heavy[:5])\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        check=True,
        env={**__import__("os").environ, "AUDIOBW_NO_CACHE": "1"},
    )
    assert out.stdout.strip().splitlines()[-1] == "0 []", out.stdout + out.stderr
    assert (tmp_path / "o" / "sweep.json").exists()
