"""What a finished bracket looks like on disk, and how a re-run recognises it.

Every finished bracket folder ``DIR/<bracket>/`` holds ``batch.json``, written last, with

* ``key`` -- SHA-256 over the bracket's input files (names, sizes and contents), the
  settings that affect its results and the software version;
* ``outputs`` -- every file of the folder with its size in bytes;
* ``row`` -- its line of ``summary.csv``.

A bracket is *complete* when ``batch.json`` parses and every listed file exists with its
recorded size.  A re-run skips a bracket whose folder is complete and whose key is
unchanged, and redoes the rest.  Folders are built under ``DIR/.polarsky-tmp/`` and moved
into place with one rename, so a final name never shows a half-written folder.
"""

from __future__ import annotations

import hashlib
import json
import os
import uuid
from pathlib import Path

__all__ = ["MARKER", "TMP_DIR", "bracket_key", "read_marker", "read_complete", "write_marker", "publish",
           "atomic_write_text", "file_sha256"]

MARKER = "batch.json"
TMP_DIR = ".polarsky-tmp"
_CHUNK = 1 << 20


def file_sha256(path) -> str:
    """SHA-256 of a file's bytes, read in 1 MiB pieces (read-only)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while True:
            block = fh.read(_CHUNK)
            if not block:
                break
            h.update(block)
    return h.hexdigest()


def bracket_key(input_files, settings: dict, version: str) -> str:
    """Hash of a bracket's inputs and settings (hex SHA-256).

    ``input_files`` are hashed by content (so touching or copying a file does not force a
    redo, but changing one byte does); files listed by ``settings`` (calibration, masks)
    must be included in ``input_files`` by the caller.
    """
    h = hashlib.sha256()
    h.update(f"polarsky {version}\n".encode())
    h.update(json.dumps(settings, sort_keys=True, default=str).encode())  # ASCII: JSON escapes the rest
    for f in input_files:
        f = Path(f)
        h.update(f"\n{f.name}\n".encode("utf-8", "surrogateescape"))
        if f.is_file():
            h.update(f"{f.stat().st_size}:{file_sha256(f)}".encode())
        else:
            h.update(b"<missing>")
    return h.hexdigest()


def read_marker(folder) -> dict | None:
    """The ``batch.json`` marker of a folder a batch wrote, or None."""
    try:
        with open(Path(folder) / MARKER, "r", encoding="utf-8") as fh:
            marker = json.load(fh)
        return marker if isinstance(marker, dict) and "key" in marker and "row" in marker else None
    except (OSError, ValueError):
        return None


def read_complete(folder) -> dict | None:
    """The marker of a complete bracket folder, or None when absent/incomplete."""
    folder = Path(folder)
    try:
        with open(folder / MARKER, "r", encoding="utf-8") as fh:
            marker = json.load(fh)
        for name, size in marker["outputs"].items():
            if (folder / name).stat().st_size != size:
                return None
        return marker
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        return None


def write_marker(folder, *, key: str, row: dict, run_id: str) -> dict:
    """List the files of ``folder`` and write its ``batch.json`` (last)."""
    from ..write.stage import listed_files

    folder = Path(folder)
    outputs = {n: (folder / n).stat().st_size for n in listed_files(folder) if n != MARKER}
    marker = {"key": key, "run_id": run_id, "outputs": outputs, "row": row}
    atomic_write_text(folder / MARKER, json.dumps(marker, indent=1, sort_keys=True))
    return marker


def publish(tmp_folder, final_folder) -> None:
    """Move a finished ``tmp_folder`` to ``final_folder`` (replacing an older one) by renames
    (:func:`polarsky.write.stage.swap_in`): ``final_folder`` is always either absent, the old
    complete folder or the new one."""
    from ..write.stage import swap_in

    swap_in(Path(tmp_folder), Path(final_folder))


def atomic_write_text(path, text: str) -> None:
    """Write ``text`` to ``path`` as UTF-8 through a temporary name and :func:`os.replace`.

    Bytes of file names that are not UTF-8 (which Python carries as lone surrogates) are
    written as U+FFFD, so the file stays valid UTF-8.
    """
    path = Path(path)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.{uuid.uuid4().hex[:8]}.tmp")
    text = text.encode("utf-8", "surrogateescape").decode("utf-8", "replace")
    try:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
