"""The Settings as plain JSON data (what travels to the workers) and back, and the options' hash."""

from __future__ import annotations

import hashlib
import json


def settings_to_plain(settings) -> dict:
    """The Settings as JSON-ready plain data (what travels to the workers): :meth:`Settings.to_json`."""
    return settings.to_json()


def settings_from_plain(data: dict):
    """Rebuild Settings from :func:`settings_to_plain` output: :meth:`Settings.from_json`."""
    from ..model import Settings

    return Settings.from_json(data)


def options_hash(plain: dict) -> str:
    """SHA-256 of the options (canonical JSON) and the audiobw version: the cache key's second half."""
    from .. import __version__

    text = json.dumps({"version": __version__, "settings": plain}, sort_keys=True, allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()
