"""``bandwise renumber``: try orderings, keep the best, write the mesh (or matrix) and the map.

Renders :func:`bandwise.workflows.renumber.renumber_file`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bandwise import __version__
from bandwise.algorithms.orderings.compare import EFFORTS, OBJECTIVES
from bandwise.core.errors import InputError
from bandwise.core.progress import StderrProgress
from bandwise.workflows import FileFailure, renumber_file
from bandwise.workflows.batch import (
    BatchResult,
    RenumberTask,
    expand_paths,
    output_paths,
)
from bandwise.workflows.supports import support_list

from . import CAUTION, DofsOpt, FormatOpt, JsonOpt, PhysicsOpt, app, emit_json, guarded
from .batch_options import (
    JobsOpt,
    ResultsOpt,
    SchedulerOpt,
    batch_finished,
    exit_code,
    is_batch,
    refuse_in_batch,
    renumber_table,
    run_cli_batch,
)
from .options import DofMapOpt, SupportFileOpt, SupportOpt
from .render import format_note, renumber_text
from .report_cmd import ReportOpt, check_report_option, write_report_option

OutDirOpt = Annotated[Path | None, typer.Option(
    "--out-dir", metavar="DIR",
    help="Renumber every input (files, folders, quoted globs) into DIR, keeping each one's "
         "path below the inputs' common folder, name and format, with its node map beside.")]


@app.command()
@guarded
def renumber(
    paths: Annotated[list[Path], typer.Argument(
        metavar="IN [OUT]", help="A mesh or matrix file (read-only) and the renumbered mesh "
                                 "(or .mtx matrix) to write; with --out-dir, any number of "
                                 "files, folders or quoted globs.")],
    objective: Annotated[str, typer.Option(
        "--objective", help=f"What to minimise: {' | '.join(OBJECTIVES)} (wavefront: RMS).")
    ] = "profile",
    method: Annotated[str, typer.Option(
        "--method", help="auto (every registered ordering) or a comma-separated list of names.")
    ] = "auto",
    map_path: Annotated[Path | None, typer.Option(
        "--map", help="Where to write the old-to-new node map (default: OUT stem + .map.csv).")
    ] = None,
    element_order: Annotated[bool, typer.Option(
        "--element-order", help="Also order the elements for a frontal solver.")] = False,
    sloan_weights: Annotated[str | None, typer.Option(
        "--sloan-weights", metavar="W1,W2",
        help="Sloan priority weights (distance, degree); default 2,1.")] = None,
    file_format: FormatOpt = None,
    output_format: Annotated[str | None, typer.Option(
        "--output-format", help="Format name of OUT; default: the input's format when "
                                "the extensions agree, else from OUT's extension.")] = None,
    dofs_per_node: DofsOpt = None,
    physics: PhysicsOpt = None,
    as_json: JsonOpt = False,
    replace_input: Annotated[bool, typer.Option(
        "--replace-input", help="Allow OUT to be the input file itself (overwritten whole, "
                                "atomically).")] = False,
    report_dir: ReportOpt = None,
    support: SupportOpt = None,
    support_file: SupportFileOpt = None,
    dof_map: DofMapOpt = None,
    effort: Annotated[str, typer.Option(
        "--effort", help=f"Time traded for a smaller matrix: {' | '.join(EFFORTS)}; fast tries "
                         "the cheap orderings and refines small meshes, thorough tries every "
                         "ordering and refines longest.")] = "fast",
    out_dir: OutDirOpt = None,
    jobs: JobsOpt = None,
    scheduler: SchedulerOpt = None,
    results_file: ResultsOpt = None,
) -> None:
    """Renumber the nodes: try orderings, keep the best, write the mesh and the node map.

    With supports, the held DOFs are set aside and the equations numbered in
    the new node order: the reduced system's figures are shown before and
    after, and ``--dof-map`` writes the equation of every DOF.  With --out-dir,
    every input is renumbered into DIR, each file a task (on Dask with --jobs
    or --scheduler), and a summary table replaces the per-file text.
    """
    if out_dir is not None:
        refuse_in_batch(map=map_path, dof_map=dof_map, report=report_dir,
                        replace_input=replace_input, output_format=output_format)
        files = expand_paths(paths, exclude=[out_dir])
        task = RenumberTask(
            outputs=output_paths(files, out_dir), method=method, objective=objective,
            supports=support_list(support or (), support_file), options=dict(
                element_order=element_order, sloan_weights=sloan_weights, effort=effort,
                file_format=file_format, dofs_per_node=dofs_per_node, physics=physics))
        batch = run_cli_batch(files, task, "renumbering", jobs=jobs, scheduler=scheduler,
                              results=results_file)
        batch_finished(batch, renumber_table(batch), as_json, lambda: _batch_document(batch),
                       emit_json)
        if not as_json:
            typer.echo("")
            typer.echo(CAUTION)
        raise typer.Exit(exit_code(batch, lambda entry: False))
    if is_batch(jobs, scheduler, results_file):
        raise InputError("a batch writes into a folder: name it with --out-dir")
    if len(paths) != 2:
        raise InputError(f"give IN and OUT, or --out-dir DIR for many inputs (got "
                         f"{len(paths)} path{'s' if len(paths) != 1 else ''})")
    source, out = paths
    check_report_option(report_dir)
    result = renumber_file(
        source, out, method=method, objective=objective, supports=support or (),
        supports_file=support_file, map_path=map_path, element_order=element_order,
        sloan_weights=sloan_weights, file_format=file_format, output_format=output_format,
        dofs_per_node=dofs_per_node, physics=physics, replace_input=replace_input,
        dof_map=dof_map, effort=effort, analyse=report_dir is not None, progress=StderrProgress())
    for note in result.losses:
        typer.echo(f"bandwise: note: {format_note(result.output, note)}", err=True)
    write_report_option(report_dir, result)
    if as_json:
        emit_json(result.to_dict())
        return
    typer.echo(renumber_text(result))
    typer.echo("")
    typer.echo(CAUTION)


def _batch_document(batch: BatchResult) -> dict:
    """``renumber --json`` of a batch: each file's document (or its error), in the order given."""
    return {"bandwise_version": __version__, "caution": CAUTION,
            "files": [o.entry if o.ok else FileFailure(o.file, o.error or "").to_dict()
                      for o in batch.outcomes]}
