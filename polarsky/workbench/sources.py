"""What the PATH arguments of ``polarsky workbench`` mean.

* frame files: one bracket, or polarization-mosaic frames with ``--mosaic`` (read with the
  bracket options, as ``polarsky stokes`` reads them); with the options of ``polarsky sky``
  (time, place, lens, orientation) also compared with the clear-sky model, into the
  workbench's output folder;
* a folder holding ``stokes.nc``: that result (with the sky layers when ``sky.nc`` is there);
* a folder holding ``summary.csv`` of ``polarsky batch``: its brackets;
* a folder holding ``sky.nc`` and ``sky.json`` of ``polarsky sky``: its bracket (the frames or
  ``stokes.nc`` named in ``sky.json``) with the sky comparison layers;
* any other folder: the results above found in it and in its sub-folders (two levels), or,
  when it holds none, its brackets grouped by the batch's rules.
"""

from __future__ import annotations

import json
from pathlib import Path

from ..errors import InputError, one_line
from ..read.sky_file import SKY_FILE, SKY_JSON
from .commandline import recorded_paths
from .view import View

__all__ = ["add_paths", "bracket_entry_args", "bracket_args", "STOKES_FILE", "BATCH_SUMMARY"]

STOKES_FILE = "stokes.nc"
BATCH_SUMMARY = "summary.csv"
_SEARCH_DEPTH = 2


def _frames_loader(frames, settings, sky_folder=None, sky_out=None):
    def load():
        from .loaders import load_frames

        return View(load_frames(frames, settings, sky_folder=sky_folder, sky_out=sky_out))
    return load


def sky_wanted(settings) -> bool:
    """Whether options of a sky comparison (time, place, lens, orientation, sky model) were given."""
    from ..options.settings import option_names

    return bool(set(option_names("geometry", "sky")) & settings.given)


def _stokes_loader(path, sky_folder=None):
    def load():
        from .loaders import load_stokes

        return View(load_stokes(path, sky_folder=sky_folder))
    return load


def bracket_entry_args(frames, settings, *, name=None, label=None, note="", sky_root=None) -> dict:
    """Keyword arguments of :meth:`Session.add` for a bracket of frames (``settings``: a Settings);
    with ``sky_root`` (a folder) the bracket is compared with the clear-sky model into
    ``sky_root/<name>/sky``."""
    frames = [str(f) for f in frames]
    manifest = settings.read.manifest
    if name is None:
        name = Path(frames[0]).stem if frames else Path(str(manifest or "bracket")).stem
    if label is None:
        label = (f"{Path(frames[0]).name} .. {Path(frames[-1]).name} ({len(frames)} frames)" if len(frames) > 1
                 else Path(frames[0]).name if frames else f"manifest {manifest}")
    sky_out = None
    if sky_root is not None:
        from ..batch.discover import safe_name

        sky_out = Path(sky_root) / safe_name(name) / "sky"
        note = (note + "; " if note else "") + f"sky comparison written to {sky_out}"
    return {"name": name, "label": label, "kind": "bracket", "load": _frames_loader(frames, settings, sky_out=sky_out),
            "recipe": {"frames": frames, "settings": settings}, "note": note}


def bracket_args(b, settings) -> dict:
    """:meth:`Session.add` arguments of a bracket found by discovery (the batch's settings per bracket)."""
    from ..batch.task import bracket_settings

    if b.problem:
        return {"name": b.name, "label": b.label, "kind": "bracket", "load": None, "status": "unavailable",
                "error": b.problem, "note": b.reason}
    return bracket_entry_args([str(f) for f in b.frames], bracket_settings(settings, b), name=b.name, label=b.label,
                              note=b.reason)


def _is_result(folder: Path) -> bool:
    return any((folder / n).is_file() for n in (STOKES_FILE, SKY_FILE, BATCH_SUMMARY))


def _batch_rows(folder: Path) -> list:
    """Rows of a batch output folder's ``summary.csv`` with ``stokes`` (its ``stokes.nc`` when the
    bracket's folder is complete, else None) and ``sky`` (the folder, when it holds ``sky.nc``)."""
    import csv

    from ..batch.discover import safe_name
    from ..batch.state import read_complete

    try:
        with open(folder / BATCH_SUMMARY, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
    except (OSError, ValueError, csv.Error) as exc:
        raise InputError(f"{folder / BATCH_SUMMARY} cannot be read ({one_line(exc)}); give the output folder of "
                         "'polarsky batch'") from None
    out = []
    for row in rows:
        name = row.get("name") or ""
        if not name or safe_name(name) != name:  # a name that is not a plain folder name is not followed
            continue
        sub = folder / name
        done = row.get("status") in ("done", "skipped") and read_complete(sub) is not None
        out.append({**row, "stokes": str(sub / STOKES_FILE) if done and (sub / STOKES_FILE).is_file() else None,
                    "sky": str(sub) if done and (sub / SKY_FILE).is_file() else None})
    return out


def _add_batch(session, folder: Path, rel: str) -> None:
    for row in _batch_rows(folder):
        args = {"name": row["name"], "label": f"{rel}/{row['name']}", "kind": "batch"}
        if row["stokes"]:
            session.add(**args, load=_stokes_loader(row["stokes"], row["sky"]),
                        note=f"batch bracket ({row.get('status')})")
        else:
            why = row.get("error") or ("its folder is incomplete" if row.get("status") in ("done", "skipped")
                                       else f"status {row.get('status')}")
            session.add(**args, load=None, status="unavailable", error=f"not processed: {why}")


def _add_sky(session, folder: Path, settings, rel: str) -> None:
    try:
        inputs = recorded_paths(json.loads((folder / SKY_JSON).read_text(encoding="utf-8")).get("inputs", []))
    except (OSError, ValueError, AttributeError):
        inputs = []
    if not inputs:
        session.add(name=folder.name, label=rel, kind="sky", load=None, status="unavailable",
                    error=f"{folder / SKY_JSON} does not name its inputs")
    elif len(inputs) == 1 and inputs[0].lower().endswith(".nc"):
        session.add(name=folder.name, label=rel, kind="sky", load=_stokes_loader(inputs[0], folder),
                    note="sky comparison")
    else:
        args = bracket_entry_args(inputs, settings, name=folder.name, label=rel,
                                  note="sky comparison; its frames are read with this workbench's bracket options")
        args.update(load=_frames_loader(inputs, settings, folder), kind="sky")
        session.add(**args)


def _add_result_folder(session, folder: Path, settings, label_root: Path) -> None:
    rel = folder.name if folder == label_root else folder.relative_to(label_root).as_posix()
    sky_folder = folder if (folder / SKY_FILE).is_file() else None
    if (folder / BATCH_SUMMARY).is_file():
        _add_batch(session, folder, rel)
    elif (folder / STOKES_FILE).is_file():
        session.add(name=folder.name, label=rel, kind="stokes", load=_stokes_loader(folder / STOKES_FILE, sky_folder),
                    note="with the sky comparison" if sky_folder else "")
    elif sky_folder is not None:
        _add_sky(session, folder, settings, rel)


def _result_folders(root: Path, depth: int) -> list:
    found = []
    try:
        subs = sorted(p for p in root.iterdir() if p.is_dir() and not p.is_symlink() and not p.name.startswith("."))
    except OSError:
        return found
    for sub in subs:
        if _is_result(sub):
            found.append(sub)
        elif depth > 1:
            found += _result_folders(sub, depth - 1)
    return found


def add_paths(session, paths, settings) -> None:
    """Add the entries named by the command line's PATH arguments.

    Raises
    ------
    InputError
        A path that does not exist, or a folder with neither a result nor a bracket.
    """
    from ..batch.runner import list_brackets

    frames, folders = [], []
    for p in paths:
        path = Path(p)
        if not path.exists():
            raise InputError(f"{p} does not exist; give frames of a bracket or an output folder of "
                             "'polarsky stokes', 'polarsky batch' or 'polarsky sky'")
        (folders if path.is_dir() else frames).append(p)
    sky = sky_wanted(settings)
    if sky and (folders or settings.workbench.watch):
        raise InputError("the sky options (--when, --lat, --lon, the lens and orientation) compare one bracket "
                         "given as frames with the clear-sky model; for folders, run 'polarsky sky' and open "
                         "its output folder")
    if frames or (settings.read.manifest is not None and not folders):
        session.add(**bracket_entry_args(frames, settings, sky_root=session.out_dir if sky else None))
    for f in folders:
        folder = Path(f)
        if _is_result(folder):
            _add_result_folder(session, folder, settings, folder)
            continue
        # Stokes and batch results first, sky results after them (their own bracket is secondary)
        subs = sorted(_result_folders(folder, _SEARCH_DEPTH),
                      key=lambda p: (not (p / STOKES_FILE).is_file() and not (p / BATCH_SUMMARY).is_file(), str(p)))
        for sub in subs:
            _add_result_folder(session, sub, settings, folder)
        if subs:
            continue
        found = list_brackets(folder, session.out_dir, settings=settings)
        if not found:
            raise InputError(f"no bracket found in {folder}: name frames <stem>_<angle>deg.<ext> "
                             "(e.g. pier_045deg.tif), add a manifest.csv, or give the output folder of "
                             "'polarsky stokes' or 'polarsky batch'")
        for b in found:
            session.add(**bracket_args(b, settings))
