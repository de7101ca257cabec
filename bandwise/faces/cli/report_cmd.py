"""``bandwise report``: the HTML + JSON report of a file, and the ``--report DIR`` helper.

Other commands offer ``--report DIR`` through :data:`ReportOpt` and
:func:`write_report_option`, passing the result they rendered; the report
shows each result given and says plainly what was not analysed.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bandwise.algorithms.checks.verdict import FAIL_ON, PROBLEMS, check_fail_on
from bandwise.algorithms.orderings.compare import OBJECTIVES
from bandwise.core.progress import StderrProgress
from bandwise.faces.report import check_report_folder, write_result_report
from bandwise.workflows import CheckResult, RenumberResult, check_file

from . import CAUTION, EXIT_FINDINGS, DofsOpt, FormatOpt, PhysicsOpt, app, guarded
from .options import SupportFileOpt, SupportOpt

#: ``--fail-on`` as ``check`` has it (declared here too: ``check`` imports this module).
FailOnOpt = Annotated[str, typer.Option(
    "--fail-on", help=f"Lowest severity that makes the verdict \"{PROBLEMS}\" and the "
                      f"exit code 1: {' | '.join(FAIL_ON)}.")]

#: The ``--report DIR`` option other commands add to their signature.
ReportOpt = Annotated[Path | None, typer.Option(
    "--report", metavar="DIR",
    help="Also write an HTML report with figures and its JSON into DIR "
         "(created if missing; its parent must exist).")]


def write_report_option(out_dir: Path | None, result: CheckResult | RenumberResult,
                        source: Path | None = None, n_files: int = 1) -> None:
    """Write the report when ``--report DIR`` was given; say where on stderr.

    With ``source`` and several input files, each gets ``DIR/<file stem>``
    (:func:`report_folder`).  stderr keeps stdout clean for ``--json``.
    """
    if out_dir is None:
        return
    folder = out_dir if source is None else report_folder(out_dir, source, n_files)
    files = write_result_report(result, folder, StderrProgress())
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


@app.command()
@guarded
def report(
    mesh: Annotated[Path, typer.Argument(help="Mesh or matrix file to report on (read-only).")],
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
    "problems", 0 otherwise, 2 when it cannot run (nothing is written then).
    """
    check_fail_on(fail_on)
    check_report_folder(out)
    progress = StderrProgress()
    result = check_file(mesh, supports=support or (), supports_file=supports_file,
                        file_format=file_format, dofs_per_node=dofs_per_node, physics=physics,
                        fail_on=fail_on, compare=method, objective=objective, mode_shape=True,
                        progress=progress)
    files = write_result_report(result, out, progress)
    typer.echo(f"report: {files.html}")
    typer.echo(f"data:   {files.json}")
    typer.echo(f"verdict: {result.verdict.word} ({result.verdict.reason})")
    typer.echo(CAUTION)
    if result.verdict.word == PROBLEMS:
        raise typer.Exit(EXIT_FINDINGS)
