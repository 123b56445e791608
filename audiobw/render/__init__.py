"""Render one chain: the simulated output, loudness-matched A/B clips, blind trials.

:func:`render_file` streams a program through :class:`audiobw.simulate.ChainSimulator`
and writes, into one folder:

* ``chain-output.wav`` — the chain's output at its true level (32-bit float,
  the input's rate and channels);
* ``ab-reference.wav`` / ``ab-processed.wav`` — an excerpt of the input
  (unfiltered, no added noise) and of the chain output, each with short fades,
  brought to the same BS.1770 integrated loudness (default −23 LUFS) and held
  under a true-peak ceiling (default −1 dBFS) by one common gain reduction;
* ``blind/trial-NN-first.wav`` / ``-second.wav`` and ``blind/answer-sheet.txt``
  with ``trial-key.json`` beside (not inside) the blind folder, when trials are asked;
* ``render-notes.txt`` (what was rendered, with the listening caution) and
  ``render.json`` (the same facts for programs).

The package follows the work: :mod:`~audiobw.render.loudness` (BS.1770-4
loudness and true peak), :mod:`~audiobw.render.options` (what is asked and
returned), :mod:`~audiobw.render.excerpt` (the A/B excerpt),
:mod:`~audiobw.render.clips` (the render), :mod:`~audiobw.render.notes`
(the measured noise check, render-notes.txt, render.json),
:mod:`~audiobw.render.trials` (blind trials and their scoring) and
:mod:`~audiobw.render.chosen` (``sweep --render``).  The public names are
re-exported here, so ``from audiobw.render import render_file`` keeps working.
"""

import sys

from .. import _CallableRender
from .chosen import render_sweep
from .clips import render_file
from .loudness import (
    GATE_BLOCK_S,
    K_WEIGHTING_48K_SOS,
    channel_weights,
    integrated_loudness,
    k_weighting_derived_sos,
    k_weighting_sos,
    true_peak,
)
from .notes import WHITE_ONLY, noise_check, noise_check_lines, notes_text
from .options import DEFAULT_SEED, MIN_CLIP_S, RenderOptions, RenderResult
from .trials import CHOICES, KEY_FORMAT, read_answers, read_key, score_trials

__all__ = [
    "CHOICES",
    "DEFAULT_SEED",
    "GATE_BLOCK_S",
    "K_WEIGHTING_48K_SOS",
    "KEY_FORMAT",
    "MIN_CLIP_S",
    "RenderOptions",
    "RenderResult",
    "channel_weights",
    "integrated_loudness",
    "k_weighting_derived_sos",
    "k_weighting_sos",
    "noise_check",
    "noise_check_lines",
    "notes_text",
    "WHITE_ONLY",
    "read_answers",
    "read_key",
    "render_file",
    "render_sweep",
    "score_trials",
    "true_peak",
]

# ``audiobw.render`` is also the public function (audiobw.api.render): make this
# package callable so that the package attribute, which importing it sets, still
# renders when called (as audiobw.sweep does).
sys.modules[__name__].__class__ = _CallableRender
