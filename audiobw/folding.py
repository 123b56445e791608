"""The amplifier's noise reaching the converter under the anti-alias model: whether it is bounded
(:func:`check_noise_bounded`) and what folds into 0…fs/2 (:func:`folded_noise_gain`).

The model is stated in :mod:`audiobw.noise`.

References
----------
.. [3] All images at once, in closed form: partial fractions of H(s)H(−s)
   and the expansion of the cotangent in partial fractions,
   π·cot(πw) = Σₘ 1/(w + m) (symmetric summation); M. Abramowitz,
   I. A. Stegun, *Handbook of Mathematical Functions*, 4.3.91 (from memory).
"""

from __future__ import annotations

import math

import numpy as np

from .chain import Chain
from .errors import ParameterError
from .filters import Filter, FilterSpec, design

#: Images of the analog response folded explicitly before the rest is spread.
MAX_IMAGES = 64


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
    then folds image by image.  One filter of :func:`_images_closed_form_many`.
    """
    return _images_closed_form_many([filt], freqs_hz, fs_hz)[0]


def _images_closed_form_many(filts: list[Filter], freqs_hz: np.ndarray, fs_hz: float) -> list[np.ndarray | None]:
    """:func:`_images_closed_form` of filters of one normalised prototype (the same zeros, poles
    and gain; each its own ω_ref), the arrays of all of them built at once (one row each)."""
    first = filts[0]
    z, p, k = np.asarray(first.z, complex), np.asarray(first.p, complex), float(first.k)
    n = p.size
    none: list[np.ndarray | None] = [None] * len(filts)
    if n == 0 or z.size > n or (p.real >= 0).any():
        return none
    size = float(np.abs(p).max())
    gaps = np.abs(p[:, None] - p[None, :]) + np.eye(n) * size
    if gaps.min() < 1e-6 * size:
        return none
    periods = [2.0 * math.pi * fs_hz / filt.ref_rad_s for filt in filts]
    half_betas = [math.pi * (-p.real) / period for period in periods]
    rows = [i for i, hb in enumerate(half_betas) if not hb.max() > 300.0]
    upper = p.imag > 1e-12 * np.abs(p)
    single = np.abs(p.imag) <= 1e-12 * np.abs(p)
    use = upper | single
    if not rows or 2 * int(np.count_nonzero(upper)) + int(np.count_nonzero(single)) != n:
        return none
    # the residues depend on the normalised prototype only: shared by every cutoff
    cache = first._proto if first._proto is not None else first._cache
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
    out = np.zeros((len(rows), theta_half.size))
    bound = np.zeros_like(out)
    weights = np.where(upper, 2.0, 1.0)
    for j in np.flatnonzero(use):
        r, b, weight = resid[j], p.imag[j], weights[j]
        # per filter: its scalars as math computes them, then one column each
        ph = [math.pi * b / periods[i] for i in rows]
        be = [float(half_betas[i][j]) for i in rows]
        cp = np.array([math.cos(x) for x in ph])[:, None]
        sp = np.array([math.sin(x) for x in ph])[:, None]
        sh2 = np.array([2.0 * math.sinh(x) ** 2 for x in be])[:, None]
        sinh2 = np.array([math.sinh(2.0 * x) for x in be])[:, None]
        a1, b1 = st * cp, ct * sp
        s1, s2 = a1 - b1, a1 + b1
        c1, c2 = ct * cp + st * sp, ct * cp - st * sp
        d1 = 1.0 / (sh2 + 2.0 * s1 * s1)
        d2 = 1.0 / (sh2 + 2.0 * s2 * s2)
        term = weight * ((r.real * sinh2) * (d1 + d2) + r.imag * 2.0 * (s1 * c1 * d1 - s2 * c2 * d2))
        out += term
        bound += np.abs(term)
    result = none[:]
    for row, i in enumerate(rows):
        o = out[row]
        if not np.isfinite(o).all() or 1e-16 * float(bound[row].max()) > 1e-9 * float(np.abs(o).max()):
            continue
        o *= math.pi / periods[i]
        result[i] = np.maximum(o, 0.0)
    return result


#: The images (everything but |H(f)|² itself) are smooth over 0…fs/2: the
#: closed form is evaluated on every IMAGE_STRIDE-th bin and interpolated.
IMAGE_STRIDE = 8


def _folded_images(filt: Filter, freqs_hz: np.ndarray, fs_hz: float, direct: np.ndarray) -> np.ndarray | None:
    """|H(f)|² plus every alias image, with the images from a subsampled closed form."""
    return _folded_images_many([filt], freqs_hz, fs_hz, [direct])[0]


def _folded_images_many(filts: list[Filter], freqs_hz: np.ndarray, fs_hz: float, direct) -> list[np.ndarray | None]:
    """:func:`_folded_images` of filters of one normalised prototype (``direct``: each one's |H|²)."""
    n = freqs_hz.size
    if n < 64 * IMAGE_STRIDE:
        return _images_closed_form_many(filts, freqs_hz, fs_hz)
    idx = np.arange(0, n, IMAGE_STRIDE)
    if idx[-1] != n - 1:
        idx = np.append(idx, n - 1)
    out: list[np.ndarray | None] = []
    for total, d in zip(_images_closed_form_many(filts, freqs_hz[idx], fs_hz), direct):
        if total is None:
            out.append(None)
            continue
        images = np.maximum(total - d[idx], 0.0)
        out.append(d + np.interp(freqs_hz, freqs_hz[idx], images))
    return out


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
    return _fold(noise_filt, freqs_hz, weights_hz, fs_hz, direct)


def _fold(noise_filt: Filter, freqs_hz, weights_hz, fs_hz: float, direct, folded=_folded_images, direct_sum=None):
    """What :func:`folded_noise_gain` does once the response is known to fall: fold its images
    into 0…fs/2 and spread the rest.  ``folded``: :func:`_folded_images`, or a callable
    giving its result already computed (the batch); ``direct_sum``: Σ direct·weights when
    the caller has it."""
    target = noise_filt.varying_integral_hz()
    acc = float(np.sum(direct * weights_hz)) if direct_sum is None else direct_sum
    if abs(target - acc) <= 1e-6 * abs(target):
        # the images hold less than 1 ppm (a steep filter well below fs/2): no folding needed
        g = direct
    elif (images := folded(noise_filt, freqs_hz, fs_hz, direct)) is not None:  # every image at once
        g = images
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


def folded_noise_gains(
    filts: list[Filter],
    freqs_hz: np.ndarray,
    weights_hz: np.ndarray,
    fs_hz: float,
    amp_bandwidth_hz: float | None,
    direct: np.ndarray,
    *,
    anti_alias: str = "none",
) -> list[tuple[np.ndarray, float]]:
    """:func:`folded_noise_gain` of each filter (``direct``: one |H|² per row), the closed-form
    images of an analog prototype's cutoffs built together (:func:`_images_closed_form_many`)."""
    from .batchresponse import shares_prototype

    if amp_bandwidth_hz is not None or anti_alias != "none" or len(filts) < 2 or not shares_prototype(filts):
        return [
            folded_noise_gain(f, freqs_hz, weights_hz, fs_hz, amp_bandwidth_hz, direct=d, anti_alias=anti_alias)
            for f, d in zip(filts, direct)
        ]
    if filts[0].floor_gain() > 0:
        raise _unbounded(unbounded_reason(Chain(), filts[0]) or "the response never falls")
    need = []
    sums = [float(np.sum(d * weights_hz)) for d in direct]
    for i, filt in enumerate(filts):
        target = filt.varying_integral_hz()
        if abs(target - sums[i]) > 1e-6 * abs(target):
            need.append(i)
    found = (
        dict(zip(need, _folded_images_many([filts[i] for i in need], freqs_hz, fs_hz, [direct[i] for i in need])))
        if need
        else {}
    )
    return [
        _fold(filt, freqs_hz, weights_hz, fs_hz, d, folded=lambda *_, i=i: found.get(i), direct_sum=sums[i])
        for i, (filt, d) in enumerate(zip(filts, direct))
    ]
