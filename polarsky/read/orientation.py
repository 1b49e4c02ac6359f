"""Display orientation: how a stored frame is turned for display, and what that does to angles.

Cameras and phones store a portrait frame in the sensor's landscape layout and say in the
EXIF (or TIFF) Orientation tag how to show it; LibRaw reports the same for raw files as its
``flip``.  polarsky reads every frame as displayed, so maps, regions and pictures are in the
layout the user sees.  Turning (or mirroring) the image turns the angle frame with it: an
analyzer angle given on the camera's own layout (a filter ring reading, say) is a different
angle on the displayed image.

The Orientation values (TIFF 6.0, tag 274; Exif 2.32, section 4.6.4) say where the stored
row 0 / column 0 lie in the displayed picture: 1 top/left (as stored), 2 top/right (mirrored
left-right), 3 bottom/right (turned 180 deg), 4 bottom/left (mirrored top-bottom), 5 left/top
(transposed), 6 right/top (turned 90 deg clockwise for display), 7 right/bottom (transversed),
8 left/bottom (turned 90 deg counter-clockwise for display).

An angle ``theta`` measured counter-clockwise from the stored image's +x axis becomes
``sign * theta + turn`` on the displayed image (:data:`ANGLE_MAP`): a display turned 90 deg
clockwise shows every direction 90 deg further clockwise, and a mirror reverses the sense.

References
----------
.. [1] Adobe, *TIFF Revision 6.0* (1992), Orientation tag (274).
.. [2] CIPA DC-008-2019, *Exif Version 2.32*, Orientation (tag 0x0112).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["ORIENTATION_NAMES", "ANGLE_MAP", "to_display", "angles_to_display", "from_libraw_flip",
           "describe", "check_orientation"]

#: Orientation value -> what the display does with the stored frame.
ORIENTATION_NAMES = {1: "as stored", 2: "mirrored left-right", 3: "turned 180 deg", 4: "mirrored top-bottom",
                     5: "transposed", 6: "turned 90 deg clockwise", 7: "transversed",
                     8: "turned 90 deg counter-clockwise"}

#: Orientation value -> (sign, turn_deg): a stored-frame angle theta is ``sign * theta + turn_deg``
#: on the displayed image (counter-clockwise as displayed, modulo 180 for axes).
ANGLE_MAP = {1: (1, 0.0), 2: (-1, 0.0), 3: (1, 180.0), 4: (-1, 0.0), 5: (-1, 90.0), 6: (1, -90.0),
             7: (-1, 90.0), 8: (1, 90.0)}

#: LibRaw's ``sizes.flip`` -> the Orientation value it stands for (0 none, 3 180, 5 ccw, 6 cw).
_LIBRAW_FLIP = {0: 1, 3: 3, 5: 8, 6: 6}


def check_orientation(value: int, what: str = "orientation") -> int:
    """An Orientation value 1..8 (InputError naming ``what`` otherwise)."""
    if value not in ANGLE_MAP:
        raise InputError(f"{what} {value!r} is not an orientation; give 1..8 (1 = as stored, 6 = turned 90 deg "
                         "clockwise, 8 = turned 90 deg counter-clockwise, 3 = 180 deg)")
    return int(value)


def to_display(data: np.ndarray, orientation: int) -> np.ndarray:
    """The stored frame ``data`` (..., H, W) as displayed (a C-contiguous copy unless 1).

    Examples
    --------
    >>> a = np.arange(6).reshape(1, 2, 3)
    >>> to_display(a, 6)[0].tolist()   # turned 90 deg clockwise: the stored left column on top
    [[3, 0], [4, 1], [5, 2]]
    """
    o = check_orientation(orientation)
    if o == 1:
        return data
    ops = {2: lambda a: a[..., :, ::-1], 3: lambda a: a[..., ::-1, ::-1], 4: lambda a: a[..., ::-1, :],
           5: lambda a: np.swapaxes(a, -1, -2), 6: lambda a: np.swapaxes(a, -1, -2)[..., :, ::-1],
           7: lambda a: np.swapaxes(a, -1, -2)[..., ::-1, ::-1], 8: lambda a: np.swapaxes(a, -1, -2)[..., ::-1, :]}
    return np.ascontiguousarray(ops[o](data))


def angles_to_display(angles_deg, orientation: int) -> np.ndarray:
    """Angles (degrees) on the stored frame as angles on the displayed image.

    Examples
    --------
    >>> angles_to_display([0, 45, 90, 135], 6).tolist()
    [-90.0, -45.0, 0.0, 45.0]
    """
    sign, turn = ANGLE_MAP[check_orientation(orientation)]
    return sign * np.asarray(angles_deg, dtype=np.float64) + turn


def from_libraw_flip(flip: int) -> int:
    """The Orientation value of LibRaw's ``sizes.flip`` (1 for values it does not define)."""
    return _LIBRAW_FLIP.get(int(flip), 1)


def describe(orientation: int) -> str:
    """``"orientation 6 (turned 90 deg clockwise)"``."""
    return f"orientation {orientation} ({ORIENTATION_NAMES[orientation]})"
