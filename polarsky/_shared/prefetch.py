"""Load what a run will need on the second core while the first decodes frames.

Decoding frames (OpenCV, tifffile) releases the GIL, so importing a heavy library (h5py for
``stokes.nc``) or loading the cached compiled kernels (numba) in a background thread at the
start of a run hides most of that cost.  A later ``import`` of the same module waits for the
thread's import to finish (Python's per-module import lock), so nothing is loaded twice; a
failure in the thread is ignored here and surfaces, with its real message, where the module
is used.

The thread is not a daemon: a run that stops early (an input error a moment after the start)
waits for the import to finish before the interpreter shuts down, instead of freezing a
half-imported extension module at exit, which can print stray lines or crash.
"""

from __future__ import annotations

import threading

__all__ = ["prefetch", "prefetch_modules"]


def prefetch(fn, *args) -> threading.Thread:
    """Run ``fn(*args)`` in a background thread now (joined at exit); return the thread."""
    def run():
        try:
            fn(*args)
        except Exception:  # noqa: BLE001 - reported where the module is really used
            pass

    t = threading.Thread(target=run, name="polarsky-prefetch", daemon=False)
    t.start()
    return t


def prefetch_modules(*names: str) -> threading.Thread:
    """Import modules ``names`` in a background thread."""
    import importlib

    return prefetch(lambda: [importlib.import_module(n) for n in names])
