"""The bracket manifest: one CSV reader for every command and the batch.

Columns ``file`` and ``angle_deg`` (and optionally ``exposure_s``), one row per frame; the
header's case and spaces do not matter (``File, Angle_deg`` works); file names are relative
to the manifest's folder; empty lines are skipped.  Numbers are plain decimals: a Unicode
minus and a decimal comma in a quoted field (``"22,5"``) are read; underscores, exponents in
angles, ``nan``, ``inf`` and a comma that could separate thousands (``"1,350"``) are refused
naming the file and line.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

from .._shared.checks import parse_number, path_problem
from ..errors import InputError

__all__ = ["Manifest", "read_manifest", "MANIFEST_NAME", "MANIFEST_HELP"]

#: File name that makes a folder one bracket in a batch.
MANIFEST_NAME = "manifest.csv"
MANIFEST_HELP = "a CSV with columns file,angle_deg[,exposure_s]"
_COLUMNS = ("file", "angle_deg", "exposure_s")


@dataclass(frozen=True)
class Manifest:
    """A parsed manifest.

    Attributes
    ----------
    path : Path
    files : tuple of Path
        Frame files (resolved against the manifest's folder), in row order.
    angles_deg : tuple of float
    exposures_s : tuple of float or None
    """

    path: Path
    files: tuple
    angles_deg: tuple
    exposures_s: tuple


def read_manifest(path, *, check_files: bool = True) -> Manifest:
    """Read and check a manifest.

    Parameters
    ----------
    path : path-like
    check_files : bool
        Require every listed frame to exist.

    Raises
    ------
    InputError
        Missing or unreadable file, missing columns, an unknown column, a row with extra
        fields, a value that is not a plain finite number, a non-positive exposure, a
        listed frame that does not exist.
    """
    path = Path(path)
    if not path.is_file():
        problem = path_problem(path) or "is not a file"
        raise InputError(f"manifest {path} {problem}; give {MANIFEST_HELP}")
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise InputError(f"manifest {path} cannot be read as CSV ({type(exc).__name__}); give {MANIFEST_HELP}") from None
    rows = [(i, r) for i, r in enumerate(rows, start=1) if any(c.strip() for c in r)]
    if not rows:
        raise InputError(f"manifest {path} is empty; give {MANIFEST_HELP}")
    header_line, header = rows[0]
    names = [c.strip().lower() for c in header]
    unknown = [c for c in names if c not in _COLUMNS]
    missing = [c for c in _COLUMNS[:2] if c not in names]
    if missing or unknown:
        what = (f"lacks column(s) {', '.join(missing)}" if missing else f"has unknown column(s) {', '.join(unknown)}")
        raise InputError(f"manifest {path} {what}; give {MANIFEST_HELP}")
    if len(set(names)) != len(names):
        raise InputError(f"manifest {path} names a column twice; give {MANIFEST_HELP}")
    col = {c: names.index(c) for c in names}
    files, angles, exposures = [], [], []
    for line, row in rows[1:]:
        if len(row) > len(names):
            raise InputError(f"manifest {path} line {line} has {len(row)} fields but the header has {len(names)}; "
                             "quote file names that hold commas")
        row = [c.strip() for c in row] + [""] * (len(names) - len(row))
        name = row[col["file"]]
        if not name:
            raise InputError(f"manifest {path} line {line} names no file")
        f = path.parent / name
        if check_files and not f.is_file():
            problem = path_problem(f) or "is not a file"
            if problem == "does not exist":
                problem += " next to the manifest"
            raise InputError(f"manifest {path} line {line} names {name!r}, which {problem}")
        angles.append(parse_number(row[col["angle_deg"]], f"manifest {path} line {line}: angle_deg",
                                   decimal_comma=True))
        e = None
        if "exposure_s" in col and row[col["exposure_s"]]:
            e = parse_number(row[col["exposure_s"]], f"manifest {path} line {line}: exposure_s", allow_exponent=True,
                             decimal_comma=True)
            if not e > 0:
                raise InputError(f"manifest {path} line {line}: exposure_s must be positive, got {e:g}")
        files.append(f)
        exposures.append(e)
    if not files:
        raise InputError(f"manifest {path} has a header but no rows; give one row per frame")
    return Manifest(path=path, files=tuple(files), angles_deg=tuple(angles), exposures_s=tuple(exposures))
