"""Several values in one option: a passband, a frequency grid, a list of whole numbers or of names."""

from __future__ import annotations

import numbers
from collections.abc import Mapping, Sequence
from types import MappingProxyType

import numpy as np

from ..errors import ParameterError
from .parse import _INT_RE, _fail, _is_number, parse_quantity

#: Largest COUNT accepted in a ``START:STOP:COUNT`` grid.
MAX_GRID_COUNT: int = 10_000

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
