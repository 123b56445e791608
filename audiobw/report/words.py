"""Figures, targets and passbands in words, as the terminal text and the spec sheet show them."""

from __future__ import annotations

import math

from ..registry import TARGET_LABEL
from ..units import format_quantity


def metric_text(key: str, value) -> str:
    """One metric of a case in words, with its unit ('0.00123 %', '-92.1 dBFS', '9.5 kHz'); None is 'n/a'."""
    if value is None:
        return "n/a"
    if key == "thdn_pct":
        return f"{value:.5f} %"
    if key == "ber":
        return ber_text(value)
    if key == "eye_fraction":
        return f"{100 * value:.1f} % of the unfiltered opening"
    if key == "q":
        return q_text(value)
    if key == "sii":
        return f"{value:.3f}"
    if key == "audible_frames_pct":
        return f"{value:.1f} % of frames"
    if key == "noise_dbfs":
        return f"{value:.1f} dBFS"
    if key == "noise_vrms":
        return format_quantity(value, "V rms")
    if key == "delay_spread_s":
        return format_quantity(value, "s")
    if key.endswith("_hz"):
        return format_quantity(value, "Hz")
    return f"{value:.2f} dB"


#: the smallest BER printed as a number; below it the Gaussian tail underflows a double
BER_FLOOR = 1e-300


#: above this Q the Gaussian error rate ½·erfc(Q/√2) is below 1e-300 (math.erfc: Q = 37.05 gives
#: 1.0e-300; Q = 37.0 gives 5.7e-300, so 37.0 would overstate it)
Q_FLOOR = 37.1


def q_text(value) -> str:
    """Q for people: the number, in dB (20·lg Q, common practice), and what it means at the extremes."""
    if value is None:
        return "unbounded (no noise at the decision point)"
    if value <= 0:
        return "0 (the eye is closed)"
    text = f"{value:.3g} ({20 * math.log10(value):.1f} dB; half the noiseless eye over the noise σ"
    if value > Q_FLOOR:
        text += f"; above {Q_FLOOR:g} the Gaussian error rate is below 1e-300"
    return text + ")"


def ber_text(value) -> str:
    """A bit-error rate for people: '3.10e-12', or '< 1e-300' where the double range runs out."""
    if value is None:
        return "n/a"
    if value < BER_FLOOR:
        return "< 1e-300"
    return f"{value:.2e}"


def margin_text(key: str, margin) -> str:
    """A target's margin; a BER of (numerically) zero has a margin beyond the double range."""
    if margin is None:
        return "beyond the double range" if key == "max_ber" else "n/a"
    return f"{margin:.3g} dB"


def band_words(response: str, low_hz, high_hz, hz=lambda v: format_quantity(v, "Hz")) -> str:
    """'lowpass, −3 dB edge 9.5 kHz' and the like; ``hz`` formats a frequency."""
    if response == "lowpass":
        return f"lowpass, −3 dB edge {hz(high_hz)}"
    if response == "highpass":
        return f"highpass, −3 dB edge {hz(low_hz)}"
    return f"bandpass, −3 dB edges {hz(low_hz)} to {hz(high_hz)}"


def passband_text(case: dict) -> str:
    band = band_words(case["response"], case.get("low_hz"), case.get("high_hz"))
    return f"{case['family']} order {case['order']} {band}"


def target_phrase(key: str, targets: dict) -> str:
    """'A-weighted SNR ≥ 75 dB': a target as the sweep states it."""
    label, _metric, _unit, sense = TARGET_LABEL[key]
    return f"{label} {sense} {target_text(key, targets[key])}"


def target_text(key: str, value: float) -> str:
    """A target's limit in words with its unit ('1e-06', '60 % of the unfiltered opening', '0.5 dB')."""
    if key == "max_ber":
        return f"{value:.0e}"
    if key == "min_eye":
        return f"{100 * value:g} % of the unfiltered opening"
    if key == "min_sii":
        return f"{value:g}"
    if key == "max_audible_frames_pct":
        return f"{value:g} % of frames"
    if key == "max_delay_spread_s":
        return format_quantity(value, "s")
    return f"{value:g} %" if key == "max_thdn_pct" else f"{value:g} dB"
