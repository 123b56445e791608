"""Shared pieces of the command line: option decorators built from the one
option table, settings from CLI values and a TOML file, progress, cautions.

Imports only click and the standard library at module level, so every
command module can use it without slowing ``audiobw --help``.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import click

from .cautions import ESTIMATE_CAUTION, LISTENING_CAUTION  # noqa: F401  (the commands take them from here)
from .options import CHAIN_KEYS, GRID_KEYS, METER_KEYS, OPTIONS, PROGRAM_KEYS
from .registry import TARGET_OPTION

CONTEXT = dict(help_option_names=["-h", "--help"], max_content_width=100)


def dest(key: str) -> str:
    return "in_" if key == "in" else key


def options(keys, group: str):
    """Declare ``--key`` options from the one table, :data:`audiobw.options.OPTIONS` (help with its default).

    The click default stays None, so a value that was not given is told from one that was.
    """

    def deco(fn):
        for key in reversed(keys):
            o = OPTIONS[key]
            fn = click.option(o.flag, dest(key), default=None, metavar="VALUE", help=o.help_text)(fn)
        return fn

    return deco


CHAIN, GRID = CHAIN_KEYS, GRID_KEYS  # the groups of audiobw.options
TARGETS = tuple(TARGET_OPTION)  # in target rank order (audiobw.registry)
PROGRAM, METER = PROGRAM_KEYS, METER_KEYS


def cli_values(kwargs) -> dict:
    return {("in" if k == "in_" else k): v for k, v in kwargs.items() if (k == "in_" or k in OPTIONS)}


def default_chain_line(kwargs, chain_file, settings) -> str | None:
    """'No chain given; ...' when neither a chain file nor any chain option was given, else None."""
    from .settings import default_chain_text

    if chain_file or any(v is not None for k, v in cli_values(kwargs).items() if k in CHAIN_KEYS):
        return None
    return "No chain given; the defaults were used: " + default_chain_text(settings.chain) + "."


def settings_from(kwargs, chain_file):
    from .settings import build, load_toml, merge

    from .settings import sanity_warnings

    file_values = load_toml(chain_file) if chain_file else {}
    raw = merge(file_values, cli_values(kwargs))
    settings = build(raw)
    for line in sanity_warnings(settings, tuple(raw)):
        click.echo(f"audiobw: warning: {line}", err=True)
    return settings


class Progress:
    """A progress bar on stderr for long files, only when stderr is a terminal.

    With ``AUDIOBW_PROGRESS=lines`` in the environment, progress goes to stderr
    as plain lines instead ("audiobw: progress: <label> 40 %", every 10 %) for
    logs and for the interrupt tests, which wait for the first line.
    """

    def __init__(self, label: str, min_frames: int = 48000 * 30):
        self.label, self.min_frames, self.bar = label, min_frames, None
        self.lines = os.environ.get("AUDIOBW_PROGRESS") == "lines"
        self._shown = -1

    def __call__(self, done: int, total: int):
        if self.lines:
            tenth = 10 * done // max(total, 1)
            if tenth > self._shown:
                self._shown = tenth
                click.echo(f"audiobw: progress: {self.label} {10 * tenth} %", err=True)
            return
        if self.bar is None:
            if total < self.min_frames or not sys.stderr.isatty():
                self.bar = False
                return
            self.bar = click.progressbar(length=total, label=self.label, file=sys.stderr)
            self.bar.__enter__()
            self._last = 0
        if self.bar:
            self.bar.update(done - self._last)
            self._last = done

    def close(self):
        """End the bar (if one was drawn); calling it again does nothing."""
        if self.bar:
            self.bar.__exit__(None, None, None)
            self.bar = False


chain_file_option = click.option(
    "--chain",
    "chain_file",
    type=click.Path(path_type=Path),
    default=None,
    help=f"TOML file with {' '.join(f'[{s}]' for s in dict.fromkeys(o.section for o in OPTIONS.values()))}; "
    "options override it.",
)


def sweep_options(fn):
    """Everything `sweep` and `batch` share: --chain, the grid, chain, target, meter and program options."""
    for deco in (
        options(PROGRAM, "program"),
        options(METER, "meter"),
        options(TARGETS, "targets"),
        options(CHAIN, "chain"),
        options(GRID, "grid"),
        chain_file_option,
    ):
        fn = deco(fn)
    return fn
