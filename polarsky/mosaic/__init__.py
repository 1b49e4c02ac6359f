"""Polarization-mosaic (division-of-focal-plane) cameras: reading, decoding, per-pixel calibration.

Modules: :mod:`.layout` (the 2x2 cell and colour pattern), :mod:`.io` (frames),
:mod:`.methods` (decoding methods and their registry), :mod:`.decode` (channels, colour and
calibration for the Stokes fit), :mod:`.flatcal` (bench calibration), :mod:`.pipeline`
(frames -> Stokes Dataset).
"""

from .methods import DEMOSAIC_METHODS, demosaic
from .layout import MosaicLayout, parse_mosaic
from .pipeline import run_mosaic_stokes, stokes_from_mosaic_files, stokes_from_mosaic_values

__all__ = [
    "DEMOSAIC_METHODS",
    "demosaic",
    "MosaicLayout",
    "parse_mosaic",
    "run_mosaic_stokes",
    "stokes_from_mosaic_files",
    "stokes_from_mosaic_values",
]
