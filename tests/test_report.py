"""The spec sheet: spec.json against its schema and against sweep.json, the
figures computed for it against closed forms and scipy, the plots, and the
HTML page (escaping, self-containment, the values it shows)."""

from __future__ import annotations

import json
import math
import re
from html import unescape
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from audiobw.cli import main
from audiobw.clikit import ESTIMATE_CAUTION, LISTENING_CAUTION
from audiobw.filters import FilterSpec, design
from audiobw.report import formatting, measure
from audiobw.report import run as runmod
from audiobw.report.write import write_report
from audiobw.report.figure import log_average

HERE = Path(__file__).parent
SCHEMA = HERE.parent / "docs" / "spec.schema.json"
SCRIPT_NAME = "<script>alert(1)</script>.wav"
CLIP_NAME = "<img src=x onerror=alert(1)>.wav"


def _program(fs: int, seconds: float, seed: int) -> np.ndarray:
    """Band-limited noise plus two tones, about −20 dBFS rms (exactly reproducible)."""
    rng = np.random.default_rng(seed)
    n = int(fs * seconds)
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1 / fs)
    spec *= 1.0 / np.sqrt(1.0 + (f / 3000.0) ** 4) * (f > 40)
    x = np.fft.irfft(spec, n)
    x *= 0.05 / np.std(x)
    t = np.arange(n) / fs
    return x + 0.05 * np.sin(2 * np.pi * 440.0 * t) + 0.02 * np.sin(2 * np.pi * 2500.0 * t)


def make_sweep(folder: Path, values: dict, *, fs: int = 48000, name: str = "take.wav", seed: int = 7) -> Path:
    """Write a program under ``folder`` (``name`` may hold sub-folders) and sweep it into folder/out."""
    from audiobw.jobs import sweep_file
    from audiobw.settings import Raw, build

    src = folder / name
    src.parent.mkdir(parents=True, exist_ok=True)
    sf.write(str(src), _program(fs, 2.0, seed), fs, subtype="FLOAT")
    base = {"source_ohms": "150", "gain": "40dB", "en": "1.3n", "in": "1.2p", "bits": "16", "full_scale": "+4dBu"}
    settings = build({k: Raw(v, f"test {k}") for k, v in {**base, **values}.items()})
    out = folder / "out"
    sweep_file(src, settings, out_dir=out)
    return out


def add_render(out: Path) -> None:
    """A render folder like the renderer's: the A/B pair, the true-level output, one oddly named clip."""
    sub = out / "render-chosen"
    sub.mkdir()
    t = np.arange(4000) / 8000
    for n in ("ab-reference.wav", "ab-processed.wav", "chain-output.wav", CLIP_NAME):
        sf.write(str(sub / n), 0.01 * np.sin(2 * np.pi * 440 * t), 8000, subtype="PCM_16")


@pytest.fixture(scope="module")
def lowpass_run(tmp_path_factory):
    """Analog lowpass sweep of a program whose path reads <script>alert(1)</script>.wav, with render output."""
    root = tmp_path_factory.mktemp("lp")
    out = make_sweep(
        root,
        {
            "response": "lowpass",
            "family": "butterworth,chebyshev1",
            "order": "2,4",
            "cutoffs": "2k:20k:8",
            "ripple": "0.5",
            "min_snr_a": "60dB",
            "max_loss": "0.2dB",
        },
        name="<script>alert(1)</" + "script>.wav",
    )
    add_render(out)
    before = (out / "sweep.json").read_bytes()
    paths = write_report(out)
    return {
        "out": out,
        "paths": paths,
        "sweep_before": before,
        "spec": json.loads(paths["spec_json"].read_text(encoding="utf-8")),
        "doc": json.loads((out / "sweep.json").read_text(encoding="utf-8")),
        "html": paths["html"].read_text(encoding="utf-8"),
    }


@pytest.fixture(scope="module")
def failing_run(tmp_path_factory):
    """Digital-stage bandpass sweep with an SNR target no case can meet."""
    root = tmp_path_factory.mktemp("bp")
    out = make_sweep(
        root,
        {
            "response": "bandpass",
            "family": "bessel,elliptic",
            "order": "2",
            "low_edges": "20:200:3",
            "high_edges": "4k:16k:4",
            "stage": "digital",
            "anti_alias": "ideal",
            "min_snr": "150dB",
            "max_loss": "1dB",
        },
        fs=44100,
    )
    paths = write_report(out)
    return {
        "out": out,
        "paths": paths,
        "spec": json.loads(paths["spec_json"].read_text(encoding="utf-8")),
        "doc": json.loads((out / "sweep.json").read_text(encoding="utf-8")),
        "html": paths["html"].read_text(encoding="utf-8"),
    }


# -- spec.json ----------------------------------------------------------------------


@pytest.mark.parametrize("run", ["lowpass_run", "failing_run"])
def test_spec_json_validates_against_its_schema(run, request):
    # JSON Schema draft 2020-12, checked with jsonschema.Draft202012Validator
    jsonschema = pytest.importorskip("jsonschema")
    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.Draft202012Validator(schema).validate(request.getfixturevalue(run)["spec"])


def test_schema_rejects_a_sheet_that_breaks_the_contract(lowpass_run):
    jsonschema = pytest.importorskip("jsonschema")
    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    bad = json.loads(json.dumps(lowpass_run["spec"]))
    bad["status"] = "no_passing_case"  # a chosen subject with an empty unmet list contradicts it
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft202012Validator(schema).validate(bad)


def test_chosen_sheet_repeats_the_sweep_row(lowpass_run):
    spec, doc = lowpass_run["spec"], lowpass_run["doc"]
    assert spec["status"] == "chosen" and spec["subject"]["case"] == doc["choice"]["case"]
    row = doc["cases"][doc["choice"]["case"] - 1]
    assert spec["filter"]["high_hz"] == row["high_hz"] and spec["filter"]["low_hz"] is None
    assert spec["filter"]["enbw_hz"] == row["enbw_hz"]
    assert spec["noise"]["vrms"] == row["noise_vrms"] and spec["noise"]["dbfs"] == row["noise_dbfs"]
    assert spec["program"]["snr_a_db"] == row["snr_a_db"] and spec["thdn"]["pct"] == row["thdn_pct"]
    assert spec["binding"] == doc["choice"]["binding"]
    assert [t["key"] for t in spec["targets"] if t["binding"]] == [doc["choice"]["binding"]]
    assert spec["caution"] == ESTIMATE_CAUTION
    assert {r["key"] for r in spec["chain"]} == set(doc["chain"])
    assert all(r["unit"] or isinstance(r["value"], str) or r["value"] is None for r in spec["chain"])


def test_noise_figures_agree_across_code_paths(lowpass_run):
    n = lowpass_run["spec"]["noise"]
    # the sweep's scorer (analysis grid) and noise.budget (its own 32768-bin grid) integrate the same model
    assert n["budget_total_vrms"] == pytest.approx(n["vrms"], rel=0.01)
    # dynamic range for a full-scale sine is FS power over noise power, i.e. −noise_dbfs (AES17 dBFS)
    assert n["dynamic_range_db"] == pytest.approx(-n["dbfs"], abs=0.05)
    assert n["a_weighted"]["dbfs"] == pytest.approx(-n["dynamic_range_a_db"], abs=1e-4)
    assert sum(c["share"] for c in n["components"].values()) == pytest.approx(1.0, abs=1e-5)
    # 0 dBu = sqrt(0.6) V rms (common practice)
    assert n["dbu"] == pytest.approx(20 * math.log10(n["vrms"] / math.sqrt(0.6)), abs=1e-4)


def test_neighbours_bracket_the_chosen_case(lowpass_run):
    spec, doc = lowpass_run["spec"], lowpass_run["doc"]
    nb = spec["neighbours"]
    chosen = doc["cases"][spec["subject"]["case"] - 1]
    assert nb["next_narrower"]["id"] == doc["choice"]["next_narrower"]
    assert nb["next_narrower"]["bandwidth_hz"] < chosen["bandwidth_hz"] < nb["next_wider"]["bandwidth_hz"]
    for key in ("next_narrower", "next_wider"):
        assert (nb[key]["family"], nb[key]["order"]) == (chosen["family"], chosen["order"])
    assert nb["runner_up"]["passes"] and nb["runner_up"]["id"] != chosen["id"]
    best = max((c for c in doc["cases"]), key=lambda c: c["ser_db"])
    assert spec["ser_optimum"]["case"] == best["id"]


def test_no_passing_case_block(failing_run):
    spec, doc = failing_run["spec"], failing_run["doc"]
    assert doc["choice"] is None
    assert spec["status"] == "no_passing_case" and spec["subject"]["role"] == "closest"
    assert {u["key"]: u["best"] for u in spec["unmet"]} == doc["unmet"]
    assert "min_snr_db" in doc["unmet"]
    md = failing_run["paths"]["spec_md"].read_text(encoding="utf-8")
    assert "## No passing case" in md and "not a recommendation" in md
    assert 'class="verdict none"' in failing_run["html"] and "No passing case." in failing_run["html"]
    # a digital filter has no response above fs/2; the alias point belongs to the converter
    alias = next(p for p in spec["stopband"] if p["name"] == "alias_of_upper_edge")
    assert alias["attenuation_db"] is None and "digital stage" in alias["note"]


def test_markdown_holds_the_block_and_the_caution(lowpass_run):
    md = lowpass_run["paths"]["spec_md"].read_text(encoding="utf-8")
    for text in (
        "−3 dB upper edge",
        "ENBW",
        "attenuation at 2 × f_high",
        "fs − f_high",
        "group delay at 1 kHz",
        "dBu",
        "A-weighted",
        "dynamic range",
        "THD+N at 997 Hz",
        "Chain assumptions",
        "next narrower",
        "next wider",
        ESTIMATE_CAUTION,
        LISTENING_CAUTION,
    ):
        assert text in md, text


# -- figures computed for the sheet ---------------------------------------------------------


def test_group_delay_of_second_order_butterworth_at_dc():
    # H(s) = ω²/(s² + √2 ω s + ω²): τ(0) = 2ζ/ω = √2/ω (standard second-order result, common practice)
    filt = design(FilterSpec("lowpass", "butterworth", 2, None, 1000.0))
    assert filt.group_delay_s([0.0])[0] == pytest.approx(math.sqrt(2) / (2 * math.pi * 1000.0), rel=1e-9)


@pytest.mark.parametrize("stage", ["analog", "digital"])
@pytest.mark.parametrize("family", ["elliptic", "bessel"])
def test_group_delay_matches_the_phase_slope_from_scipy(stage, family):
    # independent check: −dφ/dω of the unwrapped phase from scipy.signal.freqs_zpk / freqz_zpk (fs given)
    from scipy import signal

    fs = 48000.0
    filt = design(FilterSpec("bandpass", family, 4, 200.0, 6000.0, 0.5, 60.0, stage, fs))
    f = np.linspace(300.0, 5000.0, 20001)
    z, p, k = filt.zpk()
    if stage == "analog":
        _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * f)
    else:
        _, h = signal.freqz_zpk(z, p, k, worN=f, fs=fs)
    slope = -np.gradient(np.unwrap(np.angle(h)), 2 * np.pi * f)
    tau = filt.group_delay_s(f)
    inner = slice(10, -10)
    assert np.max(np.abs(tau[inner] - slope[inner])) < 1e-3 * np.max(np.abs(tau))


def test_stopband_attenuation_of_butterworth_is_its_closed_form():
    # |H|² = 1/(1 + (f/fc)^(2n)) for a Butterworth lowpass (scipy.signal.butter definition)
    fs = 48000.0
    filt = design(FilterSpec("lowpass", "butterworth", 4, None, 1000.0, fs_hz=fs))
    case = {"high_hz": 1000.0, "low_hz": None}
    pts = {p["name"]: p for p in measure.stopband_points(filt, case, fs)}
    assert pts["twice_upper_edge"]["attenuation_db"] == pytest.approx(10 * math.log10(1 + 2.0**8), abs=1e-6)
    assert pts["alias_of_upper_edge"]["freq_hz"] == 47000.0
    assert pts["alias_of_upper_edge"]["attenuation_db"] == pytest.approx(10 * math.log10(1 + 47.0**8), abs=1e-6)


def test_chebyshev_ripple_is_measured_as_designed(lowpass_run):
    doc = lowpass_run["doc"]
    case = next(c for c in doc["cases"] if c["family"] == "chebyshev1" and c["order"] == 4)
    filt = runmod.rebuild_filter(doc, case)
    pb = measure.passband_figures(filt, case, doc)
    # scipy.signal.cheby1: rp is the peak-to-peak passband ripple in dB
    assert pb["ripple_db"] == pytest.approx(0.5, abs=0.005)
    bw = next(c for c in doc["cases"] if c["family"] == "butterworth")
    assert measure.passband_figures(runmod.rebuild_filter(doc, bw), bw, doc)["ripple_db"] == 0.0


def test_log_average_keeps_power_and_thins_the_trace():
    f = np.linspace(0.0, 24000.0, 8193)
    flat = np.full_like(f, 3.0e-9)
    fm, pm = log_average(f, flat, per_decade=100)
    assert np.allclose(pm, 3.0e-9, rtol=1e-12)
    assert fm.size <= 100 * math.log10(24000.0 / f[1]) + 2 and fm.size < 500
    assert np.all(np.diff(fm) > 0) and fm[0] == pytest.approx(f[1])


# -- plots -------------------------------------------------------------------------------------------


def test_plots_are_written_and_decode(lowpass_run, failing_run):
    from PIL import Image  # Pillow, installed with matplotlib

    # music is the default program kind: its sweeps carry the audibility plots (tests/test_report_perceptual.py)
    for run, expect in (
        (lowpass_run, {"metrics-upper-edge", "spectrum", "filter", "noise-budget", "ser", "masking", "wiener"}),
        (
            failing_run,
            {
                "metrics-upper-edge",
                "metrics-lower-edge",
                "spectrum",
                "filter",
                "noise-budget",
                "ser",
                "masking",
                "wiener",
            },
        ),
    ):
        names = {k[len("plot_") : -len("_png")] for k in run["paths"] if k.startswith("plot_") and k.endswith("_png")}
        assert names == expect
        for key, path in run["paths"].items():
            if key.endswith("_png"):
                with Image.open(path) as im:
                    im.verify()
                with Image.open(path) as im:
                    assert im.size[0] >= 600 and im.size[1] >= 300


def test_svg_files_stay_small(lowpass_run, failing_run):
    # dense traces are averaged before plotting (matplotlib issue 22803: huge SVGs from dense data)
    for run in (lowpass_run, failing_run):
        svgs = [p for k, p in run["paths"].items() if k.endswith("_svg")]
        assert len(svgs) >= 4
        for p in svgs:
            assert p.stat().st_size < 300_000, p
            assert "<svg" in p.read_text(encoding="utf-8")[:2000]


# -- the HTML page -------------------------------------------------------------------------------------


def test_html_escapes_every_file_derived_string(lowpass_run):
    page = lowpass_run["html"]
    # our one inline script and nothing else; the input's name and the clip's name render as text
    assert page.count("<script") == 1
    assert "&lt;script&gt;alert(1)&lt;/script&gt;.wav" in page
    assert "<img src=x" not in page and "&lt;img src=x onerror=alert(1)&gt;.wav" in page
    assert 'src="render-chosen/%3Cimg%20src%3Dx%20onerror%3Dalert%281%29%3E.wav"' in page


def test_html_is_self_contained(lowpass_run):
    page = lowpass_run["html"]
    assert "Content-Security-Policy" in page and "default-src 'none'" in unescape(page)
    assert not re.search(r'(?:src|href)="(?:https?:)?//', page)
    imgs = re.findall(r'<img src="([^"]+)"', page)
    assert len(imgs) == 7 and all(s.startswith("data:image/png;base64,") for s in imgs)  # 5 + masking, wiener


def test_html_audio_players_and_listening_caution(lowpass_run):
    page, out = lowpass_run["html"], lowpass_run["out"]
    srcs = re.findall(r'<audio controls preload="metadata" src="([^"]+)"', page)
    assert [s.split("/")[-1] for s in srcs[:2]] == ["ab-reference.wav", "ab-processed.wav"]
    assert len(srcs) == 3  # the A/B pair and the other clip; the true-level output is linked, not played
    from urllib.parse import unquote

    for s in srcs:
        assert (out / unquote(unescape(s))).is_file()
    listen = page[page.index('<section id="listen">') :]
    listen = listen[: listen.index("</section>")]
    assert "start playback at a low volume" in listen and listen.count("<audio") == 3
    assert "chain-output.wav" in listen and "linked rather than offered as a player" in listen


_PREFIX = {"p": 1e-12, "n": 1e-9, "µ": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3, "M": 1e6}


def shown_number(text: str) -> float:
    """The first number in a shown value, with its SI prefix applied."""
    m = re.match(
        r"\s*([+-−]?\d+(?:\.\d+)?(?:e[+-]?\d+)?)\s*([pnµmkM]?)(?:Hz|V|s|dB|%|Ω|A|K|bit|\b|$)", text.replace("−", "-")
    )
    assert m, text
    return float(m.group(1)) * _PREFIX[m.group(2)]


def check_shown_values(items, spec) -> int:
    """Each shown value: its data-value is the spec.json value, and its text shows it to 3 digits or better."""
    checked = 0
    for key, value_json, text in items:
        expected = formatting.json_pointer(spec, key)
        assert json.loads(value_json) == expected, key
        if isinstance(expected, (int, float)) and not isinstance(expected, bool) and not text.startswith("—"):
            shown = shown_number(text)
            assert shown == pytest.approx(expected, rel=5e-3, abs=6e-3), (key, text, expected)
            checked += 1
    return checked


def test_html_values_equal_spec_json(lowpass_run):
    items = [
        (unescape(k), unescape(v), unescape(t))
        for k, v, t in re.findall(r'data-spec="([^"]+)" data-value="([^"]*)">([^<]*)<', lowpass_run["html"])
    ]
    assert len(items) >= 30
    assert check_shown_values(items, lowpass_run["spec"]) >= 25


def test_case_table_lists_every_case(lowpass_run):
    page, doc = lowpass_run["html"], lowpass_run["doc"]
    body = page[page.index('<table id="case-table">') :]
    body = body[: body.index("</table>")]
    assert body.count("<tr") == len(doc["cases"]) + 1
    assert body.count('class="subject"') == 1


# -- the command ---------------------------------------------------------------------------------------


def test_report_leaves_inputs_alone_and_is_deterministic(lowpass_run):
    out = lowpass_run["out"]
    assert (out / "sweep.json").read_bytes() == lowpass_run["sweep_before"]
    first = {k: p.read_bytes() for k, p in lowpass_run["paths"].items()}
    again = write_report(out)
    for key in ("spec_json", "spec_md", "html", "plot_filter_svg", "plot_ser_png"):
        assert again[key].read_bytes() == first[key], key


def test_cli_report(lowpass_run, capsys):
    assert main(["report", str(lowpass_run["out"])]) == 0
    captured = capsys.readouterr()
    assert "Chosen: case" in captured.out and ESTIMATE_CAUTION in captured.out
    assert LISTENING_CAUTION in captured.out  # render clips are present


def test_cli_report_refuses_bad_folders(tmp_path, capsys, lowpass_run):
    assert main(["report", str(tmp_path / "nowhere")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "is not a folder" in err and "Traceback" not in err
    assert main(["report", str(tmp_path)]) == 2
    assert "holds no sweep.json" in capsys.readouterr().err
    (tmp_path / "sweep.json").write_text('{"tool": "other"}', encoding="utf-8")
    assert main(["report", str(tmp_path)]) == 1
    assert "not a sweep.json written by audiobw" in capsys.readouterr().err
    # a spectrum.npz from another program is refused
    other = tmp_path / "mixed"
    other.mkdir()
    (other / "sweep.json").write_bytes((lowpass_run["out"] / "sweep.json").read_bytes())
    np.savez(
        other / "spectrum.npz",
        freqs_hz=np.zeros(3),
        psd=np.zeros(3),
        weights_hz=np.zeros(3),
        sample_rate_hz=np.int64(48000),
        sha256=np.str_("0" * 64),
    )
    assert main(["report", str(other)]) == 1
    assert "is not the one in sweep.json" in capsys.readouterr().err


def test_highpass_without_spectrum_file(tmp_path):
    """A highpass sweep (lower edge only) whose folder has no spectrum.npz: the sheet and the page still come,
    with the spectrum plot left out and the half-lower-edge stopband point given."""
    out = make_sweep(
        tmp_path,
        {
            "response": "highpass",
            "family": "butterworth",
            "order": "2,3",
            "cutoffs": "20:200:4",
            "max_loss": "0.5dB",
            "anti_alias": "ideal",
        },
    )
    (out / "spectrum.npz").unlink()
    paths = write_report(out)
    spec = json.loads(paths["spec_json"].read_text(encoding="utf-8"))
    assert spec["sweep"]["spectrum_file"] is None and spec["filter"]["high_hz"] is None
    assert [p["name"] for p in spec["stopband"]] == ["half_lower_edge"]
    # Butterworth highpass: |H|² = 1/(1 + (fc/f)^(2n)); at fc/2 that is 10·lg(1 + 2^(2n)) dB down
    n, p = spec["filter"]["order"], spec["stopband"][0]
    assert p["attenuation_db"] == pytest.approx(10 * math.log10(1 + 2.0 ** (2 * n)), abs=1e-6)
    names = {k for k in paths if k.startswith("plot_") and k.endswith("_png")}
    assert names == {"plot_metrics-lower-edge_png", "plot_filter_png", "plot_noise-budget_png", "plot_ser_png"}
    assert "render-" not in paths["html"].read_text(encoding="utf-8")
