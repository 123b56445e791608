"""Outputs, locks, caches, hangs and determinism: the second round of hostile inputs and faults.

Each test names the fault it injects; each held before the fix only by accident, if at all.
See docs/robustness.md, section "Outputs, locks, caches, hangs and determinism — second round".
"""

from __future__ import annotations

import errno
import json
import os
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

from audiobw import audio
from audiobw.cli import main
from audiobw.errors import OutputError

from .conftest import tones, write

PY = sys.executable
SWEEP = ["--cutoffs", "4k:16k:4", "--family", "butterworth", "--order", "2", "--max-loss", "3"]


@pytest.fixture
def program(tmp_path):
    return write(tmp_path / "take.wav", 0.1 * tones([440, 3000], [1, 0.3], 48000, 1.0), 48000)


def _one_line_error(capsys, code, expected_code=1):
    err = capsys.readouterr().err
    lines = [ln for ln in err.splitlines() if ln.startswith("audiobw: error:")]
    assert code == expected_code, err
    assert len(lines) == 1 and "Traceback" not in err, err
    return lines[0]


# -- output never lands on an input ------------------------------------------------------


def test_report_from_another_folder_never_overwrites_an_input_named_like_an_output(tmp_path, monkeypatch, capsys):
    # the sweep's input is a WAV called spec.md inside DIR; the sweep ran inside DIR (relative path),
    # the report runs from elsewhere: the recorded path does not resolve from there
    d = tmp_path / "run"
    d.mkdir()
    wav = write(d / "take.wav", 0.1 * tones([440], [1], 48000, 1.0), 48000)
    os.rename(wav, d / "spec.md")
    before = (d / "spec.md").read_bytes()
    monkeypatch.chdir(d)
    assert main(["sweep", "spec.md", "--out", ".", *SWEEP]) == 0
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    capsys.readouterr()
    code = main(["report", str(d), "--no-html"])
    line = _one_line_error(capsys, code)
    assert "input" in line and "spec.md" in line
    assert (d / "spec.md").read_bytes() == before


def test_output_hard_linked_to_the_input_is_refused(program, tmp_path, capsys):
    out = tmp_path / "o"
    out.mkdir()
    os.link(program, out / "sweep.csv")  # same inode, other name
    before = program.read_bytes()
    code = main(["sweep", str(program), "--out", str(out), *SWEEP])
    line = _one_line_error(capsys, code)
    assert "input" in line
    assert program.read_bytes() == before


# -- output faults become one OutputError line -----------------------------------------

BITS = ["bits", "--bit-rate", "2k", "--pattern", "prbs7", "--bits-count", "256", "--amplitude", "0.1V"]


@pytest.mark.parametrize("name", ["x.mp3", "x.ogg", "x.aiff", "x"])
def test_bits_refuses_an_output_format_it_does_not_write(tmp_path, capsys, name):
    code = main([*BITS, "--out", str(tmp_path / name)])
    line = _one_line_error(capsys, code, expected_code=2)
    assert "accepted: .wav, .flac" in line
    assert os.listdir(tmp_path) == []


def test_bits_to_a_300_character_name(tmp_path, capsys):
    code = main([*BITS, "--out", str(tmp_path / ("a" * 300 + ".wav"))])
    assert "File name too long" in _one_line_error(capsys, code)


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_bits_into_a_read_only_folder(tmp_path, capsys):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        code = main([*BITS, "--out", str(ro / "x.wav")])
        assert "cannot write" in _one_line_error(capsys, code)
    finally:
        ro.chmod(0o755)


def test_libsndfile_system_error_on_a_full_disk_is_one_line(tmp_path, monkeypatch, capsys):
    # libsndfile reports ENOSPC as soundfile.LibsndfileError("System error."), a RuntimeError
    import soundfile as sf

    def full(self, data):
        raise sf.LibsndfileError(0, "System error.")

    monkeypatch.setattr(sf.SoundFile, "write", full)
    code = main([*BITS, "--out", str(tmp_path / "x.wav")])
    assert "disk full" in _one_line_error(capsys, code)
    assert os.listdir(tmp_path) == []


def test_render_chain_output_on_a_full_disk_is_one_line(program, tmp_path, monkeypatch, capsys):
    import soundfile as sf

    real = sf.SoundFile.write

    def full(self, data):
        if "chain-output" in self.name or ".ab-" in self.name:
            raise sf.LibsndfileError(0, "System error.")
        return real(self, data)

    monkeypatch.setattr(sf.SoundFile, "write", full)
    code = main(["render", str(program), "--band", ":8k", "--out", str(tmp_path / "r")])
    assert "cannot write" in _one_line_error(capsys, code)
    assert not list((tmp_path / "r").glob(".*.part"))


def test_stdout_on_a_full_device_is_one_line():
    with open("/dev/full", "w") as full:
        proc = subprocess.run(
            [PY, "-m", "audiobw", "--help"], stdout=full, stderr=subprocess.PIPE, text=True, timeout=120
        )
    assert proc.returncode == 1, proc.stderr
    assert proc.stderr.strip().splitlines() == [
        "audiobw: error: cannot write to standard output (No space left on device); "
        "accepted: a terminal, pipe or file with room"
    ]


def test_enospc_oserror_from_any_writer_is_one_line(tmp_path, monkeypatch):
    def boom(*a, **k):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(OutputError, match=r"No space left on device\); free space"):
        audio.write_text_atomic(tmp_path / "a.txt", "x")
    assert os.listdir(tmp_path) == []


# -- stale parts of a killed run ------------------------------------------------------------


def test_stale_part_from_a_killed_run_is_removed_and_a_live_one_is_kept(tmp_path):
    stale = tmp_path / ".chain-output.wav.abc123.part"
    stale.write_bytes(b"\0" * 4096)
    other = tmp_path / ".notours.part"
    other.write_bytes(b"x")
    # a live writer of the same name holds its part locked
    with audio.atomic_path(tmp_path / "chain-output.wav") as live:
        live.write_bytes(b"y")
        assert audio.clean_stale_parts(tmp_path, "chain-output.wav") == 0
        assert live.exists()
    assert not stale.exists()
    assert other.exists()
    assert (tmp_path / "chain-output.wav").read_bytes() == b"y"


def test_part_left_by_sigkill_is_cleaned_by_the_next_run(tmp_path):
    code = (
        "import os, sys, time\nfrom audiobw import audio\n"
        "with audio.atomic_path(sys.argv[1]) as t:\n t.write_bytes(b'x' * 100000)\n print('ready', flush=True)\n"
        " time.sleep(60)\n"
    )
    proc = subprocess.Popen([PY, "-c", code, str(tmp_path / "chain-output.wav")], stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "ready"
    proc.kill()
    proc.wait()
    parts = list(tmp_path.glob(".chain-output.wav.*.part"))
    assert len(parts) == 1
    audio.write_text_atomic(tmp_path / "chain-output.wav", "new")
    assert list(tmp_path.glob(".chain-output.wav.*.part")) == []


# -- one run per output folder -----------------------------------------------------------


def test_second_run_into_a_locked_folder_waits_then_refuses(tmp_path, monkeypatch, program, capsys):
    out = tmp_path / "o"
    code = (
        "import sys, time\nfrom audiobw import audio\n"
        "with audio.output_lock(sys.argv[1]):\n print('held', flush=True)\n time.sleep(60)\n"
    )
    holder = subprocess.Popen([PY, "-c", code, str(out)], stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        monkeypatch.setattr(audio.lock, "LOCK_WAIT_S", 0.3)  # read where output_lock looks it up
        code = main(["sweep", str(program), "--out", str(out), *SWEEP])
        line = _one_line_error(capsys, code)
        assert "another audiobw run is writing into this folder" in line
        assert not (out / "sweep.json").exists()
    finally:
        holder.kill()
        holder.wait()
    # the kernel drops the lock with its holder: the next run goes ahead
    assert main(["sweep", str(program), "--out", str(out), *SWEEP]) == 0


def test_lock_waits_for_a_short_holder(tmp_path):
    out = tmp_path / "o"
    released = []

    def hold():
        with audio.output_lock(out):
            time.sleep(0.3)
            released.append(time.monotonic())

    with audio.output_lock(out):
        t = threading.Thread(target=hold)
        # same process: re-entrant for the holder's own nested calls
        with audio.output_lock(out):
            pass
    t.start()
    t.join()
    assert released


# -- determinism ----------------------------------------------------------------------


def test_rerun_of_bits_and_render_gives_byte_identical_wavs(program, tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    for out in (a, b):
        assert main(["render", str(program), "--band", ":8k", "--out", str(out)]) == 0
        assert main([*BITS, "--out", str(out / "bits.wav")]) == 0
        time.sleep(1.1)  # libsndfile's PEAK chunk time stamp counts seconds
    wavs = sorted(p.relative_to(a) for p in a.rglob("*.wav"))
    assert len(wavs) >= 3
    for rel in wavs:
        data = (a / rel).read_bytes()
        assert b"PEAK" not in data[:256], rel
        assert data == (b / rel).read_bytes(), rel


# -- a file changed while it is read ------------------------------------------------------


def _rewrite_after_first_block(monkeypatch, path, how):
    real = audio.iter_blocks

    def blocks(p, **kw):
        for i, b in enumerate(real(p, **kw)):
            yield b
            if i == 0 and os.path.samefile(p, path):
                other = 0.1 * tones([1234], [1], 48000, 2.0)
                if how == "replace":
                    tmp = write(Path(path).with_name("new.wav"), other, 48000)
                    os.replace(tmp, path)
                else:  # same size, in place: only the time stamps tell
                    with open(path, "r+b") as fh:
                        fh.seek(-4000, os.SEEK_END)
                        fh.write((0.01 * np.random.default_rng(1).standard_normal(1000)).astype(np.float32).tobytes())

    monkeypatch.setattr(audio, "iter_blocks", blocks)


@pytest.mark.parametrize("how", ["replace", "in-place"])
def test_sweep_refuses_a_file_changed_while_read(tmp_path, monkeypatch, capsys, how):
    src = write(tmp_path / "long.wav", 0.1 * tones([440, 3000], [1, 0.3], 48000, 6.0), 48000)
    _rewrite_after_first_block(monkeypatch, src, how)
    out = tmp_path / "o"
    code = main(["sweep", str(src), "--out", str(out), *SWEEP])
    assert "changed while it was read" in _one_line_error(capsys, code)
    assert not (out / "sweep.json").exists()


@pytest.mark.parametrize("how", ["replace", "in-place"])
def test_batch_refuses_and_caches_nothing_for_a_file_changed_while_read(tmp_path, monkeypatch, how):
    from audiobw import batch
    from audiobw.clikit import settings_from

    src = write(tmp_path / "long.wav", 0.1 * tones([440, 3000], [1, 0.3], 48000, 6.0), 48000)
    write(tmp_path / "calm.wav", 0.1 * tones([440], [1], 48000, 1.0), 48000)
    _rewrite_after_first_block(monkeypatch, src, how)
    s = settings_from({"cutoffs": "4k:16k:4", "family": "butterworth", "order": "2", "max_loss": "3"}, None)
    r = batch.run_batch(
        [str(tmp_path / "long.wav"), str(tmp_path / "calm.wav")], s, tmp_path / "b", coverage=0.5, workers=0
    )
    failed = r.doc["failed"]
    assert len(failed) == 1 and "changed while it was read" in failed[0]["reason"]
    assert len(list((tmp_path / "b" / "cache").glob("*.json"))) == 1  # only calm.wav


# -- batch opens only regular files ---------------------------------------------------


def test_batch_refuses_a_fifo_and_dev_zero_without_opening_them(tmp_path, program, capsys):
    fifo = tmp_path / "pipe.wav"
    os.mkfifo(fifo)
    out = tmp_path / "b"
    # a reader that opened the FIFO would block for ever: run in a child with a deadline
    proc = subprocess.run(
        [
            PY,
            "-m",
            "audiobw",
            "batch",
            str(fifo),
            "/dev/zero",
            str(program),
            "--out",
            str(out),
            "--workers",
            "0",
            *SWEEP,
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    corpus = json.loads((out / "corpus.json").read_text())
    reasons = {s["path"]: s["reason"] for s in corpus["skipped"]}
    assert "not a regular file" in reasons[str(fifo)] and "not a regular file" in reasons["/dev/zero"]
    assert corpus["counts"]["swept"] == 1
    proc = subprocess.run(
        [PY, "-m", "audiobw", "batch", str(fifo), "--out", str(out), "--workers", "0", *SWEEP],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 2 and "not a regular file" in proc.stderr and "Traceback" not in proc.stderr


# -- the same input named two ways gives the same bytes ------------------------------------


def test_absolute_and_relative_names_give_identical_outputs(tmp_path, monkeypatch, program):
    monkeypatch.chdir(tmp_path)
    for name, out in (("take.wav", "rel"), ("./take.wav", "dot"), (str(program), "abs")):
        assert main(["sweep", name, "--out", out, "--report", *SWEEP]) == 0
        assert main(["batch", name, "--out", f"b-{out}", "--workers", "0", *SWEEP]) == 0
    for f in ("sweep.json", "sweep.csv", "spec.json", "spec.md", "report.html", "spectrum.npz"):
        assert (
            (tmp_path / "rel" / f).read_bytes()
            == (tmp_path / "abs" / f).read_bytes()
            == (tmp_path / "dot" / f).read_bytes()
        ), f
    assert json.loads((tmp_path / "rel" / "sweep.json").read_text())["input"]["path"] == "take.wav"
    for f in ("corpus.json", "corpus.csv"):
        assert (tmp_path / "b-rel" / f).read_bytes() == (tmp_path / "b-abs" / f).read_bytes(), f
    assert (
        sorted(os.listdir(tmp_path / "b-rel" / "files"))
        == sorted(os.listdir(tmp_path / "b-abs" / "files"))
        == ["take.wav"]
    )


def test_a_file_outside_the_working_folder_is_recorded_absolute(tmp_path, monkeypatch, program):
    sub = tmp_path / "sub"
    sub.mkdir()
    monkeypatch.chdir(sub)
    assert audio.canonical_path("../take.wav") == audio.canonical_path(program) == program.as_posix()


# -- report embeds only its own files ---------------------------------------------------


@pytest.fixture
def swept(tmp_path, program):
    out = tmp_path / "o"
    assert main(["sweep", str(program), "--out", str(out), *SWEEP]) == 0
    return out


SECRET = b"\x89PNG\r\n\x1a\nPRIVATE-KEY-MATERIAL-0123456789"


@pytest.mark.parametrize("plant", ["eye-link-out", "eye-not-png", "wav-link-out", "folder-link-out", "eye-fifo"])
def test_report_never_embeds_or_links_a_planted_file(tmp_path, swept, plant):
    import base64

    private = tmp_path / "private"
    private.mkdir()
    (private / "secret.png").write_bytes(SECRET)
    wav = write(private / "x.wav", 0.1 * tones([440], [1], 48000, 0.5), 48000)
    r = swept / "render-chosen"
    r.mkdir()
    write(r / "ab-reference.wav", 0.1 * tones([440], [1], 48000, 0.5), 48000)
    if plant == "eye-link-out":
        (r / "eye.png").symlink_to(private / "secret.png")
    elif plant == "eye-not-png":
        (r / "eye.png").write_bytes(b"PRIVATE-KEY-MATERIAL-0123456789")
    elif plant == "wav-link-out":
        (r / "ab-processed.wav").symlink_to(wav)
    elif plant == "folder-link-out":
        (swept / "render-x").symlink_to(private)
    else:
        os.mkfifo(r / "eye.png")
    assert main(["report", str(swept)]) == 0
    page = (swept / "report.html").read_text()
    for leaked in (b"PRIVATE-KEY-MATERIAL", SECRET):
        assert base64.b64encode(leaked)[:24].decode() not in page
    assert "render-x" not in page and "ab-processed.wav" not in page and 'class="eye"' not in page
    assert "ab-reference.wav" in page  # the folder's own clip is still offered


# -- hand-edited or corrupt sweep.json and spectrum.npz ---------------------------------


def _leaves(x, parts=()):
    yield parts
    if isinstance(x, dict):
        for k, v in x.items():
            yield from _leaves(v, parts + (k,))
    elif isinstance(x, list):
        for i, v in enumerate(x[:1]):
            yield from _leaves(v, parts + (i,))


def _mutants(doc):
    import copy

    values = ["oops", None, -1, 1e308, [], {}, True, 9999, "DEL"]
    for k, parts in enumerate(list(_leaves(doc))[1:]):
        for j, v in enumerate(values):
            if (k + j) % 3:  # a deterministic third of the pairs keeps the test short
                continue
            m = copy.deepcopy(doc)
            node = m
            for p in parts[:-1]:
                node = node[p]
            if v == "DEL":
                del node[parts[-1]]
            else:
                node[parts[-1]] = v
            yield parts, v, m


def test_sweep_json_mutated_field_by_field_gives_a_report_or_one_line(swept, tmp_path, capsys):
    import shutil

    doc = json.loads((swept / "sweep.json").read_text())
    tried = refused = 0
    for parts, v, m in _mutants(doc):
        d = tmp_path / "m"
        shutil.rmtree(d, ignore_errors=True)
        d.mkdir()
        shutil.copy(swept / "spectrum.npz", d)
        (d / "sweep.json").write_text(json.dumps(m))
        code = main(["report", str(d), "--no-html"])  # any exception fails the test
        err = capsys.readouterr().err
        tried += 1
        assert code in (0, 1), (parts, v, err)
        if code == 1:
            refused += 1
            line = _one_line_error_text(err)
            assert "sweep.json" in line and "accepted" in line, (parts, v, line)
    assert tried > 150 and refused > 80


def _one_line_error_text(err):
    lines = [ln for ln in err.splitlines() if ln.startswith("audiobw: error:")]
    assert len(lines) == 1 and "Traceback" not in err, err
    return lines[0]


@pytest.mark.parametrize(
    "edit, pointer",
    [
        (lambda d: d["choice"].update(case=9999), "/choice/case"),
        (lambda d: d["choice"].update(next_narrower=424242), "/choice/next_narrower"),
        (lambda d: d["cases"][0].update(snr_db="abc"), "/cases/0/snr_db"),
        (lambda d: d["cases"][1].update(id=d["cases"][0]["id"]), "/cases/1/id"),
        (lambda d: d["grid"].pop("ripple_db"), "/grid/ripple_db"),
        (lambda d: d["input"].update(sample_rate_hz=0), "/input/sample_rate_hz"),
    ],
)
def test_a_bad_value_is_named_by_its_json_pointer(swept, capsys, edit, pointer):
    doc = json.loads((swept / "sweep.json").read_text())
    edit(doc)
    (swept / "sweep.json").write_text(json.dumps(doc))
    line = _one_line_error(capsys, main(["report", str(swept), "--no-html"]))
    assert f"at {pointer}:" in line and "accepted" in line


def test_nan_and_duplicate_keys_in_sweep_json_are_refused(swept, capsys):
    text = (swept / "sweep.json").read_text()
    (swept / "sweep.json").write_text(text.replace('"snr_db": ', '"snr_db": NaN, "x": ', 1))
    assert "non-finite number NaN" in _one_line_error(capsys, main(["report", str(swept), "--no-html"]))
    (swept / "sweep.json").write_text(text.replace('"tool": "audiobw"', '"tool": "audiobw", "tool": "audiobw"', 1))
    assert "duplicate key 'tool'" in _one_line_error(capsys, main(["report", str(swept), "--no-html"]))


def _npz(path, **arrays):
    with open(path, "wb") as fh:
        np.savez(fh, **arrays)


@pytest.mark.parametrize(
    "fault", ["truncated", "zero-bins", "pickle", "2-d", "nan", "falling", "other-rate", "empty-file", "not-zip"]
)
def test_corrupt_spectrum_npz_is_one_line(swept, capsys, fault):
    npz = swept / "spectrum.npz"
    with np.load(npz) as z:
        arrays = {k: z[k] for k in z.files}
    if fault == "truncated":
        npz.write_bytes(npz.read_bytes()[: npz.stat().st_size // 2])
    elif fault == "zero-bins":
        _npz(npz, **{**arrays, "freqs_hz": np.zeros(0), "psd": np.zeros(0), "weights_hz": np.zeros(0)})
    elif fault == "pickle":
        _npz(npz, **{**arrays, "psd": np.array([{"x": 1}, None], dtype=object)})
    elif fault == "2-d":
        _npz(npz, **{**arrays, "psd": np.ones((2, 3))})
    elif fault == "nan":
        _npz(npz, **{**arrays, "psd": np.full_like(arrays["psd"], np.nan)})
    elif fault == "falling":
        _npz(npz, **{**arrays, "freqs_hz": arrays["freqs_hz"][::-1].copy()})
    elif fault == "other-rate":
        _npz(npz, **{**arrays, "sample_rate_hz": np.int64(44100)})
    elif fault == "empty-file":
        npz.write_bytes(b"")
    else:
        npz.write_bytes(b"PK\x03\x04 not a zip at all")
    line = _one_line_error(capsys, main(["report", str(swept)]))
    assert "spectrum.npz" in line and "accepted" in line


# -- batch cache entries are validated and bound to their inputs --------------------------


def _cache_run(tmp_path, rng_seed=3):
    from audiobw import batch
    from audiobw.clikit import settings_from

    lib = tmp_path / "lib"
    lib.mkdir(exist_ok=True)
    rng = np.random.default_rng(rng_seed)
    for i in range(3):
        write(lib / f"n{i}.wav", 0.05 * rng.standard_normal(16000) + 0.1 * tones([300], [1], 16000, 1.0), 16000)
    s = settings_from({"cutoffs": "1k:7k:4", "family": "butterworth", "order": "2,4", "max_loss": "0.5"}, None)
    return lambda out: batch.run_batch([str(lib)], s, out, coverage=0.6, workers=0)


@pytest.mark.parametrize(
    "edit",
    [
        "cases-oops",
        "no-margins",
        "choice-9999",
        "all-pass",
        "nan",
        "not-object",
        "truncated",
        "other-version",
        "dup-id",
        "fails-not-list",
        "deep",
    ],
)
def test_edited_or_malformed_cache_entry_is_recomputed_not_trusted(tmp_path, edit):
    run = _cache_run(tmp_path)
    out = tmp_path / "b"
    first = run(out)
    clean = (out / "corpus.json").read_bytes()
    entries = sorted((out / "cache").glob("*.json"))
    assert len(entries) == 3 and first.computed == 3
    path = entries[0]
    e = json.loads(path.read_text())
    text = None
    if edit == "cases-oops":
        e["cases"] = "oops"
    elif edit == "no-margins":
        del e["cases"][0]["margins_db"]
    elif edit == "choice-9999":
        e["choice"] = {**(e["choice"] or {}), "case": 9999}
    elif edit == "all-pass":  # a hand edit that would change the verdict
        for c in e["cases"]:
            c["passes"], c["fails"] = True, []
    elif edit == "nan":
        text = json.dumps(e).replace('"snr_db": ', '"snr_db": NaN, "x": ', 1)
    elif edit == "not-object":
        text = "[1, 2, 3]"
    elif edit == "truncated":
        text = path.read_text()[:100]
    elif edit == "other-version":
        e["tool_version"] = "0.0.0"
    elif edit == "dup-id":
        e["cases"][1]["id"] = e["cases"][0]["id"]
    elif edit == "fails-not-list":
        e["cases"][0]["fails"] = "min_snr_db"
    else:
        text = "[" * 5000 + "]" * 5000
    if edit in ("dup-id", "fails-not-list"):  # even with a matching checksum the shape is refused
        from audiobw.batch import entry_checksum

        e["checksum"] = entry_checksum(e)
    path.write_text(text if text is not None else json.dumps(e))
    again = run(out)
    assert again.computed == 1 and again.cached == 2  # the bad entry was recomputed
    assert (out / "corpus.json").read_bytes() == clean
    assert json.loads(path.read_text())["checksum"]


# -- hangs: a cluster address that is not a scheduler; workers outliving a killed parent ----------


def _silent_listener():
    import socket

    srv = socket.socket()
    srv.bind(("127.0.0.1", 0))
    srv.listen(8)
    held = []

    def accept():
        while True:
            try:
                c, _ = srv.accept()
            except OSError:
                return
            held.append(c)  # never answers

    threading.Thread(target=accept, daemon=True).start()
    return srv, f"tcp://127.0.0.1:{srv.getsockname()[1]}"


def _http_server():
    import http.server

    httpd = http.server.HTTPServer(("127.0.0.1", 0), http.server.SimpleHTTPRequestHandler)
    threading.Thread(target=httpd.serve_forever, daemon=True).start()
    return httpd, f"tcp://127.0.0.1:{httpd.server_address[1]}"


@pytest.mark.parametrize("server", ["silent", "http"])
def test_batch_cluster_that_is_not_a_scheduler_times_out_with_one_line(tmp_path, program, server):
    pytest.importorskip("distributed")
    srv, address = _silent_listener() if server == "silent" else _http_server()
    try:
        proc = subprocess.run(
            [
                PY,
                "-m",
                "audiobw",
                "batch",
                str(program),
                "--out",
                str(tmp_path / "b"),
                "--cluster",
                address,
                "--cluster-timeout",
                "1s",
                *SWEEP,
            ],
            capture_output=True,
            text=True,
            timeout=180,
        )  # a hang fails here
    finally:
        if server == "silent":
            srv.close()
        else:
            srv.shutdown()
    assert proc.returncode == 1, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("audiobw: error: --cluster:"), proc.stderr
    assert not (tmp_path / "b" / "corpus.json").exists()


@pytest.mark.parametrize("value", ["0", "-1s", "1e308", "abc"])
def test_cluster_timeout_out_of_range_is_refused(tmp_path, program, value, capsys):
    code = main(
        [
            "batch",
            str(program),
            "--out",
            str(tmp_path / "b"),
            "--cluster",
            "tcp://127.0.0.1:1",
            "--cluster-timeout",
            value,
            *SWEEP,
        ]
    )
    assert "--cluster-timeout" in _one_line_error(capsys, code, expected_code=2)


def _children(pid):
    out = []
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                fields = (d / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid:
                out.append(int(d.name))
    return out


def _alive(pid):
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_batch_workers_exit_when_the_parent_is_killed(tmp_path):
    import signal

    lib = tmp_path / "lib"
    lib.mkdir()
    rng = np.random.default_rng(5)
    for i in range(8):
        write(lib / f"n{i}.wav", 0.05 * rng.standard_normal(48000 * 4), 48000)
    proc = subprocess.Popen(
        [
            PY,
            "-m",
            "audiobw",
            "batch",
            str(lib),
            "--out",
            str(tmp_path / "b"),
            "--workers",
            "2",
            "--cutoffs",
            "1k:20k:40",
            "--family",
            "butterworth,elliptic",
            "--order",
            "2,4,8",
            "--max-loss",
            "0.5",
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    deadline = time.monotonic() + 120
    kids = []
    while time.monotonic() < deadline and len(kids) < 3:  # two workers and the resource tracker
        kids = _children(proc.pid)
        time.sleep(0.05)
    assert len(kids) >= 2, kids
    proc.send_signal(signal.SIGKILL)  # the parent only
    # the caller waiting for EOF on the parent's pipes gets it: every holder has exited
    proc.communicate(timeout=120)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and any(_alive(k) for k in kids):
        time.sleep(0.1)
    assert not any(_alive(k) for k in kids)
