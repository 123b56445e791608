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
    """Peak-to-peak gain (dB) of ``filt`` over the band the frequencies ``freqs_hz`` span.

    A Chebyshev type I of ripple r gives r over its ripple band; a gain that
    reaches zero inside the band gives infinity.  The grid's highest and lowest
    points are refined where they lie inside it (:func:`_refined_extreme`).
    """
    return flatness_and_spread([filt], freqs_hz)[0][0]


def delay_spread_s(filt: Filter, freqs_hz: np.ndarray) -> float:
    """Group-delay spread max − min (s) of ``filt`` over the band the frequencies ``freqs_hz``
    span (group delay −dφ/dω; its extremes refined as for :func:`flatness_db`)."""
    return flatness_and_spread([filt], freqs_hz)[0][1]


#: Rounds of successive parabolic interpolation on each sampled peak inside the band.
EXTREME_ROUNDS = 4
#: At most this many of a filter's sampled peaks are refined (the highest): a Chebyshev or
#: elliptic of order n has at most n ripple peaks in its band.
EXTREME_PEAKS = 16


def _refined_extreme(values: np.ndarray, freqs_hz: np.ndarray, evaluate, sense: float) -> np.ndarray:
    """The highest (``sense`` +1) or lowest (−1) value of each row of ``values`` (filters ×
    frequencies, sampled on ``freqs_hz``), its peaks inside the grid refined.

    A peak between two grid points is missed by up to the curvature times the square of the
    spacing, and a different grid misses it by a different amount: a wider band (a coarser grid)
    could read less than a narrower one that it contains, and a ripple peak could read lower
    than a band edge that is not as high.  Each sampled peak inside the grid is bracketed by its
    neighbours and refined by successive parabolic interpolation (R. P. Brent, *Algorithms for
    Minimization without Derivatives*, 1973, ch. 5), ``evaluate(points)`` (filters × points)
    giving the exact value at each vertex.  The figure is the extreme of every value evaluated,
    so it never passes the true extreme and only comes closer to it.
    """
    v = sense * values
    best = v.max(axis=1)
    n = freqs_hz.size
    if n < 3:
        return sense * best
    mid = v[:, 1:-1]
    rows, idx = np.nonzero((mid >= v[:, :-2]) & (mid >= v[:, 2:]) & np.isfinite(mid))
    if rows.size == 0:
        return sense * best
    idx = idx + 1
    order = np.lexsort((-v[rows, idx], rows))  # by filter, highest first
    rows, idx = rows[order], idx[order]
    first = np.searchsorted(rows, rows)  # where each filter's peaks start
    keep = np.arange(rows.size) - first < EXTREME_PEAKS
    rows, idx = rows[keep], idx[keep]
    cols = np.arange(rows.size)
    a, b, c = freqs_hz[idx - 1], freqs_hz[idx], freqs_hz[idx + 1]
    fa, fb, fc = v[rows, idx - 1], v[rows, idx], v[rows, idx + 1]
    for _ in range(EXTREME_ROUNDS):
        p, q = (b - a) * (fb - fc), (b - c) * (fb - fa)
        with np.errstate(divide="ignore", invalid="ignore"):
            x = b - 0.5 * ((b - a) * p - (b - c) * q) / (p - q)
        ok = np.isfinite(x) & (x > a) & (x < c) & (x != b)
        if not ok.any():
            break
        x = np.where(ok, x, b)
        fx = sense * evaluate(x)[rows, cols]  # each peak's filter at that peak's point
        fx = np.where(ok & np.isfinite(fx), fx, -np.inf)
        np.maximum.at(best, rows, fx)
        # keep the bracket a < b < c with b the highest evaluated
        up, right = fx >= fb, x > b
        a, fa = (
            np.where(up & right, b, np.where(~up & ~right, x, a)),
            np.where(up & right, fb, np.where(~up & ~right, fx, fa)),
        )
        c, fc = (
            np.where(up & ~right, b, np.where(~up & right, x, c)),
            np.where(up & ~right, fb, np.where(~up & right, fx, fc)),
        )
        b, fb = np.where(up, x, b), np.where(up, fx, fb)
    return sense * best


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
    """(:func:`flatness_db`, :func:`delay_spread_s`) of each filter over the band ``freqs_hz``
    spans, their responses evaluated together (:mod:`audiobw.batchresponse`)."""
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    g, tau = power_responses(filts, f), group_delays(filts, f)
    gain = lambda x: power_responses(filts, x)  # noqa: E731
    delay = lambda x: group_delays(filts, x)  # noqa: E731
    tops, bottoms = _refined_extreme(g, f, gain, 1.0), _refined_extreme(g, f, gain, -1.0)
    spreads = _refined_extreme(tau, f, delay, 1.0) - _refined_extreme(tau, f, delay, -1.0)
    out = []
    for top, bottom, spread in zip(tops, bottoms, spreads):
        top, bottom = float(top), float(bottom)
        flat = math.inf if not top > 0.0 or bottom <= 0.0 else 10.0 * math.log10(top / bottom)
        out.append((flat, float(spread)))
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
