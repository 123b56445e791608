"""Frequency weightings and band tables applied analytically to spectra.

A-weighting is evaluated from its analytic definition rather than from a
discrete-time filter, so it does not warp near the Nyquist frequency.

References
----------
.. [1] IEC 61672-1:2013, *Electroacoustics - Sound level meters - Part 1:
   Specifications*, Annex E (analytical expressions for frequency weightings
   C, A and Z), equations E.1 to E.6 and Table E.1 / Table 3.
.. [2] E. Zwicker, "Subdivision of the audible frequency range into critical
   bands (Frequenzgruppen)", J. Acoust. Soc. Am. 33(2), p. 248, 1961.
"""

from __future__ import annotations

import numpy as np

# IEC 61672-1:2013 Annex E, E.3: pole frequencies in Hz.  The standard gives
# them from fr = 1000 Hz, fL = 10^1.5 Hz, fH = 10^3.9 Hz, D = sqrt(1/2);
# the rounded values below are those of eq. E.3 / E.4 (f1, f4) and E.6 (fA, fB).
_F1_HZ = 20.598997
_F2_HZ = 107.65265
_F3_HZ = 737.86223
_F4_HZ = 12194.217
# IEC 61672-1:2013 eq. E.6: normalisation constant so that A(1 kHz) = 0 dB.
_A1000_DB = -2.000


def a_weighting_db(freq_hz):
    """A-weighting in dB at ``freq_hz`` (Hz, >= 0): 10·lg of :func:`a_weighting_power`; −inf at 0 Hz.

    IEC 61672-1:2013 Annex E, eq. E.6: A(f) = 20 lg[f4² f⁴ / ((f² + f1²)
    sqrt(f² + f2²) sqrt(f² + f3²) (f² + f4²))] − A1000.
    """
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(a_weighting_power(freq_hz))


def a_weighting_power(freq_hz):
    """A-weighting as a power gain (|W_A(f)|², linear) at the given frequencies.

    Parameters
    ----------
    freq_hz : array_like of float, >= 0
        Frequencies in Hz.

    Returns
    -------
    ndarray of float
        10^(A(f)/10); 1 at 1 kHz, 0 at 0 Hz.
    """
    f2 = np.square(np.asarray(freq_hz, dtype=float))
    num = _F4_HZ**4 * f2**4
    den = (f2 + _F1_HZ**2) ** 2 * (f2 + _F2_HZ**2) * (f2 + _F3_HZ**2) * (f2 + _F4_HZ**2) ** 2
    return num / den * 10.0 ** (-_A1000_DB / 10.0)


# Zwicker (1961), Table I: upper edges of the 24 critical bands in Hz (the
# first band starts at 0 Hz).
# fmt: off
ZWICKER_EDGES_HZ = (
    0.0, 100.0, 200.0, 300.0, 400.0, 510.0, 630.0, 770.0, 920.0, 1080.0,
    1270.0, 1480.0, 1720.0, 2000.0, 2320.0, 2700.0, 3150.0, 3700.0, 4400.0,
    5300.0, 6400.0, 7700.0, 9500.0, 12000.0, 15500.0,
)
# fmt: on


def critical_band_edges(top_hz: float) -> np.ndarray:
    """Critical-band edges from 0 Hz up to ``top_hz`` (normally fs/2).

    Zwicker's table ends at 15.5 kHz.  Above it, bands continue with the
    width ratio of the last tabulated band (15.5/12 ≈ 1.29; common practice
    for extending the table to higher sample rates), and the last band is
    closed at ``top_hz``.  A last band narrower than a third of its
    predecessor is merged into it.

    Parameters
    ----------
    top_hz : float, > 100
        Upper limit in Hz.

    Returns
    -------
    ndarray of float
        Monotonic band edges; band *b* spans ``[edges[b], edges[b+1])``.
    """
    edges = [e for e in ZWICKER_EDGES_HZ if e < top_hz]
    ratio = ZWICKER_EDGES_HZ[-1] / ZWICKER_EDGES_HZ[-2]
    while edges[-1] * ratio < top_hz and edges[-1] >= ZWICKER_EDGES_HZ[-1]:
        edges.append(edges[-1] * ratio)
    if len(edges) >= 3 and (top_hz - edges[-1]) < (edges[-1] - edges[-2]) / 3.0:
        edges[-1] = top_hz
    else:
        edges.append(top_hz)
    return np.asarray(edges, dtype=float)
