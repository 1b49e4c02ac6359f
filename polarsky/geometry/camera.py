"""Lens models: pixel <-> viewing ray in the camera frame (x right, y down, z forward).

Models (registry :data:`polarsky.registries.LENS_MODELS`, which also feeds the ``--lens`` choices):

``pinhole``
    Rectilinear (gnomonic) projection ``u = cx + f x/z``, ``v = cy + f y/z`` with optional
    OpenCV distortion coefficients ``k1,k2,p1,p2[,k3[,k4,k5,k6]]`` (Brown-Conrady).
``fisheye-equidistant``
    ``r = f theta`` (theta = angle from the optical axis).
``fisheye-equisolid``
    ``r = 2 f sin(theta / 2)``.

A fisheye's image circle is centred on the principal point with a radius of half the
shorter image side unless given, and spans ``fov_deg``.  Pixel centres are at integer
coordinates; the principal point defaults to ((width-1)/2, (height-1)/2).

References
----------
.. [1] D. C. Brown, "Decentering distortion of lenses", Photogramm. Eng. 32(3), 444-462
   (1966) (the radial/tangential model used by OpenCV).
.. [2] J. Kannala, S. S. Brandt, "A generic camera model and calibration method for
   conventional, wide-angle, and fish-eye lenses", IEEE TPAMI 28(8), 1335-1340 (2006),
   doi:10.1109/TPAMI.2006.153 (equidistant and equisolid projections).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError

__all__ = ["Lens", "PinholeLens", "FisheyeEquidistantLens", "FisheyeEquisolidLens",
           "make_lens", "pixel_grid"]


def pixel_grid(rows: slice, width: int, dtype=np.float32):
    """Column and row coordinates (broadcastable (1, w) and (h, 1)) of a block of rows."""
    u = np.arange(width, dtype=dtype)[None, :]
    v = np.arange(rows.start, rows.stop, dtype=dtype)[:, None]
    return u, v


@dataclass
class Lens:
    """Base class: image size and principal point; subclasses define the projection."""

    width: int
    height: int
    cx: float
    cy: float
    name: str = field(default="", init=False)

    # -- interface -------------------------------------------------------------------------
    def rays_at(self, u, v):
        """Viewing directions for pixel coordinates ``u`` (column), ``v`` (row).

        ``u`` and ``v`` may be broadcastable (e.g. (1, w) and (h, 1)).  Returns
        ``(ray, inside)``: ``ray`` a tuple of the three camera-frame components (arrays that
        broadcast together to the pixel shape, dtype of ``u``, not necessarily unit length),
        ``inside`` bool (pixel shape), False where the pixel sees nothing (outside a
        fisheye's image circle).
        """
        raise NotImplementedError

    def rays(self, rows: slice, dtype=np.float32):
        """Rays of a block of full image rows (see :meth:`rays_at`)."""
        u, v = pixel_grid(rows, self.width, dtype)
        return self.rays_at(u, v)

    def project(self, vec):
        """Pixel coordinates ``(u, v, ok)`` of camera-frame direction(s) ``vec`` (3, ...).

        ``ok`` is False where the direction cannot be imaged (behind a pinhole, outside a
        fisheye's field); ``u, v`` may lie outside the image.
        """
        raise NotImplementedError

    def describe(self) -> dict:
        return {"lens": self.name, "width": self.width, "height": self.height,
                "principal_point_px": [float(self.cx), float(self.cy)]}


@dataclass
class PinholeLens(Lens):
    focal_px: float = 1.0
    distortion: tuple | None = None

    def __post_init__(self):
        self.name = "pinhole"
        self.full_frame = True  # every pixel sees the scene

    def _k(self):
        return np.array([[self.focal_px, 0, self.cx], [0, self.focal_px, self.cy], [0, 0, 1.0]])

    def rays_at(self, u, v):
        u = np.asarray(u)
        v = np.asarray(v)
        dt = u.dtype if u.dtype.kind == "f" else np.dtype(np.float64)
        shape = np.broadcast_shapes(u.shape, v.shape)
        if self.distortion:
            import cv2

            u, v = np.broadcast_arrays(u, v)
            pts = np.stack([u.ravel(), v.ravel()], axis=-1).astype(np.float64)[:, None, :]
            und = cv2.undistortPoints(pts, self._k(), np.asarray(self.distortion, dtype=np.float64))
            x = und[:, 0, 0].reshape(shape).astype(dt)
            y = und[:, 0, 1].reshape(shape).astype(dt)
        else:
            inv = dt.type(1.0 / self.focal_px)
            x = (u - dt.type(self.cx)) * inv
            y = (v - dt.type(self.cy)) * inv
        one = np.ones((1,) * len(shape), dtype=dt)
        return (x, y, one), np.broadcast_to(True, shape)

    def project(self, vec):
        vec = np.asarray(vec, dtype=np.float64)
        ok = vec[2] > 1e-12
        with np.errstate(divide="ignore", invalid="ignore"):
            x = np.where(ok, vec[0] / vec[2], np.nan)
            y = np.where(ok, vec[1] / vec[2], np.nan)
        if self.distortion:
            import cv2

            pts = np.stack([np.ravel(x), np.ravel(y), np.ones(np.size(x))], axis=-1)
            good = np.isfinite(pts).all(axis=1)
            out = np.full((pts.shape[0], 2), np.nan)
            if good.any():
                proj, _ = cv2.projectPoints(pts[good][:, None, :], np.zeros(3), np.zeros(3),
                                            self._k(), np.asarray(self.distortion, dtype=np.float64))
                out[good] = proj[:, 0, :]
            u = out[:, 0].reshape(np.shape(x))
            v = out[:, 1].reshape(np.shape(x))
        else:
            u = self.cx + self.focal_px * x
            v = self.cy + self.focal_px * y
        return u, v, ok

    @property
    def hfov_deg(self) -> float:
        return float(np.rad2deg(2 * np.arctan(self.width / (2 * self.focal_px))))

    def describe(self) -> dict:
        d = super().describe()
        d.update(focal_px=float(self.focal_px), hfov_deg=round(self.hfov_deg, 4),
                 distortion=list(self.distortion) if self.distortion else None)
        return d


@dataclass
class _FisheyeLens(Lens):
    fov_deg: float = 180.0
    circle_cx: float = 0.0
    circle_cy: float = 0.0
    radius_px: float = 1.0

    def _theta_from_r(self, r):
        raise NotImplementedError

    def _r_from_theta(self, theta):
        raise NotImplementedError

    def rays_at(self, u, v):
        u = np.asarray(u)
        v = np.asarray(v)
        dt = u.dtype if u.dtype.kind == "f" else np.dtype(np.float64)
        dx = (u - dt.type(self.circle_cx)).astype(dt, copy=False)
        dy = (v - dt.type(self.circle_cy)).astype(dt, copy=False)
        r = np.hypot(dx, dy)
        theta = self._theta_from_r(r).astype(dt, copy=False)
        inside = r <= self.radius_px + 0.5
        st = np.sin(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            scale = np.where(r > 0, st / r, 0).astype(dt, copy=False)
        ray = (dx * scale, dy * scale, np.cos(theta))
        return ray, inside

    def project(self, vec):
        vec = np.asarray(vec, dtype=np.float64)
        n = np.sqrt((vec ** 2).sum(axis=0))
        theta = np.arccos(np.clip(vec[2] / np.where(n > 0, n, 1), -1, 1))
        phi = np.arctan2(vec[1], vec[0])
        r = self._r_from_theta(theta)
        ok = theta <= np.deg2rad(self.fov_deg) / 2 + 1e-12
        return self.circle_cx + r * np.cos(phi), self.circle_cy + r * np.sin(phi), ok

    def describe(self) -> dict:
        d = super().describe()
        d.update(fov_deg=float(self.fov_deg), circle_center_px=[float(self.circle_cx), float(self.circle_cy)],
                 circle_radius_px=float(self.radius_px))
        return d


@dataclass
class FisheyeEquidistantLens(_FisheyeLens):
    def __post_init__(self):
        self.name = "fisheye-equidistant"
        self.f = self.radius_px / (np.deg2rad(self.fov_deg) / 2)

    def _theta_from_r(self, r):
        return r / self.f

    def _r_from_theta(self, theta):
        return self.f * theta


@dataclass
class FisheyeEquisolidLens(_FisheyeLens):
    def __post_init__(self):
        self.name = "fisheye-equisolid"
        self.f = self.radius_px / (2 * np.sin(np.deg2rad(self.fov_deg) / 4))

    def _theta_from_r(self, r):
        return 2 * np.arcsin(np.clip(r / (2 * self.f), 0, 1))

    def _r_from_theta(self, theta):
        return 2 * self.f * np.sin(theta / 2)


#: Lens models by ``--lens`` name.
def _positive(name, value):
    if value is None:
        return None
    value = float(value)
    if not np.isfinite(value) or value <= 0:
        raise InputError(f"{name} {value:g} must be a positive number")
    return value


def make_lens(name: str, width: int, height: int, *, hfov_deg=None, focal_px=None, focal_mm=None,
              sensor_width_mm=None, distortion=None, fov_deg=None, circle_center_px=None,
              circle_radius_px=None, principal_point_px=None) -> Lens:
    """Build a lens model for an image of ``width`` x ``height`` pixels.

    Parameters
    ----------
    name : str
        One of :data:`polarsky.registries.LENS_MODELS`.
    hfov_deg, focal_px, focal_mm, sensor_width_mm : float, optional
        Pinhole focal length: horizontal field of view (degrees, across the full width),
        focal length in pixels, or focal length in mm with the sensor width in mm (the
        image width is taken to span the sensor width).  First given wins in that order.
    distortion : sequence of float, optional
        OpenCV distortion coefficients ``k1,k2,p1,p2[,k3...]`` (pinhole only).
    fov_deg : float
        Fisheye field of view across the image circle's diameter (degrees).
    circle_center_px : (float, float), optional
        Fisheye image-circle centre (column, row); default the principal point.
    circle_radius_px : float, optional
        Fisheye image-circle radius; default half the shorter image side.
    principal_point_px : (float, float), optional
        Default ((width-1)/2, (height-1)/2).

    Raises
    ------
    InputError
        Unknown lens, missing or non-positive focal/field values.
    """
    from ..registries import LENS_MODELS

    name = LENS_MODELS.key(name)
    cls = LENS_MODELS.get(name)
    cx, cy = ((width - 1) / 2.0, (height - 1) / 2.0) if principal_point_px is None else map(float, principal_point_px)
    if name == "pinhole":
        hfov = _positive("--hfov-deg", hfov_deg)
        if hfov is not None:
            if hfov >= 180:
                raise InputError(f"--hfov-deg {hfov:g} must be below 180 for a pinhole lens; use --lens fisheye-equidistant for wider fields")
            f = width / (2 * np.tan(np.deg2rad(hfov) / 2))
        elif focal_px is not None:
            f = _positive("--focal-px", focal_px)
        elif focal_mm is not None and sensor_width_mm is not None:
            f = _positive("--focal-mm", focal_mm) * width / _positive("--sensor-width-mm", sensor_width_mm)
        else:
            raise InputError("the pinhole lens needs its focal length: give --hfov-deg, --focal-px, "
                             "or --focal-mm (or EXIF FocalLength) with --sensor-width-mm")
        dist = None
        if distortion is not None and len(distortion):
            dist = tuple(float(c) for c in distortion)
            if len(dist) not in (4, 5, 8) or not np.all(np.isfinite(dist)):
                raise InputError(f"--distortion {','.join(map(str, distortion))} must hold 4, 5 or 8 "
                                 "finite OpenCV coefficients k1,k2,p1,p2[,k3[,k4,k5,k6]]")
        return PinholeLens(width, height, cx, cy, focal_px=float(f), distortion=dist)
    if distortion:
        raise InputError("--distortion applies to --lens pinhole only")
    fov = _positive("--fov-deg", fov_deg)
    if fov is None:
        raise InputError(f"--lens {name} needs --fov-deg (the field of view across the image circle)")
    if fov > 360:
        raise InputError(f"--fov-deg {fov:g} is above 360")
    ccx, ccy = (cx, cy) if circle_center_px is None else map(float, circle_center_px)
    radius = _positive("--circle-radius-px", circle_radius_px) or min(width, height) / 2.0
    return cls(width, height, cx, cy, fov_deg=fov, circle_cx=ccx, circle_cy=ccy, radius_px=radius)
