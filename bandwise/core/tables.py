"""Plain-text tables and units for the command line (no third-party formatting)."""

from __future__ import annotations

from collections.abc import Sequence


def human_bytes(n: float) -> str:
    """Bytes in binary units: ``1536 -> '1.5 KiB'``."""
    units = ["B", "KiB", "MiB", "GiB", "TiB", "PiB"]
    value = float(n)
    for unit in units:
        if abs(value) < 1024 or unit == units[-1]:
            return f"{value:.0f} {unit}" if unit == "B" else f"{value:.1f} {unit}"
        value /= 1024
    return f"{value:.1f} PiB"  # pragma: no cover


def human_count(n: float) -> str:
    """A large count with an SI suffix: ``2.3e9 -> '2.30e9'`` style kept readable."""
    n = float(n)
    if abs(n) < 1e6:
        return f"{n:,.0f}"
    return f"{n:.3g}"


def human_seconds(seconds: float) -> str:
    """A duration as a reader takes it in: ``0.4 ms``, ``12.3 ms``, ``4.56 s``, ``2 min 05 s``."""
    if seconds < 1:
        return f"{seconds * 1000:.1f} ms"
    if seconds < 60:
        return f"{seconds:.2f} s"
    minutes, rest = divmod(round(seconds), 60)
    return f"{minutes} min {rest:02d} s"


def render_table(rows: Sequence[Sequence[object]], header: Sequence[str] | None = None,
                 align: str | None = None) -> str:
    """Render rows as an aligned text table.

    ``align`` holds one letter per column, ``l`` or ``r`` (default: first
    column left, the others right).
    """
    table = [[str(c) for c in r] for r in rows]
    if header is not None:
        table.insert(0, [str(h) for h in header])
    if not table:
        return ""
    ncol = max(len(r) for r in table)
    for r in table:
        r.extend([""] * (ncol - len(r)))
    align = align or ("l" + "r" * (ncol - 1))
    widths = [max(len(r[c]) for r in table) for c in range(ncol)]
    lines = []
    for k, r in enumerate(table):
        cells = [r[c].ljust(widths[c]) if align[c] == "l" else r[c].rjust(widths[c])
                 for c in range(ncol)]
        lines.append("  ".join(cells).rstrip())
        if k == 0 and header is not None:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)
