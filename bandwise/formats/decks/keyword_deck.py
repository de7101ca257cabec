"""Read keyword decks (``.inp``): ``*NODE``, ``*ELEMENT``, ``*NSET``, ``*BOUNDARY``, ``*CLOAD`` ...

A keyword deck is a sequence of keyword lines (``*NAME, PARAM=value``),
their comma-separated data lines, and comment lines (``**``).  The reader
keeps the text, takes the mesh from the node, element and node-set cards,
and records where each node id is written: the first field of node, load
and boundary lines, element connectivity, node-set lists, equation terms,
multi-point constraints and reference-node options.

Limits (each reported as an error rather than guessed): node or element
generation cards, and several part instances that reuse the same node ids.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bandwise.core.errors import MeshReadError

from .columns import Table, comma_table, data_runs
from .deck import Deck, ListRewrite, NodeRefs, assembled_deck, read_deck_text

#: DOF numbers of the keyword format -> bandwise DOF names.
DOF_OF_NUMBER = {1: "ux", 2: "uy", 3: "uz", 4: "rx", 5: "ry", 6: "rz", 11: "t"}

#: Named boundary types of the keyword format -> constrained DOF numbers
#: (format definition, from memory).
BOUNDARY_TYPES = {
    "ENCASTRE": (1, 2, 3, 4, 5, 6), "PINNED": (1, 2, 3),
    "XSYMM": (1, 5, 6), "YSYMM": (2, 4, 6), "ZSYMM": (3, 4, 5),
    "XASYMM": (2, 3, 4), "YASYMM": (1, 3, 5), "ZASYMM": (1, 2, 6),
}

#: Keywords whose data lines start with a node id or a node-set name.
NODE_FIRST = frozenset({"CLOAD", "CFLUX", "CFILM", "TEMPERATURE", "NODAL THICKNESS",
                        "BOUNDARY", "KINEMATIC COUPLING"})
#: Keywords that generate nodes or elements bandwise cannot follow.
GENERATORS = frozenset({"NGEN", "NCOPY", "NFILL", "ELGEN", "ELCOPY", "NMAP"})
#: Keyword options that hold one node id.
NODE_OPTIONS = frozenset({"REF NODE", "NODE", "REFNODE"})
#: Initial-condition types given per node.
NODAL_INITIAL = frozenset({"TEMPERATURE", "VELOCITY", "FIELD", "PORE PRESSURE",
                           "SATURATION", "ROTATING VELOCITY", "DISPLACEMENT"})

_LINE_PREFIXES = ("SAX", "MAX", "B2", "B3", "T2D", "T3D", "FRAME", "PIPE", "ELBOW", "DC1D",
                  "R2D", "RB2D", "RAX", "DCAX2", "GK2D")
_SOLID_PREFIXES = ("C3D", "DC3D", "AC3D", "COH3D", "SC6", "SC8", "GK3D", "DCC3D")
_SURFACE_PREFIXES = ("CPS", "CPE", "CAX", "CGAX", "CGPE", "STRI", "SFM3D", "M3D", "R3D", "DC2D",
                     "DCAX", "DS", "S")
_SOLID_BY_COUNT = {4: "tetra", 10: "tetra10", 8: "hexahedron", 20: "hexahedron20",
                   27: "hexahedron27", 6: "wedge", 15: "wedge15", 5: "pyramid", 13: "pyramid13"}
_SURFACE_BY_COUNT = {3: "triangle", 6: "triangle6", 4: "quad", 8: "quad8", 9: "quad9"}
_LINE_BY_COUNT = {2: "line", 3: "line3"}

#: Most ids a GENERATE range may hold (a damaged bound would cost gigabytes).
MAX_RANGE = 10**7

_NODE_TOKEN = re.compile(r"^(?:[A-Za-z_][^.]*\.)?(\d+)$")


def cell_type_of(element_type: str, n_nodes: int) -> str | None:
    """meshio cell type of a keyword-deck element type with ``n_nodes`` nodes (None if unknown).

    The family comes from the type name's prefix (``C3D`` solids, ``CPS``/``S``
    plane and shell, ``B``/``T`` beams and trusses), the shape from the node
    count, since the node order of these types follows the VTK one.
    """
    name = element_type.upper()
    for prefixes, table in ((_LINE_PREFIXES, _LINE_BY_COUNT), (_SOLID_PREFIXES, _SOLID_BY_COUNT),
                            (_SURFACE_PREFIXES, _SURFACE_BY_COUNT)):
        if name.startswith(prefixes):
            return table.get(n_nodes)
    return None


@dataclass(frozen=True)
class _Token:
    text: str
    start: int
    end: int


@dataclass
class _State:
    """What the reader accumulates while going through the lines."""

    path: str
    node_ids: list[int] = field(default_factory=list)
    coords: list[np.ndarray] = field(default_factory=list)
    elements: dict[tuple[str, str], tuple[list[int], list[np.ndarray]]] = field(default_factory=dict)
    node_sets: dict[str, list[int]] = field(default_factory=dict)
    set_names: dict[str, str] = field(default_factory=dict)  # upper -> as written
    supports: list[tuple[int, tuple[str, ...]]] = field(default_factory=list)
    links: list[tuple[str, np.ndarray]] = field(default_factory=list)
    loads: list[tuple[str, int]] = field(default_factory=list)
    refs: NodeRefs = field(default_factory=NodeRefs)
    list_rewrites: list[ListRewrite] = field(default_factory=list)
    unhandled: dict[str, int] = field(default_factory=dict)
    includes: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def _tokens(line: str) -> list[_Token]:
    """Comma-separated tokens of a line with their spans (spaces stripped)."""
    body = line.rstrip("\r\n")
    out = []
    pos = 0
    for piece in body.split(","):
        stripped = piece.strip()
        lead = len(piece) - len(piece.lstrip())
        out.append(_Token(stripped, pos + lead, pos + lead + len(stripped)))
        pos += len(piece) + 1
    return out


def _keyword(line: str) -> tuple[str, dict[str, _Token], list[_Token]]:
    """Name, options (upper-case keys -> value token) and raw tokens of a keyword line."""
    toks = _tokens(line)
    name = " ".join(toks[0].text[1:].upper().split())
    options: dict[str, _Token] = {}
    for tok in toks[1:]:
        if "=" in tok.text:
            key, value = tok.text.split("=", 1)
            vstart = tok.start + tok.text.index("=") + 1
            vstart += len(value) - len(value.lstrip())
            options[" ".join(key.upper().split())] = _Token(value.strip(), vstart,
                                                            vstart + len(value.strip()))
        elif tok.text:
            options[" ".join(tok.text.upper().split())] = _Token("", tok.end, tok.end)
    return name, options, toks


def _node_id(tok: _Token) -> tuple[int, int, int] | None:
    """(id, start, end) when a token is a node id (``12`` or ``Part-1.12``), else None."""
    m = _NODE_TOKEN.match(tok.text)
    if not m:
        return None
    return int(m.group(1)), tok.start + m.start(1), tok.start + m.end(1)


def _float(tok: _Token, st: _State, k: int) -> float:
    if not tok.text:
        return 0.0
    try:
        return float(tok.text.replace("d", "e").replace("D", "E"))
    except ValueError:
        raise MeshReadError(f"{st.path}: line {k + 1}: {tok.text!r} is not a coordinate") from None


def _int(tok: _Token, st: _State, k: int, what: str) -> int:
    try:
        return int(tok.text)
    except ValueError:
        raise MeshReadError(f"{st.path}: line {k + 1}: {what} {tok.text!r} is not an integer") from None


class _Reader:
    """Goes through the lines of one file (the deck, or an included file)."""

    def __init__(self, lines: list[str], st: _State, rewritable: bool, folder: Path) -> None:
        self.lines = lines
        self.st = st
        self.rewritable = rewritable
        self.folder = folder

    def ref(self, k: int, node: tuple[int, int, int], card: str) -> int:
        if self.rewritable:
            self.st.refs.add(k, node[1], node[2], node[0], card)
        return node[0]

    def nodes_of(self, tok: _Token, k: int, card: str) -> list[int]:
        """The node ids a token names: one node, or every node of a named set."""
        node = _node_id(tok)
        if node is not None:
            return [self.ref(k, node, card)]
        name = tok.text.upper()
        for key in (name, name.rsplit(".", 1)[-1]):
            if key in self.st.set_names:
                return list(self.st.node_sets[self.st.set_names[key]])
        if tok.text:
            self.st.notes.append(f"line {k + 1}: {card} names {tok.text!r}, which is no node "
                                 "set defined before it; ignored")
        return []

    def run(self) -> None:
        k = 0
        n = len(self.lines)
        while k < n:
            line = self.lines[k]
            if not line.startswith("*") or line.startswith("**"):
                k += 1
                continue
            name, options, _ = _keyword(line)
            data = []
            j = k + 1
            while j < n and not (self.lines[j].startswith("*") and not self.lines[j].startswith("**")):
                if self.lines[j].strip() and not self.lines[j].startswith("**"):
                    data.append(j)
                j += 1
            self.card(name, options, k, data)
            k = j

    def card(self, name: str, options: dict[str, _Token], k: int, data: list[int]) -> None:
        st = self.st
        if name in GENERATORS:
            raise MeshReadError(f"{st.path}: line {k + 1}: *{name} generates nodes or elements; "
                                "bandwise reads decks with every node and element written out")
        ref_nodes = self.option_nodes(name, options, k)
        if name == "NODE":
            self.node_card(options, k, data)
        elif name == "ELEMENT":
            self.element_card(options, k, data)
        elif name == "NSET":
            self.nset_card(options, k, data)
        elif name == "INCLUDE":
            self.include_card(options, k)
        elif name == "EQUATION":
            self.equation_card(k, data)
        elif name == "MPC":
            self.mpc_card(data)
        elif name == "SURFACE" and options.get("TYPE", _Token("", 0, 0)).text.upper() == "NODE":
            for j in data:
                self.nodes_of(_tokens(self.lines[j])[0], j, name)
        elif name in NODE_FIRST or (name == "INITIAL CONDITIONS" and options.get(
                "TYPE", _Token("", 0, 0)).text.upper() in NODAL_INITIAL):
            self.node_first_card(name, options, data, ref_nodes)
        elif name in ("RIGID BODY", "COUPLING", "DISTRIBUTING COUPLING"):
            self.rigid_card(name, options, k, ref_nodes)

    def option_nodes(self, name: str, options: dict[str, _Token], k: int) -> list[int]:
        """Node ids given as keyword options (``REF NODE=12``), recorded for rewriting."""
        found = []
        for key in NODE_OPTIONS & options.keys():
            node = _node_id(options[key])
            if node is not None:
                found.append(self.ref(k, node, name))
            elif options[key].text:
                found.extend(self.nodes_of(options[key], k, name))
        return found

    def node_card(self, options: dict[str, _Token], k: int, data: list[int]) -> None:
        st = self.st
        members: list[int] = []
        for first, stop in data_runs(self.lines, data):
            table = comma_table(self.lines, first, stop) if stop - first > 8 else None
            if table is None or not 2 <= table.values.shape[1] <= 4 or not table.integer[:, 0].all():
                for j in range(first, stop):
                    members.append(self.node_line(j))
                continue
            ids = table.values[:, 0].astype(np.int64)
            xyz = np.zeros((ids.size, 3))
            xyz[:, :table.values.shape[1] - 1] = table.values[:, 1:]
            if self.rewritable:
                st.refs.add_block(table.lines, table.start[:, 0], table.end[:, 0], ids, "NODE")
            st.node_ids.extend(ids.tolist())
            st.coords.append(xyz)
            members.extend(ids.tolist())
        if "NSET" in options:
            self.add_set(options["NSET"].text, members)
        if "SYSTEM" in options and options["SYSTEM"].text.upper() not in ("", "R"):
            st.notes.append(f"line {k + 1}: nodes given in system {options['SYSTEM'].text}; "
                            "coordinates taken as written")

    def node_line(self, j: int) -> int:
        """One node line read on its own; returns the node id."""
        st = self.st
        toks = _tokens(self.lines[j])
        node = _node_id(toks[0])
        if node is None or "." in toks[0].text:
            raise MeshReadError(f"{st.path}: line {j + 1}: node id {toks[0].text!r} is not "
                                "a positive integer")
        xyz = [_float(t, st, j) for t in toks[1:4]] + [0.0] * (4 - min(len(toks), 4))
        st.node_ids.append(self.ref(j, node, "NODE"))
        st.coords.append(np.array([xyz[:3]], dtype=np.float64))
        return node[0]

    def element_card(self, options: dict[str, _Token], k: int, data: list[int]) -> None:
        st = self.st
        etype = options.get("TYPE", _Token("", 0, 0)).text.upper()
        if not etype:
            raise MeshReadError(f"{st.path}: line {k + 1}: *ELEMENT without TYPE=")
        slow: list[int] = []
        for first, stop in data_runs(self.lines, data):
            table = comma_table(self.lines, first, stop) if stop - first > 8 else None
            if table is None or table.values.shape[1] < 2 or not table.integer.all():
                slow.extend(range(first, stop))
                continue
            self.element_records(etype, self.records(slow))  # keep the file order
            slow = []
            self.element_table(etype, table)
        self.element_records(etype, self.records(slow))

    def element_records(self, etype: str, records: list[list[tuple[int, _Token]]]) -> None:
        """Elements read record by record (continuation lines, odd tokens)."""
        st = self.st
        for record in records:
            first = record[0][1]
            eid = _int(first, st, record[0][0], "element id")
            nodes = []
            for j, tok in record[1:]:
                node = _node_id(tok)
                if node is None:
                    raise MeshReadError(f"{st.path}: line {j + 1}: element {eid} node "
                                        f"{tok.text!r} is not a node id")
                nodes.append(self.ref(j, node, "ELEMENT"))
            cell = cell_type_of(etype, len(nodes))
            if cell is None:
                if len(nodes) > 1:
                    st.links.append((etype, np.asarray(nodes, dtype=np.int64)))
                continue
            ids, conn = st.elements.setdefault((etype, cell), ([], []))
            ids.append(eid)
            conn.append(np.asarray([nodes], dtype=np.int64))

    def element_table(self, etype: str, table: Table) -> None:
        """A uniform run of one-line elements, read at once."""
        st = self.st
        values = table.values.astype(np.int64)
        nodes = values[:, 1:]
        if self.rewritable:
            st.refs.add_block(np.repeat(table.lines, nodes.shape[1]), table.start[:, 1:],
                              table.end[:, 1:], nodes, "ELEMENT")
        cell = cell_type_of(etype, nodes.shape[1])
        if cell is None:
            if nodes.shape[1] > 1:
                st.links.extend((etype, row) for row in nodes)
            return
        ids, conn = st.elements.setdefault((etype, cell), ([], []))
        ids.extend(values[:, 0].tolist())
        conn.append(nodes)  # a block of rows, stacked with the others at the end

    def records(self, data: list[int]) -> list[list[tuple[int, _Token]]]:
        """Data records: a line ending with a comma continues on the next one."""
        out: list[list[tuple[int, _Token]]] = []
        current: list[tuple[int, _Token]] = []
        for j in data:
            toks = _tokens(self.lines[j])
            current.extend((j, t) for t in toks if t.text)
            if not self.lines[j].rstrip().endswith(","):
                if current:
                    out.append(current)
                current = []
        if current:
            out.append(current)
        return out

    def add_set(self, name: str, ids: list[int]) -> None:
        key = name.upper()
        if key not in self.st.set_names:
            self.st.set_names[key] = name
            self.st.node_sets[name] = []
        self.st.node_sets[self.st.set_names[key]].extend(ids)

    def nset_card(self, options: dict[str, _Token], k: int, data: list[int]) -> None:
        st = self.st
        name = options.get("NSET", _Token("", 0, 0)).text
        if not name:
            raise MeshReadError(f"{st.path}: line {k + 1}: *NSET without NSET=")
        if "ELSET" in options:
            st.notes.append(f"line {k + 1}: node set {name} is defined through elements; "
                            "its members are not listed")
            return
        if "GENERATE" in options:
            ids: list[int] = []
            for j in data:
                toks = [t for t in _tokens(self.lines[j]) if t.text]
                nums = [_int(t, st, j, "node range bound") for t in toks[:3]]
                start, stop = nums[0], nums[1] if len(nums) > 1 else nums[0]
                step = nums[2] if len(nums) > 2 else 1
                if step <= 0 or stop < start or (stop - start) // step > MAX_RANGE:
                    raise MeshReadError(f"{st.path}: line {j + 1}: bad node range "
                                        f"{start}, {stop}, {step}")
                ids.extend(range(start, stop + 1, step))
            self.add_set(name, ids)
            if self.rewritable and data:
                header = self.lines[k].rstrip("\r\n")
                st.list_rewrites.append(ListRewrite(
                    "NSET", (k, *data), (_without_option(header, "GENERATE"),),
                    np.asarray(ids, dtype=np.int64), "keyword"))
            return
        ids = []
        for j in data:
            for tok in _tokens(self.lines[j]):
                if tok.text:
                    ids.extend(self.nodes_of(tok, j, "NSET"))
        self.add_set(name, ids)

    def include_card(self, options: dict[str, _Token], k: int) -> None:
        st = self.st
        name = options.get("INPUT", _Token("", 0, 0)).text.strip("'\"")
        target = self.folder / name
        if not name or not target.is_file():
            raise MeshReadError(f"{st.path}: line {k + 1}: included file {name!r} not found")
        st.includes.append(name)
        text = read_deck_text(target)
        _Reader(text.splitlines(keepends=True), st, False, target.parent).run()

    def equation_card(self, k: int, data: list[int]) -> None:
        st = self.st
        pending = 0
        terms: list[int] = []
        for j in data:
            toks = [t for t in _tokens(self.lines[j]) if t.text]
            if pending == 0:
                pending = _int(toks[0], st, j, "number of equation terms")
                terms = []
                continue
            for t in range(0, len(toks), 3):
                terms.extend(self.nodes_of(toks[t], j, "EQUATION"))
                pending -= 1
            if pending <= 0:
                pending = 0
                if len(terms) > 1:
                    st.links.append(("EQUATION", np.asarray(terms, dtype=np.int64)))

    def mpc_card(self, data: list[int]) -> None:
        for j in data:
            toks = [t for t in _tokens(self.lines[j]) if t.text]
            nodes = [n for t in toks[1:] for n in self.nodes_of(t, j, "MPC")]
            if len(nodes) > 1:
                self.st.links.append(("MPC", np.asarray(nodes, dtype=np.int64)))

    def node_first_card(self, name: str, options: dict[str, _Token], data: list[int],
                        ref_nodes: list[int]) -> None:
        st = self.st
        group: list[int] = list(ref_nodes)
        for j in data:
            toks = _tokens(self.lines[j])
            nodes = self.nodes_of(toks[0], j, name)
            if name == "BOUNDARY":
                dofs = _boundary_dofs(toks[1:])
                st.supports.extend((n, dofs) for n in nodes if dofs)
            elif name == "KINEMATIC COUPLING":
                group.extend(nodes)
            elif name in ("CLOAD", "CFLUX"):
                st.loads.extend((name, n) for n in nodes)
        if name == "KINEMATIC COUPLING" and len(group) > 1:
            st.links.append((name, np.asarray(group, dtype=np.int64)))

    def rigid_card(self, name: str, options: dict[str, _Token], k: int,
                   ref_nodes: list[int]) -> None:
        group = list(ref_nodes)
        for key in ("PIN NSET", "TIE NSET"):
            if key in options:
                group.extend(self.nodes_of(options[key], k, name))
        if "ELSET" in options or "SURFACE" in options:
            self.st.notes.append(f"line {k + 1}: *{name} ties a surface or element set; only "
                                 "its reference node and node sets are linked")
        if len(group) > 1:
            self.st.links.append((name, np.asarray(group, dtype=np.int64)))


def _boundary_dofs(toks: list[_Token]) -> tuple[str, ...]:
    """DOF names of one boundary line's fields after the node: a type, or first/last DOF."""
    if not toks or not toks[0].text:
        return ()
    word = toks[0].text.upper()
    if word in BOUNDARY_TYPES:
        numbers: tuple[int, ...] = BOUNDARY_TYPES[word]
    else:
        try:
            first = int(float(word))
            last = int(float(toks[1].text)) if len(toks) > 1 and toks[1].text else first
        except ValueError:
            return ()
        numbers = tuple(range(first, last + 1))
    return tuple(DOF_OF_NUMBER[d] for d in numbers if d in DOF_OF_NUMBER)


def _without_option(header: str, option: str) -> str:
    """A keyword line without one option (``, GENERATE``), spacing of the rest kept."""
    pieces = header.split(",")
    kept = [p for p in pieces if " ".join(p.upper().split()) != option]
    return ",".join(kept)


def read_keyword_deck(path: str | Path) -> Deck:
    """Read a keyword deck (``.inp``) into a :class:`~bandwise.formats.decks.deck.Deck`.

    Raises
    ------
    MeshReadError
        No nodes, a malformed node or element line, a node id defined twice,
        generation cards, a missing include file.
    """
    path = Path(path)
    text = read_deck_text(path)
    return parse_keyword_deck(text, str(path), path.parent)


def parse_keyword_deck(text: str, source: str = "deck", folder: Path | None = None) -> Deck:
    """Parse keyword-deck text (see :func:`read_keyword_deck`)."""
    lines = text.splitlines(keepends=True)
    st = _State(source)
    _Reader(lines, st, True, folder or Path(".")).run()
    if not st.node_ids:
        raise MeshReadError(f"{source}: no *NODE data found: not a keyword deck, or an empty one")
    return assembled_deck(
        source, "keyword", lines, st, st.list_rewrites,
        "node id {id} is defined twice (decks whose parts each number their nodes from 1 "
        "are not supported)")
