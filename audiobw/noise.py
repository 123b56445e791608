"""Noise at the chain output: spectra of each contributor and the budget.

One anti-alias assumption (``Chain.anti_alias``) governs noise and harmonics
alike:

* ``'none'`` (the default): the converter has no anti-alias filter of its own.
  Everything that reaches it above fs/2 folds into 0…fs/2.  On the analog
  stage the candidate filter is the only anti-alias filter (the common front
  end): the amplifier's white noise, shaped by the candidate (and the
  amplifier's own pole, ``amp_bandwidth_hz``), is folded image by image, so a
  meter band narrower than 0…fs/2 sees the right share.  On the digital stage
  the amplifier's noise reaches the converter shaped by its own pole only,
  folds there, and is then shaped by the digital filter.  A case whose noise
  would have no bound (an analog response that never falls, such as a
  highpass or an even-order elliptic, or the digital stage, with no
  ``amp_bandwidth_hz``) is refused: :func:`check_noise_bounded`.
* ``'ideal'``: a brick-wall at fs/2 ahead of the converter.  Nothing folds:
  the amplifier's noise counts over 0…fs/2 only, shaped by the candidate
  (analog stage) and the amplifier's pole.

Quantisation and dither are white over 0…fs/2; the digital filter shapes
them, the analog one does not.

Layout: :mod:`audiobw.folding` (bounds and folding), :mod:`audiobw.noisespectra`
(the density of each contributor, their sum); here the budget (:func:`budget`).
Their names are re-exported here (``__all__``).

References
----------
.. [1] C. D. Motchenbacher, J. A. Connelly, *Low-Noise Electronic System
   Design*, Wiley 1993, ch. 1–2 (noise bandwidth, e_n–i_n amplifier model,
   total input noise e_ni² = 4kTRs + e_n² + (i_n·Rs)²).
.. [2] AES17-2020 §3 (dBFS re a full-scale sine).
.. [3] Folding all images at once: :mod:`audiobw.folding`.
"""

from __future__ import annotations

import math

import numpy as np

from .chain import Chain, vrms_to_dbu
from .filters import Filter
from .folding import (
    IMAGE_STRIDE,
    MAX_IMAGES,
    amplifier_pole,
    check_noise_bounded,
    folded_noise_gain,
    unbounded_reason,
    with_amplifier_pole,
)
from .noisespectra import (
    COMPONENTS,
    FLICKER_FROM_HZ,
    NoiseSpectra,
    amplifier_excess,
    converter_noise_gain,
    flicker_per_hz,
    noise_spectra,
    noise_total,
)

__all__ = [
    "ANALOG_PARTS",
    "COMPONENTS",
    "FLICKER_FROM_HZ",
    "IMAGE_STRIDE",
    "MAX_IMAGES",
    "T0_K",
    "NoiseSpectra",
    "amplifier_excess",
    "amplifier_pole",
    "budget",
    "check_noise_bounded",
    "converter_noise_gain",
    "flicker_per_hz",
    "folded_noise_gain",
    "input_referred",
    "noise_figure_db",
    "noise_spectra",
    "noise_total",
    "unbounded_reason",
    "with_amplifier_pole",
]


def budget(chain: Chain, filt: Filter, fs_hz: float, *, meter=(0.0, None), n_bins: int = 1 << 15) -> dict:
    """The noise budget of a chain with one filter, as a plain mapping.

    Parameters
    ----------
    chain : Chain
    filt : Filter
    fs_hz : float, > 0
        Converter sample rate.
    meter : (low_hz, high_hz or None)
        Meter band; None for fs/2.

    Returns
    -------
    dict
        ``components``: name -> {vrms, dbu, dbfs, share} (share of total power,
        0…1); ``total``: the same for the sum; ``total_a_weighted``;
        ``enbw_hz``; ``dynamic_range_db`` and ``dynamic_range_a_db`` for a
        full-scale sine; ``noise_integral_band_hz``.
    """
    from .weighting import a_weighting_power
    from .spectrum import trapezoid_weights

    nyq = fs_hz / 2.0
    freqs = np.linspace(0.0, nyq, n_bins + 1)
    w = trapezoid_weights(freqs.size, freqs[1] - freqs[0])
    spectra = noise_spectra(chain, filt, freqs, w, fs_hz)
    lo, hi = meter[0] or 0.0, meter[1] or nyq
    wm = w * ((freqs >= lo) & (freqs <= hi))
    powers = spectra.power(wm)
    total = sum(powers.values())
    total_a = float(np.sum(spectra.total * wm * a_weighting_power(freqs)))
    fs_v2 = chain.full_scale_power_v2

    def entry(p):
        v = math.sqrt(p)
        return {
            "vrms": v,
            "dbu": vrms_to_dbu(v),
            "dbfs": 10 * math.log10(p / fs_v2) if p > 0 else -math.inf,
            "share": p / total if total > 0 else 0.0,
        }

    return {
        "components": {name: entry(p) for name, p in powers.items()},
        "total": entry(total),
        "total_a_weighted": entry(total_a),
        "enbw_hz": filt.enbw_hz(nyq),
        "dynamic_range_db": 10 * math.log10(fs_v2 / total),
        "dynamic_range_a_db": 10 * math.log10(fs_v2 / total_a),
        "meter": {"low_hz": lo, "high_hz": hi},
        **input_referred(chain, spectra, wm, wm * a_weighting_power(freqs)),
    }


#: standard noise temperature of the noise-figure definition, K (IEEE Std 161; Friis 1944)
T0_K = 290.0
ANALOG_PARTS = ("source_thermal", "amplifier_voltage", "amplifier_current")


def noise_figure_db(chain: Chain) -> float | None:
    """Spot noise figure of the amplifier at the stated source, dB (white densities).

    F = 1 + (e_n² + (i_n·R_s)²) / (4·k·T0·R_s) with T0 = 290 K (the IEEE
    definition); None for an ideal source (R_s = 0), where F is undefined.
    """
    from .chain import BOLTZMANN

    if chain.source_ohms <= 0:
        return None
    excess = chain.en_v_rthz**2 + (chain.in_a_rthz * chain.source_ohms) ** 2
    thermal = 4.0 * BOLTZMANN * T0_K * chain.source_ohms
    if thermal <= 0 or not math.isfinite(excess / thermal):
        return None  # a source so small its thermal noise underflows a double: as good as ideal
    return 10.0 * math.log10(1.0 + excess / thermal)


def input_referred(chain: Chain, spectra, weights, weights_a) -> dict:
    """``noise_figure_db``, ``ein_dbu`` and ``ein_dbu_a``: the analog noise (source and amplifier,
    not the converter) referred to the amplifier input over the meter band, unweighted and
    A-weighted, as preamp data sheets quote it."""
    g2 = chain.gain**2
    p = sum(v for k, v in spectra.power(weights).items() if k in ANALOG_PARTS) / g2
    pa = sum(v for k, v in spectra.power(weights_a).items() if k in ANALOG_PARTS) / g2
    return {
        "noise_figure_db": noise_figure_db(chain),
        "ein_dbu": vrms_to_dbu(math.sqrt(p)) if p > 0 else None,
        "ein_dbu_a": vrms_to_dbu(math.sqrt(pa)) if pa > 0 else None,
    }
