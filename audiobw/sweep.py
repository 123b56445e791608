"""The sweep: build the candidate grid, score every case, choose the narrowest.

The choice rule: among passing cases, the narrowest −3 dB bandwidth; ties go
to the lower ENBW, then the lower order.  The *binding* target is the one
with the least margin at the chosen case — the limit that stops a narrower
passband.  With no case passing, ``choice`` is None, ``unmet`` names each
target that no case meets on its own, with the best value any case reached
for it, and ``conflicts`` the targets that each hold somewhere but never
together, with the edge where each flips (:func:`conflicts`).
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass, field

from . import __version__, _CallableModule, registry
from .chain import Chain
from .errors import ParameterError
from .filters import FilterSpec, design, validate_spec
from .metrics import TARGET_KEYS, TARGET_METRIC, Meter, Scorer, check_targets
from .options import default, grid_option, option_name
from .spectrum import Analysis, analyse


#: The largest grid swept in one run (each case keeps a row of figures; far beyond any useful resolution).
MAX_CASES = 200_000
#: Mean time to design and score one case on one core, s, perceptual figures included (music and
#: speech): about 1.7 ms, docs/performance.md ("Using the whole machine"); half that when the
#: scoring forks onto an idle second core.
SECONDS_PER_CASE = 1.7e-3
#: Grids of at least this many cases get a time estimate on stderr before the sweep starts.
ESTIMATE_FROM_CASES = 10_000


def time_estimate(n_cases: int) -> str:
    """One line: the case count and the expected scoring time, for a large grid."""
    t = n_cases * SECONDS_PER_CASE
    span = f"{t:.0f} s" if t < 120 else f"{t / 60:.1f} min"
    return (
        f"{n_cases:,} cases to score: about {span} at {SECONDS_PER_CASE * 1e3:g} ms per case on one core "
        "(measured on the benchmark machine; an idle second core halves it, a busy or slower machine "
        "takes longer)"
    )


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

    response: str = default("response")
    families: tuple = default("family")
    orders: tuple = default("order")
    cutoffs_hz: tuple = ()
    low_edges_hz: tuple = ()
    high_edges_hz: tuple = ()
    ripple_db: float = default("ripple")
    stopband_db: float = default("stopband")
    rank: str = default("rank")
    tie: float = default("tie")

    def count(self) -> int:
        """The number of cases, counted without building them (bandpass: pairs with low < high)."""
        if self.response == "bandpass":
            import bisect

            highs = sorted(self.high_edges_hz)
            pairs = sum(len(highs) - bisect.bisect_right(highs, lo) for lo in self.low_edges_hz)
        else:
            pairs = len(self.cutoffs_hz)
        return len(self.families) * len(self.orders) * pairs

    def specs(self, *, stage: str, fs_hz: float, names: dict | None = None) -> list[FilterSpec]:
        """Every case as a FilterSpec, validated for ``fs_hz``.

        ``names``: where the edge grids came from, option key -> origin (``cutoffs`` ->
        ``chain.toml [grid] cutoffs``) for the refusals; default the options (``--cutoffs``).
        """
        where = {k: (names or {}).get(k, option_name(k)) for k in ("cutoffs", "low_edges", "high_edges")}
        opt = where["cutoffs"] if self.response != "bandpass" else f"{where['low_edges']}/{where['high_edges']}"
        n = self.count()
        if n > MAX_CASES:
            raise ParameterError(
                f"{opt} with --family and --order: the grid holds {n:,} cases; accepted: at most "
                f"{MAX_CASES:,} (a coarser grid, or fewer families or orders)"
            )
        if self.response == "bandpass":
            if not self.low_edges_hz or not self.high_edges_hz:
                raise ParameterError(f"{opt}: a bandpass sweep needs both grids")
            pairs = [(lo, hi) for lo in self.low_edges_hz for hi in self.high_edges_hz if lo < hi]
            if not pairs:
                raise ParameterError(
                    f"{opt}: no pair has its low edge below its high edge; accepted: grids with some LOW < HIGH"
                )
        else:
            if not self.cutoffs_hz:
                raise ParameterError(f"{opt}: a {self.response} sweep needs a cutoff grid, e.g. 2k:20k:40")
            pairs = [(None, c) if self.response == "lowpass" else (c, None) for c in self.cutoffs_hz]
        out = []
        for family in self.families:
            for order in self.orders:
                for lo, hi in pairs:
                    spec = FilterSpec(
                        self.response, family, int(order), lo, hi, self.ripple_db, self.stopband_db, stage, fs_hz
                    )
                    validate_spec(spec, fs_hz=fs_hz, name=opt)
                    out.append(spec)
        return out

    def to_json(self) -> dict:
        return {
            "response": self.response,
            "families": list(self.families),
            "orders": list(self.orders),
            "cutoffs_hz": list(self.cutoffs_hz),
            "low_edges_hz": list(self.low_edges_hz),
            "high_edges_hz": list(self.high_edges_hz),
            "ripple_db": self.ripple_db,
            "stopband_db": self.stopband_db,
            "rank": self.rank,
            "tie": self.tie,
        }


def _round(x, sig: int = 7):
    """Round floats to ``sig`` significant digits for the report (None and ints pass)."""
    if x is None or isinstance(x, (bool, int, str)):
        return x
    if not math.isfinite(x):
        return None
    return float(f"{x:.{sig}g}")


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
                "duration_s": _round(a.duration_s),
                "frames": a.frames,
                "peak_dbfs": _round(a.peak_dbfs),
                "rms_dbfs": _round(a.rms_dbfs),
                "occupied_bw_hz": _round(hi_occ - lo_occ),
                "occupied_low_hz": _round(lo_occ),
                "occupied_high_hz": _round(hi_occ),
                "occupied_basis": "power summed over channels" if a.channels > 1 else "the one channel",
                "occupied_channels": [
                    {
                        "channel": i + 1,
                        "occupied_bw_hz": _round(h - lo),
                        "occupied_low_hz": _round(lo),
                        "occupied_high_hz": _round(h),
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
            "cases": [{k: _round_any(case.get(k)) for k in self._case_keys()} for case in self.cases],
            "choice": self.choice,
            "unmet": {k: _round(v) for k, v in self.unmet.items()},
            "conflicts": self.conflicts,
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
            return {
                "case": c["id"],
                "bandwidth_hz": _round(c["bandwidth_hz"]),
                "q": _round(c["q"]),
                "ber": _round(c["ber"]),
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


def _round_any(v):
    if isinstance(v, float):
        return _round(v)
    if isinstance(v, dict):
        return {k: _round(x) for k, x in v.items()}
    return v


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

    def score_one(item) -> dict:
        i, spec = item
        filt = design(spec)
        row = {
            "id": i,
            "response": spec.response,
            "family": spec.family,
            "order": spec.order,
            "poles": spec.poles,
            "design_low_hz": spec.low_hz,
            "design_high_hz": spec.high_hz,
        }
        shared: dict = {}  # this case's response, noise and delay search, for the other scorers
        row.update(scorer.score(filt, shared))
        row["bandwidth_hz"] = filt.bandwidth_3db(analysis.nyquist_hz)
        row["headroom_db"] = headroom
        if data is not None:
            row.update(_data_metrics(filt, analysis, chain, data, shared.get("N")))
        if perceptual is not None:
            row.update(_perceptual_metrics(filt, analysis, chain, perceptual, shared))
        passes, fails, margins = check_targets(row, targets)
        row.update(passes=passes, fails=fails, margins_db=margins)
        return row

    return forked_map(score_one, list(enumerate(specs, start=1)), progress=progress)


#: Below this many cases a sweep scores in one process (a fork costs more than it saves).
FORK_MIN_CASES = 128


def _may_fork(n_items: int) -> bool:
    """Whether :func:`forked_map` may score half of ``n_items`` cases in a forked child.

    Only on Linux (fork after numpy is safe there), with at least two cores and
    one of them idle (:func:`_others_running` at most cores − 2), no other live
    thread in this process, ``AUDIOBW_THREADS`` not ``1`` (batch workers that
    are one core each set it), and enough cases to pay for the fork.
    """
    import os
    import sys
    import threading

    from .spectrum import helper_threads

    if n_items < FORK_MIN_CASES or not sys.platform.startswith("linux") or not helper_threads():
        return False
    cores = os.cpu_count() or 1
    return cores >= 2 and threading.active_count() == 1 and _others_running() <= cores - 2


def _others_running() -> float:
    """How many other tasks want a core now: the runnable count of /proc/loadavg (4th field,
    which counts this process too), median of five reads 4 ms apart; the 1-minute load
    average where /proc is missing (it also counts runs that have just ended)."""
    import os
    import statistics
    import time

    counts = []
    try:
        for i in range(5):
            if i:
                time.sleep(0.004)
            with open("/proc/loadavg", encoding="ascii") as fh:
                counts.append(int(fh.read().split()[3].split("/")[0]) - 1)
    except (OSError, ValueError, IndexError):
        try:
            return os.getloadavg()[0]
        except OSError:
            return float("inf")
    return statistics.median(counts)


def forked_map(fn, items: list, *, fork: bool | None = None, progress=None) -> list:
    """``[fn(x) for x in items]``, the second half computed in a forked child when a core is idle.

    The child inherits everything computed so far (analysis, scorers, the shared
    prototypes) and sends its results back as JSON through a pipe (plain rows:
    numbers, strings, None, lists and string-keyed mappings; floats keep every
    bit through their repr); the order and the values are those of the plain
    loop (tested).  An error in the child is raised here (an
    :class:`~audiobw.errors.AudiobwError` with its type and text, anything else
    as RuntimeError); an interrupt stops both, and the child dies with the
    parent (Linux ``PR_SET_PDEATHSIG``).  ``fork``: force (True) or forbid
    (False) the split; default :func:`_may_fork`.  ``progress``: called as
    ``progress(done, total)`` after each item of this process (the child's
    half is counted at the pace of the parent's).
    """
    import json
    import os

    from . import errors

    n = len(items)
    if not (_may_fork(n) if fork is None else fork) or n < 2:
        return [_ticked(fn, x, i, n, 1, progress) for i, x in enumerate(items, start=1)]
    half = (n + 1) // 2
    parent = os.getpid()
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child: score the second half, send it, leave without any cleanup of the parent's
        code = 0
        try:
            os.close(r)
            _die_with(parent)
            try:
                msg = {"ok": [fn(x) for x in items[half:]]}
            except BaseException as exc:  # handed to the parent
                msg = {"error": type(exc).__name__, "text": str(exc)}
            with os.fdopen(w, "wb") as fh:
                fh.write(json.dumps(msg, allow_nan=True).encode())
        except BaseException:
            code = 1
        finally:
            os._exit(code)
    os.close(w)
    try:
        mine = [_ticked(fn, x, i, n, n / half, progress) for i, x in enumerate(items[:half], start=1)]
        with os.fdopen(r, "rb") as fh:
            r = -1
            data = fh.read()
    except BaseException:
        if r >= 0:
            os.close(r)
        try:
            os.kill(pid, 9)
        except OSError:
            pass
        os.waitpid(pid, 0)
        raise
    os.waitpid(pid, 0)
    if not data:
        raise RuntimeError("scoring: the helper process ended without its results")
    msg = json.loads(data)
    if "ok" not in msg:
        kind = getattr(errors, msg["error"], None)
        if isinstance(kind, type) and issubclass(kind, errors.AudiobwError):
            raise kind(msg["text"])
        raise RuntimeError(f"scoring (helper process): {msg['error']}: {msg['text']}")
    if progress is not None:
        progress(n, n)
    return mine + msg["ok"]


def _ticked(fn, x, i: int, n: int, pace: float, progress):
    out = fn(x)
    if progress is not None:
        progress(min(n, int(i * pace)), n)
    return out


def _die_with(parent_pid: int) -> None:
    """Linux: end this (forked) process when its parent ends (prctl(2) PR_SET_PDEATHSIG), so a
    killed sweep leaves no half-finished scorer running; elsewhere nothing."""
    import os
    import sys

    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes
        import signal

        if ctypes.CDLL(None).prctl(1, int(signal.SIGKILL), 0, 0, 0) == 0 and os.getppid() != parent_pid:
            os._exit(1)  # the parent ended before the call
    except (OSError, AttributeError):
        pass


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
    from .noise import noise_total

    shared = shared or {}
    total = shared.get("N")
    if total is None:
        total = noise_total(chain, filt, analysis.freqs_hz, analysis.weights_hz, analysis.sample_rate_hz)
    return perceptual.score(filt, total, shared)


def grid_limits(case: dict, cases: list[dict]) -> list[dict]:
    """The ends of the grid that ``case`` sits on, edge by edge.

    Lowpass: its upper edge at the grid's lowest cutoff (a narrower one was
    never tried).  Highpass: its lower edge at the highest.  Bandpass: each
    edge at either end of its own grid — the lowest upper or highest lower
    edge stopped it narrowing; the highest upper or lowest lower edge may have
    stopped a trade (a lower low edge can let the upper edge come down for
    less ENBW).  Each entry: ``edge`` ('low' or 'high'), ``end`` ('lowest' or
    'highest'), ``design_hz`` and ``extend`` ('below' or 'above'), the way to
    extend that edge's grid.  Rows without design edges give none.
    """
    response = case.get("response")
    out = []
    for edge, key in (("low", "design_low_hz"), ("high", "design_high_hz")):
        value = case.get(key)
        if value is None:
            continue
        values = [c[key] for c in cases if c.get(key) is not None]
        ends = []
        if response == "bandpass":
            ends = [("lowest", min(values)), ("highest", max(values))]
        elif response == "lowpass" and edge == "high":
            ends = [("lowest", min(values))]
        elif response == "highpass" and edge == "low":
            ends = [("highest", max(values))]
        for end, at in ends:
            if value == at:
                out.append(
                    {
                        "edge": edge,
                        "end": end,
                        "design_hz": _round(value),
                        "extend": "below" if end == "lowest" else "above",
                    }
                )
    return out


#: gentler families first when ranks tie: no ripple before ripple
FAMILY_GENTLENESS = {"butterworth": 0, "bessel": 0, "chebyshev1": 1, "elliptic": 2}


def _wide_ends(case: dict, cases: list[dict], response: str) -> list[dict]:
    """A lowpass or highpass case at the wide end of its grid (for a case that fails)."""
    key, end = {"lowpass": ("design_high_hz", "highest"), "highpass": ("design_low_hz", "lowest")}.get(
        response, (None, None)
    )
    if key is None or case.get(key) is None:
        return []
    values = [c[key] for c in cases if c.get(key) is not None]
    at = max(values) if end == "highest" else min(values)
    if case[key] != at or len(set(values)) == 1:
        return []
    return [
        {
            "edge": "high" if key == "design_high_hz" else "low",
            "end": end,
            "design_hz": _round(at),
            "extend": "above" if end == "highest" else "below",
        }
    ]


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
        best = min(
            tied,
            key=lambda c: (
                c["order"],
                FAMILY_GENTLENESS.get(c["family"], 3),
                c[key],
                c["bandwidth_hz"],
                c["enbw_hz"],
                c["id"],
            ),
        )
        margins = {k: v for k, v in best["margins_db"].items() if v is not None}
        binding = min(margins, key=lambda k: (margins[k], TARGET_KEYS.index(k))) if margins else None
        narrower = [
            c
            for c in cases
            if c["family"] == best["family"]
            and c["order"] == best["order"]
            and c["bandwidth_hz"] < best["bandwidth_hz"]
        ]
        next_narrower = max(narrower, key=lambda c: c["bandwidth_hz"]) if narrower else None
        limits = grid_limits(best, cases)
        return {
            "case": best["id"],
            "binding": binding,
            "binding_margin_db": _round(margins.get(binding)) if binding else None,
            "next_narrower": next_narrower["id"] if next_narrower else None,
            "next_narrower_fails": next_narrower["fails"] if next_narrower else [],
            "grid_limited": next_narrower is None or bool(limits),
            "grid_limits": limits,
        }, {}
    # none passes: unmet names the targets that no case meets on its own, with the best value
    # reached; targets that each hold somewhere but never together are conflicts (see conflicts())
    unmet = {}
    for key in TARGET_KEYS:
        if key not in targets or any(key not in c["fails"] for c in cases):
            continue
        metric, sense = TARGET_METRIC[key]
        values = [c[metric] for c in cases if c.get(metric) is not None]
        unmet[key] = (max(values) if sense > 0 else min(values)) if values else None
    return None, unmet


#: the edges a conflict can part on, as case keys, in the order they are tried
CONFLICT_EDGES = ("high_hz", "low_hz", "bandwidth_hz")


def conflicts(cases: list[dict], targets: dict) -> list[dict]:
    """Targets that each hold in some case but never together, and the edge where each flips.

    Only meaningful when no case passes.  Each entry is a smallest set of
    targets (a pair, unless every pair meets somewhere and only a larger set
    never does) that no case meets together, though each meets alone::

        {"targets": ["min_snr_a_db", "max_lsd_db"], "edge": "high_hz",
         "needs": {"min_snr_a_db": {"bound": "max", "edge_hz": 3000.0},
                   "max_lsd_db": {"bound": "min", "edge_hz": 20000.0}}}

    ``edge`` is the case key (−3 dB upper edge, lower edge, or −3 dB
    bandwidth) whose ranges over the cases where each target holds do not
    overlap: every case meeting the first target has that edge at most
    ``edge_hz`` and every case meeting the second at least its ``edge_hz``
    (``bound`` says which way).  Both are necessary conditions read off the
    grid, so they prove the two cannot meet in it.  ``edge`` is None when no
    single edge parts them (they part on family or order, or for a larger set).
    """
    if any(c["passes"] for c in cases):
        return []
    keys = [k for k in TARGET_KEYS if k in targets]
    alone = [k for k in keys if any(k not in c["fails"] for c in cases)]
    if len(alone) < 2:
        return []
    # each distinct set of targets a case meets, as a frozenset
    held = {frozenset(k for k in alone if k not in c["fails"]) for c in cases}

    def together(subset) -> bool:
        return any(subset <= h for h in held)

    from itertools import combinations

    found: list[tuple] = []
    for size in range(2, len(alone) + 1):
        for subset in combinations(alone, size):
            s = frozenset(subset)
            if together(s) or any(set(f) <= s for f in found):
                continue
            found.append(subset)
        if found:  # the smallest sets explain it; larger ones contain them
            break
    out = []
    for subset in found:
        entry: dict = {
            "targets": list(subset),
            "edge": None,
            "needs": {k: {"bound": None, "edge_hz": None} for k in subset},
        }
        if len(subset) == 2:
            a, b = subset
            for edge in CONFLICT_EDGES:
                ra = _edge_range(cases, a, edge)
                rb = _edge_range(cases, b, edge)
                if ra is None or rb is None:
                    continue
                if ra[1] < rb[0]:
                    needs = {
                        a: {"bound": "max", "edge_hz": _round(ra[1])},
                        b: {"bound": "min", "edge_hz": _round(rb[0])},
                    }
                elif rb[1] < ra[0]:
                    needs = {
                        a: {"bound": "min", "edge_hz": _round(ra[0])},
                        b: {"bound": "max", "edge_hz": _round(rb[1])},
                    }
                else:
                    continue
                entry.update(edge=edge, needs=needs)
                break
        out.append(entry)
    return out


def _edge_range(cases: list[dict], key: str, edge: str):
    """(lowest, highest) value of ``edge`` over the cases meeting ``key``; None for an open edge."""
    vals = [c.get(edge) for c in cases if key not in c["fails"]]
    if not vals or any(v is None for v in vals):
        return None
    return min(vals), max(vals)


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
        for lim in grid_limits(closest, cases) + _wide_ends(closest, cases, grid.response):
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
