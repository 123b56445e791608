"""Shared fixtures: programs with exactly known content, written to tmp files."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

HERE = Path(__file__).parent
REPO = HERE.parent


@pytest.fixture(scope="session", autouse=True)
def _analysis_cache_of_the_session(tmp_path_factory):
    """Module- and session-scoped fixtures (set up before any function-scoped one) sweep
    too: the whole session keeps the analysis cache in a temporary folder, never ~/.cache."""
    import os

    saved = {k: os.environ.get(k) for k in ("AUDIOBW_CACHE_DIR", "AUDIOBW_NO_CACHE", "AUDIOBW_CACHE_MAX_MB")}
    os.environ["AUDIOBW_CACHE_DIR"] = str(tmp_path_factory.mktemp("analysis-cache-session"))
    os.environ.pop("AUDIOBW_NO_CACHE", None)
    os.environ.pop("AUDIOBW_CACHE_MAX_MB", None)
    yield
    for k, v in saved.items():
        if v is None:
            os.environ.pop(k, None)
        else:
            os.environ[k] = v


@pytest.fixture(autouse=True)
def _analysis_cache_in_tmp(_analysis_cache_of_the_session, tmp_path_factory, monkeypatch):
    """Every test (and every process it starts) keeps the analysis cache in its own
    temporary folder: nothing is written to ~/.cache, and no test sees another's entries."""
    monkeypatch.setenv("AUDIOBW_CACHE_DIR", str(tmp_path_factory.mktemp("analysis-cache")))


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


def clean_stream(tmp_path_factory, prefix: str):
    """A folder and in it a clean 1200 bit/s NRZ stream of 1024 bits written by ``audiobw bits``."""
    from audiobw.cli import main

    d = tmp_path_factory.mktemp(prefix)
    stream = d / "b.flac"
    assert main(["bits", "--bit-rate", "1200", "--bits-count", "1024", "--out", str(stream)]) == 0
    return d, stream


def sweep_data_stream(stream, out, cutoffs: str) -> int:
    """``audiobw sweep`` of a 1200 bit/s stream as a data program, eye target 50 %, Bessel 4 lowpass
    at ``cutoffs``, into ``out``; the exit status."""
    from audiobw.cli import main

    return main(
        [
            "sweep",
            str(stream),
            "--program",
            "data",
            "--bit-rate",
            "1200",
            "--min-eye",
            "0.5",
            "--response",
            "lowpass",
            "--family",
            "bessel",
            "--order",
            "4",
            "--cutoffs",
            cutoffs,
            "--out",
            str(out),
        ]
    )
