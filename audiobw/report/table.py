"""The terminal's case table: one row per case (per design for a large sweep), failing values marked."""

from __future__ import annotations

import math

from .. import registry
from ..registry import TARGET_LABEL
from .words import BER_FLOOR

#: The identity columns every case table starts with: (header, unit, key, format, target)
ID_COLUMNS = (
    ("id", "", "id", "{:>4d}", None),
    ("family", "", "family", "{:<11s}", None),
    ("ord", "", "order", "{:>3d}", None),
    ("low", "Hz", "low_hz", "{:>8.1f}", None),
    ("high", "Hz", "high_hz", "{:>8.0f}", None),
)
#: table column -> (header, unit, key, format, target that marks it); metric columns from audiobw.registry
COLUMNS = ID_COLUMNS + registry.columns("audio")
#: columns of a data-program sweep
DATA_COLUMNS = ID_COLUMNS + registry.columns("data")


def _derived(case: dict) -> dict:
    c = dict(case)
    if c.get("noise_sigma_v") is not None:
        c["noise_sigma_uv"] = c["noise_sigma_v"] * 1e6
    if c.get("eye_fraction") is not None:
        c["eye_pct"] = 100 * c["eye_fraction"]
    if c.get("delay_spread_s") is not None:
        c["delay_spread_us"] = c["delay_spread_s"] * 1e6
    return c


def _cell(fmt: str, value) -> str:
    width = int("".join(ch for ch in fmt.split(":")[1] if ch.isdigit()).split(".")[0] or 0) if ":" in fmt else 0
    if value is None:
        return "—".rjust(width)
    if fmt.endswith("e}") and isinstance(value, float) and 0 <= value < BER_FLOOR:
        return "<1e-300".rjust(width)
    return fmt.format(value)


#: Above this many cases the terminal table shows one row per design (every case stays in sweep.csv).
TABLE_MAX_ROWS = 120


def shown_cases(doc: dict) -> tuple[list[dict], str | None]:
    """The cases the terminal table shows, and a line saying what was left out (None: all shown).

    Up to :data:`TABLE_MAX_ROWS` cases, all of them.  Beyond, the chosen case and,
    for each design (response, family, order), its narrowest passing case (least
    −3 dB bandwidth; ties: the earlier case) or, where none of the design passes,
    its closest case (largest worst margin, as the sweep picks the closest).
    """
    cases = doc["cases"]
    if len(cases) <= TABLE_MAX_ROWS:
        return cases, None
    designs: dict = {}
    for c in cases:
        designs.setdefault((c["response"], c["family"], c["order"]), []).append(c)
    keep = {(doc.get("choice") or {}).get("case")}
    for group in designs.values():
        passing = [c for c in group if c["passes"]]
        if passing:
            bw = [math.inf if c.get("bandwidth_hz") is None else c["bandwidth_hz"] for c in passing]
            keep.add(min(zip(bw, (c["id"] for c in passing)))[1])
        else:
            keep.add(registry.closest_case(group)["id"])
    shown = [c for c in cases if c["id"] in keep]
    note = (
        f"({len(shown)} of {len(cases)} cases shown: the chosen case and, for each of the {len(designs)} "
        "designs, its narrowest passing case, or its closest where none passes; every case is in sweep.csv "
        "and sweep.json)"
    )
    return shown, note


def case_table(doc: dict, *, mark: str = "*") -> str:
    """The case table: one row per case (per design beyond :data:`TABLE_MAX_ROWS` cases; see
    :func:`shown_cases`), units in the header, failing values marked."""
    columns = DATA_COLUMNS if "data" in doc else COLUMNS
    heads, unitrow, widths = [], [], []
    for head, unit, _key, fmt, _t in columns:
        w = max(len(_cell(fmt, 0 if "d}" in fmt else ("x" if "s}" in fmt else 0.0))), len(head), len(unit)) + 1
        widths.append(w)
        heads.append(head.rjust(w) if ">" in fmt else head.ljust(w))
        unitrow.append((f"[{unit}]" if unit else "").rjust(w) if ">" in fmt else "".ljust(w))
    lines = [" ".join(heads) + "  result", " ".join(unitrow)]
    choice = (doc.get("choice") or {}).get("case")
    shown, left_out = shown_cases(doc)
    for case in map(_derived, shown):
        cells = []
        for (_head, _unit, key, fmt, target), w in zip(columns, widths):
            text = _cell(fmt, case.get(key))
            flag = mark if target and target in case["fails"] else " "
            cells.append((text + flag).rjust(w + 1)[-(w + 1) :] if ">" in fmt else (text.ljust(w) + " "))
        result = "pass" if case["passes"] else "fail: " + ", ".join(TARGET_LABEL[t][0] for t in case["fails"])
        if case["id"] == choice:
            result += "   <== chosen"
        lines.append("".join(cells) + " " + result)
    lines.append(f"({mark} marks a value that fails its target; — : not defined for this case)")
    if left_out:
        lines.append(left_out)
    return "\n".join(lines)
