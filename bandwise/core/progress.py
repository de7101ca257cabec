"""Progress of long steps, reported through a callback so the library never prints.

Library functions take ``progress: Progress | None`` and wrap their steps in
``with step(progress, "building node graph"):``.  The command line passes a
:class:`StderrProgress`, which writes to stderr only for steps that last
more than a second, so stdout stays clean for ``--json``.
"""

from __future__ import annotations

import contextlib
import sys
import threading
import time
from collections.abc import Callable, Iterator
from typing import Protocol, TextIO


class Progress(Protocol):
    """Receives the start and end of each named step."""

    def started(self, label: str) -> None: ...

    def finished(self, label: str, seconds: float) -> None: ...


#: A plain function told of each step: ``(label, None)`` at its start,
#: ``(label, seconds)`` at its end.
ProgressCallback = Callable[[str, "float | None"], None]


class CallbackProgress:
    """A :class:`Progress` that passes each step on to a plain function."""

    def __init__(self, callback: ProgressCallback) -> None:
        self.callback = callback

    def started(self, label: str) -> None:
        self.callback(label, None)

    def finished(self, label: str, seconds: float) -> None:
        self.callback(label, seconds)


def as_progress(progress: Progress | ProgressCallback | None) -> Progress | None:
    """A :class:`Progress` from what a caller gave: one already, a plain function, or None."""
    if progress is None or hasattr(progress, "started"):
        return progress  # type: ignore[return-value]
    return CallbackProgress(progress)


@contextlib.contextmanager
def step(progress: Progress | None, label: str) -> Iterator[None]:
    """Time one step and tell ``progress`` (if any) when it starts and ends."""
    if progress is None:
        yield
        return
    t0 = time.perf_counter()
    progress.started(label)
    try:
        yield
    finally:
        progress.finished(label, time.perf_counter() - t0)


class StderrProgress:
    """Shows on stderr every step that has run for more than ``after`` seconds."""

    def __init__(self, stream: TextIO | None = None, after: float = 1.0) -> None:
        self.stream = stream or sys.stderr
        self.after = after
        self._timer: threading.Timer | None = None
        self.timings: dict[str, float] = {}

    def _announce(self, label: str) -> None:
        print(f"bandwise: {label} ...", file=self.stream, flush=True)

    def started(self, label: str) -> None:
        self._timer = threading.Timer(self.after, self._announce, args=(label,))
        self._timer.daemon = True
        self._timer.start()

    def finished(self, label: str, seconds: float) -> None:
        if self._timer is not None:
            self._timer.cancel()
        self.timings[label] = seconds
        if seconds > self.after:
            print(f"bandwise: {label}: {seconds:.1f} s", file=self.stream, flush=True)
