"""Figures as sweep.json records them: seven significant digits, a non-finite value as null."""

from __future__ import annotations

import math


#: The format of seven significant digits, fixed (a spec built per call costs twice as much).
_SPEC_7 = ".7g"


def round_figure(x, sig: int = 7):
    """Round floats to ``sig`` significant digits for the report (None and ints pass)."""
    if x is None or isinstance(x, (bool, int, str)):
        return x
    if not math.isfinite(x):
        return None
    return float(format(x, _SPEC_7 if sig == 7 else f".{sig}g"))


def round_any(v):
    """A float rounded as :func:`round_figure`; a mapping's values likewise; anything else as it is."""
    if isinstance(v, float):  # round_figure inlined: a 10 000-case sweep.json rounds 165 000 floats
        return float(format(v, _SPEC_7)) if math.isfinite(v) else None
    if isinstance(v, dict):
        return {k: round_figure(x) for k, x in v.items()}
    return v
