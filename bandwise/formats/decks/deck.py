"""What a solver input deck holds that matters to numbering, and where its node ids are written.

A :class:`Deck` is read by :mod:`bandwise.formats.decks.keyword_deck` (``.inp``) or
:mod:`bandwise.formats.decks.bulk_deck` (``.bdf``, ``.nas``, ``.fem``).  Besides the
mesh (nodes, elements, node sets) it keeps the original text and the exact
place of every node id written in it (:class:`NodeRef`), so that a
renumbering rewrites those numbers in place and leaves every other byte as
it was: materials, properties, steps, loads on elements, comments.

Node ids after renumbering
--------------------------
bandwise keeps the deck's own set of node ids and permutes their
assignment: the node at new position ``k`` (0-based) receives the
``k``-th smallest original id.  When the ids are ``1..n`` (the usual case)
this is simply "new id = 1-based new position"; when they are not
contiguous (ids per part, gaps left by a mesher) every id still names
exactly one node, id ranges reserved by other tools stay free, and every
number still fits the field it was written in.  See :func:`new_ids`.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from bandwise.core.errors import MeshReadError
from bandwise.core.model import CellBlock, Model, check_permutation


@dataclass(frozen=True)
class NodeRef:
    """One node id written in the deck text.

    Attributes
    ----------
    line
        0-based line index in :attr:`Deck.lines`.
    start, end
        Character span of the field or token holding the number (for a
        fixed-width field, the whole field).
    node_id
        The id written there.
    card
        Name of the card or keyword the reference belongs to (upper case).
    width
        Field width for fixed-width bulk fields (8 or 16), else 0.
    """

    line: int
    start: int
    end: int
    node_id: int
    card: str
    width: int = 0


class NodeRefs:
    """Every node id written in a deck: columns of line, span, id, field width and card.

    Filled one reference at a time (:meth:`add`) or a table at a time
    (:meth:`add_block`); iterating gives :class:`NodeRef` values.
    """

    def __init__(self) -> None:
        self.cards: list[str] = []
        self._card_index: dict[str, int] = {}
        self._single: list[tuple[int, int, int, int, int, int]] = []
        self._blocks: list[tuple[NDArray[np.int64], ...]] = []
        self._frozen: tuple[NDArray[np.int64], ...] | None = None

    def _card(self, card: str) -> int:
        if card not in self._card_index:
            self._card_index[card] = len(self.cards)
            self.cards.append(card)
        return self._card_index[card]

    def add(self, line: int, start: int, end: int, node_id: int, card: str, width: int = 0) -> None:
        """One reference."""
        self._single.append((line, start, end, node_id, width, self._card(card)))
        self._frozen = None

    def add_block(self, lines: NDArray[np.integer], start: NDArray[np.integer],
                  end: NDArray[np.integer], node_id: NDArray[np.integer], card: str,
                  width: int = 0) -> None:
        """Many references of one card at once (arrays of the same shape)."""
        cols = [np.asarray(a, dtype=np.int64).ravel() for a in (lines, start, end, node_id)]
        n = cols[0].size
        cols += [np.full(n, width, dtype=np.int64), np.full(n, self._card(card), dtype=np.int64)]
        self._blocks.append(tuple(cols))
        self._frozen = None

    def columns(self) -> tuple[NDArray[np.int64], ...]:
        """(line, start, end, node_id, width, card index), each one array over all references."""
        if self._frozen is None:
            parts = list(self._blocks)
            if self._single:
                single = np.asarray(self._single, dtype=np.int64).reshape(-1, 6)
                parts.append(tuple(single[:, c] for c in range(6)))
            if not parts:
                self._frozen = tuple(np.zeros(0, dtype=np.int64) for _ in range(6))
            else:
                self._frozen = tuple(np.concatenate([p[c] for p in parts]) for c in range(6))
        return self._frozen

    def __len__(self) -> int:
        return int(self.columns()[0].size)

    def __iter__(self) -> Iterator[NodeRef]:
        line, start, end, ids, width, card = self.columns()
        for k in range(line.size):
            yield NodeRef(int(line[k]), int(start[k]), int(end[k]), int(ids[k]),
                          self.cards[int(card[k])], int(width[k]))


@dataclass(frozen=True)
class DeckElements:
    """Elements of one deck element type, in file order.

    Attributes
    ----------
    card
        The deck's element name (``C3D8R``, ``CHEXA`` ...).
    cell_type
        meshio cell type the connectivity follows (node order converted).
    element_ids
        Element ids as written.
    connectivity
        ``(m, k)`` node ids (not indices) per element.
    """

    card: str
    cell_type: str
    element_ids: NDArray[np.int64]
    connectivity: NDArray[np.int64]


@dataclass(frozen=True)
class ListRewrite:
    """A card that lists nodes as an id range: written out in full after renumbering.

    A range (``GENERATE``, ``THRU``) no longer describes a set of nodes once
    they are renumbered, so the card is replaced by an explicit list.

    Attributes
    ----------
    card
        Card or keyword name.
    lines
        Line indices the card occupies; the first receives the new text,
        the others are emptied.
    head
        Keyword deck: the keyword line without its range option.  Bulk deck:
        the card's leading fields (name, set id, components) before the grids.
    node_ids
        The ids listed, in range order.
    kind
        ``"keyword"`` or ``"bulk"``.
    """

    card: str
    lines: tuple[int, ...]
    head: tuple[str, ...]
    node_ids: NDArray[np.int64]
    kind: str


@dataclass
class Deck:
    """A solver input deck: its text, its mesh, and where its node ids are written.

    Attributes
    ----------
    path
        The file read.
    kind
        ``"keyword"`` (``.inp``) or ``"bulk"`` (``.bdf``/``.nas``/``.fem``).
    lines
        The text, one string per line, line endings kept.
    node_ids, points
        Node ids in ascending order (the deck's numbering) and their
        coordinates as written.
    elements
        Element blocks, one per deck element type.
    node_sets
        Named node sets: name -> node ids.
    supports
        Boundary-condition cards: (node id, DOF names) pairs, in file order.
    links
        Rigid links and multi-point constraints: (card, node ids) groups.
    link_dofs
        DOF components a link ties, where its card gives them (RBE2's CM
        digits, 1-6), by index into ``links``.
    loads
        Load cards naming nodes: (card, node id) pairs.
    refs
        Every node id written in the text that a renumbering rewrites.
    list_rewrites
        Cards that list nodes as id ranges.
    unhandled
        Cards that may name nodes but whose node fields are not rewritten:
        name -> count.  :func:`bandwise.formats.decks.renumber_deck` refuses a deck
        with any.
    includes
        Files named by include cards (read for the mesh, never rewritten).
    notes
        Remarks made while reading (ignored options, assumptions).
    """

    path: str
    kind: str
    lines: list[str]
    node_ids: NDArray[np.int64]
    points: NDArray[np.float64]
    elements: list[DeckElements] = field(default_factory=list)
    node_sets: dict[str, NDArray[np.int64]] = field(default_factory=dict)
    supports: list[tuple[int, tuple[str, ...]]] = field(default_factory=list)
    links: list[tuple[str, NDArray[np.int64]]] = field(default_factory=list)
    loads: list[tuple[str, int]] = field(default_factory=list)
    refs: NodeRefs = field(default_factory=NodeRefs)
    list_rewrites: list[ListRewrite] = field(default_factory=list)
    unhandled: dict[str, int] = field(default_factory=dict)
    includes: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    link_dofs: dict[int, str] = field(default_factory=dict)   # link index -> DOF digits

    @property
    def n_nodes(self) -> int:
        """Number of nodes defined in the deck."""
        return int(self.node_ids.size)

    def index_of(self, ids: NDArray[np.integer] | list[int], what: str = "a card") -> NDArray[np.int64]:
        """0-based node indices of node ids.

        Raises
        ------
        MeshReadError
            If an id names no node of the deck.
        """
        ids = np.asarray(ids, dtype=np.int64)
        order = np.argsort(self.node_ids, kind="stable")
        sorted_ids = self.node_ids[order]
        if ids.size == 0:
            return np.zeros(ids.shape, dtype=np.int64)
        if sorted_ids.size == 0:
            raise MeshReadError(f"{self.path}: {what} names node {int(ids.flat[0])}, but the deck "
                             "defines no nodes")
        pos = np.minimum(np.searchsorted(sorted_ids, ids), sorted_ids.size - 1)
        missing = sorted_ids[pos] != ids
        if missing.any():
            raise MeshReadError(f"{self.path}: {what} names node {int(ids[missing].flat[0])}, "
                             "which the deck does not define")
        return order[pos]

    def to_model(self) -> Model:
        """The mesh of the deck as a :class:`~bandwise.core.model.Model`, original ids kept.

        Nodes are in id order (the numbering a solver sees), ``node_ids`` holds
        their deck ids, node sets
        become point sets, and each element type becomes a cell block with
        the element ids as the cell field ``element_id``.

        Raises
        ------
        MeshReadError
            A reference to an undefined node, non-finite coordinates, no elements.
        """
        from bandwise.formats.meshio_io import validate_model

        blocks = [CellBlock(e.cell_type, self.index_of(e.connectivity, f"{e.card} element"))
                  for e in self.elements]
        element_ids = [e.element_ids.copy() for e in self.elements]
        point_sets = {name: self.index_of(ids, f"node set {name}")
                      for name, ids in self.node_sets.items()}
        fmt = "abaqus" if self.kind == "keyword" else "nastran"
        model = Model(points=self.points.copy(), cells=blocks,
                      cell_data={"element_id": element_ids} if blocks else {},
                      point_sets=point_sets, node_ids=self.node_ids.copy(),
                      source=self.path, file_format=fmt)
        validate_model(model)
        return model


def read_deck_text(path: Path) -> str:
    """A deck file's text, bytes that are not UTF-8 kept as they are (surrogate escapes).

    Raises
    ------
    MeshReadError
        The file cannot be read, or holds binary content.
    """
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise MeshReadError(f"{path}: cannot read: {exc.strerror}") from None
    if b"\x00" in raw:
        raise MeshReadError(f"{path}: not a text deck (binary content)")
    return raw.decode("utf-8", errors="surrogateescape")


def assembled_deck(source: str, kind: str, lines: list, state: object,
                   list_rewrites: list, duplicate: str) -> Deck:
    """The :class:`Deck` of a finished read, nodes put in the order of their ids.

    ``state`` is a reader's state (node ids and coordinates, elements, node
    sets, supports, links, loads, node references ...); ``duplicate`` is the
    message for an id defined twice, with ``{id}`` in it.
    """
    st = state
    ids = np.asarray(st.node_ids, dtype=np.int64)
    uniq, counts = np.unique(ids, return_counts=True)
    if (counts > 1).any():
        raise MeshReadError(f"{source}: " + duplicate.format(id=int(uniq[counts > 1][0])))
    elements = [DeckElements(name, cell, np.asarray(eids, dtype=np.int64),
                             np.concatenate(conn).astype(np.int64, copy=False))
                for (name, cell), (eids, conn) in st.elements.items()]
    by_id = np.argsort(ids, kind="stable")  # a deck numbers its nodes by id, not by place
    return Deck(path=source, kind=kind, lines=lines, node_ids=ids[by_id],
                points=np.concatenate(st.coords).reshape(-1, 3)[by_id],
                elements=elements,
                node_sets={k: np.asarray(v, dtype=np.int64) for k, v in st.node_sets.items()},
                supports=st.supports, links=st.links, loads=st.loads, refs=st.refs,
                list_rewrites=list_rewrites, unhandled=st.unhandled, includes=st.includes,
                notes=st.notes, link_dofs=getattr(st, "link_dofs", {}))


def new_ids(node_ids: NDArray[np.integer], perm: NDArray[np.integer]) -> dict[int, int]:
    """The new id of every old node id for a renumbering ``perm`` (``perm[new] = old``).

    The deck's id set is kept and its assignment permuted: the node at new
    position ``k`` receives the ``k``-th smallest original id (so ids
    ``1..n`` give "new id = 1-based new position").

    Parameters
    ----------
    node_ids
        Original ids of the nodes, in the order of the model's node indices.
    perm
        New order of the node indices.

    Returns
    -------
    dict
        old id -> new id.
    """
    ids = np.asarray(node_ids, dtype=np.int64)
    perm = check_permutation(perm, ids.size)
    sorted_ids = np.sort(ids)
    new_of_index = np.empty_like(ids)
    new_of_index[perm] = sorted_ids
    return dict(zip(ids.tolist(), new_of_index.tolist()))
