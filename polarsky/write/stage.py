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
import hashlib
import json
import os
import re
import shutil
import tempfile
import time
from pathlib import Path

from .._version import __version__
from .._shared.checks import path_problem
from ..errors import InputError
from .space import folder_bytes, free_bytes, human_size, is_write_error, write_error
from .swap import STAGING, clean_leftovers, hidden_name, swap_in

__all__ = ["OutputStage", "Into", "open_stage", "check_destination", "MARKER", "check_out_dir", "folder_lock",
           "swap_in", "FolderLock", "listed_files", "published_path", "write_error", "human_size"]

#: Hidden file that marks a folder written by polarsky (and lists the run's outputs).
MARKER = ".polarsky-run.json"


def check_out_dir(out_dir, *, inputs=(), option: str = "--out") -> Path:
    """The output folder as a Path, after the checks every command makes.

    Raises
    ------
    InputError
        Empty path, an existing file, a folder holding files polarsky did not write, or a
        folder that holds one of the run's inputs.
    """
    if out_dir is None or str(out_dir).strip() == "":
        raise InputError(f"{option} is empty; give the folder for the outputs, e.g. {option} out/")
    out = Path(out_dir)
    problem = path_problem(out)
    if problem not in (None, "does not exist"):
        raise InputError(f"{option} {out} {problem}; give a folder path")
    if out.is_symlink() and out.is_dir():
        out = Path(os.path.realpath(out))  # publish into the folder the link points to; the link stays
    if out.exists() and not out.is_dir():
        raise InputError(f"{option} {out} exists and is not a folder; give a folder path")
    target = Path(os.path.realpath(out))
    for f in inputs:
        try:
            Path(os.path.realpath(f)).relative_to(target)
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
        key = hashlib.sha256(os.path.realpath(self.folder).encode("utf-8", "surrogateescape")).hexdigest()[:32]
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


_STAGED = re.compile(rf"^\.(?P<name>.+)\.{STAGING}-\d+-[0-9a-f]{{8}}$")


def published_path(path) -> Path:
    """Where a path that a run recorded inside its staging folder lies once the folder is
    published (``path`` itself when it is not inside a staging folder).

    >>> str(published_path("/data/.out.polarsky-staging-412-0a1b2c3d/bracket/f_000deg.png"))
    '/data/out/bracket/f_000deg.png'
    """
    parts = Path(path).parts
    return Path(*[m.group("name") if (m := _STAGED.match(p)) else p for p in parts])


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
        """Say about how many bytes this run will write; refuse now if the device has clearly
        too little free (less than half of it: compression makes the estimate rough).

        Raises
        ------
        InputError
            Naming the folder, the space needed and the space free.
        """
        self.expected_bytes = int(nbytes)
        free = free_bytes(self.dir)
        if free is not None and free < nbytes // 2:
            raise InputError(f"not enough space on the device of {self.out_dir}: this run writes about "
                             f"{human_size(nbytes)} and {human_size(free)} are free; free some space or choose "
                             "another --out")

    def _fail(self, exc) -> InputError | None:
        """Clean up after ``exc``; return the one-line error when it is a failed write.

        The free space the message gives is measured after this run's files were removed.
        """
        write = isinstance(exc, OSError) and is_write_error(exc, self.dir)
        written = folder_bytes(self.dir) if write else 0
        self.discard()
        if not write:
            return None
        return write_error(exc, self.out_dir, staging=self.dir, need=self.expected_bytes, written=written)


def relocate_records(staged: Path, out: Path) -> None:
    """Rewrite paths inside ``staged`` recorded in its files to the same paths under ``out``.

    Text outputs (``.json``, ``.csv``, ``.html``) are rewritten as text (also the JSON-escaped
    form of the path); NetCDF files have their text attributes rewritten.
    """
    old, new = str(staged), str(out)
    pairs = [(old, new), (json.dumps(old)[1:-1], json.dumps(new)[1:-1])]
    for p in staged.rglob("*"):
        if not p.is_file():
            continue
        if p.suffix in (".json", ".csv", ".html"):
            text = p.read_text(encoding="utf-8")
            if old in text or pairs[1][0] in text:
                for a, b in pairs:
                    text = text.replace(a, b)
                p.write_text(text, encoding="utf-8")
        elif p.suffix == ".nc":
            import h5py

            with h5py.File(p, "r+") as f:
                for k, v in list(f.attrs.items()):
                    text = v.decode() if isinstance(v, bytes) else v
                    if isinstance(text, str) and any(a in text for a, _ in pairs):
                        for a, b in pairs:
                            text = text.replace(a, b)
                        f.attrs[k] = text


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
    relocate : bool
        The run reads files it wrote into the folder itself (the demo renders its brackets
        there): on publishing, paths recorded inside the staging folder (in ``.json``,
        ``.csv``, ``.html`` files and NetCDF attributes) are rewritten to where they will lie.

    Use as a context manager: on an exception the staging folder is removed and the earlier
    result stays as it was.
    """

    def __init__(self, out_dir, *, command: str = "", inputs=(), relocate: bool = False):
        self.out_dir = check_out_dir(out_dir, inputs=inputs)
        self.command = command
        self.expected_bytes = None
        self.relocate = relocate
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
            if self.relocate:
                relocate_records(self.dir, self.out_dir)
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
