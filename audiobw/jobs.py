"""The jobs behind the commands: sweep one file, a noise budget (the demo is in :mod:`audiobw.demo`).

Kept apart from :mod:`audiobw.cli` so that the library, the CLI and the
batch runner share one code path.
"""

from __future__ import annotations

from pathlib import Path

from .errors import OutputError, ParameterError
from .model import Settings


def sweep_file(
    path,
    settings: Settings,
    *,
    out_dir=None,
    progress=None,
    sha256=None,
    notify=None,
    use_cache: bool = True,
    case_progress=None,
):
    """Analyse ``path``, sweep the grid, write sweep.json/sweep.csv to ``out_dir``.

    ``progress`` is called with (frames done, frames) during the analysis,
    ``case_progress`` with (cases done, cases) while they are scored.

    With ``use_cache`` the analysis comes from, and goes to, the analysis cache
    (:mod:`audiobw.cache`, keyed by the file's SHA-256); the figures are the same.

    Returns
    -------
    (doc, paths)
        The sweep.json mapping and the written paths (empty if ``out_dir`` is None).
    """
    from .audio import open_info
    from .report.sweepio import write_outputs
    from .spectrum import analyse
    from .sweep import run_sweep

    path = Path(path)
    if out_dir is not None:
        out_dir = Path(out_dir)
        if out_dir.exists() and not out_dir.is_dir():
            raise OutputError(f"--out: {str(out_dir)!r} exists and is not a folder")
    info = open_info(path)
    if not settings.targets:
        raise ParameterError(
            "targets: none given; accepted: at least one of --min-snr, --min-snr-a, --max-thdn, "
            "--max-loss, --max-lsd, --min-ser"
        )
    grid = settings.grid_for(info.sample_rate_hz / 2.0)
    # refuse a bad grid before reading, naming where its edges came from
    specs = grid.specs(stage=settings.chain.stage, fs_hz=info.sample_rate_hz, names=settings.origins)
    from .grid import ESTIMATE_FROM_CASES, time_estimate

    if notify is not None and grid.count() >= ESTIMATE_FROM_CASES:
        notify(time_estimate(grid.count()))
    from . import cache

    analysis = analyse(path, progress=progress, sha256=sha256, cache=cache if use_cache and cache.enabled() else None)
    chain = settings.chain_for(analysis)
    data = None
    if settings.program == "data":
        from .datalink import data_program_for

        data = data_program_for(analysis, chain, settings.bit_rate)
    result = run_sweep(
        path,
        chain=chain,
        grid=grid,
        meter=settings.meter,
        targets=settings.targets,
        analysis=analysis,
        data=data,
        listening=settings.listening,
        specs=specs,  # built and validated once, above
        case_progress=case_progress,
    )
    if settings.default_targets:
        result.notes.append(_default_targets_note(settings))
    doc = result.to_json()
    paths = {}
    if out_dir is not None:
        from .audio import output_lock

        with output_lock(out_dir):
            paths = write_outputs(doc, out_dir, inputs=[path])
            paths["spectrum"] = write_spectrum(analysis, out_dir / "spectrum.npz", inputs=[path])
    return doc, paths


def _default_targets_note(settings) -> str:
    parts = []
    if "max_audible_frames_pct" in settings.default_targets:
        parts.append(
            "no fidelity target given: the default target is no audible error "
            f"(--max-audible-frames {settings.targets['max_audible_frames_pct']:g} % of frames, "
            f"music at {settings.listening.spl_db:g} dB SPL)"
        )
    if "min_sii" in settings.default_targets:
        parts.append(
            f"speech: the default target is --min-sii {settings.targets['min_sii']:g} "
            f"(ANSI S3.5-1997, speech at {settings.listening.spl_db:g} dB SPL)"
        )
    return "; ".join(parts)


def write_spectrum(analysis, target, *, inputs=()):
    """Save the program's long-term spectrum beside sweep.json (numpy .npz, no pickled objects).

    Keys: ``freqs_hz``, ``psd`` (channel mean, FS²/Hz: sample units), ``psd_channels``,
    ``weights_hz``, ``band_edges_hz``, ``band_frames`` (kept short frames × critical bands,
    FS², the masking plot's input), ``sample_rate_hz``, ``sha256``.  Reports read it
    with ``numpy.load(..., allow_pickle=False)``.
    """
    import numpy as np

    from .audio import atomic_path

    with atomic_path(target, inputs=inputs) as tmp:
        with open(tmp, "wb") as fh:
            np.savez(
                fh,
                freqs_hz=analysis.freqs_hz,
                psd=analysis.psd,
                psd_channels=analysis.psd_channels,
                weights_hz=analysis.weights_hz,
                band_edges_hz=analysis.band_edges_hz,
                band_frames=analysis.band_frames,
                sample_rate_hz=np.int64(analysis.sample_rate_hz),
                sha256=np.str_(analysis.sha256),
            )
    return target


def noise_budget(settings: Settings, *, band: str, rate: str):
    """The noise budget for one filter given as LOW:HIGH at sample rate ``rate``."""
    from . import units
    from .filters import FilterSpec, design, validate_spec
    from .noise import FLICKER_FROM_HZ, budget

    fs = units.parse_quantity(rate, "frequency", name="--rate")
    lo, hi = units.parse_band(band, name="--band")
    response = "bandpass" if lo and hi else ("lowpass" if hi else "highpass")
    families, orders = settings.grid_value("family"), settings.grid_value("order")
    if len(families) != 1 or len(orders) != 1:
        raise ParameterError("--family/--order: the noise budget takes one family and one order")
    spec = FilterSpec(
        response,
        families[0],
        orders[0],
        lo,
        hi,
        settings.grid_value("ripple"),
        settings.grid_value("stopband"),
        settings.chain.stage,
        fs,
    )
    validate_spec(spec, fs_hz=fs, name="--band")
    filt = design(spec)
    b = budget(settings.chain, filt, fs, meter=settings.meter.band(fs / 2.0))
    c = settings.chain
    fq = units.format_quantity
    if c.en_table is not None:
        from .entable import summary

        en_text = (
            f"e_n from the table {summary(c.en_table, c.en_table_file)}, log-log between rows, flat beyond "
            f"them; white level {fq(c.en_v_rthz, 'V/√Hz')} at its top row"
        )
    else:
        en_text = f"e_n {fq(c.en_v_rthz, 'V/√Hz')}"
    header = (
        f"Noise budget: {spec.label()}, {c.stage} stage, fs {fq(fs, 'Hz')}; Rs {fq(c.source_ohms, 'Ω')} at "
        f"{c.temperature_k:g} K, gain {c.gain_db:g} dB, {en_text}, "
        f"i_n {fq(c.in_a_rthz, 'A/√Hz')}, {c.bits} bits, full scale {fq(c.full_scale_vrms, 'V rms')}, "
        f"dither {c.dither}, anti-alias {c.anti_alias}"
        + (f", amplifier bandwidth {fq(c.amp_bandwidth_hz, 'Hz')}" if c.amp_bandwidth_hz is not None else "")
        + (
            f"; 1/f corners e_n {fq(c.en_corner_hz, 'Hz') if c.en_corner_hz else 'none'}, "
            f"i_n {fq(c.in_corner_hz, 'Hz') if c.in_corner_hz else 'none'} (1/f integrated from "
            f"{FLICKER_FROM_HZ:g} Hz)"
            if c.has_flicker and c.en_table is None
            else ""
        )
        + (
            f"; i_n 1/f corner {fq(c.in_corner_hz, 'Hz') if c.in_corner_hz else 'none'}; the table's excess "
            f"over its white level integrated from {FLICKER_FROM_HZ:g} Hz"
            if c.en_table is not None
            else ""
        )
    )
    b["filter"] = {
        "response": response,
        "family": spec.family,
        "order": spec.order,
        "low_hz": filt.edges_3db[0],
        "high_hz": filt.edges_3db[1],
    }
    b["chain"] = c.to_json()
    b["sample_rate_hz"] = fs
    return b, header
