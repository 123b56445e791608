"""Figures as sweep.json records them: seven significant digits, a non-finite value as null."""

from __future__ import annotations

import math


def round_figure(x, sig: int = 7):
    """Round floats to ``sig`` significant digits for the report (None and ints pass)."""
    if x is None or isinstance(x, (bool, int, str)):
        return x
    if not math.isfinite(x):
        return None
    return float(f"{x:.{sig}g}")


def round_any(v):
    """A float rounded as :func:`round_figure`; a mapping's values likewise; anything else as it is."""
    if isinstance(v, float):
        return round_figure(v)
    if isinstance(v, dict):
        return {k: round_figure(x) for k, x in v.items()}
    return v
