"""Writing regions as mask images: what ``--region``, ``--protect`` and ``--sky-mask`` read back.

A mask image is an 8-bit grey PNG of the frame's size, 255 inside and 0 outside
(:func:`polarsky.read.masks.read_mask_image` takes any non-zero pixel as inside).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["write_mask_image"]


def write_mask_image(path, mask) -> Path:
    """Write the boolean ``mask`` (h, w) as an 8-bit PNG (255 inside, 0 outside).

    Raises
    ------
    InputError
        The image cannot be written (the message names the file).
    """
    import cv2

    path = Path(path)
    m = np.asarray(mask, bool)
    if m.ndim != 2 or not m.any():
        raise InputError(f"the region for {path.name} is empty; draw a region first")
    if not cv2.imwrite(str(path), m.astype(np.uint8) * np.uint8(255)):
        raise InputError(f"cannot write the mask image {path}; check that its folder can be written to")
    return path
