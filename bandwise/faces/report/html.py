"""The report page: one self-contained HTML file rendered from the report document.

Figures are embedded as base64 PNG data URIs and the style sheet is inline:
the page needs no script, no network and no companion file, and a print
style sheet keeps it readable on paper.  Every number in a table is written
as ``<data value="exact">shown</data>``, so the exact figure of
``report.json`` sits beside the rounded one a reader sees.
"""

from __future__ import annotations

import base64
import html
import json
import re
from collections.abc import Iterable, Mapping, Sequence
from pathlib import PurePath
from typing import Any

from bandwise.algorithms.checks.verdict import PROBLEMS, READY, UNSUPPORTED
from bandwise.core.tables import human_bytes, human_count, human_seconds

from .labels import finding_title, label, worded

#: Labels and units of the ordering figures (a Metrics field -> label, unit).
FIGURE_LABELS: dict[str, tuple[str, str]] = {
    "n_rows": ("matrix order", "rows"),
    "bandwidth": ("bandwidth", "semi-bandwidth max(i - f_i), diagonal excluded"),
    "profile": ("profile", "sum(i - f_i), diagonal excluded"),
    "max_wavefront": ("max wavefront", "active rows, the row itself included"),
    "rms_wavefront": ("RMS wavefront", "root-mean-square over the steps"),
    "envelope_ops": ("envelope Cholesky work", "multiplications, sum b_i(b_i+3)/2"),
    "banded_bytes": ("banded storage", "n(b+1) doubles"),
    "skyline_bytes": ("skyline storage", "P+n doubles and n+1 int64 pointers"),
}

_CSS = """
:root { --ink:#1c2630; --muted:#5a6672; --rule:#c9d1d8; --band:#eef2f5; }
* { box-sizing: border-box; }
body { font: 15px/1.45 "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif;
  color: var(--ink); margin: 0 auto; max-width: 1180px; padding: 24px 28px 48px; }
h1 { font-size: 26px; margin: 0 0 4px; letter-spacing: .2px; }
h2 { font-size: 19px; margin: 34px 0 10px; padding-bottom: 4px;
  border-bottom: 2px solid var(--ink); }
h3 { font-size: 15px; margin: 16px 0 6px; }
.sub { color: var(--muted); margin: 0 0 14px; }
table { border-collapse: collapse; margin: 8px 0 14px; font-size: 14px; }
th, td { border-bottom: 1px solid var(--rule); padding: 4px 10px; text-align: left;
  vertical-align: top; }
th { background: var(--band); font-weight: 600; }
td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.unit { color: var(--muted); font-size: 13px; }
table.wide { font-size: 12.5px; }
table.wide th, table.wide td { padding: 3px 6px; }
.verdict { border: 3px solid var(--ink); padding: 10px 14px; margin: 14px 0; }
.verdict .word { font-size: 17px; font-weight: 600; margin: 0; }
.verdict.ready { border-style: solid; background: #e9f3ec; }
.verdict.problems { border-style: double; border-width: 6px; background: #f8e7e4; }
.verdict.unsupported { border-style: solid; border-color: #8a5300; background: #fbf0dc; }
.verdict.unchecked { border-style: dashed; background: #f4f1e6; }
.next { margin: 10px 0 0; padding-top: 8px; border-top: 1px solid var(--rule); }
.next h2 { font-size: 15px; margin: 0 0 4px; padding: 0; border: none; }
.next ol { margin: 4px 0 0; padding-left: 24px; }
.next li { margin: 6px 0; }
code { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: 13px; }
code.cmd { display: block; background: #fff; border: 1px solid var(--rule); padding: 5px 9px;
  margin: 5px 0 2px; white-space: pre-wrap; overflow-wrap: break-word; }
code.cmd .opt { white-space: nowrap; }
.files { border: 2px solid var(--ink); padding: 8px 14px 4px; margin: 14px 0; }
.files h2 { font-size: 16px; margin: 0 0 2px; padding: 0; border: none; }
.files table { margin: 4px 0 8px; }
.files code.file { font-size: 14px; font-weight: 700; }
.files .folder { color: var(--muted); font-size: 13px; overflow-wrap: anywhere; }
.convention { font-size: 14px; border-left: 5px solid var(--muted); padding: 6px 12px;
  background: var(--band); }
.code { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: 12px;
  color: var(--muted); font-weight: 400; margin-left: 8px; }
.caution { border-left: 5px solid var(--ink); padding: 6px 12px; background: var(--band); }
.finding { border: 1px solid var(--rule); border-left-width: 7px; padding: 6px 12px;
  margin: 10px 0; break-inside: avoid; }
.finding.error { border-left-color: #8c1d18; border-left-style: double; }
.finding.warning { border-left-color: #b36b00; }
.finding.note { border-left-color: #9aa6b1; border-left-width: 3px; }
.tag { display: inline-block; min-width: 70px; font-size: 12px; font-weight: 700;
  letter-spacing: .6px; text-transform: uppercase; }
.ids { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: 12.5px;
  overflow-wrap: anywhere; color: var(--muted); }
figure { margin: 12px 0 18px; break-inside: avoid; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { font-size: 13px; color: var(--muted); margin-top: 4px; }
tr.kept td { font-weight: 700; }
ul.gaps li { margin: 3px 0; }
footer { margin-top: 40px; font-size: 13px; color: var(--muted); }
nav.contents { font-size: 14px; margin: 6px 0 4px; }
nav.contents a { color: var(--ink); }
@media print {
  body { max-width: none; padding: 0; font-size: 11pt; }
  h2 { break-after: avoid; }
  section { break-inside: auto; }
  figure, table, .finding { break-inside: avoid; }
  .verdict, .caution, .convention, th, code.cmd { background: none !important; }
  a { color: inherit; text-decoration: none; }
  nav.contents { display: none; }
}
@page { size: A4; margin: 16mm 14mm; }
"""


def esc(text: Any) -> str:
    """HTML-escape any value's text."""
    return html.escape(str(text), quote=True)


def shown(value: Any, key: str = "") -> str:
    """A number as a reader sees it: thousands separators, bytes in binary units."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return esc(value)
    if key.endswith("bytes"):
        return human_bytes(value)
    if key.endswith(("ops", "flops")):
        return human_count(value)
    if key.endswith("seconds"):
        return human_seconds(value)
    if isinstance(value, int):
        return f"{value:,}"
    return f"{value:,.1f}" if abs(value) >= 10 else f"{value:.4g}"


def number(value: Any, key: str = "") -> str:
    """A number as ``<data value="exact">shown</data>`` (anything else escaped)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return esc("" if value is None else value)
    return f'<data value="{value!r}">{shown(value, key)}</data>'


def _cell(value: Any, key: str = "") -> str:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return f'<td class="n">{number(value, key)}</td>'
    if isinstance(value, (dict, list)):
        return f"<td>{_nested(value)}</td>"
    return f"<td>{esc('' if value is None else value)}</td>"


def _nested(value: Any) -> str:
    """Small nested values inline (inner lists in brackets); numbers keep their exact value."""
    if isinstance(value, dict):
        return "; ".join(f"{esc(k)}: {_inline(v, str(k))}" for k, v in value.items())
    return ", ".join(f"({_nested(v)})" if isinstance(v, list) else _inline(v) for v in value)


def _inline(value: Any, key: str = "") -> str:
    if isinstance(value, (dict, list)):
        return _nested(value)
    return number(value, key)


def table(rows: Iterable[Sequence[Any]], header: Sequence[str] | None = None,
          keys: Sequence[str] | None = None, row_class: Sequence[str] | None = None,
          css: str = "") -> str:
    """An HTML table; ``keys`` name each column's figure (for units such as bytes)."""
    out = [f'<table class="{css}">' if css else "<table>"]
    if header:
        out.append("<tr>" + "".join(f"<th>{esc(h)}</th>" for h in header) + "</tr>")
    for k, row in enumerate(rows):
        cls = f' class="{row_class[k]}"' if row_class and row_class[k] else ""
        cells = []
        for j, value in enumerate(row):
            key = keys[j] if keys and j < len(keys) else ""
            cells.append(_cell(value, key))
        out.append(f"<tr{cls}>" + "".join(cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def records_table(records: Sequence[Mapping[str, Any]], highlight: str | None = None,
                  name_key: str | None = None, code_keys: Sequence[str] = ()) -> str:
    """A list of flat dicts as a table, one column per key (union, first-seen order).

    Headers are the keys in words (:func:`~.labels.label`), coded values in
    words (:func:`~.labels.worded`); the values of ``code_keys`` are shown as
    text to type.
    """
    keys: list[str] = []
    for r in records:
        keys.extend(k for k in r if k not in keys)
    marks = [("kept" if highlight is not None and name_key and r.get(name_key) == highlight
              else "") for r in records]
    out = ["<table>", "<tr>" + "".join(f"<th>{esc(label(k))}</th>" for k in keys) + "</tr>"]
    for r, mark in zip(records, marks):
        cells = [f"<td><code>{esc(r.get(k, ''))}</code></td>" if k in code_keys
                 else _cell(worded(r.get(k), k), k) for k in keys]
        out.append(f'<tr class="{mark}">' if mark else "<tr>")
        out[-1] += "".join(cells) + "</tr>"
    out.append("</table>")
    return "\n".join(out)


def facts_table(data: Mapping[str, Any], prefix: str = "") -> str:
    """Any nested dict as ``label | value`` rows, keys in words (nested ones joined by ' / ')."""
    rows: list[tuple[str, Any, str]] = []

    def walk(d: Mapping[str, Any], path: str) -> None:
        for k, v in d.items():
            if isinstance(v, dict) and v:
                walk(v, f"{path}{label(str(k))} / ")
            else:
                rows.append((f"{path}{label(str(k))}", worded(v, str(k)), str(k)))

    walk(data, prefix)
    return labelled_rows(rows)


def labelled_rows(rows: Sequence[tuple[str, Any, str]]) -> str:
    """``label | value`` rows; the key of each row names its unit (bytes, seconds ...)."""
    out = ["<table>"]
    for text, value, key in rows:
        out.append(f"<tr><th>{esc(text)}</th>{_cell(value, key)}</tr>")
    out.append("</table>")
    return "\n".join(out)


def figure(png: bytes, caption: str, alt: str) -> str:
    """An embedded PNG figure with its caption."""
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{esc(alt)}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")


def reduction(current: Any, new: Any) -> str:
    """The page's one ratio: current / new, as ``<data value="exact">13.9&times;</data>``.

    Empty when either figure is missing or the new one is 0 while the
    current one is not (no finite ratio).
    """
    if not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in (current, new)):
        return ""
    if new == 0:
        if current != 0:
            return ""
        value = 1.0
    else:
        value = float(current) / float(new)
    return f'<data value="{value!r}">{reduction_text(value)}&times;</data>'


def reduction_text(value: float) -> str:
    """A reduction rounded for reading: ``0.84``, ``2.40``, ``13.9``, ``1,250``."""
    if value >= 100:
        return f"{value:,.0f}"
    return f"{value:.1f}" if value >= 10 else f"{value:.2f}"


#: The convention of every ratio on the page, said once near the top.
CONVENTION = ("Every ratio on this page is a reduction: the figure under the current "
              "numbering divided by the figure under the new one. 2.00\u00d7 means half the "
              "size; above 1 is better, below 1 means the figure grew.")


# --------------------------------------------------------------------------- sections


def next_steps_html(doc: Mapping[str, Any]) -> str:
    """What to do next, inside the verdict box: each step in words and the command to type."""
    steps = doc.get("next_steps") or []
    if not steps:
        if doc["verdict"] == READY and doc.get("findings") is not None:
            return ('<div class="next"><h2>What to do next</h2><p>Nothing to correct before '
                    "a static run.</p></div>")
        return ""
    items = []
    for s in steps:
        cmd = f'<code class="cmd">{command_html(s["command"])}</code>' if s.get("command") else ""
        items.append(f"<li>{esc(s['advice'])}{cmd}</li>")
    return ('<div class="next"><h2>What to do next</h2><ol>' + "".join(items)
            + "</ol></div>")


def command_html(command: str) -> str:
    """A command to type, each ``--option value`` kept on one line (the text is unchanged)."""
    return " ".join(f'<span class="opt">{esc(part)}</span>'
                    for part in re.split(r" (?=--)", command))


def outputs_html(doc: Mapping[str, Any]) -> str:
    """The files the run wrote, by name, with their folder; what the format does not keep."""
    outputs = doc.get("outputs") or []
    if not outputs:
        return ""
    rows = []
    for o in outputs:
        path = PurePath(o["file"])
        folder = str(path.parent)
        rows.append(f"<tr><td>{esc(o['what'])}</td><td><code class=\"file\">{esc(path.name)}"
                    f'</code></td><td class="folder">{esc(folder)}</td></tr>')
    out = ['<div class="files" id="files"><h2>Files written</h2>',
           "<table><tr>" + "".join(f"<th>{esc(label(k))}</th>" for k in ("what", "file", "folder"))
           + "</tr>", *rows, "</table>"]
    notes = doc.get("output_notes") or []
    if notes:
        name = PurePath(outputs[0]["file"]).name
        out.append(f"<p>Format notes on {esc(name)}:</p><ul>"
                   + "".join(f"<li>{esc(n)}</li>" for n in notes) + "</ul>")
    out.append("</div>")
    return "\n".join(out)


def header_section(doc: Mapping[str, Any]) -> str:
    """Title, what was analysed, size, verdict with the next steps, files written, caution."""
    mesh = doc["mesh"]
    word, reason = doc["verdict"], doc["verdict_reason"]
    css = {READY: "ready", PROBLEMS: "problems", UNSUPPORTED: "unsupported"}.get(
        word, "unchecked")
    symbol = {READY: "&#10004;", PROBLEMS: "&#10006;", UNSUPPORTED: "!"}.get(word, "?")
    facts = [
        ["file", mesh.get("file", "")], ["format", mesh.get("format", "")],
        ["report created (UTC)", doc["created"]],
        ["bandwise version", doc["bandwise_version"]],
    ]
    if doc["subject"] == "matrix":
        facts.append(["matrix rows (unknowns)", mesh["nodes"]])
    else:
        facts += [["nodes", mesh["nodes"]], ["elements", mesh["n_elements"]],
                  ["DOFs", mesh["dofs"]["total"]]]
    return "\n".join([
        "<header>",
        f"<h1>Solver readiness: {esc(doc['file_name'] or doc['subject'])}</h1>",
        ('<p class="sub">Pre-run check, sizing and numbering of a finite-element '
         f"{esc(doc['subject'])} for a direct solver.</p>"),
        table(facts, keys=["", "nodes"]),
        (f'<div class="verdict {css}"><p class="word">{symbol} Verdict: {esc(word)} '
         f"&mdash; {esc(reason)}</p>{next_steps_html(doc)}</div>"),
        outputs_html(doc),
        f'<p class="caution">{esc(doc["caution"])}</p>',
        "</header>",
    ])


def convention_html(doc: Mapping[str, Any]) -> str:
    """The ratio convention, said once, when the page shows ratios."""
    if doc.get("renumbering") is None and doc.get("comparison") is None:
        return ""
    return f'<p class="convention" id="ratios">{esc(CONVENTION)}</p>'


#: Keys of the mesh summary whose dict values are data (element types, DOF signatures).
_INLINE = ("elements", "nodes_by_signature")


def mesh_rows(mesh: Mapping[str, Any], subject: str) -> list[tuple[str, Any, str]]:
    """The facts of the mesh (or matrix) summary as ``(label, value, key)`` rows, in words."""
    dofs = mesh.get("dofs") or {}
    rows: list[tuple[str, Any, str]] = [(label("file"), mesh.get("file"), "file"),
                                        (label("format"), mesh.get("format"), "format")]
    if subject == "matrix":
        matrix = mesh.get("matrix") or {}
        rows += [(label("rows"), mesh.get("nodes"), "nodes"),
                 *[(label(k), v, k) for k, v in matrix.items() if v not in ("", None)],
                 (label("parts"), mesh.get("parts"), "parts"),
                 (label("isolated_rows"), mesh.get("orphan_nodes"), "orphan_nodes"),
                 ("mesh dimension", mesh.get("dimension"), "dimension")]
    else:
        rows += [(label("nodes"), mesh.get("nodes"), "nodes"),
                 (label("n_elements"), mesh.get("n_elements"), "n_elements"),
                 ("elements by type", mesh.get("elements"), "elements"),
                 (label("dimension"), mesh.get("dimension"), "dimension"),
                 (label("rule"), dofs.get("rule"), "rule"),
                 (label("nodes_by_signature"), dofs.get("nodes_by_signature"),
                  "nodes_by_signature"),
                 (label("dofs_total"), dofs.get("total"), "total"),
                 (label("parts"), mesh.get("parts"), "parts"),
                 (label("orphan_nodes"), mesh.get("orphan_nodes"), "orphan_nodes")]
        if mesh.get("skipped_blocks"):
            rows.append((label("skipped_blocks"), mesh["skipped_blocks"], "skipped_blocks"))
    known = {"file", "format", "nodes", "elements", "n_elements", "dimension", "dofs", "parts",
             "orphan_nodes", "skipped_blocks", "current_numbering", "matrix"}
    rows += [(label(k), v, k) for k, v in mesh.items() if k not in known]
    return rows


def mesh_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """What the mesh is made of, with its picture."""
    rows = mesh_rows(doc["mesh"], doc["subject"])
    if doc["subject"] == "matrix":   # no mesh: the exact 0 is kept, the reader is told why
        text, value, key = rows[-1]
        rows[-1] = (text, f'<data value="{value!r}">none (a matrix)</data>', "")
    body = ["<table>"]
    for text, value, key in rows:
        cell = (f"<td>{value}</td>" if key == "" else _cell(value, key))
        body.append(f"<tr><th>{esc(text)}</th>{cell}</tr>")
    body.append("</table>")
    return "\n".join(["<section id='mesh'>", f"<h2>The {esc(doc['subject'])}</h2>",
                      *body, figures_html, "</section>"])


def findings_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """The check results, errors first, each titled in words with its ids and details."""
    findings = doc["findings"]
    if findings is None:
        return ""
    order = {"error": 0, "warning": 1, "note": 2}
    items = sorted(findings, key=lambda f: order.get(f.get("severity", ""), 3))
    out = ["<section id='findings'>", "<h2>Findings</h2>"]
    counts = {s: sum(1 for f in items if f.get("severity") == s) for s in order}
    out.append(f"<p>{counts['error']} error(s), {counts['warning']} warning(s), "
               f"{counts['note']} note(s).</p>")
    if not items:
        out.append("<p>The checks found nothing to report.</p>")
    for f in items:
        sev = f.get("severity", "note")
        code = f.get("code", "")
        out.append(f'<article class="finding {esc(sev)}">')
        out.append(f'<h3><span class="tag">{esc(sev)}</span> {esc(finding_title(code))} '
                   f'&mdash; {number(f.get("count"))}<span class="code">{esc(code)}</span></h3>')
        out.append(f"<p>{esc(f.get('message', ''))}</p>")
        for key, kind in (("node_ids", "node_id_kind"), ("element_ids", "element_id_kind")):
            ids = f.get(key) or []
            if ids:
                head = ", ".join(str(i) for i in ids[:40])
                more = f" &hellip; and {len(ids) - 40:,} more (all in report.json)" \
                    if len(ids) > 40 else ""
                what = "nodes" if key == "node_ids" else "elements"
                out.append(f'<p class="ids">{what} ({esc(f.get(kind, ""))}): '
                           f"{esc(head)}{more}</p>")
        if f.get("where"):
            out.append(f"<p>where: {esc(', '.join(map(str, f['where'])))}</p>")
        if f.get("details"):
            out.append(records_table(f["details"]))
        out.append("</article>")
    out.append(figures_html)
    out.append("</section>")
    return "\n".join(out)


def sizing_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """Bandwidth, profile, wavefront and storage, current and renumbered, with curves.

    A mesh is shown at node and at DOF level; a matrix once (a row is one unknown).
    """
    cur = doc["mesh"]["current_numbering"]
    ren = doc.get("renumbering")
    levels = [("rows", "rows")] if doc["subject"] == "matrix" else [("nodes", "nodes"),
                                                                    ("dofs", "DOFs")]
    header = ["figure"]
    for _, name in levels:
        header += [f"{name}: current"] + ([f"{name}: renumbered", "reduction"] if ren else [])
    header += ["unit / convention"]
    out = ["<section id='sizing'>", "<h2>Matrix size and numbering</h2>"]
    if ren:
        at = "" if doc["subject"] == "matrix" else ", at node and at DOF level"
        out.append(f"<p>Current numbering beside the one kept, <strong>{esc(ren['method'])}"
                   f"</strong>{at}.</p>")
    rows = ["<table>", "<tr>" + "".join(f"<th>{esc(h)}</th>" for h in header) + "</tr>"]
    for key, (text, unit) in FIGURE_LABELS.items():
        cells = [f"<td>{esc(text)}</td>"]
        for level, _ in levels:
            level = "nodes" if level == "rows" else level
            cells.append(_cell(cur[level][key], key))
            if ren:
                after = ren[level]["renumbered"][key]
                cells += [_cell(after, key),
                          f'<td class="n">{reduction(cur[level][key], after)}</td>']
        cells.append(f'<td class="unit">{esc(unit)}</td>')
        rows.append("<tr>" + "".join(cells) + "</tr>")
    rows.append("</table>")
    out += rows
    out.append(figures_html)
    out.append("</section>")
    return "\n".join(out)


#: Columns of the comparison tables: (label, Metrics field).
COMPARISON_COLUMNS = (
    ("bandwidth", "bandwidth"), ("profile", "profile"),
    ("max wavefront", "max_wavefront"), ("RMS wavefront", "rms_wavefront"),
    ("envelope work", "envelope_ops"), ("banded", "banded_bytes"),
    ("skyline", "skyline_bytes"),
)


#: The objectives of a comparison in words.
OBJECTIVE_WORDS = {"wavefront": "RMS wavefront", "fill": "Cholesky fill"}


def _comparison_table(methods: Sequence[Mapping[str, Any]], level: str, objective: str = "",
                      walls: Mapping[str, float] | None = None) -> str:
    header = ["ordering", "kept"] + [c[0] for c in COMPARISON_COLUMNS]
    if level == "dofs":
        aim = OBJECTIVE_WORDS.get(objective, objective)
        header += ["Cholesky nnz(L)", "sparse Cholesky", f"reduction of the {aim}",
                   "ordering time"] + (["wall time of its step"] if walls else []) \
            + ["note"]
    out = ['<table class="wide">', "<tr>" + "".join(f"<th>{esc(h)}</th>" for h in header)
           + "</tr>"]
    for m in methods:
        figs = m.get(level) or {}
        cells = [_cell(m.get("method")), _cell("kept" if m.get("chosen") else "")]
        cells += [_cell(figs.get(c[1]), c[1]) for c in COMPARISON_COLUMNS]
        if level == "dofs":   # the comparison's own improvement: original / this one
            cells += [_cell(m.get("cholesky_nnz"), "cholesky_nnz"),
                      _cell(m.get("cholesky_bytes"), "cholesky_bytes"),
                      f'<td class="n">{reduction(m.get("improvement"), 1.0)}</td>',
                      _cell(m.get("seconds"), "seconds")]
            if walls:
                cells.append(_cell(walls.get(str(m.get("method"))), "wall_seconds"))
            cells.append(_cell(m.get("error")))
        out.append(('<tr class="kept">' if m.get("chosen") else "<tr>") + "".join(cells)
                   + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def comparison_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """The orderings tried, as tables (the kept one in bold), their times and a chart."""
    comp = doc.get("comparison")
    if comp is None:
        return ""
    methods = comp.get("methods", [])
    objective = comp.get("objective", "")
    timing = doc.get("comparison_time") or {}
    walls = timing.get("wall_seconds_by_method") or {}
    out = ["<section id='orderings'>", "<h2>Orderings compared</h2>",
           (f"<p>Objective: <strong>{esc(OBJECTIVE_WORDS.get(objective, objective))}</strong>, "
            + ("" if doc["subject"] == "matrix" else
               "measured at DOF level (the matrix the solver factorises), ")
            + "kept: "
            f"<strong>{esc(comp.get('chosen', ''))}</strong>. The original numbering is "
            "always a candidate, so the kept one is never worse. Sparse Cholesky storage = "
            "nnz(L) values and row indices plus column pointers, 8 bytes each.</p>")]
    if timing:
        out.append(
            f"<p>The comparison took {number(timing.get('wall_seconds'), 'wall_seconds')} "
            "of wall time in all, compiling included: "
            f"{number(timing.get('loading_seconds'), 'loading_seconds')} loading the "
            "orderings before any ran (on a first run this is mostly compiling their kernels; "
            "later runs load them from the cache) and the rest in the steps below. "
            "<em>Ordering time</em> is the ordering alone once its kernels are ready (what a "
            "later run spends on it); <em>wall time of its step</em> is what the method cost "
            "here: any compiling left for its first call, the ordering, and measuring its "
            "figures and Cholesky fill.</p>")
    if doc["subject"] == "matrix":   # one unknown per row: one table
        out.append(_comparison_table(methods, "dofs", objective, walls))
    else:
        out += ["<h3>DOF level</h3>", _comparison_table(methods, "dofs", objective, walls),
                "<h3>Node level</h3>", _comparison_table(methods, "nodes")]
    notes = []
    if comp.get("fill"):
        notes.append(f"<li>Cholesky fill: {esc(comp['fill'])}.</li>")
    for name, why in (comp.get("skipped") or {}).items():
        notes.append(f"<li>Not tried: <strong>{esc(name)}</strong>: {esc(why)}.</li>")
    for name, why in (comp.get("cut_short") or {}).items():
        notes.append(f"<li>Cut short: <strong>{esc(name)}</strong>: {esc(why)}.</li>")
    if comp.get("effort"):
        notes.append(f"<li>Effort: <strong>{esc(comp['effort'])}</strong> (time traded for "
                     "a smaller matrix; <code>--effort thorough</code> tries every ordering "
                     "and refines longest).</li>")
    if notes:
        out.append("<ul>" + "".join(notes) + "</ul>")
    out += [figures_html, "</section>"]
    return "\n".join(out)


def supports_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """Supports given, held DOFs, zero-energy modes and the equation count."""
    parts = [(k, doc.get(k)) for k in ("supports", "modes", "equations")]
    if all(v is None for _, v in parts):
        return ""
    out = ["<section id='supports'>", "<h2>Supports, free modes and equations</h2>"]
    sup = doc.get("supports")
    if sup is not None:
        out.append("<h3>Supports</h3>")
        if sup.get("applied"):
            out.append(records_table(sup["applied"], code_keys=("origin",)))
        out.append(labelled_rows([(label("held_dofs"), sup["held_dofs"], "held_dofs"),
                                  (label("supported_nodes"), sup["supported_nodes"],
                                   "supported_nodes")]))
    modes = doc.get("modes")
    if modes is not None:
        out.append(modes_html(modes, sup is not None))
    equations = doc.get("equations")
    if equations is not None:
        out.append(equations_html(equations))
    out.append(figures_html)
    out.append("</section>")
    return "\n".join(out)


def equations_html(eq: Mapping[str, Any]) -> str:
    """DOFs, held DOFs, equations left, and the reduced system's figures."""
    out = ["<h3>Equations</h3>",
           table([["DOFs", eq.get("dofs")], ["held DOFs (reactions recovered afterwards)",
                                           eq.get("fixed_dofs")],
                  ["equations to solve", eq.get("equations")]])]
    reduced = eq.get("reduced_system")
    if isinstance(reduced, dict):
        order = f" in the {esc(eq['order'])} order" if eq.get("order") else ""
        out.append("<p>Reduced system (held rows and columns removed), measured on its own "
                   f"pattern{order}:</p>")
        rows = [(f"<table><tr><th>figure</th><th>{esc(label('reduced_system'))}</th>"
                "<th>unit / convention</th></tr>")]
        for key, (text, unit) in FIGURE_LABELS.items():
            if key in reduced:
                rows.append(f"<tr><td>{esc(text)}</td>{_cell(reduced[key], key)}"
                            f'<td class="unit">{esc(unit)}</td></tr>')
        out.append("".join(rows) + "</table>")
        extra = {k: v for k, v in eq.items()
                 if k not in ("dofs", "fixed_dofs", "equations", "reduced_system", "order")}
        if extra:
            out.append(facts_table(extra))
    return "\n".join(out)


def modes_html(modes: Mapping[str, Any], supported: bool) -> str:
    """Zero-energy modes: totals, each part, each mode in words, suggested holds."""
    out = ["<h3>Zero-energy modes</h3>"]
    total = modes.get("total", 0)
    if not supported:
        lead = (f"No supports were given: the free mesh has {number(total)} zero-energy "
                "mode(s), as every unsupported body does; give the supports to check them.")
    elif total:
        lead = (f"{number(total)} zero-energy mode(s) left by the supports: the stiffness "
                "matrix is singular.")
    else:
        lead = "No zero-energy mode: the supports hold every part."
    out.append(f"<p>{lead}</p>")
    scalars = {k: v for k, v in modes.items()
               if not isinstance(v, (list, dict)) and v is not None and k != "total"}
    out.append(facts_table({"total": total, **scalars}))
    parts = [{k: v for k, v in p.items() if k != "details"} for p in modes.get("per_part", [])]
    if parts:
        out.append(records_table(parts))
    details = [d for p in modes.get("per_part", []) for d in p.get("details", [])]
    if details:
        rows = [[d.get("part"), d.get("kind"), d.get("description"),
                 ", ".join(str(i) for i in d.get("moving_nodes", []))] for d in details]
        out.append(table(rows, header=[label("part"), label("kind"), label("description"),
                                       f"{label('moving_nodes')} "
                                       f"({modes.get('node_labels', '')})"]))
    holds = modes.get("suggested_holds") or []
    if holds:
        out.append("<p>Holds that would remove every free mode (suggested, not applied):</p>")
        out.append(records_table(holds, code_keys=("option",)))
    for note in modes.get("notes", []):
        out.append(f"<p>{esc(note)}</p>")
    return "\n".join(out)


def values_section(doc: Mapping[str, Any]) -> str:
    """Checks of a matrix's values (symmetry, zero modes, pivots), when the analysis made them."""
    values = doc.get("values")
    if values is None:
        return ""
    return "\n".join(["<section id='values'>", "<h2>Matrix values</h2>",
                      facts_table(values) if isinstance(values, dict) else
                      f"<p>{esc(values)}</p>", "</section>"])


def gaps_section(doc: Mapping[str, Any]) -> str:
    """What this report does not cover, said plainly."""
    gaps = doc.get("not_analysed") or []
    items = "".join(f"<li>{esc(g)}</li>" for g in gaps) or "<li>Nothing: every part ran.</li>"
    return (f"<section id='not-analysed'><h2>Not analysed</h2><ul class='gaps'>{items}"
            "</ul></section>")


def contents_nav(doc: Mapping[str, Any]) -> str:
    """Links to the sections this report has (plain anchors: no script)."""
    present = [("files", "Files written", bool(doc.get("outputs"))),
               ("findings", "Findings", doc.get("findings") is not None),
               ("mesh", f"The {doc['subject']}", True),
               ("values", "Matrix values", doc.get("values") is not None),
               ("sizing", "Matrix size and numbering", True),
               ("orderings", "Orderings compared", doc.get("comparison") is not None),
               ("supports", "Supports, free modes and equations",
                any(doc.get(k) is not None for k in ("supports", "modes", "equations"))),
               ("not-analysed", "Not analysed", True)]
    links = " &middot; ".join(f'<a href="#{anchor}">{esc(title)}</a>'
                              for anchor, title, shown_ in present if shown_)
    return f'<nav class="contents">Contents: {links}</nav>'


def render_html(doc: Mapping[str, Any], images: Mapping[str, bytes]) -> str:
    """The report page from the document and the PNG bytes of its figures.

    Parameters
    ----------
    doc
        The report document (:func:`~bandwise.faces.report.document.report_document`).
    images
        File name -> PNG bytes of every figure listed in ``doc["figures"]``;
        each figure goes in the section its entry names.
    """
    by_section: dict[str, list[str]] = {}
    for fig in doc.get("figures", []):
        png = images[fig["file"]]
        by_section.setdefault(fig["section"], []).append(
            figure(png, fig["caption"], fig.get("alt", fig["caption"])))

    def figs(name: str) -> str:
        return "\n".join(by_section.get(name, []))

    body = [
        header_section(doc),
        contents_nav(doc),
        convention_html(doc),
        findings_section(doc, figs("findings")),
        mesh_section(doc, "" if doc.get("findings") is not None else figs("findings")),
        values_section(doc),
        sizing_section(doc, figs("sizing")),
        comparison_section(doc, figs("orderings")),
        supports_section(doc, figs("supports")),
        gaps_section(doc),
        (f"<footer><p>{esc(doc['caution'])}</p><p>Machine-readable figures: report.json "
        f"(bandwise {esc(doc['bandwise_version'])}).</p></footer>"),
    ]
    title = f"bandwise report: {doc.get('file_name') or 'mesh'}"
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<title>{esc(title)}</title>\n"
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            f"<style>{_CSS}</style>\n</head>\n<body>\n"
            + "\n".join(b for b in body if b) + "\n</body>\n</html>\n")


def json_text(doc: Mapping[str, Any]) -> str:
    """The document as indented JSON text."""
    return json.dumps(doc, indent=2, allow_nan=False) + "\n"

