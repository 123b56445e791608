"""Responses of several candidates on one grid at once, one row per candidate.

A sweep scores the cutoffs of one design (family, order, response) together
(:meth:`audiobw.metrics.Scorer.score_many`).  Analog lowpass and highpass
candidates of one design share their normalised prototype (the same zeros,
poles and gain; only the normalising frequency differs), so their responses are
one array expression over a (candidates × bins) grid: the same operations, in
the same order, as :meth:`audiobw.response.Filter.power_response` and
:meth:`~audiobw.response.Filter.response` apply to each row, hence the same
values to the last bit (tests/test_batched.py), without a round of numpy calls
per candidate.  Anything else (a bandpass, the digital stage, a mixed list) is
evaluated filter by filter.
"""

from __future__ import annotations

import numpy as np

from .response import Filter, _analog_power, _zpk_at


def shares_prototype(filts: list[Filter]) -> bool:
    """Whether every filter is an analog one of the same normalised prototype (the same arrays)."""
    first = filts[0]
    if not first.analog or first._proto is None:
        return False
    return all(
        f.analog and f._proto is first._proto and f.z is first.z and f.p is first.p and f.k == first.k for f in filts
    )


def _each(filts: list[Filter], method: str, f: np.ndarray, dtype) -> np.ndarray:
    out = np.empty((len(filts), f.size), dtype=dtype)
    for row, filt in zip(out, filts):
        row[...] = getattr(filt, method)(f)
    return out


def power_responses(filts: list[Filter], freq_hz) -> np.ndarray:
    """|H(f)|² of each filter on ``freq_hz`` (shape (filters, frequencies)); ``freq_hz`` is one
    grid for all, or one row per filter."""
    f = np.asarray(freq_hz, dtype=float)
    if len(filts) > 1 and f.shape[-1] > 1 and shares_prototype(filts):
        factors = filts[0]._real_factors()
        if factors is not None:
            # row i: f * (2π / ref_i), as Filter.power_response forms it
            scale = np.array([2.0 * np.pi / filt.ref_rad_s for filt in filts])
            return _analog_power(
                f * scale[:, None] if f.ndim == 2 else f[None, :] * scale[:, None], filts[0].k, *factors
            )
    if f.ndim == 2:
        return np.array([filt.power_response(row) for filt, row in zip(filts, f)], dtype=float)
    return _each(filts, "power_response", f, float)


def group_delays(filts: list[Filter], freq_hz) -> np.ndarray:
    """Group delay −dφ/dω (s) of each filter at ``freq_hz`` (shape (filters, frequencies)), as
    :meth:`audiobw.response.Filter.group_delay_s` gives it."""
    f = np.atleast_1d(np.asarray(freq_hz, dtype=float))
    if len(filts) > 1 and shares_prototype(filts):
        first = filts[0]
        w = np.array([filt.ref_rad_s for filt in filts])
        x = 1j * 2.0 * np.pi * f

        def total(roots):  # Σ over the roots of Re 1/(jω − r), each filter's roots r·ref_i
            if len(roots) == 0:
                return np.zeros((len(filts), f.size))
            d = x[None, None, :] - (np.asarray(roots, complex)[None, :] * w[:, None])[:, :, None]
            with np.errstate(divide="ignore", invalid="ignore"):
                t = np.real(1.0 / d)
            t[d == 0] = 0.0
            return t.sum(axis=1)

        return total(first.p) - total(first.z)
    return _each(filts, "group_delay_s", f, float)


def responses(filts: list[Filter], freq_hz) -> np.ndarray:
    """Complex H(f) of each filter on ``freq_hz`` (shape (filters, frequencies))."""
    f = np.asarray(freq_hz, dtype=float)
    if len(filts) > 1 and f.size > 1 and shares_prototype(filts):
        first = filts[0]
        ref = np.array([filt.ref_rad_s for filt in filts])
        # row i: 1j * (2π·f / ref_i), then the products of Filter.response in the same order
        s = 1j * ((2.0 * np.pi * f)[None, :] / ref[:, None])
        return _zpk_at(s, first.z, first.p, first.k)
    return _each(filts, "response", f, complex)
