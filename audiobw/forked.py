"""Scoring half of a large sweep in a forked child (:func:`forked_map`), and the rule that a
child process dies with its parent (:func:`exit_with_parent`; batch workers use it too).

Linux only, when a core is idle; the rows come back as JSON through a pipe and
are identical to those of the plain loop (tests/test_forked.py).
"""

from __future__ import annotations


#: Below this many cases a sweep scores in one process (a fork costs more than it saves).
FORK_MIN_CASES = 128


def _may_fork(n_items: int) -> bool:
    """Whether :func:`forked_map` may score half of ``n_items`` cases in a forked child.

    Only on Linux (fork after numpy is safe there), with at least two cores and
    one of them idle (:func:`_others_busy`, the other processes' CPU use since
    this module was imported, at most cores − 1.5), no other live thread in
    this process, ``AUDIOBW_THREADS`` not ``1`` (batch workers that are one
    core each set it), and enough cases to pay for the fork.
    """
    import os
    import sys
    import threading

    from .background import helper_threads

    if n_items < FORK_MIN_CASES or not sys.platform.startswith("linux") or not helper_threads():
        return False
    cores = os.cpu_count() or 1
    return cores >= 2 and threading.active_count() == 1 and _others_busy() <= cores - 1.5


#: Shortest window over which :func:`_others_busy` measures (s): a few clock ticks per core.
BUSY_WINDOW_S = 0.05
#: Longest: CPU use further back says little about now.
BUSY_WINDOW_MAX_S = 30.0


def _cpu_times() -> tuple[float, int, int] | None:
    """(monotonic s, jiffies every core spent busy, jiffies this process spent, all its threads), or None
    without /proc.  Busy is user + nice + system + irq + softirq + steal of the first line of /proc/stat
    (proc(5); idle and iowait left out); this process's is utime + stime of /proc/self/stat."""
    import time

    try:
        with open("/proc/stat", encoding="ascii") as fh:
            v = [int(x) for x in fh.readline().split()[1:9]]
        with open("/proc/self/stat", encoding="ascii", errors="replace") as fh:
            stat = fh.read()
        own = stat[stat.rindex(")") + 2 :].split()  # fields from the 3rd (state) on; the name may hold spaces
        return time.monotonic(), sum(v) - v[3] - v[4], int(own[11]) + int(own[12])
    except (OSError, ValueError, IndexError):
        return None


_SINCE = _cpu_times()


def _others_busy() -> float:
    """How many cores the other processes kept busy (in cores, e.g. 0.3) since this module was
    imported or last asked (the analysis of a sweep runs in between), measured over at least
    :data:`BUSY_WINDOW_S` and at most :data:`BUSY_WINDOW_MAX_S` (older than that, e.g. in a
    long Python session, a fresh window of BUSY_WINDOW_S is taken).

    CPU time, not the runnable count of /proc/loadavg: that one snapshot counts tasks that
    are runnable for an instant (a machine's own monitors) as a core taken.  The 1-minute
    load average where /proc is missing (it also counts runs that have just ended).
    """
    import os
    import time

    global _SINCE
    now = _cpu_times()
    if _SINCE is None or now is None:
        try:
            return os.getloadavg()[0]
        except OSError:
            return float("inf")
    since = _SINCE if now[0] - _SINCE[0] <= BUSY_WINDOW_MAX_S else now
    wait = BUSY_WINDOW_S - (now[0] - since[0])
    if wait > 0:
        time.sleep(wait)
        now = _cpu_times() or now
    _SINCE = now
    seconds = now[0] - since[0]
    ticks = os.sysconf("SC_CLK_TCK") if hasattr(os, "sysconf") else 100
    others = (now[1] - since[1]) - (now[2] - since[2])
    return max(others, 0) / ticks / max(seconds, 1e-9)


def forked_map(fn, items: list, *, fork: bool | None = None, progress=None, sizes: list[int] | None = None) -> list:
    """``[fn(x) for x in items]``, the second half computed in a forked child when a core is idle.

    The child inherits everything computed so far (analysis, scorers, the shared
    prototypes) and sends its results back as JSON through a pipe (plain rows:
    numbers, strings, None, lists and string-keyed mappings; floats keep every
    bit through their repr); the order and the values are those of the plain
    loop (tested).  An error in the child is raised here (an
    :class:`~audiobw.errors.AudiobwError` with its type and text, anything else
    as RuntimeError); an interrupt stops both, and the child dies with the
    parent (Linux ``PR_SET_PDEATHSIG``).  ``fork``: force (True) or forbid
    (False) the split; default :func:`_may_fork`.  ``progress``: called as
    ``progress(done, total)`` after each item of this process (the child's
    half is counted at the pace of the parent's).  ``sizes``: how many cases
    each item holds (a batch of cases), for the fork rule, the halves and the
    progress count; default one each.
    """
    import json
    import os

    from . import errors

    sizes = [1] * len(items) if sizes is None else list(sizes)
    n = sum(sizes)
    done = [0]
    for size in sizes:
        done.append(done[-1] + size)  # cases finished after each item
    if progress is not None:
        progress(0, n)  # said at once: the first item may be a batch of many cases
    if not (_may_fork(n) if fork is None else fork) or len(items) < 2:
        return [_ticked(fn, x, done[i], n, 1, progress) for i, x in enumerate(items, start=1)]
    # the first item whose end passes half the cases ends the parent's share (at least one each)
    half = min(max(next(i for i, d in enumerate(done) if 2 * d >= n), 1), len(items) - 1)
    parent = os.getpid()
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child: score the second half, send it, leave without any cleanup of the parent's
        code = 0
        try:
            os.close(r)
            exit_with_parent(parent)
            try:
                msg = {"ok": [fn(x) for x in items[half:]]}
            except BaseException as exc:  # handed to the parent
                msg = {"error": type(exc).__name__, "text": str(exc)}
            with os.fdopen(w, "wb") as fh:
                fh.write(json.dumps(msg, allow_nan=True).encode())
        except BaseException:
            code = 1
        finally:
            os._exit(code)
    os.close(w)
    try:
        mine = [_ticked(fn, x, done[i], n, n / done[half], progress) for i, x in enumerate(items[:half], start=1)]
        with os.fdopen(r, "rb") as fh:
            r = -1
            data = fh.read()
    except BaseException:
        if r >= 0:
            os.close(r)
        try:
            os.kill(pid, 9)
        except OSError:
            pass
        os.waitpid(pid, 0)
        raise
    os.waitpid(pid, 0)
    if not data:
        raise RuntimeError("scoring: the helper process ended without its results")
    msg = json.loads(data)
    if "ok" not in msg:
        kind = getattr(errors, msg["error"], None)
        if isinstance(kind, type) and issubclass(kind, errors.AudiobwError):
            raise kind(msg["text"])
        raise RuntimeError(f"scoring (helper process): {msg['error']}: {msg['text']}")
    if progress is not None:
        progress(n, n)
    return mine + msg["ok"]


def _ticked(fn, x, done: int, n: int, pace: float, progress):
    """``fn(x)``, then ``progress`` told that ``done`` of ``n`` cases are finished (times ``pace``)."""
    out = fn(x)
    if progress is not None:
        progress(min(n, int(done * pace)), n)
    return out


def exit_with_parent(parent_pid: int | None) -> None:
    """Make this process (a batch worker, a forked scorer) die with its parent, so a killed run leaves no
    process holding the caller's pipes or scoring on.

    Linux: ``prctl(PR_SET_PDEATHSIG, SIGKILL)`` through ctypes (prctl(2)); then the parent is checked
    once, since it may have died before the call.  Elsewhere: a daemon thread watches the parent's pid.
    """
    import os
    import signal
    import sys
    import threading
    import time

    if parent_pid is None:
        return
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            PR_SET_PDEATHSIG = 1  # linux/prctl.h
            if libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0:
                if os.getppid() != parent_pid:
                    os._exit(1)
                return
        except (OSError, AttributeError):
            pass

    def watch():
        while True:
            if os.getppid() != parent_pid:
                os._exit(1)
            time.sleep(0.5)

    threading.Thread(target=watch, name="audiobw-parent-watch", daemon=True).start()
