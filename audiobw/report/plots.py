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
    TARGET,
    Plot,
    _db,
    _khz,
    _render,
    _series_keys,
    _style,
    log_average,
)
from .perceptual_plots import masking_plot, perceptual_scorer, wiener_plot


METRIC_PANELS = (  # key, label with unit, target key, log y
    ("enbw_hz", "ENBW [Hz]", None, True),
    ("noise_dbfs", "output noise [dBFS]", None, False),
    ("snr_db", "SNR [dB]", "min_snr_db", False),
    ("snr_a_db", "A-weighted SNR [dB]", "min_snr_a_db", False),
    ("loss_db", "program loss [dB]", "max_loss_db", True),
    ("lsd_db", "log-spectral distance [dB]", "max_lsd_db", False),
    ("ser_db", "signal-to-error [dB]", "min_ser_db", False),
    ("thdn_pct", "THD+N [%]", "max_thdn_pct", False),
)


DATA_PANELS = (
    ("eye_fraction", "eye opening [fraction]", "min_eye", False),
    ("ber", "bit-error rate", "max_ber", True),
)


def metrics_plot(doc: dict, spec: dict, edge: str) -> Plot:
    """Each metric against one swept design edge ('high' or 'low')."""
    from matplotlib.figure import Figure

    subject = doc["cases"][spec["subject"]["case"] - 1]
    swept = f"design_{edge}_hz"
    other = "design_low_hz" if edge == "high" else "design_high_hz"
    cases = [c for c in doc["cases"] if c[swept] is not None]
    if doc["grid"]["response"] == "bandpass":
        cases = [c for c in cases if math.isclose(c[other], subject[other], rel_tol=1e-9)]
    panels = METRIC_PANELS + (DATA_PANELS if any("ber" in c for c in cases) else ())
    rows = (len(panels) + 1) // 2
    fig = Figure(figsize=(7.6, 2.3 * rows), layout="constrained")
    axes = fig.subplots(rows, 2, sharex=True)
    role = "chosen" if spec["status"] == "chosen" else "closest (fails)"
    keys = _series_keys(cases)
    for ax, (key, label, tkey, logy) in zip(axes.flat, panels):
        for fam, order, oi in keys:
            pts = sorted(
                (c[swept], c[key])
                for c in cases
                if c["family"] == fam and c["order"] == order and c.get(key) is not None and (not logy or c[key] > 0)
            )
            if pts:
                x, y = zip(*pts)
                ax.plot(x, y, label=f"{fam} {order}", **_style(fam, oi))
        if tkey and tkey in doc["targets"]:
            limit = doc["targets"][tkey]
            from .formatting import target_info

            sense = target_info(tkey)[3]
            ax.axhline(limit, color=TARGET, linewidth=2.2, linestyle="-.", zorder=1)
            ax.annotate(
                f"target {sense} {limit:g}",
                xy=(1.0, limit),
                xycoords=("axes fraction", "data"),
                xytext=(-2, 3),
                textcoords="offset points",
                ha="right",
                va="bottom",
                fontsize=7,
                color=MUTED,
            )
        v = subject.get(key)
        if v is not None and (not logy or v > 0):
            ax.plot(
                [subject[swept]],
                [v],
                marker="*",
                markersize=13,
                color=HIGHLIGHT,
                markeredgecolor=INK,
                linestyle="none",
                zorder=5,
                label=f"{role}: case {subject['id']}",
            )
        if key in ("eye_fraction", "ber") and "data" in doc:
            nyq = doc["data"]["nyquist_min_hz"]
            ax.axvline(nyq, color=MUTED, linewidth=1.4, linestyle=(0, (2, 2)), zorder=1)
            ax.annotate(
                "Nyquist 1/(2T)",
                xy=(nyq, 1.0),
                xycoords=("data", "axes fraction"),
                xytext=(3, -10),
                textcoords="offset points",
                fontsize=7,
                color=MUTED,
            )
            q_opt = (doc["data"].get("q_optimal") or {}).get("case")
            if key == "ber" and q_opt:
                qc = doc["cases"][q_opt - 1]
                if qc.get(swept) is not None and qc.get("ber", 0) > 0:
                    ax.plot(
                        [qc[swept]],
                        [qc["ber"]],
                        marker="v",
                        markersize=9,
                        color="white",
                        markeredgecolor=INK,
                        linestyle="none",
                        zorder=5,
                        label=f"highest Q: case {q_opt}",
                    )
        ax.set_xscale("log")
        if logy:
            ax.set_yscale("log")
            if key == "enbw_hz":
                _khz(ax, "y")
        ax.set_ylabel(label)
        _khz(ax)
    for ax in axes[-1]:
        ax.set_xlabel(f"{'upper' if edge == 'high' else 'lower'} design edge [Hz]")
    handles, labels = axes.flat[2].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncol=min(5, len(labels)))
    held = ""
    if doc["grid"]["response"] == "bandpass":
        held = f"; {'lower' if edge == 'high' else 'upper'} design edge held at {subject[other]:.4g} Hz"
    fig.suptitle(f"Metrics against the {'upper' if edge == 'high' else 'lower'} edge{held}")
    return _render(
        fig,
        f"metrics-{'upper' if edge == 'high' else 'lower'}-edge",
        f"Metrics against the {'upper' if edge == 'high' else 'lower'} edge",
        "Each metric against the swept design edge, one line per family (marker) and order (line "
        f"style); thick dash-dot lines are the targets, the star marks the {role} case{held}.",
        svg=True,
    )


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


def ser_plot(doc: dict, spec: dict) -> Plot:
    """Signal-to-error against −3 dB bandwidth for every case; the optimum marked."""
    from matplotlib.figure import Figure

    cases = [c for c in doc["cases"] if c.get("ser_db") is not None]
    fig = Figure(figsize=(7.6, 4.2), layout="constrained")
    ax = fig.subplots()
    for fam, order, oi in _series_keys(cases):
        pts = [(c["bandwidth_hz"], c["ser_db"]) for c in cases if c["family"] == fam and c["order"] == order]
        x, y = zip(*pts)
        st = _style(fam, oi)
        ax.plot(
            x,
            y,
            linestyle="none",
            marker=st["marker"],
            color=st["color"],
            markerfacecolor=st["markerfacecolor"],
            markeredgecolor=st["markeredgecolor"],
            markersize=3.5,
            label=f"{fam} {order}",
        )
    so = spec["ser_optimum"]
    if so:
        ax.plot(
            [so["bandwidth_hz"]],
            [so["ser_db"]],
            marker="*",
            markersize=15,
            color="white",
            markeredgecolor=INK,
            markeredgewidth=1.4,
            linestyle="none",
            zorder=5,
            label=f"SER optimum: case {so['case']}, {so['ser_db']:.1f} dB",
        )
    subj = doc["cases"][spec["subject"]["case"] - 1]
    if subj.get("ser_db") is not None:
        ax.plot(
            [subj["bandwidth_hz"]],
            [subj["ser_db"]],
            marker="*",
            markersize=13,
            color=HIGHLIGHT,
            markeredgecolor=INK,
            linestyle="none",
            zorder=6,
            label=f"{'chosen' if spec['status'] == 'chosen' else 'closest'}: case {subj['id']}",
        )
    if "min_ser_db" in doc["targets"]:
        ax.axhline(doc["targets"]["min_ser_db"], color=TARGET, linewidth=2.2, linestyle="-.", label="SER target")
    ax.set_xscale("log")
    ax.set_xlabel("−3 dB bandwidth [Hz]")
    ax.set_ylabel("signal-to-error [dB]")
    _khz(ax)
    ax.legend(loc="best", ncol=2)
    ax.set_title("Noise/bandwidth trade-off: signal-to-error against bandwidth")
    return _render(
        fig,
        "ser",
        "Signal-to-error against bandwidth",
        "Signal-to-error (loss and noise together) for every case against its −3 dB bandwidth; the "
        "white star is the sweep's optimum, the filled star the "
        f"{'chosen' if spec['status'] == 'chosen' else 'closest'} case.",
        svg=True,
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
