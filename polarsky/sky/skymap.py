"""Per-pixel sky geometry and model maps for a camera of known lens and orientation.

Everything is computed in the camera frame: the rays of the lens are fixed, and the
orientation only turns the sun and the zenith into camera coordinates.  Maps are built in
blocks of rows (float32 by default) to stay in cache.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..geometry.camera import Lens
from ..geometry.orientation import camera_to_world, enu_from_az_el
from ..geometry.polarizer import image_direction_from_evector

__all__ = ["SkyGeometry", "model_maps", "model_at_rays", "BLOCK_PIXELS"]

#: Pixels per block of rows when building full-frame maps.
BLOCK_PIXELS = 1 << 16


@dataclass
class SkyGeometry:
    """Lens, orientation (degrees), sun position (degrees) and polarizer placement."""

    lens: Lens
    yaw_deg: float
    pitch_deg: float
    roll_deg: float
    sun_azimuth_deg: float
    sun_elevation_deg: float
    placement: str = "front"

    @property
    def rotation(self) -> np.ndarray:
        """Camera -> ENU rotation."""
        return camera_to_world(self.yaw_deg, self.pitch_deg, self.roll_deg)

    @property
    def sun_enu(self) -> np.ndarray:
        return enu_from_az_el(self.sun_azimuth_deg, self.sun_elevation_deg)

    @property
    def sun_cam(self) -> np.ndarray:
        return self.rotation.T @ self.sun_enu

    @property
    def up_cam(self) -> np.ndarray:
        return self.rotation.T @ np.array([0.0, 0.0, 1.0])

    def with_orientation(self, yaw_deg, pitch_deg, roll_deg) -> "SkyGeometry":
        return SkyGeometry(self.lens, float(yaw_deg), float(pitch_deg), float(roll_deg),
                           self.sun_azimuth_deg, self.sun_elevation_deg, self.placement)


def model_at_rays(model, sun_cam, up_cam, rays, placement, *,
                  want=("shape", "aolp", "scattering_angle", "elevation", "up"), east_north_cam=None):
    """Model quantities for camera-frame ``rays`` (tuple of 3 broadcastable arrays, any length).

    ``want`` selects among ``shape`` (DoLP for dolp_max = 1), ``aolp`` (deg, [0, 180)),
    ``doubled`` (``cos2``, ``sin2`` of the doubled image AoLP), ``scattering_angle`` (deg),
    ``elevation`` (deg), ``azimuth`` (deg from north, clockwise; needs ``east_north_cam``,
    the east and north unit vectors in the camera frame) and ``up`` (bool, above the horizon).

    Returns
    -------
    dict of ndarray
    """
    dt = np.result_type(rays[0], rays[1], rays[2])
    out = {}
    if "shape" in want:
        out["shape"] = model.shape(sun_cam, rays, up=up_cam)
    if "aolp" in want or "doubled" in want:
        e = model.evector(sun_cam, rays, need_z=(placement != "front"), up=up_cam)
        dx, dup = image_direction_from_evector(e, rays, placement)
        if "doubled" in want:
            n2 = dx * dx + dup * dup
            with np.errstate(invalid="ignore", divide="ignore"):
                inv = np.asarray(1.0, dtype=dt) / n2
            out["cos2"] = (dx * dx - dup * dup) * inv
            out["sin2"] = np.asarray(2.0, dtype=dt) * dx * dup * inv
        if "aolp" in want:
            out["aolp"] = _aolp_deg(dx, dup, dt)
    if "up" in want or "elevation" in want:
        u = [dt.type(x) for x in up_cam]
        upd = u[0] * rays[0] + u[1] * rays[1] + u[2] * rays[2]
        out["up"] = upd > 0
    if "scattering_angle" in want or "elevation" in want:
        norm = np.sqrt(rays[0] * rays[0] + rays[1] * rays[1] + rays[2] * rays[2])
        if "scattering_angle" in want:
            s = [dt.type(x) for x in sun_cam]
            cg = (s[0] * rays[0] + s[1] * rays[1] + s[2] * rays[2]) / norm
            out["scattering_angle"] = np.rad2deg(np.arccos(np.clip(cg, -1, 1)))
        if "elevation" in want:
            out["elevation"] = np.rad2deg(np.arcsin(np.clip(upd / norm, -1, 1)))
    if "azimuth" in want:
        e, n = ([dt.type(x) for x in v] for v in east_north_cam)
        east = e[0] * rays[0] + e[1] * rays[1] + e[2] * rays[2]
        north = n[0] * rays[0] + n[1] * rays[1] + n[2] * rays[2]
        az = np.rad2deg(np.arctan2(east, north))
        out["azimuth"] = np.where(az < 0, az + dt.type(360.0), az)
    return out


def _aolp_deg(dx, dup, dt):
    """``atan2(dup, dx)`` folded into [0, 180) degrees.

    The line direction is sign-free, so both components are flipped where ``dup < 0``;
    for broadcast (row x column) inputs the flip costs one pass.
    """
    neg = dup < 0
    if np.ndim(dup) == 2 and np.shape(dup)[0] == 1 and np.shape(dx) != np.shape(dup):
        # column-only dup (pinhole, front): flip via a per-column sign
        sgn = np.where(neg, dt.type(-1), dt.type(1))
        a = np.arctan2(np.abs(dup), dx * sgn)
    else:
        a = np.arctan2(np.where(neg, -dup, dup), np.where(neg, -dx, dx))
    a *= dt.type(180.0 / np.pi)
    a[a >= 180.0] = 0.0
    return a


def model_maps(geom: SkyGeometry, model, dolp_max: float = 1.0, *, dtype=np.float32,
               want=("dolp", "aolp", "scattering_angle", "elevation", "inside", "up"), engine: str = "auto") -> dict:
    """Full-frame model maps (h, w) for ``geom``.

    Parameters
    ----------
    geom : SkyGeometry
    model : sky model from :mod:`polarsky.sky.models`
    dolp_max : float
        Scale of the model DoLP.
    want : tuple of str
        Which maps: ``dolp``, ``aolp`` (deg), ``scattering_angle`` (deg), ``elevation``
        (deg), ``azimuth`` (deg from north, clockwise), ``inside`` (pixel sees the scene),
        ``up`` (above the horizon).
    engine : {"auto", "numpy"}
        ``auto`` uses the compiled kernel of :mod:`polarsky.sky._kernels` for a pinhole
        lens without distortion, the single-scattering model and float32 maps; ``numpy``
        always uses the reference numpy code.

    Returns
    -------
    dict of ndarray
        NaN in the float maps where the pixel sees nothing.
    """
    lens = geom.lens
    h, w = lens.height, lens.width
    sun_cam, up_cam, rot = geom.sun_cam, geom.up_cam, geom.rotation
    from ..geometry.camera import PinholeLens
    from .models import RayleighSingleScattering

    if (engine == "auto" and type(lens) is PinholeLens and not lens.distortion
            and type(model) is RayleighSingleScattering and np.dtype(dtype) == np.float32):
        from ._kernels import pinhole_rayleigh_maps

        return pinhole_rayleigh_maps(h, w, sun_cam=sun_cam, up_cam=up_cam, east_cam=rot.T @ [1.0, 0.0, 0.0],
                                     north_cam=rot.T @ [0.0, 1.0, 0.0], focal_px=lens.focal_px, cx=lens.cx,
                                     cy=lens.cy, dolp_max=dolp_max, placement=geom.placement, want=tuple(want))
    out = {k: np.empty((h, w), dtype=bool if k in ("inside", "up") else dtype) for k in want}
    inner = tuple({"dolp": "shape"}.get(k, k) for k in want if k != "inside")
    step = max(1, BLOCK_PIXELS // max(w, 1))
    dm = np.asarray(dolp_max, dtype=dtype)
    for r0 in range(0, h, step):
        rows = slice(r0, min(h, r0 + step))
        rays, inside = lens.rays(rows, dtype)
        q = model_at_rays(model, sun_cam, up_cam, rays, geom.placement, want=inner,
                          east_north_cam=(rot.T @ [1.0, 0.0, 0.0], rot.T @ [0.0, 1.0, 0.0]))
        full = getattr(lens, "full_frame", False)
        for k in want:
            if k == "inside":
                out[k][rows] = inside
                continue
            src = q["shape"] if k == "dolp" else q[k]
            dst = out[k][rows]
            if k == "dolp":
                np.multiply(src, dm, out=dst)
            else:
                dst[...] = src
            if not full:
                dst[~inside] = False if k == "up" else np.nan
    return out
