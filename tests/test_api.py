"""The public facade (audiobw.api): lazy import, the study model, library vs CLI outputs."""

import json
import re
import subprocess
import sys

import numpy as np
import pytest

import audiobw
from audiobw.cli import main
from audiobw.errors import ParameterError
from audiobw.metrics import TARGET_KEYS

from .conftest import REPO, tones

HEAVY = ("numpy", "scipy", "scipy.signal", "matplotlib", "dask", "soundfile", "librosa", "audiobw.api")


def test_import_is_lazy():
    code = f"import sys, audiobw; heavy = {HEAVY!r}; print([m for m in heavy if m in sys.modules])"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=REPO)
    assert out.stdout.strip() == "[]"


def test_public_names_resolve():
    for name in (
        "Study",
        "Chain",
        "Grid",
        "Targets",
        "Meter",
        "Listening",
        "Program",
        "sweep",
        "render",
        "write_report",
        "run_batch",
        "SweepResult",
    ):
        assert getattr(audiobw, name) is not None
    with pytest.raises(AttributeError):
        audiobw.NoSuchThing  # noqa: B018


def test_render_stays_callable_once_its_package_is_imported():
    # importing the package audiobw.render sets the attribute audiobw.render: it must still render
    code = (
        "import audiobw, audiobw.render as pkg; from audiobw.render import render_file; "
        "print(audiobw.render is pkg, callable(audiobw.render), callable(render_file))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=REPO)
    assert out.stdout.split() == ["True", "True", "True"]


def test_grid_lowpass_matches_cli_grid_syntax():
    from audiobw import units

    g = audiobw.Grid.lowpass(2000, 20000, 16)
    assert g.response == "lowpass" and len(g.cutoffs_hz) == 16
    assert g.cutoffs_hz == tuple(units.parse_grid("2000:20000:16", name="x"))
    # log spacing: constant ratio 10**(1/15) between neighbours
    ratios = np.diff(np.log10(g.cutoffs_hz))
    assert np.allclose(ratios, 1 / 15, rtol=1e-9)
    h = audiobw.Grid.highpass(10, 500, 8, orders=(2, 4))
    assert h.response == "highpass" and h.orders == (2, 4) and h.cutoffs_hz[0] == pytest.approx(10)
    b = audiobw.Grid.bandpass((10, 400, 4), (2000, 20000, 5))
    assert len(b.low_edges_hz) == 4 and len(b.high_edges_hz) == 5


def test_grid_without_cutoffs_is_refused_in_library_terms(prog):
    study = audiobw.Study(grid=audiobw.Grid(), targets=audiobw.Targets(max_loss_db=0.1))
    with pytest.raises(ParameterError) as exc:
        audiobw.sweep(prog, study)
    msg = str(exc.value)
    assert "Grid.cutoffs_hz" in msg and "--" not in msg


def test_targets_fields_are_the_json_keys():
    import dataclasses

    assert tuple(f.name for f in dataclasses.fields(audiobw.Targets)) == TARGET_KEYS
    t = audiobw.Targets(max_loss_db=0.1, min_snr_a_db=80)
    assert t.to_dict() == {"min_snr_a_db": 80.0, "max_loss_db": 0.1}
    with pytest.raises(ParameterError, match="accepted: .*max_loss_db"):
        audiobw.Targets(max_loss=0.1)


def test_no_target_is_refused_without_flag_names(prog):
    # music and speech programs get default targets (no audible error; SII); a data program has none
    study = audiobw.Study(program=audiobw.Program(kind="data", bit_rate_hz=2000.0))
    with pytest.raises(ParameterError) as exc:
        audiobw.sweep(prog, study)
    assert "Study.targets" in str(exc.value) and "--" not in str(exc.value)


def test_music_study_without_targets_gets_the_audibility_default():
    s = audiobw.Study().settings()
    assert s.targets == {"max_audible_frames_pct": 1.0} and s.default_targets == ("max_audible_frames_pct",)


@pytest.fixture
def prog(write_audio, rng):
    fs = 48000
    x = tones([220.0, 1500.0, 6000.0], [0.2, 0.1, 0.03], fs, 3.0) + rng.normal(0, 1e-3, fs * 3)
    return write_audio("take.wav", np.stack([x, 0.8 * x], axis=1), fs)


def test_library_sweep_writes_what_the_cli_writes(prog, tmp_path, capsys):
    cli_out, lib_out = tmp_path / "cli", tmp_path / "lib"
    code = main(
        [
            "sweep",
            str(prog),
            "--out",
            str(cli_out),
            "--family",
            "butterworth,bessel",
            "--order",
            "2,4",
            "--cutoffs",
            "2k:20k:12",
            "--max-loss",
            "0.2",
            "--min-snr-a",
            "80",
            "--source-ohms",
            "600",
            "--gain",
            "20",
        ]
    )
    capsys.readouterr()
    assert code == 0
    study = audiobw.Study(
        chain=audiobw.Chain(source_ohms=600.0, gain_db=20.0),
        grid=audiobw.Grid.lowpass(2000, 20000, 12, families=("butterworth", "bessel"), orders=(2, 4)),
        targets=audiobw.Targets(max_loss_db=0.2, min_snr_a_db=80),
    )
    result = audiobw.sweep(prog, study, out_dir=lib_out)
    for name in ("sweep.json", "sweep.csv"):
        assert (lib_out / name).read_bytes() == (cli_out / name).read_bytes(), name
    assert result.to_json() == json.loads((cli_out / "sweep.json").read_text())
    # typed rows and the choice
    assert len(result.cases) == 48
    c = result.cases[0]
    assert c.id == 1 and c["family"] == c.family == "butterworth" and c.high_hz > 0
    assert result.choice is not None
    doc_choice = result.to_json()["choice"]
    assert result.choice.case.id == doc_choice["case"]
    assert result.choice.high_hz == result.case(doc_choice["case"]).high_hz
    assert result.choice.low_hz is None
    assert result.choice.binding == doc_choice["binding"]
    with pytest.raises(AttributeError):
        c.id = 3


def test_render_renders_on_every_call(prog, tmp_path):
    # the first call imports the package audiobw.render, which replaces the package attribute:
    # the second call goes through the package and must render the same folders
    study = audiobw.Study(
        grid=audiobw.Grid.lowpass(2000, 20000, 6, families=("butterworth",), orders=(4,)),
        targets=audiobw.Targets(max_loss_db=0.2),
    )
    result = audiobw.sweep(prog, study)
    first = audiobw.render(result, prog, tmp_path / "a", study=study)
    second = audiobw.render(result, prog, tmp_path / "b", study=study)
    assert first and [p.relative_to(tmp_path / "a") for p in first] == [p.relative_to(tmp_path / "b") for p in second]
    wavs = [p for p in first if p.suffix == ".wav"]
    assert wavs and all(p.read_bytes() == (tmp_path / "b" / p.relative_to(tmp_path / "a")).read_bytes() for p in wavs)


def test_default_grid_is_the_cli_default(prog, tmp_path, capsys):
    code = main(["sweep", str(prog), "--out", str(tmp_path / "cli"), "--max-loss", "0.1"])
    capsys.readouterr()
    assert code == 0
    result = audiobw.sweep(prog, audiobw.Study(targets=audiobw.Targets(max_loss_db=0.1)))
    assert result.to_json() == json.loads((tmp_path / "cli" / "sweep.json").read_text())


def test_readme_python_example_runs(prog, tmp_path, monkeypatch):
    text = (REPO / "README.md").read_text()
    block = re.search(r"## Use from Python\n.*?```python\n(.*?)```", text, re.S)
    assert block, "README has no 'Use from Python' example"
    code = block.group(1)
    assert len(code.strip().splitlines()) == 3
    monkeypatch.chdir(tmp_path)
    (tmp_path / "take3.flac").write_bytes(b"")
    import soundfile as sf

    data, fs = sf.read(prog)
    sf.write(tmp_path / "take3.flac", data, fs)
    ns: dict = {}
    exec(compile(code, "README.md", "exec"), ns)
    result = ns["result"]
    assert result.choice is None or result.choice.high_hz > 2000
