"""Solver input decks read and renumbered in place, every other line kept as written.

A general mesh reader rewrites a solver deck with its own element keywords
and drops what it does not parse (boundary conditions, loads, materials,
rigid links).  For the keyword deck (``.inp``) and the bulk-data deck
(``.bdf``, ``.nas``, ``.fem``) bandwise instead reads the text itself:

>>> from bandwise.formats.decks import read_deck, new_ids, renumber_deck
>>> deck = read_deck("bracket.inp")                     # doctest: +SKIP
>>> model = deck.to_model()                             # doctest: +SKIP
>>> ids = new_ids(deck.node_ids, perm)                  # doctest: +SKIP
>>> renumber_deck(deck, ids).text                       # doctest: +SKIP

:func:`deck_supports` gives the boundary-condition cards as plain data for
the rigid-body analysis, and :func:`deck_links` the rigid links and
multi-point constraints as extra connectivity for the node graph.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from bandwise.core.dofs import DOF_NAMES
from bandwise.core.errors import MeshReadError

from .bulk_deck import parse_bulk_deck, read_bulk_deck
from .deck import Deck, DeckElements, NodeRef, new_ids
from .keyword_deck import parse_keyword_deck, read_keyword_deck
from .rewrite import DeckRewrite, renumber_deck

#: Registry format names that correspond to a deck kind (their extensions are the registry's).
DECK_FORMATS = {"abaqus": "keyword", "nastran": "bulk"}

__all__ = [
    "DECK_FORMATS", "Deck", "DeckElements", "DeckRewrite", "NodeRef", "deck_kind",
    "deck_links", "deck_supports", "new_ids", "parse_bulk_deck", "parse_keyword_deck",
    "read_deck", "renumber_deck",
]


def deck_kind(path: str | os.PathLike[str], file_format: str | None = None) -> str | None:
    """``"keyword"``, ``"bulk"`` or None: which deck reader a path (or format name) calls for."""
    from bandwise.formats.registry import by_extension

    if file_format is not None:
        return DECK_FORMATS.get(file_format)
    fmt = by_extension(path)
    return None if fmt is None else DECK_FORMATS.get(fmt.name)


def read_deck(path: str | os.PathLike[str], file_format: str | None = None) -> Deck:
    """Read a keyword or bulk-data deck, keeping its text for an in-place renumbering.

    Parameters
    ----------
    path
        A ``.inp``, ``.bdf``, ``.nas`` or ``.fem`` file; opened read-only.
    file_format
        ``"abaqus"`` or ``"nastran"`` to override the extension.

    Raises
    ------
    MeshReadError
        Not a deck path, a missing file, or a deck that cannot be read.
    """
    path = Path(path)
    kind = deck_kind(path, file_format)
    if kind is None:
        raise MeshReadError(f"{path}: not a keyword (.inp) or bulk-data (.bdf, .nas, .fem) deck")
    if not path.is_file():
        raise MeshReadError(f"{path}: no such file")
    return read_keyword_deck(path) if kind == "keyword" else read_bulk_deck(path)


def deck_supports(deck: Deck) -> dict[int, list[str]]:
    """The supports given by the deck's boundary-condition cards.

    Every boundary-condition card is taken, whatever load case or step
    selects it (the union: what can be constrained at all).

    Returns
    -------
    dict
        0-based node index (the order of :meth:`Deck.to_model`) -> constrained
        DOF names, in the order of :data:`bandwise.core.dofs.DOF_NAMES`.
    """
    if not deck.supports:
        return {}
    index = deck.index_of([n for n, _ in deck.supports], "a boundary condition")
    found: dict[int, set[str]] = {}
    for k, (_, dofs) in zip(index.tolist(), deck.supports):
        found.setdefault(k, set()).update(dofs)
    return {k: [d for d in DOF_NAMES if d in names] for k, names in sorted(found.items())
            if names}


def deck_links(deck: Deck) -> list[NDArray[np.int64]]:
    """Rigid links, multi-point constraints and connectors as extra connectivity.

    Each link couples all its nodes (as the condensed stiffness matrix does
    once the constraint is eliminated).  Links of the same node count are
    stacked, so the result is a short list of ``(m, k)`` arrays of 0-based
    node indices, ready for :func:`bandwise.core.graph.graph_from_cells` together
    with the element blocks.
    """
    by_width: dict[int, list[NDArray[np.int64]]] = {}
    for card, ids in deck.links:
        nodes = np.unique(deck.index_of(ids, f"a {card} card"))
        if nodes.size > 1:
            by_width.setdefault(int(nodes.size), []).append(nodes)
    return [np.vstack(group) for _, group in sorted(by_width.items())]
