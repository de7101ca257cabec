"""Work started on a second thread, collected later.

bandwise's compiled kernels release the interpreter lock (``nogil``), so a
long kernel-bound step, such as the facet table, runs on another core while
the caller goes on; ``future.result()`` gives its value or raises what it
raised.
"""

from __future__ import annotations

from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Any


def in_background(func: Callable[..., Any], *args: Any) -> Future[Any]:
    """Start ``func(*args)`` on a thread of its own and return its future."""
    pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="bandwise")
    try:
        return pool.submit(func, *args)
    finally:
        pool.shutdown(wait=False)  # the thread ends with its one task
