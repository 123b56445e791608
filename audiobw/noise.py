"""Noise at the chain output: spectra of each contributor and the budget.

Analog stage: the amplifier's white noise is shaped by the candidate filter
over its whole response, and what the filter passes above fs/2 aliases into
0…fs/2 at the converter (it is folded there, so a meter band narrower than
0…fs/2 sees the right share).  Quantisation and dither are white over
0…fs/2 and not shaped by the filter.

Digital stage: the converter samples the amplifier output first.  Its own
anti-alias filter is assumed to confine the amplifier's noise to 0…fs/2
(common practice for oversampling converters); then the digital filter shapes
amplifier noise, quantisation and dither alike.

References
----------
.. [1] C. D. Motchenbacher, J. A. Connelly, *Low-Noise Electronic System
   Design*, Wiley 1993, ch. 1–2 (noise bandwidth, e_n–i_n amplifier model,
   total input noise e_ni² = 4kTRs + e_n² + (i_n·Rs)²).
.. [2] AES17-2020 §3 (dBFS re a full-scale sine).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .chain import Chain, vrms_to_dbu
from .filters import Filter

#: Images of the analog response folded explicitly before the rest is spread.
MAX_IMAGES = 64
COMPONENTS = ("source_thermal", "amplifier_voltage", "amplifier_current", "quantisation", "dither")


def with_amplifier_pole(filt: Filter, amp_bandwidth_hz: float | None) -> Filter:
    """The analog response seen by amplifier noise: the filter times the amplifier's own pole."""
    if amp_bandwidth_hz is None or not filt.analog:
        return filt
    wa = 2.0 * math.pi * amp_bandwidth_hz / filt.ref_rad_s
    return Filter(filt.spec, filt.z, np.concatenate([filt.p, [-wa]]), filt.k * wa, filt.ref_rad_s)


def folded_noise_gain(filt: Filter, freqs_hz: np.ndarray, weights_hz: np.ndarray, fs_hz: float,
                      amp_bandwidth_hz: float | None = None) -> tuple[np.ndarray, float]:
    """Noise power gain of the analog path, folded into 0…fs/2.

    Returns ``(g, total)``: ``g`` on the grid such that ``sum(g·weights)``
    equals ``total``.

    * A response that falls at high frequencies (|H(∞)| = 0) passes noise
      above fs/2 that aliases back: it is folded image by image until what
      remains is below 1 ppm of the exact integral ∫₀^∞|H|² df
      (:meth:`Filter.varying_integral_hz`); the remainder, from far images,
      is nearly flat and is spread evenly.
    * A response that never falls (a highpass: |H(∞)| = 1; an even-order
      elliptic: the stopband floor) would pass noise to infinite frequency.
      The converter's own anti-alias filter is then taken as ideal at fs/2,
      so only 0…fs/2 counts.  Give the amplifier a bandwidth to model that
      noise instead.

    The amplifier's own pole (``amp_bandwidth_hz``) multiplies the response
    first, which makes every response fall.
    """
    noise_filt = with_amplifier_pole(filt, amp_bandwidth_hz)
    floor = noise_filt.floor_gain() if filt.analog else 0.0
    if not filt.analog or floor > 0:
        # digital stage, or an analog response that never falls: the
        # converter's anti-alias filter stops everything above fs/2
        g = noise_filt.power_response(freqs_hz)
        return g, float(np.sum(g * weights_hz))
    target = noise_filt.varying_integral_hz()
    g = noise_filt.power_response(freqs_hz)
    acc = float(np.sum(g * weights_hz))
    m = 1
    while m <= MAX_IMAGES and abs(target - acc) > 1e-6 * abs(target):
        for image in (m * fs_hz - freqs_hz, m * fs_hz + freqs_hz):
            g = g + noise_filt.power_response(image)
        acc = float(np.sum(g * weights_hz))
        m += 1
    # the rest comes from far images, nearly flat: spread it evenly (it is >= 0)
    g = g + max(target - acc, 0.0) / float(np.sum(weights_hz))
    return g, max(target, acc)


@dataclass
class NoiseSpectra:
    """Output noise density of each contributor on a grid, V²/Hz."""

    freqs_hz: np.ndarray
    weights_hz: np.ndarray
    parts: dict  # name -> density array

    @property
    def total(self) -> np.ndarray:
        return sum(self.parts.values())

    def power(self, weights=None) -> dict:
        w = self.weights_hz if weights is None else weights
        return {name: float(np.sum(d * w)) for name, d in self.parts.items()}


def noise_spectra(chain: Chain, filt: Filter, freqs_hz: np.ndarray, weights_hz: np.ndarray,
                  fs_hz: float) -> NoiseSpectra:
    """Each contributor's output noise density on ``freqs_hz`` (0…fs/2)."""
    nyq_width = float(np.sum(weights_hz))
    q_density = chain.quantisation_power_v2() / nyq_width
    d_density = chain.dither_power_v2() / nyq_width
    if filt.analog:
        g, _ = folded_noise_gain(filt, freqs_hz, weights_hz, fs_hz, chain.amp_bandwidth_hz)
        gq = np.ones_like(freqs_hz)
    else:
        g = filt.power_response(freqs_hz)
        if chain.amp_bandwidth_hz is not None:
            g = g / (1.0 + (freqs_hz / chain.amp_bandwidth_hz) ** 2)
        gq = filt.power_response(freqs_hz)
    parts = {
        "source_thermal": chain.density_source_v2_hz() * g,
        "amplifier_voltage": chain.density_en_v2_hz() * g,
        "amplifier_current": chain.density_in_v2_hz() * g,
        "quantisation": q_density * gq,
        "dither": d_density * gq,
    }
    return NoiseSpectra(freqs_hz, weights_hz, parts)


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
        return {"vrms": v, "dbu": vrms_to_dbu(v),
                "dbfs": 10 * math.log10(p / fs_v2) if p > 0 else -math.inf,
                "share": p / total if total > 0 else 0.0}

    return {
        "components": {name: entry(p) for name, p in powers.items()},
        "total": entry(total),
        "total_a_weighted": entry(total_a),
        "enbw_hz": filt.enbw_hz(nyq),
        "dynamic_range_db": 10 * math.log10(fs_v2 / total),
        "dynamic_range_a_db": 10 * math.log10(fs_v2 / total_a),
        "meter": {"low_hz": lo, "high_hz": hi},
    }
