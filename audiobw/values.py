"""One option's value, as typed on the command line or in the TOML file, parsed into its base unit.

:func:`parse` reads a value by its option's kind (:data:`audiobw.options.OPTIONS`):
the quantities through :func:`audiobw.units.parse_quantity`, the rest (choices,
lists, grids, input levels, bit rates, microphone sensitivities, audiograms,
e_n tables) here.  Range checks beyond the kind's own are the options' limits,
applied by :func:`audiobw.settings.build`.
"""

from __future__ import annotations

import math
from pathlib import Path

from . import units
from .errors import ParameterError
from .options import FAMILIES, FAMILY_ALIASES, MAX_ORDER, MIN_ORDER, OPTIONS, RESPONSE_ALIASES

#: reference sound pressure of dB SPL, Pa (ISO 1683)
P_REF_PA = 20e-6


def parse(key: str, v, name: str):
    """The value ``v`` of option ``key`` parsed into its base unit; ``name`` (its origin) leads a refusal."""
    kind = OPTIONS[key].kind
    if kind.startswith("choice:"):
        choices = OPTIONS[key].choices
        aliases = RESPONSE_ALIASES if key == "response" else {}
        text = str(v).strip().lower()
        text = aliases.get(text, text)
        if text not in choices:
            raise ParameterError(f"{name}: {v!r} is not accepted; accepted: {', '.join(choices)}")
        return text
    if kind == "families":
        return tuple(units.parse_name_list(v, name=name, choices=FAMILIES, aliases=FAMILY_ALIASES))
    if kind == "orders":
        return tuple(units.parse_int_list(v, name=name, low=MIN_ORDER, high=MAX_ORDER))
    if kind == "grid":
        return tuple(units.parse_grid(v, name=name))
    if kind == "db_any":
        return units.parse_quantity(v, "gain_db", name=name)
    if kind == "input_level":
        return _parse_input_level(v, name)
    if kind == "bit_rate":
        return parse_bit_rate(v, name)
    if kind == "mic_sensitivity":
        return _parse_mic_sensitivity(v, name)
    if kind == "probability":
        return _parse_probability(v, name)
    if kind == "percent":
        return _parse_percent(v, name)
    if kind == "en_table":
        from .entable import ACCEPTED, read_table

        if not isinstance(v, str) or not v.strip():
            raise ParameterError(f"{name}: {v!r} is not a file name; {ACCEPTED}")
        return (Path(v).name, read_table(v, origin=name))
    if kind == "audiogram":
        from .perceptual.threshold import parse_audiogram

        try:
            return parse_audiogram(v)
        except ValueError as exc:
            raise ParameterError(f"{name}: {exc}") from None
    return units.parse_quantity(v, kind, name=name)


def _parse_percent(v, name):
    text = str(v).strip().rstrip("%").strip()
    try:
        x = float(text)
    except ValueError:
        x = math.nan
    if not 0 <= x <= 100:
        raise ParameterError(f"{name}: {v!r} is not accepted; accepted: a share of frames, 0 to 100 (%)")
    return x


def parse_bit_rate(v, name):
    """'auto' or a rate in bit/s (SI prefixes; 'bit/s', 'bps' or 'Hz' accepted)."""
    text = str(v).strip()
    if text.lower() == "auto":
        return "auto"
    for suffix in ("bit/s", "bits/s", "b/s", "bps", "baud", "Bd"):
        if text.endswith(suffix):
            text = text[: -len(suffix)].strip() + "Hz"
            break
    try:
        return units.parse_quantity(text if not isinstance(v, (int, float)) else v, "frequency", name=name)
    except ParameterError:
        raise ParameterError(
            f"{name}: {v!r} is not a bit rate; accepted: a rate such as 2k, 9600bit/s, "
            "1.2kbps (0.001 to 1e+09 bit/s), or auto"
        ) from None


def _parse_probability(v, name):
    try:
        p = float(str(v).strip())
    except ValueError:
        p = math.nan
    if not (0 < p <= 0.5):
        raise ParameterError(f"{name}: {v!r} is not a bit-error rate; accepted: a number 0 < BER <= 0.5, e.g. 1e-9")
    return p


def _parse_mic_sensitivity(v, name):
    """Microphone sensitivity in V/Pa from '10mV/Pa', '-40dBV/Pa' (or a bare V/Pa number)."""
    text = str(v).strip()
    if text.endswith("/Pa"):
        text = text[:-3].strip()
    try:
        s = units.parse_quantity(text if not isinstance(v, (int, float)) else v, "voltage", name=name)
    except ParameterError:
        raise ParameterError(f"{name}: {v!r} is not a microphone sensitivity; accepted: 10mV/Pa or -40dBV/Pa") from None
    if not s > 0:
        raise ParameterError(f"{name}: {v!r} is out of range; accepted: a sensitivity > 0 V/Pa")
    return s


def _parse_input_level(v, name):
    """('gain', dB) or ('dbfs', level) or ('vrms', volts)."""
    text = str(v).strip()
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return ("gain", units.parse_quantity(v, "gain_db", name=name))
    if text.endswith("dBFS"):
        return ("dbfs", units.parse_quantity(text, "level_dbfs", name=name))
    if text.endswith("dB"):
        return ("gain", units.parse_quantity(text, "gain_db", name=name))
    try:
        return ("vrms", units.parse_quantity(text, "voltage", name=name))
    except ParameterError as exc:
        if "physical range" in str(exc):
            raise
        raise ParameterError(
            f"{name}: {v!r} is not an input level; accepted: a level such as -18dBFS, +4dBu, 0.5Vrms, "
            "or a gain such as 6dB"
        ) from None
