"""The perceptual plots of the report: the masked threshold against the error per critical band
(``masking``) and the subject's |H|² against the Wiener gain (``wiener``), from the sweep's
perceptual scorer rebuilt from sweep.json and spectrum.npz."""

from __future__ import annotations

import math

import numpy as np

from .figure import FAMILY_STYLE, GRIDLINE, HIGHLIGHT, INK, MUTED, Plot, _db, _khz, _render, log_average


def perceptual_scorer(doc: dict, spectrum: dict, chain):
    """The sweep's :class:`~audiobw.perceptual.scoring.PerceptualScorer`, rebuilt from
    sweep.json (playback conditions in ``limits``) and spectrum.npz; None when either lacks them."""
    from types import SimpleNamespace

    from ..perceptual.scoring import Listening, PerceptualScorer

    lim = doc.get("limits")
    if not lim or spectrum is None or "band_frames" not in spectrum:
        return None
    program = lim.get("program") or ("speech" if any(c.get("sii") is not None for c in doc["cases"]) else "music")
    hl = lim.get("hearing_threshold_hl")
    listening = Listening(program, lim["playback_spl_db"], {float(k): float(v) for k, v in hl} if hl else None)
    analysis = SimpleNamespace(
        freqs_hz=np.asarray(spectrum["freqs_hz"], float),
        weights_hz=np.asarray(spectrum["weights_hz"], float),
        psd=np.asarray(spectrum["psd"], float),
        band_edges_hz=np.asarray(spectrum["band_edges_hz"], float),
        band_frames=np.asarray(spectrum["band_frames"], float),
        sample_rate_hz=int(spectrum["sample_rate_hz"]),
    )
    return PerceptualScorer(analysis, chain, listening)


def _case_noise(scorer, chain, filt):
    from ..noise import noise_total

    a = scorer.analysis
    return noise_total(chain, filt, a.freqs_hz, a.weights_hz, a.sample_rate_hz)


def masking_plot(doc: dict, spec: dict, scorer, chain) -> Plot:
    """Masked threshold per critical band against the error of the subject and next-narrower cases."""
    from matplotlib.figure import Figure

    from .run import rebuild_filter

    subject = doc["cases"][spec["subject"]["case"] - 1]
    nn_id = (doc.get("choice") or {}).get("next_narrower") if spec["status"] == "chosen" else None
    role = "chosen" if spec["status"] == "chosen" else "closest (fails)"
    shown = [(subject, role)] + ([(doc["cases"][nn_id - 1], "next narrower")] if nn_id else [])
    mask = scorer.mask
    edges = scorer.edges
    rows = {}
    for case, label in shown:
        cf = rebuild_filter(doc, case)
        err, _tau = scorer.band_errors(cf, _case_noise(scorer, chain, cf))
        over = err > mask
        counts = over.sum(axis=0)
        b = int(np.argmax(counts))
        rows[case["id"]] = {
            "label": label,
            "error": err,
            "over_pct_by_band": 100.0 * counts / over.shape[0],
            "audible_frames_pct": 100.0 * float(np.mean(np.any(over, axis=1))),
            "audible_band_hz": [float(edges[b]), float(edges[b + 1])] if counts[b] > 0 else None,
            "nmr_db": 10.0 * math.log10(float(np.mean(err / mask))),
        }
    # the frame shown: where the narrowest case shown is furthest above the threshold
    worst = rows[shown[-1][0]["id"]]["error"] / mask
    frame = int(np.argmax(worst.max(axis=1)))
    an = doc["analysis"]
    t_s = frame * an["frame_stride"] * an["frame_len"] / doc["input"]["sample_rate_hz"]
    x = scorer.centres_hz
    fig = Figure(figsize=(7.6, 7.2), layout="constrained")
    ax1, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    ax1.plot(x, _db(scorer.frames[frame]), color=MUTED, linewidth=1.0, marker=".", label="program")
    ax1.plot(x, _db(mask[frame]), color=INK, linewidth=2.4, label="masked threshold")
    ax1.plot(x, _db(scorer.quiet), color=INK, linewidth=1.0, linestyle=":", label="threshold in quiet")
    styles = (
        dict(color=HIGHLIGHT, linestyle="-", marker="o", markeredgecolor=INK),
        dict(color=FAMILY_STYLE["elliptic"][0], linestyle="--", marker="s", markerfacecolor="white"),
    )
    for (case, label), st in zip(shown, styles):
        r = rows[case["id"]]
        ax1.plot(x, _db(r["error"][frame]), label=f"error, {label}: case {case['id']}", **st)
        ax2.step(
            edges[1:],
            r["over_pct_by_band"],
            where="pre",
            color=st["color"],
            linestyle=st["linestyle"],
            linewidth=1.8,
            label=f"{label}: case {case['id']}, {r['audible_frames_pct']:.1f} % of frames above in some band",
        )
    named = rows[shown[-1][0]["id"]]["audible_band_hz"]
    if named:
        for ax in (ax1, ax2):
            ax.axvspan(max(named[0], x[0]), named[1], color=GRIDLINE, alpha=0.45, zorder=0)
    finite = _db(mask[frame])
    ax1.set_ylim(
        min(float(np.min(_db(scorer.quiet))), float(np.min(finite))) - 25.0,
        max(float(np.max(_db(scorer.frames[frame]))), float(np.max(finite))) + 10.0,
    )
    ax1.set_ylabel("band level [dB SPL]")
    ax2.set_ylabel("frames with error above\nthe masked threshold [%]")
    top = max(float(np.max(r["over_pct_by_band"])) for r in rows.values())
    ax2.set_ylim(0, min(105.0, max(5.0, 1.25 * top)))
    ax2.set_xlabel("critical-band centre frequency [Hz]")
    ax2.set_xscale("log")
    ax2.set_xlim(max(edges[0], 20.0), edges[-1])
    _khz(ax2)
    handles, labels = ax1.get_legend_handles_labels()
    h2, l2 = ax2.get_legend_handles_labels()
    fig.legend(handles + h2, labels + l2, loc="outside lower center", ncol=2)
    kept = mask.shape[0]
    fig.suptitle(
        f"Audibility at {scorer.listening.spl_db:g} dB SPL: frame {frame + 1} of {kept} kept "
        f"(t = {t_s:.2f} s, the {shown[-1][1]} case's worst)"
    )
    data = {
        "frame": frame,
        "time_s": t_s,
        "centres_hz": x,
        "mask_db": _db(mask[frame]),
        "quiet_db": _db(scorer.quiet),
        "program_db": _db(scorer.frames[frame]),
        "cases": {
            cid: {k: v for k, v in r.items() if k != "error"} | {"error_db": _db(r["error"][frame])}
            for cid, r in rows.items()
        },
    }
    shaded = (
        f" The shaded band, {named[0]:.4g}–{named[1]:.4g} Hz, is the one above its threshold in the most "
        "frames for the narrowest case shown."
        if named
        else ""
    )
    plot = _render(
        fig,
        "masking",
        "Masked threshold and error per critical band",
        f"Top: at the {shown[-1][1]} case's worst frame (largest error over threshold in any band), "
        "per critical band in dB SPL at the playback level: the program, its masked threshold "
        "(spreading function of Schroeder, Atal & Hall 1979, offsets of Johnston 1988, not below the "
        "threshold in quiet of ISO 226:2003), and each case's error (what the filter removes, phase "
        "included, plus the chain noise). Bottom: over all kept frames, the share in which each "
        f"band's error is above its masked threshold.{shaded}",
        svg=True,
    )
    plot.data = data
    return plot


def wiener_plot(doc: dict, spec: dict, scorer, chain, filt) -> Plot:
    """|H(f)|² of the subject filter against the Wiener gain S/(S + N_pre)."""
    from matplotlib.figure import Figure

    from ..perceptual import wiener
    from ..perceptual.scoring import complex_response

    subject = doc["cases"][spec["subject"]["case"] - 1]
    a = scorer.analysis
    f, w = a.freqs_hz, a.weights_hz
    fm, sm = log_average(f, scorer.S)
    _, nm = log_average(f, scorer.n_pre)
    gain = wiener.wiener_gain(sm, nm)
    h2 = np.abs(complex_response(filt, fm)) ** 2
    h = complex_response(filt, f)
    noise = _case_noise(scorer, chain, filt)
    _err, tau = scorer.band_errors(filt, noise)
    mse = float(np.sum(w * wiener.removed_psd(h, scorer.S, f, tau)) + np.sum(noise * w))
    ser_bound = 10.0 * math.log10(scorer.p_total / scorer.mse_min)
    gap = wiener.gap_db(mse, scorer.mse_min)
    fig = Figure(figsize=(7.6, 4.2), layout="constrained")
    ax = fig.subplots()
    colour = FAMILY_STYLE.get(spec["filter"]["family"], (INK,))[0]
    ax.plot(fm, _db(gain), color=INK, linewidth=2.2, label="Wiener gain S/(S+N)")
    ax.plot(
        fm,
        _db(h2),
        color=colour,
        linewidth=1.6,
        linestyle="--",
        label=f"|H|², {'chosen' if spec['status'] == 'chosen' else 'closest'}: case {subject['id']}",
    )
    ax.axhline(-3.0103, color=MUTED, linewidth=0.8, linestyle=":")
    ax.set_xscale("log")
    ax.set_xlim(max(fm[0], 1.0), f[-1])
    ax.set_ylim(-80.0, 5.0)
    ax.set_xlabel("frequency [Hz]")
    ax.set_ylabel("power gain [dB]")
    _khz(ax)
    ax.legend(loc="lower left")
    ax.set_title(
        f"Wiener bound: SER ≤ {ser_bound:.1f} dB for any linear filter; case {subject['id']} is "
        f"{gap:.1f} dB above the bound's error"
    )
    data = {"freqs_hz": fm, "gain_db": _db(gain), "h2_db": _db(h2), "wiener_ser_db": ser_bound, "wiener_gap_db": gap}
    plot = _render(
        fig,
        "wiener",
        "Filter against the Wiener gain",
        "Power gain of the filter, |H(f)|², beside the non-causal Wiener gain S/(S+N) of the program "
        "(S, long-term spectrum at the converter input) and the chain noise entering before the filter "
        "(N; noise added after it only raises the bound). Spectra averaged over 1/160-decade cells. "
        "(Wiener 1949; Van Trees 1968, §6.2.)",
        svg=True,
    )
    plot.data = data
    return plot
