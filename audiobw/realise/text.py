"""Terminal text for a realise.json mapping: a schematic-style block per stage."""

from __future__ import annotations

from ..units import format_quantity
from . import CAUTION
from .topologies import KIND_LABEL, NETLISTS, TOPOLOGY_LABEL


def _part(name: str, value: float) -> str:
    return f"{name} {format_quantity(value, 'Ω' if name[0] == 'R' else 'F', 3)}"


def _node(n: str) -> str:
    return {"in": "in", "gnd": "0V", "out": "out"}.get(n, n)


def stage_lines(doc: dict) -> list[str]:
    """The stage table: topology, connections with values, f0 and Q built vs ideal, gain."""
    lines = []
    for row in doc["stages"]:
        elems, (plus, minus) = NETLISTS[(row["topology"], row["kind"])]
        lines.append(f"Stage {row['stage']}: {TOPOLOGY_LABEL[row['topology']]}, {KIND_LABEL[row['kind']]}")
        for name, a, b in elems:
            lines.append(f"    {_part(name, row['parts'][name]):<14} {_node(a)} — {_node(b)}")
        lines.append(f"    op-amp: + at {_node(plus)}, − at {_node(minus)}, output at out")
        f0 = f"f0 {format_quantity(row['f0_hz'], 'Hz', 4)} (ideal {format_quantity(row['f0_ideal_hz'], 'Hz', 4)})"
        q = "" if row["q"] is None else f", Q {row['q']:.4f} (ideal {row['q_ideal']:.4f})"
        lines.append(f"    {f0}{q}, gain {row['gain']:+.3f}")
        lines.extend(f"    note: {n}" for n in row["notes"])
    return lines


def summary_lines(doc: dict) -> list[str]:
    r, n, y = doc["response"], doc["noise"], doc["yield"]
    o = doc["options"]
    lines = [
        f"Built vs ideal over the passband: {r['deviation_min_db']:+.3f} to {r['deviation_peak_db']:+.3f} dB "
        f"(cascade gain {r['passband_gain_db']:+.2f} dB).",
        f"Filter's own noise, {format_quantity(o['meter_low_hz'], 'Hz')}–"
        f"{format_quantity(o['meter_high_hz'], 'Hz')}: {format_quantity(n['noise_vrms'], 'V', 3)} rms "
        f"(op-amp e_n {format_quantity(o['opamp_en_v_rthz'], 'V', 3)}/√Hz, i_n "
        f"{format_quantity(o['opamp_in_a_rthz'], 'A', 3)}/√Hz, {o['temperature_k']:g} K).",
    ]
    sp = doc.get("second_pass")
    if sp:
        lines.append(
            f"Second pass: chain noise {format_quantity(sp['chain_noise_vrms'], 'V', 3)} rms; the filter adds "
            f"{sp['added_noise_db']:.2f} dB (its own noise {sp['filter_vs_chain_db']:+.1f} dB re the chain)."
        )
        parts = []
        if sp["snr_db_with_filter"] is not None:
            parts.append(f"SNR {sp['snr_db']:.2f} → {sp['snr_db_with_filter']:.2f} dB")
        if sp["snr_a_db_with_filter"] is not None:
            parts.append(f"SNR-A {sp['snr_a_db']:.2f} → {sp['snr_a_db_with_filter']:.2f} dB")
        hold = {
            True: "the sweep's noise targets still hold",
            False: "a noise target no longer holds",
            None: "no SNR target was set",
        }[sp["targets_hold"]]
        lines.append("    " + "; ".join(parts) + f"; {hold}.")
    e_lo, e_hi = y["low_edge_hz"], y["high_edge_hz"]
    spread = []
    for label, e in (("low edge", e_lo), ("high edge", e_hi)):
        if e["median"] is not None:
            spread.append(f"{label} {format_quantity(e['p5'], 'Hz', 4)}…{format_quantity(e['p95'], 'Hz', 4)}")
    lines.append(
        f"Yield: {100 * y['fraction']:.1f} % of {y['draws']} builds (R ±{100 * o['tolerance_r']:g} %, "
        f"C ±{100 * o['tolerance_c']:g} %, seed {o['seed']}) meet every target; 5–95 %: "
        + ", ".join(spread)
        + f", flatness {y['flatness_db']['p5']:.2f}…{y['flatness_db']['p95']:.2f} dB, "
        f"noise {format_quantity(y['noise_vrms']['p5'], 'V', 3)}…"
        f"{format_quantity(y['noise_vrms']['p95'], 'V', 3)}."
    )
    worst = sorted(y["sensitivity"], key=lambda s: -s["passband_db_per_pct"])[:3]
    lines.append(
        "Most sensitive parts: "
        + ", ".join(f"stage {s['stage']} {s['part']} ({s['passband_db_per_pct']:.3f} dB/%)" for s in worst)
        + "."
    )
    lines.append(CAUTION)
    return lines
