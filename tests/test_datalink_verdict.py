"""Issue 13, data mode: the verdict explains the Nyquist minimum, prints BER and Q with sense."""

from __future__ import annotations

import json
import math

import pytest


from .conftest import clean_stream, sweep_data_stream
from audiobw.report.text import Q_FLOOR, q_text


@pytest.fixture(scope="module")
def narrow_choice(tmp_path_factory):
    """A clean 1200 bit/s stream with an eye target a Bessel 4 below 600 Hz meets."""
    return clean_stream(tmp_path_factory, "v")


def test_a_choice_below_the_nyquist_minimum_is_explained(narrow_choice, capsys):
    d, stream = narrow_choice
    capsys.readouterr()
    out = d / "s"
    assert sweep_data_stream(stream, out, "300:8k:8") == 0
    text = capsys.readouterr().out
    doc = json.loads((out / "sweep.json").read_text())
    chosen = next(c for c in doc["cases"] if c["id"] == doc["choice"]["case"])
    assert chosen["bandwidth_hz"] < doc["data"]["nyquist_min_hz"]  # the premise
    line = next(ln for ln in text.splitlines() if "narrower than 1/(2T)" in ln)
    assert "a shaped pulse can pass below the Nyquist minimum at a cost in eye" in line
    assert f"{100 * chosen['eye_fraction']:.1f} % of the unfiltered opening" in line
    assert "measured on the recorded stream" in text


def test_a_choice_above_the_nyquist_minimum_needs_no_explanation(narrow_choice, capsys):
    d, stream = narrow_choice
    capsys.readouterr()
    assert sweep_data_stream(stream, d / "w", "1k:8k:3") == 0
    assert "narrower than 1/(2T)" not in capsys.readouterr().out


def test_q_reads_as_a_number_with_sense():
    # math.erfc: ½·erfc(Q/√2) is below 1e-300 from Q_FLOOR on, and above it 0.1 lower
    # (abs=0: pytest.approx's default absolute floor of 1e-12 would pass any such number)
    assert 0.5 * math.erfc(Q_FLOOR / math.sqrt(2)) < 1e-300 < 0.5 * math.erfc((Q_FLOOR - 0.1) / math.sqrt(2))
    assert 0.5 * math.erfc(Q_FLOOR / math.sqrt(2)) == pytest.approx(1.4e-301, rel=0.05, abs=0)
    assert q_text(9.816) == "9.82 (19.8 dB; half the noiseless eye over the noise σ)"
    big = q_text(5287.0)
    assert big.startswith("5.29e+03 (74.5 dB;") and "below 1e-300" in big
    assert q_text(None).startswith("unbounded") and q_text(0.0).startswith("0 (the eye is closed)")
