"""polarsky: calibrated per-pixel polarization from filter brackets and polarization cameras.

The few calls a notebook needs::

    import polarsky
    ds = polarsky.stokes_from_files(frames, angles="0,45,90,135")   # xarray.Dataset
    polarsky.run_stokes(frames, "out/")                              # files, like the CLI
    polarsky.run_advise(frames, region="0,400,1920,1080")            # filter-angle advice

Importing polarsky is cheap and changes no global state of other libraries: the names
below are loaded on first use.
"""

from ._version import __version__
from .errors import InputError, PolarskyWarning

#: public name -> module that defines it (loaded on first access, PEP 562)
_LAZY = {
    "Settings": "polarsky.options.settings",
    "load_bracket": "polarsky.read.bracket",
    "stokes_from_files": "polarsky.tasks.stokes",
    "run_stokes": "polarsky.tasks.stokes",
    "run_advise": "polarsky.tasks.advise",
    "run_sky": "polarsky.tasks.sky",
    "open_stokes": "polarsky.read.stokes_file",
    "best_angle_for_region": "polarsky.advice.angle",
    "best_angle_for_contrast": "polarsky.advice.angle",
}

__all__ = ["__version__", "InputError", "PolarskyWarning", *_LAZY]


def __getattr__(name):
    if name in _LAZY:
        import importlib

        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'polarsky' has no attribute {name!r}")


def __dir__():
    return sorted(__all__)
