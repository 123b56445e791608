"""The one place where names (file paths, user text) become text for a reader.

POSIX lets a file name hold any byte but ``/`` and NUL: control characters
(ESC, BEL, newline), bytes that are not UTF-8 (Python carries them as lone
surrogates, PEP 383), markup.  Each destination gets its own escaping:

* :func:`shown` -- a terminal line: control characters, bidirectional
  overrides and undecodable bytes become ``\\xNN`` / ``\\uNNNN``, so a name
  can neither move the cursor, retitle the window, ring the bell nor split
  one message into two lines.
* :func:`md_text` and :func:`md_code` -- Markdown (spec.md), where raw HTML
  would render.
* :func:`csv_cell` -- a CSV field: a leading ``=``, ``+``, ``-``, ``@``
  (or TAB/CR) makes spreadsheets evaluate the cell as a formula; such text
  gets a leading apostrophe (common practice, as the OWASP "CSV injection"
  page recommends).

Standard library only (imported by the CLI's entry point).
"""

from __future__ import annotations

import os
import re

# C0 controls, DEL, C1 controls, bidirectional embeddings/overrides/isolates (they reorder what a
# terminal shows), the line and paragraph separators, and lone surrogates (undecodable bytes).
_UNSAFE = re.compile("[\x00-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028-\u202e\u2066-\u2069\ud800-\udfff]")


def _escape(m: re.Match) -> str:
    c = m.group()
    o = ord(c)
    if 0xDC80 <= o <= 0xDCFF:  # an undecodable byte, carried by surrogateescape
        return f"\\x{o - 0xDC00:02x}"
    if o < 0x100:
        return {"\n": "\\n", "\r": "\\r", "\t": "\\t"}.get(c, f"\\x{o:02x}")
    return f"\\u{o:04x}"


def shown(text) -> str:
    """``text`` (a str, a path or bytes) safe for one terminal line."""
    if isinstance(text, bytes):
        text = os.fsdecode(text)
    return _UNSAFE.sub(_escape, str(text))


_MD_SPECIAL = re.compile(r"([\\`*_{}\[\]()#+\-.!|~>])")


def md_text(text) -> str:
    """A name as Markdown text: HTML entities for ``<``, ``>``, ``&``; punctuation backslash-escaped."""
    s = shown(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return _MD_SPECIAL.sub(r"\\\1", s)


def md_code(text) -> str:
    """A name as a Markdown code span (nothing inside is rendered), fenced past any backticks it holds."""
    s = shown(text)
    longest = max((len(run) for run in re.findall(r"`+", s)), default=0)
    fence = "`" * (longest + 1)
    pad = " " if s.startswith("`") or s.endswith("`") else ""
    return f"{fence}{pad}{s}{pad}{fence}"


def csv_cell(value):
    """A CSV field that no spreadsheet runs as a formula; non-strings are returned as they are."""
    if isinstance(value, str):
        value = shown(value) if _UNSAFE.search(value) else value
        if value[:1] in ("=", "+", "-", "@", "\t", "\r"):
            return "'" + value
    return value
