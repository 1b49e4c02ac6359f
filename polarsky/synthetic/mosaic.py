"""Synthetic scenes with known Stokes maps, and their sampling through a mosaic sensor.

Used by the tests, the accuracy table of ``docs/mosaic.md`` and the benchmark.  Scenes are
rendered at full sensor resolution with smooth (anti-aliased) edges; a mosaic frame is then
each pixel's own micro-polarizer sample of the scene at that pixel.
"""

from __future__ import annotations

import numpy as np

from ..mosaic.layout import MosaicLayout, bayer_cell_colours, parse_mosaic

__all__ = ["mosaic_sample", "scene_uniform", "scene_edges", "scene_texture", "scene_gradient",
           "bench_frames", "SCENES", "write_mosaic_png", "write_mosaic_dng"]


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


def write_mosaic_png(path, raw, *, bits=16, full=None, black=0):
    """Write linear mosaic values (0..1 of full scale) as a mono PNG (8 or 16 bit container),
    optionally holding ``full``-bit data (e.g. 12-bit values in a 16-bit PNG) above a black level."""
    import cv2

    full = (2 ** bits - 1) if full is None else full
    counts = np.round(black + np.clip(raw, 0, 1) * (full - black)).astype(np.uint8 if bits == 8 else np.uint16)
    if not cv2.imwrite(str(path), counts):
        raise OSError(f"cannot write {path}")
    return path


def write_mosaic_dng(path, raw, *, white=4095, black=64):
    """Write linear mosaic values as a minimal raw DNG (CFA photometric, 16-bit container)."""
    import tifffile

    counts = np.round(black + np.clip(raw, 0, 1) * (white - black)).astype(np.uint16)
    tags = [
        (33421, "H", 2, (2, 2), True),             # CFARepeatPatternDim
        (33422, "B", 4, (0, 1, 1, 2), True),       # CFAPattern (nominal; the mosaic is given with --mosaic)
        (50706, "B", 4, (1, 4, 0, 0), True),       # DNGVersion
        (50708, "s", 0, "Synthetic mosaic camera", True),
        (50714, "H", 1, (int(black),), True),      # BlackLevel
        (50717, "H", 1, (int(white),), True),      # WhiteLevel
        (50721, "2i", 9, (10000, 10000, 0, 10000, 0, 10000, 0, 10000, 0, 10000,
                          0, 10000, 0, 10000, 0, 10000, 10000, 10000), True),  # ColorMatrix1 = identity
        (50778, "H", 1, (21,), True),              # CalibrationIlluminant1 = D65
    ]
    tifffile.imwrite(str(path), counts, photometric=32803, extratags=tags, subfiletype=0)
    return path
