"""What a render is asked (:class:`RenderOptions`, validated with the option names) and what it returns."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path


from ..errors import ParameterError
from .loudness import GATE_BLOCK_S


MIN_CLIP_S = GATE_BLOCK_S
FADE_S = 0.02
PEAK_MARGIN_DB = 0.02  # the ceiling is aimed at with this much room (float32 rounding, resampler)
DEFAULT_SEED = 1


# -- options and results --------------------------------------------------------


@dataclass(frozen=True)
class RenderOptions:
    """What to render besides the chain output.

    Parameters
    ----------
    loudness_lufs : float, -60 <= loudness_lufs <= -10
        Integrated loudness of each A/B clip before the ceiling acts.
    ceiling_dbfs : float, <= 0
        True-peak ceiling of the clips, dBFS.
    excerpt_s : float, >= 0.4
        Clip length in s (the whole file when it is shorter).
    excerpt_start_s : float or None
        Start of the clip in s; None: where the input has most power in the
        band the filter removes.
    trials : int, 0 <= trials <= 200
        Pairs in the blind trial set.
    seed : int
        Seeds the chain's noise and dither and the trial order.
    """

    loudness_lufs: float = -23.0
    ceiling_dbfs: float = -1.0
    excerpt_s: float = 12.0
    excerpt_start_s: float | None = None
    trials: int = 0
    seed: int = DEFAULT_SEED

    def __post_init__(self):
        checks = [
            (
                "--loudness",
                self.loudness_lufs,
                -60.0 <= self.loudness_lufs <= -10.0,
                "-60 to -10 LUFS (a moderate listening level; -23LUFS is the default)",
            ),
            ("--ceiling", self.ceiling_dbfs, -60.0 <= self.ceiling_dbfs <= 0.0, "-60 to 0 dBFS"),
            (
                "--excerpt",
                self.excerpt_s,
                MIN_CLIP_S <= self.excerpt_s <= 600.0,
                "0.4 s (one BS.1770 gating block) to 600 s",
            ),
            (
                "--trials",
                self.trials,
                0 <= self.trials <= 200 and int(self.trials) == self.trials,
                "a whole number 0 to 200",
            ),
        ]
        if self.excerpt_start_s is not None:
            checks.append(("--excerpt-at", self.excerpt_start_s, self.excerpt_start_s >= 0, "a time >= 0 s"))
        for opt, value, ok, accepted in checks:
            if not ok:
                raise ParameterError(f"{opt}: {value!r} is out of range; accepted: {accepted}")


@dataclass
class RenderResult:
    """What :func:`render_file` wrote and measured."""

    out_dir: Path
    paths: list
    facts: dict = field(default_factory=dict)
