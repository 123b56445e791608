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
from dataclasses import replace

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


def _shared_prototype(spec: FilterSpec, response: str, use_table: bool):
    """(zeros, poles, gain, shared values) of the normalised ``response`` prototype of ``spec``'s
    family, order and ripple: the shipped table's row, or (an untabled ripple or stopband, or
    ``use_table=False``) designed by scipy.signal at 1 rad/s, once per sweep."""
    key = (response, spec.family, int(spec.order), float(spec.ripple_db), float(spec.stopband_db))
    if not use_table:
        key = key + ("untabled",)
    row = _tabled(replace(spec, response=response)) if use_table else None
    if key not in _PROTOTYPES and row is not None:
        # shipped table: no scipy.signal import on the sweep path
        z, p = np.array(row[0], complex), np.array(row[1], complex)
        z.setflags(write=False)
        p.setflags(write=False)
        shared = {"gram_term": row[3], ("cross", row[4][0]): row[4][1]}
        _PROTOTYPES[key] = (z, p, float(row[2]), shared)
    if key not in _PROTOTYPES:
        z, p, k = _design(replace(spec, response=response), 1.0, analog=True, fs=None, output="zpk")
        z, p = np.asarray(z, complex), np.asarray(p, complex)
        z.setflags(write=False)
        p.setflags(write=False)
        _PROTOTYPES[key] = (z, p, float(np.real(k)), {})
    return _PROTOTYPES[key]


def design(spec: FilterSpec, *, use_table: bool = True) -> Filter:
    """Design one candidate (validate it first with :func:`validate_spec`).

    ``use_table=False`` designs with scipy.signal throughout (the reference
    the shipped-table path is tested against).

    Examples
    --------
    >>> f = design(FilterSpec("lowpass", "butterworth", 2, None, 1000.0))
    >>> round(float(f.response_db(1000.0)), 2)
    -3.01
    """
    if spec.stage == "analog" and spec.response != "bandpass":
        # normalised to its own edge, a lowpass or highpass prototype is the
        # same at every cutoff: design it once and share its derived values
        z, p, k, shared = _shared_prototype(spec, spec.response, use_table)
        return Filter(spec, z, p, k, 2 * math.pi * _wn(spec), _proto=shared)
    if use_table:
        # from the normalised lowpass prototype (tabled, or designed once by scipy.signal)
        return _from_lowpass(spec, *_shared_prototype(spec, "lowpass", True))
    # the reference: scipy.signal designs each candidate at its edges
    if spec.stage == "analog":
        wn = _wn(spec)
        ref = 2 * math.pi * (math.sqrt(wn[0] * wn[1]) if isinstance(wn, list) else wn)
        wn_norm = [2 * math.pi * w / ref for w in wn] if isinstance(wn, list) else 2 * math.pi * wn / ref
        z, p, k = _design(spec, wn_norm, analog=True, fs=None, output="zpk")
        return Filter(spec, np.asarray(z, complex), np.asarray(p, complex), float(np.real(k)), ref)
    z, p, k = _design(spec, _wn(spec), analog=False, fs=spec.fs_hz, output="zpk")
    return Filter(spec, np.asarray(z, complex), np.asarray(p, complex), float(np.real(k)))


def _from_lowpass(spec: FilterSpec, z_lp, p_lp, k_lp: float, shared: dict) -> Filter:
    """An analog bandpass or a digital design from the normalised lowpass prototype, in numpy.

    The same transforms as scipy.signal.iirfilter (audiobw._zpk), and the
    derived values in closed form from the prototype's shared ones (x3, the
    lowpass half-power crossing in units of its edge; g, its Gramian term):

    * analog bandpass, normalised to the geometric centre: |H(jω)|² =
      |H_lp(jx)|² with x = (ω² − wo²)/(ω·bw), so the −3 dB edges are where
      x = ∓x3, and ∫₀^∞ (|H|² − |H(∞)|²) dω = bw·∫₀^∞ (|H_lp|² − |H_lp(∞)|²) dx
      (the odd part of dω/dx integrates to zero against the even |H_lp|²):
      the Gramian term is bw·g;
    * digital: the bilinear map is exact, |H_d(e^{j2πf/fs})|² = |H_a(jΩ)|² at
      Ω = 4·tan(πf/fs) (the prewarped analog design H_a at fs = 2), so an edge
      is f = (fs/π)·atan(Ω₃/4) of the analog edge Ω₃, and ∫₀^{fs/2} |H_d|² df =
      (fs/4π)·∫₀^∞ |H_a(jΩ)|²/(1 + (Ω/4)²) dΩ: the energy of H_a cascaded with
      4/(s + 4), exact from its Gramian (audiobw._zpk.cascade_energy).
    """
    from . import _zpk

    if ("cross", True) not in shared or "gram_term" not in shared:
        # a prototype designed by scipy.signal: its values from the lowpass at 1 rad/s
        edge = 1.0 / (2.0 * math.pi)
        lp_spec = replace(spec, response="lowpass", stage="analog", low_hz=None, high_hz=edge)
        lp = Filter(lp_spec, z_lp, p_lp, k_lp, 1.0, _proto=shared)
        lp.varying_integral_hz()
        lp._crossing(edge, upward=True)
    x3 = shared[("cross", True)]
    if spec.stage == "analog":  # bandpass
        ref = 2 * math.pi * math.sqrt(spec.low_hz * spec.high_hz)
        w = np.asarray([2 * math.pi * spec.low_hz / ref, 2 * math.pi * spec.high_hz / ref], dtype=np.float64)
        bw, wo = float(w[1] - w[0]), float(np.sqrt(w[0] * w[1]))
        z, p, k = _zpk.lp2bp(z_lp, p_lp, k_lp, wo, bw)
        lo, hi = _zpk.bandpass_crossings(x3, wo, bw)
        to_hz = ref / (2 * math.pi)
        cache = {"edges": (lo * to_hz, hi * to_hz), "gram_term": bw * shared["gram_term"]}
        return Filter(spec, z, p, float(np.real(k)), ref, _cache=cache)
    fs = float(spec.fs_hz)
    warped = _zpk.prewarp(_wn(spec), fs)
    if spec.response == "lowpass":
        za, pa, ka = _zpk.lp2lp(z_lp, p_lp, k_lp, warped)
        edges = (None, float(warped) * x3)
    elif spec.response == "highpass":
        za, pa, ka = _zpk.lp2hp(z_lp, p_lp, k_lp, warped)
        edges = (float(warped) / x3, None)
    else:
        bw, wo = float(warped[1] - warped[0]), float(np.sqrt(warped[0] * warped[1]))
        za, pa, ka = _zpk.lp2bp(z_lp, p_lp, k_lp, wo, bw)
        edges = _zpk.bandpass_crossings(x3, wo, bw)
    z, p, k = _zpk.bilinear(za, pa, ka)
    # the half-power search stops just below fs/2 (Filter._crossing_search); so does this
    top = math.exp(math.log(fs / 2.0) - 1e-9)
    digital = tuple(None if e is None else min(fs / math.pi * math.atan(e / 4.0), top) for e in edges)
    if "pairs" not in shared:
        shared["pairs"] = _section_pairs(z_lp, p_lp)
    sections = _warped_sections(spec, za, pa, float(np.real(ka)), shared["pairs"], len(z_lp))
    cache = {"edges": digital, "warped": sections}
    return Filter(spec, np.asarray(z, complex), np.asarray(p, complex), float(np.real(k)), _cache=cache)


def _section_pairs(z_lp, p_lp):
    """The prototype's first-order sections for an exact energy: (pole index, zero index or None),
    each zero with its nearest pole (a pole near the axis meets a nearby zero, so no
    section has a large gain), the most damped sections first."""
    q = [abs(pole) / max(-2.0 * pole.real, 1e-300) for pole in p_lp]
    free = list(range(len(z_lp)))
    pairs = {}
    for i in sorted(range(len(p_lp)), key=lambda i: -q[i]):
        if free:
            j = min(free, key=lambda j: abs(p_lp[i] - z_lp[j]))
            free.remove(j)
            pairs[i] = j
        else:
            pairs[i] = None
    return [(i, pairs[i]) for i in sorted(range(len(p_lp)), key=lambda i: q[i])]


def _warped_sections(spec: FilterSpec, za, pa, ka: float, pairs, n_zeros: int):
    """The prewarped analog design (fs = 2) cascaded with 4/(s + 4), as (sections, gain) for
    audiobw._zpk.cascade_energy, section by section of the prototype (``pairs``, from
    :func:`_section_pairs`; the transforms keep the prototype's order of poles and zeros):
    a lowpass or highpass pole with its transformed zero (a highpass: the origin zero of a
    pole without one); a bandpass's pole pair made of one prototype pole (lp2bp: index i
    and n + i) with its zero pair, or with one origin zero."""
    n = len(pa)
    sections: list = []
    if spec.response == "bandpass":
        half, origin = n // 2, 2 * n_zeros
        for i, j in pairs:
            p1, p2 = pa[i], pa[half + i]
            if j is None:
                sections += [(p1, za[origin]), (p2, None)]
                origin += 1
                continue
            z1, z2 = za[j], za[n_zeros + j]
            if abs(p1 - z2) + abs(p2 - z1) < abs(p1 - z1) + abs(p2 - z2):
                z1, z2 = z2, z1
            sections += [(p1, z1), (p2, z2)]
    else:
        origin = n_zeros
        for i, j in pairs:
            if j is not None:
                sections.append((pa[i], za[j]))
            elif spec.response == "highpass":
                sections.append((pa[i], za[origin]))
                origin += 1
            else:
                sections.append((pa[i], None))
    sections.append((complex(-4.0), None))
    gain = ka
    for pole, zero in sections[:-1]:
        if zero is None:
            gain /= abs(pole)
    return sections, gain


def butterworth_enbw_ratio(order: int) -> float:
    """ENBW/f_c of an n-th order Butterworth lowpass: (π/2n)/sin(π/2n).

    Closed form from integrating 1/(1 + x^(2n)); see e.g. H. W. Ott,
    *Electromagnetic Compatibility Engineering* (Wiley, 2009), Table 8-1
    (from memory), or any table of noise bandwidths of Butterworth filters.
    """
    x = math.pi / (2 * order)
    return x / math.sin(x)
