"""The report an analyst attaches to a job: an HTML page with figures, and JSON.

>>> from bandwise.faces.report import ReportInputs, write_report     # doctest: +SKIP
>>> write_report("out/report", ReportInputs(model, graph, layout, summary))  # doctest: +SKIP
"""

from __future__ import annotations

from .build import ReportFiles, check_report_folder, report_figures, write_report
from .document import report_document, verdict
from .inputs import ReportInputs

__all__ = ["ReportFiles", "ReportInputs", "check_report_folder", "report_document",
           "report_figures", "verdict", "write_report"]
