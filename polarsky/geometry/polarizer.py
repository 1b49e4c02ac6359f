"""Where the polarizer sits: how a world E-vector becomes an image AoLP.

``front`` (a filter in front of the lens; default for brackets)
    The image AoLP is the angle of the E-vector's projection on the camera's x/up plane
    (the filter plane), measured from image +x counter-clockwise as displayed.
``sensor`` (micro-polarizers on the sensor; default for mosaic cameras)
    The lens carries the E-vector's meridional and sagittal components (relative to the
    plane through the optical axis and the ray) to the radial and tangential directions of
    the image at that pixel.

On the optical axis both give the same angle; they part off-axis.  All functions take the
E-vector and ray in the camera frame (x right, y down, z forward), any length.
"""

from __future__ import annotations

import numpy as np

__all__ = ["PLACEMENTS", "image_direction_from_evector", "image_aolp_from_evector"]

#: Accepted ``--polarizer`` values.
PLACEMENTS = ("front", "sensor")


def image_direction_from_evector(e, ray, placement: str):
    """Image-plane direction ``(dx, dup)`` (dx to the right, dup toward row 0) of E.

    Parameters
    ----------
    e : ndarray, shape (3, ...)
        E-vector in the camera frame (perpendicular to ``ray``; length free).
    ray : ndarray, shape (3, ...)
        Viewing direction in the camera frame (length free).
    placement : {"front", "sensor"}

    Returns
    -------
    dx, dup : ndarray
        Components of the E direction in the image; the AoLP is ``atan2(dup, dx)``.
    """
    if placement == "front":
        return e[0], -e[1]
    if placement != "sensor":
        raise ValueError(f"placement {placement!r} is not one of {PLACEMENTS}")
    rx, ry, rz = ray[0], ray[1], ray[2]
    rho = np.hypot(rx, ry)
    norm = np.sqrt(rho * rho + rz * rz)
    with np.errstate(divide="ignore", invalid="ignore"):
        axial = rho == 0
        cphi = np.where(axial, 1, rx / rho).astype(rx.dtype, copy=False)
        sphi = np.where(axial, 0, ry / rho).astype(rx.dtype, copy=False)
        ct = rz / norm
        st = rho / norm
    # meridional e_m = (ct cphi, ct sphi, -st), sagittal e_s = (-sphi, cphi, 0)
    a = e[0] * ct * cphi + e[1] * ct * sphi - e[2] * st
    b = -e[0] * sphi + e[1] * cphi
    dx = a * cphi - b * sphi
    dy = a * sphi + b * cphi
    return dx, -dy


def image_aolp_from_evector(e, ray, placement: str):
    """Image AoLP in degrees, [0, 180), of E-vector ``e`` seen along ``ray`` (camera frame)."""
    dx, dup = image_direction_from_evector(e, ray, placement)
    ang = np.rad2deg(np.arctan2(dup, dx))
    return np.mod(ang, 180.0)
