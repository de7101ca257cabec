"""Node orderings: each a module of its own, each returning a permutation.

Every ordering takes a :class:`~bandwise.core.graph.NodeGraph` and returns
``perm`` with ``perm[new] = old`` (see :mod:`bandwise.core.model`).  Orderings
work per connected part, parts placed one after another, so a mesh in
several pieces is numbered piece by piece.

Orderings register themselves in :data:`ORDERINGS` with :func:`register`;
``bandwise renumber --method auto`` tries every registered one whose
``max_nodes`` admits the graph.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph

Ordering = Callable[..., NDArray[np.int64]]


@dataclass(frozen=True)
class OrderingInfo:
    """A registered ordering.

    Attributes
    ----------
    name
        Name used on the command line (``rcm``, ``sloan`` ...).
    func
        ``func(graph, **options) -> perm``.
    summary
        One line saying what it is and where it comes from.
    objective
        What it mainly reduces: ``bandwidth``, ``profile``, ``wavefront`` or ``fill``.
    max_nodes
        Largest graph ``auto`` tries it on (None: no limit).
    """

    name: str
    func: Ordering
    summary: str
    objective: str
    max_nodes: int | None = None


ORDERINGS: dict[str, OrderingInfo] = {}


def register(name: str, summary: str, objective: str,
             max_nodes: int | None = None) -> Callable[[Ordering], Ordering]:
    """Decorator adding an ordering function to :data:`ORDERINGS`."""

    def wrap(func: Ordering) -> Ordering:
        ORDERINGS[name] = OrderingInfo(name, func, summary, objective, max_nodes)
        return func

    return wrap


def identity(graph: NodeGraph) -> NDArray[np.int64]:
    """The current numbering, as a permutation."""
    return np.arange(graph.n, dtype=np.int64)


def load_all() -> dict[str, OrderingInfo]:
    """Import every ordering module so that each registers itself."""
    import importlib
    import pkgutil

    for info in pkgutil.iter_modules(__path__):
        if not info.name.startswith("_"):
            importlib.import_module(f"{__name__}.{info.name}")
    return ORDERINGS
