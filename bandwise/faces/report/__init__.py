"""The report an analyst attaches to a job: an HTML page with figures, and JSON.

>>> import bandwise                                                   # doctest: +SKIP
>>> bandwise.write_report(bandwise.check_file("meshes/bracket.msh"), "out")  # doctest: +SKIP
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from bandwise.core.progress import Progress, ProgressCallback, as_progress

from .build import ReportFiles, check_report_folder, report_figures, write_report
from .document import report_document, verdict
from .inputs import ReportInputs, report_inputs

if TYPE_CHECKING:
    from bandwise.workflows import CheckResult, RenumberResult

__all__ = ["ReportFiles", "ReportInputs", "check_report_folder", "report_document",
           "report_figures", "report_inputs", "verdict", "write_report", "write_result_report",
           "write_results_report"]


def write_result_report(result: CheckResult | RenumberResult, out_dir: str | Path,
                        progress: Progress | ProgressCallback | None = None) -> ReportFiles:
    """Write the report of one ``check_file`` or ``renumber_file`` result into ``out_dir``."""
    return write_report(out_dir, report_inputs(result), as_progress(progress))


def write_results_report(results: CheckResult | RenumberResult
                         | Sequence[CheckResult | RenumberResult], out_dir: str | Path,
                         progress: Progress | ProgressCallback | None = None
                         ) -> ReportFiles | list[ReportFiles]:
    """Write the report of one result into ``out_dir``, or of several into ``out_dir/<stem>``.

    This is ``bandwise.write_report``: the report renders the results as they
    are and computes nothing of its own.
    """
    if not isinstance(results, Sequence):
        return write_result_report(results, out_dir, progress)
    out = Path(out_dir)
    check_report_folder(out)
    out.mkdir(exist_ok=True)
    return [write_result_report(r, out / Path(getattr(r, "file", None) or r.input).stem,
                                progress) for r in results]
