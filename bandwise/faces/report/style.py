"""The look of every report figure: one rc dict, one palette, one decorator.

The palette is bandwise's own.  Its colours differ in lightness as well as
hue, and the figures pair them with hatching and marker shapes, so that a
report printed in greyscale still tells the series apart.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import wraps
from typing import Any, TypeVar

#: Current numbering (light) and renumbered (dark): lightness apart by ~45 %.
BEFORE = "#a9b8cc"
AFTER = "#23455a"
#: The two curves of the skyline and wavefront plots: light and hatched, dark and solid.
CURVE_BEFORE = {"face": BEFORE, "hatch": "///", "hatch_ink": AFTER, "line": "#6d819c",
                "alpha": 1.0}
CURVE_AFTER = {"face": AFTER, "hatch": "", "hatch_ink": AFTER, "line": AFTER, "alpha": 0.85}
#: Colours of connected parts; the grey level (luminance) of neighbours in the
#: list differs by 60 or more of 255, so parts stay apart when printed in grey.
PARTS = ("#8fb0c4", "#9c5b2e", "#f1e3c6", "#2f5a70", "#e0b15c", "#6b3a5b",
         "#b9d3c0", "#4f7d5c")
#: Markers and colours of the marked nodes (shape first, colour second).
MARKS = {
    "orphan": ("X", "#b0302a"),
    "coincident": ("o", "#111111"),
    "weak joint": ("D", "#e07b00"),
    "moving most in a free mode": ("^", "#6a1b9a"),
    "other": ("s", "#555555"),  # hanging and other named nodes
}
#: Hatching of the bar series in the comparison chart.
HATCHES = ("", "///", "...", "xx", "\\\\", "++", "oo")
#: Lightness ramp of the bar series (dark to light).
SERIES = ("#1d3b4d", "#3f6f86", "#7fa3b5", "#bccfd9", "#e6edf1", "#8d6a3f", "#d7b98a")
#: Colour map of the sparsity density images (white = empty, dark = dense).
DENSITY_CMAP = "bone_r"

#: Matplotlib settings of every report figure, applied by :func:`styled`.
RC: dict[str, Any] = {
    "figure.dpi": 100,
    "savefig.dpi": 100,
    "figure.facecolor": "white",
    "axes.facecolor": "white",
    "axes.edgecolor": "#333333",
    "axes.linewidth": 0.8,
    "axes.grid": True,
    "axes.axisbelow": True,
    "axes.titlelocation": "left",
    "grid.color": "#d9d9d9",
    "grid.linewidth": 0.6,
    "axes.titlesize": 11,
    "axes.titleweight": "bold",
    "axes.labelsize": 10,
    "xtick.labelsize": 9,
    "ytick.labelsize": 9,
    "legend.fontsize": 9,
    "legend.frameon": False,
    "font.family": "DejaVu Sans",
    "lines.linewidth": 1.4,
    "hatch.linewidth": 0.6,
    "image.interpolation": "nearest",
    "axes.spines.top": False,
    "axes.spines.right": False,
}

F = TypeVar("F", bound=Callable[..., Any])


def styled(func: F) -> F:
    """Run a figure function under :data:`RC`.

    Figures are built as :class:`matplotlib.figure.Figure` objects, never
    through ``pyplot``, and saved with the Agg renderer: no window, no global
    figure registry, and a user's own backend is left alone.
    """

    @wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        import matplotlib

        with matplotlib.rc_context(RC):
            return func(*args, **kwargs)

    return wrapper  # type: ignore[return-value]
