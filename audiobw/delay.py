"""The delay search: the time shift τ that best aligns a case's output with the program.

max_τ Re Σ S·H·e^{j2πfτ} on a uniform grid from 0 Hz: one zero-padded inverse
FFT for the coarse grid (:func:`coarse_cross`, shared per case by every search
on the same cross spectrum), then a parabola and a Newton step on the exact
cross term (:func:`best_delay`).  Used by the SER of :class:`audiobw.metrics.Scorer`
and the perceptual scorer.
"""

from __future__ import annotations

import math

import numpy as np
from numpy import fft as sfft  # the same pocketfft as scipy.fft, without importing scipy (about 0.3 s of start-up)

#: Oversampling of the coarse delay search (inverse FFT zero-padded this many
#: times); a parabola and a Newton step on the exact cross term refine the peak.
DELAY_OVERSAMPLE = 2
#: A coarse sample is a candidate for the global peak when it is a local maximum within B of the
#: highest, B = ½·(h/2)²·Σ|c_k|·ω_k² (h the coarse step; |g''| ≤ Σ|c_k|·ω_k², and the true peak
#: lies within h/2 of a sample).  A narrowband program makes the cross term a carrier under a
#: slow envelope: at a half-sample step its crests are sampled up to 9 % low at 13 kHz, more than
#: the envelope falls from one carrier cycle to the next, so the highest sample can sit on the
#: wrong cycle (SER read up to 44 dB low before every candidate was refined).
MAX_CANDIDATES = 16
#: With more candidates than MAX_CANDIDATES the coarse grid is made this many times finer (B falls
#: by its square), up to MAX_OVERSAMPLE; what is left then is refined whatever its number.
FINER = 4
MAX_OVERSAMPLE = 32
#: Refinement pairs (candidate delays) whose phasors are formed at once.
PHASOR_CHUNK = 64


#: Block length of :func:`uniform_phasor` (e^{jθk} as an outer product of two short tables).
PHASOR_BLOCK = 128


def uniform_phasor(n: int, step_rad: float) -> np.ndarray:
    """e^{j·k·step_rad} for k = 0 … n − 1 (complex, shape (n,)).

    Written k = q·B + r, it is e^{jqBθ}·e^{jrθ}: an outer product of two tables
    of about √n complex exponentials, each correctly rounded, so every value is
    within a few units in the last place of ``np.exp(1j * k * step_rad)`` at a
    tenth of its cost (a grid of 8193 bins: 129 + 128 exponentials).
    """
    b = PHASOR_BLOCK
    q = -(-n // b)
    hi = np.exp(1j * (step_rad * b) * np.arange(q))
    lo = np.exp(1j * step_rad * np.arange(b))
    return np.multiply.outer(hi, lo).ravel()[:n]


def uniform_phasors(n: int, steps_rad) -> np.ndarray:
    """:func:`uniform_phasor` for each of ``steps_rad``, one row each (shape (steps, n))."""
    b = PHASOR_BLOCK
    q = -(-n // b)
    steps = np.asarray(steps_rad, dtype=float)
    hi = np.exp(1j * (steps * b)[:, None] * np.arange(q))
    lo = np.exp(1j * steps[:, None] * np.arange(b))
    return (hi[:, :, None] * lo[:, None, :]).reshape(steps.size, q * b)[:, :n]


def _check_uniform(f: np.ndarray) -> float:
    df = f[1] - f[0]
    if f[0] != 0.0 or abs(f[-1] - df * (f.size - 1)) > 1e-9 * f[-1]:
        raise ValueError("best_delay needs a uniform frequency grid starting at 0 Hz")
    return float(df)


def _unpadded_size(n_bins: int) -> int:
    """The inverse FFT length of ``n_bins`` bins from 0 Hz before zero-padding (a power of two)."""
    return 1 << int(math.ceil(math.log2(2 * (n_bins - 1))))


def coarse_cross(c: np.ndarray, f: np.ndarray, oversample: int = DELAY_OVERSAMPLE) -> tuple[np.ndarray, float]:
    """(g, step_s): Re Σ c_k e^{j2π f_k τ} on the coarse delay grid τ = n·step_s (one inverse FFT;
    ``c`` may hold one cross spectrum per row, along its last axis).

    Computed once per case and shared by every delay search on the same cross
    spectrum ``c`` (SER's and the perceptual scorer's: :func:`_delay_cross` with
    ``coarse=``).  ``f``: a uniform grid from 0 Hz with at least 2 bins.
    """
    df = _check_uniform(f)
    n_fft = oversample * _unpadded_size(f.size)
    # Re Σ c_k e^{j2π k df τ} at τ = n/(n_fft·df), n = 0 … n_fft − 1 (circular in 1/df):
    # a real inverse FFT counts every bin but DC twice, so DC is doubled and the result halved
    # (the scale n_fft/2 is applied to the bins, a quarter of the samples)
    d = c * (n_fft / 2.0)
    d[..., 0] *= 2.0
    g = sfft.irfft(d, n_fft)
    return g, 1.0 / (n_fft * df)


def _delay_cross(
    c: np.ndarray, f: np.ndarray, max_delay_s: float | None = None, coarse: tuple[np.ndarray, float] | None = None
) -> tuple[float, float]:
    """(τ, max_τ Re Σ c_k e^{j2π f_k τ}) for a uniform grid f from 0 Hz (see :func:`best_delay`).

    τ is searched in ±1/(2·df), or in 0 … ``max_delay_s`` when that is given.
    ``coarse``: :func:`coarse_cross` of the same ``c`` and ``f``, when already computed.
    One row of :func:`_delay_cross_many`.
    """
    taus, values = _delay_cross_many(np.asarray(c)[None, :], f, [max_delay_s], [coarse])
    return float(taus[0]), float(values[0])


def _window_stop(max_delay_s: float, step_s: float, n_fft: int) -> int:
    """End (exclusive) of the causal search window 0 … ``max_delay_s`` on the coarse grid."""
    return max(3, min(n_fft // 2, int(math.ceil(max_delay_s / step_s)) + 2))


def _candidates(g: np.ndarray, stop: int | None, bound: float) -> np.ndarray:
    """Coarse samples that may hold the global peak: the highest (first), then every other local
    maximum (circular neighbours) within ``bound`` of it; in ``g[:stop]`` when ``stop`` is given."""
    region = g if stop is None else g[:stop]
    n0 = int(np.argmax(region))
    idx = np.flatnonzero(region >= region[n0] - bound)
    if idx.size > 1:
        top = g[idx]
        idx = idx[(idx != n0) & (top >= g[idx - 1]) & (top >= g[(idx + 1) % g.size])]
        return np.concatenate(([n0], idx))
    return np.array([n0])


def _delay_cross_many(
    c: np.ndarray, f: np.ndarray, max_delays: list, coarse: list, peaks: list | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_delay_cross` of each row of ``c`` (cross spectra, cases × bins), with its own
    ``max_delays[i]`` and ``coarse[i]``; the refinement's phasors and sums of all rows at once.
    ``peaks``, when given, receives for each row ``(n, τ₀)``: the coarse peak's index and its
    parabola's delay (None where nothing was searched, or where more than one coarse peak was
    refined), for :func:`windowed_delay_known`.

    Every coarse peak that may be the global one (:data:`MAX_CANDIDATES`) is refined, and the
    highest refined value wins; a program whose cross term has one such peak (any broadband
    program) takes exactly the one refinement it always took.
    """
    n_rows = c.shape[0]
    taus, values = np.zeros(n_rows), np.zeros(n_rows)
    # the refinement's pairs: row, coarse step (s), parabola's delay (s), coarse index
    p_row: list[int] = []
    p_step: list[float] = []
    p_tau: list[float] = []
    p_n: list[int] = []
    single = np.zeros(n_rows, dtype=bool)
    if peaks is not None:
        peaks[:] = [None] * n_rows
    om = 2.0 * np.pi * f
    curvature = None
    for i in range(n_rows):
        ci = c[i]
        if f.size < 2 or (coarse[i] is None and not ci.any()):  # a given coarse search: a row with power
            values[i] = float(np.sum(ci.real))
            continue
        g, step_s = coarse_cross(ci, f) if coarse[i] is None else coarse[i]
        max_delay_s = max_delays[i]
        if curvature is None:
            # Σ|c_k|·ω_k² of every row: |g''| never exceeds it (no matrix product: BLAS threads)
            curvature = (np.abs(c) * (om * om)).sum(axis=1)
        oversample = first = g.size // _unpadded_size(f.size)
        while True:
            n_fft = g.size
            # a causal window 0 … max_delay_s: a tonal program makes the cross term nearly
            # periodic, and a delay far beyond the filter's own would match one partial
            # while misaligning the rest (the window is at least three coarse steps)
            stop = None if max_delay_s is None else _window_stop(max_delay_s, step_s, n_fft)
            cands = _candidates(g, stop, 0.5 * (0.5 * step_s) ** 2 * float(curvature[i]))
            if cands.size <= MAX_CANDIDATES or oversample * FINER > MAX_OVERSAMPLE:
                break
            oversample *= FINER
            g, step_s = coarse_cross(ci, f, oversample=oversample)
        single[i] = cands.size == 1 and oversample == first  # the shared coarse grid's own peak
        for n in cands.tolist():
            # parabola through the peak sample and its neighbours (refined below by a Newton step)
            y0, y1, y2 = g[n - 1], g[n], g[(n + 1) % n_fft]
            den = y0 - 2.0 * y1 + y2
            frac = 0.5 * (y0 - y2) / den if den < 0 else 0.0
            tau = ((n if n < n_fft // 2 else n - n_fft) + frac) * step_s
            if max_delay_s is not None:
                tau = max(tau, 0.0)
            p_row.append(i)
            p_step.append(step_s)
            p_tau.append(tau)
            p_n.append(n)
    if not p_row:
        return taus, values
    rows = np.array(p_row)
    t = np.array(p_tau)
    df = f[1] - f[0]
    for lo in range(0, rows.size, PHASOR_CHUNK):
        sl = slice(lo, lo + PHASOR_CHUNK)
        e = c[rows[sl]] * uniform_phasors(f.size, 2.0 * np.pi * df * t[sl])
        for j, ej in enumerate(e, start=lo):
            i = p_row[j]
            tau = p_tau[j]
            g0 = float(np.sum(ej.real))
            d1 = -float(np.dot(om, ej.imag))  # d/dτ Re Σ c e^{jωτ}
            d2 = -float(np.dot(om * om, ej.real))  # d²/dτ²
            value = g0
            if d2 < 0.0:
                delta = -d1 / d2
                # stay on the peak the coarse search found (and at τ ≥ 0 in a causal window)
                if abs(delta) <= p_step[j] and (max_delays[i] is None or tau + delta >= 0.0):
                    tau, value = tau + delta, g0 + 0.5 * d1 * delta  # the quadratic's maximum
            # each searched row takes its highest refined candidate; the first (the highest
            # sample) is taken as it comes and wins a tie
            if j == 0 or p_row[j - 1] != i or value > values[i]:
                taus[i], values[i] = tau, value
                if peaks is not None and max_delays[i] is None and single[i]:
                    peaks[i] = (p_n[j], p_tau[j])
    return taus, values


def windowed_delay_known(found, coarse: tuple[np.ndarray, float], max_delay_s: float) -> float | None:
    """The delay a search in the causal window 0 … ``max_delay_s`` would find, when the
    unconstrained search of the same cross spectrum already found it; else None.

    ``found``: ``(n, τ₀, τ)`` of the unconstrained search (its coarse peak's index, its
    parabola's delay, its refined delay); ``coarse``: the :func:`coarse_cross` both
    searches read.  The windowed search
    takes the first maximum of the same coarse samples inside the window: the same peak when
    it lies there (0 ≤ n < the window's end), and the same parabola and Newton step when no
    clamp at τ = 0 acts (τ₀ ≥ 0 and τ ≥ 0).
    """
    n, tau0, tau = found
    step_s, n_fft = coarse[1], coarse[0].size
    if n < min(_window_stop(max_delay_s, step_s, n_fft), n_fft // 2) and tau0 >= 0.0 and tau >= 0.0:
        return tau
    return None


def best_delay(
    S: np.ndarray,
    H: np.ndarray,
    freqs_hz: np.ndarray,
    weights_hz: np.ndarray | None = None,
    *,
    max_delay_s: float | None = None,
    cross: tuple[np.ndarray, tuple[np.ndarray, float]] | None = None,
) -> tuple[float, np.ndarray]:
    """The single delay τ that best aligns the input with the filtered output.

    Minimises the error power ∫ S(f)·|1 − H(f)·e^{j2πfτ}|² df, i.e. the
    time-domain |y(t) − x(t − τ)|² for y = h ∗ x and a program of one-sided
    PSD S.  Expanding, ∫S(1 + |H|²) − 2·Re ∫ S·H·e^{j2πfτ}: the cross term
    as a function of τ is an inverse FFT of S·H (zero-padded, coarse), whose
    peak is refined by a parabola and a Newton step on the exact sum.

    Parameters
    ----------
    S : array (bins,)
        Program PSD (any power unit per Hz), ≥ 0.
    H : complex array (bins,)
        The candidate's complex response on the same grid.
    freqs_hz : array (bins,)
        A uniform grid from 0 Hz (the analysis grid, 0 … fs/2).
    weights_hz : array (bins,), optional
        Integration widths (meter band included); default the grid step.
    max_delay_s : float, optional
        Search only 0 ≤ τ ≤ max_delay_s (about; the window is rounded up to
        the coarse grid).  Default: the whole ±1/(2·df).  The perceptual
        scorer passes twice the filter's passband group delay.
    cross : (c, coarse) or (c, coarse, found), optional
        The cross spectrum S·w·H and its :func:`coarse_cross`, when the caller
        has them (the sweep shares one inverse FFT per case between SER and
        the perceptual figures); ``found``: the unconstrained search's result
        (see :func:`windowed_delay_known`), which a windowed search reuses
        when its peak lies in the window.

    Returns
    -------
    tau_s : float
        Best delay in seconds (positive: the output lags the input), within
        ±1/(2·df).
    err : array (bins,)
        |1 − H·e^{j2πfτ}|² at that delay (multiply by S and integrate for the
        error power).
    """
    taus, err = best_delays(S, np.asarray(H, dtype=complex)[None, :], freqs_hz, weights_hz, [max_delay_s], [cross])
    return float(taus[0]), err[0]


def best_delays(
    S, H: np.ndarray, freqs_hz, weights_hz, max_delays: list, crosses: list
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`best_delay` of each row of ``H`` (cases × bins), with its own ``max_delays[i]`` and
    ``crosses[i]`` (None: formed here); delays (cases,) and |1 − H·e^{j2πfτ}|² (cases × bins)."""
    f = np.asarray(freqs_hz, dtype=float)
    w = np.full(f.shape, f[1] - f[0]) if weights_hz is None else np.asarray(weights_hz, dtype=float)
    taus = np.zeros(H.shape[0])
    search = []
    for i, cross in enumerate(crosses):
        known = None
        if cross is not None and len(cross) > 2 and cross[2] is not None and max_delays[i] is not None:
            known = windowed_delay_known(cross[2], cross[1], max_delays[i])
        if known is None:
            search.append(i)
        else:
            taus[i] = known
    if search:
        c = np.empty((len(search), H.shape[1]), dtype=complex)
        coarse = []
        for j, i in enumerate(search):
            cross = crosses[i]
            if cross is None:
                c[j] = np.asarray(S, dtype=float) * w * H[i]
                coarse.append(None)
            else:
                c[j] = cross[0]
                coarse.append(cross[1])
        taus[search] = _delay_cross_many(c, f, [max_delays[i] for i in search], coarse)[0]
    if f.size > 1:
        he = H * uniform_phasors(f.size, 2.0 * np.pi * (f[1] - f[0]) * taus)
    else:
        he = H * np.exp(2j * np.pi * f[None, :] * taus[:, None])
    re = 1.0 - he.real
    return taus, re * re + he.imag * he.imag
