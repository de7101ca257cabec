"""The one registry of mesh file formats: every command asks it which format a file is.

For each format it holds the file extensions, whether bandwise reads and
writes it (and, when it does not write it, why), what an output in it keeps
of a model (:class:`FormatHolds`, the README's table is generated from it:
:func:`keeps_table`), its node-order conventions
(:mod:`bandwise.formats.conventions`), the kinds of file it can be written
as (:class:`Options`: versions, encodings, compressions) and how to tell
the kind of an existing file (:class:`FileKind`, from its first bytes), and
how to read the node and cell counts its header announces (the memory
estimate before reading).

A format is writable only when its writer passes bandwise's round trip
(``tests/test_roundtrip_formats.py``): renumber with a random permutation,
write, read back with meshio's public reader, undo the permutation, and get
the same points, cells, fields and sets.  meshio reads every other format;
bandwise reads those too but refuses to write them, with the reason.

meshio is not imported here.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from bandwise.core.errors import InputError, MeshReadError, MeshWriteError

from . import conventions, headers

YES, NO = "kept", "lost"


@dataclass(frozen=True)
class FormatHolds:
    """What one output format keeps of a :class:`~bandwise.core.model.Model`.

    Attributes
    ----------
    point_fields, cell_fields
        Nodal and element fields: ``kept``, ``lost``, or how they are kept.
    node_sets, cell_sets
        Node and element sets: ``kept``, ``lost``, or what they become.
    metadata
        Format metadata (gmsh physical names, ...).
    periodic
        gmsh periodic node pairs.
    node_ids
        The original node ids (labels) of the source file.
    """

    point_fields: str
    cell_fields: str
    node_sets: str
    cell_sets: str
    metadata: str
    periodic: str = NO
    node_ids: str = "lost: nodes are numbered 1..n in the new order"


@dataclass(frozen=True)
class Options:
    """The kinds of file a format can be written as; the first of each is the default."""

    versions: tuple[str, ...] = ()
    encodings: tuple[str, ...] = ()
    compressions: tuple[str | None, ...] = (None,)


@dataclass(frozen=True)
class FileKind:
    """The kind of a mesh file: format, version, encoding and compression.

    Attributes
    ----------
    format
        Registry name (:data:`FORMATS`).
    version
        Format version where a format has several (``"4.1"``, ``"4.2"``), else None.
    encoding
        ``"ascii"``, ``"binary"`` or ``"hdf5"`` where a format has several, else None.
    compression
        ``"zlib"``, ``"lzma"`` or None.
    """

    format: str
    version: str | None = None
    encoding: str | None = None
    compression: str | None = None

    def describe(self) -> str:
        """``gmsh 4.1 ascii``, ``vtu binary zlib``."""
        label = FORMATS[self.format].short if self.format in FORMATS else self.format
        words = [label, self.version if self.format not in ("gmsh", "gmsh22") else None,
                 self.encoding, self.compression]
        if self.format in ("gmsh", "gmsh22"):
            words[0] = f"gmsh {self.version or FORMATS[self.format].options.versions[0]}"
        return " ".join(w for w in words if w)

    def to_dict(self) -> dict[str, str | None]:
        """The kind as plain data (for JSON)."""
        return {"format": self.format, "version": self.version, "encoding": self.encoding,
                "compression": self.compression}


@dataclass(frozen=True)
class Format:
    """One mesh file format.

    Attributes
    ----------
    name
        Registry name, as ``--format`` and ``--output-format`` take it (meshio's
        name where meshio reads the format, ``gmsh22`` for gmsh 2.2).
    label
        What the trade calls it (the README's table).
    extensions
        File name endings, lower case, compound ones first.
    meshio_name
        The name meshio reads it under (None: bandwise's own reader only).
    holds
        What an output keeps; None when bandwise does not write the format.
    refusal
        Why bandwise does not write the format (when ``holds`` is None).
    options
        Versions, encodings and compressions it can be written as.
    sniff
        The kind of an existing file, from its first bytes.
    counts
        The node and cell counts the file's header announces (None: not read).
    cell_types
        Cell types an output can hold, when meshio's tables do not say.
    """

    name: str
    label: str
    extensions: tuple[str, ...]
    meshio_name: str | None
    holds: FormatHolds | None = None
    refusal: str = ""
    options: Options = field(default_factory=Options)
    sniff: Callable[[Path], FileKind] | None = None
    counts: Callable[[Path], headers.HeaderCounts | None] | None = None
    cell_types: frozenset[str] | None = None
    short: str = ""

    @property
    def writable(self) -> bool:
        """True when bandwise writes the format (its round trip is tested)."""
        return self.holds is not None

    @property
    def read_orders(self):
        """Node-order conventions applied after reading (cell type -> order)."""
        return conventions.READ_ORDERS.get(self.name, {})

    @property
    def write_orders(self):
        """Node-order conventions applied before writing (cell type -> order)."""
        return conventions.WRITE_ORDERS.get(self.name, {})

    def default_kind(self) -> FileKind:
        """The kind written when nothing asks for another one."""
        o = self.options
        return FileKind(self.name, o.versions[0] if o.versions else None,
                        o.encodings[0] if o.encodings else None, o.compressions[0])


#: Field-name prefixes under which sets are written to formats without sets.
NODE_SET_FIELD, CELL_SET_FIELD = "node_set:", "cell_set:"
_AS_FIELDS_NODES = (f"written as 0/1 nodal fields '{NODE_SET_FIELD}NAME'; bandwise reads them "
                    "back as sets")
_AS_FIELDS_CELLS = (f"written as 0/1 element fields '{CELL_SET_FIELD}NAME'; bandwise reads them "
                    "back as sets")
PHYSICAL = ("kept as physical groups; an element in several sets is kept in the first, and "
            "in the others where they hold its whole entity")
_PHYSICAL_22 = ("kept as physical groups, one per element (an element in two sets keeps the "
                "first); read back as element tags and names, not as sets")


def _gmsh_kind(path: Path) -> FileKind:
    version, encoding = headers.gmsh_version(headers.head(path, 256))
    return FileKind("gmsh22" if version == "2.2" else "gmsh", version, encoding)


def _vtk_kind(path: Path) -> FileKind:
    version, encoding = headers.vtk_legacy_kind(headers.head(path, 1024))
    return FileKind("vtk", version, encoding)


def _vtu_kind(path: Path) -> FileKind:
    encoding, compression = headers.vtu_kind(headers.head(path))
    return FileKind("vtu", None, encoding, compression)


def _xdmf_kind(path: Path) -> FileKind:
    return FileKind("xdmf", None, headers.xdmf_encoding(headers.head(path)))


def _flac3d_kind(path: Path) -> FileKind:
    return FileKind("flac3d", None, headers.flac3d_encoding(headers.head(path, 8)))


_LINEAR_3D = frozenset({"tetra", "pyramid", "wedge", "hexahedron"})

#: Every format, by registry name.  Writable ones first, in the README's order.
FORMATS: dict[str, Format] = {f.name: f for f in (
    Format("gmsh22", "gmsh 2.2 (.msh)", (".msh",), "gmsh",
           FormatHolds(YES, "kept with one cell block; lost with several (meshio cannot read "
                       "them back)", NO, _PHYSICAL_22, "physical names kept", YES),
           options=Options(("2.2",), ("binary", "ascii")), sniff=_gmsh_kind,
           counts=headers.gmsh_counts, short="gmsh"),
    Format("gmsh", "gmsh 4.1 (.msh)", (".msh",), "gmsh",
           FormatHolds(YES, YES, NO, PHYSICAL, "physical names and bounding entities kept; "
                       "the nodes' entities are not (all nodes in one block, in the new order)",
                       YES),
           options=Options(("4.1",), ("binary", "ascii")), sniff=_gmsh_kind,
           counts=headers.gmsh_counts, short="gmsh"),
    Format("vtu", "VTK XML (.vtu)", (".vtu",), "vtu",
           FormatHolds(YES, YES, _AS_FIELDS_NODES, _AS_FIELDS_CELLS, NO),
           options=Options((), ("binary", "ascii"), ("zlib", "lzma", None)), sniff=_vtu_kind,
           counts=headers.vtu_counts, short="vtu"),
    Format("vtk", "VTK legacy (.vtk)", (".vtk",), "vtk",
           FormatHolds(YES, YES, _AS_FIELDS_NODES, _AS_FIELDS_CELLS, NO),
           options=Options(("5.1", "4.2"), ("binary", "ascii")), sniff=_vtk_kind,
           short="vtk"),
    Format("xdmf", "XDMF + HDF5 (.xdmf)", (".xdmf", ".xmf"), "xdmf",
           FormatHolds(YES, YES, NO, NO, NO),
           options=Options((), ("hdf5", "ascii")), sniff=_xdmf_kind, short="xdmf"),
    Format("med", "MED (.med)", (".med",), "med", FormatHolds(YES, YES, NO, NO, NO),
           short="med"),
    Format("exodus", "Exodus II (.exo, .e)", (".exo", ".e", ".ex2"), "exodus",
           FormatHolds(YES, NO, YES, NO, NO), short="exodus"),
    Format("flac3d", "FLAC3D grid (.f3grid)", (".f3grid",), "flac3d",
           FormatHolds(NO, NO, NO, "kept as zone and face groups (in slot 1)", NO,
                       node_ids="lost: grid points and zones are numbered 1..n"),
           options=Options((), ("ascii", "binary")), sniff=_flac3d_kind,
           cell_types=_LINEAR_3D, short="flac3d"),
    Format("abaqus", "keyword deck via meshio (.inp)", (".inp",), "abaqus",
           FormatHolds(NO, NO, YES, YES, NO), short="keyword deck"),
    Format("nastran", "bulk-data deck via meshio (.bdf)", (".bdf", ".fem", ".nas"), "nastran",
           FormatHolds(NO, NO, NO, NO, NO), short="bulk-data deck"),
)}

_NOT_VERIFIED = ("its meshio writer is not among those bandwise has verified by its round "
                 "trip (write, read back, same points, cells, fields and sets)")
#: Formats meshio reads that bandwise reads but does not write, with their extensions.
_READ_ONLY = {
    "ansys": (".msh",), "avsucd": (".avs",), "cgns": (".cgns",),
    "dolfin-xml": (".xml",), "h5m": (".h5m",), "hmf": (".hmf",), "mdpa": (".mdpa",),
    "medit": (".mesh", ".meshb"), "netgen": (".vol.gz", ".vol"), "neuroglancer": (),
    "obj": (".obj",), "off": (".off",), "permas": (".post.gz", ".dato.gz", ".post", ".dato"),
    "ply": (".ply",), "stl": (".stl",), "su2": (".su2",), "tecplot": (".dat", ".tec"),
    "tetgen": (".node", ".ele"), "ugrid": (".ugrid",), "wkt": (".wkt",),
}
FORMATS.update({name: Format(name, name, ext, name, refusal=_NOT_VERIFIED, short=name)
                for name, ext in _READ_ONLY.items()})


def get(name: str) -> Format:
    """The format of a registry name.

    Raises
    ------
    InputError
        No such format (the message lists them).
    """
    try:
        return FORMATS[name]
    except KeyError:
        raise InputError(f"unknown format {name!r}; one of: {', '.join(readable_names())}") \
            from None


def readable_names() -> list[str]:
    """Names of every format bandwise reads (``--format``)."""
    return sorted(FORMATS)


def writable_names() -> list[str]:
    """Names of every format bandwise writes (``--output-format``)."""
    return sorted(n for n, f in FORMATS.items() if f.writable)


def _extension(path: str | os.PathLike[str]) -> str:
    name = Path(path).name.lower()
    for f in FORMATS.values():
        for ext in f.extensions:
            if ext.count(".") > 1 and name.endswith(ext):
                return ext
    return Path(name).suffix


def by_extension(path: str | os.PathLike[str]) -> Format | None:
    """The format a path's extension names (``.msh`` is gmsh), or None."""
    ext = _extension(path)
    if ext == ".msh":
        return FORMATS["gmsh"]
    return next((f for f in FORMATS.values() if ext in f.extensions), None)


def detect(path: str | os.PathLike[str], name: str | None = None) -> Format:
    """The format of an input file: ``name`` if given, else from the extension.

    ``.msh`` means gmsh, 2.2 or 4.x as its header says (``--format ansys``
    for a Fluent/ANSYS ``.msh``).

    Raises
    ------
    InputError
        ``name`` is no known format.
    MeshReadError
        The extension names no format.
    """
    if name is not None:
        fmt = get(name)
    else:
        fmt = by_extension(path)
        if fmt is None:
            ext = _extension(path) or "(none)"
            raise MeshReadError(f"{path}: unknown file extension {ext}; name the format with "
                                f"--format (one of: {', '.join(readable_names())})")
    if fmt.name in ("gmsh", "gmsh22"):
        return FORMATS[_gmsh_kind(Path(path)).format]
    return fmt


def kind_of(path: str | os.PathLike[str], fmt: Format) -> FileKind:
    """The kind of an existing file of format ``fmt`` (version, encoding, compression)."""
    if fmt.sniff is not None:
        kind = fmt.sniff(Path(path))
        return kind if kind.format == fmt.name else FileKind(fmt.name)
    return FileKind(fmt.name)


def output_format(path: str | os.PathLike[str], name: str | None = None,
                  like: FileKind | None = None) -> Format:
    """The format an output path is written in.

    ``name`` (``--output-format``) if given; else the extension's, where a
    ``.msh`` output of a gmsh 2.2 source stays gmsh 2.2.

    Raises
    ------
    InputError
        ``name`` is no format bandwise writes.
    MeshWriteError
        The extension names no format.
    """
    if name is not None:
        fmt = FORMATS.get(name)
        if fmt is None:
            raise InputError(f"unknown output format {name!r}; one of: "
                             f"{', '.join(writable_names())}")
        return fmt
    fmt = by_extension(path)
    if fmt is None:
        raise MeshWriteError(f"{path}: unknown output extension; name the format with "
                             f"--output-format (one of: {', '.join(writable_names())})")
    if fmt.name == "gmsh" and like is not None and like.format == "gmsh22":
        return FORMATS["gmsh22"]
    return fmt


def output_kind(fmt: Format, like: FileKind | None) -> tuple[FileKind, list[str]]:
    """The kind an output of ``fmt`` is written as, and how it differs from ``like``.

    The same kind as ``like`` (the source) as far as the format allows:
    its version, encoding and compression when ``like`` is of the same
    format (gmsh 2.2 and 4.x count as one), else the format's default.

    Returns
    -------
    (FileKind, list of str)
        The kind, and one sentence for each way it differs from the source's.
    """
    default = fmt.default_kind()
    same = like is not None and (like.format == fmt.name or
                                 {like.format, fmt.name} <= {"gmsh", "gmsh22"})
    if not same:
        return default, []
    notes = []
    o = fmt.options

    def pick(kind_word: str, wanted: str | None, allowed: tuple, fallback: str | None) -> str | None:
        if wanted is None or not allowed:
            return fallback
        if wanted in allowed:
            return wanted
        notes.append(f"{kind_word} {wanted} is read but not written: written as "
                     f"{fallback or 'none'}")
        return fallback

    version = pick("version", like.version, o.versions, _nearest(like.version, o.versions)
                   or default.version)
    encoding = pick("encoding", like.encoding, o.encodings, default.encoding)
    if like.compression is None or like.compression in o.compressions:
        compression = like.compression if o.compressions != (None,) else None
    else:
        compression = pick("compression", like.compression, o.compressions,
                           default.compression)
    return FileKind(fmt.name, version, encoding, compression), notes


def header_counts(path: str | os.PathLike[str], name: str | None = None
                  ) -> headers.HeaderCounts | None:
    """The node and cell counts a file's header announces, when its format has them (gmsh, VTU)."""
    try:
        fmt = detect(path, name)
    except (InputError, MeshReadError):
        return None
    return fmt.counts(Path(path)) if fmt.counts is not None else None


def _nearest(wanted: str | None, allowed: tuple[str, ...]) -> str | None:
    """The allowed version of the nearest major number to ``wanted`` (older on a tie)."""
    def number(v: str) -> tuple[int, ...]:
        try:
            return tuple(int(p) for p in v.split("."))
        except ValueError:
            return (0,)

    if wanted is None or not allowed:
        return None
    w = number(wanted)
    return min(allowed, key=lambda v: (abs(number(v)[0] - w[0]), number(v)))


def keeps_table() -> str:
    """The README's table "What each output format keeps", from :data:`FORMATS`."""
    head = ("| format | nodal fields | element fields | node sets | element sets | metadata "
            "| periodic |")
    rows = [head, "| --- | --- | --- | --- | --- | --- | --- |"]
    for f in FORMATS.values():
        if f.holds is None:
            continue
        h = f.holds
        rows.append(f"| {f.label} | {h.point_fields} | {h.cell_fields} | {h.node_sets} | "
                    f"{h.cell_sets} | {h.metadata} | {h.periodic} |")
    rows.append("| deck to deck of the same kind (default) | every line kept as written "
                "except node numbers, rewritten in place (nodes, elements, node sets, boundary "
                "conditions, loads, rigid links); ranges written out as lists | | | | | |")
    return "\n".join(rows)


def read_only_text() -> str:
    """The sentence naming the formats bandwise reads but does not write (README)."""
    names = ", ".join(n for n, f in FORMATS.items() if not f.writable)
    return ("Read but not written (their meshio writers fail, or have not been put through, "
            f"bandwise's round trip): {names}.")

