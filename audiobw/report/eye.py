"""Eye diagram of a rendered data-link chain output (matplotlib Agg, no pyplot).

The chain output (``chain-output.wav`` from ``audiobw render``) is cut into
two-unit-interval traces starting at bit boundaries and overlaid; the best
sampling instant from the sweep's peak-distortion analysis and the decision
threshold are drawn over them.  Readable in grayscale: one ink colour with
transparency; markers, not hue, carry the annotations.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..audio import atomic_path
from .figure import GRIDLINE, HIGHLIGHT, INK, MUTED, PAPER, RC

MAX_TRACES = 600


def eye_traces(
    x: np.ndarray, fs_hz: float, bit_rate_hz: float, *, skip_bits: int = 16, points_per_ui: int = 48
) -> tuple[np.ndarray, np.ndarray]:
    """Overlaid two-UI traces of ``x`` (resampled by linear interpolation).

    Returns ``(t_ui, traces)``: time axis 0…2 UI and an array (n_traces, points).
    The first ``skip_bits`` bits (filter start-up) are left out.
    """
    n_bits = int(len(x) * bit_rate_hz / fs_hz) - 2
    starts = np.arange(skip_bits, n_bits)
    if starts.size > MAX_TRACES:
        starts = starts[np.linspace(0, starts.size - 1, MAX_TRACES).astype(int)]
    t_ui = np.linspace(0.0, 2.0, 2 * points_per_ui + 1)
    sample_pos = (starts[:, None] + t_ui[None, :]) * fs_hz / bit_rate_hz
    idx = np.arange(len(x))
    return t_ui, np.interp(sample_pos, idx, x)


def eye_diagram(
    wave_path,
    bit_rate_hz: float,
    target,
    *,
    sample_delay_ui: float | None = None,
    title: str = "Eye diagram of the simulated chain output",
) -> Path:
    """Write an eye-diagram PNG of ``wave_path`` (first channel) to ``target``.

    Parameters
    ----------
    wave_path : path-like
        A rendered chain output (V at the converter input are not needed:
        the plot is in full-scale units).
    bit_rate_hz : float, > 0
    target : path-like
        The PNG to write (atomically).
    sample_delay_ui : float, optional
        The best sampling instant after the bit starts, from the sweep; drawn
        folded into the two-UI window.
    """
    import soundfile as sf
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    import matplotlib

    x, fs = sf.read(str(wave_path), dtype="float64", always_2d=True)
    x = x[:, 0]
    t_ui, traces = eye_traces(x, fs, bit_rate_hz)
    with matplotlib.rc_context(RC):
        fig = Figure(figsize=(6.0, 3.6), dpi=120)
        FigureCanvasAgg(fig)
        ax = fig.add_subplot(1, 1, 1)
        for tr in traces:
            ax.plot(t_ui, tr, color=INK, alpha=0.06, linewidth=0.8)
        ax.axhline(0.0, color=MUTED, linestyle="--", linewidth=1.0, label="decision threshold")
        if sample_delay_ui is not None:
            phase = sample_delay_ui % 1.0
            for k in (phase, phase + 1.0):
                ax.axvline(k, color=HIGHLIGHT, linewidth=1.6, linestyle="-.")
            ax.plot([], [], color=HIGHLIGHT, linestyle="-.", label="best sampling instant (sweep)")
        ax.set_xlim(0, 2)
        ax.set_xlabel("time [UI]  (1 UI = 1/bit rate)")
        ax.set_ylabel("chain output [FS]")
        ax.set_title(f"{title} — {bit_rate_hz:g} bit/s, {len(traces)} traces")
        ax.grid(True, color=GRIDLINE)
        ax.legend(loc="upper right")
        fig.set_facecolor(PAPER)
        fig.tight_layout()
        with atomic_path(target) as tmp:
            fig.savefig(tmp, format="png")
    return Path(target)
