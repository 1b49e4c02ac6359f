"""Regions of the frame: a pixel box or a mask image, read one way for every use.

The region to darken (``--region``), the protected region (``--protect``) and the sky mask
(``--sky-mask``) are all a box ``x0,y0,x1,y1`` (pixels, x1 and y1 exclusive) or an image of
the frame's size whose non-zero pixels are inside.  An empty region is refused wherever it
is given.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .._shared.checks import path_problem
from ..errors import InputError

__all__ = ["Region", "parse_region", "read_mask_image", "BOX_HELP"]

BOX_HELP = "a box x0,y0,x1,y1 (pixels, x1 and y1 exclusive) or a mask image (non-zero = inside)"
_BOX = re.compile(r"^\s*(-?\d+)\s*,\s*(-?\d+)\s*,\s*(-?\d+)\s*,\s*(-?\d+)\s*$")


@dataclass(frozen=True)
class Region:
    """A region given as a box or a mask image.

    ``text`` is what the user wrote (echoed in results and messages), ``option`` the option
    that gave it (``--region``, ``--protect``, ``--sky-mask``); exactly one of ``box``
    (``(x0, y0, x1, y1)``, pixels) and ``path`` (the mask image) is set.
    """

    text: str
    option: str = "--region"
    box: tuple | None = None
    path: Path | None = None

    def as_mask(self, shape) -> np.ndarray:
        """Boolean mask (h, w) of the region on a frame of ``shape``.

        Raises
        ------
        InputError
            The box does not fit the frame, the mask image has another size, or the region
            is empty.
        """
        h, w = shape
        if self.box is not None:
            x0, y0, x1, y1 = self.box
            if not (0 <= x0 < x1 <= w and 0 <= y0 < y1 <= h):
                raise InputError(f"{self.option} {self.text} does not fit in the {w}x{h} frame; give x0,y0,x1,y1 with "
                                 f"0 <= x0 < x1 <= {w} and 0 <= y0 < y1 <= {h}")
            m = np.zeros((h, w), bool)
            m[y0:y1, x0:x1] = True
            return m
        mask = read_mask_image(self.path, option=self.option)
        if mask.shape != (h, w):
            raise InputError(f"{self.option} mask {self.path} is {mask.shape[1]}x{mask.shape[0]} but the frames are "
                             f"{w}x{h}; give a mask image of the frame's size")
        return mask

    def as_text(self) -> str:
        return self.text


def parse_region(value, *, option: str = "--region", base: Path | None = None) -> Region:
    """A :class:`Region` from ``"x0,y0,x1,y1"``, a sequence of four integers or a mask path.

    Parameters
    ----------
    value : str, sequence or Region
    option : str
        The option's name, for messages.
    base : Path, optional
        Folder that relative mask paths are relative to (a settings file's folder).

    Raises
    ------
    InputError
        Neither a box nor an existing file.
    """
    if isinstance(value, Region):
        return value
    if isinstance(value, (list, tuple)):
        if len(value) != 4 or not all(isinstance(v, int) and not isinstance(v, bool) for v in value):
            raise InputError(f"{option} {list(value)!r} must be four whole numbers x0,y0,x1,y1 or a mask image")
        return _box(tuple(value), ",".join(str(v) for v in value), option)
    text = str(value)
    m = _BOX.match(text)
    if m:
        return _box(tuple(int(v) for v in m.groups()), text.replace(" ", ""), option)
    p = Path(text)
    if base is not None and not p.is_absolute():
        p = base / p
    if not p.is_file():
        problem = path_problem(p)
        if problem not in (None, "does not exist"):
            raise InputError(f"{option} mask {p} {problem}; give {BOX_HELP}")
        raise InputError(f"{option} {text!r} is neither {BOX_HELP.replace(' or a', ' nor an existing')}")
    return Region(text=str(p) if base is not None else text, option=option, path=p)


def _box(box, text, option) -> Region:
    x0, y0, x1, y1 = box
    if min(box) < 0 or x1 <= x0 or y1 <= y0:
        raise InputError(f"{option} {text} is not a box: give x0,y0,x1,y1 in pixels with 0 <= x0 < x1 and "
                         "0 <= y0 < y1 (x1 and y1 exclusive)")
    return Region(text=text, option=option, box=box)


def read_mask_image(path, *, option: str = "--region") -> np.ndarray:
    """Boolean mask (h, w) from an image: any non-zero channel is inside.

    Raises
    ------
    InputError
        Unreadable image, or no pixel inside.
    """
    from .frames import decode_image

    data = decode_image(Path(path), what=f"{option} mask")
    mask = (data != 0).any(axis=0)
    if not mask.any():
        raise InputError(f"{option} mask {path} has no non-zero pixels; paint the region non-zero")
    return mask
