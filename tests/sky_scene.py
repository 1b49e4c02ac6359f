"""An invented clear sky seen from an invented place, rendered from the model (shared by sky tests).

Brackets go through the project's own bracket path (16-bit TIFF frames) like a user's frames;
``products`` gives the numpy Stokes products of a bracket without files.
"""

from __future__ import annotations

import numpy as np

WHEN = "2024-06-21T17:30:00+02:00"
LAT, LON = 47.0, 8.0
ANGLES = (0, 45, 90, 135)
PLACE = dict(when=WHEN, lat=LAT, lon=LON)


def sun():
    from polarsky.options.syntax import parse_when
    from polarsky.sky.sun import sun_position

    return sun_position(parse_when(WHEN), LAT, LON)


def geom(yaw=10.0, pitch=25.0, roll=4.0, lens=None, placement="front"):
    """The camera of the round-trip tests: 64x48 pinhole, 70 deg across, at (yaw, pitch, roll)."""
    from polarsky.geometry import make_lens
    from polarsky.sky.skymap import SkyGeometry

    s = sun()
    lens = lens or make_lens("pinhole", 64, 48, hfov_deg=70)
    return SkyGeometry(lens, yaw, pitch, roll, s["azimuth_deg"], s["elevation_deg"], placement)


def bracket(folder, g, name="b", **kw):
    """Frame paths (str) of a rendered bracket (noise 0.002 unless given)."""
    from polarsky.synthetic.sky import render_sky_bracket, write_tiff_bracket

    kw.setdefault("noise_sigma", 0.002)
    frames = render_sky_bracket(g, ANGLES, **kw)
    return [str(p) for p in write_tiff_bracket(folder / name, frames, ANGLES)]


def products(g, **kw):
    """numpy Stokes products (as polarsky.read.stokes_file.read_stokes gives) of a rendered bracket."""
    from polarsky.core.stokes import analysis_matrix, dolp_aolp, fit_stokes
    from polarsky.synthetic.sky import render_sky_bracket

    frames = render_sky_bracket(g, ANGLES, **kw)
    s = fit_stokes(frames, analysis_matrix(ANGLES))
    d, a = dolp_aolp(s)
    return {"S": s, "dolp": d, "aolp": a, "valid": np.isfinite(d), "channels": ["L"], "attrs": {}}
