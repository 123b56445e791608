"""Open report.html in headless Chromium: the page's self-test and a screenshot.

Standard library only: Chromium is driven through its command line
(``--dump-dom`` after a virtual-time budget, ``--screenshot``), with no
browser-automation package.  Used by tests/test_report_browser.py and to
regenerate the README screenshot::

    python -m audiobw.report.browser OUT_DIR/report.html docs/img/report.png

References
----------
.. [1] Chromium command-line switches ``--headless``, ``--dump-dom``,
   ``--virtual-time-budget``, ``--screenshot``, ``--window-size``,
   ``--enable-logging=stderr`` (console messages are logged as
   ``INFO:CONSOLE`` lines), Chromium headless documentation.
"""

from __future__ import annotations

import html
import json
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

CANDIDATES = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")
FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-default-apps",
    "--disable-extensions",
    "--mute-audio",
    "--hide-scrollbars",
)


def find_chromium() -> str | None:
    """Path of a Chromium binary on PATH, or None."""
    for name in CANDIDATES:
        path = shutil.which(name)
        if path:
            return path
    return None


def _run(args: list[str], *, timeout_s: float) -> subprocess.CompletedProcess:
    exe = find_chromium()
    if exe is None:
        raise FileNotFoundError("no Chromium on PATH (tried " + ", ".join(CANDIDATES) + ")")
    with tempfile.TemporaryDirectory(prefix="audiobw-chromium-") as profile:
        return subprocess.run(
            [exe, *FLAGS, f"--user-data-dir={profile}", *args],
            capture_output=True,
            text=True,
            timeout=timeout_s,
            check=False,
        )


def console_lines(stderr: str) -> list[str]:
    """Messages the page wrote to its console (Chromium logs them as ``CONSOLE`` lines)."""
    return [line for line in stderr.splitlines() if ":CONSOLE" in line]


def selftest(page: Path, *, timeout_s: float = 90.0) -> dict:
    """Load ``page`` from disk with ``?selftest`` and return what its self-test found.

    Returns the JSON the page writes into ``<pre id="selftest">`` plus
    ``console`` (console lines from Chromium's log) and ``dom`` (the dumped DOM).
    """
    url = Path(page).resolve().as_uri() + "?selftest"
    # Virtual time runs out while the page still waits on real work (decoding
    # images, reading clip metadata) when the machine is loaded: a larger budget
    # on a second and a third try, rather than a verdict from a half-run test.
    for budget_ms in (20000, 60000, 180000):
        proc = _run(
            [f"--virtual-time-budget={budget_ms}", "--enable-logging=stderr", "--v=0", "--dump-dom", url],
            timeout_s=timeout_s,
        )
        m = re.search(r'<pre id="selftest"[^>]*data-done="1"[^>]*>(.*?)</pre>', proc.stdout, re.S)
        if m:
            break
    else:
        pre = re.search(r'<pre id="selftest"[^>]*>', proc.stdout)
        raise RuntimeError(
            f"the page's self-test did not finish (exit {proc.returncode}; "
            f"{pre.group(0) if pre else 'no self-test element in the DOM'}); "
            f"stderr tail: {proc.stderr[-800:]}"
        )
    result = json.loads(html.unescape(m.group(1)))
    result["console"] = console_lines(proc.stderr)
    result["dom"] = proc.stdout
    return result


def screenshot(page: Path, target: Path, *, width: int = 1200, height: int = 1500, timeout_s: float = 90.0) -> Path:
    """Save a PNG screenshot of the top ``width`` × ``height`` CSS pixels of ``page``."""
    target = Path(target).resolve()
    target.parent.mkdir(parents=True, exist_ok=True)
    proc = _run(
        [
            f"--window-size={width},{height}",
            "--virtual-time-budget=5000",
            f"--screenshot={target}",
            Path(page).resolve().as_uri(),
        ],
        timeout_s=timeout_s,
    )
    if not target.is_file():
        raise RuntimeError(f"Chromium wrote no screenshot (exit {proc.returncode}); stderr tail: {proc.stderr[-800:]}")
    return target


def _shrink(png: Path, colours: int = 96) -> None:
    """Reduce a screenshot to a palette image (Pillow, installed with matplotlib)."""
    from PIL import Image

    with Image.open(png) as im:
        small = im.convert("RGB").quantize(colors=colours, method=Image.Quantize.MEDIANCUT, dither=Image.Dither.NONE)
        small.save(png, optimize=True)


def main(argv=None) -> int:
    args = list(sys.argv[1:] if argv is None else argv)
    if len(args) != 2:
        print("usage: python -m audiobw.report.browser REPORT.html OUT.png", file=sys.stderr)
        return 2
    out = screenshot(Path(args[0]), Path(args[1]))
    _shrink(out)
    print(f"wrote {out} ({out.stat().st_size // 1024} KiB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
