"""Writing a camera response curve (``response.json``, read by :mod:`polarsky.read.response_file`)."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

import numpy as np

from .._version import __version__
from ..read.response_file import FILE_NAME, FORMAT_VERSION

__all__ = ["publish_response"]


def publish_response(out_dir, lut, result: dict, *, warnings=()) -> dict:
    """Write ``response.json`` (``result``, the curve, provenance) into ``out_dir``, published whole.

    Returns ``result`` with ``warnings``, ``outputs`` and ``response`` (the file's path).
    """
    from .jsonio import write_json
    from .stage import OutputStage

    result["warnings"] = list(warnings)
    result["outputs"] = [FILE_NAME]
    doc = {"polarsky_response": FORMAT_VERSION, "software_version": __version__,
           "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"), **result,
           "curve": np.round(np.asarray(lut, dtype=np.float64), 7).tolist()}
    with OutputStage(out_dir, command="calibrate response", inputs=result.get("inputs", ())) as stage:
        write_json(stage.path(FILE_NAME), doc)
        stage.publish()
    result["response"] = str(Path(out_dir) / FILE_NAME)
    return result
