"""The Monte Carlo response band (matplotlib Figure on Agg, no pyplot state)."""

from __future__ import annotations

import numpy as np

from ..audio import atomic_path


def write_band_plot(doc: dict, target) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    band = doc["_band"]
    f = band["freq_hz"]
    db = 10 * np.log10(band["h2"])
    fig = Figure(figsize=(8, 4.5))
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    lo, hi = np.percentile(db, [0.5, 99.5], axis=0)
    p5, p95 = np.percentile(db, [5, 95], axis=0)
    ax.fill_between(f, lo, hi, color="0.85", label="99 % of builds")
    ax.fill_between(f, p5, p95, color="0.6", label="90 % of builds")
    ax.semilogx(f, 10 * np.log10(band["ideal_h2"]), "k-", lw=1.2, label="ideal prototype")
    ax.set_xlabel("Frequency (Hz)")
    ax.set_ylabel("Response (dB)")
    ax.set_ylim(max(float(np.min(lo)), -30.0), max(1.0, float(np.max(hi)) + 0.5))
    ax.grid(True, which="both", alpha=0.3)
    o = doc["options"]
    ax.set_title(
        f"Monte Carlo response band: {o['draws']} builds, R ±{100 * o['tolerance_r']:g} %, "
        f"C ±{100 * o['tolerance_c']:g} % (an engineering estimate; verify on the bench)",
        fontsize=9,
    )
    ax.legend(loc="lower center", fontsize=8)
    with atomic_path(target) as tmp:
        fig.savefig(tmp, format="png", dpi=110)
