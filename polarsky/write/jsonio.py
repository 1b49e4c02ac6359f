"""JSON output: one encoder for every file and every ``--json`` print.

Numbers that are not finite become ``null`` (JSON has no NaN); numpy values become Python
values; paths become text.
"""

from __future__ import annotations

import json
import math
import os
import sys
from pathlib import Path

import numpy as np

__all__ = ["jsonable", "dumps", "write_json", "print_json"]


def jsonable(x):
    """A copy of ``x`` made of JSON types (non-finite numbers -> None)."""
    if isinstance(x, dict):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [jsonable(v) for v in x]
    if isinstance(x, np.ndarray):
        return jsonable(x.tolist())
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        return float(x) if math.isfinite(x) else None
    if isinstance(x, Path):
        return str(x)
    if hasattr(x, "isoformat"):
        return x.isoformat()
    return x


def dumps(obj, *, indent=None) -> str:
    """JSON text of ``obj`` (see :func:`jsonable`)."""
    return json.dumps(jsonable(obj), indent=indent, allow_nan=False)


def write_json(path, obj) -> Path:
    """Write ``obj`` as indented JSON through a temporary name and :func:`os.replace`."""
    path = Path(path)
    tmp = path.with_name(f".{path.name}.partial-{os.getpid()}")
    try:
        tmp.write_text(dumps(obj, indent=2) + "\n", encoding="utf-8")
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


def print_json(obj) -> None:
    """Print ``obj`` as one line of JSON on stdout (what ``--json`` prints)."""
    sys.stdout.write(dumps(obj) + "\n")
    sys.stdout.flush()
