"""Find the brackets in a folder tree.

Three rules, tried in this order for each folder:

1. **manifest** -- a folder that holds ``manifest.csv`` is one bracket, read by the same
   manifest reader as every command (:mod:`polarsky.read.manifest`); its sub-folders are not
   searched further.
2. **name** -- frame files whose names carry an angle token (``pier_045deg.tif``,
   ``pier_22.5deg_b.png``) are grouped by the rest of the name (the stem, here ``pier`` and
   ``pier_b``); the token is read by the same parser as every command
   (:mod:`polarsky.read.names`).
3. **time** -- the remaining frame files of a folder are grouped by their EXIF capture time:
   a new bracket starts where the gap between consecutive frames exceeds ``time_gap_s``.
   Their analyzer angles come from the batch settings (``angles``, in shot order); a group
   holding a whole multiple of that many frames is split into consecutive brackets.

Frame files are those of :data:`polarsky.read.formats.FRAME_SUFFIXES` (the formats every
command reads).

With a mosaic cell configured, every frame outside manifest folders is one bracket
(a raw frame of a polarization-mosaic camera) instead of rules 2 and 3.

Image files that no rule can place (no angle token, no EXIF time) become one *failed*
bracket per folder, so that nothing is dropped silently.  Discovery only reads: files are
opened read-only and never modified.

Bracket names are relative paths joined with ``__`` and reduced to the characters
``A-Za-z0-9._-``; they never start with a dot, so they cannot name a parent folder or a
hidden folder of the output tree.
"""

from __future__ import annotations

import datetime as _dt
import os
import re
from dataclasses import dataclass
from pathlib import Path

from .._shared.checks import path_problem
from ..errors import InputError
from ..read.exif import read_metadata
from ..read.formats import FRAME_SUFFIXES, MOSAIC_SUFFIXES
from ..read.manifest import MANIFEST_NAME, read_manifest
from ..read.names import split_name

__all__ = [
    "Bracket",
    "discover_brackets",
    "safe_name",
]

_SAFE = re.compile(r"[^A-Za-z0-9._-]+")


@dataclass(frozen=True)
class Bracket:
    """One bracket found by :func:`discover_brackets`.

    Attributes
    ----------
    name : str
        Name of its output folder (safe: ``A-Za-z0-9._-``, unique in the batch).
    label : str
        Where it came from, relative to the batch root (for people).
    frames : tuple of Path
        The frame files, in analyzer-angle order for the name rule, in shot order for the
        time rule, in manifest order for the manifest rule.
    angles_deg : tuple of float or None
        Analyzer angles in degrees (for a manifest bracket as listed there; None when
        unknown).
    manifest : Path or None
        The ``manifest.csv`` of a manifest bracket.
    rule : str
        ``"manifest"``, ``"name"``, ``"time"``, ``"mosaic"`` or ``"none"``.
    reason : str
        Why these frames were grouped so (shown by ``--list``).
    problem : str or None
        Set when the bracket cannot be processed as found (missing frame, duplicate angle,
        ...); the batch reports it as failed with this reason.
    """

    name: str
    label: str
    frames: tuple
    angles_deg: tuple | None
    manifest: Path | None
    rule: str
    reason: str
    problem: str | None = None

    def as_key(self) -> dict:
        """What identifies the bracket's inputs for the completion hash (file names, not paths)."""
        return {"name": self.name, "rule": self.rule, "frames": [Path(f).name for f in self.frames],
                "angles_deg": list(self.angles_deg) if self.angles_deg is not None else None,
                "manifest": Path(self.manifest).name if self.manifest else None}

    def as_dict(self) -> dict:
        return {
            "name": self.name,
            "label": self.label,
            "rule": self.rule,
            "frames": [str(p) for p in self.frames],
            "angles_deg": list(self.angles_deg) if self.angles_deg is not None else None,
            "manifest": str(self.manifest) if self.manifest else None,
            "reason": self.reason,
            "problem": self.problem,
        }


def safe_name(text: str) -> str:
    """Reduce ``text`` to a folder name that cannot escape its parent.

    >>> safe_name("../../etc/pass wd")
    '__.._etc_pass_wd'
    >>> safe_name("..")
    '_'
    """
    out = _SAFE.sub("_", str(text).replace(os.sep, "_").replace("/", "_"))
    out = out.strip(" ")
    if out.startswith("."):
        out = "_" + out.lstrip(".")
    if out in ("", "_", "."):
        out = "_"
    if out.startswith("-"):
        out = "_" + out[1:]
    return out[:120]


def _fmt_angle(a: float) -> str:
    return f"{a:g}"


def _manifest_bracket(path: Path):
    """``(frames, angles_deg, problem)`` of a manifest.csv, read by the one manifest reader."""
    try:
        man = read_manifest(path)
    except InputError as exc:
        try:
            man = read_manifest(path, check_files=False)
        except InputError:
            return (), None, str(exc)
        return man.files, man.angles_deg, str(exc)
    return man.files, man.angles_deg, None


def _group_by_name(files):
    """Files with an angle token grouped by stem; the rest; and files whose name is ambiguous."""
    groups: dict[str, list] = {}
    rest, bad = [], []
    for f in files:
        try:
            parsed = split_name(f)
        except InputError as exc:
            bad.append((f, str(exc)))
            continue
        if parsed is None:
            rest.append(f)
            continue
        stem, angle = parsed
        groups.setdefault(stem, []).append((angle, f))
    return groups, rest, bad


def _split_by_time(files_times, gap_s):
    groups, current, last = [], [], None
    for t, f in files_times:
        if current and t - last > gap_s:
            groups.append(current)
            current = []
        current.append((t, f))
        last = t
    if current:
        groups.append(current)
    return groups


def discover_brackets(root, *, time_gap_s: float = 10.0, angles_deg=None, exclude_dirs=(),
                      mosaic_cell: str | None = None) -> list[Bracket]:
    """Walk ``root`` and return its brackets in a stable (sorted) order.

    Parameters
    ----------
    root : path
        Top of the folder tree (or a single folder).
    time_gap_s : float
        Seconds between consecutive EXIF capture times that start a new bracket.
    angles_deg : sequence of float, optional
        Analyzer angles (degrees) of time-grouped brackets, in shot order.
    exclude_dirs : sequence of path
        Folders not to search (the batch output folder, wherever it lies).
    mosaic_cell : str, optional
        Frames come from a polarization-mosaic camera with this 2x2 cell: outside manifest
        folders every frame file is a bracket of its own (rule ``"mosaic"``).

    Returns
    -------
    list of Bracket

    Notes
    -----
    Folders that are symbolic links are followed (each real folder once, so a link back to a
    folder above does not loop); hidden folders (names starting with ``.``) are not searched.
    A symbolic link that leads nowhere (dangling or looping) and a folder that cannot be read
    become failed brackets that say so, never silently skipped.
    """
    root = Path(root)
    if not root.is_dir():
        raise InputError(f"batch root {root} is not a folder; give the folder that holds the brackets")
    root_abs = root.resolve()
    excluded = {Path(d).resolve() for d in exclude_dirs}
    suffixes = MOSAIC_SUFFIXES if mosaic_cell else FRAME_SUFFIXES
    angles = tuple(float(a) for a in angles_deg) if angles_deg is not None else None
    found: list[Bracket] = []
    used: set[str] = {"summary.csv", "report.html"}
    seen: set = set()

    def unique(parts):
        base = "__".join(safe_name(p) for p in parts if p) or "bracket"
        name, k = base, 2
        while name.lower() in used:
            name = f"{base}-{k}"
            k += 1
        used.add(name.lower())
        return name

    unreadable: list = []
    for dirpath, dirnames, filenames in os.walk(root_abs, followlinks=True, onerror=unreadable.append):
        here = Path(dirpath)
        real = here.resolve()
        if real in seen or real in excluded or _is_output_folder(here):
            dirnames[:] = []
            continue
        seen.add(real)
        dirnames[:] = sorted(d for d in dirnames if not d.startswith(".") and (here / d).resolve() not in excluded)
        rel = here.relative_to(root_abs)
        rel_parts = rel.parts if rel.parts else (root_abs.name,)
        label_dir = rel.as_posix() if rel.parts else "."
        filenames = sorted(filenames)
        for f in filenames:
            problem = None if f.startswith(".") or not os.path.islink(here / f) else path_problem(here / f)
            if problem is not None:  # a link that leads nowhere: say so instead of skipping it
                found.append(Bracket(name=unique(rel_parts + (f,)), label=f"{label_dir}/{f}", frames=(),
                                     angles_deg=None, manifest=None, rule="none", reason="a symbolic link in the tree",
                                     problem=f"{f} {problem}; fix or remove the link"))
        if MANIFEST_NAME in filenames:
            dirnames[:] = []
            mpath = here / MANIFEST_NAME
            frames, m_angles, problem = _manifest_bracket(mpath)
            found.append(Bracket(
                name=unique(rel_parts), label=label_dir, frames=tuple(frames), angles_deg=m_angles,
                manifest=mpath, rule="manifest",
                reason=f"folder holds {MANIFEST_NAME} ({len(frames)} frames"
                       + (f" at {', '.join(_fmt_angle(a) for a in m_angles)} deg)" if m_angles else ")"),
                problem=problem))
            continue
        files = [here / f for f in filenames if not f.startswith(".") and (here / f).suffix.lower() in suffixes
                 and (here / f).is_file()]
        if not files:
            continue
        if mosaic_cell:
            for f in files:
                found.append(Bracket(
                    name=unique(rel_parts + (f.stem,)), label=f"{label_dir}/{f.name}", frames=(f,),
                    angles_deg=None, manifest=None, rule="mosaic",
                    reason=f"one raw frame of a polarization-mosaic camera (cell {mosaic_cell})"))
            continue
        by_name, rest, bad = _group_by_name(files)
        for f, why in bad:
            found.append(Bracket(name=unique(rel_parts + (f.stem,)), label=f"{label_dir}/{f.name}", frames=(f,),
                                 angles_deg=None, manifest=None, rule="name", reason="angle token in the file name",
                                 problem=why))
        for stem in sorted(by_name):
            items = sorted(by_name[stem], key=lambda af: (af[0], af[1].name))
            a_list = [a for a, _ in items]
            label_stem = stem or "(no stem)"
            found.append(Bracket(
                name=unique(rel_parts + ((stem,) if stem else ())),
                label=f"{label_dir}/{label_stem}", frames=tuple(f for _, f in items),
                angles_deg=tuple(a_list), manifest=None, rule="name",
                reason=(f"{len(items)} files named {label_stem} + angle token "
                        f"({', '.join(_fmt_angle(a) for a in a_list)} deg)"),
                problem=_angle_problem(a_list, [f.name for _, f in items])))
        if not rest:
            continue
        timed, untimed = [], []
        for f in rest:
            t = read_metadata(f).get("capture_time_s")
            (untimed if t is None else timed).append((t, f))
        timed.sort(key=lambda tf: (tf[0], tf[1].name))
        for group in _split_by_time(timed, float(time_gap_s)):
            found.extend(_time_brackets(group, angles, label_dir, rel_parts, unique, time_gap_s))
        if untimed:
            frames = tuple(f for _, f in sorted(untimed, key=lambda tf: tf[1].name))
            found.append(Bracket(
                name=unique(rel_parts + ("ungrouped",)), label=f"{label_dir}/(ungrouped)",
                frames=frames, angles_deg=None, manifest=None, rule="none",
                reason=f"{len(frames)} image files with no angle token and no EXIF capture time",
                problem=(f"cannot group {', '.join(f.name for f in frames[:5])}"
                         + (" ..." if len(frames) > 5 else "")
                         + ": name the frames <stem>_<angle>deg, add a manifest.csv, or keep EXIF times")))
    for exc in unreadable:
        where = Path(exc.filename) if exc.filename else root_abs
        rel = where.relative_to(root_abs) if where.is_relative_to(root_abs) else where
        found.append(Bracket(name=unique(rel.parts or (root_abs.name,)), label=rel.as_posix(), frames=(),
                             angles_deg=None, manifest=None, rule="none", reason="a folder of the tree",
                             problem=f"folder {rel.as_posix()} cannot be read ({exc.strerror}); its frames were not "
                                     "searched"))
    return found


def _is_output_folder(folder: Path) -> bool:
    """A folder polarsky wrote (a batch's bracket folder with its batch.json, or a command's
    output folder with its marker): never searched for frames."""
    from ..write.stage import MARKER
    from .state import read_marker

    return read_marker(folder) is not None or (folder / MARKER).is_file()


def _angle_problem(angles, names) -> str | None:
    """What the bracket reader would refuse in these angles (the same check), or None."""
    from ..core.stokes import check_angles

    if len(angles) < 3:
        return (f"only {len(angles)} frame(s) ({', '.join(names)}); a bracket needs at least 3 frames at distinct "
                "analyzer angles")
    try:
        check_angles(angles, warn_condition=float("inf"))
    except InputError as exc:
        return str(exc)
    return None


def _time_brackets(group, angles, label_dir, rel_parts, unique, time_gap_s):
    chunks = [group]
    n_ang = len(angles) if angles else 0
    if n_ang and len(group) > n_ang and len(group) % n_ang == 0:
        chunks = [group[i:i + n_ang] for i in range(0, len(group), n_ang)]
    out = []
    for chunk in chunks:
        frames = tuple(f for _, f in chunk)
        t0 = _dt.datetime.fromtimestamp(chunk[0][0], _dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S")
        span = chunk[-1][0] - chunk[0][0]
        problem = None
        if not angles:
            problem = ("frames grouped by capture time carry no angles; give angles (shot order) in the batch "
                       "settings ([read] angles) or --angles")
        elif len(frames) != n_ang:
            problem = (f"{len(frames)} frames captured together but {n_ang} angles given "
                       f"({', '.join(_fmt_angle(a) for a in angles)} deg); check for a missing or extra frame or "
                       "change time_gap_s")
        out.append(Bracket(
            name=unique(rel_parts + (frames[0].stem,)),
            label=f"{label_dir}/{frames[0].name}..{frames[-1].name}", frames=frames,
            angles_deg=angles if (angles and len(frames) == n_ang) else None,
            manifest=None, rule="time",
            reason=(f"{len(frames)} frames shot from {t0} within {span:.1f} s "
                    f"(gap > {float(time_gap_s):g} s starts a new bracket)"),
            problem=problem))
    return out
