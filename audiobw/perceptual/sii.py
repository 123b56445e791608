"""Speech Intelligibility Index, ANSI S3.5-1997 one-third-octave band procedure.

Steps (clause numbers of ANSI S3.5-1997):

- self-speech masking V_i = E'_i − 24 dB (4.3.2.1); B_i = max(N'_i, V_i);
- upward spread of masking: slope C_i = −80 + 0.6[B_i + 10 lg F_i − 6.353]
  dB/octave, Z_i = 10 lg[10^(0.1 N'_i) + Σ_{k<i} 10^(0.1[B_k + 3.32 C_k lg(0.89 F_i/F_k)])]
  (4.3.2.3; Z_1 = B_1);
- equivalent internal noise X_i = X'_i + T'_i (4.4), T'_i the hearing
  threshold level in dB HL; disturbance D_i = max(Z_i, X_i) (4.5);
- level distortion L_i = 1 − (E'_i − U_i − 10)/160, at most 1 (4.6);
- band audibility K_i = (E'_i − D_i + 15)/30 clipped to [0, 1], A_i = L_i K_i (4.7);
- SII = Σ I_i A_i (4.8).

All levels are spectrum levels (dB SPL per Hz, free field).  The tables below
are ANSI S3.5-1997 Table 3 (one-third-octave procedure).  They were written
from memory and then compared, number by number, with the public
transcription in MoSQITo (``sii_ansi/_band_procedure_data.py``): all agree.

References
----------
.. [1] ANSI S3.5-1997 (R2007), *Methods for Calculation of the Speech
   Intelligibility Index*, clause 4 and Table 3.
"""

from __future__ import annotations

import numpy as np

#: Table 3: band centre frequencies F_i (Hz).
# fmt: off
CENTRES_HZ = np.array([160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250,
                       1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000], float)
# fmt: on
#: Table 3: band importance I_i (average speech).
# fmt: off
IMPORTANCE = np.array([0.0083, 0.0095, 0.0150, 0.0289, 0.0440, 0.0578, 0.0653,
                       0.0711, 0.0818, 0.0844, 0.0882, 0.0898, 0.0868, 0.0844,
                       0.0771, 0.0527, 0.0364, 0.0185])
# fmt: on
#: Table 3: standard speech spectrum level U_i, normal vocal effort (dB SPL/Hz).
# fmt: off
SPEECH_NORMAL_DB = np.array([32.41, 34.48, 34.75, 33.98, 34.59, 34.27, 32.06,
                             28.30, 25.01, 23.00, 20.15, 17.32, 13.18, 11.55,
                             9.33, 5.31, 2.59, 1.13])
# fmt: on
#: Table 3: reference internal noise spectrum level X'_i (dB SPL/Hz).
# fmt: off
INTERNAL_NOISE_DB = np.array([0.6, -1.7, -3.9, -6.1, -8.2, -9.7, -10.8, -11.9,
                              -12.5, -13.5, -15.4, -17.7, -21.2, -24.2, -25.9,
                              -23.6, -15.8, -7.1])
# fmt: on
#: Overall level of the standard speech spectrum at normal vocal effort (dB SPL),
#: ANSI S3.5-1997 Table 3 / clause 3.
NORMAL_EFFORT_SPL_DB = 62.35

# 10 lg of a one-third-octave bandwidth relative to F_i: 10 lg(0.2316) = −6.353,
# the constant of the standard's slope equation (4.3.2.3).
_BW_DB = 10.0 * np.log10(CENTRES_HZ) - 6.353
# lg(0.89 F_i/F_k) of the upward spread (4.3.2.3), row i, column k; only k < i counts
_SPREAD_LG = np.log10(0.89 * CENTRES_HZ[:, None] / CENTRES_HZ[None, :])
_LOWER = np.tri(18, 18, -1, dtype=bool)
BAND_EDGES_HZ = np.stack([CENTRES_HZ * 2 ** (-1 / 6), CENTRES_HZ * 2 ** (1 / 6)], axis=1)


def band_spectrum_levels(freqs_hz, psd, weights_hz) -> np.ndarray:
    """Spectrum levels (10 lg of mean power density) in the 18 bands of Table 3.

    ``psd`` is a one-sided power density in (units)²/Hz on ``freqs_hz``;
    ``weights_hz`` the integration weight of each bin.  Units pass through:
    give Pa²/Hz re (20 µPa)² to get dB SPL/Hz.  Bands with no bins get −inf.
    """
    f = np.asarray(freqs_hz, float)
    p = np.asarray(psd, float) * np.asarray(weights_hz, float)
    cum = np.concatenate([[0.0], np.cumsum(p, axis=-1)])
    lo = np.searchsorted(f, BAND_EDGES_HZ[:, 0])
    hi = np.searchsorted(f, BAND_EDGES_HZ[:, 1])
    power = cum[hi] - cum[lo]
    width = BAND_EDGES_HZ[:, 1] - BAND_EDGES_HZ[:, 0]
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(power / width)


def band_audibility(speech_db, noise_db, hearing_hl_db=None) -> np.ndarray:
    """A_i = L_i K_i for the 18 bands (ANSI S3.5-1997 clause 4)."""
    e = np.asarray(speech_db, float)
    n = np.asarray(noise_db, float)
    t = np.zeros(18) if hearing_hl_db is None else np.asarray(hearing_hl_db, float)
    n = np.maximum(n, -200.0)
    v = e - 24.0
    b = np.maximum(n, v)
    c = -80.0 + 0.6 * (b + _BW_DB)
    # Σ_{k<i} 10^(0.1[B_k + 3.32 C_k lg(0.89 F_i/F_k)]) for every i at once (k < i only)
    spread = np.where(_LOWER, b[None, :] + 3.32 * c[None, :] * _SPREAD_LG, -np.inf)
    z = 10.0 * np.log10(10.0 ** (0.1 * n) + np.sum(10.0 ** (0.1 * spread), axis=1))
    z[0] = b[0]
    x = INTERNAL_NOISE_DB + t
    d = np.maximum(z, x)
    level = np.minimum(1.0 - (e - SPEECH_NORMAL_DB - 10.0) / 160.0, 1.0)
    k = np.clip((e - d + 15.0) / 30.0, 0.0, 1.0)
    return level * k


def sii(speech_db, noise_db, hearing_hl_db=None) -> float:
    """Speech Intelligibility Index in [0, 1].

    Parameters
    ----------
    speech_db, noise_db : array_like (18,)
        Equivalent speech and noise spectrum levels E'_i, N'_i (dB SPL/Hz) in
        the bands of :data:`CENTRES_HZ`; −inf is allowed for no noise.
    hearing_hl_db : array_like (18,), optional
        Hearing threshold levels T'_i (dB HL); default 0.
    """
    return float(np.sum(IMPORTANCE * band_audibility(speech_db, noise_db, hearing_hl_db)))
