"""Reading a camera response curve (``response.json`` written by ``polarsky calibrate response``).

The file is JSON: ``polarsky_response`` (format version), ``method``, ``channels`` and
``curve`` (one list of 256 linear values per channel, code 255 = 1, non-decreasing), with
the inputs and exposures it was made from.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["FILE_NAME", "FORMAT_VERSION", "find_response", "read_response"]

#: Name of the response file inside the folder ``calibrate response`` writes.
FILE_NAME = "response.json"
#: Version of the response file format.
FORMAT_VERSION = "1"


def find_response(path):
    """The response curve named by ``--response`` (the file, or the folder holding it), read."""
    from .formats import file_in_folder

    return read_response(file_in_folder(path, FILE_NAME, what="response curve", maker="polarsky calibrate response"))


def read_response(path):
    """A :class:`polarsky.core.response.ResponseCurve` from ``path``; InputError naming the file when it is not one."""
    from ..core.response import ResponseCurve

    path = Path(path)
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        curve = np.asarray(doc["curve"], dtype=np.float64)
        ok = doc.get("polarsky_response") == FORMAT_VERSION
    except (OSError, ValueError, KeyError, TypeError):
        ok, curve = False, None
    if not ok or curve.ndim != 2 or curve.shape[1] != 256 or curve.shape[0] not in (1, 3):
        raise InputError(f"{path} is not a response curve written by 'polarsky calibrate response'; make one with it")
    if not np.all(np.isfinite(curve)) or np.any(np.diff(curve, axis=1) < 0) or np.any(curve[:, -1] <= 0):
        raise InputError(f"response curve {path} is not finite and non-decreasing; make it again with "
                         "'polarsky calibrate response'")
    lut = (curve / curve[:, -1:]).astype(np.float32)
    lut.flags.writeable = False
    attrs = {k: v for k, v in doc.items() if k != "curve"}
    return ResponseCurve(lut=lut, method=str(doc.get("method", "")), source=str(path), attrs=attrs)
