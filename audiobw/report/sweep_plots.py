"""The plots over the sweep's cases: every metric against the swept edge (``metrics-upper-edge``,
``metrics-lower-edge``) and signal-to-error against −3 dB bandwidth (``ser``).  Styles and the
reading without colour: :mod:`audiobw.report.plots`.
"""

from __future__ import annotations

import math


from .figure import (
    HIGHLIGHT,
    INK,
    MUTED,
    TARGET,
    Plot,
    _khz,
    _render,
    _series_keys,
    _style,
)


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
