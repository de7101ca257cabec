"""``bandwise check``: size up and check meshes before a run (renders :func:`check_files`)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bandwise import __version__
from bandwise.algorithms.checks.verdict import FAIL_ON, PROBLEMS, check_fail_on
from bandwise.core.progress import StderrProgress
from bandwise.workflows import CheckResult, FileFailure, check_files
from bandwise.workflows.batch import BatchResult, CheckTask, expand_paths
from bandwise.workflows.supports import support_list

from . import (
    CAUTION,
    EXIT_CANNOT_RUN,
    EXIT_FINDINGS,
    DofsOpt,
    FormatOpt,
    JsonOpt,
    PhysicsOpt,
    app,
    emit_json,
    guarded,
)
from .batch_options import (
    JobsOpt,
    ResultsOpt,
    SchedulerOpt,
    batch_finished,
    check_table,
    is_batch,
    refuse_in_batch,
    run_cli_batch,
)
from .batch_options import exit_code as batch_exit_code
from .options import DofMapOpt, StiffnessCheckOpt, SupportFileOpt, SupportOpt
from .render import check_text, summary_line
from .report_cmd import ReportOpt, check_report_option, write_report_option

FailOnOpt = Annotated[str, typer.Option(
    "--fail-on", help=f"Lowest severity that makes the exit code 1: {' | '.join(FAIL_ON)}.")]
ToleranceOpt = Annotated[float | None, typer.Option(
    "--tolerance", help="Absolute distance under which distinct nodes count as coincident "
                        "(default: a fraction of the shortest element edge).")]
RelToleranceOpt = Annotated[float, typer.Option(
    "--relative-tolerance", help="That fraction of the shortest element edge.")]
CoordinatesOpt = Annotated[Path | None, typer.Option(
    "--coordinates", help="For matrix files with values: a mesh whose nodes, in file order, "
                          "are the matrix's node blocks (DOFs node after node, "
                          "--dofs-per-node or rows / nodes each); adds the rigid-body check "
                          "K r = 0.")]


@app.command()
@guarded
def check(
    files: Annotated[list[Path], typer.Argument(
        help="Mesh or matrix files to check (read-only), folders (searched for every "
             "format bandwise reads) or quoted globs ('sweep/**/*.msh').")],
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
    coordinates: CoordinatesOpt = None,
    jobs: JobsOpt = None,
    scheduler: SchedulerOpt = None,
    results_file: ResultsOpt = None,
) -> None:
    """Size up and check meshes before a run: parts, orphans, coincident nodes, joints, elements.

    Also counts DOFs and measures bandwidth, profile, wavefront and memory.
    Exit code 1 when a finding at or above --fail-on is found, 2 when a file
    could not be analysed (the others still are).  With --jobs, --scheduler or
    --results each file is a task on Dask; a summary table replaces the
    per-file text.
    """
    check_fail_on(fail_on)
    check_report_option(report_dir)
    files = expand_paths(files)
    if is_batch(jobs, scheduler, results_file):
        refuse_in_batch(report=report_dir, dof_map=dof_map, coordinates=coordinates)
        task = CheckTask(supports=support_list(support or (), supports_file), options=dict(
            file_format=file_format, dofs_per_node=dofs_per_node, physics=physics,
            fail_on=fail_on, tolerance=tolerance, relative_tolerance=relative_tolerance,
            stiffness_check=stiffness_check))
        batch = run_cli_batch(files, task, "checking", jobs=jobs, scheduler=scheduler,
                              results=results_file)
        batch_finished(batch, check_table(batch), as_json,
                       lambda: _batch_document(batch, fail_on), emit_json)
        if not as_json:
            typer.echo("")
            typer.echo(CAUTION)
        raise typer.Exit(batch_exit_code(batch, lambda e: e.get("verdict") == PROBLEMS))
    results = check_files(
        files, supports=support or (), supports_file=supports_file, file_format=file_format,
        dofs_per_node=dofs_per_node, physics=physics, fail_on=fail_on, tolerance=tolerance,
        relative_tolerance=relative_tolerance, stiffness_check=stiffness_check,
        dof_map=dof_map, mode_shape=report_dir is not None, coordinates=coordinates,
        progress=StderrProgress())
    for r in results:
        if isinstance(r, FileFailure):
            typer.echo(f"bandwise: error: {r.error}", err=True)
        else:
            write_report_option(report_dir, r, Path(r.file), len(files))
    if as_json:
        emit_json({"bandwise_version": __version__, "caution": CAUTION, "fail_on": fail_on,
                   "meshes": [r.to_dict() for r in results]})
    elif len(results) > 1 or isinstance(results[0], CheckResult):  # a lone failure: stderr only
        for r in results:
            if isinstance(r, CheckResult):
                typer.echo(check_text(r))
                typer.echo("")
        typer.echo(CAUTION)
        typer.echo("")
        for r in results:
            typer.echo(summary_line(r))
    raise typer.Exit(exit_code(results))


def _batch_document(batch: BatchResult, fail_on: str) -> dict:
    """``check --json`` of a batch: the same document, one entry per file in the order given."""
    return {"bandwise_version": __version__, "caution": CAUTION, "fail_on": fail_on,
            "meshes": [o.entry if o.ok else FileFailure(o.file, o.error or "").to_dict()
                       for o in batch.outcomes]}


def exit_code(results: list[CheckResult | FileFailure]) -> int:
    """2 when a file could not be analysed, else 1 when one fails the gate, else 0."""
    if any(isinstance(r, FileFailure) for r in results):
        return EXIT_CANNOT_RUN
    return EXIT_FINDINGS if any(r.failed for r in results) else 0
