"""Find the brackets in a folder tree.

Three rules, tried in this order for each folder:

1. **manifest** -- a folder that holds ``manifest.csv`` (columns ``file,angle_deg`` and
   optionally ``exposure_s``) is one bracket; its sub-folders are not searched further.
2. **name** -- image files whose names carry an angle token ``<number>deg`` (for example
   ``pier_045deg.tif``, ``pier_22.5deg_b.png``) are grouped by the rest of the name (the
   common stem, here ``pier`` and ``pier_b``); the angle comes from the token.
3. **time** -- the remaining image files of a folder are grouped by their EXIF capture time:
   a new bracket starts where the gap between consecutive frames exceeds ``time_gap_s``.
   Their analyzer angles come from the batch settings (``angles_deg``, in shot order); a
   group holding a whole multiple of that many frames is split into consecutive brackets.

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

import csv
import datetime as _dt
import os
import re
from dataclasses import dataclass
from pathlib import Path

__all__ = [
    "Bracket",
    "IMAGE_EXTENSIONS",
    "discover_brackets",
    "safe_name",
]

#: File name suffixes (lower case) treated as frames.
IMAGE_EXTENSIONS = (
    ".tif", ".tiff", ".png", ".jpg", ".jpeg", ".pgm", ".ppm",
    ".dng", ".cr2", ".cr3", ".nef", ".arw", ".orf", ".rw2", ".raf", ".pef", ".srw",
)

# The last "<number>deg" in a file stem, not followed by a letter ("45degrees" is no token).
_ANGLE_TOKEN = re.compile(r"(?i)(\d+(?:\.\d+)?)deg(?![a-z])")
_SEPARATORS = "_-. "
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


def _is_image(p: Path, extensions) -> bool:
    return p.suffix.lower() in extensions


def read_manifest_frames(path: Path):
    """Return ``(frames, angles_deg, problem)`` from a manifest.csv (frames resolved)."""
    try:
        with open(path, "r", newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.DictReader(fh))
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        return (), None, f"cannot read {path.name}: {exc}"
    if not rows or "file" not in rows[0] or "angle_deg" not in rows[0]:
        return (), None, f"{path.name} needs the columns file,angle_deg[,exposure_s]"
    frames, angles, missing = [], [], []
    for i, row in enumerate(rows, start=2):
        name = (row.get("file") or "").strip()
        try:
            angle = float(row.get("angle_deg"))
        except (TypeError, ValueError):
            return (), None, f"{path.name} line {i}: angle_deg {row.get('angle_deg')!r} is not a number"
        frame = (path.parent / name)
        if not name or not frame.is_file():
            missing.append(name or f"(empty, line {i})")
        frames.append(frame)
        angles.append(angle)
    problem = None
    if missing:
        problem = f"missing frame(s) listed in {path.name}: {', '.join(missing)}"
    return tuple(frames), tuple(angles), problem


def exif_capture_time(path: Path):
    """Capture time of ``path`` from EXIF (``DateTimeOriginal`` + sub-seconds) or None."""
    import exifread

    try:
        with open(path, "rb") as fh:
            tags = exifread.process_file(fh, details=False, stop_tag="SubSecTimeOriginal")
    except Exception:  # exifread raises many kinds on odd files; no time then
        return None
    raw = tags.get("EXIF DateTimeOriginal") or tags.get("Image DateTime")
    if raw is None:
        return None
    try:
        t = _dt.datetime.strptime(str(raw).strip(), "%Y:%m:%d %H:%M:%S")
    except ValueError:
        return None
    sub = tags.get("EXIF SubSecTimeOriginal")
    seconds = t.timestamp()
    if sub is not None and str(sub).strip().isdigit():
        digits = str(sub).strip()
        seconds += int(digits) / 10 ** len(digits)
    return seconds


def _group_by_name(files):
    groups: dict[str, list] = {}
    rest = []
    for f in files:
        matches = list(_ANGLE_TOKEN.finditer(f.stem))
        if not matches:
            rest.append(f)
            continue
        m = matches[-1]
        stem = (f.stem[: m.start()].rstrip(_SEPARATORS) + "_" + f.stem[m.end():].lstrip(_SEPARATORS)).strip("_")
        groups.setdefault(stem, []).append((float(m.group(1)), f))
    return groups, rest


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


def discover_brackets(root, *, time_gap_s: float = 10.0, angles_deg=None,
                      manifest_name: str = "manifest.csv", extensions=IMAGE_EXTENSIONS,
                      exclude_dirs=(), mosaic_cell: str | None = None) -> list[Bracket]:
    """Walk ``root`` and return its brackets in a stable (sorted) order.

    Parameters
    ----------
    root : path
        Top of the folder tree (or a single folder).
    time_gap_s : float
        Seconds between consecutive EXIF capture times that start a new bracket.
    angles_deg : sequence of float, optional
        Analyzer angles (degrees) of time-grouped brackets, in shot order.
    manifest_name : str
        File name that makes a folder a manifest bracket.
    extensions : sequence of str
        Lower-case suffixes of frame files.
    exclude_dirs : sequence of path
        Folders not to search (the batch output folder when it lies inside ``root``).
    mosaic_cell : str, optional
        Frames come from a polarization-mosaic camera with this 2x2 cell: outside manifest
        folders every frame file is a bracket of its own (rule ``"mosaic"``).

    Returns
    -------
    list of Bracket
    """
    from ..errors import InputError

    root = Path(root)
    if not root.is_dir():
        raise InputError(f"batch root {root} is not a folder; give the folder that holds the brackets")
    root_abs = root.resolve()
    excluded = {Path(d).resolve() for d in exclude_dirs}
    extensions = tuple(e.lower() for e in extensions)
    angles = tuple(float(a) for a in angles_deg) if angles_deg is not None else None
    found: list[Bracket] = []
    used: set[str] = {"summary.csv", "report.html"}

    def unique(parts):
        base = "__".join(safe_name(p) for p in parts if p) or "bracket"
        name, k = base, 2
        while name.lower() in used:
            name = f"{base}-{k}"
            k += 1
        used.add(name.lower())
        return name

    for dirpath, dirnames, filenames in os.walk(root_abs, followlinks=False):
        here = Path(dirpath)
        dirnames[:] = sorted(d for d in dirnames
                             if not d.startswith(".") and (here / d).resolve() not in excluded)
        rel = here.relative_to(root_abs)
        rel_parts = rel.parts if rel.parts else (root_abs.name,)
        label_dir = rel.as_posix() if rel.parts else "."
        filenames = sorted(filenames)
        if manifest_name in filenames:
            dirnames[:] = []
            mpath = here / manifest_name
            frames, m_angles, problem = read_manifest_frames(mpath)
            found.append(Bracket(
                name=unique(rel_parts), label=label_dir, frames=frames, angles_deg=m_angles,
                manifest=mpath, rule="manifest",
                reason=f"folder holds {manifest_name} ({len(frames)} frames"
                       + (f" at {', '.join(_fmt_angle(a) for a in m_angles)} deg)" if m_angles else ")"),
                problem=problem))
            continue
        files = [here / f for f in filenames if not f.startswith(".") and _is_image(here / f, extensions)]
        if not files:
            continue
        if mosaic_cell:
            for f in files:
                found.append(Bracket(
                    name=unique(rel_parts + (f.stem,)), label=f"{label_dir}/{f.name}", frames=(f,),
                    angles_deg=None, manifest=None, rule="mosaic",
                    reason=f"one raw frame of a polarization-mosaic camera (cell {mosaic_cell})"))
            continue
        by_name, rest = _group_by_name(files)
        for stem in sorted(by_name):
            items = sorted(by_name[stem], key=lambda af: (af[0], af[1].name))
            a_list = [a for a, _ in items]
            problem = None
            dup = sorted({a for a in a_list if a_list.count(a) > 1})
            if dup:
                names = [f.name for a, f in items if a in dup]
                problem = f"two frames at the same angle ({', '.join(names)}); keep one per angle"
            elif len(items) < 3:
                problem = (f"only {len(items)} frame(s) ({', '.join(f.name for _, f in items)}); "
                           "a bracket needs at least 3 analyzer angles")
            label_stem = stem or "(no stem)"
            found.append(Bracket(
                name=unique(rel_parts + ((stem,) if stem else ())),
                label=f"{label_dir}/{label_stem}", frames=tuple(f for _, f in items),
                angles_deg=tuple(a_list), manifest=None, rule="name",
                reason=(f"{len(items)} files named {label_stem} + angle token "
                        f"({', '.join(_fmt_angle(a) for a in a_list)} deg)"),
                problem=problem))
        if not rest:
            continue
        timed, untimed = [], []
        for f in rest:
            t = exif_capture_time(f)
            (untimed if t is None else timed).append((t, f))
        timed.sort(key=lambda tf: (tf[0], tf[1].name))
        for group in _split_by_time(timed, float(time_gap_s)):
            chunks = [group]
            n_ang = len(angles) if angles else 0
            if n_ang and len(group) > n_ang and len(group) % n_ang == 0:
                chunks = [group[i:i + n_ang] for i in range(0, len(group), n_ang)]
            for chunk in chunks:
                frames = tuple(f for _, f in chunk)
                t0 = _dt.datetime.fromtimestamp(chunk[0][0]).strftime("%Y-%m-%d %H:%M:%S")
                span = chunk[-1][0] - chunk[0][0]
                problem = None
                if not angles:
                    problem = ("frames grouped by capture time carry no angles; give angles_deg "
                               "(shot order) in the config [discovery] table or --angles")
                elif len(frames) != n_ang:
                    problem = (f"{len(frames)} frames captured together but {n_ang} angles given "
                               f"({', '.join(_fmt_angle(a) for a in angles)} deg); check for a missing "
                               "or extra frame or change time_gap_s")
                found.append(Bracket(
                    name=unique(rel_parts + (frames[0].stem,)),
                    label=f"{label_dir}/{frames[0].name}..{frames[-1].name}", frames=frames,
                    angles_deg=angles if (angles and len(frames) == n_ang) else None,
                    manifest=None, rule="time",
                    reason=(f"{len(frames)} frames shot from {t0} within {span:.1f} s "
                            f"(gap > {float(time_gap_s):g} s starts a new bracket)"),
                    problem=problem))
        if untimed:
            frames = tuple(f for _, f in sorted(untimed, key=lambda tf: tf[1].name))
            found.append(Bracket(
                name=unique(rel_parts + ("ungrouped",)), label=f"{label_dir}/(ungrouped)",
                frames=frames, angles_deg=None, manifest=None, rule="none",
                reason=f"{len(frames)} image files with no angle token and no EXIF capture time",
                problem=(f"cannot group {', '.join(f.name for f in frames[:5])}"
                         + (" ..." if len(frames) > 5 else "")
                         + ": name the frames <stem>_<angle>deg, add a manifest.csv, or keep EXIF times")))
    return found
