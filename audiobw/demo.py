"""The demo: the whole job on the bundled clips, in a scenario of our own.

Scenario (invented): the *Tern-2* field interface, a small two-channel
microphone preamplifier with a 16-bit converter, is being specified for two
uses — recording the (fictional) Saltmarsh Chamber Ensemble's rehearsals and
relaying boarding calls at the (fictional) Gullhaven ferry terminal.  Which
passband does each program need, and how much noise does it then let in?
The clips are synthetic (see clips/README.md).  A third, data-link part
sweeps a 2 kbit/s telemetry stream (generated here, seeded PRBS-9) from an
invented remote tide gauge.
"""

from __future__ import annotations

from pathlib import Path

#: The Tern-2 front end (invented): a 150 Ω dynamic microphone, 40 dB of gain.
DEMO_CHAIN = {
    "source_ohms": "150",
    "temperature": "300K",
    "gain": "40dB",
    "en": "1.3n",
    "in": "1.2p",
    "bits": "16",
    "full_scale": "+4dBu",
    "dither": "tpdf",
    "stage": "analog",
}
#: Fidelity targets for both programs.
DEMO_TARGETS = {"max_loss": "0.1dB", "max_lsd": "1dB", "min_snr_a": "60dB"}
DEMO_GRID = {
    "response": "bandpass",
    "family": "butterworth,bessel",
    "order": "2,4",
    "low_edges": "10:300:10",
    "high_edges": "2k:20k:24",
}
DEMO_CLIPS = ("ensemble-48k-stereo.flac", "announcement-44k1-mono.flac")

#: The data-link part (invented): the Saltmarsh tide gauge, a battery sensor at
#: the end of a long cable pair, sends 2 kbit/s polar NRZ telemetry (PRBS-9 test
#: pattern) that arrives at ±10 mV; a high-gain line receiver brings it in.
DATA_CHAIN = {
    "source_ohms": "10k",
    "temperature": "300K",
    "gain": "60dB",
    "en": "30n",
    "in": "0.5p",
    "bits": "16",
    "full_scale": "50mV",
    "dither": "tpdf",
    "stage": "analog",
}
DATA_TARGETS = {"max_ber": "1e-9", "min_eye": "0.6"}
DATA_GRID = {"response": "lowpass", "family": "bessel,butterworth", "order": "2,4,6", "cutoffs": "500:8k:24"}
DATA_PROGRAM = {"program": "data", "bit_rate": "auto"}

#: The speech part (invented): the same boarding call relayed over the terminal's
#: paging line, judged by the Speech Intelligibility Index at normal vocal effort.
SPEECH_CLIP = "announcement-44k1-mono.flac"
SPEECH_TARGETS = {"program": "speech", "min_sii": "0.75", "min_snr_a": "60dB"}
SPEECH_GRID = {"response": "lowpass", "family": "butterworth", "order": "4", "cutoffs": "1k:10k:16"}


def find_clips(clips_dir=None) -> Path:
    """The clips folder: given, or the repository's clips/ beside the package."""
    from .errors import ParameterError

    candidates = [Path(clips_dir)] if clips_dir else [Path(__file__).resolve().parents[1] / "clips"]
    for c in candidates:
        if all((c / name).is_file() for name in DEMO_CLIPS):
            return c
    raise ParameterError(
        f"--clips: {str(candidates[0])!r} does not hold the bundled clips "
        f"({', '.join(DEMO_CLIPS)}); accepted: the repository's clips/ folder"
    )


def _render_and_report(doc, path, settings, out_dir):
    """Render the chosen and next-narrower cases (A/B clips), then write the report."""
    from .cautions import LISTENING_CAUTION
    from .render import render_sweep
    from .report.write import write_report

    if doc.get("choice"):
        render_sweep(doc, path, settings, out_dir)
        yield (
            f"A/B clips of the chosen case and of the next narrower one: {out_dir}/render-*/ "
            f"(ab-reference.wav, ab-processed.wav). {LISTENING_CAUTION}"
        )
    report = write_report(out_dir)
    yield f"Spec sheet {report['spec_md']}; report page {report['html']}."


def _data_link(out: Path, summary: list):
    """The telemetry example: write the stream, sweep it as a data program."""
    import math

    from .audio import write_audio_atomic
    from .datalink import nrz_stream, prbs
    from .jobs import sweep_file
    from .report.text import closing_paragraph
    from .report.words import passband_text
    from .settings import Raw, build

    fs, rate, amp_v, fs_v = 48000, 2000.0, 0.010, 0.050
    stream = out / "telemetry-2k.flac"
    x = nrz_stream(prbs("prbs9", 4096), rate, fs, amp_v / (math.sqrt(2) * fs_v))
    write_audio_atomic(stream, x[:, None], fs, subtype="PCM_24")
    raw = {k: Raw(v, f"demo {k}") for k, v in {**DATA_CHAIN, **DATA_TARGETS, **DATA_GRID, **DATA_PROGRAM}.items()}
    doc, paths = sweep_file(stream, build(raw), out_dir=out / "telemetry-2k")
    from .report.write import write_report

    report = write_report(out / "telemetry-2k")
    yield (
        f"== {stream.name}  (the Saltmarsh tide gauge, invented: 2 kbit/s PRBS-9 NRZ at ±10 mV; "
        "10 kΩ line, 60 dB receiver gain, e_n 30 nV/√Hz; targets BER ≤ 1e-9, eye ≥ 60 %; "
        f"{len(doc['cases'])} cases; bit rate recovered from the recording)"
    )
    yield closing_paragraph(doc)
    yield f"Wrote {paths['json']} and {paths['csv']}; the report is {report['html']}."
    yield ""
    d = doc["data"]
    if doc["choice"]:
        c = doc["cases"][doc["choice"]["case"] - 1]
        q = d["q_optimal"]
        summary.append(
            (
                stream.name,
                passband_text(c),
                c["enbw_hz"],
                None,
                None,
                f"; Nyquist minimum {d['nyquist_min_hz']:.0f} Hz, chosen {c['bandwidth_hz']:.0f} Hz, "
                f"Q-optimal {q['bandwidth_hz']:.0f} Hz (Q {q['q']:.2f})",
            )
        )
    else:
        summary.append((stream.name, "no passing case", None, None, None, ""))


def _realise(doc, out_dir: Path):
    """Realise the chosen case as unity-gain Sallen-Key stages (E96 resistors, E12 capacitors)."""
    if not doc["choice"] or doc["chain"].get("stage") != "analog":
        return
    from .errors import ParameterError
    from .realise import CAUTION
    from .realise.folder import realise_folder

    try:
        r, path = realise_folder(out_dir)
    except ParameterError as exc:
        yield f"Realise: {exc}"
        return
    sp = r["second_pass"]
    parts = "; ".join(
        f"stage {s['stage']} {s['kind']}: " + ", ".join(f"{k} {_fmt_part(k, v)}" for k, v in s["parts"].items())
        for s in r["stages"]
    )
    yield (
        f"Realised ({len(r['stages'])} stages; op-amp e_n 4 nV/√Hz, i_n 0.5 pA/√Hz): {parts}. Their own noise "
        f"{r['noise']['noise_vrms'] * 1e6:.2f} µV rms adds {sp['added_noise_db']:.2f} dB to the chain's; "
        f"yield {100 * r['yield']['fraction']:.1f} % of {r['yield']['draws']} builds at R ±1 %, C ±5 %. "
        f"Wrote {path}. {CAUTION}"
    )


def _fmt_part(name, value):
    from .units import format_quantity

    return format_quantity(value, "Ω" if name[0] == "R" else "F", 3)


def _speech(folder: Path, out: Path, summary: list):
    """The paging example: the announcement as speech, chosen by SII ≥ 0.75."""
    from .jobs import sweep_file
    from .report.text import closing_paragraph
    from .report.words import passband_text
    from .settings import Raw, build

    raw = {k: Raw(v, f"demo {k}") for k, v in {**DEMO_CHAIN, **SPEECH_TARGETS, **SPEECH_GRID}.items()}
    doc, paths = sweep_file(folder / SPEECH_CLIP, build(raw), out_dir=out / "announcement-speech")
    yield (
        f"== {SPEECH_CLIP} as speech  (the Gullhaven paging line, invented: the same Tern-2 chain; "
        "targets SII ≥ 0.75 at 62.35 dB SPL (ANSI S3.5-1997 normal vocal effort), A-weighted SNR ≥ 60 dB; "
        f"{len(doc['cases'])} lowpass cases)"
    )
    yield closing_paragraph(doc)
    yield f"Wrote {paths['json']} and {paths['csv']}."
    yield ""
    if doc["choice"]:
        c = doc["cases"][doc["choice"]["case"] - 1]
        summary.append(
            (
                SPEECH_CLIP + " (speech)",
                passband_text(c),
                c["enbw_hz"],
                None,
                None,
                f"; SII {c['sii']:.3f}, error audible in {c['audible_frames_pct']:.1f} % of frames",
            )
        )
    else:
        summary.append((SPEECH_CLIP + " (speech)", "no passing case", None, None, None, ""))


def run(out: Path, *, clips_dir=None):
    """Sweep each bundled clip; yield the lines to print."""
    import time

    from .jobs import sweep_file
    from .report.text import closing_paragraph
    from .report.words import passband_text
    from .settings import Raw, build

    folder = find_clips(clips_dir)
    try:  # record the clips' path relative to the working directory when it can be
        import os

        rel = Path(os.path.relpath(folder))
        folder = rel if not str(rel).startswith("..") else folder
    except ValueError:
        pass
    raw = {k: Raw(v, f"demo {k}") for k, v in {**DEMO_CHAIN, **DEMO_TARGETS, **DEMO_GRID}.items()}
    settings = build(raw)
    yield ("audiobw demo — the Tern-2 field interface (an invented scenario): which passband does each program need?")
    yield (
        "Chain: 150 Ω source at 300 K, 40 dB gain, e_n 1.3 nV/√Hz, i_n 1.2 pA/√Hz, 16-bit converter "
        "with TPDF dither, full scale +4 dBu; analog filter ahead of the converter."
    )
    yield "Targets: program loss ≤ 0.1 dB, log-spectral distance ≤ 1 dB, A-weighted SNR ≥ 60 dB."
    yield (
        "Grid: bandpass, Butterworth and Bessel, orders 2 and 4, low edges 10–300 Hz (10), high edges 2–20 kHz (24)."
    )
    yield ""
    summary = []
    for name in DEMO_CLIPS:
        t0 = time.perf_counter()
        doc, paths = sweep_file(folder / name, settings, out_dir=out / Path(name).stem)
        dt = time.perf_counter() - t0
        yield f"== {name}  ({len(doc['cases'])} cases in {dt:.2f} s)"
        yield closing_paragraph(doc)
        yield f"Wrote {paths['json']} and {paths['csv']}."
        yield from _realise(doc, out / Path(name).stem)
        yield from _render_and_report(doc, folder / name, settings, out / Path(name).stem)
        yield ""
        if doc["choice"]:
            c = doc["cases"][doc["choice"]["case"] - 1]
            extra = (
                f"; ENBW {c['enbw_hz'] / 1000:.2f} kHz, noise {c['noise_dbfs']:.1f} dBFS, SNR-A {c['snr_a_db']:.1f} dB"
            )
            summary.append((name, passband_text(c), c["enbw_hz"], None, None, extra))
        else:
            summary.append((name, "no passing case", None, None, None, ""))
    yield from _speech(folder, out, summary)
    yield from _data_link(out, summary)
    yield "Summary:"
    for name, band, _enbw, _n, _s, extra in summary:
        yield f"  {name}: {band}{extra}"
    yield ""
    yield (
        "These figures are engineering estimates from a model; verify them by measurement, and defer "
        "to the applicable product standards, local codes and licensed practice."
    )


def run_demo(out, *, clips_dir=None):
    """Sweep the bundled clips with the demo scenario; yields lines to print."""
    yield from run(Path(out), clips_dir=clips_dir)
