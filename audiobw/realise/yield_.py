"""Monte Carlo over part tolerances: the share of builds that still meet every target.

Each draw scales every resistor by 1 + t_R·u and every capacitor by 1 + t_C·u,
u uniform on [−1, 1] (a tolerance band read as a hard limit, common practice for
a worst-case-bounded draw), from a seeded numpy Generator: the same seed gives
the same builds, and for a fixed seed a looser tolerance scales the same draws
further from nominal.  A build passes when its −3 dB edges lie within the edge
tolerance of the ideal's, its passband flatness is within the flatness margin of
the ideal's, and the SNR figures re-scored with its noise still meet the targets.
"""

from __future__ import annotations

import numpy as np

from .noise import BOLTZMANN  # noqa: F401  (re-exported for callers)


def draw_parts(stages, *, tol_r: float, tol_c: float, draws: int, seed: int):
    """Per stage, a dict part -> array (draws,) of drawn values."""
    rng = np.random.default_rng(seed)
    out = []
    for st in stages:
        parts = {}
        for name in sorted(st.parts):
            u = rng.uniform(-1.0, 1.0, draws)
            tol = tol_r if name[0] == "R" else tol_c
            parts[name] = st.parts[name] * (1.0 + tol * u)
        out.append(parts)
    return out


def responses(stages, freq_hz, drawn) -> np.ndarray:
    """|H|² of every drawn build on ``freq_hz``: shape (draws, F)."""
    f = np.asarray(freq_hz, float)[None, :]
    h2 = None
    for st, parts in zip(stages, drawn):
        p = {k: v[:, None] for k, v in parts.items()}
        r = np.abs(st.response(f, p)) ** 2
        h2 = r if h2 is None else h2 * r
    return h2


def edges(freq_hz, h2, ref_power, response: str):
    """(low, high) −3 dB edges (Hz) per row of ``h2`` relative to ``ref_power`` (NaN if absent)."""
    f = np.asarray(freq_hz, float)
    above = h2 >= 0.5 * ref_power
    lo = np.full(h2.shape[0], np.nan)
    hi = np.full(h2.shape[0], np.nan)
    logf = np.log(f)
    ldb = np.log(h2 / (0.5 * ref_power))
    for i in range(h2.shape[0]):
        idx = np.flatnonzero(above[i])
        if idx.size == 0:
            continue
        if response != "lowpass" and idx[0] > 0:
            j = idx[0]
            lo[i] = np.exp(np.interp(0.0, [ldb[i, j - 1], ldb[i, j]], [logf[j - 1], logf[j]]))
        if response != "highpass" and idx[-1] < f.size - 1:
            j = idx[-1]
            hi[i] = np.exp(np.interp(0.0, [ldb[i, j + 1], ldb[i, j]], [logf[j + 1], logf[j]]))
    return lo, hi


def flatness_db(freq_hz, h2, lo_hz, hi_hz) -> np.ndarray:
    """Peak-to-peak |H| in dB over [lo_hz, hi_hz] per row."""
    f = np.asarray(freq_hz, float)
    sel = (f >= (lo_hz or 0.0)) & (f <= (hi_hz or np.inf))
    db = 10 * np.log10(h2[:, sel])
    return db.max(axis=1) - db.min(axis=1)


def sensitivity(stages, freq_hz, *, ideal_h2, lo_hz, hi_hz, step: float = 0.01):
    """Per part: the change in each −3 dB edge (%/%) and in worst passband deviation (dB/%)."""
    rows = []
    base = [{k: np.array([v]) for k, v in st.parts.items()} for st in stages]
    h0 = responses(stages, freq_hz, base)
    lo0, hi0 = edges(
        freq_hz, h0, np.max(ideal_h2), "bandpass" if lo_hz and hi_hz else ("lowpass" if hi_hz else "highpass")
    )
    f = np.asarray(freq_hz, float)
    sel = (f >= (lo_hz or 0.0)) & (f <= (hi_hz or np.inf))
    for i, st in enumerate(stages):
        for name in sorted(st.parts):
            drawn = [dict(b) for b in base]
            drawn[i] = dict(base[i])
            drawn[i][name] = base[i][name] * (1 + step)
            h = responses(stages, freq_hz, drawn)
            lo, hi = edges(
                freq_hz, h, np.max(ideal_h2), "bandpass" if lo_hz and hi_hz else ("lowpass" if hi_hz else "highpass")
            )
            dev = np.max(np.abs(10 * np.log10(h[0, sel] / h0[0, sel])))
            rows.append(
                {
                    "stage": i + 1,
                    "part": name,
                    "low_edge_pct_per_pct": _pct(lo[0], lo0[0], step),
                    "high_edge_pct_per_pct": _pct(hi[0], hi0[0], step),
                    "passband_db_per_pct": float(dev / (100 * step)),
                }
            )
    return rows


def _pct(new, old, step):
    if not (np.isfinite(new) and np.isfinite(old)):
        return None
    return float((new / old - 1.0) / step)
