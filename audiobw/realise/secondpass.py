"""The second pass on a swept case: the chain's noise with the filter's own noise added.

The chain's contributors come from :func:`audiobw.noise.noise_spectra` (the same model the
sweep scored with) on a linear grid 0…fs/2; the realised filter's output noise density is
added at the converter input as one more contributor, ``filter_parts``, and SNR and
A-weighted SNR are re-scored in the meter band.  The signal power is recovered from the
sweep's own figures (S = N·10^(SNR/10)), so the sweep's scoring is not repeated.
"""

from __future__ import annotations

import math

import numpy as np

from ..chain import Chain
from ..filters import FilterSpec, design
from ..noise import noise_spectra
from ..weighting import a_weighting_power


def second_pass(doc: dict, case: dict, spec: FilterSpec, n_bins: int = 1 << 14):
    """A callable(f_hz, density) -> second-pass mapping for :func:`..build.realise`."""
    fs = float(doc["input"]["sample_rate_hz"])
    chain = Chain.from_json(doc["chain"])
    m_lo, m_hi = float(doc["meter"]["low_hz"]), float(doc["meter"]["high_hz"])
    grid = np.linspace(0.0, fs / 2, n_bins + 1)
    weights = np.full(grid.size, fs / 2 / n_bins)
    weights[[0, -1]] /= 2
    spectra = noise_spectra(chain, design(spec), grid, weights, fs)
    band = (grid >= m_lo) & (grid <= m_hi)
    aw = a_weighting_power(grid)
    targets = {k: float(v) for k, v in doc.get("targets", {}).items() if k in ("min_snr_db", "min_snr_a_db")}

    def run(f_hz, density):
        fd = np.interp(grid, f_hz, density, left=0.0, right=0.0)
        chain_d = spectra.total
        nc = {
            "min_snr_db": float(np.sum((chain_d * weights)[band])),
            "min_snr_a_db": float(np.sum((chain_d * aw * weights)[band])),
        }
        nf = {
            "min_snr_db": float(np.sum((fd * weights)[band])),
            "min_snr_a_db": float(np.sum((fd * aw * weights)[band])),
        }
        sweep_noise = case.get("noise_vrms")
        snr0 = {"min_snr_db": case.get("snr_db"), "min_snr_a_db": case.get("snr_a_db")}
        sig = {k: (nc[k] * 10 ** (snr0[k] / 10) if snr0[k] is not None else None) for k in nc}
        if sweep_noise:
            sig["min_snr_db"] = sweep_noise**2 * 10 ** (snr0["min_snr_db"] / 10)
            nc_sweep = sweep_noise**2
        else:
            nc_sweep = nc["min_snr_db"]
        nc_used = {"min_snr_db": nc_sweep, "min_snr_a_db": nc["min_snr_a_db"]}
        out = {
            "chain_noise_vrms": math.sqrt(nc_sweep),
            "chain_noise_recomputed_vrms": math.sqrt(nc["min_snr_db"]),
            "filter_noise_vrms": math.sqrt(nf["min_snr_db"]),
            "added_noise_db": 10 * math.log10(1 + nf["min_snr_db"] / nc_sweep),
            "filter_vs_chain_db": 10 * math.log10(nf["min_snr_db"] / nc_sweep),
            "snr_db": snr0["min_snr_db"],
            "snr_a_db": snr0["min_snr_a_db"],
            "snr_db_with_filter": None,
            "snr_a_db_with_filter": None,
            "targets": {k: v for k, v in targets.items() if sig[k] is not None},
            "targets_hold": None,
            "chain_noise_v2": nc_used,
            "filter_noise_v2": nf,
            "signal_v2": sig,
        }
        for key, name in (("min_snr_db", "snr_db_with_filter"), ("min_snr_a_db", "snr_a_db_with_filter")):
            if sig[key] is not None:
                out[name] = 10 * math.log10(sig[key] / (nc_used[key] + nf[key]))
        if out["targets"]:
            out["targets_hold"] = all(
                out["snr_db_with_filter" if k == "min_snr_db" else "snr_a_db_with_filter"] >= t
                for k, t in out["targets"].items()
            )
        return out

    return run
