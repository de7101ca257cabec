"""Safe output: every file bandwise writes appears whole or not at all.

Checks: the package writes files only through :mod:`bandwise.formats.atomic` (a
scan of the source); a write that fails (disk full, ``ENOSPC``; a rename
refused; a format writer raising half way) leaves the previous output
byte for byte and no temporary file; ``renumber`` never overwrites its
input unless told to.  Temporary file then rename in the same folder is
the POSIX way to replace a file atomically (``rename(2)``, common practice).
"""

from __future__ import annotations

import ast
import errno
import hashlib
import os
from pathlib import Path

import numpy as np
import pytest

import bandwise
from bandwise.core.errors import MeshWriteError
from bandwise.core.generate import quad_grid, scrambled
from bandwise.formats import atomic, write_model
from bandwise.formats.decks import read_deck
from bandwise.formats.decks.files import write_renumbered_deck
from bandwise.formats.node_map import write_node_map

PACKAGE = Path(bandwise.__file__).resolve().parent

#: Calls that put bytes in a named file (or move one into place).
WRITING_ATTRS = {"write_text", "write_bytes", "tofile", "savetxt", "savez", "save", "to_csv",
                 "replace", "rename", "move", "copy", "copyfile", "copy2"}
#: (module, function) allowed to write outside ``with atomic_folder(...)``, and why.
ALLOWED = {
    ("formats/atomic.py", "atomic_folder"): "the atomic layer itself",
    ("formats/atomic.py", "write_bytes_atomic"): "the atomic layer itself",
    ("faces/report/build.py", "write_report"): "files written into its own temporary folder",
    ("faces/report/build.py", "_publish"): "moves the finished temporary folder's files into place",
    ("formats/atomic.py", "_claim"): "the atomic layer itself (its note of the writing process)",
    ("formats/atomic.py", "_publish"): "the atomic layer itself",
    ("formats/mesh_io.py", "_own_companion"): "renames a file inside the temporary folder",
}
#: Writers handed a file in the output's temporary folder by ``mesh_io.write_model``.
ALLOWED.update({("formats/gmsh_writer.py", f): "writes the temporary file write_model gives it"
                for f in ("_numbers", "_write_nodes", "write_data", "write_gmsh")})
ALLOWED.update({("formats/vtu_writer.py", f): "writes the temporary file write_model gives it"
                for f in ("write_vtu", "_write_array")})


def _in_atomic_folder(func: ast.AST) -> bool:
    """True when the function writes inside ``with atomic_folder(...) as tmp``."""
    return any(isinstance(item.context_expr, ast.Call)
               and getattr(item.context_expr.func, "id", "") == "atomic_folder"
               for node in ast.walk(func) if isinstance(node, ast.With) for item in node.items)


def _writes(tree: ast.AST) -> list[tuple[str, int, str]]:
    """(function, line, call) of every call that writes a file outside an atomic folder."""
    found = []
    for func in [n for n in ast.walk(tree) if isinstance(n, ast.FunctionDef | ast.AsyncFunctionDef)]:
        if _in_atomic_folder(func):
            continue
        for node in ast.walk(func):
            if not isinstance(node, ast.Call):
                continue
            f = node.func
            if isinstance(f, ast.Name) and f.id == "open":
                mode = node.args[1] if len(node.args) > 1 else next(
                    (k.value for k in node.keywords if k.arg == "mode"), None)
                if isinstance(mode, ast.Constant) and set(str(mode.value)) & set("wax+"):
                    found.append((func.name, node.lineno, "open(..., 'w')"))
            elif isinstance(f, ast.Attribute):
                owner = f.value.id if isinstance(f.value, ast.Name) else ""
                if f.attr in WRITING_ATTRS and (owner in ("os", "shutil", "np", "numpy")
                                                or f.attr.startswith("write")
                                                or f.attr == "tofile"):
                    found.append((func.name, node.lineno, f"{owner}.{f.attr}"))
                elif f.attr == "write" and owner == "meshio":
                    found.append((func.name, node.lineno, "meshio.write"))
    return found


def test_every_write_goes_through_the_atomic_layer():
    offenders = []
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE).as_posix()
        for func, line, call in _writes(ast.parse(path.read_text())):
            if (rel, func) not in ALLOWED:
                offenders.append(f"{rel}:{line} {func}: {call}")
    assert offenders == []
    # the scan sees writes where they are: it is not blind
    assert _writes(ast.parse("def f(p):\n    open(p, 'w').write('x')\n"))


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith(".") or ".part" in p.name)


def _disk_full(*_args, **_kwargs):
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


WRITERS = {
    "text": lambda p: atomic.write_text_atomic(p, "new content\n"),
    "bytes": lambda p: atomic.write_bytes_atomic(p, b"new content\n"),
    "mesh": lambda p: write_model(quad_grid(4, 3), p),
    "node map": lambda p: write_node_map(p, np.arange(12)[::-1]),
}


@pytest.mark.parametrize("failure", ["rename", "fsync"])
@pytest.mark.parametrize("writer", list(WRITERS))
def test_failed_write_keeps_the_old_output(writer, failure, tmp_path, monkeypatch):
    target = tmp_path / ("out.vtu" if writer == "mesh" else "out.txt")
    target.write_bytes(b"old output\n")
    before = _sha(target)
    monkeypatch.setattr(os, "replace" if failure == "rename" else "fsync", _disk_full)
    with pytest.raises(MeshWriteError, match="No space left|write failed"):
        WRITERS[writer](target)
    assert _sha(target) == before
    assert _leftovers(tmp_path) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.txt" if writer != "mesh" else "out.vtu"]


@pytest.mark.parametrize("name", ["plate.vtk", "plate.vtu"])
def test_format_writer_failing_half_way_leaves_nothing(tmp_path, monkeypatch, name):
    """meshio's writer (legacy VTK) or bandwise's own (VTU) failing after writing a part."""
    import meshio

    from bandwise.formats import vtu_writer

    def half_written(path, mesh, file_format=None, **kw):
        Path(path).write_text("<VTKFile half")
        raise ValueError("writer gave up")

    def half_array(f, *args):
        f.write(b"<DataArray half")
        raise ValueError("writer gave up")

    monkeypatch.setattr(meshio, "write", half_written)
    monkeypatch.setattr(vtu_writer, "_write_array", half_array)
    target = tmp_path / name
    with pytest.raises(MeshWriteError, match="writer gave up"):
        write_model(quad_grid(3, 3), target)
    assert list(tmp_path.iterdir()) == []


def test_missing_folder_is_one_clear_error(tmp_path):
    with pytest.raises(MeshWriteError, match="does not exist"):
        atomic.write_text_atomic(tmp_path / "nowhere" / "x.txt", "x")


def test_failed_deck_write_keeps_the_old_output(tmp_path, monkeypatch):
    deck_path = tmp_path / "plate.inp"
    write_model(quad_grid(4, 4), deck_path)
    out = tmp_path / "renumbered.inp"
    out.write_text("previous result\n")
    deck = read_deck(deck_path)
    monkeypatch.setattr(os, "replace", _disk_full)
    with pytest.raises(MeshWriteError):
        write_renumbered_deck(deck, np.arange(deck.n_nodes)[::-1], out)
    assert out.read_text() == "previous result\n"
    assert _leftovers(tmp_path) == []


def _plate(tmp_path: Path) -> Path:
    path = tmp_path / "plate.vtu"
    write_model(scrambled(quad_grid(8, 5), seed=3), path)
    return path


def test_renumber_refuses_to_overwrite_its_input(tmp_path, runner, cli_app):
    src = _plate(tmp_path)
    before = _sha(src)
    result = runner.invoke(cli_app, ["renumber", str(src), str(src)])
    assert result.exit_code == 2
    assert "--replace-input" in result.stderr and "Traceback" not in result.stderr
    assert _sha(src) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plate.vtu"]


def test_renumber_replaces_its_input_when_told(tmp_path, runner, cli_app):
    src = _plate(tmp_path)
    before = _sha(src)
    result = runner.invoke(cli_app, ["renumber", str(src), str(src), "--replace-input",
                                     "--method", "rcm"])
    assert result.exit_code == 0, result.stderr
    assert _sha(src) != before
    assert _leftovers(tmp_path) == []


def test_renumber_write_failure_leaves_no_output(tmp_path, runner, cli_app, monkeypatch):
    src = _plate(tmp_path)
    before = _sha(src)
    monkeypatch.setattr(os, "replace", _disk_full)
    result = runner.invoke(cli_app, ["renumber", str(src), str(tmp_path / "out.vtu"),
                                     "--method", "rcm"])
    assert result.exit_code == 2
    assert len(result.stderr.strip().splitlines()) == 1 and "Traceback" not in result.stderr
    assert _sha(src) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plate.vtu"]
