"""The render itself: the chain simulated on the program, chain-output.wav and the loudness-matched A/B clips."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from .. import __version__
from ..audio import atomic_path, iter_blocks, open_info, open_wav_writer, write_audio_atomic, write_text_atomic
from ..chain import Chain
from ..errors import AudioFileError, OutputError, ParameterError
from ..filters import FilterSpec, design, validate_spec
from .loudness import _db, integrated_loudness, k_weighting_sos, true_peak
from .options import FADE_S, MIN_CLIP_S, PEAK_MARGIN_DB, RenderOptions, RenderResult
from .excerpt import _fade, choose_excerpt, removed_band_profile
from .notes import _finite, noise_check, notes_text
from .trials import _write_trials


# -- the render -------------------------------------------------------------------


class _ProgramLevel:
    """The little an :meth:`audiobw.settings.Settings.chain_for` needs: the program's rms."""

    def __init__(self, mean_square):
        ms = float(np.mean(mean_square))
        self.rms_dbfs = 10 * math.log10(2 * ms) if ms > 0 else -math.inf


def render_file(
    input_path, spec: FilterSpec, chain, out_dir, options: RenderOptions | None = None, *, progress=None
) -> RenderResult:
    """Render into ``out_dir`` while holding its output lock (see :func:`_render_file`)."""
    from ..audio import output_lock

    out_dir = Path(out_dir)
    with output_lock(out_dir):
        return _render_file(input_path, spec, chain, out_dir, options, progress=progress)


def _render_file(
    input_path, spec: FilterSpec, chain, out_dir, options: RenderOptions | None = None, *, progress=None
) -> RenderResult:
    """Simulate the chain on ``input_path`` and write the render folder.

    Parameters
    ----------
    input_path : path-like
    spec : FilterSpec
        The filter (its ``stage`` must be the chain's, ``fs_hz`` the file's rate).
    chain : Chain or audiobw.settings.Settings
        A Settings resolves ``--input-level`` against the program's rms.
    out_dir : path-like
        Created if missing; the input is never written.
    options : RenderOptions

    Raises
    ------
    AudioFileError
        Unreadable input, shorter than 0.4 s, silent excerpt.
    ParameterError
        A bad option (excerpt start past the end, ...).
    """
    options = options or RenderOptions()
    input_path = Path(input_path)
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise OutputError(f"--out: {str(out_dir)!r} exists and is not a folder")
    info = open_info(input_path)
    fs, nch = info.sample_rate_hz, info.channels
    validate_spec(spec, fs_hz=fs, name="--band")
    filt = design(spec)

    # progress runs over both passes: the excerpt search, then the simulation
    expected = 2 * max(info.frames, 1)
    profile, frames, mean_square, frame_len = removed_band_profile(
        input_path, filt, fs, progress=progress, expected=expected
    )
    if frames < MIN_CLIP_S * fs:
        raise AudioFileError(
            f"{input_path}: {frames / fs:.3f} s of audio is shorter than the 0.4 s BS.1770 "
            "gating block needed to loudness-match clips; accepted: at least 0.4 s"
        )
    if mean_square is None or not np.any(mean_square > 0):
        raise AudioFileError(f"{input_path}: digital silence (every sample is 0); nothing to render")
    chain = chain.chain_for(_ProgramLevel(mean_square)) if not isinstance(chain, Chain) else chain
    if chain.stage != spec.stage:
        raise ParameterError(f"--stage: the filter is {spec.stage} but the chain is {chain.stage}")

    length = min(int(round(options.excerpt_s * fs)), frames)
    if options.excerpt_start_s is not None:
        start = int(round(options.excerpt_start_s * fs))
        if start + int(MIN_CLIP_S * fs) > frames:
            raise ParameterError(
                f"--excerpt-at: {options.excerpt_start_s:g} s leaves less than 0.4 s of the "
                f"{frames / fs:.3f} s file; accepted: 0 to {max(frames / fs - MIN_CLIP_S, 0):.3f} s"
            )
        length = min(length, frames - start)
        why = "given with --excerpt-at"
    else:
        start = choose_excerpt(profile, frame_len, frames, length)
        why = (
            "the whole file"
            if length >= frames
            else "the stretch with the most input power in the band the filter removes"
        )
    stop = start + length

    from ..simulate import ChainSimulator

    sim = ChainSimulator(chain, filt, fs, nch, seed=options.seed)
    # the same chain and seed on silence: the very noise (and dither) of this render, alone
    silent = ChainSimulator(chain, filt, fs, nch, seed=options.seed)
    ref_parts, proc_parts = [], []
    out_path = out_dir / "chain-output.wav"
    written = 0
    out_peak, out_sumsq = 0.0, 0.0
    noise_sumsq, program_sumsq = 0.0, 0.0

    fmt = "RF64" if frames * nch * 4 > (4 << 30) - (1 << 20) else "WAV"
    with atomic_path(out_path, inputs=[input_path]) as tmp:
        with open_wav_writer(tmp, fs, nch, subtype="FLOAT", format=fmt) as fh:
            read = 0

            def _write(y, n):
                nonlocal written, out_peak, out_sumsq, noise_sumsq, program_sumsq
                if y.shape[0] == 0:
                    return
                noise_sumsq += float(np.sum(n * n))
                program_sumsq += float(np.sum((y - n) ** 2))
                lo, hi = max(start - written, 0), min(stop - written, y.shape[0])
                if hi > lo:
                    proc_parts.append(y[lo:hi])
                fh.write(y.astype(np.float32))
                out_peak = max(out_peak, float(np.max(np.abs(y))))
                out_sumsq += float(np.sum(y * y))
                written += y.shape[0]

            for block in iter_blocks(input_path):
                lo, hi = max(start - read, 0), min(stop - read, block.shape[0])
                if hi > lo:
                    ref_parts.append(block[lo:hi].copy())
                read += block.shape[0]
                _write(sim.push(block), silent.push(np.zeros_like(block)))
                if progress is not None:
                    progress(frames + read, 2 * frames)
            _write(sim.finish(), silent.finish())
    paths = [out_path]

    ref = _fade(np.concatenate(ref_parts), fs)
    proc = _fade(np.concatenate(proc_parts), fs)
    loud_ref, loud_proc = integrated_loudness(ref, fs), integrated_loudness(proc, fs)
    for name, value in (("reference", loud_ref), ("processed", loud_proc)):
        if not math.isfinite(value):
            raise AudioFileError(
                f"{input_path}: the {name} excerpt {start / fs:.2f}-{stop / fs:.2f} s is silent "
                "(below the -70 LKFS gate); choose another with --excerpt-at"
            )
    g_ref = 10 ** ((options.loudness_lufs - loud_ref) / 20)
    g_proc = 10 ** ((options.loudness_lufs - loud_proc) / 20)
    ceiling = 10 ** ((options.ceiling_dbfs - PEAK_MARGIN_DB) / 20)
    tp = max(true_peak(ref * g_ref), true_peak(proc * g_proc))
    reduction = min(1.0, ceiling / tp) if tp > 0 else 1.0
    clips = {
        "reference": (ref * g_ref * reduction).astype(np.float32),
        "processed": (proc * g_proc * reduction).astype(np.float32),
    }
    limit = np.float32(10 ** (options.ceiling_dbfs / 20))
    clip_facts = {}
    for name, data in clips.items():
        if np.max(np.abs(data)) > limit:  # cannot happen with the margin; never let it through
            data *= np.float32(limit / np.max(np.abs(data)) * 0.999)
        clips[name] = data
        target = out_dir / f"ab-{name}.wav"
        write_audio_atomic(target, data, fs, subtype="FLOAT", inputs=[input_path])
        paths.append(target)
        clip_facts[name] = {
            "file": target.name,
            "loudness_lufs": integrated_loudness(data.astype(float), fs),
            "true_peak_dbfs": _db(true_peak(data.astype(float))),
            "sample_peak_dbfs": _db(float(np.max(np.abs(data)))),
        }

    _, kw_method = k_weighting_sos(fs)
    lo3, hi3 = filt.edges_3db
    facts = {
        "tool": "audiobw",
        "version": __version__,
        "input": {"path": str(input_path), "sample_rate_hz": fs, "channels": nch, "frames": frames},
        "filter": {
            "label": spec.label(),
            "response": spec.response,
            "family": spec.family,
            "order": spec.order,
            "design_low_hz": spec.low_hz,
            "design_high_hz": spec.high_hz,
            "low_hz": lo3,
            "high_hz": hi3,
            "ripple_db": spec.ripple_db,
            "stopband_db": spec.stopband_db,
            "stage": spec.stage,
        },
        "chain": chain.to_json(),
        "seed": options.seed,
        "simulation": dict(sim.info),
        "clipping": {
            "samples": sim.clipping.total,
            "per_channel": [int(v) for v in sim.clipping.samples],
            "first_s": None if sim.clipping.first_frame is None else sim.clipping.first_frame / fs,
        },
        "chain_output": {
            "file": out_path.name,
            "subtype": "FLOAT",
            "peak_dbfs": _db(out_peak),
            "rms_dbfs": 10 * math.log10(2 * out_sumsq / max(written * nch, 1)) if out_sumsq > 0 else None,
        },
        "excerpt": {"start_s": start / fs, "stop_s": stop / fs, "why": why, "fade_s": FADE_S},
        "loudness": {
            "target_lufs": options.loudness_lufs,
            "method": f"ITU-R BS.1770-4 integrated, {kw_method}",
            "ceiling_dbfs": options.ceiling_dbfs,
            "ceiling_kind": "true peak (4x oversampled)",
            "ceiling_reduction_db": -_db(reduction) if reduction < 1 else 0.0,
        },
        "clips": clip_facts,
        "noise_check": noise_check(
            input_path,
            filt,
            chain,
            noise_ms=noise_sumsq / max(written * nch, 1),
            program_ms=program_sumsq / max(written * nch, 1),
        ),
        "trials": None,
        "caution": None,
    }
    from ..cautions import LISTENING_CAUTION

    facts["caution"] = LISTENING_CAUTION
    if options.trials:
        facts["trials"], trial_paths = _write_trials(out_dir, clips, fs, options, input_path)
        paths += trial_paths
    notes = out_dir / "render-notes.txt"
    write_text_atomic(notes, notes_text(facts), inputs=[input_path])
    meta = out_dir / "render.json"
    write_text_atomic(meta, json.dumps(_finite(facts), indent=2, allow_nan=False) + "\n", inputs=[input_path])
    return RenderResult(out_dir, paths + [notes, meta], facts)
