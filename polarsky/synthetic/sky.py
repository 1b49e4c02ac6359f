"""Invented clear-sky brackets rendered from the model (for tests, benchmarks and demos).

The intensities follow the project's analyzer model
``I(theta) = 1/2 (S0 + S1 cos 2theta + S2 sin 2theta)`` with the sky's Stokes vector taken
from the single-scattering model at a known orientation; the ground below the horizon is
dark and unpolarized.  ``analyzer_offset_deg`` turns the true analyzer axes away from the
nominal angles (what a sky calibration must find).
"""

from __future__ import annotations

import numpy as np

from ..sky.models import get_model
from ..sky.skymap import SkyGeometry, model_maps

__all__ = ["render_sky_stokes", "render_sky_bracket", "write_tiff_bracket"]


def render_sky_stokes(geom: SkyGeometry, *, dolp_max: float = 0.75, model: str = "rayleigh",
                      ground_level: float = 0.03, dtype=np.float32):
    """Model S0, S1, S2 (3, h, w) of a clear sky seen by ``geom`` (invented brightness)."""
    m = model_maps(geom, get_model(model), dolp_max, dtype=np.float64,
                   want=("dolp", "aolp", "scattering_angle", "elevation", "inside", "up"))
    el = np.nan_to_num(m["elevation"], nan=-10.0)
    gam = np.nan_to_num(m["scattering_angle"], nan=90.0)
    # a smooth invented sky brightness: brighter toward the horizon and toward the sun
    s0 = 0.25 + 0.15 * np.exp(-np.clip(el, 0, 90) / 25.0) + 0.2 * np.exp(-gam / 20.0)
    p = np.nan_to_num(m["dolp"])
    psi = np.deg2rad(np.nan_to_num(m["aolp"]))
    sky = m["up"]
    s0 = np.where(sky, s0, ground_level)
    p = np.where(sky, p, 0.0)
    s0 = np.where(m["inside"], s0, ground_level * 0.5)  # lens barrel outside a fisheye circle: dim
    s = np.stack([s0, s0 * p * np.cos(2 * psi), s0 * p * np.sin(2 * psi)])
    return s.astype(dtype)


def render_sky_bracket(geom: SkyGeometry, angles_deg=(0, 45, 90, 135), *, dolp_max: float = 0.75,
                       analyzer_offset_deg: float = 0.0, diattenuation: float = 1.0, noise_sigma: float = 0.0,
                       seed: int = 0, channels: int = 1, clouds=None, dtype=np.float32):
    """Intensity frames (N, C, h, w) of the sky through analyzers at ``angles_deg`` (+ offset).

    ``I = 1/2 (S0 + D (S1 cos 2theta + S2 sin 2theta))`` with ``theta`` the nominal angle plus
    ``analyzer_offset_deg`` and ``D`` the analyzer diattenuation.  ``clouds`` (bool (h, w))
    marks pixels replaced by bright unpolarized cloud.
    """
    s = render_sky_stokes(geom, dolp_max=dolp_max, dtype=np.float64)
    if clouds is not None:
        s[0] = np.where(clouds, 0.8, s[0])
        s[1] = np.where(clouds, 0.0, s[1])
        s[2] = np.where(clouds, 0.0, s[2])
    th = np.deg2rad(np.asarray(angles_deg, dtype=np.float64) + analyzer_offset_deg)
    d = float(diattenuation)
    i = 0.5 * (s[0][None] + d * (s[1][None] * np.cos(2 * th)[:, None, None] + s[2][None] * np.sin(2 * th)[:, None, None]))
    i = np.repeat(i[:, None], channels, axis=1)
    if noise_sigma > 0:
        i = i + np.random.default_rng(seed).normal(0.0, noise_sigma, i.shape)
    return i.astype(dtype)


def write_tiff_bracket(folder, intensities, angles_deg, *, stem: str = "sky") -> list:
    """Write frames (N, C, h, w) in [0, 1] as 16-bit linear TIFFs named ``<stem>_<angle>deg.tif``."""
    import tifffile
    from pathlib import Path

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for k, a in enumerate(angles_deg):
        img = np.clip(np.asarray(intensities[k]) * 65535.0 + 0.5, 1, 65535 * 0.97).astype(np.uint16)
        img = img[0] if img.shape[0] == 1 else np.moveaxis(img, 0, -1)
        p = folder / f"{stem}_{a:03g}deg.tif"
        tifffile.imwrite(p, img)
        paths.append(p)
    return paths
