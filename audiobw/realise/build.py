"""Realise one analog filter spec: stages, parts, deviation, noise, second pass and yield.

:func:`realise` returns the ``realise.json`` mapping (keys documented in docs/realise.md).
"""

from __future__ import annotations

import math
import numpy as np

from ..errors import ParameterError
from ..filters import FilterSpec, design
from . import CAUTION, yield_
from .noise import BOLTZMANN, cascade_noise_density
from .sections import pair_sections, prototype_response
from .topologies import design_stage

SCHEMA_VERSION = 1


def _grid(lo_hz: float, hi_hz: float, n: int = 600) -> tuple[np.ndarray, np.ndarray]:
    """Log grid over [lo, hi] and trapezoid weights (Hz) for integrating a density."""
    f = np.geomspace(max(lo_hz, 1.0), hi_hz, n)
    w = np.zeros(n)
    d = np.diff(f)
    w[:-1] += d / 2
    w[1:] += d / 2
    return f, w


def build_stages(spec: FilterSpec, *, topology: str, r_series: str, c_series: str, r_level: float):
    """(stages, filter) for an analog spec."""
    if spec.stage != "analog":
        raise ParameterError("realise: the chosen case is a digital filter; accepted: an analog-stage case")
    filt = design(spec)
    z, p, _ = filt.zpk()
    sections = pair_sections(z, p, spec.response, spec.family)
    return [design_stage(s, topology, r_level=r_level, r_series=r_series, c_series=c_series) for s in sections], filt


def realise(
    spec: FilterSpec,
    *,
    topology="sallen-key",
    r_series="E96",
    c_series="E12",
    r_level=10e3,
    en_v_hz=4e-9,
    in_a_hz=0.5e-12,
    temperature_k=290.0,
    tol_r=0.01,
    tol_c=0.05,
    draws=1000,
    seed=1,
    meter_hz=(20.0, 20000.0),
    edge_tol=0.05,
    flat_margin_db=0.5,
    second=None,
) -> dict:
    """Realise ``spec``; ``second`` is an optional callable(filter_noise_density(f) -> dict) giving
    the re-scored chain figures for a noise density on the chain's own grid (see :mod:`.secondpass`)."""
    stages, filt = build_stages(spec, topology=topology, r_series=r_series, c_series=c_series, r_level=r_level)
    z, p, k = filt.zpk()
    m_lo, m_hi = meter_hz
    edges_hz = [x for x in (spec.low_hz, spec.high_hz) if x]
    f, w = _grid(min([m_lo] + [x / 4 for x in edges_hz]), max([m_hi] + [x * 4 for x in edges_hz]))
    w = np.where((f >= m_lo) & (f <= m_hi), w, 0.0)  # integrate noise over the meter band only
    h_ideal = prototype_response(z, p, k, f)
    h_cascade_nominal = np.ones(f.size, complex)
    for st in stages:
        h_cascade_nominal = h_cascade_nominal * st.target.response(f)
    h_built = np.ones(f.size, complex)
    for st in stages:
        h_built = h_built * st.response(f)
    lo_id, hi_id = filt.edges_3db
    pb = (f >= (lo_id or 0.0)) & (f <= (hi_id or np.inf))
    dev_db = 20 * np.log10(np.abs(h_built[pb]) / np.abs(h_ideal[pb]))
    gain_db = 20 * np.log10(abs(np.prod([st.gain() for st in stages])))
    cascade_offset_db = float(np.max(np.abs(20 * np.log10(np.abs(h_cascade_nominal) / np.abs(h_ideal)))))

    density, per_stage = cascade_noise_density(stages, f, en_v_hz=en_v_hz, in_a_hz=in_a_hz, temperature_k=temperature_k)
    noise_v2 = float(np.sum(density * w))
    contrib = []
    for i, parts in enumerate(per_stage):
        for name, d in parts.items():
            contrib.append({"stage": i + 1, "source": name, "noise_vrms": math.sqrt(float(np.sum(d * w)))})

    rows = []
    for i, st in enumerate(stages):
        f0, q = st.f0_q()
        rows.append(
            {
                "stage": i + 1,
                "topology": st.topology,
                "kind": st.kind,
                "parts": {n: float(v) for n, v in sorted(st.parts.items())},
                "f0_hz": f0,
                "q": q,
                "f0_ideal_hz": float(st.target.f0_hz),
                "q_ideal": None if st.target.q is None else float(st.target.q),
                "gain": st.gain(),
                "notes": list(st.notes),
            }
        )

    # Monte Carlo
    drawn = yield_.draw_parts(stages, tol_r=tol_r, tol_c=tol_c, draws=draws, seed=seed)
    h2 = yield_.responses(stages, f, drawn)
    ref = float(np.max(np.abs(h_ideal) ** 2))
    lo_d, hi_d = yield_.edges(f, h2, ref, spec.response)
    # flatness over the ideal's inner passband: where it is within 1 dB of its peak
    inner = f[np.abs(h_ideal) ** 2 >= ref * 10**-0.1]
    fl_lo = float(inner[0]) if lo_id else None
    fl_hi = float(inner[-1]) if hi_id else None
    flat = yield_.flatness_db(f, h2, fl_lo, fl_hi)
    flat_ideal = float(yield_.flatness_db(f, (np.abs(h_ideal) ** 2)[None, :], fl_lo, fl_hi)[0])
    noise_d = _drawn_noise(stages, drawn, f, w, en_v_hz, in_a_hz, temperature_k)
    ok = np.ones(draws, bool)
    if lo_id:
        ok &= np.abs(lo_d / lo_id - 1) <= edge_tol
    if hi_id:
        ok &= np.abs(hi_d / hi_id - 1) <= edge_tol
    ok &= flat <= flat_ideal + flat_margin_db
    second_pass = None
    if second is not None:
        second_pass = second(f, density)
        if second_pass.get("targets"):
            ok &= _noise_ok(second_pass, noise_d, noise_v2)
    doc = {
        "tool": "audiobw",
        "schema": SCHEMA_VERSION,
        "caution": CAUTION,
        "filter": {
            "response": spec.response,
            "family": spec.family,
            "order": spec.order,
            "low_hz": spec.low_hz,
            "high_hz": spec.high_hz,
            "ripple_db": spec.ripple_db,
        },
        "options": {
            "topology": topology,
            "resistor_series": r_series,
            "capacitor_series": c_series,
            "impedance_ohms": r_level,
            "opamp_en_v_rthz": en_v_hz,
            "opamp_in_a_rthz": in_a_hz,
            "temperature_k": temperature_k,
            "tolerance_r": tol_r,
            "tolerance_c": tol_c,
            "draws": draws,
            "seed": seed,
            "meter_low_hz": m_lo,
            "meter_high_hz": m_hi,
            "edge_tolerance": edge_tol,
            "flatness_margin_db": flat_margin_db,
        },
        "stages": rows,
        "response": {
            "passband_gain_db": gain_db,
            "cascade_vs_prototype_db": cascade_offset_db,
            "deviation_max_db": float(np.max(np.abs(dev_db))) if dev_db.size else 0.0,
            "deviation_min_db": float(np.min(dev_db)) if dev_db.size else 0.0,
            "deviation_peak_db": float(np.max(dev_db)) if dev_db.size else 0.0,
            "ideal_low_hz": lo_id,
            "ideal_high_hz": hi_id,
            "ideal_flatness_db": flat_ideal,
            "flatness_low_hz": fl_lo,
            "flatness_high_hz": fl_hi,
        },
        "noise": {"noise_vrms": math.sqrt(noise_v2), "contributors": contrib},
        "second_pass": second_pass,
        "yield": {
            "fraction": float(np.mean(ok)),
            "draws": draws,
            "low_edge_hz": _spread(lo_d),
            "high_edge_hz": _spread(hi_d),
            "flatness_db": _spread(flat),
            "noise_vrms": _spread(noise_d),
            "sensitivity": yield_.sensitivity(stages, f, ideal_h2=np.abs(h_ideal) ** 2, lo_hz=lo_id, hi_hz=hi_id),
        },
    }
    doc["_band"] = {"freq_hz": f, "h2": h2, "ideal_h2": np.abs(h_ideal) ** 2}  # for the plot; not written
    return doc


def _noise_ok(second_pass, noise_d, noise_v2):
    """Per draw: do the re-scored SNR figures still meet the targets (noise scaled per draw)?"""
    ok = np.ones(noise_d.size, bool)
    for key, t in second_pass["targets"].items():
        chain_v2 = second_pass["chain_noise_v2"][key]
        filt_v2 = second_pass["filter_noise_v2"][key] * (noise_d**2 / noise_v2)
        sig_v2 = second_pass["signal_v2"][key]
        ok &= 10 * np.log10(sig_v2 / (chain_v2 + filt_v2)) >= t
    return ok


def _drawn_noise(stages, drawn, f, w, en, i_n, temperature_k):
    """Output noise (V rms) per drawn build (every draw, on a coarser grid)."""
    fc = f[::6]
    wc = np.zeros(fc.size)
    d = np.diff(fc)
    wc[:-1] += d / 2
    wc[1:] += d / 2
    wc = wc * (w[::6] > 0)
    n = next(iter(drawn[0].values())).size
    out = np.empty(n)
    base = [dict(st.parts) for st in stages]
    try:
        for j in range(n):
            for st, parts in zip(stages, drawn):
                st.parts = {k: float(v[j]) for k, v in parts.items()}
            dens, _ = cascade_noise_density(stages, fc, en_v_hz=en, in_a_hz=i_n, temperature_k=temperature_k)
            out[j] = math.sqrt(float(np.sum(dens * wc)))
    finally:
        for st, parts in zip(stages, base):
            st.parts = parts
    return out


def _spread(x) -> dict:
    x = np.asarray(x, float)
    x = x[np.isfinite(x)]
    if x.size == 0:
        return {"p5": None, "median": None, "p95": None}
    p5, med, p95 = np.percentile(x, [5, 50, 95])
    return {"p5": float(p5), "median": float(med), "p95": float(p95)}


def kt_over_c_vrms(c_farads: float, temperature_k: float) -> float:
    """√(kT/C): the total thermal noise of any R across C (the R cancels)."""
    return math.sqrt(BOLTZMANN * temperature_k / c_farads)
