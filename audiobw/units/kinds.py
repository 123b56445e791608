"""The quantity kinds: for each, its units and SI prefixes, the check of its value and its physical range."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from types import MappingProxyType

#: Reference of the dBu scale: the rms voltage that dissipates 1 mW in 600 Ω,
#: sqrt(0.001 W * 600 Ω) = sqrt(0.6) V ≈ 0.7746 V (common practice).
DBU_REF_VRMS: float = math.sqrt(0.6)

#: 0 °C expressed in kelvin (SI brochure, 9th ed.: t/°C = T/K - 273.15).
ZERO_CELSIUS_K: float = 273.15

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
