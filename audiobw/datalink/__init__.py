"""Data and pulse programs: the bandwidth a bit stream needs, its eye and its error rate.

Two views of each candidate, both reported:

**Measured on the recording** (``eye_fraction``, ``q``, ``ber``,
``ber_worst``): the recorded stream — its own channel and noise included — is
passed through the candidate in the frequency domain (one FFT of the stream,
times H(f) of the case, inverse FFT), the bit clock is recovered from the
recording's zero crossings, and at each trial instant the samples are sorted
by the bit each carries (the recording sliced at the middle of its own bits).
A least-squares fit of each sample on its own and its neighbours' symbols
(linear inter-symbol interference; Proakis & Salehi §9.2) gives the level
means conditioned on the pattern (the channel's cursors) and, in its
residual, the recording's own noise at the decision point.  The chain's
modelled noise is added in power to that variance.  See :func:`measure_stream`.

**Ideal pulse** (``eye_ideal``, ``q_ideal``, ``ber_ideal``): the candidate
alone on a perfect NRZ stream.  For a polar NRZ stream of bit period T = 1/R
through a candidate filter, the channel's unit pulse response y(t) is
computed from the case's response (in the frequency domain, never by
filtering the file), and then:

* worst-case vertical eye opening at the best sampling instant, by
  peak-distortion analysis of inter-symbol interference: for sampling phase
  τ and main cursor y0(τ), the opening relative to the unfiltered one is
  ``y0(τ) − Σ_{k≠0} |yk(τ)|`` (yk = y(τ + kT)); the best τ maximises it;
* noise σ at the decision point: the chain's output noise over 0…fs/2;
* Q = (opening / 2) / σ and the worst-pattern bound ``ber_worst`` =
  ½·erfc(Q/√2) (Gaussian noise);
* ``ber``: the error rate averaged over a PRBS-7 pattern at its best
  sampling instant, each bit with its own margin (what ``--max-ber`` tests);
* data-dependent jitter: the peak-to-peak spread of the zero crossings of the
  noiseless output for a PRBS-7 pattern, in unit intervals.

The minimum bandwidth of a binary stream is 1/(2T) (Nyquist): the fastest
pattern 1010… has its fundamental there.

Digital stage: the stream is taken band-limited to fs/2, as the recording
holds it; the digital filter then acts on it.  (The chain's noise and
harmonics follow ``--anti-alias``: :mod:`audiobw.noise`.)

References
----------
.. [1] H. Nyquist, "Certain topics in telegraph transmission theory",
   Trans. AIEE 47, 617–644, 1928 (minimum bandwidth 1/(2T)).
.. [2] J. G. Proakis, M. Salehi, *Digital Communications*, 5th ed., §9.2
   (inter-symbol interference, peak distortion) and §4.2 (error probability
   of binary antipodal signalling, ½·erfc(√(Eb/N0))).
.. [3] ITU-T O.150 (05/96), §5: pseudo-random test patterns (2^7 − 1,
   2^9 − 1, 2^15 − 1 and their generator polynomials).
.. [4] S. D. Personick, "Receiver design for digital fiber optic
   communication systems", Bell Syst. Tech. J. 52(6), 843–874, 1973 (the
   Q-factor of two Gaussian levels, BER = ½·erfc(Q/√2); from memory).

Layout
------
:mod:`.pulse` the ideal-pulse view (patterns, NRZ, the pulse response, eye,
jitter, BER); :mod:`.stream` the program (the recorded stream, its clock and
bit rate, :class:`DataProgram`); :mod:`.score` one case (the stream through
the candidate, :func:`measure_stream`, :func:`score_data`).  Everything is
imported from ``audiobw.datalink``.
"""

from __future__ import annotations

from .pulse import (
    OVERSAMPLE,
    PATTERNS,
    PRBS_TAPS,
    average_ber,
    ber_from_q,
    complex_response,
    crossing_jitter_ui,
    eye_from_pulse,
    nrz_stream,
    prbs,
    pulse_response,
)
from .score import PHASES_PER_UI, filtered_stream, measure_stream, score_data
from .stream import (
    MAX_STREAM_BITS,
    MIN_CLOCK_COHERENCE,
    MIN_STREAM_BITS,
    DataProgram,
    RecordedStream,
    data_program_for,
    read_stream,
    recorded_stream,
    recover_bit_rate,
    recover_clock,
    reference_symbols,
    smoothed_stream,
)

__all__ = [
    "MAX_STREAM_BITS",
    "MIN_CLOCK_COHERENCE",
    "MIN_STREAM_BITS",
    "OVERSAMPLE",
    "PATTERNS",
    "PHASES_PER_UI",
    "PRBS_TAPS",
    "DataProgram",
    "RecordedStream",
    "average_ber",
    "ber_from_q",
    "complex_response",
    "crossing_jitter_ui",
    "data_program_for",
    "eye_from_pulse",
    "filtered_stream",
    "measure_stream",
    "nrz_stream",
    "prbs",
    "pulse_response",
    "read_stream",
    "recorded_stream",
    "recover_bit_rate",
    "recover_clock",
    "reference_symbols",
    "score_data",
    "smoothed_stream",
]
