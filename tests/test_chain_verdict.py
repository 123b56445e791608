"""Issue 13: the verdict in words — data-mode printing, targets tables, batch accounting, occupied band."""

from __future__ import annotations

import json
import re

import pytest

from audiobw.cli import main

from .conftest import clean_stream, sweep_data_stream


@pytest.fixture(scope="module")
def clean_link(tmp_path_factory):
    """A 1200 bit/s stream swept with a BER target: its BER underflows a double (exactly 0)."""
    return clean_stream(tmp_path_factory, "link")


def test_data_sweep_with_an_underflowing_ber_prints_a_verdict(clean_link, capsys):
    d, stream = clean_link
    out = d / "s"
    capsys.readouterr()
    code = main(
        [
            "sweep",
            str(stream),
            "--program",
            "data",
            "--bit-rate",
            "1200",
            "--max-ber",
            "1e-9",
            "--response",
            "lowpass",
            "--family",
            "butterworth",
            "--order",
            "4",
            "--cutoffs",
            "2k:8k:3",
            "--out",
            str(out),
        ]
    )
    text = capsys.readouterr().out
    assert code == 0, text
    doc = json.loads((out / "sweep.json").read_text())
    chosen = next(c for c in doc["cases"] if c["id"] == doc["choice"]["case"])
    assert chosen["ber"] < 1e-300  # the premise: the Gaussian tail underflows
    assert "BER < 1e-300" in text
    assert "0.00e+00" not in text
    assert "margin beyond the double range" in text
    # the spec sheet and the page print BER as a number, never in dB
    assert main(["report", str(out)]) == 0
    md = (out / "spec.md").read_text()
    html = (out / "report.html").read_text()
    assert "| bit-error rate ≤ 1e-09 | < 1e-300 | beyond the double range |" in md
    assert "e-300 dB" not in md and "0.00 dB" not in md.split("### Targets")[1].split("###")[0]
    assert "&lt; 1e-300</td>" in html
    # bold markers close without a space before the closing **
    bold = re.findall(r"\*\*(.+?)\*\*", md)
    assert bold and all(b == b.strip() for b in bold), [b for b in bold if b != b.strip()]
    assert "Bound by **bit-error rate ≤ 1e-09**" in md


def test_eye_target_prints_as_a_percentage(tmp_path, capsys):
    stream = tmp_path / "b.flac"
    assert main(["bits", "--bit-rate", "1200", "--bits-count", "1024", "--out", str(stream)]) == 0
    out = tmp_path / "s"
    assert sweep_data_stream(stream, out, "1k:8k:3") == 0
    assert main(["report", str(out)]) == 0
    md = (out / "spec.md").read_text()
    targets = md.split("### Targets")[1].split("###")[0]
    row = next(line for line in targets.splitlines() if line.startswith("| eye opening"))
    assert "% of the unfiltered eye" in row and " dB |" not in row.split("|")[2]
    # the limit reads in the same unit as the value: 50 %, not 0.5 beside 54.8 %
    assert row.startswith("| eye opening ≥ 50 % of the unfiltered eye |"), row


def test_occupied_band_per_channel(tmp_path, capsys):
    """A loud 1 kHz left channel and a quiet white-noise right channel: the summed band is the tone's,
    the right channel's own band spans nearly 0…fs/2 (white noise: 0.5 % tails at 0.005·fs/2 and 0.995·fs/2)."""
    import numpy as np

    from .conftest import tones, write

    fs = 48000
    rng = np.random.default_rng(13)
    left = tones([1000.0], [0.5], fs, 2.0)
    right = 0.003 * rng.standard_normal(left.size)
    path = write(tmp_path / "st.wav", np.column_stack([left, right]), fs)
    out = tmp_path / "o"
    assert main(["sweep", str(path), "--cutoffs", "4k,12k", "--order", "2", "--max-loss", "1", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    inp = json.loads((out / "sweep.json").read_text())["input"]
    assert inp["occupied_basis"] == "power summed over channels"
    ch1, ch2 = inp["occupied_channels"]
    assert ch1["occupied_low_hz"] > 900 and ch1["occupied_high_hz"] < 1100
    # white noise: equal tails of 0.5 % at 0.005 and 0.995 of fs/2 (definition of the occupied band)
    assert ch2["occupied_low_hz"] == pytest.approx(0.005 * fs / 2, abs=150)
    assert ch2["occupied_high_hz"] == pytest.approx(0.995 * fs / 2, abs=150)
    # the summed figure follows the loud channel
    assert inp["occupied_high_hz"] < 5000
    assert "taken over the power summed across 2 channels (per channel: ch 1" in text
