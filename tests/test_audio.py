"""Loading: channel counts, sample rates and subtypes libsndfile reads; atomic writes."""

import os

import numpy as np
import pytest
import soundfile as sf

from audiobw.audio import atomic_path, iter_blocks, open_info, write_audio_atomic, write_text_atomic
from audiobw.errors import AudioFileError, OutputError
from audiobw.spectrum import analyse

from .conftest import tones


@pytest.mark.parametrize("channels", range(1, 9))
def test_one_to_eight_channels(tmp_path, channels):
    fs = 16000
    x = np.stack([tones([500.0 * (c + 1)], [0.1], fs, 1.0) for c in range(channels)], axis=1)
    p = tmp_path / f"c{channels}.wav"
    sf.write(str(p), x, fs, subtype="PCM_24")
    a = analyse(p)
    assert a.channels == channels and a.psd_channels.shape[0] == channels
    # each channel holds one sine of amplitude 0.1: power 0.005 per channel
    np.testing.assert_allclose(np.sum(a.psd_channels * a.weights_hz, axis=1), 0.005, rtol=5e-3)


def test_nine_channels_are_refused(tmp_path):
    p = tmp_path / "c9.wav"
    sf.write(str(p), np.zeros((16000, 9)) + 0.01, 16000, subtype="PCM_16")
    with pytest.raises(AudioFileError, match="9 channels; accepted: 1 to 8"):
        open_info(p)


@pytest.mark.parametrize("fs", [8000, 11025, 16000, 22050, 32000, 44100, 48000, 88200, 96000, 176400, 192000, 384000])
def test_sample_rates_8k_to_384k(tmp_path, fs):
    f0 = fs / 16
    x = tones([f0], [0.5], fs, 0.5)[:, None]
    p = tmp_path / f"r{fs}.flac" if fs <= 655350 else tmp_path / f"r{fs}.wav"
    sf.write(str(p), x, fs, subtype="PCM_24")
    a = analyse(p)
    assert a.sample_rate_hz == fs
    assert np.sum(a.psd * a.weights_hz) == pytest.approx(0.125, rel=5e-3)
    assert a.freqs_hz[np.argmax(a.psd)] == pytest.approx(f0, abs=fs / a.nperseg)


@pytest.mark.parametrize(
    "fmt,subtype,tol_db",
    [
        ("WAV", "PCM_U8", 0.5),
        ("WAV", "PCM_16", 0.01),
        ("WAV", "PCM_24", 0.001),
        ("WAV", "PCM_32", 0.001),
        ("WAV", "FLOAT", 0.001),
        ("WAV", "DOUBLE", 0.001),
        ("FLAC", "PCM_16", 0.01),
        ("FLAC", "PCM_24", 0.001),
        ("OGG", "VORBIS", 0.2),
    ],
)
def test_integer_and_float_subtypes(tmp_path, fmt, subtype, tol_db):
    fs = 48000
    x = tones([1000.0], [0.5], fs, 1.0)[:, None]
    p = tmp_path / f"s.{ {'WAV': 'wav', 'FLAC': 'flac', 'OGG': 'ogg'}[fmt] }".replace(" ", "")
    sf.write(str(p), x, fs, format=fmt, subtype=subtype)
    a = analyse(p)
    assert a.rms_dbfs == pytest.approx(20 * np.log10(0.5), abs=tol_db)


def test_frames_are_counted_as_read(tmp_path):
    fs = 8000
    p = tmp_path / "n.wav"
    sf.write(str(p), np.full((12345, 2), 0.1), fs, subtype="PCM_16")
    assert sum(b.shape[0] for b in iter_blocks(p, blocksize=1000)) == 12345


def test_random_bytes_with_audio_extension(tmp_path):
    p = tmp_path / "noise.flac"
    p.write_bytes(np.random.default_rng(1).integers(0, 256, 4096, dtype=np.uint8).tobytes())
    with pytest.raises(AudioFileError, match="not a readable audio file"):
        open_info(p)


def test_atomic_write_leaves_nothing_on_failure(tmp_path):
    target = tmp_path / "out.txt"
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("interrupted")
    assert not target.exists() and os.listdir(tmp_path) == []


def test_atomic_write_replaces_whole_file(tmp_path):
    target = tmp_path / "out.txt"
    write_text_atomic(target, "one")
    write_text_atomic(target, "two")
    assert target.read_text() == "two"


def test_refuses_to_overwrite_an_input(tmp_path):
    src = tmp_path / "in.wav"
    sf.write(str(src), np.full((8000, 1), 0.1), 8000, subtype="PCM_16")
    before = src.read_bytes()
    with pytest.raises(OutputError, match="refusing to overwrite an input"):
        write_text_atomic(src, "oops", inputs=[src])
    assert src.read_bytes() == before


def test_integer_subtype_refuses_overrange(tmp_path):
    with pytest.raises(OutputError, match="exceed full scale"):
        write_audio_atomic(tmp_path / "o.wav", np.full((100, 1), 1.5), 8000, subtype="PCM_16")
    assert not (tmp_path / "o.wav").exists()


def test_disk_full_is_a_clear_error_and_leaves_no_file(tmp_path, monkeypatch):
    import errno

    import audiobw.audio.writing as audio_mod

    def full(*a, **k):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(audio_mod.os, "fsync", full)
    with pytest.raises(OutputError, match="x.txt: cannot write \\(No space left on device\\)"):
        write_text_atomic(tmp_path / "x.txt", "x" * 1000)
    assert os.listdir(tmp_path) == []


def test_integer_pcm_skips_the_finite_scan_float_keeps_it(tmp_path, monkeypatch):
    import numpy as np
    import soundfile as sf

    from audiobw import audio
    from audiobw.errors import AudioFileError

    x = 0.25 * np.sin(np.arange(4000) / 7.0)
    pcm, flt = tmp_path / "i.flac", tmp_path / "f.wav"
    sf.write(str(pcm), x, 48000, subtype="PCM_24")
    y = x.copy()
    y[1234] = np.nan
    sf.write(str(flt), y, 48000, subtype="FLOAT")
    calls = []
    real = np.isfinite
    monkeypatch.setattr(np, "isfinite", lambda a, *k, **kw: calls.append(1) or real(a, *k, **kw))
    blocks = list(audio.iter_blocks(pcm))
    assert calls == [] and sum(len(b) for b in blocks) == 4000
    assert np.max(np.abs(np.concatenate(blocks)[:, 0] - x)) < 2.0**-22  # 24-bit quantisation
    with pytest.raises(AudioFileError, match="frame 1234"):
        list(audio.iter_blocks(flt))
