"""One run per output folder: an exclusive lock on the folder while a run writes into it."""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

from ..errors import OutputError
from .reading import shown
from .writing import output_error

LOCK_NAME = ".audiobw-lock"
LOCK_WAIT_S = 5.0
_held_locks: dict = {}


@contextlib.contextmanager
def output_lock(folder, *, wait_s: float | None = None):
    """Hold an exclusive lock on the output ``folder`` while a run writes into it.

    ``fcntl.flock`` on ``folder/.audiobw-lock`` (a file of our own naming, left in
    place, empty).  A second run waits up to ``wait_s`` seconds (default
    :data:`LOCK_WAIT_S`), then refuses with :class:`OutputError`; the kernel
    releases the lock when the holder exits, however it exits.  Re-entrant
    within one process (sweep --report takes it once for both steps).
    """
    import fcntl
    import time

    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OutputError(f"--out: {shown(folder)!r} exists and is not a folder")
    created = not folder.exists()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        key = os.path.realpath(folder)
    except OSError as exc:
        raise output_error(folder, exc) from None
    if key in _held_locks:
        _held_locks[key][1] += 1
        try:
            yield folder
        finally:
            _held_locks[key][1] -= 1
        return
    try:
        fd = os.open(folder / LOCK_NAME, os.O_RDWR | os.O_CREAT | getattr(os, "O_NOFOLLOW", 0), 0o666)
    except OSError as exc:
        raise output_error(folder / LOCK_NAME, exc) from None
    deadline = time.monotonic() + (LOCK_WAIT_S if wait_s is None else wait_s)
    try:
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise OutputError(
                        f"{shown(folder)}: another audiobw run is writing into this folder (lock {LOCK_NAME} "
                        "held); accepted: a folder no other run is using: wait for it to finish or choose "
                        "another --out"
                    ) from None
                time.sleep(0.1)
        _held_locks[key] = [fd, 1]
        try:
            yield folder
        except BaseException:
            # a run refused before writing leaves no folder behind that it made itself
            if created and [p.name for p in folder.iterdir()] == [LOCK_NAME]:
                with contextlib.suppress(OSError):
                    (folder / LOCK_NAME).unlink()
                    folder.rmdir()
            raise
        finally:
            del _held_locks[key]
    finally:
        os.close(fd)  # closing the descriptor releases the flock
