"""The README's worked examples are the tool's real output (they must not drift)."""

import re
import shlex

import pytest

from audiobw.cli import main

from .conftest import REPO

README = (REPO / "README.md").read_text(encoding="utf-8")


def _blocks():
    """(command, output) pairs: an ```sh block of one audiobw command, then an output block
    with at most a short caption line between them."""
    pat = re.compile(r"```sh\n(audiobw [^`]*?)```\n\s*(?:[^`\n]{0,40}\n\s*)?```\n(.*?)```", re.S)
    return [(cmd.replace("\\\n", " "), out) for cmd, out in pat.findall(README)]


@pytest.mark.parametrize("cmd,expected", _blocks(), ids=lambda v: v.split()[1] if v.startswith("audiobw") else "")
def test_readme_example_is_real_output(cmd, expected, capsys, monkeypatch, tmp_path):
    monkeypatch.chdir(REPO)
    args = shlex.split(cmd)[1:]
    if "--out" in args:
        out = args[args.index("--out") + 1]
        args[args.index("--out") + 1] = str(tmp_path / "o")
    code = main(args)
    got = capsys.readouterr().out
    assert code == 0
    if "--out" in cmd:
        got = got.replace(str(tmp_path / "o"), out)
    assert got.strip() == expected.strip()


def test_readme_has_examples():
    assert len(_blocks()) >= 2
