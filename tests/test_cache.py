"""The analysis cache (audiobw.cache): hits give byte-identical outputs, every damaged or
foreign entry is refused and rebuilt, a changed file misses, the folder stays under its
bound, and a cache folder that cannot be written never stops a sweep.

The conftest fixture points AUDIOBW_CACHE_DIR at a fresh temporary folder for every test.
"""

from __future__ import annotations

import io
import os
import shutil
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from audiobw import cache, spectrum
from audiobw.audio import open_info
from audiobw.cli import main

from .conftest import tones, write

FS = 48000
SWEEP_ARGS = ["--cutoffs", "2k:20k:6", "--order", "2,4", "--max-loss", "0.5"]


def program(seed: int, seconds: float = 6.0) -> np.ndarray:
    """Stereo tones and noise; longer than two decode blocks (2 × 131072 frames)."""
    rng = np.random.default_rng(seed)
    x = tones([220.0, 1500.0, 6000.0], [0.2, 0.1, 0.03], FS, seconds) + rng.normal(0, 1e-3, int(FS * seconds))
    return np.stack([x, 0.7 * x + rng.normal(0, 1e-3, x.size)], axis=1)


@pytest.fixture
def take(tmp_path):
    return write(tmp_path / "take.flac", program(1), FS, "PCM_24")


@pytest.fixture
def folder():
    return Path(os.environ["AUDIOBW_CACHE_DIR"])


@pytest.fixture(autouse=True)
def fresh_stats(monkeypatch):
    monkeypatch.setattr(cache, "STATS", dict.fromkeys(cache.STATS, 0))


def sweep(path, out, *extra, capsys=None):
    code = main(["sweep", str(path), *SWEEP_ARGS, "--out", str(out), "--json", *extra])
    if capsys is not None:
        capsys.readouterr()
    assert code == 0
    return (Path(out) / "sweep.json").read_bytes()


def entries(folder: Path) -> list[Path]:
    return sorted(folder.glob("*.npz"))


def same_analysis(a, b) -> None:
    for name in (
        "freqs_hz",
        "psd_channels",
        "psd",
        "weights_hz",
        "peak",
        "mean_square",
        "dc",
        "band_edges_hz",
        "band_frames",
        "fine_freqs_hz",
        "fine_psd",
    ):
        x, y = getattr(a, name), getattr(b, name)
        assert x.dtype == y.dtype and x.shape == y.shape and x.tobytes() == y.tobytes(), name
    for name in (
        "sha256",
        "sample_rate_hz",
        "channels",
        "frames",
        "nperseg",
        "full_scale_samples",
        "frame_len",
        "frame_stride",
        "meta",
        "fine_nperseg",
    ):
        assert getattr(a, name) == getattr(b, name), name


# -- hits ---------------------------------------------------------------------


def test_second_sweep_hits_and_matches_no_cache_byte_for_byte(take, tmp_path, folder, capsys):
    first = sweep(take, tmp_path / "a", capsys=capsys)
    assert cache.STATS["misses"] == 1 and cache.STATS["hits"] == 0 and cache.STATS["writes"] == 1
    assert len(entries(folder)) == 1
    # other targets: the analysis is the same, so it comes from the cache
    main(["sweep", str(take), *SWEEP_ARGS[:-2], "--max-loss", "0.1", "--out", str(tmp_path / "b"), "--json"])
    capsys.readouterr()
    assert cache.STATS["hits"] == 1 and cache.STATS["writes"] == 1
    second = sweep(take, tmp_path / "c", capsys=capsys)
    assert cache.STATS["hits"] == 2
    uncached = sweep(take, tmp_path / "d", "--no-cache", capsys=capsys)
    assert cache.STATS["hits"] == 2 and cache.STATS["misses"] == 1  # --no-cache: not even looked up
    assert first == second == uncached
    assert (tmp_path / "a" / "spectrum.npz").read_bytes() == (tmp_path / "c" / "spectrum.npz").read_bytes()


def test_cached_analysis_is_the_pass_bit_for_bit(take):
    fresh = spectrum.analyse(take)
    spectrum.analyse(take, cache=cache)
    hit = spectrum.analyse(take, cache=cache)
    assert cache.STATS["hits"] == 1
    same_analysis(fresh, hit)
    # a digest given by the caller (batch) is looked up before any decoding
    given_sha = spectrum.analyse(take, cache=cache, sha256=fresh.sha256)
    assert cache.STATS["hits"] == 2
    same_analysis(fresh, given_sha)


def test_a_hit_keeps_the_fine_low_frequency_psd(tmp_path):
    # 14 s: long enough for the fine low-frequency PSD (audiobw.spectrum.fine_length), which
    # loss and SNR integrate below the crossover; a hit must give it back bit for bit
    long_take = write(tmp_path / "long.flac", program(2, seconds=14.0), FS, "PCM_24")
    fresh = spectrum.analyse(long_take)
    assert fresh.fine_nperseg > fresh.nperseg and fresh.fine_psd.size > 0
    spectrum.analyse(long_take, cache=cache)
    hit = spectrum.analyse(long_take, cache=cache)
    assert cache.STATS["hits"] == 1
    same_analysis(fresh, hit)
    for a, b in zip(fresh.scoring_grid(), hit.scoring_grid()):
        assert np.array_equal(a, b)


def test_no_cache_writes_nothing(take, tmp_path, folder, capsys):
    sweep(take, tmp_path / "a", "--no-cache", capsys=capsys)
    assert entries(folder) == [] and cache.STATS == dict.fromkeys(cache.STATS, 0)


def test_environment_switch_and_debug_line(take, tmp_path, folder, capsys, monkeypatch):
    monkeypatch.setenv("AUDIOBW_NO_CACHE", "1")
    sweep(take, tmp_path / "a", capsys=capsys)
    assert entries(folder) == []
    monkeypatch.delenv("AUDIOBW_NO_CACHE")
    monkeypatch.setenv("AUDIOBW_DEBUG", "1")
    sweep(take, tmp_path / "b", capsys=capsys)
    main(["sweep", str(take), *SWEEP_ARGS, "--out", str(tmp_path / "c"), "--json"])
    assert "analysis cache: hit" in capsys.readouterr().err


def test_warnings_of_the_pass_are_given_again_on_a_hit(tmp_path):
    # a clipped program with a DC offset: both warnings come from the analysis
    x = np.clip(program(5) * 6.0, -1.0, 1.0) + 0.02
    path = write(tmp_path / "hot.wav", np.clip(x, -1.0, 1.0), FS, "PCM_16")
    with pytest.warns(UserWarning) as fresh:
        spectrum.analyse(path, cache=cache)
    with pytest.warns(UserWarning) as again:
        spectrum.analyse(path, cache=cache)
    assert cache.STATS["hits"] == 1
    assert [str(w.message) for w in fresh] == [str(w.message) for w in again]
    assert any("full scale" in str(w.message) for w in again) and any("DC" in str(w.message) for w in again)


# -- damaged and foreign entries ------------------------------------------------


def _rewrite(entry: Path, **changes) -> None:
    """Rewrite an entry with some arrays changed and a matching checksum (passes the checksum test)."""
    with np.load(entry, allow_pickle=False) as z:
        data = {k: z[k] for k in z.files}
    data.update(changes)
    data.pop("checksum")
    data["checksum"] = np.str_(cache._checksum(str(data["key"]), data))
    with open(entry, "wb") as fh:
        np.savez(fh, **data)


def _truncate(entry: Path) -> None:
    entry.write_bytes(entry.read_bytes()[: entry.stat().st_size // 2])


def _random_bytes(entry: Path) -> None:
    entry.write_bytes(np.random.default_rng(3).bytes(entry.stat().st_size))


def _wrong_shape(entry: Path) -> None:
    with np.load(entry, allow_pickle=False) as z:
        psd = z["psd_channels"]
    _rewrite(entry, psd_channels=psd[:, :-1].copy())


def _wrong_dtype(entry: Path) -> None:
    with np.load(entry, allow_pickle=False) as z:
        bf = z["band_frames"]
    _rewrite(entry, band_frames=bf.astype(np.float32))


def _not_finite(entry: Path) -> None:
    with np.load(entry, allow_pickle=False) as z:
        dc = z["dc"].copy()
    dc[0] = np.nan
    _rewrite(entry, dc=dc)


def _flipped_value(entry: Path) -> None:
    # a changed figure without a new checksum: only the checksum shows it
    with np.load(entry, allow_pickle=False) as z:
        data = {k: z[k] for k in z.files}
    data["mean_square"] = data["mean_square"] * 2.0
    with open(entry, "wb") as fh:
        np.savez(fh, **data)


def _pickled(entry: Path) -> None:
    with np.load(entry, allow_pickle=False) as z:
        data = {k: z[k] for k in z.files}
    data["meta_object"] = np.array([{"x": 1}], dtype=object)
    with open(entry, "wb") as fh:
        np.savez(fh, **data)


@pytest.mark.parametrize(
    "damage",
    [_truncate, _random_bytes, _wrong_shape, _wrong_dtype, _not_finite, _flipped_value, _pickled],
    ids=lambda f: f.__name__.strip("_"),
)
def test_damaged_entry_is_refused_and_rebuilt(take, tmp_path, folder, damage, capsys):
    first = sweep(take, tmp_path / "a", capsys=capsys)
    (entry,) = entries(folder)
    damage(entry)
    again = sweep(take, tmp_path / "b", capsys=capsys)
    assert cache.STATS["rejected"] == 1 and cache.STATS["hits"] == 0 and cache.STATS["writes"] == 2
    assert again == first
    sweep(take, tmp_path / "c", capsys=capsys)  # the rebuilt entry is whole again
    assert cache.STATS["hits"] == 1


def test_entry_of_another_file_renamed_is_refused(take, tmp_path, folder, capsys):
    other = write(tmp_path / "other.flac", program(2), FS, "PCM_24")
    sweep(other, tmp_path / "o", capsys=capsys)
    (foreign,) = entries(folder)
    expected = sweep(take, tmp_path / "a", "--no-cache", capsys=capsys)
    sha = spectrum.analyse(take).sha256
    target = cache.entry_path(sha, 1 << 17, folder)
    shutil.copyfile(foreign, target)  # the other file's analysis under this file's name
    got = sweep(take, tmp_path / "b", capsys=capsys)
    assert cache.STATS["rejected"] == 1 and cache.STATS["hits"] == 0
    assert got == expected


def test_entry_of_another_file_with_its_key_forged_is_refused(take, tmp_path, folder, capsys):
    """Key and checksum rewritten to this file's: the shapes still fit (same rate and channels),
    so only what cannot be forged without the content is left; the digest echo is checked."""
    other = write(tmp_path / "other.flac", program(2), FS, "PCM_24")
    sweep(other, tmp_path / "o", capsys=capsys)
    (foreign,) = entries(folder)
    sha = spectrum.analyse(take).sha256
    target = cache.entry_path(sha, 1 << 17, folder)
    shutil.copyfile(foreign, target)
    _rewrite(target, key=np.str_(cache.entry_key(sha, 1 << 17)))  # sha256 inside still the other file's
    expected = sweep(take, tmp_path / "a", "--no-cache", capsys=capsys)
    assert sweep(take, tmp_path / "b", capsys=capsys) == expected
    assert cache.STATS["rejected"] == 1


def test_entry_for_another_rate_or_channel_count_is_refused(tmp_path, folder):
    stereo = write(tmp_path / "s.wav", program(4), FS, "PCM_24")
    a = spectrum.analyse(stereo, cache=cache)
    mono_info = open_info(write(tmp_path / "m.wav", program(4)[:, 0], FS, "PCM_24"))
    assert cache.load(a.sha256, mono_info, blocksize=1 << 17) is None
    assert cache.load(a.sha256, open_info(stereo), blocksize=1 << 17) is not None
    assert cache.load(a.sha256, open_info(stereo), blocksize=1 << 16) is None  # other parameters: other key


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(blob=st.binary(max_size=4096))
def test_arbitrary_bytes_never_hit(tmp_path, blob):
    info = open_info(write(tmp_path / "t.wav", program(6, 0.5), FS, "PCM_16"))
    sha = "0" * 64
    path = cache.entry_path(sha, 1 << 17, tmp_path)
    path.write_bytes(blob)
    assert cache.load(sha, info, blocksize=1 << 17, folder=tmp_path) is None


def test_random_npz_of_the_right_names_never_hits(tmp_path):
    """A well-formed archive with the right member names but made-up content is refused."""
    info = open_info(write(tmp_path / "t.wav", program(6, 0.5), FS, "PCM_16"))
    sha = "1" * 64
    data = {n: np.zeros(3) for n in cache._ARRAYS}
    data.update({n: np.int64(1) for n in cache._INTS})
    data.update({n: np.str_("x") for n in cache._STRS})
    data["checksum"] = np.str_("0")
    buf = io.BytesIO()
    np.savez(buf, **data)
    cache.entry_path(sha, 1 << 17, tmp_path).write_bytes(buf.getvalue())
    assert cache.load(sha, info, blocksize=1 << 17, folder=tmp_path) is None


# -- a changed file, the bound, an unwritable folder ---------------------------


def test_changed_file_with_the_same_name_misses(take, tmp_path, folder, capsys):
    sweep(take, tmp_path / "a", capsys=capsys)
    write(take, program(9), FS, "PCM_24")  # same name, other content
    after = sweep(take, tmp_path / "b", capsys=capsys)
    assert cache.STATS["hits"] == 0 and cache.STATS["misses"] == 2 and cache.STATS["rejected"] == 0
    assert after == sweep(take, tmp_path / "c", "--no-cache", capsys=capsys)
    assert len(entries(folder)) == 2


def test_eviction_keeps_the_folder_under_the_bound_least_recently_used_first(tmp_path, folder, monkeypatch):
    paths = [write(tmp_path / f"p{i}.wav", program(10 + i, 3.0), FS, "PCM_16") for i in range(5)]
    first = spectrum.analyse(paths[0], cache=cache)
    size = entries(folder)[0].stat().st_size
    monkeypatch.setenv("AUDIOBW_CACHE_MAX_MB", str(3.5 * size / 1e6))  # room for three entries
    shas = [first.sha256]
    for i, p in enumerate(paths[1:], start=1):
        # distinct, increasing use times (file systems with coarse time stamps included)
        for e in entries(folder):
            st = e.stat()
            os.utime(e, ns=(st.st_atime_ns, st.st_mtime_ns - 10**9 * (10 - i)))
        if i == 3:
            spectrum.analyse(paths[0], cache=cache)  # a hit makes entry 0 the most recently used
        shas.append(spectrum.analyse(p, cache=cache).sha256)
        total = sum(e.stat().st_size for e in entries(folder))
        assert total <= 3.5 * size
    kept = {e.name.split("-")[0] for e in entries(folder)}
    assert kept == {shas[0], shas[3], shas[4]}
    assert cache.STATS["evicted"] == 2


def test_bound_of_zero_keeps_nothing_and_sweeps_still_work(take, tmp_path, folder, monkeypatch, capsys):
    monkeypatch.setenv("AUDIOBW_CACHE_MAX_MB", "0")
    a = sweep(take, tmp_path / "a", capsys=capsys)
    assert entries(folder) == [] and a == sweep(take, tmp_path / "b", "--no-cache", capsys=capsys)


def test_cache_folder_that_is_a_file_costs_one_warning_line(take, tmp_path, monkeypatch, capsys):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("x")
    monkeypatch.setenv("AUDIOBW_CACHE_DIR", str(blocker))
    monkeypatch.setattr(cache, "_warned", False)
    code = main(["sweep", str(take), *SWEEP_ARGS, "--out", str(tmp_path / "a"), "--json"])
    err = capsys.readouterr().err
    assert code == 0 and cache.STATS["write_failures"] == 1
    assert err.count("analysis cache") == 1 and "Traceback" not in err
    assert (tmp_path / "a" / "sweep.json").read_bytes() == sweep(take, tmp_path / "b", "--no-cache", capsys=capsys)


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root writes into read-only folders")
def test_read_only_cache_folder_does_not_break_the_sweep(take, tmp_path, folder, monkeypatch, capsys):
    monkeypatch.setattr(cache, "_warned", False)
    folder.chmod(0o555)
    try:
        code = main(["sweep", str(take), *SWEEP_ARGS, "--out", str(tmp_path / "a"), "--json"])
        err = capsys.readouterr().err
    finally:
        folder.chmod(0o755)
    assert code == 0 and err.count("analysis cache") <= 1 and "Traceback" not in err


# -- batch ----------------------------------------------------------------------


def test_batch_reuses_the_analysis_across_option_changes(tmp_path, folder):
    from audiobw.batch import run_batch
    from audiobw.clikit import settings_from

    lib = tmp_path / "lib"
    lib.mkdir()
    for i in range(3):
        write(lib / f"f{i}.flac", program(20 + i, 3.0), FS, "PCM_24")
    grid = {"cutoffs": "2k:20k:4", "order": "2"}
    run_batch([str(lib)], settings_from({**grid, "max_loss": "0.5"}, None), tmp_path / "c1", workers=0)
    assert cache.STATS["writes"] == 3 and cache.STATS["hits"] == 0
    # other targets: the batch's own result cache misses, the analysis cache hits every file
    second = run_batch([str(lib)], settings_from({**grid, "max_loss": "0.1"}, None), tmp_path / "c2", workers=0)
    assert cache.STATS["hits"] == 3 and cache.STATS["writes"] == 3 and second.computed == 3
    plain = run_batch(
        [str(lib)], settings_from({**grid, "max_loss": "0.1"}, None), tmp_path / "c3", workers=0, use_cache=False
    )
    assert cache.STATS["hits"] == 3
    strip = ("created", "elapsed_s", "out")
    a = {k: v for k, v in second.doc.items() if k not in strip}
    b = {k: v for k, v in plain.doc.items() if k not in strip}
    assert a == b


# -- where the folder is ---------------------------------------------------------


def test_cache_folder_follows_xdg_and_the_override(monkeypatch, tmp_path):
    monkeypatch.delenv("AUDIOBW_CACHE_DIR")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert cache.cache_dir() == tmp_path / "xdg" / "audiobw" / "analysis"
    monkeypatch.setenv("XDG_CACHE_HOME", "relative/path")  # XDG Base Directory Spec: relative paths are invalid
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert cache.cache_dir() == tmp_path / "home" / ".cache" / "audiobw" / "analysis"
    monkeypatch.setenv("AUDIOBW_CACHE_DIR", str(tmp_path / "here"))
    assert cache.cache_dir() == tmp_path / "here"


def test_the_suite_does_not_write_to_the_home_cache():
    assert Path(os.environ["AUDIOBW_CACHE_DIR"]).resolve() != (Path.home() / ".cache").resolve()
    assert not str(cache.cache_dir().resolve()).startswith(str((Path.home() / ".cache").resolve()))


# -- the path index: an unchanged file is not hashed again ------------------------


def test_unchanged_file_is_found_without_hashing(take, tmp_path, folder, capsys, monkeypatch):
    first = sweep(take, tmp_path / "a", capsys=capsys)
    assert len(list(folder.glob("path-*.json"))) == 1

    def no_hash(path, **kw):
        raise AssertionError("hashed again")

    monkeypatch.setattr("audiobw.audio.sha256_file", no_hash)
    assert sweep(take, tmp_path / "b", capsys=capsys) == first
    assert cache.STATS["index_hits"] == 1 and cache.STATS["hits"] == 1


def test_touched_file_is_hashed_again_and_still_hits(take, tmp_path, folder, capsys):
    first = sweep(take, tmp_path / "a", capsys=capsys)
    st = take.stat()
    os.utime(take, ns=(st.st_atime_ns, st.st_mtime_ns + 10**9))  # same bytes, new time stamp
    assert sweep(take, tmp_path / "b", capsys=capsys) == first
    assert cache.STATS["index_hits"] == 0 and cache.STATS["hits"] == 1  # found by its SHA-256
    sweep(take, tmp_path / "c", capsys=capsys)
    assert cache.STATS["index_hits"] == 1  # the new time stamp was recorded


@pytest.mark.parametrize(
    "damage",
    [
        lambda rec: "not json {",
        lambda rec: rec.replace('"sha256": "', '"sha256": "zz'),
        lambda rec: rec.replace('"fingerprint": [', '"fingerprint": [1, '),
        lambda rec: rec.replace('"format": "', '"format": "other/'),
    ],
    ids=["garbage", "bad-digest", "other-fingerprint", "other-format"],
)
def test_damaged_index_record_is_ignored(take, tmp_path, folder, capsys, damage):
    first = sweep(take, tmp_path / "a", capsys=capsys)
    (rec,) = folder.glob("path-*.json")
    rec.write_text(damage(rec.read_text()))
    assert sweep(take, tmp_path / "b", capsys=capsys) == first
    assert cache.STATS["index_hits"] == 0 and cache.STATS["hits"] == 1


def test_compressed_or_oversized_entry_is_refused_unread(take, tmp_path, folder, capsys, monkeypatch):
    first = sweep(take, tmp_path / "a", capsys=capsys)
    (entry,) = entries(folder)
    with np.load(entry, allow_pickle=False) as z:
        data = {k: z[k] for k in z.files}
    with open(entry, "wb") as fh:
        np.savez_compressed(fh, **data)  # same content, deflated: not what store() writes
    assert sweep(take, tmp_path / "b", capsys=capsys) == first
    assert cache.STATS["rejected"] == 1
    monkeypatch.setattr(cache, "MAX_ENTRY_BYTES", entry.stat().st_size - 1)
    assert sweep(take, tmp_path / "c", capsys=capsys) == first
    assert cache.STATS["rejected"] == 2 and cache.STATS["hits"] == 0
