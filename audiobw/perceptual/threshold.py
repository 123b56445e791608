"""Threshold of hearing in quiet, and audiograms.

The threshold in quiet is the T_f column of ISO 226:2003 Table 1 (free-field
binaural threshold of hearing of otologically normal young listeners, dB SPL),
interpolated linearly in log-frequency between the listed frequencies.  Above
12.5 kHz, where ISO 226 stops, the free-field reference thresholds of
ISO 389-7:2005 are used.  An audiogram (dB HL at the standard audiometric
frequencies) adds to that reference: ISO 389-7 defines 0 dB HL in the free
field as these same thresholds.

References
----------
.. [1] ISO 226:2003, *Acoustics — Normal equal-loudness-level contours*,
   Table 1, column T_f.
.. [2] ISO 389-7:2005, *Acoustics — Reference zero for the calibration of
   audiometric equipment — Part 7: Reference threshold of hearing under
   free-field and diffuse-field listening conditions*, Table 1.
.. [3] E. Terhardt, "Calculating virtual pitch", Hearing Research 1, 155-182,
   1979 (the analytic approximation used only as a sanity check in tests).
"""

from __future__ import annotations

import numpy as np

# ISO 226:2003 Table 1: frequencies (Hz) and T_f (dB SPL).  Values from memory.
# fmt: off
ISO226_FREQS_HZ = np.array([
    20, 25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630,
    800, 1000, 1250, 1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000, 10000,
    12500], dtype=float)
# fmt: on
# fmt: off
ISO226_TF_DB = np.array([
    78.5, 68.7, 59.5, 51.1, 44.0, 37.5, 31.5, 26.5, 22.1, 17.9, 14.4, 11.4,
    8.6, 6.2, 4.4, 3.0, 2.2, 2.4, 3.5, 1.7, -1.3, -4.2, -6.0, -5.4, -1.5, 6.0,
    12.6, 13.9, 12.3])
# fmt: on

# ISO 389-7:2005 Table 1 free-field reference thresholds above ISO 226's range
# (dB SPL).  From memory: verify against the standard before relying on them
# for audiometric work.
ISO389_7_HIGH_FREQS_HZ = np.array([14000.0, 16000.0])
ISO389_7_HIGH_DB = np.array([18.4, 40.2])

# Above 16 kHz the threshold rises steeply; the 14->16 kHz slope is continued
# (common practice) and the result capped at this level (dB SPL).
CEILING_DB = 120.0

#: Standard audiometric frequencies (Hz), ISO 8253-1 / ISO 389-7 (common practice).
AUDIOMETRIC_FREQS_HZ = (125.0, 250.0, 500.0, 750.0, 1000.0, 1500.0, 2000.0, 3000.0, 4000.0, 6000.0, 8000.0)

_F = np.concatenate([ISO226_FREQS_HZ, ISO389_7_HIGH_FREQS_HZ])
_T = np.concatenate([ISO226_TF_DB, ISO389_7_HIGH_DB])
_LOGF = np.log10(_F)


def threshold_in_quiet_db(freq_hz, audiogram_hl=None) -> np.ndarray:
    """Threshold of hearing in quiet in dB SPL at ``freq_hz``.

    Parameters
    ----------
    freq_hz : array_like of float, > 0
        Frequencies in Hz.  Below 20 Hz the 20-25 Hz slope is continued; above
        16 kHz the 14-16 kHz slope is continued; both capped at 120 dB SPL.
    audiogram_hl : mapping {frequency_hz: dB HL}, optional
        Hearing threshold level, added to the reference after interpolation in
        log-frequency; held constant beyond its first and last frequency.

    Returns
    -------
    ndarray of float
        dB SPL (free field), same shape as ``freq_hz``.
    """
    f = np.asarray(freq_hz, dtype=float)
    lf = np.log10(np.maximum(f, 1e-3))
    t = np.interp(lf, _LOGF, _T)
    lo_slope = (_T[1] - _T[0]) / (_LOGF[1] - _LOGF[0])
    hi_slope = (_T[-1] - _T[-2]) / (_LOGF[-1] - _LOGF[-2])
    t = np.where(lf < _LOGF[0], _T[0] + lo_slope * (lf - _LOGF[0]), t)
    t = np.where(lf > _LOGF[-1], _T[-1] + hi_slope * (lf - _LOGF[-1]), t)
    t = np.minimum(t, CEILING_DB)
    if audiogram_hl:
        t = np.minimum(t + audiogram_loss_db(f, audiogram_hl), CEILING_DB)
    return t


def audiogram_loss_db(freq_hz, audiogram_hl) -> np.ndarray:
    """dB HL of an audiogram at ``freq_hz``, interpolated in log-frequency."""
    items = sorted((float(k), float(v)) for k, v in dict(audiogram_hl).items())
    fa = np.log10([k for k, _ in items])
    va = np.array([v for _, v in items])
    return np.interp(np.log10(np.maximum(np.asarray(freq_hz, float), 1e-3)), fa, va)


def parse_audiogram(text: str) -> dict[float, float]:
    """Parse ``"500:10,1000:15,2000:30,4000:45"`` (Hz:dB HL pairs) into a dict.

    Raises
    ------
    ValueError
        With the offending item and what is accepted.
    """
    out: dict[float, float] = {}
    for item in str(text).replace(";", ",").split(","):
        item = item.strip()
        if not item:
            continue
        try:
            f_s, l_s = item.split(":")
            f, level = float(f_s), float(l_s)
        except ValueError:
            raise ValueError(f"audiogram item {item!r} is not FREQ_HZ:DB_HL (e.g. 1000:20)") from None
        if not (100.0 <= f <= 16000.0):
            raise ValueError(f"audiogram frequency {f:g} Hz outside 100-16000 Hz")
        if not (-20.0 <= level <= 120.0):
            raise ValueError(f"audiogram level {level:g} dB HL outside -20..120 dB HL")
        out[f] = level
    if not out:
        raise ValueError("audiogram is empty; give FREQ_HZ:DB_HL pairs, e.g. 1000:20,4000:40")
    return out
