"""One streaming analysis pass over the program.

Everything the sweep scores is derived from this pass: the long-term power
spectral density (Welch's method, per channel and power-averaged over
channels), a second, finer Welch PSD of the low decades (Hann segments 8 times
longer, computed from the same blocks: the file is still read once), sample
levels, a compact short-time critical-band summary for the
log-spectral distance, and the 99 % occupied bandwidth.  No candidate filter
ever touches the audio.

Units: spectra are in (sample units)²/Hz, band powers in (sample units)²; a
full-scale sine (peak 1.0) has power 0.5.

References
----------
.. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of
   power spectra", IEEE Trans. Audio Electroacoust. 15(2), 70–73, 1967.
   Density scaling as scipy.signal.welch(scaling='density'): the PSD
   integrates (sum × df) to the signal's variance.
.. [2] ITU-R SM.328-11 (2006), *Spectra and bandwidth of emissions*, §1.1.2
   (occupied bandwidth: 0.5 % of the mean power below the lower and above the
   upper limit).
.. [3] E. Zwicker, J. Acoust. Soc. Am. 33(2), 248, 1961 (critical bands).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field

import numpy as np
from numpy import fft as sfft  # the same pocketfft as scipy.fft, without importing scipy (about 0.3 s of start-up)

from . import audio
from .errors import AudioFileError
from .weighting import critical_band_edges

#: Target resolution of the long-term PSD, Hz (edges near 20 Hz need it).
PSD_RESOLUTION_HZ = 3.0
#: Target resolution of the fine low-frequency PSD, Hz.  A Hann window smears a
#: tone over a main lobe whose power-weighted spread is σ = 1/(√3·T) for a
#: segment of T seconds; against a response falling s dB/Hz the power-averaged
#: gain is off by about (ln 10/20)·s²·σ² dB (a Gaussian-spread estimate).  At
#: 3 Hz a Butterworth 8 highpass at 50 Hz read 0.8 dB too little loss at 40 Hz;
#: at 0.37 Hz (48 kHz) the worst 20-50 Hz highpass of every family, orders 2-8,
#: on tones at 25, 40 and 60 Hz is within 0.01 dB of |H(f)|² at the tones
#: (tests/test_lowfreq.py).  Halving it again cost 40 % more analysis time for
#: 0.007 dB.
FINE_RESOLUTION_HZ = 0.4
#: The fine PSD is kept up to this frequency, Hz; the crossover to the normal
#: PSD is chosen between FINE_CROSSOVER_HZ[0] and [1] (see Analysis.scoring_grid).
FINE_TOP_HZ = 560.0
#: The file must be at least this many fine segments long; a shorter file gets
#: a shorter fine segment.  Welch weighs the first and last 3/4 segment less, so
#: a long segment on a short clip whose level changes near its ends reads its
#: low band off (a 9 s speech clip: +0.5 dB with 1.5 s segments, against a
#: periodogram of the whole file); 16 lengths keep that share of the file small.
FINE_MIN_LENGTHS = 16
FINE_CROSSOVER_HZ = (250.0, 500.0)
#: Half-width of the neighbourhood, in normal bins, whose power the crossover
#: minimises (the Hann kernel's leakage beyond 8 bins is below -70 dB).
CROSSOVER_HALF_BINS = 8
#: Length of a short-time frame for the band summary, s (~43 ms).
FRAME_SECONDS = 0.043
#: At most this many short-time frames are kept (evenly spaced in time).
MAX_FRAMES = 1024


def hann_periodic(m: int) -> np.ndarray:
    """Periodic Hann window, bit for bit scipy.signal.get_window('hann', m).

    Computed with numpy as scipy.signal.windows.general_cosine does, so the
    analysis does not import scipy.signal (checked in tests/test_spectrum.py).
    """
    if m <= 1:
        return np.ones(m)
    fac = np.linspace(-np.pi, np.pi, m + 1)
    w = np.zeros(m + 1)
    for k, a in enumerate((0.5, 0.5)):
        w += a * np.cos(k * fac)
    return w[:-1]


#: Sample peaks outside these (re full scale) hold no measurable program: below -300 dBFS is far under
#: any converter's LSB (32-bit integer: -187 dBFS); above +120 dBFS the powers overflow float64 sums.
MIN_PEAK, MAX_PEAK = 1e-15, 1e6


def _overflow_message(path, top: float) -> str:
    return (
        f"{path}: peak {top:.3g} of full scale is above {MAX_PEAK:g} (+120 dBFS): the samples overflow "
        "any converter; accepted: peaks up to +120 dBFS"
    )


def _pow2_at_least(x: float) -> int:
    return 1 << max(0, math.ceil(math.log2(max(x, 1.0))))


def _pow2_nearest(x: float) -> int:
    return 1 << max(0, round(math.log2(max(x, 1.0))))


def frame_lengths(fs_hz: float, n_frames: int | None = None) -> tuple[int, int]:
    """(PSD segment length, short-time frame length) in samples for ``fs_hz``.

    The PSD segment is the power of two giving at most 3 Hz resolution,
    shortened to fit a short file; the short frame is the power of two
    nearest 43 ms.
    """
    n_short = _pow2_nearest(FRAME_SECONDS * fs_hz)
    n_psd = _pow2_at_least(fs_hz / PSD_RESOLUTION_HZ)
    if n_frames is not None:
        while n_psd > n_short and n_psd > n_frames:
            n_psd //= 2
    return n_psd, n_short


def fine_length(fs_hz: float, n_psd: int, n_frames: int | None = None) -> int:
    """Segment length of the fine low-frequency PSD, samples (0: none).

    The power of two giving at most FINE_RESOLUTION_HZ, halved until the file
    is at least FINE_MIN_LENGTHS segments long; 0 when that leaves it no
    longer than the normal segment ``n_psd``.
    """
    n = _pow2_at_least(fs_hz / FINE_RESOLUTION_HZ)
    if n_frames is not None:
        while n > n_psd and FINE_MIN_LENGTHS * n > n_frames:
            n //= 2
    return n if n > n_psd else 0


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


def _hash_in_background(path):
    """Start the file's SHA-256 in a helper thread (hashlib releases the GIL on
    large updates); returns a function that waits for it.  A failure there is
    retried in the caller, so its error is raised where it belongs."""
    import threading

    box: dict = {}

    def work():
        try:
            box["hex"] = audio.sha256_file(path)
        except BaseException:  # retried (and raised) by the caller
            pass

    thread = threading.Thread(target=work, name="audiobw-sha256", daemon=True)
    thread.start()

    def result() -> str:
        thread.join()
        return box["hex"] if "hex" in box else audio.sha256_file(path)

    result.ready = lambda: not thread.is_alive()  # type: ignore[attr-defined]
    return result


def _digest_unchanged(digest, path, before) -> str:
    """The SHA-256, once the file is known to be the one decoded (unchanged through both passes)."""
    hex_ = digest()
    audio.check_unchanged(path, before)
    return hex_


def helper_threads() -> bool:
    """Whether the pass may use helper threads beyond decoding and hashing (see :class:`_Lane`).

    Off with ``AUDIOBW_THREADS=1`` (batch sets it in its workers when they
    already fill the machine's cores): a second core then serves another file.
    """
    return os.environ.get("AUDIOBW_THREADS", "") != "1"


class _Lane:
    """Run submitted jobs one after another, in order, in one helper thread.

    At most ``depth`` jobs wait; ``drain`` waits for all and raises the first
    error there, in the caller; ``close`` drops what has not started.
    """

    def __init__(self, depth: int = 2):
        from concurrent.futures import ThreadPoolExecutor

        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="audiobw-fine")
        self._pending: list = []
        self._depth = depth

    def submit(self, fn, *args) -> None:
        self._pending.append(self._pool.submit(fn, *args))
        while len(self._pending) > self._depth:
            self._pending.pop(0).result()

    def drain(self) -> None:
        while self._pending:
            self._pending.pop(0).result()

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)


def _prefetched(blocks, depth: int = 2, prepare=None):
    """Iterate ``blocks`` with the next ones decoded in a helper thread.

    libsndfile decodes without holding the GIL, so decoding the next block
    overlaps the transforms of the current one.  ``prepare``, if given, is
    applied to each block in the helper thread too (the pass turns blocks
    channel-major there: numpy copies without the GIL).  At most ``depth``
    blocks wait in the queue (memory stays bounded); an exception from the
    reader is raised here, in the consumer.
    """
    import queue
    import threading

    q: queue.Queue = queue.Queue(maxsize=depth)
    stop = threading.Event()
    done = object()

    def reader():
        try:
            for item in blocks:
                if prepare is not None:
                    item = prepare(item)
                while not stop.is_set():
                    try:
                        q.put(item, timeout=0.1)
                        break
                    except queue.Full:
                        continue
                if stop.is_set():
                    return
            q.put(done)
        except BaseException as exc:  # handed to the consumer
            q.put(exc)

    thread = threading.Thread(target=reader, name="audiobw-decode", daemon=True)
    thread.start()
    try:
        while True:
            item = q.get()
            if item is done:
                return
            if isinstance(item, BaseException):
                raise item
            yield item
    finally:
        stop.set()
        thread.join(timeout=5.0)


def _channel_major(block_fc: np.ndarray) -> np.ndarray:
    """A decoded block (frames, channels) as a contiguous (channels, frames) array."""
    return np.ascontiguousarray(block_fc.T)


def analyse(path, *, progress=None, blocksize: int = 1 << 17, sha256: str | None = None, cache=None) -> Analysis:
    """Run the single streaming pass over ``path``.

    Parameters
    ----------
    path : path-like
        Audio file (anything libsndfile reads).
    progress : callable(frames_done, frames_expected) or None
        Called after each block.
    sha256 : str or None
        The file's SHA-256 (hex) when the caller has just computed it (batch
        hashes each file once, for its cache); otherwise it is computed here
        in a helper thread during the pass.
    cache : module or None
        The analysis cache (:mod:`audiobw.cache`, or any object with its
        ``load``, ``store``, ``known_digest`` and ``remember``): looked up as
        soon as the digest is known (at once when the file's size and time
        stamps are those of a file hashed before), written after a full pass.
        A hit gives the same object, bit for bit, as the pass would.

    Returns
    -------
    Analysis

    Raises
    ------
    AudioFileError
        Unreadable file, fewer samples than one short-time frame, digital
        silence, NaN or infinite samples.
    """
    info = audio.open_info(path)
    try:
        before = audio.fingerprint(path)
    except OSError as exc:
        raise AudioFileError(f"{audio.shown(path)}: cannot read ({exc.strerror or exc})") from None
    looked_up = cache is None
    tried = None

    def lookup(hex_=None, *, by_digest=True):
        """The cached analysis (warnings re-issued, file checked unchanged), or None."""
        nonlocal looked_up, tried
        if by_digest:
            looked_up = True
        hex_ = hex_ or digest()
        if hex_ == tried:  # the digest the index gave, already looked up
            return None
        tried = hex_
        hit = cache.load(hex_, info, blocksize=blocksize)
        if hit is None:
            return None
        audio.check_unchanged(path, before)
        if by_digest:  # the next run finds the digest from the file's size and time stamps
            cache.remember(path, before, hex_)
        _warn_truncated(info.path, hit.frames, hit.meta.get("declared_frames"))
        _warn_about(hit)
        if progress is not None:
            progress(hit.frames, max(info.frames, hit.frames))
        return hit

    if cache is not None and not sha256:
        # the same file (inode, size, modification and change times) as a run that hashed it:
        # its digest is known without reading it again
        known = cache.known_digest(path, before)
        if known:
            found = lookup(known, by_digest=False)
            if found is not None:
                return found
    # a caller that has just hashed the file (batch) passes the digest: no second hash
    digest = (lambda: sha256) if sha256 else _hash_in_background(path)
    if cache is not None and sha256:
        found = lookup()
        if found is not None:
            return found
    fs = info.sample_rate_hz
    nch = info.channels
    nper, nshort = frame_lengths(fs, info.frames if info.frames > 0 else None)
    hop = nper // 2
    win = hann_periodic(nper)
    win_s = hann_periodic(nshort)
    scale_psd = 1.0 / (fs * np.sum(win**2))
    scale_short = 2.0 / (nshort * np.sum(win_s**2))
    freqs = np.arange(nper // 2 + 1) * fs / nper
    freqs_s = np.arange(nshort // 2 + 1) * fs / nshort
    # the fine low-frequency PSD: longer segments of the same blocks, only the
    # bins up to FINE_TOP_HZ accumulated (the transform itself is full length)
    # Welch with Hann at 50 % overlap, like the normal PSD.  The first and last
    # half segment weigh less (see FINE_MIN_LENGTHS); the file is not zero-padded
    # to weigh them fully: its abrupt ends would then count as clicks (a 30 s,
    # 20 Hz tone read 1.2 dB high A-weighted).  75 % overlap (squared windows
    # adding to a constant) moved a level-change test by 0.004 dB for 1.2x the
    # sweep's CPU time, and was left out.
    nfine = fine_length(fs, nper, info.frames if info.frames > 0 else None)
    hop_f = nfine // 2
    win_f = hann_periodic(nfine) if nfine else np.zeros(0)
    n_keep = min(int(math.ceil(FINE_TOP_HZ * nfine / fs)) + 1, nfine // 2 + 1) if nfine else 0
    acc_f = np.zeros((nch, 2 * n_keep))
    n_seg_f = 0
    carry_f = np.zeros((nch, 0))
    work_f = np.zeros((0,))

    def fine_segments(buf):
        """Accumulate |X|² of the whole segments of ``buf``; returns how many."""
        nonlocal work_f
        segs = np.lib.stride_tricks.sliding_window_view(buf, nfine, axis=1)[:, ::hop_f]
        if work_f.shape != segs.shape:  # reused: fresh pages of a large array cost system time
            work_f = np.empty(segs.shape)
        np.multiply(segs, win_f, out=work_f)
        v = sfft.rfft(work_f, axis=-1)[..., :n_keep].view(np.float64)
        acc_f[:] += np.einsum("ijk,ijk->ik", v, v)
        return segs.shape[1]

    edges = critical_band_edges(fs / 2.0)
    band_of_bin = np.clip(np.searchsorted(edges, freqs_s, side="right") - 1, 0, len(edges) - 2)

    # Blocks are turned channel-major in the decode thread (see _channel_major).
    # |X|² is accumulated as re² and im² side by side (a float view of the
    # complex spectrum, squared in place): one pass, no complex temporaries.
    # The short-frame channel mean and scale are folded into the band matrix.
    # Bands are contiguous runs of bins: summed with np.add.reduceat (no BLAS
    # call, whose threads only cost time on a loaded machine).
    n_bands = len(edges) - 1
    filled = np.flatnonzero(np.bincount(band_of_bin, minlength=n_bands))
    starts = np.searchsorted(band_of_bin, filled)
    bin_weight = np.full(freqs_s.size, scale_short / nch)
    bin_weight[[0, -1]] *= 0.5  # the one-sided doubling does not apply to DC and Nyquist bins
    acc = np.zeros((nch, 2 * freqs.size))
    n_seg = 0
    carry = np.zeros((nch, 0))
    carry_s = np.zeros((nch, 0))
    kept: list[np.ndarray] = []
    frame_index = 0
    stride = 1
    peak = np.zeros(nch)
    sumsq = np.zeros(nch)
    sums = np.zeros(nch)
    at_full_scale = 0
    frames = 0
    near_full = 1.0 - 2.0**-15

    # The fine PSD's long transforms (about half of the pass's FFT work) run in
    # a helper thread, one block after another in file order (so the sums are
    # the same, bit for bit); numpy's FFT releases the GIL.  At most two blocks
    # wait for it (memory stays bounded).
    fine_lane = _Lane() if nfine and helper_threads() else None
    try:
        found = None
        # blocks arrive channel-major, (channels, frames): numpy reduces and transforms
        # contiguous rows several times faster than a column of 2 channels
        for block in _prefetched(audio.iter_blocks(path, blocksize=blocksize), prepare=_channel_major):
            if not looked_up and getattr(digest, "ready", bool)():
                found = lookup()  # the digest came in: a hit ends the pass here
                if found is not None:
                    break
            n = block.shape[1]
            frames += n
            block_peak = np.maximum(block.max(axis=1), -block.min(axis=1))
            peak = np.maximum(peak, block_peak)
            if np.any(block_peak > MAX_PEAK):
                raise AudioFileError(_overflow_message(info.path, float(np.max(block_peak))))
            sumsq += np.einsum("ij,ij->i", block, block)
            sums += block.sum(axis=1)
            if np.any(block_peak >= near_full):  # counted only where a sample can reach it
                at_full_scale += int(np.count_nonzero(np.abs(block) >= near_full))

            buf = np.concatenate([carry, block], axis=1) if carry.size else block
            if buf.shape[1] >= nper:
                segs = np.lib.stride_tricks.sliding_window_view(buf, nper, axis=1)[:, ::hop]  # (ch, nseg, nper)
                v = sfft.rfft(segs * win, axis=-1).view(np.float64)
                np.multiply(v, v, out=v)
                acc += v.sum(axis=1)
                n_seg += segs.shape[1]
                carry = buf[:, segs.shape[1] * hop :]
            else:
                carry = buf

            if nfine:
                buf_f = np.concatenate([carry_f, block], axis=1) if carry_f.size else block
                if buf_f.shape[1] >= nfine:
                    done = (buf_f.shape[1] - nfine) // hop_f + 1
                    if fine_lane is not None:
                        fine_lane.submit(fine_segments, buf_f)
                    else:
                        fine_segments(buf_f)
                    n_seg_f += done
                    carry_f = buf_f[:, done * hop_f :]
                else:
                    carry_f = buf_f

            buf_s = np.concatenate([carry_s, block], axis=1) if carry_s.size else block
            nfr = buf_s.shape[1] // nshort
            if nfr:
                # a frame whose index is not a multiple of the current stride is
                # never kept (the stride only grows), so it is not transformed
                idx = np.arange((-frame_index) % stride, nfr, stride)
                if idx.size:
                    frames_arr = buf_s[:, : nfr * nshort].reshape(nch, nfr, nshort)[:, idx]  # (ch, kept, nshort)
                    v = sfft.rfft(frames_arr * win_s, axis=-1).view(np.float64)
                    np.multiply(v, v, out=v)
                    pw = (v[..., 0::2] + v[..., 1::2]).sum(axis=0) * bin_weight  # (kept, bins)
                    bands = np.zeros((idx.size, n_bands))
                    bands[:, filled] = np.add.reduceat(pw, starts, axis=1)
                    for i, row in zip(idx.tolist(), bands):
                        if (frame_index + i) % stride == 0:
                            kept.append(row)
                            if len(kept) >= MAX_FRAMES:
                                kept = kept[::2]
                                stride *= 2
                frame_index += nfr
            carry_s = buf_s[:, nfr * nshort :]
            if progress is not None:
                progress(frames, max(info.frames, frames))

        if fine_lane is not None:
            fine_lane.drain()
    finally:
        if fine_lane is not None:
            fine_lane.close()
    if found is not None:
        return found
    acc = acc[:, 0::2] + acc[:, 1::2]
    if not looked_up:
        found = lookup()  # a short file can end before its digest does
        if found is not None:
            return found
    declared = audio.wav_declared_frames(path) if info.format == "WAV" else info.frames
    _warn_truncated(info.path, frames, declared)
    if frames < nshort or n_seg == 0:
        raise AudioFileError(
            f"{info.path}: {frames} frames is shorter than one analysis frame "
            f"({max(nshort, nper)} frames at {fs} Hz); accepted: at least {max(nshort, nper) / fs * 1000:.0f} ms of audio"
        )
    if not np.any(peak > 0):
        raise AudioFileError(f"{info.path}: digital silence (every sample is 0); no program to measure")
    top = float(np.max(peak))
    if top > MAX_PEAK or not np.all(np.isfinite(acc)) or not np.all(np.isfinite(sumsq)):
        raise AudioFileError(_overflow_message(info.path, top))
    if top < MIN_PEAK or not np.any(sumsq > 0):
        raise AudioFileError(
            f"{info.path}: peak {top:.3g} of full scale is below {MIN_PEAK:g} (-300 dBFS): "
            "silence for every purpose; no program to measure"
        )

    psd_ch = acc * scale_psd / n_seg
    psd_ch[:, 1:-1] *= 2.0  # one-sided
    fine_psd = np.zeros(0)
    if n_seg_f:
        fine_ch = (acc_f[:, 0::2] + acc_f[:, 1::2]) / (fs * np.sum(win_f**2) * n_seg_f)
        # one-sided, every bin doubled: the DC bin (and a kept Nyquist bin) then holds its
        # power over the half-width trapezoid weight, so a DC offset integrates exactly
        fine_ch *= 2.0
        fine_psd = fine_ch.mean(axis=0)
    else:
        nfine = n_keep = 0
    df = fs / nper
    a = Analysis(
        path=str(info.path),
        sha256=_digest_unchanged(digest, path, before),
        sample_rate_hz=fs,
        channels=nch,
        frames=frames,
        nperseg=nper,
        freqs_hz=freqs,
        psd_channels=psd_ch,
        psd=psd_ch.mean(axis=0),
        weights_hz=trapezoid_weights(freqs.size, df),
        peak=peak,
        mean_square=sumsq / frames,
        dc=sums / frames,
        full_scale_samples=at_full_scale,
        band_edges_hz=edges,
        band_frames=np.asarray(kept),
        frame_len=nshort,
        frame_stride=stride,
        meta={"format": info.format, "subtype": info.subtype, "welch_segments": n_seg, "fine_welch_segments": n_seg_f},
        fine_nperseg=nfine,
        fine_freqs_hz=np.arange(n_keep) * fs / nfine if nfine else np.zeros(0),
        fine_psd=fine_psd,
    )
    if declared and 0 < frames < declared:
        a.meta["declared_frames"] = int(declared)
    _warn_about(a)
    if cache is not None:
        if cache.store(a, blocksize=blocksize) is not None:
            cache.remember(path, before, a.sha256)
    return a


def _warn_truncated(path, frames: int, declared) -> None:
    if declared and 0 < frames < declared:
        # a truncated file: the header promises more than could be read
        audio.warn(
            f"{path}: the header promises {declared} frames but only {frames} could be read "
            "(truncated file?); the readable part is used"
        )


def _warn_about(a: Analysis) -> None:
    if a.full_scale_samples >= 4:
        audio.warn(
            f"{a.path}: {a.full_scale_samples} samples at digital full scale; the program may be "
            "clipped and nothing above full scale can be measured"
        )
    ms = float(np.mean(a.mean_square))
    dc_power = float(np.mean(a.dc**2))
    if ms > 0 and dc_power > 1e-4 * ms and np.max(np.abs(a.dc)) > 1e-4:
        audio.warn(
            f"{a.path}: DC offset of {np.max(np.abs(a.dc)):.2g} FS; it counts as program, so a "
            "highpass will report it as loss"
        )
