"""Disk space and failed writes: one-line messages that name the folder the user gave.

A write can fail because the device is full (ENOSPC, a quota), read-only or not ours; the
message names the output folder (never a hidden staging folder), the file being written when
the library says which, how much the run writes and how much is free.
"""

from __future__ import annotations

import errno
import os
import re
import shutil
from pathlib import Path

from ..errors import InputError

__all__ = ["write_error", "human_size", "free_bytes", "folder_bytes", "is_write_error"]


def human_size(nbytes) -> str:
    """Bytes in words: ``"512 bytes"``, ``"12.3 MB"``, ``"4.1 GB"`` (powers of 1000).

    >>> human_size(512), human_size(12_345_678), human_size(4.1e9)
    ('512 bytes', '12.3 MB', '4.1 GB')
    """
    n = float(nbytes)
    for unit in ("bytes", "kB", "MB", "GB", "TB"):
        if n < 1000 or unit == "TB":
            return f"{n:.0f} {unit}" if unit == "bytes" else f"{n:.1f} {unit}"
        n /= 1000.0
    return f"{n:.1f} TB"


def folder_bytes(folder: Path) -> int:
    try:
        return sum(p.stat().st_size for p in Path(folder).rglob("*") if p.is_file())
    except OSError:
        return 0


def free_bytes(folder: Path) -> int | None:
    try:
        return shutil.disk_usage(folder).free
    except OSError:
        return None


_WRITE_ERRNOS = (errno.ENOSPC, errno.EDQUOT, errno.EROFS, errno.EFBIG)


def _inside(path, folder: Path | None) -> str | None:
    """``path`` relative to ``folder`` (text), or None when it is not inside."""
    if path is None or folder is None:
        return None
    try:
        rel = Path(os.fsdecode(path)).resolve().relative_to(folder.resolve())
    except (ValueError, OSError, TypeError):
        return None
    m = re.fullmatch(r"\.(.+)\.partial-\d+", rel.name)  # a file written under a temporary name
    return (rel.with_name(m.group(1)) if m else rel).as_posix()


def is_write_error(exc: OSError, staging: Path) -> bool:
    return exc.errno in _WRITE_ERRNOS or _inside(exc.filename, staging) is not None


def write_error(exc: OSError, out: Path, *, staging: Path | None = None, need=None, written=None) -> InputError:
    """The one-line error of a failed write into ``out`` (never naming a staging folder).

    Parameters
    ----------
    exc : OSError
    out : Path
        The output folder the user named.
    staging : Path, optional
        Where the files were being written (names inside it are given relative to ``out``).
    need, written : int, optional
        Bytes the run writes in all, and bytes it had written when it failed.
    """
    name = _inside(exc.filename, staging)
    where = f" while writing {name}" if name else ""
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        free = free_bytes(out.parent if not out.exists() else out)
        if need:
            size = f"this run writes about {human_size(need)}"
        elif written:
            size = f"this run needs more than the {human_size(written)} it had written"
        else:
            size = "this run needs more space"
        left = f" ({human_size(free)} free)" if free is not None else ""
        return InputError(f"no space left on the device of {out}{where}: {size}{left}; free some space or choose "
                          "another --out")
    if exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        return InputError(f"cannot write to {out}{where} ({exc.strerror}); choose a folder you can write to")
    return InputError(f"cannot write to {out}{where} ({exc.strerror or type(exc).__name__})")
