"""The fast-math policy of every compiled kernel, and the decorators that apply it.

Fast-math flags are LLVM's, without ``nnan`` and ``ninf``: NaN marks pixels that are not
valid and must survive.  Every kernel is cached on disk (numba's ``cache=True``), so only
the first run after an install compiles.
"""

from __future__ import annotations

from numba import njit

__all__ = ["FASTMATH", "kernel", "parallel_kernel", "inline"]

FASTMATH = frozenset({"contract", "afn", "reassoc", "nsz", "arcp"})


def kernel(fn):
    """A serial compiled kernel with the project's fast-math policy."""
    return njit(fastmath=set(FASTMATH), cache=True)(fn)


def parallel_kernel(fn):
    """A compiled kernel whose ``prange`` loops run on all cores."""
    return njit(parallel=True, fastmath=set(FASTMATH), cache=True)(fn)


def inline(fn):
    """A scalar helper compiled into its callers."""
    return njit(inline="always", fastmath=set(FASTMATH), cache=True)(fn)
