"""The public result of a library sweep: typed rows over the sweep.json mapping.

:class:`SweepResult` holds the mapping ``audiobw sweep`` writes to sweep.json,
its cases as read-only :class:`Case` rows and the :class:`Choice`.
Re-exported by :mod:`audiobw.api` and :mod:`audiobw`.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any


class Case(Mapping):
    """One case row of a sweep: attribute and key access to sweep.json's case fields.

    Fields are those of :data:`audiobw.sweep.CASE_KEYS` (frequencies in Hz,
    levels in dB or dBFS, THD+N in % and dB, noise in V rms); keys added to
    the row later appear here too.
    """

    __slots__ = ("_row",)

    def __init__(self, row: Mapping[str, Any]) -> None:
        object.__setattr__(self, "_row", dict(row))

    def __getattr__(self, name: str) -> Any:
        try:
            return self._row[name]
        except KeyError:
            raise AttributeError(name) from None

    def __setattr__(self, name: str, value: Any) -> None:
        raise AttributeError("Case rows are read-only")

    def __getitem__(self, key: str) -> Any:
        return self._row[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self._row)

    def __len__(self) -> int:
        return len(self._row)

    def __repr__(self) -> str:
        return f"Case(id={self._row.get('id')}, low_hz={self._row.get('low_hz')}, high_hz={self._row.get('high_hz')})"


@dataclasses.dataclass(frozen=True)
class Choice:
    """The chosen case and why.

    Attributes
    ----------
    case : Case
    low_hz, high_hz : float or None
        The chosen passband's −3 dB edges, Hz (None: open edge).
    binding : str or None
        The target key with the least margin.
    binding_margin_db : float or None
    """

    case: Case
    binding: str | None
    binding_margin_db: float | None
    details: Mapping[str, Any]

    @property
    def low_hz(self) -> float | None:
        return self.case.get("low_hz")

    @property
    def high_hz(self) -> float | None:
        return self.case.get("high_hz")


class SweepResult:
    """A finished sweep as typed rows over the sweep.json mapping.

    Attributes
    ----------
    cases : tuple of Case
    choice : Choice or None
        None when no case meets the targets (see :attr:`unmet`).
    unmet : dict
        Target key -> best value any case reached, for each target that no
        case meets even on its own (empty when a case passes).
    conflicts : list of dict
        Targets that each hold in some case but never together, and the edge
        where each flips (docs/sweep-json.md; empty when a case passes).
    """

    def __init__(self, doc: dict, paths: Mapping[str, Path] | None = None) -> None:
        self._doc = doc
        self.paths = dict(paths or {})
        self.cases = tuple(Case(c) for c in doc["cases"])
        ch = doc.get("choice")
        self.choice = (
            None if not ch else Choice(self.cases[ch["case"] - 1], ch.get("binding"), ch.get("binding_margin_db"), ch)
        )
        self.unmet = dict(doc.get("unmet") or {})
        self.conflicts = [dict(c) for c in doc.get("conflicts") or []]

    def to_json(self) -> dict:
        """The sweep.json mapping (docs/sweep-json.md), as ``audiobw sweep`` writes it."""
        return self._doc

    def case(self, case_id: int) -> Case:
        """The case with ``id == case_id`` (ids start at 1)."""
        return self.cases[case_id - 1]
