"""The non-causal Wiener bound, and the error a given filter makes.

For a program with one-sided power density S(f), noise N_pre(f) added before
the filter and N_post(f) added after it, the least mean-square error of any
linear time-invariant filter (non-causal, unrestricted) is

    MSE_min = ∫ S·N_pre / (S + N_pre) df + ∫ N_post df,

reached by the Wiener gain S/(S + N_pre).  A filter H with delay τ allowed
makes MSE(H) = ∫ |1 − H e^{j2πfτ}|² S + |H|² N_pre df + ∫ N_post df ≥ MSE_min.

References
----------
.. [1] N. Wiener, *Extrapolation, Interpolation, and Smoothing of Stationary
   Time Series*, MIT Press, 1949.
.. [2] H. L. Van Trees, *Detection, Estimation, and Modulation Theory, Part I*,
   Wiley, 1968, §6.2 (unrealizable filter; one-pole message in white noise:
   ξ_u / P = 1/√(1 + Λ), Λ = 4P/(k N0)).
"""

from __future__ import annotations

import numpy as np


def wiener_gain(s, n_pre):
    """Wiener gain S/(S + N_pre) (0 where both vanish)."""
    s = np.asarray(s, float)
    tot = s + np.asarray(n_pre, float)
    return np.divide(s, tot, out=np.zeros_like(tot), where=tot > 0)


def wiener_mse(s, n_pre, n_post, weights_hz) -> float:
    """MSE_min = Σ w·S·N_pre/(S+N_pre) + Σ w·N_post (same units as ∫S df)."""
    s = np.asarray(s, float)
    n = np.asarray(n_pre, float)
    w = np.asarray(weights_hz, float)
    tot = s + n
    term = np.divide(s * n, tot, out=np.zeros_like(tot), where=tot > 0)
    return float(np.sum(w * term) + np.sum(w * np.asarray(n_post, float)))


def filter_mse(h, s, n_pre, n_post, freqs_hz, weights_hz, delay_s=0.0) -> float:
    """Mean-square error of the complex response ``h`` applied with delay compensation."""
    f = np.asarray(freqs_hz, float)
    he = np.asarray(h, complex) * np.exp(2j * np.pi * f * delay_s)
    w = np.asarray(weights_hz, float)
    err = np.abs(1.0 - he) ** 2 * np.asarray(s, float) + np.abs(he) ** 2 * np.asarray(n_pre, float)
    return float(np.sum(w * err) + np.sum(w * np.asarray(n_post, float)))


def removed_psd(h, s, freqs_hz, delay_s=0.0) -> np.ndarray:
    """|1 − H e^{j2πfτ}|² S: the program the filter removes or distorts, phase included."""
    he = np.asarray(h, complex) * np.exp(2j * np.pi * np.asarray(freqs_hz, float) * delay_s)
    return np.abs(1.0 - he) ** 2 * np.asarray(s, float)


def group_delay_s(h, freqs_hz) -> np.ndarray:
    """Group delay −dφ/dω (s) of the complex response ``h`` on the grid ``freqs_hz``.

    The derivative of the unwrapped phase as :func:`numpy.gradient` takes it
    (second-order central differences, first-order at the ends), written on the
    phase steps between neighbouring bins, wrapped into (−π, π] by the rule of
    :func:`numpy.unwrap`: the same figure without forming the unwrapped phase
    (whose large values cancel in the differences).  ``h`` may hold one
    response per row (along its last axis).
    """
    om = 2 * np.pi * np.asarray(freqs_hz, float)
    h = np.asarray(h)
    ph = np.angle(h)
    if ph.shape[-1] < 2:
        return -np.gradient(ph, om, axis=-1)
    d = np.diff(ph, axis=-1)
    # an exact zero at an end of the grid (a highpass's at 0 Hz) has no phase: np.angle reads
    # 0 or π there by the sign of a zero, so the first (last) step takes its neighbour's value
    # and the delay at that bin is the limit from inside, as the zpk formula gives it
    if ph.shape[-1] > 2:
        first, last = h[..., 0] == 0, h[..., -1] == 0
        if first.any():
            d[..., 0] = np.where(first, d[..., 1], d[..., 0])
        if last.any():
            d[..., -1] = np.where(last, d[..., -2], d[..., -1])
    wrap = np.abs(d) >= np.pi  # numpy.unwrap: steps of at least π are taken mod 2π
    if wrap.any():
        dw = d[wrap]
        dm = np.mod(dw + np.pi, 2 * np.pi) - np.pi
        dm[(dm == -np.pi) & (dw > 0)] = np.pi
        d[wrap] = dm
    dx = np.diff(om)
    out = np.empty(ph.shape)
    out[..., 0] = d[..., 0] / dx[0]
    out[..., -1] = d[..., -1] / dx[-1]
    if ph.shape[-1] > 2:
        h1, h2 = dx[:-1], dx[1:]
        s = h1 + h2
        out[..., 1:-1] = h2 / (h1 * s) * d[..., :-1] + h1 / (h2 * s) * d[..., 1:]
    return -out


def passband_group_delay_s(h, freqs_hz, gd=None) -> float:
    """Largest group delay −dφ/dω (s) where |H|² ≥ 1/2: sets the window in which
    :func:`audiobw.delay.best_delay` (the one delay search, shared with SER) looks.
    ``gd``: :func:`group_delay_s` of ``h`` when already computed."""
    gd = group_delay_s(h, freqs_hz) if gd is None else gd
    band = np.abs(h) ** 2 >= 0.5
    return float(gd[band].max()) if band.any() else 0.0


def gap_db(mse, mse_min) -> float:
    """How far an error is above the Wiener bound, dB (≥ 0 up to rounding)."""
    return float(10.0 * np.log10(mse / mse_min))
