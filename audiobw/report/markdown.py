"""spec.md: the spec-sheet block (:mod:`audiobw.report.spec`) as Markdown."""

from __future__ import annotations

from pathlib import Path

from ..cautions import LISTENING_CAUTION
from ..names import md_code, md_text
from .formatting import (
    case_line,
    chain_value_text,
    fmt,
    margin_value_text,
    metric_value_text,
    passband_phrase,
    spec_rows,
    target_info,
    target_text,
)


def markdown(spec: dict, renders: list | None = None) -> str:
    """spec.md text."""
    inp = spec["input"]
    name = Path(inp["path"]).name
    out = [f"# Passband spec sheet — {md_text(name)}", ""]
    out.append(
        f"Program: {md_code(inp['path'])} (sha256 `{inp['sha256'][:16]}…`), {inp['duration_s']:g} s, "
        f"{inp['channels']} ch, {inp['sample_rate_hz']} Hz; peak {inp['peak_dbfs']:.1f} dBFS, "
        f"rms {inp['rms_dbfs']:.1f} dBFS; 99 % occupied band {fmt(inp['occupied_low_hz'], 'Hz')} to "
        f"{fmt(inp['occupied_high_hz'], 'Hz')}."
    )
    out.append(f"{spec['cases_passing']} of {spec['cases_total']} cases meet every target.")
    out.append("")
    out.append(f"> **Caution.** {spec['caution']}")
    out.append("")
    if spec["status"] == "no_passing_case":
        out += ["## No passing case", "", "No case of the grid meets every target."]
        if spec["unmet"]:
            out += ["", "No case meets these targets even on their own (the best value any case reached):", ""]
            out += ["| target | best reached |", "|---|---|"]
            for u in spec["unmet"]:
                out.append(f"| {target_text(u)} | {metric_value_text(u['metric'], u['best'])} |")
        if spec.get("conflicts"):
            out += ["", "These targets each hold in some case but never together:", ""]
            out += [f"- {c['text']}" for c in spec["conflicts"]]
        out += [
            "",
            f"The figures below are for the **closest case** ({spec['subject']['case']}, the largest worst "
            f"margin), which fails: {', '.join(target_info(k)[0] for k in spec['subject']['fails'])}. "
            "It is not a recommendation.",
            "",
        ]
        out.append(f"## Closest case: {passband_phrase(spec)}")
    else:
        out.append(f"## Chosen passband: {passband_phrase(spec)}")
        b = spec["binding"]
        if b:
            t = next(t for t in spec["targets"] if t["key"] == b)
            out += ["", f"Bound by **{target_text(t)}** (margin {margin_value_text(b, spec['binding_margin_db'])})."]
        if spec["grid_limits"]:
            from .text import grid_limit_lines

            out += [""] + grid_limit_lines(spec["filter"]["response"], spec["grid_limits"])
        elif spec["grid_limited"]:
            out += [
                "",
                "This is the narrowest case of its family and order in the grid: extend the grid to see "
                "whether a narrower passband also passes.",
            ]
    out += ["", "| quantity | value |", "|---|---|"]
    section = None
    for sec, label, text, _ptr in spec_rows(spec):
        if sec != section:
            out.append(f"| **{sec}** | |")
            section = sec
        out.append(f"| {label} | {text} |")
    out += ["", "### Targets", "", "| target | this case | margin | met | bound the choice |", "|---|---|---|---|---|"]
    for t in spec["targets"]:
        margin = margin_value_text(t["key"], t["margin_db"])
        out.append(
            f"| {target_text(t)} | {metric_value_text(t['metric'], t['value'])} | {margin} | "
            f"{'yes' if t['met'] else 'no'} | {'yes' if t['binding'] else ''} |"
        )
    out += ["", "### Margin: the neighbouring cases", ""]
    nb = spec["neighbours"]
    out.append(f"- next narrower (same family and order): {case_line(nb['next_narrower'])}")
    out.append(f"- next wider (same family and order): {case_line(nb['next_wider'])}")
    out.append(f"- runner-up (next passing case by the choice rule): {case_line(nb['runner_up'])}")
    so = spec["ser_optimum"]
    if so:
        out.append(
            f"- signal-to-error optimum of the sweep: case {so['case']} ({so['family']} {so['order']}), "
            f"bandwidth {fmt(so['bandwidth_hz'], 'Hz')}, SER {fmt(so['ser_db'], 'dB')}"
        )
    out += ["", "### Noise budget", "", "| contributor | noise | dBu | dBFS | share |", "|---|---|---|---|---|"]
    for c in spec["noise"]["components"].values():
        out.append(
            f"| {c['label']} | {fmt(c['vrms'], 'V rms')} | {fmt(c['dbu'], 'dBu')} | {fmt(c['dbfs'], 'dBFS')} "
            f"| {100 * c['share']:.1f} % |"
        )
    out += ["", "### Chain assumptions", "", "| parameter | key | value |", "|---|---|---|"]
    for row in spec["chain"]:
        out.append(f"| {row['label']} | `{row['key']}` | {chain_value_text(row)} |")
    m = spec["meter"]
    out += [
        "",
        f"Meter band {fmt(m['low_hz'], 'Hz')} to {fmt(m['high_hz'], 'Hz')} ({m['mode']}); "
        f"A-weighting per IEC 61672-1; dBFS re a full-scale sine (AES17); 0 dBu = 0.7746 V rms.",
    ]
    for note in spec["notes"]:
        out.append(f"Note: {note}")
    if renders:
        out += ["", "### Listening clips", "", f"> {LISTENING_CAUTION}", ""]
        for r in renders:
            for nm in r["ab"] + r["other"]:
                out.append(f"- `{r['folder']}/{nm}`")
    out += ["", f"*{spec['caution']}*", ""]
    return "\n".join(out)
