"""Scoring the cutoffs of one design together changes no figure.

A sweep hands each run of consecutive cases of one design to
Scorer.score_many and PerceptualScorer.score_many, which build the grid-wide
arrays of all of them at once (audiobw.batchresponse).  Each row must be the
row its case gets scored alone (the per-case methods Filter.power_response,
Filter.response, Filter.group_delay_s and the scorers' one-case entry points
are the reference).  The batched responses and filter figures are compared
with ==; a scored row to 1e-12 relative: a complex product over a (cases x
bins) array can differ in its last bit from the same product over one row,
where numpy's vector loop and its scalar tail round differently (seen on the
imaginary part of H·e^{jθ}); rounded to sweep.json's seven digits the rows of
four 800-1000-case sweeps were identical.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from audiobw.batchresponse import group_delays, power_responses, responses, shares_prototype
from audiobw.chain import Chain
from audiobw.filters import FilterSpec, design
from audiobw.filterquality import (
    alias_rejection_db,
    alias_rejection_many,
    delay_spread_s,
    flatness_and_spread,
    flatness_db,
)
from audiobw.forked import forked_map
from audiobw.metrics import Meter, Scorer
from audiobw.perceptual.scoring import Listening, PerceptualScorer
from audiobw.spectrum import analyse
from audiobw.sweep import BATCH_CASES, design_batches

from .conftest import tones

FS = 48000


def _same(a, b, rel: float = 0.0) -> bool:
    """Equal rows: floats to ``rel`` relative (NaN equal to NaN), lists and mappings element by element."""
    if isinstance(a, float) and isinstance(b, float):
        return a == b or (math.isnan(a) and math.isnan(b)) or abs(a - b) <= rel * max(abs(a), abs(b))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_same(a[k], b[k], rel) for k in a)
    if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
        return len(a) == len(b) and all(_same(x, y, rel) for x, y in zip(a, b))
    return a == b


def _specs(response, family, order, stage="analog", n=7):
    out = []
    for x in np.geomspace(1.0, 4.0, n):
        lo = 60.0 * x if response != "lowpass" else None
        hi = 3000.0 * x if response != "highpass" else None
        out.append(FilterSpec(response, family, order, lo, hi, stage=stage, fs_hz=FS if stage == "digital" else None))
    return out


@pytest.fixture(scope="module")
def program(tmp_path_factory):
    """A few seconds of a bright chord with noise (invented for the test), analysed once."""
    import soundfile as sf

    rng = np.random.default_rng(11)
    x = tones([220.0, 1770.0, 9100.0], [0.2, 0.1, 0.02], FS, 3.0) + 0.01 * rng.standard_normal(3 * FS)
    path = tmp_path_factory.mktemp("batched") / "chord.wav"
    sf.write(str(path), np.stack([x, 0.8 * x], axis=1), FS, subtype="PCM_24")
    return analyse(path)


CASES = [
    ("lowpass", "butterworth", 4, "analog"),
    ("lowpass", "elliptic", 5, "analog"),
    ("highpass", "chebyshev1", 3, "analog"),
    ("highpass", "bessel", 8, "analog"),
    ("bandpass", "butterworth", 2, "analog"),
    ("lowpass", "chebyshev1", 4, "digital"),
]


@pytest.mark.parametrize("response,family,order,stage", CASES)
def test_batched_responses_are_the_per_filter_ones(response, family, order, stage):
    filts = [design(s) for s in _specs(response, family, order, stage)]
    # the fast path is taken exactly for analog lowpass and highpass designs (one shared prototype)
    assert shares_prototype(filts) == (stage == "analog" and response != "bandpass")
    f = np.linspace(0.0, FS / 2, 2049)
    grids = np.geomspace(np.full(len(filts), 30.0), np.linspace(30e3, 60e3, len(filts)), 64, axis=1)
    G, H, T = power_responses(filts, f), responses(filts, f), group_delays(filts, f[1:])
    Gr = power_responses(filts, grids)
    for i, filt in enumerate(filts):
        assert np.array_equal(G[i], filt.power_response(f))
        assert np.array_equal(H[i], filt.response(f))
        assert np.array_equal(T[i], filt.group_delay_s(f[1:]))
        assert np.array_equal(Gr[i], filt.power_response(grids[i]))


@pytest.mark.parametrize("response,family,order,stage", CASES)
def test_batched_filter_figures_are_the_per_filter_ones(response, family, order, stage):
    filts = [design(s) for s in _specs(response, family, order, stage)]
    grid = np.union1d(np.linspace(40.0, 15000.0, 300), np.geomspace(40.0, 15000.0, 50))
    edges = [f.edges_3db for f in filts]
    got = alias_rejection_many(filts, edges, FS)
    for filt, (lo, hi), rej, (flat, spread) in zip(filts, edges, got, flatness_and_spread(filts, grid)):
        assert _same(rej, alias_rejection_db(filt, filt.spec.response, lo, hi, FS))
        # the refinement of a peak between grid points evaluates the vertices of the whole batch in
        # one array: a value's last bit can differ with its place in numpy's vector loop, and the
        # next vertex with it (measured: 4e-16 relative)
        assert _same(flat, flatness_db(filt, grid), rel=1e-13)
        assert _same(spread, delay_spread_s(filt, grid), rel=1e-13)


@pytest.mark.parametrize("response,family,order,stage", CASES)
@pytest.mark.parametrize(
    "chain,program_kind",
    [
        (Chain(), "music"),
        (Chain(anti_alias="ideal"), "speech"),
        (
            Chain(
                amp_bandwidth_hz=200e3, source_ohms=1000.0, gain_db=30.0, h2_db=-80.0, h3_db=-90.0, en_corner_hz=100.0
            ),
            "music",
        ),
    ],
)
def test_rows_scored_together_are_the_rows_scored_alone(program, response, family, order, stage, chain, program_kind):
    if stage == "digital":
        chain = Chain(stage="digital", anti_alias="ideal")
    elif response == "highpass" and chain.anti_alias == "none" and chain.amp_bandwidth_hz is None:
        chain = Chain(anti_alias="ideal")  # a highpass's folded noise needs a bound (the sweep refuses it)
    specs = _specs(response, family, order, stage)
    filts = [design(s) for s in specs]
    scorer = Scorer(program, chain, Meter())
    listening = PerceptualScorer(program, chain, Listening(program=program_kind))
    shared = [{} for _ in filts]
    rows = scorer.score_many(filts, shared)
    heard = listening.score_many(filts, [s["N"] for s in shared], shared)
    for filt, row, figures in zip(filts, rows, heard):
        alone: dict = {}
        assert _same(row, scorer.score(filt, alone), 1e-12)
        assert _same(figures, listening.score(filt, alone["N"], alone), 1e-12)
    # and a case scored with no shared arrays at all (the perceptual scorer evaluates H itself)
    assert _same(heard[0], listening.score(filts[0], shared[0]["N"]), 1e-12)


def test_design_batches_keep_order_and_split_designs():
    specs = _specs("lowpass", "butterworth", 2, n=BATCH_CASES + 3) + _specs("lowpass", "butterworth", 4, n=2)
    specs += _specs("lowpass", "butterworth", 2, n=1)
    items = list(enumerate(specs, start=1))
    batches = design_batches(items)
    assert [i for b in batches for i, _ in b] == list(range(1, len(specs) + 1))
    assert [len(b) for b in batches] == [BATCH_CASES, 3, 2, 1]
    for b in batches:
        assert len({(s.family, s.order, s.response) for _, s in b}) == 1


@pytest.mark.parametrize("fork", [False, True])
def test_forked_map_counts_cases_of_uneven_items(fork):
    import sys

    if fork and not sys.platform.startswith("linux"):
        pytest.skip("forked scoring is Linux-only")
    items = [list(range(k)) for k in (5, 1, 7, 2, 2, 9)]
    seen = []
    out = forked_map(sum, items, fork=fork, sizes=[len(x) for x in items], progress=lambda d, n: seen.append((d, n)))
    assert out == [sum(x) for x in items]
    total = sum(len(x) for x in items)
    assert seen[-1] == (total, total)
    assert all(n == total for _, n in seen) and [d for d, _ in seen] == sorted(d for d, _ in seen)


@pytest.mark.parametrize(
    "chain",
    [Chain(), Chain(en_corner_hz=200.0, in_corner_hz=100.0), Chain(anti_alias="ideal"), Chain(amp_bandwidth_hz=90e3)],
)
@pytest.mark.parametrize("family,order", [("butterworth", 1), ("bessel", 3), ("elliptic", 5), ("chebyshev1", 8)])
def test_noise_of_cutoffs_folded_together_is_the_noise_of_each(chain, family, order):
    """The closed-form alias images of a prototype's cutoffs built together (folding.folded_noise_gains)
    against noise_total of each filter alone; cutoffs up to near fs/2, where most of the noise folds."""
    from audiobw.noise import noise_total
    from audiobw.noisespectra import noise_totals

    filts = [design(FilterSpec("lowpass", family, order, None, fc)) for fc in np.geomspace(500.0, 23000.0, 9)]
    f = np.arange(8193) * FS / 16384
    w = np.full(f.size, f[1])
    w[[0, -1]] *= 0.5
    G = power_responses(filts, f)
    for filt, n, g in zip(filts, noise_totals(chain, filts, f, w, FS, direct=G), G):
        assert np.array_equal(n, noise_total(chain, filt, f, w, FS, direct=g))


def test_phasor_rows_and_delay_rows_are_the_single_ones():
    """delay.uniform_phasors and delay.best_delays, row by row, against uniform_phasor and best_delay."""
    from audiobw.delay import best_delay, best_delays, uniform_phasor, uniform_phasors

    steps = np.array([-0.3, 0.0, 1e-4, 0.7, 2.9])
    rows = uniform_phasors(8193, steps)
    for row, step in zip(rows, steps):
        np.testing.assert_allclose(row, uniform_phasor(8193, float(step)), rtol=1e-15, atol=0)
    f = np.linspace(0.0, FS / 2, 4097)
    rng = np.random.default_rng(3)
    S = rng.uniform(0.1, 1.0, f.size) / (1.0 + (f / 2000.0) ** 2)
    filts = [design(s) for s in _specs("lowpass", "elliptic", 4)]
    H = responses(filts, f)
    limits = [None, 2e-3, None, 5e-4, 1e-3, None, 3e-3]
    taus, errs = best_delays(S, H, f, None, limits, [None] * len(filts))
    for h, lim, tau, err in zip(H, limits, taus, errs):
        tau1, err1 = best_delay(S, h, f, max_delay_s=lim)
        assert tau == pytest.approx(tau1, rel=1e-12, abs=0)
        np.testing.assert_allclose(err, err1, rtol=1e-9, atol=1e-15)
