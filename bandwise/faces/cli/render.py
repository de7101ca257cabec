"""Text renderings of the library's results: what the command line prints.

Every function takes a result value and returns a string; nothing here
computes a figure or decides a verdict.
"""

from __future__ import annotations

import textwrap
from collections.abc import Sequence
from pathlib import Path

from bandwise.algorithms.checks.findings import Finding
from bandwise.algorithms.orderings.compare import Comparison
from bandwise.algorithms.orderings.frontal import ElementReordering
from bandwise.algorithms.values import ValuesCheck
from bandwise.core.summary import MeshSummary
from bandwise.core.tables import human_bytes, human_count, human_seconds, render_table
from bandwise.formats.matrix_io import matrix_facts
from bandwise.workflows import CheckResult, FileFailure, MergeOutcome, RenumberResult
from bandwise.workflows.next_steps import NextStep
from bandwise.workflows.supports import RenumberedEquations, SupportAnalysis
from bandwise.workflows.timing import ComparisonTime

#: Modes listed per part, and parts listed, in the text output.
TEXT_MODES, TEXT_PARTS = 12, 10
#: Merged pairs listed in the text output of ``merge`` (all of them go to --json).
LISTED_PAIRS = 20


def summary_text(s: MeshSummary) -> str:
    """The sizing table of ``bandwise check``: facts, then the current numbering's figures."""
    elements = ", ".join(f"{c} {t}" for t, c in s.cells_by_type.items())
    facts = [
        ("file", f"{s.source} ({s.file_format})"),
        ("nodes", f"{s.n_nodes:,}"),
        ("elements", f"{sum(s.cells_by_type.values()):,} ({elements})"),
        ("dimension", f"{s.dimension}D cells"),
        ("DOF rule", s.dof_rule),
        ("DOFs", f"{s.n_dofs:,}"),
        ("connected parts", f"{s.n_parts}"),
        ("orphan nodes", f"{s.n_orphans}"),
    ]
    if s.skipped:
        facts.append(("skipped blocks", "; ".join(s.skipped)))
    return "\n".join([render_table(facts, align="ll"), "", numbering_text(s)])


def numbering_text(s: MeshSummary) -> str:
    """The "Current numbering" table: node-level and DOF-level figures side by side."""
    n, d = s.node_level, s.dof_level
    rows = [
        ("matrix order", f"{n.n_rows:,}", f"{d.n_rows:,}", "rows"),
        ("bandwidth", f"{n.bandwidth:,}", f"{d.bandwidth:,}", "semi-bandwidth, diagonal excluded"),
        ("profile", f"{n.profile:,}", f"{d.profile:,}", "entries below the diagonal in the envelope"),
        ("max wavefront", f"{n.max_wavefront:,}", f"{d.max_wavefront:,}", "rows"),
        ("RMS wavefront", f"{n.rms_wavefront:,.1f}", f"{d.rms_wavefront:,.1f}", "rows"),
        ("banded storage", human_bytes(n.banded_bytes), human_bytes(d.banded_bytes),
         "n(b+1) doubles"),
        ("skyline storage", human_bytes(n.skyline_bytes), human_bytes(d.skyline_bytes),
         "P+n doubles, n+1 int64 pointers"),
        ("envelope Cholesky", human_count(n.envelope_ops), human_count(d.envelope_ops),
         "multiplications"),
    ]
    return "\n".join(["Current numbering",
                      render_table(rows, header=("figure", "node level", "DOF level",
                                                 "unit / convention"), align="lrrl")])


def findings_text(findings: Sequence[Finding], width: int = 72) -> str:
    """The findings as a table (severity, code, count) each followed by its message."""
    if not findings:
        return "Mesh checks: nothing found."
    lines = ["Mesh checks"]
    rows = [(f.severity, f.code, f"{f.count:,}", _first_ids(f)) for f in findings]
    lines.append(render_table(rows, header=("severity", "finding", "count", "first items"),
                              align="llrl"))
    lines.append("")
    for f in findings:
        lines.append(f"{f.code}:")
        lines.extend(textwrap.wrap(f.message, width, initial_indent="  ",
                                   subsequent_indent="  "))
        if f.where:
            lines.extend(textwrap.wrap("in: " + "; ".join(f.where), width,
                                       initial_indent="  ", subsequent_indent="    "))
    return "\n".join(lines)


def _first_ids(f: Finding, k: int = 5) -> str:
    if f.node_ids:
        ids, kind = f.node_ids, "nodes"
    elif f.element_ids:
        ids, kind = f.element_ids, "elements"
    else:
        return ""
    more = ", ..." if len(ids) > k else ""
    return f"{kind} {', '.join(str(i) for i in ids[:k])}{more}"


def summary_line(result: CheckResult | FileFailure) -> str:
    """One line per file: the verdict word and the findings of each severity, or the error."""
    if isinstance(result, FileFailure):
        error = result.error.removeprefix(f"{result.file}: ")
        return f"{result.file}: could not be analysed ({error})"
    return f"{result.file}: {result.verdict.word} ({result.verdict.reason})"


def supports_text(report: SupportAnalysis) -> str:
    """The "Supports and zero-energy modes" section of the text output."""
    lines = ["Supports and zero-energy modes"]
    if report.supports.applied:
        rows = [(a.support.describe(), a.support.dofs, f"{a.nodes.size:,}", f"{a.n_dofs:,}")
                for a in report.supports.applied]
        lines.append(render_table(rows, header=("support", "DOFs", "nodes", "held DOFs"),
                                  align="llrr"))
    else:
        lines.append("no supports given (every DOF free)")
    a = report.analysis
    rigid = sum(p.n_rigid for p in a.parts)
    lines.append(f"zero-energy modes: {a.total} ({rigid} rigid, {a.n_body_modes - rigid} "
                 f"mechanism, {a.dofs_without_stiffness} DOFs without stiffness)")
    for part in [p for p in a.parts if p.n_modes or not p.analysed][:TEXT_PARTS]:
        lines.append(f"  part {part.part} ({part.n_nodes:,} nodes, {part.n_bodies} "
                     f"bodies): {part.n_modes} mode(s){'' if part.analysed else ' ?'}")
        for m in part.modes[:TEXT_MODES]:
            moving = ("moving most: nodes " + ", ".join(str(v) for v in m.moving_nodes)
                      if m.moving_nodes else "every node moves alike")
            lines.append(f"    - {m.kind}: {m.description} ({moving})")
        if part.n_modes > TEXT_MODES:
            lines.append(f"    ... {part.n_modes - TEXT_MODES} more (see --json)")
    for note in a.notes:
        lines.append(f"  note: {note}")
    if a.suggested:
        opts = " ".join(f'--support "{h.as_option}"' for h in a.suggested)
        lines.append(f"suggested holds (not applied): {opts}")
    e = report.equations
    eq = f"equations: {e.n_dofs:,} DOFs, {e.n_fixed:,} held, {e.n_equations:,} equations"
    if e.reduced is not None and e.n_equations:
        r = e.reduced
        eq += (f"; reduced system: bandwidth {r.bandwidth:,}, profile {r.profile:,}, "
               f"skyline {human_bytes(r.skyline_bytes)}")
    lines.append(eq)
    if report.stiffness is not None:
        lines.append(report.stiffness.message)
    return "\n".join(lines)


def check_text(result: CheckResult) -> str:
    """Everything ``check`` prints for one file, verdict first."""
    if result.subject == "matrix":
        lines = [render_table(matrix_facts(result.summary), align="ll"), "",
                 numbering_text(result.summary)]
        if result.values is not None:
            lines += ["", values_text(result.values), "", findings_text(result.findings or ())]
        return "\n".join(lines)
    lines = [summary_text(result.summary), "", findings_text(result.findings or ())]
    if result.supports is not None:
        lines += ["", supports_text(result.supports)]
    if result.next_steps:
        lines += ["", next_steps_text(result.next_steps)]
    return "\n".join(lines)


def next_steps_text(steps: Sequence[NextStep], width: int = 72) -> str:
    """The steps to take before a static run, numbered, each command on a line of its own."""
    lines = ["What to do next"]
    for k, s in enumerate(steps, start=1):
        lines += textwrap.wrap(s.advice, width, initial_indent=f"{k}. ", subsequent_indent="   ")
        if s.command:
            lines.append(f"   {s.command}")
    return "\n".join(lines)


def values_text(v: ValuesCheck) -> str:
    """The "Values" section of ``check`` on a matrix file with values."""
    sym = "yes" if v.symmetric else "NO"
    if v.asymmetry_at is not None:
        sym += (f" (largest relative asymmetry {v.largest_asymmetry:.2e} at row "
                f"{v.asymmetry_at[0]}, column {v.asymmetry_at[1]})")
    facts = [("symmetric", sym)]
    if v.count is None:
        facts.append(("zero modes", f"not counted: {v.not_counted}"))
    else:
        c = v.count
        facts += [("zero modes", f"{c.count} ({'certain' if c.certain else 'uncertain'}: gap "
                                 f"{c.gap:.1e})"),
                  ("positive definite", "yes" if v.positive_definite else "no"),
                  ("negative pivots", f"{v.negative_pivots}"),
                  ("pivot ratio", "-" if v.pivot_ratio is None else f"{v.pivot_ratio:.2e}")]
    facts.append(("zero or negative diagonal", f"{v.n_nonpositive_diagonal:,} row(s)"))
    if v.rigid is not None and v.rigid.residuals:
        worst = ", ".join(f"{m} {r:.1e}" for m, r in zip(v.rigid.motions, v.rigid.residuals))
        facts.append(("rigid motions, |K r|",
                      f"{worst} ({'zero' if v.rigid.passed else 'NOT zero'})"))
    elif v.rigid is not None:
        facts.append(("rigid motions", v.rigid.note))
    return "\n".join(["Values", render_table(facts, align="ll")])


def equations_text(eq: RenumberedEquations) -> str:
    """One line of counts, and the reduced-system figures before -> after."""
    a, b = eq.after, eq.before
    line = (f"equations: {a.n_dofs:,} DOFs, {a.n_fixed:,} held, {a.n_equations:,} "
            "equations (held DOFs set aside, free DOFs numbered node after node)")
    if a.reduced is None or b.reduced is None or not a.n_equations:
        return line
    if not a.n_fixed:
        return line + "\nno DOF held: the reduced system is the whole one compared above"
    rows = [(name, f"{getattr(b.reduced, key):,}", f"{getattr(a.reduced, key):,}")
            for name, key in (("bandwidth", "bandwidth"), ("profile", "profile"),
                              ("max wavefront", "max_wavefront"))]
    rows.append(("skyline storage", human_bytes(b.reduced.skyline_bytes),
                 human_bytes(a.reduced.skyline_bytes)))
    return "\n".join([line, "reduced system", render_table(
        rows, header=("figure", "before", "after"), align="lrr")])


def comparison_text(comp: Comparison, level: str, timing: ComparisonTime | None = None) -> str:
    """The table of every method tried, the chosen one marked with ``*``.

    With ``timing``, each method's wall time (first-call compilation and
    measuring included) stands beside its ordering time, and the comparison's
    whole wall time is said below the table.
    """
    fill_shown = any(r.fill is not None for r in comp.rows)
    walls = {} if timing is None else timing.by_method
    header = ["", "method", "bandwidth", "profile", "max wavefront", "RMS wavefront", "banded",
              "skyline"] + (["Cholesky nnz"] if fill_shown else []) + ["time"] \
        + (["wall"] if walls else []) + ["vs original"]
    rows = []
    for r in comp.rows:
        mark = "*" if r is comp.best else ""
        if r.dofs is None:
            rows.append([mark, r.method, f"failed: {r.error}"])
            continue
        d = r.dofs
        row = [mark, r.method, f"{d.bandwidth:,}", f"{d.profile:,}", f"{d.max_wavefront:,}",
               f"{d.rms_wavefront:,.1f}", human_bytes(d.banded_bytes), human_bytes(d.skyline_bytes)]
        if fill_shown:
            row.append("-" if r.fill is None else human_count(r.fill))
        row.append(human_seconds(r.seconds))
        if walls:
            row.append(human_seconds(walls[r.method]) if r.method in walls else "-")
        row.append("-" if r.improvement is None else f"{r.improvement:.2f}x")
        if r.error:
            row.append(f"({r.error})")
        rows.append(row)
    title = f"Orderings tried ({level}; objective: {comp.objective}; * = chosen)"
    lines = [title,
             render_table(rows, header=header, align="ll" + "r" * (len(header) - 2))]
    if timing is not None:
        lines.append(f"time: the ordering alone, once compiled; wall: what its step cost here, "
                     f"first-call compilation and measuring included. The comparison took "
                     f"{human_seconds(timing.seconds)} in all, "
                     f"{human_seconds(timing.loading_seconds)} of it loading the orderings "
                     "(compiling their kernels on a first run).")
    if not fill_shown:
        lines.append(f"Cholesky fill {comp.fill_note}")
    for name, why in comp.skipped.items():
        lines.append(f"not tried: {name}: {why}")
    for name, why in comp.cut_short.items():
        lines.append(f"cut short: {name}: {why}")
    return "\n".join(lines)


def format_note(output: str, note: str) -> str:
    """One note on what the output format keeps, as a sentence naming the file written."""
    return f"writing {Path(output).name}: {note}"


def frontal_text(front: ElementReordering) -> str:
    """The front width before and after the element order for a frontal solver."""
    b, a = front.before, front.after
    kept = " (file order kept: sorting would not shrink the front)" if front.kept_file_order else ""
    return (f"Element order for a frontal solver{kept}: front width max {b.max_dofs:,} -> "
            f"{a.max_dofs:,} DOFs, RMS {b.rms_dofs:,.1f} -> {a.rms_dofs:,.1f} DOFs "
            f"({b.max_nodes:,} -> {a.max_nodes:,} nodes at most)")


def renumber_text(r: RenumberResult) -> str:
    """Everything ``renumber`` prints: the comparison, the choice, the equations, the files."""
    comp = r.comparison
    lines = [comparison_text(comp, r.level, r.comparison_time)]
    if r.element_order is not None:
        lines.append(frontal_text(r.element_order))
    best = comp.best
    gain = "" if best.improvement is None else f", {best.improvement:.2f}x better than original"
    value = best.value(comp.objective) or 0.0
    shown = f"{value:,.1f}" if comp.objective == "wavefront" else f"{int(value):,}"
    lines += ["", f"chosen: {best.method} ({comp.objective} {shown}{gain})"]
    if r.equations is not None:
        lines.append(equations_text(r.equations))
    lines += [format_note(r.output, lost) for lost in r.losses]
    if r.deck:
        cards = ", ".join(f"{k} {v}" for k, v in r.deck["changed_cards"].items())
        lines.append(f"deck lines rewritten (node ids only): {cards}")
        lines += [f"note: {note}" for note in r.deck["notes"]]
    lines += [f"written as {_kind_text(r.output_kind)}: {note}" for note in r.output_notes]
    lines.append(f"written: {r.output} ({_kind_text(r.output_kind) or r.output_format})")
    lines.append(f"node map (old -> new, 1-based): {r.node_map}")
    if r.dof_map is not None:
        lines.append(f"DOF map (equation of every DOF): {r.dof_map}")
    return "\n".join(lines)


def _kind_text(kind: dict[str, str | None] | None) -> str:
    """``gmsh 4.1 binary``: the kind of file written, in words ('' when none)."""
    from bandwise.formats.registry import FileKind

    return "" if kind is None else FileKind(**kind).describe()


def merge_text(m: MergeOutcome) -> str:
    """What ``merge`` prints: the rule, the pairs merged and refused, the file written."""
    result, labels, kind = m.merge, m.labels, m.label_kind
    lines = [
        f"read    {m.input}",
        f"rule    {result.rule}",
        (f"merged  {result.n_merged} nodes ({result.model.n_nodes + result.n_merged} -> "
         f"{result.model.n_nodes}); parts {m.parts_before} -> {m.parts_after}"),
    ]
    if result.n_merged:
        lines.append(f"pairs   kept <- removed ({kind}):")
        for k, r in list(zip(result.kept, result.removed))[:LISTED_PAIRS]:
            lines.append(f"        {labels[k]} <- {labels[r]}")
        if result.n_merged > LISTED_PAIRS:
            lines.append(f"        ... {result.n_merged - LISTED_PAIRS} more (see --json)")
    if result.refused.size:
        shown = ", ".join(str(labels[r]) for r in result.refused[:LISTED_PAIRS])
        lines.append(f"refused {result.refused.size} nodes left unmerged: two of them belong "
                     f"to one element, merging would collapse it ({shown})")
    lines += [f"note    written as {_kind_text(m.output_kind)}: {n}" for n in m.output_notes]
    lines.append(f"wrote   {m.output} ({_kind_text(m.output_kind) or m.output_format})")
    return "\n".join(lines)
