"""What a sweep looks like in a terminal: the answer in words (:func:`closing_paragraph`).

The case table is :mod:`audiobw.report.table`, figures and targets in words
:mod:`audiobw.report.words`, the noise budget :mod:`audiobw.report.budget`;
their names are re-exported here (``__all__``), where the spec sheet, batch,
the demo and the tests import them.
"""

from __future__ import annotations

from ..registry import TARGET_LABEL
from ..units import format_quantity
from ..names import shown
from .budget import budget_text
from .table import COLUMNS, DATA_COLUMNS, ID_COLUMNS, TABLE_MAX_ROWS, case_table, shown_cases
from .words import (
    BER_FLOOR,
    Q_FLOOR,
    band_words,
    ber_text,
    margin_text,
    metric_text,
    passband_text,
    q_text,
    target_phrase,
    target_text,
)

__all__ = [
    "BER_FLOOR",
    "COLUMNS",
    "DATA_COLUMNS",
    "EDGE_WORDS",
    "ID_COLUMNS",
    "POOR_ALIAS_REJECTION_DB",
    "Q_FLOOR",
    "TABLE_MAX_ROWS",
    "TARGET_LABEL",
    "anti_alias_text",
    "band_words",
    "ber_text",
    "budget_text",
    "case_table",
    "closing_paragraph",
    "conflict_text",
    "filter_quality_lines",
    "grid_limit_lines",
    "margin_text",
    "metric_text",
    "passband_text",
    "q_text",
    "shown_cases",
    "target_phrase",
    "target_text",
]


def closing_paragraph(doc: dict) -> str:
    """The answer in words: the chosen passband, the binding target, its metrics — or what cannot be met."""
    cases = {c["id"]: c for c in doc["cases"]}
    targets = doc["targets"]
    inp = doc["input"]
    head = (
        f"{shown(inp['path'])}: {inp['duration_s']:.1f} s, {inp['channels']} ch, {inp['sample_rate_hz']} Hz; "
        f"peak {inp['peak_dbfs']:.1f} dBFS, rms {inp['rms_dbfs']:.1f} dBFS, 99 % occupied bandwidth "
        f"{format_quantity(inp['occupied_bw_hz'], 'Hz')} "
        f"({format_quantity(inp['occupied_low_hz'], 'Hz')} to {format_quantity(inp['occupied_high_hz'], 'Hz')})"
        + _per_channel_occupied(inp)
        + "."
    )
    n_pass = sum(1 for c in doc["cases"] if c["passes"])
    lines = [head, f"{n_pass} of {len(cases)} cases meet every target."]
    choice = doc.get("choice")
    if choice:
        c = cases[choice["case"]]
        lines.append(
            f"Chosen: case {c['id']} — {passband_text(c)}; −3 dB bandwidth "
            f"{format_quantity(c['bandwidth_hz'], 'Hz')}, ENBW {format_quantity(c['enbw_hz'], 'Hz')}."
        )
        b = choice.get("binding")
        if b:
            label, metric, unit, sense = TARGET_LABEL[b]
            margin = choice.get("binding_margin_db")
            lines.append(
                f"Binding target: {label} {sense} {target_text(b, targets[b])} "
                f"(this case: {metric_text(metric, c[metric])}; margin {margin_text(b, margin)})."
            )
        limits = choice.get("grid_limits") or []
        if limits:
            lines += grid_limit_lines(c["response"], limits)
        elif choice.get("grid_limited"):
            lines.append(
                "This is the narrowest case of its family and order in the grid: extend the grid "
                "to see whether a narrower passband also passes."
            )
        if choice.get("next_narrower"):
            nn = cases[choice["next_narrower"]]
            fails = ", ".join(TARGET_LABEL[t][0] for t in nn["fails"]) or "none"
            lines.append(
                f"The next narrower case ({nn['id']}, {format_quantity(nn['bandwidth_hz'], 'Hz')}) fails: {fails}."
            )
            heard = nn.get("audible_band_hz")
            if heard and nn.get("audible_band_pct"):
                lines.append(
                    f"Narrower, the error in {format_quantity(heard[0], 'Hz')} to "
                    f"{format_quantity(heard[1], 'Hz')} (what the filter removes plus the chain's noise) "
                    f"is above the masked threshold in {nn['audible_band_pct']:.0f} % of frames."
                )
        figs = ", ".join(
            f"{name} {metric_text(k, c[k])}".strip()
            for name, k in (
                ("noise", "noise_vrms"),
                ("", "noise_dbfs"),
                ("SNR", "snr_db"),
                ("SNR-A", "snr_a_db"),
                ("loss", "loss_db"),
                ("LSD", "lsd_db"),
                ("SER", "ser_db"),
                ("THD+N", "thdn_pct"),
            )
        )
        lines.append("Its figures: " + figs + ".")
        lines += filter_quality_lines(c, inp)
        lim = doc.get("limits") or {}
        if lim and c.get("nmr_db") is not None:
            words = [
                f"NMR {c['nmr_db']:.1f} dB",
                f"error above the masked threshold in {c['audible_frames_pct']:.1f} % of frames",
            ]
            if c.get("sii") is not None:
                words.append(f"SII {c['sii']:.3f}")
            if c.get("wiener_gap_db") is not None and lim.get("wiener_ser_db") is not None:
                words.append(
                    f"{c['wiener_gap_db']:.1f} dB above the Wiener bound "
                    f"(best any linear filter can do: SER {lim['wiener_ser_db']:.1f} dB)"
                )
            lines.append(f"Heard at {lim['playback_spl_db']:.1f} dB SPL: " + ", ".join(words) + ".")
        if "data" in doc:
            lines.append(
                "Data link: "
                + ", ".join(
                    f"{name} {metric_text(k, c.get(k))}"
                    for name, k in (("eye", "eye_fraction"), ("Q", "q"), ("BER", "ber"))
                )
                + f", jitter {c['jitter_pp_ui']:.3f} UI p-p at the best sampling instant "
                f"({c['sample_delay_ui']:.2f} UI after the bit starts)."
                if c.get("jitter_pp_ui") is not None
                else "Data link: eye closed."
            )
    else:
        lines.append("No case meets every target.")
        for key, best in doc.get("unmet", {}).items():
            label, metric, unit, sense = TARGET_LABEL[key]
            lines.append(
                f"Cannot be met: {label} {sense} {target_text(key, targets[key])}; the best any case "
                f"reached is {metric_text(metric, best)}."
            )
        for c in doc.get("conflicts") or []:
            lines.append(conflict_text(c, targets))
    if "data" in doc:
        d = doc["data"]
        rate = f"{format_quantity(d['bit_rate_hz'], 'bit/s')}"
        if d["bit_rate_source"] == "recovered":
            rate += f" (recovered from the recording, clock line {d['bit_rate_confidence_db']:.1f} dB up)"
        lines.append(
            f"Bit rate {rate}; the Nyquist minimum bandwidth 1/(2T) is {format_quantity(d['nyquist_min_hz'], 'Hz')}."
        )
        chosen = cases.get(choice["case"]) if choice else None
        if chosen is not None and chosen["bandwidth_hz"] < d["nyquist_min_hz"]:
            eye = chosen.get("eye_fraction")
            lines.append(
                f"The chosen passband ({format_quantity(chosen['bandwidth_hz'], 'Hz')}) is narrower than "
                "1/(2T): a shaped pulse can pass below the Nyquist minimum at a cost in eye"
                + (f" (here {100 * eye:.1f} % of the unfiltered opening)." if eye is not None else ".")
            )
        if d.get("eye_basis") == "recording":
            ideal = ""
            if chosen is not None and chosen.get("eye_ideal") is not None:
                q_i = chosen.get("q_ideal")
                ideal = (
                    f"; the chosen case alone on a perfect stream has eye {100 * chosen['eye_ideal']:.1f} %, "
                    f"Q {'unbounded' if q_i is None else format(q_i, '.3g')}"
                )
            lines.append(
                f"Eye, Q and BER are measured on the recorded stream through each case "
                f"({d['bits_measured']} bits, its own channel and noise included){ideal}."
            )
        q = d.get("q_optimal")
        if q:
            q_num = "unbounded" if q["q"] is None else f"{q['q']:.3g}"
            lines.append(
                f"Q is highest ({q_num}, BER {ber_text(q['ber'])}) at case {q['case']}, bandwidth "
                f"{format_quantity(q['bandwidth_hz'], 'Hz')}: narrower costs more in inter-symbol "
                "interference than it saves in noise."
            )
    aa = anti_alias_text(doc.get("chain") or {})
    if aa:
        lines.append(aa)
    for note in doc.get("notes", []):
        lines.append("Note: " + note)
    return "\n".join(lines)


#: how the edge a conflict parts on reads
EDGE_WORDS = {"high_hz": "an upper −3 dB edge", "low_hz": "a lower −3 dB edge", "bandwidth_hz": "a −3 dB bandwidth"}


def conflict_text(c: dict, targets: dict, hz=lambda v: format_quantity(v, "Hz")) -> str:
    """One conflict in words: each target, and the edge where it flips."""
    keys = c["targets"]
    if c.get("edge") and len(keys) == 2:
        a, b = keys
        na, nb = c["needs"][a], c["needs"][b]
        sign = {"max": "≤", "min": "≥"}
        return (
            f"Conflict: {target_phrase(a, targets)} needs {EDGE_WORDS[c['edge']]} {sign[na['bound']]} "
            f"{hz(na['edge_hz'])}; {target_phrase(b, targets)} needs {sign[nb['bound']]} {hz(nb['edge_hz'])} "
            "(each holds in some case, never both in one)."
        )
    named = [target_phrase(k, targets) for k in keys]
    joined = ", ".join(named[:-1]) + " and " + named[-1]
    if len(keys) == 2:
        return (
            f"Conflict: {joined} each hold in some case but never both in one "
            "(no single edge parts them: they part on family or order)."
        )
    return f"Conflict: {joined} each hold in some case, and every two of them together, but never all in one."


#: Alias rejection called poor in the terminal, dB: an image under a tenth of its amplitude
#: down (a stated choice; the figure and the noise it is compared with are printed beside it).
POOR_ALIAS_REJECTION_DB = 20.0


def grid_limit_lines(response: str, limits: list[dict]) -> list[str]:
    """One line per grid end the chosen case sits on, with the range to extend.

    An edge at the narrowing end (the lowest upper edge, the highest lower edge)
    was stopped by the grid; for a bandpass, an edge at the widening end may have
    stopped a trade with the other edge.
    """
    from ..options import grid_option

    out = []
    for lim in limits:
        edge, end, hz = lim["edge"], lim["end"], format_quantity(lim["design_hz"], "Hz")
        opt = grid_option(response, edge)
        word = "upper" if edge == "high" else "lower"
        narrowing = (edge, end) in (("high", "lowest"), ("low", "highest"))
        if narrowing:
            why = f"the grid stopped it there: extend {opt} {lim['extend']} {hz} to see whether a narrower passband passes"
        else:
            other = "upper" if edge == "low" else "lower"
            why = (
                f"a {('lower' if end == 'lowest' else 'higher')} {word} edge might let the {other} edge "
                f"{'come down' if other == 'upper' else 'go up'} for less ENBW: extend {opt} {lim['extend']} {hz}"
            )
        out.append(f"Grid limit: the {word} edge (designed at {hz}) is the {end} of its grid; {why}.")
    return out


def filter_quality_lines(c: dict, inp: dict) -> list[str]:
    """What the filter does to the band and what it lets fold into it: flatness, delay spread, alias rejection.

    Rejection under :data:`POOR_ALIAS_REJECTION_DB` is called poor; above it, the
    line still says when a full-scale component at the nearest image would fold
    into the band above this case's own noise floor (rejection < −noise dBFS).
    """
    band = (
        f"the 99 % occupied band, {format_quantity(inp['occupied_low_hz'], 'Hz')} to "
        f"{format_quantity(inp['occupied_high_hz'], 'Hz')}"
    )
    words = []
    if c.get("flatness_db") is not None:
        words.append(f"gain varies {c['flatness_db']:.2f} dB peak to peak")
    if c.get("delay_spread_s") is not None:
        words.append(f"group delay varies {format_quantity(c['delay_spread_s'], 's')}")
    out = [f"Over {band}: " + ", ".join(words) + "."] if words else []
    rej, noise = c.get("alias_rejection_db"), c.get("noise_dbfs")
    if rej is not None:
        text = f"Alias rejection {rej:.1f} dB (the least attenuation of what the converter folds into the passband)"
        above = (
            (
                f"a full-scale component there folds in at {-rej:.1f} dBFS, {-noise - rej:.0f} dB above the "
                f"case's noise ({noise:.1f} dBFS)"
            )
            if noise is not None and rej < -noise
            else None
        )
        if rej < POOR_ALIAS_REJECTION_DB:
            text += (
                ": a poor anti-alias filter"
                + (f" — {above}" if above else "")
                + "; a steeper or higher-order filter, or --min-alias-rejection, rules it out"
            )
        elif above:
            text += f": {above}"
        out.append(text + ".")
    return out


def anti_alias_text(chain: dict) -> str | None:
    """The sweep's one anti-alias assumption in words (sweep.json ``chain.anti_alias``)."""
    aa = chain.get("anti_alias")
    if aa == "ideal":
        return (
            "Anti-alias model: ideal (--anti-alias ideal): a brick-wall at fs/2 ahead of the converter, "
            "so nothing above fs/2 folds, noise and harmonics alike."
        )
    if aa != "none":
        return None
    if chain.get("stage") == "digital":
        return (
            "Anti-alias model: none (the default): the converter has no anti-alias filter, so noise and "
            "harmonics above fs/2 fold into 0 to fs/2 before the digital filter; the amplifier's bandwidth "
            "bounds the noise."
        )
    return (
        "Anti-alias model: none (the default): the analog candidate is the only anti-alias filter, so the "
        "noise and harmonics it passes above fs/2 fold into 0 to fs/2 at the converter."
    )


def _per_channel_occupied(inp: dict) -> str:
    """', power summed over 2 channels; per channel: ch 1 …, ch 2 …' for a multichannel program."""
    chans = inp.get("occupied_channels") or []
    if inp.get("channels", 1) <= 1 or not chans:
        return ""
    each = "; ".join(
        f"ch {c['channel']} {format_quantity(c['occupied_low_hz'], 'Hz')} to "
        f"{format_quantity(c['occupied_high_hz'], 'Hz')}"
        for c in chans
    )
    return f", taken over the power summed across {inp['channels']} channels (per channel: {each})"
