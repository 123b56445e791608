"""One quantity as a user typed it (:func:`parse_quantity`), the physical range check, whole numbers."""

from __future__ import annotations

import math
import numbers
import re
from decimal import Decimal

from ..errors import ParameterError
from .kinds import _KINDS, _PREFIXES, KINDS, _Refuse, _Unit

_NUMBER_RE = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_INT_RE = re.compile(r"[+-]?\d+")


def _fail(name: str, value: object, reason: str, accepted: str) -> ParameterError:
    return ParameterError(f"{name}: {value!r} {reason}; accepted: {accepted}")


def _is_number(value: object) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _match_unit(suffix: str, units: tuple[_Unit, ...]) -> tuple[_Unit, int] | None:
    """Split *suffix* into (unit, power of ten of its prefix), or None if it is not one."""
    for unit in sorted(units, key=lambda u: -len(u.spelling)):
        n = len(unit.spelling)
        if n > len(suffix):
            continue
        head, tail = suffix[: len(suffix) - n], suffix[len(suffix) - n :]
        same = tail == unit.spelling if unit.case_sensitive else tail.lower() == unit.spelling.lower()
        if not same:
            continue
        if head == "":
            return unit, 0
        if unit.prefix and head in _PREFIXES:
            return unit, _PREFIXES[head]
    return None


def parse_quantity(value: str | int | float, kind: str, *, name: str) -> float:
    """Read one quantity as a user typed it and return it in base SI units.

    Parameters
    ----------
    value : str or int or float
        The text typed (``"2.2k"``, ``"27°C"``, ``"+4dBu"``) or a number from
        a TOML file, which is taken in the kind's base unit (see Returns).
    kind : str
        One of :data:`KINDS`: ``"resistance"``, ``"temperature"``,
        ``"gain_db"``, ``"voltage_density"``, ``"current_density"``,
        ``"bits"``, ``"voltage"``, ``"frequency"``, ``"db"``, ``"thdn"``,
        ``"level_dbfs"``, ``"fraction"``, ``"seconds"``.
    name : str
        The option or key the value came from (``"--gain"``), used in the
        refusal message.

    Returns
    -------
    float
        The value in the kind's base unit: resistance in Ω (≥ 0),
        temperature in K (> 0), gain_db and db in dB, voltage_density in
        V/√Hz (≥ 0), current_density in A/√Hz (≥ 0), bits as a whole
        number 1...32, voltage in V rms (> 0), frequency in Hz (> 0), thdn
        in **percent** (0 < x ≤ 100), level_dbfs in dBFS, fraction as a
        ratio in (0, 1], seconds in s (> 0).

    Raises
    ------
    ParameterError
        If the value cannot be read, has a unit that does not fit the kind,
        or is out of the kind's range.
    ValueError
        If *kind* is not one of :data:`KINDS` (a mistake in the caller).

    Notes
    -----
    A bare temperature is kelvin: ``"27"`` is 27 K, not 27 °C.  THD+N in dB
    must be ≤ 0 dB; ``"66dB"`` is refused rather than guessed to mean -66 dB.
    """
    try:
        spec = _KINDS[kind]
    except KeyError:
        raise ValueError(f"unknown quantity kind {kind!r}; known: {', '.join(KINDS)}") from None

    if _is_number(value):
        number = float(value)
        if not math.isfinite(number):
            raise _fail(name, value, "is not a finite number", spec.accepted)
        if spec.number is None:
            raise _fail(name, value, spec.no_unit_reason, spec.accepted)
        result = spec.number(number)
    elif isinstance(value, str):
        text = value.strip()
        m = _NUMBER_RE.match(text)
        if m is None:
            raise _fail(name, value, f"is not {spec.noun}", spec.accepted)
        number = float(m.group())
        if not math.isfinite(number):
            raise _fail(name, value, "is not a finite number", spec.accepted)
        suffix = re.sub(r"\s+", "", text[m.end() :])
        found = _match_unit(suffix, spec.units)
        if found is None:
            if suffix == "":
                reason = spec.no_unit_reason
            elif suffix[:1] == "K" and _match_unit("k" + suffix[1:], spec.units) is not None:
                reason = f"is not {spec.noun} (kilo is a lowercase k)"
            else:
                reason = f"is not {spec.noun}"
            raise _fail(name, value, reason, spec.accepted)
        unit, power = found
        if power:
            # Scale in decimal so that "1.2n" is the float nearest 1.2e-9.
            number = float(Decimal(m.group()).scaleb(power))
        try:
            result = unit.convert(number)
        except _Refuse as refusal:
            raise _fail(name, value, refusal.reason, spec.accepted) from None
    else:
        raise _fail(name, value, f"is not {spec.noun}", spec.accepted)

    if not math.isfinite(result):
        raise _fail(name, value, "is too large", spec.accepted)
    problem = spec.check(result)
    if problem is not None:
        raise _fail(name, value, problem, spec.accepted)
    check_range(result, spec.limits, name=name, value=value, unit=spec.unit)
    return float(result)


def check_range(result: float, limits: tuple[float, float], *, name: str, value: object, unit: str = "") -> None:
    """Refuse a value outside its physical range, naming the option, the value and the range.

    The one range check of every numeric option and key (quantities, counts, seeds, times).
    """
    lo, hi = limits
    if not (math.isfinite(result) and lo <= result <= hi):
        span = f"{lo:g} to {hi:g}" + (f" {unit}" if unit else "")
        raise ParameterError(
            f"{name}: {value!r} is outside the physical range; accepted: {span}" + _prefix_hint(result, limits, value)
        )


def _prefix_hint(result: float, limits: tuple[float, float], value: object) -> str:
    """For a bare number too large by an SI prefix (``--en 1.2``), name the prefixes that fit."""
    text = str(value).strip()
    if not (math.isfinite(result) and result > limits[1] and re.fullmatch(r"[0-9.eE+-]+", text)):
        return ""
    fits = [
        text + p
        for p, f in (("m", 1e-3), ("u", 1e-6), ("n", 1e-9), ("p", 1e-12))
        if limits[0] <= result * f <= limits[1]
    ]
    return f" (was an SI prefix left off: {', '.join(fits)}?)" if fits else ""


def parse_int(value: object, *, name: str, low: int, high: int, noun: str = "a whole number") -> int:
    """Read one whole number within ``[low, high]`` (a seed, a count) as typed or from TOML."""
    if not _is_number(value):
        text = str(value).strip()
        if not _INT_RE.fullmatch(text) or len(text) > 40:
            raise _fail(name, value, f"is not {noun}", f"a whole number from {low} to {high}")
        number = int(text)
    else:
        real = float(value)  # type: ignore[arg-type]  # a numbers.Real
        if not math.isfinite(real):
            number = low - 1
        elif not real.is_integer():
            raise _fail(name, value, f"is not {noun}", f"a whole number from {low} to {high}")
        else:
            number = int(value) if isinstance(value, int) else int(real)
    if not low <= number <= high:
        raise _fail(name, value, "is outside the accepted range", f"a whole number from {low} to {high}")
    return number
