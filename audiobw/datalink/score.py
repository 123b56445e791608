"""The data-link figures of one candidate: the recorded stream through it, measured (:func:`measure_stream`),
beside the ideal pulse's (:func:`score_data`)."""

from __future__ import annotations

import math

import numpy as np

from ..errors import AudioFileError
from .pulse import average_ber, ber_from_q, complex_response, crossing_jitter_ui, eye_from_pulse, pulse_response
from .stream import DataProgram, RecordedStream

#: Trial sampling instants per unit interval in the measured eye.
PHASES_PER_UI = 32


def _tail_bits(y: np.ndarray, share: float = 1e-9) -> int:
    """Bits of the pulse response holding all but ``share`` of its energy."""
    e = np.cumsum(np.sum(y**2, axis=1))
    if e[-1] <= 0:
        return 1
    return int(np.searchsorted(e, (1.0 - share) * e[-1])) + 1


def filtered_stream(filt, stream: RecordedStream, pad_samples: int, upsample: int = 1) -> np.ndarray:
    """The recorded stream through ``filt``: one FFT, times H(f), inverse FFT (zero history).

    The stream is zero-padded by ``pad_samples`` so the circular convolution
    equals the linear one over the stream; ``upsample`` > 1 interpolates
    band-limited (zeros above fs/2) onto a grid that much finer.
    """
    from scipy import fft as sfft

    x = stream.samples_v
    n = sfft.next_fast_len(len(x) + pad_samples, real=True)
    spec = sfft.rfft(x, n)
    spec = spec * complex_response(filt, np.fft.rfftfreq(n, 1.0 / stream.fs_hz))
    if upsample > 1:
        wide = np.zeros(n * upsample // 2 + 1, dtype=complex)
        wide[: spec.size] = spec
        return sfft.irfft(wide, n * upsample) * upsample
    return sfft.irfft(spec, n)


def measure_stream(filt, program: DataProgram, chain_sigma_v: float, y: np.ndarray, k0: int, j0: int) -> dict:
    """Eye, Q and BER of the recorded stream through one candidate.

    Method (per case):

    1. The stream through the candidate (:func:`filtered_stream`), sampled at
       trial instants (i + φ + d)·T for bit i — φ the recovered boundary
       phase, d on a grid of :data:`PHASES_PER_UI` per UI over ±1 UI around
       the ideal pulse's best instant.
    2. Reference symbols aᵢ = ±1: the recording, smoothed by a zero-phase
       lowpass at the bit rate, sliced at the middle of its own bits.
    3. At each instant, least squares sᵢ = c + Σ_k h_k·a_{i−k} (3 precursors,
       postcursors as long as the candidate's pulse holds energy, at most 32):
       h₀ is the main cursor, the fitted values are the level means
       conditioned on the pattern, the residual rms σ_rec the recording's own
       noise at the decision point.  σ² = σ_rec² + σ_chain².
    4. ``q`` = (h₀ − Σ_{k≠0}|h_k|)/σ (the half-opening of the noiseless eye
       over the noise), best over the instants; ``ber`` the mean over the
       recorded bits of ½·erfc(mᵢ/(σ√2)) (mᵢ each bit's fitted margin), at
       its own best instant among the nine of highest Q; ``ber_worst`` =
       ½·erfc(q/√2).
    5. ``eye_fraction``: (min over the ones − max over the zeros) of the
       samples as they are (recorded noise included), best instant, over the
       unfiltered opening 2A — what an eye diagram of the output shows.
    """
    from scipy.special import erfc

    st = program.stream
    assert st is not None
    rate, fs = program.bit_rate_hz, st.fs_hz
    spb = fs / rate
    tail = min(_tail_bits(y), y.shape[0])
    pre = 3
    post = int(min(max(tail, 4), 48, max(4, (st.n_bits - pre) // 5)))
    up = max(1, math.ceil(16.0 / spb))
    centre = k0 + j0 / y.shape[1]
    d = centre + np.arange(-PHASES_PER_UI, PHASES_PER_UI + 1) / PHASES_PER_UI
    d = d[d >= 0]
    pad = int(math.ceil((max(tail, post) + d[-1] + 2) * spb))
    out = filtered_stream(filt, st, pad, up)
    n_bits = st.n_bits - 1
    a = st.symbols[:n_bits]
    # the case starts from rest: skip its settling (at most a quarter of the stream: a slow AC coupling's
    # tail lasts longer, and its start-up then counts as the baseline wander it is)
    first = max(post, min(tail, n_bits // 4))
    judged = np.arange(first, n_bits - pre)
    ones = a[judged] > 0
    if judged.size < 2 * (pre + post + 2) or ones.all() or not ones.any():
        raise AudioFileError(
            f"{st.name}: {judged.size} bits left to measure after the filter settles, "
            f"{int(ones.sum())} of them ones; accepted: a longer stream with both levels"
        )
    pos = (judged[:, None] + st.clock_phase_ui + d[None, :]) * spb * up
    samples = np.interp(pos, np.arange(out.size), out)  # (bits, instants)
    design_m = np.column_stack([a[judged - k] for k in range(-pre, post + 1)] + [np.ones(judged.size)])
    # normal equations: ±1 symbols of a stream with both levels make a well-conditioned Gram matrix
    # (a constant run would be singular; lstsq then), and this is ~50× faster than an SVD per case
    gram = design_m.T @ design_m
    rhs = design_m.T @ samples
    try:
        coef = np.linalg.solve(gram, rhs)
    except np.linalg.LinAlgError:
        coef = np.linalg.lstsq(design_m, samples, rcond=None)[0]
    dof = max(judged.size - design_m.shape[1], 1)
    # residual sum of squares of a least-squares fit: |s|² − coefᵀ·Aᵀs
    var_rec = np.maximum(np.sum(samples**2, axis=0) - np.sum(coef * rhs, axis=0), 0.0) / dof
    cursors = coef[:-1]
    half = cursors[pre] - (np.sum(np.abs(cursors), axis=0) - np.abs(cursors[pre]))
    sigma = np.sqrt(var_rec + chain_sigma_v**2)
    with np.errstate(divide="ignore", invalid="ignore"):
        q_all = np.where(half > 0, np.where(sigma > 0, half / sigma, np.inf), 0.0)
    iq = int(np.argmax(q_all))
    q = float(q_all[iq])
    # the average error rate at its own best instant, searched among the nine highest-Q instants
    near = np.argsort(-q_all, kind="stable")[:9]
    margins = (design_m[:, :-1] @ cursors[:, near]) * a[judged][:, None]
    if np.all(sigma[near] > 0):
        p = 0.5 * erfc(margins / (sigma[near][None, :] * math.sqrt(2.0)))
    else:
        p = np.where(margins > 0, 0.0, np.where(margins < 0, 1.0, 0.5))
    ber = float(np.min(p.mean(axis=0)))
    opening = samples[ones].min(axis=0) - samples[~ones].max(axis=0)
    ie = int(np.argmax(opening))
    eye = max(float(opening[ie]), 0.0) / (2.0 * program.amplitude_v)
    return {
        "eye_fraction": eye,
        "eye_opening_v": 2.0 * program.amplitude_v * eye,
        "sample_delay_ui": float(d[iq]),
        "q": q if math.isfinite(q) else None,
        "ber": ber,
        "ber_worst": ber_from_q(q) if q > 0 else 0.5,
        "stream_sigma_v": float(math.sqrt(var_rec[iq])),
    }


def score_data(filt, program: DataProgram, noise_sigma_v: float) -> dict:
    """The data-link metrics of one candidate (a plain mapping).

    ``noise_sigma_v`` is the chain's modelled noise at the decision point.
    With a recorded stream (``program.stream``) ``eye_fraction``, ``q``,
    ``ber``, ``ber_worst`` and ``sample_delay_ui`` are measured on it
    (:func:`measure_stream`); the ideal-pulse figures are always kept as
    ``eye_ideal``, ``q_ideal`` and ``ber_ideal``.
    """
    y = pulse_response(filt, program.bit_rate_hz)
    opening, k0, j0 = eye_from_pulse(y)
    eye = max(opening, 0.0)
    half_v = program.amplitude_v * eye
    q = half_v / noise_sigma_v if noise_sigma_v > 0 else math.inf
    ber_avg = average_ber(y, noise_sigma_v / program.amplitude_v)[0]
    row = {
        "eye_fraction": eye,
        "eye_opening_v": 2 * half_v,
        "sample_delay_ui": k0 + j0 / y.shape[1],
        "noise_sigma_v": noise_sigma_v,
        "q": q if math.isfinite(q) else None,
        # the average over the pattern at its best instant (what --max-ber tests) and the
        # peak-distortion bound (the worst pattern at the worst-case eye's instant)
        "ber": ber_avg,
        "ber_worst": ber_from_q(q) if eye > 0 else 0.5,
        "jitter_pp_ui": crossing_jitter_ui(y),
        "stream_sigma_v": 0.0,
        "eye_ideal": eye,
        "q_ideal": q if math.isfinite(q) else None,
        "ber_ideal": ber_avg,
    }
    if program.stream is not None:
        row.update(measure_stream(filt, program, noise_sigma_v, y, k0, j0))
    return row
