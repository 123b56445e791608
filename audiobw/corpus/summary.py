"""The corpus summary: corpus.json (pass shares per case, the choice, failing files, edge percentiles) and corpus.csv.

References
----------
.. [1] numpy documentation, ``numpy.percentile`` (method="linear").
"""

from __future__ import annotations

import math

from ..rounding import round_figure as _round
from .cache import DATA_KEYS, IDENTITY_KEYS, MEDIAN_KEYS

PERCENTILES = (5, 25, 50, 75, 95)
CSV_KEYS = (
    "id",
    "response",
    "family",
    "order",
    "poles",
    "design_low_hz",
    "design_high_hz",
    "low_hz",
    "high_hz",
    "bandwidth_hz",
    "enbw_hz",
    "files_evaluated",
    "pass_share",
    "passes",
    "fails",
)


def _median(values):
    import statistics

    vals = [v for v in values if v is not None]
    return _round(statistics.median(vals)) if vals else None


def _percentiles(values):
    import numpy as np

    vals = [v for v in values if v is not None]
    if not vals:
        return None
    arr = np.asarray(sorted(vals), dtype=float)
    out = {"min": _round(float(arr[0]))}
    for p in PERCENTILES:
        out[f"p{p}"] = _round(float(np.percentile(arr, p, method="linear")))  # numpy.percentile [3]
    out["max"] = _round(float(arr[-1]))
    return out


def _worst(margins: dict):
    """(target, margin) with the least margin; None margins (not evaluable) first."""
    from ..metrics import TARGET_KEYS

    if not margins:
        return None, None
    key = min(margins, key=lambda k: (-math.inf if margins[k] is None else margins[k], TARGET_KEYS.index(k)))
    return key, margins[key]


def summarise(files: list, failed: list, skipped: list, *, settings, coverage: float, opt_hash: str) -> dict:
    """Build the corpus.json mapping from per-file entries.

    Parameters
    ----------
    files : list of (Item, entry)
        Swept files in sorted order with their cache entries.
    failed : list of (path, reason)
    skipped : list of (path, reason)
    settings : Settings
    coverage : float, 0 < coverage <= 1
    opt_hash : str
    """
    from .. import __version__
    from ..metrics import TARGET_KEYS
    from ..choice import choose

    # a file that could not be swept (unreadable, or it cannot take the grid) counts as one on which
    # no case passes: the shares are over every input, not only the swept ones
    n = len(files) + len(failed)
    need = math.ceil(coverage * n - 1e-9)
    families = list(settings.grid_value("family"))
    table: dict[tuple, dict] = {}
    for fi, (_, entry) in enumerate(files):
        for case in entry["cases"]:
            ident = tuple(case[k] for k in IDENTITY_KEYS)
            table.setdefault(ident, {"poles": case["poles"], "rows": {}})["rows"][fi] = case

    def order_key(ident):
        _, fam, order, lo, hi = ident
        return (
            families.index(fam) if fam in families else len(families),
            fam,
            order,
            -1.0 if lo is None else lo,
            math.inf if hi is None else hi,
        )

    targets = [k for k in TARGET_KEYS if settings.targets.get(k) is not None]
    cases = []
    for cid, ident in enumerate(sorted(table, key=order_key), start=1):
        rows = table[ident]["rows"]
        passing = sum(1 for r in rows.values() if r["passes"])
        case = {"id": cid, **dict(zip(IDENTITY_KEYS, ident)), "poles": table[ident]["poles"]}
        for key in MEDIAN_KEYS:
            case[key] = _median(r.get(key) for r in rows.values())
        for key in DATA_KEYS:
            if any(key in r for r in rows.values()):
                case[key] = _median(r.get(key) for r in rows.values())
        notes = [r.get("thdn_note") for r in rows.values() if r.get("thdn_note")]
        case["thdn_note"] = notes[0] if notes else None
        share_t, margin_q = {}, {}
        for t in targets:
            share_t[t] = _round(sum(1 for r in rows.values() if t not in r["fails"]) / n) if n else 0.0
            # margin reached by at least `coverage` of the files (missing case or unevaluable: -inf)
            ms = sorted(
                (
                    (
                        -math.inf
                        if rows.get(f) is None or rows[f]["margins_db"].get(t) is None
                        else rows[f]["margins_db"][t]
                    )
                    for f in range(n)
                ),
                reverse=True,
            )
            q = ms[need - 1] if n and need >= 1 else None
            margin_q[t] = _round(q) if q is not None and math.isfinite(q) else None
        case["passes"] = n > 0 and passing >= need
        case["fails"] = (
            []
            if case["passes"]
            else [t for t in targets if sum(1 for r in rows.values() if t not in r["fails"]) < need]
        )
        case["margins_db"] = margin_q
        case["pass_share"] = _round(passing / n) if n else 0.0
        case["files_evaluated"] = len(rows)
        case["target_pass_share"] = share_t
        cases.append(case)

    choice, best, failing = None, None, []
    if cases:
        picked, _ = choose(
            cases,
            settings.targets,
            rank=settings.grid_value("rank"),
            tie=settings.grid_value("tie"),
        )
        if picked is not None:
            chosen = cases[picked["case"] - 1]
            choice = {"case": chosen["id"], "pass_share": chosen["pass_share"]}
            ident = tuple(chosen[k] for k in IDENTITY_KEYS)
            rows = table[ident]["rows"]
            for fi, (item, entry) in enumerate(files):
                row = rows.get(fi)
                if row is not None and row["passes"]:
                    continue
                if row is None:
                    failing.append(
                        {
                            "path": item.path,
                            "sweep": f"files/{item.name}/sweep.json",
                            "binding": None,
                            "margin_db": None,
                            "fails": [],
                            "note": f"case not in this file's grid ({entry['input']['sample_rate_hz']} Hz)",
                        }
                    )
                    continue
                key, margin = _worst(row["margins_db"])
                failing.append(
                    {
                        "path": item.path,
                        "sweep": f"files/{item.name}/sweep.json",
                        "binding": key,
                        "margin_db": _round(margin),
                        "fails": list(row["fails"]),
                        "note": None,
                    }
                )
            for path, reason in failed:
                failing.append(
                    {
                        "path": path,
                        "sweep": None,
                        "binding": None,
                        "margin_db": None,
                        "fails": [],
                        "note": f"could not be swept ({reason})",
                    }
                )
            failing.sort(
                key=lambda f: (
                    f["margin_db"] is not None,
                    f["margin_db"] if f["margin_db"] is not None else 0.0,
                    f["path"],
                )
            )
        else:
            top = max(cases, key=lambda c: (c["pass_share"], -c["bandwidth_hz"], -c["enbw_hz"], -c["order"], -c["id"]))
            best = {"case": top["id"], "pass_share": top["pass_share"]}

    per_file, lows, highs, without = [], [], [], 0
    rates: dict[str, int] = {}
    for item, entry in files:
        inp = entry["input"]
        rates[str(inp["sample_rate_hz"])] = rates.get(str(inp["sample_rate_hz"]), 0) + 1
        own = None
        if entry["choice"] is not None:
            c = next(c for c in entry["cases"] if c["id"] == entry["choice"]["case"])
            own = {
                "response": c["response"],
                "family": c["family"],
                "order": c["order"],
                "low_hz": c["low_hz"],
                "high_hz": c["high_hz"],
                "binding": entry["choice"].get("binding"),
            }
            lows.append(c["low_hz"])
            highs.append(c["high_hz"])
        else:
            without += 1
        per_file.append(
            {
                "path": item.path,
                "sweep": f"files/{item.name}/sweep.json",
                "sha256": entry["sha256"],
                "sample_rate_hz": inp["sample_rate_hz"],
                "channels": inp["channels"],
                "duration_s": inp["duration_s"],
                "choice": own,
                "warnings": list(entry["warnings"]),
            }
        )
    chain = settings.chain.to_json()
    plain = settings.to_json()
    return {
        "tool": "audiobw",
        "version": __version__,
        "kind": "corpus",
        "coverage": _round(coverage),
        "options_sha256": opt_hash,
        "settings": {
            "chain": chain,
            "grid": plain["grid_values"],
            "meter": plain["meter"],
            **{k: v for k, v in plain.items() if k not in ("chain", "grid_values", "meter", "targets")},
        },
        "targets": {k: v for k, v in settings.targets.items() if v is not None},
        "counts": {
            "inputs": len(files) + len(failed),
            "swept": len(files),
            "failed": len(failed),
            "skipped": len(skipped),
            "sample_rates_hz": dict(sorted(rates.items(), key=lambda kv: int(kv[0]))),
        },
        "cases": cases,
        "choice": choice,
        "best": best,
        "failing": failing,
        "passbands": {
            "files_with_choice": len(files) - without,
            "files_without_choice": without,
            "low_hz": _percentiles(lows),
            "high_hz": _percentiles(highs),
        },
        "files": per_file,
        "failed": [{"path": p, "reason": r} for p, r in failed],
        "skipped": [{"path": p, "reason": r} for p, r in skipped],
    }


def csv_text(doc: dict) -> str:
    """corpus.csv: one row per case (CSV_KEYS); failing targets joined with ';'."""
    from ..report.sweepio import csv_text as cases_csv

    return cases_csv(doc, CSV_KEYS)
