"""Per-case budget: what the large-grid targets of docs/performance.md allow one case to cost,
against what scoring a case costs now and the two array steps of its SER that no faster code
avoids.

Three figures, all on the 3-minute stereo 48 kHz benchmark program (benchmarks/programs.py)
and the 1000-case grid of benchmarks/whole.py (four families, orders 1, 2, 4, 6, 8, 50
lowpass cutoffs 2–20 kHz; 800 scored, the 200 even-order elliptic cases refused):

1. **Budget**, from whole processes timed here (the floor process, a 100-case and a
   1000-case sweep, interleaved, minimum of ``--repeats``): the CPU time per scored case
   that would meet "1000 / 100 cases ≤ 1.1 ×" and "10 000 cases / floor ≤ 2.5 ×", granting
   a perfect split over every core and no cost per case outside scoring (writing rows,
   forking).
2. **Scoring now**: ``audiobw.sweep.score_cases`` on one core (no forked half), every
   figure, minimum of ``--repeats``, per scored case.
3. **SER's array steps**: per case, the complex response on the 8193-bin analysis grid
   (``audiobw.batchresponse.responses``, the batches the sweep uses) and the delay search's
   inverse FFT of the cross spectrum (``audiobw.delay.coarse_cross``: 2 × 16384 points, the
   global search that keeps SER's best delay from landing on a wrong carrier cycle).

    python benchmarks/case_budget.py [--repeats 5]

Nothing here is a test; it prints a table for docs/performance.md.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from whole import FLOOR, interleaved, program, sweep_cmd  # noqa: E402

ORDERS = [1, 2, 4, 6, 8]


def _min_time(fn, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def in_process(path: Path, repeats: int) -> dict:
    """Scoring on one core and SER's two array steps, per scored case (s).  The sweep's own
    arguments are taken from one run of the command (``audiobw.sweep.run_sweep`` wrapped)."""
    import contextlib
    import io

    import audiobw.forked as forked

    forked._may_fork = lambda n: False  # one core: the forked half would hide the cost
    from audiobw import sweep
    from audiobw.batchresponse import responses
    from audiobw.cli import main as cli
    from audiobw.delay import coarse_cross
    from audiobw.filters import design
    from audiobw.metrics import Scorer
    from audiobw.perceptual.scoring import PerceptualScorer

    kw: dict = {}
    run = sweep.run_sweep

    def capture(p, **k):
        kw.update(k)
        return run(p, **k)

    sweep.run_sweep = capture  # jobs.sweep_file imports it when called
    out = Path(tempfile.mkdtemp(prefix="audiobw-budget-"))
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        cli(sweep_cmd(path, ORDERS, 50, out)[1:])
    sweep.run_sweep = run
    a, chain = kw["analysis"], kw["chain"]
    perc = PerceptualScorer(a, chain, kw["listening"]) if kw.get("listening") is not None else None
    specs = kw["specs"]
    rows: list = []

    def score():
        rows[:] = sweep.score_cases(a, chain, kw["grid"], kw["meter"], kw["targets"], perceptual=perc, specs=specs)

    t_score = _min_time(score, repeats)
    n = len(rows)  # the refused cases have no row
    kept = {(r["family"], r["order"], r["design_high_hz"]) for r in rows}
    items = [(i, s) for i, s in enumerate(specs) if (s.family, s.order, s.high_hz) in kept]
    batches = [[design(s) for _, s in b] for b in sweep.design_batches(items)]
    f = a.freqs_hz
    swm = Scorer(a, chain, kw["meter"])._pre["swm"]
    t_resp = _min_time(lambda: [responses(b, f) for b in batches], repeats)
    cs = [swm * responses(b, f) for b in batches]
    t_fft = _min_time(lambda: [coarse_cross(c, f) for c in cs], repeats)
    return {"scored": n, "score": t_score / n, "response": t_resp / n, "inverse_fft": t_fft / n,
            "bins": int(f.size), "n_fft": coarse_cross(cs[0], f)[0].shape[-1]}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=5)
    a = ap.parse_args(argv)
    load0 = os.getloadavg()[0]
    p3 = program("noise", 180)
    tmp = Path(tempfile.mkdtemp(prefix="audiobw-budget-"))
    floor = [sys.executable, "-c", FLOOR, str(p3)]
    r = interleaved(a.repeats, [("floor", floor), ("c100", sweep_cmd(p3, ORDERS, 5, tmp / "a")),
                                ("c1000", sweep_cmd(p3, ORDERS, 50, tmp / "b"))])
    t_floor, t100, t1000 = r["floor"]["min"], r["c100"]["min"], r["c1000"]["min"]
    cores = os.cpu_count() or 1
    m = in_process(p3, a.repeats)
    share = m["scored"] / 1000  # the even-order elliptic cases are refused (no row)
    scored100, scored1000, scored10k = 100 * share, 1000 * share, 10000 * share
    # the fixed part: the 100-case process less its own 80 cases at the 1000-case rate
    per_case_wall = (t1000 - t100) / (scored1000 - scored100)
    fixed = t100 - scored100 * per_case_wall
    budget_1000 = 0.1 * t100 / (scored1000 - scored100) * cores
    budget_10k = (2.5 * t_floor - fixed) / scored10k * cores
    ms = lambda s: f"{s * 1e3:.3f} ms"  # noqa: E731
    lines = [
        f"Run: {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {cores} cores; load average at start "
        f"{load0:.2f}; {a.repeats} runs each, minima.",
        "",
        f"Whole processes: floor {t_floor:.2f} s, 100 cases {t100:.2f} s, 1000 cases {t1000:.2f} s "
        f"(fixed part {fixed:.2f} s).",
        "",
        "| per scored case, CPU | time |",
        "|---|---|",
        f"| budget of '1000 / 100 cases ≤ 1.1 ×' (every core, nothing else per case) | {ms(budget_1000)} |",
        f"| budget of '10 000 cases / floor ≤ 2.5 ×' (the same) | {ms(budget_10k)} |",
        f"| scoring now, one core, every figure ({m['scored']} cases) | {ms(m['score'])} |",
        f"| of which SER's complex response on {m['bins']} bins | {ms(m['response'])} |",
        f"| of which SER's delay search (one {m['n_fft']}-point inverse FFT) | {ms(m['inverse_fft'])} |",
    ]
    print("\n".join(lines))


if __name__ == "__main__":
    main()
