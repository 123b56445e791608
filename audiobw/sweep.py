"""The sweep: score every case of the grid against one analysis, choose, and the sweep.json mapping.

:func:`run_sweep` analyses the program (or takes an analysis), refuses targets
the program cannot have, scores every case (:func:`score_cases`, half of a large
grid in a forked child: :mod:`audiobw.forked`) and applies the choice rule
(:mod:`audiobw.choice`); :class:`SweepResult` is the finished sweep.  The grid
is :mod:`audiobw.grid`.
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass, field

from . import __version__, _CallableModule, registry
from .chain import Chain
from .choice import CONFLICT_EDGES, FAMILY_GENTLENESS, choose, conflicts, grid_limits, wide_ends
from .errors import ParameterError
from .filters import FilterSpec, design
from .forked import FORK_MIN_CASES, forked_map
from .grid import ESTIMATE_FROM_CASES, MAX_CASES, SECONDS_PER_CASE, Grid, time_estimate
from .metrics import TARGET_KEYS, Meter, Scorer, check_targets
from .options import grid_option
from .rounding import round_any, round_figure
from .spectrum import Analysis, analyse

#: Names that moved to their own modules and are still imported from here (tests, docs, audiobw.api).
__all__ = [
    "CASE_KEYS",
    "CONFLICT_EDGES",
    "DATA_CASE_KEYS",
    "ESTIMATE_FROM_CASES",
    "FAMILY_GENTLENESS",
    "FORK_MIN_CASES",
    "MAX_CASES",
    "SECONDS_PER_CASE",
    "Grid",
    "Meter",
    "SweepResult",
    "choose",
    "conflicts",
    "forked_map",
    "grid_limits",
    "run_sweep",
    "score_cases",
    "time_estimate",
]

#: A case row's keys (sweep.json order): identity, figures, verdict, further figures; from audiobw.registry.
DATA_CASE_KEYS = registry.keys(3)
CASE_KEYS = (
    ("id", "response", "family", "order", "poles", "low_hz", "high_hz", "design_low_hz", "design_high_hz")
    + registry.keys(1)
    + ("passes", "fails", "margins_db")
    + registry.keys(2)
)


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
    conflicts: list = field(default_factory=list)  # see conflicts()

    def to_json(self) -> dict:
        a = self.analysis
        lo_occ, hi_occ = a.occupied_band_hz()
        m_lo, m_hi = self.meter.band(a.nyquist_hz)
        return {
            "tool": "audiobw",
            "version": __version__,
            "input": {
                "path": _recorded_path(a.path),
                "sha256": a.sha256,
                "sample_rate_hz": a.sample_rate_hz,
                "channels": a.channels,
                "duration_s": round_figure(a.duration_s),
                "frames": a.frames,
                "peak_dbfs": round_figure(a.peak_dbfs),
                "rms_dbfs": round_figure(a.rms_dbfs),
                "occupied_bw_hz": round_figure(hi_occ - lo_occ),
                "occupied_low_hz": round_figure(lo_occ),
                "occupied_high_hz": round_figure(hi_occ),
                "occupied_basis": "power summed over channels" if a.channels > 1 else "the one channel",
                "occupied_channels": [
                    {
                        "channel": i + 1,
                        "occupied_bw_hz": round_figure(h - lo),
                        "occupied_low_hz": round_figure(lo),
                        "occupied_high_hz": round_figure(h),
                    }
                    for i, (lo, h) in enumerate(a.occupied_band_channels_hz())
                ],
            },
            "chain": self.chain.to_json(),
            "grid": self.grid.to_json(),
            "meter": {
                "mode": self.meter.mode,
                "low_hz": m_lo,
                "high_hz": m_hi,
                "weighting": "none (snr_a_db: IEC 61672-1 A)",
                "tone_hz": self.meter.tone_hz,
                "tone_level_dbfs": self.meter.tone_level_dbfs,
            },
            "analysis": {
                "psd_segment": a.nperseg,
                "psd_resolution_hz": a.sample_rate_hz / a.nperseg,
                "welch_segments": a.meta.get("welch_segments"),
                "frame_len": a.frame_len,
                "frames_kept": int(a.band_frames.shape[0]),
                "frame_stride": a.frame_stride,
                "bands": len(a.band_edges_hz) - 1,
            },
            "targets": {k: v for k, v in self.targets.items() if v is not None},
            "cases": [{k: round_any(case.get(k)) for k in self._case_keys()} for case in self.cases],
            "choice": self.choice,
            "unmet": {k: round_figure(v) for k, v in self.unmet.items()},
            "conflicts": self.conflicts,
            "notes": list(self.notes),
            **({"limits": {k: round_any(v) for k, v in self.limits.items()}} if self.limits else {}),
            **({"data": self._data_json()} if self.data is not None else {}),
        }

    def _case_keys(self):
        return CASE_KEYS + DATA_CASE_KEYS if self.data is not None else CASE_KEYS

    def _data_json(self) -> dict:
        """Bit rate, Nyquist minimum, and the Q-maximising case overall and per family/order."""
        doc = {k: round_any(v) for k, v in self.data.to_json().items()}

        def best(cases):
            scored = [c for c in cases if c.get("q") is not None]
            if not scored:
                return None
            c = max(scored, key=lambda c: (c["q"], -c["bandwidth_hz"], -c["id"]))
            return {
                "case": c["id"],
                "bandwidth_hz": round_figure(c["bandwidth_hz"]),
                "q": round_figure(c["q"]),
                "ber": round_figure(c["ber"]),
            }

        doc["q_optimal"] = best(self.cases)
        groups = {}
        for c in self.cases:
            groups.setdefault((c["family"], c["order"]), []).append(c)
        doc["q_optimal_by_design"] = [
            {"family": fam, "order": order, **(best(cs) or {})} for (fam, order), cs in groups.items()
        ]
        return doc

    def case(self, case_id: int) -> dict:
        return self.cases[case_id - 1]


def score_cases(
    analysis: Analysis,
    chain: Chain,
    grid: Grid,
    meter: Meter,
    targets: dict,
    data=None,
    perceptual=None,
    refused: list | None = None,
    specs: list[FilterSpec] | None = None,
    progress=None,
) -> list[dict]:
    """Design and score every case of ``grid`` against one analysis.

    With ``data`` (a :class:`audiobw.datalink.DataProgram`) each row also
    carries the data-link metrics (eye, Q, BER, jitter); with ``perceptual``
    (a :class:`audiobw.perceptual.scoring.PerceptualScorer`) the audibility,
    SII and Wiener-gap figures.

    A case whose noise has no bound (``--anti-alias none`` with no
    ``--amp-bandwidth``: a highpass, an even-order elliptic, the digital
    stage) is refused before any is scored: left out of the rows (ids count
    the scored cases) with its reason appended to ``refused``; when every
    case is refused, the first one's :class:`ParameterError` is raised.

    ``specs``: the grid's cases as :meth:`Grid.specs` built and validated them for
    this chain and sample rate (a caller that has them saves building them again).
    ``progress``: called as ``progress(cases_done, cases)`` while scoring.
    """
    from .noise import unbounded_reason, check_noise_bounded

    if specs is None:
        specs = grid.specs(stage=chain.stage, fs_hz=analysis.sample_rate_hz)
    if chain.anti_alias == "none" and chain.amp_bandwidth_hz is None:
        # only a response with a floor at high frequencies (highpass, even-order elliptic)
        # or the digital stage can be unbounded
        kept = []
        for spec in specs:
            reason = None
            if chain.stage == "digital" or spec.response == "highpass" or spec.family == "elliptic":
                reason = unbounded_reason(chain, design(spec))
            if reason is None:
                kept.append(spec)
            elif refused is not None:
                refused.append(reason)
        if not kept:
            check_noise_bounded(chain, design(specs[0]))
        specs = kept
    scorer = Scorer(analysis, chain, meter)
    # converter full-scale peak over the program's sample peak at the converter (negative: it clips)
    headroom = -(analysis.peak_dbfs + chain.input_gain_db) if math.isfinite(analysis.peak_dbfs) else None

    def score_batch(batch: list) -> list[dict]:
        """The rows of consecutive cases of one design (their grid-wide arrays built together)."""
        filts = [design(spec) for _, spec in batch]
        shared: list[dict] = [{} for _ in batch]  # each case's response, noise and delay search, for the other scorers
        scored = scorer.score_many(filts, shared)
        rows = []
        for (i, spec), filt, figures, mine in zip(batch, filts, scored, shared):
            row = {
                "id": i,
                "response": spec.response,
                "family": spec.family,
                "order": spec.order,
                "poles": spec.poles,
                "design_low_hz": spec.low_hz,
                "design_high_hz": spec.high_hz,
            }
            row.update(figures)
            row["bandwidth_hz"] = filt.bandwidth_3db(analysis.nyquist_hz)
            row["headroom_db"] = headroom
            if data is not None:
                row.update(_data_metrics(filt, analysis, chain, data, mine.get("N")))
            rows.append(row)
        if perceptual is not None:
            for row, figures in zip(rows, _perceptual_many(filts, analysis, chain, perceptual, shared)):
                row.update(figures)
        for row in rows:
            passes, fails, margins = check_targets(row, targets)
            row.update(passes=passes, fails=fails, margins_db=margins)
        return rows

    batches = design_batches(list(enumerate(specs, start=1)))
    scored = forked_map(score_batch, batches, progress=progress, sizes=[len(b) for b in batches])
    return [row for rows in scored for row in rows]


#: At most this many cases of one design are scored together (:meth:`Scorer.score_many`): enough
#: to spread the per-call cost of numpy, few enough that their (cases × bins) and
#: (cases × frames × bands) arrays stay a few MB.
BATCH_CASES = 8


def design_batches(items: list) -> list[list]:
    """``(id, spec)`` items cut into runs of consecutive cases of one design (everything but the
    edges alike), each at most :data:`BATCH_CASES` long; the order is kept."""
    batches: list[list] = []
    key = None
    for item in items:
        spec = item[1]
        k = (spec.response, spec.family, spec.order, spec.ripple_db, spec.stopband_db, spec.stage, spec.fs_hz)
        if batches and k == key and len(batches[-1]) < BATCH_CASES:
            batches[-1].append(item)
        else:
            batches.append([item])
            key = k
    return batches


def _data_metrics(filt, analysis: Analysis, chain: Chain, data, total=None) -> dict:
    """Eye, Q and BER of one case; σ is the chain's output noise over the whole 0…fs/2
    (``total``: the case's output noise density when the scorer has it)."""
    import numpy as np

    from .datalink import score_data
    from .noise import noise_total

    if total is None:
        total = noise_total(chain, filt, analysis.freqs_hz, analysis.weights_hz, analysis.sample_rate_hz)
    sigma = math.sqrt(float(np.sum(total * analysis.weights_hz)))
    return score_data(filt, data, sigma)


def _perceptual_metrics(filt, analysis: Analysis, chain: Chain, perceptual, shared=None) -> dict:
    """nmr_db, audible_frames_pct, sii, wiener_gap_db of one case (see audiobw.perceptual.scoring);
    ``shared``: what :meth:`Scorer.score` left for this case (response, noise, delay search)."""
    return _perceptual_many([filt], analysis, chain, perceptual, [shared or {}])[0]


def _perceptual_many(filts, analysis: Analysis, chain: Chain, perceptual, shared: list[dict]) -> list[dict]:
    """:func:`_perceptual_metrics` of consecutive cases of one design, scored together."""
    from .noise import noise_total

    noise = [
        mine["N"]
        if mine.get("N") is not None
        else noise_total(chain, filt, analysis.freqs_hz, analysis.weights_hz, analysis.sample_rate_hz)
        for filt, mine in zip(filts, shared)
    ]
    return perceptual.score_many(filts, noise, shared)


def run_sweep(
    path,
    *,
    chain: Chain,
    grid: Grid,
    meter: Meter | None = None,
    targets: dict | None = None,
    progress=None,
    analysis: Analysis | None = None,
    data=None,
    listening=None,
    specs: list[FilterSpec] | None = None,
    case_progress=None,
) -> SweepResult:
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
    specs : list of FilterSpec, optional
        The grid's cases from :meth:`Grid.specs` for this chain's stage and the
        file's sample rate, when the caller has built (and so validated) them already.
    case_progress : callable(cases_done, cases), optional
        Called while the cases are scored.
    """
    meter = meter or Meter()
    targets = {k: v for k, v in (targets or {}).items() if v is not None}
    unknown = set(targets) - set(TARGET_KEYS)
    if unknown:
        raise ParameterError(f"targets: unknown {sorted(unknown)}; accepted: {', '.join(TARGET_KEYS)}")
    if not targets:
        raise ParameterError(
            "targets: none given; accepted: at least one of --min-snr, --min-snr-a, --max-thdn, "
            "--max-loss, --max-lsd, --min-ser"
        )
    if analysis is None:
        analysis = analyse(path, progress=progress)
    if data is None and any(k in targets for k in ("max_ber", "min_eye")):
        raise ParameterError("--max-ber/--min-eye: apply to data programs only; accepted: add --program data")
    if "min_alias_rejection_db" in targets and chain.stage != "analog":
        raise ParameterError(
            "--min-alias-rejection: applies to the analog stage only (a digital filter acts "
            "after the converter, once the images have folded); accepted: --stage analog"
        )
    perceptual_keys = {"max_nmr_db", "max_audible_frames_pct", "min_sii"}
    if listening is None and perceptual_keys & set(targets):
        raise ParameterError(
            "--max-nmr/--max-audible-frames/--min-sii: need playback conditions; "
            "accepted: a music or speech program (--program music|speech)"
        )
    if "min_sii" in targets and getattr(listening, "program", None) != "speech":
        raise ParameterError("--min-sii: applies to speech programs only; accepted: add --program speech")
    pscorer = None
    if listening is not None:
        from .perceptual.scoring import PerceptualScorer

        pscorer = PerceptualScorer(analysis, chain, listening)
    refused: list[str] = []
    cases = score_cases(
        analysis,
        chain,
        grid,
        meter,
        targets,
        data=data,
        perceptual=pscorer,
        refused=refused,
        specs=specs,
        progress=case_progress,
    )
    choice, unmet = choose(cases, targets, rank=grid.rank, tie=grid.tie)
    notes = []
    if refused:
        notes.append(
            f"{len(refused)} of {len(refused) + len(cases)} cases left out: their noise has no bound under "
            f"--anti-alias none ({refused[0]}); give --amp-bandwidth HZ (the amplifier's bandwidth) or "
            "--anti-alias ideal to score them"
        )
    if choice is None and cases:
        closest = registry.closest_case(cases)
        for lim in grid_limits(closest, cases) + wide_ends(closest, cases, grid.response):
            notes.append(
                f"no case passes; the closest (case {closest['id']}) has its {lim['edge']} edge at the "
                f"grid's {lim['end']} ({lim['design_hz']:g} Hz): extend {grid_option(grid.response, lim['edge'])} "
                f"{lim['extend']} {lim['design_hz']:g} Hz to see whether a case passes there"
            )
    if chain.stage == "analog" and grid.response == "highpass" and chain.anti_alias == "ideal":
        notes.append(
            "analog highpass with --anti-alias ideal: its noise is stopped at fs/2 by the converter's "
            "anti-alias filter (with --anti-alias none, --amp-bandwidth bounds it instead)"
        )
    return SweepResult(
        analysis,
        chain,
        grid,
        meter,
        targets,
        cases,
        choice,
        unmet,
        notes,
        data,
        limits=pscorer.limits() if pscorer is not None else {},
        conflicts=conflicts(cases, targets) if choice is None else [],
    )


def _recorded_path(path) -> str:
    """``input.path`` in sweep.json: :func:`audiobw.audio.canonical_path` (independent of how it was named)."""
    from .audio import canonical_path

    return canonical_path(path)


# ``audiobw.sweep`` is also the public function (audiobw.api.sweep): make this
# module callable so that the package attribute, which importing the module
# sets, still sweeps a file when called.
sys.modules[__name__].__class__ = _CallableModule
