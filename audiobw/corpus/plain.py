"""The Settings as plain JSON data (what travels to the workers) and back, and the options' hash."""

from __future__ import annotations

import hashlib
import json
from dataclasses import asdict


def _plain(v):
    if isinstance(v, (tuple, list)):
        return [_plain(x) for x in v]
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if hasattr(v, "__dataclass_fields__"):
        return _plain(asdict(v))
    return v


def settings_to_plain(settings) -> dict:
    """The Settings as JSON-ready plain data (what travels to the workers): every field."""
    from dataclasses import fields

    return {f.name: _plain(getattr(settings, f.name)) for f in fields(settings)}


def settings_from_plain(data: dict):
    """Rebuild Settings from :func:`settings_to_plain` output."""
    from dataclasses import fields

    from ..chain import Chain
    from ..metrics import Meter
    from ..settings import Settings

    kw = dict(data)
    kw["chain"] = Chain(**data["chain"])
    kw["meter"] = Meter(**data["meter"])
    kw["grid_values"] = {k: tuple(v) if isinstance(v, list) else v for k, v in data["grid_values"].items()}
    kw["targets"] = dict(data["targets"])
    kw["input_level"] = tuple(data["input_level"]) if data["input_level"] is not None else None
    if data.get("listening"):
        from ..perceptual.scoring import Listening

        ls = data["listening"]
        ag = ls.get("audiogram_hl")
        kw["listening"] = Listening(
            ls["program"], ls.get("playback_spl_db"), {float(k): float(v) for k, v in ag.items()} if ag else None
        )
    if "default_targets" in data:
        kw["default_targets"] = tuple(data["default_targets"])
    known = {f.name for f in fields(Settings)}
    return Settings(**{k: v for k, v in kw.items() if k in known})


def options_hash(plain: dict) -> str:
    """SHA-256 of the options (canonical JSON) and the audiobw version: the cache key's second half."""
    from .. import __version__

    text = json.dumps({"version": __version__, "settings": plain}, sort_keys=True, allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()
