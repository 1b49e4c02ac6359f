"""Load what a run will need on the second core while the first decodes frames.

Decoding frames (OpenCV, tifffile) releases the GIL, so importing a heavy library (h5py for
``stokes.nc``) or loading the cached compiled kernels (numba) in a background thread at the
start of a run hides most of that cost.  A later ``import`` of the same module waits for the
thread's import to finish (Python's per-module import lock), so nothing is loaded twice; a
failure in the thread is ignored here and surfaces, with its real message, where the module
is used.
"""

from __future__ import annotations

import threading

__all__ = ["prefetch", "prefetch_modules"]


def prefetch(fn, *args) -> threading.Thread:
    """Run ``fn(*args)`` in a daemon thread now; return the thread."""
    def run():
        try:
            fn(*args)
        except Exception:  # noqa: BLE001 - reported where the module is really used
            pass

    t = threading.Thread(target=run, name="polarsky-prefetch", daemon=True)
    t.start()
    return t


def prefetch_modules(*names: str) -> threading.Thread:
    """Import modules ``names`` in a background thread."""
    import importlib

    return prefetch(lambda: [importlib.import_module(n) for n in names])
