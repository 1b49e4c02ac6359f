"""The one colour code of every picture, the report and the workbench.

Each concept has one colour, wherever it is drawn: a reader who has learnt that the
recommended filter axis is magenta in one picture finds it magenta everywhere.  The
values are hex sRGB strings; ``rgb(name)`` gives floats in [0, 1].
"""

from __future__ import annotations

__all__ = ["COLOURS", "rgb", "AXIS_LABEL_X", "AXIS_LABEL_Y", "INVALID_NOTE", "CHECKER_GREYS"]

#: concept -> colour (see docs/glossary.md).
COLOURS = {
    "recommended_axis": "#e8368f",   # the filter's recommended transmission axis
    "region": "#ff9f1c",             # the region to darken
    "protect": "#2ec4b6",            # the protected region (kept visible)
    "sun": "#ffd21f",                # the sun (disk and masked aureole)
    "antisun": "#7fd4ff",            # the antisolar point
    "band_90": "#ffffff",            # the band 90 degrees from the sun (drawn dashed, outlined black)
    "feature": "#c8b6ff",            # halo and rainbow rings
    "outline": "#000000",            # outlines that keep marks readable on any background
    "text_muted": "#5b6166",
    # planning pictures (polarsky plan)
    "sky_tone": "#8fb8de",           # the sky as rendered through the filter (scaled by its transmission)
    "prediction": "#3d5a80",         # a predicted curve for an ideal filter (mean darkening, reduction)
    "prediction_real": "#e07a5f",    # the same for the filter's extinction ratio
    "spread": "#98c1d9",             # the range (min..max) of a prediction over the frame
    "s_polarized": "#1d3557",        # s-polarized reflectance Rs
    "p_polarized": "#a8a29e",        # p-polarized reflectance Rp
    "brewster": "#6a4c93",           # Brewster's angle
    "current": "#d62828",            # the planned value (incidence, time, heading) and the chosen optimum
}

#: Invalid pixels (saturated, black, defective, outside the aligned frames, not sky) are a
#: grey checkerboard of these two levels in every picture.
CHECKER_GREYS = (0.55, 0.75)

AXIS_LABEL_X = "x (px)"
AXIS_LABEL_Y = "y (px)"
INVALID_NOTE = "checkered = not valid (saturated, black, defective, outside the aligned frames)"


def rgb(name: str) -> tuple:
    """Colour of ``name`` as an (r, g, b) tuple of floats in [0, 1].

    >>> rgb("outline")
    (0.0, 0.0, 0.0)
    """
    h = COLOURS[name].lstrip("#")
    return tuple(int(h[i:i + 2], 16) / 255.0 for i in (0, 2, 4))
