"""The analysis pass's helper threads: blocks decoded ahead, the SHA-256 hashed alongside, and the
lane that computes the fine low-frequency PSD and the short frames block after block (so its
sums are bit-identical).

``AUDIOBW_THREADS=1`` turns off decoding ahead and the lane (and the forked scoring,
:mod:`audiobw.forked`): :func:`helper_threads`.
"""

from __future__ import annotations

import os

import numpy as np

from . import audio


def hash_in_background(path):
    """Start the file's SHA-256 in a helper thread (hashlib releases the GIL on
    large updates); returns a function that waits for it.  A failure there is
    retried in the caller, so its error is raised where it belongs."""
    import threading

    box: dict = {}

    def work():
        try:
            box["hex"] = audio.sha256_file(path)
        except BaseException:  # retried (and raised) by the caller
            pass

    thread = threading.Thread(target=work, name="audiobw-sha256", daemon=True)
    thread.start()

    def result() -> str:
        thread.join()
        return box["hex"] if "hex" in box else audio.sha256_file(path)

    result.ready = lambda: not thread.is_alive()  # type: ignore[attr-defined]
    return result


def digest_unchanged(digest, path, before) -> str:
    """The SHA-256, once the file is known to be the one decoded (unchanged through both passes)."""
    hex_ = digest()
    audio.check_unchanged(path, before)
    return hex_


def helper_threads() -> bool:
    """Whether the pass may decode ahead (:func:`prefetched`) and use the helper :class:`Lane`
    (the SHA-256 of a file not yet hashed is taken alongside either way; batch hashes first).

    Off with ``AUDIOBW_THREADS=1`` (batch's pool workers set it: a worker is
    one core, and ``--workers`` says how many a batch takes).
    """
    return os.environ.get("AUDIOBW_THREADS", "") != "1"


class Lane:
    """Run submitted jobs one after another, in order, in one helper thread.

    At most ``depth`` jobs wait; ``drain`` waits for all and raises the first
    error there, in the caller; ``close`` drops what has not started.
    """

    def __init__(self, depth: int = 2):
        from concurrent.futures import ThreadPoolExecutor

        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="audiobw-fine")
        self._pending: list = []
        self._depth = depth

    def submit(self, fn, *args) -> None:
        self._pending.append(self._pool.submit(fn, *args))
        while len(self._pending) > self._depth:
            self._pending.pop(0).result()

    def drain(self) -> None:
        while self._pending:
            self._pending.pop(0).result()

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)


def prefetched(blocks, depth: int = 2, prepare=None):
    """Iterate ``blocks`` with the next ones decoded in a helper thread.

    libsndfile decodes without holding the GIL, so decoding the next block
    overlaps the transforms of the current one.  ``prepare``, if given, is
    applied to each block in the helper thread too (the pass turns blocks
    channel-major there: numpy copies without the GIL).  At most ``depth``
    blocks wait in the queue (memory stays bounded); an exception from the
    reader is raised here, in the consumer.  With helper threads off
    (``AUDIOBW_THREADS=1``: a batch worker, one core) the blocks are decoded in line.
    """
    import queue
    import threading

    if not helper_threads():  # a batch worker is one core: decode in line
        for item in blocks:
            yield item if prepare is None else prepare(item)
        return
    q: queue.Queue = queue.Queue(maxsize=depth)
    stop = threading.Event()
    done = object()

    def reader():
        try:
            for item in blocks:
                if prepare is not None:
                    item = prepare(item)
                while not stop.is_set():
                    try:
                        q.put(item, timeout=0.1)
                        break
                    except queue.Full:
                        continue
                if stop.is_set():
                    return
            q.put(done)
        except BaseException as exc:  # handed to the consumer
            q.put(exc)

    thread = threading.Thread(target=reader, name="audiobw-decode", daemon=True)
    thread.start()
    try:
        while True:
            item = q.get()
            if item is done:
                return
            if isinstance(item, BaseException):
                raise item
            yield item
    finally:
        stop.set()
        thread.join(timeout=5.0)


def channel_major(block_fc: np.ndarray) -> np.ndarray:
    """A decoded block (frames, channels) as a contiguous (channels, frames) array."""
    return np.ascontiguousarray(block_fc.T)
