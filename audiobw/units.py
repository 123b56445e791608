"""Read and write physical quantities as people type them.

Every value a user gives audiobw -- on the command line or in a TOML file --
goes through this module, so that ``2.2k``, ``2.2kΩ`` and ``2200`` all mean
the same source resistance everywhere, and so that every refusal reads the
same way::

    --gain: '4x' is not a gain; accepted: a number in dB such as 40 or 40dB

Conventions
-----------
* Numbers (``int``/``float``, as TOML delivers them) are taken in the kind's
  base unit: ohms, kelvin, dB, V/√Hz, A/√Hz, bits, V rms, Hz, dBFS, seconds;
  a fraction is taken as 0...1.  THD+N is the exception: a bare number is
  refused because it could be a percentage or a dB figure.
* Strings are a number, optional whitespace, then an optional SI prefix
  (``f p n u µ m k M G``) and a unit.  Prefixes are case-sensitive (``m`` is
  milli, ``M`` is mega, kilo is only ``k``); unit names are not (``hz``,
  ``OHM``, ``db``), except kelvin, which is only ``K``.
* Logarithmic units (dB, dBu, dBV, dBFS), percentages, temperatures and bit
  depths take no prefix.
* A refusal raises :class:`~audiobw.errors.ParameterError` with one line:
  the option or key name, the offending value (``repr``) and what is
  accepted.  Mistakes by the calling code (an unknown *kind*, a bad
  ``digits``) raise a plain :class:`ValueError` instead.
"""

from __future__ import annotations

import math
import numbers
import re
from decimal import Decimal
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from audiobw.errors import ParameterError

__all__ = [
    "DBU_REF_VRMS",
    "ZERO_CELSIUS_K",
    "KINDS",
    "parse_quantity",
    "parse_band",
    "parse_grid",
    "parse_int_list",
    "parse_name_list",
    "format_quantity",
]

#: Reference of the dBu scale: the rms voltage that dissipates 1 mW in 600 Ω,
#: sqrt(0.001 W * 600 Ω) = sqrt(0.6) V ≈ 0.7746 V (common practice).
DBU_REF_VRMS: float = math.sqrt(0.6)

#: 0 °C expressed in kelvin (SI brochure, 9th ed.: t/°C = T/K - 273.15).
ZERO_CELSIUS_K: float = 273.15

#: Largest COUNT accepted in a ``START:STOP:COUNT`` grid.
MAX_GRID_COUNT: int = 10_000

# SI prefixes accepted on input, as powers of ten (SI brochure, 9th ed.,
# table of SI prefixes).  Both the micro sign (U+00B5) and the Greek small
# mu (U+03BC) are taken, as is the ASCII stand-in "u".
_PREFIXES: Mapping[str, int] = MappingProxyType(
    {
        "f": -15,
        "p": -12,
        "n": -9,
        "u": -6,
        "\u00b5": -6,
        "\u03bc": -6,
        "m": -3,
        "k": 3,
        "M": 6,
        "G": 9,
    }
)

# Prefixes used on output, by power of ten.
_OUT_PREFIX_DISPLAY = {-15: "f", -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
_OUT_PREFIX_COMPACT = {**_OUT_PREFIX_DISPLAY, -6: "u"}

# Units that never carry an SI prefix on output.
_NO_PREFIX_UNITS = frozenset({"dB", "dBu", "dBV", "dBFS", "dBc", "%", "K", "°C", "bit", "bits"})

_NUMBER_RE = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_INT_RE = re.compile(r"[+-]?\d+")


class _Refuse(Exception):
    """Internal: a unit conversion refuses the value, with a reason."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


def _linear(scale: float = 1.0) -> Callable[[float], float]:
    return lambda x: x * scale


def _from_db(ref: float) -> Callable[[float], float]:
    def convert(x: float) -> float:
        try:
            return ref * 10.0 ** (x / 20.0)
        except OverflowError:
            raise _Refuse("is too large") from None

    return convert


def _thdn_from_db(x: float) -> float:
    if x > 0:
        raise _Refuse("is a positive dB figure (THD+N in dB is below the signal, so negative)")
    return 100.0 * 10.0 ** (x / 20.0)


@dataclass(frozen=True)
class _Unit:
    spelling: str
    convert: Callable[[float], float]
    prefix: bool = True
    case_sensitive: bool = False


@dataclass(frozen=True)
class _Kind:
    noun: str
    accepted: str
    units: tuple[_Unit, ...]
    check: Callable[[float], str | None]
    # How a number (int/float, e.g. from TOML) is taken; None: refused.
    number: Callable[[float], float] | None = _linear()
    # Reason given for a string without a unit when "" is not among the units.
    no_unit_reason: str = "has no unit"
    # Physical range (inclusive) of the value in the base unit, and the base unit's symbol: the
    # one place a kind's limits live, so 1e308 or 1e-300 never reaches the arithmetic.
    limits: tuple[float, float] = (-math.inf, math.inf)
    unit: str = ""


def _check_any(v: float) -> str | None:
    return None


def _check_nonneg(v: float) -> str | None:
    return "is negative" if v < 0 else None


def _check_positive(v: float) -> str | None:
    return "is not above 0" if v <= 0 else None


def _check_kelvin(v: float) -> str | None:
    return "is not above absolute zero (0 K)" if v <= 0 else None


def _check_bits(v: float) -> str | None:
    if v != math.floor(v):
        return "is not a whole number of bits"
    if not 1 <= v <= 32:
        return "is out of range"
    return None


def _check_fraction(v: float) -> str | None:
    return None if 0 < v <= 1 else "is out of range"


def _check_percent(v: float) -> str | None:
    if v <= 0:
        return "is not above 0"
    if v > 100:
        return "is above 100%"
    return None


def _units(
    *spellings: str, convert: Callable[[float], float] | None = None, prefix: bool = True, case_sensitive: bool = False
) -> tuple[_Unit, ...]:
    conv = convert if convert is not None else _linear()
    return tuple(_Unit(s, conv, prefix, case_sensitive) for s in spellings)


_RTHZ = ("/rtHz", "/√Hz", "/√(Hz)", "/sqrt(Hz)", "/sqrtHz", "/rt(Hz)")

_KINDS: dict[str, _Kind] = {
    "resistance": _Kind(
        noun="a resistance",
        accepted="ohms, 0 or more, e.g. 150, 2.2k, 150ohm, 1kohm or 1MΩ (not 2k2-style codes)",
        units=_units("", "ohm", "ohms", "\u03a9", "\u2126"),
        check=_check_nonneg,
        limits=(0.0, 1e12),
        unit="Ω",
    ),
    "temperature": _Kind(
        noun="a temperature",
        accepted="kelvin above 0 or Celsius, e.g. 300, 300K, 27C or 27°C",
        units=(
            *_units("", prefix=False),
            *_units("K", prefix=False, case_sensitive=True),
            *_units("C", "°C", "degC", "\u2103", convert=lambda x: x + ZERO_CELSIUS_K, prefix=False),
        ),
        check=_check_kelvin,
        limits=(0.0, 1000.0),
        unit="K",
    ),
    "gain_db": _Kind(
        noun="a gain",
        accepted="a number in dB such as 40 or 40dB",
        units=_units("", "dB", prefix=False),
        check=_check_any,
        limits=(-400.0, 400.0),
        unit="dB",
    ),
    "voltage_density": _Kind(
        noun="a noise voltage density",
        accepted="V/√Hz, 0 or more, e.g. 1.2e-9, 1.2n, 1.2nV, 1.2nV/rtHz or 1.2nV/√Hz",
        units=_units("", "V", *("V" + r for r in _RTHZ)),
        check=_check_nonneg,
        limits=(0.0, 1e-3),
        unit="V/√Hz",
    ),
    "current_density": _Kind(
        noun="a noise current density",
        accepted="A/√Hz, 0 or more, e.g. 1.5e-12, 1.5p, 1.5pA, 1.5pA/rtHz or 1.5pA/√Hz",
        units=_units("", "A", *("A" + r for r in _RTHZ)),
        check=_check_nonneg,
        limits=(0.0, 1e-6),
        unit="A/√Hz",
    ),
    "bits": _Kind(
        noun="a bit depth",
        accepted="a whole number of bits from 1 to 32, e.g. 16, 24 or 24bit",
        units=_units("", "bit", "bits", "-bit", prefix=False),
        check=_check_bits,
    ),
    "voltage": _Kind(
        noun="a voltage",
        accepted="an rms voltage above 0, e.g. 2, 2V, 2Vrms, 775mV, +4dBu or 0dBV",
        units=(
            *_units("", "V", "Vrms"),
            *_units("dBu", convert=_from_db(DBU_REF_VRMS), prefix=False),
            *_units("dBV", convert=_from_db(1.0), prefix=False),
        ),
        check=_check_positive,
        limits=(1e-9, 1e4),
        unit="V",
    ),
    "frequency": _Kind(
        noun="a frequency",
        accepted="Hz above 0, e.g. 997, 20k, 20kHz or 1.5MHz",
        units=_units("", "Hz"),
        check=_check_positive,
        limits=(1e-3, 1e9),
        unit="Hz",
    ),
    "db": _Kind(
        noun="a dB value",
        accepted="a number in dB such as 0.1 or 60dB",
        units=_units("", "dB", prefix=False),
        check=_check_any,
        limits=(-400.0, 400.0),
        unit="dB",
    ),
    "thdn": _Kind(
        noun="a THD+N figure",
        accepted="give % or dB, e.g. 0.05% or -66dB",
        units=(
            *_units("%", prefix=False),
            *_units("dB", convert=_thdn_from_db, prefix=False),
        ),
        check=_check_percent,
        number=None,
        no_unit_reason="has no unit, so it could be % or dB",
    ),
    "level_dbfs": _Kind(
        noun="a level",
        accepted="a number in dBFS such as -1 or -1dBFS",
        units=_units("", "dBFS", prefix=False),
        check=_check_any,
        limits=(-400.0, 400.0),
        unit="dBFS",
    ),
    "fraction": _Kind(
        noun="a fraction",
        accepted="a number above 0 up to 1, or a percentage above 0 up to 100%, e.g. 0.95 or 95%",
        units=(*_units("", prefix=False), *_units("%", convert=lambda x: x / 100.0, prefix=False)),
        check=_check_fraction,
    ),
    "seconds": _Kind(
        noun="a duration",
        accepted="seconds above 0, e.g. 12, 12s or 500ms",
        units=_units("", "s"),
        check=_check_positive,
        limits=(1e-6, 1e6),
        unit="s",
    ),
}

#: The kinds :func:`parse_quantity` understands.
KINDS: tuple[str, ...] = tuple(_KINDS)


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


_BAND_ACCEPTED = (
    "LOW:HIGH in Hz with LOW < HIGH, either side may be empty, e.g. 20:20k, :9.5k or 40:; "
    "edges from 0.001 Hz to 1e+09 Hz"
)


def parse_band(text: str | Sequence[object], *, name: str) -> tuple[float | None, float | None]:
    """Read a passband ``LOW:HIGH``; an empty side means that edge is open.

    Parameters
    ----------
    text : str or sequence
        ``"20:20k"`` (bandpass), ``":9.5k"`` (lowpass), ``"40:"``
        (highpass), with the units and prefixes of a frequency.  A TOML
        array of two items (numbers in Hz, strings, ``""`` for an open side)
        is also accepted.
    name : str
        The option or key name used in refusal messages.

    Returns
    -------
    low : float or None
        Lower edge in Hz (> 0), or None for no lower edge.
    high : float or None
        Upper edge in Hz (> 0), or None for no upper edge.

    Raises
    ------
    ParameterError
        If the text is not ``LOW:HIGH``, a side is not a frequency above
        0 Hz, both sides are empty, or LOW ≥ HIGH.
    """
    if isinstance(text, str):
        parts: list[object] = list(text.split(":"))
        if len(parts) != 2:
            raise _fail(name, text, "is not a band", _BAND_ACCEPTED)
    elif isinstance(text, Sequence) and len(text) == 2:
        parts = list(text)
    else:
        raise _fail(name, text, "is not a band", _BAND_ACCEPTED)

    edges: list[float | None] = []
    for side, part in zip(("low", "high"), parts):
        if part is None or (isinstance(part, str) and part.strip() == ""):
            edges.append(None)
            continue
        try:
            edges.append(parse_quantity(part, "frequency", name=name))  # type: ignore[arg-type]
        except ParameterError:
            raise _fail(
                name,
                text,
                f"has a {side} edge {part!r} that is not a frequency from 0.001 Hz to 1e+09 Hz",
                _BAND_ACCEPTED,
            ) from None
    low, high = edges
    if low is None and high is None:
        raise _fail(name, text, "has neither edge", _BAND_ACCEPTED)
    if low is not None and high is not None:
        if low > high:
            raise _fail(name, text, "has the low edge above the high edge", _BAND_ACCEPTED)
        if low == high:
            raise _fail(name, text, "has the low edge equal to the high edge", _BAND_ACCEPTED)
    return low, high


_GRID_ACCEPTED = (
    "START:STOP:COUNT (log-spaced, e.g. 2k:20k:40), a list such as 100,200,400, "
    "or one value such as 1k; frequencies from 0.001 Hz to 1e+09 Hz"
)


def parse_grid(text: str | float | Sequence[object], *, name: str) -> list[float]:
    """Read a set of frequencies to sweep.

    Parameters
    ----------
    text : str or float or sequence
        ``"START:STOP:COUNT"`` -- COUNT points spaced evenly on a log scale
        (``numpy.geomspace``) from START to STOP inclusive; ``"100,200,400"``
        -- a comma list; ``"1k"`` -- one value.  Items take the units and
        prefixes of a frequency.  From TOML, a number (Hz) or an array of
        numbers/strings is also accepted.
    name : str
        The option or key name used in refusal messages.

    Returns
    -------
    list of float
        Frequencies in Hz, sorted ascending, duplicates removed.

    Raises
    ------
    ParameterError
        If an item is not a frequency above 0 Hz, the range has START > STOP,
        COUNT is not a whole number from 1 to :data:`MAX_GRID_COUNT`, or
        COUNT is 1 while START < STOP.

    Notes
    -----
    START == STOP gives the single value START whatever COUNT is.
    """

    def one(item: object) -> float:
        try:
            return parse_quantity(item, "frequency", name=name)  # type: ignore[arg-type]
        except ParameterError:
            raise _fail(
                name, text, f"holds {item!r}, which is not a frequency from 0.001 Hz to 1e+09 Hz", _GRID_ACCEPTED
            ) from None

    if _is_number(text):
        values = [one(text)]
    elif isinstance(text, str):
        stripped = text.strip()
        if stripped == "":
            raise _fail(name, text, "is empty", _GRID_ACCEPTED)
        if ":" in stripped:
            parts = stripped.split(":")
            if len(parts) != 3:
                raise _fail(name, text, "is not START:STOP:COUNT", _GRID_ACCEPTED)
            start, stop = one(parts[0]), one(parts[1])
            count_text = parts[2].strip()
            if not _INT_RE.fullmatch(count_text):
                raise _fail(name, text, f"has COUNT {parts[2]!r}, which is not a whole number", _GRID_ACCEPTED)
            count = int(count_text)
            if not 1 <= count <= MAX_GRID_COUNT:
                raise _fail(name, text, f"has COUNT {count}, outside 1 to {MAX_GRID_COUNT}", _GRID_ACCEPTED)
            if start > stop:
                raise _fail(name, text, "has START above STOP", _GRID_ACCEPTED)
            if start == stop:
                values = [start]
            elif count == 1:
                raise _fail(name, text, "has COUNT 1 for a range (START < STOP needs 2 or more)", _GRID_ACCEPTED)
            else:
                grid = np.geomspace(start, stop, count)
                grid[0], grid[-1] = start, stop
                values = [float(v) for v in grid]
        else:
            values = [one(item) for item in stripped.split(",")]
    elif isinstance(text, Sequence):
        if len(text) == 0:
            raise _fail(name, text, "is empty", _GRID_ACCEPTED)
        values = [one(item) for item in text]
    else:
        raise _fail(name, text, "is not a frequency grid", _GRID_ACCEPTED)
    return sorted(set(values))


def parse_int_list(text: str | int | Sequence[object], *, name: str, low: int, high: int) -> list[int]:
    """Read a comma list of whole numbers within ``[low, high]``.

    Parameters
    ----------
    text : str or int or sequence of int
        ``"2,4,6,8"`` or ``"4"``; from TOML, an int or an array of ints.
    name : str
        The option or key name used in refusal messages.
    low, high : int
        Inclusive bounds on every item.

    Returns
    -------
    list of int
        The items in the order given, duplicates removed.

    Raises
    ------
    ParameterError
        If the list is empty, an item is not a whole number, or an item is
        outside ``[low, high]``.
    """
    accepted = f"integers {low} to {high}"
    if isinstance(text, bool):
        raise _fail(name, text, "is not a list of integers", accepted)
    if isinstance(text, numbers.Integral):
        items: list[object] = [text]
    elif isinstance(text, str):
        if text.strip() == "":
            raise _fail(name, text, "is empty", accepted)
        items = list(text.split(","))
    elif isinstance(text, Sequence):
        items = list(text)
        if not items:
            raise _fail(name, text, "is empty", accepted)
    else:
        raise _fail(name, text, "is not a list of integers", accepted)

    out: list[int] = []
    for item in items:
        if isinstance(item, str) and _INT_RE.fullmatch(item.strip()):
            number = int(item.strip())
        elif isinstance(item, numbers.Integral) and not isinstance(item, bool):
            number = int(item)
        else:
            raise _fail(name, item, "is not an integer", accepted)
        if not low <= number <= high:
            raise _fail(name, number, "is out of range", accepted)
        if number not in out:
            out.append(number)
    return out


def parse_name_list(
    text: str | Sequence[str],
    *,
    name: str,
    choices: Sequence[str],
    aliases: Mapping[str, str] = MappingProxyType({}),
) -> list[str]:
    """Read a comma list of names drawn from a fixed set.

    Parameters
    ----------
    text : str or sequence of str
        ``"butterworth,bessel"``; from TOML, an array of strings.  Matching
        ignores case and surrounding whitespace.
    name : str
        The option or key name used in refusal messages.
    choices : sequence of str
        The accepted names, spelled as they are to be returned.
    aliases : mapping of str to str, optional
        Other spellings, each mapped to one of *choices*
        (``{"butter": "butterworth"}``).

    Returns
    -------
    list of str
        Names from *choices*, in the order given, duplicates removed.

    Raises
    ------
    ParameterError
        If the list is empty or holds a name that is neither a choice nor
        an alias.
    ValueError
        If an alias maps to a name not in *choices* (a mistake in the caller).
    """
    lookup = {c.lower(): c for c in choices}
    for alias, target in aliases.items():
        if target not in choices:
            raise ValueError(f"alias {alias!r} maps to {target!r}, which is not a choice")
        lookup.setdefault(alias.lower(), target)
    accepted = ", ".join(choices)
    if aliases:
        accepted += " (or " + ", ".join(aliases) + ")"

    if isinstance(text, str):
        items: list[object] = list(text.split(","))
    elif isinstance(text, Sequence):
        items = list(text)
    else:
        raise _fail(name, text, "is not a list of names", accepted)
    if not items or (len(items) == 1 and isinstance(items[0], str) and items[0].strip() == ""):
        raise _fail(name, text, "is empty", accepted)

    out: list[str] = []
    for item in items:
        key = item.strip().lower() if isinstance(item, str) else None
        if key is None or key not in lookup:
            raise _fail(name, item, "is not an accepted name", accepted)
        if lookup[key] not in out:
            out.append(lookup[key])
    return out


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
