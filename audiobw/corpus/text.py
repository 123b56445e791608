"""The corpus summary as terminal text."""

from __future__ import annotations

from ..names import shown


def summary_lines(doc: dict) -> list[str]:
    """A short printed summary of corpus.json."""
    c = doc["counts"]
    lines = [
        f"Corpus: {c['inputs']} files, {c['swept']} swept, {c['failed']} failed"
        + (f", {c['skipped']} skipped" if c["skipped"] else "")
        + "; sample rates: "
        + ", ".join(f"{int(r):,} Hz × {k}" for r, k in c["sample_rates_hz"].items())
    ]
    cov = f"{doc['coverage'] * 100:g} %"
    if doc["choice"] is not None:
        case = doc["cases"][doc["choice"]["case"] - 1]
        lines.append(
            f"Narrowest case passing on at least {cov} of the files: #{case['id']} {_label(case)}, "
            f"passes on {case['pass_share'] * 100:.1f} %" + _over(c) + "."
        )
        if doc["failing"]:
            worst = doc["failing"][:5]
            lines.append(f"It fails on {len(doc['failing'])} file(s); worst first:")
            for f in worst:
                label = _target_words(f["binding"]) if f["binding"] else None
                what = (
                    f"{label}, margin {f['margin_db']:+.2f} dB"
                    if f["margin_db"] is not None
                    else (f"{label}: not defined for this file" if label else f["note"])
                )
                lines.append(f"  {shown(f['path'])}: {what}")
    else:
        msg = f"No case passes on {cov} of the files."
        if doc["best"] is not None:
            case = doc["cases"][doc["best"]["case"] - 1]
            msg += f" Best: #{case['id']} {_label(case)} on {case['pass_share'] * 100:.1f} %" + _over(c) + "."
        lines.append(msg)
    pb = doc["passbands"]
    for key, label in (("low_hz", "lower"), ("high_hz", "upper")):
        p = pb[key]
        if p:
            lines.append(
                f"Per-file chosen {label} edge: p5 {p['p5']:.6g} Hz, median {p['p50']:.6g} Hz, "
                f"p95 {p['p95']:.6g} Hz (min {p['min']:.6g}, max {p['max']:.6g})."
            )
    if pb["files_without_choice"]:
        lines.append(f"{pb['files_without_choice']} file(s) have no passing case of their own.")
    for f in doc["failed"][:5]:
        # a refusal of the grid names the option, not the file: name the file first
        reason = f["reason"] if f["reason"].startswith(f["path"]) else f"{f['path']}: {f['reason']}"
        lines.append(f"Failed: {shown(reason)}")
    if len(doc["failed"]) > 5:
        lines.append(f"... and {len(doc['failed']) - 5} more failed (see corpus.json).")
    return lines


def _over(counts: dict) -> str:
    """' of all N files (M could not be swept and count as not passing)' when some failed."""
    if not counts["failed"]:
        return ""
    return (
        f" of all {counts['swept'] + counts['failed']} files ({counts['failed']} could not be swept and "
        "count as not passing)"
    )


def _target_words(key: str) -> str:
    """A target as the sweep prints it: 'A-weighted SNR ≥ …' rather than the JSON key."""
    from ..report.text import TARGET_LABEL

    label, _metric, _unit, sense = TARGET_LABEL.get(key, (key, None, "", ""))
    return label


def _label(case: dict) -> str:
    lo, hi = case["design_low_hz"], case["design_high_hz"]
    edges = f"{lo:g}–{hi:g} Hz" if lo and hi else (f"{hi:g} Hz" if hi else f"{lo:g} Hz")
    return f"{case['family']} order {case['order']} {case['response']} {edges}"
