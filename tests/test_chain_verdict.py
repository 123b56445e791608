"""Issue 13: the verdict in words — data-mode printing, targets tables, batch accounting, occupied band."""

from __future__ import annotations

import json
import re

import pytest

from audiobw.cli import main


@pytest.fixture(scope="module")
def clean_link(tmp_path_factory):
    """A 1200 bit/s stream swept with a BER target: its BER underflows a double (exactly 0)."""
    d = tmp_path_factory.mktemp("link")
    stream = d / "b.flac"
    assert main(["bits", "--bit-rate", "1200", "--bits-count", "1024", "--out", str(stream)]) == 0
    return d, stream


def test_data_sweep_with_an_underflowing_ber_prints_a_verdict(clean_link, capsys):
    d, stream = clean_link
    out = d / "s"
    capsys.readouterr()
    code = main(["sweep", str(stream), "--program", "data", "--bit-rate", "1200", "--max-ber", "1e-9",
                 "--response", "lowpass", "--family", "butterworth", "--order", "4", "--cutoffs", "2k:8k:3",
                 "--out", str(out)])
    text = capsys.readouterr().out
    assert code == 0, text
    doc = json.loads((out / "sweep.json").read_text())
    chosen = next(c for c in doc["cases"] if c["id"] == doc["choice"]["case"])
    assert chosen["ber"] < 1e-300          # the premise: the Gaussian tail underflows
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
    assert main(["sweep", str(stream), "--program", "data", "--bit-rate", "1200", "--min-eye", "0.5",
                 "--response", "lowpass", "--family", "bessel", "--order", "4", "--cutoffs", "1k:8k:3",
                 "--out", str(out)]) == 0
    assert main(["report", str(out)]) == 0
    md = (out / "spec.md").read_text()
    targets = md.split("### Targets")[1].split("###")[0]
    row = next(line for line in targets.splitlines() if line.startswith("| eye opening"))
    assert "% of the unfiltered eye" in row and " dB |" not in row.split("|")[2]
