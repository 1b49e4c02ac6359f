"""Synthetic scenes with known Stokes maps, and their sampling through a mosaic sensor.

Used by the tests, the accuracy table of ``docs/mosaic.md`` and the benchmark.  Scenes are
rendered at full sensor resolution with smooth (anti-aliased) edges; a mosaic frame is then
each pixel's own micro-polarizer sample of the scene at that pixel.
"""

from __future__ import annotations

import numpy as np

from .layout import MosaicLayout, bayer_cell_colours, parse_mosaic

__all__ = ["mosaic_sample", "scene_uniform", "scene_edges", "scene_texture", "scene_gradient",
           "bench_frames", "SCENES"]


def _stokes(s0, dolp, aolp_deg):
    th = np.deg2rad(aolp_deg)
    return np.stack([s0, s0 * dolp * np.cos(2 * th), s0 * dolp * np.sin(2 * th)]).astype(np.float64)


def scene_uniform(h, w, *, s0=0.5, dolp=0.3, aolp_deg=30.0):
    """Uniform partially polarized field, (3, h, w)."""
    return _stokes(np.full((h, w), s0), np.full((h, w), dolp), np.full((h, w), aolp_deg))


def _smoothstep(d, width=0.7):
    return 0.5 * (1 + np.tanh(d / width))


def scene_edges(h, w):
    """Unpolarized and polarized regions with sharp (sub-pixel smoothed) straight edges
    at several orientations, on a bright/dark background: the worst case for IFOV error."""
    y, x = np.mgrid[0:h, 0:w].astype(np.float64)
    s0 = 0.15 + 0.6 * _smoothstep(x - 0.37 * w)                         # vertical edge
    s0 = s0 * (0.6 + 0.4 * _smoothstep(y - 0.41 * h))                   # horizontal edge
    disk = _smoothstep(0.22 * min(h, w) - np.hypot(x - 0.68 * w, y - 0.3 * h))
    band = _smoothstep(6 - np.abs((x - 0.2 * w) * 0.6 + (y - 0.75 * h) * 0.8))  # oblique bar
    dolp = 0.05 + 0.55 * disk + 0.35 * band
    aolp = np.where(disk > 0.5, 20.0, 120.0)
    return _stokes(s0, np.clip(dolp, 0, 0.95), aolp)


def scene_texture(h, w, *, seed=3):
    """Fine texture: band-limited random intensity (periods down to ~3 px) under a weak,
    slowly turning polarization."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:h, 0:w].astype(np.float64)
    t = np.zeros((h, w))
    for _ in range(12):
        k = rng.uniform(0.15, 0.35) * 2 * np.pi * np.array([np.cos(a := rng.uniform(0, np.pi)), np.sin(a)])
        t += np.cos(k[0] * x + k[1] * y + rng.uniform(0, 2 * np.pi))
    s0 = 0.4 + 0.25 * t / np.abs(t).max()
    dolp = 0.25 + 0.1 * np.sin(2 * np.pi * x / w)
    aolp = 60 + 40 * np.sin(2 * np.pi * y / h)
    return _stokes(s0, dolp, aolp)


def scene_gradient(h, w):
    """Smooth gradients of intensity, degree and angle (no edges)."""
    y, x = np.mgrid[0:h, 0:w].astype(np.float64)
    s0 = 0.2 + 0.5 * x / w + 0.1 * np.sin(np.pi * y / h)
    dolp = 0.1 + 0.5 * y / h
    aolp = 10 + 150 * (x / w) * (0.5 + 0.5 * y / h)
    return _stokes(s0, dolp, aolp)


SCENES = {"edges": scene_edges, "texture": scene_texture, "gradient": scene_gradient, "uniform": scene_uniform}


def mosaic_sample(stokes, layout, *, angle_deg=None, diattenuation=1.0, gain=1.0, colour_factors=None,
                  dtype=np.float32):
    """Sample a full-resolution Stokes scene through a mosaic sensor.

    Parameters
    ----------
    stokes : ndarray, shape (3, H, W) or (3 colours, 3, H, W)
        Scene (colour scenes: R, G, B Stokes maps).
    layout : MosaicLayout or str
    angle_deg : ndarray (H, W), optional
        Per-pixel transmission-axis angles (default: the nominal layout).
    diattenuation, gain : float or ndarray (H, W)
        Per-pixel diattenuation and gain.

    Returns
    -------
    ndarray, shape (H, W)
        ``gain/2 (S0 + D (S1 cos 2phi + S2 sin 2phi))`` of each pixel's colour.
    """
    layout = parse_mosaic(layout) if not isinstance(layout, MosaicLayout) else layout
    s = np.asarray(stokes, dtype=np.float64)
    h, w = s.shape[-2:]
    if angle_deg is None:
        angle_deg = np.tile(layout.grid, (h // 2, w // 2))
    th = np.deg2rad(angle_deg)
    if s.ndim == 4:
        cc = bayer_cell_colours(layout.colour)
        cmap = np.tile(np.repeat(np.repeat(cc, 2, 0), 2, 1), (h // 4, w // 4))
        s = np.take_along_axis(s, cmap[None, None], axis=0)[0]
    raw = 0.5 * gain * (s[0] + diattenuation * (s[1] * np.cos(2 * th) + s[2] * np.sin(2 * th)))
    return raw.astype(dtype)


def bench_frames(shape, layout, angles_deg, *, angle_deg, diattenuation, gain, level=0.6, noise=0.0,
                 dark=0.0, seed=0):
    """Bench calibration frames: uniform unpolarized light through an ideal reference
    polarizer at ``angles_deg`` (fully polarized light of intensity ``level``), seen by
    pixels with the given angle, diattenuation and gain, plus Gaussian noise and a dark offset."""
    rng = np.random.default_rng(seed)
    frames = []
    for a in angles_deg:
        s = _stokes(np.full(shape, level), np.ones(shape), np.full(shape, float(a)))
        f = mosaic_sample(s, layout, angle_deg=angle_deg, diattenuation=diattenuation, gain=gain, dtype=np.float64)
        frames.append((f + dark + rng.normal(0, noise, shape)).astype(np.float32) if noise else (f + dark).astype(np.float32))
    return frames
