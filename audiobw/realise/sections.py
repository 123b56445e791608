"""Pair an analog prototype's poles and zeros into first- and second-order sections.

Each complex pole pair p, p* becomes s² + (ω0/Q)s + ω0² with ω0 = |p| and
Q = |p| / (−2 Re p); a real pole becomes a first-order section.  Sections are
ordered lowest Q first (common practice: the gentle sections come first so a
high-Q section's peaking does not clip ahead of the roll-off).  A highpass puts
s² (s) over each section; a bandpass prototype of order N has N zeros at the
origin, shared as highpass sections (s²) on the lower poles and lowpass
sections on the upper ones, with one bandpass section (s) for odd N.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ParameterError


@dataclass(frozen=True)
class Section:
    """One section: ``kind`` in lp1, hp1, lp2, hp2, bp2; ``f0_hz``; ``q`` (None for first order)."""

    kind: str
    f0_hz: float
    q: float | None

    def response(self, freq_hz) -> np.ndarray:
        """The ideal section's complex response (unity passband gain; bp2 unity at f0)."""
        s = 2j * np.pi * np.asarray(freq_hz, float)
        w0 = 2 * np.pi * self.f0_hz
        if self.kind in ("lp1", "hp1"):
            return (w0 if self.kind == "lp1" else s) / (s + w0)
        d = s * s + s * w0 / self.q + w0 * w0
        num = {"lp2": w0 * w0, "hp2": s * s, "bp2": s * w0 / self.q}[self.kind]
        return num / d


def pair_sections(z, p, response: str, family: str) -> list[Section]:
    """Sections of an analog prototype given as zeros and poles in rad/s.

    Raises ParameterError for finite zeros off the origin (elliptic notches), which
    the unity-gain Sallen-Key and multiple-feedback sections cannot make.
    """
    z = np.asarray(z, complex)
    p = np.asarray(p, complex)
    finite = z[np.abs(z) > 1e-9 * max(1.0, float(np.max(np.abs(p))))]
    if finite.size:
        raise ParameterError(
            f"realise: the {family} prototype has {finite.size} finite transmission zeros "
            "(notches) that the Sallen-Key and MFB sections cannot make; accepted families: "
            "butterworth, bessel, chebyshev1"
        )
    pairs, reals = [], []
    for root in p:
        if abs(root.imag) <= 1e-9 * abs(root):
            reals.append(float(root.real))
        elif root.imag > 0:
            w0 = abs(root)
            pairs.append((w0, w0 / (-2.0 * root.real)))
    n_zero = z.size
    out: list[Section] = []
    if response == "bandpass":
        # a wide band turns a real prototype pole into two real poles: a first-order
        # highpass (taking one zero at the origin) below and a first-order lowpass above
        reals = sorted(-r for r in reals)
        n_hp1 = len(reals) // 2
        out = [Section("hp1", w / (2 * math.pi), None) for w in reals[:n_hp1]]
        out += [Section("lp1", w / (2 * math.pi), None) for w in reals[n_hp1:]]
        n_zero -= n_hp1
        pairs.sort(key=lambda wq: wq[0])
        n = len(pairs)
        n_hp = n_zero // 2
        n_bp = n_zero - 2 * n_hp
        n_lp = n - n_hp - n_bp
        if n_lp < 0:
            raise ParameterError("realise: the prototype has more zeros than poles")
        kinds = ["hp2"] * n_hp + ["bp2"] * n_bp + ["lp2"] * n_lp
        if n_bp:  # the bandpass section takes the middle pole pair
            kinds = ["hp2"] * n_hp + ["lp2"] * n_lp
            kinds.insert(n // 2, "bp2")
        out += [Section(k, w0 / (2 * math.pi), q) for k, (w0, q) in zip(kinds, pairs)]
    else:
        two = "hp2" if response == "highpass" else "lp2"
        one = "hp1" if response == "highpass" else "lp1"
        out = [Section(two, w0 / (2 * math.pi), q) for w0, q in pairs]
        out += [Section(one, -r / (2 * math.pi), None) for r in reals]
    # lowest Q first; the first-order section (Q taken as 0.5 or less) leads
    return sorted(out, key=lambda s: (s.q if s.q is not None else 0.0, s.f0_hz))


def cascade_response(sections, freq_hz) -> np.ndarray:
    """Product of the ideal sections' responses."""
    h = np.ones(np.shape(freq_hz), complex)
    for s in sections:
        h = h * s.response(freq_hz)
    return h


def prototype_response(z, p, k, freq_hz) -> np.ndarray:
    """The prototype's complex response from its zpk (rad/s)."""
    from scipy import signal

    _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * np.asarray(freq_hz, float))
    return h
