"""The candidate grid of a sweep: families × orders × edges, each case a validated FilterSpec.

Also the bound on a grid's size and the time estimate a large grid gets before it is scored.
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import ParameterError
from .filters import FilterSpec, validate_spec
from .options import default, option_name

#: The largest grid swept in one run (each case keeps a row of figures; far beyond any useful resolution).
MAX_CASES = 200_000
#: Mean time to design and score one case on one core, s, perceptual figures included (music and
#: speech): about 1.0 ms, docs/performance.md ("Where it stands"); half that when the
#: scoring forks onto an idle second core.
SECONDS_PER_CASE = 1.0e-3
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
