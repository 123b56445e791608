"""The realised stages in the spec sheet and the report page, when realise.json is present."""

from __future__ import annotations

import html
import json
from pathlib import Path

from . import CAUTION
from .text import stage_lines, summary_lines


def _read(folder) -> dict | None:
    path = Path(folder) / "realise.json"
    if not path.is_file():
        return None
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        stage_lines(doc), summary_lines(doc)  # noqa: B018  (refuse a file the text cannot show)
        return doc
    except (OSError, ValueError, KeyError, TypeError, IndexError):
        return {"unreadable": str(path)}


def markdown_section(folder) -> str:
    """spec.md lines for the realised stages ('' without realise.json)."""
    doc = _read(folder)
    if doc is None:
        return ""
    if "unreadable" in doc:
        return f"\n### Realised stages\n\n{doc['unreadable']} could not be read; rerun `audiobw realise`.\n"
    out = ["", "### Realised stages", "", f"From `audiobw realise`: {doc['source']}.", "", "```"]
    out += stage_lines(doc)
    out += ["```", ""]
    out += [f"- {line}" for line in summary_lines(doc)[:-1]]
    out += ["", f"*{CAUTION}*", ""]
    return "\n".join(out)


def html_section(folder) -> str:
    """report.html section for the realised stages ('' without realise.json)."""
    doc = _read(folder)
    if doc is None:
        return ""
    if "unreadable" in doc:
        return (
            f'<section id="realise"><h2>Realised stages</h2><p>{html.escape(doc["unreadable"])} could not '
            "be read; rerun <code>audiobw realise</code>.</p></section>"
        )
    body = html.escape("\n".join(stage_lines(doc)))
    items = "".join(f"<li>{html.escape(line)}</li>" for line in summary_lines(doc)[:-1])
    img = (
        '<figure><img src="realise-band.png" alt="Monte Carlo response band of the realised filter">'
        "<figcaption>Monte Carlo response band of the realised stages.</figcaption></figure>"
        if (Path(folder) / "realise-band.png").is_file()
        else ""
    )
    return (
        f'<section id="realise"><h2>Realised stages: parts and yield</h2><p class="meta">'
        f"{html.escape(doc['source'])}</p><pre>{body}</pre><ul>{items}</ul>{img}"
        f"<p><strong>{html.escape(CAUTION)}</strong></p></section>"
    )
