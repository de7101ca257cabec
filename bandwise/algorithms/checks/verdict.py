"""The gate over the findings: which ones fail a run, and how to show them.

``fail_on`` names the lowest severity that fails: ``error`` (default),
``warning``, ``note``, or ``never``.  Rendering returns strings; printing
is left to the command line.
"""

from __future__ import annotations

import textwrap

from bandwise.core.errors import InputError
from bandwise.core.tables import render_table

from .findings import SEVERITIES, Finding, severity_rank

#: Accepted values of ``--fail-on``.
FAIL_ON: tuple[str, ...] = (*SEVERITIES, "never")


def check_fail_on(fail_on: str) -> str:
    """Return ``fail_on`` after checking it is one of :data:`FAIL_ON`."""
    if fail_on not in FAIL_ON:
        raise InputError(f"--fail-on must be one of {' | '.join(FAIL_ON)}, got {fail_on!r}")
    return fail_on


def failing(findings: list[Finding], fail_on: str) -> list[Finding]:
    """The findings at or above the ``fail_on`` severity."""
    if check_fail_on(fail_on) == "never":
        return []
    limit = severity_rank(fail_on)
    return [f for f in findings if severity_rank(f.severity) <= limit]


def verdict(findings: list[Finding], fail_on: str) -> str:
    """``"problems"`` when some finding fails the gate, else ``"clear"``."""
    return "problems" if failing(findings, fail_on) else "clear"


def summary_line(source: str, findings: list[Finding], fail_on: str) -> str:
    """One line per mesh: file, verdict and the number of findings of each severity."""
    counts = {s: sum(1 for f in findings if f.severity == s) for s in SEVERITIES}
    tally = ", ".join(f"{n} {s}{'' if n == 1 else 's'}" for s, n in counts.items())
    return f"{source}: {verdict(findings, fail_on)} ({tally}; gate: {fail_on})"


def findings_text(findings: list[Finding], width: int = 72) -> str:
    """The findings as a table (severity, code, count) each followed by its message."""
    if not findings:
        return "Mesh checks: nothing found."
    lines = ["Mesh checks"]
    rows = []
    for f in findings:
        rows.append((f.severity, f.code, f"{f.count:,}", _first_ids(f)))
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
