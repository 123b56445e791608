"""Issue 13: levels as an engineer states them — at the source, gain scaling program and noise together."""

from __future__ import annotations

import json
import math

import pytest

from audiobw.cli import main
from audiobw.errors import ParameterError
from audiobw.settings import Raw, build

from .conftest import REPO

CLIP = str(REPO / "clips" / "announcement-44k1-mono.flac")


def _sweep(tmp_path, name, *extra):
    out = tmp_path / name
    assert (
        main(["sweep", CLIP, "--cutoffs", "4k,8k", "--order", "4", "--max-loss", "1", "--out", str(out), *extra]) == 0
    )
    return json.loads((out / "sweep.json").read_text())


def test_gain_scales_program_and_source_noise_together(tmp_path):
    """With the level stated at the source, 40 dB more gain leaves the source-limited SNR alone
    (program and source noise both rise 40 dB) and takes 40 dB off the headroom; today the same
    change with the level pinned at the converter only lowered the SNR."""
    lo = _sweep(tmp_path, "g20", "--source-level", "-50dBu", "--gain", "20", "--source-ohms", "150")
    hi = _sweep(tmp_path, "g60", "--source-level", "-50dBu", "--gain", "60", "--source-ohms", "150")
    a, b = lo["cases"][0], hi["cases"][0]
    assert abs(b["snr_db"] - a["snr_db"]) < 0.5  # the source and amplifier noise set it at both gains
    assert b["snr_db"] >= a["snr_db"] - 1e-6  # more gain never worsens it (converter noise shrinks)
    assert a["headroom_db"] - b["headroom_db"] == pytest.approx(40.0, abs=1e-3)
    # headroom: full-scale peak over the program's peak at the converter, from the program's own levels
    inp = lo["input"]
    program_at_converter_dbu = -50 + 20
    fs_dbu = 20 * math.log10(lo["chain"]["full_scale_vrms"] / math.sqrt(0.6))
    crest = inp["peak_dbfs"] - inp["rms_dbfs"] + 20 * math.log10(math.sqrt(2))  # peak over rms, dB
    assert a["headroom_db"] == pytest.approx(
        fs_dbu + 20 * math.log10(math.sqrt(2)) - program_at_converter_dbu - crest, abs=0.01
    )


def test_headroom_target_fails_a_clipping_gain(tmp_path, capsys):
    doc = _sweep(tmp_path, "clip", "--source-level", "-50dBu", "--gain", "60", "--min-headroom", "3")
    assert doc["choice"] is None and all("min_headroom_db" in c["fails"] for c in doc["cases"])
    assert "Cannot be met: headroom ≥ 3 dB" in capsys.readouterr().out


def test_spl_and_sensitivity_give_the_source_level():
    # 94 dB SPL = 1.0024 Pa (re 20 µPa, ISO 1683); at 10 mV/Pa that is 10.02 mV rms
    s = build({"spl": Raw("94", "--spl"), "mic_sensitivity": Raw("10mV/Pa", "--mic-sensitivity")})
    assert s.source_vrms == pytest.approx(20e-6 * 10 ** (94 / 20) * 0.010, rel=1e-9)
    assert s.source_vrms == pytest.approx(0.010024, rel=1e-4)
    s2 = build({"spl": Raw("94", "--spl"), "mic_sensitivity": Raw("-40dBV/Pa", "--mic-sensitivity")})
    assert s2.source_vrms == pytest.approx(s.source_vrms, rel=1e-9)


@pytest.mark.parametrize(
    "raw,words",
    [
        (
            {"input_level": Raw("-18dBFS", "--input-level"), "source_level": Raw("-50dBu", "--source-level")},
            "--input-level: states the level at the converter",
        ),
        ({"spl": Raw("94", "--spl")}, "--spl: needs --mic-sensitivity"),
        (
            {
                "mic_sensitivity": Raw("1V", "--mic-sensitivity"),
                "spl": Raw("94", "--spl"),
                "source_level": Raw("1mV", "--source-level"),
            },
            "not both",
        ),
    ],
)
def test_conflicting_levels_are_refused(raw, words):
    with pytest.raises(ParameterError, match=words):
        build(raw)


def test_cli_refuses_both_levels_in_one_line(tmp_path, capsys):
    code = main(["sweep", CLIP, "--input-level", "-18dBFS", "--source-level", "-50dBu", "--out", str(tmp_path / "x")])
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err and len(err.strip().splitlines()) == 1


def test_absurd_values_warn(capsys):
    # --en 1.2 (the n forgotten) is past the physical range (1 mV/√Hz): refused, naming the prefixes that fit
    assert main(["noise", "--band", "20:20k", "--en", "1.2"]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "--en: '1.2' is outside the physical range" in err
    assert "1.2u, 1.2n" in err
    # --en 20u is in range but no amplifier: 20 µV/√Hz × 100 (40 dB) × √20 kHz ≈ 0.283 V rms, a warning
    assert main(["noise", "--band", "20:20k", "--en", "20u"]) == 0
    err = capsys.readouterr().err
    assert "warning: --en 2e-05 V/√Hz" in err and "0.283 V rms" in err and "prefix left off" in err
    # -20 dBu + 60 dB = +40 dBu at a converter whose full scale is +4 dBu: it clips
    assert main(["noise", "--band", "20:20k", "--source-level", "-20dBu", "--gain", "60"]) == 0
    assert "the converter clips" in capsys.readouterr().err


def test_default_chain_is_stated(capsys):
    assert main(["noise", "--band", "20:20k"]) == 0
    out = capsys.readouterr().out
    assert "No chain given; the defaults were used: Rs 200 Ω at 290 K, gain 40 dB, e_n 1.5 nV/√Hz" in out
    assert main(["noise", "--band", "20:20k", "--gain", "30"]) == 0
    assert "No chain given" not in capsys.readouterr().out
