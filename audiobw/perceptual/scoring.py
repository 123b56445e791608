"""Perceptual figures of one sweep case, from the sweep's one analysis pass.

:class:`Listening` holds the playback conditions; :class:`PerceptualScorer`
precomputes the program side once (masked threshold per kept short frame and
critical band, one-third-octave speech levels, the Wiener bound) and
:meth:`PerceptualScorer.score` rates one filter with array operations over
frames × bands (at most 1024 frames, see :data:`audiobw.spectrum.MAX_FRAMES`).

Scaling: the program's rms at the converter input (before noise) is heard at
``playback_spl_db``; every power at the chain's output (program, what the
filter removes, chain noise) is multiplied by the same acoustic gain.

The error of a case in critical band b and frame t is
``frames[t, b] · r_b + N_b``: r_b is the share of the band's long-term program
power that |1 − H e^{j2πfτ}|² removes or distorts (phase included inside the
band; each band aligned by its own group delay and best constant phase —
see :meth:`PerceptualScorer._heard_share`), applied to each frame's band power (the spectral shape inside a band is
taken as constant over time), and N_b the chain's output noise in the band.
Harmonic distortion of the amplifier is not included (it is modelled on a test
tone only, see THD+N).  Tonality is the flatness of each frame's band power
densities across bands, a coarser estimate than Johnston's per-bin SFM.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..delay import PHASOR_BLOCK, best_delays
from . import masking, sii, threshold, wiener

#: Default playback level by program kind (dB SPL): speech at ANSI S3.5-1997
#: normal vocal effort; music at 80 dB SPL (common practice for critical listening).
DEFAULT_PLAYBACK_SPL_DB = {"speech": sii.NORMAL_EFFORT_SPL_DB, "music": 80.0}
PROGRAM_KINDS = ("music", "speech", "data")


@dataclass(frozen=True)
class Listening:
    """Playback conditions.

    Parameters
    ----------
    program : {'music', 'speech'}
    playback_spl_db : float or None
        dB SPL of the program's rms; None takes the program kind's default.
    audiogram_hl : dict or None
        Hearing threshold level, {Hz: dB HL}; None is 0 dB HL.
    """

    program: str = "music"
    playback_spl_db: float | None = None
    audiogram_hl: dict | None = None

    @property
    def spl_db(self) -> float:
        if self.playback_spl_db is not None:
            return float(self.playback_spl_db)
        return DEFAULT_PLAYBACK_SPL_DB.get(self.program, DEFAULT_PLAYBACK_SPL_DB["music"])


def complex_response(filt, freq_hz) -> np.ndarray:
    """H(f) of a designed filter (zpk evaluated as in Filter.power_response)."""
    f = np.asarray(freq_hz, dtype=float)
    if filt.analog:
        s = 1j * (2.0 * np.pi * f / filt.ref_rad_s)
    else:
        s = np.exp(1j * 2.0 * np.pi * f / filt.spec.fs_hz)
    h = np.full(s.shape, complex(filt.k))
    for zero in filt.z:
        h *= s - zero
    for pole in filt.p:
        h /= s - pole
    return h


class PerceptualScorer:
    """Program-side arrays for the perceptual figures; :meth:`score` rates one filter."""

    def __init__(self, analysis, chain, listening: Listening):
        a = analysis
        self.analysis, self.chain, self.listening = a, chain, listening
        f = a.freqs_hz
        w = a.weights_hz
        v2 = chain.volts_per_unit**2
        self.S = a.psd * v2
        self.sw = self.S * w
        p_total = float(np.sum(self.sw))
        self.p_total = p_total
        # acoustic gain: V² at the converter -> power re (20 µPa)²
        self.k_ac = 10.0 ** (listening.spl_db / 10.0) / p_total if p_total > 0 else 0.0
        edges = a.band_edges_hz
        self.edges = edges
        band_of_bin = np.clip(np.searchsorted(edges, f, side="right") - 1, 0, len(edges) - 2)
        self._band_of_bin = band_of_bin
        counts = np.bincount(band_of_bin, minlength=len(edges) - 1)
        self._filled = np.flatnonzero(counts)
        self._starts = np.searchsorted(band_of_bin, self._filled)
        self._nb = len(edges) - 1
        self.band_s = self._band_sum(self.sw)
        self._band_phasor_tables(f, band_of_bin)
        # the SII needs the bins up to its top band edge only (sii.band_spectrum_levels
        # finds the same edges in this prefix: the bin after the top edge is kept)
        self._sii_bins = int(np.searchsorted(f, sii.BAND_EDGES_HZ.max())) + 1
        lo = np.maximum(edges[:-1], 20.0)
        hi = np.maximum(edges[1:], lo * 1.001)
        grid = np.geomspace(lo, hi, 12, axis=1)
        quiet_db = threshold.threshold_in_quiet_db(grid, listening.audiogram_hl).min(axis=1)
        self.quiet = 10.0 ** (quiet_db / 10.0)
        centres = np.sqrt(lo * hi)
        self.centres_hz = centres
        frames = a.band_frames * v2 * self.k_ac  # (frames, bands), re (20 µPa)²
        self.frames = frames
        width = np.diff(edges)
        alpha = masking.tonality(masking.spectral_flatness_db(frames / width + 1e-30, axis=1))
        self.mask = masking.masked_threshold(frames, masking.bark(centres), alpha, self.quiet)
        # SII hearing threshold in the 18 bands
        if listening.audiogram_hl:
            self.hl18 = threshold.audiogram_loss_db(sii.CENTRES_HZ, listening.audiogram_hl)
        else:
            self.hl18 = np.zeros(18)
        # Wiener bound: amplifier noise enters before the filter; converter
        # noise before it for a digital filter, after it for an analog one.
        nyq_width = float(np.sum(w))
        conv = (chain.quantisation_power_v2() + chain.dither_power_v2()) / nyq_width
        amp = chain.density_amplifier_v2_hz()
        if chain.has_flicker:  # 1/f corners and an e_n table's excess, as in audiobw.noise
            from ..noise import amplifier_excess

            en_x, in_x = amplifier_excess(chain, f, w)
            amp = amp + en_x + in_x
        analog = chain.stage == "analog"
        self.n_pre = np.full(f.size, amp + (0.0 if analog else conv))
        self.n_post = np.full(f.size, conv if analog else 0.0)
        self.mse_min = wiener.wiener_mse(self.S, self.n_pre, self.n_post, w)

    def _band_phasor_tables(self, f, band_of_bin):
        """Indices for :meth:`_band_phasor`: bin k of band b is k = s_b + q·B + r."""
        n = f.size
        self._df = float(f[1] - f[0]) if n > 1 else 0.0
        k = np.arange(n)
        first = np.zeros(self._nb, dtype=np.int64)
        first[self._filled] = self._starts
        i = k - first[band_of_bin]
        B = PHASOR_BLOCK
        q, r = np.divmod(i, B)
        nq = int(q.max()) + 1 if n else 1
        self._ph_first, self._ph_nq = first, nq
        self._ph_i1 = band_of_bin * nq + q
        self._ph_i2 = band_of_bin * B + r

    def _band_phasor(self, delay_b):
        """e^{j2π f_k τ_b(k)} on the uniform analysis grid, τ constant within each critical band.

        Each band's phasor is a table product (see :func:`audiobw.delay.uniform_phasor`):
        e^{j(s_b + qB)θ_b}·e^{jrθ_b}, θ_b = 2π·df·τ_b, within a few units in the last
        place of the direct exponential.  ``delay_b``: (bands,) or (candidates, bands).
        """
        B = PHASOR_BLOCK
        th = 2.0 * np.pi * self._df * delay_b
        t1 = np.exp(1j * th[..., None] * (self._ph_first[:, None] + B * np.arange(self._ph_nq)[None, :]))
        t2 = np.exp(1j * th[..., None] * np.arange(B)[None, :])
        lead = th.shape[:-1]
        # np.take gathers along the last axis about twice as fast as fancy indexing (same values)
        out = np.take(t1.reshape(lead + (-1,)), self._ph_i1, axis=-1)
        out *= np.take(t2.reshape(lead + (-1,)), self._ph_i2, axis=-1)
        return out

    def _band_sum(self, x):
        out = np.zeros(x.shape[:-1] + (self._nb,))
        out[..., self._filled] = np.add.reduceat(x, self._starts, axis=-1)
        return out

    def _heard_share(self, h, f, w, tau, gd) -> np.ndarray:
        """Share of each critical band's program power that the filter changes, as heard.

        Each band is aligned by its own delay (the program-weighted mean group
        delay of H inside the band) and then by the constant phase that best
        aligns it: min over θ of Σ|1 − H e^{j(2πfτ_b+θ)}|² S
        = Σ(1 + |H|²)S − 2|Σ H e^{j2πfτ_b} S|.  A difference in group delay
        between bands (a highpass delays the bass by milliseconds) is not counted
        as error; gain error and phase dispersion inside a band are.  ``tau``
        (the best overall delay) is used where a band's own delay is undefined.
        ``h``, ``gd``: one candidate (bins,) or one per row (candidates, bins), ``tau`` likewise.
        """
        sw = self.sw
        tau_b = np.multiply.outer(np.asarray(tau, dtype=float), np.ones(self._nb))
        gd_b = np.divide(self._band_sum(gd * sw), self.band_s, out=tau_b, where=self.band_s > 0)
        if f.size > 1:
            he = h * self._band_phasor(gd_b)
        else:
            he = h * np.exp(2j * np.pi * f * gd_b[..., self._band_of_bin])
        power = self._band_sum((1.0 + (he.real**2 + he.imag**2)) * sw)
        cross = np.abs(self._band_sum(he.real * sw) + 1j * self._band_sum(he.imag * sw))
        err = np.maximum(power - 2.0 * cross, 0.0)
        return np.divide(err, self.band_s, out=np.zeros(err.shape), where=self.band_s > 0)

    def limits(self) -> dict:
        """Top-level figures of the program and chain (no filter), and the playback conditions."""
        hl = self.listening.audiogram_hl
        return {
            "wiener_ser_db": _db(self.p_total / self.mse_min) if self.mse_min > 0 else None,
            "playback_spl_db": self.listening.spl_db,
            "program": self.listening.program,
            "hearing_threshold_hl": [[float(k), float(hl[k])] for k in sorted(hl)] if hl else None,
        }

    def band_errors(self, filt, noise_psd):
        """(error, delay) of one filter: error power per kept frame and critical band, re (20 µPa)².

        The arrays :meth:`score` compares with :attr:`mask` (the masked threshold,
        same shape); the report plots them.
        """
        err, tau, _ = self._errors(complex_response(filt, self.analysis.freqs_hz), noise_psd)
        return err, tau

    def _errors(self, h, noise_psd, cross=None):
        """(error per frame and band, best delay, |1 − H e^{j2πfτ}|² per bin) of one candidate."""
        err, tau, removed = self._errors_many(h[None, :], noise_psd[None, :], [cross])
        return err[0], tau[0], removed[0]

    def _errors_many(self, h, noise_psd, crosses):
        """:meth:`_errors` of one candidate per row of ``h`` and ``noise_psd`` (candidates × bins):
        errors (candidates × frames × bands), delays (candidates,), removed gains (candidates × bins)."""
        f, w = self.analysis.freqs_hz, self.analysis.weights_hz
        gd = wiener.group_delay_s(h, f)
        # the best delay, searched up to twice each filter's largest passband group delay (+ 2 samples)
        limits = [
            2.0 * max(wiener.passband_group_delay_s(h[i], f, gd[i]), 0.0) + 2.0 / self.analysis.sample_rate_hz
            for i in range(h.shape[0])
        ]
        tau, removed = best_delays(self.S, h, f, w, limits, crosses)
        share = self._heard_share(h, f, w, tau, gd)
        n_band = self._band_sum(noise_psd * w) * self.k_ac
        # candidates × frames × bands: the same products and sums as one candidate at a time
        err = self.frames[None, :, :] * share[:, None, :]
        err += n_band[:, None, :]
        return err, tau, removed

    def score(self, filt, noise_psd, shared: dict | None = None) -> dict:
        """nmr_db, audible_frames_pct, sii and wiener_gap_db of one filter.

        ``noise_psd`` is the chain's output noise density (V²/Hz) for this
        filter on the analysis grid (:func:`audiobw.noise.noise_total`).
        ``shared``: the arrays :meth:`audiobw.metrics.Scorer.score` left for this
        case (its complex response ``H`` on the same grid and, when the meter band
        is the whole grid, the cross spectrum with its coarse delay search).
        One case of :meth:`score_many`.
        """
        return self.score_many([filt], [noise_psd], [shared or {}])[0]

    def score_many(self, filts, noise_psds, shared: list[dict]) -> list[dict]:
        """:meth:`score` of each candidate, the frames × bands arrays of all of them built at once
        (each row the same as scoring its candidate alone: tests/test_batched.py)."""
        a = self.analysis
        f, w = a.freqs_hz, a.weights_hz
        h = np.empty((len(filts), f.size), dtype=complex)
        for row, filt, mine in zip(h, filts, shared):
            row[...] = mine["H"] if "H" in mine else complex_response(filt, f)
        noise = np.asarray(noise_psds, dtype=float).reshape(len(filts), f.size)
        errs, tau, removed_gain = self._errors_many(h, noise, [mine.get("cross") for mine in shared])
        # every candidate's frames × bands at once (each candidate's block is contiguous, so its
        # sums are those of the candidate alone)
        ratios = errs
        ratios /= self.mask
        overs = ratios > 1.0
        audibles = np.count_nonzero(overs.any(axis=2), axis=1)
        all_counts = overs.sum(axis=1)
        rows = []
        for i in range(len(filts)):
            ratio = ratios[i]
            rw = removed_gain[i] * self.S * w  # wiener.removed_psd(h, S, f, tau), already evaluated
            noise_psd = noise[i]
            row = {
                # np.mean's sums and divisions without its wrappers (the same bits)
                "nmr_db": _db(float(ratio.sum() / ratio.size)),
                "audible_frames_pct": 100.0 * (int(audibles[i]) / ratio.shape[0]),
                "wiener_gap_db": _db((float(np.sum(rw)) + float(np.sum(noise_psd * w))) / self.mse_min)
                if self.mse_min > 0
                else None,
                "delay_s": float(tau[i]),
            }
            # where the error is heard: the band over its threshold in the most frames
            row["audible_band_hz"] = row["audible_band_pct"] = None
            counts = all_counts[i]
            if counts.max() > 0:
                b = int(np.argmax(counts))
                row["audible_band_hz"] = [float(f"{self.edges[b]:.6g}"), float(f"{self.edges[b + 1]:.6g}")]
                row["audible_band_pct"] = 100.0 * float(counts[b]) / ratio.shape[0]
            if self.listening.program == "speech":
                k = self.k_ac
                m = self._sii_bins  # the bins up to the top SII band edge: the same band sums
                hm = h[i, :m]
                g2 = hm.real * hm.real + hm.imag * hm.imag
                e18 = sii.band_spectrum_levels(f[:m], self.S[:m] * g2 * k, w[:m])
                n18 = sii.band_spectrum_levels(f[:m], noise_psd[:m] * k, w[:m])
                row["sii"] = sii.sii(np.maximum(e18, -200.0), n18, self.hl18)
            else:
                row["sii"] = None
            rows.append(row)
        return rows


def _db(x):
    if x is None or x <= 0 or not math.isfinite(x):
        return None
    return 10.0 * math.log10(x)
