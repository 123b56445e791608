"""The result of the one analysis pass (:class:`Analysis`): spectra, levels, band frames, and what is
read off them — the scoring grid (fine below a crossover, normal above) and the occupied band.

The pass itself is :func:`audiobw.spectrum.analyse`; units as there: spectra in
(sample units)²/Hz, band powers in (sample units)²; a full-scale sine (peak 1.0)
has power 0.5.  Occupied band: ITU-R SM.328-11 (2006), §1.1.2 (0.5 % of the
mean power below the lower and above the upper limit).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

#: The crossover from the fine low-frequency PSD to the normal one is chosen between these, Hz
#: (see Analysis.scoring_grid).
FINE_CROSSOVER_HZ = (250.0, 500.0)
#: Half-width of the neighbourhood, in normal bins, whose power the crossover
#: minimises (the Hann kernel's leakage beyond 8 bins is below -70 dB).
CROSSOVER_HALF_BINS = 8


@dataclass
class Analysis:
    """The result of one pass over a program (see module docstring for units)."""

    path: str
    sha256: str
    sample_rate_hz: int
    channels: int
    frames: int
    nperseg: int
    freqs_hz: np.ndarray
    psd_channels: np.ndarray  # (channels, bins)
    psd: np.ndarray  # (bins,) mean over channels
    weights_hz: np.ndarray  # (bins,) trapezoid widths; sum = fs/2
    peak: np.ndarray  # (channels,) max |x|
    mean_square: np.ndarray  # (channels,)
    dc: np.ndarray  # (channels,)
    full_scale_samples: int
    band_edges_hz: np.ndarray  # (bands + 1,)
    band_frames: np.ndarray  # (kept frames, bands) power per band, channel mean
    frame_len: int
    frame_stride: int
    meta: dict = field(default_factory=dict)
    #: The fine low-frequency PSD (channel mean, (sample units)²/Hz) on a grid of
    #: step fs/fine_nperseg from 0 Hz up to about FINE_TOP_HZ: Welch, Hann
    #: segments at 50 % overlap, the DC bin doubled for its half-width trapezoid
    #: weight; empty when the file is too short for a segment longer than
    #: ``nperseg``.
    fine_nperseg: int = 0
    fine_freqs_hz: np.ndarray = field(default_factory=lambda: np.zeros(0))
    fine_psd: np.ndarray = field(default_factory=lambda: np.zeros(0))
    _scoring: tuple | None = field(default=None, repr=False, compare=False)

    @property
    def duration_s(self) -> float:
        return self.frames / self.sample_rate_hz

    @property
    def nyquist_hz(self) -> float:
        return self.sample_rate_hz / 2.0

    @property
    def peak_dbfs(self) -> float:
        """Sample peak re full scale, dBFS (AES17)."""
        pk = float(np.max(self.peak))
        return 20.0 * math.log10(pk) if pk > 0 else -math.inf

    @property
    def rms_dbfs(self) -> float:
        """rms (power mean over channels) re a full-scale sine, dBFS (AES17)."""
        ms = float(np.mean(self.mean_square))
        return 10.0 * math.log10(2.0 * ms) if ms > 0 else -math.inf

    def scoring_grid(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
        """The grid the program's power integrals use: fine below a crossover, normal above.

        Returns ``(freqs_hz, psd, weights_hz, k)``: fine bins from 0 Hz up to
        the crossover f_x, then the normal bins ``k`` … end unchanged
        (``freqs_hz[-(bins - k):]`` is ``self.freqs_hz[k:]``).  f_x is the lower
        edge (k − ½)·df of a normal bin, chosen between FINE_CROSSOVER_HZ where
        the normal PSD holds the least power within ±CROSSOVER_HALF_BINS bins
        (a spectral valley: little of either estimate's leakage crosses it, so
        little power is counted twice or not at all).  Fine bins take
        trapezoid widths over [0, f_x] (the bin on f_x counts half), normal
        bins their own from f_x up: each frequency is integrated by one
        estimate and the widths add up to fs/2.  ``meta['fine_vs_normal_db']``
        is 10·lg of the fine over the normal estimate of the power below f_x
        (0 for a steady program; the normal PSD counts half its DC bin, so a
        program with DC or infrasonic content reads higher on the fine one).
        Without a fine PSD this is the normal grid with k = 0.
        """
        if self._scoring is not None:
            return self._scoring
        f, p, w = self.freqs_hz, self.psd, self.weights_hz
        ratio = self.fine_nperseg // self.nperseg if self.nperseg else 0
        df = f[1] - f[0] if f.size > 1 else 0.0
        lo_k = int(math.ceil(FINE_CROSSOVER_HZ[0] / df + 0.5)) if df else 0
        hi_k = int(math.floor(FINE_CROSSOVER_HZ[1] / df + 0.5)) if df else 0
        hi_k = min(hi_k, f.size - 1 - CROSSOVER_HALF_BINS)
        if ratio < 2 or self.fine_psd.size == 0 or hi_k < lo_k:
            self._scoring = (f, p, w, 0)
            self.meta["fine_vs_normal_db"] = None
            return self._scoring
        power = p * w
        cum = np.concatenate([[0.0], np.cumsum(power)])
        ks = np.arange(lo_k, hi_k + 1)
        around = cum[ks + CROSSOVER_HALF_BINS + 1] - cum[ks - CROSSOVER_HALF_BINS]
        k = int(ks[np.argmin(around)])
        j_end = k * ratio - ratio // 2  # fine bin on the crossover (k − ½)·df
        if j_end >= self.fine_psd.size:
            self._scoring = (f, p, w, 0)
            self.meta["fine_vs_normal_db"] = None
            return self._scoring
        ff = self.fine_freqs_hz[: j_end + 1]
        fw = trapezoid_weights(ff.size, ff[1] - ff[0])
        fp = self.fine_psd[: j_end + 1]
        below = float(cum[k])  # normal bins 0 … k−1 cover [0, (k − ½)·df]
        fine_power = float(np.sum(fp * fw))
        self.meta["fine_vs_normal_db"] = 10.0 * math.log10(fine_power / below) if fine_power > 0 and below > 0 else None
        self.meta["crossover_hz"] = float(ff[-1])
        self._scoring = (np.concatenate([ff, f[k:]]), np.concatenate([fp, p[k:]]), np.concatenate([fw, w[k:]]), k)
        return self._scoring

    def occupied_band_hz(self, fraction: float = 0.99) -> tuple[float, float]:
        """(lower, upper) limits holding ``fraction`` of the power, equal tails (ITU-R SM.328)."""
        return occupied_band(self.freqs_hz, self.psd, self.weights_hz, fraction)

    def occupied_band_channels_hz(self, fraction: float = 0.99) -> list[tuple[float, float]]:
        """Per channel: (lower, upper) limits holding ``fraction`` of that channel's own power.

        :meth:`occupied_band_hz` takes the power summed over channels, so a quiet
        channel with a wider spectrum barely moves it; these figures show each one.
        """
        return [occupied_band(self.freqs_hz, p, self.weights_hz, fraction) for p in self.psd_channels]


def occupied_band(freqs_hz, psd, weights_hz, fraction: float = 0.99) -> tuple[float, float]:
    """Occupied band of a one-sided PSD: ``(1 - fraction)/2`` of the power below and above.

    The cumulative power is interpolated linearly between bin edges.
    """
    power = np.asarray(psd) * np.asarray(weights_hz)
    total = float(power.sum())
    if total <= 0:
        return 0.0, 0.0
    df = freqs_hz[1] - freqs_hz[0]
    # bin k covers [f_k - df/2, f_k + df/2], clipped to [0, fs/2]
    upper_edges = np.minimum(freqs_hz + df / 2.0, freqs_hz[-1])
    edges = np.concatenate([[0.0], upper_edges])
    cum = np.concatenate([[0.0], np.cumsum(power)]) / total
    tail = (1.0 - fraction) / 2.0
    lo = float(np.interp(tail, cum, edges))
    hi = float(np.interp(1.0 - tail, cum, edges))
    return lo, hi


def trapezoid_weights(n_bins: int, df: float) -> np.ndarray:
    w = np.full(n_bins, df)
    w[0] = w[-1] = df / 2.0
    return w
