"""report.html: one self-contained page (plots embedded as data: URIs, no network fetches).

Every string that comes from a user or from a file name is escaped with
:func:`html.escape` (text and attribute values alike); URLs of clips are
percent-encoded first.  A Content-Security-Policy meta tag forbids every
fetch except the embedded images and the local clips, so the page opens from
disk and cannot reach the network.

Each shown spec value carries ``data-spec`` (its path in spec.json, dots
between keys) and ``data-value`` (the spec.json value as JSON), so a test can
check the page against spec.json.  Opened as ``report.html?selftest``, an
inline script decodes every image, loads the metadata of every clip, sorts
the case table once and writes what it found as JSON into
``<pre id="selftest">`` (used by tests/test_report_browser.py).
"""

from __future__ import annotations

import base64
import html
import json
from pathlib import Path
from urllib.parse import quote

from ..cautions import LISTENING_CAUTION
from .formatting import (
    case_line,
    chain_value_text,
    fmt,
    json_pointer,
    margin_value_text,
    metric_value_text,
    passband_phrase,
    spec_rows,
    target_info,
    target_text,
)
from .page_assets import CSP, SCRIPT, STYLE
from .table import COLUMNS


def esc(value) -> str:
    """Escape any value for HTML text or a quoted attribute."""
    return html.escape("" if value is None else str(value), quote=True)


def _value_cell(spec: dict, pointer: str | None, text: str) -> str:
    if pointer is None:
        return f"<td>{esc(text)}</td>"
    value = json.dumps(json_pointer(spec, pointer), ensure_ascii=False)
    return f'<td class="v" data-spec="{esc(pointer)}" data-value="{esc(value)}">{esc(text)}</td>'


def _figure(plot) -> str:
    data = base64.b64encode(plot.png).decode("ascii")
    links = f'<a href="plot-{esc(plot.name)}.png">PNG</a>'
    if plot.svg is not None:
        links += f' · <a href="plot-{esc(plot.name)}.svg">SVG</a>'
    return (
        f'<figure id="plot-{esc(plot.name)}"><img src="data:image/png;base64,{data}" alt="{esc(plot.title)}" '
        f'width="{plot.width_px}" height="{plot.height_px}">'
        f"<figcaption><strong>{esc(plot.title)}.</strong> {esc(plot.caption)} ({links})</figcaption></figure>"
    )


def _clip_url(folder: str, name: str) -> str:
    return quote(folder) + "/" + quote(name)


def _eye_figure(base, r: dict) -> str:
    """The render's eye diagram (data programs), embedded like the plots."""
    from .run import PNG_MAGIC, safe_member

    target = Path(base) / r["folder"] / str(r.get("eye"))
    if not r.get("eye") or not safe_member(base, target, PNG_MAGIC):  # checked again when read
        return ""
    data = base64.b64encode(target.read_bytes()).decode("ascii")
    return (
        f'<figure class="eye"><img src="data:image/png;base64,{data}" alt="eye diagram of the simulated '
        f'chain output"><figcaption>Eye diagram of the simulated chain output '
        f"({esc(r['folder'])}/{esc(r['eye'])}); the dash-dot lines mark the best sampling instant "
        "from the sweep.</figcaption></figure>"
    )


def _listening(renders: list, base=".") -> str:
    if not renders:
        return ""
    out = [
        '<section id="listen"><h2>Listen: A/B clips</h2>',
        f'<p class="caution" id="listening-caution"><strong>Listening caution.</strong> '
        f"{esc(LISTENING_CAUTION.removeprefix('Listening caution: '))}</p>",
    ]
    labels = {
        "ab-reference.wav": "A — reference (input, unfiltered, no added noise)",
        "ab-processed.wav": "B — processed (through the modelled chain)",
    }
    folders = {"render-chosen": "the chosen case", "render-narrower": "the next narrower case (it fails a target)"}
    for r in renders:
        what = folders.get(r["folder"])
        out.append(f"<h3>{esc(r['folder'])}{(': ' + esc(what)) if what else ''}</h3>")
        out.append(_eye_figure(base, r))
        for name in r["ab"] + r["other"]:
            url = _clip_url(r["folder"], name)
            out.append(
                f'<div class="clip"><audio controls preload="metadata" src="{esc(url)}"></audio>'
                f"<span>{esc(labels.get(name, 'clip'))}: <code>{esc(name)}</code></span></div>"
            )
        for name in r["true_level"]:
            url = _clip_url(r["folder"], name)
            out.append(
                f'<p class="meta"><a href="{esc(url)}">{esc(name)}</a>: the chain output at its true level, '
                "for measurement; not loudness-matched, so it is linked rather than offered as a player.</p>"
            )
    out.append(f'<p class="caution">{esc(LISTENING_CAUTION)}</p></section>')
    return "\n".join(out)


def _cases_table(doc: dict, spec: dict) -> str:
    cols = [c for c in COLUMNS] + [("width", "Hz", "bandwidth_hz", "{:>8.0f}", None)]
    head = ['<th data-key="id"><button type="button">id</button></th>']
    for title, unit, key, _fmt, _t in cols[1:]:
        head.append(
            f'<th data-key="{esc(key)}"><button type="button">{esc(title)}'
            f"{(' [' + esc(unit) + ']') if unit else ''}</button></th>"
        )
    head.append('<th data-key="result"><button type="button">result</button></th>')
    rows = []
    subject = spec["subject"]["case"]
    for c in doc["cases"]:
        cells = []
        for _title, _unit, key, fm, target in cols:
            v = c.get(key)
            miss = ' class="n miss" title="fails its target"' if target and target in c["fails"] else ' class="n"'
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                text = fm.format(v).strip()
                cells.append(f'<td{miss} data-sort="{v!r}">{esc(text)}</td>')
            elif v is None:
                cells.append(f'<td{miss} data-sort="">—</td>')
            else:
                cells.append(f"<td>{esc(v)}</td>")
        result = "pass" if c["passes"] else "fail: " + ", ".join(target_info(t)[0] for t in c["fails"])
        cells.append(f"<td>{esc(result)}</td>")
        cls = ' class="subject"' if c["id"] == subject else ""
        rows.append(f"<tr{cls}>" + "".join(cells) + "</tr>")
    return (
        '<div class="cases"><table id="case-table"><thead><tr>'
        + "".join(head)
        + "</tr></thead><tbody>"
        + "\n".join(rows)
        + "</tbody></table></div>"
    )


def page(run: dict, spec: dict, plots: list) -> str:
    """The report.html text."""
    doc = run["doc"]
    inp = spec["input"]
    name = Path(inp["path"]).name
    role = "Chosen passband" if spec["status"] == "chosen" else "Closest case (does not pass)"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f'<meta http-equiv="Content-Security-Policy" content="{esc(CSP)}">',
        f"<title>Passband spec sheet — {esc(name)}</title><style>{STYLE}</style></head><body><main>",
        f"<h1>Passband spec sheet — {esc(name)}</h1>",
        f'<p class="meta">Program <code id="input-path">{esc(inp["path"])}</code> · sha256 '
        f"<code>{esc(inp['sha256'][:16])}…</code> · {inp['duration_s']:g} s, {esc(inp['channels'])} ch, "
        f"{esc(inp['sample_rate_hz'])} Hz · peak {inp['peak_dbfs']:.1f} dBFS, rms "
        f"{inp['rms_dbfs']:.1f} dBFS · 99 % occupied band {esc(fmt(inp['occupied_low_hz'], 'Hz'))} to "
        f"{esc(fmt(inp['occupied_high_hz'], 'Hz'))}</p>",
        f'<p class="caution" id="estimate-caution"><strong>Engineering estimate.</strong> {esc(spec["caution"])}</p>',
    ]
    if spec["status"] == "chosen":
        b = spec["binding"]
        bound = ""
        if b:
            t = next(t for t in spec["targets"] if t["key"] == b)
            bound = (
                f" Bound by <strong>{esc(target_text(t))}</strong>"
                f" (margin {esc(margin_value_text(b, spec['binding_margin_db']))})."
            )
        if spec.get("grid_limits"):
            from .text import grid_limit_lines

            grid = " " + " ".join(grid_limit_lines(spec["filter"]["response"], spec["grid_limits"]))
        else:
            grid = (
                (
                    " This is the narrowest case of its family and order in the grid: extend the grid to see "
                    "whether a narrower passband also passes."
                )
                if spec["grid_limited"]
                else ""
            )
        parts.append(
            f'<div class="verdict" id="verdict"><strong>{esc(role)}: {esc(passband_phrase(spec))}.</strong>'
            f"<br>Case {esc(spec['subject']['case'])}; {esc(spec['cases_passing'])} of "
            f"{esc(spec['cases_total'])} cases meet every target.{bound}{esc(grid)}</div>"
        )
    else:
        items = "".join(
            f"<li>{esc(target_text(u))}: best reached {esc(metric_value_text(u['metric'], u['best']))}</li>"
            for u in spec["unmet"]
        )
        unmet = (
            (f" No case meets these targets even on their own (the best value any case reached):<ul>{items}</ul>")
            if items
            else ""
        )
        clash = "".join(f"<li>{esc(c['text'])}</li>" for c in spec.get("conflicts") or [])
        clash = (
            f' These targets each hold in some case but never together:<ul id="conflicts">{clash}</ul>' if clash else ""
        )
        parts.append(
            f'<div class="verdict none" id="verdict"><strong>No passing case.</strong> None of the '
            f"{esc(spec['cases_total'])} cases meets every target.{unmet}{clash}"
            f"The figures below are for the closest case "
            f"({esc(spec['subject']['case'])}: {esc(passband_phrase(spec))}), which is not a "
            "recommendation.</div>"
        )
    # the spec block
    rows, section = [], None
    for sec, label, text, ptr in spec_rows(spec):
        if sec != section:
            rows.append(f'<tr class="sec"><th colspan="2">{esc(sec)}</th></tr>')
            section = sec
        rows.append(f"<tr><td>{esc(label)}</td>{_value_cell(spec, ptr, text)}</tr>")
    trows = []
    for i, t in enumerate(spec["targets"]):
        cls = ' class="binding"' if t["binding"] else ""
        margin = margin_value_text(t["key"], t["margin_db"])
        trows.append(
            f"<tr{cls}><td>{esc(target_text(t))}</td>"
            f"{_value_cell(spec, f'targets.{i}.value', metric_value_text(t['metric'], t['value']))}"
            f"<td class='n'>{esc(margin)}</td><td>{'met' if t['met'] else 'missed'}"
            f"{' — bound the choice' if t['binding'] else ''}</td></tr>"
        )
    nb = spec["neighbours"]
    nrows = []
    for key, label in (
        ("next_narrower", "next narrower"),
        ("next_wider", "next wider"),
        ("runner_up", "runner-up (choice rule)"),
    ):
        c = nb[key]
        if c is None:
            nrows.append(f"<tr><td>{esc(label)}</td><td colspan='3'>— none in the grid</td></tr>")
            continue
        verdict = "passes" if c["passes"] else "fails " + ", ".join(target_info(t)[0] for t in c["fails"])
        nrows.append(
            f'<tr title="{esc(case_line(c))}"><td>{esc(label)}</td><td class="n">{esc(c["id"])}</td>'
            f'<td class="n">{esc(fmt(c["bandwidth_hz"], "Hz"))} ({c["bandwidth_change_hz"]:+.0f} Hz)</td>'
            f"<td>{esc(verdict)}</td></tr>"
        )
    so = spec["ser_optimum"]
    if so:
        nrows.append(
            f"<tr><td>signal-to-error optimum</td><td class='n'>{esc(so['case'])}</td>"
            f"<td class='n'>{esc(fmt(so['bandwidth_hz'], 'Hz'))}</td>"
            f"<td>SER {esc(fmt(so['ser_db'], 'dB'))} ({esc(so['family'])} {esc(so['order'])})</td></tr>"
        )
    neigh = (
        '<table id="neighbour-table"><thead><tr><th>case</th><th>id</th><th>bandwidth (change)</th>'
        f"<th>result</th></tr></thead><tbody>{''.join(nrows)}</tbody></table>"
        '<p class="meta">Next narrower and next wider: the same family and order as the subject; runner-up: '
        "the passing case the choice rule would take next. Hover a row for its figures.</p>"
    )
    brows = "".join(
        f"<tr><td>{esc(c['label'])}</td>{_value_cell(spec, f'noise.components.{k}.vrms', fmt(c['vrms'], 'V rms'))}"
        f"<td class='n'>{esc(fmt(c['dbfs'], 'dBFS'))}</td><td class='n'>{100 * c['share']:.1f} %</td></tr>"
        for k, c in spec["noise"]["components"].items()
    )
    crows = "".join(
        f"<tr><td>{esc(r['label'])}</td><td><code>{esc(r['key'])}</code></td>"
        f"{_value_cell(spec, f'chain.{i}.value', chain_value_text(r))}</tr>"
        for i, r in enumerate(spec["chain"])
    )
    m = spec["meter"]
    parts.append(
        f'<section id="spec"><h2>{esc(role)}: spec block</h2><div class="grid"><div>'
        f'<table id="spec-table"><tbody>{"".join(rows)}</tbody></table></div><div>'
        f'<h3>Targets</h3><table id="targets-table"><thead><tr><th>target</th><th>this case</th><th>margin</th>'
        f"<th>result</th></tr></thead><tbody>{''.join(trows)}</tbody></table>"
        f"<h3>Margin: the neighbouring cases</h3>{neigh}"
        f'<h3>Noise budget</h3><table id="budget-table"><thead><tr><th>contributor</th><th>noise</th>'
        f"<th>dBFS</th><th>share</th></tr></thead><tbody>{brows}</tbody></table>"
        "</div></div>"
        f'<h3>Chain assumptions</h3><table id="chain-table"><thead><tr><th>parameter</th><th>key</th>'
        f"<th>value</th></tr></thead><tbody>{crows}</tbody></table>"
        f'<p class="meta">Meter band {esc(fmt(m["low_hz"], "Hz"))} to {esc(fmt(m["high_hz"], "Hz"))} '
        f"({esc(m['mode'])}); A-weighting per IEC 61672-1; dBFS re a full-scale sine (AES17); "
        "0 dBu = 0.7746 V rms.</p>"
        + "".join(f'<p class="meta">Note: {esc(n)}</p>' for n in spec["notes"])
        + "</section>"
    )
    parts.append('<section id="plots"><h2>Plots</h2>' + "\n".join(_figure(p) for p in plots) + "</section>")
    from ..realise.report import html_section

    parts.append(html_section(run["dir"]))
    parts.append(_listening(run["renders"], run["dir"]))
    parts.append(
        f'<section id="all-cases"><h2>All {esc(len(doc["cases"]))} cases</h2><p class="meta">Click a '
        "column head to sort. Underlined values miss their target; the highlighted row is the "
        f"{'chosen' if spec['status'] == 'chosen' else 'closest'} case.</p>" + _cases_table(doc, spec) + "</section>"
    )
    parts.append(
        f"<footer><p>{esc(spec['caution'])}</p><p>audiobw {esc(spec['version'])} · from sweep.json "
        f"sha256 <code>{esc(spec['sweep']['sha256'][:16])}…</code> · spec.json and spec.md beside this "
        "page.</p></footer>"
    )
    parts.append('<pre id="selftest" hidden></pre>')
    parts.append(f"<script>{SCRIPT}</script></main></body></html>")
    return "\n".join(p for p in parts if p) + "\n"
