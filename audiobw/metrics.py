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

from .chain import Chain
from .filters import Filter
from .noise import noise_total
from .spectrum import Analysis
from .weighting import a_weighting_power

#: Per-band floor for the log-spectral distance, dB re full-scale sine power.
LSD_FLOOR_DBFS = -120.0

TARGET_KEYS = ("min_snr_db", "min_snr_a_db", "max_thdn_pct", "max_loss_db", "max_lsd_db", "min_ser_db",
               "max_ber", "min_eye", "max_nmr_db", "max_audible_frames_pct", "min_sii")
#: target key -> (metric key, sense): +1 means the metric must be at least the target.
TARGET_METRIC = {
    "min_snr_db": ("snr_db", +1),
    "min_snr_a_db": ("snr_a_db", +1),
    "max_thdn_pct": ("thdn_pct", -1),
    "max_loss_db": ("loss_db", -1),
    "max_lsd_db": ("lsd_db", -1),
    "min_ser_db": ("ser_db", +1),
    "max_ber": ("ber", -1),
    "min_eye": ("eye_fraction", +1),
    "max_nmr_db": ("nmr_db", -1),
    "max_audible_frames_pct": ("audible_frames_pct", -1),
    "min_sii": ("sii", +1),
}


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

    mode: str = "full"
    tone_hz: float = 997.0
    tone_level_dbfs: float = -1.0

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
        self._pre = dict(
            wm=wm, S=S, aw=aw, bins_per_band=bins_per_band, sw=sw, band_s=band_s,
            s_total=float(np.sum(S * wm)), s_total_a=float(np.sum(S * wm * aw)),
            frames_v2=a.band_frames * v2, floor=c.full_scale_power_v2 * 10 ** (LSD_FLOOR_DBFS / 10),
            lo=lo, hi=hi,
        )
        with np.errstate(divide="ignore"):
            self._pre["frames_db"] = 10 * np.log10(np.maximum(self._pre["frames_v2"], self._pre["floor"]))

    def score(self, filt: Filter) -> dict:
        """All metrics for one candidate, as a plain mapping (no targets applied)."""
        a, c, p = self.analysis, self.chain, self._pre
        f = a.freqs_hz
        wm = p["wm"]
        G = filt.power_response(f)
        N = noise_total(c, filt, f, a.weights_hz, a.sample_rate_hz, direct=G)
        n_pow = float(np.sum(N * wm))
        n_pow_a = float(np.sum(N * wm * p["aw"]))
        S = p["S"]
        s_out = float(np.sum(S * G * wm))
        s_out_a = float(np.sum(S * G * wm * p["aw"]))
        err = float(np.sum(S * (1.0 - np.sqrt(G)) ** 2 * wm))
        nyq = a.nyquist_hz
        lo3, hi3 = filt.edges_3db
        row = {
            "low_hz": lo3 if filt.spec.response != "lowpass" else None,
            "high_hz": hi3 if filt.spec.response != "highpass" else None,
            # a response that never falls is integrated to fs/2: on the analysis grid, already evaluated
            "enbw_hz": (float(np.sum(G * a.weights_hz)) if math.isinf(filt.power_integral_hz())
                        else filt.enbw_hz(nyq)),
            "noise_vrms": math.sqrt(n_pow),
            "noise_dbfs": _db(n_pow / c.full_scale_power_v2),
            "snr_db": _db(s_out / n_pow) if s_out > 0 else None,
            "snr_a_db": _db(s_out_a / n_pow_a) if s_out_a > 0 and n_pow_a > 0 else None,
            "loss_db": _db(p["s_total"] / s_out) if s_out > 0 else None,
            "lsd_db": self._lsd(G, N),
            "ser_db": _db(p["s_total"] / (err + n_pow)),
        }
        row.update(self._thdn(filt, n_pow))
        return row

    def _band_sum(self, x: np.ndarray) -> np.ndarray:
        """Sum of ``x`` over the bins of each critical band (0 for a band with no bin)."""
        filled, starts, n_bands = self._bands
        out = np.zeros(n_bands)
        out[filled] = np.add.reduceat(x, starts)
        return out

    def _lsd(self, G: np.ndarray, N: np.ndarray) -> float:
        p = self._pre
        a = self.analysis
        band_s = p["band_s"]
        gain = np.divide(self._band_sum(p["sw"] * G), band_s, out=np.zeros_like(band_s), where=band_s > 0)
        empty = band_s <= 0
        if np.any(empty):
            counts = p["bins_per_band"]
            gain[empty] = (self._band_sum(G) / np.maximum(counts, 1))[empty]
        n_band = self._band_sum(N * a.weights_hz)
        # in place, in the same order of operations: (frames x bands) arrays
        out = p["frames_v2"] * gain
        out += n_band
        np.maximum(out, p["floor"], out=out)
        np.log10(out, out=out)
        out *= 10
        out -= p["frames_db"]
        out *= out
        return float(np.mean(np.sqrt(np.mean(out, axis=1))))

    def _thdn(self, filt: Filter, n_pow: float) -> dict:
        """THD+N of the test tone through the chain (model, AES17 ratio to total)."""
        a, c, m, p = self.analysis, self.chain, self.meter, self._pre
        fs, nyq = a.sample_rate_hz, a.nyquist_hz
        f0 = m.tone_hz
        if not 0 < f0 < nyq:
            return {"thdn_pct": None, "thdn_db": None,
                    "thdn_note": f"tone {f0:g} Hz is not below fs/2 = {nyq:g} Hz"}
        g0 = float(filt.power_response(f0))
        if g0 < 0.5:
            return {"thdn_pct": None, "thdn_db": None,
                    "thdn_note": f"tone {f0:g} Hz is outside the passband ({10 * math.log10(max(g0, 1e-300)):.1f} dB)"}
        r = 10 ** (m.tone_level_dbfs / 20.0)  # amplitude re full scale
        amp_v = r * math.sqrt(2.0) * c.full_scale_vrms
        p1 = amp_v**2 / 2.0 * g0
        harm = 0.0
        for order, level_db in ((2, c.h2_db), (3, c.h3_db)):
            if level_db is None:
                continue
            # memoryless polynomial: the n-th harmonic ratio scales as r^(n-1)
            ratio = 10 ** (level_db / 20.0) * r ** (order - 1)
            fh = order * f0
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
        eye margins 20·lg(value/limit).
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
        elif key == "min_sii":
            margin = 20 * math.log10(value / limit) if value > 0 else -math.inf
        else:
            margin = (value - limit) * sense
        margins[key] = margin
        if margin < 0:
            fails.append(key)
    return not fails, fails, margins
