"""polarsky: calibrated per-pixel polarization from polarizer brackets and polarization cameras.

The few calls a notebook needs::

    import polarsky
    ds = polarsky.stokes_from_files(frames, angles_deg=[0, 45, 90, 135])   # xarray.Dataset
    polarsky.run_stokes(frames, "out/")                                     # files, like the CLI
    polarsky.run_advise(frames, region="0,400,1920,1080")                   # filter-angle advice
"""

from ._version import __version__
from .advice import best_angle_for_contrast, best_angle_for_region, run_advise
from .errors import InputError, PolarskyWarning
from .ingest import load_bracket
from .pipeline import run_stokes, stokes_from_bracket, stokes_from_files

__all__ = [
    "__version__",
    "InputError",
    "PolarskyWarning",
    "load_bracket",
    "stokes_from_files",
    "stokes_from_bracket",
    "run_stokes",
    "run_advise",
    "best_angle_for_region",
    "best_angle_for_contrast",
]
