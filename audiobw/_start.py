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


#: glibc mallopt parameters (malloc.h): M_TRIM_THRESHOLD, M_MMAP_THRESHOLD
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3


def tune_malloc() -> bool:
    """Serve the scorer's many short-lived arrays (0.1–1 MB each) from the heap.

    glibc hands out blocks over its mmap threshold (128 kB at start) as fresh
    mappings and returns them on free, so every such array is page-faulted in
    again: a 1000-case sweep spent about a third of its scoring time in the
    kernel.  Raising the mmap threshold to 32 MB and the trim threshold to
    64 MB (glibc mallopt(3)) keeps those pages in the process: same figures,
    system time nearly gone (docs/performance.md).  Linux with glibc only;
    elsewhere nothing changes.  Called by the console script and batch
    workers, never on ``import audiobw``: a library leaves its host's
    allocator alone.  Returns whether the settings were applied.
    """
    import sys

    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6")
        mallopt = libc.mallopt
    except (OSError, AttributeError):  # not glibc (musl has no libc.so.6 / mallopt)
        return False
    return bool(mallopt(_M_MMAP_THRESHOLD, 32 << 20)) and bool(mallopt(_M_TRIM_THRESHOLD, 64 << 20))


def entry():  # pragma: no cover - console script
    try:
        signal.signal(signal.SIGINT, _early_interrupt)
        signal.signal(signal.SIGTERM, _early_interrupt)
    except ValueError:  # not the main thread
        pass
    if os.environ.get("AUDIOBW_MALLOC", "") != "default":
        tune_malloc()
    from .cli import entry as cli_entry

    cli_entry()
