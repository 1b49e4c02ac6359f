"""polarsky: calibrated per-pixel polarization from polarizer brackets and polarization cameras."""

from ._version import __version__

__all__ = ["__version__"]
