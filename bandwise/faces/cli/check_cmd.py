"""``bandwise check``: size up and check meshes before a run."""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Annotated

import typer

from bandwise import __version__
from bandwise.algorithms.checks import CheckOptions, run_checks
from bandwise.algorithms.checks.verdict import (
    FAIL_ON,
    check_fail_on,
    failing,
    findings_text,
    summary_line,
    verdict,
)
from bandwise.algorithms.topology import face_connected_blocks, facet_table_in_background
from bandwise.core.dofs import dof_layout
from bandwise.core.graph import node_graph
from bandwise.core.progress import StderrProgress, step
from bandwise.core.summary import MeshSummary, summarise
from bandwise.core.tables import human_bytes, human_count, render_table
from bandwise.formats.decks.files import deck_graph, read_mesh_or_deck
from bandwise.workflows.deck_inputs import deck_inputs

from . import (
    CAUTION,
    EXIT_FINDINGS,
    DofsOpt,
    FormatOpt,
    JsonOpt,
    PhysicsOpt,
    app,
    emit_json,
    guarded,
)
from .report_cmd import ReportOpt, check_report_option, mesh_report_inputs, write_report_option
from .support_options import (
    DofMapOpt,
    StiffnessCheckOpt,
    SupportFileOpt,
    SupportOpt,
    analyse_supports,
    merged_findings,
    support_request,
)

FailOnOpt = Annotated[str, typer.Option(
    "--fail-on", help=f"Lowest severity that makes the exit code 1: {' | '.join(FAIL_ON)}.")]
ToleranceOpt = Annotated[float | None, typer.Option(
    "--tolerance", help="Absolute distance under which distinct nodes count as coincident "
                        "(default: a fraction of the shortest element edge).")]
RelToleranceOpt = Annotated[float, typer.Option(
    "--relative-tolerance", help="That fraction of the shortest element edge.")]


def summary_text(s: MeshSummary) -> str:
    """The human-readable summary table of ``bandwise check``."""
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
    return "\n".join([
        render_table(facts, align="ll"),
        "",
        "Current numbering",
        render_table(rows, header=("figure", "node level", "DOF level", "unit / convention"),
                     align="lrrl"),
    ])


def _matrix_check(files: list[Path], as_json: bool) -> bool:
    """``check`` on matrix files (.mtx, .rb, .rsa ...): the same figures, for the pattern.

    Returns False, doing nothing, when no file is a matrix.
    """
    from bandwise.core.errors import InputError
    from bandwise.formats.matrix_io import (
        is_matrix_file,
        matrix_facts,
        read_matrix_data,
        summarise_matrix,
    )

    matrices = [is_matrix_file(p) for p in files]
    if not any(matrices):
        return False
    if not all(matrices):
        raise InputError("check meshes and matrix files in separate runs")
    results = [summarise_matrix(read_matrix_data(p)) for p in files]
    if as_json:
        emit_json({"bandwise_version": __version__, "caution": CAUTION,
                   "meshes": [r.to_dict() for r in results]})
        return True
    for s in results:
        text = summary_text(s)
        typer.echo(render_table(matrix_facts(s), align="ll"))
        typer.echo("")
        typer.echo(text[text.index("Current numbering"):])
        typer.echo("")
    typer.echo(CAUTION)
    return True


@app.command()
@guarded
def check(
    files: Annotated[list[Path], typer.Argument(help="Mesh files to check (read-only).")],
    file_format: FormatOpt = None,
    dofs_per_node: DofsOpt = None,
    physics: PhysicsOpt = None,
    as_json: JsonOpt = False,
    fail_on: FailOnOpt = "error",
    tolerance: ToleranceOpt = None,
    relative_tolerance: RelToleranceOpt = 1e-3,
    support: SupportOpt = None,
    supports_file: SupportFileOpt = None,
    stiffness_check: StiffnessCheckOpt = False,
    dof_map: DofMapOpt = None,
    report_dir: ReportOpt = None,
) -> None:
    """Size up and check meshes before a run: parts, orphans, coincident nodes, joints, elements.

    Also counts DOFs and measures bandwidth, profile, wavefront and memory.
    Exit code 1 when a finding at or above --fail-on is found.
    """
    check_fail_on(fail_on)
    check_report_option(report_dir)
    if _matrix_check(files, as_json):
        return
    request = support_request(support, supports_file, stiffness_check, dof_map, len(files))
    reports = []
    base_options = CheckOptions(tolerance=tolerance, relative_tolerance=relative_tolerance)
    progress = StderrProgress()
    results = []
    all_findings = []
    for path in files:
        with step(progress, f"reading {path.name}"):
            model, deck = read_mesh_or_deck(path, file_format)
        extra = deck_inputs(model, deck, dof_layout(model, dofs_per_node=dofs_per_node,
                                                    physics=physics))
        options = dataclasses.replace(base_options, links=extra.check_links)
        layout = extra.layout
        pending = facet_table_in_background(model)  # meanwhile: the graph and the summary
        with step(progress, "building node graph"):
            graph = node_graph(model) if deck is None else deck_graph(deck, model)
        results.append(summarise(model, layout, graph=graph, progress=progress))
        with step(progress, "matching element facets"):  # shared by the checks and the modes
            table = pending.result()
            _, labels = face_connected_blocks(model, table)
        reports.append(analyse_supports(
            model, layout, graph, request, progress,
            extra.supports, labels, extra.rigid_links))
        all_findings.append(merged_findings(
            run_checks(model, graph, options, progress=progress, table=table), reports[-1]))
        write_report_option(report_dir, mesh_report_inputs(
            model, layout, graph, results[-1], all_findings[-1], reports[-1], fail_on=fail_on),
            progress, path, len(files))
    gate_failed = any(failing(f, fail_on) for f in all_findings)
    if as_json:
        docs = [{**r.to_dict(), **rep.to_json(), "verdict": verdict(f, fail_on),
                 "findings": [x.to_dict() for x in f]}
                for r, f, rep in zip(results, all_findings, reports)]
        emit_json({"bandwise_version": __version__, "caution": CAUTION,
                   "fail_on": fail_on, "meshes": docs})
    else:
        if len(results) > 1:
            for r, f in zip(results, all_findings):
                typer.echo(summary_line(r.source, f, fail_on))
            typer.echo("")
        for k, (s, f) in enumerate(zip(results, all_findings)):
            if k:
                typer.echo("")
            typer.echo(summary_text(s))
            typer.echo("")
            typer.echo(findings_text(f))
            typer.echo("")
            typer.echo(reports[k].text())
        typer.echo("")
        typer.echo(CAUTION)
    if gate_failed:
        raise typer.Exit(EXIT_FINDINGS)
