"""Putting a complete folder in place of another, so that a reader never sees a mixture.

:func:`swap_in` exchanges the two folders in one step where the system can (Linux
``renameat2`` with ``RENAME_EXCHANGE``), so that the destination always holds either the
earlier complete result or the new one, even when the process is killed (SIGKILL) in the
middle.  Elsewhere it renames the old folder aside and the new one in; a run killed between
the two renames leaves the old folder under a hidden name, and :func:`clean_leftovers`
(called by the next run into the same folder) puts it back.  SIGTERM and SIGINT are held
back while the folders are exchanged.
"""

from __future__ import annotations

import contextlib
import errno
import os
import shutil
import signal
import threading
import uuid
from pathlib import Path

__all__ = ["swap_in", "clean_leftovers", "clean_leftovers_in", "hidden_name", "held_signals", "STAGING", "OLD"]

#: Middle parts of the hidden names beside an output folder: ``.<name>.<kind>-<pid>-<random>``.
STAGING = "polarsky-staging"
OLD = "polarsky-old"
_RENAME_EXCHANGE = 2
_AT_FDCWD = -100


def hidden_name(out: Path, kind: str) -> Path:
    """A new hidden path beside ``out`` (``.<name>.<kind>-<pid>-<random>``)."""
    return out.parent / f".{out.name}.{kind}-{os.getpid()}-{uuid.uuid4().hex[:8]}"


def _exchange(a: Path, b: Path) -> bool:
    """Swap two existing paths in one step (Linux ``renameat2``); False where unsupported."""
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    if fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.EINVAL, errno.ENOSYS, errno.ENOTSUP, errno.EPERM):
        return False  # a file system or kernel without the exchange: fall back to two renames
    raise OSError(code, os.strerror(code), str(b))


@contextlib.contextmanager
def held_signals():
    """Hold SIGTERM and SIGINT back for the duration; they take effect right after it.

    Their handlers are swapped for one that only notes them (a process-directed signal may
    reach any thread, so blocking it in this thread is not enough); afterwards the earlier
    handlers are put back and each noted signal is raised again.  Main thread only.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    noted: list = []
    old = {}
    for sig in (signal.SIGTERM, signal.SIGINT):
        try:
            old[sig] = signal.signal(sig, lambda signum, frame: noted.append(signum))
        except (ValueError, OSError):  # pragma: no cover - a platform without the signal
            pass
    try:
        yield
    finally:
        for sig, handler in old.items():
            signal.signal(sig, handler)
        for sig in dict.fromkeys(noted):
            signal.raise_signal(sig)


def swap_in(staged: Path, out: Path) -> None:
    """Put the complete folder ``staged`` in place of ``out`` (the old one is removed last)."""
    staged, out = Path(staged), Path(out)
    with held_signals():
        if not out.exists():
            os.rename(staged, out)
            return
        if _exchange(staged, out):
            old = staged  # the exchange left the earlier result under the staging name
        else:
            old = hidden_name(out, OLD)
            os.rename(out, old)
            os.rename(staged, out)
    shutil.rmtree(old, ignore_errors=True)


def clean_leftovers(out: Path) -> None:
    """Tidy what killed runs left beside ``out`` (call with ``out``'s lock held).

    Staging folders are removed.  An earlier result renamed aside is put back when ``out``
    itself is missing (a run killed between two renames), and removed otherwise.
    """
    out = Path(out)
    if not out.parent.is_dir():
        return
    prefix = f".{out.name}."
    staging, old = [], []
    for p in out.parent.iterdir():
        if not p.name.startswith(prefix):
            continue
        rest = p.name[len(prefix):]
        if rest.startswith(f"{STAGING}-"):
            staging.append(p)
        elif rest.startswith(f"{OLD}-"):
            old.append(p)
    for p in staging:
        shutil.rmtree(p, ignore_errors=True)
    if old and not os.path.lexists(out):
        newest = max(old, key=lambda p: p.stat().st_mtime)
        os.rename(newest, out)
        old.remove(newest)
    for p in old:
        shutil.rmtree(p, ignore_errors=True)


def clean_leftovers_in(folder: Path) -> None:
    """:func:`clean_leftovers` for every output folder of ``folder`` that killed runs left
    hidden folders beside (a batch's bracket folders)."""
    folder = Path(folder)
    if not folder.is_dir():
        return
    names = set()
    for p in folder.iterdir():
        for kind in (STAGING, OLD):
            head, sep, _ = p.name.rpartition(f".{kind}-")
            if sep and head.startswith(".") and len(head) > 1:
                names.add(head[1:])
    for name in sorted(names):
        clean_leftovers(folder / name)

