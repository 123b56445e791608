"""How the spec sheet shows a value: units, targets, margins, the main block's rows.

Shared by spec.md (:mod:`audiobw.report.markdown`) and report.html
(:mod:`audiobw.report.html`), so both show the same text for each value.
"""

from __future__ import annotations

from ..metrics import TARGET_METRIC
from ..registry import TARGET_LABEL


def target_info(key: str) -> tuple[str, str, str, str]:
    """(label, metric key, unit, sense sign) of a target; targets added later get a generic label."""
    if key in TARGET_LABEL:
        return TARGET_LABEL[key]
    metric = TARGET_METRIC.get(key, (key,))[0]
    return key, metric, "", "≥" if key.startswith("min") else "≤"


def fmt(value, unit: str = "", digits: int = 4) -> str:
    """A value for the sheet: SI prefix where it helps; '—' for null."""
    from ..units import format_quantity

    if value is None:
        return "—"
    if isinstance(value, str):
        return value
    if unit == "%":
        return f"{value:.4g} %"
    if unit.startswith("dB"):
        # small figures (a loss of 0.032 dB) keep three significant digits
        return f"{value:.3g} {unit}" if 0 < abs(value) < 0.1 else f"{value:.2f} {unit}"
    if unit == "s":
        return format_quantity(value, "s", digits)
    if unit in ("bit", "K"):
        return f"{value:g} {unit}"
    return format_quantity(value, unit, digits)


def passband_phrase(spec: dict) -> str:
    from .words import band_words

    f = spec["filter"]
    band = band_words(f["response"], f["low_hz"], f["high_hz"], hz=lambda v: fmt(v, "Hz"))
    return f"{f['family']} order {f['order']} ({f['poles']} poles), {f['stage']} stage, {band}"


def target_text(t: dict) -> str:
    sense = "≥" if t["sense"] == "min" else "≤"
    if t["key"] == "min_eye":  # a fraction of the unfiltered eye, read as the value beside it is
        return f"{t['label']} {sense} {100 * t['limit']:g} % of the unfiltered eye"
    if t["unit"] == "s":
        return f"{t['label']} {sense} {fmt(t['limit'], 's')}"
    return f"{t['label']} {sense} {t['limit']:g} {t['unit']}".rstrip()


def _metric_unit(metric: str) -> str:
    return {"thdn_pct": "%", "delay_spread_s": "s"}.get(metric, "dB")


def metric_value_text(metric: str, value) -> str:
    """A target's metric as the sheet shows it: BER and Q are plain numbers, the eye a percentage."""
    from .words import ber_text

    if value is None:
        return "—"
    if metric == "ber":
        return ber_text(value)
    if metric == "eye_fraction":
        return f"{100 * value:.1f} % of the unfiltered eye"
    if metric == "q":
        return f"{value:.2f}"
    return fmt(value, _metric_unit(metric))


def margin_value_text(key: str, margin) -> str:
    """A target's margin, signed; a BER that underflows a double has a margin beyond its range."""
    if margin is None:
        return "beyond the double range" if key == "max_ber" else "—"
    return f"{margin:+.3g} dB"


def spec_rows(spec: dict) -> list[tuple[str, str, str, object]]:
    """The main block as (section, label, shown text, json pointer) rows; shared by Markdown and HTML."""
    f, pb, gd, n = spec["filter"], spec["passband"], spec["group_delay"], spec["noise"]
    rows = [
        (
            "Passband",
            "filter",
            f"{f['family']} order {f['order']} {f['response']} ({f['poles']} poles), {f['stage']} stage",
            None,
        ),
        (
            "Passband",
            "−3 dB lower edge",
            fmt(f["low_hz"], "Hz") if f["low_hz"] is not None else "— (open)",
            "filter.low_hz",
        ),
        (
            "Passband",
            "−3 dB upper edge",
            fmt(f["high_hz"], "Hz") if f["high_hz"] is not None else "— (open)",
            "filter.high_hz",
        ),
        ("Passband", "−3 dB bandwidth", fmt(f["bandwidth_hz"], "Hz"), "filter.bandwidth_hz"),
        ("Passband", "equivalent noise bandwidth (ENBW)", fmt(f["enbw_hz"], "Hz"), "filter.enbw_hz"),
        ("Passband", "passband ripple", fmt(pb["ripple_db"], "dB") + f" ({pb['ripple_note']})", "passband.ripple_db"),
        (
            "Passband",
            f"gain variation over the program's occupied band ({fmt(pb['flatness']['low_hz'], 'Hz')} to "
            f"{fmt(pb['flatness']['high_hz'], 'Hz')})",
            fmt(pb["flatness"]["variation_db"], "dB"),
            "passband.flatness.variation_db",
        ),
    ]
    if f.get("alias_rejection_db") is not None:
        rows.append(
            (
                "Stopband",
                "alias rejection: least attenuation over what the converter folds into the passband",
                fmt(f["alias_rejection_db"], "dB"),
                "filter.alias_rejection_db",
            )
        )
    for i, p in enumerate(spec["stopband"]):
        text = fmt(p["attenuation_db"], "dB") if p["attenuation_db"] is not None else f"— ({p['note']})"
        rows.append(
            (
                "Stopband",
                f"attenuation at {p['label']} = {fmt(p['freq_hz'], 'Hz')}",
                text,
                f"stopband.{i}.attenuation_db",
            )
        )
    rows += [
        (
            "Phase",
            "group delay at 1 kHz",
            fmt(gd["at_s"], "s") + (f" ({gd['note']})" if gd["note"] else ""),
            "group_delay.at_s",
        ),
        (
            "Phase",
            f"group delay spread over the −3 dB passband ({fmt(gd['passband']['low_hz'], 'Hz')} to "
            f"{fmt(gd['passband']['high_hz'], 'Hz')})",
            fmt(gd["passband"]["spread_s"], "s"),
            "group_delay.passband.spread_s",
        ),
        (
            "Phase",
            "group delay spread over the program's occupied band",
            fmt(gd["occupied_band"]["spread_s"], "s"),
            "group_delay.occupied_band.spread_s",
        ),
        (
            "Noise",
            f"output noise ({fmt(n['meter']['low_hz'], 'Hz')} to {fmt(n['meter']['high_hz'], 'Hz')})",
            fmt(n["vrms"], "V rms"),
            "noise.vrms",
        ),
        ("Noise", "output noise", fmt(n["dbu"], "dBu"), "noise.dbu"),
        ("Noise", "output noise", fmt(n["dbfs"], "dBFS"), "noise.dbfs"),
        ("Noise", "output noise, A-weighted", fmt(n["a_weighted"]["vrms"], "V rms"), "noise.a_weighted.vrms"),
        ("Noise", "output noise, A-weighted", fmt(n["a_weighted"]["dbfs"], "dBFS"), "noise.a_weighted.dbfs"),
        ("Noise", "dynamic range, full-scale sine", fmt(n["dynamic_range_db"], "dB"), "noise.dynamic_range_db"),
        (
            "Noise",
            "dynamic range, full-scale sine, A-weighted",
            fmt(n["dynamic_range_a_db"], "dB"),
            "noise.dynamic_range_a_db",
        ),
        ("Program", "SNR for this program", fmt(spec["program"]["snr_db"], "dB"), "program.snr_db"),
        ("Program", "A-weighted SNR for this program", fmt(spec["program"]["snr_a_db"], "dB"), "program.snr_a_db"),
        ("Program", "program loss", fmt(spec["program"]["loss_db"], "dB"), "program.loss_db"),
        ("Program", "log-spectral distance", fmt(spec["program"]["lsd_db"], "dB"), "program.lsd_db"),
        ("Program", "signal-to-error", fmt(spec["program"]["ser_db"], "dB"), "program.ser_db"),
        (
            "Program",
            f"THD+N at {spec['thdn']['tone_hz']:g} Hz, {spec['thdn']['tone_level_dbfs']:g} dBFS",
            fmt(spec["thdn"]["pct"], "%") if spec["thdn"]["pct"] is not None else f"— ({spec['thdn']['note']})",
            "thdn.pct",
        ),
    ]
    dl = spec.get("data_link")
    if dl:
        rows += [
            ("Data link", "bit rate", fmt(dl["bit_rate_hz"], "bit/s"), "data_link.bit_rate_hz"),
            (
                "Data link",
                "eye opening (fraction of the unfiltered eye)",
                f"{dl['eye_fraction']:.3f}" if dl["eye_fraction"] is not None else "—",
                "data_link.eye_fraction",
            ),
            ("Data link", "eye opening", fmt(dl["eye_opening_v"], "V"), "data_link.eye_opening_v"),
            ("Data link", "Q factor", f"{dl['q']:.3g}" if dl["q"] is not None else "—", "data_link.q"),
            (
                "Data link",
                "eye opening of the filter alone on a perfect stream (ideal pulse)",
                f"{dl['eye_ideal']:.3f}" if dl.get("eye_ideal") is not None else "—",
                "data_link.eye_ideal",
            ),
            ("Data link", "bit-error rate", metric_value_text("ber", dl["ber"]), "data_link.ber"),
            (
                "Data link",
                "peak-to-peak jitter",
                f"{dl['jitter_pp_ui']:.3g} UI" if dl["jitter_pp_ui"] is not None else "—",
                "data_link.jitter_pp_ui",
            ),
        ]
    return rows


def json_pointer(spec: dict, pointer: str):
    node = spec
    for part in pointer.split("."):
        node = node[int(part)] if isinstance(node, list) else node[part]
    return node


def chain_value_text(row: dict) -> str:
    v, unit = row["value"], row["unit"]
    if v is None:
        return "— (not modelled)"
    if isinstance(v, str):
        return v
    if row["key"] == "full_scale_vrms":
        from ..chain import vrms_to_dbu

        return f"{fmt(v, 'V rms')} ({vrms_to_dbu(v):+.2f} dBu)"
    if row["key"] == "temperature_k":
        return f"{v:g} K ({v - 273.15:.1f} °C)"
    if unit.startswith("dB"):
        return f"{v:g} {unit}"
    return fmt(v, unit)


def case_line(c: dict | None) -> str:
    if c is None:
        return "— (none in the grid)"
    lo = fmt(c["low_hz"], "Hz") if c["low_hz"] is not None else "0"
    hi = fmt(c["high_hz"], "Hz") if c["high_hz"] is not None else "fs/2"
    verdict = "passes" if c["passes"] else "fails " + ", ".join(target_info(k)[0] for k in c["fails"])
    return (
        f"case {c['id']}: {c['family']} {c['order']}, {lo} to {hi} (bandwidth {fmt(c['bandwidth_hz'], 'Hz')}, "
        f"{c['bandwidth_change_hz']:+.0f} Hz); ENBW {fmt(c['enbw_hz'], 'Hz')}, noise {fmt(c['noise_dbfs'], 'dBFS')}, "
        f"SNR-A {fmt(c['snr_a_db'], 'dB')}, loss {fmt(c['loss_db'], 'dB')}, LSD {fmt(c['lsd_db'], 'dB')} — {verdict}"
    )
