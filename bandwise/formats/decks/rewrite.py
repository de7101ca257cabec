"""Renumber a deck in place: rewrite its node ids, leave every other byte as it was."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from bandwise.core.errors import InputError

from .deck import Deck, NodeRef

#: Node ids per line when a range-defined node set is written out in full.
IDS_PER_LINE = 16


@dataclass(frozen=True)
class DeckRewrite:
    """A renumbered deck text and what changed in it.

    Attributes
    ----------
    text
        The whole new deck.
    changed_cards
        Card or keyword name -> number of lines rewritten.
    notes
        Structural changes besides numbers (range sets written out in full).
    """

    text: str
    changed_cards: dict[str, int] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def renumber_deck(deck: Deck, new_id_of_old_id: Mapping[int, int]) -> DeckRewrite:
    """Rewrite every node id of a deck through a map, in place in the original text.

    Nodes, element connectivity, node sets, boundary conditions, loads and
    constraints that name nodes get their new ids; any other line is kept
    byte for byte.  Fixed-width bulk fields keep their width and their left
    or right justification.  A node set written as an id range is written
    out as an explicit list (a range no longer describes it).

    Parameters
    ----------
    deck
        A deck from :func:`bandwise.formats.decks.read_deck`.
    new_id_of_old_id
        old id -> new id for every node of the deck, a one-to-one map (see
        :func:`bandwise.formats.decks.new_ids`).

    Returns
    -------
    DeckRewrite

    Raises
    ------
    InputError
        The map is not one-to-one over the deck's nodes; a new id does not fit
        its fixed-width field; the deck has cards that may name nodes which
        bandwise does not rewrite, or include files (renumbering them in place
        is not possible).
    """
    _check_rewritable(deck)
    mapping = _checked_map(deck, new_id_of_old_id)
    lines = list(deck.lines)
    changed: dict[int, str] = {}
    line, start, end, old_ids, width, card = deck.refs.columns()
    new_ids = _mapped_ids(mapping, old_ids)
    order = np.lexsort((-start, line))           # by line, right to left within a line
    line, start, end = line[order], start[order], end[order]
    new_ids, width, card = new_ids[order], width[order], card[order]
    cuts = np.flatnonzero(np.diff(line)) + 1
    for a, b in zip(np.concatenate([[0], cuts]).tolist(), np.concatenate([cuts, [line.size]]).tolist()):
        k = int(line[a])
        text = lines[k]
        for s, e, w, new, c in zip(start[a:b].tolist(), end[a:b].tolist(), width[a:b].tolist(),
                                   new_ids[a:b].tolist(), card[a:b].tolist()):
            digits = str(new)
            if not w and len(digits) == e - s:  # the common case: same width, free format
                text = text[:s] + digits + text[e:]
                continue
            text = _replaced(text, NodeRef(k, s, e, 0, deck.refs.cards[c], w), new, deck.path)
        if text != lines[k]:
            lines[k] = text
            changed[k] = deck.refs.cards[int(card[a])]
    notes = []
    for rw in deck.list_rewrites:
        ending = _ending(lines[rw.lines[0]]) or "\n"
        new = sorted(mapping[int(i)] for i in rw.node_ids)
        render = _keyword_list if rw.kind == "keyword" else _bulk_list
        for j, k in enumerate(rw.lines):
            lines[k] = render(rw.head, new, ending) if j == 0 else ""
        changed[rw.lines[0]] = rw.card
        notes.append(f"{rw.card} at line {rw.lines[0] + 1} gave its nodes as an id range; "
                     f"written out as a list of {len(new)} ids")
    _in_id_order(lines, deck, new_ids, line, card, changed)
    counts: dict[str, int] = {}
    for card in changed.values():
        counts[card] = counts.get(card, 0) + 1
    return DeckRewrite("".join(lines), dict(sorted(counts.items())), notes)


#: Cards whose node field defines the node (its lines move with the new id).
DEFINITIONS = ("NODE", "GRID")


def _is_continuation(text: str) -> bool:
    return bool(text.strip()) and text[0] in "+*, "


def _in_id_order(lines: list[str], deck: Deck, new_ids: np.ndarray, line: np.ndarray,
                 card: np.ndarray, changed: dict[int, str]) -> None:
    """Put node definitions in the order of their new ids, run by run, in place.

    A reader that numbers nodes by their place in the file (rather than by
    id) then sees the new numbering too.  A run is a stretch of node cards
    with nothing between them (a comment or another card ends it); a card
    keeps its continuation lines.
    """
    codes = [deck.refs.cards.index(c) for c in DEFINITIONS if c in deck.refs.cards]
    is_def = np.isin(card, codes)
    if not is_def.any():
        return
    starts, keys = line[is_def], new_ids[is_def]
    order = np.argsort(starts, kind="stable")
    starts, keys = starts[order].tolist(), keys[order].tolist()
    records = []
    for s in starts:
        e = s + 1
        while deck.kind == "bulk" and e < len(lines) and _is_continuation(lines[e]):
            e += 1
        records.append((s, e))
    run: list[int] = []
    for i in range(len(records) + 1):
        if i < len(records) and (not run or records[run[-1]][1] == records[i][0]):
            run.append(i)
            continue
        if len(run) > 1:
            first = records[run[0]][0]
            texts = [lines[a:b] for a, b in (records[j] for j in run)]
            moved = [texts[j] for j in sorted(range(len(run)), key=lambda j: keys[run[j]])]
            flat = [t for group in moved for t in group]
            for k, text in enumerate(flat):
                if lines[first + k] != text:
                    lines[first + k] = text
                    changed[first + k] = deck.refs.cards[int(codes[0])] if len(codes) == 1 \
                        else changed.get(first + k, "NODE" if deck.kind == "keyword" else "GRID")
        run = [i] if i < len(records) else []


def _check_rewritable(deck: Deck) -> None:
    if deck.unhandled:
        listed = ", ".join(f"{name} ({count})" for name, count in sorted(deck.unhandled.items()))
        raise InputError(f"{deck.path}: cannot renumber in place: these cards may name nodes "
                         f"and bandwise does not rewrite them: {listed}")
    if deck.includes:
        raise InputError(f"{deck.path}: cannot renumber in place: the deck includes "
                         f"{', '.join(deck.includes)}; merge the included files into one deck first")


def _checked_map(deck: Deck, new_id_of_old_id: Mapping[int, int]) -> dict[int, int]:
    ids = deck.node_ids.tolist()
    try:
        new = [int(new_id_of_old_id[i]) for i in ids]
    except KeyError as exc:
        raise InputError(f"{deck.path}: the id map gives no new id for node {exc.args[0]}") from None
    if len(set(new)) != len(new):
        raise InputError(f"{deck.path}: the id map gives two nodes the same new id")
    if new and min(new) < 1:
        raise InputError(f"{deck.path}: node ids must be positive, the map gives {min(new)}")
    return dict(zip(ids, new))


def _keyword_list(head: tuple[str, ...], ids: list[int], ending: str) -> str:
    """A keyword line and its data lines listing ``ids``, ``IDS_PER_LINE`` to a line."""
    chunks = [ids[i:i + IDS_PER_LINE] for i in range(0, len(ids), IDS_PER_LINE)]
    return head[0] + ending + "".join(", ".join(map(str, c)) + ending for c in chunks)


def _bulk_list(head: tuple[str, ...], ids: list[int], ending: str) -> str:
    """A small-field card: ``head`` fields, then ``ids``, continued on ``+`` lines."""
    fields = [*head[1:], *map(str, ids)]
    first, rest = fields[:8], fields[8:]
    for value in fields:
        if len(value) > 8:
            raise InputError(f"{value!r} does not fit a small field")
    text = head[0].ljust(8) + "".join(f.ljust(8) for f in first).rstrip() + ending
    for i in range(0, len(rest), 8):
        text += "+".ljust(8) + "".join(f.ljust(8) for f in rest[i:i + 8]).rstrip() + ending
    return text


def _mapped_ids(mapping: dict[int, int], old: np.ndarray) -> np.ndarray:
    """New id of every old id in ``old`` (vectorised lookup)."""
    keys = np.fromiter(mapping.keys(), dtype=np.int64, count=len(mapping))
    values = np.fromiter(mapping.values(), dtype=np.int64, count=len(mapping))
    order = np.argsort(keys)
    keys, values = keys[order], values[order]
    pos = np.minimum(np.searchsorted(keys, old), max(keys.size - 1, 0))
    if old.size and (keys.size == 0 or (keys[pos] != old).any()):
        missing = old[keys[pos] != old] if keys.size else old
        raise InputError(f"the id map gives no new id for node {int(missing[0])}")
    return values[pos] if old.size else old.copy()


def _ending(line: str) -> str:
    return line[len(line.rstrip("\r\n")):]


def _replaced(text: str, ref: NodeRef, new_id: int, path: str) -> str:
    """``text`` with the number of ``ref`` replaced by ``new_id``."""
    old = text[ref.start:ref.end]
    digits = str(new_id)
    if ref.width:
        if len(digits) > ref.width:
            raise InputError(f"{path}: line {ref.line + 1} ({ref.card}): node id {new_id} does "
                             f"not fit a {ref.width}-character field")
        # keep the justification (and any offset of a left-justified number)
        lead = len(old) - len(old.lstrip())
        trail = len(old) - len(old.rstrip())
        if lead and not trail and len(old) == ref.width:
            field_text = digits.rjust(len(old))
        else:
            field_text = " " * lead + digits
            if len(field_text) > ref.width:
                field_text = digits
            field_text = field_text.ljust(len(old))
        return text[:ref.start] + field_text + text[ref.end:]
    if len(digits) < len(old) and ref.start > 0 and text[ref.start - 1] != ".":
        digits = digits.rjust(len(old))
    return text[:ref.start] + digits + text[ref.end:]


def changed_lines(before: str, after: str) -> list[int]:
    """0-based indices of lines that differ between two texts of the same line count."""
    a = before.splitlines(keepends=True)
    b = after.splitlines(keepends=True)
    if len(a) != len(b):
        raise ValueError("the texts have different numbers of lines")
    return [int(k) for k in np.flatnonzero([x != y for x, y in zip(a, b)])]
