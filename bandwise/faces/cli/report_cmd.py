"""``bandwise report``: the HTML + JSON report of a mesh, and the ``--report DIR`` helper.

Other commands offer ``--report DIR`` through :data:`ReportOpt` and
:func:`write_report_option`, passing what they have computed; the report
shows each result given and says plainly what was not analysed.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from bandwise.algorithms.checks import CheckOptions, run_checks
from bandwise.algorithms.checks.findings import Finding
from bandwise.algorithms.checks.verdict import FAIL_ON, check_fail_on
from bandwise.algorithms.orderings.compare import OBJECTIVES, Comparison, compare_orderings
from bandwise.core.dofs import DofLayout, dof_layout
from bandwise.core.equations import equation_numbering
from bandwise.core.errors import InputError
from bandwise.core.graph import NodeGraph, graph_from_matrix, node_graph
from bandwise.core.model import Model
from bandwise.core.progress import Progress, StderrProgress, step
from bandwise.core.summary import MeshSummary, summarise
from bandwise.faces.report import ReportFiles, ReportInputs, check_report_folder, write_report
from bandwise.faces.report.document import PROBLEMS, verdict
from bandwise.formats.decks.files import deck_graph, read_mesh_or_deck
from bandwise.formats.matrix_io import is_matrix_file, read_matrix_data, summarise_matrix
from bandwise.workflows.deck_inputs import deck_inputs

from . import CAUTION, EXIT_FINDINGS, DofsOpt, FormatOpt, PhysicsOpt, app, guarded
from .support_options import (
    SupportFileOpt,
    SupportOpt,
    SupportReport,
    analyse_supports,
    merged_findings,
    support_request,
)

#: ``--fail-on`` as ``check`` has it (declared here too: ``check`` imports this module).
FailOnOpt = Annotated[str, typer.Option(
    "--fail-on", help=f"Lowest severity that makes the verdict \"problems found\" and the "
                      f"exit code 1: {' | '.join(FAIL_ON)}.")]

#: The ``--report DIR`` option other commands add to their signature.
ReportOpt = Annotated[Path | None, typer.Option(
    "--report", metavar="DIR",
    help="Also write an HTML report with figures and its JSON into DIR "
         "(created if missing; its parent must exist).")]


def write_report_option(out_dir: Path | None, inputs: ReportInputs,
                        progress: Progress | None = None, source: Path | None = None,
                        n_files: int = 1) -> None:
    """Write the report when ``--report DIR`` was given; say where on stderr.

    With ``source`` and several input files, each gets ``DIR/<file stem>``
    (:func:`report_folder`).  stderr keeps stdout clean for ``--json``.
    Errors propagate as :class:`~bandwise.core.errors.BandwiseError` for
    :func:`~bandwise.faces.cli.guarded`.
    """
    if out_dir is None:
        return
    folder = out_dir if source is None else report_folder(out_dir, source, n_files)
    files = write_report(folder, inputs, progress)
    typer.echo(f"bandwise: report written: {files.html}", err=True)


def check_report_option(out_dir: Path | None) -> None:
    """Fail at once, before a long analysis, when ``--report DIR`` cannot be written."""
    if out_dir is not None:
        check_report_folder(out_dir)


def report_folder(out_dir: Path, source: Path, n_files: int) -> Path:
    """The report folder of one input: ``DIR`` itself, or ``DIR/<file stem>`` for several.

    With several inputs ``DIR`` is created (its parent must exist) and each
    input gets a folder of its own inside it.
    """
    check_report_folder(out_dir)
    if n_files == 1:
        return out_dir
    out_dir.mkdir(exist_ok=True)
    return out_dir / source.stem


def mesh_report_inputs(model: Model, layout: DofLayout, graph: NodeGraph,
                       summary: MeshSummary, findings: list[Finding] | None = None,
                       supports: SupportReport | None = None,
                       comparison: Comparison | None = None,
                       fail_on: str = "error") -> ReportInputs:
    """Gather what a command computed into :class:`~bandwise.faces.report.ReportInputs`.

    With a comparison, the equations are numbered in the kept order, so the
    reduced-system figures are those the solver will see.
    """
    equations = modes = held = None
    if supports is not None:
        held, modes, equations = supports.supports, supports.analysis, supports.equations
        if comparison is not None:
            equations = equation_numbering(layout, held.fixed, comparison.best.perm, graph)
    return ReportInputs(model=model, graph=graph, layout=layout, summary=summary,
                        findings=findings, comparison=comparison, supports=held,
                        modes=modes, equations=equations, fail_on=fail_on)


def renumber_report_inputs(result: dict[str, Any]) -> ReportInputs:
    """The report of a ``renumber`` run from what it computed (mesh or matrix).

    ``result`` holds the comparison and either ``model``, ``layout`` and
    ``graph`` (a mesh) or ``matrix`` and ``graph`` (a matrix file).  A report
    is a record of what was checked, so for a mesh the checks and the
    zero-energy analysis run here too (``renumber`` alone does not need
    them), and the verdict is the one ``check`` would give.
    """
    from bandwise.algorithms.checks import run_checks
    from bandwise.algorithms.checks.findings import Finding
    from bandwise.algorithms.rigid import zero_energy_modes
    from bandwise.algorithms.topology import face_connected_blocks, facet_table

    graph, comparison = result["graph"], result["comparison"]
    if "matrix" in result:
        return ReportInputs(model=None, graph=graph, layout=1,
                            summary=summarise_matrix(result["matrix"]), comparison=comparison)
    model, layout = result["model"], result["layout"]
    equations = result.get("equations")  # the numbering after renumbering, supports held
    held = None if equations is None else equations.supports
    table = facet_table(model)  # shared by the modes and the checks
    modes = zero_energy_modes(model, layout, held, graph, face_connected_blocks(model, table)[1])
    findings = run_checks(model, graph, table=table)
    if held is not None and held.applied and modes.n_body_modes:
        findings = [Finding("supports.free_modes", "error", modes.n_body_modes,
                            f"the supports leave {modes.n_body_modes} rigid-body or mechanism "
                            "mode(s) free: the stiffness matrix is singular"), *findings]
    return ReportInputs(model=model, graph=graph, layout=layout,
                        summary=summarise(model, layout, graph), comparison=comparison,
                        findings=findings, supports=held, modes=modes,
                        equations=None if equations is None else equations.after)


@app.command()
@guarded
def report(
    mesh: Annotated[Path, typer.Argument(help="Mesh file to report on (read-only).")],
    out: Annotated[Path, typer.Option(
        "--out", metavar="DIR",
        help="Report folder: report.html, report.json and the PNG figures "
             "(created if missing; its parent must exist).")],
    support: SupportOpt = None,
    supports_file: SupportFileOpt = None,
    method: Annotated[str, typer.Option(
        "--method", help="Orderings to compare: auto, none, or names separated by commas.")
    ] = "auto",
    objective: Annotated[str, typer.Option(
        "--objective", help=f"What the kept ordering minimises: {' | '.join(OBJECTIVES)}.")
    ] = "profile",
    fail_on: FailOnOpt = "error",
    file_format: FormatOpt = None,
    dofs_per_node: DofsOpt = None,
    physics: PhysicsOpt = None,
) -> None:
    """Write the report to attach to a job: a self-contained HTML page with figures, and JSON.

    Runs the mesh checks, compares orderings and, with supports, counts the
    zero-energy modes and the equations.  Exit code 1 when the verdict is
    "problems found", 0 otherwise, 2 when it cannot run (nothing is written then).
    """
    check_fail_on(fail_on)
    check_report_folder(out)
    progress = StderrProgress()
    if is_matrix_file(mesh):
        if support or supports_file:
            raise InputError("supports apply to a mesh, not to a matrix file")
        inputs = _matrix_inputs(mesh, method, objective, fail_on, progress)
        _finish(write_report(out, inputs, progress), inputs)
        return
    request = support_request(support, supports_file, False, None, 1)
    model, deck = read_mesh_or_deck(mesh, file_format)  # a deck's BCs and links as check reads them
    extra = deck_inputs(model, deck, dof_layout(model, dofs_per_node=dofs_per_node,
                                                physics=physics))
    layout = extra.layout
    with step(progress, "building node graph"):
        graph = node_graph(model) if deck is None else deck_graph(deck, model)
    summary = summarise(model, layout, graph, progress=progress)
    held = analyse_supports(model, layout, graph, request, progress, extra.supports, None,
                            extra.rigid_links)
    findings = merged_findings(run_checks(model, graph, CheckOptions(links=extra.check_links),
                                          progress=progress), held)
    comparison = (None if method == "none" else
                  compare_orderings(graph, method, objective, layout, progress=progress))
    inputs = mesh_report_inputs(model, layout, graph, summary, findings, held, comparison,
                                fail_on)
    _finish(write_report(out, inputs, progress), inputs)


def _matrix_inputs(path: Path, method: str, objective: str, fail_on: str,
                   progress: Progress) -> ReportInputs:
    """The report of a matrix pattern: sizing and orderings, one unknown per row."""
    with step(progress, "reading the matrix"):
        data = read_matrix_data(path)
    graph = graph_from_matrix(data.matrix)
    comparison = (None if method == "none" else
                  compare_orderings(graph, method, objective, 1, progress=progress))
    return ReportInputs(model=None, graph=graph, layout=1, summary=summarise_matrix(data),
                        comparison=comparison, fail_on=fail_on)


def _finish(files: ReportFiles, inputs: ReportInputs) -> None:
    """Say where the report is and what it concludes; exit 1 on "problems found"."""
    v = verdict(inputs)
    typer.echo(f"report: {files.html}")
    typer.echo(f"data:   {files.json}")
    typer.echo(f"verdict: {v['status']} ({v['reason']})")
    typer.echo(CAUTION)
    if v["status"] == PROBLEMS:
        raise typer.Exit(EXIT_FINDINGS)
