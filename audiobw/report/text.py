"""What a sweep and a noise budget look like in a terminal."""

from __future__ import annotations

import math

from .. import registry
from ..registry import TARGET_LABEL  # noqa: F401  (the verdict words; spec and batch take them from here)
from ..units import format_quantity
from ..names import shown

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


def _fmt_metric(key: str, value) -> str:
    if value is None:
        return "n/a"
    if key == "thdn_pct":
        return f"{value:.5f} %"
    if key == "ber":
        return ber_text(value)
    if key == "eye_fraction":
        return f"{100 * value:.1f} % of the unfiltered opening"
    if key == "q":
        return q_text(value)
    if key == "sii":
        return f"{value:.3f}"
    if key == "audible_frames_pct":
        return f"{value:.1f} % of frames"
    if key == "noise_dbfs":
        return f"{value:.1f} dBFS"
    if key == "noise_vrms":
        return format_quantity(value, "V rms")
    if key == "delay_spread_s":
        return format_quantity(value, "s")
    if key.endswith("_hz"):
        return format_quantity(value, "Hz")
    return f"{value:.2f} dB"


#: the smallest BER printed as a number; below it the Gaussian tail underflows a double
BER_FLOOR = 1e-300


#: above this Q the Gaussian error rate ½·erfc(Q/√2) is below 1e-300 (math.erfc: Q = 37.05 gives
#: 1.0e-300; Q = 37.0 gives 5.7e-300, so 37.0 would overstate it)
Q_FLOOR = 37.1


def q_text(value) -> str:
    """Q for people: the number, in dB (20·lg Q, common practice), and what it means at the extremes."""
    if value is None:
        return "unbounded (no noise at the decision point)"
    if value <= 0:
        return "0 (the eye is closed)"
    text = f"{value:.3g} ({20 * math.log10(value):.1f} dB; half the noiseless eye over the noise σ"
    if value > Q_FLOOR:
        text += f"; above {Q_FLOOR:g} the Gaussian error rate is below 1e-300"
    return text + ")"


def ber_text(value) -> str:
    """A bit-error rate for people: '3.10e-12', or '< 1e-300' where the double range runs out."""
    if value is None:
        return "n/a"
    if value < BER_FLOOR:
        return "< 1e-300"
    return f"{value:.2e}"


def margin_text(key: str, margin) -> str:
    """A target's margin; a BER of (numerically) zero has a margin beyond the double range."""
    if margin is None:
        return "beyond the double range" if key == "max_ber" else "n/a"
    return f"{margin:.3g} dB"


def band_words(response: str, low_hz, high_hz, hz=lambda v: format_quantity(v, "Hz")) -> str:
    """'lowpass, −3 dB edge 9.5 kHz' and the like; ``hz`` formats a frequency."""
    if response == "lowpass":
        return f"lowpass, −3 dB edge {hz(high_hz)}"
    if response == "highpass":
        return f"highpass, −3 dB edge {hz(low_hz)}"
    return f"bandpass, −3 dB edges {hz(low_hz)} to {hz(high_hz)}"


def passband_text(case: dict) -> str:
    band = band_words(case["response"], case.get("low_hz"), case.get("high_hz"))
    return f"{case['family']} order {case['order']} {band}"


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
                f"Binding target: {label} {sense} {_target_text(b, targets[b])} "
                f"(this case: {_fmt_metric(metric, c[metric])}; margin {margin_text(b, margin)})."
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
            f"{name} {_fmt_metric(k, c[k])}".strip()
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
                    f"{name} {_fmt_metric(k, c.get(k))}"
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
                f"Cannot be met: {label} {sense} {_target_text(key, targets[key])}; the best any case "
                f"reached is {_fmt_metric(metric, best)}."
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


def target_phrase(key: str, targets: dict) -> str:
    """'A-weighted SNR ≥ 75 dB': a target as the sweep states it."""
    label, _metric, _unit, sense = TARGET_LABEL[key]
    return f"{label} {sense} {_target_text(key, targets[key])}"


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


def _target_text(key: str, value: float) -> str:
    if key == "max_ber":
        return f"{value:.0e}"
    if key == "min_eye":
        return f"{100 * value:g} % of the unfiltered opening"
    if key == "min_sii":
        return f"{value:g}"
    if key == "max_audible_frames_pct":
        return f"{value:g} % of frames"
    if key == "max_delay_spread_s":
        return format_quantity(value, "s")
    return f"{value:g} %" if key == "max_thdn_pct" else f"{value:g} dB"


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
