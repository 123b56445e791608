"""Render one chain: the simulated output, loudness-matched A/B clips, blind trials.

:func:`render_file` streams a program through :class:`audiobw.simulate.ChainSimulator`
and writes, into one folder:

* ``chain-output.wav`` — the chain's output at its true level (32-bit float,
  the input's rate and channels);
* ``ab-reference.wav`` / ``ab-processed.wav`` — an excerpt of the input
  (unfiltered, no added noise) and of the chain output, each with short fades,
  brought to the same BS.1770 integrated loudness (default −23 LUFS) and held
  under a true-peak ceiling (default −1 dBFS) by one common gain reduction;
* ``blind/trial-NN-first.wav`` / ``-second.wav`` and ``blind/answer-sheet.txt``
  with ``trial-key.json`` beside (not inside) the blind folder, when trials are asked;
* ``render-notes.txt`` (what was rendered, with the listening caution) and
  ``render.json`` (the same facts for programs).

Loudness (ITU-R BS.1770-4): K-weighting, 400 ms blocks with 75 % overlap,
absolute gate −70 LKFS, relative gate −10 LU.  At 48 kHz the K-weighting uses
the coefficients published in BS.1770-4 Annex 1, Tables 1 and 2.  At other
rates it uses the same two biquads re-derived for the rate from the
parameters that reproduce the published 48 kHz coefficients (shelf gain
3.99984 dB, Q 0.70718, 1681.97 Hz; highpass Q 0.50033, 38.1355 Hz; the set
pyloudnorm calls 'DeMan'): at 48 kHz that derivation agrees with the table to
better than 10⁻⁸ (tested).  Short clips: BS.1770 gates on 400 ms blocks, so a
clip (or a file) shorter than 0.4 s is refused rather than measured some
other way.

References
----------
.. [1] ITU-R BS.1770-4 (2015), *Algorithms to measure audio programme
   loudness and true-peak audio level*, Annex 1 (K-weighting, gating, eq. 1–7)
   and Annex 2 (true peak: 4× oversampling at 48 kHz).
.. [2] scipy.stats.binomtest (exact binomial test), SciPy reference guide.
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import __version__
from .audio import atomic_path, iter_blocks, open_info, open_wav_writer, write_audio_atomic, write_text_atomic
from .chain import Chain
from .errors import AudioFileError, OutputError, ParameterError
from .filters import FilterSpec, design, validate_spec

#: BS.1770-4 Annex 1, Table 1 (pre-filter, shelving) and Table 2 (RLB highpass), fs = 48 kHz.
K_WEIGHTING_48K_SOS = np.array([
    [1.53512485958697, -2.69169618940638, 1.19839281085285, 1.0, -1.69065929318241, 0.73248077421585],
    [1.0, -2.0, 1.0, 1.0, -1.99004745483398, 0.99007225036621],
])
#: Parameters that reproduce the 48 kHz table when re-derived at 48 kHz (see module notes).
_SHELF = dict(gain_db=3.99984385397, q=0.7071752369554193, fc_hz=1681.9744509555319)
_HIGHPASS = dict(q=0.5003270373253953, fc_hz=38.13547087613982)
GATE_BLOCK_S = 0.4
MIN_CLIP_S = GATE_BLOCK_S
FADE_S = 0.02
PEAK_MARGIN_DB = 0.02  # the ceiling is aimed at with this much room (float32 rounding, resampler)
DEFAULT_SEED = 1
KEY_FORMAT = "audiobw trial key 1"
CHOICES = ("first", "second")


# -- loudness and peaks -------------------------------------------------------

def k_weighting_sos(fs_hz: float) -> tuple[np.ndarray, str]:
    """The K-weighting as second-order sections for ``fs_hz``, and how it was obtained."""
    if fs_hz == 48000:
        return K_WEIGHTING_48K_SOS.copy(), "BS.1770-4 published 48 kHz coefficients"
    return k_weighting_derived_sos(fs_hz), f"BS.1770-4 K-weighting re-derived for {fs_hz:g} Hz"


def k_weighting_derived_sos(fs_hz: float) -> np.ndarray:
    """The two K-weighting biquads derived for ``fs_hz`` (bilinear, prewarped) from the shelf and
    highpass parameters that reproduce the published 48 kHz table."""
    k = math.tan(math.pi * _SHELF["fc_hz"] / fs_hz)
    vh = 10 ** (_SHELF["gain_db"] / 20.0)
    vb = vh ** 0.499666774155
    q = _SHELF["q"]
    a0 = 1.0 + k / q + k * k
    shelf = [(vh + vb * k / q + k * k) / a0, 2.0 * (k * k - vh) / a0, (vh - vb * k / q + k * k) / a0,
             1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / q + k * k) / a0]
    k = math.tan(math.pi * _HIGHPASS["fc_hz"] / fs_hz)
    q = _HIGHPASS["q"]
    a0 = 1.0 + k / q + k * k
    hp = [1.0, -2.0, 1.0, 1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / q + k * k) / a0]
    return np.array([shelf, hp])


def channel_weights(channels: int) -> np.ndarray:
    """BS.1770-4 channel weights G_i: 1.0 for L, R, C; 1.41 for the two surrounds (channels 4, 5)."""
    g = np.ones(channels)
    g[3:5] = 1.41
    return g


def integrated_loudness(x: np.ndarray, fs_hz: float) -> float:
    """BS.1770-4 gated integrated loudness in LUFS (−inf for silence).

    Parameters
    ----------
    x : ndarray, (frames,) or (frames, channels)
        Samples, full scale 1.0; at least 0.4 s.
    fs_hz : float
    """
    from scipy import signal

    x = np.asarray(x, float)
    if x.ndim == 1:
        x = x[:, None]
    n_block = int(round(GATE_BLOCK_S * fs_hz))
    if x.shape[0] < n_block:
        raise ParameterError(f"loudness: {x.shape[0] / fs_hz:.3f} s is shorter than the 0.4 s BS.1770 "
                             "gating block; accepted: clips of at least 0.4 s")
    sos, _ = k_weighting_sos(fs_hz)
    y = signal.sosfilt(sos, x, axis=0)
    step = n_block // 4  # 75 % overlap
    n_blocks = (x.shape[0] - n_block) // step + 1
    csum = np.concatenate([np.zeros((1, x.shape[1])), np.cumsum(y**2, axis=0)])
    starts = np.arange(n_blocks) * step
    z = (csum[starts + n_block] - csum[starts]) / n_block          # eq. 1, per block and channel
    power = z @ channel_weights(x.shape[1])
    with np.errstate(divide="ignore"):
        lj = -0.691 + 10 * np.log10(power)                            # eq. 4
    gated = lj >= -70.0                                               # absolute gate
    if not np.any(gated):
        return -math.inf
    gamma_r = -0.691 + 10 * math.log10(float(np.mean(power[gated]))) - 10.0   # eq. 6
    keep = gated & (lj > gamma_r)
    return -0.691 + 10 * math.log10(float(np.mean(power[keep])))      # eq. 7


def true_peak(x: np.ndarray) -> float:
    """Peak magnitude of ``x`` and of its 4× oversampled form (BS.1770-4 Annex 2), linear."""
    from scipy import signal

    x = np.asarray(x, float)
    if x.size == 0:
        return 0.0
    up = signal.resample_poly(x, 4, 1, axis=0)
    return float(max(np.max(np.abs(x)), np.max(np.abs(up))))


def _db(x: float) -> float:
    return 20 * math.log10(x) if x > 0 else -math.inf


# -- options and results --------------------------------------------------------

@dataclass(frozen=True)
class RenderOptions:
    """What to render besides the chain output.

    Parameters
    ----------
    loudness_lufs : float, -60 <= loudness_lufs <= -10
        Integrated loudness of each A/B clip before the ceiling acts.
    ceiling_dbfs : float, <= 0
        True-peak ceiling of the clips, dBFS.
    excerpt_s : float, >= 0.4
        Clip length in s (the whole file when it is shorter).
    excerpt_start_s : float or None
        Start of the clip in s; None: where the input has most power in the
        band the filter removes.
    trials : int, 0 <= trials <= 200
        Pairs in the blind trial set.
    seed : int
        Seeds the chain's noise and dither and the trial order.
    """

    loudness_lufs: float = -23.0
    ceiling_dbfs: float = -1.0
    excerpt_s: float = 12.0
    excerpt_start_s: float | None = None
    trials: int = 0
    seed: int = DEFAULT_SEED

    def __post_init__(self):
        checks = [
            ("--loudness", self.loudness_lufs, -60.0 <= self.loudness_lufs <= -10.0,
             "-60 to -10 LUFS (a moderate listening level; -23LUFS is the default)"),
            ("--ceiling", self.ceiling_dbfs, -60.0 <= self.ceiling_dbfs <= 0.0, "-60 to 0 dBFS"),
            ("--excerpt", self.excerpt_s, MIN_CLIP_S <= self.excerpt_s <= 600.0,
             "0.4 s (one BS.1770 gating block) to 600 s"),
            ("--trials", self.trials, 0 <= self.trials <= 200 and int(self.trials) == self.trials,
             "a whole number 0 to 200"),
        ]
        if self.excerpt_start_s is not None:
            checks.append(("--excerpt-at", self.excerpt_start_s, self.excerpt_start_s >= 0, "a time >= 0 s"))
        for opt, value, ok, accepted in checks:
            if not ok:
                raise ParameterError(f"{opt}: {value!r} is out of range; accepted: {accepted}")


@dataclass
class RenderResult:
    """What :func:`render_file` wrote and measured."""

    out_dir: Path
    paths: list
    facts: dict = field(default_factory=dict)


# -- the excerpt ------------------------------------------------------------------

def removed_band_profile(path, filt, fs_hz: float, *, frame_s: float = 0.1, progress=None, expected: int = 0):
    """Per-frame input power in the band the filter removes, and the program's levels.

    Each frame (``frame_s``, Hann window) contributes Σ|X(f)|²·(1 − |H(f)|²)
    over channels.  Returns ``(profile, frames, mean_square)``.
    """
    n = max(16, int(round(frame_s * fs_hz)))
    win = np.hanning(n)
    f = np.fft.rfftfreq(n, 1.0 / fs_hz)
    removed = np.clip(1.0 - filt.power_response(f), 0.0, 1.0)
    profile, carry, frames, sumsq = [], None, 0, None
    for block in iter_blocks(path):
        frames += block.shape[0]
        sumsq = np.einsum("ij,ij->j", block, block) + (0 if sumsq is None else sumsq)
        buf = block if carry is None else np.concatenate([carry, block])
        k = buf.shape[0] // n
        if k:
            seg = buf[:k * n].reshape(k, n, -1) * win[None, :, None]
            spec = np.fft.rfft(seg, axis=1)
            profile.extend(np.einsum("kfc,f->k", spec.real**2 + spec.imag**2, removed))
        carry = buf[k * n:]
        if progress is not None:
            progress(frames, max(expected, frames))
    return np.asarray(profile), frames, (sumsq / max(frames, 1)) if sumsq is not None else None, n


def choose_excerpt(profile: np.ndarray, frame_len: int, frames: int, length: int) -> int:
    """Start frame of the ``length``-sample stretch with the most removed-band power."""
    if length >= frames or profile.size == 0:
        return 0
    k = max(1, int(round(length / frame_len)))
    if profile.size <= k:
        return 0
    sums = np.convolve(profile, np.ones(k), mode="valid")
    start = int(np.argmax(sums)) * frame_len
    return min(start, frames - length)


def _fade(x: np.ndarray, fs_hz: float) -> np.ndarray:
    n = min(int(round(FADE_S * fs_hz)), x.shape[0] // 4)
    if n < 2:
        return x
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(n) / n)
    y = x.copy()
    y[:n] *= ramp[:, None]
    y[-n:] *= ramp[::-1, None]
    return y


# -- the render -------------------------------------------------------------------

def _chain_text(c: Chain) -> str:
    return (f"Rs {c.source_ohms:g} ohm at {c.temperature_k:g} K; gain {c.gain_db:g} dB; e_n {c.en_v_rthz:.3g} V/rtHz; "
            f"i_n {c.in_a_rthz:.3g} A/rtHz; h2 {'none' if c.h2_db is None else f'{c.h2_db:g} dB'}; "
            f"h3 {'none' if c.h3_db is None else f'{c.h3_db:g} dB'}; amplifier bandwidth "
            f"{'unlimited' if c.amp_bandwidth_hz is None else f'{c.amp_bandwidth_hz:g} Hz'}; {c.bits} bits; "
            f"full scale {c.full_scale_vrms:g} V rms; dither {c.dither}; filter stage {c.stage}; "
            f"anti-alias {c.anti_alias}; input gain {c.input_gain_db:.3g} dB"
            + (f"; e_n table {c.en_table_file or '(no file name)'}, {len(c.en_table)} rows, its top row the e_n above"
               if c.en_table is not None else "")
            + (f"; {WHITE_ONLY}" if c.has_flicker else ""))


#: what the time-domain render leaves out of the noise it synthesises
WHITE_ONLY = ("the render synthesises the white noise only: the 1/f part and the excess of an e_n table over its "
              "top row are in the sweep estimate, not in the audio")


class _ProgramLevel:
    """The little an :meth:`audiobw.settings.Settings.chain_for` needs: the program's rms."""

    def __init__(self, mean_square):
        ms = float(np.mean(mean_square))
        self.rms_dbfs = 10 * math.log10(2 * ms) if ms > 0 else -math.inf


def render_file(input_path, spec: FilterSpec, chain, out_dir, options: RenderOptions | None = None, *,
                progress=None) -> RenderResult:
    """Render into ``out_dir`` while holding its output lock (see :func:`_render_file`)."""
    from .audio import output_lock

    out_dir = Path(out_dir)
    with output_lock(out_dir):
        return _render_file(input_path, spec, chain, out_dir, options, progress=progress)


def _render_file(input_path, spec: FilterSpec, chain, out_dir, options: RenderOptions | None = None, *,
                 progress=None) -> RenderResult:
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
    profile, frames, mean_square, frame_len = removed_band_profile(input_path, filt, fs, progress=progress,
                                                                   expected=expected)
    if frames < MIN_CLIP_S * fs:
        raise AudioFileError(f"{input_path}: {frames / fs:.3f} s of audio is shorter than the 0.4 s BS.1770 "
                             "gating block needed to loudness-match clips; accepted: at least 0.4 s")
    if mean_square is None or not np.any(mean_square > 0):
        raise AudioFileError(f"{input_path}: digital silence (every sample is 0); nothing to render")
    chain = chain.chain_for(_ProgramLevel(mean_square)) if not isinstance(chain, Chain) else chain
    if chain.stage != spec.stage:
        raise ParameterError(f"--stage: the filter is {spec.stage} but the chain is {chain.stage}")

    length = min(int(round(options.excerpt_s * fs)), frames)
    if options.excerpt_start_s is not None:
        start = int(round(options.excerpt_start_s * fs))
        if start + int(MIN_CLIP_S * fs) > frames:
            raise ParameterError(f"--excerpt-at: {options.excerpt_start_s:g} s leaves less than 0.4 s of the "
                                 f"{frames / fs:.3f} s file; accepted: 0 to {max(frames / fs - MIN_CLIP_S, 0):.3f} s")
        length = min(length, frames - start)
        why = "given with --excerpt-at"
    else:
        start = choose_excerpt(profile, frame_len, frames, length)
        why = ("the whole file" if length >= frames else
               "the stretch with the most input power in the band the filter removes")
    stop = start + length

    from .simulate import ChainSimulator

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
            raise AudioFileError(f"{input_path}: the {name} excerpt {start / fs:.2f}-{stop / fs:.2f} s is silent "
                                 "(below the -70 LKFS gate); choose another with --excerpt-at")
    g_ref = 10 ** ((options.loudness_lufs - loud_ref) / 20)
    g_proc = 10 ** ((options.loudness_lufs - loud_proc) / 20)
    ceiling = 10 ** ((options.ceiling_dbfs - PEAK_MARGIN_DB) / 20)
    tp = max(true_peak(ref * g_ref), true_peak(proc * g_proc))
    reduction = min(1.0, ceiling / tp) if tp > 0 else 1.0
    clips = {"reference": (ref * g_ref * reduction).astype(np.float32),
             "processed": (proc * g_proc * reduction).astype(np.float32)}
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
            "file": target.name, "loudness_lufs": integrated_loudness(data.astype(float), fs),
            "true_peak_dbfs": _db(true_peak(data.astype(float))),
            "sample_peak_dbfs": _db(float(np.max(np.abs(data)))),
        }

    _, kw_method = k_weighting_sos(fs)
    lo3, hi3 = filt.edges_3db
    facts = {
        "tool": "audiobw", "version": __version__,
        "input": {"path": str(input_path), "sample_rate_hz": fs, "channels": nch, "frames": frames},
        "filter": {"label": spec.label(), "response": spec.response, "family": spec.family, "order": spec.order,
                   "design_low_hz": spec.low_hz, "design_high_hz": spec.high_hz, "low_hz": lo3, "high_hz": hi3,
                   "ripple_db": spec.ripple_db, "stopband_db": spec.stopband_db, "stage": spec.stage},
        "chain": chain.to_json(),
        "seed": options.seed,
        "simulation": dict(sim.info),
        "clipping": {"samples": sim.clipping.total, "per_channel": [int(v) for v in sim.clipping.samples],
                     "first_s": None if sim.clipping.first_frame is None else sim.clipping.first_frame / fs},
        "chain_output": {"file": out_path.name, "subtype": "FLOAT", "peak_dbfs": _db(out_peak),
                         "rms_dbfs": 10 * math.log10(2 * out_sumsq / max(written * nch, 1)) if out_sumsq > 0
                         else None},
        "excerpt": {"start_s": start / fs, "stop_s": stop / fs, "why": why, "fade_s": FADE_S},
        "loudness": {"target_lufs": options.loudness_lufs, "method": f"ITU-R BS.1770-4 integrated, {kw_method}",
                     "ceiling_dbfs": options.ceiling_dbfs, "ceiling_kind": "true peak (4x oversampled)",
                     "ceiling_reduction_db": -_db(reduction) if reduction < 1 else 0.0},
        "clips": clip_facts,
        "noise_check": noise_check(input_path, filt, chain, noise_ms=noise_sumsq / max(written * nch, 1),
                                   program_ms=program_sumsq / max(written * nch, 1)),
        "trials": None,
        "caution": None,
    }
    from .cautions import LISTENING_CAUTION

    facts["caution"] = LISTENING_CAUTION
    if options.trials:
        facts["trials"], trial_paths = _write_trials(out_dir, clips, fs, options, input_path)
        paths += trial_paths
    notes = out_dir / "render-notes.txt"
    write_text_atomic(notes, notes_text(facts), inputs=[input_path])
    meta = out_dir / "render.json"
    write_text_atomic(meta, json.dumps(_finite(facts), indent=2, allow_nan=False) + "\n", inputs=[input_path])
    return RenderResult(out_dir, paths + [notes, meta], facts)


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
    from .metrics import Meter, Scorer
    from .spectrum import analyse

    row = Scorer(analyse(input_path), chain, Meter()).score(filt)
    volts = math.sqrt(2.0) * chain.full_scale_vrms  # an output sample unit at the converter, V (AES17)
    measured_v = math.sqrt(noise_ms) * volts if noise_ms > 0 else None
    measured_snr = 10 * math.log10(program_ms / noise_ms) if noise_ms > 0 and program_ms > 0 else None
    est_v, est_snr = row.get("noise_vrms"), row.get("snr_db")

    def apart(a, b, power_ratio):
        if a is None or b is None or not (a > 0 and b > 0):
            return None
        return abs(20 * math.log10(a / b)) if power_ratio else abs(a - b)

    return {"method": "the same chain and seed rendered on silence (the noise) and on the program "
                      "(output minus noise: the program), over the whole file; estimate: the sweep's "
                      "fast path on the same file, meter 0 to fs/2",
            "measured_noise_vrms": measured_v, "estimate_noise_vrms": est_v,
            "noise_apart_db": apart(measured_v, est_v, True),
            "measured_snr_db": measured_snr, "estimate_snr_db": est_snr,
            "snr_apart_db": apart(measured_snr, est_snr, False)}


def noise_check_lines(check: dict) -> list[str]:
    """'noise: measured 15.1 µV rms, sweep estimate 15.03 µV rms (0.04 dB apart)' and the SNR line."""
    from .units import format_quantity

    def v(x):
        return "n/a" if x is None else format_quantity(x, "V rms")

    def db(x):
        return "n/a" if x is None else f"{x:.2f} dB"

    def gap(x):
        return "" if x is None else f" ({x:.2f} dB apart)"

    return [f"noise: measured {v(check['measured_noise_vrms'])}, sweep estimate "
            f"{v(check['estimate_noise_vrms'])}{gap(check['noise_apart_db'])}",
            f"SNR: measured {db(check['measured_snr_db'])}, sweep estimate "
            f"{db(check['estimate_snr_db'])}{gap(check['snr_apart_db'])}"]


def _finite(x):
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, dict):
        return {k: _finite(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_finite(v) for v in x]
    return x


def _write_trials(out_dir: Path, clips: dict, fs: int, options: RenderOptions, input_path):
    from .cautions import LISTENING_CAUTION

    rng = np.random.default_rng(np.random.SeedSequence([int(options.seed), 0x7269]))
    blind = out_dir / "blind"
    rows, paths = [], []
    width = max(2, len(str(options.trials)))
    sheet = ["# audiobw blind trials: for each pair, write which file is the processed chain output,",
             "# 'first' or 'second', after the trial number. Lines starting with # are ignored.",
             "# " + LISTENING_CAUTION, ""]
    for i in range(1, options.trials + 1):
        processed_first = bool(rng.integers(0, 2))
        order = ("processed", "reference") if processed_first else ("reference", "processed")
        names = {}
        for slot, which in zip(CHOICES, order):
            target = blind / f"trial-{i:0{width}d}-{slot}.wav"
            write_audio_atomic(target, clips[which], fs, subtype="FLOAT", inputs=[input_path])
            paths.append(target)
            names[slot] = target.name
        rows.append({"trial": i, "first": order[0], "second": order[1],
                     "processed": CHOICES[order.index("processed")], "files": names})
        sheet.append(f"{i:0{width}d} ")
    key = {"format": KEY_FORMAT,
           "question": "In each pair, which file is the processed chain output: first or second?",
           "seed": options.seed, "trials": rows}
    key_path = out_dir / "trial-key.json"
    write_text_atomic(key_path, json.dumps(key, indent=2) + "\n", inputs=[input_path])
    sheet_path = blind / "answer-sheet.txt"
    write_text_atomic(sheet_path, "\n".join(sheet) + "\n", inputs=[input_path])
    return {"count": options.trials, "folder": "blind", "key": key_path.name,
            "answer_sheet": f"blind/{sheet_path.name}"}, paths + [key_path, sheet_path]


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
        f"Chain: {_chain_text(Chain(**c))}",
        f"Seed: {facts['seed']} (noise, dither and trial order)",
        "Converter clipping: " + ("none" if cl["samples"] == 0 else
                                  f"{cl['samples']} samples clipped, first at {cl['first_s']:.3f} s"),
        f"chain-output.wav: the chain output at its true level, 32-bit float; peak "
        f"{facts['chain_output']['peak_dbfs']:.2f} dBFS",
        f"Excerpt: {facts['excerpt']['start_s']:.3f} s to {facts['excerpt']['stop_s']:.3f} s "
        f"({facts['excerpt']['why']}), {facts['excerpt']['fade_s'] * 1000:.0f} ms fades",
        f"Loudness: {facts['loudness']['method']}; target {facts['loudness']['target_lufs']:g} LUFS; "
        f"ceiling {facts['loudness']['ceiling_dbfs']:g} dBFS {facts['loudness']['ceiling_kind']}"
        + (f"; both clips lowered {facts['loudness']['ceiling_reduction_db']:.2f} dB to respect it"
           if facts["loudness"]["ceiling_reduction_db"] > 0 else ""),
    ]
    for clip in facts["clips"].values():
        lines.append(f"  {clip['file']}: {clip['loudness_lufs']:.2f} LUFS, true peak "
                     f"{clip['true_peak_dbfs']:.2f} dBFS, sample peak {clip['sample_peak_dbfs']:.2f} dBFS")
    if facts.get("noise_check"):
        lines.append("Measured on this render (" + facts["noise_check"]["method"] + "):")
        lines += ["  " + line for line in noise_check_lines(facts["noise_check"])]
    t = facts.get("trials")
    if t:
        lines.append(f"Blind trials: {t['count']} pairs in {t['folder']}/ (answer sheet {t['answer_sheet']}); "
                     f"the answer key is {t['key']} - keep it away from the listeners; score with "
                     f"`audiobw trials-score {t['key']} ANSWERS`")
    lines += ["", facts["caution"], ""]
    return "\n".join(lines)


# -- sweep --render -------------------------------------------------------------------

def render_sweep(doc: dict, input_path, settings, out_dir, options: RenderOptions | None = None, *,
                 progress=None) -> list[Path]:
    """Render a sweep's chosen case and the next-narrower one (which fails a target).

    Parameters
    ----------
    doc : dict
        The sweep.json mapping (docs/sweep-json.md).
    input_path : path-like
        The program the sweep analysed.
    settings : audiobw.settings.Settings
        Kept for the caller's convenience; the chain comes from ``doc["chain"]``,
        where ``--input-level`` is already resolved.
    out_dir : path-like
        The cases go to ``out_dir/render-chosen`` and ``out_dir/render-narrower``.

    Returns
    -------
    list of pathlib.Path
        Every file written.
    """
    choice = doc.get("choice")
    if not choice:
        raise ParameterError("--render: no case meets the targets, so there is no chosen case to render; "
                             "accepted: a sweep with a passing case")
    fs = int(doc["input"]["sample_rate_hz"])
    chain = Chain(**{k: v for k, v in doc["chain"].items() if k in Chain.field_names()})
    by_id = {c["id"]: c for c in doc["cases"]}
    out_dir = Path(out_dir)
    paths = []
    for folder, case_id in (("render-chosen", choice["case"]), ("render-narrower", choice.get("next_narrower"))):
        if case_id is None:
            continue
        case = by_id[case_id]
        spec = FilterSpec(case["response"], case["family"], int(case["order"]), case["design_low_hz"],
                          case["design_high_hz"], doc["grid"]["ripple_db"], doc["grid"]["stopband_db"],
                          chain.stage, fs)
        result = render_file(input_path, spec, chain, out_dir / folder, options, progress=progress)
        paths.extend(result.paths)
        if "data" in doc:  # a data program: the eye diagram of the simulated output
            from .report.eye import eye_diagram

            paths.append(eye_diagram(out_dir / folder / "chain-output.wav", doc["data"]["bit_rate_hz"],
                                     out_dir / folder / "eye.png", sample_delay_ui=_instant(doc, case)))
    return paths


def _instant(doc: dict, case: dict) -> float | None:
    """The best sampling instant on the eye diagram's grid (bit boundaries at whole UIs from the first
    sample): the sweep's instant after the recording's recovered boundary, plus that boundary's phase."""
    delay = case.get("sample_delay_ui")
    if delay is None:
        return None
    return float(delay) + float(doc.get("data", {}).get("clock_phase_ui") or 0.0)


# -- scoring blind trials ----------------------------------------------------------------

_TRIAL_RE = re.compile(r"[0-9]{1,6}")  # ASCII digits only: str.isdigit() takes '²'


def _trial_list(known) -> str:
    k = sorted(known)
    if k and k == list(range(k[0], k[-1] + 1)):
        return f"{k[0]} to {k[-1]}"
    return ", ".join(map(str, k[:20])) + (", ..." if len(k) > 20 else "")


def read_key(path) -> dict:
    """Read and check a ``trial-key.json``."""
    p = Path(path)
    try:
        key = json.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ParameterError(f"KEY: {str(p)!r}: no such file") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ParameterError(f"KEY: {str(p)!r}: not a readable trial key ({exc})") from None
    if not isinstance(key, dict) or key.get("format") != KEY_FORMAT or not isinstance(key.get("trials"), list):
        raise ParameterError(f"KEY: {str(p)!r} is not an audiobw trial key; accepted: the trial-key.json "
                             "that `audiobw render --trials N` writes")
    seen = set()
    for i, t in enumerate(key["trials"]):
        n = t.get("trial") if isinstance(t, dict) else None
        if (not isinstance(t, dict) or not isinstance(n, int) or isinstance(n, bool) or not 1 <= n <= 100_000
                or n in seen or t.get("processed") not in ("first", "second")):
            raise ParameterError(f"KEY: {str(p)!r}: trials[{i}] = {str(t)[:80]!r} is not a trial entry; accepted: "
                                 "{\"trial\": a whole number from 1, unique, \"processed\": \"first\" or \"second\"}")
        seen.add(n)
    return key


def read_answers(path, n_trials) -> dict[int, str]:
    """Read an answer sheet: lines ``NN first|second`` (or ``1``/``2``); ``#`` starts a comment.

    ``n_trials`` is the number of trials (numbered 1..n) or the set of trial numbers in the key.
    """
    known = set(range(1, n_trials + 1)) if isinstance(n_trials, int) else set(n_trials)
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ParameterError(f"ANSWERS: {str(p)!r}: no such file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ParameterError(f"ANSWERS: {str(p)!r}: cannot read ({exc})") from None
    answers: dict[int, str] = {}
    words = {"first": "first", "second": "second", "1": "first", "2": "second"}
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("#", 1)[0].replace(":", " ").strip()
        if not line:
            continue
        parts = line.split()
        if len(parts) == 1 and _TRIAL_RE.fullmatch(parts[0]):
            continue  # a trial left unanswered on the sheet
        if len(parts) != 2 or not _TRIAL_RE.fullmatch(parts[0]) or parts[1].lower() not in words:
            raise ParameterError(f"ANSWERS: {p} line {lineno}: {raw.strip()!r}; accepted: a trial number and "
                                 "'first' or 'second' (or 1 or 2), e.g. '03 second'")
        trial = int(parts[0])
        if trial not in known:
            raise ParameterError(f"ANSWERS: {p} line {lineno}: trial {trial} is not in the key; accepted: "
                                 f"{_trial_list(known)}")
        if trial in answers:
            raise ParameterError(f"ANSWERS: {p} line {lineno}: trial {trial} is answered twice")
        answers[trial] = words[parts[1].lower()]
    return answers


def score_trials(key_path, answers_path, *, alpha: float = 0.05) -> dict:
    """Score a blind trial set.

    The listener names the processed clip of each pair; under the null
    hypothesis (no audible difference) each answer is right with probability
    1/2, so the count of right answers is binomial and the one-sided p-value
    is P(X >= correct) (scipy.stats.binomtest, alternative='greater').
    """
    from scipy import stats

    key = read_key(key_path)
    truth = {int(t["trial"]): t["processed"] for t in key["trials"]}
    answers = read_answers(answers_path, set(truth))
    if not answers:
        raise ParameterError(f"ANSWERS: {answers_path}: no trial is answered; accepted: lines such as '01 first'")
    correct = sum(1 for t, a in answers.items() if truth[t] == a)
    n = len(answers)
    p = float(stats.binomtest(correct, n, 0.5, alternative="greater").pvalue)
    if p <= alpha:
        reading = (f"Listeners told them apart more often than chance: {correct} of {n} right, "
                   f"p = {p:.3g} (one-sided binomial, chance = 1/2).")
    else:
        reading = (f"{correct} of {n} right, p = {p:.3g}: not more often than chance at the {alpha:g} level. "
                   "This does not show the two sound the same; more trials make a more sensitive test.")
    if n < 5:
        reading += f" With {n} trials even a perfect score cannot reach p < 0.05 (it needs at least 5)."
    return {"trials": len(truth), "answered": n, "correct": correct, "p_value": p,
            "unanswered": sorted(set(truth) - set(answers)), "reading": reading}
