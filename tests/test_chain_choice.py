"""Issue 13: the choice ranks passing cases by ENBW (default) or −3 dB bandwidth, with ties."""

from __future__ import annotations

import json

from audiobw.cli import main
from audiobw.sweep import choose

from .conftest import REPO


def _case(i, family, order, bw, enbw, passes=True):
    return {
        "id": i,
        "family": family,
        "order": order,
        "bandwidth_hz": bw,
        "enbw_hz": enbw,
        "passes": passes,
        "fails": [] if passes else ["max_loss_db"],
        "margins_db": {"max_loss_db": 0.1},
        "loss_db": 0.1,
    }


TARGETS = {"max_loss_db": 0.2}


def test_enbw_rank_prefers_less_noise_bandwidth():
    # a bandpass that saves 13 Hz of −3 dB width but has 1 kHz more ENBW than a Bessel 4
    cases = [_case(1, "elliptic", 6, 9987.0, 11500.0), _case(2, "bessel", 4, 10000.0, 10500.0)]
    assert choose(cases, TARGETS)[0]["case"] == 2
    assert choose(cases, TARGETS, rank="bandwidth", tie=0.0)[0]["case"] == 1
    # 13 Hz is within the default 1 % tie band: the lower order wins even ranked by bandwidth
    assert choose(cases, TARGETS, rank="bandwidth")[0]["case"] == 2


def test_ties_go_to_lower_order_then_gentler_family():
    cases = [
        _case(1, "chebyshev1", 4, 5000.0, 5100.0),
        _case(2, "butterworth", 4, 5000.0, 5140.0),
        _case(3, "butterworth", 2, 5000.0, 5145.0),
        _case(4, "bessel", 2, 5000.0, 5300.0),
    ]
    # 1 % of 5100 Hz: cases 1-3 tie; the lower order (3) wins over the narrower Chebyshev
    assert choose(cases, TARGETS)[0]["case"] == 3
    # with no tie band, the smallest ENBW wins outright
    assert choose(cases, TARGETS, tie=0.0)[0]["case"] == 1
    # equal order: the gentler family wins within the band
    assert choose(cases[:2], TARGETS)[0]["case"] == 2


def test_cli_rank_option(tmp_path):
    clip = str(REPO / "clips" / "announcement-44k1-mono.flac")
    out = tmp_path / "o"
    assert (
        main(
            [
                "sweep",
                clip,
                "--family",
                "butterworth,bessel",
                "--cutoffs",
                "4k:16k:5",
                "--max-loss",
                "0.05",
                "--rank",
                "bandwidth",
                "--tie",
                "0.01%",
                "--out",
                str(out),
            ]
        )
        == 0
    )
    doc = json.loads((out / "sweep.json").read_text())
    assert doc["grid"]["rank"] == "bandwidth" and doc["grid"]["tie"] == 1e-4
    passing = [c for c in doc["cases"] if c["passes"]]
    chosen = next(c for c in doc["cases"] if c["id"] == doc["choice"]["case"])
    assert chosen["bandwidth_hz"] == min(c["bandwidth_hz"] for c in passing)
    assert main(["sweep", clip, "--rank", "widest", "--max-loss", "0.05", "--out", str(out)]) == 2
