"""The batch result cache: one JSON file per swept file in ``OUT/cache/``.

Keyed by the file's SHA-256 and the options' hash (:func:`audiobw.corpus.plain.options_hash`),
bound to the tool version and checked by a checksum, so an interrupted run
resumes with only the missing work.  Not the analysis cache (:mod:`audiobw.cache`,
the user's cache folder), which keeps the analysis pass of a file.
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path

from .. import registry

CACHE_FORMAT = "audiobw-batch-cache/2"  # /2: bound to the tool version, with a checksum
IDENTITY_KEYS = ("response", "family", "order", "design_low_hz", "design_high_hz")
#: Per-case values kept in the cache and aggregated by median over the files.
MEDIAN_KEYS = ("low_hz", "high_hz") + registry.keys(1, "median")
#: Data-program metrics (``--program data``), carried the same way when a file has them.
DATA_KEYS = registry.keys(3, "median")


def _cache_file(cache_dir, sha256: str, opt_hash: str) -> Path:
    return Path(cache_dir) / f"{sha256}-{opt_hash[:16]}.json"


def read_cache(cache_dir, sha256: str, opt_hash: str):
    """A cached per-file result, or None when absent or not ours."""
    from .. import __version__

    path = _cache_file(cache_dir, sha256, opt_hash)

    def no_constant(name):
        raise ValueError(name)

    try:
        entry = json.loads(path.read_text(encoding="utf-8"), parse_constant=no_constant)
    except (OSError, ValueError, RecursionError):
        return None
    if not isinstance(entry, dict):
        return None
    if entry.get("format") != CACHE_FORMAT or entry.get("sha256") != sha256 or entry.get("options") != opt_hash:
        return None
    if entry.get("tool_version") != __version__ or entry.get("checksum") != entry_checksum(entry):
        return None  # written by another version, or edited by hand: recomputed
    return entry if cache_entry_valid(entry) else None


def entry_checksum(entry: dict) -> str:
    """SHA-256 over a cache entry's content (canonical JSON, without the checksum itself).

    It binds the entry to its inputs (file SHA-256, options hash, tool version, all inside
    the content) and shows any edit; it is a consistency check, not a signature.
    """
    body = {k: v for k, v in entry.items() if k != "checksum"}
    text = json.dumps(body, sort_keys=True, allow_nan=False, ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _num_or_none(v) -> bool:
    return v is None or (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v))


def cache_entry_valid(entry: dict) -> bool:
    """The shape :func:`summarise` relies on: cases with unique integer ids, their identity,
    finite figures, passes/fails/margins; a choice that names one of them."""
    cases = entry.get("cases")
    if not isinstance(cases, list) or not cases or not isinstance(entry.get("input"), dict):
        return False
    ids = []
    for c in cases:
        if not isinstance(c, dict):
            return False
        ident = c.get("id")
        if isinstance(ident, bool) or not isinstance(ident, int) or ident in ids:
            return False
        ids.append(ident)
        if any(k not in c for k in IDENTITY_KEYS) or not isinstance(c.get("order"), int):
            return False
        if not all(_num_or_none(c.get(k)) for k in MEDIAN_KEYS + tuple(k for k in DATA_KEYS if k in c)):
            return False
        if not isinstance(c.get("passes"), bool) or not isinstance(c.get("fails"), list):
            return False
        if not all(isinstance(f, str) for f in c["fails"]) or c["passes"] != (not c["fails"]):
            return False
        margins = c.get("margins_db")
        if not isinstance(margins, dict) or not all(_num_or_none(v) for v in margins.values()):
            return False
    choice = entry.get("choice")
    if choice is not None and (not isinstance(choice, dict) or choice.get("case") not in ids):
        return False
    return isinstance(entry.get("warnings", []), list)


def _sweep_present(out_dir: Path, sha256: str) -> bool:
    try:
        doc = json.loads((out_dir / "sweep.json").read_text(encoding="utf-8"))
        return doc["input"]["sha256"] == sha256 and (out_dir / "sweep.csv").is_file()
    except (OSError, ValueError, KeyError, TypeError):
        return False
