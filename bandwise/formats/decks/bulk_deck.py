"""Read bulk-data decks (``.bdf``, ``.nas``, ``.fem``): ``GRID``, element, ``SPC``, ``FORCE``, ``RBE2`` ... cards.

The bulk-data format writes a card as fields: eight characters wide in the
small-field form, sixteen in the large-field form (name ending in ``*``,
continuation lines starting with ``*``), or separated by commas in the
free-field form; a card goes on over continuation lines (first field ``+``,
``*``, blank or a comma).  The reader numbers the data fields of a card
0, 1, 2 ... across its lines (eight per small-field line, four per
large-field line), takes the mesh from ``GRID`` and element cards, and
records the place of every node id so that a renumbering rewrites the
fields in place, each at its width and justification.

Only the section after ``BEGIN BULK`` (when present) and before
``ENDDATA`` is read.  Cards not listed here are taken not to name nodes;
cards known to name nodes in a way bandwise does not rewrite (``THRU``
ranges of grids, ``SEQGP``, ``RBE1`` ...) are counted in
:attr:`~bandwise.formats.decks.deck.Deck.unhandled`, and a renumbering refuses them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bandwise.core.errors import MeshReadError

from .deck import Deck, ListRewrite, NodeRefs, assembled_deck, read_deck_text

#: Component digits of the bulk format -> bandwise DOF names.
DOF_OF_COMPONENT = {"1": "ux", "2": "uy", "3": "uz", "4": "rx", "5": "ry", "6": "rz"}

#: Element cards: name -> (data index of the first node, maximum node count,
#: meshio cell type by node count).
ELEMENT_CARDS: dict[str, tuple[int, int, dict[int, str]]] = {
    "CTETRA": (2, 10, {4: "tetra", 10: "tetra10"}),
    "CHEXA": (2, 20, {8: "hexahedron", 20: "hexahedron20"}),
    "CPENTA": (2, 15, {6: "wedge", 15: "wedge15"}),
    "CPYRAM": (2, 13, {5: "pyramid"}),
    "CPYRA": (2, 13, {5: "pyramid"}),
    "CQUAD4": (2, 4, {4: "quad"}),
    "CQUADR": (2, 4, {4: "quad"}),
    "CSHEAR": (2, 4, {4: "quad"}),
    "CQUAD8": (2, 8, {4: "quad", 8: "quad8"}),
    "CQUAD": (2, 9, {4: "quad", 8: "quad8", 9: "quad9"}),
    "CTRIA3": (2, 3, {3: "triangle"}),
    "CTRIAR": (2, 3, {3: "triangle"}),
    "CTRIA6": (2, 6, {3: "triangle", 6: "triangle6"}),
    "CBAR": (2, 2, {2: "line"}),
    "CBEAM": (2, 2, {2: "line"}),
    "CBEND": (2, 2, {2: "line"}),
    "CROD": (2, 2, {2: "line"}),
    "CTUBE": (2, 2, {2: "line"}),
    "CVISC": (2, 2, {2: "line"}),
    "CONROD": (1, 2, {2: "line"}),
}
#: Cards with an orientation node in data field 4 when that field is an integer.
ORIENTATION_NODE = frozenset({"CBAR", "CBEAM", "CBEND", "CBUSH", "CGAP"})
#: Two-node connectors (springs, bushes, gaps): (data indices of the nodes).
CONNECTORS: dict[str, tuple[int, ...]] = {
    "CBUSH": (2, 3), "CGAP": (2, 3), "CELAS1": (2, 4), "CELAS2": (2, 4),
    "CDAMP1": (2, 4), "CDAMP2": (2, 4), "CMASS1": (2, 4), "CMASS2": (2, 4),
    "RBAR": (1, 2), "RROD": (1, 2),
}
#: Cards naming nodes at fixed data indices: name -> indices.
NODE_FIELDS: dict[str, tuple[int, ...]] = {
    "FORCE": (1,), "MOMENT": (1,), "FORCE1": (1, 3, 4), "MOMENT1": (1, 3, 4),
    "FORCE2": (1, 3, 4, 5, 6), "MOMENT2": (1, 3, 4, 5, 6),
    "SPCD": (1, 4), "DAREA": (1, 4), "TEMP": (1, 3, 5), "PLOAD": (2, 3, 4, 5),
    "CONM1": (1,), "CONM2": (1,), "SUPORT": (0, 2, 4, 6), "SUPORT1": (1, 3, 5),
    "ASET": (0, 2, 4, 6), "BSET": (0, 2, 4, 6), "CSET": (0, 2, 4, 6), "QSET": (0, 2, 4, 6),
    "OMIT": (0, 2, 4, 6),
    "CORD1R": (1, 2, 3, 5, 6, 7), "CORD1C": (1, 2, 3, 5, 6, 7), "CORD1S": (1, 2, 3, 5, 6, 7),
}
LOAD_CARDS = frozenset({"FORCE", "MOMENT", "FORCE1", "MOMENT1", "FORCE2", "MOMENT2",
                        "SPCD", "DAREA", "TEMP", "PLOAD"})
#: Grid lists that may use ``THRU``: name -> data index of the first grid.
GRID_LISTS = {"SPC1": 2, "ASET1": 1, "BSET1": 1, "CSET1": 1, "QSET1": 1, "OMIT1": 1}
#: Cards that name nodes in ways bandwise does not rewrite.
UNHANDLED = frozenset({"SEQGP", "RBE1", "RSPLINE", "RJOINT", "RTRPLT", "CWELD", "CFAST",
                       "CSEAM", "DMIG", "GENEL", "USET", "USET1", "CELAS3", "CELAS4",
                       "CDAMP3", "CDAMP4", "CHBDYG", "CHBDYE", "CHBDYP", "CONV", "BCGRID",
                       "CTRIAX6", "CTRAX3", "CTRAX6", "CQUADX", "CTRIAX", "CQUADX4",
                       "CQUADX8", "CTRIAX3", "SPLINE1", "SPLINE2", "SPLINE4", "SPLINE5",
                       "SET1", "SESET", "SEQSEP", "CMASS3", "CMASS4", "RBE2A"})

#: meshio node order of quadratic solids from the bulk order.
_TO_MESHIO_ORDER = {
    "hexahedron20": [0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 16, 17, 18, 19, 12, 13, 14, 15],
    "wedge15": [0, 1, 2, 3, 4, 5, 6, 7, 8, 12, 13, 14, 9, 10, 11],
}

_REAL = re.compile(r"^([+-]?(?:\d+\.?\d*|\.\d+))([+-]\d+)$")
_INT = re.compile(r"^[+-]?\d+$")


@dataclass(frozen=True)
class Field:
    """One data field of a card: its text (stripped) and where it is written."""

    text: str
    line: int
    start: int
    end: int
    width: int


@dataclass
class Card:
    """A logical card: its name, data fields numbered across lines, and its first line."""

    name: str
    fields: list[Field | None]
    line: int
    lines: list[int] = field(default_factory=list)

    def text(self, d: int) -> str:
        """Stripped text of data field ``d`` ('' when blank or absent)."""
        f = self.fields[d] if d < len(self.fields) else None
        return f.text if f is not None else ""

    def integer(self, d: int) -> int | None:
        """Data field ``d`` as an integer, or None when blank or not an integer."""
        t = self.text(d)
        return int(t) if _INT.match(t) else None


def bulk_real(text: str) -> float:
    """A bulk-format real: ``1.5``, ``1.5E+3``, ``1.5D3`` and the exponent-only ``1.5+3``."""
    t = text.strip().upper().replace("D", "E")
    m = _REAL.match(t)
    if m:
        return float(f"{m.group(1)}e{m.group(2)}")
    return float(t) if t else 0.0


def _physical_fields(line: str, k: int) -> tuple[str, list[Field | None]]:
    """First field and data fields of one physical line (small, large or free form)."""
    body = line.rstrip("\r\n")
    cut = body.find("$")
    if cut >= 0:
        body = body[:cut]
    if "\t" in body:
        raise MeshReadError(f"line {k + 1}: tab characters in a bulk card are not supported; "
                            "expand them to spaces")
    if "," in body:
        return _free_fields(body, k)
    head = body[:8]
    large = head.rstrip().endswith("*") or head.startswith("*")
    width, count = (16, 4) if large else (8, 8)
    out: list[Field | None] = []
    for i in range(count):
        start = 8 + i * width
        end = min(start + width, len(body))
        if start >= len(body) or not body[start:end].strip():
            out.append(None)
        else:
            out.append(Field(body[start:end].strip(), k, start, end, width))
    return head.strip(), out


def _free_fields(body: str, k: int) -> tuple[str, list[Field | None]]:
    pieces = body.split(",")
    spans = []
    pos = 0
    for p in pieces:
        lead = len(p) - len(p.lstrip())
        spans.append((p.strip(), pos + lead, pos + lead + len(p.strip())))
        pos += len(p) + 1
    head = spans[0][0]
    per_line = 4 if head.endswith("*") else 8
    data = spans[1:]
    if len(data) > per_line and (not data[per_line][0] or data[per_line][0][0] in "+*"):
        data = data[:per_line]  # the field after the data is a continuation marker
    out: list[Field | None] = [Field(t, k, s, e, 0) if t else None for t, s, e in data]
    pad = (-len(out)) % per_line if out else per_line
    return head, out + [None] * pad


def _is_continuation(line: str) -> bool:
    return bool(line.strip()) and line[0] in "+*, "


@dataclass(frozen=True)
class Run:
    """Consecutive one-line small-field cards of one name, read at once (:mod:`.columns`)."""

    name: str
    first: int
    stop: int


#: Cards read as tables when they come in runs of one-line small-field cards:
#: name -> node count (GRID: none).
FAST_CARDS = {"GRID": 0, "CTETRA": 4, "CQUAD4": 4, "CTRIA3": 3, "CROD": 2}
#: Shortest run worth a table.
FAST_RUN = 16


def _fast_name(line: str) -> str | None:
    """The card name when a line is a one-line small-field card that can go in a table.

    ``GRID*`` (large field) is its first line; the run reader checks the second.
    """
    if line[:5].upper() == "GRID*" and "," not in line and "\t" not in line and "$" not in line:
        return "GRID*"
    name = line[:8].strip().upper()
    if name not in FAST_CARDS or "," in line or "\t" in line or "$" in line:
        return None
    body = line.rstrip("\r\n")
    if body[72:].strip():
        return None  # a continuation marker in field 10
    return name


def _fast_runs(lines: list[str], start: int, stop: int) -> dict[int, int]:
    """first line -> stop of every run of at least :data:`FAST_RUN` table-ready lines."""
    names = [_fast_name(lines[k]) for k in range(start, stop)]
    runs: dict[int, int] = {}
    k = 0
    while k < len(names):
        j = k
        if names[k] == "GRID*":  # pairs: GRID* line, then its '*' line
            while j + 1 < len(names) and names[j] == "GRID*" and lines[start + j + 1][:1] == "*" \
                    and not lines[start + j + 1].rstrip("\r\n")[72:].strip():
                j += 2
            if j - k >= 2 * FAST_RUN and (start + j >= stop or not _is_continuation(lines[start + j])) \
                    and "".join(lines[start + k:start + j]).isascii():
                runs[start + k] = start + j
            k = max(j, k + 1)
            continue
        while j < len(names) and names[j] is not None and names[j] == names[k]:
            j += 1
        if names[k] is not None:
            end = j
            if start + end < stop and _is_continuation(lines[start + end]):
                end -= 1  # the last card goes on: not one line
            if end - k >= FAST_RUN and "".join(lines[start + k:start + end]).isascii():
                runs[start + k] = start + end
        k = max(j, k + 1)
    return runs


def bulk_cards(lines: list[str], source: str, fast: bool = True
               ) -> tuple[list[Card | Run], list[int], list[str]]:
    """The cards of the bulk section, the lines of include cards, and notes.

    With ``fast``, runs of one-line small-field cards come back as :class:`Run`.
    """
    start, stop = _bulk_section(lines)
    notes = []
    if start > 0 and any(re.match(r"^\s*SET\s+\d+\s*=", ln, re.IGNORECASE) for ln in lines[:start]):
        notes.append("case control SET lists (output requests) are not renumbered")
    cards: list[Card | Run] = []
    includes: list[int] = []
    current: Card | None = None
    runs = _fast_runs(lines, start, stop) if fast else {}
    k = start - 1
    while k + 1 < stop:
        k += 1
        if k in runs:
            cards.append(Run(_fast_name(lines[k]) or "", k, runs[k]))
            current = None
            k = runs[k] - 1
            continue
        line = lines[k]
        if not line.strip() or line.lstrip().startswith("$"):
            continue
        if line[:7].upper() == "INCLUDE":
            includes.append(k)
            current = None
            continue
        try:
            head, data = _physical_fields(line, k)
        except MeshReadError as exc:
            raise MeshReadError(f"{source}: {exc}") from None
        if _is_continuation(line):
            if current is None:
                raise MeshReadError(f"{source}: line {k + 1}: continuation line with no card "
                                    "before it")
            current.fields.extend(data)
            current.lines.append(k)
            continue
        current = Card(head.rstrip("*").upper(), list(data), k, [k])
        cards.append(current)
    return cards, includes, notes


def _bulk_section(lines: list[str]) -> tuple[int, int]:
    start = 0
    for k, line in enumerate(lines):
        if line.lstrip()[:5].upper() == "BEGIN" and re.match(r"^\s*BEGIN\s+BULK", line,
                                                              re.IGNORECASE):
            start = k + 1
            break
    stop = len(lines)
    for k in range(start, len(lines)):
        if lines[k][:1] in "Ee " and lines[k].lstrip()[:7].upper() == "ENDDATA":
            stop = k
            break
    return start, stop


@dataclass
class _State:
    path: str
    rewritable: bool = True
    node_ids: list[int] = field(default_factory=list)
    coords: list[np.ndarray] = field(default_factory=list)
    elements: dict[tuple[str, str], tuple[list[int], list[np.ndarray]]] = field(default_factory=dict)
    node_sets: dict[str, list[int]] = field(default_factory=dict)
    supports: list[tuple[int, tuple[str, ...]]] = field(default_factory=list)
    set_supports: list[tuple[str, tuple[str, ...]]] = field(default_factory=list)
    links: list[tuple[str, np.ndarray]] = field(default_factory=list)
    link_dofs: dict[int, str] = field(default_factory=dict)
    loads: list[tuple[str, int]] = field(default_factory=list)
    refs: NodeRefs = field(default_factory=NodeRefs)
    unhandled: dict[str, int] = field(default_factory=dict)
    includes: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    pending_lists: list[tuple[Card, tuple[str, ...], list[int]]] = field(default_factory=list)

    def node(self, card: Card, d: int) -> int | None:
        """The node id in data field ``d`` (recorded for rewriting), None if blank."""
        f = card.fields[d] if d < len(card.fields) else None
        if f is None:
            return None
        if not _INT.match(f.text) or int(f.text) <= 0:
            raise MeshReadError(f"{self.path}: line {f.line + 1}: {card.name} field "
                                f"{f.text!r} is not a node id")
        if self.rewritable:
            self.refs.add(f.line, f.start, f.end, int(f.text), card.name, f.width)
        return int(f.text)

    def skip(self, name: str, why: str = "") -> None:
        key = f"{name} {why}".strip()
        self.unhandled[key] = self.unhandled.get(key, 0) + 1


def _components(text: str) -> tuple[str, ...]:
    return tuple(DOF_OF_COMPONENT[c] for c in sorted(set(text)) if c in DOF_OF_COMPONENT)


def _grid(st: _State, card: Card) -> None:
    nid = st.node(card, 0)
    if nid is None:
        raise MeshReadError(f"{st.path}: line {card.line + 1}: GRID without an id")
    try:
        xyz = tuple(bulk_real(card.text(d)) for d in (2, 3, 4))
    except ValueError:
        raise MeshReadError(f"{st.path}: line {card.line + 1}: GRID {nid} has a coordinate "
                            "that is not a number") from None
    st.node_ids.append(nid)
    st.coords.append(np.array([xyz], dtype=np.float64))
    if card.integer(1):
        st.notes.append(f"GRID {nid}: coordinates in system {card.text(1)} taken as written")
    if card.text(6):
        st.supports.append((nid, _components(card.text(6))))


def _element(st: _State, card: Card) -> None:
    first, most, shapes = ELEMENT_CARDS[card.name]
    eid = card.integer(0)
    if eid is None:
        raise MeshReadError(f"{st.path}: line {card.line + 1}: {card.name} without an element id")
    nodes = [n for d in range(first, first + most) if (n := st.node(card, d)) is not None]
    if card.name in ORIENTATION_NODE and card.integer(4) is not None and not card.text(5):
        st.node(card, 4)
    cell = shapes.get(len(nodes))
    if cell is None:  # some mid-side nodes left out: a linear cell, the rest linked
        corners = min(shapes)
        if len(nodes) > corners:
            st.links.append((card.name, np.asarray(nodes, dtype=np.int64)))
        if len(nodes) < corners:
            raise MeshReadError(f"{st.path}: line {card.line + 1}: {card.name} {eid} has "
                                f"{len(nodes)} nodes")
        cell, nodes = shapes[corners], nodes[:corners]
    if cell in _TO_MESHIO_ORDER:
        nodes = [nodes[i] for i in _TO_MESHIO_ORDER[cell]]
    ids, conn = st.elements.setdefault((card.name, cell), ([], []))
    ids.append(eid)
    conn.append(np.asarray([nodes], dtype=np.int64))


def _rbe2(st: _State, card: Card) -> None:
    group = [st.node(card, 1)]
    for d in range(3, len(card.fields)):
        if card.integer(d) is None:
            if card.text(d):
                break  # ALPHA (a real) ends the list
            continue
        group.append(st.node(card, d))
    st.links.append(("RBE2", np.asarray([g for g in group if g is not None], dtype=np.int64)))
    cm = card.text(2) if len(card.fields) > 2 else ""
    if cm and cm.isdigit():
        st.link_dofs[len(st.links) - 1] = cm


def _rbe3(st: _State, card: Card) -> None:
    group = [st.node(card, 2)]
    d = 4
    mode = "weights"
    while d < len(card.fields):
        word = card.text(d).upper()
        if word in ("UM", "ALPHA", "TEMP"):
            mode = word
            d += 1
            continue
        if mode == "weights":
            if word and card.integer(d) is None:      # a weight, then its components
                d += 2
                continue
            if card.integer(d) is not None:
                group.append(st.node(card, d))
        elif mode == "UM" and card.integer(d) is not None:
            group.append(st.node(card, d))
            d += 1                                      # its components
        d += 1
    st.links.append(("RBE3", np.asarray([g for g in group if g is not None], dtype=np.int64)))


def _mpc(st: _State, card: Card) -> None:
    group = []
    for line_start in range(0, len(card.fields), 8):
        for d in (line_start + 1, line_start + 4):
            if (n := st.node(card, d)) is not None:
                group.append(n)
    if len(group) > 1:
        st.links.append(("MPC", np.asarray(group, dtype=np.int64)))


def _spc(st: _State, card: Card) -> None:
    if card.text(8).upper() == "GSET":  # the "grid" fields name SET cards of grids
        for g, c in ((1, 2), (4, 5)):
            if card.integer(g) is not None:
                st.set_supports.append((f"SET {card.text(g)}", _components(card.text(c))))
        return
    for g, c in ((1, 2), (4, 5)):
        if (n := st.node(card, g)) is not None:
            st.supports.append((n, _components(card.text(c))))


def _grid_list(st: _State, card: Card, first: int) -> list[int]:
    """Grid ids listed from data field ``first`` on; ``THRU`` ranges expanded.

    A card with a range is recorded to be written out in full when renumbered.
    """
    texts = [card.text(d).upper() for d in range(first, len(card.fields))]
    if "THRU" not in texts:
        return [n for d in range(first, len(card.fields)) if (n := st.node(card, d)) is not None]
    ids: list[int] = []
    values = [t for t in texts if t]
    k = 0
    while k < len(values):
        if k + 2 < len(values) and values[k + 1] == "THRU":
            lo, hi = _range_bound(st, card, values[k]), _range_bound(st, card, values[k + 2])
            ids.extend(range(lo, hi + 1))
            k += 3
        else:
            ids.append(_range_bound(st, card, values[k]))
            k += 1
    if st.rewritable:
        head = (card.name, *[card.text(d) for d in range(first)])
        st.pending_lists.append((card, head, ids))
    return ids


def _range_bound(st: _State, card: Card, text: str) -> int:
    if not _INT.match(text) or int(text) <= 0:
        raise MeshReadError(f"{st.path}: line {card.line + 1}: {card.name} field {text!r} "
                            "is not a node id")
    return int(text)


def _spc1(st: _State, card: Card) -> None:
    dofs = _components(card.text(1))
    for n in _grid_list(st, card, 2):
        st.supports.append((n, dofs))


def _bsurfs(st: _State, card: Card) -> None:
    for d in range(4, len(card.fields), 4):
        for g in (d + 1, d + 2, d + 3):
            st.node(card, g)


def _set(st: _State, card: Card) -> None:
    if card.text(1).upper() == "GRID":
        ids = _grid_list(st, card, 3)
        st.node_sets[f"SET {card.text(0)}"] = ids


def _pload4(st: _State, card: Card) -> None:
    if card.text(6).upper() != "THRU":
        for d in (6, 7):
            if card.integer(d) is not None:
                st.node(card, d)


def _field_text(arr: np.ndarray, d: int) -> np.ndarray:
    """Data field ``d`` of every row of a small-field table, as bytes."""
    a = 8 + 8 * d
    return np.ascontiguousarray(arr[:, a:a + 8]).view("S8").ravel()


def _blank(arr: np.ndarray, d: int) -> np.ndarray:
    a = 8 + 8 * d
    return (arr[:, a:a + 8] == 32).all(axis=1)


def _run(st: _State, lines: list[str], run: Run) -> bool:
    """Read a run of one-line cards as a table; False when it is not uniform (read card by card)."""
    body = [ln.rstrip("\r\n") for ln in lines[run.first:run.stop]]
    m = len(body)
    lengths = np.fromiter((len(b) for b in body), dtype=np.int64, count=m)
    arr = np.frombuffer("".join(b.ljust(72)[:72] for b in body).encode("ascii"),
                        dtype=np.uint8).reshape(m, 72)
    if run.name == "GRID*":
        return _large_grid_table(st, arr, lengths, run)
    count = FAST_CARDS[run.name]
    node_fields = [0] if run.name == "GRID" else list(range(2, 2 + count))
    id_field = 0
    try:
        ids = _field_text(arr, id_field).astype(np.int64)
        nodes = np.stack([_field_text(arr, d).astype(np.int64) for d in node_fields], axis=1)
    except ValueError:
        return False
    if (nodes <= 0).any() or any(_blank(arr, d).any() for d in node_fields):
        return False
    if run.name == "CTETRA" and not (_blank(arr, 6) & _blank(arr, 7)).all():
        return False  # mid-side nodes: card by card
    if run.name == "GRID" and not _blank(arr, 6).all():
        return False  # permanent constraints: card by card
    line_no = np.arange(run.first, run.stop, dtype=np.int64)
    if st.rewritable:
        starts = np.array([8 + 8 * d for d in node_fields], dtype=np.int64)
        st.refs.add_block(np.repeat(line_no, len(node_fields)), np.tile(starts, m),
                          np.minimum(np.tile(starts + 8, m), np.repeat(lengths, len(node_fields))),
                          nodes, run.name, 8)
    if run.name == "GRID":
        return _grid_table(st, arr, ids)
    cell = ELEMENT_CARDS[run.name][2][count]
    eids, conn = st.elements.setdefault((run.name, cell), ([], []))
    eids.extend(ids.tolist())
    conn.append(nodes)
    return True


def _wide(arr: np.ndarray, i: int) -> np.ndarray:
    a = 8 + 16 * i
    return np.ascontiguousarray(arr[:, a:a + 16]).view("S16").ravel()


def _large_grid_table(st: _State, arr: np.ndarray, lengths: np.ndarray, run: Run) -> bool:
    """GRID* cards (two lines each: ID CP X1 X2, then X3 CD PS SEID) as a table."""
    first, second = arr[0::2], arr[1::2]
    blank = [lambda a, i=i: (a[:, 8 + 16 * i:24 + 16 * i] == 32).all(axis=1) for i in range(4)]
    if (~blank[2](second)).any():
        return False  # permanent constraints: card by card
    try:
        ids = _wide(first, 0).astype(np.int64)
        values = [_wide(first, 2), _wide(first, 3), _wide(second, 0)]
        xyz = np.column_stack([v.astype(np.float64) for v in values])
    except ValueError:
        return False
    if (ids <= 0).any():
        return False
    if (~blank[1](first)).any() and (np.char.strip(_wide(first, 1)[~blank[1](first)]) != b"0").any():
        st.notes.append("some GRID coordinates are in a local system; taken as written")
    if st.rewritable:
        rows = np.arange(run.first, run.stop, 2, dtype=np.int64)
        st.refs.add_block(rows, np.full(ids.size, 8), np.minimum(24, lengths[0::2]), ids,
                          "GRID", 16)
    st.node_ids.extend(ids.tolist())
    st.coords.append(xyz)
    return True


def _grid_table(st: _State, arr: np.ndarray, ids: np.ndarray) -> bool:
    xyz = np.zeros((ids.size, 3))
    for c, d in enumerate((2, 3, 4)):
        text = _field_text(arr, d)
        blank = _blank(arr, d)
        try:
            xyz[~blank, c] = text[~blank].astype(np.float64)
        except ValueError:  # exponents without E (1.5-3): the format's own reals
            try:
                xyz[~blank, c] = [bulk_real(t.decode()) for t in text[~blank]]
            except ValueError:
                raise MeshReadError(f"{st.path}: a GRID coordinate is not a number") from None
    system = _field_text(arr, 1)
    if (~_blank(arr, 1)).any() and (np.char.strip(system[~_blank(arr, 1)]) != b"0").any():
        st.notes.append("some GRID coordinates are in a local system; taken as written")
    st.node_ids.extend(ids.tolist())
    st.coords.append(xyz)
    return True


def _card(st: _State, card: Card) -> None:
    name = card.name
    if name == "GRID":
        _grid(st, card)
    elif name in ELEMENT_CARDS:
        _element(st, card)
    elif name in CONNECTORS:
        group = [n for d in CONNECTORS[name] if card.integer(d) and (n := st.node(card, d))]
        if name in ORIENTATION_NODE and card.integer(4) is not None and not card.text(5):
            st.node(card, 4)
        if len(group) > 1:
            st.links.append((name, np.asarray(group, dtype=np.int64)))
    elif name == "RBE2":
        _rbe2(st, card)
    elif name == "RBE3":
        _rbe3(st, card)
    elif name == "MPC":
        _mpc(st, card)
    elif name == "SPC":
        _spc(st, card)
    elif name == "SPC1":
        _spc1(st, card)
    elif name in GRID_LISTS:
        _grid_list(st, card, GRID_LISTS[name])
    elif name == "BSURFS":
        _bsurfs(st, card)
    elif name == "SET":
        _set(st, card)
    elif name == "PLOAD4":
        _pload4(st, card)
    elif name in NODE_FIELDS:
        for d in NODE_FIELDS[name]:
            if card.integer(d) is not None and (n := st.node(card, d)) and name in LOAD_CARDS:
                st.loads.append((name, n))
    elif name in UNHANDLED:
        st.skip(name)


def _cards(st: _State, cards: list[Card | Run], lines: list[str]) -> None:
    """Every card in file order; a run that is not uniform is read card by card."""
    for card in cards:
        if isinstance(card, Run):
            if not _run(st, lines, card):
                sub, _, _ = bulk_cards(lines[card.first:card.stop], st.path, fast=False)
                for one in sub:
                    shifted = Card(one.name, [None if f is None else Field(
                        f.text, f.line + card.first, f.start, f.end, f.width) for f in one.fields],
                        one.line + card.first, [k + card.first for k in one.lines])
                    _card(st, shifted)
            continue
        _card(st, card)


def _include_name(line: str) -> str:
    rest = line[7:].strip()
    return rest.strip("'\"")


def read_bulk_deck(path: str | Path) -> Deck:
    """Read a bulk-data deck into a :class:`~bandwise.formats.decks.deck.Deck`.

    Raises
    ------
    MeshReadError
        No ``GRID`` cards, a malformed node field or coordinate, a node id
        defined twice, a missing include file.
    """
    path = Path(path)
    return parse_bulk_deck(read_deck_text(path), str(path), path.parent)


def parse_bulk_deck(text: str, source: str = "deck", folder: Path | None = None) -> Deck:
    """Parse bulk-data text (see :func:`read_bulk_deck`)."""
    lines = text.splitlines(keepends=True)
    st = _State(source)
    cards, include_lines, notes = bulk_cards(lines, source)
    st.notes.extend(notes)
    _cards(st, cards, lines)
    for k in include_lines:
        _read_include(st, lines[k], k, folder or Path("."))
    defined = set(st.node_ids)
    rewrites = []
    for card, head, ids in st.pending_lists:  # ranges keep the grids that exist
        present = [i for i in ids if i in defined]
        _drop_missing(st, ids, present, defined)
        rewrites.append(ListRewrite(card.name, _card_lines(card), head,
                                    np.asarray(present, dtype=np.int64), "bulk"))
    for name, dofs in st.set_supports:
        if name not in st.node_sets:
            raise MeshReadError(f"{source}: an SPC names {name}, which the deck does not define")
        st.supports.extend((n, dofs) for n in st.node_sets[name])
    if not st.node_ids:
        raise MeshReadError(f"{source}: no GRID cards found: not a bulk-data deck, or an empty one")
    return assembled_deck(source, "bulk", lines, st, rewrites, "GRID {id} is defined twice")


def _card_lines(card: Card) -> tuple[int, ...]:
    """Lines a card occupies (comment lines between them excluded)."""
    return tuple(card.lines)


def _drop_missing(st: _State, ids: list[int], present: list[int], defined: set[int]) -> None:
    """Remove undefined ids of a range from the supports (a range may span gaps)."""
    if len(present) == len(ids):
        return
    gone = set(ids) - defined
    st.supports = [(n, d) for n, d in st.supports if n not in gone]
    for name, members in st.node_sets.items():
        st.node_sets[name] = [n for n in members if n not in gone]


def _read_include(st: _State, line: str, k: int, folder: Path) -> None:
    name = _include_name(line)
    target = folder / name
    if not name or not target.is_file():
        raise MeshReadError(f"{st.path}: line {k + 1}: included file {name!r} not found")
    st.includes.append(name)
    sub = read_deck_text(target).splitlines(keepends=True)
    cards, nested, _ = bulk_cards(sub, str(target))
    if nested:
        raise MeshReadError(f"{target}: nested include files are not supported")
    st.rewritable = False
    _cards(st, cards, sub)
    st.rewritable = True
