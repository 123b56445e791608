"""Generate a corpus of noise-like programs for `audiobw batch`, and time batch runs.

The scenario is invented: a library of one-minute room-tone and ambience
takes from a fictional field-recording archive, each band-limited by its own
(random) microphone and recorder, so the files' upper content edges spread
between about 3 kHz and 18 kHz.  Everything is seeded: the same arguments give
the same files.

    python benchmarks/make_corpus.py /tmp/audiobw-corpus --files 200 --seconds 60
    python benchmarks/make_corpus.py /tmp/audiobw-corpus --bench      # generate if needed, then time

``--bench`` runs the same batch side by side, each into a fresh output folder
(no cache): one local worker process, two local worker processes, and a
dask.distributed LocalCluster (2 worker processes, 1 thread each) with dask's
default worker environment and with glibc's mmap threshold raised.  It prints files per minute and the ratios to the one-worker run.
Figures depend on what else the machine is doing: they are indicative.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

FS_HZ = 48000
BATCH_OPTIONS = {"cutoffs": "2k:20k:24", "family": "butterworth,bessel", "order": "2,4",
                 "max_loss": "0.2", "min_snr_a": "90"}


def program(index: int, *, seconds: float, seed: int):
    """One take: pink-ish noise through a random lowpass, slow level changes, -20 dBFS rms."""
    import numpy as np
    from scipy.signal import butter, sosfilt

    rng = np.random.default_rng([seed, index])
    n = int(round(seconds * FS_HZ))
    white = rng.standard_normal(n)
    # one-pole tilt toward low frequencies (roughly -3 dB/octave above 200 Hz)
    sos_tilt = butter(1, 200.0, btype="lowpass", fs=FS_HZ, output="sos")
    x = 0.3 * white + sosfilt(sos_tilt, white) * 8.0
    cutoff = float(np.exp(rng.uniform(np.log(3000.0), np.log(18000.0))))
    order = int(rng.choice([2, 4, 6]))
    x = sosfilt(butter(order, cutoff, btype="lowpass", fs=FS_HZ, output="sos"), x)
    t = np.arange(n) / FS_HZ
    x *= 1.0 + 0.5 * np.sin(2 * np.pi * rng.uniform(0.05, 0.3) * t + rng.uniform(0, 2 * np.pi))
    x *= 10 ** (-20 / 20) / np.sqrt(np.mean(x * x))
    return x, cutoff


def make(folder: Path, *, files: int, seconds: float, seed: int) -> list[Path]:
    """Write ``files`` FLAC takes (PCM_24) into ``folder``; existing ones are kept."""
    import soundfile as sf

    folder.mkdir(parents=True, exist_ok=True)
    out = []
    for i in range(files):
        path = folder / f"take{i:04d}.flac"
        if not path.exists():
            x, _ = program(i, seconds=seconds, seed=seed)
            tmp = path.with_suffix(".part.flac")
            sf.write(str(tmp), x, FS_HZ, subtype="PCM_24", format="FLAC")
            tmp.replace(path)
        out.append(path)
    return out


def bench(folder: Path) -> None:
    from audiobw.batch import run_batch
    from audiobw.clikit import settings_from

    settings = settings_from(BATCH_OPTIONS, None)
    rows = []
    work = Path(tempfile.mkdtemp(prefix="audiobw-bench-"))
    try:
        for label, kw in (("1 local worker", {"workers": 1}), ("2 local workers", {"workers": 2}),
                          ("LocalCluster 2x1", "cluster"), ("LocalCluster 2x1 *", "cluster-mmap")):
            out = work / label.replace(" ", "_").replace("*", "mmap")
            if isinstance(kw, str):
                import dask
                from distributed import LocalCluster

                # dask's nanny starts workers with MALLOC_TRIM_THRESHOLD_ set, which turns off glibc's
                # dynamic mmap threshold: every large buffer is then mapped and unmapped afresh.
                # The starred row raises the mmap threshold to 32 MiB (see docs/corpus.md).
                extra = ({"distributed.nanny.pre-spawn-environ.MALLOC_MMAP_THRESHOLD_": 32 << 20}
                         if kw == "cluster-mmap" else {})
                with dask.config.set(extra), LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                                          host="127.0.0.1", dashboard_address=None) as cluster:
                    t0 = time.perf_counter()
                    res = run_batch([folder], settings, out, cluster=cluster.scheduler_address)
                    elapsed = time.perf_counter() - t0
            else:
                t0 = time.perf_counter()
                res = run_batch([folder], settings, out, **kw)
                elapsed = time.perf_counter() - t0
            n = res.doc["counts"]["swept"]
            rows.append((label, n, elapsed, 60.0 * n / elapsed, (out / "corpus.json").read_bytes()))
    finally:
        shutil.rmtree(work, ignore_errors=True)
    base = rows[0][3]
    print(f"corpus: {folder} ({rows[0][1]} files); options: {BATCH_OPTIONS}")
    print(f"{'run':<20} {'files':>6} {'seconds':>9} {'files/min':>10} {'ratio':>6}")
    for label, n, elapsed, fpm, _ in rows:
        print(f"{label:<20} {n:>6} {elapsed:>9.1f} {fpm:>10.1f} {fpm / base:>6.2f}")
    same = all(r[4] == rows[0][4] for r in rows)
    print("corpus.json identical across the runs:", same)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("folder", type=Path)
    ap.add_argument("--files", type=int, default=200)
    ap.add_argument("--seconds", type=float, default=60.0)
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--bench", action="store_true", help="time 1 worker, 2 workers and a LocalCluster")
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    paths = make(args.folder, files=args.files, seconds=args.seconds, seed=args.seed)
    print(f"{len(paths)} files in {args.folder} ({time.perf_counter() - t0:.1f} s)")
    if args.bench:
        bench(args.folder)
    return 0


if __name__ == "__main__":  # LocalCluster with processes needs this guard
    sys.exit(main())
