"""Sparse matrix files: read a pattern to renumber, write the permuted matrix.

Formats read
------------
- Matrix Market coordinate files (``.mtx``, ``.mm``, optionally gzipped),
  through :func:`scipy.io.mmread`; a symmetric file stores one triangle and
  is expanded to both.
- Harwell-Boeing (``.rsa .rua .psa .pua`` and the other three-letter type
  extensions) and Rutherford-Boeing (``.rb``) files, with a reader of our
  own: scipy's ``hb_read`` refuses symmetric and pattern-only files, which
  are most of the structural test set.  The header line counts, the matrix
  type, the dimensions and the Fortran formats of pointers, indices and
  values (``(16I5)``, ``(1P,4E20.12)``, ``(3D26.18)`` ...) are parsed and
  checked against the data, so a truncated or inconsistent file is one
  :class:`~bandwise.core.errors.MeshReadError` line.

Every stored entry counts as structure, explicit zeros included: the
pattern of the file is the pattern the solver would assemble.

Format written: Matrix Market coordinate, ``symmetric`` (lower triangle) when
the permuted matrix is symmetric, ``pattern`` when the input had no values.

References
----------
I. S. Duff, R. G. Grimes and J. G. Lewis, "Sparse matrix test problems",
ACM Trans. Math. Softw. 15 (1989) 1-14 (the Harwell-Boeing format).
I. S. Duff, R. G. Grimes and J. G. Lewis, "The Rutherford-Boeing sparse
matrix collection", Technical Report RAL-TR-97-031, 1997.
R. F. Boisvert, R. Pozo and K. A. Remington, "The Matrix Market exchange
formats: initial design", NIST Interagency Report 5935, 1996.
"""

from __future__ import annotations

import gzip
import io
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import scipy.sparse as sp
from numpy.typing import NDArray

from bandwise.core.errors import InputError, MeshReadError, one_line
from bandwise.core.model import check_permutation

from .atomic import atomic_folder

if TYPE_CHECKING:
    from bandwise.core.summary import MeshSummary

#: Matrix Market file name endings.
MATRIX_MARKET_EXTENSIONS = (".mtx", ".mm", ".mtx.gz", ".mm.gz")
#: Rutherford-Boeing file name endings.
RUTHERFORD_BOEING_EXTENSIONS = (".rb",)
#: Harwell-Boeing type extensions: value type (real, complex, pattern),
#: symmetry (symmetric, unsymmetric, hermitian, skew, rectangular), assembled.
HARWELL_BOEING_EXTENSIONS = tuple(f".{v}{s}a" for v in "rcp" for s in "suhzr") + (".hb",)

_FORTRAN_FORMAT = re.compile(
    r"^\(\s*(?:\d*P\s*,?\s*)?(\d*)\s*([IEDFG])\s*(\d+)(?:\s*\.\s*\d+)?(?:\s*E\s*\d+)?\s*\)$",
    re.IGNORECASE)


@dataclass(frozen=True)
class MatrixData:
    """A sparse matrix read from a file, with what its header said.

    Attributes
    ----------
    matrix
        The matrix in CSR form, both triangles stored (a symmetric file is
        expanded); a pattern-only file gives boolean ``True`` entries.
    symmetry
        ``general``, ``symmetric``, ``skew-symmetric`` or ``hermitian``.
    field
        ``real``, ``integer``, ``complex`` or ``pattern``.
    title
        The file's title or first comment line (may be empty).
    source
        Where it was read from.
    """

    matrix: sp.csr_matrix
    symmetry: str
    field: str
    title: str = ""
    source: str = ""

    @property
    def n_rows(self) -> int:
        """Order of the matrix."""
        return int(self.matrix.shape[0])

    def __repr__(self) -> str:
        n, m = self.matrix.shape
        return (f"MatrixData({self.source or 'matrix'}: {n} x {m}, {self.matrix.nnz} entries, "
                f"{self.field} {self.symmetry})")


def _name(path: str | os.PathLike[str]) -> str:
    return Path(path).name.lower()


def is_matrix_file(path: str | os.PathLike[str]) -> bool:
    """True when the file name says a sparse matrix (Matrix Market, Harwell- or Rutherford-Boeing)."""
    name = _name(path)
    return name.endswith(MATRIX_MARKET_EXTENSIONS + RUTHERFORD_BOEING_EXTENSIONS
                         + HARWELL_BOEING_EXTENSIONS)


def is_matrix_market_name(path: str | os.PathLike[str]) -> bool:
    """True when the file name ends like a Matrix Market file."""
    return _name(path).endswith(MATRIX_MARKET_EXTENSIONS)


def read_matrix(path: str | os.PathLike[str]) -> sp.csr_matrix:
    """Read a sparse matrix file into CSR form, both triangles stored.

    Parameters
    ----------
    path
        A Matrix Market, Harwell-Boeing or Rutherford-Boeing file (read-only).

    Returns
    -------
    scipy.sparse.csr_matrix
        Square; explicit zeros kept as entries (they are structure).

    Raises
    ------
    MeshReadError
        Missing, malformed, truncated, inconsistent or non-square files.
    """
    return read_matrix_data(path).matrix


def read_matrix_data(path: str | os.PathLike[str]) -> MatrixData:
    """Read a sparse matrix file, keeping its symmetry and value type (see :func:`read_matrix`)."""
    path = Path(path)
    if not path.exists():
        raise MeshReadError(f"{path}: no such file")
    if path.is_dir():
        raise MeshReadError(f"{path}: is a folder, not a matrix file")
    if not is_matrix_file(path):
        raise MeshReadError(f"{path}: not a matrix file name (.mtx, .rb, .rsa, .psa, .rua, .pua ...)")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise MeshReadError(f"{path}: cannot read: {exc.strerror or exc}") from None
    if not raw.strip():
        raise MeshReadError(f"{path}: the file is empty")
    if is_matrix_market_name(path):
        data = _read_matrix_market(raw, path)
    else:
        data = _read_boeing(raw, path, rutherford=_name(path).endswith(RUTHERFORD_BOEING_EXTENSIONS))
    n, m = data.matrix.shape
    if n != m:
        raise MeshReadError(f"{path}: the matrix is not square ({n} x {m}); "
                            "renumbering needs a square matrix")
    if n == 0:
        raise MeshReadError(f"{path}: the matrix has no rows")
    return data


# --------------------------------------------------------------------------- Matrix Market

def _read_matrix_market(raw: bytes, path: Path) -> MatrixData:
    import scipy.io

    if _name(path).endswith(".gz"):
        try:
            raw = gzip.decompress(raw)
        except (OSError, EOFError) as exc:
            raise MeshReadError(f"{path}: not a valid gzip file ({exc})") from None
    first = raw.lstrip().split(b"\n", 1)[0].decode("ascii", "replace").split()
    if len(first) < 5 or first[0].lower() != "%%matrixmarket" or first[1].lower() != "matrix":
        raise MeshReadError(f"{path}: not a Matrix Market file (no '%%MatrixMarket matrix' header)")
    layout, field, symmetry = (w.lower() for w in first[2:5])
    try:
        matrix = scipy.io.mmread(io.BytesIO(raw))
    except Exception as exc:  # noqa: BLE001 - scipy raises several types on malformed files
        raise MeshReadError(f"{path}: malformed Matrix Market file: {one_line(exc) or type(exc).__name__}") from None
    if layout == "array":  # dense: every entry stored
        dense = np.atleast_2d(np.asarray(matrix))
        rows, cols = np.indices(dense.shape)
        matrix = sp.coo_matrix((dense.ravel(), (rows.ravel(), cols.ravel())), shape=dense.shape)
    matrix = sp.csr_matrix(matrix)
    matrix.sort_indices()
    if field == "pattern":
        matrix.data = np.ones(matrix.nnz, dtype=bool)
    title = next((ln.lstrip(b"%").strip().decode("utf-8", "replace")
                  for ln in raw.splitlines()[1:3] if ln.startswith(b"%") and ln.strip(b"%- \t\r")),
                 "")
    return MatrixData(matrix, symmetry, field, title, str(path))


# --------------------------------------------------------------------------- Harwell-Boeing

@dataclass(frozen=True)
class _FixedFormat:
    """A Fortran edit descriptor for one data section: ``per_line`` fields of ``width``."""

    per_line: int
    kind: str
    width: int


def _fixed_format(text: str, what: str, path: Path) -> _FixedFormat:
    """Parse ``(16I5)``, ``(1P,4E20.12)``, ``(3D26.18)`` ... into a field layout."""
    m = _FORTRAN_FORMAT.match(text.strip().replace(" ", ""))
    if not m:
        raise MeshReadError(f"{path}: cannot understand the {what} format {text.strip()!r}")
    count, kind, width = m.groups()
    return _FixedFormat(int(count or 1), kind.upper(), int(width))


def _header_ints(line: str, count: int, what: str, path: Path) -> list[int]:
    """Integers of a header line in 14-character columns (whitespace-separated as a fallback)."""
    fields = [line[14 * k:14 * (k + 1)].strip() for k in range(count)]
    try:
        values = [int(f) if f else 0 for f in fields]
    except ValueError:
        words = line.split()
        if len(words) < count or not all(re.fullmatch(r"[+-]?\d+", w) for w in words[:count]):
            raise MeshReadError(f"{path}: malformed header line ({what})") from None
        values = [int(w) for w in words[:count]]
    return values


def _read_boeing(raw: bytes, path: Path, rutherford: bool) -> MatrixData:
    """Read an assembled Harwell-Boeing or Rutherford-Boeing matrix."""
    text = raw.decode("latin-1")
    lines = text.splitlines()
    if len(lines) < 4:
        raise MeshReadError(f"{path}: truncated header ({len(lines)} lines; 4 needed)")
    title = lines[0][:72].strip()
    n_counts = 4 if rutherford else 5
    counts = _header_ints(lines[1], n_counts, "line counts", path)
    total, ptr_lines, ind_lines, val_lines = counts[:4]
    rhs_lines = counts[4] if not rutherford else 0
    mxtype = lines[2][:3].strip().upper()
    if len(mxtype) != 3 or mxtype[0] not in "RCPIQ" or mxtype[1] not in "SUHZR" \
            or mxtype[2] not in "AE":
        raise MeshReadError(f"{path}: unknown matrix type {lines[2][:3]!r} on header line 3")
    if mxtype[2] == "E":
        raise MeshReadError(f"{path}: elemental (unassembled) matrices are not supported")
    nrow, ncol, nnz = _header_ints(lines[2][14:], 3, "dimensions", path)
    if min(nrow, ncol, nnz) < 0 or min(ptr_lines, ind_lines, val_lines, rhs_lines) < 0:
        raise MeshReadError(f"{path}: negative count in the header")
    if total != ptr_lines + ind_lines + val_lines + rhs_lines:
        raise MeshReadError(
            f"{path}: header says {total} data lines but {ptr_lines} + {ind_lines} + "
            f"{val_lines} + {rhs_lines} by section")
    fmt_line = lines[3]
    ptr_fmt = _fixed_format(fmt_line[0:16], "pointer", path)
    ind_fmt = _fixed_format(fmt_line[16:32], "index", path)
    field = {"R": "real", "C": "complex", "P": "pattern", "I": "integer", "Q": "pattern"}[mxtype[0]]
    has_values = field != "pattern" and val_lines > 0
    val_fmt = _fixed_format(fmt_line[32:52], "value", path) if has_values else None
    start = 4 + (1 if rhs_lines > 0 else 0)
    needed = start + ptr_lines + ind_lines + (val_lines if has_values else 0)
    if len(lines) < needed:
        raise MeshReadError(f"{path}: truncated: {len(lines)} lines, the header announces {needed}")
    sections = np.cumsum([start, ptr_lines, ind_lines, val_lines])
    ptr = _fixed_ints(lines[sections[0]:sections[1]], ptr_fmt, ncol + 1, "pointers", path)
    ind = _fixed_ints(lines[sections[1]:sections[2]], ind_fmt, nnz, "row indices", path)
    _check_pointers(ptr, ind, nrow, nnz, path)
    if has_values:
        n_vals = 2 * nnz if field == "complex" else nnz
        vals = _fixed_floats(lines[sections[2]:sections[3]], val_fmt, n_vals, path)
        values: NDArray = vals[0::2] + 1j * vals[1::2] if field == "complex" else vals
    else:
        values = np.ones(nnz, dtype=bool)
        field = "pattern"
    symmetry = {"S": "symmetric", "U": "general", "R": "general", "H": "hermitian",
                "Z": "skew-symmetric"}[mxtype[1]]
    rows = ind - 1
    cols = np.repeat(np.arange(ncol, dtype=np.int64), np.diff(ptr))
    matrix = _expanded(rows, cols, values, (nrow, ncol), symmetry)
    return MatrixData(matrix, symmetry, field, title, str(path))


def _fields(lines: list[str], fmt: _FixedFormat, count: int, what: str,
            path: Path) -> NDArray[np.bytes_]:
    """The first ``count`` fixed-width fields of ``lines`` as a byte-string array."""
    if count == 0:
        return np.zeros(0, dtype=f"S{fmt.width}")
    span = fmt.per_line * fmt.width
    available = len(lines) * fmt.per_line
    if available < count:
        raise MeshReadError(f"{path}: {what}: {len(lines)} lines of {fmt.per_line} fields "
                            f"cannot hold the {count} values the header announces")
    buf = "".join(ln[:span].ljust(span) for ln in lines).encode("latin-1")
    fields = np.frombuffer(buf, dtype=f"S{fmt.width}")
    head, tail = fields[:count], fields[count:]
    blank = np.char.strip(head) == b""
    if blank.any():
        k = int(np.flatnonzero(blank)[0])
        raise MeshReadError(f"{path}: {what}: value {k + 1} of {count} is missing (file truncated?)")
    if tail.size and (np.char.strip(tail) != b"").any():
        raise MeshReadError(f"{path}: {what}: more values than the {count} the header announces")
    return head


def _fixed_ints(lines: list[str], fmt: _FixedFormat, count: int, what: str,
                path: Path) -> NDArray[np.int64]:
    if fmt.kind != "I":
        raise MeshReadError(f"{path}: {what} must have an integer (I) format")
    head = _fields(lines, fmt, count, what, path)
    try:
        return head.astype(np.int64)
    except ValueError:
        raise MeshReadError(f"{path}: {what}: a field is not an integer") from None


def _fixed_floats(lines: list[str], fmt: _FixedFormat, count: int, path: Path) -> NDArray[np.float64]:
    head = _fields(lines, fmt, count, "values", path)
    head = np.char.replace(np.char.replace(head, b"D", b"E"), b"d", b"E")
    try:
        return head.astype(np.float64)
    except ValueError:
        pass
    # Fortran may drop the E of a three-digit exponent: 0.1234-105
    fixed = np.char.strip(head)
    fixed = np.array([re.sub(rb"(?<=[0-9.])([+-]\d+)$", rb"E\1", f) for f in fixed.tolist()])
    try:
        return fixed.astype(np.float64)
    except ValueError:
        raise MeshReadError(f"{path}: values: a field is not a number") from None


def _check_pointers(ptr: NDArray[np.int64], ind: NDArray[np.int64], nrow: int, nnz: int,
                    path: Path) -> None:
    if ptr[0] != 1 or np.any(np.diff(ptr) < 0) or ptr[-1] != nnz + 1:
        raise MeshReadError(f"{path}: column pointers are inconsistent (first must be 1, "
                            f"non-decreasing, last {nnz + 1}; got first {ptr[0]}, last {ptr[-1]})")
    if ind.size and (ind.min() < 1 or ind.max() > nrow):
        raise MeshReadError(f"{path}: a row index is outside 1..{nrow}")


def _expanded(rows: NDArray[np.int64], cols: NDArray[np.int64], values: NDArray,
              shape: tuple[int, int], symmetry: str) -> sp.csr_matrix:
    """CSR of stored entries, the other triangle added for symmetric kinds (zeros kept)."""
    if symmetry != "general":
        off = rows != cols
        mirror = values[off]
        if symmetry == "skew-symmetric":
            mirror = -mirror
        elif symmetry == "hermitian":
            mirror = np.conj(mirror)
        rows, cols = np.r_[rows, cols[off]], np.r_[cols, rows[off]]
        values = np.r_[values, mirror]
    # COO -> CSR sums duplicates but never drops explicit zeros
    matrix = sp.coo_matrix((values, (rows, cols)), shape=shape).tocsr()
    matrix.sort_indices()
    return matrix


# --------------------------------------------------------------------------- writing

def permuted_matrix(matrix: sp.spmatrix, perm: NDArray[np.integer] | None) -> sp.csr_matrix:
    """``B = A[perm][:, perm]``: row/column ``new`` of B is row/column ``perm[new]`` of A."""
    a = sp.csr_matrix(matrix)
    if perm is None:
        return a.copy()
    p = check_permutation(perm, a.shape[0])
    coo = a.tocoo()
    new_of_old = np.empty_like(p)
    new_of_old[p] = np.arange(p.size)
    b = sp.coo_matrix((coo.data, (new_of_old[coo.row], new_of_old[coo.col])), shape=a.shape).tocsr()
    b.sort_indices()
    return b


def _is_symmetric(matrix: sp.csr_matrix, kind: str) -> bool:
    """Same pattern as the transpose and, unless a pattern, the same values."""
    t = matrix.T.tocsr()
    t.sort_indices()
    m = matrix.copy()
    m.sort_indices()
    if not (np.array_equal(m.indptr, t.indptr) and np.array_equal(m.indices, t.indices)):
        return False
    return kind == "pattern" or bool(np.array_equal(m.data, t.data))


def _stored_entries(matrix: sp.spmatrix, perm: NDArray[np.integer] | None,
                    symmetry: str | None, field: str | None) -> tuple[sp.coo_matrix, str, str]:
    """The entries of ``A[perm][:, perm]`` to store (one triangle if symmetric), column by column."""
    b = permuted_matrix(matrix, perm)
    if field is None:
        field = ("pattern" if b.dtype == bool else "complex" if np.iscomplexobj(b.data)
                 else "integer" if np.issubdtype(b.dtype, np.integer) else "real")
    if field not in ("pattern", "real", "integer", "complex"):
        raise InputError(f"unknown Matrix Market field {field!r}")
    if symmetry not in ("general", "symmetric"):  # None, or a kind written in full
        symmetry = "symmetric" if _is_symmetric(b, field) else "general"
    coo = b.tocoo()
    row, col, val = coo.row.astype(np.int64), coo.col.astype(np.int64), coo.data
    if symmetry == "symmetric":
        keep = row >= col
        row, col, val = row[keep], col[keep], val[keep]
    order = np.lexsort((row, col))  # column by column, as the collection stores them
    if field == "pattern":
        val = np.ones(row.size)
    elif field == "integer":
        val = val.astype(np.int64)
    stored = sp.coo_matrix((val[order], (row[order], col[order])), shape=b.shape)
    return stored, symmetry, field


def _write_entries(target: Any, stored: sp.coo_matrix, symmetry: str, field: str,
                   comment: str) -> None:
    """scipy's compiled Matrix Market writer: shortest round-trip decimals, zeros kept."""
    import scipy.io

    scipy.io.mmwrite(target, stored, comment=comment, field=field, symmetry=symmetry)


def matrix_market_text(matrix: sp.spmatrix, perm: NDArray[np.integer] | None = None, *,
                       symmetry: str | None = None, field: str | None = None,
                       comment: str = "") -> str:
    """The Matrix Market coordinate text of ``A[perm][:, perm]`` (see :func:`write_matrix_market`)."""
    stored, symmetry, field = _stored_entries(matrix, perm, symmetry, field)
    buf = io.BytesIO()
    _write_entries(buf, stored, symmetry, field, comment)
    return buf.getvalue().decode("ascii")


def write_matrix_market(path: str | os.PathLike[str], matrix: sp.spmatrix,
                        perm: NDArray[np.integer] | None = None, *, symmetry: str | None = None,
                        field: str | None = None, comment: str = "") -> None:
    """Write ``A[perm][:, perm]`` as a Matrix Market coordinate file, atomically.

    Parameters
    ----------
    path
        Output file; written through a temporary file and a rename.
    matrix
        Square sparse matrix, both triangles stored (as :func:`read_matrix` gives).
    perm
        New order ``perm[new] = old``; None writes the matrix as it is.
    symmetry
        ``symmetric`` (the lower triangle is written) or ``general``; by
        default ``symmetric`` exactly when the permuted matrix equals its
        transpose (a symmetric permutation of a symmetric matrix stays so).
        Entries are written column by column, explicit zeros included.
    field
        ``pattern``, ``real``, ``integer`` or ``complex``; by default from the
        data type (boolean data: ``pattern``).  Values are written as
        the shortest decimal that reads back as the same double.
    comment
        Lines written as ``%`` comments after the header.

    Raises
    ------
    MeshWriteError
        Missing folder or failed write (any existing file is left as it was).
    """
    path = Path(path)
    stored, symmetry, field = _stored_entries(matrix, perm, symmetry, field)
    with atomic_folder(path) as tmp, open(tmp / path.name, "wb") as fh:
        _write_entries(fh, stored, symmetry, field, comment)


# --------------------------------------------------------------------------- sizing

def summarise_matrix(data: MatrixData) -> MeshSummary:
    """Size up a matrix pattern under its current order, as ``check`` does for a mesh.

    Each row is one unknown (node and DOF level coincide); connected parts
    and isolated rows (no off-diagonal entry) come from the pattern's graph.
    """
    from bandwise.core.graph import graph_from_matrix
    from bandwise.core.metrics import metrics
    from bandwise.core.summary import MeshSummary, count_parts

    graph = graph_from_matrix(data.matrix)
    figures = metrics(graph)
    n_parts, isolated = count_parts(graph)
    n = data.n_rows
    return MeshSummary(
        source=data.source, file_format=matrix_format_name(data.source), n_nodes=n,
        cells_by_type={}, dimension=0, dof_rule="one unknown per matrix row",
        dofs_by_signature={"matrix rows": n}, n_dofs=n, n_parts=n_parts, n_orphans=isolated,
        skipped=[], node_level=figures, dof_level=figures,
        extra={"matrix": {"symmetry": data.symmetry, "field": data.field,
                          "entries": int(data.matrix.nnz), "title": data.title}},
    )


def matrix_format_name(path: str | os.PathLike[str]) -> str:
    """``matrix market``, ``rutherford-boeing`` or ``harwell-boeing`` from the file name."""
    if is_matrix_market_name(path):
        return "matrix market"
    if _name(path).endswith(RUTHERFORD_BOEING_EXTENSIONS):
        return "rutherford-boeing"
    return "harwell-boeing"


def matrix_facts(summary: MeshSummary) -> list[tuple[str, str]]:
    """Label/value lines describing a matrix summarised by :func:`summarise_matrix`."""
    info = summary.extra.get("matrix", {})
    return [
        ("file", f"{summary.source} ({summary.file_format})"),
        ("rows", f"{summary.n_nodes:,}"),
        ("entries", (f"{info.get('entries', 0):,} (both triangles, diagonal and explicit "
                    "zeros included)")),
        ("kind", f"{info.get('field', '')} {info.get('symmetry', '')}"),
        ("connected parts", f"{summary.n_parts}"),
        ("isolated rows", f"{summary.n_orphans}"),
    ]
