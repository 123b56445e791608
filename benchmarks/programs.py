"""Seeded test programs for the benchmark, written block by block.

Two kinds, both invented for the benchmark and reproducible from a seed:

* ``noise``: a noise-like program, white Gaussian noise shaped by a fixed
  second-order-sections lowpass and tilt (a bright ensemble-like spectrum),
  with a slow level envelope so the short-time frames differ;
* ``tonal``: a few harmonic tones (a sustained chord) with vibrato-free
  partials decaying at 6 dB per harmonic, plus a low noise floor.

Files go to a temporary folder (``$AUDIOBW_BENCH_DIR`` or
``/tmp/audiobw-bench``), never into the repository, and are reused between
runs when their recorded SHA-256 still matches.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from pathlib import Path

import numpy as np

FS_HZ = 48000
BLOCK = 1 << 18


def bench_dir() -> Path:
    d = Path(os.environ.get("AUDIOBW_BENCH_DIR", "/tmp/audiobw-bench"))
    d.mkdir(parents=True, exist_ok=True)
    return d


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for piece in iter(lambda: fh.read(1 << 20), b""):
            h.update(piece)
    return h.hexdigest()


def _blocks_noise(n_frames: int, channels: int, seed: int):
    from scipy import signal

    rng = np.random.default_rng(seed)
    sos = signal.butter(2, 9000.0, fs=FS_HZ, output="sos")
    zi = np.zeros((sos.shape[0], 2, channels))
    done = 0
    while done < n_frames:
        n = min(BLOCK, n_frames - done)
        x = rng.standard_normal((n, channels))
        y, zi = signal.sosfilt(sos, x, axis=0, zi=zi)
        t = (done + np.arange(n)) / FS_HZ
        env = 0.6 + 0.4 * np.sin(2 * math.pi * 0.07 * t) ** 2
        yield (0.12 * y * env[:, None]).astype(np.float64)
        done += n


def _blocks_tonal(n_frames: int, channels: int, seed: int):
    rng = np.random.default_rng(seed)
    roots = np.array([110.0, 138.6, 164.8])
    done = 0
    while done < n_frames:
        n = min(BLOCK, n_frames - done)
        t = (done + np.arange(n)) / FS_HZ
        y = np.zeros(n)
        for r in roots:
            for h in range(1, 16):
                if h * r < FS_HZ / 2.2:
                    y += 0.05 / h * np.sin(2 * math.pi * h * r * t + h)
        out = np.repeat(y[:, None], channels, axis=1) + 1e-3 * rng.standard_normal((n, channels))
        yield out
        done += n


def program(kind: str, seconds: float, *, channels: int = 2, seed: int = 1, subtype: str = "PCM_24",
            fmt: str = "FLAC") -> Path:
    """Path to a generated program; made (block by block) only if missing or changed."""
    import soundfile as sf

    d = bench_dir()
    ext = {"FLAC": "flac", "WAV": "wav"}[fmt]
    name = f"{kind}-{seconds:g}s-{channels}ch-{seed}-{subtype.lower()}.{ext}"
    path = d / name
    record = d / (name + ".sha256")
    if path.exists() and record.exists() and record.read_text().strip() == _sha256(path):
        return path
    n_frames = int(round(seconds * FS_HZ))
    gen = {"noise": _blocks_noise, "tonal": _blocks_tonal}[kind]
    tmp = path.with_suffix(".part")
    with sf.SoundFile(str(tmp), "w", samplerate=FS_HZ, channels=channels, subtype=subtype, format=fmt) as fh:
        for block in gen(n_frames, channels, seed):
            fh.write(np.clip(block, -0.99, 0.99))
    os.replace(tmp, path)
    record.write_text(_sha256(path) + "\n")
    return path


if __name__ == "__main__":
    import sys

    print(json.dumps(str(program(sys.argv[1], float(sys.argv[2])))))
