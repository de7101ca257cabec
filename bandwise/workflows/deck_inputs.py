"""What a solver deck adds to its mesh: supports, rigid links and link connectivity.

The deck reader (:mod:`bandwise.formats.decks`) gives cards as they are
written; this module turns them into the algorithms' inputs: a
:class:`~bandwise.algorithms.supports.SupportSet` for the boundary-condition
cards, :class:`~bandwise.algorithms.rigid.Link` values for the zero-energy
analysis, and node groups as extra connectivity for the checks.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from bandwise.algorithms.rigid import Link, link_layout
from bandwise.algorithms.supports import AppliedSupport, Support, SupportSet
from bandwise.core.dofs import DOF_NAMES, DofLayout, dof_mask
from bandwise.core.model import Model
from bandwise.formats.decks import Deck, deck_links, deck_supports

_RIGID_CARDS = frozenset({"RBE2", "RBAR", "RIGID BODY", "KINEMATIC COUPLING"})
_AVERAGE_CARDS = frozenset({"RBE3", "DISTRIBUTING COUPLING"})


def deck_rigid_links(deck: Deck) -> list[Link]:
    """The deck's links for the zero-energy analysis, reference node first.

    RBE2, RBAR, ``*RIGID BODY`` and ``*KINEMATIC COUPLING`` are rigid links
    (tying the DOFs RBE2's CM field names, else all); RBE3 and ``*DISTRIBUTING COUPLING`` average; every other
    link card is a general constraint.  Node ids not in the deck are handled
    as :func:`deck_links` does.
    """
    out = []
    for k, (card, ids) in enumerate(deck.links):
        nodes = deck.index_of(ids, f"a {card} card")
        kind = ("rigid" if card in _RIGID_CARDS else
                "average" if card in _AVERAGE_CARDS else "general")
        digits = deck.link_dofs.get(k, "123456")
        mask = dof_mask([DOF_NAMES[int(d) - 1] for d in set(digits) if "1" <= d <= "6"])
        out.append(Link(kind, card, np.asarray(nodes, dtype=np.int64), mask))
    return out


def deck_support_set(deck: Deck, layout: DofLayout) -> SupportSet:
    """The deck's supports as a :class:`bandwise.algorithms.supports.SupportSet` for the rigid-body analysis.

    A card may hold DOFs a node does not carry (rotations on a solid node,
    held to quiet a solver): only the DOFs the node carries count.
    """
    fixed = np.zeros(deck.n_nodes, dtype=np.int64)
    held = deck_supports(deck)
    if not held:
        return SupportSet(fixed, ())
    nodes = np.fromiter(held, dtype=np.int64, count=len(held))
    wanted = np.array([dof_mask(held[k]) for k in held], dtype=np.int64)
    fixed[nodes] = wanted & layout.masks[nodes]
    count = int(sum(int(m).bit_count() for m in fixed[nodes]))
    support = Support("node", tuple(int(i) for i in deck.node_ids[nodes]), "as in the deck",
                      origin=f"{deck.path}: boundary-condition cards")
    return SupportSet(fixed, (AppliedSupport(support, np.sort(nodes), count),))


@dataclass(frozen=True)
class DeckInputs:
    """What a solver deck adds to its mesh, for the checks and the zero-energy analysis."""

    check_links: tuple[Any, ...]     # node groups tied by links: extra connectivity for the checks
    rigid_links: list[Link]          # links as constraints of the zero-energy analysis
    layout: DofLayout                # with DOFs of their own at nodes only links use
    supports: SupportSet | None      # the deck's boundary-condition cards


def deck_inputs(model: Model, deck: Deck | None, layout: DofLayout) -> DeckInputs:
    """The links, DOF layout and supports a deck gives (nothing added for a plain mesh)."""
    if deck is None:
        return DeckInputs((), [], layout, None)
    rigid = deck_rigid_links(deck)
    layout = link_layout(model, layout, rigid)
    return DeckInputs(tuple(deck_links(deck)), rigid, layout, deck_support_set(deck, layout))
