"""Vectorised parsing of long runs of uniform deck lines (node and element tables).

A million-node deck has millions of node and element lines of the same
shape; splitting them one by one in Python costs minutes.  Here a run of
lines is parsed as one byte array: separator positions, token spans and
values come from numpy, and the caller falls back to its line-by-line
reader whenever a run is not uniform (a comment inside, a continuation, a
different token count, a token that is not a plain number).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

_SPACE = np.zeros(256, dtype=bool)
_SPACE[[9, 10, 13, 32]] = True
_DIGIT = np.zeros(256, dtype=bool)
_DIGIT[48:58] = True


@dataclass(frozen=True)
class Table:
    """Tokens of a run of lines: ``(m, k)`` values and spans (columns within each line).

    Attributes
    ----------
    first
        Index of the run's first line.
    text
        The run's text, each token's content within it.
    start, end
        ``(m, k)`` column spans of each token's content (spaces excluded).
    integer
        ``(m, k)`` True where a token is a plain unsigned integer.
    """

    first: int
    values: NDArray[np.float64]
    start: NDArray[np.int64]
    end: NDArray[np.int64]
    integer: NDArray[np.bool_]

    @property
    def lines(self) -> NDArray[np.int64]:
        """Line index of every row."""
        return self.first + np.arange(self.values.shape[0], dtype=np.int64)


def comma_table(lines: list[str], first: int, stop: int) -> Table | None:
    """Parse ``lines[first:stop]`` as comma-separated numbers, or None when not uniform.

    Uniform: every line ASCII, with the same number of tokens, none empty, no
    line ending in a comma (a continuation), every token a number.
    """
    block = lines[first:stop]
    m = len(block)
    if m == 0:
        return None
    text = "".join(block)
    if not text.isascii():
        return None
    raw = np.frombuffer(text.encode("ascii"), dtype=np.uint8)
    lengths = np.fromiter((len(ln) for ln in block), dtype=np.int64, count=m)
    line_start = np.zeros(m, dtype=np.int64)
    np.cumsum(lengths[:-1], out=line_start[1:])
    content = np.fromiter((len(ln.rstrip("\r\n")) for ln in block), dtype=np.int64, count=m)
    commas = np.flatnonzero(raw == ord(","))
    per_line = np.bincount(np.searchsorted(line_start, commas, side="right") - 1, minlength=m)
    k = int(per_line[0]) + 1
    if (per_line != k - 1).any():
        return None
    bounds = np.empty((m, k + 1), dtype=np.int64)
    bounds[:, 0] = line_start - 1
    bounds[:, 1:k] = commas.reshape(m, k - 1)
    bounds[:, k] = line_start + content
    s, e = bounds[:, :-1] + 1, bounds[:, 1:]
    solid = np.flatnonzero(~_SPACE[raw])
    i = np.searchsorted(solid, s)
    j = np.searchsorted(solid, e) - 1
    if (i >= solid.size).any() or (j < 0).any():
        return None
    tok_start, tok_end = solid[np.minimum(i, solid.size - 1)], solid[j] + 1
    if (tok_start >= e).any():
        return None  # an empty token
    nondigit = np.concatenate([[0], np.cumsum(~_DIGIT[raw])])
    integer = (nondigit[tok_end] - nondigit[tok_start]) == 0
    flat = text.replace("\r", " ").replace("\n", ",").rstrip(", ")
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # a token that is no number: detected by the count
            values = np.fromstring(flat, dtype=np.float64, sep=",")
    except ValueError:  # newer numpy raises where older ones warned
        return None
    if values.size != m * k:
        return None
    offset = line_start[:, None]
    return Table(first, values.reshape(m, k), tok_start - offset, tok_end - offset, integer)


def data_runs(lines: list[str], rows: list[int]) -> list[tuple[int, int]]:
    """Maximal runs of consecutive line indices in ``rows``, as (first, stop)."""
    if not rows:
        return []
    r = np.asarray(rows, dtype=np.int64)
    breaks = np.flatnonzero(np.diff(r) != 1) + 1
    starts = np.concatenate([[0], breaks])
    stops = np.concatenate([breaks, [r.size]])
    return [(int(r[a]), int(r[b - 1]) + 1) for a, b in zip(starts, stops)]
