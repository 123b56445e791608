"""A quantity shown with an SI prefix in engineering steps (:func:`format_quantity`)."""

from __future__ import annotations

import math

# Prefixes used on output, by power of ten.
_OUT_PREFIX_DISPLAY = {-15: "f", -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
_OUT_PREFIX_COMPACT = {**_OUT_PREFIX_DISPLAY, -6: "u"}

# Units that never carry an SI prefix on output.
_NO_PREFIX_UNITS = frozenset({"dB", "dBu", "dBV", "dBFS", "dBc", "%", "K", "°C", "bit", "bits"})


def _trim(number: float, decimals: int) -> str:
    s = f"{number:.{max(decimals, 0)}f}"
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def format_quantity(value: float, unit: str = "", digits: int = 4, *, compact: bool = False) -> str:
    """Show a value with an SI prefix, in engineering steps of 10³.

    Parameters
    ----------
    value : float
        The value in base units (Ω, Hz, V/√Hz, ...).
    unit : str, optional
        Unit symbol appended after the prefix.  Logarithmic and similar
        units (dB, dBu, dBV, dBFS, %, K, °C, bit) are shown without prefix.
    digits : int, optional
        Significant digits kept (≥ 1); trailing zeros are dropped.
    compact : bool, optional
        No space between number and prefix/unit, and ``u`` for micro, so
        the text is ASCII (for units that are) and can be typed back:
        ``"2.2k"``, ``"20kHz"``.  Otherwise ``"2.2 kΩ"``, ``"4.7 µs"``.

    Returns
    -------
    str
        E.g. ``format_quantity(2200, "Ω")`` gives ``"2.2 kΩ"``,
        ``format_quantity(1.2e-9, "V/√Hz")`` gives ``"1.2 nV/√Hz"`` and
        ``format_quantity(0.0)`` gives ``"0"``.  Magnitudes outside
        1 f ... 999 G use exponent notation (``"1.2e-18"``).

    Raises
    ------
    ValueError
        If *digits* is below 1.

    Notes
    -----
    Rounding to *digits* significant digits changes the value by at most
    half a unit in the last digit, so the compact text read back with
    :func:`parse_quantity` is within 10^-(digits-1) relative of *value*.
    """
    if digits < 1:
        raise ValueError(f"digits must be 1 or more, not {digits!r}")
    sep = "" if compact else " "
    x = float(value)

    def join(number: str, prefix: str) -> str:
        tail = prefix + unit
        return f"{number}{sep}{tail}" if tail else number

    if not math.isfinite(x):
        return join(str(x), "")
    if x == 0:
        return join("0", "")
    if unit in _NO_PREFIX_UNITS:
        exp_digits = math.floor(math.log10(abs(x))) + 1
        return join(_trim(round(x, digits - exp_digits), digits - exp_digits), "")

    exp = 3 * math.floor(math.log10(abs(x)) / 3)
    # Settle float error in log10 (mantissa just below 1 or at 1000).
    if abs(x) / 10.0**exp < 1:
        exp -= 3
    elif abs(x) / 10.0**exp >= 1000:
        exp += 3
    mantissa = abs(x) / 10.0**exp
    int_digits = 1 if mantissa < 10 else 2 if mantissa < 100 else 3
    decimals = digits - int_digits
    rounded = round(mantissa, decimals)
    if rounded >= 1000:  # rounding carry: 999.96 -> 1000 -> 1 k
        exp += 3
        decimals = digits - 1
        rounded = round(mantissa / 1000, decimals)
    rounded = math.copysign(rounded, x)
    if exp < -15 or exp > 9:
        return join(f"{x:.{digits}g}", "")
    prefixes = _OUT_PREFIX_COMPACT if compact else _OUT_PREFIX_DISPLAY
    return join(_trim(rounded, decimals), prefixes[exp])
