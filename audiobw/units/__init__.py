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

Layout
------
:mod:`.kinds` the table of quantity kinds (units, prefixes, checks, physical
ranges); :mod:`.parse` one quantity (:func:`parse_quantity`), the range check
and whole numbers; :mod:`.lists` bands, frequency grids and lists of numbers
or names; :mod:`.display` :func:`format_quantity`.  Everything is imported
from ``audiobw.units``.
"""

from __future__ import annotations

from .display import format_quantity
from .kinds import _KINDS, DBU_REF_VRMS, KINDS, ZERO_CELSIUS_K  # noqa: F401  (_KINDS: the limits, for tests and docs)
from .lists import MAX_GRID_COUNT, parse_band, parse_grid, parse_int_list, parse_name_list  # noqa: F401
from .parse import check_range, parse_int, parse_quantity  # noqa: F401  (re-exported: units.check_range, units.parse_int)

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
