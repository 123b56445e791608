"""The chain model and the noise budget, against hand values and closed forms."""

import math

import numpy as np
import pytest

from audiobw.chain import BOLTZMANN, Chain, johnson_noise_vrms, vrms_to_dbu
from audiobw.errors import ParameterError
from audiobw.filters import FilterSpec, butterworth_enbw_ratio, design
from audiobw.noise import budget, folded_noise_gain
from audiobw.spectrum import trapezoid_weights

FS = 48000.0


def test_boltzmann_is_the_exact_si_value():
    # SI brochure, 9th edition (2019): k = 1.380649e-23 J/K exactly
    assert BOLTZMANN == 1.380649e-23


@pytest.mark.parametrize(
    "r,t,b,expected",
    [
        # hand values of sqrt(4kTRB):
        (1000.0, 300.0, 1.0, 4.0704e-9),  # "1 kΩ ≈ 4 nV/√Hz at room temperature" (common practice)
        (1000.0, 290.0, 20000.0, 5.6596e-7),  # 4kT(290 K) = 1.6015e-20 J; ×1 kΩ×20 kHz = 3.203e-13 V²
        (50.0, 290.0, 1e6, 8.9487e-7),  # 50 Ω in 1 MHz: 0.895 µV (common practice, RF front ends)
        (600.0, 290.0, 20000.0, 4.3840e-7),
    ],
)
def test_johnson_noise_hand_values(r, t, b, expected):
    assert johnson_noise_vrms(r, t, b) == pytest.approx(expected, rel=2e-4)


def test_input_noise_adds_in_power():
    c = Chain(source_ohms=600.0, temperature_k=290.0, gain_db=0.0, en_v_rthz=3e-9, in_a_rthz=0.5e-12)
    assert c.density_amplifier_v2_hz() == pytest.approx(
        4 * BOLTZMANN * 290.0 * 600.0 + (3e-9) ** 2 + (0.5e-12 * 600.0) ** 2, rel=1e-12
    )
    g40 = Chain(source_ohms=600.0, temperature_k=290.0, gain_db=40.0, en_v_rthz=3e-9, in_a_rthz=0.5e-12)
    assert g40.density_amplifier_v2_hz() == pytest.approx(1e4 * c.density_amplifier_v2_hz(), rel=1e-12)


@pytest.mark.parametrize("bits", [8, 12, 16, 20, 24])
def test_quantisation_snr_is_6_02n_plus_1_76(bits):
    # Bennett (1948): q²/12 error power; a full-scale sine against it gives
    # SNR = 6.02·N + 1.76 dB (common practice; exact: 10·lg(1.5) + 20·N·lg 2)
    c = Chain(source_ohms=0.0, en_v_rthz=0.0, in_a_rthz=0.0, bits=bits, dither="none", stage="digital")
    f = design(FilterSpec("lowpass", "butterworth", 8, None, 0.97 * FS / 2, stage="digital", fs_hz=FS))
    # a digital filter near fs/2 passes almost all of the white error; use the
    # full band directly through the chain's own figure
    dr = 10 * math.log10(c.full_scale_power_v2 / c.quantisation_power_v2())
    assert dr == pytest.approx(6.02 * bits + 1.76, abs=0.01 + 0.0006 * bits)
    b = budget(c, f, FS)
    assert b["components"]["quantisation"]["share"] == pytest.approx(1.0)
    # through the filter the error power scales by its ENBW over fs/2
    assert b["dynamic_range_db"] == pytest.approx(dr - 10 * math.log10(f.enbw_hz(FS / 2) / (FS / 2)), abs=1e-3)


def test_tpdf_dither_triples_the_converter_noise():
    # TPDF dither of 2 LSB p-p adds 2·q²/12 (Wannamaker et al. 2000): total 3·q²/12, +4.77 dB
    c = Chain(source_ohms=0.0, en_v_rthz=0.0, in_a_rthz=0.0, bits=16, dither="tpdf")
    assert (c.quantisation_power_v2() + c.dither_power_v2()) / c.quantisation_power_v2() == pytest.approx(3.0)


def test_dbu_reference():
    # 0 dBu = sqrt(0.6) V = 0.7746 V rms; +4 dBu = 1.228 V (common practice)
    assert vrms_to_dbu(math.sqrt(0.6)) == pytest.approx(0.0, abs=1e-12)
    assert vrms_to_dbu(1.2277) == pytest.approx(4.0, abs=1e-3)


def grid(fs=FS, n=1 << 14):
    f = np.linspace(0.0, fs / 2, n + 1)
    return f, trapezoid_weights(f.size, f[1] - f[0])


@pytest.mark.parametrize("order", [1, 2, 4, 8])
def test_folded_noise_keeps_the_exact_total(order):
    # An analog Butterworth at 20 kHz before a 48 kHz converter: the noise it
    # passes above 24 kHz aliases, so the output carries ENBW·density in all.
    filt = design(FilterSpec("lowpass", "butterworth", order, None, 20000.0))
    f, w = grid()
    g, total = folded_noise_gain(filt, f, w, FS)
    assert total == pytest.approx(20000.0 * butterworth_enbw_ratio(order), rel=1e-9)
    assert np.sum(g * w) == pytest.approx(total, rel=1e-9)
    # and the folded gain is larger than the unfolded response near fs/2
    assert g[-1] > filt.power_response(FS / 2)


def test_aliased_noise_lands_in_a_narrow_meter_band():
    filt = design(FilterSpec("lowpass", "butterworth", 1, None, 20000.0))
    c = Chain(source_ohms=0.0, gain_db=0.0, en_v_rthz=10e-9, in_a_rthz=0.0, bits=32)
    full = budget(c, filt, FS)
    aes = budget(c, filt, FS, meter=(20.0, 20000.0))
    dens = (10e-9) ** 2
    assert full["components"]["amplifier_voltage"]["vrms"] ** 2 == pytest.approx(dens * math.pi / 2 * 20000, rel=1e-6)
    # the meter band holds less than the total but more than the unaliased in-band share
    inband = dens * 20000 * math.atan(1.0)  # ∫0^20k 1/(1+(f/fc)²) df = fc·atan(1)
    got = aes["components"]["amplifier_voltage"]["vrms"] ** 2
    assert inband < got < full["components"]["amplifier_voltage"]["vrms"] ** 2


def test_highpass_floor_is_stopped_at_nyquist():
    # with an ideal anti-alias filter ahead of the converter (with none it is refused: tests/test_antialias.py)
    filt = design(FilterSpec("highpass", "butterworth", 2, 100.0, None))
    f, w = grid()
    g, total = folded_noise_gain(filt, f, w, FS, anti_alias="ideal")
    expected = FS / 2 - 100.0 * butterworth_enbw_ratio(2)  # the in-band integral of 1 - |H_lp|² mirrored
    assert total == pytest.approx(expected, rel=2e-3)


def test_amplifier_bandwidth_bounds_a_highpass():
    filt = design(FilterSpec("highpass", "butterworth", 2, 100.0, None))
    f, w = grid()
    _, total = folded_noise_gain(filt, f, w, FS, amp_bandwidth_hz=100e3)
    # ≈ (π/2)·100 kHz less the highpass notch near DC
    assert total == pytest.approx(math.pi / 2 * 100e3 - 100.0 * butterworth_enbw_ratio(2), rel=2e-3)


def test_budget_shares_add_up():
    c = Chain(source_ohms=600.0, gain_db=30.0, en_v_rthz=3e-9, in_a_rthz=0.5e-12, bits=16, full_scale_vrms=1.228)
    filt = design(FilterSpec("bandpass", "butterworth", 4, 20.0, 20000.0))
    b = budget(c, filt, FS)
    assert sum(e["share"] for e in b["components"].values()) == pytest.approx(1.0)
    total = math.sqrt(sum(e["vrms"] ** 2 for e in b["components"].values()))
    assert b["total"]["vrms"] == pytest.approx(total, rel=1e-12)
    # source thermal: G²·4kTRs·ENBW by hand
    hand = math.sqrt(10**3 * 4 * BOLTZMANN * 290 * 600 * filt.power_integral_hz())
    assert b["components"]["source_thermal"]["vrms"] == pytest.approx(hand, rel=1e-4)


@pytest.mark.parametrize(
    "kw,match",
    [
        # library use names the Python field (Chain.<field>), not a command-line flag
        (dict(source_ohms=-1.0), r"^Chain\.source_ohms: -1\.0 is out of range; accepted: a resistance >= 0 ohm$"),
        (dict(temperature_k=0.0), r"^Chain\.temperature_k: 0\.0 is out of range"),
        (dict(temperature_k=-5.0), r"^Chain\.temperature_k: -5\.0"),
        (dict(bits=0), r"^Chain\.bits: 0 is out of range; accepted: an integer 1 to 32$"),
        (dict(bits=40), r"^Chain\.bits: 40 is out of range; accepted: an integer 1 to 32$"),
        (dict(bits=16.5), r"^Chain\.bits: 16\.5 is out of range"),
        (dict(full_scale_vrms=0.0), r"^Chain\.full_scale_vrms: 0\.0"),
        (dict(h2_db=3.0), r"^Chain\.h2_db: 3\.0 is out of range; accepted: a harmonic level below 0 dB"),
        (dict(h3_db=0.0), r"^Chain\.h3_db: 0\.0 is out of range"),
        (dict(gain_db=250.0), r"^Chain\.gain_db: 250\.0 is out of range; accepted: a gain in dB, \|G\| <= 200$"),
        (dict(en_corner_hz=0.0), r"^Chain\.en_corner_hz: 0\.0 is out of range; accepted: a frequency > 0 Hz$"),
        (dict(dither="rect"), r"^Chain\.dither: 'rect' is not accepted; accepted: tpdf, none$"),
        (dict(stage="dsp"), r"^Chain\.stage: 'dsp' is not accepted; accepted: analog, digital$"),
        (dict(source_ohms="150"), r"^Chain\.source_ohms: '150' is not a number; accepted: a resistance >= 0 ohm$"),
    ],
)
def test_chain_refuses_bad_values(kw, match):
    with pytest.raises(ParameterError, match=match):
        Chain(**kw)


def test_zero_source_resistance_is_valid():
    assert Chain(source_ohms=0.0).density_source_v2_hz() == 0.0
