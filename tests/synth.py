"""Synthetic test brackets (invented scenes with known Stokes maps, rendered here)."""

from __future__ import annotations

from pathlib import Path

import numpy as np


def smooth_scene(h=48, w=64, *, channels=1, seed=0):
    """Known Stokes maps (3, C, h, w): textured S0, DoLP and AoLP varying smoothly."""
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float64)
    s0 = 0.5 + 0.15 * np.sin(xx / 5.0) * np.cos(yy / 7.0) + 0.05 * rng.random((h, w))
    dolp = 0.1 + 0.6 * xx / w
    aolp = np.radians(20 + 120 * yy / h)
    s = np.stack([s0, s0 * dolp * np.cos(2 * aolp), s0 * dolp * np.sin(2 * aolp)])
    return np.repeat(s[:, None], channels, axis=1)


def render_frames(s, angles_deg, *, diattenuation=1.0, noise=0.0, seed=1):
    """I(theta) = 1/2 (S0 + D (S1 cos 2theta + S2 sin 2theta)) per CONVENTIONS.md, (N, C, h, w)."""
    rng = np.random.default_rng(seed)
    out = []
    for a in angles_deg:
        t = np.radians(a)
        i = 0.5 * (s[0] + diattenuation * (s[1] * np.cos(2 * t) + s[2] * np.sin(2 * t)))
        if noise:
            i = i + rng.normal(0, noise, i.shape)
        out.append(i)
    return np.stack(out)


def _name(folder, stem, angle, ext):
    return Path(folder) / f"{stem}_{int(round(angle)):03d}deg.{ext}"


def write_pngs(folder, frames, angles_deg, *, bits=16, stem="scene", srgb=False):
    import cv2

    from polarsky.core.transfer import linear_to_srgb

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    fs = 255 if bits == 8 else 65535
    for f, a in zip(frames, angles_deg):
        v = linear_to_srgb(np.clip(f, 0, 1)) if srgb else np.clip(f, 0, 1)
        arr = np.round(v * fs).astype(np.uint8 if bits == 8 else np.uint16)
        img = arr[0] if arr.shape[0] == 1 else np.moveaxis(arr, 0, -1)[..., ::-1]
        p = _name(folder, stem, a, "png")
        cv2.imwrite(str(p), img)
        paths.append(p)
    return paths


def write_tiffs(folder, frames, angles_deg, *, stem="scene"):
    import tifffile

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for f, a in zip(frames, angles_deg):
        arr = np.round(np.clip(f, 0, 1) * 65535).astype(np.uint16)
        img = arr[0] if arr.shape[0] == 1 else np.moveaxis(arr, 0, -1)
        p = _name(folder, stem, a, "tif")
        tifffile.imwrite(p, img)
        paths.append(p)
    return paths


def write_bayer_dng(path, cfa_values, *, black=512, white=16383):
    """A minimal Bayer DNG (RGGB) that LibRaw reads; ``cfa_values`` uint16 (H, W)."""
    import tifffile

    tifffile.imwrite(
        path,
        np.asarray(cfa_values, dtype=np.uint16),
        photometric="cfa",
        extratags=[
            (33421, "H", 2, (2, 2)),          # CFARepeatPatternDim
            (33422, "B", 4, (0, 1, 1, 2)),    # CFAPattern: R G / G B
            (50706, "B", 4, (1, 4, 0, 0)),    # DNGVersion 1.4
            (50714, "H", 1, black),           # BlackLevel
            (50717, "H", 1, white),           # WhiteLevel
        ],
    )
    return Path(path)
