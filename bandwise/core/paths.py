"""Questions about file paths that every workflow asks the same way."""

from __future__ import annotations

import os
from pathlib import Path


def same_file(a: str | os.PathLike[str], b: str | os.PathLike[str]) -> bool:
    """True when two paths name one file (the same path, or links to one file)."""
    a, b = Path(a), Path(b)
    if a.resolve() == b.resolve():
        return True
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def same_extension(a: str | os.PathLike[str], b: str | os.PathLike[str]) -> bool:
    """True when two paths end alike (every suffix, case ignored: ``.vtu``, ``.msh.gz``)."""
    return "".join(Path(a).suffixes).lower() == "".join(Path(b).suffixes).lower()
