"""``audiobw report DIR``: the spec sheet, plots and HTML page of a finished sweep.

Only click and the shared kit load at import time; the report code (numpy,
scipy, matplotlib) loads when the command runs.
"""

from __future__ import annotations

from pathlib import Path

import click

from ..clikit import CONTEXT, ESTIMATE_CAUTION, LISTENING_CAUTION


@click.command("report", context_settings=CONTEXT)
@click.argument("folder", metavar="DIR", type=click.Path(path_type=Path))
@click.option("--no-html", is_flag=True, help="Write spec.json and spec.md only (no plots, no page).")
def command(folder, no_html):
    """Write the spec sheet for the sweep in DIR: spec.md, spec.json, plots and report.html.

    DIR is a folder written by `audiobw sweep` (sweep.json, spectrum.npz);
    A/B clips in its render-*/ subfolders get players on the page.

    Example:

      audiobw report audiobw-out/take3
    """
    from ..report.formatting import passband_phrase
    from ..report.run import read_run
    from ..report.write import write_report

    paths = write_report(folder, plots=not no_html, html=not no_html)
    import json

    spec = json.loads(paths["spec_json"].read_text(encoding="utf-8"))
    if spec["status"] == "chosen":
        click.echo(f"Chosen: case {spec['subject']['case']} — {passband_phrase(spec)}.")
    else:
        click.echo(f"No passing case; the sheet describes the closest case ({spec['subject']['case']}).")
    for key in ("spec_md", "spec_json", "html"):
        if key in paths:
            click.echo(f"Wrote {paths[key]}")
    n_plots = sum(1 for k in paths if k.startswith("plot_"))
    if n_plots:
        click.echo(f"Wrote {n_plots} plot files (plot-*.png, plot-*.svg) in {folder}")
    if not no_html and read_run(folder)["renders"]:
        click.echo(LISTENING_CAUTION)
    click.echo(ESTIMATE_CAUTION)
