"""Candidate filters: design (:func:`design`); the designed :class:`Filter` gives responses, −3 dB edges and ENBW.

Every candidate is kept as its prototype (zeros, poles, gain), so its response
is evaluated analytically on any frequency grid and its realisable form
(second-order sections) is available for rendering.

Edge conventions (stated once, used everywhere):

* Butterworth: the given edge is the −3.01 dB (half-power) frequency.
* Bessel: designed with ``norm='mag'`` so the given edge is also the −3.01 dB
  frequency (scipy's default ``norm='phase'`` is not).
* Chebyshev type I and elliptic: the given edge is the passband (ripple) edge,
  where the response leaves the ripple band; the −3.01 dB edges lie outside
  it and are computed and reported.

The passband peak gain of every design is 0 dB.  ``order`` is the prototype
order: each skirt falls at 6·order dB/octave; a bandpass has ``2·order`` poles.

References
----------
.. [1] scipy.signal.butter, bessel, cheby1, ellip (filter design), and
   freqs_zpk / freqz_zpk (frequency responses), SciPy reference guide.
.. [2] A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*,
   3rd ed., §7.1 (bilinear transformation with frequency prewarping).
.. [3] Equivalent noise bandwidth of a transfer function from its state-space
   form through the controllability Gramian (Lyapunov equation):
   ∫|h(t)|² dt = C P Cᵀ with A P + P Aᵀ + B Bᵀ = 0 (Parseval).
"""

from __future__ import annotations

import math

import numpy as np

from .filterspec import FilterSpec, validate_spec
from .options import (  # noqa: F401  (re-exported: audiobw.filters.FAMILIES and the rest)
    FAMILIES,
    FAMILY_ALIASES,
    MAX_ORDER,
    MIN_ORDER,
    RESPONSE_ALIASES,
    RESPONSES,
    STAGES,
)
from .response import HALF_POWER, Filter

#: Re-exported from here: the spec (audiobw.filterspec) and the designed filter (audiobw.response).
__all__ = ["HALF_POWER", "Filter", "FilterSpec", "butterworth_enbw_ratio", "design", "validate_spec"]


def _design(spec: FilterSpec, wn, *, analog: bool, fs: float | None, output: str):
    from scipy import signal  # lazy: the tabled prototypes never need it

    btype = {"lowpass": "lowpass", "highpass": "highpass", "bandpass": "bandpass"}[spec.response]
    kw = dict(btype=btype, analog=analog, output=output)
    if not analog:
        kw["fs"] = fs
    n = int(spec.order)
    if spec.family == "butterworth":
        return signal.butter(n, wn, **kw)
    if spec.family == "bessel":
        return signal.bessel(n, wn, norm="mag", **kw)
    if spec.family == "chebyshev1":
        return signal.cheby1(n, spec.ripple_db, wn, **kw)
    return signal.ellip(n, spec.ripple_db, spec.stopband_db, wn, **kw)


def _wn(spec: FilterSpec):
    if spec.response == "lowpass":
        return spec.high_hz
    if spec.response == "highpass":
        return spec.low_hz
    return [spec.low_hz, spec.high_hz]


#: Normalised analog lowpass/highpass prototypes, keyed by (response, family, order, ripple, stopband).
_PROTOTYPES: dict = {}


def _tabled(spec: FilterSpec):
    """The shipped normalised prototype for ``spec`` (audiobw._prototypes), or None."""
    from ._prototypes import TABLE

    ripple: object = None
    if spec.family == "chebyshev1":
        ripple = float(spec.ripple_db)
    elif spec.family == "elliptic":
        ripple = (float(spec.ripple_db), float(spec.stopband_db))
    return TABLE.get((spec.response, spec.family, int(spec.order), ripple))


def design(spec: FilterSpec, *, use_table: bool = True) -> Filter:
    """Design one candidate (validate it first with :func:`validate_spec`).

    Examples
    --------
    >>> f = design(FilterSpec("lowpass", "butterworth", 2, None, 1000.0))
    >>> round(float(f.response_db(1000.0)), 2)
    -3.01
    """
    if spec.stage == "analog" and spec.response != "bandpass":
        # normalised to its own edge, a lowpass or highpass prototype is the
        # same at every cutoff: design it once and share its derived values
        key = (spec.response, spec.family, int(spec.order), float(spec.ripple_db), float(spec.stopband_db))
        if not use_table:
            key = key + ("untabled",)
        row = _tabled(spec) if use_table else None
        if key not in _PROTOTYPES and row is not None:
            # shipped table: no scipy.signal import on the sweep path
            z, p = np.array(row[0], complex), np.array(row[1], complex)
            z.setflags(write=False)
            p.setflags(write=False)
            shared = {"gram_term": row[3], ("cross", row[4][0]): row[4][1]}
            _PROTOTYPES[key] = (z, p, float(row[2]), shared)
        if key not in _PROTOTYPES:
            z, p, k = _design(spec, 1.0, analog=True, fs=None, output="zpk")
            z, p = np.asarray(z, complex), np.asarray(p, complex)
            z.setflags(write=False)
            p.setflags(write=False)
            _PROTOTYPES[key] = (z, p, float(np.real(k)), {})
        z, p, k, shared = _PROTOTYPES[key]
        return Filter(spec, z, p, k, 2 * math.pi * _wn(spec), _proto=shared)
    if spec.stage == "analog":
        wn = _wn(spec)
        ref = 2 * math.pi * (math.sqrt(wn[0] * wn[1]) if isinstance(wn, list) else wn)
        wn_norm = [2 * math.pi * w / ref for w in wn] if isinstance(wn, list) else 2 * math.pi * wn / ref
        z, p, k = _design(spec, wn_norm, analog=True, fs=None, output="zpk")
        return Filter(spec, np.asarray(z, complex), np.asarray(p, complex), float(np.real(k)), ref)
    z, p, k = _design(spec, _wn(spec), analog=False, fs=spec.fs_hz, output="zpk")
    return Filter(spec, np.asarray(z, complex), np.asarray(p, complex), float(np.real(k)))


def butterworth_enbw_ratio(order: int) -> float:
    """ENBW/f_c of an n-th order Butterworth lowpass: (π/2n)/sin(π/2n).

    Closed form from integrating 1/(1 + x^(2n)); see e.g. H. W. Ott,
    *Electromagnetic Compatibility Engineering* (Wiley, 2009), Table 8-1
    (from memory), or any table of noise bandwidths of Butterworth filters.
    """
    x = math.pi / (2 * order)
    return x / math.sin(x)
