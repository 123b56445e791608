"""Realise a case of a sweep folder: read sweep.json, realise, write realise.json and the band plot."""

from __future__ import annotations

import json
from pathlib import Path

from ..audio import write_text_atomic
from ..errors import AudioFileError, ParameterError
from ..filters import FilterSpec
from .build import realise
from .plot import write_band_plot
from .secondpass import second_pass


def spec_of_case(doc: dict, path: Path, case_id: int | None):
    """(case dict, FilterSpec) for ``case_id`` or the sweep's choice."""
    try:
        cases = {c["id"]: c for c in doc["cases"]}
    except (KeyError, TypeError) as exc:
        raise AudioFileError(f"{path}: not a readable sweep.json (missing {exc})") from None
    if case_id is None:
        if not doc.get("choice"):
            raise AudioFileError(f"{path}: no case met the targets; accepted: pick one with --case ID")
        case_id = doc["choice"]["case"]
    if case_id not in cases:
        raise ParameterError(f"--case: {case_id} is not in {path}; accepted: ids 1 to {len(cases)}")
    c = cases[case_id]
    grid = doc.get("grid", {})
    spec = FilterSpec(
        c["response"],
        c["family"],
        int(c["order"]),
        c.get("design_low_hz"),
        c.get("design_high_hz"),
        float(grid.get("ripple_db", 0.1)),
        float(grid.get("stopband_db", 60.0)),
        doc["chain"].get("stage", "analog"),
    )
    return c, spec


def read_sweep(folder: Path) -> dict:
    path = Path(folder) / "sweep.json"
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise AudioFileError(f"{path}: not found; accepted: a folder written by `audiobw sweep`") from None
    except (OSError, ValueError) as exc:
        raise AudioFileError(f"{path}: not a readable sweep.json ({exc})") from None


def finish(result: dict, out: Path, source: str) -> Path:
    """Write the band plot and realise.json (atomically); strip the working arrays."""
    result["source"] = source
    write_band_plot(result, Path(out) / "realise-band.png")
    result.pop("_band")
    if result.get("second_pass"):
        for k in ("chain_noise_v2", "filter_noise_v2", "signal_v2"):
            result["second_pass"].pop(k)
    target = Path(out) / "realise.json"
    write_text_atomic(target, json.dumps(result, indent=2, allow_nan=False) + "\n")
    return target


def realise_folder(folder, *, case_id=None, out=None, **options) -> tuple[dict, Path]:
    """Realise a sweep folder's chosen case (or ``case_id``); returns (realise.json mapping, its path)."""
    folder = Path(folder)
    doc = read_sweep(folder)
    case, spec = spec_of_case(doc, folder / "sweep.json", case_id)
    meter = (max(float(doc["meter"]["low_hz"]), 1.0), float(doc["meter"]["high_hz"]))
    result = realise(spec, meter_hz=meter, second=second_pass(doc, case, spec), **options)
    source = f"{folder / 'sweep.json'}, case {case['id']} ({spec.label()})"
    return result, finish(result, folder if out is None else Path(out), source)
