"""Regenerate the README's output blocks from the real commands (tests/test_readme.py checks them).

Run from the repository root: ``.venv/bin/python tools/regen_readme.py``.
"""

import contextlib
import io
import re
import shlex
import tempfile
from pathlib import Path

from audiobw.cli import main

REPO = Path(__file__).resolve().parent.parent
PAT = re.compile(r"(```sh\n(audiobw [^`]*?)```\n\s*(?:[^`\n]{0,40}\n\s*)?```\n)(.*?)(```)", re.S)


def run(cmd: str) -> str:
    args = shlex.split(cmd.replace("\\\n", " "))[1:]
    with tempfile.TemporaryDirectory() as tmp:
        out = None
        if "--out" in args:
            out = args[args.index("--out") + 1]
            args[args.index("--out") + 1] = str(Path(tmp) / "o")
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            code = main(args)
        if code != 0:
            raise SystemExit(f"{cmd!r} exited {code}")
        text = buf.getvalue()
        if out is not None:
            text = text.replace(str(Path(tmp) / "o"), out)
    return text.strip("\n") + "\n"


def main_() -> None:
    import os

    os.chdir(REPO)
    readme = (REPO / "README.md").read_text(encoding="utf-8")
    new = PAT.sub(lambda m: m.group(1) + run(m.group(2)) + m.group(4), readme)
    (REPO / "README.md").write_text(new, encoding="utf-8")


if __name__ == "__main__":
    main_()
