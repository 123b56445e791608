"""Filter measurements for the spec sheet, from the rebuilt filter and chain of a case.

Stopband attenuation at named frequencies, passband ripple and flatness over
the program's occupied band, group delay (from the zpk, :meth:`Filter.group_delay_s`)
and the noise budget (:func:`audiobw.noise.budget`).  Each takes the case row
and the sweep.json mapping, so the figures are those of the swept case.

References
----------
.. [1] Group delay τ(ω) = −dφ/dω of a rational response from its poles and
   zeros: each factor (x − c) contributes Re(1/(jω − c)) (analog, x = jω)
   or Re(e^{jθ}/(e^{jθ} − c)) samples (digital, x = e^{jθ}); poles add,
   zeros subtract.  A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal
   Processing*, 3rd ed., §5.1.2 (group delay of a first-order factor).
"""

from __future__ import annotations

import math

import numpy as np

NOISE_LABELS = {
    "source_thermal": "source thermal noise (4kT·Rs)",
    "amplifier_voltage": "amplifier voltage noise (e_n)",
    "amplifier_current": "amplifier current noise (i_n·Rs)",
    "quantisation": "quantisation (q²/12)",
    "dither": "TPDF dither (2q²/12)",
}
GROUP_DELAY_AT_HZ = 1000.0


def _band_grid(lo: float, hi: float, n: int = 4000) -> np.ndarray:
    lo = max(lo, 0.0)
    lin = np.linspace(lo, hi, n)
    if lo > 0:
        return np.union1d(lin, np.geomspace(lo, hi, n))
    return np.union1d(lin, np.geomspace(hi * 1e-4, hi, n))


def _passband(case: dict, nyq: float) -> tuple[float, float]:
    lo = case["low_hz"] if case["low_hz"] is not None else 0.0
    hi = case["high_hz"] if case["high_hz"] is not None else nyq
    return lo, min(hi, nyq)


def stopband_points(filt, case: dict, fs_hz: float) -> list[dict]:
    """Attenuation (dB, positive = below the passband peak) at the named frequencies."""
    nyq = fs_hz / 2.0
    points = []

    def add(name, label, f, note=None):
        att = None
        if f is not None and (filt.analog or f < nyq) and f > 0:
            att = float(-filt.response_db(f))
        elif f is not None and note is None:
            note = "above fs/2: a digital filter has no response there"
        points.append({"name": name, "label": label, "freq_hz": f, "attenuation_db": att, "note": note})

    hi, lo = case.get("high_hz"), case.get("low_hz")
    if hi is not None:
        add("twice_upper_edge", "2 × f_high", 2.0 * hi)
        if filt.analog:
            add("alias_of_upper_edge", "fs − f_high (aliases onto f_high)", fs_hz - hi)
        else:
            points.append(
                {
                    "name": "alias_of_upper_edge",
                    "label": "fs − f_high (aliases onto f_high)",
                    "freq_hz": fs_hz - hi,
                    "attenuation_db": None,
                    "note": "digital stage: the filter acts after sampling; what aliases onto f_high "
                    "is set by the converter's own anti-alias filter",
                }
            )
    if lo is not None:
        add("half_lower_edge", "f_low / 2", lo / 2.0)
    return points


def passband_figures(filt, case: dict, doc: dict) -> dict:
    """Ripple (rippled families, over the ripple band) and flatness over the program's occupied band."""
    fs = doc["input"]["sample_rate_hz"]
    nyq = fs / 2.0
    family = case["family"]
    out = {"design_ripple_db": doc["grid"]["ripple_db"] if family in ("chebyshev1", "elliptic") else None}
    if family in ("chebyshev1", "elliptic"):
        lo = case["design_low_hz"] or 0.0
        hi = case["design_high_hz"] or 0.98 * nyq
        g = filt.response_db(_band_grid(lo, hi))
        out["ripple_db"] = float(np.max(g) - np.min(g))
        out["ripple_band_hz"] = [lo, hi]
        out["ripple_note"] = "peak-to-peak gain over the ripple band (the design edges)"
    else:
        out["ripple_db"] = 0.0
        out["ripple_band_hz"] = None
        out["ripple_note"] = f"{family}: monotonic passband, no ripple by design"
    occ_lo, occ_hi = doc["input"]["occupied_low_hz"], doc["input"]["occupied_high_hz"]
    g = filt.response_db(_band_grid(max(occ_lo, 1e-3), min(occ_hi, nyq)))
    out["flatness"] = {
        "low_hz": occ_lo,
        "high_hz": occ_hi,
        "max_db": float(np.max(g)),
        "min_db": float(np.min(g)),
        "variation_db": float(np.max(g) - np.min(g)),
    }
    return out


def group_delay_figures(filt, case: dict, doc: dict) -> dict:
    nyq = doc["input"]["sample_rate_hz"] / 2.0
    at = float(filt.group_delay_s([GROUP_DELAY_AT_HZ])[0])

    def spread(lo, hi):
        tau = filt.group_delay_s(_band_grid(lo, hi))
        tau = tau[np.isfinite(tau)]  # a zero on the jω axis makes its own frequency singular
        return {
            "low_hz": lo,
            "high_hz": hi,
            "min_s": float(np.min(tau)),
            "max_s": float(np.max(tau)),
            "spread_s": float(np.max(tau) - np.min(tau)),
        }

    lo, hi = _passband(case, nyq)
    occ_lo, occ_hi = doc["input"]["occupied_low_hz"], min(doc["input"]["occupied_high_hz"], nyq)
    g1k = float(filt.power_response(GROUP_DELAY_AT_HZ))
    return {
        "at_hz": GROUP_DELAY_AT_HZ,
        "at_s": at,
        "note": None if g1k >= 0.5 else "1 kHz is outside the −3 dB passband",
        "passband": spread(lo, hi),
        "occupied_band": spread(occ_lo, occ_hi),
    }


def noise_figures(chain, filt, doc: dict, case: dict) -> dict:
    from ..chain import vrms_to_dbu
    from ..noise import budget

    fs = doc["input"]["sample_rate_hz"]
    m = doc["meter"]
    b = budget(chain, filt, fs, meter=(m["low_hz"], m["high_hz"]))

    def fin(x):
        return x if x is not None and math.isfinite(x) else None

    comps = {
        k: {
            "label": NOISE_LABELS.get(k, k),
            "vrms": e["vrms"],
            "dbu": fin(e["dbu"]),
            "dbfs": fin(e["dbfs"]),
            "share": e["share"],
        }
        for k, e in b["components"].items()
    }
    ta = b["total_a_weighted"]
    return {
        "meter": {"low_hz": m["low_hz"], "high_hz": m["high_hz"]},
        "vrms": case["noise_vrms"],
        "dbu": vrms_to_dbu(case["noise_vrms"]),
        "dbfs": case["noise_dbfs"],
        "a_weighted": {"vrms": ta["vrms"], "dbu": fin(ta["dbu"]), "dbfs": fin(ta["dbfs"])},
        "budget_total_vrms": b["total"]["vrms"],
        "components": comps,
        "dynamic_range_db": b["dynamic_range_db"],
        "dynamic_range_a_db": b["dynamic_range_a_db"],
    }
