"""Whole-process cost of a sweep that scores audibility and SII.

A 1000-case lowpass sweep (4 families × orders 1, 2, 4, 6, 8 × 50 cutoffs,
2–20 kHz) of a generated 10-minute stereo 48 kHz 24-bit FLAC, run as
``audiobw sweep`` with the perceptual targets — music with
``--max-audible-frames 1`` (masking NMR, audible frames, Wiener gap for every
case) and speech with ``--min-sii 0.75`` (the same plus the SII) — against a
fresh floor process that decodes the file with soundfile and takes one rfft
pass (``benchmarks/whole.py``'s FLOOR).  Interleaved rounds, min and median
kept, the 1-minute load average recorded at each run.  Nothing is asserted.

    python benchmarks/perceptual.py [--repeats 3] [--seconds 600]
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

from whole import FLOOR, _cmd_audiobw, interleaved, program  # noqa: E402


def sweep(path, out, *targets):
    return _cmd_audiobw("sweep", str(path), "--response", "lowpass",
                        "--family", "butterworth,bessel,chebyshev1,elliptic", "--order", "1,2,4,6,8",
                        "--cutoffs", "2k:20k:50", *targets, "--out", str(out))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--seconds", type=float, default=600.0)
    a = ap.parse_args(argv)
    path = program("noise", a.seconds)
    tmp = Path(tempfile.mkdtemp(prefix="audiobw-perceptual-"))
    print(f"{path} ({path.stat().st_size / 1e6:.0f} MB); uptime: {os.getloadavg()}", flush=True)
    t0 = time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())
    r = interleaved(a.repeats, [
        ("floor", [sys.executable, "-c", FLOOR, str(path)]),
        ("music", sweep(path, tmp / "music", "--program", "music", "--max-audible-frames", "1")),
        ("speech", sweep(path, tmp / "speech", "--program", "speech", "--min-sii", "0.75")),
    ])
    print(f"run {t0}, {os.cpu_count()} cores, load at end {os.getloadavg()}")
    for name in ("music", "speech"):
        print(f"| {name} | {r[name]['min']:.2f} / {r['floor']['min']:.2f} s | {r[name]['median']:.2f} / "
              f"{r['floor']['median']:.2f} s | {r[name]['min'] / r['floor']['min']:.2f} × | "
              f"{r[name]['load']:.2f} | {r[name]['rss']:.0f} MB |")
    return r


if __name__ == "__main__":
    main()
