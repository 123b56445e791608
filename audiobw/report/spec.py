"""The spec-sheet block (spec.json) of a finished sweep: :func:`build_spec`.

:func:`audiobw.report.write.write_report` is the entry point: it reads
``sweep.json`` (and the program spectrum ``spectrum.npz`` written beside it,
and any render output in ``render-*/`` subfolders), and writes beside
sweep.json:

* ``spec.json`` — the spec-sheet block, machine-readable (docs/spec.schema.json);
* ``spec.md`` — the same block as Markdown (:mod:`audiobw.report.markdown`);
* ``plot-*.png`` (and ``.svg`` for line plots) — see :mod:`audiobw.report.plots`;
* ``report.html`` — one self-contained page (:mod:`audiobw.report.html`).

Every figure of the block either comes straight from the sweep row (so the
sheet and sweep.json agree) or is computed from the filter and chain rebuilt
from the case (:mod:`audiobw.report.run`, :mod:`audiobw.report.measure`):
stopband attenuation, passband ripple and flatness, group delay, the
A-weighted noise and the dynamic range (:func:`audiobw.noise.budget`).

References
----------
.. [1] AES17-2020 §3 (dBFS re a full-scale sine), §6 (THD+N).
"""

from __future__ import annotations

import json
import math

import numpy as np

from .. import __version__, registry
from ..cautions import ESTIMATE_CAUTION
from ..metrics import TARGET_KEYS
from .formatting import fmt, target_info
from .measure import group_delay_figures, noise_figures, passband_figures, stopband_points
from .run import rebuild_chain, rebuild_filter
from .text import conflict_text

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
SUMMARY_KEYS = (
    ("id", "response", "family", "order", "low_hz", "high_hz")
    + registry.keys(1, "summary")
    + ("passes", "fails", "margins_db")
)


def _summary(case: dict, ref: dict | None = None) -> dict:
    out = {k: case.get(k) for k in SUMMARY_KEYS}
    out["bandwidth_change_hz"] = (case["bandwidth_hz"] - ref["bandwidth_hz"]) if ref else 0.0
    return out


def neighbours(cases: list[dict], subject: dict) -> dict:
    """Next-narrower and next-wider cases of the same family and order, and the runner-up.

    The runner-up is the passing case the choice rule would take if the
    subject were removed (None when no other case passes).
    """
    same = [
        c
        for c in cases
        if c["family"] == subject["family"] and c["order"] == subject["order"] and c["id"] != subject["id"]
    ]
    narrower = [c for c in same if c["bandwidth_hz"] < subject["bandwidth_hz"]]
    wider = [c for c in same if c["bandwidth_hz"] > subject["bandwidth_hz"]]
    nn = max(narrower, key=lambda c: (c["bandwidth_hz"], -c["enbw_hz"], -c["id"])) if narrower else None
    nw = min(wider, key=lambda c: (c["bandwidth_hz"], c["enbw_hz"], c["id"])) if wider else None
    passing = [c for c in cases if c["passes"] and c["id"] != subject["id"]]
    ru = min(passing, key=lambda c: (c["bandwidth_hz"], c["enbw_hz"], c["order"], c["id"])) if passing else None
    return {
        "next_narrower": _summary(nn, subject) if nn else None,
        "next_wider": _summary(nw, subject) if nw else None,
        "runner_up": _summary(ru, subject) if ru else None,
    }


DATA_LINK_KEYS = (
    "eye_fraction",
    "eye_opening_v",
    "q",
    "ber",
    "jitter_pp_ui",
    "sample_delay_ui",
    "eye_ideal",
    "q_ideal",
)


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
        out.append(
            {
                "key": key,
                "label": label,
                "metric": metric,
                "sense": "min" if sense == "≥" else "max",
                "limit": doc["targets"][key],
                "unit": unit,
                "value": subject.get(metric),
                "margin_db": margin,
                "met": key not in subject["fails"],
                "binding": key == binding,
            }
        )
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
        subject, role = registry.closest_case(cases), "closest"
    fs = doc["input"]["sample_rate_hz"]
    filt = rebuild_filter(doc, subject)
    chain = rebuild_chain(doc)
    binding = choice.get("binding") if choice else None
    ser_best = max(
        (c for c in cases if c.get("ser_db") is not None), key=lambda c: (c["ser_db"], -c["id"]), default=None
    )
    inp = doc["input"]
    unmet = []
    for key, best in (doc.get("unmet") or {}).items():
        label, metric, unit, sense = target_info(key)
        unmet.append(
            {
                "key": key,
                "label": label,
                "metric": metric,
                "sense": "min" if sense == "≥" else "max",
                "limit": doc["targets"][key],
                "unit": unit,
                "best": best,
            }
        )
    conflicts = [
        {
            "targets": list(c["targets"]),
            "edge": c.get("edge"),
            "needs": c["needs"],
            "text": conflict_text(c, doc["targets"], hz=lambda v: fmt(v, "Hz")).removeprefix("Conflict: "),
        }
        for c in doc.get("conflicts") or []
    ]
    chain_rows = [
        {
            "key": k,
            "label": CHAIN_FIELDS.get(k, (k, ""))[0],
            "value": _chain_value(k, v),
            "unit": CHAIN_FIELDS.get(k, (k, ""))[1],
        }
        for k, v in doc["chain"].items()
    ]
    spec = {
        "tool": "audiobw",
        "version": __version__,
        "spec_version": SPEC_VERSION,
        "sweep": {
            "file": "sweep.json",
            "sha256": run["sweep_sha256"],
            "version": doc.get("version"),
            "spectrum_file": "spectrum.npz" if run["spectrum"] is not None else None,
        },
        "input": {
            k: inp.get(k)
            for k in (
                "path",
                "sha256",
                "sample_rate_hz",
                "channels",
                "duration_s",
                "peak_dbfs",
                "rms_dbfs",
                "occupied_bw_hz",
                "occupied_low_hz",
                "occupied_high_hz",
            )
        },
        "status": "chosen" if choice else "no_passing_case",
        "subject": {"role": role, "case": subject["id"], "passes": subject["passes"], "fails": subject["fails"]},
        "filter": {
            "response": subject["response"],
            "family": subject["family"],
            "order": subject["order"],
            "poles": subject["poles"],
            "stage": doc["chain"]["stage"],
            "low_hz": subject["low_hz"],
            "high_hz": subject["high_hz"],
            "design_low_hz": subject["design_low_hz"],
            "design_high_hz": subject["design_high_hz"],
            "bandwidth_hz": subject["bandwidth_hz"],
            "enbw_hz": subject["enbw_hz"],
            "stopband_design_db": doc["grid"]["stopband_db"] if subject["family"] == "elliptic" else None,
            "alias_rejection_db": subject.get("alias_rejection_db"),
        },
        "passband": passband_figures(filt, subject, doc),
        "stopband": stopband_points(filt, subject, fs),
        "group_delay": group_delay_figures(filt, subject, doc),
        "noise": noise_figures(chain, filt, doc, subject),
        "program": {k: subject.get(k) for k in ("snr_db", "snr_a_db", "loss_db", "lsd_db", "ser_db")},
        "data_link": _data_link(doc, subject),
        "thdn": {
            "tone_hz": doc["meter"]["tone_hz"],
            "tone_level_dbfs": doc["meter"]["tone_level_dbfs"],
            "pct": subject.get("thdn_pct"),
            "db": subject.get("thdn_db"),
            "note": subject.get("thdn_note"),
        },
        "chain": chain_rows,
        "targets": _targets(doc, subject, binding),
        "binding": binding,
        "binding_margin_db": choice.get("binding_margin_db") if choice else None,
        "grid_limited": bool(choice.get("grid_limited")) if choice else None,
        "grid_limits": list(choice.get("grid_limits") or []) if choice else [],
        "unmet": unmet,
        "conflicts": conflicts,
        "neighbours": neighbours(cases, subject),
        "ser_optimum": (
            {
                "case": ser_best["id"],
                "bandwidth_hz": ser_best["bandwidth_hz"],
                "ser_db": ser_best["ser_db"],
                "family": ser_best["family"],
                "order": ser_best["order"],
            }
            if ser_best
            else None
        ),
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


def spec_json_text(spec: dict) -> str:
    return json.dumps(spec, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def _chain_value(key: str, v):
    """A chain value as a spec row holds it: the e_n table as one line (its rows stay in sweep.json)."""
    if key == "en_table" and v is not None:
        from ..entable import summary

        return summary(v) + "; rows in sweep.json chain.en_table"
    return v
