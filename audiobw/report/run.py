"""Reading a finished sweep folder: sweep.json, spectrum.npz, the render folders, and the case rebuilt.

:func:`read_run` reads and checks what ``audiobw sweep`` wrote (and any
``render-*/`` subfolders with clips); :func:`rebuild_filter` and
:func:`rebuild_chain` design the case's filter and chain again exactly as the
sweep did, for the spec sheet (:mod:`audiobw.report.spec`) and the plots.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

from ..errors import AudioFileError, ParameterError

AB_CLIPS = ("ab-reference.wav", "ab-processed.wav")
#: Rendered at the chain's true level: linked for measurement, never offered as a player.
TRUE_LEVEL_CLIPS = ("chain-output.wav",)


# -- reading a run -------------------------------------------------------------


def read_run(out_dir) -> dict:
    """Read the outputs of a sweep folder.

    Returns
    -------
    dict
        ``dir`` (Path), ``doc`` (sweep.json mapping), ``sweep_sha256``,
        ``spectrum`` (dict of arrays from spectrum.npz, or None), ``renders``
        (list of render folders found, see :func:`find_renders`).

    Raises
    ------
    ParameterError
        The folder or its sweep.json is missing.
    AudioFileError
        sweep.json or spectrum.npz is unreadable, not audiobw's, or the two
        come from different programs.
    """
    d = Path(out_dir)
    if not d.is_dir():
        raise ParameterError(f"report: {str(d)!r} is not a folder; accepted: a folder written by audiobw sweep")
    path = d / "sweep.json"
    if not path.is_file():
        raise ParameterError(f"report: {str(d)!r} holds no sweep.json; accepted: a folder written by audiobw sweep")
    from .validate import load_spectrum, loads, validate_sweep

    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise AudioFileError(f"{path}: cannot read ({exc.strerror or exc})") from None
    doc = loads(path, raw)
    if not isinstance(doc, dict) or doc.get("tool") != "audiobw":
        why = f"tool is {doc.get('tool')!r}" if isinstance(doc, dict) else "not a JSON object"
        raise AudioFileError(
            f"{path}: not a sweep.json written by audiobw ({why}); accepted: a folder written by audiobw sweep"
        )
    validate_sweep(doc, path)
    spectrum = None
    npz = d / "spectrum.npz"
    if npz.is_file():
        spectrum = load_spectrum(npz, doc)
        if str(spectrum["sha256"]) != doc["input"]["sha256"]:
            raise AudioFileError(
                f"{npz}: its program (sha256 {str(spectrum['sha256'])[:12]}…) is not the one in sweep.json "
                f"({doc['input']['sha256'][:12]}…); accepted: the spectrum.npz written by the same sweep"
            )
    return {
        "dir": d,
        "doc": doc,
        "sweep_sha256": hashlib.sha256(raw).hexdigest(),
        "spectrum": spectrum,
        "renders": find_renders(d),
    }


PNG_MAGIC = (b"\x89PNG\r\n\x1a\n",)  # PNG signature (ISO/IEC 15948, clause 5.2)
WAV_MAGIC = (b"RIFF", b"RF64", b"BW64")  # RIFF/WAVE and its 64-bit forms (EBU Tech 3306)


def safe_member(root, path, magic) -> bool:
    """True if ``path`` may be linked or embedded in the report of ``root``: not a symbolic link,
    a regular file (or folder when ``magic`` is None) whose resolved path lies inside ``root``,
    and whose first bytes are one of ``magic``.  A planted link to a private file is never read."""
    import os
    import stat

    try:
        st = os.lstat(path)
        real_root = os.path.realpath(root)
        real = os.path.realpath(path)
    except (OSError, ValueError):
        return False
    if stat.S_ISLNK(st.st_mode) or os.path.commonpath([real_root, real]) != real_root:
        return False
    if magic is None:
        return stat.S_ISDIR(st.st_mode)
    if not stat.S_ISREG(st.st_mode):
        return False
    try:
        with open(path, "rb") as fh:
            head = fh.read(12)
    except OSError:
        return False
    return any(head.startswith(m) for m in magic) and (magic is not WAV_MAGIC or head[8:12] == b"WAVE")


def find_renders(out_dir) -> list[dict]:
    """Render output in ``render-*`` subfolders: their clips, A/B pair first.

    Returns a list of ``{"folder", "eye", "ab": [names], "other": [names], "true_level": [names]}``
    (``eye``: "eye.png" when a data-program render drew its eye diagram, else None)
    (names relative to the folder), sorted by folder name; empty if none.
    """
    found = []
    root = Path(out_dir)
    for sub in sorted(root.glob("render-*")):
        if sub.is_symlink() or not sub.is_dir() or not safe_member(root, sub, None):
            continue
        wavs = sorted(p.name for p in sub.iterdir() if p.suffix.lower() == ".wav" and safe_member(root, p, WAV_MAGIC))
        if not wavs:
            continue
        found.append(
            {
                "folder": sub.name,
                "eye": "eye.png" if safe_member(root, sub / "eye.png", PNG_MAGIC) else None,
                "ab": [n for n in AB_CLIPS if n in wavs],
                "true_level": [n for n in wavs if n in TRUE_LEVEL_CLIPS],
                "other": [n for n in wavs if n not in AB_CLIPS and n not in TRUE_LEVEL_CLIPS],
            }
        )
    return found


# -- rebuilding the case ---------------------------------------------------------


def rebuild_filter(doc: dict, case: dict):
    """The case's filter, designed again exactly as the sweep designed it."""
    from ..filters import FilterSpec, design

    spec = FilterSpec(
        case["response"],
        case["family"],
        int(case["order"]),
        case["design_low_hz"],
        case["design_high_hz"],
        ripple_db=doc["grid"]["ripple_db"],
        stopband_db=doc["grid"]["stopband_db"],
        stage=doc["chain"]["stage"],
        fs_hz=doc["input"]["sample_rate_hz"],
    )
    return design(spec)


def rebuild_chain(doc: dict):
    from ..chain import Chain

    return Chain.from_json(doc["chain"])
