"""Output noise density per contributor on a grid (:func:`noise_spectra`) and their sum
(:func:`noise_total`): thermal, amplifier e_n and i_n (white, 1/f, an e_n table's excess),
quantisation and dither, shaped by the candidate and folded per :mod:`audiobw.folding`.

The model is stated in :mod:`audiobw.noise`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .chain import Chain
from .filters import Filter
from .folding import amplifier_pole, check_noise_bounded, folded_noise_gain

#: 1/f noise is integrated from this frequency, Hz: the lower limit of the
#: "0.1 Hz to 10 Hz" low-frequency noise figure of amplifier data sheets
#: (common practice); below it the flicker is drift over a recording, not noise.
FLICKER_FROM_HZ = 0.1


def flicker_per_hz(freqs_hz: np.ndarray, weights_hz: np.ndarray) -> np.ndarray:
    """Each bin's mean of 1/f over the band it stands for (1/Hz), from :data:`FLICKER_FROM_HZ`.

    Bin k stands for the frequencies between the midpoints to its neighbours
    (the first from its own frequency, the last to its own), which matches
    trapezoid weights; the mean of 1/f there is ln(f_hi/f_lo)/w_k, so that
    Σ_k c/f̄_k·w_k over whole bins is exactly c·ln(f2/f1) — the integral of a
    1/f density, finite at 0 Hz.
    """
    f = np.asarray(freqs_hz, dtype=float)
    w = np.asarray(weights_hz, dtype=float)
    if f.size < 2:
        return np.zeros_like(f)
    mid = 0.5 * (f[1:] + f[:-1])
    lo = np.maximum(np.concatenate([[f[0]], mid]), FLICKER_FROM_HZ)
    hi = np.concatenate([mid, [f[-1]]])
    out = np.zeros_like(f)
    ok = (hi > lo) & (w > 0)
    out[ok] = np.log(hi[ok] / lo[ok]) / w[ok]
    return out


COMPONENTS = ("source_thermal", "amplifier_voltage", "amplifier_current", "quantisation", "dither")


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


def converter_noise_gain(
    chain: Chain,
    filt: Filter,
    freqs_hz: np.ndarray,
    weights_hz: np.ndarray,
    fs_hz: float,
    *,
    direct: np.ndarray | None = None,
) -> tuple[np.ndarray, float]:
    """Power gain from the amplifier's white noise to the converter's output, on 0…fs/2.

    Analog stage: the candidate and the amplifier's pole, folded or not per
    ``chain.anti_alias`` (:func:`folded_noise_gain`).  Digital stage: the
    amplifier's pole alone (the digital filter comes after the converter;
    the caller multiplies by it): confined to 0…fs/2 by the ideal anti-alias
    filter, or folded with ``'none'``.  Returns ``(g, Σ g·weights)``.

    Raises
    ------
    ParameterError
        The noise has no bound (:func:`check_noise_bounded`).
    """
    check_noise_bounded(chain, filt)
    if chain.density_amplifier_v2_hz() == 0:  # no amplifier noise: nothing to shape or fold
        return np.zeros_like(np.asarray(freqs_hz, dtype=float)), 0.0
    if filt.analog:
        return folded_noise_gain(
            filt, freqs_hz, weights_hz, fs_hz, chain.amp_bandwidth_hz, direct=direct, anti_alias=chain.anti_alias
        )
    if chain.amp_bandwidth_hz is None:  # ideal anti-alias filter (or no amplifier noise): white to fs/2
        g = np.ones_like(np.asarray(freqs_hz, dtype=float))
        return g, float(np.sum(weights_hz))
    return folded_noise_gain(
        amplifier_pole(chain.amp_bandwidth_hz), freqs_hz, weights_hz, fs_hz, anti_alias=chain.anti_alias
    )


def noise_total(
    chain: Chain,
    filt: Filter,
    freqs_hz: np.ndarray,
    weights_hz: np.ndarray,
    fs_hz: float,
    *,
    direct: np.ndarray | None = None,
) -> np.ndarray:
    """The total output noise density on ``freqs_hz`` (V²/Hz): the sum of :func:`noise_spectra`'s
    parts, computed without building them; ``direct`` is |H(f)|² if the caller has it."""
    nyq_width = float(np.sum(weights_hz))
    converter = (chain.quantisation_power_v2() + chain.dither_power_v2()) / nyq_width
    h2 = filt.power_response(freqs_hz) if direct is None else direct
    if filt.analog:
        g, _ = converter_noise_gain(chain, filt, freqs_hz, weights_hz, fs_hz, direct=h2)
        out = chain.density_amplifier_v2_hz() * g + converter
    else:
        g, _ = converter_noise_gain(chain, filt, freqs_hz, weights_hz, fs_hz)
        out = (chain.density_amplifier_v2_hz() * g + converter) * h2
    if chain.has_flicker:
        en_x, in_x = amplifier_excess(chain, freqs_hz, weights_hz)
        out = out + (en_x + in_x) * _excess_gain(chain, h2, freqs_hz)
    return out


def noise_totals(
    chain: Chain, filts: list[Filter], freqs_hz: np.ndarray, weights_hz: np.ndarray, fs_hz: float, *, direct
) -> list[np.ndarray]:
    """:func:`noise_total` of each filter (``direct``: one |H|² per row), the folded images of an
    analog prototype's cutoffs computed together (:func:`audiobw.folding.folded_noise_gains`)."""
    from .batchresponse import shares_prototype
    from .folding import folded_noise_gains

    if len(filts) < 2 or not filts[0].analog or not shares_prototype(filts):
        return [noise_total(chain, f, freqs_hz, weights_hz, fs_hz, direct=d) for f, d in zip(filts, direct)]
    nyq_width = float(np.sum(weights_hz))
    converter = (chain.quantisation_power_v2() + chain.dither_power_v2()) / nyq_width
    for filt in filts:
        check_noise_bounded(chain, filt)
    if chain.density_amplifier_v2_hz() == 0:  # no amplifier noise: nothing to shape or fold
        gains = [np.zeros_like(np.asarray(freqs_hz, dtype=float)) for _ in filts]
    else:
        folded = folded_noise_gains(
            filts, freqs_hz, weights_hz, fs_hz, chain.amp_bandwidth_hz, direct, anti_alias=chain.anti_alias
        )
        gains = [g for g, _ in folded]
    excess = amplifier_excess(chain, freqs_hz, weights_hz) if chain.has_flicker else None
    out = []
    for g, h2 in zip(gains, direct):
        total = chain.density_amplifier_v2_hz() * g + converter
        if excess is not None:
            total = total + (excess[0] + excess[1]) * _excess_gain(chain, h2, freqs_hz)
        out.append(total)
    return out


def amplifier_excess(chain: Chain, freqs_hz: np.ndarray, weights_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The amplifier's noise above its white densities, at the converter input, per bin (V²/Hz).

    Returns ``(voltage, current)``: G²·e_n²·f_ce/f̄ plus G²·(e_n,table(f)² − e_n,white²)
    (the e_n table's excess, :func:`audiobw.entable.excess_per_hz`), and G²·(i_n·Rs)²·f_ci/f̄;
    each the mean over the bin's band, integrated from :data:`FLICKER_FROM_HZ`.
    """
    per_hz = flicker_per_hz(freqs_hz, weights_hz)
    voltage = chain.flicker_en_v2() * per_hz
    if chain.en_table is not None:
        from .entable import excess_per_hz

        voltage = voltage + chain.gain**2 * excess_per_hz(chain.en_table, freqs_hz, weights_hz, FLICKER_FROM_HZ)
    return voltage, chain.flicker_in_v2() * per_hz


def _excess_gain(chain: Chain, h2: np.ndarray, freqs_hz: np.ndarray) -> np.ndarray:
    """|H|² with the amplifier pole: the shape of the 1/f and table excess at the output.

    Not folded: the 1/f images sit near multiples of fs, where 1/f is down by
    f_c/fs against the white part (under 1 % for a 500 Hz corner at 48 kHz),
    and the white part's images are folded.  An e_n table's excess is folded
    neither: what of it lies above fs/2 is not counted.
    """
    return h2 if chain.amp_bandwidth_hz is None else h2 / (1.0 + (freqs_hz / chain.amp_bandwidth_hz) ** 2)


def noise_spectra(
    chain: Chain, filt: Filter, freqs_hz: np.ndarray, weights_hz: np.ndarray, fs_hz: float
) -> NoiseSpectra:
    """Each contributor's output noise density on ``freqs_hz`` (0…fs/2)."""
    nyq_width = float(np.sum(weights_hz))
    q_density = chain.quantisation_power_v2() / nyq_width
    d_density = chain.dither_power_v2() / nyq_width
    g, _ = converter_noise_gain(chain, filt, freqs_hz, weights_hz, fs_hz)
    if filt.analog:
        gq = np.ones_like(freqs_hz)
    else:
        gq = filt.power_response(freqs_hz)
        g = g * gq
    if chain.has_flicker:
        shape = _excess_gain(chain, filt.power_response(freqs_hz), freqs_hz)
        en_x, in_x = amplifier_excess(chain, freqs_hz, weights_hz)
        en_x, in_x = en_x * shape, in_x * shape
    else:
        en_x = in_x = np.zeros_like(freqs_hz)
    parts = {
        "source_thermal": chain.density_source_v2_hz() * g,
        "amplifier_voltage": chain.density_en_v2_hz() * g + en_x,
        "amplifier_current": chain.density_in_v2_hz() * g + in_x,
        "quantisation": q_density * gq,
        "dither": d_density * gq,
    }
    return NoiseSpectra(freqs_hz, weights_hz, parts)
