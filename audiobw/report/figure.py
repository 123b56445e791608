"""What the report's plots share: our palette and line styles, the :class:`Plot` record
rendered on the Agg canvas to PNG and SVG, and the log-frequency averaging of dense traces.

References
----------
.. [1] matplotlib.figure.Figure and FigureCanvasAgg (object-oriented use
   without pyplot), matplotlib documentation, "Embedding in a web
   application server" example.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..audio import atomic_path

INK = "#1d2433"
MUTED = "#6b7280"
PAPER = "#fbfaf7"
GRIDLINE = "#d9d6cf"
TARGET = "#8c8c8c"
HIGHLIGHT = "#e0a526"
FAMILY_STYLE = {  # family -> (colour, marker)
    "butterworth": ("#213a6b", "o"),
    "bessel": ("#d07a2c", "s"),
    "chebyshev1": ("#5fae95", "^"),
    "elliptic": ("#7c2e6b", "D"),
}
ORDER_LINES = ("-", "--", ":", "-.", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 1)), (0, (8, 2)), (0, (3, 3)))
HATCHES = ("////", "....", "xxxx", "\\\\\\\\", "oo", "++")
RC = {
    "font.size": 8.5,
    "axes.titlesize": 9.5,
    "axes.labelsize": 8.5,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.facecolor": "white",
    "figure.facecolor": PAPER,
    "text.color": INK,
    "xtick.color": INK,
    "ytick.color": INK,
    "axes.grid": True,
    "grid.color": GRIDLINE,
    "grid.linewidth": 0.6,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "legend.frameon": False,
    "legend.fontsize": 7.5,
    "svg.hashsalt": "audiobw",
    "svg.fonttype": "none",
    "lines.linewidth": 1.4,
    "lines.markersize": 4,
}
POINTS_PER_DECADE = 160


@dataclass
class Plot:
    """One rendered plot: PNG bytes (for the page and the file), SVG text where useful."""

    name: str
    title: str
    caption: str
    png: bytes
    svg: bytes | None = None
    width_px: int = 0
    height_px: int = 0
    data: dict | None = None  # the numbers drawn, where a test checks them against the sweep

    def write(self, out_dir, *, inputs=()) -> dict[str, Path]:
        out = {}
        for ext, data in (("png", self.png), ("svg", self.svg)):
            if data is None:
                continue
            target = Path(out_dir) / f"plot-{self.name}.{ext}"
            with atomic_path(target, inputs=inputs) as tmp:
                tmp.write_bytes(data)
            out[ext] = target
        return out


def _render(fig, name: str, title: str, caption: str, *, svg: bool) -> Plot:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    dpi = 110
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    w, h = fig.get_size_inches()
    svg_bytes = None
    if svg:
        sbuf = io.BytesIO()
        fig.savefig(sbuf, format="svg", metadata={"Date": None, "Creator": None})
        svg_bytes = sbuf.getvalue()
    return Plot(name, title, caption, buf.getvalue(), svg_bytes, int(round(w * dpi)), int(round(h * dpi)))


def log_average(freqs_hz, power, *, per_decade: int = POINTS_PER_DECADE):
    """Average a power spectrum onto a log-frequency grid (bins at 0 Hz dropped).

    Power (not dB) is averaged within each 1/``per_decade``-decade cell, so
    the plotted level keeps the cell's power; cells holding one bin keep it
    as it is.  Returns (frequencies at the geometric mean of each cell, power).
    """
    f = np.asarray(freqs_hz, float)
    p = np.asarray(power, float)
    keep = f > 0
    f, p = f[keep], p[keep]
    cell = np.floor(np.log10(f) * per_decade).astype(int)
    _, start = np.unique(cell, return_index=True)
    counts = np.diff(np.append(start, f.size))
    fm = np.exp(np.add.reduceat(np.log(f), start) / counts)
    pm = np.add.reduceat(p, start) / counts
    return fm, pm


def _db(x):
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(np.maximum(np.asarray(x, float), 1e-300))


def _style(family: str, order_index: int):
    colour, marker = FAMILY_STYLE.get(family, (INK, "v"))
    return dict(
        color=colour,
        marker=marker,
        linestyle=ORDER_LINES[order_index % len(ORDER_LINES)],
        markerfacecolor=colour if order_index % 2 == 0 else "white",
        markeredgecolor=colour,
    )


def _series_keys(cases):
    fams = [f for f in FAMILY_STYLE if any(c["family"] == f for c in cases)]
    fams += sorted({c["family"] for c in cases} - set(fams))
    orders = sorted({c["order"] for c in cases})
    return [
        (f, o, orders.index(o))
        for f in fams
        for o in orders
        if any(c["family"] == f and c["order"] == o for c in cases)
    ]


def _khz(ax, axis="x"):
    """Log axis ticks at 1-2-5 steps, labelled 20, 50, 1k, 2k, ... (no exponent labels)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    def f(v, _pos):
        if v >= 1000:
            return f"{v / 1000:g}k"
        return f"{v:g}"

    a = ax.xaxis if axis == "x" else ax.yaxis
    a.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    a.set_major_formatter(FuncFormatter(f))
    a.set_minor_formatter(NullFormatter())
