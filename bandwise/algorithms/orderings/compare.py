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
    cut_short
        Work that was stopped before its end, with the reason (a refinement
        that ran out of its time, a fill count left out for time).
    effort
        The effort asked for (see :data:`EFFORTS`).
    """

    objective: str
    rows: tuple[OrderingResult, ...]
    best: OrderingResult
    fill_note: str = ""
    skipped: dict[str, str] = field(default_factory=dict)
    cut_short: dict[str, str] = field(default_factory=dict)
    effort: str = "fast"

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
            "cut_short": dict(self.cut_short),
            "effort": self.effort,
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
#: Above this many nodes ``auto`` (effort below ``thorough``) leaves out the orderings
#: that another tried ordering beats on the objective (see :func:`_auto_skip_reason`).
AUTO_LARGE = 100_000
#: Efforts: ``fast`` (default) refines the best profile ordering on graphs up to
#: :data:`REFINE_FAST_MAX_NODES` nodes only; ``balanced`` refines on any graph within
#: a time limit; ``thorough`` tries every ordering on any graph and refines longest.
EFFORTS: tuple[str, ...] = ("fast", "balanced", "thorough")
REFINE_FAST_MAX_NODES = 50_000
#: Name of the candidate made by refining the best ordering.
REFINED = "refined"
#: Above this many nodes (objective other than fill) the Cholesky fill is counted for
#: the chosen numbering only: each count costs about an ordering.
FILL_EACH_MAX_NODES = 200_000
#: Graphs from this many nodes have their orderings run on two threads.
PARALLEL_MIN_NODES = 50_000


def _auto_skip_reason(info: OrderingInfo, registry: dict[str, OrderingInfo], n: int,
                      objective: str, effort: str = "fast") -> str | None:
    """Why ``auto`` leaves an ordering out for this graph and objective (None: try it).

    Besides the hard limits, on graphs over :data:`AUTO_LARGE` nodes (effort
    other than ``thorough``) an ordering is left out when another one tried
    is known to beat it on the objective: for the profile and the wavefront,
    GPS (which aims at the bandwidth and gives about RCM's profile), Sloan
    (whose global term spectral-sloan replaces by the spectral order, with
    smaller envelopes: Kumfert and Pothen 1997; measured here on a scrambled
    tetrahedral box of 1,000,000 nodes, 0.94x Sloan's profile, and a random
    Delaunay mesh of 200,000 nodes, 0.33x) and the spectral order itself
    (which spectral-sloan refines: 0.96x and 0.80x on the same meshes); for
    the bandwidth, the spectral orderings (which do not aim at it).
    """
    if info.max_nodes is not None and n > info.max_nodes:
        return f"graph has {n:,} nodes, more than its limit {info.max_nodes:,}"
    large = n > AUTO_LARGE and effort != "thorough"
    if large and objective in ("profile", "wavefront") and "spectral-sloan" in registry:
        if info.name == "gps":
            return (f"on {n:,} nodes, for the {objective}: GPS aims at the bandwidth and its "
                    "profile is about RCM's, which is tried (--effort thorough tries it)")
        if info.name == "sloan":
            return (f"on {n:,} nodes, for the {objective}: spectral-sloan, tried, replaces "
                    "Sloan's distance term by the spectral order and beats it (Kumfert and "
                    "Pothen 1997; --effort thorough tries it)")
        if info.name == "spectral":
            return (f"on {n:,} nodes, for the {objective}: spectral-sloan, tried, starts from "
                    "the spectral order and refines it locally (Kumfert and Pothen 1997; "
                    "--effort thorough tries it)")
    if large and objective == "bandwidth" and info.name in ("spectral", "spectral-sloan"):
        return (f"on {n:,} nodes, for the bandwidth: spectral orderings do not aim at it "
                "(--effort thorough tries them)")
    if info.objective == "fill" and objective != "fill" and n > AUTO_FILL_ORDERINGS_MAX_NODES:
        return (f"a fill-reducing ordering widens the envelope; on {n:,} nodes it is tried "
                "for --objective fill, or when named")
    if info.name == "cm" and "rcm" in registry and objective == "profile":
        return ("reversing Cuthill-McKee never increases the profile (Liu and Sherman 1976): "
                "rcm is tried instead")
    return None


def _resolve_methods(methods: str | Sequence[str], n: int, objective: str = "profile",
                     effort: str = "fast") -> tuple[list[OrderingInfo], dict[str, str]]:
    """The orderings to try, and those ``auto`` skipped (name -> reason)."""
    registry, broken = _registry()
    if isinstance(methods, str):
        if methods == "auto":
            chosen, skipped = [], dict(broken)
            for name in sorted(registry):
                reason = _auto_skip_reason(registry[name], registry, n, objective, effort)
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
                broken[mod.name] = f"module could not be loaded: {one_line(exc, named=True)}"
    return ORDERINGS, broken


def _dof_arg(dofs: int | DofLayout) -> int | NDArray[np.int64]:
    """DOFs per node as the Cholesky counter takes them: an int or one count per node."""
    if isinstance(dofs, DofLayout):
        uniform = dofs.uniform
        return uniform if uniform is not None else dofs.per_node
    return int(dofs)


def _candidate(graph: NodeGraph, method: str, order: Callable[[], NDArray[np.integer]],
               dofs: int | DofLayout, fill: Callable[..., int] | None) -> OrderingResult:
    """Run one ordering, time it, and measure what it gives (errors become a row)."""
    t0 = time.perf_counter()
    try:
        perm = check_permutation(order(), graph.n)
    except Exception as exc:  # noqa: BLE001 - a failing method is reported, not raised
        return OrderingResult(method, None, None, None, None, time.perf_counter() - t0,
                              error=one_line(exc, named=True))
    seconds = time.perf_counter() - t0 if method != ORIGINAL else 0.0
    node_level = metrics(graph, perm)
    dof_level = metrics(graph, perm, dofs=dofs) if not _is_one(dofs) else node_level
    nnz = None
    if fill is not None:
        try:
            nnz = int(fill(graph, perm, _dof_arg(dofs)))
        except Exception as exc:  # noqa: BLE001 - reported on the row
            return OrderingResult(method, perm, node_level, dof_level, None, seconds,
                                  error=f"Cholesky count failed: {one_line(exc, named=True)}")
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
                      fill_max_nodes: int = FILL_MAX_NODES, *,
                      effort: str = "fast") -> Comparison:
    """Try orderings on a graph and choose the best for ``objective``.

    Parameters
    ----------
    graph
        The node graph, current numbering.
    methods
        ``"auto"`` (every registered ordering whose ``max_nodes`` admits the
        graph, except those that cannot win the objective: a fill-reducing
        ordering for an envelope objective on a large graph, Cuthill-McKee
        beside its reverse for the profile, and on large graphs the
        orderings another tried one beats, see :func:`_auto_skip_reason`), a
        comma-separated string, or a list of registered names.
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
    effort
        ``"fast"``, ``"balanced"`` or ``"thorough"`` (:data:`EFFORTS`): how
        much time to spend beyond the orderings themselves.  With ``auto``
        and the profile, the best numbering is refined (:mod:`bandwise.algorithms.orderings.refine`:
        Sloan steered by it and by the runners-up under several weights,
        then node moves and, from ``balanced`` on, annealing of them) into a
        candidate named ``refined``: with ``fast`` on graphs up to
        :data:`REFINE_FAST_MAX_NODES` nodes, with ``balanced`` on any graph
        (over :data:`REFINE_FAST_MAX_NODES` nodes within a time limit of
        about the orderings' own time), with ``thorough`` longer and after
        every ordering was tried.

    Returns
    -------
    Comparison
        With ``skipped`` (orderings not tried and why) and ``cut_short``
        (work stopped before its end and why).

    Raises
    ------
    InputError
        Unknown method, objective or effort (the message lists the valid
        ones); objective ``fill`` without the symbolic factorisation module;
        a graph with no nodes.

    Notes
    -----
    Cost: the orderings themselves (on two threads from
    :data:`PARALLEL_MIN_NODES` nodes: the compiled kernels release the
    interpreter lock), plus O(n + nnz) per candidate for the metrics and the
    symbolic factorisation's cost when fill is counted.
    """
    if objective not in OBJECTIVES:
        raise InputError(f"unknown objective {objective!r}; valid: {', '.join(OBJECTIVES)}")
    if effort not in EFFORTS:
        raise InputError(f"unknown effort {effort!r}; valid: {', '.join(EFFORTS)}")
    if graph.n == 0:
        raise InputError("the graph has no nodes: nothing to number")
    infos, skipped = _resolve_methods(methods, graph.n, objective, effort)
    options = options or {}
    fill, fill_note = _fill_setup(graph.n, objective, fill_max_nodes)
    cut_short: dict[str, str] = {}
    fill_each = fill
    if fill is not None and objective != "fill" and graph.n > FILL_EACH_MAX_NODES:
        fill_each = None
        cut_short["cholesky_nnz"] = (f"on {graph.n:,} nodes the Cholesky fill is counted for "
                                     "the chosen numbering only (each count costs about as "
                                     "much as an ordering)")
    rows = []
    with step(progress, "measuring the original numbering"):
        rows.append(_candidate(graph, ORIGINAL, lambda: identity(graph), dofs, fill_each))
    for info in infos:
        _warm_up(info, dict(options.get(info.name, {})))
    rows.extend(_run_all(graph, infos, options, dofs, fill_each, progress))
    comparison = _chosen(rows, objective, fill_note, skipped)
    if objective == "profile" and methods == "auto" and _refines(graph.n, effort):
        # a step's label ends with the row it is timed under (workflows.timing)
        with step(progress, f"refining {comparison.best.method} ({effort} effort) into {REFINED}"):
            refined_row, why = _refined_row(graph, comparison.best, rows, dofs, fill_each,
                                            effort)
        if why:
            cut_short[REFINED] = why
        if refined_row is not None:
            rows.append(refined_row)
            comparison = _chosen(rows, objective, fill_note, skipped)
    if fill_each is None and fill is not None:
        with step(progress, f"counting the Cholesky fill of {comparison.best.method}"):
            rows = [_with_fill(graph, r, dofs, fill) if r is comparison.best else r
                    for r in comparison.rows]
        comparison = _chosen(rows, objective, fill_note, skipped)
    return Comparison(comparison.objective, comparison.rows, comparison.best,
                      comparison.fill_note, comparison.skipped, cut_short, effort)


def _refines(n: int, effort: str) -> bool:
    """Whether the best numbering is refined on a graph of ``n`` nodes."""
    return effort != "fast" or n <= REFINE_FAST_MAX_NODES


def _refined_row(graph: NodeGraph, best: OrderingResult, rows: list[OrderingResult],
                 dofs: int | DofLayout, fill: Callable[..., int] | None,
                 effort: str) -> tuple[OrderingResult | None, str]:
    """The refinement of ``best`` as a candidate, and why it was cut short ('' if not).

    The other rows, least profile first, go along as runners-up (with more
    effort they are refined too: :data:`bandwise.algorithms.orderings.refine.STARTS`).
    """
    from .refine import refined

    if best.perm is None:
        return None, ""
    spent = sum(r.seconds for r in rows)
    limit = None
    if graph.n > REFINE_FAST_MAX_NODES:
        limit = max(2.0, (4.0 if effort == "thorough" else 1.0) * spent)
    result: list[Any] = []

    others = [r.perm for r in sorted((r for r in rows if r.ok and r.method != best.method
                                      and r.perm is not None and r.dofs is not None),
                                     key=lambda r: (r.dofs.profile, r.method))]

    def order() -> NDArray[np.int64]:
        result.append(refined(graph, best.perm, effort, seconds=limit, others=others))
        return result[0].perm

    row = _candidate(graph, REFINED, order, dofs, fill)
    why = ""
    if result and result[0].stopped == "time":
        why = (f"stopped after {result[0].seconds:.1f} s, its time limit ({limit:.1f} s, about "
               f"the orderings' own time, effort {effort}); {result[0].trials} Sloan trials")
    return row, why


def _with_fill(graph: NodeGraph, row: OrderingResult, dofs: int | DofLayout,
               fill: Callable[..., int]) -> OrderingResult:
    """``row`` with its Cholesky fill counted."""
    if row.perm is None or row.fill is not None:
        return row
    try:
        nnz = int(fill(graph, row.perm, _dof_arg(dofs)))
    except Exception as exc:  # noqa: BLE001 - reported on the row
        return OrderingResult(row.method, row.perm, row.nodes, row.dofs, None, row.seconds,
                              row.improvement, f"Cholesky count failed: {one_line(exc, named=True)}")
    return OrderingResult(row.method, row.perm, row.nodes, row.dofs, nnz, row.seconds,
                          row.improvement, row.error)


def _run_all(graph: NodeGraph, infos: list[OrderingInfo], options: dict[str, dict[str, Any]],
             dofs: int | DofLayout, fill: Callable[..., int] | None,
             progress: Progress | None) -> list[OrderingResult]:
    """Run and measure every ordering, in the order asked, on two threads for large graphs.

    The spectral orderings share one Fiedler vector, so they run one after
    the other on one thread; every other ordering is a task of its own.
    """
    def task(chain: list[OrderingInfo]) -> list[OrderingResult]:
        out = []
        for info in chain:
            opts = dict(options.get(info.name, {}))
            with step(progress, f"ordering {info.name}"):
                out.append(_candidate(graph, info.name,
                                      lambda info=info, opts=opts: info.func(graph, **opts),
                                      dofs, fill))
        return out

    spectral = [i for i in infos if i.name.startswith("spectral")]
    chains = ([spectral] if spectral else []) + [[i] for i in infos if i not in spectral]
    if graph.n < PARALLEL_MIN_NODES or len(chains) < 2:
        done = [r for chain in chains for r in task(chain)]
    else:
        from concurrent.futures import ThreadPoolExecutor

        with ThreadPoolExecutor(max_workers=2, thread_name_prefix="bandwise-order") as pool:
            futures = [pool.submit(task, chain) for chain in chains]
            done = [r for f in futures for r in f.result()]
    rank = {info.name: k for k, info in enumerate(infos)}
    return sorted(done, key=lambda r: rank[r.method])


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
