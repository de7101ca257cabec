"""Exceptions raised by bandwise.

Findings about a mesh (disconnected parts, orphan nodes ...) are *values*
returned by the checks.  Exceptions are for inputs bandwise cannot work
with at all: the command line turns each into a one-line message and exit
code 2.
"""

from __future__ import annotations


class BandwiseError(Exception):
    """Base class of every error bandwise raises on purpose."""


class MeshReadError(BandwiseError):
    """A file could not be read as a mesh or matrix, or holds an invalid one."""


class MeshWriteError(BandwiseError):
    """An output file could not be written."""


class InputError(BandwiseError):
    """An option or argument is out of range or inconsistent."""


def one_line(exc: BaseException, limit: int = 160) -> str:
    """An exception's message on one line (white space folded), cut to ``limit`` characters.

    Empty when the exception carries no message: callers decide what to say then.
    """
    text = " ".join(str(exc).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."
