"""The report's audibility plots (masked threshold against the error per critical band, and
|H|² against the Wiener gain): written, referenced from the page, and drawn from the same
numbers the sweep scored — the band the verdict names is the band the plot shades."""

from __future__ import annotations

import json
import math
import re
from html import unescape

import numpy as np
import pytest

from audiobw.report import run as runmod
from audiobw.report.write import write_report
from audiobw.report.perceptual_plots import masking_plot, perceptual_scorer, wiener_plot
from audiobw.report.plots import make_plots
from audiobw.report.text import closing_paragraph
from audiobw.units import format_quantity

from .test_report import make_sweep


RUNS = {
    # speech with an SII target: the next narrower case is heard in every frame
    "speech": {"cutoffs": "300:8k:10", "program": "speech", "min_sii": "0.75"},
    # music with the default target (no audible error): the next narrower case (16.8 kHz)
    # is heard in about a quarter of the frames, in 15.5-20 kHz
    "music": {"cutoffs": "3k:20k:12", "program": "music"},
}


@pytest.fixture(scope="module", params=sorted(RUNS))
def run(request, tmp_path_factory):
    """A lowpass sweep whose choice has a next-narrower case that fails, and its report."""
    root = tmp_path_factory.mktemp(request.param)
    out = make_sweep(root, {"response": "lowpass", "family": "butterworth", "order": "4", **RUNS[request.param]})
    paths = write_report(out)
    return {
        "out": out,
        "paths": paths,
        "doc": json.loads((out / "sweep.json").read_text(encoding="utf-8")),
        "spec": json.loads(paths["spec_json"].read_text(encoding="utf-8")),
        "html": paths["html"].read_text(encoding="utf-8"),
    }


def _rebuilt(run):
    """The scorer and plots rebuilt from the folder as the report does."""
    from audiobw.report.run import rebuild_chain, rebuild_filter
    from audiobw.report.validate import load_spectrum

    doc, spec = run["doc"], run["spec"]
    chain = rebuild_chain(doc)
    scorer = perceptual_scorer(doc, load_spectrum(run["out"] / "spectrum.npz", doc), chain)
    filt = rebuild_filter(doc, doc["cases"][spec["subject"]["case"] - 1])
    return doc, spec, scorer, chain, filt


def test_both_plots_are_written_and_referenced(run):
    out, html = run["out"], run["html"]
    for name in ("masking", "wiener"):
        for ext, magic in (("png", b"\x89PNG\r\n\x1a\n"), ("svg", b"<")):
            p = out / f"plot-{name}.{ext}"
            assert p.is_file() and p.stat().st_size > 1000, p
            assert p.read_bytes()[:20].lstrip().startswith(magic)
        assert f'<figure id="plot-{name}">' in html
        assert f'href="plot-{name}.png"' in html and f'href="plot-{name}.svg"' in html
    from PIL import Image  # Pillow, installed with matplotlib

    for name in ("masking", "wiener"):
        with Image.open(out / f"plot-{name}.png") as im:
            im.verify()
    # a caption line each, with units on the axes (read from the SVG text)
    svg = (out / "plot-masking.svg").read_text(encoding="utf-8")
    assert "dB SPL" in svg and "[Hz]" in svg and "[%]" in svg
    svg = (out / "plot-wiener.svg").read_text(encoding="utf-8")
    assert "power gain [dB]" in svg and "frequency [Hz]" in svg


def test_masking_plot_data_is_the_sweeps_verdict(run):
    doc, spec, scorer, chain, _ = _rebuilt(run)
    assert spec["status"] == "chosen" and doc["choice"]["next_narrower"]
    plot = masking_plot(doc, spec, scorer, chain)
    nn = doc["cases"][doc["choice"]["next_narrower"] - 1]
    subject = doc["cases"][doc["choice"]["case"] - 1]
    for case in (subject, nn):
        d = plot.data["cases"][case["id"]]
        # the same frames × bands comparison the sweep scored (sweep.json keeps 7 digits)
        assert d["audible_frames_pct"] == pytest.approx(case["audible_frames_pct"], rel=1e-6, abs=1e-9)
        assert d["nmr_db"] == pytest.approx(case["nmr_db"], abs=1e-5)
        if case["audible_band_hz"] is None:
            assert d["audible_band_hz"] is None
        else:  # sweep.json gives the band edges to 6 digits
            assert d["audible_band_hz"] == pytest.approx(case["audible_band_hz"], rel=5e-6)
        if case["audible_band_pct"] is not None:
            assert max(d["over_pct_by_band"]) == pytest.approx(case["audible_band_pct"], rel=1e-6)
    # the next-narrower case is heard: in the frame shown its error is above the threshold somewhere
    d = plot.data["cases"][nn["id"]]
    assert nn["audible_band_hz"] is not None
    assert np.any(d["error_db"] > plot.data["mask_db"])
    # and the band the verdict text names is the one the plot's data puts above threshold most often
    lo, hi = d["audible_band_hz"]
    text = closing_paragraph(doc)
    assert f"{format_quantity(lo, 'Hz')} to {format_quantity(hi, 'Hz')}" in text
    assert f"{nn['audible_band_pct']:.0f} % of frames" in text
    caption = unescape(re.search(r'<figure id="plot-masking">.*?</figure>', run["html"], re.S).group(0))
    assert f"{lo:.4g}–{hi:.4g} Hz" in caption


def test_masking_plot_levels_are_at_the_playback_level(run):
    # Independent: the frame's band powers summed over all frames, in dB SPL, give the
    # playback level back (the program's rms is heard at limits.playback_spl_db).
    doc, spec, scorer, chain, _ = _rebuilt(run)
    total = float(np.sum(scorer.frames)) / scorer.frames.shape[0]
    assert 10 * math.log10(total) == pytest.approx(doc["limits"]["playback_spl_db"], abs=0.5)
    plot = masking_plot(doc, spec, scorer, chain)
    # the masked threshold is never below the threshold in quiet (Johnston 1988: max of the two)
    assert np.all(plot.data["mask_db"] >= plot.data["quiet_db"] - 1e-9)


def test_wiener_plot_data_is_the_sweeps_bound(run):
    doc, spec, scorer, chain, filt = _rebuilt(run)
    plot = wiener_plot(doc, spec, scorer, chain, filt)
    subject = doc["cases"][spec["subject"]["case"] - 1]
    assert plot.data["wiener_ser_db"] == pytest.approx(doc["limits"]["wiener_ser_db"], abs=1e-4)
    assert plot.data["wiener_gap_db"] == pytest.approx(subject["wiener_gap_db"], abs=1e-4)
    # |H|² drawn is the designed filter's power response (Filter.power_response, another code path)
    f = plot.data["freqs_hz"]
    assert np.allclose(plot.data["h2_db"], 10 * np.log10(np.maximum(filt.power_response(f), 1e-300)), atol=1e-6)
    # the Wiener gain is a gain: 0 < S/(S+N) ≤ 1
    assert np.all(plot.data["gain_db"] <= 1e-12)


def test_no_perceptual_plots_without_the_frames(run):
    # a spectrum.npz from before band_frames were saved: the report leaves the two plots out
    doc = run["doc"]
    with np.load(run["out"] / "spectrum.npz", allow_pickle=False) as z:
        spectrum = {k: z[k] for k in z.files if k != "band_frames"}
    assert perceptual_scorer(doc, spectrum, runmod.rebuild_chain(doc)) is None
    names = [p.name for p in make_plots({"doc": doc, "spectrum": spectrum}, run["spec"])]
    assert "masking" not in names and "wiener" not in names and "spectrum" in names


@pytest.mark.parametrize(
    "frames, match",
    [
        (np.ones((4, 3)), r"band_frames has shape \(4, 3\)"),
        (-np.ones((4, 1)), "negative"),
    ],
)
def test_bad_band_frames_are_refused_in_one_line(run, tmp_path, frames, match):
    from audiobw.errors import AudioFileError
    from audiobw.report.validate import load_spectrum

    doc = run["doc"]
    with np.load(run["out"] / "spectrum.npz", allow_pickle=False) as z:
        arrays = {k: z[k] for k in z.files}
    bands = arrays["band_edges_hz"].size - 1
    arrays["band_frames"] = frames if frames.shape[1] == 3 else -np.ones((4, bands))
    np.savez(tmp_path / "spectrum.npz", **arrays)
    with pytest.raises(AudioFileError, match=match):
        load_spectrum(tmp_path / "spectrum.npz", doc)
