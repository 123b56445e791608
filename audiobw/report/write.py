"""The report's entry point: :func:`write_report` writes spec.json, spec.md, the plots and report.html.

It reads the sweep folder (:mod:`audiobw.report.run`), builds the spec-sheet
block (:mod:`audiobw.report.spec`) and writes it as JSON, as Markdown
(:mod:`audiobw.report.markdown`), as plots (:mod:`audiobw.report.plots`) and
as one page (:mod:`audiobw.report.html`), each atomically, under the
folder's output lock.
"""

from __future__ import annotations

from pathlib import Path

from ..audio import write_text_atomic
from ..errors import AudiobwError, AudioFileError
from .markdown import markdown
from .run import read_run
from .spec import build_spec, spec_json_text


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
        except (KeyError, TypeError, ValueError, IndexError, ZeroDivisionError, OverflowError, AttributeError) as exc:
            if isinstance(exc, AudiobwError):
                raise
            # validate_sweep holds the known rules; a value combination they miss still ends in one line
            raise AudioFileError(
                f"{run['dir'] / 'sweep.json'}: inconsistent content ({type(exc).__name__}: "
                f"{str(exc)[:120]}); accepted: a sweep.json as written by audiobw sweep "
                "(docs/sweep.schema.json)"
            ) from exc


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
