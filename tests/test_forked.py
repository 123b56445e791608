"""Scoring half of a large sweep in a forked child (audiobw.forked.forked_map) changes nothing."""

from __future__ import annotations

import math
import sys

import pytest

from audiobw.chain import Chain
from audiobw.errors import ParameterError
from audiobw.perceptual.scoring import Listening, PerceptualScorer
from audiobw.spectrum import analyse
from audiobw.forked import forked_map
from audiobw.sweep import Grid, Meter, score_cases

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="forked scoring is Linux-only")


def _square(x):
    return x * x


def test_forked_map_keeps_order_and_values():
    items = list(range(257))
    assert forked_map(_square, items, fork=True) == [x * x for x in items]
    assert forked_map(_square, [3], fork=True) == [9]  # one item: nothing to split
    assert forked_map(_square, [], fork=True) == []


def _fail_late(x):
    if x == 90:
        raise ParameterError("--cutoffs: case 90 is refused")
    return x


def test_an_error_in_the_child_is_raised_in_the_parent():
    # 90 lies in the second half (50 … 99): the child's error reaches the caller, type and text kept
    with pytest.raises(ParameterError, match="case 90 is refused"):
        forked_map(_fail_late, list(range(100)), fork=True)


def test_forked_scoring_gives_the_same_rows(write_audio, rng, monkeypatch):
    import audiobw.forked as forked_mod

    fs = 48000
    x = rng.standard_normal((fs * 2, 2)) * 0.05
    path = write_audio("forked.wav", x, fs)
    a = analyse(path)
    chain = Chain()
    grid = Grid(
        response="lowpass",
        families=("butterworth", "chebyshev1"),
        orders=(2, 5),
        cutoffs_hz=tuple(2000.0 * 10 ** (i / 40) for i in range(40)),
    )
    scorer = PerceptualScorer(a, chain, Listening(program="music"))
    targets = {"max_loss_db": 0.5}
    monkeypatch.setattr(forked_mod, "_may_fork", lambda n: False)
    plain = score_cases(a, chain, grid, Meter(), targets, perceptual=scorer)
    monkeypatch.setattr(forked_mod, "_may_fork", lambda n: True)
    forked = score_cases(a, chain, grid, Meter(), targets, perceptual=scorer)
    assert len(plain) == len(forked) == 160
    for p, f in zip(plain, forked):
        assert p.keys() == f.keys()
        for key in p:
            same = p[key] == f[key] or (isinstance(p[key], float) and math.isnan(p[key]) and math.isnan(f[key]))
            assert same, (p["id"], key, p[key], f[key])


def test_no_fork_when_told_not_to(monkeypatch):
    import audiobw.forked as forked_mod

    monkeypatch.setenv("AUDIOBW_THREADS", "1")
    assert not forked_mod._may_fork(10_000)
    monkeypatch.delenv("AUDIOBW_THREADS")
    assert not forked_mod._may_fork(forked_mod.FORK_MIN_CASES - 1)


def _busy_over(forked_mod, seconds: float, *, spin: bool) -> float:
    """forked._others_busy over a fresh window of ``seconds``, this process spinning or asleep."""
    import time

    forked_mod._SINCE = forked_mod._cpu_times()
    end = time.monotonic() + seconds
    if spin:
        while time.monotonic() < end:
            pass
    else:
        time.sleep(seconds)
    return forked_mod._others_busy()


def test_idle_core_is_judged_by_the_other_processes_cpu_time(monkeypatch):
    """A process spinning beside us takes about a core; our own spinning is not counted
    (without subtracting this process's CPU time the second figure would grow by a whole core)."""
    import subprocess
    import time

    import audiobw.forked as forked_mod

    monkeypatch.setattr(forked_mod, "_SINCE", forked_mod._SINCE)
    asleep = _busy_over(forked_mod, 0.3, spin=False)
    spinning = _busy_over(forked_mod, 0.3, spin=True)
    assert spinning < asleep + 0.5
    hog = subprocess.Popen([sys.executable, "-c", "import time\nt = time.time() + 5\nwhile time.time() < t: pass"])
    try:
        time.sleep(0.2)  # the interpreter has started and spins
        beside = _busy_over(forked_mod, 0.4, spin=False)
    finally:
        hog.kill()
        hog.wait()
    assert beside > asleep + 0.6


def test_malloc_tuning_changes_no_figure(tmp_path):
    """The console script's glibc mallopt settings (audiobw._start.tune_malloc) leave every byte of
    sweep.json and sweep.csv as the default allocator gives them."""
    import os
    import subprocess
    from pathlib import Path

    from audiobw._start import tune_malloc

    assert tune_malloc() is True  # Linux with glibc (this suite's platform)
    clip = Path(__file__).resolve().parents[1] / "clips" / "ensemble-48k-stereo.flac"
    out = {}
    for mode in ("tuned", "default"):
        env = {**os.environ, "AUDIOBW_MALLOC": mode, "AUDIOBW_NO_CACHE": "1"}
        args = [
            "sweep",
            str(clip),
            "--family",
            "butterworth,chebyshev1",
            "--order",
            "2,5",
            "--cutoffs",
            "3k:18k:6",
            "--max-loss",
            "0.5",
            "--out",
            str(tmp_path / mode),
        ]
        subprocess.run([sys.executable, "-m", "audiobw", *args], env=env, check=True, capture_output=True)
        out[mode] = [(tmp_path / mode / name).read_bytes() for name in ("sweep.json", "sweep.csv")]
    assert out["tuned"] == out["default"]


@pytest.mark.parametrize("fork", [False, True])
def test_progress_counts_up_to_every_item(fork):
    seen = []
    items = list(range(41))
    assert forked_map(_square, items, fork=fork, progress=lambda done, total: seen.append((done, total))) == [
        x * x for x in items
    ]
    dones = [d for d, _ in seen]
    assert all(t == 41 for _, t in seen)
    # said at once (0), then after the first item (1, or 2 at the forked pace), up to every item
    assert dones == sorted(dones) and dones[-1] == 41 and dones[0] == 0 and 0 < dones[1] <= 2


def test_the_child_dies_with_its_parent():
    """A forked scorer whose parent is killed does not run on (prctl PR_SET_PDEATHSIG)."""
    import os
    import signal
    import subprocess
    import time

    code = (
        "import os, sys, time\n"
        "from audiobw.sweep import forked_map\n"
        "def slow(x):\n"
        "    if x == 3:\n"
        "        print(os.getpid(), flush=True)\n"
        "    time.sleep(0.05 if x < 3 else 5.0)\n"
        "    return x\n"
        "print('parent', os.getpid(), flush=True)\n"
        "forked_map(slow, list(range(6)), fork=True)\n"
    )
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().startswith("parent")
    child = int(proc.stdout.readline())  # item 3 is the child's first (items 3, 4, 5)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    for _ in range(40):  # 2 s, well before the child's own 15 s of work would end
        try:
            os.kill(child, 0)
        except ProcessLookupError:
            break
        try:  # reaped by init; a zombie still answers kill(0): read its state
            with open(f"/proc/{child}/stat") as fh:
                if fh.read().split(")")[1].split()[0] == "Z":
                    break
        except FileNotFoundError:
            break
        time.sleep(0.05)
    else:
        pytest.fail(f"the forked child {child} outlived its killed parent")
