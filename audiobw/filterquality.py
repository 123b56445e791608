"""What a candidate does to the program's band and lets fold into it: flatness and group-delay
spread over the occupied band, alias rejection over the image bands (analog stage)."""

from __future__ import annotations

import math

import numpy as np

from .batchresponse import group_delays, power_responses
from .filters import Filter
from .response import sorted_union


#: Points of the occupied-band grid for flatness and delay spread: linear, plus
#: logarithmic ones for the low end (a 20 Hz edge in a 20 kHz band).
BAND_GRID_LINEAR, BAND_GRID_LOG = 512, 128
#: Points of the image-band grid for alias rejection (per image band).
IMAGE_GRID = 128


def band_grid(low_hz: float, high_hz: float, *, floor_hz: float) -> np.ndarray:
    """Frequencies over ``low_hz``…``high_hz`` (Hz) for flatness and delay spread.

    The band starts no lower than ``floor_hz`` (> 0; the sweep passes one PSD
    bin): a program whose occupied band reaches 0 Hz is judged from its first
    bin, where a highpass still has gain.
    """
    lo = max(float(low_hz), float(floor_hz))
    hi = float(high_hz)
    if not hi > lo:
        return np.array([max(hi, lo)])
    return sorted_union(np.linspace(lo, hi, BAND_GRID_LINEAR), np.geomspace(lo, hi, BAND_GRID_LOG))


def flatness_db(filt: Filter, freqs_hz: np.ndarray) -> float:
    """Peak-to-peak gain (dB) of ``filt`` over the frequencies ``freqs_hz``.

    A Chebyshev type I of ripple r gives r over its ripple band; a gain that
    reaches zero inside the band gives infinity.
    """
    g = filt.power_response(freqs_hz)
    top, bottom = float(g.max()), float(g.min())
    if not top > 0.0:
        return math.inf
    return math.inf if bottom <= 0.0 else 10.0 * math.log10(top / bottom)


def delay_spread_s(filt: Filter, freqs_hz: np.ndarray) -> float:
    """Group-delay spread max − min (s) of ``filt`` over ``freqs_hz`` (group delay −dφ/dω)."""
    tau = filt.group_delay_s(freqs_hz)
    return float(tau.max() - tau.min())


def image_bands_hz(
    response: str, low_hz: float | None, high_hz: float | None, fs_hz: float
) -> list[tuple[float, float]]:
    """The analog frequencies that sampling at ``fs_hz`` folds into the passband.

    A component at fs ± f lands on f.  Passband f_low…f_high (a lowpass from
    0 Hz, a highpass to fs/2): the images come from fs − f_high…fs − f_low and
    fs + f_low…fs + f_high (a highpass: fs/2…fs − f_low, and fs + f_low…1.5·fs,
    where its gain has long settled).
    """
    nyq = fs_hz / 2.0
    lo = 0.0 if response == "lowpass" or low_hz is None else float(low_hz)
    hi = nyq if response == "highpass" or high_hz is None else min(float(high_hz), nyq)
    return [(fs_hz - hi, fs_hz - lo), (fs_hz + lo, fs_hz + hi)]


def alias_rejection_db(
    filt: Filter, response: str, low_hz: float | None, high_hz: float | None, fs_hz: float
) -> float | None:
    """Least attenuation (dB, positive) of an analog ``filt`` over the frequencies that fold
    into its passband, relative to the passband peak (0 dB by design; see :mod:`audiobw.filters`).

    For a response that falls monotonically above its upper edge this is the
    attenuation at fs − f_high, the image nearest the band; an elliptic's
    stopband lobes are searched over the whole image band.  None for the
    digital stage: that filter acts after sampling, so it cannot reject what
    has already aliased.
    """
    if not filt.analog:
        return None
    f = np.concatenate(
        [
            np.geomspace(max(a, 1e-9), b, IMAGE_GRID) if b > a else np.array([a])
            for a, b in image_bands_hz(response, low_hz, high_hz, fs_hz)
        ]
    )
    worst = float(filt.power_response(f).max())
    if worst <= 0.0:
        return math.inf
    # the passband peak is 0 dB by design: a gain a rounding above it is no attenuation
    return max(-10.0 * math.log10(worst), 0.0)


def flatness_and_spread(filts: list[Filter], freqs_hz: np.ndarray) -> list[tuple[float, float]]:
    """(:func:`flatness_db`, :func:`delay_spread_s`) of each filter over ``freqs_hz``, their
    responses evaluated together (:mod:`audiobw.batchresponse`; the same figures)."""
    out = []
    for g, tau in zip(power_responses(filts, freqs_hz), group_delays(filts, freqs_hz)):
        top, bottom = float(g.max()), float(g.min())
        flat = math.inf if not top > 0.0 or bottom <= 0.0 else 10.0 * math.log10(top / bottom)
        out.append((flat, float(tau.max() - tau.min())))
    return out


def alias_rejection_many(filts: list[Filter], edges: list[tuple], fs_hz: float) -> list[float | None]:
    """:func:`alias_rejection_db` of each filter (``edges``: each one's (low, high) −3 dB edges),
    the image-band grids and responses of all of them evaluated together (the same figures)."""
    if not filts[0].analog:
        return [None] * len(filts)
    bands = np.array([image_bands_hz(f.spec.response, lo, hi, fs_hz) for f, (lo, hi) in zip(filts, edges)])
    if len(filts) < 2 or not np.all(bands[:, :, 1] > bands[:, :, 0]):
        return [alias_rejection_db(f, f.spec.response, lo, hi, fs_hz) for f, (lo, hi) in zip(filts, edges)]
    grid = np.concatenate(
        [np.geomspace(np.maximum(bands[:, i, 0], 1e-9), bands[:, i, 1], IMAGE_GRID, axis=1) for i in range(2)], axis=1
    )
    out: list[float | None] = []
    for worst in power_responses(filts, grid).max(axis=1):
        # the passband peak is 0 dB by design: a gain a rounding above it is no attenuation
        out.append(math.inf if worst <= 0.0 else max(-10.0 * math.log10(float(worst)), 0.0))
    return out
