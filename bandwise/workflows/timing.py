"""The time a comparison of orderings took as the analyst waited for it.

:func:`~bandwise.algorithms.orderings.compare.compare_orderings` times each
ordering after a warm-up run, so its ``seconds`` leave out the one-off
compilation of the compiled kernels (or their loading from the cache).  On
a first run that compilation can take tens of seconds while the ordering
itself takes a millisecond.  :func:`timed_comparison` measures from outside,
around the whole call: the wall time of the comparison, the wall time of each
candidate's step as reported through ``progress`` (warm-up and any compiling
left for the first call, the ordering, measuring its figures and counting its
Cholesky fill), and the time outside those steps, which is mostly loading the
ordering modules: on a first run, before any cache exists, that is where
their kernels are compiled (49 s on the demo bracket on the project's
machine, against 3 s for all the steps).  Nothing in the comparison changes.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from bandwise.algorithms.orderings.compare import ORIGINAL, Comparison, compare_orderings
from bandwise.core.dofs import DofLayout
from bandwise.core.graph import NodeGraph
from bandwise.core.progress import Progress


@dataclass(frozen=True)
class ComparisonTime:
    """Wall-clock time of one comparison of orderings, compilation included.

    Attributes
    ----------
    seconds
        The whole comparison: every candidate, first-call compilation,
        measuring, Cholesky counts.
    by_method
        Method name -> wall seconds of its step, for the candidates whose step
        the comparison reported (``original``: measuring the incoming order).
    """

    seconds: float
    by_method: dict[str, float] = field(default_factory=dict)

    @property
    def loading_seconds(self) -> float:
        """The comparison's time outside the per-method steps: loading the orderings
        (compiling their kernels on a first run) and choosing the best."""
        return max(self.seconds - sum(self.by_method.values()), 0.0)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready: ``wall_seconds``, ``loading_seconds`` and ``wall_seconds_by_method``."""
        return {"wall_seconds": round(self.seconds, 6),
                "loading_seconds": round(self.loading_seconds, 6),
                "wall_seconds_by_method": {k: round(v, 6) for k, v in self.by_method.items()}}


class _StepClock:
    """A :class:`~bandwise.core.progress.Progress` that records each step's time and passes it on."""

    def __init__(self, inner: Progress | None) -> None:
        self.inner = inner
        self.steps: dict[str, float] = {}

    def started(self, label: str) -> None:
        if self.inner is not None:
            self.inner.started(label)

    def finished(self, label: str, seconds: float) -> None:
        self.steps[label] = self.steps.get(label, 0.0) + seconds
        if self.inner is not None:
            self.inner.finished(label, seconds)


def _method_of(label: str, names: set[str]) -> str | None:
    """The candidate a progress step is about: its last word, or the original numbering."""
    words = label.split()
    if words and words[-1] in names:
        return words[-1]
    return ORIGINAL if ORIGINAL in words else None


def timed_comparison(graph: NodeGraph, methods: str | Sequence[str] = "auto",
                     objective: str = "profile", dofs: int | DofLayout = 1,
                     options: dict[str, dict[str, Any]] | None = None,
                     progress: Progress | None = None, *,
                     effort: str = "fast") -> tuple[Comparison, ComparisonTime]:
    """:func:`~bandwise.algorithms.orderings.compare.compare_orderings`, and the wall time it took.

    Arguments are those of ``compare_orderings``; ``progress`` still receives
    every step.  Cost: two clock readings per step.
    """
    clock = _StepClock(progress)
    t0 = time.perf_counter()
    comparison = compare_orderings(graph, methods, objective, dofs, options, clock,
                                   effort=effort)
    total = time.perf_counter() - t0
    names = {r.method for r in comparison.rows}
    by_method: dict[str, float] = {}
    for label, seconds in clock.steps.items():
        name = _method_of(label, names)
        if name is not None:
            by_method[name] = by_method.get(name, 0.0) + seconds
    ordered = {r.method: by_method[r.method] for r in comparison.rows if r.method in by_method}
    return comparison, ComparisonTime(total, ordered)
