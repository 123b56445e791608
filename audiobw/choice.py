"""The choice rule: the narrowest passing case, the grid ends it sits on, and why none passes.

Among passing cases, the narrowest −3 dB bandwidth; ties go to the lower ENBW,
then the lower order (:func:`choose`).  The *binding* target is the one with
the least margin at the chosen case — the limit that stops a narrower
passband.  With no case passing, ``choice`` is None, ``unmet`` names each
target that no case meets on its own, with the best value any case reached
for it, and ``conflicts`` the targets that each hold somewhere but never
together, with the edge where each flips (:func:`conflicts`).
"""

from __future__ import annotations

from .registry import TARGET_KEYS, TARGET_METRIC
from .rounding import round_figure


def grid_limits(case: dict, cases: list[dict]) -> list[dict]:
    """The ends of the grid that ``case`` sits on, edge by edge.

    Lowpass: its upper edge at the grid's lowest cutoff (a narrower one was
    never tried).  Highpass: its lower edge at the highest.  Bandpass: each
    edge at either end of its own grid — the lowest upper or highest lower
    edge stopped it narrowing; the highest upper or lowest lower edge may have
    stopped a trade (a lower low edge can let the upper edge come down for
    less ENBW).  Each entry: ``edge`` ('low' or 'high'), ``end`` ('lowest' or
    'highest'), ``design_hz`` and ``extend`` ('below' or 'above'), the way to
    extend that edge's grid.  Rows without design edges give none.
    """
    response = case.get("response")
    out = []
    for edge, key in (("low", "design_low_hz"), ("high", "design_high_hz")):
        value = case.get(key)
        if value is None:
            continue
        values = [c[key] for c in cases if c.get(key) is not None]
        ends = []
        if response == "bandpass":
            ends = [("lowest", min(values)), ("highest", max(values))]
        elif response == "lowpass" and edge == "high":
            ends = [("lowest", min(values))]
        elif response == "highpass" and edge == "low":
            ends = [("highest", max(values))]
        for end, at in ends:
            if value == at:
                out.append(
                    {
                        "edge": edge,
                        "end": end,
                        "design_hz": round_figure(value),
                        "extend": "below" if end == "lowest" else "above",
                    }
                )
    return out


#: gentler families first when ranks tie: no ripple before ripple
FAMILY_GENTLENESS = {"butterworth": 0, "bessel": 0, "chebyshev1": 1, "elliptic": 2}


def wide_ends(case: dict, cases: list[dict], response: str) -> list[dict]:
    """A lowpass or highpass case at the wide end of its grid (for a case that fails)."""
    key, end = {"lowpass": ("design_high_hz", "highest"), "highpass": ("design_low_hz", "lowest")}.get(
        response, (None, None)
    )
    if key is None or case.get(key) is None:
        return []
    values = [c[key] for c in cases if c.get(key) is not None]
    at = max(values) if end == "highest" else min(values)
    if case[key] != at or len(set(values)) == 1:
        return []
    return [
        {
            "edge": "high" if key == "design_high_hz" else "low",
            "end": end,
            "design_hz": round_figure(at),
            "extend": "above" if end == "highest" else "below",
        }
    ]


def choose(cases: list[dict], targets: dict, rank: str = "enbw", tie: float = 0.01) -> tuple[dict | None, dict]:
    """Apply the choice rule; returns (choice, unmet).

    Passing cases are ranked by ``rank`` ("enbw": the bandwidth noise grows
    with; "bandwidth": the −3 dB width); every case within ``tie`` (a share)
    of the best figure ties, and a tie goes to the lower order, then the
    gentler family (Butterworth/Bessel before Chebyshev/elliptic), then the
    smaller figure.
    """
    passing = [c for c in cases if c["passes"]]
    if passing:
        key = "enbw_hz" if rank == "enbw" else "bandwidth_hz"
        lowest = min(c[key] for c in passing)
        tied = [c for c in passing if c[key] <= lowest * (1.0 + tie)]
        best = min(
            tied,
            key=lambda c: (
                c["order"],
                FAMILY_GENTLENESS.get(c["family"], 3),
                c[key],
                c["bandwidth_hz"],
                c["enbw_hz"],
                c["id"],
            ),
        )
        margins = {k: v for k, v in best["margins_db"].items() if v is not None}
        binding = min(margins, key=lambda k: (margins[k], TARGET_KEYS.index(k))) if margins else None
        narrower = [
            c
            for c in cases
            if c["family"] == best["family"]
            and c["order"] == best["order"]
            and c["bandwidth_hz"] < best["bandwidth_hz"]
        ]
        next_narrower = max(narrower, key=lambda c: c["bandwidth_hz"]) if narrower else None
        limits = grid_limits(best, cases)
        return {
            "case": best["id"],
            "binding": binding,
            "binding_margin_db": round_figure(margins.get(binding)) if binding else None,
            "next_narrower": next_narrower["id"] if next_narrower else None,
            "next_narrower_fails": next_narrower["fails"] if next_narrower else [],
            "grid_limited": next_narrower is None or bool(limits),
            "grid_limits": limits,
        }, {}
    # none passes: unmet names the targets that no case meets on its own, with the best value
    # reached; targets that each hold somewhere but never together are conflicts (see conflicts())
    unmet = {}
    for key in TARGET_KEYS:
        if key not in targets or any(key not in c["fails"] for c in cases):
            continue
        metric, sense = TARGET_METRIC[key]
        values = [c[metric] for c in cases if c.get(metric) is not None]
        unmet[key] = (max(values) if sense > 0 else min(values)) if values else None
    return None, unmet


#: the edges a conflict can part on, as case keys, in the order they are tried
CONFLICT_EDGES = ("high_hz", "low_hz", "bandwidth_hz")


def conflicts(cases: list[dict], targets: dict) -> list[dict]:
    """Targets that each hold in some case but never together, and the edge where each flips.

    Only meaningful when no case passes.  Each entry is a smallest set of
    targets (a pair, unless every pair meets somewhere and only a larger set
    never does) that no case meets together, though each meets alone::

        {"targets": ["min_snr_a_db", "max_lsd_db"], "edge": "high_hz",
         "needs": {"min_snr_a_db": {"bound": "max", "edge_hz": 3000.0},
                   "max_lsd_db": {"bound": "min", "edge_hz": 20000.0}}}

    ``edge`` is the case key (−3 dB upper edge, lower edge, or −3 dB
    bandwidth) whose ranges over the cases where each target holds do not
    overlap: every case meeting the first target has that edge at most
    ``edge_hz`` and every case meeting the second at least its ``edge_hz``
    (``bound`` says which way).  Both are necessary conditions read off the
    grid, so they prove the two cannot meet in it.  ``edge`` is None when no
    single edge parts them (they part on family or order, or for a larger set).
    """
    if any(c["passes"] for c in cases):
        return []
    keys = [k for k in TARGET_KEYS if k in targets]
    alone = [k for k in keys if any(k not in c["fails"] for c in cases)]
    if len(alone) < 2:
        return []
    # each distinct set of targets a case meets, as a frozenset
    held = {frozenset(k for k in alone if k not in c["fails"]) for c in cases}

    def together(subset) -> bool:
        return any(subset <= h for h in held)

    from itertools import combinations

    found: list[tuple] = []
    for size in range(2, len(alone) + 1):
        for subset in combinations(alone, size):
            s = frozenset(subset)
            if together(s) or any(set(f) <= s for f in found):
                continue
            found.append(subset)
        if found:  # the smallest sets explain it; larger ones contain them
            break
    out = []
    for subset in found:
        entry: dict = {
            "targets": list(subset),
            "edge": None,
            "needs": {k: {"bound": None, "edge_hz": None} for k in subset},
        }
        if len(subset) == 2:
            a, b = subset
            for edge in CONFLICT_EDGES:
                ra = _edge_range(cases, a, edge)
                rb = _edge_range(cases, b, edge)
                if ra is None or rb is None:
                    continue
                if ra[1] < rb[0]:
                    needs = {
                        a: {"bound": "max", "edge_hz": round_figure(ra[1])},
                        b: {"bound": "min", "edge_hz": round_figure(rb[0])},
                    }
                elif rb[1] < ra[0]:
                    needs = {
                        a: {"bound": "min", "edge_hz": round_figure(ra[0])},
                        b: {"bound": "max", "edge_hz": round_figure(rb[1])},
                    }
                else:
                    continue
                entry.update(edge=edge, needs=needs)
                break
        out.append(entry)
    return out


def _edge_range(cases: list[dict], key: str, edge: str):
    """(lowest, highest) value of ``edge`` over the cases meeting ``key``; None for an open edge."""
    vals = [c.get(edge) for c in cases if key not in c["fails"]]
    if not vals or any(v is None for v in vals):
        return None
    return min(vals), max(vals)
