"""Preferred number series for resistors and capacitors (IEC 60063:2015).

The tables are the published values, not the rounded formula
``round(10 ** (i / n))``: eight E24 values (2.7, 3.0, 3.3, 3.6, 3.9, 4.3,
4.7, 8.2) and the E12/E6 values drawn from them differ from that formula.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import ParameterError

#: IEC 60063:2015, Table 1 (E6, E12, E24) and Table 2 (E96), one decade.
# fmt: off
SERIES = {
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
            3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
    "E96": tuple(v / 100 for v in (
        100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143,
        147, 150, 154, 158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210,
        215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
        316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453,
        464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
        681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976)),
}
# fmt: on


def check_series(name: str, option: str) -> str:
    """Normalise a series name (``e24`` -> ``E24``) or refuse it in one line."""
    key = str(name).upper()
    if key not in SERIES:
        raise ParameterError(f"{option}: {name!r} is not a series; accepted: {', '.join(SERIES)}")
    return key


def _decade_values(series: str, value: float) -> np.ndarray:
    base = 10.0 ** math.floor(math.log10(value))
    mant = np.array(SERIES[series])
    return np.concatenate([mant * base / 10, mant * base, mant * base * 10])


def nearest(value: float, series: str) -> float:
    """The series value nearest to ``value`` on a log scale."""
    if not (value > 0 and math.isfinite(value)):
        raise ValueError(f"no series value for {value!r}")
    cand = _decade_values(series, value)
    v = float(cand[np.argmin(np.abs(np.log(cand / value)))])
    return float(f"{v:.3g}")


def at_least(value: float, series: str) -> float:
    """The smallest series value ≥ ``value`` (within 1 ppm)."""
    cand = _decade_values(series, value)
    v = float(cand[cand >= value * (1 - 1e-6)].min())
    return float(f"{v:.3g}")
