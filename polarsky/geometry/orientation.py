"""Camera orientation (yaw, pitch, roll) and ENU directions.

The orientation is defined by three turns of a camera that starts level and looks north
(image x toward east, image y down):

1. turn by ``yaw_deg`` clockwise about the vertical, seen from above (yaw = azimuth of the
   optical axis);
2. tilt up by ``pitch_deg`` about the camera's own x axis (pitch = elevation of the axis);
3. roll by ``roll_deg`` about the camera's own optical axis, clockwise as seen by the
   photographer behind the camera (the horizon then tilts counter-clockwise in the image).

``camera_to_world(yaw, pitch, roll) @ v_cam`` gives the ENU components of a camera-frame
vector.  Azimuths are clockwise from true north, elevations above the horizon.
"""

from __future__ import annotations

import numpy as np

__all__ = ["camera_to_world", "enu_from_az_el", "az_el_from_enu", "rot_x", "rot_z"]

#: Camera axes of the level, north-looking start pose, as ENU columns (x->E, y->down, z->N).
_START = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0], [0.0, -1.0, 0.0]])


def rot_x(angle_rad: float) -> np.ndarray:
    """Right-handed rotation matrix about the x axis."""
    c, s = np.cos(angle_rad), np.sin(angle_rad)
    return np.array([[1.0, 0.0, 0.0], [0.0, c, -s], [0.0, s, c]])


def rot_z(angle_rad: float) -> np.ndarray:
    """Right-handed rotation matrix about the z axis."""
    c, s = np.cos(angle_rad), np.sin(angle_rad)
    return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])


def camera_to_world(yaw_deg: float, pitch_deg: float, roll_deg: float) -> np.ndarray:
    """Rotation matrix taking camera-frame vectors to ENU.

    Parameters
    ----------
    yaw_deg, pitch_deg, roll_deg : float
        Orientation in degrees (see the module docstring).

    Returns
    -------
    ndarray, shape (3, 3)
        Columns are the camera x, y, z axes in ENU.

    Examples
    --------
    >>> r = camera_to_world(90, 0, 0)   # looking east: optical axis = east
    >>> r[:, 2].round(12).tolist()
    [1.0, 0.0, 0.0]
    """
    yaw, pitch, roll = np.deg2rad([yaw_deg, pitch_deg, roll_deg])
    # yaw clockwise from above is a negative turn about up; pitch and roll are intrinsic.
    return rot_z(-yaw) @ _START @ rot_x(pitch) @ rot_z(roll)


def enu_from_az_el(azimuth_deg, elevation_deg) -> np.ndarray:
    """Unit ENU vector(s), shape (3, ...), for azimuth (from north, clockwise) and elevation."""
    az = np.deg2rad(np.asarray(azimuth_deg, dtype=np.float64))
    el = np.deg2rad(np.asarray(elevation_deg, dtype=np.float64))
    return np.stack([np.cos(el) * np.sin(az), np.cos(el) * np.cos(az), np.sin(el)])


def az_el_from_enu(v) -> tuple[np.ndarray, np.ndarray]:
    """Azimuth in [0, 360) and elevation (degrees) of ENU vector(s) ``v`` (3, ...)."""
    v = np.asarray(v, dtype=np.float64)
    az = np.rad2deg(np.arctan2(v[0], v[1])) % 360.0
    el = np.rad2deg(np.arctan2(v[2], np.hypot(v[0], v[1])))
    return az, el
