"""The program's low band at a fraction of its sample rate, for the fine low-frequency PSD.

The fine PSD keeps only the bins below ``FINE_TOP_HZ`` (560 Hz) of transforms
131072 samples long (48 kHz), so most of a full-rate transform is thrown away.
Here the program is low-passed and decimated first, and the fine transforms
run at the low rate (a 16th of 48 kHz): the same bins for about a third of the
CPU time (0.85 → 0.3 s on a 10-minute stereo file).

The low-pass is a linear-phase FIR, a Kaiser-windowed sinc (J. F. Kaiser,
"Nonrecursive digital filter design using the I0-sinh window function", Proc.
IEEE ISCAS 1974: β = 0.1102·(A − 8.7) and N − 1 = (A − 7.95)/(2.285·Δω) for
an attenuation of A dB over a transition Δω rad/sample), cut off at half the
low rate, with ``STOPBAND_DB`` of attenuation from where its images would
reach the kept band (the low rate minus the top of that band).  It runs by
overlap-save in blocks of ``nfft`` samples; each block's output is decimated
in the frequency domain (the spectrum folded to the low rate, one short
inverse transform) and only the bins the stopband has not already emptied are
folded.  Its delay is a multiple of the factor, and it is taken out: the
decimated sample m is the filtered program at input sample D·m, so the fine
segments start where they start at full rate.

What differs from a full-rate fine transform: content above the stopband edge
folds into the kept band at ``STOPBAND_DB`` below its level, and the passband
gain (within a few 1e-7 of 1) is divided out of the PSD (:attr:`Decimator.gain2`).
"""

from __future__ import annotations

import math

import numpy as np
from numpy import fft as sfft

#: Attenuation of the decimating low-pass over its stopband, dB (what aliases into the kept band).
STOPBAND_DB = 150.0
#: The low rate is at least this many times the top of the kept band (fs/D ≥ 5·top): room for the
#: transition band, so the filter stays a few hundred taps.
RATE_OVER_TOP = 5.0


class Decimator:
    """A designed decimating low-pass for sample rate ``fs_hz`` keeping ``top_hz`` and below.

    ``factor`` is 1 (no decimation) when the rate is too low to gain from it.
    """

    def __init__(self, fs_hz: float, top_hz: float):
        d = 1
        while fs_hz / (2 * d) >= RATE_OVER_TOP * top_hz:
            d *= 2
        self.factor = d
        self.fs_hz = float(fs_hz)
        if d == 1:
            return
        low = fs_hz / d
        a = STOPBAND_DB
        dw = 2.0 * math.pi * ((low - top_hz) - top_hz) / fs_hz  # transition: top … low − top
        span = math.ceil((a - 7.95) / (2.285 * dw))
        m = d * math.ceil(span / (2 * d))  # half length, a multiple of d: the delay lands on a low-rate sample
        n = np.arange(-m, m + 1, dtype=float)
        fc = 0.5 * low / fs_hz  # cut-off, cycles per sample: half the low rate
        h = 2.0 * fc * np.sinc(2.0 * fc * n) * np.kaiser(2 * m + 1, 0.1102 * (a - 8.7))
        h /= h.sum()
        self.half = m
        self.taps = h
        nfft = 1 << max(12, math.ceil(math.log2(8 * 2 * m)))
        self.nfft = nfft
        self.hop = nfft - 2 * m
        self.low_len = nfft // d  # one block's output at the low rate (circular)
        # the filter's spectrum on the block's bins 0 … low_len (the rest is stopband, not folded)
        self.spectrum = sfft.rfft(h, nfft)[: self.low_len + 1]

    def gain2(self, freqs_hz: np.ndarray) -> np.ndarray:
        """|H(f)|² of the (zero-delay) low-pass at ``freqs_hz``, to divide out of a PSD."""
        if self.factor == 1:
            return np.ones(np.shape(freqs_hz))
        m = self.half
        w = 2.0 * np.pi * np.asarray(freqs_hz, dtype=float) / self.fs_hz
        # symmetric taps: H(e^{jw}) e^{jwm} = h[m] + 2 Σ_{i≥1} h[m+i] cos(w i), real
        i = np.arange(1, m + 1)
        g = self.taps[m] + 2.0 * (np.cos(np.multiply.outer(w, i)) @ self.taps[m + 1 :])
        return g * g


class StreamingDecimator:
    """Feed full-rate blocks (channels, frames) in order; get the low-rate samples as they are ready.

    The low-rate sample m is the low-passed program at input sample ``factor·m``
    (the filter's delay taken out; the program is taken as zero before its
    first sample and, at :meth:`finish`, after its last).
    """

    def __init__(self, dec: Decimator, channels: int):
        self.dec = dec
        # input history: 2·half zeros ahead of the first sample (the filter's span before sample 0)
        self.buf = np.zeros((channels, 2 * dec.half))
        self.skip = dec.half // dec.factor  # low-rate samples before input sample 0 (dropped)

    def push(self, block: np.ndarray) -> np.ndarray:
        """The low-rate samples completed by ``block`` (channels, n ≥ 0)."""
        buf = np.concatenate([self.buf, block], axis=1) if self.buf.size else block
        return self._run(buf)

    def finish(self) -> np.ndarray:
        """The remaining low-rate samples, the program continued with zeros until every input
        sample has its low-rate sample."""
        dec = self.dec
        # the carry ends at the last input sample; outputs up to input n need n + half + 1 samples of it
        have = self.buf.shape[1] - dec.half
        nb = -(-max(have, 1) // dec.hop)
        pad = (nb - 1) * dec.hop + dec.nfft - self.buf.shape[1]
        out = self._run(np.concatenate([self.buf, np.zeros((self.buf.shape[0], max(pad, 0)))], axis=1))
        self.buf = np.zeros((self.buf.shape[0], 0))
        return out

    def _run(self, buf: np.ndarray) -> np.ndarray:
        """Every whole overlap-save block of ``buf``; the rest kept for the next call."""
        dec = self.dec
        nb = (buf.shape[1] - dec.nfft) // dec.hop + 1 if buf.shape[1] >= dec.nfft else 0
        self.buf = buf[:, nb * dec.hop :]
        if not nb:
            return np.zeros((buf.shape[0], 0))
        frames = np.lib.stride_tricks.sliding_window_view(buf, dec.nfft, axis=1)[:, : (nb - 1) * dec.hop + 1 : dec.hop]
        return self._drop_lead(self._blocks(frames))

    def _drop_lead(self, out: np.ndarray) -> np.ndarray:
        if self.skip:
            k = min(self.skip, out.shape[1])
            out = out[:, k:]
            self.skip -= k
        return out

    def _blocks(self, frames: np.ndarray) -> np.ndarray:
        """Low-rate valid outputs of overlap-save blocks ``frames`` (channels, blocks, nfft)."""
        dec = self.dec
        p = dec.low_len
        y = sfft.rfft(frames, axis=-1)[..., : p + 1]
        y *= dec.spectrum
        # fold the spectrum to the low rate: bins k and p − k (the negative frequencies' copy)
        folded = y[..., : p // 2 + 1] + np.conj(y[..., p : p // 2 - 1 : -1])
        w = sfft.irfft(folded, p, axis=-1)
        w /= dec.factor
        valid = w[..., 2 * dec.half // dec.factor :]  # the overlap-save prefix dropped
        return valid.reshape(valid.shape[0], -1)


class LowBandWelch:
    """Welch's average of |X|² (Hann, 50 % overlap) over segments ``nfine`` input samples long,
    the bins below ``n_keep`` only, computed at the low rate when the sample rate allows.

    Feed blocks in order with :meth:`push`; :meth:`finish` gives the one-sided PSD per
    channel (the DC bin doubled like the rest, for its half-width trapezoid weight) and the
    number of segments, counting those that end within the program's ``frames`` samples.
    """

    def __init__(self, fs_hz: float, channels: int, nfine: int, n_keep: int, top_hz: float):
        from .segments import hann_periodic

        dec = Decimator(fs_hz, top_hz)
        if dec.factor > 1 and (nfine % (2 * dec.factor) or n_keep > nfine // (2 * dec.factor)):
            dec = Decimator(fs_hz, math.inf)  # factor 1
        self.dec = dec
        self.stream = StreamingDecimator(dec, channels) if dec.factor > 1 else None
        self.n = nfine // dec.factor  # segment length at the low rate
        self.hop = self.n // 2
        self.nfine = nfine
        self.win = hann_periodic(self.n)
        self.n_keep = n_keep
        self.acc = np.zeros((channels, 2 * n_keep))
        self.segments = 0
        self.carry = np.zeros((channels, 0))
        self._work = np.zeros((0,))

    def push(self, block: np.ndarray) -> None:
        """One full-rate block (channels, frames), in file order."""
        self._welch(self.stream.push(block) if self.stream is not None else block, None)

    def finish(self, frames: int) -> tuple[np.ndarray, int]:
        """(PSD per channel (channels, n_keep), segments) once every block has been pushed."""
        if self.stream is not None:
            self._welch(self.stream.finish(), frames)
        if not self.segments:
            return np.zeros((self.acc.shape[0], self.n_keep)), 0
        fs_low = self.dec.fs_hz / self.dec.factor
        psd = (self.acc[:, 0::2] + self.acc[:, 1::2]) / (fs_low * np.sum(self.win**2) * self.segments)
        psd *= 2.0
        if self.dec.factor > 1:
            psd /= self.dec.gain2(np.arange(self.n_keep) * (fs_low / self.n))
        return psd, self.segments

    def _welch(self, z: np.ndarray, frames: int | None) -> None:
        buf = np.concatenate([self.carry, z], axis=1) if self.carry.size else z
        if buf.shape[1] < self.n:
            self.carry = buf
            return
        done = (buf.shape[1] - self.n) // self.hop + 1
        if frames is not None:  # only segments that end within the program
            first = self.segments * self.hop * self.dec.factor  # input sample where this buffer starts
            done = max(0, min(done, (frames - self.nfine - first) // (self.hop * self.dec.factor) + 1))
        if done:
            segs = np.lib.stride_tricks.sliding_window_view(buf, self.n, axis=1)[
                :, : (done - 1) * self.hop + 1 : self.hop
            ]
            if self._work.shape != segs.shape:  # reused: fresh pages of a large array cost system time
                self._work = np.empty(segs.shape)
            np.multiply(segs, self.win, out=self._work)
            v = sfft.rfft(self._work, axis=-1)[..., : self.n_keep].view(np.float64)
            self.acc += np.einsum("ijk,ijk->ik", v, v)
            self.segments += done
        self.carry = buf[:, done * self.hop :]
