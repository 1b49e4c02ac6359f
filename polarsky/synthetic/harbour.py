"""The demo's invented harbour-inspection scene with known polarization.

Scene (made up, rendered by our own code): "Kestrel Reach", a small invented harbour.  An
inspector photographs a submerged mooring plate through the water surface.  The upper part
of the frame is sky and a quay wall; the lower part is water whose surface reflects the
bright sky (Fresnel reflection, strongly polarized with the E-vector along the surface, here
tilted by the camera's roll) over light coming up from the plate (weakly polarized the other
way).  The bracket is four 8-bit sRGB PNG frames through an ideal filter at 0/45/90/135
degrees, with hand-held shake between frames and camera noise.  The true Stokes maps are
known, so the recommended filter angle can be compared with the truth.

A second bracket looks at the evening sky over the same invented site: it is rendered from
the single-scattering model for the sun's position at that time and place, and the demo
recovers the camera's heading from the sky pattern, starting from a compass reading that
is 12 degrees off.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..core.fresnel import fresnel_reflectance, reflection_stokes
from ..core.stokes import intensity_at
from ..core.transfer import linear_to_srgb

__all__ = ["DemoScene", "render_scene", "write_bracket", "write_sky_bracket", "WATER_BOX", "PLATE_BOX",
           "water_incidence_deg"]

WIDTH, HEIGHT = 480, 320
HORIZON_ROW = 118
WATER_BOX = (20, 150, 460, 310)   # x0, y0, x1, y1: the water the inspector wants dark
PLATE_BOX = (170, 200, 310, 280)  # the submerged plate to keep visible
CAMERA_ROLL_DEG = 8.0             # horizon tilted counter-clockwise in the image
ANGLES_DEG = (0.0, 45.0, 90.0, 135.0)
SHAKE_PX = ((0.0, 0.0), (1.3, -0.7), (-0.8, 0.9), (0.4, 1.6))  # (dx, dy) of each frame


@dataclass
class DemoScene:
    stokes: np.ndarray          # (3, C, H, W) float64 truth, linear, 0..1 scale
    region_box: tuple
    protect_box: tuple
    angles_deg: tuple
    shifts_px: tuple
    roll_deg: float

    def truth(self) -> dict:
        from ..advice.angle import best_angle_for_contrast, best_angle_for_region

        def summed(box):
            x0, y0, x1, y1 = box
            return self.stokes[:, :, y0:y1, x0:x1].sum(axis=(1, 2, 3))

        region = best_angle_for_region(summed(self.region_box))
        contrast = best_angle_for_contrast(summed(self.protect_box), summed(self.region_box))
        return {"region": region, "contrast": contrast}


def _rows_below_horizon(yy, xx):
    """Rows measured perpendicular to the tilted horizon (negative above it)."""
    roll = np.radians(CAMERA_ROLL_DEG)
    return (yy - HORIZON_ROW) * np.cos(roll) + (xx - (WIDTH - 1) / 2) * np.sin(roll)


def _incidence_deg(v):
    """Angle of incidence on the water (82 deg at the horizon to 50 deg at the bottom)."""
    return 82.0 - 32.0 * np.clip(v / (HEIGHT - HORIZON_ROW), 0, 1)


def water_incidence_deg() -> float:
    """Mean angle of incidence on the water inside WATER_BOX (the region whose glare is planned)."""
    x0, y0, x1, y1 = WATER_BOX
    yy, xx = np.mgrid[y0:y1, x0:x1].astype(np.float64)
    return round(float(np.mean(_incidence_deg(_rows_below_horizon(yy, xx)))), 1)


def render_scene(seed: int = 7) -> DemoScene:
    """Render the true Stokes maps (3, 3, H, W) of the invented harbour scene."""
    rng = np.random.default_rng(seed)
    h, w = HEIGHT, WIDTH
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float64)
    v = _rows_below_horizon(yy, xx)
    colour_sky = np.array([0.55, 0.72, 1.0])
    colour_wall = np.array([0.62, 0.42, 0.3])
    colour_plate = np.array([0.95, 0.7, 0.2])
    s = np.zeros((3, 3, h, w))
    # sky: bright, smoothly polarized (E-vector nearly vertical in the image here)
    sky_i = 0.45 + 0.2 * np.clip(-v / h, 0, 1)
    sky_dolp = 0.25 + 0.2 * (xx / w)
    sky_aolp = np.radians(96.0 + 10 * (xx / w - 0.5))
    sky = np.stack([sky_i, sky_i * sky_dolp * np.cos(2 * sky_aolp), sky_i * sky_dolp * np.sin(2 * sky_aolp)])
    is_sky = v < -30
    # quay wall: unpolarized, textured blocks between sky and water
    is_wall = (v >= -30) & (v < 0)
    course = np.floor((v + 30) / 10)
    joint = (((xx + 11 * (course % 2)) % 22) < 1.5) | (((v + 30) % 10) < 1.2)
    bricks = np.where(joint, 0.09, 0.2 + 0.03 * np.sin(3.1 * course + np.floor((xx + 11 * (course % 2)) / 22)))
    bricks = bricks + 0.01 * rng.standard_normal((h, w))
    # water: sky reflected by Fresnel (incidence from about 82 deg at the horizon to 50 deg
    # at the bottom), plus light from below carrying the plate
    is_water = v >= 0
    incidence = _incidence_deg(v)
    ripple = 1.5 * np.sin(xx / 9.0 + 0.7 * np.sin(yy / 5.0)) + 0.8 * np.sin(yy / 3.1)
    s_axis = CAMERA_ROLL_DEG + ripple  # the s direction lies along the (tilted) surface
    sky_seen = np.stack([0.9 * np.ones((h, w)), 0.2 * np.ones((h, w)) * np.cos(np.radians(200)),
                         0.2 * np.ones((h, w)) * np.sin(np.radians(200))])
    refl = reflection_stokes(sky_seen, incidence + 0.8 * ripple, s_axis)
    plate = ((xx >= PLATE_BOX[0] + 6) & (xx < PLATE_BOX[2] - 6) & (yy >= PLATE_BOX[1] + 6) & (yy < PLATE_BOX[3] - 6))
    stripes = ((np.floor((xx - PLATE_BOX[0]) / 12) % 2) == 0) & plate
    under = 0.04 + 0.22 * plate + 0.12 * stripes
    rs, rp = fresnel_reflectance(incidence)
    t_mean = 1 - 0.5 * (rs + rp)
    under_dolp = 0.5 * (rs - rp) / t_mean * 0.6  # transmitted light: weak, perpendicular to the reflection
    u_axis = np.radians(s_axis + 90.0)
    for c in range(3):
        s[0, c][is_sky] = (sky[0] * colour_sky[c])[is_sky]
        s[1, c][is_sky] = (sky[1] * colour_sky[c])[is_sky]
        s[2, c][is_sky] = (sky[2] * colour_sky[c])[is_sky]
        s[0, c][is_wall] = (bricks * colour_wall[c] / 0.5)[is_wall]
        tint = colour_plate[c] if c < 3 else 1
        under_c = under * np.where(plate, tint, np.array([0.3, 0.6, 0.55])[c]) * t_mean
        water_s0 = 2.2 * refl[0] * colour_sky[c] + under_c
        water_s1 = 2.2 * refl[1] * colour_sky[c] + under_c * under_dolp * np.cos(2 * u_axis)
        water_s2 = 2.2 * refl[2] * colour_sky[c] + under_c * under_dolp * np.sin(2 * u_axis)
        s[0, c][is_water] = water_s0[is_water]
        s[1, c][is_water] = water_s1[is_water]
        s[2, c][is_water] = water_s2[is_water]
    # a bright specular glint that saturates (it must be masked, not used)
    glint = (xx - 400) ** 2 + (yy - 170) ** 2 < 16
    s[0][:, glint] = 3.0
    return DemoScene(stokes=s, region_box=WATER_BOX, protect_box=PLATE_BOX, angles_deg=ANGLES_DEG,
                     shifts_px=SHAKE_PX, roll_deg=CAMERA_ROLL_DEG)


def write_bracket(scene: DemoScene, folder, *, seed: int = 11, stem: str = "kestrel") -> list[Path]:
    """Render the frames through the analyzer, shake, add noise, write 8-bit sRGB PNGs."""
    import cv2

    rng = np.random.default_rng(seed)
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    h, w = scene.stokes.shape[2:]
    for angle, (dx, dy) in zip(scene.angles_deg, scene.shifts_px):
        lin = intensity_at(scene.stokes, angle)  # (C, H, W)
        m = np.float32([[1, 0, -dx], [0, 1, -dy]])  # frame content moves by (dx, dy)
        shaken = np.stack([cv2.warpAffine(lin[c].astype(np.float32), m, (w, h), flags=cv2.INTER_LINEAR | cv2.WARP_INVERSE_MAP,
                                          borderMode=cv2.BORDER_REFLECT) for c in range(lin.shape[0])])
        noisy = shaken + rng.normal(0, 1, shaken.shape) * np.sqrt(np.clip(shaken, 0, None) / 20000.0 + 1e-6)
        enc = linear_to_srgb(np.clip(noisy, 0, 1))
        img8 = np.round(enc * 255).astype(np.uint8)
        path = folder / f"{stem}_{int(round(angle)):03d}deg.png"
        cv2.imwrite(str(path), np.moveaxis(img8, 0, -1)[..., ::-1])
        paths.append(path)
    return paths


# The sky part of the demo: an evening look east-north-east over the same invented harbour.
SKY_WHEN = "2026-06-21T19:10:00+02:00"
SKY_LAT, SKY_LON, SKY_ALT_M = 46.37, 9.84, 420.0   # invented site coordinates
SKY_CAMERA = {"yaw_deg": 72.0, "pitch_deg": 28.0, "roll_deg": 2.5, "hfov_deg": 70.0}
SKY_SIZE = (240, 320)
SKY_DOLP_MAX = 0.72
SKY_YAW_GUESS_DEG = 60.0   # the inspector's compass reading, 12 deg off


def write_sky_bracket(folder, *, seed: int = 5) -> list[Path]:
    """Render the clear-sky bracket of the demo (model sky, noise) as 16-bit TIFFs."""
    from ..geometry import make_lens
    from ..options.syntax import parse_when
    from ..sky.skymap import SkyGeometry
    from ..sky.sun import sun_position
    from .sky import render_sky_bracket, write_tiff_bracket

    h, w = SKY_SIZE
    sun = sun_position(parse_when(SKY_WHEN), SKY_LAT, SKY_LON, altitude_m=SKY_ALT_M)
    geom = SkyGeometry(make_lens("pinhole", w, h, hfov_deg=SKY_CAMERA["hfov_deg"]), SKY_CAMERA["yaw_deg"],
                       SKY_CAMERA["pitch_deg"], SKY_CAMERA["roll_deg"], sun["azimuth_deg"], sun["elevation_deg"], "front")
    frames = render_sky_bracket(geom, ANGLES_DEG, dolp_max=SKY_DOLP_MAX, noise_sigma=0.002, seed=seed)
    return write_tiff_bracket(folder, frames, [int(a) for a in ANGLES_DEG], stem="kestrel_sky")
