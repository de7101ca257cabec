"""The report's figures: each draws on an Axes (``ax=None`` makes one) and returns it.

matplotlib is imported inside the functions, figures are built without
``pyplot`` and every one runs under the report style (:mod:`.style`).
Everything mesh-sized is reduced first (:mod:`.sampling`, :mod:`.meshview`),
so drawing time and file size do not grow with the mesh.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .meshview import MeshView
from .sampling import Envelope, PatternImage, envelope
from .style import CURVE_AFTER, CURVE_BEFORE, DENSITY_CMAP, HATCHES, MARKS, PARTS, SERIES, styled


def new_axes(width: float = 7.0, height: float = 4.5) -> Any:
    """A fresh Axes on its own :class:`~matplotlib.figure.Figure` (no pyplot)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout="constrained")
    return fig.add_subplot()


def png_bytes(ax_or_fig: Any, dpi: float | None = None) -> bytes:
    """The figure of an Axes (or a Figure) as PNG bytes, rendered with Agg."""
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = getattr(ax_or_fig, "figure", ax_or_fig)
    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi or "figure", metadata={"Software": None})
    return buf.getvalue()


def density_cmap() -> Any:
    """The density colour map, cut so that a cell with one nonzero is clearly grey."""
    import matplotlib
    from matplotlib.colors import ListedColormap

    base = matplotlib.colormaps[DENSITY_CMAP]
    return ListedColormap(base(np.linspace(0.35, 1.0, 256)), name="bandwise_density")


def _part_colours(part: NDArray[np.int64]) -> NDArray[np.float64]:
    from matplotlib.colors import to_rgb

    table = np.array([to_rgb(c) for c in PARTS])
    return table[(np.maximum(part, 1) - 1) % len(PARTS)]


@styled
def mesh_axes(view: MeshView, marks: Mapping[str, NDArray[np.integer]] | None = None,
              arrows: tuple[NDArray[np.integer], NDArray[np.float64]] | None = None,
              ax: Any = None) -> Any:
    """Draw the mesh coloured by connected part, with marked nodes and mode arrows.

    Parameters
    ----------
    view
        The reduced mesh (:func:`~bandwise.faces.report.meshview.mesh_view`).
    marks
        Kind of mark (a key of :data:`~bandwise.faces.report.style.MARKS`, e.g.
        ``"orphan"``) -> node indices to mark.
    arrows
        ``(nodes, vectors)``: a displacement per node (3 components), drawn as
        arrows scaled to the drawing, e.g. a free rigid-body mode.
    ax
        Axes to draw on; a new figure if None.
    """
    from matplotlib.collections import LineCollection, PolyCollection
    from matplotlib.patches import Patch

    ax = ax if ax is not None else new_axes(7.0, 5.5)
    handles = []
    if len(view.facets):
        colours = _part_colours(view.part[view.facets[:, 0]]) * view.shade[:, None]
        edges = "#333333" if len(view.facets) <= 4000 else "none"
        ax.add_collection(PolyCollection(view.xy[view.facets], facecolors=colours,
                                         edgecolors=edges, linewidths=0.3))
    if len(view.lines):
        # members drawn darker than facets: a thin line needs more contrast than an area
        ax.add_collection(LineCollection(view.xy[view.lines], linewidths=1.6,
                                         colors=_part_colours(view.part[view.lines[:, 0]]) * 0.6))
    for k in range(1, min(view.n_parts, len(PARTS)) + 1):
        handles.append(Patch(facecolor=PARTS[k - 1], edgecolor="#333333", label=f"part {k}"))
    for kind, nodes in (marks or {}).items():
        nodes = np.asarray(nodes, dtype=np.int64)
        if nodes.size == 0:
            continue
        marker, colour = MARKS.get(kind, MARKS["other"])
        shown = nodes if nodes.size <= 3000 else nodes[:: nodes.size // 3000 + 1]
        handles.append(ax.scatter(*view.xy[shown].T, s=40, marker=marker, zorder=7,
                                  facecolors="none" if marker == "o" else colour,
                                  edgecolors=colour, linewidths=1.2,
                                  label=f"{kind} ({nodes.size:,})"))
    if arrows is not None:
        nodes, vectors = arrows
        nodes = np.asarray(nodes, dtype=np.int64)
        uv = np.asarray(vectors, dtype=np.float64) @ view.screen
        size = float(np.ptp(view.xy, axis=0).max()) if len(view.xy) else 1.0
        longest = float(np.linalg.norm(uv, axis=1).max()) if len(uv) else 0.0
        if longest > 0:
            uv = uv * (0.12 * size / longest)
            handles.append(ax.quiver(*view.xy[nodes].T, *uv.T, angles="xy",
                                     scale_units="xy", scale=1, color="#b0302a",
                                     width=0.004, zorder=6, label="a free motion"))
    ax.autoscale_view()
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel(f"{view.axis_names[0]} (model length unit)")
    ax.set_ylabel(f"{view.axis_names[1]} (model length unit)")
    ax.grid(False)
    if handles:
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return ax


@styled
def pattern_axes(image: PatternImage, title: str, ax: Any = None,
                 vmax: float | None = None) -> Any:
    """Draw a binned sparsity pattern; darker cells hold more nonzeros (log scale).

    ``vmax`` fixes the top of the colour scale, so that two patterns drawn
    side by side share one scale.
    """
    from matplotlib.colors import LogNorm

    ax = ax if ax is not None else new_axes(5.0, 5.0)
    counts = np.ma.masked_equal(image.counts, 0)
    top = float(vmax if vmax is not None else max(int(image.counts.max()), 1))
    shown = ax.imshow(counts, cmap=density_cmap(), norm=LogNorm(vmin=1, vmax=max(top, 1.5)),
                      extent=(0, image.n, image.n, 0), interpolation="nearest",
                      aspect="equal")
    ax.set_title(title)
    ax.set_xlabel("column (node)")
    ax.set_ylabel("row (node)")
    ax.grid(False)
    ax.set_facecolor("white")
    if image.bins < image.n:
        cb = ax.figure.colorbar(shown, ax=ax, shrink=0.8)
        from matplotlib.ticker import FuncFormatter

        plain = FuncFormatter(lambda v, _: f"{v:g}")
        cb.ax.yaxis.set_major_formatter(plain)
        cb.ax.yaxis.set_minor_formatter(plain)
        cb.set_label(f"nonzeros per cell ({image.n / image.bins:,.0f} x "
                     f"{image.n / image.bins:,.0f} entries)")
    return ax


def _step_fill(ax: Any, env: Envelope, look: Mapping[str, Any], label: str,
               lower: bool) -> None:
    """Fill a reduced curve as a step band (from 0, or from its lower envelope)."""
    if env.length == 0:
        return
    x = np.append(env.start, env.length)
    lo = np.append(env.lower, env.lower[-1]) if lower else np.zeros(x.size)
    hi = np.append(env.upper, env.upper[-1])
    ax.fill_between(x, lo, hi, step="post", facecolor=look["face"], edgecolor=look["hatch_ink"],
                    hatch=look["hatch"], linewidth=0.0, alpha=look["alpha"], label=label)
    ax.step(x, hi, where="post", color=look["line"], linewidth=0.9)


def _curve_axes(before: NDArray[np.integer], after: NDArray[np.integer] | None,
                labels: Sequence[str], ylabel: str, title: str, lower: bool,
                ax: Any) -> Any:
    ax = ax if ax is not None else new_axes(7.0, 3.6)
    _step_fill(ax, envelope(before), CURVE_BEFORE, labels[0], lower)
    if after is not None:
        _step_fill(ax, envelope(after), CURVE_AFTER, labels[1], lower)
    ax.set_xlim(0, max(len(before), 1))
    ax.set_ylim(bottom=0)
    ax.set_xlabel("equation (DOF row, elimination order)")
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.legend(loc="lower right", bbox_to_anchor=(1.0, 1.0), ncol=2)
    return ax


@styled
def skyline_axes(before: NDArray[np.integer], after: NDArray[np.integer] | None = None,
                 labels: Sequence[str] = ("current numbering", "renumbered"),
                 ax: Any = None) -> Any:
    """Draw column heights (the envelope) before and after renumbering, filled.

    The filled area is the profile: what a skyline solver stores.
    """
    return _curve_axes(before, after, labels, "column height (rows above diagonal)",
                       "Skyline", False, ax)


@styled
def wavefront_axes(before: NDArray[np.integer], after: NDArray[np.integer] | None = None,
                   labels: Sequence[str] = ("current numbering", "renumbered"),
                   ax: Any = None) -> Any:
    """Draw the wavefront at each elimination step before and after renumbering.

    Long curves are reduced to their min-max band per bin, so no peak is lost.
    """
    return _curve_axes(before, after, labels, "wavefront (active equations)",
                       "Wavefront", True, ax)


@styled
def comparison_axes(methods: Sequence[str], ratios: Mapping[str, Sequence[float]],
                    chosen: str | None = None, ax: Any = None) -> Any:
    """Draw the reduction of each figure by each ordering, as bars.

    Parameters
    ----------
    methods
        Ordering names, one bar per figure each.
    ratios
        Figure name (``"bandwidth"`` ...) -> one reduction per method: the
        current numbering's figure divided by the ordering's, so 1 is the
        current numbering and higher is better.
    chosen
        The method kept; its bars get a heavy outline and a mark in the legend.
    """
    ax = ax if ax is not None else new_axes(7.5, 4.0)
    names = list(ratios)
    width = 0.8 / max(len(methods), 1)
    x = np.arange(len(names), dtype=np.float64)
    values = np.array([[ratios[f][k] for f in names] for k in range(len(methods))],
                      dtype=np.float64)
    for k, method in enumerate(methods):
        mark = method == chosen
        ax.bar(x + (k - (len(methods) - 1) / 2) * width, values[k], width,
               color=SERIES[k % len(SERIES)], hatch=HATCHES[k % len(HATCHES)],
               edgecolor="black" if mark else "#555555", linewidth=1.8 if mark else 0.5,
               label=f"{method} (kept)" if mark else method)
    ax.axhline(1.0, color="#b0302a", linewidth=1.0, linestyle="--",
               label="current numbering")
    positive = values[np.isfinite(values) & (values > 0)]
    if positive.size and positive.max() / positive.min() > 20:
        ax.set_yscale("log")
    ax.set_xticks(x, names)
    from matplotlib.ticker import FuncFormatter

    ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}\u00d7"))
    ax.set_ylabel("reduction (current / ordering)")
    ax.set_title("Orderings compared")
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return ax
