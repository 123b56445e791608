"""Issue 13: noise figure and equivalent input noise, checked against their definitions and a known figure."""

from __future__ import annotations

import math

import pytest
from scipy import constants

from audiobw.chain import Chain
from audiobw.filters import FilterSpec, design
from audiobw.noise import budget, noise_figure_db

K = constants.k  # Boltzmann constant, exact SI value (scipy.constants)


def test_noiseless_amplifier_has_zero_noise_figure():
    # F = 1 (0 dB) for an amplifier that adds no noise (IEEE Std 161 / Friis 1944 definition)
    assert noise_figure_db(Chain(source_ohms=150, en_v_rthz=0.0, in_a_rthz=0.0)) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("rs,en,i_n", [(150, 1.2e-9, 1.5e-12), (600, 3e-9, 0.5e-12), (10e3, 5e-9, 1e-12)])
def test_noise_figure_formula(rs, en, i_n):
    # F = 1 + (e_n² + (i_n·R_s)²)/(4·k·T0·R_s), T0 = 290 K (IEEE definition of noise factor)
    f = 1 + (en**2 + (i_n * rs) ** 2) / (4 * K * 290.0 * rs)
    assert noise_figure_db(Chain(source_ohms=rs, en_v_rthz=en, in_a_rthz=i_n)) == pytest.approx(
        10 * math.log10(f), abs=1e-9
    )


def test_noise_figure_is_undefined_for_an_ideal_source():
    assert noise_figure_db(Chain(source_ohms=0.0)) is None


def test_ein_of_a_150_ohm_source_over_20_khz():
    """A noiseless amplifier on 150 Ω at 290 K over a 20 kHz band shows the source's own noise:
    √(4kTRB) = 0.219 µV = −131.0 dBu (the figure preamp data sheets compare against: common practice)."""
    fs = 192000
    # a flat analog stage far above the meter band, so the band is set by the meter alone
    filt = design(FilterSpec("lowpass", "butterworth", 8, None, 90000.0, stage="analog", fs_hz=fs))
    chain = Chain(source_ohms=150.0, temperature_k=290.0, en_v_rthz=0.0, in_a_rthz=0.0, gain_db=40.0)
    b = budget(chain, filt, fs, meter=(0.0, 20000.0), n_bins=1 << 16)
    expected = 20 * math.log10(math.sqrt(4 * K * 290.0 * 150.0 * 20000.0) / math.sqrt(0.6))
    assert expected == pytest.approx(-131.0, abs=0.1)
    assert b["ein_dbu"] == pytest.approx(expected, abs=0.05)
    # A-weighting of white noise over 0-20 kHz lowers it by about 2.3 dB (IEC 61672-1 curve integrated)
    assert -3.0 < b["ein_dbu_a"] - b["ein_dbu"] < -1.5
    # amplifier noise adds on a power basis: EIN rises by the noise figure
    noisy = Chain(source_ohms=150.0, en_v_rthz=1.2e-9, in_a_rthz=1.5e-12, gain_db=40.0)
    bn = budget(noisy, filt, fs, meter=(0.0, 20000.0), n_bins=1 << 16)
    assert bn["ein_dbu"] - b["ein_dbu"] == pytest.approx(bn["noise_figure_db"], abs=0.05)


def test_boltzmann_constant_is_the_si_value():
    """audiobw.chain.BOLTZMANN is written out; it equals scipy.constants.k exactly (SI 2019)."""
    from audiobw.chain import BOLTZMANN

    assert BOLTZMANN == K == 1.380649e-23
