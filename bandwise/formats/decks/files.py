"""Deck files in and out of a renumbering: when the deck path applies, its graph, the atomic write."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from bandwise.core.graph import NodeGraph, graph_from_cells
from bandwise.core.model import Model
from bandwise.formats.atomic import write_bytes_atomic

from .deck import Deck, new_ids
from .rewrite import DeckRewrite, renumber_deck


def deck_to_renumber(source: str | os.PathLike[str], out: str | os.PathLike[str],
                     file_format: str | None = None,
                     output_format: str | None = None) -> Deck | None:
    """The deck of ``source`` when renumbering it into ``out`` is done in place, else None.

    The deck path applies when the input is a keyword or bulk-data deck and
    the output is a deck of the same kind, its format not named explicitly
    (``--output-format abaqus`` or ``nastran`` writes through meshio, which
    keeps only the mesh and its sets).
    """
    from . import deck_kind, read_deck

    kind = deck_kind(source, file_format)
    if kind is None or output_format is not None or deck_kind(out) != kind:
        return None
    return read_deck(source, file_format)


def deck_graph(deck: Deck, model: Model) -> NodeGraph:
    """The node graph of a deck's elements plus its rigid links and constraints."""
    from bandwise.core.elements import is_analysed

    from . import deck_links

    blocks: list[NDArray[np.integer]] = [
        b.data for b in model.cells
        if is_analysed(b.type) and b.data.ndim == 2 and b.data.shape[1] > 1 and len(b)]
    return graph_from_cells(blocks + deck_links(deck), model.n_nodes)


def write_renumbered_deck(deck: Deck, perm: NDArray[np.integer],
                          out: str | os.PathLike[str]) -> DeckRewrite:
    """Renumber a deck by ``perm`` (``perm[new] = old``) and write it atomically to ``out``.

    Node ids follow :func:`bandwise.formats.decks.new_ids`; the text is written back
    with the bytes it was read with, every line but the node ids unchanged.
    Before it is renamed into place the written deck is read back with
    bandwise's deck reader and compared with the renumbered mesh: node
    positions in id order, cells, node sets.

    Raises
    ------
    InputError
        The deck cannot be renumbered in place (see :func:`renumber_deck`).
    MeshWriteError
        The file cannot be written, or reads back differently; an existing
        ``out`` is left as it was.
    """
    result = renumber_deck(deck, new_ids(deck.node_ids, perm))
    expected = deck.to_model().renumbered(perm)
    out = Path(out)

    def check(part: Path) -> None:
        from bandwise.core.errors import BandwiseError, MeshWriteError
        from bandwise.formats.mesh_io import compare

        from . import read_deck

        try:
            back = read_deck(part, "abaqus" if deck.kind == "keyword" else "nastran").to_model()
        except BandwiseError as exc:
            raise MeshWriteError(f"{out}: not written: the renumbered deck cannot be read back: "
                                 f"{exc}") from None
        problem = compare(expected, back)
        if problem is None:
            for name, idx in expected.point_sets.items():
                got = back.point_sets.get(name)
                if got is None or not np.array_equal(np.unique(got), np.unique(idx)):
                    problem = f"has node set {name!r} on other nodes"
                    break
        if problem is not None:
            raise MeshWriteError(f"{out}: not written: read back, the renumbered deck {problem}")

    write_bytes_atomic(out, result.text.encode("utf-8", errors="surrogateescape"), check)
    return result


def read_mesh_or_deck(path: str | os.PathLike[str],
                      file_format: str | None = None) -> tuple[Model, Deck | None]:
    """Read a mesh for analysis; a solver input deck through the deck reader.

    The deck reader keeps the original node ids, the boundary-condition
    cards and the rigid links and constraints, which meshio drops.  A deck
    the deck reader refuses (include files, cards it does not rewrite) is
    read through meshio instead, as any other mesh.
    """
    from bandwise.core.errors import BandwiseError
    from bandwise.formats.mesh_io import read_model

    from . import deck_kind, read_deck

    if deck_kind(path, file_format) is not None:
        try:
            deck = read_deck(path, file_format)
            return deck.to_model(), deck
        except BandwiseError:
            pass  # meshio's reader gives the error, or a mesh, as for any file
    return read_model(path, file_format), None
