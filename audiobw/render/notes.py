"""A render's own account: the noise it measured beside the sweep's estimate, render-notes.txt, render.json."""

from __future__ import annotations

import math

from ..chain import Chain


def _chain_text(c: Chain) -> str:
    return (
        f"Rs {c.source_ohms:g} ohm at {c.temperature_k:g} K; gain {c.gain_db:g} dB; e_n {c.en_v_rthz:.3g} V/rtHz; "
        f"i_n {c.in_a_rthz:.3g} A/rtHz; h2 {'none' if c.h2_db is None else f'{c.h2_db:g} dB'}; "
        f"h3 {'none' if c.h3_db is None else f'{c.h3_db:g} dB'}; amplifier bandwidth "
        f"{'unlimited' if c.amp_bandwidth_hz is None else f'{c.amp_bandwidth_hz:g} Hz'}; {c.bits} bits; "
        f"full scale {c.full_scale_vrms:g} V rms; dither {c.dither}; filter stage {c.stage}; "
        f"anti-alias {c.anti_alias}; input gain {c.input_gain_db:.3g} dB"
        + (
            f"; e_n table {c.en_table_file or '(no file name)'}, {len(c.en_table)} rows, its top row the e_n above"
            if c.en_table is not None
            else ""
        )
        + (f"; {WHITE_ONLY}" if c.has_flicker else "")
    )


#: what the time-domain render leaves out of the noise it synthesises
WHITE_ONLY = (
    "the render synthesises the white noise only: the 1/f part and the excess of an e_n table over its "
    "top row are in the sweep estimate, not in the audio"
)


def noise_check(input_path, filt, chain: Chain, *, noise_ms: float, program_ms: float) -> dict:
    """The noise and SNR this render measured on its own output, beside the sweep's estimate.

    Measured: the render is run twice on one seed, on the program and on
    silence; the silent run's output is this render's noise (amplifier and
    source noise, quantisation, dither), its mean square ``noise_ms``; the
    difference of the two outputs is the program through the chain,
    ``program_ms`` (both in sample units², averaged over channels, over the
    whole file).  Estimated: the sweep's fast path
    (:class:`audiobw.metrics.Scorer` on :func:`audiobw.spectrum.analyse` of
    the same file, meter 0…fs/2), from spectra alone.  tests/test_render.py
    holds the two within the tolerances of tests/test_render_agreement.py
    (noise 2 %, SNR 0.2 dB).
    """
    from ..metrics import Meter, Scorer
    from ..spectrum import analyse

    row = Scorer(analyse(input_path), chain, Meter()).score(filt)
    volts = math.sqrt(2.0) * chain.full_scale_vrms  # an output sample unit at the converter, V (AES17)
    measured_v = math.sqrt(noise_ms) * volts if noise_ms > 0 else None
    measured_snr = 10 * math.log10(program_ms / noise_ms) if noise_ms > 0 and program_ms > 0 else None
    est_v, est_snr = row.get("noise_vrms"), row.get("snr_db")

    def apart(a, b, power_ratio):
        if a is None or b is None or not (a > 0 and b > 0):
            return None
        return abs(20 * math.log10(a / b)) if power_ratio else abs(a - b)

    return {
        "method": "the same chain and seed rendered on silence (the noise) and on the program "
        "(output minus noise: the program), over the whole file; estimate: the sweep's "
        "fast path on the same file, meter 0 to fs/2",
        "measured_noise_vrms": measured_v,
        "estimate_noise_vrms": est_v,
        "noise_apart_db": apart(measured_v, est_v, True),
        "measured_snr_db": measured_snr,
        "estimate_snr_db": est_snr,
        "snr_apart_db": apart(measured_snr, est_snr, False),
    }


def noise_check_lines(check: dict) -> list[str]:
    """'noise: measured 15.1 µV rms, sweep estimate 15.03 µV rms (0.04 dB apart)' and the SNR line."""
    from ..units import format_quantity

    def v(x):
        return "n/a" if x is None else format_quantity(x, "V rms")

    def db(x):
        return "n/a" if x is None else f"{x:.2f} dB"

    def gap(x):
        return "" if x is None else f" ({x:.2f} dB apart)"

    return [
        f"noise: measured {v(check['measured_noise_vrms'])}, sweep estimate "
        f"{v(check['estimate_noise_vrms'])}{gap(check['noise_apart_db'])}",
        f"SNR: measured {db(check['measured_snr_db'])}, sweep estimate "
        f"{db(check['estimate_snr_db'])}{gap(check['snr_apart_db'])}",
    ]


def _finite(x):
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, dict):
        return {k: _finite(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_finite(v) for v in x]
    return x


def notes_text(facts: dict) -> str:
    """The short human account of a render (``render-notes.txt``)."""
    f, c, cl = facts["filter"], facts["chain"], facts["clipping"]
    fmt = lambda v: "open" if v is None else f"{v:.6g} Hz"  # noqa: E731
    lines = [
        facts["caution"],
        "",
        f"audiobw {facts['version']} render of {facts['input']['path']}",
        f"  {facts['input']['sample_rate_hz']} Hz, {facts['input']['channels']} channel(s), "
        f"{facts['input']['frames']} frames",
        f"Filter: {f['label']} ({f['stage']} stage); -3 dB edges {fmt(f['low_hz'])} / {fmt(f['high_hz'])}",
        f"Chain: {_chain_text(Chain.from_json(c))}",
        f"Seed: {facts['seed']} (noise, dither and trial order)",
        "Converter clipping: "
        + ("none" if cl["samples"] == 0 else f"{cl['samples']} samples clipped, first at {cl['first_s']:.3f} s"),
        f"chain-output.wav: the chain output at its true level, 32-bit float; peak "
        f"{facts['chain_output']['peak_dbfs']:.2f} dBFS",
        f"Excerpt: {facts['excerpt']['start_s']:.3f} s to {facts['excerpt']['stop_s']:.3f} s "
        f"({facts['excerpt']['why']}), {facts['excerpt']['fade_s'] * 1000:.0f} ms fades",
        f"Loudness: {facts['loudness']['method']}; target {facts['loudness']['target_lufs']:g} LUFS; "
        f"ceiling {facts['loudness']['ceiling_dbfs']:g} dBFS {facts['loudness']['ceiling_kind']}"
        + (
            f"; both clips lowered {facts['loudness']['ceiling_reduction_db']:.2f} dB to respect it"
            if facts["loudness"]["ceiling_reduction_db"] > 0
            else ""
        ),
    ]
    for clip in facts["clips"].values():
        lines.append(
            f"  {clip['file']}: {clip['loudness_lufs']:.2f} LUFS, true peak "
            f"{clip['true_peak_dbfs']:.2f} dBFS, sample peak {clip['sample_peak_dbfs']:.2f} dBFS"
        )
    if facts.get("noise_check"):
        lines.append("Measured on this render (" + facts["noise_check"]["method"] + "):")
        lines += ["  " + line for line in noise_check_lines(facts["noise_check"])]
    t = facts.get("trials")
    if t:
        lines.append(
            f"Blind trials: {t['count']} pairs in {t['folder']}/ (answer sheet {t['answer_sheet']}); "
            f"the answer key is {t['key']} - keep it away from the listeners; score with "
            f"`audiobw trials-score {t['key']} ANSWERS`"
        )
    lines += ["", facts["caution"], ""]
    return "\n".join(lines)
