"""Floor 3, workflows: whole jobs on one file, returning frozen result values.

Workflows never print and never exit; they import algorithms, formats and core.
"""

from .check import CheckResult, FileFailure, check_file, check_files
from .merge import MergeOutcome, merge_file
from .renumber import RenumberResult, renumber_file

__all__ = ["CheckResult", "FileFailure", "MergeOutcome", "RenumberResult", "check_file",
           "check_files", "merge_file", "renumber_file"]
