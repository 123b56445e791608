"""The outside fuzz, kept in the suite: hostile values, configs, names, files, interrupts.

Each case asserts the promise of docs/robustness.md: one line on stderr naming
the option, key or file, the value and what is accepted; no traceback; exit 2
for a user mistake, 1 for data or writes, 130 for an interrupt; inputs never
modified.  Hypothesis runs few examples (deadline=None) so the file stays quick.
"""

from __future__ import annotations

import json
import math
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from audiobw.cli import main


FS = 48000
FEW = settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def one_line(err: str) -> str:
    lines = [ln for ln in err.strip().splitlines() if not ln.startswith("Listening caution")]
    assert len(lines) == 1, err
    assert "Traceback" not in err, err
    return lines[0]


def run(args, capsys):
    code = main([str(a) if not isinstance(a, (bytes, str)) else a for a in args])
    return code, capsys.readouterr()


@pytest.fixture(scope="module")
def wav(tmp_path_factory):
    p = tmp_path_factory.mktemp("fuzz") / "prog.wav"
    rng = np.random.default_rng(17)
    t = np.arange(FS) / FS
    x = 0.3 * np.sin(2 * np.pi * 440 * t) + rng.normal(0, 0.01, FS)
    sf.write(str(p), x[:, None], FS, subtype="PCM_16")
    return p


# -- option values: one physical range per concept ------------------------------------------------------

VALUE_CASES = [
    # (args after the command's fixed ones, option named, exit)
    (["noise", "--band", ":20k", "--source-ohms", "1e308"], "--source-ohms", 2),
    (["noise", "--band", ":20k", "--en", "1e300"], "--en", 2),
    (["noise", "--band", ":20k", "--in", "1e300"], "--in", 2),
    (["noise", "--band", ":20k", "--full-scale", "1e300"], "--full-scale", 2),
    (["noise", "--band", ":20k", "--full-scale", "1e-300"], "--full-scale", 2),
    (["noise", "--band", ":20k", "--temperature", "1e300"], "--temperature", 2),
    (["noise", "--band", ":20k", "--gain", "1e300"], "--gain", 2),
    (["noise", "--band", ":20k", "--gain", "-1e300"], "--gain", 2),
    (["noise", "--band", ":20k", "--h2", "-1e300"], "--h2", 2),
    (["noise", "--band", ":20k", "--amp-bandwidth", "1e-300"], "--amp-bandwidth", 2),
    (["noise", "--band", ":20k", "--amp-bandwidth", "1e300"], "--amp-bandwidth", 2),
    (["noise", "--band", ":20k", "--en-corner", "1e-300"], "--en-corner", 2),
    (["noise", "--band", ":20k", "--in-corner", "1e300"], "--in-corner", 2),
    (["noise", "--band", ":1e-300"], "--band", 2),
    (["noise", "--band", "1e-300:20k"], "--band", 2),
    (["noise", "--band", ":20k", "--rate", "1e300"], "--rate", 2),
    (["bits", "--bit-rate", "1e-300", "--out", "x.wav"], "--bit-rate", 2),
    (["bits", "--bit-rate", "1e-3", "--out", "x.wav"], "--bit-rate", 2),
    (["bits", "--bit-rate", "2k", "--seed", "-1", "--out", "x.wav"], "--seed", 2),
    (["bits", "--bit-rate", "2k", "--seed", "1e300", "--out", "x.wav"], "--seed", 2),
    (["bits", "--bit-rate", "2k", "--seed", "99999999999999999999999", "--out", "x.wav"], "--seed", 2),
    (["bits", "--bit-rate", "2k", "--full-scale", "1e308", "--out", "x.wav"], "--full-scale", 2),
]


@pytest.mark.parametrize("args,option,code", VALUE_CASES, ids=[" ".join(c[0][:4]) for c in VALUE_CASES])
def test_extreme_option_values_are_refused_with_the_range(tmp_path, capsys, monkeypatch, args, option, code):
    monkeypatch.chdir(tmp_path)
    got, io = run(args, capsys)
    line = one_line(io.err)
    assert got == code and option in line and "accepted" in line, io.err
    assert not (tmp_path / "x.wav").exists()


SWEEP_VALUE_CASES = [
    (["--cutoffs", "1e-300"], "--cutoffs"),
    (["--cutoffs", "1e308"], "--cutoffs"),
    (["--cutoffs", "1e-300:1k:4"], "--cutoffs"),
    (["--source-ohms", "1e308"], "--source-ohms"),
    (["--input-level", "1e300Vrms"], "--input-level"),
    (["--input-level", "1e300dB"], "--input-level"),
    (["--input-level", "-1e300dBFS"], "--input-level"),
    (["--min-snr", "1e300"], "--min-snr"),
    (["--max-loss", "1e300"], "--max-loss"),
    (["--tone", "1e-300"], "--tone"),
    (["--tone-level", "-1e300"], "--tone-level"),
    (["--min-ser", "-1e300"], "--min-ser"),
    (["--max-lsd", "1e300"], "--max-lsd"),
]


@pytest.mark.parametrize("extra,option", SWEEP_VALUE_CASES, ids=[" ".join(c[0]) for c in SWEEP_VALUE_CASES])
def test_extreme_sweep_values_are_refused_before_any_output(wav, tmp_path, capsys, extra, option):
    out = tmp_path / "o"
    got, io = run(["sweep", wav, "--max-loss", "1", *extra, "--out", out], capsys)
    line = one_line(io.err)
    assert got == 2 and option in line and "accepted" in line, io.err
    assert not out.exists()


@pytest.mark.parametrize(
    "extra,option",
    [
        (["--band", ":1e-300"], "--band"),
        (["--band", ":5k", "--excerpt-at", "1e308"], "--excerpt-at"),
        (["--band", ":5k", "--excerpt", "1e308"], "--excerpt"),
        (["--band", ":5k", "--seed", "-1"], "--seed"),
        (["--band", ":5k", "--seed", "abc"], "--seed"),
        (["--band", ":5k", "--loudness", "1e300"], "--loudness"),
        (["--band", ":5k", "--ceiling", "1e300"], "--ceiling"),
    ],
)
def test_extreme_render_values_are_refused(wav, tmp_path, capsys, extra, option):
    out = tmp_path / "r"
    got, io = run(["render", wav, *extra, "--out", out], capsys)
    line = one_line(io.err)
    assert got == 2 and option in line and "accepted" in line, io.err
    assert not out.exists()


@FEW
@given(
    exponent=st.integers(-330, 330),
    sign=st.sampled_from([1, -1]),
    key=st.sampled_from(
        [
            "source_ohms",
            "en",
            "in",
            "full_scale",
            "temperature",
            "gain",
            "amp_bandwidth",
            "tone",
            "input_level",
            "cutoffs",
        ]
    ),
)
def test_any_magnitude_gives_figures_or_one_line(wav, tmp_path_factory, capsys, exponent, sign, key):
    """Any power of ten, either sign, in any numeric key: a finite result or a one-line refusal."""
    from audiobw.options import OPTIONS

    section = OPTIONS[key].section
    value = sign * 10.0**exponent if exponent < 308 else sign * 1.7e308
    d = tmp_path_factory.mktemp("mag")
    cfg = d / "c.toml"
    cfg.write_text(f"[{section}]\n{key} = {value!r}\n", encoding="utf-8")
    got, io = run(["noise", "--band", "20:20k", "--chain", cfg, "--json"], capsys)
    if got == 0:
        budget = json.loads(io.out)
        assert all(math.isfinite(v) for v in _numbers(budget)), budget
    else:
        line = one_line(io.err)
        assert got == 2 and key in line and "accepted" in line, io.err


def _numbers(obj):
    if isinstance(obj, dict):
        for v in obj.values():
            yield from _numbers(v)
    elif isinstance(obj, list):
        for v in obj:
            yield from _numbers(v)
    elif isinstance(obj, (int, float)) and not isinstance(obj, bool):
        yield float(obj)


# -- samples at the ends of float64 ---------------------------------------------------------------------


@pytest.mark.parametrize(
    "value,needle", [(5e-324, "silence"), (1.7e308, "overflow"), (1e-200, "silence"), (1e200, "overflow")]
)
def test_extreme_float64_samples_are_refused_before_any_output(tmp_path, capsys, value, needle):
    x = np.full(FS, value)
    x[::2] *= -1
    p = tmp_path / "x.wav"
    sf.write(str(p), x[:, None], FS, subtype="DOUBLE")
    before = p.read_bytes()
    out = tmp_path / "o"
    got, io = run(["sweep", p, "--max-loss", "1", "--out", out], capsys)
    line = one_line(io.err)
    assert got == 1 and needle in line and "x.wav" in line, io.err
    assert not out.exists() and p.read_bytes() == before


# -- the grid: a stated cap and an estimate -----------------------------------------------------------------


def test_a_grid_above_the_cap_is_refused_with_its_count(wav, tmp_path, capsys):
    got, io = run(
        [
            "sweep",
            wav,
            "--response",
            "bandpass",
            "--low-edges",
            "10:1k:10000",
            "--high-edges",
            "2k:20k:10000",
            "--max-loss",
            "1",
            "--out",
            tmp_path / "o",
        ],
        capsys,
    )
    line = one_line(io.err)
    assert got == 2 and "100,000,000 cases" in line and "200,000" in line, io.err


def test_grid_count_matches_the_cases_built():
    from audiobw.sweep import Grid

    g = Grid(
        response="bandpass",
        families=("butterworth", "bessel"),
        orders=(2, 4),
        low_edges_hz=(10.0, 100.0, 3000.0),
        high_edges_hz=(50.0, 2000.0, 20000.0),
    )
    assert g.count() == len(g.specs(stage="analog", fs_hz=48000.0)) == 2 * 2 * (3 + 2 + 1)


def test_a_large_grid_gets_a_time_estimate_on_stderr(wav, tmp_path, capsys, monkeypatch):
    import audiobw.grid as grid_mod

    monkeypatch.setattr(grid_mod, "ESTIMATE_FROM_CASES", 20)
    got, io = run(["sweep", wav, "--cutoffs", "2k:20k:24", "--max-loss", "1", "--out", tmp_path / "o"], capsys)
    assert got == 0
    assert "24 cases to score: about 0 s at 1 ms per case on one core" in io.err
    assert "cases to score" not in io.out


def test_a_large_sweep_shows_scoring_progress(wav, tmp_path, capsys, monkeypatch):
    import audiobw.cli as cli_mod

    monkeypatch.setattr(cli_mod, "SCORING_PROGRESS_CASES", 20)
    monkeypatch.setenv("AUDIOBW_PROGRESS", "lines")
    # 48 cases of one design: scored in batches of sweep.BATCH_CASES, progress said after each
    got, io = run(["sweep", wav, "--cutoffs", "2k:20k:48", "--max-loss", "1", "--out", tmp_path / "o"], capsys)
    assert got == 0
    lines = [ln for ln in io.err.splitlines() if "progress: scoring cases" in ln]
    assert lines[0].endswith("scoring cases 0 %")
    assert lines[-1].endswith("scoring cases 100 %") and len(lines) >= 5
    # below the threshold nothing is said about scoring
    monkeypatch.setattr(cli_mod, "SCORING_PROGRESS_CASES", 49)
    got, io = run(["sweep", wav, "--cutoffs", "2k:20k:48", "--max-loss", "1", "--out", tmp_path / "p"], capsys)
    assert got == 0 and "scoring cases" not in io.err


# -- configs: depth, size, types ----------------------------------------------------------------------------

TOML_CASES = [
    ("[source]\nsource_ohms = " + "[" * 3000 + "]" * 3000 + "\n", "nested too deeply"),
    ("[source]\nsource_ohms = " + "{a=" * 3000 + "1" + "}" * 3000 + "\n", "nested too deeply"),
    ("[source]\nsource_ohms = '" + "1" * 2_000_000 + "'\n", "too large"),
    ("[source]\nsource_ohms = 1e308\n", "physical range"),
    ("[source]\nsource_ohms = nan\n", "not a finite number"),
    ("[source]\nsource_ohms = inf\n", "not a finite number"),
    ("[source]\nsource_ohms = -inf\n", "not a finite number"),
    ("[amplifier]\nen = 1e300\n", "physical range"),
    ("[amplifier]\namp_bandwidth = 1e-300\n", "physical range"),
    ("[converter]\nfull_scale = 1e308\n", "physical range"),
    ("[source]\ninput_level = '1e300Vrms'\n", "physical range"),
    ("[source]\ninput_level = 1e300\n", "physical range"),
    ("[source]\ntemperature = 1e300\n", "physical range"),
    ("[source]\nsource_ohms = 1979-05-27\n", "source_ohms"),
    ("[source]\nsource_ohms = [1, 2]\n", "source_ohms"),
    ("[grid]\norder = 'four'\n", "order"),
    ("[grid]\ncutoffs = 1e-300\n", "cutoffs"),
    ("[grid]\ncutoffs = []\n", "cutoffs"),
    ("[converter]\nbits = 24.5\n", "bits"),
    ("[targets]\nmin_snr = '1e400'\n", "min_snr"),
]


@pytest.mark.parametrize("text,needle", TOML_CASES, ids=[f"toml{i}" for i in range(len(TOML_CASES))])
def test_hostile_configs_give_exit_2_and_one_line(wav, tmp_path, capsys, text, needle):
    cfg = tmp_path / "c.toml"
    cfg.write_text(text, encoding="utf-8")
    got, io = run(["sweep", wav, "--chain", cfg, "--max-loss", "1", "--out", tmp_path / "o"], capsys)
    line = one_line(io.err)
    assert got == 2 and needle in line, io.err
    assert len(line) < 600


# -- trials-score: keys and answer sheets ---------------------------------------------------------------


def _key(tmp_path, trials):
    k = tmp_path / "trial-key.json"
    k.write_text(json.dumps({"format": "audiobw-trial-key/1", "trials": trials}), encoding="utf-8")
    return k


@pytest.mark.parametrize(
    "trials,answers,needle",
    [
        ([{"trial": 5, "processed": "first"}], "1 first\n", "trial 1 is not in the key; accepted: 5"),
        ([1, 2], "1 first\n", "trials[0]"),
        ([{"trial": "abc", "processed": "first"}], "1 first\n", "trials[0]"),
        ([{"trial": 1, "processed": "first"}, {"trial": 1, "processed": "second"}], "1 first\n", "trials[1]"),
        ([{"trial": True, "processed": "first"}], "1 first\n", "trials[0]"),
        ([{"trial": 1, "processed": "third"}], "1 first\n", "trials[0]"),
        ([{"trial": 1, "processed": "first"}], "\u00b2 first\n", "line 1"),
        ([{"trial": 1, "processed": "first"}], "\u0661 first\n", "line 1"),
        ([{"trial": 1, "processed": "first"}], "9" * 5000 + " first\n", "line 1"),
    ],
)
def test_bad_trial_keys_and_answers_give_one_line(tmp_path, capsys, trials, answers, needle):
    from audiobw.render import KEY_FORMAT

    k = tmp_path / "trial-key.json"
    k.write_text(json.dumps({"format": KEY_FORMAT, "trials": trials}), encoding="utf-8")
    a = tmp_path / "answers.txt"
    a.write_text(answers, encoding="utf-8")
    got, io = run(["trials-score", k, a], capsys)
    line = one_line(io.err)
    assert got == 2 and needle in line, io.err


# -- names: terminal, Markdown, CSV -----------------------------------------------------------------------


@FEW
@given(name=st.text(min_size=1, max_size=40))
def test_shown_names_are_one_printable_utf8_line(name):
    from audiobw.names import shown

    s = shown(name)
    s.encode("utf-8")  # never a lone surrogate
    assert "\n" not in s and not any(ord(c) < 0x20 or 0x7F <= ord(c) < 0xA0 for c in s)
    if all(c.isprintable() and not 0xD800 <= ord(c) <= 0xDFFF for c in name):
        assert s == name  # ordinary names are shown as they are


def test_shown_turns_undecodable_bytes_into_hex():
    from audiobw.names import shown

    assert shown(os.fsdecode(b"take\xff\x1b[31m\x07.wav")) == "take\\xff\\x1b[31m\\x07.wav"
    assert shown("a\nb\u202ec") == "a\\nb\\u202ec"


HOSTILE_NAMES = [
    b"esc\x1b[2J\x1b]0;title\x07.wav",
    b"bell\x07.wav",
    b"new\nline.wav",
    b"bad\xff\xfebytes.wav",
    b"-leading-dash.wav",
    b"<img src=x onerror=alert(1)>.wav",
    b"=HYPERLINK(1).wav",
    b"back`tick``s.wav",
    b"rtl\xe2\x80\xaewav.txt",
    b"x" * 250 + b".wav",
]


@pytest.mark.parametrize("raw", HOSTILE_NAMES, ids=[f"name{i}" for i in range(len(HOSTILE_NAMES))])
def test_hostile_names_work_and_are_shown_escaped(wav, tmp_path, capsys, raw):
    name = os.fsdecode(raw)
    p = tmp_path / name
    p.write_bytes(wav.read_bytes())
    out = tmp_path / "o"
    got, io = run(["sweep", "--max-loss", "1", "--out", out, "--report", "--", p], capsys)
    assert got == 0, io.err
    text = io.out + io.err
    text.encode("utf-8")
    assert not any(ord(c) < 0x20 and c != "\n" for c in text)
    md = (out / "spec.md").read_text(encoding="utf-8")
    outside_code = re.sub(r"(`+).*?\1", "", md)  # CommonMark renders nothing inside a code span
    assert "<img" not in outside_code and "\x1b" not in md and "\x07" not in md
    json.loads((out / "sweep.json").read_text(encoding="utf-8"))
    assert json.loads((out / "sweep.json").read_text(encoding="utf-8"))["input"]["path"] == str(p)


@pytest.mark.parametrize("raw", [b"gone\nmissing.wav", b"gone\x1b[31m.wav", b"gone\xff.wav"])
def test_a_missing_file_with_a_hostile_name_gives_one_line(tmp_path, capsys, raw):
    got, io = run(["sweep", tmp_path / os.fsdecode(raw), "--max-loss", "1", "--out", tmp_path / "o"], capsys)
    line = one_line(io.err)
    assert got == 1 and "no such file" in line and "\\x" in line or "\\n" in line, io.err


def test_batch_failed_lines_escape_control_characters(tmp_path, capsys):
    lib = tmp_path / "lib"
    lib.mkdir()
    good = lib / "ok.wav"
    sf.write(str(good), 0.3 * np.sin(2 * np.pi * 440 * np.arange(FS) / FS)[:, None], FS, subtype="PCM_16")
    bad = lib / os.fsdecode(b"evil\x1b]0;pwn\x07\xff.wav")
    bad.write_bytes(b"RIFF\x00\x00\x00\x00WAVEjunk")
    got, io = run(["batch", lib, "--max-loss", "1", "--workers", "0", "--out", tmp_path / "b"], capsys)
    assert got == 0, io.err
    failed = [ln for ln in io.out.splitlines() if ln.startswith("Failed:")]
    assert len(failed) == 1 and "evil\\x1b]0;pwn\\x07\\xff.wav" in failed[0], io.out
    assert "\x07" not in io.out and "\x1b" not in io.out


def test_markdown_and_csv_neutralise_markup_and_formulas():
    from audiobw.names import csv_cell, md_code, md_text

    assert md_text("<img src=x onerror=alert(1)>.wav") == "&lt;img src=x onerror=alert\\(1\\)&gt;\\.wav"
    assert md_code("a`b") == "``a`b``"
    for bad in ("=1+1", "+1", "-1", "@SUM(A1)"):
        assert csv_cell(bad).startswith("'"), bad
    assert csv_cell(-1.5) == -1.5 and csv_cell("butterworth") == "butterworth"


def test_case_csv_cells_cannot_start_a_formula():
    from audiobw.report.sweepio import csv_text

    doc = {"cases": [{"label": "=cmd|' /C calc'!A0", "fails": ["@x"], "snr_db": -3.0}]}
    rows = csv_text(doc, keys=("label", "fails", "snr_db")).splitlines()
    assert rows[1].startswith("'=cmd") and ",'@x," in rows[1] and rows[1].endswith(",-3.0")


# -- the terminal: full device, closed pipe, library loggers --------------------------------------------------

ENTRY = [sys.executable, "-c", "import sys; from audiobw._start import entry; sys.argv[0] = 'audiobw'; entry()"]


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full (Linux)")
@pytest.mark.parametrize(
    "args", [["noise", "--band", ":20k"], ["noise", "--band", ":20k", "--json"], ["--help"], ["--version"]]
)
def test_stdout_on_a_full_device_gives_one_line_and_exit_1(tmp_path, args):
    with open("/dev/full", "w") as full:
        p = subprocess.run(ENTRY + args, stdout=full, stderr=subprocess.PIPE, text=True, cwd=tmp_path, timeout=120)
    assert p.returncode == 1, p.stderr
    line = one_line(p.stderr)
    assert "standard output" in line and "No space left on device" in line


def test_a_closed_pipe_ends_quietly(tmp_path):
    p = subprocess.Popen(
        ENTRY + ["noise", "--band", ":20k", "--json"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=tmp_path
    )
    p.stdout.read(10)
    p.stdout.close()
    err = p.stderr.read().decode()
    assert p.wait(timeout=120) == 0 and err == "", err


def test_library_loggers_are_quiet_unless_debug(capsys, monkeypatch):
    import logging

    import audiobw.jobs as jobs

    real = jobs.noise_budget

    def noisy(*a, **k):
        log = logging.getLogger("distributed.core")
        handler = logging.StreamHandler(sys.stderr)
        log.addHandler(handler)
        try:
            log.error("Traceback (most recent call last): a scheduler went away")
        finally:
            log.removeHandler(handler)
        return real(*a, **k)

    monkeypatch.setattr(jobs, "noise_budget", noisy)
    try:
        assert main(["noise", "--band", ":20k"]) == 0
        assert "scheduler went away" not in capsys.readouterr().err
        assert main(["--debug", "noise", "--band", ":20k"]) == 0
        assert "scheduler went away" in capsys.readouterr().err
    finally:
        logging.disable(logging.NOTSET)


# -- interrupts at random points, start-up included ---------------------------------------------------------


@pytest.fixture(scope="module")
def swept(tmp_path_factory, wav):
    d = tmp_path_factory.mktemp("swept")
    assert main(["sweep", str(wav), "--max-loss", "1", "--out", str(d / "s")]) == 0
    return d / "s"


@settings(max_examples=6, deadline=None, database=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(delay=st.floats(0.0, 1.5), command=st.sampled_from(["report", "sweep", "noise"]))
def test_an_interrupt_at_any_moment_exits_130_quietly(swept, wav, tmp_path_factory, delay, command):
    d = tmp_path_factory.mktemp("intr")
    args = {
        "report": ["report", str(swept)],
        "sweep": ["sweep", str(wav), "--max-loss", "1", "--report", "--out", str(d / "o")],
        "noise": ["noise", "--band", ":20k"],
    }[command]
    before = {p.name: p.read_bytes() for p in swept.iterdir() if p.suffix in (".json", ".npz", ".csv")}
    p = subprocess.Popen(ENTRY + args, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=d)
    time.sleep(delay)
    p.send_signal(signal.SIGINT)
    err = p.stderr.read().decode()
    code = p.wait(timeout=300)
    if code != 130 and "Traceback" in err and f"{os.sep}audiobw{os.sep}" not in err:
        # The interpreter's own start-up (site, the .pth of an editable install), before the first
        # line of audiobw runs: no frame of the package in the traceback.  Out of our reach.
        return
    assert "Traceback" not in err and "Error" not in err, err
    if code == 130:
        assert one_line(err).startswith("audiobw: interrupted"), err
    elif code == -signal.SIGINT:  # before the interpreter set up any handler: the default action, silent
        assert err == "", err
    else:
        assert code == 0, err
    assert not list(d.rglob("*.part")) and not list(swept.rglob("*.part"))
    for name, data in before.items():
        assert (swept / name).read_bytes() == data


# -- file kinds: not regular, out of the tree, sparse, truncated, lying ----------------------------------------


def _kinds(tmp_path, wav):
    data = wav.read_bytes()
    fifo = tmp_path / "pipe.wav"
    os.mkfifo(fifo)
    folder = tmp_path / "folder.wav"
    folder.mkdir()
    link = tmp_path / "link.wav"
    link.symlink_to(wav)  # a symlink to a real file out of the tree: read as that file
    dangling = tmp_path / "dangling.wav"
    dangling.symlink_to(tmp_path / "nowhere.wav")
    sparse = tmp_path / "sparse.wav"
    with open(sparse, "wb") as fh:
        fh.write(data[:44])
        fh.truncate(50_000_000)  # a hole: the header says 32 kB of data, the file is 50 MB of zeros
    half = tmp_path / "half.wav"
    half.write_bytes(data[:44])
    liar = tmp_path / "liar.wav"
    liar.write_bytes(data[:24] + (1).to_bytes(4, "little") + data[28:])  # byte rate field: nonsense
    rate0 = tmp_path / "rate0.wav"
    rate0.write_bytes(data[:24] + (0).to_bytes(4, "little") + data[28:])  # sample rate 0
    chans = tmp_path / "chans.wav"
    chans.write_bytes(data[:22] + (64).to_bytes(2, "little") + data[24:])  # 64 channels claimed
    return {
        "fifo": (fifo, {1}),
        "device": (Path("/dev/zero"), {1}),
        "folder": (folder, {1}),
        "symlink": (link, {0}),
        "dangling": (dangling, {1}),
        "sparse": (sparse, {0, 1}),
        "half": (half, {1}),
        "liar": (liar, {0, 1}),
        "rate0": (rate0, {1}),
        "chans": (chans, {1}),
    }


KIND_NAMES = ["fifo", "device", "folder", "symlink", "dangling", "sparse", "half", "liar", "rate0", "chans"]


@pytest.mark.parametrize("kind", KIND_NAMES)
def test_file_kinds_are_read_or_refused_in_one_line(wav, tmp_path, capsys, kind):
    path, codes = _kinds(tmp_path, wav)[kind]
    out = tmp_path / "o"
    got, io = run(["sweep", path, "--max-loss", "1", "--out", out], capsys)
    assert got in codes, io.err
    if got:
        line = one_line(io.err)
        assert path.name in line, io.err
        assert not out.exists()
