"""The project's conventions in one place: radiometry limits, the angle convention, the data model.

Every reader, estimator and writer takes these values from here (see ``docs/glossary.md``
and the project's design conventions); nothing else writes them down.
"""

from __future__ import annotations

__all__ = [
    "SATURATION_FRACTION",
    "DEFAULT_MAX_PIXELS",
    "TRANSFERS",
    "SRGB_NOTE",
    "ANGLE_CONVENTION",
    "ANGLE_HELP",
    "VARIABLES",
    "PLACEMENTS",
    "SUN_CAUTION",
    "FIELD_CAUTION",
]

#: Fraction of full scale at and above which a pixel counts as saturated (not valid).
SATURATION_FRACTION = 0.98
#: Largest frame (pixels) read unless the caller raises the limit (``--max-pixels``).
DEFAULT_MAX_PIXELS = 250_000_000
#: Accepted values of the ``transfer`` setting: ``auto`` = 8-bit sRGB, deeper data linear.
TRANSFERS = ("auto", "linear", "srgb")
#: The note said whenever 8-bit frames are linearized by the assumed sRGB curve.
SRGB_NOTE = ("8-bit frames were linearized by the assumed sRGB curve; a camera's own tone curve can bias DoLP "
             "(measure it with 'polarsky calibrate response' and give --response)")
#: Where the analyzers sit: a filter in front of the lens, or micro-polarizers on the sensor.
PLACEMENTS = ("front", "sensor")

ANGLE_CONVENTION = (
    "angles in degrees in the image plane, from the image +x axis (increasing column) "
    "counter-clockwise as seen on the displayed image (toward row 0); AoLP in [0, 180); "
    "angles are in the frame of the input analyzer angles"
)
ANGLE_HELP = ("Angles are degrees counter-clockwise from the image's +x axis as displayed. If you give "
              "filter-ring readings instead of absolute angles, results are ring readings on the same scale.")

#: name -> (units, long_name) of every per-pixel variable of a Stokes result.
VARIABLES = {
    "S0": ("1", "Stokes S0: total intensity, linear units of the input scale (1 = full scale)"),
    "S1": ("1", "Stokes S1: horizontal minus vertical linear polarization, input scale"),
    "S2": ("1", "Stokes S2: +45 minus -45 deg linear polarization, input scale"),
    "dolp": ("1", "degree of linear polarization (biased upward by noise)"),
    "dolp_unbiased": ("1", "degree of linear polarization, bias-corrected (MAS estimator, Plaszczynski et al. 2014)"),
    "aolp": ("degree", "angle of linear polarization, [0, 180), image convention"),
    "sigma_dolp": ("1", "standard uncertainty of dolp"),
    "sigma_aolp": ("degree", "standard uncertainty of aolp"),
    "residual": ("1", "RMS least-squares residual of the analyzer intensities about the fitted model, input scale"),
    "valid": ("1", "pixel is valid: not saturated or black in any frame, inside every aligned frame"),
}

SUN_CAUTION = ("Safety: never look at the sun through a viewfinder, lens, binoculars or a filter, and do not "
               "leave a camera or sensor aimed at the sun; follow local safety rules and your equipment's "
               "instructions")
FIELD_CAUTION = ("Safety: never look at the sun through a viewfinder or lens, and do not leave a sensor pointed at it; "
                 "inspection work near water or at height follows local codes and licensed practice.")
