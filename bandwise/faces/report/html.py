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
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from bandwise.algorithms.checks.verdict import PROBLEMS, READY
from bandwise.core.tables import human_bytes, human_count

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
.verdict { border: 3px solid var(--ink); padding: 10px 14px; margin: 14px 0;
  font-size: 17px; font-weight: 600; }
.verdict.ready { border-style: solid; background: #e9f3ec; }
.verdict.problems { border-style: double; border-width: 6px; background: #f8e7e4; }
.verdict.unchecked { border-style: dashed; background: #f4f1e6; }
.caution { border-left: 5px solid var(--ink); padding: 6px 12px; background: var(--band); }
.finding { border: 1px solid var(--rule); border-left-width: 7px; padding: 6px 12px;
  margin: 10px 0; break-inside: avoid; }
.finding.error { border-left-color: #8c1d18; border-left-style: double; }
.finding.warning { border-left-color: #b36b00; }
.finding.note { border-left-color: #9aa6b1; border-left-width: 3px; }
.tag { display: inline-block; min-width: 70px; font-size: 12px; font-weight: 700;
  letter-spacing: .6px; text-transform: uppercase; }
.ids { font-family: "DejaVu Sans Mono", Consolas, monospace; font-size: 12.5px;
  word-break: break-all; color: var(--muted); }
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
  .verdict, .caution, th { background: none !important; }
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
    """Small nested values inline; numbers keep their exact value."""
    if isinstance(value, dict):
        return "; ".join(f"{esc(k)}: {_inline(v, str(k))}" for k, v in value.items())
    return ", ".join(_inline(v) for v in value)


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
                  name_key: str | None = None) -> str:
    """A list of flat dicts as a table, one column per key (union, first-seen order)."""
    keys: list[str] = []
    for r in records:
        keys.extend(k for k in r if k not in keys)
    marks = [("kept" if highlight is not None and name_key and r.get(name_key) == highlight
              else "") for r in records]
    return table([[r.get(k) for k in keys] for r in records],
                 header=[k.replace("_", " ") for k in keys], keys=keys, row_class=marks)


def facts_table(data: Mapping[str, Any], prefix: str = "") -> str:
    """Any nested dict as ``key | value`` rows (nested keys joined with ' / ')."""
    rows: list[list[Any]] = []
    keys: list[str] = []

    def walk(d: Mapping[str, Any], path: str) -> None:
        for k, v in d.items():
            label = f"{path}{k}".replace("_", " ")
            if isinstance(v, dict) and v:
                walk(v, f"{path}{k} / ")
            else:
                rows.append([label, v])
                keys.append(str(k))

    walk(data, prefix)
    out = ["<table>"]
    for (label, v), key in zip(rows, keys):
        out.append(f"<tr><th>{esc(label)}</th>{_cell(v, key)}</tr>")
    out.append("</table>")
    return "\n".join(out)


def figure(png: bytes, caption: str, alt: str) -> str:
    """An embedded PNG figure with its caption."""
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{esc(alt)}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")


# --------------------------------------------------------------------------- sections


def header_section(doc: Mapping[str, Any]) -> str:
    """Title, what was analysed, size, verdict and the caution."""
    mesh = doc["mesh"]
    word, reason = doc["verdict"], doc["verdict_reason"]
    css = {READY: "ready", PROBLEMS: "problems"}.get(word, "unchecked")
    symbol = {READY: "&#10004;", PROBLEMS: "&#10006;"}.get(word, "?")
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
        (f'<div class="verdict {css}">{symbol} Verdict: {esc(word)} '
        f'&mdash; {esc(reason)}</div>'),
        f'<p class="caution">{esc(doc["caution"])}</p>',
        "</header>",
    ])


def mesh_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """What the mesh is made of, with its picture."""
    mesh = dict(doc["mesh"])
    mesh.pop("current_numbering", None)
    return "\n".join(["<section id='mesh'>", f"<h2>The {esc(doc['subject'])}</h2>",
                      facts_table(mesh),
                      figures_html, "</section>"])


def findings_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """The check results, errors first, each with its ids and details."""
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
        out.append(f'<article class="finding {esc(sev)}">')
        out.append(f'<h3><span class="tag">{esc(sev)}</span> {esc(f.get("code", ""))} '
                   f'&mdash; count {number(f.get("count"))}</h3>')
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


def _ratio(a: Any, b: Any) -> str:
    if isinstance(a, (int, float)) and isinstance(b, (int, float)) and a:
        return f"{b / a:.3g}&times;"
    return ""


def sizing_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """Bandwidth, profile, wavefront and storage, current and renumbered, with curves."""
    cur = doc["mesh"]["current_numbering"]
    ren = doc.get("renumbering")
    header = ["figure", "nodes: current"]
    if ren:
        header += ["nodes: renumbered", "ratio"]
    header += ["DOFs: current"]
    if ren:
        header += ["DOFs: renumbered", "ratio"]
    header += ["unit / convention"]
    out = ["<section id='sizing'>", "<h2>Matrix size and numbering</h2>"]
    if ren:
        out.append(f"<p>Renumbered with <strong>{esc(ren['method'])}</strong>; ratio = "
                   "renumbered / current (below 1 is better).</p>")
    rows = ["<table>", "<tr>" + "".join(f"<th>{esc(h)}</th>" for h in header) + "</tr>"]
    for key, (label, unit) in FIGURE_LABELS.items():
        cells = [f"<td>{esc(label)}</td>", _cell(cur["nodes"][key], key)]
        if ren:
            after = ren["nodes"]["renumbered"][key]
            cells += [_cell(after, key), f'<td class="n">{_ratio(cur["nodes"][key], after)}</td>']
        cells.append(_cell(cur["dofs"][key], key))
        if ren:
            after = ren["dofs"]["renumbered"][key]
            cells += [_cell(after, key), f'<td class="n">{_ratio(cur["dofs"][key], after)}</td>']
        cells.append(f'<td class="unit">{esc(unit)}</td>')
        rows.append("<tr>" + "".join(cells) + "</tr>")
    rows.append("</table>")
    out += rows
    out.append(figures_html)
    out.append("</section>")
    return "\n".join(out)


#: Columns of the comparison table: (label, key, where) with where "dofs", "nodes" or "row".
COMPARISON_COLUMNS = (
    ("bandwidth", "bandwidth", "level"), ("profile", "profile", "level"),
    ("max wavefront", "max_wavefront", "level"), ("RMS wavefront", "rms_wavefront", "level"),
    ("envelope work", "envelope_ops", "level"), ("banded", "banded_bytes", "level"),
    ("skyline", "skyline_bytes", "level"),
)


def _comparison_table(methods: Sequence[Mapping[str, Any]], level: str) -> str:
    header = ["ordering", "kept"] + [c[0] for c in COMPARISON_COLUMNS]
    keys = ["", ""] + [c[1] for c in COMPARISON_COLUMNS]
    if level == "dofs":
        header += ["Cholesky nnz(L)", "sparse Cholesky", "improvement", "time (s)", "note"]
        keys += ["cholesky_nnz", "cholesky_bytes", "improvement", "seconds", "error"]
    rows, marks = [], []
    for m in methods:
        figs = m.get(level) or {}
        row = [m.get("method"), "kept" if m.get("chosen") else ""]
        row += [figs.get(c[1]) for c in COMPARISON_COLUMNS]
        if level == "dofs":
            row += [m.get("cholesky_nnz"), m.get("cholesky_bytes"), m.get("improvement"),
                    m.get("seconds"), m.get("error")]
        rows.append(row)
        marks.append("kept" if m.get("chosen") else "")
    return table(rows, header=header, keys=keys, row_class=marks, css="wide")


def comparison_section(doc: Mapping[str, Any], figures_html: str) -> str:
    """The orderings tried, as tables (the kept one in bold) and a chart."""
    comp = doc.get("comparison")
    if comp is None:
        return ""
    methods = comp.get("methods", [])
    rest = {k: v for k, v in comp.items() if k != "methods" and v not in ("", {}, None)}
    return "\n".join([
        "<section id='orderings'>", "<h2>Orderings compared</h2>",
        (f"<p>Objective: <strong>{esc(comp.get('objective', ''))}</strong> at DOF level; "
        f"kept: <strong>{esc(comp.get('chosen', ''))}</strong>. Improvement = original "
        "objective / this one (above 1 is better). Sparse Cholesky storage = nnz(L) "
        "values and row indices plus column pointers, 8 bytes each.</p>"),
        "<h3>DOF level</h3>", _comparison_table(methods, "dofs"),
        "<h3>Node level</h3>", _comparison_table(methods, "nodes"),
        facts_table(rest),
        figures_html, "</section>"])


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
            out.append(records_table(sup["applied"]))
        out.append(table([["held DOFs", sup["held_dofs"]],
                          ["supported nodes", sup["supported_nodes"]]]))
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
        rows = [("<table><tr><th>figure</th><th>reduced system</th>"
                "<th>unit / convention</th></tr>")]
        for key, (label, unit) in FIGURE_LABELS.items():
            if key in reduced:
                rows.append(f"<tr><td>{esc(label)}</td>{_cell(reduced[key], key)}"
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
        out.append(table(rows, header=["part", "kind", "what moves",
                                       f"nodes moving most ({modes.get('node_labels', '')})"]))
    holds = modes.get("suggested_holds") or []
    if holds:
        out.append("<p>Holds that would remove every free mode (suggested, not applied):</p>")
        out.append(records_table(holds))
    for note in modes.get("notes", []):
        out.append(f"<p>{esc(note)}</p>")
    return "\n".join(out)


def gaps_section(doc: Mapping[str, Any]) -> str:
    """What this report does not cover, said plainly."""
    gaps = doc.get("not_analysed") or []
    items = "".join(f"<li>{esc(g)}</li>" for g in gaps) or "<li>Nothing: every part ran.</li>"
    return (f"<section id='not-analysed'><h2>Not analysed</h2><ul class='gaps'>{items}"
            "</ul></section>")


def contents_nav(doc: Mapping[str, Any]) -> str:
    """Links to the sections this report has (plain anchors: no script)."""
    present = [("findings", "Findings", doc.get("findings") is not None),
               ("mesh", f"The {doc['subject']}", True),
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
        findings_section(doc, figs("findings")),
        mesh_section(doc, "" if doc.get("findings") is not None else figs("findings")),
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

