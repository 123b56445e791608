"""Whole-process benchmark: time ``audiobw`` the way a user runs it.

Each measurement is a fresh process started from the shell's point of view
(``.venv/bin/audiobw sweep ...``: interpreter start, imports, decode, analysis,
scoring, writing sweep.json, teardown) against a fresh *floor* process that
only decodes the same file with soundfile and takes one 8192-point rfft pass
over it.  Subjects run interleaved; each is run several times and the min and
median are kept, with the 1-minute load average at each run, because the
machine may be shared: read the ratios, not the absolute times.  Peak RSS of
a child comes from os.wait4's rusage (ru_maxrss, KiB on Linux; it includes
this parent's peak at fork, so the parent imports nothing heavy and makes
the programs in a child).

    python benchmarks/whole.py            # full table (also run by `make bench`)
    python benchmarks/whole.py --quick    # a smaller, faster table for development
    python benchmarks/whole.py --cache-only   # the re-sweep table (analysis cache) only

Every sweep runs with its own empty analysis cache (``AUDIOBW_CACHE_DIR``, a
new temporary folder per run) except the "again" subjects, which re-sweep with
other targets against a cache warmed by one untimed run.

Nothing here is a test: no time is asserted anywhere in ``make test``.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
BIN = Path(sys.executable).parent
AUDIOBW = str(BIN / "audiobw") if (BIN / "audiobw").exists() else None
BEGIN = "<!-- whole-process table: written by benchmarks/whole.py -->"
END = "<!-- end of whole-process table -->"

FLOOR = r"""
import sys
import numpy as np, soundfile as sf
from scipy import fft
n = 8192
tot = 0.0
with sf.SoundFile(sys.argv[1]) as fh:
    for b in fh.blocks(blocksize=1 << 17, dtype='float64', always_2d=True):
        m = b.shape[0] // n * n
        if m:
            tot += float(np.abs(fft.rfft(b[:m].T.reshape(b.shape[1], -1, n), axis=-1)[..., 1]).sum())
print(tot)
"""


#: The floor work over several files in one process (the batch row's ceiling).
FLOOR_FILES = FLOOR.replace("with sf.SoundFile(sys.argv[1]) as fh:\n    for b in", "for name in sys.argv[1:]:\n  with sf.SoundFile(name) as fh:\n    for b in")


def _cmd_audiobw(*args):
    return [AUDIOBW, *args] if AUDIOBW else [sys.executable, "-m", "audiobw", *args]


def timed(cmd, env=None):
    """Wall time (s), peak RSS (MB) and 1-min load average of one child process."""
    load = os.getloadavg()[0]
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=str(ROOT), env=env)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode(errors="replace")
    proc.stderr.close()
    if proc.returncode not in (0, 3):  # 3: no case met the targets (still a full sweep)
        raise RuntimeError(f"{' '.join(map(str, cmd))} exited {proc.returncode}:\n{err[-2000:]}")
    timed.cpu = usage.ru_utime + usage.ru_stime  # type: ignore[attr-defined]  # CPU s of the child
    return wall, usage.ru_maxrss / 1024.0, load


def cold_env():
    """An environment whose analysis cache is a new, empty folder: the run analyses the file
    (and writes its cache entry) as a first run on a file does."""
    return {**os.environ, "AUDIOBW_CACHE_DIR": tempfile.mkdtemp(prefix="audiobw-cold-cache-")}


def interleaved(repeats, subjects):
    """Run the subjects one after the other, ``repeats`` rounds; per subject: min, median, loads, RSS.

    A subject is ``(name, cmd)`` (run with a cold analysis cache) or ``(name, cmd, env)`` (``env``:
    a mapping, or a function returning one for each run)."""
    runs = {s[0]: [] for s in subjects}
    for _ in range(repeats):
        for name, cmd, *env in subjects:
            if "--out" in cmd:  # a fresh output folder each run: batch would resume from its own cache
                shutil.rmtree(cmd[cmd.index("--out") + 1], ignore_errors=True)
            e = (env[0]() if callable(env[0]) else env[0]) if env else cold_env()
            runs[name].append((*timed(cmd, e), timed.cpu))
            w, r, ld, cpu = runs[name][-1]
            print(f"  {name}: {w:.2f} s, CPU {cpu:.2f} s, {r:.0f} MB, load {ld:.2f}", flush=True)
    out = {}
    for name, rs in runs.items():
        walls = [x[0] for x in rs]
        out[name] = dict(min=min(walls), median=statistics.median(walls), rss=max(x[1] for x in rs),
                         load=statistics.median(x[2] for x in rs), cpu_min=min(x[3] for x in rs),
                         cpu_median=statistics.median(x[3] for x in rs))
    return out


def sweep_cmd(path, orders, n_cut, out, targets=("--max-loss", "0.5", "--min-snr", "90")):
    return _cmd_audiobw("sweep", str(path), "--response", "lowpass",
                        "--family", "butterworth,bessel,chebyshev1,elliptic",
                        "--order", ",".join(map(str, orders)), "--cutoffs", f"2k:20k:{n_cut}",
                        *targets, "--out", str(out))


def program(kind, seconds, seed=1):
    """Generate a program in a child process (benchmarks/programs.py), so that this parent
    stays small: a child's ru_maxrss starts from its parent's peak at fork."""
    code = f"from programs import program; print(program({kind!r}, {seconds!r}, seed={seed!r}))"
    out = subprocess.run([sys.executable, "-c", code], cwd=str(HERE), capture_output=True, text=True, check=True)
    return Path(out.stdout.strip().splitlines()[-1])


def warm_env(tmp, cmd):
    """An environment whose analysis cache holds the file's analysis (``cmd`` run once, untimed)."""
    env = {**os.environ, "AUDIOBW_CACHE_DIR": str(tmp / f"warm-cache-{time.monotonic_ns()}")}
    timed(cmd, env)
    return env


CACHE_BEGIN = "<!-- analysis-cache table: written by benchmarks/whole.py --cache-only -->"
CACHE_END = "<!-- end of analysis-cache table -->"


def cache_table(reps: int, seconds: float, write: bool):
    """The re-sweep loop: first sweep (cold cache), the same file again with other targets
    (analysis cached), and the floor process; 3-minute stereo FLAC, 96 cases."""
    load0 = os.getloadavg()
    p3 = program("noise", seconds)
    tmp = Path(tempfile.mkdtemp(prefix="audiobw-cache-bench-"))
    floor = [sys.executable, "-c", FLOOR, str(p3)]
    warm = warm_env(tmp, sweep_cmd(p3, [2, 4, 8], 8, tmp / "w"))
    r = interleaved(reps, [("floor", floor), ("first", sweep_cmd(p3, [2, 4, 8], 8, tmp / "a")),
                           ("again", sweep_cmd(p3, [2, 4, 8], 8, tmp / "b", ("--max-loss", "0.2")), warm),
                           ("no-cache", sweep_cmd(p3, [2, 4, 8], 8, tmp / "c", ("--max-loss", "0.2", "--no-cache")),
                            warm)])
    rows = []
    for label, num, den in (("first sweep (cold cache) / floor", "first", "floor"),
                            ("again, other targets (analysis cached) / floor", "again", "floor"),
                            ("again / first", "again", "first"),
                            ("again with --no-cache / floor", "no-cache", "floor")):
        n, d = r[num], r[den]
        rows.append(f"| {label} | {n['min']:.2f} / {d['min']:.2f} s | {n['median']:.2f} / {d['median']:.2f} s | "
                    f"{n['min'] / d['min']:.2f} × | {n['median'] / d['median']:.2f} × | "
                    f"{n['cpu_min']:.2f} / {d['cpu_min']:.2f} s ({n['cpu_min'] / d['cpu_min']:.2f} ×) | "
                    f"{n['load']:.2f} |")
    load1 = os.getloadavg()
    lines = [CACHE_BEGIN, "", f"Run: {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {os.cpu_count()} cores; "
             f"{seconds / 60:g}-min stereo 48 kHz 24-bit FLAC, 96 cases; {reps} interleaved runs each; "
             f"load average (1, 5, 15 min) {load0[0]:.2f}, {load0[1]:.2f}, {load0[2]:.2f} at start and "
             f"{load1[0]:.2f}, {load1[1]:.2f}, {load1[2]:.2f} at the end.", "",
             "| measurement | wall min (num / den) | wall median (num / den) | ratio of minima | ratio of medians "
             "| CPU min, user + sys (ratio) | load |",
             "|---|---|---|---|---|---|---|", *rows, "", CACHE_END]
    text = "\n".join(lines) + "\n"
    print(text)
    if write:
        _replace_between(CACHE_BEGIN, CACHE_END, text)


def _replace_between(begin, end, text):
    page = ROOT / "docs" / "performance.md"
    old = page.read_text(encoding="utf-8") if page.exists() else ""
    if begin in old and end in old:
        new = old.split(begin)[0] + text.rstrip("\n") + old.split(end, 1)[1]
    else:
        new = old.rstrip("\n") + "\n\n" + text
    tmp_page = page.with_suffix(".md.part")
    tmp_page.write_text(new, encoding="utf-8")
    os.replace(tmp_page, page)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="shorter files, fewer repeats (development)")
    ap.add_argument("--no-write", action="store_true", help="print the table only; leave docs/performance.md")
    ap.add_argument("--cache-only", action="store_true",
                    help="only the re-sweep table (analysis cache): 3-min file, first / again / floor")
    ap.add_argument("--repeats", type=int, default=None, help="interleaved runs per subject")
    a = ap.parse_args(argv)
    if a.cache_only:
        return cache_table(a.repeats or (1 if a.quick else 5), 30 if a.quick else 180, not a.no_write)
    load0 = os.getloadavg()
    reps = a.repeats or (1 if a.quick else 3)
    short, long_ = (30, 60) if a.quick else (180, 600)
    p3 = program("noise", short)
    p10 = program("noise", long_)
    tmp = Path(tempfile.mkdtemp(prefix="audiobw-whole-"))
    floor = lambda p: [sys.executable, "-c", FLOOR, str(p)]  # noqa: E731
    rows = []

    def row(label, num, den, target):
        ratio = num["min"] / den["min"]
        rows.append((label, f"{num['min']:.2f} / {den['min']:.2f} s", f"{num['median']:.2f} / {den['median']:.2f} s",
                     f"{ratio:.2f} ×", target, f"{num['load']:.2f}", f"{num['rss']:.0f} MB"))
        print(f"{label}: {ratio:.2f} (load {num['load']:.2f})", flush=True)

    print(f"1. {short:g} s stereo, 96 cases", flush=True)
    r = interleaved(reps, [("floor", floor(p3)), ("sweep", sweep_cmd(p3, [2, 4, 8], 8, tmp / "a"))])
    row(f"{short / 60:g}-min stereo FLAC, 96 cases / floor", r["sweep"], r["floor"], "≤ 1.3 ×")
    print(f"2. {long_:g} s stereo, 288 cases (+ repeat with new targets)", flush=True)
    warm = warm_env(tmp, sweep_cmd(p10, [2, 4, 8], 24, tmp / "w"))
    r = interleaved(reps, [("floor", floor(p10)), ("sweep", sweep_cmd(p10, [2, 4, 8], 24, tmp / "b")),
                           ("again", sweep_cmd(p10, [2, 4, 8], 24, tmp / "c", ("--max-loss", "0.2")), warm)])
    row(f"{long_ / 60:g}-min stereo FLAC, 288 cases / floor", r["sweep"], r["floor"], "≤ 1.1 ×")
    row("same, repeated with new targets / floor", r["again"], r["floor"], "≤ 0.3 ×")
    print("3. 1000 / 100 cases", flush=True)
    r = interleaved(reps, [("c100", sweep_cmd(p3, [1, 2, 4, 6, 8], 5, tmp / "d")),
                           ("c1000", sweep_cmd(p3, [1, 2, 4, 6, 8], 50, tmp / "e"))])
    row(f"1000 cases / 100 cases, {short / 60:g}-min file", r["c1000"], r["c100"], "≤ 1.1 ×")
    print("4. 10 000 cases", flush=True)
    r = interleaved(1 if a.quick else 2, [("floor", floor(p3)), ("c10k", sweep_cmd(p3, [1, 2, 4, 6, 8], 500, tmp / "f"))])
    row(f"10 000 cases, {short / 60:g}-min file / floor (peak RSS of the sweep)", r["c10k"], r["floor"],
        "≤ 2.5 ×, ≤ 200 MB")
    print("5. batch", flush=True)
    n_files = 6 if a.quick else 24
    folder = tmp / "corpus"
    folder.mkdir()
    for i in range(n_files):
        src = program("noise", 60, seed=100 + i)
        try:  # batch skips symbolic links: a hard link, else a copy
            os.link(src, folder / src.name)
        except OSError:
            shutil.copyfile(src, folder / src.name)
    batch = lambda w: _cmd_audiobw("batch", str(folder), "--family", "butterworth,bessel", "--order", "2,4",  # noqa: E731
                                   "--cutoffs", "2k:20k:8", "--max-loss", "0.5", "--workers", str(w),
                                   "--out", str(tmp / f"batch{w}"))
    # the machine's own ceiling for two processes: the floor work (decode + one FFT pass) over the
    # same files, all in one process against half in each of two processes started together
    files = sorted(str(x) for x in folder.iterdir())
    one = [sys.executable, "-c", FLOOR_FILES, *files]
    # (the benchmark's own temporary paths: no spaces, so the two lists split on them)
    two = ["sh", "-c", '"$0" -c "$1" $2 & "$0" -c "$1" $3; wait', sys.executable, FLOOR_FILES,
           " ".join(files[0::2]), " ".join(files[1::2])]
    r = interleaved(reps, [("w1", batch(1)), ("w2", batch(2)), ("one", one), ("two", two)])
    speedup = {"min": r["w1"]["min"], "median": r["w1"]["median"], "load": r["w2"]["load"], "rss": r["w2"]["rss"]}
    row(f"batch, {n_files} one-minute files: 1 worker / 2 workers (speed-up)", speedup,
        {"min": r["w2"]["min"], "median": r["w2"]["median"]}, "≥ 1.8 ×")
    ceiling = {"min": r["one"]["min"], "median": r["one"]["median"], "load": r["two"]["load"], "rss": r["two"]["rss"]}
    row(f"this machine's ceiling: floor work over the {n_files} files, one process / two side by side", ceiling,
        {"min": r["two"]["min"], "median": r["two"]["median"]}, "(none: the most two workers can gain)")

    print("6. helper threads on a loaded machine", flush=True)
    busy = [subprocess.Popen([sys.executable, "-c", "while True: pass"]) for _ in range(os.cpu_count() or 2)]
    try:
        time.sleep(2.0)
        off = lambda: {**cold_env(), "AUDIOBW_THREADS": "1"}  # noqa: E731
        r = interleaved(reps, [("threads", sweep_cmd(p3, [2, 4, 8], 8, tmp / "g")),
                               ("single", sweep_cmd(p3, [2, 4, 8], 8, tmp / "h"), off)])
    finally:
        for b in busy:
            b.kill()
            b.wait()
    row(f"{short / 60:g}-min, 96 cases, with {os.cpu_count()} busy processes: helper threads on / off "
        "(AUDIOBW_THREADS=1)", r["threads"], r["single"], "≤ 1.0 ×")
    lines = [BEGIN, "", f"Run: {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}"
             f"{' (quick mode)' if a.quick else ''}; {os.cpu_count()} cores; load average (1, 5, 15 min) at start "
             f"{load0[0]:.2f}, {load0[1]:.2f}, {load0[2]:.2f}.  Whole processes, interleaved; ratio of the minima "
             f"({reps} run(s) each); load = median 1-min load average at the start of the runs.", "",
             "| measurement | min (num / den) | median (num / den) | ratio | target | load | peak RSS |",
             "|---|---|---|---|---|---|---|"]
    lines += ["| " + " | ".join(r) + " |" for r in rows]
    lines += ["", END]
    text = "\n".join(lines) + "\n"
    print(text)
    if not a.no_write:
        page = ROOT / "docs" / "performance.md"
        old = page.read_text(encoding="utf-8") if page.exists() else ""
        if BEGIN in old and END in old:
            new = old.split(BEGIN)[0] + text.rstrip("\n") + old.split(END, 1)[1]
        else:
            head, sep, tail = old.partition("<!-- everything below")
            new = head.rstrip("\n") + "\n\n" + text + ("\n" + sep + tail if sep else "")
        tmp_page = page.with_suffix(".md.part")
        tmp_page.write_text(new, encoding="utf-8")
        os.replace(tmp_page, page)
    return rows


if __name__ == "__main__":
    main()
