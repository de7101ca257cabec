"""Batch options of ``check`` and ``renumber``: many files as tasks, a progress bar, a summary.

Options::

    --jobs N             a local Dask cluster of N worker processes
    --scheduler ADDRESS  an existing dask.distributed scheduler (tcp://host:8786)
    --results R.jsonl    one line per finished file; files already there are skipped
    --out-dir DIR        (renumber) where the renumbered files go

The work is :func:`bandwise.workflows.batch.run_batch`; this module renders
its progress on stderr (a bar on a terminal, a line per file otherwise) and
the summary table, and turns the outcomes into the exit code.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Annotated, Any, TextIO

import typer

from bandwise.core.errors import InputError
from bandwise.core.tables import render_table
from bandwise.workflows.batch import BatchProgress, BatchResult, FileOutcome, run_batch

from . import EXIT_CANNOT_RUN, EXIT_FINDINGS, EXIT_OK

JobsOpt = Annotated[int | None, typer.Option(
    "--jobs", min=1, help="Run each file as a task on a local Dask cluster of N worker "
                          "processes.")]
SchedulerOpt = Annotated[str | None, typer.Option(
    "--scheduler", metavar="ADDRESS",
    help="Send the tasks to an existing dask.distributed scheduler (e.g. tcp://head:8786); "
         "its workers must see the files under the same paths.")]
ResultsOpt = Annotated[Path | None, typer.Option(
    "--results", metavar="FILE.jsonl",
    help="Append one JSON line per finished file (its --json entry plus sha256); files "
         "whose sha256 is already there are skipped, so a stopped batch resumes.")]


def is_batch(jobs: int | None, scheduler: str | None, results: Path | None) -> bool:
    """True when the batch options ask for the files to run as tasks."""
    return jobs is not None or scheduler is not None or results is not None


def refuse_in_batch(**given: Any) -> None:
    """One-line error for options that take a single file (named as on the command line)."""
    for name, value in given.items():
        if value not in (None, False, [], ()):
            flag = "--" + name.replace("_", "-")
            raise InputError(f"{flag} takes one file at a time: not with --jobs, --scheduler, "
                             "--results or --out-dir")


def _clock(seconds: float | None) -> str:
    if seconds is None:
        return "--"
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}" if h else f"{m}:{s:02d}"


def shown(path: str) -> str:
    """A path as short as it can be said: relative to the working folder when below it."""
    rel = os.path.relpath(path)
    return path if rel.startswith("..") else rel


class BatchBar:
    """Progress of a batch on stderr: a bar redrawn in place on a terminal, else a line per file."""

    def __init__(self, what: str, stream: TextIO | None = None, width: int = 28) -> None:
        self.what = what
        self.stream = stream or sys.stderr
        self.tty = self.stream.isatty()
        self.width = width
        self.last: BatchProgress | None = None
        self._drawn = False

    def __call__(self, p: BatchProgress) -> None:
        self.last = p
        if p.last is None:
            skipped = f"{p.skipped} file{'s' if p.skipped != 1 else ''} already in the " \
                      "results file, skipped"
            if not p.total:
                self._line(f"bandwise: {skipped}; nothing left to run")
                return
            self._line(f"bandwise: {self.what} {p.total} file{'s' if p.total != 1 else ''} "
                       f"{p.where}" + (f"; {skipped}" if p.skipped else ""))
            return
        tally = f"{p.done}/{p.total} files"
        if p.errors:
            tally += f", {p.errors} error{'s' if p.errors != 1 else ''}"
        timing = f"{_clock(p.elapsed)} elapsed, ETA {_clock(p.eta)}"
        if self.tty:
            filled = int(self.width * p.done / max(p.total, 1))
            bar = "#" * filled + "-" * (self.width - filled)
            self.stream.write(f"\r[{bar}] {tally}, {timing}\x1b[K")
            self._drawn = True
            if p.done == p.total:
                self.stream.write("\n")
                self._drawn = False
            self.stream.flush()
        else:
            o = p.last
            state = "error" if not o.ok else (o.entry or {}).get("verdict", "done")
            self._line(f"bandwise: [{tally}] {shown(o.file)}: {state}; {timing}")

    def _line(self, text: str) -> None:
        if self._drawn:
            self.stream.write("\n")
            self._drawn = False
        self.stream.write(text + "\n")
        self.stream.flush()

    def interrupted(self, results: Path | None) -> str:
        """What to say when the user stops the batch."""
        done = 0 if self.last is None else self.last.done
        if self._drawn:
            self.stream.write("\n")
        where = (f"; {done} recorded in {results}: run the same command again to resume"
                 if results is not None else "")
        return f"interrupted after {done} file{'s' if done != 1 else ''}{where}"


def run_cli_batch(files: Sequence[Path], task: Callable[[str], Any], what: str, *,
                  jobs: int | None, scheduler: str | None, results: Path | None
                  ) -> BatchResult:
    """Run the batch with the progress bar; Ctrl-C says where the results file stands."""
    bar = BatchBar(what)
    try:
        return run_batch(files, task, jobs=jobs, scheduler=scheduler, results=results,
                         on_progress=bar)
    except KeyboardInterrupt:
        raise InputError(bar.interrupted(results)) from None


def exit_code(result: BatchResult, gate_failed: Callable[[dict[str, Any]], bool]) -> int:
    """2 when a file could not be worked on, else 1 when one fails the gate, else 0."""
    if result.errors:
        return EXIT_CANNOT_RUN
    if any(gate_failed(o.entry) for o in result.outcomes if o.entry is not None):
        return EXIT_FINDINGS
    return EXIT_OK


def _findings_tally(entry: dict[str, Any]) -> str:
    counts: dict[str, int] = {}
    for f in entry.get("findings", []):
        counts[f["severity"]] = counts.get(f["severity"], 0) + 1
    return ", ".join(f"{n} {s}{'s' if n != 1 else ''}" for s, n in counts.items()) or "none"


def _seconds(o: FileOutcome) -> str:
    if o.resumed:
        return "earlier run"
    return "-" if o.seconds is None else _clock(o.seconds) if o.seconds >= 10 \
        else f"{o.seconds:.1f} s"


def check_table(result: BatchResult) -> str:
    """One row per file: verdict, size, current bandwidth and profile (DOF level), findings."""
    rows = []
    for o in result.outcomes:
        if not o.ok:
            rows.append((shown(o.file), "error", "", "", "", "", "", _seconds(o)))
            continue
        e = o.entry
        dofs = e.get("current_numbering", {}).get("dofs", {})
        rows.append((shown(o.file), e.get("verdict", ""), f"{e.get('nodes', 0):,}",
                     f"{e.get('dofs', {}).get('total', 0):,}", f"{dofs.get('bandwidth', 0):,}",
                     f"{dofs.get('profile', 0):,}", _findings_tally(e), _seconds(o)))
    table = render_table(rows, header=("file", "verdict", "nodes", "DOFs", "bandwidth",
                                       "profile", "findings", "time"), align="llrrrrll")
    return "\n".join([table, *_error_lines(result), _tally(result)])


def renumber_table(result: BatchResult) -> str:
    """One row per file: where it went, the ordering chosen and the gain on the objective."""
    rows = []
    for o in result.outcomes:
        if not o.ok:
            rows.append((shown(o.file), "error", "", "", _seconds(o)))
            continue
        comp = o.entry.get("comparison", {})
        chosen = next((m for m in comp.get("methods", []) if m.get("chosen")), {})
        gain = chosen.get("improvement")
        rows.append((shown(o.file), shown(o.entry.get("output", "")), comp.get("chosen", ""),
                     "-" if gain is None else f"{gain:.2f}x", _seconds(o)))
    table = render_table(rows, header=("file", "written", "ordering", "vs original", "time"),
                         align="lllrl")
    return "\n".join([table, *_error_lines(result), _tally(result)])


def _error_lines(result: BatchResult) -> list[str]:
    return [f"error: {o.error}" for o in result.errors]


def _tally(result: BatchResult) -> str:
    n = len(result.outcomes)
    errors = len(result.errors)
    ran = n - result.skipped
    parts = [f"{n} file{'s' if n != 1 else ''}: {n - errors} worked on, {errors} could not be"]
    if result.skipped:
        parts.append(f"{result.skipped} taken from the results file")
    if ran:
        parts.append(f"{ran} run {result.where} in {_clock(result.seconds)}")
    return "; ".join(parts)


def batch_finished(result: BatchResult, table: str, as_json: bool,
                   document: Callable[[], dict[str, Any]], emit: Callable[[dict[str, Any]], None]
                   ) -> None:
    """The summary: the table on stdout (stderr with ``--json``, whose document is on stdout)."""
    if as_json:
        emit(document())
        typer.echo(table, err=True)
    else:
        typer.echo(table)
    if result.dropped_torn_line:
        typer.echo("bandwise: note: a line cut short by an earlier, stopped run was dropped "
                   "from the results file", err=True)


