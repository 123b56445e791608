"""Masked threshold per short frame and critical band, and the noise-to-mask ratio.

Procedure (Johnston 1988, with the Schroeder, Atal & Hall 1979 spreading
function):

1. band powers B[t, b] of the unprocessed program per frame t and critical
   band b (dB SPL at the playback level);
2. spread across Bark: C = S · B, S[i, j] = 10^(SF(z_i − z_j)/10) with
   SF(Δz) = 15.81 + 7.5(Δz + 0.474) − 17.5·sqrt(1 + (Δz + 0.474)²) dB;
3. tonality α = min(SFM_dB / −60, 1) from the frame's spectral flatness;
   offset O_i = α(14.5 + i) + (1 − α)·5.5 dB (i: band number in Bark);
4. threshold T = C · 10^(−O/10), renormalised by the spreading gain of a flat
   spectrum, and never below the threshold in quiet.

The noise-to-mask ratio follows ITU-R BS.1387-1 ("Total NMR"): the mean over
frames of the mean over bands of error power / masked threshold, in dB.

References
----------
.. [1] M. R. Schroeder, B. S. Atal, J. L. Hall, "Optimizing digital speech
   coders by exploiting masking properties of the human ear", J. Acoust. Soc.
   Am. 66(6), 1647-1652, 1979.
.. [2] J. D. Johnston, "Transform coding of audio signals using perceptual
   noise criteria", IEEE J. Sel. Areas Commun. 6(2), 314-323, 1988.
.. [3] ITU-R BS.1387-1 (2001), *Method for objective measurements of
   perceived audio quality*, §5 (model output variable Total NMR).
.. [4] E. Zwicker, E. Terhardt, "Analytical expressions for critical-band rate
   and critical bandwidth", J. Acoust. Soc. Am. 68(5), 1523-1525, 1980.
"""

from __future__ import annotations

import numpy as np


def bark(freq_hz):
    """Critical-band rate in Bark (Zwicker & Terhardt 1980, eq. 1)."""
    f = np.asarray(freq_hz, dtype=float)
    return 13.0 * np.arctan(0.00076 * f) + 3.5 * np.arctan((f / 7500.0) ** 2)


def spreading_db(dz_bark):
    """Schroeder, Atal & Hall (1979) spreading function in dB at Δz = z_maskee − z_masker."""
    x = np.asarray(dz_bark, dtype=float) + 0.474
    return 15.81 + 7.5 * x - 17.5 * np.sqrt(1.0 + x * x)


def spreading_matrix(z_bark) -> np.ndarray:
    """S[i, j]: power spread from band j (masker) to band i (maskee)."""
    z = np.asarray(z_bark, dtype=float)
    return 10.0 ** (spreading_db(z[:, None] - z[None, :]) / 10.0)


def tonality(sfm_db):
    """Johnston (1988) tonality coefficient α = min(SFM_dB / −60, 1), clipped at 0."""
    return np.clip(np.asarray(sfm_db, dtype=float) / -60.0, 0.0, 1.0)


def spectral_flatness_db(power, axis=-1):
    """Spectral flatness (geometric over arithmetic mean) in dB along ``axis``."""
    p = np.maximum(np.asarray(power, dtype=float), 1e-30)
    return 10.0 * (np.mean(np.log10(p), axis=axis) - np.log10(np.mean(p, axis=axis)))


def masking_offset_db(alpha, z_bark):
    """Johnston (1988) offset O_i = α(14.5 + i) + (1 − α)·5.5 dB.

    ``alpha`` broadcasts against ``z_bark`` (i is taken as the band's Bark rate).
    """
    a = np.asarray(alpha, dtype=float)
    return a * (14.5 + np.asarray(z_bark, dtype=float)) + (1.0 - a) * 5.5


def masked_threshold(band_power, z_bark, alpha, quiet_power) -> np.ndarray:
    """Masked threshold (linear power, same units as ``band_power``).

    Parameters
    ----------
    band_power : ndarray (frames, bands)
        Program power per frame and critical band (e.g. Pa² re (20 µPa)²,
        i.e. 10^(dB SPL/10)).
    z_bark : ndarray (bands,)
        Bark rate of each band's centre.
    alpha : ndarray (frames,) or (frames, bands)
        Tonality in [0, 1].
    quiet_power : ndarray (bands,)
        Threshold in quiet per band, same units as ``band_power``.

    Returns
    -------
    ndarray (frames, bands)
    """
    b = np.asarray(band_power, dtype=float)
    s = spreading_matrix(z_bark)
    spread = b @ s.T
    gain = s.sum(axis=1)
    a = np.asarray(alpha, dtype=float)
    if a.ndim == 1:
        a = a[:, None]
    off = masking_offset_db(a, z_bark)
    thr = spread / gain * 10.0 ** (-off / 10.0)
    return np.maximum(thr, np.asarray(quiet_power, dtype=float)[None, :])


def nmr_db(error_power, mask_power) -> float:
    """Total NMR (ITU-R BS.1387-1): 10·lg of the mean over frames and bands of error/mask."""
    r = np.asarray(error_power, float) / np.asarray(mask_power, float)
    return float(10.0 * np.log10(max(np.mean(r), 1e-30)))


def audible_frames_pct(error_power, mask_power) -> float:
    """Share of frames (%) in which the error exceeds the masked threshold in any band."""
    over = np.asarray(error_power, float) > np.asarray(mask_power, float)
    return float(100.0 * np.mean(np.any(over, axis=-1)))
