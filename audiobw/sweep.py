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


#: The largest grid swept in one run (each case keeps a row of figures; far beyond any useful resolution).
MAX_CASES = 200_000
#: Mean time to design and score one case, s: about 0.5 ms, measured in docs/performance.md (target 3).
SECONDS_PER_CASE = 0.5e-3
#: Grids of at least this many cases get a time estimate on stderr before the sweep starts.
ESTIMATE_FROM_CASES = 10_000


def time_estimate(n_cases: int) -> str:
    """One line: the case count and the expected scoring time, for a large grid."""
    t = n_cases * SECONDS_PER_CASE
    span = f"{t:.0f} s" if t < 120 else f"{t / 60:.1f} min"
    return (f"{n_cases:,} cases to score: about {span} at {SECONDS_PER_CASE * 1e3:g} ms per case "
            "(measured on the benchmark machine; a busy or slower machine takes longer)")


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
    rank: str = "enbw"
    tie: float = 0.01

    def count(self) -> int:
        """The number of cases, counted without building them (bandpass: pairs with low < high)."""
        if self.response == "bandpass":
            import bisect

            highs = sorted(self.high_edges_hz)
            pairs = sum(len(highs) - bisect.bisect_right(highs, lo) for lo in self.low_edges_hz)
        else:
            pairs = len(self.cutoffs_hz)
        return len(self.families) * len(self.orders) * pairs

    def specs(self, *, stage: str, fs_hz: float) -> list[FilterSpec]:
        """Every case as a FilterSpec, validated for ``fs_hz``."""
        n = self.count()
        if n > MAX_CASES:
            opt = "--cutoffs" if self.response != "bandpass" else "--low-edges/--high-edges"
            raise ParameterError(f"{opt} with --family and --order: the grid holds {n:,} cases; accepted: at most "
                                 f"{MAX_CASES:,} (a coarser grid, or fewer families or orders)")
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
            "stopband_db": self.stopband_db, "rank": self.rank, "tie": self.tie,
        }


def _round(x, sig: int = 7):
    """Round floats to ``sig`` significant digits for the report (None and ints pass)."""
    if x is None or isinstance(x, (bool, int, str)):
        return x
    if not math.isfinite(x):
        return None
    return float(f"{x:.{sig}g}")


DATA_CASE_KEYS = ("eye_fraction", "eye_opening_v", "sample_delay_ui", "noise_sigma_v", "q", "ber",
                  "jitter_pp_ui", "ber_worst", "stream_sigma_v", "eye_ideal", "q_ideal", "ber_ideal")
CASE_KEYS = ("id", "response", "family", "order", "poles", "low_hz", "high_hz", "design_low_hz",
             "design_high_hz", "bandwidth_hz", "enbw_hz", "noise_vrms", "noise_dbfs", "snr_db",
             "snr_a_db", "loss_db", "lsd_db", "ser_db", "thdn_pct", "thdn_db", "thdn_note",
             "passes", "fails", "margins_db", "headroom_db", "nmr_db", "audible_frames_pct", "sii", "wiener_gap_db",
             "audible_band_hz", "audible_band_pct")


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
    limits: dict = field(default_factory=dict)  # perceptual.scoring.PerceptualScorer.limits()

    def to_json(self) -> dict:
        a = self.analysis
        lo_occ, hi_occ = a.occupied_band_hz()
        m_lo, m_hi = self.meter.band(a.nyquist_hz)
        return {
            "tool": "audiobw",
            "version": __version__,
            "input": {
                "path": _recorded_path(a.path), "sha256": a.sha256, "sample_rate_hz": a.sample_rate_hz,
                "channels": a.channels, "duration_s": _round(a.duration_s),
                "frames": a.frames, "peak_dbfs": _round(a.peak_dbfs), "rms_dbfs": _round(a.rms_dbfs),
                "occupied_bw_hz": _round(hi_occ - lo_occ), "occupied_low_hz": _round(lo_occ),
                "occupied_high_hz": _round(hi_occ),
                "occupied_basis": "power summed over channels" if a.channels > 1 else "the one channel",
                "occupied_channels": [
                    {"channel": i + 1, "occupied_bw_hz": _round(h - lo), "occupied_low_hz": _round(lo),
                     "occupied_high_hz": _round(h)}
                    for i, (lo, h) in enumerate(a.occupied_band_channels_hz())],
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
            **({"limits": {k: _round_any(v) for k, v in self.limits.items()}} if self.limits else {}),
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
                data=None, perceptual=None) -> list[dict]:
    """Design and score every case of ``grid`` against one analysis.

    With ``data`` (a :class:`audiobw.datalink.DataProgram`) each row also
    carries the data-link metrics (eye, Q, BER, jitter); with ``perceptual``
    (a :class:`audiobw.perceptual.scoring.PerceptualScorer`) the audibility,
    SII and Wiener-gap figures.
    """
    specs = grid.specs(stage=chain.stage, fs_hz=analysis.sample_rate_hz)
    scorer = Scorer(analysis, chain, meter)
    # converter full-scale peak over the program's sample peak at the converter (negative: it clips)
    headroom = -(analysis.peak_dbfs + chain.input_gain_db) if math.isfinite(analysis.peak_dbfs) else None
    rows = []
    for i, spec in enumerate(specs, start=1):
        filt = design(spec)
        row = {"id": i, "response": spec.response, "family": spec.family, "order": spec.order,
               "poles": spec.poles, "design_low_hz": spec.low_hz, "design_high_hz": spec.high_hz}
        row.update(scorer.score(filt))
        row["bandwidth_hz"] = filt.bandwidth_3db(analysis.nyquist_hz)
        row["headroom_db"] = headroom
        if data is not None:
            row.update(_data_metrics(filt, analysis, chain, data))
        if perceptual is not None:
            row.update(_perceptual_metrics(filt, analysis, chain, perceptual))
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


def _perceptual_metrics(filt, analysis: Analysis, chain: Chain, perceptual) -> dict:
    """nmr_db, audible_frames_pct, sii, wiener_gap_db of one case (see audiobw.perceptual.scoring)."""
    from .noise import noise_total

    total = noise_total(chain, filt, analysis.freqs_hz, analysis.weights_hz, analysis.sample_rate_hz)
    return perceptual.score(filt, total)


#: gentler families first when ranks tie: no ripple before ripple
FAMILY_GENTLENESS = {"butterworth": 0, "bessel": 0, "chebyshev1": 1, "elliptic": 2}


def choose(cases: list[dict], targets: dict, rank: str = "enbw", tie: float = 0.01) -> tuple[dict | None, dict]:
    """Apply the choice rule; returns (choice, unmet).

    Passing cases are ranked by ``rank`` ("enbw": the bandwidth noise grows
    with; "bandwidth": the −3 dB width); every case within ``tie`` (a share)
    of the best figure ties, and a tie goes to the lower order, then the
    gentler family (Butterworth/Bessel before Chebyshev/elliptic), then the
    smaller figure.
    """
    passing = [c for c in cases if c["passes"]]
    if passing:
        key = "enbw_hz" if rank == "enbw" else "bandwidth_hz"
        lowest = min(c[key] for c in passing)
        tied = [c for c in passing if c[key] <= lowest * (1.0 + tie)]
        best = min(tied, key=lambda c: (c["order"], FAMILY_GENTLENESS.get(c["family"], 3), c[key],
                                        c["bandwidth_hz"], c["enbw_hz"], c["id"]))
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
              progress=None, analysis: Analysis | None = None, data=None, listening=None) -> SweepResult:
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
    listening : audiobw.perceptual.scoring.Listening, optional
        Playback conditions: adds ``nmr_db``, ``audible_frames_pct``, ``sii``
        (speech) and ``wiener_gap_db`` to every case, ``limits`` to the result,
        and allows the ``max_nmr_db``, ``max_audible_frames_pct`` and
        ``min_sii`` targets.
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
    perceptual_keys = {"max_nmr_db", "max_audible_frames_pct", "min_sii"}
    if listening is None and perceptual_keys & set(targets):
        raise ParameterError("--max-nmr/--max-audible-frames/--min-sii: need playback conditions; "
                             "accepted: a music or speech program (--program music|speech)")
    if "min_sii" in targets and getattr(listening, "program", None) != "speech":
        raise ParameterError("--min-sii: applies to speech programs only; accepted: add --program speech")
    pscorer = None
    if listening is not None:
        from .perceptual.scoring import PerceptualScorer
        pscorer = PerceptualScorer(analysis, chain, listening)
    cases = score_cases(analysis, chain, grid, meter, targets, data=data, perceptual=pscorer)
    choice, unmet = choose(cases, targets, rank=grid.rank, tie=grid.tie)
    notes = []
    if chain.stage == "analog" and grid.response == "highpass" and chain.amp_bandwidth_hz is None:
        notes.append("analog highpass with no amplifier bandwidth: noise taken as stopped at fs/2 "
                     "by the converter's anti-alias filter (give --amp-bandwidth to model it)")
    return SweepResult(analysis, chain, grid, meter, targets, cases, choice, unmet, notes, data,
                       limits=pscorer.limits() if pscorer is not None else {})


def _recorded_path(path) -> str:
    """``input.path`` in sweep.json: :func:`audiobw.audio.canonical_path` (independent of how it was named)."""
    from .audio import canonical_path

    return canonical_path(path)


# ``audiobw.sweep`` is also the public function (audiobw.api.sweep): make this
# module callable so that the package attribute, which importing the module
# sets, still sweeps a file when called.
sys.modules[__name__].__class__ = _CallableModule
