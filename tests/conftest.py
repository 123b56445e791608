"""Shared fixtures: programs with exactly known content, written to tmp files."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

HERE = Path(__file__).parent
REPO = HERE.parent


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def write(path: Path, data, fs: int, subtype: str = "FLOAT") -> Path:
    data = np.asarray(data, dtype=float)
    sf.write(str(path), data, fs, subtype=subtype)
    return path


def tones(freqs, amps, fs, seconds, *, phase=0.0):
    t = np.arange(int(round(fs * seconds))) / fs
    return sum(a * np.sin(2 * np.pi * f * t + phase) for f, a in zip(freqs, amps))


@pytest.fixture
def write_audio(tmp_path):
    def _w(name, data, fs, subtype="FLOAT"):
        return write(tmp_path / name, data, fs, subtype)
    return _w
