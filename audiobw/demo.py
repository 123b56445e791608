"""The demo: the whole job on the bundled clips, in a scenario of our own.

Scenario (invented): the *Tern-2* field interface, a small two-channel
microphone preamplifier with a 16-bit converter, is being specified for two
uses — recording the (fictional) Saltmarsh Chamber Ensemble's rehearsals and
relaying boarding calls at the (fictional) Gullhaven ferry terminal.  Which
passband does each program need, and how much noise does it then let in?
The clips are synthetic (see clips/README.md).
"""

from __future__ import annotations

from pathlib import Path

#: The Tern-2 front end (invented): a 150 Ω dynamic microphone, 40 dB of gain.
DEMO_CHAIN = {
    "source_ohms": "150", "temperature": "300K", "gain": "40dB", "en": "1.3n", "in": "1.2p",
    "bits": "16", "full_scale": "+4dBu", "dither": "tpdf", "stage": "analog",
}
#: Fidelity targets for both programs.
DEMO_TARGETS = {"max_loss": "0.1dB", "max_lsd": "1dB", "min_snr_a": "60dB"}
DEMO_GRID = {
    "response": "bandpass", "family": "butterworth,bessel", "order": "2,4",
    "low_edges": "10:300:10", "high_edges": "2k:20k:24",
}
DEMO_CLIPS = ("ensemble-48k-stereo.flac", "announcement-44k1-mono.flac")


def find_clips(clips_dir=None) -> Path:
    """The clips folder: given, or the repository's clips/ beside the package."""
    from .errors import ParameterError

    candidates = [Path(clips_dir)] if clips_dir else [Path(__file__).resolve().parents[1] / "clips"]
    for c in candidates:
        if all((c / name).is_file() for name in DEMO_CLIPS):
            return c
    raise ParameterError(f"--clips: {str(candidates[0])!r} does not hold the bundled clips "
                         f"({', '.join(DEMO_CLIPS)}); accepted: the repository's clips/ folder")


def run(out: Path, *, clips_dir=None):
    """Sweep each bundled clip; yield the lines to print."""
    import time

    from .jobs import sweep_file
    from .report.text import closing_paragraph, passband_text
    from .settings import Raw, build

    folder = find_clips(clips_dir)
    raw = {k: Raw(v, f"demo {k}") for k, v in {**DEMO_CHAIN, **DEMO_TARGETS, **DEMO_GRID}.items()}
    settings = build(raw)
    yield ("audiobw demo — the Tern-2 field interface (an invented scenario): which passband does each "
           "program need?")
    yield ("Chain: 150 Ω source at 300 K, 40 dB gain, e_n 1.3 nV/√Hz, i_n 1.2 pA/√Hz, 16-bit converter "
           "with TPDF dither, full scale +4 dBu; analog filter ahead of the converter.")
    yield "Targets: program loss ≤ 0.1 dB, log-spectral distance ≤ 1 dB, A-weighted SNR ≥ 60 dB."
    yield ("Grid: bandpass, Butterworth and Bessel, orders 2 and 4, low edges 10–300 Hz (10), high edges "
           "2–20 kHz (24).")
    yield ""
    summary = []
    for name in DEMO_CLIPS:
        t0 = time.perf_counter()
        doc, paths = sweep_file(folder / name, settings, out_dir=out / Path(name).stem)
        dt = time.perf_counter() - t0
        yield f"== {name}  ({len(doc['cases'])} cases in {dt:.2f} s)"
        yield closing_paragraph(doc)
        yield f"Wrote {paths['json']} and {paths['csv']}."
        yield ""
        if doc["choice"]:
            c = doc["cases"][doc["choice"]["case"] - 1]
            summary.append((name, passband_text(c), c["enbw_hz"], c["noise_dbfs"], c["snr_a_db"]))
        else:
            summary.append((name, "no passing case", None, None, None))
    yield "Summary:"
    for name, band, enbw, noise_dbfs, snr_a in summary:
        extra = f"; ENBW {enbw / 1000:.2f} kHz, noise {noise_dbfs:.1f} dBFS, SNR-A {snr_a:.1f} dB" if enbw else ""
        yield f"  {name}: {band}{extra}"
    yield ""
    yield ("These figures are engineering estimates from a model; verify them by measurement, and defer "
           "to the applicable product standards, local codes and licensed practice.")
