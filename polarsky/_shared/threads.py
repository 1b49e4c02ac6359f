"""One small thread pool for the work that releases the GIL (decoding, numpy on large arrays,
compression): the second core of a laptop is used without extra processes.

``POLARSKY_THREADS`` caps the threads (the batch's workers set it to 1: their cores are
already shared out between processes).
"""

from __future__ import annotations

import os
import warnings

__all__ = ["thread_count", "thread_map"]

_POOL = None


def thread_count() -> int:
    """Threads polarsky may use in this process."""
    try:
        n = int(os.environ.get("POLARSKY_THREADS", "0"))
    except ValueError:
        n = 0
    if n <= 0:
        n = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    return max(1, n)


def thread_map(fn, items, *, order_warnings_by=None) -> list:
    """``[fn(x) for x in items]``, run on the pool when there are several items and threads.

    Results come in the order of ``items``, and the first failing item (in that order)
    raises, as in the plain loop.  Warnings issued in the threads are collected and issued
    again in a fixed order: by the position of the first of ``order_warnings_by`` (texts, one
    per item, such as file names) that the message contains.
    """
    items = list(items)
    n = min(thread_count(), len(items))
    if n <= 1:
        return [fn(x) for x in items]
    global _POOL
    if _POOL is None or _POOL._max_workers < n:  # noqa: SLF001 - resized when more threads are allowed
        from concurrent.futures import ThreadPoolExecutor

        _POOL = ThreadPoolExecutor(max_workers=thread_count(), thread_name_prefix="polarsky")
    with warnings.catch_warnings(record=True) as caught:
        futures = [_POOL.submit(fn, x) for x in items]
        try:
            results = [f.result() for f in futures]
        finally:
            for f in futures:
                f.cancel()
    keys = list(order_warnings_by or [])

    def rank(w):
        text = str(w.message)
        return next((i for i, k in enumerate(keys) if k and k in text), len(keys))

    for w in sorted(caught, key=rank):
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return results
