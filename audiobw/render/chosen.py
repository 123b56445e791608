"""``sweep --render``: render a sweep's chosen case and the next-narrower one."""

from __future__ import annotations

from pathlib import Path


from ..chain import Chain
from ..errors import ParameterError
from ..filters import FilterSpec
from .options import RenderOptions
from .clips import render_file


# -- sweep --render -------------------------------------------------------------------


def render_sweep(
    doc: dict, input_path, settings, out_dir, options: RenderOptions | None = None, *, progress=None
) -> list[Path]:
    """Render a sweep's chosen case and the next-narrower one (which fails a target).

    Parameters
    ----------
    doc : dict
        The sweep.json mapping (docs/sweep-json.md).
    input_path : path-like
        The program the sweep analysed.
    settings : audiobw.settings.Settings
        Kept for the caller's convenience; the chain comes from ``doc["chain"]``,
        where ``--input-level`` is already resolved.
    out_dir : path-like
        The cases go to ``out_dir/render-chosen`` and ``out_dir/render-narrower``.

    Returns
    -------
    list of pathlib.Path
        Every file written.
    """
    choice = doc.get("choice")
    if not choice:
        raise ParameterError(
            "--render: no case meets the targets, so there is no chosen case to render; "
            "accepted: a sweep with a passing case"
        )
    fs = int(doc["input"]["sample_rate_hz"])
    chain = Chain.from_json(doc["chain"])
    by_id = {c["id"]: c for c in doc["cases"]}
    out_dir = Path(out_dir)
    paths = []
    for folder, case_id in (("render-chosen", choice["case"]), ("render-narrower", choice.get("next_narrower"))):
        if case_id is None:
            continue
        case = by_id[case_id]
        spec = FilterSpec(
            case["response"],
            case["family"],
            int(case["order"]),
            case["design_low_hz"],
            case["design_high_hz"],
            doc["grid"]["ripple_db"],
            doc["grid"]["stopband_db"],
            chain.stage,
            fs,
        )
        result = render_file(input_path, spec, chain, out_dir / folder, options, progress=progress)
        paths.extend(result.paths)
        if "data" in doc:  # a data program: the eye diagram of the simulated output
            from ..report.eye import eye_diagram

            paths.append(
                eye_diagram(
                    out_dir / folder / "chain-output.wav",
                    doc["data"]["bit_rate_hz"],
                    out_dir / folder / "eye.png",
                    sample_delay_ui=_instant(doc, case),
                )
            )
    return paths


def _instant(doc: dict, case: dict) -> float | None:
    """The best sampling instant on the eye diagram's grid (bit boundaries at whole UIs from the first
    sample): the sweep's instant after the recording's recovered boundary, plus that boundary's phase."""
    delay = case.get("sample_delay_ui")
    if delay is None:
        return None
    return float(delay) + float(doc.get("data", {}).get("clock_phase_ui") or 0.0)
