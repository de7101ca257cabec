"""The house's floors: imports point downward only, and third-party edges stay in place.

faces -> workflows -> algorithms -> core, with file formats at the edge
(formats import only core; workflows and faces call them).  The rule is
read from the source with ``ast``, so a new module is covered the day it
is added.  (The rule itself is the project's own design: DEVELOPERS.md.)
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "bandwise"

#: What each floor may import from bandwise (its own floor included).
ALLOWED = {
    "core": {"core"},
    "algorithms": {"core", "algorithms"},
    "formats": {"core", "formats"},
    "workflows": {"core", "algorithms", "formats", "workflows"},
    "faces": {"core", "algorithms", "formats", "workflows", "faces"},
}
#: Third-party packages that only one part of the house may import.
CONFINED = {"meshio": "formats", "typer": "faces"}


def _modules() -> list[tuple[str, Path]]:
    out = []
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out.append((".".join(parts), path))
    return out


def _imports(module: str, path: Path) -> list[tuple[str, int]]:
    """Absolute names of every module imported by ``path`` (relative ones resolved)."""
    tree = ast.parse(path.read_text(), str(path))
    is_pkg = path.name == "__init__.py"
    package = module.split(".") if is_pkg else module.split(".")[:-1]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(a.name, node.lineno) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - (node.level - 1)]
                name = ".".join(base + ([node.module] if node.module else []))
            else:
                name = node.module or ""
            found.append((name, node.lineno))
            found += [(f"{name}.{a.name}", node.lineno) for a in node.names]
    return found


def _floor(module: str) -> str | None:
    parts = module.split(".")
    if parts[0] != "bandwise" or len(parts) < 2:
        return None
    return parts[1] if parts[1] in ALLOWED else None


MODULES = _modules()


def test_every_module_sits_on_a_floor():
    homeless = [m for m, _ in MODULES
                if m not in ("bandwise", "bandwise.__main__") and _floor(m) is None]
    assert homeless == []


@pytest.mark.parametrize("module,path", MODULES, ids=[m for m, _ in MODULES])
def test_imports_point_downward(module, path):
    floor = _floor(module)
    if floor is None:  # the package's front door re-exports every floor
        return
    bad = [f"line {line}: {name}" for name, line in _imports(module, path)
           if _floor(name) is not None and _floor(name) not in ALLOWED[floor]]
    assert bad == [], f"{module} ({floor}) imports upward or sideways"


@pytest.mark.parametrize("package,floor", sorted(CONFINED.items()))
def test_third_party_edges_are_confined(package, floor):
    offenders = sorted({m for m, p in MODULES for name, _ in _imports(m, p)
                        if name.split(".")[0] == package and _floor(m) != floor})
    assert offenders == [], f"{package} imported outside bandwise.{floor}"


def test_the_package_imports_without_the_command_line():
    import subprocess
    import sys

    code = ("import sys, bandwise; "
            "assert 'typer' not in sys.modules and 'bandwise.faces.cli' not in sys.modules")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
