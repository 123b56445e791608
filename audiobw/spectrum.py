"""One streaming analysis pass over the program.

Everything the sweep scores is derived from this pass: the long-term power
spectral density (Welch's method, per channel and power-averaged over
channels), a second, finer Welch PSD of the low decades (Hann segments 8 times
longer, computed from the same blocks low-passed and decimated: the file is
still read once; :mod:`audiobw.decimate`), sample
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

import numpy as np
from numpy import fft as sfft  # the same pocketfft as scipy.fft, without importing scipy (about 0.3 s of start-up)

from . import audio
from .analysis import CROSSOVER_HALF_BINS, FINE_CROSSOVER_HZ, Analysis, occupied_band, trapezoid_weights
from .background import Lane, channel_major, digest_unchanged, hash_in_background, helper_threads, prefetched
from .decimate import LowBandWelch
from .errors import AudioFileError
from .segments import (
    FINE_MIN_LENGTHS,
    FINE_RESOLUTION_HZ,
    FRAME_SECONDS,
    PSD_RESOLUTION_HZ,
    fine_length,
    frame_lengths,
    hann_periodic,
)
from .weighting import critical_band_edges

#: Re-exported from here: the result of the pass (audiobw.analysis), the segment lengths and window
#: (audiobw.segments) and the helper-thread switch (audiobw.background); callers, the analysis
#: cache's key and the tests take them as audiobw.spectrum.X.
__all__ = [
    "CROSSOVER_HALF_BINS",
    "FINE_CROSSOVER_HZ",
    "FINE_MIN_LENGTHS",
    "FINE_RESOLUTION_HZ",
    "FINE_TOP_HZ",
    "FRAME_SECONDS",
    "MAX_FRAMES",
    "PSD_RESOLUTION_HZ",
    "Analysis",
    "analyse",
    "fine_length",
    "frame_lengths",
    "hann_periodic",
    "helper_threads",
    "occupied_band",
    "trapezoid_weights",
]

#: The fine PSD is kept up to this frequency, Hz; the crossover to the normal
#: PSD is chosen between FINE_CROSSOVER_HZ[0] and [1] (see Analysis.scoring_grid).
FINE_TOP_HZ = 560.0
#: At most this many short-time frames are kept (evenly spaced in time).
MAX_FRAMES = 1024


#: Sample peaks outside these (re full scale) hold no measurable program: below -300 dBFS is far under
#: any converter's LSB (32-bit integer: -187 dBFS); above +120 dBFS the powers overflow float64 sums.
MIN_PEAK, MAX_PEAK = 1e-15, 1e6


def _overflow_message(path, top: float) -> str:
    return (
        f"{path}: peak {top:.3g} of full scale is above {MAX_PEAK:g} (+120 dBFS): the samples overflow "
        "any converter; accepted: peaks up to +120 dBFS"
    )


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
    digest = (lambda: sha256) if sha256 else hash_in_background(path)
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
    # the fine low-frequency PSD: longer segments of the same blocks, only the bins up to
    # FINE_TOP_HZ accumulated, computed on the program low-passed and decimated to a fraction
    # of the sample rate (audiobw.decimate: the same bins as full-length transforms within
    # its 150 dB stopband, for about a third of the arithmetic).  Welch with Hann at 50 %
    # overlap, like the normal PSD.  The first and last half segment weigh less (see
    # FINE_MIN_LENGTHS); the file is not zero-padded to weigh them fully: its abrupt ends
    # would then count as clicks (a 30 s, 20 Hz tone read 1.2 dB high A-weighted).  75 %
    # overlap (squared windows adding to a constant) moved a level-change test by 0.004 dB
    # for 1.2x the sweep's CPU time, and was left out.
    nfine = fine_length(fs, nper, info.frames if info.frames > 0 else None)
    n_keep = min(int(math.ceil(FINE_TOP_HZ * nfine / fs)) + 1, nfine // 2 + 1) if nfine else 0
    low_band = LowBandWelch(fs, nch, nfine, n_keep, FINE_TOP_HZ) if nfine else None

    edges = critical_band_edges(fs / 2.0)
    band_of_bin = np.clip(np.searchsorted(edges, freqs_s, side="right") - 1, 0, len(edges) - 2)

    # Blocks are turned channel-major in the decode thread (see channel_major).
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
    peak = np.zeros(nch)
    sumsq = np.zeros(nch)
    sums = np.zeros(nch)
    at_full_scale = 0
    frames = 0
    near_full = 1.0 - 2.0**-15
    carry_s = np.zeros((nch, 0))
    kept: list[np.ndarray] = []
    frame_index = 0
    stride = 1

    def short_frames(block):
        """The critical-band powers of the short frames completed by ``block`` (every
        ``stride``-th frame kept, at most MAX_FRAMES: the stride doubles when they fill)."""
        nonlocal carry_s, kept, frame_index, stride
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

    def side_work(block):
        """What does not need the main thread: the fine PSD's decimation and transforms, the short frames."""
        if low_band is not None:
            low_band.push(block)
        short_frames(block)

    def prepared(block_fc):
        """A decoded block made channel-major, with its sample statistics (in the decode thread):
        (block, peak per channel, Σx², Σx, samples at full scale)."""
        block = channel_major(block_fc)
        block_peak = np.maximum(block.max(axis=1), -block.min(axis=1))
        if (block_peak > MAX_PEAK).any():  # refused by the consumer; its squares could overflow
            return block, block_peak, np.zeros(nch), np.zeros(nch), 0
        full = int(np.count_nonzero(np.abs(block) >= near_full)) if (block_peak >= near_full).any() else 0
        return block, block_peak, np.einsum("ij,ij->i", block, block), block.sum(axis=1), full

    # The fine PSD's decimation and transforms and the short frames run in a helper
    # thread, one block after another in file order (so the sums are the same, bit for
    # bit); numpy's FFT releases the GIL.  At most two blocks wait for it (memory stays
    # bounded).  The sample statistics are taken in the decode thread.
    side_lane = Lane() if helper_threads() else None
    try:
        found = None
        # blocks arrive channel-major, (channels, frames): numpy reduces and transforms
        # contiguous rows several times faster than a column of 2 channels
        for block, block_peak, block_sq, block_sum, block_full in prefetched(
            audio.iter_blocks(path, blocksize=blocksize), prepare=prepared
        ):
            if not looked_up and getattr(digest, "ready", bool)():
                found = lookup()  # the digest came in: a hit ends the pass here
                if found is not None:
                    break
            n = block.shape[1]
            frames += n
            peak = np.maximum(peak, block_peak)
            if (block_peak > MAX_PEAK).any():
                raise AudioFileError(_overflow_message(info.path, float(block_peak.max())))
            sumsq += block_sq
            sums += block_sum
            at_full_scale += block_full

            if side_lane is not None:
                side_lane.submit(side_work, block)
            else:
                side_work(block)

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
            if progress is not None:
                progress(frames, max(info.frames, frames))

        if side_lane is not None:
            side_lane.drain()
    finally:
        if side_lane is not None:
            side_lane.close()
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
    # one-sided, every bin doubled: the DC bin (and a kept Nyquist bin) then holds its
    # power over the half-width trapezoid weight, so a DC offset integrates exactly
    fine_ch, n_seg_f = low_band.finish(frames) if low_band is not None else (np.zeros((nch, 0)), 0)
    if n_seg_f:
        fine_psd = fine_ch.mean(axis=0)
    else:
        fine_psd = np.zeros(0)
        nfine = n_keep = 0
    df = fs / nper
    a = Analysis(
        path=str(info.path),
        sha256=digest_unchanged(digest, path, before),
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
