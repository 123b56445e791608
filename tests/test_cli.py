"""The command line: parsing of every option, refusals without tracebacks, outputs."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from audiobw.cli import main

from .conftest import REPO, tones

SCHEMA = REPO / "docs" / "sweep.schema.json"


def run(args, capsys):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def prog(write_audio, rng):
    fs = 48000
    x = tones([220.0, 1500.0, 6000.0], [0.2, 0.1, 0.03], fs, 3.0) + rng.normal(0, 1e-3, fs * 3)
    return write_audio("take.wav", np.stack([x, 0.8 * x], axis=1), fs)


def validate(doc):
    jsonschema = pytest.importorskip("jsonschema")
    schema = json.loads(SCHEMA.read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.Draft202012Validator(schema).validate(doc)


BASE = ["--family", "butterworth,bessel", "--order", "2,4", "--cutoffs", "2k:20k:12", "--max-loss", "0.2"]


def test_sweep_writes_json_and_csv(prog, tmp_path, capsys):
    out = tmp_path / "o"
    code, stdout, err = run(["sweep", prog, "--out", out, *BASE, "--min-snr-a", "80"], capsys)
    assert code == 0, err
    doc = json.loads((out / "sweep.json").read_text())
    validate(doc)
    assert len(doc["cases"]) == 2 * 2 * 12
    csv_lines = (out / "sweep.csv").read_text().splitlines()
    assert len(csv_lines) == 1 + 48 and csv_lines[0].startswith("id,response,family")
    assert "[dB]" in stdout and "Chosen:" in stdout and "Binding target" in stdout
    assert "engineering estimates" in stdout


def test_json_flag_prints_valid_json(prog, tmp_path, capsys):
    code, stdout, _ = run(["sweep", prog, "--out", tmp_path / "j", "--json", *BASE], capsys)
    assert code == 0
    doc = json.loads(stdout)
    validate(doc)
    assert doc == json.loads((tmp_path / "j" / "sweep.json").read_text())


def test_sweep_is_deterministic(prog, tmp_path, capsys):
    for name in ("a", "b"):
        assert run(["sweep", prog, "--out", tmp_path / name, *BASE], capsys)[0] == 0
    assert (tmp_path / "a" / "sweep.json").read_bytes() == (tmp_path / "b" / "sweep.json").read_bytes()


def test_sweep_json_has_one_line_per_case(prog, tmp_path, capsys):
    assert run(["sweep", prog, "--out", tmp_path / "l", *BASE], capsys)[0] == 0
    text = (tmp_path / "l" / "sweep.json").read_text(encoding="utf-8")
    doc = json.loads(text)
    lines = text.splitlines()
    start = lines.index('  "cases": [')
    # each case on one line of its own, in order, then the closing bracket; the rest as json indents it
    assert [json.loads(line.rstrip(",")) for line in lines[start + 1 : start + 1 + len(doc["cases"])]] == doc["cases"]
    assert lines[start + 1 + len(doc["cases"])].strip() in ("]", "],")
    outer = {**doc, "cases": []}
    assert json.loads(text.replace(text[text.index('"cases": [') : text.index("\n  ]") + 4], '"cases": []')) == outer


def test_sweep_json_text_keeps_strings_that_look_like_its_placeholder():
    from audiobw.report.sweepio import dumps

    doc = {"notes": ["\x00cases-0123456789abcdef\x00", '"cases": ['], "cases": [{"id": 1, "x": "\x00"}], "z": None}
    assert json.loads(dumps(doc)) == doc
    assert json.loads(dumps({**doc, "cases": []})) == {**doc, "cases": []}


def test_default_out_is_under_the_working_directory(prog, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert run(["sweep", prog, *BASE], capsys)[0] == 0
    assert (tmp_path / "audiobw-out" / "take" / "sweep.json").is_file()


def test_no_target_met_reports_best_value(prog, tmp_path, capsys):
    code, stdout, _ = run(["sweep", prog, "--out", tmp_path / "n", *BASE[:6], "--min-snr", "400"], capsys)
    assert code == 0
    assert "No case meets every target" in stdout and "Cannot be met: SNR" in stdout
    doc = json.loads((tmp_path / "n" / "sweep.json").read_text())
    assert doc["choice"] is None and "min_snr_db" in doc["unmet"]


def test_bandpass_grid(prog, tmp_path, capsys):
    code, _, err = run(
        [
            "sweep",
            prog,
            "--out",
            tmp_path / "bp",
            "--response",
            "bandpass",
            "--low-edges",
            "20:200:4",
            "--high-edges",
            "4k:20k:5",
            "--max-loss",
            "0.5",
        ],
        capsys,
    )
    assert code == 0, err
    doc = json.loads((tmp_path / "bp" / "sweep.json").read_text())
    validate(doc)
    assert len(doc["cases"]) == 20
    assert all(c["low_hz"] is not None and c["high_hz"] is not None for c in doc["cases"])


def test_chain_file_and_override(prog, tmp_path, capsys):
    toml = tmp_path / "chain.toml"
    toml.write_text(
        '[source]\nsource_ohms = "2.2k"\ntemperature = "27C"\n[amplifier]\ngain = 30\n'
        'en = "3n"\n[converter]\nbits = 16\nfull_scale = "+4dBu"\n[grid]\nfamily = "bessel"\n'
        'order = [2, 4]\ncutoffs = "3k:18k:6"\n[targets]\nmax_loss = 0.3\n'
    )
    code, _, err = run(["sweep", prog, "--out", tmp_path / "c", "--chain", toml, "--gain", "20dB"], capsys)
    assert code == 0, err
    doc = json.loads((tmp_path / "c" / "sweep.json").read_text())
    ch = doc["chain"]
    assert ch["source_ohms"] == 2200.0 and ch["temperature_k"] == pytest.approx(300.15)
    assert ch["gain_db"] == 20.0  # the command line overrides the file
    assert ch["bits"] == 16 and ch["full_scale_vrms"] == pytest.approx(1.2277, abs=1e-4)
    assert {c["family"] for c in doc["cases"]} == {"bessel"} and len(doc["cases"]) == 12
    assert doc["targets"] == {"max_loss_db": 0.3}


def test_input_level_rescales_the_program(prog, tmp_path, capsys):
    code, _, _ = run(["sweep", prog, "--out", tmp_path / "l", *BASE, "--input-level", "-30dBFS"], capsys)
    assert code == 0
    doc = json.loads((tmp_path / "l" / "sweep.json").read_text())
    assert doc["input"]["rms_dbfs"] + doc["chain"]["input_gain_db"] == pytest.approx(-30.0, abs=1e-4)


def test_noise_command_prints_the_budget(capsys):
    code, out, err = run(
        [
            "noise",
            "--source-ohms",
            "600",
            "--gain",
            "30",
            "--en",
            "3n",
            "--in",
            "0.5p",
            "--bits",
            "16",
            "--full-scale",
            "1.228",
            "--band",
            "20:20k",
            "--family",
            "butterworth",
            "--order",
            "4",
        ],
        capsys,
    )
    assert code == 0, err
    for word in (
        "source thermal",
        "amplifier voltage",
        "amplifier current",
        "quantisation",
        "dither",
        "total",
        "ENBW",
        "Dynamic range",
        "dBu",
        "dBFS",
    ):
        assert word in out


def test_noise_json(capsys):
    code, out, _ = run(["noise", "--band", ":10k", "--family", "bessel", "--order", "2", "--json"], capsys)
    assert code == 0
    b = json.loads(out)
    assert b["filter"]["high_hz"] == pytest.approx(10000.0, rel=1e-6)
    assert sum(c["share"] for c in b["components"].values()) == pytest.approx(1.0)


@pytest.mark.parametrize("zero", [["--dither", "none"], ["--in", "0"], ["--source-ohms", "0"]])
def test_noise_json_with_a_zero_contributor(capsys, zero):
    """A contributor of zero power has no dB level: null in JSON, "none" in the text (was a traceback)."""
    code, out, err = run(["noise", "--band", "20:20k", "--json", *zero], capsys)
    assert code == 0, err
    b = json.loads(out)
    zeros = [k for k, c in b["components"].items() if c["vrms"] == 0.0]
    assert zeros
    for k in zeros:
        assert b["components"][k]["dbu"] is None and b["components"][k]["dbfs"] is None
        assert b["components"][k]["share"] == 0.0
    assert b["total"]["dbu"] is not None
    code, out, err = run(["noise", "--band", "20:20k", *zero], capsys)
    assert code == 0, err
    assert "none" in out and "−∞" not in out


@pytest.mark.parametrize(
    "args,needle",
    [
        (["--gain", "40V"], "--gain"),
        (["--source-ohms", "-5"], "--source-ohms"),
        (["--temperature", "0K"], "--temperature"),
        (["--bits", "0"], "--bits"),
        (["--bits", "24.5"], "--bits"),
        (["--full-scale", "-2V"], "--full-scale"),
        (["--en", "fast"], "--en"),
        (["--in", "1.5pV"], "--in"),
        (["--max-thdn", "12"], "--max-thdn"),
        (["--order", "0"], "--order"),
        (["--order", "20"], "--order"),
        (["--family", "gauss"], "--family"),
        (["--response", "notch"], "--response"),
        (["--cutoffs", "30k:40k:3"], "--cutoffs"),
        (["--cutoffs", "20k:2k:5"], "--cutoffs"),
        (["--dither", "rect"], "--dither"),
        (["--stage", "middle"], "--stage"),
        (["--meter", "wide"], "--meter"),
        (["--ripple", "5"], "--ripple"),
        (["--tone", "30k"], None),
    ],
)
def test_bad_values_are_refused_in_one_line(prog, tmp_path, capsys, args, needle):
    base = ["sweep", prog, "--out", tmp_path / "x", "--max-loss", "0.2"]
    code, out, err = run(base + args, capsys)
    if needle is None:  # a tone above fs/2 is not an error: THD+N is null with a reason
        assert code == 0
        return
    assert code == 2, (out, err)
    lines = [ln for ln in err.strip().splitlines() if ln]
    assert len(lines) == 1 and needle in lines[0] and "Traceback" not in err
    assert not (tmp_path / "x" / "sweep.json").exists()


def test_no_target_is_refused(prog, capsys):
    code, _, err = run(["sweep", prog, "--cutoffs", "2k:20k:4", "--program", "data", "--bit-rate", "2k"], capsys)
    assert code == 2 and "at least one of --min-snr" in err


def test_music_without_fidelity_target_defaults_to_no_audible_error(prog, capsys, tmp_path):
    code, out, err = run(["sweep", prog, "--cutoffs", "2k:20k:4", "--min-snr", "20", "--out", tmp_path / "o"], capsys)
    assert code == 0, err
    doc = json.loads((tmp_path / "o" / "sweep.json").read_text())
    assert doc["targets"]["max_audible_frames_pct"] == 1.0 and doc["targets"]["min_snr_db"] == 20.0
    assert any("no audible error" in n for n in doc["notes"])
    assert doc["limits"]["playback_spl_db"] == 80.0


@pytest.mark.parametrize("content,code_expected", [(b"", 1), (b"RIFF\x00\x00", 1), (b"\x8f" * 5000, 1)])
def test_unreadable_inputs(tmp_path, capsys, content, code_expected):
    p = tmp_path / "bad.wav"
    p.write_bytes(content)
    code, _, err = run(["sweep", p, "--max-loss", "1", "--out", tmp_path / "o"], capsys)
    assert code == code_expected and str(p) in err and len(err.strip().splitlines()) == 1


def test_missing_file_and_directory(tmp_path, capsys):
    code, _, err = run(["sweep", tmp_path / "nope.flac", "--max-loss", "1"], capsys)
    assert code == 1 and "no such file" in err
    code, _, err = run(["sweep", tmp_path, "--max-loss", "1"], capsys)
    assert code == 1 and "is a directory" in err


def test_bad_toml_key_is_named(prog, tmp_path, capsys):
    toml = tmp_path / "c.toml"
    toml.write_text("[amplifier]\ngian = 40\n")
    code, _, err = run(["sweep", prog, "--chain", toml, "--max-loss", "1"], capsys)
    assert code == 2 and "unknown key 'gian' in [amplifier]" in err
    toml.write_text("[amplifier\n")
    code, _, err = run(["sweep", prog, "--chain", toml, "--max-loss", "1"], capsys)
    assert code == 2 and "not valid TOML" in err


def test_input_is_never_overwritten(prog, tmp_path, capsys):
    before = Path(prog).read_bytes()
    code, _, _ = run(["sweep", prog, "--out", Path(prog).parent, *BASE], capsys)
    assert code == 0
    assert Path(prog).read_bytes() == before
    assert not list(Path(prog).parent.glob(".*.part"))


def test_help_is_quick_and_no_heavy_imports():
    # `audiobw --help` must not import scipy, numpy's heavy users, librosa or matplotlib
    code = (
        "import sys; from audiobw.cli import main; main(['--help']); "
        "bad = [m for m in ('scipy', 'librosa', 'matplotlib', 'soundfile', 'dask') if m in sys.modules]; "
        "print('HEAVY', bad)"
    )
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO)
    assert "HEAVY []" in r.stdout, r.stdout + r.stderr
    assert "sweep" in r.stdout and "noise" in r.stdout


def test_no_traceback_from_the_console_script(tmp_path):
    r = subprocess.run(
        [sys.executable, "-m", "audiobw", "sweep", str(tmp_path / "x.wav"), "--gain", "loud"],
        capture_output=True,
        text=True,
        cwd=REPO,
    )
    assert r.returncode == 2 and "Traceback" not in r.stderr and "--gain" in r.stderr


def test_help_lists_units():
    r = subprocess.run([sys.executable, "-m", "audiobw", "sweep", "--help"], capture_output=True, text=True, cwd=REPO)
    assert r.returncode == 0
    for text in ("--source-ohms", "Ω", "V/√Hz", "--max-thdn", "--cutoffs", "START:STOP:COUNT"):
        assert text in r.stdout


@pytest.mark.parametrize("quick", ["1", "0"])
def test_the_quick_exit_keeps_the_code_the_output_and_the_exit_hooks(tmp_path, quick):
    """The console entry ends with os._exit after its work (no interpreter teardown): the exit
    code, the error line and the atexit handlers are those of the normal exit."""
    import os

    flag = tmp_path / "hook-ran"
    code = (
        "import atexit, sys\n"
        f"atexit.register(lambda: open({str(flag)!r}, 'w').write('ran'))\n"
        f"sys.argv = ['audiobw', 'sweep', {str(tmp_path / 'missing.wav')!r}]\n"
        "from audiobw.cli import entry\n"
        "entry()\n"
    )
    env = dict(os.environ, AUDIOBW_QUICK_EXIT=quick)
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO, env=env)
    assert r.returncode == 1
    assert r.stderr.strip().splitlines() == [f"audiobw: error: {tmp_path / 'missing.wav'}: no such file"]
    assert flag.read_text() == "ran"
    ok = subprocess.run(
        [
            sys.executable,
            "-c",
            "import sys; sys.argv = ['audiobw', '--version']\nfrom audiobw.cli import entry\nentry()",
        ],
        capture_output=True,
        text=True,
        cwd=REPO,
        env=env,
    )
    assert ok.returncode == 0 and ok.stdout.startswith("audiobw")


def test_a_profiled_run_keeps_the_normal_exit_so_the_profile_is_written(tmp_path):
    """``python -m cProfile -o F -m audiobw ...`` writes F after the program returns: the quick
    exit steps aside when a profiler (or tracer) is on."""
    prof = tmp_path / "run.prof"
    r = subprocess.run(
        [sys.executable, "-m", "cProfile", "-o", str(prof), "-m", "audiobw", "--version"],
        capture_output=True,
        text=True,
        cwd=REPO,
    )
    assert r.returncode == 0 and r.stdout.startswith("audiobw")
    assert prof.stat().st_size > 0
