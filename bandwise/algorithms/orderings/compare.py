"""Try several node orderings on one graph and keep the best for an objective.

The original numbering is always a candidate, named ``original``, so the
numbering chosen is never worse than the one that came in.  Each candidate
gets its permutation, node- and DOF-level :class:`~bandwise.core.metrics.Metrics`,
the number of nonzeros of the Cholesky factor when it can be counted in
reasonable time, the time its ordering took, and its improvement over the
original (original value / its value: 2.0 means half).

Objectives (all at DOF level, which is what the solver factorises):

==========  ===========================================  ===================
objective   minimised                                    ties broken by
==========  ===========================================  ===================
bandwidth   semi-bandwidth                               profile
profile     profile (envelope size)                      bandwidth
wavefront   RMS wavefront                                maximum wavefront
fill        nonzeros of the Cholesky factor (diagonal)   profile
==========  ===========================================  ===================

Remaining ties go to the original numbering (no change for no gain), then to
the methods in the order they were asked for (``auto``: by name).  The
definitions are those of :mod:`bandwise.core.metrics` (George and Liu 1981).

References
----------
A. George and J. W. H. Liu, *Computer Solution of Large Sparse Positive
Definite Systems*, Prentice-Hall, 1981.
G. C. Everstine, "A comparison of three resequencing algorithms for the
reduction of matrix profile and wavefront", Int. J. Numer. Meth. Eng. 14
(1979) 837-853 (comparing orderings by profile, wavefront and bandwidth).
"""

from __future__ import annotations

import contextlib
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DofLayout
from bandwise.core.errors import InputError, one_line
from bandwise.core.graph import NodeGraph, graph_from_cells
from bandwise.core.metrics import Metrics, metrics
from bandwise.core.model import check_permutation
from bandwise.core.progress import Progress, step

from . import ORDERINGS, OrderingInfo, identity

#: Objectives a comparison can minimise.
OBJECTIVES: tuple[str, ...] = ("bandwidth", "profile", "wavefront", "fill")
#: Name of the candidate that keeps the numbering as it came in.
ORIGINAL = "original"
#: Largest graph on which the Cholesky fill is counted when fill is not the objective.
FILL_MAX_NODES = 2_000_000


@dataclass(frozen=True)
class OrderingResult:
    """One candidate numbering and its figures.

    Attributes
    ----------
    method
        Registered ordering name, or ``original``.
    perm
        New order ``perm[new] = old`` (None if the method failed).
    nodes, dofs
        Metrics at node and DOF level (None if the method failed).
    fill
        Nonzeros of the Cholesky factor at DOF level, diagonal included, or
        None when not counted (see :attr:`Comparison.fill_note`).
    seconds
        Time the ordering took, one-off compilation excluded (the original: 0).
    improvement
        Original objective value / this one (> 1 is better; 1.0 for the original).
    error
        Why the method failed, or None.
    """

    method: str
    perm: NDArray[np.int64] | None
    nodes: Metrics | None
    dofs: Metrics | None
    fill: int | None
    seconds: float
    improvement: float | None = None
    error: str | None = None

    @property
    def ok(self) -> bool:
        """True when the method produced a numbering."""
        return self.error is None

    def value(self, objective: str) -> float | None:
        """The objective's value for this candidate (None if unavailable)."""
        if self.dofs is None:
            return None
        if objective == "fill":
            return None if self.fill is None else float(self.fill)
        return float(_primary(self.dofs, objective))

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready figures (the permutation is left out)."""
        return {
            "method": self.method,
            "error": self.error,
            "seconds": round(self.seconds, 6),
            "improvement": self.improvement,
            "cholesky_nnz": self.fill,
            "nodes": None if self.nodes is None else self.nodes.to_dict(),
            "dofs": None if self.dofs is None else self.dofs.to_dict(),
        }

    def __repr__(self) -> str:
        if self.error is not None:
            return f"OrderingResult({self.method!r}, failed: {self.error})"
        d = self.dofs
        assert d is not None
        fill = "" if self.fill is None else f", fill={self.fill}"
        return (f"OrderingResult({self.method!r}, bandwidth={d.bandwidth}, profile={d.profile}, "
                f"rms_wavefront={d.rms_wavefront:.2f}{fill}, {self.seconds:.3f} s)")


@dataclass(frozen=True)
class Comparison:
    """Every candidate numbering of a graph and the one chosen.

    Attributes
    ----------
    objective
        What was minimised (see :data:`OBJECTIVES`).
    rows
        One :class:`OrderingResult` per method, ``original`` first.
    best
        The chosen candidate (never worse than ``original``).
    fill_note
        Whether and why the Cholesky fill was or was not counted.
    skipped
        Registered orderings ``auto`` left out, with the reason.
    """

    objective: str
    rows: tuple[OrderingResult, ...]
    best: OrderingResult
    fill_note: str = ""
    skipped: dict[str, str] = field(default_factory=dict)

    @property
    def original(self) -> OrderingResult:
        """The candidate that keeps the incoming numbering."""
        return self.rows[0]

    def table(self) -> list[dict[str, Any]]:
        """One flat dict per candidate, DOF-level figures (for notebooks and reports)."""
        out = []
        for r in self.rows:
            d = r.dofs
            out.append({
                "method": r.method,
                "chosen": r is self.best,
                "bandwidth": None if d is None else d.bandwidth,
                "profile": None if d is None else d.profile,
                "max_wavefront": None if d is None else d.max_wavefront,
                "rms_wavefront": None if d is None else d.rms_wavefront,
                "banded_bytes": None if d is None else d.banded_bytes,
                "skyline_bytes": None if d is None else d.skyline_bytes,
                "cholesky_nnz": r.fill,
                "seconds": r.seconds,
                "improvement": r.improvement,
                "error": r.error,
            })
        return out

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready comparison: objective, chosen method, every candidate."""
        return {
            "objective": self.objective,
            "objective_level": "dofs",
            "chosen": self.best.method,
            "fill": self.fill_note,
            "skipped": dict(self.skipped),
            "methods": [dict(r.to_dict(), chosen=r is self.best) for r in self.rows],
        }

    def __repr__(self) -> str:
        value = self.best.value(self.objective)
        return (f"Comparison(objective={self.objective!r}, {len(self.rows)} candidates, "
                f"best={self.best.method!r} ({self.objective} {value:g}, "
                f"x{self.best.improvement or 1.0:.3g} better than original))")


def _primary(m: Metrics, objective: str) -> float:
    return {"bandwidth": m.bandwidth, "profile": m.profile,
            "wavefront": m.rms_wavefront}[objective]


def _sort_key(row: OrderingResult, objective: str, rank: int) -> tuple[float, float, int]:
    """Objective value, tie-break value, request rank: smaller is better."""
    d = row.dofs
    assert d is not None
    if objective == "bandwidth":
        return (d.bandwidth, d.profile, rank)
    if objective == "profile":
        return (d.profile, d.bandwidth, rank)
    if objective == "wavefront":
        return (d.rms_wavefront, d.max_wavefront, rank)
    assert row.fill is not None
    return (row.fill, d.profile, rank)


def _fill_counter() -> Callable[..., int] | None:
    """``bandwise.algorithms.orderings.symbolic.cholesky_nnz`` if that module is present, else None."""
    try:
        from .symbolic import cholesky_nnz
    except ImportError:
        return None
    return cholesky_nnz


#: Above this many nodes ``auto`` tries fill-reducing orderings only for objective fill.
AUTO_FILL_ORDERINGS_MAX_NODES = 100_000


def _auto_skip_reason(info: OrderingInfo, registry: dict[str, OrderingInfo], n: int,
                      objective: str) -> str | None:
    """Why ``auto`` leaves an ordering out for this graph and objective (None: try it)."""
    if info.max_nodes is not None and n > info.max_nodes:
        return f"graph has {n:,} nodes, more than its limit {info.max_nodes:,}"
    if info.objective == "fill" and objective != "fill" and n > AUTO_FILL_ORDERINGS_MAX_NODES:
        return (f"a fill-reducing ordering widens the envelope; on {n:,} nodes it is tried "
                "for --objective fill, or when named")
    if info.name == "cm" and "rcm" in registry and objective == "profile":
        return ("reversing Cuthill-McKee never increases the profile (Liu and Sherman 1976): "
                "rcm is tried instead")
    return None


def _resolve_methods(methods: str | Sequence[str], n: int,
                     objective: str = "profile") -> tuple[list[OrderingInfo], dict[str, str]]:
    """The orderings to try, and those ``auto`` skipped (name -> reason)."""
    registry, broken = _registry()
    if isinstance(methods, str):
        if methods == "auto":
            chosen, skipped = [], dict(broken)
            for name in sorted(registry):
                reason = _auto_skip_reason(registry[name], registry, n, objective)
                if reason is None:
                    chosen.append(registry[name])
                else:
                    skipped[name] = reason
            return chosen, skipped
        methods = [m.strip() for m in methods.split(",") if m.strip()]
    valid = sorted(registry)
    unknown = [m for m in methods if m not in registry and m != ORIGINAL]
    if unknown or not methods:
        raise InputError(
            f"unknown ordering {', '.join(map(repr, unknown)) or '(none given)'}; "
            f"valid: auto, {ORIGINAL}, {', '.join(valid) or '(none registered)'}")
    seen: list[str] = []
    for m in methods:
        if m != ORIGINAL and m not in seen:
            seen.append(m)
    return [registry[m] for m in seen], {}


def _registry() -> tuple[dict[str, OrderingInfo], dict[str, str]]:
    """Every registered ordering, importing the ordering modules one by one.

    A module that fails to import is reported (module name -> reason) instead
    of taking the others down with it.
    """
    import importlib
    import pkgutil

    from bandwise.algorithms import orderings

    broken = {}
    for mod in pkgutil.iter_modules(orderings.__path__):
        if not mod.name.startswith("_"):
            try:
                importlib.import_module(f"{orderings.__name__}.{mod.name}")
            except Exception as exc:  # noqa: BLE001 - reported, the others still run
                broken[mod.name] = f"module could not be loaded: {_one_line(exc)}"
    return ORDERINGS, broken


def _dof_arg(dofs: int | DofLayout) -> int | NDArray[np.int64]:
    """DOFs per node as the Cholesky counter takes them: an int or one count per node."""
    if isinstance(dofs, DofLayout):
        uniform = dofs.uniform
        return uniform if uniform is not None else dofs.per_node
    return int(dofs)


def _one_line(exc: BaseException) -> str:
    """The exception's name and message on one line (an ordering's failure in its row)."""
    text = one_line(exc, limit=10_000)
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def _candidate(graph: NodeGraph, method: str, order: Callable[[], NDArray[np.integer]],
               dofs: int | DofLayout, fill: Callable[..., int] | None) -> OrderingResult:
    """Run one ordering, time it, and measure what it gives (errors become a row)."""
    t0 = time.perf_counter()
    try:
        perm = check_permutation(order(), graph.n)
    except Exception as exc:  # noqa: BLE001 - a failing method is reported, not raised
        return OrderingResult(method, None, None, None, None, time.perf_counter() - t0,
                              error=_one_line(exc))
    seconds = time.perf_counter() - t0 if method != ORIGINAL else 0.0
    node_level = metrics(graph, perm)
    dof_level = metrics(graph, perm, dofs=dofs) if not _is_one(dofs) else node_level
    nnz = None
    if fill is not None:
        try:
            nnz = int(fill(graph, perm, _dof_arg(dofs)))
        except Exception as exc:  # noqa: BLE001 - reported on the row
            return OrderingResult(method, perm, node_level, dof_level, None, seconds,
                                  error=f"Cholesky count failed: {_one_line(exc)}")
    return OrderingResult(method, perm, node_level, dof_level, nnz, seconds)


def _is_one(dofs: int | DofLayout) -> bool:
    return not isinstance(dofs, DofLayout) and int(dofs) == 1


def _improvement(original: float | None, value: float | None) -> float | None:
    if original is None or value is None:
        return None
    if value == 0:
        return 1.0 if original == 0 else None
    return float(original) / float(value)


def compare_orderings(graph: NodeGraph, methods: str | Sequence[str] = "auto",
                      objective: str = "profile", dofs: int | DofLayout = 1,
                      options: dict[str, dict[str, Any]] | None = None,
                      progress: Progress | None = None,
                      fill_max_nodes: int = FILL_MAX_NODES) -> Comparison:
    """Try orderings on a graph and choose the best for ``objective``.

    Parameters
    ----------
    graph
        The node graph, current numbering.
    methods
        ``"auto"`` (every registered ordering whose ``max_nodes`` admits the
        graph, except those that cannot win the objective: a fill-reducing
        ordering for an envelope objective on a large graph, and Cuthill-McKee
        beside its reverse for the profile), a comma-separated string, or a
        list of registered names.
        ``original`` is always included, first.
    objective
        One of :data:`OBJECTIVES`; measured at DOF level.
    dofs
        DOFs per node: an int or a :class:`~bandwise.core.dofs.DofLayout`.
    options
        Keyword options per method, e.g. ``{"sloan": {"w1": 2.0, "w2": 1.0}}``.
    progress
        Receives one step per method (the library never prints).
    fill_max_nodes
        The Cholesky fill is counted on larger graphs only when it is the objective.

    Returns
    -------
    Comparison

    Raises
    ------
    InputError
        Unknown method or objective (the message lists the valid ones);
        objective ``fill`` without the symbolic factorisation module; a graph
        with no nodes.

    Notes
    -----
    Cost: the orderings themselves, plus O(n + nnz) per candidate for the
    metrics and the symbolic factorisation's cost when fill is counted.
    """
    if objective not in OBJECTIVES:
        raise InputError(f"unknown objective {objective!r}; valid: {', '.join(OBJECTIVES)}")
    if graph.n == 0:
        raise InputError("the graph has no nodes: nothing to number")
    infos, skipped = _resolve_methods(methods, graph.n, objective)
    options = options or {}
    fill, fill_note = _fill_setup(graph.n, objective, fill_max_nodes)
    rows = []
    with step(progress, "measuring the original numbering"):
        rows.append(_candidate(graph, ORIGINAL, lambda: identity(graph), dofs, fill))
    for info in infos:
        opts = dict(options.get(info.name, {}))
        with step(progress, f"ordering {info.name}"):
            _warm_up(info, opts)
            rows.append(_candidate(graph, info.name,
                                   lambda info=info, opts=opts: info.func(graph, **opts),
                                   dofs, fill))
    return _chosen(rows, objective, fill_note, skipped)


def _warm_up(info: OrderingInfo, opts: dict[str, Any]) -> None:
    """Run an ordering once on a 6-node ring so one-off compilation is not timed.

    Compiled kernels are built (or loaded from their cache) on first call;
    the time reported for a method is then its ordering time alone.  A
    failure here is ignored: the real run reports it.
    """
    ring = np.arange(6)
    with contextlib.suppress(Exception):
        info.func(graph_from_cells([np.c_[ring, np.roll(ring, -1)]], 6), **opts)


def _fill_setup(n: int, objective: str,
                fill_max_nodes: int) -> tuple[Callable[..., int] | None, str]:
    """The Cholesky counter to use (or None) and a sentence saying why."""
    counter = _fill_counter()
    if counter is None:
        if objective == "fill":
            raise InputError("objective 'fill' needs the symbolic factorisation module "
                             "(bandwise.algorithms.orderings.symbolic), which this installation lacks")
        return None, "not counted: the symbolic factorisation module is not available"
    if objective != "fill" and n > fill_max_nodes:
        return None, (f"not counted: {n:,} nodes is more than {fill_max_nodes:,} "
                      "(choose objective 'fill' to count it anyway)")
    return counter, "nonzeros of the Cholesky factor at DOF level, diagonal included"


def _chosen(rows: list[OrderingResult], objective: str, fill_note: str,
            skipped: dict[str, str]) -> Comparison:
    """Fill in improvements and pick the best candidate deterministically."""
    base = rows[0].value(objective)
    rows = [OrderingResult(r.method, r.perm, r.nodes, r.dofs, r.fill, r.seconds,
                           _improvement(base, r.value(objective)) if r.ok else None, r.error)
            for r in rows]
    usable = [(k, r) for k, r in enumerate(rows) if r.ok and r.value(objective) is not None]
    if not usable:  # the original failed to measure: cannot happen for a valid graph
        raise InputError(f"no candidate could be measured for objective {objective!r}")
    best = min(usable, key=lambda kr: _sort_key(kr[1], objective, kr[0]))[1]
    return Comparison(objective, tuple(rows), best, fill_note, skipped)
