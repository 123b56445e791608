"""Corpus runs (audiobw.batch, `audiobw batch`): coverage arithmetic on a corpus
whose answer is known by construction, local pool against a dask LocalCluster,
interrupt and resume, input expansion, bad input."""

from __future__ import annotations

import io
import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from audiobw import batch, jobs
from audiobw.clikit import settings_from

from .conftest import REPO, tones, write

FS = 8000
GRID = {"cutoffs": "700,1000,1400,2400,3000", "order": "8", "max_loss": "0.5"}


def butter_power(f_hz, fc_hz, order):
    # |H(f)|^2 of an analog Butterworth lowpass, 1/(1+(f/fc)^2n) (Butterworth's definition, common practice)
    return 1.0 / (1.0 + (f_hz / fc_hz) ** (2 * order))


def make_corpus(folder: Path, k: int, n: int = 20) -> list[tuple[float, float]]:
    """n one-second files at 8 kHz: a 500 Hz tone in each; the first k also carry 1800 Hz.

    Returns each file's (a500, a1800) amplitudes.  Every amplitude differs, so no
    two files share content (and a cache entry).
    """
    amps = []
    for i in range(n):
        a, b = 0.1 + 0.01 * i, (0.05 + 0.05 * i if i < k else 0.0)
        write(folder / f"take{i:02d}.wav", tones([500.0, 1800.0], [a, b], FS, 1.0), FS)
        amps.append((a, b))
    return amps


def settings(**extra):
    return settings_from({**GRID, **extra}, None)


@pytest.fixture
def corpus3(tmp_path):
    lib = tmp_path / "lib"
    lib.mkdir()
    return lib, make_corpus(lib, 3)


# -- coverage arithmetic ------------------------------------------------------


def test_coverage_known_by_construction(corpus3, tmp_path):
    lib, amps = corpus3
    res = batch.run_batch([lib], settings(), tmp_path / "c95", coverage=0.95, workers=0)
    doc = res.doc
    shares = {c["design_high_hz"]: c["pass_share"] for c in doc["cases"]}
    # 500 Hz passes every cutoff; 1800 Hz is lost below 2400 Hz: 17 of 20 files pass 700..1400 Hz
    assert shares == {700.0: 0.85, 1000.0: 0.85, 1400.0: 0.85, 2400.0: 1.0, 3000.0: 1.0}
    chosen = doc["cases"][doc["choice"]["case"] - 1]
    assert chosen["design_high_hz"] == 2400.0 and doc["choice"]["pass_share"] == 1.0
    assert doc["failing"] == []

    doc85 = batch.run_batch([lib], settings(), tmp_path / "c85", coverage=0.85, workers=0).doc
    chosen = doc85["cases"][doc85["choice"]["case"] - 1]
    assert chosen["design_high_hz"] == 700.0 and doc85["choice"]["pass_share"] == 0.85
    # the three two-tone files fail, worst first (the largest 1800 Hz share loses most)
    assert [f["path"].rsplit("/", 1)[1] for f in doc85["failing"]] == ["take02.wav", "take01.wav", "take00.wav"]
    for f in doc85["failing"]:
        a, b = amps[int(f["path"][-6:-4])]
        loss = 10 * math.log10(
            (a * a + b * b) / (a * a * butter_power(500, 700, 8) + b * b * butter_power(1800, 700, 8))
        )
        assert f["binding"] == "max_loss_db"
        assert f["margin_db"] == pytest.approx(0.5 - loss, abs=0.03)

    # per-file choices: 17 files at 700 Hz, 3 at 2400 Hz (numpy.percentile, linear)
    high = doc["passbands"]["high_hz"]
    ref = [700.0] * 17 + [2400.0] * 3
    for p in batch.PERCENTILES:
        assert high[f"p{p}"] == pytest.approx(np.percentile(ref, p), rel=1e-6)
    assert high["min"] == 700.0 and high["max"] == 2400.0 and doc["passbands"]["low_hz"] is None


def test_coverage_edge_is_inclusive(tmp_path):
    # exactly 19 of 20 files pass at 700 Hz: 95 % coverage is met, 96 % is not
    lib = tmp_path / "lib"
    lib.mkdir()
    make_corpus(lib, 1)
    doc = batch.run_batch([lib], settings(), tmp_path / "a", coverage=0.95, workers=0).doc
    assert doc["cases"][doc["choice"]["case"] - 1]["design_high_hz"] == 700.0
    assert doc["choice"]["pass_share"] == 0.95
    doc = batch.run_batch([lib], settings(), tmp_path / "b", coverage=0.96, workers=0).doc
    assert doc["cases"][doc["choice"]["case"] - 1]["design_high_hz"] == 2400.0


def test_no_case_reaches_coverage(corpus3, tmp_path):
    lib, _ = corpus3
    doc = batch.run_batch([lib], settings(cutoffs="700,1000"), tmp_path / "c", coverage=0.9, workers=0).doc
    assert doc["choice"] is None
    assert doc["best"]["pass_share"] == 0.85
    assert doc["cases"][doc["best"]["case"] - 1]["design_high_hz"] == 700.0  # ties go to the narrowest


# -- local pool and dask cluster ------------------------------------------------


def mixed_corpus(root: Path) -> Path:
    """8 kHz and 16 kHz files in nested folders, and one that is not audio."""
    rng = np.random.default_rng(7)
    lib = root / "mixed"
    (lib / "deep").mkdir(parents=True)
    for i in range(4):
        fs = 16000 if i % 2 else 8000
        write(
            lib / f"p{i}.flac" if i % 2 else lib / "deep" / f"p{i}.wav",
            0.1 * rng.standard_normal(fs) + tones([400.0], [0.2], fs, 1.0),
            fs,
            "PCM_24",
        )
    (lib / "broken.wav").write_bytes(b"RIFF not really")
    return lib


@pytest.mark.slow  # over 10 s (pytest --durations, one full run)
def test_local_pool_and_dask_cluster_give_identical_corpus(tmp_path):
    distributed = pytest.importorskip("distributed")
    jsonschema = pytest.importorskip("jsonschema")
    lib = mixed_corpus(tmp_path)
    s = settings(cutoffs="1000,2400,3000", min_snr="40")
    pool = batch.run_batch([lib], s, tmp_path / "pool", coverage=0.75, workers=2)
    # processes=False keeps the workers in this process (no __main__ guard needed), over real TCP
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=False, host="127.0.0.1", protocol="tcp", dashboard_address=None
    ) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        dask_run = batch.run_batch([lib], s, tmp_path / "dask", coverage=0.75, cluster=cluster.scheduler_address)
    a = (tmp_path / "pool" / "corpus.json").read_bytes()
    assert a == (tmp_path / "dask" / "corpus.json").read_bytes()
    assert (tmp_path / "pool" / "corpus.csv").read_bytes() == (tmp_path / "dask" / "corpus.csv").read_bytes()
    doc = pool.doc
    assert doc == dask_run.doc
    assert doc["counts"] == {
        "inputs": 5,
        "swept": 4,
        "failed": 1,
        "skipped": 0,
        "sample_rates_hz": {"8000": 2, "16000": 2},
    }
    assert [f["path"].rsplit("/", 1)[1] for f in doc["failed"]] == ["broken.wav"]
    assert "not a readable audio file" in doc["failed"][0]["reason"]
    # every per-file sweep.json is the one `sweep` writes, byte for byte
    for f in doc["files"]:
        ref, _ = jobs.sweep_file(os.path.abspath(f["path"]), s)
        from audiobw.report.sweepio import dumps

        assert (tmp_path / "pool" / f["sweep"]).read_text() == dumps(ref)
        assert (tmp_path / "dask" / f["sweep"]).read_text() == dumps(ref)
    schema = json.loads((REPO / "docs" / "corpus.schema.json").read_text())
    jsonschema.validate(doc, schema)  # jsonschema.validate, Draft 2020-12 from "$schema"
    bad = json.loads(a)
    bad["cases"][0]["pass_share"] = 1.5
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)


def test_low_rate_file_fails_on_the_grid_not_the_run(tmp_path):
    write(tmp_path / "a.wav", tones([300.0], [0.3], 8000, 1.0), 8000)
    write(tmp_path / "b.wav", tones([300.0], [0.3], 16000, 1.0), 16000)
    doc = batch.run_batch(
        [tmp_path / "a.wav", tmp_path / "b.wav"], settings(cutoffs="1000,4500"), tmp_path / "out", workers=0
    ).doc
    assert [f["path"].rsplit("/", 1)[1] for f in doc["failed"]] == ["a.wav"]
    assert "--cutoffs" in doc["failed"][0]["reason"] and "4500" in doc["failed"][0]["reason"]
    # the file that cannot take the grid counts as not passing (issue 13): 1 of 2 files, so no case
    # reaches the default full coverage and the summary says why
    assert doc["counts"]["swept"] == 1 and doc["choice"] is None and doc["best"]["pass_share"] == 0.5
    text = "\n".join(batch.summary_lines(doc))
    assert "on 50.0 % of all 2 files (1 could not be swept and count as not passing)" in text
    # the failed line names the file, as the sweep's own refusal would, whatever the reason says
    (failed,) = [ln for ln in text.splitlines() if ln.startswith("Failed:")]
    assert failed.startswith("Failed: ") and "a.wav: --cutoffs:" in failed
    half = batch.run_batch(
        [tmp_path / "a.wav", tmp_path / "b.wav"],
        settings(cutoffs="1000,4500"),
        tmp_path / "out",
        workers=0,
        coverage=0.5,
    ).doc
    assert half["choice"]["pass_share"] == 0.5
    assert any(f["path"].endswith("a.wav") and f["note"].startswith("could not be swept") for f in half["failing"])


# -- interrupt and resume --------------------------------------------------------


def test_interrupt_then_resume_recomputes_nothing_finished(corpus3, tmp_path, monkeypatch):
    lib, _ = corpus3
    s = settings()
    batch.run_batch([lib], s, tmp_path / "clean", coverage=0.9, workers=0)
    out = tmp_path / "run"
    real, calls = jobs.sweep_file, []

    def interrupted(path, settings, **kw):
        calls.append(path)
        if len(calls) == 6:
            raise KeyboardInterrupt
        return real(path, settings, **kw)

    monkeypatch.setattr(jobs, "sweep_file", interrupted)
    with pytest.raises(KeyboardInterrupt):
        batch.run_batch([lib], s, out, coverage=0.9, workers=0)
    cached = sorted((out / "cache").glob("*.json"))
    assert len(cached) == 5 and not (out / "corpus.json").exists()
    mtimes = {p: p.stat().st_mtime_ns for p in cached}

    calls.clear()
    monkeypatch.setattr(
        jobs, "sweep_file", lambda path, settings, **kw: (calls.append(path), real(path, settings, **kw))[1]
    )
    res = batch.run_batch([lib], s, out, coverage=0.9, workers=0)
    assert len(calls) == 15 and res.cached == 5 and res.computed == 15
    assert {p: p.stat().st_mtime_ns for p in cached} == mtimes
    assert (out / "corpus.json").read_bytes() == (tmp_path / "clean" / "corpus.json").read_bytes()


@pytest.mark.slow  # over 10 s (pytest --durations, one full run)
def test_killed_cli_run_resumes_to_the_same_corpus(tmp_path, monkeypatch):
    lib = tmp_path / "lib"
    lib.mkdir()
    rng = np.random.default_rng(11)
    for i in range(12):
        write(lib / f"n{i:02d}.wav", 0.05 * rng.standard_normal(32000), 16000)
    args = [
        str(lib),
        "--anti-alias",
        "ideal",
        "--cutoffs",
        "1k:7k:12",
        "--family",
        "butterworth,chebyshev1,elliptic",
        "--order",
        "4,8",
        "--max-loss",
        "0.5",
        "--coverage",
        "90%",
    ]
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    out = tmp_path / "run"
    proc = subprocess.Popen(
        [sys.executable, "-m", "audiobw", "batch", *args, "--out", str(out), "--workers", "1"],
        cwd=tmp_path,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and len(list((out / "cache").glob("*.json"))) < 3 and proc.poll() is None:
        time.sleep(0.005)
    os.killpg(proc.pid, signal.SIGKILL)  # the run and its worker, part-way
    proc.wait()
    before = {p: p.stat().st_mtime_ns for p in (out / "cache").glob("*.json")}
    assert 3 <= len(before) < 12 and not (out / "corpus.json").exists()

    r = subprocess.run(
        [sys.executable, "-m", "audiobw", "batch", *args, "--out", str(out), "--workers", "1"],
        cwd=tmp_path,
        env=env,
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    assert f"took {len(before)} from the cache" in r.stdout
    assert {p: p.stat().st_mtime_ns for p in before} == before
    assert len(list((out / "cache").glob("*.json"))) == 12
    s = settings_from(
        {
            "anti_alias": "ideal",
            "cutoffs": "1k:7k:12",
            "family": "butterworth,chebyshev1,elliptic",
            "order": "4,8",
            "max_loss": "0.5",
        },
        None,
    )
    monkeypatch.chdir(tmp_path)  # recorded paths are relative to the working folder (audio.canonical_path)
    batch.run_batch([str(lib)], s, tmp_path / "clean", coverage=0.9, workers=0)
    assert (out / "corpus.json").read_bytes() == (tmp_path / "clean" / "corpus.json").read_bytes()


def test_changed_file_is_swept_again(corpus3, tmp_path):
    lib, _ = corpus3
    out = tmp_path / "out"
    batch.run_batch([lib], settings(), out, workers=0)
    write(lib / "take05.wav", tones([2000.0], [0.2], FS, 1.0), FS)
    res = batch.run_batch([lib], settings(), out, workers=0)
    assert res.computed == 1 and res.cached == 19
    assert len(list((out / "cache").glob("*.json"))) == 21
    # options are half of the key: another target sweeps everything again
    res = batch.run_batch([lib], settings(max_loss="0.4"), out, workers=0)
    assert res.computed == 20 and res.cached == 0


# -- inputs --------------------------------------------------------------------------


def test_inputs_folders_globs_links(tmp_path):
    root = tmp_path / "tree"
    (root / "a" / "b").mkdir(parents=True)
    for rel in ("a/one.wav", "a/b/two.flac", "a/b/x y.wav", "a/b/x_y.wav", "three.wav"):
        write(root / rel, tones([300.0], [0.1], 8000, 0.2), 8000, "PCM_16")
    (root / "three.wav").rename(root / "three.WAV")  # suffixes match in any case
    (root / "notes.txt").write_text("not audio")
    (root / ".hidden.wav").write_bytes(b"x")
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    write(outside / "far.wav", tones([300.0], [0.1], 8000, 0.2), 8000)
    (root / "a" / "b" / "loop").symlink_to(root)  # a loop back to the top
    (root / "far").symlink_to(outside)  # a folder out of the tree
    (root / "farfile.wav").symlink_to(outside / "far.wav")  # a file out of the tree
    (root / "alias.wav").symlink_to(root / "a" / "one.wav")  # a file inside the tree

    got = batch.collect_inputs([root])
    rel = [Path(i.path).relative_to(root).as_posix() for i in got.items]
    assert rel == ["a/b/two.flac", "a/b/x y.wav", "a/b/x_y.wav", "a/one.wav", "three.WAV"]
    assert sorted(Path(p).name for p, _ in got.skipped) == ["far", "farfile.wav"]
    names = [i.name for i in got.items]
    assert len({n.casefold() for n in names}) == len(names)  # "x y" and "x_y" do not collide

    followed = batch.collect_inputs([root], follow_links=True)
    assert "far.wav" in [Path(i.path).name for i in followed.items] and followed.skipped == []
    assert len(followed.items) == 6  # the loop is walked once, the alias is the same file

    globbed = batch.collect_inputs([str(root / "a" / "**" / "*.wav"), root / "notes.txt"])
    assert [Path(i.path).name for i in globbed.items] == ["x y.wav", "x_y.wav", "one.wav", "notes.txt"]


def test_unreadable_file_is_listed_and_the_run_goes_on(tmp_path):
    write(tmp_path / "good.wav", tones([300.0], [0.3], FS, 1.0), FS)
    (tmp_path / "cut.wav").write_bytes((tmp_path / "good.wav").read_bytes()[:60])
    (tmp_path / "empty.flac").write_bytes(b"")
    doc = batch.run_batch([tmp_path], settings(), tmp_path / "out", workers=0).doc
    assert doc["counts"]["swept"] == 1
    assert {Path(f["path"]).name for f in doc["failed"]} == {"cut.wav", "empty.flac"}
    assert any("empty file" in f["reason"] for f in doc["failed"])


# -- command line ----------------------------------------------------------------------


def run_cli(argv, capsys):
    from audiobw.cli import main

    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_summary_and_outputs(corpus3, tmp_path, capsys):
    lib, _ = corpus3
    code, out, err = run_cli(
        [
            "batch",
            str(lib),
            "--out",
            str(tmp_path / "c"),
            "--workers",
            "0",
            "--coverage",
            "85%",
            "--cutoffs",
            "700,1000,1400,2400,3000",
            "--order",
            "8",
            "--max-loss",
            "0.5",
        ],
        capsys,
    )
    assert code == 0, err
    assert (
        "passes on 85.0 %" in out
        and "take02.wav: program loss, margin" in out
        and "max_loss_db" not in out
        and "verify them by measurement" in out
    )
    assert err == ""  # stderr is not a terminal: no progress line
    rows = (tmp_path / "c" / "corpus.csv").read_text().splitlines()
    assert rows[0].split(",")[:3] == ["id", "response", "family"] and len(rows) == 6


@pytest.mark.parametrize(
    "argv, needle",
    [
        (["--coverage", "150%"], "--coverage: '150%'"),
        (["--coverage", "95"], "--coverage: '95'"),
        (["--workers", "-1"], "--workers: -1"),
        (["--cluster", "tcp://127.0.0.1:9", "--workers", "2"], "--workers: not used with --cluster"),
        (["--cluster", "nonsense://x"], "--cluster: 'nonsense://x' is not a scheduler address"),
    ],
)
def test_cli_bad_options(corpus3, tmp_path, capsys, argv, needle):
    lib, _ = corpus3
    code, out, err = run_cli(["batch", str(lib), "--out", str(tmp_path / "c"), "--max-loss", "0.5", *argv], capsys)
    assert code == 2 and needle in err and "Traceback" not in err
    assert len(err.strip().splitlines()) == 1


def test_cli_missing_input_and_missing_distributed(tmp_path, capsys, monkeypatch):
    code, _, err = run_cli(["batch", str(tmp_path / "nope"), "--max-loss", "0.5"], capsys)
    assert code == 2 and "nope" in err and "no such file or folder" in err
    write(tmp_path / "a.wav", tones([300.0], [0.3], FS, 1.0), FS)
    monkeypatch.setitem(sys.modules, "distributed", None)  # as if the extra were not installed
    code, _, err = run_cli(
        [
            "batch",
            str(tmp_path / "a.wav"),
            "--out",
            str(tmp_path / "c"),
            "--max-loss",
            "0.5",
            "--cluster",
            "tcp://127.0.0.1:9",
        ],
        capsys,
    )
    assert code == 2 and "audiobw[cluster]" in err


def test_progress_line_counts():
    class Tty(io.StringIO):
        def isatty(self):
            return True

    from audiobw.commands.batch import BatchProgress

    stream = Tty()
    p = BatchProgress(stream)
    p({"done": 5, "failed": 1, "cached": 1, "total": 10, "elapsed_s": 8.0})
    p.close()
    # 4 computed in 8 s -> 2 s each -> 5 left take 10 s
    assert stream.getvalue() == "\raudiobw batch: 5/10 done, 1 failed, 5 left, about 10 s to go   \n"


def test_data_programs_carry_their_metrics(tmp_path, capsys):
    jsonschema = pytest.importorskip("jsonschema")
    lib = tmp_path / "links"
    lib.mkdir()
    for pattern in ("prbs7", "prbs9"):
        code, _, err = run_cli(
            [
                "bits",
                "--bit-rate",
                "2k",
                "--pattern",
                pattern,
                "--bits-count",
                "1024",
                "--rate",
                "16k",
                "--out",
                str(lib / f"{pattern}.wav"),
            ],
            capsys,
        )
        assert code == 0, err
    s = settings_from({"program": "data", "bit_rate": "2k", "cutoffs": "1k:6k:6", "min_eye": "0.5"}, None)
    doc = batch.run_batch([lib], s, tmp_path / "c", coverage=1.0, workers=0).doc
    assert doc["settings"]["program"] == "data" and doc["settings"]["bit_rate"] == 2000.0
    sweeps = [json.loads((tmp_path / "c" / f["sweep"]).read_text()) for f in doc["files"]]
    for case in doc["cases"]:
        own = [next(c for c in sw["cases"] if c["design_high_hz"] == case["design_high_hz"]) for sw in sweeps]
        # two files: the corpus value is their median, i.e. their mean (statistics.median)
        assert case["eye_fraction"] == pytest.approx((own[0]["eye_fraction"] + own[1]["eye_fraction"]) / 2, rel=1e-6)
        assert case["pass_share"] == sum(c["passes"] for c in own) / 2
    chosen = doc["cases"][doc["choice"]["case"] - 1]
    assert chosen["target_pass_share"]["min_eye"] == 1.0
    jsonschema.validate(doc, json.loads((REPO / "docs" / "corpus.schema.json").read_text()))


def test_batch_hashes_each_file_once(tmp_path, monkeypatch):
    """The digest batch takes for its cache is reused by the analysis (no second SHA-256)."""
    import hashlib

    import numpy as np
    import soundfile as sf

    from audiobw import audio, spectrum

    wav = tmp_path / "one.wav"
    rng = np.random.default_rng(3)
    sf.write(str(wav), 0.1 * rng.standard_normal((48000, 2)), 48000, subtype="PCM_24")
    calls = []
    real = audio.sha256_file
    monkeypatch.setattr(audio, "sha256_file", lambda p, **kw: calls.append(str(p)) or real(p, **kw))
    a = spectrum.analyse(wav, sha256="0" * 64)
    assert a.sha256 == "0" * 64 and calls == []
    b = spectrum.analyse(wav)
    assert b.sha256 == hashlib.sha256(wav.read_bytes()).hexdigest()  # reference: hashlib
    assert calls == [str(wav)]
    assert np.array_equal(a.psd, b.psd)


def test_batch_run_hashes_each_file_once(corpus3, tmp_path, capsys, monkeypatch):
    from audiobw import audio

    lib, _ = corpus3
    calls = []
    real = audio.sha256_file
    monkeypatch.setattr(audio, "sha256_file", lambda p, **kw: calls.append(os.path.basename(str(p))) or real(p, **kw))
    code, out, err = run_cli(
        [
            "batch",
            str(lib),
            "--out",
            str(tmp_path / "c"),
            "--workers",
            "0",
            "--cutoffs",
            "1000,3000",
            "--order",
            "2",
            "--max-loss",
            "0.5",
        ],
        capsys,
    )
    assert code in (0, 3), err
    files = sorted(p.name for p in Path(lib).iterdir() if p.suffix in (".wav", ".flac"))
    assert sorted(calls) == files  # one SHA-256 per file, not two
