"""Invented brackets for tests and benchmarks, rendered from a known Stokes field.

Each frame is ``I(theta) = 1/2 (S0 + S1 cos 2theta + S2 sin 2theta)`` (ideal analyzer,
CONVENTIONS.md) written as a 16-bit linear TIFF (or 8-bit sRGB PNG).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

__all__ = ["stokes_field", "render_frames", "write_bracket"]


def stokes_field(height: int = 32, width: int = 48, *, seed: int = 0, dolp_max: float = 0.6):
    """A smooth invented scene: ``(S0, S1, S2)`` float64 arrays of shape (height, width)."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:height, 0:width].astype(np.float64)
    s0 = 0.35 + 0.25 * (x / max(width - 1, 1)) + 0.05 * rng.random((height, width))
    dolp = dolp_max * (0.3 + 0.7 * y / max(height - 1, 1))
    aolp = np.deg2rad(20.0 + 10.0 * seed + 60.0 * x / max(width - 1, 1))
    return s0, s0 * dolp * np.cos(2 * aolp), s0 * dolp * np.sin(2 * aolp)


def render_frames(s, angles_deg):
    """Intensities (N, H, W) seen through ideal analyzers at ``angles_deg``."""
    s0, s1, s2 = s
    t = np.deg2rad(np.asarray(angles_deg, dtype=np.float64))[:, None, None]
    return 0.5 * (s0 + s1 * np.cos(2 * t) + s2 * np.sin(2 * t))


def write_bracket(folder, stem: str = "scene", *, angles_deg=(0, 45, 90, 135), height: int = 32,
                  width: int = 48, seed: int = 0, fmt: str = "tif", manifest: bool = False):
    """Write one bracket into ``folder``; return the frame paths.

    Files are named ``<stem>_<angle>deg.<fmt>`` (or ``<stem>_<k>.<fmt>`` plus a
    ``manifest.csv`` when ``manifest`` is true).
    """
    import cv2
    import tifffile

    from ..core.transfer import linear_to_srgb

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    frames = render_frames(stokes_field(height, width, seed=seed), angles_deg)
    paths = []
    for k, (a, img) in enumerate(zip(angles_deg, frames)):
        name = f"{stem}_{k}.{fmt}" if manifest else f"{stem}_{a:03g}deg.{fmt}"
        p = folder / name
        if fmt == "tif":
            tifffile.imwrite(p, np.round(np.clip(img, 0, 0.97) * 65535).astype(np.uint16))
        else:
            enc = linear_to_srgb(np.clip(img, 0, 0.97))
            cv2.imwrite(str(p), np.round(enc * 255).astype(np.uint8))
        paths.append(p)
    if manifest:
        lines = ["file,angle_deg"] + [f"{p.name},{a:g}" for p, a in zip(paths, angles_deg)]
        (folder / "manifest.csv").write_text("\n".join(lines) + "\n")
    return paths
