"""Noise at the chain output: spectra of each contributor and the budget.

One anti-alias assumption (``Chain.anti_alias``) governs noise and harmonics
alike:

* ``'none'`` (the default): the converter has no anti-alias filter of its own.
  Everything that reaches it above fs/2 folds into 0…fs/2.  On the analog
  stage the candidate filter is the only anti-alias filter (the common front
  end): the amplifier's white noise, shaped by the candidate (and the
  amplifier's own pole, ``amp_bandwidth_hz``), is folded image by image, so a
  meter band narrower than 0…fs/2 sees the right share.  On the digital stage
  the amplifier's noise reaches the converter shaped by its own pole only,
  folds there, and is then shaped by the digital filter.  A case whose noise
  would have no bound (an analog response that never falls, such as a
  highpass or an even-order elliptic, or the digital stage, with no
  ``amp_bandwidth_hz``) is refused: :func:`check_noise_bounded`.
* ``'ideal'``: a brick-wall at fs/2 ahead of the converter.  Nothing folds:
  the amplifier's noise counts over 0…fs/2 only, shaped by the candidate
  (analog stage) and the amplifier's pole.

Quantisation and dither are white over 0…fs/2; the digital filter shapes
them, the analog one does not.

References
----------
.. [1] C. D. Motchenbacher, J. A. Connelly, *Low-Noise Electronic System
   Design*, Wiley 1993, ch. 1–2 (noise bandwidth, e_n–i_n amplifier model,
   total input noise e_ni² = 4kTRs + e_n² + (i_n·Rs)²).
.. [2] AES17-2020 §3 (dBFS re a full-scale sine).
.. [3] All images at once, in closed form: partial fractions of H(s)H(−s)
   and the expansion of the cotangent in partial fractions,
   π·cot(πw) = Σₘ 1/(w + m) (symmetric summation); M. Abramowitz,
   I. A. Stegun, *Handbook of Mathematical Functions*, 4.3.91 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .chain import Chain, vrms_to_dbu
from .errors import ParameterError
from .filters import Filter, FilterSpec, design

#: 1/f noise is integrated from this frequency, Hz: the lower limit of the
#: "0.1 Hz to 10 Hz" low-frequency noise figure of amplifier data sheets
#: (common practice); below it the flicker is drift over a recording, not noise.
FLICKER_FROM_HZ = 0.1


def flicker_per_hz(freqs_hz: np.ndarray, weights_hz: np.ndarray) -> np.ndarray:
    """Each bin's mean of 1/f over the band it stands for (1/Hz), from :data:`FLICKER_FROM_HZ`.

    Bin k stands for the frequencies between the midpoints to its neighbours
    (the first from its own frequency, the last to its own), which matches
    trapezoid weights; the mean of 1/f there is ln(f_hi/f_lo)/w_k, so that
    Σ_k c/f̄_k·w_k over whole bins is exactly c·ln(f2/f1) — the integral of a
    1/f density, finite at 0 Hz.
    """
    f = np.asarray(freqs_hz, dtype=float)
    w = np.asarray(weights_hz, dtype=float)
    if f.size < 2:
        return np.zeros_like(f)
    mid = 0.5 * (f[1:] + f[:-1])
    lo = np.maximum(np.concatenate([[f[0]], mid]), FLICKER_FROM_HZ)
    hi = np.concatenate([mid, [f[-1]]])
    out = np.zeros_like(f)
    ok = (hi > lo) & (w > 0)
    out[ok] = np.log(hi[ok] / lo[ok]) / w[ok]
    return out


#: Images of the analog response folded explicitly before the rest is spread.
MAX_IMAGES = 64
COMPONENTS = ("source_thermal", "amplifier_voltage", "amplifier_current", "quantisation", "dither")


def with_amplifier_pole(filt: Filter, amp_bandwidth_hz: float | None) -> Filter:
    """The analog response seen by amplifier noise: the filter times the amplifier's own pole."""
    if amp_bandwidth_hz is None or not filt.analog:
        return filt
    wa = 2.0 * math.pi * amp_bandwidth_hz / filt.ref_rad_s
    return Filter(filt.spec, filt.z, np.concatenate([filt.p, [-wa]]), filt.k * wa, filt.ref_rad_s)


def amplifier_pole(amp_bandwidth_hz: float) -> Filter:
    """The amplifier's own one-pole response at ``amp_bandwidth_hz`` (analog), 1/(1 + jf/f_a)."""
    return design(FilterSpec("lowpass", "butterworth", 1, None, float(amp_bandwidth_hz)))


def unbounded_reason(chain: Chain, filt: Filter) -> str | None:
    """Why the noise reaching the converter has no bound under ``chain.anti_alias``, or None."""
    if chain.anti_alias == "ideal" or chain.amp_bandwidth_hz is not None or chain.density_amplifier_v2_hz() == 0:
        return None
    if not filt.analog:
        return "on the digital stage no filter ahead of the converter limits the amplifier's noise"
    floor = filt.floor_gain()
    if floor > 0:
        return (
            f"the analog {filt.spec.label()} passes noise to infinite frequency "
            f"(|H| stays at {10 * math.log10(floor):.0f} dB)"
        )
    return None


def check_noise_bounded(chain: Chain, filt: Filter) -> None:
    """Refuse a case whose folded noise would be infinite (``anti_alias='none'``, nothing bounding it).

    Raises
    ------
    ParameterError
        One line naming ``--anti-alias`` and ``--amp-bandwidth``.
    """
    reason = unbounded_reason(chain, filt)
    if reason is not None:
        raise _unbounded(reason)


def _unbounded(reason: str) -> ParameterError:
    return ParameterError(
        f"--anti-alias none: {reason}, so its folded noise is unbounded; accepted: "
        "--amp-bandwidth HZ (the amplifier's bandwidth bounds it) or --anti-alias ideal "
        "(a brick-wall at fs/2 ahead of the converter)"
    )


def _images_closed_form(filt: Filter, freqs_hz: np.ndarray, fs_hz: float) -> np.ndarray | None:
    """Σ over every integer m of |H(f + m·fs)|² on ``freqs_hz`` (a response that falls), in closed form.

    With simple poles pᵢ of H (normalised), H(s)H(−s) = Σᵢ rᵢ·[1/(s − pᵢ) − 1/(s + pᵢ)],
    rᵢ its residue at pᵢ; summed over s = j(x + mT) (x = 2πf/ω_ref, T = 2π·fs/ω_ref)
    each term is a cotangent (reference [3]):
    Σ = Re Σᵢ rᵢ·(−jπ/T)·[cot(π(x + jpᵢ)/T) − cot(π(x − jpᵢ)/T)],
    written here with real half-angle functions, which stay accurate for poles
    near the axis; a conjugate pair counts twice its upper member.  Returns None
    where it does not apply (repeated or unstable poles, an improper response,
    cosh overflow, or cancellation worse than 1e-9 of the result); the caller
    then folds image by image.
    """
    z, p, k = np.asarray(filt.z, complex), np.asarray(filt.p, complex), float(filt.k)
    n = p.size
    if n == 0 or z.size > n or np.any(p.real >= 0):
        return None
    size = float(np.max(np.abs(p)))
    gaps = np.abs(p[:, None] - p[None, :]) + np.eye(n) * size
    if np.min(gaps) < 1e-6 * size:
        return None
    period = 2.0 * math.pi * fs_hz / filt.ref_rad_s
    half_beta = math.pi * (-p.real) / period
    if np.max(half_beta) > 300.0:
        return None
    upper = p.imag > 1e-12 * np.abs(p)
    single = np.abs(p.imag) <= 1e-12 * np.abs(p)
    use = upper | single
    if 2 * int(np.count_nonzero(upper)) + int(np.count_nonzero(single)) != n:
        return None
    # the residues depend on the normalised prototype only: shared by every cutoff
    cache = filt._proto if filt._proto is not None else filt._cache
    resid = cache.get("image_residues")
    if resid is None:
        pz = p[:, None] - z[None, :] if z.size else np.ones((n, 1), complex)
        mz = -p[:, None] - z[None, :] if z.size else np.ones((n, 1), complex)
        off = np.where(np.eye(n, dtype=bool), 1.0, p[:, None] - p[None, :])
        resid = (k * np.prod(pz, axis=1) / np.prod(off, axis=1)) * (
            k * np.prod(mz, axis=1) / np.prod(-p[:, None] - p[None, :], axis=1)
        )
        cache["image_residues"] = resid
    theta_half = math.pi * np.asarray(freqs_hz, dtype=float) / fs_hz
    st, ct = np.sin(theta_half), np.cos(theta_half)
    out = np.zeros_like(theta_half)
    bound = np.zeros_like(theta_half)
    for r, b, be, weight in zip(resid[use], p.imag[use], half_beta[use], np.where(upper, 2.0, 1.0)[use]):
        ph = math.pi * b / period
        cp, sp = math.cos(ph), math.sin(ph)
        sh2 = 2.0 * math.sinh(be) ** 2
        sinh2 = math.sinh(2.0 * be)
        a1, b1 = st * cp, ct * sp
        s1, s2 = a1 - b1, a1 + b1
        c1, c2 = ct * cp + st * sp, ct * cp - st * sp
        d1 = 1.0 / (sh2 + 2.0 * s1 * s1)
        d2 = 1.0 / (sh2 + 2.0 * s2 * s2)
        term = weight * (r.real * sinh2 * (d1 + d2) + r.imag * 2.0 * (s1 * c1 * d1 - s2 * c2 * d2))
        out += term
        bound += np.abs(term)
    if not np.all(np.isfinite(out)) or 1e-16 * float(np.max(bound)) > 1e-9 * float(np.max(np.abs(out))):
        return None
    out *= math.pi / period
    return np.maximum(out, 0.0)


#: The images (everything but |H(f)|² itself) are smooth over 0…fs/2: the
#: closed form is evaluated on every IMAGE_STRIDE-th bin and interpolated.
IMAGE_STRIDE = 8


def _folded_images(filt: Filter, freqs_hz: np.ndarray, fs_hz: float, direct: np.ndarray) -> np.ndarray | None:
    """|H(f)|² plus every alias image, with the images from a subsampled closed form."""
    n = freqs_hz.size
    if n < 64 * IMAGE_STRIDE:
        return _images_closed_form(filt, freqs_hz, fs_hz)
    idx = np.arange(0, n, IMAGE_STRIDE)
    if idx[-1] != n - 1:
        idx = np.append(idx, n - 1)
    total = _images_closed_form(filt, freqs_hz[idx], fs_hz)
    if total is None:
        return None
    images = np.maximum(total - direct[idx], 0.0)
    return direct + np.interp(freqs_hz, freqs_hz[idx], images)


def folded_noise_gain(
    filt: Filter,
    freqs_hz: np.ndarray,
    weights_hz: np.ndarray,
    fs_hz: float,
    amp_bandwidth_hz: float | None = None,
    *,
    direct: np.ndarray | None = None,
    anti_alias: str = "none",
) -> tuple[np.ndarray, float]:
    """Noise power gain of the analog path at the converter output, on 0…fs/2.

    Returns ``(g, total)``: ``g`` on the grid such that ``sum(g·weights)``
    equals ``total``.

    * ``anti_alias='none'``: the response (times the amplifier's own pole,
      ``amp_bandwidth_hz``) must fall at high frequencies (|H(∞)| = 0); what
      it passes above fs/2 aliases back.  It is folded, all images at once in
      closed form or image by image, until what remains is below 1 ppm of the
      exact integral ∫₀^∞|H|² df (:meth:`Filter.varying_integral_hz`); the
      remainder, from far images, is nearly flat and is spread evenly.  A
      response that never falls (a highpass: |H(∞)| = 1; an even-order
      elliptic: the stopband floor) has no finite noise: refused with
      :class:`ParameterError` (see :func:`check_noise_bounded`).
    * ``anti_alias='ideal'``: a brick-wall at fs/2 ahead of the converter;
      only 0…fs/2 counts, nothing folds.

    A digital-stage ``filt`` returns its own |H|² on 0…fs/2.  ``direct``, when
    given, is |H(f)|² on ``freqs_hz`` already evaluated by the caller (reused
    when there is no amplifier pole).
    """
    noise_filt = with_amplifier_pole(filt, amp_bandwidth_hz)
    if direct is None or noise_filt is not filt:
        direct = noise_filt.power_response(freqs_hz)
    if not filt.analog or anti_alias == "ideal":
        return direct, float(np.sum(direct * weights_hz))
    if noise_filt.floor_gain() > 0:
        raise _unbounded(unbounded_reason(Chain(), filt) or "the response never falls")
    target = noise_filt.varying_integral_hz()
    acc = float(np.sum(direct * weights_hz))
    if abs(target - acc) <= 1e-6 * abs(target):
        # the images hold less than 1 ppm (a steep filter well below fs/2): no folding needed
        g = direct
    elif (folded := _folded_images(noise_filt, freqs_hz, fs_hz, direct)) is not None:  # every image at once
        g = folded
        acc = float(np.sum(g * weights_hz))
    else:
        g = direct
        m = 1
        while m <= MAX_IMAGES and abs(target - acc) > 1e-6 * abs(target):
            for image in (m * fs_hz - freqs_hz, m * fs_hz + freqs_hz):
                g = g + noise_filt.power_response(image)
            acc = float(np.sum(g * weights_hz))
            m += 1
    # the rest (far images, nearly flat; or the interpolation's last ppm) is spread evenly
    rest = target - acc
    if rest < 0 and -rest > 1e-6 * target:
        return g, acc  # never remove more than rounding: keep what was folded
    return np.maximum(g + rest / float(np.sum(weights_hz)), 0.0), target


@dataclass
class NoiseSpectra:
    """Output noise density of each contributor on a grid, V²/Hz."""

    freqs_hz: np.ndarray
    weights_hz: np.ndarray
    parts: dict  # name -> density array

    @property
    def total(self) -> np.ndarray:
        return sum(self.parts.values())

    def power(self, weights=None) -> dict:
        w = self.weights_hz if weights is None else weights
        return {name: float(np.sum(d * w)) for name, d in self.parts.items()}


def converter_noise_gain(
    chain: Chain,
    filt: Filter,
    freqs_hz: np.ndarray,
    weights_hz: np.ndarray,
    fs_hz: float,
    *,
    direct: np.ndarray | None = None,
) -> tuple[np.ndarray, float]:
    """Power gain from the amplifier's white noise to the converter's output, on 0…fs/2.

    Analog stage: the candidate and the amplifier's pole, folded or not per
    ``chain.anti_alias`` (:func:`folded_noise_gain`).  Digital stage: the
    amplifier's pole alone (the digital filter comes after the converter;
    the caller multiplies by it): confined to 0…fs/2 by the ideal anti-alias
    filter, or folded with ``'none'``.  Returns ``(g, Σ g·weights)``.

    Raises
    ------
    ParameterError
        The noise has no bound (:func:`check_noise_bounded`).
    """
    check_noise_bounded(chain, filt)
    if chain.density_amplifier_v2_hz() == 0:  # no amplifier noise: nothing to shape or fold
        return np.zeros_like(np.asarray(freqs_hz, dtype=float)), 0.0
    if filt.analog:
        return folded_noise_gain(
            filt, freqs_hz, weights_hz, fs_hz, chain.amp_bandwidth_hz, direct=direct, anti_alias=chain.anti_alias
        )
    if chain.amp_bandwidth_hz is None:  # ideal anti-alias filter (or no amplifier noise): white to fs/2
        g = np.ones_like(np.asarray(freqs_hz, dtype=float))
        return g, float(np.sum(weights_hz))
    return folded_noise_gain(
        amplifier_pole(chain.amp_bandwidth_hz), freqs_hz, weights_hz, fs_hz, anti_alias=chain.anti_alias
    )


def noise_total(
    chain: Chain,
    filt: Filter,
    freqs_hz: np.ndarray,
    weights_hz: np.ndarray,
    fs_hz: float,
    *,
    direct: np.ndarray | None = None,
) -> np.ndarray:
    """The total output noise density on ``freqs_hz`` (V²/Hz): the sum of :func:`noise_spectra`'s
    parts, computed without building them; ``direct`` is |H(f)|² if the caller has it."""
    nyq_width = float(np.sum(weights_hz))
    converter = (chain.quantisation_power_v2() + chain.dither_power_v2()) / nyq_width
    h2 = filt.power_response(freqs_hz) if direct is None else direct
    if filt.analog:
        g, _ = converter_noise_gain(chain, filt, freqs_hz, weights_hz, fs_hz, direct=h2)
        out = chain.density_amplifier_v2_hz() * g + converter
    else:
        g, _ = converter_noise_gain(chain, filt, freqs_hz, weights_hz, fs_hz)
        out = (chain.density_amplifier_v2_hz() * g + converter) * h2
    if chain.has_flicker:
        en_x, in_x = amplifier_excess(chain, freqs_hz, weights_hz)
        out = out + (en_x + in_x) * _excess_gain(chain, h2, freqs_hz)
    return out


def amplifier_excess(chain: Chain, freqs_hz: np.ndarray, weights_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The amplifier's noise above its white densities, at the converter input, per bin (V²/Hz).

    Returns ``(voltage, current)``: G²·e_n²·f_ce/f̄ plus G²·(e_n,table(f)² − e_n,white²)
    (the e_n table's excess, :func:`audiobw.entable.excess_per_hz`), and G²·(i_n·Rs)²·f_ci/f̄;
    each the mean over the bin's band, integrated from :data:`FLICKER_FROM_HZ`.
    """
    per_hz = flicker_per_hz(freqs_hz, weights_hz)
    voltage = chain.flicker_en_v2() * per_hz
    if chain.en_table is not None:
        from .entable import excess_per_hz

        voltage = voltage + chain.gain**2 * excess_per_hz(chain.en_table, freqs_hz, weights_hz, FLICKER_FROM_HZ)
    return voltage, chain.flicker_in_v2() * per_hz


def _excess_gain(chain: Chain, h2: np.ndarray, freqs_hz: np.ndarray) -> np.ndarray:
    """|H|² with the amplifier pole: the shape of the 1/f and table excess at the output.

    Not folded: the 1/f images sit near multiples of fs, where 1/f is down by
    f_c/fs against the white part (under 1 % for a 500 Hz corner at 48 kHz),
    and the white part's images are folded.  An e_n table's excess is folded
    neither: what of it lies above fs/2 is not counted.
    """
    return h2 if chain.amp_bandwidth_hz is None else h2 / (1.0 + (freqs_hz / chain.amp_bandwidth_hz) ** 2)


def noise_spectra(
    chain: Chain, filt: Filter, freqs_hz: np.ndarray, weights_hz: np.ndarray, fs_hz: float
) -> NoiseSpectra:
    """Each contributor's output noise density on ``freqs_hz`` (0…fs/2)."""
    nyq_width = float(np.sum(weights_hz))
    q_density = chain.quantisation_power_v2() / nyq_width
    d_density = chain.dither_power_v2() / nyq_width
    g, _ = converter_noise_gain(chain, filt, freqs_hz, weights_hz, fs_hz)
    if filt.analog:
        gq = np.ones_like(freqs_hz)
    else:
        gq = filt.power_response(freqs_hz)
        g = g * gq
    if chain.has_flicker:
        shape = _excess_gain(chain, filt.power_response(freqs_hz), freqs_hz)
        en_x, in_x = amplifier_excess(chain, freqs_hz, weights_hz)
        en_x, in_x = en_x * shape, in_x * shape
    else:
        en_x = in_x = np.zeros_like(freqs_hz)
    parts = {
        "source_thermal": chain.density_source_v2_hz() * g,
        "amplifier_voltage": chain.density_en_v2_hz() * g + en_x,
        "amplifier_current": chain.density_in_v2_hz() * g + in_x,
        "quantisation": q_density * gq,
        "dither": d_density * gq,
    }
    return NoiseSpectra(freqs_hz, weights_hz, parts)


def budget(chain: Chain, filt: Filter, fs_hz: float, *, meter=(0.0, None), n_bins: int = 1 << 15) -> dict:
    """The noise budget of a chain with one filter, as a plain mapping.

    Parameters
    ----------
    chain : Chain
    filt : Filter
    fs_hz : float, > 0
        Converter sample rate.
    meter : (low_hz, high_hz or None)
        Meter band; None for fs/2.

    Returns
    -------
    dict
        ``components``: name -> {vrms, dbu, dbfs, share} (share of total power,
        0…1); ``total``: the same for the sum; ``total_a_weighted``;
        ``enbw_hz``; ``dynamic_range_db`` and ``dynamic_range_a_db`` for a
        full-scale sine; ``noise_integral_band_hz``.
    """
    from .weighting import a_weighting_power
    from .spectrum import trapezoid_weights

    nyq = fs_hz / 2.0
    freqs = np.linspace(0.0, nyq, n_bins + 1)
    w = trapezoid_weights(freqs.size, freqs[1] - freqs[0])
    spectra = noise_spectra(chain, filt, freqs, w, fs_hz)
    lo, hi = meter[0] or 0.0, meter[1] or nyq
    wm = w * ((freqs >= lo) & (freqs <= hi))
    powers = spectra.power(wm)
    total = sum(powers.values())
    total_a = float(np.sum(spectra.total * wm * a_weighting_power(freqs)))
    fs_v2 = chain.full_scale_power_v2

    def entry(p):
        v = math.sqrt(p)
        return {
            "vrms": v,
            "dbu": vrms_to_dbu(v),
            "dbfs": 10 * math.log10(p / fs_v2) if p > 0 else -math.inf,
            "share": p / total if total > 0 else 0.0,
        }

    return {
        "components": {name: entry(p) for name, p in powers.items()},
        "total": entry(total),
        "total_a_weighted": entry(total_a),
        "enbw_hz": filt.enbw_hz(nyq),
        "dynamic_range_db": 10 * math.log10(fs_v2 / total),
        "dynamic_range_a_db": 10 * math.log10(fs_v2 / total_a),
        "meter": {"low_hz": lo, "high_hz": hi},
        **input_referred(chain, spectra, wm, wm * a_weighting_power(freqs)),
    }


#: standard noise temperature of the noise-figure definition, K (IEEE Std 161; Friis 1944)
T0_K = 290.0
ANALOG_PARTS = ("source_thermal", "amplifier_voltage", "amplifier_current")


def noise_figure_db(chain: Chain) -> float | None:
    """Spot noise figure of the amplifier at the stated source, dB (white densities).

    F = 1 + (e_n² + (i_n·R_s)²) / (4·k·T0·R_s) with T0 = 290 K (the IEEE
    definition); None for an ideal source (R_s = 0), where F is undefined.
    """
    from .chain import BOLTZMANN

    if chain.source_ohms <= 0:
        return None
    excess = chain.en_v_rthz**2 + (chain.in_a_rthz * chain.source_ohms) ** 2
    thermal = 4.0 * BOLTZMANN * T0_K * chain.source_ohms
    if thermal <= 0 or not math.isfinite(excess / thermal):
        return None  # a source so small its thermal noise underflows a double: as good as ideal
    return 10.0 * math.log10(1.0 + excess / thermal)


def input_referred(chain: Chain, spectra, weights, weights_a) -> dict:
    """``noise_figure_db``, ``ein_dbu`` and ``ein_dbu_a``: the analog noise (source and amplifier,
    not the converter) referred to the amplifier input over the meter band, unweighted and
    A-weighted, as preamp data sheets quote it."""
    g2 = chain.gain**2
    p = sum(v for k, v in spectra.power(weights).items() if k in ANALOG_PARTS) / g2
    pa = sum(v for k, v in spectra.power(weights_a).items() if k in ANALOG_PARTS) / g2
    return {
        "noise_figure_db": noise_figure_db(chain),
        "ein_dbu": vrms_to_dbu(math.sqrt(p)) if p > 0 else None,
        "ein_dbu_a": vrms_to_dbu(math.sqrt(pa)) if pa > 0 else None,
    }
