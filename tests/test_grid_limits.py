"""Grid limits on every edge of every response (audiobw.choice.grid_limits, the sweep text)."""

import json

import numpy as np
import pytest

from audiobw.cli import main
from audiobw.sweep import choose, grid_limits


def row(id, response, lo, hi, bw, *, passes=True, order=4):
    return {
        "id": id,
        "response": response,
        "family": "butterworth",
        "order": order,
        "design_low_hz": lo,
        "design_high_hz": hi,
        "bandwidth_hz": bw,
        "enbw_hz": bw * 1.03,
        "passes": passes,
        "fails": [] if passes else ["max_loss_db"],
        "margins_db": {"max_loss_db": 0.1 if passes else -0.1},
    }


def test_lowpass_at_the_lowest_cutoff_is_limited_and_at_the_highest_is_not():
    cases = [row(1, "lowpass", None, 2000.0, 2000.0), row(2, "lowpass", None, 8000.0, 8000.0)]
    assert grid_limits(cases[0], cases) == [{"edge": "high", "end": "lowest", "design_hz": 2000.0, "extend": "below"}]
    assert grid_limits(cases[1], cases) == []


def test_highpass_at_the_highest_cutoff_is_limited():
    cases = [row(1, "highpass", 20.0, None, 23980.0), row(2, "highpass", 200.0, None, 23800.0)]
    assert grid_limits(cases[1], cases) == [{"edge": "low", "end": "highest", "design_hz": 200.0, "extend": "above"}]
    assert grid_limits(cases[0], cases) == []


def test_bandpass_flags_each_edge_at_either_end_of_its_own_grid():
    lows, highs = (100.0, 300.0, 600.0), (2000.0, 4000.0, 8000.0)
    cases = [
        row(i, "bandpass", lo, hi, hi - lo)
        for i, (lo, hi) in enumerate(((lo, hi) for lo in lows for hi in highs), start=1)
    ]
    by_edges = {(c["design_low_hz"], c["design_high_hz"]): c for c in cases}
    limits = grid_limits(by_edges[(600.0, 2000.0)], cases)
    assert {(x["edge"], x["end"], x["extend"]) for x in limits} == {
        ("low", "highest", "above"),
        ("high", "lowest", "below"),
    }
    limits = grid_limits(by_edges[(100.0, 8000.0)], cases)
    assert {(x["edge"], x["end"]) for x in limits} == {("low", "lowest"), ("high", "highest")}
    assert grid_limits(by_edges[(300.0, 4000.0)], cases) == []


def test_a_bandpass_at_its_lowest_upper_edge_is_grid_limited_though_a_narrower_case_exists():
    """The case in the issue: a narrower case of the same design exists (a higher low
    edge that fails), so the old rule said grid_limited false; the upper edge sits at
    the bottom of its grid."""
    cases = [
        row(1, "bandpass", 500.0, 1100.0, 600.0),
        row(2, "bandpass", 800.0, 1100.0, 300.0, passes=False),
        row(3, "bandpass", 500.0, 3000.0, 2500.0),
        row(4, "bandpass", 800.0, 3000.0, 2200.0),
        row(5, "bandpass", 300.0, 1100.0, 800.0),
        row(6, "bandpass", 300.0, 3000.0, 2700.0),
    ]
    choice, _ = choose(cases, {"max_loss_db": 0.5})
    assert choice["case"] == 1 and choice["next_narrower"] == 2
    assert choice["grid_limited"] is True
    assert choice["grid_limits"] == [{"edge": "high", "end": "lowest", "design_hz": 1100.0, "extend": "below"}]


def _ring(write_audio, rng):
    """A two-tone ring at 867 and 1071 Hz (invented, like a telephone ringer), −7 dBFS rms."""
    fs = 48000
    t = np.arange(3 * fs) / fs
    x = 0.3 * np.sin(2 * np.pi * 867.0 * t) + 0.3 * np.sin(2 * np.pi * 1071.0 * t) + rng.normal(0, 1e-4, t.size)
    return write_audio("ring.wav", x, fs)


def _sweep(args, out, capsys):
    code = main([str(a) for a in ["sweep", *args, "--out", out]])
    stdout, err = capsys.readouterr()
    assert code == 0, err
    return stdout, json.loads((out / "sweep.json").read_text())


def test_two_tone_ring_says_the_grid_stopped_it_and_extending_finds_narrower(write_audio, rng, tmp_path, capsys):
    ring = _ring(write_audio, rng)
    common = ["--response", "bandpass", "--family", "butterworth", "--order", "4", "--max-loss", "0.5"]
    text1, doc1 = _sweep([ring, *common, "--low-edges", "100:600:5", "--high-edges", "2k:8k:5"], tmp_path / "a", capsys)
    c1 = doc1["cases"][doc1["choice"]["case"] - 1]
    assert (c1["design_low_hz"], c1["design_high_hz"]) == (600.0, 2000.0)
    assert doc1["choice"]["grid_limited"] is True
    assert {(x["edge"], x["end"]) for x in doc1["choice"]["grid_limits"]} == {("low", "highest"), ("high", "lowest")}
    assert "extend --low-edges above 600 Hz" in text1 and "extend --high-edges below 2 kHz" in text1
    # following the advice: the grid extended past both limits finds a passband hugging the tones
    text2, doc2 = _sweep(
        [ring, *common, "--low-edges", "300:850:12", "--high-edges", "1.1k:3k:12"], tmp_path / "b", capsys
    )
    c2 = doc2["cases"][doc2["choice"]["case"] - 1]
    assert c2["enbw_hz"] < 0.5 * c1["enbw_hz"]
    assert c2["low_hz"] < 867.0 and c2["high_hz"] > 1071.0
    # still at the bottom of the upper edges' grid, though a narrower case of the same design
    # exists (a higher low edge, which fails): flagged all the same
    assert doc2["choice"]["next_narrower"] is not None
    assert doc2["choice"]["grid_limits"] == [{"edge": "high", "end": "lowest", "design_hz": 1100.0, "extend": "below"}]
    assert "extend --high-edges below 1.1 kHz" in text2


def test_no_passing_case_notes_the_grid_end_of_the_closest(write_audio, rng, tmp_path, capsys):
    ring = _ring(write_audio, rng)
    text, doc = _sweep(
        [ring, "--family", "butterworth", "--order", "2", "--cutoffs", "200:500:4", "--max-loss", "0.5"],
        tmp_path / "n",
        capsys,
    )
    assert doc["choice"] is None
    assert any("highest" in n and "extend --cutoffs above 500 Hz" in n for n in doc["notes"])
    assert "extend --cutoffs above 500 Hz" in text


@pytest.mark.parametrize(
    "response,edges,expect",
    [
        ("lowpass", ["--cutoffs", "1.8k:6k:4"], "extend --cutoffs below 1.8 kHz"),
        # a highpass passes noise to infinite frequency: the ideal anti-alias filter bounds it
        ("highpass", ["--cutoffs", "100:500:4", "--anti-alias", "ideal"], "extend --cutoffs above 500 Hz"),
    ],
)
def test_lowpass_and_highpass_name_the_option_to_extend(write_audio, rng, tmp_path, capsys, response, edges, expect):
    ring = _ring(write_audio, rng)
    text, doc = _sweep(
        [ring, "--response", response, "--family", "butterworth", "--order", "4", *edges, "--max-loss", "0.5"],
        tmp_path / response,
        capsys,
    )
    assert doc["choice"]["grid_limited"] is True and expect in text
