"""Active sections on standard values: unity-gain Sallen-Key, multiple feedback (MFB),
and a buffered first-order RC.

Design equations (denominator 1 + a1·s + a2·s², ω0 = 1/√a2, Q = √a2/a1):

* Sallen-Key lowpass, unity gain: R1 in→a, R2 a→b, C1 a→out, C2 b→ground;
  a1 = C2(R1+R2), a2 = R1R2C1C2.  Real resistors need C1 ≥ 4Q²C2; then R1, R2
  are the roots of x² − x/(ω0QC2) + 1/(ω0²C1C2) (the method of the op-amp vendor
  application notes on active low-pass filter design).
* Sallen-Key highpass, unity gain: C1 in→a, C2 a→b, R1 a→out, R2 b→ground;
  a1 = R1(C1+C2), a2 = R1R2C1C2; with C1 = C2 = C: R1 = 1/(2ω0QC), R2 = 2Q/(ω0C).
* MFB lowpass, gain −R2/R1: R1 in→a, R2 a→out, R3 a→m, C1 a→ground, C2 m→out;
  a1 = C2(R2 + R3 + R2R3/R1), a2 = R2R3C1C2; unity gain needs C1 ≥ 8Q²C2.
* MFB highpass, gain −C1/C2: C1 in→a, C2 a→out, C3 a→m, R1 a→ground, R2 m→out;
  a1 = R1(C1+C2+C3), a2 = R1R2C2C3; with equal C: R1 = 1/(3ω0QC), R2 = 3Q/(ω0C).
* MFB bandpass, centre gain −R3C1/(R1(C1+C2)): R1 in→a, R2 a→ground, C1 a→m,
  C2 a→out, R3 m→out; with Rp = R1‖R2: a1 = Rp(C1+C2), a2 = RpR3C1C2.
* First order: R in→a, C a→ground (or C in→a, R a→ground) and a voltage follower.

Node names: ``in`` (driven), ``gnd``, ``a``, ``b``, ``m`` and ``out``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import ParameterError
from . import eseries
from .sections import Section

TOPOLOGIES = ("sallen-key", "mfb")

#: (part, node, node) per (topology, kind); op-amp inputs (+, −) and output ``out``.
NETLISTS = {
    ("sallen-key", "lp2"): (
        [("R1", "in", "a"), ("R2", "a", "b"), ("C1", "a", "out"), ("C2", "b", "gnd")],
        ("b", "out"),
    ),
    ("sallen-key", "hp2"): (
        [("C1", "in", "a"), ("C2", "a", "b"), ("R1", "a", "out"), ("R2", "b", "gnd")],
        ("b", "out"),
    ),
    ("mfb", "lp2"): (
        [("R1", "in", "a"), ("R2", "a", "out"), ("R3", "a", "m"), ("C1", "a", "gnd"), ("C2", "m", "out")],
        ("gnd", "m"),
    ),
    ("mfb", "hp2"): (
        [("C1", "in", "a"), ("C2", "a", "out"), ("C3", "a", "m"), ("R1", "a", "gnd"), ("R2", "m", "out")],
        ("gnd", "m"),
    ),
    ("mfb", "bp2"): (
        [("R1", "in", "a"), ("R2", "a", "gnd"), ("C1", "a", "m"), ("C2", "a", "out"), ("R3", "m", "out")],
        ("gnd", "m"),
    ),
    ("rc", "lp1"): ([("R1", "in", "a"), ("C1", "a", "gnd")], ("a", "out")),
    ("rc", "hp1"): ([("C1", "in", "a"), ("R1", "a", "gnd")], ("a", "out")),
}

TOPOLOGY_LABEL = {
    "sallen-key": "unity-gain Sallen-Key",
    "mfb": "multiple feedback (inverting)",
    "rc": "RC with voltage follower",
}
KIND_LABEL = {
    "lp1": "lowpass, 1st order",
    "hp1": "highpass, 1st order",
    "lp2": "lowpass, 2nd order",
    "hp2": "highpass, 2nd order",
    "bp2": "bandpass, 2nd order",
}


@dataclass
class Stage:
    """A designed section: its topology, kind, part values (Ω, F) and the ideal it aims at."""

    topology: str
    kind: str
    parts: dict
    target: Section
    notes: list = field(default_factory=list)

    @property
    def netlist(self):
        return NETLISTS[(self.topology, self.kind)]

    def coefficients(self, parts: dict | None = None):
        """(num(s) callable, a1, a2) of the built section; part values may be arrays."""
        v = self.parts if parts is None else parts
        g = v.get
        key = (self.topology, self.kind)
        if key == ("rc", "lp1"):
            return (lambda s: 1.0 + 0 * s), g("R1") * g("C1"), 0.0
        if key == ("rc", "hp1"):
            t = g("R1") * g("C1")
            return (lambda s: t * s), t, 0.0
        if key == ("sallen-key", "lp2"):
            return (lambda s: 1.0 + 0 * s), g("C2") * (g("R1") + g("R2")), g("R1") * g("R2") * g("C1") * g("C2")
        if key == ("sallen-key", "hp2"):
            a2 = g("R1") * g("R2") * g("C1") * g("C2")
            return (lambda s: a2 * s * s), g("R1") * (g("C1") + g("C2")), a2
        if key == ("mfb", "lp2"):
            k = -g("R2") / g("R1")
            a1 = g("C2") * (g("R2") + g("R3") + g("R2") * g("R3") / g("R1"))
            return (lambda s: k + 0 * s), a1, g("R2") * g("R3") * g("C1") * g("C2")
        if key == ("mfb", "hp2"):
            b2 = g("C1") * g("C3") * g("R1") * g("R2")
            return (
                (lambda s: -b2 * s * s),
                g("R1") * (g("C1") + g("C2") + g("C3")),
                g("R1") * g("R2") * g("C2") * g("C3"),
            )
        if key == ("mfb", "bp2"):
            rp = g("R1") * g("R2") / (g("R1") + g("R2"))
            b1 = g("C1") * g("R3") * rp / g("R1")
            return (lambda s: -b1 * s), rp * (g("C1") + g("C2")), rp * g("R3") * g("C1") * g("C2")
        raise KeyError(key)

    def response(self, freq_hz, parts: dict | None = None) -> np.ndarray:
        """Complex response of the built section (broadcasts over array part values)."""
        s = 2j * np.pi * np.asarray(freq_hz, float)
        num, a1, a2 = self.coefficients(parts)
        return num(s) / (1.0 + a1 * s + a2 * s * s)

    def f0_q(self, parts: dict | None = None):
        """(f0 in Hz, Q) as built; Q is None for a first-order section."""
        _, a1, a2 = self.coefficients(parts)
        if self.kind in ("lp1", "hp1"):
            return 1.0 / (2 * math.pi * a1), None
        return 1.0 / (2 * math.pi * math.sqrt(a2)), math.sqrt(a2) / a1

    def gain(self) -> float:
        """Passband gain (DC, high-frequency or centre), signed: −1 for an inverting stage."""
        num, a1, a2 = self.coefficients()
        if self.kind in ("lp1", "lp2"):
            return float(np.real(num(0.0)))
        if self.kind in ("hp1",):
            return float(np.real(num(1.0)) / a1)
        if self.kind == "hp2":
            return float(np.real(num(1.0)) / a2)
        return float(np.real(num(1.0)) / a1)  # bandpass: value at ω0


def design_stage(section: Section, topology: str, *, r_level: float, r_series: str, c_series: str) -> Stage:
    """Choose E-series parts for one section (see the module notes for the equations)."""
    w0 = 2 * math.pi * section.f0_hz
    q = section.q
    rr = lambda x: eseries.nearest(x, r_series)  # noqa: E731
    c0 = eseries.nearest(1.0 / (w0 * r_level), c_series)
    kind = section.kind
    if kind in ("lp1", "hp1"):
        return Stage("rc", kind, {"R1": rr(1.0 / (w0 * c0)), "C1": c0}, section)
    if kind == "bp2" or topology == "mfb":
        topo = "mfb"
    else:
        topo = "sallen-key"
    notes = []
    if topo == "mfb" and topology == "sallen-key":
        notes.append("bandpass section: MFB (a unity-gain Sallen-Key has no bandpass form)")
    if (topo, kind) == ("sallen-key", "lp2"):
        c2 = c0
        c1 = eseries.at_least(4 * q * q * c2, c_series)
        s_, p_ = 1 / (w0 * q * c2), 1 / (w0 * w0 * c1 * c2)
        root = math.sqrt(max(s_ * s_ - 4 * p_, 0.0))
        parts = {"R1": rr((s_ - root) / 2), "R2": rr((s_ + root) / 2), "C1": c1, "C2": c2}
    elif (topo, kind) == ("sallen-key", "hp2"):
        parts = {"C1": c0, "C2": c0, "R1": rr(1 / (2 * w0 * q * c0)), "R2": rr(2 * q / (w0 * c0))}
    elif (topo, kind) == ("mfb", "lp2"):
        c2 = c0
        c1 = eseries.at_least(8 * q * q * c2, c_series)
        s_, p_ = 1 / (w0 * q * c2), 1 / (w0 * w0 * c1 * c2)
        y = (s_ + math.sqrt(max(s_ * s_ - 8 * p_, 0.0))) / 4  # R3
        r = rr(s_ - 2 * y)
        parts = {"R1": r, "R2": r, "R3": rr(y), "C1": c1, "C2": c2}
    elif (topo, kind) == ("mfb", "hp2"):
        parts = {"C1": c0, "C2": c0, "C3": c0, "R1": rr(1 / (3 * w0 * q * c0)), "R2": rr(3 * q / (w0 * c0))}
    elif (topo, kind) == ("mfb", "bp2"):
        rp = 1 / (2 * w0 * q * c0)
        r3 = 2 * q / (w0 * c0)
        gain = 1.0 if 2 * q * q > 1.05 else q * q
        r1 = r3 / (2 * gain)
        r2 = 1 / (1 / rp - 1 / r1) if r1 > rp * 1.0001 else None
        if r2 is None:
            raise ParameterError(f"realise: bandpass section at Q = {q:.3g} cannot be built as MFB at this gain")
        parts = {"R1": rr(r1), "R2": rr(r2), "R3": rr(r3), "C1": c0, "C2": c0}
    else:  # pragma: no cover - every kind is handled above
        raise ParameterError(f"realise: no {topo} form for a {kind} section")
    return Stage(topo, kind, parts, section, notes)
