"""1/f corners of the amplifier noise densities (--en-corner, --in-corner)."""

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate

from audiobw.chain import Chain
from audiobw.cli import main
from audiobw.filters import Filter, FilterSpec, design
from audiobw.noise import FLICKER_FROM_HZ, budget, flicker_per_hz, noise_spectra, noise_total
from audiobw.spectrum import trapezoid_weights

from .conftest import tones

FS = 48000.0


def flat_digital() -> Filter:
    """A brickwall band stands in as the meter band through a filter of gain 1 everywhere."""
    spec = FilterSpec("lowpass", "butterworth", 1, None, 20000.0, stage="digital", fs_hz=FS)
    return Filter(spec, np.array([], complex), np.array([], complex), 1.0)


@pytest.mark.parametrize("corner", [10.0, 100.0, 2000.0])
@pytest.mark.parametrize("band", [(20.5, 20000.5), (0.5, 3400.5), (300.5, 3400.5)])
def test_brickwall_band_matches_the_closed_form(corner, band):
    """e_n² ∫ (1 + fc/f) df over f1…f2 = e_n²·(B + fc·ln(f2/f1)) (common practice: the
    integrated noise of a 1/f-cornered density, as op-amp application notes compute it),
    also against scipy.integrate.quad.  The 1 Hz grid puts f1 and f2 on bin boundaries."""
    # --anti-alias ideal: the brick-wall meter band stands for the whole chain (nothing folds)
    chain = Chain(source_ohms=0.0, in_a_rthz=0.0, en_v_rthz=3e-9, gain_db=0.0, en_corner_hz=corner, anti_alias="ideal")
    b = budget(chain, flat_digital(), FS, meter=band, n_bins=24000)
    f1, f2 = band
    closed = chain.en_v_rthz**2 * ((f2 - f1) + corner * math.log(f2 / f1))
    # in u = ln f (smooth: e_n²·(f + fc) du), absolute tolerance 0 since the values are ~1e-13 V²
    quad, _ = integrate.quad(
        lambda u: chain.en_v_rthz**2 * (math.exp(u) + corner),
        math.log(f1),
        math.log(f2),
        limit=200,
        epsabs=0.0,
        epsrel=1e-12,
    )
    assert closed == pytest.approx(quad, rel=1e-9, abs=0)
    assert b["components"]["amplifier_voltage"]["vrms"] ** 2 == pytest.approx(closed, rel=1e-9, abs=0)


def test_current_noise_corner_through_the_source():
    """i_n(f)²·Rs² = (i_n·Rs)²·(1 + fc/f): the same closed form for the current part."""
    chain = Chain(
        source_ohms=10e3, en_v_rthz=0.0, in_a_rthz=2e-12, gain_db=20.0, in_corner_hz=300.0, anti_alias="ideal"
    )
    b = budget(chain, flat_digital(), FS, meter=(20.5, 20000.5), n_bins=24000)
    closed = chain.gain**2 * (2e-12 * 10e3) ** 2 * (19980.0 + 300.0 * math.log(20000.5 / 20.5))
    assert b["components"]["amplifier_current"]["vrms"] ** 2 == pytest.approx(closed, rel=1e-9, abs=0)
    assert b["components"]["amplifier_voltage"]["vrms"] == 0.0


def test_from_zero_hz_the_integral_starts_at_the_stated_floor():
    f = np.linspace(0.0, 24000.0, 24001)
    w = trapezoid_weights(f.size, 1.0)
    total = float(np.sum(flicker_per_hz(f, w) * w))
    assert total == pytest.approx(math.log(24000.0 / FLICKER_FROM_HZ), rel=1e-12)


def test_no_corner_is_the_white_model():
    white = Chain()
    same = Chain(en_corner_hz=None, in_corner_hz=None)
    filt = design(FilterSpec("lowpass", "butterworth", 4, None, 10000.0))
    f = np.linspace(0.0, FS / 2, 4097)
    w = trapezoid_weights(f.size, f[1] - f[0])
    np.testing.assert_array_equal(noise_total(white, filt, f, w, FS), noise_total(same, filt, f, w, FS))


def test_noise_total_is_the_sum_of_the_parts_with_corners():
    chain = Chain(en_corner_hz=500.0, in_corner_hz=2000.0, source_ohms=5e3, amp_bandwidth_hz=50e3)
    for stage in ("analog", "digital"):
        filt = design(FilterSpec("bandpass", "bessel", 3, 50.0, 12000.0, stage=stage, fs_hz=FS))
        f = np.linspace(0.0, FS / 2, 8193)
        w = trapezoid_weights(f.size, f[1] - f[0])
        parts = noise_spectra(chain, filt, f, w, FS).total
        np.testing.assert_allclose(noise_total(chain, filt, f, w, FS), parts, rtol=1e-12)


@settings(max_examples=30, deadline=None)
@given(
    c1=st.floats(1.0, 5000.0),
    c2=st.floats(1.0, 5000.0),
    cutoff=st.floats(200.0, 20000.0),
    response=st.sampled_from(["lowpass", "highpass"]),
)
def test_a_higher_corner_never_lowers_the_noise(c1, c2, cutoff, response):
    lo_c, hi_c = sorted((c1, c2))
    edges = (None, cutoff) if response == "lowpass" else (cutoff, None)
    filt = design(FilterSpec(response, "butterworth", 4, *edges))
    f = np.linspace(0.0, FS / 2, 2049)
    w = trapezoid_weights(f.size, f[1] - f[0])
    # a highpass's noise is bounded only by an anti-alias filter or the amplifier: the ideal one here
    n = [
        float(np.sum(noise_total(Chain(en_corner_hz=c, anti_alias="ideal"), filt, f, w, FS) * w))
        for c in (None, lo_c, hi_c)
    ]
    assert n[0] <= n[1] <= n[2]


def test_sweep_with_corners_lowers_every_snr_and_records_them(write_audio, rng, tmp_path, capsys):
    fs = 48000
    x = tones([220.0, 1500.0], [0.1, 0.05], fs, 2.0) + rng.normal(0, 1e-5, 2 * fs)
    prog = write_audio("p.wav", x, fs)
    args = [
        "sweep",
        prog,
        "--family",
        "butterworth",
        "--order",
        "4",
        "--cutoffs",
        "2k:20k:4",
        "--max-loss",
        "1",
        "--en",
        "5n",
        "--gain",
        "60",
    ]
    docs = []
    for extra, name in (([], "white"), (["--en-corner", "2k", "--in-corner", "500"], "pink")):
        out = tmp_path / name
        assert main([str(a) for a in [*args, *extra, "--out", out]]) == 0
        capsys.readouterr()
        docs.append(json.loads((out / "sweep.json").read_text()))
    white, pink = docs
    assert pink["chain"]["en_corner_hz"] == 2000.0 and pink["chain"]["in_corner_hz"] == 500.0
    assert white["chain"]["en_corner_hz"] is None
    for a, b in zip(white["cases"], pink["cases"]):
        assert b["noise_vrms"] > a["noise_vrms"] and b["snr_db"] < a["snr_db"]
        # the 1/f part adds G²e_n²·fc·ln(f2/f1) on top of G²e_n²·ENBW-ish: a narrower band loses more
    ratio = [b["noise_vrms"] / a["noise_vrms"] for a, b in zip(white["cases"], pink["cases"])]
    assert ratio == sorted(ratio, reverse=True)


@pytest.mark.parametrize("value", ["0", "-5", "fast"])
def test_bad_corner_gets_one_line(write_audio, rng, tmp_path, capsys, value):
    prog = write_audio("p.wav", rng.normal(0, 0.1, 48000), 48000)
    code = main(
        ["sweep", str(prog), "--cutoffs", "10k", "--max-loss", "1", "--en-corner", value, "--out", str(tmp_path / "o")]
    )
    err = capsys.readouterr().err
    assert code == 2 and "--en-corner" in err and "Traceback" not in err


def test_corner_from_the_chain_file(write_audio, rng, tmp_path, capsys):
    prog = write_audio("p.wav", rng.normal(0, 0.1, 48000), 48000)
    chain = tmp_path / "c.toml"
    chain.write_text('[amplifier]\nen_corner = "1.5kHz"\nin_corner = 200\n')
    out = tmp_path / "o"
    assert (
        main(["sweep", str(prog), "--chain", str(chain), "--cutoffs", "10k", "--max-loss", "1", "--out", str(out)]) == 0
    )
    doc = json.loads((out / "sweep.json").read_text())
    assert doc["chain"]["en_corner_hz"] == 1500.0 and doc["chain"]["in_corner_hz"] == 200.0
