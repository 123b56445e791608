"""``audiobw batch``: one passband for a whole library of recordings.

Parsing and printing only; the work is in :mod:`audiobw.batch`.
"""

from __future__ import annotations

import sys
from pathlib import Path

import click

from ..clikit import CONTEXT, ESTIMATE_CAUTION, settings_from, sweep_options


class BatchProgress:
    """One status line on stderr (only when it is a terminal): done, failed, left, time left."""

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self.active = self.stream.isatty()
        self.shown = False

    def __call__(self, s: dict):
        if not self.active:
            return
        left = s["total"] - s["done"]
        computed = s["done"] - s["cached"]
        eta = "…"
        if computed > 0 and left:
            eta = _duration(s["elapsed_s"] / computed * left)
        elif not left:
            eta = "0 s"
        self.stream.write(
            f"\raudiobw batch: {s['done']}/{s['total']} done, {s['failed']} failed, {left} left, about {eta} to go   "
        )
        self.stream.flush()
        self.shown = True

    def close(self):
        if self.shown:
            self.stream.write("\n")
            self.stream.flush()


def _duration(seconds: float) -> str:
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    if seconds < 3600:
        return f"{seconds // 60} min {seconds % 60:02d} s"
    return f"{seconds // 3600} h {seconds % 3600 // 60:02d} min"


@click.command("batch", context_settings=CONTEXT)
@click.argument("inputs", nargs=-1, required=True, metavar="INPUT...")
@click.option(
    "--out",
    type=click.Path(path_type=Path),
    default=Path("audiobw-out/corpus"),
    show_default=True,
    help="Output folder: corpus.json, corpus.csv, files/<name>/sweep.json, cache/.",
)
@click.option(
    "--coverage",
    default="95%",
    show_default=True,
    metavar="SHARE",
    help="Share of the files the chosen case must pass on: 95% or 0.95.",
)
@click.option(
    "--workers",
    type=int,
    default=None,
    metavar="N",
    help="Local worker processes [default: the CPU count]; 0 sweeps in this process.",
)
@click.option(
    "--cluster",
    default=None,
    metavar="ADDRESS",
    help="Run on an existing dask.distributed scheduler, e.g. tcp://scheduler:8786 (needs audiobw[cluster]).",
)
@click.option(
    "--cluster-timeout",
    default="10s",
    show_default=True,
    metavar="SECONDS",
    help="Give up on --cluster if connecting and the scheduler's handshake take longer, e.g. 10s.",
)
@click.option(
    "--follow-links", is_flag=True, help="Follow symbolic links to folders and links that lead out of a folder given."
)
@click.option("--json", "as_json", is_flag=True, help="Print corpus.json to stdout instead of the summary.")
@click.option(
    "--no-cache",
    "no_cache",
    is_flag=True,
    help="Neither read nor write the analysis cache (~/.cache/audiobw); OUT/cache/ still resumes.",
)
@sweep_options
def command(
    inputs, out, coverage, workers, cluster, cluster_timeout, follow_links, as_json, no_cache, chain_file, **kwargs
):
    """Sweep every file of a library and choose the narrowest case that passes on
    at least the --coverage share of them.

    INPUT: audio files, folders (searched recursively for audio files) and glob
    patterns.  Each file is swept as `audiobw sweep` would; finished files are
    cached in OUT/cache/, so running the same command again after an
    interruption does only the missing work.

    Example:

      audiobw batch library/ more/*.flac --coverage 95% --cutoffs 4k:20k:24
      --order 2,4 --max-loss 0.1 --min-snr-a 90 --out corpus/
    """
    from ..corpus.inputs import parse_coverage
    from ..corpus.run import run_batch
    from ..corpus.text import summary_lines
    from ..errors import AudioFileError, ParameterError

    share = parse_coverage(coverage)
    if cluster is not None and workers is not None:
        raise ParameterError("--workers: not used with --cluster (the cluster's own workers do the work)")
    settings = settings_from(kwargs, chain_file)
    from .. import units

    timeout_s = units.parse_quantity(cluster_timeout, "seconds", name="--cluster-timeout")
    if not 0.1 <= timeout_s <= 3600:
        raise ParameterError(f"--cluster-timeout: {cluster_timeout!r} is out of range; accepted: 0.1 s to 3600 s")
    progress = BatchProgress()
    try:
        result = run_batch(
            list(inputs),
            settings,
            out,
            coverage=share,
            workers=workers,
            cluster=cluster,
            follow_links=follow_links,
            progress=progress,
            cluster_timeout_s=timeout_s,
            use_cache=not no_cache,
        )
    except KeyboardInterrupt:
        progress.close()
        click.echo(
            f"audiobw: finished files are kept in {out / 'cache'}; run the same command again to resume", err=True
        )
        raise
    finally:
        progress.close()
    doc = result.doc
    if as_json:
        from ..report.sweepio import dumps

        click.echo(dumps(doc), nl=False)
    else:
        for line in summary_lines(doc):
            click.echo(line)
        click.echo(
            f"Swept {result.computed} file(s), took {result.cached} from the cache, in {result.elapsed_s:.1f} s."
        )
        click.echo(f"Wrote {result.paths['json']} and {result.paths['csv']}.")
        click.echo(ESTIMATE_CAUTION)
    if doc["counts"]["swept"] == 0:
        raise AudioFileError(f"no input could be swept; the reasons are listed in {result.paths['json']}")
