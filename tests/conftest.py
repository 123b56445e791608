"""Shared fixtures: programs with exactly known content, written to tmp files."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

HERE = Path(__file__).parent
REPO = HERE.parent


@pytest.fixture(autouse=True)
def _analysis_cache_in_tmp(tmp_path_factory, monkeypatch):
    """Every test (and every process it starts) keeps the analysis cache in its own
    temporary folder: nothing is written to ~/.cache, and no test sees another's entries."""
    monkeypatch.setenv("AUDIOBW_CACHE_DIR", str(tmp_path_factory.mktemp("analysis-cache")))
    monkeypatch.delenv("AUDIOBW_NO_CACHE", raising=False)
    monkeypatch.delenv("AUDIOBW_CACHE_MAX_MB", raising=False)


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
