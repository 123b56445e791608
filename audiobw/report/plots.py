"""The report's plots: matplotlib on the Agg canvas, no pyplot state.

Seven plots (see docs/report.md):

1. ``metrics-upper-edge`` (and ``metrics-lower-edge`` for a bandpass): every
   metric against the swept design edge, one line per family and order,
   targets drawn, the subject case marked;
2. ``spectrum``: the program, the chain output and its noise floor;
3. ``filter``: the subject filter's magnitude and group delay;
4. ``noise-budget``: each noise contributor's share;
5. ``ser``: signal-to-error against −3 dB bandwidth, optimum marked;
6. ``masking`` (music and speech programs): per critical band, the masked
   threshold at the playback level against the error of the subject case and
   of the next narrower one, at one frame and as a share of all frames;
7. ``wiener``: the subject's |H|² against the Wiener gain S/(S + N).

Readable without colour: families differ by marker and colour (colours of
distinct lightness), orders by line style; targets are drawn as thick grey
dash-dot lines, the subject case as a large star.  Dense traces are averaged
onto a log-frequency grid before plotting, which keeps the SVG files small.

The metrics and SER plots (over the sweep's cases) are in
:mod:`audiobw.report.sweep_plots`; the masking and Wiener plots in
:mod:`audiobw.report.perceptual_plots`.

References
----------
.. [1] matplotlib.figure.Figure and FigureCanvasAgg (object-oriented use
   without pyplot), matplotlib documentation, "Embedding in a web
   application server" example.
"""

from __future__ import annotations
import math

import numpy as np

from .figure import (
    FAMILY_STYLE,
    GRIDLINE,
    HATCHES,
    HIGHLIGHT,
    INK,
    MUTED,
    RC,
    Plot,
    _db,
    _khz,
    _render,
    log_average,
)
from .perceptual_plots import masking_plot, perceptual_scorer, wiener_plot
from .sweep_plots import metrics_plot, ser_plot


def spectrum_plot(doc: dict, spec: dict, spectrum: dict, filt, chain) -> Plot:
    """Program spectrum, chain output spectrum and the output noise floor."""
    from matplotlib.figure import Figure

    from ..noise import noise_spectra

    f = np.asarray(spectrum["freqs_hz"], float)
    fs = float(spectrum["sample_rate_hz"])
    S = np.asarray(spectrum["psd"], float) * chain.volts_per_unit**2
    G = filt.power_response(f)
    N = noise_spectra(chain, filt, f, np.asarray(spectrum["weights_hz"], float), fs).total
    fig = Figure(figsize=(7.6, 4.2), layout="constrained")
    ax = fig.subplots()
    inp = doc["input"]
    ax.axvspan(
        inp["occupied_low_hz"],
        inp["occupied_high_hz"],
        color=GRIDLINE,
        alpha=0.35,
        zorder=0,
        label="program's 99 % occupied band",
    )
    for y, label, colour, ls, lw in (
        (S, "program (converter input)", FAMILY_STYLE["butterworth"][0], "-", 1.3),
        (S * G + N, "chain output: program + noise", FAMILY_STYLE["bessel"][0], "--", 1.3),
        (N, "output noise floor", INK, ":", 1.8),
    ):
        fx, py = log_average(f, y)
        ax.plot(fx, _db(py), color=colour, linestyle=ls, linewidth=lw, label=label)
    for edge in (spec["filter"]["low_hz"], spec["filter"]["high_hz"]):
        if edge is not None:
            ax.axvline(edge, color=MUTED, linewidth=1.0, linestyle=(0, (6, 2, 1, 2)))
    ax.set_xscale("log")
    ax.set_xlim(max(f[1], 1.0), fs / 2.0)
    top = float(np.max(_db(S)))
    bottom = float(np.min(_db(log_average(f, N)[1])))
    ax.set_ylim(min(bottom - 10, top - 140), top + 8)
    ax.set_xlabel("frequency [Hz]")
    ax.set_ylabel("power spectral density [dB re 1 V²/Hz]")
    _khz(ax)
    ax.legend(loc="lower left")
    ax.set_title("Program and chain output spectra (dash-dot verticals: −3 dB edges)")
    return _render(
        fig,
        "spectrum",
        "Spectra",
        "Long-term spectrum of the program at the converter input, of the chain output (program "
        "through the filter plus noise), and of the output noise alone; averaged over 1/160-decade "
        "cells. Dash-dot verticals mark the −3 dB edges.",
        svg=True,
    )


def filter_plot(spec: dict, filt, fs_hz: float) -> Plot:
    """Magnitude and group delay of the subject filter."""
    from matplotlib.figure import Figure

    lo, hi = spec["filter"]["low_hz"], spec["filter"]["high_hz"]
    nyq = fs_hz / 2.0
    f_min = (lo / 30.0) if lo else (hi / 300.0)
    f_max = (max(1.15 * fs_hz, 3.0 * hi) if hi else 1.5 * fs_hz) if filt.analog else 0.999 * nyq
    f = np.geomspace(max(f_min, 0.5), f_max, 1500)
    fig = Figure(figsize=(7.6, 5.6), layout="constrained")
    ax1, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    mag = filt.response_db(f)
    colour = FAMILY_STYLE.get(spec["filter"]["family"], (INK,))[0]
    ax1.plot(f, mag, color=colour, linewidth=1.6, label="|H| [dB]")
    ax1.axhline(-3.0103, color=MUTED, linewidth=0.8, linestyle="--")
    ax1.annotate("−3 dB", xy=(f[0], -3.0103), xytext=(2, 2), textcoords="offset points", fontsize=7, color=MUTED)
    finite = mag[np.isfinite(mag)]
    floor = 10.0 * math.floor(max(-160.0, min(-40.0, float(np.min(finite)) - 5.0)) / 10.0)
    marks = ("v", "P", "X")
    for p, m in zip(spec["stopband"], marks):
        if p["attenuation_db"] is None:
            continue
        ax1.plot(
            [p["freq_hz"]],
            [-p["attenuation_db"]],
            marker=m,
            markersize=8,
            color=HIGHLIGHT,
            markeredgecolor=INK,
            linestyle="none",
            label=f"{p['label']}: {p['attenuation_db']:.1f} dB down",
        )
    if filt.analog:
        ax1.axvline(nyq, color=INK, linewidth=0.8, linestyle=":")
        ax1.annotate(
            "fs/2",
            xy=(nyq, 1.0),
            xycoords=("data", "axes fraction"),
            xytext=(3, -3),
            textcoords="offset points",
            va="top",
            fontsize=7,
        )
    ax1.set_ylim(floor, 5)
    ax1.set_ylabel("magnitude [dB]")
    ax1.legend(loc="lower center" if lo and hi else ("lower left" if hi else "lower right"))
    tau_ms = 1e3 * filt.group_delay_s(f)
    ax2.plot(f, tau_ms, color=colour, linewidth=1.6, linestyle="--")
    pb = spec["group_delay"]["passband"]
    inside = (f >= pb["low_hz"]) & (f <= pb["high_hz"]) & np.isfinite(tau_ms)
    if np.any(inside):
        top = float(np.max(tau_ms[inside]))
        ax2.set_ylim(min(0.0, float(np.min(tau_ms[inside]))), 1.25 * top if top > 0 else 1.0)
    ax2.plot(
        [1000.0],
        [1e3 * spec["group_delay"]["at_s"]],
        marker="o",
        color=HIGHLIGHT,
        markeredgecolor=INK,
        linestyle="none",
        label=f"1 kHz: {1e3 * spec['group_delay']['at_s']:.3g} ms",
    )
    ax2.axvspan(pb["low_hz"], pb["high_hz"], color=GRIDLINE, alpha=0.3, zorder=0, label="−3 dB passband")
    ax2.set_ylabel("group delay [ms]")
    ax2.set_xlabel("frequency [Hz]")
    ax2.set_xscale("log")
    ax2.legend(loc="upper center")
    _khz(ax2)
    fig.suptitle(
        f"{spec['filter']['family']} order {spec['filter']['order']} {spec['filter']['response']}, "
        f"{spec['filter']['stage']} stage"
    )
    return _render(
        fig,
        "filter",
        "Filter response",
        "Magnitude (with the attenuation at the named stopband frequencies) and group delay of the "
        f"{'chosen' if spec['status'] == 'chosen' else 'closest'} filter; the shaded band is the −3 dB "
        "passband over which the group-delay spread is given.",
        svg=True,
    )


def budget_plot(spec: dict) -> Plot:
    """The noise budget: each contributor's share of the output noise power."""
    from matplotlib.figure import Figure

    comps = list(spec["noise"]["components"].values())
    fig = Figure(figsize=(7.6, 3.0), layout="constrained")
    ax = fig.subplots()
    y = np.arange(len(comps))[::-1]
    for yi, c, hatch in zip(y, comps, HATCHES):
        share = 100.0 * c["share"]
        ax.barh(yi, share, color="white", edgecolor=INK, hatch=hatch, linewidth=1.0)
        text = (
            f"{share:.1f} %  ({c['vrms'] * 1e6:.3g} µV rms, {c['dbfs']:.1f} dBFS)"
            if c["dbfs"] is not None
            else "0 % (not present)"
        )
        ax.annotate(text, xy=(share, yi), xytext=(4, 0), textcoords="offset points", va="center", fontsize=7.5)
    ax.set_yticks(y, [c["label"] for c in comps])
    ax.set_xlim(0, 135)
    ax.set_xticks([0, 20, 40, 60, 80, 100])
    ax.set_xlabel("share of output noise power [%]")
    n = spec["noise"]
    ax.set_title(
        f"Noise budget: total {n['vrms'] * 1e6:.3g} µV rms ({n['dbfs']:.1f} dBFS, {n['dbu']:.1f} dBu); "
        f"A-weighted {n['a_weighted']['dbfs']:.1f} dBFS"
    )
    ax.grid(axis="y", visible=False)
    return _render(
        fig,
        "noise-budget",
        "Noise budget",
        "Share of the output noise power from each contributor in the meter band, with its level.",
        svg=False,
    )


def make_plots(run: dict, spec: dict) -> list[Plot]:
    """All plots of the report, in page order."""
    import matplotlib

    from .run import rebuild_chain, rebuild_filter

    doc = run["doc"]
    subject = doc["cases"][spec["subject"]["case"] - 1]
    filt = rebuild_filter(doc, subject)
    chain = rebuild_chain(doc)
    fs = doc["input"]["sample_rate_hz"]
    with matplotlib.rc_context(RC):
        plots = []
        if doc["grid"]["response"] in ("lowpass", "bandpass"):
            plots.append(metrics_plot(doc, spec, "high"))
        if doc["grid"]["response"] in ("highpass", "bandpass"):
            plots.append(metrics_plot(doc, spec, "low"))
        if run["spectrum"] is not None:
            plots.append(spectrum_plot(doc, spec, run["spectrum"], filt, chain))
        plots.append(filter_plot(spec, filt, fs))
        plots.append(budget_plot(spec))
        plots.append(ser_plot(doc, spec))
        scorer = perceptual_scorer(doc, run["spectrum"], chain)
        if scorer is not None:
            plots.append(masking_plot(doc, spec, scorer, chain))
            plots.append(wiener_plot(doc, spec, scorer, chain, filt))
    return plots
