"""Score one candidate from the analysis: every metric of one sweep row.

All figures come from spectra: the program's long-term PSD S(f), the
candidate's power response |H(f)|², and the chain's output noise N(f), each
on the analysis grid, integrated over the meter band.  No case filters the
audio in the time domain.

References
----------
.. [1] IEC 61672-1:2013 Annex E (A-weighting), applied analytically.
.. [2] AES17-2020 §6 (THD+N: rms of everything but the fundamental, relative
   to the total rms, in the measurement bandwidth) — here computed from the
   model, not measured.
.. [3] A. H. Gray, J. D. Markel, "Distance measures for speech processing",
   IEEE Trans. ASSP 24(5), 380–391, 1976 (log-spectral distance), computed
   on critical bands (Zwicker 1961) rather than FFT bins.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .batchresponse import power_responses, responses
from .chain import Chain
from .delay import (  # noqa: F401  (re-exported: audiobw.metrics.best_delay and the rest, as tests and scorers import them)
    DELAY_OVERSAMPLE,
    PHASOR_BLOCK,
    _delay_cross,
    _delay_cross_many,
    best_delay,
    coarse_cross,
    uniform_phasor,
)
from .filterquality import (  # noqa: F401  (re-exported)
    BAND_GRID_LINEAR,
    BAND_GRID_LOG,
    IMAGE_GRID,
    alias_rejection_db,
    alias_rejection_many,
    band_grid,
    delay_spread_s,
    flatness_and_spread,
    flatness_db,
    image_bands_hz,
)
from .filters import Filter
from .noisespectra import noise_totals
from .options import default
from .registry import TARGET_KEYS, TARGET_METRIC  # noqa: F401  (re-exported: the targets of the one metric table)
from .spectrum import Analysis
from .weighting import a_weighting_power

#: Floor of the log-spectral distance, dB relative to each frame's level (its
#: total power over all bands).  A band more than 60 dB below the frame that
#: holds it is taken as empty in input and output alike: within one 43 ms
#: frame the ear does not resolve a component that far under the frame's own
#: content (simultaneous masking; common practice, a stated choice rather than
#: a standard's figure), and without a floor a band the program hardly uses
#: would weigh as much as one it fills.  The figure then no longer moves with
#: an arbitrary absolute floor (it read 4.4 / 15.8 / 25.9 dB for −100 / −120 /
#: −140 dBFS on one program).
LSD_FRAME_FLOOR_DB = -60.0


@dataclass(frozen=True)
class Meter:
    """The measurement band and the THD+N test tone.

    Parameters
    ----------
    mode : {'full', 'aes17'}
        'full': 0…fs/2; 'aes17': 20 Hz–20 kHz (AES17-2020 §5.2.5, standard
        low-pass measurement bandwidth), clipped to fs/2.
    tone_hz : float
        THD+N test-tone frequency (997 Hz: AES17 practice of a frequency not
        sub-multiple of common sample rates).
    tone_level_dbfs : float
        Test-tone level, dBFS.
    """

    mode: str = default("meter")
    tone_hz: float = default("tone")
    tone_level_dbfs: float = default("tone_level")

    def band(self, nyquist_hz: float) -> tuple[float, float]:
        if self.mode == "aes17":
            return 20.0, min(20000.0, nyquist_hz)
        return 0.0, nyquist_hz


def _db(ratio: float) -> float | None:
    if ratio is None or not math.isfinite(ratio) or ratio <= 0:
        return None if ratio is None or ratio <= 0 else math.inf
    return 10.0 * math.log10(ratio)


@dataclass
class Scorer:
    """Precomputed program-side arrays; :meth:`score` rates one filter."""

    analysis: Analysis
    chain: Chain
    meter: Meter
    #: Optional absolute floor for the log-spectral distance, dBFS per critical
    #: band (a scalar, or one value per band of ``analysis.band_edges_hz``): the
    #: hook for the threshold of hearing at a stated playback level.  None: only
    #: the floor relative to each frame (LSD_FRAME_FLOOR_DB).
    lsd_floor_dbfs: float | np.ndarray | None = None
    _pre: dict = field(default_factory=dict, repr=False)

    def __post_init__(self):
        a, c = self.analysis, self.chain
        f = a.freqs_hz
        v2 = c.volts_per_unit**2
        lo, hi = self.meter.band(a.nyquist_hz)
        in_band = (f >= lo) & (f <= hi)
        wm = a.weights_hz * in_band
        S = a.psd * v2
        aw = a_weighting_power(f)
        # critical band of each bin on the long grid, for the LSD band gains
        edges = a.band_edges_hz
        band_of_bin = np.clip(np.searchsorted(edges, f, side="right") - 1, 0, len(edges) - 2)
        bins_per_band = np.bincount(band_of_bin, minlength=len(edges) - 1)
        # bands are contiguous runs of bins: summed with np.add.reduceat (a
        # matrix product here would call multi-threaded BLAS once per case)
        filled = np.flatnonzero(bins_per_band)
        self._bands = (filled, np.searchsorted(band_of_bin, filled), len(edges) - 1)
        sw = S * a.weights_hz
        band_s = self._band_sum(sw)
        # loss and SNR integrate the program on the scoring grid: the fine
        # low-frequency PSD below the crossover, the normal PSD (bins k …) above
        # (Analysis.scoring_grid; its widths add up to fs/2 and its power to the
        # normal PSD's, so nothing is counted twice)
        fx, px, wx, k = a.scoring_grid()
        fl = fx[: fx.size - (f.size - k)]
        wml = (wx * ((fx >= lo) & (fx <= hi)))[: fl.size]
        Sl = px[: fl.size] * v2
        Sh = S[k:]
        #: the meter band is the whole grid: SER's cross spectrum S·wm·H is the perceptual
        #: scorer's S·w·H, so one inverse FFT per case serves both delay searches
        self.full_meter = bool(np.all(in_band))
        self._pre = dict(
            wm=wm,
            S=S,
            aw=aw,
            bins_per_band=bins_per_band,
            sw=sw,
            band_s=band_s,
            s_total=float(np.sum(S * wm)),
            swm=S * wm,
            wm_a=wm * aw,
            k=k,
            fl=fl,
            swl=Sl * wml,
            swl_a=Sl * wml * a_weighting_power(fl),
            swh=Sh * wm[k:],
            swh_a=Sh * wm[k:] * aw[k:],
            frames_v2=a.band_frames * v2,
            lo=lo,
            hi=hi,
        )
        p = self._pre
        p["x_total"] = float(np.sum(p["swl"])) + float(np.sum(p["swh"]))
        p["x_total_a"] = float(np.sum(p["swl_a"])) + float(np.sum(p["swh_a"]))
        fv2 = self._pre["frames_v2"]
        # the floor of each frame: LSD_FRAME_FLOOR_DB under its level (a silent frame: a tiny
        # positive floor, so input and output sit on it and the frame's distance is 0)
        level = fv2.sum(axis=1, keepdims=True) if fv2.size else np.zeros((0, 1))
        floor = np.maximum(level * 10 ** (LSD_FRAME_FLOOR_DB / 10), c.full_scale_power_v2 * 1e-30)
        if self.lsd_floor_dbfs is not None:
            absolute = c.full_scale_power_v2 * 10 ** (np.asarray(self.lsd_floor_dbfs, dtype=float) / 10)
            floor = np.maximum(floor, absolute)
        self._pre["floor"] = floor
        self._pre["frames_db"] = 10 * np.log10(np.maximum(fv2, floor))
        # the same in dB, for _lsd: lg(max(P·g, F)) = max(lg P + lg g, lg F) (lg is monotone), so a
        # case takes one logarithm per band instead of one per frame and band
        with np.errstate(divide="ignore"):
            self._pre["raw_db"] = 10 * np.log10(fv2)
        self._pre["floor_db"] = 10 * np.log10(floor)
        # the program's 99 % occupied band (power summed over channels), for flatness and delay spread
        occ_lo, occ_hi = a.occupied_band_hz()
        self._pre["occupied_grid"] = band_grid(occ_lo, min(occ_hi, a.nyquist_hz), floor_hz=a.sample_rate_hz / a.nperseg)

    def score(self, filt: Filter, shared: dict | None = None) -> dict:
        """All metrics for one candidate, as a plain mapping (no targets applied).

        ``shared``: a dict that receives this case's arrays for the other scorers of
        the same case (complex response ``H``, power response ``G``, output noise
        density ``N``, and ``cross`` — the cross spectrum and its coarse delay
        search — when the meter band is the whole grid).  One case of :meth:`score_many`.
        """
        return self.score_many([filt], None if shared is None else [shared])[0]

    def score_many(self, filts: list[Filter], shared: list[dict] | None = None) -> list[dict]:
        """:meth:`score` of each candidate, the grid-wide arrays of all of them built at once.

        The responses (:mod:`audiobw.batchresponse`), the cross spectra with their
        delay searches' inverse FFTs and the log-spectral distance are computed
        for every candidate together (one row each); the rest case by case.  Each
        row is the same as scoring its candidate alone (tests/test_batched.py).
        ``shared``: one dict per candidate, as for :meth:`score`.
        """
        a, c, p = self.analysis, self.chain, self._pre
        f = a.freqs_hz
        wm = p["wm"]
        k = p["k"]
        G_all = power_responses(filts, f)
        H_all = responses(filts, f)
        Gl_all = power_responses(filts, p["fl"]) if p["fl"].size else np.zeros((len(filts), 0))
        # error against the input at the best single delay, phase included
        # (∫S|1 − H·e^{j2πfτ}|² = ∫S(1 + |H|²) − 2·max_τ Re ∫S·H·e^{j2πfτ}; see best_delay):
        # on the normal grid throughout (the delay search needs a uniform grid from 0 Hz)
        cs_all = p["swm"] * H_all
        searched = cs_all.any(axis=1) if f.size > 1 else np.zeros(len(filts), dtype=bool)
        coarse_all = coarse_cross(cs_all, f) if searched.any() else None
        coarse = [
            (coarse_all[0][i], coarse_all[1]) if coarse_all is not None and searched[i] else None
            for i in range(len(filts))
        ]
        peaks: list = []
        taus, crosses = _delay_cross_many(cs_all, f, [None] * len(filts), coarse, peaks)
        lsd = self._lsd_many(G_all)
        edges = [filt.edges_3db for filt in filts]
        alias = alias_rejection_many(filts, edges, a.sample_rate_hz)
        in_band = flatness_and_spread(filts, p["occupied_grid"])
        nyq = a.nyquist_hz
        rows = []
        N_all = noise_totals(c, filts, f, a.weights_hz, a.sample_rate_hz, direct=G_all)
        for i, filt in enumerate(filts):
            G, H, Gl, N = G_all[i], H_all[i], Gl_all[i], N_all[i]
            n_pow = float(np.dot(N, wm))
            n_pow_a = float(np.dot(N, p["wm_a"]))
            # program out on the scoring grid (fine below the crossover)
            Gh = G[k:]
            x_out = float(np.dot(p["swl"], Gl)) + float(np.dot(p["swh"], Gh))
            x_out_a = float(np.dot(p["swl_a"], Gl)) + float(np.dot(p["swh_a"], Gh))
            s_out = float(np.dot(p["swm"], G))
            if shared is not None:
                shared[i].update(H=H, G=G, N=N)
                if self.full_meter and coarse[i] is not None:
                    found = None if peaks[i] is None else (*peaks[i], float(taus[i]))
                    shared[i]["cross"] = (cs_all[i], coarse[i], found)
            err = max(p["s_total"] + s_out - 2.0 * float(crosses[i]), 0.0)
            lo3, hi3 = edges[i]
            row = {
                "low_hz": lo3 if filt.spec.response != "lowpass" else None,
                "high_hz": hi3 if filt.spec.response != "highpass" else None,
                # a response that never falls is integrated to fs/2: on the analysis grid, already evaluated
                "enbw_hz": (
                    float(np.sum(G * a.weights_hz)) if math.isinf(filt.power_integral_hz()) else filt.enbw_hz(nyq)
                ),
                "noise_vrms": math.sqrt(n_pow),
                "noise_dbfs": _db(n_pow / c.full_scale_power_v2),
                "snr_db": _db(x_out / n_pow) if x_out > 0 else None,
                "snr_a_db": _db(x_out_a / n_pow_a) if x_out_a > 0 and n_pow_a > 0 else None,
                "loss_db": _db(p["x_total"] / x_out) if x_out > 0 else None,
                "lsd_db": lsd[i],
                "ser_db": _db(p["s_total"] / (err + n_pow)),
                "alias_rejection_db": alias[i],
                "flatness_db": in_band[i][0],
                "delay_spread_s": in_band[i][1],
            }
            row.update(self._thdn(filt, n_pow))
            rows.append(row)
        return rows

    def _band_sum(self, x: np.ndarray) -> np.ndarray:
        """Sum of ``x`` over the bins of each critical band (0 for a band with no bin), along the last axis."""
        filled, starts, n_bands = self._bands
        out = np.zeros(x.shape[:-1] + (n_bands,))
        out[..., filled] = np.add.reduceat(x, starts, axis=-1)
        return out

    def _lsd_many(self, G: np.ndarray) -> list[float]:
        """Program in against program out (no noise: noise has SNR), per frame over bands; one figure
        per row of the power responses ``G`` (candidates × bins)."""
        p = self._pre
        band_s = p["band_s"]
        gain = np.divide(self._band_sum(p["sw"] * G), band_s, out=np.zeros((G.shape[0], band_s.size)), where=band_s > 0)
        empty = band_s <= 0
        if empty.any():
            counts = p["bins_per_band"]
            gain[:, empty] = (self._band_sum(G) / np.maximum(counts, 1))[:, empty]
        with np.errstate(divide="ignore"):
            gain_db = 10 * np.log10(gain)
        # every candidate's frames x bands at once, in place (each candidate's block contiguous,
        # so its sums are those of the candidate alone); 10·lg(max(P·g, F)) as
        # max(10·lg P + 10·lg g, 10·lg F)
        out = p["raw_db"][None, :, :] + gain_db[:, None, :]
        np.maximum(out, p["floor_db"], out=out)
        out -= p["frames_db"]
        out *= out
        # np.mean's own sums and divisions, without its wrappers (the same bits)
        per_frame = np.sqrt(np.add.reduce(out, axis=2) / out.shape[2])
        return [float(x) for x in per_frame.sum(axis=1) / per_frame.shape[1]]

    def _thdn(self, filt: Filter, n_pow: float) -> dict:
        """THD+N of the test tone through the chain (model, AES17 ratio to total).

        Harmonics above fs/2 follow ``chain.anti_alias`` as the noise does:
        folded into 0…fs/2 ('none') or stopped at fs/2 ('ideal').
        """
        a, c, m, p = self.analysis, self.chain, self.meter, self._pre
        fs, nyq = a.sample_rate_hz, a.nyquist_hz
        f0 = m.tone_hz
        if not 0 < f0 < nyq:
            return {"thdn_pct": None, "thdn_db": None, "thdn_note": f"tone {f0:g} Hz is not below fs/2 = {nyq:g} Hz"}
        g0 = float(filt.power_response(f0))
        if g0 < 0.5:
            return {
                "thdn_pct": None,
                "thdn_db": None,
                "thdn_note": f"tone {f0:g} Hz is outside the passband ({10 * math.log10(max(g0, 1e-300)):.1f} dB)",
            }
        r = 10 ** (m.tone_level_dbfs / 20.0)  # amplitude re full scale
        amp_v = r * math.sqrt(2.0) * c.full_scale_vrms
        # the memoryless polynomial y = x + a2·x² + a3·x³ (simulate.harmonic_coefficients) on
        # x = r·sin: a3·x³ adds (3/4)·a3·r³ = 3·h3·r³ to the fundamental, and a2·x² makes a DC
        # term a2·r²/2 = h2·r² beside the 2nd harmonic (counted where the meter includes 0 Hz)
        h3_lin = 10 ** (c.h3_db / 20.0) if c.h3_db is not None else 0.0
        p1 = (amp_v * (1.0 + 3.0 * h3_lin * r * r)) ** 2 / 2.0 * g0
        harm = 0.0
        if c.h2_db is not None and p["lo"] <= 0.0:
            dc_v = 10 ** (c.h2_db / 20.0) * r * amp_v
            harm += dc_v**2 * float(filt.power_response(0.0))
        for order, level_db in ((2, c.h2_db), (3, c.h3_db)):
            if level_db is None:
                continue
            # memoryless polynomial: the n-th harmonic ratio scales as r^(n-1)
            ratio = 10 ** (level_db / 20.0) * r ** (order - 1)
            fh = order * f0
            if fh > nyq and c.anti_alias == "ideal":
                continue  # the brick-wall at fs/2 ahead of the converter stops it
            # anti_alias 'none': above fs/2 it folds at the converter; an analog filter meets it
            # at its true frequency first, a digital one after the fold
            folded = abs(fh - fs * round(fh / fs))
            gain = float(filt.power_response(fh if filt.analog else folded))
            if p["lo"] <= folded <= p["hi"]:
                harm += (ratio * amp_v) ** 2 / 2.0 * gain
        resid = harm + n_pow
        ratio = math.sqrt(resid / (p1 + resid))
        return {"thdn_pct": 100.0 * ratio, "thdn_db": 20.0 * math.log10(ratio), "thdn_note": None}


def check_targets(row: dict, targets: dict) -> tuple[bool, list[str], dict]:
    """Apply the targets to a scored row.

    Returns
    -------
    passes : bool
    fails : list of str
        Target keys that fail (a metric that cannot be evaluated fails).
    margins_db : dict
        Target key -> margin in dB (positive: met with room to spare).
        THD+N margins are 20·lg(limit/value); BER margins 10·lg(limit/value);
        eye margins 20·lg(value/limit); delay-spread margins 20·lg(limit/value).
    """
    fails, margins = [], {}
    for key in TARGET_KEYS:
        limit = targets.get(key)
        if limit is None:
            continue
        metric, sense = TARGET_METRIC[key]
        value = row.get(metric)
        if value is None:
            fails.append(key)
            margins[key] = None
            continue
        if key == "max_thdn_pct":
            margin = 20 * math.log10(limit / value) if value > 0 else math.inf
        elif key == "max_ber":
            margin = 10 * math.log10(limit / value) if value > 0 else math.inf
        elif key == "min_eye":
            margin = 20 * math.log10(value / limit) if value > 0 else -math.inf
        elif key == "max_audible_frames_pct":
            # a share of frames: 10·lg(limit/value), inf when no frame is audible
            margin = 10 * math.log10(limit / value) if value > 0 else math.inf
        elif key == "max_delay_spread_s":
            # a ratio of times, 20·lg(limit/value) like THD+N; inf for no spread
            margin = 20 * math.log10(limit / value) if value > 0 else math.inf
        elif key == "min_sii":
            margin = 20 * math.log10(value / limit) if value > 0 else -math.inf
        else:
            margin = (value - limit) * sense
        margins[key] = margin
        if margin < 0:
            fails.append(key)
    return not fails, fails, margins
