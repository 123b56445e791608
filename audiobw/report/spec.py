"""The spec sheet of a finished sweep: spec.json, spec.md, plots and report.html.

:func:`write_report` is the entry point: it reads ``sweep.json`` (and the
program spectrum ``spectrum.npz`` written beside it, and any render output in
``render-*/`` subfolders), rebuilds the chosen filter and chain from the
case, and writes beside sweep.json:

* ``spec.json`` — the spec-sheet block, machine-readable (docs/spec.schema.json);
* ``spec.md`` — the same block as Markdown;
* ``plot-*.png`` (and ``.svg`` for line plots) — see :mod:`audiobw.report.plots`;
* ``report.html`` — one self-contained page (:mod:`audiobw.report.html`).

Every figure of the block either comes straight from the sweep row (so the
sheet and sweep.json agree) or is computed here from the rebuilt filter and
chain: stopband attenuation, passband ripple and flatness, group delay, the
A-weighted noise and the dynamic range (:func:`audiobw.noise.budget`).

References
----------
.. [1] AES17-2020 §3 (dBFS re a full-scale sine), §6 (THD+N).
.. [2] Group delay τ(ω) = −dφ/dω of a rational response from its poles and
   zeros: each factor (x − c) contributes Re(1/(jω − c)) (analog, x = jω)
   or Re(e^{jθ}/(e^{jθ} − c)) samples (digital, x = e^{jθ}); poles add,
   zeros subtract.  A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal
   Processing*, 3rd ed., §5.1.2 (group delay of a first-order factor).
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path

import numpy as np

from .. import __version__, registry
from ..audio import write_text_atomic
from ..cautions import ESTIMATE_CAUTION, LISTENING_CAUTION
from ..errors import AudiobwError, AudioFileError, ParameterError
from ..names import md_code, md_text
from ..metrics import TARGET_KEYS, TARGET_METRIC
from .text import TARGET_LABEL, conflict_text

SPEC_VERSION = 1
#: chain key -> (label, unit); the unit is the SI unit of the stored value.
CHAIN_FIELDS = {
    "source_ohms": ("source resistance Rs", "Ω"),
    "temperature_k": ("source temperature T", "K"),
    "gain_db": ("amplifier gain G", "dB"),
    "en_v_rthz": ("amplifier voltage noise e_n", "V/√Hz"),
    "in_a_rthz": ("amplifier current noise i_n", "A/√Hz"),
    "h2_db": ("2nd harmonic at full scale (null: linear)", "dB re fundamental"),
    "h3_db": ("3rd harmonic at full scale (null: linear)", "dB re fundamental"),
    "amp_bandwidth_hz": ("amplifier −3 dB bandwidth (null: unlimited)", "Hz"),
    "en_corner_hz": ("1/f corner of e_n (null: white)", "Hz"),
    "in_corner_hz": ("1/f corner of i_n (null: white)", "Hz"),
    "en_table": ("measured e_n table (log-log between rows, flat beyond; null: none)", ""),
    "en_table_file": ("file of the e_n table", ""),
    "bits": ("converter resolution N", "bit"),
    "full_scale_vrms": ("full-scale sine at the converter input", "V rms"),
    "dither": ("converter dither", ""),
    "stage": ("filter position (analog: ahead of the converter)", ""),
    "input_gain_db": ("gain applied to the file's program", "dB"),
    "anti_alias": ("anti-alias model (none: everything above fs/2 folds; ideal: a brick-wall at fs/2)", ""),
}
NOISE_LABELS = {
    "source_thermal": "source thermal noise (4kT·Rs)",
    "amplifier_voltage": "amplifier voltage noise (e_n)",
    "amplifier_current": "amplifier current noise (i_n·Rs)",
    "quantisation": "quantisation (q²/12)",
    "dither": "TPDF dither (2q²/12)",
}
SUMMARY_KEYS = (("id", "response", "family", "order", "low_hz", "high_hz") + registry.keys(1, "summary")
                + ("passes", "fails", "margins_db"))
GROUP_DELAY_AT_HZ = 1000.0
AB_CLIPS = ("ab-reference.wav", "ab-processed.wav")
#: Rendered at the chain's true level: linked for measurement, never offered as a player.
TRUE_LEVEL_CLIPS = ("chain-output.wav",)


# -- reading a run -------------------------------------------------------------

def read_run(out_dir) -> dict:
    """Read the outputs of a sweep folder.

    Returns
    -------
    dict
        ``dir`` (Path), ``doc`` (sweep.json mapping), ``sweep_sha256``,
        ``spectrum`` (dict of arrays from spectrum.npz, or None), ``renders``
        (list of render folders found, see :func:`find_renders`).

    Raises
    ------
    ParameterError
        The folder or its sweep.json is missing.
    AudioFileError
        sweep.json or spectrum.npz is unreadable, not audiobw's, or the two
        come from different programs.
    """
    d = Path(out_dir)
    if not d.is_dir():
        raise ParameterError(f"report: {str(d)!r} is not a folder; accepted: a folder written by audiobw sweep")
    path = d / "sweep.json"
    if not path.is_file():
        raise ParameterError(f"report: {str(d)!r} holds no sweep.json; accepted: a folder written by audiobw sweep")
    from .validate import load_spectrum, loads, validate_sweep

    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise AudioFileError(f"{path}: cannot read ({exc.strerror or exc})") from None
    doc = loads(path, raw)
    if not isinstance(doc, dict) or doc.get("tool") != "audiobw":
        why = f"tool is {doc.get('tool')!r}" if isinstance(doc, dict) else "not a JSON object"
        raise AudioFileError(f"{path}: not a sweep.json written by audiobw ({why}); "
                             "accepted: a folder written by audiobw sweep")
    validate_sweep(doc, path)
    spectrum = None
    npz = d / "spectrum.npz"
    if npz.is_file():
        spectrum = load_spectrum(npz, doc)
        if str(spectrum["sha256"]) != doc["input"]["sha256"]:
            raise AudioFileError(
                f"{npz}: its program (sha256 {str(spectrum['sha256'])[:12]}…) is not the one in sweep.json "
                f"({doc['input']['sha256'][:12]}…); accepted: the spectrum.npz written by the same sweep")
    return {"dir": d, "doc": doc, "sweep_sha256": hashlib.sha256(raw).hexdigest(), "spectrum": spectrum,
            "renders": find_renders(d)}


PNG_MAGIC = (b"\x89PNG\r\n\x1a\n",)  # PNG signature (ISO/IEC 15948, clause 5.2)
WAV_MAGIC = (b"RIFF", b"RF64", b"BW64")  # RIFF/WAVE and its 64-bit forms (EBU Tech 3306)


def safe_member(root, path, magic) -> bool:
    """True if ``path`` may be linked or embedded in the report of ``root``: not a symbolic link,
    a regular file (or folder when ``magic`` is None) whose resolved path lies inside ``root``,
    and whose first bytes are one of ``magic``.  A planted link to a private file is never read."""
    import os
    import stat

    try:
        st = os.lstat(path)
        real_root = os.path.realpath(root)
        real = os.path.realpath(path)
    except (OSError, ValueError):
        return False
    if stat.S_ISLNK(st.st_mode) or os.path.commonpath([real_root, real]) != real_root:
        return False
    if magic is None:
        return stat.S_ISDIR(st.st_mode)
    if not stat.S_ISREG(st.st_mode):
        return False
    try:
        with open(path, "rb") as fh:
            head = fh.read(12)
    except OSError:
        return False
    return any(head.startswith(m) for m in magic) and (magic is not WAV_MAGIC or head[8:12] == b"WAVE")


def find_renders(out_dir) -> list[dict]:
    """Render output in ``render-*`` subfolders: their clips, A/B pair first.

    Returns a list of ``{"folder", "eye", "ab": [names], "other": [names], "true_level": [names]}``
    (``eye``: "eye.png" when a data-program render drew its eye diagram, else None)
    (names relative to the folder), sorted by folder name; empty if none.
    """
    found = []
    root = Path(out_dir)
    for sub in sorted(root.glob("render-*")):
        if sub.is_symlink() or not sub.is_dir() or not safe_member(root, sub, None):
            continue
        wavs = sorted(p.name for p in sub.iterdir() if p.suffix.lower() == ".wav" and safe_member(root, p, WAV_MAGIC))
        if not wavs:
            continue
        found.append({
            "folder": sub.name,
            "eye": "eye.png" if safe_member(root, sub / "eye.png", PNG_MAGIC) else None,
            "ab": [n for n in AB_CLIPS if n in wavs],
            "true_level": [n for n in wavs if n in TRUE_LEVEL_CLIPS],
            "other": [n for n in wavs if n not in AB_CLIPS and n not in TRUE_LEVEL_CLIPS],
        })
    return found


# -- rebuilding the case ---------------------------------------------------------

def rebuild_filter(doc: dict, case: dict):
    """The case's filter, designed again exactly as the sweep designed it."""
    from ..filters import FilterSpec, design

    spec = FilterSpec(case["response"], case["family"], int(case["order"]), case["design_low_hz"],
                      case["design_high_hz"], ripple_db=doc["grid"]["ripple_db"],
                      stopband_db=doc["grid"]["stopband_db"], stage=doc["chain"]["stage"],
                      fs_hz=doc["input"]["sample_rate_hz"])
    return design(spec)


def rebuild_chain(doc: dict):
    from ..chain import Chain

    return Chain(**doc["chain"])


def group_delay_s(filt, freqs_hz) -> np.ndarray:
    """Group delay in seconds at ``freqs_hz``, analytically from the zpk (:meth:`Filter.group_delay_s`)."""
    return filt.group_delay_s(freqs_hz)


def _band_grid(lo: float, hi: float, n: int = 4000) -> np.ndarray:
    lo = max(lo, 0.0)
    lin = np.linspace(lo, hi, n)
    if lo > 0:
        return np.union1d(lin, np.geomspace(lo, hi, n))
    return np.union1d(lin, np.geomspace(hi * 1e-4, hi, n))


def _passband(case: dict, nyq: float) -> tuple[float, float]:
    lo = case["low_hz"] if case["low_hz"] is not None else 0.0
    hi = case["high_hz"] if case["high_hz"] is not None else nyq
    return lo, min(hi, nyq)


# -- the spec block ----------------------------------------------------------------

def target_info(key: str) -> tuple[str, str, str, str]:
    """(label, metric key, unit, sense sign) of a target; targets added later get a generic label."""
    if key in TARGET_LABEL:
        return TARGET_LABEL[key]
    metric = TARGET_METRIC.get(key, (key,))[0]
    return key, metric, "", "≥" if key.startswith("min") else "≤"


def _summary(case: dict, ref: dict | None = None) -> dict:
    out = {k: case.get(k) for k in SUMMARY_KEYS}
    out["bandwidth_change_hz"] = (case["bandwidth_hz"] - ref["bandwidth_hz"]) if ref else 0.0
    return out


def _worst_margin(case: dict) -> float:
    vals = list(case["margins_db"].values())
    return min((-math.inf if v is None else v) for v in vals) if vals else -math.inf


def closest_case(cases: list[dict]) -> dict:
    """With no case passing: the case whose worst target margin is largest (the sweep's own rule)."""
    return max(cases, key=lambda c: (_worst_margin(c), -c["id"]))


def neighbours(cases: list[dict], subject: dict) -> dict:
    """Next-narrower and next-wider cases of the same family and order, and the runner-up.

    The runner-up is the passing case the choice rule would take if the
    subject were removed (None when no other case passes).
    """
    same = [c for c in cases if c["family"] == subject["family"] and c["order"] == subject["order"]
            and c["id"] != subject["id"]]
    narrower = [c for c in same if c["bandwidth_hz"] < subject["bandwidth_hz"]]
    wider = [c for c in same if c["bandwidth_hz"] > subject["bandwidth_hz"]]
    nn = max(narrower, key=lambda c: (c["bandwidth_hz"], -c["enbw_hz"], -c["id"])) if narrower else None
    nw = min(wider, key=lambda c: (c["bandwidth_hz"], c["enbw_hz"], c["id"])) if wider else None
    passing = [c for c in cases if c["passes"] and c["id"] != subject["id"]]
    ru = min(passing, key=lambda c: (c["bandwidth_hz"], c["enbw_hz"], c["order"], c["id"])) if passing else None
    return {"next_narrower": _summary(nn, subject) if nn else None,
            "next_wider": _summary(nw, subject) if nw else None,
            "runner_up": _summary(ru, subject) if ru else None}


def stopband_points(filt, case: dict, fs_hz: float) -> list[dict]:
    """Attenuation (dB, positive = below the passband peak) at the named frequencies."""
    nyq = fs_hz / 2.0
    points = []

    def add(name, label, f, note=None):
        att = None
        if f is not None and (filt.analog or f < nyq) and f > 0:
            att = float(-filt.response_db(f))
        elif f is not None and note is None:
            note = "above fs/2: a digital filter has no response there"
        points.append({"name": name, "label": label, "freq_hz": f, "attenuation_db": att, "note": note})

    hi, lo = case.get("high_hz"), case.get("low_hz")
    if hi is not None:
        add("twice_upper_edge", "2 × f_high", 2.0 * hi)
        if filt.analog:
            add("alias_of_upper_edge", "fs − f_high (aliases onto f_high)", fs_hz - hi)
        else:
            points.append({"name": "alias_of_upper_edge", "label": "fs − f_high (aliases onto f_high)",
                           "freq_hz": fs_hz - hi, "attenuation_db": None,
                           "note": "digital stage: the filter acts after sampling; what aliases onto f_high "
                                   "is set by the converter's own anti-alias filter"})
    if lo is not None:
        add("half_lower_edge", "f_low / 2", lo / 2.0)
    return points


def passband_figures(filt, case: dict, doc: dict) -> dict:
    """Ripple (rippled families, over the ripple band) and flatness over the program's occupied band."""
    fs = doc["input"]["sample_rate_hz"]
    nyq = fs / 2.0
    family = case["family"]
    out = {"design_ripple_db": doc["grid"]["ripple_db"] if family in ("chebyshev1", "elliptic") else None}
    if family in ("chebyshev1", "elliptic"):
        lo = case["design_low_hz"] or 0.0
        hi = case["design_high_hz"] or 0.98 * nyq
        g = filt.response_db(_band_grid(lo, hi))
        out["ripple_db"] = float(np.max(g) - np.min(g))
        out["ripple_band_hz"] = [lo, hi]
        out["ripple_note"] = "peak-to-peak gain over the ripple band (the design edges)"
    else:
        out["ripple_db"] = 0.0
        out["ripple_band_hz"] = None
        out["ripple_note"] = f"{family}: monotonic passband, no ripple by design"
    occ_lo, occ_hi = doc["input"]["occupied_low_hz"], doc["input"]["occupied_high_hz"]
    g = filt.response_db(_band_grid(max(occ_lo, 1e-3), min(occ_hi, nyq)))
    out["flatness"] = {"low_hz": occ_lo, "high_hz": occ_hi, "max_db": float(np.max(g)),
                       "min_db": float(np.min(g)), "variation_db": float(np.max(g) - np.min(g))}
    return out


def group_delay_figures(filt, case: dict, doc: dict) -> dict:
    nyq = doc["input"]["sample_rate_hz"] / 2.0
    at = float(group_delay_s(filt, [GROUP_DELAY_AT_HZ])[0])

    def spread(lo, hi):
        tau = group_delay_s(filt, _band_grid(lo, hi))
        tau = tau[np.isfinite(tau)]  # a zero on the jω axis makes its own frequency singular
        return {"low_hz": lo, "high_hz": hi, "min_s": float(np.min(tau)), "max_s": float(np.max(tau)),
                "spread_s": float(np.max(tau) - np.min(tau))}

    lo, hi = _passband(case, nyq)
    occ_lo, occ_hi = doc["input"]["occupied_low_hz"], min(doc["input"]["occupied_high_hz"], nyq)
    g1k = float(filt.power_response(GROUP_DELAY_AT_HZ))
    return {"at_hz": GROUP_DELAY_AT_HZ, "at_s": at,
            "note": None if g1k >= 0.5 else "1 kHz is outside the −3 dB passband",
            "passband": spread(lo, hi), "occupied_band": spread(occ_lo, occ_hi)}


def noise_figures(chain, filt, doc: dict, case: dict) -> dict:
    from ..chain import vrms_to_dbu
    from ..noise import budget

    fs = doc["input"]["sample_rate_hz"]
    m = doc["meter"]
    b = budget(chain, filt, fs, meter=(m["low_hz"], m["high_hz"]))

    def fin(x):
        return x if x is not None and math.isfinite(x) else None

    comps = {k: {"label": NOISE_LABELS.get(k, k), "vrms": e["vrms"], "dbu": fin(e["dbu"]),
                 "dbfs": fin(e["dbfs"]), "share": e["share"]} for k, e in b["components"].items()}
    ta = b["total_a_weighted"]
    return {
        "meter": {"low_hz": m["low_hz"], "high_hz": m["high_hz"]},
        "vrms": case["noise_vrms"], "dbu": vrms_to_dbu(case["noise_vrms"]), "dbfs": case["noise_dbfs"],
        "a_weighted": {"vrms": ta["vrms"], "dbu": fin(ta["dbu"]), "dbfs": fin(ta["dbfs"])},
        "budget_total_vrms": b["total"]["vrms"],
        "components": comps,
        "dynamic_range_db": b["dynamic_range_db"],
        "dynamic_range_a_db": b["dynamic_range_a_db"],
    }


DATA_LINK_KEYS = ("eye_fraction", "eye_opening_v", "q", "ber", "jitter_pp_ui", "sample_delay_ui", "eye_ideal",
                  "q_ideal")


def _data_link(doc: dict, subject: dict) -> dict | None:
    """The data-program figures of the subject (null for an audio program)."""
    data = doc.get("data")
    if not data or "ber" not in subject:
        return None
    out = {"bit_rate_hz": data.get("bit_rate_hz"), "nyquist_min_hz": data.get("nyquist_min_hz")}
    out.update({k: subject.get(k) for k in DATA_LINK_KEYS})
    return out


def _targets(doc: dict, subject: dict, binding: str | None) -> list[dict]:
    out = []
    for key in list(TARGET_KEYS) + sorted(set(doc["targets"]) - set(TARGET_KEYS)):
        if key not in doc["targets"]:
            continue
        label, metric, unit, sense = target_info(key)
        margin = subject["margins_db"].get(key)
        out.append({"key": key, "label": label, "metric": metric, "sense": "min" if sense == "≥" else "max",
                    "limit": doc["targets"][key], "unit": unit, "value": subject.get(metric),
                    "margin_db": margin, "met": key not in subject["fails"], "binding": key == binding})
    return out


def build_spec(run: dict) -> dict:
    """The spec-sheet block (spec.json) from a run read by :func:`read_run`."""
    doc = run["doc"]
    cases = doc["cases"]
    by_id = {c["id"]: c for c in cases}
    choice = doc.get("choice")
    if choice:
        subject, role = by_id[choice["case"]], "chosen"
    else:
        subject, role = closest_case(cases), "closest"
    fs = doc["input"]["sample_rate_hz"]
    filt = rebuild_filter(doc, subject)
    chain = rebuild_chain(doc)
    binding = choice.get("binding") if choice else None
    ser_best = max((c for c in cases if c.get("ser_db") is not None), key=lambda c: (c["ser_db"], -c["id"]),
                   default=None)
    inp = doc["input"]
    unmet = []
    for key, best in (doc.get("unmet") or {}).items():
        label, metric, unit, sense = target_info(key)
        unmet.append({"key": key, "label": label, "metric": metric, "sense": "min" if sense == "≥" else "max",
                      "limit": doc["targets"][key], "unit": unit, "best": best})
    conflicts = [{"targets": list(c["targets"]), "edge": c.get("edge"), "needs": c["needs"],
                  "text": conflict_text(c, doc["targets"], hz=lambda v: fmt(v, "Hz")).removeprefix("Conflict: ")}
                 for c in doc.get("conflicts") or []]
    chain_rows = [{"key": k, "label": CHAIN_FIELDS.get(k, (k, ""))[0], "value": _chain_value(k, v),
                   "unit": CHAIN_FIELDS.get(k, (k, ""))[1]} for k, v in doc["chain"].items()]
    spec = {
        "tool": "audiobw", "version": __version__, "spec_version": SPEC_VERSION,
        "sweep": {"file": "sweep.json", "sha256": run["sweep_sha256"], "version": doc.get("version"),
                  "spectrum_file": "spectrum.npz" if run["spectrum"] is not None else None},
        "input": {k: inp.get(k) for k in ("path", "sha256", "sample_rate_hz", "channels", "duration_s",
                                          "peak_dbfs", "rms_dbfs", "occupied_bw_hz", "occupied_low_hz",
                                          "occupied_high_hz")},
        "status": "chosen" if choice else "no_passing_case",
        "subject": {"role": role, "case": subject["id"], "passes": subject["passes"], "fails": subject["fails"]},
        "filter": {
            "response": subject["response"], "family": subject["family"], "order": subject["order"],
            "poles": subject["poles"], "stage": doc["chain"]["stage"],
            "low_hz": subject["low_hz"], "high_hz": subject["high_hz"],
            "design_low_hz": subject["design_low_hz"], "design_high_hz": subject["design_high_hz"],
            "bandwidth_hz": subject["bandwidth_hz"], "enbw_hz": subject["enbw_hz"],
            "stopband_design_db": doc["grid"]["stopband_db"] if subject["family"] == "elliptic" else None,
            "alias_rejection_db": subject.get("alias_rejection_db"),
        },
        "passband": passband_figures(filt, subject, doc),
        "stopband": stopband_points(filt, subject, fs),
        "group_delay": group_delay_figures(filt, subject, doc),
        "noise": noise_figures(chain, filt, doc, subject),
        "program": {k: subject.get(k) for k in ("snr_db", "snr_a_db", "loss_db", "lsd_db", "ser_db")},
        "data_link": _data_link(doc, subject),
        "thdn": {"tone_hz": doc["meter"]["tone_hz"], "tone_level_dbfs": doc["meter"]["tone_level_dbfs"],
                 "pct": subject.get("thdn_pct"), "db": subject.get("thdn_db"), "note": subject.get("thdn_note")},
        "chain": chain_rows,
        "targets": _targets(doc, subject, binding),
        "binding": binding,
        "binding_margin_db": choice.get("binding_margin_db") if choice else None,
        "grid_limited": bool(choice.get("grid_limited")) if choice else None,
        "grid_limits": list(choice.get("grid_limits") or []) if choice else [],
        "unmet": unmet,
        "conflicts": conflicts,
        "neighbours": neighbours(cases, subject),
        "ser_optimum": ({"case": ser_best["id"], "bandwidth_hz": ser_best["bandwidth_hz"],
                         "ser_db": ser_best["ser_db"], "family": ser_best["family"], "order": ser_best["order"]}
                        if ser_best else None),
        "cases_total": len(cases),
        "cases_passing": sum(1 for c in cases if c["passes"]),
        "meter": doc["meter"],
        "notes": list(doc.get("notes", [])),
        "caution": ESTIMATE_CAUTION,
    }
    return _clean(spec)


def _clean(x, sig: int = 7):
    """Round floats to ``sig`` significant digits; non-finite values become null."""
    if isinstance(x, dict):
        return {k: _clean(v, sig) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v, sig) for v in x]
    if isinstance(x, (np.floating, float)) and not isinstance(x, bool):
        x = float(x)
        return float(f"{x:.{sig}g}") if math.isfinite(x) else None
    if isinstance(x, np.integer):
        return int(x)
    return x


# -- Markdown ------------------------------------------------------------------------

def fmt(value, unit: str = "", digits: int = 4) -> str:
    """A value for the sheet: SI prefix where it helps; '—' for null."""
    from ..units import format_quantity

    if value is None:
        return "—"
    if isinstance(value, str):
        return value
    if unit == "%":
        return f"{value:.4g} %"
    if unit.startswith("dB"):
        # small figures (a loss of 0.032 dB) keep three significant digits
        return f"{value:.3g} {unit}" if 0 < abs(value) < 0.1 else f"{value:.2f} {unit}"
    if unit == "s":
        return format_quantity(value, "s", digits)
    if unit in ("bit", "K"):
        return f"{value:g} {unit}"
    return format_quantity(value, unit, digits)


def passband_phrase(spec: dict) -> str:
    from .text import band_words

    f = spec["filter"]
    band = band_words(f["response"], f["low_hz"], f["high_hz"], hz=lambda v: fmt(v, "Hz"))
    return f"{f['family']} order {f['order']} ({f['poles']} poles), {f['stage']} stage, {band}"


def _target_text(t: dict) -> str:
    sense = "≥" if t["sense"] == "min" else "≤"
    if t["key"] == "min_eye":  # a fraction of the unfiltered eye, read as the value beside it is
        return f"{t['label']} {sense} {100 * t['limit']:g} % of the unfiltered eye"
    if t["unit"] == "s":
        return f"{t['label']} {sense} {fmt(t['limit'], 's')}"
    return f"{t['label']} {sense} {t['limit']:g} {t['unit']}".rstrip()


def _metric_unit(metric: str) -> str:
    return {"thdn_pct": "%", "delay_spread_s": "s"}.get(metric, "dB")


def metric_value_text(metric: str, value) -> str:
    """A target's metric as the sheet shows it: BER and Q are plain numbers, the eye a percentage."""
    from .text import ber_text

    if value is None:
        return "—"
    if metric == "ber":
        return ber_text(value)
    if metric == "eye_fraction":
        return f"{100 * value:.1f} % of the unfiltered eye"
    if metric == "q":
        return f"{value:.2f}"
    return fmt(value, _metric_unit(metric))


def margin_value_text(key: str, margin) -> str:
    """A target's margin, signed; a BER that underflows a double has a margin beyond its range."""
    if margin is None:
        return "beyond the double range" if key == "max_ber" else "—"
    return f"{margin:+.3g} dB"


def spec_rows(spec: dict) -> list[tuple[str, str, str, object]]:
    """The main block as (section, label, shown text, json pointer) rows; shared by Markdown and HTML."""
    f, pb, gd, n = spec["filter"], spec["passband"], spec["group_delay"], spec["noise"]
    rows = [
        ("Passband", "filter", f"{f['family']} order {f['order']} {f['response']} ({f['poles']} poles), "
                               f"{f['stage']} stage", None),
        ("Passband", "−3 dB lower edge", fmt(f["low_hz"], "Hz") if f["low_hz"] is not None else "— (open)",
         "filter.low_hz"),
        ("Passband", "−3 dB upper edge", fmt(f["high_hz"], "Hz") if f["high_hz"] is not None else "— (open)",
         "filter.high_hz"),
        ("Passband", "−3 dB bandwidth", fmt(f["bandwidth_hz"], "Hz"), "filter.bandwidth_hz"),
        ("Passband", "equivalent noise bandwidth (ENBW)", fmt(f["enbw_hz"], "Hz"), "filter.enbw_hz"),
        ("Passband", "passband ripple", fmt(pb["ripple_db"], "dB") + f" ({pb['ripple_note']})",
         "passband.ripple_db"),
        ("Passband", f"gain variation over the program's occupied band ({fmt(pb['flatness']['low_hz'], 'Hz')} to "
                     f"{fmt(pb['flatness']['high_hz'], 'Hz')})", fmt(pb["flatness"]["variation_db"], "dB"),
         "passband.flatness.variation_db"),
    ]
    if f.get("alias_rejection_db") is not None:
        rows.append(("Stopband", "alias rejection: least attenuation over what the converter folds into the passband",
                     fmt(f["alias_rejection_db"], "dB"), "filter.alias_rejection_db"))
    for i, p in enumerate(spec["stopband"]):
        text = fmt(p["attenuation_db"], "dB") if p["attenuation_db"] is not None else f"— ({p['note']})"
        rows.append(("Stopband", f"attenuation at {p['label']} = {fmt(p['freq_hz'], 'Hz')}", text,
                     f"stopband.{i}.attenuation_db"))
    rows += [
        ("Phase", "group delay at 1 kHz", fmt(gd["at_s"], "s") + (f" ({gd['note']})" if gd["note"] else ""),
         "group_delay.at_s"),
        ("Phase", f"group delay spread over the −3 dB passband ({fmt(gd['passband']['low_hz'], 'Hz')} to "
                  f"{fmt(gd['passband']['high_hz'], 'Hz')})", fmt(gd["passband"]["spread_s"], "s"),
         "group_delay.passband.spread_s"),
        ("Phase", "group delay spread over the program's occupied band", fmt(gd["occupied_band"]["spread_s"], "s"),
         "group_delay.occupied_band.spread_s"),
        ("Noise", f"output noise ({fmt(n['meter']['low_hz'], 'Hz')} to {fmt(n['meter']['high_hz'], 'Hz')})",
         fmt(n["vrms"], "V rms"), "noise.vrms"),
        ("Noise", "output noise", fmt(n["dbu"], "dBu"), "noise.dbu"),
        ("Noise", "output noise", fmt(n["dbfs"], "dBFS"), "noise.dbfs"),
        ("Noise", "output noise, A-weighted", fmt(n["a_weighted"]["vrms"], "V rms"), "noise.a_weighted.vrms"),
        ("Noise", "output noise, A-weighted", fmt(n["a_weighted"]["dbfs"], "dBFS"), "noise.a_weighted.dbfs"),
        ("Noise", "dynamic range, full-scale sine", fmt(n["dynamic_range_db"], "dB"), "noise.dynamic_range_db"),
        ("Noise", "dynamic range, full-scale sine, A-weighted", fmt(n["dynamic_range_a_db"], "dB"),
         "noise.dynamic_range_a_db"),
        ("Program", "SNR for this program", fmt(spec["program"]["snr_db"], "dB"), "program.snr_db"),
        ("Program", "A-weighted SNR for this program", fmt(spec["program"]["snr_a_db"], "dB"), "program.snr_a_db"),
        ("Program", "program loss", fmt(spec["program"]["loss_db"], "dB"), "program.loss_db"),
        ("Program", "log-spectral distance", fmt(spec["program"]["lsd_db"], "dB"), "program.lsd_db"),
        ("Program", "signal-to-error", fmt(spec["program"]["ser_db"], "dB"), "program.ser_db"),
        ("Program", f"THD+N at {spec['thdn']['tone_hz']:g} Hz, {spec['thdn']['tone_level_dbfs']:g} dBFS",
         fmt(spec["thdn"]["pct"], "%") if spec["thdn"]["pct"] is not None else f"— ({spec['thdn']['note']})",
         "thdn.pct"),
    ]
    dl = spec.get("data_link")
    if dl:
        rows += [
            ("Data link", "bit rate", fmt(dl["bit_rate_hz"], "bit/s"), "data_link.bit_rate_hz"),
            ("Data link", "eye opening (fraction of the unfiltered eye)",
             f"{dl['eye_fraction']:.3f}" if dl["eye_fraction"] is not None else "—", "data_link.eye_fraction"),
            ("Data link", "eye opening", fmt(dl["eye_opening_v"], "V"), "data_link.eye_opening_v"),
            ("Data link", "Q factor", f"{dl['q']:.3g}" if dl["q"] is not None else "—", "data_link.q"),
            ("Data link", "eye opening of the filter alone on a perfect stream (ideal pulse)",
             f"{dl['eye_ideal']:.3f}" if dl.get("eye_ideal") is not None else "—", "data_link.eye_ideal"),
            ("Data link", "bit-error rate", metric_value_text("ber", dl["ber"]), "data_link.ber"),
            ("Data link", "peak-to-peak jitter", f"{dl['jitter_pp_ui']:.3g} UI" if dl["jitter_pp_ui"] is not None
             else "—", "data_link.jitter_pp_ui"),
        ]
    return rows


def json_pointer(spec: dict, pointer: str):
    node = spec
    for part in pointer.split("."):
        node = node[int(part)] if isinstance(node, list) else node[part]
    return node


def _chain_value(key: str, v):
    """A chain value as a spec row holds it: the e_n table as one line (its rows stay in sweep.json)."""
    if key == "en_table" and v is not None:
        from ..entable import summary

        return summary(v) + "; rows in sweep.json chain.en_table"
    return v


def chain_value_text(row: dict) -> str:
    v, unit = row["value"], row["unit"]
    if v is None:
        return "— (not modelled)"
    if isinstance(v, str):
        return v
    if row["key"] == "full_scale_vrms":
        from ..chain import vrms_to_dbu
        return f"{fmt(v, 'V rms')} ({vrms_to_dbu(v):+.2f} dBu)"
    if row["key"] == "temperature_k":
        return f"{v:g} K ({v - 273.15:.1f} °C)"
    if unit.startswith("dB"):
        return f"{v:g} {unit}"
    return fmt(v, unit)


def case_line(c: dict | None) -> str:
    if c is None:
        return "— (none in the grid)"
    lo = fmt(c["low_hz"], "Hz") if c["low_hz"] is not None else "0"
    hi = fmt(c["high_hz"], "Hz") if c["high_hz"] is not None else "fs/2"
    verdict = "passes" if c["passes"] else "fails " + ", ".join(target_info(k)[0] for k in c["fails"])
    return (f"case {c['id']}: {c['family']} {c['order']}, {lo} to {hi} (bandwidth {fmt(c['bandwidth_hz'], 'Hz')}, "
            f"{c['bandwidth_change_hz']:+.0f} Hz); ENBW {fmt(c['enbw_hz'], 'Hz')}, noise {fmt(c['noise_dbfs'], 'dBFS')}, "
            f"SNR-A {fmt(c['snr_a_db'], 'dB')}, loss {fmt(c['loss_db'], 'dB')}, LSD {fmt(c['lsd_db'], 'dB')} — {verdict}")


def markdown(spec: dict, renders: list | None = None) -> str:
    """spec.md text."""
    inp = spec["input"]
    name = Path(inp["path"]).name
    out = [f"# Passband spec sheet — {md_text(name)}", ""]
    out.append(f"Program: {md_code(inp['path'])} (sha256 `{inp['sha256'][:16]}…`), {inp['duration_s']:g} s, "
               f"{inp['channels']} ch, {inp['sample_rate_hz']} Hz; peak {inp['peak_dbfs']:.1f} dBFS, "
               f"rms {inp['rms_dbfs']:.1f} dBFS; 99 % occupied band {fmt(inp['occupied_low_hz'], 'Hz')} to "
               f"{fmt(inp['occupied_high_hz'], 'Hz')}.")
    out.append(f"{spec['cases_passing']} of {spec['cases_total']} cases meet every target.")
    out.append("")
    out.append(f"> **Caution.** {spec['caution']}")
    out.append("")
    if spec["status"] == "no_passing_case":
        out += ["## No passing case", "", "No case of the grid meets every target."]
        if spec["unmet"]:
            out += ["", "No case meets these targets even on their own (the best value any case reached):", ""]
            out += ["| target | best reached |", "|---|---|"]
            for u in spec["unmet"]:
                out.append(f"| {_target_text(u)} | {metric_value_text(u['metric'], u['best'])} |")
        if spec.get("conflicts"):
            out += ["", "These targets each hold in some case but never together:", ""]
            out += [f"- {c['text']}" for c in spec["conflicts"]]
        out += ["", f"The figures below are for the **closest case** ({spec['subject']['case']}, the largest worst "
                f"margin), which fails: {', '.join(target_info(k)[0] for k in spec['subject']['fails'])}. "
                "It is not a recommendation.", ""]
        out.append(f"## Closest case: {passband_phrase(spec)}")
    else:
        out.append(f"## Chosen passband: {passband_phrase(spec)}")
        b = spec["binding"]
        if b:
            t = next(t for t in spec["targets"] if t["key"] == b)
            out += ["", f"Bound by **{_target_text(t)}** (margin {margin_value_text(b, spec['binding_margin_db'])})."]
        if spec["grid_limits"]:
            from .text import grid_limit_lines
            out += [""] + grid_limit_lines(spec["filter"]["response"], spec["grid_limits"])
        elif spec["grid_limited"]:
            out += ["", "This is the narrowest case of its family and order in the grid: extend the grid to see "
                    "whether a narrower passband also passes."]
    out += ["", "| quantity | value |", "|---|---|"]
    section = None
    for sec, label, text, _ptr in spec_rows(spec):
        if sec != section:
            out.append(f"| **{sec}** | |")
            section = sec
        out.append(f"| {label} | {text} |")
    out += ["", "### Targets", "", "| target | this case | margin | met | bound the choice |", "|---|---|---|---|---|"]
    for t in spec["targets"]:
        margin = margin_value_text(t["key"], t["margin_db"])
        out.append(f"| {_target_text(t)} | {metric_value_text(t['metric'], t['value'])} | {margin} | "
                   f"{'yes' if t['met'] else 'no'} | {'yes' if t['binding'] else ''} |")
    out += ["", "### Margin: the neighbouring cases", ""]
    nb = spec["neighbours"]
    out.append(f"- next narrower (same family and order): {case_line(nb['next_narrower'])}")
    out.append(f"- next wider (same family and order): {case_line(nb['next_wider'])}")
    out.append(f"- runner-up (next passing case by the choice rule): {case_line(nb['runner_up'])}")
    so = spec["ser_optimum"]
    if so:
        out.append(f"- signal-to-error optimum of the sweep: case {so['case']} ({so['family']} {so['order']}), "
                   f"bandwidth {fmt(so['bandwidth_hz'], 'Hz')}, SER {fmt(so['ser_db'], 'dB')}")
    out += ["", "### Noise budget", "", "| contributor | noise | dBu | dBFS | share |", "|---|---|---|---|---|"]
    for c in spec["noise"]["components"].values():
        out.append(f"| {c['label']} | {fmt(c['vrms'], 'V rms')} | {fmt(c['dbu'], 'dBu')} | {fmt(c['dbfs'], 'dBFS')} "
                   f"| {100 * c['share']:.1f} % |")
    out += ["", "### Chain assumptions", "", "| parameter | key | value |", "|---|---|---|"]
    for row in spec["chain"]:
        out.append(f"| {row['label']} | `{row['key']}` | {chain_value_text(row)} |")
    m = spec["meter"]
    out += ["", f"Meter band {fmt(m['low_hz'], 'Hz')} to {fmt(m['high_hz'], 'Hz')} ({m['mode']}); "
            f"A-weighting per IEC 61672-1; dBFS re a full-scale sine (AES17); 0 dBu = 0.7746 V rms."]
    for note in spec["notes"]:
        out.append(f"Note: {note}")
    if renders:
        out += ["", "### Listening clips", "", f"> {LISTENING_CAUTION}", ""]
        for r in renders:
            for nm in r["ab"] + r["other"]:
                out.append(f"- `{r['folder']}/{nm}`")
    out += ["", f"*{spec['caution']}*", ""]
    return "\n".join(out)


# -- the entry point ---------------------------------------------------------------------

def spec_json_text(spec: dict) -> str:
    return json.dumps(spec, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def write_report(out_dir, *, plots: bool = True, html: bool = True) -> dict[str, Path]:
    """Write spec.json, spec.md, the plots and report.html beside ``out_dir/sweep.json``.

    Parameters
    ----------
    out_dir : path-like
        A folder written by ``audiobw sweep`` (sweep.json, and spectrum.npz
        for the spectrum plot); ``render-*/`` subfolders with A/B clips are
        picked up when present.
    plots, html : bool
        Write the plots and the HTML page (the page needs the plots).

    Returns
    -------
    dict of str -> Path
        ``spec_json``, ``spec_md``, ``plot_<name>_png`` / ``plot_<name>_svg``
        and ``html``.
    """
    from ..audio import output_lock

    run = read_run(out_dir)
    with output_lock(run["dir"]):
        try:
            return _write_report(run, plots, html)
        except (KeyError, TypeError, ValueError, IndexError, ZeroDivisionError, OverflowError,
                AttributeError) as exc:
            if isinstance(exc, AudiobwError):
                raise
            # validate_sweep holds the known rules; a value combination they miss still ends in one line
            raise AudioFileError(f"{run['dir'] / 'sweep.json'}: inconsistent content ({type(exc).__name__}: "
                                 f"{str(exc)[:120]}); accepted: a sweep.json as written by audiobw sweep "
                                 "(docs/sweep.schema.json)") from exc


def _input_candidates(run) -> list:
    """The sweep's input as the report may find it: the recorded path (relative to the folder the
    sweep ran in, unknown here), read from here and from DIR; and any existing file in DIR we would
    write whose SHA-256 is the input's (refused: outputs never land on an input)."""
    from ..audio import refuse_input_target, sha256_file

    d, inp = run["dir"], run["doc"]["input"]
    given = Path(str(inp.get("path", "")))
    found = [given, d / given, d / given.name]
    sha = inp.get("sha256")
    for target in [d / "spec.json", d / "spec.md", d / "report.html", *sorted(d.glob("plot-*"))]:
        try:
            if sha and target.is_file() and sha256_file(target) == sha:
                found.append(target)
        except OSError:
            continue
    for target in (d / "spec.json", d / "spec.md", d / "report.html"):
        refuse_input_target(target, found)
    return found


def _write_report(run, plots, html):
    d = run["dir"]
    spec = build_spec(run)
    inputs = _input_candidates(run)
    paths = {
        "spec_json": write_text_atomic(d / "spec.json", spec_json_text(spec), inputs=inputs),
        "spec_md": write_text_atomic(d / "spec.md", markdown(spec, run["renders"]) + _realise_md(d), inputs=inputs),
    }
    if plots or html:
        from .plots import make_plots

        figures = make_plots(run, spec)
        for fig in figures:
            for ext, target in fig.write(d, inputs=inputs).items():
                paths[f"plot_{fig.name}_{ext}"] = target
        if html:
            from .html import page

            paths["html"] = write_text_atomic(d / "report.html", page(run, spec, figures), inputs=inputs)
    return paths


def _realise_md(folder) -> str:
    """The realised stages from realise.json, when present (see audiobw.realise.report)."""
    from ..realise.report import markdown_section

    return markdown_section(folder)
