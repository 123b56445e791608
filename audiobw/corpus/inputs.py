"""Corpus inputs: files, folders (recursive) and glob patterns walked into a list of audio files.

Symbolic links to folders, and links leading out of a given folder, are
skipped and listed unless ``--follow-links``; loops are stopped.  Anything
refused is named with the reason.  Also the ``--coverage`` value.
"""

from __future__ import annotations

import glob
import hashlib
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import ParameterError


@dataclass(frozen=True)
class Item:
    """One input file: the path as shown (``path``) and its folder name under files/."""

    path: str
    name: str


@dataclass
class Inputs:
    items: list
    skipped: list = field(default_factory=list)


def _is_audio(name: str) -> bool:
    from ..audio import AUDIO_SUFFIXES

    return os.path.splitext(name)[1].lower() in AUDIO_SUFFIXES


def _inside(path_real: str, root_real: str) -> bool:
    return path_real == root_real or path_real.startswith(root_real.rstrip(os.sep) + os.sep)


def _walk(root: str, follow_links: bool, found: list, skipped: list) -> None:
    """Audio files under ``root``; symlink loops safe; no link leaves the tree unless asked."""
    root_real = os.path.realpath(root)
    seen_dirs: set = set()

    def visit(display: str):
        try:
            st = os.stat(display)
        except OSError as exc:
            skipped.append((display, f"cannot read folder ({exc.strerror or exc})"))
            return
        key = (st.st_dev, st.st_ino)
        if key in seen_dirs:  # a loop, or a second way into a folder already walked
            return
        seen_dirs.add(key)
        try:
            entries = sorted(os.scandir(display), key=lambda e: e.name)
        except OSError as exc:
            skipped.append((display, f"cannot read folder ({exc.strerror or exc})"))
            return
        for entry in entries:
            if entry.name.startswith("."):
                continue  # hidden files and folders (and our own .part files), common practice
            full = os.path.join(display, entry.name)
            if entry.is_symlink():
                real = os.path.realpath(full)
                if not os.path.exists(real):
                    if _is_audio(entry.name):
                        skipped.append((full, "broken symbolic link"))
                    continue
                if not follow_links and not _inside(real, root_real):
                    if os.path.isdir(real) or _is_audio(entry.name):
                        skipped.append(
                            (full, "symbolic link out of the folder given; not followed (--follow-links follows it)")
                        )
                    continue
                if not follow_links and os.path.isdir(real):
                    continue  # a folder inside the tree: walked under its own name
            if entry.is_dir():
                visit(full)
            elif entry.is_file() and _is_audio(entry.name):
                found.append(full)

    visit(root)


def _glob_base(pattern: str) -> str:
    """The leading part of a glob pattern with no wildcard in it."""
    parts, out = Path(pattern).parts, []
    for part in parts:
        if glob.has_magic(part):
            break
        out.append(part)
    return os.path.join(*out) if out else "."


def _through_link(match: str, base: str) -> bool:
    """Whether ``match`` is reached through a symbolic link below ``base``, or is a link leading out of it."""
    rel = os.path.relpath(match, base)
    if rel.startswith(os.pardir):
        return False
    here = base
    for part in Path(rel).parts[:-1]:
        here = os.path.join(here, part)
        if os.path.islink(here):
            return True
    return os.path.islink(match) and not _inside(os.path.realpath(match), os.path.realpath(base))


def _slug(display: str) -> str:
    parts = [p for p in Path(display).parts if p not in ("", ".", "..", os.sep, "/") and not p.endswith(":\\")]
    text = "__".join(re.sub(r"[^A-Za-z0-9._-]+", "_", p) for p in parts).strip("._") or "file"
    return text[:150]


def collect_inputs(args, *, follow_links: bool = False) -> Inputs:
    """Expand INPUT arguments (files, folders, globs) into a sorted, de-duplicated list.

    A file named explicitly is taken whatever its suffix; folders (walked
    recursively) and glob matches give audio files only
    (:data:`audiobw.audio.AUDIO_SUFFIXES`).  Hidden entries in folders are
    left out.  Without ``follow_links`` no symbolic link to a folder is
    descended (the tree's own folders are walked under their own names) and
    no link that leads out of a folder given (or out of a pattern's fixed
    leading part) is taken; links that lead out are listed as skipped.  The same file reached twice (same real path) is taken once,
    under the first name in sorted order.

    Raises
    ------
    ParameterError
        An argument that names nothing and matches nothing, or no audio file at all.
    """
    found: list[str] = []
    skipped: list[tuple[str, str]] = []
    for arg in args:
        arg = os.fspath(arg)
        if os.path.isdir(arg):
            _walk(os.path.normpath(arg), follow_links, found, skipped)
        elif os.path.lexists(arg):
            found.append(os.path.normpath(arg))
        elif glob.has_magic(arg):
            matches = sorted(glob.glob(arg, recursive=True))
            if not matches:
                raise ParameterError(f"INPUT: {arg!r} matches no file or folder")
            base = _glob_base(arg)
            for m in matches:
                if not follow_links and _through_link(m, base):
                    continue  # reached through a symbolic link below the pattern's fixed part
                if os.path.isdir(m):
                    _walk(os.path.normpath(m), follow_links, found, skipped)
                elif _is_audio(m):
                    found.append(os.path.normpath(m))
        else:
            raise ParameterError(f"INPUT: {arg!r}: no such file or folder; accepted: files, folders, glob patterns")
    from ..audio import canonical_path, is_regular_file

    regular = []
    for display in found:
        if not is_regular_file(display):
            kind = (
                "broken symbolic link"
                if not os.path.exists(display)
                else "a folder"
                if os.path.isdir(display)
                else "not a regular file (FIFO, device or socket)"
            )
            skipped.append((canonical_path(display), f"{kind}; not opened; accepted: regular audio files"))
        else:
            regular.append(display)
    # folder names, order and recorded paths come from one canonical form of each path,
    # so naming a file by an absolute or a relative path gives the same outputs
    found = [canonical_path(d) for d in regular]
    items, seen_real, used = [], set(), set()
    for display in sorted(set(found)):
        real = os.path.realpath(display)
        if real in seen_real:
            continue
        seen_real.add(real)
        name = _slug(display)
        if name.casefold() in used:
            name = f"{name}~{hashlib.sha1(display.encode('utf-8', 'surrogateescape')).hexdigest()[:8]}"
        used.add(name.casefold())
        items.append(Item(Path(display).as_posix(), name))
    if not items:
        from ..audio import AUDIO_SUFFIXES

        if skipped:
            raise ParameterError(f"INPUT: {skipped[0][0]!r}: {skipped[0][1]}")
        raise ParameterError("INPUT: no audio file found; accepted suffixes: " + ", ".join(AUDIO_SUFFIXES))
    return Inputs(items, sorted({(canonical_path(p), r) for p, r in skipped}))


def parse_coverage(value) -> float:
    """``95%`` or a fraction ``0.95`` -> 0.95 (0 < coverage <= 1)."""
    text = str(value).strip()
    try:
        x = float(text[:-1]) / 100.0 if text.endswith("%") else float(text)
    except ValueError:
        x = math.nan
    if not (0.0 < x <= 1.0) or (not text.endswith("%") and x > 1.0):
        raise ParameterError(
            f"--coverage: {value!r} is not accepted; accepted: a percentage such as 95% "
            "or a fraction such as 0.95 (above 0, at most 100 %)"
        )
    return x
