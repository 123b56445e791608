"""The command line.  Parsing and printing only: every computation lives in the library.

Exit status: 0 done; 1 unusable data or a failed write; 2 a usage mistake
(a bad option or config value); 130 interrupted.
"""

from __future__ import annotations

import contextlib
import math
import os
import sys
import warnings
from pathlib import Path

import click

from . import __version__

from .clikit import default_chain_line
from .clikit import (
    CHAIN,
    CONTEXT,
    ESTIMATE_CAUTION,
    LISTENING_CAUTION,
    Progress,
    chain_file_option,
    options,
    settings_from,
    sweep_options,
)


@click.group(context_settings=CONTEXT)
@click.version_option(__version__, prog_name="audiobw")
@click.option("--debug", is_flag=True, help="Show full tracebacks (for bug reports).")
def cli(debug):
    """audiobw: find the narrowest passband that keeps a recording's fidelity
    while letting in the least noise.

    Frequencies in Hz, levels in dB/dBFS/dBu, voltages in V rms.  Values take
    SI prefixes and units: 4n, 2.2k, 20k, 2Vrms, +4dBu, 27C.
    """


def _default_out(input_path: Path) -> Path:
    return Path.cwd() / "audiobw-out" / input_path.stem


@cli.command(context_settings=CONTEXT)
@click.argument("input", type=click.Path(path_type=Path, readable=False))
@click.option(
    "--out",
    type=click.Path(path_type=Path),
    default=None,
    help="Output folder for sweep.json and sweep.csv [default: audiobw-out/<input name>/].",
)
@click.option("--json", "as_json", is_flag=True, help="Print sweep.json to stdout instead of the table.")
@click.option(
    "--render",
    "do_render",
    is_flag=True,
    help="Also render the chosen case and the next narrower one (A/B clips, chain output).",
)
@click.option(
    "--report", "do_report", is_flag=True, help="Also write the spec sheet, plots and report.html beside sweep.json."
)
@click.option(
    "--no-cache",
    "no_cache",
    is_flag=True,
    help="Neither read nor write the analysis cache (~/.cache/audiobw; AUDIOBW_CACHE_DIR moves it).",
)
@sweep_options
def sweep(input, out, as_json, do_render, do_report, no_cache, chain_file, **kwargs):
    """Sweep candidate filters over INPUT and choose the narrowest passing passband.

    Example:

      audiobw sweep take3.flac --response lowpass --family butterworth,bessel
      --order 2,4 --cutoffs 2k:20k:40 --source-ohms 150 --gain 40 --en 1.2n
      --in 1.5p --bits 24 --full-scale 2Vrms --max-loss 0.2 --min-snr-a 90
    """
    from .report.sweepio import dumps
    from .names import shown
    from .report.table import case_table
    from .report.text import closing_paragraph

    settings = settings_from(kwargs, chain_file)
    out_dir = out or _default_out(input)
    from .audio import output_lock

    with output_lock(out_dir):
        doc, paths, extra = _sweep_into(input, settings, out_dir, do_render, do_report, use_cache=not no_cache)
    if as_json:
        click.echo(dumps(doc), nl=False)
        for line in extra:
            click.echo(line, err=True)
        return
    click.echo(case_table(doc))
    click.echo()
    click.echo(closing_paragraph(doc))
    stated = default_chain_line(kwargs, chain_file, settings)
    if stated:
        click.echo(stated)
    click.echo(f"Wrote {shown(paths['json'])} and {shown(paths['csv'])}.")
    for line in extra:
        click.echo(line)
    click.echo(ESTIMATE_CAUTION)


#: Sweeps of at least this many cases show a scoring progress bar (or lines, AUDIOBW_PROGRESS=lines).
SCORING_PROGRESS_CASES = 2000


def _sweep_into(input, settings, out_dir, do_render, do_report, *, use_cache: bool = True):
    """sweep's work (sweep, then --render and --report), run while the output folder is locked."""
    from .jobs import sweep_file
    from .names import shown

    progress = Progress(f"analysing {shown(input.name)}")
    # scoring shows progress from SCORING_PROGRESS_CASES cases up (about 3 s of scoring)
    scoring = Progress("scoring cases", min_frames=SCORING_PROGRESS_CASES)

    def case_progress(done, total):
        if total >= SCORING_PROGRESS_CASES:
            progress.close()  # the analysis bar ends before the scoring bar starts
            scoring(done, total)

    try:
        doc, paths = sweep_file(
            input,
            settings,
            out_dir=out_dir,
            progress=progress,
            notify=lambda line: click.echo(f"audiobw: {line}", err=True),
            use_cache=use_cache,
            case_progress=case_progress,
        )
    finally:
        progress.close()
        scoring.close()
    extra = []
    if do_render:
        from .render import render_sweep

        if doc.get("choice"):
            rendered = render_sweep(doc, input, settings, out_dir)
            extra.append(
                f"Rendered the chosen case{' and the next narrower one' if doc['choice'].get('next_narrower') else ''} "
                f"into {out_dir}/render-*/ ({len(rendered)} files). {LISTENING_CAUTION}"
            )
        else:
            extra.append("Nothing rendered: no case meets the targets.")
    if do_report:
        from .report.write import write_report

        written = write_report(out_dir)
        extra.append(f"Wrote the spec sheet and report: {written.get('html', written['spec_md'])}.")
    return doc, paths, extra


@cli.command(context_settings=CONTEXT)
@click.option(
    "--band",
    required=True,
    metavar="LOW:HIGH",
    help="Passband edges in Hz, e.g. 20:20k; :20k for a lowpass, 40: for a highpass.",
)
@click.option(
    "--family",
    "family",
    default="butterworth",
    show_default=True,
    metavar="NAME",
    help="Filter family: butterworth, bessel, chebyshev1, elliptic.",
)
@click.option("--order", "order", default="4", show_default=True, metavar="N", help="Prototype order (1 to 8).")
@click.option("--ripple", default=None, metavar="DB", help="Passband ripple, dB [default: 0.1].")
@click.option("--stopband", default=None, metavar="DB", help="Elliptic stopband attenuation, dB [default: 60].")
@click.option("--rate", default="48k", show_default=True, metavar="HZ", help="Converter sample rate, Hz.")
@click.option("--json", "as_json", is_flag=True, help="Print the budget as JSON.")
@chain_file_option
@options(CHAIN, "chain")
@options(("meter",), "meter")
def noise(band, family, order, ripple, stopband, rate, as_json, chain_file, **kwargs):
    """Print the noise budget of a chain with one filter.

    Each contributor in V rms, dBu and dBFS and as a share of the total; the
    filter's ENBW; the total; the dynamic range for a full-scale sine.
    """
    import json

    from .jobs import noise_budget

    kwargs.update(family=family, order=order, ripple=ripple, stopband=stopband)
    settings = settings_from(kwargs, chain_file)
    b, header = noise_budget(settings, band=band, rate=rate)
    if as_json:
        # a zero contributor has no level in dB: JSON carries null for it
        click.echo(json.dumps(_finite_or_null(b), indent=2, allow_nan=False, default=str))
        return
    from .report.budget import budget_text

    click.echo(budget_text(b, header=header))
    stated = default_chain_line(kwargs, chain_file, settings)
    if stated:
        click.echo(stated)
    click.echo(ESTIMATE_CAUTION)


def _finite_or_null(x):
    """``x`` with every infinite or NaN float replaced by None (JSON null)."""
    if isinstance(x, dict):
        return {k: _finite_or_null(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_finite_or_null(v) for v in x]
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


@cli.command(context_settings=CONTEXT)
@click.option(
    "--out", type=click.Path(path_type=Path), default=Path("audiobw-out/demo"), show_default=True, help="Output folder."
)
@click.option(
    "--clips",
    "clips_dir",
    type=click.Path(path_type=Path),
    default=None,
    help="Folder of the bundled clips [default: the repository's clips/].",
)
def demo(out, clips_dir):
    """Run the whole job on the bundled clips and print what it found."""
    from .demo import run_demo

    for line in run_demo(out, clips_dir=clips_dir):
        click.echo(line)


def _add_plugin_commands() -> None:
    """Commands kept in audiobw/commands/*.py (each module exports ``command``)."""
    import importlib
    import pkgutil

    from . import commands

    for info in sorted(pkgutil.iter_modules(commands.__path__), key=lambda m: m.name):
        if not info.name.startswith("_"):
            module = importlib.import_module(f"{commands.__name__}.{info.name}")
            cli.add_command(module.command)


_add_plugin_commands()


def _terminate_as_interrupt() -> None:
    """Turn SIGTERM into KeyboardInterrupt, so that atomic writes clean up their temp files."""
    import signal

    def handler(signum, frame):
        raise KeyboardInterrupt

    try:
        signal.signal(signal.SIGTERM, handler)
    except ValueError:  # not in the main thread (e.g. embedded); leave the default
        pass


def main(argv=None) -> int:
    """Console entry point: one line per user mistake, no traceback (unless --debug)."""
    from .errors import AudiobwError
    from .names import shown

    for stream in (sys.stdout, sys.stderr):
        try:  # a name with bytes that are not UTF-8 is printed escaped, never as UnicodeEncodeError
            stream.reconfigure(errors="backslashreplace")
        except (AttributeError, ValueError):  # not a TextIOWrapper (e.g. captured by a test)
            pass

    args = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in args or os.environ.get("AUDIOBW_DEBUG") == "1"

    def _show(message, category, filename, lineno, file=None, line=None):
        click.echo(f"audiobw: warning: {shown(message)}", err=True)

    warnings.showwarning = _show
    import logging

    # libraries' loggers (dask.distributed's 30-line tracebacks) stay quiet; --debug keeps them
    logging.disable(logging.NOTSET if debug else logging.CRITICAL)
    _terminate_as_interrupt()
    try:
        # click's own main() would turn Ctrl-C into a blank line and Abort, and a closed pipe into exit 1
        with cli.make_context("audiobw", args) as ctx:
            result = cli.invoke(ctx)
        sys.stdout.flush()  # a full device or a closed pipe shows here, not at interpreter exit
        return result if isinstance(result, int) else 0
    except click.exceptions.Exit as exc:  # --help, --version
        return exc.exit_code
    except click.exceptions.Abort:
        click.echo("audiobw: interrupted", err=True)
        return 130
    except click.ClickException as exc:
        exc.show()
        return exc.exit_code
    except AudiobwError as exc:
        if debug:
            raise
        click.echo(f"audiobw: error: {shown(exc)}", err=True)
        return exc.exit_code
    except OSError as exc:
        if not _from_stdio(exc):
            raise
        if isinstance(exc, BrokenPipeError):
            _silence_stdout()
            return 0
        _silence_stdout()
        with contextlib.suppress(OSError):
            click.echo(
                f"audiobw: error: cannot write to standard output ({exc.strerror or exc}); "
                "accepted: a terminal, pipe or file with room",
                err=True,
            )
        return 1
    except KeyboardInterrupt:
        click.echo("audiobw: interrupted; no partial output was left", err=True)
        return 130
    except Exception as exc:
        if _caused_by_interrupt(exc):  # an interrupt inside an import surfaces as ImportError and the like
            click.echo("audiobw: interrupted; no partial output was left", err=True)
            return 130
        raise


def _caused_by_interrupt(exc: BaseException) -> bool:
    seen = set()
    while exc is not None and id(exc) not in seen:
        if isinstance(exc, KeyboardInterrupt):
            return True
        seen.add(id(exc))
        exc = exc.__cause__ or exc.__context__
    return False


def _from_stdio(exc: OSError) -> bool:
    """Did ``exc`` come from writing our own stdout/stderr (click.echo or the final flush)?"""
    tb = exc.__traceback__
    frames = []
    while tb is not None:
        frames.append((tb.tb_frame.f_code.co_name, tb.tb_frame.f_code.co_filename))
        tb = tb.tb_next
    last_name, last_file = frames[-1] if frames else ("", "")
    return (last_name == "main" and last_file == __file__) or any(
        name == "echo" and file.endswith(os.path.join("click", "utils.py")) for name, file in frames
    )


def _silence_stdout() -> None:
    """Point stdout at /dev/null so that the interpreter's last flush cannot fail a second time."""
    with contextlib.suppress(OSError, ValueError, AttributeError):
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)


def entry():  # pragma: no cover - console script
    """Console entry point: :func:`main`, and an interrupt at any moment ends with 130 and one line."""
    import signal

    try:
        if threading_main():
            signal.signal(signal.SIGINT, signal.default_int_handler)
        code = main()
    except KeyboardInterrupt:  # between start-up and main's own handler
        with contextlib.suppress(OSError, ValueError):
            click.echo("audiobw: interrupted", err=True)
        code = 130
    if code == 130:
        # Skip atexit handlers: an interrupt can leave a module half imported (matplotlib, dask),
        # whose exit hooks would print tracebacks.  Every output is already cleaned up.
        for stream in (sys.stdout, sys.stderr):
            with contextlib.suppress(OSError, ValueError):
                stream.flush()
        os._exit(130)
    _quick_exit(code)
    sys.exit(code)


def _quick_exit(code: int) -> None:
    """End the process at once with ``code`` once its work is done, skipping the interpreter's
    teardown (freeing every module and array one by one: about 0.17 s after a 1000-case sweep).

    Only when nothing is left to do: the streams flush cleanly (a failing flush returns, and the
    normal exit reports it), no other non-daemon thread is alive (the interpreter would wait for
    it), no profiler or tracer is on (it reports after the program returns), and the atexit
    handlers (temporary folders, dask, multiprocessing) have run.  Every output file is already
    written and closed (atomically).  ``AUDIOBW_QUICK_EXIT=0`` keeps the normal exit.
    """
    import atexit
    import threading

    if os.environ.get("AUDIOBW_QUICK_EXIT", "") == "0":
        return
    if sys.getprofile() is not None or sys.gettrace() is not None:
        return  # a profiler or debugger (python -m cProfile -m audiobw) writes its results after us
    if any(t is not threading.main_thread() and not t.daemon and t.is_alive() for t in threading.enumerate()):
        return
    try:
        for stream in (sys.stdout, sys.stderr):
            stream.flush()
    except (OSError, ValueError):
        return
    atexit._run_exitfuncs()
    for stream in (sys.stdout, sys.stderr):
        with contextlib.suppress(OSError, ValueError):
            stream.flush()
    os._exit(code)


def threading_main() -> bool:
    import threading

    return threading.current_thread() is threading.main_thread()


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
