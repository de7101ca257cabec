"""Floor 3, workflows: whole jobs on one file, returning frozen result values.

Workflows never print and never exit; they import algorithms, formats and core.
"""
