"""The noise budget (``audiobw noise``) as a terminal table of contributors."""

from __future__ import annotations

import math

from ..units import format_quantity


def budget_text(b: dict, *, header: str) -> str:
    """The noise budget as a table of contributors."""
    names = {
        "source_thermal": "source thermal (4kTRs)",
        "amplifier_voltage": "amplifier voltage noise e_n",
        "amplifier_current": "amplifier current noise i_n·Rs",
        "quantisation": "quantisation q²/12",
        "dither": "dither (TPDF, 2q²/12)",
    }
    lines = [header, f"{'contributor':<34s}{'noise':>14s}{'[dBu]':>10s}{'[dBFS]':>10s}{'share':>9s}"]

    def row(label, e):
        dbu = f"{e['dbu']:.1f}" if math.isfinite(e["dbu"]) else "none"
        dbfs = f"{e['dbfs']:.1f}" if math.isfinite(e["dbfs"]) else "none"
        return f"{label:<34s}{format_quantity(e['vrms'], 'V rms'):>14s}{dbu:>10s}{dbfs:>10s}{100 * e['share']:>8.1f}%"

    for key, e in b["components"].items():
        lines.append(row(names.get(key, key), e))
    lines.append(row("total", b["total"]))
    ta = dict(b["total_a_weighted"], share=float("nan"))
    lines.append(row("total, A-weighted", ta).replace("nan%", "   —"))
    lines.append(
        f"ENBW of the filter: {format_quantity(b['enbw_hz'], 'Hz')}; meter band "
        f"{format_quantity(b['meter']['low_hz'], 'Hz')} to {format_quantity(b['meter']['high_hz'], 'Hz')}"
    )
    lines.append(
        f"Dynamic range for a full-scale sine: {b['dynamic_range_db']:.1f} dB "
        f"({b['dynamic_range_a_db']:.1f} dB A-weighted)"
    )
    if b.get("ein_dbu") is not None:
        nf = b.get("noise_figure_db")
        nf_text = (
            f"noise figure {nf:.2f} dB at the source resistance"
            if nf is not None
            else "noise figure undefined (ideal source, 0 Ω)"
        )
        a = b.get("ein_dbu_a")
        lines.append(
            f"Equivalent input noise (source and amplifier, meter band): {b['ein_dbu']:.1f} dBu"
            + (f" ({a:.1f} dBu A-weighted)" if a is not None else "")
            + f"; {nf_text}"
        )
    return "\n".join(lines)
