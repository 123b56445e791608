"""Programme loudness and true peak (ITU-R BS.1770-4), for the loudness-matched A/B clips.

Loudness: K-weighting, 400 ms blocks with 75 % overlap, absolute gate
−70 LKFS, relative gate −10 LU.  At 48 kHz the K-weighting uses the
coefficients published in BS.1770-4 Annex 1, Tables 1 and 2.  At other rates
it uses the same two biquads re-derived for the rate from the parameters that
reproduce the published 48 kHz coefficients (shelf gain 3.99984 dB, Q 0.70718,
1681.97 Hz; highpass Q 0.50033, 38.1355 Hz; the set pyloudnorm calls
'DeMan'): at 48 kHz that derivation agrees with the table to better than
10⁻⁸ (tested).  Short clips: BS.1770 gates on 400 ms blocks, so a clip (or a
file) shorter than 0.4 s is refused rather than measured some other way.

References
----------
.. [1] ITU-R BS.1770-4 (2015), *Algorithms to measure audio programme
   loudness and true-peak audio level*, Annex 1 (K-weighting, gating, eq. 1–7)
   and Annex 2 (true peak: 4× oversampling at 48 kHz).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import ParameterError


#: BS.1770-4 Annex 1, Table 1 (pre-filter, shelving) and Table 2 (RLB highpass), fs = 48 kHz.
K_WEIGHTING_48K_SOS = np.array(
    [
        [1.53512485958697, -2.69169618940638, 1.19839281085285, 1.0, -1.69065929318241, 0.73248077421585],
        [1.0, -2.0, 1.0, 1.0, -1.99004745483398, 0.99007225036621],
    ]
)
#: Parameters that reproduce the 48 kHz table when re-derived at 48 kHz (see module notes).
_SHELF = dict(gain_db=3.99984385397, q=0.7071752369554193, fc_hz=1681.9744509555319)
_HIGHPASS = dict(q=0.5003270373253953, fc_hz=38.13547087613982)
GATE_BLOCK_S = 0.4


# -- loudness and peaks -------------------------------------------------------


def k_weighting_sos(fs_hz: float) -> tuple[np.ndarray, str]:
    """The K-weighting as second-order sections for ``fs_hz``, and how it was obtained."""
    if fs_hz == 48000:
        return K_WEIGHTING_48K_SOS.copy(), "BS.1770-4 published 48 kHz coefficients"
    return k_weighting_derived_sos(fs_hz), f"BS.1770-4 K-weighting re-derived for {fs_hz:g} Hz"


def k_weighting_derived_sos(fs_hz: float) -> np.ndarray:
    """The two K-weighting biquads derived for ``fs_hz`` (bilinear, prewarped) from the shelf and
    highpass parameters that reproduce the published 48 kHz table."""
    k = math.tan(math.pi * _SHELF["fc_hz"] / fs_hz)
    vh = 10 ** (_SHELF["gain_db"] / 20.0)
    vb = vh**0.499666774155
    q = _SHELF["q"]
    a0 = 1.0 + k / q + k * k
    shelf = [
        (vh + vb * k / q + k * k) / a0,
        2.0 * (k * k - vh) / a0,
        (vh - vb * k / q + k * k) / a0,
        1.0,
        2.0 * (k * k - 1.0) / a0,
        (1.0 - k / q + k * k) / a0,
    ]
    k = math.tan(math.pi * _HIGHPASS["fc_hz"] / fs_hz)
    q = _HIGHPASS["q"]
    a0 = 1.0 + k / q + k * k
    hp = [1.0, -2.0, 1.0, 1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / q + k * k) / a0]
    return np.array([shelf, hp])


def channel_weights(channels: int) -> np.ndarray:
    """BS.1770-4 channel weights G_i: 1.0 for L, R, C; 1.41 for the two surrounds (channels 4, 5)."""
    g = np.ones(channels)
    g[3:5] = 1.41
    return g


def integrated_loudness(x: np.ndarray, fs_hz: float) -> float:
    """BS.1770-4 gated integrated loudness in LUFS (−inf for silence).

    Parameters
    ----------
    x : ndarray, (frames,) or (frames, channels)
        Samples, full scale 1.0; at least 0.4 s.
    fs_hz : float
    """
    from scipy import signal

    x = np.asarray(x, float)
    if x.ndim == 1:
        x = x[:, None]
    n_block = int(round(GATE_BLOCK_S * fs_hz))
    if x.shape[0] < n_block:
        raise ParameterError(
            f"loudness: {x.shape[0] / fs_hz:.3f} s is shorter than the 0.4 s BS.1770 "
            "gating block; accepted: clips of at least 0.4 s"
        )
    sos, _ = k_weighting_sos(fs_hz)
    y = signal.sosfilt(sos, x, axis=0)
    step = n_block // 4  # 75 % overlap
    n_blocks = (x.shape[0] - n_block) // step + 1
    csum = np.concatenate([np.zeros((1, x.shape[1])), np.cumsum(y**2, axis=0)])
    starts = np.arange(n_blocks) * step
    z = (csum[starts + n_block] - csum[starts]) / n_block  # eq. 1, per block and channel
    power = z @ channel_weights(x.shape[1])
    with np.errstate(divide="ignore"):
        lj = -0.691 + 10 * np.log10(power)  # eq. 4
    gated = lj >= -70.0  # absolute gate
    if not np.any(gated):
        return -math.inf
    gamma_r = -0.691 + 10 * math.log10(float(np.mean(power[gated]))) - 10.0  # eq. 6
    keep = gated & (lj > gamma_r)
    return -0.691 + 10 * math.log10(float(np.mean(power[keep])))  # eq. 7


def true_peak(x: np.ndarray) -> float:
    """Peak magnitude of ``x`` and of its 4× oversampled form (BS.1770-4 Annex 2), linear."""
    from scipy import signal

    x = np.asarray(x, float)
    if x.size == 0:
        return 0.0
    up = signal.resample_poly(x, 4, 1, axis=0)
    return float(max(np.max(np.abs(x)), np.max(np.abs(up))))


def _db(x: float) -> float:
    return 20 * math.log10(x) if x > 0 else -math.inf
