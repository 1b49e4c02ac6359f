"""The fast-math policy of every compiled kernel, and the decorators that apply it.

Fast-math flags are LLVM's, without ``nnan`` and ``ninf`` (NaN marks pixels that are not
valid and must survive) and without ``contract`` and ``reassoc``: with those, a pixel computed
in the vectorized body of a loop and one computed in its scalar remainder can differ in the
last bit, so products would depend on the block size.  Every kernel is cached on disk
(numba's ``cache=True``), so only the first run after an install compiles.  numba checks a
cached kernel against its own file only: after editing this policy, delete the ``*.nbi`` and
``*.nbc`` files under ``polarsky/`` (``python -m polarsky.core.kernels.source --clear-cache``).
"""

from __future__ import annotations

from numba import njit

__all__ = ["FASTMATH", "kernel", "parallel_kernel", "inline"]

FASTMATH = frozenset({"afn", "nsz", "arcp"})


def kernel(fn):
    """A serial compiled kernel with the project's fast-math policy."""
    return njit(fastmath=set(FASTMATH), cache=True)(fn)


def parallel_kernel(fn):
    """A compiled kernel whose ``prange`` loops run on all cores."""
    return njit(parallel=True, fastmath=set(FASTMATH), cache=True)(fn)


def inline(fn):
    """A scalar helper compiled into its callers."""
    return njit(inline="always", fastmath=set(FASTMATH), cache=True)(fn)
