"""Frequency transforms of a normalised lowpass prototype, and the exact energy of a cascade (numpy only).

The transforms repeat, operation for operation, what scipy.signal.iirfilter
does with an analog lowpass prototype (scipy/signal/_filter_design.py:
lp2lp_zpk, lp2hp_zpk, lp2bp_zpk, bilinear_zpk, and the prewarp of the edges
for a digital design at the normalised rate fs = 2), so a design built from
the shipped prototype table agrees with scipy.signal's own to the last bits
and the sweep needs no scipy import.  tests/test_prototype_designs.py checks
them against scipy.signal.butter/bessel/cheby1/ellip.

:func:`cascade_energy` gives ∫|F(jω)|² dω/2π of a strictly proper analog
F = g·∏(s − z)/∏(s − p) from the controllability Gramian of a cascade of
first-order sections: the state matrix is lower triangular with the poles
on its diagonal (a Schur form known without an eigenvalue solve), so the
Lyapunov equation is solved row by row (the triangular case of the
Bartels–Stewart method).  Unlike partial fractions it stays accurate for
coincident or clustered poles.
"""

from __future__ import annotations

import math

import numpy as np

#: The normalised sample rate of scipy.signal.iirfilter's digital designs (Wn / (fs/2), then fs = 2).
DIGITAL_FS = 2.0


def prewarp(edges_hz, fs_hz: float) -> np.ndarray:
    """The analog edges (rad/s at fs = 2) of a digital design at ``edges_hz``, as scipy.signal.iirfilter warps them."""
    wn = np.asarray(edges_hz, dtype=np.float64)
    wn = wn / (fs_hz / 2)
    fs = DIGITAL_FS
    return 2 * fs * np.tan(np.pi * wn / fs)


def lp2lp(z, p, k, wo):
    """scipy.signal.lp2lp_zpk."""
    wo = float(wo)
    degree = len(p) - len(z)
    return wo * z, wo * p, k * wo**degree


def lp2hp(z, p, k, wo):
    """scipy.signal.lp2hp_zpk."""
    wo = float(wo)
    degree = len(p) - len(z)
    z_hp = np.concatenate((wo / z, np.zeros(degree)))
    return z_hp, wo / p, k * np.real(np.prod(-z) / np.prod(-p))


def lp2bp(z, p, k, wo, bw):
    """scipy.signal.lp2bp_zpk: poles and zeros in the order (+ branch, − branch, origin zeros)."""
    wo = float(wo)
    bw = float(bw)
    degree = len(p) - len(z)
    z_lp = (z * bw / 2).astype(np.complex128)
    p_lp = (p * bw / 2).astype(np.complex128)
    z_bp = np.concatenate((z_lp + np.sqrt(z_lp**2 - wo**2), z_lp - np.sqrt(z_lp**2 - wo**2)))
    p_bp = np.concatenate((p_lp + np.sqrt(p_lp**2 - wo**2), p_lp - np.sqrt(p_lp**2 - wo**2)))
    z_bp = np.concatenate((z_bp, np.zeros(degree)))
    return z_bp, p_bp, k * bw**degree


def bilinear(z, p, k, fs=DIGITAL_FS):
    """scipy.signal.bilinear_zpk."""
    degree = len(p) - len(z)
    fs2 = 2.0 * fs
    z_z = (fs2 + z) / (fs2 - z)
    p_z = (fs2 + p) / (fs2 - p)
    z_z = np.concatenate((z_z, -np.ones(degree)))
    k_z = k * np.real(np.prod(fs2 - z) / np.prod(fs2 - p))
    return z_z, p_z, k_z


def bandpass_crossings(x3: float, wo: float, bw: float) -> tuple[float, float]:
    """The bandpass frequencies (low, high) where x = (ω² − wo²)/(ω·bw) = ∓x3.

    |H_bp(jω)|² = |H_lp(jx)|², so a lowpass crossing at x3 maps to these
    (the low one as wo²/high: the same root without the cancellation)."""
    t = x3 * bw
    hi = (t + math.sqrt(t * t + 4.0 * wo * wo)) / 2.0
    return wo * wo / hi, hi


def cascade_energy(sections, gain: float) -> float:
    """∫_{−∞}^{∞} |F(jω)|² dω/2π for F(s) = gain·∏ over ``sections`` of (s − z)/(s − p), exactly.

    ``sections``: (pole, zero or None) pairs; a section without a zero is
    |p|/(s − p) (unit gain at DC, its |p| taken out of ``gain``), so at least
    one section must have no zero (F strictly proper).  All poles in the open
    left half-plane.

    Section i, x_i' = p_i·x_i + u_i, passes y_i = (p_i − z_i)·x_i + u_i (or
    |p_i|·x_i) to the next: A is lower triangular, and the Gramian P of
    A P + P Aᴴ + B Bᴴ = 0 follows row by row; the energy is C P Cᴴ (Parseval).
    """
    n = len(sections)
    a = np.zeros((n, n), complex)
    b = np.zeros(n, complex)
    u = np.zeros(n, complex)  # the input of the current section, as a combination of states
    beta = complex(gain)  # ... and of the filter's input
    for i, (pole, zero) in enumerate(sections):
        a[i] = u
        a[i, i] = pole
        b[i] = beta
        if zero is None:
            u = np.zeros(n, complex)
            u[i] = abs(pole)
            beta = 0.0
        else:
            u = u.copy()
            u[i] = pole - zero
    if beta != 0.0:
        raise ValueError("cascade_energy needs a strictly proper cascade")
    c = u
    gram = np.zeros((n, n), complex)
    for i in range(n):
        if i:
            rhs = -b[i] * np.conj(b[:i]) - a[i, :i] @ gram[:i, :i]
            m = np.conj(a[:i, :i])
            m[np.diag_indices(i)] += a[i, i]
            row = np.linalg.solve(m, rhs)
            gram[i, :i] = row
            gram[:i, i] = np.conj(row)
            cross = 2.0 * float(np.real(row @ np.conj(a[i, :i])))
        else:
            cross = 0.0
        gram[i, i] = -(abs(b[i]) ** 2 + cross) / (2.0 * a[i, i].real)
    return float(np.real(c @ gram @ np.conj(c)))
