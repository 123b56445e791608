"""The ``audiobw`` console script: quiet on Ctrl-C from its first instruction.

Importing the command line (click, the command modules) takes a moment; an
interrupt then would print a KeyboardInterrupt traceback from the import.  This
module installs a handler first that ends the process with status 130 and one
line (nothing has been written yet), then hands over to :func:`audiobw.cli.entry`,
which restores Python's own handler before any work starts.  Only the console
script imports it: ``import audiobw`` leaves signal handling alone.
"""

import os
import signal


def _early_interrupt(signum, frame):  # pragma: no cover - timing dependent
    try:
        os.write(2, b"audiobw: interrupted\n")
    finally:
        os._exit(130)


def entry():  # pragma: no cover - console script
    try:
        signal.signal(signal.SIGINT, _early_interrupt)
        signal.signal(signal.SIGTERM, _early_interrupt)
    except ValueError:  # not the main thread
        pass
    from .cli import entry as cli_entry

    cli_entry()
