"""Layout of a polarization mosaic (division-of-focal-plane) sensor.

A mosaic sensor carries a micro-polarizer over every pixel, in 2x2 cells of four
orientations.  The cell is described by a string such as ``"90,45;135,0"``: rows separated
by ``;``, angles left to right within a row, in degrees in the project's image convention
(from the image +x axis, counter-clockwise as displayed).  Position ``k = 2*row + col``
(row-major, 0..3) indexes the micro-polarizers of the cell.

On colour sensors every 2x2 micro-polarizer cell sits under one colour filter and the cells
follow a Bayer pattern, so colour repeats every 4x4 pixels.  The Bayer order (``RGGB``,
``BGGR``, ``GRBG``, ``GBRG``) names the colours of the 2x2 block of *cells*, row-major.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..core.stokes import distinct_orientations

__all__ = ["MosaicLayout", "parse_mosaic", "BAYER_ORDERS", "check_frame_shape"]

#: Bayer orders of the micro-polarizer cells, row-major over a 2x2 block of cells.
BAYER_ORDERS = ("RGGB", "BGGR", "GRBG", "GBRG")

_EXAMPLE = "e.g. --mosaic \"90,45;135,0\""


@dataclass(frozen=True)
class MosaicLayout:
    """A parsed, validated mosaic layout.

    Attributes
    ----------
    angles_deg : tuple of float
        Transmission-axis angle of the micro-polarizer at each cell position (row-major,
        positions 0..3), degrees.
    colour : str or None
        Bayer order of the cells on colour sensors, ``None`` for monochrome sensors.
    """

    angles_deg: tuple
    colour: str | None = None

    @property
    def cell(self) -> int:
        """Period of the full pattern in pixels: 2 (mono) or 4 (colour)."""
        return 2 if self.colour is None else 4

    @property
    def grid(self) -> np.ndarray:
        """The 2x2 cell of angles, degrees."""
        return np.asarray(self.angles_deg, dtype=np.float64).reshape(2, 2)

    @property
    def text(self) -> str:
        """Canonical text form, e.g. ``"90,45;135,0"``."""
        g = self.grid
        return ";".join(",".join(f"{v:g}" for v in row) for row in g)

    @property
    def channels(self) -> list:
        """Channel names of the Stokes result: ``["L"]`` or ``["R", "G", "B"]``."""
        return ["L"] if self.colour is None else ["R", "G", "B"]

    def describe(self) -> str:
        return self.text + ("" if self.colour is None else f" in {self.colour} colour cells")


def parse_mosaic(text, colour=None) -> MosaicLayout:
    """Parse and validate a mosaic description.

    Parameters
    ----------
    text : str or array_like
        ``"a,b;c,d"`` (degrees, rows separated by ``;``), or a 2x2 array of angles.
    colour : str, optional
        Bayer order of the cells (``RGGB``, ``BGGR``, ``GRBG``, ``GBRG``), case-insensitive.

    Returns
    -------
    MosaicLayout

    Raises
    ------
    InputError
        Not four finite angles in two rows of two, angles not distinct modulo 180 degrees,
        or an unknown Bayer order.

    Examples
    --------
    >>> parse_mosaic("90,45;135,0").angles_deg
    (90.0, 45.0, 135.0, 0.0)
    """
    if isinstance(text, MosaicLayout):
        return text if colour is None else MosaicLayout(text.angles_deg, _parse_colour(colour))
    if isinstance(text, str):
        rows = [r.strip() for r in text.strip().split(";")]
        try:
            grid = [[float(v) for v in r.split(",")] for r in rows]
        except ValueError:
            raise InputError(
                f"mosaic {text!r} is not a list of numbers; give two rows of two angles in degrees, {_EXAMPLE}"
            ) from None
        if len(grid) != 2 or any(len(r) != 2 for r in grid):
            raise InputError(
                f"mosaic {text!r} is not a 2x2 cell; give two rows of two angles separated by ';', {_EXAMPLE}"
            )
        arr = np.asarray(grid, dtype=np.float64)
    else:
        arr = np.asarray(text, dtype=np.float64)
        if arr.shape != (2, 2):
            raise InputError(f"mosaic {text!r} is not a 2x2 cell of angles; {_EXAMPLE}")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"mosaic {text!r} has non-finite angles; {_EXAMPLE}")
    if distinct_orientations(arr).size != 4:
        raise InputError(
            f"mosaic {text!r} does not hold four distinct orientations (modulo 180 deg); "
            f"give the four micro-polarizer angles of the 2x2 cell, {_EXAMPLE}"
        )
    return MosaicLayout(tuple(float(v) for v in arr.ravel()), _parse_colour(colour))


def _parse_colour(colour):
    if colour is None or colour == "":
        return None
    c = str(colour).strip().upper()
    if c not in BAYER_ORDERS:
        raise InputError(
            f"mosaic colour {colour!r} is not a Bayer order; give one of {', '.join(BAYER_ORDERS)}"
        )
    return c


def bayer_cell_colours(order: str) -> np.ndarray:
    """Colour index (0 = R, 1 = G, 2 = B) of each cell of a 2x2 block of cells."""
    lut = {"R": 0, "G": 1, "B": 2}
    return np.array([lut[ch] for ch in order]).reshape(2, 2)


def check_frame_shape(shape, layout: MosaicLayout, source="frame") -> None:
    """Raise :class:`InputError` unless the frame's height and width are multiples of the cell
    (and at least two cells a side)."""
    if len(shape) != 2:
        raise InputError(
            f"{source} has shape {tuple(shape)}; a mosaic frame must be a single-channel (mono) "
            "image holding the raw sensor values"
        )
    h, w = shape
    c = layout.cell
    kind = "colour mosaic (4x4 pixel pattern)" if layout.colour else "mosaic (2x2 cell)"
    if h % c or w % c:
        raise InputError(
            f"{source} is {w}x{h} pixels, not a multiple of the {c}x{c} {kind}; "
            f"crop it to a multiple of {c} pixels starting at the first cell's top-left pixel"
        )
    if h < 2 * c or w < 2 * c:
        raise InputError(
            f"{source} is {w}x{h} pixels, too small to decode: a {kind} needs at least {2 * c}x{2 * c} pixels "
            "(two patterns a side); give the whole sensor frame"
        )
