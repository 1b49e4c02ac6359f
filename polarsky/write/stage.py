"""Publishing an output folder whole: all of one run or none of it.

:class:`OutputStage` writes every output of a run into a hidden staging folder beside
``--out`` and, when all are complete, swaps it in by renaming: the earlier result stays in
place until the new one is complete, and files of the earlier result that this run does not
write disappear with it.  While a run writes to a folder it holds a lock, so a second run
into the same folder stops with a message instead of mixing files.  Staging folders left by
runs that were killed are removed by the next run into the same folder.

A folder is replaced only if it is new, empty, or was written by polarsky (it holds the
marker ``.polarsky-run.json``); a folder holding the run's own inputs is refused.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import errno
import hashlib
import json
import os
import shutil
import tempfile
import time
from pathlib import Path

from .._version import __version__
from .._shared.checks import check_utf8_path
from ..errors import InputError
from .swap import STAGING, clean_leftovers, hidden_name, swap_in

__all__ = ["OutputStage", "Into", "open_stage", "check_destination", "MARKER", "check_out_dir", "folder_lock",
           "swap_in", "FolderLock", "listed_files", "write_error", "human_size"]

#: Hidden file that marks a folder written by polarsky (and lists the run's outputs).
MARKER = ".polarsky-run.json"


def check_out_dir(out_dir, *, inputs=(), option: str = "--out") -> Path:
    """The output folder as a Path, after the checks every command makes.

    Raises
    ------
    InputError
        Empty path, a path that is not UTF-8 (the NetCDF library cannot write there), an
        existing file, a folder holding files polarsky did not write, or a folder that holds
        one of the run's inputs.
    """
    if out_dir is None or str(out_dir).strip() == "":
        raise InputError(f"{option} is empty; give the folder for the outputs, e.g. {option} out/")
    out = Path(out_dir)
    check_utf8_path(out, option)
    if out.is_symlink() and out.is_dir():
        out = out.resolve()  # publish into the folder the link points to; the link stays
    if out.exists() and not out.is_dir():
        raise InputError(f"{option} {out} exists and is not a folder; give a folder path")
    target = out.resolve()
    for f in inputs:
        try:
            Path(f).resolve().relative_to(target)
        except ValueError:
            continue
        raise InputError(f"{option} {out} holds the input {f}; outputs replace the whole folder, so choose another "
                         "output folder")
    if out.is_dir() and not (out / MARKER).is_file():
        foreign = [p.name for p in out.iterdir()]
        if foreign:
            raise InputError(f"{option} {out} already holds files polarsky did not write ({', '.join(sorted(foreign)[:3])}"
                             f"{' ...' if len(foreign) > 3 else ''}); give a new or empty folder")
    return out


class FolderLock:
    """An exclusive, non-waiting lock on a folder path (``flock`` on a file in the temp folder).

    The lock file lives in the system's temporary folder, named after the folder's absolute
    path, so it survives the folder being swapped and leaves nothing beside the outputs.
    """

    def __init__(self, folder: Path, *, what: str = "--out"):
        self.folder = Path(folder)
        self.what = what
        key = hashlib.sha256(str(self.folder.resolve()).encode("utf-8", "surrogateescape")).hexdigest()[:32]
        locks = Path(tempfile.gettempdir()) / "polarsky-locks"
        if not locks.is_dir():
            locks.mkdir(exist_ok=True)
            with contextlib.suppress(OSError):  # shared by every user of the machine, like /tmp
                os.chmod(locks, 0o1777)
        self.path = locks / f"{key}.lock"
        self._fh = None

    def acquire(self) -> None:
        import fcntl

        try:
            self._fh = open(self.path, "a+")
        except OSError as exc:
            raise InputError(f"cannot lock {self.folder} for writing: {self.path} cannot be opened ({exc.strerror})") \
                from None
        try:
            fcntl.flock(self._fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            self._fh.close()
            self._fh = None
            raise InputError(f"another polarsky run is writing to {self.folder}; wait for it to finish or choose "
                             f"another {self.what}") from None

    def release(self) -> None:
        if self._fh is not None:
            self._fh.close()
            self._fh = None

    def __enter__(self):
        self.acquire()
        return self

    def __exit__(self, *exc):
        self.release()
        return False


def folder_lock(folder, *, what: str = "--out") -> FolderLock:
    """:class:`FolderLock` on ``folder`` (use as a context manager)."""
    return FolderLock(folder, what=what)


def listed_files(folder: Path) -> list:
    """Files below ``folder`` (relative names, sorted), hidden files and folders left out."""
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*")
                  if p.is_file() and not any(part.startswith(".") for part in p.relative_to(folder).parts))


class _Destination:
    """What every destination of a task's files shares: the space check and write errors
    that name the folder the user gave (``out_dir``), never the folder written into (``dir``)."""

    dir: Path
    out_dir: Path
    expected_bytes = None

    def reserve(self, nbytes: int) -> None:
        """Say how many bytes this run will write; refuse now if the device has less free.

        Raises
        ------
        InputError
            Naming the folder, the space needed and the space free.
        """
        self.expected_bytes = int(nbytes)
        free = _free_bytes(self.dir)
        if free is not None and free < nbytes:
            raise InputError(f"not enough space on the device of {self.out_dir}: this run writes about "
                             f"{human_size(nbytes)} and {human_size(free)} are free; free some space or choose "
                             "another --out")

    def _fail(self, exc) -> InputError | None:
        """Clean up after ``exc``; return the one-line error when it is a failed write.

        The free space the message gives is measured after this run's files were removed.
        """
        write = isinstance(exc, OSError) and _is_write_error(exc, self.dir)
        written = _folder_bytes(self.dir) if write else 0
        self.discard()
        if not write:
            return None
        return write_error(exc, self.out_dir, staging=self.dir, need=self.expected_bytes, written=written)


class OutputStage(_Destination):
    """Write a run's outputs into a staging folder; :meth:`publish` swaps it in whole.

    Parameters
    ----------
    out_dir : path-like
        The output folder (``--out``).
    command : str
        The command writing it (recorded in the marker).
    inputs : sequence of path-like
        The run's inputs (never inside ``out_dir``).

    Use as a context manager: on an exception the staging folder is removed and the earlier
    result stays as it was.
    """

    def __init__(self, out_dir, *, command: str = "", inputs=()):
        self.out_dir = check_out_dir(out_dir, inputs=inputs)
        self.command = command
        self.expected_bytes = None
        self.lock = FolderLock(self.out_dir)
        self.lock.acquire()
        try:
            try:
                clean_leftovers(self.out_dir)
                self.out_dir.parent.mkdir(parents=True, exist_ok=True)
                self.dir = hidden_name(self.out_dir, STAGING)
                self.dir.mkdir()
            except OSError as exc:
                raise write_error(exc, self.out_dir) from None
        except BaseException:
            self.lock.release()
            raise
        self.t0 = time.time()

    def path(self, name: str) -> Path:
        """Where to write output ``name`` (inside the staging folder)."""
        return self.dir / name

    def outputs(self) -> list:
        """Names of the files written so far (relative, sorted; hidden files left out)."""
        return listed_files(self.dir)

    def publish(self) -> list:
        """Swap the complete staging folder in as ``out_dir``; returns the output paths."""
        names = self.outputs()
        marker = {"command": self.command, "software_version": __version__, "outputs": names,
                  "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")}
        try:
            (self.dir / MARKER).write_text(json.dumps(marker, indent=1) + "\n", encoding="utf-8")
            swap_in(self.dir, self.out_dir)
        except OSError as exc:
            raise (self._fail(exc) or write_error(exc, self.out_dir, staging=self.dir)) from None
        finally:
            self.lock.release()
        return [self.out_dir / n for n in names]

    def discard(self) -> None:
        shutil.rmtree(self.dir, ignore_errors=True)
        self.lock.release()

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            return False
        error = self._fail(exc)
        if error is not None:
            raise error from None
        return False


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


def _folder_bytes(folder: Path) -> int:
    try:
        return sum(p.stat().st_size for p in Path(folder).rglob("*") if p.is_file())
    except OSError:
        return 0


def _free_bytes(folder: Path) -> int | None:
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
        return Path(os.fsdecode(path)).resolve().relative_to(folder.resolve()).as_posix()
    except (ValueError, OSError, TypeError):
        return None


def _is_write_error(exc: OSError, staging: Path) -> bool:
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
        free = _free_bytes(out.parent if not out.exists() else out)
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


class Into(_Destination):
    """A destination inside a folder someone else publishes (a batch bracket's staging folder).

    Tasks given an ``Into`` write their files into ``folder`` next to those of other tasks and
    leave publishing to the caller.  ``shown_as`` is the folder messages name (the place the
    files will be published to).
    """

    def __init__(self, folder, *, shown_as=None):
        self.dir = Path(folder)
        self.out_dir = Path(shown_as) if shown_as is not None else self.dir
        self.dir.mkdir(parents=True, exist_ok=True)

    def path(self, name: str) -> Path:
        return self.dir / name

    def outputs(self) -> list:
        return listed_files(self.dir)

    def publish(self) -> list:
        return [self.dir / n for n in self.outputs()]

    def discard(self) -> None:
        pass

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        error = None if exc_type is None else self._fail(exc)
        if error is not None:
            raise error from None
        return False


def open_stage(out, *, command: str, inputs=()):
    """An :class:`OutputStage` for a folder path, or ``out`` itself when it is an :class:`Into`."""
    if isinstance(out, Into):
        return out
    return OutputStage(out, command=command, inputs=inputs)


def check_destination(out, *, inputs=()) -> None:
    """:func:`check_out_dir` for folder paths (an :class:`Into` needs no check)."""
    if not isinstance(out, Into):
        check_out_dir(out, inputs=inputs)
