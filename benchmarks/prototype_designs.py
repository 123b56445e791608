"""Per-case scoring time of an 800-case analog bandpass sweep and a 1000-case digital lowpass sweep.

In-process (the analysis done once, untimed; AUDIOBW_THREADS=1, so no helper
thread and no forked half), the minimum of ``--repeats`` runs per sweep.  The
rows can be written as JSON (``--rows FILE``) to compare two versions field by
field.  Run: ``.venv/bin/python benchmarks/prototype_designs.py``.
Nothing here is a test: no time is asserted anywhere in ``make test``.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from pathlib import Path

os.environ["AUDIOBW_THREADS"] = "1"
os.environ["AUDIOBW_NO_CACHE"] = "1"
HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import numpy as np  # noqa: E402
from programs import program  # noqa: E402

from audiobw.chain import Chain  # noqa: E402
from audiobw.spectrum import analyse  # noqa: E402
from audiobw.sweep import Grid, run_sweep  # noqa: E402

FAMILIES = ("butterworth", "bessel", "chebyshev1", "elliptic")
TARGETS = {"max_loss_db": 0.5, "min_snr_db": 90.0}


def subjects():
    lows = tuple(np.geomspace(30, 600, 10).round(3))
    highs = tuple(np.geomspace(3000, 18000, 5).round(3))
    cuts = tuple(np.geomspace(2000, 20000, 50).round(3))
    return {
        # 4 families x orders 1, 3, 5, 7 x 50 bands (odd orders: no elliptic floor to refuse)
        "bandpass_analog_800": (
            Chain(stage="analog"),
            Grid("bandpass", FAMILIES, (1, 3, 5, 7), low_edges_hz=lows, high_edges_hz=highs),
        ),
        # 4 families x orders 1, 2, 4, 6, 8 x 50 cutoffs
        "lowpass_digital_1000": (
            Chain(stage="digital", anti_alias="ideal"),
            Grid("lowpass", FAMILIES, (1, 2, 4, 6, 8), cutoffs_hz=cuts),
        ),
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--rows", help="write the rows of the last run of each sweep here (JSON)")
    args = ap.parse_args()
    path = program("noise", 30.0)
    an = analyse(path)
    rows = {}
    for name, (chain, grid) in subjects().items():
        times = []
        for _ in range(args.repeats):
            t = time.perf_counter()
            r = run_sweep(path, chain=chain, grid=grid, targets=TARGETS, analysis=an)
            times.append(time.perf_counter() - t)
        n = len(r.cases)
        runs = ", ".join(f"{x / n * 1e3:.3f}" for x in times)
        print(f"{name}: {n} cases, {min(times) / n * 1e3:.3f} ms per case (min; runs {runs})")
        rows[name] = r.cases
    if args.rows:
        Path(args.rows).write_text(json.dumps(rows, default=str))


if __name__ == "__main__":
    main()
