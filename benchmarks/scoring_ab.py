"""Whole-process cost of a perceptual sweep, before and after a change, against the floor.

A 1000-case lowpass sweep (4 families × orders 1, 2, 4, 6, 8 × 50 cutoffs,
2–20 kHz, ``--anti-alias ideal``, ``--no-cache``) of a generated 10-minute
stereo 48 kHz 24-bit FLAC (``benchmarks/programs.py`` "noise"), music with
``--max-audible-frames 1`` and speech with ``--min-sii 0.75``, run by the
working tree ("after") and by the package of a git revision exported with
``git archive`` ("before", run as ``python -m audiobw`` from the export), beside
a fresh floor process (``benchmarks/whole.py``'s FLOOR: soundfile decode + one
rfft pass).  Interleaved rounds; wall and CPU (user + sys of the child,
``os.wait4``) min and median, the 1-minute load average at each run, peak RSS.
The sweep.json files are left in the output folder for a case-by-case
comparison.  Nothing is asserted.

    python benchmarks/scoring_ab.py --before REV [--repeats 5] [--seconds 600] [--out DIR]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tarfile
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

from whole import FLOOR, program  # noqa: E402


def export(rev: str, dest: Path) -> Path:
    """The ``audiobw`` package of ``rev``, unpacked under ``dest``."""
    tar = dest / "pkg.tar"
    subprocess.run(["git", "archive", "-o", str(tar), rev, "audiobw"], cwd=str(ROOT), check=True)
    with tarfile.open(tar) as t:
        t.extractall(dest, filter="data")
    return dest


def sweep(cwd, path, out, *targets):
    return (str(cwd), [sys.executable, "-m", "audiobw", "sweep", str(path), "--no-cache",
                       "--response", "lowpass", "--family", "butterworth,bessel,chebyshev1,elliptic",
                       "--order", "1,2,4,6,8", "--cutoffs", "2k:20k:50", "--anti-alias", "ideal",
                       *targets, "--out", str(out)])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--before", required=True, help="git revision to compare with (e.g. HEAD~3)")
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--seconds", type=float, default=600.0)
    ap.add_argument("--out", type=Path, default=None)
    a = ap.parse_args(argv)
    path = program("noise", a.seconds)
    out = a.out or Path(tempfile.mkdtemp(prefix="audiobw-scoring-ab-"))
    base = export(a.before, Path(tempfile.mkdtemp(prefix="audiobw-before-")))
    music, speech = ("--program", "music", "--max-audible-frames", "1"), ("--program", "speech", "--min-sii", "0.75")
    subjects = [("floor", ("/", [sys.executable, "-c", FLOOR, str(path)])),
                ("music, before", sweep(base, path, out / "before-music", *music)),
                ("music, after", sweep(ROOT, path, out / "after-music", *music)),
                ("speech, before", sweep(base, path, out / "before-speech", *speech)),
                ("speech, after", sweep(ROOT, path, out / "after-speech", *speech))]
    runs: dict = {name: [] for name, _ in subjects}
    t0 = time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())
    print(f"{path}; start {t0}, load {os.getloadavg()}", flush=True)
    for _ in range(a.repeats):
        for name, (cwd, cmd) in subjects:
            load = os.getloadavg()[0]
            start = time.perf_counter()
            proc = subprocess.Popen(cmd, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
            _, status, usage = os.wait4(proc.pid, 0)
            wall = time.perf_counter() - start
            err = proc.stderr.read().decode(errors="replace")
            proc.stderr.close()
            if os.waitstatus_to_exitcode(status) not in (0, 3):
                raise RuntimeError(f"{name}: {err[-2000:]}")
            runs[name].append((wall, usage.ru_utime + usage.ru_stime, load, usage.ru_maxrss / 1024.0))
            print(f"  {name}: {wall:.2f} s, CPU {runs[name][-1][1]:.2f} s, load {load:.2f}", flush=True)
    print(f"end, load {os.getloadavg()}; {os.cpu_count()} cores; sweep.json files under {out}")
    fl = runs["floor"]
    fw, fc = min(x[0] for x in fl), min(x[1] for x in fl)
    fwm = statistics.median(x[0] for x in fl)
    print("| subject | wall min / median | CPU min / median | wall min ratio | wall median ratio | "
          "CPU min ratio | load | peak RSS |")
    print("|---|---|---|---|---|---|---|---|")
    for name, rs in runs.items():
        w, c = [x[0] for x in rs], [x[1] for x in rs]
        print(f"| {name} | {min(w):.2f} / {statistics.median(w):.2f} s | {min(c):.2f} / "
              f"{statistics.median(c):.2f} s | {min(w) / fw:.2f} × | {statistics.median(w) / fwm:.2f} × | "
              f"{min(c) / fc:.2f} × | {statistics.median(x[2] for x in rs):.2f} | {max(x[3] for x in rs):.0f} MB |")
    return runs


if __name__ == "__main__":
    main()
