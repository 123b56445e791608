"""The sweep: build the candidate grid, score every case, choose the narrowest.

The choice rule: among passing cases, the narrowest −3 dB bandwidth; ties go
to the lower ENBW, then the lower order.  The *binding* target is the one
with the least margin at the chosen case — the limit that stops a narrower
passband.  With no case passing, ``choice`` is None and ``unmet`` names each
target that fails at the best compromise case, with the best value any case
reached for it.
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass, field

from . import __version__, _CallableModule
from .chain import Chain
from .errors import ParameterError
from .filters import FilterSpec, design, validate_spec
from .metrics import TARGET_KEYS, TARGET_METRIC, Meter, Scorer, check_targets
from .spectrum import Analysis, analyse


@dataclass(frozen=True)
class Grid:
    """The candidate grid.

    Parameters
    ----------
    response : {'lowpass', 'highpass', 'bandpass'}
    families : tuple of str
    orders : tuple of int
    cutoffs_hz : tuple of float
        Edges swept for a lowpass (upper edge) or highpass (lower edge).
    low_edges_hz, high_edges_hz : tuple of float
        Bandpass grids; every pair with low < high is a case.
    ripple_db, stopband_db : float
    """

    response: str = "lowpass"
    families: tuple = ("butterworth",)
    orders: tuple = (4,)
    cutoffs_hz: tuple = ()
    low_edges_hz: tuple = ()
    high_edges_hz: tuple = ()
    ripple_db: float = 0.1
    stopband_db: float = 60.0

    def specs(self, *, stage: str, fs_hz: float) -> list[FilterSpec]:
        """Every case as a FilterSpec, validated for ``fs_hz``."""
        if self.response == "bandpass":
            if not self.low_edges_hz or not self.high_edges_hz:
                raise ParameterError("--low-edges/--high-edges: a bandpass sweep needs both grids")
            pairs = [(lo, hi) for lo in self.low_edges_hz for hi in self.high_edges_hz if lo < hi]
            if not pairs:
                raise ParameterError(
                    "--low-edges/--high-edges: no pair has its low edge below its high edge; "
                    "accepted: grids with some LOW < HIGH")
        else:
            if not self.cutoffs_hz:
                raise ParameterError(f"--cutoffs: a {self.response} sweep needs a cutoff grid, e.g. 2k:20k:40")
            pairs = [(None, c) if self.response == "lowpass" else (c, None) for c in self.cutoffs_hz]
        out = []
        for family in self.families:
            for order in self.orders:
                for lo, hi in pairs:
                    spec = FilterSpec(self.response, family, int(order), lo, hi, self.ripple_db,
                                      self.stopband_db, stage, fs_hz)
                    opt = "--cutoffs" if self.response != "bandpass" else "--low-edges/--high-edges"
                    validate_spec(spec, fs_hz=fs_hz, name=opt)
                    out.append(spec)
        return out

    def to_json(self) -> dict:
        return {
            "response": self.response, "families": list(self.families), "orders": list(self.orders),
            "cutoffs_hz": list(self.cutoffs_hz), "low_edges_hz": list(self.low_edges_hz),
            "high_edges_hz": list(self.high_edges_hz), "ripple_db": self.ripple_db,
            "stopband_db": self.stopband_db,
        }


def _round(x, sig: int = 7):
    """Round floats to ``sig`` significant digits for the report (None and ints pass)."""
    if x is None or isinstance(x, (bool, int, str)):
        return x
    if not math.isfinite(x):
        return None
    return float(f"{x:.{sig}g}")


DATA_CASE_KEYS = ("eye_fraction", "eye_opening_v", "sample_delay_ui", "noise_sigma_v", "q", "ber",
                  "jitter_pp_ui")
CASE_KEYS = ("id", "response", "family", "order", "poles", "low_hz", "high_hz", "design_low_hz",
             "design_high_hz", "bandwidth_hz", "enbw_hz", "noise_vrms", "noise_dbfs", "snr_db",
             "snr_a_db", "loss_db", "lsd_db", "ser_db", "thdn_pct", "thdn_db", "thdn_note",
             "passes", "fails", "margins_db")


@dataclass
class SweepResult:
    """A finished sweep; :meth:`to_json` gives the sweep.json mapping."""

    analysis: Analysis
    chain: Chain
    grid: Grid
    meter: Meter
    targets: dict
    cases: list
    choice: dict | None
    unmet: dict
    notes: list = field(default_factory=list)
    data: object = None  # datalink.DataProgram for data programs

    def to_json(self) -> dict:
        a = self.analysis
        lo_occ, hi_occ = a.occupied_band_hz()
        m_lo, m_hi = self.meter.band(a.nyquist_hz)
        return {
            "tool": "audiobw",
            "version": __version__,
            "input": {
                "path": a.path, "sha256": a.sha256, "sample_rate_hz": a.sample_rate_hz,
                "channels": a.channels, "duration_s": _round(a.duration_s),
                "frames": a.frames, "peak_dbfs": _round(a.peak_dbfs), "rms_dbfs": _round(a.rms_dbfs),
                "occupied_bw_hz": _round(hi_occ - lo_occ), "occupied_low_hz": _round(lo_occ),
                "occupied_high_hz": _round(hi_occ),
            },
            "chain": self.chain.to_json(),
            "grid": self.grid.to_json(),
            "meter": {"mode": self.meter.mode, "low_hz": m_lo, "high_hz": m_hi,
                      "weighting": "none (snr_a_db: IEC 61672-1 A)",
                      "tone_hz": self.meter.tone_hz, "tone_level_dbfs": self.meter.tone_level_dbfs},
            "analysis": {"psd_segment": a.nperseg, "psd_resolution_hz": a.sample_rate_hz / a.nperseg,
                         "welch_segments": a.meta.get("welch_segments"), "frame_len": a.frame_len,
                         "frames_kept": int(a.band_frames.shape[0]), "frame_stride": a.frame_stride,
                         "bands": len(a.band_edges_hz) - 1},
            "targets": {k: v for k, v in self.targets.items() if v is not None},
            "cases": [{k: _round_any(case.get(k)) for k in self._case_keys()} for case in self.cases],
            "choice": self.choice,
            "unmet": {k: _round(v) for k, v in self.unmet.items()},
            "notes": list(self.notes),
            **({"data": self._data_json()} if self.data is not None else {}),
        }

    def _case_keys(self):
        return CASE_KEYS + DATA_CASE_KEYS if self.data is not None else CASE_KEYS

    def _data_json(self) -> dict:
        """Bit rate, Nyquist minimum, and the Q-maximising case overall and per family/order."""
        doc = {k: _round_any(v) for k, v in self.data.to_json().items()}

        def best(cases):
            scored = [c for c in cases if c.get("q") is not None]
            if not scored:
                return None
            c = max(scored, key=lambda c: (c["q"], -c["bandwidth_hz"], -c["id"]))
            return {"case": c["id"], "bandwidth_hz": _round(c["bandwidth_hz"]), "q": _round(c["q"]),
                    "ber": _round(c["ber"])}
        doc["q_optimal"] = best(self.cases)
        groups = {}
        for c in self.cases:
            groups.setdefault((c["family"], c["order"]), []).append(c)
        doc["q_optimal_by_design"] = [
            {"family": fam, "order": order, **(best(cs) or {})} for (fam, order), cs in groups.items()]
        return doc

    def case(self, case_id: int) -> dict:
        return self.cases[case_id - 1]


def _round_any(v):
    if isinstance(v, float):
        return _round(v)
    if isinstance(v, dict):
        return {k: _round(x) for k, x in v.items()}
    return v


def score_cases(analysis: Analysis, chain: Chain, grid: Grid, meter: Meter, targets: dict,
                data=None) -> list[dict]:
    """Design and score every case of ``grid`` against one analysis.

    With ``data`` (a :class:`audiobw.datalink.DataProgram`) each row also
    carries the data-link metrics (eye, Q, BER, jitter).
    """
    specs = grid.specs(stage=chain.stage, fs_hz=analysis.sample_rate_hz)
    scorer = Scorer(analysis, chain, meter)
    rows = []
    for i, spec in enumerate(specs, start=1):
        filt = design(spec)
        row = {"id": i, "response": spec.response, "family": spec.family, "order": spec.order,
               "poles": spec.poles, "design_low_hz": spec.low_hz, "design_high_hz": spec.high_hz}
        row.update(scorer.score(filt))
        row["bandwidth_hz"] = filt.bandwidth_3db(analysis.nyquist_hz)
        if data is not None:
            row.update(_data_metrics(filt, analysis, chain, data))
        passes, fails, margins = check_targets(row, targets)
        row.update(passes=passes, fails=fails, margins_db=margins)
        rows.append(row)
    return rows


def _data_metrics(filt, analysis: Analysis, chain: Chain, data) -> dict:
    """Eye, Q and BER of one case; σ is the chain's output noise over the whole 0…fs/2."""
    import numpy as np

    from .datalink import score_data
    from .noise import noise_total

    total = noise_total(chain, filt, analysis.freqs_hz, analysis.weights_hz, analysis.sample_rate_hz)
    sigma = math.sqrt(float(np.sum(total * analysis.weights_hz)))
    return score_data(filt, data, sigma)


def choose(cases: list[dict], targets: dict) -> tuple[dict | None, dict]:
    """Apply the choice rule; returns (choice, unmet)."""
    passing = [c for c in cases if c["passes"]]
    if passing:
        best = min(passing, key=lambda c: (c["bandwidth_hz"], c["enbw_hz"], c["order"], c["id"]))
        margins = {k: v for k, v in best["margins_db"].items() if v is not None}
        binding = min(margins, key=lambda k: (margins[k], TARGET_KEYS.index(k))) if margins else None
        narrower = [c for c in cases if c["family"] == best["family"] and c["order"] == best["order"]
                    and c["bandwidth_hz"] < best["bandwidth_hz"]]
        next_narrower = max(narrower, key=lambda c: c["bandwidth_hz"]) if narrower else None
        return {
            "case": best["id"],
            "binding": binding,
            "binding_margin_db": _round(margins.get(binding)) if binding else None,
            "next_narrower": next_narrower["id"] if next_narrower else None,
            "next_narrower_fails": next_narrower["fails"] if next_narrower else [],
            "grid_limited": next_narrower is None,
        }, {}
    # none passes: the best compromise maximises the worst margin
    def worst(c):
        vals = [v for v in c["margins_db"].values()]
        return min((-math.inf if v is None else v) for v in vals) if vals else -math.inf
    compromise = max(cases, key=lambda c: (worst(c), -c["id"]))
    unmet = {}
    for key in compromise["fails"]:
        metric, sense = TARGET_METRIC[key]
        values = [c[metric] for c in cases if c.get(metric) is not None]
        unmet[key] = (max(values) if sense > 0 else min(values)) if values else None
    return None, unmet


def run_sweep(path, *, chain: Chain, grid: Grid, meter: Meter | None = None, targets: dict | None = None,
              progress=None, analysis: Analysis | None = None, data=None) -> SweepResult:
    """Analyse ``path`` once and score every case of ``grid``.

    Parameters
    ----------
    path : path-like
        The program.
    chain : Chain
    grid : Grid
    meter : Meter, optional
    targets : dict
        Target key (see :data:`audiobw.metrics.TARGET_KEYS`) -> limit; at least one.
    progress : callable(frames_done, frames_expected), optional
    analysis : Analysis, optional
        Reuse a previous analysis of the same file.
    data : audiobw.datalink.DataProgram, optional
        Score the program as a data stream too (eye, Q, BER) and allow the
        ``max_ber`` and ``min_eye`` targets.
    """
    meter = meter or Meter()
    targets = {k: v for k, v in (targets or {}).items() if v is not None}
    unknown = set(targets) - set(TARGET_KEYS)
    if unknown:
        raise ParameterError(f"targets: unknown {sorted(unknown)}; accepted: {', '.join(TARGET_KEYS)}")
    if not targets:
        raise ParameterError(
            "targets: none given; accepted: at least one of --min-snr, --min-snr-a, --max-thdn, "
            "--max-loss, --max-lsd, --min-ser")
    if analysis is None:
        analysis = analyse(path, progress=progress)
    if data is None and any(k in targets for k in ("max_ber", "min_eye")):
        raise ParameterError("--max-ber/--min-eye: apply to data programs only; accepted: add --program data")
    cases = score_cases(analysis, chain, grid, meter, targets, data=data)
    choice, unmet = choose(cases, targets)
    notes = []
    if chain.stage == "analog" and grid.response == "highpass" and chain.amp_bandwidth_hz is None:
        notes.append("analog highpass with no amplifier bandwidth: noise taken as stopped at fs/2 "
                     "by the converter's anti-alias filter (give --amp-bandwidth to model it)")
    return SweepResult(analysis, chain, grid, meter, targets, cases, choice, unmet, notes, data)


# ``audiobw.sweep`` is also the public function (audiobw.api.sweep): make this
# module callable so that the package attribute, which importing the module
# sets, still sweeps a file when called.
sys.modules[__name__].__class__ = _CallableModule
