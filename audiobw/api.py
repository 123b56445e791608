"""The public Python interface: a study, a sweep, its result.

Everything here is re-exported lazily by :mod:`audiobw`::

    import audiobw
    study = audiobw.Study(grid=audiobw.Grid.lowpass(2000, 20000, 16),
                          targets=audiobw.Targets(max_loss_db=0.1))
    result = audiobw.sweep("take3.flac", study)

The facade goes through the same code path as ``audiobw sweep``
(:func:`audiobw.jobs.sweep_file`), so ``result.to_json()`` is the mapping the
command writes to sweep.json for the same settings.  Library errors name the
study's fields (``Grid.cutoffs_hz``), not command-line flags.
"""

from __future__ import annotations

from pathlib import Path

# the study and result types live in their own modules; re-exported here (see __all__)
from .chain import Chain
from .metrics import Meter
from .result import Case, Choice, SweepResult
from .study import Grid, Program, Study, Targets

__all__ = [
    "Chain",
    "Grid",
    "Targets",
    "Meter",
    "Program",
    "Study",
    "Case",
    "Choice",
    "SweepResult",
    "sweep",
    "render",
    "write_report",
    "run_batch",
]


def sweep(path, study: Study | None = None, *, out_dir=None, progress=None, use_cache: bool = True) -> SweepResult:
    """Sweep one recording.

    Parameters
    ----------
    path : path-like
        The program (any format soundfile reads).
    study : Study, optional
        Default: ``Study()`` (which sets no target, so it is refused).
    out_dir : path-like, optional
        When given, sweep.json, sweep.csv and spectrum.npz are written there,
        byte for byte as ``audiobw sweep --out`` writes them.
    progress : callable(frames_done, frames_expected), optional
    use_cache : bool
        Take the analysis from (and keep it in) the analysis cache, ``audiobw.cache``
        (the same figures; ``False`` is the CLI's ``--no-cache``).

    Returns
    -------
    SweepResult
    """
    from .jobs import sweep_file

    study = study or Study()
    doc, paths = sweep_file(path, study.settings(), out_dir=out_dir, progress=progress, use_cache=use_cache)
    return SweepResult(doc, paths)


def render(result: SweepResult, path, out_dir, listening=None, study: Study | None = None) -> list[Path]:
    """Render the chosen case and the next-narrower one as A/B clips.

    Start playback low: prolonged loud listening damages hearing.

    Parameters
    ----------
    result : SweepResult
    path : path-like
        The recording the sweep analysed.
    out_dir : path-like
        Gets ``render-chosen/`` and ``render-narrower/``.
    listening : Listening, optional
        Clip loudness (LUFS), true-peak ceiling (dBFS), length (s), trials, seed.

    Returns
    -------
    list of pathlib.Path
    """
    from .render import render_sweep

    settings = (study or Study()).settings()
    return render_sweep(result.to_json(), path, settings, out_dir, listening)


def write_report(out_dir, *, plots: bool = True, html: bool = True) -> dict[str, Path]:
    """Write spec.json, spec.md, plots and report.html beside ``out_dir/sweep.json``.

    The spec sheet's figures are engineering estimates, to be verified by
    measurement. See :func:`audiobw.report.write.write_report`.
    """
    from .report.write import write_report as _write_report

    return _write_report(out_dir, plots=plots, html=html)


def run_batch(
    inputs,
    study: Study | None,
    out_dir,
    *,
    coverage: float = 0.95,
    workers: int | None = None,
    cluster: str | None = None,
    progress=None,
):
    """Sweep many recordings; writes corpus.json and corpus.csv into ``out_dir``.

    Parameters
    ----------
    inputs : iterable of path-like or str
        Files, folders (recursive) and glob patterns.
    study : Study or None
    coverage : float, 0 < coverage <= 1
        Share of files the chosen case must pass on.
    workers : int, optional
        Local processes; 0 runs in this process.
    cluster : str, optional
        A dask.distributed scheduler address.

    Returns
    -------
    audiobw.batch.BatchResult
    """
    from .corpus.run import run_batch as _run_batch

    return _run_batch(
        [str(p) for p in inputs],
        (study or Study()).settings(),
        out_dir,
        coverage=coverage,
        workers=workers,
        cluster=cluster,
        progress=progress,
    )


#: ``audiobw.Listening`` (the playback conditions: program kind, playback SPL, audiogram) is
#: :class:`audiobw.perceptual.scoring.Listening`, loaded on first use (module __getattr__) so
#: ``import audiobw`` stays light; the A/B clips' options are :class:`audiobw.render.RenderOptions`.


def _listening():
    from .perceptual.scoring import Listening

    return Listening


def __getattr__(name: str):
    if name == "Listening":
        return _listening()
    raise AttributeError(f"module 'audiobw.api' has no attribute {name!r}")
